"""The computed symmetric-cell voltage E(ox) - E(red) of bipolar rows against published gaps.

The gap is free of the empirical shift and of the reference electrode (both cancel), so it
can be compared with published values whatever electrode they were measured against.
"""

import numpy as np
import pytest

from redoxfront import columns as C
from redoxfront.campaign import ComputeSettings, ConformerSettings
from redoxfront.candidates.structures import parse_candidate
from redoxfront.compute.step import compute_candidates

# ROP313 benchmark, organic subset: Neugebauer, Bohle, Bursch, Hansen & Grimme, J. Phys. Chem. A
# 2020, 124, 7166 (rows of ../shared/reference-potentials/published_potentials.csv, both
# directions measured in acetonitrile on one scale): gap = E(oxidation) - E(reduction), V
IMINES = {
    "Cc1ccc(/N=C/c2ccccc2)cc1": 1.50 - (-2.01),    # R143 - R138, N-benzylidene-4-methylaniline
    "C(=N\\c1ccccc1)/c1ccccc1": 1.67 - (-1.91),    # R146 - R139, N-benzylideneaniline
    "Fc1ccc(/N=C/c2ccccc2)cc1": 1.64 - (-1.90),    # R145 - R140, N-benzylidene-4-fluoroaniline
    "COc1cccc(/N=C/c2ccccc2)c1": 1.52 - (-1.88),   # R144 - R141, N-benzylidene-3-methoxyaniline
}
# from memory: first oxidation and first reduction of aromatic hydrocarbons in aprotic
# solvents vs SCE, as used for the annihilation energies of electrogenerated
# chemiluminescence (naphthalene +1.54/-2.49, anthracene +1.09/-1.96, tetracene +0.77/-1.58,
# pyrene +1.16/-2.09, perylene +0.85/-1.67 V); gaps in V
HYDROCARBONS = {
    "c1ccc2ccccc2c1": 4.03,
    "c1ccc2cc3ccccc3cc2c1": 3.05,
    "c1ccc2cc3cc4ccccc4cc3cc2c1": 2.35,
    "c1cc2ccc3cccc4ccc(c1)c2c34": 3.25,
    "c1cc2cccc3c4cccc5cccc(c(c1)c23)c54": 2.52,
}


@pytest.mark.slow
def test_computed_gap_follows_published_gaps_of_molecules_measured_both_ways(tmp_path):
    settings = ComputeSettings(solvent="acetonitrile", conformers=ConformerSettings(n_generate=2, refine_lowest=1))
    published = {**IMINES, **HYDROCARBONS}
    rows = [parse_candidate({"id": f"m{k}", "smiles": s, "role": "bipolar"}, k + 2, settings)
            for k, s in enumerate(published)]
    out, _ = compute_candidates(rows, settings, tmp_path / "s.sqlite", workers=2, progress=False, describe=False)
    gap = {o.candidate.smiles: o.row[C.SYMMETRIC_GAP_UNCALIBRATED] for o in out}
    assert all(o.row[C.STATUS] == "ok" for o in out)
    x = np.array([gap[s] for s in published])
    y = np.array(list(published.values()))
    # across all nine molecules (two families) the computed gap follows the published one:
    # r = 0.81 measured here (n_generate 2, refine_lowest 1)
    assert np.corrcoef(x, y)[0, 1] >= 0.75
    # the imines (ROP313, above): each computed gap within 0.3 V of the published one
    # (measured: mean 0.14 V, largest 0.25 V). Their published gaps span only 0.18 V, less than
    # the method's error, so their order among themselves is not tested (r = 0.41 here)
    imine = np.array([gap[s] - g for s, g in IMINES.items()])
    assert np.abs(imine).max() <= 0.3
    assert np.abs(imine).mean() <= 0.2
    # the hydrocarbons (from memory, above): the order is right (r = 0.99 here) but the gap is
    # overestimated by 0.5-1.1 V (mean 0.75 V): a limit of uncalibrated gaps across families,
    # the reason each couple is calibrated against measured values of its own type
    xh = np.array([gap[s] for s in HYDROCARBONS])
    yh = np.array(list(HYDROCARBONS.values()))
    assert np.corrcoef(xh, yh)[0, 1] >= 0.95
    assert 0.4 <= float(np.mean(xh - yh)) <= 1.2
