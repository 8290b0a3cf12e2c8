"""Virtual library: scaffold x substituents, symmetry repeats, per-combination problems."""

import re
from math import comb
from pathlib import Path

import pandas as pd
import pytest
from click.testing import CliRunner
from rdkit import Chem
from rdkit.Chem import Descriptors
from rdkit.Chem.rdMolDescriptors import CalcMolFormula

from redoxfront.campaign import ComputeSettings
from redoxfront.candidates.library import (
    LibrarySettings,
    attachment_points,
    build_library,
)
from redoxfront.candidates.structures import read_candidates
from redoxfront.cli import main
from redoxfront.errors import SettingsError

SUBS = ["H", "C", "C(C)(C)C", "[*]OC", "C(F)(F)F"]


def test_equivalent_sites_give_combinations_with_repetition():
    # 2,5-positions of 1,4-dimethoxybenzene are related by the ring's C2 axis: k substituents
    # on two equivalent sites give C(k + 1, 2) distinct molecules (combinations with
    # repetition; common combinatorics, no source)
    lib = LibrarySettings(scaffold="COc1cc([*:1])c(OC)cc1[*:2]", substituents={"1": SUBS, "2": SUBS})
    table, problems = build_library(lib)
    assert len(table) == comb(len(SUBS) + 1, 2) == 15
    assert problems.empty
    assert table["smiles"].is_unique and table["id"].is_unique
    # the ortho and para positions of anisole are not equivalent: every pair is its own molecule
    lib2 = LibrarySettings(scaffold="COc1ccc([*:1])cc1[*:2]", substituents={"1": SUBS, "2": SUBS})
    assert len(build_library(lib2)[0]) == len(SUBS) ** 2


def test_products_are_the_expected_molecules():
    lib = LibrarySettings(scaffold="COc1cc([*:1])c(OC)cc1[*:2]",
                          substituents={"1": ["H", "C(C)(C)C"], "2": ["C(C)(C)C"]}, id_prefix="dmb")
    table, _ = build_library(lib)
    row = table.set_index("substituent_1").loc["C(C)(C)C"]
    # 2,5-di-tert-butyl-1,4-dimethoxybenzene, C16H26O2 (formula from the structure)
    assert row["smiles"] == Chem.CanonSmiles("COc1cc(C(C)(C)C)c(OC)cc1C(C)(C)C")
    assert CalcMolFormula(Chem.MolFromSmiles(row["smiles"])) == "C16H26O2"
    h = table.set_index("substituent_1").loc["H"]
    assert h["smiles"] == Chem.CanonSmiles("COc1ccc(OC)c(C(C)(C)C)c1")
    assert list(table["id"]) == ["dmb-1", "dmb-2"]


def test_a_combination_that_cannot_be_joined_is_reported_and_the_rest_goes_on():
    lib = LibrarySettings(scaffold="c1ccccc1[*:1]", substituents={"1": ["[*]=O", "C"]})
    table, problems = build_library(lib)
    assert list(table["smiles"]) == ["Cc1ccccc1"]
    assert list(problems["substituent_1"]) == ["[*]=O"]
    assert problems["reason"].iloc[0].startswith("cannot join")


@pytest.mark.parametrize("scaffold, subs, message", [
    ("c1ccccc1", {"1": ["C"]}, "no attachment points"),
    ("c1ccccc1[*]", {"1": ["C"]}, "needs a number"),
    ("c1ccc([*:1])cc1[*:1]", {"1": ["C"]}, "used twice"),
    ("c1ccc([*:1])cc1[*:2]", {"1": ["C"]}, "no list for site 2"),
    ("c1ccccc1[*:1]", {"1": ["C"], "3": ["C"]}, "site 3 is not an attachment point"),
    ("c1ccccc1[*:1]", {"1": ["[*]C[*]"]}, "site 1, '[*]C[*]': needs exactly one attachment point"),
    ("c1ccccc1[*:1]", {"1": ["C1CC"]}, "site 1, 'C1CC': not a valid SMILES"),
    ("c1ccccc1[*:1]", {"1": "C"}, "give a list"),
])
def test_bad_library_settings_name_the_site_and_the_reason(scaffold, subs, message):
    with pytest.raises(SettingsError, match=re.escape(message)):
        build_library(LibrarySettings(scaffold=scaffold, substituents=subs))
    assert attachment_points("[*:2]c1ccccc1[*:1]") == [1, 2]


def test_library_command_writes_candidates_that_compute_reads(tmp_path: Path):
    (tmp_path / "campaign.toml").write_text(
        '[compute]\nrole = "catholyte"\n[inputs]\ncandidates = "inputs/library.csv"\n'
        '[library]\nscaffold = "COc1cc([*:1])c(OC)cc1[*:2]"\nid_prefix = "dmb"\n'
        '[library.substituents]\n1 = ["H", "C", "C(C)(C)C"]\n2 = ["H", "C", "C(C)(C)C"]\n'
    )
    result = CliRunner().invoke(main, ["library", str(tmp_path)])
    assert result.exit_code == 0, result.output
    assert "9 combinations, 6 distinct molecules (3 repeats by symmetry, 0 left out)" in result.output
    cands, problems = read_candidates(tmp_path / "inputs" / "library.csv", ComputeSettings())
    assert len(cands) == 6 and not problems
    assert cands[0].extra == {"substituent_1": "H", "substituent_2": "H"}
    # a bad setting is one line on stderr and exit code 2
    (tmp_path / "campaign.toml").write_text('[library]\nscaffold = "c1ccccc1"\n')
    bad = CliRunner().invoke(main, ["library", str(tmp_path)])
    assert bad.exit_code == 2 and "no attachment points" in bad.output


def test_run_builds_the_library_before_computing(tmp_path: Path):
    from redoxfront.pipeline import run_campaign

    (tmp_path / "campaign.toml").write_text(
        '[compute]\nrole = "catholyte"\nworkers = 1\n[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n'
        '[inputs]\ncandidates = "inputs/library.csv"\n'
        '[library]\nscaffold = "COc1ccc([*:1])cc1"\n[library.substituents]\n1 = ["H", "OC"]\n'
    )
    summary = run_campaign(tmp_path, progress=False, echo=lambda _: None)
    assert summary.lines[0].split()[:5] == ["library", "2", "combinations,", "2", "distinct"]
    assert "2 of 2 candidates computed" in summary.lines[1]
    # nothing measured: calibration, model and ranking say they were skipped, and why
    by_step = {line.split()[0]: line for line in summary.lines}
    assert "skipped: no usable measured potentials" in by_step["calibrate"]
    assert "skipped" in by_step["fit"] and "skipped" in by_step["rank"]
    # objectives that need no rate model are ranked without one (store read back: no new work)
    with (tmp_path / "campaign.toml").open("a") as fh:
        fh.write('[ranking]\nobjectives = ["cell_voltage", "molar_mass"]\nn_draws = 50\n'
                 '[cell]\ncounter = "potential"\ncounter_potential_v = -1.8\n')
    again = run_campaign(tmp_path, progress=False, echo=lambda _: None)
    ranked_line = next(line for line in again.lines if line.startswith("rank"))
    assert "2 candidates ranked" in ranked_line
    ranking = pd.read_csv(tmp_path / "results" / "ranking.csv")
    assert ranking["pareto_rank"].notna().all()
    picks = pd.read_csv(tmp_path / "results" / "picks.csv", keep_default_na=False)
    assert set(picks["substituent_1"]) <= {"H", "OC"}  # the picks say which building blocks they use
    html = (tmp_path / "results" / "report.html").read_text()
    assert '<button type="button">Site 1</button>' in html  # the table's column of the building block
    assert "<dt>Substituents</dt><dd>site 1: " in html  # and each pick card


def test_charged_products_get_balancing_counterions():
    # a trimethylammonium arm makes a cation: one BF4- balances it, and the molar mass includes it
    lib = LibrarySettings(scaffold="COc1ccc(OC)cc1[*:1]", substituents={"1": ["H", "C[N+](C)(C)C"]},
                          counterion="F[B-](F)(F)F")
    table, problems = build_library(lib)
    assert problems.empty
    by_sub = table.set_index("substituent_1")
    assert by_sub.loc["H", "counterion"] == ""
    assert by_sub.loc["C[N+](C)(C)C", "counterion"] == "F[B-](F)(F)F"
    cand = next(c for c in read_candidates_from(table) if c.extra["substituent_1"] == "C[N+](C)(C)C")
    assert cand.counterions == ("F[B-](F)(F)F",)
    # BF4-: 10.81 + 4 x 18.998 = 86.80 g/mol (IUPAC standard atomic weights of B and F)
    main_mass = Descriptors.MolWt(Chem.MolFromSmiles(cand.main_smiles))
    assert cand.molar_mass_g_per_mol - main_mass == pytest.approx(86.80, abs=0.01)
    # a dication needs two; an anion cannot be balanced by an anion, and no counterion is a reason
    two = LibrarySettings(scaffold="[*:1]c1ccc([*:2])cc1", substituents={"1": ["C[N+](C)(C)C"], "2": ["C[N+](C)(C)C"]},
                          counterion="F[B-](F)(F)F")
    assert build_library(two)[0]["counterion"].iloc[0] == "F[B-](F)(F)F.F[B-](F)(F)F"
    anion = LibrarySettings(scaffold="c1ccccc1[*:1]", substituents={"1": ["S(=O)(=O)[O-]"]}, counterion="F[B-](F)(F)F")
    assert "cannot be balanced" in build_library(anion)[1]["reason"].iloc[0]
    bare = LibrarySettings(scaffold="c1ccccc1[*:1]", substituents={"1": ["C[N+](C)(C)C"]})
    assert "no [library] counterion" in build_library(bare)[1]["reason"].iloc[0]
    with pytest.raises(SettingsError, match="charged ion"):
        build_library(LibrarySettings(scaffold="c1ccccc1[*:1]", substituents={"1": ["C"]}, counterion="CC"))


def read_candidates_from(table):
    from redoxfront.candidates.structures import parse_candidate

    settings = ComputeSettings()
    return [parse_candidate({k: ("" if v is None else str(v)) for k, v in r.items()}, i + 2, settings)
            for i, r in enumerate(table.to_dict("records"))]


def test_joined_molecules_equal_the_same_molecules_written_out_by_hand():
    # an independent route: write each product's SMILES with the substituents as branches
    # (ring-closure digits renumbered) and compare the canonical sets
    subs = ["H", "C", "OC", "C(F)(F)F", "c1ccccc1"]
    lib = LibrarySettings(scaffold="COc1c([*:3])c([*:1])c(OC)cc1[*:2]",
                          substituents={"1": subs, "2": subs, "3": subs})
    table, problems = build_library(lib)

    def branch(s: str, digit: str) -> str:
        return "" if s == "H" else f"({s.replace('1', digit)})"

    by_hand = {Chem.CanonSmiles(f"COc9c{branch(c, '8')}c{branch(a, '7')}c(OC)cc9{branch(b, '6')}")
               for a in subs for b in subs for c in subs}
    assert problems.empty
    assert set(table["smiles"]) == by_hand


def test_labelled_substituents_inline_and_from_a_file(tmp_path: Path):
    lib = LibrarySettings(scaffold="COc1ccc([*:1])cc1", substituents={"1": {"H": "H", "tBu": "C(C)(C)C"}})
    table, _ = build_library(lib)
    assert list(table["substituent_1"]) == ["H", "tBu"]
    assert table.set_index("substituent_1").loc["tBu", "smiles"] == Chem.CanonSmiles("COc1ccc(C(C)(C)C)cc1")
    # more substituents from a CSV (site, smiles, label); a missing label falls back to the SMILES
    (tmp_path / "inputs").mkdir()
    (tmp_path / "inputs" / "subs.csv").write_text("site,smiles,label\n1,OC,OMe\n1,C#N,\n")
    (tmp_path / "campaign.toml").write_text(
        '[library]\nscaffold = "COc1ccc([*:1])cc1"\nsubstituents_file = "inputs/subs.csv"\n'
        '[library.substituents]\n1 = ["H"]\n')
    out = CliRunner().invoke(main, ["library", str(tmp_path)])
    assert "3 combinations, 3 distinct molecules" in out.output, out.output
    written = pd.read_csv(tmp_path / "inputs" / "library.csv", keep_default_na=False)
    assert list(written["substituent_1"]) == ["H", "OMe", "C#N"]
    (tmp_path / "inputs" / "subs.csv").write_text("site,smiles,label\n1,,OMe\n")
    bad = CliRunner().invoke(main, ["library", str(tmp_path)])
    assert bad.exit_code == 2 and "subs.csv, line 2: site and smiles are needed" in bad.output


def test_the_phenothiazine_example_builds(tmp_path: Path):
    # the example campaign shipped in examples/ stays valid: 4 x 3 x 3 combinations, the two
    # ring sites (3 and 7 positions, both para to N) equivalent, so 4 x 6 distinct molecules
    import shutil

    from redoxfront.campaign import load_campaign
    from redoxfront.candidates.library import library_for_campaign

    src = Path(__file__).resolve().parents[1] / "examples" / "phenothiazine-library"
    shutil.copy(src / "campaign.toml", tmp_path / "campaign.toml")
    out, combos, distinct, problems = library_for_campaign(load_campaign(tmp_path), progress=False)
    assert (combos, distinct, len(problems)) == (36, 24, 0)
    shipped = pd.read_csv(src / "inputs" / "library.csv")
    assert shipped.equals(pd.read_csv(out))  # the shipped table is what the settings build
