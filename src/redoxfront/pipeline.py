"""The whole job on one campaign, step by step: what ``redoxfront run`` does.

library (if the campaign has a [library] section) -> compute (through the funnel of
:mod:`redoxfront.compute.funnel` above its size threshold) -> fade fitting (if cycling files are given) -> calibration -> rate model
(if rates are available) -> cell metrics and ranking -> the HTML report. Each step is the library
function its own command calls; a step without its inputs is skipped with the reason.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Callable

from redoxfront.campaign import Campaign, load_campaign

if TYPE_CHECKING:
    import pandas as pd


@dataclass
class RunSummary:
    """One line per step: what it did or why it was skipped."""

    lines: list[str] = field(default_factory=list)

    def add(self, step: str, text: str) -> None:
        self.lines.append(f"{step:10s} {text}")


def potential_counts(table: "pd.DataFrame", reference: str) -> dict[str, int]:
    """Candidates with a measured potential, a calibrated one (not measured) and only an
    uncalibrated one (computed successfully, neither measured nor calibrated)."""
    import pandas as pd

    from redoxfront import columns
    from redoxfront.units import reference_key

    ref = reference_key(reference)

    def num(name: str) -> "pd.Series":
        return pd.to_numeric(table[name], errors="coerce") if name in table.columns else pd.Series(float("nan"), index=table.index)

    measured = num(columns.potential_measured(ref)).notna()
    calibrated = num(columns.potential_calibrated(ref)).notna() & ~measured
    raw = num(columns.potential_uncalibrated(ref)).notna() & ~measured & ~calibrated
    counts = {"measured": int(measured.sum()), "calibrated": int(calibrated.sum()), "uncalibrated": int(raw.sum())}
    for process in columns.PROCESSES:  # bipolar candidates: each couple counted on its own
        m = num(columns.process_potential(process, "measured", ref)).notna()
        c = num(columns.process_potential(process, "calibrated", ref)).notna() & ~m
        r = num(columns.process_potential(process, "uncalibrated", ref)).notna() & ~m & ~c
        if (m | c | r).any():
            counts.update({f"bipolar {process}s measured": int(m.sum()),
                           f"bipolar {process}s calibrated": int(c.sum()),
                           f"bipolar {process}s uncalibrated": int(r.sum())})
    return counts


def run_campaign(
    path: str | Path,
    *,
    workers: int | None = None,
    dask_address: str | None = None,
    progress: bool = True,
    echo: Callable[[str], None] = print,
) -> RunSummary:
    """Run every step that has its inputs; return a summary (also echoed as it goes)."""
    from redoxfront.compute.step import compute_campaign
    from redoxfront.fade.step import fade_campaign
    from redoxfront.ranking.step import rank_campaign, ranking_objectives
    from redoxfront.report import write_report
    from redoxfront.statistics.calibration import calibrate_campaign
    from redoxfront.statistics.step import fit_campaign

    from redoxfront import columns

    camp: Campaign = load_campaign(path)
    summary = RunSummary()

    def note(step: str, text: str) -> None:
        summary.add(step, text)
        echo(summary.lines[-1])

    if camp.section("library"):
        from redoxfront.candidates.library import library_for_campaign

        out, combos, distinct, problems = library_for_campaign(camp, progress=progress)
        note("library", f"{combos} combinations, {distinct} distinct molecules, {len(problems)} left out ({out})")
    from redoxfront.compute.funnel import funnel_campaign, funnel_settings, use_funnel

    if use_funnel(camp):  # a large library: fast tier for all, full tier for the rule's selection
        funnel = funnel_campaign(camp, workers=workers, dask_address=dask_address, progress=progress)
        fs = funnel_settings(camp)
        note("funnel", f"fast tier: {funnel.fast_ok} of {funnel.candidates} candidates (results/fast_tier.csv); "
                       f"full tier: {funnel.sampled} calibration sample + {funnel.selected} selected by rule "
                       f"{fs.rule} (fraction {fs.fraction:g}); more than [funnel] threshold {fs.threshold} candidates")
        report = funnel.compute
    else:
        report = compute_campaign(camp, workers=workers, dask_address=dask_address, progress=progress)
    ok = int((report.table["status"] == "ok").sum()) if len(report.table) else 0
    note("compute", f"{ok} of {len(report.table)} candidates computed, {len(report.problems)} input rows "
                    f"rejected (results/input_problems.csv); {report.new_engine_calls} new engine calls, "
                    f"{report.wall_time_s:.0f} s")
    for p in report.problems:
        echo(f"           rejected: {p}")
    if columns.CAMPAIGN_PH in report.table.columns:
        src = report.table[columns.PKA_SOURCE].fillna("none").astype(str).value_counts()
        note("", f"aqueous at pH {report.table[columns.CAMPAIGN_PH].dropna().iloc[0]:g}: potentials at that pH; "
                 f"pKa given {int(src.get('given', 0))}, estimated {int(src.get('estimated', 0))} (+-3, flagged), "
                 f"none {int(src.get('none', 0))}")

    if camp.inputs.cycling:
        rates = fade_campaign(camp, progress=progress)
        fitted = int((rates["status"] == "ok").sum()) if "status" in rates else len(rates)
        note("fade", f"{fitted} of {len(rates)} datasets fitted (results/rates.csv, results/fade_report.md)")
    else:
        note("fade", "skipped: no [inputs] cycling files")

    table = calibrate_campaign(camp)
    cal = table.attrs.get("calibration", {})
    few = next((n for n in cal.get("notes", []) if n.startswith("only ") and "measured potential" in n), None)
    note("calibrate", f"calibrated against {cal['n_measured_used']} measured potentials (results/calibration.json)"
         if cal.get("lines") else f"skipped: {few}" if few
         else "skipped: no usable measured potentials; potentials stay uncalibrated")
    for w in cal.get("warnings", []):
        note("", w)
    note("", "potentials: " + ", ".join(f"{k} {v}" for k, v in potential_counts(table, camp.compute.reference).items()))

    rates_given = camp.inputs.measured_rates or (camp.results_dir / "rates.csv").exists()
    if rates_given:
        fit = fit_campaign(camp)
        stats = fit.statistics
        note("fit", f"model on {', '.join(fit.terms)}: R2 {stats.get('r2') or float('nan'):.3f}, "
                    f"Q2(LOO) {stats.get('q2_loo') or float('nan'):.3f} (results/model.json, results/predictions.csv)")
        over, disagree = fit.rate_overrides
        note("", "rates that trained the model: " + ", ".join(f"{k} {v}" for k, v in fit.rate_sources.items())
             + (f" ({over} fitted rate(s) set aside: the measured value wins; {disagree} disagree beyond the "
                "fit's 95 % interval, see results/model.json notes)" if over else ""))
        for w in (n for n in fit.notes if n.startswith("WARNING:")):
            note("", w)
    else:
        note("fit", "skipped: no measured rates and no fitted fade rates")
    needs_model = "half_life" in ranking_objectives(camp)
    if rates_given or not needs_model:
        ranked = rank_campaign(camp, progress=progress)
        note("rank", f"{len(ranked)} candidates ranked (results/ranking.csv, results/picks.csv, results/figures/)")
        note("", "ranked on potentials: " + ", ".join(
            f"{k} {int((ranked[columns.POTENTIAL_BASIS] == k).sum())}" for k in ("measured", "calibrated", "uncalibrated"))
            + "; rates: " + ", ".join(
            f"{k} {int((ranked[columns.RATE_BASIS] == k).sum())}" for k in ("measured", "fitted", "predicted")
            if columns.RATE_BASIS in ranked))
    else:
        note("rank", "skipped: half-lives need the rate model (or rank on objectives without half_life)")

    note("report", f"written: {write_report(camp)}")
    return summary
