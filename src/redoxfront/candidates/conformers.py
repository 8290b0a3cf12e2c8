"""Conformer ensembles of a candidate's structure.

RDKit ETKDGv3 (Wang, Witek, Landrum & Riniker, J. Chem. Inf. Model. 2020, 60, 2044)
then MMFF94 (Halgren, J. Comput. Chem. 1996, 17, 490), energy-window and heavy-atom
RMSD pruning. Positions in Angstrom, energies in kcal/mol.
"""

from __future__ import annotations

import numpy as np
from rdkit import Chem
from rdkit.Chem import AllChem, rdMolAlign

from redoxfront.campaign import ConformerSettings
from redoxfront.errors import InputError


def generate_conformers(
    mol_h: Chem.Mol, settings: ConformerSettings, seed: int
) -> tuple[list[np.ndarray], int]:
    """Embed, MMFF-optimise and prune conformers; return the lowest ``refine_lowest``.

    Returns (positions in Angstrom, lowest MMFF energy first; number embedded).
    Falls back to UFF, then to unoptimised ETKDG geometries, when MMFF has no types.
    """
    mol = Chem.Mol(mol_h)
    params = AllChem.ETKDGv3()
    params.randomSeed = seed
    params.numThreads = 1
    params.pruneRmsThresh = settings.rmsd_threshold_angstrom  # skip near-duplicates before MMFF
    cids = list(AllChem.EmbedMultipleConfs(mol, numConfs=settings.n_generate, params=params))
    if not cids:
        params.useRandomCoords = True
        cids = list(AllChem.EmbedMultipleConfs(mol, numConfs=settings.n_generate, params=params))
    if not cids:
        raise InputError("RDKit could not embed 3D coordinates", field="smiles")
    energies: list[float]
    if AllChem.MMFFHasAllMoleculeParams(mol):
        out = AllChem.MMFFOptimizeMoleculeConfs(mol, numThreads=1, maxIters=200)
        energies = [e for _, e in out]
    elif AllChem.UFFHasAllMoleculeParams(mol):
        out = AllChem.UFFOptimizeMoleculeConfs(mol, numThreads=1, maxIters=200)
        energies = [e for _, e in out]
    else:
        energies = [0.0] * len(cids)
    order = sorted(range(len(cids)), key=lambda i: energies[i])
    emin = energies[order[0]]
    heavy = [a.GetIdx() for a in mol.GetAtoms() if a.GetAtomicNum() > 1]
    amap = list(zip(heavy, heavy))
    kept: list[int] = []
    for i in order:
        if energies[i] - emin > settings.energy_window_kcal_per_mol:
            break
        duplicate = False
        for j in kept:
            rms = rdMolAlign.AlignMol(mol, mol, prbCid=cids[i], refCid=cids[j], atomMap=amap)
            if rms < settings.rmsd_threshold_angstrom:
                duplicate = True
                break
        if not duplicate:
            kept.append(i)
        if len(kept) >= settings.refine_lowest:
            break
    return [mol.GetConformer(cids[i]).GetPositions() for i in kept], len(cids)
