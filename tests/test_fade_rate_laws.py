"""Fade and decay-kinetics fitting: recovery of k, CI coverage, half-lives, rate table, command."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from click.testing import CliRunner

from redoxfront import columns
from redoxfront.cli import main
from redoxfront.columns import RATE_TABLE_COLUMNS
from redoxfront.errors import DataError, SettingsError
from redoxfront.fade.rate_laws import (
    MODELS,
    FadeModel,
    aicc,
    choose_model,
    first_order_k_from_retention,
    retention_percent_per_day,
)
from redoxfront.fade.step import (
    FadeSettings,
    fade_settings,
    fit_fade_file,
    fit_fade_folder,
)

EXAMPLES = Path(__file__).resolve().parents[1] / "examples" / "dimethoxybenzene-catholytes"


def law(model: str, t: np.ndarray, y0: float, k: float, y_inf: float = 0.0) -> np.ndarray:
    """Analytic integrated rate laws (Atkins, Physical Chemistry, ch. on reaction kinetics)."""
    if model == "linear":
        return y0 * (1.0 - k * t)
    if model == "first_order":
        return y0 * np.exp(-k * t)
    if model == "first_order_plateau":
        return y_inf + (y0 - y_inf) * np.exp(-k * t)
    return y0 / (1.0 + k * t)


def per_cycle_file(path: Path, t_h: np.ndarray, q: np.ndarray) -> Path:
    pd.DataFrame({"cycle": np.arange(1, len(t_h) + 1), "time (h)": t_h,
                  "discharge capacity (mAh)": q,
                  "charge capacity (mAh)": q / 0.99}).to_csv(path, index=False)
    return path


@pytest.mark.parametrize("model,k,y_inf", [
    ("linear", 1e-3, 0.0), ("first_order", 5e-3, 0.0),
    ("first_order_plateau", 2e-2, 40.0), ("second_order", 1e-2, 0.0),
])
def test_known_k_recovered_within_ci(model: str, k: float, y_inf: float) -> None:
    # synthetic data from the analytic rate law (Atkins, Physical Chemistry) with 0.3 % noise
    rng = np.random.default_rng(7)
    t = np.linspace(0.0, 300.0, 60)
    y = law(model, t, 100.0, k, y_inf) + rng.normal(0.0, 0.3, t.size)
    fit = FadeModel(model).fit(t, y)
    lo, hi = fit.k_ci_
    assert lo <= k <= hi
    assert hi - lo < 0.2 * k
    assert fit.params_["y0"] == pytest.approx(100.0, rel=0.01)
    # AICc picks the generating law; only the plateau model, which nests first order, may
    # tie or beat first-order data by chance. Laws that cannot describe the data are far off
    # (Burnham & Anderson 2002: delta AICc > 10 means essentially no support)
    mc = choose_model(t, y)
    tab = mc.table().set_index("model")
    nests = {"first_order": {"first_order_plateau"}}.get(model, set())
    assert mc.chosen in {model} | nests
    others = [m for m in MODELS if m != model and m not in nests]
    assert (tab.loc[others, "delta_aicc"] > 10.0).all()
    lo, hi = tab.loc[model, ["k_fade_per_h_ci95_low", "k_fade_per_h_ci95_high"]]
    assert (lo, hi) == pytest.approx(fit.k_ci_)
    assert set(tab.index) == set(MODELS)
    assert tab["akaike_weight"].sum() == pytest.approx(1.0)


def test_ci_coverage_close_to_nominal() -> None:
    # common practice, no source: a 95 % t-interval from the covariance of a correctly specified
    # non-linear least-squares fit covers the true value in about 95 % of repeats
    t = np.linspace(0.0, 100.0, 12)
    k = 0.01
    hits = 0
    for seed in range(200):
        rng = np.random.default_rng(seed)
        y = np.exp(-k * t) + rng.normal(0.0, 0.01, t.size)
        lo, hi = FadeModel("first_order").fit(t, y).k_ci_
        hits += lo <= k <= hi
    assert 0.90 <= hits / 200 <= 0.99


def test_bootstrap_is_seeded_and_covers_k() -> None:
    rng = np.random.default_rng(3)
    t = np.linspace(0.0, 200.0, 30)
    y = 50.0 * np.exp(-4e-3 * t) + rng.normal(0.0, 0.2, t.size)
    a = FadeModel("first_order", bootstrap=200, seed=11).fit(t, y)
    b = FadeModel("first_order", bootstrap=200, seed=11).fit(t, y)
    c = FadeModel("first_order", bootstrap=200, seed=12).fit(t, y)
    cov = FadeModel("first_order").fit(t, y)
    assert a.k_ci_ == b.k_ci_
    assert a.k_ci_ != c.k_ci_
    assert a.ci_method_ == "bootstrap (200 refits)"
    assert a.k_ci_[0] <= 4e-3 <= a.k_ci_[1]
    # percentile-bootstrap and covariance intervals agree within 25 % in width here
    assert (a.k_ci_[1] - a.k_ci_[0]) == pytest.approx(cov.k_ci_[1] - cov.k_ci_[0], rel=0.25)


def test_linear_fit_matches_statsmodels_ols() -> None:
    # cross-check against statsmodels OLS: y = y0 (1 - k t) is the straight line y0 - (y0 k) t
    rng = np.random.default_rng(5)
    t = np.linspace(0.0, 50.0, 15)
    y = 10.0 - 0.02 * t + rng.normal(0.0, 0.05, t.size)
    fit = FadeModel("linear").fit(t, y)
    ols = sm.OLS(y, sm.add_constant(t)).fit()
    assert fit.params_["y0"] == pytest.approx(ols.params[0], rel=1e-7)
    assert fit.params_["y0"] * fit.params_["k"] == pytest.approx(-ols.params[1], rel=1e-6)
    assert fit.stderr_["y0"] == pytest.approx(ols.bse[0], rel=1e-4)
    assert fit.rss_ == pytest.approx(ols.ssr, rel=1e-9)
    # statsmodels: aic = -2 llf + 2 p; ours counts the variance too: K = p + 1
    # (Burnham & Anderson 2002: AIC = n ln(RSS/n) + 2K, AICc adds 2K(K+1)/(n-K-1))
    n = len(t)
    ours = ols.aic - n * (1.0 + math.log(2.0 * math.pi)) + 2.0 + 2 * 3 * 4 / (n - 3 - 1)
    assert fit.aicc_ == pytest.approx(ours, rel=1e-9)
    assert aicc(1.0, 4, 2) == math.inf


def test_half_life_relations() -> None:
    # Atkins, Physical Chemistry: t1/2 = ln2/k (first order), 1/(k c0) (second order)
    t = np.linspace(0.0, 100.0, 20)
    first = FadeModel("first_order").fit(t, 2.0 * np.exp(-0.03 * t))
    assert first.time_to_fraction(0.5) == pytest.approx(math.log(2) / 0.03, rel=1e-6)
    assert first.law.half_life_from_k(0.03) == pytest.approx(23.104906, rel=1e-6)
    # time to 80 %: exp(-k t) = 0.8 -> t = ln(1.25)/k (follows from the first-order law)
    assert first.time_to_fraction(0.8) == pytest.approx(math.log(1.25) / 0.03, rel=1e-6)
    k2, c0 = 0.5, 0.1  # L/(mol h), mol/L
    second = FadeModel("second_order").fit(t, c0 / (1.0 + k2 * c0 * t))
    assert second.params_["k"] == pytest.approx(k2 * c0, rel=1e-6)
    assert second.time_to_fraction(0.5) == pytest.approx(1.0 / (k2 * c0), rel=1e-6)


def test_second_order_decay_file_gives_k_in_l_per_mol_per_h(tmp_path: Path) -> None:
    # Atkins, Physical Chemistry: 1/c = 1/c0 + k2 t; t1/2 = 1/(k2 c0)
    k2, c0 = 0.5, 0.1
    rng = np.random.default_rng(2)
    t = np.linspace(0.0, 60.0, 25)
    c = c0 / (1.0 + k2 * c0 * t) * (1.0 + rng.normal(0.0, 0.003, t.size))
    path = tmp_path / "dmb-09.csv"
    pd.DataFrame({"time (h)": t, "concentration (mM)": 1000.0 * c}).to_csv(path, index=False)
    res = fit_fade_file(path, FadeSettings(rate_order="second"))
    row = res.row
    assert row["model"] == "second_order"
    assert row["cell_type"] == "decay" and row["mean_state_of_charge"] == 1.0
    assert row["k_l_per_mol_per_h_ci95_low"] <= k2 <= row["k_l_per_mol_per_h_ci95_high"]
    assert row[columns.LOG10_K_SECOND] == pytest.approx(math.log10(k2), abs=0.02)
    assert row[columns.HALF_LIFE] == pytest.approx(1.0 / (k2 * c0), rel=0.03)


def test_beh_retention_per_day_to_first_order_k(tmp_path: Path) -> None:
    # Beh et al., ACS Energy Lett. 2017, 2, 639 (page from memory): 99.967 %/day retention;
    # common practice, no source: first-order k = -ln(0.99967) / 1 day
    k = -math.log(0.99967) / 24.0
    assert first_order_k_from_retention(0.99967, 24.0) == pytest.approx(k, rel=1e-12)
    assert k == pytest.approx(1.37523e-5, rel=1e-4)
    assert retention_percent_per_day(k) == pytest.approx(99.967, abs=1e-9)
    with pytest.raises(DataError):
        first_order_k_from_retention(1.2, 24.0)
    # a simulated 8-day symmetric-cell run at that fade is read back as 0.033 %/day
    rng = np.random.default_rng(4)
    t = np.arange(1, 97) * 2.0
    q = 20.0 * np.exp(-k * t) * (1.0 + rng.normal(0.0, 2e-5, t.size))
    res = fit_fade_file(per_cycle_file(tmp_path / "beh.csv", t, q),
                        FadeSettings(models=("first_order",)))
    assert res.row["fade_percent_per_day"] == pytest.approx(0.033, abs=0.002)
    assert res.row["k_fade_per_h_ci95_low"] <= k <= res.row["k_fade_per_h_ci95_high"]
    # per cycle of 2 h: 1 - exp(-2 k)
    assert res.row["fade_percent_per_cycle"] == pytest.approx(100 * (1 - math.exp(-2 * k)), rel=0.1)


def test_state_of_charge_conversion_and_cell_label(tmp_path: Path) -> None:
    t = np.arange(1, 41) * 3.0
    q = 20.0 * np.exp(-2e-3 * t)
    path = per_cycle_file(tmp_path / "full.csv", t, q)
    full = fit_fade_file(path, FadeSettings(cell_type="full", mean_state_of_charge=0.4,
                                            models=("first_order",))).row
    # docs/fade.md: k_dec = k_fade / s for first-order decay of the charged species only
    assert full["k_fade_per_h"] == pytest.approx(2e-3, rel=1e-6)
    assert full["k_per_h"] == pytest.approx(2e-3 / 0.4, rel=1e-6)
    assert full[columns.LOG10_K_FIRST] == pytest.approx(math.log10(5e-3), abs=1e-6)
    assert full["cell_type"] == "full"
    assert full[columns.HALF_LIFE] == pytest.approx(math.log(2) / 5e-3, rel=1e-6)
    assert full["capacity_half_life_h"] == pytest.approx(math.log(2) / 2e-3, rel=1e-6)


def test_robust_loss_resists_outlier_cycles() -> None:
    rng = np.random.default_rng(9)
    t = np.linspace(0.0, 200.0, 40)
    y = 10.0 * np.exp(-5e-3 * t) + rng.normal(0.0, 0.02, t.size)
    y[[5, 6, 30]] += np.array([1.5, 1.2, 1.4])
    plain = FadeModel("first_order").fit(t, y).params_["k"]
    robust = FadeModel("first_order", robust=True).fit(t, y).params_["k"]
    assert abs(robust - 5e-3) < abs(plain - 5e-3)
    assert robust == pytest.approx(5e-3, rel=0.03)


def test_too_few_points_error_names_file_and_counts(tmp_path: Path) -> None:
    path = per_cycle_file(tmp_path / "short.csv", np.array([1.0, 2.0, 3.0]),
                          np.array([10.0, 9.9, 9.8]))
    with pytest.raises(DataError, match=r"short.csv: 3 usable points, at least 5 needed"):
        fit_fade_file(path)


def test_settings_validation() -> None:
    s = fade_settings({"models": ["first_order"], "bootstrap": 50, "cell_type": "full",
                       "column_map": {"time": "Zeit (s)"}})
    assert s.models == ("first_order",) and s.bootstrap == 50
    with pytest.raises(SettingsError, match=r"models: 'cubic' is not a model"):
        fade_settings({"models": ["cubic"]})
    with pytest.raises(SettingsError, match=r"\[fade\] unknown key 'colum_map'"):
        fade_settings({"colum_map": {}})
    with pytest.raises(SettingsError, match=r"column_map key 'zeit' is not a role"):
        fade_settings({"column_map": {"zeit": "Zeit"}})
    with pytest.raises(SettingsError, match=r"mean_state_of_charge = 1.5 must be <= 1.0"):
        fade_settings({"mean_state_of_charge": 1.5})
    with pytest.raises(SettingsError, match=r"cell_type = 'half'"):
        fade_settings({"cell_type": "half"})


def test_folder_run_on_invented_examples_recovers_their_k(tmp_path: Path) -> None:
    folder = EXAMPLES / "inputs" / "cycling"
    (tmp_path / "in").mkdir()
    for f in folder.iterdir():
        (tmp_path / "in" / f.name).write_bytes(f.read_bytes())
    (tmp_path / "in" / "broken.csv").write_text("a,b\n1,2\n", encoding="utf-8")
    rates = fit_fade_folder(tmp_path / "in", FadeSettings(), tmp_path / "out", progress=False)
    assert list(rates.columns) == list(RATE_TABLE_COLUMNS)
    assert rates[columns.ID].tolist() == ["broken", "dmb-04", "dmb-11", "dmb-17"]
    assert rates.loc[0, "status"].startswith("error: ") and "column_map" in rates.loc[0, "status"]
    ok = rates.set_index(columns.ID).loc[["dmb-04", "dmb-11", "dmb-17"]]
    # invented truths written in examples/.../inputs/cycling/README.md
    truth = {"dmb-04": 1.2e-3, "dmb-11": 1e-2, "dmb-17": 2e-2}
    for did, k in truth.items():
        assert ok.loc[did, "k_fade_per_h_ci95_low"] <= k <= ok.loc[did, "k_fade_per_h_ci95_high"]
    assert ok.loc["dmb-11", "model"] == "first_order_plateau"
    assert ok.loc["dmb-04", "k_per_h"] == pytest.approx(2 * ok.loc["dmb-04", "k_fade_per_h"])
    assert ok.loc["dmb-17", "data_kind"] == "decay"
    out = tmp_path / "out"
    back = pd.read_csv(out / "rates.csv")
    assert back[columns.LOG10_K_FIRST].notna().sum() == 3
    fig = (out / "figures" / "fade_dmb-11.svg").read_text(encoding="utf-8")
    assert "<svg" in fig and "dmb-11: k = " in fig  # SVG by default, text kept as text
    models = pd.read_csv(out / "fade_models.csv")
    assert models.shape[0] == 12 and models["chosen"].sum() == 3
    report = (out / "fade_report.md").read_text(encoding="utf-8")
    assert "cycle counter fell back at data row 36" in report
    assert "broken.csv" in report and "not fitted" in report


def test_fade_command(tmp_path: Path) -> None:
    camp = tmp_path / "camp"
    (camp / "inputs" / "cycling").mkdir(parents=True)
    t = np.arange(1, 31) * 2.0
    per_cycle_file(camp / "inputs" / "cycling" / "dmb-05.csv", t, 15.0 * np.exp(-3e-3 * t))
    (camp / "campaign.toml").write_text(
        'name = "t"\n[inputs]\ncycling = "inputs/cycling"\n[fade]\nmodels = ["first_order"]\n'
        "figures = false\n", encoding="utf-8")
    res = CliRunner().invoke(main, ["fade", str(camp), "--quiet"])
    assert res.exit_code == 0, res.output
    assert "1 datasets fitted, 0 failed" in res.output
    rates = pd.read_csv(camp / "results" / "rates.csv")
    assert rates.loc[0, "k_fade_per_h"] == pytest.approx(3e-3, rel=1e-6)
    (camp / "campaign.toml").write_text('name = "t"\n[fade]\nbootstrap = -1\n', encoding="utf-8")
    res = CliRunner().invoke(main, ["fade", str(camp)])
    assert res.exit_code == 2
    assert "[fade] bootstrap = -1 must be >= 0" in res.output
    (camp / "campaign.toml").write_text('name = "t"\n', encoding="utf-8")
    res = CliRunner().invoke(main, ["fade", str(camp)])
    assert res.exit_code == 2 and "pass --input FILE_OR_FOLDER" in res.output
