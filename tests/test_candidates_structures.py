"""Candidate reading and validation, redox states and conformers."""

import numpy as np
import pytest
from rdkit import Chem

from redoxfront.campaign import ComputeSettings, ConformerSettings
from redoxfront.candidates.conformers import generate_conformers
from redoxfront.candidates.structures import (
    parse_candidate,
    read_candidates,
    redox_states,
)
from redoxfront.errors import InputError

S = ComputeSettings()


def test_bad_rows_named_and_batch_continues(tmp_path):
    f = tmp_path / "c.csv"
    f.write_text(
        "id,smiles,solubility_mol_per_l\n"
        "a,COc1ccc(OC)cc1,0.5\n"
        "b,C1CC,1\n"              # unclosed ring
        "c,[U]C,1\n"               # uranium: outside GFN-xTB (H-Rn)
        ",,\n"                     # empty
        "a,CCO,1\n"                # duplicate id
        "d,c1ccccc1,2\n"
        "e,,3\n"                   # no SMILES
        "f,CCO,1\n"
    )
    good, bad = read_candidates(f, S)
    assert [c.id for c in good] == ["a", "d", "f"]
    msgs = [str(e) for e in bad]
    assert msgs[0] == "c.csv, row 3 (id b), field 'smiles': cannot parse SMILES 'C1CC'; check brackets, ring closures and valences"
    assert "row 4 (id c), field 'smiles': element(s) U outside the GFN-xTB parametrisation" in msgs[1]
    assert msgs[2] == "c.csv, row 5: empty row"
    assert "row 6, field 'id': duplicate id 'a' (first seen in row 2)" in msgs[3]
    assert "row 8 (id e), field 'smiles': missing SMILES" in msgs[4]
    assert good[0].extra == {"solubility_mol_per_l": "0.5"}  # user columns pass through


def test_heavy_atom_limit_and_role_values():
    small = ComputeSettings(max_heavy_atoms=5)
    with pytest.raises(InputError, match=r"field 'smiles': 7 heavy atoms, more than the limit of 5"):
        parse_candidate({"id": "x", "smiles": "c1ccccc1C"}, 2, small)
    with pytest.raises(InputError, match=r"field 'role': role 'cathode'.*anolyte, catholyte"):
        parse_candidate({"id": "x", "smiles": "CCO", "role": "cathode"}, 2, S)
    with pytest.raises(InputError, match=r"field 'n_electrons'.*allowed: 1, 2"):
        parse_candidate({"id": "x", "smiles": "CCO", "n_electrons": "3"}, 2, S)


def test_counterions_split_and_kept_for_mass():
    c = parse_candidate({"id": "s", "smiles": "C[N+](C)(C)CCOc1ccc(OC)cc1.[Br-]"}, 2, S)
    assert c.main_smiles == Chem.MolToSmiles(Chem.MolFromSmiles("C[N+](C)(C)CCOc1ccc(OC)cc1"))
    assert c.counterions == ("[Br-]",)
    # molar mass includes bromide: C12H20NO2+ 210.29 + Br 79.904 (IUPAC standard atomic weights)
    assert c.molar_mass_g_per_mol == pytest.approx(290.197, abs=0.02)
    c2 = parse_candidate({"id": "s", "smiles": "C[N+](C)(C)CCOc1ccc(OC)cc1", "counterion": "[Br-]"}, 2, S)
    assert c2.counterions == ("[Br-]",) and c2.molar_mass_g_per_mol == pytest.approx(c.molar_mass_g_per_mol)
    assert c2.counterion_note == ""


def test_charged_rows_balanced_with_the_campaign_counterion_or_rejected():
    """Issue 11: a dication written with one counterion (or none) was accepted and its molar
    mass came out 32-93 % wrong. Same rule as the library builder."""
    dication = "C[N+](C)(C)CCOc1ccc(OCC[N+](C)(C)C)cc1"
    with pytest.raises(InputError, match=r"net charge \+1: the salt is not balanced.*\[compute\] counterion"):
        parse_candidate({"id": "d", "smiles": dication + ".[Cl-]"}, 2, S)
    with pytest.raises(InputError, match=r"net charge \+2"):
        parse_candidate({"id": "d", "smiles": dication}, 2, S)
    s_cl = ComputeSettings(counterion="[Cl-]")
    one = parse_candidate({"id": "d", "smiles": dication + ".[Cl-]"}, 2, s_cl)
    none = parse_candidate({"id": "d", "smiles": dication}, 2, s_cl)
    # C16H30N2O2 2+ 282.42 + 2 Cl 70.90 = 353.33 g/mol (IUPAC standard atomic weights)
    assert one.molar_mass_g_per_mol == pytest.approx(353.33, abs=0.05)
    assert none.molar_mass_g_per_mol == pytest.approx(353.33, abs=0.05)
    assert none.counterions == ("[Cl-]", "[Cl-]")
    assert none.counterion_note == "net charge +2 balanced with 2 x [Cl-] ([compute] counterion)"
    assert one.counterion_note == "net charge +1 balanced with 1 x [Cl-] ([compute] counterion)"
    # a counterion of the same sign cannot balance (library builder's rule)
    with pytest.raises(InputError, match=r"cannot be balanced by the counterion '\[Na\+\]'"):
        parse_candidate({"id": "d", "smiles": dication}, 2, ComputeSettings(counterion="[Na+]"))


def test_redox_states_charge_and_spin():
    dmb = Chem.AddHs(Chem.MolFromSmiles("COc1ccc(OC)cc1"))
    st = redox_states(dmb, "catholyte", 1)
    assert [(s.name, s.charge, s.uhf) for s in st] == [("discharged", 0, 0), ("charged", 1, 1)]
    st = redox_states(dmb, "anolyte", 2)
    assert [(s.charge, s.uhf) for s in st] == [(0, 0), (-1, 1), (-2, 0)]
    # a nitroxide radical (TEMPO-like) is a doublet discharged; its oxoammonium is a singlet
    tempo = Chem.AddHs(Chem.MolFromSmiles("CC1(C)CCCC(C)(C)N1[O]"))
    st = redox_states(tempo, "catholyte", 1)
    assert [(s.charge, s.uhf) for s in st] == [(0, 1), (1, 0)]


def test_sdf_input(tmp_path):
    mol = Chem.AddHs(Chem.MolFromSmiles("COc1ccc(OC)cc1"))
    mol.SetProp("_Name", "dmb")
    mol.SetProp("supplier_code", "X1")
    w = Chem.SDWriter(str(tmp_path / "c.sdf"))
    w.write(mol)
    w.close()
    good, bad = read_candidates(tmp_path / "c.sdf", S)
    assert not bad and good[0].id == "dmb" and good[0].main_smiles == "COc1ccc(OC)cc1"
    assert good[0].extra["supplier_code"] == "X1"


def test_conformers_deterministic_and_pruned():
    mol = Chem.AddHs(Chem.MolFromSmiles("CCOc1ccc(OCC)cc1"))
    cs = ConformerSettings(n_generate=8, refine_lowest=3, rmsd_threshold_angstrom=0.5)
    a, n = generate_conformers(mol, cs, 7)
    b, _ = generate_conformers(mol, cs, 7)
    assert 1 <= len(a) <= 3 and len(a) <= n <= 8  # embeddings closer than the RMSD threshold are pruned
    assert all(np.allclose(x, y) for x, y in zip(a, b))
    assert a[0].shape == (mol.GetNumAtoms(), 3)
