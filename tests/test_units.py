"""Unit handling at the edges (qwell.units)."""

import time

import pytest
from scipy import constants as sc

from qwell.errors import UnitError
from qwell.units import HC_EV_UM, eV_to_um, out_of_range, spectral_to_eV, thickness_nm, to_float


def test_hc_from_codata():
    # Source: CODATA via scipy.constants; hc = 1.239842 eV um (common practice value).
    assert HC_EV_UM == pytest.approx(sc.h * sc.c / sc.e * 1e6, rel=1e-15)
    assert HC_EV_UM == pytest.approx(1.239842, abs=1e-6)


@pytest.mark.parametrize("text, unit, value", [
    ("5 nm", "nm", 5.0),
    ("50 angstrom", "nm", 5.0),
    ("50 Å", "nm", 5.0),
    ("0.1 um", "nm", 100.0),
    ("250 meV", "eV", 0.25),
    ("12 kV/cm", "kV/cm", 12.0),
    ("1.2e6 V/m", "kV/cm", 12.0),
    ("77 K", "K", 77.0),
    ("25 degC", "K", 298.15),
    ("-196 °C", "K", 77.15),
    ("1e18 cm^-3", "cm^-3", 1e18),
])
def test_to_float_conversions(text, unit, value):
    # Unit definitions: pint's default registry (SI); conversions are exact by definition.
    assert to_float(text, unit) == pytest.approx(value, rel=1e-12)


def test_bare_number_names_expected_unit():
    with pytest.raises(UnitError, match=r"bare number 6.5 has no unit; expected a length \(e.g. '5 nm'"):
        to_float(6.5, "nm")


def test_wrong_dimension():
    with pytest.raises(UnitError, match="'5 eV' is not a length"):
        to_float("5 eV", "nm")


def test_monolayers_use_given_lattice():
    # Monolayer on (001) = a/2 (common practice, no source); GaAs a = 0.565325 nm
    # (Vurgaftman, Meyer, Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), from memory).
    assert thickness_nm("23 ML", 0.565325 / 2) == pytest.approx(23 * 0.2826625, rel=1e-12)
    with pytest.raises(UnitError, match="monolayers need a lattice constant"):
        thickness_nm("3 ML", None)


@pytest.mark.parametrize("text", ["4.6 um", "4600 nm"])
def test_spectral_wavelength(text):
    # lambda = hc / E with CODATA constants (scipy.constants).
    assert spectral_to_eV(text) == pytest.approx(sc.h * sc.c / sc.e / 4.6e-6, rel=1e-12)


def test_spectral_other_forms():
    # E = h c nu~ and E = h f (CODATA via scipy.constants).
    assert spectral_to_eV("270 meV") == pytest.approx(0.27)
    assert spectral_to_eV("1100 cm^-1") == pytest.approx(sc.h * sc.c * 1100e2 / sc.e, rel=1e-12)
    assert spectral_to_eV("65 THz") == pytest.approx(sc.h * 65e12 / sc.e, rel=1e-12)
    assert eV_to_um(1.0) == pytest.approx(HC_EV_UM)
    with pytest.raises(UnitError, match="not a wavelength, energy, wavenumber or frequency"):
        spectral_to_eV("3 kg")


@pytest.mark.parametrize("text", ["9**9**9 nm", "10**400 nm", "5 nm + 3 nm", "2*3 nm", "(5) nm",
                                  "5 nm**9**9", "__import__('os') nm", "1e400 nm", "inf nm",
                                  "nan eV", "5 nm^-99"])
def test_no_arithmetic_and_no_overflow(text):
    # only a number and a unit expression reach pint; nothing is evaluated, and a number
    # or a unit power that overflows a float is refused (common practice, no source)
    t0 = time.perf_counter()
    with pytest.raises(UnitError):
        to_float(text, "nm")
    assert time.perf_counter() - t0 < 1.0


@pytest.mark.parametrize("text, unit, value", [
    ("1e18 cm^-3", "cm^-3", 1e18), ("1100 cm**-1", "1/cm", 1100.0), ("12 kV / cm", "kV/cm", 12.0),
    ("1 1/um", "1/um", 1.0), ("2.5E-3 eV", "eV", 2.5e-3), ("+5 nm", "nm", 5.0),
])
def test_unit_expressions_still_read(text, unit, value):
    assert to_float(text, unit) == pytest.approx(value, rel=1e-12)


def test_ranges_refuse_outside_and_non_finite():
    assert out_of_range("mass", 0.067) is None
    assert "from 0.001 to 100 m0" in out_of_range("mass", 1e6)
    assert "must be positive" in out_of_range("mass", -0.1)
    assert "not finite" in out_of_range("temperature", float("inf"))
