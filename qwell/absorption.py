"""Absolute intersubband absorption: alpha(hbar omega) in cm^-1, per-pass absorption.

Light polarised along the growth axis z is absorbed by carriers in a
subband ``i`` making transitions to the states ``j`` above; only populated
states absorb.  For each line

``integral alpha d(hbar omega) = pi hbar e^2 (n_i - n_j) f_ij / (2 eps0 n_r c m_i L)``

with the oscillator strength ``f_ij`` and normalising mass ``m_i`` of
:func:`qwell.optics.intersubband_matrices` (``f_ij / m_i = 2 dE z_ij^2 / hbar^2``
for a parabolic band, independent of the mass), the sheet densities
``n_i`` [cm^-2], the refractive index ``n_r`` and the active length ``L``
(:func:`qwell.carriers.active_region`; stated in every result).  Each line is
a Lorentzian of its own full width at half maximum, centred at the bare
energy plus the depolarisation shift (Ando, Fowler and Stern) when the line
carries charge.  The total over all lines from a subband is bounded by the
Thomas–Reiche–Kuhn sum ``sum_j f_ij = 1``; :attr:`IntersubbandAbsorption.
sum_rule_eV_per_cm` is that bound and ``sum_rule_fraction`` how much of it the
listed (bound and quasi-bound) final states take.

Populations come either from the self-consistent Schrödinger–Poisson
solution of a doped stack (its Fermi level) or from a sheet density the user
gives, which fills the subbands by Fermi–Dirac statistics at the stack
temperature (:mod:`qwell.carriers`).

Geometry: the fraction absorbed in one pass through the active region by
p-polarised (TM) light crossing it at an internal angle theta to the growth
axis is ``1 - exp(-alpha L sin^2(theta) / cos(theta))`` (only the field
component along z couples; the path is ``L / cos(theta)``).  The 45 degree
polished facet gives theta = 45 degrees; Brewster-angle incidence from air
gives ``sin(theta) = sin(theta_B) / n_r`` with ``tan(theta_B) = n_r`` and no
reflection loss.  Unpolarised light: half of the p-polarised figure.

Defaults
--------
* Linewidth (FWHM) of every line: :data:`DEFAULT_LINEWIDTH_MEV` = 10 meV, the
  usual order of measured bound-to-bound GaAs/AlGaAs intersubband lines
  (common practice, no source); override for all lines or per line.
* Refractive index :data:`DEFAULT_REFRACTIVE_INDEX` = 3.3 (GaAs near 10 um;
  from memory); override it for other materials and wavelengths.

Not included: the change of the line strength by the depolarisation
(only its shift), exchange–correlation corrections, non-parabolic in-plane
dispersion (which broadens lines), free-carrier absorption.

References
----------
.. [1] M. Helm, "The basic physics of intersubband transitions", in
   Semiconductors and Semimetals 62, Academic Press (2000), ch. 1.
.. [2] T. Ando, A. B. Fowler and F. Stern, Rev. Mod. Phys. 54, 437 (1982).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .carriers import active_region, check_density, fermi_level, fill, subbands_of
from .constants import C_M_S, E_C, EPS0_F_PER_M, HBAR_J_S, HC_EV_UM, M0_KG
from .errors import ParameterError
from .levels import solve_stack
from .optics import depolarisation_shift, intersubband_matrices

__all__ = ["IntersubbandLine", "IntersubbandAbsorption", "PassAbsorption",
           "intersubband_absorption", "stack_absorption", "pass_absorption",
           "line_area_eV_per_cm", "GEOMETRIES", "DEFAULT_LINEWIDTH_MEV",
           "DEFAULT_REFRACTIVE_INDEX", "POPULATIONS"]

DEFAULT_LINEWIDTH_MEV = 10.0
DEFAULT_REFRACTIVE_INDEX = 3.3
GEOMETRIES = ("facet45", "brewster")
POPULATIONS = ("auto", "self-consistent", "density")
_MIN_DE_EV = 1e-6
#: pi hbar e^2 / (2 eps0 c m0) [J m^2] ... times n/(n_r m L) gives J/m.
_AREA_SI = math.pi * HBAR_J_S * E_C ** 2 / (2.0 * EPS0_F_PER_M * C_M_S * M0_KG)


def line_area_eV_per_cm(delta_n_cm2, f_over_m, refractive_index, length_nm):
    """``integral alpha d(hbar omega)`` [eV cm^-1] of lines (module docstring).

    Parameters
    ----------
    delta_n_cm2 : array_like
        Population differences n_i - n_j [cm^-2].
    f_over_m : array_like
        Oscillator strength over normalising mass, f_ij / m_i [1/m0].
    refractive_index : float
    length_nm : float
        Active length [nm].
    """
    dn_m2 = np.asarray(delta_n_cm2, dtype=float) * 1e4
    j_per_m = _AREA_SI * dn_m2 * np.asarray(f_over_m, dtype=float) \
        / (float(refractive_index) * float(length_nm) * 1e-9)
    return j_per_m / E_C / 100.0


@dataclass(frozen=True)
class IntersubbandLine:
    """One intersubband absorption line with its absolute strength.

    Attributes
    ----------
    initial, final : str
    energy_eV : float
        Bare subband separation [eV].
    depolarisation_shift_eV : float
        Shift of the absorption peak by the carriers [eV] (0 without charge).
    peak_energy_eV : float
        ``energy_eV + depolarisation_shift_eV`` [eV].
    peak_wavelength_um : float
        hc / peak_energy [um].
    oscillator_strength : float
        f_ij (dimensionless).
    dipole_nm : float
        |<i|z|j>| [nm].
    population_difference_cm2 : float
        n_i - n_j [cm^-2] (negative: net emission).
    linewidth_meV : float
        FWHM [meV].
    integrated_eV_per_cm : float
        integral alpha d(hbar omega) [eV cm^-1].
    peak_absorption_cm1 : float
        Lorentzian peak value 2 A / (pi FWHM) [cm^-1].
    """

    initial: str
    final: str
    energy_eV: float
    depolarisation_shift_eV: float
    peak_energy_eV: float
    peak_wavelength_um: float
    oscillator_strength: float
    dipole_nm: float
    population_difference_cm2: float
    linewidth_meV: float
    integrated_eV_per_cm: float
    peak_absorption_cm1: float

    @property
    def name(self) -> str:
        return f"{self.initial}-{self.final}"


@dataclass(frozen=True)
class IntersubbandAbsorption:
    """Absolute intersubband absorption spectrum of one band, z-polarised light.

    Attributes
    ----------
    energy_eV, wavelength_um : numpy.ndarray
        Photon energy [eV] (increasing) and hc/E [um].
    absorption_cm1 : numpy.ndarray
        alpha [cm^-1] for light polarised along z, averaged over the active length.
    lines : tuple of IntersubbandLine
        Lines with a non-zero population difference, strongest first.
    sheet_densities_cm2 : dict
        Subband label -> sheet density [cm^-2].
    total_density_cm2 : float
    fermi_level_eV : float
        Fermi level on the band-diagram scale [eV] (NaN when not defined).
    populations : str
        'self-consistent' or 'density'.
    active_length_nm : float
        Length turning sheet densities into alpha [nm].
    active_length_rule : str
    refractive_index : float
    temperature_K : float
    integrated_eV_per_cm : float
        Sum of the line areas, integral alpha d(hbar omega) over all energies [eV cm^-1].
    sum_rule_eV_per_cm : float
        Thomas–Reiche–Kuhn bound ``pi hbar e^2 sum_i n_i / m_i / (2 eps0 n_r c L)`` [eV cm^-1].
    peak_absorption_cm1, peak_energy_eV, peak_wavelength_um : float
        Maximum of the spectrum on the grid and where it is.
    notes : tuple of str
    """

    energy_eV: np.ndarray = field(repr=False)
    wavelength_um: np.ndarray = field(repr=False)
    absorption_cm1: np.ndarray = field(repr=False)
    lines: tuple
    sheet_densities_cm2: dict
    total_density_cm2: float
    fermi_level_eV: float
    populations: str
    active_length_nm: float
    active_length_rule: str
    refractive_index: float
    temperature_K: float
    integrated_eV_per_cm: float
    sum_rule_eV_per_cm: float
    peak_absorption_cm1: float
    peak_energy_eV: float
    peak_wavelength_um: float
    notes: tuple = ()

    @property
    def sum_rule_fraction(self) -> float:
        """integrated / sum-rule bound (NaN without carriers)."""
        if not self.sum_rule_eV_per_cm > 0:
            return math.nan
        return self.integrated_eV_per_cm / self.sum_rule_eV_per_cm


@dataclass(frozen=True)
class PassAbsorption:
    """Fraction of p-polarised light absorbed per pass in a test geometry.

    Attributes
    ----------
    geometry : {'facet45', 'brewster'}
    internal_angle_deg : float
        Angle between the propagation direction and the growth axis inside [deg].
    passes : int
        Number of passes through the active region.
    path_factor : float
        ``sin^2(theta) / cos(theta)``: alpha_z L times this is the absorbance of one pass.
    thickness_nm : float
        Active thickness crossed per pass [nm].
    energy_eV : numpy.ndarray
    per_pass : numpy.ndarray
        Absorbed fraction of one pass (0..1).
    total : numpy.ndarray
        Absorbed fraction after ``passes`` passes (no reflection losses).
    peak_per_pass, peak_total : float
        At the spectrum's peak.
    """

    geometry: str
    internal_angle_deg: float
    passes: int
    path_factor: float
    thickness_nm: float
    energy_eV: np.ndarray = field(repr=False)
    per_pass: np.ndarray = field(repr=False)
    total: np.ndarray = field(repr=False)
    peak_per_pass: float = 0.0
    peak_total: float = 0.0


def _linewidths(names, linewidth_meV):
    if isinstance(linewidth_meV, dict):
        table = {str(k).lower(): v for k, v in linewidth_meV.items()}
        default = table.pop("default", DEFAULT_LINEWIDTH_MEV)
        unknown = set(table) - {n.lower() for n in names}
        if unknown:
            raise ParameterError(f"linewidth: no line {', '.join(sorted(unknown))}; lines: "
                                 + (", ".join(names) or "none"))
        vals = [table.get(n.lower(), default) for n in names]
    else:
        vals = [linewidth_meV] * len(names)
    out = np.array([float(v) for v in vals], dtype=float)
    if np.any(~np.isfinite(out)) or np.any(out <= 0):
        raise ParameterError(f"linewidth: {linewidth_meV!r} meV; expected a FWHM > 0 meV")
    return out


def intersubband_absorption(levels, band, sheet_densities_cm2: dict, *, length_nm: float,
                            refractive_index: float = DEFAULT_REFRACTIVE_INDEX,
                            linewidth_meV=DEFAULT_LINEWIDTH_MEV, energies_eV=None,
                            points: int = 2000, dielectric_constant: float | None = None,
                            temperature_K: float = math.nan, fermi_level_eV: float = math.nan,
                            populations: str = "density", length_rule: str = "",
                            notes=()) -> IntersubbandAbsorption:
    """alpha(hbar omega) [cm^-1] of one band from given subband populations.

    Parameters
    ----------
    levels : Levels or sequence of State
        States of one band with wavefunctions.
    band : Band
        Their band (masses for the oscillator strengths).
    sheet_densities_cm2 : dict
        Label -> sheet density [cm^-2]; missing labels are empty.
    length_nm : float
        Active length [nm] (alpha = sheet absorbance / length).
    refractive_index : float
    linewidth_meV : float or dict
        FWHM [meV] of every line, or a dict ``{'e1-e2': 6, 'default': 10}``.
    energies_eV : array_like, optional
        Photon energies [eV]; default ``points`` around the populated lines.
    dielectric_constant : float, optional
        Static relative permittivity for the depolarisation shift; None: no shift.
    temperature_K, fermi_level_eV, populations, length_rule, notes
        Carried into the result.

    Returns
    -------
    IntersubbandAbsorption
    """
    states = sorted(getattr(levels, "states", levels), key=lambda s: float(s.carrier_energy_eV))
    if not (refractive_index > 0 and math.isfinite(refractive_index)):
        raise ParameterError(f"refractive index must be positive, got {refractive_index!r}")
    if not (length_nm > 0):
        raise ParameterError(f"active length must be positive, got {length_nm!r} nm")
    pops = {s.label: float(sheet_densities_cm2.get(s.label, 0.0)) for s in states}
    lines_raw = []
    if len(states) >= 2:
        mats = intersubband_matrices(states, band)
        eps = mats.carrier_energy_eV
        n = np.array([pops[s.label] for s in states])
        for i in range(len(states)):
            for j in range(i + 1, len(states)):
                de = eps[j] - eps[i]
                dn = n[i] - n[j]
                if de > _MIN_DE_EV and dn != 0.0:
                    lines_raw.append((i, j, de, dn, float(mats.oscillator_strength[i, j]),
                                      float(mats.oscillator_strength[i, j] / mats.norm_mass_m0[i]),
                                      abs(float(mats.dipole_nm[i, j]))))
    names = [f"{states[i].label}-{states[j].label}" for i, j, *_ in lines_raw]
    widths = _linewidths(names, linewidth_meV)
    areas = line_area_eV_per_cm([r[3] for r in lines_raw], [r[5] for r in lines_raw],
                                refractive_index, length_nm) if lines_raw else np.zeros(0)
    lines = []
    for k, (i, j, de, dn, f, _fm, dip) in enumerate(lines_raw):
        shift = 0.0
        if dielectric_constant and dn > 0:
            shift = depolarisation_shift(states, band.name, (states[i].label, states[j].label),
                                         dn, dielectric_constant)
        e_pk = de + shift
        w = float(widths[k])
        lines.append(IntersubbandLine(
            initial=states[i].label, final=states[j].label, energy_eV=float(de),
            depolarisation_shift_eV=float(shift), peak_energy_eV=float(e_pk),
            peak_wavelength_um=HC_EV_UM / e_pk, oscillator_strength=f, dipole_nm=dip,
            population_difference_cm2=float(dn), linewidth_meV=w,
            integrated_eV_per_cm=float(areas[k]),
            peak_absorption_cm1=float(2.0 * areas[k] / (math.pi * w * 1e-3))))
    lines.sort(key=lambda ln: -abs(ln.integrated_eV_per_cm))
    if energies_eV is None:
        ref = lines or []
        if ref:
            e0 = np.array([ln.peak_energy_eV for ln in ref])
            wmax = max(ln.linewidth_meV for ln in ref) * 1e-3
            lo = max(float(e0.min()) - 8 * wmax, 0.5 * float(e0.min()))
            hi = float(e0.max()) + 8 * wmax
        else:
            eps_all = [float(s.carrier_energy_eV) for s in states]
            span = (max(eps_all) - min(eps_all)) if len(eps_all) > 1 else 0.1
            lo, hi = 0.25 * span, 1.5 * span + 0.01
        energy = np.linspace(lo, hi, int(points))
    else:
        energy = np.sort(np.asarray(energies_eV, dtype=float))
        if energy.ndim != 1 or energy.size < 2 or np.any(energy <= 0):
            raise ParameterError("energies_eV must be a 1-D array of positive energies")
    if lines:
        e0 = np.array([ln.peak_energy_eV for ln in lines])
        g = 0.5e-3 * np.array([ln.linewidth_meV for ln in lines])
        a = np.array([ln.integrated_eV_per_cm for ln in lines])
        x = energy[:, None] - e0[None, :]
        alpha = ((g / math.pi) / (x * x + g * g)) @ a
    else:
        alpha = np.zeros_like(energy)
    k = int(np.argmax(alpha))
    masses = mats.norm_mass_m0 if len(states) >= 2 else np.ones(len(states))
    n_over_m = sum(pops[s.label] / float(m) for s, m in zip(states, masses))
    bound = float(line_area_eV_per_cm(n_over_m, 1.0, refractive_index, length_nm))
    return IntersubbandAbsorption(
        energy_eV=energy, wavelength_um=HC_EV_UM / energy, absorption_cm1=alpha,
        lines=tuple(lines), sheet_densities_cm2=pops, total_density_cm2=float(sum(pops.values())),
        fermi_level_eV=float(fermi_level_eV), populations=populations,
        active_length_nm=float(length_nm), active_length_rule=length_rule,
        refractive_index=float(refractive_index), temperature_K=float(temperature_K),
        integrated_eV_per_cm=float(sum(ln.integrated_eV_per_cm for ln in lines)),
        sum_rule_eV_per_cm=bound, peak_absorption_cm1=float(alpha[k]),
        peak_energy_eV=float(energy[k]), peak_wavelength_um=float(HC_EV_UM / energy[k]),
        notes=tuple(notes))


def _is_doped(stack) -> bool:
    for lay in stack.layers:
        d = lay.doping
        if d is not None and (d.donors_cm3 > 0 or d.acceptors_cm3 > 0 or d.sheet_cm2 > 0
                              or d.sheet_acceptors_cm2 > 0):
            return True
    return False


def _dielectric_of(stack, state):
    probs = state.layer_probability
    if not probs:
        return None
    where = int(max(range(len(probs)), key=lambda k: probs[k]))
    layer = stack.layers[where]
    if layer.grade is not None:
        return None
    return stack.material_of(layer).dielectric_constant


def stack_absorption(stack, *, density_cm2: float | None = None, populations: str = "auto",
                     linewidth_meV=DEFAULT_LINEWIDTH_MEV,
                     refractive_index: float = DEFAULT_REFRACTIVE_INDEX,
                     length_nm: float | None = None, depolarisation: bool = True,
                     energies_eV=None, points: int = 2000, solution=None
                     ) -> IntersubbandAbsorption:
    """Conduction-band intersubband absorption of a stack [cm^-1].

    Parameters
    ----------
    stack : qwell.stack.Stack
    density_cm2 : float, optional
        Electron sheet density [cm^-2] put into the subbands (0 .. 1e14).
    populations : {'auto', 'self-consistent', 'density'}
        'self-consistent': the Schrödinger–Poisson occupation of a doped stack
        (refused for an undoped stack or together with ``density_cm2``);
        'density': fill with ``density_cm2`` (required); 'auto': the density
        when given, else self-consistent for a doped stack (an undoped stack
        without a density is refused: nothing would absorb).
    linewidth_meV : float or dict
        FWHM [meV] (> 0), for all lines or per line.
    refractive_index : float
    length_nm : float, optional
        Active length [nm]; default by :func:`qwell.carriers.active_region`.
    depolarisation : bool
        Shift charged lines by the depolarisation (plasma) shift.
    energies_eV, points
        Energy grid (see :func:`intersubband_absorption`).
    solution : qwell.levels.Solution, optional
        A solution already computed for this stack and these populations
        (self-consistent for 'self-consistent'), to skip the solve.

    Raises
    ------
    ParameterError
        For the combinations above, densities outside 0..1e14 cm^-2 or a
        linewidth <= 0; each message names the option and the accepted range.
    """
    if populations not in POPULATIONS:
        raise ParameterError(f"populations: {populations!r}; expected one of "
                             + ", ".join(POPULATIONS))
    doped = _is_doped(stack)
    if density_cm2 is not None:
        check_density(density_cm2, "density")
    if populations == "auto":
        populations = "density" if density_cm2 is not None else "self-consistent"
        if populations == "self-consistent" and not doped:
            raise ParameterError("density: the stack is undoped, so no subband holds carriers "
                                 "and nothing absorbs; give an electron sheet density "
                                 "(0 < density <= 1e14 cm^-2)")
    if populations == "self-consistent":
        if density_cm2 is not None:
            raise ParameterError("density: not accepted with self-consistent populations (they "
                                 "come from the doping); drop the density or ask for "
                                 "populations from the density")
        if not doped:
            raise ParameterError("populations: self-consistent populations need a doped stack "
                                 "(this one has no doping); give a density instead "
                                 "(0 < density <= 1e14 cm^-2)")
    if populations == "density" and density_cm2 is None:
        raise ParameterError("density: populations from a density need one "
                             "(0 <= density <= 1e14 cm^-2)")
    sc_wanted = populations == "self-consistent"
    if solution is None:
        solution = solve_stack(stack, self_consistent=sc_wanted or None, bands="conduction")
    lev = solution.levels.get("conduction")
    if lev is None or len(lev) == 0:
        raise ParameterError("the stack has no conduction subband: no intersubband absorption")
    prof = solution.profile
    band = prof.bands["conduction"]
    T = float(stack.temperature_K)
    notes = []
    if sc_wanted:
        sc = solution.self_consistent
        if sc is None:
            raise ParameterError("populations: the solution given has no self-consistent result")
        pops = {k: v for k, v in sc.sheet_densities_cm2.items() if k.startswith("e")}
        ef = float(sc.fermi_level_eV)
    else:
        sub = subbands_of([lev], prof)
        f_c = float(fermi_level(sub, float(density_cm2), T, kind="electrons")[0])
        vals = fill(sub, f_c, T) if density_cm2 > 0 else np.zeros(sub.size)
        pops = {lab: float(v) for lab, v in zip(sub.labels, np.ravel(vals))}
        ef = float(band.profile_energy(f_c)) if math.isfinite(f_c) else math.nan
        if doped:
            notes.append("populations from the given density; the doping's own electrons are "
                         "replaced by it")
    ground = lev.states[0]
    act = active_region(prof, ground, length_nm=length_nm)
    eps_r = _dielectric_of(stack, ground) if depolarisation else None
    if depolarisation and not eps_r:
        notes.append("no dielectric constant for the ground state's layer: no depolarisation shift")
    notes.append("z-polarised light; exchange-correlation and the depolarisation change of the "
                 "line strength are not included")
    return intersubband_absorption(
        lev, band, pops, length_nm=act.length_nm, refractive_index=refractive_index,
        linewidth_meV=linewidth_meV, energies_eV=energies_eV, points=points,
        dielectric_constant=eps_r, temperature_K=T, fermi_level_eV=ef, populations=populations,
        length_rule=act.rule, notes=notes)


def pass_absorption(result: IntersubbandAbsorption, geometry: str = "facet45", *,
                    passes: int = 1, thickness_nm: float | None = None) -> PassAbsorption:
    """Absorbed fraction of p-polarised light per pass (module docstring).

    Parameters
    ----------
    result : IntersubbandAbsorption
    geometry : {'facet45', 'brewster'}
    passes : int
        Passes through the active region (>= 1), e.g. the bounces of a
        45 degree multipass waveguide.
    thickness_nm : float, optional
        Active thickness crossed [nm]; default the result's active length.
    """
    if geometry not in GEOMETRIES:
        raise ParameterError(f"geometry: {geometry!r}; expected one of " + ", ".join(GEOMETRIES))
    if isinstance(passes, bool) or int(passes) != passes or not (1 <= int(passes) <= 10000):
        raise ParameterError(f"passes: {passes!r}; expected a whole number 1 .. 10000")
    passes = int(passes)
    if geometry == "facet45":
        theta = math.pi / 4.0
    else:
        theta_b = math.atan(result.refractive_index)
        theta = math.asin(math.sin(theta_b) / result.refractive_index)
    factor = math.sin(theta) ** 2 / math.cos(theta)
    L = result.active_length_nm if thickness_nm is None else float(thickness_nm)
    absorbance = result.absorption_cm1 * (L * 1e-7) * factor
    per = -np.expm1(-absorbance)
    tot = -np.expm1(-passes * absorbance)
    k = int(np.argmax(result.absorption_cm1))
    return PassAbsorption(geometry=geometry, internal_angle_deg=math.degrees(theta),
                          passes=passes, path_factor=factor, thickness_nm=L,
                          energy_eV=result.energy_eV, per_pass=per, total=tot,
                          peak_per_pass=float(per[k]), peak_total=float(tot[k]))
