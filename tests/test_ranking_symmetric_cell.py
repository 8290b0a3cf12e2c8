"""Symmetric cells of bipolar candidates: voltage, energy density, the shorter-lived form, ranking."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from redoxfront import columns as col
from redoxfront.ranking.cell_metrics import CellSettings, cell_metrics
from redoxfront.ranking.potential_bands import REFERENCE_SET_BANDS
from redoxfront.ranking.step import RankingSettings, rank_table
from redoxfront.ranking.symmetric_cell import SYMMETRIC, symmetric_cell_metrics

REF = "fc"
P = col.process_potential


def _table() -> pd.DataFrame:
    """Invented candidates: one bipolar molecule (measured both ways), one bipolar molecule
    (uncalibrated), a catholyte and an anolyte."""
    nan = np.nan
    return pd.DataFrame({
        col.ID: ["bp", "bq", "c1", "a1"],
        col.ROLE: ["bipolar", "bipolar", "catholyte", "anolyte"],
        col.N_ELECTRONS: [1, 1, 1, 1],
        col.MOLAR_MASS: [250.0, 300.0, 300.0, 250.0],
        col.potential_calibrated(REF): [nan, nan, 0.80, -1.90],
        col.potential_calibrated_pi_low(REF): [nan, nan, 0.70, -2.00],
        col.potential_calibrated_pi_high(REF): [nan, nan, 0.90, -1.80],
        P("reduction", "measured", REF): [-1.80, nan, nan, nan],
        P("oxidation", "measured", REF): [0.60, nan, nan, nan],
        "reduction_potential_measured_uncertainty_v": [0.02, nan, nan, nan],
        "oxidation_potential_measured_uncertainty_v": [0.02, nan, nan, nan],
        P("reduction", "uncalibrated", REF): [-1.75, -2.00, nan, nan],
        P("oxidation", "uncalibrated", REF): [0.55, 0.90, nan, nan],
        col.LOG10_K_PRED_FIRST: [nan, nan, -2.0, -3.0],
        col.LOG10_K_PRED_FIRST + col.PI_LOW_SUFFIX: [nan, nan, -2.5, -3.5],
        col.LOG10_K_PRED_FIRST + col.PI_HIGH_SUFFIX: [nan, nan, -1.5, -2.5],
        col.log10_k_predicted_form("reduced", 1): [-3.0, -2.0, nan, nan],
        col.log10_k_predicted_form("reduced", 1) + col.PI_LOW_SUFFIX: [-3.5, -2.5, nan, nan],
        col.log10_k_predicted_form("reduced", 1) + col.PI_HIGH_SUFFIX: [-2.5, -1.5, nan, nan],
        col.log10_k_predicted_form("oxidised", 1): [-2.0, -3.0, nan, nan],
        col.log10_k_predicted_form("oxidised", 1) + col.PI_LOW_SUFFIX: [-2.5, -3.5, nan, nan],
        col.log10_k_predicted_form("oxidised", 1) + col.PI_HIGH_SUFFIX: [-1.5, -2.5, nan, nan],
        "domain_reduced": ["inside", "extrapolating", "", ""],
        "domain_oxidised": ["inside", "inside", "", ""],
    })


def _metrics(**cell) -> pd.DataFrame:
    settings = CellSettings(**cell)
    return symmetric_cell_metrics(cell_metrics(_table(), settings, REF), settings, REF).set_index(col.ID)


def test_worked_symmetric_cell_energy_density_by_hand():
    m = _metrics(concentration_mol_per_l=0.5)
    bp = m.loc["bp"]
    # worked by hand: V = E(ox) - E(red) = 0.60 - (-1.80) = 2.40 V
    assert bp[col.CELL_VOLTAGE] == pytest.approx(2.40, abs=1e-12)
    # each tank holds one electron per molecule at 0.5 mol/L:
    # Q = F c / 3600 = 96485.33212 C/mol x 0.5 mol/L / 3600 s/h = 13.40074 Ah/L
    # (Faraday constant: CODATA 2018, 96485.33212 C/mol)
    assert bp[col.CAPACITY_VOL] == pytest.approx(13.40074, abs=1e-5)
    # two-tank basis (both tanks' volume counts): W = V Q / 2 = 2.40 x 13.40074 / 2 = 16.0809 Wh/L
    assert bp[col.ENERGY_DENSITY] == pytest.approx(16.0809, abs=1e-4)
    # the interval: measured +/- 0.02 V each, independent: 2.40 -/+ sqrt(0.02^2 + 0.02^2) = 2.40 -/+ 0.028284 V
    assert bp[col.CELL_VOLTAGE_LOW] == pytest.approx(2.371716, abs=1e-6)
    assert bp[col.CELL_VOLTAGE_HIGH] == pytest.approx(2.428284, abs=1e-6)
    assert bp[col.ENERGY_DENSITY_LOW] == pytest.approx(2.371716 * 13.40074 / 2, abs=1e-4)
    # one-tank basis counts only one tank: W = V Q = 32.1618 Wh/L
    assert _metrics(concentration_mol_per_l=0.5, tank_basis="one-tank").loc["bp", col.ENERGY_DENSITY] == \
        pytest.approx(32.1618, abs=1e-4)
    # mAh/g: F / (3.6 M) = 96485.33212 / (3.6 x 250) = 107.2059 mAh/g (one electron per molecule)
    assert bp[col.CAPACITY_GRAV] == pytest.approx(107.2059, abs=1e-4)
    assert bp[col.CELL_CONFIGURATION] == SYMMETRIC and bp[col.PARTNER_ID] == "bp"
    assert bp[col.POTENTIAL_BASIS] == "measured"


def test_the_shorter_lived_charged_form_limits_the_cell():
    m = _metrics()
    bp, bq = m.loc["bp"], m.loc["bq"]
    # first order: t1/2 = ln 2 / k (any physical-chemistry text); radical cation k = 1e-2 /h
    # -> 69.31 h, radical anion k = 1e-3 /h -> 693.1 h; the cell lives as long as the cation
    assert bp[col.form_column("oxidised", col.HALF_LIFE)] == pytest.approx(math.log(2) / 1e-2)
    assert bp[col.form_column("reduced", col.HALF_LIFE)] == pytest.approx(math.log(2) / 1e-3)
    assert bp[col.HALF_LIFE] == pytest.approx(math.log(2) / 1e-2)
    assert bp[col.LIFE_LIMITED_BY] == "oxidised" and bq[col.LIFE_LIMITED_BY] == "reduced"
    # the interval ends are taken the same way: the shorter of each end
    assert bp[col.HALF_LIFE_LOW] == pytest.approx(math.log(2) / 10 ** -1.5)
    assert bp[col.HALF_LIFE_HIGH] == pytest.approx(math.log(2) / 10 ** -2.5)
    assert bool(bq[col.EXTRAPOLATING]) and not bool(bp[col.EXTRAPOLATING])  # its anion lies outside the model
    # uncalibrated couples carry the band of their couple type from the published reference set
    red_band, ox_band = REFERENCE_SET_BANDS["reduction"], REFERENCE_SET_BANDS["oxidation"]
    assert bq[col.CELL_VOLTAGE] == pytest.approx(2.90)
    assert bq[col.CELL_VOLTAGE_LOW] == pytest.approx(2.90 - math.hypot(ox_band.q975_v, -red_band.q025_v))
    assert bq[col.POTENTIAL_BASIS] == "uncalibrated"
    assert bq[col.process_column("reduction", col.POTENTIAL_BASIS)] == "uncalibrated"


def test_bipolar_candidates_are_ranked_beside_ordinary_ones_on_the_same_objectives():
    m = _metrics().reset_index()
    ordinary = m.set_index(col.ID).loc[["c1", "a1"]]
    assert list(ordinary[col.PARTNER_ID]) == ["a1", "c1"]  # bipolar rows are nobody's partner
    assert list(ordinary[col.CELL_VOLTAGE]) == pytest.approx([2.70, 2.70])
    assert set(ordinary[col.CELL_CONFIGURATION]) == {"paired with the best partner"}
    result = rank_table(m, RankingSettings(objectives=("energy_density", "half_life"), n_draws=200))
    ranked = result.table
    # a bipolar pick carries both couples and both forms into picks.csv
    assert "bq" in set(result.picks[col.ID])
    for name in (P("reduction", "used", REF), P("oxidation", "used", REF), "half_life_reduced_h",
                 "half_life_oxidised_h", "domain_reduced", col.LIFE_LIMITED_BY, col.CELL_CONFIGURATION):
        assert name in result.picks.columns, name
    assert ranked[col.PARETO_RANK].notna().all()  # all four ranked together
    bq = ranked.set_index(col.ID).loc["bq"]
    # bq: the highest energy density (2.90 V symmetric cell) -> on the first front
    assert bq[col.PARETO_RANK] == 1
    assert ranked[col.RANKING_NOTE].fillna("").eq("").all()


def test_both_couples_are_checked_against_the_electrolyte_window():
    m = _metrics(window_low_v=-2.0, window_high_v=1.0)
    # bp: -1.80 +/- 0.02 and +0.60 +/- 0.02 V lie inside [-2.0, 1.0] V
    assert m.loc["bp", col.WINDOW_FLAG] == ""
    # bq (uncalibrated): its reduction band reaches below -2.0 V and its oxidation band above 1.0 V
    flag = m.loc["bq", col.WINDOW_FLAG]
    assert "may be outside the window: above the oxidation limit 1.00 V" in flag
    assert "may be outside the window: below the reduction limit -2.00 V" in flag
