"""Exact leave-one-out values of the omnibus effects of k-group designs, without refitting.

Each function returns one array per stratum, like `resampling.leave_one_out_units(values_fn,
samples)`: element i of array j is the effect with unit i of stratum j removed (NaN where the
effect is undefined).

k independent groups (samples: k 1-D arrays; a unit is one value of one group).

    Rank sums (Kruskal & Wallis 1952). Removing a value x of group g from the pooled sample, every
    larger value falls one rank and every other value tied with x falls one half, so
    R_j' = R_j - above_j(x) - (level_j(x) - [j = g]) / 2 - [j = g] r(x),
    with above_j(x) (level_j(x)) the number of values of group j larger than (equal to) x and r(x)
    the mid-rank of x; the tie term loses 3 t (t - 1) (t = size of x's tie block, since
    (t^3 - t) - ((t - 1)^3 - (t - 1)) = 3 t (t - 1)); N and n_g drop by one. One sort of the
    pooled values and counts per tie block: O(N log N + N k).

    Sums of squares (one-way ANOVA). The data are first shifted by their pooled median, which
    changes no sum of squares and keeps precision for data such as 1e6 +- 1e-3. Removing x from a
    group of size n with mean m and M2 = sum (x_i - m)^2 uses the reverse of Welford's update
    (Welford 1962): m' = (n m - x) / (n - 1), M2' = M2 - (x - m)(x - m'). The same update on the
    pooled sample gives the grand mean G' and SS_total' = SS_total - (x - G)(x - G');
    SS_within' = SS_within - M2_g + M2_g'; SS_between' = sum_j n_j' (m_j' - G')^2 directly.
    O(N k).

k repeated conditions (the sample is one array x of shape (n, k); a unit is a participant, a row).

    Friedman ranks (Friedman 1937). Column rank sums lose the removed row's within-row mid-ranks,
    the tie term loses that row's sum of (t^3 - t), n drops by one. O(n k log k) for the ranks.

    Sums of squares (one-way repeated-measures ANOVA), on data shifted by their median: removing
    row i with mean s_i gives G' = (n G - s_i) / (n - 1), condition means
    c_j' = (n c_j - x_ij) / (n - 1), SS_participants' = k [M2_s - (s_i - G)(s_i - G')] (M2_s of the
    row means) and SS_total' = SS_total - sum_j (x_ij - G)(x_ij - G'), the update for removing
    several values at once. O(n k).

Downdating a sum of squares loses precision when the removed unit carries most of it (a gross
outlier): its error is about 1e-16 SS_total, large next to SS_total' when SS_total' << SS_total.
Units whose removal takes more than half of SS_total are therefore recomputed directly from the
effect's `*_values` function on the reduced sample (at most two units in all, since the removed
shares sum to at most SS_total N / (N - 1)); every other value keeps an error of a few 1e-16
relative to SS_total'. The recomputation also makes a removal that leaves every value equal
exactly undefined, as the refit is.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np

from auditor import kgroups
from auditor.jackknife_signed_ranks import rank_blocks
from auditor.ranks import midranks, tie_sizes

# ------------------------------------------------------------------ shared


def _as_float(samples) -> tuple[np.ndarray, ...]:
    return tuple(np.asarray(s, dtype=float) for s in samples)


def _median_shift(*samples) -> tuple[np.ndarray, ...]:
    """The samples shifted by their pooled median (no sum of squares changes)."""
    pivot = float(np.median(np.concatenate([np.ravel(s) for s in samples])))
    return tuple(s - pivot for s in samples)


def _split(values: np.ndarray, sizes: Sequence[int]) -> tuple[np.ndarray, ...]:
    return tuple(np.split(values, np.cumsum(sizes)[:-1]))


def _refit(values_fn: Callable[..., np.ndarray], samples: Sequence[np.ndarray], stratum: int,
           units: np.ndarray) -> np.ndarray:
    """values_fn on the samples with each of `units` of one stratum removed in turn (stacked)."""
    n = samples[stratum].shape[0]
    keep = np.arange(n - 1)
    idx = keep[None, :] + (keep[None, :] >= units[:, None])
    stacked = [s[idx] if j == stratum else np.broadcast_to(s, (units.size,) + s.shape)
               for j, s in enumerate(samples)]
    with np.errstate(all="ignore"):
        return np.asarray(values_fn(*stacked), dtype=float)


def _with_refits(fast: tuple[np.ndarray, ...], flagged: tuple[np.ndarray, ...], values_fn,
                 samples) -> tuple[np.ndarray, ...]:
    out = []
    for j, (values, mask) in enumerate(zip(fast, flagged)):
        units = np.flatnonzero(mask)
        if units.size:
            values = values.copy()
            values[units] = _refit(values_fn, samples, j, units)
        out.append(values)
    return tuple(out)


# ------------------------------------------------------------------ k independent groups: ranks


def _kruskal_h_without_each(groups) -> tuple[np.ndarray, ...]:
    """Tie-corrected H after each removal, one array per group (see the module docstring)."""
    groups = _as_float(groups)
    k = len(groups)
    sizes = np.array([g.size for g in groups])
    labels = np.repeat(np.arange(k), sizes)
    mid, t, above, level = rank_blocks(np.concatenate(groups), labels, k)
    rank_sums = np.bincount(labels, weights=mid, minlength=k)
    tie_term = float(np.sum(t * t - 1.0))  # sum over values of t^2 - 1 = sum over blocks of t^3 - t

    own = labels[:, None] == np.arange(k)[None, :]  # (N, k): the removed value's group
    sums = rank_sums[None, :] - above - 0.5 * (level - own) - np.where(own, mid[:, None], 0.0)
    counts = sizes[None, :] - own
    n = int(sizes.sum()) - 1
    ties = tie_term - 3.0 * t * (t - 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.full(mid.size, -3.0 * (n + 1))
        for j in range(k):
            h = h + 12.0 / (n * (n + 1)) * sums[:, j] ** 2 / counts[:, j]
        correction = 1.0 - ties / (n**3 - n)
        return _split(h / correction, sizes)


def epsilon_squared_h(*groups):
    """Leave-one-out values of epsilon^2_H = H / (N - 1), H the tie-corrected Kruskal-Wallis
    statistic (Kruskal & Wallis 1952; Kelley 1935 as given by Tomczak & Tomczak 2014, eq. 11)."""
    n = sum(np.size(g) for g in groups) - 1
    with np.errstate(divide="ignore", invalid="ignore"):
        return tuple(h / (n - 1) for h in _kruskal_h_without_each(groups))


def eta_squared_h(*groups):
    """Leave-one-out values of eta^2_H = (H - k + 1) / (N - k), H the tie-corrected Kruskal-Wallis
    statistic (Kruskal & Wallis 1952; Cohen 2008, p. 380; Tomczak & Tomczak 2014, eq. 12)."""
    n, k = sum(np.size(g) for g in groups) - 1, len(groups)
    with np.errstate(divide="ignore", invalid="ignore"):
        return tuple((h - k + 1) / (n - k) for h in _kruskal_h_without_each(groups))


# ------------------------------------------------------------------ k independent groups: ANOVA


def _anova_without_each(groups):
    """Per group: (SS_between', SS_within', flagged) after each removal, and N' = N - 1."""
    centred = _median_shift(*_as_float(groups))
    k = len(centred)
    sizes = np.array([c.size for c in centred])
    n = int(sizes.sum())
    means = np.array([np.mean(c) for c in centred])
    m2 = np.array([np.sum((c - m) ** 2) for c, m in zip(centred, means)])
    pooled = np.concatenate(centred)
    grand = float(np.mean(pooled))
    ss_total = float(np.sum((pooled - grand) ** 2))
    ss_within = float(np.sum(m2))
    parts = []
    with np.errstate(divide="ignore", invalid="ignore"):
        for g, x in enumerate(centred):
            size = int(sizes[g])
            mean_g = (size * means[g] - x) / (size - 1) if size > 1 else np.full(x.size, np.nan)
            m2_g = np.maximum(m2[g] - (x - means[g]) * (x - mean_g), 0.0)
            grand_new = (n * grand - x) / (n - 1)
            group_means = np.repeat(means[None, :], x.size, axis=0)
            group_means[:, g] = mean_g
            counts = sizes.astype(float)
            counts[g] -= 1
            between = np.sum(counts[None, :] * (group_means - grand_new[:, None]) ** 2, axis=1)
            within = ss_within - m2[g] + m2_g
            flagged = ((x - grand) * (x - grand_new) > 0.5 * ss_total) & (size > 1)
            parts.append((between, within, flagged))
    return parts, n - 1, k


def eta_squared(*groups):
    """Leave-one-out values of eta^2 = SS_between / SS_total of the one-way ANOVA (Pearson's
    correlation ratio; Cohen 1988, ch. 8)."""
    parts, _, _ = _anova_without_each(groups)
    with np.errstate(divide="ignore", invalid="ignore"):
        fast = tuple(sb / (sb + sw) for sb, sw, _ in parts)
    return _with_refits(fast, tuple(f for _, _, f in parts), kgroups.eta_squared_values,
                        _as_float(groups))


def omega_squared(*groups):
    """Leave-one-out values of omega^2 = (SS_between - (k - 1) MS_within) / (SS_total +
    MS_within), MS_within = SS_within / (N - k) (Hays 1963; Olejnik & Algina 2003, Table 1)."""
    parts, n, k = _anova_without_each(groups)
    with np.errstate(divide="ignore", invalid="ignore"):
        fast = []
        for sb, sw, _ in parts:
            ms_within = sw / (n - k)
            fast.append((sb - (k - 1) * ms_within) / (sb + sw + ms_within))
    return _with_refits(tuple(fast), tuple(f for _, _, f in parts), kgroups.omega_squared_values,
                        _as_float(groups))


# ------------------------------------------------------------------ k repeated conditions


def kendall_w(x):
    """Leave-one-out values (one per participant) of Kendall's W = chi^2_F / (n (k - 1))
    (Kendall & Babington Smith 1939), chi^2_F the tie-corrected Friedman statistic
    12 sum_j (R_j - n(k+1)/2)^2 / (n k (k+1) - sum(t^3 - t)/(k-1)) with mid-ranks within each
    participant (Friedman 1937)."""
    x = np.asarray(x, dtype=float)
    n, k = x.shape
    ranks = midranks(x)
    t = tie_sizes(x).astype(float)
    row_ties = np.sum(t * t - 1.0, axis=1)  # per row: sum over blocks of t^3 - t
    sums = np.sum(ranks, axis=0)[None, :] - ranks
    ties = float(np.sum(row_ties)) - row_ties
    m = n - 1
    ss = np.sum((sums - m * (k + 1) / 2.0) ** 2, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        chi2 = 12.0 * ss / (m * k * (k + 1) - ties / (k - 1))
        return (chi2 / (m * (k - 1)),)


def generalized_eta_squared(x):
    """Leave-one-out values (one per participant) of the generalized eta^2 of one
    within-participant factor, SS_conditions / (SS_conditions + SS_participants + SS_error)
    (Olejnik & Algina 2003, Table 2; Bakeman 2005, eq. 2)."""
    x = np.asarray(x, dtype=float)
    (c,) = _median_shift(x)
    n, k = c.shape
    grand = float(np.mean(c))
    cond = np.mean(c, axis=0)
    subj = np.mean(c, axis=1)
    m2_subj = float(np.sum((subj - grand) ** 2))
    ss_total = float(np.sum((c - grand) ** 2))
    m = n - 1
    with np.errstate(divide="ignore", invalid="ignore"):
        grand_new = (n * grand - subj) / m
        cond_new = (n * cond[None, :] - c) / m
        ss_cond = m * np.sum((cond_new - grand_new[:, None]) ** 2, axis=1)
        ss_subj = k * np.maximum(m2_subj - (subj - grand) * (subj - grand_new), 0.0)
        share = np.sum((c - grand) * (c - grand_new[:, None]), axis=1)
        # never below zero, so that the value stays in [0, 1] like the refit's (kgroups._rm_parts)
        ss_error = np.maximum(np.maximum(ss_total - share, 0.0) - ss_cond - ss_subj, 0.0)
        fast = ss_cond / (ss_cond + ss_subj + ss_error)
    flagged = (share > 0.5 * ss_total) & (n > 1)
    return _with_refits((fast,), (flagged,), kgroups.generalized_eta_squared_values, (x,))
