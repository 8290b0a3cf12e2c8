"""Where each decomposition rate comes from: the measured-rates file, the rates fitted from
cycling and decay files (``results/rates.csv``), or both.

Both sources train the rate model. Every candidate's rate carries its source
(``measured``: the file and row; ``fitted``: the cycling file it was fitted from, with the
fit's 95 % confidence interval). The rule for a candidate with both: **the measured value
wins**; when it lies outside the fit's 95 % interval the disagreement is written in
``rate_note`` and in the model's notes. Units: log10 of k in 1/h (first order) or
L/(mol h) (second order).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from redoxfront import columns
from redoxfront.errors import DataError, InputError

SOURCE_MEASURED = "measured"
SOURCE_FITTED = "fitted"


@dataclass(frozen=True)
class RateSources:
    """The rates that train the model, one row per candidate, and how they were chosen.

    ``table`` columns: ``id``, the target (log10 k), its ``_ci95_low`` / ``_ci95_high``
    where known, ``set`` (if any file gave it), ``rate_source``, ``rate_source_detail``,
    ``rate_note``.
    """

    table: pd.DataFrame
    files: tuple[str, ...]
    notes: tuple[str, ...]
    n_fitted_overridden: int = 0
    """Fitted rates set aside because the candidate also has a measured one."""
    n_disagreeing: int = 0
    """Of those, how many measured values lie outside the fit's 95 % interval."""

    def counts(self) -> dict[str, int]:
        """How many candidates' rates come from each source."""
        vc = self.table[columns.RATE_SOURCE].value_counts()
        return {SOURCE_MEASURED: int(vc.get(SOURCE_MEASURED, 0)), SOURCE_FITTED: int(vc.get(SOURCE_FITTED, 0))}


def _read(path: Path, remedy: str) -> pd.DataFrame:
    from redoxfront.outputs import read_table

    return read_table(path, remedy=remedy, text_columns=("set", columns.SOURCE_FILE))


def _clean(df: pd.DataFrame, target: str, path: Path, source: str, notes: list[str]) -> pd.DataFrame:
    if columns.ID not in df.columns or target not in df.columns:
        raise InputError(
            f"need columns '{columns.ID}' and '{target}' (found {', '.join(map(str, df.columns))}); "
            "check [model] rate_order", source=str(path),
        )
    df = df.copy()
    df[columns.ID] = df[columns.ID].astype(str).str.strip()
    df["_row"] = np.arange(2, len(df) + 2)  # line 1 is the header
    df[target] = pd.to_numeric(df[target], errors="coerce")
    infinite = df.loc[np.isinf(df[target]), columns.ID].tolist()
    if infinite:  # an infinite rate (k = 0 or k = inf on the log scale) is no value, like NaN
        notes.append(f"{path.name}: rates that are infinite, left out like missing ones: {', '.join(infinite[:20])}")
        df = df[~np.isinf(df[target])]
    if columns.STATUS in df.columns:
        failed = df[columns.STATUS].astype(str).ne("ok")
        if failed.any():
            notes.append(f"{path.name}: rates with a failed fit, left out: {', '.join(df.loc[failed, columns.ID][:20])}")
        df = df[~failed]
    empty = df.loc[df[target].isna(), columns.ID].tolist()
    if empty:
        notes.append(f"{path.name}: rates without a value, left out: {', '.join(empty[:20])}")
    df = df[df[target].notna()].copy()
    if "set" in df.columns:
        df["set"] = df["set"].fillna("train").astype(str).str.strip().str.lower().replace("", "train")
        bad = df.loc[~df["set"].isin(["train", "test"])]
        if len(bad):
            r = bad.iloc[0]
            raise InputError(f"'set' must be train or test, got {r['set']!r}", row=r[columns.ID],
                             field="set", source=str(path))
    lo, hi = target + columns.CI_LOW_SUFFIX, target + columns.CI_HIGH_SUFFIX
    for c in (lo, hi):
        df[c] = pd.to_numeric(df[c], errors="coerce") if c in df.columns else np.nan
    if source == SOURCE_FITTED:
        files = df[columns.SOURCE_FILE].astype(str).map(lambda s: Path(s).name) if columns.SOURCE_FILE in df.columns \
            else pd.Series(path.name, index=df.index)
        df[columns.RATE_SOURCE_DETAIL] = [
            f"fitted from {f}" + (f" (95 % CI {a:.3f} to {b:.3f})" if np.isfinite(a) and np.isfinite(b) else "")
            for f, a, b in zip(files, df[lo], df[hi])
        ]
    else:
        df[columns.RATE_SOURCE_DETAIL] = [f"measured: {path.name} row {r}" for r in df["_row"]]
    df[columns.RATE_SOURCE] = source
    keep = [columns.ID, target, lo, hi, columns.RATE_SOURCE, columns.RATE_SOURCE_DETAIL] + (
        ["set"] if "set" in df.columns else [])
    df = df[keep]
    if df[columns.ID].duplicated().any():
        dup = sorted(set(df.loc[df[columns.ID].duplicated(), columns.ID]))
        notes.append(f"{path.name}: id(s) with more than one rate, log10 k averaged (interval dropped): "
                     + ", ".join(dup[:20]))
        agg = {target: "mean", lo: "first", hi: "first", columns.RATE_SOURCE: "first",
               columns.RATE_SOURCE_DETAIL: lambda s: "; ".join(s), **({"set": "first"} if "set" in df else {})}
        df = df.groupby(columns.ID, as_index=False, sort=False).agg(agg)
        df.loc[df[columns.ID].isin(dup), [lo, hi]] = np.nan
    return df


def collect_rates(measured_path: Path | None, fitted_path: Path | None, target: str) -> RateSources:
    """Merge measured and fitted rates under the rule stated in the module docstring.

    ``measured_path``: the user's measured-rates file (or None); ``fitted_path``: the fade
    step's ``rates.csv`` (or None, or a path that does not exist yet).
    """
    notes: list[str] = []
    parts: list[pd.DataFrame] = []
    files: list[str] = []
    if measured_path is not None:
        if not measured_path.exists():
            raise InputError("measured-rates file not found; check [inputs] measured_rates", source=str(measured_path))
        parts.append(_clean(_read(measured_path, "fix the file or [inputs] measured_rates"), target, measured_path, SOURCE_MEASURED, notes))
        files.append(str(measured_path))
    if fitted_path is not None and fitted_path.exists():
        parts.append(_clean(_read(fitted_path, "regenerate it with `redoxfront fade CAMPAIGN`"), target, fitted_path, SOURCE_FITTED, notes))
        files.append(str(fitted_path))
    if not parts:
        raise DataError(
            f"no rates: set [inputs] measured_rates or run the fade step (it writes {fitted_path})"
        )
    if len(parts) == 1:
        table = parts[0].copy()
        table[columns.RATE_NOTE] = ""
        return RateSources(table.reset_index(drop=True), tuple(files), tuple(notes))
    meas, fit = parts
    lo, hi = target + columns.CI_LOW_SUFFIX, target + columns.CI_HIGH_SUFFIX
    both = meas.merge(fit[[columns.ID, target, lo, hi, columns.RATE_SOURCE_DETAIL]], on=columns.ID,
                      how="left", suffixes=("", "_fit"))
    rate_note = []
    disagree = []
    for _, r in both.iterrows():
        f = r[target + "_fit"]
        if not np.isfinite(f):
            rate_note.append("")
            continue
        a, b = r[lo + "_fit"], r[hi + "_fit"]
        text = f"also {r[columns.RATE_SOURCE_DETAIL + '_fit']}: {f:.3f}; the measured value is used"
        if np.isfinite(a) and np.isfinite(b) and not (a <= r[target] <= b):
            text = (f"measured {r[target]:.3f} lies outside the 95 % interval of the value "
                    f"{r[columns.RATE_SOURCE_DETAIL + '_fit']}: {f:.3f}; the measured value is used")
            disagree.append(f"{r[columns.ID]} ({text})")
        rate_note.append(text)
    meas = meas.copy()
    meas[columns.RATE_NOTE] = rate_note
    only_fit = fit[~fit[columns.ID].isin(set(meas[columns.ID]))].copy()
    only_fit[columns.RATE_NOTE] = ""
    table = pd.concat([meas, only_fit], ignore_index=True)
    n_both = int(sum(1 for t in rate_note if t))
    if n_both:
        notes.append(f"{n_both} candidate(s) have both a measured and a fitted rate: the measured value is used")
    if disagree:
        notes.append("measured and fitted rates disagree (measured outside the fit's 95 % interval): "
                     + "; ".join(disagree[:20]))
    return RateSources(table, tuple(files), tuple(notes), n_both, len(disagree))
