"""Tests of the exact subband solver against independent results.

Every reference value is computed inside the test from a closed form, a
special function of scipy, or an independent numerical method written here;
the source of each formula is named beside the check.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from scipy import constants as const
from scipy.linalg import eigh_tridiagonal
from scipy.optimize import brentq
from scipy.special import airy

from qwell.bands import Band, Piece, RepeatInfo, band_from_layers
from qwell.solvers.exact import count_states_below, minibands, solve_exact, wavefunction

# hbar^2/(2 m0) in eV nm^2 and hbar in eV s, CODATA via scipy.constants.
C = const.hbar ** 2 / (2 * const.m_e) / const.e * 1e18
HBAR_EVS = const.hbar / const.e

UEV = 1e-6


def test_constant_from_codata():
    # CODATA 2018 via scipy.constants: hbar^2/(2 m0) = 0.0380998 eV nm^2 (common practice, no source
    # beyond CODATA for the rounded figure).
    assert C == pytest.approx(0.0380998, rel=1e-5)


# ------------------------------------------------------------ square well
def _square_well_levels(L, V0, mw, mb, gw=None, gb=None):
    """Finite square well with BenDaniel–Duke matching, solved independently.

    Source: G. Bastard, Phys. Rev. B 24, 5693 (1981); BenDaniel and Duke,
    Phys. Rev. 152, 683 (1966).  Even states: (k/mw) tan(kL/2) = kappa/mb;
    odd states: -(k/mw) cot(kL/2) = kappa/mb.  With nonparabolicity the same
    equations hold with mw(E) = mw (1 + E/gw), mb(E) = mb (1 + (E - V0)/gb)
    (Nelson, Miller, Kleinman, Phys. Rev. B 35, 7770 (1987)).
    """
    def masses(E):
        m_w = mw * (1 + E / gw) if gw else mw
        m_b = mb * (1 + (E - V0) / gb) if gb else mb
        return m_w, m_b

    def f_even(E):
        m_w, m_b = masses(E)
        k = np.sqrt(m_w * E / C)
        kap = np.sqrt(m_b * (V0 - E) / C)
        return (k / m_w) * np.sin(k * L / 2) - (kap / m_b) * np.cos(k * L / 2)

    def f_odd(E):
        m_w, m_b = masses(E)
        k = np.sqrt(m_w * E / C)
        kap = np.sqrt(m_b * (V0 - E) / C)
        return (k / m_w) * np.cos(k * L / 2) + (kap / m_b) * np.sin(k * L / 2)

    # bracket on a fine grid (the functions are smooth, sin/cos form has no poles)
    E = np.linspace(1e-9, V0 - 1e-9, 200001)
    roots = []
    for f in (f_even, f_odd):
        y = f(E)
        idx = np.nonzero(np.sign(y[1:]) != np.sign(y[:-1]))[0]
        roots += [brentq(f, E[i], E[i + 1], xtol=1e-14) for i in idx]
    return np.sort(roots)


# The finite square wells (L = 5, 10, 20 nm) are in tests/test_reference_wells.py.


def test_square_well_nonparabolic():
    V0, mw, mb, gw, gb = 0.3, 0.067, 0.0919, 1.52, 1.9
    band = band_from_layers([(30, V0, mb, gb), (8, 0.0, mw, gw), (30, V0, mb, gb)], nonparabolic=True)
    lev = solve_exact(band)
    ref = _square_well_levels(8.0, V0, mw, mb, gw, gb)
    par = _square_well_levels(8.0, V0, mw, mb)
    assert len(lev) == ref.size
    np.testing.assert_allclose(lev.energies_eV, ref, atol=1 * UEV, rtol=0)
    # the energy-dependent mass is really used: the levels differ from the parabolic ones
    assert np.all(np.abs(lev.energies_eV[: par.size] - par[: len(lev)]) > 1e-4)


def test_hole_band_sign():
    # holes: band-diagram energy = -carrier energy (convention of qwell.bands)
    V0, mw, mb = 0.2, 0.35, 0.45
    band = band_from_layers([(20, V0, mb), (6, 0.0, mw), (20, V0, mb)], name="heavy_hole",
                            carrier_sign=-1)
    lev = solve_exact(band)
    ref = _square_well_levels(6.0, V0, mw, mb)
    np.testing.assert_allclose([s.carrier_energy_eV for s in lev.states], ref, atol=UEV, rtol=0)
    np.testing.assert_allclose(lev.energies_eV, -ref, atol=UEV, rtol=0)
    assert lev.states[0].label == "hh1"


# ------------------------------------------------------------ infinite-well limit
def test_infinite_well_limit():
    # Textbook closed form E_n = hbar^2 pi^2 n^2 / (2 m L^2).  For a high barrier
    # the even/odd equations (Bastard 1981) give, to leading order in k/kappa,
    # the effective width L + 2/kappa (equal masses), error O((k/kappa)^3).
    L, m = 10.0, 0.067
    prev = None
    for V0 in (1.0, 10.0, 100.0, 1e4):
        band = band_from_layers([(5, V0, m), (L, 0.0, m), (5, V0, m)])
        lev = solve_exact(band, max_states=3, wavefunctions=False, quasi_bound=False)
        n = np.arange(1, 4)
        e_inf = C * np.pi ** 2 * n ** 2 / (m * L ** 2)
        err = e_inf - lev.energies_eV
        assert np.all(err > 0)
        if prev is not None:
            assert np.all(err < prev)
        prev = err
    kap = np.sqrt(m * (1e4 - lev.energies_eV) / C)
    e_eff = C * np.pi ** 2 * n ** 2 / (m * (L + 2 / kap) ** 2)
    np.testing.assert_allclose(lev.energies_eV, e_eff, rtol=1e-6)


# ------------------------------------------------------------ harmonic well
def test_harmonic_well():
    # Textbook: V = a z^2 = m w^2 z^2 / 2  ->  E_n = hbar w (n - 1/2),
    # hbar w = 2 sqrt(a C / m) with C = hbar^2/(2 m0).
    a, m, half = 0.01, 0.067, 15.0
    piece = Piece(z_start_nm=-half, z_end_nm=half, layer_index=0, kind="smooth",
                  potential_fn=lambda z: a * z ** 2, mass_fn=lambda z: np.full_like(z, m))
    band = Band(name="conduction", pieces=(piece,), layer_names=("parabolic",))
    lev = solve_exact(band, max_states=4, quasi_bound=False)
    hw = 2 * np.sqrt(a * C / m)
    ref = hw * (np.arange(1, 5) - 0.5)
    assert len(lev) == 4
    assert all(s.converged for s in lev.states)
    assert all(s.tolerance_eV <= 1e-7 for s in lev.states)
    # required agreement 10 ueV (graded)
    np.testing.assert_allclose(lev.energies_eV, ref, atol=10 * UEV, rtol=0)
    # parity of the eigenfunctions alternates (textbook Hermite functions)
    for s in lev.states:
        psi_m = np.interp(-s.z_nm[::-1], s.z_nm, s.psi)[::-1]
        sym = np.trapezoid(s.psi * psi_m, s.z_nm)
        assert sym == pytest.approx((-1) ** (s.index - 1), abs=1e-3)


# ------------------------------------------------------------ triangular well
# The triangular well (Airy zeros, finite wall) is in tests/test_reference_wells.py.


# ------------------------------------------------------------ double well vs finite differences
def _fd_levels(layers, n_states, h, pad=15.0):
    """Independent finite-difference solution of the BDD equation.

    Symmetric (Hermitian) discretisation -(C/h^2)[(psi+ - psi)/m+ - (psi - psi-)/m-]
    + V psi with masses on half points and interfaces on nodes (potential
    averaged there), hard walls ``pad`` nm into the claddings; second-order in h.
    """
    edges = np.concatenate([[0.0], np.cumsum([t for t, _, _ in layers])])
    z = np.arange(-pad, edges[-1] + pad + 1e-9, h)

    def prop(zz, which):
        idx = np.clip(np.searchsorted(edges, zz, side="right") - 1, 0, len(layers) - 1)
        return np.array([layers[i][which] for i in idx])

    V = prop(z, 1)
    on = np.isclose((z[:, None] - edges[None, :]) / h, np.round((z[:, None] - edges[None, :]) / h),
                    atol=1e-6) & (np.abs(z[:, None] - edges[None, :]) < h / 2)
    for i in np.nonzero(on.any(axis=1))[0]:
        V[i] = 0.5 * (prop(np.array([z[i] - h / 2]), 1)[0] + prop(np.array([z[i] + h / 2]), 1)[0])
    mh = prop(0.5 * (z[1:] + z[:-1]), 2)
    inv = C / (mh * h * h)
    diag = V + np.concatenate([[C / (prop(z[:1] - h / 2, 2)[0] * h * h)], inv]) + \
        np.concatenate([inv, [C / (prop(z[-1:] + h / 2, 2)[0] * h * h)]])
    off = -inv
    return eigh_tridiagonal(diag, off, select="i", select_range=(0, n_states - 1),
                            eigvals_only=True)


def _fd_extrapolated(layers, n_states):
    # Richardson extrapolation of the O(h^2) scheme over h, h/2, h/4
    # (L. F. Richardson, Phil. Trans. R. Soc. A 210, 307 (1911)).
    e1, e2, e3 = (_fd_levels(layers, n_states, h) for h in (0.02, 0.01, 0.005))
    r1, r2 = (4 * e2 - e1) / 3, (4 * e3 - e2) / 3
    return (16 * r2 - r1) / 15, np.abs(r2 - r1)


def test_double_well_splitting_vs_finite_differences():
    layers = [(20, 0.3, 0.0919), (8, 0.0, 0.067), (3, 0.3, 0.0919), (8, 0.0, 0.067),
              (20, 0.3, 0.0919)]
    lev = solve_exact(band_from_layers(layers), wavefunctions=False)
    ref, err = _fd_extrapolated(layers, 4)
    assert np.all(err < 1e-6)
    np.testing.assert_allclose(lev.energies_eV[:4], ref, atol=1 * UEV, rtol=0)
    split = lev.energies_eV[1] - lev.energies_eV[0]
    assert split == pytest.approx(ref[1] - ref[0], abs=1 * UEV)


def test_weak_doublet_found_as_two_states():
    # 16 nm barrier: splitting well below 1 ueV; checked against the FD solution.
    layers = [(20, 0.3, 0.0919), (8, 0.0, 0.067), (16, 0.3, 0.0919), (8, 0.0, 0.067),
              (20, 0.3, 0.0919)]
    band = band_from_layers(layers)
    lev = solve_exact(band, wavefunctions=True)
    E = lev.energies_eV
    ref, _ = _fd_extrapolated(layers, 2)
    split = E[1] - E[0]
    assert 0 < split < 1 * UEV
    assert split == pytest.approx(ref[1] - ref[0], rel=0.05)
    # the single-well levels come in pairs: twice the single-well count
    single = _square_well_levels(8.0, 0.3, 0.067, 0.0919)
    assert len(lev) == 2 * single.size
    # count function: exactly one eigenvalue in each half of the doublet
    mid = 0.5 * (E[0] + E[1])
    t0, t1 = 2 * lev.states[0].tolerance_eV, 2 * lev.states[1].tolerance_eV
    assert t0 < 0.1 * split and t1 < 0.1 * split
    assert list(count_states_below(band, np.array([E[0] - t0, mid, E[1] + t1]))) == [0, 1, 2]
    # bonding state even, antibonding odd (symmetric structure)
    s1, s2 = lev.states[0], lev.states[1]
    zc = 0.5 * (band.z_start_nm + band.z_end_nm)
    for s, parity in ((s1, 1), (s2, -1)):
        mirror = np.interp(2 * zc - s.z_nm, s.z_nm, s.psi)
        assert np.trapezoid(s.psi * mirror, s.z_nm) == pytest.approx(parity, abs=1e-3)


# ------------------------------------------------------------ thick barrier, count function
def test_thick_barrier_stability_and_count():
    # wells of 8 and 6 nm separated by 300 nm: each level equals the isolated
    # well's level (Bastard 1981 equations) to far below 1 ueV.
    layers = [(20, 0.3, 0.0919), (8, 0.0, 0.067), (300, 0.3, 0.0919), (6, 0.0, 0.067),
              (20, 0.3, 0.0919)]
    band = band_from_layers(layers)
    lev = solve_exact(band)
    ref = np.sort(np.concatenate([_square_well_levels(8.0, 0.3, 0.067, 0.0919),
                                  _square_well_levels(6.0, 0.3, 0.067, 0.0919)]))
    assert len(lev) == ref.size
    np.testing.assert_allclose(lev.energies_eV, ref, atol=1 * UEV, rtol=0)
    assert np.all(np.diff(lev.energies_eV) > 0)  # no duplicates
    for s in lev.states:
        assert np.all(np.isfinite(s.psi))
        assert sum(s.layer_probability) == pytest.approx(1.0, abs=1e-6)
    e = np.linspace(-0.01, 0.31, 3001)
    n = count_states_below(band, e)
    assert np.all(np.diff(n) >= 0)
    assert n[-1] == len(lev)
    # N jumps by one exactly at each found level
    for k, s in enumerate(lev.states):
        assert list(count_states_below(band, np.array([s.energy_eV - 1e-6, s.energy_eV + 1e-6]))) \
            == [k, k + 1]


def test_normalisation_and_probabilities():
    # the wavefunction integrates to one including the analytic tails, and its
    # layer probabilities add up to one (definition; common practice, no source)
    band = band_from_layers([(20, 0.3, 0.0919), (10, 0.0, 0.067), (20, 0.3, 0.0919)])
    lev = solve_exact(band)
    for s in lev.states:
        assert sum(s.layer_probability) == pytest.approx(1.0, abs=1e-6)
        assert s.psi[np.argmax(np.abs(s.psi))] > 0
    # against the analytic ground state: psi = cos(kz) in the well (Bastard 1981)
    s = lev.states[0]
    k = np.sqrt(0.067 * s.energy_eV / C)
    zc = 25.0
    inw = np.abs(s.z_nm - zc) < 4.9
    ratio = s.psi[inw] / np.cos(k * (s.z_nm[inw] - zc))
    assert np.ptp(ratio) < 1e-6 * np.max(ratio)
    # wavefunction() at the eigenvalue gives the same shape
    w = wavefunction(band, s.carrier_energy_eV, s.z_nm)
    w = w / w[np.argmax(np.abs(w))] * s.psi[np.argmax(np.abs(s.psi))]
    np.testing.assert_allclose(w, s.psi, atol=1e-6)


def test_messages_no_bound_state():
    # a hump instead of a well: the band cannot confine (not an error)
    band = band_from_layers([(10, 0.0, 0.067), (5, 0.2, 0.067), (10, 0.0, 0.067)])
    lev = solve_exact(band, quasi_bound=False)
    assert len(lev) == 0 and "cannot confine" in lev.message
    # shallow narrow well: one bound state always exists in 1D with equal masses,
    # but max_states=0 asks for none; use a well below the claddings
    band = band_from_layers([(10, 0.3, 0.067), (1, 0.0, 0.067), (10, 0.3, 0.067)])
    lev = solve_exact(band)
    assert len([s for s in lev.states if s.bound]) == 1  # 1D: always one bound state (textbook)


# ------------------------------------------------------------ quasi-bound state
def _transmission(layers, E):
    """Plane-wave transfer matrix with BDD matching (psi, psi'/m continuous).

    Independent textbook method (e.g. Bastard, "Wave Mechanics Applied to
    Semiconductor Heterostructures", 1988, ch. 1 -- from memory for the
    chapter).  Leads are the first and last layers (semi-infinite).
    """
    E = np.asarray(E, dtype=complex)
    k = [np.sqrt(m * (E - V) / C + 0j) for _, V, m in layers]
    M = np.broadcast_to(np.eye(2, dtype=complex), E.shape + (2, 2)).copy()
    z = 0.0
    for i in range(len(layers) - 1):
        z += layers[i][0] if i > 0 else 0.0
        # match at interface z between layer i and i+1: amplitudes (A, B) of
        # exp(+ikz), exp(-ikz); D_i(z) maps amplitudes to (psi, psi'/m)
        def D(j, zz):
            kk, m = k[j], layers[j][2]
            e1, e2 = np.exp(1j * kk * zz), np.exp(-1j * kk * zz)
            return np.stack([np.stack([e1, e2], -1),
                             np.stack([1j * kk / m * e1, -1j * kk / m * e2], -1)], -2)
        M = np.linalg.solve(D(i + 1, z), D(i, z)) @ M
    # incoming A=1 from the left, no incoming from the right: B_R = 0
    # (A_R, B_R) = M (1, r) -> B_R = M10 + M11 r = 0
    r = -M[..., 1, 0] / M[..., 1, 1]
    t = M[..., 0, 0] + M[..., 0, 1] * r
    kl, kr = k[0], k[-1]
    ml, mr = layers[0][2], layers[-1][2]
    return np.abs(t) ** 2 * (kr.real / mr) / (kl.real / ml)


def test_quasi_bound_width_vs_transmission():
    # double barrier: well level above the leads is a resonance; the FWHM of
    # the Breit-Wigner/Lorentzian transmission peak equals Gamma
    # (G. Breit and E. Wigner, Phys. Rev. 49, 519 (1936)) to O(Gamma/level spacing).
    layers = [(10, 0.0, 0.067), (4, 0.3, 0.0919), (6, 0.0, 0.067), (4, 0.3, 0.0919),
              (10, 0.0, 0.067)]
    band = band_from_layers(layers)
    lev = solve_exact(band, wavefunctions=False)
    qb = [s for s in lev.states if not s.bound]
    assert len(qb) >= 1
    s = qb[0]
    gamma = HBAR_EVS / s.lifetime_s
    Er = s.energy_eV
    # transmission peak and half-maximum points found in the test
    from scipy.optimize import minimize_scalar
    res = minimize_scalar(lambda e: -_transmission(layers, np.array([e]))[0],
                          bounds=(Er - 5 * gamma, Er + 5 * gamma), method="bounded",
                          options={"xatol": 1e-10})
    ep, tp = res.x, -res.fun
    assert tp == pytest.approx(1.0, abs=1e-3)  # symmetric double barrier: T = 1 at resonance
    f = lambda e: _transmission(layers, np.array([e]))[0] - tp / 2  # noqa: E731
    lo = brentq(f, ep - 10 * gamma, ep, xtol=1e-12)
    hi = brentq(f, ep, ep + 10 * gamma, xtol=1e-12)
    assert abs(ep - Er) < 0.02 * gamma
    assert (hi - lo) == pytest.approx(gamma, rel=0.02)


def test_quasi_bound_under_field_tilted_well():
    # Under field the lower cladding falls below the well levels: the state is
    # reported as quasi-bound with a finite lifetime; with a thicker escape
    # barrier the width must fall roughly by the WKB/Gamow barrier factor
    # exp(-2 int kappa dz) (Gamow 1928; textbook WKB), checked within 20 %.
    def make(tb):
        return band_from_layers([(10, 0.3, 0.067), (6, 0.0, 0.067), (tb, 0.3, 0.067),
                                 (30, 0.0, 0.067)], field_kV_per_cm=-30.0)
    widths = []
    for tb in (4.0, 6.0):
        lev = solve_exact(make(tb), wavefunctions=False)
        qb = [s for s in lev.states if not s.bound]
        assert qb and not any(s.bound for s in qb)
        widths.append((HBAR_EVS / qb[0].lifetime_s, qb[0].carrier_energy_eV))
    (g1, e1), (g2, e2) = widths
    # Gamow factor of the extra 2 nm of the tilted barrier at the resonance energy
    F = 30e-4
    z = np.linspace(16 + 4, 16 + 6, 2001)
    V = 0.3 - F * z
    kap = np.sqrt(np.maximum(0.067 * (V - 0.5 * (e1 + e2)) / C, 0))
    ratio_wkb = np.exp(-2 * np.trapezoid(kap, z))
    assert g2 / g1 == pytest.approx(ratio_wkb, rel=0.2)


# ------------------------------------------------------------ Kronig–Penney minibands
def _kp_edges(Lw, Lb, V0, mw, mb, n_bands):
    """Band edges of the Kronig–Penney model with BDD matching.

    cos(qd) = cos(k Lw) cosh(kap Lb) + (xi - 1/xi)/2 sin(k Lw) sinh(kap Lb),
    xi = (kap/mb)/(k/mw).  Kronig and Penney, Proc. R. Soc. A 130, 499 (1931);
    BDD form: Bastard, Phys. Rev. B 24, 5693 (1981).
    """
    def g(E):
        k = np.sqrt(mw * E / C)
        kap = np.sqrt(mb * (V0 - E) / C)
        xi = (kap / mb) / (k / mw)
        return np.cos(k * Lw) * np.cosh(kap * Lb) + 0.5 * (xi - 1 / xi) * np.sin(k * Lw) * np.sinh(kap * Lb)

    E = np.linspace(1e-7, V0 - 1e-7, 400001)
    y = g(E)
    edges = []
    for target in (1.0, -1.0):
        idx = np.nonzero(np.sign(y[1:] - target) != np.sign(y[:-1] - target))[0]
        edges += [brentq(lambda e, t=target: g(e) - t, E[i], E[i + 1], xtol=1e-14) for i in idx]
    return np.sort(edges)[: 2 * n_bands]


def test_kronig_penney_minibands():
    Lw, Lb, V0, mw, mb = 5.0, 2.0, 0.3, 0.067, 0.0919
    layers = [(20, V0, mb)] + [(Lw, 0.0, mw), (Lb, V0, mb)] * 5 + [(20, V0, mb)]
    band = band_from_layers(layers)
    rep = RepeatInfo(z_start_nm=20.0, period_nm=Lw + Lb, count=5, first_layer=1, layers_per_period=2)
    band = dataclasses.replace(band, repeats=(rep,))
    mbs = minibands(band, rep)
    ref = _kp_edges(Lw, Lb, V0, mw, mb, len(mbs))
    got = np.array([[b.bottom_eV, b.top_eV] for b in mbs]).ravel()
    # the closed form above is written for energies below the barrier only
    got = got[got < V0]
    assert len(mbs) >= 2 and ref.size == got.size
    np.testing.assert_allclose(got, ref, atol=1 * UEV, rtol=0)
    lev = solve_exact(band, wavefunctions=False)
    assert len(lev.minibands) == len(mbs)
    # the 5 coupled wells: 5 states inside the first miniband (tight-binding picture,
    # common practice, no source)
    b1 = mbs[0]
    inside = [s for s in lev.states if b1.bottom_eV - 1e-3 < s.energy_eV < b1.top_eV + 1e-3]
    assert len(inside) == 5


# ------------------------------------------------------------ tilted double barrier: pole refinement
def _airy_layer_matrix(V0, F, m, h, E):
    """Exact transfer matrix of (psi, psi'/m) over a layer with V = V0 + F x, 0 <= x <= h.

    psi = A Ai(zeta) + B Bi(zeta) with zeta = alpha x + (m/C)(V0 - E)/alpha^2,
    alpha^3 = m F / C (real cube root, any sign of F): the Airy-function solution
    of the linear potential (L. D. Landau and E. M. Lifshitz, Quantum Mechanics,
    3rd ed., Pergamon 1977, sect. 24; Airy-function transfer matrices for biased
    tunnelling structures: K. F. Brennan and C. J. Summers, J. Appl. Phys. 61, 614
    (1987), from memory).  Complex E allowed (scipy.special.airy).
    """
    a = np.cbrt(m * F / C)
    offset = (m / C) * (V0 - E) / a ** 2
    Ai0, Aip0, Bi0, Bip0 = airy(offset)
    Ai1, Aip1, Bi1, Bip1 = airy(a * h + offset)
    W0 = np.array([[Ai0, Bi0], [a * Aip0 / m, a * Bip0 / m]])
    W1 = np.array([[Ai1, Bi1], [a * Aip1 / m, a * Bip1 / m]])
    return W1 @ np.linalg.inv(W0)


def _airy_open_mismatch(layers, F, E):
    """Outgoing-wave condition of a biased stack with flat claddings (Airy matrices inside).

    Left cladding: psi = exp(-i k z) (outgoing to the left); right cladding:
    psi' = +i k psi (outgoing to the right); Re k > 0.  Its complex zero is the
    resonance pole E_r - i Gamma/2 (Gamow/Siegert outgoing-wave condition,
    e.g. Landau and Lifshitz, Quantum Mechanics, sect. 134).
    """
    z = 0.0
    kL = np.sqrt(layers[0][2] * (E - layers[0][1]) / C + 0j)
    vec = np.array([1.0 + 0j, -1j * kL / layers[0][2]])
    for t, V, m in layers:
        vec = _airy_layer_matrix(V + F * z, F, m, t, E) @ vec
        z += t
    VR, mR = layers[-1][1] + F * z, layers[-1][2]
    kR = np.sqrt(mR * (E - VR) / C + 0j)
    return vec[1] - 1j * kR / mR * vec[0]


def test_tilted_double_barrier_pole_converges():
    # A double-barrier resonance under 20 kV/cm: every layer is tilted (sliced by the
    # solver), the reference pole comes from exact Airy-function matrices (above).
    from scipy.optimize import newton

    from qwell.solvers import _transfer as tr
    from qwell.solvers.exact import _cladding, _poles

    layers = [(10, 0.0, 0.067), (4, 0.3, 0.0919), (6, 0.0, 0.067), (4, 0.3, 0.0919),
              (10, 0.0, 0.067)]
    F_kV = 20.0
    F = F_kV * 1e-4  # eV/nm per kV/cm (definition of the unit)
    band = band_from_layers(layers, field_kV_per_cm=F_kV)
    tol = 1e-9
    lev = solve_exact(band, wavefunctions=False, tolerance_eV=tol)
    qb = [s for s in lev.states if not s.bound]
    assert len(qb) == 1
    s = qb[0]
    assert s.converged and s.tolerance_eV <= tol
    gamma = HBAR_EVS / s.lifetime_s
    # independent start for the reference: the well level of the unbiased closed
    # 6 nm well (Bastard 1981 equations, above) with a small negative imaginary part
    e_start = _square_well_levels(6.0, 0.3, 0.067, 0.0919)[0] + F * 17.0  # well centre 17 nm
    pole = newton(lambda e: _airy_open_mismatch(layers, F, e), e_start - 1e-4j, tol=1e-15,
                  maxiter=200)
    assert abs(_airy_open_mismatch(layers, F, pole)) < 1e-10
    # the refined pole matches the exact one to the requested tolerance
    assert abs(s.carrier_energy_eV - pole.real) < tol
    assert abs(gamma - (-2 * pole.imag)) < 2 * tol
    # the sliced pole converges as h^2 (midpoint slicing, even error expansion):
    # the error falls by ~4 per halving of the step (Richardson 1911, above)
    cl, cr = _cladding(band, "left"), _cladding(band, "right")
    errs = []
    for level in range(4):
        p, _, done = _poles(tr.build_slices(band, level), np.array([pole]), cl, cr, 1e-14)
        assert done[0]
        errs.append(abs(p[0] - pole))
    ratios = np.array(errs[:-1]) / np.array(errs[1:])
    assert np.all((ratios > 3.5) & (ratios < 4.5))


def test_no_minibands_under_a_field():
    # Bloch's theorem needs V(z + d) = V(z) (F. Bloch, Z. Phys. 52, 555 (1929)); a uniform
    # field breaks the periodicity, so no miniband is reported, with a note saying why.
    from qwell.bands import Band, RepeatInfo
    layers = [(10, 0.3, 0.067)] + [(4, 0.0, 0.067), (2, 0.3, 0.067)] * 4 + [(10, 0.3, 0.067)]
    rep = RepeatInfo(z_start_nm=10.0, period_nm=6.0, count=4, first_layer=1, layers_per_period=2)
    for field, expect in ((0.0, True), (10.0, False)):
        b = band_from_layers(layers, field_kV_per_cm=field)
        b = Band(name=b.name, pieces=b.pieces, carrier_sign=1, repeats=(rep,),
                 layer_names=b.layer_names)
        lev = solve_exact(b, wavefunctions=False)
        assert bool(lev.minibands) is expect
        assert expect or any("not periodic" in n for n in lev.notes)
