"""Potentials of proton-coupled couples against pH, the water lines, RHE and the aqueous partner."""

from __future__ import annotations

import numpy as np
import pytest

from redoxfront import units
from redoxfront.engine.proton_coupled import (
    LOST,
    OXIDISED,
    REDUCED,
    ProtonCoupledCouple,
    ProtonSite,
    parse_pka_list,
    pourbaix_curve,
)
from redoxfront.errors import SettingsError

# from memory: 1,4-benzoquinone/hydroquinone E0 = +0.699 V vs SHE at pH 0 (Clark, Oxidation-Reduction
# Potentials of Organic Systems, 1960; CRC Handbook electrochemical series), hydroquinone pKa 9.85 and
# 11.4 (CRC Handbook, dissociation constants of organic acids)
BQ_E0_V = 0.699
HQ_PKA = (9.85, 11.4)


def _benzoquinone() -> ProtonCoupledCouple:
    k = units.nernst_slope_v_per_ph()
    anchor = BQ_E0_V - k / 2 * sum(HQ_PKA)  # Q/Q2- with both protons gained by the reduced form
    return ProtonCoupledCouple(anchor, 2, tuple(ProtonSite(p, REDUCED) for p in HQ_PKA))


def test_nernst_slope_from_codata_constants() -> None:
    # CODATA 2018 R and F: (ln 10) RT/F = 59.16 mV per pH unit at 298.15 K
    assert units.nernst_slope_v_per_ph(298.15) * 1000 == pytest.approx(59.16, abs=0.005)
    # common practice, no source: the slope scales with T (54.20 mV at 273.15 K)
    assert units.nernst_slope_v_per_ph(273.15) * 1000 == pytest.approx(54.20, abs=0.01)


def test_water_lines_are_1_23_v_apart_and_move_59_mv_per_ph() -> None:
    # Pourbaix, Atlas of Electrochemical Equilibria (1974): H2/H+ 0 V and O2/H2O +1.229 V vs SHE at
    # pH 0, both -0.0592 V/pH
    her0, oer0 = units.water_lines_v_vs_she(0.0)
    her14, oer14 = units.water_lines_v_vs_she(14.0)
    assert (her0, oer0) == pytest.approx((0.0, 1.229))
    assert oer14 - her14 == pytest.approx(1.229)
    assert (her14 - her0) / 14 == pytest.approx(-0.05916, abs=1e-5)
    assert her14 == pytest.approx(-0.828, abs=0.001)  # from memory: -0.83 V vs SHE at pH 14


def test_rhe_moves_with_ph_and_converts_to_other_aqueous_references() -> None:
    # the RHE sits at -0.05916 V x pH vs SHE (definition); Ag/AgCl sat. KCl +0.197 V, SCE +0.241 V
    # vs SHE (Bard & Faulkner, Electrochemical Methods, 2nd ed.)
    assert units.convert_potential(0.0, "RHE", "SHE", ph=14.0) == pytest.approx(-0.828, abs=0.001)
    assert units.convert_potential(0.0, "RHE", "SHE", ph=0.0) == pytest.approx(0.0)
    assert units.convert_potential(-0.5, "RHE", "Ag/AgCl", ph=7.0) == pytest.approx(-0.5 - 0.4141 - 0.197, abs=1e-3)
    assert units.convert_potential(0.1, "SCE", "RHE", ph=13.0) == pytest.approx(0.1 + 0.241 + 0.769, abs=1e-3)
    with pytest.raises(SettingsError, match="needs the pH"):
        units.convert_potential(0.0, "RHE", "SHE")


def test_ferricyanide_partner_potential() -> None:
    # Bard, Parsons & Jordan, Standard Potentials in Aqueous Solution (IUPAC 1985): [Fe(CN)6]3-/4-
    # +0.361 V vs SHE (from memory), i.e. +0.120 V vs SCE
    p = units.partner_couple("ferri/ferrocyanide")
    assert p["potential_v_vs_she"] == pytest.approx(0.361)
    assert units.convert_potential(p["potential_v_vs_she"], "SHE", "SCE") == pytest.approx(0.120, abs=1e-3)
    with pytest.raises(SettingsError, match="unknown partner couple"):
        units.partner_couple("vanadium")


def test_benzoquinone_couple_follows_its_published_ph_dependence() -> None:
    bq = _benzoquinone()
    # two protons and two electrons below the first pKa: -59 mV/pH (Clark 1960, from memory)
    assert bq.protons(5.0) == 2
    assert bq.slope_v_per_ph(5.0) * 1000 == pytest.approx(-59.16, abs=0.01)
    assert bq.standard_potential_ph0_v() == pytest.approx(0.699)
    # from memory: E0' of benzoquinone at pH 7 is about +0.28 V vs SHE
    assert bq.potential_v(7.0) == pytest.approx(0.285, abs=0.01)
    # between the pKa values one proton for two electrons (-29.6 mV/pH), flat above the second
    assert bq.slope_v_per_ph(10.5) * 1000 == pytest.approx(-29.58, abs=0.01)
    assert bq.slope_v_per_ph(13.0) == 0.0
    # the lines join at the breakpoints
    eps = 1e-6
    for p in HQ_PKA:
        assert bq.potential_v(p - eps) == pytest.approx(bq.potential_v(p + eps), abs=1e-6)
    grid, e = pourbaix_curve(bq)
    assert grid[0] == 0.0 and grid[-1] == 14.0 and set(HQ_PKA) <= set(np.round(grid, 6))
    assert np.all(np.diff(e) <= 1e-12)  # never rises with pH


def test_the_same_couple_anchored_on_its_protonated_forms_gives_the_same_line() -> None:
    # common practice, no source: writing the couple as QH2(2+)/QH2 (protons lost above each pKa;
    # the protonated quinone's pKa taken as -7) or as Q/Q2- (protons gained below it) is the same
    # Nernst equation
    bq = _benzoquinone()
    k = units.nernst_slope_v_per_ph()
    sites = tuple(ProtonSite(p, REDUCED, kind=LOST) for p in HQ_PKA) + (ProtonSite(-7.0, OXIDISED, kind=LOST),) * 2
    protonated = ProtonCoupledCouple(BQ_E0_V + k / 2 * 14.0, 2, sites)
    ph = np.linspace(0, 14, 57)
    assert np.allclose(bq.potential_v(ph), protonated.potential_v(ph))
    assert [protonated.protons(x) for x in (5, 10.5, 13)] == [2, 1, 0]


def test_oxidised_form_protonation_flattens_the_low_ph_line() -> None:
    # common practice, no source: a proton on the oxidised form (phenazinium, pKa ~1.2 from memory)
    # cancels one on the reduced form below its pKa
    c = ProtonCoupledCouple(-0.2, 2, (ProtonSite(1.2, OXIDISED), ProtonSite(8.0, REDUCED), ProtonSite(12.0, REDUCED)))
    assert c.protons(0.5) == 1 and c.protons(5.0) == 2 and c.protons(13.0) == 0


def test_moving_a_measured_potential_flags_the_pka_values_crossed() -> None:
    bq = _benzoquinone()
    moved, crossed = bq.move(0.30, 7.0, 12.0)
    assert crossed == HQ_PKA
    assert moved == pytest.approx(0.30 + bq.potential_v(12.0) - bq.potential_v(7.0))
    same, none = bq.move(0.30, 2.0, 4.0)
    assert none == () and same == pytest.approx(0.30 - 2 * 0.05916, abs=1e-4)


def test_pka_lists_are_read_from_one_cell() -> None:
    assert parse_pka_list("9.85;11.4", "x") == (9.85, 11.4)
    assert parse_pka_list("", "x") == () and parse_pka_list(float("nan"), "x") == ()
    with pytest.raises(SettingsError, match="candidate A.*'nine'"):
        parse_pka_list("nine", "candidate A")
