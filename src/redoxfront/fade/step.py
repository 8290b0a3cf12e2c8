"""The fade step: ``[fade]`` settings, one rates row per dataset, the folder runner, ``fade_campaign``.

Each cycler or decay file is read by :func:`redoxfront.fade.files.load_series`, fitted
with the rate laws of :mod:`redoxfront.fade.rate_laws` (lowest AICc) and turned into one row of
``results/rates.csv`` (columns :data:`redoxfront.columns.RATE_TABLE_COLUMNS`), with
``fade_models.csv``, ``fade_cycles.csv``, ``fade_report.md`` and one figure per dataset.

Capacity fade of a cycled cell is converted to the decomposition rate of the charged
species with the time-averaged state of charge s (docs/fade.md): if only the charged
form decays, with order n, the total capacity fades with k_fade ~ k_dec * s**n, so
k_dec = k_fade / s**n (exact for first order; for second order exact only at constant
state of charge). Symmetric-cell data isolate one electrolyte (Goulet & Aziz,
J. Electrochem. Soc. 2018); full-cell data may include fade of the other side and
crossover, so their k is an upper bound and is labelled ``full``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable, Mapping

import numpy as np
import pandas as pd

from redoxfront import columns
from redoxfront.campaign import Campaign, bounded, choice, section_from_mapping
from redoxfront.columns import (
    CAPACITY_HALF_LIFE,
    CELL_TYPE,
    CI_METHOD,
    CYCLE,
    DATA_KIND,
    FADE_MODEL,
    FADE_PER_CYCLE,
    FADE_PER_DAY,
    K_FADE,
    K_FIRST,
    K_SECOND,
    MEAN_SOC,
    N_POINTS_READ,
    N_POINTS_USED,
    RATE_TABLE_COLUMNS,
    SIGNAL,
    SOURCE_FILE,
    STATUS,
    TIME_H,
    TIME_TO_80,
    USED,
)
from redoxfront.errors import DataError, RedoxfrontError, SettingsError
from redoxfront.fade.files import (
    CAPACITY_UNITS_MAH,
    ROLES,
    TIME_UNITS_H,
    SeriesData,
    data_sheets,
    load_series,
)
from redoxfront.fade.rate_laws import (
    HOURS_PER_DAY,
    MODELS,
    FadeModel,
    ModelChoice,
    choose_model,
)
from redoxfront.csv_tables import write_csv
from redoxfront.outputs import write_text

LOW, HIGH = columns.CI_LOW_SUFFIX, columns.CI_HIGH_SUFFIX
"""Suffixes of the 95 % confidence-interval columns of the rate table."""


@dataclass(frozen=True)
class FadeSettings:
    """The ``[fade]`` campaign section (see docs/fade.md for every key)."""

    column_map: dict[str, str] = field(default_factory=dict)
    time_unit: str | None = field(default=None, metadata=choice(*TIME_UNITS_H))
    capacity_unit: str | None = field(default=None, metadata=choice(*CAPACITY_UNITS_MAH))
    capacity_basis: str = field(default="discharge", metadata=choice("discharge", "charge"))
    hours_per_cycle: float | None = field(default=None, metadata=bounded(1e-9, None))
    skip_first_cycles: int = field(default=0, metadata=bounded(0, None))
    models: tuple[str, ...] = MODELS
    rate_order: str = field(default="auto", metadata=choice("auto", "first", "second"))
    bootstrap: int = field(default=0, metadata=bounded(0, 100000))
    seed: int = field(default=20261201, metadata=bounded(0, 2**31 - 1))
    robust_loss: bool = False
    drop_spikes: bool = True
    spike_threshold: float = field(default=6.0, metadata=bounded(2.0, None))
    cell_type: str = field(default="symmetric", metadata=choice("symmetric", "full"))
    mean_state_of_charge: float = field(default=0.5, metadata=bounded(0.01, 1.0))
    initial_concentration_mol_per_l: float | None = field(default=None, metadata=bounded(1e-9, None))
    min_points: int = field(default=5, metadata=bounded(3, None))
    figures: bool = True
    figure_format: str = field(default="svg", metadata=choice("svg", "png"))

    def __post_init__(self) -> None:
        if not self.models:
            raise SettingsError(f"[fade] models is empty; allowed values: {', '.join(MODELS)}")
        for m in self.models:
            if m not in MODELS:
                raise SettingsError(f"[fade] models: '{m}' is not a model; allowed values: "
                                    + ", ".join(MODELS))
        for role, header in self.column_map.items():
            if role not in ROLES:
                raise SettingsError(f"[fade] column_map key '{role}' is not a role; allowed keys: "
                                    + ", ".join(ROLES))
            if not isinstance(header, str):
                raise SettingsError(f"[fade] column_map.{role}: expected a header text, got {header!r}")
        if self.rate_order == "second" and "second_order" not in self.models:
            raise SettingsError("[fade] rate_order = 'second' needs 'second_order' in [fade] models")


def fade_settings(mapping: Mapping[str, Any] | None) -> FadeSettings:
    """Validate a ``[fade]`` table into :class:`FadeSettings`."""
    return section_from_mapping(FadeSettings, mapping, "fade")


@dataclass(frozen=True)
class DatasetResult:
    """The fit of one dataset: the series, all models, the chosen one and its rates-table row."""

    dataset_id: str
    series: SeriesData
    choice: ModelChoice
    chosen_fit: FadeModel
    row: Mapping[str, Any]
    t0_h: float


def _log10(x: float) -> float:
    return math.log10(x) if x > 0 and math.isfinite(x) else math.nan


def fit_series(series: SeriesData, settings: FadeSettings, dataset_id: str) -> DatasetResult:
    """Fit one loaded series and compute its derived figures (one row of ``rates.csv``)."""
    signal = pd.to_numeric(series.table[SIGNAL], errors="coerce")
    if len(signal) and ((signal == 0) | signal.isna()).all():
        raise DataError(f"{series.source}: the signal is zero (or missing) at all {len(signal)} points: "
                        "nothing decays; check the column used (see the hygiene report) and its unit")
    tab = series.table[series.table[USED]]
    n = len(tab)
    if n >= 2 and float(np.ptp(tab[TIME_H].to_numpy(float))) == 0.0:
        raise DataError(f"{series.source}: all {n} usable points are at one time "
                        f"({float(tab[TIME_H].iloc[0]):g} h), so no rate can be fitted; check the time "
                        "column and [fade] time_unit")
    if n < settings.min_points:
        raise DataError(f"{series.source}: {n} usable points, at least {settings.min_points} "
                        f"needed (of {len(series.table)} read; see the hygiene report)")
    t0 = float(tab[TIME_H].iloc[0])
    t = tab[TIME_H].to_numpy(float) - t0
    y = tab[SIGNAL].to_numpy(float)
    allowed = None
    if settings.rate_order == "first":
        allowed = [m for m in settings.models if m != "second_order"]
    elif settings.rate_order == "second":
        allowed = ["second_order"]
    mc = choose_model(t, y, settings.models, allowed=allowed, robust=settings.robust_loss)
    chosen = mc.chosen
    fit = FadeModel(chosen, robust=settings.robust_loss, bootstrap=settings.bootstrap,
                    seed=settings.seed).fit(t, y) if settings.bootstrap else mc.fits[chosen]
    law = fit.law
    decay = series.kind == "decay"
    soc = 1.0 if decay else settings.mean_state_of_charge
    conv = soc**law.order
    k_fade, (lo_fade, hi_fade) = fit.params_["k"], fit.k_ci_
    k, lo, hi = k_fade / conv, lo_fade / conv, hi_fade / conv
    k2 = k2_lo = k2_hi = math.nan
    if law.order == 2:
        c0 = (fit.params_["y0"] if series.signal_unit_factor_to_mol_per_l is not None
              else settings.initial_concentration_mol_per_l)
        if c0 and c0 > 0:
            k2, k2_lo, k2_hi = k / c0, lo / c0, hi / c0
    per_cycle = math.nan
    cyc = tab[CYCLE].to_numpy(float)
    if not decay and np.all(np.isfinite(cyc)) and n >= len(law.params) + 1:
        try:
            fc = FadeModel(chosen, robust=settings.robust_loss).fit(cyc - cyc[0], y)
            per_cycle = 100.0 * (1.0 - float(fc.predict([1.0])[0] / fc.predict([0.0])[0]))
        except DataError:
            pass
    y0 = float(fit.predict([0.0])[0])
    per_day = 100.0 * (1.0 - float(fit.predict([HOURS_PER_DAY])[0]) / y0) if y0 else math.nan
    hl = law.half_life_from_k
    row = {
        columns.ID: dataset_id, STATUS: "ok", FADE_MODEL: chosen, DATA_KIND: series.kind,
        CELL_TYPE: "decay" if decay else settings.cell_type, MEAN_SOC: soc,
        K_FIRST: k, K_FIRST + LOW: lo, K_FIRST + HIGH: hi,
        columns.LOG10_K_FIRST: _log10(k), columns.LOG10_K_FIRST + LOW: _log10(lo),
        columns.LOG10_K_FIRST + HIGH: _log10(hi),
        K_SECOND: k2, K_SECOND + LOW: k2_lo, K_SECOND + HIGH: k2_hi,
        columns.LOG10_K_SECOND: _log10(k2), columns.LOG10_K_SECOND + LOW: _log10(k2_lo),
        columns.LOG10_K_SECOND + HIGH: _log10(k2_hi),
        K_FADE: k_fade, K_FADE + LOW: lo_fade, K_FADE + HIGH: hi_fade,
        columns.HALF_LIFE: hl(k), columns.HALF_LIFE + LOW: hl(hi) if hi > 0 else math.nan,
        columns.HALF_LIFE + HIGH: hl(lo) if lo > 0 else math.inf,
        CAPACITY_HALF_LIFE: fit.time_to_fraction(0.5), FADE_PER_DAY: per_day,
        FADE_PER_CYCLE: per_cycle, TIME_TO_80: fit.time_to_fraction(0.8),
        CI_METHOD: fit.ci_method_, N_POINTS_USED: n, N_POINTS_READ: len(series.table),
        SOURCE_FILE: series.source,
    }
    return DatasetResult(dataset_id, series, mc, fit, row, t0)


def fit_fade_file(path: str | Path, settings: FadeSettings | None = None,
                  dataset_id: str | None = None, sheet: str | None = None) -> DatasetResult:
    """Load one cycler or decay file (or one ``sheet`` of a workbook) and fit it; id from
    ``dataset_id``, an id column, or the file stem (with the sheet name for a workbook sheet)."""
    s = settings or FadeSettings()
    series = load_series(
        path, column_map=s.column_map, time_unit=s.time_unit, capacity_unit=s.capacity_unit,
        capacity_basis=s.capacity_basis, hours_per_cycle=s.hours_per_cycle,
        skip_first_cycles=s.skip_first_cycles, drop_spikes=s.drop_spikes,
        spike_threshold=s.spike_threshold, sheet=sheet)
    stem = Path(path).stem if sheet is None else f"{Path(path).stem}:{sheet}"
    return fit_series(series, s, dataset_id or series.dataset_id or stem)


DATA_SUFFIXES: tuple[str, ...] = (".csv", ".tsv", ".tab", ".txt", ".xlsx", ".xlsm")


def data_files(paths: str | Path | Iterable[str | Path]) -> list[Path]:
    """Expand files and folders into the data files to read (sorted; README files skipped)."""
    items = [paths] if isinstance(paths, (str, Path)) else list(paths)
    out: list[Path] = []
    for item in items:
        p = Path(item)
        if p.is_dir():
            out.extend(sorted(f for f in p.iterdir() if f.is_file()
                              and f.suffix.lower() in DATA_SUFFIXES
                              and not f.stem.lower().startswith("readme")))
        elif p.is_file():
            out.append(p)
        else:
            raise SettingsError(f"cycling input {p} does not exist; give an existing file or folder")
    if not out:
        raise SettingsError(f"no data files ({', '.join(DATA_SUFFIXES)}) found in {', '.join(map(str, items))}")
    return out


def fit_fade_folder(paths: str | Path | Iterable[str | Path], settings: FadeSettings | None,
                    out_dir: str | Path, progress: bool = True) -> pd.DataFrame:
    """Fit every file; write ``rates.csv``, ``fade_models.csv``, ``fade_cycles.csv``,
    ``fade_report.md`` and one figure per dataset to ``out_dir``; return the rate table.

    A file that cannot be used gets a row with its error in ``status`` and does not stop the batch.
    """
    from tqdm import tqdm

    s = settings or FadeSettings()
    files = data_files(paths)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    rows, model_tabs, cycle_tabs = [], [], []
    report = ["# Capacity-fade fitting report", "",
              f"Settings: cell_type = {s.cell_type}, mean_state_of_charge = "
              f"{s.mean_state_of_charge:g}, models = {', '.join(s.models)}, rate_order = "
              f"{s.rate_order}, robust_loss = {s.robust_loss}, bootstrap = {s.bootstrap}.", ""]
    seen: set[str] = set()
    jobs: list[tuple[Path, str | None]] = []
    for f in files:  # every data sheet of a workbook is a dataset of its own
        try:
            sheets, others = data_sheets(f, s.column_map)
        except RedoxfrontError:
            sheets, others = [], []  # the error is reported when the file is read below
        if others:
            report += [f"- {f.name}: sheet(s) {', '.join(repr(o) for o in others)} hold no capacity or "
                       "decay column and were not fitted", ""]
        jobs += [(f, sh) for sh in sheets] if len(sheets) > 1 else [(f, None)]
    for f, sheet in tqdm(jobs, desc="fade", unit="file", disable=not progress or len(jobs) < 2):
        name = f.name if sheet is None else f"{f.name} (sheet '{sheet}')"
        try:
            res = fit_fade_file(f, s, sheet=sheet)
        except RedoxfrontError as exc:
            rows.append({columns.ID: f.stem if sheet is None else f"{f.stem}:{sheet}",
                         STATUS: f"error: {exc}", SOURCE_FILE: str(f)})
            report += [f"## {name}", "", f"- not fitted: {exc}", ""]
            continue
        did = res.dataset_id
        if did in seen:
            report.append(f"(id '{did}' appears in more than one file)")
        seen.add(did)
        rows.append(dict(res.row))
        mt = res.choice.table()
        mt.insert(0, columns.ID, did)
        model_tabs.append(mt)
        ct = res.series.table.copy()
        ct.insert(0, columns.ID, did)
        cycle_tabs.append(ct)
        report += [f"## {name} (id {did}, {res.series.kind})", ""]
        report += [f"- {line}" for line in res.series.report]
        report += [f"- model {m} skipped: {why}" for m, why in res.choice.skipped.items()]
        report += [f"- chosen model: {res.choice.chosen} (lowest AICc); k_fade = "
                   f"{res.chosen_fit.params_['k']:.4g} 1/h, k = {res.row[K_FIRST]:.4g} 1/h "
                   f"(95 % CI {res.row[K_FIRST + LOW]:.4g} to {res.row[K_FIRST + HIGH]:.4g}, "
                   f"{res.chosen_fit.ci_method_})", ""]
        if s.figures:
            from redoxfront.fade.figures import fade_figure_stem, plot_fade_fit

            plot_fade_fit(did, res.series.table, res.t0_h, res.series.signal_label, res.choice,
                          res.chosen_fit, res.row, out / "figures" / f"{fade_figure_stem(did)}.{s.figure_format}")
    rates = pd.DataFrame(rows).reindex(columns=list(RATE_TABLE_COLUMNS))
    write_csv(rates, out / "rates.csv")
    if model_tabs:
        write_csv(pd.concat(model_tabs, ignore_index=True), out / "fade_models.csv")
        write_csv(pd.concat(cycle_tabs, ignore_index=True), out / "fade_cycles.csv")
    write_text(out / "fade_report.md", "\n".join(report) + "\n")
    return rates


def fade_campaign(campaign: Campaign, input_path: str | Path | None = None,
                  out_dir: str | Path | None = None, progress: bool = True) -> pd.DataFrame:
    """The ``fade`` step of a loaded campaign: read ``[fade]`` and ``[inputs] cycling`` and fit.

    ``input_path`` and ``out_dir`` override the campaign's cycling input and ``results/``.
    """
    settings = fade_settings(campaign.section("fade"))
    if input_path is None:
        if campaign.inputs.cycling is None:
            raise SettingsError("no cycling data given: pass --input FILE_OR_FOLDER or set "
                                "[inputs] cycling = 'inputs/cycling' in the campaign")
        input_path = campaign.path(campaign.inputs.cycling, "[inputs] cycling")
    out = Path(out_dir) if out_dir is not None else campaign.results_dir
    return fit_fade_folder(input_path, settings, out, progress=progress)
