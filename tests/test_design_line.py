"""The design line: declared in the stack, defaulted from the physics, the same in every command.

Outside references: the 2-D density of states with Fermi-Dirac occupation,
n_i = (m kT / pi hbar^2) ln(1 + exp((E_F - E_i)/kT)) (J. H. Davies, The
Physics of Low-Dimensional Semiconductors, Cambridge University Press 1998,
section on the two-dimensional electron gas; chapter number from memory), the
depolarisation shift of Ando, Fowler and Stern (Rev. Mod. Phys. 54, 437
(1982)), and CODATA constants from scipy.constants.
"""

import json
import re
import math
import warnings
from pathlib import Path

import numpy as np
import pytest
import scipy.constants as sc_const

from qwell import design
from qwell.cli import main
from qwell.design.line import design_line
from qwell.errors import StackError
from qwell.levels import solve_stack
from qwell.stack import load_stack, stack_from_text

ROOT = Path(__file__).resolve().parents[1]
LAYERS = sorted((ROOT / "layers").glob("*.yaml"))


def run(capsys, *argv):
    rc = main(list(argv))
    out, err = capsys.readouterr()
    return rc, out, err


WELL = """name: box
temperature: 300 K
substrate: GaAs
{line}layers:
  - {{material: Al0.30Ga0.70As, thickness: 20 nm, name: lower}}
  - {{material: GaAs, thickness: {t} nm, name: well}}
  - {{material: Al0.30Ga0.70As, thickness: 20 nm, name: upper}}
"""


def test_declared_line_is_read_with_its_target():
    st = stack_from_text(WELL.format(line="line: {transition: e1-hh1, target: 850 nm}\n", t=6),
                         "w.yaml")
    d = st.declared_line
    assert d.transition == "e1-hh1" and d.target_text == "850 nm" and d.line == 4
    # E = h c / lambda (CODATA via scipy.constants)
    assert d.target_eV == pytest.approx(sc_const.h * sc_const.c / 850e-9 / sc_const.e, rel=1e-12)


def test_every_example_declares_its_line():
    for path in LAYERS:
        st = load_stack(path)
        assert st.declared_line is not None, path.name


@pytest.mark.parametrize("target", ["3 kg", "12 nm^2", "7", "true"])
def test_non_spectral_target_names_file_and_line(capsys, tmp_path, target):
    f = tmp_path / "bad.yaml"
    f.write_text(WELL.format(line=f"line: {{transition: e1-e2, target: {target}}}\n", t=6))
    with pytest.raises(StackError):
        load_stack(f)
    rc, out, err = run(capsys, "levels", str(f))
    assert rc == 2 and out == ""
    assert err.startswith(f"qwell: error: {f}:4: line.target: ")
    assert len(err.strip().splitlines()) == 1


def test_bad_transition_name_is_refused(capsys, tmp_path):
    f = tmp_path / "bad.yaml"
    f.write_text(WELL.format(line="line: {transition: e1e2}\n", t=6))
    rc, _, err = run(capsys, "levels", str(f))
    assert rc == 2 and f"{f}:4: line.transition" in err


@pytest.mark.parametrize("cmd", ["levels", "tolerance"])
def test_declared_line_absent_names_the_states(capsys, tmp_path, cmd):
    f = tmp_path / "absent.yaml"
    f.write_text(WELL.format(line="line: {transition: e3-e4}\n", t=4))
    rc, out, err = run(capsys, cmd, str(f))
    assert rc == 2, err
    assert "'e3-e4' does not exist at the nominal design" in err
    # the states of the bands the line needs: an intersubband line, so conduction only
    assert "states there: e1\n" in err or "states there: e1;" in err
    assert len(err.strip().splitlines()) == 1


def test_default_line_follows_the_physics():
    quiet = warnings.catch_warnings()
    with quiet:
        warnings.simplefilter("ignore")
        # two bound electron states: the intersubband pair
        assert design_line(stack_from_text(WELL.format(line="", t=8), "w.yaml")).transition \
            == "e1-e2"
        # one bound electron state, unstrained GaAs: heavy holes lie highest -> e1-hh1
        one = design_line(stack_from_text(WELL.format(line="", t=2), "w.yaml"))
        assert one.transition == "e1-hh1" and one.source == "default"
        # a thin tensile In0.3Ga0.7As well on InP: light holes lie highest -> e1-lh1
        tensile = stack_from_text("""temperature: 300 K
substrate: InP
layers:
  - {material: InP, thickness: 20 nm, name: lower}
  - {material: In0.30Ga0.70As, thickness: 4 nm, name: well}
  - {material: InP, thickness: 20 nm, name: upper}
""", "t.yaml")
        sol = solve_stack(tensile)
        assert sol.state("lh1").energy_eV > sol.state("hh1").energy_eV
        assert design_line(tensile, solution=sol).transition == "e1-lh1"


def test_every_command_follows_the_line_levels_marks(capsys):
    # levels marks the line; size/sweep/tolerance/report take it from the same function
    for path in LAYERS:
        rc, out, err = run(capsys, "levels", str(path), "--json")
        assert rc == 0, err
        marked = json.loads(out)["design_line"]
        assert marked["transition"] == load_stack(path).declared_line.transition
        rc, text, _ = run(capsys, "levels", str(path))
        first = text.splitlines()[0]
        assert first.startswith(f"design line {marked['transition']}: declared in the stack")
        assert f"  {marked['transition']}" in text or f"\n{marked['transition']} " in text
        rows = [r for r in text.splitlines() if r.startswith(marked["transition"] + " ")]
        assert any(r.rstrip().endswith("design line") for r in rows), path.name


@pytest.mark.slow
@pytest.mark.parametrize("path", [p for p in LAYERS if p.name != "doped-detector.yaml"],
                         ids=lambda p: p.name)
def test_tolerance_and_sweep_default_to_the_declared_line(capsys, path):
    line = load_stack(path).declared_line.transition
    rc, out, err = run(capsys, "tolerance", str(path), "--json", "--jobs", "1")
    assert rc == 0, err
    js = json.loads(out)
    assert js["transition"] == line and js["design_line"]["source"] == "declared"
    rc, out, err = run(capsys, "tolerance", str(path), "--jobs", "1")
    assert out.splitlines()[0].startswith(f"design line {line}: declared in the stack")
    p = next(iter(design.parameters(load_stack(path)).values()))
    rc, out, err = run(capsys, "sweep", str(path), "--vary", p.path, "--from",
                       f"{p.value}{'' if p.unit == 'fraction' else p.unit}", "--to",
                       f"{p.value}{'' if p.unit == 'fraction' else p.unit}", "--points", "1",
                       "--json", "--jobs", "1")
    assert rc == 0, err
    js = json.loads(out)
    assert list(js["transitions"]) == [line] and js["design_line"]["transition"] == line


def test_pump_laser_tolerance_needs_no_options(capsys):
    rc, out, err = run(capsys, "tolerance", "layers/pump-laser-well.yaml", "--jobs", "1")
    assert rc == 0, err
    lines = out.splitlines()
    assert lines[0].startswith("design line e1-hh1: declared in the stack")
    assert "target 980 nm" in lines[0]
    assert "e1-hh1 at" in lines[1]


def test_interband_table_leads_with_the_emission_line(capsys):
    rc, out, _ = run(capsys, "levels", "layers/superlattice.yaml")
    assert rc == 0
    block = out.split("Interband transitions")[1].split("\n\n")[0].splitlines()
    rows = [r for r in block[3:] if r and not r.startswith("(")]
    first = rows[0].split()
    assert "emission line" in rows[0]
    energies = [float(r.split()[1]) for r in rows]
    overlaps = [float(r.split()[3]) for r in rows]
    allowed = [e for e, o in zip(energies, overlaps) if o >= 1e-3]
    assert float(first[1]) == min(allowed)
    assert len(rows) <= 40
    assert "not shown; --json lists all" in out
    rc, js, _ = run(capsys, "levels", "layers/superlattice.yaml", "--json")
    n_all = sum(1 for t in json.loads(js)["transitions"] if t["kind"] == "interband")
    assert n_all > len(rows)


# ---------------------------------------------------------------------------
# doped stacks: occupation and depolarisation shift
# ---------------------------------------------------------------------------
def _kT_eV(T):
    return sc_const.k * T / sc_const.e


def _check_occupation(text):
    st = stack_from_text(text, "doped.yaml")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sol = solve_stack(st, bands="conduction")
    sc = sol.self_consistent
    kT = _kT_eV(st.temperature_K)
    checked = 0
    for s in sol.levels["conduction"].states:
        if s.label not in sc.sheet_densities_cm2:
            continue
        m = sc.inplane_mass_m0[s.label] * sc_const.m_e
        # Davies (2-D DOS times Fermi-Dirac, integrated): n = m kT/(pi hbar^2) ln(1+e^x)
        n_m2 = m * kT * sc_const.e / (math.pi * sc_const.hbar ** 2) \
            * math.log1p(math.exp((sc.fermi_level_eV - s.energy_eV) / kT))
        assert n_m2 * 1e-4 == pytest.approx(sc.sheet_densities_cm2[s.label], rel=1e-3), s.label
        checked += 1
    assert checked >= 2
    assert sc.method == "exact"


def test_sheet_densities_follow_the_reported_energies_8nm_well():
    _check_occupation("""temperature: 77 K
self_consistent: true
layers:
  - {material: Al0.3Ga0.7As, thickness: 30 nm}
  - {material: GaAs, thickness: 8 nm, doping: {donors: 5e17 cm^-3}}
  - {material: Al0.3Ga0.7As, thickness: 30 nm}
""")


@pytest.mark.slow
def test_sheet_densities_follow_the_reported_energies_30nm_well():
    _check_occupation("""temperature: 300 K
self_consistent: true
layers:
  - {material: Al0.3Ga0.7As, thickness: 30 nm}
  - {material: GaAs, thickness: 30 nm, doping: {sheet: 2e12 cm^-2, at: 15 nm}}
  - {material: Al0.3Ga0.7As, thickness: 30 nm}
""")


def _afs_energy(stack, name="e1-e2"):
    """Shifted e1-e2 of a doped stack from Ando-Fowler-Stern with the overlap computed here.

    E~ = E21 sqrt(1 + alpha), alpha = 2 e^2 n S / (eps eps0 E21),
    S = int dz [int_-inf^z psi1 psi2 dz']^2 (Ando, Fowler, Stern, Rev. Mod. Phys. 54, 437
    (1982)); n = n1 - n2; eps of GaAs as the stack's material table gives it.
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sol = solve_stack(stack, bands="conduction")
    lev = sol.levels["conduction"]
    a, b = lev["e1"], lev["e2"]
    z = a.z_nm
    p2 = np.interp(z, b.z_nm, b.psi)
    prod = a.psi * p2
    cum = np.concatenate([[0.0], np.cumsum(0.5 * (prod[1:] + prod[:-1]) * np.diff(z))])
    s_nm = np.trapezoid(cum ** 2, z)
    sheets = sol.self_consistent.sheet_densities_cm2
    n_m2 = (sheets["e1"] - sheets.get("e2", 0.0)) * 1e4
    eps = stack.material_of(stack.layer("well")[0]).dielectric_constant
    e21 = b.energy_eV - a.energy_eV
    alpha = 2 * sc_const.e ** 2 * n_m2 * s_nm * 1e-9 / (eps * sc_const.epsilon_0 * e21 * sc_const.e)
    return e21 * math.sqrt(1 + alpha), e21


@pytest.mark.slow
def test_size_and_sweep_use_the_depolarisation_shifted_line(capsys):
    path = "layers/doped-detector.yaml"
    rc, out, err = run(capsys, "size", path, "--vary", "well.thickness", "--json", "--jobs", "1")
    assert rc == 0, err
    js = json.loads(out)
    assert js["depolarised"] and js["design_line"]["depolarised"]
    sized = load_stack(path)
    sized = design.apply_parameters(sized, {"well.thickness": js["value"]})
    e_afs, e_bare = _afs_energy(sized)
    assert js["energy_eV"] == pytest.approx(e_afs, rel=2e-4)
    assert js["bare_energy_eV"] == pytest.approx(e_bare, rel=1e-6)
    # the target of the declared line, 8.3 um, is met by the shifted line
    assert js["wavelength_um"] == pytest.approx(8.3, rel=1e-6)
    rc, out, err = run(capsys, "sweep", path, "--vary", "well.thickness", "--from", "19ML",
                       "--to", "19ML", "--points", "1", "--json", "--jobs", "1")
    assert rc == 0, err
    t = json.loads(out)["transitions"]["e1-e2"]
    e_afs, e_bare = _afs_energy(load_stack(path))
    assert t["depolarised"]
    assert t["energy_eV"][0] == pytest.approx(e_afs, rel=2e-4)
    assert t["bare_energy_eV"][0] == pytest.approx(e_bare, rel=1e-6)


def test_doped_band_diagram_draws_the_fermi_level():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from qwell.diagram import band_diagram_figure
    st = load_stack("layers/doped-detector.yaml")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sol = solve_stack(st)
    ef = sol.self_consistent.fermi_level_eV
    fig, info = band_diagram_figure(sol.profile, sol.levels, fermi_level_eV=ef)
    try:
        assert info.fermi_label == f"E_F {ef:.4f} eV"
        ax = info.axes[0]
        assert any(np.allclose(ln.get_ydata(), ef) for ln in ax.get_lines())
        assert any(t.get_text() == info.fermi_label for t in ax.texts)
    finally:
        plt.close(fig)


# ---------------------------------------------------------------------------
# warnings and small truths
# ---------------------------------------------------------------------------
def test_materials_at_zero_kelvin(capsys):
    rc, out, err = run(capsys, "materials", "GaAs", "--temperature", "0K")
    assert rc == 0, err
    # GaAs Gamma gap at 0 K: 1.519 eV (Vurgaftman, Meyer, Ram-Mohan, J. Appl. Phys. 89, 5815
    # (2001), Table III)
    assert re.search(r"band_gap_eV\s+1\.519\b", out)


def test_warnings_on_stderr_once_with_layer_names(capsys):
    rc, out, err = run(capsys, "levels", "layers/pump-laser-well.yaml")
    assert rc == 0
    assert "warning:" not in out
    lines = [w for w in err.splitlines() if w.startswith("warning:")]
    assert len(lines) == len(set(lines)) >= 1
    assert "interface lower_guide | well" in lines[0] and "InGaAs/GaAs" in lines[0]
    assert "%" in lines[0]


def test_claddings_get_no_critical_thickness_warning():
    from qwell.profile import band_profile
    # a 300 nm In0.1Ga0.9As cladding on GaAs is far beyond its critical thickness, but a
    # cladding is the substrate side (or cap): only the buried well is judged
    st = stack_from_text("""substrate: GaAs
layers:
  - {material: In0.10Ga0.90As, thickness: 300 nm, name: lower}
  - {material: In0.30Ga0.70As, thickness: 30 nm, name: well}
  - {material: GaAs, thickness: 20 nm, name: upper}
""", "c.yaml")
    ws = band_profile(st).warnings
    assert not any("lower" in w and "critical" in w for w in ws)
    assert any(w.startswith("layer well: thicker") for w in ws)


def test_type_ii_alignment_is_named():
    from qwell.profile import band_profile
    # InAs/GaSb-like staggered pair in the table: GaAs0.5Sb0.5 next to InP is type II
    # (common practice, no source); the warning follows the computed conduction share
    st = stack_from_text("""substrate: InP
layers:
  - {material: InP, thickness: 20 nm, name: lower}
  - {material: GaAs0.51Sb0.49, thickness: 6 nm, name: well}
  - {material: InP, thickness: 20 nm, name: upper}
""", "t.yaml")
    prof = band_profile(st)
    shares = [o["conduction_share"] for o in prof.band_offsets()]
    typed = [w for w in prof.warnings if "type-II" in w or "broken-gap" in w]
    assert bool(typed) == any(s is not None and not 0 <= s <= 1 for s in shares)
    for w in typed:
        assert "interface lower | well" in w or "interface well | upper" in w


def test_strain_compensated_block_reports_relaxing_net_strain():
    from qwell.profile import band_profile
    # thin compressive wells and tensile barriers, net compressive: the whole block is judged
    # with the period-averaged strain (Matthews-Blakeslee balance, J. Cryst. Growth 27, 118
    # (1974)); 40 periods of 9 nm with a net 0.5 % misfit is far past it
    st = stack_from_text("""substrate: InP
layers:
  - {material: InP, thickness: 20 nm, name: lower}
  - repeat: 40
    layers:
      - {material: In0.75Ga0.25As, thickness: 6 nm, name: qw}
      - {material: In0.45Al0.55As, thickness: 3 nm, name: qb}
  - {material: InP, thickness: 20 nm, name: upper}
""", "sc.yaml")
    prof = band_profile(st)
    eps = {lp.label: lp.strain_xx for lp in prof.layers}
    ws = [w for w in prof.warnings if w.startswith("strain-compensated repeat")]
    assert len(ws) == 1
    avg = (6 * prof.layers[1].strain_xx + 3 * prof.layers[2].strain_xx) / 9
    assert f"{100 * avg:+.3f} %" in ws[0] and "360 nm" in ws[0]
    assert eps


def test_offset_caution_covers_ingaas_ingaasp():
    from qwell.profile import band_profile
    # the interpolated split of InGaAs/InGaAsP is a known disagreement with measurements
    # (common practice, no source): the caution names the pair and the tables' share
    st = stack_from_text("""substrate: InP
layers:
  - {material: In0.72Ga0.28As0.61P0.39, thickness: 20 nm, name: lower}
  - {material: In0.53Ga0.47As, thickness: 6 nm, name: well}
  - {material: In0.72Ga0.28As0.61P0.39, thickness: 20 nm, name: upper}
""", "q.yaml")
    prof = band_profile(st)
    share = prof.band_offsets()[0]["conduction_share"]
    ws = [w for w in prof.warnings if "InGaAsP/InGaAs offset" in w]
    assert 0 < share < 1 and len(ws) == 1
    assert f"{100 * share:.0f} %" in ws[0] and "interface lower | well" in ws[0]
