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
from ..optics import canonical_transition
from ..spectral import axis_label as line_axis_label
from ..spectral import (auto_unit, from_eV, parse_unit, spread_from_nm, spread_unit,
                        unit_label)
from ..levels import stack_profile
from ..reference import BAND_OF_PREFIX, reference_edges_eV
from ..stack_edit import Parameter, apply_parameters, get_parameter
from .crossings import find_anticrossings
from .evaluate import (EMITTER_KEYS, LABEL_RE, DesignPoint, bands_for_transitions,
                       check_emitter, design_point, emit_warnings, evaluate_many, jump_notes)

__all__ = ["SweepResult", "sweep"]

#: What a line in each photon unit measures (CSV headers, ASCII).
_CSV_MEASURE = {"nm": "wavelength", "um": "wavelength", "cm-1": "wavenumber",
                "THz": "frequency", "meV": "photon energy"}

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
    bare_energy_eV, bare_wavelength_um : Mapping[str, ndarray]
        Depolarisation-shifted lines (doped stacks) before the shift; only the
        transitions that carry the shift.
    emitter_line : str or None
        The emitter line followed (``'e3->e2'``), None without one.
    emitter : Mapping[str, ndarray]
        :data:`~qwell.design.evaluate.EMITTER_KEYS` quantity -> values over the grid
        (lifetimes in ps, figure of merit in nm^2 ps, gain per current in cm/kA; NaN where
        the line does not exist).
    lifetime_ps : Mapping[str, ndarray]
        Conduction state -> LO-phonon lifetime [ps] over the grid (with an emitter line).
    anticrossings : tuple of Anticrossing
        Neighbouring states at their closest approach (1-D sweeps), with the
        minimum gap (:func:`qwell.design.crossings.find_anticrossings`).
    reference : str or None
        Layer whose centre's band edges the shown energies are referenced to.
    reference_edge_eV : Mapping[str, ndarray] or None
        Band -> edge at the reference point over the grid [eV, band-diagram scale].
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
    bare_energy_eV: Mapping = field(default_factory=dict)
    bare_wavelength_um: Mapping = field(default_factory=dict)
    emitter_line: str | None = None
    emitter: Mapping = field(default_factory=dict)
    lifetime_ps: Mapping = field(default_factory=dict)
    anticrossings: tuple = ()
    reference: str | None = None
    reference_edge_eV: Mapping | None = field(repr=False, default=None)

    def state_energy_shown(self, label: str):
        """A state's energy over the grid [eV]: from the reference edge of its band when
        the sweep has a reference (:attr:`reference`), else on the band-diagram scale."""
        e = np.asarray(self.state_energy_eV[label], dtype=float)
        if not self.reference:
            return e
        m = LABEL_RE.match(label)
        band = BAND_OF_PREFIX[m.group(1)] if m else "conduction"
        return e - np.asarray(self.reference_edge_eV[band], dtype=float)

    def photon_unit(self, unit: str | None = None) -> str:
        """``unit`` (checked), else the unit of the followed lines' spectral region
        (that of their median energy over the grid)."""
        if unit:
            return parse_unit(unit)
        e = np.concatenate([np.ravel(self.energy_eV[t]) for t in self.transitions] or [[]])
        e = e[np.isfinite(e)]
        return auto_unit(float(np.median(e)) if e.size else math.nan)

    def line_in(self, transition: str, unit: str):
        """A followed line over the grid in ``unit`` (NaN where it does not exist)."""
        return from_eV(np.asarray(self.energy_eV[transition], dtype=float), unit)

    def sensitivity_in(self, transition: str, parameter: str, unit: str):
        """d(line)/dp over the grid in the spread unit of ``unit`` per engineering step
        (nm/ML, µm/ML, cm⁻¹/ML, GHz/(kV/cm), ...), linear at each point's own line."""
        return spread_from_nm(np.asarray(self.sensitivity[transition][parameter], dtype=float),
                              np.asarray(self.energy_eV[transition], dtype=float), unit)

    def sensitivity_unit_in(self, parameter: str, unit: str) -> str:
        """'µm/ML', 'GHz/(kV/cm)', ... : the unit of :meth:`sensitivity_in`."""
        per = self.sensitivity_units[parameter].split("/", 1)[1]
        per = f"({per})" if "/" in per and not per.startswith("(") else per
        return f"{unit_label(spread_unit(unit))}/{per}"

    @property
    def shape(self) -> tuple:
        return tuple(len(v) for v in self.values)

    def point(self, *index) -> DesignPoint:
        """The design point at a grid index (``i`` or ``i, j``)."""
        return self.points[int(np.ravel_multi_index(index, self.shape))]

    def to_csv(self, unit: str | None = None) -> str:
        """One row per grid point: parameters, state energies, transitions.

        After the fixed columns (energies [eV], wavelengths [um] and their
        sensitivities [nm per step]) each followed line comes again in the photon
        unit ``unit`` (default :meth:`photon_unit`, the lines' spectral region), with
        its sensitivity in that unit's spread unit, the unit in the header, e.g.
        ``e1-e2 line frequency [THz]`` and ``e1-e2 line d(frequency)/d(p) [GHz/nm]``.
        """
        u = self.photon_unit(unit)
        measure = _CSV_MEASURE[u]
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
        if self.emitter_line is not None:
            for k in EMITTER_KEYS:
                cols.append((f"{self.emitter_line} {k}", np.asarray(self.emitter[k]).ravel()))
            for lab, v in self.lifetime_ps.items():
                cols.append((f"{lab} lifetime [ps]", np.asarray(v).ravel()))
        for t in self.transitions:
            cols.append((f"{t} line {measure} [{u}]", np.asarray(self.line_in(t, u)).ravel()))
            for p in self.parameters:
                per = self.sensitivity_units[p].split("/", 1)[1]
                cols.append((f"{t} line d({measure})/d({p}) [{spread_unit(u)}/{per}]",
                             np.asarray(self.sensitivity_in(t, p, u)).ravel()))
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow([c[0] for c in cols])
        for i in range(len(cols[0][1])):
            w.writerow(["" if not math.isfinite(c[1][i]) else repr(float(c[1][i])) for c in cols])
        return buf.getvalue()

    def plot(self, path, *, protect=(), title: str | None = None, unit: str | None = None):
        """Write a PNG (or any matplotlib format by suffix) atomically.

        1-D: each transition's line in ``unit`` (default :meth:`photon_unit`)
        against the parameter (and the state energies in a second panel).
        2-D: a colour map of the first transition's line with labelled
        contours; where the line does not exist the map is hatched (legend
        entry "no <line>").  With an emitter line a third 1-D panel shows its
        lifetimes and figure of merit.
        """
        unit = self.photon_unit(unit)
        ulab = unit_label(unit)
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
            rows = 3 if self.emitter_line is not None else 2
            fig, axes = plt.subplots(rows, 1, figsize=(7, 3.5 * rows), sharex=True)
            ax = axes[0]
            for k, t in enumerate(self.transitions):
                ax.plot(x, self.line_in(t, unit), styles[k % 4], color=colors[k % 7], lw=1.8,
                        label=t)
            ax.set_ylabel(line_axis_label(unit))
            if self.transitions:
                ax.legend(loc="best")
            ax.grid(alpha=0.3)
            ax2 = axes[1]
            for k, lab in enumerate(self.state_labels):
                ax2.plot(x, self.state_energy_shown(lab), styles[k % 4], color=colors[k % 7],
                         lw=1.4, label=lab)
            ax2.set_ylabel("state energy (eV)" if not self.reference
                           else f"state energy from the {self.reference} edge (eV)")
            for a in self.anticrossings:  # the closest approach, with its gap
                ax2.axvline(a.value, color="0.5", ls=":", lw=0.9)
                lo_e = np.interp(a.value, x, self.state_energy_shown(a.lower))
                ax2.annotate(f"{a.lower}/{a.upper} gap {a.gap_meV:.3g} meV", (a.value, lo_e),
                             xytext=(4, -12), textcoords="offset points", fontsize=7,
                             color="0.3")
            ax2.set_xlabel(axis_label(0))
            ax2.grid(alpha=0.3)
            if self.state_labels:
                ax2.legend(loc="best", ncol=2, fontsize="small")
            if self.emitter_line is not None:
                ax2.set_xlabel("")
                ax3 = axes[2]
                for k, (key, name) in enumerate((("tau_upper_ps", "τ_u"),
                                                 ("tau_lower_ps", "τ_l"),
                                                 ("tau_upper_lower_ps", "τ_ul"))):
                    ax3.plot(x, self.emitter[key], styles[k % 4], color=colors[k % 7], lw=1.6,
                             label=name)
                ax3.set_ylabel(f"{self.emitter_line} LO-phonon times [ps]")
                ax3.set_xlabel(axis_label(0))
                ax3.grid(alpha=0.3)
                ax4 = ax3.twinx()
                ax4.plot(x, self.emitter["figure_of_merit_nm2_ps"], ":", color=colors[6], lw=2.0,
                         label="z² τ_u (1 − τ_l/τ_ul)")
                ax4.set_ylabel("figure of merit [nm² ps]")
                h1, l1 = ax3.get_legend_handles_labels()
                h2, l2 = ax4.get_legend_handles_labels()
                ax3.legend(h1 + h2, l1 + l2, loc="best", fontsize="small")
        else:
            fig, ax = plt.subplots(figsize=(7, 5.5))
            if not self.transitions:
                raise ParameterError("a 2-D map needs a transition (--transition)")
            t = self.transitions[0]
            lam = np.asarray(self.line_in(t, unit), dtype=float)
            X, Y = np.meshgrid(self.values[0], self.values[1], indexing="ij")
            masked = np.ma.masked_invalid(lam)
            mesh = ax.pcolormesh(X, Y, masked, shading="auto", cmap="cividis")
            cb = fig.colorbar(mesh, ax=ax)
            cb.set_label(f"{t} {line_axis_label(unit)}")
            if np.isfinite(lam).sum() >= 4 and min(lam.shape) >= 2:
                cs = ax.contour(X, Y, masked, colors="white", linewidths=0.9)
                ax.clabel(cs, fmt=f"%.4g {ulab}", fontsize=8)
            missing = ~np.isfinite(lam)
            if missing.any():
                # the region without the line: hatched cells (not blank paper), in the legend
                from matplotlib.patches import Patch, Rectangle
                ex, ey = _cell_edges(self.values[0]), _cell_edges(self.values[1])
                for i, j in zip(*np.nonzero(missing)):
                    ax.add_patch(Rectangle((ex[i], ey[j]), ex[i + 1] - ex[i], ey[j + 1] - ey[j],
                                           facecolor="#f2f2f2", edgecolor="#7f7f7f",
                                           hatch="///", linewidth=0.0))
                ax.legend(handles=[Patch(facecolor="#f2f2f2", edgecolor="#7f7f7f", hatch="///",
                                         label=f"no {t}")], loc="upper right",
                          framealpha=0.9)
            ax.set_xlabel(axis_label(0))
            ax.set_ylabel(axis_label(1))
        if title:
            fig.suptitle(title)
        fig.tight_layout()
        try:
            return atomic_savefig(fig, path, protect=protect, dpi=120)
        finally:
            plt.close(fig)


def _cell_edges(values) -> np.ndarray:
    """Edges of the map cells around grid values (midpoints, half a step beyond the ends)."""
    v = np.asarray(values, dtype=float)
    if v.size == 1:
        return np.array([v[0] - 0.5, v[0] + 0.5])
    mid = 0.5 * (v[1:] + v[:-1])
    return np.concatenate([[v[0] - (mid[0] - v[0])], mid, [v[-1] + (v[-1] - mid[-1])]])


def _as_values(p: Parameter, values) -> np.ndarray:
    arr = np.atleast_1d(np.asarray(values, dtype=float))
    if arr.ndim != 1 or arr.size == 0:
        raise ParameterError(f"{p.path}: expected a non-empty list of values")
    for v in arr:
        p.check(v)
    return arr


def _gradient_runs(y, x):
    """dy/dx of one line of the grid, taken inside each run of finite values (a line that
    appears or vanishes inside the range keeps its slope up to its ends)."""
    out = np.full(y.shape, np.nan)
    ok = np.isfinite(y)
    i = 0
    while i < len(y):
        if not ok[i]:
            i += 1
            continue
        j = i
        while j + 1 < len(y) and ok[j + 1]:
            j += 1
        n = j - i + 1
        if n >= 2:
            out[i:j + 1] = np.gradient(y[i:j + 1], x[i:j + 1], edge_order=2 if n >= 3 else 1)
        i = j + 1
    return out


def _sensitivity_grid(lam, values, axis):
    n = lam.shape[axis]
    if n < 2:
        return np.full(lam.shape, np.nan)
    x = np.asarray(values, dtype=float)
    return np.apply_along_axis(_gradient_runs, axis, np.asarray(lam, dtype=float), x)


def _span(ps, vals) -> str:
    return ", ".join(f"{p.path} {p.describe(v[0]).split(' = ')[-1]} .. "
                     f"{p.describe(v[-1]).split(' = ')[-1]}" for p, v in zip(ps, vals))


def existence_notes(name: str, ps, vals, exists) -> list:
    """Say where a followed line exists when it does not exist over the whole grid.

    1-D: the sub-ranges where it exists; 2-D: the number of grid points without it.
    """
    exists = np.asarray(exists, dtype=bool)
    if exists.all():
        return []
    if len(ps) > 1:
        return [f"{name} does not exist at {int((~exists).sum())} of {exists.size} map points "
                "(hatched on the map, null in JSON, empty in CSV)"]
    p, x = ps[0], vals[0]
    runs, start = [], None
    for i, ok in enumerate(list(exists) + [False]):
        if ok and start is None:
            start = i
        elif not ok and start is not None:
            runs.append((start, i - 1))
            start = None
    where = ", ".join(f"{x[a]:.6g}..{x[b]:.6g}" if a != b else f"{x[a]:.6g}" for a, b in runs)
    unit = "" if p.unit == "fraction" else f" {p.unit}"
    return [f"{name} exists only for {p.path} in {where}{unit} ({int(exists.sum())} of "
            f"{exists.size} points); swept there, absent elsewhere"]


def sweep(stack, parameter: str, values, transitions=None, *, parameter2: str | None = None,
          values2=None, bands=None, sensitivity: str = "grid", jobs=None, dask=None,
          dask_timeout_s=None, progress=None, reference: str | None = None,
          emitter: str | None = None) -> SweepResult:
    """Solve the stack over a grid of parameter values (1-D, or 2-D with ``parameter2``).

    Parameters
    ----------
    stack : Stack
    parameter : str
        Parameter path; ``values`` in its unit (nm, fraction, kV/cm, K).
    transitions : sequence of str, optional
        Transition names to follow ('e3-e2' is the line 'e2-e3'); each is followed
        where it exists (a note says where) and must exist somewhere.  Default: ``['e1-e2']`` if it exists anywhere in
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
    emitter : str, optional
        An intersubband line (``'e2-e3'``) whose LO-phonon lifetimes and figure of merit are
        followed over the grid (:attr:`SweepResult.emitter`); it must exist at the start point.
    reference : str, optional
        Layer label or name: the band edges at its centre are recorded at every
        point (:attr:`SweepResult.reference_edge_eV`) so energies can be shown from
        them (:meth:`SweepResult.state_energy_shown`).

    Raises
    ------
    ParameterError
        Unknown path, a value outside the valid range (named), a transition
        that exists nowhere in the sweep, or the emitter line missing at the start point.

    Examples
    --------
    >>> from qwell import load_stack, sweep
    >>> res = sweep(load_stack("layers/lwir-detector.yaml"), "well.thickness",
    ...             [5.0, 5.5, 6.0], ["e1-e2"])
    >>> [round(float(v), 2) for v in res.wavelength_um["e1-e2"]]
    [8.24, 8.4, 8.79]
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
    names = [canonical_transition(n) for n in transitions] if transitions else []
    bands_t = bands_for_transitions(names, bands)
    grid_sets = [dict(zip([p.path for p in ps], (float(x) for x in combo)))
                 for combo in np.array(np.meshgrid(*vals, indexing="ij")).reshape(len(ps), -1).T]
    edges = None
    if reference is not None:  # checked before any solve; one profile per grid point
        edges_at = [reference_edges_eV(stack_profile(apply_parameters(stack, gs)), reference)
                    for gs in grid_sets]
        shape0 = tuple(len(v) for v in vals)
        edges = {b: np.array([e[b] for e in edges_at]).reshape(shape0) for b in edges_at[0]}
    first = design_point(stack, grid_sets[0], bands=bands_t, emitter=emitter)
    if emitter is not None:
        where = ("the start point ("
                 + ", ".join(p.describe(grid_sets[0][p.path]) for p in ps) + ")")
        check_emitter(first, emitter, where)

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
                         dask_timeout_s=dask_timeout_s, progress=progress, label="sweep",
                         emitter=emitter)
    emit_warnings([first], stacklevel=2)
    points = [first] + rest[:len(grid_sets) - 1]
    extras = rest[len(grid_sets) - 1:]
    if transitions is None:  # default: e1-e2 wherever it exists in the sweep
        names = ["e1-e2"] if any("e1-e2" in pt.transition_names for pt in points) else []
    else:  # a line is followed where it exists; refused only if it exists nowhere
        for n in names:
            if not any(n in pt.transition_names for pt in points):
                have = sorted({t for pt in points for t in pt.transition_names})
                raise ParameterError(f"transition {n!r} does not exist anywhere in the sweep "
                                     f"({_span(ps, vals)}); available somewhere: "
                                     + (", ".join(have) or "none"))
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
    shifted = [t for t in names if any(t in {b[0] for b in pt.bare_transitions} for pt in points)]
    bare_en = {t: np.array([pt.bare_energy(t) for pt in points]).reshape(shape) for t in shifted}
    bare_lam = {t: np.array([pt.bare_wavelength(t) for pt in points]).reshape(shape)
                for t in shifted}
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
    for t in names:
        notes += existence_notes(t, ps, vals, np.isfinite(en[t]))
    if len(ps) == 1:
        notes += jump_notes(ps[0], vals[0], st_e, en)
    method = sensitivity
    if sensitivity == "grid" and any(s < 2 for s in shape):
        method = "grid (undefined along an axis with one point)"
    em, lives, em_line = {}, {}, None
    if emitter is not None:
        em_line = dict(first.emitter)["line"]
        em = {k: np.array([pt.emitter_value(k) for pt in points]).reshape(shape)
              for k in EMITTER_KEYS}
        life_labels = [lab for lab in labels if any(lab == x[0] for pt in points
                                                    for x in pt.lifetimes_ps)]
        lives = {lab: np.array([pt.lifetime_ps(lab) for pt in points]).reshape(shape)
                 for lab in life_labels}
        lost = [pt for pt in points if not pt.emitter]
        if lost:
            notes.append(f"emitter line {em_line} missing at {len(lost)} grid point(s) "
                         "(NaN there)")
    return SweepResult(parameters=tuple(p.path for p in ps), units=tuple(p.unit for p in ps),
                       values=tuple(vals), state_labels=tuple(labels), state_energy_eV=st_e,
                       state_bound=st_b, transitions=tuple(names), energy_eV=en,
                       wavelength_um=lam, sensitivity=sens,
                       sensitivity_units={p.path: p.sensitivity_unit for p in ps},
                       sensitivity_method=method, points=tuple(points), notes=tuple(notes),
                       bare_energy_eV=bare_en, bare_wavelength_um=bare_lam,
                       emitter_line=em_line, emitter=em, lifetime_ps=lives,
                       anticrossings=(find_anticrossings(ps[0].path, ps[0].unit, vals[0], st_e)
                                      if len(ps) == 1 else ()),
                       reference=reference, reference_edge_eV=edges)
