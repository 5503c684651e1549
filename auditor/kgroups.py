"""Omnibus effect sizes for three or more groups or conditions, and the tests beside them.

k independent groups: epsilon-squared and eta-squared from the Kruskal-Wallis H, and eta-squared
and omega-squared from the one-way ANOVA. k repeated conditions: Kendall's W from the Friedman
statistic and the generalized eta-squared of the one-way repeated-measures ANOVA.

Vectorised `*_values` functions take stacked resamples: for independent groups one array per group
of shape (m, n_j); for repeated conditions one array of shape (m, n, k) (participants' rows).
eta_squared_h and omega_squared can fall below zero when the groups differ less than chance
alone would make them; the raw value is reported, never clipped.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from auditor.moments import mean_var
from auditor.parametric import Estimate
from auditor.ranks import midranks, tie_sizes


# ------------------------------------------------------------------ k independent groups


def tie_correction_values(pooled):
    """C = 1 - sum(t^3 - t) / (N^3 - N) along the last axis, t the tie-block sizes
    (scipy.stats.tiecorrect), 0 <= C <= 1.

    sum(t^3 - t) is summed in floating point (t^2 - 1 per value, no integer products, so nothing
    overflows int64 at any N) and is exact while N^3 < 2^53 (N below about 208,000); above that C
    carries an absolute error of about log2(N) 1e-16. The smallest C of data that are not all
    tied is 3 / (N + 1) (one value apart from N - 1 equal ones), so C below 1.5 / (N + 1) is
    rounding error and is set to exactly 0 (every value tied).
    """
    n = pooled.shape[-1]
    if n < 2:
        return np.ones(pooled.shape[:-1])
    t = tie_sizes(pooled).astype(float)
    correction = 1.0 - np.sum(t * t - 1.0, axis=-1) / (float(n) ** 3 - n)
    return np.where(correction < 1.5 / (n + 1), 0.0, correction)


def kruskal_h_values(*groups):
    """Tie-corrected Kruskal-Wallis H = [12 / (N(N+1)) sum_j R_j^2 / n_j - 3(N+1)] / C,
    C = 1 - sum(t^3 - t) / (N^3 - N) (Kruskal & Wallis 1952; scipy.stats.kruskal).

    Computed in the centred form H = 12 / (N(N+1)) sum_j S_j^2 / n_j / C, S_j the sum over group
    j of (r_i - (N+1)/2), which is the same number: the textbook form subtracts 3(N+1) from a
    sum of size 3(N+1) and keeps only about 1e-16 N / H of relative precision (1e-10 at
    N = 3 x 10^6 with H near 5), the centred one keeps 1e-15 at any N (centred mid-ranks are
    multiples of 1/2, summed exactly while N^2 < 2^52). NaN (undefined) when every value is tied
    (C = 0, `tie_correction_values`).
    """
    sizes = [g.shape[-1] for g in groups]
    n = sum(sizes)
    pooled = np.concatenate(groups, axis=-1)
    centred = midranks(pooled) - (n + 1) / 2.0
    total = 0.0
    start = 0
    for size in sizes:
        total = total + np.sum(centred[..., start:start + size], axis=-1) ** 2 / size
        start += size
    h = 12.0 / (float(n) * (n + 1)) * total
    correction = tie_correction_values(pooled)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(correction > 0, h / np.where(correction > 0, correction, 1.0), np.nan)


def epsilon_squared_h_values(*groups):
    """epsilon^2_H = H / (N - 1) (Kelley 1935 as given by Tomczak & Tomczak 2014, eq. 11)."""
    n = sum(g.shape[-1] for g in groups)
    return kruskal_h_values(*groups) / (n - 1)


def eta_squared_h_values(*groups):
    """eta^2_H = (H - k + 1) / (N - k) (Cohen 2008, p. 380; Tomczak & Tomczak 2014, eq. 12)."""
    n, k = sum(g.shape[-1] for g in groups), len(groups)
    return (kruskal_h_values(*groups) - k + 1) / (n - k)


def anova_parts(groups):
    sizes = [g.shape[-1] for g in groups]
    n = sum(sizes)
    origin = groups[0][..., :1]  # centre on a data value for precision
    centred = [g - origin for g in groups]
    grand = sum(np.sum(c, axis=-1) for c in centred) / n
    means = [np.mean(c, axis=-1) for c in centred]
    ss_between = sum(size * (m - grand) ** 2 for size, m in zip(sizes, means))
    ss_within = sum(np.sum((c - m[..., None]) ** 2, axis=-1) for c, m in zip(centred, means))
    return ss_between, ss_within, n, len(groups)


def eta_squared_values(*groups):
    """eta^2 = SS_between / SS_total from the one-way ANOVA (Pearson's correlation ratio;
    Cohen 1988, ch. 8)."""
    sb, sw, _, _ = anova_parts(groups)
    with np.errstate(divide="ignore", invalid="ignore"):
        return sb / (sb + sw)


def omega_squared_values(*groups):
    """omega^2 = (SS_between - (k - 1) MS_within) / (SS_total + MS_within) (Hays 1963;
    Olejnik & Algina 2003, Table 1)."""
    sb, sw, n, k = anova_parts(groups)
    ms_within = sw / (n - k)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (sb - (k - 1) * ms_within) / (sb + sw + ms_within)


def _estimate_from(values_fn, reason, negative_note=None):
    def estimate(*groups) -> Estimate:
        value = float(values_fn(*groups))
        if not math.isfinite(value):
            return Estimate(None, None, reason)
        notes = ()
        if negative_note and value < 0:
            notes = (negative_note,)
        return Estimate(value, None, None, notes)
    estimate.__doc__ = values_fn.__doc__
    return estimate


_BELOW_ZERO = ("below zero: the groups differ less than sampling error alone would make them;"
               " read it as no effect (the raw value is kept, not clipped)")
epsilon_squared_h = _estimate_from(epsilon_squared_h_values, "all values are tied: H is undefined")
eta_squared_h = _estimate_from(eta_squared_h_values, "all values are tied: H is undefined",
                               _BELOW_ZERO)
eta_squared = _estimate_from(eta_squared_values, "every value is equal: SS_total is zero")
omega_squared = _estimate_from(omega_squared_values, "every value is equal: SS_total is zero",
                               _BELOW_ZERO)


def independent_tests(groups) -> dict:
    """Kruskal-Wallis, one-way ANOVA and Welch's ANOVA (Welch 1951) on the groups."""
    out = {"kruskal_wallis": kruskal_wallis(groups)}
    n = sum(len(g) for g in groups)
    df = [len(groups) - 1, n - len(groups)]
    if all(np.all(np.asarray(g) == np.asarray(g)[0]) for g in groups):
        out["anova"] = {"statistic": None, "df": df, "p": None,
                        "reason": "no variation within any group: the within-group mean square"
                                  " is zero"}
    else:
        with np.errstate(all="ignore"):
            f = stats.f_oneway(*groups)
        statistic = _finite(f.statistic)
        out["anova"] = {"statistic": statistic, "df": df,
                        "p": None if statistic is None else _finite(f.pvalue)}
    with np.errstate(all="ignore"):
        out["welch_anova"] = welch_anova(groups)
    return out


def kruskal_wallis(groups) -> dict:
    """Kruskal-Wallis test: H of `kruskal_h_values` (the centred form, precise at any N) against
    chi-squared with k - 1 df (Kruskal & Wallis 1952); the statistic equals scipy.stats.kruskal's
    to rounding. Undefined (None with the reason) when every value is tied."""
    k = len(groups)
    h = float(kruskal_h_values(*[np.asarray(g, dtype=float) for g in groups]))
    if not math.isfinite(h):
        return {"statistic": None, "df": k - 1, "p": None,
                "reason": "every value is tied: H is undefined"}
    return {"statistic": h, "df": k - 1, "p": float(stats.chi2.sf(h, k - 1))}


def welch_anova(groups) -> dict:
    """Welch's F for unequal variances: weights w_j = n_j / s_j^2,
    F = [sum w_j (m_j - m_w)^2 / (k - 1)] / [1 + 2 (k - 2) / (k^2 - 1) L],
    L = sum (1 - w_j / W)^2 / (n_j - 1), df2 = (k^2 - 1) / (3 L) (Welch 1951)."""
    k = len(groups)
    n = np.array([len(g) for g in groups], dtype=float)
    m = np.array([np.mean(g) for g in groups])
    v = np.array([mean_var(np.asarray(g, dtype=float))[1] for g in groups])  # 0 when constant
    if np.any(v == 0):
        return {"statistic": None, "df": None, "p": None,
                "reason": "a group has zero variance"}
    top = float(np.max(v))
    if not (math.isfinite(top) and np.all(np.isfinite(m))):
        return {"statistic": None, "df": None, "p": None,
                "reason": "the variances overflow double precision"}
    # weights relative to the largest variance (w_j top): F and the df are unchanged, and
    # n_j / s_j^2 neither overflows for tiny variances nor underflows for huge ones
    w = n / (v / top)
    total = w.sum()
    mw = float(np.sum(w * m) / total)
    lam = float(np.sum((1 - w / total) ** 2 / (n - 1)))
    f = float(np.sum(w * ((m - mw) ** 2 / top)) / (k - 1) / (1 + 2 * (k - 2) * lam / (k * k - 1)))
    df2 = (k * k - 1) / (3 * lam)
    if not (math.isfinite(f) and math.isfinite(df2)):
        return {"statistic": None, "df": None, "p": None,
                "reason": "Welch's F is not finite in double precision"}
    return {"statistic": f, "df": [k - 1, df2], "p": float(stats.f.sf(f, k - 1, df2))}


def _finite(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


# ------------------------------------------------------------------ k repeated conditions


def friedman_values(x):
    """Tie-corrected Friedman chi^2 = 12 sum_j (R_j - n(k+1)/2)^2 / (n k (k+1) - sum(t^3 - t)/(k-1))
    with ranks within each participant (Friedman 1937; scipy.stats.friedmanchisquare)."""
    n, k = x.shape[-2], x.shape[-1]
    ranks = midranks(x)
    col = np.sum(ranks, axis=-2)
    ss = np.sum((col - n * (k + 1) / 2.0) ** 2, axis=-1)
    t = tie_sizes(x).astype(float)
    ties = np.sum(t * t - 1.0, axis=(-2, -1))
    with np.errstate(divide="ignore", invalid="ignore"):
        return 12.0 * ss / (n * k * (k + 1) - ties / (k - 1))


def kendall_w_values(x):
    """Kendall's W = chi^2_F / (n (k - 1)), tie-corrected through chi^2_F (Kendall & Babington
    Smith 1939); 0 = no agreement in the participants' orderings, 1 = all order alike."""
    n, k = x.shape[-2], x.shape[-1]
    return friedman_values(x) / (n * (k - 1))


ROUNDING_FACTOR = 256.0  # residuals within 256 eps of the data's range are rounding error


def rounding_floor(centred: np.ndarray, count: int, axes) -> np.ndarray:
    """The sum of squares below which `count` squared residuals of data `centred` (already
    shifted by a data value) are indistinguishable from rounding error:
    count (256 eps max|centred|)^2, eps = 2^-52. A residual formed from a few means of n values
    carries an error of about (3 + 3 log2 n) eps max|x| (pairwise summation), below 256 eps for
    any n up to 10^20; data whose true residuals are smaller than that cannot be told apart from
    exactly additive data in double precision."""
    scale = np.max(np.abs(centred), axis=axes)
    return count * (ROUNDING_FACTOR * np.finfo(float).eps * scale) ** 2


def _rm_parts(x):
    """(SS_conditions, SS_participants, SS_error, n, k) of the one-way repeated-measures ANOVA.

    SS_error is the sum of the squared residuals x_ij - xbar_i. - xbar_.j + xbar.. computed
    directly (never negative, no cancellation), not SS_total - SS_conditions - SS_participants,
    and is set to exactly 0 when it is below `rounding_floor` (exactly additive data such as
    x_ij = a_i + b_j in decimals, whose residuals are pure rounding error; without this F came
    out near 1e16 with p = 0)."""
    n, k = x.shape[-2], x.shape[-1]
    c = x - x[..., :1, :1]
    grand = np.mean(c, axis=(-2, -1))
    cond = np.mean(c, axis=-2)
    subj = np.mean(c, axis=-1)
    ss_cond = n * np.sum((cond - grand[..., None]) ** 2, axis=-1)
    ss_subj = k * np.sum((subj - grand[..., None]) ** 2, axis=-1)
    resid = c - cond[..., None, :] - subj[..., :, None] + grand[..., None, None]
    ss_error = np.sum(resid * resid, axis=(-2, -1))
    ss_error = np.where(ss_error <= rounding_floor(c, n * k, (-2, -1)), 0.0, ss_error)
    return ss_cond, ss_subj, ss_error, n, k


def generalized_eta_squared_values(x):
    """Generalized eta^2 for one within-participant factor:
    SS_conditions / (SS_conditions + SS_participants + SS_error)
    (Olejnik & Algina 2003, Table 2; Bakeman 2005, eq. 2). Range [0, 1]: every sum of squares
    is computed as a sum of squares (`_rm_parts`), so none is negative."""
    sc, ss, se, _, _ = _rm_parts(x)
    with np.errstate(divide="ignore", invalid="ignore"):
        return sc / (sc + ss + se)


kendall_w = _estimate_from(kendall_w_values, "every participant is tied across conditions")
generalized_eta_squared = _estimate_from(generalized_eta_squared_values,
                                         "every value is equal: the sums of squares are zero")


def repeated_tests(x: np.ndarray, labels) -> dict:
    """Friedman test (scipy), and the repeated-measures ANOVA F with the Greenhouse-Geisser
    correction (degrees of freedom times epsilon; Greenhouse & Geisser 1959)."""
    n, k = x.shape
    out = {}
    with np.errstate(all="ignore"):
        chi2 = float(friedman_values(x))
    out["friedman"] = {"statistic": _finite(chi2), "df": k - 1,
                       "p": _finite(stats.chi2.sf(chi2, k - 1)) if math.isfinite(chi2) else None}
    sc, _, se, _, _ = _rm_parts(x)
    df1, df2 = k - 1, (n - 1) * (k - 1)
    eps = greenhouse_geisser(x)
    if se > 0:
        f = float(sc / df1 / (se / df2))
        out["rm_anova"] = {"statistic": f, "df": [df1, df2], "p": float(stats.f.sf(f, df1, df2)),
                           "p_greenhouse_geisser": float(stats.f.sf(f, df1 * eps, df2 * eps)),
                           "epsilon_gg": eps}
    else:
        out["rm_anova"] = {"statistic": None, "df": [df1, df2], "p": None,
                           "reason": "the error sum of squares is zero"}
    return out


def _contrast_floor(x: np.ndarray, p: int) -> float:
    """The trace of a contrast covariance below which it is rounding error (`rounding_floor`
    for p contrasts of data x, per participant and divided by n - 1 as the covariance is)."""
    n = x.shape[0]
    c = x - x[0, 0]
    return float(rounding_floor(c, n * p, (0, 1))) / max(n - 1, 1)


def greenhouse_geisser(x: np.ndarray) -> float:
    """Greenhouse-Geisser epsilon from the double-centred covariance matrix S of the conditions:
    eps = tr(S)^2 / ((k - 1) tr(S S)) (Greenhouse & Geisser 1959; pingouin.epsilon), in
    [1 / (k - 1), 1].

    The double-centred covariance is computed as the covariance of the row-centred data
    (x_ij - xbar_i.), which is the same matrix without the cancellation of centring a covariance
    of large, close columns. 1 (no correction) when the conditions' differences do not vary
    beyond rounding error (`_contrast_floor`)."""
    k = x.shape[1]
    rows = x - np.mean(x, axis=1, keepdims=True)
    sc = np.atleast_2d(np.cov(rows, rowvar=False))
    trace = float(np.trace(sc))
    if not trace > _contrast_floor(x, k - 1):
        return 1.0
    denom = (k - 1) * float(np.trace(sc @ sc))
    if not denom > 0:
        return 1.0
    return float(min(1.0, max(1.0 / (k - 1), trace ** 2 / denom)))


def mauchly(x: np.ndarray) -> dict:
    """Mauchly's test of sphericity on orthonormal contrasts C (k - 1 of them):
    W = det(C'SC) / (tr(C'SC) / p)^p, p = k - 1, chi^2 = -(n - 1 - (2p^2 + p + 2) / (6p)) ln W,
    df = p(p + 1)/2 - 1 (Mauchly 1940). With k = 2 sphericity holds trivially.

    C'SC is the covariance of the contrasted data x C (no cancellation), and is taken as zero
    below rounding error (`_contrast_floor`). The p-value adds the second-order term of the
    chi-squared approximation; with few participants for the number of conditions (n near k)
    that term can carry p past 1 (1.14 at k = 21, n = 21 in simulation) or below 0, so p is
    clipped to [0, 1] and a note says so."""
    n, k = x.shape
    p = k - 1
    if p < 2:
        return {"w": 1.0, "chi2": 0.0, "df": 0, "p": 1.0, "epsilon_gg": 1.0,
                "note": "two conditions: sphericity holds trivially"}
    helmert = np.linalg.qr(np.vstack([np.ones(k), np.eye(k)[:-1]]).T)[0][:, 1:]
    t = np.atleast_2d(np.cov(x @ helmert, rowvar=False))
    tr = float(np.trace(t))
    if not tr > _contrast_floor(x, p):
        return {"w": None, "chi2": None, "df": None, "p": None, "epsilon_gg": None,
                "note": "no variation in the differences between conditions"}
    if n - 1 < p:
        return {"w": None, "chi2": None, "df": None, "p": None, "epsilon_gg": greenhouse_geisser(x),
                "note": "fewer participants than conditions: Mauchly's test is undefined"}
    w = float(np.linalg.det(t) / (tr / p) ** p)
    if w <= 0:
        return {"w": 0.0, "chi2": None, "df": None, "p": None, "epsilon_gg": greenhouse_geisser(x),
                "note": "the contrast covariance is singular: Mauchly's test is undefined"}
    f = 1 - (2 * p * p + p + 2) / (6 * p * (n - 1))
    chi2 = -(n - 1) * f * math.log(w)
    df = p * (p + 1) / 2 - 1
    # second-order term of the chi^2 approximation (Anderson 2003, sec. 10.7); written with k in
    # one place, as R's mauchly.test and pingouin.sphericity do, so the p-values agree with them
    w2 = ((p + 2) * (p - 1) * (p - 2) * (2 * p**3 + 6 * p**2 + 3 * k + 2)
          / (288 * ((n - 1) * p * f) ** 2))
    p1, p2 = stats.chi2.sf(chi2, df), stats.chi2.sf(chi2, df + 4)
    pval = float(p1 + w2 * (p2 - p1))
    out = {"w": w, "chi2": chi2, "df": df, "p": min(1.0, max(0.0, pval)),
           "epsilon_gg": greenhouse_geisser(x)}
    if not 0.0 <= pval <= 1.0:
        out["note"] = (f"the second-order chi-squared approximation gave p = {pval:.4g}, outside"
                       " [0, 1], with so few participants for the conditions; clipped")
    return out


# ------------------------------------------------------------------ pairwise follow-ups


def dunn_z(groups, i: int, j: int) -> tuple[float, float]:
    """Dunn's (1964) z for groups i and j from the pooled mid-ranks:
    z = (Rbar_i - Rbar_j) / sqrt((N(N+1)/12 - sum(t^3 - t) / (12 (N - 1))) (1/n_i + 1/n_j));
    returns (z, two-sided p), both NaN (undefined) when every value is tied. The tie sum is
    taken in floating point (no int64 products)."""
    pooled = np.concatenate(groups)
    ranks = midranks(pooled)
    n = pooled.size
    bounds = np.cumsum([0] + [len(g) for g in groups])
    mean_rank = [float(np.mean(ranks[bounds[g]:bounds[g + 1]])) for g in range(len(groups))]
    _, counts = np.unique(pooled, return_counts=True)
    tie = float(np.sum(counts.astype(float) ** 3 - counts))
    spread = n * (n + 1) / 12.0 - tie / (12.0 * (n - 1))
    # the smallest spread of data not all tied is n / 4 (one value apart); below n / 8 it is
    # rounding error of the tie sum and every value is tied
    if not spread > n / 8.0:
        return math.nan, math.nan
    var = spread * (1 / len(groups[i]) + 1 / len(groups[j]))
    z = (mean_rank[i] - mean_rank[j]) / math.sqrt(var)
    return z, float(2 * stats.norm.sf(abs(z)))
