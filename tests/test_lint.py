"""Lint the package and tests with ruff (pyflakes + bugbear rules, see pyproject)."""

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def test_ruff_clean():
    exe = shutil.which("ruff")
    cmd = [exe] if exe else [sys.executable, "-m", "ruff"]
    try:
        res = subprocess.run(cmd + ["check", "--quiet", "qwell", "tests"], cwd=ROOT,
                             capture_output=True, text=True, timeout=120)
    except FileNotFoundError:
        pytest.skip("ruff is not installed (it is in the test extra)")
    assert res.returncode == 0, res.stdout + res.stderr
