"""The report's typesetting engine: A4 pages filled top to bottom with blocks.

Blocks (:class:`Heading`, :class:`Paragraph`, :class:`Table`,
:class:`FigureBlock`, :class:`PageBreak`) are placed by a :class:`Flow` onto
pages of :class:`Item` (text, rules, shaded rectangles, drawings); a table
that does not fit continues on the next page with its header repeated.  Text
is measured with matplotlib's font machinery (:func:`text_width`, cached per
character) so that nothing is clipped; no font is below :data:`MIN_FONT`.
:func:`typeset_pdf` renders the placed pages, each with its footer, to PDF
bytes in memory.

Geometry in points (1/72 inch) from the bottom-left corner of the page.
This module knows nothing about stacks: page content is in
:mod:`qwell.report.pages`.
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

__all__ = [
    "PAGE_W_PT",
    "PAGE_H_PT",
    "MARGIN_L",
    "MARGIN_R",
    "MARGIN_T",
    "FOOTER_TOP",
    "BODY_BOTTOM",
    "BODY_W",
    "MIN_FONT",
    "TABLE_FONT",
    "TEXT_FONT",
    "text_width",
    "wrap",
    "Item",
    "Flow",
    "Heading",
    "Paragraph",
    "Table",
    "FigureBlock",
    "PageBreak",
    "typeset_pdf",
]

# page geometry (points, A4 portrait)
PAGE_W_PT, PAGE_H_PT = 595.28, 841.89
MARGIN_L = MARGIN_R = 46.0
MARGIN_T = 44.0
FOOTER_TOP = 46.0            # the footer sits below this height
BODY_BOTTOM = FOOTER_TOP + 8.0
BODY_W = PAGE_W_PT - MARGIN_L - MARGIN_R
MIN_FONT = 7.0
TABLE_FONT = 8.0
TEXT_FONT = 9.0


# ---------------------------------------------------------------------------
# text measurement
# ---------------------------------------------------------------------------
@lru_cache(maxsize=4)
def _font(bold: bool):
    # matplotlib is heavy: imported on first measurement, not with qwell.report
    from matplotlib.font_manager import FontProperties, findfont, get_font

    return get_font(findfont(FontProperties(weight="bold" if bold else "normal")))


@lru_cache(maxsize=4)
def _charmap(bold: bool) -> frozenset:
    return frozenset(_font(bold).get_charmap())


def drawable(text: str, bold: bool = False) -> str:
    """``text`` with every character the page font has no glyph for replaced by '?'
    (an emoji in a stack name would otherwise stop the PDF writer)."""
    text = str(text)
    if text.isascii() and text.isprintable():
        return text
    have = _charmap(bold)
    return "".join(c if (ord(c) in have and c.isprintable()) else "?" for c in text)


@lru_cache(maxsize=4096)
def _char_width(ch: str, bold: bool) -> float:
    """Unhinted advance width of one character at 10 pt [pt] (cached)."""
    # (matplotlib: heavy, imported on first use; the flag moved in matplotlib 3.10)
    try:
        from matplotlib.ft2font import LoadFlags
        flags = LoadFlags.NO_HINTING
    except ImportError:  # matplotlib < 3.10
        from matplotlib.ft2font import LOAD_NO_HINTING as flags

    font = _font(bold)
    font.set_size(100.0, 72.0)
    if ord(ch) not in _charmap(bold):
        ch = "?"  # drawn as '?' (see drawable)
    glyph = font.load_char(ord(ch), flags=flags)
    return glyph.linearHoriAdvance / 65536.0 / 10.0


@lru_cache(maxsize=20000)
def text_width(text: str, size: float, bold: bool = False) -> float:
    """Width of one line of text [pt] in the default sans font.

    Sum of cached per-character advances (kerning ignored) plus 2 %: never
    narrower than the rendered text, and much faster than measuring each string.
    """
    return 1.02 * size / 10.0 * sum(_char_width(c, bold) for c in str(text))


def wrap(text: str, width_pt: float, size: float, bold: bool = False) -> list[str]:
    """Greedy word wrap by measured width; words longer than a line are split."""
    limit = width_pt + 0.05   # measured widths are exact sums: allow rounding
    out = []
    for para in str(text).split("\n"):
        words = para.split(" ")
        line = ""
        for w in words:
            cand = w if not line else line + " " + w
            if text_width(cand, size, bold) <= limit:
                line = cand
                continue
            if line:
                out.append(line)
            while text_width(w, size, bold) > limit and len(w) > 1:
                k = len(w)
                while k > 1 and text_width(w[:k], size, bold) > limit:
                    k -= 1
                out.append(w[:k])
                w = w[k:]
            line = w
        out.append(line)
    return out


@dataclass
class Item:
    """One placed mark on a page (text, rule, shaded rectangle or drawing) [pt]."""

    kind: str                     # 'text' | 'rect' | 'line' | 'figure'
    x: float = 0.0
    y: float = 0.0                # top (text) or bottom (rect) [pt from the page bottom]
    w: float = 0.0
    h: float = 0.0
    text: str = ""
    size: float = TEXT_FONT
    bold: bool = False
    ha: str = "left"
    color: str = "black"
    draw: object = None


class Flow:
    """Places blocks on pages top to bottom; each page is a list of :class:`Item`."""

    def __init__(self):
        self.pages: list[list[Item]] = []
        self.new_page()

    def new_page(self):
        self.pages.append([])
        self.y = PAGE_H_PT - MARGIN_T

    @property
    def room(self) -> float:
        return self.y - BODY_BOTTOM

    def ensure(self, h: float):
        if h > self.room and self.y < PAGE_H_PT - MARGIN_T - 1.0:
            self.new_page()

    def add(self, item: Item):
        self.pages[-1].append(item)


@dataclass(frozen=True)
class Heading:
    """A bold heading kept on one page with the next ``keep`` points (default three lines)."""

    text: str
    size: float = 13.0
    keep: float = 3 * TEXT_FONT * 1.35

    def place(self, flow: Flow):
        lines = wrap(self.text, BODY_W, self.size, True)
        h = len(lines) * self.size * 1.3 + 6.0
        flow.ensure(h + self.keep)    # keep with what follows
        flow.y -= 4.0
        for ln in lines:
            flow.add(Item("text", MARGIN_L, flow.y, text=ln, size=self.size, bold=True))
            flow.y -= self.size * 1.3
        flow.y -= 2.0


@dataclass(frozen=True)
class Paragraph:
    """Wrapped text, optionally with a hanging ``bullet``; breaks across pages by line."""

    text: str
    size: float = TEXT_FONT
    bullet: str = ""
    color: str = "black"
    gap_after: float = 3.0

    def place(self, flow: Flow):
        indent = text_width(self.bullet + " ", self.size) if self.bullet else 0.0
        lines = wrap(self.text, BODY_W - indent, self.size)
        lh = self.size * 1.3
        for i, ln in enumerate(lines):
            flow.ensure(lh)
            if i == 0 and self.bullet:
                flow.add(Item("text", MARGIN_L, flow.y, text=self.bullet, size=self.size,
                               color=self.color))
            flow.add(Item("text", MARGIN_L + indent, flow.y, text=ln, size=self.size,
                           color=self.color))
            flow.y -= lh
        flow.y -= self.gap_after


@dataclass(frozen=True)
class Table:
    """A table; ``aligns`` per column ('l' or 'r'); ``wrap`` columns may wrap."""

    headers: list
    rows: list
    aligns: list = None
    wrap: tuple = ()
    size: float = TABLE_FONT
    title: str = ""
    zebra: bool = True

    def _layout(self):
        n = len(self.headers)
        aligns = self.aligns or ["l"] * n
        pad = 6.0
        for size in (self.size, max(self.size - 0.5, MIN_FONT), MIN_FONT):
            widths = []
            for c in range(n):
                cells = [str(r[c]) for r in self.rows] + [str(self.headers[c])]
                widths.append(max(max(text_width(x, size, i == len(cells) - 1)
                                      for ln in [cell] for x in ln.split("\n"))
                                  for i, cell in enumerate(cells)) + pad)
            if sum(widths) <= BODY_W:
                return size, widths, aligns
        # still too wide: shrink wrappable columns (or the widest ones) to share the rest
        wrap_cols = list(self.wrap) or sorted(range(n), key=lambda c: -widths[c])[:1]
        fixed = sum(w for c, w in enumerate(widths) if c not in wrap_cols)
        left = max(BODY_W - fixed, 40.0 * len(wrap_cols))
        share = sum(widths[c] for c in wrap_cols)
        for c in wrap_cols:
            widths[c] = max(left * widths[c] / share, 40.0)
        return size, widths, aligns

    def place(self, flow: Flow):
        size, widths, aligns = self._layout()
        lh = size * 1.3
        pad = 3.0
        scale = min(1.0, BODY_W / sum(widths))
        widths = [w * scale for w in widths]
        xs = np.concatenate([[MARGIN_L], MARGIN_L + np.cumsum(widths)])

        def cell_lines(text, c, bold=False):
            out = []
            for part in str(text).split("\n"):
                out += wrap(part, widths[c] - 2 * pad, size, bold)
            return out

        head = [cell_lines(h, c, True) for c, h in enumerate(self.headers)]
        head_h = max(len(x) for x in head) * lh + 4.0

        def put_header(cont: bool):
            if self.title:
                t = self.title + (" (continued)" if cont else "")
                flow.add(Item("text", MARGIN_L, flow.y, text=t, size=size + 1, bold=True))
                flow.y -= (size + 1) * 1.35
            for c, lines in enumerate(head):
                for k, ln in enumerate(lines):
                    x = xs[c] + pad if aligns[c] == "l" else xs[c + 1] - pad
                    flow.add(Item("text", x, flow.y - k * lh, text=ln, size=size, bold=True,
                                   ha="left" if aligns[c] == "l" else "right"))
            flow.y -= head_h
            flow.add(Item("line", MARGIN_L, flow.y + 2.0, w=xs[-1] - MARGIN_L))

        title_h = (size + 1) * 1.35 if self.title else 0.0
        first = [cell_lines(x, c) for c, x in enumerate(self.rows[0])] if self.rows else [[""]]
        flow.ensure(title_h + head_h + max(len(x) for x in first) * lh + 2.0)
        put_header(False)
        for i, row in enumerate(self.rows):
            cells = [cell_lines(x, c) for c, x in enumerate(row)]
            rh = max(len(x) for x in cells) * lh + 1.0
            if rh > flow.room:
                flow.add(Item("line", MARGIN_L, flow.y + 1.0, w=xs[-1] - MARGIN_L))
                flow.new_page()
                put_header(True)
            if self.zebra and i % 2 == 1:
                flow.add(Item("rect", MARGIN_L, flow.y - rh + 1.5 + 0.25 * lh,
                               w=xs[-1] - MARGIN_L, h=rh, color="0.93"))
            for c, lines in enumerate(cells):
                for k, ln in enumerate(lines):
                    x = xs[c] + pad if aligns[c] == "l" else xs[c + 1] - pad
                    flow.add(Item("text", x, flow.y - k * lh, text=ln, size=size,
                                   ha="left" if aligns[c] == "l" else "right"))
            flow.y -= rh
        flow.add(Item("line", MARGIN_L, flow.y + 1.0, w=xs[-1] - MARGIN_L))
        flow.y -= 8.0


@dataclass(frozen=True)
class FigureBlock:
    """A drawing of ``height`` points: ``draw(fig, rect_in_figure_fractions)``."""

    height: float
    draw: object

    def place(self, flow: Flow):
        h = min(self.height, PAGE_H_PT - MARGIN_T - BODY_BOTTOM)
        flow.ensure(h)
        flow.add(Item("figure", MARGIN_L, flow.y - h, w=BODY_W, h=h, draw=self.draw))
        flow.y -= h + 6.0


@dataclass(frozen=True)
class PageBreak:
    """Start a new page unless the current one is empty."""

    def place(self, flow: Flow):
        if flow.pages[-1]:
            flow.new_page()



# ---------------------------------------------------------------------------
# rendering
# ---------------------------------------------------------------------------
@lru_cache(maxsize=4096)
def _advance(ch: str, size: float, bold: bool) -> float:
    """Unhinted advance of one character at ``size`` [pt] (characters without a glyph are
    drawn as '?')."""
    return size / 10.0 * _char_width(ch, bold)


def _line_width(text: str, size: float, bold: bool) -> float:
    """Width matplotlib aligns one line of text by [pt]: the sum of the advances (kerning
    ignored: a fraction of a point)."""
    return sum(_advance(c, size, bold) for c in text)


class _PageText:
    """Every text item of a page drawn straight through the renderer, as one artist.

    Matplotlib's ``Text`` artist measures each string once more before drawing
    it (shaping the whole line); the page's items are placed already, so this
    layer computes the same anchor from cached per-character metrics: the
    left edge (``ha='left'``) or the advance width (``'right'``, ``'center'``)
    horizontally, and the top of the box of the line's glyphs and of 'lp'
    (``va='top'``, matplotlib's rule) vertically.  The output is the same
    glyphs at the same places, up to kerning (a fraction of a point).
    """

    def __init__(self, texts):
        # texts: (x_pt, top_pt, text, size_pt, bold, ha, color)
        self.texts = texts
        self._vertical: dict = {}

    def _ascent_descent(self, renderer, ch: str, prop, key) -> tuple:
        """Height above the baseline and depth below it of ``ch`` [pt], measured once."""
        k = (ch,) + key
        got = self._vertical.get(k)
        if got is None:
            got = _VERTICAL.get((type(renderer).__name__,) + k)
        if got is None:
            _, h, d = renderer.get_text_width_height_descent(ch, prop, ismath=False)
            got = (h - d, d)
            _VERTICAL[(type(renderer).__name__,) + k] = got
        self._vertical[k] = got
        return got

    def _baseline_drop(self, renderer, text: str, prop, key) -> float:
        """Distance from the top of the line's box to its baseline [pt], as matplotlib's
        ``va='top'`` has it: box height max(h_text, h_lp) minus depth max(d_text, d_lp)."""
        a_lp, d_lp = self._ascent_descent(renderer, "lp", prop, key)
        marks = [self._ascent_descent(renderer, c, prop, key) for c in set(text)]
        a_t = max(m[0] for m in marks)
        d_t = max(m[1] for m in marks)
        return max(a_t + d_t, a_lp + d_lp) - max(d_t, d_lp)

    def artist(self):
        # matplotlib is heavy: imported when a page is rendered
        from matplotlib.artist import Artist
        from matplotlib.font_manager import FontProperties

        layer = self
        props: dict = {}

        class _Layer(Artist):
            zorder = 3

            def draw(self, renderer):
                if not self.get_visible():
                    return
                gc = renderer.new_gc()
                for x, top, text, size, bold, ha, color in layer.texts:
                    if not text:
                        continue
                    key = (float(size), bool(bold))
                    prop = props.get(key)
                    if prop is None:
                        prop = props[key] = FontProperties(size=size,
                                                           weight="bold" if bold else "normal")
                    if ha == "right":
                        x = x - _line_width(text, size, bold)
                    elif ha == "center":
                        x = x - 0.5 * _line_width(text, size, bold)
                    gc.set_foreground(color)
                    renderer.draw_text(gc, x, top - layer._baseline_drop(renderer, text, prop, key),
                                       text, prop, 0.0)
                gc.restore()

        return _Layer()


#: (renderer type, text, size, bold) -> (ascent, descent) [pt], shared by the pages
_VERTICAL: dict = {}


def _render_page(items, footer, pdf):
    # matplotlib is heavy: imported when a page is rendered
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Rectangle

    fig = Figure(figsize=(PAGE_W_PT / 72.0, PAGE_H_PT / 72.0), dpi=72)
    FigureCanvasAgg(fig)
    W, H = PAGE_W_PT, PAGE_H_PT
    texts = []
    for it in items:
        if it.kind == "text":
            text = drawable(it.text, it.bold)
            if "\n" in text:
                fig.text(it.x / W, it.y / H, text, fontsize=it.size, ha=it.ha, va="top",
                         fontweight="bold" if it.bold else "normal", color=it.color,
                         parse_math=False)
            else:
                texts.append((it.x, it.y, text, it.size, it.bold, it.ha, it.color))
        elif it.kind == "line":
            fig.add_artist(Line2D([it.x / W, (it.x + it.w) / W], [it.y / H, it.y / H],
                                  lw=0.6, color="0.3", transform=fig.transFigure))
        elif it.kind == "rect":
            fig.add_artist(Rectangle((it.x / W, it.y / H), it.w / W, it.h / H, lw=0,
                                     facecolor=it.color, transform=fig.transFigure, zorder=-1))
        elif it.kind == "figure":
            it.draw(fig, (it.x / W, it.y / H, it.w / W, it.h / H))
    fig.add_artist(Line2D([MARGIN_L / W, (W - MARGIN_R) / W], [FOOTER_TOP / H] * 2, lw=0.5,
                          color="0.5", transform=fig.transFigure))
    y = FOOTER_TOP - 4.0
    for ln in footer:
        for sub in wrap(ln, BODY_W, MIN_FONT):
            texts.append((MARGIN_L, y, drawable(sub), MIN_FONT, False, "left", "0.25"))
            y -= MIN_FONT * 1.3
    fig.add_artist(_PageText(texts).artist())
    pdf.savefig(fig)



def typeset_pdf(pages, footers, metadata) -> bytes:
    """PDF bytes of placed pages (nothing written to disk).

    Parameters
    ----------
    pages : sequence of list of Item
        What :class:`Flow` placed, one list per page.
    footers : sequence of list of str
        Footer lines of each page (wrapped to the body width, 7 pt).
    metadata : Mapping
        PDF document information (Title, Creator, Subject, CreationDate).
    """
    # matplotlib is heavy: imported when a PDF is rendered, not with qwell.report
    import matplotlib
    from matplotlib.backends.backend_pdf import PdfPages

    buf = io.BytesIO()
    with matplotlib.rc_context({"pdf.fonttype": 3, "axes.unicode_minus": False}):
        with PdfPages(buf, metadata=dict(metadata)) as pdf:
            for items, footer in zip(pages, footers):
                _render_page(items, footer, pdf)
    return buf.getvalue()
