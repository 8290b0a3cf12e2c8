"""How well the fast tier orders candidates like the full tier (not part of make test).

For the invented benchmark set (benchmarks/invented_candidates.csv, all catholytes) and a small
subset of the published reference set (../shared/reference-potentials/published_potentials.csv:
acetonitrile rows, oxidations as catholytes and reductions as anolytes, the first --reference-count
distinct molecules by id), computes the full tier (default [compute] settings, potentials only) and
the fast tier, and prints per set and role: Spearman rho of the full-tier potential against the
fast-tier vertical potential and against the orbital proxy (-HOMO for catholytes, -LUMO for
anolytes), and how many of the full tier's top 10 % the funnel keeps at its default rule.
The figures go to docs/funnel.md as printed. Usage:
  .venv/bin/python benchmarks/fast_tier_rank.py [--workers 2] [--reference-count 20] [--store DIR]
"""

from __future__ import annotations

import argparse
import math
import os
import sys
import tempfile
from pathlib import Path

from redoxfront.campaign import THREAD_VARIABLES

for _var in THREAD_VARIABLES:
    os.environ.setdefault(_var, "1")

import pandas as pd  # noqa: E402
from scipy.stats import spearmanr  # noqa: E402

from redoxfront.campaign import ComputeSettings  # noqa: E402
from redoxfront.candidates.structures import parse_candidate, read_candidates  # noqa: E402
from redoxfront.compute.fast_tier import FAST_HOMO, FAST_LUMO, FastJob, fast_vertical_column, run_fast_tier  # noqa: E402
from redoxfront.compute.funnel import FunnelSettings, full_tier_top_kept  # noqa: E402
from redoxfront.compute.step import compute_candidates  # noqa: E402

HERE = Path(__file__).resolve().parent
REFERENCE = HERE.parents[1] / "shared" / "reference-potentials" / "published_potentials.csv"
if not REFERENCE.exists():
    REFERENCE = Path("/work/shared/reference-potentials/published_potentials.csv")


def reference_candidates(settings: ComputeSettings, count: int):
    """Acetonitrile rows, one family and process at a time in turn (ordered by id), distinct
    molecules, at most ``count``: a subset that spans the families and both processes."""
    table = pd.read_csv(REFERENCE, dtype=str)
    table = table[(table["solvent"] == "acetonitrile")].sort_values("id")
    groups = [g for _, g in table.groupby(["family", "process"], sort=True)]
    out, seen, depth = [], set(), 0
    while len(out) < count and depth < max(len(g) for g in groups):
        for g in groups:
            if depth >= len(g) or len(out) >= count:
                continue
            r = g.iloc[depth]
            if r["smiles"] in seen:
                continue
            role = "catholyte" if r["process"] == "oxidation" else "anolyte"
            try:
                out.append(parse_candidate({"id": r["id"], "smiles": r["smiles"], "role": role}, 0, settings))
            except Exception:  # a row our reader refuses is left out of the subset
                continue
            seen.add(r["smiles"])
        depth += 1
    return out


def compare(name: str, cands, settings: ComputeSettings, workers: int, keep: Path | None = None) -> list[str]:
    ref = settings.reference
    with tempfile.TemporaryDirectory() as tmp:
        store = str((keep or Path(tmp)) / f"{name.split()[0]}.sqlite")
        full, _ = compute_candidates(cands, settings, store, workers=workers, progress=False, describe=False)
        fast = {r.id: r.row for r in run_fast_tier([FastJob.of(c)
                                                     for c in cands], settings, store, workers=workers)}
    rows = []
    for o in full:
        f = fast[o.candidate.id]
        pot = o.row.get(f"potential_uncalibrated_v_vs_{ref}")
        if o.states is None or f.get("fast_tier_status") != "ok" or pot is None or math.isnan(pot):
            continue
        proxy = -f[FAST_HOMO] if o.candidate.role == "catholyte" else -f[FAST_LUMO]
        rows.append({"role": o.candidate.role, "full": pot, "vertical": f[fast_vertical_column(ref)],
                     "orbital": proxy})
    table = pd.DataFrame(rows)
    lines = []
    funnel = FunnelSettings()
    for role, part in table.groupby("role"):
        rho_v = spearmanr(part["full"], part["vertical"]).statistic
        rho_o = spearmanr(part["full"], part["orbital"]).statistic
        kept_o, top = full_tier_top_kept(part["full"].to_numpy(), part["orbital"].to_numpy(), role, funnel.fraction)
        kept_v, _ = full_tier_top_kept(part["full"].to_numpy(), part["vertical"].to_numpy(), role, funnel.fraction)
        lines.append(f"{name}, {role}s: n {len(part)}; Spearman rho full vs orbital proxy {rho_o:.2f}, "
                     f"full vs fast vertical {rho_v:.2f}; the default rule (top {funnel.fraction:.0%} by the "
                     f"fast tier) keeps {kept_o} of the full tier's top 10 % ({top}) by the orbital proxy, "
                     f"{kept_v} by the vertical potential")
    return lines


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--reference-count", type=int, default=20)
    ap.add_argument("--skip-invented", action="store_true")
    ap.add_argument("--store", type=Path, default=None,
                    help="folder for the stores, kept between runs (a rerun computes only what changed)")
    args = ap.parse_args()
    if args.store:
        args.store.mkdir(parents=True, exist_ok=True)
    settings = ComputeSettings()
    print(f"load average at start: {os.getloadavg()[0]:.2f} (1 min), {os.cpu_count()} cores", flush=True)
    lines = []
    if not args.skip_invented:
        invented, _ = read_candidates(HERE / "invented_candidates.csv", settings)
        lines += compare(f"invented set ({len(invented)} molecules)", invented, settings, args.workers, args.store)
    published = reference_candidates(settings, args.reference_count)
    lines += compare(f"published subset ({len(published)} molecules)", published, settings, args.workers,
                     args.store)
    print("\n".join(lines))
    print(f"load average at end: {os.getloadavg()[0]:.2f} (1 min)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
