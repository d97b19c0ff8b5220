"""Sweeps: a stack solved over a 1-D or 2-D grid of parameter values."""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from ..errors import ParameterError
from ..fileio import atomic_savefig
from ..stack_edit import Parameter, get_parameter
from .evaluate import (LABEL_RE, DesignPoint, bands_for_transitions, check_transitions,
                       design_point, emit_warnings, evaluate_many, jump_notes)

__all__ = ["SweepResult", "sweep"]

# Steps of the "local" (central-difference) sensitivity, in the value's unit.
_LOCAL_STEP = {"thickness": 0.01, "x": 1e-3, "y": 1e-3, "field": 0.1, "temperature": 0.1}


@dataclass(frozen=True, eq=False)
class SweepResult:
    """Result of :func:`sweep` (1-D or 2-D).

    Arrays have the grid shape ``(n1,)`` or ``(n1, n2)``; NaN where a state
    or transition does not exist.

    Attributes
    ----------
    parameters : tuple of str
    units : tuple of str
    values : tuple of numpy.ndarray
        Grid values of each parameter (in its unit).
    state_labels : tuple of str
    state_energy_eV : Mapping[str, ndarray]
        Band-diagram energies [eV].
    state_bound : Mapping[str, ndarray]
        True where the state is truly bound (False: quasi-bound or absent).
    transitions : tuple of str
    energy_eV, wavelength_um : Mapping[str, ndarray]
    sensitivity : Mapping[str, Mapping[str, ndarray]]
        transition -> parameter -> dλ/dp in nm per engineering unit.
    sensitivity_units : Mapping[str, str]
        parameter -> e.g. 'nm/ML'.
    sensitivity_method : {'grid', 'local'}
        'grid': second-order finite differences over the sweep grid
        (numpy.gradient); 'local': central differences with a small step
        around each point (extra solves).
    points : tuple of DesignPoint
        Flat, C order.
    notes : tuple of str
    """

    parameters: tuple
    units: tuple
    values: tuple
    state_labels: tuple
    state_energy_eV: Mapping
    state_bound: Mapping
    transitions: tuple
    energy_eV: Mapping
    wavelength_um: Mapping
    sensitivity: Mapping
    sensitivity_units: Mapping
    sensitivity_method: str
    points: tuple = field(repr=False, default=())
    notes: tuple = ()

    @property
    def shape(self) -> tuple:
        return tuple(len(v) for v in self.values)

    def point(self, *index) -> DesignPoint:
        """The design point at a grid index (``i`` or ``i, j``)."""
        return self.points[int(np.ravel_multi_index(index, self.shape))]

    def to_json(self) -> dict:
        def lst(a):
            a = np.asarray(a, dtype=float)
            return np.where(np.isfinite(a), a, np.nan).tolist()

        def nulls(o):
            if isinstance(o, float) and not math.isfinite(o):
                return None
            if isinstance(o, list):
                return [nulls(v) for v in o]
            return o

        one = len(self.parameters) == 1
        states = {lab: nulls(lst(self.state_energy_eV[lab])) for lab in self.state_labels}
        bound = {lab: np.asarray(self.state_bound[lab]).tolist() for lab in self.state_labels}
        trans = {}
        for t in self.transitions:
            sens = {p: nulls(lst(self.sensitivity[t][p])) for p in self.parameters}
            trans[t] = {"energy_eV": nulls(lst(self.energy_eV[t])),
                        "wavelength_um": nulls(lst(self.wavelength_um[t])),
                        "sensitivity_nm_per_unit": sens[self.parameters[0]] if one else sens}
        return {
            "parameter": self.parameters[0] if one else list(self.parameters),
            "unit": self.units[0] if one else list(self.units),
            "values": lst(self.values[0]) if one else [lst(v) for v in self.values],
            "states": states,
            "bound": bound,
            "transitions": trans,
            "sensitivity_unit": (self.sensitivity_units[self.parameters[0]] if one
                                 else dict(self.sensitivity_units)),
            "sensitivity_method": self.sensitivity_method,
            "notes": list(self.notes),
        }

    def to_csv(self) -> str:
        """One row per grid point: parameters, state energies, transitions."""
        grids = np.meshgrid(*self.values, indexing="ij")
        cols = [(f"{p} [{u}]", g.ravel()) for p, u, g in zip(self.parameters, self.units, grids)]
        for lab in self.state_labels:
            cols.append((f"{lab} energy [eV]", np.asarray(self.state_energy_eV[lab]).ravel()))
        for t in self.transitions:
            cols.append((f"{t} energy [eV]", np.asarray(self.energy_eV[t]).ravel()))
            cols.append((f"{t} wavelength [um]", np.asarray(self.wavelength_um[t]).ravel()))
            for p in self.parameters:
                cols.append((f"{t} d(wavelength)/d({p}) [{self.sensitivity_units[p]}]",
                             np.asarray(self.sensitivity[t][p]).ravel()))
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow([c[0] for c in cols])
        for i in range(len(cols[0][1])):
            w.writerow(["" if not math.isfinite(c[1][i]) else repr(float(c[1][i])) for c in cols])
        return buf.getvalue()

    def plot(self, path, *, protect=(), title: str | None = None):
        """Write a PNG (or any matplotlib format by suffix) atomically.

        1-D: wavelength of each transition against the parameter (and the
        state energies in a second panel).  2-D: a colour map of the first
        transition's wavelength with labelled contours.
        """
        # matplotlib is heavy and only needed for plots
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        def axis_label(i):
            u = self.units[i]
            return self.parameters[i] + ("" if u == "fraction" else f" ({u})")

        styles = ["-", "--", "-.", ":"]
        colors = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000"]
        if len(self.parameters) == 1:
            x = self.values[0]
            fig, axes = plt.subplots(2, 1, figsize=(7, 7), sharex=True)
            ax = axes[0]
            for k, t in enumerate(self.transitions):
                ax.plot(x, self.wavelength_um[t], styles[k % 4], color=colors[k % 7], lw=1.8,
                        label=t)
            ax.set_ylabel("wavelength (µm)")
            if self.transitions:
                ax.legend(loc="best")
            ax.grid(alpha=0.3)
            ax2 = axes[1]
            for k, lab in enumerate(self.state_labels):
                ax2.plot(x, self.state_energy_eV[lab], styles[k % 4], color=colors[k % 7],
                         lw=1.4, label=lab)
            ax2.set_ylabel("state energy (eV)")
            ax2.set_xlabel(axis_label(0))
            ax2.grid(alpha=0.3)
            if self.state_labels:
                ax2.legend(loc="best", ncol=2, fontsize="small")
        else:
            fig, ax = plt.subplots(figsize=(7, 5.5))
            if not self.transitions:
                raise ParameterError("a 2-D map needs a transition (--transition)")
            t = self.transitions[0]
            lam = np.asarray(self.wavelength_um[t], dtype=float)
            X, Y = np.meshgrid(self.values[0], self.values[1], indexing="ij")
            masked = np.ma.masked_invalid(lam)
            mesh = ax.pcolormesh(X, Y, masked, shading="auto", cmap="cividis")
            cb = fig.colorbar(mesh, ax=ax)
            cb.set_label(f"{t} wavelength (µm)")
            if np.isfinite(lam).sum() >= 4 and min(lam.shape) >= 2:
                cs = ax.contour(X, Y, masked, colors="white", linewidths=0.9)
                ax.clabel(cs, fmt="%.3g µm", fontsize=8)
            ax.set_xlabel(axis_label(0))
            ax.set_ylabel(axis_label(1))
        if title:
            fig.suptitle(title)
        fig.tight_layout()
        try:
            return atomic_savefig(fig, path, protect=protect, dpi=120)
        finally:
            plt.close(fig)


def _as_values(p: Parameter, values) -> np.ndarray:
    arr = np.atleast_1d(np.asarray(values, dtype=float))
    if arr.ndim != 1 or arr.size == 0:
        raise ParameterError(f"{p.path}: expected a non-empty list of values")
    for v in arr:
        p.check(v)
    return arr


def _sensitivity_grid(lam, values, axis):
    n = lam.shape[axis]
    if n < 2:
        return np.full(lam.shape, np.nan)
    with np.errstate(invalid="ignore"):
        return np.gradient(lam, values, axis=axis, edge_order=2 if n >= 3 else 1)


def sweep(stack, parameter: str, values, transitions=None, *, parameter2: str | None = None,
          values2=None, bands=None, sensitivity: str = "grid", jobs=None, dask=None,
          dask_timeout_s=None, progress=None) -> SweepResult:
    """Solve the stack over a grid of parameter values (1-D, or 2-D with ``parameter2``).

    Parameters
    ----------
    stack : Stack
    parameter : str
        Parameter path; ``values`` in its unit (nm, fraction, kV/cm, K).
    transitions : sequence of str, optional
        Transition names to follow; each must exist at the start point (the
        first grid point).  Default: ``['e1-e2']`` if it exists anywhere in
        the sweep, else none.
    parameter2, values2 : optional
        Second parameter of a 2-D map.
    bands : sequence of str, optional
        Extra bands to solve (conduction and those the transitions need are
        always solved).
    sensitivity : {'grid', 'local'}
        How dλ/dp is estimated (see :class:`SweepResult`).
    jobs, dask, dask_timeout_s, progress
        Parallel execution (see :func:`qwell.parallel.map_chunked`).

    Raises
    ------
    ParameterError
        Unknown path, a value outside the valid range (named), a transition
        missing at the start point.
    """
    if sensitivity not in ("grid", "local"):
        raise ParameterError(f"sensitivity {sensitivity!r}: expected 'grid' or 'local'")
    ps = [get_parameter(stack, parameter)]
    vals = [_as_values(ps[0], values)]
    if parameter2 is not None:
        p2 = get_parameter(stack, parameter2)
        if p2.path == ps[0].path:
            raise ParameterError(f"{p2.path} given twice; a 2-D map needs two parameters")
        ps.append(p2)
        vals.append(_as_values(p2, values2 if values2 is not None else []))
    names = list(transitions) if transitions else []
    bands_t = bands_for_transitions(names, bands)
    grid_sets = [dict(zip([p.path for p in ps], (float(x) for x in combo)))
                 for combo in np.array(np.meshgrid(*vals, indexing="ij")).reshape(len(ps), -1).T]
    first = design_point(stack, grid_sets[0], bands=bands_t)
    where = "the start point (" + ", ".join(p.describe(grid_sets[0][p.path]) for p in ps) + ")"
    if transitions is not None:
        check_transitions(first, names, where)

    extra_sets = []
    if sensitivity == "local":
        for gs in grid_sets:
            for p in ps:
                h = _LOCAL_STEP[p.kind]
                for s in (+1, -1):
                    d = dict(gs)
                    v = gs[p.path] + s * h
                    lo, hi = p.limits
                    d[p.path] = min(max(v, lo + (1e-9 if p.kind in ("thickness", "temperature")
                                                 else 0.0)), hi)
                    extra_sets.append(d)
    rest = evaluate_many(stack, grid_sets[1:] + extra_sets, bands=bands_t, jobs=jobs, dask=dask,
                         dask_timeout_s=dask_timeout_s, progress=progress, label="sweep")
    emit_warnings([first], stacklevel=2)
    points = [first] + rest[:len(grid_sets) - 1]
    extras = rest[len(grid_sets) - 1:]
    if transitions is None:  # default: e1-e2 wherever it exists in the sweep
        names = ["e1-e2"] if any("e1-e2" in pt.transition_names for pt in points) else []
    shape = tuple(len(v) for v in vals)

    labels: list = []
    for pt in points:
        for lab, _, _ in pt.states:
            if lab not in labels:
                labels.append(lab)
    order = {"e": 0, "hh": 1, "lh": 2}

    def lab_key(lab):
        m = LABEL_RE.match(lab)
        return (order.get(m.group(1), 9), int(m.group(2))) if m else (9, 0)

    labels.sort(key=lab_key)
    st_e = {lab: np.array([pt.state_energy(lab) for pt in points]).reshape(shape) for lab in labels}
    st_b = {lab: np.array([any(s[0] == lab and s[2] for s in pt.states) for pt in points]
                          ).reshape(shape) for lab in labels}
    en = {t: np.array([pt.transition_energy(t) for pt in points]).reshape(shape) for t in names}
    lam = {t: np.array([pt.wavelength(t) for pt in points]).reshape(shape) for t in names}
    sens: dict = {}
    for t in names:
        sens[t] = {}
        for ax, p in enumerate(ps):
            if sensitivity == "grid" and shape[ax] >= 2:
                d = _sensitivity_grid(lam[t], vals[ax], ax)
            else:
                lam_p = np.empty(len(grid_sets))
                lam_m = np.empty(len(grid_sets))
                dv = np.empty(len(grid_sets))
                if extras:
                    for i in range(len(grid_sets)):
                        a = extras[(i * len(ps) + ax) * 2]
                        b = extras[(i * len(ps) + ax) * 2 + 1]
                        lam_p[i], lam_m[i] = a.wavelength(t), b.wavelength(t)
                        dv[i] = dict(a.values)[p.path] - dict(b.values)[p.path]
                    d = ((lam_p - lam_m) / dv).reshape(shape)
                else:
                    d = np.full(shape, np.nan)
            sens[t][p.path] = d * 1e3 * p.sensitivity_step
    notes = []
    for pt in points:
        for msg in pt.notes:
            if msg not in notes:
                notes.append(msg)
    if len(ps) == 1:
        notes += jump_notes(ps[0], vals[0], st_e, en)
    method = sensitivity
    if sensitivity == "grid" and any(s < 2 for s in shape):
        method = "grid (undefined along an axis with one point)"
    return SweepResult(parameters=tuple(p.path for p in ps), units=tuple(p.unit for p in ps),
                       values=tuple(vals), state_labels=tuple(labels), state_energy_eV=st_e,
                       state_bound=st_b, transitions=tuple(names), energy_eV=en,
                       wavelength_um=lam, sensitivity=sens,
                       sensitivity_units={p.path: p.sensitivity_unit for p in ps},
                       sensitivity_method=method, points=tuple(points), notes=tuple(notes))
