"""Command line of qwell: a thin layer over the Python API.

Every command reads its inputs, calls the API and prints a readable table or
(with ``--json``) the machine-readable contract.  Any :class:`QwellError`
becomes one line on stderr and exit status 2; nothing is half-written.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import warnings

from . import __version__
from .errors import QwellError, QwellWarning

EXIT_USAGE = 2


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------

def _print_json(obj) -> None:
    def default(o):
        import numpy as np
        if isinstance(o, np.ndarray):
            return o.tolist()
        if isinstance(o, (np.floating, np.integer)):
            return o.item()
        raise TypeError(type(o).__name__)

    def clean(o):
        if isinstance(o, float) and not math.isfinite(o):
            return None
        if isinstance(o, dict):
            return {k: clean(v) for k, v in o.items()}
        if isinstance(o, (list, tuple)):
            return [clean(v) for v in o]
        return o

    json.dump(clean(obj), sys.stdout, indent=1, default=default)
    sys.stdout.write("\n")


def _table(rows, headers, aligns=None) -> str:
    rows = [[("" if c is None else str(c)) for c in r] for r in rows]
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(headers)]
    aligns = aligns or ["<"] * len(headers)
    def fmt(r):
        return "  ".join(f"{c:{a}{w}}" for c, a, w in zip(r, aligns, widths)).rstrip()
    out = [fmt(headers), fmt(["-" * w for w in widths])]
    out += [fmt(r) for r in rows]
    return "\n".join(out)


#: Options of the current invocation that every stack-loading command honours.
_INVOCATION = {"self_consistent": False}


def _load(path):
    """Load a stack; ``--self-consistent`` switches on the charged path for every command."""
    from .stack import load_stack
    stack = load_stack(path)
    if _INVOCATION["self_consistent"] and not stack.self_consistent:
        from dataclasses import replace
        stack = replace(stack, self_consistent=True,
                        raw={**dict(stack.raw), "self_consistent": True})
    return stack


# ---------------------------------------------------------------------------
# materials
# ---------------------------------------------------------------------------

def cmd_materials(args) -> int:
    from .materials import get_material, known_materials
    from .units import to_float

    if not args.name:
        names = known_materials()
        if args.json:
            _print_json({"materials": names})
        else:
            print("Known materials (formula notation with numbers, e.g. Al0.3Ga0.7As):")
            for n in names:
                print(f"  {n}")
        return 0
    T = to_float(args.temperature, "K", "a temperature (e.g. '300 K')")
    if T <= 0:
        raise QwellError(f"--temperature {args.temperature!r}: must be above 0 K")
    mat = get_material(args.name, T)
    params = mat.parameters()
    sources = mat.parameter_sources()
    if args.json:
        _print_json({"name": mat.name, "family": mat.family, "composition": dict(mat.composition),
                     "temperature_K": T, "parameters": params, "sources": sources})
        return 0
    print(f"{mat.name}  ({mat.family}, T = {T:g} K)")
    keys = list(params)
    cites = []
    rows = []
    for k in keys:
        v = params[k]
        src = sources.get(k, "")
        if src not in cites:
            cites.append(src)
        rows.append([k, "—" if v is None else f"{v:.6g}", f"[{cites.index(src) + 1}]"])
    print(_table(rows, ["parameter", "value", "source"], ["<", ">", "<"]))
    print()
    for i, c in enumerate(cites, 1):
        print(f"[{i}] {c}")
    return 0


# ---------------------------------------------------------------------------
# profile
# ---------------------------------------------------------------------------

def cmd_profile(args) -> int:
    stack = _load(args.stack)
    prof = _profile_of(stack, args)
    if args.png:
        from .plots import plot_profile
        path = plot_profile(prof, args.png, protect=[args.stack], charge=getattr(args, "_sc", None))
        if not args.json:
            print(f"wrote {path}")
    if args.json:
        out = prof.to_json()
        sc = getattr(args, "_sc", None)
        if sc is not None:
            from .levels import self_consistent_json
            out["self_consistent"] = self_consistent_json(sc)
            out["self_consistent"].update({
                "z_nm": sc.z_nm.tolist(), "potential_eV": sc.potential_eV.tolist(),
                "electron_density_cm3": sc.electron_density_cm3.tolist(),
                "hole_density_cm3": sc.hole_density_cm3.tolist()})
        _print_json(out)
        return 0
    print(f"{stack.name}  (T = {stack.temperature_K:g} K"
          + (f", substrate {stack.substrate}" if stack.substrate else "")
          + (f", field {stack.field_kV_per_cm:g} kV/cm" if stack.field_kV_per_cm else "") + ")")
    import numpy as np
    rows = []
    for lp in prof.layers:
        sel = prof.layer_samples(lp.index)

        def rng(a, sel=sel):
            a = a[sel]
            a = a[np.isfinite(a)]
            if a.size == 0:
                return "—"
            lo, hi = float(a.min()), float(a.max())
            return f"{lo:.4f}" if abs(hi - lo) < 5e-5 else f"{lo:.4f}..{hi:.4f}"
        ml = f"{lp.thickness_nm / lp.monolayer_nm:.1f}" if lp.monolayer_nm else "—"
        rows.append([lp.label, lp.material, f"{lp.start_nm:.3f}", f"{lp.thickness_nm:.3f}", ml,
                     rng(prof.conduction_edge_eV), rng(prof.heavy_hole_edge_eV),
                     rng(prof.light_hole_edge_eV), f"{100 * lp.strain_xx:+.3f}"])
    print(_table(rows, ["layer", "material", "start nm", "thick nm", "ML", "Ec eV", "Ehh eV",
                        "Elh eV", "eps_xx %"],
                 ["<", "<", ">", ">", ">", ">", ">", ">", ">"]))
    offsets = prof.band_offsets()
    if offsets:
        print("\nBand offsets at interfaces (right minus left; Qc = ΔEc / (ΔEc - ΔEv,top))")
        rows = [[f"{o['left']} | {o['right']}", f"{o['z_nm']:.3f}", f"{1e3 * o['delta_conduction_eV']:+.1f}",
                 "—" if o["delta_valence_eV"] is None else f"{1e3 * o['delta_valence_eV']:+.1f}",
                 "—" if o["conduction_share"] is None else f"{100 * o['conduction_share']:.0f} %"]
                for o in offsets]
        print(_table(rows, ["interface", "z nm", "ΔEc meV", "ΔEv meV", "Qc"], ["<", ">", ">", ">", ">"]))
    strained = [lp for lp in prof.layers if abs(lp.strain_xx) > 1e-6]
    if strained:
        print("\nStrain (pseudomorphic on (001); shifts of the band edges from the unstrained ones)")
        rows = [[lp.label, f"{100 * lp.strain_xx:+.3f}", f"{100 * lp.strain_zz:+.3f}",
                 f"{1e3 * lp.strain_shift_conduction_eV:+.1f}",
                 f"{1e3 * lp.strain_shift_heavy_hole_eV:+.1f}",
                 f"{1e3 * lp.strain_shift_light_hole_eV:+.1f}",
                 "—" if math.isinf(lp.critical_thickness_nm) else f"{lp.critical_thickness_nm:.3g}"]
                for lp in strained]
        print(_table(rows, ["layer", "eps_xx %", "eps_zz %", "δEc meV", "δEhh meV", "δElh meV",
                            "h_c nm"], ["<", ">", ">", ">", ">", ">", ">"]))
    for w in prof.warnings:
        print(f"warning: {w}")
    return 0


def _profile_of(stack, args):
    from .levels import prepare_profile
    prof, sc = prepare_profile(stack)
    if sc is not None and not getattr(args, "json", False):
        _print_self_consistent(sc)
    args._sc = sc
    return prof


def _print_self_consistent(sc) -> None:
    import math
    ef = sc.fermi_level_eV
    print(f"self-consistent (Schrödinger–Poisson): {sc.iterations} iterations, residual "
          f"{sc.residual_meV:.3g} meV, charge residual {sc.charge_residual:.2g}, Fermi level "
          + ("not defined (no charge)" if ef is None or math.isnan(ef) else f"{ef:.6f} eV"))
    occ = {k: v for k, v in sc.sheet_densities_cm2.items() if v > 0}
    if occ:
        print("sheet densities: " + ", ".join(f"{k} {v:.4g} cm⁻²" for k, v in occ.items()))
    print()


# ---------------------------------------------------------------------------
# levels
# ---------------------------------------------------------------------------

def _solutions(stack, args):
    from dataclasses import replace

    from .levels import solve_profile
    prof = _profile_of(stack, args)
    methods = ["exact", "semiclassical"] if args.method == "both" else [args.method]
    sols = {m: solve_profile(prof, bands=args.band, method=m, transitions=(m == "exact"),
                             hole_intersubband=args.hole_intersubband) for m in methods}
    if args._sc is not None:
        sols = {m: replace(s, self_consistent=args._sc) for m, s in sols.items()}
    return sols


def _state_rows(sol):
    rows = []
    for s in sol.states:
        band = sol.profile.bands[s.band]
        edge = band.profile_energy(band.potential_min_eV)
        conf = 1e3 * abs(s.energy_eV - edge)
        life = "" if s.lifetime_s is None else f"{s.lifetime_s:.3g} s"
        flag = "bound" if s.bound else "quasi-bound"
        if not s.converged:
            flag += f" (NOT converged, ±{s.tolerance_eV * 1e6:.2g} µeV)"
        rows.append([s.band, s.label, f"{s.energy_eV:.6f}", f"{conf:.3f}", flag, life])
    return rows


#: most lines per transition table (strongest first); a 50-period stack has thousands
MAX_TABLE_LINES = 40


def _hidden_note(hidden: int, kind: str, criterion: str, capped: int = 0) -> None:
    if hidden:
        print(f"({hidden} {kind} line{'s' if hidden != 1 else ''} with {criterion} "
              "not shown; --json lists all)")
    if capped:
        print(f"({capped} weaker {kind} line{'s' if capped != 1 else ''} beyond the "
              f"{MAX_TABLE_LINES} strongest not shown; --json lists all)")


def _print_transitions(trans, show_all=False) -> None:
    """Intersubband then interband tables, each strongest first; forbidden lines counted."""
    from .optics import strength

    inter = sorted((t for t in trans if t.kind == "intersubband"), key=lambda t: -strength(t))
    band = sorted((t for t in trans if t.kind == "interband"), key=lambda t: -strength(t))
    if inter:
        shown_i = inter if show_all else [t for t in inter if (t.oscillator_strength or 0) >= 1e-3]
        capped_i = 0 if show_all else max(0, len(shown_i) - MAX_TABLE_LINES)
        hidden_i = len(inter) - len(shown_i)
        shown_i = shown_i if show_all else shown_i[:MAX_TABLE_LINES]
        rows = [[t.name, f"{t.energy_eV:.6f}", f"{t.wavelength_um:.5f}", f"{t.wavenumber_cm1:.2f}",
                 f"{t.frequency_THz:.3f}", f"{t.dipole_nm:.4f}", f"{t.oscillator_strength:.4f}"]
                for t in shown_i]
        print("\nIntersubband transitions (absorption from the lower state, strongest first)")
        print(_table(rows, ["transition", "energy eV", "λ µm", "cm⁻¹", "THz", "|z| nm", "f"],
                     ["<", ">", ">", ">", ">", ">", ">"]))
        _hidden_note(hidden_i, "intersubband", "f < 0.001", capped_i)
    if band:
        shown = band if show_all else [t for t in band if (t.overlap or 0.0) >= 1e-3]
        capped = 0 if show_all else max(0, len(shown) - MAX_TABLE_LINES)
        hidden = len(band) - len(shown)
        shown = shown if show_all else shown[:MAX_TABLE_LINES]
        lowest = min(band, key=lambda t: t.energy_eV)
        rows = [[t.name, f"{t.energy_eV:.6f}", f"{1e3 * t.wavelength_um:.2f}",
                 f"{t.overlap:.4f}", f"{t.te:.4f}", f"{t.tm:.4f}",
                 ", ".join(x for x in ("Δn=0" if t.strongest else "",
                                       "lowest energy" if t is lowest else "") if x)]
                for t in shown]
        print("\nInterband transitions (strongest first; excitonic binding not included)")
        print(_table(rows, ["transition", "energy eV", "λ nm", "|<e|h>|²", "TE", "TM", ""],
                     ["<", ">", ">", ">", ">", ">", "<"]))
        _hidden_note(hidden, "interband", "|<e|h>|² < 0.001", capped)


def _add_wavefunctions(out: dict, sol) -> None:
    """Put each state's grid, envelope and layer probabilities into its JSON entry."""
    by_label = {s.label: s for s in sol.states}
    for js in out["states"]:
        s = by_label.get(js["label"])
        if s is None or s.psi is None:
            continue
        js["z_nm"] = [round(float(v), 6) for v in s.z_nm]
        js["psi"] = [float(f"{v:.6g}") for v in s.psi]
        js["layer_probability"] = [float(p) for p in s.layer_probability]


def _spectrum_lines(solution, chosen, args):
    """Lines of the spectrum plot and a short description of the choice.

    With ``--transition`` the chosen lines are used as given.  Otherwise the
    plot shows one kind (``--spectrum``; default intersubband when the stack
    has any): intersubband lines start from the ground subband only (the
    populated one in an undoped well at low density), interband lines all.
    """
    if args.transition:
        return chosen, "chosen lines"
    kinds = {t.kind for t in chosen}
    kind = args.spectrum or ("intersubband" if "intersubband" in kinds else "interband")
    lines = [t for t in chosen if t.kind == kind]
    if kind == "intersubband":
        cb = solution.levels.get("conduction")
        ground = cb.states[0].label if cb is not None and len(cb) else "e1"
        lines = [t for t in lines if t.initial == ground]
        what = f"intersubband absorption from {ground}"
    else:
        what = "interband lines"
    if not lines:
        raise QwellError(f"--png: no {kind} transitions to plot")
    return lines, what


def cmd_levels(args) -> int:
    from .levels import compare_methods
    from .optics import select_transitions

    stack = _load(args.stack)
    if args.transition and args.band not in ("all", "conduction") and not args.hole_intersubband:
        raise QwellError(f"--transition needs the conduction band: transitions start from "
                         f"electron states, but --band {args.band} solves only that band; "
                         "use --band all")
    sols = _solutions(stack, args)
    chosen = {}
    for m, sol in sols.items():
        trans = sol.transitions
        if args.transition:
            trans = select_transitions(trans, args.transition)
        chosen[m] = trans
    spec = None
    if args.png:
        from .optics import plot_spectrum, spectrum
        exact = sols.get("exact")
        if exact is None or not chosen.get("exact"):
            raise QwellError("--png: the spectrum needs transitions from the exact method")
        lines, what = _spectrum_lines(exact, chosen["exact"], args)
        spec = spectrum(lines, linewidth_meV=args.linewidth, shape=args.lineshape)
        plot_spectrum(spec, args.png, axis=args.axis, title=f"{stack.name}: {what}",
                      protect=[args.stack])
    if args.json:
        if len(sols) == 1:
            (m, sol), = sols.items()
            out = sol.to_json()
            out["transitions"] = [t.to_json() for t in chosen[m]]
            if sol.self_consistent is not None:
                from .levels import depolarised_lines
                out["depolarisation"] = depolarised_lines(sol)
            if args.wavefunctions:
                _add_wavefunctions(out, sol)
            if spec is not None:
                out["spectrum"] = {"energy_eV": spec.energy_eV, "wavelength_um": spec.wavelength_um,
                                   "absorption": spec.absorption, "linewidth_meV": spec.linewidth_meV,
                                   "shape": spec.shape, "lines": [t.name for t in spec.lines]}
        else:
            out = {"stack": stack.name, "temperature_K": stack.temperature_K, "method": "both",
                   "methods": {}, "comparison": compare_methods(sols["exact"], sols["semiclassical"])}
            for m, sol in sols.items():
                j = sol.to_json()
                j["transitions"] = [t.to_json() for t in chosen[m]]
                out["methods"][m] = j
        _print_json(out)
        return 0
    head = f"{stack.name}  (T = {stack.temperature_K:g} K"
    if stack.field_kV_per_cm:
        head += f", field {stack.field_kV_per_cm:g} kV/cm"
    print(head + ")")
    if len(sols) == 1:
        (m, sol), = sols.items()
        print(f"\nStates ({m}; energies on the band-diagram scale, confinement from the band's lowest edge)")
        print(_table(_state_rows(sol), ["band", "state", "energy eV", "conf. meV", "status", "lifetime"],
                     ["<", "<", ">", ">", "<", ">"]))
    else:
        rows = []
        for r in compare_methods(sols["exact"], sols["semiclassical"]):
            def f(v, spec):
                return "—" if v is None else format(v, spec)
            rows.append([r["band"], r["label"], f(r["exact_eV"], ".6f"), f(r["semiclassical_eV"], ".6f"),
                         f(r["difference_meV"], "+.3f"), f(r["difference_percent"], "+.2f")])
        print("\nStates: exact vs semiclassical (difference = semiclassical - exact, carrier scale)")
        print(_table(rows, ["band", "state", "exact eV", "semiclassical eV", "diff meV", "diff %"],
                     ["<", "<", ">", ">", ">", ">"]))
    for m, sol in sols.items():
        for lev in sol.levels.values():
            if lev.message and not lev.states:
                print(f"note ({m}, {lev.band}): {lev.message}")
            for n in lev.notes:
                print(f"note ({m}, {lev.band}): {n}")
            for mb in lev.minibands:
                print(f"miniband {lev.band} {mb.index}: {mb.bottom_eV:.6f} .. {mb.top_eV:.6f} eV "
                      f"(width {1e3 * mb.width_eV:.3f} meV, period {mb.period_nm:.3f} nm)")
        for n in sol.notes:
            print(f"note: {n}")
    trans = chosen.get("exact", ())
    _print_transitions(trans, show_all=bool(args.transition))
    if "exact" in sols and sols["exact"].self_consistent is not None:
        from .levels import depolarised_lines
        names = {t.name for t in trans}
        rows = [[d["transition"], f"{d['sheet_density_cm2']:.4g}", f"{1e3 * d['shift_eV']:.3f}",
                 f"{d['shifted_energy_eV']:.6f}", f"{d['shifted_wavelength_um']:.5f}"]
                for d in depolarised_lines(sols["exact"]) if d["transition"] in names]
        if rows:
            print("\nIntersubband absorption with the depolarisation shift (Ando, Fowler, Stern 1982)")
            print(_table(rows, ["transition", "Δn cm⁻²", "shift meV", "energy eV", "λ µm"],
                         ["<", ">", ">", ">", ">"]))
    for w in next(iter(sols.values())).profile.warnings:
        print(f"warning: {w}")
    if args.png:
        print(f"wrote {args.png}")
    return 0


# ---------------------------------------------------------------------------
# parser
# ---------------------------------------------------------------------------

class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2
        self.exit(EXIT_USAGE, f"{self.prog}: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="qwell", description="Quantum-well layer-stack design: profiles, subbands, "
                "transitions, sizing, sweeps and design-review reports.")
    p.add_argument("--version", action="version", version=f"qwell {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    m = sub.add_parser("materials", help="list materials, or show one's parameters and sources")
    m.add_argument("name", nargs="?", help="material, e.g. GaAs or Al0.3Ga0.7As")
    m.add_argument("--temperature", default="300 K", help="temperature (default 300 K)")
    m.add_argument("--json", action="store_true", help="machine-readable output")
    m.set_defaults(func=cmd_materials)

    pr = sub.add_parser("profile", help="band-edge profile of a stack")
    pr.add_argument("stack", help="stack YAML file")
    pr.add_argument("--json", action="store_true")
    pr.add_argument("--png", metavar="FILE", help="write a band-edge plot")
    pr.set_defaults(func=cmd_profile)

    lv = sub.add_parser("levels", help="subband states and transitions of a stack")
    lv.add_argument("stack", help="stack YAML file")
    lv.add_argument("--band", default="all", choices=["conduction", "heavy_hole", "light_hole", "all"])
    lv.add_argument("--method", default="exact", choices=["exact", "semiclassical", "both"])
    lv.add_argument("--transition", action="append", metavar="e1-e2",
                    help="show only this transition (repeatable)")
    lv.add_argument("--json", action="store_true")
    lv.add_argument("--wavefunctions", action="store_true",
                    help="with --json: include each state's z grid, envelope (nm^-1/2) and "
                         "probability per layer")
    lv.add_argument("--hole-intersubband", action="store_true",
                    help="also list heavy- and light-hole intersubband pairs (hh1-hh2, lh1-lh2, ...)")
    lv.add_argument("--png", metavar="FILE", help="write the absorption spectrum plot")
    lv.add_argument("--linewidth", type=float, default=10.0, metavar="MEV",
                    help="spectrum line FWHM in meV (default 10)")
    lv.add_argument("--lineshape", default="lorentzian", choices=["lorentzian", "gaussian"])
    lv.add_argument("--axis", default="wavelength", choices=["wavelength", "energy"])
    lv.add_argument("--spectrum", choices=["intersubband", "interband"],
                    help="which lines the --png spectrum shows (default: intersubband if any)")
    lv.set_defaults(func=cmd_levels)

    for extra in _EXTRA_COMMANDS:
        extra(sub)
    for name, cmd in sub.choices.items():
        if name != "materials":
            cmd.add_argument("--self-consistent", action="store_true",
                             help="solve Schrödinger–Poisson with the stack's doping first "
                                  "(also set by 'self_consistent: true' in the stack)")
    return p


#: Functions that add further sub-commands (design, report); each takes the subparsers object.
_EXTRA_COMMANDS: list = []


def _register_optional():
    for modname in ("qwell.design_cli", "qwell.report_cli"):
        try:
            mod = __import__(modname, fromlist=["register"])
        except ImportError:
            continue
        if mod.register not in _EXTRA_COMMANDS:
            _EXTRA_COMMANDS.append(mod.register)


_NEGATIVE_VALUE = __import__("re").compile(r"^-(\d|\.\d)")


def _join_negative_values(argv):
    """Let '--to -2nm' mean '--to=-2nm' (argparse would take '-2nm' for an option)."""
    out = []
    for tok in argv:
        if (out and out[-1].startswith("--") and "=" not in out[-1]
                and _NEGATIVE_VALUE.match(tok)):
            out[-1] = f"{out[-1]}={tok}"
        else:
            out.append(tok)
    return out


def main(argv=None) -> int:
    _register_optional()
    parser = build_parser()
    argv = sys.argv[1:] if argv is None else list(argv)
    args = parser.parse_args(_join_negative_values(argv))
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_USAGE
    _INVOCATION["self_consistent"] = bool(getattr(args, "self_consistent", False))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", QwellWarning)
        try:
            rc = args.func(args)
        except QwellError as exc:
            msg = str(exc)
            hist = getattr(exc, "history", None)
            if hist and "history" not in msg:
                shown = ", ".join(f"{h:.3g}" for h in list(hist)[-12:])
                msg += f" (residual history, meV: {shown})"
            print(f"qwell: error: {msg}", file=sys.stderr)
            return EXIT_USAGE
        except KeyboardInterrupt:
            print("qwell: interrupted", file=sys.stderr)
            return 130
        except BrokenPipeError:
            return 0
        except Exception as exc:  # a bug: one line, details on request
            if os.environ.get("QWELL_DEBUG"):
                raise
            print(f"qwell: internal error: {type(exc).__name__}: {exc} "
                  "(set QWELL_DEBUG=1 for details; please report it)", file=sys.stderr)
            return 1
    seen = set()
    for w in caught:
        if issubclass(w.category, QwellWarning):
            msg = str(w.message)
            if msg not in seen:
                seen.add(msg)
                print(f"warning: {msg}", file=sys.stderr)
    return rc


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
