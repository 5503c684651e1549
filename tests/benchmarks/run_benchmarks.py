"""Benchmarks: the project's routes beside plain baselines, timed in the same process, as ratios.

Run with `make bench` (or `python tests/benchmarks/run_benchmarks.py --quick`). Not part of
`make test`: timings are noisy on a shared 2-core machine, so each figure is the best of a few
repeats and only ratios are printed. Where a baseline would take minutes, it is timed on a stated
share of its work and scaled up (marked 'scaled').
"""

from __future__ import annotations

import argparse
import sys
import time
import tracemalloc
import warnings

import numpy as np
from scipy import stats

from auditor import parametric, ranks
from auditor.effects import two_group_effects
from auditor.pipeline import estimate_all, leave_one_out_values


def best_of(fn, repeats: int = 3) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def groups(n: int, rng) -> tuple[np.ndarray, np.ndarray]:
    return np.round(rng.normal(0.3, 1, n), 3), np.round(rng.normal(0, 1.3, n), 3)


def leave_one_out(n: int, rng, share: int) -> None:
    """Exact leave-one-out of A, Cliff's delta and d against refitting with scipy/numpy."""
    a, b = groups(n, rng)
    specs = {s.name: s for s in two_group_effects()}
    wanted = ("prob_superiority", "cliff_delta", "cohen_d")

    def ours():
        return {name: leave_one_out_values(specs[name], (a, b)) for name in wanted}

    def refit(count):  # remove each of the first `count` values of A, refit every index
        out = []
        for i in range(count):
            x = np.delete(a, i)
            u = stats.mannwhitneyu(x, b).statistic / (x.size * b.size)
            sp = np.sqrt(((x.size - 1) * x.var(ddof=1) + (b.size - 1) * b.var(ddof=1))
                         / (x.size + b.size - 2))
            out.append((u, 2 * u - 1, (x.mean() - b.mean()) / sp))
        return np.array(out)

    fast = ours()
    check = refit(min(share, 50))
    for k, name in enumerate(wanted):
        assert np.max(np.abs(fast[name][0][:check.shape[0]] - check[:, k])) < 1e-12
    count = min(2 * n, share)
    t_refit = best_of(lambda: refit(count), 1) * (2 * n / count)
    t_ours = best_of(ours)
    scaled = " (baseline scaled from %d of %d removals)" % (count, 2 * n) if count < 2 * n else ""
    print(f"leave-one-out of A, Cliff's delta, d, 2x{n}: refit loop / ours ="
          f" {t_refit / t_ours:,.0f}x{scaled}; agree to 1e-12")


def loo_versus_sort(n: int, rng) -> None:
    a, b = groups(n, rng)
    specs = {s.name: s for s in two_group_effects()}
    def ours():  # as in the pipeline: sort each group once, then the exact fast paths
        sa, sb = np.sort(a), np.sort(b)
        return [leave_one_out_values(specs[k], (sa, sb))
                for k in ("prob_superiority", "cliff_delta", "cohen_d")]

    t_ours = best_of(ours)
    pooled = np.concatenate([a, b])
    t_sort = best_of(lambda: np.sort(pooled), 5)
    print(f"leave-one-out of A, Cliff's delta, d, 2x{n}: ours / one np.sort of the pooled data ="
          f" {t_ours / t_sort:.1f}x")


def bca_a_and_d(n: int, rng, resamples: int = 2000) -> None:
    """Both BCa intervals in one pass against scipy.stats.bootstrap run once per index."""
    a, b = groups(n, rng)
    specs = tuple(s for s in two_group_effects() if s.name in ("prob_superiority", "cohen_d"))

    def ours():
        return estimate_all(specs, (a, b), 0.95, resamples, np.random.default_rng(3))

    batch = max(1, 4_000_000 // (2 * n))

    def scipy_route():
        for fn in (ranks.prob_superiority_values, parametric.cohen_d_values):
            stats.bootstrap((a, b), lambda x, y, axis=-1, f=fn: f(x, y), n_resamples=resamples,
                            batch=batch, method="BCa", rng=np.random.default_rng(3))

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        tracemalloc.start()
        ours()
        peak = tracemalloc.get_traced_memory()[1] / 2**20
        tracemalloc.stop()
        t_ours = best_of(ours, 2)
        t_scipy = best_of(scipy_route, 1)
    print(f"BCa of A and d (B = {resamples}), 2x{n}: scipy.stats.bootstrap (batch {batch}) / ours"
          f" = {t_scipy / t_ours:.1f}x; our peak traced memory {peak:.0f} MiB")


def hodges_lehmann(n: int, rng) -> None:
    a, b = groups(n, rng)
    naive = lambda: float(np.median(np.subtract.outer(a, b)))  # noqa: E731
    ours = lambda: ranks.hodges_lehmann(a, b, 0.95)  # noqa: E731 - estimate and interval
    assert ours().value == naive()
    print(f"Hodges-Lehmann, 2x{n}: naive median of all pairs (estimate only) / ours (estimate and"
          f" interval) = {best_of(naive) / best_of(ours):.1f}x; exactly the naive median")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="smaller sizes only")
    args = parser.parse_args(argv)
    rng = np.random.default_rng(2026)
    sizes = (500,) if args.quick else (500, 5000)
    for n in sizes:
        leave_one_out(n, rng, share=400)
    loo_versus_sort(20_000 if args.quick else 200_000, rng)
    for n in ((500,) if args.quick else (2000, 20000)):
        bca_a_and_d(n, rng)
    for n in ((500,) if args.quick else (500, 5000)):
        hodges_lehmann(n, rng)
    return 0


if __name__ == "__main__":
    sys.exit(main())
