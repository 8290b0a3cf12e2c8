"""Tests of the OLS estimator and its validation statistics."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.datasets import longley
from statsmodels.stats.outliers_influence import variance_inflation_factor

from redoxfront.errors import DataError
from redoxfront.statistics.regression import OLSModel, load_model

# ---------------------------------------------------------------- NIST Longley
# NIST StRD, Longley (1967) dataset, certified values (from memory: NIST StRD
# Linear Regression, "Longley" certified values page, 15 significant digits).
LONGLEY_COEF = [
    -3482258.63459582, 15.0618722713733, -0.358191792925910e-01, -2.02022980381683,
    -1.03322686717359, -0.511041056535807e-01, 1829.15146461355,
]
LONGLEY_SE = [
    890420.383607373, 84.9149257747669, 0.334910077722432e-01, 0.488399681651699,
    0.214274163161675, 0.226073200069370, 455.478499142212,
]
LONGLEY_RESID_SD = 304.854073561965
LONGLEY_R2 = 0.995479004577296


def test_longley_certified_values_to_seven_digits():
    d = longley.load_pandas()
    m = OLSModel(n_permutations=0).fit(d.exog, d.endog)
    # NIST StRD Longley certified values (from memory): >= 7 significant digits
    np.testing.assert_allclose(m.coef_, LONGLEY_COEF, rtol=1e-7, atol=0)
    np.testing.assert_allclose(m.se_, LONGLEY_SE, rtol=1e-7, atol=0)
    assert m.residual_standard_error_ == pytest.approx(LONGLEY_RESID_SD, rel=1e-7)
    assert m.r2_ == pytest.approx(LONGLEY_R2, rel=1e-9)
    # our precision is well beyond the 7 digits required: 9 digits on every estimate and SE
    np.testing.assert_allclose(m.coef_, LONGLEY_COEF, rtol=1e-9, atol=0)
    np.testing.assert_allclose(m.se_, LONGLEY_SE, rtol=1e-9, atol=0)


# ------------------------------------------------------- statsmodels cross-check
@pytest.fixture(scope="module")
def random_fit():
    rng = np.random.default_rng(7)
    n = 25
    X = rng.normal(size=(n, 3)) * [1.0, 5.0, 0.2] + [0.0, 2.0, -1.0]
    X[:, 2] += 0.3 * X[:, 0]
    y = 0.4 + X @ [1.5, -0.2, 3.0] + rng.normal(scale=0.5, size=n)
    m = OLSModel(kfold=5, n_permutations=150, seed=3).fit(X, y)
    ref = sm.OLS(y, sm.add_constant(X)).fit()
    Xnew = rng.normal(size=(6, 3)) * 3.0
    return X, y, m, ref, Xnew


def test_coefficients_se_and_stats_equal_statsmodels(random_fit):
    X, y, m, ref, _ = random_fit
    # statsmodels OLS (reference library): identical estimates to 1e-8
    np.testing.assert_allclose(m.coef_, ref.params, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(m.se_, ref.bse, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(m.p_values_, ref.pvalues, rtol=1e-8, atol=1e-12)
    np.testing.assert_allclose(m.t_, ref.tvalues, rtol=1e-8)
    assert m.r2_ == pytest.approx(ref.rsquared, abs=1e-10)
    assert m.adj_r2_ == pytest.approx(ref.rsquared_adj, abs=1e-10)
    assert m.f_ == pytest.approx(ref.fvalue, rel=1e-8)
    assert m.f_p_value_ == pytest.approx(ref.f_pvalue, rel=1e-6)
    assert m.sigma2_ == pytest.approx(ref.scale, rel=1e-10)
    infl = ref.get_influence()
    np.testing.assert_allclose(m.hat_, infl.hat_matrix_diag, rtol=1e-8)
    np.testing.assert_allclose(m.standardised_resid_, infl.resid_studentized_internal, rtol=1e-8)
    exog = sm.add_constant(X)
    vif_sm = [variance_inflation_factor(exog, j) for j in range(1, 4)]
    np.testing.assert_allclose(m.vif_, vif_sm, rtol=1e-8)


def test_prediction_intervals_equal_statsmodels(random_fit):
    X, y, m, ref, Xnew = random_fit
    pi = m.predict_interval(Xnew)
    frame = ref.get_prediction(sm.add_constant(Xnew, has_constant="add")).summary_frame(alpha=0.05)
    # statsmodels OLS get_prediction obs_ci (95 % prediction interval)
    np.testing.assert_allclose(pi["prediction"], frame["mean"], rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(pi["pi_low"], frame["obs_ci_lower"], rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(pi["pi_high"], frame["obs_ci_upper"], rtol=1e-8, atol=1e-10)
    se_fit = np.sqrt(pi["leverage"] * m.sigma2_)
    np.testing.assert_allclose(se_fit, frame["mean_se"], rtol=1e-8)


def test_standardised_coefficients_match_zscored_fit(random_fit):
    X, y, m, _, _ = random_fit
    Z = (X - X.mean(0)) / X.std(0, ddof=1)
    zy = (y - y.mean()) / y.std(ddof=1)
    b = np.linalg.lstsq(np.column_stack([np.ones(len(y)), Z]), zy, rcond=None)[0]
    # common practice, no source: beta_j = b_j sd(x_j)/sd(y) = slope of the z-scored fit
    np.testing.assert_allclose(m.standardised_coef_, b[1:], rtol=1e-10)


def test_closed_form_loo_equals_refitting(random_fit):
    X, y, m, _, _ = random_fit
    n = len(y)
    A = np.column_stack([np.ones(n), X])
    loo = np.empty(n)
    for i in range(n):
        keep = np.arange(n) != i
        b = np.linalg.lstsq(A[keep], y[keep], rcond=None)[0]
        loo[i] = y[i] - A[i] @ b
    # Allen, Technometrics 1974, 16, 125: e_(i) = e_i / (1 - h_ii)
    np.testing.assert_allclose(m.loo_resid_, loo, rtol=1e-9, atol=1e-12)
    q2 = 1 - np.sum(loo**2) / np.sum((y - y.mean()) ** 2)
    assert m.q2_loo_ == pytest.approx(q2, abs=1e-12)
    assert m.loo_mae_ == pytest.approx(np.mean(np.abs(loo)), rel=1e-10)


def test_closed_form_kfold_equals_refitting(random_fit):
    X, y, m, _, _ = random_fit
    n = len(y)
    A = np.column_stack([np.ones(n), X])
    folds = m.kfold_folds_
    assert sorted(np.bincount(folds).tolist()) == [5, 5, 5, 5, 5]
    press = 0.0
    for f in range(5):
        te = folds == f
        b = np.linalg.lstsq(A[~te], y[~te], rcond=None)[0]
        press += np.sum((y[te] - A[te] @ b) ** 2)
    # block deletion form (I - H_FF)^-1 e_F equals refitting without the fold
    assert m.kfold_q2_ == pytest.approx(1 - press / np.sum((y - y.mean()) ** 2), abs=1e-10)


def test_y_randomisation_on_pure_noise_gives_nonpositive_q2():
    rng = np.random.default_rng(11)
    X = rng.normal(size=(30, 2))
    y = rng.normal(size=30)
    m = OLSModel(n_permutations=300, seed=5).fit(X, y)
    yr = m.y_randomisation_
    assert yr.q2.shape == (300,) and yr.r2.shape == (300,)
    # Rücker et al., J. Chem. Inf. Model. 2007, 47, 2345: scrambled models have no skill
    assert m.q2_loo_ <= 0.0
    assert np.mean(yr.q2) <= 0.0
    assert np.median(yr.q2) <= 0.0
    assert yr.p_value_q2 > 0.05
    # scrambled R2 equals refitting one permutation by hand
    perm = np.random.default_rng(5).permutation(y)
    ref = sm.OLS(perm, sm.add_constant(X)).fit()
    assert yr.r2[0] == pytest.approx(ref.rsquared, abs=1e-10)
    # seeded: same seed, same numbers; other seed, other numbers
    again = m.y_randomise(300, 5)
    np.testing.assert_array_equal(again.q2, yr.q2)
    assert not np.array_equal(m.y_randomise(300, 6).q2, yr.q2)


def test_y_randomisation_flags_a_real_model_as_significant(random_fit):
    _, _, m, _, _ = random_fit
    s = m.y_randomisation_.summary()
    assert s["n_permutations"] == 150
    assert s["q2_max"] < m.q2_loo_
    assert s["p_value_q2"] == pytest.approx(1 / 151)


def test_ddg_per_unit_descriptor_kcal_per_mol():
    x = np.arange(6.0)
    y = 2.0 - 1.0 * x + np.array([0.01, -0.02, 0.0, 0.02, -0.01, 0.0])
    m = OLSModel(n_permutations=0, temperature_k=298.15).fit(x, y)
    # from memory: RT ln 10 = 1.364 kcal/mol at 298.15 K; one decade faster = 1.364 kcal/mol lower barrier
    assert m.coef_[1] == pytest.approx(-1.0, abs=0.01)
    assert m.ddg_kcal_per_mol()[0] == pytest.approx(-1.3642 * m.coef_[1], rel=1e-4)
    assert m.ddg_kcal_per_mol()[0] > 0  # slower decay (lower log10 k) = higher barrier
    tab = m.coefficient_table()
    assert tab["term"].tolist() == ["intercept", "x1"]
    assert tab.loc[1, "ddg_act_kcal_per_mol_per_unit"] == pytest.approx(1.3642 * -m.coef_[1], rel=1e-4)
    m350 = OLSModel(n_permutations=0, temperature_k=350.0).fit(x, y)
    assert m350.ddg_kcal_per_mol()[0] / m.ddg_kcal_per_mol()[0] == pytest.approx(350.0 / 298.15)


def test_leverage_domain_threshold(random_fit):
    X, y, m, _, _ = random_fit
    # Tropsha, Mol. Inf. 2010, 29, 476: h* = 3(p+1)/n
    assert m.leverage_threshold_ == pytest.approx(3 * 4 / 25)
    pi = m.predict_interval(np.vstack([X.mean(0), X.mean(0) + 20 * X.std(0)]))
    assert pi["domain"].tolist() == ["inside", "extrapolating"]
    assert pi["leverage"].iloc[0] == pytest.approx(1 / 25, rel=1e-8)  # centroid: h = 1/n
    np.testing.assert_allclose(m.leverage(X), m.hat_, rtol=1e-9)
    nan_row = m.predict_interval(np.array([[np.nan, 1.0, 1.0]]))
    assert nan_row["domain"].iloc[0] == "not predicted"


def test_external_validation_by_hand(random_fit):
    X, y, m, _, Xnew = random_fit
    ytest = m.predict(Xnew) + np.array([0.1, -0.2, 0.3, 0.0, 0.1, -0.1])
    ev = m.external_validation(Xnew, ytest)
    press = 0.01 + 0.04 + 0.09 + 0.0 + 0.01 + 0.01
    # Shi et al. 2001 (from memory): Q2_F1 = 1 - PRESS / sum (y_test - mean(y_train))^2
    assert ev["q2_ext_f1"] == pytest.approx(1 - press / np.sum((ytest - y.mean()) ** 2), rel=1e-9)
    assert ev["rmse_test"] == pytest.approx(math.sqrt(press / 6), rel=1e-9)
    assert ev["n_test"] == 6


def test_json_round_trip(tmp_path, random_fit):
    X, y, m, _, Xnew = random_fit
    path = m.save(tmp_path / "model.json", extra={"note": "invented"})
    text = path.read_text()
    d = json.loads(text)
    assert d["format"] == "redoxfront-ols-1" and d["context"]["note"] == "invented"
    again = load_model(path)
    np.testing.assert_array_equal(again.coef_, m.coef_)
    pd.testing.assert_frame_equal(again.predict_interval(Xnew), m.predict_interval(Xnew))
    assert again.statistics()["q2_loo"] == pytest.approx(m.q2_loo_, abs=1e-14)
    d["coefficients"][1] += 1.0
    (tmp_path / "edited.json").write_text(json.dumps(d))
    with pytest.raises(DataError, match="do not match"):
        load_model(tmp_path / "edited.json")
    with pytest.raises(DataError, match="no model file"):
        load_model(tmp_path / "absent.json")


# ------------------------------------------------------------------ degenerate
@pytest.mark.parametrize(
    "X, y, message",
    [
        (np.array([[1.0, 2.0], [2.0, 1.0], [3.0, 5.0]]), [1.0, 2.0, 3.0], "need at least 4; add 1 more"),
        (np.array([[1.0, 2.0], [2.0, 4.0], [3.0, 6.0], [4.0, 8.0], [5.0, 10.1 - 0.1]]),
         [1.0, 3.0, 2.0, 5.0, 4.0], "x1, x2 are collinear"),
        (np.array([[1.0], [2.0], [3.0], [4.0]]), [2.0, 2.0, 2.0, 2.0], "same for every training row"),
        (np.array([[1.0], [np.nan], [3.0], [4.0]]), [1.0, 2.0, 3.0, 5.0], "term 'x1' missing .* row\\(s\\) 2"),
        (np.array([[1.0], [2.0], [3.0], [4.0]]), [1.0, np.nan, 3.0, 5.0], "target missing .* row\\(s\\) 2"),
        (np.array([[1.0, 7.0], [2.0, 7.0], [3.0, 7.0], [4.0, 7.0]]), [1.0, 2.0, 3.0, 5.0],
         "x2 take the same value"),
    ],
)
def test_degenerate_inputs_raise(X, y, message):
    with pytest.raises(DataError, match=message):
        OLSModel(n_permutations=0).fit(X, y)
