"""``qwell levels STACK``: subband states, transitions and the absorption spectrum."""

from __future__ import annotations

from dataclasses import dataclass, replace

from ..errors import QwellError
from ..fileio import OutputGroup, check_figure_target
from ..levels import compare_methods, depolarised_lines, solve_profile
from ..optics import plot_spectrum, select_transitions, spectrum, strength
from .common import add_self_consistent_option, load, print_json, profile_and_charge, table
from .json_out import levels_json

__all__ = ["register", "cmd_levels", "LevelsOptions"]


def register(subparsers) -> None:
    """Add ``levels`` to the ``qwell`` sub-commands."""
    lv = subparsers.add_parser("levels", help="subband states and transitions of a stack")
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
    add_self_consistent_option(lv)
    lv.set_defaults(func=cmd_levels)


@dataclass(frozen=True)
class LevelsOptions:
    """What one ``qwell levels`` invocation asks for (built from the parsed arguments).

    Attributes
    ----------
    stack_path : str
    band : str
        'conduction', 'heavy_hole', 'light_hole' or 'all'.
    methods : tuple of str
        ('exact',), ('semiclassical',) or both.
    transitions : tuple of str
        Lines picked with ``--transition`` (empty: all).
    json, wavefunctions, hole_intersubband, self_consistent : bool
    png : str or None
        Spectrum plot file.
    linewidth_meV : float
        Spectrum line FWHM [meV].
    lineshape, axis : str
    spectrum_kind : str or None
        'intersubband', 'interband' or None (intersubband if any).
    """

    stack_path: str
    band: str = "all"
    methods: tuple = ("exact",)
    transitions: tuple = ()
    json: bool = False
    wavefunctions: bool = False
    hole_intersubband: bool = False
    self_consistent: bool = False
    png: str | None = None
    linewidth_meV: float = 10.0
    lineshape: str = "lorentzian"
    axis: str = "wavelength"
    spectrum_kind: str | None = None

    @classmethod
    def from_args(cls, args) -> LevelsOptions:
        """Options of the parsed ``levels`` arguments; refuses contradictory ones."""
        if args.transition and args.band not in ("all", "conduction") and not args.hole_intersubband:
            raise QwellError(f"--transition needs the conduction band: transitions start from "
                             f"electron states, but --band {args.band} solves only that band; "
                             "use --band all")
        return cls(stack_path=args.stack, band=args.band,
                   methods=(("exact", "semiclassical") if args.method == "both"
                            else (args.method,)),
                   transitions=tuple(args.transition or ()), json=args.json,
                   wavefunctions=args.wavefunctions, hole_intersubband=args.hole_intersubband,
                   self_consistent=args.self_consistent, png=args.png,
                   linewidth_meV=args.linewidth, lineshape=args.lineshape, axis=args.axis,
                   spectrum_kind=args.spectrum)


def cmd_levels(args) -> int:
    """Run ``qwell levels``; returns the exit status."""
    opts = LevelsOptions.from_args(args)
    stack = load(opts.stack_path, opts.self_consistent)
    if opts.png:
        OutputGroup([opts.png], protect=[opts.stack_path])  # checks the target before the work
        check_figure_target(opts.png)
    prof, sc = profile_and_charge(stack, quiet=opts.json)
    sols = {m: solve_profile(prof, bands=opts.band, method=m, transitions=(m == "exact"),
                             hole_intersubband=opts.hole_intersubband) for m in opts.methods}
    if sc is not None:
        sols = {m: replace(s, self_consistent=sc) for m, s in sols.items()}
    chosen = {m: (select_transitions(s.transitions, list(opts.transitions)) if opts.transitions
                  else s.transitions) for m, s in sols.items()}
    spec = write_spectrum(stack, sols, chosen, opts) if opts.png else None
    if opts.json:
        print_json(levels_json(stack, sols, chosen, spectrum=spec,
                               wavefunctions=opts.wavefunctions))
    else:
        print_levels(stack, sols, chosen, opts)
    return 0


# ---------------------------------------------------------------------------
# spectrum
# ---------------------------------------------------------------------------
def spectrum_lines(solution, chosen, opts: LevelsOptions):
    """Lines of the spectrum plot and a short description of the choice.

    With ``--transition`` the chosen lines are used as given.  Otherwise the
    plot shows one kind (``--spectrum``; default intersubband when the stack
    has any): intersubband lines start from the ground subband only (the
    populated one in an undoped well at low density), interband lines all.
    """
    if opts.transitions:
        return chosen, "chosen lines"
    kinds = {t.kind for t in chosen}
    kind = opts.spectrum_kind or ("intersubband" if "intersubband" in kinds else "interband")
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


def write_spectrum(stack, sols: dict, chosen: dict, opts: LevelsOptions):
    """Compute the spectrum of the exact lines and write its plot to ``opts.png``."""
    exact = sols.get("exact")
    if exact is None or not chosen.get("exact"):
        raise QwellError("--png: the spectrum needs transitions from the exact method")
    lines, what = spectrum_lines(exact, chosen["exact"], opts)
    spec = spectrum(lines, linewidth_meV=opts.linewidth_meV, shape=opts.lineshape)
    plot_spectrum(spec, opts.png, axis=opts.axis, title=f"{stack.name}: {what}",
                  protect=[opts.stack_path])
    return spec


# ---------------------------------------------------------------------------
# text
# ---------------------------------------------------------------------------
def print_levels(stack, sols: dict, chosen: dict, opts: LevelsOptions) -> None:
    """Header, states (or the method comparison), notes, transitions, depolarisation, warnings."""
    head = f"{stack.name}  (T = {stack.temperature_K:g} K"
    if stack.field_kV_per_cm:
        head += f", field {stack.field_kV_per_cm:g} kV/cm"
    print(head + ")")
    if len(sols) == 1:
        (m, sol), = sols.items()
        print_states(m, sol)
    else:
        print_comparison(sols["exact"], sols["semiclassical"])
    for m, sol in sols.items():
        print_notes(m, sol)
    trans = chosen.get("exact", ())
    print_transitions(trans, show_all=bool(opts.transitions))
    if "exact" in sols:
        print_depolarisation(sols["exact"], trans)
    for w in next(iter(sols.values())).profile.warnings:
        print(f"warning: {w}")
    if opts.png:
        print(f"wrote {opts.png}")


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


def print_states(method: str, sol) -> None:
    """States of one method: energy, confinement above the band's lowest edge, status."""
    print(f"\nStates ({method}; energies on the band-diagram scale, confinement from the band's "
          "lowest edge)")
    print(table(_state_rows(sol), ["band", "state", "energy eV", "conf. meV", "status", "lifetime"],
                ["<", "<", ">", ">", "<", ">"]))


def print_comparison(exact, semi) -> None:
    """Exact against semiclassical energies, state by state."""
    def f(v, spec):
        return "—" if v is None else format(v, spec)
    rows = [[r["band"], r["label"], f(r["exact_eV"], ".6f"), f(r["semiclassical_eV"], ".6f"),
             f(r["difference_meV"], "+.3f"), f(r["difference_percent"], "+.2f")]
            for r in compare_methods(exact, semi)]
    print("\nStates: exact vs semiclassical (difference = semiclassical - exact, carrier scale)")
    print(table(rows, ["band", "state", "exact eV", "semiclassical eV", "diff meV", "diff %"],
                ["<", "<", ">", ">", ">", ">"]))


def print_notes(method: str, sol) -> None:
    """Solver messages, notes and minibands of each band, then the solution's notes."""
    for lev in sol.levels.values():
        if lev.message and not lev.states:
            print(f"note ({method}, {lev.band}): {lev.message}")
        for n in lev.notes:
            print(f"note ({method}, {lev.band}): {n}")
        for mb in lev.minibands:
            print(f"miniband {lev.band} {mb.index}: {mb.bottom_eV:.6f} .. {mb.top_eV:.6f} eV "
                  f"(width {1e3 * mb.width_eV:.3f} meV, period {mb.period_nm:.3f} nm)")
    for n in sol.notes:
        print(f"note: {n}")


#: most lines per transition table (strongest first); a 50-period stack has thousands
MAX_TABLE_LINES = 40


def _hidden_note(hidden: int, kind: str, criterion: str, capped: int = 0) -> None:
    if hidden:
        print(f"({hidden} {kind} line{'s' if hidden != 1 else ''} with {criterion} "
              "not shown; --json lists all)")
    if capped:
        print(f"({capped} weaker {kind} line{'s' if capped != 1 else ''} beyond the "
              f"{MAX_TABLE_LINES} strongest not shown; --json lists all)")


def print_transitions(trans, show_all: bool = False) -> None:
    """Intersubband then interband tables, each strongest first; forbidden lines counted."""
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
        print(table(rows, ["transition", "energy eV", "λ µm", "cm⁻¹", "THz", "|z| nm", "f"],
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
        print(table(rows, ["transition", "energy eV", "λ nm", "|<e|h>|²", "TE", "TM", ""],
                    ["<", ">", ">", ">", ">", ">", "<"]))
        _hidden_note(hidden, "interband", "|<e|h>|² < 0.001", capped)


def print_depolarisation(sol, trans) -> None:
    """Depolarisation-shifted lines of a doped solution (among the shown transitions)."""
    if sol.self_consistent is None:
        return
    names = {t.name for t in trans}
    rows = [[d["transition"], f"{d['sheet_density_cm2']:.4g}", f"{1e3 * d['shift_eV']:.3f}",
             f"{d['shifted_energy_eV']:.6f}", f"{d['shifted_wavelength_um']:.5f}"]
            for d in depolarised_lines(sol) if d["transition"] in names]
    if rows:
        print("\nIntersubband absorption with the depolarisation shift (Ando, Fowler, Stern 1982)")
        print(table(rows, ["transition", "Δn cm⁻²", "shift meV", "energy eV", "λ µm"],
                    ["<", ">", ">", ">", ">"]))
