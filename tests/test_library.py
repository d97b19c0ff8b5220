"""Material libraries: checks, merging, provenance, bad input (qwell.materials.library)."""

import math
import os
import textwrap
from pathlib import Path

import pytest

from qwell.errors import LibraryError, QwellError, StackError, ValidityWarning
from qwell.materials import (
    PARAM_FIELDS,
    check_library,
    from_memory_count,
    get_material,
    kane_electron_mass,
    load_library,
    material_provenance,
    material_set,
)
from qwell.profile import band_profile
from qwell.stack import load_stack, stack_from_mapping, stack_from_text

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "layers" / "libraries" / "demo-lab.yaml"
PUMP = ROOT / "layers" / "pump-laser-well.yaml"


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(textwrap.dedent(text), encoding="utf-8")
    return p


# --------------------------------------------------------------------------- Kane relation
def test_kane_two_band_limit():
    # Kane, J. Phys. Chem. Solids 1, 249 (1957): with no spin-orbit splitting
    # and no remote bands, m0/me = 1 + Ep/Eg (the two-band closed form).
    assert kane_electron_mass(1.5, 0.0, 30.0, 0.0) == pytest.approx(1.0 / (1.0 + 30.0 / 1.5),
                                                                    rel=1e-12)


@pytest.mark.parametrize("name", ["GaAs", "InAs", "InP"])
def test_builtin_binaries_pass_the_kane_check(name):
    # Kane relation with the remote-band parameter F, as written in Vurgaftman,
    # Meyer, Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), Sec. II (from memory):
    # m0/me = 1 + 2F + Ep (Eg + 2D/3) / (Eg (Eg + D)), Eg the 0 K Gamma gap.
    # Written out here independently of qwell's kane_electron_mass.
    m = get_material(name, temperature_K=0.0)
    eg, d, ep, f = m.band_gap_eV, m.spin_orbit_eV, m.kane_energy_eV, m.kane_F
    me_kane = 1.0 / (1.0 + 2.0 * f + ep * (eg + 2.0 * d / 3.0) / (eg * (eg + d)))
    assert abs(m.electron_mass - me_kane) / me_kane < 0.10
    assert kane_electron_mass(eg, d, ep, f) == pytest.approx(me_kane, rel=1e-12)


def test_library_restating_the_builtin_masses_has_no_kane_warning(tmp_path):
    lib = write(tmp_path, "same.yaml", """\
        binaries:
          GaAs: {electron_mass: {value: 0.067, unit: m0, source: "restated table value"}}
          InAs: {electron_mass: {value: 0.026, unit: m0, source: "restated table value"}}
          InP: {electron_mass: {value: 0.0795, unit: m0, source: "restated table value"}}
        """)
    r = check_library(lib)
    assert r.ok and r.warnings == () and r.defines == 3


def test_inconsistent_mass_is_flagged_with_file_line_key(tmp_path):
    # GaAs: the Kane relation above gives 0.0670 m0; 0.090 m0 is 34 % off.
    lib = write(tmp_path, "heavy.yaml", """\
        name: inconsistent on purpose
        binaries:
          GaAs:
            electron_mass: {value: 0.090, unit: m0, source: "deliberately wrong"}
        """)
    r = check_library(lib)
    assert r.ok  # a warning, not an error
    assert len(r.warnings) == 1
    w = r.warnings[0]
    assert (w.file, w.line, w.key) == (str(lib), 4, "binaries.GaAs.electron_mass")
    assert str(w).startswith(f"{lib}:4: binaries.GaAs.electron_mass: GaAs: electron mass 0.09 m0 "
                             "disagrees by 34 %")
    assert load_library(lib).warnings == r.warnings


# --------------------------------------------------------------------------- one bowing
_PROBES = ["GaAs", "InAs", "InP", "GaSb", "In0.2Ga0.8As", "In0.53Ga0.47As",
           "Al0.3Ga0.7As", "In0.52Al0.48As", "Ga0.51In0.49P", "InAs0.5Sb0.5",
           "In0.73Ga0.27As0.59P0.41", "In0.53Ga0.27Al0.20As"]


def test_one_bowing_changes_exactly_the_dependent_values(tmp_path):
    # Interpolation scheme of Vurgaftman et al. (2001) for ternaries,
    # P(x) = x P_B + (1-x) P_A - x(1-x) C, and for the quaternaries the Vegard
    # sum minus each ternary bowing times its two mixing fractions and the
    # shared-element fraction.  Changing the InGaAs VBO bowing by dC therefore
    # moves Ev (and Ec = Ev + Eg) of every In-Ga-As alloy by -x_In x_Ga y_As dC
    # and leaves every other parameter of every material exactly as it was.
    old_c, new_c = -0.38, 0.012
    lib = write(tmp_path, "vbo.yaml", f"""\
        ternaries:
          InGaAs:
            bowing:
              valence_edge_eV: {{c0: {new_c}, c1: 0, unit: eV, source: "fit"}}
        """)
    mset = material_set([lib])
    for T in (77.0, 300.0):
        for name in _PROBES:
            before = get_material(name, T)
            after = mset.get_material(name, T)
            cat = {"In": 0.0, "Ga": 0.0}
            if name.startswith("In0.2Ga0.8As"):
                cat, y_as = {"In": 0.2, "Ga": 0.8}, 1.0
            elif name == "In0.53Ga0.47As":
                cat, y_as = {"In": 0.53, "Ga": 0.47}, 1.0
            elif name == "In0.73Ga0.27As0.59P0.41":
                cat, y_as = {"In": 0.73, "Ga": 0.27}, 0.59
            elif name == "In0.53Ga0.27Al0.20As":
                cat, y_as = {"In": 0.53, "Ga": 0.27}, 1.0
            else:
                y_as = 0.0
            shift = -cat["In"] * cat["Ga"] * y_as * (new_c - old_c)
            for f in PARAM_FIELDS:
                b, a = getattr(before, f), getattr(after, f)
                if f in ("valence_edge_eV", "conduction_edge_eV"):
                    assert a == pytest.approx(b + shift, abs=1e-12), (name, f)
                else:
                    assert a == b, (name, f)
            if shift:
                assert after.sources["valence_edge_eV"] != before.sources["valence_edge_eV"]


def test_provenance_names_the_library_and_what_it_replaced(tmp_path):
    lib = write(tmp_path, "vbo.yaml", """\
        sources:
          pl: "PL fits of test wells"
        ternaries:
          InGaAs:
            bowing:
              valence_edge_eV: {c0: 0.012, unit: eV, source: pl}
        """)
    mset = material_set([lib])
    m = mset.get_material("In0.2Ga0.8As")
    prov = material_provenance(m, mset)
    ev = prov["valence_edge_eV"]
    libs = [o for o in ev.origins if o.kind == "library"]
    assert len(libs) == 1
    o = libs[0]
    assert o.file == str(lib) and o.line == 6 and o.source_text == "PL fits of test wells"
    assert o.library_key == "ternaries.InGaAs.bowing.valence_edge_eV"
    import hashlib
    assert o.sha256 == hashlib.sha256(lib.read_bytes()).hexdigest()
    assert [r.key for r in o.replaces] == ["vurgaftman2001"] and o.replaces[0].from_memory
    # the end members are still the built-in, from-memory table values
    assert ev.from_memory
    # a value untouched by the library keeps its built-in record only
    gap = prov["band_gap_eV"]
    assert {x.kind for x in gap.origins} == {"built-in"} and gap.from_memory


def test_later_library_wins_and_provenance_says_so(tmp_path):
    a = write(tmp_path, "a.yaml", """\
        binaries:
          GaAs: {electron_mass: {value: 0.0665, unit: m0, source: "group A"}}
        """)
    b = write(tmp_path, "b.yaml", """\
        binaries:
          GaAs: {electron_mass: {value: "0.0660 m0", source: "group B"}}
        """)
    mset = material_set([a, b])
    m = mset.get_material("GaAs")
    assert m.electron_mass == 0.0660
    (o,) = material_provenance(m, mset)["electron_mass"].origins
    assert o.file == str(b) and o.source_text == "group B" and not o.from_memory
    assert [(r.kind, r.file) for r in o.replaces] == [("built-in", None), ("library", str(a))]
    # the other order: a wins
    assert material_set([b, a]).get_material("GaAs").electron_mass == 0.0665


def test_from_memory_count(tmp_path):
    lib = write(tmp_path, "m.yaml", """\
        binaries:
          GaAs: {electron_mass: {value: 0.067, unit: m0, source: "our fit"}}
        """)
    mset = material_set([lib])
    gaas = mset.get_material("GaAs")
    n_mem, n = from_memory_count([gaas], mset)
    n_vals = sum(getattr(gaas, f) is not None for f in PARAM_FIELDS)
    # the heavy/light-hole masses follow from the gammas (same source); only the
    # electron mass now rests on the library alone
    assert (n_mem, n) == (n_vals - 1, n_vals)
    assert from_memory_count([get_material("GaAs")]) == (n_vals, n_vals)


def test_new_binary_and_family(tmp_path):
    # AlP values from memory of Vurgaftman et al. (2001) Table (AlP) (LO-phonon energy
    # and eps_inf also from memory, not used by the check) and the
    # AlInP Gamma-gap bowing -0.48 eV (from memory); the check is the ternary
    # interpolation closed form written out below.
    lib = write(tmp_path, "alp.yaml", """\
        binaries:
          AlP:
            lattice_constant_A_300K: {value: 5.4672, unit: angstrom, source: s}
            lattice_expansion_A_per_K: {value: 2.92e-5, unit: angstrom/K, source: s}
            band_gap_gamma: {model: varshni, Eg0: 3.63 eV, alpha: 0.5771 meV/K, beta: 372 K, source: s}
            band_gap_X: {model: varshni, Eg0: 2.52 eV, alpha: 0.318 meV/K, beta: 588 K, source: s}
            band_gap_L: {model: varshni, Eg0: 3.57 eV, alpha: 0.318 meV/K, beta: 588 K, source: s}
            valence_edge_eV: {value: -1.74, unit: eV, source: s}
            spin_orbit_eV: {value: 0.07, unit: eV, source: s}
            electron_mass: {value: 0.22, unit: m0, source: s}
            gamma1: {value: 3.35, unit: 1, source: s}
            gamma2: {value: 0.71, unit: 1, source: s}
            gamma3: {value: 1.23, unit: 1, source: s}
            kane_energy_eV: {value: 17.7, unit: eV, source: s}
            kane_F: {value: -0.65, unit: 1, source: s}
            ac_eV: {value: -5.7, unit: eV, source: s}
            av_eV: {value: 3.0, unit: eV, source: s}
            b_eV: {value: -1.5, unit: eV, source: s}
            c11_GPa: {value: 1330, unit: kbar, source: s}
            c12_GPa: {value: 630, unit: kbar, source: s}
            dielectric_constant: {value: 9.8, unit: 1, source: s}
            lo_phonon_energy_eV: {value: 0.0620, unit: eV, source: s}
            high_frequency_dielectric_constant: {value: 7.5, unit: 1, source: s}
        ternaries:
          AlInP:
            pattern: "Al(x)In(1-x)P"
            sublattice: III
            elements: [Al, In]
            common: P
            end_x1: AlP
            end_x0: InP
            bowing_variable: Al
            bowing:
              band_gap_eV: {c0: -0.48, unit: eV, source: s}
        """)
    r = check_library(lib)
    assert r.ok, [str(i) for i in r.errors]
    mset = material_set([lib])
    with pytest.warns(ValidityWarning, match="AlP: indirect gap"):  # X below Gamma
        alp = mset.get_material("AlP", 300.0)
    assert alp.c11_GPa == pytest.approx(133.0) and alp.lattice_constant_nm == pytest.approx(0.54672)
    x = 0.2
    m = mset.get_material("Al0.2In0.8P", 300.0)
    inp = get_material("InP", 300.0)
    assert m.band_gap_eV == pytest.approx(x * alp.band_gap_eV + (1 - x) * inp.band_gap_eV
                                          + x * (1 - x) * 0.48, abs=1e-12)
    with pytest.raises(QwellError, match="not in the database"):
        get_material("Al0.2In0.8P")


# --------------------------------------------------------------------------- checks
def test_impossible_values_are_errors_with_lines(tmp_path):
    lib = write(tmp_path, "bad.yaml", """\
        binaries:
          GaAs:
            gamma2: {value: -2.06, unit: 1, source: s}
          InAs:
            electron_mass: {value: -0.026, unit: m0, source: s}
        ternaries:
          InAsSb:
            bowing:
              band_gap_eV: {c0: 2.0, unit: eV, source: s}
        materials:
          wall:
            heavy_hole_mass: {value: 0.1, unit: m0, source: s}
            light_hole_mass: {value: 0.5, unit: m0, source: s}
        """)
    r = check_library(lib)
    got = {(i.line, i.key) for i in r.errors}
    assert (3, "binaries.GaAs.gamma2") in got
    assert (5, "binaries.InAs.electron_mass") in got
    assert (9, "ternaries.InAsSb.bowing.band_gap_eV") in got
    assert (11, "materials.wall") in got
    text = "\n".join(map(str, r.errors))
    assert "light-hole mass" in text and "above the heavy-hole mass" in text
    assert "makes the gap" in text and "0 <= x <= 1" in text
    with pytest.raises(LibraryError, match=r"bad\.yaml:3: binaries\.GaAs\.gamma2: .*3 more"):
        load_library(lib)


@pytest.mark.parametrize("body, line, key, words", [
    ("binaries:\n  GaAs:\n    electron_mass: {value: 0.067, source: s}\n", 3,
     "binaries.GaAs.electron_mass.value", "has no unit"),
    ("binaries:\n  GaAs:\n    electron_mass: {value: 0.067, unit: m0}\n", 3,
     "binaries.GaAs.electron_mass", "missing 'source'"),
    ("binaries:\n  GaAs:\n    valence_edge_eV: {value: -0.8, unit: nm, source: s}\n", 3,
     "binaries.GaAs.valence_edge_eV.value", "does not fit"),
    ("binaries:\n  GaAs:\n    spin_orbt_eV: {value: 0.3, unit: eV, source: s}\n", 3,
     "binaries.GaAs.spin_orbt_eV", "did you mean 'spin_orbit_eV'"),
    ("binaries:\n  GaAs:\n    gamma1: {value: true, unit: 1, source: s}\n", 3,
     "binaries.GaAs.gamma1.value", "a boolean"),
    ("ternaries:\n  InGaAs:\n    bowing:\n      valence_edge: {c0: 0.1, unit: eV, source: s}\n", 4,
     "ternaries.InGaAs.bowing.valence_edge", "did you mean 'valence_edge_eV'"),
    ("name: x\nbinares: {}\n", 2, "binares", "did you mean 'binaries'"),
    ("binaries:\n  GaAs:\n    gamma1: {value: 7, unit: 1, source: a}\n    gamma1: {value: 8, unit: 1, "
     "source: b}\n", 4, None, "duplicate key 'gamma1'"),
    ("binaries: [oops\n", 2, None, "not valid YAML"),
])
def test_bad_values_name_file_line_key(tmp_path, body, line, key, words):
    lib = tmp_path / "lab.yaml"
    lib.write_text(body, encoding="utf-8")
    r = check_library(lib)
    assert not r.ok
    first = r.errors[0]
    assert (first.line, first.key) == (line, key) and words in first.message
    with pytest.raises(LibraryError) as exc:
        load_library(lib)
    prefix = f"{lib}:{line}: " + (f"{key}: " if key else "")
    assert str(exc.value).startswith(prefix)


def test_unreadable_paths_are_refused_before_opening(tmp_path):
    with pytest.raises(LibraryError, match="file does not exist"):
        check_library(tmp_path / "none.yaml")
    with pytest.raises(LibraryError, match="is a directory"):
        load_library(tmp_path)
    fifo = tmp_path / "pipe.yaml"
    os.mkfifo(fifo)
    with pytest.raises(LibraryError, match="is a FIFO"):  # would block if opened
        load_library(fifo)
    with pytest.raises(LibraryError, match="is a device"):
        load_library("/dev/zero")
    big = tmp_path / "big.yaml"
    big.write_bytes(b"#" * (1024 * 1024 + 1))
    with pytest.raises(LibraryError, match="over the"):
        load_library(big)


# --------------------------------------------------------------------------- stacks
_STACK = """\
temperature: 300 K
substrate: GaAs
{library}
layers:
  - {{material: GaAs, thickness: 20 nm}}
  - {{material: In0.2Ga0.8As, thickness: 7 nm, name: well}}
  - {{material: GaAs, thickness: 20 nm}}
"""


def test_stack_library_is_relative_to_the_stack_file(tmp_path):
    (tmp_path / "params").mkdir()
    (tmp_path / "stacks").mkdir()
    (tmp_path / "params" / "lab.yaml").write_text(DEMO.read_text(encoding="utf-8"),
                                                  encoding="utf-8")
    st_path = tmp_path / "stacks" / "w.yaml"
    st_path.write_text(_STACK.format(library="library: ../params/lab.yaml"), encoding="utf-8")
    st = load_stack(st_path)
    assert [lib.path for lib in st.libraries] == [str(tmp_path / "stacks" / "../params/lab.yaml")]
    assert st.raw["library"] == [str(tmp_path / "params" / "lab.yaml")]
    ev = st.material_of("well").valence_edge_eV
    assert ev != get_material("In0.2Ga0.8As").valence_edge_eV
    # design workflows rebuild stacks from raw: the library stays in force
    again = stack_from_mapping(st.raw, file=st.path)
    assert again.material_of("well").valence_edge_eV == ev


def test_call_libraries_apply_after_the_stacks_and_survive_a_rebuild(tmp_path):
    st_path = write(tmp_path, "w.yaml", _STACK.format(library=""))
    lib = write(tmp_path, "m.yaml", """\
        binaries:
          GaAs: {electron_mass: {value: 0.0665, unit: m0, source: "group fit"}}
        """)
    st = load_stack(st_path, libraries=[lib])
    assert st.material_of(0).electron_mass == 0.0665
    assert st.raw["library"] == [str(lib.resolve())]
    assert stack_from_mapping(st.raw, file=None).material_of(0).electron_mass == 0.0665
    assert load_stack(st_path).material_of(0).electron_mass == 0.067


def test_missing_library_names_the_stack_line(tmp_path):
    st_path = write(tmp_path, "w.yaml", _STACK.format(library="library: [../nope.yaml]"))
    with pytest.raises(StackError) as exc:
        load_stack(st_path)
    msg = str(exc.value)
    assert msg.startswith(f"{st_path}:3: library[0]: material library ")
    assert "nope.yaml: file does not exist" in msg
    st_path.write_text(_STACK.format(library=f"library: {tmp_path}"), encoding="utf-8")
    with pytest.raises(StackError, match=r"w\.yaml:3: library: material library .*is a directory"):
        load_stack(st_path)


def test_bad_library_content_names_both_files(tmp_path):
    write(tmp_path, "lab.yaml", "binaries:\n  GaAs:\n    electron_mass: {value: 0.067, source: s}\n")
    st_path = write(tmp_path, "w.yaml", _STACK.format(library="library: lab.yaml"))
    with pytest.raises(LibraryError) as exc:
        load_stack(st_path)
    msg = str(exc.value)
    assert msg.startswith(f"{tmp_path / 'lab.yaml'}:3: binaries.GaAs.electron_mass.value: ")
    assert msg.endswith(f"(library named in {st_path}:3)")
    write(tmp_path, "lab.yaml", "binaries: [oops\n")
    with pytest.raises(LibraryError, match=r"lab\.yaml:2: not valid YAML.*named in .*w\.yaml:3"):
        load_stack(st_path)
    with pytest.raises(StackError, match=r"line 1: library: got 5; expected the path"):
        stack_from_text(_STACK.format(library="").replace("temperature:", "library: 5\ntemperature:"))


def test_demo_library_moves_the_pump_well_offset_split():
    # The demo library (invented values) says it moves the strained
    # In0.2Ga0.8As/GaAs conduction share from ~37 % to ~65 %; check it does.
    r = check_library(DEMO)
    assert r.ok and not r.warnings
    share = {}
    for libs in ((), (DEMO,)):
        prof = band_profile(load_stack(PUMP, libraries=libs))
        share[libs] = prof.band_offsets()[0]["conduction_share"]
    assert share[()] == pytest.approx(0.37, abs=0.01)
    assert share[(DEMO,)] == pytest.approx(0.65, abs=0.01)
    assert math.isfinite(share[(DEMO,)])


def test_library_user_material_in_a_stack(tmp_path):
    lib = write(tmp_path, "m.yaml", """\
        materials:
          wall:
            conduction_edge: {value: "0.30 eV", source: "our barrier fit"}
            band_gap: {value: 1.9, unit: eV, source: "our barrier fit"}
            electron_mass: {value: 0.09, unit: m0, source: "our cyclotron data"}
        """)
    text = _STACK.format(library=f"library: {lib}").replace("In0.2Ga0.8As", "wall")
    st = stack_from_text(text)
    m = st.material_of("well")
    assert (m.conduction_edge_eV, m.band_gap_eV) == (0.30, 1.9)
    assert m.valence_edge_eV == pytest.approx(0.30 - 1.9)
    prov = material_provenance(m, st.material_set)
    assert prov["electron_mass"].origins[0].source_text == "our cyclotron data"
    assert prov["electron_mass"].origins[0].line == 5
    # the derived valence edge rests on the two values it comes from
    assert {o.line for o in prov["valence_edge_eV"].origins} == {3, 4}
    # a stack user material of the same name is refused like a built-in name
    clash = text.replace("layers:", "materials:\n  wall: {conduction_edge: 0.3 eV}\nlayers:")
    with pytest.raises(StackError, match="wall.*built-in material"):
        stack_from_text(clash)


def test_alloy_kane_disagreement_is_a_warning(tmp_path):
    # Kane relation as above (Kane 1957; Vurgaftman et al. 2001): an InGaAs
    # mass bowing of 0.03 m0 instead of 0.0091 m0 leaves In0.5Ga0.5As at
    # 0.039 m0 against 0.044 m0 from its gap, Delta, Ep and F.
    lib = write(tmp_path, "k.yaml", """\
        ternaries:
          InGaAs:
            bowing:
              electron_mass: {c0: 0.03, unit: m0, source: "too large on purpose"}
        """)
    r = check_library(lib)
    assert r.ok and len(r.warnings) == 1
    w = r.warnings[0]
    assert (w.line, w.key) == (4, "ternaries.InGaAs.bowing.electron_mass")
    assert "InGaAs: at x = 0.5" in w.message and "disagrees by 12 %" in w.message


def test_material_set_pickles_by_rereading_its_files(tmp_path):
    import pickle

    lib = write(tmp_path, "m.yaml", """\
        binaries:
          GaAs: {electron_mass: {value: 0.0665, unit: m0, source: "group fit"}}
        """)
    mset = material_set([lib])
    again = pickle.loads(pickle.dumps(mset))
    assert again.get_material("GaAs").electron_mass == 0.0665
    data = pickle.dumps(mset)
    lib.write_text(lib.read_text().replace("0.0665", "0.066"))  # new size: a new file identity
    with pytest.raises(LibraryError, match="changed since it was read"):
        pickle.loads(data)


def test_design_edits_keep_the_library(tmp_path):
    # A changed layer is rebuilt by the loader's per-layer code (stack_edit);
    # it must use the stack's library, not the built-in tables: here a
    # thickness in monolayers depends on a lattice constant the library sets
    # (deliberately far from the table value).  The comparison is with the
    # stack loaded whole with the same values.
    from qwell.stack_edit import apply_parameters

    lib = write(tmp_path, "a.yaml", """\
        binaries:
          InAs: {lattice_constant_A_300K: {value: 6.3, unit: angstrom, source: "test value"}}
        """)
    text = _STACK.format(library=f"library: {lib}").replace("7 nm", "24 ML")
    st = stack_from_text(text)
    for fast in (True, False):
        edited = apply_parameters(st, {"well.x": 0.25}, fast=fast)
        whole = stack_from_text(text.replace("In0.2Ga0.8As", "In0.25Ga0.75As"))
        assert edited.layer("well")[0].thickness_nm == whole.layer("well")[0].thickness_nm
        assert edited.material_of("well") == whole.material_of("well")


# --------------------------------------------------------------------------- command line
def _cli(capsys, *argv):
    import json as _json

    from qwell.cli import main

    rc = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    try:
        js = _json.loads(out)
    except ValueError:
        js = None
    return rc, out, err, js


def test_cli_materials_provenance_json(capsys, tmp_path):
    a = write(tmp_path, "a.yaml", """\
        binaries:
          GaAs: {electron_mass: {value: 0.0665, unit: m0, source: "group A"}}
        """)
    b = write(tmp_path, "b.yaml", """\
        binaries:
          GaAs: {electron_mass: {value: 0.0660, unit: m0, source: "group B"}}
        """)
    rc, out, err, js = _cli(capsys, "materials", "GaAs", "--library", a, "--library", b, "--json")
    assert rc == 0, err
    assert js["parameters"]["electron_mass"] == 0.0660
    (o,) = js["provenance"]["electron_mass"]["origins"]
    assert (o["kind"], o["file"], o["line"], o["source"]) == ("library", str(b), 2, "group B")
    assert [r["kind"] for r in o["replaces"]] == ["built-in", "library"]
    assert o["replaces"][1]["file"] == str(a)
    assert [lib["path"] for lib in js["libraries"]] == [str(a), str(b)]
    gap = js["provenance"]["band_gap_eV"]
    assert gap["from_memory"] and gap["origins"][0]["key"] == "vurgaftman2001"
    # the table says so too: the later library, and what it overrides
    rc, out, err, _ = _cli(capsys, "materials", "GaAs", "--library", a, "--library", b)
    assert rc == 0 and f"{b}:2" in out and f"overrides {a}:2" in out


def test_cli_check(capsys, tmp_path):
    rc, out, err, _ = _cli(capsys, "materials", "--check", DEMO)
    assert rc == 0 and "usable: 0 error(s), 0 warning(s), 1 value(s)" in out
    bad = write(tmp_path, "bad.yaml", """\
        binaries:
          GaAs:
            electron_mass: {value: 0.067, source: s}
            gamma2: {value: -2.06, unit: 1, source: s}
        """)
    rc, out, err, _ = _cli(capsys, "materials", "--check", bad)
    assert rc == 2
    lines = out.splitlines()
    assert lines[0].startswith(f"error: {bad}:3: binaries.GaAs.electron_mass.value: value 0.067 "
                               "has no unit")
    assert lines[1].startswith(f"error: {bad}:4: binaries.GaAs.gamma2: GaAs: gamma2 = -2.06 < 0")
    assert "refused: 2 error(s)" in lines[-1]
    rc, out, err, js = _cli(capsys, "materials", "--check", bad, "--json")
    assert rc == 2 and not js["usable"] and [e["line"] for e in js["errors"]] == [3, 4]
    rc, out, err, _ = _cli(capsys, "materials", "--check", tmp_path / "none.yaml")
    assert rc == 2 and err.startswith("qwell: error: ") and "file does not exist" in err
    # a stack command refuses the bad library with its file:line:key
    rc, out, err, _ = _cli(capsys, "profile", PUMP, "--library", bad)
    assert rc == 2 and err.startswith(f"qwell: error: {bad}:3: binaries.GaAs.electron_mass.value:")


def test_cli_levels_line_moves_with_the_demo_library(capsys):
    # The demo library (invented) moves the pump well's offset split from ~37 % to
    # ~65 % in the conduction band: e1 deepens, hh1 gets shallower, the e1-hh1 line
    # moves to shorter wavelength.  Values are what qwell computes (regression of the
    # README's example), the direction is the physics.
    rc, out, err, before = _cli(capsys, "levels", PUMP, "--json")
    rc2, out2, err2, after = _cli(capsys, "levels", PUMP, "--library", DEMO, "--json")
    assert rc == rc2 == 0, err + err2

    def line(js):
        return next(t for t in js["transitions"] if (t["from"], t["to"]) == ("e1", "hh1"))

    lam0, lam1 = line(before)["wavelength_um"], line(after)["wavelength_um"]
    assert lam1 < lam0 and 0.005 < lam0 - lam1 < 0.010


@pytest.mark.slow
def test_report_lists_libraries_provenance_and_from_memory_count(tmp_path):
    import hashlib

    pypdf = pytest.importorskip("pypdf")  # an independent PDF reader
    from qwell.report import build_report

    st = load_stack(PUMP, libraries=[DEMO])
    res = build_report(st, out_dir=tmp_path)
    pages = [" ".join((p.extract_text() or "").split())
             for p in pypdf.PdfReader(str(res.pdf_path)).pages]
    sha = hashlib.sha256(DEMO.read_bytes()).hexdigest()
    for page in pages:  # the reproducibility footer of every page
        assert f"demo-lab.yaml SHA-256 {sha}" in page
    text = " ".join(pages)
    # GaAs and In0.2Ga0.8As, 23 rows each (with the LO-phonon energy and eps_inf): every value
    # rests in part on a from-memory entry (the binaries are built-in) although the VBO
    # bowing is the library's
    assert "46 of the 46 values in these tables rest at least in part on entries marked " \
           "'from memory'" in text
    assert "demo-lab.yaml:19" in text and "overrides built-in vurgaftman2001" in text
    assert "demo group: PL fits of five invented" in text
