"""All-subsets term search for small linear models, ranked by leave-one-out Q2.

Every subset of 1..``max_terms`` descriptors from a pool is fitted by least squares
with intercept, in batches (numpy batched matrix products, no Python loop over
models). LOO residuals come in closed form, e_i / (1 - h_ii) (Allen, Technometrics
1974, 16, 125). Trying many models and keeping the best one inflates its Q2 by
chance (Topliss & Costello, J. Med. Chem. 1972, 15, 1066); the search therefore
reports how many models it tried and, optionally, repeats the whole search on
scrambled targets to show what best Q2 chance alone reaches (y-randomisation of the
selection procedure; Rücker, Rücker & Meringer, J. Chem. Inf. Model. 2007, 47, 2345).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from tqdm import tqdm

from redoxfront.errors import DataError

CHUNK_MODELS = 4000
"""Models per batch (bounds memory: chunk x rows x null searches floats)."""
EIG_RCOND = 1e-10
"""Subsets whose standardised Gram matrix has eigenvalue ratio below this are skipped."""


@dataclass(frozen=True)
class TermSearchResult:
    """Ranked subsets and the counts that qualify them.

    ``table`` columns: ``terms`` (tuple), ``n_terms``, ``r2``, ``q2_loo``, ``rmse``;
    sorted by ``q2_loo`` descending, best first.
    """

    table: pd.DataFrame
    n_models_tried: int
    n_models_skipped: int
    n_rows: int
    pool: tuple[str, ...]
    dropped_columns: tuple[str, ...]
    null_best_q2: np.ndarray = field(default_factory=lambda: np.empty(0))
    seed: int = 0
    warning: str = ""

    @property
    def best_terms(self) -> tuple[str, ...]:
        return tuple(self.table.iloc[0]["terms"])

    @property
    def chance_risk(self) -> str:
        """'high' if scrambled searches reach the real best Q2 in >= 5 % of rounds,
        'low' if not, 'unknown' without scrambled searches."""
        if self.null_best_q2.size == 0:
            return "unknown"
        best = float(self.table.iloc[0]["q2_loo"])
        frac = float(np.mean(self.null_best_q2 >= best))
        return "high" if frac >= 0.05 else "low"

    def summary(self) -> dict[str, Any]:
        d: dict[str, Any] = {
            "n_models_tried": self.n_models_tried,
            "n_models_skipped_collinear": self.n_models_skipped,
            "n_rows": self.n_rows,
            "pool_size": len(self.pool),
            "dropped_columns": list(self.dropped_columns),
            "best_terms": list(self.best_terms),
            "best_q2_loo": float(self.table.iloc[0]["q2_loo"]),
            "chance_risk": self.chance_risk,
            "warning": self.warning,
        }
        if self.null_best_q2.size:
            d["scrambled_searches"] = int(self.null_best_q2.size)
            d["scrambled_best_q2_median"] = float(np.median(self.null_best_q2))
            d["scrambled_best_q2_p95"] = float(np.percentile(self.null_best_q2, 95))
            d["seed"] = self.seed
        return d


def _subset_scores(
    Z: np.ndarray, Y: np.ndarray, combos: np.ndarray, tss: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """R2 and LOO Q2 of every subset in ``combos`` for every centred target column of Y.

    Z: (n, m) centred, scaled descriptors; Y: (n, P) centred targets; combos (M, k).
    Returns r2 (M, P), q2 (M, P), valid (M,).
    """
    n = Z.shape[0]
    Xs = np.ascontiguousarray(np.transpose(Z[:, combos], (1, 0, 2)))  # (M, n, k)
    G = np.matmul(np.transpose(Xs, (0, 2, 1)), Xs)  # (M, k, k)
    ev = np.linalg.eigvalsh(G)
    valid = ev[:, 0] > EIG_RCOND * ev[:, -1]
    k = combos.shape[1]
    G[~valid] = np.eye(k)
    Ginv = np.linalg.inv(G)
    T = np.matmul(Xs, Ginv)  # (M, n, k)
    h = 1.0 / n + np.sum(T * Xs, axis=2)  # (M, n)
    r = np.einsum("mnk,np->mkp", Xs, Y)  # (M, k, P)
    fitted = np.matmul(T, r)  # (M, n, P)
    E = Y[None, :, :] - fitted
    rss = np.sum(E * E, axis=1)
    good_h = np.all(h < 1.0 - 1e-10, axis=1)
    valid &= good_h
    with np.errstate(divide="ignore", invalid="ignore"):
        L = E / (1.0 - h)[:, :, None]
    press = np.sum(L * L, axis=1)
    r2 = 1.0 - rss / tss[None, :]
    q2 = 1.0 - press / tss[None, :]
    r2[~valid] = np.nan
    q2[~valid] = np.nan
    return r2, q2, valid


def search_terms(
    X: pd.DataFrame,
    y: Any,
    max_terms: int = 3,
    n_scrambled: int = 0,
    seed: int = 0,
    keep: int = 50,
    progress: bool = True,
) -> TermSearchResult:
    """Fit every subset of 1..``max_terms`` columns of ``X`` to ``y``; rank by LOO Q2.

    Columns with missing values or no spread over the rows are dropped (and named
    in the result). ``n_scrambled`` > 0 repeats the whole search on that many seeded
    permutations of ``y`` and keeps each search's best Q2 (the chance baseline).
    Returns the ``keep`` best models.
    """
    if not 1 <= max_terms <= 3:
        raise DataError(f"max_terms must be 1, 2 or 3, got {max_terms}")
    yv = np.asarray(y, dtype=float).ravel()
    n = yv.size
    if len(X) != n:
        raise DataError(f"{len(X)} descriptor rows but {n} target values; give one per row")
    if not np.all(np.isfinite(yv)):
        raise DataError("target has missing values; remove those rows before the term search")
    if np.ptp(yv) == 0:
        raise DataError("the target is the same for every row; nothing to model")
    num = X.apply(pd.to_numeric, errors="coerce").astype(float)
    A = num.to_numpy()
    sd = np.nanstd(A, axis=0) if A.size else np.empty(0)
    finite = np.all(np.isfinite(A), axis=0)
    usable = finite & (sd > 1e-12 * np.maximum(1.0, np.nanmax(np.abs(A), axis=0)))
    pool = tuple(str(c) for c, u in zip(num.columns, usable) if u)
    dropped = tuple(str(c) for c, u in zip(num.columns, usable) if not u)
    max_terms_eff = min(max_terms, len(pool), n - 2)
    if max_terms_eff < 1:
        raise DataError(
            f"term search needs at least 3 rows and one usable descriptor; got {n} rows and "
            f"{len(pool)} usable descriptor(s) (dropped for missing values or no spread: "
            f"{', '.join(dropped) or 'none'})"
        )
    Au = A[:, usable]
    Z = (Au - Au.mean(axis=0)) / Au.std(axis=0)
    yc = yv - yv.mean()
    rng = np.random.default_rng(seed)
    Ys = [yc] + [rng.permutation(yc) for _ in range(n_scrambled)]
    Y = np.stack(Ys, axis=1)
    tss = np.sum(Y * Y, axis=0)

    m = len(pool)
    sizes = list(range(1, max_terms_eff + 1))
    total = sum(math.comb(m, k) for k in sizes)
    frames: list[pd.DataFrame] = []
    null_best = np.full(n_scrambled, -np.inf)
    skipped = 0
    with tqdm(total=total, desc="term search", unit="model", disable=not progress or None) as bar:
        for k in sizes:
            it = itertools.combinations(range(m), k)
            while True:
                block = np.fromiter(
                    itertools.chain.from_iterable(itertools.islice(it, CHUNK_MODELS)),
                    dtype=np.intp,
                )
                if block.size == 0:
                    break
                combos = block.reshape(-1, k)
                r2, q2, valid = _subset_scores(Z, Y, combos, tss)
                skipped += int(np.sum(~valid))
                if n_scrambled:
                    null_best = np.maximum(null_best, np.nanmax(q2[:, 1:], axis=0, initial=-np.inf))
                q = q2[:, 0]
                order = np.argsort(-np.nan_to_num(q, nan=-np.inf))[:keep]
                order = order[valid[order]]
                frames.append(
                    pd.DataFrame(
                        {
                            "terms": [tuple(pool[j] for j in combos[i]) for i in order],
                            "n_terms": k,
                            "r2": r2[order, 0],
                            "q2_loo": q[order],
                            "rmse": np.sqrt((1.0 - r2[order, 0]) * tss[0] / n),
                        }
                    )
                )
                bar.update(combos.shape[0])
    table = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    if table.empty:
        raise DataError("every descriptor subset was collinear; add rows or other descriptors")
    table = table.sort_values("q2_loo", ascending=False, kind="mergesort").head(keep)
    table = table.reset_index(drop=True)
    best = float(table.iloc[0]["q2_loo"])
    warning = (
        f"{total} models were tried on {n} rows and the best was kept; its LOO Q2 "
        f"({best:.3f}) is optimistic because of that choice (chance correlation, "
        "Topliss & Costello 1972). Confirm with an external test set."
    )
    if n_scrambled:
        p95 = float(np.percentile(null_best, 95))
        frac = float(np.mean(null_best >= best))
        warning += (
            f" The same search on {n_scrambled} scrambled targets reached a best Q2 of "
            f"{np.median(null_best):.3f} (median) / {p95:.3f} (95th percentile); "
            f"{100 * frac:.0f} % of them matched or beat the real best."
        )
    return TermSearchResult(
        table=table,
        n_models_tried=total,
        n_models_skipped=skipped,
        n_rows=n,
        pool=pool,
        dropped_columns=dropped,
        null_best_q2=null_best if n_scrambled else np.empty(0),
        seed=seed,
        warning=warning,
    )
