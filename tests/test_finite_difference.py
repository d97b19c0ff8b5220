"""The finite-difference solver's contract beyond the reference wells
(tests/test_reference_wells.py holds the closed-form energies)."""

from __future__ import annotations

import numpy as np
import pytest

from qwell.bands import band_from_layers
from qwell.errors import ParameterError
from qwell.solvers import METHODS, solve
from qwell.solvers.exact import solve_exact
from qwell.solvers.finite_difference import solve_finite_difference


def _double_well(barrier_nm):
    return band_from_layers([(20.0, 0.25, 0.09), (8.0, 0.0, 0.067), (barrier_nm, 0.25, 0.09),
                             (8.0, 0.0, 0.067), (20.0, 0.25, 0.09)])


def test_dispatched_through_methods():
    band = _double_well(4.0)
    assert METHODS["finite_difference"] is solve_finite_difference
    a = solve(band, "finite_difference")
    b = solve_finite_difference(band)
    assert np.array_equal(a.energies_eV, b.energies_eV)
    assert a.method == "finite_difference"


def test_orthonormal_even_for_a_near_degenerate_doublet():
    # Eigenvectors of a real symmetric matrix are orthonormal (linear algebra; common
    # practice, no source): <psi_i|psi_j> = delta_ij with the grid sum, also for the doublet
    # of two weakly coupled wells 14 nm apart (split by a few ueV).
    lev = solve_finite_difference(_double_well(14.0))
    psi = np.array([s.psi for s in lev.states])
    h = lev.states[0].z_nm[1] - lev.states[0].z_nm[0]
    np.testing.assert_allclose(psi @ psi.T * h, np.eye(len(lev)), atol=1e-10)
    # the doublet: both members found, their splitting tiny against the gap to the next pair
    e = lev.energies_eV
    assert 0.0 < e[1] - e[0] < 1e-2 * (e[2] - e[1])
    for s in lev.states:
        assert sum(s.layer_probability) == pytest.approx(1.0, abs=1e-12)


def test_agrees_with_exact_within_its_error_estimate():
    # Parabolic flat wells: the exact solver is exact (1 ueV, tests/test_exact.py), so the
    # difference is the finite-difference error, which the reported tolerance must cover.
    band = _double_well(4.0)
    fd, ex = solve_finite_difference(band), solve_exact(band)
    assert len(fd) == len(ex)
    for a, b in zip(fd.states, ex.states):
        assert abs(a.energy_eV - b.energy_eV) <= a.tolerance_eV
    # without the estimate the states say so and carry the requested tolerance
    raw = solve_finite_difference(band, error_estimate=False, tolerance_eV=1e-3)
    assert np.array_equal(raw.energies_eV, fd.energies_eV)
    assert all(s.tolerance_eV == 1e-3 and "not estimated" in s.message for s in raw.states)


def test_hole_band_sign_window_and_options():
    band = band_from_layers([(20.0, 0.2, 0.45), (6.0, 0.0, 0.35), (20.0, 0.2, 0.45)],
                            name="heavy_hole", carrier_sign=-1)
    lev = solve_finite_difference(band)
    np.testing.assert_allclose(lev.energies_eV, [-s.carrier_energy_eV for s in lev.states])
    assert lev.states[0].label == "hh1"
    low = solve_finite_difference(band, max_energy_eV=lev.states[0].carrier_energy_eV + 1e-6)
    assert len(low) == 1
    assert len(solve_finite_difference(band, max_states=1)) == 1
    assert solve_finite_difference(band, wavefunctions=False).states[0].psi is None
    with pytest.raises(ParameterError, match="grid_step_nm"):
        solve_finite_difference(band, grid_step_nm=0.0)
    with pytest.raises(ParameterError, match="tolerance_eV"):
        solve_finite_difference(band, tolerance_eV=0.0)


def test_nonparabolic_finite_well_meets_the_closed_form():
    # BenDaniel-Duke matching of a symmetric square well with the two-band energy-dependent
    # mass m(E) = m (1 + (E - V)/Eg) (Nelson, Miller, Kleinman, Phys. Rev. B 35, 7770 (1987)):
    # even states satisfy k tan(k L/2) / m_w(E) = kappa / m_b(E), k = sqrt(2 m_w E)/hbar,
    # kappa = sqrt(2 m_b (V - E))/hbar; solved here with scipy.optimize.brentq.
    import math

    from scipy.constants import e, hbar, m_e
    from scipy.optimize import brentq

    from qwell.bands import band_from_layers
    from qwell.solvers.finite_difference import solve_finite_difference

    v, length, mw, mb, gw, gb = 0.25, 8.0, 0.067, 0.092, 1.52, 1.80
    band = band_from_layers([(30, v, mb, gb), (length, 0.0, mw, gw), (30, v, mb, gb)],
                            nonparabolic=True)

    def mismatch(E):
        m_w = mw * (1 + E / gw)
        m_b = mb * (1 + (E - v) / gb)
        k = math.sqrt(2 * m_w * m_e * E * e) / hbar * 1e-9          # nm^-1
        kap = math.sqrt(2 * m_b * m_e * (v - E) * e) / hbar * 1e-9
        return k * math.tan(k * length / 2) / m_w - kap / m_b

    def half_phase(E):     # k(E) L/2 - pi/2: the ground state lies below its zero
        m_w = mw * (1 + E / gw)
        return math.sqrt(2 * m_w * m_e * E * e) / hbar * 1e-9 * length / 2 - math.pi / 2

    e_hi = min(brentq(half_phase, 1e-9, 10.0) * (1 - 1e-9), v - 1e-9)
    e1 = brentq(mismatch, 1e-6, e_hi, xtol=1e-14)
    lev = solve_finite_difference(band, grid_step_nm=0.02, nonparabolic=True, tolerance_eV=1e-5)
    assert lev["e1"].energy_eV == pytest.approx(e1, abs=max(2 * lev["e1"].tolerance_eV, 1e-6))
    # the parabolic (band-edge mass) solve misses it by far more than the discretisation error
    par = solve_finite_difference(band, grid_step_nm=0.02, tolerance_eV=1e-5)
    assert abs(par["e1"].energy_eV - e1) > 100 * abs(lev["e1"].energy_eV - e1)
