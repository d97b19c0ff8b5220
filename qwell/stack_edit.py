"""Design parameters of a stack, and the one writer that changes them.

A *design parameter* is addressed by a path:

``LAYER.thickness``
    Thickness of a written layer [nm].  Inside a repeat block the named
    layer changes in every period (the block is written once).
``LAYER.x``, ``LAYER.y``
    Composition of a uniform alloy layer (dimensionless): ``x`` as the
    materials module reads the formula (e.g. the Al fraction of
    ``Al0.3Ga0.7As``), ``y`` the second fraction of a quaternary.
``field``
    The stack's uniform field [kV/cm].
``temperature``
    The stack temperature [K].

``LAYER`` is a layer's written ``name``; an unnamed layer outside repeat
blocks can be addressed by its display label ``L<n>``.  All values are plain
floats in the internal units above; pint is used only at the command line.

:func:`apply_parameters` is the only code in qwell that changes a stack's
layer thickness, composition, field or temperature: it writes the values into
a copy of :attr:`Stack.raw` and checks the edited layers with the loader's own
validation (:func:`qwell.stack.layer_fields`, or the whole mapping with
:func:`qwell.stack.stack_from_mapping`).
"""

from __future__ import annotations

import copy
import dataclasses
import difflib
import math
from dataclasses import dataclass
from typing import Mapping

from . import materials
from .errors import ParameterError, QwellError, StackError
from .formula import format_formula, same_sublattice_keys
from .stack import (MAX_FIELD_KV_PER_CM, MAX_TEMPERATURE_K, MAX_TOTAL_THICKNESS_NM, Stack,
                    layer_fields, stack_from_mapping)

__all__ = ["Parameter", "KINDS", "parameters", "get_parameter", "apply_parameters"]

#: Parameter kind -> (unit of the value, sensitivity unit, engineering step in the value's unit).
KINDS = {
    "thickness": ("nm", "nm/ML", None),     # the step is the layer's monolayer
    "x": ("fraction", "nm/0.01", 0.01),
    "y": ("fraction", "nm/0.01", 0.01),
    "field": ("kV/cm", "nm/(kV/cm)", 1.0),
    "temperature": ("K", "nm/K", 1.0),
}


@dataclass(frozen=True)
class Parameter:
    """A design parameter of a stack.

    Attributes
    ----------
    path : str
        ``'well.thickness'``, ``'barrier.x'``, ``'field'``, ``'temperature'``.
    kind : {'thickness', 'x', 'y', 'field', 'temperature'}
    layer : str or None
        Written layer name (or ``L<n>`` label) for layer parameters.
    unit : str
        Unit of values: 'nm', 'fraction', 'kV/cm' or 'K'.
    value : float
        Current value in ``unit``.
    monolayer_nm : float or None
        Monolayer (a/2) of the layer's material [nm] (thickness only).
    family : str or None
        Alloy family of a composition parameter.
    composition : Mapping or None
        Full composition of the layer's material (composition parameters).
    sensitivity_unit : str
        Unit of the wavelength sensitivity, e.g. 'nm/ML'.
    sensitivity_step : float
        Engineering step in ``unit`` (one monolayer, 0.01, 1 kV/cm, 1 K).
    """

    path: str
    kind: str
    layer: str | None
    unit: str
    value: float
    monolayer_nm: float | None = None
    family: str | None = None
    composition: Mapping | None = None
    sensitivity_unit: str = ""
    sensitivity_step: float = 1.0

    def check(self, value: float) -> float:
        """Return ``value`` as float if it is valid for this parameter.

        Raises
        ------
        ParameterError
            Non-finite, a thickness <= 0, a composition outside [0, 1] (or a
            quaternary sublattice above 1), a temperature <= 0.
        """
        try:
            v = float(value)
        except (TypeError, ValueError):
            raise ParameterError(f"{self.path} = {value!r}: expected a number in "
                                 f"{self.unit}") from None
        if not math.isfinite(v):
            raise ParameterError(f"{self.path} = {value!r}: expected a finite number")
        if self.kind == "thickness" and not v > 0:
            raise ParameterError(f"{self.path} = {v:.6g} nm is invalid: a thickness must be > 0 nm")
        if self.kind in ("x", "y"):
            if not 0.0 <= v <= 1.0:
                raise ParameterError(f"{self.path} = {v:.6g} is invalid: a composition must lie "
                                     "in [0, 1]")
            same = self._same_sublattice()
            total = v + sum(float(self.composition[k]) for k in same)
            if total > 1.0 + 1e-12:
                raise ParameterError(f"{self.path} = {v:.6g} is invalid: with "
                                     + ", ".join(f"{k} = {self.composition[k]:.6g}" for k in same)
                                     + f" the sublattice fractions sum to {total:.6g} > 1")
        if self.kind == "temperature" and not 0 < v <= MAX_TEMPERATURE_K:
            raise ParameterError(f"{self.path} = {v:.6g} K is invalid: a temperature must be > 0 K "
                                 f"and at most {MAX_TEMPERATURE_K:g} K")
        if self.kind == "field" and abs(v) > MAX_FIELD_KV_PER_CM:
            raise ParameterError(f"{self.path} = {v:.6g} kV/cm is invalid: beyond "
                                 f"±{MAX_FIELD_KV_PER_CM:g} kV/cm")
        return v

    def _same_sublattice(self) -> list:
        """Other composition keys of this layer on the same sublattice."""
        if not self.composition:
            return []
        return same_sublattice_keys(self.family, self.kind, self.composition)

    @property
    def limits(self) -> tuple[float, float]:
        """Valid range (open at 0 for thickness and temperature)."""
        if self.kind in ("x", "y"):
            return 0.0, 1.0
        if self.kind == "field":
            return -math.inf, math.inf
        return 0.0, math.inf

    @property
    def composition_max(self) -> float:
        """Largest value of a composition that keeps its sublattice at most 1 (others fixed)."""
        return 1.0 - sum(float(self.composition[k]) for k in self._same_sublattice())

    def describe(self, value: float) -> str:
        """``'well.thickness = 4.6 nm'`` style text."""
        unit = "" if self.unit == "fraction" else f" {self.unit}"
        return f"{self.path} = {value:.6g}{unit}"


# ---------------------------------------------------------------------------
# reading the parameters of a stack
# ---------------------------------------------------------------------------
def _layer_lookup(stack: Stack) -> dict:
    """Layer key -> first expanded Layer (written names, and labels of unnamed top layers)."""
    out = {}
    for layer in stack.layers:
        if layer.name is not None:
            out.setdefault(layer.name, layer)
        elif layer.repeat_block is None:
            out[layer.label] = layer
    return out


def _monolayer_of(stack: Stack, layer) -> float | None:
    try:
        if layer.grade is None:
            mat = stack.material_of(layer)
        else:
            mat = stack.material_set.get_material(layer.grade.start, stack.temperature_K,
                                                  dict(stack.user_materials) or None)
    except QwellError:
        return None
    return mat.monolayer_nm


def _composition_of(stack: Stack, layer):
    """(family, composition) of a uniform alloy layer, or None."""
    if layer.grade is not None or layer.material is None:
        return None
    if stack.user_materials and layer.material in stack.user_materials:
        return None
    try:
        family, comp = materials.parse_formula(layer.material)
    except QwellError:
        return None
    if not comp:
        return None
    return family, dict(comp)


_PARAM_CACHE: dict = {}


def parameters(stack: Stack) -> dict:
    """All design parameters of ``stack``: path -> :class:`Parameter`, in stack order.

    Examples
    --------
    >>> from qwell.stack import load_stack
    >>> params = parameters(load_stack("layers/lwir-detector.yaml"))
    >>> params["well.thickness"].unit
    'nm'
    """
    hit = _PARAM_CACHE.get(id(stack))
    if hit is not None and hit[0] is stack:
        return dict(hit[1])
    out = _parameters(stack)
    if len(_PARAM_CACHE) >= 16:
        _PARAM_CACHE.clear()
    _PARAM_CACHE[id(stack)] = (stack, out)  # keeps the stack alive: the id stays unique
    return dict(out)


def _parameters(stack: Stack) -> dict:
    out = {}
    for key, layer in _layer_lookup(stack).items():
        ml = _monolayer_of(stack, layer)
        out[f"{key}.thickness"] = Parameter(
            path=f"{key}.thickness", kind="thickness", layer=key, unit="nm",
            value=float(layer.thickness_nm), monolayer_nm=ml,
            sensitivity_unit="nm/ML" if ml else "nm/nm", sensitivity_step=ml or 1.0)
        fc = _composition_of(stack, layer)
        if fc is not None:
            family, comp = fc
            for k in ("x", "y"):
                if k in comp:
                    out[f"{key}.{k}"] = Parameter(
                        path=f"{key}.{k}", kind=k, layer=key, unit="fraction",
                        value=float(comp[k]), family=family, composition=comp,
                        sensitivity_unit="nm/0.01", sensitivity_step=0.01)
    out["field"] = Parameter(path="field", kind="field", layer=None, unit="kV/cm",
                             value=float(stack.field_kV_per_cm), sensitivity_unit="nm/(kV/cm)")
    out["temperature"] = Parameter(path="temperature", kind="temperature", layer=None, unit="K",
                                   value=float(stack.temperature_K), sensitivity_unit="nm/K")
    return out


def get_parameter(stack: Stack, path: str) -> Parameter:
    """The :class:`Parameter` at ``path``.

    Raises
    ------
    ParameterError
        Unknown path; the message lists every valid path of the stack.
    """
    params = parameters(stack)
    if isinstance(path, str) and path.strip() in params:
        return params[path.strip()]
    close = difflib.get_close_matches(str(path), list(params), n=1, cutoff=0.6)
    hint = f" (did you mean {close[0]!r}?)" if close else ""
    raise ParameterError(f"unknown parameter {path!r}{hint}; valid parameters: "
                         + ", ".join(params))


# ---------------------------------------------------------------------------
# writing parameters
# ---------------------------------------------------------------------------
def _value_text(v: float) -> str:
    # repr is the shortest text that reads back as the same float
    return repr(float(v))


def _raw_entries(raw) -> tuple[dict, dict]:
    """(name -> raw layer mapping, unnamed top-level label -> raw layer mapping)."""
    named: dict = {}
    labelled: dict = {}
    layers = raw.get("layers") if isinstance(raw, Mapping) else None
    if not isinstance(layers, list):
        return named, labelled

    def size(entry) -> int:
        if isinstance(entry, Mapping) and "repeat" in entry:
            return int(entry["repeat"]) * sum(size(e) for e in entry["layers"])
        return 1

    def walk(entries):
        for e in entries:
            if isinstance(e, Mapping) and "repeat" in e:
                walk(e["layers"])
            elif isinstance(e, Mapping) and e.get("name") is not None:
                named[str(e["name"])] = e

    walk(layers)
    idx = 0
    for e in layers:
        if isinstance(e, Mapping) and "repeat" not in e and e.get("name") is None:
            labelled[f"L{idx + 1}"] = e
        idx += size(e)
    return named, labelled


def _expanded_entries(entries, out: list) -> list:
    """The written layer mapping of every expanded layer, in growth order (repeats unrolled)."""
    for e in entries:
        if "repeat" in e:
            for _ in range(int(e["repeat"])):
                _expanded_entries(e["layers"], out)
        else:
            out.append(e)
    return out


def _rebuild(stack: Stack, raw: dict, changed: Mapping, field_kV: float):
    """The edited stack, re-checking only the changed layer entries; None to re-read it all.

    Each changed written entry is checked and built by the loader's own
    per-layer code (:func:`qwell.stack.layer_fields`, in the context of the
    stack's temperature and user materials) and replaces every expanded copy
    of it; the other layers are kept, without file marks (line numbers,
    digest), as :func:`qwell.stack.stack_from_mapping` builds them.  Any
    error, or a total thickness at the stack limit, returns None: re-reading
    the whole mapping then gives the loader's message with its key path.
    """
    try:
        built = {key: layer_fields(stack, entry) for key, entry in changed.items()}
    except QwellError:
        return None
    entries = _expanded_entries(raw["layers"], [])
    if len(entries) != len(stack.layers):
        return None
    layers = []
    for layer, entry in zip(stack.layers, entries):
        fields = built.get(id(entry))
        if fields is not None:
            layers.append(dataclasses.replace(layer, **fields))
        elif layer.line is not None:
            layers.append(dataclasses.replace(layer, line=None))
        else:
            layers.append(layer)
    if math.fsum(layer.thickness_nm for layer in layers) > MAX_TOTAL_THICKNESS_NM * (1 - 1e-9):
        return None
    repeats = tuple(r if r.line is None else dataclasses.replace(r, line=None)
                    for r in stack.repeats)
    return dataclasses.replace(stack, layers=tuple(layers), repeats=repeats, raw=raw,
                               sha256=None, field_kV_per_cm=float(field_kV))


def apply_parameters(stack: Stack, values: Mapping[str, float], *, fast: bool = True) -> Stack:
    """A new stack with the parameters set (values in internal units).

    The stack's mapping (:attr:`Stack.raw`) is deep-copied and the values
    are written into it (thickness as ``'<v> nm'``, compositions by
    rewriting the formula with :func:`qwell.formula.format_formula`,
    ``field`` in kV/cm, ``temperature`` in K); values are written with
    ``repr``, so they read back as the same floats.  The result is the stack
    :func:`qwell.stack.stack_from_mapping` builds from the edited mapping.

    With ``fast=True`` (default) only the edited layer entries are checked
    again, by the loader's per-layer code (:func:`qwell.stack.layer_fields`);
    a temperature change (every material changes) and ``fast=False``
    re-read the whole mapping.

    Raises
    ------
    ParameterError
        Unknown path (lists the valid ones) or an invalid value (names it).

    Examples
    --------
    >>> from qwell.stack import load_stack
    >>> stack = load_stack("layers/lwir-detector.yaml")
    >>> apply_parameters(stack, {"well.thickness": 6.0}).layer("well")[0].thickness_nm
    6.0
    """
    params = parameters(stack)
    checked = []
    for path, value in dict(values).items():
        p = params.get(path)
        if p is None:
            get_parameter(stack, path)  # raises with the list
        checked.append((p, p.check(value)))
    raw = copy.deepcopy(dict(stack.raw))
    named, labelled = _raw_entries(raw)
    compositions: dict = {}
    changed: dict = {}
    field_kV = stack.field_kV_per_cm
    whole = not fast
    for p, v in checked:
        if p.kind == "field":
            raw["field"] = f"{_value_text(v)} kV/cm"
            field_kV = v
        elif p.kind == "temperature":
            raw["temperature"] = f"{_value_text(v)} K"
            whole = True
        else:
            entry = named.get(p.layer, labelled.get(p.layer))
            if entry is None:
                raise ParameterError(f"{p.path}: layer {p.layer!r} not found in the stack mapping")
            changed[id(entry)] = entry
            if p.kind == "thickness":
                entry["thickness"] = f"{_value_text(v)} nm"
            else:
                comp = compositions.setdefault(p.layer, (p.family, dict(p.composition), entry))
                comp[1][p.kind] = v
    for family, comp, entry in compositions.values():
        entry["material"] = format_formula(family, comp)
    if not whole:
        quick = _rebuild(stack, raw, changed, field_kV)
        if quick is not None:
            return quick
    try:
        return stack_from_mapping(raw, file=stack.path)
    except StackError as exc:
        what = ", ".join(p.describe(v) for p, v in checked)
        raise ParameterError(f"{what}: {exc}") from None
