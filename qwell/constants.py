"""Physical constants as plain floats (CODATA 2018), and the derived ones qwell uses.

One home for every constant: modules import from here instead of ``scipy.constants``
(whose import costs start-up time and whose values move with each CODATA release).

Values are those of CODATA 2018; h, e, c and k are exact in the 2019 SI.

References
----------
.. [1] E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor, "CODATA recommended values of
   the fundamental physical constants: 2018", Rev. Mod. Phys. 93, 025010 (2021),
   doi:10.1103/RevModPhys.93.025010.
"""

from __future__ import annotations

import math

__all__ = [
    "H_J_S", "HBAR_J_S", "C_M_S", "E_C", "M0_KG", "KB_J_PER_K", "EPS0_F_PER_M",
    "H_EV_S", "HBAR_EV_S", "KB_EV_PER_K", "HC_EV_UM", "HC_EV_NM", "HBAR2_2M0_EV_NM2",
    "EV_PER_THZ", "EV_PER_CM1", "ALPHA_FS",
]

#: Planck constant h [J s] (exact).
H_J_S = 6.62607015e-34
#: Reduced Planck constant ħ = h / 2π [J s].
HBAR_J_S = H_J_S / (2.0 * math.pi)
#: Speed of light in vacuum c [m/s] (exact).
C_M_S = 299792458.0
#: Elementary charge e [C] (exact).
E_C = 1.602176634e-19
#: Electron rest mass m0 [kg] (CODATA 2018).
M0_KG = 9.1093837015e-31
#: Boltzmann constant k [J/K] (exact).
KB_J_PER_K = 1.380649e-23
#: Vacuum permittivity ε0 [F/m] (CODATA 2018).
EPS0_F_PER_M = 8.8541878128e-12
#: Fine-structure constant α (CODATA 2018).
ALPHA_FS = 7.2973525693e-3

#: h [eV s].
H_EV_S = H_J_S / E_C
#: ħ [eV s].
HBAR_EV_S = HBAR_J_S / E_C
#: k [eV/K].
KB_EV_PER_K = KB_J_PER_K / E_C
#: h c [eV µm] = 1.239841984 eV µm.
HC_EV_UM = H_J_S * C_M_S / E_C * 1e6
#: h c [eV nm].
HC_EV_NM = HC_EV_UM * 1e3
#: ħ² / (2 m0) [eV nm²] = 0.0380998 eV nm².
HBAR2_2M0_EV_NM2 = HBAR_J_S ** 2 / (2.0 * M0_KG) / E_C * 1e18
#: Photon energy of 1 THz [eV] (h × 1e12 Hz).
EV_PER_THZ = H_EV_S * 1e12
#: Photon energy of 1 cm^-1 [eV] (h c × 100 m^-1).
EV_PER_CM1 = H_EV_S * C_M_S * 100.0
