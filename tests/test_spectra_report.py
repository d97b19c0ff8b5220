"""The report's absolute spectra: populated subbands only, stated reference density, gain parts."""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest

from qwell.errors import ValidityWarning
from qwell.levels import prepare_profile, solve_profile
from qwell.report.spectra import (
    GAIN_DENSITIES_CM2,
    REFERENCE_DENSITY_CM2,
    report_spectra,
    spectra_draw,
    spectra_rows,
)
from qwell.stack import load_stack

ROOT = Path(__file__).resolve().parents[1]


def _solve(name):
    stack = load_stack(ROOT / "layers" / name)
    prof, sc = prepare_profile(stack)
    return stack, solve_profile(prof), sc


def test_doped_detector_uses_its_own_populations():
    stack, sol, sc = _solve("doped-detector.yaml")
    spec = report_spectra(stack, sol, charge=sc, laser=False)
    assert spec.gain is None and spec.absorption is not None
    assert spec.absorption.populations == "self-consistent"
    # the populations are the Schrödinger–Poisson sheet densities, nothing else
    assert spec.absorption.total_density_cm2 == pytest.approx(sc.total_electrons_cm2, rel=1e-9)
    assert [p.geometry for p in spec.passes] == ["facet45", "brewster"]
    rows = dict(spectra_rows(spec))
    assert "cm⁻¹" in rows["peak α (z-polarised)"]


def test_undoped_detector_states_its_reference_density():
    stack, sol, sc = _solve("lwir-detector.yaml")
    spec = report_spectra(stack, sol, charge=sc, laser=False)
    assert spec.absorption.total_density_cm2 == pytest.approx(REFERENCE_DENSITY_CM2)
    assert f"{REFERENCE_DENSITY_CM2:.0e}" in spec.absorption_basis


def test_laser_well_gain_and_transparency():
    stack, sol, sc = _solve("pump-laser-well.yaml")
    with warnings.catch_warnings():
        # the shallow InGaAs/GaAs conduction well: continuum-carrier caution expected
        warnings.simplefilter("ignore", ValidityWarning)
        spec = report_spectra(stack, sol, charge=sc)
    # one electron subband: no intersubband line, said in a note
    assert spec.absorption is None and any("intersubband" in n for n in spec.notes)
    g = spec.gain
    assert np.isfinite(g.transparency_density_cm2)
    assert [g.densities_cm2[i] for i in spec.gain_indices] == pytest.approx(list(GAIN_DENSITIES_CM2))
    import matplotlib
    matplotlib.use("Agg")
    from matplotlib.figure import Figure
    fig = Figure(figsize=(8, 6))
    spectra_draw(spec)(fig, (0.05, 0.05, 0.9, 0.9))
    assert len(fig.axes) == 2


def test_report_shows_alpha_for_a_detector_and_gain_for_a_laser_well():
    from qwell.report import collect_report_data

    det = collect_report_data(load_stack(ROOT / "layers" / "lwir-detector.yaml"),
                              sensitivity=False)
    assert det.spectra.absorption is not None and det.spectra.gain is None
    laser = collect_report_data(load_stack(ROOT / "layers" / "pump-laser-well.yaml"),
                                sensitivity=False)
    assert laser.spectra.gain is not None and laser.spectra.absorption is None
    # the continuum-carrier caution of the shallow InGaAs/GaAs well is listed, not lost
    assert any("confinement limit" in w for w in laser.warnings)
