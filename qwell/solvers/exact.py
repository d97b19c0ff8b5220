"""Exact subband solver: transfer matrices, node counting, Richardson refinement.

The single-band effective-mass equation with BenDaniel–Duke matching,

    -hbar^2/2 d/dz (1/m(z, E)) dpsi/dz + V(z) psi = E psi,

is solved on a :class:`qwell.bands.Band` (carrier convention) with decaying
solutions in the semi-infinite claddings.

Method
------
* Slices (see :mod:`qwell.solvers._transfer`): flat pieces are exact single
  slices; linear and smooth pieces are cut into midpoint slices of step
  ``h = 0.5 nm / 2**level``.  Eigenvalues of the sliced problem converge as
  ``h**2`` with an even error expansion, so Richardson extrapolation between
  ``h`` and ``h/2`` is repeated (halving ``h``) until two successive
  extrapolates agree to the tolerance; that difference is reported as the
  state's ``tolerance_eV``.
* Completeness: the oscillation theorem (Prüfer angle) gives the counting
  function ``N(E)``, the number of eigenvalues below ``E``: the solution
  decaying into the left cladding has ``n(E)`` zeros in the stack, its final
  angle ``phi`` is compared with the angle ``beta`` of the decaying right
  cladding solution, and ``N = n + [phi > beta]``.  With a nonparabolic mass
  ``m(E)`` grows with ``E``, so the angle stays monotone and the count holds.
  Each eigenvalue is isolated by bisection on ``N`` (all energies of a pass in
  one numpy evaluation) and refined by a vectorised safeguarded false-position
  (Illinois) iteration on the continuous Wronskian mismatch.
* Stability: evanescent slices use scaled hyperbolic functions; states are
  renormalised slice by slice, so barriers of hundreds of nm neither overflow
  nor lose the count.
* Long stacks: energies come first and need no stored solution.  The count is
  one streaming pass per batch of energies (memory linear in the number of
  energies, not slices x energies); an exactly repeating block (same slices in
  every period) reuses one period's slice coefficients for every period, and
  the mismatch crosses it with one period's transfer matrix raised to the
  number of periods by repeated squaring (rescaled at every step).  Each state
  is then stored as its solution at the slice boundaries (``State.envelope``,
  two numbers per slice); ``psi``, ``z_nm`` and ``layer_probability`` are
  sampled on first use, on one grid shared by all states of the solve, with the
  step ``grid_step_nm`` widened so that it holds at most 20,000 points.
* Quasi-bound states (above the lower cladding): poles of the outgoing-wave
  mismatch in the complex energy plane, started from the real eigenvalues of
  the stack closed at its ends; ``E = E_r - i Gamma/2``, lifetime ``hbar/Gamma``.
  The search runs on the coarsest slices (a secant from every closed-box
  level, a damped secant again from the levels whose secant failed, repeated
  a pole or found a broad one); the poles that may be localised are then
  followed to finer slices and Richardson-extrapolated like the bound states.
  Only resonances narrow compared with the spacing of their neighbours are
  kept (localised states), judged on the refined poles.
* Minibands: Bloch's theorem on one period, ``cos(q d) = tr(T)/2`` with ``T``
  the period's transfer matrix in the ``(psi, psi'/m)`` basis.  Each gap holds
  exactly one Dirichlet eigenvalue of the period, which brackets every band
  edge uniquely.

Units: eV, nm, m0 inside; ``hbar^2/(2 m0)`` and ``hbar`` from scipy.constants.

References
----------
.. [1] D. J. BenDaniel and C. B. Duke, Phys. Rev. 152, 683 (1966).
.. [2] G. Bastard, Phys. Rev. B 24, 5693 (1981).
.. [3] F. Bloch, Z. Phys. 52, 555 (1929); R. de L. Kronig and W. G. Penney,
   Proc. R. Soc. A 130, 499 (1931).
.. [4] J. D. Pryce, "Numerical Solution of Sturm–Liouville Problems",
   Oxford (1993) (Prüfer angle, oscillation theorem).
.. [5] L. F. Richardson, Phil. Trans. R. Soc. A 210, 307 (1911).
"""

from __future__ import annotations

import sys
import time

import numpy as np

from ..bands import Band, RepeatInfo
from ..constants import HBAR2_2M0_EV_NM2, HBAR_EV_S
from . import _transfer as tr
from .results import Levels, Miniband, State

__all__ = ["solve_exact", "count_states_below", "minibands", "wavefunction"]

_MAX_LEVEL = 9          # finest slice step 0.5 nm / 512 ~ 1 pm
_DEFAULT_COUNT_LEVEL = 2
_TAIL_DECAY = 5.0       # cladding tail on the grid: 5 decay lengths of psi
_TAIL_MIN_NM, _TAIL_MAX_NM = 2.0, 60.0
#: wavefunction grids hold at most this many points over the listed layers (the
#: step grows beyond ``grid_step_nm`` on stacks longer than this times the step)
_MAX_GRID_POINTS = 20000
#: mismatch: above this many (slice, energy) pairs, carry in bounded blocks
_BLOCK = 2_000_000
#: boundary states of at most this many (boundary, energy) pairs at once
_STATE_BLOCK = 500_000
#: step halvings of the damped secant searching poles from closed-box levels
_BACKTRACK = 4


# ---------------------------------------------------------------- helpers
def _cladding(band: Band, side: str):
    v, m, g = band.left_cladding if side == "left" else band.right_cladding
    if g is None or not band.nonparabolic:
        g = np.inf
    return v, m, g


def _slices(band: Band, level: int, **window) -> tr.Slices:
    """Slices of ``band`` at ``level`` with its exactly repeating blocks recorded."""
    sl = tr.build_slices(band, level, **window)
    if not band.repeats or window:
        return sl
    return tr.find_periods(sl, [(r.z_start_nm, r.period_nm, r.count) for r in band.repeats])


def _count(sl: tr.Slices, E: np.ndarray, clad_l, clad_r) -> np.ndarray:
    """N(E) of the sliced problem with decaying claddings ``clad_l/clad_r`` (V, m, g).

    The zeros of the left-decaying solution are counted in one streaming pass
    (:func:`~qwell.solvers._transfer.count_zeros`, memory O(len(E)), periods
    reusing one period's coefficients); one more eigenvalue lies below E when
    the final angle passes that of the right-decaying cladding solution.
    """
    E = np.atleast_1d(np.asarray(E, dtype=float))
    kl, ml = tr.cladding_kappa(*clad_l, E)
    kr, mr = tr.cladding_kappa(*clad_r, E)
    n, p, u = tr.count_zeros(sl, E, 1.0, kl / ml)
    phi = np.mod(np.arctan2(p, u), np.pi)
    beta = np.arctan2(1.0, -kr / mr)
    return n + (phi > beta)


def _split_index(sl: tr.Slices) -> int:
    """Interface where left and right solutions are matched: start of the deepest slice."""
    j = int(np.argmin(sl.v_eV))
    return j if j > 0 else min(1, sl.n)


def _mismatch(sl: tr.Slices, E: np.ndarray, clad_l, clad_r) -> np.ndarray:
    """Continuous Wronskian of the left- and right-decaying solutions at an inner interface.

    Both solutions are carried from their cladding to the start of the deepest
    slice, so neither is propagated against its decay (smooth in E, no step).
    Across the exactly repeating blocks of ``sl`` one period's transfer matrix
    is raised to the number of periods by repeated squaring.
    """
    kl, ml = tr.cladding_kappa(*clad_l, E)
    kr, mr = tr.cladding_kappa(*clad_r, E)
    jm = _split_index(sl)
    if sl.periods or sl.n * E.size > _BLOCK:
        pl, ul = tr.carry_runs(sl, E, 1.0, kl / ml, 0, jm)
        pr, ur = tr.carry_runs(sl, E, 1.0, -kr / mr, jm, sl.n, backward=True)
    else:
        coef = tr.coefficients(sl, E)
        pl, ul = tr.carry(sl, E, 1.0, kl / ml, 0, jm, coef=coef)
        pr, ur = tr.carry(sl, E, 1.0, -kr / mr, jm, sl.n, backward=True, coef=coef)
    # weight making u comparable with psi in the matching slice
    j = min(jm, sl.n - 1)
    mj = tr.eff_mass(sl.m_m0[j], sl.v_eV[j], sl.g_eV[j], E)
    w = np.sqrt(HBAR2_2M0_EV_NM2 * mj / np.maximum(np.abs(E - sl.v_eV[j]), 1e-3))
    ul, ur = w * ul, w * ur
    return (pl * ur - ul * pr) / (np.hypot(pl, ul) * np.hypot(pr, ur))


def _vroot(f, lo, hi, flo, fhi, xtol, maxit=200):
    """Vectorised Illinois false position with bisection safeguard.

    Each entry has a sign change between ``lo`` and ``hi``; returns the final
    brackets (lo, hi), narrower than ``2*xtol`` where converged.
    """
    lo, hi, flo, fhi = (np.array(x, dtype=float) for x in (lo, hi, flo, fhi))
    side = np.zeros(lo.size, dtype=int)
    width_old = hi - lo
    for it in range(maxit):
        act = (hi - lo) > 2 * xtol
        if not act.any():
            break
        idx = np.nonzero(act)[0]
        a, b, fa, fb = lo[idx], hi[idx], flo[idx], fhi[idx]
        with np.errstate(invalid="ignore", divide="ignore"):
            x = (a * fb - b * fa) / (fb - fa)
        bis = ~np.isfinite(x) | (x <= a) | (x >= b)
        if it % 4 == 3:
            # safeguard: bisect where four Illinois steps did not halve the bracket
            bis |= (b - a) > 0.5 * width_old[idx]
            width_old[idx] = b - a
        x = np.where(bis, 0.5 * (a + b), x)
        # keep strictly inside, at least xtol/2 from the ends
        x = np.clip(x, a + 0.25 * xtol, b - 0.25 * xtol)
        fx = f(x, idx)
        left = np.sign(fx) == np.sign(fa)
        # move lo
        i_l = idx[left]
        lo[i_l], flo[i_l] = x[left], fx[left]
        fhi[i_l] = np.where(side[i_l] == 1, 0.5 * fhi[i_l], fhi[i_l])
        side[i_l] = 1
        i_r = idx[~left]
        hi[i_r], fhi[i_r] = x[~left], fx[~left]
        flo[i_r] = np.where(side[i_r] == -1, 0.5 * flo[i_r], flo[i_r])
        side[i_r] = -1
        exact0 = fx == 0
        lo[idx[exact0]] = hi[idx[exact0]] = x[exact0]
    return lo, hi


def _isolate(count, e_lo, e_hi, n_lo, n_hi, seeds=(), n_grid=24, min_width=1e-13, max_pass=80,
             pre=None):
    """Brackets [a_k, b_k] with N(a_k) = k, N(b_k) = k + 1 for k = n_lo .. n_hi - 1.

    ``count`` is the vectorised counting function.  All bisection midpoints of a
    pass are evaluated in one call; every evaluated point tightens every bracket.
    ``pre = (E, N)`` gives points already counted (then no initial grid is
    evaluated here).  Returns (a, b, isolated) arrays indexed by k - n_lo.
    """
    pts_e = [np.array([e_lo, e_hi])]
    pts_n = [np.array([n_lo, n_hi])]
    if pre is not None:
        pts_e.append(np.asarray(pre[0], float))
        pts_n.append(np.asarray(pre[1]))
    else:
        init = np.concatenate([np.linspace(e_lo, e_hi, n_grid + 2)[1:-1],
                               np.asarray(seeds, float)])
        init = init[(init > e_lo) & (init < e_hi)]
        if init.size:
            pts_e.append(init)
            pts_n.append(count(init))
    ks = np.arange(n_lo, n_hi)
    for _ in range(max_pass):
        E = np.concatenate(pts_e)
        N = np.concatenate(pts_n)
        order = np.argsort(E, kind="stable")
        E, N = E[order], N[order]
        N = np.maximum.accumulate(N)  # N is monotone; guard against ties
        # a_k: largest E with N <= k ; b_k: smallest E with N >= k+1
        ia = np.searchsorted(N, ks, side="right") - 1
        ib = np.searchsorted(N, ks + 1, side="left")
        a, b = E[ia], E[ib]
        iso = (N[ia] == ks) & (N[ib] == ks + 1)
        todo = ~iso & (b - a > min_width)
        if not todo.any():
            return a, b, iso
        mids = np.unique(0.5 * (a[todo] + b[todo]))
        pts_e.append(mids)
        pts_n.append(count(mids))
    return a, b, iso


def _eigenvalues(band: Band, sl: tr.Slices, clad_l, clad_r, e_lo, e_hi, kmax, xtol, seeds=(),
                 n_grid=24):
    """Eigenvalues of the sliced problem below e_hi: (E, bracket half-width, isolated)."""
    def count(e):
        return _count(sl, e, clad_l, clad_r)

    # one counting pass: both ends, a coarse grid and the seeds
    init = np.concatenate([np.linspace(e_lo, e_hi, n_grid + 2)[1:-1], np.asarray(seeds, float)])
    init = init[(init > e_lo) & (init < e_hi)]
    N0 = count(np.concatenate([[e_lo, e_hi], init]))
    n_lo, n_hi = int(N0[0]), int(N0[1])
    if kmax is not None:
        n_hi = min(n_hi, n_lo + kmax)
    if n_hi <= n_lo:
        return np.zeros(0), np.zeros(0), np.zeros(0, bool), n_lo
    a, b, iso = _isolate(count, e_lo, e_hi, n_lo, n_hi, pre=(init, N0[2:]))
    fab = _mismatch(sl, np.concatenate([a, b]), clad_l, clad_r)
    fa, fb = fab[:a.size], fab[a.size:]

    def f(x, idx):
        return _mismatch(sl, x, clad_l, clad_r)

    ok = np.sign(fa) != np.sign(fb)
    lo, hi = a.copy(), b.copy()
    if ok.any():
        l2, h2 = _vroot(f, a[ok], b[ok], fa[ok], fb[ok], xtol)
        lo[ok], hi[ok] = l2, h2
    E = 0.5 * (lo + hi)
    return E, 0.5 * (hi - lo), iso & ok, n_lo


# ---------------------------------------------------------------- public: N(E)
def count_states_below(band: Band, energies_eV: np.ndarray) -> np.ndarray:
    """Number of bound states with carrier energy below each of ``energies_eV``.

    Node-counting (Prüfer angle / oscillation theorem) function ``N(E)`` of the
    sliced problem, one vectorised pass over all energies.  Flat-only bands are
    exact; graded or tilted pieces use the slice step 0.5 nm / 4.  Energies
    above the confinement limit are counted at the limit (only bound states).

    Parameters
    ----------
    band : Band
    energies_eV : array_like
        Carrier-convention energies [eV].

    Returns
    -------
    numpy.ndarray of int, same shape as ``energies_eV``.
    """
    E = np.asarray(energies_eV, dtype=float)
    lim = band.confinement_limit_eV
    level = 0 if all(p.kind == "flat" for p in band.pieces) else _DEFAULT_COUNT_LEVEL
    sl = _slices(band, level)
    out = _count(sl, np.minimum(E.ravel(), lim), _cladding(band, "left"), _cladding(band, "right"))
    return out.reshape(E.shape)


# ---------------------------------------------------------------- wavefunctions

def _boundary_states(sl: tr.Slices, E: np.ndarray, clad_l, clad_r, at_peak=True):
    """The joined solution at every slice boundary, for energies E (nS,).

    The left-decaying solution (carried forward from the left cladding) is used
    up to a matching boundary and the right-decaying one (carried backward)
    beyond it; they are joined by least squares on the weighted state vector
    ``(psi, w u)`` there.  With ``at_peak`` (eigenvalues) the matching boundary
    is where the product of the two amplitudes is largest, i.e. at the state's
    maximum, where both are accurate (each solution is carried in the direction
    in which it grows up to there); otherwise (real parts of resonances, where
    the two solutions do not match and the join defines the function) it is
    the start of the deepest slice.

    Returns
    -------
    psi, u : arrays (ns+1, nS)
        Unnormalised boundary values (max |psi| of order 1 at the matching point);
        at the matching boundary those of the left solution.
    tails : tuple ``(c_l, k_l, c_r, k_r)``
        Left tail ``c_l exp(k_l (z - z_a))``, right tail ``c_r exp(-k_r (z - z_b))``.
    join : tuple ``(j_m, psi_r, u_r)``
        Matching boundary and the right solution's values there: slices from
        ``j_m`` on are evaluated from the right solution only (at a resonance's
        real part the two differ, and each slice keeps one of them).
    """
    e = np.atleast_1d(np.asarray(E, dtype=float))
    kl, ml = tr.cladding_kappa(*clad_l, e)
    kr, mr = tr.cladding_kappa(*clad_r, e)
    ns = sl.n
    psi = np.empty((ns + 1, e.size))
    u = np.empty((ns + 1, e.size))
    join = (np.empty(e.size, dtype=np.int64), np.empty(e.size), np.empty(e.size))
    step = max(1, _STATE_BLOCK // (ns + 1))
    for lo in range(0, e.size, step):
        sel = slice(lo, lo + step)
        ee = e[sel]
        PL, UL, LL, _ = tr.propagate_states(sl, ee, 1.0, kl[sel] / ml[sel])
        PR, UR, LR, _ = tr.propagate_states(sl, ee, 1.0, -kr[sel] / mr[sel], backward=True)
        with np.errstate(divide="ignore"):
            amp = (LL + np.log(np.hypot(PL, UL)) + LR + np.log(np.hypot(PR, UR)))
        jm = (np.argmax(amp, axis=0) if at_peak else
              np.full(ee.size, int(np.argmin(sl.v_eV)) or min(1, ns)))
        cols = np.arange(ee.size)
        jw = np.minimum(jm, ns - 1)
        m_here = tr.eff_mass(sl.m_m0[jw], sl.v_eV[jw], sl.g_eV[jw], ee)
        w = np.sqrt(HBAR2_2M0_EV_NM2 * m_here / np.maximum(np.abs(ee - sl.v_eV[jw]), 1e-4))
        vl0, vl1 = PL[jm, cols], w * UL[jm, cols]
        vr0, vr1 = PR[jm, cols], w * UR[jm, cols]
        lam = (vr0 * vl0 + vr1 * vl1) / (vl0 * vl0 + vl1 * vl1)  # vr ~ lam * vl
        left = np.arange(ns + 1)[:, None] <= jm[None, :]
        fl = np.exp(np.minimum(LL - LL[jm, cols], 700))
        fr = np.exp(np.minimum(LR - LR[jm, cols], 700)) / lam
        psi[:, sel] = np.where(left, PL * fl, PR * fr)
        u[:, sel] = np.where(left, UL * fl, UR * fr)
        join[0][sel], join[1][sel], join[2][sel] = jm, (PR * fr)[jm, cols], (UR * fr)[jm, cols]
    return psi, u, (psi[0].copy(), kl, psi[-1].copy(), kr), join


def _sample(sl: tr.Slices, E: float, psi_b, u_b, z: np.ndarray, join) -> np.ndarray:
    """One state's envelope on points ``z`` inside the sliced range."""
    bounds = np.concatenate([sl.z0_nm, [sl.z_end_nm]])
    j = np.clip(np.searchsorted(bounds, z, side="right") - 1, 0, sl.n - 1)
    x = np.clip(z - bounds[j], 0.0, sl.h_nm[j])
    return tr.sample_in_slices(sl, float(E), psi_b, u_b, j, x, join)


def _wave_on(sl: tr.Slices, E: float, z: np.ndarray, clad_l, clad_r) -> np.ndarray:
    """Unnormalised sliced solution at one energy E on any z (claddings included)."""
    z = np.asarray(z, dtype=float)
    za, zb = float(sl.z0_nm[0]), sl.z_end_nm
    inside = (z >= za) & (z <= zb)
    psi_b, u_b, (c_l, kl, c_r, kr), join = _boundary_states(sl, np.array([float(E)]), clad_l,
                                                            clad_r, at_peak=False)
    out = np.zeros_like(z)
    out[inside] = _sample(sl, E, psi_b[:, 0], u_b[:, 0], z[inside], tuple(x[0] for x in join))
    m = z < za
    out[m] = c_l[0] * np.exp(np.minimum(kl[0] * (z[m] - za), 700))
    m = z > zb
    out[m] = c_r[0] * np.exp(np.minimum(-kr[0] * (z[m] - zb), 700))
    return out


def wavefunction(band: Band, energy_eV: float, z_nm: np.ndarray) -> np.ndarray:
    """Envelope function at carrier energy ``energy_eV`` on ``z_nm`` (unnormalised).

    Uses the left-decaying solution left of the deepest slice and the
    right-decaying one right of it, joined there; at an eigenvalue this is the
    eigenfunction.  Graded/tilted pieces are sliced at 0.5 nm / 16.
    """
    level = 0 if all(p.kind == "flat" for p in band.pieces) else 4
    sl = tr.build_slices(band, level)
    return _wave_on(sl, float(energy_eV), np.asarray(z_nm, dtype=float),
                    _cladding(band, "left"), _cladding(band, "right"))


def _tail_length(k: float) -> float:
    t = _TAIL_DECAY / (2 * k) if k > 0 else _TAIL_MAX_NM
    return float(np.clip(t, _TAIL_MIN_NM, _TAIL_MAX_NM))


def _interior_grid(band: Band, step_nm: float) -> np.ndarray:
    """Grid over the listed layers: every interface, step <= step_nm, end point included."""
    segs = []
    for p in band.pieces:
        n = max(1, int(np.ceil(p.thickness_nm / step_nm)))
        segs.append(np.linspace(p.z_start_nm, p.z_end_nm, n + 1)[:-1])
    segs.append(np.array([band.z_end_nm]))
    return np.concatenate(segs)


def output_step_nm(band: Band, grid_step_nm: float) -> float:
    """Wavefunction grid step for ``band``: ``grid_step_nm``, coarser on long stacks.

    At most :data:`_MAX_GRID_POINTS` points over the listed layers, so that the
    sampled states of a long stack cost memory linear in its length.
    """
    return max(float(grid_step_nm), (band.z_end_nm - band.z_start_nm) / _MAX_GRID_POINTS)


class _GridSpec:
    """What sampling a state needs from its band (plain arrays, no callables).

    Shared by all states of one solve, so that they all come on one grid (one
    array in memory, no union of grids downstream): the interior grid (every
    interface), cladding tails long enough for the slowest-decaying state
    (``tail_l_nm``, ``tail_r_nm``), the interface positions and the layer of
    each piece.
    """

    def __init__(self, band: Band, step_nm: float, tail_l_nm: float, tail_r_nm: float):
        self.step_nm = step_nm
        self.zi = _interior_grid(band, step_nm)
        self.za, self.zb = za, zb = band.z_start_nm, band.z_end_nm
        self.zl = np.linspace(za - tail_l_nm, za,
                              max(2, int(np.ceil(tail_l_nm / step_nm)) + 1))[:-1]
        self.zr = np.linspace(zb, zb + tail_r_nm, max(2, int(np.ceil(tail_r_nm / step_nm)) + 1))[1:]
        self.z = np.concatenate([self.zl, self.zi, self.zr])
        self.edge_idx = np.searchsorted(self.zi, band.boundaries_nm)
        self.layer_of_piece = np.array([p.layer_index for p in band.pieces])
        self.n_layers = (len(band.layer_names) if band.layer_names else
                         1 + int(self.layer_of_piece.max()))


class _Envelope:
    """Compact storage of one state: its solution at every slice boundary.

    ``sample()`` gives the normalised ``(z_nm, psi, layer_probability)`` on the
    output grid (the interior grid of :class:`_GridSpec` plus cladding tails of
    ``_TAIL_DECAY`` decay lengths of the density), normalised with the trapezoid
    rule plus the analytic tails ``psi_end^2 / (2 kappa)`` beyond the grid
    (bound states; ``closed_tails=False`` for resonances, normalised over their
    own tail lengths).
    """

    def __init__(self, sl: tr.Slices, energy_eV: float, psi_b, u_b, join, kl: float, kr: float,
                 spec: _GridSpec, closed_tails: bool = True):
        self.sl, self.energy_eV = sl, float(energy_eV)
        self.psi_b, self.u_b, self.join = psi_b, u_b, join
        self.kl, self.kr = float(kl), float(kr)
        self.spec, self.closed_tails = spec, closed_tails

    def sample(self):
        sp, kl, kr = self.spec, self.kl, self.kr
        zi, zl, zr, za, zb = sp.zi, sp.zl, sp.zr, sp.za, sp.zb
        psi_i = _sample(self.sl, self.energy_eV, self.psi_b, self.u_b, zi, self.join)
        c_l, c_r = self.psi_b[0], self.psi_b[-1]
        seg = 0.5 * (psi_i[1:] ** 2 + psi_i[:-1] ** 2) * np.diff(zi)
        cum = np.concatenate([[0.0], np.cumsum(seg)])
        pl = c_l * np.exp(np.minimum(kl * (zl - za), 700))
        pr = c_r * np.exp(np.minimum(-kr * (zr - zb), 700))
        if not self.closed_tails:
            # a resonance is normalised over its own tails (5 decay lengths, or the
            # longest tail on an open side) and is zero beyond them on the shared grid
            pl = np.where(zl >= za - _tail_length(kl) - 1e-9, pl, 0.0)
            pr = np.where(zr <= zb + _tail_length(kr) + 1e-9, pr, 0.0)
        psi = np.concatenate([pl, psi_i, pr])
        dl = np.concatenate([pl, psi_i[:1]]) ** 2
        dr = np.concatenate([psi_i[-1:], pr]) ** 2
        int_l = float(np.sum(0.5 * (dl[1:] + dl[:-1]) * np.diff(np.concatenate([zl, zi[:1]]))))
        int_r = float(np.sum(0.5 * (dr[1:] + dr[:-1]) * np.diff(np.concatenate([zi[-1:], zr]))))
        tail_l = psi[0] ** 2 / (2 * kl) if (self.closed_tails and kl > 0) else 0.0
        tail_r = psi[-1] ** 2 / (2 * kr) if (self.closed_tails and kr > 0) else 0.0
        norm = int_l + float(cum[-1]) + int_r + tail_l + tail_r
        psi = psi / np.sqrt(norm)
        if psi[np.argmax(np.abs(psi))] < 0:
            psi = -psi
        piece_p = np.diff(cum[sp.edge_idx])
        piece_p[0] += int_l + tail_l
        piece_p[-1] += int_r + tail_r
        probs = np.zeros(sp.n_layers)
        ok = sp.layer_of_piece < probs.size
        np.add.at(probs, sp.layer_of_piece[ok], piece_p[ok] / norm)
        return sp.z, psi, tuple(float(x) for x in probs)


def _envelopes(band: Band, sl: tr.Slices, bound_E, quasi_E, step_nm: float, clad_l,
               clad_r) -> tuple[list, list]:
    """Compact :class:`_Envelope` of each bound and quasi-bound energy, on one shared grid."""
    E = np.concatenate([np.atleast_1d(np.asarray(bound_E, dtype=float)),
                        np.atleast_1d(np.asarray(quasi_E, dtype=float))])
    if E.size == 0:
        return [], []
    nb = np.atleast_1d(bound_E).size
    psi_b, u_b, (_, kl, _, kr), join = _boundary_states(sl, E[:nb], clad_l, clad_r)
    if nb < E.size:
        q = _boundary_states(sl, E[nb:], clad_l, clad_r, at_peak=False)
        psi_b, u_b = np.hstack([psi_b, q[0]]), np.hstack([u_b, q[1]])
        kl, kr = np.concatenate([kl, q[2][1]]), np.concatenate([kr, q[2][3]])
        join = tuple(np.concatenate([a, b]) for a, b in zip(join, q[3]))
    spec = _GridSpec(band, step_nm, max(_tail_length(k) for k in kl),
                     max(_tail_length(k) for k in kr))
    env = [_Envelope(sl, E[i], psi_b[:, i].copy(), u_b[:, i].copy(),
                     (int(join[0][i]), float(join[1][i]), float(join[2][i])), kl[i], kr[i], spec,
                     closed_tails=i < nb) for i in range(E.size)]
    return env[:nb], env[nb:]


# ---------------------------------------------------------------- resonances
def _open_mismatch(sl: tr.Slices, E, clad_l, clad_r):
    """Analytic outgoing-wave mismatch at complex energies E (array)."""
    E = np.asarray(E, dtype=complex)
    kl, ml = tr.cladding_kappa(*clad_l, E)
    kr, mr = tr.cladding_kappa(*clad_r, E)
    M, _ = tr.product(sl, E)
    p = M[:, 0, 0] + M[:, 0, 1] * (kl / ml)
    u = M[:, 1, 0] + M[:, 1, 1] * (kl / ml)
    return -(kr / mr) * p - u


def _poles(sl: tr.Slices, starts, clad_l, clad_r, xtol, maxit=80, backtrack=0):
    """Vectorised secant iteration for complex poles.

    ``starts`` are real energies (closed-box levels) or complex pole estimates
    (then the secant starts at the estimate and a point shifted by a small
    fraction of its width).  With ``backtrack > 0`` a step longer than
    ``100 xtol`` that does not decrease ``|f|`` is halved up to ``backtrack``
    times (a damped secant: it stays with the zero nearest to its start instead
    of jumping to a distant one).
    """
    s0 = np.asarray(starts, dtype=complex)
    if np.any(s0.imag != 0):
        d = 1e-3 * np.abs(s0.imag) + 1e-9
        x0, x1 = s0.copy(), s0 + d * (1 - 1j)
    else:
        x0, x1 = s0 - 1e-6j, s0 - 2e-6j
    f0 = _open_mismatch(sl, x0, clad_l, clad_r)
    f1 = _open_mismatch(sl, x1, clad_l, clad_r)
    done = np.zeros(x0.size, bool)
    step = np.full(x0.size, np.inf)
    for _ in range(maxit):
        act = ~done
        if not act.any():
            break
        with np.errstate(invalid="ignore", divide="ignore"):
            dx = -f1[act] * (x1[act] - x0[act]) / (f1[act] - f0[act])
        dx = np.where(np.isfinite(dx), dx, 0)
        # limit wild steps
        big = np.abs(dx) > 0.05
        dx = np.where(big, dx / np.abs(np.where(dx == 0, 1, dx)) * 0.05, dx)
        x2 = x1[act] + dx
        f2 = _open_mismatch(sl, x2, clad_l, clad_r)
        ia = np.nonzero(act)[0]
        for _ in range(backtrack):
            worse = (np.abs(f2) > np.abs(f1[ia])) & (np.abs(dx) > 100 * xtol)
            if not worse.any():
                break
            dx = np.where(worse, 0.5 * dx, dx)
            x2[worse] = x1[ia[worse]] + dx[worse]
            f2[worse] = _open_mismatch(sl, x2[worse], clad_l, clad_r)
        x0[ia], f0[ia] = x1[ia], f1[ia]
        x1[ia], f1[ia] = x2, f2
        step[ia] = np.abs(dx)
        done[ia] = (np.abs(dx) < xtol) | (dx == 0)
    return x1, step, done


def _refine_poles(band: Band, poles, level: int, clad_l, clad_r, xtol: float,
                  tolerance_eV: float, max_level: int = _MAX_LEVEL):
    """Richardson refinement of complex poles, halving the slice step until agreement.

    ``poles`` were found on the slices of ``level``.  The poles are followed
    from level to level (secant started at the previous level's pole); at each
    level ``l >= 1`` the extrapolate ``R_l = (4 p_l - p_{l-1}) / 3`` is formed
    (error even in the step h), and a pole is accepted once two successive
    extrapolates agree to ``tolerance_eV``; that difference is its tolerance.
    Refinement stops at ``max_level``; a pole not settled by then keeps the
    last difference (reported as not converged).  A pole that cannot be
    followed (secant failure or a jump to another pole) gets an infinite
    tolerance.

    Returns
    -------
    poles : complex array
        Best estimates (last extrapolates).
    tol : float array
        Reached accuracy [eV] of each pole (absolute complex difference).

    References
    ----------
    L. F. Richardson, Phil. Trans. R. Soc. A 210, 307 (1911).
    """
    raw = {level: np.asarray(poles, dtype=complex)}
    n = raw[level].size
    best = raw[level].copy()
    tol = np.full(n, np.inf)
    rich_prev = np.full(n, np.nan + 0j)
    alive = np.ones(n, bool)

    def follow(lv, starts, idx):
        sl = tr.build_slices(band, lv)
        p, _, done = _poles(sl, starts, clad_l, clad_r, xtol)
        prev = raw[lv - 1 if lv > level else lv + 1][idx]
        ok = done & np.isfinite(p) & (np.abs(p - prev) < 0.1 * np.abs(prev.imag) + 1e-3)
        return p, ok

    if level == 0:
        # need a coarser partner: go one level finer first
        levels = range(1, max_level + 1)
    else:
        p, ok = follow(level - 1, raw[level], np.arange(n))
        raw[level - 1] = p
        alive &= ok
        rich_prev = np.where(alive, (4 * raw[level] - p) / 3, rich_prev)
        best = np.where(alive, rich_prev, best)
        tol = np.where(alive, np.abs(rich_prev - raw[level]), np.inf)
        levels = range(level + 1, max_level + 1)
    active = alive.copy()  # every live pole needs two extrapolates before it may stop
    for lv in levels:
        idx = np.nonzero(active)[0]
        if idx.size == 0:
            break
        prev = raw[lv - 1]
        # start from the previous pole moved by the expected h^2 correction
        start = prev[idx] + (best[idx] - prev[idx]) * 0.75 if lv - 2 in raw else prev[idx]
        p_new = np.full(n, np.nan + 0j)
        p, ok = follow(lv, start, idx)
        p_new[idx] = p
        raw[lv] = np.where(np.isnan(p_new.real), prev, p_new)
        bad = idx[~ok]
        alive[bad] = False
        active[bad] = False
        tol[bad] = np.inf
        good = idx[ok]
        rich = (4 * raw[lv][good] - prev[good]) / 3
        had = ~np.isnan(rich_prev[good].real)
        est = np.where(had, np.abs(rich - rich_prev[good]), np.abs(rich - raw[lv][good]))
        rich_prev[good] = rich
        best[good] = rich
        tol[good] = est
        active[good] = ~(had & (est <= tolerance_eV))
    return best, np.maximum(tol, xtol)


def _pole_candidates(band: Band, sl: tr.Slices, xtol: float, top_eV: float | None = None):
    """Distinct poles above the confinement limit on ``sl``: (E_complex, step, E_box).

    Started from the real eigenvalues of the stack closed at its outer ends by
    a wall 1 eV above ``top_eV`` (default: the highest potential of ``sl`` and
    the claddings); poles outside ``(lim, top_eV)``, growing ones and unconverged
    secants are dropped, and several closed-box levels leading to one pole give
    one candidate.
    """
    clad_l, clad_r = _cladding(band, "left"), _cladding(band, "right")
    lim = band.confinement_limit_eV
    top = max(float(np.max(sl.v_eV)), clad_l[0], clad_r[0]) if top_eV is None else top_eV
    if top <= lim + 1e-9:
        return np.zeros(0, complex), np.zeros(0), []
    # stack closed at both outer ends by a high decaying wall
    wall = top + 1.0
    cl = (wall, clad_l[1], np.inf)
    cr = (wall, clad_r[1], np.inf)
    e_hi = top
    E_box, _, _, _ = _eigenvalues(band, sl, cl, cr, lim, e_hi, 200, 1e-9)
    E_box = E_box[(E_box > lim) & (E_box < e_hi)]
    if E_box.size == 0:
        return np.zeros(0, complex), np.zeros(0), []
    # plain secant from every closed-box level; the levels whose secant fails, lands
    # on a pole found before or on a broad one are searched again by the damped
    # secant (which stays with the zero nearest to its start); the union is kept
    poles, step, done = _poles(sl, E_box, clad_l, clad_r, xtol)
    ok = _in_window(poles, done, lim, top, xtol)
    first = _distinct(poles, ok, xtol)
    broad = np.zeros(poles.size, bool)
    broad[first] = ~_localised(poles[first], lim, slack=1.2)
    again = np.nonzero(~ok | broad | ~np.isin(np.arange(poles.size), first))[0]
    if again.size:
        p2, s2, d2 = _poles(sl, E_box[again], clad_l, clad_r, xtol, backtrack=_BACKTRACK)
        poles, step = np.concatenate([poles, p2]), np.concatenate([step, s2])
        ok = np.concatenate([ok, _in_window(p2, d2, lim, top, xtol)])
    keep = _distinct(poles, ok, xtol)
    return poles[keep], step[keep], E_box


def _in_window(poles, done, lim: float, top: float, xtol: float) -> np.ndarray:
    """Converged, finite, not growing poles with ``lim < Re E < top``."""
    gamma = -2 * poles.imag
    return done & np.isfinite(poles) & (gamma > -xtol) & (poles.real > lim) & (poles.real < top)


def _distinct(poles, ok, xtol: float) -> np.ndarray:
    """Indices of the first of each group of equal poles among ``poles[ok]`` (in order)."""
    out = []
    for i in np.nonzero(ok)[0]:
        p = poles[i]
        if all(abs(p - poles[j]) > max(1e3 * xtol, 1e-3 * abs(p.imag)) for j in out):
            out.append(i)
    return np.array(out, dtype=np.int64)


def _localised(poles, lim: float, slack: float = 1.0) -> np.ndarray:
    """Which poles are localised resonances (boolean mask over ``poles``).

    Narrow compared with the distance to every other pole (an isolated
    Breit-Wigner resonance) and with its height above the open edge ``lim``:
    ``Gamma < 0.5 gap`` and ``Gamma < E_r - lim``.  ``slack > 1`` widens both
    limits by that factor (a superset, for poles not yet refined).
    """
    poles = np.asarray(poles, dtype=complex)
    keep = np.zeros(poles.size, bool)
    for i, p in enumerate(poles):
        g = -2 * p.imag
        others = [abs(p.real - q.real) for j, q in enumerate(poles) if j != i]
        gap = min(others) if others else np.inf
        keep[i] = g < 0.5 * slack * gap and g < slack * (p.real - lim)
    return keep


def _quasi_bound(band: Band, sl: tr.Slices, xtol: float, top_eV: float | None = None):
    """Localised resonances above the confinement limit on ``sl``: (E_complex, step, E_box)."""
    cand, cst, E_box = _pole_candidates(band, sl, xtol, top_eV)
    keep = _localised(cand, band.confinement_limit_eV)
    return cand[keep], cst[keep], E_box


# ---------------------------------------------------------------- minibands
def minibands(band: Band, repeat: RepeatInfo, *, max_bands: int = 10) -> tuple[Miniband, ...]:
    """Minibands of the infinite superlattice made of one period of ``repeat``.

    Bloch's theorem on one period ``d``: ``cos(q d) = tr(T(E))/2`` with ``T``
    the period's transfer matrix in the ``(psi, psi'/m)`` basis; band edges are
    the roots of ``tr(T)/2 = +-1``.  Each band edge is bracketed uniquely by
    consecutive Dirichlet eigenvalues of the period (one lies in every gap),
    found by node counting.  Returned: the lowest ``max_bands`` minibands whose
    bottom lies below the highest potential of the period.

    References
    ----------
    Kronig and Penney, Proc. R. Soc. A 130, 499 (1931); Bastard, Phys. Rev. B
    24, 5693 (1981).
    """
    from scipy.optimize import brentq

    z0, d = repeat.z_start_nm, repeat.period_nm
    flat = all(p.kind == "flat" for p in band.pieces)
    sl = tr.build_slices(band, 0 if flat else 5, z_lo_nm=z0, z_hi_nm=z0 + d)
    vmax, vmin = float(np.max(sl.v_eV)), float(np.min(sl.v_eV))

    def half_trace(e):
        e = np.atleast_1d(np.asarray(e, dtype=float))
        M, lg = tr.product(sl, e, track_log=True)
        t = 0.5 * (M[:, 0, 0] + M[:, 1, 1])
        return np.sign(t) * np.exp(np.minimum(np.log(np.abs(t) + 1e-300) + lg, 700.0))

    def n_dirichlet(e):
        e = np.atleast_1d(np.asarray(e, dtype=float))
        P, U, _, _ = tr.propagate_states(sl, e, 0.0, 1.0)
        n = tr.count_nodes(sl, e, P, U)
        # a zero exactly at the right end belongs to the eigenvalue itself
        return n - (P[-1] == 0)

    # Dirichlet eigenvalues mu_1 < mu_2 < ... (one per gap)
    e_lo = vmin
    e_hi = vmax + 0.05
    while int(n_dirichlet(e_hi)[0]) < max_bands + 1 and e_hi < vmax + 50:
        e_hi = vmin + 2 * (e_hi - vmin)
    nmax = int(n_dirichlet(e_hi)[0])
    a, b, _ = _isolate(n_dirichlet, e_lo, e_hi, 0, nmax)
    mu = []
    for lo, hi in zip(a, b):
        flo, fhi = _dir_mismatch(sl, lo), _dir_mismatch(sl, hi)
        mu.append(brentq(lambda x: _dir_mismatch(sl, x), lo, hi, xtol=1e-13)
                  if np.sign(flo) != np.sign(fhi) else 0.5 * (lo + hi))
    out = []
    lower = vmin - 1e-9
    for n in range(1, len(mu) + 1):
        upper = mu[n - 1]
        sgn = 1.0 if n % 2 == 1 else -1.0

        def h(x, s=sgn):
            return s * float(half_trace(x)[0])

        try:
            bot = brentq(lambda x: h(x) - 1.0, lower, upper, xtol=1e-12)
            top = brentq(lambda x: h(x) + 1.0, lower, upper, xtol=1e-12)
        except ValueError:
            lower = upper
            continue
        if bot >= vmax or len(out) >= max_bands:
            break
        be, te = float(band.profile_energy(bot)), float(band.profile_energy(top))
        out.append(Miniband(band=band.name, index=len(out) + 1, bottom_eV=be, top_eV=te,
                            width_eV=abs(te - be), repeat_index=_repeat_index(band, repeat),
                            period_nm=d))
        lower = upper
    return tuple(out)


def _dir_mismatch(sl, e):
    M, _ = tr.product(sl, np.array([float(e)]))
    return float(M[0, 0, 1])  # psi(b) of the solution with psi(a)=0, u(a)=1


def _repeat_index(band: Band, repeat: RepeatInfo) -> int:
    for i, r in enumerate(band.repeats):
        if r == repeat:
            return i
    return 0


# ---------------------------------------------------------------- progress
#: a terminal progress line is shown for solves expected to take longer than this [s]
PROGRESS_AFTER_S = 2.0


def _expected_seconds(band: Band, sl: tr.Slices, clad_l, clad_r, e_lo: float, lim: float,
                      flat: bool, quasi_bound: bool) -> tuple[float, int]:
    """Rough duration of a solve [s] and its bound-state count, from one timed count.

    One count of two energies costs about one pass over the slices; a solve takes
    ~40 such passes per refinement level (three levels, 7x the slices, when
    pieces are sliced) plus, for resonances, ~2.5 passes per closed-box level
    (0.5 on flat stacks).  Measured on the example stacks; good to a factor ~2.
    """
    t0 = time.perf_counter()
    n = _count(sl, np.array([e_lo, lim]), clad_l, clad_r)
    probe = time.perf_counter() - t0
    est = probe * 40 * (1 if flat else 7)
    if quasi_bound:
        top = max(float(np.max(sl.v_eV)), clad_l[0], clad_r[0])
        if top > lim + 1e-9:
            wall = top + 1.0
            nb = _count(sl, np.array([lim, top]), (wall, clad_l[1], np.inf),
                        (wall, clad_r[1], np.inf))
            est += probe * min(200, int(nb[1] - nb[0])) * (0.5 if flat else 2.5)
    return est, int(n[1] - n[0])


def _on_terminal() -> bool:
    return bool(getattr(sys.stderr, "isatty", lambda: False)())


class _Progress:
    """One line on a terminal's stderr for a long solve: what, the expected time, then done."""

    def __init__(self, band: Band, n_states: int, n_slices: int, expected_s: float):
        self.on = expected_s > PROGRESS_AFTER_S and _on_terminal()
        self.t0 = time.perf_counter()
        if self.on:
            sys.stderr.write(f"qwell: solving {band.name} band: {n_states} bound states over "
                             f"{n_slices} slices, expected ~{expected_s:.0f} s ...")
            sys.stderr.flush()

    def done(self):
        if self.on:
            sys.stderr.write(f" done in {time.perf_counter() - self.t0:.1f} s\n")
            sys.stderr.flush()


# ---------------------------------------------------------------- main solver
def _deepest(band: Band):
    best = None
    for p in band.pieces:
        z = np.linspace(p.z_start_nm, p.z_end_nm, 201)
        v = float(np.min(p.potential(z)))
        if best is None or v < best[0]:
            best = (v, p)
    v, p = best
    names = band.layer_names
    name = names[p.layer_index] if p.layer_index < len(names) else f"layer {p.layer_index + 1}"
    return v, name


def _is_periodic(band: Band, repeat, tol_eV: float = 1e-9) -> bool:
    """Whether V(z + d) = V(z) across the repeat block (period d)."""
    if repeat.count < 2:
        return False
    z = repeat.z_start_nm + np.linspace(0.0, repeat.period_nm, 97)[1:-1]
    v0 = band.potential(z)
    v1 = band.potential(z + repeat.period_nm * (repeat.count - 1))
    return bool(np.max(np.abs(v1 - v0)) <= tol_eV)


def solve_exact(band: Band, *, tolerance_eV: float = 1e-7, max_states: int | None = None,
                grid_step_nm: float = 0.02, wavefunctions: bool = True,
                quasi_bound: bool = True) -> Levels:
    """All bound (and localised quasi-bound) states of ``band``.

    Parameters
    ----------
    band : Band
        Carrier-convention potential (see :mod:`qwell.bands`).
    tolerance_eV : float
        Requested accuracy of each carrier energy [eV].
    max_states : int, optional
        Keep only the lowest ``max_states`` bound states.
    grid_step_nm : float
        Wavefunction grid step [nm]; on stacks longer than ``20000 * grid_step_nm``
        the step grows so that the grid keeps 20,000 points (see
        :func:`output_step_nm`).
    wavefunctions : bool
        Provide normalised wavefunctions and layer probabilities.  Each state
        stores its solution at the slice boundaries (``State.envelope``);
        ``z_nm``, ``psi`` and ``layer_probability`` are sampled from it on first
        access.
    quasi_bound : bool
        Also look for localised resonances above the confinement limit.

    Returns
    -------
    Levels
        States in increasing carrier energy, labelled ``{prefix}{n}``; each
        state carries the tolerance it reached.  ``minibands`` holds the
        minibands of every ``band.repeats`` block.

    Notes
    -----
    Flat-only bands are solved exactly (tolerance = root bracket).  Graded or
    tilted pieces are sliced; the energies are Richardson extrapolates from
    steps h and h/2, refined until two extrapolates differ by less than the
    tolerance (that difference is reported).
    """
    clad_l, clad_r = _cladding(band, "left"), _cladding(band, "right")
    lim = band.confinement_limit_eV
    flat = all(p.kind == "flat" for p in band.pieces)
    notes = []
    xtol = min(tolerance_eV / 100.0, 1e-9)

    vmin_carrier, deep_name = _deepest(band)
    levels_E = []   # per level: energies
    sl = coarse_sl = _slices(band, 0)
    e_lo = min(float(np.min(sl.v_eV)), vmin_carrier) - 1e-6
    progress = None
    if _on_terminal():
        est_s, n_est = _expected_seconds(band, sl, clad_l, clad_r, e_lo, lim, flat, quasi_bound)
        progress = _Progress(band, n_est, sl.n, est_s)
    E, half, iso, _ = _eigenvalues(band, sl, clad_l, clad_r, e_lo, lim, max_states, xtol)
    levels_E.append(E)
    tol = np.maximum(half, 0.0)
    final_sl = sl
    final_E = E
    if not flat:
        rich_prev = None
        est = np.full(E.size, np.inf)
        for level in range(1, _MAX_LEVEL + 1):
            sl = _slices(band, level)
            e_lo = min(e_lo, float(np.min(sl.v_eV)) - 1e-6)
            seeds = np.concatenate([levels_E[-1], 0.5 * (levels_E[-1][1:] + levels_E[-1][:-1])])
            En, half, iso, _ = _eigenvalues(band, sl, clad_l, clad_r, e_lo, lim, max_states, xtol,
                                            seeds=seeds)
            Ep = levels_E[-1]
            k = min(En.size, Ep.size)
            rich = (4 * En[:k] - Ep[:k]) / 3
            if rich_prev is None or rich_prev.size < k:
                est_new = np.abs(En[:k] - Ep[:k]) / 3
                if rich_prev is not None:
                    kk = rich_prev.size
                    est_new[:kk] = np.abs(rich[:kk] - rich_prev[:kk])
            else:
                est_new = np.abs(rich[:k] - rich_prev[:k])
            levels_E.append(En)
            rich_prev = rich
            final_sl, final_E = sl, En
            est = np.concatenate([est_new, np.full(En.size - k, np.inf)])
            E = np.concatenate([rich, En[k:]])
            tol = np.maximum(est, half)
            if np.all(tol <= tolerance_eV) and level >= 2:
                break
    converged = tol <= tolerance_eV
    if not flat and E.size and not np.all(converged):
        notes.append("some states did not reach the requested tolerance "
                     f"(worst {float(np.max(tol)):.3g} eV)")
    if E.size and not np.all(iso):
        notes.append("an eigenvalue pair could not be separated (splitting below 1e-13 eV)")

    states = []
    poles, ptol = np.zeros(0, complex), np.zeros(0)
    if quasi_bound:
        xq = max(min(tolerance_eV / 10, 1e-9), 1e-13)
        # the highest potential of the finest slices (the search window of the poles)
        top = max(float(np.max(final_sl.v_eV)), clad_l[0], clad_r[0])
        if flat:
            poles, steps, _ = _quasi_bound(band, coarse_sl, xq, top)
            ptol = np.maximum(steps, xq) if len(poles) else steps
        else:
            # sliced pieces: the poles are found on the coarsest slices and followed
            # to finer ones (Richardson, as the bound states); the localisation test
            # is made on the refined poles
            cand, _, _ = _pole_candidates(band, coarse_sl, xq, top)
            # only candidates that may pass the test once refined are refined (a
            # pole moves by far less than 20 % of its width and gap between levels);
            # the others keep their coarse values as neighbours in the final test
            maybe = _localised(cand, lim, slack=1.2)
            poles, ptol = cand[maybe], np.zeros(int(maybe.sum()))
            if len(poles):
                poles, ptol = _refine_poles(band, poles, 0, clad_l, clad_r, xq, tolerance_eV)
                both = np.concatenate([poles, cand[~maybe]])
                keep = _localised(both, lim)[:poles.size]
                poles, ptol = poles[keep], ptol[keep]
    if wavefunctions:
        waves, qwaves = _envelopes(band, final_sl, final_E[:E.size], np.real(poles),
                                   output_step_nm(band, grid_step_nm), clad_l, clad_r)
    else:
        waves, qwaves = [None] * E.size, [None] * len(poles)
    for i in range(E.size):
        states.append(dict(energy=float(E[i]), tol=float(tol[i]), conv=bool(converged[i]),
                           bound=True, life=None, env=waves[i], msg=""))
    if quasi_bound:
        for iq, (p, t) in enumerate(zip(poles, ptol)):
            gamma = max(-2 * p.imag, 0.0)
            life = HBAR_EV_S / gamma if gamma > 0 else np.inf
            t = float(max(t, xq))
            states.append(dict(energy=float(p.real), tol=t, conv=t <= tolerance_eV, bound=False,
                               life=float(life), env=qwaves[iq],
                               msg=f"quasi-bound: width {gamma:.3g} eV (normalised over the grid)"))

    states.sort(key=lambda s: s["energy"])
    out = []
    for n, s in enumerate(states, start=1):
        out.append(State(band=band.name, label=f"{band.prefix}{n}", index=n,
                         energy_eV=float(band.profile_energy(s["energy"])),
                         carrier_energy_eV=s["energy"], bound=s["bound"], lifetime_s=s["life"],
                         tolerance_eV=s["tol"], converged=s["conv"], envelope=s["env"],
                         message=s["msg"]))

    if progress is not None:
        progress.done()
    n_bound = sum(1 for s in out if s.bound)
    message = f"{n_bound} bound state{'s' if n_bound != 1 else ''}"
    if n_bound == 0:
        depth = lim - vmin_carrier
        if depth <= 0:
            message = ("no bound state: the band edges cannot confine this carrier "
                       f"(lowest potential in layer \"{deep_name}\" is not below the claddings)")
            notes.append("band edges do not form a well")
        else:
            message = f"no bound state: deepest well {depth:.4g} eV in layer \"{deep_name}\""
    nq = len(out) - n_bound
    if nq:
        message += f"; {nq} quasi-bound"
        notes.append("quasi-bound states (bound=False) can escape through the lower cladding")
    mbs = []
    for r in band.repeats:
        if _is_periodic(band, r):
            mbs.extend(minibands(band, r))
        else:
            notes.append(f"no minibands for the repeat block at {r.z_start_nm:.4g} nm: its "
                         "potential is not periodic (a field or charge tilts it; Bloch's theorem "
                         "does not apply, the states are Wannier–Stark-like)")
    return Levels(band=band.name, method="exact", states=tuple(out),
                  converged=all(s.converged for s in out), message=message, notes=tuple(notes),
                  minibands=tuple(mbs), tolerance_eV=tolerance_eV,
                  confinement_limit_eV=float(band.profile_energy(lim)))
