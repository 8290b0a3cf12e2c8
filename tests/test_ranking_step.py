"""The campaign rank step: settings, tables, figures and the rank command (small invented tables only)."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from redoxfront import columns as col
from redoxfront.campaign import section_from_mapping
from redoxfront.errors import SettingsError
from redoxfront.ranking import step as R


def test_ranking_settings_validation():
    s = section_from_mapping(R.RankingSettings, {"objectives": ["energy_density", "half_life", "molar_mass"]},
                             "ranking")
    assert s.objectives == ("energy_density", "half_life", "molar_mass")
    with pytest.raises(SettingsError, match="keep one of them"):
        section_from_mapping(R.RankingSettings, {"objectives": ["cell_voltage", "energy_density"]}, "ranking")
    with pytest.raises(SettingsError, match="unknown 'cost'"):
        section_from_mapping(R.RankingSettings, {"objectives": ["cost"]}, "ranking")
    with pytest.raises(SettingsError, match=r"\[ranking\] n_draws = 0 must be >= 1"):
        section_from_mapping(R.RankingSettings, {"n_draws": 0}, "ranking")


def _campaign(tmp_path, n=40, ranking="", cell='counter = "potential"\ncounter_potential_v = -2.0\n'):
    rng = np.random.default_rng(0)
    e = rng.normal(0.7, 0.2, n)
    lk = -2 + 1.5 * (e - 0.7) + rng.normal(0, 0.4, n)
    t = pd.DataFrame({
        col.ID: [f"inv{i:02d}" for i in range(n)], col.ROLE: "catholyte", col.N_ELECTRONS: 1,
        col.MOLAR_MASS: rng.uniform(180, 500, n).round(1),
        col.potential_calibrated("fc"): e, col.potential_calibrated_pi_low("fc"): e - 0.1,
        col.potential_calibrated_pi_high("fc"): e + 0.1,
        col.LOG10_K_PRED_FIRST: lk, col.LOG10_K_PRED_FIRST + col.PI_LOW_SUFFIX: lk - 0.5,
        col.LOG10_K_PRED_FIRST + col.PI_HIGH_SUFFIX: lk + 0.5,
        col.DOMAIN: ["extrapolating" if i % 5 == 0 else "inside" for i in range(n)],
    })
    t.loc[1, col.LOG10_K_PRED_FIRST] = np.nan
    (tmp_path / "results").mkdir()
    t.to_csv(tmp_path / "results" / "predictions.csv", index=False)
    pd.DataFrame({col.ID: ["inv02", "inv03"], col.LOG10_K_FIRST: [-2.0, -2.1]}).to_csv(
        tmp_path / "rates.csv", index=False)
    (tmp_path / "campaign.toml").write_text(
        'name = "invented"\n[inputs]\nmeasured_rates = "rates.csv"\n'
        f"[cell]\n{cell}[ranking]\nn_draws = 300\nn_suggestions = 3\n{ranking}", encoding="utf-8")
    return t


def test_rank_campaign_writes_tables_and_figures(tmp_path):
    from redoxfront.campaign import load_campaign

    _campaign(tmp_path)
    out = R.rank_campaign(load_campaign(tmp_path), progress=False)
    res = tmp_path / "results"
    ranking = pd.read_csv(res / "ranking.csv")
    picks = pd.read_csv(res / "picks.csv")
    summary = json.loads((res / "ranking_summary.json").read_text())
    assert len(ranking) == 40 == len(out)
    for c in (col.CELL_VOLTAGE, col.CAPACITY_VOL, col.CAPACITY_GRAV, col.ENERGY_DENSITY, col.HALF_LIFE,
              col.PARETO_RANK, col.P_FRONT, col.CROWDING, col.KNEE, col.EXTRAPOLATING):
        assert c in ranking.columns
    assert ranking[col.PARETO_RANK].iloc[0] == 1
    assert ranking[col.KNEE].sum() == 1 and summary["knee_id"] == ranking.loc[ranking[col.KNEE], col.ID].iloc[0]
    unranked = ranking[ranking[col.ID] == "inv01"].iloc[0]
    assert pd.isna(unranked[col.PARETO_RANK]) and "not ranked: no value for half_life" in unranked[col.RANKING_NOTE]
    assert len(picks) == 3 and not set(picks[col.ID]) & {"inv02", "inv03"}
    assert list(picks[col.PICK_ORDER]) == [1, 2, 3]
    assert col.EXTRAPOLATING in picks.columns
    # probability 1 only on the first front; ranks > 1 below 1
    ranked = ranking[ranking[col.PARETO_RANK].notna()]
    assert ranked.loc[ranked[col.PARETO_RANK] > 1, col.P_FRONT].max() < 1.0
    assert 0.0 < summary["hypervolume_fraction"] < 1.0
    assert summary["n_ranked"] == 39
    front = (res / "figures" / "front.svg").read_text(encoding="utf-8")
    assert "half-life of charged species (h)" in front and "probability on first front" in front
    assert not (res / "figures" / "objectives_pairwise.svg").exists()  # two objectives: one pair, the front


def test_rank_command(tmp_path):
    from redoxfront.cli import main

    _campaign(tmp_path, ranking='objectives = ["energy_density", "half_life", "molar_mass"]\n')
    result = CliRunner().invoke(main, ["rank", str(tmp_path), "--quiet"])
    assert result.exit_code == 0, result.output
    assert "first front" in result.output and "picks.csv" in result.output
    for name in ("front.svg", "objectives_pairwise.svg"):  # drawn by the process forked at the start
        assert (tmp_path / "results" / "figures" / name).read_text().lstrip().startswith(("<?xml", "<svg"))
    bad = tmp_path / "bad"
    bad.mkdir()
    _campaign(bad, cell='counter = "potential"\n')
    result = CliRunner().invoke(main, ["rank", str(bad)])
    assert result.exit_code == 2
    assert "needs counter_potential_v" in result.output


def test_knee_label_offset_stays_inside_the_axes():
    import matplotlib.pyplot as plt

    from redoxfront.ranking.figures import _label_offset

    fig, ax = plt.subplots()
    ax.plot([0.0, 10.0], [0.0, 10.0])
    ax.set_xlim(0, 10)
    ax.set_ylim(0, 10)
    # common practice, no source: label on the side facing the middle of the axes
    assert _label_offset(ax, 9.5, 5.0) == (-14, 18, "right", "bottom")
    assert _label_offset(ax, 1.0, 9.5) == (12, -18, "left", "top")
    plt.close(fig)


def test_best_partner_with_one_role_stops_with_the_reason_and_setting(tmp_path):
    """Issue 11: best-partner pairing with catholytes only ranked nothing and exited 0."""
    from redoxfront.campaign import load_campaign
    from redoxfront.cli import main

    _campaign(tmp_path, cell='counter = "best-partner"\n')
    with pytest.raises(SettingsError, match=r"every candidate is a catholyte \(no anolyte to pair with\).*"
                                            r"set \[cell\] counter = 'potential' and counter_potential_v"):
        R.rank_campaign(load_campaign(tmp_path), progress=False)
    res = CliRunner().invoke(main, ["rank", str(tmp_path)])
    assert res.exit_code != 0  # common practice, no source: a failed command exits non-zero
    assert "counter = 'potential'" in res.output and "Traceback" not in res.output
