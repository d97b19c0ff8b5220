"""Tests of the YAML stack loader and validator (qwell.stack).

The stacks used here are invented scenarios.  Where a number is checked, its
source is written beside it; the expected values of repeat expansion and
thicknesses follow by arithmetic from the stack as written in the test.
Input-validation behaviour (which input is refused, with which message and
line) is the file-format contract of qwell: common practice, no source.
"""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

import numpy as np
import pytest
import yaml
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants as sc

from qwell.errors import QwellError, StackError, ValidityWarning
from qwell.stack import (
    MAX_FILE_BYTES,
    Doping,
    Grade,
    Layer,
    RepeatBlock,
    Stack,
    dump_stack_yaml,
    load_stack,
    stack_from_mapping,
    stack_from_text,
)

DATA = Path(__file__).parent / "data" / "stacks"

# GaAs lattice constant at 300 K, 5.65325 Angstrom: I. Vurgaftman, J. R. Meyer,
# L. R. Ram-Mohan, "Band parameters for III-V compound semiconductors and their
# alloys", J. Appl. Phys. 89, 5815 (2001), Table III -- from memory.
A_GAAS_300K_NM = 0.565325
# A (001) monolayer is a/2: common practice, no source.
ML_GAAS_300K_NM = A_GAAS_300K_NM / 2.0

# Unit factors from scipy.constants (SI prefixes and the angstrom).
NM_PER_ANGSTROM = sc.angstrom / sc.nano
EV_PER_MEV = sc.milli
KV_PER_CM_PER_MV_PER_M = sc.mega / (sc.kilo / sc.centi)  # 1 MV/m in kV/cm
CM3_PER_M3 = sc.centi ** 3  # n[cm^-3] = n[m^-3] * (1 cm)^3 / (1 m)^3


def _user_field(key: str) -> str:
    """Material field name that a USER_KEYS key sets."""
    from qwell.materials import USER_KEYS

    return USER_KEYS[key][0]


def _err(text: str, file: str | None = "t.yaml") -> StackError:
    with pytest.raises(StackError) as info:
        stack_from_text(text, file=file)
    return info.value


def _assert_one_line(exc: StackError):
    # Every StackError prints as one line (project error contract; no source).
    assert "\n" not in str(exc)


BASE = "layers:\n  - {material: GaAs, thickness: 10 nm}\n"


# ---------------------------------------------------------------------------
# Correct parsing
# ---------------------------------------------------------------------------
def test_monolayers_gaas_300K():
    stack = load_stack(DATA / "ml_gaas.yaml")
    (well,) = stack.layer("well")
    # 23 ML x a/2 with a(GaAs, 300 K) = 0.565325 nm (Vurgaftman et al. 2001,
    # from memory): 23 * 0.2826625 nm = 6.5012375 nm.
    assert ML_GAAS_300K_NM == pytest.approx(0.2826625, rel=1e-12)
    assert well.thickness_nm == pytest.approx(23 * ML_GAAS_300K_NM, rel=1e-6)
    assert well.thickness_nm == pytest.approx(6.5012, abs=1e-4)
    assert well.thickness_spec == "23 ML"
    assert stack.temperature_K == 300.0  # default of the format (no source)
    assert stack.name == "ml_gaas"  # default name: file stem


def test_full_stack_top_level_values():
    stack = load_stack(DATA / "full.yaml")
    assert isinstance(stack, Stack)
    assert stack.name == "coupled well test stack"
    assert stack.temperature_K == 77.0
    assert stack.substrate == "GaAs"
    assert stack.field_kV_per_cm == pytest.approx(12.0, rel=1e-12)
    assert stack.nonparabolicity is False
    assert stack.self_consistent is True
    # 50 meV = 0.050 eV (SI prefix milli, scipy.constants)
    assert stack.fermi_level_eV == pytest.approx(50 * EV_PER_MEV, rel=1e-12)
    assert set(stack.user_materials) == {"wall", "core"}
    # sha256 of the file bytes (hashlib, FIPS 180-4)
    assert stack.sha256 == hashlib.sha256((DATA / "full.yaml").read_bytes()).hexdigest()
    assert stack.path == str(DATA / "full.yaml")


def test_full_stack_layers_and_repeat_expansion():
    stack = load_stack(DATA / "full.yaml")
    # 3 single layers + 3 periods x 2 + 2 grades + 2 single layers = 13
    assert len(stack.layers) == 13
    assert [layer.index for layer in stack.layers] == list(range(13))
    assert all(isinstance(layer, Layer) for layer in stack.layers)
    labels = [layer.label for layer in stack.layers]
    assert labels == ["left", "well", "L3",
                      "sl_well", "sl_barrier", "sl_well#2", "sl_barrier#2",
                      "sl_well#3", "sl_barrier#3",
                      "L10", "ramp", "tuned", "L13"]
    (block,) = stack.repeats
    assert block == RepeatBlock(index=0, count=3, first_layer=3, layers_per_period=2, line=16)
    copies = stack.layer("sl_well")
    assert [c.index for c in copies] == [3, 5, 7]
    assert [c.period for c in copies] == [0, 1, 2]
    assert all(c.repeat_block == 0 and c.name == "sl_well" and c.line == 18 for c in copies)
    assert stack.layers[0].repeat_block is None and stack.layers[0].period is None
    # 50 angstrom = 5 nm (scipy.constants.angstrom / nano)
    assert stack.layer("well")[0].thickness_nm == pytest.approx(50 * NM_PER_ANGSTROM, rel=1e-12)
    # total: 30 + 5 + 3 + 3 * (5.2 + 2.1) + 10 + 20 + 5 + 20 nm (arithmetic of the input)
    assert stack.total_thickness_nm == pytest.approx(30 + 5 + 3 + 3 * (5.2 + 2.1) + 10 + 20 + 5 + 20,
                                                     rel=1e-12)
    # YAML lines of the entries (line numbers of full.yaml as written)
    assert [layer.line for layer in stack.layers[:3]] == [13, 14, 15]
    assert stack.layer("ramp")[0].line == 23
    assert stack.layers[-1].line == 27


def test_full_stack_doping():
    stack = load_stack(DATA / "full.yaml")
    d = stack.layers[2].doping
    assert isinstance(d, Doping)
    assert d.donors_cm3 == pytest.approx(1e18, rel=1e-12)
    assert d.acceptors_cm3 == 0 and d.from_nm is None and d.to_nm is None
    assert d.donor_level_eV == pytest.approx(6 * EV_PER_MEV, rel=1e-12)  # 6 meV
    sb = stack.layer("sl_barrier")[1].doping
    assert (sb.donors_cm3, sb.from_nm, sb.to_nm) == (pytest.approx(2e17), pytest.approx(0.5),
                                                     pytest.approx(1.5))
    assert sb.donor_level_eV is None  # complete ionisation
    delta = stack.layers[-1].doping
    assert delta.sheet_cm2 == pytest.approx(4e11, rel=1e-12)
    assert delta.at_nm == pytest.approx(10.0, rel=1e-12)
    assert stack.layers[0].doping is None


def test_full_stack_grades():
    stack = load_stack(DATA / "full.yaml")
    g1 = stack.layers[9]
    assert g1.material is None and g1.label == "L10"
    assert g1.grade == Grade(start="Al0.30Ga0.70As", end="GaAs", shape="linear", vertex="start")
    g2 = stack.layer("ramp")[0]
    assert g2.grade == Grade(start="wall", end="core", shape="parabolic", vertex="end")
    with pytest.raises(StackError, match="graded"):
        stack.material_of(g2)


def test_overrides_applied():
    stack = load_stack(DATA / "full.yaml")
    tuned = stack.layer("tuned")[0]
    f_ec, f_me = _user_field("conduction_edge"), _user_field("electron_mass")
    # 250 meV = 0.25 eV (SI prefix, scipy.constants)
    assert dict(tuned.overrides) == {f_ec: pytest.approx(250 * EV_PER_MEV), f_me: 0.07}
    mat = stack.material_of(tuned)
    assert getattr(mat, f_ec) == pytest.approx(0.25, rel=1e-12)
    assert getattr(mat, f_me) == pytest.approx(0.07, rel=1e-12)
    # the same material without overrides keeps its tabulated values
    plain = stack.material_of(stack.layer("well")[0])
    assert getattr(plain, f_me) != pytest.approx(0.07)
    assert stack.material_of("tuned") == mat


def test_unit_conversions_pint():
    text = """
temperature: 300 K
field: 1.2 MV/m
layers:
  - {material: GaAs, thickness: 0.01 um, doping: {donors: 1e24 m^-3, sheet_acceptors: 1e15 m^-2, at: 20 angstrom}}
"""
    stack = stack_from_text(text)
    # 1.2 MV/m = 12 kV/cm (SI prefixes, scipy.constants)
    assert stack.field_kV_per_cm == pytest.approx(1.2 * KV_PER_CM_PER_MV_PER_M, rel=1e-12)
    assert stack.field_kV_per_cm == pytest.approx(12.0, rel=1e-12)
    layer = stack.layers[0]
    assert layer.thickness_nm == pytest.approx(0.01 * sc.micro / sc.nano, rel=1e-12)
    assert layer.doping.donors_cm3 == pytest.approx(1e24 * CM3_PER_M3, rel=1e-12)
    assert layer.doping.sheet_acceptors_cm2 == pytest.approx(1e15 * sc.centi ** 2, rel=1e-12)
    assert layer.doping.at_nm == pytest.approx(20 * NM_PER_ANGSTROM, rel=1e-12)
    assert stack.name == "stack" and stack.path is None
    assert stack.nonparabolicity is True and stack.self_consistent is False  # defaults
    assert stack.fermi_level_eV is None and stack.substrate is None


def test_nested_repeat_labels_and_blocks():
    text = """
layers:
  - {material: GaAs, thickness: 1 nm}
  - repeat: 2
    layers:
      - {material: InAs, thickness: 2 nm, name: b}
      - repeat: 3
        layers:
          - {material: GaAs, thickness: 1 nm, name: w}
"""
    stack = stack_from_text(text)
    # 1 + 2 * (1 + 3) = 9 layers (arithmetic of the input)
    assert len(stack.layers) == 9
    assert [layer.label for layer in stack.layers] == [
        "L1", "b", "w", "w#2", "w#3", "b#2", "w#4", "w#5", "w#6"]
    outer, inner1, inner2 = stack.repeats
    assert (outer.count, outer.first_layer, outer.layers_per_period) == (2, 1, 4)
    assert (inner1.count, inner1.first_layer, inner1.layers_per_period) == (3, 2, 1)
    assert (inner2.count, inner2.first_layer, inner2.layers_per_period) == (3, 6, 1)
    assert [w.repeat_block for w in stack.layer("w")] == [1, 1, 1, 2, 2, 2]
    assert [w.period for w in stack.layer("w")] == [0, 1, 2, 0, 1, 2]
    assert [b.period for b in stack.layer("b")] == [0, 1]
    assert stack.total_thickness_nm == pytest.approx(1 + 2 * (2 + 3 * 1), rel=1e-12)


@settings(max_examples=50, deadline=None)
@given(st.lists(st.floats(min_value=0.0, max_value=1.0, allow_nan=False), min_size=1,
                max_size=20))
def test_grade_fraction_closed_forms(ts):
    t = np.array(ts)
    # Grade shapes of the format (common practice, no source):
    # linear f = t; parabolic, vertex at start f = t^2; vertex at end f = 1 - (1 - t)^2.
    np.testing.assert_allclose(Grade("A", "B", "linear").fraction(t), t, rtol=0, atol=1e-15)
    np.testing.assert_allclose(Grade("A", "B", "parabolic", "start").fraction(t), t ** 2,
                               rtol=0, atol=1e-15)
    np.testing.assert_allclose(Grade("A", "B", "parabolic", "end").fraction(t),
                               1 - (1 - t) ** 2, rtol=0, atol=1e-15)


def test_grade_fraction_end_points_and_slopes():
    # End points 0 and 1; zero slope at the vertex (derivative of t^2 at 0 and of
    # 1-(1-t)^2 at 1), checked with a central difference (common practice, no source).
    h = 1e-6
    for g in (Grade("A", "B", "linear"), Grade("A", "B", "parabolic", "start"),
              Grade("A", "B", "parabolic", "end")):
        f = g.fraction(np.array([0.0, 1.0]))
        assert f[0] == 0.0 and f[1] == 1.0
    start = Grade("A", "B", "parabolic", "start")
    end = Grade("A", "B", "parabolic", "end")
    assert (start.fraction(np.array([h]))[0] - start.fraction(np.array([-h]))[0]) / (2 * h) \
        == pytest.approx(0.0, abs=1e-9)
    assert (end.fraction(np.array([1 + h]))[0] - end.fraction(np.array([1 - h]))[0]) / (2 * h) \
        == pytest.approx(0.0, abs=1e-9)


def test_stack_from_mapping_matches_text_and_copies():
    text = (DATA / "full.yaml").read_text()
    from_text = stack_from_text(text, file="full.yaml")
    data = yaml.safe_load(text)
    from_map = stack_from_mapping(data, file="full.yaml")
    assert from_map.layers == tuple(
        Layer(**{**layer.__dict__, "line": None}) for layer in from_text.layers)
    assert from_map.repeats == tuple(
        RepeatBlock(**{**r.__dict__, "line": None}) for r in from_text.repeats)
    assert from_map.sha256 is None
    # changing the caller's mapping afterwards does not change the stack
    data["layers"][0]["thickness"] = "1 nm"
    assert from_map.layers[0].thickness_nm == pytest.approx(30.0)
    assert from_map.raw["layers"][0]["thickness"] == "30 nm"


def test_modify_raw_and_reload():
    stack = load_stack(DATA / "full.yaml")
    import copy

    raw = copy.deepcopy(dict(stack.raw))
    raw["layers"][1]["thickness"] = "6.5 nm"
    raw["layers"][3]["repeat"] = 5
    changed = stack_from_mapping(raw)
    assert changed.layer("well")[0].thickness_nm == pytest.approx(6.5)
    assert len(changed.layer("sl_well")) == 5
    assert len(changed.layers) == 13 + 2 * 2


def test_mapping_accepts_pint_quantities():
    from qwell.units import ureg

    stack = stack_from_mapping({"temperature": ureg.Quantity(77, "K"),
                                "layers": [{"material": "GaAs",
                                            "thickness": ureg.Quantity(5, "angstrom")}]})
    assert stack.temperature_K == pytest.approx(77.0)
    assert stack.layers[0].thickness_nm == pytest.approx(5 * NM_PER_ANGSTROM, rel=1e-12)


def test_dump_round_trip():
    stack = load_stack(DATA / "full.yaml")
    text = dump_stack_yaml(stack.raw)
    again = stack_from_text(text)
    assert again.raw == stack.raw
    strip = [Layer(**{**layer.__dict__, "line": None}) for layer in stack.layers]
    assert [Layer(**{**layer.__dict__, "line": None}) for layer in again.layers] == strip
    # quantities stay strings, one uniform layer per line
    assert "thickness: 30 nm" in text
    assert "- {material: Al0.30Ga0.70As, thickness: 30 nm, name: left}" in text


def test_dump_pint_and_numpy_values():
    from qwell.units import ureg

    raw = {"temperature": ureg.Quantity(77.0, "K"),
           "layers": [{"material": "GaAs", "thickness": ureg.Quantity(np.float64(5.25), "nm")},
                      {"repeat": np.int64(2), "layers": [{"material": "InAs",
                                                          "thickness": "1 nm"}]}]}
    text = dump_stack_yaml(raw)
    assert "!!" not in text  # no python-specific tags
    stack = stack_from_text(text)
    assert stack.temperature_K == pytest.approx(77.0)
    assert stack.layers[0].thickness_nm == pytest.approx(5.25)
    assert len(stack.layers) == 3


def test_layer_lookup_unknown_name_lists_names():
    stack = load_stack(DATA / "full.yaml")
    with pytest.raises(StackError, match=r"no layer named 'wel'.*did you mean 'well'.*'left'"):
        stack.layer("wel")


def test_material_cache_is_cheap():
    # stack_from_mapping re-uses cached look-ups: a second build of the same
    # mapping must give equal layers (correctness of the cached path).
    data = yaml.safe_load((DATA / "full.yaml").read_text())
    a = stack_from_mapping(data)
    b = stack_from_mapping(data)
    assert a.layers == b.layers
    assert a.material_of(a.layers[0]) == b.material_of(b.layers[0])


# ---------------------------------------------------------------------------
# Bad input: StackError(file, line, key), one line, "FILE:LINE: KEY: ..."
# ---------------------------------------------------------------------------
def test_error_format_file_line_key():
    exc = _err("layers:\n  - {material: GaAs, thickness: 10 nm}\n  - {material: GaAs, thickness: 6.5}\n")
    assert isinstance(exc, QwellError) and isinstance(exc, ValueError)
    assert (exc.file, exc.line, exc.key) == ("t.yaml", 3, "layers[1].thickness")
    assert str(exc).startswith("t.yaml:3: layers[1].thickness: ")
    assert "'6.5 nm'" in str(exc)
    _assert_one_line(exc)


def test_typo_key_in_file_suggests():
    path = DATA / "typo_key.yaml"
    with pytest.raises(StackError, match=r"unknown key 'thikness'.*did you mean 'thickness'\?") as info:
        load_stack(path)
    assert info.value.line == 5 and info.value.key == "layers[1].thikness"
    assert str(info.value).startswith(f"{path}:5: layers[1].thikness: ")
    _assert_one_line(info.value)


@pytest.mark.parametrize("text, line, key, pattern", [
    ("temprature: 77 K\n" + BASE, 1, "temprature", r"did you mean 'temperature'\?"),
    ("layers:\n  - {material: GaAs, thickness: 10 nm, nmae: w}\n", 2, "layers[0].nmae",
     r"did you mean 'name'\?"),
    ("layers:\n  - {material: GaAs, thickness: 10 nm,\n     doping: {donor: 1e17 cm^-3}}\n", 3,
     "layers[0].doping.donor", r"did you mean 'donors'\?"),
    ("layers:\n  - grade: {from: GaAs, to: InAs, shap: linear}\n    thickness: 5 nm\n", 2,
     "layers[0].grade.shap", r"did you mean 'shape'\?"),
    ("layers:\n  - repeat: 2\n    layer:\n      - {material: GaAs, thickness: 1 nm}\n", 3,
     "layers[0].layer", r"did you mean 'layers'\?"),
    ("materials:\n  wall: {conduction_edg: 0.3 eV, electron_mass: 0.067}\n" + BASE, 2,
     "materials.wall.conduction_edg", r"did you mean 'conduction_edge'\?"),
])
def test_unknown_key_any_level(text, line, key, pattern):
    exc = _err(text)
    assert exc.line == line and exc.key == key
    assert "unknown key" in str(exc)
    assert re.search(pattern, str(exc))
    _assert_one_line(exc)


def test_unknown_material_suggests_close_name():
    text = "layers:\n  - {material: GaAs, thickness: 10 nm}\n  - {material: GaAss, thickness: 2 nm}\n"
    with pytest.raises(StackError, match=r"GaAss.*GaAs") as info:
        stack_from_text(text, file="t.yaml")
    assert info.value.line == 3 and info.value.key == "layers[1].material"
    _assert_one_line(info.value)


@pytest.mark.parametrize("name, reason", [("Al1.3Ga-0.3As", r"outside \[0, 1\]"),
                                          ("Al0.30Ga0.60As", r"sum to 0\.9")])
@pytest.mark.parametrize("user", ["", "materials:\n  wall: {conduction_edge: 0.3 eV}\n"])
def test_bad_composition(name, reason, user):
    # x outside [0, 1] or fractions that do not add up to 1 (an alloy's
    # sublattice fractions sum to 1: common practice, no source).  The reason
    # must survive when the stack also defines user materials.
    text = (user + "layers:\n  - {material: GaAs, thickness: 10 nm}\n"
            f"  - {{material: {name}, thickness: 2 nm}}\n")
    exc = _err(text)
    assert exc.line == 3 + user.count("\n") and exc.key == "layers[1].material"
    assert name in str(exc) and re.search(reason, str(exc))
    _assert_one_line(exc)


def test_unknown_name_suggests_user_material():
    text = "materials:\n  wall: {conduction_edge: 0.3 eV}\nlayers:\n  - {material: wal, thickness: 2 nm}\n"
    with pytest.raises(StackError, match=r"unknown material 'wal'.*user material 'wall'") as info:
        stack_from_text(text)
    assert info.value.line == 4


def test_missing_unit():
    exc = _err("layers:\n  - {material: GaAs, thickness: 6.5}\n")
    assert exc.line == 2
    assert "a length" in str(exc) and "'6.5 nm'" in str(exc)


@pytest.mark.parametrize("text, line, key, pattern", [
    ("layers:\n  - {material: GaAs, thickness: 5 eV}\n", 2, "layers[0].thickness",
     r"'5 eV' is not a length"),
    ("temperature: 300 nm\n" + BASE, 1, "temperature", r"not a temperature"),
    ("field: 12 V\n" + BASE, 1, "field", r"not an electric field"),
    ("fermi_level: 0.1 nm\n" + BASE, 1, "fermi_level", r"not an energy"),
    ("layers:\n  - {material: GaAs, thickness: 5 nm, doping: {donors: 1e18 cm^-2}}\n", 2,
     "layers[0].doping.donors", r"not a volume density"),
    ("temperature: 77\n" + BASE, 1, "temperature", r"'77 K'"),
])
def test_wrong_or_missing_unit(text, line, key, pattern):
    with pytest.raises(StackError, match=pattern) as info:
        stack_from_text(text, file="t.yaml")
    assert info.value.line == line and info.value.key == key
    _assert_one_line(info.value)


@pytest.mark.parametrize("value", ["0 nm", "-2 nm", "0 ML"])
def test_non_positive_thickness(value):
    exc = _err(f"layers:\n  - {{material: GaAs, thickness: {value}}}\n")
    assert exc.line == 2 and "not positive" in str(exc)


@pytest.mark.parametrize("text, line, key, pattern", [
    ("layers:\n  - {thickness: 5 nm}\n", 2, "layers[0]", r"missing required key 'material'"),
    ("layers:\n  - {material: GaAs}\n", 2, "layers[0]", r"missing required key 'thickness'"),
    ("name: x\ntemperature: 300 K\n", 1, None, r"missing required key 'layers'"),
    ("layers:\n  - grade: {from: GaAs}\n    thickness: 5 nm\n", 2, "layers[0].grade",
     r"missing required key 'to'"),
    ("layers:\n  - repeat: 2\n", 2, "layers[0]", r"missing required key 'layers'"),
    ("layers:\n  - {material: GaAs, thickness: 20 nm, doping: {sheet: 4e11 cm^-2}}\n", 2,
     "layers[0].doping", r"missing required key 'at'"),
])
def test_missing_required_key(text, line, key, pattern):
    with pytest.raises(StackError, match=pattern) as info:
        stack_from_text(text, file="t.yaml")
    assert info.value.line == line and info.value.key == key
    _assert_one_line(info.value)


def test_duplicate_layer_name():
    text = ("layers:\n  - {material: GaAs, thickness: 10 nm, name: well}\n"
            "  - {material: InAs, thickness: 2 nm}\n"
            "  - {material: GaAs, thickness: 10 nm, name: well}\n")
    with pytest.raises(StackError, match=r"duplicate layer name 'well' \(first used on line 2\)") as info:
        stack_from_text(text)
    assert info.value.line == 4 and info.value.key == "layers[2].name"


@pytest.mark.parametrize("name", ["1well", "well.a", "w ell", "L3"])
def test_bad_layer_name(name):
    exc = _err(f"layers:\n  - {{material: GaAs, thickness: 10 nm, name: '{name}'}}\n")
    assert exc.line == 2 and exc.key == "layers[0].name"


def test_duplicate_yaml_key():
    exc = _err("temperature: 300 K\ntemperature: 77 K\n" + BASE)
    assert exc.line == 2 and "duplicate key 'temperature'" in str(exc)


@pytest.mark.parametrize("text, line", [
    ("layers: []\n", 1),
    ("name: nothing\nlayers:\n", 2),
    ("layers:\n  - repeat: 2\n    layers: []\n", 3),
    ("", None),
    ("# only a comment\n", None),
])
def test_empty_stack(text, line):
    with pytest.raises(StackError, match=r"no layers|empty|expected a list of layers") as info:
        stack_from_text(text, file="t.yaml")
    assert info.value.line == line


@pytest.mark.parametrize("count, pattern", [
    ("0", r"repeat count 0 < 1"),
    ("-3", r"repeat count -3 < 1"),
    ("2.5", r"expected a whole number"),
    ("'3'", r"expected a whole number"),
    ("true", r"expected a whole number"),
])
def test_bad_repeat_count(count, pattern):
    text = f"layers:\n  - {{material: GaAs, thickness: 1 nm}}\n  - repeat: {count}\n    layers:\n      - {{material: InAs, thickness: 1 nm}}\n"
    with pytest.raises(StackError, match=pattern) as info:
        stack_from_text(text)
    assert info.value.line == 3 and info.value.key == "layers[1].repeat"


def test_repeat_nested_too_deep():
    text = """layers:
  - repeat: 2
    layers:
      - repeat: 2
        layers:
          - repeat: 2
            layers:
              - {material: GaAs, thickness: 1 nm}
"""
    with pytest.raises(StackError, match=r"nested more than 2 deep") as info:
        stack_from_text(text)
    assert info.value.line == 6


def test_grade_unknown_end_material():
    text = "layers:\n  - grade: {from: GaAs, to: AlAsx}\n    thickness: 5 nm\n"
    exc = _err(text)
    assert exc.line == 2 and exc.key == "layers[0].grade.to"


@pytest.mark.parametrize("spec, pattern", [
    ("{from: GaAs, to: InAs, shape: cubic}", r"unknown shape 'cubic'"),
    ("{from: GaAs, to: InAs, shape: parabolic, vertex: middle}", r"unknown vertex 'middle'"),
    ("{from: GaAs, to: InAs, vertex: end}", r"vertex' applies to parabolic"),
])
def test_grade_bad_shape(spec, pattern):
    with pytest.raises(StackError, match=pattern) as info:
        stack_from_text(f"layers:\n  - grade: {spec}\n    thickness: 5 nm\n")
    assert info.value.line == 2


def test_grade_thickness_in_monolayers_refused():
    with pytest.raises(StackError, match=r"monolayers are ambiguous in a graded layer") as info:
        stack_from_text("layers:\n  - grade: {from: GaAs, to: InAs}\n    thickness: 10 ML\n")
    assert info.value.line == 3


def test_not_yaml():
    exc = _err("layers:\n  - {material: GaAs, thickness: 10 nm\n  - x: [\n")
    assert "not valid YAML" in str(exc) and exc.line is not None
    _assert_one_line(exc)


def test_binary_file(tmp_path):
    p = tmp_path / "image.yaml"
    p.write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR")
    with pytest.raises(StackError, match=r"binary file") as info:
        load_stack(p)
    assert str(info.value).startswith(f"{p}: ")


def test_undecodable_file(tmp_path):
    p = tmp_path / "latin1.yaml"
    p.write_bytes("name: caf\u00e9\nlayers: []\n".encode("latin-1"))
    with pytest.raises(StackError, match=r"not UTF-8 text.*0xe9") as info:
        load_stack(p)
    assert info.value.line == 1


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(StackError, match=r"does not exist") as info:
        load_stack(tmp_path / "nope.yaml")
    assert str(info.value).startswith(str(tmp_path / "nope.yaml"))
    with pytest.raises(StackError, match=r"is a directory"):
        load_stack(tmp_path)


@pytest.mark.parametrize("text", ["- {material: GaAs, thickness: 5 nm}\n", "just text\n", "42\n"])
def test_top_level_not_mapping(text):
    with pytest.raises(StackError, match=r"the top level is .*expected a mapping") as info:
        stack_from_text(text)
    assert info.value.line == 1


def test_billion_laughs_file():
    with pytest.raises(StackError, match=r"aliases expand to more than") as info:
        load_stack(DATA / "laughs.yaml")
    assert info.value.line is not None
    _assert_one_line(info.value)


def test_too_many_aliases():
    text = "x: &t 5 nm\nlayers:\n" + "".join(
        "  - {material: GaAs, thickness: *t}\n" for _ in range(150))
    with pytest.raises(StackError, match=r"more than 100 YAML aliases") as info:
        stack_from_text(text)
    # the 101st alias is on line 2 + 101
    assert info.value.line == 103


def test_few_aliases_are_fine():
    text = "x: &t 5 nm\nlayers:\n  - {material: GaAs, thickness: *t}\n  - {material: InAs, thickness: *t}\n"
    with pytest.raises(StackError, match=r"unknown key 'x'"):
        stack_from_text(text)  # the alias itself is accepted; the extra top key is not
    text = "layers:\n  - &w {material: GaAs, thickness: 5 nm}\n  - {material: InAs, thickness: 2 nm}\n  - *w\n"
    stack = stack_from_text(text)
    assert [layer.thickness_nm for layer in stack.layers] == [pytest.approx(5), pytest.approx(2),
                                                              pytest.approx(5)]


def test_recursive_alias_refused():
    with pytest.raises(StackError, match=r"recursive"):
        stack_from_text("layers: &a [*a]\n")


def test_total_thickness_limit():
    text = "layers:\n  - repeat: 2000\n    layers:\n      - {material: GaAs, thickness: 60 nm}\n"
    # 2000 x 60 nm = 120 um > 100 um
    with pytest.raises(StackError, match=r"total thickness 120 um exceeds the 100 um limit"):
        stack_from_text(text)
    with pytest.raises(StackError, match=r"exceeds the 100000 nm"):
        stack_from_text("layers:\n  - {material: GaAs, thickness: 0.2 mm}\n")


def test_layer_count_limit():
    text = "layers:\n  - repeat: 100001\n    layers:\n      - {material: GaAs, thickness: 0.5 nm}\n"
    with pytest.raises(StackError, match=r"more than 100000 layers") as info:
        stack_from_text(text)
    assert info.value.line == 2
    # a count too large to expand is refused before any expansion
    huge = "layers:\n  - repeat: 1000000000000\n    layers:\n      - {material: GaAs, thickness: 1 nm}\n"
    with pytest.raises(StackError, match=r"more than 100000 layers"):
        stack_from_text(huge)


def test_file_size_limit(tmp_path):
    p = tmp_path / "big.yaml"
    filler = ("# " + "x" * 98 + "\n") * (MAX_FILE_BYTES // 100 + 10)
    p.write_text(BASE + filler)
    with pytest.raises(StackError, match=r"MB limit"):
        load_stack(p)
    with pytest.raises(StackError, match=r"MB limit"):
        stack_from_text(BASE + filler)


@pytest.mark.parametrize("value", ["0 K", "-4 K", "-1 mK"])
def test_temperature_not_positive(value):
    exc = _err(f"temperature: {value}\n" + BASE)
    assert exc.line == 1 and exc.key == "temperature" and "> 0 K" in str(exc)


@pytest.mark.parametrize("doping, key, pattern", [
    ("{donors: 1e17 cm^-3, from: 3 nm}", "from", r"outside its layer; expected 0 to 2 nm"),
    ("{donors: 1e17 cm^-3, to: 2.5 nm}", "to", r"outside its layer"),
    ("{donors: 1e17 cm^-3, from: -1 nm}", "from", r"outside its layer"),
    ("{sheet: 1e11 cm^-2, at: 25 angstrom}", "at", r"outside its layer"),
    ("{donors: 1e17 cm^-3, from: 1.5 nm, to: 0.5 nm}", None, r"is empty; expected 'from' < 'to'"),
])
def test_doping_position_outside_layer(doping, key, pattern):
    with pytest.raises(StackError, match=pattern) as info:
        stack_from_text(f"layers:\n  - {{material: GaAs, thickness: 2 nm,\n     doping: {doping}}}\n")
    assert info.value.line == 3
    if key:
        assert info.value.key == f"layers[0].doping.{key}"


@pytest.mark.parametrize("doping, key", [
    ("{donors: -1e17 cm^-3}", "donors"),
    ("{acceptors: -5e16 cm^-3}", "acceptors"),
    ("{sheet: -4e11 cm^-2, at: 1 nm}", "sheet"),
    ("{sheet_acceptors: -1e11 cm^-2, at: 1 nm}", "sheet_acceptors"),
])
def test_negative_densities(doping, key):
    with pytest.raises(StackError, match=r"negative density") as info:
        stack_from_text(f"layers:\n  - {{material: GaAs, thickness: 2 nm, doping: {doping}}}\n")
    assert info.value.line == 2 and info.value.key == f"layers[0].doping.{key}"


def test_negative_donor_level():
    with pytest.raises(StackError, match=r"donor level .* is negative"):
        stack_from_text("layers:\n  - {material: GaAs, thickness: 2 nm, doping: {donors: 1e17 cm^-3, donor_level: -6 meV}}\n")


def test_wrong_types():
    with pytest.raises(StackError, match=r"expected true or false") as info:
        stack_from_text("nonparabolicity: maybe\n" + BASE)
    assert info.value.line == 1
    with pytest.raises(StackError, match=r"expected a layer mapping") as info:
        stack_from_text("layers:\n  - GaAs 5 nm\n")
    assert info.value.line == 2
    with pytest.raises(StackError, match=r"either 'material' or 'grade'"):
        stack_from_text("layers:\n  - {material: GaAs, grade: {from: GaAs, to: InAs}, thickness: 1 nm}\n")


def test_control_character_refused():
    with pytest.raises(StackError, match=r"not valid YAML text.*#x0007") as info:
        stack_from_text("name: a\nlayers: [\x07]\n", file="t.yaml")
    assert info.value.line == 2


def test_deep_nesting_refused():
    with pytest.raises(StackError, match=r"nested too deeply"):
        stack_from_text("layers: " + "[" * 3000 + "]" * 3000)


def test_bare_number_override_and_plain_mass():
    with pytest.raises(StackError, match=r"bare number 0.3 has no unit.*'0.3 eV'") as info:
        stack_from_text("layers:\n  - {material: GaAs, thickness: 5 nm, conduction_edge: 0.3}\n")
    assert info.value.key == "layers[0].conduction_edge"
    with pytest.raises(StackError, match=r"expected a plain number"):
        stack_from_text("layers:\n  - {material: GaAs, thickness: 5 nm, electron_mass: 0.07 nm}\n")


@pytest.mark.benchmark
def test_benchmark_stack_from_mapping(benchmark):
    """Speed of the re-load path used by design workflows (prints figures when
    run with --benchmark-enable; never a pass/fail timing check)."""
    data = yaml.safe_load((DATA / "full.yaml").read_text())
    stack = benchmark(stack_from_mapping, data)
    assert len(stack.layers) == 13


# ---------------------------------------------------------------------------
# User materials, overrides of the lattice constant, warnings
# ---------------------------------------------------------------------------
def test_user_materials_built_at_stack_temperature():
    stack = load_stack(DATA / "full.yaml")
    wall = stack.user_materials["wall"]
    assert wall.temperature_K == 77.0
    assert getattr(wall, _user_field("conduction_edge")) == pytest.approx(0.30, rel=1e-12)
    assert getattr(wall, _user_field("electron_mass")) == pytest.approx(0.067, rel=1e-12)


def test_monolayers_follow_lattice_constant():
    # 2 ML of a user material with a = 0.6 nm: 2 * a/2 = 0.6 nm; 10 ML of GaAs
    # with its lattice constant overridden to 0.6 nm: 3.0 nm (ML = a/2, common
    # practice, no source).
    text = """
materials:
  wide: {conduction_edge: 0.3 eV, electron_mass: 0.08, lattice_constant: 0.6 nm}
layers:
  - {material: wide, thickness: 2 ML}
  - {material: GaAs, thickness: 10 ML, lattice_constant: 6 angstrom}
"""
    stack = stack_from_text(text)
    assert stack.layers[0].thickness_nm == pytest.approx(2 * 0.6 / 2, rel=1e-12)
    assert stack.layers[1].thickness_nm == pytest.approx(10 * 0.6 / 2, rel=1e-12)
    assert stack.material_of(0).name == "wide"


def test_monolayers_without_lattice_constant():
    text = "materials:\n  a: {conduction_edge: 0.3 eV}\nlayers:\n  - {material: a, thickness: 2 ML}\n"
    with pytest.raises(StackError, match=r"monolayers need a lattice constant") as info:
        stack_from_text(text)
    assert info.value.line == 4


def test_grade_without_common_parameters():
    text = """materials:
  a: {conduction_edge: 0.3 eV}
  b: {electron_mass: 0.067}
layers:
  - grade: {from: a, to: b}
    thickness: 5 nm
"""
    with pytest.raises(StackError, match=r"no common parameters") as info:
        stack_from_text(text, file="t.yaml")
    assert info.value.line == 5 and info.value.key == "layers[0].grade"
    _assert_one_line(info.value)


@pytest.mark.parametrize("spec, line, pattern", [
    ("  GaAs: {conduction_edge: 0.3 eV}\n", 2, r"'GaAs' is a built-in material"),
    ("  2wall: {conduction_edge: 0.3 eV}\n", 2, r"bad material name '2wall'"),
    ("  a: {electron_mass: -0.067}\n", 2, r"must be positive"),
    ("  a: {conduction_edge: 0.3 eV, valence_edge: 0.5 eV}\n", 2, r"non-positive gap"),
    ("  a: {}\n", 2, r"expected a mapping of parameters"),
    ("  a: {conduction_edge: 0.3 eV, c11: 119}\n", 2, r"bare number 119 has no unit.*'119 GPa'"),
])
def test_bad_user_material(spec, line, pattern):
    with pytest.raises(StackError, match=pattern) as info:
        stack_from_text("materials:\n" + spec + BASE)
    assert info.value.line == line
    _assert_one_line(info.value)


def test_unknown_substrate():
    with pytest.raises(StackError, match=r"GaAz") as info:
        stack_from_text("substrate: GaAz\n" + BASE)
    assert info.value.line == 1 and info.value.key == "substrate"


def test_override_out_of_range():
    # refused by the range check (README limits table) before any material is built
    with pytest.raises(StackError, match=r"expected a band gap from 0 to 20 eV") as info:
        stack_from_text("layers:\n  - {material: GaAs, thickness: 2 nm, band_gap: -1 eV}\n")
    assert info.value.line == 2 and info.value.key == "layers[0].band_gap"


def test_validity_warning_passes_through_each_load():
    # AlGaAs is indirect above the Gamma-X crossover near x = 0.43-0.45
    # (common practice, no source); the materials database warns, and the
    # loader must not swallow the warning on a repeated (cached) load.
    text = "layers:\n  - {material: Al0.60Ga0.40As, thickness: 2 nm}\n"
    for _ in range(2):
        with pytest.warns(ValidityWarning, match=r"indirect"):
            stack_from_text(text)


def test_grade_overrides_kept_and_checked():
    text = ("layers:\n  - grade: {from: Al0.30Ga0.70As, to: GaAs}\n    thickness: 10 nm\n"
            "    electron_mass: 0.07\n")
    stack = stack_from_text(text)
    assert dict(stack.layers[0].overrides) == {_user_field("electron_mass"): 0.07}
    bad = ("layers:\n  - grade: {from: Al0.30Ga0.70As, to: GaAs}\n    thickness: 10 nm\n"
           "    electron_mass: -0.07\n")
    # the range check names the override's own line and key
    with pytest.raises(StackError, match=r"must be positive") as info:
        stack_from_text(bad)
    assert info.value.line == 4 and info.value.key == "layers[0].electron_mass"
