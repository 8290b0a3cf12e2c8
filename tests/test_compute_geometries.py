"""Optimised geometries written as SDF: one record per candidate and state, readable back."""

from pathlib import Path

import numpy as np
import pytest
from rdkit import Chem

from redoxfront.campaign import load_campaign
from redoxfront.candidates.structures import read_candidates
from redoxfront.compute.step import compute_campaign, compute_candidates


def test_compute_writes_the_lowest_conformer_of_every_state(tmp_path: Path):
    (tmp_path / "inputs").mkdir()
    (tmp_path / "inputs" / "candidates.csv").write_text("id,smiles\nanisole,COc1ccccc1\npx,Cc1ccc(C)cc1\n")
    (tmp_path / "campaign.toml").write_text(
        "[compute]\nrole = 'catholyte'\nworkers = 1\n[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n")
    report = compute_campaign(load_campaign(tmp_path), progress=False)
    mols = list(Chem.SDMolSupplier(str(tmp_path / "results" / "geometries.sdf"), removeHs=False))
    assert [(m.GetProp("id"), m.GetProp("state")) for m in mols] == [
        ("anisole", "discharged"), ("anisole", "charged"), ("px", "discharged"), ("px", "charged")]
    assert [m.GetIntProp("total_charge") for m in mols] == [0, 1, 0, 1]
    assert [m.GetIntProp("multiplicity") for m in mols] == [1, 2, 1, 2]
    # the driver kept no conformers (they went to the file as they arrived) ...
    assert report.outcomes[0].states is None and report.states_held_peak >= 1
    # ... and the file holds the lowest conformers the store holds (read back, no engine call)
    cands, _ = read_candidates(tmp_path / "inputs" / "candidates.csv", report_settings := load_campaign(tmp_path).compute)
    back, _ = compute_candidates(cands, report_settings, load_campaign(tmp_path).store_path, workers=1, progress=False)
    assert sum(o.new_engine_calls for o in back) == 0
    stored = back[0].states.states
    for m in mols[:2]:
        low = stored[m.GetProp("state")].lowest
        assert m.GetDoubleProp("energy_eh") == pytest.approx(low.energy_eh, abs=1e-9)
        assert np.allclose(m.GetConformer().GetPositions(), low.positions_angstrom, atol=1e-4)
    # aryl C-O bond of anisole about 1.36 A (typical aryl ether C(sp2)-O length, from memory of
    # the CRC Handbook bond-length tables); GFN2-xTB geometries are close to experiment
    anisole = mols[0]
    o = next(a for a in anisole.GetAtoms() if a.GetSymbol() == "O")
    c_ar = next(n for n in o.GetNeighbors() if n.GetIsAromatic())
    r = np.linalg.norm(anisole.GetConformer().GetAtomPosition(o.GetIdx())
                       - anisole.GetConformer().GetAtomPosition(c_ar.GetIdx()))
    assert r == pytest.approx(1.36, abs=0.04)
