"""Interband absorption and gain of quantum wells versus injected carrier density.

Model (the parabolic-subband quantum-well gain of Chuang [1]_, ch. 9, sec. 9.4
as recalled):

``g(hbar w) = sum_{n,m} A_nm(hbar w) * [f_c - f_v]``,

``A_nm = (pi e^2 / (n_r c eps0 m0^2 w)) |<e_n|h_m>|^2 |e.p_cv|^2 m_r / (pi hbar^2 L) H(hbar w - E_nm)``

for every electron subband ``e_n`` and heavy- or light-hole subband ``h_m``:
the 2-D joint density of states is a step of height ``m_r / (pi hbar^2 L)``
at the pair edge ``E_nm`` (spin included), with the reduced in-plane mass
``1/m_r = 1/m_e + 1/m_h`` of the two subbands (:mod:`qwell.carriers`:
parabolic in-plane dispersion, **valence-band mixing not included** — hole
subbands use the diagonal Luttinger in-plane masses; real heavy-hole
subbands are heavier and non-parabolic away from k = 0, which raises the
transparency density).  ``|<e|h>|^2 |e.p_cv|^2`` is the TE or TM weight of
:func:`qwell.optics.interband_transitions` times ``|<S|p_x|X>|^2 = m0 Ep / 2``
(Kane energy ``Ep`` of the well material), so
``A_nm = 2 pi alpha_fs (Ep / hbar w) m_r w_nm / (n_r L)``.
Only allowed pairs (a weight above 1e-8) enter.

Filling: at transition energy ``E = E_nm + hbar^2 k^2 / 2 m_r`` the electron
sits at ``E_n + (m_r/m_e)(E - E_nm)`` and the hole at ``E_m`` lowered by
``(m_r/m_h)(E - E_nm)``; ``f_c``, ``f_v`` are Fermi–Dirac functions of the
quasi-Fermi levels ``F_c``, ``F_v`` that hold an injected sheet density
``n = p`` (charge neutral) in the bound subbands at the stack temperature.
Gain is ``g``, absorption ``-g``; where ``f_c > f_v`` (Bernard–Duraffourg [2]_:
exactly where ``hbar w < F_c - F_v``) the pair amplifies.

Broadening: a Lorentzian of full width :data:`DEFAULT_LINEWIDTH_MEV` (``2 hbar /
tau_in`` with the intraband relaxation time tau_in = 0.1 ps usual in
quantum-well gain work; common practice, no source) convolves the
``A_nm (f_c - f_v)`` product over transition energies; the 1/w prefactor is
taken at the photon energy.  The part of ``f_c - f_v`` that tends to -1 is
convolved analytically (so no tail is lost), the decaying occupation part on
a cell grid with exact Lorentzian cell weights.  The Lorentzian's slow tails
put a little absorption below the edge and delay transparency somewhat;
``linewidth_meV=None`` gives the unbroadened spectrum, where the
Bernard–Duraffourg condition holds exactly.

Excitonic effects are not included here (see :mod:`qwell.excitons`): at
laser densities the electron–hole plasma screens the excitons, so the gain
spectrum is not shifted by the binding energy.

Units: energies eV, lengths nm, densities cm^-2, gain/absorption cm^-1.
Material gain per active length (:func:`qwell.carriers.active_region`);
modal gain is the confinement factor times it.

References
----------
.. [1] S. L. Chuang, *Physics of Photonic Devices*, 2nd ed., Wiley (2009),
   ch. 9 (optical processes in semiconductors), sec. 9.4 interband absorption
   and gain in a quantum well (section number from memory).
.. [2] M. G. A. Bernard and G. Duraffourg, "Laser conditions in
   semiconductors", Phys. Status Solidi 1, 699 (1961).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .carriers import (Subbands, active_region, check_density, fermi_level, fft_convolve,
                       subbands_of)
from .constants import ALPHA_FS, HBAR_EV_S, HC_EV_UM, KB_EV_PER_K
from .errors import ParameterError
from .levels import solve_stack
from .optics import interband_transitions

__all__ = ["InterbandPair", "InterbandModel", "GainTable", "GainSpectrum", "interband_model",
           "model_from_levels", "gain_table", "gain_spectrum", "step_height_cm1",
           "DEFAULT_LINEWIDTH_MEV", "DEFAULT_REFRACTIVE_INDEX", "POLARISATIONS"]

#: 2 hbar / tau_in with tau_in = 0.1 ps [meV] (about 13.2 meV FWHM).
DEFAULT_LINEWIDTH_MEV = 2.0 * HBAR_EV_S / 0.1e-12 * 1e3
#: GaAs-based active regions near 0.85-1 um (from memory).
DEFAULT_REFRACTIVE_INDEX = 3.5
POLARISATIONS = ("te", "tm")
_MIN_WEIGHT = 1e-8
_OCC_CUT = 30.0       # kT beyond the quasi-Fermi level: occupation below e^-30


def step_height_cm1(photon_energy_eV, weight, reduced_mass_m0, kane_energy_eV,
                    refractive_index, length_nm):
    """Unfilled step of one pair, ``2 pi alpha_fs (Ep/E) m_r w / (n_r L)`` [cm^-1].

    ``weight`` is the TE or TM weight (overlap times the hole factor, in units
    of ``|<S|p_x|X>|^2``).
    """
    e = np.asarray(photon_energy_eV, dtype=float)
    return (2.0 * math.pi * ALPHA_FS * float(kane_energy_eV) / e * float(reduced_mass_m0)
            * float(weight) / (float(refractive_index) * float(length_nm) * 1e-7))


@dataclass(frozen=True)
class InterbandPair:
    """One electron / hole subband pair.

    Attributes
    ----------
    electron, hole : str
        Labels, e.g. 'e1', 'hh1'.
    edge_eV : float
        Pair edge E_n - E_m (band-diagram energies) [eV].
    edge_wavelength_um : float
    overlap : float
        |<e|h>|^2.
    te, tm : float
        Weights in units of |<S|p_x|X>|^2 (:mod:`qwell.optics`).
    electron_mass_m0, hole_mass_m0, reduced_mass_m0 : float
        In-plane masses [m0].
    electron_index, hole_index : int
        Positions in the model's electron and hole :class:`~qwell.carriers.Subbands`.
    step_te_cm1, step_tm_cm1 : float
        Unfilled, unbroadened step height at the edge [cm^-1].
    """

    electron: str
    hole: str
    edge_eV: float
    edge_wavelength_um: float
    overlap: float
    te: float
    tm: float
    electron_mass_m0: float
    hole_mass_m0: float
    reduced_mass_m0: float
    electron_index: int
    hole_index: int
    step_te_cm1: float
    step_tm_cm1: float

    @property
    def name(self) -> str:
        return f"{self.electron}-{self.hole}"


@dataclass(frozen=True)
class InterbandModel:
    """Everything the gain calculation needs, independent of the density.

    Attributes
    ----------
    pairs : tuple of InterbandPair
        Allowed pairs, lowest edge first.
    electrons, holes : Subbands
        Occupiable subbands (holes: heavy and light together, carrier convention).
    kane_energy_eV : float
        Ep of the well material [eV].
    active_length_nm : float
    active_length_rule : str
    refractive_index : float
    temperature_K : float
    notes : tuple of str
    """

    pairs: tuple
    electrons: Subbands
    holes: Subbands
    kane_energy_eV: float
    active_length_nm: float
    active_length_rule: str
    refractive_index: float
    temperature_K: float
    notes: tuple = ()


@dataclass(frozen=True)
class GainTable:
    """Gain spectra over a range of injected densities.

    Attributes
    ----------
    densities_cm2 : numpy.ndarray
        Injected sheet densities n = p [cm^-2] (increasing).
    energy_eV, wavelength_um : numpy.ndarray
        Photon energies [eV] and hc/E [um].
    gain_te_cm1, gain_tm_cm1 : numpy.ndarray
        Material gain [cm^-1], shape (densities, energies); absorption = -gain.
    polarisation : {'te', 'tm'}
        Which one the peak figures refer to.
    peak_gain_cm1, peak_energy_eV, peak_wavelength_um : numpy.ndarray
        Maximum over the energy grid of the chosen polarisation, per density.
    electron_fermi_eV, hole_fermi_eV : numpy.ndarray
        Quasi-Fermi levels F_c, F_v on the band-diagram scale [eV] (-inf / +inf at 0).
    transparency_density_cm2 : float
        Density where the peak gain crosses zero (log-linear interpolation);
        NaN if it does not cross inside the range.
    linewidth_meV : float or None
        Lorentzian FWHM [meV]; None: unbroadened.
    model : InterbandModel
    notes : tuple of str
    """

    densities_cm2: np.ndarray
    energy_eV: np.ndarray = field(repr=False)
    wavelength_um: np.ndarray = field(repr=False)
    gain_te_cm1: np.ndarray = field(repr=False)
    gain_tm_cm1: np.ndarray = field(repr=False)
    polarisation: str = "te"
    peak_gain_cm1: np.ndarray = field(default=None)
    peak_energy_eV: np.ndarray = field(default=None)
    peak_wavelength_um: np.ndarray = field(default=None)
    electron_fermi_eV: np.ndarray = field(default=None)
    hole_fermi_eV: np.ndarray = field(default=None)
    transparency_density_cm2: float = math.nan
    linewidth_meV: float | None = None
    model: InterbandModel = field(default=None, repr=False)
    notes: tuple = ()

    @property
    def fermi_separation_eV(self) -> np.ndarray:
        """F_c - F_v [eV] per density."""
        return self.electron_fermi_eV - self.hole_fermi_eV

    def spectrum(self, k: int) -> "GainSpectrum":
        """The spectrum of the k-th density."""
        m = self.model
        return GainSpectrum(
            density_cm2=float(self.densities_cm2[k]), energy_eV=self.energy_eV,
            wavelength_um=self.wavelength_um, gain_te_cm1=self.gain_te_cm1[k],
            gain_tm_cm1=self.gain_tm_cm1[k], polarisation=self.polarisation,
            electron_fermi_eV=float(self.electron_fermi_eV[k]),
            hole_fermi_eV=float(self.hole_fermi_eV[k]),
            peak_gain_cm1=float(self.peak_gain_cm1[k]),
            peak_energy_eV=float(self.peak_energy_eV[k]),
            peak_wavelength_um=float(self.peak_wavelength_um[k]),
            linewidth_meV=self.linewidth_meV, pairs=m.pairs,
            active_length_nm=m.active_length_nm, active_length_rule=m.active_length_rule,
            refractive_index=m.refractive_index, kane_energy_eV=m.kane_energy_eV,
            temperature_K=m.temperature_K, notes=self.notes)


@dataclass(frozen=True)
class GainSpectrum:
    """Gain spectrum at one injected density.

    Attributes
    ----------
    density_cm2 : float
        n = p [cm^-2].
    energy_eV, wavelength_um : numpy.ndarray
    gain_te_cm1, gain_tm_cm1 : numpy.ndarray
        Material gain [cm^-1] (absorption = -gain).
    polarisation : str
        Which one the peak refers to.
    electron_fermi_eV, hole_fermi_eV : float
        F_c and F_v, band-diagram scale [eV].
    peak_gain_cm1, peak_energy_eV, peak_wavelength_um : float
    linewidth_meV : float or None
    pairs : tuple of InterbandPair
    active_length_nm, active_length_rule, refractive_index, kane_energy_eV, temperature_K
        As in :class:`InterbandModel`.
    notes : tuple of str
    """

    density_cm2: float
    energy_eV: np.ndarray = field(repr=False)
    wavelength_um: np.ndarray = field(repr=False)
    gain_te_cm1: np.ndarray = field(repr=False)
    gain_tm_cm1: np.ndarray = field(repr=False)
    polarisation: str = "te"
    electron_fermi_eV: float = math.nan
    hole_fermi_eV: float = math.nan
    peak_gain_cm1: float = math.nan
    peak_energy_eV: float = math.nan
    peak_wavelength_um: float = math.nan
    linewidth_meV: float | None = None
    pairs: tuple = ()
    active_length_nm: float = math.nan
    active_length_rule: str = ""
    refractive_index: float = math.nan
    kane_energy_eV: float = math.nan
    temperature_K: float = math.nan
    notes: tuple = ()

    @property
    def fermi_separation_eV(self) -> float:
        return self.electron_fermi_eV - self.hole_fermi_eV

    @property
    def gain_cm1(self) -> np.ndarray:
        """Gain of the chosen polarisation [cm^-1]."""
        return self.gain_te_cm1 if self.polarisation == "te" else self.gain_tm_cm1


# ---------------------------------------------------------------------------
# building the model
# ---------------------------------------------------------------------------
def model_from_levels(electrons, holes, *, kane_energy_eV: float, length_nm: float,
                      temperature_K: float, profile=None, masses_m0: dict | None = None,
                      refractive_index: float = DEFAULT_REFRACTIVE_INDEX, length_rule: str = "",
                      electron_band=None, hole_bands: dict | None = None,
                      notes=()) -> InterbandModel:
    """An :class:`InterbandModel` from subband levels.

    Parameters
    ----------
    electrons : Levels
        Conduction-band states with wavefunctions.
    holes : sequence of Levels
        Heavy- and/or light-hole levels (each with ``band`` set).
    kane_energy_eV : float
        Ep [eV].
    length_nm : float
        Active length [nm].
    temperature_K : float
    profile : Profile, optional
        For in-plane masses and confinement limits.
    masses_m0 : dict, optional
        Label -> in-plane mass [m0] (overrides the profile's).
    refractive_index : float
    electron_band, hole_bands : optional
        Bands passed to :func:`qwell.optics.interband_transitions` (default: from
        ``profile``, else the hole levels' band names).
    """
    if not (kane_energy_eV and kane_energy_eV > 0):
        raise ParameterError(f"Kane energy must be positive, got {kane_energy_eV!r} eV")
    if not (refractive_index > 0 and math.isfinite(refractive_index)):
        raise ParameterError(f"refractive index must be positive, got {refractive_index!r}")
    holes = [h for h in holes if h is not None and len(h)]
    esub = subbands_of([electrons], profile, masses_m0)
    hsub = subbands_of(holes, profile, masses_m0)
    eidx = {lab: k for k, lab in enumerate(esub.labels)}
    hidx = {lab: k for k, lab in enumerate(hsub.labels)}
    pairs = []
    for hl in holes:
        if hole_bands is not None and hl.band in hole_bands:
            hb = hole_bands[hl.band]
        elif profile is not None:
            hb = profile.bands[hl.band]
        else:
            raise ParameterError(f"no band for the {hl.band} levels: give profile or hole_bands")
        eb = electron_band if electron_band is not None else (
            profile.bands["conduction"] if profile is not None else None)
        for t in interband_transitions(electrons, eb, hl, hb):
            if t.te is None or max(t.te, t.tm) < _MIN_WEIGHT:
                continue
            a, b = eidx[t.initial], hidx[t.final]
            me, mh = float(esub.mass_m0[a]), float(hsub.mass_m0[b])
            mr = me * mh / (me + mh)
            args = (kane_energy_eV, refractive_index, length_nm)
            pairs.append(InterbandPair(
                electron=t.initial, hole=t.final, edge_eV=float(t.energy_eV),
                edge_wavelength_um=float(t.wavelength_um), overlap=float(t.overlap),
                te=float(t.te), tm=float(t.tm), electron_mass_m0=me, hole_mass_m0=mh,
                reduced_mass_m0=mr, electron_index=a, hole_index=b,
                step_te_cm1=float(step_height_cm1(t.energy_eV, t.te, mr, *args)),
                step_tm_cm1=float(step_height_cm1(t.energy_eV, t.tm, mr, *args))))
    if not pairs:
        raise ParameterError("no allowed interband pair (electron and hole subbands with "
                             "overlapping envelopes): no interband spectrum")
    pairs.sort(key=lambda p: p.edge_eV)
    return InterbandModel(pairs=tuple(pairs), electrons=esub, holes=hsub,
                          kane_energy_eV=float(kane_energy_eV), active_length_nm=float(length_nm),
                          active_length_rule=length_rule, refractive_index=float(refractive_index),
                          temperature_K=float(temperature_K), notes=tuple(notes))


def _kane_energy(stack, state) -> float:
    """Ep averaged over the uniform layers with the electron state's probability."""
    num = den = 0.0
    for k, p in enumerate(state.layer_probability):
        layer = stack.layers[k]
        if layer.grade is not None or p <= 0:
            continue
        ep = stack.material_of(layer).kane_energy_eV
        if ep is None:
            continue
        num += p * ep
        den += p
    if not den > 0:
        raise ParameterError("no Kane energy (kane_energy) in the layers holding the electrons: "
                             "interband strengths need it")
    return num / den


def interband_model(stack, *, solution=None, refractive_index: float = DEFAULT_REFRACTIVE_INDEX,
                    length_nm: float | None = None) -> InterbandModel:
    """The :class:`InterbandModel` of a stack (flat-band or self-consistent profile).

    Parameters
    ----------
    stack : qwell.stack.Stack
    solution : qwell.levels.Solution, optional
        Skip the solve.
    refractive_index : float
    length_nm : float, optional
        Active length [nm]; default :func:`qwell.carriers.active_region`.
    """
    if solution is None:
        solution = solve_stack(stack)
    lev = solution.levels
    if "conduction" not in lev or not len(lev["conduction"]):
        raise ParameterError("the stack has no bound electron subband: no interband gain model")
    holes = [lev[b] for b in ("heavy_hole", "light_hole") if b in lev and len(lev[b])]
    if not holes:
        raise ParameterError("the stack has no bound hole subband: no interband gain model")
    prof = solution.profile
    e1 = lev["conduction"].states[0]
    act = active_region(prof, e1, length_nm=length_nm)
    ep = _kane_energy(stack, e1)
    notes = ("parabolic in-plane subbands; valence-band mixing not included",
             "carriers in barrier/guide continuum states are not counted",
             "excitonic effects not included (screened at laser densities)")
    return model_from_levels(lev["conduction"], holes, kane_energy_eV=ep,
                             length_nm=act.length_nm, temperature_K=float(stack.temperature_K),
                             profile=prof, refractive_index=refractive_index,
                             length_rule=act.rule, notes=notes)


# ---------------------------------------------------------------------------
# spectra
# ---------------------------------------------------------------------------
def _lorentz_cdf(x, hwhm):
    return 0.5 + np.arctan(x / hwhm) / math.pi


def _default_energies(model: InterbandModel, fwhm_eV: float | None, points: int) -> np.ndarray:
    e0 = model.pairs[0].edge_eV
    if fwhm_eV is None:
        lo = e0
    else:
        lo = e0 - max(6.0 * fwhm_eV, 0.04)
    hi = e0 + 0.3
    return np.linspace(max(lo, 1e-3), hi, int(points))


def gain_table(model: InterbandModel, densities_cm2, *, linewidth_meV=DEFAULT_LINEWIDTH_MEV,
               polarisation: str = "te", energies_eV=None, points: int = 800) -> GainTable:
    """Gain spectra, peak gain and transparency over injected densities (vectorised).

    Parameters
    ----------
    model : InterbandModel
    densities_cm2 : array_like
        Injected sheet densities n = p [cm^-2], each in 0 .. 1e14.
    linewidth_meV : float or None
        Lorentzian FWHM [meV] (> 0), or None for the unbroadened spectrum.
    polarisation : {'te', 'tm'}
        For the peak figures (both spectra are always computed).
    energies_eV : array_like, optional
        Photon energies [eV]; default ``points`` from below the lowest edge to 0.3 eV above.
    points : int

    Returns
    -------
    GainTable
    """
    dens = np.sort(check_density(densities_cm2, "density"))
    pol = str(polarisation).lower()
    if pol not in POLARISATIONS:
        raise ParameterError(f"polarisation: {polarisation!r}; expected 'te' or 'tm'")
    if linewidth_meV is None:
        fwhm = None
    else:
        fwhm_meV = float(linewidth_meV)
        if not (math.isfinite(fwhm_meV) and fwhm_meV > 0):
            raise ParameterError(f"linewidth: {linewidth_meV!r} meV; expected a FWHM > 0 meV")
        fwhm = fwhm_meV * 1e-3
    if energies_eV is None:
        energy = _default_energies(model, fwhm, points)
    else:
        energy = np.sort(np.asarray(energies_eV, dtype=float))
        if energy.ndim != 1 or energy.size < 2 or np.any(energy <= 0):
            raise ParameterError("energies_eV must be a 1-D array of positive energies")
    T = model.temperature_K
    kt = KB_EV_PER_K * T
    fc = fermi_level(model.electrons, dens, T, kind="electrons")            # carrier scale
    fh = fermi_level(model.holes, dens, T, kind="holes")                    # carrier scale
    ee = model.electrons.carrier_energy_eV
    eh = model.holes.carrier_energy_eV
    D, N = dens.size, energy.size
    g_te = np.zeros((D, N))
    g_tm = np.zeros((D, N))

    def occupation(u, p):
        """f_c + f_h (= f_c + 1 - f_v) at kinetic transition energy u >= 0, shape (D, M)."""
        xe = ee[p.electron_index] + (p.reduced_mass_m0 / p.electron_mass_m0) * u[None, :]
        xh = eh[p.hole_index] + (p.reduced_mass_m0 / p.hole_mass_m0) * u[None, :]
        if kt > 0:
            a = 0.5 * (1.0 - np.tanh(0.5 * (xe - fc[:, None]) / kt))
            b = 0.5 * (1.0 - np.tanh(0.5 * (xh - fh[:, None]) / kt))
        else:
            a = (xe < fc[:, None]).astype(float)
            b = (xh < fh[:, None]).astype(float)
        return a + b

    for p in model.pairs:
        x = energy - p.edge_eV
        # energy-independent part of the step: 2 pi alpha Ep m_r / (n_r L), times w / E
        pref = step_height_cm1(1.0, 1.0, p.reduced_mass_m0, model.kane_energy_eV,
                               model.refractive_index, model.active_length_nm) / energy
        if fwhm is None:
            occ = np.zeros((D, N))
            on = x >= 0
            if np.any(on):
                occ[:, on] = occupation(x[on], p)
            shape = np.where(on, 1.0, 0.0)[None, :] * (occ - 1.0)
        else:
            hw = 0.5 * fwhm
            # kinetic range where carriers sit: up to 30 kT past either quasi-Fermi level
            fin_c = fc[np.isfinite(fc)]
            fin_h = fh[np.isfinite(fh)]
            reach = 0.0
            if fin_c.size:
                reach = max(reach, (fin_c.max() - ee[p.electron_index] + _OCC_CUT * kt)
                            * p.electron_mass_m0 / p.reduced_mass_m0)
            if fin_h.size:
                reach = max(reach, (fin_h.max() - eh[p.hole_index] + _OCC_CUT * kt)
                            * p.hole_mass_m0 / p.reduced_mass_m0)
            analytic = -_lorentz_cdf(x, hw)[None, :]
            if reach > 0:
                shape = analytic + _convolved_occupation(x, reach, hw, kt, D,
                                                         lambda u, _p=p: occupation(u, _p))
            else:
                shape = np.repeat(analytic, D, axis=0)
        g_te += (pref * p.te)[None, :] * shape
        g_tm += (pref * p.tm)[None, :] * shape
    g = g_te if pol == "te" else g_tm
    k = np.argmax(g, axis=1)
    peak = g[np.arange(D), k]
    e_pk = energy[k]
    transp = _crossing(dens, peak)
    notes = list(model.notes)
    if fwhm is None:
        notes.append("unbroadened spectrum")
    if not math.isfinite(transp):
        notes.append("peak gain does not cross zero inside the density range: no transparency "
                     "density")
    return GainTable(densities_cm2=dens, energy_eV=energy, wavelength_um=HC_EV_UM / energy,
                     gain_te_cm1=g_te, gain_tm_cm1=g_tm, polarisation=pol, peak_gain_cm1=peak,
                     peak_energy_eV=e_pk, peak_wavelength_um=HC_EV_UM / e_pk,
                     electron_fermi_eV=fc.copy(), hole_fermi_eV=-fh,
                     transparency_density_cm2=transp,
                     linewidth_meV=None if fwhm is None else fwhm * 1e3, model=model,
                     notes=tuple(notes))


def _convolved_occupation(x, reach, hw, kt, D, occupation):
    """int_0^inf L(x - u) occ(u) du on the points x, shape (D, len(x)).

    occ is sampled at the midpoints of cells of width du = min(kT, HWHM)/8
    from u = 0 to ``reach``; each cell carries its exact Lorentzian weight
    ``CDF(x - u_a) - CDF(x - u_b)``.  The sum is a discrete convolution on the
    lattice x_k = k du (FFT), interpolated linearly onto ``x``.
    """
    du = min(max(kt, 1e-4), hw) / 8.0
    m = int(math.ceil(reach / du)) + 1
    mid = (np.arange(m) + 0.5) * du
    occ = occupation(mid)                                        # (D, m)
    k_lo = int(math.floor(float(np.min(x)) / du)) - 1
    k_hi = int(math.ceil(float(np.max(x)) / du)) + 1
    m0 = k_lo - m + 1
    lag = np.arange(m0, k_hi + 1) * du                           # x_k - u_j at cell starts
    kern = _lorentz_cdf(lag, hw) - _lorentz_cdf(lag - du, hw)
    full = fft_convolve(occ, kern[None, :])
    rows = full[:, m - 1: m - 1 + (k_hi - k_lo) + 1]             # lattice k = k_lo .. k_hi
    xk = np.arange(k_lo, k_hi + 1) * du
    out = np.empty((D, x.size))
    for d in range(D):
        out[d] = np.interp(x, xk, rows[d])
    return out


def _crossing(dens, peak) -> float:
    """First density where the peak gain goes from <= 0 to > 0 (log-linear interpolation)."""
    for i in range(1, dens.size):
        a, b = peak[i - 1], peak[i]
        if a <= 0 < b:
            d0, d1 = dens[i - 1], dens[i]
            t = -a / (b - a)
            if d0 > 0:
                return float(math.exp(math.log(d0) + t * (math.log(d1) - math.log(d0))))
            return float(d0 + t * (d1 - d0))
    return math.nan


def gain_spectrum(model: InterbandModel, density_cm2: float, **options) -> GainSpectrum:
    """Gain spectrum at one injected density (options as :func:`gain_table`)."""
    check_density(density_cm2, "density")
    return gain_table(model, [float(density_cm2)], **options).spectrum(0)
