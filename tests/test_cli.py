"""Command line: JSON contracts, readable tables, one-line errors with exit status 2."""

import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from qwell.cli import main

ROOT = Path(__file__).resolve().parents[1]
LAYERS = sorted((ROOT / "layers").glob("*.yaml"))

MATERIAL_KEYS = {"band_gap_eV", "lattice_constant_nm", "electron_mass", "valence_edge_eV",
                 "conduction_edge_eV", "heavy_hole_mass", "light_hole_mass", "spin_orbit_eV",
                 "kane_energy_eV", "c11_GPa", "c12_GPa", "ac_eV", "av_eV", "b_eV",
                 "dielectric_constant"}


def run(capsys, *argv):
    rc = main(list(argv))
    out, err = capsys.readouterr()
    return rc, out, err


def test_materials_json_contract(capsys):
    rc, out, err = run(capsys, "materials", "GaAs", "--temperature", "77K", "--json")
    assert rc == 0, err
    js = json.loads(out)
    assert set(js) >= {"name", "temperature_K", "parameters", "sources"}
    assert js["temperature_K"] == 77.0
    assert MATERIAL_KEYS <= set(js["parameters"])
    # every parameter names its published source
    assert all(js["sources"].get(k) for k in MATERIAL_KEYS)
    assert any("J. Appl. Phys. 89, 5815" in s for s in js["sources"].values())
    # Varshni: Eg(T) = Eg0 - alpha T^2/(T + beta), GaAs 1.519 eV, 0.5405 meV/K, 204 K
    # (Vurgaftman, Meyer, Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), from memory)
    assert js["parameters"]["band_gap_eV"] == pytest.approx(1.519 - 0.5405e-3 * 77**2 / (77 + 204), abs=1e-6)


def test_materials_list_and_table(capsys):
    rc, out, _ = run(capsys, "materials")
    assert rc == 0 and "AlGaAs" in out and "InGaAsP" in out
    rc, out, _ = run(capsys, "materials", "Al0.3Ga0.7As")
    assert rc == 0 and "band_gap_eV" in out and "[1]" in out


def test_profile_json_contract(capsys):
    rc, out, err = run(capsys, "profile", str(ROOT / "layers" / "pump-laser-well.yaml"), "--json")
    assert rc == 0, err
    js = json.loads(out)
    for key in ("z_nm", "conduction_edge_eV", "heavy_hole_edge_eV", "light_hole_edge_eV",
                "electron_mass", "layers"):
        assert key in js
    assert [lay["name"] for lay in js["layers"]] == ["lower_guide", "well", "upper_guide"]
    assert js["layers"][1]["strain_xx"] < 0


def test_profile_png(capsys, tmp_path):
    import matplotlib.image as mpimg
    png = tmp_path / "p.png"
    rc, out, err = run(capsys, "profile", str(ROOT / "layers" / "parabolic-well.yaml"), "--png", str(png))
    assert rc == 0, err
    img = mpimg.imread(png)
    assert img.shape[0] > 300 and img.shape[1] > 500
    assert float(np.std(img[..., :3])) > 0.05   # not blank


@pytest.mark.parametrize("path", LAYERS, ids=[p.stem for p in LAYERS])
def test_levels_json_contract_on_examples(capsys, path):
    rc, out, err = run(capsys, "levels", str(path), "--json")
    assert rc == 0, err
    js = json.loads(out)
    assert set(js) >= {"stack", "temperature_K", "method", "states", "transitions"}
    assert js["method"] == "exact"
    assert js["states"], "every example confines something"
    for s in js["states"]:
        assert set(s) >= {"band", "label", "index", "energy_eV", "bound", "lifetime_s"}
        assert s["band"] in ("conduction", "heavy_hole", "light_hole")
        assert s["label"].startswith({"conduction": "e", "heavy_hole": "hh", "light_hole": "lh"}[s["band"]])
        assert (s["lifetime_s"] is None) == s["bound"]
    for t in js["transitions"]:
        assert t["energy_eV"] > 0
        # lambda = hc/E with CODATA constants (scipy.constants): 1.239842 um eV
        assert t["wavelength_um"] == pytest.approx(1.2398419843320026 / t["energy_eV"], rel=1e-9)


def test_levels_table_and_transition_pick(capsys):
    rc, out, err = run(capsys, "levels", str(ROOT / "layers" / "lwir-detector.yaml"),
                       "--band", "conduction", "--transition", "e1-e2")
    assert rc == 0, err
    assert "e1" in out and "e2" in out and "Intersubband" in out


@pytest.mark.parametrize("barrier, well, widths, target_nm", [
    # Fact of the trade (common practice, no source): a GaAs well of about 8-10 nm between
    # Al0.3Ga0.7As barriers emits near 850 nm at room temperature; required within +-25 nm.
    ("Al0.30Ga0.70As", "GaAs", ("8 nm", "10 nm"), 850.0),
    # Fact of the trade (common practice, no source): a strained In0.2Ga0.8As well of about
    # 7-8 nm between GaAs barriers emits near 980 nm; required within +-25 nm.
    ("GaAs", "In0.2Ga0.8As", ("7 nm", "8 nm"), 980.0),
])
def test_interband_emission_facts_of_the_trade(capsys, tmp_path, barrier, well, widths, target_nm):
    for width in widths:
        f = tmp_path / "w.yaml"
        f.write_text(f"substrate: GaAs\nlayers:\n  - {{material: {barrier}, thickness: 30 nm}}\n"
                     f"  - {{material: {well}, thickness: {width}}}\n"
                     f"  - {{material: {barrier}, thickness: 30 nm}}\n")
        rc, out, err = run(capsys, "levels", str(f), "--json")
        assert rc == 0, err
        t = {x["from"] + "-" + x["to"]: x for x in json.loads(out)["transitions"]}["e1-hh1"]
        assert abs(1e3 * t["wavelength_um"] - target_nm) < 25.0


# --- bad input: one line, exit 2, no traceback, nothing written -------------------------

BAD = {
    "unknown material": ("layers:\n  - {material: GaAss, thickness: 5 nm}\n", r"bad\.yaml:2: .*GaAss.*did you mean"),
    "bare number": ("layers:\n  - {material: GaAs, thickness: 6.5}\n", r"bad\.yaml:2: .*thickness.*'5 nm'"),
    "wrong unit": ("layers:\n  - {material: GaAs, thickness: 5 eV}\n", r"bad\.yaml:2: .*thickness.*not a length"),
    "composition sum": ("layers:\n  - {material: Al0.3Ga0.6As, thickness: 5 nm}\n", r"bad\.yaml:2: .*sum"),
    "empty": ("layers: []\n", r"bad\.yaml:1: .*layers"),
    "not yaml": ("layers: [ {material: GaAs\n", r"bad\.yaml:\d+: .*YAML"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_stack_one_line_exit_2(capsys, tmp_path, case):
    text, pattern = BAD[case]
    f = tmp_path / "bad.yaml"
    f.write_text(text)
    png = tmp_path / "out.png"
    rc, out, err = run(capsys, "levels", str(f), "--png", str(png))
    assert rc == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert "Traceback" not in err
    import re
    assert re.search(pattern, lines[0]), lines[0]
    assert not png.exists()
    assert f.read_text() == text


def test_missing_file_and_usage(capsys, tmp_path):
    rc, out, err = run(capsys, "profile", str(tmp_path / "nope.yaml"))
    assert rc == 2 and "nope.yaml" in err and len(err.strip().splitlines()) == 1
    with pytest.raises(SystemExit) as exc:
        main(["levels", "x.yaml", "--method", "guess"])
    assert exc.value.code == 2


def test_png_to_missing_folder_writes_nothing(capsys, tmp_path):
    rc, out, err = run(capsys, "profile", str(ROOT / "layers" / "pump-laser-well.yaml"),
                       "--png", str(tmp_path / "no" / "p.png"))
    assert rc == 2 and "does not exist" in err


def test_console_entry_point_no_traceback(tmp_path):
    f = tmp_path / "bad.yaml"
    f.write_text("layers:\n  - {material: Unobtainium, thickness: 5 nm}\n")
    res = subprocess.run([sys.executable, "-m", "qwell.cli", "levels", str(f)],
                         capture_output=True, text=True, timeout=120)
    assert res.returncode == 2
    assert "Traceback" not in res.stderr and "Unobtainium" in res.stderr


def test_levels_spectrum_png(capsys, tmp_path):
    import matplotlib.image as mpimg
    png = tmp_path / "s.png"
    rc, out, err = run(capsys, "levels", str(ROOT / "layers" / "parabolic-well.yaml"),
                       "--band", "conduction", "--png", str(png))
    assert rc == 0, err
    img = mpimg.imread(png)
    assert img.shape[1] > 800 and float(np.std(img[..., :3])) > 0.05
    rc, out, err = run(capsys, "levels", str(ROOT / "layers" / "pump-laser-well.yaml"),
                       "--spectrum", "intersubband", "--png", str(tmp_path / "t.png"))
    assert rc == 2 and "no intersubband transitions" in err


def test_self_consistent_levels(capsys):
    path = str(ROOT / "layers" / "doped-detector.yaml")
    rc, out, err = run(capsys, "levels", path, "--band", "conduction", "--json")
    assert rc == 0, err
    js = json.loads(out)
    sc = js["self_consistent"]
    assert sc["converged"]
    # Charge neutrality (Gauss's law, no source needed): all donors, 5e17 cm^-3 over the
    # 19 ML well (a/2 at 77 K), end up as electrons in the subbands, to 1e-6 relative.
    from qwell.stack import load_stack
    well = load_stack(path).layers[1]
    n_total = sum(sc["sheet_densities_cm2"].values())
    assert n_total == pytest.approx(5e17 * well.thickness_nm * 1e-7, rel=1e-6)
    assert js["depolarisation"] and js["depolarisation"][0]["shift_eV"] > 0


def test_self_consistent_flag_on_undoped_stack_changes_nothing(capsys):
    path = str(ROOT / "layers" / "lwir-detector.yaml")
    rc, out, _ = run(capsys, "levels", path, "--band", "conduction", "--json")
    plain = json.loads(out)
    rc2, out2, err2 = run(capsys, "levels", path, "--band", "conduction", "--json", "--self-consistent")
    assert rc == rc2 == 0, err2
    sc = json.loads(out2)
    assert [s["energy_eV"] for s in sc["states"]] == [s["energy_eV"] for s in plain["states"]]


def test_self_consistent_refusal_shows_history(capsys, tmp_path):
    # 3e12 cm^-2 of barrier donors lift two narrow wells until their subbands cannot hold the
    # electrons (they would spill into the barrier continuum): refused with the history.
    f = tmp_path / "heavy.yaml"
    f.write_text("temperature: 77 K\nself_consistent: true\nlayers:\n"
                 "  - {material: Al0.30Ga0.70As, thickness: 30 nm, doping: {donors: 1e18 cm^-3, from: 5 nm, to: 20 nm}}\n"
                 "  - {material: GaAs, thickness: 8 nm}\n"
                 "  - {material: Al0.30Ga0.70As, thickness: 3 nm}\n"
                 "  - {material: GaAs, thickness: 6 nm}\n"
                 "  - {material: Al0.30Ga0.70As, thickness: 30 nm, doping: {donors: 1e18 cm^-3, from: 10 nm, to: 25 nm}}\n")
    rc, out, err = run(capsys, "levels", str(f))
    assert rc == 2
    assert len(err.strip().splitlines()) == 1 and "residual history, meV:" in err


@pytest.mark.parametrize("text, pattern", [
    # Varshni fits hold below ~1000 K and III-V breakdown fields are a few hundred kV/cm
    # (common practice, no source): beyond that the stack is refused.
    ("temperature: 3000 K\nlayers:\n  - {material: GaAs, thickness: 5 nm}\n", r"bad\.yaml:1: temperature: .*above 1000 K"),
    ("field: 1e6 kV/cm\nlayers:\n  - {material: GaAs, thickness: 5 nm}\n", r"bad\.yaml:1: field: .*beyond"),
])
def test_absurd_conditions_refused(capsys, tmp_path, text, pattern):
    import re
    f = tmp_path / "bad.yaml"
    f.write_text(text)
    rc, out, err = run(capsys, "levels", str(f))
    assert rc == 2 and re.search(pattern, err.strip()), err


def test_negative_option_values_and_bad_outputs(capsys, tmp_path):
    lw = str(ROOT / "layers" / "lwir-detector.yaml")
    # '--from -5kV/cm' is read as a value, not an option
    rc, out, err = run(capsys, "sweep", lw, "--vary", "field", "--from", "-5kV/cm", "--to", "5kV/cm",
                       "--points", "3")
    assert rc == 0, err
    rc, out, err = run(capsys, "tolerance", lw, "--transition", "e1-e2", "--composition", "-0.01")
    assert rc == 2 and "is negative" in err
    rc, out, err = run(capsys, "levels", lw, "--png", str(tmp_path / "x.txt"))
    assert rc == 2 and "cannot write a figure as '.txt'" in err
    assert not (tmp_path / "x.txt").exists()


def test_sub_monolayer_layer_warns(capsys, tmp_path):
    f = tmp_path / "thin.yaml"
    f.write_text("layers:\n  - {material: Al0.30Ga0.70As, thickness: 10 nm}\n"
                 "  - {material: GaAs, thickness: 0.1 nm, name: sliver}\n"
                 "  - {material: Al0.30Ga0.70As, thickness: 10 nm}\n")
    rc, out, err = run(capsys, "profile", str(f))
    assert rc == 0 and "sliver: thinner (0.1 nm) than one monolayer" in err   # stderr only
    assert "warning:" not in out


def test_hole_intersubband_on_request(capsys):
    lw = str(ROOT / "layers" / "lwir-detector.yaml")
    rc, out, _ = run(capsys, "levels", lw, "--json")
    names = {t["from"] + "-" + t["to"] for t in json.loads(out)["transitions"]}
    assert "hh1-hh2" not in names
    rc, out, err = run(capsys, "levels", lw, "--json", "--hole-intersubband")
    assert rc == 0, err
    js = json.loads(out)
    t = {x["from"] + "-" + x["to"]: x for x in js["transitions"]}["hh1-hh2"]
    e = {s["label"]: s["energy_eV"] for s in js["states"]}
    # a hole transition absorbs hbar*omega = E(hh1) - E(hh2) > 0 on the band-diagram scale
    assert t["kind"] == "intersubband" and t["energy_eV"] == pytest.approx(e["hh1"] - e["hh2"], abs=1e-9)


def test_levels_json_wavefunctions_and_spectrum(capsys, tmp_path):
    rc, out, err = run(capsys, "levels", str(ROOT / "layers" / "pump-laser-well.yaml"), "--json",
                       "--wavefunctions", "--png", str(tmp_path / "s.png"))
    assert rc == 0, err
    js = json.loads(out)
    for s in js["states"]:
        z, psi = np.array(s["z_nm"]), np.array(s["psi"])
        # Born's rule: int |psi|^2 dz = 1 (the tails beyond the grid hold < 1e-4 here)
        assert np.trapezoid(psi ** 2, z) == pytest.approx(1.0, abs=1e-4)
        assert sum(s["layer_probability"]) == pytest.approx(1.0, abs=1e-9)
    spec = js["spectrum"]
    assert len(spec["energy_eV"]) == len(spec["absorption"]) and max(spec["absorption"]) == pytest.approx(1.0)


def test_parser_has_the_commands_the_readme_lists():
    # The README's command table is the user's list of commands; a second parser built in the
    # same process has the same commands (nothing is registered into shared state).
    from qwell.cli import build_parser
    readme = (ROOT / "README.md").read_text()
    listed = set(re.findall(r"^\| `qwell (\w+)", readme, flags=re.M))
    assert listed == {"materials", "profile", "levels", "size", "sweep", "tolerance", "report",
                      "absorption", "gain"}
    for _ in range(2):
        sub = next(a for a in build_parser()._actions if a.dest == "command")
        assert set(sub.choices) == listed


def test_cli_modules_import_at_the_top_only():
    # The dependency graph of the command line is visible at the top of each module
    # (common practice, no source): no import statement inside a function or class.
    import ast
    for path in sorted((ROOT / "qwell" / "cli").glob("*.py")):
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                inner = [n for n in ast.walk(node) if isinstance(n, (ast.Import, ast.ImportFrom))]
                assert not inner, f"{path.name}: import inside {node.name}"


def test_self_consistent_flag_does_not_outlive_its_command(capsys):
    # A --self-consistent run followed by a plain one in the same process: the second is the
    # flat-band solve again (no Schrödinger-Poisson summary in its JSON).
    lw = str(ROOT / "layers" / "lwir-detector.yaml")
    rc, out, err = run(capsys, "levels", lw, "--band", "conduction", "--json", "--self-consistent")
    assert rc == 0, err
    assert json.loads(out)["self_consistent"] is not None
    rc, out, err = run(capsys, "levels", lw, "--band", "conduction", "--json")
    assert rc == 0, err
    assert json.loads(out)["self_consistent"] is None
