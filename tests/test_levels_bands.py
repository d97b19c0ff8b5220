"""Which bands ``qwell levels`` solves: only those its design line and tables need.

An intersubband design (the line declared in the stack or given with
``--transition`` is a conduction pair) is solved in the conduction band alone,
with a note saying so; laser wells (an interband line) and stacks without a
declared line keep every band.  Leaving the hole bands out must not move the
conduction states: each band is an independent eigenproblem of the
BenDaniel-Duke equation (common practice, no source), so the energies shown
are the all-band solve's, to 1e-12 eV.
"""

import json
from pathlib import Path

import pytest

from qwell.cli import main
from qwell.cli import levels as cli_levels
from qwell.levels import solve_profile
from qwell.profile import band_profile
from qwell.stack import load_stack, stack_from_text

ROOT = Path(__file__).resolve().parents[1]
MIDIR = ROOT / "layers" / "midir-emitter.yaml"


def _json(capsys, *argv):
    assert main(["levels", *argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def _solved_bands(monkeypatch, argv):
    """Run ``qwell levels`` and return the bands of every Solution it built."""
    seen = []
    real = cli_levels.solve_profile

    def spy(*args, **kw):
        sol = real(*args, **kw)
        seen.append(tuple(sol.levels))
        return sol

    monkeypatch.setattr(cli_levels, "solve_profile", spy)
    assert main(["levels", *argv]) == 0
    return seen


def test_intersubband_stack_solves_the_conduction_band_only(monkeypatch, capsys):
    # the mid-infrared emitter declares e2-e3: no hole band is solved
    assert _solved_bands(monkeypatch, [str(MIDIR)]) == [("conduction",)]
    out = capsys.readouterr().out
    assert "note: hole bands not solved: the design line e2-e3" in out
    assert "--band all" in out
    assert "heavy_hole" not in out and "Interband" not in out


def test_band_all_and_interband_lines_keep_every_band(monkeypatch, capsys):
    everything = ("conduction", "heavy_hole", "light_hole")
    assert _solved_bands(monkeypatch, [str(MIDIR), "--band", "all"]) == [everything]
    assert "hole bands not solved" not in capsys.readouterr().out
    # a laser well's line is interband
    assert _solved_bands(monkeypatch, [str(ROOT / "layers" / "pump-laser-well.yaml")]) == [everything]
    # an interband line asked on the command line of an intersubband stack
    assert _solved_bands(monkeypatch, [str(MIDIR), "--transition", "e1-hh1"]) == [everything]
    # hole intersubband pairs and an interband spectrum need holes
    assert _solved_bands(monkeypatch, [str(MIDIR), "--hole-intersubband"]) == [everything]
    capsys.readouterr()


def test_undeclared_stack_keeps_every_band(monkeypatch, capsys):
    text = (ROOT / "layers" / "lwir-detector.yaml").read_text()
    lines = [ln for ln in text.splitlines() if not ln.startswith("line:")]
    f = ROOT / "layers" / "lwir-detector.yaml"
    st = stack_from_text("\n".join(lines) + "\n", file=str(f))
    assert st.declared_line is None
    opts = cli_levels.LevelsOptions(stack_path=str(f))
    assert cli_levels.solve_bands(st, opts) == ("all", "")
    capsys.readouterr()


def test_json_says_which_bands_were_left_out(capsys):
    doc = _json(capsys, str(MIDIR))
    assert {s["band"] for s in doc["states"]} == {"conduction"}
    assert any("hole bands not solved" in n for n in doc["notes"])
    assert all(t["kind"] == "intersubband" for t in doc["transitions"])


@pytest.mark.parametrize("name", ["midir-emitter", "lwir-detector", "parabolic-well"])
def test_conduction_states_unchanged_by_leaving_out_the_holes(name):
    prof = band_profile(load_stack(ROOT / "layers" / f"{name}.yaml"))
    alone = solve_profile(prof, bands="conduction")
    full = solve_profile(prof)
    a, b = alone.levels["conduction"].states, full.levels["conduction"].states
    assert [s.label for s in a] == [s.label for s in b]
    for s, t in zip(a, b):
        assert s.energy_eV == pytest.approx(t.energy_eV, abs=1e-12)
    lines = {t.name: t.energy_eV for t in full.transitions if t.kind == "intersubband"}
    for t in alone.transitions:
        assert t.energy_eV == pytest.approx(lines[t.name], abs=1e-12)


def test_needed_states_keep_the_lowest_bound_states_with_their_energies():
    # the report's e1-hh1 sensitivity needs hh1 alone: one heavy-hole state is refined
    from qwell import design
    from qwell.levels import lowest_states

    assert lowest_states(("e2", "e3", "hh1", "x1", "e")) == {"conduction": 3, "heavy_hole": 1}
    st = load_stack(MIDIR)
    point = design.design_point(st, {"w2.thickness": 4.8}, bands=("conduction", "heavy_hole"),
                                needed=("e1", "e2", "hh1"))
    # a flat-band design point is solved by the batched bound-state solver, which finds
    # every bound state at once (cheap there): the needed ones are among them, and no
    # resonance is searched
    labels = [lab for lab, _, _ in point.states]
    assert {"e1", "e2", "hh1"} <= set(labels)
    full = solve_profile(band_profile(design.apply_parameters(st, {"w2.thickness": 4.8})),
                         bands=("conduction", "heavy_hole"), tolerance_eV=1e-12)
    assert labels == [s.label for s in full.states if s.bound]
    # this stack has graded layers, so each route stops its slice refinement once its
    # Richardson estimate is inside the design tolerance (DEFAULT_TOLERANCE_EV = 0.1 ueV):
    # the energies agree with a 1e-12 eV solve to that contract (here ~1.5e-10 eV)
    from qwell.design.evaluate import DEFAULT_TOLERANCE_EV
    for lab, e, bound in point.states:
        assert bound
        assert e == pytest.approx(full.state(lab).energy_eV, abs=DEFAULT_TOLERANCE_EV)
    assert point.transition_energy("e1-hh1") == pytest.approx(
        full.transition("e1-hh1").energy_eV, abs=2 * DEFAULT_TOLERANCE_EV)
