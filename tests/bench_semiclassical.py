"""Speed of the semiclassical estimator, and its ratio to the exact solver.

Prints figures only (never pass/fail).  Run as a script::

    PYTHONPATH=. python tests/bench_semiclassical.py [--quick]

Timing method: each figure is measured in ``ROUNDS`` rounds; a round runs the
call ``n`` times in a loop (``n`` chosen so that a round lasts about
``ROUND_SECONDS``) and gives the mean time per call.  The table shows the
best round ("best") and the median round ("median") [ms per call], wall
clock (``time.perf_counter``).  The best round is the least disturbed by
other load on the machine; the median shows the spread.  Ratios are computed
from the best rounds (and, in brackets, from the medians).

Columns:

* ``semiclassical``: ``solve_semiclassical(band)`` called repeatedly on the
  same band object (per-band geometry cached after the first call, as in a
  session that solves a stack more than once);
* ``sc fresh``: the same with the per-band cache cleared before every call
  (the cost for a band seen for the first time, e.g. in a sweep);
* ``exact``: ``solve_exact(band)`` with its default options (wavefunctions
  and quasi-bound search on), i.e. what ``qwell levels`` runs;
* ``exact E``: ``solve_exact(band, wavefunctions=False, quasi_bound=False)``,
  energies only;
* ``exact/sc``, ``exactE/sc``: speed-up of the estimator over each, best
  rounds (medians in brackets); ``fresh``: exact (default) over ``sc fresh``.

The last column is the largest difference of the levels the two methods have
in common (a sanity check, not an accuracy claim: the semiclassical error is
the method's, see the tests).
"""

from __future__ import annotations

import statistics
import sys
import time
import warnings

import numpy as np

from qwell.bands import Band, Piece, band_from_layers
from qwell.solvers import semiclassical as _sc
from qwell.solvers.semiclassical import solve_semiclassical

try:
    from qwell.solvers.exact import solve_exact
except ImportError:  # the exact solver is written separately
    solve_exact = None

ROUNDS = 9
ROUND_SECONDS = 0.05


def timing(fn, *, rounds=ROUNDS, round_seconds=ROUND_SECONDS):
    """(best, median) mean time per call [s] over ``rounds`` rounds."""
    fn()  # warm-up
    n = 1
    while True:
        t0 = time.perf_counter()
        for _ in range(n):
            fn()
        dt = time.perf_counter() - t0
        if dt >= round_seconds or n >= 1 << 16:
            break
        n *= 2
    per_call = [dt / n]
    for _ in range(rounds - 1):
        t0 = time.perf_counter()
        for _ in range(n):
            fn()
        per_call.append((time.perf_counter() - t0) / n)
    return min(per_call), statistics.median(per_call)


def stacks():
    m = 0.067
    yield "square well 10 nm / 0.3 eV", band_from_layers(
        [(20.0, 0.3, 0.092), (10.0, 0.0, m), (20.0, 0.3, 0.092)]), {}
    yield "square well 10 nm, 50 kV/cm", band_from_layers(
        [(20.0, 0.3, 0.092), (10.0, 0.0, m), (20.0, 0.3, 0.092)], field_kV_per_cm=50.0), {}
    yield "asymmetric double well (20 nm barrier)", band_from_layers(
        [(20.0, 0.3, m), (6.0, 0.0, m), (20.0, 0.3, m), (8.0, 0.0, m), (20.0, 0.3, m)]), {}
    yield "nonparabolic 6 nm well", band_from_layers(
        [(30.0, 0.5, 0.045, 1.0), (6.0, 0.0, 0.041, 0.8), (30.0, 0.5, 0.045, 1.0)],
        nonparabolic=True), {}
    yield "step well (5 nm + 10 nm shoulder)", band_from_layers(
        [(20.0, 0.3, m), (5.0, 0.0, m), (10.0, 0.1, m), (20.0, 0.3, m)]), {}
    yield "8-period 4/2 nm superlattice", band_from_layers(
        [(25.0, 0.3, 0.092)] + [(4.0, 0.0, m), (2.0, 0.3, 0.092)] * 8
        + [(4.0, 0.0, m), (25.0, 0.3, 0.092)]), {}
    a = 0.002
    yield "parabolic (smooth) well, 20 states", Band("conduction", (
        Piece(-60.0, 60.0, 0, kind="smooth", potential_fn=lambda z: a * z ** 2,
              mass_fn=lambda z: m + 0.0 * z),)), {"max_states": 20}


def _fresh(band, kw):
    _sc._FLAT_CACHE.clear()
    return solve_semiclassical(band, **kw)


def main(quick=False):
    rounds = 5 if quick else ROUNDS
    print("times in ms per call: best round / median round (see module docstring)")
    head = (f"{'stack':40s} {'n':>3s} {'semiclassical':>15s} {'sc fresh':>15s} "
            f"{'exact':>17s} {'exact E':>15s} {'exact/sc':>13s} {'exactE/sc':>12s} "
            f"{'fresh':>6s}  max|dE|")
    print(head)
    for name, band, kw in stacks():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            lev = solve_semiclassical(band, **kw)
            sc_b, sc_m = timing(lambda b=band, k=kw: solve_semiclassical(b, **k), rounds=rounds)
            fr_b, fr_m = timing(lambda b=band, k=kw: _fresh(b, k), rounds=rounds)
            line = (f"{name:40s} {len(lev):3d} {sc_b * 1e3:7.3f}/{sc_m * 1e3:7.3f} "
                    f"{fr_b * 1e3:7.3f}/{fr_m * 1e3:7.3f}")
            if solve_exact is None:
                print(line + "   exact solver not available: ratio skipped")
                continue
            ex_b, ex_m = timing(lambda b=band, k=kw: solve_exact(b, **k), rounds=rounds)
            e2_b, e2_m = timing(lambda b=band, k=kw: solve_exact(b, wavefunctions=False,
                                                                 quasi_bound=False, **k),
                                rounds=rounds)
            ex = solve_exact(band, wavefunctions=False, quasi_bound=False, **kw)
        n = min(len(lev), len(ex))
        diff = np.max(np.abs(lev.energies_eV[:n] - ex.energies_eV[:n])) if n else float("nan")
        print(line + f" {ex_b * 1e3:8.3f}/{ex_m * 1e3:8.3f} {e2_b * 1e3:7.3f}/{e2_m * 1e3:7.3f} "
              f"{ex_b / sc_b:6.1f} ({ex_m / sc_m:4.1f}) {e2_b / sc_b:5.1f} ({e2_m / sc_m:4.1f}) "
              f"{ex_b / fr_b:6.1f}  {diff * 1e3:.3g} meV")


if __name__ == "__main__":
    main(quick="--quick" in sys.argv)
