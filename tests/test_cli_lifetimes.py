"""Command line and design engine: --lifetimes, --emitter (behaviour, JSON keys, bad input)."""

import json
from pathlib import Path

import numpy as np
import pytest

from qwell.cli import main
from qwell.design import design_point, size, sweep
from qwell.stack import load_stack

ROOT = Path(__file__).resolve().parents[1]
EMITTER = str(ROOT / "layers" / "midir-emitter.yaml")


def run(capsys, *argv):
    rc = main(list(argv))
    out, err = capsys.readouterr()
    return rc, out, err


def test_levels_lifetimes_text_and_json(capsys):
    rc, out, err = run(capsys, "levels", EMITTER, "--band", "conduction", "--lifetimes")
    assert rc == 0, err
    assert "LO-phonon scattering times in ps" in out
    assert "Emitter line e3->e2" in out and "z² tau_u (1 - tau_l/tau_ul)" in out
    rc, out, err = run(capsys, "levels", EMITTER, "--lifetimes", "--emitter", "e2-e3",
                       "--json")
    assert rc == 0, err
    lt = json.loads(out)["lifetimes"]
    assert set(lt) == {"rates", "radiative", "emitter", "lines", "notes"}
    em = lt["emitter"]
    assert em["upper"] == "e3" and em["lower"] == "e2"
    for key in ("tau_upper_ps", "tau_lower_ps", "tau_upper_lower_ps", "inversion_factor_ps",
                "figure_of_merit_nm2_ps", "gain_per_current_cm_per_kA", "cross_section_cm2"):
        assert isinstance(em[key], float), key
    # consistency of the document with its own definitions (z^2 tau_u (1 - tau_l/tau_ul))
    assert em["figure_of_merit_nm2_ps"] == pytest.approx(
        em["dipole_nm"] ** 2 * em["tau_upper_ps"] * (1 - em["tau_lower_ps"]
                                                     / em["tau_upper_lower_ps"]))
    assert {"from", "to", "emission_per_s", "absorption_per_s", "time_ps"} == set(
        lt["rates"]["pairs"][0])
    assert lt["rates"]["phonon"]["energy_meV"] == pytest.approx(30.2)
    rc, out, err = run(capsys, "levels", EMITTER, "--band", "conduction", "--lifetimes",
                       "--thermal", "--period", "50")
    assert rc == 0, err
    assert "thermal average over each subband" in out and "stage 50 nm" in out


@pytest.mark.parametrize("argv, message", [
    (["--lifetimes", "--band", "heavy_hole"], "conduction states of this stack: e1, e2, e3"),
    (["--lifetimes", "--emitter", "hh1-hh2"], "hh1 is a valence state"),
    (["--lifetimes", "--emitter", "e2-e9"], "conduction states: e1, e2, e3; lines: "),
    (["--emitter", "e2-e3"], "go with --lifetimes"),
    (["--lifetimes", "--method", "semiclassical"], "needs wavefunctions"),
    (["--lifetimes", "--period", "-3"], "positive length"),
])
def test_levels_lifetimes_bad_input_exits_2(capsys, argv, message):
    rc, out, err = run(capsys, "levels", EMITTER, *argv)
    assert rc == 2
    assert err.startswith("qwell: error: ") and message in err
    assert "Traceback" not in err


def test_user_material_without_phonon_data(tmp_path, capsys):
    p = tmp_path / "u.yaml"
    p.write_text("""
materials:
  wall: {conduction_edge: 0.30 eV, electron_mass: 0.067}
  core: {conduction_edge: 0.0 eV, electron_mass: 0.067}
layers:
  - {material: wall, thickness: 15 nm}
  - {material: core, thickness: 9 nm}
  - {material: wall, thickness: 15 nm}
""")
    rc, out, err = run(capsys, "levels", str(p), "--lifetimes")
    assert rc == 2
    assert ("missing lo_phonon_energy, high_frequency_dielectric_constant, dielectric_constant"
            in err)
    # with the keys given the same stack works
    p.write_text(p.read_text().replace(
        "core: {conduction_edge: 0.0 eV, electron_mass: 0.067}",
        "core: {conduction_edge: 0.0 eV, electron_mass: 0.067, lo_phonon_energy: 36 meV, "
        "high_frequency_dielectric_constant: 10.9, dielectric_constant: 12.9}"))
    rc, out, err = run(capsys, "levels", str(p), "--lifetimes", "--json")
    assert rc == 0, err
    assert json.loads(out)["lifetimes"]["rates"]["phonon"]["energy_meV"] == pytest.approx(36.0)


def test_design_engine_follows_the_emitter_line():
    stack = load_stack(EMITTER)
    point = design_point(stack, {}, emitter="e2-e3")
    assert dict(point.emitter)["line"] == "e3->e2"
    assert point.emitter_value("figure_of_merit_nm2_ps") > 0
    assert point.lifetime_ps("e3") == pytest.approx(point.emitter_value("tau_upper_ps"))
    assert np.isnan(design_point(stack, {}).emitter_value("tau_upper_ps"))
    res = sweep(stack, "w2.thickness", [4.4, 4.6, 4.8], ["e2-e3"], emitter="e2-e3", jobs=1)
    assert res.emitter_line == "e3->e2"
    assert res.emitter["tau_upper_ps"].shape == (3,)
    # the sweep point at the stack's own value is the single design, bit for bit
    assert res.emitter["tau_upper_ps"][1] == point.emitter_value("tau_upper_ps")
    assert "e3 lifetime [ps]" in res.to_csv().splitlines()[0]
    sized = size(stack, "w2.thickness", "8.5 um", "e2-e3", emitter="e2-e3")
    assert dict(sized.emitter)["line"] == "e3->e2"
    assert all(o.emitter for o in sized.monolayer_options)


def test_sweep_and_size_commands_with_emitter(capsys, tmp_path):
    png = tmp_path / "s.png"
    rc, out, err = run(capsys, "sweep", EMITTER, "--vary", "w2.thickness", "--from", "4.4nm",
                       "--to", "4.8nm", "--points", "3", "--transition", "e2-e3",
                       "--emitter", "e2-e3", "--jobs", "1", "--png", str(png))
    assert rc == 0, err
    assert "tau_u ps" in out and "z²τ nm² ps" in out and png.exists()
    rc, out, err = run(capsys, "sweep", EMITTER, "--vary", "w2.thickness", "--from", "4.4nm",
                       "--to", "4.8nm", "--points", "3", "--emitter", "e2-e3", "--jobs", "1",
                       "--json")
    assert rc == 0, err
    em = json.loads(out)["emitter"]
    assert em["line"] == "e3->e2" and len(em["figure_of_merit_nm2_ps"]) == 3
    rc, out, err = run(capsys, "size", EMITTER, "--vary", "w2.thickness", "--target", "8.5um",
                       "--transition", "e2-e3", "--emitter", "e2-e3", "--json")
    assert rc == 0, err
    doc = json.loads(out)
    assert doc["emitter"]["line"] == "e3->e2" and doc["lifetimes_ps"]["e3"] > 0
    rc, out, err = run(capsys, "sweep", EMITTER, "--vary", "w2.thickness", "--from", "4.4nm",
                       "--to", "4.8nm", "--points", "2", "--emitter", "e5-e9", "--jobs", "1")
    assert rc == 2 and "bound conduction states there: e1, e2, e3" in err
