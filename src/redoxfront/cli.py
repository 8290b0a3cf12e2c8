"""Command-line interface: a thin click layer, one library call per command.

Every :class:`~redoxfront.errors.RedoxfrontError` becomes a one-line message on
stderr and exit code 2; no tracebacks for user mistakes.
"""

from __future__ import annotations

import functools
import os
import sys
from pathlib import Path
from typing import Any, Callable

import click

from redoxfront import __version__
from redoxfront.errors import RedoxfrontError


def friendly_errors(func: Callable[..., Any]) -> Callable[..., Any]:
    """Turn RedoxfrontError into a one-line message and exit code 2."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return func(*args, **kwargs)
        except RedoxfrontError as exc:
            click.echo(f"error: {exc}", err=True)
            sys.exit(2)

    return wrapper


@click.group()
@click.version_option(__version__, prog_name="redoxfront")
def main() -> None:
    """Rank candidate redox-flow battery charge carriers before synthesis."""
    # parallel over molecules, not threads: one BLAS/OpenMP thread per process unless the
    # user says otherwise (set before numpy or the engine load; [compute] threads_per_worker)
    from redoxfront.campaign import THREAD_VARIABLES

    for var in THREAD_VARIABLES:
        os.environ.setdefault(var, "1")
    from redoxfront.processes import keep_freed_memory

    keep_freed_memory()  # large temporary arrays reuse freed memory instead of faulting in new pages


def start_cluster_early(cluster: str | None) -> None:
    """With ``--cluster local``, start what the cluster's workers are forked from now, so that it
    loads on another core while the command reads its inputs."""
    if cluster == "local":
        from redoxfront.compute.executors import start_worker_server

        start_worker_server()


CAMPAIGN_ARG = click.argument(
    "campaign", type=click.Path(exists=True, path_type=Path), metavar="CAMPAIGN"
)


# ---- commands are added below, one per library function ----------------------


@main.command("library")
@CAMPAIGN_ARG
@friendly_errors
def library_command(campaign: Path) -> None:
    """Build a virtual library from the campaign's [library] scaffold and substituent lists."""
    from redoxfront.campaign import load_campaign
    from redoxfront.candidates.library import library_for_campaign

    out, combos, distinct, problems = library_for_campaign(load_campaign(campaign))
    for _, p in problems.iterrows():
        click.echo(f"left out {p['id']}: {p['reason']}", err=True)
    click.echo(f"{combos} combinations, {distinct} distinct molecules "
               f"({combos - distinct - len(problems)} repeats by symmetry, {len(problems)} left out); "
               f"written to {out}")


@main.command("compute")
@CAMPAIGN_ARG
@click.option("--candidates", type=click.Path(exists=True, path_type=Path), default=None,
              help="Candidate file (CSV or SDF); default: inputs.candidates of the campaign.")
@click.option("--out", type=click.Path(path_type=Path), default=None,
              help="Descriptor table to write; default: results/descriptors.csv.")
@click.option("--workers", type=int, default=None, help="Parallel workers (default: compute.workers).")
@click.option("--cluster", default=None, metavar="ADDRESS",
              help="Run on a Dask scheduler at ADDRESS, or 'local' for a Dask cluster on this machine.")
@click.option("--potentials-only", is_flag=True,
              help="Skip the steric and electronic descriptors (a fast first pass over a large library).")
@click.option("--funnel", "funnel", is_flag=True,
              help="Fast tier for every candidate, full tier for those the [funnel] rule selects "
                   "(results/fast_tier.csv); what `run` does above [funnel] threshold candidates.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@friendly_errors
def compute_command(campaign: Path, candidates: Path | None, out: Path | None, workers: int | None,
                    cluster: str | None, potentials_only: bool, funnel: bool, quiet: bool) -> None:
    """Optimise both redox states of every candidate and write uncalibrated potentials."""
    start_cluster_early(cluster)
    from redoxfront.campaign import load_campaign
    from redoxfront.compute.step import compute_campaign

    camp = load_campaign(campaign)
    if funnel:
        from redoxfront.compute.funnel import funnel_campaign
        from redoxfront.errors import SettingsError

        if candidates or out:
            raise SettingsError("--funnel reads [inputs] candidates and writes results/: leave out --candidates "
                                "and --out")
        fun = funnel_campaign(camp, workers=workers, dask_address=cluster, progress=not quiet,
                              describe=not potentials_only)
        click.echo(f"fast tier: {fun.fast_ok} of {fun.candidates} candidates; full tier: {fun.sampled} "
                   f"calibration sample + {fun.selected} selected (results/fast_tier.csv)")
        report = fun.compute
    else:
        report = compute_campaign(camp, candidates_path=candidates, out_path=out, workers=workers,
                                  dask_address=cluster, progress=not quiet, describe=not potentials_only)
    status = report.table["status"].astype(str) if len(report.table) else None
    ok = int((status == "ok").sum()) if status is not None else 0
    flagged = report.table[status.str.startswith("implausible")] if status is not None else report.table
    failed = len(report.table) - ok - len(flagged)
    click.echo(
        f"{ok} candidates computed, {failed} failed, {len(flagged)} flagged implausible, "
        f"{len(report.problems)} input rows rejected; "
        f"{report.new_engine_calls} new engine calls in {report.wall_time_s:.1f} s"
    )
    for p in report.problems:
        click.echo(f"  rejected: {p}", err=True)
    for o in report.outcomes:
        if o.failure:
            click.echo(f"  failed: {o.candidate.id}: {o.failure}", err=True)
    for _, r in flagged.iterrows():
        click.echo(f"  flagged: {r['id']}: {r['status']}", err=True)
    where = out.parent if out else camp.results_dir
    click.echo(f"written: {out or where / 'descriptors.csv'}, {where / 'geometries.sdf'}, "
               f"{where / 'input_problems.csv'}")


@main.command("status")
@CAMPAIGN_ARG
@click.option("--candidates", type=click.Path(exists=True, path_type=Path), default=None,
              help="Candidate file (CSV or SDF); default: inputs.candidates of the campaign.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@friendly_errors
def status_command(campaign: Path, candidates: Path | None, quiet: bool) -> None:
    """How far the compute step has come: done, failed, partly done and pending candidates."""
    from redoxfront.campaign import load_campaign
    from redoxfront.compute.status import compute_status

    st = compute_status(load_campaign(campaign), candidates_path=candidates, progress=not quiet)
    total = len(st.done) + len(st.failed) + len(st.partial) + len(st.pending)
    click.echo(f"{total} candidates: {len(st.done)} done, {len(st.failed)} failed, "
               f"{len(st.partial)} partly done, {len(st.pending)} pending; "
               f"{len(st.rejected)} input rows rejected")
    if st.fast_tier:
        click.echo(f"fast tier (funnel): {len(st.fast_tier)} of {total} candidates stored")
    for cid, reason in st.failed.items():
        click.echo(f"  failed: {cid}: {reason}")


@main.command("fade")
@CAMPAIGN_ARG
@click.option("--input", "input_path", type=click.Path(exists=True, path_type=Path), default=None,
              metavar="FILE_OR_FOLDER",
              help="Cycler or decay file, or a folder of them; default: inputs.cycling of the campaign.")
@click.option("--out", type=click.Path(path_type=Path), default=None, metavar="DIR",
              help="Folder for rates.csv, the fit tables, report and figures; default: results/.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@friendly_errors
def fade_command(campaign: Path, input_path: Path | None, out: Path | None, quiet: bool) -> None:
    """Fit capacity fade / decay kinetics and write the rate table (rates.csv)."""
    from redoxfront.campaign import load_campaign
    from redoxfront.fade.step import fade_campaign

    rates = fade_campaign(load_campaign(campaign), input_path=input_path, out_dir=out,
                          progress=not quiet)
    ok = rates["status"] == "ok"
    click.echo(f"{int(ok.sum())} datasets fitted, {int((~ok).sum())} failed; see fade_report.md")
    for _, r in rates[~ok].iterrows():
        click.echo(f"  {r['id']}: {r['status']}", err=True)


# ---- calibration, rate model, training-set design (statistics step) ----------


@main.command("calibrate")
@CAMPAIGN_ARG
@friendly_errors
def calibrate_command(campaign: Path) -> None:
    """Calibrate computed potentials against measured ones (adds columns to descriptors.csv)."""
    from redoxfront import columns
    from redoxfront.campaign import load_campaign
    from redoxfront.statistics.calibration import calibrate_campaign

    table = calibrate_campaign(load_campaign(campaign))
    info = table.attrs.get("calibration", {})
    for line in info.get("lines", []):
        click.echo(
            f"[{line['group']}] measured = {line['intercept_v']:.3f} (+/- {line['intercept_se_v']:.3f}) V + "
            f"{line['slope']:.3f} (+/- {line['slope_se']:.3f}) x computed; n {line['n']}, R2 {line['r2']:.3f}, "
            f"RMSE {line['rmse_v']:.3f} V, LOO MAE {line['loo_mae_v']:.3f} V"
        )
    for status, count in table[columns.CALIBRATION_STATUS].value_counts().items():
        click.echo(f"{count} candidate(s): {status}")
    for note in info.get("notes", []):
        click.echo(f"note: {note}", err=True)
    for warning in info.get("warnings", []):
        click.echo(warning, err=True)


@main.command("fit")
@CAMPAIGN_ARG
@friendly_errors
def fit_command(campaign: Path) -> None:
    """Fit the decomposition-rate model, validate it and predict every candidate."""
    from redoxfront.campaign import load_campaign
    from redoxfront.statistics.step import fit_campaign

    click.echo(fit_campaign(load_campaign(campaign)).text())


@main.command("choose-training")
@CAMPAIGN_ARG
@click.option("--count", "k", type=click.IntRange(1), required=True,
              help="Size of the training set, including the --made candidates.")
@click.option("--made", multiple=True, metavar="ID", help="Candidate already made (forced in); repeatable.")
@click.option("--skip", multiple=True, metavar="ID", help="Candidate that cannot be made; repeatable.")
@click.option("--columns", "cols", default=None, metavar="A,B,...",
              help="Descriptor columns to span (default: every numeric descriptor column).")
@friendly_errors
def choose_training_command(campaign: Path, k: int, made: tuple[str, ...], skip: tuple[str, ...],
                            cols: str | None) -> None:
    """Pick which candidates to make first so the training set spans descriptor space."""
    from redoxfront.statistics.training_set import choose_training_for_campaign

    design = choose_training_for_campaign(
        campaign, k, made, skip, [c.strip() for c in cols.split(",")] if cols else None
    )
    for n, i in enumerate(design.picks, 1):
        click.echo(f"{n:3d}  {i}{'  (made)' if i in made else ''}")
    if design.skipped_rows:
        click.echo(f"left out (failed or missing descriptors): {', '.join(design.skipped_rows)}", err=True)
    click.echo(f"spanned {len(design.columns)} descriptor columns; written to results/training_picks.csv")


# ---- cell metrics, trade-off front, next experiments --------------------------


@main.command("rank")
@CAMPAIGN_ARG
@click.option("--quiet", is_flag=True, help="No progress bar.")
@click.option("--timings", is_flag=True, help="Print how long each phase took (s) to stderr.")
@friendly_errors
def rank_command(campaign: Path, quiet: bool, timings: bool) -> None:
    """Cell metrics, trade-off front, probability on the front and next experiments."""
    import time

    start = time.perf_counter()
    from redoxfront.processes import PreparedChild

    # forked first: it imports the plotting code on the other core while this process reads and ranks
    with PreparedChild(("redoxfront.ranking.figures",)) as drawer:
        from redoxfront import columns
        from redoxfront.campaign import load_campaign
        from redoxfront.ranking.step import rank_campaign

        phases: dict[str, float] = {"imports and settings": 0.0}
        camp = load_campaign(campaign)
        phases["imports and settings"] = time.perf_counter() - start
        table = rank_campaign(camp, progress=not quiet, timings=phases, drawer=drawer)
    ranked = table[columns.PARETO_RANK].notna()
    first = table[table[columns.PARETO_RANK] == 1]
    click.echo(f"{int(ranked.sum())} of {len(table)} candidates ranked; {len(first)} on the first front")
    knee = table.loc[table[columns.KNEE], columns.ID].tolist()
    if knee:
        click.echo(f"knee: {knee[0]}")
    picks = table[table[columns.PICK_ORDER].notna()].sort_values(columns.PICK_ORDER)
    for _, row in picks.iterrows():
        flag = "  (extrapolating)" if row[columns.EXTRAPOLATING] else ""
        click.echo(f"pick {int(row[columns.PICK_ORDER])}: {row[columns.ID]}  "
                   f"P(front) {row[columns.P_FRONT]:.2f}{flag}")
    if (table[columns.POTENTIAL_BASIS] == "uncalibrated").any():
        click.echo("note: some potentials are uncalibrated (+-[cell] uncalibrated_uncertainty_v)", err=True)
    click.echo("written: results/ranking.csv, results/picks.csv, results/figures/front.svg")
    if timings:
        phases["total since the command began"] = time.perf_counter() - start
        for phase, seconds in phases.items():
            click.echo(f"timing: {phase}: {seconds:.3f} s", err=True)


@main.command("run")
@CAMPAIGN_ARG
@click.option("--workers", type=int, default=None, help="Parallel workers for the compute step.")
@click.option("--cluster", default=None, metavar="ADDRESS",
              help="Compute on a Dask scheduler at ADDRESS, or 'local' for a Dask cluster on this machine.")
@click.option("--quiet", is_flag=True, help="No progress bars.")
@friendly_errors
def run_command(campaign: Path, workers: int | None, cluster: str | None, quiet: bool) -> None:
    """The whole job: compute, fade fitting, calibration, rate model and ranking."""
    start_cluster_early(cluster)
    from redoxfront.pipeline import run_campaign

    run_campaign(campaign, workers=workers, dask_address=cluster, progress=not quiet, echo=click.echo)


@main.command("report")
@CAMPAIGN_ARG
@friendly_errors
def report_command(campaign: Path) -> None:
    """Write results/report.html from what the other steps wrote."""
    from redoxfront.campaign import load_campaign
    from redoxfront.report import write_report

    click.echo(f"written: {write_report(load_campaign(campaign))}")
