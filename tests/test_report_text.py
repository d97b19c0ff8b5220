"""The report's text layer puts each string where matplotlib's own Text artist would.

The pages draw all their text items through one artist that anchors each string
from cached per-character metrics (:class:`qwell.report.layout._PageText`).
The reference is matplotlib itself: the same strings placed with
``Figure.text(..., va='top', ha=...)`` on a page of the same size, both PDFs
read back with pypdf.  Baselines agree to 0.01 pt, horizontal anchors to 0.1 pt
(kerning is left out of the width), and the text is the same.
"""

import io

import pypdf
import pytest

from qwell.report import layout

matplotlib = pytest.importorskip("matplotlib")

ITEMS = [
    layout.Item("text", 300.0, 700.0, text="0.141116", size=8.0, ha="right"),
    layout.Item("text", 100.0, 650.0, text="e1-hh1 |⟨e|h⟩|²", size=8.0),
    layout.Item("text", 300.0, 600.0, text="Optical transitions", size=14.0, bold=True,
                ha="center"),
    layout.Item("text", 500.0, 550.0, text="λ (µm) Δn = 0", size=9.0, ha="right"),
    layout.Item("text", 120.0, 500.0, text="injector_barrier (×4), gy", size=7.0, color="0.25"),
    layout.Item("text", 540.0, 450.0, text="1 ML = 0.2934 nm", size=8.0, bold=True, ha="right"),
]


def _positions(pdf_bytes):
    out = []

    def visit(text, cm, tm, font, size):
        if text.strip():
            out.append((text, cm[4] + tm[4], cm[5] + tm[5]))

    pypdf.PdfReader(io.BytesIO(pdf_bytes)).pages[0].extract_text(visitor_text=visit)
    return out


def _matplotlib_page(items):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.backends.backend_pdf import PdfPages
    from matplotlib.figure import Figure

    W, H = layout.PAGE_W_PT, layout.PAGE_H_PT
    buf = io.BytesIO()
    with matplotlib.rc_context({"pdf.fonttype": 3, "axes.unicode_minus": False}):
        with PdfPages(buf) as pdf:
            fig = Figure(figsize=(W / 72.0, H / 72.0), dpi=72)
            FigureCanvasAgg(fig)
            for it in items:
                fig.text(it.x / W, it.y / H, it.text, fontsize=it.size, ha=it.ha, va="top",
                         fontweight="bold" if it.bold else "normal", color=it.color,
                         parse_math=False)
            pdf.savefig(fig)
    return buf.getvalue()


def test_text_layer_places_strings_like_matplotlib_text():
    ours = _positions(layout.typeset_pdf([ITEMS], [[]], {}))
    ref = _positions(_matplotlib_page(ITEMS))
    assert [t for t, _, _ in ours] == [t for t, _, _ in ref]
    assert len(ours) >= len(ITEMS)
    for (t, x, y), (_, xr, yr) in zip(ours, ref):
        assert y == pytest.approx(yr, abs=0.01), t
        assert x == pytest.approx(xr, abs=0.1), t


def test_footer_and_body_text_read_back():
    pdf = layout.typeset_pdf([ITEMS], [["qwell 0.1 · page 1 of 1"]], {})
    text = pypdf.PdfReader(io.BytesIO(pdf)).pages[0].extract_text()
    for needle in ("0.141116", "Optical transitions", "1 ML = 0.2934 nm", "page 1 of 1"):
        assert needle in text
