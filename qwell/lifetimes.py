"""Intersubband lifetimes: LO-phonon scattering, spontaneous emission, emitter figure of merit.

What is computed
----------------
* **LO-phonon scattering** between every pair of subbands of one band (the conduction band in
  practice): the Froehlich interaction with bulk, dispersionless LO phonons of one host
  material, emission and absorption with the Bose occupation at the lattice temperature, for an
  electron at the bottom of the initial subband (k = 0) or averaged over a Maxwell-Boltzmann
  distribution in it.  Result: :class:`RateTable` (rate matrix, total outgoing rates,
  lifetimes in ps).
* **Spontaneous emission** of each intersubband line from its oscillator strength and the
  refractive index (:func:`spontaneous_emission_rate`).
* **The emitter figure of merit** of a line u -> l (:class:`EmitterFigure`): tau_u, tau_l,
  tau_ul, the inversion factor tau_u (1 - tau_l / tau_ul), z_ul^2 tau_u (1 - tau_l / tau_ul),
  the peak gain cross-section and the gain per unit current density.

Froehlich rate (Ferreira & Bastard [1]_)
----------------------------------------
With the bulk Froehlich matrix element ``|M(Q)|^2 = e^2 hbar w_LO (1/eps_inf - 1/eps_s) /
(2 eps0 V Q^2)`` and the golden rule, the integral over the phonon wavevector along z gives
the form factor of the product density ``rho(z) = psi_i(z) psi_f(z)``::

    F_if(q) = int int rho(z) rho(z') exp(-q |z - z'|) dz dz'        (dimensionless)

and the rate out of in-plane wavevector k_i of subband i into subband f is::

    W_if(k_i) = e^2 w_LO C n_ph m_f / (8 pi eps0 hbar^2) * int_0^{2 pi} F_if(q) / q  dtheta

with ``C = 1/eps_inf - 1/eps_s``, ``n_ph = N`` (absorption) or ``N + 1`` (emission),
``N = 1/(exp(hbar w_LO / kT) - 1)``, ``q = |k_i - k_f|`` and ``|k_f|`` fixed by energy
conservation ``E_i + hbar^2 k_i^2/2m_i = E_f + hbar^2 k_f^2/2m_f -+ hbar w_LO``.  At k_i = 0::

    W_if = e^2 w_LO C n_ph m_f F_if(k_f) / (4 eps0 hbar^2 k_f)

which is zero when the final kinetic energy would be negative (emission with
``E_i - E_f < hbar w_LO``) and jumps to a finite value where it crosses zero (2-D density of
states).  ``m_i``, ``m_f`` are the in-plane masses of the subbands, ``1/<i|1/m(z, E_i)|i>``
(the same normalising mass :mod:`qwell.optics` uses).

Form factor: the inner integral ``S(z) = int_{z'<z} rho(z') exp(-q (z - z')) dz'`` is done
exactly for the piecewise-linear interpolant of rho (a first-order recursion written as one
cumulative sum per row, in blocks short enough that the exponentials cannot overflow) and
``F = 2 int rho S dz`` by the trapezoid rule: O(h^2) and no O(N^2) double sum.

Assumptions and limits (say them in reports)
--------------------------------------------
* Bulk phonons of one host material (the well material: the uniform layer holding most of the
  probability of the states), no interface or confined modes, no screening, no
  phonon dispersion, no hot phonons.  Two-mode alloys (AlGaAs, InGaAs, ...) use the dominant
  LO branch only (see :mod:`qwell.materials`, source key ``two_mode_alloy``).
* Parabolic in-plane dispersion with the subband's in-plane mass.
* Only the states passed in are final states: a real emitter's lower state also empties by
  tunnelling into the next stage, which is not included here.

References
----------
.. [1] R. Ferreira and G. Bastard, "Evaluation of some scattering times for electrons in
   unbiased and biased single- and multiple-quantum-well structures", Phys. Rev. B 40, 1074
   (1989), doi:10.1103/PhysRevB.40.1074.
.. [2] H. Froehlich, "Electrons in lattice fields", Adv. Phys. 3, 325 (1954).
.. [3] R. Loudon, *The Quantum Theory of Light*, 3rd ed., Oxford University Press (2000),
   ch. 2 (Einstein A coefficient of an electric dipole).
.. [4] J. Faist, F. Capasso, D. L. Sivco, C. Sirtori, A. L. Hutchinson and A. Y. Cho,
   "Quantum cascade laser", Science 264, 553 (1994) (gain coefficient per unit current
   density of an intersubband line; quoted from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

from .constants import C_M_S, E_C, EPS0_F_PER_M, HBAR_J_S, HC_EV_UM, KB_EV_PER_K, M0_KG
from .constants import HBAR2_2M0_EV_NM2 as HBAR2_2M0
from .errors import MaterialError, ParameterError
from .optics import _common_grid, _trapz_weights

__all__ = [
    "LOPhonon",
    "RateTable",
    "RadiativeLine",
    "EmitterFigure",
    "Lifetimes",
    "phonon_of_material",
    "host_phonon",
    "form_factors",
    "bose_occupation",
    "lo_phonon_rates",
    "spontaneous_emission_rate",
    "radiative_lines",
    "emitter_figure",
    "solution_lifetimes",
    "PHONON_KEYS",
]

#: Material fields the Froehlich rate needs -> the YAML key that sets each.
PHONON_KEYS = {"lo_phonon_energy_eV": "lo_phonon_energy",
               "high_frequency_dielectric_constant": "high_frequency_dielectric_constant",
               "dielectric_constant": "dielectric_constant"}

_KMAX_EXP = 500.0        # largest q * (block length) in one cumulative sum (exp(500) < 1e308)
_SMALL_QH = 1e-4         # below this q*h the segment weights use their series
_THERMAL_ENERGIES = 16   # Gauss-Laguerre nodes of the thermal average
_THERMAL_ANGLES = 24     # Gauss-Legendre nodes of the scattering angle on [0, pi]
_Q_TABLE = 96           # q points of the interpolation table of the thermal average


# --------------------------------------------------------------------------- phonon host
@dataclass(frozen=True)
class LOPhonon:
    """Bulk LO-phonon parameters of the host material.

    Attributes
    ----------
    energy_eV : float
        hbar w_LO [eV].
    eps_infinity : float
        High-frequency relative permittivity eps_inf.
    eps_static : float
        Static relative permittivity eps_s.
    material : str
        Host material name ('' when given by hand).
    layer : str
        Layer the host was taken from ('' when given by hand).
    sources : Mapping[str, str]
        Source keys of the three values (see ``qwell/materials/data/sources.yaml``).
    note : str
        Remarks (two-mode alloy caution).
    """

    energy_eV: float
    eps_infinity: float
    eps_static: float
    material: str = ""
    layer: str = ""
    sources: Mapping = field(default_factory=dict, compare=False)
    note: str = ""

    def __post_init__(self):
        for name in ("energy_eV", "eps_infinity", "eps_static"):
            v = getattr(self, name)
            if not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0):
                raise ParameterError(f"LO phonon: {name} must be a positive number, got {v!r}")
        if not self.eps_static > self.eps_infinity:
            raise ParameterError(
                f"LO phonon: eps_static ({self.eps_static:g}) must exceed eps_infinity "
                f"({self.eps_infinity:g}); the Froehlich coupling 1/eps_inf - 1/eps_s is positive")

    @property
    def coupling(self) -> float:
        """Froehlich factor 1/eps_inf - 1/eps_s (dimensionless)."""
        return 1.0 / self.eps_infinity - 1.0 / self.eps_static

    @property
    def refractive_index(self) -> float:
        """sqrt(eps_inf): the index just above the reststrahlen band (mid-IR estimate)."""
        return math.sqrt(self.eps_infinity)


def phonon_of_material(material, layer: str = "") -> LOPhonon:
    """The :class:`LOPhonon` of a :class:`~qwell.materials.Material`.

    Raises
    ------
    MaterialError
        When the material lacks any of the three values; the message names the missing YAML
        keys (a user material must give them).
    """
    missing = [key for fld, key in PHONON_KEYS.items() if getattr(material, fld, None) is None]
    name = getattr(material, "name", str(material))
    if missing:
        where = "user material " if getattr(material, "family", "") == "user" else "material "
        raise MaterialError(
            f"{where}{name!r}: no LO-phonon data for the scattering rates; missing "
            + ", ".join(missing) + f" (add them to materials.{name} in the stack file, e.g. "
            "lo_phonon_energy: 36 meV, high_frequency_dielectric_constant: 10.9, "
            "dielectric_constant: 12.9)")
    srcs = dict(getattr(material, "sources", {}) or {})
    note = ""
    if "two_mode_alloy" in srcs.get("lo_phonon_energy_eV", ""):
        note = (f"{name} is a multi-mode alloy: the LO phonon of its dominant end member "
                f"({1e3 * material.lo_phonon_energy_eV:.1f} meV) is used, the weaker branch "
                "is ignored")
    return LOPhonon(energy_eV=float(material.lo_phonon_energy_eV),
                    eps_infinity=float(material.high_frequency_dielectric_constant),
                    eps_static=float(material.dielectric_constant), material=str(name),
                    layer=str(layer),
                    sources={k: srcs.get(k, "") for k in PHONON_KEYS}, note=note)


def host_phonon(stack, states) -> LOPhonon:
    """LO phonon of the well material: the material holding most of the states' probability.

    Parameters
    ----------
    stack : qwell.stack.Stack
    states : sequence of State
        Their ``layer_probability`` tuples are summed over the uniform layers of each material
        (with the same overrides); graded layers are skipped.  The layer named in the result
        is that material's layer with the largest share.

    Raises
    ------
    MaterialError
        If that material has no LO-phonon data (names the missing keys).
    """
    layers = stack.layers
    weight = np.zeros(len(layers))
    for s in states:
        p = np.asarray(s.layer_probability, dtype=float)
        if p.size == len(layers):
            weight += p
    groups: dict = {}
    for k, layer in enumerate(layers):
        if layer.material is None:
            continue
        key = (layer.material, tuple(sorted(dict(layer.overrides).items())))
        total, best = groups.get(key, (0.0, k))
        groups[key] = (total + weight[k], best if weight[best] >= weight[k] else k)
    if not groups:
        raise ParameterError("no uniform layer to take the LO-phonon host material from")
    _, k = max(groups.values(), key=lambda tb: tb[0])
    layer = layers[k]
    return phonon_of_material(stack.material_of(layer), layer=layer.label)


def bose_occupation(energy_eV: float, temperature_K: float) -> float:
    """Bose-Einstein occupation 1/(exp(E/kT) - 1); 0 at T = 0."""
    if temperature_K <= 0:
        return 0.0
    x = energy_eV / (KB_EV_PER_K * temperature_K)
    return 0.0 if x > 700 else 1.0 / math.expm1(x)


# --------------------------------------------------------------------------- form factor
def form_factors(z_nm, rho, q_per_nm) -> np.ndarray:
    """Form factors ``F(q) = int int rho(z) rho(z') exp(-q|z - z'|) dz dz'`` of product densities.

    Parameters
    ----------
    z_nm : array_like, shape (N,)
        Increasing grid [nm] (need not be uniform).
    rho : array_like, shape (P, N) or (N,)
        Product densities ``psi_i psi_f`` on the grid [nm^-1].
    q_per_nm : array_like, shape (P, K), (P,) or scalar
        In-plane wavevectors [nm^-1] (>= 0), one row per density.

    Returns
    -------
    numpy.ndarray, shape (P, K) (or the broadcast shape of ``q``)
        Dimensionless form factors.

    Notes
    -----
    ``F = 2 int rho(z) S(z) dz`` with ``S(z) = int_{z'<z} rho(z') exp(-q (z - z'))
    dz'``.  S is integrated exactly for the piecewise-linear interpolant of rho on each grid
    segment and accumulated as ``exp(-q z_k) cumsum(exp(q z_j) b_j)`` in blocks with
    ``q * (block length) <= 500``; the outer integral is the trapezoid rule.  Cost O(P K N).
    """
    z = np.asarray(z_nm, dtype=float)
    rho_in = np.asarray(rho, dtype=float)
    r = np.atleast_2d(rho_in)
    q_in = np.asarray(q_per_nm, dtype=float)
    P, N = r.shape
    if z.ndim != 1 or z.size != N or N < 2 or r.ndim != 2:
        raise ParameterError("form_factors: z_nm must be 1-D with one point per density column")
    if np.any(np.diff(z) <= 0):
        raise ParameterError("form_factors: z_nm must increase strictly")
    if rho_in.ndim == 1:
        out_shape = q_in.shape
        q = q_in.reshape(1, -1)
    elif q_in.ndim == 0:
        out_shape = (P,)
        q = np.full((P, 1), float(q_in))
    elif q_in.shape == (P,):
        out_shape = (P,)
        q = q_in.reshape(P, 1)
    elif q_in.ndim == 2 and q_in.shape[0] == P:
        out_shape = q_in.shape
        q = q_in
    else:
        raise ParameterError(f"form_factors: q of shape {q_in.shape} does not fit {P} densities")
    if np.any(q < 0) or not np.all(np.isfinite(q)):
        raise ParameterError("form_factors: q must be finite and >= 0")
    K = q.shape[1]
    chunk = max(1, int(2_000_000 // max(1, P * N)))
    if K > chunk:                                   # bound the memory of the (P, K, N) arrays
        parts = [form_factors(z, r, q[:, a:a + chunk]) for a in range(0, K, chunk)]
        return np.concatenate(parts, axis=1).reshape(out_shape)
    h = np.diff(z)                                  # (N-1,)
    if float(np.ptp(h)) <= 1e-12 * float(h[0]):
        h = h[:1]                                   # uniform grid: one segment length
    qq = q[:, :, None]                              # (P, K, 1)
    x = qq * h[None, None, :]                       # q h per segment, (P, K, 1 or N-1)
    small = x < _SMALL_QH
    with np.errstate(divide="ignore", invalid="ignore"):
        g0 = np.where(small, 1.0 - x / 2 + x * x / 6, -np.expm1(-x) / x)
        g1 = np.where(small, 0.5 - x / 6 + x * x / 24, (x + np.expm1(-x)) / (x * x))
    # exact int_0^h rho(z_k + s) exp(-q (h - s)) ds for rho linear on the segment:
    # b_k = rho_k h (g0 - g1) + rho_{k+1} h g1, the source of segment k carried to z_{k+1}
    c0 = h * (g0 - g1)
    c1 = h * g1
    rw = r * _trapz_weights(z)[None, :]             # outer trapezoid weights times rho
    F = np.zeros((P, K))
    qmax = float(q.max()) if q.size else 0.0
    start = 0
    carry = np.zeros((P, K))
    while start < N - 1:
        if qmax > 0:
            stop = int(np.searchsorted(z, z[start] + _KMAX_EXP / qmax, side="right")) - 1
            stop = min(max(stop, start + 1), N - 1)
        else:
            stop = N - 1
        seg = slice(start, stop)
        zs = z[start + 1:stop + 1] - z[start]       # local coordinate of z_{j+1}
        grow = np.exp(qq * zs[None, None, :])       # exp(q (z_{j+1} - z_start)), <= e^500
        bk = (r[:, None, seg] * (c0 if c0.shape[2] == 1 else c0[:, :, seg])
              + r[:, None, start + 1:stop + 1] * (c1 if c1.shape[2] == 1 else c1[:, :, seg]))
        acc = np.cumsum(bk * grow, axis=2)
        acc += carry[:, :, None]
        # S(z_{j+1}) = acc / grow; F = 2 sum_j w rho S
        F += np.einsum("pkn,pn->pk", acc / grow, rw[:, start + 1:stop + 1])
        carry = acc[:, :, -1] / grow[:, :, -1]
        start = stop
    F *= 2.0
    return F.reshape(out_shape)


# --------------------------------------------------------------------------- rate table
@dataclass(frozen=True)
class RateTable:
    """LO-phonon scattering rates between the subbands of one band.

    Attributes
    ----------
    labels : tuple of str
        State labels, in order of increasing carrier energy (row/column order).
    carrier_energy_eV : numpy.ndarray
        Carrier-convention energies [eV].
    emission_per_s : numpy.ndarray, shape (n, n)
        ``[i, f]``: rate i -> f with LO-phonon emission [1/s]; diagonal 0.
    absorption_per_s : numpy.ndarray, shape (n, n)
        ``[i, f]``: rate i -> f with LO-phonon absorption [1/s]; diagonal 0.
    in_plane_mass_m0 : numpy.ndarray
        In-plane mass of each subband ``1/<i|1/m|i>`` [m0].
    temperature_K : float
        Lattice temperature of the Bose occupation [K].
    phonon : LOPhonon
    thermal : bool
        False: electron at the bottom of the initial subband; True: averaged over a
        Maxwell-Boltzmann distribution at ``temperature_K`` in it.
    band : str
    """

    labels: tuple
    carrier_energy_eV: np.ndarray
    emission_per_s: np.ndarray
    absorption_per_s: np.ndarray
    in_plane_mass_m0: np.ndarray
    temperature_K: float
    phonon: LOPhonon
    thermal: bool = False
    band: str = "conduction"

    @property
    def rate_per_s(self) -> np.ndarray:
        """``[i, f]``: total LO-phonon rate i -> f (emission + absorption) [1/s]."""
        return self.emission_per_s + self.absorption_per_s

    @property
    def total_per_s(self) -> np.ndarray:
        """Total outgoing rate of each state to all the other states [1/s]."""
        return self.rate_per_s.sum(axis=1)

    @property
    def lifetime_ps(self) -> np.ndarray:
        """Lifetime of each state, 1 / total outgoing rate [ps] (inf when nothing leaves)."""
        with np.errstate(divide="ignore"):
            return np.where(self.total_per_s > 0, 1e12 / self.total_per_s, np.inf)

    def index(self, label: str) -> int:
        """Row of a state label.

        Raises
        ------
        ParameterError
            For an unknown label; the message lists the labels.
        """
        key = str(label).strip().lower()
        for k, lab in enumerate(self.labels):
            if lab.lower() == key:
                return k
        raise ParameterError(f"no state {label!r} in the {self.band} band; available: "
                             + (", ".join(self.labels) or "none"))

    def time_ps(self, initial: str, final: str) -> float:
        """Scattering time initial -> final, 1 / W [ps] (inf when the rate is zero)."""
        w = float(self.rate_per_s[self.index(initial), self.index(final)])
        return 1e12 / w if w > 0 else math.inf


def _envelopes(states, step_nm):
    """Envelopes of all states on one grid: uniform of ``step_nm`` (linear interpolation, zero
    outside a state's own grid) when that is coarser than their grids, else their union grid;
    trimmed to where any envelope is non-negligible (|psi|^2 > 1e-14 of the largest)."""
    if step_nm is not None:
        h = float(step_nm)
        if not (math.isfinite(h) and h > 0):
            raise ParameterError(f"grid_step_nm must be positive, got {step_nm!r}")
    grids = [np.asarray(s.z_nm, dtype=float) for s in states]
    lo = min(float(g[0]) for g in grids)
    hi = max(float(g[-1]) for g in grids)
    finest = min(float(np.min(np.diff(g))) for g in grids)
    if step_nm is not None and h > finest:
        z = np.linspace(lo, hi, max(int(math.ceil((hi - lo) / h)) + 1, 2))
        psi = np.vstack([np.interp(z, g, np.asarray(s.psi, dtype=float), left=0.0, right=0.0)
                         for g, s in zip(grids, states)])
    else:
        z, psi = _common_grid(states)
    p2 = psi * psi
    keep = np.nonzero(np.max(p2, axis=0) > 1e-14 * float(np.max(p2)))[0]
    a, b = int(keep[0]), int(keep[-1]) + 1
    return z[a:b], psi[:, a:b]


def _in_plane_masses(states, z, psi, band, mass_m0) -> np.ndarray:
    n = len(states)
    if band is None:
        if mass_m0 is None:
            raise ParameterError("lo_phonon_rates needs the band (for the in-plane masses) "
                                 "or mass_m0")
        m = np.broadcast_to(np.asarray(mass_m0, dtype=float), (n,)).astype(float)
        if np.any(~(m > 0)):
            raise ParameterError(f"mass_m0 must be positive, got {mass_m0!r}")
        return m
    eps = np.array([float(s.carrier_energy_eV) for s in states])
    inv = 1.0 / np.asarray(band.mass(z[None, :], eps[:, None]), dtype=float)   # (n, N)
    w = _trapz_weights(z)
    return 1.0 / np.sum(w[None, :] * psi * psi * inv, axis=1)


def lo_phonon_rates(states, band=None, *, phonon: LOPhonon, temperature_K: float,
                    thermal: bool = False, mass_m0=None,
                    grid_step_nm: float | None = 0.05) -> RateTable:
    """LO-phonon scattering rates between all pairs of ``states`` (Froehlich, bulk phonons).

    Parameters
    ----------
    states : Levels or sequence of State
        States of one band with wavefunctions (``z_nm``, ``psi``).  Quasi-bound states may be
        included; their envelopes are normalised over the grid.
    band : Band, optional
        The band they came from: gives the in-plane mass ``1/<i|1/m(z, E_i)|i>``.
    phonon : LOPhonon
    temperature_K : float
        Lattice temperature [K] for the Bose occupation (and the thermal average), >= 0.
    thermal : bool
        Average over a Maxwell-Boltzmann distribution of the initial subband at
        ``temperature_K`` (Gauss-Laguerre in energy, Gauss-Legendre in angle, form factors
        interpolated from a table in q).  False: electron at the subband bottom (k = 0).
    mass_m0 : float or sequence, optional
        In-plane masses [m0] when no band is given.
    grid_step_nm : float or None
        The envelopes are resampled (linear interpolation) on a uniform grid of this step
        [nm] for the form factors when that is coarser than their own grid; the error is
        about (k h)^2 / 12 for the largest wavevector k of the product densities (< 1e-3 for
        k < 2 nm^-1 at the default 0.05 nm).  None keeps the envelopes' own grid.

    Returns
    -------
    RateTable

    Raises
    ------
    ParameterError
        Missing wavefunctions, fewer than two states, negative temperature.

    References
    ----------
    .. [1] R. Ferreira and G. Bastard, Phys. Rev. B 40, 1074 (1989).
    """
    states = list(getattr(states, "states", states))
    if len(states) < 2:
        raise ParameterError("scattering rates need at least two states")
    missing = [s.label for s in states if s.z_nm is None or s.psi is None]
    if missing:
        raise ParameterError("scattering rates need wavefunctions; missing for "
                             + ", ".join(missing))
    T = float(temperature_K)
    if not (math.isfinite(T) and T >= 0):
        raise ParameterError(f"temperature must be >= 0 K, got {temperature_K!r}")
    if thermal and T <= 0:
        thermal = False
    states.sort(key=lambda s: float(s.carrier_energy_eV))
    z, psi = _envelopes(states, grid_step_nm)
    n = len(states)
    eps = np.array([float(s.carrier_energy_eV) for s in states])
    mass = _in_plane_masses(states, z, psi, band, mass_m0)

    hw = float(phonon.energy_eV)
    occ = bose_occupation(hw, T)
    omega = hw / (HBAR_J_S / E_C)                                   # [1/s]
    # prefactor of W = pref * n_ph * m_f[m0] * F / k_f[1/nm]  (k = 0 form), in 1/s
    pref_k0 = (E_C ** 2 * omega * phonon.coupling * M0_KG / (4.0 * EPS0_F_PER_M * HBAR_J_S ** 2)
               ) * 1e-9                                              # 1/k_f: nm -> m
    iu, ju = np.triu_indices(n, 1)
    rho = psi[iu] * psi[ju]                                          # (P, N), symmetric pairs
    # processes per pair row: (i->f emission, i->f absorption, f->i emission, f->i absorption)
    src = np.stack([iu, iu, ju, ju], axis=1)
    dst = np.stack([ju, ju, iu, iu], axis=1)
    sign = np.array([-1.0, 1.0, -1.0, 1.0])                           # -hw emission, +hw abs.
    nph = np.array([occ + 1.0, occ, occ + 1.0, occ])
    delta = eps[src] - eps[dst] + sign[None, :] * hw                 # final kinetic energy, k=0
    mf = mass[dst]
    emission = np.zeros((n, n))
    absorption = np.zeros((n, n))
    if not thermal:
        ok = (delta > 0) & (nph[None, :] > 0)                       # allowed processes only
        W = np.zeros(delta.shape)
        rows, cols = np.nonzero(ok)
        if rows.size:
            kf = np.sqrt(delta[rows, cols] * mf[rows, cols] / HBAR2_2M0)   # [1/nm]
            F = form_factors(z, rho[rows], kf)
            W[rows, cols] = pref_k0 * nph[cols] * mf[rows, cols] * F / kf
    else:
        W = _thermal_rates(z, rho, eps, mass, src, dst, sign, nph, hw, T, pref_k0)
    for c in range(4):
        target = emission if c in (0, 2) else absorption
        target[src[:, c], dst[:, c]] = np.maximum(W[:, c], 0.0)
    return RateTable(labels=tuple(s.label for s in states), carrier_energy_eV=eps,
                     emission_per_s=emission, absorption_per_s=absorption,
                     in_plane_mass_m0=mass, temperature_K=T, phonon=phonon,
                     thermal=bool(thermal), band=str(states[0].band))


def _thermal_rates(z, rho, eps, mass, src, dst, sign, nph, hw, T, pref_k0):
    """Maxwell-Boltzmann average of W(k_i) for each pair row and process, shape (P, 4)."""
    kT = KB_EV_PER_K * T
    xe, we = np.polynomial.laguerre.laggauss(_THERMAL_ENERGIES)
    xa, wa = np.polynomial.legendre.leggauss(_THERMAL_ANGLES)
    theta = 0.5 * np.pi * (xa + 1.0)                                 # [0, pi]
    wth = 0.5 * np.pi * wa * 2.0                                     # x2: [pi, 2 pi] by symmetry
    delta0 = eps[src] - eps[dst] + sign[None, :] * hw                # (P, 4) at k_i = 0
    e0 = np.maximum(0.0, -delta0)                                    # threshold kinetic energy
    Ek = e0[:, :, None] + kT * xe[None, None, :]                     # (P, 4, E)
    mi = mass[src][:, :, None]
    mf = mass[dst][:, :, None]
    ki = np.sqrt(Ek * mi / HBAR2_2M0)
    kf = np.sqrt(np.maximum(Ek + delta0[:, :, None], 0.0) * mf / HBAR2_2M0)
    c = np.cos(theta)[None, None, None, :]
    q = np.sqrt(np.maximum(ki[..., None] ** 2 + kf[..., None] ** 2
                           - 2.0 * ki[..., None] * kf[..., None] * c, 0.0))   # (P, 4, E, A)
    # form factors on a q table per pair row, then interpolation (F is smooth in q)
    P = rho.shape[0]
    qmax = np.maximum(q.reshape(P, -1).max(axis=1), 1e-6)
    frac = np.linspace(0.0, 1.0, _Q_TABLE) ** 2
    qtab = np.maximum(qmax[:, None] * frac[None, :], 1e-9)
    Ftab = form_factors(z, rho, qtab)                                # (P, Q)
    Fq = np.empty_like(q)
    for p in range(P):
        Fq[p] = np.interp(q[p], qtab[p], Ftab[p])
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(q > 1e-9, Fq / q, 0.0)
    ang = ratio @ wth                                                 # (P, 4, E): int dtheta
    # W(k_i) = pref_k0 * n_ph * m_f * (1/2pi) int F/q dtheta; average with exp(-(E - e0)/kT)
    Wk = pref_k0 * nph[None, :, None] * mf * ang / (2.0 * np.pi)
    return np.exp(-e0 / kT) * np.tensordot(Wk, we, axes=([2], [0]))


# --------------------------------------------------------------------------- radiative
def spontaneous_emission_rate(energy_eV, oscillator_strength, mass_m0, refractive_index):
    """Spontaneous-emission rate of an intersubband line [1/s].

    ``A = n e^2 w^2 f / (6 pi eps0 m c^3)`` with ``f`` the (absorption) oscillator strength
    of the line normalised with the mass ``m`` of the lower state; identical to the Einstein
    coefficient ``A = n w^3 e^2 |z|^2 / (3 pi eps0 hbar c^3)`` of a dipole ``e z`` in a medium
    of index n, because ``f = 2 m w |z|^2 / hbar``.

    Parameters
    ----------
    energy_eV : float or array
        Photon energy hbar w [eV].
    oscillator_strength : float or array
        f of the line (dimensionless, > 0).
    mass_m0 : float or array
        Normalising mass of the lower state [m0].
    refractive_index : float
        n of the host (no local-field correction).

    References
    ----------
    .. [1] R. Loudon, *The Quantum Theory of Light*, 3rd ed., Oxford University Press (2000),
       ch. 2.
    """
    w = np.asarray(energy_eV, dtype=float) / (HBAR_J_S / E_C)
    f = np.asarray(oscillator_strength, dtype=float)
    m = np.asarray(mass_m0, dtype=float) * M0_KG
    return (float(refractive_index) * E_C ** 2 * w ** 2 * f
            / (6.0 * math.pi * EPS0_F_PER_M * m * C_M_S ** 3))


@dataclass(frozen=True)
class RadiativeLine:
    """Spontaneous emission of one intersubband line upper -> lower.

    Attributes
    ----------
    upper, lower : str
    energy_eV : float
        Photon energy [eV].
    wavelength_um : float
    oscillator_strength : float
        Absorption oscillator strength lower -> upper.
    rate_per_s : float
        Spontaneous-emission rate [1/s].
    lifetime_ns : float
        1 / rate [ns].
    phonon_time_ps : float
        LO-phonon scattering time upper -> lower [ps], for comparison (inf when zero).
    refractive_index : float
    """

    upper: str
    lower: str
    energy_eV: float
    wavelength_um: float
    oscillator_strength: float
    rate_per_s: float
    lifetime_ns: float
    phonon_time_ps: float
    refractive_index: float


def radiative_lines(transitions, table: RateTable, norm_mass_m0: Mapping,
                    refractive_index: float) -> tuple:
    """Spontaneous emission of every intersubband transition that has an oscillator strength.

    Parameters
    ----------
    transitions : iterable of qwell.optics.Transition
        Intersubband lines (others are skipped); ``initial`` is the lower state.
    table : RateTable
        For the LO-phonon time of the same pair.
    norm_mass_m0 : Mapping[str, float]
        Normalising mass of each state [m0].
    refractive_index : float
    """
    out = []
    for t in transitions:
        if t.kind != "intersubband" or t.oscillator_strength is None:
            continue
        if t.initial not in norm_mass_m0 or not t.oscillator_strength > 0:
            continue
        a = float(spontaneous_emission_rate(t.energy_eV, t.oscillator_strength,
                                            norm_mass_m0[t.initial], refractive_index))
        try:
            ph = table.time_ps(t.final, t.initial)
        except ParameterError:
            ph = math.inf
        out.append(RadiativeLine(upper=t.final, lower=t.initial, energy_eV=float(t.energy_eV),
                                 wavelength_um=float(t.wavelength_um),
                                 oscillator_strength=float(t.oscillator_strength),
                                 rate_per_s=a, lifetime_ns=1e9 / a if a > 0 else math.inf,
                                 phonon_time_ps=ph, refractive_index=float(refractive_index)))
    return tuple(out)


# --------------------------------------------------------------------------- figure of merit
@dataclass(frozen=True)
class EmitterFigure:
    """Figure of merit of an intersubband emitter line upper -> lower.

    Attributes
    ----------
    upper, lower : str
    energy_eV, wavelength_um : float
        Photon energy [eV] and vacuum wavelength [µm].
    dipole_nm : float
        |z_ul| [nm]; from :func:`solution_lifetimes` the velocity-form dipole (see there).
    tau_upper_ps, tau_lower_ps : float
        LO-phonon lifetimes of the upper and lower state (all outgoing rates) [ps].
    tau_upper_lower_ps : float
        LO-phonon scattering time upper -> lower [ps].
    inversion_factor_ps : float
        tau_u (1 - tau_l / tau_ul) [ps]; <= 0 means no inversion.
    figure_of_merit_nm2_ps : float
        z_ul^2 tau_u (1 - tau_l / tau_ul) [nm^2 ps].
    inversion_possible : bool
        tau_l < tau_ul.
    linewidth_meV : float
        Full width at half maximum 2 gamma of the line [meV] (an input).
    refractive_index : float
    period_nm : float
        Length of one stage L_p [nm] (an input).
    cross_section_cm2 : float
        Peak stimulated-emission cross-section of a Lorentzian line,
        ``4 pi e^2 z^2 / (eps0 n lambda 2 gamma)`` [cm^2].
    gain_per_current_cm_per_kA : float
        Peak gain per unit current density for unit injection efficiency,
        ``g/J = 4 pi e z^2 tau_u (1 - tau_l/tau_ul) / (eps0 n lambda 2 gamma L_p)`` [cm/kA]
        (Faist et al. 1994); negative without inversion.
    radiative_lifetime_ns : float
        Spontaneous-emission lifetime of the line [ns] (inf without an oscillator strength).
    notes : tuple of str
    """

    upper: str
    lower: str
    energy_eV: float
    wavelength_um: float
    dipole_nm: float
    tau_upper_ps: float
    tau_lower_ps: float
    tau_upper_lower_ps: float
    inversion_factor_ps: float
    figure_of_merit_nm2_ps: float
    inversion_possible: bool
    linewidth_meV: float
    refractive_index: float
    period_nm: float
    cross_section_cm2: float
    gain_per_current_cm_per_kA: float
    radiative_lifetime_ns: float
    notes: tuple = ()

    @property
    def line(self) -> str:
        """'e3->e2' style name (upper first)."""
        return f"{self.upper}->{self.lower}"


def emitter_figure(table: RateTable, upper: str, lower: str, *, dipole_nm: float,
                   linewidth_meV: float, period_nm: float, refractive_index: float,
                   oscillator_strength: float | None = None,
                   lower_mass_m0: float | None = None) -> EmitterFigure:
    """Figure of merit of the line ``upper -> lower`` from a :class:`RateTable`.

    Parameters
    ----------
    table : RateTable
    upper, lower : str
        State labels; ``upper`` must lie above ``lower``.
    dipole_nm : float
        |z_ul| [nm].
    linewidth_meV : float
        FWHM 2 gamma of the gain line [meV] (> 0).
    period_nm : float
        Stage length L_p [nm] (> 0).
    refractive_index : float
    oscillator_strength, lower_mass_m0 : float, optional
        For the radiative lifetime of the line.

    Raises
    ------
    ParameterError
        Unknown state (lists the labels), upper not above lower, bad linewidth or period.

    Notes
    -----
    Rate equations of a three-level emitter with unit injection into the upper state,
    ``n_u = J tau_u / e`` and ``n_l = n_u tau_l / tau_ul``, give the population difference
    ``(J/e) tau_u (1 - tau_l/tau_ul)`` per stage; with the peak cross-section of a
    Lorentzian line this is the gain coefficient of Faist et al. [1]_.

    References
    ----------
    .. [1] J. Faist et al., Science 264, 553 (1994) (from memory).
    """
    iu, il = table.index(upper), table.index(lower)
    if not table.carrier_energy_eV[iu] > table.carrier_energy_eV[il]:
        raise ParameterError(f"{upper} must lie above {lower} for an emitter line u->l; "
                             f"try {lower}->{upper}")
    for name, v in (("linewidth", linewidth_meV), ("period", period_nm),
                    ("refractive index", refractive_index)):
        if not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0):
            raise ParameterError(f"{name} must be a positive number, got {v!r}")
    tau_u = float(table.lifetime_ps[iu])
    tau_l = float(table.lifetime_ps[il])
    tau_ul = table.time_ps(upper, lower)
    ratio = tau_l / tau_ul if math.isfinite(tau_ul) else 0.0
    if not math.isfinite(tau_l):
        ratio = math.inf if math.isfinite(tau_ul) else 1.0
    inversion = tau_u * (1.0 - ratio) if math.isfinite(tau_u) else math.nan
    z2 = float(dipole_nm) ** 2
    energy = float(table.carrier_energy_eV[iu] - table.carrier_energy_eV[il])
    lam_m = HC_EV_UM / energy * 1e-6
    two_gamma_J = float(linewidth_meV) * 1e-3 * E_C
    sigma_m2 = 4.0 * math.pi * E_C ** 2 * z2 * 1e-18 / (EPS0_F_PER_M * refractive_index
                                                        * lam_m * two_gamma_J)
    gain_m_per_A = sigma_m2 * inversion * 1e-12 / (E_C * float(period_nm) * 1e-9)
    notes = []
    possible = bool(tau_l < tau_ul)
    if not possible:
        notes.append(f"no population inversion possible on {upper}->{lower}: tau_l "
                     f"{_ps(tau_l)} >= tau_ul {_ps(tau_ul)} (the lower state empties more "
                     "slowly than the upper state feeds it)")
    notes.append("lifetimes count LO-phonon scattering to the listed states only; extraction "
                 "of the lower state by tunnelling into the next stage is not included")
    rad = math.inf
    if oscillator_strength is not None and lower_mass_m0 is not None and oscillator_strength > 0:
        a = float(spontaneous_emission_rate(energy, oscillator_strength, lower_mass_m0,
                                            refractive_index))
        rad = 1e9 / a if a > 0 else math.inf
    return EmitterFigure(upper=table.labels[iu], lower=table.labels[il], energy_eV=energy,
                         wavelength_um=HC_EV_UM / energy, dipole_nm=float(dipole_nm),
                         tau_upper_ps=tau_u, tau_lower_ps=tau_l, tau_upper_lower_ps=tau_ul,
                         inversion_factor_ps=inversion, figure_of_merit_nm2_ps=z2 * inversion,
                         inversion_possible=possible, linewidth_meV=float(linewidth_meV),
                         refractive_index=float(refractive_index), period_nm=float(period_nm),
                         cross_section_cm2=sigma_m2 * 1e4,
                         gain_per_current_cm_per_kA=gain_m_per_A * 1e5,
                         radiative_lifetime_ns=rad, notes=tuple(notes))


def _ps(t: float) -> str:
    return "inf" if not math.isfinite(t) else f"{t:.3g} ps"


# --------------------------------------------------------------------------- stack level
@dataclass(frozen=True)
class Lifetimes:
    """Lifetimes of the conduction subbands of one solved stack.

    Attributes
    ----------
    rates : RateTable
    radiative : tuple of RadiativeLine
        Every intersubband line with an oscillator strength, strongest first.
    figure : EmitterFigure or None
        The emitter line's figure of merit: the line asked for, else the line with the
        largest figure of merit among those that can invert (None if no line can).
    figures : tuple of EmitterFigure
        Every intersubband line between the included states, largest figure of merit first.
    notes : tuple of str
    """

    rates: RateTable
    radiative: tuple = ()
    figure: EmitterFigure | None = None
    figures: tuple = ()
    notes: tuple = ()


def parse_line(line: str) -> tuple[str, str]:
    """'e3-e2', 'e3->e2' or 'e2-e3' -> the two labels as written (order sorted out later)."""
    text = str(line).strip().replace(" ", "").replace("->", "-")
    parts = [p for p in text.split("-") if p]
    if len(parts) != 2:
        raise ParameterError(f"line {line!r}: expected two state labels such as e2-e3")
    return parts[0], parts[1]


def solution_lifetimes(solution, line: str | None = None, *, thermal: bool = False,
                       linewidth_meV: float = 10.0, period_nm: float | None = None,
                       refractive_index: float | None = None,
                       phonon: LOPhonon | None = None, band: str = "conduction",
                       quasi_bound: bool = False) -> Lifetimes:
    """Rates, radiative lines and (optionally) the emitter figure of a solved stack.

    Parameters
    ----------
    solution : qwell.levels.Solution
        Solved with wavefunctions (the exact method).
    line : str, optional
        Emitter line, 'e2-e3' (either order; the upper state is the higher one).  Default:
        the line with the largest figure of merit among those that can invert.
    thermal : bool
        Thermally averaged rates (see :func:`lo_phonon_rates`).
    linewidth_meV : float
        FWHM of the gain line [meV].
    period_nm : float, optional
        Stage length [nm]; default the total stack thickness.
    refractive_index : float, optional
        Default sqrt(eps_inf) of the phonon host.
    phonon : LOPhonon, optional
        Default :func:`host_phonon` of the stack.
    band : str
        Only 'conduction' is supported.
    quasi_bound : bool
        Also include quasi-bound resonances (their envelopes are normalised over the finite
        grid, so their rates depend on its extent); default bound states only.

    Notes
    -----
    The dipole of each line's figure of merit is the velocity form
    ``z_v = sqrt(f hbar^2 / (2 m_l dE))`` from its oscillator strength: the envelopes of a
    nonparabolic band are not orthogonal (a few per cent overlap), so ``<l|z|u>`` would move
    with the origin of z (e.g. when a cladding layer is resized); ``z_v`` does not, and equals
    ``<l|z|u>`` for a parabolic band (Sirtori et al., Phys. Rev. B 50, 8663 (1994)).

    Raises
    ------
    ParameterError
        Valence band asked for, a band without two states, an unknown line (lists the states
        and lines that exist).
    MaterialError
        The host material lacks LO-phonon data (names the missing keys).
    """
    if band != "conduction":
        raise ParameterError(f"lifetimes are computed for the conduction band only, not "
                             f"{band!r}; conduction states: "
                             + _labels(solution.levels.get("conduction")))
    lev = solution.levels.get("conduction")
    if lev is None or len(lev) < 2:
        raise ParameterError("lifetimes need at least two conduction states; found "
                             + _labels(lev))
    states = [s for s in lev.states if quasi_bound or s.bound]
    if len(states) < 2:
        raise ParameterError("lifetimes need at least two bound conduction states; found "
                             + (", ".join(s.label for s in states) or "none")
                             + " (quasi-bound: " + (", ".join(s.label for s in lev.states
                                                             if not s.bound) or "none") + ")")
    if any(s.psi is None for s in states):
        raise ParameterError("lifetimes need wavefunctions (the exact method)")
    stack = solution.stack
    ph = phonon if phonon is not None else host_phonon(stack, states)
    cband = solution.profile.bands["conduction"]
    table = lo_phonon_rates(states, cband, phonon=ph, temperature_K=stack.temperature_K,
                            thermal=thermal)
    n_index = float(refractive_index) if refractive_index is not None else ph.refractive_index
    mass = dict(zip(table.labels, table.in_plane_mass_m0))
    inter = [t for t in solution.transitions if t.kind == "intersubband"
             and t.initial in mass and t.final in mass]
    rad = radiative_lines(inter, table, mass, n_index)
    rad = tuple(sorted(rad, key=lambda r: -r.rate_per_s))
    notes = [f"LO phonons of {ph.material} (layer {ph.layer}): {1e3 * ph.energy_eV:.1f} meV, "
             f"eps_inf {ph.eps_infinity:g}, eps_s {ph.eps_static:g}; bulk dispersionless "
             "phonons, no screening"]
    if ph.note:
        notes.append(ph.note)
    if refractive_index is None:
        notes.append(f"refractive index sqrt(eps_inf) = {n_index:.3f} of the host")
    period = float(period_nm) if period_nm is not None else float(stack.total_thickness_nm)
    figures = []
    for t in inter:
        if t.dipole_nm is None or not t.energy_eV > 0:
            continue
        figures.append(emitter_figure(table, t.final, t.initial, dipole_nm=_line_dipole(t, mass),
                                      linewidth_meV=float(linewidth_meV), period_nm=period,
                                      refractive_index=n_index,
                                      oscillator_strength=t.oscillator_strength,
                                      lower_mass_m0=mass[t.initial]))
    figures.sort(key=lambda f: -f.figure_of_merit_nm2_ps if math.isfinite(
        f.figure_of_merit_nm2_ps) else math.inf)
    names = ", ".join(t.name for t in inter) or "none"
    fig = None
    if line is not None:
        a, b = parse_line(line)
        valence = [lab for lab in (a, b) if lab.lower().startswith(("hh", "lh"))]
        if valence:
            raise ParameterError(f"line {line!r}: lifetimes are computed for conduction-band "
                                 f"lines only ({valence[0]} is a valence state); conduction "
                                 f"states: {', '.join(table.labels)}; lines: {names}")
        for lab in (a, b):
            if lab.lower() not in (x.lower() for x in table.labels):
                raise ParameterError(f"no state {lab!r} for the line {line!r}; conduction "
                                     f"states: {', '.join(table.labels)}; lines: {names}")
        pair = {table.labels[table.index(a)], table.labels[table.index(b)]}
        fig = next((f for f in figures if {f.upper, f.lower} == pair), None)
        if fig is None:
            raise ParameterError(f"no intersubband line {line!r} with a dipole; lines: {names}")
    else:
        fig = next((f for f in figures if f.inversion_possible), None)
        if figures and fig is None:
            notes.append("no intersubband line of this stack can invert (tau_l >= tau_ul on "
                         "every line)")
        elif fig is not None:
            notes.append(f"emitter line {fig.line}: the largest figure of merit of the lines "
                         "that can invert (choose another with a line name)")
    return Lifetimes(rates=table, radiative=rad, figure=fig, figures=tuple(figures),
                     notes=tuple(notes))


def _line_dipole(t, mass) -> float:
    """|z_ul| of a line for the figure of merit [nm]: the velocity-form dipole
    ``sqrt(f hbar^2 / (2 m_l dE))`` from the oscillator strength (m_l the lower state's
    normalising mass), else the plain ``|<l|z|u>|``.

    The states of a nonparabolic band are not orthogonal, so the plain dipole depends on the
    origin of z; the velocity form does not and equals ``<l|z|u>`` for a parabolic band
    (Sirtori, Capasso, Faist, Scandolo, Phys. Rev. B 50, 8663 (1994)).
    """
    f = t.oscillator_strength
    if f is not None and f > 0 and t.energy_eV > 0:
        return math.sqrt(f * HBAR2_2M0 / (float(mass[t.initial]) * float(t.energy_eV)))
    return abs(float(t.dipole_nm))


def _labels(lev) -> str:
    if lev is None or not len(lev):
        return "none"
    return ", ".join(s.label for s in lev.states)

