"""Trade-off (Pareto) ranking under uncertainty: ranks, crowding, knee, hypervolume,
probability of lying on the first front and next-experiment suggestions.

Every function here works on plain arrays of shape ``(n_candidates, n_objectives)``
in which **larger is better** in every column; :func:`to_maximisation` turns a mix of
maximised and minimised objectives into that form. Uncertain objectives are given as
a mean and a 95 % interval ``[low, high]``; a Monte Carlo draw takes each objective
from a split normal distribution (one standard deviation on each side of the mean,
``(mean - low) / 1.96`` and ``(high - mean) / 1.96``) truncated at three standard
deviations, so every draw lies in a known box. That box makes the pruning below exact.

References
----------
- Deb, Pratap, Agarwal & Meyarivan, IEEE Trans. Evol. Comput. 2002, 6, 182 (fast
  non-dominated sorting, crowding distance).
- Chomicki, Godfrey, Gryz & Liang, Proc. ICDE 2003, 717 (presorted first-front filter).
- While, Hingston, Barone & Huband, IEEE Trans. Evol. Comput. 2006, 10, 29
  (hypervolume by slicing objectives).
- Das, Struct. Optim. 1999, 18, 107 (knee as the largest distance from the hyperplane
  through the extreme points).
- Emmerich, Giannakoglou & Naujoks, IEEE Trans. Evol. Comput. 2006, 10, 421 (expected
  hypervolume improvement); Nemhauser, Wolsey & Fisher, Math. Program. 1978, 14, 265
  (greedy selection of a monotone submodular set function).
"""

from __future__ import annotations

import dataclasses
from bisect import bisect_left, bisect_right
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Sequence

import numpy as np
import pandas as pd
from scipy.spatial import cKDTree
from scipy.special import ndtr, ndtri
from scipy.stats import qmc
from tqdm.auto import tqdm

from redoxfront import columns as col
from redoxfront.campaign import bounded
from redoxfront.errors import DataError, SettingsError

if TYPE_CHECKING:
    from redoxfront.campaign import Campaign

Z95: float = float(ndtri(0.975))
"""Standard normal quantile of a two-sided 95 % interval (1.95996)."""
TRUNCATION_SD: float = 3.0
"""Monte Carlo draws are truncated at this many standard deviations from the mean."""
DEFAULT_ELEMENT_BUDGET: int = 24_000_000
"""Largest temporary boolean array (elements) the Monte Carlo loop builds at once."""


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
    if p.shape[1] == 3 and n > 2000:
        return non_dominated_ranks(p) == 1  # sweep: no quadratic blow-up on large fronts
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


# ---------------------------------------------------------------------------------
# uncertainty: truncated split-normal draws
# ---------------------------------------------------------------------------------
@dataclass(frozen=True)
class Uncertain:
    """Objectives with 95 % intervals, maximised, shape (n, m) each."""

    mean: np.ndarray
    sd_low: np.ndarray
    sd_high: np.ndarray

    @property
    def lower(self) -> np.ndarray:
        """Smallest value any draw can take (mean - 3 sd_low)."""
        return self.mean - TRUNCATION_SD * self.sd_low

    @property
    def upper(self) -> np.ndarray:
        """Largest value any draw can take (mean + 3 sd_high)."""
        return self.mean + TRUNCATION_SD * self.sd_high

    @classmethod
    def from_interval(cls, mean: np.ndarray, low: np.ndarray, high: np.ndarray) -> "Uncertain":
        """Build from means and 95 % interval ends; checks low <= mean <= high."""
        mu = _matrix(mean, "mean")
        lo = _matrix(low, "low")
        hi = _matrix(high, "high")
        if lo.shape != mu.shape or hi.shape != mu.shape:
            raise DataError(f"mean {mu.shape}, low {lo.shape} and high {hi.shape} must have one shape")
        tol = 1e-12 * (1.0 + np.abs(mu))
        bad = np.argwhere((lo > mu + tol) | (hi < mu - tol))
        if len(bad):
            i, k = bad[0]
            raise DataError(
                f"row {i}, objective {k}: interval [{lo[i, k]}, {hi[i, k]}] does not hold the "
                f"mean {mu[i, k]}; give low <= mean <= high"
            )
        return cls(mu, np.clip(mu - lo, 0, None) / Z95, np.clip(hi - mu, 0, None) / Z95)

    def draw(self, rng: np.random.Generator, n_draws: int) -> np.ndarray:
        """``n_draws`` draws of every row, objective-major: shape (m, n_draws, n)."""
        n, m = self.mean.shape
        x = np.empty((m, n_draws, n))
        for c in range(m):
            s_lo, s_hi = self.sd_low[:, c], self.sd_high[:, c]
            if not (s_lo.any() or s_hi.any()):
                x[c] = self.mean[:, c]  # no uncertainty in this objective: nothing to draw
                continue
            z = rng.standard_normal((n_draws, n), dtype=np.float32)
            out = np.abs(z) > TRUNCATION_SD  # redraw the 0.27 % outside +-3 sd
            while out.any():
                z[out] = rng.standard_normal(int(out.sum()), dtype=np.float32)
                out = np.abs(z) > TRUNCATION_SD
            xc = x[c]
            if np.array_equal(s_lo, s_hi):
                np.multiply(z, s_lo, out=xc)
            else:
                np.multiply(z, np.where(z > 0, s_hi, s_lo), out=xc)
            xc += self.mean[:, c]
        return x

    def prob_at_least(self, u: np.ndarray, rows: np.ndarray) -> np.ndarray:
        """P(draw >= u) per objective: rows (r,), u (s, m) -> (r, s, m)."""
        mu = self.mean[rows][:, None, :]
        s_lo = self.sd_low[rows][:, None, :]
        s_hi = self.sd_high[rows][:, None, :]
        a = ndtr(-TRUNCATION_SD)
        d = u[None, :, :] - mu
        sd = np.where(d > 0, s_hi, s_lo)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where(sd > 0, d / np.where(sd > 0, sd, 1.0), np.where(d > 0, np.inf, -np.inf))
        z = np.clip(z, -TRUNCATION_SD, TRUNCATION_SD)
        return (ndtr(TRUNCATION_SD) - ndtr(z)) / (1.0 - 2.0 * a)


def _certainly_dominated(lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """True where some other candidate's worst draw dominates this one's best draw."""
    n, m = lower.shape
    front = lower[first_front_mask(lower)]
    return _dominated_by_any(upper, front)


def _likely_dominators(unc: Uncertain, pool: np.ndarray, k: int, neighbours: int = 24) -> np.ndarray:
    """For every row, ``k`` rows of ``pool`` likely to dominate it.

    Objectives are scaled by their typical standard deviation; the ``neighbours`` pool
    points nearest to a point one scale unit above the row (a k-d tree query) are
    scored by the standardised shortfall of their means behind the row's (a normal-tail
    proxy of -log P(j dominates i)) and the best ``k`` kept. A row may get itself as a
    filler, which is harmless: a point never dominates itself.
    """
    n, m = unc.mean.shape
    sd = 0.5 * (unc.sd_low + unc.sd_high)
    span = unc.mean.max(axis=0) - unc.mean.min(axis=0)
    scale = np.median(sd, axis=0)
    scale = np.where(scale > 0, scale, np.where(span > 0, span / 100.0, 1.0))
    z = unc.mean / scale
    nn = int(min(neighbours, len(pool)))
    k = max(1, min(k, nn))
    _, near = cKDTree(z[pool]).query(z + 1.0, k=nn)
    near = pool[np.asarray(near).reshape(n, nn)]
    diff = unc.mean[near] - unc.mean[:, None, :]
    both = np.sqrt(sd[near] ** 2 + sd[:, None, :] ** 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        zz = np.where(both > 0, diff / np.where(both > 0, both, 1.0), np.where(diff >= 0, np.inf, -np.inf))
    score = -np.square(np.minimum(zz, 0.0)).sum(axis=2)
    score[near == np.arange(n)[:, None]] = -np.inf
    best = np.argsort(-score, axis=1, kind="stable")[:, :k]
    return np.take_along_axis(near, best, axis=1)


def _front_counts(sub: Uncertain, n_draws: int, rng: np.random.Generator, element_budget: int,
                  progress: bool, n_likely: int = 8) -> np.ndarray:
    """How often each row of ``sub`` is on the first front over ``n_draws`` draws (exact).

    A cascade of sound tests against each row's likely dominators removes most
    dominated (draw, row) pairs; the first front of the rows still alive in a draw is
    then found exactly. Every true front point survives the cascade and every other
    survivor is dominated by one of them, so the result equals a full pairwise test.
    """
    k, m = sub.mean.shape
    counts = np.zeros(k, dtype=np.int64)
    if k == 0:
        return counts
    pool = np.flatnonzero(first_front_mask(sub.mean))
    likely = _likely_dominators(sub, pool, n_likely)
    chunk = int(max(1, min(n_draws, element_budget // max(1, k * m * 4))))
    bar = tqdm(total=n_draws, desc="front probability", unit="draw", disable=not progress, leave=False)
    done = 0
    while done < n_draws:
        b = min(chunk, n_draws - done)
        x = sub.draw(rng, b)  # (m, b, k): one objective contiguous
        first = likely[:, 0]
        ge = x[0][:, first] >= x[0]
        gt = x[0][:, first] > x[0]
        for c in range(1, m):
            xc = x[c][:, first]
            ge &= xc >= x[c]
            gt |= xc > x[c]
        ge &= gt
        d, i = np.nonzero(~ge)  # (draw, row) pairs still alive, sorted by draw
        del ge, gt
        for step in range(1, likely.shape[1]):
            j = likely[i, step]
            ge = x[0, d, j] >= x[0, d, i]
            gt = x[0, d, j] > x[0, d, i]
            for c in range(1, m):
                xi, xj = x[c, d, i], x[c, d, j]
                ge &= xj >= xi
                gt |= xj > xi
            keep = ~(ge & gt)
            d, i = d[keep], i[keep]
        bounds = np.searchsorted(d, np.arange(b + 1))
        for row in range(b):
            idx = i[bounds[row]:bounds[row + 1]]
            pts = x[:, row, idx].T
            on = ~_dominated_by_any(pts, pts) if len(idx) <= 1500 else first_front_mask(pts)
            counts[idx[on]] += 1
        done += b
        bar.update(b)
    bar.close()
    return counts


def front_probability(
    mean: np.ndarray,
    low: np.ndarray,
    high: np.ndarray,
    n_draws: int = 1000,
    seed: int = 0,
    *,
    progress: bool = False,
    element_budget: int = DEFAULT_ELEMENT_BUDGET,
) -> np.ndarray:
    """Monte Carlo probability that each candidate lies on the first Pareto front.

    ``mean``, ``low``, ``high``: (n, m), all objectives maximised, ``[low, high]`` a 95 %
    interval (equal ends = no uncertainty). Each draw takes every objective from a split
    normal truncated at 3 sd (:class:`Uncertain`), independently per candidate and
    objective; rows with identical mean and interval share their draws, so identical
    candidates get exactly equal probabilities. Exact pruning keeps time and memory
    bounded: a candidate whose best possible draw is dominated by another's worst
    possible draw has probability 0 and is not drawn; each remaining candidate is tested
    first against its likely dominators, and the few survivors of a draw exactly against
    each other. Temporary arrays hold about ``element_budget`` elements at most. Seeded: equal inputs give equal outputs.
    """
    if n_draws < 1:
        raise DataError(f"n_draws must be at least 1, got {n_draws}")
    unc = Uncertain.from_interval(mean, low, high)
    n, m = unc.mean.shape
    if n == 0:
        return np.zeros(0)
    key = np.hstack([unc.mean, unc.sd_low, unc.sd_high])
    _, reps, inverse = np.unique(key, axis=0, return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)  # distinct input of every row; reps: one row of each
    lower, upper = unc.lower[reps], unc.upper[reps]
    alive = np.flatnonzero(~_certainly_dominated(lower, upper))
    sub = Uncertain(unc.mean[reps][alive], unc.sd_low[reps][alive], unc.sd_high[reps][alive])
    counts = _front_counts(sub, n_draws, np.random.default_rng(seed), element_budget, progress)
    p_rep = np.zeros(len(reps))
    p_rep[alive] = counts / n_draws
    return p_rep[inverse]


# ---------------------------------------------------------------------------------
# next experiments
# ---------------------------------------------------------------------------------
BOX_MARGIN: float = 0.1
"""The objective box starts this fraction of its width below the worst possible draw,
so that the worst candidates still add volume (common practice, no source)."""


def objective_box(unc: Uncertain) -> tuple[np.ndarray, np.ndarray]:
    """Lower corner and widths of the box used for hypervolumes: from ``BOX_MARGIN`` of
    the width below the worst possible draw to the best possible draw, per objective."""
    lo = unc.lower.min(axis=0)
    hi = unc.upper.max(axis=0)
    width = np.where(hi > lo, hi - lo, 1.0)
    lo = lo - BOX_MARGIN * width
    return lo, width * (1.0 + BOX_MARGIN)


def suggest_experiments(
    mean: np.ndarray,
    low: np.ndarray,
    high: np.ndarray,
    measured: np.ndarray,
    k: int,
    seed: int = 0,
    *,
    n_samples: int = 8192,
    shortlist: int = 1000,
    priority: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Pick ``k`` unmeasured candidates that most raise the expected hypervolume.

    Objectives maximised, ``[low, high]`` 95 % intervals as in :func:`front_probability`.
    The gain of a batch is the expected volume, within the box of :func:`objective_box`
    (each objective scaled to [0, 1]), that the batch dominates and the
    measured candidates' means do not (expected hypervolume improvement, Emmerich et al.,
    IEEE TEC 2006, 10, 421). It is integrated over a seeded scrambled Sobol sample of the
    box with exact per-point probabilities (independent objectives), and the batch is built
    greedily, which for this monotone submodular gain is within 1 - 1/e of the best batch
    (Nemhauser et al., Math. Program. 1978, 14, 265). Only the ``shortlist`` unmeasured
    candidates with the highest ``priority`` (default: the mean's sum) are scored.

    Returns the chosen row indices in pick order and their marginal gains (fractions of
    the box volume).
    """
    unc = Uncertain.from_interval(mean, low, high)
    n, m = unc.mean.shape
    measured = np.asarray(measured, dtype=bool).reshape(-1)
    if measured.size != n:
        raise DataError(f"measured flags: {measured.size} values for {n} candidates")
    if k < 1 or n == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0)
    lo_box, span = objective_box(unc)
    free = np.flatnonzero(~measured)
    if len(free) == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0)
    prio = unc.mean.sum(axis=1) if priority is None else np.asarray(priority, dtype=float)
    order = free[np.lexsort((-unc.mean[free].sum(axis=1), -prio[free]))]
    rows = order[:shortlist]
    power = int(np.ceil(np.log2(max(2, n_samples))))
    u01 = qmc.Sobol(d=m, scramble=True, seed=seed).random_base2(power)
    u = lo_box + u01 * span
    base = unc.mean[measured]
    if len(base):
        covered = np.zeros(len(u), dtype=bool)
        step = max(1, DEFAULT_ELEMENT_BUDGET // (len(base) * m * 2))
        for s in range(0, len(u), step):
            covered[s:s + step] = np.all(base[None, :, :] >= u[s:s + step, None, :], axis=2).any(axis=1)
        u = u[~covered]
    if len(u) == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0)
    reach = np.empty((len(rows), len(u)), dtype=np.float32)
    step = max(1, DEFAULT_ELEMENT_BUDGET // (len(u) * m * 4))
    for s in range(0, len(rows), step):
        reach[s:s + step] = unc.prob_at_least(u, rows[s:s + step]).prod(axis=2)
    weight = np.ones(len(u), dtype=np.float32)
    cell = 1.0 / len(u01)
    picks: list[int] = []
    gains: list[float] = []
    taken = np.zeros(len(rows), dtype=bool)
    for _ in range(min(k, len(rows))):
        gain = (reach @ weight).astype(float) * cell
        gain[taken] = -1.0
        best = int(np.argmax(gain))
        if gain[best] <= 0:
            break
        picks.append(int(rows[best]))
        gains.append(float(gain[best]))
        taken[best] = True
        weight *= 1.0 - reach[best]
    return np.asarray(picks, dtype=np.int64), np.asarray(gains)


# ---------------------------------------------------------------------------------
# the campaign step: cell metrics -> ranked table, picks, figures
# ---------------------------------------------------------------------------------
OBJECTIVES: dict[str, tuple[str, bool]] = {
    "cell_voltage": (col.CELL_VOLTAGE, True),
    "energy_density": (col.ENERGY_DENSITY, True),
    "half_life": (col.HALF_LIFE, True),
    "molar_mass": (col.MOLAR_MASS, False),
}
"""Objective name -> (column, maximised). Half-life is ranked on its log10."""


@dataclass(frozen=True)
class RankingSettings:
    """Campaign section ``[ranking]``.

    objectives : names from :data:`OBJECTIVES`; default maximise cell voltage and
        half-life. Pick cell voltage or energy density, not both (one holds the other).
    n_draws : Monte Carlo draws for the probability of lying on the first front.
    seed : seed of the draws and of the sample used to score picks.
    n_suggestions : how many unmeasured candidates to suggest for the next experiments.
    """

    objectives: tuple[str, ...] = ("cell_voltage", "half_life")
    n_draws: int = field(default=1000, metadata=bounded(1, 1_000_000))
    seed: int = field(default=20261201, metadata=bounded(0, 2**31 - 1))
    n_suggestions: int = field(default=5, metadata=bounded(0, 10_000))

    def __post_init__(self) -> None:
        names = tuple(self.objectives)
        unknown = [o for o in names if o not in OBJECTIVES]
        if unknown:
            raise SettingsError(
                f"[ranking] objectives: unknown '{unknown[0]}'; allowed: {', '.join(OBJECTIVES)}"
            )
        if len(set(names)) != len(names) or not names:
            raise SettingsError("[ranking] objectives: give each objective once, at least one")
        if "cell_voltage" in names and "energy_density" in names:
            raise SettingsError(
                "[ranking] objectives: energy_density already contains cell_voltage; keep one of them"
            )


def _objective_arrays(table: pd.DataFrame, names: Sequence[str]):
    """Mean, 95 % low and high (maximised; half-life as log10 h) and a usable-row mask."""
    n = len(table)
    mean = np.zeros((n, len(names)))
    low = np.zeros_like(mean)
    high = np.zeros_like(mean)
    for k, name in enumerate(names):
        column, maximise = OBJECTIVES[name]
        if column not in table.columns:
            raise DataError(f"objective '{name}' needs column '{column}', which the table lacks")
        v = pd.to_numeric(table[column], errors="coerce").to_numpy(dtype=float)
        lo, hi = v, v
        if name == "cell_voltage":
            lo, hi = table[col.CELL_VOLTAGE_LOW].to_numpy(float), table[col.CELL_VOLTAGE_HIGH].to_numpy(float)
        elif name == "energy_density":
            lo, hi = table[col.ENERGY_DENSITY_LOW].to_numpy(float), table[col.ENERGY_DENSITY_HIGH].to_numpy(float)
        elif name == "half_life":
            with np.errstate(divide="ignore", invalid="ignore"):
                v = np.log10(np.where(v > 0, v, np.nan))
                lo = np.log10(np.where(table[col.HALF_LIFE_LOW].to_numpy(float) > 0, table[col.HALF_LIFE_LOW].to_numpy(float), np.nan))
                hi = np.log10(np.where(table[col.HALF_LIFE_HIGH].to_numpy(float) > 0, table[col.HALF_LIFE_HIGH].to_numpy(float), np.nan))
        if maximise:
            mean[:, k], low[:, k], high[:, k] = v, lo, hi
        else:
            mean[:, k], low[:, k], high[:, k] = -v, -hi, -lo
    ok = np.all(np.isfinite(mean) & np.isfinite(low) & np.isfinite(high), axis=1)
    return mean, np.minimum(low, mean), np.maximum(high, mean), ok


@dataclass(frozen=True)
class RankingResult:
    """Ranked table, picks and summary figures of one ranking run."""

    table: pd.DataFrame
    picks: pd.DataFrame
    hypervolume_fraction: float
    """Hypervolume of the first front of the means, as a fraction of the box of
    :func:`objective_box` (objectives scaled to [0, 1], half-life as log10)."""
    knee_id: str | None
    objectives: tuple[str, ...]


def rank_table(table: pd.DataFrame, settings: RankingSettings, *, progress: bool = False) -> RankingResult:
    """Pareto rank, crowding distance, knee, probability on the first front and picks.

    ``table`` comes from :func:`redoxfront.cell.cell_metrics`. Rows lacking an objective
    value are kept, unranked, with a note. Picks exclude measured candidates and carry
    the extrapolation flag.
    """
    names = tuple(settings.objectives)
    out = table.copy().reset_index(drop=True)
    mean, low, high, ok = _objective_arrays(out, names)
    notes = out[col.RANKING_NOTE].fillna("").astype(str).tolist() if col.RANKING_NOTE in out else [""] * len(out)
    for r in np.flatnonzero(~ok):
        missing = [nm for k, nm in enumerate(names) if not (np.isfinite(mean[r, k]) and np.isfinite(low[r, k]) and np.isfinite(high[r, k]))]
        notes[r] = "; ".join(x for x in (notes[r], "not ranked: no value for " + ", ".join(missing)) if x)
    out[col.RANKING_NOTE] = notes
    rows = np.flatnonzero(ok)
    rank = pd.array([pd.NA] * len(out), dtype="Int64")
    crowd = np.full(len(out), np.nan)
    p_front = np.full(len(out), np.nan)
    knee = np.zeros(len(out), dtype=bool)
    gain = np.full(len(out), np.nan)
    order = np.full(len(out), 0)
    hv_fraction = 0.0
    knee_id: str | None = None
    if len(rows):
        mu, lo, hi = mean[rows], low[rows], high[rows]
        r = non_dominated_ranks(mu)
        rank[rows] = r
        crowd[rows] = crowding_distance(mu, r)
        first = np.flatnonzero(r == 1)
        kn = first[knee_point(mu[first])]
        knee[rows[kn]] = True
        knee_id = str(out[col.ID].iloc[rows[kn]])
        p = front_probability(mu, lo, hi, settings.n_draws, settings.seed, progress=progress)
        p_front[rows] = p
        box_lo, span = objective_box(Uncertain.from_interval(mu, lo, hi))
        hv_fraction = hypervolume((mu[first] - box_lo) / span, np.zeros(len(names)))
        measured = out[col.MEASURED].to_numpy(bool)[rows] if col.MEASURED in out else np.zeros(len(rows), bool)
        if settings.n_suggestions > 0:
            picked, gains = suggest_experiments(
                mu, lo, hi, measured, settings.n_suggestions, settings.seed, priority=p
            )
            gain[rows[picked]] = gains
            order[rows[picked]] = np.arange(1, len(picked) + 1)
    out[col.PARETO_RANK] = rank
    out[col.CROWDING] = crowd
    out[col.KNEE] = knee
    out[col.P_FRONT] = p_front
    out[col.EXPECTED_HV_GAIN] = gain
    out[col.PICK_ORDER] = pd.array(np.where(order > 0, order, 0), dtype="Int64")
    out.loc[order == 0, col.PICK_ORDER] = pd.NA
    sort_rank = out[col.PARETO_RANK].astype("float").fillna(np.inf)
    out = out.assign(_r=sort_rank, _p=-out[col.P_FRONT].fillna(-1)).sort_values(
        ["_r", "_p", col.ID], kind="stable").drop(columns=["_r", "_p"]).reset_index(drop=True)
    picks = out[out[col.PICK_ORDER].notna()].sort_values(col.PICK_ORDER).reset_index(drop=True)
    keep = [c for c in (
        col.PICK_ORDER, col.ID, col.SMILES, col.ROLE, col.EXPECTED_HV_GAIN, col.P_FRONT, col.PARETO_RANK,
        col.CELL_VOLTAGE, col.CELL_VOLTAGE_LOW, col.CELL_VOLTAGE_HIGH, col.ENERGY_DENSITY,
        col.HALF_LIFE, col.HALF_LIFE_LOW, col.HALF_LIFE_HIGH, col.MOLAR_MASS, col.POTENTIAL_BASIS,
        col.DOMAIN, col.EXTRAPOLATING, col.RANKING_NOTE) if c in picks.columns]
    return RankingResult(out, picks[keep], float(hv_fraction), knee_id, names)


def rank_campaign(campaign: "Campaign", *, progress: bool = True) -> pd.DataFrame:
    """Rank a campaign's candidates: reads results/predictions.csv, writes
    results/ranking.csv, results/picks.csv, results/ranking_summary.json and the figures
    under results/figures/; returns the ranked table."""
    import json

    from redoxfront.campaign import section_from_mapping
    from redoxfront.cell import CellSettings, cell_metrics, truthy
    from redoxfront.errors import InputError

    cell_settings = section_from_mapping(CellSettings, campaign.section("cell"), "cell")
    settings = section_from_mapping(RankingSettings, campaign.section("ranking"), "ranking")
    src = campaign.results_dir / "predictions.csv"
    if not src.exists():
        raise InputError("no predictions yet; run the rate-model step first to write it", source=str(src))
    try:
        table = pd.read_csv(src)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the table: {exc}", source=str(src)) from exc
    if col.ID not in table.columns:
        raise InputError(f"no '{col.ID}' column", source=str(src), field=col.ID)
    table[col.ID] = table[col.ID].astype(str)
    desc_path = campaign.results_dir / "descriptors.csv"
    if desc_path.exists():  # potentials, role, charge count, molar mass live there
        desc = pd.read_csv(desc_path)
        if col.ID in desc.columns:
            desc[col.ID] = desc[col.ID].astype(str)
            extra = [c for c in desc.columns if c not in table.columns]
            if extra:
                table = table.merge(desc[[col.ID, *extra]].drop_duplicates(col.ID), on=col.ID, how="left")
    flag = truthy(table[col.MEASURED]) if col.MEASURED in table.columns else pd.Series(False, index=table.index)
    for target in (col.LOG10_K_FIRST, col.LOG10_K_SECOND):  # measured rates the model step carried
        if target in table.columns:
            flag |= pd.to_numeric(table[target], errors="coerce").notna()
    if campaign.inputs.measured_rates:
        rates_path = campaign.path(campaign.inputs.measured_rates)
        if rates_path.exists():
            rates = pd.read_csv(rates_path)
            if col.ID in rates.columns:
                flag |= table[col.ID].isin(set(rates[col.ID].astype(str)))
    table[col.MEASURED] = flag.to_numpy(bool)
    metrics = cell_metrics(
        table, cell_settings, campaign.compute.reference,
        default_role=campaign.compute.role, default_n_electrons=campaign.compute.n_electrons,
    )
    result = rank_table(metrics, settings, progress=progress)
    out_dir = campaign.results_dir
    out_dir.mkdir(parents=True, exist_ok=True)
    result.table.to_csv(out_dir / "ranking.csv", index=False)
    result.picks.to_csv(out_dir / "picks.csv", index=False)
    basis = result.table[col.POTENTIAL_BASIS].value_counts().to_dict()
    summary = {
        "objectives": list(result.objectives),
        "hypervolume_fraction": result.hypervolume_fraction,
        "knee_id": result.knee_id,
        "n_candidates": int(len(result.table)),
        "n_ranked": int(result.table[col.PARETO_RANK].notna().sum()),
        "n_first_front": int((result.table[col.PARETO_RANK] == 1).sum()),
        "potential_basis_counts": {str(k): int(v) for k, v in basis.items() if k},
        "cell": dataclasses.asdict(cell_settings),
        "ranking": {**dataclasses.asdict(settings), "objectives": list(settings.objectives)},
        "reference": campaign.compute.reference,
    }
    (out_dir / "ranking_summary.json").write_text(json.dumps(summary, indent=2), encoding="utf-8")
    from redoxfront.rank_plots import plot_front, plot_pairwise

    fig_dir = out_dir / "figures"
    plot_front(result.table, result.objectives, fig_dir / "front.png")
    plot_pairwise(result.table, result.objectives, fig_dir / "objectives_pairwise.png")
    return result.table
