"""``qwell absorption`` and ``qwell gain``: absolute spectra on the command line.

``qwell absorption STACK [--density 4e11cm^-2] [--linewidth 8meV] [--geometry facet45]
[--passes 4] [--json] [--png FILE]`` and ``qwell gain STACK [--density 3e12cm^-2]
[--densities 1e11cm^-2:1e13cm^-2:50] [--excitons] [--json] [--png FILE]``.  Values carry
their units; every user error is one line on stderr and exit status 2.
"""

from __future__ import annotations

import math

import numpy as np

from ..absorption import _is_doped, pass_absorption, stack_absorption
from ..errors import QwellError
from ..excitons import stack_excitons
from ..gain import gain_table, interband_model
from ..levels import solve_stack
from ..spectra_plots import pick_densities, plot_absorption, plot_gain
from ..units import to_float
from .common import add_self_consistent_option, load, print_json, table
from .json_out import (absorption_json, exciton_json, gain_spectrum_json, gain_table_json,
                       pass_absorption_json)

__all__ = ["register", "cmd_absorption", "cmd_gain", "parse_density", "parse_linewidth",
           "parse_density_range"]

_MAX = 1e14


def parse_density(text: str, option: str = "--density") -> float:
    """A sheet density [cm^-2] from ``'4e11cm^-2'``; refused outside 0 < n <= 1e14 cm^-2."""
    try:
        v = to_float(text, "cm^-2")
    except QwellError as exc:
        raise QwellError(f"{option} {text!r}: {exc}") from None
    if not (math.isfinite(v) and 0 < v <= _MAX):
        raise QwellError(f"{option} {text!r}: out of range; expected a sheet density "
                         f"0 < n <= {_MAX:.0e} cm^-2 (e.g. '4e11cm^-2')")
    return v


def parse_linewidth(text: str, option: str = "--linewidth") -> float:
    """A FWHM [meV] from ``'8meV'``; refused when <= 0 or above 1 eV."""
    try:
        v = to_float(text, "eV", "an energy (e.g. '8meV')") * 1e3
    except QwellError as exc:
        raise QwellError(f"{option} {text!r}: {exc}") from None
    if not (math.isfinite(v) and 0 < v <= 1000.0):
        raise QwellError(f"{option} {text!r}: out of range; expected a full width at half "
                         "maximum 0 < FWHM <= 1000 meV (e.g. '8meV')")
    return v


def parse_density_range(text: str, option: str = "--densities"):
    """``FROM:TO:N`` -> N log-spaced densities [cm^-2]; a unit given on TO only applies to FROM."""
    parts = str(text).split(":")
    if len(parts) != 3:
        raise QwellError(f"{option} {text!r}: expected FROM:TO:N, e.g. "
                         "'1e11cm^-2:1e13cm^-2:50'")
    lo_t, hi_t, n_t = (p.strip() for p in parts)
    try:
        n = int(n_t)
    except ValueError:
        raise QwellError(f"{option} {text!r}: N {n_t!r} is not a whole number; expected "
                         "2 <= N <= 1000") from None
    if not 2 <= n <= 1000:
        raise QwellError(f"{option} {text!r}: N = {n}; expected 2 <= N <= 1000")
    if lo_t and lo_t.replace(".", "", 1).replace("e", "", 1).replace("-", "").replace("+", "") \
            .isdigit():
        unit = hi_t.lstrip("0123456789.eE+-").strip()
        if unit:
            lo_t = lo_t + unit
    lo, hi = parse_density(lo_t, option), parse_density(hi_t, option)
    if not hi > lo:
        raise QwellError(f"{option} {text!r}: TO must be above FROM")
    return np.geomspace(lo, hi, n)


def _fmt(v, spec):
    return "—" if v is None or (isinstance(v, float) and not math.isfinite(v)) else format(v, spec)


# ---------------------------------------------------------------------------
# absorption
# ---------------------------------------------------------------------------
def cmd_absorption(args) -> int:
    stack = load(args.stack, args.self_consistent)
    density = parse_density(args.density) if args.density is not None else None
    width = parse_linewidth(args.linewidth) if args.linewidth is not None else None
    doped = _is_doped(stack)
    pops = args.populations
    if pops == "self-consistent":
        if density is not None:
            raise QwellError("--density: not accepted with --populations self-consistent (the "
                             "populations come from the doping); drop one of them")
        if not doped:
            raise QwellError(f"--populations self-consistent: {args.stack} has no doping, so no "
                             "subband holds carriers; give --density N (0 < N <= 1e14 cm^-2) "
                             "instead")
    elif pops == "density" and density is None:
        raise QwellError("--populations density needs --density N (0 < N <= 1e14 cm^-2)")
    elif pops == "auto" and density is None and not doped:
        raise QwellError(f"--density: {args.stack} is undoped, so nothing absorbs without "
                         "carriers; give --density N (0 < N <= 1e14 cm^-2), e.g. "
                         "--density 4e11cm^-2")
    if not (args.passes >= 1 and args.passes <= 10000):
        raise QwellError(f"--passes {args.passes}: expected a whole number 1 .. 10000")
    if args.refractive_index is not None and not (1.0 <= args.refractive_index <= 10.0):
        raise QwellError(f"--refractive-index {args.refractive_index:g}: expected 1 .. 10")
    kw = {}
    if width is not None:
        kw["linewidth_meV"] = width
    if args.refractive_index is not None:
        kw["refractive_index"] = args.refractive_index
    res = stack_absorption(stack, density_cm2=density, populations=pops, **kw)
    geos = [pass_absorption(res, "facet45", passes=args.passes), pass_absorption(res, "brewster")]
    chosen = geos[0] if args.geometry == "facet45" else geos[1]
    if args.png:
        plot_absorption(res, args.png, passes=chosen,
                        title=f"{stack.name}: intersubband absorption", protect=[args.stack])
    if args.json:
        out = {"stack": stack.name, **absorption_json(res),
               "geometries": [pass_absorption_json(g) for g in geos]}
        print_json(out)
        return 0
    print(f"{stack.name}  (T = {stack.temperature_K:g} K) — intersubband absorption, light "
          "polarised along z")
    ef = res.fermi_level_eV
    occ = ", ".join(f"{k} {v:.4g}" for k, v in res.sheet_densities_cm2.items() if v > 1e3)
    print(f"populations: {res.populations}; n = {res.total_density_cm2:.4g} cm⁻²"
          + ("" if math.isnan(ef) else f", Fermi level {ef:.4f} eV")
          + (f" ({occ} cm⁻²)" if occ else ""))
    print(f"active length: {res.active_length_rule}; refractive index {res.refractive_index:g}")
    rows = [[ln.name, f"{ln.energy_eV:.5f}", f"{1e3 * ln.depolarisation_shift_eV:.2f}",
             f"{ln.peak_wavelength_um:.4f}", f"{ln.oscillator_strength:.4f}",
             f"{ln.population_difference_cm2:.4g}", f"{ln.linewidth_meV:.3g}",
             f"{ln.integrated_eV_per_cm:.4g}", f"{ln.peak_absorption_cm1:.4g}"]
            for ln in res.lines if abs(ln.integrated_eV_per_cm) >= 1e-4 * abs(
                res.lines[0].integrated_eV_per_cm)]
    print()
    print(table(rows, ["line", "E eV", "depol. meV", "peak λ µm", "f", "Δn cm⁻²",
                            "FWHM meV", "∫α dE eV/cm", "α peak cm⁻¹"],
                     ["<", ">", ">", ">", ">", ">", ">", ">", ">"]))
    hidden = len(res.lines) - len(rows)
    if hidden:
        print(f"({hidden} weaker line(s) not shown; --json lists all)")
    frac = res.sum_rule_fraction
    print(f"\npeak α = {res.peak_absorption_cm1:.4g} cm⁻¹ at {res.peak_wavelength_um:.4f} µm "
          f"({res.peak_energy_eV:.5f} eV); ∫α dE = {res.integrated_eV_per_cm:.4g} eV/cm"
          + ("" if math.isnan(frac) else f" ({100 * frac:.1f} % of the sum-rule value "
             f"{res.sum_rule_eV_per_cm:.4g} eV/cm)"))
    print("\nAbsorbed fraction at the peak, p-polarised light (unpolarised: half)")
    rows = [[g.geometry, f"{g.internal_angle_deg:.2f}", f"{g.path_factor:.4f}", str(g.passes),
             f"{100 * g.peak_per_pass:.3g} %", f"{100 * g.peak_total:.3g} %"] for g in geos]
    print(table(rows, ["geometry", "angle to z °", "sin²θ/cosθ", "passes", "per pass",
                            "all passes"], ["<", ">", ">", ">", ">", ">"]))
    for n in res.notes:
        print(f"note: {n}")
    if args.png:
        print(f"wrote {args.png}")
    return 0


# ---------------------------------------------------------------------------
# gain
# ---------------------------------------------------------------------------
def cmd_gain(args) -> int:
    stack = load(args.stack, args.self_consistent)
    density = parse_density(args.density) if args.density is not None else None
    dens = parse_density_range(args.densities)
    width = parse_linewidth(args.linewidth) if args.linewidth is not None else None
    if args.refractive_index is not None and not (1.0 <= args.refractive_index <= 10.0):
        raise QwellError(f"--refractive-index {args.refractive_index:g}: expected 1 .. 10")
    sol = solve_stack(stack)
    kw = {} if args.refractive_index is None else {"refractive_index": args.refractive_index}
    model = interband_model(stack, solution=sol, **kw)
    gkw = {"polarisation": args.polarisation}
    if width is not None:
        gkw["linewidth_meV"] = width
    all_d = np.unique(np.concatenate([dens, [density] if density is not None else []]))
    tab = gain_table(model, all_d, **gkw)
    excitons = ()
    if args.excitons:
        excitons = stack_excitons(sol)
    idx_main = int(np.argmin(np.abs(tab.densities_cm2 - density))) if density is not None else None
    if args.png:
        idx = pick_densities(tab)
        if idx_main is not None and idx_main not in idx:
            idx = sorted(set(idx[::2]) | {idx_main})
        plot_gain(tab, args.png, indices=idx, title=f"{stack.name}: interband gain",
                  protect=[args.stack], excitons=excitons)
    if args.json:
        out = {"stack": stack.name, **gain_table_json(tab)}
        if idx_main is not None:
            out["spectrum"] = gain_spectrum_json(tab.spectrum(idx_main))
        if args.excitons:
            out["excitons"] = [exciton_json(x) for x in excitons]
            out["excitons_note"] = ("binding energies are a separate correction: the absorption "
                                    "edge and PL peak lie this much below the pair edge; the "
                                    "gain spectrum is not shifted (excitons screened at laser "
                                    "densities)")
        print_json(out)
        return 0
    m = model
    lw = "unbroadened" if tab.linewidth_meV is None else f"Lorentzian FWHM {tab.linewidth_meV:.3g} meV"
    print(f"{stack.name}  (T = {stack.temperature_K:g} K) — interband gain, "
          f"{tab.polarisation.upper()}, {lw}")
    print(f"material gain over {m.active_length_rule}; Ep {m.kane_energy_eV:.3g} eV, refractive "
          f"index {m.refractive_index:g}")
    rows = [[p.name, f"{p.edge_eV:.5f}", f"{1e3 * p.edge_wavelength_um:.1f}",
             f"{p.overlap:.4f}", f"{p.electron_mass_m0:.4f}", f"{p.hole_mass_m0:.4f}",
             f"{p.step_te_cm1:.4g}", f"{p.step_tm_cm1:.4g}"] for p in m.pairs]
    print("\nSubband pairs (step of the 2-D joint density of states, unfilled; in-plane masses)")
    print(table(rows, ["pair", "edge eV", "λ nm", "|<e|h>|²", "m_e", "m_h", "step TE cm⁻¹",
                            "step TM cm⁻¹"], ["<", ">", ">", ">", ">", ">", ">", ">"]))
    if idx_main is not None:
        s = tab.spectrum(idx_main)
        print(f"\nat n = p = {s.density_cm2:.4g} cm⁻²: F_c = {s.electron_fermi_eV:.4f} eV, "
              f"F_v = {s.hole_fermi_eV:.4f} eV, F_c - F_v = {s.fermi_separation_eV:.4f} eV; "
              f"peak gain {s.peak_gain_cm1:.4g} cm⁻¹ at {1e3 * s.peak_wavelength_um:.1f} nm "
              f"({s.peak_energy_eV:.4f} eV)")
    step = max(1, tab.densities_cm2.size // 12)
    rows = [[f"{d:.3g}", f"{df:.4f}", f"{g:.4g}", f"{1e3 * w:.1f}" if g > 0 else "—"]
            for d, df, g, w in list(zip(tab.densities_cm2, tab.fermi_separation_eV,
                                        tab.peak_gain_cm1, tab.peak_wavelength_um))[::step]]
    shown = "all shown" if step == 1 else f"one in {step} shown; --json lists all"
    print(f"\nPeak gain versus injected density ({tab.densities_cm2.size} densities, {shown})")
    print(table(rows, ["n = p cm⁻²", "F_c-F_v eV", "peak gain cm⁻¹", "λ peak nm"],
                     [">", ">", ">", ">"]))
    tr = tab.transparency_density_cm2
    print("\ntransparency density: "
          + (f"{tr:.3g} cm⁻² (peak gain crosses zero)" if math.isfinite(tr)
             else "not reached inside the density range"))
    if excitons:
        print("\nExciton binding (variational; a separate correction, not applied to the gain: "
              "excitons are screened at laser densities)")
        rows = [[x.name, f"{x.binding_meV:.2f}", f"{x.radius_nm:.1f}", f"{x.pair_energy_eV:.5f}",
                 f"{x.exciton_energy_eV:.5f}", f"{1e3 * x.exciton_wavelength_um:.1f}"]
                for x in excitons]
        print(table(rows, ["line", "binding meV", "radius nm", "pair edge eV",
                                "exciton eV", "exciton λ nm"], ["<", ">", ">", ">", ">", ">"]))
        print("the absorption edge and the photoluminescence peak lie the binding below the "
              "pair edge")
    for n in tab.notes:
        print(f"note: {n}")
    if args.png:
        print(f"wrote {args.png}")
    return 0


def register(subparsers) -> None:
    """Add ``absorption`` and ``gain`` to the qwell argument parser."""
    a = subparsers.add_parser("absorption", help="intersubband absorption in cm^-1 and the "
                                                 "absorbed fraction per pass")
    a.add_argument("stack", help="stack YAML file")
    a.add_argument("--density", metavar="N", help="electron sheet density put into the "
                   "subbands, e.g. 4e11cm^-2 (0 < N <= 1e14 cm^-2); default: the doping's "
                   "self-consistent populations")
    a.add_argument("--populations", default="auto", choices=["auto", "self-consistent", "density"],
                   help="where the subband populations come from (default auto: --density if "
                        "given, else self-consistent for a doped stack)")
    a.add_argument("--linewidth", metavar="FWHM", help="full width at half maximum of every "
                   "line, e.g. 8meV (default 10 meV)")
    a.add_argument("--geometry", default="facet45", choices=["facet45", "brewster"],
                   help="geometry drawn in the PNG (both are printed)")
    a.add_argument("--passes", type=int, default=1, metavar="N",
                   help="passes through the active region in the 45° facet geometry (default 1)")
    a.add_argument("--refractive-index", type=float, default=None, metavar="N_R",
                   help="refractive index (default 3.3, GaAs near 10 µm)")
    a.add_argument("--json", action="store_true", help="machine-readable output")
    a.add_argument("--png", metavar="FILE", help="write α and the absorbed fraction")
    add_self_consistent_option(a)
    a.set_defaults(func=cmd_absorption)

    g = subparsers.add_parser("gain", help="interband gain spectrum, peak gain and "
                                           "transparency density versus injected density")
    g.add_argument("stack", help="stack YAML file")
    g.add_argument("--density", metavar="N", help="injected sheet density n = p for the "
                   "spectrum, e.g. 3e12cm^-2 (0 < N <= 1e14 cm^-2)")
    g.add_argument("--densities", default="1e11cm^-2:1e13cm^-2:50", metavar="FROM:TO:N",
                   help="log-spaced density range of the table (default "
                        "1e11cm^-2:1e13cm^-2:50)")
    g.add_argument("--linewidth", metavar="FWHM", help="Lorentzian FWHM, e.g. 10meV (default "
                   "2ħ/0.1 ps = 13.2 meV)")
    g.add_argument("--polarisation", default="te", choices=["te", "tm"],
                   help="polarisation of the peak figures (default te)")
    g.add_argument("--refractive-index", type=float, default=None, metavar="N_R",
                   help="refractive index (default 3.5)")
    g.add_argument("--excitons", action="store_true",
                   help="also give the e-hh and e-lh exciton binding energies")
    g.add_argument("--json", action="store_true", help="machine-readable output")
    g.add_argument("--png", metavar="FILE", help="write gain spectra and peak gain vs density")
    add_self_consistent_option(g)
    g.set_defaults(func=cmd_gain)
