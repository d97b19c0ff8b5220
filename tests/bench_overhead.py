"""Per-command overhead of issue 15, as ratios measured in one run (prints; never asserts a time).

Run with ``python tests/bench_overhead.py`` from the repository root.  Every figure is
a ratio against a reference timed in the same run (the machine is shared):

* ``qwell levels layers/midir-emitter.yaml``: the solve of the bands its e2-e3 line
  needs (conduction) against every band (``--band all``, what it solved before);
* a design evaluation of that stack: the profile built (sampling deferred) against
  built and sampled at 0.05 nm (what every design paid before);
* the report's e1-hh1 sensitivity design: the bound states up to the needed ones
  against every bound state of the solved bands;
* the report's PDF pages: one text layer per page against one matplotlib ``Text``
  artist per item (the reference route, written here as the pages drew before);
* ``qwell report layers/midir-emitter.yaml`` wall time (goal < 3 s) against the bare
  import floor ``python -c "import numpy, scipy.linalg, yaml"``.

In-process figures are the best of three calls (CPU time of this process).
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time
import warnings
from dataclasses import replace
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from qwell import report  # noqa: E402
from qwell.levels import solve_profile  # noqa: E402
from qwell.profile import band_profile  # noqa: E402
from qwell.report import layout  # noqa: E402
from qwell.stack import load_stack  # noqa: E402

MIDIR = ROOT / "layers" / "midir-emitter.yaml"


def _best(fn, repeat=3) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.process_time()
        fn()
        best = min(best, time.process_time() - t0)
    return best


def _wall(cmd, env) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, env=env, cwd=ROOT, check=True, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL)
    return time.perf_counter() - t0


def _fresh(prof):
    """The profile with new Band objects (no per-band solver plan reused)."""
    return replace(prof, bands={k: replace(b) for k, b in prof.bands.items()})


def levels_bands(stack):
    prof = band_profile(stack)
    solve_profile(prof)                                         # warm caches and imports
    t_line = _best(lambda: solve_profile(_fresh(prof), bands="conduction"))
    t_all = _best(lambda: solve_profile(_fresh(prof)))
    print(f"levels midir-emitter, bands of the line (conduction) {t_line * 1e3:7.1f} ms vs "
          f"every band {t_all * 1e3:7.1f} ms: {t_all / t_line:5.2f}x")


def lazy_profile(stack):
    t_lazy = _best(lambda: band_profile(stack))
    t_eager = _best(lambda: band_profile(stack).z_nm)
    print(f"profile of midir-emitter, sampling deferred {t_lazy * 1e3:6.2f} ms vs sampled "
          f"{t_eager * 1e3:6.2f} ms: {t_eager / t_lazy:5.2f}x")


def needed_states(stack):
    prof = band_profile(stack)
    kw = dict(bands=("conduction", "heavy_hole"), quasi_bound=False, wavefunctions=False)
    solve_profile(prof, **kw)
    need = ("e2", "e3", "e1", "hh1")
    t_need = _best(lambda: solve_profile(_fresh(prof), states_needed=need, **kw))
    t_all = _best(lambda: solve_profile(_fresh(prof), **kw))
    print(f"sensitivity design (e1, e2, e3, hh1 needed) {t_need * 1e3:6.1f} ms vs every bound "
          f"state {t_all * 1e3:6.1f} ms: {t_all / t_need:5.2f}x")


def _render_page_with_text_artists(items, footer, pdf):
    """Reference route: one matplotlib Text artist per text item (as the pages drew before)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Rectangle

    W, H = layout.PAGE_W_PT, layout.PAGE_H_PT
    fig = Figure(figsize=(W / 72.0, H / 72.0), dpi=72)
    FigureCanvasAgg(fig)
    for it in items:
        if it.kind == "text":
            fig.text(it.x / W, it.y / H, layout.drawable(it.text, it.bold), fontsize=it.size,
                     ha=it.ha, va="top", fontweight="bold" if it.bold else "normal",
                     color=it.color, parse_math=False)
        elif it.kind == "line":
            fig.add_artist(Line2D([it.x / W, (it.x + it.w) / W], [it.y / H, it.y / H], lw=0.6,
                                  color="0.3", transform=fig.transFigure))
        elif it.kind == "rect":
            fig.add_artist(Rectangle((it.x / W, it.y / H), it.w / W, it.h / H, lw=0,
                                     facecolor=it.color, transform=fig.transFigure, zorder=-1))
        elif it.kind == "figure":
            it.draw(fig, (it.x / W, it.y / H, it.w / W, it.h / H))
    y = layout.FOOTER_TOP - 4.0
    for ln in footer:
        for sub in layout.wrap(ln, layout.BODY_W, layout.MIN_FONT):
            fig.text(layout.MARGIN_L / W, y / H, layout.drawable(sub), fontsize=layout.MIN_FONT,
                     va="top", color="0.25", parse_math=False)
            y -= layout.MIN_FONT * 1.3
    pdf.savefig(fig)


def pdf_pages(stack):
    data = report.collect_report_data(stack)
    report.render_pdf(data)                                     # warm: imports, fonts
    t_layer = _best(lambda: report.render_pdf(data))
    own = layout._render_page
    layout._render_page = _render_page_with_text_artists
    try:
        t_ref = _best(lambda: report.render_pdf(data))
    finally:
        layout._render_page = own
    print(f"report PDF pages (midir-emitter), text layer {t_layer:5.2f} s vs Text artists "
          f"{t_ref:5.2f} s: {t_ref / t_layer:5.2f}x")


def report_wall():
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    out = tempfile.mkdtemp()
    t_floor = _wall([sys.executable, "-c", "import numpy, scipy.linalg, yaml"], env)
    t_rep = _wall([sys.executable, "-m", "qwell.cli", "report", str(MIDIR), "-o", out], env)
    print(f"qwell report layers/midir-emitter.yaml {t_rep:5.2f} s wall (goal < 3 s), "
          f"{t_rep / t_floor:5.1f}x the import floor ({t_floor:4.2f} s)")


def main():
    warnings.simplefilter("ignore")   # validity notes of the examples are not the subject here
    print(f"qwell per-command overhead ({os.cpu_count()} cores, shared machine)")
    stack = load_stack(MIDIR)
    levels_bands(stack)
    lazy_profile(stack)
    needed_states(stack)
    pdf_pages(stack)
    report_wall()


if __name__ == "__main__":
    main()
