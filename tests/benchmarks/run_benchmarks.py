"""Benchmarks: the project's routes beside plain baselines, timed in the same process, as ratios.

Run with `make bench`. Not part of `make test`: timings are noisy on a shared 2-core machine, so
each figure is the best of several repeats and only ratios are printed.
"""

from __future__ import annotations

import sys
import time
import warnings

import numpy as np
from scipy import stats

from auditor import parametric, ranks
from auditor.resampling import bca_interval, bootstrap_replicates, chunk_size, leave_one_out


def best_of(fn, repeats: int = 3) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def hodges_lehmann(n: int, rng) -> None:
    a, b = rng.normal(0.3, 1, n), rng.normal(0, 1, n)
    naive = lambda: float(np.median(np.subtract.outer(a, b)))  # noqa: E731
    ours = lambda: ranks.hodges_lehmann(a, b, 0.95)  # noqa: E731 - estimate and interval
    assert ours().value == naive()
    t_naive, t_ours = best_of(naive), best_of(ours)
    print(f"Hodges-Lehmann estimate+interval, 2x{n}: naive median of all pairs (estimate only) / ours (estimate and interval) ="
          f" {t_naive / t_ours:.1f}x")


def bca_for_d(n: int, rng, resamples: int = 2000) -> None:
    a, b = rng.normal(0.4, 1, n), rng.normal(0, 1.3, n)
    step = chunk_size(n, n, resamples)

    def scipy_route():
        return stats.bootstrap((a, b), lambda x, y, axis=-1: parametric.cohen_d_values(x, y),
                               n_resamples=resamples, batch=step, method="BCa",
                               rng=np.random.default_rng(5)).confidence_interval

    def ours():
        reps = bootstrap_replicates({"d": parametric.cohen_d_values}, a, b, resamples,
                                    np.random.default_rng(5))["d"]
        loo = leave_one_out(parametric.cohen_d_values, a, b)
        return bca_interval(float(parametric.cohen_d_values(a, b)), reps, loo, 0.95).interval

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref, mine = scipy_route(), ours()
        assert abs(ref.low - mine.low) < 1e-9 and abs(ref.high - mine.high) < 1e-9
        t_ref, t_ours = best_of(scipy_route, 2), best_of(ours, 2)
    print(f"BCa interval of d (B = {resamples}), 2x{n}: scipy.stats.bootstrap / ours ="
          f" {t_ref / t_ours:.1f}x (same replicates)")


def main() -> int:
    rng = np.random.default_rng(2026)
    for n in (500, 2000, 5000):
        hodges_lehmann(n, rng)
    for n in (200, 1000):
        bca_for_d(n, rng)
    return 0


if __name__ == "__main__":
    sys.exit(main())
