"""The one pint registry of qwell, and conversions at the edges.

Inside qwell every quantity is a plain float in fixed units: energies in eV,
lengths in nm, masses in units of the free-electron mass m0, temperatures in
K, fields in kV/cm, densities in cm^-3 (volume) or cm^-2 (sheet).  pint is
used only where values enter (YAML, command line) and leave (reports).

The registry knows ``ML`` (monolayer) only through :func:`thickness_nm`,
because a monolayer depends on the layer's lattice constant (a/2 on (001)).
"""

from __future__ import annotations

import math
import functools
import re
import sys

from .constants import H_EV_S, HC_EV_UM
from .errors import UnitError
from .unit_table import plain_split, plain_value

__all__ = [
    "registry",
    "is_quantity",
    "parse_quantity",
    "to_float",
    "thickness_nm",
    "spectral_to_eV",
    "eV_to_um",
    "format_exponent",
    "HC_EV_UM",
]


@functools.cache
def registry():
    """The one pint registry, built on first use.

    pint and its registry take a few hundred milliseconds to import and build, so plain
    values (:mod:`qwell.unit_table`) are read without them; ``qwell.units.ureg`` and
    ``qwell.units.Q_`` still name the registry and its Quantity (built when first asked).
    """
    import pint  # heavy import (~0.3 s with the registry): only rare units need it

    reg = pint.UnitRegistry()
    reg.define("monolayer = [monolayer] = ML")
    return reg


def __getattr__(name):  # module attributes built lazily: ureg, Q_
    if name == "ureg":
        return registry()
    if name == "Q_":
        return registry().Quantity
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def is_quantity(value) -> bool:
    """True if ``value`` is a pint Quantity (without importing pint when nobody has)."""
    pint = sys.modules.get("pint")
    return pint is not None and isinstance(value, pint.Quantity)

# HC_EV_UM (h c [eV um]) comes from qwell.constants; it stays importable from here.

_NUMBER_ONLY = re.compile(r"^\s*[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?\s*$")

_NUMBER_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.+)$")
_OFFSET_UNITS = {"degC": "degC", "°C": "degC", "C": "degC", "celsius": "degC",
                 "degF": "degF", "°F": "degF"}

# Human spellings of the internal units, for messages.
_UNIT_WORDS = {
    "nm": "a length (e.g. '5 nm', '50 Å', '23 ML')",
    "eV": "an energy (e.g. '0.3 eV', '250 meV')",
    "K": "a temperature (e.g. '300 K', '77 K')",
    "kV/cm": "an electric field (e.g. '12 kV/cm')",
    "cm^-3": "a volume density (e.g. '1e18 cm^-3')",
    "cm^-2": "a sheet density (e.g. '4e11 cm^-2')",
    "um": "a wavelength (e.g. '4.6 um')",
}


def expected_words(unit: str) -> str:
    """Describe what a value in ``unit`` looks like, for error messages."""
    return _UNIT_WORDS.get(unit, f"a quantity in {unit}")


def parse_quantity(value, what: str = "value"):
    """Parse ``value`` (a string like ``'5 nm'`` or a pint Quantity) into a pint Quantity.

    Raises
    ------
    UnitError
        If the value is a bare number, or not parseable.
    """
    ureg = registry()
    import pint  # already imported by registry(); the name is needed below
    if isinstance(value, pint.Quantity):
        return value
    if isinstance(value, bool) or value is None:
        raise UnitError(f"expected {what} with a unit, got {value!r}")
    if isinstance(value, (int, float)):
        raise UnitError(f"bare number {value!r} has no unit")
    if not isinstance(value, str):
        raise UnitError(f"expected {what} with a unit, got {type(value).__name__}")
    text = value.strip().replace("µ", "u").replace("μ", "u").replace("Å", "angstrom")
    if _NUMBER_ONLY.match(text):
        raise UnitError(f"bare number {value!r} has no unit")
    m = _NUMBER_UNIT.match(text)
    if m and m.group(2).strip() in _OFFSET_UNITS:
        # offset units (degC, degF) cannot go through pint's expression parser
        return ureg.Quantity(float(m.group(1)), _OFFSET_UNITS[m.group(2).strip()])
    try:
        q = ureg.Quantity(text)
    except Exception as exc:  # pint raises several unrelated types
        raise UnitError(f"cannot read {value!r} as a quantity ({type(exc).__name__})") from None
    if not isinstance(q, pint.Quantity) or q.dimensionless and not text:
        raise UnitError(f"cannot read {value!r} as a quantity")
    return q


def to_float(value, unit: str, what: str | None = None) -> float:
    """Convert ``value`` to a float in ``unit``.

    Parameters
    ----------
    value : str or pint.Quantity
        The value with its unit, e.g. ``'250 meV'``.
    unit : str
        Target unit, e.g. ``'eV'``.
    what : str, optional
        Description used in error messages; defaults to the unit's words.

    Raises
    ------
    UnitError
        Missing unit, unreadable text or wrong dimension; the message says
        which unit is expected.
    """
    fast = plain_value(value, unit)
    if fast is not None:
        return fast
    import pint  # heavy import: only values outside the plain table need the registry

    words = what or expected_words(unit)
    try:
        q = parse_quantity(value, words)
    except UnitError as exc:
        raise UnitError(f"{exc}; expected {words}") from None
    if unit == "K":
        try:
            return float(q.to("K").magnitude)
        except Exception:
            raise UnitError(f"{value!r} is not {words}") from None
    try:
        out = float(q.to(unit).magnitude)
    except pint.DimensionalityError:
        raise UnitError(f"{value!r} is not {words}") from None
    except Exception:
        raise UnitError(f"cannot convert {value!r}; expected {words}") from None
    return out


def thickness_nm(value, monolayer_nm: float | None) -> float:
    """Convert a thickness to nm; ``ML`` uses the given monolayer a/2 in nm.

    Raises
    ------
    UnitError
        When the value is not a length (or monolayers) or has no unit.
    """
    split = plain_split(value)
    if split is not None and split[1] == "ML" and monolayer_nm is not None:
        return split[0] * monolayer_nm
    fast = plain_value(value, "nm")
    if fast is not None:
        return fast
    import pint  # heavy import: only values outside the plain table need the registry

    words = expected_words("nm")
    try:
        q = parse_quantity(value, words)
    except UnitError as exc:
        raise UnitError(f"{exc}; expected {words}") from None
    if q.check("[monolayer]"):
        if monolayer_nm is None:
            raise UnitError(f"{value!r}: monolayers need a lattice constant; give the thickness in nm")
        return float(q.to("ML").magnitude) * monolayer_nm
    try:
        return float(q.to("nm").magnitude)
    except pint.DimensionalityError:
        raise UnitError(f"{value!r} is not {words}") from None


def spectral_to_eV(value) -> float:
    """Photon energy in eV of a spectral target: wavelength, energy, wavenumber or frequency.

    ``'4.6 um'``, ``'270 meV'``, ``'1100 cm^-1'`` and ``'65 THz'`` are all accepted.

    Raises
    ------
    UnitError
        If the value is none of these.
    """
    fast = _plain_spectral_eV(value)
    if fast is not None:
        return fast
    import pint  # heavy import: only values outside the plain table need the registry

    q = parse_quantity(value, "a wavelength, energy, wavenumber or frequency")
    try:
        if q.check("[length]"):
            lam_um = q.to("um").magnitude
            if lam_um <= 0:
                raise UnitError(f"{value!r}: a wavelength must be positive")
            return HC_EV_UM / lam_um
        if q.check("[energy]"):
            return float(q.to("eV").magnitude)
        if q.check("1/[length]"):
            return float(q.to("1/um").magnitude) * HC_EV_UM
        if q.check("1/[time]"):
            return float(q.to("Hz").magnitude) * H_EV_S
    except pint.DimensionalityError:
        pass
    raise UnitError(f"{value!r} is not a wavelength, energy, wavenumber or frequency "
                    "(e.g. '4.6 um', '270 meV', '1100 cm^-1', '65 THz')")


def _plain_spectral_eV(value) -> float | None:
    """:func:`spectral_to_eV` of a plain form (the same arithmetic), or None."""
    lam_um = plain_value(value, "um")
    if lam_um is not None:
        return HC_EV_UM / lam_um if lam_um > 0 else None  # None: the registry path says why
    energy = plain_value(value, "eV")
    if energy is not None:
        return energy
    per_um = plain_value(value, "1/um")
    if per_um is not None:
        return per_um * HC_EV_UM
    hz = plain_value(value, "Hz")
    if hz is not None:
        return hz * H_EV_S
    return None


def eV_to_um(energy_eV):
    """Vacuum wavelength in um of a photon energy in eV (λ = hc/E)."""
    return HC_EV_UM / energy_eV


_SUPERSCRIPT = str.maketrans("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻")


def format_exponent(value: float, digits: int = 3) -> str:
    """A number with its power of ten written out, e.g. ``4.00×10¹¹`` (sheet densities).

    ``digits`` significant digits; 0 is '0', non-finite values as Python writes them.
    """
    v = float(value)
    if v == 0 or not math.isfinite(v):
        return "0" if v == 0 else str(v)
    mant, exp = f"{v:.{max(digits - 1, 0)}e}".split("e")
    e = int(exp)
    return mant if e == 0 else f"{mant}×10{str(e).translate(_SUPERSCRIPT)}"
