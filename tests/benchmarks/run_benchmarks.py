"""Benchmarks: the project's routes beside plain baselines, timed in the same process, as ratios.

Run with `make bench` (or `python tests/benchmarks/run_benchmarks.py --quick` for small sizes
everywhere). Not part of `make test`: timings are noisy on a shared 2-core machine, so each figure
is the best of a few repeats and only ratios are printed. Where a baseline would take minutes, it
is timed on a stated share of its work and scaled up (marked 'scaled').

Sections (`--only NAME[,NAME]` runs some of them):
- loo: exact leave-one-out of A, Cliff's delta and d against refitting after each removal
  (2x500, 2x5000 and 2x50000; the refit loop is timed on 400 removals and scaled).
- sort: the same leave-one-out against one np.sort of the pooled data (2x200000).
- bca: BCa intervals of A and d in one pass (B = 2000; 2x2000 and 2x20000) against
  scipy.stats.bootstrap (BCa) and against pingouin.compute_bootci (BCa where the installed
  pingouin offers it, else its bias-corrected percentile 'cper'; the method used is printed).
  With BCa above 2x5000, pingouin's bootstrap part is timed in full and its jackknife (one
  statistic call per removed value, over arrays of n x n) on 400 calls and scaled, array building
  left out, so that baseline is understated. Each line also gives our peak extra memory
  (tracemalloc: memory allocated by our route beyond its inputs) and the size where it was
  measured.
- hl: Hodges-Lehmann estimate and interval against the median of all pairwise differences
  (2x500 and 2x5000).
- whole: `auditor.pipeline.audit` on a two-group pandas DataFrame (B = 2000), one run per size
  (2x20000 and 2x200000, or `--whole-sizes`), each in a fresh process started with 'spawn'.
  Printed: the time at each larger size over the time at the smaller one, beside the n log n
  growth it should not exceed, and per size the audit's extra memory: the process's peak resident
  memory (ru_maxrss) minus its resident memory just before the audit, after imports, building the
  data and a small warm-up audit. Memory is printed in MiB, the only figures that are not ratios.

`--quick`: loo at 2x500, sort at 2x20000, bca at 2x500, hl at 2x500, whole at 2x500 and 2x5000.
"""

from __future__ import annotations

import argparse
import gc
import math
import multiprocessing
import os
import sys
import time
import tracemalloc
import warnings

import numpy as np
from scipy import stats

from auditor import parametric, ranks
from auditor.effects import two_group_effects
from auditor.pipeline import estimate_all, leave_one_out_all
from timing import best_of, peak_bytes, resident_bytes, whole_numbers

SECTIONS = ("loo", "sort", "bca", "hl", "whole")
PINGOUIN_FULL_MAX = 5000  # per group; above it a full BCa run would build n x n jackknife arrays


def groups(n: int, rng) -> tuple[np.ndarray, np.ndarray]:
    return np.round(rng.normal(0.3, 1, n), 3), np.round(rng.normal(0, 1.3, n), 3)


def leave_one_out(n: int, rng, share: int) -> None:
    """Exact leave-one-out of A, Cliff's delta and d against refitting with scipy/numpy."""
    a, b = groups(n, rng)
    specs = {s.name: s for s in two_group_effects()}
    wanted = ("prob_superiority", "cliff_delta", "cohen_d")

    def ours():  # as in the pipeline: delta is mapped from A's values (2A - 1)
        return leave_one_out_all([specs[name] for name in wanted], (a, b))

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
        return leave_one_out_all([specs[k] for k in ("prob_superiority", "cliff_delta", "cohen_d")],
                                 (sa, sb))

    t_ours = best_of(ours)
    pooled = np.concatenate([a, b])
    t_sort = best_of(lambda: np.sort(pooled), 5)
    print(f"leave-one-out of A, Cliff's delta, d, 2x{n}: ours / one np.sort of the pooled data ="
          f" {t_ours / t_sort:.1f}x")


def pingouin_method() -> str:
    """'bca' where the installed pingouin.compute_bootci accepts it, else 'cper' (the
    bias-corrected percentile interval, the best that releases without BCa offer)."""
    from pingouin import compute_bootci

    try:
        compute_bootci(np.arange(6.0), np.arange(6.0) + 0.5, func=lambda x, y: x.mean() - y.mean(),
                       method="bca", n_boot=100, seed=0)
    except (AssertionError, ValueError):
        return "cper"
    return "bca"


def pingouin_statistics(a, b, value_a: float, value_d: float) -> tuple[dict, str]:
    """The two statistics handed to compute_bootci (one call per resample), checked against our
    estimates: pingouin's own 'cles' (= A) and 'cohen' (= d)."""
    from pingouin.effsize import compute_effsize

    def a_pingouin(x, y):
        return compute_effsize(x, y, eftype="cles")

    def a_ranks(x, y):
        return stats.mannwhitneyu(x, y).statistic / (x.size * y.size)

    def d_pingouin(x, y):
        return compute_effsize(x, y, eftype="cohen")

    cles_is_a = abs(a_pingouin(a, b) - value_a) < 1e-12
    assert abs(d_pingouin(a, b) - value_d) < 1e-12
    named = "compute_effsize 'cles' and 'cohen'" if cles_is_a else \
        "mannwhitneyu U / (n_A n_B) and compute_effsize 'cohen'"
    return {"A": a_pingouin if cles_is_a else a_ranks, "d": d_pingouin}, named


def pingouin_time(a, b, funcs: dict, method: str, resamples: int, share: int) -> tuple[float, str]:
    """Seconds for compute_bootci on both statistics, and a note when the figure is scaled."""
    from pingouin import compute_bootci

    def run(fn, how):
        return compute_bootci(a, b, func=fn, method=how, n_boot=resamples, seed=3, decimals=6)

    if method != "bca" or max(a.size, b.size) <= PINGOUIN_FULL_MAX:
        return sum(best_of(lambda fn=fn: run(fn, method), 1) for fn in funcs.values()), ""
    # The BCa run is its bootstrap (the same work as the percentile method) plus a jackknife of one
    # statistic call per removed value; time the first in full, the second on `share` removals.
    half = share // 2
    t_boot = sum(best_of(lambda fn=fn: run(fn, "per"), 1) for fn in funcs.values())

    def jackknife_share():
        for fn in funcs.values():
            for i in range(half):
                fn(np.delete(a, i), b)
                fn(a, np.delete(b, i))

    t_jack = best_of(jackknife_share, 1) * (a.size + b.size) / (2 * half)
    note = (f" (scaled: bootstrap part timed in full, the {a.size + b.size} jackknife calls from"
            f" {2 * half}, its n x n array building left out, so the baseline is understated)")
    return t_boot + t_jack, note


def bca_a_and_d(n: int, rng, resamples: int = 2000, share: int = 400) -> None:
    """Both BCa intervals in one pass against scipy.stats.bootstrap run once per index, and
    against pingouin.compute_bootci run once per index."""
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
        effects = {e.name: e.estimate for e in ours()[0]}
        peak = tracemalloc.get_traced_memory()[1] / 2**20
        tracemalloc.stop()
        t_ours = best_of(ours, 2)
        t_scipy = best_of(scipy_route, 1)
        method = pingouin_method()
        funcs, named = pingouin_statistics(a, b, effects["prob_superiority"], effects["cohen_d"])
        t_pingouin, note = pingouin_time(a, b, funcs, method, resamples, share)
    memory = f"our peak extra memory (tracemalloc) {peak:.0f} MiB at 2x{n}"
    print(f"BCa of A and d (B = {resamples}), 2x{n}: scipy.stats.bootstrap (BCa, batch {batch}) /"
          f" ours = {t_scipy / t_ours:.1f}x; {memory}")
    print(f"BCa of A and d (B = {resamples}), 2x{n}: pingouin.compute_bootci (method '{method}',"
          f" n_boot {resamples}; {named}) / ours = {t_pingouin / t_ours:.1f}x{note}; {memory}")


def hodges_lehmann(n: int, rng) -> None:
    a, b = groups(n, rng)
    naive = lambda: float(np.median(np.subtract.outer(a, b)))  # noqa: E731
    ours = lambda: ranks.hodges_lehmann(a, b, 0.95)  # noqa: E731 - estimate and interval
    assert ours().value == naive()
    print(f"Hodges-Lehmann, 2x{n}: naive median of all pairs (estimate only) / ours (estimate and"
          f" interval) = {best_of(naive) / best_of(ours):.1f}x; exactly the naive median")


# ------------------------------------------------------------------ whole audit, a process per size


def _frame(n: int, seed: int):
    import pandas as pd

    a, b = groups(n, np.random.default_rng(seed))
    return pd.DataFrame({"score": np.concatenate([a, b]),
                         "arm": np.repeat(np.array(["treated", "control"], dtype=object), n)})


def _whole_audit_child(n: int, resamples: int, seed: int) -> tuple[float, int]:
    """Runs in a fresh spawned process: (seconds of one audit, bytes of peak resident memory
    above the resident memory just before it)."""
    from auditor.pipeline import audit

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        audit(_frame(20, seed), outcome="score", group="arm", resamples=100)  # lazy imports
        frame = _frame(n, seed)
        gc.collect()
        before = resident_bytes()
        before = peak_bytes() if before is None else before
        start = time.perf_counter()
        audit(frame, outcome="score", group="arm", resamples=resamples)
        seconds = time.perf_counter() - start
    return seconds, peak_bytes() - before


def whole_audit(sizes: list[int], resamples: int = 2000) -> None:
    context = multiprocessing.get_context("spawn")
    runs = {}
    for n in sizes:
        with context.Pool(1) as pool:  # a fresh process per size: its peak is this audit's alone
            runs[n] = pool.apply(_whole_audit_child, (n, resamples, 2026 + n))
    for small, large in zip(sizes, sizes[1:]):
        growth = (large * math.log(2 * large)) / (small * math.log(2 * small))
        print(f"whole two-group audit (B = {resamples}): time at 2x{large} / time at 2x{small} ="
              f" {runs[large][0] / runs[small][0]:.1f} (target <= {growth:.1f}, n log n growth;"
              f" n^2 growth would give {(large / small) ** 2:.0f}); one run per size")
    for n in sizes:
        target = "; target < 500 MiB" if n == 200_000 else ""
        print(f"whole two-group audit (B = {resamples}), 2x{n}: extra peak memory"
              f" {runs[n][1] / 2**20:.0f} MiB (fresh process: peak RSS minus RSS after imports,"
              f" data and a warm-up audit){target}")


def _sizes(text: str) -> list[int]:
    return whole_numbers(text, 20, "2000,20000", "group sizes")


def _sections(text: str) -> set[str]:
    names = {part.strip() for part in text.split(",") if part.strip()}
    unknown = sorted(names - set(SECTIONS))
    if unknown or not names:
        raise argparse.ArgumentTypeError(f"unknown section(s) {', '.join(unknown) or text!r};"
                                         f" choose from {', '.join(SECTIONS)}")
    return names


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true", help="smaller sizes only")
    parser.add_argument("--only", type=_sections, default=set(SECTIONS), metavar="NAME[,NAME]",
                        help=f"run only these sections ({', '.join(SECTIONS)})")
    parser.add_argument("--whole-sizes", type=_sizes, default=None, metavar="N,N",
                        help="group sizes n of the whole audit (default 20000,200000;"
                             " 500,5000 with --quick)")
    args = parser.parse_args(argv)
    print(f"machine: {os.cpu_count()} logical CPUs, numpy {np.__version__}; figures are ratios of"
          f" times taken in this run (memory in MiB)")
    def rng(section):  # one stream per section: --only draws the same data as a full run
        return np.random.default_rng([2026, SECTIONS.index(section)])

    if "loo" in args.only:
        stream = rng("loo")
        for n in ((500,) if args.quick else (500, 5000, 50_000)):
            leave_one_out(n, stream, share=400)
    if "sort" in args.only:
        loo_versus_sort(20_000 if args.quick else 200_000, rng("sort"))
    if "bca" in args.only:
        stream = rng("bca")
        for n in ((500,) if args.quick else (2000, 20000)):
            bca_a_and_d(n, stream)
    if "hl" in args.only:
        stream = rng("hl")
        for n in ((500,) if args.quick else (500, 5000)):
            hodges_lehmann(n, stream)
    if "whole" in args.only:
        whole_audit(args.whole_sizes or ([500, 5000] if args.quick else [20_000, 200_000]))
    return 0


if __name__ == "__main__":
    sys.exit(main())
