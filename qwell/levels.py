"""Stack-level solving: a stack in, states of every band and transitions out.

This is the Python API behind ``qwell levels``::

    from qwell.stack import load_stack
    from qwell.levels import solve_stack
    sol = solve_stack(load_stack("layers/midir-emitter.yaml"))
    sol.levels["conduction"]["e1"].energy_eV
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace

from . import optics
from .bands import BAND_NAMES
from .errors import ParameterError
from .optics import Transition, depolarisation_shift
from .profile import Profile, band_profile
from .selfconsistent import SelfConsistentResult, solve_self_consistent
from .solvers import METHODS, Levels, solve
from .stack import Stack
from .units import HC_EV_UM

__all__ = ["Solution", "solve_stack", "solve_profile", "BAND_CHOICES", "depolarised_lines",
           "shifted_transitions", "collect_transitions"]

BAND_CHOICES = BAND_NAMES + ("all",)


@dataclass(frozen=True)
class Solution:
    """States and transitions of one stack by one method.

    Attributes
    ----------
    stack : qwell.stack.Stack
    profile : Profile
    method : str
        Solver name (a key of :data:`qwell.solvers.METHODS`).
    levels : Mapping[str, Levels]
        Band name -> :class:`~qwell.solvers.results.Levels`.
    transitions : tuple of qwell.optics.Transition
        Intersubband (conduction) and interband lines, strongest first.
    notes : tuple of str
    self_consistent : qwell.selfconsistent.SelfConsistentResult or None
        The Schrödinger–Poisson result when the profile is self-consistent.
    """

    stack: Stack
    profile: Profile
    method: str
    levels: Mapping[str, Levels]
    transitions: tuple[Transition, ...] = ()
    notes: tuple[str, ...] = field(default=())
    self_consistent: SelfConsistentResult | None = None

    @property
    def states(self):
        return [s for b in BAND_NAMES if b in self.levels for s in self.levels[b].states]

    def state(self, label: str):
        for s in self.states:
            if s.label == label:
                return s
        raise KeyError(label)

    def transition(self, name: str):
        for t in self.transitions:
            if t.name == name:
                return t
        raise ParameterError(f"no transition {name!r}; available: "
                             + (", ".join(t.name for t in self.transitions) or "none"))


def _bands_for(which) -> tuple:
    if which is None or which == "all":
        return BAND_NAMES
    if isinstance(which, str):
        which = (which,)
    for b in which:
        if b not in BAND_NAMES:
            raise ParameterError(f"unknown band {b!r}; expected one of: " + ", ".join(BAND_CHOICES))
    return tuple(which)


#: State label prefix -> band.
_BAND_OF_PREFIX = {"e": "conduction", "hh": "heavy_hole", "lh": "light_hole"}


def lowest_states(labels) -> dict:
    """Band -> number of lowest states that hold every label of ``labels`` ('e3', 'hh1').

    Labels that do not read as a state label are ignored.
    """
    out: dict = {}
    for lab in labels or ():
        lab = str(lab)
        digits = len(lab) - len(lab.lstrip("ehl"))
        band = _BAND_OF_PREFIX.get(lab[:digits])
        if band is None or not lab[digits:].isdigit():
            continue
        out[band] = max(out.get(band, 0), int(lab[digits:]))
    return out


def solve_profile(profile: Profile, *, bands=None, method: str = "exact",
                  transitions: bool = True, tolerance_eV: float = 1e-7,
                  wavefunctions: bool = True, quasi_bound: bool = True,
                  hole_intersubband: bool = False, states_needed=None) -> Solution:
    """Solve the bands of a profile and collect transitions.

    Parameters
    ----------
    profile : Profile
    bands : str or sequence of str, optional
        'conduction', 'heavy_hole', 'light_hole' or 'all' (default).
    method : {'exact', 'semiclassical', 'finite_difference'}
        A key of :data:`qwell.solvers.METHODS`.
    transitions : bool
        Compute intersubband and interband transitions (needs wavefunctions;
        only for the exact method).
    tolerance_eV : float
        Energy tolerance of each state [eV].
    wavefunctions : bool
        Compute wavefunctions (needed for dipoles and overlaps).
    quasi_bound : bool
        Also search for quasi-bound resonances (exact method); they lie above
        every bound state, so skipping them leaves the bound labels unchanged.
    hole_intersubband : bool
        Also list heavy-hole and light-hole intersubband pairs (hh1-hh2, ...).
    states_needed : sequence of str, optional
        With ``quasi_bound=False`` and the exact method: the state labels the
        caller needs ('e3', 'hh1'); a band holding some of them keeps only its
        lowest bound states up to the highest needed one (the refinement of the
        others is skipped; the kept states' labels and energies are those of the
        full solve).  Bands without a needed label are solved in full.
    """
    if method not in METHODS:
        raise ParameterError(f"unknown method {method!r}; expected one of: " + ", ".join(METHODS))
    notes = []
    levels = {}
    keep = lowest_states(states_needed) if method == "exact" and not quasi_bound else {}
    for b in _bands_for(bands):
        if b not in profile.bands:
            notes.append(f"{b}: not defined in every layer (no valence parameters); skipped")
            continue
        opts = {"tolerance_eV": tolerance_eV}
        if method == "exact":
            opts["wavefunctions"] = wavefunctions and transitions
            opts["quasi_bound"] = quasi_bound
            if b in keep:
                opts["max_states"] = keep[b]
        levels[b] = solve(profile.bands[b], method, **opts)
    trans = ()
    if transitions and method == "exact":
        trans = _transitions(profile, levels, hole_intersubband)
    return Solution(stack=profile.stack, profile=profile, method=method, levels=levels,
                    transitions=trans, notes=tuple(notes))


def _transitions(profile: Profile, levels: Mapping[str, Levels],
                 hole_intersubband: bool = False) -> tuple:
    return collect_transitions(profile.bands, levels, hole_intersubband)


def collect_transitions(bands: Mapping, levels: Mapping[str, Levels],
                        hole_intersubband: bool = False) -> tuple:
    """The transitions of solved levels, as :func:`solve_profile` forms them.

    ``bands`` maps band names to the :class:`~qwell.bands.Band` each ``levels``
    entry was solved on.  Intersubband (conduction; with ``hole_intersubband``
    also hole) and interband lines, strongest first.
    """
    out = []
    for b in ("conduction",) + (("heavy_hole", "light_hole") if hole_intersubband else ()):
        if b in levels and len(levels[b]) >= 2:
            out += optics.intersubband_transitions(levels[b], bands[b])
    if "conduction" in levels and len(levels["conduction"]):
        for hb in ("heavy_hole", "light_hole"):
            if hb in levels and len(levels[hb]):
                out += optics.interband_transitions(levels["conduction"], bands["conduction"],
                                                    levels[hb], bands[hb])
    out.sort(key=lambda t: -optics.strength(t))
    return tuple(out)


def wants_self_consistent(stack, self_consistent: bool | None = None) -> bool:
    """Whether the charged (Schrödinger–Poisson) path applies: the argument, else the stack key."""
    return bool(stack.self_consistent if self_consistent is None else self_consistent)


def prepare_profile(stack, *, self_consistent: bool | None = None):
    """The profile every command solves, and the self-consistent result if any.

    Returns ``(profile, sc)``: with ``self_consistent`` (or the stack's
    ``self_consistent: true``) the profile includes the electrostatic
    potential of the doping and free carriers (:func:`qwell.selfconsistent.
    solve_self_consistent`, states of the loop reused), else it is the
    flat-band :func:`~qwell.profile.band_profile` and ``sc`` is None.
    """
    if not wants_self_consistent(stack, self_consistent):
        return band_profile(stack), None
    sc = solve_self_consistent(stack)
    return sc.profile, sc


def stack_profile(stack, *, self_consistent: bool | None = None) -> Profile:
    """The profile of ``stack`` (self-consistent when asked or set in the stack)."""
    return prepare_profile(stack, self_consistent=self_consistent)[0]


def solve_stack(stack, *, self_consistent: bool | None = None, **options) -> Solution:
    """Build the profile of ``stack`` and solve it (see :func:`solve_profile`).

    With ``self_consistent`` (or the stack key) the states are those of the
    self-consistent potential and the solution carries the charge result in
    :attr:`Solution.self_consistent`.

    Examples
    --------
    >>> from qwell import load_stack, solve_stack
    >>> sol = solve_stack(load_stack("layers/lwir-detector.yaml"), bands="conduction")
    >>> [s.label for s in sol.states]
    ['e1', 'e2']
    >>> round(sol.transition("e1-e2").wavelength_um, 3)
    8.33
    """
    prof, sc = prepare_profile(stack, self_consistent=self_consistent)
    sol = solve_profile(prof, **options)
    if sc is not None:
        sol = replace(sol, self_consistent=sc)
    return sol


def compare_methods(exact: Solution, semi: Solution) -> list[dict]:
    """Per-state comparison of two solutions: energies and their difference.

    Returns a list of dicts with ``label``, ``band``, ``exact_eV``,
    ``semiclassical_eV``, ``difference_meV`` (semiclassical - exact on the
    carrier scale, so positive means the estimate lies too high in its band)
    and ``difference_percent`` (relative to the exact confinement energy
    above the band's potential minimum).
    """
    rows = []
    for b, lev in exact.levels.items():
        other = semi.levels.get(b)
        band = exact.profile.bands[b]
        vmin = band.potential_min_eV
        for s in lev.states:
            try:
                t = other[s.label] if other is not None else None
            except KeyError:
                t = None
            row = {"band": b, "label": s.label, "exact_eV": s.energy_eV,
                   "semiclassical_eV": None if t is None else t.energy_eV,
                   "difference_meV": None, "difference_percent": None}
            if t is not None:
                d = (t.carrier_energy_eV - s.carrier_energy_eV)
                row["difference_meV"] = 1e3 * d
                conf = s.carrier_energy_eV - vmin
                row["difference_percent"] = 100.0 * d / conf if conf > 0 else None
            rows.append(row)
        if other is not None:
            seen = {s.label for s in lev.states}
            for t in other.states:
                if t.label not in seen:
                    rows.append({"band": b, "label": t.label, "exact_eV": None,
                                 "semiclassical_eV": t.energy_eV, "difference_meV": None,
                                 "difference_percent": None})
    return rows


def depolarised_lines(solution: Solution) -> list[dict]:
    """Depolarisation-shifted intersubband absorption lines of a doped solution.

    For each conduction intersubband transition, the shift uses the sheet
    density difference n_i - n_j of the self-consistent occupation and the
    static dielectric constant of the layer where the initial state is most
    likely found.  Empty without a self-consistent result.

    Returns a list of dicts: ``transition``, ``energy_eV`` (bare),
    ``shift_eV``, ``shifted_energy_eV``, ``shifted_wavelength_um``,
    ``sheet_density_cm2``.

    References
    ----------
    .. [1] T. Ando, A. B. Fowler and F. Stern, Rev. Mod. Phys. 54, 437 (1982).
    """
    sc = solution.self_consistent
    if sc is None or "conduction" not in solution.levels:
        return []
    lev = solution.levels["conduction"]
    out = []
    for t in solution.transitions:
        if t.kind != "intersubband":
            continue
        n = sc.sheet_densities_cm2.get(t.initial, 0.0) - sc.sheet_densities_cm2.get(t.final, 0.0)
        if n <= 0:
            continue
        s = lev[t.initial]
        where = int(max(range(len(s.layer_probability)), key=lambda k: s.layer_probability[k]))
        eps = solution.stack.material_of(solution.stack.layers[where]).dielectric_constant \
            if solution.stack.layers[where].grade is None else None
        if not eps:
            continue
        shift = depolarisation_shift(solution.levels, "conduction", t.name, n, eps)
        e = t.energy_eV + shift
        out.append({"transition": t.name, "energy_eV": t.energy_eV, "shift_eV": shift,
                    "shifted_energy_eV": e, "shifted_wavelength_um": HC_EV_UM / e,
                    "sheet_density_cm2": n})
    return out



def shifted_transitions(solution: Solution, transitions=None) -> tuple:
    """``transitions`` (default: all of the solution) with each depolarisation-shifted line
    (:func:`depolarised_lines`) at its shifted energy; other lines unchanged.

    This is the line a doped stack's absorption shows, used by every plot and
    design workflow; the bare line stays in :attr:`Solution.transitions`.
    """
    trans = solution.transitions if transitions is None else tuple(transitions)
    shifted = {d["transition"]: d for d in depolarised_lines(solution)}
    out = []
    for t in trans:
        d = shifted.get(t.name)
        if d is None:
            out.append(t)
            continue
        r = d["shifted_energy_eV"] / t.energy_eV
        out.append(replace(t, energy_eV=d["shifted_energy_eV"],
                           wavelength_um=d["shifted_wavelength_um"],
                           wavenumber_cm1=t.wavenumber_cm1 * r, frequency_THz=t.frequency_THz * r))
    return tuple(out)
