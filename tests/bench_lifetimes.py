"""Benchmark of the LO-phonon rate table (prints figures; never asserts on time).

Run: ``python tests/bench_lifetimes.py``.  Not collected by pytest (name is not test_*.py).

Stack: a 7-layer InGaAs/InAlAs three-well active region with 6 bound conduction states
(15 pairs, 60 emission/absorption processes).  Figures, each with its reference measured in the
same run:

* the exact solve of the conduction band (bound states with wavefunctions): the reference the
  issue's target is stated against ("rate table in < 50 ms after the solve");
* the k = 0 rate table (:func:`qwell.lifetimes.lo_phonon_rates`) and the thermally averaged one;
* the same 60 form factors by a plain O(N^2) double sum per (pair, q) on the same grid, to show
  what the cumulative-sum form saves;
* a 200-point figure-of-merit sweep (:func:`qwell.design.sweep` with ``emitter``, serial and on
  all local cores) against the same sweep without the emitter line.
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

from qwell.design import sweep  # noqa: E402
from qwell.levels import solve_stack  # noqa: E402
from qwell.lifetimes import form_factors, host_phonon, lo_phonon_rates, solution_lifetimes  # noqa: E402
from qwell.optics import _common_grid  # noqa: E402
from qwell.stack import stack_from_text  # noqa: E402

STACK = """
name: six-state benchmark region
temperature: 300 K
substrate: InP
layers:
  - {material: In0.52Al0.48As, thickness: 10 nm, name: injector_barrier}
  - {material: In0.53Ga0.47As, thickness: 6.5 nm, name: w1}
  - {material: In0.52Al0.48As, thickness: 1.0 nm, name: b1}
  - {material: In0.53Ga0.47As, thickness: 5.0 nm, name: w2}
  - {material: In0.52Al0.48As, thickness: 1.0 nm, name: b2}
  - {material: In0.53Ga0.47As, thickness: 4.0 nm, name: w3}
  - {material: In0.52Al0.48As, thickness: 10 nm, name: exit_barrier}
"""


def best_time(fn, repeat=10):
    ts = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t)
    return min(ts), float(np.median(ts))


def naive_form_factors(z, rho, q):
    """Reference: the trapezoid double sum, one (pair, q) at a time (O(N^2) each)."""
    w = np.zeros_like(z)
    h = np.diff(z)
    w[:-1] += h / 2
    w[1:] += h / 2
    dz = np.abs(z[:, None] - z[None, :])
    out = np.empty(q.shape)
    for p in range(rho.shape[0]):
        rw = rho[p] * w
        for k in range(q.shape[1]):
            out[p, k] = rw @ np.exp(-q[p, k] * dz) @ rw
    return out


def main():
    stack = stack_from_text(STACK)
    opts = dict(bands="conduction", quasi_bound=False)
    sol = solve_stack(stack, **opts)
    states = list(sol.levels["conduction"].states)
    band = sol.profile.bands["conduction"]
    ph = host_phonon(stack, states)
    print(f"stack: {len(stack.layers)} layers, {len(states)} bound conduction states "
          f"({', '.join(s.label for s in states)}); phonon host {ph.material} "
          f"{1e3 * ph.energy_eV:.1f} meV")

    t_solve, m_solve = best_time(lambda: solve_stack(stack, **opts), repeat=5)
    t_k0, m_k0 = best_time(lambda: lo_phonon_rates(states, band, phonon=ph,
                                                   temperature_K=stack.temperature_K))
    t_th, m_th = best_time(lambda: lo_phonon_rates(states, band, phonon=ph,
                                                   temperature_K=stack.temperature_K,
                                                   thermal=True), repeat=3)
    t_all, _ = best_time(lambda: solution_lifetimes(sol, line="e3-e2"))
    print(f"reference  solve (exact, bound states, wavefunctions): best {1e3 * t_solve:7.2f} ms"
          f"  (median {1e3 * m_solve:.2f})")
    print(f"rate table k = 0                 : best {1e3 * t_k0:7.2f} ms  (median "
          f"{1e3 * m_k0:.2f})  = {t_k0 / t_solve:.3f} x solve;  target < 50 ms: "
          f"{'met' if m_k0 < 0.05 else 'NOT met'}")
    print(f"rate table thermally averaged    : best {1e3 * t_th:7.2f} ms  (median "
          f"{1e3 * m_th:.2f})  = {t_th / t_solve:.3f} x solve")
    print(f"solution_lifetimes (table + radiative + figure): best {1e3 * t_all:.2f} ms"
          f"  = {t_all / t_solve:.3f} x solve")

    # form factors: cumulative-sum form vs the O(N^2) double sum, same grid, same 60 (pair, q)
    zc, pc = _common_grid(states)
    z = np.linspace(zc[0], zc[-1], int((zc[-1] - zc[0]) / 0.05) + 1)
    psi = np.vstack([np.interp(z, zc, p) for p in pc])
    iu, ju = np.triu_indices(len(states), 1)
    rho = psi[iu] * psi[ju]
    q = np.tile(np.array([0.2, 0.5, 1.0, 1.5]), (rho.shape[0], 1))
    t_fast, _ = best_time(lambda: form_factors(z, rho, q))
    t_naive, _ = best_time(lambda: naive_form_factors(z, rho, q), repeat=1)
    diff = np.max(np.abs(form_factors(z, rho, q) - naive_form_factors(z, rho, q))
                  / np.max(np.abs(naive_form_factors(z, rho, q))))
    print(f"60 form factors on {z.size} points: cumulative sums {1e3 * t_fast:.2f} ms, "
          f"double sum {1e3 * t_naive:.1f} ms  (ratio {t_naive / t_fast:.0f} x; max "
          f"difference {diff:.1e} of the largest)")

    # 200-point figure-of-merit sweep over the middle well through the design engine
    widths = np.linspace(4.0, 6.0, 200)
    for jobs in (1, None):
        t0 = time.perf_counter()
        res = sweep(stack, "w2.thickness", widths, ["e2-e3"], emitter="e2-e3", jobs=jobs)
        t_em = time.perf_counter() - t0
        t0 = time.perf_counter()
        sweep(stack, "w2.thickness", widths, ["e2-e3"], jobs=jobs)
        t_plain = time.perf_counter() - t0
        fom = res.emitter["figure_of_merit_nm2_ps"]
        print(f"200-point sweep with --emitter (jobs={jobs or 'all cores'}): {t_em:.2f} s against "
              f"the same sweep without it {t_plain:.2f} s (ratio {t_em / t_plain:.2f}); target "
              f"< 5 s: {'met' if t_em < 5 else 'NOT met'}; figure {np.nanmin(fom):.3g} .. "
              f"{np.nanmax(fom):.3g} nm^2 ps")


if __name__ == "__main__":
    main()
