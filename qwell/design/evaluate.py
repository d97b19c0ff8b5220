"""The one evaluation engine of the design workflows: a design -> its states and transitions.

Every evaluation of a design goes through :func:`design_point`: the
parameters are written into the stack with
:func:`qwell.stack_edit.apply_parameters` (a copy of :attr:`Stack.raw`,
validated again by the loader's code) and the result is solved with the exact
method.  :func:`evaluate_many` runs many designs serially, on local worker
processes or on a Dask cluster; sizing, sweeps, tolerances, sensitivities and
Monte Carlo runs all use it, so a sweep point is the single-design solve at
that value, bit for bit.
"""

from __future__ import annotations

import copy
import math
import re
import warnings
from dataclasses import dataclass, field, replace
from functools import partial
from typing import Mapping

import numpy as np

from .. import parallel
from ..bands import BAND_NAMES
from ..errors import ParameterError, QwellError, QwellWarning
from ..levels import collect_transitions, depolarised_lines, prepare_profile, solve_profile, \
    wants_self_consistent
from ..lifetimes import solution_lifetimes
from ..solvers.batch import solve_bound_many
from ..stack import stack_from_mapping
from ..stack_bands import stack_bands
from ..stack_edit import Parameter, apply_parameters

__all__ = ["DesignPoint", "design_point", "evaluate_many", "bands_for_transitions",
           "EMITTER_KEYS"]

#: Emitter-line quantities a design point carries when asked for an emitter line (units in
#: the names; see :class:`qwell.lifetimes.EmitterFigure`).
EMITTER_KEYS = ("tau_upper_ps", "tau_lower_ps", "tau_upper_lower_ps", "inversion_factor_ps",
                "figure_of_merit_nm2_ps", "gain_per_current_cm_per_kA")

#: Exact-solver energy tolerance of a design evaluation [eV] (that of levels.solve_profile).
DEFAULT_TOLERANCE_EV = 1e-7

_BAND_OF_PREFIX = {"e": "conduction", "hh": "heavy_hole", "lh": "light_hole"}
LABEL_RE = re.compile(r"^(e|hh|lh)(\d+)$")


@dataclass(frozen=True)
class DesignPoint:
    """States and transitions of one design (exact solver).

    Attributes
    ----------
    values : tuple of (path, value)
        The parameters applied (internal units).
    states : tuple of (label, energy_eV, bound)
        Every state of the solved bands; band-diagram energies [eV].
    transitions : tuple of (name, energy_eV, wavelength_um)
        Every transition of the solution: the line a designer works with.  In
        a self-consistent (doped) design an intersubband absorption line is
        the depolarisation-shifted one (Ando, Fowler, Stern 1982); its bare
        energy is in ``bare_transitions``.
    notes : tuple of str
        Warnings raised while solving (re-emitted by the caller).
    warning_categories : tuple
        The qwell warning class of each note (None for other warnings).
    error : str or None
        Why the design could not be built or solved, when the evaluation was
        asked to record errors instead of raising them (then ``states`` and
        ``transitions`` are empty).
    bare_transitions : tuple of (name, energy_eV, wavelength_um)
        The depolarisation-shifted lines before the shift (empty when no line
        is shifted).
    emitter : tuple of (key, value)
        With an emitter line: its name (``'line'``, e.g. ``'e3->e2'``) and the
        :data:`EMITTER_KEYS` quantities of the LO-phonon lifetimes model; empty
        otherwise or when the line does not exist in this design.
    lifetimes_ps : tuple of (label, tau_ps)
        With an emitter line: the LO-phonon lifetime of every bound conduction
        state [ps] (inf when nothing leaves it).
    """

    values: tuple
    states: tuple
    transitions: tuple
    notes: tuple = ()
    warning_categories: tuple = field(default=(), repr=False)
    error: str | None = None
    bare_transitions: tuple = ()
    emitter: tuple = ()
    lifetimes_ps: tuple = ()

    def bare_energy(self, name: str) -> float:
        """Energy of a line before the depolarisation shift [eV] (the line's energy when it
        is not shifted; NaN if absent)."""
        for n, e, _ in self.bare_transitions:
            if n == name:
                return e
        return self.transition_energy(name)

    def bare_wavelength(self, name: str) -> float:
        """Wavelength of a line before the depolarisation shift [um] (NaN if absent)."""
        for n, _, lam in self.bare_transitions:
            if n == name:
                return lam
        return self.wavelength(name)

    @property
    def shifted(self) -> bool:
        """Whether some intersubband line carries the depolarisation shift."""
        return bool(self.bare_transitions)

    def emitter_value(self, key: str) -> float:
        """An :data:`EMITTER_KEYS` quantity of the emitter line, NaN if absent."""
        for k, v in self.emitter:
            if k == key:
                return float(v)
        return math.nan

    def lifetime_ps(self, label: str) -> float:
        """LO-phonon lifetime of a state [ps], NaN if absent."""
        for lab, t in self.lifetimes_ps:
            if lab == label:
                return float(t)
        return math.nan

    def state_energy(self, label: str) -> float:
        """Energy of a state [eV], NaN if the design has no such state."""
        for lab, e, _ in self.states:
            if lab == label:
                return e
        return math.nan

    def transition_energy(self, name: str) -> float:
        """Transition energy [eV], NaN if absent."""
        for n, e, _ in self.transitions:
            if n == name:
                return e
        return math.nan

    def wavelength(self, name: str) -> float:
        """Transition wavelength [um], NaN if absent."""
        for n, _, lam in self.transitions:
            if n == name:
                return lam
        return math.nan

    @property
    def transition_names(self) -> tuple:
        return tuple(t[0] for t in self.transitions)


def bands_for_transitions(transitions, extra=()) -> tuple:
    """Bands to solve for these transition names (conduction always included).

    Raises
    ------
    ParameterError
        A name not of the form ``e1-e2`` / ``e1-hh1`` / ``e1-lh1``.
    """
    need = {"conduction"}
    for name in transitions or ():
        parts = str(name).split("-")
        if len(parts) != 2 or not all(LABEL_RE.match(p) for p in parts):
            raise ParameterError(f"transition {name!r}: expected two state labels such as "
                                 "e1-e2, e1-hh1 or e1-lh1")
        for p in parts:
            need.add(_BAND_OF_PREFIX[LABEL_RE.match(p).group(1)])
    for b in extra or ():
        if b not in BAND_NAMES:
            raise ParameterError(f"unknown band {b!r}; expected one of: " + ", ".join(BAND_NAMES))
        need.add(b)
    return tuple(b for b in BAND_NAMES if b in need)


def _emitter_of(sol, line):
    """(emitter pairs, lifetimes pairs) of one solved design; empty when the line is absent."""
    try:
        lt = solution_lifetimes(sol, line=line)
    except ParameterError:
        return (), ()
    f = lt.figure
    pairs = (("line", f.line),) + tuple((k, float(getattr(f, k))) for k in EMITTER_KEYS)
    lives = tuple((lab, float(t)) for lab, t in zip(lt.rates.labels, lt.rates.lifetime_ps))
    return pairs, lives


def _solve_design(stack, bands, wavefunctions, needed, tolerance_eV, emitter=None):
    """Solve one design; with ``needed`` state labels, skip the resonance search when
    every needed state is truly bound (quasi-bound states lie above all bound ones,
    so the bound labels do not change) and fall back to the full solve otherwise.

    Returns ``(states, transitions, bare)``: in a self-consistent design the
    intersubband lines of ``transitions`` carry the depolarisation shift and
    ``bare`` lists them unshifted (the shift needs the wavefunctions)."""
    prof, sc = prepare_profile(stack)
    if sc is not None:
        wavefunctions = True
    sol = None
    if needed:
        sol = solve_profile(prof, bands=bands, method="exact", transitions=True,
                            wavefunctions=wavefunctions, quasi_bound=False,
                            tolerance_eV=tolerance_eV, states_needed=needed)
        have = {s.label for s in sol.states}
        if not set(needed) <= have:
            sol = None
    if sol is None:
        sol = solve_profile(prof, bands=bands, method="exact", transitions=True,
                            wavefunctions=wavefunctions, tolerance_eV=tolerance_eV)
    states = tuple((s.label, float(s.energy_eV), bool(s.bound)) for s in sol.states)
    trans = tuple((t.name, float(t.energy_eV), float(t.wavelength_um)) for t in sol.transitions)
    bare = ()
    if sc is not None:
        shifted = {d["transition"]: d for d in depolarised_lines(replace(sol, self_consistent=sc))}
        if shifted:
            bare = tuple(t for t in trans if t[0] in shifted)
            trans = tuple((n, float(shifted[n]["shifted_energy_eV"]),
                           float(shifted[n]["shifted_wavelength_um"])) if n in shifted
                          else (n, e, lam) for n, e, lam in trans)
    if emitter is None:
        return states, trans, bare, (), ()
    # the lifetimes use bound conduction states only: one bound-only solve with envelopes
    # (bound labels are the same with or without the resonance search)
    bound = solve_profile(prof, bands=("conduction",), method="exact", transitions=True,
                          wavefunctions=True, quasi_bound=False, tolerance_eV=tolerance_eV)
    return (states, trans, bare) + _emitter_of(bound, emitter)


def design_point(stack, values: Mapping[str, float] | None = None, *, bands=("conduction",),
                 wavefunctions: bool = False, needed=None,
                 tolerance_eV: float = DEFAULT_TOLERANCE_EV,
                 record_errors: bool = False, emitter: str | None = None) -> DesignPoint:
    """Solve one design: ``stack`` with ``values`` applied (see :func:`apply_parameters`).

    This is the single evaluation used by every workflow here.  The stack is
    always rebuilt from its mapping (also for no values), so a point computed
    on a worker process from the same mapping is identical.

    Parameters
    ----------
    stack : Stack
    values : Mapping[str, float], optional
        Parameter path -> value in internal units.
    bands : sequence of str
        Bands to solve (exact method); transitions are those of the solution.
    wavefunctions : bool
        Compute wavefunctions (and with them dipoles); energies do not depend
        on it.
    needed : sequence of str, optional
        State labels the caller needs (e.g. ``("e1", "hh1")``); when all are
        bound, quasi-bound resonances are not searched and each band keeps
        only its lowest bound states up to the needed ones (faster; the needed
        states' energies are unchanged).
    tolerance_eV : float
        Energy tolerance of each state [eV].
    record_errors : bool
        Return a point with :attr:`DesignPoint.error` set instead of raising
        when the design cannot be built or solved (a :class:`QwellError`).
    emitter : str, optional
        An intersubband line (``'e2-e3'``, either order): the point also carries
        its LO-phonon lifetimes and figure of merit (:mod:`qwell.lifetimes`),
        from one more solve of the bound conduction states with envelopes.

    Examples
    --------
    >>> from qwell.stack import load_stack
    >>> point = design_point(load_stack("layers/lwir-detector.yaml"), {"well.thickness": 5.5})
    >>> round(point.wavelength("e1-e2"), 2)
    8.4
    """
    return _design_points(stack, [values], bands=bands, wavefunctions=wavefunctions,
                          needed=needed, tolerance_eV=tolerance_eV, record_errors=record_errors,
                          emitter=emitter, scalar=True)[0]


def _notes_of(caught) -> tuple:
    """(messages, qwell warning class or None) of recorded warnings, once each."""
    notes, cats = [], []
    for w in caught:
        msg = str(w.message)
        if msg not in notes:
            notes.append(msg)
            cats.append(w.category if issubclass(w.category, QwellWarning) else None)
    return tuple(notes), tuple(cats)


def _design_bands(stack, bands) -> dict:
    """Band name -> :class:`~qwell.bands.Band` of one flat-band design (the bands asked
    for that every layer defines)."""
    return stack_bands(stack, bands)


def _batched(stack) -> bool:
    """Whether a design goes through the batched solve: not self-consistent (the
    Schrödinger–Poisson loop solves its own states, one design at a time)."""
    return not wants_self_consistent(stack)


def _design_points(stack, value_sets, *, bands=("conduction",), wavefunctions=False,
                   needed=None, tolerance_eV=DEFAULT_TOLERANCE_EV, record_errors=False,
                   emitter=None, scalar=False) -> list:
    """:class:`DesignPoint` of every parameter set, the flat-band designs solved together.

    Each design is written into the stack and its bands built (one at a time, its
    warnings recorded with it); then every band asked for is solved for all these
    designs in one :func:`qwell.solvers.batch.solve_bound_many` call, and the
    transitions are formed as :func:`qwell.levels.solve_profile` forms them.  With
    ``needed`` labels only bound states are searched, and a design where a needed
    state is not bound is solved again with the resonance search (as
    :func:`_solve_design` does); without ``needed`` the batch answers what the full
    exact solve answers (bands with room for resonances go to the exact solver).
    Self-consistent (doped) designs and emitter requests take the one-design route
    (:func:`_solve_design`).  With ``scalar`` (one design, :func:`design_point`) a
    small band takes the solver's scalar path; a design gives the same point in
    any batch, and the scalar path agrees with it to ~1e-13 eV.
    """
    bands = tuple(bands)
    needed = tuple(needed) if needed else None
    rows = []   # [values, result or None, band map or None, error, caught warnings]
    for values in value_sets:
        values = dict(values or {})
        row = [values, None, None, None, []]
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                s = apply_parameters(stack, values)
                if emitter is None and _batched(s):
                    row[2] = _design_bands(s, bands)
                else:
                    row[1] = _solve_design(s, bands, wavefunctions, needed, tolerance_eV,
                                           emitter)
            except QwellError as exc:
                if not record_errors:
                    raise
                row[3] = str(exc)
        row[4] = list(caught)
        rows.append(row)
    todo = [r for r in rows if r[2] is not None]
    if todo:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            levels = _solve_batch([r[2] for r in todo], bands, wavefunctions, needed is None,
                                  tolerance_eV, scalar)
            if needed:
                again = [k for k, lev in enumerate(levels)
                         if not set(needed) <= {st.label for lv in lev.values()
                                                for st in lv.states}]
                redo = _solve_batch([todo[k][2] for k in again], bands, wavefunctions, True,
                                    tolerance_eV, scalar)
                for k, lev in zip(again, redo):
                    levels[k] = lev
        for r, lev in zip(todo, levels):
            r[4].extend(caught)
            sts = tuple((st.label, float(st.energy_eV), bool(st.bound))
                        for b in BAND_NAMES if b in lev for st in lev[b].states)
            trans = tuple((t.name, float(t.energy_eV), float(t.wavelength_um))
                          for t in collect_transitions(r[2], lev))
            r[1] = (sts, trans, (), (), ())
    out = []
    for values, res, _, error, caught in rows:
        notes, cats = _notes_of(caught)
        states, trans, bare, emit, lives = res if res is not None else ((), (), (), (), ())
        out.append(DesignPoint(values=tuple(values.items()), states=states, transitions=trans,
                               notes=notes, warning_categories=cats, error=error,
                               bare_transitions=bare, emitter=emit, lifetimes_ps=lives))
    return out


def _solve_batch(band_maps, bands, wavefunctions, quasi_bound, tolerance_eV, scalar) -> list:
    """Levels of every design (band name -> Levels): one batched solve per band."""
    out = [{} for _ in band_maps]
    for b in bands:
        idx = [k for k, m in enumerate(band_maps) if b in m]
        if not idx:
            continue
        levs = solve_bound_many([band_maps[k][b] for k in idx], tolerance_eV=tolerance_eV,
                                wavefunctions=wavefunctions, quasi_bound=quasi_bound,
                                scalar=scalar)
        for k, lev in zip(idx, levs):
            out[k][b] = lev
    return out


_BASE_CACHE: dict = {}


def _eval_chunk(payload, items):
    """Worker: evaluate a chunk of parameter dicts on the stack rebuilt from its mapping
    (the chunk's flat-band designs solved in one batch)."""
    raw, file, options = payload
    key = (id(raw), file)
    base = _BASE_CACHE.get(key)
    if base is None or base[0] is not raw:
        _BASE_CACHE.clear()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _BASE_CACHE[key] = (raw, stack_from_mapping(raw, file=file))
        base = _BASE_CACHE[key]
    stack = base[1]
    return _design_points(stack, items, **dict(options))


def emit_warnings(points, stacklevel=3):
    """Re-emit the qwell warnings recorded in ``points``, once each."""
    seen = set()
    for p in points:
        for msg, cat in zip(p.notes, p.warning_categories):
            if cat is not None and msg not in seen:
                seen.add(msg)
                warnings.warn(msg, cat, stacklevel=stacklevel)


def evaluate_many(stack, value_sets, *, bands=("conduction",), wavefunctions: bool = False,
                  jobs=None, dask=None, dask_timeout_s: float | None = None,
                  progress: bool | None = None, label: str = "", needed=None,
                  tolerance_eV: float = DEFAULT_TOLERANCE_EV,
                  record_errors: bool = False, emitter: str | None = None) -> list:
    """:func:`design_point` for many parameter sets, in parallel where it pays.

    Parameters
    ----------
    value_sets : sequence of Mapping
        Parameter dicts (internal units).
    bands, wavefunctions, needed, tolerance_eV, record_errors, emitter
        See :func:`design_point`.
    jobs, dask, dask_timeout_s, progress
        See :func:`qwell.parallel.map_chunked`.

    Returns
    -------
    list of DesignPoint
        In input order; identical whether run serially, on local processes
        or on a Dask cluster.  qwell warnings raised while solving are
        re-emitted once each.
    """
    raw = copy.deepcopy(dict(stack.raw))
    options = (("bands", tuple(bands)), ("wavefunctions", bool(wavefunctions)),
               ("needed", tuple(needed) if needed else None),
               ("tolerance_eV", float(tolerance_eV)), ("record_errors", bool(record_errors)),
               ("emitter", None if emitter is None else str(emitter)))
    fn = partial(_eval_chunk, (raw, stack.path, options))
    kw = {}
    if dask_timeout_s is not None:
        kw["dask_timeout_s"] = dask_timeout_s
    points = parallel.map_chunked(fn, [dict(v) for v in value_sets], jobs=jobs, dask=dask,
                                  progress=progress, label=label, **kw)
    emit_warnings(points)
    return points


# ---------------------------------------------------------------------------
# helpers shared by the workflows
# ---------------------------------------------------------------------------
def check_transitions(point: DesignPoint, names, where: str):
    """Raise ParameterError naming the available transitions if one of ``names`` is missing."""
    have = point.transition_names
    for n in names:
        if n not in have:
            states = ", ".join(lab for lab, _, _ in point.states) or "none"
            raise ParameterError(f"transition {n!r} does not exist at {where}; states there: "
                                 f"{states}; transitions there: " + (", ".join(have) or "none"))


def check_emitter(point: DesignPoint, line: str, where: str):
    """Raise ParameterError naming the conduction states if the emitter line is missing."""
    if point.emitter:
        return
    labels = [lab for lab, _, bound in point.states if lab.startswith("e") and bound]
    raise ParameterError(f"emitter line {line!r} does not exist at {where}: it needs two bound "
                         "conduction states; bound conduction states there: "
                         + (", ".join(labels) or "none"))


def jump_notes(p: Parameter, values, state_energy, transition_energy,
               factor: float = 8.0) -> list:
    """Flag steps where a labelled state's energy jumps instead of moving smoothly.

    States are labelled by energy order among those found at each point; when
    a resonance appears or leaves (strong field, a state crossing the barrier
    edge) the label passes to another state and the curve jumps.  A step is
    flagged when it is ``factor`` times the median step of that curve (and
    above 1 meV).  Values across a flagged step belong to different states.
    """
    x = np.asarray(values, dtype=float)
    out = []
    series = list(state_energy.items()) + list(transition_energy.items())
    for name, e in series:
        e = np.asarray(e, dtype=float)
        d = np.abs(np.diff(e))
        ok = np.isfinite(d)
        if ok.sum() < 3:
            continue
        med = float(np.median(d[ok]))
        for i in np.nonzero(ok & (d > max(factor * med, 1e-3)))[0][:3]:
            out.append(f"{name} jumps by {1e3 * d[i]:.3g} meV between {p.path} = {x[i]:.6g} and "
                       f"{x[i + 1]:.6g}: the label passes to another state there (a resonance "
                       "appears or leaves); values across it are not one state")
    return out
