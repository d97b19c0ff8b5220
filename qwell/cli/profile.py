"""``qwell profile STACK``: band edges along z, band offsets, strain, warnings."""

from __future__ import annotations

import math

import numpy as np

from ..plots import plot_profile
from .common import (add_library_option, add_self_consistent_option, load, print_json,
                     print_warnings, profile_and_charge, table)
from .json_out import profile_json

__all__ = ["register", "cmd_profile"]


def register(subparsers) -> None:
    """Add ``profile`` to the ``qwell`` sub-commands."""
    pr = subparsers.add_parser("profile", help="band-edge profile of a stack")
    pr.add_argument("stack", help="stack YAML file")
    pr.add_argument("--json", action="store_true")
    pr.add_argument("--png", metavar="FILE", help="write a band-edge plot")
    add_self_consistent_option(pr)
    add_library_option(pr)
    pr.set_defaults(func=cmd_profile)


def cmd_profile(args) -> int:
    """Run ``qwell profile``; returns the exit status."""
    stack = load(args.stack, args.self_consistent, args.library)
    prof, sc = profile_and_charge(stack, quiet=args.json)
    if args.png:
        path = plot_profile(prof, args.png, protect=[args.stack], charge=sc)
        if not args.json:
            print(f"wrote {path}")
    if args.json:
        print_json(profile_json(prof, sc))
        return 0
    print_profile(stack, prof)
    return 0


def _edge_range(values, samples) -> str:
    """'lo' or 'lo..hi' [eV] of an edge over a layer's samples; '—' where undefined."""
    a = values[samples]
    a = a[np.isfinite(a)]
    if a.size == 0:
        return "—"
    lo, hi = float(a.min()), float(a.max())
    return f"{lo:.4f}" if abs(hi - lo) < 5e-5 else f"{lo:.4f}..{hi:.4f}"


def print_profile(stack, prof) -> None:
    """Layer table, band offsets at interfaces, strain table, then the profile's warnings."""
    print(f"{stack.name}  (T = {stack.temperature_K:g} K"
          + (f", substrate {stack.substrate}" if stack.substrate else "")
          + (f", field {stack.field_kV_per_cm:g} kV/cm" if stack.field_kV_per_cm else "") + ")")
    rows = []
    for lp in prof.layers:
        sel = prof.layer_samples(lp.index)
        ml = f"{lp.thickness_nm / lp.monolayer_nm:.1f}" if lp.monolayer_nm else "—"
        rows.append([lp.label, lp.material, f"{lp.start_nm:.3f}", f"{lp.thickness_nm:.3f}", ml,
                     _edge_range(prof.conduction_edge_eV, sel),
                     _edge_range(prof.heavy_hole_edge_eV, sel),
                     _edge_range(prof.light_hole_edge_eV, sel), f"{100 * lp.strain_xx:+.3f}"])
    print(table(rows, ["layer", "material", "start nm", "thick nm", "ML", "Ec eV", "Ehh eV",
                       "Elh eV", "eps_xx %"],
                ["<", "<", ">", ">", ">", ">", ">", ">", ">"]))
    offsets = prof.band_offsets()
    if offsets:
        print("\nBand offsets at interfaces (right minus left; Qc = ΔEc / (ΔEc - ΔEv,top))")
        rows = [[f"{o['left']} | {o['right']}", f"{o['z_nm']:.3f}",
                 f"{1e3 * o['delta_conduction_eV']:+.1f}",
                 "—" if o["delta_valence_eV"] is None else f"{1e3 * o['delta_valence_eV']:+.1f}",
                 "—" if o["conduction_share"] is None else f"{100 * o['conduction_share']:.0f} %"]
                for o in offsets]
        print(table(rows, ["interface", "z nm", "ΔEc meV", "ΔEv meV", "Qc"],
                    ["<", ">", ">", ">", ">"]))
    strained = [lp for lp in prof.layers if abs(lp.strain_xx) > 1e-6]
    if strained:
        print("\nStrain (pseudomorphic on (001); shifts of the band edges from the unstrained ones)")
        rows = [[lp.label, f"{100 * lp.strain_xx:+.3f}", f"{100 * lp.strain_zz:+.3f}",
                 f"{1e3 * lp.strain_shift_conduction_eV:+.1f}",
                 f"{1e3 * lp.strain_shift_heavy_hole_eV:+.1f}",
                 f"{1e3 * lp.strain_shift_light_hole_eV:+.1f}",
                 "—" if math.isinf(lp.critical_thickness_nm) else f"{lp.critical_thickness_nm:.3g}"]
                for lp in strained]
        print(table(rows, ["layer", "eps_xx %", "eps_zz %", "δEc meV", "δEhh meV", "δElh meV",
                           "h_c nm"], ["<", ">", ">", ">", ">", ">", ">"]))
    print_warnings(prof.warnings)
