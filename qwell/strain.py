"""Biaxial strain of a pseudomorphic (001) layer and its critical thickness.

A layer of lattice constant ``a`` grown coherently on a (001) substrate of
lattice constant ``a_sub`` takes the in-plane lattice constant of the
substrate:

* ``eps_xx = eps_yy = (a_sub - a) / a`` and ``eps_zz = -2 (C12 / C11) eps_xx``;
* conduction edge (hydrostatic only): ``dEc = a_c tr(eps)``;
* valence edges (Bir-Pikus, Chuang's sign convention with a_v > 0):
  ``P = -a_v tr(eps)``, ``Q = -(b / 2)(eps_xx + eps_yy - 2 eps_zz)``,
  heavy hole ``dE_hh = -P - Q``; light hole, coupled to the split-off band,
  ``dE_lh = -P + (Q - D + sqrt(D^2 + 2 D Q + 9 Q^2)) / 2`` with D the
  spin-orbit splitting.

Under compression (``eps_xx < 0``) the gap opens and the heavy hole lies
above the light hole; under tension the light hole rises above it.

All shifts are relative to the unstrained edges of the layer (eV); strains
are dimensionless.  Both materials are used at their own temperatures.

References
----------
.. [1] S. L. Chuang, "Physics of Optoelectronic Devices", Wiley, New York
   (1995), ch. 4.
.. [2] C. G. Van de Walle, "Band lineups and deformation potentials in the
   model-solid theory", Phys. Rev. B 39, 1871 (1989).
.. [3] J. W. Matthews and A. E. Blakeslee, "Defects in epitaxial multilayers:
   I. Misfit dislocations", J. Cryst. Growth 27, 118 (1974).
.. [4] R. People and J. C. Bean, "Calculation of critical layer thickness
   versus lattice mismatch for GexSi1-x/Si strained-layer
   heterostructures", Appl. Phys. Lett. 47, 322 (1985) (single-layer form
   of the Matthews-Blakeslee balance used here).
"""

from __future__ import annotations

import math
from dataclasses import dataclass


from .errors import MaterialError
from .materials import Material
from .rootfind import brentq

__all__ = ["Strain", "strain", "critical_thickness_nm", "LATTICE_MATCH_TOLERANCE"]

#: |eps_xx| below which a layer counts as lattice-matched (critical thickness inf).
LATTICE_MATCH_TOLERANCE = 1e-6


@dataclass(frozen=True)
class Strain:
    """Strain of a pseudomorphic (001) layer and the band-edge shifts it causes.

    Attributes
    ----------
    eps_xx : float
        In-plane strain (= eps_yy), negative under compression.
    eps_zz : float
        Strain along the growth direction.
    delta_conduction_eV : float
        Shift of the conduction edge, ``a_c tr(eps)`` [eV].
    delta_heavy_hole_eV : float
        Shift of the heavy-hole edge from the unstrained valence edge,
        ``-P - Q`` [eV].
    delta_light_hole_eV : float
        Shift of the light-hole edge including its coupling to the
        split-off band [eV].
    hydrostatic_P_eV : float
        ``P = -a_v tr(eps)`` [eV] (a_v > 0 convention).
    shear_Q_eV : float
        ``Q = -(b/2)(eps_xx + eps_yy - 2 eps_zz)`` [eV].
    """

    eps_xx: float
    eps_zz: float
    delta_conduction_eV: float
    delta_heavy_hole_eV: float
    delta_light_hole_eV: float
    hydrostatic_P_eV: float
    shear_Q_eV: float

    @property
    def trace(self) -> float:
        """eps_xx + eps_yy + eps_zz (dimensionless)."""
        return 2.0 * self.eps_xx + self.eps_zz

    @property
    def delta_gap_eV(self) -> float:
        """Change of the gap to the top valence band (hh or lh, whichever is higher) [eV]."""
        return self.delta_conduction_eV - max(self.delta_heavy_hole_eV, self.delta_light_hole_eV)


def _need(material: Material, fields, role: str) -> None:
    missing = [f for f in fields if getattr(material, f) is None]
    if missing:
        raise MaterialError(f"strain: {role} {material.name} lacks {', '.join(missing)}")


def strain(material: Material, substrate: Material) -> Strain:
    """Strain and band-edge shifts of ``material`` grown pseudomorphically on ``substrate`` (001).

    Parameters
    ----------
    material : Material
        The strained layer (needs lattice constant, C11, C12, ac, av, b and
        the spin-orbit splitting).
    substrate : Material
        The substrate (or thick relaxed buffer); only its lattice constant
        is used.

    Returns
    -------
    Strain

    Raises
    ------
    MaterialError
        If a needed parameter is missing.

    References
    ----------
    Chuang (1995), ch. 4; Van de Walle, Phys. Rev. B 39, 1871 (1989).
    """
    _need(material, ("lattice_constant_nm", "c11_GPa", "c12_GPa", "ac_eV", "av_eV", "b_eV",
                     "spin_orbit_eV"), "layer")
    _need(substrate, ("lattice_constant_nm",), "substrate")
    a = material.lattice_constant_nm
    exx = (substrate.lattice_constant_nm - a) / a
    ezz = -2.0 * material.c12_GPa / material.c11_GPa * exx
    tr = 2.0 * exx + ezz
    dc = material.ac_eV * tr
    P = -material.av_eV * tr
    Q = -0.5 * material.b_eV * (2.0 * exx - 2.0 * ezz)
    D = material.spin_orbit_eV
    dhh = -P - Q
    dlh = -P + 0.5 * (Q - D + math.sqrt(D * D + 2.0 * D * Q + 9.0 * Q * Q))
    return Strain(eps_xx=exx, eps_zz=ezz, delta_conduction_eV=dc, delta_heavy_hole_eV=dhh,
                  delta_light_hole_eV=dlh, hydrostatic_P_eV=P, shear_Q_eV=Q)


def critical_thickness_nm(material: Material, substrate: Material, *, capped: bool = False) -> float:
    """Matthews-Blakeslee critical thickness [nm] of a strained layer.

    Force balance for 60-degree misfit dislocations on {111} planes of a
    (001) zinc-blende layer (Burgers vector ``b = a / sqrt(2)``, angle
    alpha = 60 deg between dislocation line and Burgers vector, lambda =
    60 deg between slip direction and the in-plane direction normal to the
    line), Poisson ratio ``nu = C12 / (C11 + C12)``:

    ``h_c = b (1 - nu cos^2 alpha) / (8 pi f (1 + nu) cos lambda) [ln(h_c / b) + 1]``

    i.e. ``(b / f) (1 - nu/4) / (4 pi (1 + nu)) [ln(h_c/b) + 1]``, solved
    self-consistently (h_c appears inside the logarithm; the physical root
    with h_c > b is returned).  ``f = |eps_xx|``.

    This is the balance for a single layer on a substrate (one interface;
    the misfit force equals the line tension of one misfit segment).  With
    ``capped=True`` the layer is buried in substrate material, as a quantum
    well is: the threading segment drags two misfit segments, the misfit
    force balances twice the line tension (the multilayer case of Matthews
    and Blakeslee) and the prefactor doubles.  For In0.2Ga0.8As on GaAs this
    gives about 6 nm (single layer) and about 15 nm (capped).

    Returns ``math.inf`` for a lattice-matched layer (|f| < 1e-6).

    Raises
    ------
    MaterialError
        Missing lattice or elastic constants, or a misfit so large that the
        balance has no root with h_c > b (coherent growth is not possible
        beyond about one Burgers vector).

    References
    ----------
    Matthews & Blakeslee, J. Cryst. Growth 27, 118 (1974); the single-layer
    form as written by People & Bean, Appl. Phys. Lett. 47, 322 (1985).
    """
    _need(material, ("lattice_constant_nm", "c11_GPa", "c12_GPa"), "layer")
    _need(substrate, ("lattice_constant_nm",), "substrate")
    a = material.lattice_constant_nm
    f = abs((substrate.lattice_constant_nm - a) / a)
    if f < LATTICE_MATCH_TOLERANCE:
        return math.inf
    nu = material.c12_GPa / (material.c11_GPa + material.c12_GPa)
    try:
        return critical_thickness_of_misfit_nm(f, a, nu, capped=capped)
    except ValueError:
        raise MaterialError(
            f"critical thickness of {material.name} on {substrate.name}: misfit {f:.3%} too "
            "large for the Matthews-Blakeslee balance (no solution above one Burgers vector)"
        ) from None


def critical_thickness_of_misfit_nm(f: float, a_nm: float, nu: float, *,
                                    capped: bool = False) -> float:
    """Matthews-Blakeslee critical thickness [nm] for a misfit strain ``f`` (see
    :func:`critical_thickness_nm`): lattice constant ``a_nm`` [nm] and Poisson ratio ``nu``.

    Used as well for the net (period-averaged) strain of a strain-compensated
    multilayer taken as one layer.

    Raises
    ------
    ValueError
        A misfit too large for a root above one Burgers vector.
    """
    f = abs(f)
    if f < LATTICE_MATCH_TOLERANCE:
        return math.inf
    a = a_nm
    b = a / math.sqrt(2.0)
    cos_alpha = math.cos(math.radians(60.0))
    cos_lambda = math.cos(math.radians(60.0))
    A = b * (1.0 - nu * cos_alpha ** 2) / (8.0 * math.pi * f * (1.0 + nu) * cos_lambda)
    if capped:
        A *= 2.0
    k = A / b            # u = h/b solves u = k (ln u + 1)
    if k < 1.0:
        raise ValueError(f"misfit {f:.3%} too large for the Matthews-Blakeslee balance")
    if k == 1.0:
        return b

    def g(u):
        return u - k * (math.log(u) + 1.0)

    hi = max(2.0 * k, 10.0)
    while g(hi) <= 0:
        hi *= 2.0
    u = brentq(g, k, hi, xtol=1e-14, rtol=1e-14, maxiter=200)
    return u * b
