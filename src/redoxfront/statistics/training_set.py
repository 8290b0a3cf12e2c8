"""Training-set design: which candidates to make first so the set spans descriptor space.

Kennard-Stone selection (Kennard & Stone, Technometrics 1969, 11, 137) over
z-scored descriptors: start from the two most distant candidates, then repeatedly
add the candidate farthest (Euclidean) from its nearest already-chosen one. This
picks the corners and edges of the space, poor performers included, which is what
a model needs to be fitted honestly. Candidates already made can be forced in (the
selection then starts from them) and candidates that cannot be made forced out.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np
import pandas as pd
from scipy.spatial.distance import cdist

from redoxfront import columns
from redoxfront.errors import DataError
from redoxfront.csv_tables import write_csv
from redoxfront.outputs import read_table

ROW_BLOCK = 2048
"""Rows per distance block (keeps memory O(block x N), not O(N^2))."""


def kennard_stone(
    Z: np.ndarray,
    k: int,
    forced_in: Sequence[int] = (),
    forced_out: Sequence[int] = (),
) -> list[int]:
    """Row indices of ``k`` rows of ``Z`` chosen by Kennard-Stone, in pick order.

    ``forced_in`` rows come first (counted in ``k``); ``forced_out`` rows are never
    chosen. Without forced rows the first two picks are the most distant pair.
    Ties go to the lower row index, so the result is deterministic.
    """
    Z = np.asarray(Z, dtype=float)
    n = Z.shape[0]
    fin = list(dict.fromkeys(int(i) for i in forced_in))
    fout = set(int(i) for i in forced_out)
    both = fout.intersection(fin)
    if both:
        raise DataError(f"row(s) {sorted(both)} are both forced in and forced out; pick one")
    available = n - len(fout)
    if k < max(1, len(fin)):
        raise DataError(f"asked for {k} picks but {len(fin)} are forced in; ask for at least {max(1, len(fin))}")
    if k > available:
        raise DataError(f"asked for {k} picks but only {available} candidates can be chosen; ask for fewer")
    eligible = np.ones(n, dtype=bool)
    eligible[list(fout)] = False
    picks: list[int] = list(fin)
    if not picks:
        if k == 1 or available == 1:
            # a single pick: the candidate nearest the centre of the eligible rows
            idx = np.flatnonzero(eligible)
            centre = Z[idx].mean(axis=0)
            picks = [int(idx[np.argmin(np.linalg.norm(Z[idx] - centre, axis=1))])]
        else:
            idx = np.flatnonzero(eligible)
            best, pair = -1.0, (int(idx[0]), int(idx[1]))
            for s in range(0, idx.size, ROW_BLOCK):
                blk = idx[s : s + ROW_BLOCK]
                D = cdist(Z[blk], Z[idx])
                i, j = np.unravel_index(int(np.argmax(D)), D.shape)
                if D[i, j] > best:
                    best, pair = float(D[i, j]), (int(blk[i]), int(idx[j]))
            picks = sorted(pair)
    mind = np.full(n, np.inf)
    for s in range(0, len(picks), ROW_BLOCK):
        mind = np.minimum(mind, cdist(Z, Z[picks[s : s + ROW_BLOCK]]).min(axis=1))
    chosen = np.zeros(n, dtype=bool)
    chosen[picks] = True
    while len(picks) < k:
        score = np.where(eligible & ~chosen, mind, -np.inf)
        nxt = int(np.argmax(score))
        picks.append(nxt)
        chosen[nxt] = True
        mind = np.minimum(mind, np.linalg.norm(Z - Z[nxt], axis=1))
    return picks[:k] if fin else picks


def standardise(values: np.ndarray) -> np.ndarray:
    """z-score each column (mean 0, population SD 1); constant columns become 0."""
    A = np.asarray(values, dtype=float)
    sd = A.std(axis=0)
    sd[sd == 0] = 1.0
    return (A - A.mean(axis=0)) / sd


def kennard_stone_split(X: np.ndarray, test_fraction: float) -> tuple[np.ndarray, np.ndarray]:
    """Split rows into (train, test) index arrays: Kennard-Stone picks the training set.

    The training set gets round((1 - test_fraction) n) rows, at least 3.
    """
    n = len(X)
    n_train = max(3, int(round((1.0 - test_fraction) * n)))
    if n_train >= n:
        raise DataError(
            f"{n} rows leave no test rows at test_fraction={test_fraction}; add rows or "
            "raise the test fraction"
        )
    train = np.array(kennard_stone(standardise(X), n_train), dtype=int)
    test = np.setdiff1d(np.arange(n), train)
    return train, test


def default_design_columns(table: pd.DataFrame, input_columns: Sequence[str] = ()) -> list[str]:
    """Numeric descriptor columns of a descriptor table: not the bookkeeping columns
    (:func:`redoxfront.columns.is_bookkeeping`: ids, status, wall time, gradient calls,
    counterions, calibration and model outputs ...) nor the user's own input columns."""
    user = {str(c) for c in input_columns}
    out = []
    for c in table.columns:
        name = str(c)
        if columns.is_bookkeeping(name) or name in user:
            continue
        if pd.api.types.is_numeric_dtype(table[c]) and not pd.api.types.is_bool_dtype(table[c]):
            out.append(name)
    return out


@dataclass(frozen=True)
class TrainingDesign:
    """The ordered picks and what was left out of the design, and why."""

    picks: tuple[str, ...]
    columns: tuple[str, ...]
    skipped_rows: tuple[str, ...]
    skipped_columns: tuple[str, ...]

    def to_frame(self) -> pd.DataFrame:
        return pd.DataFrame({columns.ID: list(self.picks), columns.PICK_ORDER: range(1, len(self.picks) + 1)})


def design_training_set(
    table: pd.DataFrame,
    k: int,
    forced_in: Sequence[str] = (),
    forced_out: Sequence[str] = (),
    columns_: Sequence[str] | None = None,
    input_columns: Sequence[str] = (),
) -> TrainingDesign:
    """Choose ``k`` candidate ids by Kennard-Stone over z-scored descriptor columns.

    Without ``columns_``: every numeric descriptor column (``input_columns``, the user's
    own candidate-file columns, and bookkeeping columns are left out).

    Only rows with status 'ok' (if a status column exists) and no missing value in
    the chosen columns take part; the others are listed in ``skipped_rows``.
    Columns with no spread are left out (``skipped_columns``). ``k`` counts the
    forced-in ids, which come first in the returned order.
    """
    if columns.ID not in table.columns:
        raise DataError(f"the table has no '{columns.ID}' column")
    t = table.copy()
    t[columns.ID] = t[columns.ID].astype(str)
    if t[columns.ID].duplicated().any():
        dup = t.loc[t[columns.ID].duplicated(), columns.ID].iloc[0]
        raise DataError(f"id '{dup}' appears more than once; ids must be unique")
    cols = list(columns_) if columns_ else default_design_columns(t, input_columns)
    missing = [c for c in cols if c not in t.columns]
    if missing:
        raise DataError(f"descriptor column(s) {', '.join(missing)} not in the table; check the names")
    if not cols:
        raise DataError("no numeric descriptor columns to design over; name them explicitly")
    unknown = [i for i in [*forced_in, *forced_out] if i not in set(t[columns.ID])]
    if unknown:
        raise DataError(f"forced id(s) {', '.join(map(str, unknown))} not in the table; check the ids")
    ok = np.ones(len(t), dtype=bool)
    if columns.STATUS in t.columns:
        ok &= t[columns.STATUS].astype(str).eq("ok").to_numpy()
    vals = t[cols].apply(pd.to_numeric, errors="coerce").to_numpy(dtype=float)
    ok &= np.all(np.isfinite(vals), axis=1)
    bad_forced = [i for i in forced_in if not ok[t[columns.ID].eq(i).to_numpy()].any()]
    if bad_forced:
        raise DataError(
            f"forced-in id(s) {', '.join(bad_forced)} have failed status or missing descriptors; "
            "fix them or drop them from the forced-in list"
        )
    if ok.sum() < max(2, k):
        status_ok = t[columns.STATUS].astype(str).eq("ok").to_numpy() if columns.STATUS in t.columns \
            else np.ones(len(t), dtype=bool)
        if status_ok.sum() < max(2, k):
            raise DataError(
                f"only {int(status_ok.sum())} candidate(s) were computed successfully (status 'ok') and "
                f"{k} picks were asked for; fix the failed computations or ask for fewer"
            )
        empty = np.mean(~np.isfinite(vals[status_ok]), axis=0)
        worst = [f"'{c}' ({e:.0%} empty)" for c, e in sorted(zip(cols, empty), key=lambda ce: -ce[1]) if e > 0][:5]
        raise DataError(
            f"only {int(ok.sum())} of {int(status_ok.sum())} computed candidates have a value in every "
            f"chosen column ({k} picks asked for); the emptiest: " + ", ".join(worst)
            + "; pass --columns without them"
        )
    skipped_rows = tuple(t.loc[~ok, columns.ID])
    vals, ids = vals[ok], t.loc[ok, columns.ID].tolist()
    spread = vals.std(axis=0) > 0 if len(vals) else np.zeros(len(cols), dtype=bool)
    use = [c for c, s in zip(cols, spread) if s]
    skipped_cols = tuple(c for c, s in zip(cols, spread) if not s)
    if not use:
        raise DataError(
            f"every chosen column ({', '.join(cols[:5])}{' ...' if len(cols) > 5 else ''}) is constant over the "
            f"{len(ids)} usable row(s); nothing to span; choose columns that differ between candidates"
        )
    pos = {i: n for n, i in enumerate(ids)}
    picks = kennard_stone(
        standardise(vals[:, spread]),
        k,
        [pos[i] for i in forced_in],
        [pos[i] for i in forced_out if i in pos],
    )
    return TrainingDesign(
        picks=tuple(ids[i] for i in picks),
        columns=tuple(use),
        skipped_rows=skipped_rows,
        skipped_columns=skipped_cols,
    )


def choose_training_set(
    table: pd.DataFrame,
    k: int,
    forced_in: Sequence[str] = (),
    forced_out: Sequence[str] = (),
    columns: Sequence[str] | None = None,
) -> list[str]:
    """Ids of the ``k`` candidates to make first (Kennard-Stone order; forced-in first)."""
    return list(design_training_set(table, k, forced_in, forced_out, columns).picks)


def _candidate_columns(path: Path) -> list[str]:
    """The user's own columns of the candidate file (besides id and smiles); [] if unreadable."""
    import csv

    try:
        with path.open(newline="", encoding="utf-8-sig") as fh:
            header = next(csv.reader(fh), [])
    except (OSError, UnicodeDecodeError):
        return []
    return [h for h in header if h.strip().lower() not in (columns.ID, columns.SMILES, columns.ROLE, columns.N_ELECTRONS)]


def choose_training_for_campaign(
    campaign_path: str | Path,
    k: int,
    forced_in: Sequence[str] = (),
    forced_out: Sequence[str] = (),
    columns_: Sequence[str] | None = None,
) -> TrainingDesign:
    """Pick a training set from ``results/descriptors.csv``; write ``results/training_picks.csv``."""
    from redoxfront.campaign import load_campaign

    campaign = load_campaign(campaign_path)
    path = campaign.results_dir / "descriptors.csv"
    table = read_table(path, remedy=f"regenerate it with `redoxfront compute {campaign.folder}`",
                       required=[columns.ID])
    inputs = _candidate_columns(campaign.path(campaign.inputs.candidates))
    design = design_training_set(table, k, forced_in, forced_out, columns_, input_columns=inputs)
    out = design.to_frame()
    out["forced_in"] = out[columns.ID].isin(set(forced_in))
    write_csv(out, campaign.results_dir / "training_picks.csv")
    return design
