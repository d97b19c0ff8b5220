"""Tests of qwell.gain (interband absorption and gain) against outside references."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants as sc

from qwell.bands import Band, Piece
from qwell.cli.json_out import gain_spectrum_json
from qwell.errors import ParameterError
from qwell.gain import (
    DEFAULT_LINEWIDTH_MEV,
    gain_spectrum,
    gain_table,
    interband_model,
    model_from_levels,
)
from qwell.solvers.results import Levels, State
from qwell.stack import stack_from_mapping

HB2 = sc.hbar ** 2 / (2 * sc.m_e) / sc.e * 1e18   # ħ²/2m0 [eV nm²], CODATA via scipy


def box(L_nm, mass_z, band, prefix, count, sign, offset_eV, n_z=2001):
    """Infinite-well states sqrt(2/L) sin(nπz/L) (textbook closed form).

    Band-diagram energy offset + sign * E_n; carrier energy E_n (+ offset for electrons).
    """
    z = np.linspace(0.0, L_nm, n_z)
    out = []
    for n in range(1, count + 1):
        e = HB2 * (n * math.pi / L_nm) ** 2 / mass_z
        carrier = e + (offset_eV if sign > 0 else -offset_eV)
        out.append(State(band=band, label=f"{prefix}{n}", index=n,
                         energy_eV=sign * carrier, carrier_energy_eV=carrier, z_nm=z,
                         psi=math.sqrt(2.0 / L_nm) * np.sin(n * math.pi * z / L_nm)))
    b = Band(name=band, pieces=(Piece(z_start_nm=0.0, z_end_nm=L_nm, layer_index=0,
                                      mass_m0=mass_z),), carrier_sign=sign)
    return Levels(band=band, method="closed form", states=tuple(out)), b


def infinite_well_model(L=8.0, me=0.067, mhh=0.111, mlh=0.2, Ep=28.8, n_r=3.5, T=300.0):
    eg = 1.424
    el, eb = box(L, me, "conduction", "e", 1, +1, eg)
    hh, hb = box(L, 0.35, "heavy_hole", "hh", 1, -1, 0.0)
    lh, lb = box(L, 0.09, "light_hole", "lh", 1, -1, 0.0)
    masses = {"e1": me, "hh1": mhh, "lh1": mlh}
    return model_from_levels(el, [hh, lh], kane_energy_eV=Ep, length_nm=L, temperature_K=T,
                             masses_m0=masses, refractive_index=n_r, electron_band=eb,
                             hole_bands={"heavy_hole": hb, "light_hole": lb})


def chuang_step_cm1(E_eV, polarisation_factor, mr, Ep, n_r, L_nm):
    """Unfilled step of one pair, closed form.

    S. L. Chuang, Physics of Photonic Devices, 2nd ed., Wiley (2009), ch. 9, sec. 9.4
    (interband absorption in a quantum well; section number from memory):
    α = C0 |I|² |ê·p_cv|² m_r / (π ħ² L),  C0 = π e² / (n_r c ε0 m0² ω),
    |ê·p_cv|² = factor × M_b², M_b² = m0 Ep / 6 (TE heavy hole 3/2, TE light hole 1/2,
    TM light hole 2), |I|² = 1 for e1-h1 of equal infinite wells.
    """
    w = E_eV * sc.e / sc.hbar
    c0 = math.pi * sc.e ** 2 / (n_r * sc.c * sc.epsilon_0 * sc.m_e ** 2 * w)
    mb2 = sc.m_e * Ep * sc.e / 6.0
    rho = mr * sc.m_e / (math.pi * sc.hbar ** 2 * L_nm * 1e-9)
    return c0 * polarisation_factor * mb2 * rho / 100.0


def test_step_height_of_infinite_well_edge_matches_closed_form():
    model = infinite_well_model()
    tab = gain_table(model, [0.0], linewidth_meV=None,
                     energies_eV=[model.pairs[0].edge_eV + 1e-6, model.pairs[1].edge_eV + 1e-6])
    hh = [p for p in model.pairs if p.name == "e1-hh1"][0]
    lh = [p for p in model.pairs if p.name == "e1-lh1"][0]
    mr_hh = 0.067 * 0.111 / (0.067 + 0.111)
    mr_lh = 0.067 * 0.2 / (0.067 + 0.2)
    e_hh = hh.edge_eV + 1e-6
    want_hh = chuang_step_cm1(e_hh, 1.5, mr_hh, 28.8, 3.5, 8.0)
    # absorption = -gain; at zero density f_v - f_c = 1 (empty conduction, full valence)
    assert -tab.gain_te_cm1[0, 0] == pytest.approx(want_hh, rel=0.01)
    assert hh.step_te_cm1 == pytest.approx(chuang_step_cm1(hh.edge_eV, 1.5, mr_hh, 28.8, 3.5, 8.0),
                                           rel=0.01)
    assert hh.step_tm_cm1 == 0.0
    # light hole: TE 1/2 M_b², TM 2 M_b² (Chuang 2009, sec. 9.5 as recalled)
    assert lh.step_te_cm1 == pytest.approx(chuang_step_cm1(lh.edge_eV, 0.5, mr_lh, 28.8, 3.5, 8.0),
                                           rel=0.01)
    assert lh.step_tm_cm1 == pytest.approx(chuang_step_cm1(lh.edge_eV, 2.0, mr_lh, 28.8, 3.5, 8.0),
                                           rel=0.01)
    # both steps present above the lh edge (TM: light hole only)
    e_lh = lh.edge_eV + 1e-6
    assert -tab.gain_tm_cm1[0, 1] == pytest.approx(
        chuang_step_cm1(e_lh, 2.0, mr_lh, 28.8, 3.5, 8.0), rel=0.01)
    assert -tab.gain_te_cm1[0, 1] == pytest.approx(
        chuang_step_cm1(e_lh, 1.5, mr_hh, 28.8, 3.5, 8.0)
        + chuang_step_cm1(e_lh, 0.5, mr_lh, 28.8, 3.5, 8.0), rel=0.01)


def gaas_well(width_nm=8.0, T="300 K", x=0.3):
    return stack_from_mapping({
        "name": "GaAs well", "temperature": T, "substrate": "GaAs",
        "layers": [{"material": f"Al{x}Ga{1 - x:.1f}As", "thickness": "30 nm"},
                   {"material": "GaAs", "thickness": f"{width_nm} nm", "name": "well"},
                   {"material": f"Al{x}Ga{1 - x:.1f}As", "thickness": "30 nm"}]})


def test_bernard_duraffourg_unbroadened_at_every_density():
    # Bernard & Duraffourg, Phys. Status Solidi 1, 699 (1961): stimulated emission
    # exceeds absorption exactly where ħω < F_c - F_v.  It holds exactly for the
    # unbroadened spectrum (with a Lorentzian, tails from other energies blur it),
    # and only where there are states (ħω at or above the lowest pair edge).
    model = interband_model(gaas_well())
    dens = np.geomspace(1e11, 5e12, 25)
    tab = gain_table(model, dens, linewidth_meV=None, points=1500)
    e = tab.energy_eV
    for k in range(dens.size):
        dF = tab.fermi_separation_eV[k]
        for g in (tab.gain_te_cm1[k], tab.gain_tm_cm1[k]):
            clear = np.abs(e - dF) > 1e-9
            sel = clear & (np.abs(g) > 0)
            assert np.array_equal(g[sel] > 0, e[sel] < dF), dens[k]
        # TE has states everywhere above the first edge: no zero there
        assert np.all(tab.gain_te_cm1[k][clear] != 0)


def test_transparency_density_of_an_8nm_gaas_well_at_300K():
    # An ~8 nm GaAs/AlGaAs well is transparent at 1-2e12 cm^-2 at 300 K
    # (common practice, no source).  Default broadening.
    model = interband_model(gaas_well())
    tab = gain_table(model, np.geomspace(3e11, 4e12, 50))
    assert 1e12 <= tab.transparency_density_cm2 <= 2e12
    # above transparency the peak sits below F_c - F_v and near the e1-hh1 edge
    k = np.searchsorted(tab.densities_cm2, 3e12)
    assert tab.peak_gain_cm1[k] > 0
    assert tab.peak_energy_eV[k] < tab.fermi_separation_eV[k]


def test_broadened_spectrum_against_direct_convolution():
    # Independent numerical convolution written here: dense trapezoid over
    # transition energies of the Lorentzian (FWHM Γ) times A (f_c - f_v),
    # with the constant -1 part beyond the dense range added in closed form.
    model = infinite_well_model(T=300.0)
    fwhm = 10.0
    tab = gain_table(model, [2e12], linewidth_meV=fwhm, points=60)
    fc, fv = tab.electron_fermi_eV[0], tab.hole_fermi_eV[0]
    kt = sc.k * 300.0 / sc.e
    hw = 0.5e-3 * fwhm
    u = np.linspace(0.0, 4.0, 400001)
    e = tab.energy_eV
    want = np.zeros_like(e)
    for p in model.pairs:
        ee = 1.424 + HB2 * (math.pi / 8.0) ** 2 / 0.067 + p.reduced_mass_m0 / p.electron_mass_m0 * u
        eh = -(p.edge_eV - (ee[0])) - p.reduced_mass_m0 / p.hole_mass_m0 * u
        occ = 1 / (1 + np.exp((ee - fc) / kt)) - 1 / (1 + np.exp((eh - fv) / kt))
        for i, E in enumerate(e):
            lor = (hw / math.pi) / ((E - p.edge_eV - u) ** 2 + hw ** 2)
            tail = -(0.5 - math.atan((u[-1] - (E - p.edge_eV)) / hw) / math.pi)
            conv = np.trapezoid(lor * occ, u) + tail
            step = chuang_step_cm1(E, 1.5 if p.hole.startswith("hh") else 0.5,
                                   p.reduced_mass_m0, 28.8, 3.5, 8.0)
            want[i] += step * conv
    np.testing.assert_allclose(tab.gain_te_cm1[0], want, rtol=2e-3, atol=2e-3 * np.abs(want).max())


def test_single_density_spectrum_and_json():
    model = infinite_well_model()
    spec = gain_spectrum(model, 3e12)
    assert spec.linewidth_meV == pytest.approx(DEFAULT_LINEWIDTH_MEV)
    # 2ħ/τ with τ = 0.1 ps (CODATA ħ)
    assert DEFAULT_LINEWIDTH_MEV == pytest.approx(2 * sc.hbar / 0.1e-12 / sc.e * 1e3, rel=1e-6)
    js = gain_spectrum_json(spec)
    for key in ("density_cm2", "peak_gain_cm1", "peak_wavelength_um", "electron_fermi_eV",
                "hole_fermi_eV", "gain_te_cm1", "active_length_nm", "refractive_index"):
        assert key in js
    assert spec.peak_gain_cm1 == pytest.approx(float(np.max(spec.gain_te_cm1)))


def test_charge_neutral_quasi_fermi_levels():
    # n = p: the electron and hole sheet densities at F_c and F_v equal the injection
    # (2-D Fermi–Dirac filling, Ando, Fowler, Stern, Rev. Mod. Phys. 54, 437 (1982))
    model = infinite_well_model()
    tab = gain_table(model, [5e11, 2e12], linewidth_meV=None, points=50)
    kt = sc.k * 300.0 / sc.e
    dos = sc.m_e / (math.pi * sc.hbar ** 2) * sc.e * 1e-4
    for k, n in enumerate(tab.densities_cm2):
        e = model.electrons
        ne = np.sum(e.mass_m0 * dos * kt * np.logaddexp(0, (tab.electron_fermi_eV[k]
                                                            - e.carrier_energy_eV) / kt))
        h = model.holes
        ph = np.sum(h.mass_m0 * dos * kt * np.logaddexp(0, (-tab.hole_fermi_eV[k]
                                                            - h.carrier_energy_eV) / kt))
        # qwell uses CODATA 2018, scipy its own release: they differ by ~1e-9
        assert ne == pytest.approx(n, rel=1e-7) and ph == pytest.approx(n, rel=1e-7)


@pytest.mark.parametrize("kwargs, match", [
    ({"densities_cm2": [-1e11]}, "density.*0 <= density <= 1e\\+14"),
    ({"densities_cm2": [1e15]}, "density.*0 <= density <= 1e\\+14"),
    ({"densities_cm2": [1e12], "linewidth_meV": 0.0}, "linewidth.*> 0"),
    ({"densities_cm2": [1e12], "linewidth_meV": float("nan")}, "linewidth.*> 0"),
    ({"densities_cm2": [1e12], "polarisation": "xy"}, "polarisation"),
])
def test_bad_input(kwargs, match):
    model = infinite_well_model()
    with pytest.raises(ParameterError, match=match):
        gain_table(model, **kwargs)


def test_fft_convolution_equals_direct_convolution():
    # numpy.convolve (direct sum) is the reference for the FFT convolution used inside
    from qwell.carriers import fft_convolve
    rng = np.random.default_rng(3)
    a, b = rng.normal(size=(3, 257)), rng.normal(size=100)
    got = fft_convolve(a, b[None, :])
    for row, want_row in zip(got, a):
        np.testing.assert_allclose(row, np.convolve(want_row, b), atol=1e-10)
