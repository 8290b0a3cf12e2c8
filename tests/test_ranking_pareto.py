"""Pareto ranking: non-dominated ranks, crowding, knee and hypervolume (small invented tables only)."""

from __future__ import annotations

import itertools

import numpy as np
import paretoset
import pytest

from redoxfront.errors import DataError
from redoxfront.ranking import pareto as P


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


def test_first_front_of_many_3d_points_agrees_with_paretoset():
    """Above 5,000 points in 3-D the first front is found from a seed set; same mask."""
    rng = np.random.default_rng(21)
    v = rng.normal(2.8, 0.3, 12_000)  # an invented trade-off, and a coarse grid with many ties
    for p in (np.c_[v, -1.2 * v + rng.normal(0, 0.8, len(v)), -rng.uniform(150, 600, len(v))],
              rng.integers(0, 12, size=(9_000, 3)).astype(float)):
        # paretoset (PyPI, test-only cross-check): non-dominated rows, duplicates kept
        ref = paretoset.paretoset(p, sense=["max"] * 3, distinct=False)
        np.testing.assert_array_equal(P.first_front_mask(p), ref)
        np.testing.assert_array_equal(P.first_front_mask(p), P.non_dominated_ranks(p) == 1)
