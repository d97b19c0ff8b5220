"""Material libraries: a group's own calibrated parameters, checked and traced.

A library is a YAML file with the structure of the built-in data
(``data/binaries.yaml``, ``data/alloys.yaml``) plus user materials, where
every value carries its unit and a ``source`` (the group's own words: which
fit, which run, which paper)::

    name: demo group calibration (invented values)
    sources:                                  # optional: short keys -> source text
      pl-fit: "PL fits of the demo growth runs (invented)"
    binaries:
      GaAs:                                   # override single parameters ...
        electron_mass: {value: 0.0665, unit: m0, source: pl-fit}
        band_gap_gamma: {model: varshni, Eg0: 1.519 eV, alpha: 0.5405 meV/K,
                         beta: 204 K, source: pl-fit}
      AlP: {...}                              # ... or add a binary (all keys)
    ternaries:
      InGaAs:
        bowing:                               # override one bowing of a family
          valence_edge_eV: {c0: 0.12, c1: 0, unit: eV, source: pl-fit}
      AlInP: {pattern: "Al(x)In(1-x)P", ...}  # or add a family (all keys)
    materials:                                # user materials, as in a stack
      wall: {conduction_edge: {value: 0.30, unit: eV, source: pl-fit}, ...}

Values are ``{value: <number>, unit: <unit>, source: ...}`` or
``{value: "<number> <unit>", source: ...}``; masses use the unit ``m0``,
dimensionless values ``unit: 1``.  Gap laws give each coefficient with its
unit (``Eg0: 1.519 eV, alpha: 0.5405 meV/K, beta: 204 K``).  ``av_eV`` is in
qwell's a_v > 0 convention (see :class:`qwell.materials.Material`).

Several libraries apply in order; a later one wins for a value both define,
and the provenance of that value names the one it replaced
(:func:`qwell.materials.provenance.material_provenance`).

:func:`check_library` checks a file before use: units and types, unknown
and duplicate keys, physically impossible values (negative masses or gaps, a
light-hole mass above the heavy-hole mass, unstable elastic constants),
alloy gaps that a bowing drives to zero or below within 0 <= x <= 1, and the
Kane two-band consistency of electron mass, gap, spin-orbit splitting and
E_P (a warning beyond 10 %) [1]_, [2]_.  Every message is ``FILE:LINE: KEY:
what is wrong; what is expected``.

References
----------
.. [1] E. O. Kane, "Band structure of indium antimonide", J. Phys. Chem.
   Solids 1, 249 (1957).
.. [2] I. Vurgaftman, J. R. Meyer and L. R. Ram-Mohan, "Band parameters for
   III-V compound semiconductors and their alloys", J. Appl. Phys. 89, 5815
   (2001), Sec. II (the form with the remote-band parameter F; from memory).
"""

from __future__ import annotations

import copy
import dataclasses
import difflib
import functools
import hashlib
import math
import os
import re
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import LibraryError, MaterialError, StackError, UnitError, ValidityWarning
from .. import units
from ..units import to_float
from ..yamlio import decode_text, one_line, parse_marked_yaml, read_regular_file
from ..yamlio import type_word as _type_word
from . import _database as db

__all__ = [
    "MAX_LIBRARY_BYTES",
    "KANE_TOLERANCE",
    "LibraryIssue",
    "LibraryCheck",
    "MaterialLibrary",
    "MaterialSet",
    "BUILTIN",
    "load_library",
    "check_library",
    "material_set",
    "kane_electron_mass",
    "format_check",
]

#: Largest library file accepted [bytes].
MAX_LIBRARY_BYTES = 1024 * 1024
#: Relative disagreement of the Kane electron mass beyond which a library is warned about.
KANE_TOLERANCE = 0.10

_TOP_KEYS = ("name", "sources", "binaries", "ternaries", "materials")
_VALUE_KEYS = ("value", "unit", "source", "note")
_BOWING_KEYS = ("c0", "c1", "unit", "source", "note")
_FAMILY_KEYS = ("pattern", "sublattice", "elements", "common", "end_x1", "end_x0",
                "bowing_variable", "bowing", "note")
_GAP_KEYS = ("band_gap_gamma", "band_gap_X", "band_gap_L")
#: Gap laws: model -> ((library key, stored key, unit), ...) (see data/binaries.yaml).
_GAP_MODELS = {
    "varshni": (("Eg0", "Eg0_eV", "eV"), ("alpha", "alpha_meV_per_K", "meV/K"),
                ("beta", "beta_K", "K")),
    "linear": (("Eg0", "Eg0_eV", "eV"), ("slope", "slope_meV_per_K", "meV/K")),
    "bose": (("Eg0", "Eg0_eV", "eV"), ("S", "S_eV", "eV"), ("theta", "theta_K", "K")),
}
_LATTICE_KEYS = {"lattice_constant_A_300K": "angstrom", "lattice_expansion_A_per_K": "angstrom/K"}
_MASS_FIELDS = ("electron_mass", "heavy_hole_mass", "light_hole_mass")
_KANE_FIELDS = ("electron_mass", "kane_energy_eV", "kane_F", "spin_orbit_eV", "band_gap_gamma")

_NAME_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_-]*$")
_NUMBER_M0 = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(m0|m_0)\s*$")


def _unit_of_field(name: str) -> str:
    """Unit of a table field from its name (``*_eV`` eV, ``*_GPa`` GPa, masses m0, else 1)."""
    if name in _LATTICE_KEYS:
        return _LATTICE_KEYS[name]
    if name in _MASS_FIELDS:
        return "m0"
    for suffix, unit in (("_meV", "meV"), ("_eV", "eV"), ("_GPa", "GPa"), ("_nm", "nm"),
                         ("_K", "K")):
        if name.endswith(suffix):
            return unit
    return "1"


def _simple_fields() -> tuple:
    """Per-binary single values (the built-in ``_SIMPLE`` list plus the lattice keys)."""
    return tuple(_LATTICE_KEYS) + tuple(db._SIMPLE)


def _binary_keys() -> tuple:
    return _simple_fields() + _GAP_KEYS


def _unit_words(unit: str) -> str:
    return {"m0": "a mass in m0 (e.g. {value: 0.067, unit: m0})",
            "1": "a dimensionless number (e.g. {value: 6.98, unit: 1})",
            "eV": "an energy (e.g. {value: -0.80, unit: eV} or '250 meV')",
            "angstrom": "a length (e.g. {value: 5.65325, unit: angstrom})",
            "angstrom/K": "a length per kelvin (e.g. {value: 3.88e-5, unit: angstrom/K})",
            "meV/K": "an energy per kelvin (e.g. '0.5405 meV/K')",
            "K": "a temperature (e.g. '204 K')",
            "GPa": "a pressure (e.g. {value: 122.1, unit: GPa} or '1221 kbar')",
            "nm": "a length (e.g. '0.565 nm')"}.get(unit, f"a quantity in {unit}")


# --------------------------------------------------------------------------- results
@dataclass(frozen=True)
class LibraryIssue:
    """One finding of :func:`check_library`.

    Attributes
    ----------
    file : str
        The library file.
    line : int or None
        1-based line of the key in the file.
    key : str or None
        Dotted key path, e.g. ``binaries.GaAs.electron_mass``.
    message : str
        What is wrong and what is expected.
    severity : {'error', 'warning'}
        An error refuses the library; a warning does not.
    """

    file: str
    line: int | None
    key: str | None
    message: str
    severity: str = "error"

    def __str__(self) -> str:
        return str(LibraryError(self.message, file=self.file, line=self.line, key=self.key))


@dataclass(frozen=True)
class LibraryCheck:
    """Outcome of :func:`check_library`.

    Attributes
    ----------
    path : str
        The file as named.
    sha256 : str or None
        Hex digest of the file bytes (None when it could not be read).
    errors, warnings : tuple of LibraryIssue
    defines : int
        Number of values the library defines (0 when it could not be read).
    """

    path: str
    sha256: str | None
    errors: tuple
    warnings: tuple
    defines: int = 0

    @property
    def ok(self) -> bool:
        """True when there are no errors (warnings allowed)."""
        return not self.errors


@dataclass(frozen=True)
class LibraryEntry:
    """One value a library defines (internal record, in the built-in data structure).

    Attributes
    ----------
    kind : {'binary', 'gap', 'bowing', 'family', 'material'}
    target : str
        Binary, family or user-material name.
    field : str or None
        Table key (``electron_mass``, ``band_gap_gamma``, a bowing's Material
        field); None for a whole new family.
    record : Mapping
        The stored record (``{'value': ..., 'source': key}`` and so on).
    line : int or None
    key_path : str
    source_key : str
        Key under which :func:`qwell.materials.citation` finds the source.
    source_text : str
        The source as the library wrote it (short keys expanded).
    """

    kind: str
    target: str
    field: str | None
    record: Mapping = field(repr=False)
    line: int | None
    key_path: str
    source_key: str
    source_text: str


@dataclass(frozen=True, eq=False)
class MaterialLibrary:
    """A parsed, checked library file.

    Attributes
    ----------
    path : str
        The path as given (for messages).
    resolved : str
        Absolute path.
    sha256 : str
        Hex digest of the file bytes.
    name : str
        The ``name`` key, or the file stem.
    entries : tuple of LibraryEntry
    warnings : tuple of LibraryIssue
        Findings that do not refuse the library (Kane-mass disagreement).
    """

    path: str
    resolved: str
    sha256: str
    name: str
    entries: tuple
    warnings: tuple = ()

    def __hash__(self):
        return hash((self.resolved, self.sha256))

    def __eq__(self, other):
        return (isinstance(other, MaterialLibrary) and self.resolved == other.resolved
                and self.sha256 == other.sha256)


# --------------------------------------------------------------------------- parsing
class _Parser:
    """Checks one parsed library document; collects every issue it finds."""

    def __init__(self, data, marks, file: str, sha: str):
        self.data = data
        self.marks = marks
        self.file = file
        self.sha = sha
        self.issues: list[LibraryIssue] = []
        self.entries: list[LibraryEntry] = []
        self.sources: dict = {}
        self.registry: dict = {}
        self.name: str | None = None

    # -- issues and lines
    def line(self, container, key=None):
        mark = self.marks.get(id(container))
        if mark is None:
            return None
        own, inner = mark
        if key is not None and isinstance(inner, dict) and key in inner:
            return inner[key]
        return own

    def error(self, msg, container, key, path, severity="error"):
        self.issues.append(LibraryIssue(self.file, self.line(container, key), path,
                                        one_line(msg), severity))

    def keys_ok(self, mapping, allowed, path, what, skip=()) -> bool:
        ok = True
        for k in mapping:
            if k in allowed or k in skip:
                continue
            close = difflib.get_close_matches(str(k), [str(a) for a in allowed], n=1, cutoff=0.6)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            self.error(f"unknown key {k!r}{hint}; expected a key of {what}: "
                       f"{', '.join(map(str, allowed))}", mapping, k, f"{path}.{k}" if path else str(k))
            ok = False
        return ok

    def mapping(self, parent, key, path, what) -> Mapping | None:
        v = parent[key]
        if not isinstance(v, Mapping):
            self.error(f"got {_type_word(v)}; expected {what}", parent, key, path)
            return None
        return v

    # -- sources
    def source(self, rec, path) -> tuple[str, str] | None:
        if "source" not in rec:
            self.error("missing 'source'; expected where the value comes from (a fit, a run, a "
                       "publication), e.g. source: \"PL fit of run 12\"", rec, None, path)
            return None
        s = rec["source"]
        if not isinstance(s, str) or not s.strip():
            self.error(f"source is {_type_word(s)}; expected a text saying where the value "
                       "comes from", rec, "source", f"{path}.source")
            return None
        text = self.sources.get(s.strip(), s.strip())
        line = self.line(rec, None)
        key = f"library:{self.sha[:16]}:{line}:{path}"
        if key not in self.registry:
            self.registry[key] = {
                "author": None, "title": text, "journal": None, "volume": None, "page": None,
                "year": None, "doi": None,
                "note": f"material library {self.file} (sha256 {self.sha}), line {line}",
                "library_file": self.file, "library_sha256": self.sha, "library_line": line,
                "library_key": path, "library_source": text,
            }
        return key, text

    # -- one number with its unit
    def number(self, rec, key, unit, path, *, unit_key=True):
        """Float in ``unit`` from rec[key]; ``unit_key`` allows a separate ``unit`` entry."""
        raw = rec[key]
        kpath = f"{path}.{key}"
        words = _unit_words(unit)
        if isinstance(raw, bool) or raw is None or isinstance(raw, (Mapping, list)):
            self.error(f"got {_type_word(raw)}; expected {words}", rec, key, kpath)
            return None
        given_unit = rec.get("unit") if unit_key else None
        if unit_key and "unit" in rec and isinstance(raw, str):
            self.error(f"{raw!r} has a unit in the text and a 'unit' entry; expected one of "
                       "them", rec, key, kpath)
            return None
        try:
            if isinstance(raw, (int, float)):
                if given_unit is None:
                    if not unit_key:
                        words = f"the number with its unit, e.g. '{key}: {raw} {unit}'"
                    self.error(f"value {raw!r} has no unit; expected {words}", rec, key, kpath)
                    return None
                out = _convert(float(raw), given_unit, unit)
            elif isinstance(raw, str):
                out = _convert_text(raw, unit)
            else:  # pragma: no cover - YAML gives no other scalar types here
                raise UnitError(f"got {_type_word(raw)}")
        except UnitError as exc:
            self.error(f"{exc}; expected {words}", rec, "unit" if "unit" in rec and
                       not isinstance(raw, str) else key, kpath)
            return None
        if not math.isfinite(out):
            self.error(f"{raw!r} is not finite; expected {words}", rec, key, kpath)
            return None
        return out

    def value_record(self, parent, key, unit, path):
        """{'value': float, 'source': key} from a {value, unit, source} record, or None."""
        rec = parent[key]
        if not isinstance(rec, Mapping):
            self.error(f"got {_type_word(rec)}; expected {{value: ..., unit: ..., source: ...}}",
                       parent, key, path)
            return None
        if not self.keys_ok(rec, _VALUE_KEYS, path, "a value record"):
            return None
        if "value" not in rec:
            self.error("missing 'value'; expected {value: ..., unit: ..., source: ...}", rec,
                       None, path)
            return None
        v = self.number(rec, "value", unit, path)
        src = self.source(rec, path)
        if v is None or src is None:
            return None
        return {"value": v, "source": src[0]}, src

    def gap_record(self, parent, key, path):
        rec = parent[key]
        if not isinstance(rec, Mapping):
            self.error(f"got {_type_word(rec)}; expected a gap law like {{model: varshni, Eg0: "
                       "1.519 eV, alpha: 0.5405 meV/K, beta: 204 K, source: ...}", parent, key,
                       path)
            return None
        model = rec.get("model")
        if model not in _GAP_MODELS:
            self.error(f"gap model {_type_word(model)} unknown; expected model: "
                       f"{', '.join(_GAP_MODELS)}", rec, "model" if "model" in rec else None,
                       f"{path}.model")
            return None
        coeffs = _GAP_MODELS[model]
        allowed = ("model",) + tuple(c[0] for c in coeffs) + ("source", "note")
        if not self.keys_ok(rec, allowed, path, f"a {model} gap law"):
            return None
        out = {"model": model}
        ok = True
        for lib_key, stored, unit in coeffs:
            if lib_key not in rec:
                self.error(f"missing {lib_key!r}; expected every coefficient of the {model} law "
                           f"({', '.join(c[0] for c in coeffs)}) with its unit", rec, None, path)
                ok = False
                continue
            v = self.number(rec, lib_key, unit, path, unit_key=False)
            if v is None:
                ok = False
            out[stored] = v
        src = self.source(rec, path)
        if not ok or src is None:
            return None
        out["source"] = src[0]
        return out, src

    # -- document parts
    def parse(self):
        top = self.data
        if top is None:
            self.error("empty library file; expected a mapping with binaries, ternaries or "
                       "materials", {}, None, None)
            return
        if not isinstance(top, Mapping):
            self.issues.append(LibraryIssue(self.file, self.marks.get("root"), None,
                                            f"the top level is {_type_word(top)}; expected a "
                                            "mapping of library keys (" + ", ".join(_TOP_KEYS)
                                            + ")"))
            return
        if "quaternaries" in top:
            self.error("libraries cannot define quaternaries (they follow from the binaries and "
                       "ternary bowings); expected binaries, ternaries or materials", top,
                       "quaternaries", "quaternaries")
        self.keys_ok(top, _TOP_KEYS, "", "a library", skip=("quaternaries",))
        if "name" in top:
            if not isinstance(top["name"], str) or not top["name"].strip():
                self.error(f"got {_type_word(top['name'])}; expected a free-text library name",
                           top, "name", "name")
            else:
                self.name = one_line(top["name"])
        if "sources" in top:
            spec = self.mapping(top, "sources", "sources", "a mapping of short key -> source text")
            for k, v in (spec or {}).items():
                if not isinstance(v, str) or not v.strip():
                    self.error(f"got {_type_word(v)}; expected the source text", spec, k,
                               f"sources.{k}")
                else:
                    self.sources[str(k)] = one_line(v)
        if not any(k in top for k in ("binaries", "ternaries", "materials")) and not self.issues:
            self.error("the library defines nothing; expected binaries, ternaries or materials",
                       top, None, None)
        if "binaries" in top:
            self.binaries(top)
        if "ternaries" in top:
            self.ternaries(top)
        if "materials" in top:
            self.materials(top)

    def binaries(self, top):
        spec = self.mapping(top, "binaries", "binaries", "a mapping of binary name -> parameters")
        if spec is None:
            return
        for name, params in spec.items():
            path = f"binaries.{name}"
            m = re.fullmatch(r"(Al|Ga|In)(P|As|Sb)", str(name))
            if m is None:
                self.error(f"{name!r} is not a III-V binary of qwell's elements; expected a name "
                           "like GaAs, AlP (group III: Al, Ga, In; group V: P, As, Sb)", spec,
                           name, path)
                continue
            if not isinstance(params, Mapping) or not params:
                self.error(f"got {_type_word(params)}; expected a mapping of parameters", spec,
                           name, path)
                continue
            self.keys_ok(params, _binary_keys(), path, "a binary")
            new = name not in db._BINARIES
            if new:
                missing = [k for k in _binary_keys() if k not in params]
                if missing:
                    self.error(f"new binary {name} lacks {', '.join(missing)}; expected every "
                               "parameter of a built-in binary (see qwell/materials/data/"
                               "binaries.yaml)", spec, name, path)
            for key in params:
                if key not in _binary_keys():
                    continue
                kpath = f"{path}.{key}"
                if key in _GAP_KEYS:
                    got = self.gap_record(params, key, kpath)
                    kind = "gap"
                else:
                    got = self.value_record(params, key, _unit_of_field(key), kpath)
                    kind = "binary"
                if got is None:
                    continue
                rec, (skey, stext) = got
                self.entries.append(LibraryEntry(kind, name, key, rec, self.line(params, key),
                                                 kpath, skey, stext))

    def bowing(self, fam, bow, path):
        for fld in bow:
            fpath = f"{path}.{fld}"
            if fld not in db._INTERP:
                close = difflib.get_close_matches(str(fld), db._INTERP, n=1, cutoff=0.6)
                hint = f" (did you mean {close[0]!r}?)" if close else ""
                self.error(f"no bowing for {fld!r}{hint}; expected a parameter that alloys "
                           f"interpolate: {', '.join(db._INTERP)}", bow, fld, fpath)
                continue
            rec = bow[fld]
            if not isinstance(rec, Mapping):
                self.error(f"got {_type_word(rec)}; expected {{c0: ..., c1: ..., unit: ..., "
                           "source: ...}", bow, fld, fpath)
                continue
            if not self.keys_ok(rec, _BOWING_KEYS, fpath, "a bowing"):
                continue
            if "c0" not in rec:
                self.error("missing 'c0'; expected the bowing C = c0 + c1 x_s with its unit",
                           rec, None, fpath)
                continue
            unit = _unit_of_field(fld)
            c0 = self.number(rec, "c0", unit, fpath)
            c1 = self.number(rec, "c1", unit, fpath) if "c1" in rec else 0.0
            src = self.source(rec, fpath)
            if c0 is None or c1 is None or src is None:
                continue
            self.entries.append(LibraryEntry("bowing", fam, fld,
                                             {"c0": c0, "c1": c1, "source": src[0]},
                                             self.line(bow, fld), fpath, src[0], src[1]))

    def ternaries(self, top):
        spec = self.mapping(top, "ternaries", "ternaries", "a mapping of family name -> family")
        if spec is None:
            return
        for fam, d in spec.items():
            path = f"ternaries.{fam}"
            if not isinstance(fam, str) or not _NAME_RE.match(fam):
                self.error(f"bad family name {fam!r}; expected letters and digits like AlInP",
                           spec, fam, path)
                continue
            if not isinstance(d, Mapping) or not d:
                self.error(f"got {_type_word(d)}; expected a family mapping (bowing: ...)",
                           spec, fam, path)
                continue
            if not self.keys_ok(d, _FAMILY_KEYS, path, "an alloy family"):
                continue
            if fam in db._TERNARIES:
                extra = [k for k in d if k not in ("bowing", "note")]
                if extra:
                    self.error(f"{fam} is a built-in family; its structure ({', '.join(extra)}) "
                               "cannot change; expected only 'bowing'", d, extra[0],
                               f"{path}.{extra[0]}")
                    continue
            else:
                if not self.new_family(fam, d, spec, path):
                    continue
            if "bowing" in d:
                bow = self.mapping(d, "bowing", f"{path}.bowing", "a mapping of parameter -> "
                                   "bowing")
                if bow is not None:
                    self.bowing(fam, bow, f"{path}.bowing")

    def new_family(self, fam, d, spec, path) -> bool:
        missing = [k for k in _FAMILY_KEYS if k not in d and k not in ("bowing", "note")]
        if missing:
            self.error(f"new family {fam} lacks {', '.join(missing)}; expected pattern, "
                       "sublattice, elements, common, end_x1, end_x0, bowing_variable (see "
                       "qwell/materials/data/alloys.yaml)", spec, fam, path)
            return False
        sub = d["sublattice"]
        group = {"III": db.GROUP_III, "V": db.GROUP_V}.get(sub)
        other = {"III": db.GROUP_V, "V": db.GROUP_III}.get(sub)
        if group is None:
            self.error(f"sublattice {_type_word(sub)}; expected III or V", d, "sublattice",
                       f"{path}.sublattice")
            return False
        els = d["elements"]
        if (not isinstance(els, list) or len(els) != 2 or len(set(map(str, els))) != 2
                or any(e not in group for e in els)):
            self.error(f"elements {_type_word(els)}; expected two different group-{sub} "
                       f"elements of {', '.join(group)}", d, "elements", f"{path}.elements")
            return False
        if d["common"] not in other:
            self.error(f"common element {_type_word(d['common'])}; expected one of "
                       f"{', '.join(other)}", d, "common", f"{path}.common")
            return False
        if d["bowing_variable"] not in els:
            self.error(f"bowing_variable {_type_word(d['bowing_variable'])}; expected one of the "
                       f"elements {els[0]}, {els[1]}", d, "bowing_variable",
                       f"{path}.bowing_variable")
            return False
        for pos, key in ((0, "end_x1"), (1, "end_x0")):
            el = els[pos]
            want = el + d["common"] if sub == "III" else d["common"] + el
            if d[key] != want:
                self.error(f"{key} {_type_word(d[key])}; expected {want} (the binary of "
                           f"{el} and {d['common']})", d, key, f"{path}.{key}")
                return False
        if not isinstance(d["pattern"], str) or not d["pattern"].strip():
            self.error(f"pattern {_type_word(d['pattern'])}; expected a formula pattern like "
                       "Al(x)In(1-x)P", d, "pattern", f"{path}.pattern")
            return False
        key = ((frozenset(els), frozenset([d["common"]])) if sub == "III"
               else (frozenset([d["common"]]), frozenset(els)))
        if key in db._BUILTIN.family_by_elements:
            self.error(f"the elements of {fam} already form the built-in family "
                       f"{db._BUILTIN.family_by_elements[key]}; expected that name, with only "
                       "'bowing'", spec, fam, path)
            return False
        structure = {k: (list(map(str, v)) if isinstance(v, list) else v)
                     for k, v in d.items() if k not in ("bowing", "note")}
        structure["bowing"] = {}
        self.entries.append(LibraryEntry("family", fam, None, structure, self.line(spec, fam),
                                         path, "", ""))
        return True

    def materials(self, top):
        spec = self.mapping(top, "materials", "materials", "a mapping of material name -> "
                            "parameters")
        if spec is None:
            return
        for name, params in spec.items():
            path = f"materials.{name}"
            if not isinstance(name, str) or not _NAME_RE.match(name):
                self.error(f"bad material name {name!r}; expected letters, digits, _ or - "
                           "starting with a letter", spec, name, path)
                continue
            if db.is_known_material(name):
                self.error(f"{name!r} is a built-in material name; expected a new name (override "
                           "a built-in binary under 'binaries')", spec, name, path)
                continue
            if not isinstance(params, Mapping) or not params:
                self.error(f"got {_type_word(params)}; expected a mapping of parameters", spec,
                           name, path)
                continue
            if not self.keys_ok(params, tuple(db.USER_KEYS), path, "a user material"):
                continue
            values, keys = {}, {}
            for key in params:
                fld, unit = db.USER_KEYS[key]
                unit = unit or ("m0" if fld in _MASS_FIELDS else "1")
                got = self.value_record(params, key, unit, f"{path}.{key}")
                if got is None:
                    continue
                values[fld] = got[0]["value"]
                keys[fld] = got[1][0]
            if len(values) != len(params):
                continue
            try:
                mat = db.user_material(name, values)
            except MaterialError as exc:
                self.error(f"{_strip_who(exc, name)}; expected consistent material parameters",
                           spec, name, path)
                continue
            mhh, mlh = mat.heavy_hole_mass, mat.light_hole_mass
            if mhh is not None and mlh is not None and mlh > mhh:
                self.error(f"light-hole mass {mlh:.4g} m0 above the heavy-hole mass {mhh:.4g} m0; "
                           "expected m_lh < m_hh", spec, name, path)
                continue
            need = (mat.electron_mass, mat.band_gap_eV, mat.spin_orbit_eV, mat.kane_energy_eV)
            if all(v is not None for v in need):
                F = mat.kane_F if mat.kane_F is not None else 0.0
                me_k = kane_electron_mass(mat.band_gap_eV, mat.spin_orbit_eV,
                                          mat.kane_energy_eV, F)
                dev = abs(mat.electron_mass - me_k) / me_k if math.isfinite(me_k) else math.inf
                if dev > KANE_TOLERANCE:
                    self.error(f"electron mass {mat.electron_mass:.4g} m0 disagrees by "
                               f"{dev * 100:.0f} % with the Kane relation (F = {F:g}"
                               f"{'' if mat.kane_F is not None else ', not given'}): "
                               f"{me_k:.4g} m0; expected agreement within "
                               f"{KANE_TOLERANCE * 100:.0f} % (Kane 1957; Vurgaftman et al. 2001)",
                               spec, name, path, severity="warning")
            self.entries.append(LibraryEntry("material", name, None,
                                             {"values": values, "sources": keys},
                                             self.line(spec, name), path, "", ""))


def _strip_who(exc, who) -> str:
    text = one_line(exc)
    return text[len(who) + 2:] if text.startswith(f"{who}: ") else text


def _convert(number: float, unit, target: str) -> float:
    """``number`` given in ``unit`` -> float in ``target`` (m0 and 1 handled here)."""
    if target == "m0":
        if unit in ("m0", "m_0"):
            return number
        raise UnitError(f"unit {unit!r} is not a mass in m0 (write unit: m0)")
    if target == "1":
        if unit in (1, "1", "dimensionless"):
            return number
        raise UnitError(f"unit {unit!r} for a dimensionless value (write unit: 1)")
    if not isinstance(unit, str) or not unit.strip():
        raise UnitError(f"unit {_type_word(unit)} is not a unit")
    try:
        q = units.Q_(number, unit.strip().replace("Å", "angstrom").replace("µ", "u"))
    except Exception:  # pint raises several unrelated types
        raise UnitError(f"cannot read unit {unit!r}") from None
    try:
        return float(q.to(target).magnitude)
    except Exception:  # DimensionalityError, or an offset unit
        raise UnitError(f"unit {unit!r} does not fit this value") from None


def _convert_text(text: str, target: str) -> float:
    if target == "m0":
        m = _NUMBER_M0.match(text)
        if m is None:
            raise UnitError(f"cannot read {text!r} as a mass in m0")
        return float(m.group(1))
    if target == "1":
        raise UnitError(f"{text!r} as text; a dimensionless value is a number with unit: 1")
    return to_float(text, target)


# --------------------------------------------------------------------------- merging
class MaterialSet:
    """The built-in tables with libraries applied in order (later ones win).

    Use :func:`material_set` to get one (sets are cached, so repeated
    look-ups hit the material caches).  The look-up methods have the
    signatures of :func:`qwell.materials.get_material`,
    :func:`~qwell.materials.grade_function` and
    :func:`~qwell.materials.is_known_material`.

    Attributes
    ----------
    libraries : tuple of MaterialLibrary
    replaced : Mapping[str, tuple]
        Library source key -> what its value replaced, earliest first: a
        built-in source key, or an earlier library's source key.
    warnings : tuple of LibraryIssue
        Kane-mass and other non-refusing findings of the merged tables.
    """

    def __init__(self, libraries=()):
        self.libraries = tuple(libraries)
        binaries = copy.deepcopy(db._BINARIES)
        ternaries = copy.deepcopy(db._TERNARIES)
        replaced: dict[str, tuple] = {}
        users: dict[str, tuple] = {}
        self._user_sources: dict[str, tuple] = {}
        for lib in self.libraries:
            for e in lib.entries:
                if e.kind in ("binary", "gap"):
                    rec = binaries.setdefault(e.target, {})
                    old = rec.get(e.field)
                    if old is not None:
                        replaced[e.source_key] = (_replaced_of(old["source"], replaced)
                                                  + (old["source"],))
                    rec[e.field] = dict(e.record)
                elif e.kind == "family":
                    ternaries.setdefault(e.target, copy.deepcopy(dict(e.record)))
                elif e.kind == "bowing":
                    bow = ternaries[e.target].setdefault("bowing", {})
                    old = bow.get(e.field)
                    if old is not None:
                        replaced[e.source_key] = (_replaced_of(old["source"], replaced)
                                                  + (old["source"],))
                    bow[e.field] = dict(e.record)
                elif e.kind == "material":
                    users[e.target] = (e.record, lib)
        self.replaced = replaced
        self._users = users
        self.tables = (db._BUILTIN if not self.libraries
                       else db._Tables(binaries, ternaries, db._QUATERNARIES))
        self.warnings = tuple(w for lib in self.libraries for w in lib.warnings)

    def __repr__(self):
        return f"MaterialSet({[lib.path for lib in self.libraries]!r})"

    def __reduce__(self):
        # another process reads the files again (and refuses them if they changed)
        return (_restore_set, (tuple((lib.resolved, lib.sha256) for lib in self.libraries),))

    # -- look-ups
    def _merged_users(self, user_materials, temperature_K):
        if not self._users:
            return user_materials
        out = {name: _library_user_material(name, rec, float(temperature_K))
               for name, (rec, _) in self._users.items()}
        out.update(user_materials or {})
        return out

    def get_material(self, name, temperature_K=300.0, user_materials=None):
        """As :func:`qwell.materials.get_material`, on the merged tables."""
        users = self._merged_users(user_materials, _temperature(temperature_K))
        return db._get_material(name, temperature_K, users, self.tables)

    def grade_function(self, start, end, temperature_K=300.0, user_materials=None):
        """As :func:`qwell.materials.grade_function`, on the merged tables."""
        users = self._merged_users(user_materials, _temperature(temperature_K))
        return db._grade_function(start, end, temperature_K, users, self.tables)

    def is_known_material(self, name, user_materials=None) -> bool:
        """As :func:`qwell.materials.is_known_material`, on the merged tables."""
        if self._users and name in self._users:
            return True
        return db._is_known(name, user_materials, self.tables)

    def is_builtin_name(self, name) -> bool:
        """True for a database name of the merged tables (not a user material)."""
        return db._is_known(name, None, self.tables) or name in self._users

    def known_materials(self) -> list:
        """As :func:`qwell.materials.known_materials`, plus the libraries' user materials."""
        return db._known_materials(self.tables) + [f"{n} (library material)" for n in self._users]


def _temperature(T) -> float:
    try:
        return float(T)
    except (TypeError, ValueError):
        return 300.0  # get_material itself refuses the bad value with its message


def _replaced_of(key: str, replaced: Mapping) -> tuple:
    return tuple(replaced.get(key, ()))


@functools.lru_cache(maxsize=256)
def _library_user_material_cached(name, values, keys, T):
    mat = db.user_material(name, dict(values), T)
    given = dict(keys)
    groups = (("valence_edge_eV", "band_gap_eV", "conduction_edge_eV"),
              ("heavy_hole_mass", "light_hole_mass", "gamma1", "gamma2"))
    sources = {}
    for f, k in mat.sources.items():
        if f in given:
            sources[f] = given[f]
        else:  # derived from the given members of its group
            grp = next((g for g in groups if f in g), ())
            sources[f] = "+".join(sorted({given[g] for g in grp if g in given})) or k
    return dataclasses.replace(mat, sources=sources)


def _library_user_material(name, rec, T):
    return _library_user_material_cached(name, tuple(sorted(rec["values"].items())),
                                         tuple(sorted(rec["sources"].items())), T)


# --------------------------------------------------------------------------- physics checks
def kane_electron_mass(band_gap_eV: float, spin_orbit_eV: float, kane_energy_eV: float,
                       kane_F: float = 0.0) -> float:
    """Gamma-valley electron mass [m0] of the Kane relation with remote bands.

    ``m0/me = 1 + 2F + Ep (Eg + 2 Delta/3) / (Eg (Eg + Delta))``

    Parameters
    ----------
    band_gap_eV, spin_orbit_eV, kane_energy_eV : float
        Gap Eg, spin-orbit splitting Delta and Kane energy Ep [eV].
    kane_F : float
        Remote-band parameter F (dimensionless).

    Returns
    -------
    float
        The mass [m0]; ``inf`` when the right-hand side is not positive.

    References
    ----------
    .. [1] E. O. Kane, J. Phys. Chem. Solids 1, 249 (1957).
    .. [2] I. Vurgaftman, J. R. Meyer, L. R. Ram-Mohan, J. Appl. Phys. 89,
       5815 (2001), Sec. II (from memory).
    """
    eg, so = band_gap_eV, spin_orbit_eV
    inv = 1.0 + 2.0 * kane_F + kane_energy_eV * (eg + 2.0 * so / 3.0) / (eg * (eg + so))
    return 1.0 / inv if inv > 0 else math.inf


def _binary_checks(lib: MaterialLibrary, mset: MaterialSet) -> list:
    """Impossible values (errors) and Kane disagreement (warnings) of the touched binaries."""
    out = []
    touched: dict[str, dict] = {}
    for e in lib.entries:
        if e.kind in ("binary", "gap"):
            touched.setdefault(e.target, {})[e.field] = e
    for name, fields in touched.items():
        rec = mset.tables.binaries.get(name, {})
        if any(k not in rec for k in _binary_keys()):
            continue  # an incomplete new binary is already an error

        def where(*keys, _fields=fields):
            for k in keys:
                if k in _fields:
                    return _fields[k]
            return next(iter(_fields.values()))

        def add(msg, *keys, severity="error", _where=where):
            e = _where(*keys)
            out.append(LibraryIssue(lib.path, e.line, e.key_path, one_line(msg), severity))

        v = {k: rec[k]["value"] for k in _simple_fields()}
        for k in _GAP_KEYS:
            for T in (0.0, 300.0):
                g = db._gap(rec[k], T)
                if not g > 0:
                    add(f"{name}: the {k} law gives {g:.4g} eV at {T:g} K; expected a positive "
                        "gap", k)
                    break
        if not v["lattice_constant_A_300K"] > 0:
            add(f"{name}: lattice constant {v['lattice_constant_A_300K']:g} A; expected > 0",
                "lattice_constant_A_300K")
        if not v["electron_mass"] > 0:
            add(f"{name}: electron mass {v['electron_mass']:g} m0; expected a positive mass",
                "electron_mass")
        g1, g2, g3 = v["gamma1"], v["gamma2"], v["gamma3"]
        hole_keys = ("gamma2", "gamma1", "gamma3")
        if not (g1 - 2 * g2 > 0 and g1 + 2 * g2 > 0):
            add(f"{name}: gamma1 = {g1:g}, gamma2 = {g2:g} give no positive heavy- and light-hole "
                "masses 1/(g1 -/+ 2 g2); expected g1 > 2|g2|", *hole_keys)
        elif g2 < 0:
            add(f"{name}: gamma2 = {g2:g} < 0 puts the light-hole mass 1/(g1+2g2) = "
                f"{1 / (g1 + 2 * g2):.4g} m0 above the heavy-hole mass 1/(g1-2g2) = "
                f"{1 / (g1 - 2 * g2):.4g} m0; expected gamma2 > 0", "gamma2")
        if not g1 - 2 * g3 > 0:
            add(f"{name}: gamma1 - 2 gamma3 = {g1 - 2 * g3:.4g} gives no positive [111] "
                "heavy-hole mass; expected gamma1 > 2 gamma3", "gamma3", "gamma1")
        if v["spin_orbit_eV"] < 0:
            add(f"{name}: spin-orbit splitting {v['spin_orbit_eV']:g} eV; expected >= 0",
                "spin_orbit_eV")
        if v["kane_energy_eV"] < 0:
            add(f"{name}: Kane energy {v['kane_energy_eV']:g} eV; expected >= 0",
                "kane_energy_eV")
        c11, c12 = v["c11_GPa"], v["c12_GPa"]
        if not (c11 > abs(c12) and c11 + 2 * c12 > 0):
            add(f"{name}: C11 = {c11:g} GPa, C12 = {c12:g} GPa are not mechanically stable; "
                "expected C11 > |C12| and C11 + 2 C12 > 0", "c11_GPa", "c12_GPa")
        if not v["dielectric_constant"] >= 1:
            add(f"{name}: dielectric constant {v['dielectric_constant']:g}; expected >= 1",
                "dielectric_constant")
        if any(k in fields for k in _KANE_FIELDS) and not _has_error(out, name):
            eg0 = db._gap(rec["band_gap_gamma"], 0.0)
            me_k = kane_electron_mass(eg0, v["spin_orbit_eV"], v["kane_energy_eV"], v["kane_F"])
            me = v["electron_mass"]
            dev = abs(me - me_k) / me_k if math.isfinite(me_k) else math.inf
            if dev > KANE_TOLERANCE:
                add(f"{name}: electron mass {me:.4g} m0 disagrees by {dev * 100:.0f} % with the "
                    f"Kane relation m0/me = 1 + 2F + Ep (Eg + 2D/3)/(Eg (Eg + D)) = "
                    f"{me_k:.4g} m0 (Eg(0 K) = {eg0:.4g} eV, D = {v['spin_orbit_eV']:g} eV, "
                    f"Ep = {v['kane_energy_eV']:g} eV, F = {v['kane_F']:g}); expected agreement "
                    f"within {KANE_TOLERANCE * 100:.0f} % (Kane 1957; Vurgaftman et al. 2001)",
                    "electron_mass", "kane_energy_eV", "kane_F", "spin_orbit_eV",
                    "band_gap_gamma", severity="warning")
    return out


def _has_error(issues, name) -> bool:
    """True when an error about binary ``name`` is already listed."""
    return any(i.severity == "error" and i.message.startswith(f"{name}:") for i in issues)


def _family_checks(lib: MaterialLibrary, mset: MaterialSet) -> list:
    """Ternaries whose Gamma, X or L gap falls to zero or below for some 0 <= x <= 1."""
    out = []
    gap_of = {"band_gap_eV": "band_gap_gamma", "band_gap_X_eV": "band_gap_X",
              "band_gap_L_eV": "band_gap_L"}
    touched_bin = {e.target for e in lib.entries if e.kind == "gap"}
    entries: dict[str, list] = {}
    for e in lib.entries:
        if e.kind in ("bowing", "family"):
            entries.setdefault(e.target, []).append(e)
    for fam, d in mset.tables.ternaries.items():
        own = entries.get(fam, [])
        ends = (d["end_x1"], d["end_x0"])
        if not own and not touched_bin.intersection(ends):
            continue
        if any(b not in mset.tables.binaries for b in ends):
            e = own[0] if own else None
            missing = [b for b in ends if b not in mset.tables.binaries]
            out.append(LibraryIssue(lib.path, e.line if e else None, e.key_path if e else None,
                                    f"family {fam} needs the binary {', '.join(missing)}, which "
                                    "is neither built in nor in this library; expected it "
                                    "under 'binaries'"))
            continue
        for fld, gkey in gap_of.items():
            b = d.get("bowing", {}).get(fld)
            c0, c1 = (float(b["c0"]), float(b["c1"])) if b else (0.0, 0.0)
            for T in (0.0, 300.0):
                g1 = db._gap(mset.tables.binaries[ends[0]][gkey], T)
                g0 = db._gap(mset.tables.binaries[ends[1]][gkey], T)
                worst = None
                for i in range(201):
                    x = i / 200.0
                    xs = x if d["bowing_variable"] == d["elements"][0] else 1.0 - x
                    g = x * g1 + (1 - x) * g0 - x * (1 - x) * (c0 + c1 * xs)
                    if worst is None or g < worst[1]:
                        worst = (x, g)
                if worst[1] <= 0:
                    e = next((e for e in own if e.field == fld), own[0] if own else None)
                    msg = (f"{fam}: the {fld} bowing C = {c0:g} + {c1:g} x_s makes the gap "
                           f"{worst[1]:.4g} eV at x = {worst[0]:.3g} ({T:g} K); expected a "
                           "bowing that keeps the gap positive over 0 <= x <= 1")
                    out.append(LibraryIssue(lib.path, e.line if e else None,
                                            e.key_path if e else None, msg))
                    break
    return out


def _alloy_kane_checks(lib: MaterialLibrary, mset: MaterialSet) -> list:
    """Kane-mass disagreement of ternaries whose Kane bowings the library sets (warnings).

    Checked at x = 0.25, 0.5, 0.75 and 0 K for families where the library
    gives a bowing of the electron mass, gap, spin-orbit splitting, Ep or F
    (changed binaries are checked as binaries).  The message quotes the
    built-in tables' disagreement at the same point: some built-in families
    (GaAsSb, InAlAs, InAsSb, AlGaSb) disagree by 10-50 % by themselves.
    """
    out = []
    kane_bowings = ("electron_mass", "kane_energy_eV", "kane_F", "spin_orbit_eV", "band_gap_eV")
    for fam, d in mset.tables.ternaries.items():
        own = [e for e in lib.entries if e.target == fam and e.kind == "bowing"
               and e.field in kane_bowings]
        if not own:
            continue
        if any(b not in mset.tables.binaries for b in (d["end_x1"], d["end_x0"])):
            continue
        e0, e1 = d["elements"]
        worst = None
        for x in (0.25, 0.5, 0.75):
            name = (f"{e0}{x}{e1}{1 - x}{d['common']}" if d["sublattice"] == "III"
                    else f"{d['common']}{e0}{x}{e1}{1 - x}")
            devs = []
            for tables_set in (mset, BUILTIN if fam in db._TERNARIES else None):
                if tables_set is None:
                    devs.append(None)
                    continue
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", ValidityWarning)
                    try:
                        m = tables_set.get_material(name, 0.0)
                    except MaterialError:
                        devs.append(None)
                        continue
                if not (m.band_gap_eV and m.band_gap_eV > 0):
                    devs.append(None)
                    continue
                mk = kane_electron_mass(m.band_gap_eV, m.spin_orbit_eV, m.kane_energy_eV,
                                        m.kane_F)
                devs.append((abs(m.electron_mass - mk) / mk if math.isfinite(mk) else math.inf,
                             m.electron_mass, mk))
            if devs[0] is not None and (worst is None or devs[0][0] > worst[1][0]):
                worst = (x, devs[0], devs[1])
        if worst is None or worst[1][0] <= KANE_TOLERANCE:
            continue
        x, (dev, me, mk), before = worst
        ref = (f"; the built-in tables give {before[0] * 100:.0f} % there"
               if before is not None else "")
        e = own[0]
        out.append(LibraryIssue(lib.path, e.line, e.key_path, one_line(
            f"{fam}: at x = {x:g} (0 K) the electron mass {me:.4g} m0 disagrees by "
            f"{dev * 100:.0f} % with the Kane relation ({mk:.4g} m0){ref}; expected agreement "
            f"within {KANE_TOLERANCE * 100:.0f} % (Kane 1957; Vurgaftman et al. 2001)"),
            "warning"))
    return out


# --------------------------------------------------------------------------- loading
def _read(path, referenced_by):
    """(display path, resolved path, bytes); read errors name the referencing stack line."""
    file = os.fspath(path)
    try:
        data = read_regular_file(file, MAX_LIBRARY_BYTES, error=LibraryError,
                                 what="material library")
    except LibraryError as exc:
        if referenced_by is not None:
            sfile, sline, skey = referenced_by
            resolved = os.path.abspath(file)
            raise StackError(f"material library {file}: {exc.message}"
                             + (f" (looked for {resolved})" if resolved != file else ""),
                             file=sfile, line=sline, key=skey) from None
        raise
    return file, str(Path(file).resolve()), data


def _parse_bytes(file, data) -> _Parser:
    sha = hashlib.sha256(data).hexdigest()
    text = decode_text(data, file, MAX_LIBRARY_BYTES, error=LibraryError, what="material library")
    parsed, marks = parse_marked_yaml(text, file, error=LibraryError, what="material library",
                                      mapping_of="library keys (binaries, ternaries, materials)")
    p = _Parser(parsed, marks, file, sha)
    p.parse()
    return p


def _checked(file, resolved, data) -> tuple[MaterialLibrary | None, list, _Parser | None]:
    """Parse and check; (library or None, issues, parser)."""
    try:
        p = _parse_bytes(file, data)
    except LibraryError as exc:
        return None, [LibraryIssue(exc.file or file, exc.line, exc.key, exc.message)], None
    issues = list(p.issues)
    db._register_sources(p.registry)
    # the physics checks run on the entries that parsed, so one pass reports everything
    lib = MaterialLibrary(path=file, resolved=resolved, sha256=p.sha,
                          name=p.name or Path(file).stem, entries=tuple(p.entries))
    mset = MaterialSet((lib,))
    issues += _binary_checks(lib, mset) + _family_checks(lib, mset)
    if not any(i.severity == "error" for i in issues):
        issues += _alloy_kane_checks(lib, mset)
    issues.sort(key=lambda i: (i.line is None, i.line or 0))
    if any(i.severity == "error" for i in issues):
        return None, issues, p
    warn = tuple(i for i in issues if i.severity == "warning")
    return MaterialLibrary(path=file, resolved=resolved, sha256=p.sha, name=lib.name,
                           entries=lib.entries, warnings=warn), issues, p


_LOADED: dict = {}  # (path, device, inode, mtime, size) -> (library or None, issues)


def _load_cached(path, referenced_by):
    file = os.fspath(path)
    try:
        st = os.stat(file)
        ident = (file, st.st_dev, st.st_ino, st.st_mtime_ns, st.st_size)
    except OSError:
        ident = None
    if ident is not None and ident in _LOADED:
        return file, _LOADED[ident]
    file, resolved, data = _read(path, referenced_by)
    lib, issues, _ = _checked(file, resolved, data)
    if ident is not None:
        if len(_LOADED) > 64:
            _LOADED.clear()
        _LOADED[ident] = (lib, tuple(issues))
    return file, (lib, tuple(issues))


def load_library(path, *, referenced_by=None) -> MaterialLibrary:
    """Read and check a library file.

    Parameters
    ----------
    path : str or os.PathLike
    referenced_by : (file, line, key), optional
        The stack line that named the library; a path that cannot be read is
        reported there (``stack.yaml:4: library: material library ...: file
        does not exist``), problems inside the library at the library's own
        line with the stack line appended.

    Returns
    -------
    MaterialLibrary

    Raises
    ------
    StackError
        The path does not exist, is a directory, a FIFO or a device, or is
        over :data:`MAX_LIBRARY_BYTES` (a :class:`~qwell.errors.LibraryError`
        unless ``referenced_by`` is given).
    LibraryError
        Not YAML, a value without unit or source, an unknown or duplicate
        key, an impossible value; the first error, with the count of others.
    """
    file, (lib, issues) = _load_cached(path, referenced_by)
    if lib is None:
        errors = [i for i in issues if i.severity == "error"]
        first = errors[0]
        more = (f" ({len(errors) - 1} more; see qwell materials --check {file})"
                if len(errors) > 1 else "")
        via = ""
        if referenced_by is not None and referenced_by[0]:
            via = f" (library named in {referenced_by[0]}:{referenced_by[1]})"
        raise LibraryError(first.message + more + via, file=first.file, line=first.line,
                           key=first.key)
    return lib


def check_library(path) -> LibraryCheck:
    """Every finding about a library file, without raising for its content.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    LibraryCheck
        Errors refuse the library (a stack that names it is refused too);
        warnings (the Kane-mass disagreement beyond :data:`KANE_TOLERANCE`)
        do not.

    Raises
    ------
    LibraryError
        When the path cannot be read at all (missing, a directory, a FIFO or
        device, too large).
    """
    file, resolved, data = _read(path, None)
    lib, issues, p = _checked(file, resolved, data)
    sha = hashlib.sha256(data).hexdigest()
    return LibraryCheck(path=file, sha256=sha,
                        errors=tuple(i for i in issues if i.severity == "error"),
                        warnings=tuple(i for i in issues if i.severity == "warning"),
                        defines=len(p.entries) if p is not None else 0)


@functools.lru_cache(maxsize=64)
def _set_of(libraries: tuple) -> MaterialSet:
    return MaterialSet(libraries)


def material_set(libraries=()) -> MaterialSet:
    """The (cached) :class:`MaterialSet` of libraries applied in order.

    Parameters
    ----------
    libraries : iterable of MaterialLibrary or path
        Paths are read with :func:`load_library`.
    """
    libs = tuple(lib if isinstance(lib, MaterialLibrary) else load_library(lib)
                 for lib in libraries)
    return _set_of(libs)


def _restore_set(files: tuple) -> MaterialSet:
    libs = []
    for resolved, sha in files:
        lib = load_library(resolved)
        if lib.sha256 != sha:
            raise LibraryError(f"the file changed since it was read (SHA-256 {sha[:12]}... is now "
                               f"{lib.sha256[:12]}...); expected the library the design was "
                               "loaded with", file=resolved)
        libs.append(lib)
    return _set_of(tuple(libs))


def format_check(check: LibraryCheck) -> str:
    """Text report of :func:`check_library`: one line per finding, then a summary line."""
    lines = [f"{'error' if i.severity == 'error' else 'warning'}: {i}"
             for i in sorted(check.errors + check.warnings,
                             key=lambda i: (i.line is None, i.line or 0))]
    verdict = ("refused" if check.errors else "usable")
    lines.append(f"{check.path}: {verdict}: {len(check.errors)} error(s), {len(check.warnings)} "
                 f"warning(s), {check.defines} value(s) defined; SHA-256 {check.sha256}")
    return "\n".join(lines)


#: The built-in tables alone.
BUILTIN = material_set(())
