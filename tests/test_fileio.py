"""Atomic output (qwell.fileio): no half-written files, inputs never overwritten."""

import os

import pytest

from qwell.fileio import OutputError, atomic_write_text


def test_atomic_write_creates_and_replaces(tmp_path):
    p = tmp_path / "out.txt"
    atomic_write_text(p, "one")
    atomic_write_text(p, "two")
    assert p.read_text() == "two"
    assert [f.name for f in tmp_path.iterdir()] == ["out.txt"]  # no temporary left behind


def test_refuses_to_overwrite_input(tmp_path):
    inp = tmp_path / "stack.yaml"
    inp.write_text("layers: []\n")
    with pytest.raises(OutputError, match="refusing to overwrite the input file"):
        atomic_write_text(inp, "x", protect=[inp])
    assert inp.read_text() == "layers: []\n"


def test_missing_folder_is_clear(tmp_path):
    with pytest.raises(OutputError, match="does not exist"):
        atomic_write_text(tmp_path / "nope" / "a.txt", "x")


def test_failure_leaves_nothing(tmp_path, monkeypatch):
    p = tmp_path / "a.txt"

    def boom(*a, **k):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", boom)
    with pytest.raises(OSError, match="disk full"):
        atomic_write_text(p, "x")
    assert list(tmp_path.iterdir()) == []


def test_written_file_has_the_usual_mode(tmp_path):
    # POSIX: new files get 0666 & ~umask (common practice, no source)
    p = tmp_path / "m.txt"
    atomic_write_text(p, "x")
    mask = os.umask(0)
    os.umask(mask)
    assert (p.stat().st_mode & 0o777) == (0o666 & ~mask)
