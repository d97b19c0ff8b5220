"""Benchmark of the exact solver (prints figures; never asserts on time).

Run: ``python tests/bench_exact.py``.  The file name does not match pytest's
``test_*.py`` pattern, so it is not collected.

Compares :func:`qwell.solvers.exact.solve_exact` with a plain scipy
finite-difference eigen-solver (``eigh_tridiagonal``, BDD-symmetric
discretisation), whose grid is refined (halving the step) until it agrees with
the exact result to 1 ueV, and times all conduction states of a 3-layer single
well with and without wavefunctions.

What is counted for finite differences (FD), per stack:

* ``FD final grid``: one eigh_tridiagonal solve on the first grid (h halved from
  0.08 nm) whose levels agree with the exact ones to 1 ueV -- knowing that grid
  needs the exact answer, so this is a lower bound of the FD cost;
* ``FD to-reference sequence``: all grids h0, h0/2, ... up to that one;
* ``FD self-converged``: all grids until two successive grids agree to 1 ueV
  (what a user without a reference must run to know FD has converged).

The exact solver is timed with ``wavefunctions=False, quasi_bound=False`` (same
output as FD: energies only), best of 20 calls.
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

from qwell.bands import band_from_layers  # noqa: E402
from qwell.solvers.exact import solve_exact  # noqa: E402

from tests.test_exact import _fd_levels  # noqa: E402


def best_time(fn, repeat=20):
    ts = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t)
    return min(ts), float(np.median(ts))


def fd_self_converged(layers, n, h0=0.08):
    """Halve h from h0 until two successive FD grids agree to 1 ueV: (h, total time, steps)."""
    h = h0
    total = 0.0
    prev = None
    steps = 0
    while True:
        t = time.perf_counter()
        e = _fd_levels(layers, n, h)
        total += time.perf_counter() - t
        steps += 1
        if prev is not None and float(np.max(np.abs(e - prev))) < 1e-6 or h < 1e-4:
            return h, total, steps
        prev = e
        h /= 2


def fd_until_agrees(layers, ref, h0=0.08):
    """Halve h from h0 until FD agrees to 1 ueV: (h, time of last grid, total time, diff)."""
    h = h0
    total = 0.0
    while True:
        t = time.perf_counter()
        e = _fd_levels(layers, ref.size, h)
        dt = time.perf_counter() - t
        total += dt
        err = float(np.max(np.abs(e - ref)))
        if err < 1e-6 or h < 1e-4:
            return h, dt, total, err
        h /= 2


STACKS = {
    "single 10 nm well": [(20, 0.3, 0.0919), (10, 0.0, 0.067), (20, 0.3, 0.0919)],
    "double well 8/3/8": [(20, 0.3, 0.0919), (8, 0.0, 0.067), (3, 0.3, 0.0919), (8, 0.0, 0.067),
                          (20, 0.3, 0.0919)],
}


def main():
    print("exact solver vs finite differences refined to 1 ueV")
    for name, layers in STACKS.items():
        band = band_from_layers(layers)
        lev = solve_exact(band, wavefunctions=False, quasi_bound=False)
        ref = lev.energies_eV
        t_ex, t_med = best_time(lambda b=band: solve_exact(b, wavefunctions=False, quasi_bound=False))
        h, t_fd, t_all, err = fd_until_agrees(layers, ref)
        h_s, t_self, n_self = fd_self_converged(layers, ref.size)
        print(f"  {name:20s} states={ref.size}  exact {t_ex * 1e3:6.3f} ms (median {t_med * 1e3:.3f})")
        print(f"      FD final grid h={h:.4g} nm {t_fd * 1e3:6.2f} ms (max diff {err * 1e6:.3f} ueV)"
              f"  ratio {t_fd / t_ex:5.1f}x")
        print(f"      FD to-reference sequence {t_all * 1e3:6.2f} ms  ratio {t_all / t_ex:5.1f}x")
        print(f"      FD self-converged ({n_self} grids, last h={h_s:.4g} nm) {t_self * 1e3:6.2f} ms"
              f"  ratio {t_self / t_ex:5.1f}x")
    band = band_from_layers(STACKS["single 10 nm well"])
    print("all conduction states of a 3-layer single well (target < 5 ms):")
    for wf in (True, False):
        for qb in (False, True):
            t, tm = best_time(lambda w=wf, q=qb: solve_exact(band, wavefunctions=w, quasi_bound=q))
            print(f"  wavefunctions={wf!s:5s} quasi_bound={qb!s:5s}: best {t * 1e3:6.2f} ms,"
                  f" median {tm * 1e3:6.2f} ms")
    # a tilted stack with quasi-bound states (Richardson refinement of the poles)
    tilted = band_from_layers([(10, 0.0, 0.067), (4, 0.3, 0.0919), (6, 0.0, 0.067),
                               (4, 0.3, 0.0919), (10, 0.0, 0.067)], field_kV_per_cm=20.0)
    t, tm = best_time(lambda: solve_exact(tilted, wavefunctions=True), repeat=5)
    lev = solve_exact(tilted, wavefunctions=False)
    print(f"tilted double barrier (20 kV/cm), wavefunctions=True: best {t * 1e3:6.1f} ms,"
          f" median {tm * 1e3:6.1f} ms; states converged: {lev.converged}")


if __name__ == "__main__":
    main()
