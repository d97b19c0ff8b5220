"""Self-consistent Schrödinger–Poisson solution of doped stacks.

:func:`solve_self_consistent` iterates

1. band profile with the electrostatic energy ``U(z) = -e phi(z)`` added to
   every band edge (:func:`qwell.profile.band_profile`, ``electrostatic_eV``),
2. subband states of the conduction band (and of the heavy- and light-hole
   bands when the stack has acceptors) with the exact solver,
3. occupation by 2D Fermi–Dirac statistics at the stack temperature,
   ``n_i = (m_i kT / pi hbar^2) ln(1 + exp((E_F - E_i)/kT))``, density
   ``n(z) = sum_i n_i |psi_i(z)|^2`` (holes alike with ``E_i - E_F``),
4. the Fermi level from overall charge neutrality (default) or as given,
5. Poisson's equation for the new U (:mod:`qwell.poisson`),

until ``max |U_out - U_in|`` (the Poisson output of the current charge
minus the potential that produced it) is below ``tolerance_meV``.

Model statements
----------------
* Inside the loop the subbands come by default from a finite-difference
  BenDaniel–Duke eigen-solver (:mod:`qwell.solvers.finite_difference`,
  0.05 nm step, parabolic band-edge masses, orthonormal by construction).
  When the stack has nonparabolicity on (the default) and the parabolic
  loop has converged, the loop goes on with the exact (nonparabolic)
  solver from that potential until it converges again: the Fermi level and
  the sheet densities are those of the energies the exact solver reports
  (:func:`qwell.levels.solve_stack`), not of parabolic ones (which lie
  ~1 meV higher in an 8 nm GaAs well).  This module is the loop only: the
  states of every band and the transitions on the self-consistent profile
  come from :func:`qwell.levels.solve_stack` (exact solver).
* Only the subband states the exact solver reports (bound and localised
  quasi-bound states) hold carriers; carriers in the continuum above the
  claddings are not counted (a ValidityWarning says when the Fermi level
  comes within 3 kT of the confinement limit).
* In-plane mass of subband i: the band-edge mass weighted by ``|psi_i|^2``
  (``inplane_mass='edge'``, default); ``'nonparabolic'`` weights the
  energy-dependent mass ``m(z, E_i)`` of the band instead.  Hole subbands
  use their band's [001] edge mass in-plane too (a crude approximation of
  the anisotropic valence band; stated).  Subbands are parabolic in-plane.
* Donors are completely ionised unless a layer gives ``donor_level``;
  acceptors always completely ionised (see :mod:`qwell.poisson`).
* Wavefunctions are sampled on the Poisson grid (over the listed layers) and
  renormalised there, so that the carrier charge on the grid equals the
  sheet densities exactly; the small tail probability in the claddings is
  thereby moved inside the stack.

Mixing
------
``mixing='anderson'`` (default): the predictor–corrector update of
Trellakis et al. [2]_ (a nonlinear Poisson equation in which the subband
energies follow the local potential change to first order, solved by
Newton's method together with the Fermi level), accelerated by Anderson
(Pulay) mixing [3]_ of the successive updates, with a fall back to the
plain predictor step when the residual grows.  ``'predictor'``: the
predictor–corrector update alone.  ``'linear'``: plain Poisson update with
adaptive under-relaxation (robust and slow; the last resort).

References
----------
.. [1] T. Ando, A. B. Fowler and F. Stern, "Electronic properties of
   two-dimensional systems", Rev. Mod. Phys. 54, 437 (1982).
.. [2] A. Trellakis, A. T. Galick, A. Pacelli and U. Ravaioli, "Iteration
   scheme for the solution of the two-dimensional Schrödinger–Poisson
   equations in quantum structures", J. Appl. Phys. 81, 7880 (1997).
.. [3] D. G. Anderson, "Iterative procedures for nonlinear integral
   equations", J. ACM 12, 547 (1965).
.. [4] M. Helm, "The basic physics of intersubband transitions", in
   Semiconductors and Semimetals 62, Academic Press (2000), ch. 1.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field, replace

import numpy as np

from .constants import E_C, HBAR_J_S, KB_EV_PER_K, M0_KG
from .errors import ConvergenceError, ParameterError, ValidityWarning
from .poisson import (POISSON_EV_NM2_PER_CM3, build_grid, doping_on_grid,
                      ionised_donors_cm3, ionised_donors_derivative, poisson_operator,
                      sheet_density_2d, sheet_density_2d_derivative, solve_poisson)
from .profile import Profile, band_profile
from .solvers import Levels, count_states_below, solve

__all__ = ["SelfConsistentResult", "solve_self_consistent", "sheet_density_2d", "MIXING_SCHEMES",
           "INNER_SOLVERS"]

MIXING_SCHEMES = ("anderson", "predictor", "linear")
#: Subband solvers the loop can use (names of :data:`qwell.solvers.METHODS`).
INNER_SOLVERS = ("fd", "exact")
_HOLE_BANDS = ("heavy_hole", "light_hole")
_PSI2_PER_NM_TO_CM = 1e7          # |psi|^2 [nm^-1] -> [cm^-1]
#: States further than this plus 40 kT beyond the Fermi level are not solved in the
#: loop (occupation below exp(-40)); the margin covers the Fermi-level change
#: between iterations.
_OCCUPATION_MARGIN_EV = 0.1
#: Largest overlap accepted between two states of one band in the loop.
_ORTHOGONALITY_LIMIT = 1e-2
#: Two states closer than this many solver tolerances may be two copies of one state
#: (a doublet split by less than the tolerance); farther apart, their overlap is not an
#: effect of the tolerance (nonparabolic envelopes overlap by ~1e-2 at any tolerance).
_DOUBLET_SPAN = 100.0
#: Overlap above which two states look like copies of one state.
_COPY_OVERLAP = 0.5


@dataclass(frozen=True)
class SelfConsistentResult:
    """Outcome of :func:`solve_self_consistent`.

    Attributes
    ----------
    profile : qwell.profile.Profile
        Final band profile, electrostatic energy included.
    levels : Mapping[str, qwell.solvers.Levels]
        Band name -> the occupiable bound states of the last iteration (the
        carrier bands only, no transitions; empty when no iteration ran).
        The full solution of every band with transitions on ``profile`` is
        :func:`qwell.levels.solve_stack` (``self_consistent=True``).
    method : str
        Solver of ``levels``: 'finite_difference' or 'exact'.
    fermi_level_eV : float
        Fermi level on the band-diagram scale [eV]; NaN for an undoped stack
        without a given Fermi level (no charge: not defined by neutrality).
    sheet_densities_cm2 : dict
        State label -> sheet density of carriers in that subband [cm^-2]
        (electrons for e-states, holes for hh/lh states).
    subband_energies_eV : dict
        State label -> subband energy of the last iteration [eV, band-diagram
        scale]: the energies the occupation was computed from.
    inplane_mass_m0 : dict
        State label -> in-plane mass of the subband [m0] used in its 2-D
        density of states.
    z_nm : ndarray
        Poisson grid [nm].
    potential_eV : ndarray
        Electron potential energy U = -e phi on ``z_nm`` [eV] (U = 0 at z = 0).
    electron_density_cm3, hole_density_cm3 : ndarray
        Carrier densities on ``z_nm`` [cm^-3].
    donor_density_cm3, acceptor_density_cm3 : ndarray
        Ionised dopant densities on ``z_nm`` [cm^-3] (cell averages; sheet
        doping appears as a spike over one or two cells).
    iterations : int
        Schrödinger–Poisson iterations done (0 for the undoped short cut).
    residual_meV : float
        Final ``max |U_out - U_in|`` [meV].
    charge_residual : float
        |net charge| / total ionised dopant charge (0 when undoped).
    history : tuple of float
        Residual [meV] of every iteration.
    converged : bool
    message : str
    boundary : str
        Poisson boundary condition used ('neutral' or 'left').
    """

    profile: Profile
    levels: Mapping[str, Levels]
    method: str
    fermi_level_eV: float
    sheet_densities_cm2: dict
    z_nm: np.ndarray = field(repr=False)
    potential_eV: np.ndarray = field(repr=False)
    electron_density_cm3: np.ndarray = field(repr=False)
    hole_density_cm3: np.ndarray = field(repr=False)
    donor_density_cm3: np.ndarray = field(repr=False)
    acceptor_density_cm3: np.ndarray = field(repr=False)
    iterations: int = 0
    residual_meV: float = 0.0
    charge_residual: float = 0.0
    history: tuple = ()
    converged: bool = True
    message: str = ""
    boundary: str = "neutral"
    subband_energies_eV: dict = field(default_factory=dict)
    inplane_mass_m0: dict = field(default_factory=dict)

    @property
    def total_electrons_cm2(self) -> float:
        """Sum of the electron sheet densities [cm^-2]."""
        return float(sum(v for k, v in self.sheet_densities_cm2.items() if k.startswith("e")))


# ---------------------------------------------------------------------------
# subbands on the Poisson grid
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class _Subbands:
    """Occupiable subbands sampled on the grid (internal)."""

    labels: tuple
    energy_eV: np.ndarray      # band-diagram energies
    mass_m0: np.ndarray
    sign: np.ndarray           # +1 electrons, -1 holes
    psi2: np.ndarray           # (K, N) |psi|^2 on the grid [nm^-1], cell-normalised

    @property
    def size(self) -> int:
        return len(self.labels)


def _subbands(levels_by_band: dict, bands: dict, grid, inplane_mass: str) -> _Subbands:
    labels, energies, masses, signs, rows = [], [], [], [], []
    z = grid.z_nm
    for bname, lev in levels_by_band.items():
        band = bands[bname]
        sign = +1 if bname == "conduction" else -1
        edge_mass = band.edge_mass(z)
        for s in lev.states:
            if s.psi is None or s.z_nm is None:
                continue
            p2 = np.interp(z, s.z_nm, np.asarray(s.psi, dtype=float) ** 2, left=0.0, right=0.0)
            norm = grid.integrate(p2)
            if not norm > 0:
                continue
            p2 = p2 / norm
            if inplane_mass == "nonparabolic":
                m = band.mass(z, s.carrier_energy_eV)
            else:
                m = edge_mass
            labels.append(s.label)
            energies.append(s.energy_eV)
            masses.append(grid.integrate(p2 * m))
            signs.append(sign)
            rows.append(p2)
    n = grid.size
    return _Subbands(labels=tuple(labels), energy_eV=np.array(energies, dtype=float),
                     mass_m0=np.array(masses, dtype=float), sign=np.array(signs, dtype=int),
                     psi2=np.array(rows, dtype=float).reshape(len(rows), n))


class _Charge:
    """Net charge q(U, E_F) [cm^-3] with the predictor of Trellakis et al. (internal).

    For a trial potential U near the potential U_in that produced the
    subbands, subband energies follow the local change dU(z) = U - U_in:
    electrons see ``E_F - E_i - dU(z)``, holes ``E_i + dU(z) - E_F``.  At
    dU = 0 this is the plain charge of the subbands.
    """

    def __init__(self, grid, doping, ec0_eV, temperature_K, subbands: _Subbands, u_in_eV):
        self.grid, self.doping, self.ec0 = grid, doping, ec0_eV
        self.T = float(temperature_K)
        self.sb = subbands
        self.u_in = np.asarray(u_in_eV, dtype=float)
        self.acceptors = doping.acceptors_cm3

    def _args(self, u, ef):
        du = np.asarray(u) - self.u_in
        sb = self.sb
        # x = "Fermi minus subband" on each carrier's own scale, shape (K, N)
        x = sb.sign[:, None] * (ef - sb.energy_eV[:, None] - du[None, :])
        return x

    def carriers(self, u, ef):
        """(n, p) [cm^-3] on the grid."""
        sb = self.sb
        if sb.size == 0:
            z = np.zeros(self.grid.size)
            return z, z.copy()
        x = self._args(u, ef)
        dens = sheet_density_2d(sb.mass_m0[:, None], self.T, x) * sb.psi2 * _PSI2_PER_NM_TO_CM
        n = dens[sb.sign > 0].sum(axis=0)
        p = dens[sb.sign < 0].sum(axis=0)
        return n, p

    def donors(self, u, ef):
        return ionised_donors_cm3(self.doping, self.ec0 + u, ef, self.T)

    def q(self, u, ef):
        n, p = self.carriers(u, ef)
        return self.donors(u, ef) - self.acceptors + p - n

    def q_and_derivatives(self, u, ef):
        """q, dq/dU (diagonal), dq/dE_F."""
        sb = self.sb
        nd = self.donors(u, ef)
        dnd_def = ionised_donors_derivative(self.doping, self.ec0 + u, ef, self.T)
        # N_D+ depends on E_F - (Ec0 + U): dN/dU = -dN/dE_F
        dq_du = -dnd_def.copy()
        dq_def = dnd_def.copy()
        q = nd - self.acceptors
        if sb.size:
            x = self._args(u, ef)
            w = sb.psi2 * _PSI2_PER_NM_TO_CM
            dens = sheet_density_2d(sb.mass_m0[:, None], self.T, x) * w
            der = sheet_density_2d_derivative(sb.mass_m0[:, None], self.T, x) * w
            el = sb.sign > 0
            # electrons: n(x), x = E_F - E - dU -> dn/dU = -n', dn/dE_F = n'; q has -n
            # holes: p(x), x = E + dU - E_F -> dp/dU = p', dp/dE_F = -p'; q has +p
            q = q - dens[el].sum(axis=0) + dens[~el].sum(axis=0)
            dq_du += der[el].sum(axis=0) + der[~el].sum(axis=0)
            dq_def += -der[el].sum(axis=0) - der[~el].sum(axis=0)
        return q, dq_du, dq_def

    def total(self, ef) -> float:
        """Net charge per area in units of e [cm^-3 nm] at dU = 0."""
        return self.grid.integrate(self.q(self.u_in, ef))

    def dopant_total(self, ef) -> float:
        return self.grid.integrate(self.donors(self.u_in, ef) + self.acceptors)


class _ThomasFermiCharge:
    """Semiclassical charge for the initial guess (internal).

    Electrons fill the local conduction edge as a degenerate 3D gas,
    ``n = (2 m kT s / hbar^2)^{3/2} / (3 pi^2)`` with the thermal softening
    ``s = ln(1 + exp((E_F - Ec(z))/kT))`` (so that it is smooth in E_F); holes
    are not included.  Only used to create the wells of a heterojunction
    before the first Schrödinger solution; not a result.
    """

    _C = (2.0 * M0_KG * E_C / HBAR_J_S ** 2) ** 1.5 / (3.0 * math.pi ** 2) * 1e-6  # cm^-3 eV^-3/2

    def __init__(self, grid, doping, ec0_eV, mass_m0, temperature_K):
        self.grid, self.doping, self.ec0 = grid, doping, ec0_eV
        self.T = max(float(temperature_K), 1.0)
        self.m = np.asarray(mass_m0, dtype=float)
        self.acceptors = doping.acceptors_cm3
        self.kt = KB_EV_PER_K * self.T

    def _n(self, u, ef):
        x = (ef - self.ec0 - u) / self.kt
        s = self.kt * np.logaddexp(0.0, x)
        n = self._C * self.m ** 1.5 * s ** 1.5
        from scipy.special import expit  # heavy import (~120 ms): only doped stacks need it
        dn_def = 1.5 * self._C * self.m ** 1.5 * np.sqrt(s) * expit(x)
        return n, dn_def

    def q_and_derivatives(self, u, ef):
        n, dn = self._n(u, ef)
        nd = ionised_donors_cm3(self.doping, self.ec0 + u, ef, self.T)
        dnd = ionised_donors_derivative(self.doping, self.ec0 + u, ef, self.T)
        q = nd - self.acceptors - n
        return q, -dnd + dn, dnd - dn

    def total(self, ef, u) -> float:
        q, _, _ = self.q_and_derivatives(u, ef)
        return self.grid.integrate(q)


def _thomas_fermi_guess(grid, doping, ec0, mass, T, a_mat, fermi_level_eV, boundary):
    """Initial potential from the semiclassical (Thomas–Fermi) nonlinear Poisson equation."""
    tf = _ThomasFermiCharge(grid, doping, ec0, mass, T)
    u0 = np.zeros(grid.size)
    if fermi_level_eV is None:
        lo, hi = float(np.min(ec0)) - 3.0, float(np.max(ec0)) + 3.0
        f = lambda e: tf.total(e, u0)  # noqa: E731
        from scipy.optimize import brentq  # heavy import (~90 ms): only doped stacks need it
        ef0 = brentq(f, lo, hi, xtol=1e-9) if f(lo) > 0 > f(hi) else float(np.min(ec0))
    else:
        ef0 = float(fermi_level_eV)
    u, _ = _predictor_newton(tf, a_mat, u0, ef0, fixed_fermi=fermi_level_eV is not None,
                             boundary=boundary, tol_eV=1e-7, max_steps=200)
    return u


def _neutral_fermi_level(charge: _Charge) -> float:
    """E_F with zero net charge (brentq); ConvergenceError when no root exists."""
    sb = charge.sb
    ec = charge.ec0 + charge.u_in
    pts = np.concatenate([sb.energy_eV, [float(np.min(ec)), float(np.max(ec))]])
    lo, hi = float(np.min(pts)) - 1.0, float(np.max(pts)) + 1.0
    f_lo, f_hi = charge.total(lo), charge.total(hi)
    for _ in range(6):
        if f_lo > 0 > f_hi:
            break
        lo -= 2.0
        hi += 2.0
        f_lo, f_hi = charge.total(lo), charge.total(hi)
    if not f_lo > 0 > f_hi:
        kinds = "electron" if f_hi >= 0 else "hole"
        raise ConvergenceError(
            f"no Fermi level makes the stack neutral: no bound {kinds} subband can take the "
            "carriers of the dopants (widen or deepen the wells, or give a fermi_level)")
    # brentq to (near) machine precision in E_F: the relative charge error is then far
    # below the 1e-6 required (reported as charge_residual)
    from scipy.optimize import brentq  # heavy import (~90 ms): only doped stacks need it
    ef = brentq(charge.total, lo, hi, xtol=1e-14, rtol=4 * np.finfo(float).eps, maxiter=400)
    return float(ef)


def _predictor_newton(charge: _Charge, a_mat, u0, ef0, *, fixed_fermi: bool, boundary: str,
                      tol_eV: float = 1e-10, max_steps: int = 60, max_step_eV: float = 0.1):
    """Solve the nonlinear (predictor) Poisson equation for U (and E_F) by Newton's method."""
    import scipy.sparse as sp  # heavy import: only doped stacks need it
    grid = charge.grid
    n = grid.size
    c = POISSON_EV_NM2_PER_CM3 * grid.cell_nm
    u = np.array(u0, dtype=float)
    ef = float(ef0)
    gauge_row = n - 1 if boundary == "left" else None
    for _ in range(max_steps):
        q, dq_du, dq_def = charge.q_and_derivatives(u, ef)
        r = a_mat @ u - c * q
        jac = (a_mat - sp.diags(c * dq_du)).tolil()
        if fixed_fermi:
            if gauge_row is None:
                raise ParameterError("a given Fermi level needs boundary='left'")
            r[gauge_row] = u[0]
            jac[gauge_row, :] = 0.0
            jac[gauge_row, 0] = 1.0
            from scipy.sparse.linalg import spsolve  # heavy import: only doped stacks need it
            du = spsolve(jac.tocsc(), -r)
            dfe = 0.0
        else:
            col = (-c * dq_def).reshape(n, 1)
            row = sp.csr_matrix(([1.0], ([0], [0])), shape=(1, n))
            big = sp.bmat([[jac.tocsr(), sp.csr_matrix(col)], [row, None]], format="csc")
            rhs = -np.concatenate([r, [u[0]]])
            from scipy.sparse.linalg import spsolve  # heavy import: only doped stacks need it
            sol = spsolve(big, rhs)
            du, dfe = sol[:n], float(sol[n])
        step = max(float(np.max(np.abs(du))), abs(dfe))
        if step > max_step_eV:
            scale = max_step_eV / step
            du, dfe = du * scale, dfe * scale
        u += du
        ef += dfe
        if step < tol_eV:
            break
    return u, ef


class _Anderson:
    """Anderson (Pulay) mixing of a fixed-point map g: x_{k+1} from the last few (x, g(x))."""

    def __init__(self, size: int, beta: float):
        self.size, self.beta = size, beta
        self.x, self.f = [], []

    def reset(self):
        self.x, self.f = [], []

    def step(self, x, gx):
        f = gx - x
        self.x.append(x.copy())
        self.f.append(f.copy())
        if len(self.x) > self.size + 1:
            self.x.pop(0)
            self.f.pop(0)
        if len(self.x) == 1:
            return x + self.beta * f
        dx = np.array([b - a for a, b in zip(self.x[:-1], self.x[1:])]).T
        df = np.array([b - a for a, b in zip(self.f[:-1], self.f[1:])]).T
        gamma, *_ = np.linalg.lstsq(df, f, rcond=None)
        return x + self.beta * f - (dx + self.beta * df) @ gamma


def _interp_fn(z_grid, u):
    zg = np.array(z_grid, dtype=float)
    uu = np.array(u, dtype=float)

    def electrostatic_eV(z):
        return np.interp(np.asarray(z, dtype=float), zg, uu)
    return electrostatic_eV


def _with_breaks(profile, z_grid):
    """The profile with the Poisson grid nodes as ``breaks_nm`` of its smooth pieces.

    The electrostatic energy is interpolated linearly between the nodes, so the
    potential changes slope there and is smooth in between; the semiclassical
    estimator integrates node to node.
    """
    zg = np.asarray(z_grid, dtype=float)
    bands = {}
    for name, band in profile.bands.items():
        pieces = []
        for p in band.pieces:
            if p.kind == "smooth":
                inner = zg[(zg > p.z_start_nm) & (zg < p.z_end_nm)]
                p = replace(p, breaks_nm=tuple(inner.tolist()))
            pieces.append(p)
        bands[name] = replace(band, pieces=tuple(pieces))
    return replace(profile, bands=bands)


def _solve_bands(profile, band_names, tolerance_eV, fermi_eV=None, margin_eV=None,
                 wave_step_nm=0.02, tolerance_memory=None, inner_solver="fd"):
    """Exact bound states with wavefunctions of each band (internal).

    With a Fermi level estimate, only the states that can hold carriers are
    computed: those below ``E_F + margin`` (electrons) or above
    ``E_F - margin`` (holes, band-diagram scale), counted beforehand with the
    node-counting function of the exact solver.
    """
    out = {}
    for b in band_names:
        band = profile.bands[b]
        if inner_solver == "fd":
            limit = None
            if fermi_eV is not None:
                limit = float(band.carrier_energy(fermi_eV + band.carrier_sign * margin_eV))
            out[b] = solve(band, "finite_difference", tolerance_eV=tolerance_eV,
                           max_energy_eV=limit, grid_step_nm=wave_step_nm, error_estimate=False,
                           nonparabolic=band.nonparabolic)
            continue
        opts = {"tolerance_eV": tolerance_eV, "wavefunctions": True, "quasi_bound": False,
                "grid_step_nm": wave_step_nm}
        if fermi_eV is not None:
            limit = band.carrier_energy(fermi_eV + band.carrier_sign * margin_eV)
            k = int(count_states_below(band, np.array([float(limit)]))[0])
            if k == 0:
                out[b] = Levels(band=b, method="exact")
                continue
            opts["max_states"] = k
        memory = tolerance_memory if tolerance_memory is not None else {}
        opts["tolerance_eV"] = min(tolerance_eV, memory.get(b, tolerance_eV))
        lev = solve(band, "exact", **opts)
        # Near-degenerate doublets (weakly coupled identical wells) can come back as
        # two copies of one localised state when the energy tolerance exceeds their
        # splitting; such states are not orthogonal.  Tighten the tolerance until they are.
        # Only pairs within _DOUBLET_SPAN tolerances of each other count, and tightening
        # stops when it no longer lowers the overlap of a pair that does not look like two
        # copies: energy-dependent (nonparabolic) masses make envelopes of distinct states
        # overlap by ~1e-2 whatever the tolerance, and chasing that cost full solves at
        # 1e-14 eV on every iteration.
        tol = opts["tolerance_eV"]
        overlap = _doublet_overlap(lev, tol)
        while overlap > _ORTHOGONALITY_LIMIT and tol > 1e-13:
            tol *= 0.1
            lev = solve(band, "exact", **{**opts, "tolerance_eV": tol})
            before, overlap = overlap, _doublet_overlap(lev, tol)
            if overlap < _COPY_OVERLAP and overlap > 0.5 * before:
                break
        memory[b] = tol      # later iterations start from the tolerance that worked
        out[b] = lev
    return out


def _doublet_overlap(levels, tolerance_eV: float) -> float:
    """Largest |<psi_i|psi_j>| over pairs of states of one band closer in energy than
    ``_DOUBLET_SPAN * tolerance_eV`` (0 when there is no such pair)."""
    states = [s for s in levels.states if s.psi is not None]
    if len(states) < 2:
        return 0.0
    e = np.array([s.carrier_energy_eV for s in states])
    near = np.abs(e[:, None] - e[None, :]) <= _DOUBLET_SPAN * tolerance_eV
    np.fill_diagonal(near, False)
    if not near.any():
        return 0.0
    zz = states[0].z_nm
    rows = np.array([np.interp(zz, s.z_nm, s.psi, left=0.0, right=0.0) for s in states])
    gram = np.abs(np.trapezoid(rows[:, None, :] * rows[None, :, :], zz, axis=-1))
    return float(np.max(np.where(near, gram, 0.0)))


def _method_name(inner_solver: str) -> str:
    return "finite_difference" if inner_solver == "fd" else "exact"


def solve_self_consistent(stack, *, fermi_level_eV: float | None = None,
                          tolerance_meV: float = 1e-3, max_iterations: int = 200,
                          grid_step_nm: float = 0.1, mixing: str = "anderson",
                          holes: bool | None = None, inplane_mass: str = "edge",
                          state_tolerance_eV: float = 1e-7, anderson_history: int = 6,
                          strict: bool = True, inner_solver: str = "fd") -> SelfConsistentResult:
    """Self-consistent Schrödinger–Poisson solution of a (doped) stack.

    Parameters
    ----------
    stack : qwell.stack.Stack
    fermi_level_eV : float, optional
        Fixed Fermi level [eV, band-diagram scale].  Default: the stack's
        ``fermi_level`` if given, else fixed by overall charge neutrality.
    tolerance_meV : float
        Stop when ``max |U_out - U_in| <= tolerance_meV`` [meV].
    max_iterations : int
    grid_step_nm : float
        Poisson grid step [nm].
    mixing : {'anderson', 'predictor', 'linear'}
        See the module docstring.
    holes : bool, optional
        Occupy heavy- and light-hole subbands too; default: when the stack
        has acceptors.
    inplane_mass : {'edge', 'nonparabolic'}
        In-plane subband mass (module docstring).
    state_tolerance_eV : float
        Energy tolerance of the subband solver [eV].
    anderson_history : int
        Number of previous iterates Anderson mixing uses.
    inner_solver : {'fd', 'exact'}
        Subband solver inside the loop.  'fd' (default): finite-difference
        BenDaniel–Duke eigenpairs on a 0.05 nm grid (orthonormal and complete
        by construction, parabolic band-edge masses); 'exact': the
        transfer-matrix solver with its tolerance tightened until the states
        of each band are orthogonal.
    strict : bool
        Raise :class:`~qwell.errors.ConvergenceError` (with the residual
        history) when not converged; with False return the unconverged
        result flagged ``converged=False``.

    Returns
    -------
    SelfConsistentResult

    Notes
    -----
    Undoped stacks without a given Fermi level carry no charge: the
    potential is zero and the result holds exactly the non-self-consistent
    profile (``band_profile(stack)``), no loop states and ``iterations = 0``.

    Boundary conditions: with neutrality, zero field at both ends and U = 0
    at z = 0 ('neutral'); with a given Fermi level, zero field and U = 0 at
    z = 0 and the field of any net charge leaves through the end ('left').
    """
    if mixing not in MIXING_SCHEMES:
        raise ParameterError(f"unknown mixing {mixing!r}; expected one of: "
                             + ", ".join(MIXING_SCHEMES))
    if inplane_mass not in ("edge", "nonparabolic"):
        raise ParameterError(f"unknown inplane_mass {inplane_mass!r}; expected 'edge' or "
                             "'nonparabolic'")
    if inner_solver not in INNER_SOLVERS:
        raise ParameterError(f"unknown inner_solver {inner_solver!r}; expected 'fd' or 'exact'")
    if not (tolerance_meV > 0):
        raise ParameterError("tolerance_meV must be positive")
    if fermi_level_eV is None:
        fermi_level_eV = stack.fermi_level_eV
    fixed_fermi = fermi_level_eV is not None
    boundary = "left" if fixed_fermi else "neutral"
    T = float(stack.temperature_K)

    grid = build_grid(stack, grid_step_nm)
    doping = doping_on_grid(stack, grid)
    z = grid.z_nm
    zeros = np.zeros(grid.size)

    if not doping.has_doping and not fixed_fermi:
        profile = band_profile(stack)
        return SelfConsistentResult(
            profile=profile, levels={}, method=_method_name(inner_solver), fermi_level_eV=math.nan, sheet_densities_cm2={},
            z_nm=z, potential_eV=zeros, electron_density_cm3=zeros.copy(),
            hole_density_cm3=zeros.copy(), donor_density_cm3=zeros.copy(),
            acceptor_density_cm3=zeros.copy(), iterations=0, residual_meV=0.0,
            charge_residual=0.0, history=(), converged=True,
            message="undoped stack: no charge, flat-band (non-self-consistent) result; the Fermi "
                    "level is not defined by neutrality", boundary=boundary)

    profile0 = band_profile(stack)
    if "conduction" not in profile0.bands:
        raise ParameterError("a self-consistent solution needs the conduction band in every layer")
    if holes is None:
        holes = doping.has_acceptors
    band_names = ("conduction",) + tuple(b for b in _HOLE_BANDS if holes and b in profile0.bands)
    ec0 = profile0.bands["conduction"].potential(z)
    a_mat = poisson_operator(grid)
    tol_eV = tolerance_meV * 1e-3

    u = zeros.copy()
    guessed = False
    ef_prev = None
    backtracks = 0
    tol_memory: dict = {}
    anderson = _Anderson(anderson_history, beta=1.0)
    beta_linear = 0.2
    history: list[float] = []
    best = math.inf
    converged = False
    state = None
    # parabolic finite differences first; with nonparabolicity the exact solver finishes
    solver_now = inner_solver
    for _ in range(max_iterations):
        profile = _with_breaks(band_profile(stack, electrostatic_eV=_interp_fn(z, u)), z)
        levels = _solve_bands(profile, band_names, state_tolerance_eV, ef_prev,
                              _OCCUPATION_MARGIN_EV + 40.0 * KB_EV_PER_K * T,
                              wave_step_nm=min(0.05, 0.5 * grid_step_nm),
                              tolerance_memory=tol_memory, inner_solver=solver_now)
        sb = _subbands(levels, profile.bands, grid, inplane_mass)
        charge = _Charge(grid, doping, ec0, T, sb, u)
        if fixed_fermi:
            ef = float(fermi_level_eV)
        else:
            try:
                ef = _neutral_fermi_level(charge)
            except ConvergenceError:
                if state is not None and backtracks < 8:
                    # the last update moved the wells too far (or above the Fermi-level
                    # window of the trimmed solve): step halfway back and solve in full
                    backtracks += 1
                    u = 0.5 * (u + state[5])
                    ef_prev = None
                    anderson.reset()
                    continue
                if guessed or state is not None:
                    raise ConvergenceError(
                        "no Fermi level makes the stack neutral: as the charge bends the bands, "
                        "the bound subbands can no longer take the carriers of the dopants — "
                        "they would spill into the barrier continuum (parallel conduction), "
                        "which this model does not hold; lower or set back the doping, widen or "
                        "deepen the wells, or give a fermi_level", history=history) from None
                # flat bands hold no subband for the carriers (a heterojunction
                # channel forms only with the charge): start from the
                # semiclassical potential instead
                guessed = True
                u = _thomas_fermi_guess(grid, doping, ec0,
                                        profile0.bands["conduction"].edge_mass(z), T, a_mat,
                                        None, boundary)
                continue
        ef_prev = ef
        q = charge.q(u, ef)
        u_plain = solve_poisson(grid, q, boundary=boundary)
        res = float(np.max(np.abs(u_plain - u)))
        history.append(res * 1e3)
        state = (profile, levels, sb, charge, ef, u.copy(), res)
        if res <= tol_eV:
            if solver_now == "fd" and stack.nonparabolicity:
                # converged on parabolic energies: go on with the nonparabolic solver
                solver_now = "exact"
                anderson.reset()
                best = math.inf
                continue
            converged = True
            break
        if mixing == "linear":
            if res > best:
                beta_linear = max(0.5 * beta_linear, 0.01)
            u = u + beta_linear * (u_plain - u)
        else:
            u_pred, _ = _predictor_newton(charge, a_mat, u, ef, fixed_fermi=fixed_fermi,
                                          boundary=boundary, tol_eV=min(1e-10, 1e-3 * tol_eV))
            if mixing == "predictor":
                u = u_pred
            else:
                if res > 2.0 * best:
                    anderson.reset()      # fall back to the plain predictor step
                u = anderson.step(u, u_pred)
        best = min(best, res)

    profile, levels, sb, charge, ef, u, res = state
    n, p = charge.carriers(u, ef)
    nd = charge.donors(u, ef)
    na = doping.acceptors_cm3.copy()
    dop_tot = charge.dopant_total(ef)
    net = charge.total(ef)
    charge_res = abs(net) / dop_tot if dop_tot > 0 else (0.0 if net == 0 else math.inf)
    sheets = {}
    if sb.size:
        x = sb.sign * (ef - sb.energy_eV)
        vals = sheet_density_2d(sb.mass_m0, T, x)
        sheets = {lab: float(v) for lab, v in zip(sb.labels, vals)}
    sub_e = {lab: float(e) for lab, e in zip(sb.labels, sb.energy_eV)}
    sub_m = {lab: float(m) for lab, m in zip(sb.labels, sb.mass_m0)}

    notes = []
    cond = profile.bands["conduction"]
    kt = KB_EV_PER_K * T
    if ef > cond.confinement_limit_eV - 3 * kt:
        notes.append(f"the Fermi level {ef:.4f} eV is within 3 kT of (or above) the conduction "
                     f"confinement limit {cond.confinement_limit_eV:.4f} eV: electrons in "
                     "continuum states are not counted")
    for msg in notes:
        warnings.warn(msg, ValidityWarning, stacklevel=2)

    if not converged:
        text = (f"self-consistent loop did not converge in {max_iterations} iterations: residual "
                f"{res * 1e3:.3g} meV > {tolerance_meV:.3g} meV (mixing {mixing!r}); lower the "
                "doping (the layers' doping keys), give a fermi_level, or leave out "
                "self_consistent / --self-consistent for flat bands")
        if strict:
            raise ConvergenceError(text, tolerance_reached=res * 1e3, history=history)
        message = text
    else:
        message = (f"converged in {len(history)} iterations: residual {res * 1e3:.3g} meV, "
                   f"charge residual {charge_res:.2g}")
    if notes:
        message += "; " + "; ".join(notes)
    return SelfConsistentResult(
        profile=profile, levels=dict(levels), method=_method_name(solver_now),
        fermi_level_eV=float(ef), sheet_densities_cm2=sheets, subband_energies_eV=sub_e,
        inplane_mass_m0=sub_m,
        z_nm=z.copy(), potential_eV=np.array(u), electron_density_cm3=n, hole_density_cm3=p,
        donor_density_cm3=nd, acceptor_density_cm3=na, iterations=len(history),
        residual_meV=res * 1e3, charge_residual=float(charge_res), history=tuple(history),
        converged=converged, message=message, boundary=boundary)
