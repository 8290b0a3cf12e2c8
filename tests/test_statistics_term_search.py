"""Tests of the all-subsets term search."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from redoxfront.errors import DataError
from redoxfront.statistics.regression import OLSModel
from redoxfront.statistics.term_search import search_terms


def planted(n: int = 24, m: int = 12, seed: int = 3) -> tuple[pd.DataFrame, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = pd.DataFrame(rng.normal(size=(n, m)), columns=[f"d{j:02d}" for j in range(m)])
    X["d01"] *= 40.0  # scale must not matter
    y = 0.5 + 1.2 * X["d02"] - 0.02 * X["d01"] + 0.7 * X["d00"] + rng.normal(scale=0.1, size=n)
    return X, y.to_numpy()


def test_counts_and_planted_model_found():
    X, y = planted()
    res = search_terms(X, y, max_terms=3, progress=False)
    # all subsets of 1..3 of 12: C(12,1)+C(12,2)+C(12,3)
    assert res.n_models_tried == 12 + 66 + 220 == sum(math.comb(12, k) for k in (1, 2, 3))
    assert set(res.best_terms) == {"d00", "d01", "d02"}
    assert res.table["q2_loo"].is_monotonic_decreasing
    assert res.n_models_skipped == 0
    assert "298 models were tried on 24 rows" in res.warning
    assert res.chance_risk == "unknown"


def test_every_ranked_q2_equals_the_full_ols_fit():
    X, y = planted()
    res = search_terms(X, y, max_terms=3, progress=False, keep=15)
    for row in res.table.itertuples():
        m = OLSModel(n_permutations=0).fit(X[list(row.terms)], y)
        # cross-check against the independent QR fit with closed-form LOO
        assert row.q2_loo == pytest.approx(m.q2_loo_, abs=1e-10)
        assert row.r2 == pytest.approx(m.r2_, abs=1e-10)
        assert row.rmse == pytest.approx(m.rmse_, rel=1e-9)


def test_loo_q2_equals_refitting_for_the_best_subset():
    X, y = planted(n=15, m=5)
    res = search_terms(X, y, max_terms=2, progress=False)
    terms = list(res.best_terms)
    A = np.column_stack([np.ones(len(y)), X[terms].to_numpy()])
    press = 0.0
    for i in range(len(y)):
        keep = np.arange(len(y)) != i
        b = np.linalg.lstsq(A[keep], y[keep], rcond=None)[0]
        press += (y[i] - A[i] @ b) ** 2
    # Allen 1974: PRESS by refitting n times equals the closed form
    assert res.table.iloc[0]["q2_loo"] == pytest.approx(1 - press / np.sum((y - y.mean()) ** 2), abs=1e-10)


def test_collinear_subsets_skipped_and_bad_columns_dropped():
    X, y = planted(m=4)
    X["copy_of_d02"] = 2.0 * X["d02"] + 1.0
    X["constant"] = 3.0
    X["has_gap"] = 1.0
    X.loc[3, "has_gap"] = np.nan
    res = search_terms(X, y, max_terms=2, progress=False)
    assert res.dropped_columns == ("constant", "has_gap")
    assert len(res.pool) == 5
    assert res.n_models_tried == 5 + 10
    assert res.n_models_skipped == 1  # {d02, copy_of_d02}
    assert not any({"d02", "copy_of_d02"} <= set(t) for t in res.table["terms"])


def test_scrambled_searches_show_chance_on_noise():
    rng = np.random.default_rng(0)
    X = pd.DataFrame(rng.normal(size=(15, 20)), columns=[f"n{j}" for j in range(20)])
    y = rng.normal(size=15)
    res = search_terms(X, y, max_terms=2, n_scrambled=40, seed=1, progress=False)
    # Topliss & Costello, J. Med. Chem. 1972, 15, 1066: screening many variables on few
    # rows gives chance correlations; the scrambled searches reach the same best Q2
    assert res.chance_risk == "high"
    assert res.null_best_q2.shape == (40,)
    assert res.summary()["scrambled_best_q2_p95"] >= res.table.iloc[0]["q2_loo"]
    Xp, yp = planted(m=12)
    good = search_terms(Xp, yp, max_terms=3, n_scrambled=20, seed=1, progress=False)
    assert good.chance_risk == "low"
    assert "20 scrambled targets" in good.warning


def test_errors():
    X, y = planted(m=3)
    with pytest.raises(DataError, match="max_terms must be 1, 2 or 3"):
        search_terms(X, y, max_terms=4, progress=False)
    with pytest.raises(DataError, match="same for every row"):
        search_terms(X, np.ones(len(y)), progress=False)
    with pytest.raises(DataError, match="missing values"):
        search_terms(X, np.r_[np.nan, y[1:]], progress=False)
    with pytest.raises(DataError, match="24 descriptor rows but 23"):
        search_terms(X, y[1:], progress=False)


def test_benchmark_size_runs_fast():
    import time

    rng = np.random.default_rng(9)
    X = pd.DataFrame(rng.normal(size=(30, 60)), columns=[f"d{j}" for j in range(60)])
    y = X["d1"] - X["d40"] + rng.normal(scale=0.3, size=30)
    t0 = time.perf_counter()
    res = search_terms(X, y, max_terms=3, progress=False)
    dt = time.perf_counter() - t0
    assert res.n_models_tried == 36050
    assert {"d1", "d40"} <= set(res.best_terms)
    assert dt < 5.0  # target 1 s (see benchmarks/term_search_bench.py); loose bound for CI noise
