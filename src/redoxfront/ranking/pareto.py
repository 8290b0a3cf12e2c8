"""Trade-off (Pareto) science on exact points: dominance, non-dominated ranks, crowding,
knee and hypervolume.

Every function here works on plain arrays of shape ``(n_candidates, n_objectives)``
in which **larger is better** in every column; :func:`to_maximisation` turns a mix of
maximised and minimised objectives into that form. Objectives with 95 % intervals
(probability of lying on the first front, next-experiment suggestions) are in
:mod:`redoxfront.ranking.uncertainty`; the campaign step that ranks a candidate table is
in :mod:`redoxfront.ranking.step`.

References
----------
- Deb, Pratap, Agarwal & Meyarivan, IEEE Trans. Evol. Comput. 2002, 6, 182 (fast
  non-dominated sorting, crowding distance).
- Chomicki, Godfrey, Gryz & Liang, Proc. ICDE 2003, 717 (presorted first-front filter).
- While, Hingston, Barone & Huband, IEEE Trans. Evol. Comput. 2006, 10, 29
  (hypervolume by slicing objectives).
- Das, Struct. Optim. 1999, 18, 107 (knee as the largest distance from the hyperplane
  through the extreme points).
"""

from __future__ import annotations

from bisect import bisect_left, bisect_right
from typing import Sequence

import numpy as np

from redoxfront.errors import DataError

DEFAULT_ELEMENT_BUDGET: int = 24_000_000
"""Largest temporary boolean array (elements) the dominance tests build at once."""


# ---------------------------------------------------------------------------------
# input helpers
# ---------------------------------------------------------------------------------
def _matrix(values: np.ndarray | Sequence[Sequence[float]], name: str = "objectives") -> np.ndarray:
    arr = np.asarray(values, dtype=float)
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise DataError(f"{name}: expected a table of shape (candidates, objectives), got {arr.shape}")
    if not np.all(np.isfinite(arr)):
        bad = int(np.argwhere(~np.isfinite(arr))[0, 0])
        raise DataError(f"{name}: row {bad} holds a missing or infinite value; drop or fill it first")
    return arr


def to_maximisation(values: np.ndarray, maximise: Sequence[bool]) -> np.ndarray:
    """Flip the sign of minimised objectives so that larger is better in every column."""
    arr = np.asarray(values, dtype=float)
    sign = np.where(np.asarray(maximise, dtype=bool), 1.0, -1.0)
    if arr.shape[-1] != sign.size:
        raise DataError(f"{arr.shape[-1]} objective columns but {sign.size} directions given")
    return arr * sign


def dominates(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """True where ``a`` Pareto-dominates ``b`` (>= in all objectives, > in one); broadcasts."""
    a = np.asarray(a)
    b = np.asarray(b)
    return np.all(a >= b, axis=-1) & np.any(a > b, axis=-1)


def _dominated_by_any(targets: np.ndarray, dominators: np.ndarray,
                      budget: int = DEFAULT_ELEMENT_BUDGET) -> np.ndarray:
    """True for each row of ``targets`` that some row of ``dominators`` dominates.

    Column-by-column comparisons over blocks of at most ``budget`` pairs.
    """
    n, m = targets.shape
    out = np.zeros(n, dtype=bool)
    f = len(dominators)
    if f == 0 or n == 0:
        return out
    if m == 2 and f > 64:
        # sorted sweep: some j has x0 >= t0 and x1 > t1, or x0 > t0 and x1 >= t1
        o = np.argsort(-dominators[:, 0], kind="stable")
        neg_x0 = -dominators[o, 0]
        best1 = np.maximum.accumulate(dominators[o, 1])
        n_ge = np.searchsorted(neg_x0, -targets[:, 0], side="right")
        n_gt = np.searchsorted(neg_x0, -targets[:, 0], side="left")
        top_ge = np.where(n_ge > 0, best1[np.maximum(n_ge - 1, 0)], -np.inf)
        top_gt = np.where(n_gt > 0, best1[np.maximum(n_gt - 1, 0)], -np.inf)
        return (top_ge > targets[:, 1]) | (top_gt >= targets[:, 1])
    step = max(1, budget // f)
    cols = [np.ascontiguousarray(dominators[:, c])[None, :] for c in range(m)]
    for s in range(0, n, step):
        t = targets[s:s + step]
        ge = cols[0] >= t[:, :1]
        gt = cols[0] > t[:, :1]
        for c in range(1, m):
            ge &= cols[c] >= t[:, c:c + 1]
            gt |= cols[c] > t[:, c:c + 1]
        ge &= gt
        out[s:s + step] = ge.any(axis=1)
    return out


# ---------------------------------------------------------------------------------
# non-dominated sorting
# ---------------------------------------------------------------------------------
def _lexsort_desc(points: np.ndarray) -> np.ndarray:
    """Order that sorts rows lexicographically descending (first column most significant)."""
    return np.lexsort(tuple(-points[:, k] for k in range(points.shape[1] - 1, -1, -1)))


def _ranks_2d(p: np.ndarray) -> np.ndarray:
    """Ranks of distinct 2-D points by a sweep with one staircase value per front."""
    order = _lexsort_desc(p)
    neg_best: list[float] = []  # -max(obj1) of processed points of each front, ascending
    ranks = np.empty(len(p), dtype=np.int64)
    ys = p[order, 1].tolist()
    for idx, y in zip(order.tolist(), ys):
        r = bisect_right(neg_best, -y)  # fronts holding a point with obj1 >= y
        if r == len(neg_best):
            neg_best.append(-y)
        else:
            neg_best[r] = -y
        ranks[idx] = r + 1
    return ranks


def _ranks_3d(p: np.ndarray) -> np.ndarray:
    """Ranks of distinct 3-D points: sweep on objective 0, a 2-D staircase per front.

    Points come lexicographically descending, so every dominator of a point is seen
    before it. A point is dominated by front r iff that front's (obj1, obj2) staircase
    covers it; fronts are nested, so the rank is found by bisection over fronts.
    """
    order = _lexsort_desc(p)
    xs_all: list[list[float]] = []  # per front: obj1 ascending
    ny_all: list[list[float]] = []  # per front: -obj2 ascending (obj2 descending)
    ranks = np.empty(len(p), dtype=np.int64)
    for idx, x, y in zip(order.tolist(), p[order, 1].tolist(), p[order, 2].tolist()):
        lo, hi = 0, len(xs_all)
        ny = -y
        while lo < hi:  # first front that does NOT cover (x, y)
            mid = (lo + hi) // 2
            xs = xs_all[mid]
            k = bisect_left(xs, x)
            if k < len(xs) and ny_all[mid][k] <= ny:
                lo = mid + 1
            else:
                hi = mid
        if lo == len(xs_all):
            xs_all.append([x])
            ny_all.append([ny])
        else:
            xs, nys = xs_all[lo], ny_all[lo]
            end = bisect_right(xs, x)
            start = bisect_left(nys, ny, 0, end)
            del xs[start:end]
            del nys[start:end]
            xs.insert(start, x)
            nys.insert(start, ny)
        ranks[idx] = lo + 1
    return ranks


def first_front_mask(objectives: np.ndarray, block: int = 1024) -> np.ndarray:
    """Mask of the non-dominated points (all objectives maximised).

    Presort-and-filter (Chomicki et al., ICDE 2003): after a lexicographic descending
    sort no point can be dominated by a later one, so each block of points is tested
    only against the front found so far and against itself.
    """
    p = _matrix(objectives)
    n = len(p)
    if p.shape[1] == 2 and n > 64:
        # two objectives: after a descending sort a distinct point is on the front iff its
        # second objective beats every earlier one
        uniq, inverse = np.unique(p, axis=0, return_inverse=True)
        o = _lexsort_desc(uniq)
        y = uniq[o, 1]
        best_before = np.r_[-np.inf, np.maximum.accumulate(y)[:-1]]
        on = np.zeros(len(uniq), dtype=bool)
        on[o] = y > best_before
        return on[inverse.reshape(-1)]
    if p.shape[1] == 3 and n > 5000:
        # most points are dominated by a few front points: find the front of a small seed set
        # (the best by each objective and by the scaled sum), drop every point that one of
        # those dominates, and filter the rest exactly. A dropped point cannot hide a front
        # point: whatever it dominates, the seed that dominates it dominates too.
        span = np.ptp(p, axis=0)
        scaled = ((p - p.min(axis=0)) / np.where(span > 0, span, 1.0)).sum(axis=1)
        picks = [np.argpartition(-scaled, 1000)[:1000]]
        picks += [np.argpartition(-p[:, c], 300)[:300] for c in range(p.shape[1])]
        seeds = np.unique(np.concatenate(picks))
        seed_front = p[seeds[first_front_mask(p[seeds], block)]]
        rest = np.flatnonzero(~_dominated_by_any(p, seed_front))
        keep = np.zeros(n, dtype=bool)
        if len(rest) > 20_000:
            keep[rest] = non_dominated_ranks(p[rest]) == 1  # sweep: no quadratic blow-up on large fronts
        else:
            keep[rest] = first_front_mask(p[rest], block) if len(rest) < n else _presorted_front(p, block)
        return keep
    return _presorted_front(p, block)


def _presorted_front(p: np.ndarray, block: int) -> np.ndarray:
    """First-front mask by presort and filter, block by block (see :func:`first_front_mask`)."""
    n = len(p)
    order = _lexsort_desc(p)
    q = p[order]
    front_pts = np.empty((0, p.shape[1]))
    keep = np.zeros(n, dtype=bool)
    for start in range(0, n, block):
        blk = q[start:start + block]
        alive = np.ones(len(blk), dtype=bool)
        if len(front_pts):
            alive = ~_dominated_by_any(blk, front_pts)
        cand = np.flatnonzero(alive)
        if len(cand) > 1:
            sub = blk[cand]
            cand = cand[~_dominated_by_any(sub, sub)]
        keep[order[start + cand]] = True
        front_pts = np.vstack([front_pts, blk[cand]])
    return keep


def non_dominated_ranks(objectives: np.ndarray) -> np.ndarray:
    """Pareto rank of every point (1 = first front), all objectives maximised.

    Same fronts as the fast non-dominated sort of Deb et al. (IEEE TEC 2002, 6, 182),
    computed by sweeps: O(n log n) for two objectives and about O(n log^2 n) for three;
    four or more objectives peel fronts with :func:`first_front_mask`. Identical points
    share a rank (neither dominates the other).
    """
    p = _matrix(objectives)
    n, m = p.shape
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    uniq, inverse = np.unique(p, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    if m == 1:
        ranks_u = np.arange(len(uniq), 0, -1, dtype=np.int64)  # np.unique sorts ascending
    elif m == 2:
        ranks_u = _ranks_2d(uniq)
    elif m == 3:
        ranks_u = _ranks_3d(uniq)
    else:
        ranks_u = np.zeros(len(uniq), dtype=np.int64)
        left = np.arange(len(uniq))
        r = 0
        while len(left):
            r += 1
            mask = first_front_mask(uniq[left])
            ranks_u[left[mask]] = r
            left = left[~mask]
    return ranks_u[inverse]


def crowding_distance(objectives: np.ndarray, ranks: np.ndarray) -> np.ndarray:
    """Crowding distance within each front (Deb et al., IEEE TEC 2002, 6, 182).

    Boundary points of a front get ``inf``; others the sum over objectives of the gap
    between their neighbours divided by the objective's range within the front.
    Fronts of one or two points are all boundary.
    """
    p = _matrix(objectives)
    ranks = np.asarray(ranks)
    n, m = p.shape
    dist = np.zeros(n)
    if n == 0:
        return dist
    for k in range(m):
        order = np.lexsort((p[:, k], ranks))
        r = ranks[order]
        v = p[order, k]
        first = np.r_[True, r[1:] != r[:-1]]
        last = np.r_[r[1:] != r[:-1], True]
        starts = np.flatnonzero(first)
        group = np.cumsum(first) - 1
        vmin = v[starts][group]
        vmax = v[np.flatnonzero(last)][group]
        span = vmax - vmin
        gap = np.zeros(n)
        inner = ~(first | last)
        idx = np.flatnonzero(inner)
        gap[idx] = v[idx + 1] - v[idx - 1]
        with np.errstate(invalid="ignore", divide="ignore"):
            contrib = np.where(span > 0, gap / np.where(span > 0, span, 1.0), 0.0)
        contrib[first | last] = np.inf
        dist[order] += contrib
    return dist


def knee_point(front: np.ndarray) -> int:
    """Index of the knee of a front (all objectives maximised).

    Das (Struct. Optim. 1999, 18, 107): the point farthest, towards the ideal point,
    from the hyperplane through the front's extreme points, in objectives scaled to
    [0, 1] over the front. If the extremes do not span a hyperplane, the plane with
    equal weights is used (largest sum of scaled objectives).
    """
    p = _matrix(front, "front")
    n, m = p.shape
    if n == 0:
        raise DataError("knee_point: the front is empty")
    if n == 1:
        return 0
    lo = p.min(axis=0)
    span = p.max(axis=0) - lo
    span[span == 0] = 1.0
    s = (p - lo) / span
    extremes = s[np.argmax(s, axis=0)]
    normal = np.ones(m)
    if m >= 2:
        try:
            # plane normal . x = 1 through the m extreme points
            cand = np.linalg.solve(extremes, np.ones(m))
            if np.all(np.isfinite(cand)) and np.linalg.matrix_rank(extremes) == m:
                normal = cand
        except np.linalg.LinAlgError:
            pass
    normal = normal / np.linalg.norm(normal)
    offset = float(normal @ extremes[0])
    if normal @ np.ones(m) < offset:  # orient towards the ideal point (1, ..., 1)
        normal, offset = -normal, -offset
    distance = s @ normal - offset
    return int(np.argmax(distance))


# ---------------------------------------------------------------------------------
# hypervolume
# ---------------------------------------------------------------------------------
def _hv2(p: np.ndarray, ref: np.ndarray) -> float:
    if len(p) == 0:
        return 0.0
    order = np.lexsort((-p[:, 1], -p[:, 0]))
    x = p[order, 0]
    y = p[order, 1]
    ymax = np.maximum.accumulate(y)
    prev = np.r_[ref[1], ymax[:-1]]
    return float(np.sum((x - ref[0]) * np.clip(ymax - prev, 0.0, None)))


def _hv_slice(p: np.ndarray, ref: np.ndarray) -> float:
    m = p.shape[1]
    if len(p) == 0:
        return 0.0
    if m == 1:
        return float(p[:, 0].max() - ref[0])
    if m == 2:
        return _hv2(p, ref)
    # slice along the last objective, from the top level down
    levels = np.unique(p[:, -1])[::-1]
    total = 0.0
    for i, z in enumerate(levels):
        below = levels[i + 1] if i + 1 < len(levels) else ref[-1]
        sub = p[p[:, -1] >= z, :-1]
        if m - 1 > 2:
            sub = sub[first_front_mask(sub)]
        total += _hv_slice(sub, ref[:-1]) * (z - below)
    return total


def hypervolume(points: np.ndarray, reference: Sequence[float]) -> float:
    """Exact hypervolume dominated by ``points`` and bounded by ``reference``.

    All objectives maximised; points not strictly better than the reference in every
    objective add nothing. Two objectives: one sorted sweep. Three or more: slicing
    along the last objective (While et al., IEEE TEC 2006, 10, 29), exact, O(n^2 log n)
    for three objectives. Units are the product of the objectives' units.
    """
    p = _matrix(points, "points")
    ref = np.asarray(reference, dtype=float).reshape(-1)
    if ref.size != p.shape[1]:
        raise DataError(f"reference point has {ref.size} values but points have {p.shape[1]} objectives")
    p = p[np.all(p > ref, axis=1)]
    if len(p) == 0:
        return 0.0
    p = p[first_front_mask(p)]
    return _hv_slice(p, ref)
