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
    "RANGES",
    "FIELD_RANGES",
    "range_text",
    "out_of_range",
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


# A quantity is one decimal number (optional exponent) and a unit expression made only of
# unit names joined by products, quotients and small integer powers: '5 nm', '1e18 cm^-3',
# '12 kV/cm', '2.5e-3 eV', '1100 cm**-1'.  Nothing else reaches pint, so no text can make
# it evaluate arithmetic ('9**9**9 nm', '10**400 nm').
_MAX_QUANTITY_CHARS = 80
_UNIT_NAME = r"(?:[A-Za-z_°Ωµ][A-Za-z_°Ω0-9]*|%)"
_UNIT_POWER = r"(?:\s*(?:\^|\*\*)\s*[-+]?[0-9]{1,2})?"
_UNIT_FACTOR = _UNIT_NAME + _UNIT_POWER
_UNIT_EXPR = re.compile(r"^(?:1\s*/\s*)?" + _UNIT_FACTOR
                        + r"(?:\s*(?:\*|/|·|\s)\s*" + _UNIT_FACTOR + r")*$")
_NUMBER_TEXT = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d{1,4})?"
_QUANTITY_TEXT = re.compile(r"^\s*(" + _NUMBER_TEXT + r")\s*(.*?)\s*$")
_NOT_FINITE = re.compile(r"^\s*[-+]?(inf|infinity|nan)\b", re.IGNORECASE)


def parse_quantity(value, what: str = "value"):
    """Parse ``value`` (a string like ``'5 nm'`` or a pint Quantity).

    The text must be one number (with an optional exponent) followed by a unit
    expression of unit names, ``*``, ``/`` and integer powers (``^`` or
    ``**``); arithmetic is never evaluated, and a number that overflows a
    float is refused.

    Raises
    ------
    UnitError
        If the value is a bare number, not finite, or not parseable.
    """
    ureg = registry()
    import pint  # already imported by registry(); the name is needed below
    if isinstance(value, pint.Quantity):
        try:
            finite = math.isfinite(float(value.magnitude))
        except (TypeError, ValueError):
            finite = False
        if not finite:
            raise UnitError(f"{value!r} is not a finite number with a unit")
        return value
    if isinstance(value, bool) or value is None:
        raise UnitError(f"expected {what} with a unit, got {value!r}")
    if isinstance(value, (int, float)):
        raise UnitError(f"bare number {value!r} has no unit")
    if not isinstance(value, str):
        raise UnitError(f"expected {what} with a unit, got {type(value).__name__}")
    shown = _shown(value)
    if len(value) > _MAX_QUANTITY_CHARS:
        raise UnitError(f"{shown} is {len(value)} characters long; expected a number and a unit "
                        f"of at most {_MAX_QUANTITY_CHARS} characters")
    text = value.strip().replace("µ", "u").replace("μ", "u").replace("Å", "angstrom")
    if _NOT_FINITE.match(text):
        raise UnitError(f"{shown} is not a finite number")
    if _NUMBER_ONLY.match(text):
        raise UnitError(f"bare number {shown} has no unit")
    m = _QUANTITY_TEXT.match(text)
    if not m:
        raise UnitError(f"cannot read {shown} as a number and a unit")
    number, unit_text = m.group(1), m.group(2)
    magnitude = float(number)
    if not math.isfinite(magnitude):
        raise UnitError(f"{shown}: the number overflows; expected a finite number")
    if unit_text in _OFFSET_UNITS:
        # offset units (degC, degF) are not multiplicative: built directly
        return ureg.Quantity(magnitude, _OFFSET_UNITS[unit_text])
    if not unit_text:
        raise UnitError(f"bare number {shown} has no unit")
    if not _UNIT_EXPR.match(unit_text):
        raise UnitError(f"cannot read {shown}: the unit {_shown(unit_text)} is not a unit "
                        "expression (unit names joined by *, / and integer powers)")
    try:
        units = ureg.parse_units(unit_text)
    except Exception:  # pint raises several unrelated types for unknown names
        raise UnitError(f"cannot read {shown}: unknown unit {_shown(unit_text)}") from None
    try:
        q = ureg.Quantity(magnitude, units)
        if not math.isfinite(float(q.to_base_units().magnitude)):
            raise OverflowError
    except (OverflowError, ValueError, ZeroDivisionError):
        raise UnitError(f"{shown}: the value overflows; expected a finite quantity") from None
    except Exception:
        pass  # offset-free non-convertible units: checked by the caller's conversion
    return q


def _shown(text) -> str:
    """``repr`` of a text for messages: one line, at most 40 characters."""
    r = repr(text)
    return r if len(r) <= 40 else r[:37] + "..."


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
            out = float(q.to("K").magnitude)
        except Exception:
            raise UnitError(f"{_shown(value)} is not {words}") from None
        if not math.isfinite(out):
            raise UnitError(f"{_shown(value)} is not finite; expected {words}")
        return out
    try:
        out = float(q.to(unit).magnitude)
    except pint.DimensionalityError:
        raise UnitError(f"{_shown(value)} is not {words}") from None
    except Exception:
        raise UnitError(f"cannot convert {_shown(value)}; expected {words}") from None
    if not math.isfinite(out):
        raise UnitError(f"{_shown(value)} is not finite in {unit}; expected {words}")
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
        out = float(q.to("ML").magnitude) * monolayer_nm
    else:
        try:
            out = float(q.to("nm").magnitude)
        except pint.DimensionalityError:
            raise UnitError(f"{_shown(value)} is not {words}") from None
    if not math.isfinite(out):
        raise UnitError(f"{_shown(value)} is not finite in nm; expected {words}")
    return out


def spectral_to_eV(value) -> float:
    """Photon energy in eV of a spectral target: wavelength, energy, wavenumber or frequency.

    ``'4.6 um'``, ``'270 meV'``, ``'1100 cm^-1'`` and ``'65 THz'`` are all accepted.

    Raises
    ------
    UnitError
        If the value is none of these, or its photon energy is outside
        ``RANGES['photon_energy']``.
    """
    energy_eV = _spectral_eV(value)
    bad = out_of_range("photon_energy", energy_eV)
    if bad:
        raise UnitError(f"{value!r} {bad}")
    return energy_eV


def _spectral_eV(value) -> float:
    """:func:`spectral_to_eV` without the range check."""
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
# ---------------------------------------------------------------------------
# Plausible ranges of the quantities a user gives (checked where values enter)
# ---------------------------------------------------------------------------
#: ``name -> (low, high, unit, what)``: the accepted closed range of each kind of
#: quantity.  The README's "Limits" table lists the same ranges; values outside are
#: refused with a message that names the key or option and the range.
RANGES: dict[str, tuple[float, float, str, str]] = {
    "thickness": (1e-3, 100_000.0, "nm", "a layer thickness"),
    "total_thickness": (1e-3, 100_000.0, "nm", "the total stack thickness"),
    "mass": (1e-3, 100.0, "m0", "an effective mass"),
    "edge": (-1000.0, 1000.0, "eV", "a band edge"),  # model walls up to 1 keV stand in for hard walls
    "gap": (0.0, 20.0, "eV", "a band gap"),
    "spin_orbit": (0.0, 5.0, "eV", "a spin-orbit splitting"),
    "kane_energy": (0.0, 100.0, "eV", "a Kane energy"),
    "deformation": (-100.0, 100.0, "eV", "a deformation potential"),
    "luttinger": (-100.0, 100.0, "1", "a Luttinger parameter"),
    "kane_F": (-20.0, 20.0, "1", "a remote-band parameter F"),
    "dielectric": (1.0, 100.0, "1", "a relative permittivity"),
    "lattice_constant": (0.1, 2.0, "nm", "a lattice constant"),
    "elastic": (1.0, 1000.0, "GPa", "an elastic constant"),
    "volume_density": (0.0, 1e21, "cm^-3", "a doping density"),
    "sheet_density": (0.0, 1e15, "cm^-2", "a sheet doping density"),
    "donor_level": (0.0, 1.0, "eV", "a donor level"),
    "temperature": (1e-3, 1000.0, "K", "a temperature"),
    "field": (-2000.0, 2000.0, "kV/cm", "an electric field"),
    "fermi_level": (-20.0, 20.0, "eV", "a Fermi level"),
    # 0.1 meV (24 GHz, 12.4 mm) to 20 eV (62 nm): every photon a quantum-well line can give
    "photon_energy": (1e-4, 20.0, "eV", "a photon energy (wavelength 62 nm to 12.4 mm)"),
}

#: Material parameter fields (``materials.USER_KEYS``) -> their range name.
FIELD_RANGES: dict[str, str] = {
    "conduction_edge_eV": "edge", "valence_edge_eV": "edge", "band_gap_eV": "gap",
    "band_gap_X_eV": "gap", "band_gap_L_eV": "gap", "electron_mass": "mass",
    "heavy_hole_mass": "mass", "light_hole_mass": "mass", "gamma1": "luttinger",
    "gamma2": "luttinger", "gamma3": "luttinger", "lattice_constant_nm": "lattice_constant",
    "spin_orbit_eV": "spin_orbit", "kane_energy_eV": "kane_energy", "kane_F": "kane_F",
    "dielectric_constant": "dielectric", "ac_eV": "deformation", "av_eV": "deformation",
    "b_eV": "deformation", "c11_GPa": "elastic", "c12_GPa": "elastic",
}


def range_text(kind: str) -> str:
    """``'1e-3 to 100 m0'``: the accepted range of a kind of quantity, for messages."""
    lo, hi, unit, _ = RANGES[kind]
    u = "" if unit == "1" else f" {unit}"
    return f"{lo:g} to {hi:g}{u}"


def out_of_range(kind: str, value: float) -> str | None:
    """None if ``value`` (in the range's unit) is finite and inside ``RANGES[kind]``,
    else the message part 'is outside ...; expected ...'."""
    lo, hi, unit, what = RANGES[kind]
    if isinstance(value, float) and not math.isfinite(value):
        return f"is not finite; expected {what} from {range_text(kind)}"
    if lo > 0 and value <= 0:
        return f"is not positive (the value must be positive); expected {what} from " \
            f"{range_text(kind)}"
    if not lo <= value <= hi:
        return f"is outside the accepted range; expected {what} from {range_text(kind)}"
    return None
