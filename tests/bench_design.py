"""Speed of the design workflows (prints figures; never a pass/fail timing test).

Run with ``python tests/bench_design.py`` from the repository root.  Targets
from the design issue, on a 2-core machine:

* a 1,000-point thickness sweep of a single-well stack (exact solver, all
  conduction states and e1-e2): < 3 s;
* a 10,000-sample Monte Carlo of a 3-layer design: < 30 s.

It also splits the cost of one design evaluation into stack re-validation,
profile building and solving, to show where the time goes.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from qwell import design, parallel  # noqa: E402
from qwell.levels import solve_profile  # noqa: E402
from qwell.profile import band_profile  # noqa: E402
from qwell.stack import load_stack  # noqa: E402

LWIR = ROOT / "layers" / "lwir-detector.yaml"
PUMP = ROOT / "layers" / "pump-laser-well.yaml"


def _t(fn, repeat=1):
    t0 = time.perf_counter()
    for _ in range(repeat):
        out = fn()
    return (time.perf_counter() - t0) / repeat, out


def breakdown(stack, n=200):
    vals = np.linspace(5.0, 8.0, n)
    t_fast = t_full = t_prof = t_solve = 0.0
    for v in vals:
        p = {"well.thickness": float(v)}
        t0 = time.perf_counter()
        s = design.apply_parameters(stack, p)
        t1 = time.perf_counter()
        design.apply_parameters(stack, p, fast=False)
        t2 = time.perf_counter()
        prof = band_profile(s)
        t3 = time.perf_counter()
        solve_profile(prof, bands=("conduction",), method="exact", transitions=True,
                      wavefunctions=False)
        t4 = time.perf_counter()
        t_fast += t1 - t0
        t_full += t2 - t1
        t_prof += t3 - t2
        t_solve += t4 - t3
    ms = 1e3 / n
    print(f"  per design: apply_parameters fast path {t_fast * ms:.3f} ms "
          f"(full re-validation {t_full * ms:.3f} ms), band_profile {t_prof * ms:.3f} ms, "
          f"solve (conduction, e1-e2) {t_solve * ms:.3f} ms")


def main():
    stack = load_stack(LWIR)
    cores = parallel.default_jobs()
    print(f"qwell design benchmark ({cores} cores available)")
    design.design_point(stack, {"well.thickness": 5.0})  # warm caches and imports

    print("\nCost of one design evaluation (single-well stack layers/lwir-detector.yaml):")
    breakdown(stack)
    rng = np.random.default_rng(0)
    for label, path in (("barrier composition", "top_barrier.x"),):
        t_f = t_s = 0.0
        for _ in range(100):
            p = {path: 0.25 + 0.01 * float(rng.standard_normal())}
            t0 = time.perf_counter()
            design.apply_parameters(stack, p)
            t1 = time.perf_counter()
            design.apply_parameters(stack, p, fast=False)
            t_f += t1 - t0
            t_s += time.perf_counter() - t1
        print(f"  {label} change (new value each time): apply_parameters fast path "
              f"{10 * t_f:.3f} ms, full re-validation {10 * t_s:.3f} ms")

    values = np.linspace(4.8, 10.0, 1000)
    t_par, res = _t(lambda: design.sweep(stack, "well.thickness", values, ["e1-e2"]))
    n_e2 = int(np.isfinite(res.wavelength_um["e1-e2"]).sum())
    print(f"\n1000-point thickness sweep, all conduction states + e1-e2, jobs={cores}: "
          f"{t_par:.2f} s (target < 3 s); {len(res.state_labels)} state labels, "
          f"e1-e2 at {n_e2} points")
    t_ser, res1 = _t(lambda: design.sweep(stack, "well.thickness", values, ["e1-e2"], jobs=1))
    same = np.array_equal(res.wavelength_um["e1-e2"], res1.wavelength_um["e1-e2"],
                          equal_nan=True)
    print(f"  same sweep serial (jobs=1): {t_ser:.2f} s; identical results: {same}; "
          f"speed-up {t_ser / t_par:.2f}x")

    pump = load_stack(PUMP)
    n = 10_000
    t_mc, tol = _t(lambda: design.tolerance(pump, "e1-hh1", {"*": "1 ML"}, composition_tol=0.01,
                                            monte_carlo=n, seed=1))
    mc = tol.monte_carlo
    print(f"\n{n}-sample Monte Carlo of the 3-layer pump-laser well (e1-hh1; 1 ML thickness and "
          f"0.01 composition as 1 sigma; {len(tol.contributions)} parameters), jobs={cores}: "
          f"{t_mc:.2f} s (target < 30 s)")
    print(f"  e1-hh1 present in {mc.valid} of {mc.samples} designs; mean {mc.mean_um:.5f} um, "
          f"std {mc.std_nm:.2f} nm")

    n2 = 2_000
    t_mc2, tol2 = _t(lambda: design.tolerance(stack, "e1-e2", {"*": "1 ML"}, composition_tol=0.01,
                                              monte_carlo=n2, seed=1))
    mc2 = tol2.monte_carlo
    print(f"\n{n2}-sample Monte Carlo of the 3-layer detector well (e1-e2, bound to quasi-bound; "
          f"{len(tol2.contributions)} parameters), jobs={cores}: {t_mc2:.2f} s "
          f"({1e3 * t_mc2 / n2:.1f} ms per design; x10 samples -> ~{10 * t_mc2:.0f} s)")
    print(f"  e1-e2 present in {mc2.valid} of {mc2.samples} designs (asymmetric barriers make e2 "
          "quasi-bound: the solver's resonance search dominates the cost)")

if __name__ == "__main__":
    main()
