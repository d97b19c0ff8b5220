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
