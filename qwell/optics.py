"""Optical transitions between subbands: matrix elements, line lists, spectra.

Two kinds of transition are listed:

* **Intersubband** (one band, conduction by default; heavy or light holes when
  the caller passes such levels): every pair ``i < j`` of states with
  ``ΔE > 0``, with the dipole ``|<i|z|j>|`` and an oscillator strength built
  from the velocity (momentum) matrix element with the position- and
  energy-dependent mass.
* **Interband** (``en -> hhm`` / ``en -> lhm``): photon energy
  ``E_e - E_h`` on the band-diagram scale (the gap enters through the band
  edges), envelope overlap ``|<e|h>|^2`` and relative TE/TM strengths.
  **Excitonic binding is not included**: interband line energies are
  free-carrier subband separations, so measured absorption/emission peaks of
  real wells lie a few meV (bulk GaAs exciton ~4 meV, up to ~10 meV in narrow
  wells) below them.

For a doped well, :func:`depolarisation_shift` gives the collective
(depolarisation, plasma) shift of an intersubband absorption line from the
Coulomb overlap :func:`coulomb_overlap_nm` (Ando, Fowler and Stern 1982).

Units (internal, plain floats): energies eV, lengths nm, masses m0,
wavefunctions nm^-1/2, linewidths meV.

Oscillator strength (intersubband)
----------------------------------
For the BenDaniel–Duke Hamiltonian ``H = -ħ²/2 d/dz (1/m) d/dz + V`` the
velocity operator is ``v = [z, H]/(iħ)`` and its matrix element between two
states is written here as

``ħ² P_ij / 2``  with  ``P_ij = ∫ [ψ_i ψ_j' / m(z, E_j) − ψ_i' ψ_j / m(z, E_i)] dz``

(``P_ij`` in nm^-2 m0^-1).  Each derivative carries the mass at its own
state's energy, so ``ψ'/m(E)`` is the quantity the BenDaniel–Duke boundary
conditions keep continuous and no interface delta terms arise.  For an
energy-independent mass ``ħ² P_ij / 2 = (E_j − E_i) <i|z|j>`` exactly; with
the energy-dependent (nonparabolic) mass the velocity form is the one to
use, following Sirtori et al. [3]_, because the plain dipole form no longer
satisfies that identity.  From it the *velocity dipole*
``z^v_ij = ħ² P_ij / (2 ΔE)`` and

``f_ij = 2 m_i ΔE |z^v_ij|² / ħ² = m_i ħ² P_ij² / (2 ΔE)``.

The normalising mass is the initial state's inverse-mass average
``1/m_i = <i| 1/m(z, E_i) |i>``.  With it the Thomas–Reiche–Kuhn sum rule
[1]_, [2]_ holds exactly, ``Σ_j f_ij = 1`` over a complete set, for any
parabolic band, including position-dependent masses: the double commutator
gives ``Σ_j (E_j − E_i)|z_ij|² = (ħ²/2)<i|1/m(z)|i>``.  For a single-mass well
``m_i = m*`` and ``f_ij`` reduces to the familiar dipole form
``2 m* ΔE |z_ij|²/ħ²``.  For a nonparabolic band the sum over conduction
subbands alone is only approximately 1 (the remainder belongs to the
valence-band part of the two-band states); :attr:`Transition.dipole_nm` is
always the plain ``|<i|z|j>|``.

Numerics: integrals use the state's grid (trapezoid rule); derivatives are
first differences on grid segments with the mass evaluated at segment
midpoints, which is exact at interfaces that are grid points.  If two states
live on different grids both are linearly interpolated onto the union of
the grids (zero outside a state's grid).  Wavefunction tails beyond the grid
are not included.

References
----------
.. [1] W. Kuhn, "Über die Gesamtstärke der von einem Zustande ausgehenden
   Absorptionslinien", Z. Phys. 33, 408 (1925).
.. [2] F. Reiche and W. Thomas, "Über die Zahl der Dispersionselektronen, die
   einem stationären Zustande zugeordnet ist", Z. Phys. 34, 510 (1925).
.. [3] C. Sirtori, F. Capasso, J. Faist and S. Scandolo, "Nonparabolicity and a
   sum rule associated with bound-to-bound and bound-to-continuum
   intersubband transitions in quantum wells", Phys. Rev. B 50, 8663 (1994).
.. [4] S. L. Chuang, *Physics of Optoelectronic Devices*, Wiley (1995), ch. 9
   (interband momentum matrix elements of heavy and light holes).
.. [5] L. A. Coldren and S. W. Corzine, *Diode Lasers and Photonic Integrated
   Circuits*, Wiley (1995), App. 10.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from .constants import E_C, EPS0_F_PER_M, EV_PER_CM1, EV_PER_THZ, HBAR2_2M0_EV_NM2, HC_EV_UM
from .errors import ParameterError
from .fileio import atomic_savefig
from .solvers import Levels
from .spectral import axis_label, from_eV, line_unit

__all__ = [
    "Transition",
    "MatrixElements",
    "Spectrum",
    "intersubband_matrices",
    "intersubband_transitions",
    "interband_transitions",
    "select_transitions",
    "canonical_transition",
    "strength",
    "spectrum",
    "plot_spectrum",
    "EXCITON_NOTE",
    "TE_TM_FACTORS",
    "HC_EV_UM",
    "HBAR2_2M0_EV_NM2",
    "coulomb_overlap_nm",
    "depolarisation_shift",
]

# HC_EV_UM (h c [eV um]) and HBAR2_2M0_EV_NM2 (ħ²/(2 m0) [eV nm²]) come from
# qwell.constants; they stay importable from here.
_EV_TO_CM1 = 1.0 / EV_PER_CM1
_EV_TO_THZ = 1.0 / EV_PER_THZ

#: Note attached to interband results and spectra.
EXCITON_NOTE = ("excitonic binding is not included: interband line energies are "
                "free-carrier subband separations (measured peaks lie a few meV lower)")

#: Relative interband momentum-matrix factors at k_parallel = 0, in units of the
#: bulk |P|² = |<S|p_x|X>|²: heavy hole TE 1/2, TM 0; light hole TE 1/6, TM 2/3
#: (Chuang 1995 ch. 9; Coldren & Corzine 1995 App. 10).
TE_TM_FACTORS = {
    "heavy_hole": (0.5, 0.0),
    "light_hole": (1.0 / 6.0, 2.0 / 3.0),
}

_MIN_DELTA_EV = 1e-9


# ---------------------------------------------------------------------------
# result objects
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Transition:
    """One optical transition.

    Attributes
    ----------
    initial, final : str
        State labels, e.g. 'e1', 'e2'; ``initial`` is the lower-energy state of
        an intersubband absorption, the electron state of an interband line.
    kind : {'intersubband', 'interband'}
    energy_eV : float
        Photon energy [eV], positive.
    wavelength_um : float
        Vacuum wavelength hc/E [µm].
    wavenumber_cm1 : float
        E/(hc) [cm⁻¹].
    frequency_THz : float
        E/h [THz].
    dipole_nm : float or None
        Intersubband: ``|<i|z|j>|`` [nm]; None without wavefunctions.
    oscillator_strength : float or None
        Intersubband: ``f_ij`` (dimensionless; see the module docstring for
        the form and the normalising mass).
    overlap : float or None
        Interband: ``|<e|h>|²`` (dimensionless).
    te, tm : float or None
        Interband: relative TE / TM strength = hole factor × overlap, in units
        of the bulk |P|² (see :data:`TE_TM_FACTORS`).
    strongest : bool
        Interband: Δn = 0 (allowed, strongest) line.  Intersubband: the
        strongest transition from the ground state.
    note : str
        Remarks (interband: :data:`EXCITON_NOTE`).  Not part of :meth:`to_json`.
    """

    initial: str
    final: str
    kind: str
    energy_eV: float
    wavelength_um: float
    wavenumber_cm1: float
    frequency_THz: float
    dipole_nm: float | None = None
    oscillator_strength: float | None = None
    overlap: float | None = None
    te: float | None = None
    tm: float | None = None
    strongest: bool = False
    note: str = ""

    @property
    def name(self) -> str:
        """'e1-e2', 'e1-hh1', ..."""
        return f"{self.initial}-{self.final}"

    @property
    def allowed(self) -> bool:
        """Alias of :attr:`strongest` (Δn = 0 interband lines)."""
        return self.strongest


@dataclass(frozen=True)
class MatrixElements:
    """Intersubband matrix elements of a set of states, as square arrays.

    Attributes
    ----------
    labels : tuple of str
        State labels (row/column order).
    carrier_energy_eV : numpy.ndarray
        Carrier-convention energies [eV].
    dipole_nm : numpy.ndarray
        ``<i|z|j>`` [nm] (signed, symmetric).
    velocity_dipole_nm : numpy.ndarray
        ``z^v_ij = ħ² P_ij / (2 (E_j − E_i))`` [nm] (signed); NaN on the
        diagonal and for degenerate pairs.
    oscillator_strength : numpy.ndarray
        ``f_ij = 2 m_i (E_j − E_i) |z^v_ij|² / ħ²``: positive for absorption
        (j above i), negative for emission, 0 on the diagonal.
    norm_mass_m0 : numpy.ndarray
        Normalising mass of each state ``1/<i|1/m(z,E_i)|i>`` [m0].
    """

    labels: tuple
    carrier_energy_eV: np.ndarray
    dipole_nm: np.ndarray
    velocity_dipole_nm: np.ndarray
    oscillator_strength: np.ndarray
    norm_mass_m0: np.ndarray


@dataclass(frozen=True)
class Spectrum:
    """A line-shape spectrum built from transitions.

    Attributes
    ----------
    energy_eV : numpy.ndarray
        Photon energies [eV] (increasing).
    wavelength_um : numpy.ndarray
        hc/E on the same points [µm].
    absorption : numpy.ndarray
        Sum of weighted line shapes, arbitrary units, normalised to a maximum
        of 1 unless all zero.  Not Jacobian-transformed for the wavelength axis.
    linewidth_meV : float
        Full width at half maximum of every line [meV].
    shape : {'lorentzian', 'gaussian'}
    lines : tuple of Transition
    polarization : {'te', 'tm', 'average'}
        Which interband strength weighted the interband lines.
    notes : tuple of str
    """

    energy_eV: np.ndarray
    wavelength_um: np.ndarray
    absorption: np.ndarray
    linewidth_meV: float
    shape: str
    lines: tuple
    polarization: str = "te"
    notes: tuple = ()


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------
def _spectral(energy_eV: float) -> tuple[float, float, float]:
    e = float(energy_eV)
    return HC_EV_UM / e, e * _EV_TO_CM1, e * _EV_TO_THZ


def _states_with_psi(states):
    return [s for s in states if s.z_nm is not None and s.psi is not None]


def _common_grid(states) -> tuple[np.ndarray, np.ndarray]:
    """Union grid and the wavefunctions on it, shape (n_states, n_z)."""
    grids = [np.asarray(s.z_nm, dtype=float) for s in states]
    first = grids[0]
    if all(g.shape == first.shape and np.array_equal(g, first) for g in grids[1:]):
        z = first
        psi = np.vstack([np.asarray(s.psi, dtype=float) for s in states])
        return z, psi
    z = np.unique(np.concatenate(grids))
    psi = np.vstack([np.interp(z, g, np.asarray(s.psi, dtype=float), left=0.0, right=0.0)
                     for g, s in zip(grids, states)])
    return z, psi


def _trapz_weights(z: np.ndarray) -> np.ndarray:
    h = np.diff(z)
    w = np.zeros_like(z)
    w[:-1] += 0.5 * h
    w[1:] += 0.5 * h
    return w


def intersubband_matrices(states, band) -> MatrixElements:
    """Dipole, velocity-dipole and oscillator-strength matrices of ``states``.

    Parameters
    ----------
    states : sequence of State or Levels
        States of one band, all with ``z_nm`` and ``psi``.
    band : Band
        The band they came from (for ``band.mass(z, E)``).

    Returns
    -------
    MatrixElements

    Raises
    ------
    ParameterError
        If a state has no wavefunction or there are no states.

    Notes
    -----
    The forms used are described in the module docstring (velocity matrix
    element with the energy-dependent mass, Sirtori et al. 1994; oscillator
    strength normalised by ``1/<i|1/m(z,E_i)|i>`` so that the Thomas–Reiche–Kuhn
    sum rule holds for parabolic bands).  Fully vectorised: a few dense
    matrix products over the grid.
    """
    states = list(states.states if isinstance(states, Levels) else states)
    if not states:
        raise ParameterError("no states given")
    missing = [s.label for s in states if s.z_nm is None or s.psi is None]
    if missing:
        raise ParameterError(f"states without wavefunction: {', '.join(missing)}")
    z, psi = _common_grid(states)
    if z.size < 2:
        raise ParameterError("wavefunction grid needs at least two points")
    eps = np.array([float(s.carrier_energy_eV) for s in states])
    w = _trapz_weights(z)

    # plain dipole <i|z|j>
    dip = (psi * (w * z)) @ psi.T

    # segment quantities: midpoint values, first differences, midpoint masses
    h = np.diff(z)
    keep = h > 0
    h = h[keep]
    zm = 0.5 * (z[:-1] + z[1:])[keep]
    pbar = 0.5 * (psi[:, :-1] + psi[:, 1:])[:, keep]
    dpsi = (np.diff(psi, axis=1)[:, keep]) / h
    # mass at each state's own energy on the midpoints: shape (n_states, n_seg)
    inv_m = np.empty_like(pbar)
    for k, e in enumerate(eps):  # one vectorised mass call per state
        inv_m[k] = 1.0 / np.asarray(band.mass(zm, e), dtype=float)
    flux = dpsi * inv_m                       # ψ'/m(E) per state
    P = (pbar * h) @ flux.T - (flux * h) @ pbar.T   # P_ij [nm^-2 / m0]

    # normalising mass 1/<i|1/m(z,E_i)|i>
    sq = 0.5 * (psi[:, :-1] ** 2 + psi[:, 1:] ** 2)[:, keep]
    inv_avg = np.sum(sq * inv_m * h, axis=1)
    m_norm = 1.0 / inv_avg

    dE = eps[None, :] - eps[:, None]          # E_j - E_i
    with np.errstate(divide="ignore", invalid="ignore"):
        zv = np.where(np.abs(dE) > _MIN_DELTA_EV, 2.0 * HBAR2_2M0_EV_NM2 * P / (2.0 * dE), np.nan)
        # f = m_i ħ² P² / (2 ΔE) with ħ²/(2 m0) = HBAR2_2M0
        f = np.where(np.abs(dE) > _MIN_DELTA_EV,
                     m_norm[:, None] * HBAR2_2M0_EV_NM2 * P ** 2 / dE, 0.0)
    return MatrixElements(labels=tuple(s.label for s in states), carrier_energy_eV=eps,
                          dipole_nm=dip, velocity_dipole_nm=zv, oscillator_strength=f,
                          norm_mass_m0=m_norm)


# ---------------------------------------------------------------------------
# transition lists
# ---------------------------------------------------------------------------
def intersubband_transitions(levels, band, *, include_quasi_bound: bool = True
                             ) -> tuple[Transition, ...]:
    """All intersubband absorption lines ``i -> j`` (i < j, ΔE > 0) of one band.

    Parameters
    ----------
    levels : Levels
        States of one band (conduction, heavy_hole or light_hole), in order of
        increasing carrier energy.
    band : Band
        The band the levels came from (its mass enters the oscillator strength).
    include_quasi_bound : bool
        Keep states with ``bound=False`` (quasi-bound resonances).

    Returns
    -------
    tuple of Transition
        Ordered by initial then final state.  ``energy_eV`` is the carrier
        energy difference.  Dipole and oscillator strength are None when the
        states carry no wavefunctions.  The strongest line from the ground
        state (largest ``f``, or largest dipole without ``f``) has
        ``strongest=True``.

    Raises
    ------
    ParameterError
        If the levels belong to another band than ``band``.

    References
    ----------
    C. Sirtori, F. Capasso, J. Faist and S. Scandolo, Phys. Rev. B 50, 8663
    (1994) (velocity form with energy-dependent mass); W. Kuhn, Z. Phys. 33,
    408 (1925); F. Reiche and W. Thomas, Z. Phys. 34, 510 (1925) (sum rule).
    """
    if isinstance(levels, Levels):
        if band is not None and band.name != levels.band:
            raise ParameterError(f"levels are of band {levels.band!r} but band is {band.name!r}")
        states = list(levels.states)
    else:
        states = list(levels)
    if not include_quasi_bound:
        states = [s for s in states if s.bound]
    if len(states) < 2:
        return ()
    states.sort(key=lambda s: float(s.carrier_energy_eV))
    have_psi = len(_states_with_psi(states)) == len(states)
    mats = intersubband_matrices(states, band) if have_psi else None
    eps = np.array([float(s.carrier_energy_eV) for s in states])

    out = []
    for i in range(len(states)):
        for j in range(i + 1, len(states)):
            dE = eps[j] - eps[i]
            if not dE > _MIN_DELTA_EV:
                continue
            lam, wn, fr = _spectral(dE)
            dip = f = None
            if mats is not None:
                dip = abs(float(mats.dipole_nm[i, j]))
                f = float(mats.oscillator_strength[i, j])
            out.append(Transition(initial=states[i].label, final=states[j].label,
                                  kind="intersubband", energy_eV=float(dE),
                                  wavelength_um=lam, wavenumber_cm1=wn, frequency_THz=fr,
                                  dipole_nm=dip, oscillator_strength=f))
    ground = [k for k, t in enumerate(out) if t.initial == states[0].label]
    if ground:
        def key(k):
            t = out[k]
            if t.oscillator_strength is not None:
                return t.oscillator_strength
            return t.dipole_nm if t.dipole_nm is not None else -np.inf
        best = max(ground, key=key)
        t = out[best]
        if t.oscillator_strength is not None or t.dipole_nm is not None:
            out[best] = _replace(t, strongest=True)
    return tuple(out)


def _replace(t: Transition, **changes) -> Transition:
    return replace(t, **changes)


def interband_transitions(electrons, electron_band, holes, hole_band) -> tuple[Transition, ...]:
    """Interband lines ``en -> hhm`` or ``en -> lhm``.

    Parameters
    ----------
    electrons : Levels
        Conduction-band states.
    electron_band : Band
        Their band (kept for symmetry of the interface; the envelope overlap
        needs no mass).
    holes : Levels
        Heavy- or light-hole states.
    hole_band : Band
        Their band; its ``name`` ('heavy_hole' or 'light_hole') selects the
        TE/TM factors.

    Returns
    -------
    tuple of Transition
        For every electron/hole pair with ``E_e − E_h > 0`` (band-diagram
        energies; the gap enters through the band edges): photon energy,
        wavelength, overlap ``|<e|h>|²``, ``te``/``tm`` = factor × overlap with
        factors heavy hole (1/2, 0), light hole (1/6, 2/3) in units of the bulk
        |P|² (Chuang 1995 ch. 9; Coldren & Corzine 1995 App. 10).  Lines with
        equal subband index (Δn = 0) have ``strongest=True``.  Without
        wavefunctions overlap, te and tm are None.

    Notes
    -----
    Excitonic binding is not included (see :data:`EXCITON_NOTE`); each
    interband transition carries that note.  Overlaps use the envelopes on a
    common grid (linear interpolation onto the union grid if the grids differ).

    Raises
    ------
    ParameterError
        If the hole band is not heavy_hole or light_hole.
    """
    lev_band = holes.band if isinstance(holes, Levels) else None
    hname = (hole_band.name if hole_band is not None else None) or lev_band
    if hname not in TE_TM_FACTORS:
        raise ParameterError(f"interband transitions need a heavy_hole or light_hole band, got {hname!r}")
    if lev_band is not None and lev_band != hname:
        raise ParameterError(f"hole levels are of band {lev_band!r} but hole_band is {hname!r}")
    fte, ftm = TE_TM_FACTORS[hname]
    es = list(electrons.states if isinstance(electrons, Levels) else electrons)
    hs = list(holes.states if isinstance(holes, Levels) else holes)
    if not es or not hs:
        return ()
    have = len(_states_with_psi(es)) == len(es) and len(_states_with_psi(hs)) == len(hs)
    ov = None
    if have:
        z, psi = _common_grid(es + hs)
        w = _trapz_weights(z)
        ov = ((psi[: len(es)] * w) @ psi[len(es):].T) ** 2
    out = []
    for a, e in enumerate(es):
        for b, hstate in enumerate(hs):
            dE = float(e.energy_eV) - float(hstate.energy_eV)
            if not dE > _MIN_DELTA_EV:
                continue
            lam, wn, fr = _spectral(dE)
            o = te = tm = None
            if ov is not None:
                o = float(ov[a, b])
                te, tm = fte * o, ftm * o
            out.append(Transition(initial=e.label, final=hstate.label, kind="interband",
                                  energy_eV=dE, wavelength_um=lam, wavenumber_cm1=wn,
                                  frequency_THz=fr, overlap=o, te=te, tm=tm,
                                  strongest=int(e.index) == int(hstate.index),
                                  note=EXCITON_NOTE))
    return tuple(out)


_STATE_LABEL = re.compile(r"^(e|hh|lh)(\d+)$")
_BAND_RANK = {"e": 0, "hh": 1, "lh": 2}


def canonical_transition(name) -> str:
    """The name under which a transition is listed: lower state first.

    ``'e3-e2'`` is the line ``'e2-e3'``, ``'hh1-e1'`` the line ``'e1-hh1'``: the electron
    state comes first, and of two states of one band the lower index.  Spaces and case
    are ignored; a name that is not two state labels is returned cleaned but unchanged
    (the caller's check names what is wrong).
    """
    key = str(name).strip().lower().replace(" ", "")
    parts = key.split("-")
    if len(parts) != 2:
        return key
    m = [_STATE_LABEL.match(x) for x in parts]
    if not all(m):
        return key
    order = sorted(zip(parts, m), key=lambda pm: (_BAND_RANK[pm[1].group(1)],
                                                  int(pm[1].group(2))))
    if m[0].group(1) != m[1].group(1) and _BAND_RANK[m[0].group(1)] and _BAND_RANK[m[1].group(1)]:
        return key  # heavy to light hole: not a listed line; leave it for the caller's check
    return "-".join(p for p, _ in order)


def select_transitions(transitions, names) -> tuple[Transition, ...]:
    """Pick transitions by name ('e1-e2', 'e1-hh1'), in the order of ``names``.

    Raises
    ------
    ParameterError
        For an unknown name; the message lists the available names.
    """
    if isinstance(names, str):
        names = [names]
    table = {}
    for t in transitions:
        table.setdefault(t.name.lower(), t)
    out = []
    for n in names:
        key = canonical_transition(n)
        if key not in table:
            avail = ", ".join(t.name for t in transitions) or "none"
            raise ParameterError(f"unknown transition {n!r}; available: {avail}")
        out.append(table[key])
    return tuple(out)


def strength(t: Transition) -> float:
    """One comparable strength number, for "strongest first" ordering.

    Intersubband: the oscillator strength.  Interband: the polarisation
    average ``(2 te + tm)/3`` (x, y, z averaged), which equals overlap/3 in
    |P|² units for both heavy and light holes.  0 when unknown.  Numbers of the
    two kinds are not on a common scale; compare within one kind.
    """
    if t.kind == "intersubband":
        return float(t.oscillator_strength) if t.oscillator_strength is not None else 0.0
    if t.te is not None and t.tm is not None:
        return (2.0 * float(t.te) + float(t.tm)) / 3.0
    return float(t.overlap) if t.overlap is not None else 0.0


# ---------------------------------------------------------------------------
# spectra
# ---------------------------------------------------------------------------
def _weight(t: Transition, polarization: str) -> float:
    if t.kind == "intersubband":
        return max(strength(t), 0.0)
    if polarization == "te":
        return float(t.te) if t.te is not None else 0.0
    if polarization == "tm":
        return float(t.tm) if t.tm is not None else 0.0
    return strength(t)


def spectrum(transitions, *, linewidth_meV: float = 10.0, shape: str = "lorentzian",
             energies_eV=None, points: int = 2000, polarization: str = "te") -> Spectrum:
    """Absorption (or gain-shape) spectrum of a set of lines.

    Parameters
    ----------
    transitions : iterable of Transition
    linewidth_meV : float
        FWHM of every line [meV].
    shape : {'lorentzian', 'gaussian'}
    energies_eV : array_like, optional
        Photon energies [eV] (positive).  Default: ``points`` equally spaced
        from the lowest line − 8 FWHM (but not below half its energy) to the
        highest + 8 FWHM.
    points : int
        Number of points of the default grid.
    polarization : {'te', 'tm', 'average'}
        Weight of interband lines: ``te``, ``tm`` or :func:`strength`.
        Intersubband lines are weighted by their oscillator strength
        (intersubband absorption is TM / z-polarised only).

    Returns
    -------
    Spectrum
        Peak-normalised sum of line shapes; computed as one (points × lines)
        array operation.
    """
    lines = tuple(transitions)
    shape_l = str(shape).lower()
    if shape_l not in ("lorentzian", "gaussian"):
        raise ParameterError(f"unknown line shape {shape!r}; use 'lorentzian' or 'gaussian'")
    pol = str(polarization).lower()
    if pol not in ("te", "tm", "average"):
        raise ParameterError(f"unknown polarization {polarization!r}; use 'te', 'tm' or 'average'")
    fwhm_meV = float(linewidth_meV)
    if not np.isfinite(fwhm_meV) or fwhm_meV <= 0:
        raise ParameterError(f"linewidth must be a positive number of meV, got {linewidth_meV!r}")
    fwhm = fwhm_meV * 1e-3
    e0 = np.array([float(t.energy_eV) for t in lines])
    wts = np.array([_weight(t, pol) for t in lines])
    if energies_eV is None:
        if not lines:
            raise ParameterError("no transitions and no energy grid: nothing to plot")
        n = int(points)
        if n < 2:
            raise ParameterError(f"points must be at least 2, got {points!r}")
        # at most down to half the lowest line energy, so that a wavelength
        # axis is not stretched by a long-wavelength tail
        lo = max(e0.min() - 8.0 * fwhm, 0.5 * e0.min())
        hi = e0.max() + 8.0 * fwhm
        energy = np.linspace(lo, hi, n)
    else:
        energy = np.asarray(energies_eV, dtype=float)
        if energy.ndim != 1 or energy.size < 2:
            raise ParameterError("energies_eV must be a 1-D array of at least two energies")
        if not np.all(np.isfinite(energy)) or np.any(energy <= 0):
            raise ParameterError("energies_eV must be positive and finite")
        energy = np.sort(energy)
    if lines:
        x = energy[:, None] - e0[None, :]
        if shape_l == "lorentzian":
            g = 0.5 * fwhm
            prof = (g / np.pi) / (x * x + g * g)
        else:
            sigma = fwhm / (2.0 * np.sqrt(2.0 * np.log(2.0)))
            prof = np.exp(-0.5 * (x / sigma) ** 2) / (sigma * np.sqrt(2.0 * np.pi))
        absorption = prof @ wts
    else:
        absorption = np.zeros_like(energy)
    peak = float(np.max(absorption)) if absorption.size else 0.0
    if peak > 0:
        absorption = absorption / peak
    notes = []
    if any(t.kind == "interband" for t in lines):
        notes.append(EXCITON_NOTE)
    return Spectrum(energy_eV=energy, wavelength_um=HC_EV_UM / energy, absorption=absorption,
                    linewidth_meV=fwhm_meV, shape=shape_l, lines=lines, polarization=pol,
                    notes=tuple(notes))


# Okabe & Ito colour-blind-safe palette (common practice, no source) and
# dash styles that stay distinct in greyscale (plain dotted is kept for weak lines).
_PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442")
_STYLES = ("--", "-.", (0, (5, 1, 1, 1, 1, 1)), (0, (8, 2)), (0, (3, 1, 1, 1)), (0, (2, 1)))
_MAX_LABELS = 12
_LABEL_GAP = 0.022  # minimum label separation, fraction of the axis width


def plot_spectrum(spec: Spectrum, path, *, axis: str = "wavelength", title: str | None = None,
                  protect=(), unit: str | None = None) -> Path:
    """Plot a :class:`Spectrum` to an image file (PNG by suffix), atomically.

    Parameters
    ----------
    spec : Spectrum
    path : str or Path
        Output file; its folder must exist.
    axis : {'wavelength', 'energy'}
        Horizontal axis: the photon unit of the spectrum's region ('wavelength',
        the default: nm near-infrared, µm mid-infrared, THz far-infrared, after
        the peak; see :func:`qwell.spectral.auto_unit`) or photon energy [eV].
    title : str, optional
    protect : iterable of paths
        Input files that must never be overwritten.
    unit : {'nm', 'um', 'cm-1', 'THz', 'meV'}, optional
        With ``axis='wavelength'``: this photon unit instead of the region's.

    Returns
    -------
    Path
        The file written (1200 × 675 pixels).

    Notes
    -----
    The spectrum is a solid black curve; each line position is a vertical
    line in a colour of a colour-blind-safe palette with its own dash style
    (lines weaker than 1e-3 of the strongest: thin grey dotted), labelled with
    its name, strongest first, at most 12 labels and none overlapping; the
    number of unlabelled lines is printed in the corner.
    """
    # matplotlib is heavy and only needed here: imported on first use
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    ax_kind = str(axis).lower()
    if ax_kind not in ("wavelength", "energy"):
        raise ParameterError(f"unknown axis {axis!r}; use 'wavelength' or 'energy'")
    if ax_kind == "wavelength":
        peak_eV = float(spec.energy_eV[int(np.argmax(spec.absorption))])
        unit = line_unit(peak_eV, unit)
        x = from_eV(np.asarray(spec.energy_eV, dtype=float), unit)
        xlabel = axis_label(unit)
        pos = [float(from_eV(t.energy_eV, unit)) for t in spec.lines]
    else:
        x = spec.energy_eV
        xlabel = "photon energy (eV)"
        pos = [t.energy_eV for t in spec.lines]
    fig, ax = plt.subplots(figsize=(8.0, 4.5), dpi=150)
    try:
        ax.plot(x, spec.absorption, color="black", lw=1.8, label="spectrum", zorder=3)
        xmin, xmax = float(np.min(x)), float(np.max(x))
        span = (xmax - xmin) or 1.0
        wts = [_weight(t, spec.polarization) for t in spec.lines]
        wmax = max(wts, default=0.0)
        # strongest first: they get colours, dash styles and labels first
        order = sorted(range(len(spec.lines)), key=lambda k: -wts[k])
        visible = [k for k in order if xmin <= pos[k] <= xmax]
        placed = []          # axis fractions of labels already placed
        unlabelled = 0
        for rank, k in enumerate(visible):
            t = spec.lines[k]
            weak = not (wts[k] > 1e-3 * wmax)
            col = "0.55" if weak else _PALETTE[rank % len(_PALETTE)]
            ls = ":" if weak else _STYLES[rank % len(_STYLES)]
            ax.axvline(pos[k], color=col, ls=ls, lw=0.9 if weak else 1.4, zorder=2)
            frac = (pos[k] - xmin) / span
            if (not weak and len(placed) < _MAX_LABELS
                    and all(abs(frac - q) > _LABEL_GAP for q in placed)):
                ax.text(pos[k], 1.02, t.name, rotation=90, ha="center", va="bottom",
                        fontsize=9, color=col, transform=ax.get_xaxis_transform(), clip_on=False)
                placed.append(frac)
            else:
                unlabelled += 1
        if unlabelled:
            ax.text(0.99, 0.97, f"{unlabelled} weaker/crowded line(s) not labelled",
                    ha="right", va="top", fontsize=8, color="0.3", transform=ax.transAxes)
        ax.set_xlim(xmin, xmax)
        ax.set_ylim(0.0, 1.08)
        ax.set_xlabel(xlabel, fontsize=11)
        ylab = "absorption (arb. units, peak = 1)"
        ax.set_ylabel(ylab, fontsize=11)
        shape = spec.shape.capitalize()
        sub = f"{shape}, FWHM {spec.linewidth_meV:g} meV"
        if any(t.kind == "interband" for t in spec.lines):
            sub += f", {spec.polarization.upper()}; excitons not included"
        longest = max((len(t.name) for t in spec.lines), default=0)
        pad = 12 + 6.0 * longest   # points: clear the rotated line labels above the axes
        ax.set_title((title + "\n" if title else "") + sub, fontsize=11, pad=pad)
        ax.grid(True, color="0.85", lw=0.6, zorder=0)
        ax.tick_params(labelsize=10)
        fig.subplots_adjust(left=0.1, right=0.97, bottom=0.13, top=0.74 if title else 0.78)
        return atomic_savefig(fig, path, protect=protect, dpi=150)
    finally:
        plt.close(fig)


# ---------------------------------------------------------------------------
# depolarisation shift
# ---------------------------------------------------------------------------
def _states_of(states, band: str) -> tuple:
    """States out of a band -> Levels mapping (e.g. ``Solution.levels``), a Levels or a sequence."""
    if isinstance(states, Mapping):
        return tuple(states[band].states)
    if isinstance(states, Levels):
        return tuple(states.states)
    return tuple(states)


def _pick(states, label):
    for s in states:
        if s.label == label:
            return s
    raise ParameterError(f"no state {label!r}; available: " + ", ".join(s.label for s in states))


def coulomb_overlap_nm(state_a, state_b) -> float:
    """Coulomb overlap length ``S = int dz [ int_{-inf}^z psi_a psi_b dz' ]^2`` [nm].

    Both states need wavefunctions; ``psi_b`` is interpolated onto the grid
    of ``psi_a`` (zero outside its own grid).
    """
    if state_a.psi is None or state_b.psi is None:
        raise ParameterError("the depolarisation shift needs wavefunctions (wavefunctions=True)")
    za = np.asarray(state_a.z_nm, dtype=float)
    zb = np.asarray(state_b.z_nm, dtype=float)
    zz = np.union1d(za, zb)
    pa = np.interp(zz, za, state_a.psi, left=0.0, right=0.0)
    pb = np.interp(zz, zb, state_b.psi, left=0.0, right=0.0)
    y = pa * pb
    # cumulative trapezoid rule, the arithmetic of scipy.integrate.cumulative_trapezoid
    # (initial=0) without importing scipy.integrate (~0.3 s of start-up)
    inner = np.concatenate(([0.0], np.cumsum(np.diff(zz) * (y[1:] + y[:-1]) / 2.0)))
    return float(np.trapezoid(inner ** 2, zz))


def depolarisation_shift(states, band: str, transition, sheet_density_cm2: float,
                         dielectric_constant: float) -> float:
    """Depolarisation (plasma) shift of an intersubband absorption line [eV].

    ``E~ = E_21 sqrt(1 + alpha)``, ``alpha = 2 e^2 n_s S / (eps eps0 E_21)``,
    with the Coulomb overlap ``S = int dz [int_{-inf}^z psi_1 psi_2 dz']^2``
    (:func:`coulomb_overlap_nm`); the returned value is ``E~ - E_21``.  The
    exchange–correlation (excitonic) correction is neglected.

    Parameters
    ----------
    states : Mapping[str, Levels], Levels or sequence of State
        States with wavefunctions; a mapping band name -> Levels (such as
        :attr:`qwell.levels.Solution.levels`) is indexed by ``band``.
    band : str
        Band name used to pick the Levels out of a mapping (e.g. 'conduction').
    transition : str or (str, str)
        'e1-e2' or a pair of state labels.
    sheet_density_cm2 : float
        Sheet density of the absorbing electrons [cm^-2] (strictly the
        population difference n_1 - n_2).
    dielectric_constant : float
        Static relative permittivity of the well.

    Returns
    -------
    float
        Shift of the absorption energy [eV], >= 0.

    Notes
    -----
    Consistency check of the factor 2: for a two-level system the shift is
    an effective plasma frequency ``(hbar w_p)^2 = alpha E_21^2`` with
    ``w_p^2 = n_s e^2 f_21 / (m eps eps0 L_eff)`` and ``f_21 = 2 m E_21 z_21^2 / hbar^2``;
    it equals the form above with ``S = z_21^2 / L_eff``.

    References
    ----------
    .. [1] T. Ando, A. B. Fowler and F. Stern, Rev. Mod. Phys. 54, 437 (1982).
    .. [2] M. Helm, "The basic physics of intersubband transitions",
       Semiconductors and Semimetals 62 (2000), ch. 1.
    """
    if isinstance(transition, str):
        parts = transition.split("-")
        if len(parts) != 2:
            raise ParameterError(f"transition {transition!r}: expected 'e1-e2'")
    else:
        parts = list(transition)
    states = _states_of(states, band)
    s1, s2 = _pick(states, parts[0]), _pick(states, parts[1])
    e21 = abs(s2.energy_eV - s1.energy_eV)
    if not e21 > 0:
        raise ParameterError("the transition energy is zero")
    if not (dielectric_constant > 0):
        raise ParameterError("dielectric_constant must be positive")
    s_nm = coulomb_overlap_nm(s1, s2)
    # e^2 n_s S / (eps0) in eV: (e/eps0 [V m]) * n_s [m^-2] * S [m]
    alpha = 2.0 * (E_C / EPS0_F_PER_M) * (sheet_density_cm2 * 1e4) * (s_nm * 1e-9) \
        / (dielectric_constant * e21)
    return float(e21 * (math.sqrt(1.0 + alpha) - 1.0))
