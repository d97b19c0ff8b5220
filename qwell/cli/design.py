"""Design workflows on the command line: ``size``, ``sweep``, ``tolerance``.

Values on the command line carry their units and are read with pint
(``--from 4nm``, ``--step 1ML``, ``--target 4.6um``); compositions are plain
numbers.  Every user error is a :class:`~qwell.errors.QwellError`: one line on
stderr, exit status 2.
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np

from ..design import (apply_parameters, get_parameter, parse_growth_rate, parse_parameter_value,
                      size, sweep, tolerance)
from ..design.line import design_line
from ..errors import ParameterError, QwellError, StackError
from ..fileio import OutputGroup, atomic_write_text, check_figure_target
from ..parallel import check_dask_address
from ..stack_text import edit_stack_text
from ..spectral import LINE_SPEC as _LINE_SPEC
from ..spectral import SPREAD_SPEC as _SPREAD_SPEC
from ..spectral import (column, energy_of_um, energy_text, format_line, format_spread, from_eV, line_unit,
                        spread_unit, unit_label)
from ..units import spectral_to_eV
from .common import (add_library_option, add_self_consistent_option, add_unit_option, check_work,
                     fmt, load, print_json, print_stack_warnings, table, unit_text)
from .json_out import design_line_json, size_json, sweep_json, tolerance_json

__all__ = ["register", "cmd_size", "cmd_sweep", "cmd_tolerance"]


def register(subparsers) -> None:
    """Add ``size``, ``sweep`` and ``tolerance`` to the ``qwell`` sub-commands."""
    s = subparsers.add_parser("size", help="size a layer (or composition, field, temperature) "
                              "for a target wavelength")
    s.add_argument("stack", help="stack YAML file")
    s.add_argument("--vary", required=True, metavar="PATH",
                   help="parameter, e.g. well.thickness, barrier.x, field, temperature")
    s.add_argument("--target",
                   help="wavelength, energy, wavenumber or frequency, e.g. 4.6um, 270meV "
                        "(default: the target of the stack's declared line)")
    s.add_argument("--transition",
                   help="transition (default: the stack's design line; see 'qwell levels')")
    s.add_argument("--from", dest="lo", metavar="VALUE", help="search range start (with units)")
    s.add_argument("--to", dest="hi", metavar="VALUE", help="search range end (with units)")
    s.add_argument("--json", action="store_true", help="machine-readable output")
    s.add_argument("--write", metavar="FILE",
                   help="write the sized stack to FILE: the input's text with the value in place "
                        "(comments and order kept; never the input file)")
    s.add_argument("--round-ml", action="store_true",
                   help="with --write: write the thickness as the nearest whole number of "
                        "monolayers (and print the line it gives)")
    s.add_argument("--emitter", metavar="e2-e3",
                   help="also report this intersubband line's LO-phonon lifetimes and figure "
                        "of merit at the sized value")
    add_unit_option(s)
    _add_parallel(s)
    add_self_consistent_option(s)
    add_library_option(s)
    s.set_defaults(func=cmd_size)

    w = subparsers.add_parser("sweep", help="states and transitions over a parameter range "
                              "(two --vary: a 2-D map)")
    w.add_argument("stack", help="stack YAML file")
    w.add_argument("--vary", action="append", metavar="PATH", help="parameter (repeat for a map)")
    w.add_argument("--from", dest="lo", action="append", metavar="VALUE",
                   help="start value with units, e.g. 4nm")
    w.add_argument("--to", dest="hi", action="append", metavar="VALUE",
                   help="end value with units, e.g. 10nm")
    w.add_argument("--points", action="append", type=int, metavar="N",
                   help="number of points (default 21)")
    w.add_argument("--step", action="append", metavar="STEP",
                   help="step with units instead of --points, e.g. 1ML")
    w.add_argument("--transition", action="append", metavar="e1-e2",
                   help="transition to follow (repeatable; default: the stack's design line)")
    w.add_argument("--sensitivity", default="grid", choices=["grid", "local"],
                   help="dλ/dp from the sweep grid (default) or by local central differences")
    w.add_argument("--json", action="store_true")
    w.add_argument("--csv", metavar="FILE", help="write a CSV table")
    w.add_argument("--png", metavar="FILE", help="write a plot (a colour map for two --vary)")
    w.add_argument("--emitter", metavar="e2-e3",
                   help="follow this intersubband line's LO-phonon lifetimes and figure of "
                        "merit over the sweep")
    w.add_argument("--reference", metavar="LAYER",
                   help="show state energies from the band edge at this layer's centre "
                        "(levels of that layer stay flat in a field sweep)")
    add_unit_option(w)
    _add_parallel(w)
    add_self_consistent_option(w)
    add_library_option(w)
    w.set_defaults(func=cmd_sweep)

    t = subparsers.add_parser("tolerance", help="wavelength spread from growth tolerances")
    t.add_argument("stack", help="stack YAML file")
    t.add_argument("--transition",
                   help="transition (default: the stack's design line; see 'qwell levels')")
    t.add_argument("--thickness", action="append", metavar="[LAYER=]TOL",
                   help="thickness tolerance of every layer (or of LAYER): 1ML, 0.3nm, 2%% "
                        "(default 1ML; repeatable)")
    t.add_argument("--composition", action="append", metavar="[LAYER=]TOL",
                   help="absolute composition tolerance (default 0.01; repeatable)")
    t.add_argument("--vary", action="append", metavar="PATH=DELTA",
                   help="a further parameter and its tolerance, e.g. field=2kV/cm")
    t.add_argument("--growth-rate", metavar="RATE",
                   help="growth-rate error scaling every layer of a material together, "
                        "e.g. 2%% (default: none)")
    t.add_argument("--monte-carlo", type=int, default=0, metavar="N",
                   help="number of random designs (default 0: none)")
    t.add_argument("--seed", type=int, default=1,
                   help="random seed of the Monte Carlo samples (default 1, so runs repeat)")
    t.add_argument("--distribution", default="normal", choices=["normal", "uniform"],
                   help="normal: tolerance = 1 sigma (default); uniform: on ±tolerance")
    t.add_argument("--json", action="store_true")
    t.add_argument("--png", metavar="FILE",
                   help="write a histogram of the Monte Carlo wavelengths (needs --monte-carlo)")
    add_unit_option(t)
    _add_parallel(t)
    add_self_consistent_option(t)
    add_library_option(t)
    t.set_defaults(func=cmd_tolerance)


def _add_parallel(p) -> None:
    p.add_argument("--jobs", type=int, default=None, metavar="N",
                   help="local worker processes (default: all cores; 1 = serial)")
    p.add_argument("--dask", metavar="ADDRESS",
                   help="run on an existing Dask cluster, e.g. tcp://127.0.0.1:8786 "
                        "(needs qwell[dask])")
    p.add_argument("--dask-timeout", type=float, default=None, metavar="SECONDS",
                   help="how long to wait for the Dask scheduler (default 10 s)")


def _parallel_kw(args) -> dict:
    """``jobs``, ``dask``, ``dask_timeout_s`` keywords of the design functions, checked."""
    if args.jobs is not None and args.jobs < 1:
        raise QwellError(f"--jobs {args.jobs}: expected a whole number >= 1")
    if args.dask_timeout is not None and not 0 < args.dask_timeout <= 600:
        raise QwellError(f"--dask-timeout {args.dask_timeout:g}: expected a number of seconds "
                         "above 0 and at most 600")
    if args.jobs is not None and args.jobs > 256:
        raise QwellError(f"--jobs {args.jobs}: expected at most 256 worker processes")
    if args.dask is not None:
        check_dask_address(args.dask)
    return dict(jobs=args.jobs, dask=args.dask, dask_timeout_s=args.dask_timeout)


# ---------------------------------------------------------------------------
# size
# ---------------------------------------------------------------------------
def cmd_size(args) -> int:
    """Run ``qwell size``; returns the exit status."""
    stack = load(args.stack, args.self_consistent, args.library)
    print_stack_warnings(stack)
    parallel = _parallel_kw(args)
    p = get_parameter(stack, args.vary)
    line = design_line(stack, args.transition, check=False)
    if args.target is not None:
        target = spectral_to_eV(args.target)
        line = dataclasses.replace(line, target_eV=target, target_text=f"{args.target} (--target)")
    elif line.target_eV is not None:
        target = line.target_eV
    else:
        raise QwellError(f"no target: give --target (e.g. 4.6um) or declare one in "
                         f"{args.stack} (line: {{transition: {line.transition}, target: ...}})")
    bounds = None
    if args.lo is not None or args.hi is not None:
        if args.lo is None or args.hi is None:
            raise QwellError("--from and --to go together; give both or neither")
        bounds = (parse_parameter_value(p, args.lo), parse_parameter_value(p, args.hi))
        _check_range_work(stack, p, bounds)
    if args.round_ml and not args.write:
        raise QwellError("--round-ml goes with --write FILE (the whole-monolayer options are "
                         "listed without it)")
    if args.round_ml and (p.kind != "thickness" or not p.monolayer_nm):
        raise QwellError(f"--round-ml: {p.path} is not a thickness of a layer with a lattice "
                         "constant; expected a LAYER.thickness of a crystal layer")
    if args.write:
        if Path(args.write).exists() and Path(args.write).resolve() == Path(args.stack).resolve():
            raise QwellError(f"--write {args.write}: refusing to overwrite the input stack file")
    res = size(stack, p.path, target, line.transition, bounds=bounds, emitter=args.emitter,
               **parallel)
    written = None
    if args.write:
        written = _write_sized(args, stack, p, res)
    if args.json:
        out = {**size_json(res, args.unit), "design_line": design_line_json(line)}
        if written is not None:
            out["written"] = written
        print_json(out)
        return 0
    print(line.headline())
    print_size(stack, p, target, res, args.unit)
    if written is not None:
        u = line_unit(target, args.unit)
        if written["monolayers"] is None:
            print(f"wrote {args.write}: {p.path} = {written['value']!r}{unit_text(p.unit)}")
        else:
            print(f"wrote {args.write}: {p.path} = {written['monolayers']} ML "
                  f"({written['value']:.4f} nm)  ->  {res.transition} at "
                  f"{format_line(written['energy_eV'], u)} "
                  f"({fmt(written['energy_eV'], '.6f')} eV)")
    return 0


def _write_sized(args, stack, p, res) -> dict:
    """Write the sized value into the input's own text (optionally whole monolayers)."""
    text = Path(args.stack).read_text(encoding="utf-8")
    value, ml, lam, energy = res.value, None, res.wavelength_um, res.energy_eV
    if args.round_ml:
        if not res.monolayer_options:
            raise QwellError(f"--round-ml: no whole-monolayer option of {p.path} near "
                             f"{res.value:.6g} nm")
        best = min(res.monolayer_options, key=lambda o: abs(o.thickness_nm - res.value))
        value, ml, lam, energy = best.thickness_nm, best.monolayers, best.wavelength_um, \
            best.energy_eV
    edited = edit_stack_text(stack, text, {p.path: value},
                             monolayers={p.path: ml} if ml is not None else None)
    atomic_write_text(args.write, edited, protect=[args.stack])
    return {"file": str(args.write), "parameter": p.path, "value": value, "monolayers": ml,
            "wavelength_um": lam, "energy_eV": energy}


def _em(pairs, key, spec) -> str:
    """One emitter quantity of a design point's pairs, formatted ('∞' for an infinite time)."""
    v = dict(pairs).get(key)
    if v is not None and math.isinf(v) and v > 0 and key.startswith("tau"):
        return "∞"
    return fmt(v, spec)


def print_size(stack, p, target_eV: float, res, unit: str | None = None) -> None:
    """The target, the sized value and its error, whole-monolayer options, notes.

    Lines are written in ``unit`` (default: the target's spectral region).
    """
    u = line_unit(target_eV, unit)
    print(f"{stack.name}: {res.transition} at {format_line(target_eV, u)} "
          f"({energy_text(target_eV, u, 5)})")
    print(f"  {p.path} = {res.value:.6f}{unit_text(p.unit)}  ->  {format_line(res.energy_eV, u)} "
          f"({energy_text(res.energy_eV, u)}, {100 * res.relative_error:+.2g} % from the target)")
    if res.depolarised:
        print(f"  with the depolarisation shift of "
              f"{1e3 * (res.energy_eV - res.bare_energy_eV):.3f} meV; bare line "
              f"{format_line(res.bare_energy_eV, u)} ({res.bare_energy_eV:.6f} eV)")
    if res.monolayer_options:
        rows = [[o.monolayers, f"{o.thickness_nm:.4f}",
                 format_line(o.energy_eV, u, with_unit=False), fmt(o.energy_eV, ".6f")]
                for o in res.monolayer_options]
        heads, aligns = ["ML", "thickness nm", column(u), "energy eV"], [">", ">", ">", ">"]
        if res.emitter:
            for o, row in zip(res.monolayer_options, rows):
                row += [_em(o.emitter, "tau_upper_ps", ".3g"), _em(o.emitter, "tau_lower_ps", ".3g"),
                        _em(o.emitter, "figure_of_merit_nm2_ps", ".4g")]
            heads += ["tau_u ps", "tau_l ps", "z²τ nm² ps"]
            aligns += [">", ">", ">"]
        print("\nWhole-monolayer options")
        print(table(rows, heads, aligns))
    if res.emitter:
        e = dict(res.emitter)
        print(f"\nEmitter line {e['line']} at the sized value (LO-phonon lifetimes): tau_u "
              f"{_em(res.emitter, 'tau_upper_ps', '.3g')} ps, tau_l "
              f"{_em(res.emitter, 'tau_lower_ps', '.3g')} ps, tau_ul "
              f"{_em(res.emitter, 'tau_upper_lower_ps', '.3g')} ps; tau_u (1 - tau_l/tau_ul) "
              f"{_em(res.emitter, 'inversion_factor_ps', '.4g')} ps; z² tau_u (1 - tau_l/tau_ul) "
              f"{_em(res.emitter, 'figure_of_merit_nm2_ps', '.4g')} nm² ps; gain per current "
              f"{_em(res.emitter, 'gain_per_current_cm_per_kA', '.3g')} cm/kA")
    for n in res.notes:
        print(f"note: {n}")


# ---------------------------------------------------------------------------
# sweep
# ---------------------------------------------------------------------------
#: Most designs one local run evaluates (sweep grid points, Monte Carlo samples); a run on
#: a Dask cluster (--dask) may go to MAX_DASK_DESIGNS.  Results stay well under 1 GB.
MAX_LOCAL_DESIGNS = 100_000
MAX_DASK_DESIGNS = 1_000_000
#: Largest --seed (numpy's generator takes seeds 0 .. 2**63 - 1 here).
MAX_SEED = 2**63 - 1


def _design_cap(args) -> int:
    return MAX_DASK_DESIGNS if getattr(args, "dask", None) else MAX_LOCAL_DESIGNS


def _beyond(args) -> str:
    if getattr(args, "dask", None):
        return "split the run into several smaller ones"
    return (f"split the range into several runs, or run on a Dask cluster with --dask "
            f"(up to {MAX_DASK_DESIGNS:,})")


def _check_count(option: str, n: int, cap: int, args) -> None:
    if n > cap:
        raise ParameterError(f"{option}: {n:,} designs exceed the limit of {cap:,} per run; "
                             f"{_beyond(args)}")


def _axis_values(p, lo, hi, points, step, cap=MAX_LOCAL_DESIGNS, args=None):
    """Grid values of one swept parameter (in its unit), each checked against its range."""
    a = parse_parameter_value(p, lo)
    b = parse_parameter_value(p, hi)
    if step is not None:
        st = parse_parameter_value(p, step, delta=True)
        if not st > 0:
            raise ParameterError(f"--step {step!r}: expected a positive step")
        ratio = abs(b - a) / st
        if not math.isfinite(ratio) or ratio + 1 > cap:
            count = f"{ratio + 1:,.0f}" if math.isfinite(ratio) else "too many"
            raise ParameterError(f"--step {step!r}: {count} points from {lo} to {hi} exceed "
                                 f"the limit of {cap:,} per run; give a larger step, or "
                                 f"{_beyond(args)}")
        n = int(math.floor(ratio + 1e-9)) + 1
        vals = a + np.sign(b - a) * st * np.arange(n)
    else:
        if points is None:
            points = 21
        if points < 1:
            raise ParameterError(f"--points {points}: expected at least 1")
        _check_count(f"--points {points}", points, cap, args)
        vals = np.linspace(a, b, points)
    for v in vals:
        try:
            p.check(v)
        except ParameterError as exc:
            raise ParameterError(f"--vary {p.path} --from {lo} --to {hi}: the range crosses an "
                                 f"invalid value ({exc})") from None
    return vals


def _sweep_axes(stack, args) -> list:
    """``[(parameter, values), ...]`` of the one or two ``--vary`` options."""
    varies = args.vary or []
    if not 1 <= len(varies) <= 2:
        raise QwellError("expected one --vary (a sweep) or two (a 2-D map)")
    los, his = args.lo or [], args.hi or []
    pts, steps = args.points or [], args.step or []
    if len(los) != len(varies) or len(his) != len(varies):
        raise QwellError("each --vary needs its own --from and --to")
    if pts and steps:
        raise QwellError("give either --points or --step (one per --vary), not both")
    if len(pts) > len(varies) or len(steps) > len(varies) or \
            (steps and len(steps) != len(varies)):
        raise QwellError("give --points (or --step) once per --vary")
    axes = []
    for k, path in enumerate(varies):
        p = get_parameter(stack, path)
        npts = pts[k] if k < len(pts) else None
        step = steps[k] if k < len(steps) else None
        axes.append((p, _axis_values(p, los[k], his[k], npts, step, _design_cap(args), args)))
    if len(axes) == 2:
        _check_count("the 2-D map", len(axes[0][1]) * len(axes[1][1]), _design_cap(args), args)
    for p, vals in axes:
        _check_range_work(stack, p, (float(np.min(vals)), float(np.max(vals))))
    return axes


def _check_range_work(stack, p, ends) -> None:
    """Each end of a parameter range must be a stack a command may solve (check_work)."""
    for v in ends:
        try:
            check_work(apply_parameters(stack, {p.path: v}))
        except StackError as exc:
            raise ParameterError(f"--vary {p.path} at {v:.6g}{unit_text(p.unit)}: "
                                 f"{exc.message}") from None


def cmd_sweep(args) -> int:
    """Run ``qwell sweep``; returns the exit status."""
    stack = load(args.stack, args.self_consistent, args.library)
    print_stack_warnings(stack)
    parallel = _parallel_kw(args)
    if args.csv or args.png:
        OutputGroup([f for f in (args.csv, args.png) if f], protect=[args.stack])  # checks only
    if args.png:
        check_figure_target(args.png)
    axes = _sweep_axes(stack, args)
    (p1, v1) = axes[0]
    p2, v2 = (axes[1] if len(axes) > 1 else (None, None))
    line = design_line(stack, args.transition[0] if args.transition else None, check=False)
    followed = list(args.transition) if args.transition else [line.transition]
    res = sweep(stack, p1.path, v1, followed, parameter2=None if p2 is None else p2.path,
                values2=v2, sensitivity=args.sensitivity, reference=args.reference,
                emitter=args.emitter, **parallel)
    outputs = [f for f in (args.csv, args.png) if f]
    if outputs:
        # both files or neither: written to temporary names, renamed when both succeeded
        with OutputGroup(outputs, protect=[args.stack]) as group:
            if args.csv:
                atomic_write_text(group.path(args.csv), res.to_csv(args.unit), protect=[args.stack])
            if args.png:
                res.plot(group.path(args.png), protect=[args.stack], title=stack.name,
                         unit=args.unit)
    if args.json:
        print_json({**sweep_json(res, args.unit), "design_line": design_line_json(line)})
        return 0
    print(line.headline())
    if p2 is None:
        print_sweep(stack, p1, v1, res, args.unit)
    else:
        print_map(stack, p1, v1, p2, v2, res, args.unit)
    for n in res.notes:
        print(f"note: {n}")
    for f in (args.csv, args.png):
        if f:
            print(f"wrote {f}")
    return 0


def print_sweep(stack, p1, v1, res, unit: str | None = None) -> None:
    """1-D sweep: state energies, and each followed line and its sensitivity in ``unit``."""
    u = res.photon_unit(unit)
    heads = [f"{p1.path}{unit_text(p1.unit)}"] + list(res.state_labels)
    aligns = [">"] * len(heads)
    for t in res.transitions:
        heads += [f"{t} {column(u)}", f"d{column(u).split()[0]} "
                  f"{res.sensitivity_unit_in(p1.path, u)}"]
        aligns += [">", ">"]
    keys = (("tau_upper_ps", "tau_u ps", ".3g"), ("tau_lower_ps", "tau_l ps", ".3g"),
            ("tau_upper_lower_ps", "tau_ul ps", ".3g"),
            ("figure_of_merit_nm2_ps", "z²τ nm² ps", ".4g"),
            ("gain_per_current_cm_per_kA", "g/J cm/kA", ".3g"))
    if res.emitter_line is not None:
        heads += [h for _, h, _ in keys]
        aligns += [">"] * len(keys)
    lines = {t: res.line_in(t, u) for t in res.transitions}
    sens = {t: res.sensitivity_in(t, p1.path, u) for t in res.transitions}
    sspec = _SPREAD_SPEC[spread_unit(u)]
    shown = {lab: res.state_energy_shown(lab) for lab in res.state_labels}
    rows = []
    for i, v in enumerate(v1):
        row = [f"{v:.6g}"] + [fmt(float(shown[lab][i]), ".5f") for lab in res.state_labels]
        for t in res.transitions:
            row += [fmt(float(lines[t][i]), _LINE_SPEC[u]), fmt(float(sens[t][i]), sspec)]
        if res.emitter_line is not None:
            row += [_em(((k, res.emitter[k][i]),), k, spec) for k, _, spec in keys]
        rows.append(row)
    print(f"{stack.name}: sweep of {p1.path} (state energies in eV"
          + (f", from the band edge at the centre of {res.reference}" if res.reference else "")
          + (f"; emitter line {res.emitter_line}, LO-phonon lifetimes" if res.emitter_line
             else "") + ")")
    print(table(rows, heads, aligns))
    print_anticrossings(res)
    print_bare(res)


def print_bare(res) -> None:
    """Where lines carry the depolarisation shift: say so, with the bare line's range."""
    for t in res.transitions:
        if t in res.bare_wavelength_um:
            bare = np.asarray(res.bare_wavelength_um[t], dtype=float)
            ok = bare[np.isfinite(bare)]
            span = (f"{ok.min():.5f} .. {ok.max():.5f} µm" if ok.size else "—")
            print(f"{t}: depolarisation-shifted absorption line (Ando, Fowler, Stern 1982); "
                  f"bare line {span}")


def print_anticrossings(res) -> None:
    """One line per anticrossing: the pair, its minimum gap and where."""
    for a in res.anticrossings:
        print(f"anticrossing {a.lower}/{a.upper}: minimum gap {a.gap_meV:.4g} meV at "
              f"{a.parameter} = {a.value:.4g}{unit_text(a.unit)} (smallest on the grid "
              f"{1e3 * a.grid_gap_eV:.4g} meV)")


def print_map(stack, p1, v1, p2, v2, res, unit: str | None = None) -> None:
    """2-D map: one table per followed line, in ``unit``."""
    u = res.photon_unit(unit)
    print(f"{stack.name}: map of {p1.path} x {p2.path}")
    for t in res.transitions:
        lines = res.line_in(t, u)
        print(f"\n{t} {column(u).split()[0]} [{unit_label(u)}]; rows {p1.path}, columns {p2.path}")
        heads = [""] + [f"{v:.4g}" for v in v2]
        rows = [[f"{v:.4g}"] + [fmt(float(lines[i, j]), _LINE_SPEC[u]) for j in range(len(v2))]
                for i, v in enumerate(v1)]
        print(table(rows, heads, [">"] * len(heads)))
    if res.emitter_line is not None:
        fom = res.emitter["figure_of_merit_nm2_ps"]
        print(f"\n{res.emitter_line} figure of merit z² tau_u (1 - tau_l/tau_ul) [nm² ps]; rows "
              f"{p1.path}, columns {p2.path}")
        heads = [""] + [f"{v:.4g}" for v in v2]
        rows = [[f"{v:.4g}"] + [fmt(fom[i, j], ".4g") for j in range(len(v2))]
                for i, v in enumerate(v1)]
        print(table(rows, heads, [">"] * len(heads)))
    print_bare(res)


# ---------------------------------------------------------------------------
# tolerance
# ---------------------------------------------------------------------------
def _split_assignments(items, what) -> dict:
    """``['well=1ML', '0.3nm']`` -> ``{'well': '1ML', '*': '0.3nm'}``."""
    out = {}
    for it in items or []:
        if "=" in it:
            k, v = it.split("=", 1)
            k, v = k.strip(), v.strip()
            if not k or not v:
                raise QwellError(f"{what} {it!r}: expected NAME=VALUE")
            out[k] = v
        else:
            out["*"] = it.strip()
    return out


def _extra_tolerances(items) -> dict:
    """``--vary PATH=DELTA`` options as ``{path: delta}``."""
    extra = {}
    for it in items or []:
        if "=" not in it:
            raise QwellError(f"--vary {it!r}: expected PATH=DELTA, e.g. field=2kV/cm")
        k, v = it.split("=", 1)
        extra[k.strip()] = v.strip()
    return extra


def cmd_tolerance(args) -> int:
    """Run ``qwell tolerance``; returns the exit status."""
    stack = load(args.stack, args.self_consistent, args.library)
    print_stack_warnings(stack)
    parallel = _parallel_kw(args)
    thick = _split_assignments(args.thickness, "--thickness") if args.thickness else {"*": "1 ML"}
    comp = (_split_assignments(args.composition, "--composition") if args.composition
            else {"*": "0.01"})
    extra = _extra_tolerances(args.vary)
    if args.monte_carlo is not None and args.monte_carlo < 0:
        raise QwellError(f"--monte-carlo {args.monte_carlo}: expected a count >= 0")
    if args.monte_carlo:
        _check_count(f"--monte-carlo {args.monte_carlo}", args.monte_carlo, _design_cap(args),
                     args)
    if not 0 <= args.seed <= MAX_SEED:
        raise QwellError(f"--seed {args.seed}: expected a whole number from 0 to {MAX_SEED}")
    rate = None
    if args.growth_rate is not None:
        try:
            parse_growth_rate(args.growth_rate)
        except ParameterError as exc:
            raise QwellError(f"--growth-rate {args.growth_rate}: {exc}") from None
        rate = args.growth_rate
    if args.png:
        if not args.monte_carlo:
            raise QwellError(f"--png {args.png}: the histogram needs a Monte Carlo run; add "
                             "--monte-carlo N")
        check_figure_target(args.png)
    line = design_line(stack, args.transition, check=False)
    res = tolerance(stack, line.transition, thick, comp, extra, growth_rate=rate,
                    monte_carlo=args.monte_carlo or 0, seed=args.seed,
                    distribution=args.distribution, **parallel)
    if args.png:
        res.plot(args.png, protect=[args.stack], title=stack.name, unit=args.unit)
    if args.json:
        print_json({**tolerance_json(res, args.unit), "design_line": design_line_json(line)})
        return 0
    print(line.headline())
    print_tolerance(stack, res, args.unit)
    if args.png:
        print(f"wrote {args.png}")
    return 0


def _um_line(lam_um: float, unit: str) -> str:
    """A wavelength [µm] written as a line in ``unit`` (no unit text)."""
    return format_line(energy_of_um(lam_um), unit, with_unit=False)


def print_tolerance(stack, res, unit: str | None = None) -> None:
    """One-at-a-time rows, correlated groups, both views side by side, Monte Carlo, notes.

    Lines are in ``unit`` (default: the nominal line's spectral region), spreads in its
    spread unit (nm, µm, cm⁻¹, GHz for THz lines, meV).
    """
    e0 = res.nominal_energy_eV
    u = line_unit(e0, unit)
    su = unit_label(spread_unit(u))

    def spread(d, sign="+"):
        return format_spread(d, e0, u, sign=sign, with_unit=False)

    print(f"{stack.name}: {res.transition} at {format_line(e0, u)} ({energy_text(e0, u)})")
    if res.depolarised:
        print(f"  depolarisation-shifted; bare line {format_line(res.bare_energy_eV, u)} "
              f"({res.bare_energy_eV:.6f} eV)")
    rows = [[c.parameter, f"{c.value:.6g}{unit_text(c.unit)}",
             f"±{c.delta:.4g}{unit_text(c.unit)} ({c.spec})",
             _um_line(c.wavelength_minus_um, u), _um_line(c.wavelength_plus_um, u),
             spread(c.contribution_nm)] for c in res.contributions]
    print("\nOne at a time (each parameter alone)")
    print(table(rows, ["parameter", "nominal", "tolerance", column(u, "(-)"), column(u, "(+)"),
                       f"contribution {su}"], ["<", ">", "<", ">", ">", ">"]))
    if res.groups:
        grows = [[g.name, _members(g.members), f"±{g.spec}", _um_line(g.wavelength_minus_um, u),
                  _um_line(g.wavelength_plus_um, u), spread(g.contribution_nm),
                  spread(g.members_sum_nm)] for g in res.groups]
        print("\nCorrelated (every layer of one composition, or of one material for the growth "
              "rate, moves together)")
        print(table(grows, ["error source", "layers", "tolerance", column(u, "(-)"),
                            column(u, "(+)"), f"contribution {su}", f"sum alone {su}"],
                    ["<", "<", "<", ">", ">", ">", ">"]))
    iw, cw = spread(res.independent_worst_case_nm, "±"), spread(res.worst_case_nm, "±")
    ir, cr = spread(res.independent_rss_nm, "±"), spread(res.rss_nm, "±")
    w = max(len(iw), len(cw), len(ir), len(cr))
    print(f"\n{'':17}  {'independent':>{w + 1 + len(su)}}  {'correlated':>{w + 1 + len(su)}}")
    print(f"{'worst case':17}  {iw:>{w}} {su}  {cw:>{w}} {su}  (sum of |contributions|; "
          "correlated used)")
    print(f"{'root-sum-square':17}  {ir:>{w}} {su}  {cr:>{w}} {su}  (a correlated group is one "
          "term)")
    corners = sorted(float(from_eV(energy_of_um(x), u)) if x and x > 0 else math.nan
                     for x in (res.corner_min_um, res.corner_max_um))
    print(f"worst-case corner designs (correlated): {fmt(corners[0], _LINE_SPEC[u])} .. "
          f"{fmt(corners[1], _LINE_SPEC[u])} {unit_label(u)}")
    mc = res.monte_carlo
    if mc is not None:
        sigma = ("each tolerance taken as 1 sigma of a Gaussian" if mc.distribution == "normal"
                 else "each error uniform on ±tolerance")
        pct = dict(mc.percentile_range_um)
        if u not in ("nm", "um"):  # a decreasing measure: its k-th percentile is λ's (100-k)-th
            pct = {k: tuple(reversed(pct.get(100 - k, (math.nan, math.nan)))) for k in pct}
        print(f"Monte Carlo ({mc.samples} designs, correlated errors, {sigma}, seed {mc.seed}): "
              f"mean {_um_line(mc.mean_um, u)} {unit_label(u)}"
              f"{'' if u in ('nm', 'um') else ' (of the wavelengths)'}, std "
              f"{format_spread(mc.std_nm, e0, u, sign='±')[1:]}"
              + (f" over the {mc.valid} designs with the line" if mc.lost else ""))
        print("  percentiles over all designs: "
              + ", ".join(f"{k}%: {_pct_text(lo, hi, u)}" for k, (lo, hi) in pct.items()))
        if mc.lost:
            print(f"  lost: {mc.lost} of {mc.samples} designs "
                  f"({100.0 * mc.lost / mc.samples:.3g} %) have no {res.transition}: "
                  + "; ".join(f"{why} ({n})" for why, n in mc.lost_reasons)
                  + "; each percentile is given from the lost designs ranked at the short to "
                    "ranked at the long end")
    for n in res.notes:
        print(f"note: {n}")


def _members(paths, limit: int = 3) -> str:
    names = [p.rsplit(".", 1)[0] for p in paths]
    if len(names) <= limit:
        return ", ".join(names)
    return ", ".join(names[:limit]) + f" … ({len(names)} layers)"


def _pct_text(lo: float, hi: float, unit: str = "um") -> str:
    """A percentile over all designs [wavelengths in µm], written in ``unit``: one value, or
    the range the lost designs leave open."""
    label = unit_label(unit)
    if math.isfinite(lo) and lo == hi:
        return f"{_um_line(lo, unit)} {label}"
    a = _um_line(lo, unit) if math.isfinite(lo) else "lost"
    b = _um_line(hi, unit) if math.isfinite(hi) else "lost"
    return f"{a} .. {b} {label}"
