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
* Quasi-bound states (above the lower cladding): poles of the outgoing-wave
  mismatch in the complex energy plane, started from the real eigenvalues of
  the stack closed at its ends; ``E = E_r - i Gamma/2``, lifetime ``hbar/Gamma``.
  Only resonances narrow compared with the spacing of their neighbours are
  kept (localised states).
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

import numpy as np

from ..bands import Band, RepeatInfo
from . import _transfer as tr
from .results import Levels, Miniband, State

__all__ = ["solve_exact", "count_states_below", "minibands", "wavefunction"]

_MAX_LEVEL = 9          # finest slice step 0.5 nm / 512 ~ 1 pm
_DEFAULT_COUNT_LEVEL = 2
_TAIL_DECAY = 5.0       # cladding tail on the grid: 5 decay lengths of psi
_TAIL_MIN_NM, _TAIL_MAX_NM = 2.0, 60.0


# ---------------------------------------------------------------- helpers
def _cladding(band: Band, side: str):
    v, m, g = band.left_cladding if side == "left" else band.right_cladding
    if g is None or not band.nonparabolic:
        g = np.inf
    return v, m, g


def _count(sl: tr.Slices, E: np.ndarray, clad_l, clad_r) -> np.ndarray:
    """N(E) of the sliced problem with decaying claddings ``clad_l/clad_r`` (V, m, g)."""
    E = np.atleast_1d(np.asarray(E, dtype=float))
    out = np.empty(E.size, dtype=np.int64)
    chunk = max(1, 400000 // max(sl.n, 1))
    for i in range(0, E.size, chunk):
        e = E[i:i + chunk]
        kl, ml = tr.cladding_kappa(*clad_l, e)
        kr, mr = tr.cladding_kappa(*clad_r, e)
        P, U, _, _ = tr.propagate_states(sl, e, 1.0, kl / ml)
        n = tr.count_nodes(sl, e, P, U)
        phi = np.mod(np.arctan2(P[-1], U[-1]), np.pi)
        beta = np.arctan2(1.0, -kr / mr)
        out[i:i + chunk] = n + (phi > beta)
    return out


def _split_index(sl: tr.Slices) -> int:
    """Interface where left and right solutions are matched: start of the deepest slice."""
    j = int(np.argmin(sl.v_eV))
    return j if j > 0 else min(1, sl.n)


def _mismatch(sl: tr.Slices, E: np.ndarray, clad_l, clad_r) -> np.ndarray:
    """Continuous Wronskian of the left- and right-decaying solutions at an inner interface.

    Both solutions are carried from their cladding to the start of the deepest
    slice, so neither is propagated against its decay (smooth in E, no step).
    """
    kl, ml = tr.cladding_kappa(*clad_l, E)
    kr, mr = tr.cladding_kappa(*clad_r, E)
    jm = _split_index(sl)
    if jm > 0:
        ML, _ = tr.product(tr.subset(sl, 0, jm), E)
        pl = ML[:, 0, 0] + ML[:, 0, 1] * (kl / ml)
        ul = ML[:, 1, 0] + ML[:, 1, 1] * (kl / ml)
    else:
        pl, ul = np.ones_like(E), kl / ml
    if jm < sl.n:
        MR, _ = tr.product(tr.subset(sl, jm, sl.n), E, backward=True)
        pr = MR[:, 0, 0] - MR[:, 0, 1] * (kr / mr)
        ur = MR[:, 1, 0] - MR[:, 1, 1] * (kr / mr)
    else:
        pr, ur = np.ones_like(E), -kr / mr
    # weight making u comparable with psi in the matching slice
    j = min(jm, sl.n - 1)
    mj = tr.eff_mass(sl.m_m0[j], sl.v_eV[j], sl.g_eV[j], E)
    w = np.sqrt(tr.C_EV_NM2 * mj / np.maximum(np.abs(E - sl.v_eV[j]), 1e-3))
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


def _isolate(count, e_lo, e_hi, n_lo, n_hi, seeds=(), n_grid=24, min_width=1e-13, max_pass=80):
    """Brackets [a_k, b_k] with N(a_k) = k, N(b_k) = k + 1 for k = n_lo .. n_hi - 1.

    ``count`` is the vectorised counting function.  All bisection midpoints of a
    pass are evaluated in one call; every evaluated point tightens every bracket.
    Returns (a, b, isolated) arrays indexed by k - n_lo.
    """
    pts_e = [np.array([e_lo, e_hi])]
    pts_n = [np.array([n_lo, n_hi])]
    init = np.concatenate([np.linspace(e_lo, e_hi, n_grid + 2)[1:-1], np.asarray(seeds, float)])
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


def _eigenvalues(band: Band, sl: tr.Slices, clad_l, clad_r, e_lo, e_hi, kmax, xtol, seeds=()):
    """Eigenvalues of the sliced problem below e_hi: (E, bracket half-width, isolated)."""
    def count(e):
        return _count(sl, e, clad_l, clad_r)

    n_hi = int(count(np.array([e_hi]))[0])
    n_lo = int(count(np.array([e_lo]))[0])
    if kmax is not None:
        n_hi = min(n_hi, n_lo + kmax)
    if n_hi <= n_lo:
        return np.zeros(0), np.zeros(0), np.zeros(0, bool), n_lo
    a, b, iso = _isolate(count, e_lo, e_hi, n_lo, n_hi, seeds=seeds)
    fa = _mismatch(sl, a, clad_l, clad_r)
    fb = _mismatch(sl, b, clad_l, clad_r)

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
    sl = tr.build_slices(band, level)
    out = _count(sl, np.minimum(E.ravel(), lim), _cladding(band, "left"), _cladding(band, "right"))
    return out.reshape(E.shape)


# ---------------------------------------------------------------- wavefunctions
def _wave_on(sl: tr.Slices, E: float, z: np.ndarray, clad_l, clad_r) -> np.ndarray:
    """Bounded two-sided evaluation of the sliced solution at energy E on z (unnormalised).

    The left-decaying solution is used left of a matching interface and the
    right-decaying one right of it; they are joined by least squares on the
    state vector (psi, u) at that interface (chosen next to the deepest slice).
    """
    e = np.array([float(E)])
    kl, ml = tr.cladding_kappa(*clad_l, e)
    kr, mr = tr.cladding_kappa(*clad_r, e)
    PL, UL, LL, _ = tr.propagate_states(sl, e, 1.0, kl / ml)
    PR, UR, LR, _ = tr.propagate_states(sl, e, 1.0, -kr / mr, backward=True)
    PL, UL, LL, PR, UR, LR = (x[:, 0] for x in (PL, UL, LL, PR, UR, LR))
    ns = sl.n
    jdeep = int(np.argmin(sl.v_eV))
    jm = jdeep if jdeep > 0 else min(1, ns)
    # weight making u comparable with psi
    m_here = tr.eff_mass(sl.m_m0[min(jm, ns - 1)], sl.v_eV[min(jm, ns - 1)], sl.g_eV[min(jm, ns - 1)], E)
    w = np.sqrt(tr.C_EV_NM2 * m_here / max(abs(E - sl.v_eV[min(jm, ns - 1)]), 1e-4))
    vl = np.array([PL[jm], w * UL[jm]])
    vr = np.array([PR[jm], w * UR[jm]])
    lam = float(vr @ vl) / float(vl @ vl)  # vr ~ lam * vl
    bounds = np.concatenate([sl.z0_nm, [sl.z_end_nm]])
    zb = bounds[jm]
    z = np.asarray(z, dtype=float)
    out = np.zeros_like(z)
    # left cladding / right cladding
    m = z < bounds[0]
    out[m] = PL[0] * np.exp(np.minimum(kl[0] * (z[m] - bounds[0]) + LL[0] - LL[jm], 700))
    m = z > bounds[-1]
    out[m] = PR[-1] / lam * np.exp(np.minimum(-kr[0] * (z[m] - bounds[-1]) + LR[-1] - LR[jm], 700))
    inside = (z >= bounds[0]) & (z <= bounds[-1])
    zi = z[inside]
    j = np.clip(np.searchsorted(bounds, zi, side="right") - 1, 0, ns - 1)
    res = np.empty_like(zi)
    left = zi < zb
    # forward from slice starts (left part)
    if left.any():
        jl = j[left]
        x = zi[left] - bounds[jl]
        a, b, c, d, ls = tr.coefficients(sl, np.full(jl.size, E), lengths=x, sl_index=jl)
        res[left] = (a * PL[jl] + b * UL[jl]) * np.exp(np.minimum(ls + LL[jl] - LL[jm], 700))
    right = ~left
    if right.any():
        jr = j[right]
        x = bounds[jr + 1] - zi[right]
        a, b, c, d, ls = tr.coefficients(sl, np.full(jr.size, E), lengths=x, sl_index=jr)
        res[right] = (a * PR[jr + 1] - b * UR[jr + 1]) / lam * np.exp(
            np.minimum(ls + LR[jr + 1] - LR[jm], 700))
    out[inside] = res
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


def _grid(band: Band, E: float, step_nm: float, clad_l, clad_r):
    kl, _ = tr.cladding_kappa(*clad_l, np.array([E]))
    kr, _ = tr.cladding_kappa(*clad_r, np.array([E]))
    tails = []
    for k in (kl[0], kr[0]):
        t = _TAIL_DECAY / (2 * k) if k > 0 else _TAIL_MAX_NM
        tails.append(float(np.clip(t, _TAIL_MIN_NM, _TAIL_MAX_NM)))
    segs = [np.linspace(band.z_start_nm - tails[0], band.z_start_nm,
                        max(2, int(np.ceil(tails[0] / step_nm)) + 1))[:-1]]
    for p in band.pieces:
        n = max(1, int(np.ceil(p.thickness_nm / step_nm)))
        segs.append(np.linspace(p.z_start_nm, p.z_end_nm, n + 1)[:-1])
    segs.append(np.linspace(band.z_end_nm, band.z_end_nm + tails[1],
                            max(2, int(np.ceil(tails[1] / step_nm)) + 1)))
    return np.concatenate(segs), kl[0], kr[0]


def _trapz(y, x):
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(x))) if x.size > 1 else 0.0


def _normalised_state(band: Band, sl: tr.Slices, E: float, step_nm: float, clad_l, clad_r,
                      closed_tails: bool = True):
    z, kl, kr = _grid(band, E, step_nm, clad_l, clad_r)
    psi = _wave_on(sl, E, z, clad_l, clad_r)
    dens = psi ** 2
    tail_l = dens[0] / (2 * kl) if (closed_tails and kl > 0) else 0.0
    tail_r = dens[-1] / (2 * kr) if (closed_tails and kr > 0) else 0.0
    norm = _trapz(dens, z) + tail_l + tail_r
    psi = psi / np.sqrt(norm)
    if psi[np.argmax(np.abs(psi))] < 0:
        psi = -psi
    dens = psi ** 2
    tail_l, tail_r = tail_l / norm, tail_r / norm
    # per-layer probability; interface points shared
    edges = band.boundaries_nm
    probs = np.zeros(len(band.layer_names) if band.layer_names else
                     1 + max(p.layer_index for p in band.pieces))
    for i, p in enumerate(band.pieces):
        lo = -np.inf if i == 0 else edges[i]
        hi = np.inf if i == len(band.pieces) - 1 else edges[i + 1]
        sel = (z >= lo) & (z <= hi)
        val = _trapz(dens[sel], z[sel])
        if i == 0:
            val += tail_l
        if i == len(band.pieces) - 1:
            val += tail_r
        if p.layer_index < probs.size:
            probs[p.layer_index] += val
    return z, psi, tuple(float(x) for x in probs)


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


def _poles(sl: tr.Slices, starts, clad_l, clad_r, xtol, maxit=80):
    """Vectorised secant iteration for complex poles from real start energies."""
    x0 = np.asarray(starts, dtype=complex) - 1e-6j
    x1 = np.asarray(starts, dtype=complex) - 2e-6j
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
        x0[ia], f0[ia] = x1[ia], f1[ia]
        x1[ia], f1[ia] = x2, f2
        step[ia] = np.abs(dx)
        done[ia] = (np.abs(dx) < xtol) | (dx == 0)
    return x1, step, done


def _quasi_bound(band: Band, sl: tr.Slices, xtol: float):
    """Localised resonances above the confinement limit: (E_complex, step, ok)."""
    clad_l, clad_r = _cladding(band, "left"), _cladding(band, "right")
    lim = band.confinement_limit_eV
    vmax = float(np.max(sl.v_eV))
    top = max(vmax, clad_l[0], clad_r[0])
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
    poles, step, done = _poles(sl, E_box, clad_l, clad_r, xtol)
    gamma = -2 * poles.imag
    ok = (done & np.isfinite(poles) & (gamma > -xtol) & (poles.real > lim) & (poles.real < top))
    # distinct poles (several closed-box levels may lead to the same pole)
    cand, cst = [], []
    for p, s in zip(poles[ok], step[ok]):
        if all(abs(p - q) > max(1e3 * xtol, 1e-3 * abs(p.imag)) for q in cand):
            cand.append(p)
            cst.append(s)
    # localised: narrow compared with the distance to every other pole
    # (an isolated Breit-Wigner resonance) and with its height above the open edge
    out, st = [], []
    for i, p in enumerate(cand):
        g = -2 * p.imag
        others = [abs(p.real - q.real) for j, q in enumerate(cand) if j != i]
        gap = min(others) if others else np.inf
        if g < 0.5 * gap and g < (p.real - lim):
            out.append(p)
            st.append(cst[i])
    return np.array(out, complex), np.array(st), E_box


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
        Wavefunction grid step [nm].
    wavefunctions : bool
        Compute normalised wavefunctions and layer probabilities.
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
    sl = tr.build_slices(band, 0)
    e_lo = min(float(np.min(sl.v_eV)), vmin_carrier) - 1e-6
    E, half, iso, _ = _eigenvalues(band, sl, clad_l, clad_r, e_lo, lim, max_states, xtol)
    levels_E.append(E)
    tol = np.maximum(half, 0.0)
    final_sl = sl
    final_E = E
    if not flat:
        rich_prev = None
        est = np.full(E.size, np.inf)
        for level in range(1, _MAX_LEVEL + 1):
            sl = tr.build_slices(band, level)
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
    for i in range(E.size):
        z = psi = None
        probs = ()
        if wavefunctions:
            z, psi, probs = _normalised_state(band, final_sl, float(final_E[i]), grid_step_nm,
                                              clad_l, clad_r)
        states.append(dict(energy=float(E[i]), tol=float(tol[i]), conv=bool(converged[i]),
                           bound=True, life=None, z=z, psi=psi, probs=probs, msg=""))

    if quasi_bound:
        xq = max(min(tolerance_eV / 10, 1e-9), 1e-13)
        poles, steps, _ = _quasi_bound(band, final_sl, xq)
        ptol = steps
        if not flat and len(poles):
            prev_sl = tr.build_slices(band, max(0, len(levels_E) - 2))
            p2, s2, d2 = _poles(prev_sl, poles.real, clad_l, clad_r, xq)
            # Richardson on the complex pole (even error expansion in h)
            good = d2 & (np.abs(p2 - poles) < 0.1 * np.abs(poles.imag) + 1e-3)
            rich = np.where(good, (4 * poles - p2) / 3, poles)
            ptol = np.where(good, np.abs(rich - poles), np.inf)
            poles = rich
        for p, t in zip(poles, ptol):
            gamma = max(-2 * p.imag, 0.0)
            life = tr.HBAR_EV_S / gamma if gamma > 0 else np.inf
            z = psi = None
            probs = ()
            if wavefunctions:
                z, psi, probs = _normalised_state(band, final_sl, float(p.real), grid_step_nm,
                                                  clad_l, clad_r, closed_tails=False)
            t = float(max(t, xq))
            states.append(dict(energy=float(p.real), tol=t, conv=t <= tolerance_eV, bound=False,
                               life=float(life), z=z, psi=psi, probs=probs,
                               msg=f"quasi-bound: width {gamma:.3g} eV (normalised over the grid)"))

    states.sort(key=lambda s: s["energy"])
    out = []
    for n, s in enumerate(states, start=1):
        out.append(State(band=band.name, label=f"{band.prefix}{n}", index=n,
                         energy_eV=float(band.profile_energy(s["energy"])),
                         carrier_energy_eV=s["energy"], bound=s["bound"], lifetime_s=s["life"],
                         tolerance_eV=s["tol"], converged=s["conv"], z_nm=s["z"], psi=s["psi"],
                         layer_probability=s["probs"], message=s["msg"]))

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
        mbs.extend(minibands(band, r))
    return Levels(band=band.name, method="exact", states=tuple(out),
                  converged=all(s.converged for s in out), message=message, notes=tuple(notes),
                  minibands=tuple(mbs), tolerance_eV=tolerance_eV,
                  confinement_limit_eV=float(band.profile_energy(lim)))
