"""Sized values written into the stack's own text: comments, order and style kept.

The check is the loader itself (qwell.stack) reading the edited text back, and a line-by-line
comparison with the input: everything but the edited scalar is byte for byte the same.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from qwell.cli import main
from qwell.errors import ParameterError
from qwell.levels import solve_stack
from qwell.stack import load_stack, stack_from_text
from qwell.stack_text import edit_stack_text

ROOT = Path(__file__).resolve().parents[1]
LWIR = ROOT / "layers" / "lwir-detector.yaml"

TEXT = """\
# grower's notes: cell temperatures set on Monday (invented demo)
name: block style
temperature: 77 K   # detector
substrate: GaAs
layers:
  - material: Al0.25Ga0.75As   # barrier cell
    thickness: 40 nm
    name: top
  - repeat: 3
    layers:
      - {material: GaAs, thickness: 5 nm, name: w}     # well
      - {material: Al0.25Ga0.75As, thickness: 6 nm, name: b}
  - {material: GaAs, thickness: "19 ML", name: last}
  - material: Al0.25Ga0.75As
    thickness: 40 nm
"""


def _changed_lines(a: str, b: str):
    la, lb = a.splitlines(), b.splitlines()
    assert len(la) == len(lb)
    return [(x, y) for x, y in zip(la, lb) if x != y]


def test_edit_keeps_comments_order_and_style():
    stack = stack_from_text(TEXT)
    ml = stack.material_of("last").monolayer_nm
    out = edit_stack_text(stack, TEXT, {"w.thickness": 5.25, "top.x": 0.27,
                                        "last.thickness": 18 * ml},
                          monolayers={"last.thickness": 18})
    changed = _changed_lines(TEXT, out)
    assert changed == [
        ("  - material: Al0.25Ga0.75As   # barrier cell", "  - material: Al0.27Ga0.73As   # barrier cell"),
        ("      - {material: GaAs, thickness: 5 nm, name: w}     # well",
         "      - {material: GaAs, thickness: 5.25 nm, name: w}     # well"),
        ('  - {material: GaAs, thickness: "19 ML", name: last}',
         "  - {material: GaAs, thickness: 18 ML, name: last}"),
    ]
    again = stack_from_text(out)
    assert [lay.thickness_nm for lay in again.layer("w")] == [5.25] * 3   # every period
    assert again.layer("top")[0].material == "Al0.27Ga0.73As"


def test_edit_appends_a_missing_top_level_key_and_refuses_unknown_paths():
    stack = stack_from_text(TEXT)
    out = edit_stack_text(stack, TEXT, {"field": 12.5})
    assert out.startswith(TEXT) and out[len(TEXT):] == "field: 12.5 kV/cm\n"
    assert stack_from_text(out).field_kV_per_cm == 12.5
    out = edit_stack_text(stack, TEXT, {"temperature": 80.0})
    assert _changed_lines(TEXT, out) == [("temperature: 77 K   # detector",
                                          "temperature: 80.0 K   # detector")]
    # a wrong monolayer count is caught by reading the text back
    with pytest.raises(ParameterError, match="reads"):
        edit_stack_text(stack, TEXT, {"last.thickness": 5.0}, monolayers={"last.thickness": 18})
    with pytest.raises(ParameterError, match="unknown parameter"):
        edit_stack_text(stack, TEXT, {"nowhere.thickness": 3.0})


def test_cli_size_write_round_ml(tmp_path, capsys):
    src = tmp_path / "in.yaml"
    src.write_text(LWIR.read_text())
    before = src.read_bytes()
    out = tmp_path / "sized.yaml"
    rc = main(["size", str(src), "--vary", "well.thickness", "--target", "9um", "--round-ml",
               "--write", str(out), "--json"])
    assert rc == 0
    j = json.loads(capsys.readouterr().out)
    w = j["written"]
    assert src.read_bytes() == before
    changed = _changed_lines(LWIR.read_text(), out.read_text())
    assert changed == [("  - {material: GaAs, thickness: 19 ML, name: well}",
                        f"  - {{material: GaAs, thickness: {w['monolayers']} ML, name: well}}")]
    # the line printed for the rounded stack is the one the written file gives
    sized = load_stack(out)
    assert sized.layer("well")[0].thickness_nm == pytest.approx(w["value"], rel=1e-12)
    lam = solve_stack(sized, bands="conduction").transition("e1-e2").wavelength_um
    assert lam == pytest.approx(w["wavelength_um"], rel=1e-7)


def test_cli_round_ml_needs_write_and_a_thickness(capsys):
    rc = main(["size", str(LWIR), "--vary", "well.thickness", "--target", "9um", "--round-ml"])
    assert rc == 2 and "--write" in capsys.readouterr().err
    rc = main(["size", str(LWIR), "--vary", "top_barrier.x", "--target", "8.1um", "--round-ml",
               "--write", "/tmp/never-written.yaml"])
    assert rc == 2 and "not a thickness" in capsys.readouterr().err
