"""Photon units (qwell.spectral) and the --unit option of the commands.

Conversions are checked against CODATA 2018 digits (E. Tiesinga, P. J. Mohr, D. B. Newell,
B. N. Taylor, "CODATA recommended values of the fundamental physical constants: 2018",
Rev. Mod. Phys. 93, 025010 (2021)): hc = 1.239841984 eV µm, h = 4.135667696e-15 eV s
(1 THz = 4.135667696 meV), hc × 1 cm^-1 = 0.1239841984 meV.  The spread of a line in
energy units is the derivative dE/dλ = -hc/λ² (calculus, no source).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from qwell import spectral
from qwell.cli import main
from qwell.errors import QwellError

ROOT = Path(__file__).resolve().parents[1]
LWIR = ROOT / "layers" / "lwir-detector.yaml"
SUPERLATTICE = ROOT / "layers" / "superlattice.yaml"

# CODATA 2018 digits (Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021))
HC_EV_UM = 1.239841984
MEV_PER_THZ = 4.135667696
MEV_PER_CM1 = 0.1239841984


@pytest.mark.parametrize("energy_eV", [1.25, 0.27, 0.1239841984, 0.0124])
def test_conversions_against_codata(energy_eV):
    assert spectral.from_eV(energy_eV, "um") == pytest.approx(HC_EV_UM / energy_eV, rel=1e-9)
    assert spectral.from_eV(energy_eV, "nm") == pytest.approx(1e3 * HC_EV_UM / energy_eV,
                                                              rel=1e-9)
    assert spectral.from_eV(energy_eV, "THz") == pytest.approx(1e3 * energy_eV / MEV_PER_THZ,
                                                               rel=1e-9)
    assert spectral.from_eV(energy_eV, "cm-1") == pytest.approx(1e3 * energy_eV / MEV_PER_CM1,
                                                                rel=1e-9)
    assert spectral.from_eV(energy_eV, "meV") == pytest.approx(1e3 * energy_eV, rel=1e-12)


def test_three_thz_is_about_twelve_mev():
    # 3 THz x 4.135667696 meV/THz (CODATA 2018)
    e = 3 * MEV_PER_THZ * 1e-3
    assert spectral.format_line(e, "THz") == "3.0000 THz"
    assert spectral.energy_text(e, "THz") == "12.407 meV"


@pytest.mark.parametrize("lam_um, unit", [(0.98, "nm"), (1.99, "nm"), (2.01, "um"), (9.0, "um"),
                                          (29.9, "um"), (30.1, "THz"), (100.0, "THz")])
def test_unit_follows_the_spectral_region(lam_um, unit):
    assert spectral.auto_unit(HC_EV_UM / lam_um) == unit


def test_spread_conversions_follow_the_derivative():
    # a +10 nm shift of a 9 um line: dE = -hc dλ / λ² (exact derivative of E = hc/λ)
    lam_um, d_nm = 9.0, 10.0
    e = HC_EV_UM / lam_um
    de_meV = -1e3 * HC_EV_UM * (d_nm * 1e-3) / lam_um ** 2
    assert spectral.spread_from_nm(d_nm, e, "nm") == d_nm
    assert spectral.spread_from_nm(d_nm, e, "um") == pytest.approx(0.01)
    assert spectral.spread_from_nm(d_nm, e, "meV") == pytest.approx(de_meV, rel=1e-9)
    assert spectral.spread_from_nm(d_nm, e, "THz") == pytest.approx(
        1e3 * de_meV / MEV_PER_THZ, rel=1e-9)          # in GHz
    assert spectral.spread_from_nm(d_nm, e, "cm-1") == pytest.approx(de_meV / MEV_PER_CM1,
                                                                    rel=1e-9)
    arr = spectral.spread_from_nm(np.array([d_nm, -d_nm]), np.array([e, e]), "meV")
    assert arr == pytest.approx([de_meV, -de_meV], rel=1e-9)
    assert spectral.format_spread(d_nm, e, "THz", sign="±").endswith(" GHz")


def test_measures_carry_every_unit():
    m = spectral.measures(HC_EV_UM / 4.6)
    assert m["wavelength_um"] == pytest.approx(4.6)
    assert m["wavelength_nm"] == pytest.approx(4600.0)
    assert m["energy_meV"] == pytest.approx(1e3 * HC_EV_UM / 4.6)
    assert m["frequency_THz"] == pytest.approx(1e3 * HC_EV_UM / 4.6 / MEV_PER_THZ)
    assert m["wavenumber_cm1"] == pytest.approx(1e4 / 4.6)
    assert spectral.measures(float("nan"))["wavelength_nm"] is None


@pytest.mark.parametrize("text, unit", [("nm", "nm"), ("um", "um"), ("µm", "um"),
                                        ("cm-1", "cm-1"), ("cm^-1", "cm-1"), ("thz", "THz"),
                                        ("THz", "THz"), ("meV", "meV")])
def test_parse_unit(text, unit):
    assert spectral.parse_unit(text) == unit


def test_unknown_unit_lists_the_choices():
    with pytest.raises(QwellError, match="nm, um, cm-1, THz, meV"):
        spectral.parse_unit("furlong")


def test_cli_unknown_unit_exits_2_with_choices(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["size", str(LWIR), "--vary", "well.thickness", "--target", "9um", "--unit", "Hz"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert "nm, um, cm-1, THz, meV" in err and len(err.strip().splitlines()) == 1


def test_size_for_a_thz_target_answers_in_thz(capsys):
    rc = main(["size", str(LWIR), "--vary", "well.thickness", "--target", "3THz", "--from", "25nm",
               "--to", "45nm"])
    out = capsys.readouterr().out
    assert rc == 0
    head, first, second = out.splitlines()[:3]
    assert head.startswith("design line e1-e2")
    assert "3.0000 THz (12.407 meV)" in first
    assert second.rstrip().endswith("% from the target)") and " THz (" in second
    assert "µm" not in out


def test_size_json_has_every_measure(capsys):
    rc = main(["size", str(LWIR), "--vary", "well.thickness", "--target", "9um", "--json",
               "--unit", "cm-1"])
    doc = json.loads(capsys.readouterr().out)
    assert rc == 0 and doc["photon_unit"] == "cm-1"
    assert doc["target_wavenumber_cm1"] == pytest.approx(1e4 / 9.0)
    assert doc["wavelength_nm"] == pytest.approx(1e3 * doc["wavelength_um"])
    assert doc["frequency_THz"] == pytest.approx(1e3 * doc["energy_eV"] / MEV_PER_THZ)
    for o in doc["monolayer_options"]:
        assert o["energy_meV"] == pytest.approx(1e3 * HC_EV_UM / o["wavelength_um"])


def test_superlattice_tolerance_speaks_ghz(capsys):
    # the THz-range superlattice line: spreads in GHz, no "±93305 nm"
    # (the stack declares its interband line e1-hh1; the THz-range line is e1-e2)
    rc = main(["tolerance", str(SUPERLATTICE), "--transition", "e1-e2", "--jobs", "1"])
    out = capsys.readouterr().out
    assert rc == 0
    assert out.splitlines()[0].startswith("design line e1-e2")
    assert " THz (" in out.splitlines()[1]
    worst = next(line for line in out.splitlines() if line.startswith("worst case"))
    assert "GHz" in worst and "nm" not in worst
    rc = main(["tolerance", str(SUPERLATTICE), "--transition", "e1-e2", "--jobs", "1", "--json"])
    doc = json.loads(capsys.readouterr().out)
    e = doc["nominal"]["energy_eV"]
    for c in doc["contributions"]:
        # GHz from nm through dν/dλ = -ν/λ at the nominal line
        ref = -c["contribution_nm"] * 1e-9 / (HC_EV_UM * 1e-6 / e) * (1e3 * e / MEV_PER_THZ) * 1e3
        assert c["contribution_GHz"] == pytest.approx(ref, rel=1e-9, abs=1e-12)
    assert doc["photon_unit"] == "THz"


def test_sweep_table_and_json_agree_in_the_chosen_unit(capsys):
    args = ["sweep", str(LWIR), "--vary", "well.thickness", "--from", "5nm", "--to", "6nm",
            "--points", "3", "--transition", "e1-e2", "--jobs", "1", "--unit", "meV"]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert "e1-e2 E meV" in out and "dE meV/ML" in out
    assert main(args + ["--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    t = doc["transitions"]["e1-e2"]
    assert doc["photon_unit"] == "meV"
    assert t["energy_meV"] == pytest.approx([1e3 * v for v in t["energy_eV"]])
    shown = [float(line.split()[3]) for line in out.splitlines()[4:7]]
    assert shown == pytest.approx(t["energy_meV"], abs=1e-3)
    assert set(t["sensitivity_per_unit"]) == {"nm", "um", "cm1", "GHz", "meV"}


def test_report_lines_follow_the_chosen_unit():
    from qwell.report.data import collect_report_data
    from qwell.report.layout import Table
    from qwell.report.pages import diagram_blocks
    from qwell.stack import load_stack
    data = collect_report_data(load_stack(LWIR), transitions=["e1-e2"], sensitivity=False,
                               unit="cm-1")
    table = next(b for b in diagram_blocks(data) if isinstance(b, Table))
    (row,) = table.rows
    e = data.chosen[0].energy_eV
    # wavenumber = E / (hc × 1 cm^-1), CODATA 2018 digits above
    assert row[-1] == f"{1e3 * e / MEV_PER_CM1:.2f} cm⁻¹"
