"""Hostile inputs over every command: bounded time and memory, one-line errors, no side effects.

Each case runs ``qwell`` on a stack file or option built to break it and checks:

* the exit status is 0 or 2 (never 1, the internal-error status);
* no traceback and no "internal error" on stderr;
* a refused input (exit 2) prints exactly one line that names where the problem is:
  FILE:LINE: KEY for a stack file, or the option;
* the wall time is under 10 s and the peak memory under 1 GB (resource module);
* a refused input creates and changes no file (the whole working folder is compared).

The in-process part calls :func:`qwell.cli.main` (fast; the process's peak resident
size, which only grows, bounds every case's peak).  The part marked slow runs
``python -m qwell.cli`` in fresh processes: peak memory of the children from
``resource.getrusage(RUSAGE_CHILDREN)``, blocking inputs (a FIFO), a full disk (RLIMIT_FSIZE) and interrupts
(SIGINT / SIGTERM during a parallel sweep must end the workers within about a second,
print one line, exit 130 and leave no output).  The limits themselves are the
README's limits table (common practice, no source).
"""

from __future__ import annotations

import json
import os
import resource
import signal
import subprocess
import sys
import time
import warnings
from pathlib import Path

import pytest

from qwell.cli import main
from qwell.cli.common import MAX_STATE_BYTES
from qwell.units import RANGES

ROOT = Path(__file__).resolve().parents[1]
MAX_SECONDS = 10.0
MAX_BYTES = 1 << 30


def stack_text(*, temperature="77 K", extra="field: 0 kV/cm", thickness="6 nm", well_extra="",
               name="corpus"):
    """Lines: 1 name, 2 temperature, 3 substrate, 4 extra key, 5 layers, 6 b1, 7 well, 8 b2."""
    return (f"name: {name}\ntemperature: {temperature}\nsubstrate: GaAs\n{extra}\nlayers:\n"
            "  - {material: Al0.3Ga0.7As, thickness: 20 nm, name: b1}\n"
            f"  - {{material: GaAs, thickness: {thickness}, name: well{well_extra}}}\n"
            "  - {material: Al0.3Ga0.7As, thickness: 20 nm, name: b2}\n")


def user_material_text(key, value):
    """Line 6 holds the hostile parameter: materials.m.<key>."""
    params = {"lattice_constant": "0.565 nm", "light_hole_mass": "0.08",
              "conduction_edge": "0.0 eV", "valence_edge": "-1.5 eV", "electron_mass": "0.067",
              "heavy_hole_mass": "0.5"}
    params.pop(key, None)
    first = [f"    {k}: {v}\n" for k, v in params.items()]
    body = first[:2] + [f"    {key}: {value}\n"] + first[2:]
    return ("name: user\nmaterials:\n  m:\n" + "".join(body) + "layers:\n  - {material: Al0.3Ga0.7As, thickness: 20 nm}\n"
            "  - {material: m, thickness: 6 nm}\n  - {material: Al0.3Ga0.7As, thickness: 20 nm}\n")


OK = stack_text()
CASES: list = []   # (id, files {name: text}, argv, expected status, text the error must name)


def case(cid, argv, status, where=None, files=None):
    CASES.append(pytest.param({"s.yaml": OK} if files is None else files, argv, status, where,
                              id=cid))


# -- stack values, each refused at its own file:line:key ---------------------------------
THICKNESS_BAD = ["9**9**9 nm", "10**400 nm", "1e400 nm", "inf nm", "-inf nm", "nan nm",
                 "-5 nm", "0 nm", "1e-30 nm", "5", "5 kg", "'(5) nm'", "'5 nm + 1 nm'",
                 "5e99999 nm", "1 km", "0x10 nm", "'5 nm; ls'", "\"__import__('os') nm\"",
                 "5 nm**9**9", "''", "[]", "true", "5 ML ML", "1e6 um",
                 "'" + "9" * 200 + " nm'", "5 nm^99", "5 1/nm", "-0 nm", "5 degC"]
for i, v in enumerate(THICKNESS_BAD):
    case(f"thickness-{i}", ["levels", "s.yaml"], 2, "s.yaml:7: layers[1].thickness",
         {"s.yaml": stack_text(thickness=v)})
for i, v in enumerate(["'10**400 nm'", "1e-30 nm", "inf nm"]):
    for cmd in (["profile", "s.yaml"], ["report", "s.yaml"], ["tolerance", "s.yaml"]):
        case(f"thickness-{cmd[0]}-{i}", cmd, 2, "s.yaml:7: layers[1].thickness",
             {"s.yaml": stack_text(thickness=v)})

TEMPERATURE_BAD = ["inf K", "-inf K", "nan K", "0 K", "-5 K", "1e6 K", "1e400 K", "300",
                   "300 nm", "9**9**9 K", "-300 degC", "2000 K"]
for i, v in enumerate(TEMPERATURE_BAD):
    case(f"temperature-{i}", ["levels", "s.yaml"], 2, "s.yaml:2: temperature",
         {"s.yaml": stack_text(temperature=v)})

FIELD_BAD = ["1e9 kV/cm", "inf kV/cm", "nan kV/cm", "5000 kV/cm", "-3000 kV/cm", "12",
             "12 kV", "9**9 kV/cm", "1e400 V/cm"]
for i, v in enumerate(FIELD_BAD):
    case(f"field-{i}", ["levels", "s.yaml"], 2, "s.yaml:4: field",
         {"s.yaml": stack_text(extra=f"field: {v}")})

FERMI_BAD = ["1e300 eV", "inf eV", "50 eV", "-50 eV", "0.1", "1e400 eV", "0.1 nm"]
for i, v in enumerate(FERMI_BAD):
    case(f"fermi-{i}", ["levels", "s.yaml"], 2, "s.yaml:4: fermi_level",
         {"s.yaml": stack_text(extra=f"fermi_level: {v}")})

DOPING_BAD = ["{donors: 1e30 cm^-3}", "{donors: inf cm^-3}", "{donors: -1e18 cm^-3}",
              "{donors: 1e18}", "{donors: 1e18 cm^-2}", "{acceptors: 1e25 cm^-3}",
              "{sheet: 1e20 cm^-2, at: 3 nm}", "{donors: 1e400 cm^-3}",
              "{donors: 1e18 cm^-3, donor_level: 5 eV}", "{donors: 9**9**9 cm^-3}"]
for i, v in enumerate(DOPING_BAD):
    case(f"doping-{i}", ["levels", "s.yaml"], 2, "s.yaml:7: layers[1].doping",
         {"s.yaml": stack_text(well_extra=f", doping: {v}")})

MATERIAL_BAD = [("electron_mass", "1e6"), ("electron_mass", "1e-9"), ("electron_mass", "-0.067"),
                ("electron_mass", "inf"), ("electron_mass", "nan"), ("heavy_hole_mass", "1e300"),
                ("conduction_edge", "1e300 eV"), ("conduction_edge", "inf eV"),
                ("valence_edge", "-1e5 eV"), ("lattice_constant", "100 nm"),
                ("lattice_constant", "1e-9 nm"), ("dielectric_constant", "1e9"),
                ("c11", "1e9 GPa"), ("kane_energy", "1e5 eV"), ("band_gap", "1e4 eV"),
                ("electron_mass", "'9**9**9'")]
for i, (k, v) in enumerate(MATERIAL_BAD):
    case(f"material-{k}-{i}", ["levels", "s.yaml"], 2, f"s.yaml:6: materials.m.{k}",
         {"s.yaml": user_material_text(k, v)})

NESTED = ("layers:\n  - repeat: 3\n    layers:\n      - repeat: 3\n        layers:\n"
          "          - repeat: 3\n            layers:\n              - {material: GaAs, "
          "thickness: 1 nm}\n")
BOMB = "a: &a [x, x, x, x, x, x, x, x, x, x]\n" + "".join(
    f"{chr(98 + i)}: &{chr(98 + i)} [*{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}, "
    f"*{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}, "
    f"*{chr(97 + i)}, *{chr(97 + i)}]\n" for i in range(8)) + "layers: []\n"
STRUCTURE_BAD = [
    ("empty", "", "s.yaml"),
    ("list", "- 1\n- 2\n", "s.yaml:1"),
    ("scalar", "just text\n", "s.yaml"),
    ("unknown-key", OK + "colour: blue\n", "s.yaml:9: colour"),
    ("no-layers", "name: x\n", "s.yaml"),
    ("repeat-huge", "layers:\n  - repeat: 1000000000000\n    layers:\n"
     "      - {material: GaAs, thickness: 1 nm}\n", "s.yaml:2: layers[0]"),
    ("repeat-zero", "layers:\n  - repeat: 0\n    layers:\n      - {material: GaAs, thickness: 1 nm}\n",
     "s.yaml:2: layers[0].repeat"),
    ("repeat-float", "layers:\n  - repeat: 2.5\n    layers:\n      - {material: GaAs, thickness: 1 nm}\n",
     "s.yaml:2: layers[0].repeat"),
    ("repeat-nested", NESTED, "s.yaml:6: layers[0].layers[0].layers[0].repeat"),
    ("alias-bomb", BOMB, "s.yaml"),
    ("solve-cap", "layers:\n  - {material: Al0.3Ga0.7As, thickness: 10 nm}\n  - repeat: 10000\n"
     "    layers:\n      - {material: GaAs, thickness: 3 nm}\n"
     "      - {material: Al0.3Ga0.7As, thickness: 3 nm}\n", "s.yaml: layers"),
    ("wide-well", stack_text(thickness="5 um"), "s.yaml: layers"),
    ("long-name", stack_text(name="x" * 100000), "s.yaml:1: name"),
    ("too-thick", "layers:\n  - repeat: 2000\n    layers:\n      - {material: GaAs, thickness: 60 nm}\n",
     "s.yaml:1: layers"),
    ("bad-material", stack_text().replace("GaAs, thickness: 6", "GaAz, thickness: 6"),
     "s.yaml:7: layers[1].material"),
    ("bad-yaml", "layers: [\n", "s.yaml:"),
    ("tab-yaml", "layers:\n\t- {material: GaAs}\n", "s.yaml:2"),
    ("bad-composition", stack_text().replace("GaAs, thickness: 6", "Al1.5Ga-0.5As, thickness: 6"),
     "s.yaml:7: layers[1].material"),
    ("layer-name", stack_text(well_extra="\U0001F680"), "s.yaml:7: layers[1].name"),
    ("duplicate-name", stack_text().replace("name: b2", "name: b1"), "s.yaml:8: layers[2].name"),
    ("mass-cap", user_material_text("electron_mass", "90").replace("6 nm}", "2000 nm}"),
     "s.yaml: layers"),
]
for cid, text, where in STRUCTURE_BAD:
    case(f"structure-{cid}", ["levels", "s.yaml"], 2, where, {"s.yaml": text})
case("structure-binary", ["levels", "s.yaml"], 2, "s.yaml", {"s.yaml": b"layers:\x00\x01"})
case("structure-latin1", ["levels", "s.yaml"], 2, "s.yaml:1", {"s.yaml": "name: \xe9\n".encode("latin-1")})
case("structure-newline-key", ["levels", "s.yaml"], 2, "s.yaml:1: name",
     {"s.yaml": "name: [a, b]\n" + OK.split("\n", 1)[1]})

# -- file names -----------------------------------------------------------------------------
case("file-missing", ["levels", "missing.yaml"], 2, "missing.yaml", {})
case("file-directory", ["levels", "d"], 2, "d: is a directory", {"d/": None})
case("file-device", ["levels", "/dev/null"], 2, "/dev/null: is a device; expected a regular YAML stack file", {})
case("file-newline", ["levels", "a\nb.yaml"], 2, "a\\nb.yaml:7: layers[1].thickness",
     {"a\nb.yaml": stack_text(thickness="inf nm")})
case("file-newline-missing", ["levels", "x\ny.yaml"], 2, "x\\ny.yaml", {})
case("file-emoji", ["levels", "\U0001F680.yaml"], 2, "\U0001F680.yaml:7",
     {"\U0001F680.yaml": stack_text(thickness="0 nm")})

# -- options ----------------------------------------------------------------------------------
SWEEP = ["sweep", "s.yaml", "--vary", "well.thickness"]
SWEEP_BAD = [
    (["--from", "9**9**9 nm", "--to", "7nm"], "9**9**9"),
    (["--from", "4nm", "--to", "10**400 nm"], "10**400"),
    (["--from", "4nm", "--to", "inf nm"], "inf nm"),
    (["--from", "4nm", "--to", "7nm", "--points", "1000000000"], "--points"),
    (["--from", "4nm", "--to", "7nm", "--points", "0"], "--points"),
    (["--from", "4nm", "--to", "7nm", "--points", "-3"], "--points"),
    (["--from", "4nm", "--to", "7nm", "--points", "x"], "--points"),
    (["--from", "4nm", "--to", "7nm", "--step", "1e-9nm"], "--step"),
    (["--from", "4nm", "--to", "7nm", "--step", "0nm"], "--step"),
    (["--from", "4nm", "--to", "7nm", "--step", "-1nm"], "--step"),
    (["--from", "4nm", "--to", "7nm", "--step", "1e-300 nm"], "--step"),
    (["--from", "4nm", "--to", "7nm", "--step", "1 kg"], "1 kg"),
    (["--from", "4nm", "--to", "7nm", "--dask", "not an address"], "--dask"),
    (["--from", "4nm", "--to", "7nm", "--dask", "tcp://host:99999"], "--dask"),
    (["--from", "4nm", "--to", "7nm", "--dask", "tcp://a b:1"], "--dask"),
    (["--from", "4nm", "--to", "7nm", "--dask", ""], "--dask"),
    (["--from", "4nm", "--to", "7nm", "--dask", "tcp://127.0.0.1:1", "--dask-timeout", "2"],
     "cannot reach the Dask scheduler at 'tcp://127.0.0.1:1' within 2 s"),
    (["--from", "4nm", "--to", "5um", "--points", "3"], "--vary well.thickness at 5000 nm"),
    (["--from", "4nm", "--to", "7nm", "--jobs", "0"], "--jobs"),
    (["--from", "4nm", "--to", "7nm", "--jobs", "100000"], "--jobs"),
    (["--from", "4nm", "--to", "7nm", "--dask-timeout", "nan"], "--dask-timeout"),
    (["--from", "4nm", "--to", "7nm", "--dask-timeout", "-1"], "--dask-timeout"),
    (["--from", "-2nm", "--to", "7nm"], "well.thickness"),
    (["--from", "4nm", "--to", "7nm", "--points", "3", "--csv", "x.csv", "--png", "x.docx"],
     "x.docx"),
    (["--from", "4nm", "--to", "7nm", "--points", "3", "--csv", "same.csv", "--png", "same.csv"],
     "same.csv"),
    (["--from", "4nm", "--to", "7nm", "--points", "3", "--csv", "nodir/x.csv"], "nodir/x.csv"),
    (["--from", "4nm", "--to", "7nm", "--points", "3", "--csv", "s.yaml"], "s.yaml"),
    (["--from", "4nm", "--to", "7nm", "--points", "3", "--csv", "d"], "d"),
]
for i, (extra, where) in enumerate(SWEEP_BAD):
    files = {"s.yaml": OK, "d/": None} if "d" in extra else None
    case(f"sweep-{i}", SWEEP + extra, 2, where, files)
MAP_BAD = ["sweep", "s.yaml", "--vary", "well.thickness", "--from", "4nm", "--to", "7nm",
           "--points", "1000", "--vary", "temperature", "--from", "10K", "--to", "300K",
           "--points", "1000"]
case("sweep-map-cap", MAP_BAD, 2, "2-D map")

SIZE = ["size", "s.yaml", "--vary", "well.thickness"]
for i, t in enumerate(["10**400 um", "9**9**9 um", "inf um", "nan um", "0 um", "-4 um", "4",
                       "4 kg", "1e400 um", "4 um um"]):
    case(f"size-target-{i}", SIZE + ["--target", t], 2, None if i != 6 else "4")
for i, (lo, hi) in enumerate([("9**9**9 nm", "7 nm"), ("4 nm", "inf nm"), ("0 nm", "7 nm")]):
    case(f"size-range-{i}", SIZE + ["--target", "9um", "--from", lo, "--to", hi], 2)
case("size-write-input", SIZE + ["--target", "9um", "--write", "s.yaml"], 2, "--write")
case("size-unknown-path", ["size", "s.yaml", "--vary", "nothing.x", "--target", "9um"], 2,
     "nothing.x")

TOL = ["tolerance", "s.yaml"]
TOL_BAD = [(["--monte-carlo", "1000000000"], "--monte-carlo"),
           (["--monte-carlo", "-1"], "--monte-carlo"),
           (["--monte-carlo", "5", "--seed", "-1"], "--seed"),
           (["--monte-carlo", "5", "--seed", str(2**64)], "--seed"),
           (["--monte-carlo", "5", "--seed", "x"], "--seed"),
           (["--thickness", "9**9**9 nm"], "9**9**9"),
           (["--thickness", "inf nm"], "inf nm"),
           (["--thickness", "well="], "--thickness"),
           (["--composition", "nan"], "nan"),
           (["--vary", "field"], "--vary"),
           (["--vary", "field=1e400 kV/cm"], "1e400"),
           (["--monte-carlo", "5", "--dask", "localhost"], "--dask"),
           (["--distribution", "cauchy"], "--distribution")]
for i, (extra, where) in enumerate(TOL_BAD):
    case(f"tolerance-{i}", TOL + extra, 2, where)

for i, t in enumerate(["1e6K", "inf K", "nan K", "0.0001 K", "-5 K", "300", "300 nm", "9**9**9 K",
                       "1e400 K", "''"]):
    case(f"materials-temperature-{i}", ["materials", "GaAs", "--temperature", t], 2,
         "--temperature" if i in (0, 3, 4) else None)
case("materials-unknown", ["materials", "Unobtainium"], 2, "Unobtainium")
case("materials-bad-formula", ["materials", "Al2.0Ga-1.0As"], 2)

LEVELS_BAD = [(["--png", "x.docx"], "x.docx"), (["--png", "nodir/x.png"], "nodir/x.png"),
              (["--png", "s.yaml"], "s.yaml"), (["--band", "valence"], "--band"),
              (["--method", "magic"], "--method"), (["--linewidth", "x"], "--linewidth"),
              (["--transition", "e9-e10"], "e9-e10")]
for i, (extra, where) in enumerate(LEVELS_BAD):
    case(f"levels-option-{i}", ["levels", "s.yaml"] + extra, 2, where)

case("report-missing-dir", ["report", "s.yaml", "-o", "nowhere"], 2, "nowhere")
case("report-file-as-dir", ["report", "s.yaml", "-o", "f.txt"], 2, "f.txt",
     {"s.yaml": OK, "f.txt": "keep\n"})
case("report-png-is-dir", ["report", "s.yaml", "-o", "out"], 2, "s.png",
     {"s.yaml": OK, "out/": None, "out/s.pdf": "old pdf\n", "out/s.png/": None})
case("report-bad-transition", ["report", "s.yaml", "--transition", "x1-y2"], 2, "x1-y2")
case("profile-bad-option", ["profile", "s.yaml", "--json", "--nonsense"], 2, "--nonsense")
case("no-command", ["--frobnicate"], 2, "--frobnicate", {})

# -- accepted hostile-looking inputs: exit 0 ------------------------------------------------
case("ok-emoji-name-levels", ["levels", "s.yaml"], 0, None,
     {"s.yaml": stack_text(name="'emoji \U0001F680 stack'")})
case("ok-emoji-name-report", ["report", "s.yaml", "-o", "out"], 0, None,
     {"s.yaml": stack_text(name="'emoji \U0001F680 \u4e2d stack'"), "out/": None})
case("ok-degC", ["levels", "s.yaml"], 0, None, {"s.yaml": stack_text(temperature="20 degC")})
case("ok-angstrom", ["levels", "s.yaml", "--json"], 0, None,
     {"s.yaml": stack_text(thickness="60 Å")})
case("ok-materials-hot", ["materials", "GaAs", "--temperature", "1000 K"], 0)
case("ok-sweep-csv-png", SWEEP + ["--from", "5nm", "--to", "7nm", "--points", "3", "--csv",
                                  "x.csv", "--png", "x.png", "--jobs", "1"], 0)


def _snapshot(folder: Path) -> dict:
    out = {}
    for p in sorted(folder.rglob("*")):
        st = p.lstat()
        out[str(p.relative_to(folder))] = (p.is_dir(), st.st_size, st.st_mtime_ns)
    return out


def _make_files(folder: Path, files: dict) -> None:
    for name, text in files.items():
        p = folder / name
        if name.endswith("/"):
            p.mkdir(parents=True, exist_ok=True)
            continue
        p.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(text, bytes):
            p.write_bytes(text)
        else:
            p.write_text(text, encoding="utf-8")


def _check_stderr(err: str, status: int, where) -> None:
    assert "Traceback" not in err and "internal error" not in err, err
    if status == 2:
        lines = [ln for ln in err.splitlines() if ln.strip()]
        assert len(lines) == 1, err
        assert lines[0].startswith("qwell") and "error:" in lines[0], err
        if where is not None:
            assert where in lines[0], (where, lines[0])


def test_corpus_size():
    assert len(CASES) >= 150
    commands = {p.values[1][0] for p in CASES}
    assert {"levels", "profile", "materials", "size", "sweep", "tolerance", "report"} <= commands


@pytest.mark.parametrize("files, argv, status, where", CASES)
def test_hostile_case(files, argv, status, where, tmp_path, monkeypatch, capsys):
    _make_files(tmp_path, files)
    monkeypatch.chdir(tmp_path)
    before = _snapshot(tmp_path)
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        # the command line reports qwell's own warnings itself; others must not escape
        warnings.simplefilter("ignore", UserWarning)
        try:
            rc = main(list(argv))
        except SystemExit as exc:   # argparse usage errors
            rc = exc.code
    elapsed = time.perf_counter() - t0
    out, err = capsys.readouterr()
    assert rc == status, (rc, err)
    _check_stderr(err, rc, where)
    assert elapsed < MAX_SECONDS, elapsed
    # ru_maxrss is in KiB on Linux and only grows: the process peak bounds this case's peak
    assert resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024 < MAX_BYTES
    if rc == 2:
        assert _snapshot(tmp_path) == before
    if "--json" in argv and rc == 0:
        json.loads(out)


# ---------------------------------------------------------------------------------------------
# fresh processes: peak memory of each child, blocking inputs, full disk, interrupts
# ---------------------------------------------------------------------------------------------
def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    env.pop("QWELL_DEBUG", None)
    return env


def _run(argv, cwd, *, timeout=60.0, preexec=None):
    """(status, stderr, wall s, peak resident bytes) of ``python -m qwell.cli argv``."""
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "qwell.cli", *argv], cwd=cwd, env=_env(),
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            preexec_fn=preexec, start_new_session=True)
    try:
        _, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.communicate()
        raise
    wall = time.perf_counter() - t0
    # RUSAGE_CHILDREN holds the largest peak of all children waited for so far: below the
    # limit means this child (and every earlier one) stayed below it
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024
    return proc.returncode, err.decode("utf-8", "replace"), wall, peak


SUBPROCESS_CASES = [
    ("wide-well", {"s.yaml": stack_text(thickness="5 um")}, ["levels", "s.yaml"], "s.yaml"),
    ("mass", {"s.yaml": user_material_text("electron_mass", "1e6")}, ["levels", "s.yaml"],
     "s.yaml:6"),
    ("solve-cap", {"s.yaml": STRUCTURE_BAD[10][1]}, ["levels", "s.yaml"], "s.yaml"),
    ("power", {"s.yaml": stack_text(thickness="9**9**9 nm")}, ["levels", "s.yaml"], "s.yaml:7"),
    ("points", {"s.yaml": OK}, SWEEP + ["--from", "4nm", "--to", "7nm", "--points", "1000000000"],
     "--points"),
    ("step", {"s.yaml": OK}, SWEEP + ["--from", "4nm", "--to", "7nm", "--step", "1e-9nm"],
     "--step"),
    ("monte-carlo", {"s.yaml": OK}, ["tolerance", "s.yaml", "--monte-carlo", "1000000000"],
     "--monte-carlo"),
    ("long-name", {"s.yaml": stack_text(name="x" * 100000)}, ["report", "s.yaml"], "s.yaml:1"),
    ("dask", {"s.yaml": OK}, SWEEP + ["--from", "4nm", "--to", "7nm", "--dask", "no address"],
     "--dask"),
]


@pytest.mark.slow
@pytest.mark.parametrize("cid, files, argv, where", SUBPROCESS_CASES,
                         ids=[c[0] for c in SUBPROCESS_CASES])
def test_hostile_case_in_fresh_process(cid, files, argv, where, tmp_path):
    _make_files(tmp_path, files)
    before = _snapshot(tmp_path)
    rc, err, wall, peak = _run(argv, tmp_path)
    assert rc == 2, err
    _check_stderr(err, rc, where)
    assert wall < MAX_SECONDS + 5.0, wall   # + interpreter start-up on a loaded machine
    assert peak < MAX_BYTES, peak
    assert _snapshot(tmp_path) == before


@pytest.mark.slow
def test_fifo_is_refused_at_once(tmp_path):
    os.mkfifo(tmp_path / "pipe.yaml")
    rc, err, wall, _ = _run(["levels", "pipe.yaml"], tmp_path, timeout=30)
    assert rc == 2
    _check_stderr(err, rc, "pipe.yaml: is a FIFO (named pipe); expected a regular YAML stack file")


def _ignore_sigxfsz_and_limit_files():
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
    resource.setrlimit(resource.RLIMIT_FSIZE, (1000, 1000))


@pytest.mark.slow
@pytest.mark.parametrize("argv, where", [
    (["report", "s.yaml"], "reports"),
    (SWEEP + ["--from", "5nm", "--to", "7nm", "--points", "3", "--jobs", "1", "--csv", "x.csv",
              "--png", "x.png"], "x.png"),
    (["levels", "s.yaml", "--png", "x.png"], "x.png"),
], ids=["report", "sweep", "levels"])
def test_full_disk_leaves_nothing(argv, where, tmp_path):
    # a file-size limit of 1000 bytes stands in for a full disk: every larger write fails
    (tmp_path / "s.yaml").write_text(OK)
    before = _snapshot(tmp_path)
    rc, err, _, _ = _run(argv, tmp_path, preexec=_ignore_sigxfsz_and_limit_files)
    assert rc == 2, err
    _check_stderr(err, rc, where)
    assert _snapshot(tmp_path) == before     # no partial file, no empty reports/ folder


@pytest.mark.slow
@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only folders")
def test_read_only_folder(tmp_path):
    (tmp_path / "s.yaml").write_text(OK)
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        rc, err, _, _ = _run(["levels", "s.yaml", "--png", "ro/x.png"], tmp_path)
    finally:
        ro.chmod(0o755)
    assert rc == 2
    _check_stderr(err, rc, "ro/x.png")


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_interrupt_stops_workers_promptly(sig, tmp_path):
    (tmp_path / "s.yaml").write_text(OK)
    # 100,000 points (the cap): the batched route sweeps 20,000 in about 3 s, and the
    # sweep must still be running when the signal comes
    argv = SWEEP + ["--from", "4nm", "--to", "9nm", "--points", "100000", "--jobs", "2",
                    "--csv", "x.csv"]
    proc = subprocess.Popen([sys.executable, "-m", "qwell.cli", *argv], cwd=tmp_path, env=_env(),
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            start_new_session=True)
    try:
        # wait until the worker processes run (children of the command)
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            kids = Path(f"/proc/{proc.pid}/task/{proc.pid}/children")
            if kids.exists() and kids.read_text().split():
                break
            time.sleep(0.2)
        else:
            pytest.fail("the worker pool did not start")
        time.sleep(1.0)
        workers = kids.read_text().split()
        t0 = time.perf_counter()
        # Ctrl-C on a terminal reaches the whole process group; SIGTERM only the command
        if sig == signal.SIGINT:
            os.killpg(proc.pid, sig)
        else:
            proc.send_signal(sig)
        _, err = proc.communicate(timeout=30)
        stopped = time.perf_counter() - t0
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.communicate()
    err = err.decode()
    assert proc.returncode == 130, err
    assert [ln for ln in err.splitlines() if ln.strip()] == ["qwell: interrupted"]
    assert stopped < 3.0, stopped   # about a second; margin for a loaded machine
    time.sleep(0.2)
    assert not any(Path(f"/proc/{w}").exists() and "zombie" not in
                   Path(f"/proc/{w}/status").read_text().lower() for w in workers)
    assert not (tmp_path / "x.csv").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.yaml"]


def test_readme_limits_table_is_the_ranges_table():
    # the README documents the ranges in one table; it must be qwell.units.RANGES
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    rows = {}
    for line in readme.splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) == 5 and cells[0] in RANGES:
            rows[cells[0]] = (float(cells[2]), float(cells[3]), cells[4] or "1")
    assert rows == {k: (lo, hi, u) for k, (lo, hi, u, _) in RANGES.items()}


def test_state_memory_cap_is_in_bytes_in_code_and_readme(tmp_path, capsys):
    # the cap on a band's states is a byte estimate; the README's caps table states the
    # code's limit in bytes (common practice, no source)
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    row = [ln for ln in readme.splitlines() if ln.startswith("| memory of one band's states")]
    assert len(row) == 1 and f"| {MAX_STATE_BYTES:,} bytes" in row[0]
    f = tmp_path / "s.yaml"
    f.write_text(stack_text(thickness="5 um"))
    assert main(["levels", str(f)]) == 2
    err = capsys.readouterr().err.strip()
    assert f"above the limit of {MAX_STATE_BYTES:,} bytes" in err and err.count("\n") == 0


@pytest.mark.parametrize("target", ["9 parsec", "1e-9 nm", "1e-12 THz", "500 eV"])
def test_target_outside_the_photon_range_is_refused_with_its_place(tmp_path, capsys, target):
    # a design target is a photon a quantum-well line can give: 0.1 meV to 20 eV
    # (qwell.units.RANGES['photon_energy']; common practice, no source)
    stack = tmp_path / "s.yaml"
    stack.write_text("name: x\n"
                     f"line: {{transition: e1-e2, target: {target}}}\n"
                     "layers:\n"
                     "  - {material: Al0.3Ga0.7As, thickness: 20 nm}\n"
                     "  - {material: GaAs, thickness: 5 nm}\n"
                     "  - {material: Al0.3Ga0.7As, thickness: 20 nm}\n")
    assert main(["levels", str(stack)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0
    assert f"{stack}:2: line.target:" in err and "0.0001 to 20 eV" in err
    assert main(["size", "layers/lwir-detector.yaml", "--vary", "well.thickness",
                 "--target", target.replace(" ", "")]) == 2
    assert "0.0001 to 20 eV" in capsys.readouterr().err
