"""Benchmark of the Schrödinger–Poisson loop (prints figures; never a pass/fail timing test).

Run as ``python tests/bench_selfconsistent.py`` from the repository root.
Target: a doped 10-layer stack converges in under 2 s (loop only).

Two invented 10-layer scenarios at 77 K, modulation-doped with donor layers
and delta sheets in Al0.30Ga0.70As barriers: four GaAs wells of different
widths (no degenerate subbands), and four identical wells behind 12 nm
barriers (subband quadruplets split by µeV: the hard case, where the loop
tightens the subband solver's tolerance until the states are orthogonal).
A third, a 30 nm GaAs well doped 1e18 cm^-3 between Al0.35Ga0.65As barriers with
eight subbands, times the nonparabolic finish on the exact solver (the loop once
chased the ~1e-2 overlap of nonparabolic envelopes down to 1e-14 eV solves: ~25 s).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from qwell.levels import solve_profile  # noqa: E402
from qwell.selfconsistent import solve_self_consistent  # noqa: E402
from qwell.stack import stack_from_text  # noqa: E402

STACK_STEPPED = """
name: benchmark doped stepped four-well stack
temperature: 77 K
substrate: GaAs
layers:
  - {material: Al0.30Ga0.70As, thickness: 30 nm, doping: {donors: 2e17 cm^-3, from: 10 nm, to: 20 nm}}
  - {material: GaAs, thickness: 6 nm, name: w1}
  - {material: Al0.30Ga0.70As, thickness: 12 nm, doping: {sheet: 2e11 cm^-2, at: 6 nm}}
  - {material: GaAs, thickness: 7.5 nm, name: w2}
  - {material: Al0.30Ga0.70As, thickness: 12 nm, doping: {donors: 5e17 cm^-3, from: 4 nm, to: 8 nm}}
  - {material: GaAs, thickness: 9 nm, name: w3}
  - {material: Al0.30Ga0.70As, thickness: 12 nm, doping: {sheet: 2e11 cm^-2, at: 6 nm}}
  - {material: GaAs, thickness: 10.5 nm, name: w4}
  - {material: Al0.30Ga0.70As, thickness: 20 nm, doping: {donors: 2e17 cm^-3, from: 5 nm, to: 15 nm}}
  - {material: Al0.30Ga0.70As, thickness: 20 nm, name: cap}
"""

STACK = """
name: benchmark doped identical four-well stack
temperature: 77 K
substrate: GaAs
layers:
  - {material: Al0.30Ga0.70As, thickness: 30 nm, doping: {donors: 2e17 cm^-3, from: 10 nm, to: 20 nm}}
  - {material: GaAs, thickness: 8 nm, name: w1}
  - {material: Al0.30Ga0.70As, thickness: 12 nm, doping: {sheet: 2e11 cm^-2, at: 6 nm}}
  - {material: GaAs, thickness: 8 nm, name: w2}
  - {material: Al0.30Ga0.70As, thickness: 12 nm, doping: {donors: 5e17 cm^-3, from: 4 nm, to: 8 nm}}
  - {material: GaAs, thickness: 8 nm, name: w3}
  - {material: Al0.30Ga0.70As, thickness: 12 nm, doping: {sheet: 2e11 cm^-2, at: 6 nm}}
  - {material: GaAs, thickness: 8 nm, name: w4}
  - {material: Al0.30Ga0.70As, thickness: 20 nm, doping: {donors: 2e17 cm^-3, from: 5 nm, to: 15 nm}}
  - {material: Al0.30Ga0.70As, thickness: 20 nm, name: cap}
"""


STACK_WIDE = """
name: benchmark doped 30 nm eight-subband well
temperature: 77 K
substrate: GaAs
layers:
  - {material: Al0.35Ga0.65As, thickness: 40 nm}
  - {material: GaAs, thickness: 30 nm, doping: {donors: 1e18 cm^-3}}
  - {material: Al0.35Ga0.65As, thickness: 40 nm}
"""


def run(text: str, schemes) -> None:
    stack = stack_from_text(text)
    print(f"stack: {stack.name}: {len(stack.layers)} layers, {stack.total_thickness_nm:.0f} nm, "
          f"{stack.temperature_K:.0f} K")
    for mixing, solution in schemes:
        t0 = time.perf_counter()
        c0 = time.process_time()
        res = solve_self_consistent(stack, mixing=mixing, max_iterations=200, strict=False)
        if solution == "full":
            # every band with transitions on the self-consistent profile (what solve_stack does)
            solve_profile(res.profile)
        dt = time.perf_counter() - t0
        cpu = time.process_time() - c0
        ns = res.total_electrons_cm2
        print(f"  mixing={mixing:9s} solution={solution:4s}: {dt:6.2f} s ({cpu:.2f} s CPU), "
              f"{res.iterations:3d} iterations, converged={res.converged}, "
              f"residual {res.residual_meV:.2e} meV, charge residual {res.charge_residual:.1e}, "
              f"E_F {res.fermi_level_eV:.4f} eV, n_s {ns:.3e} cm^-2, "
              f"{len(res.subband_energies_eV)} subbands")
        if solution == "loop":
            print("      residual history [meV]: "
                  + ", ".join(f"{h:.2e}" for h in res.history[:10])
                  + (" ..." if len(res.history) > 10 else ""))


def main() -> None:
    run(STACK_STEPPED, [("anderson", "loop"), ("anderson", "full"), ("predictor", "loop"),
                        ("linear", "loop")])
    run(STACK, [("anderson", "loop"), ("anderson", "full")])
    run(STACK_WIDE, [("anderson", "loop")])


if __name__ == "__main__":
    main()
