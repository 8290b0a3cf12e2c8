"""Benchmark: all-subsets term search, 60 descriptors, 1-3 terms, 30 rows, LOO Q2.

Prints the wall time and its ratio to the 1 s target, and a side-by-side with
statsmodels OLS refits (LOO through its influence hat diagonal) timed on a sample
of subsets and scaled to the full count. Data are invented (random numbers).

Run: python benchmarks/term_search_bench.py
"""

from __future__ import annotations

import itertools
import os
import sys
import time

import numpy as np
import pandas as pd
import statsmodels.api as sm

from redoxfront.statistics.term_search import search_terms

TARGET_S = 1.0
N_ROWS, N_DESC, MAX_TERMS = 30, 60, 3
SAMPLE = 600


def main() -> int:
    rng = np.random.default_rng(2026)
    X = pd.DataFrame(rng.normal(size=(N_ROWS, N_DESC)), columns=[f"d{j:02d}" for j in range(N_DESC)])
    y = 1.0 + X["d07"] - 0.5 * X["d33"] + rng.normal(scale=0.3, size=N_ROWS)
    search_terms(X.iloc[:, :10], y, max_terms=2, progress=False)  # warm-up

    best = float("inf")
    for _ in range(3):
        t0 = time.perf_counter()
        res = search_terms(X, y, max_terms=MAX_TERMS, progress=False)
        best = min(best, time.perf_counter() - t0)
    print(f"term search: {res.n_models_tried} models, best {res.best_terms}, Q2 {res.table.iloc[0].q2_loo:.3f}")
    print(f"load average {os.getloadavg()[0]:.2f} (1 min)")
    print(f"wall time {best:.3f} s; ratio to the {TARGET_S:.0f} s target: {best / TARGET_S:.2f} "
          f"({'meets' if best <= TARGET_S else 'MISSES'} it)")

    t0 = time.perf_counter()
    res20 = search_terms(X, y, max_terms=MAX_TERMS, n_scrambled=20, progress=False)
    t20 = time.perf_counter() - t0
    print(f"with 20 scrambled searches (chance baseline): {t20:.3f} s; ratio to target {t20 / TARGET_S:.2f}; "
          f"chance risk {res20.chance_risk}")

    combos = list(itertools.combinations(range(N_DESC), 3))
    pick = rng.choice(len(combos), SAMPLE, replace=False)
    yv = y.to_numpy()
    tss = np.sum((yv - yv.mean()) ** 2)
    t0 = time.perf_counter()
    for i in pick:
        cols = list(combos[i])
        fit = sm.OLS(yv, sm.add_constant(X.iloc[:, cols].to_numpy())).fit()
        h = fit.get_influence().hat_matrix_diag
        _ = 1 - np.sum((fit.resid / (1 - h)) ** 2) / tss
    per_model = (time.perf_counter() - t0) / SAMPLE
    full = per_model * res.n_models_tried
    print(f"statsmodels refits: {1e3 * per_model:.3f} ms/model, {full:.1f} s for all "
          f"{res.n_models_tried} (scaled from {SAMPLE}); speed-up of the batched search: {full / best:.0f}x")
    return 0 if best <= TARGET_S else 1


if __name__ == "__main__":
    sys.exit(main())
