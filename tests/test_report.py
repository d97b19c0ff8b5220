"""Design-review reports (qwell.report, qwell.diagram, qwell report).

What is checked against what
----------------------------
* Subband energies, the e1-e2 wavelength and its sensitivity to the well
  thickness (±1 ML) of a single square well: the even/odd finite-well
  equations with BenDaniel–Duke matching, solved in this file with
  scipy.optimize.brentq (G. Bastard, "Superlattice band structure in the
  envelope-function approximation", Phys. Rev. B 24, 5693 (1981)), with
  ħ²/(2 m0), h, c and e from CODATA via scipy.constants.
* The footer's SHA-256 against hashlib on the file bytes.
* The PDF is read back with pypdf (an independent PDF parser); the PNG with
  matplotlib.image.imread.
* Layout invariants (labels do not overlap, nothing outside the page, fonts
  >= 7 pt) are properties of the construction: common practice, no source.
"""

from __future__ import annotations

import hashlib
import io
import os
import re
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants as sc
from scipy.optimize import brentq

from qwell import __version__
from qwell import report as rp
from qwell.report import build as report_build
from qwell.report import layout
from qwell.cli import main
from qwell.diagram import (
    DIAGRAM_DPI,
    DIAGRAM_SIZE_IN,
    band_diagram_figure,
    spread_positions,
)
from qwell.errors import ParameterError, QwellError, ValidityWarning
from qwell.stack import load_stack

pypdf = pytest.importorskip("pypdf")

# ħ²/(2 m0) in eV nm² and h c in eV µm, CODATA via scipy.constants.
HB2 = sc.hbar ** 2 / (2 * sc.m_e) / sc.e * 1e18
HC_UM = sc.h * sc.c / sc.e * 1e6

# Invented test scenarios.  The barrier is a user material with an explicit
# edge and mass, so that the finite-well equations below apply exactly.
WELL_YAML = """\
name: report test single well
temperature: 300 K
nonparabolicity: false
materials:
  wall: {{conduction_edge: {edge} eV, electron_mass: {mass}, lattice_constant: 0.565 nm}}
layers:
  - {{material: wall, thickness: 20 nm, name: left}}
  - {{material: GaAs, thickness: 30 ML, name: well}}
  - {{material: wall, thickness: 20 nm, name: right}}
"""
WALL_EDGE_EV = 1.0
WALL_MASS = 0.067

LASER_YAML = """\
name: report test strained well
temperature: 300 K
substrate: GaAs
layers:
  - {material: GaAs, thickness: 25 nm, name: lower}
  - {material: In0.2Ga0.8As, thickness: 7 nm, name: qw}
  - {material: GaAs, thickness: 25 nm, name: upper}
"""


def _norm(text: str) -> str:
    return " ".join(text.split())


def _pdf_pages(path):
    reader = pypdf.PdfReader(str(path))
    return [page.extract_text() or "" for page in reader.pages]


# ---------------------------------------------------------------------------
# independent finite-well solution (Bastard 1981, BenDaniel–Duke matching)
# ---------------------------------------------------------------------------
def finite_well_levels(depth_eV, width_nm, m_well, m_barrier):
    """E1 (even) and E2 (odd) above the well bottom [eV], brentq on the matching equations.

    Even: (k/m_w) sin(kL/2) - (κ/m_b) cos(kL/2) = 0; odd: (k/m_w) cos(kL/2) + (κ/m_b) sin(kL/2) = 0,
    k = sqrt(m_w E)/sqrt(ħ²/2m0), κ = sqrt(m_b (V0 - E))/sqrt(ħ²/2m0).
    """
    def k(e):
        return np.sqrt(m_well * e / HB2)

    def kap(e):
        return np.sqrt(m_barrier * (depth_eV - e) / HB2)

    def even(e):
        a = k(e) * width_nm / 2
        return k(e) / m_well * np.sin(a) - kap(e) / m_barrier * np.cos(a)

    def odd(e):
        a = k(e) * width_nm / 2
        return k(e) / m_well * np.cos(a) + kap(e) / m_barrier * np.sin(a)

    def e_at(phase):  # energy where k L / 2 = phase
        return HB2 * (2 * phase / width_nm) ** 2 / m_well

    e1 = brentq(even, 1e-12, min(e_at(np.pi / 2), depth_eV) * (1 - 1e-12), xtol=1e-14)
    lo = e_at(np.pi / 2) * (1 + 1e-12)
    e2 = brentq(odd, lo, min(e_at(np.pi), depth_eV) * (1 - 1e-12), xtol=1e-14)
    return e1, e2


# ---------------------------------------------------------------------------
# fixtures: one report per scenario (module scope: building costs seconds)
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def gaas():
    from qwell.materials import get_material

    return get_material("GaAs", 300.0)


@pytest.fixture(scope="module")
def well_report(tmp_path_factory, gaas):
    d = tmp_path_factory.mktemp("well")
    src = d / "single-well.yaml"
    src.write_text(WELL_YAML.format(edge=WALL_EDGE_EV, mass=WALL_MASS))
    before = (src.read_bytes(), src.stat().st_mtime_ns)
    out = d / "out"
    out.mkdir()
    stack = load_stack(src)
    res = rp.build_report(stack, transitions=["e1-e2"], out_dir=out)
    data = rp.collect_report_data(stack, transitions=["e1-e2"])
    return {"src": src, "before": before, "res": res, "stack": stack, "data": data,
            "pages": _pdf_pages(res.pdf_path)}


@pytest.fixture(scope="module")
def laser_report(tmp_path_factory):
    d = tmp_path_factory.mktemp("laser")
    src = d / "laser.yaml"
    src.write_text(LASER_YAML)
    stack = load_stack(src)
    # the shallow InGaAs/GaAs conduction well: at the gain page's densities the quasi-Fermi
    # levels reach the GaAs edge, a caution the report lists (continuum carriers not counted)
    with pytest.warns(ValidityWarning, match="validity warning"):
        res = rp.build_report(stack, out_dir=d)
    return {"src": src, "res": res, "stack": stack, "pages": _pdf_pages(res.pdf_path)}


# ---------------------------------------------------------------------------
# the PDF and the PNG
# ---------------------------------------------------------------------------
def test_files_written_and_named_after_the_stack(well_report):
    res = well_report["res"]
    assert res.pdf_path.name == "single-well.pdf"
    assert res.png_path.name == "single-well.png"
    assert res.pages == len(well_report["pages"]) >= 7
    assert res.elapsed_s > 0
    leftovers = [p.name for p in res.pdf_path.parent.iterdir()
                 if p.name not in ("single-well.pdf", "single-well.png")]
    assert leftovers == []          # no temporary file left behind


def test_input_file_untouched(well_report):
    src = well_report["src"]
    assert (src.read_bytes(), src.stat().st_mtime_ns) == well_report["before"]


def test_pdf_names_stack_states_and_energies(well_report):
    text = _norm("\n".join(well_report["pages"]))
    data = well_report["data"]
    assert "report test single well" in text
    assert data.exact.states, "the well must have states"
    for s in data.exact.states:
        assert s.label in text
        assert f"{s.energy_eV:.6f}" in text            # printed precision: 1 µeV
    for s in data.semiclassical.states:
        assert f"{s.energy_eV:.6f}" in text


def test_energies_and_wavelength_against_finite_well_equations(well_report, gaas):
    # Source: G. Bastard, Phys. Rev. B 24, 5693 (1981) — BenDaniel–Duke finite well,
    # solved here with brentq; h c from CODATA (scipy.constants).
    data = well_report["data"]
    ec = gaas.conduction_edge_eV
    width = 30 * gaas.monolayer_nm
    e1, e2 = finite_well_levels(WALL_EDGE_EV - ec, width, gaas.electron_mass, WALL_MASS)
    s1, s2 = data.exact.state("e1"), data.exact.state("e2")
    assert s1.energy_eV == pytest.approx(ec + e1, abs=1e-6)
    assert s2.energy_eV == pytest.approx(ec + e2, abs=1e-6)
    (t,) = data.chosen
    assert t.name == "e1-e2"
    lam = HC_UM / (e2 - e1)
    # solver tolerance 1e-7 eV per state -> λ error <= λ²/(hc) * 2e-7 µm
    assert t.wavelength_um == pytest.approx(lam, abs=lam ** 2 / HC_UM * 2e-7 + 1e-9)
    text = _norm("\n".join(well_report["pages"]))
    assert f"{t.wavelength_um:.5f}" in text


def test_thickness_sensitivity_against_finite_well_equations(well_report, gaas):
    # Source: Bastard 1981 finite-well equations at L ± 1 ML (ML = a/2 of GaAs, the
    # material's lattice constant); Δλ = λ(L ± ML) - λ(L).
    data = well_report["data"]
    ec, ml = gaas.conduction_edge_eV, gaas.monolayer_nm
    depth = WALL_EDGE_EV - ec

    def lam_nm(width):
        a, b = finite_well_levels(depth, width, gaas.electron_mass, WALL_MASS)
        return 1e3 * HC_UM / (b - a)

    width = 30 * ml
    rows = {(r.layer, r.parameter): r for r in data.sensitivity}
    r = rows[("well", "thickness")]
    lam0 = lam_nm(width)
    # error budget from the solver tolerance: 2 states x 2 designs x 1e-7 eV
    tol = (lam0 * 1e-3) ** 2 / HC_UM * 4e-7 * 1e3 * 1.5
    assert r.step == pytest.approx(ml)
    assert r.plus_nm == pytest.approx(lam_nm(width + ml) - lam0, abs=tol)
    assert r.minus_nm == pytest.approx(lam_nm(width - ml) - lam0, abs=tol)
    # the outer layers continue as semi-infinite claddings: their thickness
    # cannot move a level (translation invariance, common practice, no source)
    for side in ("left", "right"):
        rr = rows[(side, "thickness")]
        assert abs(rr.plus_nm) <= tol and abs(rr.minus_nm) <= tol
    text = _norm("\n".join(well_report["pages"]))
    # a 9 µm line: the report gives its shifts in µm (the unit of its spectral region)
    assert "Δλ for −step (µm)" in text
    assert f"{r.plus_nm / 1e3:+.5f}" in text and f"{r.minus_nm / 1e3:+.5f}" in text


def test_pdf_cites_sources_and_prints_cautions(well_report, gaas):
    from qwell.materials import citation

    text = _norm("\n".join(well_report["pages"]))
    keys = {k for v in gaas.sources.values() for k in str(v).split("+") if k != "user"}
    assert keys
    for k in keys:
        assert _norm(citation(k)) in text
    # the main table of the field: Vurgaftman, Meyer, Ram-Mohan, J. Appl. Phys. 89, 5815 (2001)
    assert "Vurgaftman" in text and "5815" in text
    assert "user-defined value in the stack file" in text        # the user barrier
    for c in rp.CAUTIONS:
        assert _norm(c) in text
    assert "IEC 60825-1" in text
    assert _norm(well_report["pages"][-1]).startswith("Cautions")


def test_every_page_has_the_reproducibility_footer(well_report):
    sha = hashlib.sha256(well_report["src"].read_bytes()).hexdigest()
    pages = well_report["pages"]
    for i, page in enumerate(pages, 1):
        t = _norm(page)
        assert f"qwell {__version__}" in t
        assert f"page {i} of {len(pages)}" in t
        assert f"SHA-256 {sha}" in t
        assert "T = 300 K" in t
        assert "tolerance 1e-07 eV" in t and "nonparabolicity off" in t
        assert re.search(r"\d{4}-\d\d-\d\d \d\d:\d\d:\d\d UTC", t)


def test_stack_page_lists_layers_in_nm_and_ml(well_report, gaas):
    text = _norm("\n".join(well_report["pages"]))
    assert f"{30 * gaas.monolayer_nm:.4f}" in text and "30.00" in text
    for name in ("left", "well", "right"):
        assert name in text


def test_png_size_and_not_blank(well_report):
    import matplotlib.image as mpimg

    img = mpimg.imread(well_report["res"].png_path)
    assert img.shape[:2] == (round(DIAGRAM_SIZE_IN[1] * DIAGRAM_DPI),
                             round(DIAGRAM_SIZE_IN[0] * DIAGRAM_DPI))
    grey = img[..., :3].mean(axis=2)
    assert grey.var() > 1e-3
    # the conduction-edge colour of qwell.plots.BAND_STYLE is present (#0072B2)
    target = np.array([0x00, 0x72, 0xB2]) / 255
    assert np.any(np.all(np.abs(img[..., :3] - target) < 0.02, axis=2))


def test_interband_design_uses_two_panels_and_lists_wavelengths(laser_report):
    from qwell.levels import solve_stack

    sol = solve_stack(laser_report["stack"])
    chosen = rp.default_transitions(sol)
    assert any(t.name == "e1-hh1" for t in chosen)
    fig, info = band_diagram_figure(sol.profile, sol.levels, transitions=chosen)
    try:
        assert info.panels == ("conduction", "valence")
        assert "heavy_hole" in info.bands
        assert set(info.state_labels) == {s.label for s in sol.states}
    finally:
        import matplotlib.pyplot as plt
        plt.close(fig)
    text = _norm("\n".join(laser_report["pages"]))
    for t in chosen:
        assert f"{t.wavelength_um:.5f}" in text
    assert "In0.2Ga0.8As" in text
    assert "excitonic binding is not included" in text


def _label_boxes(fig, info):
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    boxes = []
    for ax in info.axes:
        for t in ax.texts:
            txt = t.get_text().strip()
            if not txt:
                continue
            boxes.append((txt, t.get_window_extent(renderer=r)))
    return boxes


@pytest.mark.parametrize("which", ["well", "laser"])
def test_diagram_labels_do_not_overlap_and_stay_inside(which, well_report, laser_report):
    import matplotlib.pyplot as plt

    from qwell.levels import solve_stack

    rep = well_report if which == "well" else laser_report
    sol = solve_stack(rep["stack"])
    chosen = rp.default_transitions(sol)
    fig, info = band_diagram_figure(sol.profile, sol.levels, transitions=chosen,
                                    title=rep["stack"].name)
    try:
        boxes = _label_boxes(fig, info)
        assert len(boxes) >= len(sol.states)
        fb = fig.bbox
        for i, (ta, a) in enumerate(boxes):
            assert fb.x0 <= a.x0 and a.x1 <= fb.x1 and fb.y0 <= a.y0 and a.y1 <= fb.y1, ta
            for tb, b in boxes[i + 1:]:
                assert not a.overlaps(b), f"{ta!r} overlaps {tb!r}"
        for t in fig.texts:
            bb = t.get_window_extent(renderer=fig.canvas.get_renderer())
            assert fb.x0 <= bb.x0 and bb.x1 <= fb.x1, t.get_text()
    finally:
        plt.close(fig)


def test_layout_keeps_text_on_the_page_and_fonts_readable(well_report, laser_report):
    for data in (well_report["data"],):
        for page in rp.report_pages(data):
            for it in page:
                if it.kind != "text":
                    continue
                assert it.size >= 7.0
                w = layout.text_width(it.text, it.size, it.bold)
                x0 = it.x if it.ha == "left" else it.x - w
                assert x0 >= layout.MARGIN_L - 0.5
                assert x0 + w <= layout.PAGE_W_PT - layout.MARGIN_R + 0.5, it.text
                assert layout.BODY_BOTTOM - 1.0 <= it.y <= layout.PAGE_H_PT - layout.MARGIN_T + 0.5


def test_long_tables_flow_over_pages_with_header_repeated():
    rows = [[f"r{i}", f"{i:.3f}"] for i in range(200)]
    flow = layout.Flow()
    layout.Table(["name", "value"], rows, ["l", "r"], title="Long").place(flow)
    assert len(flow.pages) >= 3
    for page in flow.pages:
        texts = [it.text for it in page if it.kind == "text"]
        assert "name" in texts and "value" in texts          # header on every page
    cells = [it.text for page in flow.pages for it in page if it.kind == "text"]
    for r in rows:                                           # nothing dropped
        assert r[0] in cells and r[1] in cells


# ---------------------------------------------------------------------------
# atomic output and errors
# ---------------------------------------------------------------------------
def test_failed_rename_leaves_no_file(well_report, tmp_path, monkeypatch):
    monkeypatch.setattr(report_build, "collect_report_data", lambda *a, **k: well_report["data"])

    def boom(*a, **k):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", boom)
    with pytest.raises(QwellError, match="No space left on device") as exc:
        rp.build_report(well_report["stack"], out_dir=tmp_path)
    assert "\n" not in str(exc.value)
    assert list(tmp_path.iterdir()) == []


def test_failure_writing_the_png_removes_the_new_pdf(well_report, tmp_path, monkeypatch):
    import qwell.fileio as fileio

    monkeypatch.setattr(report_build, "collect_report_data", lambda *a, **k: well_report["data"])
    real = fileio.atomic_write_bytes

    def second_fails(path, data, protect=()):
        if str(path).endswith(".png"):
            raise OSError(5, "Input/output error")
        return real(path, data, protect)

    monkeypatch.setattr(report_build, "atomic_write_bytes", second_fails)
    with pytest.raises(QwellError, match="Input/output error"):
        rp.build_report(well_report["stack"], out_dir=tmp_path)
    assert list(tmp_path.iterdir()) == []


def test_failure_while_rendering_writes_nothing(well_report, tmp_path, monkeypatch):
    monkeypatch.setattr(report_build, "collect_report_data", lambda *a, **k: well_report["data"])

    def boom(data):
        raise RuntimeError("renderer broke")

    monkeypatch.setattr(report_build, "render_pdf", boom)
    with pytest.raises(RuntimeError, match="renderer broke"):
        rp.build_report(well_report["stack"], out_dir=tmp_path)
    assert list(tmp_path.iterdir()) == []


def test_missing_user_folder_is_a_one_line_error(well_report, tmp_path):
    target = tmp_path / "no" / "such"
    with pytest.raises(QwellError, match="does not exist") as exc:
        rp.build_report(well_report["stack"], out_dir=target)
    assert "\n" not in str(exc.value)
    assert not target.exists() and not (tmp_path / "no").exists()


def test_output_folder_that_is_a_file(well_report, tmp_path):
    f = tmp_path / "afile"
    f.write_text("x")
    with pytest.raises(QwellError, match="is not a folder"):
        rp.build_report(well_report["stack"], out_dir=f)
    assert f.read_text() == "x"


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0,
                    reason="root can write into read-only folders")
def test_unwritable_folder_is_a_one_line_error(well_report, tmp_path):
    d = tmp_path / "ro"
    d.mkdir()
    d.chmod(0o500)
    try:
        with pytest.raises(QwellError, match="not writable") as exc:
            rp.build_report(well_report["stack"], out_dir=d)
        assert "\n" not in str(exc.value)
    finally:
        d.chmod(0o700)


def test_cli_default_folder_is_created_and_paths_printed(well_report, tmp_path, monkeypatch,
                                                         capsys):
    monkeypatch.setattr(report_build, "collect_report_data", lambda *a, **k: well_report["data"])
    monkeypatch.chdir(tmp_path)
    rc = main(["report", str(well_report["src"])])
    out = capsys.readouterr().out
    assert rc == 0
    assert (tmp_path / "reports" / "single-well.pdf").is_file()
    assert (tmp_path / "reports" / "single-well.png").is_file()
    assert os.path.join("reports", "single-well.pdf") in out
    assert os.path.join("reports", "single-well.png") in out


def test_cli_missing_output_folder(well_report, tmp_path, capsys):
    rc = main(["report", str(well_report["src"]), "-o", str(tmp_path / "missing")])
    err = capsys.readouterr().err
    assert rc == 2
    assert err.startswith("qwell: error: ") and err.count("\n") == 1
    assert "does not exist" in err


def test_cli_unknown_transition_lists_available(well_report, tmp_path, capsys):
    rc = main(["report", str(well_report["src"]), "-o", str(tmp_path),
               "--transition", "e1-e9"])
    err = capsys.readouterr().err
    assert rc == 2 and err.count("\n") == 1
    assert "e1-e9" in err and "e1-e2" in err
    assert list(tmp_path.iterdir()) == []


def test_unknown_transition_in_the_api(well_report):
    with pytest.raises(ParameterError, match="available"):
        rp.collect_report_data(well_report["stack"], transitions=["e2-e7"], sensitivity=False)


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------
@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-10, 10, allow_nan=False), min_size=1, max_size=30),
       st.floats(0.01, 2.0))
def test_spread_positions_keeps_order_and_gap(values, gap):
    # properties of the construction (common practice, no source)
    out = spread_positions(values, gap, lo=-100.0, hi=100.0)
    order = np.argsort(np.asarray(values), kind="stable")
    s = out[order]
    assert np.all(np.diff(s) >= gap * (1 - 1e-9) - 1e-9)
    assert np.all(s >= -100.0 - 1e-9) and np.all(s <= 100.0 + 1e-9)
    v = np.sort(np.asarray(values))
    if np.all(np.diff(v) >= gap):        # already far enough apart: nothing moves
        assert np.allclose(np.sort(out), v)


def test_spread_positions_stays_in_range():
    out = spread_positions([0.0, 0.0, 0.0], 1.0, lo=0.0, hi=10.0)
    assert np.allclose(np.sort(out), [0.0, 1.0, 2.0])


def test_render_is_readable_pdf_in_memory(well_report):
    data_bytes, n = rp.render_pdf(well_report["data"])
    reader = pypdf.PdfReader(io.BytesIO(data_bytes))
    assert len(reader.pages) == n
    assert reader.metadata.title.endswith("report test single well")


def test_validity_warnings_are_summarised_once(well_report, tmp_path, monkeypatch):
    import dataclasses

    from qwell.errors import ValidityWarning

    data = dataclasses.replace(well_report["data"], warnings=("e1: estimate unreliable",))
    monkeypatch.setattr(report_build, "collect_report_data", lambda *a, **k: data)
    with pytest.warns(ValidityWarning, match="1 validity warning"):
        res = rp.build_report(well_report["stack"], out_dir=tmp_path)
    assert res.warnings == ("e1: estimate unreliable",)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        text = _norm("\n".join(_pdf_pages(res.pdf_path)))
    assert "flagged unreliable for 1 state" in text


def test_conduction_only_design_uses_one_panel(well_report):
    import matplotlib.pyplot as plt

    data = well_report["data"]
    fig, info = band_diagram_figure(data.profile, data.exact.levels, transitions=data.chosen)
    try:
        assert info.panels == ("conduction",)
        assert info.transition_labels == (f"e1-e2  {data.chosen[0].wavelength_um:.4g} µm",)
    finally:
        plt.close(fig)


def test_stack_without_bound_states_still_reports(tmp_path):
    # a barrier between two lower layers confines nothing (common practice, no source)
    src = tmp_path / "bump.yaml"
    src.write_text("name: no well at all\ntemperature: 300 K\nmaterials:\n"
                   "  wall: {conduction_edge: 1.0 eV, electron_mass: 0.067}\n"
                   "  bump: {conduction_edge: 1.2 eV, electron_mass: 0.067}\n"
                   "layers:\n  - {material: wall, thickness: 10 nm}\n"
                   "  - {material: bump, thickness: 5 nm}\n  - {material: wall, thickness: 10 nm}\n")
    res = rp.build_report(src, out_dir=tmp_path)
    text = _norm("\n".join(_pdf_pages(res.pdf_path)))
    assert "No transition to review" in text
    assert "no well at all" in text
    assert res.png_path.is_file()


# ---------------------------------------------------------------------------
# the sensitivity page through the design engine
# ---------------------------------------------------------------------------
def test_composition_next_to_the_end_of_its_range_is_one_sided(tmp_path):
    # x = 0.005 - 0.01 leaves [0, 1]: only the + side exists (property of the
    # construction, common practice, no source)
    src = tmp_path / "edge.yaml"
    src.write_text("name: composition at the edge\ntemperature: 300 K\nlayers:\n"
                   "  - {material: Al0.30Ga0.70As, thickness: 15 nm, name: lower}\n"
                   "  - {material: Al0.005Ga0.995As, thickness: 6 nm, name: well}\n"
                   "  - {material: Al0.30Ga0.70As, thickness: 15 nm, name: upper}\n")
    stack = load_stack(src)
    data = rp.collect_report_data(stack, transitions=["e1-e2"], sensitivity=False)
    rows, _ = rp.sensitivity_rows(stack, data.chosen, jobs=1)
    by = {(r.layer, r.parameter): r for r in rows}
    r = by[("well", "x (AlGaAs)")]
    assert r.minus_nm is None and r.plus_nm is not None
    assert r.per_unit_nm == r.plus_nm and "one-sided (+ step only)" in r.note
    # more Al in the well raises e1 and e2 unequally; the line must move
    assert r.plus_nm != 0.0
    both = by[("lower", "x (AlGaAs)")]
    assert both.minus_nm is not None and both.plus_nm is not None


def test_a_design_the_engine_refuses_becomes_a_note(well_report, monkeypatch):
    # the engine refusing one design (here: forced) must not lose the others
    from qwell.design import evaluate

    data = well_report["data"]
    real = evaluate._design_bands
    thinner = data.stack.layers[1].thickness_nm - 1e-6

    def refusing(stack, *args, **kw):
        if stack.layers[1].thickness_nm < thinner:
            raise ParameterError("well.thickness: refused for this test")
        return real(stack, *args, **kw)

    monkeypatch.setattr(evaluate, "_design_bands", refusing)
    rows, notes = rp.sensitivity_rows(data.stack, data.chosen, jobs=1)
    by = {(r.layer, r.parameter): r for r in rows}
    ref = {(r.layer, r.parameter): r for r in data.sensitivity}
    r = by[("well", "thickness")]
    assert r.minus_nm is None and r.plus_nm == ref[("well", "thickness")].plus_nm
    assert any("refused for this test" in n for n in notes)
    for k, other in by.items():
        if k != ("well", "thickness"):
            assert (other.minus_nm, other.plus_nm) == (ref[k].minus_nm, ref[k].plus_nm)
