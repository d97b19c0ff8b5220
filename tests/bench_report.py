"""Benchmark: time of a full design-review report for a 10-layer stack (prints, never asserts).

Run as ``python tests/bench_report.py``.  Target: under 10 s on the
development machine for the whole ``build_report`` (both solvers, the
sensitivity page with ±1 ML and ±0.01 changes of every layer, the PDF and
the PNG).  The stack is an invented coupled-well scenario.

The sensitivity page is timed on its own twice, through the design engine
serially (``jobs=1``, the reference) and with its default parallelism; the
ratio is printed.
"""

from __future__ import annotations

import sys
import tempfile
import time
import warnings
from pathlib import Path

STACK_10 = """\
name: benchmark four coupled wells
temperature: 300 K
substrate: GaAs
field: 10 kV/cm
layers:
  - {material: Al0.30Ga0.70As, thickness: 20 nm, name: b0}
  - {material: GaAs, thickness: 6.0 nm, name: w1}
  - {material: Al0.30Ga0.70As, thickness: 2.0 nm, name: b1}
  - {material: GaAs, thickness: 5.0 nm, name: w2}
  - {material: Al0.30Ga0.70As, thickness: 2.5 nm, name: b2}
  - {material: GaAs, thickness: 4.5 nm, name: w3}
  - {material: Al0.30Ga0.70As, thickness: 3.0 nm, name: b3}
  - {material: GaAs, thickness: 4.0 nm, name: w4}
  - {material: Al0.25Ga0.75As, thickness: 4.0 nm, name: b4}
  - {material: Al0.30Ga0.70As, thickness: 20 nm, name: b5}
"""


def main() -> int:
    t0 = time.perf_counter()
    from qwell import report
    from qwell.stack import load_stack
    t_import = time.perf_counter() - t0

    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "bench-10-layers.yaml"
        src.write_text(STACK_10)
        stack = load_stack(src)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            t = time.perf_counter()
            data = report.collect_report_data(stack)
            t_data = time.perf_counter() - t
            t = time.perf_counter()
            _, pages = report.render_pdf(data)
            t_pdf = time.perf_counter() - t
            t = time.perf_counter()
            res = report.build_report(stack, out_dir=tmp)
            t_total = time.perf_counter() - t
            t = time.perf_counter()
            report.sensitivity_rows(stack, data.chosen, jobs=1)
            t_serial = time.perf_counter() - t
            t = time.perf_counter()
            report.sensitivity_rows(stack, data.chosen)
            t_parallel = time.perf_counter() - t
    print(f"stack: {len(stack.layers)} layers, {len(data.exact.states)} exact states, "
          f"{len(data.exact.transitions)} transitions, {len(data.sensitivity)} sensitivity rows, "
          f"{pages} pages")
    print(f"import qwell.report            {t_import:7.2f} s")
    print(f"solve + sensitivity            {t_data:7.2f} s")
    print(f"PDF rendering (in memory)      {t_pdf:7.2f} s")
    print(f"build_report (everything)      {t_total:7.2f} s   (target < 10 s; "
          f"ReportResult.elapsed_s = {res.elapsed_s:.2f} s)")
    print(f"{'sensitivity, serial':30s} {t_serial:7.2f} s   (reference)")
    print(f"{'sensitivity, default jobs':30s} {t_parallel:7.2f} s   "
          f"({t_serial / t_parallel:.2f}x faster than serial)")
    if caught:
        print(f"({len(caught)} warning(s) while solving; listed in the report)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
