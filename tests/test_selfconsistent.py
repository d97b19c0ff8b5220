"""Tests of the Schrödinger–Poisson loop (qwell.poisson, qwell.selfconsistent).

Every reference is computed inside the test from a closed form, a special
function of scipy, CODATA 2018 constants (qwell.constants) or an independent
numerical method written here; the source of each formula is named beside
the check.  All stacks are invented scenarios with user materials whose
parameters are written out in the YAML.
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq
from scipy.special import airy

from qwell import constants as codata
from qwell.errors import ConvergenceError, ParameterError
from qwell.levels import solve_stack
from qwell.poisson import (build_grid, doping_on_grid, sheet_density_2d, solve_poisson)
from qwell.optics import coulomb_overlap_nm, depolarisation_shift
import qwell.selfconsistent as sc
from qwell.selfconsistent import solve_self_consistent
from qwell.solvers.results import State
from qwell.stack import stack_from_text

# CODATA 2018 (E. Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021)) as carried by
# qwell.constants (checked against the published digits in tests/test_constants.py)
const = SimpleNamespace(e=codata.E_C, m_e=codata.M0_KG, hbar=codata.HBAR_J_S, k=codata.KB_J_PER_K,
                        epsilon_0=codata.EPS0_F_PER_M)
KT_EV_PER_K = const.k / const.e
HB2_2M0 = const.hbar ** 2 / (2 * const.m_e) / const.e * 1e18   # hbar^2/2m0 [eV nm^2]


def _hetero(ns_cm2, ndepl_cm2, barrier_eV=10.0, temperature="4.2 K", eps_wall=12.9,
            eps_chan=12.9, extra=""):
    """Hard-walled heterojunction: donor sheet in the barrier (n_s + N_depl), a
    compensating acceptor sheet (the depletion charge N_depl) deep in the channel."""
    return stack_from_text(f"""
temperature: {temperature}
nonparabolicity: false
materials:
  wall: {{conduction_edge: {barrier_eV} eV, electron_mass: 0.067, dielectric_constant: {eps_wall}}}
  chan: {{conduction_edge: 0.0 eV, electron_mass: 0.067, dielectric_constant: {eps_chan}}}
layers:
  - {{material: wall, thickness: 30 nm, doping: {{sheet: {ns_cm2 + ndepl_cm2:.6e} cm^-2, at: 10 nm}}}}
  - {{material: chan, thickness: 150 nm, doping: {{sheet_acceptors: {ndepl_cm2:.6e} cm^-2, at: 120 nm}}}}
{extra}""")


WELL_YAML = """
temperature: {T}
materials:
  bar: {{conduction_edge: 0.25 eV, electron_mass: 0.09, dielectric_constant: 12.0}}
  core: {{conduction_edge: 0.0 eV, electron_mass: 0.067, dielectric_constant: 12.9}}
layers:
  - {{material: bar, thickness: 25 nm, doping: {{donors: {nd} cm^-3, from: 5 nm, to: 15 nm}}}}
  - {{material: core, thickness: 10 nm}}
  - {{material: bar, thickness: 25 nm, doping: {{sheet: {sheet} cm^-2, at: 12.5 nm}}}}
"""


def _well(nd="1e17", sheet="2e11", T="77 K"):
    return stack_from_text(WELL_YAML.format(nd=nd, sheet=sheet, T=T))


def _interface_edge(result, z_nm):
    return float(result.profile.bands["conduction"].potential(np.array([z_nm + 1e-9]))[0])


def _mean_z(state):
    return float(np.trapezoid(state.psi ** 2 * state.z_nm, state.z_nm)
                 / np.trapezoid(state.psi ** 2, state.z_nm))


def _gauss_potential(result, stack):
    """U(z) from the charge by Gauss's law, integrated from z = 0 (zero field there).

    Independent of qwell.poisson: cells and face permittivities rebuilt here.
    Source: J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999),
    sec. 4.4 (normal D continuous, div D = rho): eps0 eps(z) E(z) = int_0^z rho.
    """
    z = result.z_nm
    q = (result.donor_density_cm3 - result.acceptor_density_cm3 + result.hole_density_cm3
         - result.electron_density_cm3)
    h = np.diff(z)
    w = np.concatenate([[h[0] / 2], (h[:-1] + h[1:]) / 2, [h[-1] / 2]])
    bounds = np.concatenate([[0.0], np.cumsum([lay.thickness_nm for lay in stack.layers])])
    eps_layer = [stack.material_of(lay).dielectric_constant for lay in stack.layers]
    inv = np.zeros(h.size)                               # int dz / eps over each face
    for k in range(len(stack.layers)):
        lo = np.clip(bounds[k], z[:-1], z[1:])
        hi = np.clip(bounds[k + 1], z[:-1], z[1:])
        inv += (hi - lo) / eps_layer[k]
    # charge per area left of each face [cm^-2] -> D [C/m^2]; U = -phi, dU/dz = E-field * (-1)*(-1)
    sheet_left = np.cumsum(w * q)[:-1] * 1e-7           # cm^-3 * nm -> cm^-2
    d_field = const.e * sheet_left * 1e4                 # C/m^2
    # dU/dz [eV/m] = e D / (eps0 eps) / e ; integrate over each face with its series eps
    du = d_field / const.epsilon_0 * inv * 1e-9          # V
    return np.concatenate([[0.0], np.cumsum(du)])


# ---------------------------------------------------------------------------
# 2D Fermi–Dirac occupation
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("temperature_K", [4.2, 77.0, 300.0])
@pytest.mark.parametrize("x_eV", [-0.08, -0.01, 0.0, 0.015, 0.06])
def test_sheet_density_against_quadrature(temperature_K, x_eV):
    # n = int_0^inf g2D f_FD(E) dE with g2D = m/(pi hbar^2) (spin 2): T. Ando, A. B. Fowler and
    # F. Stern, Rev. Mod. Phys. 54, 437 (1982), sec. II; integrated numerically here with quad.
    m = 0.067
    g2d_cm2_per_eV = m * const.m_e / (math.pi * const.hbar ** 2) * const.e * 1e-4
    kt = KT_EV_PER_K * temperature_K

    def occ(e):
        return 1.0 / (1.0 + math.exp(min((e - x_eV) / kt, 700.0)))

    upper = max(x_eV, 0.0) + 60 * kt
    ref, _ = quad(occ, 0.0, upper, points=[max(x_eV, 0.0)] if x_eV > 0 else None,
                  epsabs=0, epsrel=1e-12, limit=200)
    ref *= g2d_cm2_per_eV
    assert sheet_density_2d(m, temperature_K, x_eV) == pytest.approx(ref, rel=1e-8)


def test_sheet_density_degenerate_limit():
    # T -> 0: n = m (E_F - E_1)/(pi hbar^2) (Ando, Fowler, Stern 1982), CODATA constants.
    ref = 0.067 * const.m_e * 0.01 * const.e / (math.pi * const.hbar ** 2) * 1e-4
    assert sheet_density_2d(0.067, 0.0, 0.01) == pytest.approx(ref, rel=1e-12)
    assert sheet_density_2d(0.067, 0.0, -0.01) == 0.0


# ---------------------------------------------------------------------------
# Poisson part on its own
# ---------------------------------------------------------------------------
def test_doping_on_grid_conserves_totals():
    # Conservation: the cell sums must reproduce the written doping exactly (the stack's own
    # numbers: 1e17 cm^-3 over 10 nm = 1e11 cm^-2, plus a 2e11 cm^-2 sheet).
    st = _well()
    for step in (0.1, 0.37, 1.3):
        grid = build_grid(st, step)
        dop = doping_on_grid(st, grid)
        total_cm2 = grid.integrate(dop.donors_cm3) * 1e-7
        assert total_cm2 == pytest.approx(1e17 * 10e-7 + 2e11, rel=1e-12)


def test_poisson_capacitor_closed_form():
    # A +sigma / -sigma sheet pair across a dielectric step: between the sheets
    # dU/dz = e sigma/(eps0 eps) in each medium, zero outside (Gauss's law, J. D. Jackson,
    # Classical Electrodynamics, 3rd ed., Wiley 1999, sec. 4.4).  Sheets on nodes.
    st = stack_from_text("""
materials:
  a: {conduction_edge: 0.2 eV, electron_mass: 0.07, dielectric_constant: 10.0}
  b: {conduction_edge: 0.0 eV, electron_mass: 0.07, dielectric_constant: 13.0}
layers:
  - {material: a, thickness: 20 nm, doping: {sheet: 3e11 cm^-2, at: 10 nm}}
  - {material: b, thickness: 20 nm, doping: {sheet_acceptors: 3e11 cm^-2, at: 10 nm}}
""")
    grid = build_grid(st, 0.1)
    dop = doping_on_grid(st, grid)
    u = solve_poisson(grid, dop.donors_cm3 - dop.acceptors_cm3, boundary="neutral")
    z = grid.z_nm
    sigma = 3e11 * 1e4 * const.e                          # C/m^2
    slope_a = sigma / (const.epsilon_0 * 10.0) * 1e-9     # eV/nm of U (V/nm of -phi)
    slope_b = sigma / (const.epsilon_0 * 13.0) * 1e-9
    ref = np.where(z <= 10, 0.0, np.where(z <= 20, slope_a * (z - 10),
                   slope_a * 10 + np.where(z <= 30, slope_b * (z - 20), slope_b * 10)))
    assert np.max(np.abs(u - ref)) < 1e-9 * max(1.0, np.max(np.abs(ref))) + 1e-12


# ---------------------------------------------------------------------------
# self-consistent loop
# ---------------------------------------------------------------------------
def test_undoped_stack_is_the_flat_band_solution():
    # Zero doping: zero charge, zero potential, and exactly the states of the plain solver
    # (same code path; identity of floats).
    st = stack_from_text("""
materials:
  bar: {conduction_edge: 0.25 eV, electron_mass: 0.09, dielectric_constant: 12.0}
  core: {conduction_edge: 0.0 eV, electron_mass: 0.067, dielectric_constant: 12.9}
layers:
  - {material: bar, thickness: 20 nm}
  - {material: core, thickness: 8 nm}
  - {material: bar, thickness: 20 nm}
""")
    sol = solve_stack(st, self_consistent=True)
    res = sol.self_consistent
    flat = solve_stack(st)
    assert res.iterations == 0 and res.converged
    assert np.all(res.potential_eV == 0.0)
    got = sol.levels["conduction"].energies_eV
    ref = flat.levels["conduction"].energies_eV
    assert got.size == ref.size and np.array_equal(got, ref)


def test_low_doping_tends_to_flat_band():
    # Linear response: for vanishing doping the electrostatic energy scales with the doping
    # (Poisson's equation is linear in the charge when the states are fixed) and the e1 shift
    # is bounded by max |U| (first-order perturbation theory, any QM text, e.g. L. I. Schiff,
    # Quantum Mechanics, 3rd ed., McGraw-Hill 1968, sec. 31).
    flat = solve_stack(_well(nd="0", sheet="0"))
    e1_flat = flat.levels["conduction"]["e1"].energy_eV
    amps, shifts = [], []
    for nd, sheet in (("1e13", "2e7"), ("1e14", "2e8")):
        sol = solve_stack(_well(nd=nd, sheet=sheet), self_consistent=True)   # exact final states
        res = sol.self_consistent
        amp = float(np.max(np.abs(res.potential_eV)))
        shift = abs(sol.levels["conduction"]["e1"].energy_eV - e1_flat)
        assert shift <= amp + 1e-7
        amps.append(amp)
        shifts.append(shift)
    assert amps[1] / amps[0] == pytest.approx(10.0, rel=0.02)
    assert amps[1] < 1e-3 and shifts[1] < 1e-3


@pytest.mark.parametrize("fermi", [None, "fixed"])
def test_neutrality_and_poisson_residual(fermi):
    st = _well()
    kw = {}
    if fermi == "fixed":
        # A Fermi level 5 meV below the self-consistent neutral one (an invented value).
        kw["fermi_level_eV"] = solve_self_consistent(st).fermi_level_eV - 0.005
    res = solve_self_consistent(st, tolerance_meV=1e-3, **kw)
    assert res.converged and res.residual_meV <= 1e-3
    assert res.history[-1] == pytest.approx(res.residual_meV)
    donors_cm2 = 1e17 * 10e-7 + 2e11                        # the stack's own doping
    electrons_cm2 = sum(res.sheet_densities_cm2.values())
    if fermi is None:
        # Charge neutrality to 1e-6 relative (requirement), against the written doping.
        assert res.charge_residual < 1e-6
        assert electrons_cm2 == pytest.approx(donors_cm2, rel=1e-6)
    else:
        assert res.fermi_level_eV == kw["fermi_level_eV"]
        assert res.boundary == "left"
        assert electrons_cm2 < donors_cm2                  # lower E_F: fewer electrons
    # The returned potential satisfies Poisson's equation (Gauss's law integrated
    # independently in the test) to the loop tolerance.
    u_gauss = _gauss_potential(res, st)
    assert np.max(np.abs(u_gauss - res.potential_eV)) <= 2e-6
    # the electron density integrates to the sheet densities (cell sums, 1 nm = 1e-7 cm)
    h = np.diff(res.z_nm)
    w = np.concatenate([[h[0] / 2], (h[:-1] + h[1:]) / 2, [h[-1] / 2]])
    assert np.dot(w, res.electron_density_cm3) * 1e-7 == pytest.approx(electrons_cm2, rel=1e-9)


def _airy_finite_barrier(slope_eV_nm, barrier_eV, mass):
    """Ground state of V = slope*z (z > 0), V = barrier (z < 0): Ai((z - E/s)/l) matched to
    exp(kappa z) with BenDaniel–Duke continuity (equal masses); returns (E, <z>).

    Source: the Airy solution of the triangular well, e.g. T. Ando, A. B. Fowler and F. Stern,
    Rev. Mod. Phys. 54, 437 (1982), sec. III; special functions from scipy.special.airy."""
    a = HB2_2M0 / mass
    ell = (a / slope_eV_nm) ** (1 / 3)

    def mismatch(e):
        ai, aip, _, _ = airy(-e / (slope_eV_nm * ell))
        kappa = math.sqrt((barrier_eV - e) / a)
        return aip / ell - kappa * ai

    e0 = 2.338107 * slope_eV_nm * ell        # hard-wall first Airy zero, from memory (bracket only)
    e = brentq(mismatch, 0.5 * e0, 1.0 * e0 + 1e-9, xtol=1e-14)
    ai0 = airy(-e / (slope_eV_nm * ell))[0]
    kappa = math.sqrt((barrier_eV - e) / a)

    def psi2(z):
        return (airy((z - e / slope_eV_nm) / ell)[0]) ** 2

    top = e / slope_eV_nm + 30 * ell
    norm_in, _ = quad(psi2, 0, top, limit=200, epsrel=1e-12)
    zin, _ = quad(lambda z: z * psi2(z), 0, top, limit=200, epsrel=1e-12)
    norm_out = ai0 ** 2 / (2 * kappa)
    zout = -ai0 ** 2 / (4 * kappa ** 2)
    return e, (zin + zout) / (norm_in + norm_out)


@pytest.mark.slow      # ~2 s: a 10 eV wall needs a fine Schroedinger-Poisson solve
def test_triangular_limit_against_airy():
    # Depletion charge only (n_s = 1e8 cm^-2 << N_depl = 5e11 cm^-2): the channel is the
    # triangular well of the field e N_depl/(eps eps0); compare e1 and <z> with the exact
    # Airy solution for the same finite (10 eV) wall, solved independently here.
    ns, nd = 1e8, 5e11
    sol = solve_stack(_hetero(ns, nd), self_consistent=True)      # exact final states
    res = sol.self_consistent
    slope = const.e * (nd + ns) * 1e4 / (12.9 * const.epsilon_0) * 1e-9   # eV/nm at the wall
    e_ref, z_ref = _airy_finite_barrier(slope, 10.0, 0.067)
    e1 = sol.levels["conduction"]["e1"]
    e_num = e1.energy_eV - _interface_edge(res, 30.0)
    assert e_num == pytest.approx(e_ref, rel=5e-4)
    assert _mean_z(e1) - 30.0 == pytest.approx(z_ref, rel=5e-4)


@pytest.mark.slow      # ~2 s per case
@pytest.mark.parametrize("ns,ndepl", [(3e11, 1e11), (1e11, 1e11), (2e11, 2e11)])
def test_fang_howard(ns, ndepl):
    # Fang–Howard variational result for a 2D electron gas at an impenetrable wall:
    # F. F. Fang and W. E. Howard, Phys. Rev. Lett. 16, 797 (1966); in the form of
    # T. Ando, A. B. Fowler and F. Stern, Rev. Mod. Phys. 54, 437 (1982), sec. III.B (SI units):
    #   psi = sqrt(b^3/2) z exp(-b z/2),  b = (12 m e^2 N*/(eps eps0 hbar^2))^(1/3),
    #   N* = N_depl + 11 n_s/32,  <z> = 3/b,
    #   E_0 = 3 hbar^2 b^2/(8 m N*) (N_depl + 55 n_s/96)   (above the edge at the wall).
    # (Re-derived here: <T> = hbar^2 b^2/8m, <V_depl> = 3 e^2 N_depl/(eps eps0 b),
    #  <V_H> = 33 e^2 n_s/(16 eps eps0 b); minimising <T> + <V_depl> + <V_H>/2 gives b.)
    # The wall here is a 10 eV barrier (FH assumes none penetrable); requirement: 10 %.
    sol = solve_stack(_hetero(ns, ndepl), self_consistent=True)   # exact final states
    res = sol.self_consistent
    m = 0.067 * const.m_e
    n_s, n_d = ns * 1e4, ndepl * 1e4
    n_star = n_d + 11 * n_s / 32
    b = (12 * m * const.e ** 2 * n_star / (12.9 * const.epsilon_0 * const.hbar ** 2)) ** (1 / 3)
    e_fh = 3 * const.hbar ** 2 * b ** 2 / (8 * m * n_star) * (n_d + 55 * n_s / 96) / const.e
    z_fh = 3 / b * 1e9
    e1 = sol.levels["conduction"]["e1"]
    e_num = e1.energy_eV - _interface_edge(res, 30.0)
    assert e_num == pytest.approx(e_fh, rel=0.10)
    assert _mean_z(e1) - 30.0 == pytest.approx(z_fh, rel=0.10)
    # FH assumes one occupied subband holding all of n_s (neutrality: n_s = donors - acceptors)
    assert res.sheet_densities_cm2["e1"] == pytest.approx(ns, rel=1e-3)
    assert res.charge_residual < 1e-6


def test_mixing_schemes_reach_the_same_fixed_point():
    # The fixed point does not depend on the mixing (consistency; common practice, no source).
    st = _hetero(3e11, 1e11, barrier_eV=1.0)
    a = solve_self_consistent(st, mixing="anderson")
    p = solve_self_consistent(st, mixing="predictor")
    ea = a.levels["conduction"]["e1"].energy_eV
    ep = p.levels["conduction"]["e1"].energy_eV
    assert abs(ea - ep) < 5e-6
    assert np.max(np.abs(a.potential_eV - p.potential_eV)) < 5e-6


def test_partial_donor_ionisation_formula():
    # Ionised fraction 1/(1 + g exp((E_F - E_d)/kT)), g = 2, E_d = Ec - E_b:
    # S. M. Sze, Physics of Semiconductor Devices, 2nd ed., Wiley (1981), ch. 1.
    st = stack_from_text(WELL_YAML.format(nd="1e17", sheet="2e11", T="77 K").replace(
        "from: 5 nm, to: 15 nm}", "from: 5 nm, to: 15 nm, donor_level: 6 meV}"))
    res = solve_self_consistent(st)
    grid = build_grid(st, 0.1)
    dop = doping_on_grid(st, grid)
    ec = res.profile.bands["conduction"].potential(res.z_nm)
    kt = KT_EV_PER_K * 77.0
    frac = 1.0 / (1.0 + 2.0 * np.exp((res.fermi_level_eV - (ec - 0.006)) / kt))
    ref = dop.donors_cm3 + dop.donors_level_cm3 * frac
    sel = dop.donors_level_cm3 > 0
    assert np.allclose(res.donor_density_cm3[sel], ref[sel], rtol=1e-9, atol=0)
    assert res.charge_residual < 1e-6


def test_p_type_well_holds_holes():
    # Acceptor-doped well: holes in hh/lh subbands balance the acceptors (neutrality 1e-6).
    st = stack_from_text("""
temperature: 77 K
materials:
  bar: {conduction_edge: 1.7 eV, valence_edge: -0.15 eV, electron_mass: 0.09,
        heavy_hole_mass: 0.38, light_hole_mass: 0.09, dielectric_constant: 12.0}
  core: {conduction_edge: 1.5 eV, valence_edge: 0.0 eV, electron_mass: 0.067,
         heavy_hole_mass: 0.35, light_hole_mass: 0.09, dielectric_constant: 12.9}
layers:
  - {material: bar, thickness: 20 nm, doping: {sheet_acceptors: 1e11 cm^-2, at: 10 nm}}
  - {material: core, thickness: 8 nm}
  - {material: bar, thickness: 20 nm, doping: {sheet_acceptors: 1e11 cm^-2, at: 10 nm}}
""")
    res = solve_self_consistent(st)
    holes = sum(v for k, v in res.sheet_densities_cm2.items() if k.startswith(("hh", "lh")))
    assert holes == pytest.approx(2e11, rel=1e-6)
    assert res.charge_residual < 1e-6
    assert res.fermi_level_eV < 0.0 < res.fermi_level_eV + 0.15   # inside the valence well


def test_not_converged_raises_with_history():
    st = _well()
    with pytest.raises(ConvergenceError, match="did not converge") as info:
        solve_self_consistent(st, max_iterations=1, tolerance_meV=1e-9)
    assert len(info.value.history) == 1 and info.value.history[0] > 0
    res = solve_self_consistent(st, max_iterations=1, tolerance_meV=1e-9,
                                strict=False)
    assert not res.converged and res.iterations == 1


def test_bad_options():
    with pytest.raises(ParameterError, match="mixing"):
        solve_self_consistent(_well(), mixing="simple")


# ---------------------------------------------------------------------------
# depolarisation shift
# ---------------------------------------------------------------------------
def _box_state(n, L, z):
    psi = math.sqrt(2 / L) * np.sin(n * math.pi * z / L)
    e = HB2_2M0 / 0.067 * (n * math.pi / L) ** 2
    return State(band="conduction", label=f"e{n}", index=n, energy_eV=e, carrier_energy_eV=e,
                 z_nm=z, psi=psi)


def test_depolarisation_shift_infinite_well():
    # Infinite well of width L: int_0^z psi1 psi2 = (1/pi)[sin(pi z/L) - sin(3 pi z/L)/3],
    # so S = int_0^L [..]^2 dz = 5 L/(9 pi^2) (closed form, derived here).  Shift:
    # E~ = E21 sqrt(1 + alpha), alpha = 2 e^2 n_s S/(eps eps0 E21): T. Ando, A. B. Fowler and
    # F. Stern, Rev. Mod. Phys. 54, 437 (1982), sec. V; M. Helm, Semiconductors and
    # Semimetals 62 (2000), ch. 1.
    L = 10.0
    z = np.linspace(0.0, L, 20001)
    s1, s2 = _box_state(1, L, z), _box_state(2, L, z)
    assert coulomb_overlap_nm(s1, s2) == pytest.approx(5 * L / (9 * math.pi ** 2), rel=1e-7)
    e21 = s2.energy_eV - s1.energy_eV
    ns, eps = 5e11, 12.9
    alpha = 2 * const.e * (ns * 1e4) * (5 * L / (9 * math.pi ** 2) * 1e-9) / (
        const.epsilon_0 * eps * e21)
    ref = e21 * (math.sqrt(1 + alpha) - 1)
    got = depolarisation_shift([s1, s2], "conduction", "e1-e2", ns, eps)
    assert got == pytest.approx(ref, rel=1e-6)
    assert depolarisation_shift([s1, s2], "conduction", ("e1", "e2"), 0.0, eps) == 0.0


def test_symmetric_double_well_shares_the_charge():
    # Mirror symmetry: a stack symmetric about its centre has a symmetric self-consistent
    # solution, so the two identical wells hold equal charge (common practice, no source).
    # The wells are coupled through 14 nm of barrier: their doublets are split by far less
    # than the solver's default tolerance, the case where the loop must tighten it.
    st = stack_from_text("""
temperature: 77 K
materials:
  bar: {conduction_edge: 0.25 eV, electron_mass: 0.09, dielectric_constant: 12.0}
  core: {conduction_edge: 0.0 eV, electron_mass: 0.067, dielectric_constant: 12.9}
layers:
  - {material: bar, thickness: 20 nm, doping: {sheet: 2e11 cm^-2, at: 10 nm}}
  - {material: core, thickness: 8 nm}
  - {material: bar, thickness: 14 nm}
  - {material: core, thickness: 8 nm}
  - {material: bar, thickness: 20 nm, doping: {sheet: 2e11 cm^-2, at: 10 nm}}
""")
    res = solve_self_consistent(st)
    z, n = res.z_nm, res.electron_density_cm3
    h = np.diff(z)
    w = np.concatenate([[h[0] / 2], (h[:-1] + h[1:]) / 2, [h[-1] / 2]])
    left = np.dot(w * (z < 35.0), n) * 1e-7
    right = np.dot(w * (z > 35.0), n) * 1e-7
    assert left == pytest.approx(2e11, rel=1e-3) and right == pytest.approx(2e11, rel=1e-3)
    assert np.max(np.abs(res.potential_eV - res.potential_eV[::-1])) < 1e-5


DOPED_WELL_NONPARABOLIC = """
temperature: 77 K
substrate: GaAs
layers:
  - {material: Al0.30Ga0.70As, thickness: 20 nm}
  - {material: GaAs, thickness: 15 nm, doping: {donors: 5e17 cm^-3}}
  - {material: Al0.30Ga0.70As, thickness: 20 nm}
"""


@pytest.mark.slow      # ~4 s: the reference route solves exactly at 1e-11 eV each iteration
def test_exact_finish_matches_exact_every_iteration(monkeypatch):
    # A doped well with nonparabolicity (built-in GaAs/AlGaAs): the default route
    # (finite differences, then exact iterations at the default state tolerance) against
    # the exact solver on every iteration at a 1e-11 eV state tolerance.  Both are fixed
    # points of the same map, so their subband energies agree to the loop tolerance
    # (1e-3 meV on U shifts a level by at most that much) plus the two state tolerances
    # (common practice, no source).  Energy-dependent masses make the envelopes of
    # distinct states overlap by ~1e-2: that must not make the loop tighten the solver.
    st = stack_from_text(DOPED_WELL_NONPARABOLIC)
    tolerances = []
    real_solve = sc.solve

    def watched(band, method, **opts):
        if method == "exact":
            tolerances.append(opts["tolerance_eV"])
        return real_solve(band, method, **opts)

    monkeypatch.setattr(sc, "solve", watched)
    res = solve_self_consistent(st)
    assert res.converged and res.method == "exact"
    assert tolerances and min(tolerances) == 1e-7          # never tightened
    monkeypatch.setattr(sc, "solve", real_solve)
    ref = solve_self_consistent(st, inner_solver="exact", state_tolerance_eV=1e-11)
    assert set(res.subband_energies_eV) == set(ref.subband_energies_eV)
    assert len(res.subband_energies_eV) >= 3
    for label, e in ref.subband_energies_eV.items():
        assert abs(res.subband_energies_eV[label] - e) <= 1e-6 + 1e-7 + 1e-11
    assert abs(res.fermi_level_eV - ref.fermi_level_eV) <= 1e-6 + 1e-7 + 1e-11
    # charge neutrality and Gauss's law on the result (see _gauss_potential)
    assert res.charge_residual < 1e-6
    assert res.total_electrons_cm2 == pytest.approx(5e17 * 15e-7, rel=1e-6)
    assert np.max(np.abs(_gauss_potential(res, st) - res.potential_eV)) <= 2e-6
