"""Tests of qwell.strain (pseudomorphic (001) strain, Matthews-Blakeslee).

Sources beside each check.  Material numbers attributed to Vurgaftman et al.,
J. Appl. Phys. 89, 5815 (2001), are FROM MEMORY (not re-checked against the
paper), as in the data files.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import lambertw

from qwell.errors import MaterialError
from qwell.materials import get_material, user_material
from qwell.strain import Strain, critical_thickness_nm, strain

A_GAAS_A = 5.65325  # Vurgaftman 2001, 300 K (from memory)
A_INAS_A = 6.0583   # Vurgaftman 2001, 300 K (from memory)


def test_in02gaas_on_gaas_in_plane_strain():
    # Vegard lattice constant from Vurgaftman 2001 (from memory); eps_xx = (a_sub - a)/a
    # (Chuang, Physics of Optoelectronic Devices, Wiley 1995, ch. 4).  About -1.4 %.
    a = 0.8 * A_GAAS_A + 0.2 * A_INAS_A
    s = strain(get_material("In0.2Ga0.8As"), get_material("GaAs"))
    assert isinstance(s, Strain)
    assert s.eps_xx == pytest.approx((A_GAAS_A - a) / a, rel=1e-9)
    assert -0.0145 < s.eps_xx < -0.0135


def test_eps_zz_from_elastic_constants():
    # Chuang 1995, ch. 4: eps_zz = -2 (C12/C11) eps_xx for a (001) biaxially strained layer.
    # GaAs-rich layer with Vurgaftman 2001 C11 = 122.1, C12 = 56.6 GPa for GaAs (from memory,
    # table printed as 1221 and 566).
    layer = get_material("In0.2Ga0.8As")
    s = strain(layer, get_material("GaAs"))
    assert s.eps_zz == pytest.approx(-2 * layer.c12_GPa / layer.c11_GPa * s.eps_xx, rel=1e-12)
    g = get_material("GaAs")
    assert g.c12_GPa / g.c11_GPa == pytest.approx(566 / 1221, rel=1e-9)


def test_hydrostatic_gap_deformation_and_compression_opens_gap():
    # Vurgaftman 2001 (from memory): GaAs gap deformation a_c - a_v = -8.33 eV (gap
    # convention).  Under compression (tr eps < 0) the gap must open.
    layer = get_material("In0.2Ga0.8As")
    s = strain(layer, get_material("GaAs"))
    tr = 2 * s.eps_xx + s.eps_zz
    assert tr < 0
    hydro_gap_shift = s.delta_conduction_eV - (-s.hydrostatic_P_eV)
    assert hydro_gap_shift / tr == pytest.approx(layer.ac_eV - layer.av_eV, rel=1e-12)
    g = get_material("GaAs")
    assert g.ac_eV - g.av_eV == pytest.approx(-8.33, abs=0.01)
    assert hydro_gap_shift > 0
    assert s.delta_gap_eV > 0
    assert s.delta_conduction_eV > 0 and s.hydrostatic_P_eV > 0


def test_heavy_hole_above_light_hole_under_compression():
    # Chuang 1995, ch. 4: compressive biaxial strain lifts the heavy hole above the light hole.
    s = strain(get_material("In0.2Ga0.8As"), get_material("GaAs"))
    assert s.delta_heavy_hole_eV > s.delta_light_hole_eV
    assert s.shear_Q_eV < 0


def test_light_hole_above_heavy_hole_under_tension():
    # Chuang 1995, ch. 4: tensile strain puts the light hole on top.
    s = strain(get_material("In0.4Ga0.6As"), get_material("InP"))
    assert s.eps_xx > 0
    assert s.delta_light_hole_eV > s.delta_heavy_hole_eV


@pytest.mark.parametrize("layer,sub", [("In0.2Ga0.8As", "GaAs"), ("In0.4Ga0.6As", "InP"),
                                       ("GaAs", "InP"), ("In0.7Ga0.3As", "InP")])
def test_light_hole_matches_numerical_lh_so_block(layer, sub):
    # Independent check: numerically diagonalise the strain-coupled light-hole / split-off
    # 2x2 block at k = 0 (Chuang 1995, ch. 4, Bir-Pikus Hamiltonian):
    #   [[-P + Q, sqrt(2) Q], [sqrt(2) Q, -P - D]]  (energies from the unstrained Ev);
    # the upper eigenvalue is the light-hole edge.
    m = get_material(layer)
    s = strain(m, get_material(sub))
    P, Q, D = s.hydrostatic_P_eV, s.shear_Q_eV, m.spin_orbit_eV
    H = np.array([[-P + Q, math.sqrt(2) * Q], [math.sqrt(2) * Q, -P - D]])
    top = np.linalg.eigvalsh(H)[-1]
    assert s.delta_light_hole_eV == pytest.approx(top, abs=1e-12)
    assert s.delta_heavy_hole_eV == pytest.approx(-P - Q, abs=1e-15)


def test_shear_and_hydrostatic_definitions():
    # Chuang 1995, ch. 4: P = -a_v tr(eps) (a_v > 0), Q = -(b/2)(eps_xx + eps_yy - 2 eps_zz),
    # dEc = a_c tr(eps).
    m = get_material("In0.3Ga0.7As")
    s = strain(m, get_material("GaAs"))
    tr = 2 * s.eps_xx + s.eps_zz
    assert s.hydrostatic_P_eV == pytest.approx(-m.av_eV * tr, rel=1e-12)
    assert s.shear_Q_eV == pytest.approx(-0.5 * m.b_eV * (2 * s.eps_xx - 2 * s.eps_zz), rel=1e-12)
    assert s.delta_conduction_eV == pytest.approx(m.ac_eV * tr, rel=1e-12)


def test_lattice_matched_has_no_strain():
    m = get_material("GaAs")
    s = strain(m, m)
    assert s.eps_xx == 0 and s.eps_zz == 0
    assert s.delta_conduction_eV == 0 and s.delta_heavy_hole_eV == 0
    assert s.delta_light_hole_eV == pytest.approx(0.0, abs=1e-15)
    assert critical_thickness_nm(m, m) == math.inf


def _mb_lambert(material, substrate, capped=False):
    # Independent closed form of the Matthews-Blakeslee balance
    # h = A (ln(h/b) + 1), A = b (1 - nu cos^2 60) / (8 pi f (1 + nu) cos 60) (single layer;
    # Matthews & Blakeslee, J. Cryst. Growth 27, 118 (1974), in the form of People & Bean,
    # Appl. Phys. Lett. 47, 322 (1985), from memory), doubled for a capped layer.
    # With u = h/b, k = A/b: u = e^(s-1), s = -W_{-1}(-1/(e k)) (Lambert W, scipy.special).
    a = material.lattice_constant_nm
    f = abs(substrate.lattice_constant_nm - a) / a
    nu = material.c12_GPa / (material.c11_GPa + material.c12_GPa)
    b = a / math.sqrt(2)
    A = b * (1 - nu * 0.25) / (8 * math.pi * f * (1 + nu) * 0.5)
    if capped:
        A *= 2
    k = A / b
    s = -lambertw(-1 / (math.e * k), k=-1).real
    return b * math.exp(s - 1)


@pytest.mark.parametrize("x", [0.1, 0.2, 0.3])
@pytest.mark.parametrize("capped", [False, True])
def test_critical_thickness_matches_lambert_w(x, capped):
    layer, sub = get_material(f"In{x}Ga{1 - x:.1f}As"), get_material("GaAs")
    h = critical_thickness_nm(layer, sub, capped=capped)
    assert h == pytest.approx(_mb_lambert(layer, sub, capped), rel=1e-10)


def test_critical_thickness_order_of_magnitude():
    # Project brief (common practice, no source): Matthews-Blakeslee gives of order
    # 10-20 nm for In0.2Ga0.8As on GaAs.  Found in this session: 14.6 nm for a capped
    # layer (quantum well, two misfit segments) and 5.8 nm for the single-interface form.
    layer, sub = get_material("In0.2Ga0.8As"), get_material("GaAs")
    capped = critical_thickness_nm(layer, sub, capped=True)
    single = critical_thickness_nm(layer, sub)
    assert 10.0 < capped < 20.0
    assert single < capped
    # self-consistency of the returned root
    a = layer.lattice_constant_nm
    b = a / math.sqrt(2)
    assert single > b


def test_critical_thickness_decreases_with_misfit():
    sub = get_material("GaAs")
    hs = [critical_thickness_nm(get_material(f"In{x:.2f}Ga{1 - x:.2f}As"), sub)
          for x in (0.05, 0.1, 0.2, 0.3)]
    assert all(h1 > h2 for h1, h2 in zip(hs, hs[1:]))


def test_too_large_misfit_raises():
    with pytest.raises(MaterialError, match="too large"):
        critical_thickness_nm(get_material("InAs"), get_material("GaAs"))


def test_missing_parameters():
    u = user_material("u", {"lattice_constant_nm": 0.57})
    with pytest.raises(MaterialError, match="lacks"):
        strain(u, get_material("GaAs"))
    with pytest.raises(MaterialError, match="lacks"):
        critical_thickness_nm(u, get_material("GaAs"))
