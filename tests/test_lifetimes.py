"""LO-phonon scattering rates, spontaneous emission and the emitter figure of merit.

Envelopes of the closed-form checks (infinite and finite square wells) are written in this
file; the code under test only sees them as :class:`~qwell.solvers.results.State` objects.
"""

import math

import numpy as np
import pytest
from scipy import constants as sc
from scipy.integrate import dblquad
from scipy.optimize import brentq

from qwell.cli.json_out import lifetimes_json
from qwell.errors import MaterialError, ParameterError
from qwell.levels import solve_stack
from qwell.lifetimes import (
    LOPhonon,
    bose_occupation,
    emitter_figure,
    form_factors,
    lo_phonon_rates,
    solution_lifetimes,
    spontaneous_emission_rate,
)
from qwell.solvers.results import State
from qwell.stack import stack_from_text

# hbar^2/(2 m0) in eV nm^2 from CODATA (scipy.constants), independent of qwell.constants
H2M = sc.hbar ** 2 / (2 * sc.m_e) / sc.e * 1e18
M_GAAS = 0.067
# GaAs LO phonon as in the data file (checked against the Ioffe NSM archive, see
# tests/test_materials_phonons.py)
GAAS = LOPhonon(energy_eV=0.03625, eps_infinity=10.89, eps_static=12.9, material="GaAs")


def infinite_well(L_nm, levels=(1, 2, 3), points=4001, mass=M_GAAS):
    """States of an infinite well: psi_n = sqrt(2/L) sin(n pi z / L), E_n = hbar^2 (n pi/L)^2/2m."""
    z = np.linspace(0.0, L_nm, points)
    out = []
    for n in levels:
        e = H2M * (n * math.pi / L_nm) ** 2 / mass
        out.append(State(band="conduction", label=f"e{n}", index=n, energy_eV=e,
                         carrier_energy_eV=e, z_nm=z,
                         psi=math.sqrt(2.0 / L_nm) * np.sin(n * math.pi * z / L_nm)))
    return out


def with_energy(state, energy_eV):
    return State(band=state.band, label=state.label, index=state.index, energy_eV=energy_eV,
                 carrier_energy_eV=energy_eV, z_nm=state.z_nm, psi=state.psi)


# ------------------------------------------------------------------------ form factor
@pytest.mark.parametrize("pair", [(1, 2), (1, 3), (2, 3), (1, 1)])
@pytest.mark.parametrize("q", [0.03, 0.4, 2.5])
def test_form_factor_equals_direct_2d_quadrature(pair, q):
    # F(q) = int int rho(z) rho(z') exp(-q|z - z'|) dz dz' (Ferreira & Bastard, Phys. Rev. B 40,
    # 1074 (1989)) for the infinite well, by scipy's adaptive 2-D quadrature on the closed-form
    # envelopes; the kernel's kink is avoided by integrating z' < z twice.
    L = 10.0
    i, f = pair

    def rho(z):
        return (2.0 / L) * math.sin(i * math.pi * z / L) * math.sin(f * math.pi * z / L)

    ref, _ = dblquad(lambda zp, z: rho(z) * rho(zp) * math.exp(-q * (z - zp)),
                     0.0, L, 0.0, lambda z: z, epsabs=0.0, epsrel=1e-10)
    ref *= 2.0
    z = np.linspace(0.0, L, 8001)
    dens = (2.0 / L) * np.sin(i * math.pi * z / L) * np.sin(f * math.pi * z / L)
    assert form_factors(z, dens, q) == pytest.approx(ref, rel=1e-6)


def test_form_factor_rows_and_blocks():
    # Large q * length forces several cumulative-sum blocks; rows are independent.
    L = 200.0
    z = np.linspace(0.0, L, 20001)
    d1 = (2 / L) * np.sin(np.pi * z / L) * np.sin(2 * np.pi * z / L)
    d2 = (2 / L) * np.sin(np.pi * z / L) ** 2
    both = form_factors(z, np.vstack([d1, d2]), np.array([[4.0, 0.1], [4.0, 0.1]]))
    assert both.shape == (2, 2)
    assert both[0, 0] == pytest.approx(form_factors(z, d1, 4.0), rel=1e-12)
    assert both[1, 1] == pytest.approx(form_factors(z, d2, 0.1), rel=1e-12)
    assert np.all(np.isfinite(both))
    # q -> 0: F -> (int rho)^2, = 1 for a normalised density (closed form)
    assert form_factors(z, d2, 0.0) == pytest.approx(1.0, rel=1e-6)


def test_form_factor_blocks_agree_with_one_block(monkeypatch):
    # Splitting the cumulative sum into blocks (overflow guard) must not change the result
    # (same quadrature; self-consistency of the algorithm).
    import qwell.lifetimes as lt

    L = 30.0
    z = np.linspace(0.0, L, 3001)
    d = np.vstack([(2 / L) * np.sin(np.pi * z / L) * np.sin(k * np.pi * z / L) for k in (2, 3)])
    q = np.array([[0.4, 1.3], [0.7, 2.0]])
    one = form_factors(z, d, q)
    monkeypatch.setattr(lt, "_KMAX_EXP", 5.0)           # q * block <= 5: many blocks
    np.testing.assert_allclose(form_factors(z, d, q), one, rtol=1e-12)


# ------------------------------------------------------------------------ Froehlich rates
def test_emission_threshold_at_zero_temperature():
    # Energy conservation: at T = 0 the emission rate is exactly zero for E_21 < hbar w_LO and
    # switches on with a finite step where E_21 crosses hbar w_LO (2-D density of states)
    # (Ferreira & Bastard, Phys. Rev. B 40, 1074 (1989)).
    e1, e2 = infinite_well(10.0, levels=(1, 2))
    hw = GAAS.energy_eV
    below = lo_phonon_rates([with_energy(e1, 0.0), with_energy(e2, hw - 1e-4)],
                            phonon=GAAS, temperature_K=0.0, mass_m0=M_GAAS)
    assert below.rate_per_s[1, 0] == 0.0
    assert np.all(below.absorption_per_s == 0.0)
    assert math.isinf(below.lifetime_ps[1])
    above = lo_phonon_rates([with_energy(e1, 0.0), with_energy(e2, hw + 1e-9)],
                            phonon=GAAS, temperature_K=0.0, mass_m0=M_GAAS)
    # threshold limit: F(q)/q -> -int int rho rho' |z - z'| as q -> 0, so
    # W -> e^2 w C m (-I) / (4 eps0 hbar^2), I by direct quadrature (SI units, scipy.constants)
    L = 10.0

    def rho(z):
        return (2.0 / L) * math.sin(math.pi * z / L) * math.sin(2 * math.pi * z / L)

    I, _ = dblquad(lambda zp, z: rho(z) * rho(zp) * (z - zp), 0.0, L, 0.0, lambda z: z,
                   epsabs=0.0, epsrel=1e-10)
    I *= 2.0 * 1e-9                                       # nm -> m (one length left)
    omega = hw * sc.e / sc.hbar
    w_step = sc.e ** 2 * omega * GAAS.coupling * M_GAAS * sc.m_e * (-I) / (
        4 * sc.epsilon_0 * sc.hbar ** 2)
    assert above.rate_per_s[1, 0] == pytest.approx(w_step, rel=2e-3)
    assert above.rate_per_s[1, 0] > 1e11                  # a step, not a gradual rise


def test_infinite_gaas_well_lifetime_and_coupling_scaling():
    # 12 nm infinite GaAs well: E_21 = 117 meV >> hbar w_LO = 36 meV.  The commonly quoted
    # intersubband LO-phonon time of such wells is a few tenths of a ps to ~1 ps (common
    # practice, no source).
    states = infinite_well(12.0, levels=(1, 2))
    t = lo_phonon_rates(states, phonon=GAAS, temperature_K=0.0, mass_m0=M_GAAS)
    assert states[1].energy_eV - states[0].energy_eV > 3 * GAAS.energy_eV
    assert 0.2 < t.time_ps("e2", "e1") < 1.0
    # The rate is proportional to the Froehlich factor 1/eps_inf - 1/eps_s exactly
    # (Froehlich, Adv. Phys. 3, 325 (1954)).
    other = LOPhonon(energy_eV=GAAS.energy_eV, eps_infinity=9.0, eps_static=14.0)
    t2 = lo_phonon_rates(states, phonon=other, temperature_K=0.0, mass_m0=M_GAAS)
    ratio = (1 / 9.0 - 1 / 14.0) / (1 / 10.89 - 1 / 12.9)
    assert t2.rate_per_s[1, 0] / t.rate_per_s[1, 0] == pytest.approx(ratio, rel=1e-12)


def test_bose_factors_of_emission_and_absorption():
    # Emission goes with N + 1, absorption with N, N = 1/(exp(hbar w/kT) - 1) (Bose-Einstein;
    # Ferreira & Bastard 1989).  With E_21 > 2 hbar w the k = 0 final wavevectors differ, so
    # compare emission at two temperatures (same final state) instead.
    states = infinite_well(12.0, levels=(1, 2))
    cold = lo_phonon_rates(states, phonon=GAAS, temperature_K=0.0, mass_m0=M_GAAS)
    warm = lo_phonon_rates(states, phonon=GAAS, temperature_K=300.0, mass_m0=M_GAAS)
    n = 1.0 / math.expm1(GAAS.energy_eV / (sc.k / sc.e * 300.0))
    assert bose_occupation(GAAS.energy_eV, 300.0) == pytest.approx(n, rel=1e-12)
    assert warm.emission_per_s[1, 0] / cold.emission_per_s[1, 0] == pytest.approx(1 + n,
                                                                                 rel=1e-12)
    assert warm.absorption_per_s[1, 0] > 0 and cold.absorption_per_s[1, 0] == 0.0
    # from the bottom of e1 upward absorption needs hbar w > E_21: closed here
    assert warm.absorption_per_s[0, 1] == 0.0


def test_thermal_average_tends_to_subband_bottom_when_cold():
    # The Maxwell-Boltzmann average reduces to the k = 0 rate as kT -> 0 (definition of the
    # average; common practice, no source).
    states = infinite_well(12.0, levels=(1, 2, 3))
    k0 = lo_phonon_rates(states, phonon=GAAS, temperature_K=1.0, mass_m0=M_GAAS)
    avg = lo_phonon_rates(states, phonon=GAAS, temperature_K=1.0, mass_m0=M_GAAS, thermal=True)
    assert avg.thermal and not k0.thermal
    # kT = 0.09 meV: the average differs from k = 0 by O(kT / E_21) ~ 1e-3
    np.testing.assert_allclose(avg.emission_per_s, k0.emission_per_s, rtol=2e-3,
                               atol=1e-9 * k0.emission_per_s.max())
    warm = lo_phonon_rates(states, phonon=GAAS, temperature_K=300.0, mass_m0=M_GAAS,
                           thermal=True)
    assert warm.absorption_per_s[0, 1] > 0        # hot electrons of e1 reach e2


def test_thermal_average_against_direct_integration():
    # Definition of the Maxwell-Boltzmann average (common practice): <W> = int W(E) exp(-E/kT)
    # dE / kT with W(k_i) = e^2 w C n_ph m_f / (8 pi eps0 hbar^2) int_0^2pi F(q)/q dtheta
    # (Ferreira & Bastard, Phys. Rev. B 40, 1074 (1989)), integrated here by dense
    # Gauss-Legendre rules in energy (threshold .. threshold + 40 kT) and angle at the exact
    # q of every node; only F(q) comes from the code (checked above against dblquad).
    L, T = 12.0, 300.0
    states = infinite_well(L, levels=(1, 2), points=601)
    z = states[0].z_nm
    rho = states[0].psi * states[1].psi
    kT = sc.k * T / sc.e
    hw = GAAS.energy_eV
    e21 = states[1].energy_eV - states[0].energy_eV
    n = 1.0 / math.expm1(hw / kT)
    omega = hw * sc.e / sc.hbar
    pref = sc.e ** 2 * omega * GAAS.coupling * M_GAAS * sc.m_e / (
        8 * math.pi * sc.epsilon_0 * sc.hbar ** 2) * 1e-9        # F/q with q in 1/nm
    xe, we = np.polynomial.legendre.leggauss(160)
    xa, wa = np.polynomial.legendre.leggauss(120)

    def average(gain, nph):
        e0 = max(0.0, -gain)
        E = e0 + 20 * kT * (xe + 1)                           # [e0, e0 + 40 kT]
        th = 0.5 * math.pi * (xa + 1)                         # [0, pi], doubled below
        ki = np.sqrt(E * M_GAAS / H2M)[:, None]
        kf = np.sqrt((E + gain) * M_GAAS / H2M)[:, None]
        q = np.sqrt(np.maximum(ki ** 2 + kf ** 2 - 2 * ki * kf * np.cos(th)[None, :], 0.0))
        F = form_factors(z, rho, q.ravel()).reshape(q.shape)
        ang = (F / q) @ (0.5 * math.pi * wa) * 2.0
        w_e = pref * nph * ang
        return float(np.sum(w_e * np.exp(-E / kT) / kT * 20 * kT * we))

    t = lo_phonon_rates(states, phonon=GAAS, temperature_K=T, mass_m0=M_GAAS, thermal=True,
                        grid_step_nm=None)
    assert t.emission_per_s[1, 0] == pytest.approx(average(e21 - hw, n + 1), rel=2e-3)
    assert t.absorption_per_s[1, 0] == pytest.approx(average(e21 + hw, n), rel=2e-3)
    assert t.absorption_per_s[0, 1] == pytest.approx(average(-e21 + hw, n), rel=2e-3)


def _finite_well_states(V0=0.30, a=6.0, mass=M_GAAS):
    """Bound energies of a finite square well (equal masses), from the even/odd conditions
    k tan(ka/2) = kappa and -k cot(ka/2) = kappa (e.g. Bastard, Wave Mechanics Applied to
    Semiconductor Heterostructures, Les Editions de Physique 1988, ch. 1)."""
    u0 = math.sqrt(mass * V0 / H2M) * a / 2
    ue = brentq(lambda u: u * math.tan(u) - math.sqrt(u0 ** 2 - u ** 2), 1e-9, math.pi / 2 - 1e-9)
    uo = brentq(lambda u: -u / math.tan(u) - math.sqrt(u0 ** 2 - u ** 2),
                math.pi / 2 + 1e-9, min(math.pi - 1e-9, u0))
    return [(H2M * (2 * u / a) ** 2 / mass, u, parity) for u, parity in ((ue, 0), (uo, 1))]


def _finite_well_psi(z, centre, energy, u, parity, V0=0.30, a=6.0, mass=M_GAAS):
    k = 2 * u / a
    kap = math.sqrt(mass * (V0 - energy) / H2M)
    x = z - centre
    tail = np.exp(-kap * (np.abs(x) - a / 2))
    if parity == 0:
        f = np.where(np.abs(x) <= a / 2, np.cos(k * x), math.cos(k * a / 2) * tail)
    else:
        f = np.where(np.abs(x) <= a / 2, np.sin(k * x), np.sign(x) * math.sin(k * a / 2) * tail)
    return f / math.sqrt(np.trapezoid(f * f, z))


def test_cross_well_rate_follows_envelope_overlap():
    # Two identical 6 nm wells (V0 = 0.30 eV) separated by a barrier of thickness d: the second
    # state localised in well A scatters to the ground state localised in well B.  The rate
    # must fall off exponentially with d like the square of the envelope overlap
    # int |psi_A psi_B| dz, with the decay constant 2 kappa_2 of the upper state's tail
    # (closed-form finite-well envelopes above; tunnelling overlap, common practice).
    (e1, u1, p1), (e2, u2, p2) = _finite_well_states()
    kappa2 = math.sqrt(M_GAAS * (0.30 - e2) / H2M)
    rates, overlaps = {}, {}
    for d in (10.0, 14.0, 18.0):
        z = np.linspace(-40.0, 6.0 + d + 40.0, 20001)
        upper = _finite_well_psi(z, 0.0, e2, u2, p2)
        lower = _finite_well_psi(z, 6.0 + d, e1, u1, p1)
        st = [State("conduction", "e1", 1, e1, e1, z_nm=z, psi=lower),
              State("conduction", "e2", 2, e2, e2, z_nm=z, psi=upper)]
        t = lo_phonon_rates(st, phonon=GAAS, temperature_K=0.0, mass_m0=M_GAAS,
                            grid_step_nm=None)
        rates[d] = t.rate_per_s[1, 0]
        overlaps[d] = np.trapezoid(np.abs(upper * lower), z)
    assert rates[18.0] < 1e-2 * rates[10.0]
    # W / overlap^2 constant while W changes by a factor ~100
    assert rates[18.0] / overlaps[18.0] ** 2 == pytest.approx(
        rates[10.0] / overlaps[10.0] ** 2, rel=0.02)
    # exponential: log-slope between 14 and 18 nm equals -2 kappa_2
    slope = math.log(rates[18.0] / rates[14.0]) / 4.0
    assert slope == pytest.approx(-2 * kappa2, rel=1e-3)


# ------------------------------------------------------------------------ radiative rate
def einstein_a(energy_eV, dipole_nm, n):
    """A = n w^3 |e z|^2 / (3 pi eps0 hbar c^3): Einstein A coefficient of an electric dipole
    (R. Loudon, The Quantum Theory of Light, 3rd ed., Oxford 2000, ch. 2), times the index n of
    a non-absorbing medium without local-field correction (common practice)."""
    w = energy_eV * sc.e / sc.hbar
    d = sc.e * dipole_nm * 1e-9
    return n * w ** 3 * d ** 2 / (3 * math.pi * sc.epsilon_0 * sc.hbar * sc.c ** 3)


def test_radiative_rate_closed_form_infinite_well():
    # Infinite well e1-e2: z_12 = 16 L / (9 pi^2), f_12 = 768 / (81 pi^2) (closed forms,
    # e.g. Helm, Semiconductors and Semimetals 62 (2000)).
    L = 8.0
    e21 = 3 * H2M * (math.pi / L) ** 2 / M_GAAS
    z12 = 16 * L / (9 * math.pi ** 2)
    f12 = 768 / (81 * math.pi ** 2)
    a = spontaneous_emission_rate(e21, f12, M_GAAS, 3.3)
    assert a == pytest.approx(einstein_a(e21, z12, 3.3), rel=0.01)


FINITE_WELL = """
name: emitter test well
temperature: 10 K
nonparabolicity: false
layers:
  - {material: Al0.35Ga0.65As, thickness: 20 nm}
  - {material: GaAs, thickness: 8 nm, name: well}
  - {material: Al0.35Ga0.65As, thickness: 20 nm}
"""


def test_radiative_rate_of_a_solved_well_against_einstein_a():
    # Solved GaAs/AlGaAs well (parabolic band): the rate from the oscillator strength must equal
    # the Einstein A coefficient built from the dipole <1|z|2> of the same states, 1 %
    # (Loudon 2000, ch. 2; see einstein_a).
    sol = solve_stack(stack_from_text(FINITE_WELL), bands="conduction")
    lt = solution_lifetimes(sol, refractive_index=3.3)
    assert lt.radiative
    for r in lt.radiative:
        t = sol.transition(f"{r.lower}-{r.upper}")
        assert r.rate_per_s == pytest.approx(einstein_a(t.energy_eV, t.dipole_nm, 3.3), rel=0.01)
        # spontaneous emission is orders of magnitude slower than LO-phonon emission
        assert r.lifetime_ns * 1e3 > 1e3 * r.phonon_time_ps


# ------------------------------------------------------------------------ figure of merit
def test_emitter_figure_formulas_and_no_inversion_flag():
    states = infinite_well(12.0, levels=(1, 2, 3))
    t = lo_phonon_rates(states, phonon=GAAS, temperature_K=77.0, mass_m0=M_GAAS)
    z23 = 1.7
    fig = emitter_figure(t, "e3", "e2", dipole_nm=z23, linewidth_meV=15.0, period_nm=45.0,
                         refractive_index=3.3)
    tau_u = 1e12 / t.total_per_s[2]
    tau_l = 1e12 / t.total_per_s[1]
    tau_ul = 1e12 / t.rate_per_s[2, 1]
    assert fig.tau_upper_ps == pytest.approx(tau_u)
    assert fig.inversion_factor_ps == pytest.approx(tau_u * (1 - tau_l / tau_ul))
    assert fig.figure_of_merit_nm2_ps == pytest.approx(z23 ** 2 * fig.inversion_factor_ps)
    # g/J = 4 pi e z^2 tau_u (1 - tau_l/tau_ul) / (eps0 n lambda 2 gamma L_p)
    # (J. Faist et al., "Quantum cascade laser", Science 264, 553 (1994); from memory), SI
    lam = sc.h * sc.c / (fig.energy_eV * sc.e)
    g_per_j = (4 * math.pi * sc.e * (z23 * 1e-9) ** 2 * fig.inversion_factor_ps * 1e-12
               / (sc.epsilon_0 * 3.3 * lam * 15e-3 * sc.e * 45e-9))        # m/A
    assert fig.gain_per_current_cm_per_kA == pytest.approx(g_per_j * 1e5, rel=1e-9)
    assert fig.inversion_possible == (tau_l < tau_ul)
    # e2 -> e1: the ground state never empties (tau_l = inf): no inversion, flagged
    g21 = emitter_figure(t, "e2", "e1", dipole_nm=2.0, linewidth_meV=15.0, period_nm=45.0,
                         refractive_index=3.3)
    assert not g21.inversion_possible
    assert any("no population inversion" in n for n in g21.notes)
    with pytest.raises(ParameterError, match="must lie above"):
        emitter_figure(t, "e1", "e2", dipole_nm=2.0, linewidth_meV=15.0, period_nm=45.0,
                       refractive_index=3.3)


def test_solution_lifetimes_of_a_stack():
    sol = solve_stack(stack_from_text(FINITE_WELL), bands="conduction")
    lt = solution_lifetimes(sol, line="e2-e1")
    assert lt.rates.phonon.material == "GaAs" and lt.rates.phonon.layer == "well"
    assert lt.figure.upper == "e2" and lt.figure.lower == "e1"
    assert not lt.figure.inversion_possible
    same = solution_lifetimes(sol, line="e1->e2")
    assert same.figure.upper == "e2"
    js = lifetimes_json(lt)
    assert js["emitter"]["tau_upper_ps"] == pytest.approx(lt.figure.tau_upper_ps)
    # without a line: the inverting line of largest figure of merit, or none
    auto = solution_lifetimes(sol)
    inverting = [f for f in auto.figures if f.inversion_possible]
    if inverting:
        assert auto.figure.figure_of_merit_nm2_ps == max(f.figure_of_merit_nm2_ps
                                                         for f in inverting)
    else:
        assert auto.figure is None and any("can invert" in n for n in auto.notes)
    assert len(auto.figures) == len([t for t in sol.transitions if t.kind == "intersubband"])
    assert {"from", "to", "emission_per_s", "absorption_per_s", "time_ps"} <= set(
        js["rates"]["pairs"][0])


def test_figure_dipole_is_the_velocity_form():
    # Parabolic band: the velocity-form dipole sqrt(f hbar^2 / (2 m dE)) equals <l|z|u>
    # (Sirtori, Capasso, Faist, Scandolo, Phys. Rev. B 50, 8663 (1994)).
    sol = solve_stack(stack_from_text(FINITE_WELL), bands="conduction")
    fig = solution_lifetimes(sol, line="e1-e2").figure
    assert fig.dipole_nm == pytest.approx(sol.transition("e1-e2").dipole_nm, rel=0.01)
    # Nonparabolic band: the figure of merit must not move when only the origin of z moves
    # (a thicker outer cladding far from the states; translation invariance).
    text = FINITE_WELL.replace("nonparabolicity: false", "nonparabolicity: true")
    far = text.replace("- {material: Al0.35Ga0.65As, thickness: 20 nm}\n  - {material: GaAs",
                       "- {material: Al0.35Ga0.65As, thickness: 45 nm}\n  - {material: GaAs")
    assert far != text
    a = solution_lifetimes(solve_stack(stack_from_text(text), bands="conduction"), line="e1-e2")
    b = solution_lifetimes(solve_stack(stack_from_text(far), bands="conduction"), line="e1-e2")
    assert b.figure.dipole_nm == pytest.approx(a.figure.dipole_nm, rel=1e-3)
    assert b.figure.tau_upper_ps == pytest.approx(a.figure.tau_upper_ps, rel=1e-3)


# ------------------------------------------------------------------------ bad input
def test_bad_requests_name_what_exists():
    sol = solve_stack(stack_from_text(FINITE_WELL), bands="all")
    with pytest.raises(ParameterError, match=r"conduction band only.*conduction states: e1"):
        solution_lifetimes(sol, band="heavy_hole")
    with pytest.raises(ParameterError, match=r"no state 'e7'.*conduction states: e1, e2"):
        solution_lifetimes(sol, line="e7-e1")
    with pytest.raises(ParameterError, match="two state labels"):
        solution_lifetimes(sol, line="e2")


def test_user_material_without_phonon_data_names_missing_keys():
    text = """
materials:
  wall: {conduction_edge: 0.30 eV, electron_mass: 0.067}
  core: {conduction_edge: 0.0 eV, electron_mass: 0.067, dielectric_constant: 12.9}
layers:
  - {material: wall, thickness: 15 nm}
  - {material: core, thickness: 9 nm}
  - {material: wall, thickness: 15 nm}
"""
    sol = solve_stack(stack_from_text(text), bands="conduction")
    with pytest.raises(MaterialError, match=r"'core'.*missing lo_phonon_energy, "
                                            r"high_frequency_dielectric_constant"):
        solution_lifetimes(sol)
    with pytest.raises(ParameterError, match="eps_static"):
        LOPhonon(energy_eV=0.036, eps_infinity=13.0, eps_static=12.0)


# ------------------------------------------------------------------------ report
def test_report_shows_lifetimes_for_an_intersubband_line():
    from qwell.report import collect_report_data
    from qwell.report.pages import lifetime_blocks

    stack = stack_from_text(FINITE_WELL)
    data = collect_report_data(stack, transitions=["e1-e2"], sensitivity=False)
    assert data.lifetimes is not None and data.lifetimes.figure.line == "e2->e1"
    texts = [getattr(b, "text", "") for b in lifetime_blocks(data)]
    assert any("Emitter line e2->e1" in t for t in texts)
    assert any("Ferreira and G. Bastard" in t for t in texts)
    # only interband lines reviewed: no lifetimes section
    data = collect_report_data(stack, transitions=["e1-hh1"], sensitivity=False)
    assert data.lifetimes is None and lifetime_blocks(data) == []


def test_report_names_missing_phonon_keys_instead_of_failing():
    from qwell.report import collect_report_data

    text = """
materials:
  wall: {conduction_edge: 0.30 eV, electron_mass: 0.067}
  core: {conduction_edge: 0.0 eV, electron_mass: 0.067}
layers:
  - {material: wall, thickness: 15 nm}
  - {material: core, thickness: 9 nm}
  - {material: wall, thickness: 15 nm}
"""
    data = collect_report_data(stack_from_text(text), sensitivity=False)
    assert data.lifetimes is None
    assert "lo_phonon_energy" in data.lifetimes_note and "dielectric_constant" in data.lifetimes_note
