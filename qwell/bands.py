"""Single-band potentials: the exact description the solvers work on.

A :class:`Band` is one carrier's view of a layer stack: the potential energy
``V(z)`` it sees, its band-edge effective mass ``m(z)`` and, for a
nonparabolic band, the local gap ``Eg(z)`` that sets the energy dependence of
the mass.  It is built piece by piece, one :class:`Piece` per layer, so that
solvers know every interface exactly.

Conventions (internal units: eV, nm, m0)
----------------------------------------
* Carrier convention: for electrons ``V(z) = Ec(z)``; for holes
  ``V(z) = -Ev(z)`` (hole energies grow downwards on the band diagram).  A
  solver works with carrier energies ``eps`` in which bound states lie above
  the bottom of ``V``; :meth:`Band.profile_energy` maps them back to the
  band-diagram scale (``E = carrier_sign * eps``).
* Outside ``[z_start_nm, z_end_nm]`` the first and last pieces continue as
  semi-infinite claddings with their end values (flat: the field acts only
  over the listed layers).
* Nonparabolicity (two-band): ``m(E, z) = m(z) * (1 + (E - V(z)) / Eg(z))``
  (carrier convention), used when ``nonparabolic`` is true and the piece has a
  gap.  Masses are clipped below at 1 % of the band-edge mass so that deep
  under-barrier energies stay finite.

References
----------
.. [1] D. J. BenDaniel and C. B. Duke, "Space-charge effects on electron
   tunneling", Phys. Rev. 152, 683 (1966).
.. [2] D. F. Nelson, R. C. Miller and D. A. Kleinman, "Band nonparabolicity
   effects in semiconductor quantum wells", Phys. Rev. B 35, 7770 (1987).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Callable

import numpy as np

__all__ = ["Piece", "Band", "RepeatInfo", "band_from_layers", "band_of_label", "BAND_NAMES",
           "BAND_PREFIX"]

BAND_NAMES = ("conduction", "heavy_hole", "light_hole")
#: State label prefixes, e.g. e1, hh1, lh1.
BAND_PREFIX = {"conduction": "e", "heavy_hole": "hh", "light_hole": "lh"}

_MIN_MASS_FRACTION = 0.01


def band_of_label(label: str) -> str:
    """Band name of a state label: 'hh2' -> 'heavy_hole', 'lh1' -> 'light_hole', 'e3' -> 'conduction'."""
    if label.startswith("hh"):
        return "heavy_hole"
    if label.startswith("lh"):
        return "light_hole"
    return "conduction"

ArrayFn = Callable[[np.ndarray], np.ndarray]


@dataclass(frozen=True)
class Piece:
    """One layer of a band, on ``[z_start_nm, z_end_nm]``.

    Attributes
    ----------
    z_start_nm, z_end_nm : float
        Layer boundaries [nm].
    layer_index : int
        Index of the layer in the stack (growth order, 0-based).
    kind : {'flat', 'linear', 'smooth'}
        'flat': constant potential, mass and gap.  'linear': constant mass and
        gap, potential ``edge_start_eV + edge_slope_eV_per_nm * (z - z_start)``
        (a uniform layer under a field).  'smooth': potential, mass and gap are
        arbitrary smooth functions (graded layers, electrostatic potential);
        use :meth:`potential`, :meth:`mass`, :meth:`gap`.
    edge_start_eV, edge_slope_eV_per_nm : float
        Potential at ``z_start_nm`` [eV] and its slope [eV/nm] (flat/linear).
    mass_m0 : float
        Band-edge mass [m0] (flat/linear).
    gap_eV : float or None
        Local gap for nonparabolicity [eV]; None means parabolic.
    potential_fn, mass_fn, gap_fn : callable or None
        Vectorised functions of z [nm] for 'smooth' pieces.
    breaks_nm : tuple of float
        Positions inside a 'smooth' piece [nm] where its functions may change slope
        (e.g. the nodes of a potential interpolated linearly between grid points);
        they are smooth between them.  Empty: smooth over the whole piece.
    """

    z_start_nm: float
    z_end_nm: float
    layer_index: int
    kind: str = "flat"
    edge_start_eV: float = 0.0
    edge_slope_eV_per_nm: float = 0.0
    mass_m0: float = 0.067
    gap_eV: float | None = None
    potential_fn: ArrayFn | None = field(default=None, compare=False, repr=False)
    mass_fn: ArrayFn | None = field(default=None, compare=False, repr=False)
    gap_fn: ArrayFn | None = field(default=None, compare=False, repr=False)
    breaks_nm: tuple = field(default=(), compare=False, repr=False)

    def __post_init__(self):
        if not self.z_end_nm > self.z_start_nm:
            raise ValueError("a piece needs z_end_nm > z_start_nm")
        if self.kind not in ("flat", "linear", "smooth"):
            raise ValueError(f"unknown piece kind {self.kind!r}")
        if self.kind == "smooth" and (self.potential_fn is None or self.mass_fn is None):
            raise ValueError("a smooth piece needs potential_fn and mass_fn")

    @property
    def thickness_nm(self) -> float:
        return self.z_end_nm - self.z_start_nm

    def potential(self, z_nm) -> np.ndarray:
        """Potential energy V(z) [eV] (carrier convention) inside the piece."""
        z = np.asarray(z_nm, dtype=float)
        if self.kind == "smooth":
            return np.asarray(self.potential_fn(z), dtype=float) * np.ones_like(z)
        return self.edge_start_eV + self.edge_slope_eV_per_nm * (z - self.z_start_nm)

    def mass(self, z_nm) -> np.ndarray:
        """Band-edge effective mass m(z) [m0] inside the piece."""
        z = np.asarray(z_nm, dtype=float)
        if self.kind == "smooth":
            return np.asarray(self.mass_fn(z), dtype=float) * np.ones_like(z)
        return np.full_like(z, self.mass_m0)

    def gap(self, z_nm) -> np.ndarray | None:
        """Local gap Eg(z) [eV] for nonparabolicity, or None (parabolic)."""
        z = np.asarray(z_nm, dtype=float)
        if self.kind == "smooth":
            if self.gap_fn is None:
                return None
            return np.asarray(self.gap_fn(z), dtype=float) * np.ones_like(z)
        if self.gap_eV is None:
            return None
        return np.full_like(z, self.gap_eV)

    @property
    def end_potential_eV(self) -> float:
        return float(self.potential(np.array([self.z_end_nm]))[0])

    @property
    def start_potential_eV(self) -> float:
        return float(self.potential(np.array([self.z_start_nm]))[0])


@dataclass(frozen=True)
class RepeatInfo:
    """A periodic block of the stack: ``count`` periods of ``period_nm`` from ``z_start_nm``."""

    z_start_nm: float
    period_nm: float
    count: int
    first_layer: int
    layers_per_period: int


@dataclass(frozen=True)
class Band:
    """One carrier band of a stack (see module docstring for conventions).

    Attributes
    ----------
    name : {'conduction', 'heavy_hole', 'light_hole'}
    pieces : tuple of Piece
        Contiguous pieces in growth order.
    carrier_sign : {+1, -1}
        +1 for electrons, -1 for holes: band-diagram energy = sign * carrier energy.
    nonparabolic : bool
        Use the energy-dependent mass where a piece has a gap.
    repeats : tuple of RepeatInfo
        Periodic blocks (for miniband calculations).
    layer_names : tuple of str
        Display label of each layer (same order as the stack's layers).
    """

    name: str
    pieces: tuple
    carrier_sign: int = 1
    nonparabolic: bool = False
    repeats: tuple = ()
    layer_names: tuple = ()

    def __post_init__(self):
        if not self.pieces:
            raise ValueError("a band needs at least one piece")
        for a, b in zip(self.pieces[:-1], self.pieces[1:]):
            if abs(a.z_end_nm - b.z_start_nm) > 1e-9:
                raise ValueError("band pieces must be contiguous")

    # -- geometry -------------------------------------------------------
    @property
    def z_start_nm(self) -> float:
        return self.pieces[0].z_start_nm

    @property
    def z_end_nm(self) -> float:
        return self.pieces[-1].z_end_nm

    @property
    def boundaries_nm(self) -> np.ndarray:
        """All interface positions, including the two outer ones [nm]."""
        return np.array([p.z_start_nm for p in self.pieces] + [self.z_end_nm])

    @property
    def prefix(self) -> str:
        return BAND_PREFIX.get(self.name, self.name)

    @property
    def left_cladding(self) -> tuple[float, float, float | None]:
        """(V [eV], m [m0], Eg [eV] or None) of the left semi-infinite cladding."""
        p = self.pieces[0]
        z = np.array([p.z_start_nm])
        g = p.gap(z)
        return (float(p.potential(z)[0]), float(p.mass(z)[0]), None if g is None else float(g[0]))

    @property
    def right_cladding(self) -> tuple[float, float, float | None]:
        """(V [eV], m [m0], Eg [eV] or None) of the right semi-infinite cladding."""
        p = self.pieces[-1]
        z = np.array([p.z_end_nm])
        g = p.gap(z)
        return (float(p.potential(z)[0]), float(p.mass(z)[0]), None if g is None else float(g[0]))

    def piece_index(self, z_nm) -> np.ndarray:
        """Index of the piece holding each z (claddings map to the end pieces)."""
        z = np.asarray(z_nm, dtype=float)
        inner = self.boundaries_nm[1:-1]
        return np.searchsorted(inner, z, side="right")

    # -- evaluation -----------------------------------------------------
    @cached_property
    def _tables(self):
        """Per-piece arrays of the flat/linear constants (one vectorised evaluation path).

        ``(z0, e0, slope, mass, gap, simple)``: ``simple`` marks flat/linear pieces;
        the ``gap`` entry is NaN for a parabolic piece.
        """
        ps = self.pieces
        z0 = np.array([p.z_start_nm for p in ps])
        e0 = np.array([p.edge_start_eV for p in ps])
        slope = np.array([p.edge_slope_eV_per_nm for p in ps])
        mass = np.array([p.mass_m0 for p in ps])
        gap = np.array([np.nan if p.gap_eV is None else p.gap_eV for p in ps])
        simple = np.array([p.kind != "smooth" for p in ps])
        return z0, e0, slope, mass, gap, simple

    def _eval(self, attr: str, z_nm) -> np.ndarray:
        """Piecewise evaluation of ``potential``, ``mass`` or ``gap`` (NaN where parabolic).

        Flat and linear pieces are evaluated in one vectorised step from
        :attr:`_tables` (the same arithmetic as :class:`Piece`); smooth pieces call
        their functions on their own points.
        """
        z = np.atleast_1d(np.asarray(z_nm, dtype=float))
        zc = np.clip(z, self.z_start_nm, self.z_end_nm)
        idx = self.piece_index(zc)
        z0, e0, slope, mass, gap, simple = self._tables
        if attr == "potential":
            out = e0[idx] + slope[idx] * (zc - z0[idx])
        elif attr == "mass":
            out = mass[idx]
        else:
            out = gap[idx]
        smooth = ~simple[idx]
        if smooth.any():
            for i in np.unique(idx[smooth]):
                sel = idx == i
                val = getattr(self.pieces[i], attr)(zc[sel])
                out[sel] = np.nan if val is None else val
        return out

    def potential(self, z_nm) -> np.ndarray:
        """V(z) [eV], carrier convention, claddings flat beyond the ends."""
        return self._eval("potential", z_nm)

    def edge_mass(self, z_nm) -> np.ndarray:
        """Band-edge mass m(z) [m0]."""
        return self._eval("mass", z_nm)

    def gap(self, z_nm) -> np.ndarray | None:
        """Local gap [eV] where defined; NaN where a piece is parabolic."""
        return self._eval("gap", z_nm)

    def mass(self, z_nm, energy_eV=None) -> np.ndarray:
        """Effective mass [m0] at z, energy-dependent if nonparabolic.

        Parameters
        ----------
        z_nm : array_like
            Positions [nm].
        energy_eV : float or array_like, optional
            Carrier energy [eV] (broadcast against z).  Without it, or for a
            parabolic band, the band-edge mass is returned.
        """
        m = self.edge_mass(z_nm)
        if energy_eV is None or not self.nonparabolic:
            return m
        g = self.gap(z_nm)
        v = self.potential(z_nm)
        factor = 1.0 + (np.asarray(energy_eV, dtype=float) - v) / np.where(np.isnan(g), np.inf, g)
        return m * np.maximum(factor, _MIN_MASS_FRACTION)

    def profile_energy(self, carrier_energy_eV):
        """Map carrier-convention energies to the band-diagram scale."""
        return self.carrier_sign * np.asarray(carrier_energy_eV, dtype=float)

    def carrier_energy(self, profile_energy_eV):
        """Map band-diagram energies to the carrier convention."""
        return self.carrier_sign * np.asarray(profile_energy_eV, dtype=float)

    @property
    def potential_min_eV(self) -> float:
        """Lowest potential over the listed layers (sampled finely) [eV]."""
        z = np.linspace(self.z_start_nm, self.z_end_nm, 4001)
        z = np.concatenate([z, self.boundaries_nm])
        return float(np.min(self.potential(z)))

    @property
    def confinement_limit_eV(self) -> float:
        """Energy above which a state is not bound: the lower of the two claddings [eV]."""
        return min(self.left_cladding[0], self.right_cladding[0])

    def sample(self, step_nm: float = 0.05):
        """(z, V, m) sampled on a grid that includes every interface."""
        zs = [np.array([self.z_start_nm])]
        for p in self.pieces:
            n = max(1, int(np.ceil(p.thickness_nm / step_nm)))
            zs.append(np.linspace(p.z_start_nm, p.z_end_nm, n + 1)[1:])
        z = np.concatenate(zs)
        return z, self.potential(z), self.edge_mass(z)


def band_from_layers(layers, *, name: str = "conduction", field_kV_per_cm: float = 0.0,
                     nonparabolic: bool = False, carrier_sign: int = 1,
                     z_start_nm: float = 0.0) -> Band:
    """Build a :class:`Band` from ``(thickness_nm, V_eV, mass_m0[, gap_eV])`` tuples.

    A uniform field ``field_kV_per_cm`` adds ``+F*z`` (potential energy of an
    electron, in eV with F in kV/cm -> 1e-4 eV/nm per kV/cm) measured from
    ``z_start_nm``; for a hole band (carrier_sign=-1) the carrier potential
    ``-Ev`` tilts the other way.  Handy for tests and synthetic problems.
    """
    slope = carrier_sign * field_kV_per_cm * 1e-4  # eV/nm in carrier convention
    pieces = []
    z = z_start_nm
    for i, spec in enumerate(layers):
        t, v, m = spec[0], spec[1], spec[2]
        g = spec[3] if len(spec) > 3 else None
        kind = "flat" if slope == 0 else "linear"
        pieces.append(Piece(z_start_nm=z, z_end_nm=z + t, layer_index=i, kind=kind,
                            edge_start_eV=v + slope * (z - z_start_nm), edge_slope_eV_per_nm=slope,
                            mass_m0=m, gap_eV=g))
        z += t
    return Band(name=name, pieces=tuple(pieces), carrier_sign=carrier_sign,
                nonparabolic=nonparabolic,
                layer_names=tuple(f"L{i + 1}" for i in range(len(pieces))))
