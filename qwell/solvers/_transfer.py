"""Private transfer-matrix machinery of the exact solver.

A band is cut into slices of constant potential and mass ('flat' pieces are
one exact slice; 'linear' and 'smooth' pieces are cut into equal slices with
the potential, mass and gap taken at the slice midpoint, a symmetric scheme
whose eigenvalue error is even in the step).  Inside a slice the
BenDaniel–Duke equation ``-C d/dz (1/m) dpsi/dz + (V - E) psi = 0`` with
``C = hbar^2 / (2 m0)`` is solved analytically for the state vector
``(psi, u)``, ``u = psi'/m``, which is continuous at every interface.

Evanescent slices use *scaled* hyperbolic functions (everything divided by
``exp(kappa h)``), so no entry ever overflows; the dropped factor is returned
as a log-scale where it matters (traces, wavefunctions).

Units: eV, nm, m0.

References
----------
.. [1] D. J. BenDaniel and C. B. Duke, Phys. Rev. 152, 683 (1966).
.. [2] G. Bastard, "Superlattice band structure in the envelope-function
   approximation", Phys. Rev. B 24, 5693 (1981).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..constants import HBAR2_2M0_EV_NM2


#: Initial slice length of non-flat pieces [nm] (halved at every refinement level).
BASE_STEP_NM = 0.5
_MIN_MASS_FRACTION = 0.01


@dataclass(frozen=True)
class Slices:
    """Piecewise-constant approximation of a band (arrays of length n)."""

    z0_nm: np.ndarray       # slice starts
    h_nm: np.ndarray        # slice lengths
    v_eV: np.ndarray        # potential
    m_m0: np.ndarray        # band-edge mass
    g_eV: np.ndarray        # gap (inf where parabolic or band parabolic)
    piece: np.ndarray       # piece index
    exact: bool             # True when every piece is flat (no discretisation error)
    #: exactly repeating blocks ``(first slice, slices per period, periods)``: the
    #: slices of every period equal those of the first (see :func:`find_periods`)
    periods: tuple = ()

    @property
    def n(self) -> int:
        return int(self.h_nm.size)

    @property
    def z_end_nm(self) -> float:
        return float(self.z0_nm[-1] + self.h_nm[-1])


def build_slices(band, level: int = 0, *, z_lo_nm: float | None = None,
                 z_hi_nm: float | None = None) -> Slices:
    """Slice ``band`` (optionally only ``[z_lo_nm, z_hi_nm]``) at refinement ``level``.

    A flat piece is one slice with its own constants (no function evaluation);
    linear and smooth pieces are cut into ``max(2, ceil(t / 0.5 nm)) * 2**level``
    midpoint slices.
    """
    z0s, hs, vs, ms, gs, ps = [], [], [], [], [], []
    exact = True
    lo = band.z_start_nm if z_lo_nm is None else z_lo_nm
    hi = band.z_end_nm if z_hi_nm is None else z_hi_nm
    nonpar = band.nonparabolic
    for i, p in enumerate(band.pieces):
        a, b = max(p.z_start_nm, lo), min(p.z_end_nm, hi)
        if b - a <= 1e-12:
            continue
        if p.kind == "flat":
            z0s.append(np.array([a]))
            hs.append(np.array([b - a]))
            vs.append(np.array([float(p.edge_start_eV)]))
            ms.append(np.array([float(p.mass_m0)]))
            gs.append(np.array([np.inf if (p.gap_eV is None or not nonpar) else float(p.gap_eV)]))
            ps.append(np.array([i]))
            continue
        exact = False
        n = max(2, int(np.ceil((b - a) / BASE_STEP_NM))) * 2 ** level
        edges = np.linspace(a, b, n + 1)
        mid = 0.5 * (edges[:-1] + edges[1:])
        z0s.append(edges[:-1])
        hs.append(np.diff(edges))
        vs.append(p.potential(mid))
        ms.append(p.mass(mid))
        g = p.gap(mid)
        gs.append(np.full(n, np.inf) if (g is None or not nonpar) else g)
        ps.append(np.full(n, i))
    return Slices(np.concatenate(z0s), np.concatenate(hs), np.concatenate(vs),
                  np.concatenate(ms), np.concatenate(gs), np.concatenate(ps), exact)


def eff_mass(m_edge, v, g, energy):
    """Two-band energy-dependent mass m(E) = m (1 + (E - V)/Eg), clipped like qwell.bands."""
    f = 1.0 + (energy - v) / g
    if np.iscomplexobj(f):
        return m_edge * f  # analytic continuation for complex energies
    return m_edge * np.maximum(f, _MIN_MASS_FRACTION)


def cladding_kappa(v, m_edge, g, energy):
    """(kappa [1/nm], m(E) [m0]) of a semi-infinite cladding.

    Real energies: kappa = sqrt(m (V - E)/C) >= 0 (clipped at 0 above V).
    Complex energies: decaying branch (Re kappa > 0) below V, outgoing branch
    ``kappa = -i k`` above V.
    """
    m = eff_mass(m_edge, v, g, energy)
    if np.iscomplexobj(energy):
        x = m * (v - energy) / HBAR2_2M0_EV_NM2
        below = np.real(v - energy) > 0
        kap = np.where(below, np.sqrt(x + 0j), -1j * np.sqrt(-x + 0j))
        return kap, m
    return np.sqrt(np.maximum(m * (v - energy) / HBAR2_2M0_EV_NM2, 0.0)), m


def coefficients(sl: Slices, energies, lengths=None, sl_index=None):
    """Transfer-matrix entries over a length inside slices, for every energy.

    Parameters
    ----------
    sl : Slices
    energies : array, shape (nE,) (real or complex) [eV]
    lengths : array, optional
        Propagation lengths [nm], default the slice lengths; shape broadcast with
        (ns, nE) or given per point together with ``sl_index``.
    sl_index : array of int, optional
        Slice index of each length (then ``energies`` must broadcast with it).

    Returns
    -------
    a, b, c, d, logscale : arrays
        ``(psi, u)(x) = exp(logscale) * [[a, b], [c, d]] @ (psi, u)(0)``.
    """
    E = np.asarray(energies)
    if sl_index is None:
        v, m0, g, h = (x[:, None] for x in (sl.v_eV, sl.m_m0, sl.g_eV, sl.h_nm))
        E = E[None, :]
    else:
        v, m0, g = sl.v_eV[sl_index], sl.m_m0[sl_index], sl.g_eV[sl_index]
        h = None
    if lengths is not None:
        h = lengths
    if np.iscomplexobj(E):
        return _complex_coefficients(m0, v, g, h, E)
    m = eff_mass(m0, v, g, E) if np.any(np.isfinite(g)) else m0 + 0.0 * E
    q = m * (E - v) / HBAR2_2M0_EV_NM2
    osc = q > 0
    k = np.sqrt(np.abs(q))
    x = k * h
    shape = x.shape
    a = np.empty(shape)
    s = np.empty(shape)
    ls = x.copy()
    if osc.all():
        # oscillatory everywhere: cos(kx), sin(kx)/k (k > 0 strictly)
        np.cos(x, out=a)
        np.divide(np.sin(x), k, out=s)
        ls[...] = 0.0
    else:
        # evanescent entries scaled by exp(-x): cosh -> (1 + e^-2x)/2,
        # sinh/kappa -> (1 - e^-2x)/(2 kappa), with -expm1 for small x; kappa = 0 gives h
        hb = np.broadcast_to(h, shape)
        ev = ~osc
        xe, ke = x[ev], k[ev]
        pos = ke > 0
        a[ev] = 0.5 * (1.0 + np.exp(-2.0 * xe))
        s[ev] = np.where(pos, -np.expm1(-2.0 * xe) / (2.0 * np.where(pos, ke, 1.0)), hb[ev])
        if osc.any():
            xo = x[osc]
            a[osc] = np.cos(xo)
            s[osc] = np.sin(xo) / k[osc]
            ls[osc] = 0.0
    return a, m * s, -(q / m) * s, a, ls


def _complex_coefficients(m0, v, g, h, E):
    """:func:`coefficients` at complex energies (resonances), analytic in E.

    Scaled ``cosh = 1 + expm1(-2x)/2`` and ``sinh/kappa = -expm1(-2x)/(2 kappa)``
    with ``x = kappa h``, ``kappa^2 = m (V - E)/C``; ``q/m = (E - V)/C`` (no
    complex division by the mass).  Temporaries are reused in place.
    """
    de = E - v
    if np.any(np.isfinite(g)):
        m = de / g
        m += 1.0
        m *= m0  # two-band mass m (1 + (E - V)/Eg), continued analytically
    else:
        m = m0 + 0.0 * de
    x = de * m
    x *= -1.0 / HBAR2_2M0_EV_NM2
    np.sqrt(x, out=x)
    x *= h
    em1 = np.multiply(x, -2.0)
    np.expm1(em1, out=em1)
    a = em1 * 0.5
    a += 1.0
    zero = x == 0
    with np.errstate(invalid="ignore", divide="ignore"):
        s = em1 / x
    s *= -0.5
    if zero.any():
        s[zero] = 1.0  # sinh(kappa h)/(kappa h) -> 1
    s *= h
    de *= s
    de *= -1.0 / HBAR2_2M0_EV_NM2
    m *= s
    return a, m, de, a, x


def subset(sl: Slices, lo: int, hi: int) -> Slices:
    """Slices ``lo:hi`` (without period information)."""
    return Slices(sl.z0_nm[lo:hi], sl.h_nm[lo:hi], sl.v_eV[lo:hi], sl.m_m0[lo:hi],
                  sl.g_eV[lo:hi], sl.piece[lo:hi], sl.exact)


def find_periods(sl: Slices, blocks) -> Slices:
    """``sl`` with the exactly repeating blocks among ``blocks`` recorded in ``periods``.

    ``blocks`` are ``(z_start_nm, period_nm, count)``.  A block is kept when its
    slices start at ``z_start_nm``, split into ``count`` runs of equal length and
    every run has the same thicknesses, potentials, masses and gaps as the first
    (to 1e-12 relative, i.e. the same layers; a field or charge breaks this).
    """
    found = []
    for z0, d, count in blocks:
        if count < 2:
            continue
        lo = int(np.searchsorted(sl.z0_nm, z0 - 1e-9))
        if lo >= sl.n or abs(sl.z0_nm[lo] - z0) > 1e-9:
            continue
        hi = int(np.searchsorted(sl.z0_nm, z0 + count * d - 1e-9))
        if (hi - lo) % count or hi == lo:
            continue
        p = (hi - lo) // count
        ok = True
        for arr in (sl.h_nm, sl.v_eV, sl.m_m0, sl.g_eV):
            blk = arr[lo:hi].reshape(count, p)
            first = blk[:1]
            fin = np.isfinite(first)
            if not (np.all(np.isfinite(blk) == fin) and np.allclose(
                    np.where(fin, blk, 0.0), np.where(fin, first, 0.0), rtol=1e-12, atol=1e-12)):
                ok = False
                break
        if ok and not any(lo < b0 + bp * bn and b0 < hi for b0, bp, bn in found):
            found.append((lo, p, count))
    return Slices(sl.z0_nm, sl.h_nm, sl.v_eV, sl.m_m0, sl.g_eV, sl.piece, sl.exact,
                  tuple(sorted(found)))


def runs(sl: Slices, lo: int = 0, hi: int | None = None):
    """Cover slices ``lo:hi`` by ``(a, b, reps)``: slices ``a:b`` taken ``reps`` times in a row.

    Whole periods of a block in ``sl.periods`` come as one entry with
    ``reps`` > 1; everything else (partial periods included) as ``reps = 1``.
    """
    hi = sl.n if hi is None else hi
    out = []
    pos = lo
    for s, p, r in sl.periods:
        e = s + p * r
        a, b = max(pos, s), min(hi, e)
        if a >= b:
            continue
        k0 = -(-(a - s) // p)
        k1 = (b - s) // p
        if k1 - k0 < 2:
            continue  # fewer than two whole periods: plain slices
        if pos < s + k0 * p:
            out.append((pos, s + k0 * p, 1))
        out.append((s + k0 * p, s + k0 * p + p, k1 - k0))
        pos = s + k1 * p
    if pos < hi:
        out.append((pos, hi, 1))
    return out


def _renorm4(a, b, c, d):
    s = np.maximum(np.maximum(np.abs(a), np.abs(b)), np.maximum(np.abs(c), np.abs(d)))
    s = np.where(s > 0, s, 1.0)
    return a / s, b / s, c / s, d / s


def matrix_power(a, b, c, d, n: int):
    """``[[a, b], [c, d]] ** n`` by repeated squaring, each step rescaled (direction only).

    Components are arrays over energies; only the matrix up to a positive factor
    is returned (enough to carry a state vector whose length is renormalised).
    """
    ra, rb, rc, rd = (np.ones_like(a), np.zeros_like(a), np.zeros_like(a), np.ones_like(a))
    while n:
        if n & 1:
            ra, rb, rc, rd = _renorm4(a * ra + b * rc, a * rb + b * rd, c * ra + d * rc,
                                      c * rb + d * rd)
        n >>= 1
        if n:
            a, b, c, d = _renorm4(a * a + b * c, a * b + b * d, c * a + d * c, c * b + d * d)
    return ra, rb, rc, rd


def _block_size(n_e: int) -> int:
    """Slices per block so that a block's coefficient arrays hold ~2e6 numbers."""
    return max(16, 2_000_000 // max(n_e, 1))


def _reduce(a, b, c, d, *, renorm: bool, track_log: bool):
    """Pairwise product (later @ earlier) of 2x2 matrices given by components (ns, nE).

    Each level multiplies neighbouring pairs in place of fresh temporaries (an
    odd last matrix is carried to the next level unchanged, the same numbers as
    a product with the identity).
    """
    logs = 0.0
    n = a.shape[0]
    while n > 1:
        h2 = 2 * (n // 2)
        a0, b0, c0, d0 = a[0:h2:2], b[0:h2:2], c[0:h2:2], d[0:h2:2]
        a1, b1, c1, d1 = a[1:h2:2], b[1:h2:2], c[1:h2:2], d[1:h2:2]
        na = a1 * a0
        na += b1 * c0
        nb = a1 * b0
        nb += b1 * d0
        nc = c1 * a0
        nc += d1 * c0
        nd = c1 * b0
        nd += d1 * d0
        if n % 2:
            na, nb, nc, nd = (np.concatenate([x, y[-1:]]) for x, y in ((na, a), (nb, b),
                                                                       (nc, c), (nd, d)))
        a, b, c, d = na, nb, nc, nd
        n = a.shape[0]
        if renorm:
            s = np.maximum(np.maximum(np.abs(a), np.abs(b)), np.maximum(np.abs(c), np.abs(d)))
            s = np.where(s > 0, s, 1.0)
            a, b, c, d = a / s, b / s, c / s, d / s
            if track_log:
                logs = logs + np.log(s).sum(axis=0)
    return a[0], b[0], c[0], d[0], logs


def product(sl: Slices, energies, *, track_log: bool = False, backward: bool = False):
    """Transfer matrix of all slices (later @ earlier), by pairwise reduction.

    Real energies: each partial product is renormalised (bounded); the log of
    the dropped positive factors is returned when ``track_log``.  Complex
    energies: no renormalisation, so the result stays analytic in E.

    With ``backward`` the product of the inverse slice matrices from the last
    slice to the first (maps the state at the end to the state at the start).

    Returns
    -------
    M : array (nE, 2, 2)
    log_scale : array (nE,) (zeros unless track_log)
    """
    a, b, c, d, ls = coefficients(sl, energies)
    if backward:
        # inverse transfer, from the far end back to the start: M(-h) = [[a, -b], [-c, d]]
        a, b, c, d, ls = a[::-1], -b[::-1], -c[::-1], d[::-1], ls[::-1]
    cplx = np.iscomplexobj(a)
    nE = a.shape[1]
    if cplx:
        if track_log:
            f = np.exp(ls)
            a, b, c, d = a * f, b * f, c * f, d * f
        logs = np.zeros(nE, dtype=complex)
    else:
        logs = ls.sum(axis=0) if track_log else np.zeros(nE)
    a, b, c, d, lg = _reduce(a, b, c, d, renorm=not cplx, track_log=track_log and not cplx)
    M = np.empty((nE, 2, 2), dtype=a.dtype)
    M[:, 0, 0], M[:, 0, 1], M[:, 1, 0], M[:, 1, 1] = a, b, c, d
    return M, logs + lg


def carry_runs(sl: Slices, energies, p0, u0, lo: int, hi: int, *, backward: bool = False):
    """:func:`carry` using the periods of ``sl``: one period's matrix to the power of the repeats.

    Runs of plain slices are reduced pairwise in blocks of bounded memory; a run
    of whole periods costs one period's product and ``log2(reps)`` squarings.
    Returns the renormalised ``(psi, u)``.
    """
    E = np.asarray(energies, dtype=float)
    p = np.asarray(p0, dtype=float) + 0.0 * E
    u = np.asarray(u0, dtype=float) + 0.0 * p
    pieces = runs(sl, lo, hi)
    if backward:
        pieces = pieces[::-1]
    bs = _block_size(E.size)
    for a0, b0, reps in pieces:
        blocks = [(x, min(x + bs, b0)) for x in range(a0, b0, bs)]
        if reps > 1 and len(blocks) > 1:
            blocks = [(a0, b0)]  # a period longer than a block: one product anyway
        mats = []
        for x, y in blocks:
            ca, cb, cc, cd, _ = coefficients(subset(sl, x, y), E)
            mats.append(_reduce(ca, cb, cc, cd, renorm=True, track_log=False)[:4])
        if backward:
            mats = mats[::-1]
        for ma, mb, mc, md in mats:
            if reps > 1:
                ma, mb, mc, md = matrix_power(ma, mb, mc, md, reps)
            if backward:  # inverse up to a positive factor: the adjugate
                ma, mb, mc, md = md, -mb, -mc, ma
            p, u = ma * p + mb * u, mc * p + md * u
            s = np.maximum(np.abs(p), np.abs(u))
            s = np.where(s > 0, s, 1.0)
            p, u = p / s, u / s
    return p, u


def count_zeros(sl: Slices, energies, p0, u0):
    """Zeros of psi in all slices (x in (0, h]) and the final state, memory O(n_E).

    The solution started at ``(p0, u0)`` is carried slice by slice.  Oscillatory
    slice with ``k h = m pi + r`` (``0 <= r < pi``): the scaled angle turns by
    exactly ``k h``, so the zeros number ``m`` plus one more when
    ``(-1)^m psi_0 psi_1 < 0`` (or psi_1 = 0 != psi_0); evanescent slice
    (``m = 0``): one zero exactly when psi changes sign.  No angle is evaluated
    per step, so the count of a periodic block reuses one period's
    coefficients for every period (the count composes period by period).

    Returns
    -------
    n : int array (n_E,)
    p, u : arrays (n_E,), the final state vector (renormalised).
    """
    E = np.asarray(energies, dtype=float)
    p = np.asarray(p0, dtype=float) + 0.0 * E
    u = np.asarray(u0, dtype=float) + 0.0 * p
    n = np.zeros(E.size, dtype=np.int64)
    bs = _block_size(E.size)
    for a0, b0, reps in runs(sl):
        blocks = [(a0, b0)] if reps > 1 else [(x, min(x + bs, b0)) for x in range(a0, b0, bs)]
        for x, y in blocks:
            sub = subset(sl, x, y)
            ca, cb, cc, cd, _ = coefficients(sub, E)
            m = eff_mass(sub.m_m0[:, None], sub.v_eV[:, None], sub.g_eV[:, None], E[None, :])
            q = m * (E[None, :] - sub.v_eV[:, None]) / HBAR2_2M0_EV_NM2
            turns = np.where(q > 0, np.floor(np.sqrt(np.maximum(q, 0.0)) * sub.h_nm[:, None]
                                             / np.pi), 0.0)
            sgn = 1.0 - 2.0 * np.mod(turns, 2.0)
            n += reps * turns.sum(axis=0).astype(np.int64)
            for _ in range(reps):
                for j in range(y - x):
                    p1 = ca[j] * p + cb[j] * u
                    u = cc[j] * p + cd[j] * u
                    n += (sgn[j] * p * p1 < 0) | ((p1 == 0) & (p != 0))
                    p = p1
                    if j % 4 == 3:
                        s = np.maximum(np.abs(p), np.abs(u))
                        s = np.where(s > 0, s, 1.0)
                        p, u = p / s, u / s
                s = np.maximum(np.abs(p), np.abs(u))
                s = np.where(s > 0, s, 1.0)
                p, u = p / s, u / s
    return n, p, u


def carry(sl: Slices, energies, p0, u0, lo: int, hi: int, *, backward: bool = False,
          coef=None):
    """State vector ``(psi, u)`` carried across slices ``lo:hi`` (real energies, bounded).

    Forward: from the start of slice ``lo`` to the end of slice ``hi - 1``;
    backward: from the end of slice ``hi - 1`` to the start of slice ``lo``.
    The result is renormalised (only its direction is meaningful).  Few slices
    are stepped one by one; many are reduced pairwise first.  ``coef`` may hold
    :func:`coefficients` of all slices of ``sl`` at ``energies`` (reused).
    """
    p = np.asarray(p0, dtype=float) + 0.0 * np.asarray(energies, dtype=float)
    u = np.asarray(u0, dtype=float) + 0.0 * p
    if hi <= lo:
        return p, u
    if coef is None:
        sub = sl if (lo == 0 and hi == sl.n) else subset(sl, lo, hi)
        a, b, c, d, _ = coefficients(sub, energies)
    else:
        a, b, c, d = (x[lo:hi] for x in coef[:4])
    if backward:
        a, b, c, d = a[::-1], -b[::-1], -c[::-1], d[::-1]
    if a.shape[0] > 8:
        a, b, c, d, _ = _reduce(a, b, c, d, renorm=True, track_log=False)
        return a * p + b * u, c * p + d * u
    for j in range(a.shape[0]):
        p, u = a[j] * p + b[j] * u, c[j] * p + d[j] * u
        if j % 4 == 3:
            s = np.maximum(np.abs(p), np.abs(u))
            s = np.where(s > 0, s, 1.0)
            p, u = p / s, u / s
    return p, u


def propagate_states(sl: Slices, energies, psi0, u0, *, backward: bool = False):
    """Boundary states of the solution started at one end (real energies).

    Returns arrays (ns+1, nE) psi, u (each boundary vector normalised to max 1)
    and log-scale (ns+1, nE) of the true amplitude relative to the start, plus
    the per-slice coefficients.
    """
    coef = coefficients(sl, energies)
    a, b, c, d, ls = coef
    ns = sl.n
    nE = np.asarray(energies).size
    P = np.empty((ns + 1, nE))
    U = np.empty((ns + 1, nE))
    L = np.zeros((ns + 1, nE))
    p = np.broadcast_to(np.asarray(psi0, dtype=float), (nE,)).copy()
    u = np.broadcast_to(np.asarray(u0, dtype=float), (nE,)).copy()
    s = np.maximum(np.abs(p), np.abs(u))
    p, u = p / s, u / s
    lg = np.log(s)
    order = range(ns - 1, -1, -1) if backward else range(ns)
    pos = ns if backward else 0
    P[pos], U[pos], L[pos] = p, u, lg
    for j in order:
        if backward:
            p, u = a[j] * p - b[j] * u, -c[j] * p + d[j] * u
            pos = j
        else:
            p, u = a[j] * p + b[j] * u, c[j] * p + d[j] * u
            pos = j + 1
        s = np.maximum(np.abs(p), np.abs(u))
        p, u = p / s, u / s
        lg = lg + np.log(s) + ls[j]
        P[pos], U[pos], L[pos] = p, u, lg
    return P, U, L, coef


def count_nodes(sl: Slices, energies, P, U) -> np.ndarray:
    """Number of zeros of psi inside the slices (x in (0, h]), from forward boundary states.

    Oscillatory slice: psi = R sin(k x + phi0) with phi0 the local angle of the
    start vector taken in [0, pi); the zeros in (0, h] number
    floor((phi0 + k h)/pi).  Evanescent slice: psi has at most one zero, present
    exactly when psi changes sign across the slice.
    """
    E = np.asarray(energies)[None, :]
    m = eff_mass(sl.m_m0[:, None], sl.v_eV[:, None], sl.g_eV[:, None], E)
    q = m * (E - sl.v_eV[:, None]) / HBAR2_2M0_EV_NM2
    osc = q > 0
    k = np.sqrt(np.where(osc, q, 1.0))
    p0, u0, p1 = P[:-1], U[:-1], P[1:]
    phi0 = np.mod(np.arctan2(p0, m * u0 / k), np.pi)
    n_osc = np.floor((phi0 + k * sl.h_nm[:, None]) / np.pi)
    n_ev = ((p0 * p1 < 0) | ((p1 == 0) & (p0 != 0))).astype(float)
    return np.where(osc, n_osc, n_ev).sum(axis=0).astype(np.int64)


def sample_in_slices(sl: Slices, energy, psi_b, u_b, j, x, join=None):
    """Envelope at distance ``x`` into slice ``j`` from the state at the slice boundaries.

    Pure function over arrays (one energy, any number of points).

    Parameters
    ----------
    sl : Slices
    energy : float
        Carrier energy [eV].
    psi_b, u_b : arrays (ns+1,)
        ``psi`` and ``u = psi'/m`` of the solution at every slice boundary.
    j : array of int
        Slice of each point.
    x : array
        Distance from the start of slice ``j`` [nm], ``0 <= x <= h_j``.
    join : tuple ``(j_m, psi, u)``, optional
        Boundary ``j_m`` where two solutions were joined and the values of the
        later one there: slice ``j_m`` starts from these instead of
        ``psi_b[j_m]``, ``u_b[j_m]`` (every slice is then one solution).

    Notes
    -----
    Oscillatory slice: carried from its left boundary,
    ``psi = cos(k x) psi_j + (m/k) sin(k x) u_j`` (bounded).  Evanescent slice:
    interpolated between the two boundary values,
    ``psi = [psi_j sinh(kappa (h - x)) + psi_{j+1} sinh(kappa x)] / sinh(kappa h)``
    in scaled form (no growth in either direction, so a thick barrier between
    two lobes is evaluated as accurately as its end values); ``kappa = 0``
    gives the straight line.
    """
    j = np.asarray(j)
    x = np.asarray(x, dtype=float)
    v, m0, g, h = sl.v_eV[j], sl.m_m0[j], sl.g_eV[j], sl.h_nm[j]
    m = eff_mass(m0, v, g, energy)
    q = m * (energy - v) / HBAR2_2M0_EV_NM2
    k = np.sqrt(np.abs(q))
    p0, u0 = psi_b[j], u_b[j]
    if join is not None:
        at = j == join[0]
        p0, u0 = np.where(at, join[1], p0), np.where(at, join[2], u0)
    out = np.empty(x.shape)
    osc = q > 0
    if osc.any():
        ko, xo = k[osc], x[osc]
        out[osc] = np.cos(ko * xo) * p0[osc] + m[osc] * np.sin(ko * xo) / ko * u0[osc]
    ev = ~osc
    if ev.any():
        ke, xe, he, je = k[ev], x[ev], h[ev], j[ev]
        pos = ke * he > 0
        kp = np.where(pos, ke, 1.0)
        den = np.where(pos, -np.expm1(-2.0 * kp * he), 1.0)
        w0 = np.where(pos, np.exp(-kp * xe) * -np.expm1(-2.0 * kp * (he - xe)) / den,
                      (he - xe) / np.where(he > 0, he, 1.0))
        w1 = np.where(pos, np.exp(-kp * (he - xe)) * -np.expm1(-2.0 * kp * xe) / den,
                      xe / np.where(he > 0, he, 1.0))
        out[ev] = w0 * p0[ev] + w1 * psi_b[je + 1]
    return out
