"""qwell.constants against CODATA 2018 and scipy.constants."""

import scipy.constants as sc
from numpy.testing import assert_allclose

from qwell import constants as k


def test_codata_2018_values():
    # E. Tiesinga et al., "CODATA recommended values of the fundamental physical constants:
    # 2018", Rev. Mod. Phys. 93, 025010 (2021): hc = 1.239841984... eV um,
    # h = 4.135667696e-15 eV s (so 1 THz = 4.135667696 meV), k = 8.617333262e-5 eV/K.
    assert_allclose(k.HC_EV_UM, 1.239841984, rtol=1e-9)
    assert_allclose(k.EV_PER_THZ * 1e3, 4.135667696, rtol=1e-9)
    assert_allclose(k.EV_PER_CM1 * 1e3, 0.1239841984, rtol=1e-9)
    assert_allclose(k.KB_EV_PER_K, 8.617333262e-5, rtol=1e-9)
    assert_allclose(k.M0_KG, 9.1093837015e-31, rtol=0)


def test_agree_with_scipy_constants():
    # scipy.constants may carry a later CODATA release: the exact constants agree exactly,
    # the measured ones (m_e, eps_0) within 1e-8 relative.
    assert k.H_J_S == sc.h and k.C_M_S == sc.c and k.E_C == sc.e and k.KB_J_PER_K == sc.k
    assert_allclose(k.M0_KG, sc.m_e, rtol=1e-8)
    assert_allclose(k.EPS0_F_PER_M, sc.epsilon_0, rtol=1e-8)
    assert_allclose(k.HBAR2_2M0_EV_NM2, sc.hbar ** 2 / (2 * sc.m_e) / sc.e * 1e18, rtol=1e-8)
