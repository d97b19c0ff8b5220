"""Sizing: the parameter value that puts a transition at a target photon energy."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..constants import HC_EV_UM
from ..errors import ConvergenceError, ParameterError
from ..optics import canonical_transition
from ..spectral import auto_unit, energy_text, format_line, from_eV, unit_label
from ..stack_edit import Parameter, apply_parameters, get_parameter
from ..units import is_quantity, spectral_to_eV
from .evaluate import (bands_for_transitions, check_transitions, design_point, emit_warnings,
                       evaluate_many, jump_notes)

__all__ = ["MonolayerOption", "SizeResult", "size"]


def _where(p: Parameter | None, v: float | None = None) -> str:
    if p is None:
        return "the start point"
    return f"the start point ({p.describe(p.value if v is None else v)})"


@dataclass(frozen=True)
class MonolayerOption:
    """A whole-monolayer thickness near the sized value.

    Attributes
    ----------
    monolayers : int
    thickness_nm : float
    wavelength_um, energy_eV : float
        Of the sized transition; NaN if it does not exist there.
    emitter : tuple of (key, value)
        With an emitter line: its lifetimes and figure of merit at this thickness
        (see :class:`~qwell.design.evaluate.DesignPoint`).
    """

    monolayers: int
    thickness_nm: float
    wavelength_um: float
    energy_eV: float
    emitter: tuple = ()


@dataclass(frozen=True)
class SizeResult:
    """Result of :func:`size`.

    Attributes
    ----------
    parameter : str
    unit : str
    value : float
        Sized value in ``unit``.
    transition : str
    target_energy_eV, target_wavelength_um : float
    energy_eV, wavelength_um : float
        Of the transition at ``value``.
    monolayer_options : tuple of MonolayerOption
        Whole monolayers below and above (thickness parameters only).
    bracket : tuple of float
        The bracket the root was found in.
    evaluations : int
        Designs solved.
    stack : Stack
        The sized stack.
    notes : tuple of str
    bare_energy_eV, bare_wavelength_um : float
        The line before the depolarisation shift (doped stacks; else the same
        as ``energy_eV``, ``wavelength_um``).
    depolarised : bool
        The sized line is the depolarisation-shifted one.
    emitter : tuple of (key, value)
        With an emitter line: its name, LO-phonon lifetimes and figure of merit at the sized
        value (keys ``line`` and :data:`~qwell.design.evaluate.EMITTER_KEYS`).
    lifetimes_ps : tuple of (label, tau_ps)
        With an emitter line: LO-phonon lifetime of each bound conduction state [ps].
    """

    parameter: str
    unit: str
    value: float
    transition: str
    target_energy_eV: float
    target_wavelength_um: float
    energy_eV: float
    wavelength_um: float
    monolayer_options: tuple = ()
    bracket: tuple = ()
    evaluations: int = 0
    stack: object = field(default=None, repr=False, compare=False)
    notes: tuple = ()
    bare_energy_eV: float = math.nan
    bare_wavelength_um: float = math.nan
    depolarised: bool = False
    emitter: tuple = ()
    lifetimes_ps: tuple = ()

    @property
    def relative_error(self) -> float:
        """(E - E_target) / E_target."""
        return (self.energy_eV - self.target_energy_eV) / self.target_energy_eV


def _default_bounds(p: Parameter) -> tuple[float, float]:
    v = p.value
    if p.kind == "thickness":
        lo = max(0.2 * v, p.monolayer_nm or 0.1, 0.1)
        return min(lo, v), max(4.0 * v, v + 10.0)
    if p.kind in ("x", "y"):
        return 0.0, p.composition_max
    if p.kind == "field":
        return v - 100.0, v + 100.0
    return max(1.0, 0.25 * v), min(1500.0, 3.0 * v)


def _target_eV(target) -> float:
    if isinstance(target, str) or is_quantity(target):
        return spectral_to_eV(target)
    t = float(target)
    if not (math.isfinite(t) and t > 0):
        raise ParameterError(f"target {target!r}: expected a positive photon energy in eV")
    return t


def _fmt_range(a, b, unit):
    u = "" if unit == "fraction" else f" {unit}"
    return f"{a:.4g}..{b:.4g}{u}"


def _existence_limit(stack, p, inside, outside, name, bands, evals, steps=30):
    """Bisect between a value where ``name`` exists and one where it does not."""
    a, b = inside, outside
    last_missing = None
    for _ in range(steps):
        mid = 0.5 * (a + b)
        pt = design_point(stack, {p.path: mid}, bands=bands)
        evals[0] += 1
        if name in pt.transition_names:
            a = mid
        else:
            b = mid
            last_missing = pt
        if abs(b - a) <= 1e-4 * max(abs(a), abs(b), 1e-3):
            break
    return a, last_missing


def _why_missing(name, point):
    if point is None:
        return f"{name} is not found"
    i, j = name.split("-")
    labels = [s[0] for s in point.states]
    gone = [lab for lab in (j, i) if lab not in labels]
    if gone:
        return f"{gone[0]} is not bound"
    return f"{name} is not found"


def size(stack, parameter: str, target_eV, transition: str = "e1-e2", *, bounds=None,
         bands=None, scan_points: int = 25, jobs=1, dask=None, dask_timeout_s=None,
         progress=None, emitter: str | None = None) -> SizeResult:
    """Find the parameter value that puts ``transition`` at the target photon energy.

    The transition energy is scanned over ``bounds`` (default: a wide range
    around the current value), a sign change of ``E - E_target`` closest to
    the current value is bracketed, and :func:`scipy.optimize.brentq` refines
    it on the exact solver (``xtol`` 1e-12 of the range).  The value is then
    rounded to 10 significant digits and the reported energy is solved at
    exactly that value (the stack :attr:`SizeResult.stack` holds).

    Parameters
    ----------
    stack : Stack
    parameter : str
        A parameter path (see :func:`parameters`).
    target_eV : float or str
        Photon energy [eV], or a spectral quantity such as ``'4.6 um'``,
        ``'270 meV'``, ``'2170 cm^-1'``, ``'65 THz'``.
    transition : str
        E.g. ``'e1-e2'`` or ``'e1-hh1'``.
    bounds : (float, float), optional
        Search range in the parameter's unit.
    emitter : str, optional
        An intersubband line (``'e2-e3'``): its LO-phonon lifetimes and figure of merit are
        reported at the sized value and at the whole-monolayer options.

    Raises
    ------
    ParameterError
        Unknown parameter, a transition missing at the start point, invalid
        bounds, or a target out of reach (the message gives the reachable
        range and why it ends).

    Examples
    --------
    >>> from qwell import load_stack, size
    >>> res = size(load_stack("layers/lwir-detector.yaml"), "well.thickness", "9 um",
    ...            transition="e1-e2")
    >>> round(res.value, 3)                 # nm
    6.211
    """
    from scipy.optimize import brentq  # heavy; only sizing needs it

    p = get_parameter(stack, parameter)
    e_target = _target_eV(target_eV)
    transition = canonical_transition(transition)
    bands = bands_for_transitions([transition], bands)
    start = design_point(stack, {p.path: p.value}, bands=bands)
    check_transitions(start, [transition], _where(p))
    evals = [1]
    lo, hi = bounds if bounds is not None else _default_bounds(p)
    lo, hi = float(lo), float(hi)
    if not lo < hi:
        raise ParameterError(f"{p.path}: search range {lo:.6g}..{hi:.6g} is empty; expected "
                             "from < to")
    for v in (lo, hi):
        if p.kind in ("thickness", "temperature") and not v > 0 or \
                p.kind in ("x", "y") and not 0.0 <= v <= 1.0:
            p.check(v)
    n = max(int(scan_points), 3)
    grid = np.unique(np.concatenate([np.linspace(lo, hi, n), [p.value] if lo <= p.value <= hi
                                     else []]))
    pts = evaluate_many(stack, [{p.path: float(v)} for v in grid], bands=bands, jobs=jobs,
                        dask=dask, dask_timeout_s=dask_timeout_s, progress=progress,
                        label="size scan")
    evals[0] += len(pts)
    energies = np.array([pt.transition_energy(transition) for pt in pts])
    f = energies - e_target
    finite = np.isfinite(f)
    brackets = [(k, k + 1) for k in range(len(grid) - 1)
                if finite[k] and finite[k + 1] and (f[k] == 0 or f[k] * f[k + 1] < 0)]
    lam_t = HC_EV_UM / e_target
    if not brackets:
        if not finite.any():
            raise ParameterError(f"{transition} does not exist anywhere in {p.path} "
                                 f"{_fmt_range(lo, hi, p.unit)}")
        emin, emax = float(np.nanmin(energies)), float(np.nanmax(energies))
        idx = np.flatnonzero(finite)
        # the end of the reachable range on the side of the target, and why it ends there
        k_ext = int(idx[np.argmax(energies[idx])] if e_target > emax
                    else idx[np.argmin(energies[idx])])
        reasons = []
        if k_ext == idx[0] and idx[0] > 0:
            lim, miss = _existence_limit(stack, p, grid[idx[0]], grid[idx[0] - 1], transition,
                                         bands, evals)
            reasons.append(f"{_why_missing(transition, miss)} below {p.describe(lim)}")
        elif k_ext == idx[-1] and idx[-1] < len(grid) - 1:
            lim, miss = _existence_limit(stack, p, grid[idx[-1]], grid[idx[-1] + 1], transition,
                                         bands, evals)
            reasons.append(f"{_why_missing(transition, miss)} beyond {p.describe(lim)}")
        elif k_ext in (0, len(grid) - 1):
            reasons.append(f"the search range ends at {p.describe(grid[k_ext])} "
                           "(widen it with --from/--to)")
        else:
            reasons.append(f"{transition} has its {'largest' if e_target > emax else 'smallest'} "
                           f"energy near {p.describe(grid[k_ext])}, inside the range")
        u = auto_unit(e_target)
        ends = sorted((float(from_eV(emin, u)), float(from_eV(emax, u))))
        raise ParameterError(
            f"target {format_line(e_target, u)} ({energy_text(e_target, u, 5)}) is out of reach by varying "
            f"{p.path} over {_fmt_range(lo, hi, p.unit)}: {transition} spans "
            f"{ends[0]:.5g}..{ends[1]:.5g} {unit_label(u)} ({emin:.5g}..{emax:.5g} eV)"
            + ("; " + "; ".join(reasons) if reasons else ""))
    k0 = min(brackets, key=lambda b: abs(0.5 * (grid[b[0]] + grid[b[1]]) - p.value))
    a, b = float(grid[k0[0]]), float(grid[k0[1]])
    notes = []
    if len(brackets) > 1:
        notes.append(f"{len(brackets)} solutions in {_fmt_range(lo, hi, p.unit)}; took the one "
                     f"nearest the current value {p.describe(p.value)}")

    def fun(v):
        pt = design_point(stack, {p.path: v}, bands=bands)
        evals[0] += 1
        e = pt.transition_energy(transition)
        if not math.isfinite(e):
            raise ConvergenceError(f"{transition} vanished at {p.describe(v)} inside the bracket "
                                   f"{_fmt_range(a, b, p.unit)}")
        return e - e_target

    if f[k0[0]] == 0:
        root = a
    elif f[k0[1]] == 0:
        root = b
    else:
        root = brentq(fun, a, b, xtol=1e-12 * (hi - lo), rtol=8.9e-16, maxiter=200)
    value = float(f"{root:.10g}")
    value = min(max(value, a), b)
    final = design_point(stack, {p.path: value}, bands=bands, emitter=emitter)
    evals[0] += 1
    if emitter is not None and not final.emitter:
        notes.append(f"emitter line {emitter!r} does not exist at the sized value "
                     "(it needs two bound conduction states)")
    emit_warnings([final], stacklevel=2)
    e = final.transition_energy(transition)
    if not abs(e - e_target) <= max(1e-6 * abs(e_target), 1e-7):
        # brentq closed in on a discontinuity, not a root: the label changed state there
        raise ParameterError(
            f"target {format_line(e_target, auto_unit(e_target))} falls on a jump of the {transition} curve near "
            f"{p.describe(value)} ({format_line(e, auto_unit(e_target))} there): the label passes to another "
            "state at that point (a resonance appears or leaves), so no design in "
            f"{_fmt_range(a, b, p.unit)} hits the target; see 'qwell sweep' over {p.path}")
    notes += jump_notes(p, grid, {}, {transition: energies})
    options = []
    if p.kind == "thickness" and p.monolayer_nm:
        q = value / p.monolayer_nm
        ns = sorted({int(math.floor(q + 1e-9)), int(math.ceil(q - 1e-9))})
        for nml in ns:
            if nml < 1:
                continue
            t = nml * p.monolayer_nm
            pt = design_point(stack, {p.path: t}, bands=bands, emitter=emitter)
            evals[0] += 1
            options.append(MonolayerOption(monolayers=nml, thickness_nm=t,
                                           wavelength_um=pt.wavelength(transition),
                                           energy_eV=pt.transition_energy(transition),
                                           emitter=pt.emitter))
    return SizeResult(parameter=p.path, unit=p.unit, value=value, transition=transition,
                      target_energy_eV=e_target, target_wavelength_um=lam_t, energy_eV=e,
                      wavelength_um=final.wavelength(transition),
                      monolayer_options=tuple(options), bracket=(a, b), evaluations=evals[0],
                      stack=apply_parameters(stack, {p.path: value}), notes=tuple(notes),
                      bare_energy_eV=final.bare_energy(transition),
                      bare_wavelength_um=final.bare_wavelength(transition),
                      depolarised=transition in {n for n, _, _ in final.bare_transitions},
                      emitter=final.emitter, lifetimes_ps=final.lifetimes_ps)
