"""Benchmark of the `redoxfront rank` command end to end: 100,000 invented candidates, three
objectives (cell voltage, half-life, molar mass), 1,000 Monte Carlo draws (targets: <= 10 s on
2 cores with reading, CSV writing and figures included; peak memory <= 1 GB).

The script first writes an invented campaign (seeded; the numbers are invented, in the shape of
a full-tier descriptor table after calibration and the rate model): ``results/descriptors.csv``
and ``results/predictions.csv`` with ids, SMILES, role, molar mass, raw and calibrated potentials
with intervals, descriptor columns, predicted rates with intervals, leverage and domain, and a
few measured rates. It then runs the command as a user does, in a child process
(``redoxfront rank CAMPAIGN --quiet --timings``, the console script of this interpreter's
environment, or ``python -c 'from redoxfront.cli import main; main()'`` when there is none) three
times one after the other (``--runs``), and prints the median wall time and the largest peak
resident set of the children (``RUSAGE_CHILDREN``) as ratios to their targets (one run on our
2-core VMs varies by about a second), then where the time went (the command's own ``--timings`` lines: imports and settings,
reading, cell metrics, ranking, writing, figures; the rest is interpreter start and exit), and
the sizes of what it wrote. Exits 1 when a figure misses its target.

Run: .venv/bin/python benchmarks/rank_command_bench.py [--n 100000] [--draws 1000] [--runs 3] [--keep DIR]
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from targets import finish, ratio_to_target  # noqa: E402

SRC = HERE.parent / "src"
if SRC.is_dir():
    sys.path.insert(0, str(SRC))

TARGET_WALL_S = 10.0
TARGET_RSS_MIB = 1024.0

N_DESCRIPTOR_COLUMNS = 24
"""Invented descriptor columns (a full-tier table: steric and electronic descriptors, Boltzmann
mean, minimum and maximum); every one of them is carried into predictions.csv and ranking.csv."""

DESCRIPTOR_NAMES = (
    "sterimol_l_angstrom_site1", "sterimol_b1_angstrom_site1", "sterimol_b5_angstrom_site1",
    "buried_volume_percent_site1", "homo_ev_discharged", "lumo_ev_discharged", "homo_lumo_gap_ev_discharged",
    "dipole_debye_discharged", "partial_charge_e_site1_charged", "spin_exposure_angstrom2_charged",
    "sasa_angstrom2_discharged", "ring_clearance_angstrom_charged",
)


def invented_campaign(folder: Path, n: int, draws: int, seed: int = 20261202) -> dict[str, float]:
    """Write an invented campaign of ``n`` catholytes with its upstream result files; returns sizes (MiB)."""
    import pandas as pd

    from redoxfront import columns as col

    rng = np.random.default_rng(seed)
    ref = "fc"
    ids = np.char.add("inv-", np.char.zfill(np.arange(n).astype(str), 6))
    rings = np.array(["c1cc(OC)c(C)cc1OC", "c1cc(OC)c(CC)cc1OC", "c1c(OC)cc(C(C)(C)C)c(OC)c1",
                      "c1cc(OCC)c(C)cc1OCC", "c1c(OC)c(F)cc(OC)c1C", "c1cc(OC)c(C(F)(F)F)cc1OC"])
    tails = np.array(["", "CCO", "CCOC", "C(C)C", "CCCC", "COCCOC", "CC#N", "CCS(=O)(=O)C"])
    smiles = np.char.add(tails[rng.integers(0, len(tails), n)], rings[rng.integers(0, len(rings), n)])
    # the trade-off and intervals of benchmarks/pareto_bench.py, so that the two benchmarks rank the
    # same problem: cell voltage ~ N(2.8 V, 0.3 V) against a fixed counter at -2.0 V, log10 half-life
    # 1.5 - 1.2 (V - 2.8) + N(0, 0.8), 95 % half-widths 0.15 V and 0.6 log units, molar mass
    # uniform 150-600 g/mol; one candidate in ten uncalibrated (its couple type's wider band)
    calibrated = rng.normal(0.8, 0.3, n)  # V vs Fc+/Fc (invented)
    raw = calibrated - 0.12 + rng.normal(0, 0.03, n)
    half_pi = np.full(n, 0.15)
    uncal = rng.random(n) < 0.1
    log_t = 1.5 - 1.2 * (calibrated + 2.0 - 2.8) + rng.normal(0, 0.8, n)
    log_k = np.log10(np.log(2.0)) - log_t  # first order: t1/2 = ln 2 / k
    k_half = np.full(n, 0.6)
    desc = pd.DataFrame({
        col.ID: ids, col.SMILES: smiles, col.CANONICAL_SMILES: smiles, col.STATUS: "ok",
        col.ROLE: "catholyte", col.N_ELECTRONS: 1,
        col.MOLAR_MASS: rng.uniform(150.0, 600.0, n), "counterions": "", "heavy_atoms": rng.integers(12, 26, n),
        "charge_discharged": 0, "charge_charged": 1, "multiplicity_discharged": 1, "multiplicity_charged": 2,
        "conformers_embedded": 12, "conformers_refined": 2, "gradient_calls": rng.integers(20, 90, n),
        "optimisations_converged": 4, "wall_time_s": rng.uniform(1.0, 4.0, n),
        "engine_time_s": rng.uniform(0.8, 3.5, n), "from_store": False, col.DESCRIPTOR_NOTES: "",
        col.potential_uncalibrated(ref): raw, col.REORGANISATION_ENERGY: rng.uniform(0.2, 0.6, n),
    })
    for k in range(N_DESCRIPTOR_COLUMNS):
        name = DESCRIPTOR_NAMES[k % len(DESCRIPTOR_NAMES)] + "_" + ("mean", "min", "max")[k // len(DESCRIPTOR_NAMES)]
        desc[name] = rng.normal(0.0, 1.0, n) * 10.0 ** rng.integers(-1, 3)
    desc[col.potential_calibrated(ref)] = np.where(uncal, np.nan, calibrated)
    desc[col.potential_calibrated_pi_low(ref)] = np.where(uncal, np.nan, calibrated - half_pi)
    desc[col.potential_calibrated_pi_high(ref)] = np.where(uncal, np.nan, calibrated + half_pi)
    desc[col.CALIBRATION_STATUS] = np.where(uncal, "uncalibrated", "calibrated")
    desc[col.CALIBRATION_GROUP] = np.where(uncal, "", "all")
    desc[col.CALIBRATION_WARNING] = ""
    pred = desc.copy()
    pred[col.LOG10_K_PRED_FIRST] = log_k
    pred[col.LOG10_K_PRED_FIRST + col.PI_LOW_SUFFIX] = log_k - k_half
    pred[col.LOG10_K_PRED_FIRST + col.PI_HIGH_SUFFIX] = log_k + k_half
    lev = rng.gamma(2.0, 0.02, n)
    pred[col.LEVERAGE] = lev
    pred[col.LEVERAGE_THRESHOLD] = 0.15
    pred[col.DOMAIN] = np.where(lev > 0.15, "extrapolating", "inside")
    pred[col.RATE_ORDER] = 1
    pred[col.MODEL_SET] = ""
    pred[col.RATE_SOURCE] = ""
    pred[col.STANDARDISED_RESIDUAL] = np.nan
    pred[col.MODEL_WARNING] = ""
    measured = rng.choice(n, 40, replace=False)
    rates = pd.DataFrame({col.ID: ids[measured], col.LOG10_K_FIRST: log_k[measured] + rng.normal(0, 0.1, 40)})
    results = folder / "results"
    results.mkdir(parents=True, exist_ok=True)
    desc.to_csv(results / "descriptors.csv", index=False)
    pred.to_csv(results / "predictions.csv", index=False)
    rates.to_csv(folder / "measured_rates.csv", index=False)
    (folder / "campaign.toml").write_text(
        "# invented benchmark campaign (numbers invented, seeded): not a real library\n"
        'name = "invented rank benchmark"\n[compute]\nreference = "fc"\nrole = "catholyte"\n'
        '[inputs]\nmeasured_rates = "measured_rates.csv"\n'
        '[cell]\ncounter = "potential"\ncounter_potential_v = -2.0\n'
        f'[ranking]\nobjectives = ["cell_voltage", "half_life", "molar_mass"]\nn_draws = {draws}\n',
        encoding="utf-8")
    return {name: (results / name).stat().st_size / 2**20 for name in ("descriptors.csv", "predictions.csv")}


def rank_command(campaign: Path, timings: bool = True) -> list[str]:
    """The command line a user runs: the environment's console script, else the same entry point."""
    script = Path(sys.executable).parent / "redoxfront"
    args = ["rank", str(campaign), "--quiet", *(["--timings"] if timings else [])]
    if script.is_file():
        return [str(script), *args]
    return [sys.executable, "-c", "import sys; from redoxfront.cli import main; sys.exit(main())", *args]


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=100_000)
    ap.add_argument("--draws", type=int, default=1000)
    ap.add_argument("--runs", type=int, default=3,
                    help="run the command this many times and judge the median wall time (the VM varies by ~1 s)")
    ap.add_argument("--keep", type=Path, default=None, help="write the campaign here and keep it (to look at the figures)")
    ap.add_argument("--baseline", type=Path, default=None, metavar="SRC",
                    help="also run the command with the package in SRC (another checkout's src/, e.g. the "
                         "version before a change), right after, on the same campaign: before/after in one run")
    args = ap.parse_args()
    print(f"load average at start: {' '.join(f'{x:.2f}' for x in os.getloadavg())} (1, 5, 15 min); "
          f"{os.cpu_count()} cores")
    folder = args.keep if args.keep else Path(tempfile.mkdtemp(prefix="rank-bench-"))
    try:
        t = time.perf_counter()
        sizes = invented_campaign(folder, args.n, args.draws)
        print(f"invented campaign: {args.n:,} catholytes, 3 objectives, {args.draws} draws; "
              f"descriptors.csv {sizes['descriptors.csv']:.1f} MiB, predictions.csv "
              f"{sizes['predictions.csv']:.1f} MiB (written in {time.perf_counter() - t:.1f} s, not timed below)")
        env = dict(os.environ)
        if SRC.is_dir():  # run this checkout's code, not whatever the environment has installed
            env["PYTHONPATH"] = str(SRC) + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
        cmd = rank_command(folder)
        print("command: " + " ".join(Path(cmd[0]).name if i == 0 else c for i, c in enumerate(cmd)))
        runs = []
        for _ in range(args.runs):
            t = time.perf_counter()
            done = subprocess.run(cmd, env=env, capture_output=True, text=True)
            runs.append((time.perf_counter() - t, done))
            if done.returncode != 0:
                print(done.stdout + done.stderr)
                print(f"the command failed with exit code {done.returncode}")
                return 1
        rss_mib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0  # the largest of the runs
        walls = [w for w, _ in runs]
        wall, done = sorted(runs, key=lambda r: r[0])[(len(runs) - 1) // 2]  # the median run
        phases = {}
        for line in done.stderr.splitlines():
            if line.startswith("timing: "):
                name, _, value = line[len("timing: "):].rpartition(": ")
                phases[name] = float(value.split()[0])
        missed: list[str] = []
        print(f"`redoxfront rank` end to end, in a child process (start-up, reading, ranking, writing, figures), "
              f"{len(runs)} run(s) one after the other: " + ", ".join(f"{w:.2f} s" for w in walls))
        for label, value, target, unit in ((f"wall time, median of {len(runs)}", wall, TARGET_WALL_S, "s"),
                                           ("peak resident set of the child", rss_mib, TARGET_RSS_MIB, "MiB")):
            ratio, ok = ratio_to_target(label, value, target, False, missed)
            print(f"  {label:34s} {value:9.2f} {unit:3s} target <= {target:g} {unit}: ratio {ratio:5.2f} "
                  f"({'meets' if ok else 'MISSES'})")
        total = phases.pop("total since the command began", None)
        print("where the time went (the command's --timings, the median run):")
        if total is not None:
            print(f"  {'interpreter start, CLI import, exit':42s} {wall - total:6.2f} s")
        for name, seconds in phases.items():
            print(f"  {name:42s} {seconds:6.2f} s")
        results = folder / "results"
        written = {p.name: p.stat().st_size / 2**20 for p in
                   [results / "ranking.csv", results / "picks.csv", *sorted((results / "figures").glob("*"))]}
        print("written: " + ", ".join(f"{k} {v:.2f} MiB" for k, v in written.items()))
        print("command output: " + " | ".join(done.stdout.strip().splitlines()[:3]))
        if args.baseline:
            base_env = dict(env, PYTHONPATH=str(args.baseline.resolve()))
            t = time.perf_counter()
            base = subprocess.run(rank_command(folder, timings=False), env=base_env, capture_output=True, text=True)
            base_wall = time.perf_counter() - t
            base_rss = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0  # max over both children
            print(f"baseline {args.baseline} on the same campaign, right after (exit code {base.returncode}): "
                  f"wall time {base_wall:.2f} s; this version {wall:.2f} s = {base_wall / wall:.2f}x faster; "
                  f"peak resident set of either child {base_rss:.0f} MiB (no target: the baseline's)")
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)
    return finish(missed, all_loads=True)


if __name__ == "__main__":
    sys.exit(main())
