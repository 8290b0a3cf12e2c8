"""Protonation forms built from SMILES: which sites take the protons, and their families."""

from __future__ import annotations

import pytest
from rdkit import Chem

from redoxfront.candidates.protonation import deprotonated_molecule, reduced_ladder, site_patterns
from redoxfront.engine.pka import PHENOL_OH, REDUCED_N_HETEROCYCLE_NH
from redoxfront.errors import SettingsError


def _canon(smiles: str) -> str:
    return Chem.MolToSmiles(Chem.MolFromSmiles(smiles))


def test_quinone_reduces_to_hydroquinone_with_phenol_sites() -> None:
    # any organic chemistry text: Q + 2 H+ + 2 e- -> QH2 (1,4-benzoquinone -> hydroquinone)
    ladder = reduced_ladder(_canon("O=C1C=CC(=O)C=C1"), 2, -2)
    assert [f.charge for f in ladder.forms] == [-2, -1, 0]
    assert [f.uhf for f in ladder.forms] == [0, 0, 0]
    assert ladder.forms[-1].smiles == "Oc1ccc(O)cc1"
    assert {s.family for s in ladder.sites} == {PHENOL_OH}
    assert ladder.forms[1].label.startswith("+H@") and ladder.forms[0].label == ""


def test_phenazine_and_flavin_take_protons_on_their_ring_nitrogens() -> None:
    # 5,10-dihydrophenazine and 1,5-dihydroflavin are the reduced forms (any flavin/phenazine review)
    ladder = reduced_ladder(_canon("c1ccc2nc3ccccc3nc2c1"), 2, -2)
    assert ladder.forms[-1].smiles == _canon("C1=CC=C2NC3=CC=CC=C3NC2=C1")
    assert [s.element for s in ladder.sites] == ["N", "N"]
    assert {s.family for s in ladder.sites} == {REDUCED_N_HETEROCYCLE_NH}
    flavin = _canon("Cn1c2ccccc2nc2c(=O)[nH]c(=O)nc21")  # 10-methylisoalloxazine
    ladder = reduced_ladder(flavin, 2, -2)
    assert ladder.forms[-1].smiles == _canon("CN1c2ccccc2Nc2c1[nH]c(=O)[nH]c2=O")


def test_sites_can_be_switched_off_or_replaced() -> None:
    patterns = site_patterns({"azine ring N": "off"})
    ladder = reduced_ladder(_canon("c1ccc2nc3ccccc3nc2c1"), 2, -2, patterns)
    assert len(ladder.forms) == 1 and ladder.sites == ()
    with pytest.raises(SettingsError, match=r"\[aqueous.sites\] mine = 'C\(' is not a valid SMARTS"):
        site_patterns({"mine": "C("})


def test_a_viologen_has_no_proton_site() -> None:
    ladder = reduced_ladder(_canon("C[n+]1ccc(-c2cc[n+](C)cc2)cc1"), 2, 0)
    assert len(ladder.forms) == 1


def test_conjugate_base_of_a_reference_acid() -> None:
    acid, base = deprotonated_molecule("Oc1ccccc1", 0)
    assert acid.GetNumAtoms() - base.GetNumAtoms() == 1
    assert Chem.GetFormalCharge(base) == -1
    assert Chem.MolToSmiles(Chem.RemoveHs(base)) == "[O-]c1ccccc1"
