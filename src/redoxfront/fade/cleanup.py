"""Clean-up rules for cycler and decay data, and the per-cycle table they produce.

Works on columns already read and converted by :mod:`redoxfront.fade.files` (time in h,
capacity in mAh): counters that fall back after a restarted test are renumbered, rest
steps are set aside, point-level rows are reduced to one row per cycle, cycles without
a capacity and spikes (Hampel identifier) are set aside. Every action is appended to a
plain-language report. The table columns are named in :mod:`redoxfront.columns`
(``CYCLE``, ``TIME_H``, ``CHARGE_CAPACITY``, ``DISCHARGE_CAPACITY``,
``COULOMBIC_EFFICIENCY``, ``RETENTION``, ``SIGNAL``, ``USED``, ``NOTE``).
"""

from __future__ import annotations

from typing import Mapping

import numpy as np
import pandas as pd

from redoxfront.columns import (
    CHARGE_CAPACITY,
    COULOMBIC_EFFICIENCY,
    CYCLE,
    DISCHARGE_CAPACITY,
    NOTE,
    RETENTION,
    SIGNAL,
    TIME_H,
    USED,
)
from redoxfront.errors import InputError

REST_WORDS: tuple[str, ...] = ("rest", "ocv", "pause", "relax", "wait", "open circuit")
"""Step texts that mark a rest (no current) step."""


def numeric(series: pd.Series) -> pd.Series:
    """Values as floats; text that is not a number becomes NaN."""
    return pd.to_numeric(series, errors="coerce").astype(float)


def fix_counter_resets(values: pd.Series, what: str, report: list[str],
                       continue_by: float) -> pd.Series:
    """Renumber a counter that falls back (restarted test) so that it keeps increasing."""
    v = values.to_numpy(dtype=float).copy()
    offset = 0.0
    last = np.nan
    n_resets = 0
    for i, x in enumerate(v):
        if np.isnan(x):
            continue
        if not np.isnan(last) and x + offset < last:
            offset = last - x + continue_by
            n_resets += 1
            report.append(f"{what} fell back at data row {i + 1} (to {x:g}); later values shifted "
                          f"by {offset:g} so they continue")
        v[i] = x + offset
        last = v[i]
    return pd.Series(v, index=values.index)


def step_direction(step: pd.Series | None, current: pd.Series | None) -> pd.Series:
    """'charge', 'discharge', 'rest' or '' per row from the step text, else from the current sign.

    Positive current is charge (our convention; see docs/fade.md).
    """
    n = len(step) if step is not None else len(current) if current is not None else 0
    out = pd.Series([""] * n, index=(step if step is not None else current).index, dtype=object)
    if step is not None:
        text = step.astype(str).str.strip().str.lower()
        rest = text.apply(lambda s: any(w in s for w in REST_WORDS))
        dis = text.str.contains(r"dis|dchg|dchrg|^d$|^d[_ ]", regex=True) & ~rest
        chg = text.str.contains(r"charge|chg|chrg|^c$|^c[_ ]|^cc|^cv", regex=True) & ~dis & ~rest
        out[rest] = "rest"
        out[dis] = "discharge"
        out[chg] = "charge"
    if current is not None:
        cur = numeric(current)
        tiny = 1e-6 * float(np.nanmax(np.abs(cur))) if cur.notna().any() else 0.0
        unknown = out == ""
        out[unknown & (cur.abs() <= tiny)] = "rest"
        out[unknown & (cur > tiny)] = "charge"
        out[unknown & (cur < -tiny)] = "discharge"
    return out


def _span(x: pd.Series) -> float:
    x = x.dropna()
    if x.empty:
        return np.nan
    d = float(x.max() - x.min())
    return d if d > 0 else np.nan


def reduce_to_cycles(cycle: pd.Series, time_h: pd.Series, caps: Mapping[str, pd.Series],
                     step: pd.Series | None, current: pd.Series | None, source: str,
                     report: list[str]) -> pd.DataFrame:
    """One row per cycle (CYCLE, TIME_H, CHARGE_CAPACITY, DISCHARGE_CAPACITY) from file rows.

    ``caps`` maps the roles 'charge_capacity', 'discharge_capacity' and 'capacity' to
    columns in mAh. Point-level files (many rows per cycle) are reduced by
    :func:`cycles_from_points`; per-cycle files keep the last row of a repeated cycle.
    """
    if bool(cycle.duplicated().mean() > 0.3):  # many rows per cycle
        return cycles_from_points(cycle, time_h, caps, step, current, source, report)
    dup = cycle.duplicated(keep="last")
    if dup.any():
        report.append(f"{int(dup.sum())} repeated cycle rows: the last row of each cycle kept")
    idx = cycle.index[~dup]
    cyc = pd.DataFrame({
        CYCLE: cycle.loc[idx].to_numpy(),
        TIME_H: time_h.loc[idx].to_numpy(),
        CHARGE_CAPACITY: caps["charge_capacity"].loc[idx].to_numpy()
        if "charge_capacity" in caps else np.nan,
        DISCHARGE_CAPACITY: caps["discharge_capacity"].loc[idx].to_numpy()
        if "discharge_capacity" in caps else
        (caps["capacity"].loc[idx].to_numpy() if "capacity" in caps else np.nan),
    })
    if "capacity" in caps and "discharge_capacity" not in caps:
        report.append("single capacity column per cycle taken as discharge capacity")
    return cyc


def cycles_from_points(cycle: pd.Series, time_h: pd.Series, caps: Mapping[str, pd.Series],
                       step: pd.Series | None, current: pd.Series | None, source: str,
                       report: list[str]) -> pd.DataFrame:
    """Reduce point-level rows to cycles: capacity = rise of the counter within the cycle
    (per direction when only one capacity column is given), time = end of the cycle (h)."""
    direction = step_direction(step, current) if (step is not None or current is not None) else None
    work = pd.DataFrame({CYCLE: cycle, TIME_H: time_h})
    for role, s in caps.items():
        work[role] = s
    if direction is not None:
        rest = direction == "rest"
        if rest.any():
            report.append(f"{int(rest.sum())} rest-step rows (no current or rest/OCV step) set aside")
        work["_dir"] = direction
        work = work[~rest]
    rows = []
    for cyc, g in work.groupby(CYCLE, sort=True):
        row = {CYCLE: cyc, TIME_H: float(g[TIME_H].max())}
        if "charge_capacity" in g or "discharge_capacity" in g:
            row[CHARGE_CAPACITY] = _span(g["charge_capacity"]) if "charge_capacity" in g else np.nan
            row[DISCHARGE_CAPACITY] = (
                _span(g["discharge_capacity"]) if "discharge_capacity" in g else np.nan)
        else:
            if "_dir" not in g:
                raise InputError(
                    "one capacity column but no step type or current to tell charge from "
                    "discharge; set [fade] column_map.step or column_map.current, or give "
                    "charge_capacity and discharge_capacity columns",
                    source=source,
                )
            row[CHARGE_CAPACITY] = _span(g.loc[g["_dir"] == "charge", "capacity"])
            row[DISCHARGE_CAPACITY] = _span(g.loc[g["_dir"] == "discharge", "capacity"])
        rows.append(row)
    report.append(f"point-level data reduced to {len(rows)} cycles (capacity = rise of the "
                  "counter within each cycle, time = end of the cycle)")
    return pd.DataFrame(rows, columns=[CYCLE, TIME_H, CHARGE_CAPACITY, DISCHARGE_CAPACITY])


def finish_cycle_table(cyc: pd.DataFrame, capacity_basis: str, skip_first_cycles: int,
                       drop_spikes: bool, spike_threshold: float,
                       report: list[str]) -> pd.DataFrame:
    """Sort by cycle, add coulombic efficiency (%), the fitted signal, the used/note flags and
    retention (%); set aside skipped first cycles, cycles without a capacity and spikes."""
    cyc = cyc.sort_values(CYCLE).reset_index(drop=True)
    cyc[COULOMBIC_EFFICIENCY] = 100.0 * cyc[DISCHARGE_CAPACITY] / cyc[CHARGE_CAPACITY]
    basis = DISCHARGE_CAPACITY if capacity_basis == "discharge" else CHARGE_CAPACITY
    cyc[SIGNAL] = cyc[basis]
    cyc[USED] = True
    cyc[NOTE] = ""
    if skip_first_cycles > 0:
        first = cyc.index[: skip_first_cycles]
        cyc.loc[first, USED] = False
        cyc.loc[first, NOTE] = "skipped (skip_first_cycles)"
        report.append(f"first {len(first)} cycles skipped (skip_first_cycles)")
    bad = cyc[USED] & ~(cyc[SIGNAL] > 0)
    if bad.any():
        cyc.loc[bad, USED] = False
        cyc.loc[bad, NOTE] = f"no {capacity_basis} capacity"
        report.append(f"{int(bad.sum())} cycles without a {capacity_basis} capacity (incomplete or "
                      f"missing) set aside: cycles {_short(cyc.loc[bad, CYCLE])}")
    set_aside_spikes(cyc, drop_spikes, spike_threshold, report)
    first_used = cyc.loc[cyc[USED], SIGNAL]
    ref = float(first_used.iloc[0]) if not first_used.empty else np.nan
    cyc[RETENTION] = 100.0 * cyc[SIGNAL] / ref
    return cyc


def decay_table(time_h: np.ndarray, signal: np.ndarray, drop_spikes: bool,
                spike_threshold: float, report: list[str]) -> pd.DataFrame:
    """Per-sample table of a decay series: drop rows without time or signal, sort by time,
    set aside spikes, add retention (%); capacity columns are empty."""
    tab = pd.DataFrame({CYCLE: np.nan, TIME_H: time_h, SIGNAL: signal})
    missing = tab[TIME_H].isna() | tab[SIGNAL].isna()
    if missing.any():
        report.append(f"{int(missing.sum())} rows with a missing or non-numeric time or signal dropped")
        tab = tab[~missing]
    if not tab[TIME_H].is_monotonic_increasing:
        report.append("rows sorted by time (decay series given out of order)")
        tab = tab.sort_values(TIME_H, kind="stable")
    tab = tab.reset_index(drop=True)
    tab[USED] = True
    tab[NOTE] = ""
    set_aside_spikes(tab, drop_spikes, spike_threshold, report)
    for col in (CHARGE_CAPACITY, DISCHARGE_CAPACITY, COULOMBIC_EFFICIENCY):
        tab[col] = np.nan
    first = tab.loc[tab[USED], SIGNAL]
    tab[RETENTION] = 100.0 * tab[SIGNAL] / (float(first.iloc[0]) if not first.empty else np.nan)
    return tab


def flag_spikes(y: np.ndarray, threshold: float, window: int = 7) -> np.ndarray:
    """Points further than ``threshold`` robust standard deviations from a running median.

    Robust scale: 1.4826 x median absolute deviation from the running median (Hampel
    identifier; Hampel, J. Am. Stat. Assoc. 1974, 69, 383), floored at the median step
    between neighbours and at 0.1 % of the median value. The first and last
    ``window // 2`` points are not tested.
    """
    s = pd.Series(y, dtype=float)
    med = s.rolling(window, center=True, min_periods=window).median()  # edges untested
    resid = (s - med).abs()
    if not resid.notna().any():
        return np.zeros(len(y), dtype=bool)
    # floors: the typical step between neighbours (a spike shifts its neighbours' medians
    # by about one step on a steep trend) and 0.1 % of the level
    step = float(np.nanmedian(np.abs(np.diff(s.to_numpy()))))
    scale = max(1.4826 * float(np.nanmedian(resid)), step, 1e-3 * abs(float(np.nanmedian(s))))
    if scale == 0.0:
        return np.zeros(len(y), dtype=bool)
    return (resid > threshold * scale).to_numpy()


def set_aside_spikes(tab: pd.DataFrame, drop: bool, threshold: float, report: list[str]) -> None:
    """Mark spikes among the used points of ``tab`` as not used (note 'spike'), in place."""
    if not drop:
        return
    idx = tab.index[tab[USED]]
    if len(idx) < 5:
        return
    flags = flag_spikes(tab.loc[idx, SIGNAL].to_numpy(float), threshold)
    spikes = idx[flags]
    if len(spikes):
        tab.loc[spikes, USED] = False
        tab.loc[spikes, NOTE] = "spike"
        where = tab.loc[spikes, CYCLE] if tab[CYCLE].notna().any() else tab.loc[spikes, TIME_H]
        report.append(f"{len(spikes)} spike points (more than {threshold:g} robust SD from the "
                      f"running median) set aside: {_short(where)}")


def _short(values: pd.Series) -> str:
    v = [f"{x:g}" for x in values.tolist()]
    return ", ".join(v[:8]) + (f" ... ({len(v)} in all)" if len(v) > 8 else "")
