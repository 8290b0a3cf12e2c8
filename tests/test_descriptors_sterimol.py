"""Sterimol L, B1, B5: Verloop's reference values and a cross-check against morfeus-ml."""

from __future__ import annotations

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import AllChem

from redoxfront.descriptors.sterimol import (
    BONDI_RADII_ANGSTROM,
    X_H_BOND_ANGSTROM,
    sterimol,
    substituent_atoms,
    vdw_radii,
)
from redoxfront.errors import InputError

TET = 109.4712
CH, CC = 1.10, 1.54  # Verloop's standard C-H and C-C bond lengths, Angstrom (from memory)
CA, CHA = 1.39, 1.08  # aromatic C-C and C-H, Angstrom (common practice, no source)
R_H, R_C, R_CAR = 1.00, 1.50, 1.70  # CPK radii of H, sp3 C, aromatic C (from memory: Verloop)


def _place(a: np.ndarray, b: np.ndarray, c: np.ndarray, bond: float, angle: float,
           dihedral: float) -> np.ndarray:
    """New atom d with |cd| = bond, angle bcd and dihedral abcd (degrees)."""
    bc = (c - b) / np.linalg.norm(c - b)
    n = np.cross(b - a, bc)
    n /= np.linalg.norm(n)
    m = np.cross(n, bc)
    th, ph = np.radians(angle), np.radians(dihedral)
    return c - bond * np.cos(th) * bc + bond * np.sin(th) * (np.cos(ph) * m + np.sin(ph) * n)


def _zmatrix(rows: list[tuple]) -> np.ndarray:
    """Cartesian coordinates from z-matrix rows; atom 0 (the dummy H) at the origin."""
    xyz = [np.zeros(3)]
    for k, row in enumerate(rows, start=1):
        if k == 1:
            xyz.append(np.array([0.0, 0.0, row[1]]))
        elif k == 2:
            i, r, j, ang = row[:4]
            xyz.append(_place(xyz[j] + np.array([1.0, 0.0, 0.0]), xyz[j], xyz[i], r, ang, 0.0))
        else:
            i, r, j, ang, l, dih = row
            xyz.append(_place(xyz[l], xyz[j], xyz[i], r, ang, dih))
    return np.array(xyz)


def _methyl_h(c: int, prev: int) -> list[tuple]:
    """Three staggered H on carbon ``c`` (dihedral to the dummy atom 180, +60, -60)."""
    return [(c, CH, prev, TET, 0, d) for d in (180.0, 60.0, -60.0)]


def _idealised(name: str) -> tuple[np.ndarray, list[float]]:
    """H-R with standard bond lengths and angles, staggered; atom 0 is the attaching H."""
    head = [(0, CH), (1, CH, 0, TET)]
    if name == "H":
        return _zmatrix([(0, X_H_BOND_ANGSTROM[1])]), [R_H, R_H]
    if name == "Me":
        rows = head + [(1, CH, 0, TET, 2, 120.0), (1, CH, 0, TET, 2, -120.0)]
        return _zmatrix(rows), [R_H, R_C, R_H, R_H, R_H]
    if name == "Et":
        rows = head + [(1, CH, 0, TET, 2, 120.0), (1, CC, 0, TET, 2, -120.0)] + _methyl_h(4, 1)
        return _zmatrix(rows), [R_H, R_C, R_H, R_H, R_C] + [R_H] * 3
    if name == "iPr":
        rows = head + [(1, CC, 0, TET, 2, 120.0), (1, CC, 0, TET, 2, -120.0)]
        rows += _methyl_h(3, 1) + _methyl_h(4, 1)
        return _zmatrix(rows), [R_H, R_C, R_H, R_C, R_C] + [R_H] * 6
    if name == "tBu":
        rows = [(0, CH), (1, CC, 0, TET), (1, CC, 0, TET, 2, 120.0), (1, CC, 0, TET, 2, -120.0)]
        rows += _methyl_h(2, 1) + _methyl_h(3, 1) + _methyl_h(4, 1)
        return _zmatrix(rows), [R_H, R_C, R_C, R_C, R_C] + [R_H] * 9
    # phenyl: regular hexagon, the attaching H on the ipso carbon's axis
    centre = np.array([0.0, 0.0, CHA + CA])
    ring = [centre + CA * np.array([0.0, np.sin(np.pi + k * np.pi / 3), np.cos(np.pi + k * np.pi / 3)])
            for k in range(6)]
    hs = [c + CHA * (c - centre) / CA for c in ring[1:]]
    return np.array([np.zeros(3), *ring, *hs]), [R_H] + [R_CAR] * 6 + [R_H] * 5


# Verloop's original STERIMOL program (CPK radii), L / B1 / B5 in Angstrom, values as
# reproduced from that program (Verloop et al. 1976 definition; from memory of the
# reproduced table, literature tables differ slightly, e.g. Me L 2.87).
VERLOOP = {
    "H": (2.06, 1.00, 1.00),
    "Me": (3.00, 1.52, 2.04),
    "Et": (4.11, 1.52, 3.17),
    "iPr": (4.11, 1.90, 3.17),
    "tBu": (4.11, 2.77, 3.17),
    "Ph": (6.28, 1.71, 3.11),
}


@pytest.mark.parametrize("name", list(VERLOOP))
@pytest.mark.parametrize("origin", ["verloop", "attachment"])
def test_verloop_reference_values(name: str, origin: str) -> None:
    x, radii = _idealised(name)
    first_z = 1 if name == "H" else 6
    res = sterimol(x, np.array(radii), 0, 1, np.arange(1, len(x)), l_origin=origin,
                   first_element=first_z)
    l_ref, b1_ref, b5_ref = VERLOOP[name]
    # Verloop's STERIMOL program values (see VERLOOP above): within 0.15 Angstrom
    assert res.l_angstrom == pytest.approx(l_ref, abs=0.15)
    assert res.b1_angstrom == pytest.approx(b1_ref, abs=0.15)
    assert res.b5_angstrom == pytest.approx(b5_ref, abs=0.15)


def test_methyl_exact_geometry() -> None:
    # hand calculation: L = 1.10 + 1.50 + 0.40; B5 = 1.10 sin(70.53 deg) + 1.00;
    # B1 = 1.10 sin(70.53 deg) cos(60 deg) + 1.00 (direction between two H)
    x, radii = _idealised("Me")
    res = sterimol(x, np.array(radii), 0, 1, np.arange(1, 5))
    s = np.sin(np.radians(180.0 - TET))
    assert res.l_angstrom == pytest.approx(3.00, abs=1e-6)
    assert res.b5_angstrom == pytest.approx(CH * s + 1.0, abs=1e-6)
    assert res.b1_angstrom == pytest.approx(CH * s * 0.5 + 1.0, abs=1e-5)


def _mmff(smiles: str, seed: int = 3) -> Chem.Mol:
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    AllChem.EmbedMolecule(mol, randomSeed=seed)
    AllChem.MMFFOptimizeMolecule(mol)
    return mol


CASES = [
    ("Cc1ccccc1", "c-[CH3]"),
    ("CC(C)c1ccccc1", "c-[CH1](C)C"),
    ("CC(C)(C)c1ccccc1", "c-C(C)(C)C"),
    ("COc1ccccc1", "c-O"),
    ("Cc1ccccc1-c1ccccc1", "c(:c[CH3])-!@c"),
]


@pytest.mark.parametrize("smiles,smarts", CASES)
@pytest.mark.parametrize("radii_set", ["bondi", "cpk"])
def test_against_morfeus(smiles: str, smarts: str, radii_set: str) -> None:
    from morfeus import Sterimol

    mol = _mmff(smiles)
    x = mol.GetConformer().GetPositions()
    match = mol.GetSubstructMatch(Chem.MolFromSmarts(smarts))
    a, b = (match[0], match[3]) if "!@" in smarts else match[:2]
    sub = substituent_atoms(mol, a, b)
    radii = vdw_radii(mol, radii_set)
    ours = sterimol(x, radii, a, b, sub, l_origin="attachment")
    elements = [atom.GetSymbol() for atom in mol.GetAtoms()]
    others = [i + 1 for i in range(len(x)) if i not in set(sub) and i != a]
    ref = Sterimol(elements, x, a + 1, b + 1, radii=radii, excluded_atoms=others)
    # morfeus-ml 0.8 (PyPI) on the identical geometry and radii: |difference| <= 0.05
    assert abs(ours.l_angstrom - ref.L_value) <= 0.05
    assert abs(ours.b1_angstrom - ref.B_1_value) <= 0.05
    assert abs(ours.b5_angstrom - ref.B_5_value) <= 0.05


@pytest.mark.parametrize("spread_deg", [100.3, 137.77, 61.9])
def test_b1_between_two_atoms_off_the_scan_grid(spread_deg: float) -> None:
    # geometry: substituent atoms at unit distance from the L axis, spread_deg apart around it,
    # radius 1.0, on an axis atom of radius 0.1; the narrowest direction points away from both,
    # midway, so B1 = 1 - cos(spread / 2) (hand calculation). The angle is off the 0.5 degree scan grid (and the
    # pose random): the refinement must find it to 1e-6 Angstrom
    half = np.radians(spread_deg / 2)
    local = np.array([[0.0, 0.0, -1.5], [0.0, 0.0, 0.0],
                      [np.cos(half), np.sin(half), 0.8], [np.cos(half), -np.sin(half), 1.3]])
    rot, _ = np.linalg.qr(np.random.default_rng(int(spread_deg * 100)).normal(size=(3, 3)))
    x = local @ rot.T + np.array([0.3, -2.0, 1.1])
    res = sterimol(x, np.array([1.5, 0.1, 1.0, 1.0]), 0, 1, np.array([1, 2, 3]))
    assert res.b1_angstrom == pytest.approx(1.0 - np.cos(half), abs=1e-6)
    assert res.b5_angstrom == pytest.approx(2.0, abs=1e-12)


def test_l_origin_verloop_ignores_real_bond_length() -> None:
    mol = _mmff("Cc1ccccc1")
    x = mol.GetConformer().GetPositions()
    b, a = mol.GetSubstructMatch(Chem.MolFromSmarts("[CH3]-c"))
    sub = substituent_atoms(mol, a, b)
    r = vdw_radii(mol, "cpk")
    at_atom = sterimol(x, r, a, b, sub, l_origin="attachment")
    virtual = sterimol(x, r, a, b, sub, l_origin="verloop")
    bond = float(np.linalg.norm(x[a] - x[b]))
    # the two origins differ by the real C-C bond minus Verloop's C-H (1.10); B unchanged
    assert at_atom.l_angstrom - virtual.l_angstrom == pytest.approx(bond - 1.10, abs=1e-9)
    assert at_atom.b5_angstrom == pytest.approx(virtual.b5_angstrom, abs=1e-12)
    # common practice, no source: a methyl on an aromatic ring has Verloop L close to 3.0
    assert virtual.l_angstrom == pytest.approx(3.0, abs=0.05)


def test_radii_sets() -> None:
    mol = Chem.AddHs(Chem.MolFromSmiles("Cc1ccccc1O"))
    cpk = vdw_radii(mol, "cpk")
    bondi = vdw_radii(mol, "bondi")
    # from memory: Verloop CPK sp3 C 1.50, aromatic C 1.70, O 1.35, H 1.00
    assert cpk[0] == 1.50 and cpk[1] == 1.70 and cpk[7] == 1.35 and cpk[-1] == 1.00
    # Bondi, J. Phys. Chem. 1964, 68, 441: C 1.70, O 1.52, H 1.20
    assert bondi[0] == 1.70 and bondi[7] == 1.52 and bondi[-1] == 1.20
    assert vdw_radii(mol, "bondi", scale=1.17)[0] == pytest.approx(1.989)
    assert BONDI_RADII_ANGSTROM[7] == 1.55  # Bondi 1964: N 1.55
    with pytest.raises(InputError, match="unknown radii set 'uff'"):
        vdw_radii(mol, "uff")
    with pytest.raises(InputError, match="no van der Waals radius for element Fe"):
        vdw_radii(Chem.MolFromSmiles("[Fe]"), "bondi")


def test_substituent_atoms_and_ring_bond() -> None:
    mol = Chem.AddHs(Chem.MolFromSmiles("COc1ccccc1"))
    # methoxy on anisole: O, C and its three H
    assert substituent_atoms(mol, 2, 1).tolist() == [0, 1, 8, 9, 10]
    with pytest.raises(InputError, match="site bond 3-4 is in a ring"):
        substituent_atoms(mol, 2, 3)
    with pytest.raises(InputError, match="are not bonded"):
        substituent_atoms(mol, 0, 5)
