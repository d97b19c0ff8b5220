"""Small things of the levels output: reversed line names, notes, lifetimes, densities,
uncoupled periods, reference column, report -o help."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from qwell.cli import build_parser, main
from qwell.optics import canonical_transition
from qwell.units import format_exponent

ROOT = Path(__file__).resolve().parents[1]
LWIR = ROOT / "layers" / "lwir-detector.yaml"

THREE_WELLS = """
name: three wells far apart
temperature: 10 K
substrate: GaAs
layers:
  - {material: Al0.3Ga0.7As, thickness: 25 nm, name: b0}
  - repeat: 3
    layers:
      - {material: GaAs, thickness: 6 nm, name: w}
      - {material: Al0.3Ga0.7As, thickness: 30 nm, name: b}
"""


@pytest.mark.parametrize("given, name", [("e3-e2", "e2-e3"), ("e2-e3", "e2-e3"),
                                         ("hh1-e1", "e1-hh1"), (" E1 - LH1 ", "e1-lh1"),
                                         ("hh2-hh1", "hh1-hh2"), ("bogus", "bogus")])
def test_canonical_transition(given, name):
    assert canonical_transition(given) == name


def test_reversed_transition_is_the_same_line(capsys):
    assert main(["levels", str(LWIR), "--transition", "e2-e1", "--json"]) == 0
    a = json.loads(capsys.readouterr().out)["transitions"]
    assert main(["levels", str(LWIR), "--transition", "e1-e2", "--json"]) == 0
    b = json.loads(capsys.readouterr().out)["transitions"]
    assert a == b and len(a) == 1


def test_wavefunctions_without_json_says_so(capsys):
    assert main(["levels", str(LWIR), "--wavefunctions"]) == 0
    assert "--wavefunctions only affects --json" in capsys.readouterr().out


def test_format_exponent():
    assert format_exponent(4e11) == "4.00×10¹¹"
    assert format_exponent(2.68e-3, 2) == "2.7×10⁻³"
    assert format_exponent(0.0) == "0"


def test_uncoupled_wells_are_not_a_miniband(capsys, tmp_path):
    path = tmp_path / "three.yaml"
    path.write_text(THREE_WELLS)
    assert main(["levels", str(path), "--band", "conduction"]) == 0
    out = capsys.readouterr().out
    assert "width 0.000 meV" not in out
    assert "no miniband conduction 1: the periods are uncoupled" in out


def test_levels_reference_column(capsys):
    assert main(["levels", str(LWIR), "--band", "conduction", "--reference", "well"]) == 0
    out = capsys.readouterr().out
    assert "from well meV" in out
    # the well is flat: its centre's edge is the band's lowest edge, so the column equals
    # the confinement energy (definition of both columns, no source)
    rows = [line.split() for line in out.splitlines() if line.startswith("conduction")]
    for r in rows:
        assert float(r[4]) == pytest.approx(float(r[3]), abs=1e-3)


def test_report_output_option_says_what_it_writes():
    p = build_parser()
    sub = next(a for a in p._actions if a.dest == "command")
    help_text = sub.choices["report"].format_help()
    assert "DIR/NAME.pdf" in help_text and "DIR/NAME.png" in help_text


def test_lifetimes_in_ps(capsys):
    # quasi-bound states of the emitter: escape times of femto- to picoseconds, shown in ps
    assert main(["levels", str(ROOT / "layers" / "midir-emitter.yaml"), "--band", "conduction",
                 "--json"]) == 0
    states = json.loads(capsys.readouterr().out)["states"]
    lives = {s["label"]: s["lifetime_s"] for s in states if s["lifetime_s"] is not None}
    assert lives
    assert main(["levels", str(ROOT / "layers" / "midir-emitter.yaml"), "--band",
                 "conduction"]) == 0
    out = capsys.readouterr().out
    for lab, tau in lives.items():
        row = next(line for line in out.splitlines() if line.split()[1:2] == [lab])
        assert row.rstrip().endswith(f"{1e12 * tau:.3g} ps")
