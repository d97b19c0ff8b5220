"""LO-phonon energies and high-frequency dielectric constants of the materials database."""

import pytest

from qwell.errors import ValidityWarning
from qwell.materials import PARAM_FIELDS, USER_KEYS, get_material, user_material

INDIRECT = {"AlAs", "GaP", "AlSb", "Al0.45Ga0.55As", "Al0.7Ga0.3As"}


def mat(name):
    """The material; the indirect ones must raise their validity warning (as tested elsewhere)."""
    if name in INDIRECT:
        with pytest.warns(ValidityWarning, match="indirect gap"):
            return get_material(name)
    return get_material(name)

# Values checked against the Ioffe Institute NSM archive pages (www.ioffe.ru/SVA/NSM/Semicond/,
# the online companion of Levinshtein, Rumyantsev, Shur, "Handbook Series on Semiconductor
# Parameters", World Scientific 1996/1999): AlGaAs basic page (eps_s 12.90 - 2.84x,
# eps_inf 10.89 - 2.73x, optical phonon 36.25 + 1.83x + 17.12x^2 - 5.11x^3 meV), InP basic and
# optical pages (eps_s 12.5, eps_inf 9.61, LO 42.6 meV), InAsSb page (eps_inf 12.3 at x = 0),
# GaInSb page (eps_inf 15.7 - 1.3x: InSb 15.7, GaSb 14.4).
NSM = {
    "GaAs": {"high_frequency_dielectric_constant": 10.89, "dielectric_constant": 12.90,
             "lo_phonon_energy_eV": 0.03625},
    "AlAs": {"high_frequency_dielectric_constant": 10.89 - 2.73,
             "dielectric_constant": 12.90 - 2.84,
             "lo_phonon_energy_eV": (36.25 + 1.83 + 17.12 - 5.11) * 1e-3},
    "InP": {"high_frequency_dielectric_constant": 9.61, "dielectric_constant": 12.5,
            "lo_phonon_energy_eV": 0.0426},
    "InAs": {"high_frequency_dielectric_constant": 12.3},
    "InSb": {"high_frequency_dielectric_constant": 15.7},
    "GaSb": {"high_frequency_dielectric_constant": 14.4},
}


@pytest.mark.parametrize("name", sorted(NSM))
def test_binary_values_against_nsm_archive(name):
    m = mat(name)
    for key, ref in NSM[name].items():
        # 0.2 meV on the phonon energy: the AlAs value of the data file is rounded to 50.1 meV
        tol = 2e-4 if key == "lo_phonon_energy_eV" else 5e-3
        assert getattr(m, key) == pytest.approx(ref, abs=tol), key


def test_every_binary_has_phonon_data_with_a_source():
    for name in ("GaAs", "AlAs", "InAs", "InP", "GaP", "GaSb", "AlSb", "InSb"):
        m = mat(name)
        assert 0.015 < m.lo_phonon_energy_eV < 0.06, name
        # eps_inf < eps_s: the lattice polarisation adds to the electronic one
        # (Lyddane-Sachs-Teller, Phys. Rev. 59, 673 (1941): eps_s/eps_inf = (w_LO/w_TO)^2 > 1)
        assert 1.0 < m.high_frequency_dielectric_constant < m.dielectric_constant, name
        assert m.sources["lo_phonon_energy_eV"] == "ioffe_nsm"
        assert m.sources["high_frequency_dielectric_constant"] == "ioffe_nsm"
    assert "lo_phonon_energy_eV" in PARAM_FIELDS
    assert USER_KEYS["lo_phonon_energy"] == ("lo_phonon_energy_eV", "eV")


def test_alloy_eps_inf_is_linear_like_the_nsm_formula():
    # NSM AlGaAs page: eps_inf = 10.89 - 2.73x (linear in x)
    for x in (0.15, 0.3, 0.45):
        m = mat(f"Al{x}Ga{1 - x:.2f}As")
        assert m.high_frequency_dielectric_constant == pytest.approx(10.89 - 2.73 * x, abs=5e-3)


def test_two_mode_alloy_takes_the_dominant_mode():
    # AlGaAs is a two-mode alloy (GaAs-like and AlAs-like LO branches); qwell keeps the branch
    # of the end member with the larger weight (rule of the data file, key two_mode_alloy).
    ga_rich = get_material("Al0.3Ga0.7As")
    al_rich = mat("Al0.7Ga0.3As")
    assert ga_rich.lo_phonon_energy_eV == get_material("GaAs").lo_phonon_energy_eV
    assert al_rich.lo_phonon_energy_eV == mat("AlAs").lo_phonon_energy_eV
    assert "two_mode_alloy" in ga_rich.sources["lo_phonon_energy_eV"]
    q = get_material("In0.53Ga0.27Al0.20As")
    assert q.lo_phonon_energy_eV == get_material("InAs").lo_phonon_energy_eV


def test_user_material_may_carry_phonon_data():
    m = user_material("w", {"conduction_edge_eV": 0.0, "electron_mass": 0.067,
                            "lo_phonon_energy_eV": 0.036,
                            "high_frequency_dielectric_constant": 10.9})
    assert m.lo_phonon_energy_eV == 0.036 and m.sources["lo_phonon_energy_eV"] == "user"
    with pytest.raises(Exception, match="positive"):
        user_material("w", {"lo_phonon_energy_eV": -0.036})
