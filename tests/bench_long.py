"""Benchmark of the exact solver on long stacks (prints figures; never asserts).

Run: ``python tests/bench_long.py [--quick] [--timeout SECONDS] [--case NAME]``
(``--case cascade`` runs only that case; names below).  Not collected by pytest.

Every case runs in a fresh Python process (so its peak resident memory is its
own) with a 3 GB address-space limit and a time-out, and reports

* wall time of the solve [s] and its ratio to the reference below,
* peak resident memory of the process [MB] (``resource.getrusage``), and the
  peak before the case's solve (imports, profile and the reference solve), so
  the solve's own share is the difference,

for 10, 50, 250 and 1000 periods, so the growth with the stack length is
visible.  The reference, measured in the same run and process, is the
single-well ``layers/lwir-detector.yaml`` conduction solve with wavefunctions.

Cases (all ``band_profile`` of a stack written here, conduction band):

* ``detector``: Al0.25Ga0.75As 40 nm cap, then N x (GaAs 5 nm, Al0.25Ga0.75As
  40 nm) at 77 K; "states": every conduction state with its wavefunction
  sampled (``solve_exact`` + ``psi`` of each state), as ``qwell levels`` needs;
  "levels": the whole ``solve_profile`` including the transition table.
* ``superlattice``: N x (GaAs 4 nm, Al0.30Ga0.70As 2 nm) between 25 nm
  barriers; "energies": every conduction energy, no wavefunctions.
* ``cascade``: 30 periods of 12 InGaAs/InAlAs layers (362 layers) under
  45 kV/cm; "states" as above (bound and quasi-bound).

The script only uses public names, so it runs unchanged against an older
checkout (``PYTHONPATH=/path/to/old python tests/bench_long.py``).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

DETECTOR = """name: detector {n} periods
temperature: 77 K
substrate: GaAs
layers:
  - {{material: Al0.25Ga0.75As, thickness: 40 nm, name: cap}}
  - repeat: {n}
    layers:
      - {{material: GaAs, thickness: 5 nm, name: well}}
      - {{material: Al0.25Ga0.75As, thickness: 40 nm, name: barrier}}
"""

SUPERLATTICE = """name: superlattice {n} periods
temperature: 300 K
substrate: GaAs
layers:
  - {{material: Al0.30Ga0.70As, thickness: 25 nm, name: cap}}
  - repeat: {n}
    layers:
      - {{material: GaAs, thickness: 4 nm, name: sl_well}}
      - {{material: Al0.30Ga0.70As, thickness: 2 nm, name: sl_barrier}}
  - {{material: GaAs, thickness: 4 nm, name: last_well}}
  - {{material: Al0.30Ga0.70As, thickness: 25 nm, name: base}}
"""

_CASCADE_PERIOD = [("In0.52Al0.48As", 4.0), ("In0.53Ga0.47As", 1.5), ("In0.52Al0.48As", 1.1),
                   ("In0.53Ga0.47As", 4.7), ("In0.52Al0.48As", 1.3), ("In0.53Ga0.47As", 4.0),
                   ("In0.52Al0.48As", 2.6), ("In0.53Ga0.47As", 3.2), ("In0.52Al0.48As", 1.8),
                   ("In0.53Ga0.47As", 2.8), ("In0.52Al0.48As", 2.0), ("In0.53Ga0.47As", 2.6)]
CASCADE = ("name: cascade {n} periods\ntemperature: 300 K\nsubstrate: InP\nfield: 45 kV/cm\n"
           "layers:\n  - {{material: In0.52Al0.48As, thickness: 20 nm, name: front}}\n"
           "  - repeat: {n}\n    layers:\n"
           + "".join(f"      - {{{{material: {m}, thickness: {t} nm, name: l{i}}}}}\n"
                     for i, (m, t) in enumerate(_CASCADE_PERIOD))
           + "  - {{material: In0.52Al0.48As, thickness: 20 nm, name: back}}\n")

# the child: build the profile, time the solve, report JSON on stdout
CHILD = textwrap.dedent("""
    import json, resource, sys, time
    resource.setrlimit(resource.RLIMIT_AS, (3 * 1024 ** 3, 3 * 1024 ** 3))
    from qwell.levels import solve_profile
    from qwell.profile import band_profile
    from qwell.solvers.exact import solve_exact
    from qwell.stack import load_stack, stack_from_text

    def run(kind, text):
        prof = band_profile(stack_from_text(text) if text else load_stack(sys.argv[3]))
        band = prof.bands["conduction"]
        t = time.perf_counter()
        if kind == "energies":
            lev = solve_exact(band, wavefunctions=False)
            n = len(lev)
        elif kind == "states":
            lev = solve_exact(band)
            n = sum(s.psi is not None for s in lev.states)
        else:
            sol = solve_profile(prof, bands="conduction")
            n = len(sol.levels["conduction"])
        return n, time.perf_counter() - t

    def rss_MB():
        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

    ref_n, ref_t = run("states", None)
    base = rss_MB()
    n, dt = run(sys.argv[1], open(sys.argv[2]).read())
    print(json.dumps({"n": n, "t": dt, "ref_t": ref_t, "base_MB": base, "rss_MB": rss_MB()}))
""")


def run_case(kind, text, timeout=300):
    path = os.path.join("/tmp", f"qwell_bench_long_{os.getpid()}.yaml")
    with open(path, "w") as fh:
        fh.write(text)
    try:
        out = subprocess.run([sys.executable, "-c", CHILD, kind, path,
                              os.path.join(ROOT, "layers", "lwir-detector.yaml")],
                             capture_output=True, text=True, timeout=timeout,
                             env={**os.environ, "PYTHONWARNINGS": "ignore"})
    except subprocess.TimeoutExpired:
        return None, f"timed out after {timeout} s"
    finally:
        os.unlink(path)
    if out.returncode != 0:
        last = (out.stderr.strip().splitlines() or ["?"])[-1]
        return None, f"failed: {last[:60]}"
    return json.loads(out.stdout.strip().splitlines()[-1]), ""


def main():
    quick = "--quick" in sys.argv
    timeout = float(sys.argv[sys.argv.index("--timeout") + 1]) if "--timeout" in sys.argv else 300
    periods = (10, 50) if quick else (10, 50, 250, 1000)
    cases = [("detector", "states", DETECTOR, periods),
             ("detector", "levels", DETECTOR, periods[:2] if quick else periods[:3]),
             ("superlattice", "energies", SUPERLATTICE, periods),
             ("superlattice", "states", SUPERLATTICE, periods[:3]),
             ("cascade", "states", CASCADE, (10, 30))]
    if "--case" in sys.argv:
        only = sys.argv[sys.argv.index("--case") + 1]
        cases = [c for c in cases if c[0] == only]
        if not cases:
            sys.exit(f"bench_long: no case {only!r} (detector, superlattice, cascade)")
    print(f"{'case':<13} {'solve':<9} {'periods':>7} {'states':>6} {'time s':>8} "
          f"{'x ref':>7} {'x 1st':>6} {'peak RSS MB':>11} {'before MB':>9}")
    for name, kind, template, ns in cases:
        first = None
        for n in ns:
            res, err = run_case(kind, template.format(n=n), timeout)
            if res is None:
                print(f"{name:<13} {kind:<9} {n:>7}  {err}")
                continue
            first = first or res["t"]
            print(f"{name:<13} {kind:<9} {n:>7} {res['n']:>6} {res['t']:>8.2f} "
                  f"{res['t'] / res['ref_t']:>7.0f} {res['t'] / first:>6.1f} "
                  f"{res['rss_MB']:>11.0f} {res['base_MB']:>9.0f}")
    print("x ref: time / single-well reference solve in the same process; "
          "x 1st: time / the case's shortest stack")


if __name__ == "__main__":
    main()
