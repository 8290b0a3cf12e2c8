"""Benchmark of the fast tier and the funnel's driver (not part of make test).

Prints, measured side by side in one run, each figure as a ratio to its target (for a rate:
target / figure; for a time or memory: figure / target; <= 1 meets the target), with the
machine's load average at start and end:

* fast-tier throughput at the funnel's default proxy, everything included (reading the
  candidates file, force-field geometry, the GFN2-xTB single point(s), the store, writing the table), on 2 workers
  (target >= 100,000 candidates/h on 2 cores, <= 25 heavy atoms) and on 1 worker (per core,
  against half that target);
* parallel efficiency of the fast tier: speed-up of 2 workers over 1, divided by 2 (target
  >= 0.9), and the engine's share of the workers' time (no target: the force-field geometry
  is the rest of the work by design);
* Dask LocalCluster, 2 workers against 1, on the same fast-tier sample, cluster start included
  (target >= 1.8x);
* a 100,000-member enumerated library (invented: a dialkoxybenzene with four sites x 18
  substituents, <= 23 heavy atoms): enumeration and reading timed on a sample slice, the fast
  tier on the sample above, the whole extrapolated to 100,000 on 2 workers (target <= 1 h), and
  the driver's memory holding 100,000 jobs and result rows (target <= 2 GB);
Exits 1 when any figure misses its target. Run on an idle machine:
  .venv/bin/python benchmarks/funnel_bench.py [--sample 240] [--no-dask]
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import tempfile
import time
from pathlib import Path

from redoxfront.campaign import THREAD_VARIABLES

for _var in THREAD_VARIABLES:
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402

from redoxfront.campaign import ComputeSettings  # noqa: E402
from targets import finish, ratio_to_target  # noqa: E402

SUBSTITUENTS = ["H", "C", "CC", "CCC", "C(C)C", "F", "Cl", "Br", "OC", "OCC", "SC", "N(C)C", "C#N", "C=O",
                "C(C)=O", "CO", "NC=O", "C(N)=O"]
SCAFFOLD = "COc1c([*:1])c([*:2])c(OCC)c([*:3])c1[*:4]"
"""Invented scaffold: 1-ethoxy-4-methoxybenzene with four sites (no symmetry: 18^4 = 104,976 members)."""
LIBRARY_SIZE = 100_000


def library_sample(n_per_site: tuple[int, ...], seed: int):
    """A random sub-grid of the 18^4 library (the sample), as a table, and seconds to build it."""
    from redoxfront.candidates.library import LibrarySettings, build_library

    rng = np.random.default_rng(seed)
    subs = {str(i + 1): [SUBSTITUENTS[j] for j in sorted(rng.choice(len(SUBSTITUENTS), k, replace=False))]
            for i, k in enumerate(n_per_site)}
    t0 = time.perf_counter()
    table, _ = build_library(LibrarySettings(scaffold=SCAFFOLD, substituents=subs, id_prefix="inv"))
    return table, time.perf_counter() - t0


def fast_tier_end_to_end(csv: Path, out: Path, store: Path, settings: ComputeSettings, workers: int,
                         dask: str | None = None) -> tuple[int, float, float]:
    """Read the file, run the fast tier with the store, write the table: (ok, wall s, engine s)."""
    import pandas as pd

    from redoxfront.candidates.structures import read_candidates
    from redoxfront.compute.fast_tier import FAST_STATUS, FastJob, run_fast_tier
    from redoxfront.outputs import write_csv

    t0 = time.perf_counter()
    cands, _ = read_candidates(csv, settings)
    jobs = [FastJob.of(c) for c in cands]
    from redoxfront.compute.funnel import FunnelSettings

    fs = FunnelSettings()  # the funnel's defaults: its proxy decides one or two single points
    results = list(run_fast_tier(jobs, settings, str(store), workers=workers, chunk_size=16, dask_address=dask,
                                 points="discharged" if fs.proxy == "orbital" else "both"))
    rows = pd.DataFrame([r.row for r in results])
    write_csv(rows, out)
    wall = time.perf_counter() - t0
    return int((rows[FAST_STATUS] == "ok").sum()), wall, sum(r.engine_seconds for r in results)


def line(label: str, value: float, unit: str, target: float, higher_is_better: bool, missed: list[str]) -> None:
    ratio, ok = ratio_to_target(label, value, target, higher_is_better, missed)
    sign = ">=" if higher_is_better else "<="
    print(f"  {label:52s} {value:12,.2f} {unit:14s} target {sign} {target:,.6g}: ratio {ratio:5.2f} "
          f"({'meets' if ok else 'MISSES'})", flush=True)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sample", type=int, default=240, help="about this many library members in the sample")
    ap.add_argument("--no-dask", action="store_true", help="leave out the Dask 2-vs-1 comparison")
    args = ap.parse_args()
    settings = ComputeSettings()
    missed: list[str] = []
    print(f"load average at start: {' '.join(f'{x:.2f}' for x in os.getloadavg())} (1, 5, 15 min); "
          f"{os.cpu_count()} cores", flush=True)
    k = max(2, round(args.sample ** 0.25))
    table, enum_s = library_sample((k, k, k, max(1, round(args.sample / k ** 3))), 7)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        csv = tmp / "sample.csv"
        table[["id", "smiles"]].to_csv(csv, index=False)
        n = len(table)
        from redoxfront.candidates.structures import read_candidates

        t0 = time.perf_counter()
        cands, _ = read_candidates(csv, settings)
        read_s = time.perf_counter() - t0
        heavy = [c.heavy_atoms for c in cands]
        print(f"sample: {n} members of the invented 18^4 library, {min(heavy)}-{max(heavy)} heavy atoms; "
              f"enumerated in {enum_s:.2f} s, read in {read_s:.2f} s", flush=True)
        # 2 workers first: the pool forks before this process loads the engine
        ok2, wall2, eng2 = fast_tier_end_to_end(csv, tmp / "fast2.csv", tmp / "s2.sqlite", settings, 2)
        ok1, wall1, eng1 = fast_tier_end_to_end(csv, tmp / "fast1.csv", tmp / "s1.sqlite", settings, 1)
        rate2, rate1 = ok2 / wall2 * 3600, ok1 / wall1 * 3600
        from redoxfront.compute.funnel import FunnelSettings

        n_points = 1 if FunnelSettings().proxy == "orbital" else 2
        print(f"fast tier at the funnel's default proxy ({FunnelSettings().proxy}: {n_points} single point(s)), "
              "everything included (read, geometry, single points, store, table):")
        line("throughput on 2 workers", rate2, "candidates/h", 100_000, True, missed)
        line("throughput on 1 worker (per core)", rate1, "candidates/h", 50_000, True, missed)
        line("parallel efficiency: (1-worker wall / 2-worker wall) / 2", wall1 / wall2 / 2, "", 0.90, True, missed)
        print(f"    (engine share of the 2 workers' time: engine s / (wall s x 2) = {eng2 / (wall2 * 2):.2f}; no "
              "target: the force-field geometry is the rest of the fast tier's work by design)")
        print(f"    (per candidate on 1 worker: {wall1 / max(ok1, 1) * 1e3:.1f} ms wall, of which "
              f"{eng1 / max(ok1, 1) * 1e3:.1f} ms in the engine)")
        if not args.no_dask:
            okd1, walld1, _ = fast_tier_end_to_end(csv, tmp / "d1.csv", tmp / "d1.sqlite", settings, 1, "local")
            okd2, walld2, _ = fast_tier_end_to_end(csv, tmp / "d2.csv", tmp / "d2.sqlite", settings, 2, "local")
            print("Dask LocalCluster on the same sample (cluster start included):")
            line("speed-up 2 workers vs 1 (fast tier)", walld1 / walld2, "x", 1.8, True, missed)
        # 100,000 members: enumeration, reading and the fast tier per member, from the sample
        per = (enum_s + read_s) / n + wall2 / max(ok2, 1)
        print(f"100,000-member library, extrapolated from the {n}-member sample on 2 workers:")
        line("enumerate + read + fast tier, 100,000 members", per * LIBRARY_SIZE / 3600, "h", 1.0, False, missed)
        # driver memory: 100,000 jobs and result rows (the sample's rows repeated), resident set
        import pandas as pd

        from redoxfront.compute.fast_tier import FastJob

        rows = pd.read_csv(tmp / "fast2.csv").to_dict("records")
        before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        jobs = [FastJob(f"x{i}", cands[i % len(cands)].main_smiles, "catholyte", 1) for i in range(LIBRARY_SIZE)]
        frame = pd.DataFrame([dict(rows[i % len(rows)], id=f"x{i}") for i in range(LIBRARY_SIZE)])
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        line("driver peak resident set with 100,000 jobs + rows", peak, "MiB", 2048, False, missed)
        print(f"    (of which the 100,000 jobs and rows added {peak - before:.0f} MiB; {len(jobs)} jobs, "
              f"{frame.shape} table)")
    return finish(missed, all_loads=True)


if __name__ == "__main__":
    sys.exit(main())
