"""Cell metrics in water: the water window at the campaign pH and a published fixed partner."""

from __future__ import annotations

from dataclasses import replace

import pandas as pd
import pytest

from redoxfront import columns as C
from redoxfront.errors import SettingsError
from redoxfront.ranking.cell_metrics import CellSettings, cell_metrics
from redoxfront.ranking.windows import solvent_window
from redoxfront.units import AH_PER_MOL_ELECTRONS


def _table() -> pd.DataFrame:
    ref = "she"
    return pd.DataFrame({
        C.ID: ["inside", "second_step_out", "all_out"],
        C.STATUS: ["ok"] * 3,
        C.ROLE: ["anolyte"] * 3,
        C.N_ELECTRONS: [2, 2, 2],
        C.MOLAR_MASS: [300.0] * 3,
        C.potential_uncalibrated(ref): [-0.60, -0.80, -1.10],
        C.potential_uncalibrated(ref, 1): [-0.55, -0.65, -1.00],
        C.potential_uncalibrated(ref, 2): [-0.65, -0.95, -1.20],
    })


def test_water_lines_at_ph_14_vs_she_and_ag_agcl() -> None:
    # Pourbaix (1974): -0.828 V and +0.401 V vs SHE at pH 14; Ag/AgCl sat. KCl +0.197 V vs SHE
    # (Bard & Faulkner, Electrochemical Methods, 2nd ed.)
    w = solvent_window("water", "she", ph=14.0)
    assert (w.low_v, w.high_v) == pytest.approx((-0.828, 0.401), abs=1e-3)
    w2 = solvent_window("water", "agagcl", ph=14.0)
    assert w2.low_v == pytest.approx(-0.828 - 0.197, abs=1e-3) and w2.high_v - w2.low_v == pytest.approx(1.229)


def test_ferricyanide_partner_and_electrons_inside_the_window_at_ph_14() -> None:
    settings = CellSettings(counter="published", counter_couple="ferricyanide", concentration_mol_per_l=1.0, ph=14.0)
    out = cell_metrics(_table(), settings, "she", solvent="water").set_index(C.ID)
    # Bard, Parsons & Jordan (IUPAC 1985, from memory): [Fe(CN)6]3-/4- +0.361 V vs SHE, pH-independent
    assert out.loc["inside", C.CELL_VOLTAGE] == pytest.approx(0.361 + 0.60)
    assert out.loc["inside", C.PARTNER_ID] == "ferricyanide"
    assert list(out[C.ELECTRONS_AT_PH]) == [2, 1, 0]
    assert "1 of 2 electron(s) beyond the hydrogen evolution limit -0.828 V" in out.loc["second_step_out", C.RANKING_NOTE]
    assert "outside the window: below the reduction limit -0.83 V" in out.loc["all_out", C.WINDOW_FLAG]
    # capacity n F c / 3600 with the electrons that transfer at this pH (26.8 Ah/L per mol/L per e-, CODATA F)
    assert out.loc["second_step_out", C.CAPACITY_VOL] == pytest.approx(AH_PER_MOL_ELECTRONS * 1.0)
    assert out.loc["all_out", C.ENERGY_DENSITY] == 0.0
    # an overpotential allowance of 0.3 V (user setting) brings all steps of the second one inside
    wide = cell_metrics(_table(), replace(settings, water_overpotential_v=0.3), "she", solvent="water").set_index(C.ID)
    assert list(wide[C.ELECTRONS_AT_PH]) == [2, 2, 1]
    # at pH 7 the hydrogen line is -0.414 V vs SHE: every one of these anolytes is beyond it
    neutral = cell_metrics(_table(), replace(settings, ph=7.0), "she", solvent="water")
    assert (neutral[C.ELECTRONS_AT_PH] == 0).all()


def test_unknown_published_partner_is_refused() -> None:
    with pytest.raises(SettingsError, match="unknown partner couple 'bromine'"):
        CellSettings(counter="published", counter_couple="bromine")


def test_uncalibrated_potentials_in_water_carry_a_note() -> None:
    # from memory: 1,4-benzoquinone computed -0.53 V against +0.28 V measured at pH 7 vs SHE
    # (tests/test_compute_aqueous.py; Clark 1960): the organic-solvent band understates this
    table = _table().assign(**{C.CAMPAIGN_PH: 14.0})
    settings = CellSettings(counter="published", ph=14.0)
    out = cell_metrics(table, settings, "she", solvent="water")
    assert out[C.RANKING_NOTE].str.contains("uncalibrated potential in water").all()
    dry = cell_metrics(_table(), settings, "she", solvent="water")
    assert not dry[C.RANKING_NOTE].str.contains("uncalibrated potential in water").any()
