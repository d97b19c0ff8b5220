"""Layer stacks: the YAML stack file, read, checked and expanded.

A stack file lists the layers of a quantum-well structure in growth order.
:func:`load_stack` reads a file, :func:`stack_from_text` a string and
:func:`stack_from_mapping` an already parsed dictionary (the cheap path used
by design workflows that change :attr:`Stack.raw` and load it again).  All
three return a frozen :class:`Stack` whose layers are fully expanded (repeat
blocks unrolled) and whose quantities are plain floats in the internal units
of qwell (nm, eV, K, kV/cm, cm^-3, cm^-2).

File format (every dimensional value carries its unit)::

    name: detector well            # optional, default: the file stem
    temperature: 77 K              # default 300 K
    substrate: GaAs                # optional
    field: 12 kV/cm                # optional uniform field along +z
    nonparabolicity: true          # default true
    self_consistent: false         # default false
    fermi_level: 0.05 eV           # optional
    line: {transition: e1-e2, target: 8.5 um}   # optional design line (target optional)
    library: ../params/lab.yaml    # optional material library (or a list; later ones win),
                                   # relative to this file (see qwell.materials.library)
    materials:                     # optional user materials (keys of USER_KEYS)
      wall: {conduction_edge: 0.30 eV, electron_mass: 0.067}
    layers:
      - {material: Al0.30Ga0.70As, thickness: 30 nm}
      - {material: GaAs, thickness: 23 ML, name: well}
      - repeat: 4
        layers:
          - {material: In0.53Ga0.47As, thickness: 5.2 nm}
          - {material: In0.52Al0.48As, thickness: 2.1 nm,
             doping: {donors: 2e17 cm^-3, from: 0.5 nm, to: 1.5 nm}}
      - grade: {from: Al0.30Ga0.70As, to: GaAs, shape: linear}
        thickness: 10 nm
      - {material: GaAs, thickness: 20 nm, doping: {sheet: 4e11 cm^-2, at: 10 nm}}

Every problem raises :class:`~qwell.errors.StackError` whose text is one
line, ``FILE:LINE: KEY: what is wrong; what is expected``.  Keys are dotted
paths with 0-based list indices as written in the file, e.g.
``layers[3].layers[1].thickness``.

The YAML is read with a :class:`yaml.SafeLoader` subclass that records the
line of every mapping key and sequence item in a side table (the parsed data
stay plain Python), refuses duplicate keys, and refuses alias expansion
beyond small limits (the "billion laughs" document).
"""

from __future__ import annotations

import difflib
import hashlib
import math
import os
import re
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from types import MappingProxyType
from collections.abc import Mapping
from typing import Any

import numpy as np
import yaml

from . import materials as _materials
from .errors import MaterialError, StackError, UnitError
from .materials.library import BUILTIN as _BUILTIN_SET, load_library, material_set as _material_set
from .unit_table import plain_split
from .units import (FIELD_RANGES, RANGES, expected_words, is_quantity, out_of_range,
                    parse_quantity, spectral_to_eV, thickness_nm as _thickness_nm, to_float)
from .yamlio import (MAX_ALIASES, MAX_YAML_NODES, decode_text, parse_marked_yaml,  # noqa: F401
                     read_regular_file, type_word as _type_word)

__all__ = [
    "Grade",
    "Doping",
    "Layer",
    "RepeatBlock",
    "Stack",
    "DeclaredLine",
    "load_stack",
    "stack_from_text",
    "stack_from_mapping",
    "dump_stack_yaml",
    "MAX_FILE_BYTES",
    "MAX_LAYERS",
    "MAX_TOTAL_THICKNESS_NM",
    "MAX_REPEAT_DEPTH",
]

# -- limits -------------------------------------------------------------------
#: Largest stack file accepted [bytes].
MAX_FILE_BYTES = 4 * 1024 * 1024
#: Most layers after the expansion of repeat blocks.
MAX_LAYERS = 100_000
#: Highest accepted stack temperature [K]: Varshni fits are made below ~1000 K.
MAX_TEMPERATURE_K = 1000.0
#: Largest accepted uniform field [kV/cm]; breakdown of III-V layers is a few hundred kV/cm.
MAX_FIELD_KV_PER_CM = 2000.0
#: Largest total thickness [nm] (100 um).
MAX_TOTAL_THICKNESS_NM = 100_000.0
#: Thinnest layer accepted [nm] (far below a monolayer; thinner values are typing errors).
MIN_THICKNESS_NM = RANGES["thickness"][0]
#: Longest stack name accepted [characters] (it heads every report page).
MAX_NAME_CHARS = 200
#: Deepest nesting of repeat blocks (a repeat inside a repeat is fine).
MAX_REPEAT_DEPTH = 2

_DEFAULT_TEMPERATURE_K = 300.0

_TOP_KEYS = ("name", "temperature", "substrate", "field", "nonparabolicity",
             "self_consistent", "fermi_level", "line", "library", "materials", "layers")
_LINE_KEYS = ("transition", "target")
_LINE_NAME_RE = re.compile(r"^(e|hh|lh)([1-9]\d*)-(e|hh|lh)([1-9]\d*)$")
_UNIFORM_KEYS = ("material", "thickness", "name", "doping")
_GRADE_LAYER_KEYS = ("grade", "thickness", "name", "doping")
_GRADE_KEYS = ("from", "to", "shape", "vertex")
_REPEAT_KEYS = ("repeat", "layers")
_DOPING_KEYS = ("donors", "acceptors", "from", "to", "sheet", "sheet_acceptors", "at",
                "donor_level")
_NAME_RE = re.compile(r"^[A-Za-z][A-Za-z0-9_-]*$")
_RESERVED_LABEL_RE = re.compile(r"^L\d+$")


# -- result objects -----------------------------------------------------------
@dataclass(frozen=True)
class Grade:
    """A graded layer from material ``start`` to material ``end``.

    Attributes
    ----------
    start, end : str
        Material names at the start (growth side) and end of the layer.
    shape : {'linear', 'parabolic'}
    vertex : {'start', 'end'}
        Where a parabolic grade has its vertex (zero slope); 'start' for a
        linear grade.
    """

    start: str
    end: str
    shape: str = "linear"
    vertex: str = "start"

    def fraction(self, t: np.ndarray) -> np.ndarray:
        """Fraction of the way from ``start`` to ``end`` at relative position t.

        Parameters
        ----------
        t : array_like
            Relative position in the layer, 0 at its start and 1 at its end.

        Returns
        -------
        numpy.ndarray
            ``t`` (linear), ``t**2`` (parabolic, vertex at the start) or
            ``1 - (1 - t)**2`` (parabolic, vertex at the end).
        """
        t = np.asarray(t, dtype=float)
        if self.shape == "linear":
            return t.copy()
        if self.vertex == "end":
            return 1.0 - (1.0 - t) ** 2
        return t * t


@dataclass(frozen=True)
class Doping:
    """Doping of one layer (densities >= 0).

    Attributes
    ----------
    donors_cm3, acceptors_cm3 : float
        Volume densities [cm^-3], uniform over ``[from_nm, to_nm]``.
    from_nm, to_nm : float or None
        Extent of the volume doping within the layer [nm from the layer
        start]; None means the layer edge.
    sheet_cm2, sheet_acceptors_cm2 : float
        Delta (sheet) densities of donors and acceptors [cm^-2] at ``at_nm``.
    at_nm : float or None
        Position of the sheet doping within the layer [nm from its start].
    donor_level_eV : float or None
        Donor binding energy below Ec [eV]; None means complete ionisation.
    """

    donors_cm3: float = 0.0
    acceptors_cm3: float = 0.0
    from_nm: float | None = None
    to_nm: float | None = None
    sheet_cm2: float = 0.0
    sheet_acceptors_cm2: float = 0.0
    at_nm: float | None = None
    donor_level_eV: float | None = None


@dataclass(frozen=True)
class Layer:
    """One layer of the expanded stack.

    Attributes
    ----------
    index : int
        0-based position in the expanded stack.
    name : str or None
        Name as written (shared by the copies of a repeat block).
    label : str
        Unique display label: the name for its first copy, ``name#k`` for the
        k-th copy (k >= 2), ``L<index+1>`` for an unnamed layer.
    material : str or None
        Material of a uniform layer; None for a grade.
    grade : Grade or None
    thickness_nm : float
        Thickness [nm].
    overrides : Mapping[str, float]
        Material field -> value in internal units (keys of ``USER_KEYS``).
    doping : Doping or None
    repeat_block : int or None
        Index into :attr:`Stack.repeats` of the innermost block holding it.
    period : int or None
        0-based period within that block.
    line : int or None
        1-based YAML line of the layer entry.
    thickness_spec : str
        The thickness as written, e.g. ``'23 ML'``.
    """

    index: int
    name: str | None
    label: str
    material: str | None
    grade: Grade | None
    thickness_nm: float
    overrides: Mapping[str, float] = field(default_factory=lambda: MappingProxyType({}),
                                           hash=False)
    doping: Doping | None = None
    repeat_block: int | None = None
    period: int | None = None
    line: int | None = None
    thickness_spec: str = ""


@dataclass(frozen=True)
class RepeatBlock:
    """A repeat block after expansion.

    Attributes
    ----------
    index : int
        Position in :attr:`Stack.repeats`.
    count : int
        Number of periods.
    first_layer : int
        Index of the first layer of the first period.
    layers_per_period : int
        Expanded layers in one period (nested repeats included).
    line : int or None
        YAML line of the ``repeat`` entry.

    A nested block appears once per period of its outer block, each with its
    own ``first_layer``.
    """

    index: int
    count: int
    first_layer: int
    layers_per_period: int
    line: int | None = None


@dataclass(frozen=True)
class DeclaredLine:
    """The design line a stack names in its ``line:`` block.

    Attributes
    ----------
    transition : str
        Transition name, e.g. ``'e1-hh1'`` or ``'e3-e2'``.
    target_eV : float or None
        Target photon energy [eV], if the stack gives ``target``.
    target_text : str or None
        The target as written (``'980 nm'``).
    line : int or None
        Line of the ``line:`` key in the file.
    """

    transition: str
    target_eV: float | None = None
    target_text: str | None = None
    line: int | None = field(default=None, compare=False)


@dataclass(frozen=True)
class Stack:
    """A validated, expanded layer stack (see the module docstring).

    Attributes
    ----------
    name : str
    path : str or None
        File it was read from.
    sha256 : str or None
        Hex digest of the file bytes (or of the UTF-8 text); None for a mapping.
    temperature_K : float
    substrate : str or None
    field_kV_per_cm : float
        Uniform field along +z [kV/cm].
    nonparabolicity : bool
    self_consistent : bool
    fermi_level_eV : float or None
    user_materials : Mapping[str, Material]
        User-defined materials, built at ``temperature_K``.
    layers : tuple of Layer
    repeats : tuple of RepeatBlock
    raw : Mapping
        The parsed YAML (plain Python) for writing modified stacks; change a
        copy and load it with :func:`stack_from_mapping`.  Libraries given
        per call (``libraries=``) are appended to its ``library`` list as
        absolute paths, so a stack rebuilt from ``raw`` uses them too (every
        ``library`` entry is stored resolved to an absolute path).
    material_set : MaterialSet
        Built-in tables with the stack's material libraries applied
        (:mod:`qwell.materials.library`); every material look-up of the
        stack goes through it.
    declared_line : DeclaredLine or None
        The design line named by the stack's ``line:`` block.
    """

    name: str
    path: str | None
    sha256: str | None
    temperature_K: float
    substrate: str | None
    field_kV_per_cm: float
    nonparabolicity: bool
    self_consistent: bool
    fermi_level_eV: float | None
    user_materials: Mapping[str, Any] = field(hash=False)
    layers: tuple
    repeats: tuple
    raw: Mapping = field(repr=False, compare=False)
    declared_line: DeclaredLine | None = None
    material_set: Any = field(default=_BUILTIN_SET, repr=False, compare=False, hash=False)

    @property
    def libraries(self) -> tuple:
        """The material libraries in the order they apply (later ones win)."""
        return self.material_set.libraries

    @property
    def total_thickness_nm(self) -> float:
        """Sum of all layer thicknesses [nm]."""
        return float(math.fsum(layer.thickness_nm for layer in self.layers))

    @property
    def layer_names(self) -> tuple:
        """Written layer names in order of first appearance."""
        seen = {}
        for layer in self.layers:
            if layer.name is not None:
                seen.setdefault(layer.name, None)
        return tuple(seen)

    def layer(self, name: str) -> list:
        """All copies of the layer written with ``name`` (growth order).

        Raises
        ------
        StackError
            If no layer has that name; the message lists the names.
        """
        found = [layer for layer in self.layers if layer.name == name]
        if not found:
            names = self.layer_names
            hint = _did_you_mean(str(name), names)
            listed = ", ".join(repr(n) for n in names) if names else "none"
            raise StackError(f"no layer named {name!r}{hint}; layer names: {listed}",
                             file=self.path, key="layers")
        return found

    def material_of(self, layer):
        """Material of a uniform layer at the stack temperature, overrides applied.

        Parameters
        ----------
        layer : Layer, int or str
            The layer, its index, or a written name (first copy).

        Raises
        ------
        StackError
            For a graded layer (use ``grade_function`` with
            :attr:`user_materials` and :meth:`Grade.fraction`).
        """
        if isinstance(layer, str):
            layer = self.layer(layer)[0]
        elif isinstance(layer, (int, np.integer)):
            layer = self.layers[int(layer)]
        if layer.material is None:
            raise StackError(f"layer {layer.label} is graded and has no single material; "
                             "expected a uniform layer", file=self.path, line=layer.line,
                             key=f"layers[{layer.index}]")
        return _resolved_material(layer.material, self.temperature_K, self.user_materials,
                                  layer.overrides, self.material_set)


# -- material look-ups (cached) -------------------------------------------------
def _lookup_material(name: str, temperature_K: float, user_materials: Mapping,
                     material_set=_BUILTIN_SET):
    if user_materials and name in user_materials:
        return user_materials[name]
    # Built-in names are looked up without the user materials, so that a bad
    # composition keeps its own message; an unknown name also gets the close
    # user-material names as suggestions.  get_material caches by (name,
    # temperature) and repeats its validity warnings on every call.
    try:
        return material_set.get_material(name, temperature_K)
    except MaterialError as exc:
        text = _one_line(exc)
        if user_materials and text.startswith("unknown material"):
            close = difflib.get_close_matches(str(name), list(user_materials), n=3, cutoff=0.6)
            if close:
                names = ", ".join(repr(c) for c in close)
                raise MaterialError(f"{text.split(';')[0]}; did you mean the user material "
                                    f"{names}?") from None
        raise


def _apply_overrides(mat, overrides: Mapping):
    if not overrides:
        return mat
    return mat.with_overrides(**dict(overrides))


def _resolved_material(name, temperature_K, user_materials, overrides,
                       material_set=_BUILTIN_SET):
    return _apply_overrides(_lookup_material(name, temperature_K, user_materials, material_set),
                            overrides)


# -- quantity parsing (cached) ----------------------------------------------------
@lru_cache(maxsize=8192)
def _to_float_str(text: str, unit: str) -> float:
    return to_float(text, unit)


# '<decimal> nm' / '<decimal> ML' (no minus, no leading zeros): read without pint, which gives
# the same float for exactly these forms (checked on random values) at a fraction of the cost.
_PLAIN_THICKNESS_RE = re.compile(
    r"^[ \t]*(\+?(?:(?:0|[1-9]\d*)(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)[ \t]*(nm|ML)[ \t]*$")


@lru_cache(maxsize=8192)
def _thickness_str(text: str, monolayer_nm: float | None) -> float:
    m = _PLAIN_THICKNESS_RE.match(text)
    if m and m.group(2) == "nm":
        return float(m.group(1))
    if m and monolayer_nm is not None:
        return float(m.group(1)) * monolayer_nm
    return _thickness_nm(text, monolayer_nm)


@lru_cache(maxsize=4096)
def _is_monolayers_str(text: str) -> bool:
    return _is_monolayers_any(text)


def _is_monolayers(value) -> bool:
    if isinstance(value, str):
        return _is_monolayers_str(value)
    return _is_monolayers_any(value)


def _is_monolayers_any(value) -> bool:
    split = plain_split(value)
    if split is not None:   # a plain form: its unit says it, without the registry
        return split[1] == "ML"
    try:
        q = parse_quantity(value)
    except UnitError:
        return False
    return bool(q.check("[monolayer]"))


# -- the YAML reader ---------------------------------------------------------------
def _parse_yaml(text: str, file: str | None):
    """Parse YAML text into (data, marks); StackError on anything refused."""
    return parse_marked_yaml(text, file)


# -- helpers -------------------------------------------------------------------
def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _expecting(exc, expected: str) -> str:
    """Message of a wrapped error, with what is expected unless it says so already."""
    text = _one_line(exc)
    if "; " in text or "expected" in text:
        return text
    return f"{text}; expected {expected}"


def _short(value, limit: int = 60) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _did_you_mean(word: str, candidates) -> str:
    close = difflib.get_close_matches(str(word), [str(c) for c in candidates], n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


class _Builder:
    """Checks one parsed stack document and builds the :class:`Stack`."""

    def __init__(self, data, marks: Mapping, file: str | None, libraries=()):
        self.data = data
        self.marks = marks
        self.file = file
        self.call_libraries = tuple(os.fspath(p) for p in libraries)
        self.material_set = _BUILTIN_SET
        self.temperature_K = _DEFAULT_TEMPERATURE_K
        self.user_materials: dict = {}
        self.user_keys: Mapping = {}
        self.seen_materials: dict = {}  # name -> Material, looked up once per stack
        self.seen_grades: set = set()

    # -- errors and lines ---------------------------------------------------------
    def line(self, container, key=None) -> int | None:
        mark = self.marks.get(id(container))
        if mark is None:
            return None
        own, inner = mark
        if key is not None:
            if isinstance(inner, dict) and key in inner:
                return inner[key]
            if isinstance(inner, list) and isinstance(key, int) and 0 <= key < len(inner):
                return inner[key]
        return own

    def error(self, message: str, container=None, key=None, path: str | None = None):
        return StackError(_one_line(message), file=self.file, line=self.line(container, key),
                          key=path)

    def check_keys(self, mapping: Mapping, allowed, path: str, extra=()):
        for key in mapping:
            if key in allowed or key in extra:
                continue
            kpath = f"{path}.{key}" if path else str(key)
            hint = _did_you_mean(key, list(allowed) + list(extra))
            shown = ", ".join(allowed)
            raise self.error(f"unknown key {key!r}{hint}; expected one of: {shown}",
                             mapping, key, kpath)

    def require(self, mapping: Mapping, key: str, path: str, what: str):
        if key not in mapping:
            raise self.error(f"missing required key {key!r}; expected {what}", mapping, None,
                             path or None)
        return mapping[key]

    # -- values ---------------------------------------------------------------------
    def quantity(self, mapping, key, unit, path, what=None):
        value = mapping[key]
        words = what or expected_words(unit)
        if isinstance(value, bool) or value is None or isinstance(value, (Mapping, list)):
            raise self.error(f"got {_type_word(value)}; expected {words}", mapping, key, path)
        if isinstance(value, (int, float)):
            raise self.error(f"bare number {value!r} has no unit; expected {words}, "
                             f"like '{value} {unit}'", mapping, key, path)
        try:
            if isinstance(value, str):
                return _to_float_str(value, unit)
            return to_float(value, unit, words)
        except UnitError as exc:
            raise self.error(str(exc), mapping, key, path) from None

    def number(self, mapping, key, path, what="a plain number"):
        value = mapping[key]
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            raise self.error(f"got {_type_word(value)}; expected {what}", mapping, key, path)
        try:
            out = float(value)
        except ValueError:
            raise self.error(f"got {_short(value)}; expected {what}", mapping, key, path) from None
        if not math.isfinite(out):
            raise self.error(f"got {_short(value)}; expected a finite number", mapping, key, path)
        return out

    def boolean(self, mapping, key, path):
        value = mapping[key]
        if not isinstance(value, bool):
            raise self.error(f"got {_type_word(value)}; expected true or false", mapping, key,
                             path)
        return value

    def text(self, mapping, key, path, what="a text"):
        value = mapping[key]
        if not isinstance(value, str) or not value.strip():
            raise self.error(f"got {_type_word(value)}; expected {what}", mapping, key, path)
        return value.strip()

    def finite(self, value, mapping, key, path, what):
        if not math.isfinite(value):
            raise self.error(f"{value!r} is not finite; expected {what}", mapping, key, path)
        return value

    # -- materials ---------------------------------------------------------------------
    def material(self, name, mapping, key, path):
        mat = self.seen_materials.get(name)
        if mat is not None:
            return mat
        try:
            mat = _lookup_material(name, self.temperature_K, self.user_materials,
                                   self.material_set)
        except MaterialError as exc:
            raise self.error(_expecting(exc, "a material such as GaAs or Al0.30Ga0.70As, or a "
                                        "name under 'materials'"), mapping, key, path) from None
        self.seen_materials[name] = mat
        return mat

    def overrides(self, mapping, path, skip) -> dict:
        out = {}
        for key in mapping:
            if key in skip:
                continue
            fld, unit = self.user_keys[key]
            kpath = f"{path}.{key}"
            if unit is None:
                out[fld] = self.number(mapping, key, kpath)
            else:
                out[fld] = self.finite(self.quantity(mapping, key, unit, kpath), mapping, key,
                                       kpath, expected_words(unit))
            kind = FIELD_RANGES.get(fld)
            if kind is not None:
                self.in_range(kind, out[fld], mapping, key, kpath)
        return out

    def in_range(self, kind, value, mapping, key, path):
        """Refuse ``value`` outside ``units.RANGES[kind]`` (the README's limits table)."""
        why = out_of_range(kind, value)
        if why is not None:
            shown = _short(mapping[key]) if key in mapping else f"{value:g}"
            raise self.error(f"{shown} {why}", mapping, key, path)
        return value

    def build_user_materials(self, top):
        spec = top["materials"]
        if spec is None:
            return
        if not isinstance(spec, Mapping):
            raise self.error(f"got {_type_word(spec)}; expected a mapping of material name -> "
                             "parameters", top, "materials", "materials")
        api = _materials
        for name, params in spec.items():
            path = f"materials.{name}"
            if not isinstance(name, str) or not _NAME_RE.match(name):
                raise self.error(f"bad material name {name!r}; expected letters, digits, _ or - "
                                 "starting with a letter", spec, name, path)
            if self.material_set.is_builtin_name(name):
                raise self.error(f"{name!r} is a built-in material; expected a new name (adjust "
                                 "a built-in material with per-layer overrides)", spec, name,
                                 path)
            if not isinstance(params, Mapping) or not params:
                raise self.error(f"got {_type_word(params)}; expected a mapping of parameters "
                                 f"(keys: {', '.join(self.user_keys)})", spec, name, path)
            self.check_keys(params, tuple(self.user_keys), path)
            values = self.overrides(params, path, skip=())
            try:
                self.user_materials[name] = api.user_material(name, values, self.temperature_K)
            except MaterialError as exc:
                raise self.error(_expecting(exc, "consistent material parameters"), spec, name,
                                 path) from None

    # -- layers -------------------------------------------------------------------------
    def count_layers(self, entries, path, depth, container, ckey):
        """Expanded layer count of a list of entries; checks repeats before expansion."""
        if not isinstance(entries, list):
            raise self.error(f"got {_type_word(entries)}; expected a list of layers",
                             container, ckey, path)
        if not entries:
            raise self.error("no layers; expected at least one layer", container, ckey, path)
        total = 0
        for i, entry in enumerate(entries):
            epath = f"{path}[{i}]"
            if not isinstance(entry, Mapping):
                raise self.error(f"got {_type_word(entry)}; expected a layer mapping like "
                                 "{material: GaAs, thickness: 5 nm}", entries, i, epath)
            if "repeat" in entry:
                self.check_keys(entry, _REPEAT_KEYS, epath)
                if depth >= MAX_REPEAT_DEPTH:
                    raise self.error(f"repeat blocks nested more than {MAX_REPEAT_DEPTH} deep; "
                                     "expected at most a repeat inside a repeat", entry,
                                     "repeat", f"{epath}.repeat")
                count = entry["repeat"]
                if isinstance(count, bool) or not isinstance(count, int):
                    raise self.error(f"got {_type_word(count)}; expected a whole number of "
                                     "periods >= 1", entry, "repeat", f"{epath}.repeat")
                if count < 1:
                    raise self.error(f"repeat count {count} < 1; expected a whole number of "
                                     "periods >= 1", entry, "repeat", f"{epath}.repeat")
                inner = self.require(entry, "layers", epath, "the list of layers of one period")
                total += count * self.count_layers(inner, f"{epath}.layers", depth + 1, entry,
                                                   "layers")
            else:
                total += 1
            if total > MAX_LAYERS:
                raise self.error(f"more than {MAX_LAYERS} layers after expanding the repeats; "
                                 "expected a smaller stack", entries, i, epath)
        return total

    def parse_layer(self, entry, path, names: dict):
        """A written (non-repeat) layer -> dict of Layer fields (without position)."""
        is_grade = "grade" in entry
        if is_grade and "material" in entry:
            raise self.error("a layer has either 'material' or 'grade', not both; expected one "
                             "of them", entry, "grade", f"{path}.grade")
        allowed = _GRADE_LAYER_KEYS if is_grade else _UNIFORM_KEYS
        self.check_keys(entry, allowed, path, extra=tuple(self.user_keys))
        if not is_grade:
            self.require(entry, "material", path,
                         "'material' (e.g. material: GaAs), 'grade' or 'repeat'")
        self.require(entry, "thickness", path, "a thickness (e.g. thickness: 5 nm)")

        name = None
        if "name" in entry:
            name = entry["name"]
            npath = f"{path}.name"
            if not isinstance(name, str) or not _NAME_RE.match(name):
                raise self.error(f"bad layer name {_short(name)}; expected letters, digits, _ "
                                 "or - starting with a letter (e.g. well_1)", entry, "name", npath)
            if _RESERVED_LABEL_RE.match(name):
                raise self.error(f"layer name {name!r} is reserved for unnamed layers; expected "
                                 "another name", entry, "name", npath)
            if name in names:
                raise self.error(f"duplicate layer name {name!r} (first used on line "
                                 f"{names[name]}); expected unique names", entry, "name", npath)
            names[name] = self.line(entry, "name")

        overrides = self.overrides(entry, path, skip=allowed)
        material = grade = None
        monolayer = None
        if is_grade:
            grade = self.parse_grade(entry, path)
            if overrides:
                self.check_grade_overrides(grade, overrides, entry, path)
        else:
            mname = entry["material"]
            mpath = f"{path}.material"
            if not isinstance(mname, str) or not mname.strip():
                raise self.error(f"got {_type_word(mname)}; expected a material name such as "
                                 "GaAs or Al0.30Ga0.70As", entry, "material", mpath)
            material = mname.strip()
            mat = self.material(material, entry, "material", mpath)
            if overrides:
                try:
                    mat = _apply_overrides(mat, overrides)
                except (MaterialError, TypeError, ValueError) as exc:
                    raise self.error(f"cannot apply the overrides ({_one_line(exc)}); expected "
                                     "parameters of USER_KEYS", entry, None, path) from None
            monolayer = getattr(mat, "monolayer_nm", None)
            if monolayer is None and "lattice_constant_nm" in overrides:
                monolayer = overrides["lattice_constant_nm"] / 2.0

        thick = self.thickness(entry, path, monolayer, is_grade)
        doping = self.parse_doping(entry, path, thick) if "doping" in entry else None
        return dict(name=name, material=material, grade=grade, thickness_nm=thick,
                    overrides=MappingProxyType(overrides), doping=doping,
                    line=self.line(entry), thickness_spec=_spec_text(entry["thickness"]))

    def check_grade_overrides(self, grade, overrides, entry, path):
        """Overrides of a graded layer must apply at both of its ends."""
        try:
            along = self.material_set.grade_function(grade.start, grade.end, self.temperature_K,
                                                     dict(self.user_materials) or None)
            for f in (0.0, 1.0):
                _apply_overrides(along(f), overrides)
        except (MaterialError, TypeError, ValueError) as exc:
            raise self.error(f"cannot apply the overrides along the grade ({_one_line(exc)}); "
                             "expected parameters of USER_KEYS", entry, None, path) from None

    def thickness(self, entry, path, monolayer, is_grade) -> float:
        tpath = f"{path}.thickness"
        value = entry["thickness"]
        words = expected_words("nm")
        if isinstance(value, bool) or value is None or isinstance(value, (Mapping, list)):
            raise self.error(f"got {_type_word(value)}; expected {words}", entry, "thickness",
                             tpath)
        if isinstance(value, (int, float)):
            raise self.error(f"bare number {value!r} has no unit; expected {words}, like "
                             f"'{value} nm'", entry, "thickness", tpath)
        if is_grade and _is_monolayers(value):
            raise self.error(f"{value!r}: monolayers are ambiguous in a graded layer; expected "
                             "the thickness in nm", entry, "thickness", tpath)
        try:
            if isinstance(value, str):
                t = _thickness_str(value, monolayer)
            else:
                t = _thickness_nm(value, monolayer)
        except UnitError as exc:
            raise self.error(str(exc), entry, "thickness", tpath) from None
        if not math.isfinite(t) or t <= 0:
            raise self.error(f"thickness {_short(value)} is not positive and finite; expected "
                             "a thickness > 0 (e.g. '5 nm')", entry, "thickness", tpath)
        if t > MAX_TOTAL_THICKNESS_NM:
            raise self.error(f"thickness {_short(value)} exceeds the {MAX_TOTAL_THICKNESS_NM:g} nm "
                             "(100 um) limit of a stack; expected a thinner layer", entry,
                             "thickness", tpath)
        if t < MIN_THICKNESS_NM:
            raise self.error(f"thickness {_short(value)} is below {MIN_THICKNESS_NM:g} nm "
                             "(far below one monolayer); expected a layer thickness of at least "
                             f"{MIN_THICKNESS_NM:g} nm", entry, "thickness", tpath)
        return t

    def parse_grade(self, entry, path) -> Grade:
        gpath = f"{path}.grade"
        spec = entry["grade"]
        if not isinstance(spec, Mapping):
            raise self.error(f"got {_type_word(spec)}; expected a mapping like "
                             "{from: Al0.30Ga0.70As, to: GaAs, shape: linear}", entry, "grade",
                             gpath)
        self.check_keys(spec, _GRADE_KEYS, gpath)
        ends = []
        for key in ("from", "to"):
            self.require(spec, key, gpath, f"the material at the {'start' if key == 'from' else 'end'}"
                         " of the grade")
            ends.append(self.text(spec, key, f"{gpath}.{key}", "a material name"))
            self.material(ends[-1], spec, key, f"{gpath}.{key}")
        shape = "linear"
        if "shape" in spec:
            shape = spec["shape"]
            if shape not in ("linear", "parabolic"):
                hint = _did_you_mean(str(shape), ("linear", "parabolic"))
                raise self.error(f"unknown shape {_short(shape)}{hint}; expected 'linear' or "
                                 "'parabolic'", spec, "shape", f"{gpath}.shape")
        vertex = "start"
        if "vertex" in spec:
            vertex = spec["vertex"]
            if shape != "parabolic":
                raise self.error("'vertex' applies to parabolic grades only; expected shape: "
                                 "parabolic or no vertex", spec, "vertex", f"{gpath}.vertex")
            if vertex not in ("start", "end"):
                raise self.error(f"unknown vertex {_short(vertex)}; expected 'start' or 'end'",
                                 spec, "vertex", f"{gpath}.vertex")
        start, end = ends
        if (start, end) in self.seen_grades:
            return Grade(start=start, end=end, shape=shape, vertex=vertex)
        try:
            self.material_set.grade_function(start, end, self.temperature_K,
                                             dict(self.user_materials) or None)
        except MaterialError as exc:
            raise self.error(_expecting(exc, "two materials that share band parameters"),
                             entry, "grade", gpath) from None
        self.seen_grades.add((start, end))
        return Grade(start=start, end=end, shape=shape, vertex=vertex)

    def parse_doping(self, entry, path, thick_nm) -> Doping:
        dpath = f"{path}.doping"
        spec = entry["doping"]
        if not isinstance(spec, Mapping):
            raise self.error(f"got {_type_word(spec)}; expected a mapping like "
                             "{donors: 1e18 cm^-3}", entry, "doping", dpath)
        self.check_keys(spec, _DOPING_KEYS, dpath)
        vals: dict = {}
        for key, unit, fld in (("donors", "cm^-3", "donors_cm3"),
                               ("acceptors", "cm^-3", "acceptors_cm3"),
                               ("sheet", "cm^-2", "sheet_cm2"),
                               ("sheet_acceptors", "cm^-2", "sheet_acceptors_cm2")):
            if key in spec:
                v = self.quantity(spec, key, unit, f"{dpath}.{key}")
                if not math.isfinite(v) or v < 0:
                    raise self.error(f"negative density {_short(spec[key])}; expected a density "
                                     f">= 0 in {unit}", spec, key, f"{dpath}.{key}")
                self.in_range("volume_density" if unit == "cm^-3" else "sheet_density", v,
                              spec, key, f"{dpath}.{key}")
                vals[fld] = v
        for key, fld in (("from", "from_nm"), ("to", "to_nm"), ("at", "at_nm")):
            if key in spec:
                kpath = f"{dpath}.{key}"
                v = self.quantity(spec, key, "nm", kpath, "a position in the layer "
                                  "(e.g. '1.5 nm')")
                tol = 1e-9 * max(1.0, thick_nm)
                if not math.isfinite(v) or v < -tol or v > thick_nm + tol:
                    raise self.error(f"position {_short(spec[key])} is outside its layer; "
                                     f"expected 0 to {thick_nm:.6g} nm from the layer start",
                                     spec, key, kpath)
                vals[fld] = min(max(v, 0.0), thick_nm)
        if "donor_level" in spec:
            kpath = f"{dpath}.donor_level"
            v = self.quantity(spec, "donor_level", "eV", kpath)
            if not math.isfinite(v) or v < 0:
                raise self.error(f"donor level {_short(spec['donor_level'])} is negative; "
                                 "expected an energy >= 0 below the conduction edge "
                                 "(e.g. '6 meV')", spec, "donor_level", kpath)
            self.in_range("donor_level", v, spec, "donor_level", kpath)
            vals["donor_level_eV"] = v
        has_volume = "donors" in spec or "acceptors" in spec
        has_sheet = "sheet" in spec or "sheet_acceptors" in spec
        if ("from" in spec or "to" in spec) and not has_volume:
            key = "from" if "from" in spec else "to"
            raise self.error("'from'/'to' limit volume doping; expected 'donors' or "
                             "'acceptors' with them", spec, key, f"{dpath}.{key}")
        if has_sheet and "at" not in spec:
            key = "sheet" if "sheet" in spec else "sheet_acceptors"
            raise self.error("missing required key 'at'; expected the position of the sheet "
                             "doping in the layer (e.g. at: 10 nm)", spec, key, dpath)
        if "at" in spec and not has_sheet:
            raise self.error("'at' places sheet doping; expected 'sheet' or 'sheet_acceptors' "
                             "with it", spec, "at", f"{dpath}.at")
        lo = vals.get("from_nm", 0.0)
        hi = vals.get("to_nm", thick_nm)
        if hi <= lo:
            raise self.error(f"doping range from {lo:.6g} nm to {hi:.6g} nm is empty; expected "
                             "'from' < 'to'", spec, "to" if "to" in spec else "from", dpath)
        return Doping(**vals)

    def expand(self, entries, path, depth, out, repeats, name_count, templates, block, period):
        """Append expanded layers of ``entries`` to ``out`` (lists of field dicts)."""
        for i, entry in enumerate(entries):
            epath = f"{path}[{i}]"
            if "repeat" in entry:
                count = entry["repeat"]
                first = len(out)
                rb_index = len(repeats)
                repeats.append(None)  # placeholder, filled once the period length is known
                per_period = None
                for p in range(count):
                    self.expand(entry["layers"], f"{epath}.layers", depth + 1, out, repeats,
                                name_count, templates, rb_index, p)
                    if per_period is None:
                        per_period = len(out) - first
                repeats[rb_index] = RepeatBlock(index=rb_index, count=count, first_layer=first,
                                                layers_per_period=per_period,
                                                line=self.line(entry))
                continue
            key = id(entry)
            tmpl = templates.get(key)
            if tmpl is None:
                raise self.error("internal: layer not parsed", entry, None, epath)
            idx = len(out)
            name = tmpl["name"]
            if name is None:
                label = f"L{idx + 1}"
            else:
                k = name_count.get(name, 0) + 1
                name_count[name] = k
                label = name if k == 1 else f"{name}#{k}"
            out.append(Layer(index=idx, label=label, repeat_block=block, period=period, **tmpl))

    def parse_all(self, entries, path, names, templates, depth=0):
        for i, entry in enumerate(entries):
            epath = f"{path}[{i}]"
            if "repeat" in entry:
                self.parse_all(entry["layers"], f"{epath}.layers", names, templates, depth + 1)
            else:
                if id(entry) in templates:
                    # the same mapping written twice through a YAML alias
                    tmpl = templates[id(entry)]
                    if tmpl["name"] is not None:
                        raise self.error(f"duplicate layer name {tmpl['name']!r} (a YAML alias "
                                         "repeats a named layer); expected unique names",
                                         entries, i, f"{epath}.name")
                    continue
                templates[id(entry)] = self.parse_layer(entry, epath, names)

    def total_thickness(self, entries, templates) -> float:
        total = 0.0
        for entry in entries:
            if "repeat" in entry:
                total += entry["repeat"] * self.total_thickness(entry["layers"], templates)
            else:
                total += templates[id(entry)]["thickness_nm"]
        return total

    # -- the whole document ------------------------------------------------------------
    def build(self, path: str | None, sha: str | None, default_name: str) -> Stack:
        top = self.data
        if top is None:
            raise self.error("empty stack file; expected a mapping with at least 'layers'")
        if not isinstance(top, Mapping):
            raise StackError(f"the top level is {_type_word(top)}; expected a mapping of stack "
                             "keys (name, temperature, ..., layers)", file=self.file,
                             line=self.marks.get("root"))
        self.check_keys(top, _TOP_KEYS, "")
        if "layers" not in top:
            raise self.error("missing required key 'layers'; expected the list of layers in "
                             "growth order", top)
        try:
            self.user_keys = dict(_materials.USER_KEYS)
        except AttributeError:
            self.user_keys = {}

        name = default_name
        if "name" in top:
            v = top["name"]
            if isinstance(v, bool) or not isinstance(v, (str, int, float)) or not str(v).strip():
                raise self.error(f"got {_type_word(v)}; expected a free-text stack name", top,
                                 "name", "name")
            name = _one_line(str(v))
            if len(name) > MAX_NAME_CHARS:
                raise self.error(f"the name is {len(name)} characters long; expected a stack "
                                 f"name of at most {MAX_NAME_CHARS} characters", top, "name",
                                 "name")

        if "temperature" in top:
            t = self.quantity(top, "temperature", "K", "temperature")
            if not math.isfinite(t):
                raise self.error(f"temperature {_short(top['temperature'])} is not finite; "
                                 "expected a temperature > 0 K (e.g. '77 K')", top,
                                 "temperature", "temperature")
            if t <= 0:
                raise self.error(f"temperature {_short(top['temperature'])} is not above 0 K; "
                                 "expected a temperature > 0 K (e.g. '77 K')", top,
                                 "temperature", "temperature")
            if t > MAX_TEMPERATURE_K:
                raise self.error(f"temperature {_short(top['temperature'])} is above "
                                 f"{MAX_TEMPERATURE_K:g} K, beyond the range of the gap's "
                                 "temperature law; expected a device temperature (e.g. '300 K')",
                                 top, "temperature", "temperature")
            self.temperature_K = t

        self.build_material_set(top)
        if "materials" in top:
            self.build_user_materials(top)

        substrate = None
        if "substrate" in top and top["substrate"] is not None:
            substrate = self.text(top, "substrate", "substrate", "a material name such as GaAs")
            self.material(substrate, top, "substrate", "substrate")

        field_kV = 0.0
        if "field" in top:
            field_kV = self.finite(self.quantity(top, "field", "kV/cm", "field"), top, "field",
                                   "field", expected_words("kV/cm"))
            if abs(field_kV) > MAX_FIELD_KV_PER_CM:
                raise self.error(f"field {_short(top['field'])} is beyond "
                                 f"±{MAX_FIELD_KV_PER_CM:g} kV/cm (far above the breakdown field "
                                 "of III-V layers); expected a device field (e.g. '50 kV/cm')",
                                 top, "field", "field")
        nonpar = self.boolean(top, "nonparabolicity", "nonparabolicity") \
            if "nonparabolicity" in top else True
        selfc = self.boolean(top, "self_consistent", "self_consistent") \
            if "self_consistent" in top else False
        fermi = None
        if "fermi_level" in top and top["fermi_level"] is not None:
            fermi = self.finite(self.quantity(top, "fermi_level", "eV", "fermi_level"), top,
                                "fermi_level", "fermi_level", expected_words("eV"))
            self.in_range("fermi_level", fermi, top, "fermi_level", "fermi_level")

        declared = self.declared_line(top) if "line" in top and top["line"] is not None \
            else None

        entries = top["layers"]
        self.count_layers(entries, "layers", 0, top, "layers")
        templates: dict = {}
        self.parse_all(entries, "layers", {}, templates)
        total = self.total_thickness(entries, templates)
        if total > MAX_TOTAL_THICKNESS_NM:
            raise self.error(f"total thickness {total / 1000:.6g} um exceeds the 100 um limit; "
                             "expected a thinner stack", top, "layers", "layers")
        layers: list = []
        repeats: list = []
        self.expand(entries, "layers", 0, layers, repeats, {}, templates, None, None)

        return Stack(name=name, path=path, sha256=sha, temperature_K=float(self.temperature_K),
                     substrate=substrate, field_kV_per_cm=float(field_kV), nonparabolicity=nonpar,
                     self_consistent=selfc, fermi_level_eV=fermi,
                     user_materials=MappingProxyType(dict(self.user_materials)),
                     layers=tuple(layers), repeats=tuple(repeats), raw=top,
                     declared_line=declared, material_set=self.material_set)

    def declared_line(self, top) -> DeclaredLine:
        """The ``line:`` block: a transition name and an optional spectral target."""
        block = top["line"]
        if isinstance(block, str):
            block = {"transition": block}
            mapping, key = top, "line"
        elif isinstance(block, Mapping):
            self.check_keys(block, _LINE_KEYS, "line")
            mapping, key = block, "transition"
            if "transition" not in block:
                raise self.error("missing required key 'transition'; expected a transition "
                                 "name such as e1-hh1 or e1-e2", block, None, "line")
        else:
            raise self.error(f"got {_type_word(block)}; expected a mapping such as "
                             "{transition: e1-hh1, target: 980 nm}", top, "line", "line")
        name = block["transition"]
        if not isinstance(name, str) or not _LINE_NAME_RE.match(name.strip()):
            raise self.error(f"got {_short(name)}; expected a transition name of two state "
                             "labels such as e1-hh1, e1-lh1 or e3-e2", mapping, key,
                             "line.transition")
        target_eV = target_text = None
        if "target" in block and block["target"] is not None:
            value = block["target"]
            where = ("line.target", block, "target")
            if isinstance(value, bool) or not isinstance(value, str):
                what = ("bare number has no unit" if isinstance(value, (int, float))
                        else f"got {_type_word(value)}")
                raise self.error(f"{what}; expected a wavelength, photon energy, wavenumber "
                                 "or frequency such as '980 nm', '1.265 eV', '1100 cm^-1'",
                                 where[1], where[2], where[0])
            try:
                target_eV = spectral_to_eV(value)
            except UnitError as exc:
                raise self.error(f"{_one_line(str(exc))}", block, "target", "line.target") \
                    from None
            if not (math.isfinite(target_eV) and target_eV > 0):
                raise self.error(f"target {value!r} is not a positive spectral value; expected "
                                 "e.g. '980 nm'", block, "target", "line.target")
            target_text = value.strip()
        return DeclaredLine(transition=name.strip(), target_eV=target_eV,
                            target_text=target_text, line=self.line(top, "line"))

    def build_material_set(self, top):
        """Read the stack's ``library`` files (relative to the stack) and the per-call ones."""
        libs = []
        if "library" in top and top["library"] is not None:
            spec = top["library"]
            items = spec if isinstance(spec, list) else [spec]
            base = Path(self.file).parent if self.file else Path(".")
            for i, item in enumerate(items):
                container, key = (spec, i) if isinstance(spec, list) else (top, "library")
                kpath = f"library[{i}]" if isinstance(spec, list) else "library"
                if not isinstance(item, str) or not item.strip():
                    raise self.error(f"got {_type_word(item)}; expected the path of a material "
                                     "library file (relative to the stack file) or a list of "
                                     "them", container, key, kpath)
                p = Path(item.strip()).expanduser()
                path = p if p.is_absolute() else base / p
                line = self.line(container, key)
                libs.append(load_library(path, referenced_by=(self.file, line, kpath)))
        for item in self.call_libraries:
            resolved = str(Path(item).expanduser().resolve())
            if any(lib.resolved == resolved for lib in libs):
                continue  # already named by the stack (e.g. a stack rebuilt from its raw)
            libs.append(load_library(item, referenced_by=(None, None, "libraries")))
        if libs:
            # absolute paths: a stack rebuilt from raw, or written elsewhere, finds them
            top["library"] = [lib.resolved for lib in libs]
            self.material_set = _material_set(libs)


def _spec_text(value) -> str:
    if isinstance(value, str):
        return value.strip()
    try:
        return f"{value:~}"
    except (TypeError, ValueError):
        return str(value)


def _stem(file) -> str:
    return Path(str(file)).stem if file else "stack"


def _plain_copy(value, _depth: int = 0):
    """Copy of nested mappings and lists (other values are shared: scalars, quantities)."""
    if _depth > 100:
        raise StackError("mapping nested too deeply; expected a plain stack mapping")
    kind = type(value)
    if kind is str or kind is float or kind is int or kind is bool or value is None:
        return value
    if kind is dict or isinstance(value, Mapping):
        return {k: _plain_copy(v, _depth + 1) for k, v in value.items()}
    if kind is list or isinstance(value, tuple):
        return [_plain_copy(v, _depth + 1) for v in value]
    return value


# -- public entry points ---------------------------------------------------------
def layer_fields(stack: Stack, entry: Mapping, path: str = "layer") -> dict:
    """Check one written (non-repeat) layer entry as the loader does and build its fields.

    The entry is validated in the context of ``stack`` (its temperature,
    user materials and material libraries) by the same code that loads a file, so a caller that
    changes one layer of :attr:`Stack.raw` can rebuild only that layer.

    Parameters
    ----------
    stack : Stack
    entry : Mapping
        A layer mapping as written, e.g. ``{'material': 'GaAs', 'thickness': '5 nm'}``.
    path : str
        Key path used in error messages (e.g. ``'layers[2]'``).

    Returns
    -------
    dict
        Keyword arguments of :class:`Layer` without its position (``index``,
        ``label``, ``repeat_block``, ``period``); ``line`` is None.

    Raises
    ------
    StackError
        Whatever the loader would refuse in this entry.
    """
    builder = _Builder(entry, {}, stack.path)
    builder.temperature_K = stack.temperature_K
    builder.user_materials = dict(stack.user_materials)
    builder.material_set = getattr(stack, "material_set", None) or _BUILTIN_SET
    builder.user_keys = dict(_materials.USER_KEYS)
    return builder.parse_layer(entry, path, {})


def stack_from_mapping(data: Mapping, file: str | None = None, libraries=()) -> Stack:
    """Build a :class:`Stack` from an already parsed mapping (no line numbers).

    Parameters
    ----------
    data : Mapping
        The stack as plain Python (the structure of the YAML file); quantity
        values are strings like ``'5 nm'`` or pint Quantities.  It is copied,
        so later changes to ``data`` do not affect the stack.
    file : str, optional
        Name used in error messages and as the default stack name; a
        relative ``library`` path is read relative to it.
    libraries : iterable of path, optional
        Material libraries applied after the stack's own (later ones win).

    Raises
    ------
    StackError

    Examples
    --------
    >>> from qwell import stack_from_mapping
    >>> stack = stack_from_mapping({"name": "test well", "layers": [
    ...     {"material": "Al0.3Ga0.7As", "thickness": "20 nm"},
    ...     {"material": "GaAs", "thickness": "8 nm", "name": "well"},
    ...     {"material": "Al0.3Ga0.7As", "thickness": "20 nm"}]})
    >>> stack.layers[1].thickness_nm
    8.0
    """
    raw = _plain_copy(data)
    builder = _Builder(raw, {}, None if file is None else str(file), libraries)
    return builder.build(None if file is None else str(file), None, _stem(file))


def _decode(data: bytes, file: str | None) -> str:
    return decode_text(data, file, MAX_FILE_BYTES)


def _from_text(text: str, file: str | None, sha: str, libraries=()) -> Stack:
    data, marks = _parse_yaml(text, file)
    builder = _Builder(data, marks, file, libraries)
    return builder.build(file, sha, _stem(file))


def stack_from_text(text: str, file: str | None = None, libraries=()) -> Stack:
    """Read a stack from YAML text.

    Parameters
    ----------
    text : str
        The YAML document.
    file : str, optional
        File name for messages (and the default stack name).
    libraries : iterable of path, optional
        Material libraries applied after the stack's own (later ones win).

    Raises
    ------
    StackError
    """
    if isinstance(text, bytes):
        text = _decode(text, file)
    if not isinstance(text, str):
        raise StackError(f"got {type(text).__name__}; expected YAML text", file=file)
    if "\x00" in text:
        raise StackError("binary text (contains NUL characters); expected a YAML text file",
                         file=file)
    encoded = text.encode("utf-8", "surrogatepass")
    if len(encoded) > MAX_FILE_BYTES:
        raise StackError(f"text is {len(encoded) / 1e6:.3g} MB, over the "
                         f"{MAX_FILE_BYTES / 1e6:.3g} MB limit; expected a stack of a few kB",
                         file=file)
    return _from_text(text, None if file is None else str(file),
                      hashlib.sha256(encoded).hexdigest(), libraries)


def load_stack(path, libraries=()) -> Stack:
    """Read and check a stack file.

    Parameters
    ----------
    path : str or os.PathLike
    libraries : iterable of path, optional
        Material libraries applied after the stack's own ``library`` files
        (later ones win), e.g. from ``--library`` on the command line.

    Returns
    -------
    Stack

    Raises
    ------
    StackError
        Missing or unreadable file, oversized or binary file, invalid YAML or
        an invalid stack (see the module docstring).

    Examples
    --------
    >>> from qwell import load_stack
    >>> stack = load_stack("layers/lwir-detector.yaml")
    >>> [layer.name for layer in stack.layers]
    ['bottom_barrier', 'well', 'top_barrier']
    >>> round(stack.layers[1].thickness_nm, 4)       # 19 ML of GaAs
    5.3624
    """
    file = os.fspath(path)
    data = read_regular_file(file, MAX_FILE_BYTES)
    text = _decode(data, file)
    return _from_text(text, file, hashlib.sha256(data).hexdigest(), libraries)


# -- writing --------------------------------------------------------------------------
class _StackDumper(yaml.SafeDumper):
    """SafeDumper that writes pint quantities and numpy scalars as plain values."""


def _represent_quantity(dumper, q):
    return dumper.represent_str(f"{q.magnitude:.12g} {q.units:~}")


def _represent_np_float(dumper, v):
    return dumper.represent_float(float(v))


def _represent_np_int(dumper, v):
    return dumper.represent_int(int(v))


def _represent_mapping_proxy(dumper, m):
    return dumper.represent_dict(dict(m))


_StackDumper.add_multi_representer(np.floating, _represent_np_float)
_StackDumper.add_multi_representer(np.integer, _represent_np_int)
_StackDumper.add_representer(MappingProxyType, _represent_mapping_proxy)


def _represent_any(dumper, data):
    # pint Quantities (only present if pint was imported) as '5.3 nm' strings
    if is_quantity(data):
        return _represent_quantity(dumper, data)
    return dumper.represent_undefined(data)


_StackDumper.add_multi_representer(object, _represent_any)


def _no_aliases(self, data):  # write every layer out in full
    return True


_StackDumper.ignore_aliases = _no_aliases


def dump_stack_yaml(raw: Mapping) -> str:
    """Write a stack mapping (e.g. a modified :attr:`Stack.raw`) as YAML text.

    Quantities stay strings (``'5.3 nm'``); pint Quantities are written as
    such strings; key order is kept; layers without nested mappings are
    written on one line each.  Loading the text gives back an equal mapping.
    """
    return yaml.dump(raw, Dumper=_StackDumper, sort_keys=False, default_flow_style=None,
                     allow_unicode=True, width=100)
