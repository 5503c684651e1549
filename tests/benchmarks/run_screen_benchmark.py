"""Benchmark of `auditor screen`: many outcomes of two groups of 200, each audited with B bootstrap
resamples, against a plain loop over the outcomes that computes the same statistics with
scipy and pingouin.

Run with `python tests/benchmarks/run_screen_benchmark.py` (N = 50, 100 and 200 outcomes), `--full`
to add the target size of 1,000 outcomes, or `--quick` (small N, B = 200, well under a minute) to check
that the script works. `--engines` adds the comparison of the engines (the local process pool
with 1 and --jobs workers, a Dask LocalCluster of --jobs workers) on the largest N and on a
manifest of 100 files of 10 outcomes, with Dask's cost per task and the bytes a batch moves.
`make bench-screen` runs the README's figures (200 and 1,000 outcomes, engines). Not part of
`make test`.

Target: 1,000 outcomes of 2x200 with B = 2000 screened at least 30x faster than the plain loop
computing every statistic of the row, with --jobs 2 (the ratio without the plain loop's
fragility search is printed beside it); time growing linearly with the number of outcomes; peak
memory bounded independently of the number of outcomes; Dask and local within 15% of each other.

Data: one CSV per N with a group column ('arm': treated, control; 200 rows each) and N outcome
columns cycling through four shapes: normal with a shift, lognormal, integer ratings 1-7, and normal
with one extreme value. Column j is drawn from its own seeded stream, so the first columns are the
same at every N.

The screen runs under the default policy with `intervals.method = "bootstrap"`, so that every
interval of a row is a BCa interval over the B resamples (under the default policy's analytic
intervals a two-group row needs no bootstrap; `--with-default` times that too, for information).

Each N runs in a fresh process (started with 'spawn') that:
1. imports the package and screens a tiny file once (lazy imports), then notes its resident memory;
2. screens the file with `auditor.screen.run_screen(..., jobs=J, out=...)` (ours; one run per N,
   worker processes included) and takes its peak resident memory (ru_maxrss) minus the memory of
   step 1, and the largest peak of its worker processes;
3. times the baseline in the same process on the same data: a plain Python loop over the first
   few outcomes (one of each shape), scaled to N. Per outcome it computes the statistics of the
   screen's row with scipy and pingouin: Shapiro-Wilk, skewness and excess kurtosis per group
   (the spread check reads the SDs); Cohen's d (pingouin.compute_effsize), A (Mann-Whitney U / n_A n_B) and the
   row's primary index, each with a BCa interval from scipy.stats.bootstrap (drawing the very
   resamples the screen draws: the limits must agree with the row's); the p of the row's test;
   leave-one-out values of d and of the primary index by refitting after each removal (best of
   two); and the primary index's fragility count by a plain greedy search that refits the index
   without each remaining value at every step (one run; the counts must equal the row's).
   The ratio is printed with and without that search, which dominates the plain loop.

Printed: seconds per outcome at each N; the growth of time over the growth of N between sizes
(1.0 is linear; the fixed cost of starting the workers pulls it below 1 at small N); "baseline /
ours" at each N; and memory in MiB, beside the size the whole input would take held as text cells
(the screen reads the file by batches of columns and holds one batch at a time).
"""

from __future__ import annotations

import argparse
import csv
import gc
import json
import math
import multiprocessing
import os
import resource
import sys
import tempfile
import time
import tracemalloc
import warnings
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np
from timing import best_of, peak_bytes, resident_bytes, whole_numbers

GROUP_SIZE = 200
LABELS = ("treated", "control")
SHAPES = ("normal", "lognormal", "rating", "extreme")
DATA_SEED = 2026


# ------------------------------------------------------------------ data


def outcome_values(j: int, n: int = GROUP_SIZE) -> tuple[np.ndarray, np.ndarray]:
    """The two groups of outcome column j (treated, control), from its own seeded stream."""
    rng = np.random.default_rng([DATA_SEED, j])
    shape = SHAPES[j % len(SHAPES)]
    shift = rng.uniform(-0.4, 0.6)
    if shape == "normal":
        a, b = rng.normal(shift, 1.0, n), rng.normal(0.0, rng.uniform(0.8, 1.5), n)
    elif shape == "lognormal":
        a, b = rng.lognormal(shift, 0.8, n), rng.lognormal(0.0, 0.8, n)
    elif shape == "rating":
        a = np.clip(np.round(rng.normal(4.0 + shift, 1.4, n)), 1, 7)
        b = np.clip(np.round(rng.normal(4.0, 1.4, n)), 1, 7)
    else:  # normal with one extreme value in the treated group
        a, b = rng.normal(shift, 1.0, n), rng.normal(0.0, 1.0, n)
        a[rng.integers(n)] = 15.0
    return np.round(a, 3), np.round(b, 3)


def write_data(path: Path, outcomes: int, n: int = GROUP_SIZE) -> None:
    columns = [outcome_values(j, n) for j in range(outcomes)]
    with path.open("w", encoding="utf-8", newline="") as f:
        writer = csv.writer(f)
        writer.writerow(["arm"] + [f"y{j:04d}_{SHAPES[j % len(SHAPES)]}" for j in range(outcomes)])
        for k, label in enumerate(LABELS):
            for i in range(n):
                writer.writerow([label] + [_cell(c[k][i]) for c in columns])


def _cell(x: float) -> str:
    return str(int(x)) if float(x).is_integer() else repr(float(x))


# ------------------------------------------------------------------ the plain baseline


def _cohen_d(x, y, axis=-1):
    nx, ny = x.shape[axis], y.shape[axis]
    pooled = ((nx - 1) * x.var(axis=axis, ddof=1) + (ny - 1) * y.var(axis=axis, ddof=1)) \
        / (nx + ny - 2)
    return (x.mean(axis=axis) - y.mean(axis=axis)) / np.sqrt(pooled)


def _hedges_g(x, y, axis=-1):
    from scipy.special import gammaln

    df = x.shape[axis] + y.shape[axis] - 2  # the exact factor J (Hedges 1981), as the screen's
    return _cohen_d(x, y, axis) * np.exp(gammaln(df / 2) - gammaln((df - 1) / 2)) / np.sqrt(df / 2)


def _d_unpooled(x, y, axis=-1):
    average = (x.var(axis=axis, ddof=1) + y.var(axis=axis, ddof=1)) / 2
    return (x.mean(axis=axis) - y.mean(axis=axis)) / np.sqrt(average)


def _prob_superiority(x, y, axis=-1):
    from scipy import stats

    return stats.mannwhitneyu(x, y, axis=axis).statistic / (x.shape[axis] * y.shape[axis])


INDEX = {"cohen_d": _cohen_d, "hedges_g": _hedges_g, "d_unpooled": _d_unpooled,
         "prob_superiority": _prob_superiority}


def _test_p(name: str, a: np.ndarray, b: np.ndarray) -> float:
    from scipy import stats

    if name == "student_t":
        return stats.ttest_ind(a, b).pvalue
    if name == "welch_t":
        return stats.ttest_ind(a, b, equal_var=False).pvalue
    if name == "mann_whitney":
        return _mann_whitney_p(a, b)
    return stats.brunnermunzel(a, b).pvalue


def _mann_whitney_p(a: np.ndarray, b: np.ndarray) -> float:
    """The screen's Mann-Whitney p: exact without ties up to n_A n_B = 2500, else the normal
    approximation with the tie correction and no continuity correction."""
    from scipy import stats

    untied = np.unique(np.concatenate([a, b])).size == a.size + b.size
    method = "exact" if untied and a.size * b.size <= 2500 else "asymptotic"
    return stats.mannwhitneyu(a, b, use_continuity=False, method=method).pvalue


def _interval_holds_null(name: str, a: np.ndarray, b: np.ndarray, level: float) -> bool:
    """Does the index's analytic interval (the one the screen's fragility search recomputes)
    contain the no-effect value? For g (noncentral t) and A (Brunner-Munzel t) by the duality of
    interval and test: it does exactly when the two-sided p of Student's t or of scipy's
    Brunner-Munzel test is at least 1 - level (the benchmark's policy quotes each index's own
    interval: `bootstrap_policy`). For d with unpooled SDs, Bonett's (2008) normal
    interval, written out."""
    from scipy import stats

    if name == "hedges_g":
        return stats.ttest_ind(a, b).pvalue >= 1 - level
    if name == "prob_superiority":
        return stats.brunnermunzel(a, b).pvalue >= 1 - level
    na, nb, va, vb = a.size, b.size, a.var(ddof=1), b.var(ddof=1)
    s2 = (va + vb) / 2
    d = _d_unpooled(a, b)
    se = np.sqrt(d**2 * (va**2 / (na - 1) + vb**2 / (nb - 1)) / (8 * s2**2)
                 + (va / (na - 1) + vb / (nb - 1)) / s2)
    return abs(d) <= stats.norm.ppf(0.5 + level / 2) * se


def plain_fragility(a: np.ndarray, b: np.ndarray, name: str, level: float = 0.95,
                    limit: int = 200) -> int | None:
    """The screen's fragility count, searched plainly: remove, one at a time, the value whose
    removal (found by refitting the index without each remaining value) moves the estimate
    furthest toward the no-effect value, the earlier file line first among equals, until the
    analytic interval holds the no-effect value. `a` and `b` are in file order (group A's lines
    come first); no group shrinks below 2 values; None after `limit` removals."""
    fn, null = INDEX[name], (0.5 if name == "prob_superiority" else 0.0)
    if _interval_holds_null(name, a, b, level):
        return 0
    side = np.sign(fn(a, b) - null)
    keep = [list(range(a.size)), list(range(b.size))]
    for step in range(1, limit + 1):
        best = None  # (score, file line, group, position)
        for k in (0, 1):
            if len(keep[k]) - 1 < 2:
                continue
            for pos, i in enumerate(keep[k]):
                rest = [j for j in keep[k] if j != i]
                pair = (a[rest], b[keep[1]]) if k == 0 else (a[keep[0]], b[rest])
                candidate = (side * (fn(*pair) - null), i + (0 if k == 0 else a.size), k, pos)
                if best is None or candidate[:2] < best[:2]:
                    best = candidate
        if best is None:
            return None
        del keep[best[2]][best[3]]
        if _interval_holds_null(name, a[keep[0]], b[keep[1]], level):
            return step
    return None


def baseline_outcome(a: np.ndarray, b: np.ndarray, resamples: int, seed: int,
                     primary: str = "hedges_g", test: str = "student_t") -> dict:
    """The statistics of one screen row, computed plainly with scipy and pingouin: the
    normality diagnostics, d, A and the primary index with BCa intervals, the primary test's p, and the
    leave-one-out values of d (the outlier check) and of the primary index (the most influential
    case) by refitting."""
    import pingouin
    from scipy import stats

    from auditor.resampling import chunk_size

    out = {
        "shapiro_p": [stats.shapiro(x).pvalue for x in (a, b)],
        "skew_kurtosis": [(stats.skew(x, bias=False), stats.kurtosis(x, bias=False))
                          for x in (a, b)],
        "d": pingouin.compute_effsize(a, b, eftype="cohen"),
        "A": _prob_superiority(a, b),
        "p": _test_p(test, a, b),
        "normal_theory_gap": None,
    }
    out["normal_theory_gap"] = out["A"] - stats.norm.cdf(out["d"] / np.sqrt(2))
    shown = dict.fromkeys(["cohen_d", "prob_superiority", primary])
    # the screen holds each group in increasing order and draws from default_rng(seed) in
    # chunks: with the groups sorted and `batch` set to the chunk, scipy draws the same resamples
    batch = chunk_size(a.size, b.size, resamples)
    for name in shown:
        res = stats.bootstrap((np.sort(a), np.sort(b)), INDEX[name], n_resamples=resamples, method="BCa",
                              batch=batch, rng=np.random.default_rng(seed))
        out[f"{name}_bca"] = tuple(res.confidence_interval)
    removals = []
    watched = [INDEX[n] for n in dict.fromkeys(["cohen_d", primary])]
    for k, x in enumerate((a, b)):  # refit d and the primary index without each value in turn
        for i in range(x.size):
            kept = np.delete(x, i)
            pair = (kept, b) if k == 0 else (a, kept)
            removals.append([fn(*pair) for fn in watched])
    out["leave_one_out"] = np.array(removals)
    return out


def read_groups(path: Path, columns: list[str]) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    import pandas as pd

    frame = pd.read_csv(path)
    return {c: tuple(frame.loc[frame["arm"] == label, c].to_numpy(float) for label in LABELS)
            for c in columns}


# ------------------------------------------------------------------ one N, in a fresh process


def bootstrap_policy():
    """The default policy with `intervals.method = "bootstrap"` and `intervals.match_test =
    false`: every interval of a screen row is then a BCa interval over the B resamples (with the
    default, analytic intervals, a two-group row needs no bootstrap at all, and the default
    `match_test` quotes the primary index's test-matched interval, such as the proportional-odds
    score interval of A, which no scipy function computes)."""
    from auditor.policy import default_text, parse_policy

    text = default_text().replace('method = "analytic"', 'method = "bootstrap"', 1)
    text = text.replace("\nmatch_test = true", "\nmatch_test = false", 1)
    return parse_policy(text, "default policy, bootstrap intervals")


def _screen_timed(path, resamples, jobs, folder, policy):
    from auditor.screen import run_screen

    start = time.perf_counter()
    files, skipped = run_screen(path, group="arm", resamples=resamples, jobs=jobs, out=folder,
                                policy=policy)
    return time.perf_counter() - start, files, skipped


def run_one_size(path: str, warmup: str, outcomes: int, resamples: int, jobs: int,
                 baseline_count: int, repeats: int, default_too: bool) -> dict:
    """Runs in a fresh spawned process: ours (timed, memory), then the baseline (timed)."""
    from auditor.screen import run_screen

    policy = bootstrap_policy()
    with tempfile.TemporaryDirectory() as folder:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            run_screen(warmup, group="arm", resamples=100, jobs=1, out=Path(folder) / "warm",
                       policy=policy)
        gc.collect()
        before = resident_bytes()
        before = peak_bytes() if before is None else before
        seconds, files, skipped = _screen_timed(path, resamples, jobs, Path(folder) / "screen",
                                                policy)
        extra_peak = max(0, peak_bytes() - before)  # 0: the screen stayed below the earlier peak
        worker_peak = peak_bytes(resource.RUSAGE_CHILDREN)
        rows = json.loads(files.json.read_text(encoding="utf-8"))["rows"]
        default_seconds = (_screen_timed(path, resamples, jobs, Path(folder) / "default", None)[0]
                           if default_too else None)
    assert files.rows == outcomes and not skipped, (files.rows, skipped)
    assert all(r["status"] == "audited" for r in rows), [r["reason"] for r in rows if r["reason"]]

    picked = rows[:baseline_count]
    data = read_groups(Path(path), [r["outcome"] for r in picked])

    def baseline(row):
        return baseline_outcome(*data[row["outcome"]], resamples, row["seed"], row["primary"],
                                row["test"])

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        results = [baseline(r) for r in picked]
        t_baseline = best_of(lambda: [baseline(r) for r in picked], repeats)
    gap = interval_gap = 0.0
    for row, mine in zip(picked, results):  # the baseline computes the statistics of the row
        gap = max(gap, abs(mine["d"] - row["cohen_d"]), abs(mine["A"] - row["prob_superiority"]),
                  abs(mine["p"] - row["p"]) if row["p"] is not None else 0.0)
        for name, key in (("cohen_d", "cohen_d"), ("prob_superiority", "prob_superiority"),
                          (row["primary"], "ci")):
            low, high = mine[f"{name}_bca"]
            interval_gap = max(interval_gap, abs(low - row[f"{key}_low"]),
                               abs(high - row[f"{key}_high"]))
    assert gap < 1e-9, gap
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        start = time.perf_counter()  # one run: the plain search takes seconds per outcome
        counts = [plain_fragility(*data[r["outcome"]], r["primary"]) for r in picked]
        t_fragility = time.perf_counter() - start
    assert counts == [r["fragility"] for r in picked], (counts, [r["fragility"] for r in picked])
    # rating data: replicates of A equal to the estimate, where the last bit decides on which
    # side of it they count, move a BCa limit by about 1e-5
    assert interval_gap < 1e-4, interval_gap
    tracemalloc.start()  # what the screen holds of the input: the file's cells as text
    from auditor.load import read_table

    header = read_table(path, ["arm"]).header
    table = read_table(path, list(header))
    table_bytes = tracemalloc.get_traced_memory()[0]
    tracemalloc.stop()
    del table
    return {"seconds": seconds, "default_seconds": default_seconds, "extra_peak": extra_peak,
            "worker_peak": worker_peak, "table_bytes": table_bytes,
            "baseline_per_outcome": t_baseline / len(picked), "baseline_count": len(picked),
            "fragility_per_outcome": t_fragility / len(picked), "fragility_counts": counts,
            "gap": gap, "interval_gap": interval_gap, "file_bytes": os.path.getsize(path)}


# ------------------------------------------------------------------ engines, files, workers


def _noop(x):
    return x


def write_manifest(folder: Path, files: int, outcomes: int) -> Path:
    """`files` data files of `outcomes` outcomes each (file k holds columns k*outcomes ...), and
    a manifest listing them."""
    (folder / "files").mkdir(parents=True, exist_ok=True)
    lines = ["file,group"]
    for k in range(files):
        name = f"files/part{k:03d}.csv"
        columns = [outcome_values(k * outcomes + j) for j in range(outcomes)]
        with (folder / name).open("w", encoding="utf-8", newline="") as f:
            writer = csv.writer(f)
            writer.writerow(["arm"] + [f"y{k * outcomes + j:04d}" for j in range(outcomes)])
            for g, label in enumerate(LABELS):
                for i in range(GROUP_SIZE):
                    writer.writerow([label] + [_cell(c[g][i]) for c in columns])
        lines.append(f"{name},arm")
    manifest = folder / "manifest.csv"
    manifest.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return manifest


def run_engines(path: str, manifest: str, resamples: int, jobs: int, tasks: int,
                rounds: int = 2) -> dict:
    """Runs in a fresh spawned process: the same screen on the local engine with 1 and `jobs`
    workers and on a Dask LocalCluster of `jobs` workers (its start timed apart, the engines
    timed in turn, each the shorter of `rounds` runs), for one file and for a manifest of many;
    the scheduler's cost per task and the bytes a batch moves."""
    import pickle

    from dask.distributed import Client, LocalCluster

    from auditor.screen import _Job, audit_batch, run_screen, run_screens
    from auditor.sources import read_manifest

    policy = bootstrap_policy()
    sources = read_manifest(manifest)
    out: dict = {}
    with tempfile.TemporaryDirectory() as folder, warnings.catch_warnings():
        warnings.simplefilter("ignore")

        def timed(name, fn):  # the shorter of `rounds` runs (the machine is noisy)
            for _ in range(rounds):
                start = time.perf_counter()
                fn(Path(folder) / name)
                out[name] = min(out.get(name, math.inf), time.perf_counter() - start)
            return {f: (Path(folder) / name / f).read_bytes()
                    for f in ("screen.csv", "screen.json")}

        one = dict(group="arm", resamples=resamples, policy=policy)
        many = dict(resamples=resamples, policy=policy)
        base = timed("file_local_1", lambda o: run_screen(path, jobs=1, out=o, **one))
        timed("many_local_1", lambda o: run_screens(sources, jobs=1, out=o, **many))
        start = time.perf_counter()
        with LocalCluster(n_workers=jobs, threads_per_worker=1, processes=True,
                          dashboard_address=None) as cluster, Client(cluster) as client:
            out["cluster_start"] = time.perf_counter() - start
            address = cluster.scheduler_address
            same, same_many = True, True
            for _ in range(rounds):  # the engines in turn, so that a slow spell hits both
                same &= timed("file_local_j", lambda o: run_screen(path, jobs=jobs, out=o,
                                                                   **one)) == base
                same &= timed("file_dask", lambda o: run_screen(
                    path, jobs=jobs, out=o, engine="dask", scheduler=address, **one)) == base
                many_local = timed("many_local_j", lambda o: run_screens(
                    sources, jobs=jobs, out=o, **many))
                same_many &= timed("many_dask", lambda o: run_screens(
                    sources, jobs=jobs, out=o, engine="dask", scheduler=address,
                    **many)) == many_local
            client.submit(_noop, 0).result()  # the scheduler's cost per task, warm
            start = time.perf_counter()
            client.gather(client.map(_noop, range(tasks), pure=False))
            out["per_task"] = (time.perf_counter() - start) / tasks
        # what one batch of 50 outcomes moves: its task (the column names; the job is sent
        # once per worker) and its results
        from auditor.load import read_table

        header = read_table(path, ["arm"]).header
        names = [c for c in header if c != "arm"][:50]
        job = _Job(str(Path(path).resolve()), None, "arm", None, None, policy, 2026, resamples,
                   None, None)
        results = audit_batch(dataclasses_replace_stamp(job, path), names)
        out["bytes_job"] = len(pickle.dumps(job))
        out["bytes_task"] = len(pickle.dumps((0, names, None)))
        out["bytes_results"] = len(pickle.dumps(results))
        out["batch_outcomes"] = len(names)
    out["same_file"], out["same_many"] = same, same_many
    return out


def dataclasses_replace_stamp(job, path):
    import dataclasses

    from auditor.screen import file_stamp

    return dataclasses.replace(job, stamp=file_stamp(path))


def report_engines(r: dict, outcomes: int, files: int, per_file: int, jobs: int) -> None:
    print(f"engines, {outcomes} outcomes in one file (B as above, {jobs} workers; each the"
          f" shorter of two runs, the engines in turn):"
          f" local 1 worker {r['file_local_1']:.1f} s, local {jobs} workers"
          f" {r['file_local_j']:.1f} s, Dask LocalCluster {r['file_dask']:.1f} s (+"
          f" {r['cluster_start']:.1f} s to start the cluster); Dask / local ="
          f" {r['file_dask'] / r['file_local_j']:.2f} (within 15% expected), with the cluster's"
          f" start {(r['file_dask'] + r['cluster_start']) / r['file_local_j']:.2f}; files"
          f" identical: {r['same_file']}")
    print(f"scaling with workers (local engine, one file): 1 -> {jobs} workers"
          f" {r['file_local_1'] / r['file_local_j']:.2f}x faster (ideal {jobs}.00x)")
    print(f"manifest of {files} files x {per_file} outcomes: local 1 worker"
          f" {r['many_local_1']:.1f} s, local {jobs} workers {r['many_local_j']:.1f} s, Dask"
          f" {r['many_dask']:.1f} s; Dask / local = {r['many_dask'] / r['many_local_j']:.2f};"
          f" 1 -> {jobs} workers {r['many_local_1'] / r['many_local_j']:.2f}x; tables identical:"
          f" {r['same_many']}")
    per_outcome = r["file_local_1"] / outcomes
    print(f"Dask's cost per task here: {r['per_task'] * 1e3:.2f} ms (a no-op task, submitted"
          f" and gathered), {r['per_task'] / (per_outcome * r['batch_outcomes']):.2%} of a batch"
          f" of {r['batch_outcomes']} outcomes ({per_outcome * r['batch_outcomes']:.1f} s on one"
          f" worker); bytes moved: the job {r['bytes_job'] / 1024:.1f} KiB once per worker, a"
          f" task {r['bytes_task']} B (column names; the worker reads the columns from the"
          f" file), its results {r['bytes_results'] / 1024:.1f} KiB"
          f" ({r['bytes_results'] / r['batch_outcomes']:.0f} B per outcome)")


# ------------------------------------------------------------------ report


def _counts(text: str) -> list[int]:
    return whole_numbers(text, 2, "50,100,200", "outcome counts")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true",
                        help="8 and 16 outcomes, B = 200, 2 baseline outcomes (well under a minute)")
    parser.add_argument("--full", action="store_true",
                        help="add the target size, 1000 outcomes (several minutes)")
    parser.add_argument("--outcomes-list", type=_counts, default=None, metavar="N,N,...",
                        help="numbers of outcomes to screen (default 50,100,200)")
    parser.add_argument("--resamples", type=int, default=None,
                        help="bootstrap resamples per outcome (default 2000; 200 with --quick)")
    parser.add_argument("--jobs", type=int, default=2, help="worker processes of the screen")
    parser.add_argument("--baseline-outcomes", type=int, default=None, metavar="K",
                        help="outcomes the baseline is timed on, then scaled (default 4, one of"
                             " each shape; 2 with --quick)")
    parser.add_argument("--engines", action="store_true",
                        help="also compare the engines (local with 1 and --jobs workers, Dask"
                             " LocalCluster with --jobs) on the largest N and on a manifest of"
                             " --manifest-files files, and time Dask's cost per task (needs"
                             " auditor[dask])")
    parser.add_argument("--manifest-files", type=int, default=None, metavar="F",
                        help="files in the manifest case (default 100; 10 with --quick), each"
                             " with --outcomes-per-file outcomes")
    parser.add_argument("--outcomes-per-file", type=int, default=None, metavar="K",
                        help="outcomes per file of the manifest case (default 10; 2 with"
                             " --quick)")
    parser.add_argument("--with-default", action="store_true",
                        help="also time the screen under the default policy (analytic intervals,"
                             " so no bootstrap), for information")
    args = parser.parse_args(argv)
    counts = args.outcomes_list or ([8, 16] if args.quick else [50, 100, 200])
    if args.full and 1000 not in counts:
        counts = sorted(counts + [1000])
    resamples = args.resamples or (200 if args.quick else 2000)
    baseline_count = args.baseline_outcomes or (2 if args.quick else len(SHAPES))
    baseline_count = max(1, min(baseline_count, counts[0]))
    repeats = 1 if args.quick else 2

    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"machine: {os.cpu_count()} logical CPUs, load average {load:.1f} at the start (other"
          f" work on the machine slows --jobs most), numpy {np.__version__}; outcomes of 2x"
          f"{GROUP_SIZE} ({', '.join(SHAPES)}, in turn), B = {resamples}, --jobs {args.jobs};"
          " ours is one run per N, each N in a fresh process, under the default policy with"
          " bootstrap (BCa) intervals, so that every interval in a row comes from the B"
          " resamples")
    context = multiprocessing.get_context("spawn")
    runs = {}
    with tempfile.TemporaryDirectory() as folder:
        warmup = Path(folder) / "warmup.csv"
        write_data(warmup, 2, 20)
        for n in counts:
            path = Path(folder) / f"screen_{n}.csv"
            write_data(path, n)
            # a fresh process per N (not a daemon: it starts the screen's workers), so its peak
            # memory is this run's alone
            with ProcessPoolExecutor(max_workers=1, mp_context=context) as pool:
                runs[n] = pool.submit(run_one_size, str(path), str(warmup), n, resamples,
                                      args.jobs, baseline_count, repeats,
                                      args.with_default).result()
            if args.engines and n == counts[-1]:
                files = args.manifest_files or (10 if args.quick else 100)
                per_file = args.outcomes_per_file or (2 if args.quick else 10)
                manifest = write_manifest(Path(folder) / "many", files, per_file)
                with ProcessPoolExecutor(max_workers=1, mp_context=context) as pool:
                    engines = pool.submit(run_engines, str(path), str(manifest), resamples,
                                          args.jobs, 200 if args.quick else 1000).result()
            path.unlink()
    for n in counts:
        r = runs[n]
        print(f"screen of {n} outcomes: {r['seconds']:.1f} s, {r['seconds'] / n:.3f} s per"
              f" outcome")
    for n in counts:
        if runs[n]["default_seconds"] is not None:
            print(f"screen of {n} outcomes under the default policy (analytic intervals, no"
                  f" bootstrap): {runs[n]['default_seconds']:.1f} s")
    for small, large in zip(counts, counts[1:]):
        growth = (runs[large]["seconds"] / runs[small]["seconds"]) / (large / small)
        print(f"time growth / outcome growth, {small} -> {large} outcomes: {growth:.2f}"
              f" (linear = 1.0)")
    first = runs[counts[0]]
    print(f"baseline: plain loop over outcomes with scipy/pingouin, timed on the first"
          f" {first['baseline_count']} outcomes (best of {repeats}) in the process of each N;"
          f" agrees with the screen's d, A and p to {max(r['gap'] for r in runs.values()):.0e},"
          f" and its BCa limits (scipy.stats.bootstrap drawing the same resamples) with the"
          f" screen's to {max(r['interval_gap'] for r in runs.values()):.0e}")
    print("the baseline's fragility counts (a plain greedy search refitting the primary index"
          " without each remaining value; one run) equal the screen's:"
          f" {first['fragility_counts']} on the first N")
    for n in counts:
        r = runs[n]
        lean = r["baseline_per_outcome"] * n
        whole = (r["baseline_per_outcome"] + r["fragility_per_outcome"]) * n
        target = "; target >= 30x" if n == 1000 else ""
        cores = f"; per process {whole / r['seconds'] / args.jobs:.1f}x" if args.jobs > 1 else ""
        print(f"baseline / ours, {n} outcomes: {whole / r['seconds']:.1f}x with every statistic of"
              f" the row ({r['baseline_per_outcome'] + r['fragility_per_outcome']:.3f} s per"
              f" outcome, scaled from {r['baseline_count']} of {n}){target}{cores}; without the"
              f" fragility search {lean / r['seconds']:.1f}x ({r['baseline_per_outcome']:.3f} s"
              f" per outcome)")
    if args.engines:
        report_engines(engines, counts[-1], files, per_file, args.jobs)
    for n in counts:
        r = runs[n]
        print(f"memory, {n} outcomes: extra peak {r['extra_peak'] / 2**20:.1f} MiB in the screening"
              f" process (peak RSS minus RSS after imports and a warm-up screen); largest worker's"
              f" peak RSS {r['worker_peak'] / 2**20:.0f} MiB (imports included); for scale, the"
              f" whole input held as text cells would take {r['table_bytes'] / 2**20:.1f} MiB"
              f" (tracemalloc; the file is {r['file_bytes'] / 2**20:.1f} MiB), where the screen"
              f" holds one batch of columns at a time")
    return 0


if __name__ == "__main__":
    sys.exit(main())
