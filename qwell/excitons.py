"""Exciton binding energies of quantum-well interband lines (variational).

The standard one-parameter variational method of Bastard, Mendez, Chang and
Esaki [1]_: the trial function

``Psi = chi_e(z_e) chi_h(z_h) exp(-sqrt(rho^2 + (z_e - z_h)^2) / lambda)``

with the subband envelopes ``chi`` of the electron and hole, the in-plane
relative coordinate ``rho`` and the variational radius ``lambda``.  The
expectation value of ``H - E_e - E_h`` is exact in the envelopes: with
``H_e = -hbar^2/2 d/dz (1/m_e) d/dz + V_e`` and ``H_e chi_e = E_e chi_e``,
``<H_e> = E_e <Psi|Psi> + int hbar^2/(2 m_e(z_e)) chi_e^2 chi_h^2 (d phi / dz)^2``
(integration by parts), so only the relative motion remains:

``E(lambda) = [sum_z K(z) T_z + (hbar^2/2 mu) P T_rho - (e^2 / 4 pi eps0 eps) P V] / sum_z P N``

where ``P(z) = int chi_e^2(z') chi_h^2(z' - z) dz'`` is the distribution of
``z = z_e - z_h``, ``K(z)`` the same with the growth-axis kinetic factors
``hbar^2 / 2 m(z)`` of each carrier, ``mu`` the in-plane reduced mass of the
two subbands, and the in-plane integrals over ``rho`` are closed forms
(exponential integral ``E1``).  The binding energy is ``-min E(lambda)``.

Limits (checked in the tests): a strictly 2-D pair gives exactly ``4 Ry*``
(``lambda = a*/2``), a very wide well tends to the bulk ``Ry*`` when the
masses are isotropic.  With the heavy-hole in-plane mass of
:mod:`qwell.carriers` (valence-band mixing not included) and one
parameter, the result is a lower bound of the model's binding energy; the
dielectric mismatch of well and barriers (image charges) is neglected and
the static dielectric constant is averaged with the electron's probability.

The correction is separate: the absorption edge and the photoluminescence
peak of a weakly excited well lie ``binding`` below the free-carrier pair
energy.  The gain spectrum is not shifted by default: at laser densities
(10^12 cm^-2 and more) the electron–hole plasma screens the excitons and
the free-carrier model applies.

References
----------
.. [1] G. Bastard, E. E. Mendez, L. L. Chang and L. Esaki, "Exciton binding
   energy in quantum wells", Phys. Rev. B 26, 1974 (1982).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .carriers import fft_convolve, inplane_mass_m0
from .constants import E_C, EPS0_F_PER_M, HBAR2_2M0_EV_NM2, HC_EV_UM
from .errors import ParameterError

__all__ = ["ExcitonBinding", "exciton_binding", "stack_excitons", "COULOMB_EV_NM"]

#: e^2 / (4 pi eps0) [eV nm] (1.439964 eV nm).
COULOMB_EV_NM = E_C / (4.0 * math.pi * EPS0_F_PER_M) * 1e9


@dataclass(frozen=True)
class ExcitonBinding:
    """Variational exciton of one electron / hole subband pair.

    Attributes
    ----------
    electron, hole : str
        Subband labels ('e1', 'hh1').
    binding_meV : float
        Binding energy [meV] (positive).
    radius_nm : float
        Optimal variational radius lambda [nm].
    pair_energy_eV : float
        Free-carrier pair edge E_e - E_h [eV] (band-diagram energies); 0 if unknown.
    exciton_energy_eV : float
        ``pair_energy_eV - binding`` [eV]: absorption edge / PL peak position.
    exciton_wavelength_um : float
    reduced_mass_m0 : float
        In-plane reduced mass [m0].
    dielectric_constant : float
    """

    electron: str
    hole: str
    binding_meV: float
    radius_nm: float
    pair_energy_eV: float
    exciton_energy_eV: float
    exciton_wavelength_um: float
    reduced_mass_m0: float
    dielectric_constant: float

    @property
    def name(self) -> str:
        return f"{self.electron}-{self.hole}"


def _density_on(grid, state):
    p2 = np.interp(grid, np.asarray(state.z_nm, dtype=float),
                   np.asarray(state.psi, dtype=float) ** 2, left=0.0, right=0.0)
    s = p2.sum() * (grid[1] - grid[0])
    if not s > 0:
        raise ParameterError(f"state {state.label} has an empty wavefunction")
    return p2 / s


def exciton_binding(electron, hole, *, electron_mass_m0: float, hole_mass_m0: float,
                    dielectric_constant: float, electron_z_mass=None, hole_z_mass=None,
                    step_nm: float | None = None) -> ExcitonBinding:
    """Variational binding energy of one pair (module docstring).

    Parameters
    ----------
    electron, hole : State
        Subband states with wavefunctions (the same z axis).
    electron_mass_m0, hole_mass_m0 : float
        In-plane masses [m0].
    dielectric_constant : float
        Static relative permittivity.
    electron_z_mass, hole_z_mass : float or callable, optional
        Growth-axis masses [m0]: a number or ``m(z_nm)``; default the in-plane ones.
    step_nm : float, optional
        Grid step [nm]; default span / 3000, at most 0.05 nm.
    """
    for s in (electron, hole):
        if s.psi is None or s.z_nm is None:
            raise ParameterError(f"state {s.label} has no wavefunction: exciton undefined")
    if not (dielectric_constant and dielectric_constant > 0):
        raise ParameterError(f"dielectric constant must be positive, got {dielectric_constant!r}")
    if not (electron_mass_m0 > 0 and hole_mass_m0 > 0):
        raise ParameterError("in-plane masses must be positive")
    z0 = min(float(np.min(electron.z_nm)), float(np.min(hole.z_nm)))
    z1 = max(float(np.max(electron.z_nm)), float(np.max(hole.z_nm)))
    h = float(step_nm) if step_nm else min(0.05, (z1 - z0) / 3000.0)
    n = int(math.ceil((z1 - z0) / h)) + 1
    grid = z0 + h * np.arange(n)
    ce = _density_on(grid, electron)
    ch = _density_on(grid, hole)

    def kin(mz, default):
        if mz is None:
            mz = default
        m = mz(grid) if callable(mz) else np.full(n, float(mz))
        return HBAR2_2M0_EV_NM2 / np.asarray(m, dtype=float)

    te, th = kin(electron_z_mass, electron_mass_m0), kin(hole_z_mass, hole_mass_m0)
    # lag k: z = z_e - z_h = k h;  r[m] = sum_i a[i] b[i - (m - (n-1))]
    P = fft_convolve(ce, ch[::-1]) * h
    K = (fft_convolve(ce * te, ch[::-1]) + fft_convolve(ce, (ch * th)[::-1])) * h
    lag = np.abs((np.arange(2 * n - 1) - (n - 1)) * h)
    keep = P > 1e-14 * P.max()
    P, K, a = P[keep], np.maximum(K[keep], 0.0), lag[keep]
    mu = electron_mass_m0 * hole_mass_m0 / (electron_mass_m0 + hole_mass_m0)
    t_par = HBAR2_2M0_EV_NM2 / mu
    coul = COULOMB_EV_NM / float(dielectric_constant)
    from scipy.special import exp1  # heavy import: only exciton binding needs it

    def energy(log_lam):
        lam = math.exp(log_lam)
        b = 2.0 * a / lam
        ex = np.exp(-b)
        a2e1 = np.where(a > 0, a * a * exp1(np.where(b > 0, b, 1.0)), 0.0)
        norm = 2.0 * math.pi * ex * (a * lam / 2.0 + lam * lam / 4.0)
        tz = 2.0 * math.pi / lam ** 2 * a2e1
        trho = 2.0 * math.pi / lam ** 2 * (ex * (a * lam / 2.0 + lam * lam / 4.0) - a2e1)
        v = math.pi * lam * ex
        num = np.sum(K * tz) + t_par * np.sum(P * trho) - coul * np.sum(P * v)
        return num / np.sum(P * norm)

    from scipy.optimize import minimize_scalar  # heavy import, only here

    a_2d = t_par / coul                                 # hbar^2 4 pi eps0 eps / (2 mu e^2) [nm]
    lo, hi = math.log(0.05 * a_2d), math.log(20.0 * a_2d)
    res = minimize_scalar(energy, bounds=(lo, hi), method="bounded",
                          options={"xatol": 1e-7})
    lam = math.exp(res.x)
    eb = -float(res.fun)
    pair = float(electron.energy_eV) - float(hole.energy_eV)
    exc = pair - eb
    return ExcitonBinding(electron=electron.label, hole=hole.label, binding_meV=eb * 1e3,
                          radius_nm=lam, pair_energy_eV=pair, exciton_energy_eV=exc,
                          exciton_wavelength_um=HC_EV_UM / exc if exc > 0 else math.nan,
                          reduced_mass_m0=mu, dielectric_constant=float(dielectric_constant))


def _dielectric(stack, state) -> float:
    num = den = 0.0
    for k, p in enumerate(state.layer_probability):
        layer = stack.layers[k]
        if layer.grade is not None or p <= 0:
            continue
        eps = stack.material_of(layer).dielectric_constant
        if eps:
            num += p * eps
            den += p
    if not den > 0:
        raise ParameterError("no static dielectric constant in the layers holding the electrons")
    return num / den


def stack_excitons(solution) -> tuple:
    """Binding of the lowest e-hh and e-lh excitons of a solved stack.

    Parameters
    ----------
    solution : qwell.levels.Solution
        With conduction, heavy- and light-hole levels and wavefunctions.

    Returns
    -------
    tuple of ExcitonBinding
        'e1-hh1' and 'e1-lh1' when those subbands exist.
    """
    lev = solution.levels
    prof = solution.profile
    if "conduction" not in lev or not len(lev["conduction"]):
        raise ParameterError("no electron subband: no exciton")
    e1 = lev["conduction"].states[0]
    eps = _dielectric(solution.stack, e1)
    me = inplane_mass_m0(e1, prof)
    out = []
    for b in ("heavy_hole", "light_hole"):
        if b not in lev or not len(lev[b]):
            continue
        h1 = lev[b].states[0]
        mh = inplane_mass_m0(h1, prof)
        out.append(exciton_binding(
            e1, h1, electron_mass_m0=me, hole_mass_m0=mh, dielectric_constant=eps,
            electron_z_mass=prof.bands["conduction"].edge_mass,
            hole_z_mass=prof.bands[b].edge_mass))
    return tuple(out)
