"""Pareto ranking under uncertainty: probability of lying on the first front and
next-experiment suggestions by expected hypervolume improvement.

Objectives are maximised (see :func:`redoxfront.ranking.pareto.to_maximisation`) and given as a
mean and a 95 % interval ``[low, high]``; a Monte Carlo draw takes each objective
from a split normal distribution (one standard deviation on each side of the mean,
``(mean - low) / 1.96`` and ``(high - mean) / 1.96``) truncated at three standard
deviations, so every draw lies in a known box. That box makes the pruning below exact.

References
----------
- Deb, Pratap, Agarwal & Meyarivan, IEEE Trans. Evol. Comput. 2002, 6, 182 (Pareto
  dominance, first front).
- Emmerich, Giannakoglou & Naujoks, IEEE Trans. Evol. Comput. 2006, 10, 421 (expected
  hypervolume improvement); Nemhauser, Wolsey & Fisher, Math. Program. 1978, 14, 265
  (greedy selection of a monotone submodular set function).
"""

from __future__ import annotations

import os
import threading
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
from scipy.spatial import cKDTree
from scipy.special import ndtr, ndtri
from scipy.stats import qmc
from tqdm.auto import tqdm

from redoxfront.errors import DataError
from redoxfront.ranking.pareto import (
    DEFAULT_ELEMENT_BUDGET,
    _dominated_by_any,
    _matrix,
    first_front_mask,
)

Z95: float = float(ndtri(0.975))
"""Standard normal quantile of a two-sided 95 % interval (1.95996)."""
TRUNCATION_SD: float = 3.0
"""Monte Carlo draws are truncated at this many standard deviations from the mean."""


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
        a = ndtr(-TRUNCATION_SD)
        exact = ~(self.sd_low[rows].any(axis=0) | self.sd_high[rows].any(axis=0))
        if exact.any():  # objectives without uncertainty: a step, the same numbers without ndtr
            out = np.empty((len(rows), len(u), u.shape[1]))
            below = (ndtr(TRUNCATION_SD) - ndtr(-TRUNCATION_SD)) / (1.0 - 2.0 * a)
            above = (ndtr(TRUNCATION_SD) - ndtr(TRUNCATION_SD)) / (1.0 - 2.0 * a)
            for c in np.flatnonzero(exact):
                out[:, :, c] = np.where(u[None, :, c] - self.mean[rows][:, None, c] > 0, above, below)
            rest = np.flatnonzero(~exact)
            if len(rest):
                out[:, :, rest] = Uncertain(self.mean[:, rest], self.sd_low[:, rest],
                                            self.sd_high[:, rest]).prob_at_least(u[:, rest], rows)
            return out
        mu = self.mean[rows][:, None, :]
        s_lo = self.sd_low[rows][:, None, :]
        s_hi = self.sd_high[rows][:, None, :]
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


def _likely_dominators(unc: Uncertain, pool: np.ndarray, k: int, neighbours: int = 24,
                       block: int = 4096) -> np.ndarray:
    """For every row, ``k`` rows of ``pool`` likely to dominate it.

    Objectives are scaled by their typical standard deviation; the ``neighbours`` pool
    points nearest to a point one scale unit above the row (a k-d tree query) are
    scored by the standardised shortfall of their means behind the row's (a normal-tail
    proxy of -log P(j dominates i)) and the best ``k`` kept. A row may get itself as a
    filler, which is harmless: a point never dominates itself. Rows are scored ``block`` at
    a time (small temporaries, reused).
    """
    n, m = unc.mean.shape
    sd = 0.5 * (unc.sd_low + unc.sd_high)
    span = unc.mean.max(axis=0) - unc.mean.min(axis=0)
    scale = np.median(sd, axis=0)
    scale = np.where(scale > 0, scale, np.where(span > 0, span / 100.0, 1.0))
    z = unc.mean / scale
    nn = int(min(neighbours, len(pool)))
    k = max(1, min(k, nn))
    tree = cKDTree(z[pool])
    out = np.empty((n, k), dtype=np.int64)
    for s in range(0, n, block):
        rows = np.arange(s, min(n, s + block))
        _, near = tree.query(z[rows] + 1.0, k=nn)
        near = pool[np.asarray(near).reshape(len(rows), nn)]
        diff = unc.mean[near] - unc.mean[rows, None, :]
        both = np.sqrt(sd[near] ** 2 + sd[rows, None, :] ** 2)
        with np.errstate(divide="ignore", invalid="ignore"):
            zz = np.where(both > 0, diff / np.where(both > 0, both, 1.0), np.where(diff >= 0, np.inf, -np.inf))
        score = -np.square(np.minimum(zz, 0.0)).sum(axis=2)
        score[near == rows[:, None]] = -np.inf
        best = np.argsort(-score, axis=1, kind="stable")[:, :k]
        out[rows] = np.take_along_axis(near, best, axis=1)
    return out


def _front_counts(sub: Uncertain, n_draws: int, rng: np.random.Generator, element_budget: int,
                  progress: bool, n_likely: int = 8, likely: np.ndarray | None = None) -> np.ndarray:
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
    if likely is None:
        likely = _likely_dominators(sub, np.flatnonzero(first_front_mask(sub.mean)), n_likely)
    chunk = int(max(1, min(n_draws, element_budget // max(1, k * m * 4))))
    fixed = [not (sub.sd_low[:, c].any() or sub.sd_high[:, c].any()) for c in range(m)]
    bar = tqdm(total=n_draws, desc="front probability", unit="draw", disable=not progress, leave=False)
    done = 0
    while done < n_draws:
        b = min(chunk, n_draws - done)
        x = sub.draw(rng, b)  # (m, b, k): one objective contiguous
        first = likely[:, 0]
        ge = np.ones((b, k), dtype=bool)
        gt = np.zeros((b, k), dtype=bool)
        for c in range(m):
            if fixed[c]:  # no uncertainty: the same comparison in every draw, made once
                ge &= (sub.mean[first, c] >= sub.mean[:, c])[None, :]
                gt |= (sub.mean[first, c] > sub.mean[:, c])[None, :]
                continue
            xc = x[c][:, first]
            ge &= xc >= x[c]
            gt |= xc > x[c]
        ge &= gt
        d, i = np.nonzero(~ge)  # (draw, row) pairs still alive, sorted by draw
        del ge, gt
        for step in range(1, likely.shape[1]):
            j = likely[i, step]
            ge = np.ones(len(i), dtype=bool)
            gt = np.zeros(len(i), dtype=bool)
            for c in range(m):
                xi, xj = (sub.mean[i, c], sub.mean[j, c]) if fixed[c] else (x[c, d, i], x[c, d, j])
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


MC_THREADS: int = 2
"""Threads that count blocks of Monte Carlo draws at once (both cores of a laptop; numpy
releases the interpreter lock in the array work). The probabilities do not depend on it."""


def _parallel_front_counts(sub: Uncertain, n_draws: int, seed: int, element_budget: int,
                           progress: bool) -> np.ndarray:
    """:func:`_front_counts` over blocks of draws, each block with its own seeded stream.

    The block size follows from the element budget (half of it per block, so that two blocks
    in flight stay within it), never from the thread count, so the result is the same on any
    number of threads.
    """
    k, m = sub.mean.shape
    if k == 0:
        return np.zeros(0, dtype=np.int64)
    likely = _likely_dominators(sub, np.flatnonzero(first_front_mask(sub.mean)), 8)
    half = max(1, element_budget // 2)
    block = int(max(1, min(n_draws, half // max(1, k * m * 4))))
    sizes = [min(block, n_draws - start) for start in range(0, n_draws, block)]
    streams = np.random.SeedSequence(seed).spawn(len(sizes))
    bar = tqdm(total=n_draws, desc="front probability", unit="draw", disable=not progress, leave=False)

    def count(i: int) -> np.ndarray:
        return _front_counts(sub, sizes[i], np.random.default_rng(streams[i]), half, False, likely=likely)

    counts = np.zeros(k, dtype=np.int64)

    def add(i: int) -> None:
        part = count(i)
        with lock:
            counts[:] += part
            bar.update(sizes[i])

    lock = threading.Lock()
    _on_threads(add, range(len(sizes)))
    bar.close()
    return counts


def _on_threads(work: "Callable[[int], None]", items: "Sequence[int]") -> None:
    """``work(i)`` for every item, on :data:`MC_THREADS` threads (numpy and scipy release the
    interpreter lock in array work); the first error is raised here."""
    from concurrent.futures import ThreadPoolExecutor

    items = list(items)
    threads = max(1, min(MC_THREADS, len(items), os.cpu_count() or 1))
    if threads == 1:
        for i in items:
            work(i)
        return
    with ThreadPoolExecutor(max_workers=threads) as pool:
        for _ in pool.map(work, items):
            pass


def _distinct_rows(key: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """One row index per distinct row of ``key`` (in lexicographic order of the rows) and, for
    every row, the number of its distinct row: ``key[reps][inverse] == key``. A sort and a
    comparison of neighbours (np.unique(axis=0) does the same through a byte view, several
    times slower)."""
    order = np.lexsort(key.T[::-1])
    ordered = key[order]
    new = np.r_[True, np.any(ordered[1:] != ordered[:-1], axis=1)] if len(key) else np.zeros(0, bool)
    inverse = np.empty(len(key), dtype=np.int64)
    inverse[order] = np.cumsum(new) - 1
    return order[new], inverse


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
    The draws come in blocks, each from its own stream of ``SeedSequence(seed)``, counted on
    :data:`MC_THREADS` threads; the answer does not depend on the number of threads.
    """
    if n_draws < 1:
        raise DataError(f"n_draws must be at least 1, got {n_draws}")
    unc = Uncertain.from_interval(mean, low, high)
    n, m = unc.mean.shape
    if n == 0:
        return np.zeros(0)
    reps, inverse = _distinct_rows(np.hstack([unc.mean, unc.sd_low, unc.sd_high]))
    lower, upper = unc.lower[reps], unc.upper[reps]
    alive = np.flatnonzero(~_certainly_dominated(lower, upper))
    sub = Uncertain(unc.mean[reps][alive], unc.sd_low[reps][alive], unc.sd_high[reps][alive])
    counts = _parallel_front_counts(sub, n_draws, seed, element_budget, progress)
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


SCORE_BLOCK_ELEMENTS: int = 1_000_000
"""Elements of the (candidate, sample point, objective) probabilities computed at once when
picks are scored (about 8 MB: small enough to stay in the cache's neighbourhood and to be
reused from the heap, block after block)."""


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
    step = max(1, SCORE_BLOCK_ELEMENTS // (len(u) * m))  # small temporaries, reused block after block

    def score(s: int) -> None:
        reach[s:s + step] = unc.prob_at_least(u, rows[s:s + step]).prod(axis=2)

    _on_threads(score, range(0, len(rows), step))
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
