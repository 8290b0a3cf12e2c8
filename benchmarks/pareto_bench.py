"""Benchmark of the ranking step: 100,000 invented candidates, three objectives, 1,000
Monte Carlo draws (target: <= 10 s on 2 cores, memory bounded).

Prints wall time (timed without tracemalloc) and, from a second pass under tracemalloc, the
peak of traced allocations (numpy included) and the peak resident set of the process; each as a
ratio to its target (figure / target: <= 1 meets it). Then, side by side in the same run, the
speed against an O(n^2) pairwise brute force and against the paretoset package (if installed)
on smaller subsets, with a check that the answers agree, said as which one is how many times
faster. Exits 1 when a figure misses its target. The inner ranking only: the command end to
end (reading, CSV writing, figures) is not timed here.

Run: .venv/bin/python benchmarks/pareto_bench.py [--n 100000] [--draws 1000]
"""

from __future__ import annotations

import argparse
import os
import sys
import resource
import time
import tracemalloc

import numpy as np

from redoxfront.ranking import pareto as P
from redoxfront.ranking import uncertainty as U


def invented_candidates(n: int, seed: int = 1):
    """Invented library: voltage vs log10 half-life trade-off, molar mass, 95 % intervals.

    Half-widths are typical of a calibrated potential (0.15 V) and a QSAR rate model
    (0.6 log units); molar mass is exact.
    """
    rng = np.random.default_rng(seed)
    v = rng.normal(2.8, 0.3, n)
    log_t = 1.5 - 1.2 * (v - 2.8) + rng.normal(0, 0.8, n)
    mass = rng.uniform(150, 600, n)
    mean = np.c_[v, log_t, -mass]  # all maximised (mass minimised)
    hw = np.c_[np.full(n, 0.15), np.full(n, 0.6), np.zeros(n)]
    return mean, mean - hw, mean + hw


def brute_mask(p: np.ndarray) -> np.ndarray:
    """O(n^2) reference first front: full pairwise dominance matrix."""
    return ~P.dominates(p[None, :, :], p[:, None, :]).any(axis=1)


def timed(fn, *args, repeat: int = 1, **kw):
    best, out = np.inf, None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn(*args, **kw)
        best = min(best, time.perf_counter() - t)
    return best, out


def faster(ours_s: float, other_s: float, other: str) -> str:
    """Which one is faster and by how much, never a ratio that rounds to 0.0x."""
    if ours_s <= other_s:
        return f"ours {other_s / ours_s:.1f}x faster than {other}"
    return f"{other} {ours_s / other_s:.1f}x faster than ours"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=100_000)
    ap.add_argument("--draws", type=int, default=1000)
    args = ap.parse_args()
    mean, low, high = invented_candidates(args.n)

    print(f"candidates {args.n}, objectives 3, Monte Carlo draws {args.draws}; "
          f"load average {os.getloadavg()[0]:.2f} (1 min) on {os.cpu_count()} cores")

    def ranking_pass():
        t_rank, ranks = timed(P.non_dominated_ranks, mean)
        t_crowd, _ = timed(P.crowding_distance, mean, ranks)
        t_prob, prob = timed(U.front_probability, mean, low, high, args.draws, 7)
        first = ranks == 1
        t_hv, hv = timed(P.hypervolume, mean[first], mean.min(axis=0))
        t_pick, (picks, gains) = timed(U.suggest_experiments, mean, low, high, np.zeros(args.n, bool), 5, 7,
                                       priority=prob)
        return (t_rank, t_crowd, t_prob, t_hv, t_pick), ranks, prob, hv, gains

    t0 = time.perf_counter()
    (t_rank, t_crowd, t_prob, t_hv, t_pick), ranks, prob, hv, gains = ranking_pass()
    total = time.perf_counter() - t0  # timed without tracemalloc
    tracemalloc.start()  # memory in a pass of its own: tracing slows every allocation
    ranking_pass()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    rss_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    first = ranks == 1
    print(f"  ranks (all fronts)       {t_rank:7.2f} s   fronts {ranks.max()}, first front {first.sum()}")
    print(f"  crowding distance        {t_crowd:7.2f} s")
    print(f"  P(first front), {args.draws} draws {t_prob:7.2f} s   candidates with P > 0: {(prob > 0).sum()}")
    print(f"  hypervolume (exact, 3-D) {t_hv:7.2f} s   = {hv:.4g}")
    print(f"  5 picks (expected HV)    {t_pick:7.2f} s   gains {np.round(gains, 4).tolist()}")
    missed = []
    for label, value, target, unit in (("ranking table, inner step", total, 10.0, "s"),
                                       ("peak resident set", rss_mb, 1024.0, "MiB")):
        ok = value <= target
        missed += [] if ok else [label]
        print(f"  {label:28s} {value:8.2f} {unit} / target {target:g} {unit} = ratio {value / target:5.2f} "
              f"({'meets' if ok else 'MISSES'} the target)")
    print(f"  peak traced memory (second pass) {peak / 2**20:7.1f} MiB")

    print("\nside by side on subsets (same run)")
    rng = np.random.default_rng(3)
    n_sub = min(args.n, 5000)
    sub = mean[rng.choice(args.n, n_sub, replace=False)]
    t_ours, m1 = timed(P.first_front_mask, sub, repeat=3)
    t_brute, m2 = timed(brute_mask, sub)
    assert np.array_equal(m1, m2)
    print(f"  first front, {n_sub:,} pts:  ours {t_ours * 1e3:8.1f} ms | O(n^2) brute {t_brute * 1e3:8.1f} ms "
          f"| {faster(t_ours, t_brute, 'brute force')}")
    t_ranks_sub, r1 = timed(P.non_dominated_ranks, sub, repeat=3)
    t_brute_r = time.perf_counter()
    dom = P.dominates(sub[None, :, :], sub[:, None, :])
    left = np.ones(len(sub), bool)
    r2 = np.zeros(len(sub), int)
    r = 0
    while left.any():
        r += 1
        now = left & ~(dom & left[None, :]).any(axis=1)
        r2[now] = r
        left &= ~now
    t_brute_r = time.perf_counter() - t_brute_r
    assert np.array_equal(r1, r2)
    print(f"  all ranks, {n_sub:,} pts:    ours {t_ranks_sub * 1e3:8.1f} ms | O(n^2) peel  {t_brute_r * 1e3:8.1f} ms "
          f"| {faster(t_ranks_sub, t_brute_r, 'peeling')}")
    try:
        import paretoset
    except ImportError:
        print("  paretoset not installed: skipped")
    else:
        big = mean[:min(args.n, 20_000)]
        sense = ["max"] * 3
        paretoset.paretoset(big[:100], sense=sense, distinct=False)  # compile numba once
        t_ps, m3 = timed(paretoset.paretoset, big, sense=sense, distinct=False, repeat=3)
        t_ours2, m4 = timed(P.first_front_mask, big, repeat=3)
        assert np.array_equal(m3, m4)
        print(f"  first front, {len(big):,} pts: ours {t_ours2 * 1e3:8.1f} ms | paretoset   {t_ps * 1e3:8.1f} ms "
              f"| {faster(t_ours2, t_ps, 'paretoset')}")
    # Monte Carlo: our pruned cascade vs full pairwise tests in every draw
    idx = rng.choice(args.n, min(args.n, 2000), replace=False)
    n_d = 100
    t_mc, _ = timed(U.front_probability, mean[idx], low[idx], high[idx], n_d, 1)
    unc = U.Uncertain.from_interval(mean[idx], low[idx], high[idx])
    t_b = time.perf_counter()
    x = np.moveaxis(unc.draw(np.random.default_rng(1), n_d), 0, 2)
    for d in range(n_d):
        brute_mask(x[d])
    t_b = time.perf_counter() - t_b
    print(f"  P(front), {len(idx):,} pts x {n_d} draws: ours {t_mc:6.2f} s | pairwise per draw {t_b:6.2f} s "
          f"| {faster(t_mc, t_b, 'pairwise')}")
    if missed:
        print(f"MISSED: {', '.join(missed)}")
    return 1 if missed else 0


if __name__ == "__main__":
    sys.exit(main())
