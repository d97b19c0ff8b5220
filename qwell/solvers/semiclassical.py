"""Semiclassical (WKB) subband estimator.

The estimator works on a :class:`qwell.bands.Band` in the carrier convention
(bound states lie above the bottom of ``V``).  It is fully independent of the
exact solver.

Quantisation rule
-----------------
In a classically allowed region ``[z_L, z_R]`` (``E > V``) with local wave
number ``k(z) = sqrt(2 m(z, E) (E - V(z))) / hbar`` the envelope far from the
ends is ``psi ~ sin(int_z^{z_R} k dz' + delta_R)`` and, from the other end,
``sin(int_{z_L}^z k dz' + delta_L)``.  Both agree when

    Phi(E) = int_{z_L}^{z_R} k dz = n pi - delta_L - delta_R,    n = 1, 2, ...

Written with the reflection phases ``phi = pi - 2 delta`` of the two ends this
is ``Phi = (n - 1) pi + (phi_L + phi_R) / 2``.  The end phases are

* smooth turning point: ``delta = pi/4`` (``phi = pi/2``, the Maslov index
  1/2 of each smooth point) [1]_, [2]_;
* hard wall (infinite barrier): ``delta = 0`` (``phi = pi``);
* abrupt finite step into a barrier ``V_b > E`` with BenDaniel-Duke matching
  (``psi`` and ``psi'/m`` continuous) [3]_, [4]_:
  ``delta = arctan(m_b k / (m_w kappa))``, i.e.
  ``tan(phi/2) = m_w kappa / (m_b k)``, with ``k``, ``m_w`` on the well side
  and ``kappa = sqrt(2 m_b (V_b - E)) / hbar``, ``m_b`` on the barrier side,
  all at the step.  For a flat well this is exactly the even/odd
  transcendental equations of the finite square well [4]_; for
  ``kappa -> inf`` it tends to the hard wall.

Hence two smooth points give ``(n - 1/2) pi``, a hard wall and a smooth point
``(n - 1/4) pi``, two hard walls ``n pi``.  The function
``G(E) = (Phi + delta_L + delta_R) / pi`` increases with ``E``; the n-th state
of a region is at ``G(E) = n``.

Uniform step phase.  When the potential on the well side rises linearly
towards a step (a well under a field), the turning point and the step can be
close and neither rule holds.  The end phase is then taken from the exact
solution of the linear potential (Airy functions, [5]_) matched to the
decaying barrier wave with the BenDaniel-Duke conditions: with
``l = (hbar^2 / (2 m_w F))^(1/3)``, ``xi_s = (V(z_s-) - E) / (F l)``,
``w = Ai - i Bi`` and ``W = w'(xi_s) + q l w(xi_s)``, ``q = m_w kappa / m_b``:

* turning point inside the well layer (``xi_s > 0``; ``Phi`` runs to it):
  ``delta = -pi/4 - arg W``;
* step reached (``xi_s <= 0``; ``Phi`` runs to the step):
  ``delta = pi/2 - arg(-W exp(-i(zeta_s + pi/4)))``,
  ``zeta_s = (2/3)(-xi_s)^(3/2)``.

Both are continuous at ``xi_s = 0`` and tend to ``pi/4`` (``xi_s -> +inf``)
and to the step rule above (``xi_s -> -inf``), so the estimate has no jump
when a level crosses the energy of a layer edge.

Several regions.  Each classically allowed region is quantised on its own
with its end phases (a step phase treats the barrier as semi-infinite).  A
state is flagged as unreliable when a neighbouring barrier's tunnelling
factor ``T = exp(-int kappa dz)`` exceeds ``0.1`` or when a level of the
neighbouring region lies so close that the two-level admixture
``t / |E - E'|`` exceeds 0.1, with the coupling estimated from the doublet
splitting of a symmetric double well [1]_ (§50, problem 3),
``Delta = (hbar omega / pi) T``, ``t = Delta / 2`` and ``hbar omega`` the local
level spacing ``1 / (dG/dE)`` (geometric mean of the two regions).

Validity figure.  ``State.validity`` is the largest of

* the smallest ``|d lambda/dz| / (2 pi) = |d(1/k)/dz|`` over the region (the
  best local WKB quality anywhere in the region: it is 0 in a flat well and
  0.14 for the ground state of a triangular well with a hard wall, whose
  semiclassical energy is 0.8 % low (0.17 from the next item); it is 0.42 for the ground state of a
  V-shaped well, 10 % off);
* the largest ``|d(1/k)/dz|`` at points more than two local Airy lengths
  from every smooth turning point (near a linear turning point this is at
  most ``1/(2 * 2^(3/2)) = 0.18``; larger values mean fast variation of the
  potential inside the region);
* the largest reflection amplitude ``|(k1/m1 - k2/m2)/(k1/m1 + k2/m2)|`` of
  an abrupt step inside the region (ignored by the quantisation rule).

Above ``VALIDITY_THRESHOLD = 0.25`` (worse than a ground state of a
triangular well) a :class:`~qwell.errors.ValidityWarning` is issued and noted.
This figure does not see the error of the ground state of a smooth, flat
bottomed anharmonic well (e.g. quartic); treat such ground states with care.

Numerics.  Turning points come from the pieces: analytic for linear pieces,
a vectorised Illinois iteration inside monotone stretches of smooth pieces
(split at their extrema; next to an extremum ``V_x`` the iteration runs on
``sqrt(V - V_x) - sqrt(E - V_x)``, which is nearly linear there).  Phase integrals are closed forms for flat pieces and parabolic
linear pieces, else Gauss-Legendre quadrature after the substitution
``z = a + (b - a)(1 - cos theta)/2``, which removes the square-root end
singularities, with node doubling until two estimates agree to
``PHASE_TOLERANCE_RAD`` (energy error below ``1e-9`` times the level
spacing).  Everything is vectorised across energies.  Energies are split into segments
between the "critical" energies (potential values at layer edges and at the
extrema of smooth layers), inside which the region structure is fixed and
``G`` is continuous and increasing; ``G`` on a 33-point grid per segment
brackets every root, inverse quadratic interpolation gives a start, and
vectorised secant rounds end with a bracket of width ``tolerance_eV``
(Illinois iteration as fallback).  Where a critical energy makes the count
``sum floor(G)`` drop (e.g. a shallow shoulder becoming allowed) the
running maximum of the count is used, so no state is listed twice, and the
notes name the energy; a count that jumps up there gives a state at that
energy marked "ill-defined".  The validity figures of all states are computed
together, vectorised over states and sample points, element by element.

Bands made only of flat pieces take a closed-form path with the same rule:
``G`` of every region of every segment is a sum of ``k_j L_j`` and two
arctangent step phases (for a nonparabolic band with the energy-dependent
masses ``m_j(E) = m_j (1 + (E - V_j)/Eg_j)`` of every piece in ``k_j``,
``kappa`` and the step phases, still closed form per energy [6]_), evaluated for all regions on one cosine-spaced grid
(points crowd towards the segment ends, where ``G`` has square-root
behaviour); all roots are then refined together by a safeguarded secant
iteration whose rounds evaluate ``G`` at ``c -/+ tolerance_eV/2`` (a bracket
verified by the sign change), with bisection as the fallback.  The validity
figure is then the largest internal step reflection amplitude and the
tunnelling factor ``exp(-sum kappa_j L_j)``.  The per-band data of this path
(pieces, regions, coefficient arrays) is kept between calls for the same
:class:`~qwell.bands.Band` object (looked up by identity, released with it).

Wavefunctions are not provided (``State.psi`` and ``State.z_nm`` are None,
``layer_probability`` is empty).

References
----------
.. [1] L. D. Landau and E. M. Lifshitz, Quantum Mechanics (Non-relativistic
   Theory), 3rd ed., Pergamon (1977), §47-§50.
.. [2] M. V. Berry and K. E. Mount, "Semiclassical approximations in wave
   mechanics", Rep. Prog. Phys. 35, 315 (1972).
.. [3] D. J. BenDaniel and C. B. Duke, "Space-charge effects on electron
   tunneling", Phys. Rev. 152, 683 (1966).
.. [4] G. Bastard, "Superlattice band structure in the envelope-function
   approximation", Phys. Rev. B 24, 5693 (1981).
.. [5] M. Abramowitz and I. A. Stegun, Handbook of Mathematical Functions,
   NBS (1964), §10.4 (Airy functions).
.. [6] D. F. Nelson, R. C. Miller and D. A. Kleinman, "Band nonparabolicity
   effects in semiconductor quantum wells", Phys. Rev. B 35, 7770 (1987).
"""

from __future__ import annotations

import math
import warnings
import weakref
from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import eigh_tridiagonal

from ..bands import _MIN_MASS_FRACTION, Band
from ..constants import HBAR2_2M0_EV_NM2
from ..errors import ParameterError, ValidityWarning
from .results import Levels, State

__all__ = [
    "solve_semiclassical",
    "quantisation_phase",
    "RegionPhase",
    "QuantisationPhase",
    "HBAR2_2M0_EV_NM2",
    "VALIDITY_THRESHOLD",
    "TUNNEL_FACTOR_LIMIT",
    "PHASE_TOLERANCE_RAD",
]

#: Validity figure above which a ValidityWarning is issued.
VALIDITY_THRESHOLD = 0.25
#: Tunnelling factor exp(-int kappa dz) above which a barrier is "not opaque".
TUNNEL_FACTOR_LIMIT = 0.1
#: Admixture t/|dE| above which two levels of neighbouring regions are "resonant".
MIXING_LIMIT = 0.1
#: Agreement required between successive quadrature estimates of a phase integral [rad].
PHASE_TOLERANCE_RAD = 1e-10

_SCAN_POINTS = 33
#: |G - n| below which an energy counts as on the root (G carries ~1e-13 rounding).
_G_NOISE = 1e-11
_GL_START = 16
_GL_MAX = 4096
_GL_CACHE: dict = {}


#: Above this order the Gauss-Legendre nodes come from a tridiagonal eigen-solve (O(n^2))
#: instead of numpy's dense companion matrix (O(n^3): ~10 s at n = 2048 on 2 cores).
_GL_DENSE_MAX = 256


def gauss_legendre(n: int):
    """Gauss-Legendre nodes and weights on [-1, 1], as ``numpy.polynomial.legendre.leggauss``.

    Up to ``_GL_DENSE_MAX`` points this is ``leggauss`` itself.  Above it, the eigenvalues of
    the same symmetric (scaled) companion matrix, tridiagonal with off-diagonal
    ``k / sqrt(4 k^2 - 1)`` (Golub-Welsch), come from ``scipy.linalg.eigh_tridiagonal``;
    the Newton step, weights and symmetrisation are then those of ``leggauss``.

    References
    ----------
    .. [1] G. H. Golub and J. H. Welsch, "Calculation of Gauss quadrature rules",
       Math. Comp. 23, 221 (1969).
    """
    if n <= _GL_DENSE_MAX:
        return np.polynomial.legendre.leggauss(n)
    leg = np.polynomial.legendre
    c = np.zeros(n + 1)
    c[-1] = 1.0
    k = np.arange(1.0, n)
    x = eigh_tridiagonal(np.zeros(n), k / np.sqrt(4.0 * k * k - 1.0), eigvals_only=True)
    # one Newton step and the weights, as numpy's leggauss
    dy = leg.legval(x, c)
    df = leg.legval(x, leg.legder(c))
    x -= dy / df
    fm = leg.legval(x, c[1:])
    fm /= np.abs(fm).max()
    df /= np.abs(df).max()
    w = 1 / (fm * df)
    w = (w + w[::-1]) / 2
    x = (x - x[::-1]) / 2
    w *= 2.0 / w.sum()
    return x, w


def _gl_theta(n: int):
    """Gauss-Legendre nodes/weights on theta in [0, pi] and the cos map."""
    if n not in _GL_CACHE:
        x, w = gauss_legendre(n)
        theta = 0.5 * np.pi * (x + 1.0)
        t = 0.5 * (1.0 - np.cos(theta))          # position fraction in (0, 1)
        wt = 0.5 * np.pi * w * 0.5 * np.sin(theta)  # dt = sin(theta)/2 dtheta
        _GL_CACHE[n] = (t, wt)
    return _GL_CACHE[n]


# ---------------------------------------------------------------------------
# Elements: monotone stretches of the pieces
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class _Element:
    z_a: float
    z_b: float
    piece: int
    v_a: float          # V at z_a+ (one-sided) [eV]
    v_b: float          # V at z_b- [eV]
    kind: str           # 'flat', 'linear', 'smooth'
    junction_a: bool    # z_a is a piece boundary (or band start)
    junction_b: bool
    z_table: np.ndarray | None = field(default=None, compare=False, repr=False)
    v_table: np.ndarray | None = field(default=None, compare=False, repr=False)


def _piece_mass(band: Band, piece, z, energy):
    """m(z, E) [m0] of one piece (same two-band rule as Band.mass)."""
    m = piece.mass(z)
    if band.nonparabolic:
        g = piece.gap(z)
        if g is not None:
            factor = 1.0 + (energy - piece.potential(z)) / g
            m = m * np.maximum(factor, _MIN_MASS_FRACTION)
    return m


def _slope(piece, z_nm: float, side: int) -> float:
    """dV/dz [eV/nm] of a piece at z, one-sided inside the piece."""
    if piece.kind != "smooth":
        return float(piece.edge_slope_eV_per_nm)
    h = 1e-5 * piece.thickness_nm
    z0 = z_nm if side > 0 else z_nm - 2 * h
    v = piece.potential(np.array([z0, z0 + h, z0 + 2 * h]))
    if side > 0:
        return float((-3 * v[0] + 4 * v[1] - v[2]) / (2 * h))
    return float((v[0] - 4 * v[1] + 3 * v[2]) / (2 * h))


def _build_elements(band: Band) -> list:
    els = []
    for ip, p in enumerate(band.pieces):
        a, b = p.z_start_nm, p.z_end_nm
        if p.kind != "smooth":
            v0 = float(p.edge_start_eV)
            slope = float(p.edge_slope_eV_per_nm)     # Piece.potential uses it for both kinds
            v1 = v0 + slope * (b - a) if slope != 0.0 else v0
            els.append(_Element(a, b, ip, v0, v1, "linear" if slope != 0.0 else "flat",
                                True, True))
            continue
        z = np.linspace(a, b, 513)
        v = p.potential(z)
        d = np.sign(np.diff(v))
        cuts = [a]
        for i in range(1, len(d)):
            if d[i] != d[i - 1] and d[i] != 0 and d[i - 1] != 0:
                lo, hi = z[i - 1], z[i + 1]
                sgn = 1.0 if d[i - 1] < 0 else -1.0   # minimum if falling then rising
                from scipy import optimize as _opt  # heavy import (~90 ms): only graded pieces need it
                r = _opt.minimize_scalar(lambda x, sgn=sgn, p=p:
                                         sgn * float(p.potential(np.array([x]))[0]),
                                         bounds=(lo, hi), method="bounded",
                                         options={"xatol": 1e-12 * max(1.0, abs(b - a))})
                if cuts[-1] < r.x < b:
                    cuts.append(float(r.x))
        cuts.append(b)
        for j in range(len(cuts) - 1):
            za, zb = cuts[j], cuts[j + 1]
            va, vb = p.potential(np.array([za, zb]))
            zt = np.linspace(za, zb, 129)
            vt = p.potential(zt)
            vt[0], vt[-1] = va, vb
            els.append(_Element(za, zb, ip, float(va), float(vb), "smooth", j == 0,
                                j == len(cuts) - 2, zt, vt))
    return els


# ---------------------------------------------------------------------------
# Region structure at one energy
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class _Boundary:
    side: int            # -1 left end of the region, +1 right end
    kind: str            # 'turning' or 'step'
    element: int         # element holding the turning point / allowed element at the step
    other: int | None    # element on the far side of the step / of the forbidden stretch


@dataclass(frozen=True)
class _Region:
    elements: tuple      # indices of elements with an allowed part
    left: _Boundary
    right: _Boundary


def _structure(els, energy: float) -> list:
    """Allowed regions at one carrier energy (structure only)."""
    n = len(els)
    al = [e.v_a < energy for e in els]
    ar = [e.v_b < energy for e in els]
    regions = []
    cur = None
    left = None
    for i in range(n):
        if not (al[i] or ar[i]):
            continue
        if al[i] and i > 0 and ar[i - 1] and cur is not None:
            cur.append(i)       # continues the open region
        else:
            cur = [i]
            if al[i]:           # step at the left junction (or band start)
                left = _Boundary(-1, "step", i, i - 1 if i > 0 else None)
            else:
                left = _Boundary(-1, "turning", i, i - 1 if i > 0 else None)
        if not ar[i]:
            regions.append(_Region(tuple(cur), left, _Boundary(+1, "turning", i,
                                                                i + 1 if i + 1 < n else None)))
            cur = None
        elif i + 1 >= n or not al[i + 1]:
            regions.append(_Region(tuple(cur), left, _Boundary(+1, "step", i,
                                                                i + 1 if i + 1 < n else None)))
            cur = None
    return regions


# ---------------------------------------------------------------------------
# Vectorised pieces of the quantisation function
# ---------------------------------------------------------------------------
def _illinois_update(a, fa, b, fb, c, fc, replaces_a, side):
    """One vectorised Illinois (modified regula falsi) bracket update.

    ``replaces_a`` marks where the new point ``c`` takes the place of ``a``
    (elsewhere it replaces ``b``); the end kept twice in a row has its value
    halved, which gives superlinear convergence.  ``side`` remembers which
    end moved last (-1: a, +1: b).

    References
    ----------
    .. [1] M. Dowell and P. Jarratt, "A modified regula falsi method for
       computing the root of an equation", BIT 11, 168 (1971).
    """
    a_n = np.where(replaces_a, c, a)
    fa_n = np.where(replaces_a, fc, fa)
    b_n = np.where(replaces_a, b, c)
    fb_n = np.where(replaces_a, fb, fc)
    fb_n = np.where(replaces_a & (side < 0), 0.5 * fb_n, fb_n)
    fa_n = np.where(~replaces_a & (side > 0), 0.5 * fa_n, fa_n)
    return a_n, fa_n, b_n, fb_n, np.where(replaces_a, -1.0, 1.0)


def _turning_point(band, el: _Element, energy: np.ndarray) -> np.ndarray:
    """Turning point in a monotone element for each energy (vectorised)."""
    p = band.pieces[el.piece]
    if el.kind == "linear":
        z = el.z_a + (energy - el.v_a) / p.edge_slope_eV_per_nm
        return np.clip(z, el.z_a, el.z_b)
    # bracket from the sampled table, then a vectorised Illinois iteration on V(z) - E
    rising = el.v_b > el.v_a
    vt = el.v_table if rising else el.v_table[::-1]
    zt = el.z_table if rising else el.z_table[::-1]
    vt = np.maximum.accumulate(vt)          # guard against rounding wiggles
    j = np.clip(np.searchsorted(vt, energy), 1, len(vt) - 1)
    a, b = zt[j - 1], zt[j]
    fa, fb = vt[j - 1] - energy, vt[j] - energy
    if energy.size == 1:                    # one energy: scalar Brent iteration
        e0 = float(energy.ravel()[0])
        fa0, fb0 = float(fa.ravel()[0]), float(fb.ravel()[0])
        a0, b0 = float(a.ravel()[0]), float(b.ravel()[0])
        if fa0 == 0.0 or fb0 == 0.0 or np.sign(fa0) == np.sign(fb0):
            z0 = a0 if abs(fa0) <= abs(fb0) else b0
        else:
            from scipy import optimize as _opt  # heavy import (~90 ms): only graded pieces need it
            z0 = _opt.brentq(lambda z: float(p.potential(np.array([z]))[0]) - e0, a0, b0,
                             xtol=1e-13 * max(1.0, abs(el.z_a), abs(el.z_b)), rtol=1e-15)
        return np.full_like(energy, min(max(z0, el.z_a), el.z_b))
    if not (el.junction_a if rising else el.junction_b):
        # the low end is an extremum of V, where V - V_low ~ (z - z_low)^2: iterate on
        # sqrt(V - V_low) - sqrt(E - V_low) instead (same root and sign, nearly linear there)
        v_low = float(vt[0])
        s_e = np.sqrt(np.maximum(energy - v_low, 0.0))
        fa = np.sqrt(np.maximum(vt[j - 1] - v_low, 0.0)) - s_e
        fb = np.sqrt(np.maximum(vt[j] - v_low, 0.0)) - s_e

        def resid(z):
            return np.sqrt(np.maximum(p.potential(z) - v_low, 0.0)) - s_e
    else:
        def resid(z):
            return p.potential(z) - energy
    side = np.zeros_like(energy)
    tol = 1e-13 * max(1.0, abs(el.z_a), abs(el.z_b))
    c = a
    for _ in range(100):
        with np.errstate(divide="ignore", invalid="ignore"):
            c = b - fb * (b - a) / (fb - fa)
        c = np.where(np.isfinite(c), c, 0.5 * (a + b))
        fc = resid(c)
        same_a = np.sign(fc) == np.sign(fa)
        a, fa, b, fb, side = _illinois_update(a, fa, b, fb, c, fc, same_a, side)
        if np.all((np.abs(b - a) < tol) | (fc == 0)):
            break
    return np.clip(c, el.z_a, el.z_b)


def _allowed_span(band, el: _Element, energy: np.ndarray):
    if el.kind == "flat":
        return np.full_like(energy, el.z_a), np.full_like(energy, el.z_b)
    lo = np.full_like(energy, el.z_a)
    hi = np.full_like(energy, el.z_b)
    a_ok = el.v_a < energy
    b_ok = el.v_b < energy
    partial = a_ok != b_ok
    if np.any(partial):
        if np.all(partial):
            zt = _turning_point(band, el, energy)
        else:                           # turning points only where there is one
            zt = np.zeros_like(energy)
            zt[partial] = _turning_point(band, el, energy[partial])
        lo = np.where(~a_ok & b_ok, zt, lo)
        hi = np.where(a_ok & ~b_ok, zt, hi)
    return lo, hi


def _k(band, piece, z, energy, sign=1.0):
    """Local wave number (sign=+1) or decay constant (sign=-1) [1/nm]."""
    v = piece.potential(z)
    m = _piece_mass(band, piece, z, energy)
    return np.sqrt(np.maximum(sign * (energy - v), 0.0) * m / HBAR2_2M0_EV_NM2)


def _gl_integral(band, piece, lo, hi, energy, sign=1.0):
    """int_lo^hi k dz per energy, adaptive Gauss-Legendre. Returns (value, converged)."""
    n = _GL_START
    prev = None
    span = (hi - lo)[:, None]
    while True:
        t, w = _gl_theta(n)
        z = lo[:, None] + span * t[None, :]
        e = np.broadcast_to(energy[:, None], z.shape)
        val = np.sum(_k(band, piece, z, e, sign) * w[None, :], axis=1) * span[:, 0]
        if prev is not None and np.max(np.abs(val - prev)) < PHASE_TOLERANCE_RAD:
            return val, True
        if n >= _GL_MAX:
            return val, False
        prev = val
        n *= 2


# ---------------------------------------------------------------------------
# Phase integral of a smooth element on fixed segments
# ---------------------------------------------------------------------------
#: Longest segment of a smooth element [nm] (between the piece's breaks).
_SEG_MAX_NM = 0.5
#: Gauss-Legendre nodes per segment (fixed positions: V, m and Eg sampled once).
_SEG_NODES = 8
#: Gauss-Legendre nodes per sub-interval of the turning-point tail (in s = sqrt(y - y_t)).
_TAIL_NODES = 12
#: A segment is integrated on its fixed nodes when the nearest zero of E - V (linear
#: extrapolation) lies at least this many segment lengths beyond it.
_SAFE_LENGTHS = 1.0
#: Most whole segments the tail takes beyond the turning-point segment.
_TAIL_SEGMENTS = 6
#: Breaks this close to an element end are left out [nm].
_BREAK_SNAP_NM = 1e-5
_SMOOTH_CACHE: dict = {}
_SMOOTH_CACHE_MAX = 64


def _band_store(cache: dict, band, limit: int) -> dict:
    """A dict kept for one Band object (looked up by identity, released with it)."""
    key = id(band)
    hit = cache.get(key)
    if hit is not None and hit[0]() is band:
        return hit[1]
    store: dict = {}
    try:
        ref = weakref.ref(band, lambda r, key=key: (cache.pop(key, None)
                                                    if cache.get(key, (None,))[0] is r
                                                    else None))
    except TypeError:          # not weak-referenceable: nothing kept
        return store
    if len(cache) >= limit:
        cache.pop(next(iter(cache)))
    cache[key] = (ref, store)
    return store


_GL_NODES: dict = {}


def _gl_nodes(n: int):
    """Gauss-Legendre nodes and weights on [-1, 1] (kept once computed)."""
    if n not in _GL_NODES:
        _GL_NODES[n] = gauss_legendre(n)
    return _GL_NODES[n]


class _SmoothTable:
    """Fixed-node samples of one smooth (monotone) element for its phase integral.

    The element is cut at the piece's ``breaks_nm`` and into segments of at most
    ``_SEG_MAX_NM``; every segment carries ``_SEG_NODES`` Gauss-Legendre nodes with
    V, m and Eg sampled once.  Positions are measured as ``y`` from the end where V
    is highest (the low end of ``E - V``), so the allowed part of the element is
    ``y_t <= y <= length`` for every energy.
    """

    def __init__(self, band, el: _Element):
        p = band.pieces[el.piece]
        self.piece = p
        self.rising = el.v_b > el.v_a
        # breaks closer than _BREAK_SNAP_NM to an end of the element (an extremum found
        # next to a node of the potential) would leave a sliver of a segment: left out
        inner = sorted(b for b in p.breaks_nm
                       if el.z_a + _BREAK_SNAP_NM < b < el.z_b - _BREAK_SNAP_NM)
        edges = np.array([el.z_a] + inner + [el.z_b])
        # every interval between breaks cut into n equal segments of at most _SEG_MAX_NM
        n = np.maximum(1, np.ceil(np.diff(edges) / _SEG_MAX_NM - 1e-9)).astype(int)
        start = np.repeat(edges[:-1], n)
        frac = (np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n)) / np.repeat(n, n)
        zb = np.append(start + frac * np.repeat(np.diff(edges), n), el.z_b)
        vb = p.potential(zb)
        vb[0], vb[-1] = el.v_a, el.v_b
        x, w = _gl_nodes(_SEG_NODES)
        h = np.diff(zb)
        zn = zb[:-1, None] + h[:, None] * (0.5 * (x + 1.0))[None, :]
        wn = h[:, None] * (0.5 * w)[None, :]
        if self.rising:                  # order everything from the high-V end
            zb, vb = zb[::-1].copy(), vb[::-1].copy()
            zn, wn = zn[::-1].copy(), wn[::-1].copy()
        self.z_low = float(zb[0])
        self.dir = -1.0 if self.rising else 1.0          # z = z_low + dir * y
        self.yb = np.abs(zb - zb[0])
        self.vb = vb
        self.v_nodes = p.potential(zn)
        self.c_nodes = p.mass(zn) / HBAR2_2M0_EV_NM2     # m / (hbar^2 / 2 m0)
        g = p.gap(zn) if band.nonparabolic else None
        self.invg_nodes = None if g is None else 1.0 / g
        self.w_nodes = wn
        xt, wt = _gl_nodes(_TAIL_NODES)
        self.tail_x = 0.5 * (xt + 1.0)
        self.tail_w = 0.5 * wt

    def _k(self, u, c, invg):
        """Wave number [1/nm] from E - V [eV], m / (hbar^2/2m0) and 1/Eg (or None)."""
        if invg is not None:
            c = c * np.fmax(1.0 + u * invg, _MIN_MASS_FRACTION)
        return np.sqrt(np.fmax(u, 0.0) * c)

    def phase(self, band, el: _Element, energy: np.ndarray) -> np.ndarray:
        """int k dz over the allowed part of the element for every energy."""
        energy = np.asarray(energy, dtype=float)
        out = np.zeros(energy.shape)
        ub = energy[:, None] - self.vb[None, :]          # E - V at the segment bounds
        some = ub[:, -1] > 0.0
        if not np.any(some):
            return out
        idx = np.nonzero(some)[0]
        e = energy[idx]
        ub = ub[idx]
        yb = self.yb
        nseg = len(yb) - 1
        # turning point (the low end itself where the element is allowed there)
        partial = ub[:, 0] <= 0.0
        jt = np.clip(np.sum(ub <= 0.0, axis=1) - 1, 0, nseg - 1)
        y_t = np.zeros(len(e))
        if np.any(partial):
            w = np.nonzero(partial)[0]
            y_t[w] = self._turning(e[w], jt[w], ub[w, jt[w]], ub[w, jt[w] + 1])
            jt = np.clip(np.searchsorted(yb, y_t, side="right") - 1, 0, nseg - 1)
        # where the element is allowed at its low end: a virtual turning point by linear
        # extrapolation of E - V over the first segment, when it lies close beyond it
        du0 = ub[:, 1] - ub[:, 0]
        near0 = ~partial & (du0 > 0.0) & (ub[:, 0] < _SAFE_LENGTHS * du0)
        with np.errstate(divide="ignore", invalid="ignore"):
            y_virtual = -ub[:, 0] / du0 * (yb[1] - yb[0])
        y_zero = np.where(partial, y_t, np.where(near0, y_virtual, 0.0))
        has_tail = partial | near0
        # whole segments after the turning-point segment whose extrapolated zero of E - V
        # is close: they join the tail (at most _TAIL_SEGMENTS of them)
        seg = np.arange(nseg)
        du = ub[:, 1:] - ub[:, :-1]
        unsafe = (ub[:, :-1] < _SAFE_LENGTHS * du) & (seg[None, :] > jt[:, None])
        run = np.zeros(len(e), dtype=int)
        alive = has_tail.copy()
        for k in range(1, _TAIL_SEGMENTS + 1):
            col = np.clip(jt + k, 0, nseg - 1)
            alive &= (jt + k < nseg) & unsafe[np.arange(len(e)), col]
            run += alive
        last = np.where(has_tail, jt + run, -1)            # last segment inside the tail
        # fixed-node part: segments after the tail
        first = int(np.min(last)) + 1
        if first < nseg:
            u = e[:, None, None] - self.v_nodes[None, first:, :]
            invg = None if self.invg_nodes is None else self.invg_nodes[None, first:, :]
            k = self._k(u, self.c_nodes[None, first:, :], invg)
            per_seg = np.einsum("esn,sn->es", k, self.w_nodes[first:])
            keep = seg[None, first:] > last[:, None]
            out[idx] = np.sum(np.where(keep, per_seg, 0.0), axis=1)
        if np.any(has_tail):
            t = np.nonzero(has_tail)[0]
            out[idx[t]] += self._tail(y_zero[t], jt[t], last[t], e[t], partial[t])
        return out

    def _turning(self, energy, j, f_a, f_b):
        """y of the turning point inside segment j (E - V from f_a <= 0 to f_b > 0).

        Illinois iteration on the true V - E from the bracket of the segment bounds
        (one step where V is linear between breaks), to 1e-13 of the position.
        """
        p = self.piece
        a, b = self.yb[j], self.yb[j + 1]
        fa, fb = -f_a, -f_b                      # V - E: >= 0 at a, < 0 at b
        side = np.zeros_like(a)
        tol = 1e-13 * max(1.0, abs(p.z_start_nm), abs(p.z_end_nm))
        c = a
        for _ in range(100):
            with np.errstate(divide="ignore", invalid="ignore"):
                c = b - fb * (b - a) / (fb - fa)
            c = np.where(np.isfinite(c), np.clip(c, a, b), 0.5 * (a + b))
            fc = p.potential(self.z_low + self.dir * c) - energy
            keep_b = fc > 0.0                     # c replaces a (still not allowed)
            a, fa, b, fb, side = _illinois_update(a, fa, b, fb, c, fc, keep_b, side)
            if np.all((np.abs(b - a) < tol) | (fc == 0.0)):
                break
        return c

    def _tail(self, y_zero, jt, last, energy, partial):
        """int k dz from the turning point (real or virtual) to the end of segment ``last``.

        With ``y = y_zero + L s^2`` the square root of E - V at the turning point
        becomes a factor s that cancels against dy = 2 L s ds, so the integrand is
        smooth in s on every sub-interval between segment bounds.
        """
        yb = self.yb
        n = len(energy)
        width = _TAIL_SEGMENTS + 1
        # sub-interval edges in y: start (the turning point or the low end), then the
        # segment bounds up to the end of segment `last`
        cols = jt[:, None] + 1 + np.arange(width)[None, :]
        ends = yb[np.minimum(cols, len(yb) - 1)]
        y_end = yb[last + 1]
        ends = np.minimum(ends, y_end[:, None])
        start = np.where(partial, y_zero, yb[jt])
        edges = np.concatenate([start[:, None], ends], axis=1)     # (n, width + 1)
        L = y_end - y_zero
        with np.errstate(divide="ignore", invalid="ignore"):
            s = np.sqrt(np.clip((edges - y_zero[:, None]) / L[:, None], 0.0, 1.0))
        s_lo, s_hi = s[:, :-1], s[:, 1:]
        ds = s_hi - s_lo                                            # 0 for padding
        sn = s_lo[:, :, None] + ds[:, :, None] * self.tail_x[None, None, :]
        y = y_zero[:, None, None] + L[:, None, None] * sn * sn
        z = self.z_low + self.dir * y
        zf = z.reshape(n, -1)
        ef = np.broadcast_to(energy[:, None], zf.shape)
        p = self.piece
        zc = np.clip(zf, p.z_start_nm, p.z_end_nm)
        kf = _k_piece(self, p, zc, ef)
        integrand = kf.reshape(z.shape) * (2.0 * L[:, None, None] * sn)
        return np.sum(integrand * (ds[:, :, None] * self.tail_w[None, None, :]), axis=(1, 2))


def _k_piece(table, piece, z, energy):
    """Wave number [1/nm] of a piece at positions z (true functions of z)."""
    u = energy - piece.potential(z)
    c = piece.mass(z) / HBAR2_2M0_EV_NM2
    g = piece.gap(z) if table.invg_nodes is not None else None
    return table._k(u, c, None if g is None else 1.0 / g)


def _smooth_phase(band, el: _Element, energy: np.ndarray) -> np.ndarray:
    """int k dz over the allowed part of a smooth element (see :class:`_SmoothTable`)."""
    if not np.any(energy > min(el.v_a, el.v_b)):
        return np.zeros(np.shape(energy))
    store = _band_store(_SMOOTH_CACHE, band, _SMOOTH_CACHE_MAX)
    key = (el.piece, el.z_a, el.z_b)
    table = store.get(key)
    if table is None:
        table = store[key] = _SmoothTable(band, el)
    return table.phase(band, el, energy)


def _element_phase(band, el: _Element, energy: np.ndarray):
    """int k dz over the allowed part of one element (vectorised)."""
    p = band.pieces[el.piece]
    if el.kind == "smooth":
        return _smooth_phase(band, el, energy), True
    if el.kind == "flat":
        m = _piece_mass(band, p, np.full_like(energy, el.z_a), energy)
        k = np.sqrt(np.maximum(energy - el.v_a, 0.0) * m / HBAR2_2M0_EV_NM2)
        return k * (el.z_b - el.z_a), True
    if el.kind == "linear" and (not band.nonparabolic or p.gap_eV is None):
        s = p.edge_slope_eV_per_nm
        ua = np.maximum(energy - el.v_a, 0.0)
        ub = np.maximum(energy - el.v_b, 0.0)
        return np.sqrt(p.mass_m0 / HBAR2_2M0_EV_NM2) * 2.0 / (3.0 * s) * (ua ** 1.5 - ub ** 1.5), True
    lo, hi = _allowed_span(band, el, energy)
    return _gl_integral(band, p, lo, hi, energy)


def _airy_W(xi, ql):
    from scipy import special as _sp  # heavy import (~120 ms): only linear pieces need Airy
    ai, aip, bi, bip = _sp.airy(xi)
    w = ai - 1j * bi
    wp = aip - 1j * bip
    with np.errstate(invalid="ignore"):
        W = np.where(np.isinf(ql), w, (wp + np.where(np.isinf(ql), 0.0, ql) * w)
                     / (1.0 + np.where(np.isinf(ql), 0.0, ql)))
    return W


def _boundary_delta(band, els, b: _Boundary, energy: np.ndarray):
    """End phase delta (vectorised over energies) and a short kind tag."""
    el = els[b.element]
    p = band.pieces[el.piece]
    z_s = el.z_b if b.side > 0 else el.z_a          # end of the element facing the boundary
    other = els[b.other] if b.other is not None else None
    if b.kind == "turning":
        is_jump = (other is not None and other.piece != el.piece
                   and abs((other.v_a if b.side > 0 else other.v_b)
                           - (el.v_b if b.side > 0 else el.v_a)) > 1e-12)
        if not is_jump:
            return np.full_like(energy, np.pi / 4), "turning"
        v_far = other.v_a if b.side > 0 else other.v_b
        if not np.all(v_far > energy):
            return np.full_like(energy, np.pi / 4), "turning"
    else:
        v_far = other.v_a if b.side > 0 else other.v_b
    v_s = el.v_b if b.side > 0 else el.v_a
    zz = np.full_like(energy, z_s)
    m_w = _piece_mass(band, p, zz, energy)
    k_s = np.sqrt(np.maximum(energy - v_s, 0.0) * m_w / HBAR2_2M0_EV_NM2)
    if np.isinf(v_far):
        q = np.full_like(energy, np.inf)
    else:
        po = band.pieces[other.piece]
        m_b = _piece_mass(band, po, zz, energy)
        kappa = np.sqrt(np.maximum(v_far - energy, 0.0) * m_b / HBAR2_2M0_EV_NM2)
        q = m_w * kappa / m_b
    f_toward = b.side * _slope(p, z_s, -b.side)      # dV/dz towards the boundary
    if b.kind == "step" and f_toward <= 0.0:
        with np.errstate(divide="ignore"):
            return np.arctan2(k_s, q), "step"
    if b.kind == "turning" and f_toward <= 0.0:
        return np.full_like(energy, np.pi / 4), "turning"
    ell = (HBAR2_2M0_EV_NM2 / (m_w * f_toward)) ** (1.0 / 3.0)
    xi = (v_s - energy) / (f_toward * ell)
    out = _airy_delta(b.kind, xi, q * ell, k_s, q)
    return out, ("turning+step" if b.kind == "turning" else "step")


def _region_G(band, els, reg: _Region, energy: np.ndarray):
    """Quantum-number function G(E) = (Phi + dL + dR)/pi and its parts."""
    phi = np.zeros_like(energy)
    ok = True
    for i in reg.elements:
        val, conv = _element_phase(band, els[i], energy)
        phi = phi + val
        ok = ok and conv
    dl, _ = _boundary_delta(band, els, reg.left, energy)
    dr, _ = _boundary_delta(band, els, reg.right, energy)
    return (phi + dl + dr) / np.pi, phi, dl, dr, ok


def _const_mass(band, piece):
    """Band-edge mass [m0] if the mass of this piece is z- and E-independent, else None."""
    if piece.kind == "smooth":
        return None
    if band.nonparabolic and piece.gap_eV is not None:
        return None
    return float(piece.mass_m0)


class _RegionPlan:
    """Static data of one region within an energy segment, for fast G(E)."""

    def __init__(self, band, els, reg: _Region):
        self.band, self.els, self.reg = band, els, reg
        self.terms = []
        for i in reg.elements:
            el = els[i]
            p = band.pieces[el.piece]
            m = _const_mass(band, p)
            if m is not None and el.kind == "flat":
                self.terms.append(("flat", np.sqrt(m / HBAR2_2M0_EV_NM2) * (el.z_b - el.z_a),
                                   el.v_a, 0.0))
            elif m is not None and el.kind == "linear":
                self.terms.append(("linear", np.sqrt(m / HBAR2_2M0_EV_NM2) * 2.0
                                   / (3.0 * p.edge_slope_eV_per_nm), el.v_a, el.v_b))
            else:
                self.terms.append(("general", el, 0.0, 0.0))
        self.left = self._boundary(reg.left)
        self.right = self._boundary(reg.right)

    def _boundary(self, b: _Boundary):
        els, band = self.els, self.band
        el = els[b.element]
        p = band.pieces[el.piece]
        other = els[b.other] if b.other is not None else None
        if b.kind == "turning":
            if other is None or other.piece == el.piece:
                return ("const", np.pi / 4)
            v_far = other.v_a if b.side > 0 else other.v_b
            v_s = el.v_b if b.side > 0 else el.v_a
            if abs(v_far - v_s) <= 1e-12:
                return ("const", np.pi / 4)
        m_w = _const_mass(band, p)
        m_b = _const_mass(band, band.pieces[other.piece]) if other is not None else None
        if m_w is None or (m_b is None and not np.isinf(other.v_a if b.side > 0 else other.v_b)):
            return ("general", b)
        v_far = other.v_a if b.side > 0 else other.v_b
        v_s = el.v_b if b.side > 0 else el.v_a
        z_s = el.z_b if b.side > 0 else el.z_a
        f_toward = b.side * _slope(p, z_s, -b.side)
        return ("fast", b.kind, v_s, v_far, m_w, m_b, f_toward)

    def delta(self, spec, energy):
        if spec[0] == "const":
            return np.full_like(energy, spec[1])
        if spec[0] == "general":
            return _boundary_delta(self.band, self.els, spec[1], energy)[0]
        _, kind, v_s, v_far, m_w, m_b, f_toward = spec
        k_s = np.sqrt(np.maximum(energy - v_s, 0.0) * (m_w / HBAR2_2M0_EV_NM2))
        if np.isinf(v_far):
            q = np.full_like(energy, np.inf)
        else:
            q = (m_w / np.sqrt(m_b * HBAR2_2M0_EV_NM2)) * np.sqrt(np.maximum(v_far - energy, 0.0))
        if kind == "step" and f_toward <= 0.0:
            return np.arctan2(k_s, q)
        if kind == "turning" and f_toward <= 0.0:
            return np.full_like(energy, np.pi / 4)
        ell = (HBAR2_2M0_EV_NM2 / (m_w * f_toward)) ** (1.0 / 3.0)
        xi = (v_s - energy) / (f_toward * ell)
        return _airy_delta(kind, xi, q * ell, k_s, q)

    def G(self, energy):
        phi = np.zeros_like(energy)
        ok = True
        for kind, a, v_a, v_b in self.terms:
            if kind == "flat":
                phi += a * np.sqrt(np.maximum(energy - v_a, 0.0))
            elif kind == "linear":
                phi += a * (np.maximum(energy - v_a, 0.0) ** 1.5
                            - np.maximum(energy - v_b, 0.0) ** 1.5)
            else:
                val, conv = _element_phase(self.band, a, energy)
                phi += val
                ok = ok and conv
        dl = self.delta(self.left, energy)
        dr = self.delta(self.right, energy)
        return (phi + dl + dr) / np.pi, phi, dl, dr, ok


def _airy_delta(kind, xi, ql, k_s, q):
    """Airy-matched end phase (see module docstring)."""
    if kind == "turning":
        out = np.full_like(xi, np.pi / 4)
        near = xi < 8.0
        if np.any(near):
            out[near] = -np.pi / 4 - np.angle(_airy_W(xi[near], ql[near]))
        return out
    out = np.arctan2(k_s, q)
    x = -xi
    near = x < 1e4
    if np.any(near):
        W = _airy_W(xi[near], ql[near])
        zeta = (2.0 / 3.0) * x[near] ** 1.5
        out[near] = np.pi / 2 - np.angle(-W * np.exp(-1j * (zeta + np.pi / 4)))
    return out


def _element_spans(band, els, reg: _Region, energy: float) -> dict:
    """Allowed part (lo, hi) [nm] of every element of a region at one energy."""
    e = np.array([energy])
    out = {}
    for i in reg.elements:
        lo, hi = _allowed_span(band, els[i], e)
        out[i] = (float(lo[0]), float(hi[0]))
    return out


def _region_span(band, els, reg: _Region, energy: float, spans: dict | None = None):
    if spans is None:
        e = np.array([energy])
        lo = _allowed_span(band, els[reg.elements[0]], e)[0][0]
        hi = _allowed_span(band, els[reg.elements[-1]], e)[1][0]
        return float(lo), float(hi)
    return spans[reg.elements[0]][0], spans[reg.elements[-1]][1]


# ---------------------------------------------------------------------------
# Public phase inspection
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class RegionPhase:
    """Quantisation data of one classically allowed region at one energy.

    Attributes
    ----------
    z_left_nm, z_right_nm : float
        Ends of the allowed region [nm].
    left_kind, right_kind : str
        'turning' (smooth turning point), 'turning+step' (turning point close
        to a step, Airy-matched phase) or 'step' (abrupt step, a hard wall
        when the barrier is infinite).
    phase_integral_rad : float
        Phi = int k dz over the region [rad].
    delta_left_rad, delta_right_rad : float
        End phases delta [rad] (reflection phase phi = pi - 2 delta).
    quantum_number : float
        G = (Phi + delta_L + delta_R) / pi; states sit at G = 1, 2, ...
    """

    z_left_nm: float
    z_right_nm: float
    left_kind: str
    right_kind: str
    phase_integral_rad: float
    delta_left_rad: float
    delta_right_rad: float
    quantum_number: float


@dataclass(frozen=True)
class QuantisationPhase:
    """All allowed regions at one carrier energy [eV]."""

    carrier_energy_eV: float
    regions: tuple

    @property
    def count(self) -> int:
        """Number of semiclassical states below this energy."""
        return int(sum(max(0, int(np.floor(r.quantum_number))) for r in self.regions))


def quantisation_phase(band: Band, energies_eV) -> tuple:
    """Semiclassical quantisation data at given energies.

    Parameters
    ----------
    band : Band
    energies_eV : array_like
        Carrier-convention energies [eV] (as in :mod:`qwell.bands`).

    Returns
    -------
    tuple of QuantisationPhase
        One per energy, listing every classically allowed region (left to
        right) with its phase integral, end phases and quantum-number
        function ``G`` (see the module docstring for the rule).
    """
    els = _build_elements(band)
    out = []
    for e in np.atleast_1d(np.asarray(energies_eV, dtype=float)):
        regs = []
        for reg in _structure(els, float(e)):
            ea = np.array([e])
            g, phi, dl, dr, _ = _region_G(band, els, reg, ea)
            kl = _boundary_delta(band, els, reg.left, ea)[1]
            kr = _boundary_delta(band, els, reg.right, ea)[1]
            zl, zr = _region_span(band, els, reg, float(e))
            regs.append(RegionPhase(zl, zr, kl, kr, float(phi[0]), float(dl[0]), float(dr[0]),
                                    float(g[0])))
        out.append(QuantisationPhase(float(e), tuple(regs)))
    return tuple(out)


# ---------------------------------------------------------------------------
# Root finding
# ---------------------------------------------------------------------------
def _half_width(tol, a, b) -> float:
    """Half width of a final bracket [c - h, c + h] whose rounded width stays <= tol.

    The ends are rounded to the nearest double, so ``h`` is kept a few units in
    the last place of the largest energy involved below ``tol / 2``.
    """
    scale = float(max(np.max(np.abs(a)), np.max(np.abs(b)))) if len(a) else 0.0
    return max(0.5 * tol * (1.0 - 1e-9) - 4.0 * float(np.spacing(scale)), 0.0)


def _solve_roots(fn, a, b, fa, fb, tol, c0=None):
    """Vectorised root refinement of fn(E) = 0 on brackets [a, b] (fa < 0 < fb).

    Each round evaluates fn at ``c -/+ tol/2`` (one vectorised call): where the
    signs straddle zero the root is bracketed to ``tol`` and done; elsewhere the
    bracket [a, b] shrinks and the secant through the two points (kept inside
    the bracket) gives the next ``c``.  After 12 rounds the Illinois iteration
    :func:`_illinois` finishes any leftovers.  Returns ``(lo, hi, slope)``:
    final brackets and the local slope dfn/dE.
    """
    a = a.copy()
    b = b.copy()
    fa = fa.copy()
    fb = fb.copy()
    c = b - fb * (b - a) / (fb - fa) if c0 is None else np.clip(c0, a, b)
    half = _half_width(tol, a, b)
    n = len(a)
    lo_out = np.empty(n)
    hi_out = np.empty(n)
    slope_out = np.empty(n)
    todo = np.arange(n)
    for _ in range(12):
        lo = c - half
        hi = c + half
        f2 = fn(np.concatenate([lo, hi]), todo)
        flo, fhi = f2[: len(todo)], f2[len(todo):]
        ok = (flo <= _G_NOISE) & (fhi >= -_G_NOISE)
        with np.errstate(divide="ignore", invalid="ignore"):
            sl = (fhi - flo) / (hi - lo)
        idx = todo[ok]
        lo_out[idx], hi_out[idx], slope_out[idx] = lo[ok], hi[ok], sl[ok]
        if np.all(ok):
            return lo_out, hi_out, slope_out
        keep = ~ok
        todo = todo[keep]
        lo, hi, flo, fhi, sl, c = lo[keep], hi[keep], flo[keep], fhi[keep], sl[keep], c[keep]
        a, b, fa, fb = a[keep], b[keep], fa[keep], fb[keep]
        # both points on one side: shrink the bracket
        below = fhi < 0
        a = np.where(below, hi, a)
        fa = np.where(below, fhi, fa)
        above = flo > 0
        b = np.where(above, lo, b)
        fb = np.where(above, flo, fb)
        with np.errstate(divide="ignore", invalid="ignore"):
            cn = c - 0.5 * (flo + fhi) / sl
        bad = ~np.isfinite(cn) | (cn <= a) | (cn >= b)
        with np.errstate(divide="ignore", invalid="ignore"):
            rf = b - fb * (b - a) / (fb - fa)
        rf = np.where(np.isfinite(rf) & (rf > a) & (rf < b), rf, 0.5 * (a + b))
        c = np.where(bad, rf, cn)
    la, lb, ls = _illinois(lambda e: fn(e, np.concatenate([todo, todo])
                                        if len(e) == 2 * len(todo) else todo),
                           a, b, fa, fb, tol)
    lo_out[todo], hi_out[todo], slope_out[todo] = la, lb, ls
    return lo_out, hi_out, slope_out


def _illinois(fn, a, b, fa, fb, tol):
    """Vectorised Illinois iteration for fn(E) = 0 on brackets [a, b] (fa < 0 < fb).

    Stops when the step falls below ``tol/4`` and a final evaluation at
    ``c -/+ tol/2`` confirms a bracket of width ``tol``.  Returns
    ``(a, b, slope)`` with the final bracket and the secant slope dfn/dE.
    """
    a = a.copy()
    b = b.copy()
    fa = fa.copy()
    fb = fb.copy()
    side = np.zeros_like(a)
    c_old = np.full_like(a, np.nan)
    for _ in range(100):
        with np.errstate(divide="ignore", invalid="ignore"):
            c = b - fb * (b - a) / (fb - fa)
        bad = ~np.isfinite(c) | (c <= a) | (c >= b)
        c = np.where(bad, 0.5 * (a + b), c)
        done = (np.abs(c - c_old) < 0.25 * tol) | (b - a < tol)
        if np.all(done):
            half = _half_width(tol, a, b)
            lo = np.maximum(c - half, a)
            hi = np.minimum(c + half, b)
            f2 = fn(np.concatenate([lo, hi]))
            flo, fhi = f2[: len(lo)], f2[len(lo):]
            ok = (flo <= _G_NOISE) & (fhi >= -_G_NOISE)
            a = np.where(ok, lo, np.where(flo > 0, a, lo))
            fa = np.where(ok | (flo <= 0), flo, fa)
            b = np.where(ok, hi, np.where(fhi < 0, b, hi))
            fb = np.where(ok | (fhi >= 0), fhi, fb)
            a = np.where(~ok & (fhi < 0), hi, a)
            fa = np.where(~ok & (fhi < 0), fhi, fa)
            b = np.where(~ok & (flo > 0), lo, b)
            fb = np.where(~ok & (flo > 0), flo, fb)
            if np.all(ok):
                break
            c_old[:] = np.nan
            continue
        c_old = c
        fc = fn(c)
        left = fc < 0
        a, fa, b, fb, side = _illinois_update(a, fa, b, fb, c, fc, left, side)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (fb - fa) / (b - a)
    return a, b, slope


def _solve_targets(fn, a, b, ga, gb, targets, tol, c0=None):
    """Solve fn(E) = targets[i] on brackets [a_i, b_i] (vectorised)."""

    def shifted(e, which):
        t = targets[which]
        if len(e) != len(t):
            t = np.tile(t, len(e) // len(t))
        return fn(e) - t

    return _solve_roots(shifted, a, b, ga - targets, gb - targets, tol, c0)


# ---------------------------------------------------------------------------
# Diagnostics per state
# ---------------------------------------------------------------------------
def _slopes(piece, z_nm: np.ndarray, side: int) -> np.ndarray:
    """dV/dz [eV/nm] of a piece at many z, one-sided inside the piece (as :func:`_slope`)."""
    z_nm = np.asarray(z_nm, dtype=float)
    if piece.kind != "smooth":
        return np.full_like(z_nm, float(piece.edge_slope_eV_per_nm))
    h = 1e-5 * piece.thickness_nm
    z0 = z_nm if side > 0 else z_nm - 2 * h
    v = piece.potential(np.stack([z0, z0 + h, z0 + 2 * h]))
    if side > 0:
        return (-3 * v[0] + 4 * v[1] - v[2]) / (2 * h)
    return (v[0] - 4 * v[1] + 3 * v[2]) / (2 * h)


def _gradient_rows(f, z):
    """d f / d z along the last axis with per-row abscissae (the formulas of numpy.gradient,
    second order inside, first order at the ends)."""
    dx = np.diff(z, axis=-1)
    out = np.empty_like(f)
    dx1, dx2 = dx[..., :-1], dx[..., 1:]
    a = -dx2 / (dx1 * (dx1 + dx2))
    b = (dx2 - dx1) / (dx1 * dx2)
    c = dx1 / (dx2 * (dx1 + dx2))
    out[..., 1:-1] = a * f[..., :-2] + b * f[..., 1:-1] + c * f[..., 2:]
    out[..., 0] = (f[..., 1] - f[..., 0]) / dx[..., 0]
    out[..., -1] = (f[..., -1] - f[..., -2]) / dx[..., -1]
    return out


def _validity_batch(band, els, picked, energies, all_spans) -> list:
    """Validity figure (module docstring) of many states at once.

    ``picked[i]`` is ``(regions, region)`` of state ``i`` at carrier energy
    ``energies[i]`` [eV], ``all_spans[i]`` the allowed parts of its elements.
    Work is grouped by element (all states whose region holds it) and
    vectorised over states and the 64 sample points of each element.
    """
    ns = len(energies)
    energies = np.asarray(energies, dtype=float)
    if ns == 0:
        return []
    # turning points (real, and virtual ones of steps reached by a rising potential) and
    # their Airy lengths: up to two per state, ell = 0 marks an unused slot
    tp_z = np.zeros((ns, 2))
    tp_l = np.zeros((ns, 2))
    groups = {}                   # (slot, element, kind) -> state indices
    for s, (_regs, reg) in enumerate(picked):
        for slot, b in enumerate((reg.left, reg.right)):
            groups.setdefault((slot, b.element, b.kind), []).append(s)
    for (slot, ie, kind), sts in groups.items():
        b = picked[sts[0]][1].left if slot == 0 else picked[sts[0]][1].right
        side = b.side
        el = els[ie]
        p = band.pieces[el.piece]
        idx = np.asarray(sts)
        e = energies[idx]
        if kind == "turning":
            zt = np.array([all_spans[s][ie][1 if side > 0 else 0] for s in sts])
            f = np.abs(_slopes(p, np.minimum(np.maximum(zt, el.z_a + 1e-9), el.z_b - 1e-9),
                               -side))
            m = _piece_mass(band, p, zt, e)
            with np.errstate(divide="ignore"):
                ell = np.where(f > 0, (HBAR2_2M0_EV_NM2 / (m * f)) ** (1.0 / 3.0), 0.0)
            tp_z[idx, slot] = zt
            tp_l[idx, slot] = ell
        else:
            z_s = el.z_b if side > 0 else el.z_a
            f = side * _slope(p, z_s, -side)
            if f > 0:
                v_s = el.v_b if side > 0 else el.v_a
                m = _piece_mass(band, p, np.full_like(e, z_s), e)
                tp_z[idx, slot] = z_s + side * (e - v_s) / f
                tp_l[idx, slot] = (HBAR2_2M0_EV_NM2 / (m * f)) ** (1.0 / 3.0)
            else:
                tp_z[idx, slot] = 0.0
                tp_l[idx, slot] = -1.0        # no turning point: never restricts "far"
    f_min = np.full(ns, np.inf)
    f_far = np.zeros(ns)
    r_step = np.zeros(ns)
    t, _ = _gl_theta(64)
    members = {}
    for s, (_regs, reg) in enumerate(picked):
        for i in reg.elements:
            members.setdefault(i, []).append(s)
    for i, sts in members.items():
        el = els[i]
        p = band.pieces[el.piece]
        idx = np.asarray(sts)
        e = energies[idx]
        if el.kind == "flat":
            f_min[idx] = 0.0      # k constant: d(1/k)/dz = 0
        else:
            lo = np.array([all_spans[s][i][0] for s in sts])
            hi = np.array([all_spans[s][i][1] for s in sts])
            z = lo[:, None] + (hi - lo)[:, None] * t[None, :]
            k = _k(band, p, z, np.broadcast_to(e[:, None], z.shape))
            with np.errstate(divide="ignore", invalid="ignore"):
                f = np.abs(_gradient_rows(1.0 / k, z))
            f = np.where(np.isfinite(f), f, np.inf)
            f_min[idx] = np.minimum(f_min[idx], f.min(axis=1))
            far = np.ones(z.shape, dtype=bool)
            for slot in range(2):
                far &= np.abs(z - tp_z[idx, slot][:, None]) >= 2.0 * tp_l[idx, slot][:, None]
            f_far[idx] = np.maximum(f_far[idx], np.where(far, f, 0.0).max(axis=1))
        # reflection amplitude of an internal step at the left end of this element
        inner = [s for s in sts if picked[s][1].elements[0] != i]
        if inner and els[i - 1].piece != el.piece:
            jdx = np.asarray(inner)
            ej = energies[jdx]
            za = np.full_like(ej, el.z_a)
            pp = band.pieces[els[i - 1].piece]
            g1 = _k(band, pp, za, ej) / _piece_mass(band, pp, za, ej)
            g2 = _k(band, p, za, ej) / _piece_mass(band, p, za, ej)
            with np.errstate(divide="ignore", invalid="ignore"):
                r = np.where(g1 + g2 > 0, np.abs((g1 - g2) / (g1 + g2)), 0.0)
            r_step[jdx] = np.maximum(r_step[jdx], r)
    return np.maximum(np.maximum(f_min, f_far), r_step).tolist()


def _barrier_factor(band, els, z_lo: float, z_hi: float, energy: float) -> float:
    """exp(-int kappa dz) over [z_lo, z_hi] at one energy."""
    e1 = np.array([energy])
    total = 0.0
    for el in els:
        lo, hi = max(el.z_a, z_lo), min(el.z_b, z_hi)
        if hi <= lo:
            continue
        p = band.pieces[el.piece]
        if np.isinf(el.v_a) or np.isinf(el.v_b):
            return 0.0
        val, _ = _gl_integral(band, p, np.array([lo]), np.array([hi]), e1, sign=-1.0)
        total += float(val[0])
    return float(np.exp(-total))


# ---------------------------------------------------------------------------
# Main entry
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class _Candidate:
    energy: float
    width: float
    segment: int
    region: int
    n: int
    converged: bool
    ill_defined: bool = False
    spacing: float = float("inf")   # local level spacing 1/(dG/dE) [eV]
    regions: tuple = ()              # region structure of the segment


def solve_semiclassical(band: Band, *, tolerance_eV: float = 1e-7,
                        max_states: int | None = None) -> Levels:
    """Estimate the bound subbands of one band with the WKB quantisation rule.

    Parameters
    ----------
    band : Band
        Carrier-convention potential and mass (see :mod:`qwell.bands`).
    tolerance_eV : float
        Width of the final root bracket in carrier energy [eV].  This is the
        numerical accuracy of the semiclassical estimate, not the error of
        the semiclassical method itself (see ``State.validity``).
    max_states : int, optional
        Report at most this many (lowest) states.  Required in effect when
        both claddings are infinite hard walls (default then 10).

    Returns
    -------
    Levels
        ``method='semiclassical'``; states labelled like the exact solver
        (``e1``, ``hh1``, ... in increasing carrier energy over all regions)
        with ``region`` (0-based index from the left of the allowed region at
        the state's energy), ``validity`` and ``message``.  ``psi`` is None.

    Warns
    -----
    ValidityWarning
        For states whose validity figure exceeds ``VALIDITY_THRESHOLD`` and
        for states made unreliable by tunnelling between regions.

    Notes
    -----
    The quantisation rule, end phases, validity figure and tunnelling
    criteria are described in the module docstring.
    """
    if not tolerance_eV > 0:
        raise ParameterError("tolerance_eV must be positive")
    if max_states is not None and max_states < 1:
        raise ParameterError("max_states must be at least 1")
    plan = _flat_plan(band)
    if plan is not None:
        return _solve_flat(band, plan, tolerance_eV, max_states)
    els = _build_elements(band)
    limit = min(els[0].v_a, els[-1].v_b)      # = band.confinement_limit_eV
    finite_v = [v for e in els for v in (e.v_a, e.v_b) if np.isfinite(v)]
    v_min = min(finite_v)
    want, e_top, notes = _energy_window(limit, max(finite_v), max_states)
    crit_all = sorted(set(v for v in finite_v))

    while True:
        cands, drops = _scan(band, els, v_min, e_top, crit_all, tolerance_eV)
        if not np.isinf(limit) or len(cands) >= want:
            break
        e_top = v_min + 2.0 * (e_top - v_min)
    if want is not None:
        cands = cands[:want]

    states = []
    all_converged = True
    unreliable_any = False
    # per-state diagnostics
    infos = []
    picked = []
    need = {}          # element -> candidates whose region holds it
    for ci, c in enumerate(cands):
        regs = (list(c.regions) if c.regions
                else _structure(els, c.energy + (1e-9 if c.ill_defined else 0.0)))
        reg = regs[min(c.region, len(regs) - 1)]
        picked.append((regs, reg))
        for i in reg.elements:
            need.setdefault(i, []).append(ci)
    # allowed parts of the elements (turning points) for all states at once, per element
    all_spans = [{} for _ in cands]
    for i, cis in need.items():
        lo, hi = _allowed_span(band, els[i], np.array([cands[ci].energy for ci in cis]))
        for ci, a, b in zip(cis, lo.tolist(), hi.tolist()):
            all_spans[ci][i] = (a, b)
    for c, (regs, reg), spans in zip(cands, picked, all_spans):
        span = _region_span(band, els, reg, c.energy, spans)
        infos.append((regs, reg, c.spacing, span, spans))
    # validity figures of all states at once (vectorised over states and sample points)
    validities = _validity_batch(band, els, picked, [c.energy for c in cands], all_spans)

    for idx, (c, (regs, _reg, spacing, span, _spans)) in enumerate(zip(cands, infos)):
        msgs = [f"region {c.region} (z = {span[0]:.3f} to {span[1]:.3f} nm)"
                + ("" if c.ill_defined else f", n = {c.n} in region")]
        bad = False
        validity = validities[idx]
        if validity > VALIDITY_THRESHOLD:
            msgs.append(f"semiclassical validity figure {validity:.2f} > {VALIDITY_THRESHOLD}: "
                        "estimate poor")
            bad = True
        if c.ill_defined:
            msgs.append("boundary type changes at this energy: estimate ill-defined")
            bad = True
        # tunnelling to the neighbouring regions
        for nb in (c.region - 1, c.region + 1):
            if nb < 0 or nb >= len(regs):
                continue
            nspan = _region_span(band, els, regs[nb], c.energy)
            lo, hi = (nspan[1], span[0]) if nb < c.region else (span[1], nspan[0])
            T = _barrier_factor(band, els, lo, hi, c.energy)
            others = [(jdx, c2.energy, info[2], info[3])
                      for jdx, (c2, info) in enumerate(zip(cands, infos)) if jdx != idx]
            found = _coupling_messages(band.prefix, nb, T, spacing, c.energy, nspan, others)
            if found:
                msgs += found
                bad = True
        label = f"{band.prefix}{idx + 1}"
        conv = c.converged and c.width <= tolerance_eV * (1 + 1e-9)
        all_converged = all_converged and conv
        if bad:
            unreliable_any = True
            notes.append(f"{label}: " + "; ".join(msgs[1:]))
            warnings.warn(f"{band.name} {label}: " + "; ".join(msgs[1:]), ValidityWarning,
                          stacklevel=2)
        states.append(State(band=band.name, label=label, index=idx + 1,
                            energy_eV=float(band.profile_energy(c.energy)),
                            carrier_energy_eV=float(c.energy), bound=True,
                            tolerance_eV=float(c.width), converged=conv, region=c.region,
                            validity=validity, message="; ".join(msgs)))

    return _finish(band, states, notes, limit, v_min, max(finite_v), drops, unreliable_any,
                   all_converged, tolerance_eV)


def _scan(band, els, v_min, e_top, crit_all, tol):
    """Find all roots between v_min and e_top, segment by segment."""
    edges = [v_min] + [c for c in crit_all if v_min < c < e_top] + [e_top]
    cands = []
    drops = []
    best = 0          # running maximum of the state count
    for s in range(len(edges) - 1):
        lo_e, hi_e = edges[s], edges[s + 1]
        width = hi_e - lo_e
        if width <= 0:
            continue
        eps = max(1e-12, 1e-10 * width)
        ea = lo_e + eps
        eb = hi_e - eps
        if eb <= ea:
            continue
        regs = _structure(els, 0.5 * (lo_e + hi_e))
        found = []
        count_start = 0
        grid = np.linspace(ea, eb, _SCAN_POINTS)
        for r, reg in enumerate(regs):
            conv = [True]

            plan = _RegionPlan(band, els, reg)

            def fn(e, plan=plan, conv=conv):
                g, *_r, ok = plan.G(e)
                conv[0] = conv[0] and ok
                return g

            # G on a grid (one vectorised evaluation) brackets every root
            gg = np.maximum.accumulate(fn(grid))
            ga, gb = float(gg[0]), float(gg[-1])
            count_start += max(0, int(np.floor(ga)))
            n_lo = max(1, int(np.floor(ga)) + 1)
            n_hi = int(np.floor(gb))
            if n_hi < n_lo:
                continue
            targets = np.arange(n_lo, n_hi + 1, dtype=float)
            j = np.clip(np.searchsorted(gg, targets, side="left") - 1, 0, len(grid) - 2)
            # starting point: inverse quadratic interpolation through three grid points
            jj = np.clip(j, 1, len(grid) - 2)
            x0, x1, x2 = grid[jj - 1], grid[jj], grid[jj + 1]
            y0, y1, y2 = gg[jj - 1] - targets, gg[jj] - targets, gg[jj + 1] - targets
            with np.errstate(divide="ignore", invalid="ignore"):
                c0 = (x0 * y1 * y2 / ((y0 - y1) * (y0 - y2)) + x1 * y0 * y2 / ((y1 - y0) * (y1 - y2))
                      + x2 * y0 * y1 / ((y2 - y0) * (y2 - y1)))
            inside = np.isfinite(c0) & (c0 > grid[j]) & (c0 < grid[j + 1])
            lin = grid[j + 1] - (gg[j + 1] - targets) * (grid[j + 1] - grid[j]) / (gg[j + 1] - gg[j])
            c0 = np.where(inside, c0, lin)
            ra, rb, slope = _solve_targets(fn, grid[j], grid[j + 1], gg[j], gg[j + 1],
                                           targets, tol, c0)
            for i, n in enumerate(targets):
                found.append(_Candidate(0.5 * (ra[i] + rb[i]), float(rb[i] - ra[i]), s, r, int(n),
                                        conv[0], spacing=float(1.0 / slope[i])
                                        if slope[i] > 0 else float("inf"),
                                        regions=tuple(regs)))
        # count bookkeeping across the critical energy at lo_e
        if count_start < best and s > 0:
            drops.append(lo_e)
        current = count_start
        while current > best:          # count jumps up at the critical energy itself
            cands.append(_Candidate(lo_e, 0.0, s, 0, current, True, ill_defined=True))
            best += 1
        found.sort(key=lambda c: c.energy)
        for c in found:
            current += 1
            if current > best:
                cands.append(c)
                best = current
    return cands, drops


# ---------------------------------------------------------------------------
# Fast path: bands made only of flat pieces
# ---------------------------------------------------------------------------
# When every piece is flat the quantisation function of a region is closed
# form, G(E) = (sum_j k_j(E) L_j + delta_L(E) + delta_R(E)) / pi with the
# step phases delta = arctan(m_w kappa_b / (m_b k_w))^-1 of the module
# docstring, so the whole solve is a handful of array expressions: G of every
# region of every energy segment on one grid (one evaluation), then all roots
# refined together.  The diagnostics reduce to closed forms as well (validity
# = largest internal step reflection amplitude, tunnelling factor
# exp(-sum kappa_j L_j)).  Results are the same as the general path within
# the requested tolerance.

#: Grid points per energy segment of the flat fast path (one evaluation for all).
_FLAT_SCAN_POINTS = 129
#: Guarded Newton/secant rounds before the fast path falls back to bisection.
_FLAT_NEWTON_ROUNDS = 8
#: Hard cap on refinement rounds (bisection halves the bracket each round).
_FLAT_MAX_ROUNDS = 80
_FLAT_CACHE: dict = {}
_FLAT_CACHE_MAX = 64
_INV_PI = 1.0 / np.pi
#: Scan grid fractions t = (1 - cos)/2 on [0, 1] (points crowd towards both ends).
_FLAT_T = 0.5 * (1.0 - np.cos(np.linspace(0.0, np.pi, _FLAT_SCAN_POINTS)))
_FLAT_T[0], _FLAT_T[-1] = 0.0, 1.0


class _FlatPlan:
    """Per-band static data of an all-flat band (cached by band identity).

    Layout of the coefficient arrays of G: the column axis first, the row (or
    root) axis last, so that every array operation in :meth:`G` runs over
    contiguous energies.
    """

    def __init__(self, band: Band):
        ps = band.pieces
        self.z0 = [float(p.z_start_nm) for p in ps]
        self.z1 = [float(p.z_end_nm) for p in ps]
        self.thick = [b - a for a, b in zip(self.z0, self.z1)]
        self.v = [float(p.edge_start_eV) for p in ps]
        self.m = [float(p.mass_m0) for p in ps]
        # 1/gap of nonparabolic pieces, 0 for parabolic ones (the two-band rule of Band.mass)
        self.invg = [1.0 / float(p.gap_eV) if (band.nonparabolic and p.gap_eV is not None)
                     else 0.0 for p in ps]
        self.nonparabolic = any(g != 0.0 for g in self.invg)
        mats = {}
        self.mat = [mats.setdefault(key, len(mats)) for key in zip(self.v, self.m, self.invg)]
        self.mats = list(mats)
        self.limit = min(self.v[0], self.v[-1])
        self.finite_v = [v for v in self.v if not math.isinf(v)]
        self.v_min = min(self.finite_v)
        self.v_max = max(self.finite_v)
        self.crit = sorted(set(self.finite_v))
        self.packs = {}

    def runs(self, energy: float) -> list:
        """Allowed regions at one energy as (first piece, last piece) pairs."""
        out = []
        start = None
        for j, v in enumerate(self.v):
            if v < energy:
                if start is None:
                    start = j
            elif start is not None:
                out.append((start, j - 1))
                start = None
        if start is not None:
            out.append((start, len(self.v) - 1))
        return out

    def mass(self, j: int, energy: float) -> float:
        """m(E) [m0] of piece j (clipped like Band.mass)."""
        ig = self.invg[j]
        if ig == 0.0:
            return self.m[j]
        return self.m[j] * max(1.0 + (energy - self.v[j]) * ig, _MIN_MASS_FRACTION)

    def k(self, j: int, energy: float, sign: float = 1.0) -> float:
        """Wave number (sign=+1) or decay constant (sign=-1) of piece j [1/nm]."""
        d = sign * (energy - self.v[j])
        if d <= 0.0:
            return 0.0
        if math.isinf(d):
            return math.inf
        return math.sqrt(d * self.mass(j, energy) / HBAR2_2M0_EV_NM2)

    def pack(self, e_top: float):
        """Segments, regions and the coefficient arrays of G for energies below e_top.

        Returns ``(rows, segs, grid, grid_coef, coef, nu, ulp)``: rows (segment,
        region, first piece, last piece); segments (segment, lower edge, first
        row, row count, regions); the scan grid shaped (points, rows); the
        coefficients broadcast to the grid, and shaped (columns, 1, rows); the
        number of phase columns; the unit in the last place of the largest
        scanned energy [eV].
        """
        got = self.packs.get(e_top)
        if got is not None:
            return got
        edges = [self.v_min] + [c for c in self.crit if self.v_min < c < e_top] + [e_top]
        rows = []
        segs = []
        ea, eb = [], []
        for s in range(len(edges) - 1):
            lo_e, hi_e = edges[s], edges[s + 1]
            width = hi_e - lo_e
            if width <= 0:
                continue
            eps = max(1e-12, 1e-10 * width)
            a, b = lo_e + eps, hi_e - eps
            if b <= a:
                continue
            runs = self.runs(0.5 * (lo_e + hi_e))
            segs.append((s, lo_e, len(rows), len(runs), runs))
            for r, (j0, j1) in enumerate(runs):
                rows.append((s, r, j0, j1))
                ea.append(a)
                eb.append(b)
        if not rows:
            got = (rows, segs, None, None, None, 0, 0.0)
            self.packs[e_top] = got
            return got
        # materials that occur inside some region (the others add nothing to the phase)
        used = sorted({self.mat[j] for (_s, _r, j0, j1) in rows for j in range(j0, j1 + 1)})
        lsum = [[0.0] * len(rows) for _ in used]
        where = {u: i for i, u in enumerate(used)}
        wl, wr, bl, br = [], [], [], []
        for i, (_s, _r, j0, j1) in enumerate(rows):
            for j in range(j0, j1 + 1):
                lsum[where[self.mat[j]]][i] += self.thick[j]
            wl.append(j0)
            wr.append(j1)
            bl.append(j0 - 1)
            br.append(j1 + 1)
        vu = [self.mats[u][0] for u in used]
        mu = [self.mats[u][1] for u in used]
        gu = [self.mats[u][2] for u in used]
        ends = (wl, wr, bl, br)
        pv, pm, pg = self.v, self.m, self.invg
        v_e = [[pv[j] for j in col] for col in ends]
        m_e = [[pm[j] for j in col] for col in ends]
        g_e = [[pg[j] for j in col] for col in ends]
        nr = len(rows)
        # grid points crowd towards both segment ends (t = (1 - cos)/2), where G has
        # square-root behaviour, so that interpolated starting points are uniformly good
        t = _FLAT_T
        ea_a, eb_a = np.asarray(ea, dtype=float), np.asarray(eb, dtype=float)
        grid = ea_a[None, :] + t[:, None] * (eb_a - ea_a)[None, :]
        grid[-1] = eb_a
        if self.nonparabolic:
            # columns [materials, well sides (2), barrier sides (2)] as in the parabolic case
            # below, with x = s (E - v) and the two-band mass factor
            # f = max(1 + s x / Eg, 0.01) of each column: pi G = sum_u A_u sqrt(x_u f_u)+
            # + sum_ends arctan2(a sqrt(x_w f_w)+, c f_w sqrt(x_b / f_b)+)
            nu = len(used)
            mw = np.asarray(m_e[:2])
            mb = np.asarray(m_e[2:])
            cv = np.concatenate([np.asarray(vu).reshape(nu, 1) * np.ones((1, nr)),
                                 np.asarray(v_e[:2]), -np.asarray(v_e[2:])])
            cs = np.ones((nu + 4, nr))
            cs[nu + 2:] = -1.0
            cg = np.concatenate([np.asarray(gu).reshape(nu, 1) * np.ones((1, nr)),
                                 np.asarray(g_e[:2]), -np.asarray(g_e[2:])])
            cc = np.concatenate([np.asarray(lsum).reshape(nu, nr)
                                 * np.sqrt(np.asarray(mu) / HBAR2_2M0_EV_NM2).reshape(nu, 1)
                                 * _INV_PI,
                                 np.sqrt(mw / HBAR2_2M0_EV_NM2),
                                 mw / np.sqrt(mb * HBAR2_2M0_EV_NM2)])
            coef = tuple(x.reshape(-1, 1, nr) for x in (cv, cs, cc, cg))
        else:
            # pi G = sum_u A_u sqrt(E - v_u)+ + sum_ends arctan2(a sqrt(E - v_w)+, c sqrt(v_b - E)+):
            # one square root over the columns [materials, well sides, barrier sides] of
            # s (E - v), then the phase sum and the arctan of the ends
            nu = len(used)
            mw = np.asarray(m_e[:2])
            mb = np.asarray(m_e[2:])
            cv = np.concatenate([np.asarray(vu).reshape(nu, 1) * np.ones((1, nr)),
                                 np.asarray(v_e[:2]), -np.asarray(v_e[2:])])
            cs = np.ones((nu + 4, nr))
            cs[nu + 2:] = -1.0
            cc = np.concatenate([np.asarray(lsum).reshape(nu, nr)
                                 * np.sqrt(np.asarray(mu) / HBAR2_2M0_EV_NM2).reshape(nu, 1)
                                 * _INV_PI,
                                 np.sqrt(mw / HBAR2_2M0_EV_NM2),
                                 mw / np.sqrt(mb * HBAR2_2M0_EV_NM2)])
            coef = tuple(x.reshape(-1, 1, nr) for x in (cv, cs, cc))
        npts = _FLAT_SCAN_POINTS
        grid_coef = tuple(x.repeat(npts, axis=1) for x in coef)
        # unit in the last place of the largest energy of the scan (final bracket rounding)
        ulp = math.ulp(max(max(abs(x) for x in ea), max(abs(x) for x in eb)))
        got = (rows, segs, grid, grid_coef, coef, len(used), ulp)
        if len(self.packs) < 8:
            self.packs[e_top] = got
        return got

    def G(self, energy, coef, nu):
        """G(E) for energies shaped (n, rows) with coefficients (columns, n or 1, rows)."""
        if not self.nonparabolic:
            cv, cs, cc = coef
            q = np.sqrt(np.fmax(energy * cs - cv, 0.0)) * cc
            a = np.arctan2(q[nu:nu + 2], q[nu + 2:])
            g = a[0] + a[1]
            g *= _INV_PI
            for i in range(nu):
                g += q[i]
            return g
        # nonparabolic: mass factor f = max(1 + s x / Eg, 0.01) per column (Band.mass rule).
        # (E - inf) * 0 of a parabolic hard wall gives NaN in f, which fmax turns into the
        # clip value; x / f stays +inf there (callers hold an errstate)
        cv, cs, cc, cg = coef
        x = energy * cs - cv
        f = x * cg
        f += 1.0
        np.fmax(f, _MIN_MASS_FRACTION, out=f)
        nw = nu + 2
        np.multiply(x[:nw], f[:nw], out=x[:nw])
        np.divide(x[nw:], f[nw:], out=x[nw:])
        np.fmax(x, 0.0, out=x)
        np.sqrt(x, out=x)
        x *= cc
        q = x[nw:] * f[nu:nw]            # m_w(E) / m_w of the well side
        a = np.arctan2(x[nu:nw], q)
        g = a[0] + a[1]
        g *= _INV_PI
        for i in range(nu):
            g += x[i]
        return g


def _flat_plan(band: Band):
    """The cached :class:`_FlatPlan` of a band made only of flat pieces, else None."""
    key = id(band)
    hit = _FLAT_CACHE.get(key)
    if hit is not None and hit[0]() is band:
        return hit[1]
    plan = None
    if all(p.kind != "smooth" and p.edge_slope_eV_per_nm == 0.0 for p in band.pieces):
        plan = _FlatPlan(band)
    try:
        ref = weakref.ref(band, lambda r, key=key: (_FLAT_CACHE.pop(key, None)
                                                    if _FLAT_CACHE.get(key, (None,))[0] is r
                                                    else None))
    except TypeError:          # not weak-referenceable: no caching
        return plan
    if len(_FLAT_CACHE) >= _FLAT_CACHE_MAX:
        _FLAT_CACHE.pop(next(iter(_FLAT_CACHE)))
    _FLAT_CACHE[key] = (ref, plan)
    return plan


def _flat_roots(plan: _FlatPlan, grid, grid_coef, coef, nu, tol, ulp):
    """Brackets and refines every root G = n of every row of an all-flat band.

    One evaluation of G on the grid of every row brackets all roots (G is
    continuous and increasing inside a segment; a running maximum guards
    against rounding).  A linear interpolation in the bracket starts a
    vectorised safeguarded secant iteration: each round evaluates G at
    ``c -/+ tol/2`` for all roots at once; where the two values straddle the
    target the root is bracketed to ``tol`` (verified, done), elsewhere the
    verified bracket shrinks and the secant (Newton) step through the two
    points gives the next ``c`` (bisection when it leaves the bracket, and
    after ``_FLAT_NEWTON_ROUNDS`` rounds).

    Returns ``(ga, roots)``: G at the bottom of each row's segment (list) and
    ``None`` or ``(row, target, lo, hi, slope, done)`` as lists.
    """
    with np.errstate(divide="ignore", invalid="ignore"):     # guarded divisions below
        return _flat_roots_inner(plan, grid, grid_coef, coef, nu, tol, ulp)


def _flat_roots_inner(plan, grid, grid_coef, coef, nu, tol, ulp):
    """Body of :func:`_flat_roots` (inside its errstate)."""
    gg = np.maximum.accumulate(plan.G(grid, grid_coef, nu), axis=0).T   # (rows, points)
    ga = gg[:, 0].tolist()
    gb = gg[:, -1].tolist()
    row, target, offs = [], [], []
    top = 0.0
    for r, (g0, g1) in enumerate(zip(ga, gb)):
        n_lo = max(1, math.floor(g0) + 1)
        n_hi = math.floor(g1)
        offs.append(top)
        if n_hi >= n_lo:
            row.extend([r] * (n_hi - n_lo + 1))
            target.extend(range(n_lo, n_hi + 1))
        top += max(g1, 0.0) - min(g0, 0.0) + 2.0
    if not row:
        return ga, None
    # one sorted key array over all rows: row r's G shifted by offs[r] (the rows do not overlap)
    offs = np.asarray(offs)
    tgt = np.asarray(target, dtype=float)
    row_a = np.asarray(row)
    keys = (gg + offs[:, None]).ravel()
    j = keys.searchsorted(tgt + offs[row_a]) - 1       # keys[j] < target <= keys[j + 1]
    ef = grid.T.ravel()
    a, b = ef.take(j), ef.take(j + 1)
    gf = gg.ravel()
    fa, fb = gf.take(j) - tgt, gf.take(j + 1) - tgt
    c = b - fb * (b - a) / (fb - fa)
    mid = 0.5 * (a + b)
    c = np.where((c > a) & (c < b), c, mid)
    # coefficients of each root's row (one row: they broadcast as they are)
    sub = coef if len(ga) == 1 else tuple(x[..., row_a] for x in coef)
    half = 0.5 * tol * (1.0 - 1e-9) - 4.0 * ulp      # rounded hi - lo stays <= tol
    half = max(half, 0.0)
    pm = np.array([[-half], [half]])
    total = len(row)
    done = None                              # per-root flags once some but not all are done
    for it in range(_FLAT_MAX_ROUNDS):
        e2 = c + pm
        f2 = plan.G(e2, sub, nu) - tgt
        flo, fhi = f2[0], f2[1]
        ok = (flo <= _G_NOISE) & (fhi >= -_G_NOISE)
        n_ok = int(np.count_nonzero(ok))
        if done is None and n_ok == total:
            lo, hi = e2[0], e2[1]
            return ga, (row, target, lo.tolist(), hi.tolist(),
                        ((fhi - flo) / (hi - lo)).tolist(), [True] * total)
        if n_ok:
            if done is None:
                done = np.zeros(total, dtype=bool)
                lo_out, hi_out, sl_out = a.copy(), b.copy(), np.zeros(total)
            new = ok & ~done
            lo_out[new], hi_out[new] = e2[0, new], e2[1, new]
            sl_out[new] = (fhi[new] - flo[new]) / (e2[1, new] - e2[0, new])
            done |= ok
            if np.count_nonzero(done) == total:
                break
        # shrink the verified bracket [a, b] with the two new points
        below = fhi < 0
        a = np.where(below, e2[1], a)
        fa = np.where(below, fhi, fa)
        above = flo > 0
        b = np.where(above, e2[0], b)
        fb = np.where(above, flo, fb)
        mid = 0.5 * (a + b)
        if it < _FLAT_NEWTON_ROUNDS:
            cn = c - (flo + fhi) * half / (fhi - flo)
            cn = np.where((cn > a) & (cn < b), cn, mid)
        else:
            cn = mid
        c = cn if done is None else np.where(done, c, cn)
    if done is None:
        done = np.zeros(total, dtype=bool)
        lo_out, hi_out, sl_out = a, b, np.zeros(total)
    # unconverged leftovers keep their verified bracket [a, b]
    lo_out = np.where(done, lo_out, a)
    hi_out = np.where(done, hi_out, b)
    sl_out = np.where(done, sl_out, (fb - fa) / (b - a))
    return ga, (row, target, lo_out.tolist(), hi_out.tolist(), sl_out.tolist(), done.tolist())


def _coupling_messages(prefix, nb, T, spacing, energy, nspan, others) -> list:
    """Why a state's estimate is unreliable because of region ``nb`` (empty: it is not).

    ``T`` is the barrier's tunnelling factor exp(-int kappa dz); ``others``
    holds (index, energy, level spacing, allowed span) of the other
    candidates.  A level of the neighbour region is coupled when the
    Landau–Lifshitz splitting estimate T sqrt(s1 s2)/(2 pi) exceeds
    MIXING_LIMIT times the energy difference.
    """
    msgs = []
    if T > TUNNEL_FACTOR_LIMIT:
        msgs.append(f"barrier to region {nb} not opaque (tunnelling factor {T:.2g}): "
                    "regions coupled, estimate unreliable")
    for jdx, e2, spacing2, span2 in others:
        if span2[1] <= nspan[0] or span2[0] >= nspan[1]:
            continue
        t = T * math.sqrt(spacing * spacing2) / (2.0 * math.pi)
        de = abs(energy - e2)
        if t > MIXING_LIMIT * de:
            msgs.append(f"coupled to {prefix}{jdx + 1} in region {nb} "
                        f"(|dE| = {de * 1e3:.3g} meV, tunnel coupling ~{t * 1e3:.2g} meV):"
                        " estimate unreliable")
    return msgs


def _energy_window(limit: float, v_max: float, max_states):
    """(states wanted, top of the search window [eV], notes) for a band.

    With two hard-wall claddings there is no confinement limit: the lowest 10
    states are listed unless ``max_states`` says otherwise, searched up to
    1 eV above the highest finite potential.
    """
    if not math.isinf(limit):
        return max_states, limit, []
    if max_states is not None:
        return max_states, v_max + 1.0, []
    return 10, v_max + 1.0, ["both claddings are hard walls: only the lowest 10 states are listed "
                             "(use max_states)"]


def _solve_flat(band: Band, plan: _FlatPlan, tol: float, max_states) -> Levels:
    """solve_semiclassical for an all-flat band (closed-form G, see _FlatPlan)."""
    limit = plan.limit
    want, e_top, notes = _energy_window(limit, plan.v_max, max_states)
    while True:
        cands, drops = _flat_scan(plan, plan.pack(e_top), tol)
        if not math.isinf(limit) or len(cands) >= want:
            break
        e_top = plan.v_min + 2.0 * (e_top - plan.v_min)
    if want is not None:
        cands = cands[:want]

    # candidates: (energy, width, region, n, converged, ill_defined, spacing, runs)
    infos = []
    for c in cands:
        runs = c[7] if c[7] is not None else plan.runs(c[0] + 1e-9)
        j0, j1 = runs[min(c[2], len(runs) - 1)]
        infos.append((runs, (j0, j1), (plan.z0[j0], plan.z1[j1])))
    sign = band.carrier_sign
    prefix = band.prefix
    states = []
    all_converged = True
    unreliable_any = False
    for idx, (c, (runs, (j0, j1), span)) in enumerate(zip(cands, infos)):
        energy, width, region, n, converged, ill, spacing = c[:7]
        msgs = [f"region {region} (z = {span[0]:.3f} to {span[1]:.3f} nm)"
                + ("" if ill else f", n = {n} in region")]
        bad = False
        # validity: flat pieces have d(1/k)/dz = 0; internal steps give reflection amplitudes
        validity = 0.0
        for j in range(j0 + 1, j1 + 1):
            g1 = plan.k(j - 1, energy) / plan.mass(j - 1, energy)
            g2 = plan.k(j, energy) / plan.mass(j, energy)
            if g1 + g2 > 0:
                validity = max(validity, abs((g1 - g2) / (g1 + g2)))
        if validity > VALIDITY_THRESHOLD:
            msgs.append(f"semiclassical validity figure {validity:.2f} > {VALIDITY_THRESHOLD}: "
                        "estimate poor")
            bad = True
        if ill:
            msgs.append("boundary type changes at this energy: estimate ill-defined")
            bad = True
        for nb in (region - 1, region + 1):
            if nb < 0 or nb >= len(runs):
                continue
            n0, n1 = runs[nb]
            nspan = (plan.z0[n0], plan.z1[n1])
            between = range(n1 + 1, j0) if nb < region else range(j1 + 1, n0)
            total = 0.0
            for jb in between:
                if math.isinf(plan.v[jb]):
                    total = float("inf")
                    break
                total += plan.k(jb, energy, -1.0) * plan.thick[jb]
            T = math.exp(-total)
            others = [(jdx, c2[0], c2[6], info[2])
                      for jdx, (c2, info) in enumerate(zip(cands, infos)) if jdx != idx]
            found = _coupling_messages(prefix, nb, T, spacing, energy, nspan, others)
            if found:
                msgs += found
                bad = True
        label = f"{prefix}{idx + 1}"
        conv = converged and width <= tol * (1 + 1e-9)
        all_converged = all_converged and conv
        if bad:
            unreliable_any = True
            notes.append(f"{label}: " + "; ".join(msgs[1:]))
            warnings.warn(f"{band.name} {label}: " + "; ".join(msgs[1:]), ValidityWarning,
                          stacklevel=3)
        states.append(State(band=band.name, label=label, index=idx + 1,
                            energy_eV=float(sign * energy), carrier_energy_eV=float(energy),
                            bound=True, tolerance_eV=float(width), converged=conv,
                            region=region, validity=float(validity), message="; ".join(msgs)))
    return _finish(band, states, notes, limit, plan.v_min, plan.v_max, drops, unreliable_any,
                   all_converged, tol)


def _flat_scan(plan: _FlatPlan, pack, tol):
    """Candidates and count drops of an all-flat band (same bookkeeping as _scan)."""
    rows, segs, grid, grid_coef, coef, nu, ulp = pack
    cands = []
    drops = []
    if not rows:
        return cands, drops
    ga, roots = _flat_roots(plan, grid, grid_coef, coef, nu, tol, ulp)
    start_count = [max(0, math.floor(g)) for g in ga]
    per_row = [[] for _ in rows]
    if roots is not None:
        for r, n, lo, hi, sl, ok in zip(*roots):
            per_row[r].append((0.5 * (lo + hi), hi - lo, rows[r][1], int(n), ok, False,
                               1.0 / sl if sl > 0 else float("inf")))
    best = 0
    for s, lo_e, r0, nrow, runs in segs:
        count_start = sum(start_count[r0:r0 + nrow])
        found = []
        for r in range(r0, r0 + nrow):
            found.extend(c + (runs,) for c in per_row[r])
        if count_start < best and s > 0:
            drops.append(lo_e)
        current = count_start
        while current > best:          # count jumps up at the critical energy itself
            cands.append((lo_e, 0.0, 0, current, True, True, float("inf"), None))
            best += 1
        found.sort(key=lambda c: c[0])
        for c in found:
            current += 1
            if current > best:
                cands.append(c)
                best = current
    return cands, drops


def _finish(band, states, notes, limit, v_min, v_max_inner, drops, unreliable_any,
            all_converged, tolerance_eV) -> Levels:
    """Summary notes and the Levels object (shared by both paths)."""
    sign = band.carrier_sign
    finite = not math.isinf(limit)
    if finite and v_max_inner > limit + 1e-12:
        notes.append(f"leaky structure: barriers rise above the confinement limit "
                     f"{float(sign * limit):.4g} eV; quasi-bound states above it "
                     "are not reported")
    elif finite:
        notes.append(f"energies above the confinement limit "
                     f"{float(sign * limit):.4g} eV are not reported")
    if drops:
        notes.append("the semiclassical count drops at "
                     + ", ".join(f"{float(sign * e):.4g}" for e in drops)
                     + " eV (boundary type changes); states near these energies are uncertain")
    if not states:
        message = (f"no bound state below the confinement limit "
                   f"(well bottom {float(sign * v_min):.4g} eV)")
    else:
        message = f"{len(states)} semiclassical state(s)"
        if unreliable_any:
            message += "; some flagged unreliable (see notes)"
    return Levels(band=band.name, method="semiclassical", states=tuple(states),
                  converged=all_converged, message=message, notes=tuple(notes),
                  tolerance_eV=tolerance_eV,
                  confinement_limit_eV=float(sign * limit) if finite else None)
