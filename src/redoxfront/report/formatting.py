"""How the report shows a number, a column and a flag: one table each, easy to extend.

A new column of ``ranking.csv`` is shown with a human header, unit and precision by adding
one :class:`Column` to :func:`table_columns`; a new flag column gets its badge text by
adding one :class:`Flag` to :data:`FLAGS`. Precision follows what the numbers can carry:
potentials and voltages 0.01 V, half-lives two significant figures, energy density
0.1 Wh/L (common practice, no source).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import pandas as pd

from redoxfront import columns as C

def reference_name(ref: str, user_name: str | None = None) -> str:
    """Human name of a reference electrode key (``fc`` -> ``Fc+/Fc``), from :mod:`redoxfront.units`."""
    from redoxfront.errors import SettingsError
    from redoxfront.units import reference_label

    try:
        return reference_label(ref, user_name)
    except SettingsError:
        return str(ref)


def _missing(value: Any) -> bool:
    if value is None or value is pd.NA:
        return True
    try:
        return isinstance(value, float) and math.isnan(value)
    except TypeError:
        return False


def as_float(value: Any) -> float | None:
    """A finite float, or None for missing, non-numeric and infinite values."""
    if _missing(value) or isinstance(value, bool):
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def significant(value: Any, digits: int = 2) -> str:
    """``value`` rounded to ``digits`` significant figures, written without an exponent
    below a million (3437.8 -> '3400', 0.01234 -> '0.012'); above it as '3.4 × 10⁶'."""
    v = as_float(value)
    if v is None:
        return ""
    if v == 0:
        return "0"
    exponent = math.floor(math.log10(abs(v)))
    if abs(v) >= 1e6 or abs(v) < 1e-4:
        mantissa = v / 10**exponent
        return f"{mantissa:.{digits - 1}f} × 10{str(exponent).translate(_SUPERSCRIPT)}"
    rounded = round(v, digits - 1 - exponent)
    decimals = max(0, digits - 1 - exponent)
    return f"{rounded:.{decimals}f}"


def fixed(value: Any, decimals: int) -> str:
    """``value`` with a fixed number of decimals ('' when missing)."""
    v = as_float(value)
    if v is None:
        return ""
    text = f"{v:.{decimals}f}"
    return "0" + text[2:] if text.startswith("-0") and float(text) == 0 else text


def number(value: Any, kind: str, digits: int) -> str:
    """Format by kind: 'fixed' (decimals), 'sig' (significant figures), 'int'."""
    if kind == "sig":
        return significant(value, digits)
    if kind == "int":
        v = as_float(value)
        return "" if v is None else f"{v:.0f}"
    return fixed(value, digits)


def range_text(low: str, high: str) -> str:
    """'20.0–21.6', or '-3.46 to -2.65' where a dash between negative numbers would misread."""
    return f"{low} to {high}" if low.startswith("-") or high.startswith("-") else f"{low}–{high}"


def duration_words(hours: Any) -> str:
    """A half-life in hours said in the unit a reader thinks in: '≈ 140 days', '≈ 3.1 years'."""
    h = as_float(hours)
    if h is None or h <= 0:
        return ""
    if h < 48:
        return ""
    if h < 24 * 365:
        return f"≈ {significant(h / 24, 2)} days"
    return f"≈ {significant(h / (24 * 365.25), 2)} years"


@dataclass(frozen=True)
class Column:
    """One column of the candidate table: source column, header, unit, precision.

    kind: 'text', 'fixed' (``digits`` decimals), 'sig' (``digits`` significant figures),
    'int'. ``low``/``high``: the columns of its 95 % interval, shown beside the value.
    """

    key: str
    header: str
    unit: str = ""
    kind: str = "fixed"
    digits: int = 2
    low: str | None = None
    high: str | None = None
    note: str = ""
    screen_only: bool = False
    """Left out of the printed page (long text that is in the CSV and on the pick cards)."""


@dataclass(frozen=True)
class Flag:
    """A flag column and the badge each of its values gets (text, then style:
    'good', 'warn', 'bad' or 'info'). Values not listed show as a neutral badge with the
    value itself, so a new value is never hidden; values mapped to None show nothing."""

    key: str
    badges: Mapping[Any, tuple[str, str] | None] = field(default_factory=dict)
    other: tuple[str, str] | None = None
    """(prefix, style) of a badge for a value not listed: the prefix then the value itself
    (for free-text flags such as the window flag); unset = neutral, named by the column."""
    unless: tuple[tuple[str, frozenset[str]], ...] = ()
    """No badge when another column of the row holds one of these values (e.g. the model's
    domain does not matter for a candidate whose rate was measured)."""


_OWN_RATE = ((C.RATE_BASIS, frozenset({"measured", "fitted"})),)
_OWN_POTENTIAL = ((C.POTENTIAL_BASIS, frozenset({"measured"})),)

FLAGS: tuple[Flag, ...] = (
    Flag(C.POTENTIAL_BASIS, {
        "measured": ("measured potential", "good"),
        "calibrated": ("calibrated potential", "good"),
        "uncalibrated": ("uncalibrated potential", "warn"),
        "": None,
    }),
    Flag(C.CALIBRATION_STATUS, {
        "calibrated": None,
        "uncalibrated": None,  # said by the potential basis
        "calibrated (outside calibration range)": ("outside calibration range", "warn"),
    }, unless=_OWN_POTENTIAL),
    Flag(C.POTENTIAL_FLAG, {"": None}, other=("potential: ", "warn")),
    Flag(C.WINDOW_FLAG, {"": None}, other=("electrolyte window: ", "warn")),
    Flag(C.RATE_BASIS, {
        "measured": ("rate measured", "good"),
        "fitted": ("rate fitted from cycling", "good"),
        "predicted": None,
        "": None,
    }),
    Flag(C.DOMAIN, {
        "inside": None,
        "extrapolating": ("rate model extrapolates", "bad"),
        "not predicted": None,  # bipolar rows: the domain of each charged form below
        "": None,
    }, unless=_OWN_RATE + ((C.ROLE, frozenset({"bipolar"})),)),  # a bipolar row: per form, below
    Flag(C.form_column("reduced", C.DOMAIN), {
        "inside": None, "": None, "not predicted": None,
        "extrapolating": ("rate model extrapolates (radical anion)", "bad"),
    }),
    Flag(C.form_column("oxidised", C.DOMAIN), {
        "inside": None, "": None, "not predicted": None,
        "extrapolating": ("rate model extrapolates (radical cation)", "bad"),
    }),
    Flag(C.process_column("reduction", C.CALIBRATION_STATUS), {
        "calibrated": None, "uncalibrated": None, "": None,
        "calibrated (outside calibration range)": ("reduction outside calibration range", "warn"),
    }),
    Flag(C.process_column("oxidation", C.CALIBRATION_STATUS), {
        "calibrated": None, "uncalibrated": None, "": None,
        "calibrated (outside calibration range)": ("oxidation outside calibration range", "warn"),
    }),
    Flag(C.CELL_CONFIGURATION, {"symmetric (same molecule in both tanks)": ("symmetric cell", "info"),
                                 "paired with the best partner": None, "fixed counter potential": None, "": None}),
    Flag(C.CONCENTRATION_CAPPED, {True: ("concentration capped by solubility", "info"), False: None}),
    Flag(C.MEASURED, {True: ("rate measured", "good"), False: None}, unless=((C.RATE_BASIS, frozenset({"measured", "fitted", "predicted"})),)),
    Flag(C.KNEE, {True: ("knee of the front", "info"), False: None}),
)
"""Every flag column the report shows as badges, in the order they appear."""

_TRUE = {"true", "yes", "1", "y"}
_FALSE = {"false", "no", "0", "n"}


def _normalise(value: Any) -> Any:
    if _missing(value):
        return ""
    if isinstance(value, (bool,)) or type(value).__name__ == "bool_":
        return bool(value)
    text = str(value).strip()
    if text.lower() in _TRUE:
        return True
    if text.lower() in _FALSE:
        return False
    return text


def badges(row: Mapping[str, Any], flags: tuple[Flag, ...] = FLAGS) -> list[dict[str, str]]:
    """Badges ({'text', 'style'}) of one table row: every flag column it holds."""
    out: list[dict[str, str]] = []
    for flag in flags:
        if flag.key not in row:
            continue
        if any(str(_normalise(row.get(other))) in values for other, values in flag.unless):
            continue
        value = _normalise(row[flag.key])
        if value in flag.badges:
            found = flag.badges[value]
            if found is None:
                continue
            text, style = found
        elif value == "" or value is False:
            continue
        elif flag.other is not None:  # free text: its first clause on the badge, all of it on hover
            text, style = f"{flag.other[0]}{str(value).split(':')[0]}", flag.other[1]
            out.append({"text": text, "style": style, "detail": str(value)})
            continue
        else:
            text, style = (flag.key.replace("_", " ") if value is True else f"{flag.key.replace('_', ' ')}: {value}"), "info"
        out.append({"text": text, "style": style, "detail": ""})
    return out


def table_columns(r: str) -> tuple[Column, ...]:
    """Columns of the candidate table in reading order (those a table lacks are skipped);
    ``r``: the reference electrode as a reader knows it."""
    return (
        Column(C.PICK_ORDER, "Pick", kind="int"),
        Column(C.ID, "Candidate", kind="text"),
        Column("potential_shown", "Potential", f"V vs {r}", digits=2, low="potential_shown_low",
               high="potential_shown_high", note="measured, calibrated or uncalibrated: see the badges"),
        Column("reduction_shown", "Reduction potential", f"V vs {r}", digits=2, low="reduction_shown_low",
               high="reduction_shown_high", note="bipolar candidates: A + e- -> A.- (the negative tank)"),
        Column("oxidation_shown", "Oxidation potential", f"V vs {r}", digits=2, low="oxidation_shown_low",
               high="oxidation_shown_high", note="bipolar candidates: A -> A.+ + e- (the positive tank)"),
        Column(C.CELL_VOLTAGE, "Cell voltage", "V", digits=2, low=C.CELL_VOLTAGE_LOW, high=C.CELL_VOLTAGE_HIGH,
               note="bipolar candidates: E(oxidation) - E(reduction) of a symmetric cell"),
        Column(C.CAPACITY_VOL, "Capacity", "Ah/L", digits=1),
        Column(C.CAPACITY_GRAV, "Capacity", "mAh/g", kind="fixed", digits=0),
        Column(C.ENERGY_DENSITY, "Energy density", "Wh/L", digits=1, low=C.ENERGY_DENSITY_LOW,
               high=C.ENERGY_DENSITY_HIGH),
        Column(C.HALF_LIFE, "Half-life", "h", kind="sig", digits=2, low=C.HALF_LIFE_LOW, high=C.HALF_LIFE_HIGH),
        Column(C.LIFE_LIMITED_BY, "Life limited by", kind="text",
               note="bipolar candidates: the charged form (reduced or oxidised) whose half-life limits the cell"),
        Column(C.P_FRONT, "P(on front)", "", digits=2),
        Column(C.PARETO_RANK, "Front no.", kind="int"),
        Column(C.MOLAR_MASS, "Molar mass", "g/mol", digits=1),
        Column(C.CONCENTRATION, "Concentration", "mol/L", digits=2),
        Column(C.SMILES, "SMILES", kind="text", screen_only=True),
    )

LEAD_COLUMNS: tuple[str, ...] = (C.PICK_ORDER, C.ID)
"""Columns shown before the flags (the rest follow them)."""


def header_text(column: Column) -> str:
    """Header as printed: name and unit in parentheses."""
    return f"{column.header} ({column.unit})" if column.unit else column.header


def cell(row: Mapping[str, Any], column: Column) -> dict[str, Any]:
    """One table cell: shown text, its interval text and the value the sort uses."""
    value = row.get(column.key)
    if column.kind == "text":
        text = "" if _missing(value) else str(value)
        return {"text": text, "interval": "", "sort": text.lower(), "numeric": False, "screen_only": column.screen_only}
    text = number(value, column.kind, column.digits)
    interval = ""
    if column.low and column.high:
        lo, hi = row.get(column.low), row.get(column.high)
        if as_float(lo) is not None and as_float(hi) is not None and text:
            lo_text, hi_text = number(lo, column.kind, column.digits), number(hi, column.kind, column.digits)
            interval = "" if lo_text == hi_text == text else f"{lo_text} to {hi_text}"
    v = as_float(value)
    return {"text": text, "interval": interval, "sort": "" if v is None else repr(v), "numeric": True,
            "screen_only": column.screen_only}
