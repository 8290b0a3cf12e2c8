"""Uncalibrated potentials against the published reference set: the errors behind the
default uncalibrated bands of :mod:`redoxfront.ranking.potential_bands`.

Computes the raw (uncalibrated) GFN2-xTB/ALPB potential of every row of
``../shared/reference-potentials/published_potentials.csv`` (or the copy named by
``--reference``) with the real engine, compares it with the published value on the
absolute scale and prints the error statistics per couple type (reduction, oxidation).
Writes the per-row table to ``benchmarks/reference_set_errors.csv`` (kept in the repository
with the source of every row, so the band numbers can be traced and re-derived).

Scale: the published absolute potential is ``e_stated_v + benchmark_abs_shift_v`` for the
ROP313 rows (the benchmark's own convention, Neugebauer et al., J. Phys. Chem. A 2020, 124,
7166), and ``e_stated_v + 4.44 V`` for rows stated vs SHE (Trasatti, Pure Appl. Chem. 1986,
58, 955, our default absolute SHE). The computed absolute potential is the raw potential vs
SHE plus the same 4.44 V. error = computed - published, V.

Run once, offline (about 20-40 min on one core):
    .venv/bin/python benchmarks/reference_set_errors.py [--workers 1] [--store /tmp/refset.sqlite]
"""

from __future__ import annotations

import argparse
import os
import tempfile
from pathlib import Path

from redoxfront.campaign import THREAD_VARIABLES  # noqa: E402 (imports no numpy)

for _var in THREAD_VARIABLES:
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

from redoxfront import columns  # noqa: E402
from redoxfront.campaign import ComputeSettings, ConformerSettings  # noqa: E402
from redoxfront.candidates.structures import read_candidates  # noqa: E402
from redoxfront.compute.step import compute_candidates  # noqa: E402
from redoxfront.units import ABSOLUTE_SHE_V  # noqa: E402

HERE = Path(__file__).resolve().parent
DEFAULT_REFERENCE = HERE.parent.parent / "shared" / "reference-potentials" / "published_potentials.csv"
SOLVENT_KEYWORDS = {"acetonitrile": "acetonitrile", "water": "water", "DMF": "dmf"}


def published_absolute_v(row: pd.Series) -> float:
    """Published potential on the absolute scale, V (see the module docstring)."""
    if pd.notna(row["benchmark_abs_shift_v"]):
        return float(row["e_stated_v"]) + float(row["benchmark_abs_shift_v"])
    if str(row["reference_stated"]).startswith("SHE"):
        return float(row["e_stated_v"]) + ABSOLUTE_SHE_V["trasatti"]
    return float("nan")


def error_statistics(errors: np.ndarray) -> dict[str, float]:
    """n, mean, SD, MAE, 2.5/97.5 % quantiles, min and max of errors (V)."""
    e = np.asarray(errors, float)
    e = e[np.isfinite(e)]
    return {
        "n": int(e.size), "mean_v": float(e.mean()), "sd_v": float(e.std(ddof=1)),
        "mae_v": float(np.abs(e).mean()), "q025_v": float(np.quantile(e, 0.025)),
        "q975_v": float(np.quantile(e, 0.975)), "min_v": float(e.min()), "max_v": float(e.max()),
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--reference", type=Path, default=DEFAULT_REFERENCE)
    ap.add_argument("--workers", type=int, default=1)
    ap.add_argument("--store", type=Path, default=None, help="folder of the SQLite stores to reuse between runs")
    ap.add_argument("--out", type=Path, default=HERE / "reference_set_errors.csv")
    args = ap.parse_args()
    ref = pd.read_csv(args.reference, dtype={"id": str})
    ref["published_abs_v"] = ref.apply(published_absolute_v, axis=1)
    conformers = ConformerSettings(n_generate=4, refine_lowest=1)
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        stores = args.store or Path(tmp)
        stores.mkdir(parents=True, exist_ok=True)
        for (solvent, process), group in ref.groupby(["solvent", "process"], sort=False):
            # one store per couple type: the same molecule is oxidised in one row and reduced in
            # another, and a stored 'charged' state does not say which way it was charged
            store = stores / f"{solvent}-{process}.sqlite"
            settings = ComputeSettings(solvent=SOLVENT_KEYWORDS[solvent], reference="she",
                                       conformers=conformers, workers=args.workers)
            csv_path = Path(tmp) / f"{solvent}-{process}.csv"
            pd.DataFrame({
                "id": group["id"], "smiles": group["smiles"],
                "role": np.where(group["process"] == "oxidation", "catholyte", "anolyte"),
                "n_electrons": 1,
            }).to_csv(csv_path, index=False)
            cands, problems = read_candidates(csv_path, settings)
            for p in problems:
                print(f"left out: {p}")
            outcomes, _ = compute_candidates(cands, settings, store, workers=args.workers,
                                             progress=True, describe=False)
            raw_col = columns.potential_uncalibrated("she")
            for o in outcomes:
                rows.append({"id": o.row[columns.ID], "status": o.row.get(columns.STATUS),
                             "raw_v_vs_she": o.row.get(raw_col)})
    comp = pd.DataFrame(rows)
    out = ref.merge(comp, on="id", how="left")
    out["computed_abs_v"] = pd.to_numeric(out["raw_v_vs_she"], errors="coerce") + ABSOLUTE_SHE_V["trasatti"]
    out["error_v"] = out["computed_abs_v"] - out["published_abs_v"]
    keep = ["id", "name", "smiles", "family", "process", "solvent", "status", "published_abs_v",
            "computed_abs_v", "error_v", "source"]
    out[keep].to_csv(args.out, index=False, float_format="%.4f")
    print(f"per-row errors: {args.out}")
    for (process, solvent), g in out.groupby(["process", "solvent"]):
        st = error_statistics(g["error_v"].to_numpy())
        print(process, solvent, {k: round(v, 3) for k, v in st.items()})
    for process, g in out[out["solvent"] != "water"].groupby("process"):
        st = error_statistics(g["error_v"].to_numpy())
        print(process, "non-aqueous", {k: round(v, 3) for k, v in st.items()})


if __name__ == "__main__":
    main()
