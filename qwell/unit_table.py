"""Plain quantities read without the pint registry: ``'5 nm'``, ``'250 meV'``, ``'77 K'``.

Building pint's unit registry costs a few hundred milliseconds of start-up, most of a
short ``qwell levels`` call.  Nearly every value in a stack file or on the command line
is one number followed by one of a handful of units, so those forms are read here with a
small table of conversion factors; anything else (other units, prefixes spelled out,
offset temperatures, arithmetic) returns ``None`` and the caller falls back to the
registry in :mod:`qwell.units`.

The factors are pint's own conversion factors, written out (pint converts a magnitude
with one multiplication by this factor), so a value read here equals the registry's to
the last bit.  ``tests/test_units.py`` checks every factor against the registry and the
whole reading against pint on random values.

Interface: :func:`plain_split` (number and unit of a plain form) and
:func:`plain_value` (its value in a target unit); both return ``None`` for anything
that is not a plain form of a known unit.
"""

from __future__ import annotations

import math
import re

__all__ = ["plain_split", "plain_value", "UNIT_FACTORS"]

# One decimal number (no leading zeros: pint's expression reader refuses '05'), one unit.
_PLAIN = re.compile(
    r"^[ \t]*([-+]?(?:(?:0|[1-9]\d*)(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)[ \t]*"
    r"([A-Za-zµμÅ]+(?:/cm|\^-[123])?)[ \t]*$")

#: Spellings accepted in the plain form -> the unit's canonical name below.
_SPELLINGS = {
    "nm": "nm", "Å": "angstrom", "angstrom": "angstrom", "um": "um", "µm": "um", "μm": "um",
    "ML": "ML",
    "eV": "eV", "meV": "meV",
    "K": "K",
    "kV/cm": "kV/cm", "V/cm": "V/cm",
    "cm^-3": "cm^-3", "cm^-2": "cm^-2", "cm^-1": "cm^-1",
    "GPa": "GPa",
    "THz": "THz",
}

#: (unit, target unit) -> factor: value in target = number * factor.  These are the
#: factors pint 0.25 computes (``ureg._get_conversion_factor``); e.g. µm -> nm is
#: 999.9999999999999, not 1000, because pint goes through the metre.
UNIT_FACTORS: dict[tuple[str, str], float] = {
    ("nm", "nm"): 1.0,
    ("angstrom", "nm"): 0.09999999999999999,
    ("um", "nm"): 999.9999999999999,
    ("ML", "ML"): 1.0,
    ("eV", "eV"): 1.0,
    ("meV", "eV"): 0.001,
    ("K", "K"): 1.0,
    ("kV/cm", "kV/cm"): 1.0,
    ("V/cm", "kV/cm"): 0.001,
    ("cm^-3", "cm^-3"): 1.0,
    ("cm^-2", "cm^-2"): 1.0,
    ("GPa", "GPa"): 1.0,
    ("um", "um"): 1.0,
    ("nm", "um"): 0.001,
    ("cm^-1", "1/um"): 9.999999999999999e-05,
    ("THz", "Hz"): 1000000000000.0,
}


def plain_split(text) -> tuple[float, str] | None:
    """Number and canonical unit name of a plain form, e.g. ``'4.6 µm'`` -> ``(4.6, 'um')``.

    Returns ``None`` when ``text`` is not a string of one decimal number and one unit of
    the table.
    """
    if not isinstance(text, str):
        return None
    m = _PLAIN.match(text)
    if m is None:
        return None
    unit = _SPELLINGS.get(m.group(2))
    if unit is None:
        return None
    number = m.group(1)
    if "." in number or "e" in number or "E" in number:
        value = float(number)
        # '1e400 nm' is not plain: the full parser refuses a number that overflows
        return (value, unit) if math.isfinite(value) else None
    # an integer literal is an int to pint ('-0 nm' is +0.0 there, not -0.0)
    return float(int(number)), unit


def plain_value(text, target: str) -> float | None:
    """Value of a plain form in ``target`` (a pint unit spelling such as ``'eV'``), or ``None``.

    ``None`` means "not a plain form, or no table factor to this target": the caller
    reads the value with the registry (which also produces the error messages).
    """
    split = plain_split(text)
    if split is None:
        return None
    factor = UNIT_FACTORS.get((split[1], target))
    if factor is None:
        return None
    value = split[0] * factor
    return value if math.isfinite(value) else None
