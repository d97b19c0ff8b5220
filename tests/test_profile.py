"""Band-edge profiles (qwell.profile): grading, field, strain, claddings, JSON."""

import math

import numpy as np
import pytest

from qwell.materials import get_material
from qwell.profile import FIELD_EV_PER_NM_PER_KV_CM, band_profile
from qwell.stack import stack_from_text
from qwell.strain import strain
from qwell.cli.json_out import profile_json


def _stack(text):
    return stack_from_text(text, file="test.yaml")


def test_uniform_layers_are_flat_pieces_with_material_edges():
    st = _stack("""
temperature: 300 K
layers:
  - {material: Al0.30Ga0.70As, thickness: 10 nm}
  - {material: GaAs, thickness: 6 nm}
  - {material: Al0.30Ga0.70As, thickness: 10 nm}
""")
    prof = band_profile(st)
    cb = prof.bands["conduction"]
    assert [p.kind for p in cb.pieces] == ["flat"] * 3
    gaas = get_material("GaAs", 300.0)
    barrier = get_material("Al0.30Ga0.70As", 300.0)
    assert cb.potential([13.0])[0] == pytest.approx(gaas.conduction_edge_eV, abs=1e-12)
    assert cb.potential([-100.0])[0] == pytest.approx(barrier.conduction_edge_eV, abs=1e-12)
    hh = prof.bands["heavy_hole"]
    # carrier convention for holes: V = -Ev (qwell.bands docstring)
    assert hh.potential([13.0])[0] == pytest.approx(-gaas.valence_edge_eV, abs=1e-12)
    assert hh.edge_mass([13.0])[0] == pytest.approx(gaas.heavy_hole_mass)
    assert cb.nonparabolic and not hh.nonparabolic


def test_linear_grade_interpolates_composition():
    # A linear grade between two members of one alloy family interpolates the
    # composition (so bowing is honoured), not the parameters (stack format rule).
    st = _stack("""
layers:
  - {material: GaAs, thickness: 5 nm}
  - grade: {from: Al0.30Ga0.70As, to: GaAs, shape: linear}
    thickness: 10 nm
  - {material: GaAs, thickness: 5 nm}
""")
    prof = band_profile(st)
    cb = prof.bands["conduction"]
    mid = get_material("Al0.15Ga0.85As", 300.0)
    assert cb.pieces[1].kind == "smooth"
    assert cb.potential([10.0])[0] == pytest.approx(mid.conduction_edge_eV, abs=1e-9)
    q = get_material("Al0.225Ga0.775As", 300.0)   # t = 0.25 -> x = 0.30 * (1 - 0.25)
    assert cb.potential([7.5])[0] == pytest.approx(q.conduction_edge_eV, abs=1e-9)


def test_parabolic_grade_vertex():
    # f = 1 - (1 - t)^2 for vertex 'end': x(t) = 0.3 (1 - f) = 0.3 (1 - t)^2.
    st = _stack("""
layers:
  - {material: Al0.30Ga0.70As, thickness: 5 nm}
  - grade: {from: Al0.30Ga0.70As, to: GaAs, shape: parabolic, vertex: end}
    thickness: 10 nm
  - {material: GaAs, thickness: 5 nm}
""")
    cb = band_profile(st).bands["conduction"]
    t = 0.4
    x = 0.3 * (1 - t) ** 2
    ref = get_material(f"Al{x:.6f}Ga{1 - x:.6f}As", 300.0)
    assert cb.potential([5.0 + 10 * t])[0] == pytest.approx(ref.conduction_edge_eV, abs=1e-9)


def test_field_tilts_listed_layers_only():
    # +e F z on every band edge over the listed layers; 1 kV/cm = 1e-4 eV/nm
    # (definition of the volt, common practice, no source).
    st = _stack("""
field: 20 kV/cm
layers:
  - {material: Al0.30Ga0.70As, thickness: 10 nm}
  - {material: GaAs, thickness: 6 nm}
  - {material: Al0.30Ga0.70As, thickness: 10 nm}
""")
    prof = band_profile(st)
    cb = prof.bands["conduction"]
    slope = 20 * FIELD_EV_PER_NM_PER_KV_CM
    assert FIELD_EV_PER_NM_PER_KV_CM == pytest.approx(1e-4)
    assert cb.potential([26.0])[0] - cb.potential([0.0])[0] == pytest.approx(26 * slope)
    assert cb.potential([500.0])[0] == pytest.approx(cb.potential([26.0])[0])   # flat cladding
    vb = prof.bands["heavy_hole"]
    assert vb.potential([26.0])[0] - vb.potential([0.0])[0] == pytest.approx(-26 * slope)


def test_strain_shifts_follow_strain_module():
    st = _stack("""
substrate: GaAs
layers:
  - {material: GaAs, thickness: 20 nm}
  - {material: In0.2Ga0.8As, thickness: 7 nm, name: well}
  - {material: GaAs, thickness: 20 nm}
""")
    prof = band_profile(st)
    mat = get_material("In0.2Ga0.8As", 300.0)
    s = strain(mat, get_material("GaAs", 300.0))
    lay = prof.layers[1]
    # eps_xx = (a_sub - a)/a: Chuang, Physics of Optoelectronic Devices (1995), ch. 4
    assert lay.strain_xx == pytest.approx(s.eps_xx)
    assert lay.strain_xx == pytest.approx(-0.014, abs=0.001)   # common practice: ~ -1.4 %
    assert lay.strain_zz == pytest.approx(s.eps_zz)
    assert lay.strain_shift_conduction_eV == pytest.approx(s.delta_conduction_eV)
    assert lay.strain_shift_heavy_hole_eV == pytest.approx(s.delta_heavy_hole_eV)
    assert lay.strain_shift_light_hole_eV == pytest.approx(s.delta_light_hole_eV)
    assert profile_json(prof)["layers"][1]["strain_shift_conduction_eV"] == pytest.approx(
        s.delta_conduction_eV)
    cb = prof.bands["conduction"]
    assert cb.potential([23.0])[0] == pytest.approx(mat.conduction_edge_eV + s.delta_conduction_eV)
    hh = prof.bands["heavy_hole"]
    lh = prof.bands["light_hole"]
    # compression puts the heavy hole above the light hole (common practice, no source)
    assert -hh.potential([23.0])[0] > -lh.potential([23.0])[0]
    # buried 7 nm In0.2Ga0.8As is below its critical thickness (~15 nm, order 10-20 nm:
    # Matthews & Blakeslee, J. Cryst. Growth 27, 118 (1974))
    assert 10.0 < lay.critical_thickness_nm < 20.0
    assert not lay.warnings


def test_thick_strained_layer_warns():
    st = _stack("""
substrate: GaAs
layers:
  - {material: GaAs, thickness: 20 nm}
  - {material: In0.3Ga0.7As, thickness: 30 nm, name: well}
  - {material: GaAs, thickness: 20 nm}
""")
    prof = band_profile(st)
    assert any("critical thickness" in w for w in prof.layers[1].warnings)
    assert any("well" in w and "critical thickness" in w for w in prof.warnings)


def test_user_materials_without_valence_have_no_hole_band():
    st = _stack("""
materials:
  wall: {conduction_edge: 0.30 eV, electron_mass: 0.067}
  core: {conduction_edge: 0.0 eV, electron_mass: 0.067}
layers:
  - {material: wall, thickness: 10 nm}
  - {material: core, thickness: 5 nm}
  - {material: wall, thickness: 10 nm}
""")
    prof = band_profile(st)
    assert set(prof.bands) == {"conduction"}
    assert not prof.bands["conduction"].nonparabolic or prof.bands["conduction"].pieces[1].gap_eV is None


def test_json_contract_and_samples():
    st = _stack("""
name: json check
substrate: GaAs
layers:
  - {material: Al0.30Ga0.70As, thickness: 10 nm, name: left}
  - {material: GaAs, thickness: 23 ML, name: well}
  - {material: Al0.30Ga0.70As, thickness: 10 nm, name: right}
""")
    prof = band_profile(st)
    js = profile_json(prof)
    for key in ("z_nm", "conduction_edge_eV", "heavy_hole_edge_eV", "light_hole_edge_eV",
                "electron_mass", "layers"):
        assert key in js
    assert len(js["z_nm"]) == len(js["conduction_edge_eV"]) == len(js["electron_mass"])
    lay = js["layers"][1]
    assert set(lay) >= {"name", "material", "start_nm", "end_nm", "strain_xx", "warnings"}
    assert lay["name"] == "well"
    # 23 ML of GaAs = 23 a/2, a = 0.565325 nm (Vurgaftman et al., J. Appl. Phys. 89, 5815 (2001), from memory)
    assert lay["end_nm"] - lay["start_nm"] == pytest.approx(23 * 0.565325 / 2, rel=1e-9)
    z = np.array(js["z_nm"])
    # both sides of each interface are sampled, so steps plot vertically
    assert np.sum(np.isclose(z, 10.0)) == 2
    assert math.isclose(z[-1], lay["end_nm"] + 10.0)


def test_band_offsets_gaas_algaas_share():
    # Fact of the trade (common practice, no source): for GaAs/AlGaAs (x < 0.45) about
    # 60-67 % of the gap difference falls in the conduction band.
    st = _stack("""
substrate: GaAs
layers:
  - {material: Al0.30Ga0.70As, thickness: 10 nm, name: left}
  - {material: GaAs, thickness: 6 nm, name: well}
  - {material: Al0.30Ga0.70As, thickness: 10 nm, name: right}
""")
    offs = band_profile(st).band_offsets()
    assert [(o["left"], o["right"]) for o in offs] == [("left", "well"), ("well", "right")]
    assert 0.60 <= offs[0]["conduction_share"] <= 0.67
    assert offs[0]["delta_conduction_eV"] == pytest.approx(-offs[1]["delta_conduction_eV"])


def test_ingaas_offset_split_is_flagged():
    # Pitfall (physics notes; Huang et al., Appl. Phys. Lett. (1989), from memory): interpolated
    # tables put ~37 % of the In0.2Ga0.8As/GaAs offset in the conduction band, measurements ~70 %.
    st = _stack("""
substrate: GaAs
layers:
  - {material: GaAs, thickness: 20 nm}
  - {material: In0.2Ga0.8As, thickness: 7 nm, name: well}
  - {material: GaAs, thickness: 20 nm}
""")
    prof = band_profile(st)
    assert prof.band_offsets()[0]["conduction_share"] < 0.5
    assert any("60-70 %" in w for w in prof.warnings)
