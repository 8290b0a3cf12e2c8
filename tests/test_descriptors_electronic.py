"""Spin populations (tblite), dipole conversion and four-point reorganisation energies."""

from __future__ import annotations

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import AllChem
from scipy.optimize import minimize

from redoxfront.descriptors.electronic import (
    atomic_spin_populations,
    dipole_debye,
    reorganisation_energy,
)
from redoxfront.engine.records import ConformerResult, StateResult
from redoxfront.units import ANGSTROM_BOHR, E_BOHR_DEBYE, HARTREE_EV

tblite = pytest.importorskip("tblite.interface")


def _mmff(smiles: str) -> tuple[np.ndarray, np.ndarray]:
    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    AllChem.EmbedMolecule(mol, randomSeed=11)
    AllChem.MMFFOptimizeMolecule(mol)
    z = np.array([a.GetAtomicNum() for a in mol.GetAtoms()])
    return z, mol.GetConformer().GetPositions()


@pytest.mark.parametrize("smiles,charge", [("[CH2]C=C", 0), ("COc1ccc(OC)cc1", 1), ("C=C", -1)])
def test_doublet_spin_populations_sum_to_one(smiles: str, charge: int) -> None:
    z, x = _mmff(smiles)
    spin = atomic_spin_populations(z, x, charge, 1, "GFN2-xTB", "acetonitrile")
    assert spin.shape == (len(z),)
    # a doublet has one more alpha than beta electron: populations sum to 1 (within 0.01)
    assert spin.sum() == pytest.approx(1.0, abs=0.01)


def test_allyl_spin_on_terminal_carbons() -> None:
    z, x = _mmff("[CH2]C=C")
    spin = atomic_spin_populations(z, x, 0, 1, "GFN2-xTB", None)
    # from memory (textbook Hueckel picture of allyl): spin sits on the two terminal
    # carbons, with a small negative population on the central carbon
    assert spin[0] + spin[2] > 1.0
    assert spin[1] < 0.0


def test_triplet_sums_to_two_and_closed_shell_is_zero() -> None:
    z, x = _mmff("O=O")
    assert atomic_spin_populations(z, x, 0, 2).sum() == pytest.approx(2.0, abs=0.01)
    z, x = _mmff("C=C")
    assert np.abs(atomic_spin_populations(z, x, 0, 0)).max() < 1e-6


def test_dipole_conversion_and_ion_origin() -> None:
    # CODATA 2018: 1 e a0 = 8.478353e-30 C m = 2.541746 D
    assert dipole_debye(np.array([1.0, 0.0, 0.0])) == pytest.approx(2.541746, abs=1e-6)
    # a point charge +1 at R: dipole about the origin is R (e*bohr), about its own centre 0
    pos = np.array([[1.0, 2.0, 3.0]])
    mu0 = pos[0] * ANGSTROM_BOHR
    assert dipole_debye(mu0, 1, pos, np.array([12.0])) == pytest.approx(0.0, abs=1e-12)
    with pytest.raises(ValueError, match="centre of mass"):
        dipole_debye(mu0, 1)


def _energy_gradient(z: np.ndarray, charge: int, uhf: int):
    from tblite.interface import Calculator

    def fg(flat_bohr: np.ndarray) -> tuple[float, np.ndarray]:
        calc = Calculator("GFN2-xTB", z, flat_bohr.reshape(-1, 3), charge=charge, uhf=uhf)
        calc.set("verbosity", 0)
        res = calc.singlepoint()
        return float(res.get("energy")), np.asarray(res.get("gradient")).ravel()

    return fg


def _optimised_state(z: np.ndarray, x_angstrom: np.ndarray, charge: int, uhf: int,
                     other: tuple[int, int], name: str, other_name: str) -> StateResult:
    fg = _energy_gradient(z, charge, uhf)
    opt = minimize(fg, x_angstrom.ravel() * ANGSTROM_BOHR, jac=True, method="L-BFGS-B",
                   options={"gtol": 1e-6, "maxiter": 500})
    vertical, _ = _energy_gradient(z, *other)(opt.x)
    conf = ConformerResult(
        positions_angstrom=opt.x.reshape(-1, 3) / ANGSTROM_BOHR, energy_eh=float(opt.fun),
        charges=np.zeros(len(z)), homo_eh=0.0, lumo_eh=0.0, dipole_au=np.zeros(3),
        gradient_calls=int(opt.nfev), converged=bool(opt.success), source_conformer=0,
        vertical_energies_eh={other_name: vertical},
    )
    return StateResult(name, charge, uhf, (conf,))


def test_four_point_reorganisation_energy_is_positive_for_ethylene_cation() -> None:
    z, x = _mmff("C=C")
    neutral = _optimised_state(z, x, 0, 0, (1, 1), "discharged", "charged")
    cation = _optimised_state(z, x, 1, 1, (0, 0), "charged", "discharged")
    lam = reorganisation_energy(neutral, cation)
    assert lam is not None
    # Nelsen et al., J. Am. Chem. Soc. 1987, 109, 677: each half is a relaxation energy,
    # so both halves and the total are non-negative
    assert lam.a_to_b_ev >= 0.0 and lam.b_to_a_ev >= 0.0
    assert lam.total_ev == pytest.approx(lam.a_to_b_ev + lam.b_to_a_ev)
    # from memory: ethylene's radical cation relaxes strongly (C=C stretch and twist);
    # four-point lambda of a few tenths of an eV up to ~1 eV
    assert 0.1 < lam.total_ev < 1.5


def test_reorganisation_energy_pairs_by_source_conformer() -> None:
    def c(e: float, vert: dict[str, float], src: int) -> ConformerResult:
        return ConformerResult(np.zeros((1, 3)), e, np.zeros(1), 0.0, 0.0, np.zeros(3), 1, True,
                               src, vert)

    a = StateResult("discharged", 0, 0, (c(-1.000, {"charged": -0.700}, 0), c(-1.010, {"charged": -0.690}, 1)))
    b = StateResult("charged", 1, 1, (c(-0.705, {"discharged": -1.004}, 1), c(-0.720, {"discharged": -0.990}, 0)))
    lam = reorganisation_energy(a, b)
    # lowest a is conformer 1; its partner in b relaxed from the same start (src 1):
    # (-0.690 + 0.705) + (-1.004 + 1.010) = 0.021 Eh
    assert lam is not None and lam.source_conformer == 1
    assert lam.total_ev == pytest.approx(0.021 * HARTREE_EV, abs=1e-9)
    no_vertical = StateResult("charged", 1, 1, (c(-0.705, {}, 1),))
    assert reorganisation_energy(a, no_vertical) is None
    # a vertical energy of some other state (here a second reduction) is not this couple's
    wrong_state = StateResult("charged", 1, 1, (c(-0.705, {"charged2": -1.004}, 1),))
    assert reorganisation_energy(a, wrong_state) is None
    assert E_BOHR_DEBYE == pytest.approx(2.5417464, abs=1e-6)  # CODATA 2018 derived
