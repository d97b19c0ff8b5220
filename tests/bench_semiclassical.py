"""Speed of the semiclassical estimator, and its ratio to the exact solver.

Prints figures only (never pass/fail).  Run as a script::

    PYTHONPATH=. python tests/bench_semiclassical.py

Each timing is the best of several repeats (wall clock, ``time.perf_counter``),
so a busy machine inflates the figures less.
"""

from __future__ import annotations

import time
import warnings

import numpy as np

from qwell.bands import Piece, Band, band_from_layers
from qwell.solvers.semiclassical import solve_semiclassical

try:
    from qwell.solvers.exact import solve_exact
except ImportError:  # the exact solver is written separately
    solve_exact = None


def best_time(fn, *, repeat=7, min_seconds=0.2):
    """Best mean time per call [s] over ``repeat`` rounds of at least ``min_seconds``."""
    fn()  # warm-up
    n = 1
    while True:
        t0 = time.perf_counter()
        for _ in range(n):
            fn()
        dt = time.perf_counter() - t0
        if dt >= min_seconds / repeat or n >= 1 << 16:
            break
        n *= 2
    best = dt / n
    for _ in range(repeat - 1):
        t0 = time.perf_counter()
        for _ in range(n):
            fn()
        best = min(best, (time.perf_counter() - t0) / n)
    return best


def stacks():
    m = 0.067
    yield "square well 10 nm / 0.3 eV", band_from_layers(
        [(20.0, 0.3, 0.092), (10.0, 0.0, m), (20.0, 0.3, 0.092)])
    yield "square well 10 nm, 50 kV/cm", band_from_layers(
        [(20.0, 0.3, 0.092), (10.0, 0.0, m), (20.0, 0.3, 0.092)], field_kV_per_cm=50.0)
    yield "asymmetric double well (20 nm barrier)", band_from_layers(
        [(20.0, 0.3, m), (6.0, 0.0, m), (20.0, 0.3, m), (8.0, 0.0, m), (20.0, 0.3, m)])
    yield "nonparabolic 6 nm well", band_from_layers(
        [(30.0, 0.5, 0.045, 1.0), (6.0, 0.0, 0.041, 0.8), (30.0, 0.5, 0.045, 1.0)],
        nonparabolic=True)
    a = 0.002
    yield "parabolic (smooth) well, 20 states", Band("conduction", (
        Piece(-60.0, 60.0, 0, kind="smooth", potential_fn=lambda z: a * z ** 2,
              mass_fn=lambda z: m + 0.0 * z),))


def main():
    print(f"{'stack':42s} {'states':>6s} {'semiclassical':>14s} {'exact':>12s} "
          f"{'exact (no psi)':>15s} {'ratio':>7s} {'ratio no psi':>12s}")
    for name, band in stacks():
        kw = {"max_states": 20} if "smooth" in name else {}
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            lev = solve_semiclassical(band, **kw)
            t_sc = best_time(lambda b=band, k=kw: solve_semiclassical(b, **k))
            if solve_exact is None:
                print(f"{name:42s} {len(lev):6d} {t_sc * 1e3:11.3f} ms "
                      "   exact solver not available: ratio skipped")
                continue
            t_ex = best_time(lambda b=band, k=kw: solve_exact(b, **k), repeat=5)
            t_ex2 = best_time(lambda b=band, k=kw: solve_exact(b, wavefunctions=False,
                                                               quasi_bound=False, **k),
                              repeat=5)
            ex = solve_exact(band, wavefunctions=False, quasi_bound=False, **kw)
        n = min(len(lev), len(ex))
        diff = np.max(np.abs(lev.energies_eV[:n] - ex.energies_eV[:n])) if n else float("nan")
        print(f"{name:42s} {len(lev):6d} {t_sc * 1e3:11.3f} ms {t_ex * 1e3:9.3f} ms "
              f"{t_ex2 * 1e3:12.3f} ms {t_ex / t_sc:7.1f} {t_ex2 / t_sc:12.1f}"
              f"   max |E_sc - E_exact| = {diff * 1e3:.3g} meV")


if __name__ == "__main__":
    main()
