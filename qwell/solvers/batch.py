"""Bound states of many bands at once: the exact solver as array operations over designs.

The physics is that of :mod:`qwell.solvers.exact` (BenDaniel–Duke matching, the
two-band nonparabolic mass of :func:`qwell.solvers._transfer.eff_mass`, decaying
semi-infinite claddings, the node count of the oscillation theorem); only the
order of the arithmetic differs.  Where :func:`~qwell.solvers.exact.solve_exact`
treats one band, :func:`solve_bound_many` treats a population of them (the designs
of a sweep, a tolerance run or a Monte Carlo draw):

* every band is cut into slices exactly as the exact solver cuts it (flat pieces
  one slice, linear and smooth pieces midpoint slices of ``0.5 nm / 2**level``);
  bands with the same slice count are stacked into 2-D arrays (design x slice);
* the counting function ``N(E)`` and the Wronskian mismatch are evaluated over
  (design x energy) arrays, one slice after the other, so that the numpy call
  overhead is paid once per slice for the whole population;
* every bound state of every design is bracketed by bisection on ``N`` (all
  midpoints of a pass in one evaluation; each design's brackets depend on that
  design only) and refined on the mismatch by the vectorised safeguarded
  false-position iteration of the exact solver, all brackets at once, to
  ``min(1e-13 eV, tolerance/100)``;
* sliced (graded, tilted) bands repeat this at halved steps with the exact
  solver's Richardson extrapolation and stopping rule, each design leaving the
  loop at the level where it would stop alone;
* one small band alone goes through a scalar path (plain floats and
  :mod:`math`, Brent's method of :mod:`qwell.rootfind`), where arrays do not pay.

Because every root is refined to ~1e-13 eV, a band solved in a population and
the same band solved alone agree to ~1e-13 eV, and both agree with
:func:`~qwell.solvers.exact.solve_exact` to its root tolerance.

Only bound states are searched.  A band is handed to
:func:`~qwell.solvers.exact.solve_exact` unchanged when the batch cannot give
its answer: resonances asked for (``quasi_bound=True``) and part of the band
lies above its confinement limit, minibands asked for on a band with repeat
blocks, a long or crowded band (more than ``_MAX_BATCH_SLICES`` slices or
``_MAX_STATES`` bound states, where the exact solver's streaming passes bound the
memory and a batch does not pay), or a bracket the batch could not isolate or refine.

Units: eV, nm, m0 (carrier convention of :mod:`qwell.bands`).

References
----------
.. [1] D. J. BenDaniel and C. B. Duke, Phys. Rev. 152, 683 (1966).
.. [2] J. D. Pryce, "Numerical Solution of Sturm–Liouville Problems",
   Oxford (1993) (Prüfer angle, oscillation theorem).
.. [3] L. F. Richardson, Phil. Trans. R. Soc. A 210, 307 (1911).
.. [4] R. P. Brent, Algorithms for Minimization without Derivatives,
   Prentice-Hall (1973), chapter 4.
"""

from __future__ import annotations

import math

import numpy as np

from ..bands import Band
from ..constants import HBAR2_2M0_EV_NM2
from ..rootfind import brentq
from . import _transfer as tr
from .exact import _MAX_LEVEL, _cladding, _deepest, _envelopes, _vroot, output_step_nm, \
    solve_exact
from .results import Levels, State

__all__ = ["solve_bound_many", "count_bound_many"]

#: root bracket of every refined energy [eV] (tighter when the tolerance asks for it)
ROOT_XTOL_EV = 1e-13
#: a population is cut into sub-batches of at most this many (design, slice, energy) numbers
_MAX_CELLS = 400_000
#: bands with more slices, or more bound states, than this are solved by solve_exact
#: (its streaming passes bound the memory of long stacks; a batch does not pay there)
_MAX_BATCH_SLICES = 4096
_MAX_STATES = 64
#: interior grid points of the first counting pass per design
_N_GRID = 8
#: one band alone with at most this many slices takes the scalar path
_SCALAR_MAX_SLICES = 12
#: the mismatch steps through at most this many slices one by one (pairwise products beyond)
_LOOP_MAX_SLICES = 8
_MIN_MASS_FRACTION = 0.01
_C = HBAR2_2M0_EV_NM2


# ---------------------------------------------------------------- slices of one band
class _Rows:
    """Slice description of one band at one level: plain lists (v, m, g, h) and claddings."""

    __slots__ = ("v", "m", "g", "h", "clad", "lim", "e_lo", "sl", "band", "level")

    def __init__(self, band: Band, level: int):
        self.band, self.level = band, level
        flat = all(p.kind == "flat" for p in band.pieces)
        if flat:
            nonpar = band.nonparabolic
            ps = [p for p in band.pieces if p.z_end_nm - p.z_start_nm > 1e-12]
            self.v = [float(p.edge_start_eV) for p in ps]
            self.m = [float(p.mass_m0) for p in ps]
            self.g = [math.inf if (p.gap_eV is None or not nonpar) else float(p.gap_eV)
                      for p in ps]
            self.h = [p.z_end_nm - p.z_start_nm for p in ps]
            self.sl = None
        else:
            sl = tr.build_slices(band, level)
            self.v, self.m, self.g, self.h = (x.tolist() for x in
                                              (sl.v_eV, sl.m_m0, sl.g_eV, sl.h_nm))
            self.sl = sl
        cl, cr = _claddings(band)
        self.clad = (float(cl[0]), float(cl[1]), float(cl[2]), float(cr[0]), float(cr[1]),
                     float(cr[2]))
        self.lim = float(min(cl[0], cr[0]))
        self.e_lo = min(self.v) - 1e-6

    @property
    def n(self) -> int:
        return len(self.v)

    def slices(self) -> tr.Slices:
        if self.sl is None:
            self.sl = tr.build_slices(self.band, self.level)
        return self.sl


def _claddings(band: Band):
    """(V, m, g) of the left and right claddings, as :func:`qwell.solvers.exact._cladding`
    gives them (g = inf where parabolic); flat and linear end pieces in plain floats."""
    first, last = band.pieces[0], band.pieces[-1]
    if first.kind == "smooth" or last.kind == "smooth":
        return _cladding(band, "left"), _cladding(band, "right")
    out = []
    for p, z in ((first, first.z_start_nm), (last, last.z_end_nm)):
        v = p.edge_start_eV + p.edge_slope_eV_per_nm * (z - p.z_start_nm)
        g = math.inf if (p.gap_eV is None or not band.nonparabolic) else float(p.gap_eV)
        out.append((float(v), float(p.mass_m0), g))
    return out[0], out[1]


def _top_eV(band: Band) -> float:
    """Highest potential of flat and linear pieces (their ends) [eV]."""
    return max(max(p.edge_start_eV, p.edge_start_eV + p.edge_slope_eV_per_nm * p.thickness_nm)
               for p in band.pieces)


# ---------------------------------------------------------------- array kernels
def _mass(m0, v, g, E):
    return m0 * np.maximum(1.0 + (E - v) / g, _MIN_MASS_FRACTION)


def _coef(V, M, G, H, E):
    """Slice transfer entries over (row, slice, energy): ``a, b, c, d`` and ``q = k^2``.

    The arithmetic of :func:`qwell.solvers._transfer.coefficients` (evanescent slices
    scaled by ``exp(-kappa h)``), with both branches as ``np.where``.
    """
    v, m0, g, h = V[:, :, None], M[:, :, None], G[:, :, None], H[:, :, None]
    e = E[:, None, :]
    m = _mass(m0, v, g, e)
    q = m * (e - v) / _C
    osc = q > 0
    k = np.sqrt(np.abs(q))
    x = k * h
    kk = np.where(k > 0, k, 1.0)
    with np.errstate(over="ignore"):
        a = np.where(osc, np.cos(x), 0.5 * (1.0 + np.exp(-2.0 * x)))
        s = np.where(osc, np.sin(x) / kk, np.where(k > 0, -np.expm1(-2.0 * x) / (2.0 * kk),
                                                   h + 0.0 * x))
    return a, m * s, -(q / m) * s, q, osc, x


def _clad(C, E):
    """kappa / m(E) of the left and right claddings: rows ``C`` (R, 6), energies (R, K)."""
    ml = _mass(C[:, 1:2], C[:, 0:1], C[:, 2:3], E)
    mr = _mass(C[:, 4:5], C[:, 3:4], C[:, 5:6], E)
    kl = np.sqrt(np.maximum(ml * (C[:, 0:1] - E) / _C, 0.0))
    kr = np.sqrt(np.maximum(mr * (C[:, 3:4] - E) / _C, 0.0))
    return kl / ml, kr / mr


def _count(V, M, G, H, C, E):
    """N(E) of every row (R, n) at its energies E (R, K): node count of the left solution
    plus one when its final angle passes that of the right-decaying one."""
    a, b, c, q, osc, x = _coef(V, M, G, H, E)
    turns = np.where(osc, np.floor(x / np.pi), 0.0)
    sgn = 1.0 - 2.0 * np.mod(turns, 2.0)
    n = turns.sum(axis=1).astype(np.int64)
    wl, wr = _clad(C, E)
    p = np.ones_like(E)
    u = wl.copy()
    for j in range(V.shape[1]):
        p1 = a[:, j] * p + b[:, j] * u
        u = c[:, j] * p + a[:, j] * u
        n += (sgn[:, j] * p * p1 < 0) | ((p1 == 0) & (p != 0))
        s = np.maximum(np.abs(p1), np.abs(u))
        s = np.where(s > 0, s, 1.0)
        p, u = p1 / s, u / s
    phi = np.mod(np.arctan2(p, u), np.pi)
    beta = np.arctan2(1.0, -wr)
    return n + (phi > beta)


def _reduce(a, b, c, d):
    """Product (later @ earlier) of the 2x2 matrices along axis 1 of (R, n) components,
    pairwise with every partial product rescaled (only its direction is used)."""
    while a.shape[1] > 1:
        if a.shape[1] % 2:
            one, zero = np.ones((a.shape[0], 1)), np.zeros((a.shape[0], 1))
            a, b, c, d = (np.concatenate([x, y], axis=1) for x, y in
                          ((a, one), (b, zero), (c, zero), (d, one)))
        a0, b0, c0, d0 = a[:, 0::2], b[:, 0::2], c[:, 0::2], d[:, 0::2]
        a1, b1, c1, d1 = a[:, 1::2], b[:, 1::2], c[:, 1::2], d[:, 1::2]
        a, b, c, d = (a1 * a0 + b1 * c0, a1 * b0 + b1 * d0, c1 * a0 + d1 * c0,
                      c1 * b0 + d1 * d0)
        s = np.maximum(np.maximum(np.abs(a), np.abs(b)), np.maximum(np.abs(c), np.abs(d)))
        s = np.where(s > 0, s, 1.0)
        a, b, c, d = a / s, b / s, c / s, d / s
    return a[:, 0], b[:, 0], c[:, 0], d[:, 0]


def _mismatch(V, M, G, H, C, J, E):
    """Normalised Wronskian of the two decaying solutions at the start of slice ``J`` (R,)
    (the deepest slice), energies E (R,).

    The left solution is carried forward over slices ``0 .. J-1``, the right one
    backward over ``J .. n-1`` (each towards the well, never against its decay); the
    slices of the other side enter as identities, and the products are formed
    pairwise (``log2 n`` array steps).
    """
    E2 = E[:, None]
    a, b, c, q, osc, x = _coef(V, M, G, H, E2)
    a, b, c = a[:, :, 0], b[:, :, 0], c[:, :, 0]
    wl, wr = _clad(C, E2)
    ns = V.shape[1]
    if ns <= _LOOP_MAX_SLICES:
        return _mismatch_loop(V, M, G, J, E, a, b, c, wl, wr)
    left = np.arange(ns)[None, :] < J[:, None]
    one, zero = np.ones_like(a), np.zeros_like(a)
    la, lb, lc, ld = _reduce(np.where(left, a, one), np.where(left, b, zero),
                             np.where(left, c, zero), np.where(left, a, one))
    # backward: inverse slice matrices [[a, -b], [-c, a]], from the last slice to slice J
    ra, rb, rc, rd = _reduce(*(np.where(left, y, z)[:, ::-1] for y, z in
                               ((one, a), (zero, -b), (zero, -c), (one, a))))
    wl0, wr0 = wl[:, 0], -wr[:, 0]
    pl, ul = la + lb * wl0, lc + ld * wl0
    pr, ur = ra + rb * wr0, rc + rd * wr0
    return _match(V, M, G, J, E, pl, ul, pr, ur)


def _match(V, M, G, J, E, pl, ul, pr, ur):
    """The normalised Wronskian of the left and right solutions met at slice ``J``."""
    ns = V.shape[1]
    rows = np.arange(V.shape[0])
    jw = np.minimum(J, ns - 1)
    vj = V[rows, jw]
    mj = _mass(M[rows, jw], vj, G[rows, jw], E)
    w = np.sqrt(_C * mj / np.maximum(np.abs(E - vj), 1e-3))
    ul, ur = w * ul, w * ur
    return (pl * ur - ul * pr) / (np.hypot(pl, ul) * np.hypot(pr, ur))


def _mismatch_loop(V, M, G, J, E, a, b, c, wl, wr):
    """:func:`_mismatch` for few slices: both solutions stepped slice by slice."""
    ns = V.shape[1]
    pl, ul = np.ones_like(E), wl[:, 0].copy()
    pr, ur = np.ones_like(E), -wr[:, 0]
    for j in range(ns):
        go = j < J
        p1 = a[:, j] * pl + b[:, j] * ul
        u1 = c[:, j] * pl + a[:, j] * ul
        s = np.maximum(np.abs(p1), np.abs(u1))
        s = np.where(s > 0, s, 1.0)   # masked-out steps may annihilate a vector
        pl, ul = np.where(go, p1 / s, pl), np.where(go, u1 / s, ul)
        jb = ns - 1 - j
        back = jb >= J
        p1 = a[:, jb] * pr - b[:, jb] * ur
        u1 = -c[:, jb] * pr + a[:, jb] * ur
        s = np.maximum(np.abs(p1), np.abs(u1))
        s = np.where(s > 0, s, 1.0)
        pr, ur = np.where(back, p1 / s, pr), np.where(back, u1 / s, ur)
    return _match(V, M, G, J, E, pl, ul, pr, ur)


def _split(V) -> np.ndarray:
    """Matching slice of every row: the deepest (first if several), 1 if that is slice 0."""
    j = np.argmin(V, axis=1)
    return np.where(j > 0, j, min(1, V.shape[1]))


def _with_seeds(rows: list, seeds) -> np.ndarray:
    """First counting points of every row: its ends, a coarse grid and its seeds (inside)."""
    t = np.linspace(0.0, 1.0, _N_GRID + 2)
    lim = np.array([r.lim for r in rows])
    e_lo = np.array([r.e_lo for r in rows])
    pts = e_lo[:, None] + (lim - e_lo)[:, None] * t[None, :]
    pts[:, -1] = lim
    if seeds is None:
        return pts
    ns = max(len(x) for x in seeds)
    extra = np.repeat(lim[:, None], ns, axis=1)
    for i, x in enumerate(seeds):
        x = np.asarray(x, dtype=float)
        x = x[(x > e_lo[i]) & (x < lim[i])]
        extra[i, :x.size] = x
    return np.concatenate([pts, extra], axis=1)


def _solve_group(rows: list, xtol: float, seeds=None):
    """Sliced eigenvalues of rows with the same slice count: per row (E array, ok).

    ``seeds`` (one array per row) are energies counted in the first pass (the
    previous level's eigenvalues and midpoints), as in the exact solver."""
    V = np.array([r.v for r in rows])
    M = np.array([r.m for r in rows])
    G = np.array([r.g for r in rows])
    H = np.array([r.h for r in rows])
    C = np.array([r.clad for r in rows])
    lim = np.array([r.lim for r in rows])
    D = len(rows)
    pts = _with_seeds(rows, seeds)
    cnt = _count(V, M, G, H, C, pts)
    n_lo, n_hi = cnt[:, 0], cnt[:, _N_GRID + 1]
    nb = n_hi - n_lo
    many = nb > _MAX_STATES           # left to the exact solver (bounded memory here)
    nb = np.where(many, 0, nb)
    K = int(nb.max()) if D else 0
    out = [(np.zeros(0), not m) for m in many]
    if K <= 0:
        return out
    ks = n_lo[:, None] + np.arange(K)[None, :]          # (D, K) wanted index k
    valid = np.arange(K)[None, :] < nb[:, None]
    iso = np.zeros((D, K), bool)
    for _ in range(90):
        order = np.argsort(pts, axis=1, kind="stable")
        P = np.take_along_axis(pts, order, axis=1)
        N = np.maximum.accumulate(np.take_along_axis(cnt, order, axis=1), axis=1)
        # per row: ia = largest E with N <= k, ib = smallest E with N >= k+1, by one
        # search over all rows (each row's counts offset above the previous row's)
        off = (np.arange(D) * (int(N.max()) + int(ks.max()) + 4))[:, None]
        flat = (N + off).ravel()
        base = (np.arange(D) * N.shape[1])[:, None]
        ia = np.searchsorted(flat, (ks + off).ravel(), side="right").reshape(D, K) - 1 - base
        ib = np.searchsorted(flat, (ks + 1 + off).ravel(), side="left").reshape(D, K) - base
        ia = np.clip(ia, 0, P.shape[1] - 1)
        ib = np.clip(ib, 0, P.shape[1] - 1)
        a = np.take_along_axis(P, ia, axis=1)
        b = np.take_along_axis(P, ib, axis=1)
        na = np.take_along_axis(N, ia, axis=1)
        nbv = np.take_along_axis(N, ib, axis=1)
        iso = (na == ks) & (nbv == ks + 1)
        todo = valid & ~iso & (b - a > 1e-13)
        if not todo.any():
            break
        mids = np.where(todo, 0.5 * (a + b), lim[:, None])
        pts = np.concatenate([pts, mids], axis=1)
        cnt = np.concatenate([cnt, _count(V, M, G, H, C, mids)], axis=1)
    d_idx, k_idx = np.nonzero(valid)
    lo, hi = a[d_idx, k_idx], b[d_idx, k_idx]
    J = _split(V)
    R = (V[d_idx], M[d_idx], G[d_idx], H[d_idx], C[d_idx], J[d_idx])
    fab = _mismatch(*(np.concatenate([x, x]) for x in R), np.concatenate([lo, hi]))
    fa, fb = fab[:lo.size], fab[lo.size:]
    good = (np.sign(fa) != np.sign(fb)) & iso[d_idx, k_idx]

    def f(x, idx):
        sel = np.nonzero(good)[0][idx]
        return _mismatch(*(y[sel] for y in R), x)

    E = np.full(lo.size, np.nan)
    if good.any():
        l2, h2 = _vroot(f, lo[good], hi[good], fa[good], fb[good], xtol)
        conv = (h2 - l2) <= 2 * xtol * (1 + 1e-9)
        E[good] = np.where(conv, 0.5 * (l2 + h2), np.nan)
    res = []
    bounds = np.searchsorted(d_idx, np.arange(D + 1))
    for d in range(D):
        e = E[bounds[d]:bounds[d + 1]]
        res.append((e, bool(np.all(np.isfinite(e))) and not many[d]))
    return res


# ---------------------------------------------------------------- scalar path
def _mass1(m0, v, g, e):
    return m0 * max(1.0 + (e - v) / g, _MIN_MASS_FRACTION)


def _coef1(v, m0, g, h, e):
    m = _mass1(m0, v, g, e)
    q = m * (e - v) / _C
    if q > 0:
        k = math.sqrt(q)
        x = k * h
        a, s = math.cos(x), math.sin(x) / k
        turns = math.floor(x / math.pi)
    else:
        k = math.sqrt(-q)
        x = k * h
        a = 0.5 * (1.0 + math.exp(-2.0 * x))
        s = -math.expm1(-2.0 * x) / (2.0 * k) if k > 0 else h
        turns = 0
    return a, m * s, -(q / m) * s, turns


def _clad1(c, e):
    ml = _mass1(c[1], c[0], c[2], e)
    mr = _mass1(c[4], c[3], c[5], e)
    return (math.sqrt(max(ml * (c[0] - e) / _C, 0.0)) / ml,
            math.sqrt(max(mr * (c[3] - e) / _C, 0.0)) / mr)


def _count1(r: _Rows, e: float) -> int:
    wl, wr = _clad1(r.clad, e)
    p, u, n = 1.0, wl, 0
    for v, m0, g, h in zip(r.v, r.m, r.g, r.h):
        a, b, c, turns = _coef1(v, m0, g, h, e)
        p1 = a * p + b * u
        u = c * p + a * u
        sgn = -1.0 if turns % 2 else 1.0
        n += turns + ((sgn * p * p1 < 0) or (p1 == 0 and p != 0))
        s = max(abs(p1), abs(u)) or 1.0
        p, u = p1 / s, u / s
    phi = math.atan2(p, u) % math.pi
    return n + (phi > math.atan2(1.0, -wr))


def _mismatch1(r: _Rows, jm: int, e: float) -> float:
    wl, wr = _clad1(r.clad, e)
    co = [_coef1(v, m0, g, h, e) for v, m0, g, h in zip(r.v, r.m, r.g, r.h)]
    pl, ul = 1.0, wl
    for a, b, c, _ in co[:jm]:
        pl, ul = a * pl + b * ul, c * pl + a * ul
        s = max(abs(pl), abs(ul)) or 1.0
        pl, ul = pl / s, ul / s
    pr, ur = 1.0, -wr
    for a, b, c, _ in reversed(co[jm:]):
        pr, ur = a * pr - b * ur, -c * pr + a * ur
        s = max(abs(pr), abs(ur)) or 1.0
        pr, ur = pr / s, ur / s
    j = min(jm, r.n - 1)
    vj = r.v[j]
    w = math.sqrt(_C * _mass1(r.m[j], vj, r.g[j], e) / max(abs(e - vj), 1e-3))
    ul, ur = w * ul, w * ur
    return (pl * ur - ul * pr) / (math.hypot(pl, ul) * math.hypot(pr, ur))


def _solve_scalar(r: _Rows, xtol: float, seeds=None):
    """Sliced eigenvalues of one small band in plain floats: (E array, ok)."""
    lo_e, hi_e = r.e_lo, r.lim
    grid = [lo_e + (hi_e - lo_e) * i / (_N_GRID + 1) for i in range(_N_GRID + 2)]
    grid[-1] = hi_e
    known = {e: _count1(r, e) for e in grid}
    for e in (() if seeds is None else seeds):
        if lo_e < e < hi_e:
            known[float(e)] = _count1(r, float(e))
    n_lo, n_hi = known[grid[0]], known[grid[-1]]
    jm = int(np.argmin(r.v)) if r.n else 0
    jm = jm if jm > 0 else min(1, r.n)
    out = []
    for k in range(n_lo, n_hi):
        for _ in range(90):
            a = max(e for e, c in known.items() if c <= k)
            b = min(e for e, c in known.items() if c >= k + 1)
            if known[a] == k and known[b] == k + 1:
                break
            if b - a <= 1e-13:
                return np.array(out), False
            m = 0.5 * (a + b)
            known[m] = _count1(r, m)
        else:
            return np.array(out), False
        fa, fb = _mismatch1(r, jm, a), _mismatch1(r, jm, b)
        if fa == 0 or fb == 0 or math.copysign(1.0, fa) == math.copysign(1.0, fb):
            return np.array(out), False
        out.append(brentq(lambda e: _mismatch1(r, jm, e), a, b, xtol=xtol, maxiter=200))
    return np.array(out), True


# ---------------------------------------------------------------- levels of one band
def _sliced_eigenvalues(rows: list, xtol: float, scalar: bool, seeds=None):
    """(E, ok) of every row, grouped by slice count (sub-batches of bounded memory)."""
    if scalar and len(rows) == 1 and rows[0].n <= _SCALAR_MAX_SLICES:
        return [_solve_scalar(rows[0], xtol, None if seeds is None else seeds[0])]
    res = [None] * len(rows)
    groups: dict = {}
    for i, r in enumerate(rows):
        n_e = _N_GRID + 2 + (0 if seeds is None else len(seeds[i]))
        if r.n > _MAX_BATCH_SLICES or r.n * n_e > _MAX_CELLS:
            res[i] = (np.zeros(0), False)     # long stacks: the exact solver's own blocks
            continue
        groups.setdefault(r.n, []).append(i)
    for n, idx in groups.items():
        step = max(1, _MAX_CELLS // (max(n, 1) * (_N_GRID + 2) * 4))
        for s in range(0, len(idx), step):
            part = idx[s:s + step]
            sd = None if seeds is None else [seeds[i] for i in part]
            for i, e in zip(part, _solve_group([rows[i] for i in part], xtol, sd)):
                res[i] = e
    return res


def _levels_of(band: Band, E, tol, conv, final_E, final_sl, tolerance_eV, wavefunctions,
               grid_step_nm, notes) -> Levels:
    """A :class:`Levels` of bound states as :func:`solve_exact` writes it."""
    clad_l, clad_r = _claddings(band)
    if wavefunctions and E.size:
        waves, _ = _envelopes(band, final_sl, final_E[:E.size], np.zeros(0),
                              output_step_nm(band, grid_step_nm), clad_l, clad_r)
    else:
        waves = [None] * E.size
    sign, name, prefix = band.carrier_sign, band.name, band.prefix
    states = tuple(State(band=name, label=f"{prefix}{i + 1}", index=i + 1,
                         energy_eV=float(sign * e), carrier_energy_eV=e, bound=True,
                         lifetime_s=None, tolerance_eV=t, converged=c, envelope=waves[i])
                   for i, (e, t, c) in enumerate(zip(E.tolist(), np.asarray(tol).tolist(),
                                                     np.asarray(conv).tolist())))
    lim = min(clad_l[0], clad_r[0])
    n = len(states)
    message = f"{n} bound state{'s' if n != 1 else ''}"
    if n == 0:
        vmin, name = _deepest(band)
        depth = lim - vmin
        if depth <= 0:
            message = ("no bound state: the band edges cannot confine this carrier "
                       f"(lowest potential in layer \"{name}\" is not below the claddings)")
            notes.append("band edges do not form a well")
        else:
            message = f"no bound state: deepest well {depth:.4g} eV in layer \"{name}\""
    return Levels(band=band.name, method="exact", states=states,
                  converged=all(s.converged for s in states), message=message,
                  notes=tuple(notes), minibands=(), tolerance_eV=tolerance_eV,
                  confinement_limit_eV=float(sign * lim))


def _needs_exact(band: Band, quasi_bound: bool, minibands: bool) -> bool:
    """Whether :func:`solve_exact` must solve this band (resonances or minibands asked)."""
    if minibands and band.repeats:
        return True
    if not quasi_bound:
        return False
    if any(p.kind == "smooth" for p in band.pieces):
        return True  # the top of a smooth piece is only known on its slices
    cl, cr = _claddings(band)
    return _top_eV(band) > min(cl[0], cr[0]) + 1e-9


def solve_bound_many(bands, *, tolerance_eV: float = 1e-7, wavefunctions: bool = False,
                     grid_step_nm: float = 0.02, quasi_bound: bool = False,
                     minibands: bool = False, scalar: bool = True) -> list:
    """Bound states of every band of ``bands``, solved together.

    Parameters
    ----------
    bands : sequence of Band
        Any mix of bands (different designs, carriers, slice counts).
    tolerance_eV : float
        Requested accuracy of each carrier energy [eV] (the exact solver's: the
        Richardson stopping rule of sliced bands; roots are refined to
        ``min(1e-13, tolerance_eV / 100)`` eV).
    wavefunctions : bool
        Attach envelopes (:func:`qwell.solvers.exact` storage, sampled on first use).
    grid_step_nm : float
        Wavefunction grid step [nm] (as in :func:`solve_exact`).
    quasi_bound : bool
        Answer what ``solve_exact(band, quasi_bound=True)`` answers: a band with
        potential above its confinement limit (where resonances may lie) is then
        solved by :func:`solve_exact` itself; any other band has no resonance and
        the batch answer is complete.
    minibands : bool
        Bands with repeat blocks go to :func:`solve_exact` (which computes the
        minibands); without it, batch results carry no minibands.
    scalar : bool
        Let one small band alone take the scalar path (plain floats).  The array
        path gives every band the same floats whatever else is in the batch; the
        scalar path agrees with it to ~1e-13 eV, not bit for bit.  Pass False
        where results must not depend on how a population is split.

    Returns
    -------
    list of Levels
        One per band, in order: the bound states as :func:`solve_exact` gives
        them (labels, energies, tolerances), minibands empty unless solved there.
    """
    bands = list(bands)
    xtol = min(ROOT_XTOL_EV, tolerance_eV / 100.0)
    out: list = [None] * len(bands)
    todo = []
    for i, b in enumerate(bands):
        if _needs_exact(b, quasi_bound, minibands):
            out[i] = solve_exact(b, tolerance_eV=tolerance_eV, wavefunctions=wavefunctions,
                                 grid_step_nm=grid_step_nm, quasi_bound=quasi_bound)
        else:
            todo.append(i)
    scalar = scalar and len(todo) == 1
    flat_i = [i for i in todo if all(p.kind == "flat" for p in bands[i].pieces)]
    sliced_i = [i for i in todo if i not in set(flat_i)]
    failed = []
    # flat bands: one level, exact slices
    rows = [_Rows(bands[i], 0) for i in flat_i]
    for i, r, (E, ok) in zip(flat_i, rows, _sliced_eigenvalues(rows, xtol, scalar)):
        if not ok:
            failed.append(i)
            continue
        out[i] = _levels_of(bands[i], E, np.full(E.size, float(xtol)), np.ones(E.size, bool),
                            E, r.slices() if wavefunctions else None, tolerance_eV,
                            wavefunctions, grid_step_nm, [])
    # sliced bands: Richardson over halved steps, each band stopping where it would alone
    if sliced_i:
        _richardson(bands, sliced_i, xtol, tolerance_eV, wavefunctions, grid_step_nm, scalar,
                    out, failed)
    for i in failed:
        out[i] = solve_exact(bands[i], tolerance_eV=tolerance_eV, wavefunctions=wavefunctions,
                             grid_step_nm=grid_step_nm, quasi_bound=quasi_bound)
    return out


def _richardson(bands, idx, xtol, tolerance_eV, wavefunctions, grid_step_nm, scalar, out,
                failed):
    """The exact solver's refinement loop for sliced bands, run on all of them at once."""
    st = {}
    rows = [_Rows(bands[i], 0) for i in idx]
    for i, r, (E, ok) in zip(idx, rows, _sliced_eigenvalues(rows, xtol, scalar)):
        if not ok:
            failed.append(i)
            continue
        st[i] = dict(levels=[E], e_lo=r.e_lo, rich_prev=None, E=E, half=np.full(E.size, xtol),
                     tol=np.full(E.size, float(xtol)), rows=r)
    active = list(st)
    for level in range(1, _MAX_LEVEL + 1):
        if not active:
            break
        rows = []
        for i in active:
            r = _Rows(bands[i], level)
            st[i]["e_lo"] = min(st[i]["e_lo"], r.e_lo)
            r.e_lo = st[i]["e_lo"]
            rows.append(r)
        nxt = []
        seeds = []
        for i in active:
            e = st[i]["levels"][-1]
            seeds.append(np.concatenate([e, 0.5 * (e[1:] + e[:-1])]))
        for i, r, (En, ok) in zip(active, rows, _sliced_eigenvalues(rows, xtol, scalar,
                                                                       seeds)):
            if not ok:
                failed.append(i)
                del st[i]
                continue
            s = st[i]
            Ep = s["levels"][-1]
            k = min(En.size, Ep.size)
            rich = (4 * En[:k] - Ep[:k]) / 3
            rp = s["rich_prev"]
            if rp is None or rp.size < k:
                est_new = np.abs(En[:k] - Ep[:k]) / 3
                if rp is not None:
                    est_new[:rp.size] = np.abs(rich[:rp.size] - rp[:rp.size])
            else:
                est_new = np.abs(rich[:k] - rp[:k])
            s["levels"].append(En)
            s["rich_prev"] = rich
            s["rows"] = r
            est = np.concatenate([est_new, np.full(En.size - k, np.inf)])
            s["E"] = np.concatenate([rich, En[k:]])
            s["tol"] = np.maximum(est, xtol)
            if not (np.all(s["tol"] <= tolerance_eV) and level >= 2):
                nxt.append(i)
        active = nxt
    for i, s in st.items():
        E, tol = s["E"], s["tol"]
        conv = tol <= tolerance_eV
        notes = []
        if E.size and not np.all(conv):
            notes.append("some states did not reach the requested tolerance "
                         f"(worst {float(np.max(tol)):.3g} eV)")
        out[i] = _levels_of(bands[i], E, tol, conv, s["levels"][-1],
                            s["rows"].slices() if wavefunctions else None, tolerance_eV,
                            wavefunctions, grid_step_nm, notes)


def count_bound_many(bands) -> np.ndarray:
    """Number of bound states of every band (node count at its confinement limit).

    The batched counting function at each band's confinement limit, on the slices
    of :func:`qwell.solvers.exact.count_states_below` (flat bands exact, sliced
    ones at 0.5 nm / 4).
    """
    bands = list(bands)
    out = np.zeros(len(bands), dtype=np.int64)
    groups: dict = {}
    rows = []
    for i, b in enumerate(bands):
        level = 0 if all(p.kind == "flat" for p in b.pieces) else 2
        r = _Rows(b, level)
        rows.append(r)
        groups.setdefault(r.n, []).append(i)
    for idx in groups.values():
        rs = [rows[i] for i in idx]
        V, M, G, H, C = (np.array([getattr(r, a) for r in rs]) for a in ("v", "m", "g", "h",
                                                                             "clad"))
        E = np.array([[r.lim] for r in rs])
        out[idx] = _count(V, M, G, H, C, E)[:, 0]
    return out
