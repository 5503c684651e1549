"""The dominance family: probability of superiority, Cliff's delta, rank-biserial correlation,
r = Z / sqrt(N), and the Hodges-Lehmann shift, with distribution-free intervals.

Direction is A relative to B. A = P(X_A > X_B) + P(X_A = X_B) / 2, so swapping the groups maps
A to 1 - A and negates delta, the rank-biserial r, r = Z / sqrt(N) and the shift:

>>> import numpy as np
>>> a, b = np.array([3., 5, 7, 9]), np.array([1., 2, 5, 6])
>>> prob_superiority_values(a, b), prob_superiority_values(b, a)
(0.78125, 0.21875)

None of these indices changes when both groups go through the same strictly increasing
transformation (except the Hodges-Lehmann shift, which is in the outcome's units).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from auditor.pair_sums import pair_sums
from auditor.parametric import Estimate, satterthwaite_df
from auditor.results import Interval

EXACT_MAX_PAIRS = 2500  # exact Mann-Whitney null distribution up to n_A n_B = 2500, no ties
BLOCK_VALUES = 32_768  # numbers per block of resamples in the count statistics (256 KiB)


# ------------------------------------------------------------------ ranks along the last axis


def midranks(x: np.ndarray) -> np.ndarray:
    """Mid-ranks (ties get the average rank) along the last axis, as scipy.stats.rankdata gives
    them. A one-dimensional array without NaN is ranked here directly (one stable sort; a tie
    block ending at sorted position e with t members gets e - (t - 1)/2), which avoids scipy's
    per-call overhead on the many small rankings of influence searches. So is an array holding a
    single row (shape (1, n), as the fragility search passes its reduced samples)."""
    x = np.asarray(x)
    if x.ndim > 1 and x.size and x.size == x.shape[-1]:
        return midranks(x.reshape(-1)).reshape(x.shape)
    if x.ndim != 1 or x.size == 0:
        return stats.rankdata(x, axis=-1)
    order = np.argsort(x, kind="stable")
    s = x[order]
    if s.dtype.kind == "f" and np.isnan(s[-1]):
        return stats.rankdata(x, axis=-1)
    new = np.empty(s.size, dtype=bool)
    new[0] = True
    np.not_equal(s[1:], s[:-1], out=new[1:])
    block = np.cumsum(new) - 1
    ends = np.flatnonzero(np.append(new[1:], True)) + 1.0  # 1-based end of each tie block
    sizes = np.diff(np.concatenate(([0.0], ends)))
    out = np.empty(s.size)
    out[order] = (ends - (sizes - 1.0) / 2.0)[block]
    return out


def tie_sizes(x: np.ndarray) -> np.ndarray:
    """For each value along the last axis, the size of its tie block (1 when untied)."""
    order = np.argsort(x, axis=-1, kind="stable")
    s = np.take_along_axis(x, order, axis=-1)
    n = s.shape[-1]
    pos = np.broadcast_to(np.arange(n), s.shape)
    new = np.ones(s.shape, dtype=bool)
    new[..., 1:] = s[..., 1:] != s[..., :-1]
    start = np.maximum.accumulate(np.where(new, pos, 0), axis=-1)
    last = np.ones(s.shape, dtype=bool)
    last[..., :-1] = new[..., 1:]
    end = np.flip(np.minimum.accumulate(np.flip(np.where(last, pos, n), axis=-1), axis=-1), axis=-1)
    sizes_sorted = end - start + 1
    out = np.empty_like(sizes_sorted)
    np.put_along_axis(out, order, sizes_sorted, axis=-1)
    return out


def superiority_count_values(a, b):
    """U_A = #(a > b) + #(a = b)/2 over all pairs, from the rank sum of A in the pooled sample:
    U_A = R_A - n_A (n_A + 1)/2 (Mann & Whitney 1947)."""
    na = a.shape[-1]
    ranks = midranks(np.concatenate([a, b], axis=-1))
    return np.sum(ranks[..., :na], axis=-1) - na * (na + 1) / 2


def prob_superiority_values(a, b):
    """A = U_A / (n_A n_B) = P(X_A > X_B) + P(X_A = X_B)/2 (Vargha & Delaney 2000, eq. 14)."""
    return superiority_count_values(a, b) / (a.shape[-1] * b.shape[-1])


def cliff_delta_values(a, b):
    """delta = P(X_A > X_B) - P(X_A < X_B) = 2A - 1 (Cliff 1993)."""
    return 2.0 * prob_superiority_values(a, b) - 1.0


def rank_biserial_values(a, b):
    """Kerby's (2014) simple difference: (favourable pairs - unfavourable pairs) / all pairs.
    For two independent groups it equals Cliff's delta."""
    return cliff_delta_values(a, b)


def mann_whitney_variance(na: int, nb: int, tie_term):
    """Null variance of U with the tie correction,
    sigma_U^2 = n_A n_B / 12 [(N + 1) - sum(t^3 - t) / (N (N - 1))] (Lehmann 1975, eq. 1.52),
    `tie_term` = sum over tie blocks of t^3 - t (a float or an array of them).

    Every product is formed in floating point from Python integers (no int64 overflow at any N).
    The bracket is at least 3 unless every value is tied (3 when one value differs from N - 1
    equal ones), so a bracket below 1.5 is rounding error of the tie sum (possible once N^3
    exceeds 2^53, N above about 208,000) and the variance is then exactly 0: every value tied,
    z undefined. With heavy ties the bracket loses about 1e-16 N^3 / (its value x N^2) of
    relative precision (below 1e-9 at N = 2 x 10^6)."""
    n = na + nb
    bracket = (n + 1) - np.asarray(tie_term, dtype=float) / (float(n) * (n - 1))
    return float(na) * nb / 12.0 * np.where(bracket < 1.5, 0.0, bracket)


def mann_whitney_z_values(a, b):
    """z = (U_A - n_A n_B / 2) / sigma_U with the tie-corrected
    sigma_U^2 = n_A n_B / 12 [(N + 1) - sum(t^3 - t) / (N (N - 1))], no continuity correction
    (Lehmann 1975, eq. 1.52 for the tie correction; `mann_whitney_variance`). NaN (undefined)
    when every value is tied. U is a sum of mid-ranks, multiples of 1/2, so it is exact while
    N^2 < 2^52 (N up to about 6 x 10^7)."""
    na, nb = a.shape[-1], b.shape[-1]
    pooled = np.concatenate([a, b], axis=-1)
    t = tie_sizes(pooled).astype(float)
    tie_term = np.sum(t * t - 1.0, axis=-1)  # sum over values of (t^2 - 1) = sum over blocks (t^3 - t)
    var = mann_whitney_variance(na, nb, tie_term)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (superiority_count_values(a, b) - na * nb / 2.0) / np.sqrt(var)


def r_from_z_values(a, b):
    """r = z / sqrt(N), N = n_A + n_B (Rosenthal 1991, p. 19)."""
    return mann_whitney_z_values(a, b) / math.sqrt(a.shape[-1] + b.shape[-1])


# ------------------------------------------------------------------ Hodges-Lehmann shift


def kth_pairwise_difference(a_sorted: np.ndarray, b_sorted: np.ndarray, k: int) -> float:
    """The k-th smallest (1-based) of the n_A n_B differences a_i - b_j, without forming them all
    (selection among pair sums a_i + (-b_j), `pair_sums.PairSums.kth`; O(n) memory)."""
    return pair_sums(a_sorted, -b_sorted).kth(k)


def pairwise_median(a_sorted: np.ndarray, b_sorted: np.ndarray) -> float:
    """Median of all a_i - b_j (the Hodges-Lehmann two-sample shift, Hodges & Lehmann 1963)."""
    return _median_of(pair_sums(a_sorted, -b_sorted))


def _median_of(sums) -> float:
    total = sums.size
    if total % 2:
        return sums.kth(total // 2 + 1)
    return 0.5 * (sums.kth(total // 2) + sums.kth(total // 2 + 1))


def hodges_lehmann_values(a, b):
    """Hodges-Lehmann shift along the last axis (median of all pairwise differences A - B)."""
    if a.ndim == 1:
        return pairwise_median(np.sort(a), np.sort(b))
    lead = a.shape[:-1]
    a2 = np.sort(a.reshape(-1, a.shape[-1]), axis=-1)
    b2 = np.sort(b.reshape(-1, b.shape[-1]), axis=-1)
    pairs = a2.shape[-1] * b2.shape[-1]
    if pairs <= EXACT_MAX_PAIRS:  # small samples: all pairs, a bounded number of rows at a time
        out = np.empty(a2.shape[0])
        step = max(1, 4_000_000 // pairs)
        for s in range(0, a2.shape[0], step):
            diffs = a2[s:s + step, :, None] - b2[s:s + step, None, :]
            out[s:s + step] = np.median(diffs.reshape(diffs.shape[0], -1), axis=-1)
    else:
        out = np.array([pairwise_median(x, y) for x, y in zip(a2, b2)])
    return out.reshape(lead)


def mann_whitney_null_pmf(na: int, nb: int) -> np.ndarray:
    """Exact null distribution of U (no ties): P(U = u), u = 0..n_A n_B.

    Uses the generating function prod_{i=1}^{n_A} (1 - q^(n_B + i)) / (1 - q^i) divided by
    C(n_A + n_B, n_A) (Mann & Whitney 1947), scaled step by step to stay a distribution.
    """
    size = na * nb + 1
    p = np.zeros(size)
    p[0] = 1.0
    for i in range(1, na + 1):
        q = p.copy()
        shift = nb + i
        if shift < size:
            q[shift:] -= p[:size - shift]
        r = np.empty_like(q)
        for start in range(i):
            r[start::i] = np.cumsum(q[start::i])
        p = r * (i / (nb + i))
    p = np.clip(p, 0.0, None)
    return p / p.sum()


@dataclass(frozen=True)
class RankOrder:
    """Order-statistic index k for the interval [D_(k), D_(n_A n_B + 1 - k)] and how it was found."""

    k: int
    method: str
    achieved_level: float | None


def shift_interval_order(na: int, nb: int, level: float, tie_correction: float) -> RankOrder:
    """Largest k with P(U <= k - 1) <= (1 - level)/2, so that [D_(k), D_(mn+1-k)] covers the shift
    with probability >= level for continuous data (Lehmann 1975, sec. 2.6; Bauer 1972).

    Exact null distribution when n_A n_B <= 2500 and there are no ties; otherwise the normal
    approximation k = floor(mn/2 - z sqrt(var U)) with the tie-corrected variance.
    """
    alpha2 = (1 - level) / 2
    mn = na * nb
    if mn <= EXACT_MAX_PAIRS and tie_correction == 1.0:
        cdf = np.cumsum(mann_whitney_null_pmf(na, nb))
        below = np.flatnonzero(cdf <= alpha2 + 1e-12)  # values u with P(U <= u) <= alpha/2
        k = int(below[-1]) + 1 if below.size else 1  # k - 1 = the largest such u
        return RankOrder(k, "exact", 1 - 2 * float(cdf[k - 1]))
    z = special.ndtri(1 - alpha2)
    n = na + nb
    var = mn / 12.0 * (n + 1) * tie_correction
    k = int(math.floor(mn / 2.0 - z * math.sqrt(var)))
    return RankOrder(max(k, 1), "normal_approximation", None)


def hodges_lehmann(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """Hodges-Lehmann shift (median of all a_i - b_j) with the distribution-free interval
    [D_(k), D_(mn+1-k)] from the Mann-Whitney distribution. Assumes the two distributions have
    the same shape (a pure shift) for the interval's coverage; the estimate itself is the median
    pairwise difference whatever the shapes."""
    sums = pair_sums(a, -b)
    value = _median_of(sums)
    correction = float(stats.tiecorrect(np.concatenate([a, b])))
    order = shift_interval_order(a.size, b.size, level, correction)
    mn = a.size * b.size
    notes = [f"order statistics k = {order.k} and {mn + 1 - order.k} of {mn} differences"
             f" ({order.method.replace('_', ' ')})"]
    if order.achieved_level is not None:
        notes.append(f"exact confidence {order.achieved_level:.4f}")
        if order.achieved_level < level:
            notes.append("the samples are too small to reach the requested level;"
                         " the widest interval (all differences) is given")
    if correction < 1.0:
        notes.append("ties present: coverage of the distribution-free interval is approximate")
    low, high = sums.kth(order.k), sums.kth(mn + 1 - order.k)
    return Estimate(value, Interval("distribution_free", low, high, level), None, tuple(notes))


# ------------------------------------------------------------------ A with its interval


def brunner_munzel_parts(a: np.ndarray, b: np.ndarray):
    """A-hat, its variance estimate and the Brunner-Munzel degrees of freedom.

    With placements P_Ai = R_Ai - R^(A)_Ai (pooled minus internal mid-rank: the number of B values
    below a_i, ties halved) and likewise P_Bj:
      A-hat = mean(P_A) / n_B,
      var(A-hat) = S_A^2 / (n_A n_B^2) + S_B^2 / (n_B n_A^2),  S^2 the variances of the placements,
      df = (S_A^2/(n_A n_B^2) + S_B^2/(n_B n_A^2))^2 /
           [(S_A^2/(n_A n_B^2))^2/(n_A - 1) + (S_B^2/(n_B n_A^2))^2/(n_B - 1)]
    (Brunner & Munzel 2000, eqs. 4.4-4.6; Neubert & Brunner 2007).

    Range: 0 <= A-hat <= 1 and, when the variance is positive, min(n_A, n_B) - 1 <= df <=
    n_A + n_B - 2 (a Satterthwaite form, as `parametric.welch_df`). The variance is zero, and df
    NaN (undefined), under complete separation (every placement of A is 0 or every one is n_B)
    and whenever the placements vary in neither group; with one group's placements constant df
    is the other group's n - 1. A group of fewer than two values gives NaN variance and df. The
    placements are multiples of 1/2, so their variances are exact zeros when constant.
    """
    na, nb = a.size, b.size
    if na < 2 or nb < 2:
        return (float(np.mean(_placements_of(a, b))) / nb if na and nb else math.nan,
                math.nan, math.nan)
    pa, pb = placements(a, b)
    a_hat = float(np.mean(pa) / nb)
    va = float(np.var(pa, ddof=1)) / (na * nb * nb)
    vb = float(np.var(pb, ddof=1)) / (nb * na * na)
    var = va + vb
    if not var > 0:
        return a_hat, var, math.nan
    return a_hat, var, satterthwaite_df(va, na, vb, nb)


def placements(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Placements of each a_i among B and of each b_j among A, in the samples' order:
    P_Ai = #(b < a_i) + #(b = a_i)/2 = R_Ai - R^(A)_Ai (pooled minus internal mid-rank), and
    likewise P_Bj, from one stable sort of the pooled sample (finite values).

    In sorted order the pooled values fall into tie blocks; a value in a block with t_B values
    of B, after c_B values of B in earlier blocks, has placement c_B + t_B/2 among B (and
    likewise among A). The placements are multiples of 1/2, exact in floating point. With NaN
    present they are the mid-rank differences (NaN throughout, as scipy ranks NaN)."""
    na = a.size
    pooled = np.concatenate([a, b])
    order = np.argsort(pooled, kind="stable")
    ordered = pooled[order]
    if ordered.dtype.kind == "f" and np.isnan(ordered[-1]):
        ranked = midranks(pooled)
        return ranked[:na] - midranks(a), ranked[na:] - midranks(b)
    new = np.empty(ordered.size, dtype=bool)
    new[0] = True
    np.not_equal(ordered[1:], ordered[:-1], out=new[1:])
    block = np.cumsum(new) - 1
    starts = np.flatnonzero(new)
    from_b = order >= na
    b_through = np.concatenate(([0], np.cumsum(from_b)))  # B values among the first k sorted
    ends = np.append(starts[1:], ordered.size)
    b_before, b_in = b_through[starts], b_through[ends] - b_through[starts]
    a_before, a_in = starts - b_before, (ends - starts) - b_in
    among_b = (b_before + 0.5 * b_in)[block]
    among_a = (a_before + 0.5 * a_in)[block]
    out = np.empty(ordered.size)
    out[order] = np.where(from_b, among_a, among_b)
    return out[:na], out[na:]


def separation(a: np.ndarray, b: np.ndarray) -> str | None:
    """Why the dominance indices cannot be bootstrapped, or None: when the groups do not overlap
    (every A value above every B value, or below), every resample is separated too and A stays
    at 1 (or 0) in each."""
    if a.size and b.size and (np.min(a) > np.max(b) or np.max(a) < np.min(b)):
        return ("the groups do not overlap (complete separation): every resample is separated"
                " too, so the bootstrap cannot show the uncertainty")
    return None


def _placements_of(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """#(b < a_i) + #(b = a_i) / 2 for each a_i."""
    sb = np.sort(b)
    lo, hi = np.searchsorted(sb, a, side="left"), np.searchsorted(sb, a, side="right")
    return lo + 0.5 * (hi - lo)


def _bounded(method: str, est: float, half: float, level: float, lo: float, hi: float) -> Interval:
    low, high = est - half, est + half
    note = None
    if low < lo or high > hi:
        low, high = max(low, lo), min(high, hi)
        note = f"clipped to the index's range [{lo:g}, {hi:g}]"
    return Interval(method, low, high, level, note)


def prob_superiority(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """A = P(X_A > X_B) + P(X_A = X_B)/2 with the Brunner-Munzel t interval, clipped to [0, 1].

    Assumes only independent observations; unequal spreads and shapes are allowed (Brunner &
    Munzel 2000). When the groups do not overlap the variance estimate is zero and the interval
    is undefined (null with a reason)."""
    a_hat, var, df = brunner_munzel_parts(a, b)
    if math.isnan(var):
        return Estimate(a_hat, None, None, ("no interval: a group has fewer than two values",))
    if var <= 0:
        return Estimate(a_hat, None, None, (
            "no interval: the Brunner-Munzel variance is zero (the groups do not overlap or all"
            " placements are equal)",))
    half = special.stdtrit(df, 0.5 + level / 2) * math.sqrt(var)
    return Estimate(a_hat, _bounded("brunner_munzel", a_hat, half, level, 0.0, 1.0), None,
                    (f"Brunner-Munzel df = {df:.2f}",))


def _map_from_a(est: Estimate, scale: float, shift: float, lo: float, hi: float) -> Estimate:
    """Carry A and its interval to delta = 2A - 1 (a linear map with positive slope)."""
    iv = est.interval
    value = None if est.value is None else scale * est.value + shift
    if iv is None:
        return Estimate(value, None, est.reason, est.notes)
    low = min(max(scale * iv.low + shift, lo), hi)
    high = min(max(scale * iv.high + shift, lo), hi)
    return Estimate(value, Interval(iv.method + "_via_A", low, high, iv.level, iv.note),
                    est.reason, est.notes)


def cliff_delta(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """Cliff's delta = 2A - 1 with A's Brunner-Munzel interval carried over."""
    return _map_from_a(prob_superiority(a, b, level), 2.0, -1.0, -1.0, 1.0)


def rank_biserial(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """Rank-biserial correlation (Kerby 2014); for two independent groups it equals Cliff's delta,
    so it carries the same interval."""
    est = cliff_delta(a, b, level)
    return Estimate(est.value, est.interval, est.reason,
                    est.notes + ("equals Cliff's delta for two independent groups",))


def r_from_z(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """r = z / sqrt(N) from the Mann-Whitney z (tie-corrected, no continuity correction),
    N = n_A + n_B. No analytic interval: the bootstrap interval is the index's interval."""
    value = float(r_from_z_values(a, b))
    if not math.isfinite(value):
        return Estimate(None, None, "all values are tied: the Mann-Whitney z is undefined")
    return Estimate(value, None, None, (f"N = {a.size + b.size} (both groups)",),
                    {"n_used": int(a.size + b.size)})


# ------------------------------------------------------------------ bootstrap by counts


def superiority_by_counts(a: np.ndarray, b: np.ndarray):
    """Bootstrap statistics of the dominance family without re-sorting any resample.

    After one sort, a resample of A is a vector of counts w_A over A's values (how often each was
    drawn), likewise w_B. The superiority count is
        U = sum_i w_A[i] (W_B(< a_i) + W_B(= a_i) / 2),
    where W_B(< x) sums w_B over B's values below x: a cumulative sum of w_B in sorted order read
    at positions found once by binary search. Each resample costs O(n_A + n_B); when the samples
    are already sorted (as the pipeline passes them) no column is permuted at all. The resamples
    go through in blocks of about BLOCK_VALUES numbers, in buffers reused from block to block
    (so the work stays in cache); every number involved is a multiple of 1/2 below 2^52, so the
    sums are exact and do not depend on the blocking.

    Returns two functions of the count matrices (m, n_A) and (m, n_B), in the samples' original
    order: `u` gives U per resample, `tie_term` gives sum over distinct pooled values of
    t^3 - t, t being the resampled multiplicity of that value.
    """
    order_a, order_b = np.argsort(a, kind="stable"), np.argsort(b, kind="stable")
    sorted_a = bool(np.all(order_a == np.arange(a.size)))
    sorted_b = bool(np.all(order_b == np.arange(b.size)))
    sa, sb = a[order_a], b[order_b]
    lo = np.searchsorted(sb, sa, side="left")
    hi = np.searchsorted(sb, sa, side="right")
    half_tied = bool(np.any(hi > lo))
    pooled = np.concatenate([a, b])
    order_p = np.argsort(pooled, kind="stable")
    sp = pooled[order_p]
    new_block = np.ones(sp.size, dtype=bool)
    new_block[1:] = sp[1:] != sp[:-1]
    starts = np.flatnonzero(new_block)
    ends = np.append(starts[1:], sp.size)

    def u_rows(wa: np.ndarray, wb: np.ndarray, cum: np.ndarray, below: np.ndarray,
               tied: np.ndarray) -> np.ndarray:
        np.cumsum(wb, axis=1, out=cum[:, 1:])
        np.take(cum, lo, axis=1, out=below)
        if half_tied:
            np.take(cum, hi, axis=1, out=tied)
            tied -= below
            tied *= 0.5
            below += tied
        return np.einsum("ij,ij->i", wa, below)

    def u(ca: np.ndarray, cb: np.ndarray) -> np.ndarray:
        m = ca.shape[0]
        step = max(1, min(m, BLOCK_VALUES // (a.size + b.size + 1)))
        cum = np.zeros((step, b.size + 1))
        below, tied = np.empty((step, a.size)), np.empty((step, a.size))
        out = np.empty(m)
        for start in range(0, m, step):
            rows = slice(start, min(m, start + step))
            k = rows.stop - start
            wa = ca[rows] if sorted_a else ca[rows][:, order_a]
            wb = cb[rows] if sorted_b else cb[rows][:, order_b]
            out[rows] = u_rows(wa, wb, cum[:k], below[:k], tied[:k])
        return out

    def tie_term(ca: np.ndarray, cb: np.ndarray) -> np.ndarray:
        wp = np.concatenate([ca, cb], axis=1)[:, order_p]
        cp = np.zeros((wp.shape[0], wp.shape[1] + 1))
        np.cumsum(wp, axis=1, out=cp[:, 1:])
        t = cp[:, ends] - cp[:, starts]
        return np.sum(t**3 - t, axis=1)

    return u, tie_term


def prob_superiority_counts(a, b):
    u, _ = superiority_by_counts(a, b)
    return lambda ca, cb: u(ca, cb) / (a.size * b.size)


def cliff_delta_counts(a, b):
    u, _ = superiority_by_counts(a, b)
    return lambda ca, cb: 2.0 * u(ca, cb) / (a.size * b.size) - 1.0


def r_from_z_counts(a, b):
    u, tie_term = superiority_by_counts(a, b)
    na, nb = a.size, b.size
    n = na + nb

    def statistic(ca, cb):
        var = mann_whitney_variance(na, nb, tie_term(ca, cb))
        with np.errstate(divide="ignore", invalid="ignore"):
            return (u(ca, cb) - na * nb / 2.0) / np.sqrt(var) / math.sqrt(n)
    return statistic
