"""Percent buried volume, ring-plane clearance and accessible surface area."""

from __future__ import annotations

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import AllChem
from scipy.spatial.transform import Rotation

from redoxfront.descriptors.buried_volume import percent_buried_volume, sphere_grid
from redoxfront.descriptors.clearance import (
    best_fit_plane,
    ring_of_attachment,
    ring_plane_clearance,
)
from redoxfront.descriptors.sterimol import vdw_radii
from redoxfront.descriptors.surface import atom_sasa
from redoxfront.errors import InputError


def _mmff(smiles: str, seed: int = 5) -> Chem.Mol:
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    AllChem.EmbedMolecule(mol, randomSeed=seed)
    AllChem.MMFFOptimizeMolecule(mol)
    return mol


# ---- buried volume -------------------------------------------------------------------

def test_sphere_grid_volume() -> None:
    pts = sphere_grid(3.5, 0.1)
    # geometry: 4/3 pi R^3 = 179.59 cubic Angstrom; 0.001 cubic Angstrom per point
    assert len(pts) * 1e-3 == pytest.approx(4.0 / 3.0 * np.pi * 3.5**3, rel=2e-3)


@pytest.mark.parametrize(
    "smiles,smarts",
    [("CC(C)(C)c1ccccc1C", "[cH0](C(C)(C)C)"), ("COc1ccc(OC)cc1", "c-O"), ("CC(C)c1ccccc1", "c-C")],
)
def test_buried_volume_against_morfeus(smiles: str, smarts: str) -> None:
    from morfeus import BuriedVolume

    mol = _mmff(smiles)
    x = mol.GetConformer().GetPositions()
    centre = mol.GetSubstructMatch(Chem.MolFromSmarts(smarts))[0]
    radii = vdw_radii(mol, "bondi", scale=1.17)
    heavy = np.array([a.GetAtomicNum() > 1 for a in mol.GetAtoms()])
    include = heavy.copy()
    include[centre] = False
    ours = percent_buried_volume(x, radii, centre, include)
    elements = [a.GetSymbol() for a in mol.GetAtoms()]
    # morfeus scales only its own radii tables, so it gets the already scaled radii
    ref = BuriedVolume(elements, x, centre + 1, radii=radii, include_hs=False, radius=3.5,
                       radii_scale=1.0)
    # morfeus-ml 0.8 (PyPI), same structure and settings: within 0.5 percentage points
    assert abs(ours - 100.0 * ref.fraction_buried_volume) <= 0.5
    with_h = np.ones(len(x), bool)
    with_h[centre] = False
    ref_h = BuriedVolume(elements, x, centre + 1, radii=radii, include_hs=True, radius=3.5,
                         radii_scale=1.0)
    ours_h = percent_buried_volume(x, radii, centre, with_h)
    assert abs(ours_h - 100.0 * ref_h.fraction_buried_volume) <= 0.5
    assert ours_h > ours


@pytest.mark.parametrize("radius,spacing,with_h", [(3.5, 0.1, False), (3.5, 0.1, True), (3.0, 0.07, False),
                                                   (5.0, 0.2, True)])
def test_buried_volume_equals_a_direct_count_of_every_grid_point(radius: float, spacing: float,
                                                                  with_h: bool) -> None:
    # Hillier et al., Organometallics 2003, 22, 4322: %Vbur is the share of the sphere's volume
    # within any atom's radius; counted here point by point over the whole grid and every atom
    # (no blocks, no runs). Only points exactly on a sphere's surface could differ (round-off),
    # each 1/n_inside of the sphere: within 0.01 percentage points
    mol = _mmff("COc1cc(C(C)(C)C)c(OC)cc1C(C)(C)C", seed=11)
    x = mol.GetConformer().GetPositions()
    radii = vdw_radii(mol, "bondi", scale=1.17)
    pts = sphere_grid(radius, spacing)
    for centre in (2, 3, 5):
        include = np.ones(len(x), bool) if with_h else np.array([a.GetAtomicNum() > 1 for a in mol.GetAtoms()])
        include[centre] = False
        buried = np.zeros(len(pts), bool)
        for i in np.flatnonzero(include):
            buried |= ((pts - (x[i] - x[centre])) ** 2).sum(axis=1) <= radii[i] ** 2
        direct = 100.0 * float(buried.mean())
        ours = percent_buried_volume(x, radii, centre, include, sphere_radius_angstrom=radius,
                                     spacing_angstrom=spacing)
        assert ours == pytest.approx(direct, abs=0.01)
        assert 5.0 < ours < 95.0  # a real share, not an empty or full sphere


def test_buried_volume_single_neighbour_analytic() -> None:
    # geometry: a sphere of radius a whose centre is d from the centre of the big sphere
    # (R = 3.5) and lies wholly inside it buries (a/R)^3 of it
    x = np.array([[0.0, 0.0, 0.0], [1.0, 0.0, 0.0]])
    pct = percent_buried_volume(x, np.array([1.0, 2.0]), 0, np.array([False, True]))
    assert pct == pytest.approx(100.0 * (2.0 / 3.5) ** 3, abs=0.1)
    with pytest.raises(InputError, match="must be positive"):
        percent_buried_volume(x, np.array([1.0, 2.0]), 0, np.array([False, True]),
                              sphere_radius_angstrom=0.0)


# ---- ring-plane clearance ---------------------------------------------------------------

def _hexagon() -> np.ndarray:
    ang = np.arange(6) * np.pi / 3
    return np.column_stack([1.39 * np.cos(ang), 1.39 * np.sin(ang), np.zeros(6)])


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_clearance_constructed_geometry(seed: int) -> None:
    # ring in the xy-plane; substituent atoms at z = +2.0 (r 1.2) and z = -0.5 (r 1.7):
    # by construction clearance 3.2, above +3.2, below -(0.5 + 1.7) = -2.2
    ring = _hexagon()
    sub = np.array([[2.9, 0.0, 0.0], [3.5, 0.5, 2.0], [3.5, -0.5, -0.5]])
    x = np.vstack([ring, sub])
    radii = np.array([1.7] * 6 + [1.7, 1.2, 1.7])
    rot = Rotation.random(random_state=seed)
    x = rot.apply(x) + np.array([3.0, -1.0, 2.0])  # any pose gives the same answer
    res = ring_plane_clearance(x, radii, tuple(range(6)), np.array([6, 7, 8]))
    assert res.clearance_angstrom == pytest.approx(3.2, abs=1e-9)
    assert res.above_angstrom == pytest.approx(3.2, abs=1e-9)
    assert res.below_angstrom == pytest.approx(-2.2, abs=1e-9)


def test_clearance_one_sided_substituent_stays_clear() -> None:
    # a single atom 3.0 above the plane with radius 1.2: it never reaches below,
    # so the signed 'below' extent is +1.8 (3.0 - 1.2), the clearance 4.2
    x = np.vstack([_hexagon(), [[0.0, 0.0, 3.0]]])
    res = ring_plane_clearance(x, np.array([1.7] * 6 + [1.2]), tuple(range(6)), np.array([6]))
    assert (res.clearance_angstrom, res.below_angstrom) == pytest.approx((4.2, 1.8))


def test_best_fit_plane_of_chair() -> None:
    # an ideal chair: ring atoms alternate +-0.25 Angstrom about z = 1; the best plane is z = 1
    ang = np.arange(6) * np.pi / 3
    z = 1.0 + 0.25 * (-1.0) ** np.arange(6)
    c, n = best_fit_plane(np.column_stack([1.45 * np.cos(ang), 1.45 * np.sin(ang), z]))
    assert np.allclose(c, [0.0, 0.0, 1.0], atol=1e-12)
    assert abs(n[2]) == pytest.approx(1.0, abs=1e-12)


def test_tert_butyl_clears_ring_plane_on_both_sides() -> None:
    mol = _mmff("CC(C)(C)c1ccccc1")
    x = mol.GetConformer().GetPositions()
    a, b = mol.GetSubstructMatch(Chem.MolFromSmarts("c-C(C)(C)C"))[:2]
    from redoxfront.descriptors.sterimol import substituent_atoms

    ring = ring_of_attachment(mol, a, b)
    res = ring_plane_clearance(x, vdw_radii(mol, "bondi"), ring, substituent_atoms(mol, a, b))
    # common practice, no source: a t-Bu group puts one methyl above and one below the
    # ring (about 1.25 Angstrom each, plus its H and radius), so both sides reach ~3 A
    assert 2.8 < res.clearance_angstrom < 3.8
    assert -3.8 < res.below_angstrom < -2.5
    with pytest.raises(InputError, match="not in a ring"):
        ring_of_attachment(mol, b, 0 if b != 0 else 2)


# ---- accessible surface -----------------------------------------------------------------

def test_sasa_isolated_and_two_spheres_analytic() -> None:
    probe = 1.4
    one = atom_sasa(np.zeros((1, 3)), np.array([1.7]), probe_angstrom=probe)
    # geometry: 4 pi (r + probe)^2
    assert one[0] == pytest.approx(4 * np.pi * 3.1**2, rel=1e-9)
    d, r1, r2 = 2.0, 1.7 + probe, 1.2 + probe
    two = atom_sasa(np.array([[0.0, 0, 0], [d, 0, 0]]), np.array([1.7, 1.2]),
                    probe_angstrom=probe, n_points=2000)
    # geometry: the buried cap of sphere 1 has height h = r1 - (d^2 + r1^2 - r2^2) / (2d)
    h1 = r1 - (d**2 + r1**2 - r2**2) / (2 * d)
    h2 = r2 - (d**2 + r2**2 - r1**2) / (2 * d)
    assert two[0] == pytest.approx(4 * np.pi * r1**2 - 2 * np.pi * r1 * h1, rel=0.01)
    assert two[1] == pytest.approx(4 * np.pi * r2**2 - 2 * np.pi * r2 * h2, rel=0.01)


def test_sasa_of_chosen_atoms_equals_the_whole_molecule_run() -> None:
    # Shrake & Rupley, J. Mol. Biol. 1973, 79, 351: an atom's area depends on its own test points
    # and its neighbours only, so asking for some atoms must give their values of the full run
    mol = _mmff("CN1c2ccccc2Sc2ccccc21")
    x = mol.GetConformer().GetPositions()
    radii = vdw_radii(mol, "bondi")
    whole = atom_sasa(x, radii)
    some = atom_sasa(x, radii, atoms=[7, 0, 13])
    assert some.shape == (3,)
    assert some == pytest.approx(whole[[7, 0, 13]], abs=1e-12)
    assert whole.sum() > 200.0  # common practice, no source: an organic molecule of 15 heavy atoms


def test_sasa_against_rdkit_freesasa() -> None:
    from rdkit.Chem import rdFreeSASA

    mol = _mmff("COc1ccc(OC)cc1")
    radii = vdw_radii(mol, "bondi")
    ours = atom_sasa(mol.GetConformer().GetPositions(), radii)
    total = rdFreeSASA.CalcSASA(mol, list(radii), -1, None, rdFreeSASA.SASAOpts())
    per_atom = np.array([float(a.GetProp("SASA")) for a in mol.GetAtoms()])
    # RDKit FreeSASA (Lee & Richards 1971 algorithm), same radii and 1.4 A probe
    assert ours.sum() == pytest.approx(total, rel=0.01)
    assert np.abs(ours - per_atom).max() < 2.0
