"""Cycler and decay-series file import: reading, header roles and unit detection.

Reads CSV, TSV or XLSX files exported by battery cyclers (point level: time, cycle,
step, current, voltage, charge/discharge capacity; or one row per cycle) and decay
series (concentration, absorbance or NMR integral against time). Times are converted
to hours, capacities to mAh, concentrations to mol/L. :func:`load_series` then hands
the columns to the clean-up rules of :mod:`redoxfront.fade.cleanup`; every action
taken on the data (rows dropped, counters renumbered, spikes set aside) is written to a
plain-language report so a user can check it.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Mapping

import numpy as np
import pandas as pd

from redoxfront.columns import CYCLE, TIME_H, USED
from redoxfront.errors import InputError
from redoxfront.fade.cleanup import (
    decay_table,
    finish_cycle_table,
    fix_counter_resets,
    numeric,
    reduce_to_cycles,
)
from redoxfront.units import SECONDS_PER_DAY, SECONDS_PER_HOUR

# ---- roles a column can play ----------------------------------------------------
ROLES: tuple[str, ...] = (
    "id", "time", "cycle", "step", "current", "voltage", "charge_capacity",
    "discharge_capacity", "capacity", "concentration", "absorbance", "integral",
)
"""Keys allowed in ``[fade] column_map``."""
DECAY_ROLES: tuple[str, ...] = ("concentration", "absorbance", "integral")
TIME_UNITS_H: dict[str, float] = {
    "s": 1.0 / SECONDS_PER_HOUR, "min": 60.0 / SECONDS_PER_HOUR, "h": 1.0,
    "d": SECONDS_PER_DAY / SECONDS_PER_HOUR,
}
"""Factor from a time unit to hours."""
_TIME_ALIASES = {
    "s": "s", "sec": "s", "secs": "s", "second": "s", "seconds": "s",
    "min": "min", "mins": "min", "minute": "min", "minutes": "min",
    "h": "h", "hr": "h", "hrs": "h", "hour": "h", "hours": "h",
    "d": "d", "day": "d", "days": "d",
}
CAPACITY_UNITS_MAH: dict[str, float] = {
    "mah": 1.0, "ah": 1000.0, "uah": 1e-3, "c": 1000.0 / SECONDS_PER_HOUR,
    "as": 1000.0 / SECONDS_PER_HOUR, "mc": 1.0 / SECONDS_PER_HOUR, "mas": 1.0 / SECONDS_PER_HOUR,
}
"""Factor from a charge unit to mAh (1 C = 1 A s = 1/3.6 mAh)."""
CONCENTRATION_UNITS_MOL_PER_L: dict[str, float] = {
    "m": 1.0, "mol/l": 1.0, "moll-1": 1.0, "mol/dm3": 1.0, "mm": 1e-3, "mmol/l": 1e-3,
    "mmoll-1": 1e-3, "um": 1e-6, "umol/l": 1e-6,
}
_CURRENT_UNITS_A = {"a": 1.0, "ma": 1e-3, "ua": 1e-6}
_UNIT_WORDS = set(_TIME_ALIASES) | set(CAPACITY_UNITS_MAH) | set(_CURRENT_UNITS_A) | {"v", "mv"}
_FILLER = {"test", "total", "the", "of", "measured", "cumulative", "run", "experiment", "exp"}

_DIS = r"(?:dis|discharge|dischg|dchg|dchrg|d)"
_CHG = r"(?:charge|chg|chrg|ch)"
_CAP = r"(?:capacity|cap|q)"
_PATTERNS: tuple[tuple[str, str], ...] = (
    ("id", r"id|candidate|candidate id|sample id"),
    ("discharge_capacity", rf"{_DIS} ?{_CAP}|{_CAP} ?{_DIS}"),
    ("charge_capacity", rf"{_CHG} ?{_CAP}|{_CAP} ?{_CHG}"),
    ("capacity", rf"{_CAP}|specific {_CAP}"),
    ("time", r"time|t|elapsed time|time elapsed|relative time|timestamp|date time|datetime"),
    ("cycle", r"cycle|cycles|cyc|cycle (?:index|number|no|nr|count|id|#)|(?:no|n) cycle|cycle#"),
    ("step", r"step|step type|step name|state|mode|status|step mode|md"),
    ("current", r"current|i|curr|cell current"),
    ("voltage", r"voltage|potential|ewe|ecell|u|v|e|cell voltage|cell potential"),
    ("concentration", r"concentration|conc|c"),
    ("absorbance", r"absorbance|abs|a|od|optical density"),
    ("integral", r"integral|nmr integral|peak area|area|intensity|signal|relative integral"),
)


@dataclass(frozen=True)
class DetectedColumn:
    """One recognised column: its header as written, its role and the unit read from it."""

    header: str
    role: str
    unit: str | None


@dataclass(frozen=True)
class SeriesData:
    """A per-cycle (or per-sample) table ready for fitting, with what was done to it.

    ``table`` has the columns ``CYCLE``, ``TIME_H``, ``CHARGE_CAPACITY``,
    ``DISCHARGE_CAPACITY``, ``COULOMBIC_EFFICIENCY``, ``RETENTION``, ``SIGNAL``, ``USED``,
    ``NOTE`` of :mod:`redoxfront.columns`. ``kind`` is ``'cycling'`` or ``'decay'``.
    """

    source: str
    kind: str
    table: pd.DataFrame
    signal_label: str
    columns_used: Mapping[str, str]
    report: tuple[str, ...]
    dataset_id: str | None = None
    signal_unit_factor_to_mol_per_l: float | None = None
    extras: Mapping[str, str] = field(default_factory=dict)

    @property
    def n_used(self) -> int:
        return int(self.table[USED].sum())


def split_header(header: str) -> tuple[str, str | None]:
    """Split a header such as ``'Test Time (s)'`` or ``'Q discharge/mA.h'`` into a name and a unit."""
    text = str(header).strip()
    m = re.match(r"^(.*?)[\s_]*[\(\[\{]\s*([^\)\]\}]*?)\s*[\)\]\}]\s*$", text)
    if m and m.group(1):
        return _normal_name(m.group(1)), _normal_unit(m.group(2))
    m = re.match(r"^([^/]*?)\s*/\s*([^/]+)$", text)
    if m and m.group(1) and not re.search(r"\d", m.group(2)[:1]):
        unit = _normal_unit(m.group(2))
        if unit in _UNIT_WORDS or unit in CONCENTRATION_UNITS_MOL_PER_L:
            return _normal_name(m.group(1)), unit
    tokens = re.split(r"[\s_]+", text)
    if len(tokens) > 1 and _normal_unit(tokens[-1]) in _UNIT_WORDS:
        return _normal_name(" ".join(tokens[:-1])), _normal_unit(tokens[-1])
    return _normal_name(text), None


def _normal_name(name: str) -> str:
    words = re.sub(r"[_.\-:]+", " ", name.strip().lower()).split()
    return " ".join(w for w in words if w not in _FILLER)


def _normal_unit(unit: str) -> str:
    u = unit.strip().lower().replace("µ", "u").replace("μ", "u")
    u = re.sub(r"[\s.·*]+", "", u)
    return u.replace("⁻¹", "-1").replace("^-1", "-1")


def role_of(header: str) -> str | None:
    """The role of a header by its common spellings, or None if not recognised."""
    name, _unit = split_header(header)
    for role, pattern in _PATTERNS:
        if re.fullmatch(pattern, name):
            return role
    return None


def detect_columns(
    headers: list[str], column_map: Mapping[str, str] | None, source: str
) -> dict[str, DetectedColumn]:
    """Assign roles to headers: the user's ``column_map`` first, then common spellings.

    The first header matching a role wins. Raises InputError if a mapped header is missing.
    """
    found: dict[str, DetectedColumn] = {}
    lower = {str(h).strip().lower(): h for h in headers}
    for role, wanted in (column_map or {}).items():
        if role not in ROLES:
            raise InputError(
                f"[fade] column_map key '{role}' is not a role; allowed keys: {', '.join(ROLES)}",
                source=source,
            )
        header = lower.get(str(wanted).strip().lower())
        if header is None:
            raise InputError(
                f"[fade] column_map.{role} = '{wanted}' is not a header of this file; headers "
                f"found: {_list(headers)}",
                source=source,
            )
        found[role] = DetectedColumn(str(header), role, split_header(str(header))[1])
    taken = {c.header for c in found.values()}
    for header in headers:
        if str(header) in taken:
            continue
        role = role_of(str(header))
        if role is not None and role not in found:
            found[role] = DetectedColumn(str(header), role, split_header(str(header))[1])
    return found


def _list(headers: list[str]) -> str:
    return ", ".join(f"'{h}'" for h in headers)


def read_table(path: Path) -> list[pd.DataFrame]:
    """Read a CSV/TSV/TXT (delimiter and decimal comma sniffed) or every sheet of an XLSX file.

    Each table's ``attrs["sheet"]`` names its sheet (None for a text file)."""
    suffix = path.suffix.lower()
    if suffix in (".xlsx", ".xlsm"):
        try:
            sheets = pd.read_excel(path, sheet_name=None, engine="openpyxl")
        except Exception as exc:  # openpyxl raises many kinds for broken files
            raise InputError(f"cannot read the Excel file: {exc}", source=str(path)) from exc
        for name, s in sheets.items():
            s.attrs["sheet"] = str(name)
        return [s for s in sheets.values() if not s.empty] or [pd.DataFrame()]
    if suffix == ".xls":
        raise InputError("old-style .xls files are not read; save the sheet as .xlsx or CSV",
                         source=str(path))
    raw = path.read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = raw.decode("latin-1")
    head = text[:8192]
    if suffix in (".tsv", ".tab"):
        sep = "\t"
    else:
        try:
            sep = csv.Sniffer().sniff(head, delimiters=",;\t|").delimiter
        except csv.Error:
            sep = ","
    decimal = "," if sep in (";", "\t") and re.search(r"\d,\d", head) else "."
    from io import StringIO

    try:
        header = pd.read_csv(StringIO(text), sep=sep, nrows=0).columns
        ids = {h: str for h in header if role_of(str(h)) == "id"}  # '001' stays '001'
        table = pd.read_csv(StringIO(text), sep=sep, decimal=decimal, skip_blank_lines=False,
                            keep_default_na=False, na_values=[""], dtype=ids)
        table.attrs["sheet"] = None
        return [table]
    except (pd.errors.ParserError, pd.errors.EmptyDataError) as exc:
        raise InputError(f"cannot read as a {sep!r}-separated table: {exc}", source=str(path)) from exc


def _has_data(cols: Mapping[str, Any]) -> bool:
    return any(r in cols for r in ("charge_capacity", "discharge_capacity", "capacity", *DECAY_ROLES))


def data_sheets(path: Path, column_map: Mapping[str, str] | None = None) -> tuple[list[str], list[str]]:
    """Sheets of a workbook: (those with a capacity or decay column, the other non-empty ones).

    Every data sheet is a dataset of its own; the others are named in the report as not used.
    A text file has no sheets: ([], [])."""
    if path.suffix.lower() not in (".xlsx", ".xlsm"):
        return [], []
    data, other = [], []
    for table in read_table(path):
        name = table.attrs.get("sheet")
        if name is None:
            continue
        (data if _has_data(detect_columns([str(h) for h in table.columns], column_map, str(path))) else other).append(name)
    return data, other


def resolve_unit(header_unit: str | None, setting: str | None, header: str, setting_name: str,
                 source: str) -> str | None:
    """The unit of a column: the one in its header always wins; the ``[fade]`` setting applies
    only to headers without a unit. A header unit that contradicts the setting is an error
    naming the file, the header and the setting (a wrong unit changes a rate by up to 3600x)."""
    if header_unit is not None and setting is not None and header_unit != setting:
        raise InputError(
            f"the header '{header}' says {header_unit} but [fade] {setting_name} = '{setting}'; "
            f"the header's unit is used for files that state one: remove [fade] {setting_name} "
            "(it applies only to headers without a unit) or correct the file",
            field=header, source=source,
        )
    return header_unit or setting


def _time_hours(col: pd.Series, det: DetectedColumn, time_unit: str | None, source: str,
                report: list[str]) -> pd.Series:
    values = numeric(col)
    if values.notna().sum() < max(1, 0.5 * col.notna().sum()):
        stamps = pd.to_datetime(col, errors="coerce")
        if stamps.notna().sum() >= max(1, 0.5 * col.notna().sum()):
            report.append(f"time read as date-time stamps from '{det.header}', hours since the first")
            return (stamps - stamps.dropna().iloc[0]).dt.total_seconds() / SECONDS_PER_HOUR
    header_unit = _TIME_ALIASES.get(det.unit) if det.unit else None
    unit = resolve_unit(header_unit, time_unit, det.header, "time_unit", source)
    if unit is None:
        raise InputError(
            f"the time column '{det.header}' has no unit in its header"
            + (f" (found '{det.unit}')" if det.unit else "")
            + "; set [fade] time_unit = 's', 'min', 'h' or 'd'",
            field=det.header, source=source,
        )
    report.append(f"time from '{det.header}' in {unit}"
                  + (" (from the header)" if header_unit else " ([fade] time_unit setting)"))
    return values * TIME_UNITS_H[unit]


def _capacity(df: pd.DataFrame, cols: dict[str, DetectedColumn], capacity_unit: str | None,
              report: list[str], source: str) -> dict[str, pd.Series]:
    out: dict[str, pd.Series] = {}
    for role in ("charge_capacity", "discharge_capacity", "capacity"):
        if role in cols:
            det = cols[role]
            header_unit = det.unit if det.unit in CAPACITY_UNITS_MAH else None
            unit = resolve_unit(header_unit, capacity_unit, det.header, "capacity_unit", source)
            factor = CAPACITY_UNITS_MAH.get(unit or "", None)
            if factor is None:
                factor = 1.0
                report.append(f"capacity unit of '{det.header}' not recognised "
                              f"({det.unit or 'none'}); values used as given and labelled mAh; "
                              "set [fade] capacity_unit to fix")
            else:
                report.append(f"capacity from '{det.header}' in {unit}"
                              + (" (from the header)" if header_unit else " ([fade] capacity_unit setting)"))
            values = numeric(df[det.header])
            text = df[det.header].notna() & values.isna()
            if text.any():
                report.append(f"{int(text.sum())} values of '{det.header}' are not numbers "
                              f"(e.g. {str(df.loc[text, det.header].iloc[0])!r}); those cycles have no capacity")
            out[role] = values.abs() * factor
    return out


def load_series(
    path: str | Path,
    *,
    column_map: Mapping[str, str] | None = None,
    time_unit: str | None = None,
    capacity_unit: str | None = None,
    capacity_basis: str = "discharge",
    hours_per_cycle: float | None = None,
    skip_first_cycles: int = 0,
    drop_spikes: bool = True,
    spike_threshold: float = 6.0,
    sheet: str | None = None,
) -> SeriesData:
    """Read one cycler or decay file into a per-cycle (or per-sample) table with a hygiene report.

    Times in h, capacities in mAh. Raises InputError (file, headers found, the
    ``[fade] column_map`` key to set) when the needed columns are not recognised.
    ``sheet``: the workbook sheet to read (see :func:`data_sheets`); default the first
    sheet with data columns.
    """
    p = Path(path)
    source = str(p)
    if not p.exists():
        raise InputError("file not found", source=source)
    sheets = read_table(p)
    if sheet is not None:
        sheets = [s for s in sheets if s.attrs.get("sheet") == sheet]
        if not sheets:
            raise InputError(f"no sheet named '{sheet}'", source=source)
        source = f"{source} (sheet '{sheet}')"
    df, cols = sheets[0], {}
    for table in sheets:
        c = detect_columns([str(h) for h in table.columns], column_map, source)
        if _has_data(c):
            df, cols = table, c
            break
    headers = [str(h) for h in df.columns]
    df.columns = headers
    blank = df.isna().all(axis=1) | df.astype(str).apply(lambda c: c.str.strip()).isin(["", "nan"]).all(axis=1)
    report: list[str] = [f"{int((~blank).sum())} data rows read"]
    if blank.any():
        report.append(f"{int(blank.sum())} blank rows skipped (data rows "
                      + ", ".join(str(i + 2) for i in np.flatnonzero(blank)[:10])
                      + (" ..." if blank.sum() > 10 else "") + ")")
        df = df[~blank].copy()
    if not cols:
        cols = detect_columns(headers, column_map, source)
    is_cycling = any(r in cols for r in ("charge_capacity", "discharge_capacity", "capacity"))
    is_decay = any(r in cols for r in DECAY_ROLES)
    if not is_cycling and not is_decay:
        raise InputError(
            f"no capacity or decay-signal column recognised; headers found: {_list(headers)}; "
            "set [fade] column_map.discharge_capacity (or charge_capacity, capacity, "
            "concentration, absorbance, integral) to the header to use",
            source=source,
        )
    dataset_id = None
    if "id" in cols:
        ids = df[cols["id"].header].dropna().astype(str)
        dataset_id = ids.iloc[0] if not ids.empty else None
    used_cols = {role: det.header for role, det in cols.items()}
    report.append("columns used: " + ", ".join(f"{r} = '{h}'" for r, h in used_cols.items()))

    if "time" in cols:
        df["_time_h"] = _time_hours(df[cols["time"].header], cols["time"], time_unit, source, report)
    elif "cycle" in cols and hours_per_cycle:
        df["_time_h"] = np.nan  # filled per cycle below
    else:
        raise InputError(
            f"no time column recognised; headers found: {_list(headers)}; set [fade] "
            "column_map.time to the header to use"
            + (", or [fade] hours_per_cycle for per-cycle files" if is_cycling else ""),
            source=source,
        )
    if is_decay and not is_cycling:
        return _decay_series(df, cols, source, report, used_cols, dataset_id, drop_spikes,
                             spike_threshold)

    if "cycle" not in cols:
        raise InputError(
            f"no cycle-number column recognised; headers found: {_list(headers)}; set [fade] "
            "column_map.cycle to the header to use",
            source=source,
        )
    df["_cycle"] = numeric(df[cols["cycle"].header])
    missing = df["_cycle"].isna() | ("time" in cols and df["_time_h"].isna())
    if missing.any():
        report.append(f"{int(missing.sum())} rows with a missing or non-numeric cycle or time "
                      "dropped")
        df = df[~missing].copy()
    df = _sort_out_of_order(df, "_cycle", "cycle", report)
    df["_cycle"] = fix_counter_resets(df["_cycle"], "cycle counter", report, 1.0)
    per_cycle = not bool(df["_cycle"].duplicated().mean() > 0.3)
    if "time" in cols:
        # per-cycle rows hold the time at the end of each cycle: after a restart the first row
        # ends one cycle later than the last row before it, so the offset adds one cycle
        # duration (the median spacing of the rows); point-level rows continue where they stopped
        steps = df["_time_h"].diff()
        cycle_h = float(steps[steps > 0].median()) if per_cycle and (steps > 0).any() else 0.0
        df["_time_h"] = fix_counter_resets(df["_time_h"], "time", report, cycle_h)
    caps = _capacity(df, cols, capacity_unit, report, source)
    cyc = reduce_to_cycles(df["_cycle"], df["_time_h"], caps,
                           df[cols["step"].header] if "step" in cols else None,
                           df[cols["current"].header] if "current" in cols else None,
                           source, report)
    if "time" not in cols:
        cyc[TIME_H] = (cyc[CYCLE] - cyc[CYCLE].min() + 1) * float(hours_per_cycle or 0.0)
        report.append(f"no time column: time = cycle x {hours_per_cycle:g} h (hours_per_cycle)")
    cyc = finish_cycle_table(cyc, capacity_basis, skip_first_cycles, drop_spikes, spike_threshold,
                             report)
    label = f"{capacity_basis} capacity / mAh"
    return SeriesData(source, "cycling", cyc, label, used_cols, tuple(report), dataset_id)


def _sort_out_of_order(df: pd.DataFrame, key: str, what: str, report: list[str]) -> pd.DataFrame:
    """Rows whose ``key`` values are all distinct but not in order are sorted, with a note.

    Distinct values out of order are rows written (or pasted) out of order, not a restarted
    counter: a restart repeats values (1, 2, ..., 50, 1, 2, ...), which the reset rule handles.
    """
    v = df[key]
    if len(v) < 2 or v.duplicated().any() or v.is_monotonic_increasing:
        return df
    falls = int((v.diff() < 0).sum())
    report.append(f"rows out of order ({falls} places where the {what} falls back, every {what} value "
                  f"distinct, so no restart): sorted by {what}")
    return df.sort_values(key, kind="stable")


def _decay_series(df: pd.DataFrame, cols: dict[str, DetectedColumn], source: str,
                  report: list[str], used_cols: dict[str, str], dataset_id: str | None,
                  drop_spikes: bool, spike_threshold: float) -> SeriesData:
    role = next(r for r in DECAY_ROLES if r in cols)
    det = cols[role]
    y = numeric(df[det.header])
    factor = None
    label = role
    if role == "concentration":
        factor = CONCENTRATION_UNITS_MOL_PER_L.get(det.unit or "")
        if factor is None:
            report.append(f"concentration unit of '{det.header}' not recognised "
                          f"({det.unit or 'none'}); mol/L assumed")
            factor = 1.0
        y = y * factor
        label = "concentration / (mol/L)"
    tab = decay_table(df["_time_h"].to_numpy(), y.to_numpy(), drop_spikes, spike_threshold, report)
    return SeriesData(source, "decay", tab, label, used_cols, tuple(report), dataset_id,
                      signal_unit_factor_to_mol_per_l=1.0 if role == "concentration" else None)
