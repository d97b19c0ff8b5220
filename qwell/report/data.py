"""What a design-review report says: the solutions, the reviewed transitions, the sensitivities.

:func:`collect_report_data` solves a stack with both methods, picks the
transitions to review (:func:`default_transitions` unless named) and asks the
design engine (:mod:`qwell.design`) how each reviewed wavelength moves when
one layer parameter changes (:func:`sensitivity_rows`).  The result,
:class:`ReportData`, is everything the pages (:mod:`qwell.report.pages`)
show; nothing here draws or writes.

Units inside: eV, nm, m0, K, kV/cm (see :mod:`qwell.units`).
"""

from __future__ import annotations

import datetime as _dt
import math
import warnings
from dataclasses import dataclass, replace

from .. import design
from ..constants import HC_EV_UM
from ..design.line import DesignLine, design_line
from ..diagram import miniband_groups
from ..errors import ParameterError, QwellError, QwellWarning
from ..levels import Solution, compare_methods, prepare_profile, shifted_transitions, solve_profile
from ..lifetimes import Lifetimes, solution_lifetimes
from ..optics import Transition, select_transitions
from ..profile import Profile
from ..selfconsistent import SelfConsistentResult
from ..spectral import parse_unit
from ..stack import Stack
from .spectra import ReportSpectra, report_spectra

__all__ = [
    "REPORT_TOLERANCE_EV",
    "ReportData",
    "SensitivityRow",
    "collect_report_data",
    "default_transitions",
    "report_lifetimes",
    "sensitivity_rows",
]

#: Energy tolerance of the solvers in the report [eV] (the exact solver's default, which the
#: design engine uses for the sensitivity page).
REPORT_TOLERANCE_EV = 1e-7


@dataclass(frozen=True)
class SensitivityRow:
    """Change of one transition's wavelength when one layer parameter changes.

    Attributes
    ----------
    transition : str
        e.g. 'e1-e2'.
    layer : str
        Layer label, with '(×N)' when a named layer of a repeat block changes
        in all N periods.
    parameter : str
        'thickness', or the composition path's key with its alloy family,
        e.g. 'x (AlGaAs)' (see :mod:`qwell.design`).
    step : float
        Size of the change [nm for thickness, 1 for composition].
    step_text : str
        The change as shown, e.g. '1 ML = 0.2827 nm'.
    minus_nm, plus_nm : float or None
        Wavelength change [nm] for -step and +step; None when that side was
        not computed (composition at the end of [0, 1]) or the transition
        does not exist there (see ``note``).
    per_unit_nm : float or None
        Central (or one-sided) difference in nm per step.
    note : str
    """

    transition: str
    layer: str
    parameter: str
    step: float
    step_text: str
    minus_nm: float | None
    plus_nm: float | None
    per_unit_nm: float | None
    note: str = ""


@dataclass(frozen=True)
class ReportData:
    """Everything the pages show (computed once by :func:`collect_report_data`).

    Attributes
    ----------
    stack : qwell.stack.Stack
    profile : qwell.profile.Profile
    exact, semiclassical : qwell.levels.Solution
    chosen : tuple of qwell.optics.Transition
        Transitions reviewed (arrows, sensitivity).
    comparison : list of dict
        :func:`qwell.levels.compare_methods` rows.
    sensitivity : tuple of SensitivityRow
    sensitivity_notes : tuple of str
    warnings : tuple of str
        Distinct warning messages raised while solving.
    created_utc : datetime.datetime
    tolerance_eV : float
    charge : qwell.selfconsistent.SelfConsistentResult or None
        The Schrödinger–Poisson result when the stack is solved self-consistently.
    line : qwell.design.line.DesignLine or None
        The design line (the first reviewed transition), as every command
        decides it (:func:`qwell.design.line.design_line`).  In a doped stack
        the reviewed intersubband lines are the depolarisation-shifted ones.
    spectra : qwell.report.spectra.ReportSpectra or None
        Absolute spectra: alpha and per-pass absorption when an intersubband line
        is reviewed (a detector), else gain and transparency (a laser well).
    lifetimes : qwell.lifetimes.Lifetimes or None
        LO-phonon lifetimes and the emitter figure of merit when the reviewed transitions
        include an intersubband line (see :func:`report_lifetimes`).
    lifetimes_note : str
        Why the lifetimes are missing although an intersubband line is reviewed ('' else).
    photon_unit : str or None
        Unit of lines and shifts chosen by the user (``--unit``); None: each line in the
        unit of its spectral region (:mod:`qwell.spectral`).
    """

    stack: Stack
    profile: Profile
    exact: Solution
    semiclassical: Solution
    chosen: tuple[Transition, ...]
    comparison: list[dict]
    sensitivity: tuple[SensitivityRow, ...]
    sensitivity_notes: tuple[str, ...]
    warnings: tuple[str, ...]
    created_utc: _dt.datetime
    tolerance_eV: float = REPORT_TOLERANCE_EV
    charge: SelfConsistentResult | None = None
    line: DesignLine | None = None
    spectra: ReportSpectra | None = None
    lifetimes: Lifetimes | None = None
    lifetimes_note: str = ""
    photon_unit: str | None = None

    @property
    def fermi_level_eV(self) -> float | None:
        """Fermi level of a self-consistent stack [eV], else None."""
        if self.charge is None:
            return None
        ef = self.charge.fermi_level_eV
        return None if ef is None or math.isnan(ef) else float(ef)


def default_transitions(solution) -> tuple:
    """Transitions reviewed when the user names none.

    The strongest intersubband line from the ground state (flagged
    ``strongest`` by :mod:`qwell.optics`) and the fundamental interband line
    ``e1-hh1``, when they exist.  A line between two states of one
    miniband of a long repeat block (wavelengths of mm) is never chosen: the
    strongest line from the ground state out of its miniband is taken instead.
    """
    out = []
    group = _miniband_of(solution)
    inter = [t for t in solution.transitions if t.kind == "intersubband" and t.strongest
             and not _intra_miniband(t, group)]
    if not inter:
        # the flagged line lies inside one miniband (a long repeat block): take the strongest
        # line from the ground state to another miniband or state instead
        cands = [t for t in solution.transitions if t.kind == "intersubband"
                 and not _intra_miniband(t, group) and t.oscillator_strength is not None
                 and t.initial in ("e1", "hh1")]
        if cands:
            inter = [max(cands, key=lambda t: abs(t.oscillator_strength))]
    if inter:
        out.append(inter[0])
    for name in ("e1-hh1",):
        for t in solution.transitions:
            if t.name == name:
                out.append(t)
                break
    return tuple(out)


def _miniband_of(solution) -> dict:
    """State label -> index of the grouped miniband holding it (states of long repeats)."""
    out = {}
    k = 0
    for lev in solution.levels.values():
        for mb, states in miniband_groups(lev):
            if mb is not None:
                out.update({s.label: k for s in states})
                k += 1
    return out


def _intra_miniband(t, group: dict) -> bool:
    """Whether both states of a transition lie in one miniband (not a line to review)."""
    a, b = group.get(t.initial), group.get(t.final)
    return a is not None and a == b


# ---------------------------------------------------------------------------
# sensitivity to growth errors (through the design engine)
# ---------------------------------------------------------------------------
def _sensitivity_plan(stack, composition_step):
    """[(layer label, parameter text, step, step text, [(sign, {path: value})])] and notes.

    One entry per layer parameter of :func:`qwell.design.parameters`:
    thickness ±1 ML (a/2 of the layer's material), composition ±``composition_step``;
    a side whose value :meth:`qwell.design.Parameter.check` refuses is left out.
    """
    plan, notes = [], []
    params = design.parameters(stack)
    for path, p in params.items():
        if p.layer is None:
            continue
        copies = sum(1 for L in stack.layers if L.name == p.layer)
        label = p.layer + (f" (×{copies})" if copies > 1 else "")
        if p.kind == "thickness":
            if not p.monolayer_nm:
                notes.append(f"{p.layer}: no lattice constant, so no monolayer step; "
                             "thickness sensitivity not computed")
                continue
            step, text, pname = p.monolayer_nm, f"1 ML = {p.monolayer_nm:.4f} nm", "thickness"
        elif p.kind in ("x", "y"):
            step, text = composition_step, f"±{composition_step:g}"
            pname = f"{p.kind} ({p.family})" if p.family else p.kind
        else:
            continue
        sides = []
        for sgn in (-1, 1):
            v = p.value + sgn * step
            try:
                p.check(v)
            except QwellError:
                continue
            sides.append((sgn, {path: v}))
        plan.append((label, pname, step, text, sides))
    named = {p.layer for p in params.values() if p.layer is not None}
    missing = [L.label for L in stack.layers
               if L.name is None and L.repeat_block is not None and L.label not in named]
    if missing:
        notes.append("unnamed layers inside a repeat block have no parameter path and were not "
                     "varied: " + ", ".join(missing[:8]) + (" …" if len(missing) > 8 else ""))
    return plan, notes


def _evaluate(stack, value_sets, bands, needed, jobs):
    """:func:`qwell.design.evaluate_many` over ``value_sets``; a set whose stack is refused
    gives the error message instead of a :class:`~qwell.design.DesignPoint`."""
    try:
        return design.evaluate_many(stack, value_sets, bands=bands, needed=needed, jobs=jobs,
                                    label="report sensitivity")
    except QwellError:
        pass
    out = []   # some design is refused: find which, one at a time
    for values in value_sets:
        try:
            out.extend(design.evaluate_many(stack, [values], bands=bands, needed=needed,
                                            jobs=1))
        except QwellError as exc:
            out.append(str(exc))
    return out


def _wavelength_um(point, transition) -> float | None:
    """λ = hc/|E_f - E_i| [µm] from the design's state energies; None if a state is missing.

    A depolarisation-shifted line (doped stack) takes the design's shifted wavelength.
    """
    if transition.name in {n for n, _, _ in point.bare_transitions}:
        lam = point.wavelength(transition.name)
        return lam if math.isfinite(lam) else None
    a, b = point.state_energy(transition.initial), point.state_energy(transition.final)
    if not (math.isfinite(a) and math.isfinite(b)) or a == b:
        return None
    return HC_EV_UM / abs(b - a)


def sensitivity_rows(stack, chosen, *, composition_step: float = 0.01, jobs=None):
    """Wavelength change of each chosen transition per layer thickness (±1 ML) and composition.

    The rows come from the design engine's one-at-a-time sensitivities,
    :func:`qwell.design.sensitivities` (the paths of ``qwell tolerance``, solved
    by :func:`qwell.design.evaluate_many` at :data:`REPORT_TOLERANCE_EV`, in
    parallel where it pays); this function only words them for the page.  A
    named layer inside a repeat changes in every period.  Shifts below
    5e-4 nm print as 0.00 and are stored as 0.

    Parameters
    ----------
    stack : qwell.stack.Stack
    chosen : sequence of qwell.optics.Transition
    composition_step : float
        Composition change (fraction).
    jobs : int, optional
        Worker processes (see :func:`qwell.parallel.map_chunked`).

    Returns
    -------
    (tuple of SensitivityRow, tuple of str)
        Rows (grouped by transition) and notes.
    """
    chosen = tuple(chosen)
    if not chosen:
        return (), ("no transition chosen: no sensitivity computed",)
    res = design.sensitivities(stack, tuple(t.name for t in chosen), thickness_tol="1 ML",
                               composition_tol=composition_step, jobs=jobs,
                               tolerance_eV=REPORT_TOLERANCE_EV)
    copies = {}
    for L in stack.layers:
        if L.name is not None:
            copies[L.name] = copies.get(L.name, 0) + 1

    def shown(v):
        if not math.isfinite(v):
            return None
        return 0.0 if abs(v) < 5e-4 else float(v)

    rows = []
    for r in res.rows:
        if r.kind not in ("thickness", "x", "y"):
            continue
        n = copies.get(r.layer, 1)
        label = r.layer + (f" (×{n})" if n > 1 else "")
        if r.kind == "thickness":
            pname, text = "thickness", f"1 ML = {r.step:.4f} nm"
        else:
            pname, text = (f"{r.kind} ({r.family})" if r.family else r.kind), f"±{r.step:g}"
        mi, pl = shown(r.minus_nm), shown(r.plus_nm)
        if mi is not None and pl is not None:
            per = 0.5 * (pl - mi)
        elif pl is not None:
            per = pl
        elif mi is not None:
            per = -mi
        else:
            per = None
        rows.append(SensitivityRow(transition=r.transition, layer=label, parameter=pname,
                                   step=r.step, step_text=text, minus_nm=mi, plus_nm=pl,
                                   per_unit_nm=per, note=r.note))
    return tuple(rows), tuple(dict.fromkeys(res.notes))


def report_lifetimes(exact, chosen, named: bool) -> tuple:
    """``(Lifetimes or None, note)`` for the reviewed transitions.

    Only when an intersubband line of the conduction band is reviewed.  The emitter line is
    that line when the user named the transitions, else the line that can invert with the
    largest figure of merit (:func:`qwell.lifetimes.solution_lifetimes`).  A stack whose
    host material has no LO-phonon data, or with fewer than two bound conduction states,
    gets a note instead.
    """
    lines = [t for t in chosen if t.kind == "intersubband" and t.initial.startswith("e")]
    if not lines:
        return None, ""
    try:
        lt = solution_lifetimes(exact, line=lines[0].name if named else None)
    except QwellError as exc:
        return None, f"LO-phonon lifetimes not computed: {exc}"
    return lt, ""


# ---------------------------------------------------------------------------
# everything the report shows
# ---------------------------------------------------------------------------
def collect_report_data(stack, *, transitions=None, tolerance_eV: float = REPORT_TOLERANCE_EV,
                        sensitivity: bool = True, unit: str | None = None) -> ReportData:
    """Solve ``stack`` with both methods and gather what the report shows.

    Parameters
    ----------
    stack : qwell.stack.Stack
    transitions : sequence of str, optional
        Transition names to review ('e1-e2', 'e1-hh1'); default
        :func:`default_transitions`.  Unknown names raise ParameterError
        listing the available ones.
    tolerance_eV : float
        Energy tolerance of both solvers [eV] (the sensitivity page uses the
        design engine's, :data:`REPORT_TOLERANCE_EV`).
    sensitivity : bool
        Compute the sensitivity page (the costly part).
    unit : str, optional
        Photon unit of lines and shifts (one of :data:`qwell.spectral.UNITS`).

    Warnings raised while solving are captured, listed in the report and
    returned in :attr:`ReportData.warnings` (not re-raised here).
    """
    photon_unit = parse_unit(unit) if unit else None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", QwellWarning)
        prof, sc = prepare_profile(stack)
        exact = solve_profile(prof, method="exact", transitions=True, tolerance_eV=tolerance_eV)
        semi = solve_profile(prof, method="semiclassical", transitions=False,
                             tolerance_eV=tolerance_eV)
        if sc is not None:
            exact = replace(exact, self_consistent=sc)
        try:
            line = design_line(stack, transitions[0] if transitions else None, solution=exact)
        except ParameterError:
            if transitions or stack.declared_line is not None:
                raise
            line = None     # nothing to follow: the report says so
        if transitions:
            chosen = select_transitions(exact.transitions, list(transitions))
        else:
            lead = [line.transition] if line is not None else []
            rest = [t.name for t in default_transitions(exact) if t.name not in lead]
            chosen = select_transitions(exact.transitions, lead + rest)
        chosen = shifted_transitions(exact, chosen)
        comparison = compare_methods(exact, semi)
        kinds = {t.kind for t in chosen}
        # a reviewed intersubband line makes it a detector/emitter design (alpha, per pass);
        # interband lines alone a laser well (gain, transparency)
        spectra = report_spectra(stack, exact, charge=sc, detector="intersubband" in kinds,
                                 laser=kinds == {"interband"})
        lifetimes, lifetimes_note = report_lifetimes(exact, chosen, bool(transitions))
        if sensitivity:
            sens, sens_notes = sensitivity_rows(stack, chosen)
        else:
            sens, sens_notes = (), ("sensitivity not computed",)
    msgs = []
    for w in caught:
        if issubclass(w.category, QwellWarning):
            msgs.append(str(w.message))
        else:  # not ours: pass it on unchanged
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return ReportData(stack=stack, profile=prof, exact=exact, semiclassical=semi, charge=sc,
                      chosen=tuple(chosen), comparison=comparison, sensitivity=tuple(sens),
                      sensitivity_notes=tuple(sens_notes), warnings=tuple(dict.fromkeys(msgs)),
                      created_utc=_dt.datetime.now(_dt.timezone.utc).replace(microsecond=0),
                      tolerance_eV=tolerance_eV, spectra=spectra, lifetimes=lifetimes,
                      lifetimes_note=lifetimes_note, photon_unit=photon_unit, line=line)
