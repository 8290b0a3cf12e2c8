"""Sites, ensemble summaries and the per-candidate descriptor row."""

from __future__ import annotations

import math

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import AllChem

from redoxfront import columns
from redoxfront.descriptors import (
    DescriptorSettings,
    descriptor_columns,
    descriptors_for_candidate,
    sites_from_mapping,
)
from redoxfront.descriptors.ensemble import boltzmann_weights, summarise
from redoxfront.descriptors.sites import match_sites
from redoxfront.engine.records import CandidateStates, ConformerResult, StateResult
from redoxfront.errors import SettingsError
from redoxfront.units import HARTREE_EV, HARTREE_KCAL_PER_MOL

# ---- sites ----------------------------------------------------------------------------


@pytest.mark.parametrize(
    "table,message",
    [
        ({"Bad-Name": {"smarts": "c"}}, r"\[sites.Bad-Name\] site names become column names"),
        ({"a": {"smarts": "c", "map_numbers": [1]}}, r"\[sites.a\] give exactly one of"),
        ({"a": {}}, r"\[sites.a\] give exactly one of"),
        ({"a": {"smarts": "c1cc"}}, r"\[sites.a\] smarts = 'c1cc' is not valid SMARTS"),
        ({"a": {"smarts": "cO", "atoms": [1, 3]}}, r"positions must be between 1 and 2"),
        ({"a": {"smarts": "cO", "atoms": [1, 2, 1]}}, r"give one position .* or two different"),
        ({"a": {"smarts": "c", "colour": 1}}, r"\[sites.a\] unknown key 'colour'"),
        ({"a": "c"}, r"\[sites.a\] expected a table"),
        ({"a": {"smarts": "c", "several_places": "all"}}, r"several_places = 'all' is not allowed; allowed values: refuse, min, max, mean"),
    ],
)
def test_site_settings_errors(table: dict, message: str) -> None:
    with pytest.raises(SettingsError, match=message):
        sites_from_mapping(table)


def test_symmetric_matches_count_once_and_ambiguous_ones_get_a_reason() -> None:
    sites = sites_from_mapping({
        "methoxy": {"smarts": "c-O[CH3]", "atoms": [1, 2]},
        "ring_ch": {"smarts": "[cH]", "atoms": [1]},
        "amine": {"smarts": "N"},
        "mapped": {"map_numbers": [7, 8]},
    })
    para = Chem.AddHs(Chem.MolFromSmiles("COc1ccc(OC)cc1"))
    found = match_sites(para, sites)
    # 1,4-dimethoxybenzene: both methoxy groups and all four ring CH are equivalent
    assert found["methoxy"].found and found["methoxy"].atoms == (2, 1)
    assert found["ring_ch"].found and found["ring_ch"].is_bond is False
    assert found["amine"].reason == "site amine: SMARTS N does not match"
    assert found["mapped"].reason == "site mapped: no atom with map number 7"
    meta = Chem.AddHs(Chem.MolFromSmiles("COc1cccc(OC)c1"))
    assert "matches 3 non-equivalent places" in str(match_sites(meta, sites)["ring_ch"].reason)
    mapped = Chem.AddHs(Chem.MolFromSmiles("[CH3:8][O:7]c1ccccc1"))
    assert match_sites(mapped, sites)["mapped"].atoms == (1, 0)


# ---- ensembles ----------------------------------------------------------------------------

def test_boltzmann_weights_and_window() -> None:
    de = np.array([0.0, 0.5, 4.0]) / HARTREE_KCAL_PER_MOL
    ens = boltzmann_weights(-100.0 + de, window_kcal_per_mol=3.0, temperature_k=298.15)
    # RT at 298.15 K = 0.5925 kcal/mol (R = 1.98720 cal/(mol K), CODATA):
    # weight ratio exp(-0.5 / 0.5925) = 0.4300; the 4 kcal/mol conformer is outside 3
    assert ens.used.tolist() == [0, 1]
    assert ens.weights[1] / ens.weights[0] == pytest.approx(math.exp(-0.5 / 0.59248), rel=1e-3)
    s = summarise(np.array([1.0, 2.0, 50.0]), ens)
    assert s["min"] == 1.0 and s["max"] == 2.0
    assert s["mean"] == pytest.approx((1.0 + 2.0 * 0.43007) / 1.43007, rel=1e-3)
    nan_first = summarise(np.array([np.nan, 2.0, 50.0]), ens)
    assert nan_first == {"mean": 2.0, "min": 2.0, "max": 2.0}


# ---- per-candidate row ----------------------------------------------------------------------

SMILES = "COc1ccc(OC)cc1C(C)(C)C"


def _states(with_spin: bool = True) -> tuple[Chem.Mol, CandidateStates]:
    mol = Chem.AddHs(Chem.MolFromSmiles(SMILES))
    AllChem.EmbedMultipleConfs(mol, 3, randomSeed=7)
    AllChem.MMFFOptimizeMoleculeConfs(mol)
    n = mol.GetNumAtoms()
    spin = np.zeros(n)
    spin[[2, 5]] = 0.5

    def conf(k: int, e: float, vert: dict[str, float], charge: float, s: np.ndarray | None) -> ConformerResult:
        return ConformerResult(mol.GetConformer(k).GetPositions(), e, np.full(n, charge),
                               -0.40, -0.10, np.array([0.2, 0.0, 0.0]), 10, True, k, vert, s)

    dis = StateResult("discharged", 0, 0, tuple(conf(k, -40.0 + 0.001 * k, {"charged": -39.69}, 0.0, None)
                                                  for k in range(3)))
    chg = StateResult("charged", 1, 1, tuple(conf(k, -39.70 + 0.01 * k, {"discharged": -39.99}, 0.1,
                                                  spin if with_spin else None) for k in range(3)))
    return mol, CandidateStates("c1", SMILES, {"discharged": dis, "charged": chg})


SITES = {
    "tbu": {"smarts": "c-C(C)(C)C", "atoms": [1, 2]},
    "methoxy": {"smarts": "c-O[CH3]", "atoms": [1, 2]},
    "amine": {"smarts": "[NX3]", "atoms": [1]},
}


def test_row_has_every_column_and_reasons() -> None:
    mol, cs = _states()
    row = descriptors_for_candidate(mol, cs, SITES, {"energy_window_kcal_per_mol": 3.0})
    assert list(row) == descriptor_columns(SITES)
    # 2 bond sites x 11 quantities, 1 atom site x 5, 2 global, 2 states x 4; x 3 statistics;
    # plus 2 conformer counts, the reorganisation energy and the notes
    assert len(row) == (2 * 11 + 5 + 2 + 2 * 4) * 3 + 4
    # t-Bu Sterimol close to Verloop's idealised 4.11 / 2.77 / 3.17 (Verloop 1976) on MMFF
    assert row["sterimol_l_angstrom_tbu_mean"] == pytest.approx(4.11, abs=0.2)
    assert row["sterimol_b1_angstrom_tbu_mean"] == pytest.approx(2.77, abs=0.2)
    assert row["sterimol_b5_angstrom_tbu_mean"] == pytest.approx(3.17, abs=0.2)
    assert row["sterimol_l_angstrom_tbu_min"] <= row["sterimol_l_angstrom_tbu_mean"] <= row[
        "sterimol_l_angstrom_tbu_max"]
    # two methoxy groups are not equivalent next to a t-Bu: reason, empty values
    assert "site methoxy: SMARTS c-O[CH3] matches 2 non-equivalent places" in row["descriptor_notes"]
    assert "site amine: SMARTS [NX3] does not match" in row["descriptor_notes"]
    assert math.isnan(row["buried_volume_percent_methoxy_mean"])
    # charged conformers at +0, +6.3, +12.6 kcal/mol: only the first is in a 3 kcal/mol window
    assert row[columns.conformers_used_column("charged")] == 1.0
    assert row[columns.conformers_used_column("discharged")] == 3.0
    assert 40.0 < row["buried_volume_percent_tbu_mean"] < 90.0
    assert row["partial_charge_e_tbu_charged_mean"] == pytest.approx(0.1)
    assert row["spin_density_max_carbon_mean"] == pytest.approx(0.5)
    assert row["spin_exposure_angstrom2_mean"] > 0.0
    assert row["homo_lumo_gap_ev_discharged_mean"] == pytest.approx(0.30 * HARTREE_EV)
    # 0.2 e*bohr = 0.508 D (CODATA-derived conversion)
    assert row["dipole_debye_discharged_mean"] == pytest.approx(0.2 * 2.541746, rel=1e-6)
    # lowest discharged (src 0) with charged src 0: (-39.69 + 39.70) + (-39.99 + 40.00) Eh
    assert row[columns.REORGANISATION_ENERGY] == pytest.approx(0.02 * HARTREE_EV, abs=1e-6)


def test_missing_spin_and_state_are_reasons_not_errors() -> None:
    mol, cs = _states(with_spin=False)
    row = descriptors_for_candidate(mol, cs, {"tbu": SITES["tbu"]}, None)
    assert "no spin densities stored for the charged state" in row["descriptor_notes"]
    assert math.isnan(row["spin_density_tbu_mean"])
    only = CandidateStates("c1", SMILES, {"discharged": cs.states["discharged"]})
    row = descriptors_for_candidate(mol, only, {"tbu": SITES["tbu"]}, None)
    assert "no charged conformers; steric descriptors empty" in row["descriptor_notes"]
    row = descriptors_for_candidate(mol, only, {"tbu": SITES["tbu"]},
                                    {"geometry_state": "discharged"})
    assert row["sterimol_b5_angstrom_tbu_mean"] == pytest.approx(3.17, abs=0.2)
    wrong = Chem.AddHs(Chem.MolFromSmiles("c1ccccc1"))
    row = descriptors_for_candidate(wrong, cs, {"tbu": SITES["tbu"]}, None)
    assert "has 32 atoms, the molecule 12" in row["descriptor_notes"]


def test_descriptor_settings_are_validated() -> None:
    with pytest.raises(SettingsError, match=r"\[descriptors\] sterimol_radii = 'uff' is not allowed"):
        descriptors_for_candidate(Chem.MolFromSmiles("C"), CandidateStates("x", "C"), {},
                                  {"sterimol_radii": "uff"})
    assert DescriptorSettings().buried_volume_sphere_radius_angstrom == 3.5  # common setting


def _two_methoxy_places(how: str):
    mol, cs = _states()
    places = sorted({m[:2] for m in mol.GetSubstructMatches(Chem.MolFromSmarts("c-O[CH3]"))})
    assert len(places) == 2
    for n, (c, o) in enumerate(places):
        mol.GetAtomWithIdx(c).SetAtomMapNum(2 * n + 1)
        mol.GetAtomWithIdx(o).SetAtomMapNum(2 * n + 2)
    sites = {
        "methoxy": {"smarts": "c-O[CH3]", "atoms": [1, 2], "several_places": how},
        "place_a": {"map_numbers": [1, 2]},
        "place_b": {"map_numbers": [3, 4]},
    }
    return places, descriptors_for_candidate(mol, cs, sites, {"energy_window_kcal_per_mol": 3.0})


_SITE_CHECKS = [("buried_volume_percent", None), ("sasa_angstrom2", None), ("sterimol_b1_angstrom", None),
                ("sterimol_l_angstrom", None), ("ring_clearance_angstrom", None), ("spin_density", None),
                ("partial_charge_e", "charged")]


@pytest.mark.parametrize("how", ["min", "max"])
def test_several_places_min_max_take_every_descriptor_from_one_place(how: str) -> None:
    """Issue 11: 'min' picks ONE place per site (the least buried by Boltzmann-mean percent
    buried volume; 'max' the most buried) and every descriptor of the site comes from it,
    checked against the same two places named one by one with atom-map numbers."""
    places, row = _two_methoxy_places(how)

    def col(q: str, site: str, state: str | None, stat: str) -> float:
        return row[columns.descriptor_column(q, site, state, stat)]

    va, vb = col("buried_volume_percent", "place_a", None, "mean"), col("buried_volume_percent", "place_b", None, "mean")
    assert va != pytest.approx(vb, abs=0.5)  # the two places really differ
    chosen = "place_a" if (va < vb) == (how == "min") else "place_b"
    for q, state in _SITE_CHECKS:
        for stat in ("mean", "min", "max"):
            # common practice, no source: every descriptor of one site from one and the same place
            assert col(q, "methoxy", state, stat) == pytest.approx(col(q, chosen, state, stat), rel=1e-9, abs=1e-12), (q, stat)
    place = places[0] if chosen == "place_a" else places[1]
    assert (f"site methoxy: 2 non-equivalent places; several_places = '{how}' took the "
            f"{'least' if how == 'min' else 'most'} buried one (atoms {place[0] + 1}, {place[1] + 1}") in row["descriptor_notes"]


def test_several_places_mean_averages_each_place() -> None:
    # the Boltzmann mean is linear, so the mean over places of the means equals the mean of
    # the per-conformer means (definition)
    _places, row = _two_methoxy_places("mean")
    assert "site methoxy: mean over 2 non-equivalent places" in row["descriptor_notes"]
    for q, state in _SITE_CHECKS:
        def col(site: str) -> float:
            return row[columns.descriptor_column(q, site, state, "mean")]
        assert col("methoxy") == pytest.approx(0.5 * (col("place_a") + col("place_b")), rel=1e-9, abs=1e-12), q


def test_site_surface_is_the_atoms_share_of_the_whole_molecule_surface() -> None:
    from redoxfront.descriptors.sterimol import vdw_radii
    from redoxfront.descriptors.surface import atom_sasa

    mol, cs = _states()
    row = descriptors_for_candidate(mol, cs, {"tbu": SITES["tbu"]}, None)
    centre = mol.GetSubstructMatch(Chem.MolFromSmarts("c-C(C)(C)C"))[0]
    whole = atom_sasa(cs.states["charged"].conformers[0].positions_angstrom, vdw_radii(mol, "bondi"))
    # Shrake & Rupley, J. Mol. Biol. 1973, 79, 351: the site's area is its atom's term of the
    # molecule's surface (one charged conformer in the window), the same surface the spin
    # exposure sums: sum over atoms of spin x area
    assert row["sasa_angstrom2_tbu_mean"] == pytest.approx(whole[centre], abs=1e-9)
    spin = cs.states["charged"].conformers[0].spin_density
    assert row["spin_exposure_angstrom2_mean"] == pytest.approx(float(spin @ whole), abs=1e-9)


def test_an_element_without_a_radius_empties_the_steric_values_with_a_reason() -> None:
    mol = Chem.AddHs(Chem.MolFromSmiles("C[Ge](C)(C)c1ccc(C(C)(C)C)cc1"))
    AllChem.EmbedMolecule(mol, randomSeed=3)
    x = mol.GetConformer().GetPositions()
    n = mol.GetNumAtoms()
    spin = np.zeros(n)
    spin[5] = 1.0

    def state(name: str, charge: int, uhf: int) -> StateResult:
        return StateResult(name, charge, uhf, (ConformerResult(x, -50.0, np.zeros(n), -0.4, -0.1, np.zeros(3), 5,
                                                                True, 0, {}, spin if uhf else None),))

    cs = CandidateStates("ge", "C[Ge](C)(C)c1ccc(C(C)(C)C)cc1",
                         {"discharged": state("discharged", 0, 0), "charged": state("charged", 1, 1)})
    row = descriptors_for_candidate(mol, cs, {"tbu": SITES["tbu"]}, None)
    # common practice, no source: an element outside the radii table (germanium here) gets a reason
    # and empty steric values, never a guessed radius
    assert "no van der Waals radius for element Ge" in row["descriptor_notes"]
    assert math.isnan(row["buried_volume_percent_tbu_mean"]) and math.isnan(row["sterimol_b5_angstrom_tbu_mean"])
    assert math.isnan(row["spin_exposure_angstrom2_mean"])
    assert row["spin_density_max_carbon_mean"] == pytest.approx(1.0)  # needs no radius
