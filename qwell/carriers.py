"""Carriers in subbands: in-plane masses, 2-D filling, quasi-Fermi levels, active length.

Shared by :mod:`qwell.absorption` (intersubband) and :mod:`qwell.gain`
(interband).  Units: energies eV, lengths nm, masses m0, densities cm^-2.

Model statements
----------------
* Every subband is parabolic in-plane with one mass.  Electrons:
  ``1/m_par = <psi| 1/m(z, E_i) |psi>`` (first-order k.p perturbation of the
  in-plane kinetic energy; the band-edge mass for a parabolic band).
  Holes: the diagonal (axial) Luttinger in-plane masses, **valence-band mixing
  not included**: heavy hole ``1/m_par = gamma1 + gamma2``, light hole
  ``gamma1 - gamma2`` (in units of 1/m0), built from the [001] masses of the
  profile, ``1/m_hh = gamma1 - 2 gamma2``, ``1/m_lh = gamma1 + 2 gamma2``, so
  ``gamma1 + gamma2 = 1/(4 m_hh) + 3/(4 m_lh)`` and ``gamma1 - gamma2 =
  3/(4 m_hh) + 1/(4 m_lh)``, averaged with ``|psi|^2`` (GaAs: heavy hole
  0.11, light hole 0.20 in-plane: the "mass reversal").  Real heavy-hole subbands are strongly
  non-parabolic a few meV away from k = 0 (anticrossings with light holes).
* Only the subband states the solver reports (bound and localised
  quasi-bound) hold carriers: carriers in the barrier or guide continuum are
  not counted.  When a quasi-Fermi level comes within 3 kT of the band's
  confinement limit a :class:`~qwell.errors.ValidityWarning` says so.
* Occupation: Fermi–Dirac at the stack temperature,
  ``n_i = (m_i kT / pi hbar^2) ln(1 + exp((F - E_i)/kT))`` (spin included;
  Ando, Fowler and Stern [1]_).

References
----------
.. [1] T. Ando, A. B. Fowler and F. Stern, "Electronic properties of
   two-dimensional systems", Rev. Mod. Phys. 54, 437 (1982).
.. [2] J. M. Luttinger, "Quantum theory of cyclotron resonance in
   semiconductors: general theory", Phys. Rev. 102, 1030 (1956).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from .constants import KB_EV_PER_K
from .errors import ParameterError, ValidityWarning
from .poisson import sheet_density_2d

__all__ = ["Subbands", "ActiveRegion", "inplane_mass_m0", "subbands_of", "fermi_level",
           "fill", "active_region", "MAX_SHEET_DENSITY_CM2", "check_density", "fft_convolve"]

#: Largest sheet density accepted [cm^-2] (above it a quantum well is no longer a
#: sensible description: every subband model here is far outside its validity).
MAX_SHEET_DENSITY_CM2 = 1e14

_BISECTION_STEPS = 64


def fft_convolve(a, b) -> np.ndarray:
    """Full linear convolution of ``a`` (..., M) with ``b`` (..., L) along the last axis.

    numpy's FFT with zero padding to a power of two; the same as
    ``numpy.convolve`` row by row (without the import cost of scipy.signal).
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    n = a.shape[-1] + b.shape[-1] - 1
    nfft = 1 << max(int(n - 1).bit_length(), 1)
    out = np.fft.irfft(np.fft.rfft(a, nfft, axis=-1) * np.fft.rfft(b, nfft, axis=-1), nfft,
                       axis=-1)
    return out[..., :n]


def check_density(value, name: str = "density") -> np.ndarray:
    """Sheet densities as a float array, refused outside ``[0, 1e14] cm^-2``.

    Raises
    ------
    ParameterError
        Naming ``name`` and the accepted range.
    """
    arr = np.atleast_1d(np.asarray(value, dtype=float))
    if arr.size == 0 or not np.all(np.isfinite(arr)) or np.any(arr < 0) \
            or np.any(arr > MAX_SHEET_DENSITY_CM2):
        raise ParameterError(f"{name}: sheet density {value!r} cm^-2 is out of range; expected "
                             f"0 <= density <= {MAX_SHEET_DENSITY_CM2:.0e} cm^-2")
    return arr


@dataclass(frozen=True)
class Subbands:
    """The occupiable subbands of one carrier kind.

    Attributes
    ----------
    labels : tuple of str
    carrier_energy_eV : numpy.ndarray
        Subband bottoms in the carrier convention [eV] (electrons: E; holes: -E).
    mass_m0 : numpy.ndarray
        In-plane masses [m0] (module docstring).
    confinement_limit_eV : float
        Carrier-convention energy above which states are not bound [eV]
        (the lowest over the bands involved).
    """

    labels: tuple
    carrier_energy_eV: np.ndarray
    mass_m0: np.ndarray
    confinement_limit_eV: float = np.inf

    @property
    def size(self) -> int:
        return len(self.labels)


@dataclass(frozen=True)
class ActiveRegion:
    """The length that turns sheet densities into absorption coefficients.

    Attributes
    ----------
    length_nm : float
        Active length [nm]: alpha = (absorbance of the sheet) / length.
    rule : str
        How it was chosen, in words (stated in every output).
    start_nm, end_nm : float
        Its extent along z [nm].
    """

    length_nm: float
    rule: str
    start_nm: float = 0.0
    end_nm: float = 0.0


def _weights(state):
    z = np.asarray(state.z_nm, dtype=float)
    p2 = np.asarray(state.psi, dtype=float) ** 2
    w = np.zeros_like(z)
    h = np.diff(z)
    w[:-1] += 0.5 * h
    w[1:] += 0.5 * h
    w = w * p2
    s = w.sum()
    if not s > 0:
        raise ParameterError(f"state {state.label} has an empty wavefunction")
    return z, w / s


def inplane_mass_m0(state, profile) -> float:
    """In-plane mass of one subband [m0] (see the module docstring).

    Parameters
    ----------
    state : qwell.solvers.results.State
        With ``z_nm`` and ``psi``.
    profile : qwell.profile.Profile
        Supplies the bands (conduction mass; heavy- and light-hole [001] masses).
    """
    if state.psi is None or state.z_nm is None:
        raise ParameterError(f"state {state.label} has no wavefunction: in-plane mass undefined")
    z, w = _weights(state)
    if state.band == "conduction":
        band = profile.bands["conduction"]
        inv = 1.0 / np.asarray(band.mass(z, state.carrier_energy_eV), dtype=float)
        return float(1.0 / np.sum(w * inv))
    if "heavy_hole" not in profile.bands or "light_hole" not in profile.bands:
        raise ParameterError("hole in-plane masses need both heavy- and light-hole bands")
    inv_hh = 1.0 / np.asarray(profile.bands["heavy_hole"].edge_mass(z), dtype=float)
    inv_lh = 1.0 / np.asarray(profile.bands["light_hole"].edge_mass(z), dtype=float)
    if state.band == "heavy_hole":
        inv = 0.25 * inv_hh + 0.75 * inv_lh      # gamma1 + gamma2
    elif state.band == "light_hole":
        inv = 0.75 * inv_hh + 0.25 * inv_lh      # gamma1 - gamma2
    else:
        raise ParameterError(f"unknown band {state.band!r}")
    return float(1.0 / np.sum(w * inv))


def subbands_of(levels_list, profile, masses_m0=None) -> Subbands:
    """:class:`Subbands` of one carrier kind from one or more Levels.

    Parameters
    ----------
    levels_list : sequence of Levels
        E.g. ``[levels['conduction']]`` or ``[levels['heavy_hole'], levels['light_hole']]``.
    profile : Profile or None
        For the in-plane masses and confinement limits (None when
        ``masses_m0`` gives every mass).
    masses_m0 : dict, optional
        Label -> in-plane mass [m0], overriding the computed ones.
    """
    labels, eps, ms = [], [], []
    limit = np.inf
    for lev in levels_list:
        for s in getattr(lev, "states", lev):
            labels.append(s.label)
            eps.append(float(s.carrier_energy_eV))
            if masses_m0 is not None and s.label in masses_m0:
                ms.append(float(masses_m0[s.label]))
            else:
                if profile is None:
                    raise ParameterError(f"no in-plane mass for {s.label}")
                ms.append(inplane_mass_m0(s, profile))
        bname = getattr(lev, "band", None)
        if profile is not None and bname in getattr(profile, "bands", {}):
            limit = min(limit, profile.bands[bname].confinement_limit_eV)
    return Subbands(labels=tuple(labels), carrier_energy_eV=np.array(eps, dtype=float),
                    mass_m0=np.array(ms, dtype=float), confinement_limit_eV=float(limit))


def fill(sub: Subbands, fermi_eV, temperature_K: float) -> np.ndarray:
    """Sheet density of each subband [cm^-2]; shape ``fermi.shape + (n_subbands,)``.

    ``fermi_eV`` is in the carrier convention (holes: minus the band-diagram value).
    """
    f = np.asarray(fermi_eV, dtype=float)[..., None]
    return sheet_density_2d(sub.mass_m0, temperature_K, f - sub.carrier_energy_eV)


def fermi_level(sub: Subbands, density_cm2, temperature_K: float, *, kind: str = "electrons",
                warn: bool = True) -> np.ndarray:
    """Quasi-Fermi level(s) [eV, carrier convention] holding ``density_cm2`` in ``sub``.

    Vectorised over densities (bisection on the monotonic total density).
    Density 0 gives ``-inf``.  With ``warn``, a :class:`ValidityWarning` when
    a level comes within 3 kT of the confinement limit (continuum carriers
    are not counted).
    """
    dens = np.atleast_1d(np.asarray(density_cm2, dtype=float))
    if sub.size == 0:
        if np.any(dens > 0):
            raise ParameterError(f"no bound {kind} subbands to hold the carriers")
        return np.full(dens.shape, -np.inf)
    kt = KB_EV_PER_K * max(float(temperature_K), 0.0)
    e0 = float(np.min(sub.carrier_energy_eV))
    dos = sheet_density_2d(sub.mass_m0, 0.0, 1.0)            # cm^-2 per eV, each subband
    # bracket: n(F) <= size * max(dos) kT exp((F - e0)/kT) and n(F) >= min(dos) (F - e0)
    safe = np.maximum(dens, 1e-300)
    lo = np.full(dens.shape, e0 - 1e-3)
    if kt > 0:
        lo = np.minimum(lo, e0 + kt * (np.log(safe / (sub.size * float(np.max(dos)) * kt)) - 1.0))
    hi = e0 + dens / float(np.min(dos)) + kt + 1e-3
    for _ in range(_BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        n = fill(sub, mid, temperature_K).sum(axis=-1)
        up = n < dens
        lo = np.where(up, mid, lo)
        hi = np.where(up, hi, mid)
    out = 0.5 * (lo + hi)
    out = np.where(dens > 0, out, -np.inf)
    if warn:
        near = np.isfinite(out) & (out > sub.confinement_limit_eV - 3.0 * kt)
        if np.any(near):
            first = float(dens[near].min())
            warnings.warn(f"the {kind} quasi-Fermi level comes within 3 kT of the confinement "
                          f"limit from {first:.3g} cm^-2 on: {kind} in barrier/continuum states "
                          "are not counted, so the subband filling is overestimated",
                          ValidityWarning, stacklevel=2)
    return out


def active_region(profile, ground_state, *, length_nm: float | None = None) -> ActiveRegion:
    """The active length for sheet density -> alpha (stated in every output).

    Rule: with ``length_nm`` given, that length.  Else, when the stack has a
    repeat block, the block's periods (count x period; alpha is the average
    over them and sheet densities are totals).  Else the span from the first
    to the last layer in which the band edge of ``ground_state``'s band lies
    below that state's energy somewhere (the classically allowed region of
    the ground subband: the well, or coupled wells with the thin barriers
    between them).
    """
    if length_nm is not None:
        L = float(length_nm)
        if not (np.isfinite(L) and L > 0):
            raise ParameterError(f"active length must be a positive number of nm, got {length_nm!r}")
        return ActiveRegion(length_nm=L, rule=f"given: {L:.4g} nm", start_nm=0.0, end_nm=L)
    band = profile.bands[ground_state.band]
    reps = getattr(band, "repeats", ())
    if reps:
        r = max(reps, key=lambda q: q.count * q.period_nm)
        L = r.count * r.period_nm
        return ActiveRegion(length_nm=L, rule=(f"repeat block: {r.count} periods x "
                                               f"{r.period_nm:.4g} nm = {L:.4g} nm (alpha "
                                               "averaged over the periods)"),
                            start_nm=r.z_start_nm, end_nm=r.z_start_nm + L)
    e = float(ground_state.carrier_energy_eV)
    inside = []
    for lay in profile.layers:
        z = np.linspace(lay.start_nm, lay.end_nm, 43)[1:-1]   # inside: ends belong to neighbours
        if np.min(band.potential(z)) < e:
            inside.append(lay)
    if not inside:
        L = profile.total_thickness_nm
        return ActiveRegion(length_nm=L, rule=f"whole stack: {L:.4g} nm", start_nm=0.0, end_nm=L)
    a, b = inside[0], inside[-1]
    L = b.end_nm - a.start_nm
    names = a.label if a is b else f"{a.label} .. {b.label}"
    return ActiveRegion(length_nm=L, rule=(f"layers where {ground_state.label} is classically "
                                           f"allowed ({names}): {L:.4g} nm"),
                        start_nm=a.start_nm, end_nm=b.end_nm)
