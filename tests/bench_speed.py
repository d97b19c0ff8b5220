"""Speed figures of issue 15 as ratios measured in one run (prints; never asserts a time).

Run with ``python tests/bench_speed.py`` from the repository root.  Every figure is a
ratio against a reference timed in the same run, because the machine is shared:

* start-up: ``qwell levels layers/lwir-detector.yaml`` against the bare import floor
  ``python -c "import numpy, scipy.linalg, yaml"`` (goal <= 1.5x), both with byte code
  cached (a fresh ``PYTHONPYCACHEPREFIX``, warmed once), best of five;
* marginal cost per design of a single-well thickness sweep (1,000 minus 200 points,
  serial; the designs of a sweep are solved as batches by ``qwell.solvers.batch``)
  against a plain finite-difference route written here: BenDaniel-Duke on a
  uniform grid, lowest two eigenvalues at h and h/2, Richardson-extrapolated, with h
  halved until the extrapolated e1, e2 move by < 0.1 ueV (goal: qwell >= 10x faster);
  and the solver alone: one batch of 400 bands against ``solve_exact`` one band at a time;
* a Monte Carlo tolerance run of the 3-layer example (per sample, projected to 10,000
  samples, and 10,000 samples run once when the projection is under 10 s; goal < 3 s on
  2 cores);
* ``qwell report layers/midir-emitter.yaml`` wall time (goal < 3 s);
* semiclassical against exact solve time on every example (goal >= 10x).
"""

from __future__ import annotations

import os
import warnings
from dataclasses import replace
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy.linalg import eigh_tridiagonal

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from qwell import design, parallel  # noqa: E402
from qwell.constants import HBAR2_2M0_EV_NM2  # noqa: E402
from qwell.levels import prepare_profile, solve_profile  # noqa: E402
from qwell.profile import band_profile  # noqa: E402
from qwell.solvers import solve_exact  # noqa: E402
from qwell.solvers.batch import solve_bound_many  # noqa: E402
from qwell.stack_bands import stack_bands  # noqa: E402
from qwell.stack import load_stack  # noqa: E402

LWIR = ROOT / "layers" / "lwir-detector.yaml"


def _wall(cmd, env, repeat=5) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run(cmd, env=env, cwd=ROOT, check=True, stdout=subprocess.DEVNULL)
        best = min(best, time.perf_counter() - t0)
    return best


def startup():
    env = dict(os.environ, PYTHONPATH=str(ROOT), PYTHONPYCACHEPREFIX=tempfile.mkdtemp())
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    floor = [sys.executable, "-c", "import numpy, scipy.linalg, yaml"]
    levels = [sys.executable, "-m", "qwell.cli", "levels", str(LWIR)]
    _wall(levels, env, repeat=1)            # writes the byte code
    t_floor = _wall(floor, env)
    t_levels = _wall(levels, env)
    print(f"start-up: qwell levels {t_levels:.3f} s, import floor {t_floor:.3f} s: "
          f"{t_levels / t_floor:.2f}x the floor (goal <= 1.5x)")


# ----------------------------------------------------------------- finite differences
def _fd_levels(pieces, h_nm, n_states=2):
    """Lowest eigenvalues of the BenDaniel-Duke operator on a uniform grid (Dirichlet ends)."""
    z0, z1 = pieces[0][0], pieces[-1][1]
    n = int(round((z1 - z0) / h_nm)) - 1
    z = z0 + h_nm * np.arange(1, n + 1)
    zh = z0 + h_nm * (np.arange(0, n + 1) + 0.5)          # half points
    v = np.empty(n)
    m = np.empty(n + 1)
    for a, b, vp, mp in pieces:
        v[(z >= a) & (z <= b)] = vp
        m[(zh >= a) & (zh <= b)] = mp
    t = HBAR2_2M0_EV_NM2 / (m * h_nm * h_nm)
    d = t[:-1] + t[1:] + v
    e = -t[1:-1]
    return eigh_tridiagonal(d, e, eigvals_only=True, select="i", select_range=(0, n_states - 1))


def _fd_richardson(pieces, h_nm):
    return (4.0 * _fd_levels(pieces, h_nm / 2) - _fd_levels(pieces, h_nm)) / 3.0


def _pieces(stack, width_nm):
    band = band_profile(design.apply_parameters(stack, {"well.thickness": width_nm})).bands["conduction"]
    return [(p.z_start_nm, p.z_end_nm, p.edge_start_eV, p.mass_m0) for p in band.pieces]


def marginal(stack):
    def run(n):
        vals = np.linspace(5.0, 6.0, n)
        t0 = time.perf_counter()
        design.sweep(stack, "well.thickness", vals, ["e1-e2"], jobs=1)
        return time.perf_counter() - t0

    run(20)
    t_small, t_big = run(200), run(1000)
    q_ms = (t_big - t_small) / 800 * 1e3
    widths = np.linspace(5.0, 6.0, 200)
    allp = [_pieces(stack, float(w)) for w in widths]
    h = 0.1
    ref = _fd_richardson(allp[0], h)
    while True:                      # h halved until the extrapolation moves < 0.1 ueV
        nxt = _fd_richardson(allp[0], h / 2)
        h /= 2
        if np.max(np.abs(nxt - ref)) < 1e-7 or h < 1e-3:
            break
        ref = nxt
    t0 = time.perf_counter()
    for p in allp:
        _fd_richardson(p, h)
    fd_ms = (time.perf_counter() - t0) / len(allp) * 1e3
    print(f"marginal cost per single-well design (serial): qwell sweep {q_ms:.3f} ms, "
          f"FD + Richardson (h = {h:g} nm, 0.1 ueV) {fd_ms:.3f} ms: qwell is "
          f"{fd_ms / q_ms:.2f}x the FD route's speed (goal >= 10x)")
    bands = [stack_bands(design.apply_parameters(stack, {"well.thickness": float(w)}),
                         ("conduction",))["conduction"] for w in np.linspace(4.0, 7.0, 400)]
    solve_bound_many(bands[:20])
    t0 = time.perf_counter()
    solve_bound_many(bands)
    t_batch = time.perf_counter() - t0
    t0 = time.perf_counter()
    for b in bands:
        solve_exact(b, quasi_bound=False, wavefunctions=False)
    t_one = time.perf_counter() - t0
    print(f"  solver alone, 400 single-well bands: one batch {t_batch / 400 * 1e3:.3f} ms a band, "
          f"solve_exact one at a time {t_one / 400 * 1e3:.3f} ms: {t_one / t_batch:.1f}x")


def monte_carlo(stack, n=1000):
    jobs = parallel.default_jobs()
    t0 = time.perf_counter()
    design.tolerance(stack, "e1-e2", monte_carlo=n, seed=1, jobs=jobs)
    t = time.perf_counter() - t0
    print(f"Monte Carlo, 3-layer design, {n} samples on {jobs} jobs: {t:.2f} s "
          f"({t / n * 1e3:.2f} ms a sample; 10,000 samples ~ {t / n * 1e4:.1f} s; goal < 3 s)")
    if t / n * 1e4 < 10.0:
        t0 = time.perf_counter()
        design.tolerance(stack, "e1-e2", monte_carlo=10000, seed=1, jobs=jobs)
        t = time.perf_counter() - t0
        print(f"  10,000 samples on {jobs} jobs, run: {t:.2f} s (goal < 3 s)")


def report():
    out = tempfile.mkdtemp()
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    t = _wall([sys.executable, "-m", "qwell.cli", "report", str(ROOT / "layers" / "midir-emitter.yaml"),
               "-o", out], env, repeat=1)
    print(f"qwell report layers/midir-emitter.yaml: {t:.2f} s wall (goal < 3 s)")


def methods():
    for path in sorted((ROOT / "layers").glob("*.yaml")):
        prof, _ = prepare_profile(load_stack(path))   # the profile both methods solve
        times = {}
        for method in ("exact", "semiclassical"):
            solve_profile(prof, method=method)         # warm: imports, material and rule caches
            fresh = replace(prof, bands={k: replace(b) for k, b in prof.bands.items()})
            t0 = time.perf_counter()
            solve_profile(fresh, method=method)        # new Band objects: no per-band plan reused
            times[method] = time.perf_counter() - t0
        t_ex, t_sc = times["exact"], times["semiclassical"]
        print(f"  {path.name:24s} exact {t_ex * 1e3:8.1f} ms, semiclassical {t_sc * 1e3:8.1f} ms: "
              f"{t_ex / t_sc:6.2f}x (goal >= 10x)")


def doped_cli():
    """A user's single call: the doped example through the CLI, each method in a fresh process."""
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    stack = str(ROOT / "layers" / "doped-detector.yaml")
    t = {m: _wall([sys.executable, "-m", "qwell.cli", "levels", stack, "--method", m], env, repeat=1)
         for m in ("exact", "semiclassical")}
    print(f"qwell levels layers/doped-detector.yaml (fresh process, self-consistent loop included): "
          f"--method exact {t['exact']:.2f} s, --method semiclassical {t['semiclassical']:.2f} s")


def main():
    warnings.simplefilter("ignore")   # validity notes of the examples are not the subject here
    print(f"qwell speed benchmark ({os.cpu_count()} cores, shared machine)")
    startup()
    stack = load_stack(LWIR)
    solve_profile(band_profile(stack), bands=("conduction",))
    marginal(stack)
    monte_carlo(stack)
    report()
    print("semiclassical estimator against the exact solver (solve of the prepared profile, "
          "self-consistent where the stack says so, after a warm-up solve; exact / semiclassical time):")
    methods()
    doped_cli()


if __name__ == "__main__":
    main()
