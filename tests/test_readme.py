"""The README's promises: the job paragraph, the two set-up commands, the shown output, cautions."""

import re
import shlex
from pathlib import Path

import pytest

from qwell.cli import main

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text()


def test_opens_with_the_job_and_two_commands():
    first = next(p for p in README.split("\n\n") if p.strip() and not p.startswith("#"))
    assert len(first) > 200 and "engineers" in first
    blocks = re.findall(r"```\n(.*?)\n```", README, flags=re.S)
    assert blocks[0].strip() == "python3 -m pip install . && qwell levels layers/pump-laser-well.yaml"
    test_cmd = 'python3 -m pytest -q -m "slow or not slow"'
    assert blocks[1].strip() == 'python3 -m pip install ".[test]" && ' + test_cmd
    ci = (ROOT / ".ci" / "run").read_text()
    assert 'pip install --quiet --disable-pip-version-check ".[test]"' in ci
    assert test_cmd in ci


SHOWN = re.findall(r"```\n\$ (qwell [^\n]+)\n(.*?)\n```", README, flags=re.S)


def test_readme_shows_runs():
    assert any(cmd.startswith("qwell levels") for cmd, _ in SHOWN)


@pytest.mark.parametrize("cmd, shown", SHOWN, ids=[c for c, _ in SHOWN])
def test_shown_output_is_what_the_command_prints(capsys, monkeypatch, cmd, shown):
    monkeypatch.chdir(ROOT)
    rc = main(shlex.split(cmd)[1:])
    out = capsys.readouterr().out
    assert rc == 0
    assert out.rstrip() == shown.rstrip()


def test_cautions_are_shown():
    from qwell.report import CAUTIONS
    for needle in ("IEC 60825-1", "invisible infrared laser radiation", "arsenic",
                   "confirm every wavelength", "local codes and licensed practice"):
        assert needle in README
        assert any(needle in c for c in CAUTIONS)


def test_python_example_prints_what_the_readme_shows(tmp_path, monkeypatch, capsys):
    # the "From Python" example, run as written (its figure goes to a scratch folder)
    m = re.search(r"## From Python.*?```python\n(.*?)\n```\s*prints\s*```text\n(.*?)\n```",
                  README, flags=re.S)
    assert m, "README has no 'From Python' example with its output"
    code, shown = m.groups()
    code = code.replace('"layers/', '"' + str(ROOT / "layers") + "/")
    monkeypatch.chdir(tmp_path)
    exec(compile(code, "README.md", "exec"), {"__name__": "readme_example"})
    assert capsys.readouterr().out.rstrip() == shown.rstrip()
    assert (tmp_path / "lwir-diagram.png").stat().st_size > 10_000
