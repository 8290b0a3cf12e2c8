"""Pareto front under uncertainty: front probabilities and suggested experiments
(small invented tables only)."""

from __future__ import annotations

import numpy as np
import pytest

from redoxfront.errors import DataError
from redoxfront.ranking import pareto as P
from redoxfront.ranking import uncertainty as U


def brute_front_counts(draws: np.ndarray) -> np.ndarray:
    """draws (m, D, n) -> how often each point is non-dominated, by full pairwise tests."""
    x = np.moveaxis(draws, 0, 2)
    out = np.zeros(x.shape[1], dtype=int)
    for d in range(x.shape[0]):
        out += ~P.dominates(x[d][None, :, :], x[d][:, None, :]).any(axis=1)
    return out


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
