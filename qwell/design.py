"""Design workflows: parameters by path, sizing, sweeps and growth tolerances.

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

Every evaluation of a design goes through one function,
:func:`design_point`: the stack's parsed mapping (:attr:`Stack.raw`) is
copied, the parameters are written into it and the copy is validated again
with :func:`qwell.stack.stack_from_mapping`; the result is solved with
:func:`qwell.levels.solve_stack` (exact method).  Sweeps, sizing, tolerance
and Monte Carlo runs all use it, locally or on worker processes, so a sweep
point is the single-design solve at that value, bit for bit.

Wavelength sensitivities are given in engineering units: nm of wavelength
per monolayer (thickness; per nm when the layer has no lattice constant), per
0.01 of composition, per kV/cm and per K.
"""

from __future__ import annotations

import copy
import math
import re
import warnings
from dataclasses import dataclass, field
from functools import lru_cache, partial
from typing import Mapping

import numpy as np

from .errors import ConvergenceError, ParameterError, QwellError, QwellWarning, StackError, UnitError
from .units import HC_EV_UM, spectral_to_eV

__all__ = [
    "Parameter",
    "DesignPoint",
    "SizeResult",
    "MonolayerOption",
    "SweepResult",
    "Contribution",
    "MonteCarloSummary",
    "ToleranceResult",
    "parameters",
    "get_parameter",
    "apply_parameters",
    "format_formula",
    "design_point",
    "evaluate_many",
    "bands_for_transitions",
    "size",
    "sweep",
    "tolerance",
    "parse_parameter_value",
    "KINDS",
]

#: Parameter kind -> (unit of the value, sensitivity unit, engineering step in the value's unit).
KINDS = {
    "thickness": ("nm", "nm/ML", None),     # the step is the layer's monolayer
    "x": ("fraction", "nm/0.01", 0.01),
    "y": ("fraction", "nm/0.01", 0.01),
    "field": ("kV/cm", "nm/(kV/cm)", 1.0),
    "temperature": ("K", "nm/K", 1.0),
}

# Steps of the "local" (central-difference) sensitivity, in the value's unit.
_LOCAL_STEP = {"thickness": 0.01, "x": 1e-3, "y": 1e-3, "field": 0.1, "temperature": 0.1}

_GROUP_III = ("B", "Al", "Ga", "In", "Tl")
_GROUP_V = ("N", "P", "As", "Sb", "Bi")
_BAND_OF_PREFIX = {"e": "conduction", "hh": "heavy_hole", "lh": "light_hole"}
_LABEL_RE = re.compile(r"^(e|hh|lh)(\d+)$")


# ---------------------------------------------------------------------------
# formulas
# ---------------------------------------------------------------------------
def _materials():
    from . import materials
    return materials


def _family_elements(family: str) -> list[str]:
    elements = re.findall(r"[A-Z][a-z]?", family)
    if "".join(elements) != family or not elements:
        raise ParameterError(f"cannot split the material family {family!r} into elements")
    return elements


def _sublattices(elements):
    iii = [e for e in elements if e in _GROUP_III]
    v = [e for e in elements if e in _GROUP_V]
    if len(iii) + len(v) != len(elements) or not iii or not v:
        raise ParameterError(f"{''.join(elements)!r} is not a III-V family this writer knows")
    return iii, v


# distinct binary fractions on each sublattice (group III, group V), exact in floating point
_PROBE = {("III", 2): (0.125, 0.875), ("III", 3): (0.125, 0.25, 0.625),
          ("V", 2): (0.3125, 0.6875), ("V", 3): (0.0625, 0.1875, 0.75)}


@lru_cache(maxsize=64)
def _composition_keys(family: str) -> tuple:
    """((key, element), ...): which element fraction each composition key is.

    Found by asking the materials module to read a probe formula with distinct
    fractions, so the writer follows the reader's conventions exactly.
    """
    elements = _family_elements(family)
    iii, v = _sublattices(elements)
    fractions = {}
    for group, lattice in (("III", iii), ("V", v)):
        if len(lattice) > 1:
            if (group, len(lattice)) not in _PROBE:
                raise ParameterError(f"{family}: more than three elements on one sublattice")
            fractions.update(zip(lattice, _PROBE[(group, len(lattice))]))
    if not fractions:
        return ()
    probe = "".join(e + (repr(fractions[e]) if e in fractions else "") for e in elements)
    fam, comp = _materials().parse_formula(probe)
    if fam != family:
        raise ParameterError(f"probe formula {probe!r} read as family {fam!r}, not {family!r}")
    out = []
    for key, val in comp.items():
        match = [e for e, f in fractions.items() if abs(f - float(val)) < 1e-12]
        if len(match) != 1:
            raise ParameterError(f"{family}: cannot tell which element composition {key!r} is")
        out.append((key, match[0]))
    return tuple(out)


def _fraction_text(v: float) -> str:
    return repr(float(v))


def format_formula(family: str, composition: Mapping[str, float]) -> str:
    """Write a material formula from ``(family, composition)``.

    The inverse of :func:`qwell.materials.parse_formula`: element order
    follows the family name (``AlGaAs`` -> ``Al0.3Ga0.7As``), the composition
    keys mean what the materials module reads them as, and the remaining
    fraction of each mixed sublattice is one minus the others.

    Parameters
    ----------
    family : str
        Alloy family, e.g. ``'AlGaAs'``, ``'InGaAsP'``, ``'InGaAlAs'``; a
        binary returns itself.
    composition : Mapping[str, float]
        E.g. ``{'x': 0.3}``; every fraction in [0, 1].

    Raises
    ------
    ParameterError
        Unknown keys, fractions outside [0, 1] or a sublattice summing above 1.
    """
    elements = _family_elements(family)
    iii, v = _sublattices(elements)
    keys = dict(_composition_keys(family))
    unknown = set(composition) - set(keys)
    if unknown:
        raise ParameterError(f"{family}: unknown composition key(s) {sorted(unknown)}; "
                             f"expected {sorted(keys) or 'none (a binary)'}")
    missing = set(keys) - set(composition)
    if missing:
        raise ParameterError(f"{family}: composition needs {sorted(missing)}")
    fractions = {}
    for key, el in keys.items():
        val = float(composition[key])
        if not (math.isfinite(val) and 0.0 <= val <= 1.0):
            raise ParameterError(f"{family}: {key} = {val!r} is outside [0, 1]")
        fractions[el] = val
    for lattice in (iii, v):
        if len(lattice) < 2:
            continue
        free = [e for e in lattice if e not in fractions]
        if len(free) != 1:
            raise ParameterError(f"{family}: composition does not fix the {'/'.join(lattice)} "
                                 "sublattice")
        rest = 1.0 - math.fsum(fractions[e] for e in lattice if e in fractions)
        if rest < -1e-12:
            raise ParameterError(f"{family}: the {'/'.join(lattice)} fractions sum to "
                                 f"{1.0 - rest:.6g} > 1")
        fractions[free[0]] = max(rest, 0.0)
    keyed = set(keys.values())
    # keyed fractions exactly (repr reads back as the same float); the remainder
    # of a sublattice rounded to 12 digits (1 - 0.59 -> '0.41', not '0.41000000000000003')
    return "".join(e + ((_fraction_text(fractions[e]) if e in keyed else f"{fractions[e]:.12g}")
                        if e in fractions else "") for e in elements)


# ---------------------------------------------------------------------------
# parameters
# ---------------------------------------------------------------------------
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
            other = [k for k in (self.composition or {}) if k != self.kind]
            keys = dict(_composition_keys(self.family))
            same = [k for k in other if _same_sublattice(self.family, keys[k], keys[self.kind])]
            total = v + sum(float(self.composition[k]) for k in same)
            if total > 1.0 + 1e-12:
                raise ParameterError(f"{self.path} = {v:.6g} is invalid: with "
                                     + ", ".join(f"{k} = {self.composition[k]:.6g}" for k in same)
                                     + f" the sublattice fractions sum to {total:.6g} > 1")
        from .stack import MAX_FIELD_KV_PER_CM, MAX_TEMPERATURE_K
        if self.kind == "temperature" and not 0 < v <= MAX_TEMPERATURE_K:
            raise ParameterError(f"{self.path} = {v:.6g} K is invalid: a temperature must be > 0 K "
                                 f"and at most {MAX_TEMPERATURE_K:g} K")
        if self.kind == "field" and abs(v) > MAX_FIELD_KV_PER_CM:
            raise ParameterError(f"{self.path} = {v:.6g} kV/cm is invalid: beyond "
                                 f"±{MAX_FIELD_KV_PER_CM:g} kV/cm")
        return v

    @property
    def limits(self) -> tuple[float, float]:
        """Valid range (open at 0 for thickness and temperature)."""
        if self.kind in ("x", "y"):
            return 0.0, 1.0
        if self.kind == "field":
            return -math.inf, math.inf
        return 0.0, math.inf

    def describe(self, value: float) -> str:
        """``'well.thickness = 4.6 nm'`` style text."""
        unit = "" if self.unit == "fraction" else f" {self.unit}"
        return f"{self.path} = {value:.6g}{unit}"


def _same_sublattice(family, el_a, el_b) -> bool:
    iii, v = _sublattices(_family_elements(family))
    return (el_a in iii) == (el_b in iii)


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


def _layer_lookup(stack):
    """Layer key -> first expanded Layer (written names, and labels of unnamed top layers)."""
    out = {}
    for layer in stack.layers:
        if layer.name is not None:
            out.setdefault(layer.name, layer)
        elif layer.repeat_block is None:
            out[layer.label] = layer
    return out


def _monolayer_of(stack, layer) -> float | None:
    try:
        if layer.grade is None:
            mat = stack.material_of(layer)
        else:
            mat = _materials().get_material(layer.grade.start, stack.temperature_K,
                                            dict(stack.user_materials) or None)
    except QwellError:
        return None
    return getattr(mat, "monolayer_nm", None)


def _composition_of(stack, layer):
    """(family, composition) of a uniform alloy layer, or None."""
    if layer.grade is not None or layer.material is None:
        return None
    if stack.user_materials and layer.material in stack.user_materials:
        return None
    try:
        family, comp = _materials().parse_formula(layer.material)
    except QwellError:
        return None
    if not comp:
        return None
    return family, dict(comp)


_PARAM_CACHE: dict = {}


def parameters(stack) -> dict:
    """All design parameters of ``stack``: path -> :class:`Parameter`, in stack order."""
    hit = _PARAM_CACHE.get(id(stack))
    if hit is not None and hit[0] is stack:
        return dict(hit[1])
    out = _parameters(stack)
    if len(_PARAM_CACHE) >= 16:
        _PARAM_CACHE.clear()
    _PARAM_CACHE[id(stack)] = (stack, out)  # keeps the stack alive: the id stays unique
    return dict(out)


def _parameters(stack) -> dict:
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


def get_parameter(stack, path: str) -> Parameter:
    """The :class:`Parameter` at ``path``.

    Raises
    ------
    ParameterError
        Unknown path; the message lists every valid path of the stack.
    """
    params = parameters(stack)
    if isinstance(path, str) and path.strip() in params:
        return params[path.strip()]
    import difflib

    close = difflib.get_close_matches(str(path), list(params), n=1, cutoff=0.6)
    hint = f" (did you mean {close[0]!r}?)" if close else ""
    raise ParameterError(f"unknown parameter {path!r}{hint}; valid parameters: "
                         + ", ".join(params))


def _value_text(v: float) -> str:
    # repr is the shortest text that reads back as the same float
    return repr(float(v))


@lru_cache(maxsize=1024)
def _spec_in_monolayers(spec: str) -> bool:
    from .units import parse_quantity

    try:
        return bool(parse_quantity(spec).check("[monolayer]"))
    except QwellError:
        return False


def _fast_apply(stack, checked, raw, formulas):
    """The re-validated stack without re-reading the mapping, where that is exact.

    For thickness changes of layers without doping (doping positions are
    checked against the thickness), composition changes of uniform layers
    without per-layer overrides (and, when the thickness is written in
    monolayers, without doping) and the field: the new
    :class:`~qwell.stack.Stack` is the old one with the changed layers, the
    new ``raw`` and no file marks (line numbers, digest), field for field
    equal to what :func:`qwell.stack.stack_from_mapping` builds from ``raw``
    (the material is looked up with :meth:`Stack.material_of`, a thickness in
    ML converted with :func:`qwell.units.thickness_nm`, as the loader does).
    Anything else, or any error, returns None (full re-validation).
    """
    import dataclasses

    from .stack import MAX_TOTAL_THICKNESS_NM
    from .units import thickness_nm

    new_thickness = {}
    field_kV = stack.field_kV_per_cm
    for p, v in checked:
        if p.kind == "thickness":
            new_thickness[p.layer] = v
        elif p.kind == "field":
            field_kV = v
        elif p.kind not in ("x", "y"):
            return None
    resolved: dict = {}
    layers = []
    try:
        for layer in stack.layers:
            key = layer.name if layer.name is not None else (
                layer.label if layer.repeat_block is None else None)
            changes = {}
            if key in formulas:
                if layer.overrides or layer.grade is not None:
                    return None
                changes["material"] = formulas[key]
                if key not in new_thickness and _spec_in_monolayers(layer.thickness_spec):
                    if layer.doping is not None:
                        return None
                    if key not in resolved:
                        mat = stack.material_of(dataclasses.replace(layer, material=formulas[key]))
                        resolved[key] = thickness_nm(layer.thickness_spec, mat.monolayer_nm)
                    changes["thickness_nm"] = resolved[key]
                elif key not in resolved:
                    stack.material_of(dataclasses.replace(layer, material=formulas[key]))
                    resolved[key] = None  # the material exists
            if key in new_thickness:
                if layer.doping is not None:
                    return None
                v = new_thickness[key]
                changes.update(thickness_nm=v, thickness_spec=f"{_value_text(v)} nm")
            if changes or layer.line is not None:
                layers.append(dataclasses.replace(layer, line=None, **changes))
            else:
                layers.append(layer)
    except (QwellError, TypeError, ValueError):
        return None
    if math.fsum(layer.thickness_nm for layer in layers) > MAX_TOTAL_THICKNESS_NM:
        return None
    repeats = tuple(r if r.line is None else dataclasses.replace(r, line=None)
                    for r in stack.repeats)
    return dataclasses.replace(stack, layers=tuple(layers), repeats=repeats, raw=raw,
                               sha256=None, field_kV_per_cm=float(field_kV))


def apply_parameters(stack, values: Mapping[str, float], *, fast: bool = True):
    """A new stack with the parameters set (values in internal units).

    The stack's mapping (:attr:`Stack.raw`) is deep-copied, the values are
    written into it (thickness as ``'<v> nm'``, compositions by rewriting
    the formula, ``field`` in kV/cm, ``temperature`` in K) and the copy is
    checked again with :func:`qwell.stack.stack_from_mapping`.  Values are
    written with ``repr``, so they read back as the same floats.

    With ``fast=True`` (default) thickness, composition and field changes
    skip re-reading the mapping when that gives the same stack (see :func:`_fast_apply`;
    the tests check the equality); ``fast=False`` always re-validates.

    Raises
    ------
    ParameterError
        Unknown path (lists the valid ones) or an invalid value (names it).
    """
    from .stack import stack_from_mapping

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
    for p, v in checked:
        if p.kind == "field":
            raw["field"] = f"{_value_text(v)} kV/cm"
        elif p.kind == "temperature":
            raw["temperature"] = f"{_value_text(v)} K"
        else:
            entry = named.get(p.layer, labelled.get(p.layer))
            if entry is None:
                raise ParameterError(f"{p.path}: layer {p.layer!r} not found in the stack mapping")
            if p.kind == "thickness":
                entry["thickness"] = f"{_value_text(v)} nm"
            else:
                comp = compositions.setdefault(p.layer, (p.family, dict(p.composition), entry))
                comp[1][p.kind] = v
    formulas = {}
    for layer_key, (family, comp, entry) in compositions.items():
        entry["material"] = formulas[layer_key] = format_formula(family, comp)
    if fast:
        quick = _fast_apply(stack, checked, raw, formulas)
        if quick is not None:
            return quick
    try:
        return stack_from_mapping(raw, file=stack.path)
    except StackError as exc:
        what = ", ".join(p.describe(v) for p, v in checked)
        raise ParameterError(f"{what}: {exc}") from None


# ---------------------------------------------------------------------------
# evaluating designs
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class DesignPoint:
    """States and transitions of one design (exact solver).

    Attributes
    ----------
    values : tuple of (path, value)
        The parameters applied (internal units).
    states : tuple of (label, energy_eV, bound)
        Every state of the solved bands; band-diagram energies [eV].
    transitions : tuple of (name, energy_eV, wavelength_um)
        Every transition of the solution.
    notes : tuple of str
        Warnings raised while solving (re-emitted by the caller).
    """

    values: tuple
    states: tuple
    transitions: tuple
    notes: tuple = ()
    warning_categories: tuple = field(default=(), repr=False)

    def state_energy(self, label: str) -> float:
        """Energy of a state [eV], NaN if the design has no such state."""
        for lab, e, _ in self.states:
            if lab == label:
                return e
        return math.nan

    def transition_energy(self, name: str) -> float:
        """Transition energy [eV], NaN if absent."""
        for n, e, _ in self.transitions:
            if n == name:
                return e
        return math.nan

    def wavelength(self, name: str) -> float:
        """Transition wavelength [um], NaN if absent."""
        for n, _, lam in self.transitions:
            if n == name:
                return lam
        return math.nan

    @property
    def transition_names(self) -> tuple:
        return tuple(t[0] for t in self.transitions)


def bands_for_transitions(transitions, extra=()) -> tuple:
    """Bands to solve for these transition names (conduction always included).

    Raises
    ------
    ParameterError
        A name not of the form ``e1-e2`` / ``e1-hh1`` / ``e1-lh1``.
    """
    from .bands import BAND_NAMES

    need = {"conduction"}
    for name in transitions or ():
        parts = str(name).split("-")
        if len(parts) != 2 or not all(_LABEL_RE.match(p) for p in parts):
            raise ParameterError(f"transition {name!r}: expected two state labels such as "
                                 "e1-e2, e1-hh1 or e1-lh1")
        for p in parts:
            need.add(_BAND_OF_PREFIX[_LABEL_RE.match(p).group(1)])
    for b in extra or ():
        if b not in BAND_NAMES:
            raise ParameterError(f"unknown band {b!r}; expected one of: " + ", ".join(BAND_NAMES))
        need.add(b)
    return tuple(b for b in BAND_NAMES if b in need)


def _solve_design(stack, bands, wavefunctions, needed=None):
    """Solve one design; with ``needed`` state labels, skip the resonance search when
    every needed state is truly bound (quasi-bound states lie above all bound ones,
    so the bound labels do not change) and fall back to the full solve otherwise."""
    from .levels import solve_profile, stack_profile

    prof = stack_profile(stack)
    sol = None
    if needed:
        sol = solve_profile(prof, bands=bands, method="exact", transitions=True,
                            wavefunctions=wavefunctions, quasi_bound=False)
        have = {s.label for s in sol.states}
        if not set(needed) <= have:
            sol = None
    if sol is None:
        sol = solve_profile(prof, bands=bands, method="exact", transitions=True,
                            wavefunctions=wavefunctions)
    states = tuple((s.label, float(s.energy_eV), bool(s.bound)) for s in sol.states)
    trans = tuple((t.name, float(t.energy_eV), float(t.wavelength_um)) for t in sol.transitions)
    return states, trans


def design_point(stack, values: Mapping[str, float] | None = None, *, bands=("conduction",),
                 wavefunctions: bool = False, needed=None) -> DesignPoint:
    """Solve one design: ``stack`` with ``values`` applied (see :func:`apply_parameters`).

    This is the single evaluation used by every workflow here.  The stack is
    always rebuilt from its mapping (also for no values), so a point computed
    on a worker process from the same mapping is identical.

    Parameters
    ----------
    stack : Stack
    values : Mapping[str, float], optional
        Parameter path -> value in internal units.
    bands : sequence of str
        Bands to solve (exact method); transitions are those of the solution.
    wavefunctions : bool
        Compute wavefunctions (and with them dipoles); energies do not depend
        on it.
    needed : sequence of str, optional
        State labels the caller needs (e.g. ``("e1", "hh1")``); when all are
        bound, quasi-bound resonances are not searched (faster; the other
        results are unchanged).
    """
    values = dict(values or {})
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        s = apply_parameters(stack, values)
        states, trans = _solve_design(s, tuple(bands), wavefunctions,
                                      tuple(needed) if needed else None)
    notes, cats = [], []
    for w in caught:
        msg = str(w.message)
        if msg not in notes:
            notes.append(msg)
            cats.append(w.category if issubclass(w.category, QwellWarning) else None)
    return DesignPoint(values=tuple(values.items()), states=states, transitions=trans,
                       notes=tuple(notes), warning_categories=tuple(cats))


_BASE_CACHE: dict = {}


def _eval_chunk(payload, items):
    """Worker: evaluate a chunk of parameter dicts on the stack rebuilt from its mapping."""
    raw, file, bands, wavefunctions, needed = payload
    from .stack import stack_from_mapping

    key = (id(raw), file)
    base = _BASE_CACHE.get(key)
    if base is None or base[0] is not raw:
        _BASE_CACHE.clear()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _BASE_CACHE[key] = (raw, stack_from_mapping(raw, file=file))
        base = _BASE_CACHE[key]
    stack = base[1]
    return [design_point(stack, values, bands=bands, wavefunctions=wavefunctions, needed=needed)
            for values in items]


def _emit(points, stacklevel=3):
    seen = set()
    for p in points:
        for msg, cat in zip(p.notes, p.warning_categories):
            if cat is not None and msg not in seen:
                seen.add(msg)
                warnings.warn(msg, cat, stacklevel=stacklevel)


def evaluate_many(stack, value_sets, *, bands=("conduction",), wavefunctions: bool = False,
                  jobs=None, dask=None, dask_timeout_s: float | None = None,
                  progress: bool | None = None, label: str = "", needed=None) -> list:
    """:func:`design_point` for many parameter sets, in parallel where it pays.

    Parameters
    ----------
    value_sets : sequence of Mapping
        Parameter dicts (internal units).
    jobs, dask, dask_timeout_s, progress
        See :func:`qwell.parallel.map_chunked`.

    Returns
    -------
    list of DesignPoint
        In input order; identical whether run serially, on local processes
        or on a Dask cluster.  qwell warnings raised while solving are
        re-emitted once each.
    """
    from . import parallel

    raw = copy.deepcopy(dict(stack.raw))
    payload = (raw, stack.path, tuple(bands), bool(wavefunctions),
               tuple(needed) if needed else None)
    fn = partial(_eval_chunk, payload)
    kw = {}
    if dask_timeout_s is not None:
        kw["dask_timeout_s"] = dask_timeout_s
    points = parallel.map_chunked(fn, [dict(v) for v in value_sets], jobs=jobs, dask=dask,
                                  progress=progress, label=label, **kw)
    _emit(points)
    return points


def _check_transitions(point: DesignPoint, names, where: str):
    have = point.transition_names
    for n in names:
        if n not in have:
            raise ParameterError(f"transition {n!r} does not exist at {where}; available there: "
                                 + (", ".join(have) or "none"))


def _nan_if_none(v):
    return math.nan if v is None else float(v)


def _where(p: Parameter | None, v: float | None = None) -> str:
    if p is None:
        return "the start point"
    return f"the start point ({p.describe(p.value if v is None else v)})"


# ---------------------------------------------------------------------------
# sizing
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class MonolayerOption:
    """A whole-monolayer thickness near the sized value.

    Attributes
    ----------
    monolayers : int
    thickness_nm : float
    wavelength_um, energy_eV : float
        Of the sized transition; NaN if it does not exist there.
    """

    monolayers: int
    thickness_nm: float
    wavelength_um: float
    energy_eV: float


@dataclass(frozen=True)
class SizeResult:
    """Result of :func:`size`.

    Attributes
    ----------
    parameter : str
    unit : str
    value : float
        Sized value in ``unit``.
    transition : str
    target_energy_eV, target_wavelength_um : float
    energy_eV, wavelength_um : float
        Of the transition at ``value``.
    monolayer_options : tuple of MonolayerOption
        Whole monolayers below and above (thickness parameters only).
    bracket : tuple of float
        The bracket the root was found in.
    evaluations : int
        Designs solved.
    stack : Stack
        The sized stack.
    notes : tuple of str
    """

    parameter: str
    unit: str
    value: float
    transition: str
    target_energy_eV: float
    target_wavelength_um: float
    energy_eV: float
    wavelength_um: float
    monolayer_options: tuple = ()
    bracket: tuple = ()
    evaluations: int = 0
    stack: object = field(default=None, repr=False, compare=False)
    notes: tuple = ()

    @property
    def relative_error(self) -> float:
        """(E - E_target) / E_target."""
        return (self.energy_eV - self.target_energy_eV) / self.target_energy_eV

    def to_json(self) -> dict:
        def f(v):
            return None if v is None or not math.isfinite(v) else float(v)
        return {
            "parameter": self.parameter, "unit": self.unit, "value": self.value,
            "wavelength_um": f(self.wavelength_um), "energy_eV": f(self.energy_eV),
            "monolayer_options": [{"monolayers": o.monolayers, "thickness_nm": o.thickness_nm,
                                   "wavelength_um": f(o.wavelength_um)}
                                  for o in self.monolayer_options],
            "transition": self.transition, "target_energy_eV": self.target_energy_eV,
            "target_wavelength_um": self.target_wavelength_um,
            "relative_error": f(self.relative_error), "bracket": list(self.bracket),
            "evaluations": self.evaluations, "notes": list(self.notes),
        }


def _default_bounds(p: Parameter) -> tuple[float, float]:
    v = p.value
    if p.kind == "thickness":
        lo = max(0.2 * v, p.monolayer_nm or 0.1, 0.1)
        return min(lo, v), max(4.0 * v, v + 10.0)
    if p.kind in ("x", "y"):
        hi = 1.0
        if p.composition and len(p.composition) > 1:
            keys = dict(_composition_keys(p.family))
            same = [k for k in p.composition if k != p.kind
                    and _same_sublattice(p.family, keys[k], keys[p.kind])]
            hi = 1.0 - sum(float(p.composition[k]) for k in same)
        return 0.0, hi
    if p.kind == "field":
        return v - 100.0, v + 100.0
    return max(1.0, 0.25 * v), min(1500.0, 3.0 * v)


def _target_eV(target) -> float:
    if isinstance(target, str):
        return spectral_to_eV(target)
    try:
        from pint import Quantity
        if isinstance(target, Quantity):
            return spectral_to_eV(target)
    except ImportError:  # pragma: no cover
        pass
    t = float(target)
    if not (math.isfinite(t) and t > 0):
        raise ParameterError(f"target {target!r}: expected a positive photon energy in eV")
    return t


def _fmt_range(a, b, unit):
    u = "" if unit == "fraction" else f" {unit}"
    return f"{a:.4g}..{b:.4g}{u}"


def _existence_limit(stack, p, inside, outside, name, bands, evals, steps=30):
    """Bisect between a value where ``name`` exists and one where it does not."""
    a, b = inside, outside
    last_missing = None
    for _ in range(steps):
        mid = 0.5 * (a + b)
        pt = design_point(stack, {p.path: mid}, bands=bands)
        evals[0] += 1
        if name in pt.transition_names:
            a = mid
        else:
            b = mid
            last_missing = pt
        if abs(b - a) <= 1e-4 * max(abs(a), abs(b), 1e-3):
            break
    return a, last_missing


def _why_missing(name, point):
    if point is None:
        return f"{name} is not found"
    i, j = name.split("-")
    labels = [s[0] for s in point.states]
    gone = [lab for lab in (j, i) if lab not in labels]
    if gone:
        return f"{gone[0]} is not bound"
    return f"{name} is not found"


def size(stack, parameter: str, target_eV, transition: str = "e1-e2", *, bounds=None,
         bands=None, scan_points: int = 25, jobs=1, dask=None, dask_timeout_s=None,
         progress=None) -> SizeResult:
    """Find the parameter value that puts ``transition`` at the target photon energy.

    The transition energy is scanned over ``bounds`` (default: a wide range
    around the current value), a sign change of ``E - E_target`` closest to
    the current value is bracketed, and :func:`scipy.optimize.brentq` refines
    it on the exact solver (``xtol`` 1e-12 of the range).  The value is then
    rounded to 10 significant digits and the reported energy is solved at
    exactly that value (the stack :attr:`SizeResult.stack` holds).

    Parameters
    ----------
    stack : Stack
    parameter : str
        A parameter path (see :func:`parameters`).
    target_eV : float or str
        Photon energy [eV], or a spectral quantity such as ``'4.6 um'``,
        ``'270 meV'``, ``'2170 cm^-1'``, ``'65 THz'``.
    transition : str
        E.g. ``'e1-e2'`` or ``'e1-hh1'``.
    bounds : (float, float), optional
        Search range in the parameter's unit.

    Raises
    ------
    ParameterError
        Unknown parameter, a transition missing at the start point, invalid
        bounds, or a target out of reach (the message gives the reachable
        range and why it ends).
    """
    from scipy.optimize import brentq

    p = get_parameter(stack, parameter)
    e_target = _target_eV(target_eV)
    bands = bands_for_transitions([transition], bands)
    start = design_point(stack, {p.path: p.value}, bands=bands)
    _check_transitions(start, [transition], _where(p))
    evals = [1]
    lo, hi = bounds if bounds is not None else _default_bounds(p)
    lo, hi = float(lo), float(hi)
    if not lo < hi:
        raise ParameterError(f"{p.path}: search range {lo:.6g}..{hi:.6g} is empty; expected "
                             "from < to")
    for v in (lo, hi):
        if p.kind in ("thickness", "temperature") and not v > 0 or \
                p.kind in ("x", "y") and not 0.0 <= v <= 1.0:
            p.check(v)
    n = max(int(scan_points), 3)
    grid = np.unique(np.concatenate([np.linspace(lo, hi, n), [p.value] if lo <= p.value <= hi
                                     else []]))
    pts = evaluate_many(stack, [{p.path: float(v)} for v in grid], bands=bands, jobs=jobs,
                        dask=dask, dask_timeout_s=dask_timeout_s, progress=progress,
                        label="size scan")
    evals[0] += len(pts)
    energies = np.array([pt.transition_energy(transition) for pt in pts])
    f = energies - e_target
    finite = np.isfinite(f)
    brackets = [(k, k + 1) for k in range(len(grid) - 1)
                if finite[k] and finite[k + 1] and (f[k] == 0 or f[k] * f[k + 1] < 0)]
    lam_t = HC_EV_UM / e_target
    if not brackets:
        if not finite.any():
            raise ParameterError(f"{transition} does not exist anywhere in {p.path} "
                                 f"{_fmt_range(lo, hi, p.unit)}")
        emin, emax = float(np.nanmin(energies)), float(np.nanmax(energies))
        idx = np.flatnonzero(finite)
        # the end of the reachable range on the side of the target, and why it ends there
        k_ext = int(idx[np.argmax(energies[idx])] if e_target > emax
                    else idx[np.argmin(energies[idx])])
        reasons = []
        if k_ext == idx[0] and idx[0] > 0:
            lim, miss = _existence_limit(stack, p, grid[idx[0]], grid[idx[0] - 1], transition,
                                         bands, evals)
            reasons.append(f"{_why_missing(transition, miss)} below {p.describe(lim)}")
        elif k_ext == idx[-1] and idx[-1] < len(grid) - 1:
            lim, miss = _existence_limit(stack, p, grid[idx[-1]], grid[idx[-1] + 1], transition,
                                         bands, evals)
            reasons.append(f"{_why_missing(transition, miss)} beyond {p.describe(lim)}")
        elif k_ext in (0, len(grid) - 1):
            reasons.append(f"the search range ends at {p.describe(grid[k_ext])} "
                           "(widen it with --from/--to)")
        else:
            reasons.append(f"{transition} has its {'largest' if e_target > emax else 'smallest'} "
                           f"energy near {p.describe(grid[k_ext])}, inside the range")
        raise ParameterError(
            f"target {lam_t:.5g} um ({e_target:.5g} eV) is out of reach by varying {p.path} "
            f"over {_fmt_range(lo, hi, p.unit)}: {transition} spans "
            f"{HC_EV_UM / emax:.5g}..{HC_EV_UM / emin:.5g} um ({emin:.5g}..{emax:.5g} eV)"
            + ("; " + "; ".join(reasons) if reasons else ""))
    k0 = min(brackets, key=lambda b: abs(0.5 * (grid[b[0]] + grid[b[1]]) - p.value))
    a, b = float(grid[k0[0]]), float(grid[k0[1]])
    notes = []
    if len(brackets) > 1:
        notes.append(f"{len(brackets)} solutions in {_fmt_range(lo, hi, p.unit)}; took the one "
                     f"nearest the current value {p.describe(p.value)}")

    def fun(v):
        pt = design_point(stack, {p.path: v}, bands=bands)
        evals[0] += 1
        e = pt.transition_energy(transition)
        if not math.isfinite(e):
            raise ConvergenceError(f"{transition} vanished at {p.describe(v)} inside the bracket "
                                   f"{_fmt_range(a, b, p.unit)}")
        return e - e_target

    if f[k0[0]] == 0:
        root = a
    elif f[k0[1]] == 0:
        root = b
    else:
        root = brentq(fun, a, b, xtol=1e-12 * (hi - lo), rtol=8.9e-16, maxiter=200)
    value = float(f"{root:.10g}")
    value = min(max(value, a), b)
    final = design_point(stack, {p.path: value}, bands=bands)
    evals[0] += 1
    _emit([final], stacklevel=2)
    e = final.transition_energy(transition)
    if not abs(e - e_target) <= max(1e-6 * abs(e_target), 1e-7):
        # brentq closed in on a discontinuity, not a root: the label changed state there
        raise ParameterError(
            f"target {lam_t:.5g} um falls on a jump of the {transition} curve near "
            f"{p.describe(value)} ({HC_EV_UM / e:.5g} um there): the label passes to another "
            "state at that point (a resonance appears or leaves), so no design in "
            f"{_fmt_range(a, b, p.unit)} hits the target; see 'qwell sweep' over {p.path}")
    notes += _jump_notes(p, grid, {}, {transition: energies})
    options = []
    if p.kind == "thickness" and p.monolayer_nm:
        q = value / p.monolayer_nm
        ns = sorted({int(math.floor(q + 1e-9)), int(math.ceil(q - 1e-9))})
        for nml in ns:
            if nml < 1:
                continue
            t = nml * p.monolayer_nm
            pt = design_point(stack, {p.path: t}, bands=bands)
            evals[0] += 1
            options.append(MonolayerOption(monolayers=nml, thickness_nm=t,
                                           wavelength_um=pt.wavelength(transition),
                                           energy_eV=pt.transition_energy(transition)))
    return SizeResult(parameter=p.path, unit=p.unit, value=value, transition=transition,
                      target_energy_eV=e_target, target_wavelength_um=lam_t, energy_eV=e,
                      wavelength_um=final.wavelength(transition),
                      monolayer_options=tuple(options), bracket=(a, b), evaluations=evals[0],
                      stack=apply_parameters(stack, {p.path: value}), notes=tuple(notes))


# ---------------------------------------------------------------------------
# sweeps
# ---------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class SweepResult:
    """Result of :func:`sweep` (1-D or 2-D).

    Arrays have the grid shape ``(n1,)`` or ``(n1, n2)``; NaN where a state
    or transition does not exist.

    Attributes
    ----------
    parameters : tuple of str
    units : tuple of str
    values : tuple of numpy.ndarray
        Grid values of each parameter (in its unit).
    state_labels : tuple of str
    state_energy_eV : Mapping[str, ndarray]
        Band-diagram energies [eV].
    state_bound : Mapping[str, ndarray]
        True where the state is truly bound (False: quasi-bound or absent).
    transitions : tuple of str
    energy_eV, wavelength_um : Mapping[str, ndarray]
    sensitivity : Mapping[str, Mapping[str, ndarray]]
        transition -> parameter -> dλ/dp in nm per engineering unit.
    sensitivity_units : Mapping[str, str]
        parameter -> e.g. 'nm/ML'.
    sensitivity_method : {'grid', 'local'}
        'grid': second-order finite differences over the sweep grid
        (numpy.gradient); 'local': central differences with a small step
        around each point (extra solves).
    points : tuple of DesignPoint
        Flat, C order.
    notes : tuple of str
    """

    parameters: tuple
    units: tuple
    values: tuple
    state_labels: tuple
    state_energy_eV: Mapping
    state_bound: Mapping
    transitions: tuple
    energy_eV: Mapping
    wavelength_um: Mapping
    sensitivity: Mapping
    sensitivity_units: Mapping
    sensitivity_method: str
    points: tuple = field(repr=False, default=())
    notes: tuple = ()

    @property
    def shape(self) -> tuple:
        return tuple(len(v) for v in self.values)

    def point(self, *index) -> DesignPoint:
        """The design point at a grid index (``i`` or ``i, j``)."""
        return self.points[int(np.ravel_multi_index(index, self.shape))]

    def to_json(self) -> dict:
        def lst(a):
            a = np.asarray(a, dtype=float)
            return np.where(np.isfinite(a), a, np.nan).tolist()

        def nulls(o):
            if isinstance(o, float) and not math.isfinite(o):
                return None
            if isinstance(o, list):
                return [nulls(v) for v in o]
            return o

        one = len(self.parameters) == 1
        states = {lab: nulls(lst(self.state_energy_eV[lab])) for lab in self.state_labels}
        bound = {lab: np.asarray(self.state_bound[lab]).tolist() for lab in self.state_labels}
        trans = {}
        for t in self.transitions:
            sens = {p: nulls(lst(self.sensitivity[t][p])) for p in self.parameters}
            trans[t] = {"energy_eV": nulls(lst(self.energy_eV[t])),
                        "wavelength_um": nulls(lst(self.wavelength_um[t])),
                        "sensitivity_nm_per_unit": sens[self.parameters[0]] if one else sens}
        return {
            "parameter": self.parameters[0] if one else list(self.parameters),
            "unit": self.units[0] if one else list(self.units),
            "values": lst(self.values[0]) if one else [lst(v) for v in self.values],
            "states": states,
            "bound": bound,
            "transitions": trans,
            "sensitivity_unit": (self.sensitivity_units[self.parameters[0]] if one
                                 else dict(self.sensitivity_units)),
            "sensitivity_method": self.sensitivity_method,
            "notes": list(self.notes),
        }

    def to_csv(self) -> str:
        """One row per grid point: parameters, state energies, transitions."""
        import csv
        import io

        grids = np.meshgrid(*self.values, indexing="ij")
        cols = [(f"{p} [{u}]", g.ravel()) for p, u, g in zip(self.parameters, self.units, grids)]
        for lab in self.state_labels:
            cols.append((f"{lab} energy [eV]", np.asarray(self.state_energy_eV[lab]).ravel()))
        for t in self.transitions:
            cols.append((f"{t} energy [eV]", np.asarray(self.energy_eV[t]).ravel()))
            cols.append((f"{t} wavelength [um]", np.asarray(self.wavelength_um[t]).ravel()))
            for p in self.parameters:
                cols.append((f"{t} d(wavelength)/d({p}) [{self.sensitivity_units[p]}]",
                             np.asarray(self.sensitivity[t][p]).ravel()))
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow([c[0] for c in cols])
        for i in range(len(cols[0][1])):
            w.writerow(["" if not math.isfinite(c[1][i]) else repr(float(c[1][i])) for c in cols])
        return buf.getvalue()

    def plot(self, path, *, protect=(), title: str | None = None):
        """Write a PNG (or any matplotlib format by suffix) atomically.

        1-D: wavelength of each transition against the parameter (and the
        state energies in a second panel).  2-D: a colour map of the first
        transition's wavelength with labelled contours.
        """
        import matplotlib
        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        from .fileio import atomic_savefig

        def axis_label(i):
            u = self.units[i]
            return self.parameters[i] + ("" if u == "fraction" else f" [{u}]")

        styles = ["-", "--", "-.", ":"]
        colors = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000"]
        if len(self.parameters) == 1:
            x = self.values[0]
            fig, axes = plt.subplots(2, 1, figsize=(7, 7), sharex=True)
            ax = axes[0]
            for k, t in enumerate(self.transitions):
                ax.plot(x, self.wavelength_um[t], styles[k % 4], color=colors[k % 7], lw=1.8,
                        label=t)
            ax.set_ylabel("wavelength [µm]")
            if self.transitions:
                ax.legend(loc="best")
            ax.grid(alpha=0.3)
            ax2 = axes[1]
            for k, lab in enumerate(self.state_labels):
                ax2.plot(x, self.state_energy_eV[lab], styles[k % 4], color=colors[k % 7],
                         lw=1.4, label=lab)
            ax2.set_ylabel("state energy [eV]")
            ax2.set_xlabel(axis_label(0))
            ax2.grid(alpha=0.3)
            if self.state_labels:
                ax2.legend(loc="best", ncol=2, fontsize="small")
        else:
            fig, ax = plt.subplots(figsize=(7, 5.5))
            if not self.transitions:
                raise ParameterError("a 2-D map needs a transition (--transition)")
            t = self.transitions[0]
            lam = np.asarray(self.wavelength_um[t], dtype=float)
            X, Y = np.meshgrid(self.values[0], self.values[1], indexing="ij")
            masked = np.ma.masked_invalid(lam)
            mesh = ax.pcolormesh(X, Y, masked, shading="auto", cmap="cividis")
            cb = fig.colorbar(mesh, ax=ax)
            cb.set_label(f"{t} wavelength [µm]")
            if np.isfinite(lam).sum() >= 4 and min(lam.shape) >= 2:
                cs = ax.contour(X, Y, masked, colors="white", linewidths=0.9)
                ax.clabel(cs, fmt="%.3g µm", fontsize=8)
            ax.set_xlabel(axis_label(0))
            ax.set_ylabel(axis_label(1))
        if title:
            fig.suptitle(title)
        fig.tight_layout()
        try:
            return atomic_savefig(fig, path, protect=protect, dpi=120)
        finally:
            plt.close(fig)


def _as_values(p: Parameter, values) -> np.ndarray:
    arr = np.atleast_1d(np.asarray(values, dtype=float))
    if arr.ndim != 1 or arr.size == 0:
        raise ParameterError(f"{p.path}: expected a non-empty list of values")
    for v in arr:
        p.check(v)
    return arr


def _sensitivity_grid(lam, values, axis):
    n = lam.shape[axis]
    if n < 2:
        return np.full(lam.shape, np.nan)
    with np.errstate(invalid="ignore"):
        return np.gradient(lam, values, axis=axis, edge_order=2 if n >= 3 else 1)


def _jump_notes(p, values, state_energy, transition_energy, factor: float = 8.0) -> list:
    """Flag steps where a labelled state's energy jumps instead of moving smoothly.

    States are labelled by energy order among those found at each point; when
    a resonance appears or leaves (strong field, a state crossing the barrier
    edge) the label passes to another state and the curve jumps.  A step is
    flagged when it is ``factor`` times the median step of that curve (and
    above 1 meV).  Values across a flagged step belong to different states.
    """
    x = np.asarray(values, dtype=float)
    out = []
    series = list(state_energy.items()) + list(transition_energy.items())
    for name, e in series:
        e = np.asarray(e, dtype=float)
        d = np.abs(np.diff(e))
        ok = np.isfinite(d)
        if ok.sum() < 3:
            continue
        med = float(np.median(d[ok]))
        for i in np.nonzero(ok & (d > max(factor * med, 1e-3)))[0][:3]:
            out.append(f"{name} jumps by {1e3 * d[i]:.3g} meV between {p.path} = {x[i]:.6g} and "
                       f"{x[i + 1]:.6g}: the label passes to another state there (a resonance "
                       "appears or leaves); values across it are not one state")
    return out


def sweep(stack, parameter: str, values, transitions=None, *, parameter2: str | None = None,
          values2=None, bands=None, sensitivity: str = "grid", jobs=None, dask=None,
          dask_timeout_s=None, progress=None) -> SweepResult:
    """Solve the stack over a grid of parameter values (1-D, or 2-D with ``parameter2``).

    Parameters
    ----------
    stack : Stack
    parameter : str
        Parameter path; ``values`` in its unit (nm, fraction, kV/cm, K).
    transitions : sequence of str, optional
        Transition names to follow; each must exist at the start point (the
        first grid point).  Default: ``['e1-e2']`` if it exists anywhere in
        the sweep, else none.
    parameter2, values2 : optional
        Second parameter of a 2-D map.
    bands : sequence of str, optional
        Extra bands to solve (conduction and those the transitions need are
        always solved).
    sensitivity : {'grid', 'local'}
        How dλ/dp is estimated (see :class:`SweepResult`).
    jobs, dask, dask_timeout_s, progress
        Parallel execution (see :func:`qwell.parallel.map_chunked`).

    Raises
    ------
    ParameterError
        Unknown path, a value outside the valid range (named), a transition
        missing at the start point.
    """
    if sensitivity not in ("grid", "local"):
        raise ParameterError(f"sensitivity {sensitivity!r}: expected 'grid' or 'local'")
    ps = [get_parameter(stack, parameter)]
    vals = [_as_values(ps[0], values)]
    if parameter2 is not None:
        p2 = get_parameter(stack, parameter2)
        if p2.path == ps[0].path:
            raise ParameterError(f"{p2.path} given twice; a 2-D map needs two parameters")
        ps.append(p2)
        vals.append(_as_values(p2, values2 if values2 is not None else []))
    names = list(transitions) if transitions else []
    bands_t = bands_for_transitions(names, bands)
    grid_sets = [dict(zip([p.path for p in ps], (float(x) for x in combo)))
                 for combo in np.array(np.meshgrid(*vals, indexing="ij")).reshape(len(ps), -1).T]
    first = design_point(stack, grid_sets[0], bands=bands_t)
    where = "the start point (" + ", ".join(p.describe(grid_sets[0][p.path]) for p in ps) + ")"
    if transitions is not None:
        _check_transitions(first, names, where)

    extra_sets = []
    if sensitivity == "local":
        for gs in grid_sets:
            for p in ps:
                h = _LOCAL_STEP[p.kind]
                for s in (+1, -1):
                    d = dict(gs)
                    v = gs[p.path] + s * h
                    lo, hi = p.limits
                    d[p.path] = min(max(v, lo + (1e-9 if p.kind in ("thickness", "temperature")
                                                 else 0.0)), hi)
                    extra_sets.append(d)
    rest = evaluate_many(stack, grid_sets[1:] + extra_sets, bands=bands_t, jobs=jobs, dask=dask,
                         dask_timeout_s=dask_timeout_s, progress=progress, label="sweep")
    _emit([first], stacklevel=2)
    points = [first] + rest[:len(grid_sets) - 1]
    extras = rest[len(grid_sets) - 1:]
    if transitions is None:  # default: e1-e2 wherever it exists in the sweep
        names = ["e1-e2"] if any("e1-e2" in pt.transition_names for pt in points) else []
    shape = tuple(len(v) for v in vals)

    labels: list = []
    for pt in points:
        for lab, _, _ in pt.states:
            if lab not in labels:
                labels.append(lab)
    order = {"e": 0, "hh": 1, "lh": 2}

    def lab_key(lab):
        m = _LABEL_RE.match(lab)
        return (order.get(m.group(1), 9), int(m.group(2))) if m else (9, 0)

    labels.sort(key=lab_key)
    st_e = {lab: np.array([pt.state_energy(lab) for pt in points]).reshape(shape) for lab in labels}
    st_b = {lab: np.array([any(s[0] == lab and s[2] for s in pt.states) for pt in points]
                          ).reshape(shape) for lab in labels}
    en = {t: np.array([pt.transition_energy(t) for pt in points]).reshape(shape) for t in names}
    lam = {t: np.array([pt.wavelength(t) for pt in points]).reshape(shape) for t in names}
    sens: dict = {}
    for t in names:
        sens[t] = {}
        for ax, p in enumerate(ps):
            if sensitivity == "grid" and shape[ax] >= 2:
                d = _sensitivity_grid(lam[t], vals[ax], ax)
            else:
                lam_p = np.empty(len(grid_sets))
                lam_m = np.empty(len(grid_sets))
                dv = np.empty(len(grid_sets))
                if extras:
                    for i in range(len(grid_sets)):
                        a = extras[(i * len(ps) + ax) * 2]
                        b = extras[(i * len(ps) + ax) * 2 + 1]
                        lam_p[i], lam_m[i] = a.wavelength(t), b.wavelength(t)
                        dv[i] = dict(a.values)[p.path] - dict(b.values)[p.path]
                    d = ((lam_p - lam_m) / dv).reshape(shape)
                else:
                    d = np.full(shape, np.nan)
            sens[t][p.path] = d * 1e3 * p.sensitivity_step
    notes = []
    for pt in points:
        for msg in pt.notes:
            if msg not in notes:
                notes.append(msg)
    if len(ps) == 1:
        notes += _jump_notes(ps[0], vals[0], st_e, en)
    method = sensitivity
    if sensitivity == "grid" and any(s < 2 for s in shape):
        method = "grid (undefined along an axis with one point)"
    return SweepResult(parameters=tuple(p.path for p in ps), units=tuple(p.unit for p in ps),
                       values=tuple(vals), state_labels=tuple(labels), state_energy_eV=st_e,
                       state_bound=st_b, transitions=tuple(names), energy_eV=en,
                       wavelength_um=lam, sensitivity=sens,
                       sensitivity_units={p.path: p.sensitivity_unit for p in ps},
                       sensitivity_method=method, points=tuple(points), notes=tuple(notes))


# ---------------------------------------------------------------------------
# growth tolerances
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Contribution:
    """One parameter's share of the wavelength spread (one at a time, ±delta).

    Attributes
    ----------
    parameter : str
    unit : str
    value : float
        Nominal value.
    delta : float
        Tolerance in ``unit`` (±).
    spec : str
        The tolerance as given, e.g. ``'1 ML'``.
    wavelength_plus_um, wavelength_minus_um : float
        Wavelength at value + delta and value - delta [um].
    contribution_nm : float
        ``(λ+ - λ-)/2`` [nm], the signed linear contribution.
    """

    parameter: str
    unit: str
    value: float
    delta: float
    spec: str
    wavelength_plus_um: float
    wavelength_minus_um: float
    contribution_nm: float


@dataclass(frozen=True)
class MonteCarloSummary:
    """Statistics of the wavelength over random designs.

    Attributes
    ----------
    samples : int
        Designs drawn.
    valid : int
        Designs in which the transition exists (the statistics use these).
    distribution : {'normal', 'uniform'}
        'normal': each parameter Gaussian with the tolerance as 1 sigma;
        'uniform': uniform on [-tolerance, +tolerance].
    seed : int or None
    mean_um, std_nm : float
        Mean wavelength [um] and its standard deviation (ddof=1) [nm].
    percentiles_um : Mapping[int, float]
        5th, 50th and 95th percentiles [um].
    clipped : int
        Samples where a value was clipped to its valid range.
    """

    samples: int
    valid: int
    distribution: str
    seed: int | None
    mean_um: float
    std_nm: float
    percentiles_um: Mapping
    clipped: int = 0


@dataclass(frozen=True)
class ToleranceResult:
    """Result of :func:`tolerance`.

    Attributes
    ----------
    transition : str
    nominal_energy_eV, nominal_wavelength_um : float
    contributions : tuple of Contribution
    worst_case_nm : float
        Sum of |contribution| [nm] (linear worst case).
    corner_min_um, corner_max_um : float
        Wavelengths of the actual corner designs: every parameter at the end
        of its range that lowers (raises) the wavelength [um].
    rss_nm : float
        Root-sum-square of the contributions [nm].
    monte_carlo : MonteCarloSummary or None
    notes : tuple of str
    """

    transition: str
    nominal_energy_eV: float
    nominal_wavelength_um: float
    contributions: tuple
    worst_case_nm: float
    corner_min_um: float
    corner_max_um: float
    rss_nm: float
    monte_carlo: MonteCarloSummary | None = None
    notes: tuple = ()

    def to_json(self) -> dict:
        def f(v):
            return None if v is None or not math.isfinite(v) else float(v)
        mc = None
        if self.monte_carlo is not None:
            m = self.monte_carlo
            mc = {"samples": m.samples, "valid": m.valid, "distribution": m.distribution,
                  "sigma": ("tolerance = 1 sigma" if m.distribution == "normal"
                            else "uniform on ±tolerance"),
                  "seed": m.seed, "mean_um": f(m.mean_um), "std_nm": f(m.std_nm),
                  "percentiles_um": {str(k): f(v) for k, v in m.percentiles_um.items()},
                  "clipped": m.clipped}
        return {
            "transition": self.transition,
            "nominal": {"energy_eV": f(self.nominal_energy_eV),
                        "wavelength_um": f(self.nominal_wavelength_um)},
            "contributions": [{"parameter": c.parameter, "unit": c.unit, "value": c.value,
                               "delta": c.delta, "spec": c.spec,
                               "wavelength_plus_um": f(c.wavelength_plus_um),
                               "wavelength_minus_um": f(c.wavelength_minus_um),
                               "contribution_nm": f(c.contribution_nm)}
                              for c in self.contributions],
            "worst_case": {"sum_nm": f(self.worst_case_nm), "corner_min_um": f(self.corner_min_um),
                           "corner_max_um": f(self.corner_max_um)},
            "rss_nm": f(self.rss_nm),
            "monte_carlo": mc,
            "notes": list(self.notes),
        }


def parse_parameter_value(p: Parameter, value, *, delta: bool = False) -> float:
    """A value (or tolerance) for ``p`` from text with units, a number or a Quantity.

    Thickness: a length or monolayers (``'1 ML'`` uses the layer's a/2), or
    with ``delta=True`` a percentage of the thickness (``'2 %'``); numbers
    are nm.  Composition: a plain number (``'0.01'``).  Field: kV/cm;
    temperature: K (numbers are taken in these units only for composition).

    Raises
    ------
    UnitError, ParameterError
    """
    from .units import parse_quantity, thickness_nm, to_float

    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    text = value.strip() if isinstance(value, str) else value
    if p.kind == "thickness":
        if delta and isinstance(text, str) and text.endswith("%"):
            try:
                return float(text[:-1]) / 100.0 * p.value
            except ValueError:
                raise UnitError(f"{value!r}: expected a percentage such as '2 %'") from None
        return thickness_nm(text, p.monolayer_nm)
    if p.kind in ("x", "y"):
        try:
            return float(text)
        except (TypeError, ValueError):
            pass
        try:
            q = parse_quantity(text)
            return float(q.to("dimensionless").magnitude)
        except Exception:
            raise UnitError(f"{value!r}: expected a composition fraction such as 0.3") from None
    if p.kind == "field":
        return to_float(text, "kV/cm")
    return to_float(text, "K")


def _tolerance_items(stack, params, thickness_tol, composition_tol, extra):
    """[(Parameter, delta, spec text)] and notes."""
    notes = []
    items: dict = {}
    layer_keys = list(_layer_lookup(stack))

    def check_keys(mapping, what):
        for k in mapping:
            if k != "*" and k not in layer_keys:
                raise ParameterError(f"{what} tolerance for unknown layer {k!r}; layers: "
                                     + ", ".join(layer_keys))

    if thickness_tol is None:
        thickness_tol = {}
    elif not isinstance(thickness_tol, Mapping):
        thickness_tol = {"*": thickness_tol}
    if composition_tol is None:
        composition_tol = {}
    elif not isinstance(composition_tol, Mapping):
        composition_tol = {"*": composition_tol}
    check_keys(thickness_tol, "thickness")
    check_keys(composition_tol, "composition")
    for key in layer_keys:
        p = params[f"{key}.thickness"]
        spec = thickness_tol.get(key, thickness_tol.get("*"))
        if spec is not None:
            try:
                d = _half_width(p, spec)
            except UnitError as exc:
                if key not in thickness_tol and p.monolayer_nm is None:
                    notes.append(f"{key}: no lattice constant, thickness tolerance {spec!r} "
                                 "skipped")
                    d = None
                else:
                    raise ParameterError(f"{p.path} tolerance: {exc}") from None
            if d is not None:
                items[p.path] = (p, d, str(spec))
        for k in ("x", "y"):
            pc = params.get(f"{key}.{k}")
            if pc is None:
                continue
            spec = composition_tol.get(key, composition_tol.get("*"))
            if spec is not None:
                items[pc.path] = (pc, _half_width(pc, spec), str(spec))
    for path, spec in dict(extra or {}).items():
        p = get_parameter(stack, path)
        items[p.path] = (p, _half_width(p, spec), str(spec))
    out = []
    for p, d, spec in items.values():
        if d == 0:
            continue
        if not math.isfinite(d):
            raise ParameterError(f"{p.path}: tolerance {spec!r} is not finite")
        out.append((p, d, spec))
    return out, notes


def _half_width(p: Parameter, spec) -> float:
    """A tolerance as a half-width >= 0 in the parameter's unit; negative -> ParameterError."""
    d = parse_parameter_value(p, spec, delta=True)
    if d < 0:
        raise ParameterError(f"{p.path}: tolerance {spec!r} is negative; expected a half-width "
                             ">= 0 (the spread is ± that value)")
    return d


def _clip_to_valid(p: Parameter, v: float) -> float:
    lo, hi = p.limits
    if p.kind in ("thickness", "temperature"):
        lo = 1e-6 * max(p.value, 1.0)
    if p.kind in ("x", "y") and p.composition and len(p.composition) > 1:
        keys = dict(_composition_keys(p.family))
        same = [k for k in p.composition if k != p.kind
                and _same_sublattice(p.family, keys[k], keys[p.kind])]
        hi = 1.0 - sum(float(p.composition[k]) for k in same)
    return min(max(v, lo), hi)


def tolerance(stack, transition: str = "e1-e2", thickness_tol=None, composition_tol=0.01,
              extra=None, *, monte_carlo: int = 0, seed=None, distribution: str = "normal",
              bands=None, jobs=None, dask=None, dask_timeout_s=None,
              progress=None) -> ToleranceResult:
    """Wavelength spread of ``transition`` from growth tolerances.

    Each parameter is moved by ±tolerance one at a time (signed contribution
    ``(λ+ - λ-)/2``); all together give the linear worst case (sum of
    |contributions|), the two actual corner designs, and the root-sum-square.
    A repeated layer is varied in all its periods together (a systematic
    growth error).  With ``monte_carlo=N`` every parameter is drawn
    independently (Gaussian with the tolerance as 1 sigma, or uniform on
    ±tolerance) and the wavelength statistics are reported; values crossing
    their valid range (thickness <= 0, composition outside [0, 1]) are
    clipped and counted.

    Parameters
    ----------
    transition : str
    thickness_tol : str, float or Mapping, optional
        Layer name (or ``'*'`` for every layer) -> tolerance: ``'1 ML'``,
        ``'0.3 nm'``, ``'2 %'`` or a number in nm.  Default ``{'*': '1 ML'}``.
        Layers without a lattice constant skip a monolayer tolerance given
        through ``'*'`` (noted).
    composition_tol : float or Mapping
        Absolute tolerance of every composition fraction (x and y), or
        layer -> tolerance.  Layers without a composition are skipped.
    extra : Mapping, optional
        Further parameters: path -> tolerance (e.g. ``{'field': '2 kV/cm'}``).
    monte_carlo : int
        Number of random designs (0: none).
    seed : int, optional
        Seed of :func:`numpy.random.default_rng` (reproducible samples).
    distribution : {'normal', 'uniform'}

    Raises
    ------
    ParameterError
        Transition missing in the nominal design, unknown layers or paths,
        a ±tolerance design outside the valid range (named).
    """
    if thickness_tol is None:
        thickness_tol = {"*": "1 ML"}
    if distribution not in ("normal", "uniform"):
        raise ParameterError(f"distribution {distribution!r}: expected 'normal' or 'uniform'")
    n_mc = int(monte_carlo or 0)
    if n_mc < 0:
        raise ParameterError(f"monte_carlo = {monte_carlo!r}: expected a count >= 0")
    bands = bands_for_transitions([transition], bands)
    params = parameters(stack)
    nominal = design_point(stack, {}, bands=bands)
    _check_transitions(nominal, [transition], "the nominal design")
    _emit([nominal], stacklevel=2)
    items, notes = _tolerance_items(stack, params, thickness_tol, composition_tol, extra)
    lam0 = nominal.wavelength(transition)

    sets = []
    for p, d, _ in items:
        for s in (+1, -1):
            v = p.value + s * d
            try:
                p.check(v)
            except ParameterError as exc:
                raise ParameterError(f"tolerance ±{d:.6g} {p.unit} on {p.path} "
                                     f"(nominal {p.value:.6g}) leaves the valid range: {exc}"
                                     ) from None
            sets.append({p.path: v})
    needed = tuple(transition.split("-"))
    pm = evaluate_many(stack, sets, bands=bands, jobs=jobs, dask=dask,
                       dask_timeout_s=dask_timeout_s, progress=progress, label="tolerance",
                       needed=needed)
    contributions = []
    for k, (p, d, spec) in enumerate(items):
        lp, lm = pm[2 * k].wavelength(transition), pm[2 * k + 1].wavelength(transition)
        if not (math.isfinite(lp) and math.isfinite(lm)):
            notes.append(f"{p.path} ±{d:.4g}: {transition} does not exist at one end")
        contributions.append(Contribution(parameter=p.path, unit=p.unit, value=p.value, delta=d,
                                          spec=spec, wavelength_plus_um=lp,
                                          wavelength_minus_um=lm,
                                          contribution_nm=0.5 * (lp - lm) * 1e3))
    c = np.array([x.contribution_nm for x in contributions])
    worst = float(np.sum(np.abs(c))) if c.size else 0.0
    rss = float(np.sqrt(np.sum(c ** 2))) if c.size else 0.0
    up, down = {}, {}
    for (p, d, _), ci in zip(items, c):
        s = 1.0 if not (ci < 0) else -1.0
        if ci == 0 or not math.isfinite(ci):
            continue
        up[p.path] = p.value + s * d
        down[p.path] = p.value - s * d
    corners = evaluate_many(stack, [down, up], bands=bands, jobs=1, needed=needed)
    corner_min, corner_max = corners[0].wavelength(transition), corners[1].wavelength(transition)

    mc = None
    if n_mc:
        rng = np.random.default_rng(seed)
        shape = (n_mc, len(items))
        z = rng.standard_normal(shape) if distribution == "normal" else rng.uniform(-1, 1, shape)
        clipped = 0
        sample_sets = []
        for i in range(n_mc):
            d = {}
            hit = False
            for k, (p, dk, _) in enumerate(items):
                v = p.value + dk * z[i, k]
                cv = _clip_to_valid(p, v)
                hit = hit or cv != v
                d[p.path] = cv
            clipped += hit
            sample_sets.append(d)
        pts = evaluate_many(stack, sample_sets, bands=bands, jobs=jobs, dask=dask,
                            dask_timeout_s=dask_timeout_s, progress=progress,
                            label="Monte Carlo", needed=needed)
        lam = np.array([pt.wavelength(transition) for pt in pts])
        ok = lam[np.isfinite(lam)]
        if ok.size < lam.size:
            notes.append(f"Monte Carlo: {transition} missing in {lam.size - ok.size} of "
                         f"{lam.size} designs (left out of the statistics)")
        if clipped:
            notes.append(f"Monte Carlo: {clipped} of {n_mc} designs had a value clipped to its "
                         "valid range")
        pct = np.percentile(ok, [5, 50, 95]) if ok.size else [math.nan] * 3
        mc = MonteCarloSummary(samples=n_mc, valid=int(ok.size), distribution=distribution,
                               seed=seed, mean_um=float(np.mean(ok)) if ok.size else math.nan,
                               std_nm=float(np.std(ok, ddof=1)) * 1e3 if ok.size > 1 else math.nan,
                               percentiles_um={5: float(pct[0]), 50: float(pct[1]),
                                               95: float(pct[2])},
                               clipped=int(clipped))
    return ToleranceResult(transition=transition,
                           nominal_energy_eV=nominal.transition_energy(transition),
                           nominal_wavelength_um=lam0, contributions=tuple(contributions),
                           worst_case_nm=worst, corner_min_um=corner_min, corner_max_um=corner_max,
                           rss_nm=rss, monte_carlo=mc, notes=tuple(notes))
