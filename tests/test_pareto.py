"""Pareto ranking under uncertainty: ranks, crowding, knee, hypervolume, probabilities,
picks and the campaign step (small invented tables only)."""

from __future__ import annotations

import itertools
import json

import numpy as np
import pandas as pd
import paretoset
import pytest
from click.testing import CliRunner

from redoxfront import columns as col
from redoxfront import pareto as P
from redoxfront import pareto_uncertainty as U
from redoxfront import ranking as R
from redoxfront.campaign import section_from_mapping
from redoxfront.errors import DataError, SettingsError


def brute_ranks(p: np.ndarray) -> np.ndarray:
    """O(n^2) reference: peel fronts with a full dominance matrix."""
    dom = np.array([[np.all(a >= b) and np.any(a > b) for a in p] for b in p])  # [i, j]: j dom i
    ranks = np.zeros(len(p), dtype=int)
    left = np.ones(len(p), dtype=bool)
    r = 0
    while left.any():
        r += 1
        now = left & ~(dom & left[None, :]).any(axis=1)
        ranks[now] = r
        left &= ~now
    return ranks


def brute_front_counts(draws: np.ndarray) -> np.ndarray:
    """draws (m, D, n) -> how often each point is non-dominated, by full pairwise tests."""
    x = np.moveaxis(draws, 0, 2)
    out = np.zeros(x.shape[1], dtype=int)
    for d in range(x.shape[0]):
        out += ~P.dominates(x[d][None, :, :], x[d][:, None, :]).any(axis=1)
    return out


@pytest.mark.parametrize("m", [1, 2, 3, 4])
def test_ranks_equal_brute_force_on_random_sets(m):
    rng = np.random.default_rng(100 + m)
    for trial in range(12):
        n = int(rng.integers(1, 120))
        p = rng.integers(0, 5, size=(n, m)).astype(float) if trial % 2 else rng.normal(size=(n, m))
        ranks = P.non_dominated_ranks(p)
        # Deb et al., IEEE TEC 2002, 6, 182: fronts by repeated removal of non-dominated points
        np.testing.assert_array_equal(ranks, brute_ranks(p))
        np.testing.assert_array_equal(P.first_front_mask(p), ranks == 1)


@pytest.mark.parametrize("m", [2, 3])
def test_first_front_agrees_with_paretoset(m):
    rng = np.random.default_rng(7 + m)
    for trial in range(6):
        p = rng.integers(0, 8, size=(200, m)).astype(float) if trial % 2 else rng.random((300, m))
        # paretoset (PyPI, test-only cross-check): mask of non-dominated rows, duplicates kept
        ref = paretoset.paretoset(p, sense=["max"] * m, distinct=False, use_numba=False)
        np.testing.assert_array_equal(P.non_dominated_ranks(p) == 1, ref)
        # mixed directions: minimise the last objective
        sense = ["max"] * (m - 1) + ["min"]
        ref2 = paretoset.paretoset(p, sense=sense, distinct=False, use_numba=False)
        mine = P.first_front_mask(P.to_maximisation(p, [True] * (m - 1) + [False]))
        np.testing.assert_array_equal(mine, ref2)


def test_ranks_of_a_hand_example_and_bad_input():
    p = np.array([[3, 3], [2, 2], [1, 1], [3, 3], [1, 4], [0, 0]], dtype=float)
    np.testing.assert_array_equal(P.non_dominated_ranks(p), [1, 2, 3, 1, 1, 4])
    with pytest.raises(DataError, match="row 1 holds a missing or infinite value"):
        P.non_dominated_ranks(np.array([[1.0, 2.0], [np.nan, 1.0]]))


def test_ranks_scale_to_many_points():
    rng = np.random.default_rng(3)
    p = rng.normal(size=(20_000, 3))
    r = P.non_dominated_ranks(p)
    sub = rng.choice(len(p), 300, replace=False)
    # a point's rank is 1 + the highest rank among the points that dominate it
    for i in sub[:60]:
        doms = P.dominates(p, p[i])
        assert r[i] == (r[doms].max() + 1 if doms.any() else 1)


def test_crowding_distance_hand_example():
    # Deb et al. 2002: boundary points infinite, inner ones the normalised neighbour gaps
    p = np.array([[1, 4], [2, 3], [3, 2], [4, 1], [0, 0]], dtype=float)
    d = P.crowding_distance(p, P.non_dominated_ranks(p))
    assert np.isinf(d[[0, 3, 4]]).all()
    assert d[1] == pytest.approx(2 / 3 + 2 / 3)
    assert d[2] == pytest.approx(4 / 3)


def test_knee_point():
    # Das, Struct. Optim. 1999, 18, 107: farthest from the line through the extremes
    front = np.array([[0.0, 1.0], [0.3, 0.97], [0.9, 0.9], [0.97, 0.3], [1.0, 0.0]])
    assert P.knee_point(front) == 2
    assert P.knee_point(front[[0]]) == 0
    with pytest.raises(DataError, match="front is empty"):
        P.knee_point(np.empty((0, 2)))


def _union_volume(points: np.ndarray, ref: np.ndarray) -> float:
    """Inclusion-exclusion over all subsets of boxes [ref, p] (tiny sets only)."""
    total = 0.0
    n = len(points)
    for size in range(1, n + 1):
        for sub in itertools.combinations(range(n), size):
            corner = points[list(sub)].min(axis=0)
            total += (-1) ** (size + 1) * np.prod(np.clip(corner - ref, 0, None))
    return float(total)


def test_hypervolume_hand_example_2d():
    # (1,3), (2,2), (3,1) above (0,0): 3 + 2 + 1 (from memory: the staircase area)
    pts = np.array([[1, 3], [2, 2], [3, 1]], dtype=float)
    assert P.hypervolume(pts, [0, 0]) == pytest.approx(6.0)
    assert P.hypervolume(pts, [5, 5]) == 0.0
    with pytest.raises(DataError, match="reference point has 3 values"):
        P.hypervolume(pts, [0, 0, 0])


@pytest.mark.parametrize("m", [2, 3, 4])
def test_hypervolume_equals_inclusion_exclusion(m):
    rng = np.random.default_rng(20 + m)
    for _ in range(10):
        pts = rng.random((int(rng.integers(1, 8)), m))
        ref = np.full(m, 0.1)
        assert P.hypervolume(pts, ref) == pytest.approx(_union_volume(np.maximum(pts, ref), ref), rel=1e-9, abs=1e-12)


def test_hypervolume_3d_flat_equals_2d_times_height():
    rng = np.random.default_rng(5)
    pts = rng.random((60, 2))
    flat = np.c_[pts, np.full(60, 2.0)]
    assert P.hypervolume(flat, [0, 0, 0.5]) == pytest.approx(1.5 * P.hypervolume(pts, [0, 0]))


def test_dominating_certain_point_has_probability_one_and_dominated_zero():
    mean = np.array([[2.0, 2.0, 2.0], [1.0, 1.0, 1.0], [1.2, 0.5, 1.5], [0.1, 1.9, 1.0]])
    low = mean.copy()
    high = mean.copy()
    # uncertain dominated points, but never reaching the certain leader
    low[1:] -= 0.2
    high[1:] += 0.05
    p = U.front_probability(mean, low, high, n_draws=500, seed=1)
    assert p[0] == 1.0
    np.testing.assert_array_equal(p[1:], 0.0)


def test_zero_uncertainty_equals_first_front():
    rng = np.random.default_rng(9)
    mean = rng.integers(0, 6, size=(80, 3)).astype(float)
    p = U.front_probability(mean, mean, mean, n_draws=20, seed=0)
    np.testing.assert_array_equal(p, (P.non_dominated_ranks(mean) == 1).astype(float))


def test_identical_candidates_get_equal_probabilities():
    rng = np.random.default_rng(11)
    mean = rng.normal(size=(30, 3))
    mean[7] = mean[3]
    mean[20] = mean[3]
    hw = rng.uniform(0.1, 0.8, size=(30, 3))
    hw[7] = hw[3]
    hw[20] = hw[3]
    p = U.front_probability(mean, mean - hw, mean + hw, n_draws=400, seed=2)
    assert p[3] == p[7] == p[20]
    assert 0.0 < p.max() <= 1.0


def test_front_probability_is_seeded_and_matches_brute_force_statistically():
    rng = np.random.default_rng(13)
    mean = rng.normal(size=(40, 3))
    hw = rng.uniform(0.0, 0.6, size=(40, 3))
    a = U.front_probability(mean, mean - hw, mean + 0.5 * hw, n_draws=3000, seed=4)
    b = U.front_probability(mean, mean - hw, mean + 0.5 * hw, n_draws=3000, seed=4)
    np.testing.assert_array_equal(a, b)
    unc = U.Uncertain.from_interval(mean, mean - hw, mean + 0.5 * hw)
    ref = brute_front_counts(unc.draw(np.random.default_rng(99), 3000)) / 3000
    # two independent estimates: differences within ~4 standard errors (binomial)
    assert np.abs(a - ref).max() < 4 * np.sqrt(2 * 0.25 / 3000)


def test_front_counts_exact_against_pairwise_with_same_draws():
    rng = np.random.default_rng(17)
    for trial in range(8):
        n, m = int(rng.integers(2, 90)), int(rng.integers(2, 4))
        mean = rng.normal(size=(n, m)).round(1 if trial % 2 else 6)
        sd = rng.uniform(0.0, 0.4, size=(n, m))
        sd[:, trial % m] = 0.0  # one objective without uncertainty: ties happen
        sub = U.Uncertain(mean, sd, 1.5 * sd)
        fast = U._front_counts(sub, 120, np.random.default_rng(trial), 10**9, False)
        slow = brute_front_counts(sub.draw(np.random.default_rng(trial), 120))
        np.testing.assert_array_equal(fast, slow)


def test_front_probability_memory_budget_does_not_change_the_answer_much():
    rng = np.random.default_rng(21)
    mean = rng.normal(size=(200, 3))
    hw = np.full((200, 3), 0.3)
    big = U.front_probability(mean, mean - hw, mean + hw, 2000, 5)
    small = U.front_probability(mean, mean - hw, mean + hw, 2000, 5, element_budget=5_000)
    assert np.abs(big - small).max() < 4 * np.sqrt(2 * 0.25 / 2000)


def test_interval_must_hold_the_mean():
    m = np.array([[1.0, 1.0]])
    with pytest.raises(DataError, match=r"row 0, objective 1: interval \[1.5, 2.0\] does not hold the mean 1.0"):
        U.front_probability(m, np.array([[0.5, 1.5]]), np.array([[1.5, 2.0]]), 10, 0)


def test_suggestions_skip_measured_and_prefer_the_open_region():
    mean = np.array([[1.0, 1.0], [0.9, 0.9], [0.2, 2.0], [2.0, 0.2], [0.1, 0.1]])
    hw = np.full_like(mean, 0.1)
    measured = np.array([True, False, False, False, False])
    picks, gains = U.suggest_experiments(mean, mean - hw, mean + hw, measured, k=3, seed=3)
    assert 0 not in picks
    assert set(picks[:2]) == {2, 3}  # they open new area; 1 and 4 sit under the measured one
    assert np.all(np.diff(gains) <= 1e-12) and gains[0] > 0
    # everything dominated by what was measured: no gain, no pick
    p2, g2 = U.suggest_experiments(mean[[0, 1, 4]], mean[[0, 1, 4]], mean[[0, 1, 4]],
                                   np.array([True, False, False]), k=2, seed=0)
    assert len(p2) == 0 and len(g2) == 0


def test_ranking_settings_validation():
    s = section_from_mapping(R.RankingSettings, {"objectives": ["energy_density", "half_life", "molar_mass"]},
                             "ranking")
    assert s.objectives == ("energy_density", "half_life", "molar_mass")
    with pytest.raises(SettingsError, match="keep one of them"):
        section_from_mapping(R.RankingSettings, {"objectives": ["cell_voltage", "energy_density"]}, "ranking")
    with pytest.raises(SettingsError, match="unknown 'cost'"):
        section_from_mapping(R.RankingSettings, {"objectives": ["cost"]}, "ranking")
    with pytest.raises(SettingsError, match=r"\[ranking\] n_draws = 0 must be >= 1"):
        section_from_mapping(R.RankingSettings, {"n_draws": 0}, "ranking")


def _campaign(tmp_path, n=40, ranking="", cell='counter = "potential"\ncounter_potential_v = -2.0\n'):
    rng = np.random.default_rng(0)
    e = rng.normal(0.7, 0.2, n)
    lk = -2 + 1.5 * (e - 0.7) + rng.normal(0, 0.4, n)
    t = pd.DataFrame({
        col.ID: [f"inv{i:02d}" for i in range(n)], col.ROLE: "catholyte", col.N_ELECTRONS: 1,
        col.MOLAR_MASS: rng.uniform(180, 500, n).round(1),
        col.potential_calibrated("fc"): e, col.potential_calibrated_pi_low("fc"): e - 0.1,
        col.potential_calibrated_pi_high("fc"): e + 0.1,
        col.LOG10_K_PRED_FIRST: lk, col.LOG10_K_PRED_FIRST + col.PI_LOW_SUFFIX: lk - 0.5,
        col.LOG10_K_PRED_FIRST + col.PI_HIGH_SUFFIX: lk + 0.5,
        col.DOMAIN: ["extrapolating" if i % 5 == 0 else "inside" for i in range(n)],
    })
    t.loc[1, col.LOG10_K_PRED_FIRST] = np.nan
    (tmp_path / "results").mkdir()
    t.to_csv(tmp_path / "results" / "predictions.csv", index=False)
    pd.DataFrame({col.ID: ["inv02", "inv03"], col.LOG10_K_FIRST: [-2.0, -2.1]}).to_csv(
        tmp_path / "rates.csv", index=False)
    (tmp_path / "campaign.toml").write_text(
        'name = "invented"\n[inputs]\nmeasured_rates = "rates.csv"\n'
        f"[cell]\n{cell}[ranking]\nn_draws = 300\nn_suggestions = 3\n{ranking}", encoding="utf-8")
    return t


def test_rank_campaign_writes_tables_and_figures(tmp_path):
    from redoxfront.campaign import load_campaign

    _campaign(tmp_path)
    out = R.rank_campaign(load_campaign(tmp_path), progress=False)
    res = tmp_path / "results"
    ranking = pd.read_csv(res / "ranking.csv")
    picks = pd.read_csv(res / "picks.csv")
    summary = json.loads((res / "ranking_summary.json").read_text())
    assert len(ranking) == 40 == len(out)
    for c in (col.CELL_VOLTAGE, col.CAPACITY_VOL, col.CAPACITY_GRAV, col.ENERGY_DENSITY, col.HALF_LIFE,
              col.PARETO_RANK, col.P_FRONT, col.CROWDING, col.KNEE, col.EXTRAPOLATING):
        assert c in ranking.columns
    assert ranking[col.PARETO_RANK].iloc[0] == 1
    assert ranking[col.KNEE].sum() == 1 and summary["knee_id"] == ranking.loc[ranking[col.KNEE], col.ID].iloc[0]
    unranked = ranking[ranking[col.ID] == "inv01"].iloc[0]
    assert pd.isna(unranked[col.PARETO_RANK]) and "not ranked: no value for half_life" in unranked[col.RANKING_NOTE]
    assert len(picks) == 3 and not set(picks[col.ID]) & {"inv02", "inv03"}
    assert list(picks[col.PICK_ORDER]) == [1, 2, 3]
    assert col.EXTRAPOLATING in picks.columns
    # probability 1 only on the first front; ranks > 1 below 1
    ranked = ranking[ranking[col.PARETO_RANK].notna()]
    assert ranked.loc[ranked[col.PARETO_RANK] > 1, col.P_FRONT].max() < 1.0
    assert 0.0 < summary["hypervolume_fraction"] < 1.0
    assert summary["n_ranked"] == 39
    assert (res / "figures" / "front.png").stat().st_size > 10_000
    assert (res / "figures" / "objectives_pairwise.png").stat().st_size > 10_000


def test_rank_command(tmp_path):
    from redoxfront.cli import main

    _campaign(tmp_path, ranking='objectives = ["energy_density", "half_life", "molar_mass"]\n')
    result = CliRunner().invoke(main, ["rank", str(tmp_path), "--quiet"])
    assert result.exit_code == 0, result.output
    assert "first front" in result.output and "picks.csv" in result.output
    bad = tmp_path / "bad"
    bad.mkdir()
    _campaign(bad, cell='counter = "potential"\n')
    result = CliRunner().invoke(main, ["rank", str(bad)])
    assert result.exit_code == 2
    assert "needs counter_potential_v" in result.output


@pytest.mark.parametrize("m", [2, 3])
def test_dominated_by_any_and_large_fronts_with_ties(m):
    rng = np.random.default_rng(31 + m)
    targets = rng.integers(0, 12, size=(400, m)).astype(float)
    doms = rng.integers(0, 12, size=(300, m)).astype(float)
    brute = P.dominates(doms[None, :, :], targets[:, None, :]).any(axis=1)
    np.testing.assert_array_equal(P._dominated_by_any(targets, doms), brute)
    np.testing.assert_array_equal(P._dominated_by_any(targets, targets),
                                  ~paretoset.paretoset(targets, sense=["max"] * m, distinct=False, use_numba=False))
    # a large, anti-correlated set (most points on the front) through the sweep paths
    x = rng.random((3000, m - 1)).round(3)
    big = np.c_[x, 1.0 - x.sum(axis=1)]
    ref = paretoset.paretoset(big, sense=["max"] * m, distinct=False, use_numba=False)
    np.testing.assert_array_equal(P.first_front_mask(big), ref)


def test_suggestion_gains_match_hand_computed_volumes():
    # exact points (no uncertainty): box from 10 % below the worst to the best value;
    # (1, 2) alone covers 0.1 x 1.1 of the 1.1 x 1.1 box, then (2, 1) adds 0.1 x 1.0 (from memory:
    # box areas by hand)
    m = np.array([[1.0, 2.0], [2.0, 1.0]])
    picks, gains = U.suggest_experiments(m, m, m, np.array([False, False]), 3, seed=0)
    assert list(picks) == [0, 1]
    assert gains[0] == pytest.approx(0.11 / 1.21, abs=2e-3)
    assert gains[1] == pytest.approx(0.10 / 1.21, abs=2e-3)
    assert sum(gains) == pytest.approx(P.hypervolume(m, [0.9, 0.9]) / 1.21, abs=3e-3)


def test_knee_label_offset_stays_inside_the_axes():
    import matplotlib.pyplot as plt

    from redoxfront.rank_plots import _label_offset

    fig, ax = plt.subplots()
    ax.plot([0.0, 10.0], [0.0, 10.0])
    ax.set_xlim(0, 10)
    ax.set_ylim(0, 10)
    # common practice, no source: label on the side facing the middle of the axes
    assert _label_offset(ax, 9.5, 5.0) == (-14, 18, "right", "bottom")
    assert _label_offset(ax, 1.0, 9.5) == (12, -18, "left", "top")
    plt.close(fig)
