"""Tests of Kennard-Stone training-set design."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import cdist, pdist, squareform

from redoxfront import columns
from redoxfront.errors import DataError
from redoxfront.statistics.training_set import (
    choose_training_for_campaign,
    choose_training_set,
    design_training_set,
    kennard_stone,
    kennard_stone_split,
    standardise,
)


@pytest.fixture()
def cloud() -> np.ndarray:
    return np.random.default_rng(4).normal(size=(40, 3))


def test_first_two_picks_are_the_most_distant_pair(cloud):
    picks = kennard_stone(cloud, 6)
    D = squareform(pdist(cloud))
    i, j = np.unravel_index(np.argmax(D), D.shape)
    # Kennard & Stone, Technometrics 1969, 11, 137: start from the two most distant points
    assert set(picks[:2]) == {int(i), int(j)}
    assert len(picks) == len(set(picks)) == 6


def test_each_next_pick_maximises_the_min_distance(cloud):
    picks = kennard_stone(cloud, 10)
    for step in range(2, 10):
        chosen = picks[:step]
        rest = [r for r in range(len(cloud)) if r not in chosen]
        mind = cdist(cloud[rest], cloud[chosen]).min(axis=1)
        # Kennard & Stone 1969: the next point is the one farthest from its nearest chosen point
        assert picks[step] == rest[int(np.argmax(mind))]


def test_forced_in_first_and_forced_out_never(cloud):
    D = squareform(pdist(cloud))
    i, j = np.unravel_index(np.argmax(D), D.shape)
    a, b = [r for r in range(len(cloud)) if r not in (i, j)][:2]
    picks = kennard_stone(cloud, 8, forced_in=[b, a], forced_out=[int(i), int(j)])
    assert picks[:2] == [b, a]
    assert int(i) not in picks and int(j) not in picks
    assert len(picks) == 8
    with pytest.raises(DataError, match="both forced in and forced out"):
        kennard_stone(cloud, 5, forced_in=[1], forced_out=[1])
    with pytest.raises(DataError, match="only 38 candidates can be chosen"):
        kennard_stone(cloud, 39, forced_out=[0, 1])
    with pytest.raises(DataError, match="2 are forced in"):
        kennard_stone(cloud, 1, forced_in=[0, 1])


def test_table_design_standardises_and_skips_bad_rows():
    rng = np.random.default_rng(8)
    t = pd.DataFrame({
        "id": [f"c{i}" for i in range(30)],
        "status": ["ok"] * 28 + ["failed: no conformer", "ok"],
        "sterimol_b1": rng.normal(size=30),
        "potential_uncalibrated_v_vs_fc": rng.normal(size=30),
        "constant_col": 1.0,
    })
    t.loc[29, "sterimol_b1"] = np.nan
    d = design_training_set(t, 7, forced_in=["c3"], forced_out=["c4"])
    assert d.picks[0] == "c3" and "c4" not in d.picks and len(d.picks) == 7
    assert d.skipped_rows == ("c28", "c29")
    assert d.skipped_columns == ("constant_col",)
    # z-scoring: multiplying a column by 1000 does not change the picks
    t2 = t.copy()
    t2["sterimol_b1"] *= 1000.0
    assert choose_training_set(t2, 7, ["c3"], ["c4"]) == list(d.picks)
    # explicit columns
    one = choose_training_set(t, 2, columns=["sterimol_b1"])
    ok = t[t.status.eq("ok") & t.sterimol_b1.notna()]
    assert set(one) == {ok.loc[ok.sterimol_b1.idxmin(), "id"], ok.loc[ok.sterimol_b1.idxmax(), "id"]}
    with pytest.raises(DataError, match="forced id\\(s\\) zz not in the table"):
        choose_training_set(t, 3, forced_in=["zz"])
    with pytest.raises(DataError, match="have failed status or missing descriptors"):
        choose_training_set(t, 3, forced_in=["c28"])
    with pytest.raises(DataError, match="not in the table; check the names"):
        choose_training_set(t, 3, columns=["sterimol_b5"])


def test_split_sizes_and_standardise(cloud):
    train, test = kennard_stone_split(cloud, 0.25)
    assert len(train) == 30 and len(test) == 10
    assert set(train).isdisjoint(test) and set(train) | set(test) == set(range(40))
    Z = standardise(cloud * [1, 10, 100])
    np.testing.assert_allclose(Z.std(axis=0), 1.0)
    np.testing.assert_allclose(Z.mean(axis=0), 0.0, atol=1e-12)
    with pytest.raises(DataError, match="no test rows"):
        kennard_stone_split(cloud[:3], 0.1)


def _invented_campaign(folder, *descriptors: str) -> None:
    """A campaign folder whose descriptor table holds 12 invented rows of random descriptors."""
    (folder / "results").mkdir()
    rng = np.random.default_rng(1)
    table = {"id": [f"dmb-{i}" for i in range(12)], "status": "ok"}
    table.update({name: rng.normal(size=12) for name in descriptors})
    pd.DataFrame(table).to_csv(folder / "results" / "descriptors.csv", index=False)
    (folder / "campaign.toml").write_text('name = "invented"\n')


def test_campaign_writes_picks(tmp_path):
    _invented_campaign(tmp_path, "sterimol_l", "buried_volume_percent")
    d = choose_training_for_campaign(tmp_path, 4, forced_in=["dmb-0"])
    out = pd.read_csv(tmp_path / "results" / "training_picks.csv")
    assert out[columns.ID].tolist() == list(d.picks)
    assert out[columns.PICK_ORDER].tolist() == [1, 2, 3, 4]
    assert out["forced_in"].tolist() == [True, False, False, False]


def test_cli_choose_training(tmp_path):
    from click.testing import CliRunner

    from redoxfront.cli import main

    _invented_campaign(tmp_path, "sterimol_l", "sterimol_b1")
    r = CliRunner().invoke(main, ["choose-training", str(tmp_path), "--count", "3", "--made", "dmb-5",
                                  "--skip", "dmb-1", "--columns", "sterimol_l,sterimol_b1"])
    assert r.exit_code == 0, r.output
    assert "  1  dmb-5  (made)" in r.output
    assert r.output.count("dmb-") == 3
    r = CliRunner().invoke(main, ["choose-training", str(tmp_path), "--count", "3", "--made", "nope"])
    assert r.exit_code == 2 and "forced id(s) nope not in the table" in r.output


def test_default_columns_are_descriptors_only_and_errors_name_the_cause():
    """Issue 11: without --columns the design spanned wall time, gradient calls and an empty
    counterion column; the error then blamed 'constant' columns."""
    rng = np.random.default_rng(3)
    n = 12
    t = pd.DataFrame({
        "id": [f"c{i}" for i in range(n)], "status": "ok", "smiles": "C",
        "sterimol_b1_site_mean": rng.normal(size=n), "potential_uncalibrated_v_vs_fc": rng.normal(size=n),
        "wall_time_s": rng.uniform(1, 9, n), "gradient_calls": rng.integers(10, 90, n),
        "engine_time_s": rng.uniform(1, 9, n), "heavy_atoms": rng.integers(8, 20, n),
        "counterions": np.nan, "n_conformers_used_charged": 2, "solubility_mol_per_l": rng.uniform(0.1, 1, n),
        "price_eur_per_g": rng.uniform(1, 9, n),
    })
    from redoxfront.statistics.training_set import default_design_columns

    # common practice, no source: only properties of the molecule span its descriptor space
    assert default_design_columns(t, input_columns=["price_eur_per_g"]) == [
        "sterimol_b1_site_mean", "potential_uncalibrated_v_vs_fc"]
    d = design_training_set(t, 4, input_columns=["price_eur_per_g"])
    assert d.columns == ("sterimol_b1_site_mean", "potential_uncalibrated_v_vs_fc") and d.skipped_rows == ()
    t["sterimol_b5_site_mean"] = np.nan
    t.loc[0, "sterimol_b5_site_mean"] = 1.0
    with pytest.raises(DataError, match=r"only 1 of 12 computed candidates have a value in every chosen column \(4 picks asked for\); the emptiest: "
                                        r"'sterimol_b5_site_mean' \(92% empty\)"):
        design_training_set(t, 4, input_columns=["price_eur_per_g"])
    with pytest.raises(DataError, match=r"every chosen column \(heavy_atoms\) is constant over the 12 usable"):
        design_training_set(t.assign(heavy_atoms=10), 4, columns_=["heavy_atoms"])
