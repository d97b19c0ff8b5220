"""Band diagrams read at a glance: own colours, labels at the peaks, visible amplitudes, minibands.

Outside references: Bloch's theorem for a finite superlattice (Kronig & Penney, Proc. R. Soc. A
130, 499 (1931)): the N-period stack's states lie inside the infinite superlattice's minibands,
one per period, which is what the diagram groups; the rest are properties of the drawing checked
on the figure itself (common practice, no source).
"""

from __future__ import annotations

from pathlib import Path

import matplotlib
import numpy as np
import pytest

from qwell.diagram import STATE_COLOURS, band_diagram_figure, miniband_groups
from qwell.levels import solve_stack
from qwell.report import data as report_data
from qwell.stack import load_stack, stack_from_text

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def _state_lines(ax):
    """Drawn |psi|^2 curves: lines in a state colour with more than three points (leader lines have three)."""
    return [ln for ln in ax.lines if ln.get_color() in STATE_COLOURS and len(ln.get_xdata()) > 3]


def test_multi_well_states_own_colours_visible_amplitude_and_peak_labels():
    stack = load_stack(ROOT / "layers" / "midir-emitter.yaml")
    sol = solve_stack(stack, bands="conduction")
    chosen = report_data.default_transitions(sol)
    fig, info = band_diagram_figure(sol.profile, sol.levels, transitions=chosen)
    try:
        ax = info.axes[0]
        lines = _state_lines(ax)
        n = len(sol.states)
        assert len({ln.get_color() for ln in lines}) == min(n, len(STATE_COLOURS))
        # the largest state is clearly visible: its peak rises >= 10 % of the axis height
        ylo, yhi = ax.get_ylim()
        energies = np.array([s.energy_eV for s in sol.states])
        heights = {}
        for ln in lines:
            y = np.asarray(ln.get_ydata())
            below = energies[energies <= np.min(y) + 1e-12]
            k = int(np.argmin(np.abs(energies - below.max())))   # the state it stands on
            heights[sol.states[k].label] = float(np.max(y) - energies[k])
        assert len(heights) == n
        assert max(heights.values()) >= 0.10 * (yhi - ylo)
        # one scale for the panel: heights follow the states' own |psi|^2 peaks
        peaks = {s.label: float(np.max(np.asarray(s.psi) ** 2)) for s in sol.states}
        hmax, pmax = max(heights.values()), max(peaks.values())
        for lab in heights:
            assert heights[lab] / hmax == pytest.approx(peaks[lab] / pmax, rel=1e-6)
        # labels at the peak: each in-plot state label sits at the maximum of its curve
        fig.canvas.draw()
        by_label = {s.label: s for s in sol.states}
        placed = [t for t in ax.texts if t.get_text() in by_label
                  and t.get_transform() == ax.transData]      # not the column at the right
        assert len(placed) >= 2
        for t in placed:
            s = by_label[t.get_text()]
            z = np.asarray(s.z_nm)
            x, y = t.get_position()
            assert x == pytest.approx(z[np.argmax(np.asarray(s.psi) ** 2)], abs=1e-9)
            assert y > s.energy_eV
    finally:
        plt.close(fig)


PERIODS = """\
name: 50-period detector
temperature: 77 K
substrate: GaAs
layers:
  - {material: Al0.25Ga0.75As, thickness: 40 nm, name: cap}
  - repeat: 50
    layers:
      - {material: GaAs, thickness: 5 nm, name: qw}
      - {material: Al0.25Ga0.75As, thickness: 40 nm, name: bar}
"""


@pytest.mark.slow
def test_fifty_periods_grouped_per_miniband_and_no_intra_miniband_line():
    sol = solve_stack(stack_from_text(PERIODS), bands="conduction")
    lev = sol.levels["conduction"]
    groups = [(mb, st) for mb, st in miniband_groups(lev) if mb is not None]
    # Kronig & Penney (1931): one state per period in an isolated miniband, inside its edges
    assert groups and len(groups[0][1]) == 50
    mb, st = groups[0]
    lo, hi = sorted((mb.bottom_eV, mb.top_eV))
    assert all(lo - 1e-6 <= s.energy_eV <= hi + 1e-6 for s in st)
    chosen = report_data.default_transitions(sol)
    group_of = {s.label: k for k, (_, st) in enumerate(groups) for s in st}
    for t in chosen:
        assert group_of.get(t.initial) is None or group_of.get(t.initial) != group_of.get(t.final)
    fig, info = band_diagram_figure(sol.profile, sol.levels, transitions=chosen)
    try:
        assert info.states_total == len(sol.states)
        assert info.states_drawn < 0.2 * info.states_total
        assert any(g.startswith("e1–e50: 50 states") for g in info.groups)
        note = " ".join(t.get_text() for t in fig.texts)
        assert f"{info.states_drawn} of {info.states_total} states drawn" in note
    finally:
        plt.close(fig)
