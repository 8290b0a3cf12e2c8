"""Constants and reference-electrode conversions against published values."""

import math

import pytest

from redoxfront import units
from redoxfront.errors import SettingsError


def test_faraday_constant_codata_2018():
    # CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 2021, 93, 025010): F = 96485.33212 C/mol
    assert units.FARADAY_C_PER_MOL == pytest.approx(96485.33212, abs=1e-5)
    assert units.AVOGADRO_PER_MOL * units.ELEMENTARY_CHARGE_C == pytest.approx(96485.33212, rel=1e-10)


def test_ev_per_particle_in_kcal_and_kj_per_mol():
    # CODATA 2018 derived: 1 eV per particle = 23.0605 kcal/mol = 96.4853 kJ/mol
    assert units.EV_KCAL_PER_MOL == pytest.approx(23.0605, abs=1e-4)
    assert units.EV_KJ_PER_MOL == pytest.approx(96.4853, abs=1e-4)
    # CODATA 2018: 1 Eh = 27.211386245988 eV; 627.5095 kcal/mol (common practice)
    assert units.HARTREE_KCAL_PER_MOL == pytest.approx(627.5095, abs=1e-3)


def test_ampere_hours_per_mole_of_electrons():
    # F / 3600 s/h = 26.80 Ah/mol (CODATA 2018 Faraday constant)
    assert units.AH_PER_MOL_ELECTRONS == pytest.approx(26.801, abs=1e-3)


def test_reference_electrodes_vs_she():
    # Bard & Faulkner, Electrochemical Methods, 2nd ed.: SCE = +0.241 V, Ag/AgCl (sat. KCl) = +0.197 V vs SHE
    assert units.convert_potential(0.0, "sce", "she") == pytest.approx(0.241)
    assert units.convert_potential(0.0, "Ag/AgCl", "SHE") == pytest.approx(0.197)
    # Connelly & Geiger, Chem. Rev. 1996, 96, 877: Fc+/Fc = +0.40 V vs SCE in acetonitrile
    assert units.convert_potential(0.0, "Fc+/Fc", "sce") == pytest.approx(0.40)
    # round trip and sign: a couple at +1.00 V vs SCE is at +0.60 V vs Fc+/Fc
    assert units.convert_potential(1.00, "sce", "fc") == pytest.approx(0.60)
    assert units.convert_potential(units.convert_potential(0.3, "agagcl", "fc"), "fc", "agagcl") == pytest.approx(0.3)


def test_absolute_she():
    # Trasatti, Pure Appl. Chem. 1986, 58, 955 (IUPAC): 4.44 V
    assert units.ABSOLUTE_SHE_V["trasatti"] == 4.44
    # Isse & Gennaro, J. Phys. Chem. B 2010, 114, 7894 (from memory): 4.28 V
    assert units.ABSOLUTE_SHE_V["isse-gennaro"] == 4.28


def test_rt_ln10_at_298_k():
    # RT ln 10 at 298.15 K = 1.364 kcal/mol per decade of rate constant (common practice, no source)
    assert units.rt_ln10_kcal_per_mol(298.15) == pytest.approx(1.3642, abs=1e-3)
    assert math.isclose(units.rt_ln10_kcal_per_mol(596.3), 2 * units.rt_ln10_kcal_per_mol(298.15))


def test_unknown_reference_names_allowed_values():
    with pytest.raises(SettingsError, match=r"unknown reference electrode 'Hg/HgO'.*allowed: SHE, SCE, Ag/AgCl \(sat. KCl\), Fc\+/Fc"):
        units.reference_key("Hg/HgO")


def test_ag_ag_plus_user_reference_and_labels():
    """Issue 11: Ag/Ag+ (0.01 M AgNO3, MeCN), a user-defined reference, the same spellings in
    campaign.toml as in the measured file, and Fc+/Fc written the way a person reads it."""
    # Pavlishchuk & Addison, Inorg. Chim. Acta 2000, 298, 97 (from memory): Fc+/Fc = +0.087 V
    # vs Ag/Ag+ (0.01 M AgNO3) in acetonitrile
    assert units.convert_potential(0.0, "Fc+/Fc", "Ag/Ag+") == pytest.approx(0.087)
    assert units.convert_potential(0.0, "Ag/Ag+ (0.01 M AgNO3, MeCN)", "sce") == pytest.approx(0.40 - 0.087)
    # a user's reference stated at -0.25 V vs Fc+/Fc: a couple at 0 V vs Fc+/Fc is +0.25 V vs it
    assert units.convert_potential(0.0, "fc", "user", user_v_vs_fc=-0.25) == pytest.approx(0.25)
    with pytest.raises(SettingsError, match="user_reference_v_vs_fc"):
        units.convert_potential(0.0, "fc", "user")
    assert units.reference_label("fc") == "Fc+/Fc"
    assert units.reference_label("user", "Ag wire") == "Ag wire"
    from redoxfront.campaign import ComputeSettings

    assert ComputeSettings(reference="Fc+/Fc").reference == "fc"
    assert ComputeSettings(reference="Ag/Ag+").reference == "agag"
    assert ComputeSettings(reference="Ag wire", user_reference_name="Ag wire",
                           user_reference_v_vs_fc=-0.25).reference == "user"
    with pytest.raises(SettingsError, match=r"\[compute\] user_reference_v_vs_fc"):
        ComputeSettings(reference="user")
