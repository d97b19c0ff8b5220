"""Reports of long stacks stay a handful of pages; reports of short stacks are not condensed.

A finite superlattice of N identical, isolated periods has N states per miniband, one per
period (Bloch's theorem for the periodic potential: Kronig & Penney, Proc. R. Soc. A 130,
499 (1931); the N-fold splitting of a level over N coupled wells: Ashcroft & Mermin, Solid
State Physics, 1976, ch. 8 and 10).  The condensed state table must show that count for every
group.  The PDF is read back with pypdf (an independent PDF parser).
"""

from __future__ import annotations

import io
import re
import sys
import warnings
from pathlib import Path

import pytest

from qwell.report.condense import LONG_STACK_STATES, is_long, shown_states, state_groups
from qwell.report.data import collect_report_data
from qwell.report.pages import render_pdf
from qwell.stack import load_stack

pypdf = pytest.importorskip("pypdf")

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))
from bench_long import DETECTOR  # noqa: E402  (the benchmark's 50-period detector stack)


def _text(pdf: bytes) -> str:
    pages = pypdf.PdfReader(io.BytesIO(pdf)).pages
    return " ".join(" ".join((p.extract_text() or "") for p in pages).split())


def _report(tmp_path, periods: int):
    f = tmp_path / f"det{periods}.yaml"
    f.write_text(DETECTOR.format(n=periods))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")     # the semiclassical 'unreliable' notes of coupled wells
        data = collect_report_data(load_stack(f), sensitivity=False)
    pdf, pages = render_pdf(data)
    return data, _text(pdf), pages


@pytest.mark.slow
def test_twelve_period_report_groups_states_per_miniband(tmp_path):
    data, text, pages = _report(tmp_path, 12)
    n_all = len(data.exact.states)
    assert n_all > LONG_STACK_STATES and is_long(data.exact)
    # N = 12 isolated periods: 12 states per miniband (Kronig & Penney 1931, Bloch's theorem)
    for lev in data.exact.levels.values():
        for g in state_groups(lev):
            if g.kind == "miniband":
                assert len(g.states) == 12
                assert re.search(rf"{g.label} miniband 12 ", text), g.label
    shown = shown_states(data.exact, data.chosen)
    assert f"{len(shown)} of {n_all} states shown" in text
    assert "Every state: qwell levels det12.yaml --band all --json" in text
    # the design line and its states are in full, and it heads page 1
    line = data.line.transition
    assert f"Reviewed design line {line}" in text
    for lab in line.split("-"):
        assert lab in shown
    assert f"» {line}" in text
    # the condensed transition tables say how many they show
    n_inter = sum(1 for t in data.exact.transitions if t.kind == "intersubband")
    assert re.search(rf"Intersubband: \d+ of {n_inter} shown", text)
    assert pages <= 10


@pytest.mark.slow
def test_fifty_period_report_is_a_handful_of_pages(tmp_path):
    data, text, pages = _report(tmp_path, 50)
    n_all = len(data.exact.states)
    assert n_all >= 200
    assert pages < 15
    shown = shown_states(data.exact, data.chosen)
    assert len(shown) < 40
    assert f"{len(shown)} of {n_all} states shown" in text
    assert f"of {n_all} states drawn" in text          # the band diagram's count
    assert f"Reviewed design line {data.line.transition}" in text
    assert "5 of 101 shown (first and last period of each long repeat block)" in text
    assert "periods 2–49 of 50: 96 layers" in text   # 48 periods x 2 layers


def test_short_example_reports_are_not_condensed():
    # the examples of layers/ list every state and every transition, as before
    for name in ("lwir-detector.yaml", "superlattice.yaml"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            data = collect_report_data(load_stack(ROOT / "layers" / name), sensitivity=False)
        assert not is_long(data.exact)
        pdf, pages = render_pdf(data)
        text = _text(pdf)
        assert "Long stack" not in text and " shown" not in text
        assert "Intersubband (strongest first)" in text
        for s in data.exact.states:
            assert re.search(rf"\b{s.label}\b", text), (name, s.label)
        for t in data.exact.transitions:
            assert t.name in text, (name, t.name)
