"""Benchmark of the coverage check (`auditor.coverage_check.coverage_check`) beside one ordinary
audit of the same data, timed in the same process, as ratios.

Run with `python tests/benchmarks/run_coverage_check_benchmark.py` (2x200 and 2x2000), `--sizes`
for other group sizes, or `--quick` (2x200 only, fewer simulations, scaled) to check that the
script works. Not part of `make test`; nothing is asserted about times.

Data: two groups of n ('treated' lognormal with a shift, 'control' normal), rounded to 3
decimals, from a seeded stream per size.

Baseline: `auditor.pipeline.audit(frame, outcome="y", group="g")` on the same data as a pandas
DataFrame, with the default policy (B = 2000 resamples for every index), best of three runs.

Ours: the check at the default number of simulations (200) for
- Cohen's d with its analytic (noncentral t) interval;
- A (prob_superiority) and Cohen's d with the BCa interval, at B = 2000 (the check's default,
  the pipeline's own B) and at B = 1000.
A BCa check above 2x500 per group (or any BCa check with --quick) is timed on runs of
`SHARE_LOW` and `SHARE_HIGH` simulations and extrapolated linearly to 200 (marked 'scaled'):
simulations are independent and cost the same, and the fixed part (the population value) is
the intercept.

Printed per line: seconds of the check (best of two full runs, or scaled), seconds of one
audit, and the ratio check / audit.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import warnings

import numpy as np
from timing import best_of, whole_numbers

from auditor.coverage_check import DEFAULT_SIMULATIONS, coverage_check
from auditor.effects import two_group_effects
from auditor.errors import AuditWarning
from auditor.pipeline import audit

DATA_SEED = 2027
SHARE_LOW, SHARE_HIGH = 10, 40  # simulations timed for a scaled figure
FULL_MAX_BCA = 500  # per group; above it BCa checks are scaled
CASES = (  # (index, method, resamples)
    ("cohen_d", "analytic", None),
    ("prob_superiority", "bca_bootstrap", 2000),
    ("cohen_d", "bca_bootstrap", 2000),
    ("prob_superiority", "bca_bootstrap", 1000),
    ("cohen_d", "bca_bootstrap", 1000),
)


def groups(n: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng([DATA_SEED, n])
    return np.round(rng.lognormal(0.0, 0.7, n) + 0.2, 3), np.round(rng.normal(1.2, 0.9, n), 3)


def frame_of(a: np.ndarray, b: np.ndarray):
    import pandas as pd

    return pd.DataFrame({"y": np.concatenate([a, b]),
                         "g": ["treated"] * a.size + ["control"] * b.size})


def time_check(spec, samples, method: str, resamples: int | None, simulations: int) -> float:
    start = time.perf_counter()
    coverage_check(spec, samples, method=method, simulations=simulations,
                   resamples=resamples or 2000, rng=np.random.default_rng(1))
    return time.perf_counter() - start


def check_cost(spec, samples, method, resamples, simulations, scaled: bool) -> tuple[float, str]:
    if not scaled:
        return best_of(lambda: time_check(spec, samples, method, resamples, simulations),
                       repeats=2), ""
    low = time_check(spec, samples, method, resamples, SHARE_LOW)
    high = time_check(spec, samples, method, resamples, SHARE_HIGH)
    per = (high - low) / (SHARE_HIGH - SHARE_LOW)
    return max(high, low + per * (simulations - SHARE_LOW)), (
        f" (scaled from {SHARE_LOW} and {SHARE_HIGH} simulations)")


def run_size(n: int, simulations: int, quick: bool) -> None:
    a, b = groups(n)
    frame = frame_of(a, b)
    specs = {s.name: s for s in two_group_effects()}
    samples = (np.sort(a), np.sort(b))
    audit(frame_of(a[:30], b[:30]), outcome="y", group="g")  # warm-up: lazy imports, caches
    baseline = best_of(lambda: audit(frame, outcome="y", group="g"), repeats=3)
    print(f"\n2x{n}: one audit (default policy, B = 2000) {baseline:.2f} s")
    for name, method, resamples in CASES:
        scaled = method == "bca_bootstrap" and (n > FULL_MAX_BCA or quick)
        seconds, note = check_cost(specs[name], samples, method, resamples, simulations, scaled)
        label = f"{name} [{method}{'' if resamples is None else f', B = {resamples}'}]"
        print(f"  check of {label:42s} {simulations} simulations: {seconds:7.2f} s,"
              f" {seconds / baseline:6.2f} x one audit{note}")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true",
                        help="2x200 only; BCa checks scaled from short runs")
    parser.add_argument("--sizes", type=lambda t: whole_numbers(t, 10, "200,2000", "group sizes"),
                        default=None, metavar="N,N", help="group sizes (default 200,2000)")
    args = parser.parse_args(argv)
    sizes = args.sizes or ([200] if args.quick else [200, 2000])
    print(f"machine: {os.cpu_count()} logical CPUs, numpy {np.__version__}; check times beside"
          " one audit of the same data, measured in this run")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AuditWarning)  # the audit's named notes about the data
        for n in sizes:
            run_size(n, DEFAULT_SIMULATIONS, args.quick)
    return 0


if __name__ == "__main__":
    sys.exit(main())
