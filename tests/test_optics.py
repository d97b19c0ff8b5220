"""Tests of qwell.optics against closed forms, sum rules and CODATA constants.

The states used here never come from qwell's own solvers: they are either
closed-form infinite-well wavefunctions or the eigenvectors of an independent
finite-difference BenDaniel–Duke Hamiltonian written below
(scipy.linalg.eigh_tridiagonal).
"""

from __future__ import annotations

import json
import os

import numpy as np
import pytest
from scipy import constants as sc
from scipy.linalg import eigh_tridiagonal

from qwell.bands import Band, Piece, band_from_layers
from qwell.errors import ParameterError
from qwell.optics import (
    EXCITON_NOTE,
    Spectrum,
    Transition,
    interband_transitions,
    intersubband_matrices,
    intersubband_transitions,
    plot_spectrum,
    select_transitions,
    spectrum,
    strength,
)
from qwell.solvers.results import Levels, State
from qwell.cli.json_out import transition_json

# ħ²/(2 m0) in eV nm², CODATA via scipy.constants.
HB2 = sc.hbar ** 2 / (2 * sc.m_e) / sc.e * 1e18


# ---------------------------------------------------------------------------
# independent state builders
# ---------------------------------------------------------------------------
def fd_states(band: Band, n_interior: int, count: int | None = None, prefix: str | None = None):
    """BenDaniel–Duke finite differences in a closed box [z_start, z_end].

    Symmetric discretisation with masses at the midpoints:
    H_kk = t_{k-1/2} + t_{k+1/2} + V_k, H_{k,k+1} = -t_{k+1/2},
    V_k = mean of V at the two neighbouring midpoints,
    t = ħ²/(2 m h²) (BenDaniel & Duke, Phys. Rev. 152, 683 (1966); the
    symmetric midpoint scheme is common practice, no source).  Dirichlet walls.
    """
    z = np.linspace(band.z_start_nm, band.z_end_nm, n_interior + 2)
    h = z[1] - z[0]
    zm = 0.5 * (z[:-1] + z[1:])
    t = HB2 / (band.edge_mass(zm) * h * h)
    vm = band.potential(zm)
    v = 0.5 * (vm[:-1] + vm[1:])  # cell average: keeps a symmetric well symmetric
    d = t[:-1] + t[1:] + v
    e = -t[1:-1]
    if count is None:
        w, vec = eigh_tridiagonal(d, e)
    else:
        w, vec = eigh_tridiagonal(d, e, select="i", select_range=(0, count - 1))
    prefix = prefix or band.prefix
    states = []
    for k in range(w.size):
        psi = np.zeros_like(z)
        psi[1:-1] = vec[:, k] / np.sqrt(h)
        if psi[np.argmax(np.abs(psi))] < 0:
            psi = -psi
        states.append(State(band=band.name, label=f"{prefix}{k + 1}", index=k + 1,
                            energy_eV=float(band.profile_energy(w[k])),
                            carrier_energy_eV=float(w[k]), z_nm=z, psi=psi))
    return tuple(states)


def box_band(L_nm, mass_m0, *, name="conduction", gap_eV=None, nonparabolic=False):
    """A single flat layer [0, L] at V = 0: with psi = 0 at both ends it is the infinite well."""
    p = Piece(z_start_nm=0.0, z_end_nm=L_nm, layer_index=0, mass_m0=mass_m0, gap_eV=gap_eV)
    return Band(name=name, pieces=(p,), nonparabolic=nonparabolic)


def box_states(L_nm, mass_m0, nmax, points=4001, energies=None, prefix="e", band="conduction"):
    """Closed-form infinite-well states sqrt(2/L) sin(nπz/L), E_n = ħ²n²π²/(2mL²)
    (standard textbook result, e.g. Bastard, Wave Mechanics Applied to
    Semiconductor Heterostructures, 1988, ch. 1 — from memory)."""
    z = np.linspace(0.0, L_nm, points)
    out = []
    for n in range(1, nmax + 1):
        e = HB2 * (n * np.pi / L_nm) ** 2 / mass_m0 if energies is None else energies[n - 1]
        psi = np.sqrt(2.0 / L_nm) * np.sin(n * np.pi * z / L_nm)
        out.append(State(band=band, label=f"{prefix}{n}", index=n, energy_eV=float(e),
                         carrier_energy_eV=float(e), z_nm=z, psi=psi))
    return tuple(out)


def levels_of(states, band="conduction"):
    return Levels(band=band, method="exact", states=tuple(states))


# ---------------------------------------------------------------------------
# constants and spectral conversions
# ---------------------------------------------------------------------------
def test_wavelength_from_codata():
    # λ = hc/ΔE with h, c, e from the CODATA recommended values via scipy.constants
    # (E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor, "CODATA recommended values
    # of the fundamental physical constants: 2018", Rev. Mod. Phys. 93, 025010 (2021)
    # — citation from memory); hc = 1.239842 µm·eV to 7 digits.
    hc_um_eV = sc.h * sc.c / sc.e * 1e6
    assert hc_um_eV == pytest.approx(1.239842, abs=1e-6)
    states = box_states(10.0, 0.067, 2)
    (t,) = intersubband_transitions(levels_of(states), box_band(10.0, 0.067))
    dE = states[1].energy_eV - states[0].energy_eV
    assert t.energy_eV == pytest.approx(dE, rel=1e-12)
    assert t.wavelength_um == pytest.approx(hc_um_eV / dE, rel=1e-12)
    assert t.wavenumber_cm1 == pytest.approx(dE * sc.e / (sc.h * sc.c) / 100.0, rel=1e-12)
    assert t.frequency_THz == pytest.approx(dE * sc.e / sc.h / 1e12, rel=1e-12)
    # consistency of the three spectral forms: c = λ ν and 1/λ = wavenumber
    assert t.wavelength_um * 1e-6 * t.frequency_THz * 1e12 == pytest.approx(sc.c, rel=1e-12)
    assert 1e4 / t.wavelength_um == pytest.approx(t.wavenumber_cm1, rel=1e-12)


# ---------------------------------------------------------------------------
# intersubband dipoles and oscillator strengths
# ---------------------------------------------------------------------------
def test_infinite_well_dipole_closed_form():
    # <1|z|2> = 16 L / (9 π²) for the infinite square well (standard textbook
    # result, e.g. Bastard 1988 ch. 8 — from memory; it follows from
    # ∫ z sin(πz/L) sin(2πz/L) dz, checked in closed form below).
    L = 8.0
    states = box_states(L, 0.067, 3)
    ts = intersubband_transitions(levels_of(states), box_band(L, 0.067))
    e12 = select_transitions(ts, ["e1-e2"])[0]
    assert e12.dipole_nm == pytest.approx(16 * L / (9 * np.pi ** 2), rel=5e-3)
    # parity: <1|z|3> = 0 for the symmetric well
    e13 = select_transitions(ts, ["e1-e3"])[0]
    assert e13.dipole_nm < 1e-9 * L
    # oscillator strength f12 = 2 m ΔE z12²/ħ² = 256/(27 π²) = 0.9607 in the
    # infinite well (follows from E_n and z12 above).
    assert e12.oscillator_strength == pytest.approx(256 / (27 * np.pi ** 2), rel=1e-4)
    assert e12.strongest and not e13.strongest


def test_deep_finite_well_dipole_tends_to_infinite_well():
    # Deep-well limit of the finite well: <1|z|2> -> 16 L/(9 π²) (standard
    # textbook result); states from the independent finite-difference solver.
    L = 10.0
    target = 16 * L / (9 * np.pi ** 2)
    errs = []
    for depth in (5.0, 50.0, 500.0, 5000.0):
        band = band_from_layers([(3.0, depth, 0.067), (L, 0.0, 0.067), (3.0, depth, 0.067)],
                                z_start_nm=-3.0)
        states = fd_states(band, 3199, count=2)
        (t,) = intersubband_transitions(levels_of(states), band)
        errs.append(abs(t.dipole_nm - target) / target)
    assert errs[0] > errs[1] > errs[2] > errs[3]
    assert errs[-1] < 5e-3


def test_trk_sum_rule_infinite_well_closed_form():
    # Thomas–Reiche–Kuhn: Σ_j f_1j = 1 (W. Kuhn, Z. Phys. 33, 408 (1925);
    # F. Reiche & W. Thomas, Z. Phys. 34, 510 (1925)); closed-form states of a
    # single-mass infinite well, truncated at n = 40 (the tail Σ_{n>40} f_1n is
    # below 1e-5 since f_1n ∝ n²/(n²-1)³).
    L = 10.0
    states = box_states(L, 0.067, 40, points=20001)
    mats = intersubband_matrices(states, box_band(L, 0.067))
    assert np.sum(mats.oscillator_strength[0, 1:]) == pytest.approx(1.0, rel=1e-2)
    assert mats.norm_mass_m0[0] == pytest.approx(0.067, rel=1e-9)


@pytest.mark.parametrize("barrier_mass", [0.067, 0.092])
def test_trk_sum_rule_finite_difference_complete_set(barrier_mass):
    # Thomas–Reiche–Kuhn sum rule Σ_j f_ij = 1 over a complete set (Kuhn 1925;
    # Reiche & Thomas 1925).  With a position-dependent mass the double
    # commutator [z,[H,z]] = ħ²/m(z) makes it hold with the normalising mass
    # 1/<i|1/m|i> (common practice, no source).  Finite well 0.3 eV deep,
    # 10 nm wide, in a closed 50 nm box: the complete finite-difference set.
    band = band_from_layers([(20.0, 0.3, barrier_mass), (10.0, 0.0, 0.067),
                             (20.0, 0.3, barrier_mass)], z_start_nm=-20.0)
    states = fd_states(band, 499)  # h = 0.1 nm, interfaces on grid points
    mats = intersubband_matrices(states, band)
    f = mats.oscillator_strength
    for i in (0, 1, 2):
        assert np.sum(f[i]) == pytest.approx(1.0, rel=1e-2)
    if barrier_mass == 0.067:
        assert mats.norm_mass_m0[0] == pytest.approx(0.067, rel=1e-9)
    else:
        assert 0.067 < mats.norm_mass_m0[0] < 0.092


def test_velocity_form_equals_dipole_form_for_uniform_mass():
    # For a single, energy-independent mass the velocity (momentum) form of
    # Sirtori et al., Phys. Rev. B 50, 8663 (1994) must equal the dipole form
    # f = 2 m* ΔE |z_ij|²/ħ² (follows from [z, H] = iħ p/m*).
    band = band_from_layers([(15.0, 0.25, 0.067), (12.0, 0.0, 0.067), (15.0, 0.25, 0.067)],
                            z_start_nm=-15.0)
    states = fd_states(band, 2099, count=4)
    ts = intersubband_transitions(levels_of(states), band)
    assert len(ts) == 6
    for t in ts:
        dE = t.energy_eV
        f_dipole = 2 * 0.067 * dE * t.dipole_nm ** 2 / (2 * HB2)  # 2 m ΔE z²/ħ², ħ² = 2 m0 HB2
        assert t.oscillator_strength == pytest.approx(f_dipole, rel=1e-3, abs=1e-9)
    mats = intersubband_matrices(states, band)
    # signed: ħ² P_ij/2 = (E_j - E_i) <i|z|j>
    for i, j in [(0, 1), (0, 3), (1, 2), (2, 3)]:
        assert mats.velocity_dipole_nm[i, j] == pytest.approx(mats.dipole_nm[i, j], rel=1e-3)


def test_nonparabolic_velocity_element_closed_form():
    # Infinite well with the two-band energy-dependent mass m(E) = m(1 + E/Eg)
    # (Nelson, Miller, Kleinman, Phys. Rev. B 35, 7770 (1987)): the envelopes stay
    # sin(nπz/L), E_n solves E(1 + E/Eg) = ħ²k_n²/(2m).  With
    # A = ∫ψ1 ψ2' dz = -∫ψ1' ψ2 dz = -8/(3L) (closed form of the sine integrals),
    # the velocity element of Sirtori et al. (PRB 50, 8663, 1994) gives
    # z^v = (ħ²/2)|A|(1/m(E1) + 1/m(E2))/ΔE, and f = 2 m_1 ΔE (z^v)²/ħ² with m_1 = m(E1).
    L, m, Eg = 6.0, 0.067, 1.5
    k = np.arange(1, 4) * np.pi / L
    eps_par = HB2 * k ** 2 / m
    E = 0.5 * Eg * (-1 + np.sqrt(1 + 4 * eps_par / Eg))
    band = box_band(L, m, gap_eV=Eg, nonparabolic=True)
    states = box_states(L, m, 3, points=20001, energies=E)
    mats = intersubband_matrices(states, band)
    m1, m2 = m * (1 + E[0] / Eg), m * (1 + E[1] / Eg)
    A = 8.0 / (3.0 * L)
    dE = E[1] - E[0]
    zv = 2 * HB2 * 0.5 * A * (1 / m1 + 1 / m2) / dE  # ħ² = 2 m0 HB2
    assert abs(mats.velocity_dipole_nm[0, 1]) == pytest.approx(zv, rel=1e-4)
    assert abs(mats.dipole_nm[0, 1]) == pytest.approx(16 * L / (9 * np.pi ** 2), rel=1e-6)
    assert mats.norm_mass_m0[0] == pytest.approx(m1, rel=1e-9)
    assert mats.oscillator_strength[0, 1] == pytest.approx(m1 * dE * zv ** 2 / HB2, rel=1e-4)
    # the nonparabolic line is not the parabolic one: velocity and plain dipoles differ
    assert abs(zv - 16 * L / (9 * np.pi ** 2)) > 0.01 * zv


def test_hole_intersubband_uses_carrier_energies():
    # Same carrier potential for holes as for electrons gives the same
    # envelopes and dipoles (carrier convention of qwell.bands); energies are
    # carrier-energy differences, positive.  Compared with the infinite-well
    # closed form 16L/(9π²) in the deep limit (standard textbook result).
    L = 8.0
    band = band_from_layers([(2.0, 5000.0, 0.35), (L, 0.0, 0.35), (2.0, 5000.0, 0.35)],
                            name="heavy_hole", carrier_sign=-1, z_start_nm=-2.0)
    states = fd_states(band, 2399, count=3)
    assert states[0].energy_eV < 0 < states[0].carrier_energy_eV  # band-diagram scale downwards
    ts = intersubband_transitions(levels_of(states, "heavy_hole"), band)
    t = select_transitions(ts, ["hh1-hh2"])[0]
    assert t.energy_eV == pytest.approx(states[1].carrier_energy_eV - states[0].carrier_energy_eV)
    assert t.energy_eV > 0
    assert t.dipole_nm == pytest.approx(16 * L / (9 * np.pi ** 2), rel=5e-3)


def test_quasi_bound_filter_and_missing_wavefunctions():
    L = 10.0
    s = list(box_states(L, 0.067, 3))
    s[2] = State(band="conduction", label="e3", index=3, energy_eV=s[2].energy_eV,
                 carrier_energy_eV=s[2].carrier_energy_eV, bound=False, lifetime_s=1e-12,
                 z_nm=s[2].z_nm, psi=s[2].psi)
    band = box_band(L, 0.067)
    assert len(intersubband_transitions(levels_of(s), band)) == 3
    only = intersubband_transitions(levels_of(s), band, include_quasi_bound=False)
    assert [t.name for t in only] == ["e1-e2"]
    bare = [State(band="conduction", label=x.label, index=x.index, energy_eV=x.energy_eV,
                  carrier_energy_eV=x.carrier_energy_eV) for x in s]
    ts = intersubband_transitions(levels_of(bare), band)
    assert len(ts) == 3 and all(t.dipole_nm is None and t.oscillator_strength is None for t in ts)
    with pytest.raises(ParameterError):
        intersubband_transitions(levels_of(s, "heavy_hole"), band)


# ---------------------------------------------------------------------------
# interband
# ---------------------------------------------------------------------------
def _well_pair(hole_name):
    # GaAs-like well between AlGaAs-like barriers; numbers are illustrative
    # geometry, not material data: gap 1.5 eV, electron well 0.25 eV deep,
    # hole well 0.15 eV deep.
    gap = 1.5
    eb = band_from_layers([(15.0, gap + 0.25, 0.067), (8.0, gap, 0.067), (15.0, gap + 0.25, 0.067)],
                          z_start_nm=-15.0)
    hm = 0.35 if hole_name == "heavy_hole" else 0.09
    hb = band_from_layers([(15.0, 0.15, hm), (8.0, 0.0, hm), (15.0, 0.15, hm)],
                          name=hole_name, carrier_sign=-1, z_start_nm=-15.0)
    es = fd_states(eb, 1899, count=2)
    hs = fd_states(hb, 1899, count=3)
    return gap, eb, hb, es, hs


@pytest.mark.parametrize("hole_name,te_f,tm_f", [("heavy_hole", 0.5, 0.0),
                                                  ("light_hole", 1.0 / 6.0, 2.0 / 3.0)])
def test_interband_selection_rules_and_factors(hole_name, te_f, tm_f):
    # Symmetric well: envelopes of opposite parity are orthogonal, so Δn odd
    # gives zero overlap (parity, common practice, no source).  TE/TM factors
    # at k_parallel = 0 in units of the bulk |P|²: heavy hole 1/2, 0; light hole
    # 1/6, 2/3 (S. L. Chuang, Physics of Optoelectronic Devices, Wiley 1995,
    # ch. 9; L. A. Coldren & S. W. Corzine, Diode Lasers and Photonic Integrated
    # Circuits, Wiley 1995, App. 10 — factors from memory of those tables).
    gap, eb, hb, es, hs = _well_pair(hole_name)
    ts = interband_transitions(levels_of(es), eb, levels_of(hs, hole_name), hb)
    assert len(ts) == 6
    p = "hh" if hole_name == "heavy_hole" else "lh"
    by = {t.name: t for t in ts}
    for t in ts:
        n, m = int(t.initial[1:]), int(t.final[len(p):])
        assert t.kind == "interband"
        assert t.strongest == (n == m) and t.allowed == (n == m)
        assert t.te == pytest.approx(te_f * t.overlap, rel=1e-12, abs=1e-15)
        assert t.tm == pytest.approx(tm_f * t.overlap, rel=1e-12, abs=1e-15)
        assert t.note == EXCITON_NOTE
        # photon energy E_e - E_h on the band-diagram scale
        e = es[n - 1].energy_eV
        h = hs[m - 1].energy_eV
        assert t.energy_eV == pytest.approx(e - h, rel=1e-12)
        if (n - m) % 2:
            assert t.overlap < 1e-12
    e1h1 = by[f"e1-{p}1"]
    assert 0.9 < e1h1.overlap <= 1.0 + 1e-9   # Cauchy–Schwarz: |<e|h>|² <= 1
    assert e1h1.energy_eV > gap              # confinement adds to the gap
    assert by[f"e1-{p}3"].overlap < e1h1.overlap
    # polarisation-averaged strength (2 TE + TM)/3 = overlap/3 for both hole kinds
    assert strength(e1h1) == pytest.approx(e1h1.overlap / 3.0, rel=1e-12)


def test_interband_overlap_orthonormal_closed_form_and_grid_interpolation():
    # Identical infinite-well envelopes for electrons and holes: |<e_n|h_m>|² = δ_nm
    # (orthonormality of sin(nπz/L), closed form).  The hole states live on a
    # different grid, so the overlap goes through the interpolation path.
    L = 10.0
    es = box_states(L, 0.067, 3, points=4001)
    hs_raw = box_states(L, 0.35, 3, points=3001, prefix="hh", band="heavy_hole")
    hs = [State(band="heavy_hole", label=s.label, index=s.index, energy_eV=-s.energy_eV - 1.4,
                carrier_energy_eV=s.energy_eV + 1.4, z_nm=s.z_nm, psi=s.psi) for s in hs_raw]
    eb = box_band(L, 0.067)
    hb = box_band(L, 0.35, name="heavy_hole")
    ts = interband_transitions(levels_of(es), eb, levels_of(hs, "heavy_hole"), hb)
    for t in ts:
        n, m = int(t.initial[1:]), int(t.final[2:])
        if n == m:
            assert t.overlap == pytest.approx(1.0, abs=1e-5)
        else:
            assert t.overlap < 1e-5
    with pytest.raises(ParameterError):
        interband_transitions(levels_of(es), eb, levels_of(es), eb)


# ---------------------------------------------------------------------------
# selection, JSON
# ---------------------------------------------------------------------------
def test_select_and_json_contract():
    states = box_states(10.0, 0.067, 3)
    ts = intersubband_transitions(levels_of(states), box_band(10.0, 0.067))
    assert [t.name for t in ts] == ["e1-e2", "e1-e3", "e2-e3"]
    got = select_transitions(ts, ["e2-e3", "E1-E2"])
    assert [t.name for t in got] == ["e2-e3", "e1-e2"]
    with pytest.raises(ParameterError) as err:
        select_transitions(ts, ["e1-e4"])
    assert "e1-e2" in str(err.value) and "e2-e3" in str(err.value)
    d = transition_json(ts[0])
    assert set(d) == {"from", "to", "kind", "energy_eV", "wavelength_um", "wavenumber_cm1",
                      "frequency_THz", "wavelength_nm", "energy_meV", "dipole_nm",
                      "oscillator_strength", "overlap", "te",
                      "tm", "strongest"}
    assert d["from"] == "e1" and d["to"] == "e2" and d["overlap"] is None
    text = json.dumps(d)
    assert '"overlap": null' in text


# ---------------------------------------------------------------------------
# spectra
# ---------------------------------------------------------------------------
def _line(energy_eV, f, name=("e1", "e2")):
    lam = sc.h * sc.c / sc.e * 1e6 / energy_eV
    return Transition(initial=name[0], final=name[1], kind="intersubband", energy_eV=energy_eV,
                      wavelength_um=lam, wavenumber_cm1=1e4 / lam,
                      frequency_THz=sc.c / (lam * 1e-6) / 1e12, dipole_nm=1.0,
                      oscillator_strength=f)


def _measured_fwhm(x, y):
    """FWHM of a single peak from the array, by linear interpolation of the half crossings."""
    k = int(np.argmax(y))
    half = 0.5 * y[k]
    left = np.nonzero(y[:k] < half)[0][-1]
    right = k + np.nonzero(y[k:] < half)[0][0]
    xl = np.interp(half, [y[left], y[left + 1]], [x[left], x[left + 1]])
    xr = np.interp(half, [y[right], y[right - 1]], [x[right], x[right - 1]])
    return xr - xl


@pytest.mark.parametrize("shape", ["lorentzian", "gaussian"])
def test_spectrum_fwhm_matches_request(shape):
    # FWHM definition of the Lorentzian and Gaussian line shapes (textbook
    # closed forms; common practice, no source).
    sp = spectrum([_line(0.15, 0.9)], linewidth_meV=8.0, shape=shape, points=20001)
    assert isinstance(sp, Spectrum)
    assert sp.absorption.max() == pytest.approx(1.0)
    assert _measured_fwhm(sp.energy_eV, sp.absorption) * 1e3 == pytest.approx(8.0, rel=1e-3)
    assert sp.energy_eV[np.argmax(sp.absorption)] == pytest.approx(0.15, abs=1e-5)
    assert np.allclose(sp.wavelength_um, sc.h * sc.c / sc.e * 1e6 / sp.energy_eV)


def test_spectrum_area_and_peaks():
    fwhm = 6e-3
    E = np.linspace(0.05, 0.35, 60001)
    # Gaussian of unit peak has area FWHM·sqrt(π/(4 ln 2)) (closed form of ∫exp(-x²/2σ²)).
    g = spectrum([_line(0.2, 0.5)], linewidth_meV=6.0, shape="gaussian", energies_eV=E)
    assert np.trapezoid(g.absorption, E) == pytest.approx(fwhm * np.sqrt(np.pi / (4 * np.log(2))),
                                                           rel=1e-4)
    # Lorentzian of unit peak, half width γ, over ±a: area = 2γ arctan(a/γ) (closed form).
    lo = spectrum([_line(0.2, 0.5)], linewidth_meV=6.0, energies_eV=E)
    gam, a = fwhm / 2, 0.15
    assert np.trapezoid(lo.absorption, E) == pytest.approx(2 * gam * np.arctan(a / gam), rel=1e-4)
    # Well separated lines: peak heights scale with oscillator strength.
    two = spectrum([_line(0.12, 0.4), _line(0.25, 0.8, ("e1", "e3"))], linewidth_meV=4.0,
                   shape="gaussian", points=30001)
    i1 = np.argmin(np.abs(two.energy_eV - 0.12))
    i2 = np.argmin(np.abs(two.energy_eV - 0.25))
    assert two.absorption[i2] == pytest.approx(1.0, rel=1e-3)
    assert two.absorption[i1] == pytest.approx(0.5, rel=1e-3)
    # all-zero weights give zeros, not NaN
    z = spectrum([_line(0.2, 0.0)], linewidth_meV=5.0)
    assert np.all(z.absorption == 0.0)
    with pytest.raises(ParameterError):
        spectrum([_line(0.2, 0.5)], shape="voigt")
    with pytest.raises(ParameterError):
        spectrum([_line(0.2, 0.5)], linewidth_meV=0.0)
    with pytest.raises(ParameterError):
        spectrum([])


def test_interband_spectrum_weights_and_note():
    gap, eb, hb, es, hs = _well_pair("light_hole")
    ts = interband_transitions(levels_of(es), eb, levels_of(hs, "light_hole"), hb)
    te = spectrum(ts, linewidth_meV=5.0, polarization="te")
    tm = spectrum(ts, linewidth_meV=5.0, polarization="tm")
    assert EXCITON_NOTE in te.notes
    # only e1-lh1 and e2-lh2 carry weight; in TM and TE the e1-lh1 peak dominates
    for sp in (te, tm):
        e11 = select_transitions(ts, ["e1-lh1"])[0].energy_eV
        assert sp.energy_eV[np.argmax(sp.absorption)] == pytest.approx(e11, abs=1e-3)


@pytest.mark.parametrize("axis", ["wavelength", "energy"])
def test_plot_spectrum_png(tmp_path, axis):
    import matplotlib.image as mpimg

    states = box_states(8.0, 0.067, 4)
    ts = intersubband_transitions(levels_of(states), box_band(8.0, 0.067))
    sp = spectrum(ts, linewidth_meV=10.0)
    out = plot_spectrum(sp, tmp_path / "spec.png", axis=axis, title="Test well")
    assert out.exists()
    assert sorted(os.listdir(tmp_path)) == ["spec.png"]   # no temporary file left behind
    img = mpimg.imread(out)
    assert img.shape[:2] == (675, 1200)                   # 8 x 4.5 in at 150 dpi
    grey = img[..., :3].mean(axis=2)
    assert np.mean(grey < 0.9) > 0.01                     # not blank
    assert grey.std() > 0.05
    with pytest.raises(ParameterError):
        plot_spectrum(sp, tmp_path / "x.png", axis="frequency")


# ---------------------------------------------------------------------------
# speed figures (printed by pytest-benchmark when run with --benchmark-enable;
# never a pass/fail timing test)
# ---------------------------------------------------------------------------
@pytest.mark.benchmark
def test_benchmark_matrices_and_spectrum(benchmark):
    # 20 states on a 5001-point grid, then a 2000-point spectrum of the 190 lines.
    band = band_from_layers([(20.0, 0.3, 0.092), (10.0, 0.0, 0.067), (20.0, 0.3, 0.092)],
                            z_start_nm=-20.0)
    states = fd_states(band, 4999, count=20)

    def work():
        ts = intersubband_transitions(levels_of(states), band)
        return ts, spectrum(ts, points=2000)

    ts, sp = benchmark(work)
    assert len(ts) == 190 and sp.absorption.shape == (2000,)
    # the ground state's lines carry almost all of the TRK sum (Kuhn 1925;
    # Reiche & Thomas 1925): the 19 lines reach at least 0.99 of it here
    # (the remaining box states above 20 hold the rest of the unit sum).
    f1 = sum(t.oscillator_strength for t in ts if t.initial == "e1")
    assert 0.99 < f1 <= 1.0 + 1e-2


@pytest.mark.parametrize("width_nm, label, unit", [(8.0, "wavelength (µm)", "um"),
                                                   (60.0, "frequency (THz)", "THz")])
def test_plot_spectrum_axis_in_the_unit_of_its_region(tmp_path, monkeypatch, width_nm, label,
                                                      unit):
    # a spectrum peaking at 4.7 um is drawn in um, one at 1.1 THz (265 um) in THz (the
    # region's unit, common practice, no source); the e1-e2 line sits at E/h or hc/E
    # with h, c from CODATA (scipy.constants)
    import qwell.optics as optics

    seen = {}
    real = optics.atomic_savefig

    def spy(fig, path, **kw):
        ax = fig.axes[0]
        seen["xlabel"] = ax.get_xlabel()
        seen["xs"] = [ln.get_xdata()[0] for ln in ax.lines[1:]]
        return real(fig, path, **kw)

    monkeypatch.setattr(optics, "atomic_savefig", spy)
    states = box_states(width_nm, 0.067, 3)
    ts = intersubband_transitions(levels_of(states), box_band(width_nm, 0.067))
    sp = spectrum(ts, linewidth_meV=1.0)
    plot_spectrum(sp, tmp_path / "spec.png")
    assert seen["xlabel"] == label
    e12 = select_transitions(ts, ["e1-e2"])[0].energy_eV * sc.e
    want = e12 / sc.h / 1e12 if unit == "THz" else sc.h * sc.c / e12 * 1e6
    assert min(abs(x - want) for x in seen["xs"]) < 1e-9 * want
    plot_spectrum(sp, tmp_path / "spec2.png", unit="cm-1")
    assert seen["xlabel"] == "wavenumber (cm⁻¹)"
