"""Growth tolerances: one-at-a-time shifts, worst case, corners, Monte Carlo, sensitivities.

Each parameter is moved by ± its tolerance alone; :func:`tolerance` sums the
wavelength shifts of one transition into a linear worst case, builds the two
corner designs and the root-sum-square, and optionally runs a Monte Carlo
over all parameters together.  :func:`sensitivities` gives the ± shifts of
several transitions at once (the report's sensitivity page).  Every design
goes through :func:`qwell.design.evaluate.evaluate_many`.

Wavelength sensitivities are given in engineering units: nm of wavelength
per monolayer (thickness; per nm when the layer has no lattice constant), per
0.01 of composition, per kV/cm and per K.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from ..errors import ParameterError, UnitError
from ..optics import canonical_transition
from ..stack_edit import Parameter, get_parameter, parameters
from ..units import parse_quantity, thickness_nm, to_float
from .evaluate import (DEFAULT_TOLERANCE_EV, DesignPoint, bands_for_transitions,
                       check_transitions, design_point, emit_warnings, evaluate_many)
from .growth import check_group, composition_groups, growth_rate_groups, parse_growth_rate
from .histogram import plot_monte_carlo

__all__ = ["Contribution", "GroupContribution", "MonteCarloSummary", "ToleranceResult", "Sensitivity",
           "SensitivityResult", "parse_parameter_value", "tolerance", "sensitivities"]


@dataclass(frozen=True)
class Contribution:
    """One parameter's share of the wavelength spread (one at a time, ±delta).

    Attributes
    ----------
    parameter : str
    unit : str
    value : float
        Nominal value.
    delta : float
        Tolerance in ``unit`` (±).
    spec : str
        The tolerance as given, e.g. ``'1 ML'``.
    wavelength_plus_um, wavelength_minus_um : float
        Wavelength at value + delta and value - delta [um].
    contribution_nm : float
        ``(λ+ - λ-)/2`` [nm], the signed linear contribution.
    """

    parameter: str
    unit: str
    value: float
    delta: float
    spec: str
    wavelength_plus_um: float
    wavelength_minus_um: float
    contribution_nm: float


@dataclass(frozen=True)
class GroupContribution:
    """One correlated growth error's share of the wavelength spread (its members together).

    Attributes
    ----------
    name : str
        E.g. ``'composition Al0.25Ga0.75As (x)'``, ``'growth rate GaAs'``.
    kind : {'composition', 'growth rate'}
    members : tuple of str
        Parameter paths moved together.
    spec : str
        The tolerance as given (``'0.01'``, ``'2%'``).
    wavelength_plus_um, wavelength_minus_um : float
        Wavelength with every member at value + delta (value - delta) [um].
    contribution_nm : float
        ``(λ+ - λ-)/2`` of the group design [nm] (signed).
    members_sum_nm : float
        Sum of the members' one-at-a-time signed contributions [nm]: the
        linear prediction of ``contribution_nm`` (equal in the linear regime).
    """

    name: str
    kind: str
    members: tuple
    spec: str
    wavelength_plus_um: float
    wavelength_minus_um: float
    contribution_nm: float
    members_sum_nm: float


@dataclass(frozen=True)
class MonteCarloSummary:
    """Statistics of the wavelength over random designs (correlated growth errors).

    Each composition group and each growth-rate group draws one random number
    for all its members; layer thicknesses and further parameters draw one
    each.

    Attributes
    ----------
    samples : int
        Designs drawn.
    valid : int
        Designs in which the transition exists.
    distribution : {'normal', 'uniform'}
        'normal': each error Gaussian with the tolerance as 1 sigma;
        'uniform': uniform on [-tolerance, +tolerance].
    seed : int or None
    mean_um, std_nm : float
        Mean wavelength [um] and its standard deviation (ddof=1) [nm] over the
        ``valid`` designs.
    percentiles_um : Mapping[int, float]
        5th, 50th and 95th percentiles over all ``samples`` designs [um]; NaN
        where lost designs make it undefined (see ``percentile_range_um``).
    clipped : int
        Samples where a value was clipped to its valid range.
    lost : int
        Designs in which the transition does not exist (``samples - valid``).
    lost_reasons : tuple of (str, int)
        What happened in the lost designs, with counts (e.g.
        ``('e2 not found (left the well)', 12)``).
    percentile_range_um : Mapping[int, tuple]
        Percentile over all samples with the lost designs ranked at the short
        end (low value) and at the long end (high value) [um]: where the
        percentile lies whatever wavelength the lost designs stood for; NaN
        where it falls among the lost ones.  Both equal ``percentiles_um``
        when none is lost.
    wavelengths_um : tuple of float
        The valid designs' wavelengths in sample order [um] (the histogram).
    """

    samples: int
    valid: int
    distribution: str
    seed: int | None
    mean_um: float
    std_nm: float
    percentiles_um: Mapping
    clipped: int = 0
    lost: int = 0
    lost_reasons: tuple = ()
    percentile_range_um: Mapping = field(default_factory=dict)
    wavelengths_um: tuple = field(default=(), repr=False)


@dataclass(frozen=True)
class ToleranceResult:
    """Result of :func:`tolerance`.

    Two views of the same tolerances:

    * **independent**: every parameter moved alone (``contributions``), summed
      as if each layer's error were its own (``independent_worst_case_nm``,
      ``independent_rss_nm``);
    * **correlated**, as growth errs: a composition error moves every layer of
      that composition together, a growth-rate error every layer of a
      material; each such group is one error source (``groups``), never split
      into root-sum-squared members.  ``worst_case_nm``, ``rss_nm`` and the
      corner designs are of this view.

    Attributes
    ----------
    transition : str
    nominal_energy_eV, nominal_wavelength_um : float
    contributions : tuple of Contribution
        One-at-a-time, per parameter (growth-rate rows per layer with
        ``spec`` ending in ``'rate'``).
    worst_case_nm : float
        Correlated linear worst case: sum of |contribution| over the error
        sources (layer thicknesses one by one, each group once, further
        parameters) [nm].
    corner_min_um, corner_max_um : float
        Wavelengths of the correlated corner designs: every source at the end
        of its range that lowers (raises) the wavelength [um].
    rss_nm : float
        Root-sum-square over the independent error sources, each correlated
        group one term [nm].
    monte_carlo : MonteCarloSummary or None
    notes : tuple of str
    bare_energy_eV, bare_wavelength_um : float
        The nominal line before the depolarisation shift (doped stacks; else
        the nominal line itself).
    depolarised : bool
        The line is the depolarisation-shifted one.
    groups : tuple of GroupContribution
    independent_worst_case_nm, independent_rss_nm : float
        Sum of |contribution| and root-sum-square over ``contributions`` [nm]
        (every parameter treated as independent).
    growth_rate : float
        Relative growth-rate error (0 when not given).
    """

    transition: str
    nominal_energy_eV: float
    nominal_wavelength_um: float
    contributions: tuple
    worst_case_nm: float
    corner_min_um: float
    corner_max_um: float
    rss_nm: float
    monte_carlo: MonteCarloSummary | None = None
    notes: tuple = ()
    bare_energy_eV: float = math.nan
    bare_wavelength_um: float = math.nan
    depolarised: bool = False
    groups: tuple = ()
    independent_worst_case_nm: float = math.nan
    independent_rss_nm: float = math.nan
    growth_rate: float = 0.0

    def plot(self, path, *, protect=(), title: str | None = None, unit: str | None = None):
        """Histogram PNG of the Monte Carlo (see :func:`qwell.design.histogram.plot_monte_carlo`)."""
        return plot_monte_carlo(self, path, protect=protect, title=title, unit=unit)


def parse_parameter_value(p: Parameter, value, *, delta: bool = False) -> float:
    """A value (or tolerance) for ``p`` from text with units, a number or a Quantity.

    Thickness: a length or monolayers (``'1 ML'`` uses the layer's a/2), or
    with ``delta=True`` a percentage of the thickness (``'2 %'``); numbers
    are nm.  Composition: a plain number (``'0.01'``).  Field: kV/cm;
    temperature: K (numbers are taken in these units only for composition).

    Raises
    ------
    UnitError, ParameterError
    """
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    text = value.strip() if isinstance(value, str) else value
    if p.kind == "thickness":
        if delta and isinstance(text, str) and text.endswith("%"):
            try:
                return float(text[:-1]) / 100.0 * p.value
            except ValueError:
                raise UnitError(f"{value!r}: expected a percentage such as '2 %'") from None
        return thickness_nm(text, p.monolayer_nm)
    if p.kind in ("x", "y"):
        try:
            return float(text)
        except (TypeError, ValueError):
            pass
        try:
            q = parse_quantity(text)
            return float(q.to("dimensionless").magnitude)
        except Exception:
            raise UnitError(f"{value!r}: expected a composition fraction such as 0.3") from None
    if p.kind == "field":
        return to_float(text, "kV/cm")
    return to_float(text, "K")


def _tolerance_items(stack, params, thickness_tol, composition_tol, extra):
    """[(Parameter, delta, spec text)] and notes."""
    notes = []
    items: dict = {}
    layer_keys = [p.layer for p in params.values() if p.kind == "thickness"]

    def check_keys(mapping, what):
        for k in mapping:
            if k != "*" and k not in layer_keys:
                raise ParameterError(f"{what} tolerance for unknown layer {k!r}; layers: "
                                     + ", ".join(layer_keys))

    if thickness_tol is None:
        thickness_tol = {}
    elif not isinstance(thickness_tol, Mapping):
        thickness_tol = {"*": thickness_tol}
    if composition_tol is None:
        composition_tol = {}
    elif not isinstance(composition_tol, Mapping):
        composition_tol = {"*": composition_tol}
    check_keys(thickness_tol, "thickness")
    check_keys(composition_tol, "composition")
    for key in layer_keys:
        p = params[f"{key}.thickness"]
        spec = thickness_tol.get(key, thickness_tol.get("*"))
        if spec is not None:
            try:
                d = _half_width(p, spec)
            except UnitError as exc:
                if key not in thickness_tol and p.monolayer_nm is None:
                    notes.append(f"{key}: no lattice constant, thickness tolerance {spec!r} "
                                 "skipped")
                    d = None
                else:
                    raise ParameterError(f"{p.path} tolerance: {exc}") from None
            if d is not None:
                items[p.path] = (p, d, str(spec))
        for k in ("x", "y"):
            pc = params.get(f"{key}.{k}")
            if pc is None:
                continue
            spec = composition_tol.get(key, composition_tol.get("*"))
            if spec is not None:
                items[pc.path] = (pc, _half_width(pc, spec), str(spec))
    for path, spec in dict(extra or {}).items():
        p = get_parameter(stack, path)
        items[p.path] = (p, _half_width(p, spec), str(spec))
    out = []
    for p, d, spec in items.values():
        if d == 0:
            continue
        if not math.isfinite(d):
            raise ParameterError(f"{p.path}: tolerance {spec!r} is not finite")
        out.append((p, d, spec))
    return out, notes


def _half_width(p: Parameter, spec) -> float:
    """A tolerance as a half-width >= 0 in the parameter's unit; negative -> ParameterError."""
    d = parse_parameter_value(p, spec, delta=True)
    if d < 0:
        raise ParameterError(f"{p.path}: tolerance {spec!r} is negative; expected a half-width "
                             ">= 0 (the spread is ± that value)")
    return d


def _clip_to_valid(p: Parameter, v: float) -> float:
    lo, hi = p.limits
    if p.kind in ("thickness", "temperature"):
        lo = 1e-6 * max(p.value, 1.0)
    if p.kind in ("x", "y"):
        hi = p.composition_max
    return min(max(v, lo), hi)


def tolerance(stack, transition: str = "e1-e2", thickness_tol=None, composition_tol=0.01,
              extra=None, *, growth_rate=None, monte_carlo: int = 0, seed=None,
              distribution: str = "normal", bands=None, jobs=None, dask=None,
              dask_timeout_s=None, progress=None) -> ToleranceResult:
    """Wavelength spread of ``transition`` from growth tolerances, independent and correlated.

    Each parameter is moved by ±tolerance one at a time (signed contribution
    ``(λ+ - λ-)/2``).  Growth errors are shared, so the correlated view moves
    every layer of one composition together (one cell setting) and, with
    ``growth_rate``, every layer of one material by the same percentage; each
    group is solved as one design and counted as one error source.  The
    worst case (sum of |contributions| over the sources), the corner designs
    and the root-sum-square (over independent sources only: a correlated
    group is one term, never split) are of the correlated view; the
    independent sums over every parameter are given beside them.  A repeated
    layer is varied in all its periods together.

    With ``monte_carlo=N`` the errors are drawn as growth makes them: one
    random number per composition group and per growth-rate group, one per
    layer thickness and further parameter (Gaussian with the tolerance as 1
    sigma, or uniform on ±tolerance).  Values crossing their valid range are
    clipped and counted; designs in which the transition no longer exists are
    counted with what happened, and the percentiles are over all samples
    with the lost ones stated (:class:`MonteCarloSummary`).

    Parameters
    ----------
    transition : str
    thickness_tol : str, float or Mapping, optional
        Layer name (or ``'*'`` for every layer) -> tolerance: ``'1 ML'``,
        ``'0.3 nm'``, ``'2 %'`` or a number in nm.  Default ``{'*': '1 ML'}``.
        Layers without a lattice constant skip a monolayer tolerance given
        through ``'*'`` (noted).
    composition_tol : float or Mapping
        Absolute tolerance of every composition fraction (x and y), or
        layer -> tolerance.  Layers without a composition are skipped.
    extra : Mapping, optional
        Further parameters: path -> tolerance (e.g. ``{'field': '2 kV/cm'}``).
    growth_rate : str or float, optional
        Relative growth-rate error of every material, ``'2%'`` or 0.02
        (None or 0: none).
    monte_carlo : int
        Number of random designs (0: none).
    seed : int, optional
        Seed of :func:`numpy.random.default_rng` (reproducible samples).
    distribution : {'normal', 'uniform'}

    Raises
    ------
    ParameterError
        Transition missing in the nominal design, unknown layers or paths,
        a growth rate negative or >= 100 %, a ±tolerance design outside the
        valid range (named).

    Examples
    --------
    >>> from qwell import load_stack, tolerance
    >>> res = tolerance(load_stack("layers/lwir-detector.yaml"), "e1-e2",
    ...                 thickness_tol="1 ML", composition_tol=0.01)
    >>> round(res.worst_case_nm)
    344
    """
    if thickness_tol is None:
        thickness_tol = {"*": "1 ML"}
    if distribution not in ("normal", "uniform"):
        raise ParameterError(f"distribution {distribution!r}: expected 'normal' or 'uniform'")
    n_mc = int(monte_carlo or 0)
    if n_mc < 0:
        raise ParameterError(f"monte_carlo = {monte_carlo!r}: expected a count >= 0")
    transition = canonical_transition(transition)
    rate = 0.0 if growth_rate is None else parse_growth_rate(growth_rate)
    rate_spec = "" if growth_rate is None else str(growth_rate).replace(" ", "")
    bands = bands_for_transitions([transition], bands)
    params = parameters(stack)
    nominal = design_point(stack, {}, bands=bands)
    check_transitions(nominal, [transition], "the nominal design")
    emit_warnings([nominal], stacklevel=2)
    items, notes = _tolerance_items(stack, params, thickness_tol, composition_tol, extra)
    lam0 = nominal.wavelength(transition)
    comp_groups = composition_groups(items)
    rate_groups = growth_rate_groups(stack, params, rate, rate_spec) if rate > 0 else []
    # one-at-a-time rows: every item, then each growth-rate member alone
    rows = list(items) + [(p, d, f"{rate_spec} rate") for g in rate_groups
                          for p, d in zip(g.members, g.deltas)]

    sets = []
    for p, d, _ in rows:
        for sg in (+1, -1):
            v = p.value + sg * d
            try:
                p.check(v)
            except ParameterError as exc:
                raise ParameterError(f"tolerance ±{d:.6g} {p.unit} on {p.path} "
                                     f"(nominal {p.value:.6g}) leaves the valid range: {exc}"
                                     ) from None
            sets.append({p.path: v})
    # groups of several members need their own designs (one member: its row is the group)
    multi = [g for g in comp_groups + rate_groups if len(g.members) > 1]
    for g in multi:
        for sg in (+1, -1):
            check_group(g, sg)
            sets.append(g.values(sg))
    needed = tuple(transition.split("-"))
    pm = evaluate_many(stack, sets, bands=bands, jobs=jobs, dask=dask,
                       dask_timeout_s=dask_timeout_s, progress=progress, label="tolerance",
                       needed=needed)
    contributions = []
    for k, (p, d, spec) in enumerate(rows):
        lp, lm = pm[2 * k].wavelength(transition), pm[2 * k + 1].wavelength(transition)
        if not (math.isfinite(lp) and math.isfinite(lm)):
            notes.append(f"{p.path} ±{d:.4g}: {transition} does not exist at one end")
        contributions.append(Contribution(parameter=p.path, unit=p.unit, value=p.value, delta=d,
                                          spec=spec, wavelength_plus_um=lp,
                                          wavelength_minus_um=lm,
                                          contribution_nm=0.5 * (lp - lm) * 1e3))
    n_items = len(items)
    item_c = {(p.path, spec): c for (p, _, spec), c in zip(rows, contributions)}
    group_results = []
    base = 2 * len(rows)
    for g in comp_groups + rate_groups:
        specs = [f"{rate_spec} rate"] * len(g.members) if g.kind == "growth rate" else None
        member_cs = []
        for j, p in enumerate(g.members):
            if specs is not None:
                member_cs.append(item_c[(p.path, specs[j])])
            else:
                member_cs.append(next(c for (q, _, _), c in zip(items, contributions)
                                      if q.path == p.path))
        if len(g.members) > 1:
            i = base + 2 * multi.index(g)
            lp, lm = pm[i].wavelength(transition), pm[i + 1].wavelength(transition)
            if not (math.isfinite(lp) and math.isfinite(lm)):
                notes.append(f"{g.name} ±{g.spec}: {transition} does not exist at one end")
        else:
            lp, lm = member_cs[0].wavelength_plus_um, member_cs[0].wavelength_minus_um
        group_results.append(GroupContribution(
            name=g.name, kind=g.kind, members=g.paths, spec=g.spec, wavelength_plus_um=lp,
            wavelength_minus_um=lm, contribution_nm=0.5 * (lp - lm) * 1e3,
            members_sum_nm=float(sum(c.contribution_nm for c in member_cs))))

    # independent view: every one-at-a-time row on its own
    c_ind = np.array([x.contribution_nm for x in contributions])
    worst_ind = float(np.sum(np.abs(c_ind))) if c_ind.size else 0.0
    rss_ind = float(np.sqrt(np.sum(c_ind ** 2))) if c_ind.size else 0.0
    # correlated view: thickness and further items alone, each group once
    sources = [(dict([(p.path, (p, d))]), c.contribution_nm)
               for (p, d, _), c in zip(items, contributions[:n_items]) if p.kind not in ("x", "y")]
    for g, gr in zip(comp_groups + rate_groups, group_results):
        sources.append(({p.path: (p, d) for p, d in zip(g.members, g.deltas)},
                        gr.contribution_nm))
    c_cor = np.array([c for _, c in sources])
    worst = float(np.sum(np.abs(c_cor))) if c_cor.size else 0.0
    rss = float(np.sqrt(np.sum(c_cor ** 2))) if c_cor.size else 0.0
    up, down = {}, {}
    for members, ci in sources:
        if ci == 0 or not math.isfinite(ci):
            continue
        sg = 1.0 if ci > 0 else -1.0
        for path, (p, d) in members.items():
            # thickness moved by its own tolerance and by a growth-rate group add up
            up[path] = up.get(path, p.value) + sg * d
            down[path] = down.get(path, p.value) - sg * d
    for vals in (up, down):
        for path, v in vals.items():
            vals[path] = _clip_to_valid(params[path], v)
    corners = evaluate_many(stack, [down, up], bands=bands, jobs=1, needed=needed,
                            record_errors=True)
    corner_min, corner_max = corners[0].wavelength(transition), corners[1].wavelength(transition)
    for name, pt in (("low", corners[0]), ("high", corners[1])):
        if not math.isfinite(pt.wavelength(transition)):
            notes.append(f"{name}-wavelength corner design: {_why_lost(pt, needed)}")

    mc = None
    if n_mc:
        mc = _monte_carlo(stack, items, rate_groups, transition, needed, n_mc, seed,
                          distribution, bands, notes, jobs=jobs, dask=dask,
                          dask_timeout_s=dask_timeout_s, progress=progress)
    return ToleranceResult(transition=transition,
                           nominal_energy_eV=nominal.transition_energy(transition),
                           nominal_wavelength_um=lam0, contributions=tuple(contributions),
                           worst_case_nm=worst, corner_min_um=corner_min, corner_max_um=corner_max,
                           rss_nm=rss, monte_carlo=mc, notes=tuple(dict.fromkeys(notes)),
                           groups=tuple(group_results), independent_worst_case_nm=worst_ind,
                           independent_rss_nm=rss_ind, growth_rate=rate,
                           bare_energy_eV=nominal.bare_energy(transition),
                           bare_wavelength_um=nominal.bare_wavelength(transition),
                           depolarised=transition in {n for n, _, _ in nominal.bare_transitions})


def _why_lost(pt: DesignPoint, needed) -> str:
    """What happened in a design without the transition."""
    if pt.error is not None:
        return f"solve failed ({pt.error.splitlines()[0][:120]})"
    have = {lab for lab, _, _ in pt.states}
    missing = [lab for lab in needed if lab not in have]
    if missing:
        return " and ".join(missing) + " not found (left the well)"
    return "both states found but the line is not listed"


def _percentile_at(sorted_vals: np.ndarray, pos: float) -> float:
    """Linear-interpolated order statistic at fractional rank ``pos``; NaN outside."""
    n = sorted_vals.size
    if n == 0 or pos < -1e-9 or pos > n - 1 + 1e-9:
        return math.nan
    pos = min(max(pos, 0.0), n - 1.0)
    lo = int(math.floor(pos))
    hi = min(lo + 1, n - 1)
    return float(sorted_vals[lo] + (pos - lo) * (sorted_vals[hi] - sorted_vals[lo]))


def percentiles_over_all(kept_um, samples: int, qs=(5, 50, 95)) -> dict:
    """Percentiles over all ``samples`` designs, the lost ones ranked at either end.

    Returns q -> (value with the lost ranked at the short-wavelength end,
    value with them at the long end) [um], low before high; NaN where the
    percentile falls among the lost designs.  With none lost both equal
    :func:`numpy.percentile` (linear interpolation).
    """
    s = np.sort(np.asarray(kept_um, dtype=float))
    lost = samples - s.size
    out = {}
    for q in qs:
        r = q / 100.0 * (samples - 1)
        out[q] = (_percentile_at(s, r - lost), _percentile_at(s, r))
    return out


def _monte_carlo(stack, items, rate_groups, transition, needed, n_mc, seed, distribution,
                 bands, notes, **par) -> MonteCarloSummary:
    """Random designs with correlated growth errors; lost designs counted and explained."""
    comp_groups = composition_groups(items)
    # error sources: one column each
    singles = [(p, d) for p, d, _ in items if p.kind not in ("x", "y")]
    n_cols = len(singles) + len(comp_groups) + len(rate_groups)
    rng = np.random.default_rng(seed)
    shape = (n_mc, n_cols)
    z = rng.standard_normal(shape) if distribution == "normal" else rng.uniform(-1, 1, shape)
    params = {p.path: p for p, _ in singles}
    for g in comp_groups + rate_groups:
        params.update({p.path: p for p in g.members})
    clipped = 0
    sample_sets = []
    for i in range(n_mc):
        shift: dict = {}
        col = 0
        for p, d in singles:
            shift[p.path] = shift.get(p.path, 0.0) + d * z[i, col]
            col += 1
        for g in comp_groups + rate_groups:
            for p, d in zip(g.members, g.deltas):
                shift[p.path] = shift.get(p.path, 0.0) + d * z[i, col]
            col += 1
        d_i = {}
        hit = False
        for path, dv in shift.items():
            v = params[path].value + dv
            cv = _clip_to_valid(params[path], v)
            hit = hit or cv != v
            d_i[path] = cv
        clipped += hit
        sample_sets.append(d_i)
    pts = evaluate_many(stack, sample_sets, bands=bands, label="Monte Carlo", needed=needed,
                        record_errors=True, **par)
    lam = np.array([pt.wavelength(transition) for pt in pts])
    good = np.isfinite(lam)
    ok = lam[good]
    reasons: dict = {}
    for pt, g in zip(pts, good):
        if not g:
            why = _why_lost(pt, needed)
            reasons[why] = reasons.get(why, 0) + 1
    lost = int(lam.size - ok.size)
    if clipped:
        notes.append(f"Monte Carlo: {clipped} of {n_mc} designs had a value clipped to its "
                     "valid range")
    rng_pct = percentiles_over_all(ok, n_mc)
    pct = {q: (a if a == b else math.nan) for q, (a, b) in rng_pct.items()}
    return MonteCarloSummary(samples=n_mc, valid=int(ok.size), distribution=distribution,
                             seed=seed, mean_um=float(np.mean(ok)) if ok.size else math.nan,
                             std_nm=float(np.std(ok, ddof=1)) * 1e3 if ok.size > 1 else math.nan,
                             percentiles_um=pct, clipped=int(clipped), lost=lost,
                             lost_reasons=tuple(reasons.items()), percentile_range_um=rng_pct,
                             wavelengths_um=tuple(float(v) for v in ok))


# ---------------------------------------------------------------------------
# one-at-a-time sensitivities of several transitions (the report's sensitivity page)
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Sensitivity:
    """Wavelength shift of one transition when one parameter moves by ± its step.

    Attributes
    ----------
    transition : str
        E.g. ``'e1-e2'``.
    parameter : str
        Parameter path, e.g. ``'well.thickness'``.
    layer : str or None
        Written layer name (or ``L<n>`` label); None for field or temperature.
    kind : {'thickness', 'x', 'y', 'field', 'temperature'}
    family : str or None
        Alloy family of a composition parameter (``'AlGaAs'``).
    step : float
        The step (±) in the parameter's unit (nm, fraction, kV/cm, K).
    spec : str
        The step as given, e.g. ``'1 ML'`` or ``'0.01'``.
    wavelength_minus_um, wavelength_plus_um : float
        Wavelength at value - step and value + step [um]; NaN where that
        side lies outside the valid range, failed to build or solve, or the
        transition does not exist there.
    minus_nm, plus_nm : float
        ``1e3 (λ_side - λ_nominal)`` [nm]; NaN as above.
    per_step_nm : float
        ``(plus_nm - minus_nm) / 2`` with both sides, ``plus_nm`` or
        ``-minus_nm`` with one (one-sided), NaN with none [nm per step].
    note : str
        Empty, or why a side is missing / the value is one-sided.
    """

    transition: str
    parameter: str
    layer: str | None
    kind: str
    family: str | None
    step: float
    spec: str
    wavelength_minus_um: float
    wavelength_plus_um: float
    minus_nm: float
    plus_nm: float
    per_step_nm: float
    note: str = ""


@dataclass(frozen=True)
class SensitivityResult:
    """Result of :func:`sensitivities`.

    Attributes
    ----------
    transitions : tuple of str
    nominal : DesignPoint
        The unchanged design.
    nominal_wavelength_um, nominal_energy_eV : Mapping[str, float]
        Transition -> wavelength [um] / photon energy [eV] of the nominal design.
    parameters : tuple of Parameter
        The parameters varied, in stack order.
    steps : Mapping[str, float]
        Parameter path -> step (±) in its unit.
    rows : tuple of Sensitivity
        Grouped by transition (in the order given), then parameter.
    notes : tuple of str
        Parameters skipped, sides that failed to build or solve.
    """

    transitions: tuple
    nominal: DesignPoint = field(repr=False)
    nominal_wavelength_um: Mapping
    nominal_energy_eV: Mapping
    parameters: tuple
    steps: Mapping
    rows: tuple
    notes: tuple = ()

    def rows_for(self, transition: str) -> tuple:
        """The rows of one transition, in parameter order."""
        return tuple(r for r in self.rows if r.transition == transition)


_SIDE = {-1: "−", +1: "+"}


def sensitivities(stack, transitions=("e1-e2",), thickness_tol="1 ML", composition_tol=0.01,
                  extra=None, *, bands=None, tolerance_eV: float = DEFAULT_TOLERANCE_EV,
                  jobs=None, dask=None, dask_timeout_s=None,
                  progress=None) -> SensitivityResult:
    """Wavelength shifts of several transitions, each parameter moved alone by ± its step.

    Every layer thickness (by ``thickness_tol``, default one monolayer) and
    every composition fraction (by ``composition_tol``, default 0.01) is moved
    down and up alone; a named layer inside a repeat block changes in every
    period.  All shifted designs go through one :func:`evaluate_many` call and
    each gives every requested transition, so N parameters cost 2N solves
    whatever the number of transitions.  The wavelength is that of the exact
    solver's transition, ``λ = hc / |E_f - E_i|``.

    Parameters
    ----------
    stack : Stack
    transitions : str or sequence of str
        E.g. ``('e1-e2', 'e1-hh1')``; each must exist in the nominal design.
    thickness_tol, composition_tol, extra
        Steps as in :func:`tolerance` (``'1 ML'``, ``'0.3 nm'``, ``'2 %'``, a
        number in nm, or layer (``'*'`` for all) -> step; a composition
        fraction or layer -> fraction; ``extra`` path -> step, e.g.
        ``{'field': '1 kV/cm'}``).  None or 0: not varied.
    bands : sequence of str, optional
        Extra bands to solve (those of the transitions are always solved).
    tolerance_eV : float
        Energy tolerance of the exact solver [eV].
    jobs, dask, dask_timeout_s, progress
        Parallel execution (see :func:`qwell.parallel.map_chunked`).

    Returns
    -------
    SensitivityResult
        A side outside the valid range is skipped (the row is one-sided); a
        side that cannot be built or solved is NaN and noted, not raised.
        Layers without a lattice constant skip a monolayer step given through
        ``'*'`` (noted).  Quasi-bound resonances are searched only when a
        needed state is not truly bound (bound energies are the same either
        way).

    Raises
    ------
    ParameterError
        No transition, a transition missing in the nominal design (the
        message lists the available ones), unknown layers or paths, a
        negative step.

    Examples
    --------
    >>> from qwell.stack import load_stack
    >>> res = sensitivities(load_stack("layers/pump-laser-well.yaml"), ("e1-hh1", "e1-lh1"))
    >>> [r.parameter for r in res.rows_for("e1-hh1")]
    ['lower_guide.thickness', 'well.thickness', 'well.x', 'upper_guide.thickness']
    >>> round(res.rows_for("e1-hh1")[1].per_step_nm, 2)  # nm per monolayer of the well
    1.81
    """
    names = [transitions] if isinstance(transitions, str) else list(transitions or ())
    if not names:
        raise ParameterError("no transition given; expected names such as e1-e2 or e1-hh1")
    names = [canonical_transition(n) for n in names]
    bands = bands_for_transitions(names, bands)
    needed = tuple(dict.fromkeys(lab for n in names for lab in n.split("-")))
    params = parameters(stack)
    nominal = design_point(stack, {}, bands=bands, needed=needed, tolerance_eV=tolerance_eV)
    check_transitions(nominal, names, "the nominal design")
    emit_warnings([nominal], stacklevel=2)
    items, notes = _tolerance_items(stack, params, thickness_tol, composition_tol, extra)
    unnamed = [layer.label for layer in stack.layers
               if layer.name is None and layer.repeat_block is not None]
    if unnamed:
        notes.append("unnamed layers inside a repeat block have no parameter path and were not "
                     "varied: " + ", ".join(unnamed[:8]) + (" …" if len(unnamed) > 8 else ""))

    sets, where = [], {}
    for k, (p, d, _) in enumerate(items):
        for s in (-1, +1):
            v = p.value + s * d
            try:
                p.check(v)
            except ParameterError:
                continue
            where[(k, s)] = len(sets)
            sets.append({p.path: v})
    points = evaluate_many(stack, sets, bands=bands, jobs=jobs, dask=dask,
                           dask_timeout_s=dask_timeout_s, progress=progress,
                           label="sensitivity", needed=needed, tolerance_eV=tolerance_eV,
                           record_errors=True)
    for (k, s), i in where.items():
        if points[i].error is not None:
            p, _, spec = items[k]
            notes.append(f"{p.path} {_SIDE[s]}{spec}: {points[i].error}")

    lam0 = {n: nominal.wavelength(n) for n in names}
    rows = []
    for n in names:
        for k, (p, d, spec) in enumerate(items):
            lam, shift, why = {}, {}, []
            for s in (-1, +1):
                i = where.get((k, s))
                lam[s] = math.nan if i is None else points[i].wavelength(n)
                shift[s] = 1e3 * (lam[s] - lam0[n])
                if i is None:
                    why.append(f"{_SIDE[s]}step outside the valid range")
                elif points[i].error is not None:
                    why.append(f"{_SIDE[s]}step failed ({points[i].error})")
                elif not math.isfinite(lam[s]):
                    why.append(f"{_SIDE[s]}step: {n} not found (a state left the well)")
            mi, pl = shift[-1], shift[+1]
            if math.isfinite(mi) and math.isfinite(pl):
                per = 0.5 * (pl - mi)
            elif math.isfinite(pl):
                per = pl
                why.append("one-sided (+ step only)")
            elif math.isfinite(mi):
                per = -mi
                why.append("one-sided (− step only)")
            else:
                per = math.nan
            rows.append(Sensitivity(transition=n, parameter=p.path, layer=p.layer, kind=p.kind,
                                    family=p.family, step=d, spec=spec,
                                    wavelength_minus_um=lam[-1], wavelength_plus_um=lam[+1],
                                    minus_nm=mi, plus_nm=pl, per_step_nm=per,
                                    note="; ".join(why)))
    return SensitivityResult(transitions=tuple(names), nominal=nominal,
                             nominal_wavelength_um=lam0,
                             nominal_energy_eV={n: nominal.transition_energy(n) for n in names},
                             parameters=tuple(p for p, _, _ in items),
                             steps={p.path: d for p, d, _ in items}, rows=tuple(rows),
                             notes=tuple(dict.fromkeys(notes)))
