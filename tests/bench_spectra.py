"""Benchmark of the absolute spectra (prints figures; never a pass/fail timing test).

Run as ``python tests/bench_spectra.py`` from the repository root.
Targets: a 50-density gain table of a single well under 1 s; the absorption
spectra of ``layers/doped-detector.yaml`` under 0.5 s after the solve.

References measured in the same run: the subband solve of the same stack,
and (for the gain table) 50 separate one-density calls.  Each figure is
printed as seconds and as a ratio to its reference.  The first call of
each kind is a warm-up (imports) and is reported separately.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np  # noqa: E402

from qwell.absorption import pass_absorption, stack_absorption  # noqa: E402
from qwell.gain import gain_spectrum, gain_table, interband_model  # noqa: E402
from qwell.levels import solve_stack  # noqa: E402
from qwell.stack import load_stack  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def timed(fn, repeat=3):
    best = float("inf")
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main() -> None:
    import warnings

    from qwell.errors import ValidityWarning

    warnings.simplefilter("ignore", ValidityWarning)   # continuum-carrier notes at high density

    stack = load_stack(ROOT / "layers" / "pump-laser-well.yaml")
    t_solve, sol = timed(lambda: solve_stack(stack))
    t0 = time.perf_counter()
    model = interband_model(stack, solution=sol)
    gain_table(model, [1e12])                                   # warm-up
    t_warm = time.perf_counter() - t0
    dens = np.geomspace(1e11, 1e13, 50)
    t_model, model = timed(lambda: interband_model(stack, solution=sol))
    t_table, tab = timed(lambda: gain_table(model, dens))
    t_loop, _ = timed(lambda: [gain_spectrum(model, d) for d in dens], repeat=1)
    print(f"gain: {stack.name} ({len(model.pairs)} pairs, {tab.energy_eV.size} energies)")
    print(f"  reference: subband solve {t_solve:.3f} s; warm-up {t_warm:.3f} s")
    print(f"  model build {t_model:.4f} s; 50-density table {t_table:.3f} s "
          f"(target < 1 s; {t_table / t_solve:.2f} x the solve; "
          f"{t_loop / t_table:.1f} x faster than 50 one-density calls, {t_loop:.3f} s)")
    print(f"  transparency {tab.transparency_density_cm2:.3g} cm^-2")

    det = load_stack(ROOT / "layers" / "doped-detector.yaml")
    t_sc, sol_d = timed(lambda: solve_stack(det, self_consistent=True, bands="conduction"),
                        repeat=1)
    stack_absorption(det, solution=sol_d)                       # warm-up
    t_abs, res = timed(lambda: stack_absorption(det, solution=sol_d))
    t_pass, _ = timed(lambda: (pass_absorption(res, "facet45", passes=4),
                               pass_absorption(res, "brewster")))
    print(f"absorption: {det.name}")
    print(f"  reference: self-consistent solve {t_sc:.3f} s")
    print(f"  spectra after the solve {t_abs:.4f} s (target < 0.5 s; "
          f"{t_abs / t_sc:.3f} x the solve); two geometries {t_pass:.5f} s")
    print(f"  peak {res.peak_absorption_cm1:.4g} cm^-1 at {res.peak_wavelength_um:.3f} um")


if __name__ == "__main__":
    main()
