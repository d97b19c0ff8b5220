"""Design workflows on the command line: ``size``, ``sweep``, ``tolerance``.

Values on the command line carry their units and are read with pint
(``--from 4nm``, ``--step 1ML``, ``--target 4.6um``); compositions are plain
numbers.  Every user error is a :class:`~qwell.errors.QwellError`: one line on
stderr, exit status 2.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ..constants import HC_EV_UM
from ..design import (get_parameter, parse_growth_rate, parse_parameter_value, size, sweep,
                      tolerance)
from ..errors import ParameterError, QwellError
from ..fileio import atomic_write_text
from ..stack_text import edit_stack_text
from ..units import spectral_to_eV
from .common import add_self_consistent_option, fmt, load, print_json, table, unit_text
from .json_out import size_json, sweep_json, tolerance_json

__all__ = ["register", "cmd_size", "cmd_sweep", "cmd_tolerance"]


def register(subparsers) -> None:
    """Add ``size``, ``sweep`` and ``tolerance`` to the ``qwell`` sub-commands."""
    s = subparsers.add_parser("size", help="size a layer (or composition, field, temperature) "
                              "for a target wavelength")
    s.add_argument("stack", help="stack YAML file")
    s.add_argument("--vary", required=True, metavar="PATH",
                   help="parameter, e.g. well.thickness, barrier.x, field, temperature")
    s.add_argument("--target", required=True,
                   help="wavelength, energy, wavenumber or frequency, e.g. 4.6um, 270meV")
    s.add_argument("--transition", default="e1-e2", help="transition (default e1-e2)")
    s.add_argument("--from", dest="lo", metavar="VALUE", help="search range start (with units)")
    s.add_argument("--to", dest="hi", metavar="VALUE", help="search range end (with units)")
    s.add_argument("--json", action="store_true", help="machine-readable output")
    s.add_argument("--write", metavar="FILE",
                   help="write the sized stack to FILE: the input's text with the value in place "
                        "(comments and order kept; never the input file)")
    s.add_argument("--round-ml", action="store_true",
                   help="with --write: write the thickness as the nearest whole number of "
                        "monolayers (and print the line it gives)")
    _add_parallel(s)
    add_self_consistent_option(s)
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
                   help="transition to follow (repeatable; default e1-e2 if it exists)")
    w.add_argument("--sensitivity", default="grid", choices=["grid", "local"],
                   help="dλ/dp from the sweep grid (default) or by local central differences")
    w.add_argument("--json", action="store_true")
    w.add_argument("--csv", metavar="FILE", help="write a CSV table")
    w.add_argument("--png", metavar="FILE", help="write a plot (a colour map for two --vary)")
    _add_parallel(w)
    add_self_consistent_option(w)
    w.set_defaults(func=cmd_sweep)

    t = subparsers.add_parser("tolerance", help="wavelength spread from growth tolerances")
    t.add_argument("stack", help="stack YAML file")
    t.add_argument("--transition", default="e1-e2", help="transition (default e1-e2)")
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
    _add_parallel(t)
    add_self_consistent_option(t)
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
    if args.dask_timeout is not None and not args.dask_timeout > 0:
        raise QwellError(f"--dask-timeout {args.dask_timeout:g}: expected a positive number "
                         "of seconds")
    return dict(jobs=args.jobs, dask=args.dask, dask_timeout_s=args.dask_timeout)


# ---------------------------------------------------------------------------
# size
# ---------------------------------------------------------------------------
def cmd_size(args) -> int:
    """Run ``qwell size``; returns the exit status."""
    stack = load(args.stack, args.self_consistent)
    p = get_parameter(stack, args.vary)
    target = spectral_to_eV(args.target)
    bounds = None
    if args.lo is not None or args.hi is not None:
        if args.lo is None or args.hi is None:
            raise QwellError("--from and --to go together; give both or neither")
        bounds = (parse_parameter_value(p, args.lo), parse_parameter_value(p, args.hi))
    if args.round_ml and not args.write:
        raise QwellError("--round-ml goes with --write FILE (the whole-monolayer options are "
                         "listed without it)")
    if args.round_ml and (p.kind != "thickness" or not p.monolayer_nm):
        raise QwellError(f"--round-ml: {p.path} is not a thickness of a layer with a lattice "
                         "constant; expected a LAYER.thickness of a crystal layer")
    if args.write:
        if Path(args.write).exists() and Path(args.write).resolve() == Path(args.stack).resolve():
            raise QwellError(f"--write {args.write}: refusing to overwrite the input stack file")
    res = size(stack, p.path, target, args.transition, bounds=bounds, **_parallel_kw(args))
    written = None
    if args.write:
        written = _write_sized(args, stack, p, res)
    if args.json:
        out = size_json(res)
        if written is not None:
            out["written"] = written
        print_json(out)
        return 0
    print_size(stack, p, target, res)
    if written is not None:
        if written["monolayers"] is None:
            print(f"wrote {args.write}: {p.path} = {written['value']!r}{unit_text(p.unit)}")
        else:
            print(f"wrote {args.write}: {p.path} = {written['monolayers']} ML "
                  f"({written['value']:.4f} nm)  ->  {res.transition} at "
                  f"{fmt(written['wavelength_um'], '.5f')} µm "
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


def print_size(stack, p, target_eV: float, res) -> None:
    """The target, the sized value and its error, whole-monolayer options, notes."""
    print(f"{stack.name}: {res.transition} at {HC_EV_UM / target_eV:.6g} µm ({target_eV:.6g} eV)")
    print(f"  {p.path} = {res.value:.6f}{unit_text(p.unit)}  ->  {res.wavelength_um:.6f} µm "
          f"({res.energy_eV:.6f} eV, {100 * res.relative_error:+.2g} % from the target)")
    if res.monolayer_options:
        rows = [[o.monolayers, f"{o.thickness_nm:.4f}", fmt(o.wavelength_um, ".5f"),
                 fmt(o.energy_eV, ".6f")] for o in res.monolayer_options]
        print("\nWhole-monolayer options")
        print(table(rows, ["ML", "thickness nm", "λ µm", "energy eV"], [">", ">", ">", ">"]))
    for n in res.notes:
        print(f"note: {n}")


# ---------------------------------------------------------------------------
# sweep
# ---------------------------------------------------------------------------
def _axis_values(p, lo, hi, points, step):
    """Grid values of one swept parameter (in its unit), each checked against its range."""
    a = parse_parameter_value(p, lo)
    b = parse_parameter_value(p, hi)
    if step is not None:
        st = parse_parameter_value(p, step, delta=True)
        if not st > 0:
            raise ParameterError(f"--step {step!r}: expected a positive step")
        n = int(math.floor(abs(b - a) / st + 1e-9)) + 1
        vals = a + np.sign(b - a) * st * np.arange(n)
    else:
        if points is None:
            points = 21
        if points < 1:
            raise ParameterError(f"--points {points}: expected at least 1")
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
        axes.append((p, _axis_values(p, los[k], his[k], npts, step)))
    return axes


def cmd_sweep(args) -> int:
    """Run ``qwell sweep``; returns the exit status."""
    stack = load(args.stack, args.self_consistent)
    axes = _sweep_axes(stack, args)
    (p1, v1) = axes[0]
    p2, v2 = (axes[1] if len(axes) > 1 else (None, None))
    res = sweep(stack, p1.path, v1, args.transition, parameter2=None if p2 is None else p2.path,
                values2=v2, sensitivity=args.sensitivity, **_parallel_kw(args))
    if args.csv:
        atomic_write_text(args.csv, res.to_csv(), protect=[args.stack])
    if args.png:
        res.plot(args.png, protect=[args.stack], title=stack.name)
    if args.json:
        print_json(sweep_json(res))
        return 0
    if p2 is None:
        print_sweep(stack, p1, v1, res)
    else:
        print_map(stack, p1, v1, p2, v2, res)
    for n in res.notes:
        print(f"note: {n}")
    for f in (args.csv, args.png):
        if f:
            print(f"wrote {f}")
    return 0


def print_sweep(stack, p1, v1, res) -> None:
    """1-D sweep: state energies, and wavelength and dλ/dp of each followed transition."""
    heads = [f"{p1.path}{unit_text(p1.unit)}"] + list(res.state_labels)
    aligns = [">"] * len(heads)
    for t in res.transitions:
        heads += [f"{t} λ µm", f"dλ {res.sensitivity_units[p1.path]}"]
        aligns += [">", ">"]
    rows = []
    for i, v in enumerate(v1):
        row = [f"{v:.6g}"] + [fmt(res.state_energy_eV[lab][i], ".5f") for lab in res.state_labels]
        for t in res.transitions:
            row += [fmt(res.wavelength_um[t][i], ".5f"), fmt(res.sensitivity[t][p1.path][i], ".3f")]
        rows.append(row)
    print(f"{stack.name}: sweep of {p1.path} (state energies in eV)")
    print(table(rows, heads, aligns))


def print_map(stack, p1, v1, p2, v2, res) -> None:
    """2-D map: one wavelength table per followed transition."""
    print(f"{stack.name}: map of {p1.path} x {p2.path}")
    for t in res.transitions:
        print(f"\n{t} wavelength [µm]; rows {p1.path}, columns {p2.path}")
        heads = [""] + [f"{v:.4g}" for v in v2]
        rows = [[f"{v:.4g}"] + [fmt(res.wavelength_um[t][i, j], ".4f") for j in range(len(v2))]
                for i, v in enumerate(v1)]
        print(table(rows, heads, [">"] * len(heads)))


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
    stack = load(args.stack, args.self_consistent)
    thick = _split_assignments(args.thickness, "--thickness") if args.thickness else {"*": "1 ML"}
    comp = (_split_assignments(args.composition, "--composition") if args.composition
            else {"*": "0.01"})
    extra = _extra_tolerances(args.vary)
    if args.monte_carlo is not None and args.monte_carlo < 0:
        raise QwellError(f"--monte-carlo {args.monte_carlo}: expected a count >= 0")
    rate = None
    if args.growth_rate is not None:
        try:
            parse_growth_rate(args.growth_rate)
        except ParameterError as exc:
            raise QwellError(f"--growth-rate {args.growth_rate}: {exc}") from None
        rate = args.growth_rate
    if args.png and not args.monte_carlo:
        raise QwellError(f"--png {args.png}: the histogram needs a Monte Carlo run; add "
                         "--monte-carlo N")
    res = tolerance(stack, args.transition, thick, comp, extra, growth_rate=rate,
                    monte_carlo=args.monte_carlo or 0, seed=args.seed,
                    distribution=args.distribution, **_parallel_kw(args))
    if args.png:
        res.plot(args.png, protect=[args.stack], title=stack.name)
    if args.json:
        print_json(tolerance_json(res))
        return 0
    print_tolerance(stack, res)
    if args.png:
        print(f"wrote {args.png}")
    return 0


def print_tolerance(stack, res) -> None:
    """One-at-a-time rows, correlated groups, both views side by side, Monte Carlo, notes."""
    print(f"{stack.name}: {res.transition} at {res.nominal_wavelength_um:.5f} µm "
          f"({res.nominal_energy_eV:.6f} eV)")
    rows = [[c.parameter, f"{c.value:.6g}{unit_text(c.unit)}",
             f"±{c.delta:.4g}{unit_text(c.unit)} ({c.spec})",
             fmt(c.wavelength_minus_um, ".5f"), fmt(c.wavelength_plus_um, ".5f"),
             fmt(c.contribution_nm, "+.3f")] for c in res.contributions]
    print("\nOne at a time (each parameter alone)")
    print(table(rows, ["parameter", "nominal", "tolerance", "λ(-) µm", "λ(+) µm",
                       "contribution nm"], ["<", ">", "<", ">", ">", ">"]))
    if res.groups:
        grows = [[g.name, _members(g.members), f"±{g.spec}", fmt(g.wavelength_minus_um, ".5f"),
                  fmt(g.wavelength_plus_um, ".5f"), fmt(g.contribution_nm, "+.3f"),
                  fmt(g.members_sum_nm, "+.3f")] for g in res.groups]
        print("\nCorrelated (every layer of one composition, or of one material for the growth "
              "rate, moves together)")
        print(table(grows, ["error source", "layers", "tolerance", "λ(-) µm", "λ(+) µm",
                            "contribution nm", "sum alone nm"],
                    ["<", "<", "<", ">", ">", ">", ">"]))
    w = max(len(fmt(res.independent_worst_case_nm, ".3f")), len(fmt(res.worst_case_nm, ".3f")))
    print(f"\n{'':17}  {'independent':>{w + 4}}  {'correlated':>{w + 4}}")
    print(f"{'worst case':17}  ±{fmt(res.independent_worst_case_nm, '.3f'):>{w}} nm"
          f"  ±{fmt(res.worst_case_nm, '.3f'):>{w}} nm  (sum of |contributions|; correlated used)")
    print(f"{'root-sum-square':17}  ±{fmt(res.independent_rss_nm, '.3f'):>{w}} nm"
          f"  ±{fmt(res.rss_nm, '.3f'):>{w}} nm  (a correlated group is one term)")
    print(f"worst-case corner designs (correlated): {fmt(res.corner_min_um, '.5f')} .. "
          f"{fmt(res.corner_max_um, '.5f')} µm")
    mc = res.monte_carlo
    if mc is not None:
        sigma = ("each tolerance taken as 1 sigma of a Gaussian" if mc.distribution == "normal"
                 else "each error uniform on ±tolerance")
        print(f"Monte Carlo ({mc.samples} designs, correlated errors, {sigma}, seed {mc.seed}): "
              f"mean {fmt(mc.mean_um, '.5f')} µm, std {fmt(mc.std_nm, '.3f')} nm"
              + (f" over the {mc.valid} designs with the line" if mc.lost else ""))
        print("  percentiles over all designs: "
              + ", ".join(f"{k}%: {_pct_text(lo, hi)}"
                          for k, (lo, hi) in mc.percentile_range_um.items()))
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


def _pct_text(lo: float, hi: float) -> str:
    """A percentile over all designs: one value, or the range the lost designs leave open."""
    if math.isfinite(lo) and lo == hi:
        return f"{lo:.5f} µm"
    a = f"{lo:.5f}" if math.isfinite(lo) else "lost"
    b = f"{hi:.5f}" if math.isfinite(hi) else "lost"
    return f"{a} .. {b} µm"
