"""``qwell levels STACK``: subband states, transitions and the absorption spectrum."""

from __future__ import annotations

from dataclasses import dataclass, replace

from ..design.line import ALLOWED_OVERLAP, HOLES_NOT_SOLVED, design_line, line_bands
from ..errors import QwellError
from ..fileio import OutputGroup, check_figure_target
from ..levels import compare_methods, depolarised_lines, shifted_transitions, solve_profile
from ..optics import plot_spectrum, select_transitions, spectrum, strength
from ..reference import reference_edges_eV
from ..solvers.results import UNCOUPLED_WIDTH_EV
from ..spectral import column, format_line
from ..units import format_exponent
from .common import (add_library_option, add_self_consistent_option, add_unit_option, load,
                     print_json, print_self_consistent, print_warnings, profile_and_charge, table)
from .json_out import design_line_json, levels_json
from .lifetimes import add_lifetime_options, check_band, lifetimes_of, print_lifetimes

__all__ = ["register", "cmd_levels", "LevelsOptions"]


def register(subparsers) -> None:
    """Add ``levels`` to the ``qwell`` sub-commands."""
    lv = subparsers.add_parser("levels", help="subband states and transitions of a stack")
    lv.add_argument("stack", help="stack YAML file")
    lv.add_argument("--band", default=None, choices=["conduction", "heavy_hole", "light_hole", "all"],
                    help="bands to solve (default: the conduction band when the design line is "
                         "an intersubband line, declared or given with --transition; else all)")
    lv.add_argument("--method", default="exact", choices=["exact", "semiclassical", "both"])
    lv.add_argument("--transition", action="append", metavar="e1-e2",
                    help="show only this transition (repeatable)")
    lv.add_argument("--json", action="store_true")
    lv.add_argument("--wavefunctions", action="store_true",
                    help="with --json: include each state's z grid, envelope (nm^-1/2) and "
                         "probability per layer (the tables do not change; a note says so)")
    lv.add_argument("--reference", metavar="LAYER",
                    help="also give each state's energy from its band edge at this layer's "
                         "centre (meV; in JSON: reference)")
    add_unit_option(lv)
    lv.add_argument("--hole-intersubband", action="store_true",
                    help="also list heavy- and light-hole intersubband pairs (hh1-hh2, lh1-lh2, ...)")
    lv.add_argument("--png", metavar="FILE", help="write the absorption spectrum plot")
    lv.add_argument("--linewidth", type=float, default=10.0, metavar="MEV",
                    help="spectrum line FWHM in meV, also the gain linewidth of --lifetimes "
                         "(default 10)")
    lv.add_argument("--lineshape", default="lorentzian", choices=["lorentzian", "gaussian"])
    lv.add_argument("--axis", default="wavelength", choices=["wavelength", "energy"],
                    help="--png axis: the photon unit of the lines' region (nm, µm or THz; "
                         "--unit to choose) or photon energy in eV")
    lv.add_argument("--spectrum", choices=["intersubband", "interband"],
                    help="which lines the --png spectrum shows (default: intersubband if any)")
    add_lifetime_options(lv)
    add_self_consistent_option(lv)
    add_library_option(lv)
    lv.set_defaults(func=cmd_levels)


@dataclass(frozen=True)
class LevelsOptions:
    """What one ``qwell levels`` invocation asks for (built from the parsed arguments).

    Attributes
    ----------
    stack_path : str
    band : str or None
        'conduction', 'heavy_hole', 'light_hole' or 'all'; None (no ``--band``): the bands
        the design line needs (:func:`solve_bands`).
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
    libraries : tuple of str
        Material library files (``--library``), applied after the stack's own.
    lifetimes : bool
        LO-phonon lifetimes and the emitter figure of merit (``--lifetimes``).
    emitter : str or None
        Emitter line of ``--lifetimes`` (None: the best inverting line).
    thermal : bool
        Thermally averaged rates.
    period_nm : float or None
        Stage length of the gain per current density [nm].
    reference : str or None
        Layer whose centre's band edges the states are also referenced to.
    unit : str or None
        Photon unit of the transition tables (None: every measure, as before).
    """

    stack_path: str
    band: str | None = None
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
    libraries: tuple = ()
    lifetimes: bool = False
    emitter: str | None = None
    thermal: bool = False
    period_nm: float | None = None
    reference: str | None = None
    unit: str | None = None

    @classmethod
    def from_args(cls, args) -> LevelsOptions:
        """Options of the parsed ``levels`` arguments; refuses contradictory ones."""
        if (args.transition and args.band not in (None, "all", "conduction")
                and not args.hole_intersubband):
            raise QwellError(f"--transition needs the conduction band: transitions start from "
                             f"electron states, but --band {args.band} solves only that band; "
                             "use --band all")
        if (args.emitter or args.thermal or args.period is not None) and not args.lifetimes:
            raise QwellError("--emitter, --thermal and --period go with --lifetimes")
        if args.lifetimes:
            if args.method == "semiclassical":
                raise QwellError("--lifetimes needs wavefunctions: use --method exact (or both)")
        return cls(stack_path=args.stack, band=args.band,
                   methods=(("exact", "semiclassical") if args.method == "both"
                            else (args.method,)),
                   transitions=tuple(args.transition or ()), json=args.json,
                   wavefunctions=args.wavefunctions, hole_intersubband=args.hole_intersubband,
                   self_consistent=args.self_consistent, png=args.png,
                   linewidth_meV=args.linewidth, lineshape=args.lineshape, axis=args.axis,
                   spectrum_kind=args.spectrum, libraries=tuple(args.library),
                   lifetimes=args.lifetimes, emitter=args.emitter, thermal=args.thermal,
                   period_nm=args.period, reference=args.reference, unit=args.unit)


def cmd_levels(args) -> int:
    """Run ``qwell levels``; returns the exit status."""
    opts = LevelsOptions.from_args(args)
    stack = load(opts.stack_path, opts.self_consistent, opts.libraries)
    if opts.png:
        OutputGroup([opts.png], protect=[opts.stack_path])  # checks the target before the work
        check_figure_target(opts.png)
    prof, sc = profile_and_charge(stack, quiet=True)
    if opts.lifetimes:
        check_band(lambda: [s.label for s in solve_profile(prof, bands="conduction",
                                                            transitions=False).states],
                   opts.band)
    edges = reference_edges_eV(prof, opts.reference) if opts.reference else None
    bands, note = solve_bands(stack, opts)
    sols = {m: solve_profile(prof, bands=bands, method=m, transitions=(m == "exact"),
                             hole_intersubband=opts.hole_intersubband) for m in opts.methods}
    if note:
        sols = {m: replace(s, notes=s.notes + (note,)) for m, s in sols.items()}
    if sc is not None:
        sols = {m: replace(s, self_consistent=sc) for m, s in sols.items()}
    line = _line(stack, sols, opts)
    chosen = {m: (select_transitions(s.transitions, list(opts.transitions)) if opts.transitions
                  else s.transitions) for m, s in sols.items()}
    spec = write_spectrum(stack, sols, chosen, opts) if opts.png else None
    lt = None
    if opts.lifetimes:
        lt = lifetimes_of(sols["exact"], emitter=opts.emitter, thermal=opts.thermal,
                          linewidth_meV=opts.linewidth_meV, period_nm=opts.period_nm)
    if opts.json:
        doc = levels_json(stack, sols, chosen, spectrum=spec, wavefunctions=opts.wavefunctions,
                          lifetimes=lt)
        doc["design_line"] = design_line_json(line)
        if edges is not None:
            doc["reference"] = reference_json(opts.reference, edges, sols)
        print_json(doc)
    else:
        print_levels(stack, sols, chosen, opts, line, edges)
        if lt is not None:
            print_lifetimes(lt)
        if opts.wavefunctions:
            print("note: --wavefunctions only affects --json output (each state's envelope is "
                  "listed there); the tables above are unchanged")
    return 0


def solve_bands(stack, opts: LevelsOptions) -> tuple:
    """``(bands, note)``: the bands this invocation solves, and the note saying what was left out.

    ``--band`` wins.  Without it, the conduction band alone when every line the
    command follows is an intersubband line (:func:`qwell.design.line.line_bands`:
    the ``--transition`` names, else the stack's declared line) and nothing else
    asked needs holes (``--hole-intersubband``, ``--spectrum interband``); the
    note then says that the hole bands were not solved and how to ask for them.
    Every band otherwise (interband lines, or no declared line: the physics
    default needs the hole states).
    """
    if opts.band is not None:
        return opts.band, ""
    if opts.hole_intersubband or opts.spectrum_kind == "interband":
        return "all", ""
    bands = line_bands(stack, opts.transitions)
    if bands is None:
        return "all", ""
    line = opts.transitions[0] if opts.transitions else stack.declared_line.transition
    return bands, HOLES_NOT_SOLVED.format(line=line)


def _line(stack, sols: dict, opts: LevelsOptions):
    """The design line (:func:`qwell.design.line.design_line`) on the solved bands.

    The exact solution is used when it holds the bands the line needs (every band,
    or the conduction band for a declared or given intersubband line); else (one
    band, or the semiclassical method) the stack is solved once more for it.
    """
    exact = sols.get("exact")
    everything = opts.band in (None, "all")
    full = exact if exact is not None and everything else None
    first = opts.transitions[0] if len(opts.transitions) == 1 else None
    return design_line(stack, first, solution=full, check=full is not None or everything)


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
    if depolarised_lines(exact):
        lines = list(shifted_transitions(exact, lines))
        what += " (depolarisation-shifted)"
    spec = spectrum(lines, linewidth_meV=opts.linewidth_meV, shape=opts.lineshape)
    plot_spectrum(spec, opts.png, axis=opts.axis, title=f"{stack.name}: {what}",
                  protect=[opts.stack_path], unit=opts.unit)
    return spec


# ---------------------------------------------------------------------------
# text
# ---------------------------------------------------------------------------
def print_levels(stack, sols: dict, chosen: dict, opts: LevelsOptions, line,
                 edges=None) -> None:
    """Design line, header, charge, states (or the method comparison), notes, transitions,
    depolarisation, warnings."""
    print(line.headline())
    head = f"{stack.name}  (T = {stack.temperature_K:g} K"
    if stack.field_kV_per_cm:
        head += f", field {stack.field_kV_per_cm:g} kV/cm"
    print(head + ")")
    sc = next(iter(sols.values())).self_consistent
    if sc is not None:
        print_self_consistent(sc, blank=False)
    if len(sols) == 1:
        (m, sol), = sols.items()
        print_states(m, sol, edges, opts.reference)
    else:
        print_comparison(sols["exact"], sols["semiclassical"])
    for m, sol in sols.items():
        print_notes(m, sol)
    trans = chosen.get("exact", ())
    print_transitions(trans, show_all=bool(opts.transitions), line=line.transition,
                      unit=opts.unit)
    if "exact" in sols:
        print_depolarisation(sols["exact"], trans, line=line.transition)
    print_warnings(next(iter(sols.values())).profile.warnings)
    if opts.png:
        print(f"wrote {opts.png}")


def _state_rows(sol, edges=None):
    rows = []
    for s in sol.states:
        band = sol.profile.bands[s.band]
        edge = band.profile_energy(band.potential_min_eV)
        conf = 1e3 * abs(s.energy_eV - edge)
        life = "" if s.lifetime_s is None else f"{1e12 * s.lifetime_s:.3g} ps"
        flag = "bound" if s.bound else "quasi-bound"
        if not s.converged:
            flag += f" (NOT converged, ±{s.tolerance_eV * 1e6:.2g} µeV)"
        ref = [] if edges is None else [f"{1e3 * (s.energy_eV - edges[s.band]):+.3f}"]
        rows.append([s.band, s.label, f"{s.energy_eV:.6f}", f"{conf:.3f}"] + ref + [flag, life])
    return rows


def print_states(method: str, sol, edges=None, reference: str | None = None) -> None:
    """States of one method: energy, confinement above the band's lowest edge, status; with
    ``edges`` (band -> edge at the reference layer's centre [eV]) also the energy from it."""
    print(f"\nStates ({method}; energies on the band-diagram scale, confinement from the band's "
          "lowest edge" + (f", 'from {reference}': from the band edge at the centre of "
                           f"{reference}" if edges is not None else "") + ")")
    ref_head = [] if edges is None else [f"from {reference} meV"]
    print(table(_state_rows(sol, edges),
                ["band", "state", "energy eV", "conf. meV"] + ref_head + ["status", "lifetime"],
                ["<", "<", ">", ">"] + [">"] * len(ref_head) + ["<", ">"]))


def reference_json(layer: str, edges: dict, sols: dict) -> dict:
    """The ``reference`` block of ``levels --json --reference``: the layer, the band edges at
    its centre [eV] and each state's energy from its band's edge [eV]."""
    sol = sols.get("exact") or next(iter(sols.values()))
    return {"layer": layer, "edge_eV": dict(edges),
            "states_from_reference_eV": {s.label: float(s.energy_eV - edges[s.band])
                                         for s in sol.states}}


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
            if mb.coupled:
                print(f"miniband {lev.band} {mb.index}: {mb.bottom_eV:.6f} .. {mb.top_eV:.6f} eV "
                      f"(width {1e3 * mb.width_eV:.3f} meV, period {mb.period_nm:.3f} nm)")
            else:
                print(f"no miniband {lev.band} {mb.index}: the periods are uncoupled (width "
                      f"{1e6 * mb.width_eV:.2g} µeV < {1e6 * UNCOUPLED_WIDTH_EV:g} µeV); one level "
                      f"at {mb.bottom_eV:.6f} eV repeated in each period ({mb.period_nm:.3f} nm)")
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


def emission_order(band) -> list:
    """Interband lines in the order an emitter designer reads them.

    The lowest-energy allowed line (|<e|h>|² >= :data:`ALLOWED_OVERLAP`: the
    emission line) first, then the others by TE/TM strength.
    """
    band = sorted(band, key=lambda t: -strength(t))
    allowed = [t for t in band if (t.overlap or 0.0) >= ALLOWED_OVERLAP]
    if not allowed:
        return band
    first = min(allowed, key=lambda t: (round(t.energy_eV, 9), -strength(t)))
    return [first] + [t for t in band if t is not first]


def _line_cells(t, unit):
    return [format_line(t.energy_eV, unit, with_unit=False)]


def print_transitions(trans, show_all: bool = False, line: str | None = None,
                      unit: str | None = None) -> None:
    """Intersubband table (strongest first) and interband table (emission line first);
    weak lines counted, long tables capped with a count; the design line marked.

    With ``unit`` each table gives the line in that unit only (beside its energy in eV);
    without, intersubband lines in µm, cm⁻¹ and THz, interband lines in nm.
    """
    inter = sorted((t for t in trans if t.kind == "intersubband"), key=lambda t: -strength(t))
    band = emission_order([t for t in trans if t.kind == "interband"])
    if inter:
        shown_i = inter if show_all else [t for t in inter if (t.oscillator_strength or 0) >= 1e-3
                                          or t.name == line]
        capped_i = 0 if show_all else max(0, len(shown_i) - MAX_TABLE_LINES)
        hidden_i = len(inter) - len(shown_i)
        shown_i = shown_i if show_all else shown_i[:MAX_TABLE_LINES]
        mark = {t.name: "design line" if t.name == line else "" for t in shown_i}
        if unit:
            rows = [[t.name, f"{t.energy_eV:.6f}"] + _line_cells(t, unit)
                    + [f"{t.dipole_nm:.4f}", f"{t.oscillator_strength:.4f}", mark[t.name]]
                    for t in shown_i]
            heads = ["transition", "energy eV", column(unit), "|z| nm", "f", ""]
        else:
            rows = [[t.name, f"{t.energy_eV:.6f}", f"{t.wavelength_um:.5f}",
                     f"{t.wavenumber_cm1:.2f}", f"{t.frequency_THz:.3f}", f"{t.dipole_nm:.4f}",
                     f"{t.oscillator_strength:.4f}", mark[t.name]] for t in shown_i]
            heads = ["transition", "energy eV", "λ µm", "cm⁻¹", "THz", "|z| nm", "f", ""]
        print("\nIntersubband transitions (absorption from the lower state, strongest first)")
        print(table(rows, heads, ["<"] + [">"] * (len(heads) - 2) + ["<"]))
        _hidden_note(hidden_i, "intersubband", "f < 0.001", capped_i)
    if band:
        shown = band if show_all else [t for t in band if (t.overlap or 0.0) >= ALLOWED_OVERLAP
                                       or t.name == line]
        capped = 0 if show_all else max(0, len(shown) - MAX_TABLE_LINES)
        hidden = len(band) - len(shown)
        shown = shown if show_all else shown[:MAX_TABLE_LINES]
        emission = band[0] if (band[0].overlap or 0.0) >= ALLOWED_OVERLAP else None
        rows = [[t.name, f"{t.energy_eV:.6f}"]
                + (_line_cells(t, unit) if unit else [f"{1e3 * t.wavelength_um:.2f}"])
                + [f"{t.overlap:.4f}", f"{t.te:.4f}", f"{t.tm:.4f}",
                   ", ".join(x for x in ("emission line" if t is emission else "",
                                         "Δn=0" if t.strongest else "",
                                         "design line" if t.name == line else "") if x)]
                for t in shown]
        print("\nInterband transitions (emission line first, then strongest; excitonic binding "
              "not included)")
        print(table(rows, ["transition", "energy eV", column(unit) if unit else "λ nm",
                           "|<e|h>|²", "TE", "TM", ""],
                    ["<", ">", ">", ">", ">", ">", "<"]))
        _hidden_note(hidden, "interband", "|<e|h>|² < 0.001", capped)


def print_depolarisation(sol, trans, line: str | None = None) -> None:
    """Depolarisation-shifted lines of a doped solution (among the shown transitions)."""
    if sol.self_consistent is None:
        return
    names = {t.name for t in trans}
    rows = [[d["transition"], format_exponent(d["sheet_density_cm2"]), f"{d['energy_eV']:.6f}",
             f"{1e3 * d['shift_eV']:.3f}", f"{d['shifted_energy_eV']:.6f}",
             f"{d['shifted_wavelength_um']:.5f}",
             "design line" if d["transition"] == line else ""]
            for d in depolarised_lines(sol) if d["transition"] in names]
    if rows:
        print("\nIntersubband absorption with the depolarisation shift (Ando, Fowler, Stern 1982)")
        print(table(rows, ["transition", "Δn cm⁻²", "bare eV", "shift meV", "energy eV", "λ µm",
                           ""], ["<", ">", ">", ">", ">", ">", "<"]))
