"""Photon units: which one a line is shown in, and how its value and spreads are written.

The one home of the spectral unit choice.  A line is shown in the unit its
spectral region is read in, unless the user chose one (``--unit``):

* nm below 2 µm (near infrared and visible: laser and interband lines),
* µm from 2 µm to 30 µm (mid- and long-wave infrared),
* THz beyond 30 µm (far infrared), with its energy in meV beside it.

Spreads and sensitivities follow the line's unit: nm per ML for a laser
line, µm per ML in the infrared, GHz per kV/cm (or meV) in the THz range.
They are computed from wavelength shifts [nm] by the local derivative of
the unit against the wavelength at the nominal line (linear, like the shifts
themselves), keeping the sign: a longer wavelength is a lower frequency.

Internal values stay plain floats in eV (energies) and µm / nm
(wavelengths); the conversions use :mod:`qwell.constants` (CODATA 2018).
"""

from __future__ import annotations

import math

import numpy as np

from .constants import EV_PER_CM1, EV_PER_THZ, HC_EV_NM, HC_EV_UM
from .errors import QwellError

__all__ = [
    "axis_label","UNITS", "SPREAD_UNITS", "LINE_SPEC", "SPREAD_SPEC", "energy_of_um", "parse_unit", "auto_unit", "line_unit", "from_eV",
           "spread_from_nm", "spread_unit", "measures", "spread_measures", "format_line",
           "format_spread", "energy_text", "unit_label", "column", "UnitChoiceError", "NEAR_IR_LIMIT_UM",
           "FAR_IR_LIMIT_UM"]

#: The photon units a user can choose, in the spelling of the ``--unit`` option.
UNITS = ("nm", "um", "cm-1", "THz", "meV")

#: Unit of a spread or sensitivity of a line shown in each unit.
SPREAD_UNITS = {"nm": "nm", "um": "um", "cm-1": "cm-1", "THz": "GHz", "meV": "meV"}

#: Below this wavelength [µm] lines are shown in nm (near infrared and shorter).
NEAR_IR_LIMIT_UM = 2.0
#: Beyond this wavelength [µm] lines are shown in THz (far infrared).
FAR_IR_LIMIT_UM = 30.0

#: How each unit is printed.
_LABELS = {"nm": "nm", "um": "µm", "cm-1": "cm⁻¹", "THz": "THz", "GHz": "GHz", "meV": "meV"}

#: Other spellings accepted by :func:`parse_unit`.
_ALIASES = {"nm": "nm", "um": "um", "µm": "um", "μm": "um", "micron": "um", "cm-1": "cm-1",
            "cm^-1": "cm-1", "1/cm": "cm-1", "cm⁻¹": "cm-1", "thz": "THz", "mev": "meV"}

#: Significant digits of a line in each unit (sub-0.1 % readings of a line).
LINE_SPEC = {"nm": ".2f", "um": ".5f", "cm-1": ".2f", "THz": ".4f", "meV": ".3f"}
_DIGITS = LINE_SPEC
#: Format of a spread in each spread unit.
SPREAD_SPEC = {"nm": ".3f", "um": ".5f", "cm-1": ".3f", "GHz": ".2f", "meV": ".4f"}
_SPREAD_DIGITS = SPREAD_SPEC


class UnitChoiceError(QwellError, ValueError):
    """A photon unit that is none of :data:`UNITS`."""


def parse_unit(text: str) -> str:
    """The canonical name (one of :data:`UNITS`) of a unit the user typed.

    Raises
    ------
    UnitChoiceError
        Unknown unit; the message lists the choices.
    """
    key = str(text).strip()
    unit = _ALIASES.get(key) or _ALIASES.get(key.lower())
    if unit is None:
        raise UnitChoiceError(f"--unit {text!r}: unknown photon unit; expected one of "
                              + ", ".join(UNITS))
    return unit


def auto_unit(energy_eV: float) -> str:
    """The unit of a line's spectral region: nm (< 2 µm), um (2-30 µm) or THz (> 30 µm).

    A non-finite or non-positive energy gives 'um' (the neutral choice).
    """
    if energy_eV is None or not math.isfinite(energy_eV) or energy_eV <= 0:
        return "um"
    lam_um = HC_EV_UM / energy_eV
    if lam_um < NEAR_IR_LIMIT_UM:
        return "nm"
    if lam_um > FAR_IR_LIMIT_UM:
        return "THz"
    return "um"


def line_unit(energy_eV: float, choice: str | None = None) -> str:
    """``choice`` (checked) when given, else :func:`auto_unit` of the line."""
    return parse_unit(choice) if choice else auto_unit(energy_eV)


def from_eV(energy_eV, unit: str):
    """A photon energy [eV] (float or numpy array) in ``unit``.

    nm and um: vacuum wavelength hc/E; cm-1: E / (hc × 1 cm^-1); THz: E / h;
    meV: 1000 E.  Non-positive energies give NaN for the wavelengths.
    """
    unit = parse_unit(unit)
    if unit == "meV":
        return energy_eV * 1e3
    if unit == "THz":
        return energy_eV / EV_PER_THZ
    if unit == "cm-1":
        return energy_eV / EV_PER_CM1
    scale = HC_EV_NM if unit == "nm" else HC_EV_UM
    e = np.asarray(energy_eV, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(e > 0, scale / np.where(e > 0, e, 1.0), np.nan)
    return float(out) if out.ndim == 0 else out


def energy_of_um(wavelength_um: float) -> float:
    """Photon energy [eV] of a vacuum wavelength [µm]; NaN for none or a non-positive one."""
    if wavelength_um is None or not math.isfinite(wavelength_um) or wavelength_um <= 0:
        return math.nan
    return HC_EV_UM / wavelength_um


def spread_unit(unit: str) -> str:
    """The unit of spreads and sensitivities of a line shown in ``unit`` (THz -> GHz)."""
    return SPREAD_UNITS[parse_unit(unit)]


def spread_from_nm(delta_nm, energy_eV: float, unit: str):
    """A wavelength shift [nm] at a line of energy ``energy_eV`` in the spread unit of ``unit``.

    Linear: Δλ times d(measure)/dλ at the line.  For energy-like units the
    sign flips (dE/dλ = -E/λ): a positive (red) shift is a negative change of
    frequency, wavenumber or energy.  NaN when the line does not exist.
    """
    unit = parse_unit(unit)
    if unit == "nm":
        return delta_nm * 1.0
    if unit == "um":
        return delta_nm * 1e-3
    e = np.asarray(np.nan if energy_eV is None else energy_eV, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        e = np.where(np.isfinite(e) & (e > 0), e, np.nan)
        de_eV = -e * e / HC_EV_NM * np.asarray(delta_nm, dtype=float)   # dE = -(E/λ) dλ
    if unit == "meV":
        out = de_eV * 1e3
    elif unit == "THz":  # spreads of THz lines in GHz
        out = de_eV / EV_PER_THZ * 1e3
    else:
        out = de_eV / EV_PER_CM1
    return float(out) if np.ndim(out) == 0 else out


def measures(energy_eV: float, prefix: str = "") -> dict:
    """Every SI-suffixed measure of a line, for JSON: wavelength_nm, wavelength_um,
    wavenumber_cm1, frequency_THz, energy_meV (each with ``prefix``); None if absent."""
    ok = energy_eV is not None and math.isfinite(energy_eV) and energy_eV > 0

    def v(unit):
        return float(from_eV(energy_eV, unit)) if ok else None
    return {f"{prefix}wavelength_nm": v("nm"), f"{prefix}wavelength_um": v("um"),
            f"{prefix}wavenumber_cm1": v("cm-1"), f"{prefix}frequency_THz": v("THz"),
            f"{prefix}energy_meV": v("meV")}


def spread_measures(delta_nm: float, energy_eV: float, prefix: str = "",
                    suffix: str = "") -> dict:
    """A wavelength shift in every spread unit, for JSON: ``{prefix}nm``, ``um``, ``cm1``,
    ``GHz``, ``meV`` (each followed by ``suffix``); None when undefined."""
    def v(unit):
        if delta_nm is None:
            return None
        x = float(spread_from_nm(delta_nm, energy_eV, unit))
        return x if math.isfinite(x) else None
    return {f"{prefix}nm{suffix}": v("nm"), f"{prefix}um{suffix}": v("um"),
            f"{prefix}cm1{suffix}": v("cm-1"), f"{prefix}GHz{suffix}": v("THz"),
            f"{prefix}meV{suffix}": v("meV")}


#: Symbol of the measure shown in each unit, for table headings.
_SYMBOLS = {"nm": "λ", "um": "λ", "cm-1": "1/λ", "THz": "ν", "meV": "E"}


def column(unit: str, mark: str = "") -> str:
    """Table heading of a line in ``unit``: 'λ µm', 'ν(-) THz', '1/λ cm⁻¹', 'E meV'."""
    unit = parse_unit(unit)
    return f"{_SYMBOLS[unit]}{mark} {unit_label(unit)}"


def axis_label(unit: str) -> str:
    """Plot-axis label of a line in ``unit``: 'wavelength (µm)', 'frequency (THz)', ..."""
    unit = parse_unit(unit)
    what = {"nm": "wavelength", "um": "wavelength", "cm-1": "wavenumber", "THz": "frequency",
            "meV": "photon energy"}[unit]
    return f"{what} ({unit_label(unit)})"


def unit_label(unit: str) -> str:
    """How a unit (or spread unit) is printed: 'µm', 'cm⁻¹', 'THz', 'GHz', ..."""
    return _LABELS.get(unit, unit)


def format_line(energy_eV: float, unit: str, *, with_unit: bool = True,
                none: str = "—") -> str:
    """A line in ``unit`` with the digits of that unit, e.g. '3.0000 THz', '4.60000 µm'."""
    unit = parse_unit(unit)
    if energy_eV is None or not math.isfinite(energy_eV) or energy_eV <= 0:
        return none
    text = format(float(from_eV(energy_eV, unit)), _DIGITS[unit])
    return text + (f" {unit_label(unit)}" if with_unit else "")


def energy_text(energy_eV: float, unit: str, digits: int = 6) -> str:
    """The energy written beside a line shown in ``unit``: meV beside THz, THz beside meV,
    eV (``digits`` decimals) otherwise."""
    unit = parse_unit(unit)
    if energy_eV is None or not math.isfinite(energy_eV):
        return "—"
    if unit == "THz":
        return f"{format(energy_eV * 1e3, _DIGITS['meV'])} meV"
    if unit == "meV":
        return f"{format(energy_eV / EV_PER_THZ, _DIGITS['THz'])} THz"
    return f"{energy_eV:.{digits}f} eV"


def format_spread(delta_nm, energy_eV: float, unit: str, *, sign: str = "",
                  with_unit: bool = True, none: str = "—") -> str:
    """A wavelength shift [nm] written in the spread unit of ``unit``.

    ``sign``: '' (plain), '+' (always signed) or '±' (a half-width, unsigned).
    """
    if delta_nm is None:
        return none
    v = spread_from_nm(delta_nm, energy_eV, unit)
    if not math.isfinite(v):
        return none
    su = spread_unit(unit)
    spec = _SPREAD_DIGITS[su]
    if sign == "±":
        text = "±" + format(abs(v), spec)
    else:
        text = format(v, ("+" if sign == "+" else "") + spec)
        digits = text.lstrip("+-").replace(".", "").strip("0")
        if text.startswith("-") and not digits:
            text = ("+" if sign == "+" else "") + text[1:]
    return text + (f" {unit_label(su)}" if with_unit else "")
