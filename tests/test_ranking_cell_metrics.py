"""Cell metrics: voltage, capacities, energy density, half-life (small invented tables)."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from redoxfront import columns as col
from redoxfront.campaign import section_from_mapping
from redoxfront.errors import InputError, SettingsError
from redoxfront.ranking.cell_metrics import (
    CellSettings,
    cell_metrics,
    energy_density_wh_per_l,
    gravimetric_capacity_mah_per_g,
    half_life_h,
    resolve_rate_order,
    volumetric_capacity_ah_per_l,
)
from redoxfront.units import AH_PER_MOL_ELECTRONS

REF = "fc"


def _table(**over) -> pd.DataFrame:
    """Invented candidates: two catholytes, two anolytes."""
    data = {
        col.ID: ["c1", "c2", "a1", "a2"],
        col.ROLE: ["catholyte", "catholyte", "anolyte", "anolyte"],
        col.N_ELECTRONS: [1, 2, 1, 1],
        col.MOLAR_MASS: [300.0, 400.0, 250.0, 200.0],
        col.potential_calibrated(REF): [0.80, 0.60, -1.90, -2.10],
        col.potential_calibrated_pi_low(REF): [0.70, 0.50, -2.00, -2.20],
        col.potential_calibrated_pi_high(REF): [0.90, 0.70, -1.80, -2.00],
        col.LOG10_K_PRED_FIRST: [-2.0, -1.0, -3.0, -2.5],
        col.LOG10_K_PRED_FIRST + col.PI_LOW_SUFFIX: [-2.5, -1.5, -3.5, -3.0],
        col.LOG10_K_PRED_FIRST + col.PI_HIGH_SUFFIX: [-1.5, -0.5, -2.5, -2.0],
        col.DOMAIN: ["inside", "extrapolating", "inside", "inside"],
    }
    data.update(over)
    return pd.DataFrame(data)


def test_faraday_charge_per_mole_of_electrons():
    # CODATA 2018 Faraday constant 96485.33212 C/mol / 3600 s/h = 26.80148 Ah/mol
    assert AH_PER_MOL_ELECTRONS == pytest.approx(26.80148, abs=1e-5)
    # DESIGN notes / any electrochemistry text: 26.8 Ah/L per mol/L per electron
    assert volumetric_capacity_ah_per_l(1, 1.0) == pytest.approx(26.80, abs=0.005)
    assert volumetric_capacity_ah_per_l(2, 0.5) == pytest.approx(26.80, abs=0.005)


def test_all_vanadium_worked_example_two_tank():
    # Darling et al., Energy Environ. Sci. 2014, 7, 3459: 1.6 mol/L, 1.26 V, n = 1, both
    # electrolytes counted -> ~27 Wh/L (common practice: 25-35 Wh/L for all-vanadium)
    q = volumetric_capacity_ah_per_l(1, 1.6)
    w = float(energy_density_wh_per_l(1.26, q))
    assert w == pytest.approx(27.0, abs=0.1)
    assert 25.0 <= w <= 35.0
    # one tank counted only: twice as much
    assert float(energy_density_wh_per_l(1.26, q, tank_basis="one-tank")) == pytest.approx(2 * w)


def test_vanadium_through_the_table():
    # Darling et al., Energy Environ. Sci. 2014, 7, 3459: ~27 Wh/L on the two-tank basis
    t = pd.DataFrame({
        col.ID: ["VO2+/VO2+ vs V3+/V2+"], col.ROLE: ["catholyte"], col.N_ELECTRONS: [1],
        col.MOLAR_MASS: [np.nan], col.potential_uncalibrated(REF): [1.26],
        col.LOG10_K_PRED_FIRST: [-4.0],
    })
    s = CellSettings(counter="potential", counter_potential_v=0.0, concentration_mol_per_l=1.6)
    out = cell_metrics(t, s, REF)
    assert out.loc[0, col.CELL_VOLTAGE] == pytest.approx(1.26)
    assert out.loc[0, col.ENERGY_DENSITY] == pytest.approx(27.0, abs=0.1)
    assert out.loc[0, col.CAPACITY_VOL] == pytest.approx(1.6 * 26.8015, abs=1e-3)
    # uncalibrated: the oxidation band of the published reference set (benchmarks/
    # reference_set_errors.csv: errors computed - published from -0.608 to +0.774 V, 95 %)
    assert out.loc[0, col.POTENTIAL_BASIS] == "uncalibrated"
    assert out.loc[0, col.CELL_VOLTAGE_LOW] == pytest.approx(1.26 - 0.774)
    assert out.loc[0, col.CELL_VOLTAGE_HIGH] == pytest.approx(1.26 + 0.608)
    # a symmetric band set in [cell] replaces it (0.3 V, Davis & Fry, JPCA 2010, 114, 12299)
    flat = cell_metrics(t, CellSettings(counter="potential", counter_potential_v=0.0,
                                        concentration_mol_per_l=1.6, uncalibrated_uncertainty_v=0.3), REF)
    assert flat.loc[0, col.CELL_VOLTAGE_LOW] == pytest.approx(0.96)
    assert flat.loc[0, col.CELL_VOLTAGE_HIGH] == pytest.approx(1.56)
    assert "no valid molar_mass" in out.loc[0, col.RANKING_NOTE]
    # utilisation scales energy, not the theoretical capacity
    half = cell_metrics(t, CellSettings(counter="potential", counter_potential_v=0.0,
                                        concentration_mol_per_l=1.6, utilisation=0.5), REF)
    assert half.loc[0, col.ENERGY_DENSITY] == pytest.approx(13.5, abs=0.05)
    assert half.loc[0, col.CAPACITY_VOL] == pytest.approx(out.loc[0, col.CAPACITY_VOL])


def test_gravimetric_capacity_lifepo4():
    # Padhi, Nanjundaswamy & Goodenough, J. Electrochem. Soc. 1997, 144, 1188:
    # LiFePO4 (157.76 g/mol, n = 1) theoretical capacity ~170 mAh/g
    assert float(gravimetric_capacity_mah_per_g(1, 157.76)) == pytest.approx(169.9, abs=0.2)
    assert np.isnan(gravimetric_capacity_mah_per_g(1, 0.0))


def test_half_life_first_and_second_order():
    # any physical-chemistry text: t1/2 = ln 2 / k (first order), 1 / (k c0) (second order)
    assert float(half_life_h(math.log10(math.log(2.0)), 1)) == pytest.approx(1.0)
    assert float(half_life_h(-2.0, 1)) == pytest.approx(69.3147, abs=1e-3)
    assert float(half_life_h(0.0, 2, 0.5)) == pytest.approx(2.0)
    with pytest.raises(SettingsError, match="rate order must be 1 or 2"):
        half_life_h(0.0, 3)


def test_fixed_counter_voltages_intervals_and_half_life():
    s = CellSettings(counter="potential", counter_potential_v=-2.0, concentration_mol_per_l=0.5)
    out = cell_metrics(_table(), s, REF).set_index(col.ID)
    # catholyte: V = E - E_counter; anolyte: V = E_counter - E
    assert out.loc["c1", col.CELL_VOLTAGE] == pytest.approx(2.80)
    assert out.loc["a1", col.CELL_VOLTAGE] == pytest.approx(-0.10)
    assert "not positive" in out.loc["a1", col.RANKING_NOTE]
    assert out.loc["c1", col.CELL_VOLTAGE_LOW] == pytest.approx(2.70)
    assert out.loc["a2", col.CELL_VOLTAGE] == pytest.approx(0.10)
    assert out.loc["a2", col.CELL_VOLTAGE_LOW] == pytest.approx(0.0, abs=1e-12)
    assert out.loc["a2", col.CELL_VOLTAGE_HIGH] == pytest.approx(0.20)
    # matched two-tank: u V Q / 2 with Q = n F c / 3600
    assert out.loc["c2", col.ENERGY_DENSITY] == pytest.approx(2.6 * 2 * 0.5 * AH_PER_MOL_ELECTRONS / 2)
    assert out.loc["c1", col.CAPACITY_GRAV] == pytest.approx(AH_PER_MOL_ELECTRONS * 1000 / 300.0)
    # half-life interval from the rate interval: the faster end gives the shorter life
    assert out.loc["c1", col.HALF_LIFE] == pytest.approx(math.log(2) / 1e-2)
    assert out.loc["c1", col.HALF_LIFE_LOW] == pytest.approx(math.log(2) / 10 ** -1.5)
    assert out.loc["c1", col.HALF_LIFE_HIGH] == pytest.approx(math.log(2) / 10 ** -2.5)
    assert out.loc["c2", col.EXTRAPOLATING] and not out.loc["c1", col.EXTRAPOLATING]
    assert set(out[col.POTENTIAL_BASIS]) == {"calibrated"}


def test_fixed_counter_capacity_two_tank():
    # two tanks holding equal charge: W = V Qc Qp / (Qc + Qp)
    s = CellSettings(counter="potential", counter_potential_v=-2.0, concentration_mol_per_l=1.0,
                     counter_capacity_ah_per_l=2 * AH_PER_MOL_ELECTRONS)
    out = cell_metrics(_table(), s, REF).set_index(col.ID)
    qc = AH_PER_MOL_ELECTRONS
    assert out.loc["c1", col.ENERGY_DENSITY] == pytest.approx(2.8 * qc * 2 * qc / (3 * qc))


def test_best_partner_pairs_across_roles():
    out = cell_metrics(_table(), CellSettings(), REF).set_index(col.ID)
    # catholytes pair with the lowest anolyte potential, anolytes with the highest catholyte
    assert out.loc["c1", col.PARTNER_ID] == "a2"
    assert out.loc["c1", col.CELL_VOLTAGE] == pytest.approx(2.90)
    assert out.loc["a1", col.PARTNER_ID] == "c1"
    assert out.loc["a1", col.CELL_VOLTAGE] == pytest.approx(2.70)
    # both electrodes' intervals combine in quadrature
    assert out.loc["c1", col.CELL_VOLTAGE_HIGH] - 2.90 == pytest.approx(math.hypot(0.1, 0.1))
    # energy with the partner's own capacity (c2 has 2 electrons, a2 one)
    q = 0.5 * AH_PER_MOL_ELECTRONS
    assert out.loc["c2", col.ENERGY_DENSITY] == pytest.approx(2.7 * (2 * q) * q / (3 * q))


def test_best_partner_without_partner_gives_note_not_error():
    t = _table().iloc[:2]
    out = cell_metrics(t, CellSettings(), REF)
    assert out[col.CELL_VOLTAGE].isna().all()
    assert "no anolyte among the candidates" in out.loc[0, col.RANKING_NOTE]


def test_solubility_caps_concentration():
    s = CellSettings(counter="potential", counter_potential_v=-2.0, concentration_mol_per_l=1.0,
                     solubility_mol_per_l=0.6)
    t = _table(**{col.SOLUBILITY: [np.nan, 0.2, 2.0, "bad"]})
    out = cell_metrics(t, s, REF).set_index(col.ID)
    assert out[col.CONCENTRATION].tolist() == pytest.approx([0.6, 0.2, 0.6, 0.6])
    assert out[col.CONCENTRATION_CAPPED].all()
    assert out.loc["c2", col.CAPACITY_VOL] == pytest.approx(2 * 0.2 * AH_PER_MOL_ELECTRONS)


def test_second_order_half_life_uses_operating_concentration():
    t = _table()
    t = t.rename(columns={
        col.LOG10_K_PRED_FIRST: col.LOG10_K_PRED_SECOND,
        col.LOG10_K_PRED_FIRST + col.PI_LOW_SUFFIX: col.LOG10_K_PRED_SECOND + col.PI_LOW_SUFFIX,
        col.LOG10_K_PRED_FIRST + col.PI_HIGH_SUFFIX: col.LOG10_K_PRED_SECOND + col.PI_HIGH_SUFFIX,
    })
    assert resolve_rate_order(t, None) == 2
    s = CellSettings(counter="potential", counter_potential_v=-2.0, concentration_mol_per_l=0.25)
    out = cell_metrics(t, s, REF).set_index(col.ID)
    assert out.loc["c1", col.HALF_LIFE] == pytest.approx(1.0 / (1e-2 * 0.25))
    assert (out[col.RATE_ORDER] == 2).all()
    with pytest.raises(SettingsError, match="set rate_order = 2"):
        cell_metrics(t, CellSettings(counter="potential", counter_potential_v=-2.0, rate_order=1), REF)


def test_bad_rows_do_not_stop_the_batch():
    t = _table(**{col.ROLE: ["catholyte", "solvent", "anolyte", "anolyte"],
                  col.N_ELECTRONS: [1, 1, 0, 1]})
    t.loc[3, col.potential_calibrated(REF)] = np.nan
    t.loc[3, col.LOG10_K_PRED_FIRST] = np.nan
    out = cell_metrics(t, CellSettings(counter="potential", counter_potential_v=-2.0), REF).set_index(col.ID)
    assert "role 'solvent'" in out.loc["c2", col.RANKING_NOTE]
    assert np.isnan(out.loc["c2", col.CELL_VOLTAGE])
    assert "n_electrons 0 is not a positive whole number" in out.loc["a1", col.RANKING_NOTE]
    assert "no potential" in out.loc["a2", col.RANKING_NOTE]
    assert "no measured, fitted or predicted rate" in out.loc["a2", col.RANKING_NOTE]
    assert out.loc["c1", col.RANKING_NOTE] == ""
    assert out.loc["c1", col.ENERGY_DENSITY] > 0


def test_missing_id_column_is_an_input_error():
    with pytest.raises(InputError, match="no 'id' column"):
        cell_metrics(_table().drop(columns=[col.ID]), CellSettings(), REF)


def test_settings_validation_messages():
    with pytest.raises(SettingsError, match="needs counter_potential_v"):
        section_from_mapping(CellSettings, {"counter": "potential"}, "cell")
    with pytest.raises(SettingsError, match="set counter = 'potential'"):
        section_from_mapping(CellSettings, {"counter_potential_v": 0.1}, "cell")
    with pytest.raises(SettingsError, match=r"\[cell\] tank_basis = 'three' is not allowed"):
        section_from_mapping(CellSettings, {"tank_basis": "three"}, "cell")
    with pytest.raises(SettingsError, match=r"\[cell\] unknown key 'voltage'"):
        section_from_mapping(CellSettings, {"voltage": 1.0}, "cell")
    with pytest.raises(SettingsError, match="utilisation = 1.5 must be <= 1.0"):
        section_from_mapping(CellSettings, {"utilisation": 1.5}, "cell")
    s = section_from_mapping(CellSettings, {"counter": "potential", "counter_potential_v": -1,
                                            "rate_order": 2, "tank_basis": "one-tank"}, "cell")
    assert s.counter_potential_v == -1.0 and s.rate_order == 2


def test_measured_candidates_are_ranked_on_their_measurements():
    """Issue 11: a measured potential and a measured or fitted rate win over the computed
    and predicted ones; the predictions stay in their own columns."""
    t = pd.DataFrame({
        col.ID: ["m", "f", "p"], col.ROLE: "catholyte", col.N_ELECTRONS: 1, col.MOLAR_MASS: 138.16,
        col.potential_uncalibrated(REF): [0.9, 0.9, 0.9],
        col.potential_calibrated(REF): [0.70, 0.70, 0.70],
        col.potential_calibrated_pi_low(REF): [0.6, 0.6, 0.6],
        col.potential_calibrated_pi_high(REF): [0.8, 0.8, 0.8],
        col.potential_measured(REF): [0.62, np.nan, np.nan],
        col.POTENTIAL_MEASURED_UNCERTAINTY: [0.01, np.nan, np.nan],
        col.LOG10_K_PRED_FIRST: [-2.0, -2.0, -2.0],
        col.LOG10_K_PRED_FIRST + col.PI_LOW_SUFFIX: [-2.5, -2.5, -2.5],
        col.LOG10_K_PRED_FIRST + col.PI_HIGH_SUFFIX: [-1.5, -1.5, -1.5],
        col.LOG10_K_FIRST: [-3.0, -2.8, np.nan],
        col.LOG10_K_FIRST + col.CI_LOW_SUFFIX: [np.nan, -2.9, np.nan],
        col.LOG10_K_FIRST + col.CI_HIGH_SUFFIX: [np.nan, -2.7, np.nan],
        col.RATE_SOURCE: ["measured", "fitted", ""],
    })
    out = cell_metrics(t, CellSettings(counter="potential", counter_potential_v=-1.0), REF).set_index(col.ID)
    assert list(out[col.POTENTIAL_BASIS]) == ["measured", "calibrated", "calibrated"]
    assert list(out[col.RATE_BASIS]) == ["measured", "fitted", "predicted"]
    assert out.loc["m", col.CELL_VOLTAGE] == pytest.approx(1.62)
    assert out.loc["m", col.CELL_VOLTAGE_LOW] == pytest.approx(1.61)
    # first order: t1/2 = ln 2 / k (any physical-chemistry text)
    assert out.loc["m", col.HALF_LIFE] == pytest.approx(math.log(2) / 1e-3)
    assert "measured rate without interval" in out.loc["m", col.RANKING_NOTE]
    assert out.loc["f", col.HALF_LIFE_LOW] == pytest.approx(math.log(2) / 10 ** -2.7)
    assert out.loc["p", col.HALF_LIFE] == pytest.approx(math.log(2) / 1e-2)
    assert out.loc["m", col.LOG10_K_PRED_FIRST] == pytest.approx(-2.0)  # prediction kept for residuals
