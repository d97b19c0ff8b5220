"""Tests of the semiclassical (WKB) estimator against closed forms and
independent solutions written here.

Constants: hbar^2/(2 m0) from CODATA 2018 (``qwell.constants``, checked against the
published values in tests/test_constants.py).
"""

import warnings

import warnings as _w
from pathlib import Path

import numpy as np
from scipy.integrate import quad as _quad

from qwell.constants import HBAR2_2M0_EV_NM2 as HB
from qwell.levels import prepare_profile
from qwell.stack import load_stack
from qwell.solvers.semiclassical import quantisation_phase as _quantisation_phase
import pytest
from scipy import special
from scipy.linalg import eigh_tridiagonal
from scipy.optimize import brentq

from qwell.bands import Band, Piece, band_from_layers
from qwell.constants import HBAR2_2M0_EV_NM2
from qwell.errors import ParameterError, ValidityWarning
from qwell.solvers.semiclassical import (
    VALIDITY_THRESHOLD,
    quantisation_phase,
    solve_semiclassical,
)

# hbar^2/(2 m0) in eV nm^2, CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021))
C_EV_NM2 = HBAR2_2M0_EV_NM2
M_GAAS = 0.067      # GaAs electron mass [m0], Vurgaftman et al., J. Appl. Phys. 89, 5815 (2001) (from memory)


# ---------------------------------------------------------------- independent references
def finite_well_levels(width_nm, v_left_eV, v_right_eV, m_w, m_l, m_r, mass_of=None, n_scan=20001):
    """Bound levels of a flat well (V=0) between flat barriers, BenDaniel-Duke matching.

    Direct matching of psi = exp(kappa_l z) | cos kz + c sin kz | D exp(-kappa_r (z-L)) with
    psi and psi'/m continuous (D. J. BenDaniel and C. B. Duke, Phys. Rev. 152, 683 (1966);
    G. Bastard, Phys. Rev. B 24, 5693 (1981)), written as a pole-free mismatch function and
    solved with brentq.  ``mass_of(E, region)`` optionally gives energy-dependent masses.
    """
    top = min(v_left_eV, v_right_eV)

    def masses(e):
        if mass_of is None:
            return m_w, m_l, m_r
        return mass_of(e, "w"), mass_of(e, "l"), mass_of(e, "r")

    def mismatch(e):
        mw, ml, mr = masses(e)
        k = np.sqrt(mw * e / C_EV_NM2)
        kl = np.sqrt(ml * (v_left_eV - e) / C_EV_NM2)
        kr = np.sqrt(mr * (v_right_eV - e) / C_EV_NM2)
        # B = 1, C k / m_w = kappa_l / m_l  =>  C = m_w kappa_l / (m_l k); multiply through by k
        cc = mw * kl / ml
        L = width_nm
        return ((-k * k * np.sin(k * L) + cc * k * np.cos(k * L)) / mw
                + (kr / mr) * (k * np.cos(k * L) + cc * np.sin(k * L)))

    es = np.linspace(1e-9, top - 1e-9, n_scan)
    f = np.array([mismatch(e) for e in es])
    roots = []
    for i in range(len(es) - 1):
        if np.sign(f[i]) != np.sign(f[i + 1]):
            roots.append(brentq(mismatch, es[i], es[i + 1], xtol=1e-15, rtol=1e-15))
    return np.array(roots)


def fd_levels(band, step_nm=0.01, pad_nm=30.0, count=6):
    """Finite-difference eigenvalues of -d/dz (C/m) d/dz + V (BenDaniel-Duke form),
    masses at half steps, Dirichlet far inside the claddings (independent numerical check)."""
    z = np.arange(band.z_start_nm - pad_nm, band.z_end_nm + pad_nm + step_nm / 2, step_nm)
    v = band.potential(z)
    mid = 0.5 * (z[1:] + z[:-1])
    t = C_EV_NM2 / (band.edge_mass(mid) * step_nm ** 2)
    d = v.copy()
    d[:-1] += t
    d[1:] += t
    return eigh_tridiagonal(d, -t, select="i", select_range=(0, count - 1), eigvals_only=True)


# ---------------------------------------------------------------- harmonic well
def test_harmonic_well_exact():
    # WKB is exact for the oscillator: E_n = hbar omega (n - 1/2)
    # L. D. Landau and E. M. Lifshitz, Quantum Mechanics, §23 and §48 (problem on the oscillator).
    a = 0.002  # V = a z^2 [eV/nm^2] -> hbar omega = 2 sqrt(a hbar^2/(2 m))
    p = Piece(-60.0, 60.0, 0, kind="smooth", potential_fn=lambda z: a * z ** 2,
              mass_fn=lambda z: M_GAAS + 0.0 * z)
    band = Band("conduction", (p,))
    lev = solve_semiclassical(band, max_states=8)
    hw = 2.0 * np.sqrt(a * C_EV_NM2 / M_GAAS)
    expect = hw * (np.arange(1, 9) - 0.5)
    np.testing.assert_allclose(lev.energies_eV, expect, rtol=1e-3)
    assert [s.label for s in lev.states] == [f"e{i}" for i in range(1, 9)]
    assert lev.method == "semiclassical"


def test_harmonic_well_hole_band():
    # same oscillator for a hole band: carrier energies hbar omega (n - 1/2), band-diagram
    # energies with the opposite sign (carrier convention of qwell.bands).
    # Landau and Lifshitz, Quantum Mechanics, §23.
    a, m = 0.003, 0.35
    p = Piece(-40.0, 40.0, 0, kind="smooth", potential_fn=lambda z: a * z ** 2,
              mass_fn=lambda z: m + 0.0 * z)
    band = Band("heavy_hole", (p,), carrier_sign=-1)
    lev = solve_semiclassical(band, max_states=3)
    hw = 2.0 * np.sqrt(a * C_EV_NM2 / m)
    np.testing.assert_allclose([s.carrier_energy_eV for s in lev.states],
                               hw * (np.arange(1, 4) - 0.5), rtol=1e-3)
    np.testing.assert_allclose(lev.energies_eV, -hw * (np.arange(1, 4) - 0.5), rtol=1e-3)
    assert [s.label for s in lev.states] == ["hh1", "hh2", "hh3"]


# ---------------------------------------------------------------- triangular well
@pytest.mark.parametrize("barrier_eV", [np.inf, 1e6])
def test_triangular_well_hard_wall(barrier_eV):
    # WKB with one hard wall and one smooth turning point:
    # E_n = (hbar^2/2m)^(1/3) (eF)^(2/3) [3 pi/2 (n - 1/4)]^(2/3)
    # T. Ando, A. B. Fowler and F. Stern, Rev. Mod. Phys. 54, 437 (1982), triangular-well
    # approximation (written there with n + 3/4, n = 0, 1, ...) (from memory).
    # A finite 1e6 eV barrier moves the wall by 1/kappa ~ 1e-3 nm, 1e-4 of E_1.
    field = 100.0
    f_eV_nm = field * 1e-4
    band = band_from_layers([(5.0, barrier_eV, M_GAAS), (300.0, 0.0, M_GAAS)],
                            field_kV_per_cm=field)
    v_wall = f_eV_nm * 5.0
    lev = solve_semiclassical(band, max_states=5)
    n = np.arange(1, 6)
    closed = (C_EV_NM2 / M_GAAS) ** (1 / 3) * f_eV_nm ** (2 / 3) * (1.5 * np.pi * (n - 0.25)) ** (2 / 3)
    np.testing.assert_allclose(lev.energies_eV - v_wall, closed, rtol=1e-3)
    # exact Airy solution of the hard-wall triangular well: E_n = (hbar^2/2m)^(1/3)(eF)^(2/3)|a_n|
    # (Landau and Lifshitz, Quantum Mechanics, §24; zeros from scipy.special.ai_zeros);
    # the WKB ground state is within 1 % (the known error of the method for n = 1).
    a_n = -special.ai_zeros(1)[0][0]
    airy_e1 = (C_EV_NM2 / M_GAAS) ** (1 / 3) * f_eV_nm ** (2 / 3) * a_n
    assert abs(lev.states[0].energy_eV - v_wall - airy_e1) / airy_e1 < 0.01
    # a hard wall plus smooth point: quantum-number function G = 1 at the ground state
    qp = quantisation_phase(band, [lev.states[0].carrier_energy_eV])[0]
    assert len(qp.regions) == 1
    assert qp.regions[0].right_kind == "turning"
    assert qp.regions[0].quantum_number == pytest.approx(1.0, abs=1e-5)


# ---------------------------------------------------------------- finite / infinite square wells
def test_finite_square_well_equals_transcendental():
    # step phases make the estimate equal to the exact finite-well equation
    # (Bastard, Phys. Rev. B 24, 5693 (1981)), BenDaniel-Duke mass ratio; 1 ueV.
    band = band_from_layers([(20.0, 0.3, 0.092), (10.0, 0.0, M_GAAS), (20.0, 0.3, 0.092)])
    with warnings.catch_warnings():
        warnings.simplefilter("error")          # no validity warning for an ordinary well
        lev = solve_semiclassical(band)
    exact = finite_well_levels(10.0, 0.3, 0.3, M_GAAS, 0.092, 0.092)
    assert len(lev) == len(exact) == 3
    np.testing.assert_allclose(lev.energies_eV, exact, atol=1e-6)
    for s in lev.states:
        assert s.validity < VALIDITY_THRESHOLD
        assert s.region == 0
        assert s.converged and s.tolerance_eV <= 1e-7


def test_asymmetric_finite_well_with_mass_steps():
    # different barriers and masses on each side; exact matching in the test (BenDaniel and
    # Duke 1966), 1 ueV.
    band = band_from_layers([(25.0, 0.25, 0.08), (8.0, 0.0, 0.041), (25.0, 0.4, 0.1)])
    lev = solve_semiclassical(band)
    exact = finite_well_levels(8.0, 0.25, 0.4, 0.041, 0.08, 0.1)
    assert len(lev) == len(exact) >= 2
    np.testing.assert_allclose(lev.energies_eV, exact, atol=1e-6)


def test_nonparabolic_finite_well():
    # two-band energy-dependent mass m(E) = m (1 + (E - V)/Eg) (D. F. Nelson, R. C. Miller and
    # D. A. Kleinman, Phys. Rev. B 35, 7770 (1987)), the same rule qwell.bands documents;
    # exact matching with these masses in the test; 1 ueV.
    layers = [(30.0, 0.5, 0.045, 1.0), (6.0, 0.0, 0.041, 0.8), (30.0, 0.5, 0.045, 1.0)]
    band = band_from_layers(layers, nonparabolic=True)

    def mass_of(e, where):
        if where == "w":
            return 0.041 * (1.0 + e / 0.8)
        return 0.045 * max(1.0 + (e - 0.5) / 1.0, 0.01)

    lev = solve_semiclassical(band)
    exact = finite_well_levels(6.0, 0.5, 0.5, None, None, None, mass_of=mass_of)
    assert len(lev) == len(exact) >= 2
    np.testing.assert_allclose(lev.energies_eV, exact, atol=1e-6)


def test_infinite_square_well_lists_ten_states():
    # (the energies of the infinite well are checked in tests/test_reference_wells.py)
    L = 10.0
    band = band_from_layers([(5.0, np.inf, M_GAAS), (L, 0.0, M_GAAS), (5.0, np.inf, M_GAAS)])
    # without max_states only the first 10 are listed, and the notes say so
    lev10 = solve_semiclassical(band)
    assert len(lev10) == 10
    assert any("hard walls" in note for note in lev10.notes)


def test_very_high_barriers_approach_infinite_well():
    # finite barriers of 1e6 eV: the exact finite-well levels (test-side matching) and the
    # estimate agree to 1 ueV, and both lie below the infinite-well values
    # (Landau and Lifshitz, Quantum Mechanics, §22).
    L = 10.0
    band = band_from_layers([(5.0, 1e6, M_GAAS), (L, 0.0, M_GAAS), (5.0, 1e6, M_GAAS)])
    lev = solve_semiclassical(band, max_states=3)
    inf = C_EV_NM2 * np.pi ** 2 * np.arange(1, 4) ** 2 / (M_GAAS * L ** 2)
    assert np.all(lev.energies_eV < inf)
    np.testing.assert_allclose(lev.energies_eV, inf, rtol=1e-3)


# ---------------------------------------------------------------- poor cases are flagged
def test_v_shaped_well_ground_state_flagged():
    # V = F|z|: even states at the zeros of Ai', odd at the zeros of Ai
    # (Landau and Lifshitz, Quantum Mechanics, §24, with the symmetry of the potential;
    # zeros from scipy.special.ai_zeros).  WKB misses the ground state by ~10 %.
    f_eV_nm = 0.01
    half = 200.0
    pl = Piece(-half, 0.0, 0, kind="linear", edge_start_eV=f_eV_nm * half,
               edge_slope_eV_per_nm=-f_eV_nm, mass_m0=M_GAAS)
    pr = Piece(0.0, half, 1, kind="linear", edge_start_eV=0.0, edge_slope_eV_per_nm=f_eV_nm,
               mass_m0=M_GAAS)
    band = Band("conduction", (pl, pr))
    with pytest.warns(ValidityWarning, match="e1"):
        lev = solve_semiclassical(band, max_states=4)
    a, ap = special.ai_zeros(2)[:2]
    scale = (C_EV_NM2 / M_GAAS) ** (1 / 3) * f_eV_nm ** (2 / 3)
    exact = np.sort(np.concatenate([-a, -ap])) * scale
    e1 = lev.states[0]
    assert e1.validity > VALIDITY_THRESHOLD
    assert "validity" in e1.message
    assert any(note.startswith("e1:") for note in lev.notes)
    assert abs(e1.energy_eV - exact[0]) / exact[0] > 0.05      # the flag is warranted
    # the excited states are not flagged and are within 1 % of the exact values
    for s, ex in zip(lev.states[1:], exact[1:]):
        assert s.validity < VALIDITY_THRESHOLD
        assert abs(s.energy_eV - ex) / ex < 0.01


# ---------------------------------------------------------------- wells under a field
@pytest.mark.parametrize("field", [20.0, 50.0, 100.0])
def test_tilted_well_against_finite_differences(field):
    # square well under a field, where levels cross the energy of the tilted well's edge
    # (Airy-matched end phase).  Reference: a finite-difference solution written here.
    # Bound used: the semiclassical error of a linear potential against a wall, 0.76 % for the
    # ground state (Airy zero a_1 vs (9 pi/8)^(2/3), both computed here from scipy.special),
    # applied to the energy above the lowest point of the well.
    band = band_from_layers([(20.0, 0.3, 0.09), (10.0, 0.0, M_GAAS), (20.0, 0.3, 0.09)],
                            field_kV_per_cm=field)
    lev = solve_semiclassical(band)
    ref = fd_levels(band, step_nm=0.005)[: len(lev)]
    a1 = -special.ai_zeros(1)[0][0]
    bound = 1.0 - (9 * np.pi / 8) ** (2 / 3) / a1
    bottom = field * 1e-4 * 20.0
    assert len(lev) >= 1
    for s, r in zip(lev.states, ref):
        assert abs(s.energy_eV - r) <= bound * (r - bottom)


def test_phase_continuous_across_well_edge():
    # at the energy of the upper edge of a tilted well the end changes from a turning point to
    # a step; the Airy-matched phase (M. Abramowitz and I. A. Stegun, Handbook, §10.4) keeps
    # G(E) continuous there.
    field = 50.0
    band = band_from_layers([(20.0, 0.3, 0.09), (10.0, 0.0, M_GAAS), (20.0, 0.3, 0.09)],
                            field_kV_per_cm=field)
    edge = field * 1e-4 * 30.0
    below, above = quantisation_phase(band, [edge - 1e-9, edge + 1e-9])
    assert below.regions[0].right_kind == "turning+step"
    assert above.regions[0].right_kind == "step"
    assert abs(below.regions[0].quantum_number - above.regions[0].quantum_number) < 1e-6


# ---------------------------------------------------------------- coupled wells
def test_separate_wells_regions_assigned():
    # two different wells with a thick barrier: each level belongs to one region and equals that
    # isolated well's exact level (test-side matching, Bastard 1981) to 1 ueV; no flags.
    band = band_from_layers([(20.0, 0.3, M_GAAS), (6.0, 0.0, M_GAAS), (20.0, 0.3, M_GAAS),
                             (8.0, 0.0, M_GAAS), (20.0, 0.3, M_GAAS)])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        lev = solve_semiclassical(band)
    left = finite_well_levels(6.0, 0.3, 0.3, M_GAAS, M_GAAS, M_GAAS)
    right = finite_well_levels(8.0, 0.3, 0.3, M_GAAS, M_GAAS, M_GAAS)
    expect = sorted([(e, 0) for e in left] + [(e, 1) for e in right])
    assert len(lev) == len(expect)
    for s, (e, region) in zip(lev.states, expect):
        assert s.region == region
        assert abs(s.energy_eV - e) < 1e-6
        assert "unreliable" not in s.message
    # the independent finite-difference solution of the whole stack agrees with the estimate
    # (the 20 nm barrier decouples the wells) within the requested root tolerance (1e-7 eV)
    # plus twice the finite-difference error estimated by halving the step
    fd_h = fd_levels(band, step_nm=0.005)[: len(lev)]
    fd_h2 = fd_levels(band, step_nm=0.0025)[: len(lev)]
    err = np.max(np.abs(fd_h - fd_h2))
    np.testing.assert_allclose(fd_h2, lev.energies_eV, rtol=0, atol=1e-7 + 2 * err)


def test_coupled_wells_flagged():
    # symmetric double well with a 2 nm barrier: the estimate gives one level per well and
    # cannot see the tunnel splitting; it must flag the states.  The finite-difference solution
    # written here shows the actual splitting.
    band = band_from_layers([(20.0, 0.3, M_GAAS), (6.0, 0.0, M_GAAS), (2.0, 0.3, M_GAAS),
                             (6.0, 0.0, M_GAAS), (20.0, 0.3, M_GAAS)])
    with pytest.warns(ValidityWarning, match="unreliable"):
        lev = solve_semiclassical(band)
    e1, e2 = lev.states[0], lev.states[1]
    assert {e1.region, e2.region} == {0, 1}
    assert "unreliable" in e1.message and "unreliable" in e2.message
    assert any("unreliable" in note for note in lev.notes)
    assert "some flagged" in lev.message
    fd = fd_levels(band, step_nm=0.005)
    assert fd[1] - fd[0] > 1e-3                         # real splitting of more than 1 meV
    assert fd[0] < e1.energy_eV < fd[1]                 # the estimate sits inside the doublet


# ---------------------------------------------------------------- step well
def test_step_well_count_and_flags():
    # well with a shallow shoulder: the count of states below the cladding must equal that of
    # the finite-difference solution written here (oscillation theorem: one eigenvalue per
    # node count); the state near the shoulder edge is flagged (internal step reflection), and
    # the notes name the energy where the semiclassical count drops.
    band = band_from_layers([(20.0, 0.3, M_GAAS), (5.0, 0.0, M_GAAS), (10.0, 0.1, M_GAAS),
                             (20.0, 0.3, M_GAAS)])
    with pytest.warns(ValidityWarning, match="validity"):
        lev = solve_semiclassical(band)
    fd = fd_levels(band, step_nm=0.005, count=12)
    assert len(lev) == int(np.sum(fd < 0.3))
    assert np.all(np.diff(lev.energies_eV) > 0)
    assert len({s.label for s in lev.states}) == len(lev)
    assert any("count drops at 0.1" in note for note in lev.notes)
    flagged = [s for s in lev.states if s.validity > VALIDITY_THRESHOLD]
    assert flagged and all("validity" in s.message for s in flagged)


# ---------------------------------------------------------------- misc
def test_no_bound_state_message():
    # a 'well' whose bottom is above the lower cladding holds no bound state
    band = band_from_layers([(20.0, 0.1, M_GAAS), (5.0, 0.2, M_GAAS), (20.0, 0.3, M_GAAS)])
    lev = solve_semiclassical(band)
    assert len(lev) == 0
    assert "no bound state" in lev.message


def test_bad_parameters():
    band = band_from_layers([(20.0, 0.3, M_GAAS), (10.0, 0.0, M_GAAS), (20.0, 0.3, M_GAAS)])
    with pytest.raises(ParameterError):
        solve_semiclassical(band, tolerance_eV=0.0)
    with pytest.raises(ParameterError):
        solve_semiclassical(band, max_states=0)


# ---------------------------------------------------------------- all-flat bands (closed-form path)
def test_hole_band_flat_well():
    # a heavy-hole well (carrier convention V = -Ev, band-diagram energies = -carrier energies,
    # qwell.bands): carrier energies equal the exact finite-well levels (test-side BenDaniel-Duke
    # matching, Bastard 1981) to 1 ueV, band-diagram energies with the opposite sign.
    # Masses 0.51 / 0.377: GaAs / AlAs heavy-hole masses, Vurgaftman et al., J. Appl. Phys. 89,
    # 5815 (2001) (from memory); only their use as two different masses matters here.
    band = band_from_layers([(20.0, 0.15, 0.377), (6.0, 0.0, 0.51), (20.0, 0.15, 0.377)],
                            name="heavy_hole", carrier_sign=-1)
    lev = solve_semiclassical(band)
    exact = finite_well_levels(6.0, 0.15, 0.15, 0.51, 0.377, 0.377)
    assert len(lev) == len(exact) >= 2
    np.testing.assert_allclose([s.carrier_energy_eV for s in lev.states], exact, atol=1e-6)
    np.testing.assert_allclose(lev.energies_eV, -exact, atol=1e-6)
    assert [s.label for s in lev.states] == [f"hh{i}" for i in range(1, len(exact) + 1)]


def test_well_split_into_identical_layers():
    # one 12 nm well written as three 4 nm layers of the same material: the internal interfaces
    # reflect nothing (validity 0) and the levels are those of the single 12 nm well (exact
    # matching in the test, Bastard 1981), 1 ueV.
    layers = [(20.0, 0.25, 0.09)] + [(4.0, 0.0, M_GAAS)] * 3 + [(20.0, 0.25, 0.09)]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        lev = solve_semiclassical(band_from_layers(layers))
    exact = finite_well_levels(12.0, 0.25, 0.25, M_GAAS, 0.09, 0.09)
    assert len(lev) == len(exact) >= 3
    np.testing.assert_allclose(lev.energies_eV, exact, atol=1e-6)
    assert all(s.validity == 0.0 for s in lev.states)


@pytest.mark.parametrize("tol", [1e-3, 1e-10])
def test_requested_tolerance_is_met(tol):
    # the reported bracket width is at most the requested tolerance and the estimate is within
    # it of the exact finite-well level (test-side matching solved with brentq to 1e-15 eV,
    # Bastard 1981); 1e-12 eV allows for the rounding of that reference root.
    band = band_from_layers([(20.0, 0.3, 0.092), (10.0, 0.0, M_GAAS), (20.0, 0.3, 0.092)])
    lev = solve_semiclassical(band, tolerance_eV=tol)
    exact = finite_well_levels(10.0, 0.3, 0.3, M_GAAS, 0.092, 0.092)
    assert len(lev) == len(exact)
    for s, e in zip(lev.states, exact):
        assert s.converged and s.tolerance_eV <= tol
        assert abs(s.energy_eV - e) <= tol + 1e-12


def test_repeated_and_interleaved_calls():
    # the per-band data kept between calls must not leak between bands: solving A, B, A again
    # gives each band its own exact finite-well levels (test-side matching, Bastard 1981), 1 ueV.
    band_a = band_from_layers([(20.0, 0.3, M_GAAS), (8.0, 0.0, M_GAAS), (20.0, 0.3, M_GAAS)])
    band_b = band_from_layers([(20.0, 0.3, M_GAAS), (5.0, 0.0, M_GAAS), (20.0, 0.3, M_GAAS)])
    exact_a = finite_well_levels(8.0, 0.3, 0.3, M_GAAS, M_GAAS, M_GAAS)
    exact_b = finite_well_levels(5.0, 0.3, 0.3, M_GAAS, M_GAAS, M_GAAS)
    for band, exact in ((band_a, exact_a), (band_b, exact_b), (band_a, exact_a),
                        (band_b, exact_b)):
        lev = solve_semiclassical(band)
        assert len(lev) == len(exact)
        np.testing.assert_allclose(lev.energies_eV, exact, atol=1e-6)


def test_separate_wells_three_regions_finite_differences():
    # three different wells behind 40 nm barriers (three regions at once, one energy segment):
    # every level is the isolated well's exact level (test-side matching, Bastard 1981) to 1 ueV,
    # and the finite-difference solution of the whole stack written here has the same levels
    # within the root tolerance plus twice its own step-halving error, for the levels whose
    # barrier factor exp(-kappa * 40 nm) is below 1e-4 (there the second-order tunnel shift by
    # the neighbour wells, which the estimate leaves out by construction, is far below 1e-7 eV;
    # the top level, 3.5 meV under the barrier edge, is shifted by ~1e-5 eV in the full stack).
    widths = (4.0, 6.0, 9.0)
    layers = [(40.0, 0.3, M_GAAS)]
    for w in widths:
        layers += [(w, 0.0, M_GAAS), (40.0, 0.3, M_GAAS)]
    band = band_from_layers(layers)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        lev = solve_semiclassical(band)
    expect = sorted((e, r) for r, w in enumerate(widths)
                    for e in finite_well_levels(w, 0.3, 0.3, M_GAAS, M_GAAS, M_GAAS))
    assert len(lev) == len(expect)
    for s, (e, region) in zip(lev.states, expect):
        assert s.region == region
        assert abs(s.energy_eV - e) < 1e-6
    e_sc = lev.energies_eV
    opaque = np.exp(-np.sqrt((0.3 - e_sc) * M_GAAS / C_EV_NM2) * 40.0) < 1e-4
    assert np.count_nonzero(opaque) >= 4
    fd_h = fd_levels(band, step_nm=0.005, count=len(lev))
    fd_h2 = fd_levels(band, step_nm=0.0025, count=len(lev))
    err = np.max(np.abs(fd_h - fd_h2)[opaque])
    np.testing.assert_allclose(fd_h2[opaque], e_sc[opaque], rtol=0, atol=1e-7 + 2 * err)


# ---------------------------------------------------------------- nonparabolic flat bands
def _two_band_mass(m_edge, v_eV, gap_eV):
    # two-band energy-dependent mass m(E) = m (1 + (E - V)/Eg), clipped at 1 % of m like
    # qwell.bands documents (D. F. Nelson, R. C. Miller and D. A. Kleinman, Phys. Rev. B 35,
    # 7770 (1987)); gap None means parabolic
    if gap_eV is None:
        return lambda e: m_edge
    return lambda e: m_edge * max(1.0 + (e - v_eV) / gap_eV, 0.01)


def test_nonparabolic_asymmetric_well_mixed_barriers():
    # parabolic left barrier, nonparabolic well and right barrier of different gaps: the
    # estimate equals exact BenDaniel-Duke matching with the energy-dependent masses written
    # here (BenDaniel and Duke, Phys. Rev. 152, 683 (1966); Nelson, Miller and Kleinman,
    # Phys. Rev. B 35, 7770 (1987)), 1 ueV.
    layers = [(25.0, 0.35, 0.08), (7.0, 0.0, 0.041, 0.8), (25.0, 0.5, 0.045, 1.0)]
    band = band_from_layers(layers, nonparabolic=True)
    mass = {"l": _two_band_mass(0.08, 0.35, None), "w": _two_band_mass(0.041, 0.0, 0.8),
            "r": _two_band_mass(0.045, 0.5, 1.0)}
    exact = finite_well_levels(7.0, 0.35, 0.5, None, None, None,
                               mass_of=lambda e, where: mass[where](e))
    lev = solve_semiclassical(band)
    assert len(lev) == len(exact) >= 2
    np.testing.assert_allclose(lev.energies_eV, exact, atol=1e-6)


def test_nonparabolic_infinite_well_closed_form():
    # hard walls: k(E) L = n pi with hbar^2 k^2 / (2 m(E)) = E and m(E) = m (1 + E/Eg)
    # (Nelson, Miller and Kleinman, Phys. Rev. B 35, 7770 (1987)) gives
    # E (1 + E/Eg) = X_n = hbar^2 pi^2 n^2 / (2 m L^2), i.e. E = Eg (sqrt(1 + 4 X_n/Eg) - 1)/2;
    # the rule with hard-wall phases is exact here (Landau and Lifshitz, §22, problem 1 for the
    # parabolic case).  One wall without a gap, one with a gap.
    L, m_w, gap = 10.0, 0.041, 0.8
    band = band_from_layers([(5.0, np.inf, 0.045), (L, 0.0, m_w, gap), (5.0, np.inf, 0.045, 1.0)],
                            nonparabolic=True)
    lev = solve_semiclassical(band, max_states=5, tolerance_eV=1e-12)
    n = np.arange(1, 6)
    x = C_EV_NM2 * np.pi ** 2 * n ** 2 / (m_w * L ** 2)
    np.testing.assert_allclose(lev.energies_eV, gap * (np.sqrt(1.0 + 4.0 * x / gap) - 1.0) / 2.0,
                               rtol=1e-9)


def test_nonparabolic_two_separate_wells():
    # two different nonparabolic wells behind 40 nm barriers (two regions at once): every level
    # is the isolated well's exact BenDaniel-Duke level with m(E) written here (Nelson, Miller and
    # Kleinman, Phys. Rev. B 35, 7770 (1987)), 1 ueV, in its own region, and no warning.
    barrier = (40.0, 0.5, 0.045, 1.0)
    widths = (5.0, 8.0)
    band = band_from_layers([barrier, (widths[0], 0.0, 0.041, 0.8), barrier,
                             (widths[1], 0.0, 0.041, 0.8), barrier], nonparabolic=True)
    mass = {"l": _two_band_mass(0.045, 0.5, 1.0), "w": _two_band_mass(0.041, 0.0, 0.8),
            "r": _two_band_mass(0.045, 0.5, 1.0)}
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        lev = solve_semiclassical(band)
    expect = sorted((e, r) for r, w in enumerate(widths)
                    for e in finite_well_levels(w, 0.5, 0.5, None, None, None,
                                                mass_of=lambda e, where: mass[where](e)))
    assert len(lev) == len(expect) >= 4
    for s, (e, region) in zip(lev.states, expect):
        assert s.region == region
        assert abs(s.energy_eV - e) < 1e-6


@pytest.mark.parametrize("name", ["doped-detector", "parabolic-well"])
def test_phase_integral_against_quad_on_sampled_profiles(name):
    # The phase integral Phi = int k dz of every allowed region (the fast fixed-segment
    # path for smooth pieces) against scipy.integrate.quad of k = sqrt(2 m (E - V)) / hbar
    # written here (two-band mass m (1 + (E - V) / Eg) where the band is nonparabolic,
    # clipped at 1 % as in qwell.bands), split at the pieces and their breaks.
    # Source: the WKB phase integral, L. D. Landau and E. M. Lifshitz, Quantum Mechanics,
    # 3rd ed. (1977), sec. 48.
    with _w.catch_warnings():
        _w.simplefilter("ignore")
        prof, _ = prepare_profile(load_stack(Path(__file__).parents[1] / "layers" / f"{name}.yaml"))
    for band in prof.bands.values():
        v = [float(p.potential(np.array([z]))[0]) for p in band.pieces
             for z in np.linspace(p.z_start_nm, p.z_end_nm, 201)]
        e_lo, e_hi = min(v), min(v[0], v[-1])
        for e in np.linspace(e_lo, e_hi, 9)[1:-1]:
            for reg in _quantisation_phase(band, [e])[0].regions:
                ref = 0.0
                for p in band.pieces:
                    a, b = max(p.z_start_nm, reg.z_left_nm), min(p.z_end_nm, reg.z_right_nm)
                    if b <= a:
                        continue

                    def k(z, p=p, e=e, band=band):
                        vz = float(p.potential(np.array([z]))[0])
                        m = float(p.mass(np.array([z]))[0])
                        g = p.gap(np.array([z])) if band.nonparabolic else None
                        if g is not None:
                            m *= max(1.0 + (e - vz) / float(g[0]), 0.01)
                        return float(np.sqrt(max(e - vz, 0.0) * m / HB))
                    pts = [a] + [x for x in p.breaks_nm if a < x < b] + [b]
                    ref += sum(_quad(k, x0, x1, epsabs=1e-14, epsrel=1e-13, limit=200)[0]
                               for x0, x1 in zip(pts[:-1], pts[1:]))
                assert reg.phase_integral_rad == pytest.approx(ref, rel=1e-9, abs=1e-12)
