"""Tests of the campaign fit step and the fit command (invented campaigns only)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from redoxfront import columns
from redoxfront.campaign import load_campaign
from redoxfront.errors import DataError, SettingsError
from redoxfront.statistics.regression import load_model
from redoxfront.statistics.step import fit_campaign


# ---------------------------------------------------------- campaign end to end
def make_campaign(tmp_path: Path, model_toml: str = "", n: int = 16, with_set: bool = False,
                  measured: bool = True) -> Path:
    """An invented campaign: dimethoxybenzene-like ids, invented descriptors and rates."""
    rng = np.random.default_rng(42)
    res = tmp_path / "results"
    res.mkdir(parents=True)
    (tmp_path / "inputs").mkdir()
    ids = [f"dmb-{i:02d}" for i in range(n + 4)]
    raw = rng.uniform(0.2, 1.2, n + 4)
    b1 = rng.uniform(1.5, 3.5, n + 4)
    vbur = rng.uniform(20, 45, n + 4)
    status = ["ok"] * (n + 3) + ["failed: SCC did not converge"]
    table = pd.DataFrame({
        "id": ids, "status": status, columns.potential_uncalibrated("fc"): raw,
        "sterimol_b1_site1": b1, "buried_volume_percent_site1": vbur,
        "noise_descriptor": rng.normal(size=n + 4),
    })
    table.loc[n + 3, [columns.potential_uncalibrated("fc"), "sterimol_b1_site1"]] = np.nan
    table.to_csv(res / "descriptors.csv", index=False)
    e_cal = 0.05 + 0.9 * raw
    k = min(8, n + 3)
    if measured:
        pd.DataFrame({
            "id": ids[:k], "potential_v": e_cal[:k] + 0.40 + rng.normal(scale=0.01, size=k),
            "reference": "SCE", "solvent": "MeCN",
        }).to_csv(tmp_path / "inputs" / "potentials.csv", index=False)
    logk = -3.0 + 2.0 * e_cal - 0.8 * b1 + rng.normal(scale=0.05, size=n + 4)
    rates = pd.DataFrame({"id": ids[:n], columns.LOG10_K_FIRST: logk[:n]})
    if with_set:
        rates["set"] = ["train"] * (n - 4) + ["test"] * 4
    rates.to_csv(tmp_path / "inputs" / "rates.csv", index=False)
    inputs = '[inputs]\nmeasured_rates = "inputs/rates.csv"\n'
    if measured:
        inputs += 'measured_potentials = "inputs/potentials.csv"\n'
    (tmp_path / "campaign.toml").write_text(
        f'name = "invented demo"\n[compute]\nreference = "fc"\n{inputs}{model_toml}'
    )
    return tmp_path


def test_fit_campaign_default_terms_end_to_end(tmp_path):
    folder = make_campaign(tmp_path, model_toml="[model]\nn_permutations = 100\n", with_set=True)
    rep = fit_campaign(load_campaign(folder))
    assert rep.terms == (columns.potential_calibrated("fc"), "sterimol_b1_site1")
    assert rep.n_train == 12 and rep.n_test == 4
    assert rep.statistics["r2"] > 0.95 and rep.external["q2_ext_f1"] > 0.8
    # the invented data were made with d(log10 k)/dB1 = -0.8
    assert rep.coefficients.loc[2, "coefficient"] == pytest.approx(-0.8, abs=0.1)
    pred = pd.read_csv(rep.predictions_path)
    assert len(pred) == 20
    for c in (columns.LOG10_K_PRED_FIRST, columns.LOG10_K_PRED_FIRST + columns.PI_LOW_SUFFIX,
              columns.LOG10_K_PRED_FIRST + columns.PI_HIGH_SUFFIX, columns.LEVERAGE,
              columns.LEVERAGE_THRESHOLD, columns.DOMAIN, columns.STANDARDISED_RESIDUAL,
              columns.MODEL_SET):
        assert c in pred.columns
    assert set(pred[columns.DOMAIN]) <= {"inside", "extrapolating", "not predicted"}
    assert pred[columns.DOMAIN].iloc[-1] == "not predicted"
    assert pred[columns.MODEL_SET].value_counts().to_dict() == {"train": 12, "test": 4}
    assert pred[columns.STANDARDISED_RESIDUAL].notna().sum() == 12
    m = load_model(rep.model_path)
    X = pred.loc[:18, list(rep.terms)]
    np.testing.assert_allclose(m.predict(X), pred.loc[:18, columns.LOG10_K_PRED_FIRST], rtol=1e-12)
    assert {p.name for p in rep.figures} == {"williams.svg", "observed_vs_predicted.svg", "y_randomisation.svg"}
    assert "fitted on 12 rows" in rep.text()


def test_fit_campaign_search_and_kennard_stone_split(tmp_path):
    folder = make_campaign(
        tmp_path, n=16, measured=False,
        model_toml='[model]\nsearch = true\nmax_terms = 2\nsplit = "kennard-stone"\n'
                   "test_fraction = 0.25\nsearch_scrambled = 10\n",
    )
    rep = fit_campaign(load_campaign(folder))
    assert set(rep.terms) == {columns.potential_uncalibrated("fc"), "sterimol_b1_site1"}
    assert rep.search["n_models_tried"] == 4 + 6  # pool of 4 descriptors, 1..2 terms
    assert rep.n_train == 12 and rep.n_test == 4
    # rows held out for the external test did not train the model and are not counted as if they had
    assert rep.rate_sources == {"measured": 12, "fitted": 0, "held out as test set": 4}
    assert any("uncalibrated potential" in n for n in rep.notes)


def test_fit_campaign_degenerate_and_settings_errors(tmp_path):
    folder = make_campaign(tmp_path / "a", n=3)
    with pytest.raises(DataError, match="need at least 4"):
        fit_campaign(load_campaign(folder))
    folder = make_campaign(tmp_path / "b", model_toml="[model]\nn_permutations = 10\n")
    with pytest.raises(SettingsError, match=r"\[model\] n_permutations = 10 must be >= 100"):
        fit_campaign(load_campaign(folder))
    folder = make_campaign(tmp_path / "c", model_toml='[model]\nterms = ["potential", "nope"]\n')
    with pytest.raises(DataError, match="nope"):
        fit_campaign(load_campaign(folder))


def test_cli_fit_prints_summary_and_errors(tmp_path):
    from click.testing import CliRunner

    from redoxfront.cli import main

    folder = make_campaign(tmp_path / "ok", model_toml="[model]\nn_permutations = 100\n")
    r = CliRunner().invoke(main, ["fit", str(folder)])
    assert r.exit_code == 0, r.output
    assert "fitted on 16 rows" in r.output and "y-randomisation (100)" in r.output
    bad = make_campaign(tmp_path / "bad", n=2)
    r = CliRunner().invoke(main, ["fit", str(bad)])
    assert r.exit_code == 2 and "error: 2 training rows" in r.output and "Traceback" not in r.output


def test_fitted_and_measured_rates_both_train_the_model_measured_wins(tmp_path):
    """Issue 11: rates fitted from cycling files train the model next to the measured file;
    every rate says where it came from; the measured value wins for a candidate with both."""
    folder = make_campaign(tmp_path, model_toml="[model]\nn_permutations = 100\n", n=12)
    measured = pd.read_csv(folder / "inputs" / "rates.csv")
    # invented fitted rates (as the fade step writes them): two new candidates, one overlap
    # that agrees (dmb-00) and one that disagrees with its measured value (dmb-01)
    m0, m1 = measured.loc[0, columns.LOG10_K_FIRST], measured.loc[1, columns.LOG10_K_FIRST]
    fitted = pd.DataFrame({
        "id": ["dmb-12", "dmb-13", "dmb-00", "dmb-01"], "status": "ok",
        columns.LOG10_K_FIRST: [-2.0, -2.5, m0 + 0.01, m1 + 1.0],
        columns.LOG10_K_FIRST + columns.CI_LOW_SUFFIX: [-2.1, -2.6, m0 - 0.05, m1 + 0.9],
        columns.LOG10_K_FIRST + columns.CI_HIGH_SUFFIX: [-1.9, -2.4, m0 + 0.05, m1 + 1.1],
        columns.SOURCE_FILE: ["inputs/cycling/dmb-12.csv", "inputs/cycling/dmb-13.tsv",
                              "inputs/cycling/dmb-00.csv", "inputs/cycling/dmb-01.csv"],
    })
    fitted.to_csv(folder / "results" / "rates.csv", index=False)
    rep = fit_campaign(load_campaign(folder))
    # 12 measured + 2 fitted-only candidates train the model (common practice, no source)
    assert rep.n_train == 14
    assert rep.rate_sources == {"measured": 12, "fitted": 2}
    pred = pd.read_csv(rep.predictions_path, dtype={"id": str}).set_index("id")
    assert pred.loc["dmb-12", columns.RATE_SOURCE] == "fitted"
    assert pred.loc["dmb-12", columns.RATE_SOURCE_DETAIL] == "fitted from dmb-12.csv (95 % CI -2.100 to -1.900)"
    assert pred.loc["dmb-00", columns.RATE_SOURCE] == "measured"
    assert pred.loc["dmb-00", columns.RATE_SOURCE_DETAIL] == "measured: rates.csv row 2"
    assert pred.loc["dmb-01", columns.LOG10_K_FIRST] == pytest.approx(m1)
    assert "outside the 95 % interval" in pred.loc["dmb-01", columns.RATE_NOTE]
    assert "outside the 95 % interval" not in str(pred.loc["dmb-00", columns.RATE_NOTE])
    assert any("disagree" in n and "dmb-01" in n for n in rep.notes)
    assert "rates: measured 12, fitted 2" in rep.text()
    assert rep.rate_overrides == (2, 1)  # dmb-00 and dmb-01 have both; dmb-01 disagrees
    import json
    model = json.loads(rep.model_path.read_text())
    assert model["context"]["rate_sources"]["counts"] == {"measured": 12, "fitted": 2}


def test_an_infinite_rate_is_left_out_like_a_missing_one(tmp_path):
    # k = 0 gives log10 k = -inf and an overflow gives +inf: neither is a value to fit
    # (IEEE 754: inf is not a finite number; common practice, no source)
    folder = make_campaign(tmp_path, model_toml="[model]\nn_permutations = 100\n", n=12)
    rates = pd.read_csv(folder / "inputs" / "rates.csv", dtype={"id": str})
    rates[columns.LOG10_K_FIRST] = rates[columns.LOG10_K_FIRST].astype(object)
    rates.loc[0, columns.LOG10_K_FIRST] = "inf"
    rates.loc[1, columns.LOG10_K_FIRST] = "-inf"
    rates.loc[2, columns.LOG10_K_FIRST] = "NaN"
    rates.to_csv(folder / "inputs" / "rates.csv", index=False)
    rep = fit_campaign(load_campaign(folder))
    assert rep.n_train == 9 and np.isfinite(rep.statistics["r2"])
    assert any("infinite, left out like missing ones: dmb-00, dmb-01" in n for n in rep.notes)
    assert any("without a value, left out: dmb-02" in n for n in rep.notes)


def test_a_model_with_one_residual_degree_of_freedom_warns_in_every_output(tmp_path):
    # 4 rates for 2 terms + intercept: n - p - 1 = 1 (common practice, no source)
    folder = make_campaign(tmp_path, model_toml="[model]\nn_permutations = 100\nkfold = 2\n", n=4)
    rep = fit_campaign(load_campaign(folder))
    assert rep.n_train == 4
    text = rep.text()
    assert text.startswith("WARNING: 4 rows for 2 term(s) + intercept leave one residual degree of freedom")
    import json

    model = json.loads(rep.model_path.read_text())
    assert model["context"]["warnings"] == [text.splitlines()[0]]
    pred = pd.read_csv(rep.predictions_path, keep_default_na=False)
    assert (pred[columns.MODEL_WARNING] == text.splitlines()[0]).all()
    from redoxfront.report import write_report

    html = write_report(load_campaign(folder)).read_text()
    assert '<p class="warn" role="alert"><b>WARNING: 4 rows for 2 term(s)' in html
    # one more row: two degrees of freedom, no warning anywhere
    folder5 = make_campaign(tmp_path / "five", model_toml="[model]\nn_permutations = 100\nkfold = 2\n", n=5)
    rep5 = fit_campaign(load_campaign(folder5))
    assert "WARNING" not in rep5.text()
    assert (pd.read_csv(rep5.predictions_path, keep_default_na=False)[columns.MODEL_WARNING] == "").all()


def test_one_measured_potential_the_fit_goes_on_uncalibrated(tmp_path):
    # a line needs three points (common practice, no source): with one, the model uses the
    # uncalibrated potential and says so instead of stopping
    folder = make_campaign(tmp_path, model_toml="[model]\nn_permutations = 100\n")
    pot = pd.read_csv(folder / "inputs" / "potentials.csv").head(1)
    pot.to_csv(folder / "inputs" / "potentials.csv", index=False)
    rep = fit_campaign(load_campaign(folder))
    assert rep.terms[0] == columns.potential_uncalibrated("fc") and rep.n_train == 16
    assert any("only 1 usable measured potential(s)" in n for n in rep.notes)
    assert any("the model uses the uncalibrated potential" in n for n in rep.notes)
