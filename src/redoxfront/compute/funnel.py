"""The funnel: the fast tier for every candidate, the full tier for those a rule selects.

Rule of the funnel (section ``[funnel]``, :class:`FunnelSettings`):

1. every candidate gets the fast tier (:mod:`redoxfront.compute.fast_tier`);
2. a calibration sample of ``calibration_sample`` candidates per role, evenly spaced in the
   order of their fast-tier value (``proxy``: the orbital proxy -HOMO / -LUMO by default, which
   ranked better than the vertical potential in the measurement of docs/funnel.md, or the
   vertical potential), gets the full tier;
3. a line full = a + b x fast is fitted on the sample (ordinary least squares) and gives every
   candidate a calibrated estimate of its full-tier potential with a 95 % prediction interval;
4. the rule selects who else gets the full tier: ``top_fraction`` (default) takes the best
   ``fraction`` of each role by the estimate (highest potentials for catholytes, lowest for
   anolytes: the wider cell window); ``interval_reaches_cut`` takes every candidate whose 95 %
   interval reaches the estimate of the candidate at that cut (more candidates, fewer misses);
   bipolar rows and rows the fast tier could not do always go on;
5. the full tier runs on the sample and the selection (``results/descriptors.csv`` as usual),
   the line is refitted on every full-tier result and ``results/fast_tier.csv`` is written:
   every candidate with its fast-tier numbers, the estimate and its interval, the reason it was
   or was not selected and, where computed, its full-tier potential. Every column names its tier.

``redoxfront run`` uses the funnel when the candidates file holds more than ``threshold`` rows
(default 2000), ``redoxfront compute --funnel`` on demand.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from redoxfront.campaign import Campaign, bounded, choice, section_from_mapping

RULES = ("top_fraction", "interval_reaches_cut")
PROXIES = ("orbital", "vertical")
SELECTION_COLUMN = "full_tier_selection"
"""Why a candidate did or did not get the full tier (text)."""


def estimate_column(ref: str, bound: str | None = None) -> str:
    """Fast tier's calibrated estimate of the full-tier (uncalibrated) potential, V vs ``ref``;
    ``bound`` 'low' / 'high' for the ends of its 95 % prediction interval."""
    b = "" if bound is None else f"_pi95_{bound}"
    return f"fast_tier_estimate_of_full_tier_potential{b}_v_vs_{ref}"


def full_column(ref: str) -> str:
    """The full tier's own uncalibrated potential in the fast-tier table, V vs ``ref``."""
    return f"full_tier_potential_uncalibrated_v_vs_{ref}"


@dataclass(frozen=True)
class FunnelSettings:
    """Section ``[funnel]``.

    threshold : ``redoxfront run`` uses the funnel above this many candidates.
    rule : 'top_fraction' or 'interval_reaches_cut' (see the module docstring).
    fraction : share of each role selected by the rule (0-1].
    calibration_sample : candidates per role computed at the full tier to fit the tier line.
    chunk_size : candidates per fast-tier task (fewer tasks, less traffic; memory per chunk).
    proxy : the fast-tier value the line and the rule use: 'orbital' (-HOMO of a catholyte,
        -LUMO of an anolyte, one single point) or 'vertical' (vertical potential, two points).
    """

    threshold: int = field(default=2000, metadata=bounded(0, None))
    rule: str = field(default="top_fraction", metadata=choice(*RULES))
    fraction: float = field(default=0.2, metadata=bounded(0.001, 1.0))
    calibration_sample: int = field(default=24, metadata=bounded(3, 10000))
    chunk_size: int = field(default=64, metadata=bounded(1, 100000))
    proxy: str = field(default="orbital", metadata=choice(*PROXIES))


def funnel_settings(campaign: Campaign) -> FunnelSettings:
    return section_from_mapping(FunnelSettings, campaign.section("funnel"), "funnel")


@dataclass(frozen=True)
class TierLine:
    """full = intercept + slope x fast (OLS), with what its 95 % prediction interval needs."""

    intercept: float
    slope: float
    n: int
    residual_sd: float
    mean_x: float
    sxx: float
    t95: float

    def predict(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Estimate and 95 % prediction interval (Draper & Smith, Applied Regression Analysis,
        3rd ed. 1998, sec. 3.3: half-width t(0.975, n-2) s sqrt(1 + 1/n + (x - xbar)^2 / Sxx))."""
        x = np.asarray(x, dtype=float)
        est = self.intercept + self.slope * x
        half = self.t95 * self.residual_sd * np.sqrt(1 + 1 / self.n + (x - self.mean_x) ** 2 / self.sxx)
        return est, est - half, est + half


def fit_tier_line(fast: np.ndarray, full: np.ndarray) -> TierLine | None:
    """Fit the tier line on pairs; None with fewer than 3 pairs or no spread in ``fast``."""
    from scipy.stats import t as student_t

    x, y = np.asarray(fast, dtype=float), np.asarray(full, dtype=float)
    ok = np.isfinite(x) & np.isfinite(y)
    x, y = x[ok], y[ok]
    n = len(x)
    sxx = float(((x - x.mean()) ** 2).sum()) if n else 0.0
    if n < 3 or sxx <= 0:
        return None
    slope = float(((x - x.mean()) * (y - y.mean())).sum() / sxx)
    intercept = float(y.mean() - slope * x.mean())
    resid = y - intercept - slope * x
    sd = float(np.sqrt((resid ** 2).sum() / (n - 2)))
    return TierLine(intercept, slope, n, sd, float(x.mean()), sxx, float(student_t.ppf(0.975, n - 2)))


def better_sign(role: str) -> float:
    """+1 when a higher potential is better for the cell (catholyte), -1 when lower (anolyte)."""
    return 1.0 if role == "catholyte" else -1.0


def calibration_sample(values: np.ndarray, size: int) -> np.ndarray:
    """Indices of ``size`` candidates evenly spaced in the order of ``values`` (both ends in)."""
    order = np.argsort(values, kind="stable")
    if len(order) <= size:
        return order
    return order[np.unique(np.round(np.linspace(0, len(order) - 1, size)).astype(int))]


def select(values: np.ndarray, low: np.ndarray, high: np.ndarray, role: str, settings: FunnelSettings) -> np.ndarray:
    """Boolean mask of the candidates of one role the rule sends to the full tier.

    ``values``: the estimates (or the fast-tier values while no line exists); ``low``/``high``:
    their 95 % interval (NaN without a line: the interval rule then falls back to the top fraction).
    """
    n = len(values)
    k = max(1, int(np.ceil(settings.fraction * n))) if n else 0
    score = better_sign(role) * np.asarray(values, dtype=float)
    order = np.argsort(-score, kind="stable")
    chosen = np.zeros(n, dtype=bool)
    chosen[order[:k]] = True
    if settings.rule == "interval_reaches_cut" and n and np.isfinite(low).all():
        cut = score[order[k - 1]]
        best_end = high if role == "catholyte" else low
        chosen |= better_sign(role) * np.asarray(best_end) >= cut
    return chosen


def full_tier_top_kept(full: np.ndarray, fast: np.ndarray, role: str, fraction: float,
                       top: float = 0.10) -> tuple[int, int]:
    """How many of the full tier's top ``top`` share the top ``fraction`` by fast tier keeps:
    (kept, size of the full tier's top)."""
    n = len(full)
    n_top = max(1, int(np.ceil(top * n)))
    s = better_sign(role)
    best_full = set(np.argsort(-s * np.asarray(full), kind="stable")[:n_top])
    mask = select(np.asarray(fast), np.full(n, np.nan), np.full(n, np.nan), role,
                  FunnelSettings(fraction=fraction))
    return len(best_full & set(np.flatnonzero(mask))), n_top


@dataclass(frozen=True)
class FunnelReport:
    """What the funnel did: counts and the tier lines (per role)."""

    candidates: int
    fast_ok: int
    sampled: int
    selected: int
    full_computed: int
    lines: dict[str, dict[str, Any]]
    compute: Any
    """The :class:`~redoxfront.compute.step.ComputeReport` of the full tier."""


def funnel_campaign(campaign: Campaign, *, workers: int | None = None, dask_address: str | None = None,
                    progress: bool = True, describe: bool = True) -> FunnelReport:
    """Run the funnel on the campaign's candidates (see the module docstring)."""
    from redoxfront.compute.fast_tier import FAST_ORBITAL_PROXY, FAST_STATUS, fast_vertical_column
    from redoxfront.compute.lock import campaign_lock
    from redoxfront.compute.step import compute_campaign
    from redoxfront.csv_tables import write_csv
    from redoxfront.outputs import write_json

    fs = funnel_settings(campaign)
    settings = campaign.compute
    ref = settings.reference
    workers = settings.workers if workers is None else workers
    with campaign_lock(campaign.folder):
        fast, problems = fast_tier_table(campaign, workers=workers, dask_address=dask_address, progress=progress)
    vcol = FAST_ORBITAL_PROXY if fs.proxy == "orbital" else fast_vertical_column(ref)
    if vcol not in fast:
        fast[vcol] = np.nan
    ok = (fast[FAST_STATUS] == "ok").to_numpy()
    fast[SELECTION_COLUMN] = np.where(ok, "not selected", "full tier: " + fast[FAST_STATUS].astype(str))
    sample = np.zeros(len(fast), dtype=bool)
    for role in fast.loc[ok, "role"].unique():
        idx = np.flatnonzero(ok & (fast["role"] == role).to_numpy())
        sample[idx[calibration_sample(fast[vcol].to_numpy()[idx], fs.calibration_sample)]] = True
    fast.loc[sample, SELECTION_COLUMN] = "calibration sample"
    first = compute_campaign(campaign, workers=workers, dask_address=dask_address, progress=progress,
                             describe=describe, only_ids=set(fast.loc[sample, "id"]), problems=problems)
    lines = _estimate(fast, first.table, ref, vcol, ok)
    for role in fast.loc[ok, "role"].unique():
        idx = np.flatnonzero(ok & (fast["role"] == role).to_numpy())
        est = fast[estimate_column(ref)].to_numpy()[idx]
        use_est = np.isfinite(est).all()
        values = est if use_est else fast[vcol].to_numpy()[idx]
        low = fast[estimate_column(ref, "low")].to_numpy()[idx] if use_est else np.full(len(idx), np.nan)
        high = fast[estimate_column(ref, "high")].to_numpy()[idx] if use_est else np.full(len(idx), np.nan)
        chosen = idx[select(values, low, high, role, fs)]
        chosen = chosen[~sample[chosen]]
        fast.loc[chosen, SELECTION_COLUMN] = f"selected by rule {fs.rule} (fraction {fs.fraction:g})"
    go = fast[SELECTION_COLUMN] != "not selected"
    report = compute_campaign(campaign, workers=workers, dask_address=dask_address, progress=progress,
                              describe=describe, only_ids=set(fast.loc[go, "id"]), problems=problems)
    lines = _estimate(fast, report.table, ref, vcol, ok)
    results = campaign.results_dir
    write_csv(fast, results / "fast_tier.csv")
    write_json(results / "fast_tier_summary.json", {
        "rule": fs.rule, "proxy": fs.proxy, "proxy_column": vcol, "fraction": fs.fraction, "calibration_sample_per_role": fs.calibration_sample,
        "candidates": len(fast), "fast_tier_ok": int(ok.sum()), "full_tier_computed": int(go.sum()),
        "tier_lines": lines,
        "note": "estimates are of the full tier's uncalibrated potential, from a line fitted between "
                "the two tiers on this campaign's full-tier results (95 % prediction interval)"})
    return FunnelReport(len(fast), int(ok.sum()), int(sample.sum()), int(go.sum() - sample.sum()),
                        int(go.sum()), lines, report)


TABLE_PIECE = 4096
"""Fast-tier rows the driver gathers into one table piece (plain dicts only this many at a time)."""


def fast_tier_table(campaign: Campaign, *, workers: int = 1, dask_address: str | None = None,
                    progress: bool = False, candidates_path: str | Path | None = None) -> tuple[Any, list[Any]]:
    """The fast tier of every candidate of the campaign, as one table in input order, and the
    rejected rows.

    Streams: the candidates file is read row by row as the workers ask for chunks
    (:func:`~redoxfront.compute.fast_tier.run_fast_tier`), each candidate's stored points are
    looked up with its chunk, and the driver keeps of each candidate its table row only
    (gathered into pieces of :data:`TABLE_PIECE` rows), never its molecule. The parsed list is
    kept in the store for ``status`` (:mod:`redoxfront.compute.roster`).
    """
    import pandas as pd

    from redoxfront.candidates.files import count_rows
    from redoxfront.candidates.structures import iter_candidates
    from redoxfront.compute.fast_tier import FastJob, run_fast_tier
    from redoxfront.compute.roster import RosterBuilder, roster_entry, roster_key, save_roster

    fs = funnel_settings(campaign)
    settings = campaign.compute
    path = Path(candidates_path) if candidates_path else Path(
        campaign.path(campaign.inputs.candidates, "[inputs] candidates"))
    problems: list[Any] = []
    order: dict[str, int] = {}
    kept = RosterBuilder()

    def jobs() -> Any:
        for c in iter_candidates(path, settings, problems):
            order[c.id] = len(order)
            kept.add(roster_entry(c))
            yield FastJob.of(c)

    pieces, rows = [], []
    for r in run_fast_tier(jobs(), settings, str(campaign.store_path), workers=workers, chunk_size=fs.chunk_size,
                           dask_address=dask_address, progress=progress, total=count_rows(path),
                           points="discharged" if fs.proxy == "orbital" else "both"):
        rows.append(r.row)
        if len(rows) >= TABLE_PIECE:
            pieces.append(pd.DataFrame(rows))
            rows = []
    pieces.append(pd.DataFrame(rows))
    fast = pd.concat(pieces, ignore_index=True) if len(pieces) > 1 else pieces[0]
    del pieces, rows
    if len(fast):
        fast = fast.iloc[np.argsort(fast["id"].map(order).to_numpy(), kind="stable")].reset_index(drop=True)
    save_roster(campaign.store_path, roster_key(path, settings), kept.roster(problems))
    return fast, problems


def _estimate(fast: Any, full_table: Any, ref: str, vcol: str, ok: np.ndarray) -> dict[str, dict[str, Any]]:
    """Fit the tier line per role on the rows with both tiers; fill the estimate columns."""
    import pandas as pd

    from redoxfront import columns as C

    pcol = C.potential_uncalibrated(ref)
    full = pd.Series(dtype=float)
    if len(full_table) and pcol in full_table:
        full = pd.to_numeric(full_table.set_index(C.ID)[pcol], errors="coerce")
        full = full[~full.index.duplicated()]
    fast[full_column(ref)] = fast["id"].map(full).astype(float)
    for b in (None, "low", "high"):
        fast[estimate_column(ref, b)] = np.nan
    lines: dict[str, dict[str, Any]] = {}
    for role in fast.loc[ok, "role"].unique():
        mask = ok & (fast["role"] == role).to_numpy()
        line = fit_tier_line(fast.loc[mask, vcol].to_numpy(), fast.loc[mask, full_column(ref)].to_numpy())
        if line is None:
            lines[role] = {"fitted": False, "reason": "fewer than 3 candidates with both tiers"}
            continue
        est, low, high = line.predict(fast.loc[mask, vcol].to_numpy())
        fast.loc[mask, estimate_column(ref)] = est
        fast.loc[mask, estimate_column(ref, "low")] = low
        fast.loc[mask, estimate_column(ref, "high")] = high
        lines[role] = {"fitted": True, "intercept_v": line.intercept, "slope": line.slope, "n": line.n,
                       "residual_sd_v": line.residual_sd}
    return lines


def use_funnel(campaign: Campaign) -> bool:
    """True when the campaign's candidates file has more rows than ``[funnel] threshold``
    (CSV lines after the header or SDF records, counted without parsing molecules)."""
    from redoxfront.candidates.files import count_rows

    path = Path(campaign.path(campaign.inputs.candidates, "[inputs] candidates"))
    return count_rows(path) > funnel_settings(campaign).threshold


__all__ = ["PROXIES", "FunnelReport", "FunnelSettings", "RULES", "SELECTION_COLUMN", "TierLine", "calibration_sample",
           "estimate_column", "fast_tier_table", "fit_tier_line", "full_column", "full_tier_top_kept", "funnel_campaign",
           "funnel_settings", "select", "use_funnel"]
