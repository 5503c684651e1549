"""Effect sizes for paired data: two conditions measured on the same participants.

Differences are d_i = a_i - b_i (first condition minus second). Every signed index is the first
condition relative to the second; swapping them negates it and maps ps_dep to 1 - ps_dep.

Differences and ties: a difference computed from decimal data must tie with its equal
(5.1 - 4.9 and 0.2 are the same difference, though not in binary floating point). Differences are
therefore rounded to the number of decimal places the data carry (`decimals`), or, when the data
use exponents, to 12 significant digits of the largest value, before signs, zeros and ranks are
taken (`differences`).

The `*_values(x)` functions take participants' rows stacked along the second-to-last axis:
x[..., 0] is the first condition and x[..., 1] the second, so that a bootstrap resample of
participants keeps each pair together.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special, stats

from auditor.moments import mean_var
from auditor.pair_sums import pair_sums
from auditor.parametric import Estimate, noncentral_t_limits, noncentral_t_note
from auditor.ranks import midranks, tie_sizes
from auditor.results import Interval

EXACT_MAX_N = 50  # exact signed-rank null distribution up to 50 non-zero differences


def difference_digits(matrix: np.ndarray, decimals: int | None) -> int:
    """Decimal places to round differences to: those the data carry, else 12 significant digits."""
    if decimals is not None:
        return int(decimals)
    top = float(np.max(np.abs(matrix))) if matrix.size else 0.0
    return 11 - int(math.floor(math.log10(top))) if top > 0 else 12


ROUND_MAX_DIGITS = 300  # numpy rounds by multiplying by 10^digits, which overflows past 10^308


def differences(x: np.ndarray, digits: int) -> np.ndarray:
    """d = first - second along the pair axis, rounded to `digits` decimal places.

    Range: any digits. numpy.round(d, digits) multiplies by 10^digits, which is infinite from
    digits = 309 on (data below about 1e-297, where 12 significant digits need that many places)
    and made every difference NaN; there the differences are first scaled by the exact
    10^(digits - 300) and rounded to 300 places, which rounds to the same decimal grid up to one
    rounding of the scaling (far below the 12th significant digit)."""
    d = x[..., 0] - x[..., 1]
    if digits <= ROUND_MAX_DIGITS:
        return np.round(d, digits)
    scale = 10.0 ** (digits - ROUND_MAX_DIGITS)
    return np.round(d * scale, ROUND_MAX_DIGITS) / scale


# ------------------------------------------------------------------ vectorised point estimates


def mean_difference_values(x, digits=12):
    """mean(d) = mean_A - mean_B."""
    return np.mean(differences(x, digits), axis=-1)


def d_z_values(x, digits=12):
    """d_z = mean(d) / SD(d) (Cohen 1988, eq. 2.3.5)."""
    m, v, _ = mean_var(differences(x, digits))
    with np.errstate(divide="ignore", invalid="ignore"):
        return m / np.sqrt(v)


def d_av_values(x, digits=12):
    """d_av = mean(d) / sqrt((s_A^2 + s_B^2) / 2) (Cumming 2012; Lakens 2013, eq. 10)."""
    _, va, _ = mean_var(x[..., 0])
    _, vb, _ = mean_var(x[..., 1])
    with np.errstate(divide="ignore", invalid="ignore"):
        return mean_difference_values(x, digits) / np.sqrt((va + vb) / 2)


def correlation_values(x):
    """Pearson correlation of the two conditions across participants."""
    ma, va, _ = mean_var(x[..., 0])
    mb, vb, n = mean_var(x[..., 1])
    cov = np.sum((x[..., 0] - ma[..., None]) * (x[..., 1] - mb[..., None]), axis=-1) / (n - 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        return cov / np.sqrt(va * vb)


def d_rm_values(x, digits=12):
    """d_rm = d_z sqrt(2 (1 - r)), r the A-B correlation (Morris & DeShon 2002, eq. 12;
    Lakens 2013, eq. 9)."""
    r = correlation_values(x)
    with np.errstate(invalid="ignore"):
        return d_z_values(x, digits) * np.sqrt(2.0 * (1.0 - r))


def ps_dep_values(x, digits=12):
    """PS_dep = (N+ + N0 / 2) / N: the share of participants whose first value is larger, ties
    counted one half (Grissom & Kim 2012, sec. 5.6)."""
    d = differences(x, digits)
    return (np.sum(d > 0, axis=-1) + 0.5 * np.sum(d == 0, axis=-1)) / d.shape[-1]


def signed_rank_parts(d):
    """R+, R- and the tie term of the signed-rank statistic with zeros dropped (Wilcoxon 1945;
    zeros handled as in Wilcoxon's method, ties by mid-ranks)."""
    nonzero = d != 0
    absd = np.where(nonzero, np.abs(d), np.inf)  # zeros rank last and are then ignored
    ranks = midranks(absd)
    r_plus = np.sum(np.where(d > 0, ranks, 0.0), axis=-1)
    r_minus = np.sum(np.where(d < 0, ranks, 0.0), axis=-1)
    t = np.where(nonzero, tie_sizes(absd), 1).astype(float)
    tie_term = np.sum(np.where(nonzero, t * t - 1.0, 0.0), axis=-1)  # sum over blocks of t^3 - t
    return r_plus, r_minus, tie_term, np.sum(nonzero, axis=-1)


def matched_rank_biserial_values(x, digits=12):
    """r = (R+ - R-) / (R+ + R-), zeros dropped (Kerby 2014, simple difference formula)."""
    rp, rm, _, _ = signed_rank_parts(differences(x, digits))
    with np.errstate(divide="ignore", invalid="ignore"):
        return (rp - rm) / (rp + rm)


def wilcoxon_z_values(x, digits=12):
    """Signed-rank z with zeros dropped, tie-corrected, no continuity correction:
    z = (R+ - N(N+1)/4) / sqrt(N(N+1)(2N+1)/24 - sum(t^3 - t)/48), N = non-zero pairs.

    N is taken as a float: the count of non-zero differences is an int64, and the product
    N(N+1)(2N+1) overflows int64 from N = 1,664,510 on (the p-value and r = z / sqrt(N) came out
    undefined at 2 x 10^6 pairs). The variance is positive for every N >= 1, ties or not
    (at worst, all |d| tied, it is N(N+1)^2 / 16); NaN (undefined) only when N = 0."""
    rp, _, tie_term, n = signed_rank_parts(differences(x, digits))
    n = np.asarray(n, dtype=float)
    var = n * (n + 1) * (2 * n + 1) / 24.0 - tie_term / 48.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return (rp - n * (n + 1) / 4.0) / np.sqrt(var)


def r_from_z_values(x, digits=12):
    """r = z / sqrt(N), N = number of non-zero differences."""
    d = differences(x, digits)
    n = np.sum(d != 0, axis=-1).astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return wilcoxon_z_values(x, digits) / np.sqrt(n)


def walsh_averages(d: np.ndarray) -> np.ndarray:
    """All (d_i + d_j) / 2 for i <= j (Tukey 1949), along the last axis."""
    i, j = np.triu_indices(d.shape[-1])
    return (d[..., i] + d[..., j]) / 2.0


WALSH_LISTED_MAX = 2500  # up to this many Walsh averages per row they are listed; above, selected


def walsh_median(d: np.ndarray) -> float:
    """Median of the n(n+1)/2 Walsh averages of one sample d, selected among the Walsh sums
    without listing them (`pair_sums`; O(n) memory), so that the paired shift, its bootstrap
    replicates and its fragility steps stay linear in memory at any n (listing them took 9 GiB
    at 50,000 pairs). Each average is fl(d_i + d_j) / 2, the same number the listed form gives."""
    sums = pair_sums(d)
    m = sums.size
    if m % 2:
        return sums.kth(m // 2 + 1) / 2.0
    return 0.5 * (sums.kth(m // 2) / 2.0 + sums.kth(m // 2 + 1) / 2.0)


def hodges_lehmann_values(x, digits=12):
    """One-sample Hodges-Lehmann estimate: median of the Walsh averages of d
    (Hodges & Lehmann 1963). Rows of at most WALSH_LISTED_MAX averages list them (a bounded
    number of rows at a time); longer rows select the median (`walsh_median`)."""
    d = differences(x, digits)
    if d.ndim == 1:
        return float(walsh_median(d))
    flat = d.reshape(-1, d.shape[-1])
    per_row = d.shape[-1] * (d.shape[-1] + 1) // 2
    if per_row > WALSH_LISTED_MAX:
        return np.array([walsh_median(row) for row in flat]).reshape(d.shape[:-1])
    step = max(1, 4_000_000 // per_row)
    out = np.empty(flat.shape[0])
    for s in range(0, flat.shape[0], step):
        out[s:s + step] = np.median(walsh_averages(flat[s:s + step]), axis=-1)
    return out.reshape(d.shape[:-1])


# ------------------------------------------------------------------ estimates with intervals


def _pair(a, b):
    return np.column_stack([a, b])


def mean_difference(a, b, level, digits=12) -> Estimate:
    """mean(d) with the paired t interval mean(d) +- t(n - 1) SD(d) / sqrt(n)
    (scipy.stats.ttest_rel). Assumes near-normal differences or large n."""
    d = differences(_pair(a, b), digits)
    m, v, n = mean_var(d)
    m, v = float(m), float(v)
    if v == 0:
        return Estimate(m, None, None, ("every difference is equal: no interval",))
    h = special.stdtrit(n - 1, 0.5 + level / 2) * math.sqrt(v / n)
    return Estimate(m, Interval("paired_t", m - h, m + h, level))


def d_z(a, b, level, digits=12) -> Estimate:
    """d_z with the noncentral-t interval: t = d_z sqrt(n) is noncentral t with n - 1 df
    (Steiger & Fouladi 1997). Assumes normal differences."""
    d = differences(_pair(a, b), digits)
    n = d.size
    value = float(d_z_values(_pair(a, b), digits))
    if not math.isfinite(value):
        return Estimate(None, None, "every difference is equal: SD of the differences is zero")
    limits = noncentral_t_limits(value * math.sqrt(n), n - 1, level)
    if limits is None:
        z = special.ndtri(0.5 + level / 2)
        se = math.sqrt(1.0 / n + value * value / (2.0 * n))
        return Estimate(value, Interval("normal_approximation", value - z * se, value + z * se,
                                        level, "noncentral-t inversion failed numerically"))
    return Estimate(value, Interval("noncentral_t", limits[0] / math.sqrt(n),
                                    limits[1] / math.sqrt(n), level,
                                    noncentral_t_note(value * math.sqrt(n))))


def _bootstrap_only(values_fn, reason: str):
    def estimate(a, b, level, digits=12) -> Estimate:
        value = float(values_fn(_pair(a, b), digits))
        if not math.isfinite(value):
            return Estimate(None, None, reason)
        return Estimate(value, None)
    estimate.__doc__ = (f"{values_fn.__doc__.strip()}\n\nNo analytic interval: the bootstrap"
                        " (resampling participants) gives the index's interval.")
    return estimate


def d_av(a, b, level, digits=12) -> Estimate:
    """d_av = mean(d) / sqrt((s_A^2 + s_B^2) / 2) (Cumming 2012; Lakens 2013, eq. 10). Its own
    interval is the bootstrap's (resampling participants). Beside it, the interval that agrees
    with the paired t test: d_z's noncentral-t limits times SD(d) / s_av, that ratio held at its
    observed value (so it excludes 0 exactly when the paired t test rejects; its coverage is not
    studied here)."""
    x = _pair(a, b)
    value = float(d_av_values(x, digits))
    if not math.isfinite(value):
        return Estimate(None, None, "both conditions are constant: the average variance is zero")
    dz = d_z(a, b, level, digits)
    more = ()
    if dz.value is not None and dz.interval is not None and dz.interval.method == "noncentral_t":
        _, va, _ = mean_var(x[:, 0])
        _, vb, _ = mean_var(x[:, 1])
        _, vd, _ = mean_var(differences(x, digits))
        ratio = math.sqrt(float(vd)) / math.sqrt((float(va) + float(vb)) / 2)
        more = (Interval("noncentral_t_scaled", dz.interval.low * ratio, dz.interval.high * ratio,
                         level, "d_z's noncentral-t limits times SD(d) / s_av: agrees with the"
                         " paired t test"),)
    return Estimate(value, None, None, (), {}, more)


d_rm = _bootstrap_only(d_rm_values, "d_rm is undefined (constant differences or conditions)")
matched_rank_biserial = _bootstrap_only(matched_rank_biserial_values,
                                        "every difference is zero: no signed ranks")


def ps_dep(a, b, level, digits=12) -> Estimate:
    """PS_dep with a Wilson score interval on the count N+ + N0/2 out of N (Wilson 1927;
    Newcombe 1998, method 3); approximate when there are zero differences. The value with ties
    discarded, N+ / (N - N0), is reported beside it."""
    d = differences(_pair(a, b), digits)
    n = d.size
    pos, zero = int(np.sum(d > 0)), int(np.sum(d == 0))
    p = (pos + 0.5 * zero) / n
    z = special.ndtri(0.5 + level / 2)
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / (1 + z * z / n)
    discarded = pos / (n - zero) if n > zero else None
    notes = [f"ties discarded: N+/(N - N0) = {pos}/{n - zero}"
             + (f" = {discarded:.4f}" if discarded is not None else " (undefined: all zero)"),
             f"zero differences: {zero} of {n}, counted one half each"]
    details = {"ties_discarded": discarded, "n_positive": pos, "n_zero": zero, "n": n}
    # the limits hold the estimate: at p = 0 or 1 the Wilson limit is 0 or 1 up to rounding
    low, high = min(max(0.0, centre - half), p), max(min(1.0, centre + half), p)
    return Estimate(p, Interval("wilson", float(low), float(high), level),
                    None, tuple(notes), details)


def r_from_z(a, b, level, digits=12) -> Estimate:
    """r = z / sqrt(N) from the Wilcoxon signed-rank z (zeros dropped, tie-corrected, no
    continuity correction), N = number of non-zero differences. Interval by bootstrap."""
    d = differences(_pair(a, b), digits)
    value = float(r_from_z_values(_pair(a, b), digits))
    if not math.isfinite(value):
        return Estimate(None, None, "every difference is zero: the signed-rank z is undefined")
    n = int(np.sum(d != 0))
    return Estimate(value, None, None, (f"N = {n} non-zero differences of {d.size} pairs",),
                    {"n_used": n, "n_pairs": int(d.size)})


def signed_rank_null_pmf(n: int) -> np.ndarray:
    """Exact null distribution of T+ for n untied non-zero differences: P(T+ = t), t = 0..n(n+1)/2,
    from the generating function prod_{i=1}^{n} (1 + q^i) / 2^n."""
    return sign_pattern_pmf(np.arange(1, n + 1))


def sign_pattern_pmf(steps: np.ndarray) -> np.ndarray:
    """P(sum of the steps carrying a + sign = t), t = 0..sum(steps), when each of the whole-number
    `steps` carries a + or a - with probability 1/2 independently: the generating function
    prod_i (1 + q^(step_i)) / 2, expanded one step at a time (the shift algorithm of Streitberg &
    Roehmel 1986). With the ranks 1..n it is Wilcoxon's null distribution of T+; with twice the
    mid-ranks of tied |d| it is the distribution of 2 T+ given the ties. Every probability is a
    count over 2^n, exact in double precision for n <= 50."""
    steps = np.asarray(steps, dtype=np.int64)
    size = int(np.sum(steps)) + 1
    pmf = np.zeros(size)
    pmf[0] = 1.0
    for step in steps:
        shifted = np.zeros(size)
        shifted[step:] = pmf[:size - step]
        pmf = (pmf + shifted) / 2.0
    return pmf


def walsh_interval_order(n: int, level: float, exact: bool, tie_term: float = 0.0):
    """k such that [W_(k), W_(M+1-k)] (M = n(n+1)/2 sorted Walsh averages) covers the centre of
    symmetry with probability >= level: the largest k with P(T+ <= k - 1) <= (1 - level)/2
    (Hollander & Wolfe 1999, sec. 3.3). Exact for untied data with n <= 50, otherwise the normal
    approximation with the tie-corrected variance."""
    alpha2 = (1 - level) / 2
    m = n * (n + 1) // 2
    if exact:
        cdf = np.cumsum(signed_rank_null_pmf(n))
        below = np.flatnonzero(cdf <= alpha2 + 1e-12)
        k = int(below[-1]) + 1 if below.size else 1
        return k, "exact", 1 - 2 * float(cdf[k - 1])
    var = n * (n + 1) * (2 * n + 1) / 24.0 - tie_term / 48.0
    k = int(math.floor(m / 2.0 - special.ndtri(1 - alpha2) * math.sqrt(var)))
    return max(k, 1), "normal_approximation", None


def hodges_lehmann(a, b, level, digits=12) -> Estimate:
    """Median of the Walsh averages of d with the distribution-free interval
    [W_(k), W_(M+1-k)] from the signed-rank distribution; assumes symmetric differences for the
    interval's coverage."""
    d = differences(_pair(a, b), digits)
    sums = pair_sums(d)  # Walsh sums d_i + d_j, i <= j, selected without listing them all
    m = sums.size
    value = (sums.kth(m // 2 + 1) / 2.0 if m % 2
             else (sums.kth(m // 2) + sums.kth(m // 2 + 1)) / 4.0)
    n = d.size
    _, counts = np.unique(np.abs(d), return_counts=True)
    tie_term = float(np.sum(counts.astype(float) ** 3 - counts))
    untied = bool(np.all(counts == 1) and np.all(d != 0))
    k, method, achieved = walsh_interval_order(n, level, untied and n <= EXACT_MAX_N, tie_term)
    notes = [f"order statistics k = {k} and {m + 1 - k} of {m} Walsh averages"
             f" ({method.replace('_', ' ')})"]
    if achieved is not None:
        notes.append(f"exact confidence {achieved:.4f}")
    if not untied:
        notes.append("ties or zero differences: coverage of the interval is approximate")
    low, high = sums.kth(k) / 2.0, sums.kth(m + 1 - k) / 2.0
    return Estimate(value, Interval("distribution_free", low, high, level), None, tuple(notes))


def one_signed(x: np.ndarray, digits: int = 12) -> str | None:
    """Why the signed-rank indices cannot be bootstrapped, or None: when every non-zero
    difference has the same sign, every resample has no ranks of the other sign, and T- (or T+)
    stays at zero in each."""
    d = differences(x, digits)
    nonzero = d[d != 0]
    if nonzero.size and (np.all(nonzero > 0) or np.all(nonzero < 0)):
        return ("every non-zero difference has the same sign: so does every resample, so the"
                " bootstrap cannot show the uncertainty")
    return None


def sign_test(d: np.ndarray) -> dict:
    """Exact two-sided sign test on the non-zero differences (scipy.stats.binomtest, p = 1/2)."""
    pos, neg = int(np.sum(d > 0)), int(np.sum(d < 0))
    if pos + neg == 0:
        return {"positive": 0, "negative": 0, "zero": int(d.size), "p": None}
    p = float(stats.binomtest(pos, pos + neg, 0.5).pvalue)
    return {"positive": pos, "negative": neg, "zero": int(d.size - pos - neg), "p": p}
