"""Benchmark of the compute step: throughput, engine efficiency, optimiser cost.

Prints, measured side by side in one run, on the invented benchmark set
(benchmarks/invented_candidates.csv: dialkoxybenzenes, phenothiazines, nitroxides,
up to 25 heavy atoms):
  * candidates per hour at the default settings (3 conformers refined, both states),
    for the compute core (potentials only) and with the descriptors as well;
  * pipeline efficiency = seconds inside engine calls / (wall seconds x workers);
  * gradient calls per optimisation of our RFO + model Hessian against a plain scipy
    L-BFGS in Cartesians on the same start geometries and convergence test, as a ratio.
Targets (issue): >= 300 candidates/hour on 2 cores, efficiency >= 0.9, ratio <= 0.8.
Run on an idle machine: .venv/bin/python benchmarks/compute_bench.py [--workers 2] [--count 40]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

from redoxfront.campaign import THREAD_VARIABLES  # noqa: E402 (imports no numpy)

for _var in THREAD_VARIABLES:
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402
from rdkit import Chem  # noqa: E402

from redoxfront.campaign import ComputeSettings  # noqa: E402
from redoxfront.candidates.conformers import generate_conformers  # noqa: E402
from redoxfront.candidates.structures import read_candidates, redox_states  # noqa: E402
from redoxfront.compute.step import compute_candidates  # noqa: E402
from redoxfront.engine.optimizer import (  # noqa: E402
    optimize_geometry,
    optimize_geometry_lbfgs_baseline,
)
from redoxfront.engine.xtb import TbliteEngine  # noqa: E402
from redoxfront.units import HARTREE_KCAL_PER_MOL  # noqa: E402

INVENTED = Path(__file__).resolve().parent / "invented_candidates.csv"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--count", type=int, default=40)
    ap.add_argument("--optimiser-count", type=int, default=12, help="molecules for the optimiser comparison")
    args = ap.parse_args()
    settings = ComputeSettings(workers=args.workers)
    cands, _ = read_candidates(INVENTED, settings)
    cands = [c for c in cands if c.heavy_atoms <= 25][: args.count]
    print(f"{len(cands)} invented candidates, {min(c.heavy_atoms for c in cands)}-"
          f"{max(c.heavy_atoms for c in cands)} heavy atoms, {args.workers} workers, "
          f"{os.cpu_count()} cores")

    for label, describe in (("compute core (potentials only)", False), ("with descriptors", True)):
        with tempfile.TemporaryDirectory() as tmp:
            t0 = time.perf_counter()
            outcomes, _ = compute_candidates(cands, settings, Path(tmp) / "bench.sqlite",
                                             workers=args.workers, progress=False, describe=describe)
            wall = time.perf_counter() - t0
        ok = sum(o.states is not None for o in outcomes)
        engine_s = sum(o.new_engine_seconds for o in outcomes)
        busy_s = sum(o.task_seconds for o in outcomes)
        conf_s = sum(o.conformer_seconds for o in outcomes)
        print(f"{label}: {ok} candidates in {wall:.1f} s = {ok / wall * 3600:.0f} candidates/hour "
              f"(target >= 300); efficiency = engine {engine_s:.1f} s / (wall {wall:.1f} s x "
              f"{args.workers}) = {engine_s / (wall * args.workers):.3f} (target >= 0.9)")
        # where the rest goes: idle workers (pool start, tail) and, inside the tasks,
        # the conformer search and everything else (optimiser algebra, descriptors, store)
        print(f"  workers busy {busy_s / (wall * args.workers):.3f} of wall x workers; of the busy time: "
              f"engine {engine_s / busy_s:.3f}, conformer search {conf_s / busy_s:.3f}, "
              f"other {1 - (engine_s + conf_s) / busy_s:.3f}")
    grads = [c.gradient_calls for o in outcomes if o.states for s in o.states.states.values() for c in s.conformers]
    print(f"gradient calls per optimisation in the pipeline: mean {np.mean(grads):.1f}, median {np.median(grads):.0f}")

    # optimiser against the baseline on identical start geometries (lowest MMFF conformer)
    ours = base = 0
    rows = []
    for c in cands[: args.optimiser_count]:
        mol = Chem.AddHs(Chem.MolFromSmiles(c.main_smiles))
        z = np.array([a.GetAtomicNum() for a in mol.GetAtoms()])
        start = generate_conformers(mol, settings.conformers, settings.seed)[0][0]
        for st in redox_states(mol, c.role, c.n_electrons):
            a = optimize_geometry(TbliteEngine(), z, start, st.charge, st.uhf, settings.optimizer)
            b = optimize_geometry_lbfgs_baseline(TbliteEngine(), z, start, st.charge, st.uhf, settings.optimizer)
            ours += a.gradient_calls
            base += b.gradient_calls
            rows.append((c.id, st.name, a.gradient_calls, b.gradient_calls,
                         (a.result.energy_eh - b.result.energy_eh) * HARTREE_KCAL_PER_MOL))
    print(f"{'id':8s} {'state':10s} {'RFO':>5s} {'L-BFGS':>7s} {'dE kcal/mol':>12s}")
    for r in rows:
        print(f"{r[0]:8s} {r[1]:10s} {r[2]:5d} {r[3]:7d} {r[4]:12.3f}")
    if base:
        print(f"gradient calls: RFO {ours} vs L-BFGS {base}: ratio {ours / base:.2f} (target <= 0.8)")


if __name__ == "__main__":
    main()
