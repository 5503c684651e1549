"""Exact leave-one-out values of the signed-rank indices of a paired design, without refitting.

The sample is one array x of shape (n, 2) (participants x two conditions) and a unit is a
participant. Each function returns a 1-tuple holding one array, like
`resampling.leave_one_out_units(values_fn, (x,))`: element i is the index with participant i
removed (NaN where the index is undefined).

Signed ranks (Wilcoxon 1945): d = first - second, rounded as in `paired.differences`; zero
differences are dropped and the N non-zero |d| receive mid-ranks; R+ and R- are the rank sums of
the positive and the negative differences, and T = sum over tie blocks of |d| of (t^3 - t).
Removing a participant whose difference d_i is non-zero, with mid-rank r_i in a tie block of size t:

    every non-zero |d| larger than |d_i| falls one rank and every other member of its tie block
    falls one half, so
    R+' = R+ - [d_i > 0] r_i - above+_i - (level+_i - [d_i > 0]) / 2,
    R-' = R- - [d_i < 0] r_i - above-_i - (level-_i - [d_i < 0]) / 2,
    with above+_i (level+_i) the number of positive differences whose |d| is larger than (equal
    to) |d_i|, and above-_i, level-_i the same for the negative ones;
    T' = T - 3 t (t - 1), since (t^3 - t) - ((t - 1)^3 - (t - 1)) = 3 t (t - 1);
    N' = N - 1.

Removing a participant whose difference is zero changes none of R+, R-, T and N. One sort of |d|
and counts per tie block give all n values in O(n log n).
"""

from __future__ import annotations

import numpy as np

from auditor import paired


def rank_blocks(values: np.ndarray, labels: np.ndarray, k: int):
    """Tie-block bookkeeping for a 1-D sample whose values carry a label in 0..k-1.

    Returns, for each value: its mid-rank in the sample (ties get the average rank, as
    scipy.stats.rankdata), the size t of its tie block, and two (n, k) integer arrays: per label,
    the number of values carrying it that are larger (`above`) and that are equal (`level`, the
    value itself included). One stable sort and one bincount: O(n log n + n k).
    """
    values = np.asarray(values)
    labels = np.asarray(labels, dtype=np.intp)
    n = values.size
    order = np.argsort(values, kind="stable")
    ordered = values[order]
    opens = np.ones(n, dtype=bool)  # True where a tie block starts in sorted order
    opens[1:] = ordered[1:] != ordered[:-1]
    block_sorted = np.cumsum(opens) - 1
    starts = np.flatnonzero(opens)
    ends = np.append(starts[1:], n)
    blocks = starts.size
    per_block = np.bincount(block_sorted * k + labels[order],
                            minlength=blocks * k).reshape(blocks, k)
    above_block = np.cumsum(per_block[::-1], axis=0)[::-1] - per_block
    block = np.empty(n, dtype=np.intp)
    block[order] = block_sorted
    midrank = (starts + ends + 1)[block] / 2.0
    size = (ends - starts)[block]
    return midrank, size, above_block[block], per_block[block]


def _signed_rank_parts_without_each(x, digits):
    """Arrays (R+, R-, T, N) after removing each participant in turn (see the module docstring)."""
    d = paired.differences(np.asarray(x, dtype=float), digits)
    nonzero = d != 0
    kept = d[nonzero]
    positive = kept > 0
    mid, t, above, level = rank_blocks(np.abs(kept), positive.astype(np.intp), 2)
    r_plus = float(np.sum(mid[positive]))
    r_minus = float(np.sum(mid[~positive]))
    tie_term = float(np.sum(t * t - 1.0))  # sum over values of t^2 - 1 = sum over blocks of t^3 - t
    count = float(kept.size)

    rp = np.full(d.size, r_plus)
    rm = np.full(d.size, r_minus)
    ties = np.full(d.size, tie_term)
    n_left = np.full(d.size, count)
    rp[nonzero] -= np.where(positive, mid, 0.0) + above[:, 1] + 0.5 * (level[:, 1] - positive)
    rm[nonzero] -= np.where(positive, 0.0, mid) + above[:, 0] + 0.5 * (level[:, 0] - ~positive)
    ties[nonzero] -= 3.0 * t * (t - 1.0)
    n_left[nonzero] -= 1.0
    return rp, rm, ties, n_left


def matched_rank_biserial(x, digits=12):
    """Leave-one-out values of the matched-pairs rank-biserial correlation
    r = (R+ - R-) / (R+ + R-), zeros dropped (Kerby 2014, simple difference formula; signed ranks
    of Wilcoxon 1945). NaN where no non-zero difference remains."""
    rp, rm, _, _ = _signed_rank_parts_without_each(x, digits)
    with np.errstate(divide="ignore", invalid="ignore"):
        return ((rp - rm) / (rp + rm),)


def r_from_z(x, digits=12):
    """Leave-one-out values of r = z / sqrt(N) from the signed-rank z with zeros dropped,
    tie-corrected, no continuity correction (Wilcoxon 1945):
    z = (R+ - N(N+1)/4) / sqrt(N(N+1)(2N+1)/24 - sum(t^3 - t)/48), N = non-zero differences.
    NaN where no non-zero difference remains."""
    rp, _, ties, n = _signed_rank_parts_without_each(x, digits)
    var = n * (n + 1) * (2 * n + 1) / 24.0 - ties / 48.0
    with np.errstate(divide="ignore", invalid="ignore"):
        z = (rp - n * (n + 1) / 4.0) / np.sqrt(var)
        return (z / np.sqrt(n),)
