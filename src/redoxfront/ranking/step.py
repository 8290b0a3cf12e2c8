"""The ranking step of a campaign: cell metrics -> Pareto-ranked table, picks for the
next experiments, summary and figures.

Reads ``results/predictions.csv`` (plus ``results/descriptors.csv``), computes cell
metrics (:mod:`redoxfront.ranking.cell_metrics`), then ranks with the Pareto science of
:mod:`redoxfront.ranking.pareto` and :mod:`redoxfront.ranking.uncertainty`. Half-life is ranked
on its log10. References are given in those modules.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from pathlib import Path
from functools import partial
from typing import TYPE_CHECKING, Sequence

import numpy as np
import pandas as pd

from redoxfront import columns as col
from redoxfront.campaign import bounded
from redoxfront.errors import DataError, SettingsError
from redoxfront.csv_tables import start_csv_writes, write_csv
from redoxfront.outputs import read_header, read_table, write_json
from redoxfront.units import reference_label
from redoxfront.ranking.objectives import FIGURE_COLUMNS, OBJECTIVES
from redoxfront.ranking.pareto import (
    crowding_distance,
    hypervolume,
    knee_point,
    non_dominated_ranks,
)
from redoxfront.ranking.uncertainty import (
    Uncertain,
    front_probability,
    objective_box,
    suggest_experiments,
)

if TYPE_CHECKING:
    from redoxfront.processes import Job, PreparedChild
    from redoxfront.campaign import AqueousSettings, Campaign
    from redoxfront.ranking.cell_metrics import CellSettings


@dataclass(frozen=True)
class RankingSettings:
    """Campaign section ``[ranking]``.

    objectives : names from :data:`OBJECTIVES`; default maximise cell voltage and
        half-life. Pick cell voltage or energy density, not both (one holds the other).
    n_draws : Monte Carlo draws for the probability of lying on the first front.
    seed : seed of the draws and of the sample used to score picks.
    n_suggestions : how many unmeasured candidates to suggest for the next experiments.
    """

    objectives: tuple[str, ...] = ("cell_voltage", "half_life")
    n_draws: int = field(default=1000, metadata=bounded(1, 1_000_000))
    seed: int = field(default=20261201, metadata=bounded(0, 2**31 - 1))
    n_suggestions: int = field(default=5, metadata=bounded(0, 10_000))

    def __post_init__(self) -> None:
        names = tuple(self.objectives)
        unknown = [o for o in names if o not in OBJECTIVES]
        if unknown:
            raise SettingsError(
                f"[ranking] objectives: unknown '{unknown[0]}'; allowed: {', '.join(OBJECTIVES)}"
            )
        if len(set(names)) != len(names) or not names:
            raise SettingsError("[ranking] objectives: give each objective once, at least one")
        if "cell_voltage" in names and "energy_density" in names:
            raise SettingsError(
                "[ranking] objectives: energy_density already contains cell_voltage; keep one of them"
            )


def _objective_arrays(table: pd.DataFrame, names: Sequence[str]):
    """Mean, 95 % low and high (maximised; half-life as log10 h) and a usable-row mask."""
    n = len(table)
    mean = np.zeros((n, len(names)))
    low = np.zeros_like(mean)
    high = np.zeros_like(mean)
    for k, name in enumerate(names):
        column, maximise = OBJECTIVES[name]
        if column not in table.columns:
            raise DataError(f"objective '{name}' needs column '{column}', which the table lacks")
        v = pd.to_numeric(table[column], errors="coerce").to_numpy(dtype=float)
        lo, hi = v, v
        if name == "cell_voltage":
            lo, hi = table[col.CELL_VOLTAGE_LOW].to_numpy(float), table[col.CELL_VOLTAGE_HIGH].to_numpy(float)
        elif name == "energy_density":
            lo, hi = table[col.ENERGY_DENSITY_LOW].to_numpy(float), table[col.ENERGY_DENSITY_HIGH].to_numpy(float)
        elif name == "half_life":
            with np.errstate(divide="ignore", invalid="ignore"):
                v = np.log10(np.where(v > 0, v, np.nan))
                lo = np.log10(np.where(table[col.HALF_LIFE_LOW].to_numpy(float) > 0, table[col.HALF_LIFE_LOW].to_numpy(float), np.nan))
                hi = np.log10(np.where(table[col.HALF_LIFE_HIGH].to_numpy(float) > 0, table[col.HALF_LIFE_HIGH].to_numpy(float), np.nan))
        if maximise:
            mean[:, k], low[:, k], high[:, k] = v, lo, hi
        else:
            mean[:, k], low[:, k], high[:, k] = -v, -hi, -lo
    ok = np.all(np.isfinite(mean) & np.isfinite(low) & np.isfinite(high), axis=1)
    return mean, np.minimum(low, mean), np.maximum(high, mean), ok


@dataclass(frozen=True)
class RankingResult:
    """Ranked table, picks and summary figures of one ranking run."""

    table: pd.DataFrame
    picks: pd.DataFrame
    hypervolume_fraction: float
    """Hypervolume of the first front of the means, as a fraction of the box of
    :func:`objective_box` (objectives scaled to [0, 1], half-life as log10)."""
    knee_id: str | None
    objectives: tuple[str, ...]


def rank_table(table: pd.DataFrame, settings: RankingSettings, *, progress: bool = False) -> RankingResult:
    """Pareto rank, crowding distance, knee, probability on the first front and picks.

    ``table`` comes from :func:`redoxfront.ranking.cell_metrics.cell_metrics`. Rows lacking an objective
    value are kept, unranked, with a note. Picks exclude measured candidates and carry
    the extrapolation flag.
    """
    names = tuple(settings.objectives)
    out = table.copy().reset_index(drop=True)
    mean, low, high, ok = _objective_arrays(out, names)
    notes = out[col.RANKING_NOTE].fillna("").astype(str).tolist() if col.RANKING_NOTE in out else [""] * len(out)
    for r in np.flatnonzero(~ok):
        missing = [nm for k, nm in enumerate(names) if not (np.isfinite(mean[r, k]) and np.isfinite(low[r, k]) and np.isfinite(high[r, k]))]
        notes[r] = "; ".join(x for x in (notes[r], "not ranked: no value for " + ", ".join(missing)) if x)
    out[col.RANKING_NOTE] = notes
    rows = np.flatnonzero(ok)
    rank = pd.array([pd.NA] * len(out), dtype="Int64")
    crowd = np.full(len(out), np.nan)
    p_front = np.full(len(out), np.nan)
    knee = np.zeros(len(out), dtype=bool)
    gain = np.full(len(out), np.nan)
    order = np.full(len(out), 0)
    hv_fraction = 0.0
    knee_id: str | None = None
    if len(rows):
        from concurrent.futures import ThreadPoolExecutor

        mu, lo, hi = mean[rows], low[rows], high[rows]
        with ThreadPoolExecutor(max_workers=1) as exact:  # the fronts of the means, beside the draws
            ranks = exact.submit(non_dominated_ranks, mu)
            p = front_probability(mu, lo, hi, settings.n_draws, settings.seed, progress=progress)
            r = ranks.result()
        rank[rows] = r
        crowd[rows] = crowding_distance(mu, r)
        first = np.flatnonzero(r == 1)
        kn = first[knee_point(mu[first])]
        knee[rows[kn]] = True
        knee_id = str(out[col.ID].iloc[rows[kn]])
        p_front[rows] = p
        box_lo, span = objective_box(Uncertain.from_interval(mu, lo, hi))
        hv_fraction = hypervolume((mu[first] - box_lo) / span, np.zeros(len(names)))
        measured = out[col.MEASURED].to_numpy(bool)[rows] if col.MEASURED in out else np.zeros(len(rows), bool)
        if settings.n_suggestions > 0:
            picked, gains = suggest_experiments(
                mu, lo, hi, measured, settings.n_suggestions, settings.seed, priority=p
            )
            gain[rows[picked]] = gains
            order[rows[picked]] = np.arange(1, len(picked) + 1)
    out[col.PARETO_RANK] = rank
    out[col.CROWDING] = crowd
    out[col.KNEE] = knee
    out[col.P_FRONT] = p_front
    out[col.EXPECTED_HV_GAIN] = gain
    out[col.PICK_ORDER] = pd.array(np.where(order > 0, order, 0), dtype="Int64")
    out.loc[order == 0, col.PICK_ORDER] = pd.NA
    sort_rank = out[col.PARETO_RANK].astype("float").fillna(np.inf)
    out = out.assign(_r=sort_rank, _p=-out[col.P_FRONT].fillna(-1)).sort_values(
        ["_r", "_p", col.ID], kind="stable").drop(columns=["_r", "_p"]).reset_index(drop=True)
    picks = out[out[col.PICK_ORDER].notna()].sort_values(col.PICK_ORDER).reset_index(drop=True)
    keep = [c for c in (
        col.PICK_ORDER, col.ID, col.SMILES, col.ROLE, col.EXPECTED_HV_GAIN, col.P_FRONT, col.PARETO_RANK,
        col.CELL_VOLTAGE, col.CELL_VOLTAGE_LOW, col.CELL_VOLTAGE_HIGH, col.ENERGY_DENSITY,
        col.HALF_LIFE, col.HALF_LIFE_LOW, col.HALF_LIFE_HIGH, col.MOLAR_MASS, col.POTENTIAL_BASIS,
        col.RATE_BASIS, col.POTENTIAL_FLAG, col.WINDOW_FLAG, col.DOMAIN, col.EXTRAPOLATING,
        col.CELL_CONFIGURATION, col.LIFE_LIMITED_BY, col.RANKING_NOTE) if c in picks.columns]
    keep += [c for c in picks.columns if c.startswith(col.SUBSTITUENT_PREFIX)]  # a library's building blocks
    bipolar = [c for process, form in col.CHARGED_FORMS.items()  # a bipolar pick's two couples and two forms
               for c in picks.columns if c.startswith(f"{process}_potential_used")
               or c.startswith(col.form_column(form, col.HALF_LIFE)[: -len("_h")])
               or c in (col.form_column(form, col.HALF_LIFE_LOW), col.form_column(form, col.HALF_LIFE_HIGH),
                        col.form_column(form, col.DOMAIN))]
    if picks[col.ROLE].astype(str).eq("bipolar").any() if col.ROLE in picks.columns else False:
        keep += [c for c in bipolar if c not in keep]
    return RankingResult(out, picks[keep], float(hv_fraction), knee_id, names)


def _symmetric_summary(table: pd.DataFrame) -> dict:
    """What the summary says about bipolar candidates (their cells are symmetric)."""
    bip = table[col.ROLE].astype(str).eq("bipolar") if col.ROLE in table.columns else pd.Series(False, index=table.index)
    limited = table.loc[bip, col.LIFE_LIMITED_BY] if col.LIFE_LIMITED_BY in table.columns else pd.Series(dtype=str)
    return {
        "n_bipolar": int(bip.sum()),
        "n_bipolar_ranked": int((bip & table[col.PARETO_RANK].notna()).sum()),
        "n_bipolar_first_front": int((bip & (table[col.PARETO_RANK] == 1)).sum()),
        "life_limited_by_counts": {str(k): int(v) for k, v in limited.value_counts().items() if k},
        "rules": {
            "cell_voltage_v": "E(oxidation) - E(reduction) of the same molecule; each potential measured, "
                              "else calibrated on measured potentials of its own couple type, else uncalibrated "
                              "with its couple type's band; interval: both intervals combined as independent errors",
            "energy_density_wh_per_l": "u V Q / 2 on the two-tank basis (u V Q on one tank), Q = F c / 3600 Ah/L: "
                                       "one electron per molecule in each tank, the same concentration on both sides",
            "half_life_h": "the shorter of the half-lives of the radical anion (reduced) and the radical cation "
                           "(oxidised): one rate model for both forms, evaluated at each form's own potential",
        },
    } if bip.any() else {"n_bipolar": 0}


def ranking_settings(campaign: "Campaign") -> RankingSettings:
    """The campaign's validated ``[ranking]`` section."""
    from redoxfront.campaign import section_from_mapping

    return section_from_mapping(RankingSettings, campaign.section("ranking"), "ranking")


def ranking_objectives(campaign: "Campaign") -> tuple[str, ...]:
    """The campaign's ranking objectives (``[ranking] objectives``)."""
    return tuple(ranking_settings(campaign).objectives)


def rank_campaign(campaign: "Campaign", *, progress: bool = True,
                  timings: dict[str, float] | None = None,
                  drawer: "PreparedChild | None" = None) -> pd.DataFrame:
    """Rank a campaign's candidates: reads results/predictions.csv, writes
    results/ranking.csv, results/picks.csv, results/ranking_summary.json and the figures
    under results/figures/; returns the ranked table.

    ``timings``: when given, filled with the wall time of each phase in seconds (reading,
    cell metrics, ranking, writing tables, figures), in the order they ran.
    ``drawer``: a :class:`~redoxfront.processes.PreparedChild` forked early that has imported
    :data:`FIGURE_MODULES`; it draws the figures while this process writes the tables. Without
    one the figures are drawn here (and a large table is written by a forked process meanwhile).
    """
    clock = _PhaseClock(timings)

    from redoxfront.campaign import aqueous_settings, section_from_mapping
    from redoxfront.errors import InputError
    from redoxfront.ranking.cell_metrics import CellSettings, cell_metrics, truthy
    from redoxfront.ranking.symmetric_cell import symmetric_cell_metrics

    cell_settings = section_from_mapping(CellSettings, campaign.section("cell"), "cell")
    aqueous = aqueous_settings(campaign)
    if aqueous is not None:  # one pH for the whole campaign: [aqueous] ph
        given = campaign.section("cell").get("ph")
        if given is not None and float(given) != aqueous.ph:
            raise SettingsError(
                f"[cell] ph = {given} differs from [aqueous] ph = {aqueous.ph}: the campaign has one pH; "
                "remove [cell] ph (an aqueous campaign takes it from [aqueous])")
        cell_settings = dataclasses.replace(cell_settings, ph=aqueous.ph)
    settings = ranking_settings(campaign)
    src = campaign.results_dir / "predictions.csv"
    if not src.exists():
        if "half_life" in settings.objectives:
            raise InputError("no predictions yet; run the rate-model step first to write it, or rank on "
                             "objectives without half_life", source=str(src))
        src = campaign.results_dir / "descriptors.csv"  # no rate model needed for these objectives
        if not src.exists():
            raise InputError("no descriptor table yet; run the compute step first", source=str(src))
    step = "fit" if src.name == "predictions.csv" else "compute"
    table = read_table(src, remedy=f"regenerate it with `redoxfront {step} {campaign.folder}`", required=[col.ID])
    table[col.ID] = table[col.ID].astype(str)
    desc_path = campaign.results_dir / "descriptors.csv"
    if desc_path.exists() and src != desc_path:  # potentials, role, charge count, molar mass live there
        header = read_header(desc_path, remedy=f"regenerate it with `redoxfront compute {campaign.folder}`")
        extra = [c for c in header if c not in table.columns]
        if col.ID in header and extra:  # only what predictions.csv lacks is read (it usually carries all)
            desc = read_table(desc_path, remedy=f"regenerate it with `redoxfront compute {campaign.folder}`",
                              columns=[col.ID, *extra])
            desc[col.ID] = desc[col.ID].astype(str)
            table = table.merge(desc.drop_duplicates(col.ID), on=col.ID, how="left")
    clock.lap("reading the tables")
    flag = truthy(table[col.MEASURED]) if col.MEASURED in table.columns else pd.Series(False, index=table.index)
    for target in (col.LOG10_K_FIRST, col.LOG10_K_SECOND):  # measured rates the model step carried
        if target in table.columns:
            flag |= pd.to_numeric(table[target], errors="coerce").notna()
    if campaign.inputs.measured_rates:
        rates_path = campaign.path(campaign.inputs.measured_rates, "[inputs] measured_rates")
        if rates_path.exists():
            rates = read_table(rates_path, remedy="fix the file or [inputs] measured_rates")
            if col.ID in rates.columns:
                flag |= table[col.ID].isin(set(rates[col.ID].astype(str)))
    # read_csv and merge leave one block per column; consolidate once before adding columns
    table = table.copy()
    table[col.MEASURED] = flag.to_numpy(bool)
    if cell_settings.counter == "best-partner":
        roles = table[col.ROLE].astype(str).str.strip().str.lower() if col.ROLE in table.columns \
            else pd.Series(campaign.compute.role, index=table.index)
        present = set(roles) & {"anolyte", "catholyte"}
        if len(present) == 1 and "bipolar" not in set(roles):  # bipolar rows make their own cells
            only = present.pop()
            other = "catholyte" if only == "anolyte" else "anolyte"
            raise SettingsError(
                f"[cell] counter = 'best-partner' pairs each candidate with one of the other role, but "
                f"every candidate is a{'n' if only == 'anolyte' else ''} {only} (no {other} to pair with), so "
                "nothing can be ranked; set [cell] counter = 'potential' and counter_potential_v "
                "(V vs the campaign reference) for the counter electrode, or add candidates with "
                f"role = '{other}'"
            )
    metrics = cell_metrics(
        table, cell_settings, campaign.compute.reference,
        default_role=campaign.compute.role, default_n_electrons=campaign.compute.n_electrons,
        solvent=campaign.compute.solvent, user_reference_v_vs_fc=campaign.compute.user_reference_v_vs_fc,
    )
    window = metrics.attrs.get("window")
    metrics = symmetric_cell_metrics(metrics, cell_settings, campaign.compute.reference)
    clock.lap("cell metrics")
    result = rank_table(metrics, settings, progress=progress)
    clock.lap("ranking (fronts, probability, picks)")
    out_dir = campaign.results_dir
    out_dir.mkdir(parents=True, exist_ok=True)
    figures = _figure_jobs(campaign, result, cell_settings, aqueous, out_dir / "figures")
    tables = [(result.table, out_dir / "ranking.csv"), (result.picks, out_dir / "picks.csv")]
    if drawer is not None:  # the prepared process draws while this one writes
        wait_for_figures = drawer.start(figures, "drawing the figures")
        try:
            for table, path in tables:
                write_csv(table, path)
            clock.lap("writing ranking.csv and picks.csv")
            _write_summary(campaign, result, cell_settings, settings, aqueous, window, out_dir)
            clock.lap("summary")
        finally:
            wait_for_figures()
            clock.lap("figures (the rest, after the tables)")
        return result.table
    # a large table is written by a second process while this one draws the figures
    wait_for_tables = start_csv_writes(tables)
    try:
        _write_summary(campaign, result, cell_settings, settings, aqueous, window, out_dir)
        clock.lap("summary")
        for group in figures:
            for job in group:
                job()
        clock.lap("figures")
    finally:
        wait_for_tables()
        clock.lap("writing ranking.csv and picks.csv (the rest, after the figures)")
    return result.table


FIGURE_MODULES: tuple[str, ...] = ("redoxfront.ranking.figures",)
"""What a process that draws the ranking figures imports (matplotlib with it)."""


def _figure_jobs(campaign: "Campaign", result: RankingResult, cell_settings: "CellSettings",
                 aqueous: "AqueousSettings | None", fig_dir: Path) -> list[list[Job]]:
    """The figures of a ranked campaign as jobs, in groups that may run at once: the front; the
    objectives pairwise (three or more objectives); the Pourbaix panels of the picks (aqueous).
    Each job holds only the columns its figure reads."""

    objectives = result.objectives
    plotted = [OBJECTIVES[o][0] for o in objectives]
    keep = [c for c in dict.fromkeys((*plotted, *FIGURE_COLUMNS)) if c in result.table.columns]
    table = result.table[keep]
    groups: list[list[Job]] = [[partial(_draw, "plot_front", table, objectives, fig_dir / "front.svg")]]
    if len(objectives) > 2:  # with two, the front figure is the only pair
        groups.append([partial(_draw, "plot_pairwise", table, objectives, fig_dir / "objectives_pairwise.svg")])
    if aqueous is not None:
        from redoxfront.units import convert_potential, water_lines_v_vs_she

        ref = campaign.compute.reference
        user_v = campaign.compute.user_reference_v_vs_fc
        lines0 = tuple(convert_potential(x, "she", ref, user_v) for x in water_lines_v_vs_she(0.0, aqueous.temperature_k))
        order = list(result.picks[col.ID]) if len(result.picks) else list(result.table[col.ID].head(6))
        picks = result.table.set_index(col.ID, drop=False).loc[order]  # the full rows: pKa, potential used
        groups[0].append(partial(_draw, "plot_pourbaix", picks, ref,
                                 reference_label(ref, campaign.compute.user_reference_name), aqueous.ph,
                                 cell_settings.water_overpotential_v, lines0, fig_dir / "pourbaix_picks.svg",
                                 aqueous.temperature_k))
    return groups


def _draw(name: str, *args: object) -> None:
    """Call the figure function ``name`` of :mod:`redoxfront.ranking.figures` (imported here, in
    the process that draws)."""
    from redoxfront.ranking import figures

    getattr(figures, name)(*args)


def _write_summary(campaign: "Campaign", result: RankingResult, cell_settings: "CellSettings",
                   settings: RankingSettings, aqueous: "AqueousSettings | None", window: dict | None,
                   out_dir: Path) -> None:
    """Write ranking_summary.json of a ranked campaign."""
    basis = result.table[col.POTENTIAL_BASIS].value_counts().to_dict()
    summary = {
        "objectives": list(result.objectives),
        "hypervolume_fraction": result.hypervolume_fraction,
        "knee_id": result.knee_id,
        "n_candidates": int(len(result.table)),
        "n_ranked": int(result.table[col.PARETO_RANK].notna().sum()),
        "n_first_front": int((result.table[col.PARETO_RANK] == 1).sum()),
        "potential_basis_counts": {str(k): int(v) for k, v in basis.items() if k},
        "rate_basis_counts": {str(k): int(v) for k, v in result.table[col.RATE_BASIS].value_counts().items() if k}
        if col.RATE_BASIS in result.table else {},
        "counterion_setting": campaign.compute.counterion,
        "n_balanced_with_counterion": int(result.table["counterion_note"].astype("string").fillna("").ne("").sum())
        if "counterion_note" in result.table else 0,
        "electrochemical_window": window,
        "n_outside_window": int(result.table[col.WINDOW_FLAG].astype("string").fillna("").ne("").sum())
        if col.WINDOW_FLAG in result.table else 0,
        "reference_label": reference_label(campaign.compute.reference, campaign.compute.user_reference_name),
        "cell": dataclasses.asdict(cell_settings),
        "ranking": {**dataclasses.asdict(settings), "objectives": list(settings.objectives)},
        "reference": campaign.compute.reference,
        "symmetric_cells": _symmetric_summary(result.table),
    }
    if aqueous is not None:
        summary["aqueous"] = {
            "ph": aqueous.ph, "temperature_k": aqueous.temperature_k,
            "water_overpotential_v": cell_settings.water_overpotential_v,
            "n_losing_electrons_to_the_window": int(
                (pd.to_numeric(result.table[col.ELECTRONS_AT_PH], errors="coerce")
                 < pd.to_numeric(result.table[col.N_ELECTRONS], errors="coerce")).sum())
            if col.ELECTRONS_AT_PH in result.table else 0,
        }
        if cell_settings.counter == "published":
            from redoxfront.units import partner_couple

            summary["partner"] = {k: v for k, v in partner_couple(cell_settings.counter_couple).items()}
    write_json(out_dir / "ranking_summary.json", summary)


class _PhaseClock:
    """Wall time of consecutive phases, written into a caller's dict (nothing when None)."""

    def __init__(self, into: dict[str, float] | None) -> None:
        import time

        self._now = time.perf_counter
        self._into = into
        self._last = self._now()

    def lap(self, phase: str) -> None:
        now = self._now()
        if self._into is not None:
            self._into[phase] = self._into.get(phase, 0.0) + now - self._last
        self._last = now
