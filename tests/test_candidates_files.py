"""Counting candidate rows without parsing molecules: SDF records and CSV lines."""

from pathlib import Path

import pytest
from rdkit import Chem

from redoxfront.campaign import load_campaign
from redoxfront.candidates.files import count_rows
from redoxfront.compute.funnel import use_funnel

SMILES = ["c1ccccc1C", "Cc1ccc(C)cc1", "COc1ccccc1", "COc1ccc(OC)cc1", "Oc1ccccc1", "CC1(C)CCCC(C)(C)N1[O]",
          "c1ccc2ccccc2c1"]


def _sdf(path: Path, smiles: list[str]) -> Path:
    with Chem.SDWriter(str(path)) as w:
        for i, s in enumerate(smiles):
            m = Chem.MolFromSmiles(s)
            m.SetProp("_Name", f"m{i}")
            m.SetProp("note", "a value with $$$$ inside")  # not at the start of a line: no terminator
            w.write(m)
    return path


def _rdkit_records(path: Path) -> int:
    return sum(1 for _ in Chem.SDMolSupplier(str(path), sanitize=False, removeHs=False))


@pytest.mark.parametrize("chunk", [7, 64, 1 << 22])
def test_sdf_records_counted_as_rdkit_reads_them(tmp_path, chunk):
    path = _sdf(tmp_path / "c.sdf", SMILES)
    # RDKit's SDMolSupplier (PyPI rdkit): one record per '$$$$' terminator line
    assert count_rows(path, chunk_bytes=chunk) == _rdkit_records(path) == len(SMILES)
    text = path.read_text()
    # a last record without its terminator still counts (RDKit reads it), trailing blanks do not
    cut = tmp_path / "cut.sdf"
    cut.write_text(text[: text.rstrip().rfind("$$$$")] + "\n\n")
    assert count_rows(cut, chunk_bytes=chunk) == _rdkit_records(cut) == len(SMILES)
    blank = tmp_path / "blank.sdf"
    blank.write_text(text + "\n  \n")
    assert count_rows(blank, chunk_bytes=chunk) == _rdkit_records(blank) == len(SMILES)
    crlf = tmp_path / "crlf.sdf"
    crlf.write_bytes(text.replace("\n", "\r\n").encode())
    assert count_rows(crlf, chunk_bytes=chunk) == _rdkit_records(crlf) == len(SMILES)


def test_csv_rows_and_missing_file(tmp_path):
    csv = tmp_path / "c.csv"
    csv.write_text("id,smiles\n" + "".join(f"m{i},{s}\n" for i, s in enumerate(SMILES)))
    assert count_rows(csv) == len(SMILES)  # common practice, no source: rows after one header line
    assert count_rows(tmp_path / "none.sdf") == 0
    single = tmp_path / "one.mol"
    single.write_text(Chem.MolToMolBlock(Chem.MolFromSmiles("CCO")))  # a molfile has no terminator
    assert count_rows(single) == _rdkit_records(single) == 1


def test_an_sdf_library_above_the_threshold_takes_the_funnel(tmp_path):
    (tmp_path / "inputs").mkdir()
    _sdf(tmp_path / "inputs" / "candidates.sdf", SMILES)
    for threshold, expected in ((6, True), (7, False)):
        (tmp_path / "campaign.toml").write_text(
            "[inputs]\ncandidates = 'inputs/candidates.sdf'\n[compute]\nrole = 'catholyte'\n"
            f"[funnel]\nthreshold = {threshold}\n")
        # 7 records: more than 6 takes the funnel, 7 is not more than 7
        assert use_funnel(load_campaign(tmp_path)) is expected
