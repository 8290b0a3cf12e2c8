"""Campaigns the report tests render: the invented demo, reduced to run in seconds, and a
first screen without any measurement. Both carry a hostile id that must stay text."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "examples" / "dimethoxybenzene-catholytes"
HOSTILE_ID = "<img src=x onerror=alert(1)>"


def reduced_demo(folder: Path) -> Path:
    """The demo campaign with small conformer ensembles and fewer permutations, plus one
    candidate whose id is an HTML injection attempt (anisole, invented like the rest)."""
    shutil.copytree(DEMO, folder)
    toml = (folder / "campaign.toml").read_text(encoding="utf-8")
    toml = re.sub(r"n_generate = \d+", "n_generate = 2", toml)
    toml = re.sub(r"refine_lowest = \d+", "refine_lowest = 1", toml)
    toml = toml.replace("n_draws = 1000", "n_draws = 300")
    toml = toml.replace('terms = ["potential"', 'n_permutations = 100\nterms = ["potential"')
    (folder / "campaign.toml").write_text(toml, encoding="utf-8")
    cands = pd.read_csv(folder / "inputs" / "candidates.csv", dtype=str)
    extra = pd.DataFrame([{"id": HOSTILE_ID, "smiles": "COc1ccccc1", "solubility_mol_per_l": "1.0",
                           "note": "invented: id is an injection attempt"}])
    pd.concat([cands, extra], ignore_index=True).to_csv(folder / "inputs" / "candidates.csv", index=False)
    return folder


def first_screen(folder: Path) -> Path:
    """A first screen of a few small catholytes with nothing measured: no calibration, no
    rate model; ranked on cell voltage and molar mass (invented)."""
    (folder / "inputs").mkdir(parents=True)
    pd.DataFrame({
        "id": ["anisole", "dmb", "veratrole", HOSTILE_ID],
        "smiles": ["COc1ccccc1", "COc1ccc(OC)cc1", "COc1ccccc1OC", "Cc1ccc(OC)cc1"],
    }).to_csv(folder / "inputs" / "candidates.csv", index=False)
    (folder / "campaign.toml").write_text(
        'name = "first screen (invented)"\n'
        "[compute]\nworkers = 1\n[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n"
        "[cell]\ncounter = 'potential'\ncounter_potential_v = -1.8\n"
        "[ranking]\nobjectives = ['cell_voltage', 'molar_mass']\nn_draws = 200\nn_suggestions = 2\n"
        "[report]\nnote = 'Invented first screen: nothing here was measured.'\n",
        encoding="utf-8")
    return folder


FUNNEL_SERIES = ["c1ccccc1C", "Cc1ccc(C)cc1", "COc1ccccc1", "COc1ccc(C)cc1", "COc1ccc(OC)cc1", "Oc1ccccc1",
                 "Cc1cc(C)cc(C)c1", "COc1ccccc1OC", "CSc1ccccc1", "Cc1ccc(O)cc1"]
"""Small catholytes for a library that goes through the funnel (invented)."""


def funnel_library(folder: Path) -> Path:
    """A library of ten small catholytes above a lowered ``[funnel] threshold``: a fast tier for
    all, the full tier for a calibration sample of 3 and the best 25 %; one left-out candidate
    (or ranked one) carries the hostile id. Ranked on cell voltage and molar mass (invented)."""
    (folder / "inputs").mkdir(parents=True)
    ids = [f"lib{i:02d}" for i in range(len(FUNNEL_SERIES) - 1)] + [HOSTILE_ID]
    pd.DataFrame({"id": ids, "smiles": FUNNEL_SERIES}).to_csv(folder / "inputs" / "candidates.csv", index=False)
    (folder / "campaign.toml").write_text(
        'name = "funnel library (invented)"\n'
        "[compute]\nworkers = 1\n[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n"
        "[funnel]\nthreshold = 5\ncalibration_sample = 3\nfraction = 0.25\n"
        "[cell]\ncounter = 'potential'\ncounter_potential_v = -1.8\n"
        "[ranking]\nobjectives = ['cell_voltage', 'molar_mass']\nn_draws = 200\nn_suggestions = 2\n"
        "[report]\nnote = 'Invented library: nothing here was measured.'\n",
        encoding="utf-8")
    return folder
