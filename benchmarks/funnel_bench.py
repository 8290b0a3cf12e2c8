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
* Dask LocalCluster, 2 workers against 1, on a larger sample of the library (--dask-sample, about 1,024 members: a cluster is for large libraries), cluster start included,
  each run in a process of its own (target >= 1.8x), and the cluster's own cost (start, the
  first task's imports, close) without a target;
* a 100,000-member enumerated library (invented: a dialkoxybenzene with four sites x 18
  substituents, <= 23 heavy atoms): enumeration and reading timed on a sample slice, the fast
  tier on the sample above, the whole extrapolated to 100,000 on 2 workers (target <= 1 h);
* streaming (``--stream``, default 100,000): that many distinct invented candidates (three
  dialkoxybenzene scaffolds x four sites) stream through the funnel's fast-tier driver in a
  process of its own, their fast-tier points already in the store (placeholder numbers, so no
  engine time is spent: the pass measures the driver, reading, chunks, store look-ups, the table
  and fast_tier.csv): its peak resident set (target <= 2 GB); the full tier's driver on 200 and
  2,000 stored rows, its memory per candidate extrapolated to the same count (target <= 2 GB);
  ``redoxfront status`` end to end on that campaign, its store holding the fast tier of every
  candidate and the full tier of a fifth (target <= 5 s; the same with the kept candidate list
  removed, every row parsed, is printed without a target);
The fast tier and Dask runs are repeated (``--repeats``, default 2: each worker count twice,
alternating) and the fastest run of each worker count is judged: identical work varies by up
to ~20 % between runs on our 2-core VMs, and a single pair of runs printed efficiencies from
0.84 to 1.12 for the same code. Every run's time is printed.
Exits 1 when any figure misses its target. Run on an idle machine:
  .venv/bin/python benchmarks/funnel_bench.py [--sample 240] [--repeats 2] [--no-dask] [--dask-sample 1024]
  [--stream 100000] [--only-stream]
"""

from __future__ import annotations

import argparse
import itertools
import json
import os
import resource
import subprocess
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
"""Invented scaffold: 1-ethoxy-4-methoxybenzene with four sites: 18^4 = 104,976 combinations, 52,497 distinct
molecules (the mirror through the two alkoxy carbons swaps sites 1 and 4, 2 and 3)."""
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
    from redoxfront.compute.executors import start_worker_server
    from redoxfront.compute.fast_tier import FAST_STATUS, FastJob, run_fast_tier
    from redoxfront.csv_tables import write_csv

    t0 = time.perf_counter()
    if dask == "local":  # as the command does first with --cluster local
        start_worker_server()
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


# ---- streaming: 100,000 candidates through the driver, and `status` --------------------------

ALKOXY_PAIRS = (("C", "CC"), ("C", "CCC"), ("CC", "CCC"))
"""Invented scaffolds for the streaming pass: 1,4-dialkoxybenzenes with two different alkoxy
groups (methoxy/ethoxy, methoxy/propoxy, ethoxy/propoxy) and four ring sites."""


def distinct_library(n: int) -> list[tuple[str, str]]:
    """``n`` distinct invented members (id, SMILES): each scaffold's four sites take 17
    substituents (no H), one of each mirror pair kept (the ring's mirror through the two alkoxy
    groups swaps sites 2<->6 and 3<->5), about 41,900 per scaffold."""
    subs = [s for s in SUBSTITUENTS if s != "H"]
    out: list[tuple[str, str]] = []
    for a, b in ALKOXY_PAIRS:
        for i2, i3, i5, i6 in itertools.product(range(len(subs)), repeat=4):
            if (i2, i3) > (i6, i5):  # the mirror image of one already written
                continue
            out.append((f"inv-{len(out) + 1:06d}",
                        f"{a}Oc1c({subs[i2]})c({subs[i3]})c(O{b})c({subs[i5]})c1{subs[i6]}"))
            if len(out) == n:
                return out
    return out


def prepare_streaming_campaign(folder: Path, n: int, full_tier: int, settings: ComputeSettings) -> dict:
    """A campaign of ``n`` distinct invented candidates whose fast-tier points are already in its
    store, and ``full_tier`` of them with full-tier states (a large store, as after a funnel
    run). The stored numbers are placeholders (one computed full-tier state, copied): the pass
    measures the driver (reading, store look-ups, chunks, the table), not the engine."""
    from rdkit import Chem

    from redoxfront.compute.fast_tier import FAST_ENTRY_PREFIX, fast_tier_hash
    from redoxfront.compute.step import compute_candidates
    from redoxfront.compute.store import Store
    from redoxfront.candidates.structures import parse_candidate
    from redoxfront.engine.records import state_key

    (folder / "inputs").mkdir(parents=True)
    members = distinct_library(n)
    with open(folder / "inputs" / "candidates.csv", "w") as fh:
        fh.write("id,smiles\n")
        fh.writelines(f"{i},{s}\n" for i, s in members)
    (folder / "campaign.toml").write_text("[compute]\nrole = 'catholyte'\nworkers = 2\n")
    t0 = time.perf_counter()
    canonical = [Chem.MolToSmiles(Chem.MolFromSmiles(s)) for _, s in members]
    # one real full-tier result (default settings) gives the size of a stored state
    one = parse_candidate({"id": "one", "smiles": members[0][1]}, 2, settings)
    store_path = folder / "cache.sqlite"
    compute_candidates([one], settings, folder / "one.sqlite", workers=1, progress=False, describe=False)
    key_hash = settings.result_hash()
    with Store(folder / "one.sqlite") as one_store:
        states = {k: one_store.get(one.main_smiles, k, key_hash) for k in (state_key(0, 0), state_key(1, 1))}
    fast_key = fast_tier_hash(settings)
    point = {"energy_eh": -50.0, "homo_eh": -0.35, "lumo_eh": -0.05, "charge": 0, "uhf": 0,
             "geometry": "placeholder (benchmark store)"}
    with Store(store_path) as store:
        for i in range(0, n, 5000):
            part = canonical[i:i + 5000]
            rows = [(s, FAST_ENTRY_PREFIX + state_key(0, 0), fast_key, dict(point, homo_eh=-0.35 - 1e-6 * (i + j)))
                    for j, s in enumerate(part)]
            if i < full_tier:
                rows += [(s, k, key_hash, p) for s in part[:full_tier - i] for k, p in states.items()]
            store.put_many(rows)
    return {"unique": len(set(canonical)), "prepare_s": time.perf_counter() - t0, "one_smiles": members[0][1],
            "store_mib": store_path.stat().st_size / 2**20,
            "state_kib": sum(len(json.dumps(p)) for p in states.values()) / 2 / 1024}


def peak_mib() -> float:
    """This process's peak resident set, MiB: VmHWM of /proc (ru_maxrss on Linux keeps the
    parent's peak across fork and exec, so a small child of a large parent would read large)."""
    try:
        for text in Path("/proc/self/status").read_text().splitlines():
            if text.startswith("VmHWM:"):
                return int(text.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def full_tier_pass(folder: Path) -> None:
    """Child process: the full tier's driver (compute_campaign, potentials only) on a campaign
    whose states are all stored; prints wall time and peak resident set as JSON."""
    from redoxfront.campaign import load_campaign
    from redoxfront.compute.step import compute_campaign

    t0 = time.perf_counter()
    rep = compute_campaign(load_campaign(folder), progress=False, describe=False)
    print(json.dumps({"wall_s": time.perf_counter() - t0, "rows": len(rep.table), "engine_calls": rep.new_engine_calls,
                      "peak_mib": peak_mib()}))


def full_tier_driver(tmp: Path, one_smiles: str, one_store: Path, sizes: tuple[int, int]) -> list[dict]:
    """The full tier's driver on ``sizes`` rows of one molecule whose states are stored (no engine
    call; each row is its own task and outcome), each in a process of its own."""
    import shutil

    got = []
    for n in sizes:
        folder = tmp / f"full{n}"
        (folder / "inputs").mkdir(parents=True)
        (folder / "inputs" / "candidates.csv").write_text(
            "id,smiles\n" + "".join(f"x{i},{one_smiles}\n" for i in range(n)))
        (folder / "campaign.toml").write_text("[compute]\nrole = 'catholyte'\nworkers = 2\n")
        shutil.copy(one_store, folder / "cache.sqlite")
        child = subprocess.run([sys.executable, __file__, "--full-pass", str(folder)], capture_output=True,
                               text=True, check=True)
        got.append(json.loads(child.stdout.strip().splitlines()[-1]))
    return got


def driver_pass(folder: Path, workers: int) -> None:
    """Child process: the funnel's fast-tier driver on the campaign (read, chunks, store look-ups,
    table in input order, fast_tier.csv); prints wall time and peak resident set as JSON."""
    from redoxfront.campaign import load_campaign
    from redoxfront.compute.fast_tier import FAST_STATUS
    from redoxfront.compute.funnel import fast_tier_table
    from redoxfront.csv_tables import write_csv

    t0 = time.perf_counter()
    camp = load_campaign(folder)
    fast, problems = fast_tier_table(camp, workers=workers)
    write_csv(fast, camp.results_dir / "fast_tier.csv")
    print(json.dumps({"wall_s": time.perf_counter() - t0, "rows": len(fast),
                      "ok": int((fast[FAST_STATUS] == "ok").sum()), "rejected": len(problems),
                      "peak_mib": peak_mib()}))


def streaming(n: int, settings: ComputeSettings, missed: list[str]) -> None:
    """Stream ``n`` candidates through the funnel's driver (fast-tier points already stored) in a
    process of its own, then time ``redoxfront status`` on that campaign end to end."""
    from redoxfront.compute.fast_tier import fast_tier_hash
    from redoxfront.compute.store import Store

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "campaign"
        full = n // 5  # the default rule's share: the store after a funnel run
        prep = prepare_streaming_campaign(folder, n, full, settings)
        print(f"{n:,} invented candidates ({prep['unique']:,} distinct carriers), fast-tier points and "
              f"{full:,} candidates' full-tier states already in the store ({prep['store_mib']:.0f} MiB; a stored "
              f"state {prep['state_kib']:.1f} KiB; placeholder numbers, prepared in {prep['prepare_s']:.0f} s):",
              flush=True)
        child = subprocess.run([sys.executable, __file__, "--driver-pass", str(folder)], capture_output=True,
                               text=True, check=True)
        got = json.loads(child.stdout.strip().splitlines()[-1])
        with Store(folder / "cache.sqlite") as store:
            new_points = store.count(fast_tier_hash(settings)) - prep["unique"]
        line(f"funnel driver peak resident set, {n:,} streamed", got["peak_mib"], "MiB", 2048, False, missed)
        print(f"    (fast-tier driver on 2 workers: read, chunks, store look-ups, table, fast_tier.csv: "
              f"{got['rows']:,} rows in {got['wall_s']:.1f} s, {new_points} points computed; a separate process)")
        small, big = full_tier_driver(Path(tmp), prep["one_smiles"], folder / "one.sqlite", (200, 2000))
        per_kib = (big["peak_mib"] - small["peak_mib"]) * 1024 / (2000 - 200)
        at_n = small["peak_mib"] + per_kib * (n - 200) / 1024
        line(f"full-tier driver peak resident set, {n:,} (from 200 and 2,000)", at_n, "MiB", 2048, False, missed)
        print(f"    (compute step's driver, states all stored, {big['engine_calls']} engine calls: 200 rows "
              f"{small['peak_mib']:.0f} MiB, 2,000 rows {big['peak_mib']:.0f} MiB = {per_kib:.1f} KiB per candidate, "
              f"extrapolated linearly; 2,000 rows in {big['wall_s']:.1f} s)")
        exe = str(Path(sys.executable).with_name("redoxfront"))
        timings = []
        for label in ("kept list", "parsed afresh"):
            if label == "parsed afresh":
                import sqlite3

                con = sqlite3.connect(folder / "cache.sqlite")
                con.execute("DELETE FROM rosters")
                con.commit()
                con.close()
            t0 = time.perf_counter()
            out = subprocess.run([exe, "status", str(folder)], capture_output=True, text=True, check=True)
            timings.append((label, time.perf_counter() - t0, out.stdout.strip().splitlines()))
        (_, warm, text), (_, cold, _) = timings
        line(f"redoxfront status, {n:,} candidates, end to end", warm, "s", 5.0, False, missed)
        print(f"    ({text[0]}; {text[-1] if len(text) > 1 else ''})")
        print(f"    (the same with no kept candidate list, every row parsed: {cold:.1f} s; no target: any compute or "
              "funnel run, or the first status, keeps the list)")


def _imports_of_a_task(_: int) -> int:
    import rdkit.Chem  # noqa: F401
    import tblite.interface  # noqa: F401

    import redoxfront.compute.fast_tier  # noqa: F401
    import redoxfront.compute.step  # noqa: F401

    return os.getpid()


def dask_overhead(workers: int) -> float:
    """Wall seconds of a local cluster's own cost: start, a first task per worker that imports
    what the fast tier imports, close (no work)."""
    from distributed import Client

    from redoxfront.compute.executors import _local_cluster

    t0 = time.perf_counter()
    cluster = _local_cluster(workers)
    client = Client(cluster)
    client.gather([client.submit(_imports_of_a_task, i, pure=False) for i in range(workers)])
    client.close()
    cluster.close()
    return time.perf_counter() - t0


def _spin(n: int) -> float:
    """CPU seconds of a pure-Python loop of ``n`` steps (the machine's reference work)."""
    t = time.process_time()
    total = 0
    for i in range(n):
        total += i * i % 7
    return time.process_time() - t


def machine_scaling(repeats: int, n: int = 30_000_000) -> list[float]:
    """The machine's own 2-core speed-up: one pure-Python loop alone, then two at once in forked
    processes, ``repeats`` times; the ceiling of any 2-vs-1 figure measured in the same run."""
    import multiprocessing

    out = []
    ctx = multiprocessing.get_context("fork")
    for _ in range(repeats):
        t = time.perf_counter()
        _spin(n)
        alone = time.perf_counter() - t
        with ctx.Pool(2) as pool:
            t = time.perf_counter()
            pool.map(_spin, [n, n])
            both = time.perf_counter() - t
        out.append(2 * alone / both)
    return out


def child_json(*args: str) -> dict:
    """Run this script with ``args`` in a fresh process; its last line of output, as JSON."""
    out = subprocess.run([sys.executable, __file__, *args], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def line(label: str, value: float, unit: str, target: float, higher_is_better: bool, missed: list[str]) -> None:
    ratio, ok = ratio_to_target(label, value, target, higher_is_better, missed)
    sign = ">=" if higher_is_better else "<="
    print(f"  {label:52s} {value:12,.2f} {unit:14s} target {sign} {target:,.6g}: ratio {ratio:5.2f} "
          f"({'meets' if ok else 'MISSES'})", flush=True)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sample", type=int, default=240, help="about this many library members in the sample")
    ap.add_argument("--no-dask", action="store_true", help="leave out the Dask 2-vs-1 comparison")
    ap.add_argument("--repeats", type=int, default=2,
                    help="runs of each worker count (fast tier and Dask), alternating; the fastest of each is judged")
    ap.add_argument("--dask-sample", type=int, default=1024,
                    help="about this many library members for the Dask 2-vs-1 comparison (a cluster is for "
                         "large libraries: its start, about 1 s, is paid once per run)")
    ap.add_argument("--stream", type=int, default=LIBRARY_SIZE,
                    help="candidates streamed through the driver and counted by status (0: leave out)")
    ap.add_argument("--only-stream", action="store_true", help="only the streaming pass and status")
    ap.add_argument("--driver-pass", type=Path, help=argparse.SUPPRESS)  # child processes of the streaming pass
    ap.add_argument("--full-pass", type=Path, help=argparse.SUPPRESS)
    ap.add_argument("--dask-run", nargs=2, help=argparse.SUPPRESS)
    ap.add_argument("--dask-overhead", type=int, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.dask_run:
        with tempfile.TemporaryDirectory() as tmp:
            ok, wall, _ = fast_tier_end_to_end(Path(args.dask_run[1]), Path(tmp) / "d.csv", Path(tmp) / "d.sqlite",
                                               ComputeSettings(), int(args.dask_run[0]), "local")
        print(json.dumps({"ok": ok, "wall_s": wall}))
        return 0
    if args.dask_overhead:
        print(json.dumps({"wall_s": dask_overhead(args.dask_overhead)}))
        return 0
    if args.driver_pass:
        driver_pass(args.driver_pass, 2)
        return 0
    if args.full_pass:
        full_tier_pass(args.full_pass)
        return 0
    settings = ComputeSettings()
    missed: list[str] = []
    print(f"load average at start: {' '.join(f'{x:.2f}' for x in os.getloadavg())} (1, 5, 15 min); "
          f"{os.cpu_count()} cores", flush=True)
    if args.only_stream:
        streaming(args.stream, settings, missed)
        return finish(missed, all_loads=True)
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
        # 2 workers first: the pool forks before this process loads the engine. Each worker count
        # runs --repeats times, alternating, each time with a fresh store; the fastest run of each
        # is judged (the VM's own variation, up to ~20 % between runs, only ever slows a run down)
        passes: dict[int, list[tuple[int, float, float]]] = {2: [], 1: []}
        for r in range(args.repeats):
            for w in (2, 1):
                passes[w].append(fast_tier_end_to_end(csv, tmp / f"fast{w}-{r}.csv", tmp / f"s{w}-{r}.sqlite",
                                                      settings, w))
        (ok2, wall2, eng2), (ok1, wall1, eng1) = (min(passes[w], key=lambda p: p[1]) for w in (2, 1))
        print(f"fast tier runs (wall s): 2 workers {', '.join(f'{p[1]:.2f}' for p in passes[2])}; "
              f"1 worker {', '.join(f'{p[1]:.2f}' for p in passes[1])}; the fastest of each is judged")
        rate2, rate1 = ok2 / wall2 * 3600, ok1 / wall1 * 3600
        ceiling = machine_scaling(args.repeats)
        print(f"the machine's own speed-up, 2 processes vs 1, on a pure-Python loop: "
              f"{', '.join(f'{x:.2f}x' for x in ceiling)} (no target: the ceiling of the 2-vs-1 figures below)")
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
            # each in a fresh process: every run pays its cluster's start (and the server process
            # the workers are forked from), as a command does
            kd = max(2, round(args.dask_sample ** 0.25))
            dask_table, _ = library_sample((kd, kd, kd, max(1, round(args.dask_sample / kd ** 3))), 11)
            dask_csv = tmp / "dask_sample.csv"
            dask_table[["id", "smiles"]].to_csv(dask_csv, index=False)
            dask_walls: dict[int, list[float]] = {1: [], 2: []}
            for _ in range(args.repeats):
                for w in (1, 2):
                    dask_walls[w].append(child_json("--dask-run", str(w), str(dask_csv))["wall_s"])
            walld1, walld2 = min(dask_walls[1]), min(dask_walls[2])
            print(f"Dask LocalCluster on {len(dask_table)} library members (cluster start included, each run a "
                  f"process of its own; 1 worker {', '.join(f'{x:.1f}' for x in dask_walls[1])} s, 2 workers "
                  f"{', '.join(f'{x:.1f}' for x in dask_walls[2])} s; the fastest of each is judged):")
            line("speed-up 2 workers vs 1 (fast tier)", walld1 / walld2, "x", 1.8, True, missed)
            o1, o2 = (child_json("--dask-overhead", str(w))["wall_s"] for w in (1, 2))
            print(f"    (the cluster's own cost, start + first task's imports + close, no work: 1 worker {o1:.2f} s, "
                  f"2 workers {o2:.2f} s; no target)")
        # 100,000 members: enumeration, reading and the fast tier per member, from the sample
        per = (enum_s + read_s) / n + wall2 / max(ok2, 1)
        print(f"100,000-member library, extrapolated from the {n}-member sample on 2 workers:")
        line("enumerate + read + fast tier, 100,000 members", per * LIBRARY_SIZE / 3600, "h", 1.0, False, missed)
    if args.stream:
        streaming(args.stream, settings, missed)
    return finish(missed, all_loads=True)


if __name__ == "__main__":
    sys.exit(main())
