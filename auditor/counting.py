"""Bootstrap statistics of the mean family and of robust d from resampling counts.

A resample of a group is a vector of counts over its values (how often each was drawn, see
`resampling.counts_from_indices`), so its sums are matrix-vector products and nothing is gathered
or sorted per resample. With values centred on one data value x0 (shared by both groups, so the
difference of two large, close means keeps its precision) and counts c:

    mean = x0 + (c . (x - x0)) / n,    M2 = c . (x - x0)^2 - (c . (x - x0))^2 / n.

Robust d needs the trimmed mean and winsorized variance of each resample. On sorted values with
cumulative counts C_j (draws of values before j), value j fills the positions [C_j, C_j+1) of the
sorted resample, so its share of the kept positions [g, n - g) is the overlap of the two ranges;
the winsorized sample adds g copies of the values at positions g and n - g - 1 (Wilcox 2012,
sec. 3.2). Each function here returns a statistic of the count matrices (m, n_A) and (m, n_B),
in the samples' order, equal to the `*_values` function on the expanded resamples.
"""

from __future__ import annotations

import numpy as np

from auditor import parametric as par

CONSTANT_CHECK_MAX = 40  # above this size a resample of one repeated value has probability < 1e-60


class _Sums:
    """Per resample: centred means and variances of both groups from their counts."""

    def __init__(self, a: np.ndarray, b: np.ndarray):
        self.na, self.nb = a.size, b.size
        origin = float(a[a.size // 2])
        self.a, self.b = a - origin, b - origin
        self.a2, self.b2 = self.a * self.a, self.b * self.b

    def moments(self, ca: np.ndarray, cb: np.ndarray):
        sa, sb = ca @ self.a, cb @ self.b
        ma, mb = sa / self.na, sb / self.nb
        with np.errstate(divide="ignore", invalid="ignore"):
            va = np.maximum(ca @ self.a2 - sa * ma, 0.0) / (self.na - 1)
            vb = np.maximum(cb @ self.b2 - sb * mb, 0.0) / (self.nb - 1)
        return ma, _exact_zero(va, ca, self.a), mb, _exact_zero(vb, cb, self.b)


def _constant(c: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Resamples that drew one value only."""
    drawn = c > 0
    return np.where(drawn, x, np.inf).min(axis=1) == np.where(drawn, x, -np.inf).max(axis=1)


def _exact_zero(variance: np.ndarray, c: np.ndarray, x: np.ndarray) -> np.ndarray:
    """The variance of a resample that drew one value only is exactly zero (as in
    `moments.mean_var`), not a rounding residue; such resamples occur only in small groups."""
    if x.size > CONSTANT_CHECK_MAX:
        return variance
    return np.where(_constant(c, x), 0.0, variance)


def mean_difference_counts(a, b):
    sums = _Sums(a, b)

    def statistic(ca, cb):
        ma, _, mb, _ = sums.moments(ca, cb)
        return ma - mb
    return statistic


def cohen_d_counts(a, b, factor: float = 1.0):
    sums = _Sums(a, b)
    na, nb = a.size, b.size

    def statistic(ca, cb):
        ma, va, mb, vb = sums.moments(ca, cb)
        with np.errstate(divide="ignore", invalid="ignore"):
            return factor * (ma - mb) / np.sqrt(((na - 1) * va + (nb - 1) * vb) / (na + nb - 2))
    return statistic


def hedges_g_counts(a, b):
    return cohen_d_counts(a, b, par.hedges_correction(a.size + b.size - 2))


def glass_delta_counts(a, b, reference: int = 1):
    sums = _Sums(a, b)

    def statistic(ca, cb):
        ma, va, mb, vb = sums.moments(ca, cb)
        with np.errstate(divide="ignore", invalid="ignore"):
            return (ma - mb) / np.sqrt(vb if reference == 1 else va)
    return statistic


def d_unpooled_counts(a, b):
    sums = _Sums(a, b)

    def statistic(ca, cb):
        ma, va, mb, vb = sums.moments(ca, cb)
        with np.errstate(divide="ignore", invalid="ignore"):
            return (ma - mb) / np.sqrt((va + vb) / 2)
    return statistic


def _trimmed_by_counts(x_sorted: np.ndarray, order: np.ndarray | None,
                       proportion: float = par.ROBUST_TRIM):
    """Function of counts (m, n) in the sample's order -> (trimmed mean, winsorized variance)
    of each resample, for values already centred and sorted (`order` maps sorted to sample)."""
    n = x_sorted.size
    g = par.trim_count(n, proportion)
    squares = x_sorted * x_sorted

    def statistic(c):
        c = c if order is None else c[:, order]
        cum = np.zeros((c.shape[0], n + 1))
        np.cumsum(c, axis=1, out=cum[:, 1:])
        share = np.clip(cum[:, 1:], g, n - g) - np.clip(cum[:, :-1], g, n - g)
        kept = share @ x_sorted if share.shape[0] == 1 else np.einsum("ij,j->i", share, x_sorted)
        kept_sq = np.einsum("ij,j->i", share, squares)
        trimmed = kept / (n - 2 * g)
        if g:
            low = x_sorted[np.argmax(cum[:, 1:] > g, axis=1)]
            high = x_sorted[np.argmax(cum[:, 1:] > n - g - 1, axis=1)]
            kept = kept + g * (low + high)
            kept_sq = kept_sq + g * (low * low + high * high)
        with np.errstate(divide="ignore", invalid="ignore"):
            variance = np.maximum(kept_sq - kept * kept / n, 0.0) / (n - 1)
        if g:
            variance = np.where(low == high, 0.0, variance)  # the winsorized sample is constant
        else:
            variance = _exact_zero(variance, c, x_sorted)
        return trimmed, variance

    return statistic


def robust_d_counts(a, b):
    """Algina-Keselman-Penfield robust d of each resample (`parametric.robust_d_values`)."""
    origin = float(a[a.size // 2])
    parts = []
    for x in (a, b):
        x = x - origin
        order = None if np.all(x[1:] >= x[:-1]) else np.argsort(x, kind="stable")
        parts.append(_trimmed_by_counts(x if order is None else x[order], order))
    na, nb = a.size, b.size

    def statistic(ca, cb):
        ta, va = parts[0](ca)
        tb, vb = parts[1](cb)
        with np.errstate(divide="ignore", invalid="ignore"):
            return par.ROBUST_SCALE * (ta - tb) / np.sqrt(
                ((na - 1) * va + (nb - 1) * vb) / (na + nb - 2))
    return statistic
