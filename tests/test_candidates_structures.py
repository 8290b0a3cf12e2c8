"""Candidate reading and validation, redox states and conformers."""

from pathlib import Path

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


def _hostile(tmp_path, name: str, content: bytes):
    p = tmp_path / name
    p.write_bytes(content)
    return p


def test_row_level_problems_are_rejections_and_the_other_rows_go_on(tmp_path):
    extra = _hostile(tmp_path, "extra.csv", b"id,smiles\na,CCO\nb,CCC,stray\nc,CCCC\n")
    good, bad = read_candidates(extra, S)
    assert [c.id for c in good] == ["a", "c"]
    assert [str(e) for e in bad] == [
        "extra.csv, row 3: 3 fields, but the header has 2; quote a field that holds the delimiter ',' "
        "or remove the extra one"]
    # Python csv module documentation: field_size_limit defaults to 131072 characters
    big = _hostile(tmp_path, "big.csv", b"id,smiles\na,CCO\nb," + b"C" * 200_000 + b"\nc,CCCC\n")
    good, bad = read_candidates(big, S)
    assert [c.id for c in good] == ["a", "c"]
    assert [str(e) for e in bad] == ["big.csv, row 3: unreadable row (field larger than field limit (131072))"]


def test_ids_from_csv_and_sdf_stay_text(tmp_path):
    csv_file = _hostile(tmp_path, "ids.csv", b"id,smiles\n001,CCO\nNA,CCC\nnull,CCCC\n")
    assert [c.id for c in read_candidates(csv_file, S)[0]] == ["001", "NA", "null"]
    sdf = tmp_path / "ids.sdf"
    from rdkit.Chem import AllChem

    w = Chem.SDWriter(str(sdf))
    for cid, smi in (("007", "CCO"), ("1e3", "CCC")):
        m = Chem.AddHs(Chem.MolFromSmiles(smi))
        AllChem.Compute2DCoords(m)
        m.SetProp("id", cid)
        m.SetProp("batch", "0042")
        w.write(m)
    w.close()
    good, bad = read_candidates(sdf, S)
    assert [c.id for c in good] == ["007", "1e3"] and good[0].extra["batch"] == "0042" and not bad


HOSTILE_FILES = {
    # name: (content, the part of the one-line error that says why)
    "single.csv": (b"smiles\nCCO\nCCC\n", "needs columns 'id' and 'smiles'; found: smiles"),
    "latin1.csv": ("id,smiles,note\na,CCO,caf\xe9\n".encode("latin-1"), "not UTF-8 text (byte 0xe9 on line 2"),
    "binary.csv": (b"\x00\x01id,smiles\n\xff\xfe", "binary data (a NUL byte on line 1)"),
    "cands.xlsx": (b"PK\x03\x04 a zip container", "a spreadsheet is not read as candidates"),
    "renamed.csv": (b"PK\x03\x04 an xlsx renamed to csv", "a zip container (a spreadsheet such as .xlsx?)"),
    "empty.sdf": (b"", "an empty SDF file (no molecules)"),
    "twice.csv": (b"id,smiles,smiles\na,CCO,CCC\n", "column 'smiles' appears more than once in the header"),
}


@pytest.mark.parametrize("name", sorted(HOSTILE_FILES))
def test_a_file_that_cannot_be_candidates_gives_one_line_naming_it(tmp_path, name):
    from click.testing import CliRunner

    from redoxfront.cli import main

    content, why = HOSTILE_FILES[name]
    path = _hostile(tmp_path, name, content)
    (tmp_path / "campaign.toml").write_text("[compute]\nworkers = 1\n")
    r = CliRunner().invoke(main, ["compute", str(tmp_path), "--candidates", str(path), "--quiet"])
    assert r.exit_code == 2, r.output
    line = r.output.strip()
    assert "\n" not in line and "Traceback" not in line
    assert line.startswith(f"error: {path}: ") and why in line, line


@pytest.mark.parametrize("system_file", ["/dev/zero", "/etc/passwd", "/"])
def test_a_system_file_as_candidates_gives_one_line(tmp_path, system_file):
    from click.testing import CliRunner

    from redoxfront.cli import main

    if not Path(system_file).exists():
        pytest.skip(f"{system_file} is not on this system")
    (tmp_path / "campaign.toml").write_text("[compute]\nworkers = 1\n")
    r = CliRunner().invoke(main, ["compute", str(tmp_path), "--candidates", system_file, "--quiet"])
    assert r.exit_code == 2 and r.output.count("\n") == 1, r.output
    assert r.output.startswith(f"error: {system_file}: ")
    assert "not a regular file" in r.output or "needs columns 'id' and 'smiles'" in r.output


def test_a_latin1_campaign_file_gives_one_line(tmp_path):
    from click.testing import CliRunner

    from redoxfront.cli import main

    (tmp_path / "campaign.toml").write_bytes('name = "Essai café"\n'.encode("latin-1"))
    r = CliRunner().invoke(main, ["compute", str(tmp_path), "--quiet"])
    assert r.exit_code == 2 and r.output.count("\n") == 1, r.output
    assert "campaign.toml: not UTF-8 text (byte 0xe9 on line 1" in r.output


def test_the_carrier_fragment_rule_and_ambiguous_ionic_rows():
    # common practice, no source: ferrocene is Fe(II) between two cyclopentadienide rings; written
    # as three ions it must not be computed as one ring with the rest called counterions
    with pytest.raises(InputError, match=r"ambiguous ionic SMILES: fragment '\[Fe\+2\]' holds Fe.*metallocene"):
        parse_candidate({"id": "fc", "smiles": "[Fe+2].c1cc[cH-]c1.c1cc[cH-]c1"}, 2, S)
    with pytest.raises(InputError, match="equally large"):
        parse_candidate({"id": "x", "smiles": "CC[N+](C)(C)C.CC[N+](C)(C)C.O=S(=O)([O-])[O-]"}, 2, S)
    with pytest.raises(InputError, match="'CCO' is neutral, so not a counterion"):
        parse_candidate({"id": "x", "smiles": "COc1ccccc1.CCO"}, 2, S)
    # a carrier with a salt anion at least as large: the carrier is the ion that is not a salt ion
    # (TFSI-, bis(trifluoromethanesulfonyl)imide, 15 heavy atoms; 4-trimethylammonio-TEMPO, 15)
    tempo = "C[N+](C)(C)C1CC(C)(C)N([O])C(C)(C)C1"
    c = parse_candidate({"id": "t", "smiles": f"O=S(=O)(C(F)(F)F)[N-]S(=O)(=O)C(F)(F)F.{tempo}"}, 2, S)
    assert c.main_smiles == Chem.MolToSmiles(Chem.MolFromSmiles(tempo)) and c.heavy_atoms == 15
    assert c.counterions == ("O=S(=O)([N-]S(=O)(=O)C(F)(F)F)C(F)(F)F",)
