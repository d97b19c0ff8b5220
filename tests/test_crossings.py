"""Anticrossings found in field sweeps, lines that appear inside a sweep, reversed line names.

Two-level anticrossing: two identical wells coupled through a barrier, tuned through
resonance by a field, approach to a minimum gap equal to the zero-field splitting of the
symmetric double well (the tunnel splitting 2|V| of the two-level model: G. Bastard, Wave
Mechanics Applied to Semiconductor Heterostructures, Les Éditions de Physique (1988), the
chapter on coupled wells (from memory); C. Cohen-Tannoudji, B. Diu, F. Laloë, Quantum
Mechanics vol. 1, Wiley (1977), ch. IV, two-level anticrossing).
"""

from __future__ import annotations

import numpy as np
import pytest

from qwell import design
from qwell.cli import main
from qwell.design.crossings import find_anticrossings
from qwell.errors import ParameterError
from qwell.levels import solve_stack
from qwell.stack import stack_from_text

DOUBLE_WELL = """
name: symmetric double well
temperature: 10 K
substrate: GaAs
layers:
  - {material: Al0.3Ga0.7As, thickness: 25 nm, name: left_barrier}
  - {material: GaAs, thickness: 6 nm, name: left_well}
  - {material: Al0.3Ga0.7As, thickness: 3 nm, name: middle_barrier}
  - {material: GaAs, thickness: 6 nm, name: right_well}
  - {material: Al0.3Ga0.7As, thickness: 25 nm, name: right_barrier}
"""


@pytest.mark.slow
def test_anticrossing_gap_is_the_zero_field_doublet_splitting():
    stack = stack_from_text(DOUBLE_WELL)
    sol = solve_stack(stack, bands="conduction")
    e = {s.label: s.energy_eV for s in sol.states}
    splitting = e["e2"] - e["e1"]
    # a grid that does not contain the resonance (F = 0): the gap comes from the parabola in g²
    fields = np.linspace(-13.3, 14.7, 15)
    res = design.sweep(stack, "field", fields, ["e1-e2"], jobs=1)
    pairs = [a for a in res.anticrossings if (a.lower, a.upper) == ("e1", "e2")]
    assert len(pairs) == 1
    a = pairs[0]
    assert a.gap_eV == pytest.approx(splitting, rel=0.01)   # the 1 %
    assert abs(a.value) < 0.5                                # resonance of identical wells: F = 0
    assert a.grid_gap_eV > a.gap_eV


def test_two_level_hyperbola_is_recovered_exactly():
    # E± = ±sqrt((a F)² + V²) (two-level model, Cohen-Tannoudji et al. ch. IV): minimum gap 2V
    F = np.linspace(-7.7, 9.1, 9)
    V, a = 2.5e-3, 1.2e-3
    w = np.sqrt((a * (F - 0.9)) ** 2 + V ** 2)
    found = find_anticrossings("field", "kV/cm", F, {"e1": -w, "e2": w})
    assert len(found) == 1
    assert found[0].gap_eV == pytest.approx(2 * V, rel=1e-9)
    assert found[0].value == pytest.approx(0.9, abs=2e-3)


def test_parallel_levels_are_not_anticrossings():
    F = np.linspace(0, 10, 11)
    found = find_anticrossings("field", "kV/cm", F, {"e1": 0.01 * F, "e2": 0.01 * F + 0.05
                                                     + 1e-4 * (F - 5) ** 2})
    assert found == ()


def test_sweep_follows_a_line_that_appears_inside_the_range():
    # e1-e3 of a GaAs/Al0.25Ga0.75As well needs e3 bound: absent in thin wells, present in wide
    stack = stack_from_text("""
name: widening well
temperature: 77 K
substrate: GaAs
layers:
  - {material: Al0.25Ga0.75As, thickness: 30 nm, name: top_barrier}
  - {material: GaAs, thickness: 6 nm, name: well}
  - {material: Al0.25Ga0.75As, thickness: 30 nm, name: bottom_barrier}
""")
    res = design.sweep(stack, "well.thickness", [4.0, 8.0, 12.0, 14.0, 16.0], ["e3-e1"], jobs=1)
    assert res.transitions == ("e1-e3",)
    lam = res.wavelength_um["e1-e3"]
    assert np.isnan(lam[0]) and np.isfinite(lam[-2:]).all()
    assert np.isfinite(res.sensitivity["e1-e3"]["well.thickness"][-2:]).all()
    assert any("e1-e3 exists only for well.thickness" in n for n in res.notes)


def test_sweep_reference_follows_the_edge_at_the_layer_centre(capsys):
    # a uniform field F adds e F z to every edge (z from the first layer's start):
    # 1 kV/cm over 1 nm is 1e5 V/m x 1e-9 m = 1e-4 eV (SI definition of the volt, no source)
    stack = stack_from_text(DOUBLE_WELL)
    fields = [-10.0, 0.0, 10.0]
    res = design.sweep(stack, "field", fields, ["e1-e2"], jobs=1, reference="right_well")
    z_c = 25 + 6 + 3 + 3.0                      # centre of right_well [nm]
    edge = np.asarray(res.reference_edge_eV["conduction"])
    assert edge - edge[1] == pytest.approx([f * 1e-4 * z_c for f in fields], abs=1e-9)
    shown = res.state_energy_shown("e1")
    assert shown == pytest.approx(np.asarray(res.state_energy_eV["e1"]) - edge)
    with pytest.raises(ParameterError, match="left_barrier, left_well, middle_barrier"):
        design.sweep(stack, "field", fields, jobs=1, reference="middle")


def test_cli_reference_naming_no_layer_exits_2(capsys, tmp_path):
    path = tmp_path / "dw.yaml"
    path.write_text(DOUBLE_WELL)
    for cmd in (["sweep", str(path), "--vary", "field", "--from", "0kV/cm", "--to", "1kV/cm",
                 "--points", "2"], ["levels", str(path)]):
        rc = main(cmd + ["--reference", "nowhere"])
        err = capsys.readouterr().err
        assert rc == 2
        assert "'nowhere': no such layer" in err and "right_barrier" in err
