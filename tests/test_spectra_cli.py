"""Command line of the absolute spectra: JSON keys with units, PNGs, one-line errors (exit 2)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from qwell.cli import main

ROOT = Path(__file__).resolve().parents[1]
DOPED = str(ROOT / "layers" / "doped-detector.yaml")
UNDOPED = str(ROOT / "layers" / "lwir-detector.yaml")
LASER = str(ROOT / "layers" / "pump-laser-well.yaml")


def run(capsys, *argv):
    rc = main(list(argv))
    out, err = capsys.readouterr()
    return rc, out, err


def test_absorption_json_and_png(capsys, tmp_path):
    png = tmp_path / "abs.png"
    rc, out, err = run(capsys, "absorption", DOPED, "--passes", "4", "--json", "--png", str(png))
    assert rc == 0, err
    js = json.loads(out)
    for key in ("peak_absorption_cm1", "peak_wavelength_um", "active_length_nm",
                "active_length_rule", "integrated_absorption_eV_per_cm", "sheet_densities_cm2",
                "absorption_cm1", "energy_eV", "lines", "geometries", "refractive_index"):
        assert key in js
    assert js["populations"] == "self-consistent"
    assert {g["geometry"] for g in js["geometries"]} == {"facet45", "brewster"}
    facet = [g for g in js["geometries"] if g["geometry"] == "facet45"][0]
    assert facet["passes"] == 4
    assert 0 < facet["peak_absorbed_fraction_per_pass"] < facet["peak_absorbed_fraction_total"] < 1
    assert png.stat().st_size > 10_000


def test_absorption_table_with_density_and_linewidth(capsys):
    rc, out, err = run(capsys, "absorption", UNDOPED, "--density", "4e11cm^-2",
                       "--linewidth", "8meV")
    assert rc == 0, err
    assert "e1-e2" in out and "cm⁻¹" in out and "facet45" in out and "brewster" in out
    assert "active length" in out


@pytest.mark.parametrize("argv, words", [
    (["absorption", UNDOPED], ["--density", "0 < N <= 1e14"]),
    (["absorption", UNDOPED, "--density", "-1e11cm^-2"], ["--density", "1e+14"]),
    (["absorption", UNDOPED, "--density", "2e14cm^-2"], ["--density", "1e+14"]),
    (["absorption", UNDOPED, "--density", "4e11cm^-2", "--linewidth", "0meV"],
     ["--linewidth", "0 < FWHM"]),
    (["absorption", UNDOPED, "--density", "4e11cm^-2", "--linewidth", "-3meV"],
     ["--linewidth", "0 < FWHM"]),
    (["absorption", UNDOPED, "--populations", "self-consistent"],
     ["--populations", "no doping", "--density"]),
    (["absorption", UNDOPED, "--populations", "self-consistent", "--density", "4e11cm^-2"],
     ["--density", "not accepted"]),
    (["absorption", UNDOPED, "--density", "4e11"], ["--density", "no unit"]),
    (["gain", LASER, "--density", "2e14cm^-2"], ["--density", "1e+14"]),
    (["gain", LASER, "--densities", "1e11cm^-2:1e15cm^-2:10"], ["--densities", "1e+14"]),
    (["gain", LASER, "--densities", "1e11:1e13cm^-2:1"], ["--densities", "2 <= N"]),
    (["gain", LASER, "--linewidth", "0meV"], ["--linewidth", "0 < FWHM"]),
])
def test_bad_input_exit_2_names_option(capsys, argv, words):
    rc, out, err = run(capsys, *argv)
    assert rc == 2
    line = err.strip().splitlines()[-1]
    assert line.startswith("qwell: error:")
    for w in words:
        assert w in line


def test_gain_json_png_and_excitons(capsys, tmp_path):
    png = tmp_path / "gain.png"
    rc, out, err = run(capsys, "gain", LASER, "--density", "3e12cm^-2",
                       "--densities", "3e11cm^-2:1e13cm^-2:30", "--excitons", "--json",
                       "--png", str(png))
    assert rc == 0, err
    js = json.loads(out)
    for key in ("transparency_density_cm2", "table", "pairs", "spectrum", "excitons",
                "linewidth_meV", "active_length_nm"):
        assert key in js
    row = js["table"][0]
    assert set(row) >= {"density_cm2", "peak_gain_cm1", "peak_wavelength_um",
                        "fermi_separation_eV"}
    assert js["spectrum"]["density_cm2"] == pytest.approx(3e12)
    assert js["spectrum"]["peak_gain_cm1"] > 0
    assert {x["pair"] for x in js["excitons"]} == {"e1-hh1", "e1-lh1"}
    assert png.stat().st_size > 10_000
    # the continuum-carrier caution reaches the user on stderr
    assert "confinement limit" in err


def test_gain_table_text(capsys):
    rc, out, err = run(capsys, "gain", LASER, "--densities", "3e11cm^-2:5e12cm^-2:12")
    assert rc == 0, err
    assert "transparency density" in out and "valence-band mixing not included" in out

