"""Stratified bootstrap with BCa intervals, and leave-one-out (jackknife) values.

Resampling is stratified: each bootstrap sample draws n_A values from A and n_B from B with
replacement, so the group sizes stay fixed. All indices share the same resamples. Resamples are
processed in chunks so that the drawn values never take more than `CHUNK_VALUES` numbers
(8 MiB of float64; with indices, counts and temporaries about 80 MiB) at once, whatever the
number of resamples. The random stream is drawn in the
same order as `scipy.stats.bootstrap` with `batch` equal to the chunk size (per chunk: the indices
of A, then those of B), so the two give the same replicates from the same generator.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import special

from auditor.results import Interval

CHUNK_VALUES = 1_000_000
COUNT_BLOCK_VALUES = 32_768  # indices counted at a time (`counts_over_indices`)
Statistic = Callable[..., np.ndarray]


def chunk_size(na: int, nb: int, resamples: int) -> int:
    """Resamples per chunk for two groups of sizes n_A and n_B (see `resamples_per_chunk`)."""
    return resamples_per_chunk(na + nb, resamples)


def resamples_per_chunk(values_per_resample: int, resamples: int) -> int:
    """Resamples per chunk: as many as fit in CHUNK_VALUES drawn values (at least one)."""
    return max(1, min(resamples, CHUNK_VALUES // max(1, values_per_resample)))


def counts_from_indices(idx: np.ndarray) -> np.ndarray:
    """How often each unit was drawn in each resample: (m, n) indices -> (m, n) counts."""
    m, n = idx.shape
    flat = (idx + (np.arange(m) * n)[:, None]).ravel()
    return np.bincount(flat, minlength=m * n).reshape(m, n).astype(float)


def counts_over_indices(idx: np.ndarray) -> np.ndarray:
    """`counts_from_indices`, written into the memory of `idx`, which it consumes: a C-ordered
    (m, n) array of 64-bit integers (as `Generator.integers` draws them) is counted a block of
    about COUNT_BLOCK_VALUES indices at a time (`np.bincount` of the block's rows, unit j of its
    r-th row at r n + j), and each block's float counts overwrite the block's indices, which are
    spent by then. No other array of the chunk's size is made: each fresh one is memory the
    system must map and zero again, and the small blocks stay in cache. Other arrays are left
    alone and counted by `counts_from_indices`."""
    if not (idx.dtype == np.int64 and idx.ndim == 2 and idx.flags.c_contiguous
            and idx.flags.writeable and idx.flags.owndata):
        return counts_from_indices(idx)
    m, n = idx.shape
    counts = idx.view(np.float64)
    step = max(1, min(m, COUNT_BLOCK_VALUES // max(1, n)))
    offsets = (np.arange(step, dtype=np.int64) * n)[:, None]
    for start in range(0, m, step):
        rows = slice(start, min(m, start + step))
        k = rows.stop - start
        drawn = np.bincount((idx[rows] + offsets[:k]).ravel(), minlength=k * n)
        counts[rows] = drawn.reshape(k, n)
    return counts


def resample_units(statistics: Mapping[str, Statistic], samples: Sequence[np.ndarray],
                   resamples: int, rng: np.random.Generator,
                   progress: Callable[[int, int], None] | None = None,
                   count_statistics: Mapping[str, Statistic] | None = None,
                   ) -> dict[str, np.ndarray]:
    """Replicates of every statistic over the same stratified resamples.

    Each sample is one stratum whose first axis indexes its units: a group's values (shape (n,))
    for independent groups, or participants' rows (shape (n, k)) for paired and repeated designs,
    so a participant's conditions stay together. Every stratum is resampled with replacement on
    its own, keeping its size. A statistic takes the stacked resamples, one array per stratum of
    shape (m, n_j, ...), and returns m values. A count statistic takes instead, per stratum, the
    (m, n_j) matrix of how often each unit was drawn (rank statistics use it to avoid sorting each
    resample). Both kinds see the very same resamples.
    """
    count_statistics = count_statistics or {}
    sizes = [s.shape[0] for s in samples]
    step = resamples_per_chunk(sum(s.size for s in samples), resamples)
    out = {name: np.empty(resamples) for name in (*statistics, *count_statistics)}
    done = 0
    while done < resamples:
        m = min(step, resamples - done)
        indices = [rng.integers(0, n, (m, n)) for n in sizes]
        with np.errstate(all="ignore"):
            if statistics:
                stacked = [s[i] for s, i in zip(samples, indices)]
                for name, fn in statistics.items():
                    out[name][done:done + m] = fn(*stacked)
            if count_statistics:
                counts = [counts_over_indices(i) for i in indices]  # the indices are spent
                for name, fn in count_statistics.items():
                    out[name][done:done + m] = fn(*counts)
        done += m
        if progress is not None:
            progress(done, resamples)
    return out


def bootstrap_replicates(statistics: Mapping[str, Statistic], a: np.ndarray, b: np.ndarray,
                         resamples: int, rng: np.random.Generator,
                         progress: Callable[[int, int], None] | None = None) -> dict[str, np.ndarray]:
    """Two independent groups: `resample_units` with the strata A and B."""
    return resample_units(statistics, (a, b), resamples, rng, progress)


def leave_one_out_units(statistic: Statistic, samples: Sequence[np.ndarray]) -> tuple[np.ndarray, ...]:
    """The statistic with each unit of each stratum left out in turn (one array per stratum).

    Generic path: evaluates the statistic on stacked leave-one-out samples, a chunk of rows at a
    time (O(n^2) work, bounded memory).
    """
    total = sum(s.size for s in samples)
    results = []
    for j, x in enumerate(samples):
        n = x.shape[0]
        base = np.arange(n - 1)
        result = np.empty(n)
        step = max(1, CHUNK_VALUES // max(1, total))
        for start in range(0, n, step):
            rows = np.arange(start, min(n, start + step))
            idx = base[None, :] + (base[None, :] >= rows[:, None])
            stacked = [x[idx] if i == j else np.broadcast_to(s, (rows.size,) + s.shape)
                       for i, s in enumerate(samples)]
            with np.errstate(all="ignore"):
                result[start:start + rows.size] = statistic(*stacked)
        results.append(result)
    return tuple(results)


def leave_one_out(statistic: Statistic, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two independent groups: each value of A left out in turn, then each value of B."""
    loo_a, loo_b = leave_one_out_units(statistic, (a, b))
    return loo_a, loo_b


@dataclass(frozen=True)
class BootstrapSummary:
    """Bootstrap replicates summarised: the BCa interval (or None with a reason) and its parts."""

    interval: Interval | None
    bias_correction: float | None
    acceleration: float | None
    undefined_resamples: int
    reason: str | None = None


def acceleration(loo: tuple[np.ndarray, ...]) -> float:
    """BCa acceleration from per-group jackknife values (Efron & Tibshirani 1993, eq. 14.15,
    summed over the strata as in scipy.stats.bootstrap):
    a = sum_j sum_i U_ji^3 / n_j^3 / (6 [sum_j sum_i U_ji^2 / n_j^2]^(3/2)),
    U_ji = (n_j - 1)(mean_i theta_j(i) - theta_j(i))."""
    num = den = np.float64(0.0)
    with np.errstate(all="ignore"):
        for values in loo:
            if values.size < 2:  # a stratum whose leave-one-out values are all undefined
                continue
            n = np.float64(values.size)
            u = (n - 1) * (np.mean(values) - values)
            num += np.sum(u**3) / n**3
            den += np.sum(u**2) / n**2
        acc = num / (6.0 * den**1.5)
    if not (den > 0 and np.isfinite(acc)):
        return 0.0
    return float(acc)


MIN_DISTINCT = 10  # fewer distinct replicate values than this: too coarse for an interval
PILED_SHARE = 0.5  # at least this share of replicates at a bound of the index: no interval
BOUND_TOLERANCE = 1e-12


def degenerate_reason(theta_hat: float, finite: np.ndarray,
                      bounds: tuple[float, float] | None) -> str | None:
    """Why the bootstrap distribution cannot support an interval, or None when it can.

    The resamples cannot fall beyond the range of a bounded index, so when the estimate sits at
    a bound (say A = 1 under complete separation, or Kendall's W = 1), or when most resamples
    pile up at one, the percentile-based limits collapse onto the bound and the interval reads
    as near-certainty that the data do not support. A replicate distribution with fewer than
    MIN_DISTINCT distinct values is a staircase whose quantiles jump between a handful of
    values. (Which fallback replaces the bootstrap is the index's business: see
    `pipeline.estimate_all`.)"""
    distinct = np.unique(finite).size
    if bounds is not None:
        for bound in bounds:
            if abs(theta_hat - bound) <= BOUND_TOLERANCE:
                return (f"the estimate is at the index's bound ({bound:g}): no resample can fall"
                        " beyond it, so a bootstrap interval would collapse onto the bound")
        at_bound = np.count_nonzero((np.abs(finite - bounds[0]) <= BOUND_TOLERANCE)
                                    | (np.abs(finite - bounds[1]) <= BOUND_TOLERANCE))
        if at_bound >= PILED_SHARE * finite.size:
            return (f"{at_bound / finite.size:.0%} of resamples sit at a bound of the index: the"
                    " bootstrap distribution is piled against it")
    if distinct < MIN_DISTINCT:
        what = "one value" if distinct == 1 else f"{distinct} distinct values"
        return (f"the resamples take only {what} (fewer than {MIN_DISTINCT}): too coarse for an"
                " interval")
    return None


def bca_interval(theta_hat: float, replicates: np.ndarray, loo: tuple[np.ndarray, ...],
                 level: float, bounds: tuple[float, float] | None = None,
                 degenerate: str | None = None) -> BootstrapSummary:
    """Bias-corrected and accelerated bootstrap interval (Efron 1987; Efron & Tibshirani 1993,
    sec. 14.3).

    z0 = Phi^-1(share of replicates below theta-hat, ties counted half); the limits are the
    replicate quantiles (linear interpolation) at Phi(z0 + (z0 + z)/(1 - a (z0 + z))) for
    z = Phi^-1((1 - level)/2) and its negative. Replicates where the statistic is undefined are
    set aside and counted.

    No interval is given, with the reason, when the bootstrap distribution cannot support one:
    `degenerate` (a reason the caller found in the data, e.g. complete separation of the groups,
    which every resample inherits), or `degenerate_reason` (the estimate at a bound of the index,
    the resamples piled at one, fewer than MIN_DISTINCT distinct replicate values, every resample
    equal). Nor when the estimate lies outside the central `level` share of the replicates
    (fewer than (1 - level)/2 of them on one side: typically an estimate at the edge of its
    range, such as an omnibus effect near zero, where almost every resample is larger): the bias
    correction is then as large as the interval and pushes both limits into the extreme
    replicates.
    """
    finite = replicates[np.isfinite(replicates)]
    undefined = int(replicates.size - finite.size)
    if finite.size < 2:
        return BootstrapSummary(None, None, None, undefined,
                                "the statistic is undefined in almost every resample")
    loo = tuple(v[np.isfinite(v)] for v in loo)
    reason = degenerate or degenerate_reason(theta_hat, finite, bounds)
    if reason is not None:
        return BootstrapSummary(None, None, None, undefined, reason)
    share = (np.count_nonzero(finite < theta_hat) + np.count_nonzero(finite <= theta_hat)) / (
        2.0 * finite.size)
    if share <= 0.0 or share >= 1.0:
        return BootstrapSummary(None, None, None, undefined,
                                "the estimate lies outside every resample: BCa is undefined")
    z0 = float(special.ndtri(share))
    acc = acceleration(loo)
    z = float(special.ndtri((1 - level) / 2))
    probs = []
    for zz in (z, -z):
        num = z0 + zz
        probs.append(float(special.ndtr(z0 + num / (1 - acc * num))))
    tail = (1 - level) / 2
    if share < tail or share > 1 - tail:
        return BootstrapSummary(None, z0, acc, undefined,
                                f"the bias correction is extreme ({share:.1%} of resamples below"
                                " the estimate, outside the central"
                                f" {level:.0%}): the BCa interval would be unreliable")
    low, high = np.percentile(finite, [100 * probs[0], 100 * probs[1]])
    note = None
    if undefined:
        note = f"{undefined} of {replicates.size} resamples gave an undefined value and were set aside"
    low, high = float(low), float(high)
    if bounds is not None:
        low, high = max(low, bounds[0]), min(high, bounds[1])
    return BootstrapSummary(Interval("bca_bootstrap", low, high, level, note), z0, acc, undefined)
