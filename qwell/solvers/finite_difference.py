"""Finite-difference BenDaniel–Duke eigen-solver (band-edge masses, or nonparabolic).

The listed layers plus ``cladding_nm`` of each semi-infinite cladding are
discretised with a uniform step; ``-hbar^2/2 d/dz (1/m) d/dz + V`` uses the
band-edge mass at the mid-points between nodes (the symmetric BenDaniel–Duke
form [1]_, second order in the step), with hard walls (``psi = 0``) one step
beyond the added claddings.  Nodes where the potential is infinite (hard-wall
layers) are walls too.  The eigenpairs below the confinement limit come from
:func:`scipy.linalg.eigh_tridiagonal`: they are orthonormal and complete by
construction, which the Schrödinger–Poisson loop needs for near-degenerate
doublets of weakly coupled wells (:mod:`qwell.selfconsistent`).

Model statements
----------------
* Parabolic by default: the band-edge mass is used at every energy.  With
  ``nonparabolic=True`` each state uses the band's energy-dependent mass at
  its own energy (the two-band model of :mod:`qwell.bands`, as the exact
  solver), found as the fixed point ``E_k = k-th eigenvalue of H(E_k)``.
* Only bound states (below the confinement limit); no quasi-bound resonances,
  no minibands.
* The added claddings are closed by hard walls, which lifts states close to
  the confinement limit slightly (their tails reach the walls).
* Accuracy: the discretisation error is estimated from a second solve at
  twice the step, ``|E(h) - E(2h)|`` (an upper estimate for a second-order
  scheme; first order when an interface falls between nodes), and reported
  as ``State.tolerance_eV``; ``converged`` says whether it meets the
  requested tolerance.  The estimate assumes the step resolves the decay
  length of the states in the barriers (step x kappa < 1): walls far higher
  than ``hbar^2/(2 m step^2)`` (~15 eV at 0.05 nm for m = 0.067) are
  under-resolved and better given as infinite (hard-wall) layers.

References
----------
.. [1] D. J. BenDaniel and C. B. Duke, "Space-charge effects on electron
   tunneling", Phys. Rev. 152, 683 (1966).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.linalg import eigh_tridiagonal

from ..bands import Band
from ..constants import HBAR2_2M0_EV_NM2
from ..errors import ParameterError
from .results import Levels, State

__all__ = ["solve_finite_difference", "DEFAULT_STEP_NM", "DEFAULT_CLADDING_NM",
           "DEFAULT_MAX_STATES"]

#: Default grid step [nm].
DEFAULT_STEP_NM = 0.05
#: Default length of each cladding included in the grid [nm].
DEFAULT_CLADDING_NM = 20.0
#: States reported when both claddings are hard walls and ``max_states`` is not given.
DEFAULT_MAX_STATES = 10


def _grid(band: Band, step_nm: float, cladding_nm: float):
    """Interior nodes, step and mid-points of the grid."""
    z0, z1 = band.z_start_nm - cladding_nm, band.z_end_nm + cladding_nm
    n = max(8, int(math.ceil((z1 - z0) / step_nm)))
    h = (z1 - z0) / n
    z = z0 + h * np.arange(1, n)                 # interior nodes (psi = 0 at z0, z1)
    zm = z0 + h * (np.arange(n) + 0.5)           # mid-points, one more than nodes
    return z, h, zm


def _matrix(band: Band, z, h, zm, energy_eV=None):
    """Diagonal, off-diagonal, kept nodes (None: all) and V_min of the tridiagonal problem.

    With ``energy_eV`` (carrier scale) the mass is the band's energy-dependent
    mass at that energy (:meth:`Band.mass`), else the band-edge mass.
    """
    c = HBAR2_2M0_EV_NM2
    # a node or mid-point that falls exactly on an interface takes the mean of both sides
    # (otherwise the piece look-up would favour one side and break mirror symmetry)
    d = 1e-9 * h
    if energy_eV is None:
        inv_m = 0.5 * (1.0 / band.edge_mass(zm - d) + 1.0 / band.edge_mass(zm + d))
    else:
        with np.errstate(invalid="ignore"):
            inv_m = 0.5 * (1.0 / band.mass(zm - d, energy_eV) + 1.0 / band.mass(zm + d, energy_eV))
        inv_m = np.where(np.isfinite(inv_m), inv_m, 0.0)
    with np.errstate(invalid="ignore"):
        v_node = 0.5 * (band.potential(z - d) + band.potential(z + d))
    finite = np.isfinite(v_node)
    diag = c * (inv_m[:-1] + inv_m[1:]) / h ** 2 + np.where(finite, v_node, 0.0)
    off = -c * inv_m[1:-1] / h ** 2
    if not np.all(finite):
        # hard-wall nodes: psi = 0 there; drop them and cut the couplings to them
        off = np.where(finite[:-1] & finite[1:], off, 0.0)
        keep = np.flatnonzero(finite)
        off = off[keep[:-1]] * (np.diff(keep) == 1)
        diag = diag[keep]
    else:
        keep = None
    v_min = float(np.min(v_node[finite])) if np.any(finite) else math.inf
    return diag, off, keep, v_min


def _eigenpairs(band: Band, step_nm: float, cladding_nm: float, limit_eV: float,
                count_inf: int = 10, nonparabolic: bool = False):
    """Grid, eigenvalues (carrier scale, ascending) and grid-normalised eigenvectors.

    With ``nonparabolic`` (and a nonparabolic band) each state k is the fixed
    point ``E_k = k-th eigenvalue of H(E_k)``, H built with the mass m(z, E_k).
    """
    z, h, zm = _grid(band, step_nm, cladding_nm)
    diag, off, keep, v_min = _matrix(band, z, h, zm)
    if not limit_eV > v_min:
        return z, h, np.empty(0), np.empty((z.size, 0))
    if math.isfinite(limit_eV):
        w, v = eigh_tridiagonal(diag, off, select="v", select_range=(v_min - 1.0, limit_eV))
    else:
        # hard walls on both sides: every state is bound; take the lowest count_inf
        w, v = eigh_tridiagonal(diag, off, select="i",
                                select_range=(0, min(count_inf, diag.size) - 1))
    if nonparabolic and band.nonparabolic and w.size:
        w, v = _nonparabolic_pairs(band, z, h, zm, w, v)
    if keep is not None:
        full = np.zeros((z.size, w.size))
        full[keep] = v
        v = full
    return z, h, w, v


#: Energy convergence of the nonparabolic fixed point [eV].
_NONPARABOLIC_TOL_EV = 1e-11


def _nonparabolic_pairs(band: Band, z, h, zm, w0, v0):
    """Eigenpairs with the energy-dependent mass: secant iteration on E - E_k(H(E))."""
    w = np.empty_like(w0)
    v = np.empty_like(v0)
    for k in range(w0.size):
        def kth(e, k=k):
            diag, off, _, _ = _matrix(band, z, h, zm, e)
            wk, vk = eigh_tridiagonal(diag, off, select="i", select_range=(k, k))
            return float(wk[0]), vk[:, 0]
        e0 = float(w0[k])
        e1, vec = kth(e0)
        g0 = e1 - e0
        for _ in range(60):
            e2, vec = kth(e1)
            g1 = e2 - e1
            if abs(g1) <= _NONPARABOLIC_TOL_EV:
                e1 = e2
                break
            # secant step on g(E) = E_k(H(E)) - E (plain fixed-point step when flat)
            e_new = e1 - g1 * (e1 - e0) / (g1 - g0) if g1 != g0 else e2
            e0, g0, e1 = e1, g1, e_new
        w[k] = e1
        v[:, k] = vec
    return w, v


def _layer_probability(band: Band, z: np.ndarray, p: np.ndarray, h: float) -> tuple:
    """Probability per listed piece (claddings counted in the first and last)."""
    idx = np.clip(np.searchsorted(band.boundaries_nm, z, side="right") - 1, 0,
                  len(band.pieces) - 1)
    return tuple(float(x) for x in np.bincount(idx, weights=p * h, minlength=len(band.pieces)))


def solve_finite_difference(band: Band, *, tolerance_eV: float = 1e-7,
                            max_states: int | None = None,
                            grid_step_nm: float = DEFAULT_STEP_NM,
                            max_energy_eV: float | None = None,
                            cladding_nm: float = DEFAULT_CLADDING_NM,
                            wavefunctions: bool = True,
                            error_estimate: bool = True,
                            nonparabolic: bool = False) -> Levels:
    """Bound states of ``band`` from the finite-difference eigenproblem.

    Parameters
    ----------
    band : Band
        Carrier-convention potential (see :mod:`qwell.bands`).
    tolerance_eV : float
        Requested accuracy [eV]; states whose estimated discretisation error
        exceeds it are flagged ``converged=False`` (refine ``grid_step_nm``).
    max_states : int, optional
        Keep only the lowest ``max_states`` states (when both claddings are
        hard walls every state is bound: default then
        :data:`DEFAULT_MAX_STATES`).
    grid_step_nm : float
        Grid step [nm] (the error falls as its square).
    max_energy_eV : float, optional
        Upper end of the search window in carrier energy [eV] (default and
        at most: the confinement limit).
    cladding_nm : float
        Length of each cladding included before the closing hard wall [nm].
    wavefunctions : bool
        Keep the normalised wavefunctions and layer probabilities.
    error_estimate : bool
        Estimate the discretisation error from a second solve at twice the
        step (default).  Without it (inside the Schrödinger–Poisson loop,
        where only the self-consistent potential matters and the final states
        come from another solver) each state carries the requested tolerance,
        unverified, and says so in its ``message``.
    nonparabolic : bool
        Use the band's energy-dependent mass (:meth:`Band.mass`, two-band
        model) for each state at its own energy, as the exact solver does;
        default False (band-edge masses).  Each state is the self-consistent
        root of ``E = E_k(H(E))`` (secant iteration to 1e-11 eV).

    Returns
    -------
    Levels
        ``method='finite_difference'``; states labelled ``{prefix}{n}`` in
        increasing carrier energy, ``psi`` on the grid nodes, normalised to
        ``sum psi^2 h = 1`` and with the largest lobe positive.

    Examples
    --------
    >>> from qwell.bands import band_from_layers
    >>> band = band_from_layers([(20, 0.3, 0.067), (10, 0.0, 0.067), (20, 0.3, 0.067)])
    >>> lev = solve_finite_difference(band, tolerance_eV=1e-4)
    >>> round(lev["e1"].energy_eV, 3)
    0.034
    """
    if not tolerance_eV > 0:
        raise ParameterError("tolerance_eV must be positive")
    if not grid_step_nm > 0:
        raise ParameterError("grid_step_nm must be positive")
    if max_states is not None and max_states < 1:
        raise ParameterError("max_states must be at least 1")
    limit = band.confinement_limit_eV
    if max_energy_eV is not None:
        limit = min(limit, float(max_energy_eV))
    count = max_states if max_states is not None else DEFAULT_MAX_STATES
    z, h, w, v = _eigenpairs(band, grid_step_nm, cladding_nm, limit, count, nonparabolic)
    if max_states is not None:
        w, v = w[:max_states], v[:, :max_states]
    err = np.full(w.size, float(tolerance_eV))
    if error_estimate and w.size:
        # coarse window a little wider: a state just below the limit at h may lie above it at 2h
        _, _, w2, _ = _eigenpairs(band, 2.0 * grid_step_nm, cladding_nm,
                                  limit + max(1e-3, 0.1 * (limit - float(w[0]))), w.size,
                                  nonparabolic)
        k = min(w.size, w2.size)
        err = np.full(w.size, math.inf)
        err[:k] = np.abs(w[:k] - w2[:k])
    note = ("finite-difference state; discretisation error estimated from the solve at twice "
            "the step" if error_estimate else
            "finite-difference state; discretisation error not estimated")
    states = []
    for k in range(w.size):
        psi = v[:, k] / math.sqrt(h)             # normalised: sum psi^2 h = 1
        if psi[np.argmax(np.abs(psi))] < 0:
            psi = -psi
        eps = float(w[k])
        tol_k = max(float(err[k]), 0.0) if error_estimate else float(tolerance_eV)
        states.append(State(
            band=band.name, label=f"{band.prefix}{k + 1}", index=k + 1,
            energy_eV=float(band.profile_energy(eps)), carrier_energy_eV=eps,
            tolerance_eV=tol_k, converged=bool(tol_k <= tolerance_eV),
            z_nm=z if wavefunctions else None, psi=psi if wavefunctions else None,
            layer_probability=_layer_probability(band, z, psi ** 2, h) if wavefunctions else (),
            message=note))
    return Levels(band=band.name, method="finite_difference", states=tuple(states),
                  converged=all(s.converged for s in states), tolerance_eV=tolerance_eV,
                  confinement_limit_eV=float(band.profile_energy(limit)))
