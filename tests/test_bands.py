"""The Band contract (qwell.bands): claddings, field tilt, nonparabolic mass."""

import numpy as np
import pytest

from qwell.bands import band_from_layers


def test_claddings_flat_and_field_tilt():
    # A field F adds +e F z to the potential energy of an electron; 1 kV/cm = 1e-4 eV/nm
    # (definition of the volt, common practice, no source).
    b = band_from_layers([(10, 0.3, 0.09), (5, 0.0, 0.067), (10, 0.3, 0.09)], field_kV_per_cm=10)
    v = b.potential([-50.0, 0.0, 12.5, 25.0, 80.0])
    assert v == pytest.approx([0.3, 0.3, 0.0125, 0.325, 0.325])
    assert b.confinement_limit_eV == pytest.approx(0.3)
    assert list(b.boundaries_nm) == [0, 10, 15, 25]


def test_hole_band_tilts_the_other_way():
    b = band_from_layers([(10, 0.3, 0.5), (10, 0.0, 0.5)], field_kV_per_cm=10, carrier_sign=-1,
                         name="heavy_hole")
    # carrier potential -Ev: the hole sees -F z; at z = 20 nm, -(10 kV/cm * 1e-4 eV/nm) * 20 nm
    assert b.potential([20.0])[0] == pytest.approx(-10 * 1e-4 * 20)
    assert b.profile_energy(0.1) == pytest.approx(-0.1)


def test_two_band_nonparabolic_mass():
    # m(E) = m (1 + (E - V)/Eg): D. F. Nelson, R. C. Miller, D. A. Kleinman,
    # Phys. Rev. B 35, 7770 (1987).
    b = band_from_layers([(5, 0.3, 0.09, 1.8), (5, 0.0, 0.067, 1.42)], nonparabolic=True)
    assert b.mass([7.0], 0.1)[0] == pytest.approx(0.067 * (1 + 0.1 / 1.42))
    assert b.mass([2.0], 0.1)[0] == pytest.approx(0.09 * (1 + (0.1 - 0.3) / 1.8))
    parab = band_from_layers([(5, 0.0, 0.067, 1.42)], nonparabolic=False)
    assert parab.mass(np.array([1.0]), 0.5)[0] == pytest.approx(0.067)
