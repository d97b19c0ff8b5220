"""Poisson's equation on a grid, charge densities and 2D Fermi–Dirac occupation.

This module holds the electrostatic half of the Schrödinger–Poisson loop of
:mod:`qwell.selfconsistent`; it knows nothing about subband solvers.

Conventions (internal units)
----------------------------
* Positions ``z`` in nm, z = 0 at the start of the first layer (as in
  :mod:`qwell.profile`); the grid spans the listed layers ``[0, L]``.
* The unknown is the electron potential energy ``U(z) = -e phi(z)`` in eV,
  which :func:`qwell.profile.band_profile` adds to every band edge.
* Densities in cm^-3 (volume) and cm^-2 (sheet); ``q(z)`` denotes the net
  positive charge density in units of e: ``q = N_D+ - N_A- + p - n``.

Poisson's equation ``d/dz(eps(z) dphi/dz) = -rho/eps0`` becomes, for U in eV
and z in nm,

    d/dz( eps(z) dU/dz ) = POISSON_EV_NM2_PER_CM3 * q(z)         (1)

with ``POISSON_EV_NM2_PER_CM3 = e / eps0 * 1e-12`` (CODATA 2018 constants from
:mod:`qwell.constants`).  Positive charge makes U convex (a dip that attracts
electrons).

Discretisation (finite volume)
------------------------------
Nodes ``z_i`` on a uniform grid; node i owns the cell between the midpoints
to its neighbours (half cells at the two ends), of width ``w_i``.  The flux
through the face between nodes i and i+1 is ``a_f (U_{i+1} - U_i)`` with
``a_f = 1 / int dz/eps`` over the face interval (series combination: exact
for a dielectric step inside the interval).  Integrating (1) over cell i:

    sum_faces a_f (U_nb - U_i) = POISSON_EV_NM2_PER_CM3 * w_i * q_i          (2)

Charges are put on the cells conservatively: volume doping by the exact
overlap of its range with each cell, sheet (delta) doping split between the
two nodes around it with linear weights, so that ``sum_i w_i q_i`` equals the
total doping exactly.  Summing (2) over all cells, the interior fluxes
cancel: the discrete scheme conserves charge (Gauss's law holds cell by cell).

Boundary conditions
-------------------
``boundary='neutral'`` (default, for a stack whose Fermi level is fixed by
overall neutrality): zero field at both ends (Neumann) and ``U = 0`` at the
first node.  With a net charge (a given Fermi level), ``boundary='left'``:
zero field and ``U = 0`` at the start (z = 0), and the field of the net
charge leaves through the end of the stack (it is reported).

Doping and ionisation
---------------------
Acceptors are always completely ionised.  Donors are completely ionised
unless the layer gives a ``donor_level`` (binding energy E_b below Ec); then
the ionised fraction is the standard ``1 / (1 + g exp((E_F - E_d)/kT))``
with ``E_d = Ec(z) + U(z) - E_b`` and ground-state degeneracy g = 2
(S. M. Sze, Physics of Semiconductor Devices, 2nd ed., Wiley 1981, ch. 1).

References
----------
.. [1] T. Ando, A. B. Fowler and F. Stern, "Electronic properties of
   two-dimensional systems", Rev. Mod. Phys. 54, 437 (1982).
.. [2] S. M. Sze, Physics of Semiconductor Devices, 2nd ed., Wiley (1981).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .constants import E_C, EPS0_F_PER_M, HBAR_J_S, KB_EV_PER_K, M0_KG
from .errors import MaterialError, StackError
from .materials.library import BUILTIN as _BUILTIN_SET

__all__ = [
    "POISSON_EV_NM2_PER_CM3",
    "DONOR_DEGENERACY",
    "PoissonGrid",
    "DopingOnGrid",
    "build_grid",
    "doping_on_grid",
    "poisson_operator",
    "solve_poisson",
    "ionised_donors_cm3",
    "sheet_density_2d",
    "sheet_density_2d_derivative",
    "density_of_states_2d_cm2_per_eV",
    "electric_field_kV_per_cm",
]

#: e / eps0 * 1e-12: (eV nm^-2) per (cm^-3) in eq. (1) of the module docstring.
POISSON_EV_NM2_PER_CM3 = E_C / EPS0_F_PER_M * 1e-12
# KB_EV_PER_K (Boltzmann constant [eV/K]) comes from qwell.constants.
#: Ground-state degeneracy of a shallow donor (spin), Sze 1981.
DONOR_DEGENERACY = 2.0
#: m0 / (pi hbar^2) in cm^-2 per eV: the 2D density of states of one subband
#: with spin degeneracy 2 and mass m0.
_DOS2D_CM2_PER_EV = M0_KG / (math.pi * HBAR_J_S ** 2) * E_C * 1e-4


# ---------------------------------------------------------------------------
# 2D Fermi–Dirac occupation
# ---------------------------------------------------------------------------
def density_of_states_2d_cm2_per_eV(mass_m0) -> np.ndarray:
    """2D density of states of one subband, spin included: m/(pi hbar^2) [cm^-2 eV^-1]."""
    return _DOS2D_CM2_PER_EV * np.asarray(mass_m0, dtype=float)


def sheet_density_2d(mass_m0, temperature_K, fermi_minus_subband_eV) -> np.ndarray:
    """Sheet density of one parabolic subband in thermal equilibrium [cm^-2].

    ``n = (m kT / (pi hbar^2)) ln(1 + exp((E_F - E_i)/kT))`` (spin degeneracy
    2), the integral of the Fermi–Dirac distribution times the constant 2D
    density of states ``m / (pi hbar^2)`` above the subband bottom.

    Parameters
    ----------
    mass_m0 : float or array_like
        In-plane effective mass [m0].
    temperature_K : float
        Temperature [K]; 0 gives the degenerate limit ``m (E_F - E_i)_+ / (pi hbar^2)``.
    fermi_minus_subband_eV : float or array_like
        ``E_F - E_i`` [eV] (for holes pass ``E_i - E_F`` on the band-diagram scale).

    Returns
    -------
    numpy.ndarray
        Sheet density [cm^-2], broadcast over the inputs.

    References
    ----------
    .. [1] T. Ando, A. B. Fowler and F. Stern, Rev. Mod. Phys. 54, 437 (1982).
    """
    x = np.asarray(fermi_minus_subband_eV, dtype=float)
    dos = density_of_states_2d_cm2_per_eV(mass_m0)
    if temperature_K <= 0:
        return dos * np.maximum(x, 0.0)
    kt = KB_EV_PER_K * float(temperature_K)
    return dos * kt * np.logaddexp(0.0, x / kt)


def sheet_density_2d_derivative(mass_m0, temperature_K, fermi_minus_subband_eV) -> np.ndarray:
    """d n / d(E_F - E_i) of :func:`sheet_density_2d` [cm^-2 eV^-1]: DOS times the occupation."""
    x = np.asarray(fermi_minus_subband_eV, dtype=float)
    dos = density_of_states_2d_cm2_per_eV(mass_m0)
    if temperature_K <= 0:
        return dos * (x > 0)
    kt = KB_EV_PER_K * float(temperature_K)
    from scipy.special import expit  # heavy import (~120 ms): only doped stacks need it
    return dos * expit(x / kt)


# ---------------------------------------------------------------------------
# grid, dielectric constant, doping
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class PoissonGrid:
    """Finite-volume grid of a stack (see module docstring).

    Attributes
    ----------
    z_nm : ndarray
        Node positions [nm], uniform, from 0 to the total thickness.
    cell_nm : ndarray
        Cell width of each node [nm] (half cells at the ends); sums to L.
    face_nm : ndarray
        Distances between neighbouring nodes [nm] (length N-1).
    face_eps : ndarray
        Effective static dielectric constant of each face interval (series
        combination ``h / int dz/eps``), length N-1.
    layer_bounds_nm : ndarray
        Layer boundaries [nm] (length n_layers + 1).
    """

    z_nm: np.ndarray = field(repr=False)
    cell_nm: np.ndarray = field(repr=False)
    face_nm: np.ndarray = field(repr=False)
    face_eps: np.ndarray = field(repr=False)
    layer_bounds_nm: np.ndarray = field(repr=False)

    @property
    def size(self) -> int:
        return int(self.z_nm.size)

    def integrate(self, values) -> float:
        """Cell sum ``sum_i w_i v_i`` (the conservative integral on this grid) [v * nm]."""
        return float(np.dot(self.cell_nm, values))


def _layer_dielectric(stack, layer):
    """(eps_start, eps_end) of a layer; MaterialError when a material lacks it."""
    if layer.grade is None:
        mats = [stack.material_of(layer)]
    else:
        mset = getattr(stack, "material_set", None) or _BUILTIN_SET
        fn = mset.grade_function(layer.grade.start, layer.grade.end, stack.temperature_K,
                                 stack.user_materials)
        mats = [fn(0.0), fn(1.0)]
        if layer.overrides:
            mats = [m.with_overrides(**dict(layer.overrides)) for m in mats]
    eps = []
    for m in mats:
        e = getattr(m, "dielectric_constant", None)
        if e is None or not math.isfinite(float(e)) or float(e) <= 0:
            raise MaterialError(
                f"layer {layer.label}: material {m.name} has no static dielectric constant; "
                "a doped (self-consistent) stack needs one (e.g. dielectric_constant: 12.9)")
        eps.append(float(e))
    return eps[0], eps[-1]


def build_grid(stack, step_nm: float = 0.1) -> PoissonGrid:
    """Uniform finite-volume grid over the stack with face dielectric constants.

    Graded layers take the fraction-weighted mixture of the dielectric
    constants of their end materials, ``eps = eps_start + f(t)(eps_end - eps_start)``
    with the grade's composition fraction f(t) (linear interpolation of this
    one parameter; stated approximation).

    Parameters
    ----------
    stack : qwell.stack.Stack
    step_nm : float
        Largest node spacing [nm]; the spacing is L / ceil(L / step_nm).
    """
    if not (step_nm > 0 and math.isfinite(step_nm)):
        raise ValueError("grid_step_nm must be a positive length in nm")
    thick = np.array([layer.thickness_nm for layer in stack.layers], dtype=float)
    bounds = np.concatenate([[0.0], np.cumsum(thick)])
    total = float(bounds[-1])
    n_int = max(2, int(math.ceil(total / step_nm - 1e-9)))
    z = np.linspace(0.0, total, n_int + 1)
    h = np.diff(z)
    cell = np.empty_like(z)
    cell[1:-1] = 0.5 * (h[:-1] + h[1:])
    cell[0] = 0.5 * h[0]
    cell[-1] = 0.5 * h[-1]

    eps_ends = []
    for layer in stack.layers:
        try:
            eps_ends.append(_layer_dielectric(stack, layer))
        except MaterialError as exc:
            raise StackError(str(exc), file=stack.path, line=layer.line,
                             key=f"layers[{layer.index}]") from None

    # int dz/eps over each face: split the face at layer boundaries, midpoint rule
    # inside each piece (exact for uniform layers).
    cuts = np.unique(np.concatenate([z, bounds]))
    mids = 0.5 * (cuts[:-1] + cuts[1:])
    lens = np.diff(cuts)
    li = np.clip(np.searchsorted(bounds, mids, side="right") - 1, 0, len(stack.layers) - 1)
    eps_mid = np.empty_like(mids)
    for k, layer in enumerate(stack.layers):
        sel = li == k
        if not np.any(sel):
            continue
        e0, e1 = eps_ends[k]
        if layer.grade is None or e0 == e1:
            eps_mid[sel] = e0
        else:
            t = (mids[sel] - bounds[k]) / thick[k]
            eps_mid[sel] = e0 + layer.grade.fraction(t) * (e1 - e0)
    face_of_piece = np.clip(np.searchsorted(z, mids, side="right") - 1, 0, h.size - 1)
    inv = np.bincount(face_of_piece, weights=lens / eps_mid, minlength=h.size)
    face_eps = h / inv
    return PoissonGrid(z_nm=z, cell_nm=cell, face_nm=h, face_eps=face_eps,
                       layer_bounds_nm=bounds)


@dataclass(frozen=True)
class DopingOnGrid:
    """Dopant densities as cell averages on a :class:`PoissonGrid` [cm^-3].

    Attributes
    ----------
    donors_cm3 : ndarray
        Donors that are always completely ionised (no donor level given).
    donors_level_cm3 : ndarray
        Donors with a finite binding energy (partial ionisation).
    donor_binding_eV : ndarray
        Binding energy below Ec of ``donors_level_cm3`` [eV] (0 where none).
    acceptors_cm3 : ndarray
        Acceptors (completely ionised).
    """

    donors_cm3: np.ndarray = field(repr=False)
    donors_level_cm3: np.ndarray = field(repr=False)
    donor_binding_eV: np.ndarray = field(repr=False)
    acceptors_cm3: np.ndarray = field(repr=False)

    @property
    def has_doping(self) -> bool:
        return bool(np.any(self.donors_cm3 > 0) or np.any(self.donors_level_cm3 > 0)
                    or np.any(self.acceptors_cm3 > 0))

    @property
    def has_acceptors(self) -> bool:
        return bool(np.any(self.acceptors_cm3 > 0))


def _volume_on_cells(grid: PoissonGrid, lo_nm: float, hi_nm: float, density: float) -> np.ndarray:
    """Cell averages of a density uniform on [lo, hi] (exact overlaps)."""
    z = grid.z_nm
    c_lo = np.concatenate([[z[0]], 0.5 * (z[:-1] + z[1:])])
    c_hi = np.concatenate([0.5 * (z[:-1] + z[1:]), [z[-1]]])
    overlap = np.clip(np.minimum(hi_nm, c_hi) - np.maximum(lo_nm, c_lo), 0.0, None)
    return density * overlap / grid.cell_nm


def _sheet_on_cells(grid: PoissonGrid, at_nm: float, sheet_cm2: float) -> np.ndarray:
    """A sheet density at ``at_nm`` as cell averages [cm^-3], split linearly between two nodes.

    The split conserves the total exactly: ``sum_i w_i q_i * 1e-7 = sheet_cm2``.
    """
    z = grid.z_nm
    out = np.zeros_like(z)
    k = int(np.clip(np.searchsorted(z, at_nm, side="right") - 1, 0, z.size - 2))
    t = float(np.clip((at_nm - z[k]) / (z[k + 1] - z[k]), 0.0, 1.0))
    # sheet [cm^-2] / width [nm -> cm]
    out[k] += (1.0 - t) * sheet_cm2 / (grid.cell_nm[k] * 1e-7)
    out[k + 1] += t * sheet_cm2 / (grid.cell_nm[k + 1] * 1e-7)
    return out


def doping_on_grid(stack, grid: PoissonGrid) -> DopingOnGrid:
    """Put every layer's doping on the grid, conserving the totals exactly.

    Volume doping covers ``[from_nm, to_nm]`` of its layer (the whole layer
    by default); sheet doping sits at ``at_nm`` of its layer.  Donors with a
    ``donor_level_eV`` go to :attr:`DopingOnGrid.donors_level_cm3`.
    """
    nd = np.zeros(grid.size)
    nd_lvl = np.zeros(grid.size)
    eb = np.zeros(grid.size)
    na = np.zeros(grid.size)
    for layer, z0 in zip(stack.layers, grid.layer_bounds_nm[:-1]):
        d = layer.doping
        if d is None:
            continue
        lo = z0 + (d.from_nm if d.from_nm is not None else 0.0)
        hi = z0 + (d.to_nm if d.to_nm is not None else layer.thickness_nm)
        donors = np.zeros(grid.size)
        if d.donors_cm3 > 0:
            donors += _volume_on_cells(grid, lo, hi, d.donors_cm3)
        if d.acceptors_cm3 > 0:
            na += _volume_on_cells(grid, lo, hi, d.acceptors_cm3)
        at = z0 + (d.at_nm if d.at_nm is not None else 0.0)
        if d.sheet_cm2 > 0:
            donors += _sheet_on_cells(grid, at, d.sheet_cm2)
        if d.sheet_acceptors_cm2 > 0:
            na += _sheet_on_cells(grid, at, d.sheet_acceptors_cm2)
        if d.donor_level_eV is None:
            nd += donors
        else:
            # one binding energy per node: the density-weighted mean where layers meet
            new = donors > 0
            tot = nd_lvl + donors
            eb = np.where(new, (eb * nd_lvl + d.donor_level_eV * donors) / np.where(tot > 0, tot, 1),
                          eb)
            nd_lvl = tot
    return DopingOnGrid(donors_cm3=nd, donors_level_cm3=nd_lvl, donor_binding_eV=eb,
                        acceptors_cm3=na)


def ionised_donors_cm3(doping: DopingOnGrid, conduction_edge_eV, fermi_level_eV: float,
                       temperature_K: float) -> np.ndarray:
    """Ionised donor density [cm^-3] on the grid.

    ``N_D+ = N_D(complete) + N_D(level) / (1 + g exp((E_F - E_d)/kT))`` with
    ``E_d = Ec(z) - E_b`` and g = :data:`DONOR_DEGENERACY` (Sze 1981).

    Parameters
    ----------
    conduction_edge_eV : array_like
        Conduction edge on the grid including the electrostatic energy [eV].
    """
    if not np.any(doping.donors_level_cm3 > 0):
        return doping.donors_cm3.copy()
    kt = KB_EV_PER_K * temperature_K
    ed = np.asarray(conduction_edge_eV, dtype=float) - doping.donor_binding_eV
    from scipy.special import expit  # heavy import (~120 ms): only doped stacks need it
    frac = expit(-((fermi_level_eV - ed) / kt + math.log(DONOR_DEGENERACY)))
    return doping.donors_cm3 + doping.donors_level_cm3 * frac


def ionised_donors_derivative(doping: DopingOnGrid, conduction_edge_eV, fermi_level_eV: float,
                              temperature_K: float) -> np.ndarray:
    """d N_D+ / d E_F [cm^-3 eV^-1] (= - d N_D+ / d U)."""
    if not np.any(doping.donors_level_cm3 > 0):
        return np.zeros_like(doping.donors_cm3)
    kt = KB_EV_PER_K * temperature_K
    ed = np.asarray(conduction_edge_eV, dtype=float) - doping.donor_binding_eV
    from scipy.special import expit  # heavy import (~120 ms): only doped stacks need it
    s = expit(-((fermi_level_eV - ed) / kt + math.log(DONOR_DEGENERACY)))
    return -doping.donors_level_cm3 * s * (1.0 - s) / kt


# ---------------------------------------------------------------------------
# Poisson solve
# ---------------------------------------------------------------------------
def poisson_operator(grid: PoissonGrid):
    """Matrix of the left side of eq. (2): ``(A U)_i = sum_f a_f (U_nb - U_i)``, zero end fluxes."""
    a = grid.face_eps / grid.face_nm
    n = grid.size
    diag = np.zeros(n)
    diag[:-1] -= a
    diag[1:] -= a
    import scipy.sparse as sp  # heavy import: only doped stacks need it
    return sp.diags([a, diag, a], [-1, 0, 1], shape=(n, n), format="csr")


def _boundary_system(grid: PoissonGrid, matrix, rhs: np.ndarray, boundary: str):
    """Apply the boundary condition: replace one row by the gauge ``U_0 = 0``."""
    import scipy.sparse as sp  # heavy import: only doped stacks need it
    m = sp.lil_matrix(matrix)
    b = np.array(rhs, dtype=float)
    if boundary == "neutral":
        row = 0            # Neumann both ends; node 0's equation follows from neutrality
    elif boundary == "left":
        row = grid.size - 1  # zero field at the start; the end's flux is free
    else:
        raise ValueError(f"unknown boundary {boundary!r}; expected 'neutral' or 'left'")
    m[row, :] = 0.0
    m[row, 0] = 1.0
    b[row] = 0.0
    return m.tocsc(), b


def solve_poisson(grid: PoissonGrid, charge_cm3, *, boundary: str = "neutral") -> np.ndarray:
    """Electron potential energy U = -e phi [eV] on the grid for a net charge q [cm^-3].

    Parameters
    ----------
    grid : PoissonGrid
    charge_cm3 : array_like
        Net positive charge density q = N_D+ - N_A- + p - n on the nodes [cm^-3]
        (cell averages).
    boundary : {'neutral', 'left'}
        See the module docstring; U = 0 at z = 0 in both cases.

    Returns
    -------
    numpy.ndarray
        U [eV] on ``grid.z_nm``.
    """
    q = np.asarray(charge_cm3, dtype=float)
    rhs = POISSON_EV_NM2_PER_CM3 * grid.cell_nm * q
    m, b = _boundary_system(grid, poisson_operator(grid), rhs, boundary)
    from scipy.sparse.linalg import spsolve  # heavy import: only doped stacks need it
    return spsolve(m, b)


def electric_field_kV_per_cm(grid: PoissonGrid, potential_eV) -> np.ndarray:
    """Field on the face midpoints [kV/cm] from U = -e phi: F = -dphi/dz = dU/dz / e.

    (1 eV/nm of U is 1e4 kV/cm.)
    """
    u = np.asarray(potential_eV, dtype=float)
    return np.diff(u) / grid.face_nm * 1e4
