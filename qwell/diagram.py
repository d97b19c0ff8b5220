"""Band diagram with subband states: the PNG of ``qwell report`` and its first PDF page.

What is drawn
-------------
* the conduction edge along z and, when a chosen transition involves holes
  (or only hole states exist), the heavy- and light-hole edges;
* the layers, shaded alternately (:func:`qwell.plots.shade_layers`) and
  labelled with their names and materials in a strip above the plot
  (horizontal when the text fits the layer, rotated otherwise; layers too
  narrow even for rotated text are listed under the plot);
* each state's ``|psi|^2`` in its own colour (:data:`STATE_COLOURS`) on a
  baseline at the state energy, in the direction of increasing carrier
  energy (up for electrons, down for holes), on one scale per panel: the
  largest peak is a fixed fraction of the panel's energy span, so it stays
  clearly visible in multi-well stacks (not shrunk to the smallest spacing);
* the state's label at the peak of its ``|psi|^2`` (where it overlaps no other
  label), and every label in a column right of the plot, pushed apart so they
  never overlap (:func:`spread_positions`), with leader lines;
* minibands of repeated periods (:func:`miniband_groups`) shaded as bands in
  their colour, with only their bottom, middle and top states drawn and a
  note saying how many states are shown;
* the chosen transitions as arrows above their labels (a label never hides
  its arrow), labelled with name and wavelength, staggered so the labels do
  not overlap.

When conduction and valence states are far apart in energy (an interband
design, gap ~1 eV), the figure uses two panels sharing the z axis:
conduction above, valence below, with break marks between them.

Look: the colour-blind-safe palette and line styles of
:data:`qwell.plots.BAND_STYLE` (line styles differ, so the figure reads in
greyscale print), no decoration.  Internal units: z in nm, energies in eV.
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass

import numpy as np

from .bands import band_of_label
from .fileio import atomic_write_bytes
from .plots import BAND_STYLE, shade_layers
from .spectral import auto_unit, from_eV, unit_label

__all__ = [
    "DIAGRAM_SIZE_IN",
    "DIAGRAM_DPI",
    "DiagramInfo",
    "spread_positions",
    "STATE_COLOURS",
    "miniband_groups",
    "hole_bands_shown",
    "draw_band_diagram",
    "band_diagram_figure",
    "band_diagram_png",
    "save_band_diagram",
]

#: Size of the stand-alone diagram (inches) and its resolution: 1200 x 750 pixels.
DIAGRAM_SIZE_IN = (10.0, 6.25)
DIAGRAM_DPI = 120

_HOLE_BANDS = ("heavy_hole", "light_hole")
_FONT = 8.0          # label font size [pt]
_TICK_FONT = 8.0
_PSI_CUT = 0.01      # |psi|^2 below this fraction of its peak is not drawn
_PSI_HEIGHT = 0.15   # the largest |psi|^2 of a panel is drawn this fraction of its span high
_GROUP_MIN = 4       # a miniband holding this many states or more is drawn as a group
_GROUP_DRAWN = 3     # states drawn (and labelled) per grouped miniband: bottom, middle, top
_SINGLES_MAX = 30    # a band with more single (ungrouped) states than this draws only
_SINGLES_DRAWN = 16  # this many of them (long stacks without minibands, e.g. under bias)

#: One colour per state, cycled in energy order within a panel (our own choice: dark,
#: saturated hues that stay apart on white and in greyscale print by their lightness).
STATE_COLOURS = ("#1b4f9c", "#c0392b", "#1e8449", "#8e44ad", "#b9770e", "#117a8b",
                 "#7b241c", "#5d6d7e", "#a93226", "#196f3d")
#: Line style of a band's states (the band-edge styles of BAND_STYLE tell the edges apart).
_STATE_STYLE = {"conduction": "-", "heavy_hole": "--", "light_hole": ":"}


@dataclass(frozen=True)
class DiagramInfo:
    """What :func:`draw_band_diagram` drew (for reports and tests).

    Attributes
    ----------
    panels : tuple of str
        ``('conduction',)``, ``('conduction', 'valence')`` or ``('all',)``.
    bands : tuple of str
        Bands whose edges were drawn.
    state_labels : tuple of str
        Labels of the states drawn.
    transition_labels : tuple of str
        Texts of the transition arrows.
    unlabelled_layers : tuple of str
        Layers too narrow to carry a label in the strip (listed under the plot).
    axes : tuple
        The matplotlib axes of the energy panels (top to bottom).
    states_drawn : int
        States whose ``|psi|^2`` was drawn.
    states_total : int
        States of the solution (grouped minibands draw a representative few).
    groups : tuple of str
        Grouped minibands, e.g. ``'e1–e50: 50 states, 3 drawn'``.
    """

    panels: tuple
    bands: tuple
    state_labels: tuple
    transition_labels: tuple
    unlabelled_layers: tuple
    axes: tuple
    fermi_label: str | None = None
    states_drawn: int = 0
    states_total: int = 0
    groups: tuple = ()


# ---------------------------------------------------------------------------
# small pure helpers
# ---------------------------------------------------------------------------
def spread_positions(values, min_gap: float, lo: float = -math.inf, hi: float = math.inf) -> np.ndarray:
    """Move 1-D label positions apart to at least ``min_gap``, keeping their order.

    Overlapping neighbours are merged into clusters; each cluster is centred
    on the mean of its members' wanted positions (the least-squares
    placement) and clamped into ``[lo, hi]``; clusters that then overlap merge
    again, until every gap is at least ``min_gap``.

    Parameters
    ----------
    values : array_like
        Wanted positions (any order).
    min_gap : float
        Smallest allowed distance between neighbours (same unit).
    lo, hi : float
        Range the positions should stay in (if it is too short for all of
        them, the cluster is centred on it and overflows both ends equally).

    Returns
    -------
    numpy.ndarray
        Adjusted positions in the order of ``values``.
    """
    v = np.asarray(values, dtype=float)
    n = v.size
    if n == 0:
        return v.copy()
    order = np.argsort(v, kind="stable")
    want = v[order]
    # each cluster: [first index, count, start position]
    clusters: list[list] = []

    def place(first, count):
        start = float(np.mean(want[first:first + count])) - 0.5 * (count - 1) * min_gap
        length = (count - 1) * min_gap
        if length <= hi - lo:
            start = min(max(start, lo), hi - length)
        elif math.isfinite(lo) and math.isfinite(hi):
            start = 0.5 * (lo + hi) - 0.5 * length
        return start

    for i in range(n):
        clusters.append([i, 1, place(i, 1)])
        while len(clusters) > 1:
            a, b = clusters[-2], clusters[-1]
            if a[2] + (a[1] - 1) * min_gap + min_gap <= b[2] + 1e-12 * max(1.0, abs(min_gap)):
                break
            merged = [a[0], a[1] + b[1], 0.0]
            merged[2] = place(merged[0], merged[1])
            clusters[-2:] = [merged]
    out_sorted = np.empty(n)
    for first, count, start in clusters:
        out_sorted[first:first + count] = start + min_gap * np.arange(count)
    out = np.empty(n)
    out[order] = out_sorted
    return out


def hole_bands_shown(levels, transitions) -> bool:
    """Whether the hole edges "matter": a chosen transition involves holes, or only holes have states."""
    if any(getattr(t, "kind", "") == "interband" for t in transitions):
        return True
    cond = levels.get("conduction")
    has_e = cond is not None and len(cond.states) > 0
    has_h = any(b in levels and len(levels[b].states) for b in _HOLE_BANDS)
    return has_h and not has_e


def miniband_groups(lev, min_states: int = _GROUP_MIN) -> list:
    """States of one band's Levels grouped by the miniband (Bloch) they lie in.

    Returns ``[(miniband or None, [states])]`` in energy order: one entry per
    miniband holding at least ``min_states`` states of the finite stack (a
    long repeat block), and a one-state entry for every other state.
    """
    states = list(getattr(lev, "states", ()))
    out, used = [], set()
    for mb in getattr(lev, "minibands", ()) or ():
        lo, hi = sorted((mb.bottom_eV, mb.top_eV))
        tol = 1e-6 + 1e-3 * abs(hi - lo)
        inside = [s for s in states if lo - tol <= s.energy_eV <= hi + tol
                  and s.label not in used]
        if len(inside) >= min_states:
            out.append((mb, inside))
            used.update(s.label for s in inside)
    for s in states:
        if s.label not in used:
            out.append((None, [s]))
    out.sort(key=lambda g: min(_carrier(s) for s in g[1]))
    return out


def _thin_singles(entries, transitions) -> tuple:
    """``(entries, n)``: a band's diagram entries with at most :data:`_SINGLES_DRAWN` single
    states when it has more than :data:`_SINGLES_MAX` (a long stack without minibands, e.g.
    under bias): those of the chosen transitions and the rest evenly spread in energy; ``n``
    is the number of single states before thinning (0 when nothing was left out)."""
    singles = [k for k, (mb, _, _) in enumerate(entries) if mb is None]
    if len(singles) <= _SINGLES_MAX:
        return entries, 0
    named = {x for t in transitions for x in (getattr(t, "initial", None), getattr(t, "final", None))}
    keep = {k for k in singles if entries[k][1][0].label in named}
    rest = [k for k in singles if k not in keep]
    room = max(_SINGLES_DRAWN - len(keep), 0)
    if room and rest:
        step = (len(rest) - 1) / max(room - 1, 1)
        keep.update(rest[round(i * step)] for i in range(min(room, len(rest))))
    return [e for k, e in enumerate(entries) if entries[k][0] is not None or k in keep], \
        len(singles)


def _carrier(state) -> float:
    """Carrier-convention energy of a state (up for electrons, down the diagram for holes)."""
    e = getattr(state, "carrier_energy_eV", None)
    return float(state.energy_eV if e is None else e)


def _representatives(states, n: int = _GROUP_DRAWN) -> list:
    """Bottom, middle and top states (carrier-energy order) of a grouped miniband."""
    order = sorted(states, key=_carrier)
    if len(order) <= n:
        return order
    idx = sorted({round(k * (len(order) - 1) / (n - 1)) for k in range(n)})
    return [order[i] for i in idx]


# ---------------------------------------------------------------------------
# drawing
# ---------------------------------------------------------------------------
def _edge_array(profile, band):
    return {"conduction": profile.conduction_edge_eV, "heavy_hole": profile.heavy_hole_edge_eV,
            "light_hole": profile.light_hole_edge_eV}[band]


def _short_material(text: str) -> str:
    """Compact material text for the layer strip ('A -> B (shape)' -> 'A→B')."""
    if " -> " in text:
        a, b = text.split(" -> ", 1)
        b = b.split(" (", 1)[0]
        return f"{a}→{b}"
    return text


def _text_extent_pt(fig, text, size, rotation=0.0):
    """(width, height) of a text in points, measured with the figure's renderer."""
    renderer = fig.canvas.get_renderer()
    t = fig.text(0, 0, text, fontsize=size, rotation=rotation, parse_math=False)
    bb = t.get_window_extent(renderer=renderer)
    t.remove()
    scale = 72.0 / fig.dpi
    return bb.width * scale, bb.height * scale


def _wrap_words(fig, text, width_pt, size):
    """Greedy word wrap of ``text`` to ``width_pt`` (measured on the figure)."""
    lines, line = [], ""
    for w in text.split(" "):
        cand = w if not line else line + " " + w
        if not line or _text_extent_pt(fig, cand, size)[0] <= width_pt:
            line = cand
        else:
            lines.append(line)
            line = w
    if line:
        lines.append(line)
    return lines


def _state_curve(state, band_sign, amp_eV, zlo, zhi, *, absolute: bool = False):
    """(z, y) of the drawn |psi|^2 curve of a state, or None without psi.

    ``amp_eV`` is the height of the state's own peak, or with ``absolute``
    the height per unit |psi|^2 [eV nm] (one scale for every state of a panel).
    """
    if state.z_nm is None or state.psi is None:
        return None
    z = np.asarray(state.z_nm, dtype=float)
    p2 = np.asarray(state.psi, dtype=float) ** 2
    peak = float(np.max(p2)) if p2.size else 0.0
    if peak <= 0:
        return None
    keep = (p2 >= _PSI_CUT * peak) & (z >= zlo) & (z <= zhi)
    if not np.any(keep):
        return None
    idx = np.nonzero(keep)[0]
    sl = slice(idx[0], idx[-1] + 1)
    zz = z[sl]
    yy = state.energy_eV + band_sign * amp_eV * p2[sl] / (1.0 if absolute else peak)
    return zz, yy


def _layer_list(labels) -> str:
    """``'qw (×50), bar'``: the copies of a repeated layer (``name#k``) counted, not listed."""
    counts: dict = {}
    for lab in labels:
        base = lab.split("#", 1)[0]
        counts[base] = counts.get(base, 0) + 1
    return ", ".join(b if n == 1 else f"{b} (×{n})" for b, n in counts.items())


def _peak_of(state) -> float:
    """Largest |psi|^2 of a state [1/nm] (0 without a wavefunction)."""
    if state.psi is None:
        return 0.0
    p2 = np.asarray(state.psi, dtype=float) ** 2
    return float(np.max(p2)) if p2.size else 0.0


def _entry_label(mb, states) -> str:
    """Label of a state (``e1``, ``e3*`` quasi-bound) or of a grouped miniband."""
    if mb is None:
        s = states[0]
        return s.label + ("" if s.bound else "*")
    return f"{states[0].label}–{states[-1].label} ({len(states)})"


def _peak_label(ax, state, zz, yy, colour, fontsize, placed, renderer) -> None:
    """The state's label at the peak of its drawn |psi|^2, unless it would overlap another."""
    i = int(np.argmax(np.abs(yy - state.energy_eV)))
    up = yy[i] >= state.energy_eV
    t = ax.text(zz[i], yy[i], state.label, fontsize=fontsize - 0.5, color=colour, ha="center",
                va="bottom" if up else "top", zorder=8, parse_math=False, clip_on=True,
                bbox=dict(boxstyle="square,pad=0.05", fc="white", ec="none", alpha=0.8))
    bb = t.get_window_extent(renderer=renderer)
    ax_bb = ax.get_window_extent(renderer=renderer)
    inside = ax_bb.x0 <= bb.x0 and bb.x1 <= ax_bb.x1 and ax_bb.y0 <= bb.y0 and bb.y1 <= ax_bb.y1
    if not inside or any(bb.overlaps(o) for o in placed):
        t.remove()
        return
    placed.append(bb)


def _panel_plan(profile, levels, bands_shown, transitions):
    """Group the shown bands into panels: [(name, [bands])]."""
    has_c = "conduction" in bands_shown
    holes = [b for b in bands_shown if b in _HOLE_BANDS]
    if not holes:
        return [("conduction", ["conduction"])]
    if not has_c:
        return [("valence", holes)]

    def rng(bands):
        vals = []
        for b in bands:
            a = _edge_array(profile, b)
            vals += list(a[np.isfinite(a)])
            if b in levels:
                vals += [s.energy_eV for s in levels[b].states]
        return (min(vals), max(vals)) if vals else (0.0, 0.0)

    c_lo, c_hi = rng(["conduction"])
    v_lo, v_hi = rng(holes)
    gap = c_lo - v_hi
    spans = (c_hi - c_lo) + (v_hi - v_lo)
    if gap > 0.6 * spans:
        return [("conduction", ["conduction"]), ("valence", holes)]
    return [("all", ["conduction"] + holes)]


def draw_band_diagram(fig, profile, levels, *, transitions=(), rect=(0.0, 0.0, 1.0, 1.0),
                      title=None, show_holes=None, fontsize: float = _FONT,
                      fermi_level_eV: float | None = None) -> DiagramInfo:
    """Draw the band diagram with states into ``rect`` of ``fig``.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        Figure on a canvas with a renderer (Agg); text sizes are measured on it.
    profile : qwell.profile.Profile
    levels : dict
        Band name -> :class:`~qwell.solvers.results.Levels` (exact solver,
        with wavefunctions).
    transitions : sequence of qwell.optics.Transition
        Transitions drawn as arrows, labelled with name and line (nm, µm or THz by region).
    rect : (left, bottom, width, height)
        Area of the figure to use, in figure fractions; axes labels, the
        layer strip and the state-label column fit inside it.
    title : str, optional
        Title above the layer strip.
    show_holes : bool, optional
        Force the hole edges on or off; default :func:`hole_bands_shown`.
    fontsize : float
        Font size of labels [pt] (>= 7 for print).
    fermi_level_eV : float, optional
        Fermi level of a doped (self-consistent) stack [eV, band-diagram
        scale]: drawn as a dashed line across the conduction panel and
        labelled.

    Returns
    -------
    DiagramInfo
    """
    # matplotlib is heavy: imported when a diagram is drawn, not with qwell.diagram
    from matplotlib.lines import Line2D
    from matplotlib.patches import ConnectionPatch, Patch

    transitions = tuple(transitions)
    fw_pt = fig.get_figwidth() * 72.0
    fh_pt = fig.get_figheight() * 72.0
    rl, rb, rw, rh = rect
    left_pt, bottom_pt = rl * fw_pt, rb * fh_pt
    width_pt, height_pt = rw * fw_pt, rh * fh_pt

    # -- which bands ------------------------------------------------------
    holes_on = hole_bands_shown(levels, transitions) if show_holes is None else bool(show_holes)
    bands_shown = []
    for b in ("conduction",) + _HOLE_BANDS:
        if b != "conduction" and not holes_on:
            continue
        arr = _edge_array(profile, b)
        if np.any(np.isfinite(arr)):
            bands_shown.append(b)
    if not bands_shown:
        bands_shown = ["conduction"]
    panels = _panel_plan(profile, levels, bands_shown, transitions)

    # -- layer strip text plan (measured) ---------------------------------
    z0 = float(profile.layers[0].start_nm)
    z1 = float(profile.layers[-1].end_nm)
    # one entry per single state or grouped miniband: (band, miniband, states, drawn states)
    entries = {}
    for b, lev in levels.items():
        entries[b] = [(mb, st, st if mb is None else _representatives(st))
                      for mb, st in miniband_groups(lev)]
    n_total = sum(len(st) for es in entries.values() for _, st, _ in es)
    thinned = []
    for b in entries:
        if b not in bands_shown:
            continue
        entries[b], n_single = _thin_singles(entries[b], transitions)
        if n_single:
            thinned.append((b, n_single, sum(1 for mb, _, _ in entries[b] if mb is None)))
    all_labels = [_entry_label(mb, st) for es in entries.values() for mb, st, _ in es]
    n_draw = sum(len(dr) for es in entries.values() for _, _, dr in es)
    n_grouped = sum(1 for es in entries.values() for mb, _, _ in es if mb is not None)
    label_w = max([_text_extent_pt(fig, t, fontsize)[0] for t in all_labels] + [20.0])
    margin_l, margin_r = 58.0, 14.0 + label_w + 8.0     # y labels | state-label column
    quasi = any(t.endswith("*") for t in all_labels)
    legend_h = 3.4 * fontsize + 10.0
    xlabel_h = 2.6 * fontsize + 8.0
    title_h = (1.6 * (fontsize + 2) + 4.0) if title else 0.0
    label_pitch = fontsize * 1.25      # vertical distance between state labels [pt]
    n_cols = {}                        # panel name -> columns of state labels
    for _pass in range(3):
        ax_w = max(width_pt - margin_l - margin_r, 50.0)
        pt_per_nm = ax_w / max(z1 - z0, 1e-9)
        strip_items = []   # (x_center_nm, text, rotation)
        unlabelled = []
        strip_need = 2.4 * fontsize + 6.0
        for lp in profile.layers:
            wpt = (lp.end_nm - lp.start_nm) * pt_per_nm
            two = f"{lp.label}\n{_short_material(lp.material)}"
            tw, th = _text_extent_pt(fig, two, fontsize)
            xc = 0.5 * (lp.start_nm + lp.end_nm)
            if tw + 4.0 <= wpt:
                strip_items.append((xc, two, 0.0))
                strip_need = max(strip_need, th + 6.0)
                continue
            one = f"{lp.label}  {_short_material(lp.material)}"
            rw_, rh_ = _text_extent_pt(fig, one, fontsize, rotation=90.0)
            if rw_ + 2.0 <= wpt:
                strip_items.append((xc, one, 90.0))
                strip_need = max(strip_need, rh_ + 6.0)
                continue
            rw_, rh_ = _text_extent_pt(fig, lp.label, fontsize, rotation=90.0)
            if rw_ + 1.0 <= wpt:
                strip_items.append((xc, lp.label, 90.0))
                strip_need = max(strip_need, rh_ + 6.0)
                continue
            unlabelled.append(lp.label)
        strip_h = min(strip_need, 0.3 * height_pt)
        notes = []
        if quasi:
            notes.append("* quasi-bound state (can escape through a cladding)")
        if n_grouped:
            notes.append(f"{n_draw} of {n_total} states drawn: each miniband of the repeated "
                         f"periods is shaded, with its bottom, middle and top states drawn")
        if thinned:
            shown_total = sum(len(levels[b].states) for b in bands_shown if b in levels)
            shown_draw = sum(len(dr) for b in bands_shown for _, _, dr in entries.get(b, []))
            notes.append(("" if n_grouped else f"{shown_draw} of {shown_total} states drawn: ")
                         + ", ".join(f"{k} of the {n} single {b.replace('_', ' ')} states"
                                     for b, n, k in thinned)
                         + " (evenly spread in energy, with those of the chosen lines)")
        if unlabelled:
            notes.append("narrow layers not labelled above: " + _layer_list(unlabelled))
        note_lines = _wrap_words(fig, ";  ".join(notes), width_pt - margin_l - 8.0,
                                 fontsize) if notes else []
        unl_h = (1.3 * fontsize * len(note_lines) + 3.0) if note_lines else 0.0

        plot_top = bottom_pt + height_pt - title_h - strip_h
        plot_bottom = bottom_pt + legend_h + xlabel_h + unl_h
        gap_pt = 16.0 if len(panels) == 2 else 0.0
        plot_h = max(plot_top - plot_bottom - gap_pt, 60.0)

        # -- per-panel energy ranges and amplitudes ------------------------------
        plan = []
        for pname, pbands in panels:
            edges = []
            states = []
            for b in pbands:
                a = _edge_array(profile, b)
                edges += list(a[np.isfinite(a)])
                if b in levels:
                    states += [(b, s) for s in levels[b].states]
            e_all = edges + [s.energy_eV for _, s in states]
            if fermi_level_eV is not None and "conduction" in pbands:
                e_all.append(fermi_level_eV)
            lo, hi = (min(e_all), max(e_all)) if e_all else (0.0, 1.0)
            span0 = max(hi - lo, 1e-3)
            # one scale for the panel: its largest |psi|^2 peak is _PSI_HEIGHT of the span
            amp = _PSI_HEIGHT * span0
            up = [s.energy_eV + amp for b, s in states if _sign(b) > 0]
            down = [s.energy_eV - amp for b, s in states if _sign(b) < 0]
            lo2 = min([lo] + down)
            hi2 = max([hi] + up)
            span = max(hi2 - lo2, 1e-3)
            ylo = lo2 - 0.08 * span
            yhi = hi2 + 0.08 * span
            if pname == "valence":
                yhi = hi2 + 0.22 * span      # room for interband arrow labels
            plan.append({"name": pname, "bands": pbands, "states": states, "amp": amp,
                         "ylim": (ylo, yhi), "span": yhi - ylo})
        if len(plan) == 2:
            tot = plan[0]["span"] + plan[1]["span"]
            frac0 = float(np.clip(plan[0]["span"] / tot, 0.35, 0.65))
            heights = [frac0 * plot_h, (1 - frac0) * plot_h]
        else:
            heights = [plot_h]
        # more labels than fit in a panel's height: stagger them in columns
        cols = {}
        for p, h in zip(plan, heights):
            n = sum(len(entries.get(b, [])) for b in p["bands"])
            cols[p['name']] = int(min(4, max(1, math.ceil(n * label_pitch / max(0.95 * h, 1.0)))))
        if cols == n_cols or (_pass == 2 and n_cols):
            break   # the layout above was made for these columns
        n_cols = cols
        margin_r = 14.0 + max(n_cols.values()) * (label_w + 6.0) + 2.0

    axes = []
    y_cursor = plot_top
    for p, h in zip(plan, heights):
        rect_ax = (left_pt + margin_l) / fw_pt, (y_cursor - h) / fh_pt, ax_w / fw_pt, h / fh_pt
        ax = fig.add_axes(rect_ax)
        axes.append(ax)
        p["ax"] = ax
        p["height_pt"] = h
        y_cursor -= h + gap_pt
        ax.set_xlim(z0, z1)
        ax.set_ylim(*p["ylim"])
        ax.tick_params(labelsize=_TICK_FONT)
        ax.set_ylabel("energy (eV)", fontsize=fontsize + 1)
    for ax in axes[:-1]:
        ax.tick_params(labelbottom=False)
    axes[-1].set_xlabel("position z (nm)", fontsize=fontsize + 1)

    # -- shading, edges --------------------------------------------------------
    for ax in axes:
        shade_layers(ax, profile, label=False)
    handles = []
    for p in plan:
        for b in p["bands"]:
            c, ls, lab = BAND_STYLE[b]
            arr = _edge_array(profile, b)
            p["ax"].plot(profile.z_nm, arr, color=c, ls=ls, lw=1.8, zorder=3)
            if not any(h.get_label() == lab for h in handles):
                handles.append(Line2D([], [], color=c, ls=ls, lw=1.8, label=lab))
    handles.append(Line2D([], [], color=STATE_COLOURS[0], lw=1.0,
                          label="|ψ|² of a state, on its energy"))
    if n_grouped:
        handles.append(Patch(color=STATE_COLOURS[0], alpha=0.22, lw=0,
                             label="miniband (shaded)"))
    if transitions:
        handles.append(Line2D([], [], color="black", lw=1.0, marker=">", markersize=4,
                              label="chosen line (wavelength)"))

    # -- states (one colour each), miniband groups, labels -----------------------------
    drawn_labels = []
    curves = {}
    peak_boxes = []
    renderer = fig.canvas.get_renderer()
    n_drawn = 0
    group_notes = []
    for p in plan:
        ax = p["ax"]
        ylo, yhi = p["ylim"]
        pentries = [(b, mb, st, dr) for b in p["bands"] for mb, st, dr in entries.get(b, [])]
        pentries.sort(key=lambda e: (p["bands"].index(e[0]), min(_carrier(s) for s in e[2])))
        peaks = [_peak_of(s) for _, _, _, dr in pentries for s in dr]
        panel_peak = max([v for v in peaks if v > 0] + [0.0]) or 1.0
        lab_y, lab_txt, lab_col, lab_e, lab_sign = [], [], [], [], []
        for k, (b, mb, st, dr) in enumerate(pentries):
            col = STATE_COLOURS[k % len(STATE_COLOURS)]
            ls = _STATE_STYLE.get(b, "-")
            sign = _sign(b)
            zext = []
            for s in dr:
                cur = _state_curve(s, sign, p["amp"] / panel_peak, z0, z1, absolute=True)
                n_drawn += 1
                if cur is not None:
                    zz, yy = cur
                    ax.plot(zz, yy, color=col, ls=ls, lw=1.1, zorder=4)
                    ax.plot([zz[0], zz[-1]], [s.energy_eV, s.energy_eV], color=col, lw=0.6,
                            alpha=0.7, zorder=4)
                    curves[s.label] = (zz, np.abs(yy - s.energy_eV))
                    zext += [zz[0], zz[-1]]
                    if mb is None or s is dr[0] or s is dr[-1]:
                        _peak_label(ax, s, zz, yy, col, fontsize, peak_boxes, renderer)
                else:
                    ax.axhline(s.energy_eV, color=col, lw=0.6, ls=ls, zorder=4)
                drawn_labels.append(s.label)
            if mb is not None:
                e_lo = min(x.energy_eV for x in st)
                e_hi = max(x.energy_eV for x in st)
                za, zb = (min(zext), max(zext)) if zext else (z0, z1)
                # a miniband narrower than 1 % of the axis is widened to stay visible as a band
                pad = max(0.0, 0.5 * (0.012 * (yhi - ylo) - (e_hi - e_lo)))
                ax.fill_between([za, zb], [e_lo - pad] * 2, [e_hi + pad] * 2, color=col,
                                alpha=0.22, lw=0, zorder=2)
                group_notes.append(f"{st[0].label}–{st[-1].label}: {len(st)} states, "
                                   f"{len(dr)} drawn")
            e_mid = 0.5 * (min(x.energy_eV for x in st) + max(x.energy_eV for x in st))
            lab_y.append(e_mid)
            lab_txt.append(_entry_label(mb, st))
            lab_col.append(col)
            lab_e.append(e_mid)
            lab_sign.append(sign)
        if not lab_y:
            continue
        gap_data = label_pitch / p["height_pt"] * (yhi - ylo)
        ncol = n_cols.get(p["name"], 1)
        carrier = np.asarray(lab_y) * np.asarray(lab_sign)
        order = np.argsort(carrier, kind="stable")      # first column: lowest carrier energy
        ys = np.empty(len(lab_y))
        xcol = np.empty(len(lab_y))
        for k in range(ncol):
            members = order[k::ncol]
            ys[members] = spread_positions(np.asarray(lab_y)[members], gap_data,
                                           ylo + 0.5 * gap_data, yhi - 0.5 * gap_data)
            xcol[members] = 14.0 + k * (label_w + 6.0)
        trans = ax.get_yaxis_transform()
        for e, y, xo, txt, col in zip(lab_e, ys, xcol, lab_txt, lab_col):
            # leader line behind every label (labels have an opaque background)
            ax.plot([1.0, 1.0 + 4.0 / ax_w, 1.0 + (xo - 1.0) / ax_w], [e, e, y], transform=trans,
                    color=col, lw=0.5, clip_on=False, zorder=1)
            ax.text(1.0 + xo / ax_w, y, txt, transform=trans, fontsize=fontsize, color=col,
                    va="center", ha="left", clip_on=False, zorder=10, parse_math=False,
                    bbox=dict(boxstyle="square,pad=0.1", fc="white", ec="none"))

    # -- Fermi level of a doped stack ---------------------------------------------
    fermi_label = None
    if fermi_level_eV is not None and math.isfinite(fermi_level_eV):
        for p in plan:
            if "conduction" in p["bands"]:
                fermi_label = f"E_F {fermi_level_eV:.4f} eV"
                p["ax"].axhline(fermi_level_eV, color="#CC79A7", ls=(0, (5, 3)), lw=1.1, zorder=5)
                p["ax"].text(0.01, fermi_level_eV, fermi_label,
                             transform=p["ax"].get_yaxis_transform(), fontsize=fontsize,
                             color="#CC79A7", va="bottom", ha="left", zorder=10,
                             parse_math=False,
                             bbox=dict(boxstyle="square,pad=0.1", fc="white", ec="none"))
                handles.append(Line2D([], [], color="#CC79A7", ls=(0, (5, 3)), lw=1.1,
                                      label="Fermi level (self-consistent)"))
                break

    # -- transitions --------------------------------------------------------------
    tr_labels = []
    if transitions:
        tr_labels = _draw_transitions(fig, plan, levels, transitions, curves, z0, z1, fontsize,
                                      ConnectionPatch, placed=peak_boxes)

    # -- strip, title, legend, break marks ---------------------------------------
    strip_rect = ((left_pt + margin_l) / fw_pt, plot_top / fh_pt, ax_w / fw_pt, strip_h / fh_pt)
    sax = fig.add_axes(strip_rect)
    sax.set_xlim(z0, z1)
    sax.set_ylim(0, 1)
    sax.axis("off")
    for i, lp in enumerate(profile.layers):
        if i % 2:
            sax.axvspan(lp.start_nm, lp.end_nm, color="0.92", lw=0, zorder=0)
        sax.axvline(lp.start_nm, color="0.75", lw=0.5)
    sax.axvline(z1, color="0.75", lw=0.5)
    for xc, txt, rot in strip_items:
        sax.text(xc, 0.5, txt, rotation=rot, ha="center", va="center", fontsize=fontsize,
                 color="0.15", parse_math=False, linespacing=1.15)
    if title:
        fig.text((left_pt + margin_l + 0.5 * ax_w) / fw_pt, (plot_top + strip_h + 3.0) / fh_pt,
                 title, ha="center", va="bottom", fontsize=fontsize + 2, parse_math=False)
    if note_lines:
        fig.text((left_pt + margin_l) / fw_pt, (bottom_pt + legend_h + unl_h) / fh_pt,
                 "\n".join(note_lines), ha="left", va="top", fontsize=fontsize, color="0.25",
                 parse_math=False, linespacing=1.2)
    fig.legend(handles=handles, loc="lower center", ncol=min(len(handles), 3),
               fontsize=fontsize, frameon=False,
               bbox_to_anchor=((left_pt + margin_l + 0.5 * ax_w) / fw_pt, bottom_pt / fh_pt),
               bbox_transform=fig.transFigure, handlelength=2.6, columnspacing=1.5)
    if len(axes) == 2:
        _break_marks(axes[0], axes[1])

    return DiagramInfo(panels=tuple(p["name"] for p in plan),
                       bands=tuple(b for p in plan for b in p["bands"]),
                       state_labels=tuple(drawn_labels), transition_labels=tuple(tr_labels),
                       unlabelled_layers=tuple(unlabelled), axes=tuple(axes),
                       fermi_label=fermi_label, states_drawn=n_drawn, states_total=n_total,
                       groups=tuple(group_notes))


def _sign(band: str) -> int:
    return 1 if band == "conduction" else -1


def _find_state(levels, label):
    b = band_of_label(label)
    lev = levels.get(b)
    if lev is None:
        return None
    for s in lev.states:
        if s.label == label:
            return s
    return None


def _panel_of(plan, band):
    for p in plan:
        if band in p["bands"]:
            return p
    return None


def _draw_transitions(fig, plan, levels, transitions, curves, z0, z1, fontsize, ConnectionPatch,
                      placed=()):
    """Arrows between the states of each transition, labels placed without overlap.

    The arrows lie above the labels (a label never hides its arrow), and a
    label is kept clear of the state labels already placed (``placed``:
    display-space boxes)."""
    renderer = fig.canvas.get_renderer()
    # x positions: where both states of a transition live (the lower state's
    # extent when they do not overlap), united over the transitions
    lo, hi = [], []
    for t in transitions:
        ext = [curves[lab][0][[0, -1]] for lab in (t.initial, t.final) if lab in curves]
        if not ext:
            continue
        a_, b_ = max(e[0] for e in ext), min(e[1] for e in ext)
        if b_ <= a_:
            narrow = min(ext, key=lambda e: e[1] - e[0])
            a_, b_ = narrow[0], narrow[1]
        lo.append(a_)
        hi.append(b_)
    a = max(min(lo), z0) if lo else z0
    b = min(max(hi), z1) if hi else z1
    n = len(transitions)
    ax0 = plan[0]["ax"]
    pt_per_nm = ax0.get_window_extent(renderer=renderer).width / (z1 - z0) * 72.0 / fig.dpi
    need = (n + 1) * 16.0 / max(pt_per_nm, 1e-9)       # >= 16 pt between arrows
    if b - a < need:
        mid = 0.5 * (a + b)
        a, b = max(mid - 0.5 * need, z0), min(mid + 0.5 * need, z1)
    xs = [a + (k + 1) * (b - a) / (n + 1) for k in range(n)]
    centre = 0.5 * (a + b)
    placed = list(placed)   # display-space bboxes of labels
    texts = []
    for t, x in zip(transitions, xs):
        si, sf = _find_state(levels, t.initial), _find_state(levels, t.final)
        if si is None or sf is None:
            continue
        lower, upper = (si, sf) if si.energy_eV <= sf.energy_eV else (sf, si)
        pl, pu = _panel_of(plan, lower.band), _panel_of(plan, upper.band)
        if pl is None or pu is None:
            continue
        u = auto_unit(t.energy_eV)  # the unit of the line's spectral region (qwell.spectral)
        label = f"{t.name}  {float(from_eV(t.energy_eV, u)):.4g} {unit_label(u)}"
        style = dict(arrowstyle="-|>", mutation_scale=9, lw=1.1, color="black",
                     shrinkA=0, shrinkB=0)
        if pl is pu:
            ax = pl["ax"]
            ax.annotate("", xy=(x, upper.energy_eV), xytext=(x, lower.energy_eV),
                        arrowprops=style, zorder=9)
            candidates_ax, y_mid = ax, 0.5 * (lower.energy_eV + upper.energy_eV)
        else:
            con = ConnectionPatch(xyA=(x, lower.energy_eV), coordsA=pl["ax"].transData,
                                  xyB=(x, upper.energy_eV), coordsB=pu["ax"].transData,
                                  zorder=9, **style)
            fig.add_artist(con)
            candidates_ax = pl["ax"]
            ylo, yhi = pl["ylim"]
            y_mid = yhi - 0.06 * (yhi - ylo)
        right = x >= centre
        txt = candidates_ax.text(x, y_mid, ("   " + label) if right else (label + "   "),
                                 ha="left" if right else "right", va="center",
                                 fontsize=fontsize, zorder=7, parse_math=False,
                                 bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none",
                                           alpha=0.85))
        _place_without_overlap(txt, candidates_ax, placed, renderer)
        placed.append(txt.get_window_extent(renderer=renderer))
        texts.append(label)
    return texts


def _place_without_overlap(txt, ax, placed, renderer):
    """Shift a text vertically (staggering) until it overlaps no placed bbox."""
    x, y0 = txt.get_position()
    ylo, yhi = ax.get_ylim()
    bb = txt.get_window_extent(renderer=renderer)
    ax_bb = ax.get_window_extent(renderer=renderer)
    step_data = (bb.height + 2.0) / max(ax_bb.height, 1.0) * (yhi - ylo)
    for k in range(0, 40):
        for sgn in ((1,) if k == 0 else (-1, 1)):
            y = y0 + sgn * k * step_data
            if not (ylo + 0.5 * step_data <= y <= yhi - 0.5 * step_data):
                continue
            txt.set_position((x, y))
            bb = txt.get_window_extent(renderer=renderer)
            if bb.x1 > ax_bb.x1 or bb.x0 < ax_bb.x0:   # keep inside the axes: flip sides
                flip = "right" if txt.get_horizontalalignment() == "left" else "left"
                txt.set_horizontalalignment(flip)
                core = txt.get_text().strip()
                txt.set_text(core + "  " if flip == "right" else "  " + core)
                bb = txt.get_window_extent(renderer=renderer)
            if not any(bb.overlaps(o) for o in placed):
                return
    txt.set_position((x, y0))


def _break_marks(ax_top, ax_bottom):
    """Diagonal break marks on the two panels of a broken energy axis."""
    ax_top.spines["bottom"].set_visible(False)
    ax_bottom.spines["top"].set_visible(False)
    ax_top.tick_params(bottom=False)
    d = 0.012
    kw = dict(color="black", clip_on=False, lw=0.9)
    for ax, y in ((ax_top, 0.0), (ax_bottom, 1.0)):
        for x in (0.0, 1.0):
            ax.plot((x - d, x + d), (y - 2 * d, y + 2 * d), transform=ax.transAxes, **kw)


# ---------------------------------------------------------------------------
# stand-alone figure
# ---------------------------------------------------------------------------
def band_diagram_figure(profile, levels, *, transitions=(), title=None, show_holes=None,
                        fermi_level_eV=None):
    """A new figure (:data:`DIAGRAM_SIZE_IN`, :data:`DIAGRAM_DPI`) holding the diagram.

    Returns
    -------
    (matplotlib.figure.Figure, DiagramInfo)
        The caller closes the figure (``matplotlib.pyplot.close``).
    """
    # matplotlib is heavy: imported when a figure is made (Agg: no screen needed)
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig = plt.figure(figsize=DIAGRAM_SIZE_IN, dpi=DIAGRAM_DPI)
    info = draw_band_diagram(fig, profile, levels, transitions=transitions,
                             rect=(0.01, 0.01, 0.98, 0.97), title=title, show_holes=show_holes,
                             fermi_level_eV=fermi_level_eV)
    return fig, info


def band_diagram_png(profile, levels, *, transitions=(), title=None, show_holes=None,
                     fermi_level_eV=None) -> bytes:
    """PNG bytes (1200 x 750 pixels) of the band diagram (see :func:`draw_band_diagram`)."""
    import matplotlib.pyplot as plt  # heavy: imported on first use

    fig, _ = band_diagram_figure(profile, levels, transitions=transitions, title=title,
                                 show_holes=show_holes, fermi_level_eV=fermi_level_eV)
    try:
        buf = io.BytesIO()
        fig.savefig(buf, format="png", dpi=DIAGRAM_DPI)
        return buf.getvalue()
    finally:
        plt.close(fig)


def save_band_diagram(profile, levels, path, *, transitions=(), title=None, protect=(),
                      fermi_level_eV=None):
    """Write the band diagram to ``path`` (PNG) atomically; returns the path."""
    data = band_diagram_png(profile, levels, transitions=transitions, title=title,
                            fermi_level_eV=fermi_level_eV)
    return atomic_write_bytes(path, data, protect=protect)


def plot_band_diagram(ax, solution, *, transitions=(), title=None, show_holes=None,
                      fontsize: float = _FONT) -> DiagramInfo:
    """Draw a solved stack's band diagram in the place of a caller's Axes.

    The diagram may need two panels (conduction and valence bands with a broken
    axis between them) and a label column, so it takes over the area of ``ax``:
    ``ax`` is removed from its figure and the diagram's own axes fill its
    position (returned in :attr:`DiagramInfo.axes`).

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        Axes whose area the diagram fills; its figure must have a canvas with a
        renderer (e.g. ``matplotlib.pyplot.subplots()`` or an Agg figure).
    solution : qwell.levels.Solution
        An exact solve with wavefunctions (:func:`qwell.solve_stack`).
    transitions : sequence of str or qwell.optics.Transition
        Lines drawn as arrows, by name (``'e1-e2'``) or as transitions of
        ``solution``.
    title : str, optional
    show_holes : bool, optional
        Force the hole edges on or off (default: when a hole line is drawn or
        no conduction state exists).
    fontsize : float
        Label font size [pt].

    Returns
    -------
    DiagramInfo

    Examples
    --------
    >>> import matplotlib
    >>> matplotlib.use("Agg")
    >>> import matplotlib.pyplot as plt
    >>> import qwell
    >>> sol = qwell.solve_stack(qwell.load_stack("layers/lwir-detector.yaml"))
    >>> fig, ax = plt.subplots(figsize=(7, 4.5))
    >>> info = qwell.plot_band_diagram(ax, sol, transitions=["e1-e2"])
    >>> info.state_labels[:2]
    ('e1', 'e2')
    """
    fig = ax.figure
    box = ax.get_position()
    ax.remove()
    chosen = tuple(solution.transition(t) if isinstance(t, str) else t for t in transitions)
    return draw_band_diagram(fig, solution.profile, solution.levels, transitions=chosen,
                             rect=(box.x0, box.y0, box.width, box.height), title=title,
                             show_holes=show_holes, fontsize=fontsize)
