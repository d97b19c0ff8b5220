"""Writing III-V alloy formulas: the inverse of :func:`qwell.materials.parse_formula`.

``format_formula('AlGaAs', {'x': 0.3})`` gives ``'Al0.3Ga0.7As'``.  Which
element a composition key (``x``, ``y``) is the fraction of is not written
down here: it is found by asking the materials reader to read a probe formula,
so the writer follows the reader's conventions exactly.  The group-III and
group-V element lists are the materials database's own.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache
from typing import Mapping

from .errors import ParameterError
from .materials import parse_formula
# the one copy of the element lists (qwell.materials re-exports them where available)
from .materials._database import GROUP_III, GROUP_V

__all__ = ["format_formula", "composition_keys", "same_sublattice_keys"]

# distinct binary fractions on each sublattice (group III, group V), exact in floating point
_PROBE = {("III", 2): (0.125, 0.875), ("III", 3): (0.125, 0.25, 0.625),
          ("V", 2): (0.3125, 0.6875), ("V", 3): (0.0625, 0.1875, 0.75)}


def _family_elements(family: str) -> list[str]:
    elements = re.findall(r"[A-Z][a-z]?", family)
    if "".join(elements) != family or not elements:
        raise ParameterError(f"cannot split the material family {family!r} into elements")
    return elements


def _sublattices(elements):
    iii = [e for e in elements if e in GROUP_III]
    v = [e for e in elements if e in GROUP_V]
    if len(iii) + len(v) != len(elements) or not iii or not v:
        raise ParameterError(f"{''.join(elements)!r} is not a III-V family this writer knows")
    return iii, v


@lru_cache(maxsize=64)
def composition_keys(family: str) -> tuple:
    """``((key, element), ...)``: which element's fraction each composition key is.

    Found by asking :func:`qwell.materials.parse_formula` to read a probe
    formula with distinct fractions, e.g. ``('AlGaAs',) -> (('x', 'Al'),)``.

    Raises
    ------
    ParameterError
        A family that is not III-V, or whose keys cannot be told apart.
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
    fam, comp = parse_formula(probe)
    if fam != family:
        raise ParameterError(f"probe formula {probe!r} read as family {fam!r}, not {family!r}")
    out = []
    for key, val in comp.items():
        match = [e for e, f in fractions.items() if abs(f - float(val)) < 1e-12]
        if len(match) != 1:
            raise ParameterError(f"{family}: cannot tell which element composition {key!r} is")
        out.append((key, match[0]))
    return tuple(out)


def same_sublattice_keys(family: str, key: str, keys) -> list:
    """The keys among ``keys`` (other than ``key``) whose element shares ``key``'s sublattice."""
    iii, _ = _sublattices(_family_elements(family))
    element = dict(composition_keys(family))
    own = element[key] in iii
    return [k for k in keys if k != key and (element[k] in iii) == own]


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

    Returns
    -------
    str
        Keyed fractions written with ``repr`` (they read back as the same
        floats); the remainder of a sublattice rounded to 12 digits.

    Raises
    ------
    ParameterError
        Unknown keys, fractions outside [0, 1] or a sublattice summing above 1.

    Examples
    --------
    >>> format_formula("AlGaAs", {"x": 0.3})
    'Al0.3Ga0.7As'
    """
    elements = _family_elements(family)
    iii, v = _sublattices(elements)
    keys = dict(composition_keys(family))
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
    return "".join(e + ((repr(float(fractions[e])) if e in keyed else f"{fractions[e]:.12g}")
                        if e in fractions else "") for e in elements)
