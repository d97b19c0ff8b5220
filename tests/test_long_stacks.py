"""Long stacks (many periods): the exact solver against outside references.

* Finite superlattices lie inside the minibands of the infinite one, N states
  per miniband (Bloch's theorem; Kronig-Penney closed form written here).
* Energies equal those of the pre-existing solve path (all slices, no period
  shortcut, angle-based node counting, root by brentq), rebuilt here from the
  private primitives that path used, to 0.1 ueV.
* Node-count completeness (Sturm-Liouville oscillation theorem) on every long
  stack tried.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from scipy import constants as const
from scipy.optimize import brentq

from qwell.bands import RepeatInfo, band_from_layers
from qwell.solvers import _transfer as tr
from qwell.solvers.exact import _cladding, _count, _slices, count_states_below, solve_exact

# hbar^2/(2 m0) in eV nm^2, CODATA via scipy.constants.
C = const.hbar ** 2 / (2 * const.m_e) / const.e * 1e18
UEV = 1e-6


def _superlattice(Lw, Lb, V0, mw, mb, n_wells, clad_nm=30.0, field_kV_per_cm=0.0):
    """n_wells wells of Lw nm separated by Lb nm barriers, between clad_nm claddings.

    The n_wells - 1 full (well, barrier) periods are declared as a repeat block,
    as the stack loader does for a ``repeat:`` entry.
    """
    layers = ([(clad_nm, V0, mb)] + [(Lw, 0.0, mw), (Lb, V0, mb)] * (n_wells - 1)
              + [(Lw, 0.0, mw), (clad_nm, V0, mb)])
    band = band_from_layers(layers, field_kV_per_cm=field_kV_per_cm)
    rep = RepeatInfo(z_start_nm=clad_nm, period_nm=Lw + Lb, count=n_wells - 1, first_layer=1,
                     layers_per_period=2)
    return dataclasses.replace(band, repeats=(rep,))


def _kp_minibands(Lw, Lb, V0, mw, mb):
    """Miniband edges below the barrier of the infinite Kronig-Penney superlattice.

    Bloch condition with BenDaniel-Duke matching (continuity of psi and psi'/m):
    cos(q d) = cos(k Lw) cosh(kappa Lb) + (rho - 1/rho)/2 sin(k Lw) sinh(kappa Lb),
    rho = kappa mw / (k mb), k = sqrt(mw E / C), kappa = sqrt(mb (V0 - E) / C).
    Sources: R. de L. Kronig and W. G. Penney, Proc. R. Soc. A 130, 499 (1931);
    G. Bastard, Phys. Rev. B 24, 5693 (1981) (mass ratio in the matching).
    Allowed bands: |cos(q d)| <= 1.  Returns [(bottom, top), ...].
    """
    def f(E):
        k = np.sqrt(mw * E / C)
        kap = np.sqrt(mb * (V0 - E) / C)
        rho = kap * mw / (k * mb)
        return np.cos(k * Lw) * np.cosh(kap * Lb) + 0.5 * (rho - 1 / rho) * np.sin(k * Lw) * \
            np.sinh(kap * Lb)

    E = np.linspace(1e-7, V0 - 1e-7, 400001)
    y = f(E)
    edges = []
    for s in (1.0, -1.0):
        g = y - s
        for i in np.nonzero(np.sign(g[1:]) != np.sign(g[:-1]))[0]:
            edges.append(brentq(lambda e, s=s: f(e) - s, E[i], E[i + 1], xtol=1e-15))
    edges = np.sort(edges)
    # the lowest energies lie in a gap (f > 1 near E = 0), so edges pair up
    assert edges.size % 2 == 0
    return list(zip(edges[0::2], edges[1::2]))


@pytest.mark.parametrize("Lw, Lb, V0, n_wells", [(4.0, 2.0, 0.25, 100), (8.0, 3.0, 0.30, 60)])
def test_finite_superlattice_inside_kronig_penney_minibands(Lw, Lb, V0, n_wells):
    mw, mb = 0.067, 0.0919
    band = _superlattice(Lw, Lb, V0, mw, mb, n_wells)
    lev = solve_exact(band, wavefunctions=False, quasi_bound=False)
    bands = _kp_minibands(Lw, Lb, V0, mw, mb)
    e = lev.energies_eV
    inside = np.zeros(e.size, bool)
    for bottom, top in bands:
        sel = (e >= bottom) & (e <= top)
        inside |= sel
        if top < V0 - 0.01:
            # an isolated miniband well below the barrier: one state per well
            # (tight-binding / Bloch counting, common practice, no source)
            assert sel.sum() == n_wells
    # every bound state lies inside an allowed band of the infinite superlattice
    assert inside.all(), e[~inside]
    # the solver's own minibands (Bloch on one period) agree with the closed form
    got = [(m.bottom_eV, m.top_eV) for m in lev.minibands if m.top_eV < V0]
    for (b0, t0), (b1, t1) in zip(got, bands):
        assert b0 == pytest.approx(b1, abs=1 * UEV) and t0 == pytest.approx(t1, abs=1 * UEV)


def test_thousand_period_superlattice_inside_minibands():
    Lw, Lb, V0, mw, mb, n = 4.0, 2.0, 0.25, 0.067, 0.0919, 1000
    band = _superlattice(Lw, Lb, V0, mw, mb, n)
    lev = solve_exact(band, wavefunctions=False, quasi_bound=False)
    (bottom, top), = _kp_minibands(Lw, Lb, V0, mw, mb)
    e = lev.energies_eV
    # Kronig & Penney (1931) miniband; one state per well (common practice, no source)
    assert len(lev) == n
    assert np.all((e >= bottom) & (e <= top))
    _assert_count_complete(band, lev)


# ------------------------------------------------------------ the pre-existing path
def _old_count(sl, E, clad_l, clad_r):
    """N(E) as before: boundary states stored for all slices, Pruefer angles per slice."""
    E = np.atleast_1d(np.asarray(E, float))
    kl, ml = tr.cladding_kappa(*clad_l, E)
    kr, mr = tr.cladding_kappa(*clad_r, E)
    P, U, _, _ = tr.propagate_states(sl, E, 1.0, kl / ml)
    n = tr.count_nodes(sl, E, P, U)
    phi = np.mod(np.arctan2(P[-1], U[-1]), np.pi)
    return n + (phi > np.arctan2(1.0, -kr / mr))


def _old_mismatch(sl, E, clad_l, clad_r):
    """Wronskian mismatch at the deepest slice as before: all slices, pairwise reduction."""
    E = np.atleast_1d(np.asarray(E, float))
    kl, ml = tr.cladding_kappa(*clad_l, E)
    kr, mr = tr.cladding_kappa(*clad_r, E)
    jm = int(np.argmin(sl.v_eV)) or min(1, sl.n)
    coef = tr.coefficients(sl, E)
    pl, ul = tr.carry(sl, E, 1.0, kl / ml, 0, jm, coef=coef)
    pr, ur = tr.carry(sl, E, 1.0, -kr / mr, jm, sl.n, backward=True, coef=coef)
    return (pl * ur - ul * pr) / (np.hypot(pl, ul) * np.hypot(pr, ur))


def _old_levels(band):
    """Bound states of a flat band by the old path: bisection on N(E), brentq on the mismatch."""
    sl = tr.build_slices(band, 0)
    assert sl.exact and not sl.periods
    cl, cr = _cladding(band, "left"), _cladding(band, "right")
    lo_e, hi_e = float(np.min(sl.v_eV)) + 1e-9, band.confinement_limit_eV
    n_lo, n_hi = _old_count(sl, [lo_e, hi_e], cl, cr)
    out = []
    for k in range(n_lo, n_hi):
        a, b = lo_e, hi_e
        while True:  # bisection until [a, b] holds exactly eigenvalue k
            na, nb = _old_count(sl, [a, b], cl, cr)
            if na == k and nb == k + 1:
                break
            m = 0.5 * (a + b)
            if _old_count(sl, [m], cl, cr)[0] <= k:
                a = m
            else:
                b = m
        out.append(brentq(lambda x: _old_mismatch(sl, x, cl, cr)[0], a, b, xtol=1e-14))
    return np.array(out)


@pytest.mark.parametrize("case", ["superlattice", "barrier_first", "detector"])
def test_long_stack_energies_equal_the_previous_path(case):
    if case == "superlattice":
        band = _superlattice(4.0, 2.0, 0.25, 0.067, 0.0919, 40)
    elif case == "barrier_first":
        # periods that start with a barrier: the matching point (deepest slice) falls
        # inside the first period, so partial periods are carried slice by slice
        V0, mb, mw, n = 0.25, 0.0919, 0.067, 30
        band = band_from_layers([(30, V0, mb)] + [(2.5, V0, mb), (4.0, 0.0, mw)] * n
                                + [(30, V0, mb)])
        band = dataclasses.replace(band, repeats=(RepeatInfo(
            z_start_nm=30.0, period_nm=6.5, count=n, first_layer=1, layers_per_period=2),))
        assert _slices(band, 0).periods == ((1, 2, n),)
    else:
        # a 12-period detector-like stack: 5 nm wells, 8 nm barriers (separable states)
        band = _superlattice(5.0, 8.0, 0.21, 0.067, 0.088, 12, clad_nm=40.0)
    lev = solve_exact(band, wavefunctions=False, quasi_bound=False)
    ref = _old_levels(band)
    assert len(lev) == ref.size
    # same problem, same answer to 0.1 ueV (the new path only reorganises the work)
    np.testing.assert_allclose(lev.energies_eV, ref, atol=0.1 * UEV, rtol=0)


# ------------------------------------------------------------ completeness
def _assert_count_complete(band, lev):
    """Oscillation theorem: N(E) between consecutive states counts the states below.

    Sturm-Liouville theory (e.g. J. D. Pryce, Numerical Solution of Sturm-Liouville
    Problems, Oxford 1993): the k-th eigenvalue's eigenfunction has k - 1 zeros,
    so N(E) = number of eigenvalues below E.  Checked at the bottom, between
    every pair of resolved neighbours and at the confinement limit.
    """
    e = np.array([s.carrier_energy_eV for s in lev.states if s.bound])
    lim = band.confinement_limit_eV
    gaps = np.diff(e)
    mids = 0.5 * (e[1:] + e[:-1])[gaps > 1e-10]
    below = np.arange(1, e.size)[gaps > 1e-10]
    probe = np.concatenate([[e[0] - 1e-3], mids, [lim]])
    want = np.concatenate([[0], below, [e.size]])
    np.testing.assert_array_equal(count_states_below(band, probe), want)


def _stacks():
    out = {
        "superlattice_200": _superlattice(4.0, 2.0, 0.25, 0.067, 0.0919, 200),
        "detector_50": _superlattice(5.0, 10.0, 0.21, 0.067, 0.088, 50, clad_nm=40.0),
        "tilted_20": _superlattice(4.0, 3.0, 0.30, 0.067, 0.0919, 20, field_kV_per_cm=5.0),
    }
    return out


@pytest.mark.parametrize("name", list(_stacks()))
def test_node_count_complete_on_long_stacks(name):
    band = _stacks()[name]
    lev = solve_exact(band, wavefunctions=False, quasi_bound=False)
    assert len(lev) > 10
    _assert_count_complete(band, lev)


def test_period_count_equals_slice_by_slice_count():
    # counting through N periods with one period's coefficients equals counting
    # through the unrolled slices (the count composes exactly across periods)
    band = _superlattice(4.0, 2.0, 0.25, 0.067, 0.0919, 300)
    per = _slices(band, 0)
    plain = tr.build_slices(band, 0)
    assert per.periods and not plain.periods
    cl, cr = _cladding(band, "left"), _cladding(band, "right")
    E = np.random.default_rng(7).uniform(0.0, 0.25, 3000)
    np.testing.assert_array_equal(_count(per, E, cl, cr), _old_count(plain, E, cl, cr))
    np.testing.assert_array_equal(_count(plain, E, cl, cr), _old_count(plain, E, cl, cr))


def test_matrix_power_by_squaring():
    # repeated squaring equals the plain product up to a positive factor
    rng = np.random.default_rng(3)
    a, b, c = rng.uniform(0.5, 1.5, size=(3, 5))
    d = (1 + b * c) / a  # unimodular, like every transfer matrix here
    for n in (1, 2, 7, 20):
        got = np.stack(tr.matrix_power(a, b, c, d, n), axis=-1).reshape(5, 2, 2)
        ref = np.linalg.matrix_power(np.stack([a, b, c, d], axis=-1).reshape(5, 2, 2), n)
        ratio = ref[:, 0, 0] / got[:, 0, 0]
        assert np.all(ratio > 0)
        np.testing.assert_allclose(got * ratio[:, None, None], ref, rtol=1e-12)


# ------------------------------------------------------------ compact states
def test_states_are_stored_compactly_and_sampled_on_use():
    band = _superlattice(4.0, 2.0, 0.25, 0.067, 0.0919, 60)
    lev = solve_exact(band, quasi_bound=False)
    s = lev.states[3]
    # nothing sampled yet: the state keeps its solution at the slice boundaries
    assert s.__dict__.get("psi") is None and s.envelope is not None
    assert s.envelope.psi_b.size == tr.build_slices(band, 0).n + 1
    z, psi = s.z_nm, s.psi
    assert z.shape == psi.shape and z.size <= 20000 + 2000
    # normalised (trapezoid rule + analytic tails beyond the grid, common practice)
    assert np.sum(0.5 * (psi[1:] ** 2 + psi[:-1] ** 2) * np.diff(z)) == \
        pytest.approx(1.0, abs=1e-4)
    assert sum(s.layer_probability) == pytest.approx(1.0, abs=1e-9)
    # oscillation theorem: the k-th state of a band has k - 1 zeros (Sturm-Liouville;
    # Pryce 1993); count sign changes where the envelope is not negligible
    for k in (0, 1, 5):
        p = lev.states[k].psi
        big = p[np.abs(p) > 1e-6 * np.abs(p).max()]
        assert np.sum(np.sign(big[1:]) != np.sign(big[:-1])) == k
    # all states share one grid
    assert all(t.z_nm is lev.states[0].z_nm for t in lev.states)


# ------------------------------------------------------------ progress line
class _Terminal:
    def __init__(self):
        self.text = ""

    def isatty(self):
        return True

    def write(self, s):
        self.text += s

    def flush(self):
        pass


def test_progress_line_only_on_a_terminal_and_for_long_solves(monkeypatch):
    import sys

    import qwell.solvers.exact as ex

    band = _superlattice(4.0, 2.0, 0.25, 0.067, 0.0919, 40)
    term = _Terminal()
    monkeypatch.setattr(sys, "stderr", term)
    solve_exact(band, wavefunctions=False)
    assert term.text == ""  # expected well under 2 s: nothing printed
    monkeypatch.setattr(ex, "PROGRESS_AFTER_S", 0.0)
    solve_exact(band, wavefunctions=False)
    assert term.text.startswith("qwell: solving conduction band: 40 bound states")
    assert "expected ~" in term.text and term.text.rstrip().endswith(" s")
    assert term.text.count("\n") == 1


# ------------------------------------------------------------ biased cascade
# a cascade-like stack of our own: 12 InGaAs/InAlAs layers per period under 45 kV/cm
# (nonparabolic conduction band, every layer tilted)
_CASCADE_PERIOD = [("In0.52Al0.48As", 4.0), ("In0.53Ga0.47As", 1.5), ("In0.52Al0.48As", 1.1),
                   ("In0.53Ga0.47As", 4.7), ("In0.52Al0.48As", 1.3), ("In0.53Ga0.47As", 4.0),
                   ("In0.52Al0.48As", 2.6), ("In0.53Ga0.47As", 3.2), ("In0.52Al0.48As", 1.8),
                   ("In0.53Ga0.47As", 2.8), ("In0.52Al0.48As", 2.0), ("In0.53Ga0.47As", 2.6)]


def _cascade(n_periods):
    from qwell.profile import band_profile
    from qwell.stack import stack_from_text

    text = ("name: cascade\ntemperature: 300 K\nsubstrate: InP\nfield: 45 kV/cm\nlayers:\n"
            "  - {material: In0.52Al0.48As, thickness: 20 nm}\n"
            f"  - repeat: {n_periods}\n    layers:\n"
            + "".join(f"      - {{material: {m}, thickness: {t} nm}}\n" for m, t in _CASCADE_PERIOD)
            + "  - {material: In0.52Al0.48As, thickness: 20 nm}\n")
    return band_profile(stack_from_text(text)).bands["conduction"]


def _converged_pole(band, pole, levels=(5, 6)):
    """A pole of the sliced problem followed to fine slices, Richardson-extrapolated.

    The secant (tolerance 1e-14 eV) is started at ``pole`` on every level up to the
    last of ``levels``; the extrapolate (4 p_h/2 - p_h)/3 of the last two removes the
    h^2 error of the midpoint slices (L. F. Richardson, Phil. Trans. R. Soc. A 210,
    307 (1911)).
    """
    from qwell.solvers.exact import _poles

    cl, cr = _cladding(band, "left"), _cladding(band, "right")
    p = np.array([pole])
    raw = {}
    for lv in range(0, levels[-1] + 1):
        p, _, done = _poles(tr.build_slices(band, lv), p, cl, cr, 1e-14)
        assert done[0]
        raw[lv] = p[0]
    return (4 * raw[levels[1]] - raw[levels[0]]) / 3


@pytest.mark.slow
def test_biased_cascade_energies_equal_converged_slices():
    # every state of a 3-period cascade under bias (bound and quasi-bound) equals the
    # continuum limit of the sliced problem, from much finer slices (h = 0.5 nm / 64)
    # than the solver stops at, to 0.1 ueV
    from qwell.solvers.exact import _eigenvalues

    band = _cascade(3)
    lev = solve_exact(band, wavefunctions=False)
    bound = np.array([s.carrier_energy_eV for s in lev.states if s.bound])
    quasi = [s for s in lev.states if not s.bound]
    assert bound.size >= 5 and len(quasi) >= 10
    cl, cr = _cladding(band, "left"), _cladding(band, "right")
    lim = band.confinement_limit_eV
    fine = []
    for lv in (5, 6):
        sl = _slices(band, lv)
        E, half, iso, _ = _eigenvalues(band, sl, cl, cr, float(np.min(sl.v_eV)) - 1e-6, lim,
                                       None, 1e-13)
        assert iso.all()
        fine.append(E)
    ref = (4 * fine[1] - fine[0]) / 3  # Richardson (1911), error even in h
    assert ref.size == bound.size
    np.testing.assert_allclose(bound, ref, atol=0.1 * UEV, rtol=0)
    hbar_eV_s = const.hbar / const.e  # CODATA via scipy.constants
    for s in quasi:
        gamma = hbar_eV_s / s.lifetime_s if np.isfinite(s.lifetime_s) else 0.0
        p = _converged_pole(band, s.carrier_energy_eV - 0.5j * gamma)
        assert s.converged
        assert abs(s.carrier_energy_eV - p.real) < 0.1 * UEV
        assert abs(gamma - (-2 * p.imag)) < 0.2 * UEV  # Gamma = -2 Im E


def test_biased_cascade_resonances_include_the_previous_search():
    # the resonance search of before (closed box and undamped secant on the finest
    # slices of the bound states, refinement from there) finds no localised state
    # that the present search (coarsest slices, damped secant) misses
    from qwell.solvers.exact import (_eigenvalues, _localised, _poles, _refine_poles)

    band = _cascade(3)
    lev = solve_exact(band, wavefunctions=False)
    got = np.array([s.carrier_energy_eV for s in lev.states if not s.bound])
    cl, cr = _cladding(band, "left"), _cladding(band, "right")
    lim = band.confinement_limit_eV
    sl = _slices(band, 2)  # the level the bound states stop at on this stack
    top = max(float(np.max(sl.v_eV)), cl[0], cr[0])
    wall = (top + 1.0, cl[1], np.inf), (top + 1.0, cr[1], np.inf)
    E_box = _eigenvalues(band, sl, wall[0], wall[1], lim, top, 200, 1e-9)[0]
    E_box = E_box[(E_box > lim) & (E_box < top)]
    p, _, done = _poles(sl, E_box, cl, cr, 1e-9)
    p = p[done & (-2 * p.imag > -1e-9) & (p.real > lim) & (p.real < top)]
    cand = []
    for q in p:
        if all(abs(q - c) > max(1e-6, 1e-3 * abs(q.imag)) for c in cand):
            cand.append(q)
    cand = np.array(cand)
    old = cand[_localised(cand, lim)]
    old, _ = _refine_poles(band, old, 2, cl, cr, 1e-9, 1e-7)
    assert old.size >= 10
    # identification of each previous resonance (their accuracy is checked above)
    for q in old.real:
        assert np.min(np.abs(got - q)) < 1 * UEV, q


def test_node_count_complete_on_biased_cascades():
    # oscillation theorem (Sturm-Liouville; Pryce 1993) on the bound states of the
    # 10- and 30-period (362-layer) cascades under 45 kV/cm
    for n in (10, 30):
        band = _cascade(n)
        lev = solve_exact(band, wavefunctions=False, quasi_bound=False)
        assert len(lev) >= 5
        _assert_count_complete(band, lev)
