"""The Hodges-Lehmann shifts without listing all pairs: selection, exact leave-one-out values,
and bootstrap replicates from resampling counts.

Both shifts are medians of a multiset of pair sums: the two-sample shift is the median of the
n_A n_B differences a_i - b_j (= a_i + (-b_j)); the one-sample (paired) shift is the median of
the n(n+1)/2 Walsh averages (d_i + d_j)/2, i <= j, i.e. half the median of the sums d_i + d_j.
Sums are formed exactly as the plain estimators form them (one floating-point addition), and
fl(u + v) never decreases as v grows, so every count below is a prefix of a sorted array.

Removing one unit removes a known set of r sums (its pairs with every unit of the other group,
or with every unit including itself for Walsh sums). If the reduced multiset has N' = N - r
elements, its k-th smallest lies between the k-th and the (k + r)-th smallest of the full set.
So the full multiset's elements in that rank window are listed once (about r + ties of them,
found by the selection below), and for each distinct removed value the median's rank is found
by binary search over the window, counting the removed sums below a candidate by binary search:
O(n log^2 n) time and O(n) memory instead of O(n^3 log n) for refitting every time.

Selection of the k-th smallest sum: `pair_sums`.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

from auditor import paired, ranks
from auditor.pair_sums import PairSums, pair_sums, prefix_counts

def median_without_each(sums: PairSums) -> np.ndarray:
    """For each distinct value u_p: the median of the sums after removing one unit of value u_p
    (its sums with every unit of v; for Walsh sums, with every unit including itself).
    NaN when nothing is left."""
    removed = int(sums.v_counts.sum())
    total = sums.size
    left = total - removed
    if left <= 0:
        return np.full(sums.u.size, np.nan)
    k_low, k_high = (left + 1) // 2, left // 2 + 1
    s_low = sums.kth(k_low)
    s_high = sums.kth(min(total, k_high + removed))
    values, weights = sums.listed(s_low, s_high, include_low=True)
    window, inverse = np.unique(values, return_inverse=True)
    window_weights = np.zeros(window.size, dtype=np.int64)
    np.add.at(window_weights, inverse, weights)
    at_most = sums.count_at_most(float(window[0])) - window_weights[0] + np.cumsum(window_weights)
    cumulative = sums.v_cumulative

    def order_statistic(k: int) -> np.ndarray:
        lo = np.zeros(sums.u.size, dtype=np.int64)
        hi = np.full(sums.u.size, window.size - 1, dtype=np.int64)
        while np.any(lo < hi):
            mid = (lo + hi) // 2
            gone = cumulative[prefix_counts(sums.u, sums.v, window[mid], strict=False)]
            enough = at_most[mid] - gone >= k
            hi = np.where(enough, mid, hi)
            lo = np.where(enough, lo, mid + 1)
        return window[lo]

    first = order_statistic(k_low)
    if k_high == k_low:
        return first
    return 0.5 * (first + order_statistic(k_high))


def _per_unit(x: np.ndarray, per_distinct: np.ndarray) -> np.ndarray:
    _, inverse = np.unique(x, return_inverse=True)
    return per_distinct[inverse]


def hodges_lehmann_without_each(a: np.ndarray, b: np.ndarray):
    """Two-sample shift (median of a_i - b_j) with each a_i left out, then each b_j.
    Leaving out b_j: the median of b - a without b_j, negated (negation is exact in floating
    point, so fl(b - a) = -fl(a - b))."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    drop_a = median_without_each(pair_sums(a, -b))
    drop_b = -median_without_each(pair_sums(b, -a))
    return _per_unit(a, drop_a), _per_unit(b, drop_b)


def walsh_median_without_each(d: np.ndarray) -> np.ndarray:
    """One-sample shift (median of the Walsh averages) with each d_i left out."""
    d = np.asarray(d, dtype=float)
    return _per_unit(d, median_without_each(pair_sums(d)) / 2.0)


def paired_hodges_lehmann_without_each(x: np.ndarray, digits: int = 12):
    """Paired shift: the Walsh median of the rounded differences with each participant left out."""
    return (walsh_median_without_each(paired.differences(x, digits)),)


# ------------------------------------------------------------------ bootstrap by counts

_BRACKET_UNITS = 1.0  # list the candidates once at most this many distinct pairs per value remain


def _grouped(counts: np.ndarray, order: np.ndarray | None, starts: np.ndarray) -> np.ndarray:
    """Per resample: counts of the units (in the samples' order) summed per distinct value."""
    in_order = counts if order is None else counts[:, order]
    return np.add.reduceat(in_order, starts, axis=1)


def hodges_lehmann_by_counts(a: np.ndarray, b: np.ndarray):
    """Bootstrap replicates of the two-sample shift (median of all a_i - b_j) from counts.

    A resample is a vector of counts over A's values and one over B's (`resampling`); its shift is
    the weighted median of the full sample's pair differences, a pair of distinct values weighing
    the product of their resampled multiplicities. Every resample of a chunk searches at once:
    the weighted count of differences <= t is sum_p w_A[p] W_B(p, t), read from cumulative sums
    at positions found by binary search (no resample is sorted); the bracket starts at the full
    sample's estimate +- 3 half-widths of its distribution-free interval (the whole range for the
    rare resample outside it) and shrinks by interpolation on the counts, with bisection when
    that stalls, until few candidate pairs remain, which are listed and weighed. Exact: the value
    equals `ranks.hodges_lehmann_values` on the expanded resample. Returns a function of the
    count matrices (m, n_A) and (m, n_B) in the samples' order.
    """
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    order_a = None if np.all(a[1:] >= a[:-1]) else np.argsort(a, kind="stable")
    order_b = None if np.all(b[1:] >= b[:-1]) else np.argsort(b, kind="stable")
    sa = a if order_a is None else a[order_a]
    sb = b if order_b is None else b[order_b]
    u, starts_a = np.unique(sa, return_index=True)
    ub, starts_b = np.unique(sb, return_index=True)
    v = -ub[::-1]  # differences a - b are sums u + v, v ascending
    total = a.size * b.size
    k_low, k_high = (total + 1) // 2, total // 2 + 1
    full = pair_sums(a, -b)
    centre = 0.5 * (full.kth(k_low) + full.kth(k_high))
    order = ranks.shift_interval_order(a.size, b.size, 0.95,
                                 float(stats.tiecorrect(np.concatenate([a, b]))))
    half = 0.5 * (full.kth(total + 1 - order.k) - full.kth(order.k))
    pad = 3 * half + 1e-12 * abs(centre)
    start_low, start_high = centre - pad, centre + pad
    floor = float(np.nextafter(u[0] + v[0], -np.inf))
    ceiling = float(u[-1] + v[-1])
    budget = max(8, int(_BRACKET_UNITS * (u.size + v.size)))

    def weighted_at_most(wu, cum_v, t):
        q = prefix_counts(u[None, :], v, t[:, None], strict=False)
        return q, np.einsum("ij,ij->i", wu, np.take_along_axis(cum_v, q, axis=1))

    def statistic(ca: np.ndarray, cb: np.ndarray) -> np.ndarray:
        m = ca.shape[0]
        wu = _grouped(ca, order_a, starts_a)
        wv = _grouped(cb, order_b, starts_b)[:, ::-1]
        cum_v = np.zeros((m, v.size + 1))
        np.cumsum(wv, axis=1, out=cum_v[:, 1:])
        lo, hi = np.full(m, start_low), np.full(m, start_high)
        q_lo, c_lo = weighted_at_most(wu, cum_v, lo)
        q_hi, c_hi = weighted_at_most(wu, cum_v, hi)
        outside_low, outside_high = c_lo >= k_low, c_hi < k_high
        if outside_low.any():
            lo[outside_low], c_lo[outside_low] = floor, 0.0
            q_lo[outside_low] = 0
        if outside_high.any():
            hi[outside_high], c_hi[outside_high] = ceiling, float(total)
            q_hi[outside_high] = v.size
        last_width = np.full(m, np.inf)
        active = np.flatnonzero((q_hi - q_lo).sum(axis=1) > budget)
        while active.size:
            l, h, cl, ch = lo[active], hi[active], c_lo[active], c_hi[active]
            share = (k_low - 0.5 - cl) / np.maximum(ch - cl, 1.0)
            guess = l + (h - l) * np.clip(share, 0.01, 0.99)
            slow = (h - l) > 0.5 * last_width[active]
            t = np.where(slow, l / 2 + h / 2, guess)
            stuck = ~((l < t) & (t < h))
            last_width[active] = h - l
            q, c = weighted_at_most(wu[active], cum_v[active], t)
            upper = (c >= k_high) & ~stuck
            lower = (c < k_low) & ~stuck
            rows = active[upper]
            hi[rows], c_hi[rows], q_hi[rows] = t[upper], c[upper], q[upper]
            rows = active[lower]
            lo[rows], c_lo[rows], q_lo[rows] = t[lower], c[lower], q[lower]
            done = stuck | ~(upper | lower)  # stalled, or t splits the two middle ranks
            still = (q_hi[active] - q_lo[active]).sum(axis=1) > budget
            active = active[still & ~done]
        out = _weighted_middle(u, v, wu, wv, q_lo, q_hi, c_lo, k_low, k_high)
        for i in np.flatnonzero(~np.isfinite(out)):  # not expected: the exact route if it happens
            wa = (ca[i] if order_a is None else ca[i, order_a]).astype(int)
            wb = (cb[i] if order_b is None else cb[i, order_b]).astype(int)
            out[i] = ranks.pairwise_median(np.repeat(sa, wa), np.repeat(sb, wb))
        return out

    return statistic


def _weighted_middle(u, v, wu, wv, q_lo, q_hi, c_lo, k_low, k_high) -> np.ndarray:
    """Per resample: the mean of the k_low-th and k_high-th weighted sums, listed from the pairs
    with q_lo[p] <= q < q_hi[p] (the bracket (lo, hi]), whose weighted count below is c_lo."""
    m = wu.shape[0]
    counts = (q_hi - q_lo).ravel()
    row = np.repeat(np.arange(m), u.size)
    p_all = np.tile(np.arange(u.size), m)
    r = np.repeat(row, counts)
    p = np.repeat(p_all, counts)
    starts = np.repeat(np.cumsum(counts) - counts, counts)
    q = np.arange(int(counts.sum())) - starts + np.repeat(q_lo.ravel(), counts)
    values = u[p] + v[q]
    weights = wu[r, p] * wv[r, q]
    order = np.lexsort((values, r))
    values, weights, r = values[order], weights[order], r[order]
    cumulative = np.cumsum(weights)
    before_row = np.zeros(m)
    row_totals = np.bincount(r, weights=weights, minlength=m)
    before_row[1:] = np.cumsum(row_totals)[:-1]
    out = np.empty(m)
    picks = []
    for k in (k_low, k_high):
        target = before_row + (k - c_lo)
        picks.append(np.searchsorted(cumulative, target - 0.5, side="left"))
    first, second = picks
    inside = (second < values.size)
    ok = inside & (r[np.minimum(second, values.size - 1)] == np.arange(m))
    out[ok] = 0.5 * (values[first[ok]] + values[second[ok]])
    out[~ok] = np.nan  # filled by the caller's exact fallback
    return out
