"""Correlated growth tolerances: composition groups, growth-rate groups, lost Monte Carlo designs.

Outside references: the first-order Taylor expansion (a shared composition error moves the line
by the signed sum of the one-at-a-time shifts), the infinite square well E_n = n² π² ħ²/(2 m L²)
(λ ∝ L², so dλ/dL = 2λ/L; any quantum-mechanics text, e.g. Bastard, Wave Mechanics Applied to
Semiconductor Heterostructures, 1988, ch. 1), and the empirical quantile definition of
Hyndman & Fan, The American Statistician 50, 361 (1996), type 7 (numpy's default).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from qwell import design
from qwell.cli import main
from qwell.constants import HBAR2_2M0_EV_NM2
from qwell.errors import ParameterError
from qwell.stack import load_stack, stack_from_mapping

ROOT = Path(__file__).resolve().parents[1]
LWIR = ROOT / "layers" / "lwir-detector.yaml"


def _symmetric_algaas_well():
    return stack_from_mapping({
        "name": "symmetric well", "temperature": "300 K", "substrate": "GaAs",
        "layers": [{"material": "Al0.3Ga0.7As", "thickness": "20 nm", "name": "left"},
                   {"material": "GaAs", "thickness": "8 nm", "name": "well"},
                   {"material": "Al0.3Ga0.7As", "thickness": "20 nm", "name": "right"}]})


def test_shared_composition_moves_together_and_is_not_root_sum_squared():
    # Both barriers from one cell: one group, solved with both x moved together.  In the
    # linear regime (δx = 0.002) its shift equals the signed sum of the one-at-a-time shifts
    # (first-order Taylor expansion; the odd remainder is O(δ³), relative O(δ²) ~ 1e-5).
    stack = _symmetric_algaas_well()
    res = design.tolerance(stack, "e1-e2", {"*": 0}, composition_tol=0.002, jobs=1)
    (g,) = res.groups
    assert g.kind == "composition" and set(g.members) == {"left.x", "right.x"}
    by = {c.parameter: c.contribution_nm for c in res.contributions}
    assert g.members_sum_nm == pytest.approx(by["left.x"] + by["right.x"], rel=1e-12)
    assert g.contribution_nm == pytest.approx(by["left.x"] + by["right.x"], rel=1e-4)
    # identical barriers of a symmetric well: equal one-at-a-time shifts (mirror symmetry,
    # common practice, no source), so the correlated shift is twice one of them ...
    assert by["left.x"] == pytest.approx(by["right.x"], rel=1e-9)
    # ... and never the root-sum-square of the two (which would be √2 times one): the
    # correlated RSS and worst case are |group|, √2 larger than the independent RSS.
    assert res.rss_nm == pytest.approx(abs(g.contribution_nm), rel=1e-12)
    assert res.worst_case_nm == pytest.approx(abs(g.contribution_nm), rel=1e-12)
    assert res.rss_nm / res.independent_rss_nm == pytest.approx(math.sqrt(2), rel=1e-3)


@pytest.mark.slow
def test_growth_rate_of_an_infinite_like_well():
    # A 1000 eV deep well: infinite-well closed form E ∝ 1/L², λ ∝ L², so a growth-rate error r
    # gives (λ(L(1+r)) - λ(L(1-r)))/2 = 2 r λ exactly (dλ/dL = 2λ/L).  The finite depth leaves
    # the penetration 1/κ into each barrier: L_eff = L + 2/κ (equal masses; Bastard 1988,
    # ch. 1, the large-κL limit of the finite-well condition), which scales the shift by L/L_eff.
    V0, L, m, r = 1000.0, 8.0, 0.067, 0.02
    stack = stack_from_mapping({
        "name": "deep box", "nonparabolicity": False,
        "materials": {"wall": {"conduction_edge": f"{V0} eV", "electron_mass": m},
                      "core": {"conduction_edge": "0 eV", "electron_mass": m}},
        "layers": [{"material": "wall", "thickness": "2 nm", "name": "left"},
                   {"material": "core", "thickness": f"{L} nm", "name": "well"},
                   {"material": "wall", "thickness": "2 nm", "name": "right"}]})
    res = design.tolerance(stack, "e1-e2", {"*": 0}, composition_tol=0, growth_rate="2%",
                           jobs=1)
    assert res.growth_rate == pytest.approx(r)
    core = next(g for g in res.groups if g.name == "growth rate core")
    wall = next(g for g in res.groups if g.name == "growth rate wall")
    assert set(wall.members) == {"left.thickness", "right.thickness"}
    lam_nm = res.nominal_wavelength_um * 1e3
    assert core.contribution_nm == pytest.approx(2 * r * lam_nm, rel=1e-2)
    kappa = math.sqrt(m * V0 / HBAR2_2M0_EV_NM2)
    assert core.contribution_nm == pytest.approx(2 * r * lam_nm * L / (L + 2 / kappa), rel=1e-3)


def test_growth_rate_bad_values():
    for bad in ("-1%", "100%", "150 %", "two"):
        with pytest.raises(ParameterError, match="growth rate"):
            design.parse_growth_rate(bad)
    assert design.parse_growth_rate("2 %") == pytest.approx(0.02)
    assert design.parse_growth_rate(0) == 0.0


@pytest.mark.parametrize("bad", ["-2%", "100%"])
def test_cli_growth_rate_refused(bad, capsys):
    rc = main(["tolerance", str(LWIR), f"--growth-rate={bad}"])
    assert rc == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("qwell: error: --growth-rate") and "\n" not in err


def test_monte_carlo_lost_designs_counted_and_percentiles_over_all(tmp_path):
    # e2 of the detector sits ~10 meV below the barrier edge: a 0.02 composition spread pushes
    # it out of some designs.  Every design is counted; the percentile range is the type-7
    # empirical quantile (Hyndman & Fan 1996) of all samples with the lost ones placed below
    # (low end) or above (high end) every kept one.
    stack = load_stack(LWIR)
    n = 40
    res = design.tolerance(stack, "e1-e2", {"*": "1 ML"}, composition_tol=0.02, monte_carlo=n,
                           seed=3, jobs=1)
    mc = res.monte_carlo
    assert mc.samples == n and mc.valid + mc.lost == n and mc.lost > 0
    assert sum(k for _, k in mc.lost_reasons) == mc.lost
    assert any("e2 not found" in w for w, _ in mc.lost_reasons)
    kept = np.array(mc.wavelengths_um)
    assert kept.size == mc.valid
    below = np.concatenate([np.full(mc.lost, -1e9), kept])
    above = np.concatenate([kept, np.full(mc.lost, 1e9)])
    for q, (lo, hi) in mc.percentile_range_um.items():
        want_lo, want_hi = np.percentile(below, q), np.percentile(above, q)
        if abs(want_lo) < 1e8:
            assert lo == pytest.approx(want_lo, rel=1e-12)
        else:
            assert math.isnan(lo)
        if abs(want_hi) < 1e8:
            assert hi == pytest.approx(want_hi, rel=1e-12)
        else:
            assert math.isnan(hi)
        assert math.isnan(mc.percentiles_um[q])       # not one number when designs are lost
    out = res.plot(tmp_path / "mc.png")
    import matplotlib.image as mpimg
    img = mpimg.imread(out)
    assert img.shape[0] > 300 and float(np.std(img[..., :3])) > 0.01


def test_cli_tolerance_growth_rate_json_and_png(tmp_path, capsys):
    png = tmp_path / "h.png"
    rc = main(["tolerance", str(LWIR), "--growth-rate", "2%", "--monte-carlo", "12", "--jobs",
               "1", "--json", "--png", str(png)])
    assert rc == 0
    j = json.loads(capsys.readouterr().out)
    names = [g["name"] for g in j["groups"]]
    assert "composition Al0.25Ga0.75As (x)" in names and "growth rate GaAs" in names
    assert j["worst_case"]["view"] == "correlated"
    assert {"worst_case_nm", "rss_nm"} <= set(j["independent"])
    assert j["monte_carlo"]["lost"] + j["monte_carlo"]["valid"] == 12
    assert png.stat().st_size > 5000
    rc = main(["tolerance", str(LWIR), "--png", str(tmp_path / "x.png")])
    assert rc == 2 and "--monte-carlo" in capsys.readouterr().err
