"""The fast tier and the funnel: single points at a force-field geometry, the tier line, the rule."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from redoxfront import columns as C
from redoxfront.campaign import ComputeSettings, ConformerSettings, load_campaign
from redoxfront.candidates.structures import parse_candidate
from redoxfront.compute.fast_tier import (
    FAST_ENTRY_PREFIX,
    FAST_GAP,
    FAST_HOMO,
    FAST_LUMO,
    FAST_STATUS,
    STRUCTURE_COLUMNS,
    FastJob,
    fast_tier_hash,
    fast_vertical_column,
    force_field_geometry,
    run_fast_tier,
)
from redoxfront.compute.funnel import (
    SELECTION_COLUMN,
    FunnelSettings,
    estimate_column,
    fit_tier_line,
    full_column,
    full_tier_top_kept,
    funnel_campaign,
    select,
    use_funnel,
)
from redoxfront.compute.step import compute_candidates
from redoxfront.compute.store import Store
from redoxfront.errors import SettingsError

QUICK = ConformerSettings(n_generate=2, refine_lowest=1)


def test_tier_line_interval_matches_statsmodels():
    import statsmodels.api as sm

    rng = np.random.default_rng(7)
    x = rng.uniform(0.3, 1.2, 12)
    y = 0.1 + 0.8 * x + rng.normal(0, 0.03, 12)
    line = fit_tier_line(x, y)
    new = np.array([0.2, 0.7, 1.5])
    est, low, high = line.predict(new)
    ref = sm.OLS(y, sm.add_constant(x)).fit().get_prediction(sm.add_constant(new, has_constant="add"))
    frame = ref.summary_frame(alpha=0.05)
    # statsmodels OLS prediction, obs_ci = 95 % prediction interval of a new observation
    assert est == pytest.approx(frame["mean"].to_numpy(), abs=1e-12)
    assert low == pytest.approx(frame["obs_ci_lower"].to_numpy(), abs=1e-10)
    assert high == pytest.approx(frame["obs_ci_upper"].to_numpy(), abs=1e-10)
    assert fit_tier_line(x[:2], y[:2]) is None  # common practice, no source: a line needs 3 points for an interval


def test_rule_takes_the_best_fraction_per_role_and_the_interval_rule_adds_overlaps():
    values = np.array([0.1, 0.9, 0.5, 0.8, 0.2, 0.3, 0.7, 0.4, 0.6, 0.0])
    nan = np.full(10, np.nan)
    top = select(values, nan, nan, "catholyte", FunnelSettings(fraction=0.2))
    assert list(np.flatnonzero(top)) == [1, 3]  # common practice, no source: the two highest of ten
    low = select(values, nan, nan, "anolyte", FunnelSettings(fraction=0.2))
    assert list(np.flatnonzero(low)) == [0, 9]  # an anolyte is better the lower its potential
    wide = select(values, values - 0.15, values + 0.15, "catholyte",
                  FunnelSettings(fraction=0.2, rule="interval_reaches_cut"))
    # cut = 0.8 (the second best); upper ends 0.75 (0.6) and 0.85 (0.7) and above reach it
    assert list(np.flatnonzero(wide)) == [1, 3, 6]
    kept, n_top = full_tier_top_kept(values, values[::-1], "catholyte", 0.2)
    assert (kept, n_top) == (0, 1)  # a reversed order keeps none of the best


def test_fast_tier_vertical_potential_lies_above_the_adiabatic_one_and_is_stored(tmp_path):
    settings = ComputeSettings(conformers=QUICK, workers=1)
    cands = [parse_candidate({"id": i, "smiles": s}, n, settings)
             for n, (i, s) in enumerate([("dmb", "COc1ccc(OC)cc1"), ("xyl", "Cc1ccc(C)cc1")])]
    jobs = [FastJob.of(c) for c in cands]
    store = tmp_path / "s.sqlite"
    first = {r.id: r for r in run_fast_tier(jobs, settings, str(store))}
    full, _ = compute_candidates(cands, settings, store, workers=1, progress=False, describe=False)
    col = fast_vertical_column("fc")
    for o in full:
        fast = first[o.candidate.id].row
        assert fast[FAST_STATUS] == "ok"
        # common practice, no source: a vertical ionisation costs at least the adiabatic one
        # (the cation relaxes downhill), so the vertical potential of a catholyte is higher;
        # the gap is the cation's relaxation energy, a few tenths of an eV for such arenes (from memory)
        gap = fast[col] - o.row[C.potential_uncalibrated("fc")]
        assert 0.0 < gap < 0.8
    dmb = first["dmb"].row
    # IUPAC 2021 standard atomic weights: C8H10O2 = 138.166 g/mol; 10 heavy atoms; RDKit's strict rotatable
    # bonds: the two aryl-O bonds (O-CH3 ends in a terminal methyl); TPSA: two ether oxygens x 9.23 A^2
    # (Ertl, Rohde & Selzer, J. Med. Chem. 2000, 43, 3714, Table 1)
    assert dmb[C.MOLAR_MASS] == pytest.approx(138.166, abs=0.01)
    assert (dmb[C.HEAVY_ATOMS], dmb[C.ROTATABLE_BONDS]) == (10, 2)
    assert dmb[C.TPSA] == pytest.approx(18.46, abs=0.01)
    assert dmb[FAST_GAP] == pytest.approx(dmb[FAST_LUMO] - dmb[FAST_HOMO]) and dmb[FAST_GAP] > 3.0
    with Store(store) as s:  # two single points per molecule, under the fast tier's own hash
        assert s.count(fast_tier_hash(settings)) == 4
        assert s.get("COc1ccc(OC)cc1", FAST_ENTRY_PREFIX + "charge=+1;unpaired=1", fast_tier_hash(settings))
    again = list(run_fast_tier(jobs, settings, str(store)))
    assert all(r.engine_seconds == 0.0 and not r.payloads for r in again)  # read back, nothing computed
    assert {r.id: r.row[col] for r in again} == pytest.approx({k: r.row[col] for k, r in first.items()})


def _campaign(tmp_path: Path, smiles: list[str], funnel: str) -> Path:
    (tmp_path / "inputs").mkdir(parents=True, exist_ok=True)
    rows = "\n".join(f"m{i},{s}" for i, s in enumerate(smiles))
    (tmp_path / "inputs" / "candidates.csv").write_text(f"id,smiles\n{rows}\n")
    (tmp_path / "campaign.toml").write_text(
        "[compute]\nrole = 'catholyte'\nworkers = 1\n"
        "[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n[funnel]\n" + funnel)
    return tmp_path


SERIES = ["c1ccccc1C", "Cc1ccc(C)cc1", "COc1ccccc1", "COc1ccc(C)cc1", "COc1ccc(OC)cc1", "Oc1ccccc1",
          "Cc1cc(C)cc(C)c1", "c1ccc2ccccc2c1"]


def test_funnel_computes_the_sample_and_the_selection_and_labels_both_tiers(tmp_path):
    folder = _campaign(tmp_path, SERIES, "threshold = 4\nfraction = 0.25\ncalibration_sample = 3\n")
    camp = load_campaign(folder)
    assert use_funnel(camp)  # 8 rows > threshold 4
    rep = funnel_campaign(camp, progress=False, describe=False)
    assert (rep.candidates, rep.fast_ok, rep.sampled) == (8, 8, 3)
    fast = pd.read_csv(folder / "results" / "fast_tier.csv")
    assert len(fast) == 8 and list(fast["id"]) == [f"m{i}" for i in range(8)]  # input order
    for name in fast.columns:  # every number says its tier, or comes from the structure graph (no tier)
        assert name in ("id", "canonical_smiles", "role", SELECTION_COLUMN, *STRUCTURE_COLUMNS) or name.startswith(
            ("fast_tier_", "full_tier_"))
    chosen = fast[SELECTION_COLUMN] != "not selected"
    table = pd.read_csv(folder / "results" / "descriptors.csv")
    assert sorted(table["id"]) == sorted(fast.loc[chosen, "id"])  # the full tier ran on exactly these
    assert fast.loc[chosen, full_column("fc")].notna().all() and fast.loc[~chosen, full_column("fc")].isna().all()
    # top 25 % of 8 = 2 by estimate, beside the 3 of the sample (overlaps counted once)
    assert 3 <= int(chosen.sum()) <= 5
    est, low, high = (fast[estimate_column("fc", b)] for b in (None, "low", "high"))
    assert ((low <= est) & (est <= high)).all()
    best = fast.loc[fast[estimate_column("fc")].idxmax(), "id"]
    assert best in set(table["id"])  # common practice, no source: the best estimate always goes on
    assert rep.lines["catholyte"]["fitted"] and rep.lines["catholyte"]["n"] == int(chosen.sum())
    # the default proxy: -HOMO of the catholyte (Koopmans, Physica 1934, 1, 104: IP ~ -HOMO),
    # one single point per molecule, so no vertical potential
    assert fast["fast_tier_orbital_proxy_ev"].to_numpy() == pytest.approx(-fast["fast_tier_homo_discharged_ev"].to_numpy())
    assert fast[fast_vertical_column("fc")].isna().all()
    with Store(folder / "cache.sqlite") as s:
        assert s.count(fast_tier_hash(camp.compute)) == 8
    # status counts both tiers: every candidate's fast-tier point, the full tier of the chosen
    from redoxfront.compute.status import compute_status

    st = compute_status(camp)
    assert len(st.fast_tier) == 8 and sorted(st.done) == sorted(table["id"]) and len(st.pending) == 8 - len(table)


def test_funnel_on_the_vertical_potential(tmp_path):
    folder = _campaign(tmp_path, SERIES[:5], "proxy = 'vertical'\nfraction = 0.2\ncalibration_sample = 3\n")
    rep = funnel_campaign(load_campaign(folder), progress=False, describe=False)
    fast = pd.read_csv(folder / "results" / "fast_tier.csv")
    assert fast[fast_vertical_column("fc")].notna().all()
    # common practice, no source: top 20 % of 5 is one candidate; with the sample of 3 at most 4 run
    assert 3 <= rep.full_computed <= 4


def test_funnel_settings_are_validated(tmp_path):
    folder = _campaign(tmp_path, SERIES[:2], "rule = 'best_guess'\n")
    with pytest.raises(SettingsError, match=r"\[funnel\] rule = 'best_guess' is not allowed"):
        funnel_campaign(load_campaign(folder), progress=False)
    folder2 = _campaign(tmp_path / "b", SERIES[:2], "")
    assert not use_funnel(load_campaign(folder2))  # 2 rows: below the default threshold of 2000


def test_run_on_a_library_above_the_threshold_goes_through_the_funnel(tmp_path):
    from redoxfront.pipeline import run_campaign

    (tmp_path / "inputs").mkdir()
    (tmp_path / "campaign.toml").write_text(
        'name = "funnel screen (invented)"\n'
        "[compute]\nworkers = 1\n[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n"
        "[library]\nscaffold = 'COc1ccc([*:1])cc1[*:2]'\noutput = 'inputs/candidates.csv'\n"
        "[library.substituents]\n1 = ['H', 'C', 'OC']\n2 = ['H', 'C']\n"
        "[funnel]\nthreshold = 4\nfraction = 0.2\ncalibration_sample = 3\n"
        "[cell]\ncounter = 'potential'\ncounter_potential_v = -1.8\n"
        "[ranking]\nobjectives = ['cell_voltage', 'molar_mass']\nn_draws = 50\nn_suggestions = 1\n",
        encoding="utf-8")
    lines: list[str] = []
    run_campaign(tmp_path, progress=False, echo=lines.append)
    funnel_line = next(line for line in lines if line.startswith("funnel"))
    # 3 x 2 = 6 library members > threshold 4; sample of 3, top 20 % of 6 = 2 more at most
    assert "fast tier: 6 of 6 candidates" in funnel_line and "threshold 4" in funnel_line
    fast = pd.read_csv(tmp_path / "results" / "fast_tier.csv")
    ranked = pd.read_csv(tmp_path / "results" / "ranking.csv")
    assert len(fast) == 6 and 3 <= len(ranked) <= 5
    assert set(ranked["id"]) == set(fast.loc[fast[SELECTION_COLUMN] != "not selected", "id"])


def test_force_field_geometry_adds_hydrogens_in_rdkit_order_with_sane_bonds():
    from rdkit import Chem

    mol = Chem.MolFromSmiles("COc1ccc(OC)cc1")
    mol_h = force_field_geometry(mol, seed=7)
    ref = Chem.AddHs(mol)
    assert [a.GetAtomicNum() for a in mol_h.GetAtoms()] == [a.GetAtomicNum() for a in ref.GetAtoms()]
    xyz = mol_h.GetConformer().GetPositions()
    lengths = {}
    for b in mol_h.GetBonds():
        pair = "".join(sorted(b.GetBeginAtom().GetSymbol() + b.GetEndAtom().GetSymbol()))
        kind = "arom" if b.GetIsAromatic() else pair
        lengths.setdefault(kind, []).append(np.linalg.norm(xyz[b.GetBeginAtomIdx()] - xyz[b.GetEndAtomIdx()]))
    # CRC Handbook of Chemistry and Physics, "Bond lengths in organic compounds": aromatic C-C 1.39 A,
    # C(sp3)-H 1.09-1.10 A, aryl C-O 1.36 A and alkyl C-O 1.43 A; 0.03 A is a force field's usual reach
    assert np.allclose(lengths["arom"], 1.39, atol=0.03)
    assert np.allclose(lengths["CH"], 1.09, atol=0.03)
    assert min(lengths["CO"]) == pytest.approx(1.36, abs=0.03) and max(lengths["CO"]) == pytest.approx(1.43, abs=0.03)
    again = force_field_geometry(mol, seed=7).GetConformer().GetPositions()
    assert np.array_equal(xyz, again)  # common practice, no source: one seed, one geometry
