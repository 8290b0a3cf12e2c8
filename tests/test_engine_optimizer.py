"""Geometry optimisation: model Hessian, convergence and cost against a plain L-BFGS."""

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import AllChem

from redoxfront.campaign import OptimizerSettings
from redoxfront.engine.optimizer import (
    _bend_b,
    _torsion_b,
    lindh_hessian,
    optimize_geometry,
    optimize_geometry_lbfgs_baseline,
)
from redoxfront.engine.xtb import TbliteEngine
from redoxfront.units import ANGSTROM_BOHR


def _mmff(smiles, seed=5):
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    AllChem.EmbedMolecule(mol, randomSeed=seed)
    AllChem.MMFFOptimizeMolecule(mol)
    return np.array([a.GetAtomicNum() for a in mol.GetAtoms()]), mol.GetConformer().GetPositions()


def _numeric_b(fun, x, h=1e-6):
    g = np.zeros_like(x)
    for idx in np.ndindex(x.shape):
        xp, xm = x.copy(), x.copy()
        xp[idx] += h
        xm[idx] -= h
        g[idx] = (fun(xp) - fun(xm)) / (2 * h)
    return g


def test_wilson_b_vectors_match_finite_differences():
    rng = np.random.default_rng(3)
    x = rng.normal(size=(4, 3)) * 1.5

    def angle(p):
        u, v = p[0] - p[1], p[2] - p[1]
        return np.arccos(u @ v / np.linalg.norm(u) / np.linalg.norm(v))

    def dihedral(p):
        b1, b2, b3 = p[1] - p[0], p[2] - p[1], p[3] - p[2]
        m, n = np.cross(b1, b2), np.cross(b2, b3)
        return np.arctan2(np.linalg.norm(b2) * b1 @ n, m @ n)

    i, j, k, l = (np.array([a]) for a in range(4))
    gb, _ = _bend_b(x, i, j, k)
    gt, _ = _torsion_b(x, i, j, k, l)
    # Wilson, Decius & Cross, Molecular Vibrations (1955): B = dq/dx
    assert np.abs(gb[0] - _numeric_b(angle, x)[:3]).max() < 1e-7
    assert np.abs(gt[0] - _numeric_b(dihedral, x)).max() < 1e-7


def test_model_hessian_is_positive_semidefinite_with_six_zero_modes():
    z, x = _mmff("CCOc1ccccc1")
    h = lindh_hessian(z, x * ANGSTROM_BOHR)
    w = np.linalg.eigvalsh(h)
    assert np.allclose(h, h.T)
    assert w.min() > -1e-10
    # rigid-body translations and rotations of a non-linear molecule: 6 zero modes (definition)
    assert np.sum(np.abs(w) < 1e-8) == 6


def test_optimiser_converges_and_beats_lbfgs_in_gradient_calls():
    settings = OptimizerSettings()
    total_rfo = total_lbfgs = 0
    for smiles, charge, uhf in [("COc1ccc(OC)cc1", 1, 1), ("CCOc1ccc(OCC)c(C)c1", 0, 0)]:
        z, x = _mmff(smiles)
        rfo = optimize_geometry(TbliteEngine(), z, x, charge, uhf, settings)
        ref = optimize_geometry_lbfgs_baseline(TbliteEngine(), z, x, charge, uhf, settings)
        assert rfo.converged and ref.converged
        g = rfo.result.gradient_eh_per_bohr
        assert np.abs(g).max() < settings.max_force_eh_per_bohr
        # RFO ends at least as low as L-BFGS (0.1 kcal/mol = 1.6e-4 Eh slack)
        assert rfo.result.energy_eh <= ref.result.energy_eh + 1.6e-4
        total_rfo += rfo.gradient_calls
        total_lbfgs += ref.gradient_calls
    assert total_rfo <= 0.8 * total_lbfgs


def test_water_geometry_close_to_experiment():
    z, x = _mmff("O")
    out = optimize_geometry(TbliteEngine(solvent=None), z, x, 0, 0)
    o, h1, h2 = out.positions_angstrom
    r = np.linalg.norm(h1 - o)
    angle = np.degrees(np.arccos((h1 - o) @ (h2 - o) / (np.linalg.norm(h1 - o) * np.linalg.norm(h2 - o))))
    # experimental gas-phase water: r(OH) = 0.958 A, HOH = 104.5 deg (CRC Handbook, from memory);
    # GFN2-xTB reproduces it to about 0.02 A and 3 deg (Bannwarth et al., JCTC 2019, 15, 1652)
    assert r == pytest.approx(0.958, abs=0.03)
    assert angle == pytest.approx(104.5, abs=5.0)


def test_rfo_step_equals_the_level_shifted_newton_step():
    from redoxfront.engine.optimizer import rfo_step

    rng = np.random.default_rng(1)
    for _ in range(10):
        a = rng.normal(size=(30, 30))
        h = a @ a.T / 30 + 1e-3 * np.eye(30)
        g = rng.normal(size=30) * rng.uniform(0.01, 1.0)
        aug = np.zeros((31, 31))
        aug[:-1, :-1] = h
        aug[:-1, -1] = aug[-1, :-1] = g
        # Banerjee et al., J. Phys. Chem. 1985, 89, 52: the RFO step is the Newton step with the
        # Hessian shifted by the lowest eigenvalue mu of the augmented Hessian, dq = -(H - mu)^-1 g;
        # numpy's eigvalsh and solve (LAPACK) are the reference here
        mu = np.linalg.eigvalsh(aug)[0]
        expected = -np.linalg.solve(h - mu * np.eye(30), g)
        assert np.allclose(rfo_step(h, g), expected, atol=1e-8)
