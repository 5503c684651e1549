"""Exact leave-one-out values without refitting: O(n) for the mean family from running moments,
O(n log n) for the dominance family from tie-aware counts found by binary search.

Each function returns one array per stratum, like `resampling.leave_one_out_units`: element i of
array j is the estimate with unit i of stratum j removed. Tests check every path against the plain
refit loop to 1e-12.

Removal of one value x from a sample of size n with mean m and M2 = sum (x_k - m)^2 uses the
reverse of Welford's update (Welford 1962): m' = (n m - x) / (n - 1), M2' = M2 - (x - m)(x - m'),
which stays accurate for data far from zero. Removal from a co-moment C = sum (a - m_a)(b - m_b)
is C' = C - (a - m_a')(b - m_b).
"""

from __future__ import annotations

import math

import numpy as np

from auditor import parametric as par
from auditor import paired
from auditor.moments import mean_var
from auditor.ranks import mann_whitney_variance


def _moments(x: np.ndarray):
    """(mean, deviations from it, M2 = sum of squared deviations) by two passes; exactly
    (value, zeros, 0) for a constant sample, whose mean by summation can miss the value by a
    rounding error and so give a variance that is not zero."""
    if x.size and x.min() == x.max():
        return float(x[0]), np.zeros_like(x, dtype=float), 0.0
    m = float(np.mean(x)) if x.size else np.nan
    c = x - m
    return m, c, float(np.dot(c, c))


def _rest_constant(x: np.ndarray):
    """(i, value) when every value of x but x_i equals `value` and x_i differs, else None: the
    one removal that leaves a constant sample, whose reverse update would leave a rounding
    residue (a variance of 1e-30 instead of 0) where a refit gives exactly zero."""
    if x.size < 3:
        return None
    lo, hi = x.min(), x.max()
    for common, odd in ((lo, hi), (hi, lo)):
        at_odd = np.flatnonzero(x == odd)
        if at_odd.size == 1 and np.count_nonzero(x == common) == x.size - 1:
            return int(at_odd[0]), float(common)
    return None


def _drop_moments(x: np.ndarray):
    """For each i: (mean, M2) of x without x_i, and the new size. With c_i = x_i - mean:
    mean' = mean - c_i / (n - 1) and M2' = M2 - c_i^2 n / (n - 1) (reverse Welford)."""
    n = x.size
    if n < 2:
        return np.full(n, np.nan), np.full(n, np.nan), n - 1
    m, c, m2 = _moments(x)
    m_new = m - c / (n - 1)
    m2_new = np.maximum(m2 - c * c * (n / (n - 1)), 0.0)
    if m2 == 0.0:
        m_new, m2_new = np.full(n, m), np.zeros(n)
    else:
        rest = _rest_constant(x)
        if rest is not None:
            m_new[rest[0]], m2_new[rest[0]] = rest[1], 0.0
    return m_new, m2_new, n - 1


def _var(m2, n):
    with np.errstate(divide="ignore", invalid="ignore"):
        return m2 / (n - 1) if n > 1 else np.full(np.shape(m2), np.nan)


def _centre(*samples):
    """The samples shifted by one of their values (the middle one of the first sample, its median
    when sorted), so running sums lose no precision on data such as 1e6 +- 1e-3 (every index here
    is unchanged by a common shift)."""
    first = np.ravel(samples[0])
    pivot = float(first[first.size // 2]) if first.size else 0.0
    return tuple(s - pivot for s in samples)


def _two_group_moments(a, b):
    """Per stratum: (mean_A, var_A, n_A, mean_B, var_B, n_B) after each removal; the group that
    keeps all its values contributes scalars."""
    a, b = _centre(a, b)
    ma, _, m2a = _moments(a)
    mb, _, m2b = _moments(b)
    va, vb = _var(m2a, a.size), _var(m2b, b.size)
    ma_i, m2a_i, na_i = _drop_moments(a)
    mb_j, m2b_j, nb_j = _drop_moments(b)
    drop_a = (ma_i, _var(m2a_i, na_i), na_i, mb, vb, b.size)
    drop_b = (ma, va, a.size, mb_j, _var(m2b_j, nb_j), nb_j)
    return drop_a, drop_b


def _map_two(fn, a, b):
    return tuple(fn(*parts) for parts in _two_group_moments(a, b))


def mean_difference(a, b):
    return _map_two(lambda ma, va, na, mb, vb, nb: ma - mb, a, b)


def cohen_d(a, b):
    def d(ma, va, na, mb, vb, nb):
        with np.errstate(divide="ignore", invalid="ignore"):
            return (ma - mb) / np.sqrt(((na - 1) * va + (nb - 1) * vb) / (na + nb - 2))
    return _map_two(d, a, b)


def hedges_g(a, b):
    da, db = cohen_d(a, b)
    j = par.hedges_correction(a.size + b.size - 3)  # one value fewer in either case
    return da * j, db * j


def glass_delta(a, b, reference: int = 1):
    def g(ma, va, na, mb, vb, nb):
        with np.errstate(divide="ignore", invalid="ignore"):
            return (ma - mb) / np.sqrt(vb if reference == 1 else va)
    return _map_two(g, a, b)


def d_unpooled(a, b):
    def d(ma, va, na, mb, vb, nb):
        with np.errstate(divide="ignore", invalid="ignore"):
            return (ma - mb) / np.sqrt((va + vb) / 2)
    return _map_two(d, a, b)


# ------------------------------------------------------------------ dominance family


def _placements(x: np.ndarray, other_sorted: np.ndarray) -> np.ndarray:
    """#(other < x) + #(other == x) / 2 for each x, by binary search on the sorted other group."""
    lo = np.searchsorted(other_sorted, x, side="left")
    hi = np.searchsorted(other_sorted, x, side="right")
    return lo + 0.5 * (hi - lo)


def _is_sorted(x: np.ndarray) -> bool:
    return bool(np.all(x[1:] >= x[:-1]))


def _placements_any_order(x: np.ndarray, other_sorted: np.ndarray) -> np.ndarray:
    """_placements with the queries searched in sorted order (much faster on large arrays)."""
    if _is_sorted(x):
        return _placements(x, other_sorted)
    order = np.argsort(x, kind="stable")
    out = np.empty(x.size)
    out[order] = _placements(x[order], other_sorted)
    return out


def _merged_counts(first: np.ndarray, second: np.ndarray):
    """For sorted samples: per value of `first`, the number of `second` values below it, and per
    value of `second`, the number of `first` values at or below it. One stable merge (a stable
    sort of two sorted runs is a linear merge) puts ties of `first` before those of `second`."""
    n1, n2 = first.size, second.size
    order = np.argsort(np.concatenate([first, second]), kind="stable")
    position = np.empty(n1 + n2, dtype=np.int64)
    position[order] = np.arange(n1 + n2)
    return position[:n1] - np.arange(n1), position[n1:] - np.arange(n2)


def _placements_sorted(sa: np.ndarray, sb: np.ndarray):
    """Placements of sorted A among sorted B and of B among A by two merges instead of four binary
    searches: #(B < a) + #(B = a) / 2 and #(A < b) + #(A = b) / 2."""
    b_below_a, a_upto_b = _merged_counts(sa, sb)
    a_below_b, b_upto_a = _merged_counts(sb, sa)
    return 0.5 * (b_below_a + b_upto_a), 0.5 * (a_below_b + a_upto_b)


def superiority_counts(a, b):
    """U_A after removing each a_i, then each b_j: U - (a_i's placement among B), and
    U - (n_A - b_j's placement among A)."""
    if _is_sorted(a) and _is_sorted(b):
        pa, pb = _placements_sorted(a, b)
    else:
        sa, sb = np.sort(a), np.sort(b)
        pa = _placements_any_order(a, sb)
        pb = _placements_any_order(b, sa)
    u = float(pa.sum())
    return u - pa, u - (a.size - pb)


def prob_superiority(a, b):
    ua, ub = superiority_counts(a, b)
    return ua / ((a.size - 1) * b.size), ub / (a.size * (b.size - 1))


def cliff_delta(a, b):
    pa, pb = prob_superiority(a, b)
    return 2 * pa - 1, 2 * pb - 1


rank_biserial = cliff_delta


def r_from_z(a, b):
    """z / sqrt(N) after each removal; the tie term loses (t^3 - t) - ((t - 1)^3 - (t - 1)) =
    3t(t - 1) when the removed value sat in a tie block of size t."""
    ua, ub = superiority_counts(a, b)
    pooled = np.sort(np.concatenate([a, b]))
    _, counts = np.unique(pooled, return_counts=True)
    tie_total = float(np.sum(counts.astype(float) ** 3 - counts))

    def r(x, u, na, nb):
        t = (np.searchsorted(pooled, x, "right") - np.searchsorted(pooled, x, "left")).astype(float)
        ties = tie_total - 3.0 * t * (t - 1.0)
        m = na + nb
        var = mann_whitney_variance(na, nb, ties)
        with np.errstate(divide="ignore", invalid="ignore"):
            return (u - na * nb / 2.0) / np.sqrt(var) / math.sqrt(m)

    return r(a, ua, a.size - 1, b.size), r(b, ub, a.size, b.size - 1)


# ------------------------------------------------------------------ paired designs


def _paired_parts(x, digits):
    d = paired.differences(x, digits)
    x = _centre(x)[0]
    md, m2d, n1 = _drop_moments(d)
    ma, m2a, _ = _drop_moments(x[:, 0])
    mb, m2b, _ = _drop_moments(x[:, 1])
    return d, md, _var(m2d, n1), _var(m2a, n1), _var(m2b, n1), ma, mb, n1


def paired_mean_difference(x, digits=12):
    return (_paired_parts(x, digits)[1],)


def paired_d_z(x, digits=12):
    _, md, vd, *_ = _paired_parts(x, digits)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (md / np.sqrt(vd),)


def paired_d_av(x, digits=12):
    _, md, _, va, vb, *_ = _paired_parts(x, digits)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (md / np.sqrt((va + vb) / 2),)


def paired_d_rm(x, digits=12):
    _, md, vd, va, vb, ma_new, _, n1 = _paired_parts(x, digits)
    centred = _centre(x)[0]
    a, b = centred[:, 0], centred[:, 1]
    m_a, _, _ = mean_var(a)
    m_b, _, _ = mean_var(b)
    co = float(np.sum((a - m_a) * (b - m_b)))
    co_new = co - (a - ma_new) * (b - m_b)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = co_new / (n1 - 1) / np.sqrt(va * vb)
        return (md / np.sqrt(vd) * np.sqrt(2.0 * (1.0 - r)),)


def paired_ps_dep(x, digits=12):
    d = paired.differences(x, digits)
    pos, zero, n = float(np.sum(d > 0)), float(np.sum(d == 0)), d.size
    return ((pos - (d > 0) + 0.5 * (zero - (d == 0))) / (n - 1),)


# ------------------------------------------------------------------ robust d (trimmed, winsorized)


def _trimmed_without_each(x: np.ndarray, proportion: float = par.ROBUST_TRIM):
    """For each x_i: the trimmed mean and winsorized variance of x without x_i, from prefix sums
    of the sorted values (O(n log n) in all). With s sorted, n' = n - 1, g = floor(p n') and x_i
    at sorted position r: the kept values are s[g:n-g] less s_r when g <= r < n - g, else
    s[g+1:n-g] (r < g) or s[g:n-g-1] (r >= n - g); winsorizing adds g copies of the lowest and of
    the highest kept value (Wilcox 2012, sec. 3.2)."""
    n = x.size
    m = n - 1
    g = par.trim_count(m, proportion)
    order = np.argsort(x, kind="stable")
    s = x[order]
    r = np.arange(n)
    p1 = np.concatenate([[0.0], np.cumsum(s)])
    p2 = np.concatenate([[0.0], np.cumsum(s * s)])
    below, above = r < g, r >= n - g
    lo = np.where(below, g + 1, g)
    hi = np.where(above, n - g - 1, n - g)
    inside = ~below & ~above
    own = np.where(inside, s, 0.0)
    count = m - 2 * g
    total = p1[hi] - p1[lo] - own
    squares = p2[hi] - p2[lo] - own * own
    with np.errstate(divide="ignore", invalid="ignore"):
        trimmed = total / count
        # lowest and highest kept values: the reduced sample's g-th and (n' - 1 - g)-th
        low_pos = g + (g >= r)
        high_pos = (m - 1 - g) + ((m - 1 - g) >= r)
        low, high = s[np.minimum(low_pos, n - 1)], s[np.minimum(high_pos, n - 1)]
        w_sum = total + g * (low + high)
        w_squares = squares + g * (low * low + high * high)
        w_var = np.maximum(w_squares - w_sum * w_sum / m, 0.0) / (m - 1)
    out_t, out_v = np.empty(n), np.empty(n)
    out_t[order], out_v[order] = trimmed, w_var
    return out_t, out_v


def robust_d(a, b):
    """Algina-Keselman-Penfield robust d with each value left out, from `_trimmed_without_each`
    on data centred at the pooled median (see `parametric.robust_d_values`)."""
    a, b = _centre(a, b)
    na, nb = a.size, b.size
    ta, va = par.trimmed_mean_values(a), par.winsorized_variance_values(a)
    tb, vb = par.trimmed_mean_values(b), par.winsorized_variance_values(b)
    ta_i, va_i = _trimmed_without_each(a)
    tb_j, vb_j = _trimmed_without_each(b)
    with np.errstate(divide="ignore", invalid="ignore"):
        drop_a = par.ROBUST_SCALE * (ta_i - tb) / np.sqrt(
            ((na - 2) * va_i + (nb - 1) * vb) / (na + nb - 3))
        drop_b = par.ROBUST_SCALE * (ta - tb_j) / np.sqrt(
            ((na - 1) * va + (nb - 2) * vb_j) / (na + nb - 3))
    return drop_a, drop_b
