"""Screening diagnostics: descriptives, normality, spread, ties and outliers.

Each function takes plain arrays and returns a frozen result. Where a test is undefined for the
data (too few values, zero spread) its fields are None and a note says why; no warning escapes
from scipy.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from scipy import special, stats

from auditor import anderson_darling
from auditor.moments import sample_sd
from auditor.results import (GroupSummary, KDiagnostics, KSpread, NormalTheoryCheck, Normality,
                             Outliers, PairedDiagnostics, Spread, Ties)

SHAPIRO_MAX_N = 5000
DAGOSTINO_MIN_N = 20
DISCRETE_MAX_DISTINCT = 10  # common practice: ten or fewer distinct values reads as a rating scale
MODIFIED_Z_CUTOFF = 3.5  # Iglewicz & Hoaglin (1993), p. 11


def _quiet(fn, *args, **kwargs):
    """Call a scipy routine with its warnings and floating-point chatter silenced."""
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        return fn(*args, **kwargs)


def _finite(x: float) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _floored(p: float | None, test: str, notes: list[str]) -> float | None:
    """A test's p that scipy returned as exactly 0 (the tail underflowed: D'Agostino-Pearson's
    chi-square tail exp(-K2/2) does from K2 of about 1,490) is reported at the Anderson-Darling
    floor, 1e-300, with a note: 0 would claim an impossible certainty."""
    if p == 0.0:
        notes.append(f"{test} p is below {anderson_darling.P_FLOOR:g}; the bound is reported")
        return anderson_darling.P_FLOOR
    return p


def describe(label: str, x: np.ndarray, missing: int = 0) -> GroupSummary:
    """n, mean, SD (n - 1 denominator), median, quartiles (linear interpolation, type 7), range."""
    q1, med, q3 = np.percentile(x, [25, 50, 75])
    return GroupSummary(
        label=label, n=int(x.size), missing=int(missing), mean=float(np.mean(x)),
        sd=float(sample_sd(x)) if x.size > 1 else math.nan,
        median=float(med), q1=float(q1), q3=float(q3), min=float(np.min(x)), max=float(np.max(x)),
    )


def skewness_se(n: int) -> float:
    """Standard error of G1: sqrt(6n(n-1) / ((n-2)(n+1)(n+3))) (Joanes & Gill 1998, eq. for SE(G1))."""
    if n < 3:
        return math.nan
    return math.sqrt(6.0 * n * (n - 1) / ((n - 2) * (n + 1) * (n + 3)))


def kurtosis_se(n: int) -> float:
    """Standard error of G2: 2 SE(G1) sqrt((n^2 - 1) / ((n - 3)(n + 5))) (Joanes & Gill 1998)."""
    if n < 4:
        return math.nan
    return 2.0 * skewness_se(n) * math.sqrt((n * n - 1.0) / ((n - 3) * (n + 5)))


BRIEF_NOTE = "not computed in a screen (the policy's checks do not read it)"


def shape_statistics(x: np.ndarray) -> tuple[float | None, float | None]:
    """(G1, G2) of a one-dimensional sample of n >= 3 values (G2 None below n = 4; either None
    when not finite): the bias-corrected skewness and excess kurtosis (Joanes & Gill 1998),
        G1 = sqrt(n (n - 1)) / (n - 2) m3 / m2^(3/2),
        G2 = [(n^2 - 1) m4 / m2^2 - 3 (n - 1)^2] / ((n - 2)(n - 3)),
    m_k the central moments about the mean (divisor n). Undefined (None) when m2 <= (eps mean)^2,
    a spread lost to rounding. The operations are those of scipy.stats.skew and
    scipy.stats.kurtosis with bias=False, in the same order, so the values are the same; this
    spares their array-API and NaN-policy wrappers, which cost more than the arithmetic."""
    n = x.size
    with np.errstate(all="ignore"):
        mean = np.mean(x, keepdims=True)
        centred = x - mean
        squares = centred**2
        m2 = np.mean(squares)
        m3 = np.mean(squares * centred)
        m4 = np.mean(squares**2)
        if m2 <= (np.finfo(np.float64).eps * mean[0])**2:
            return None, None
        g1 = ((n - 1.0) * n)**0.5 / (n - 2.0) * m3 / m2**1.5
        g2 = None
        if n > 3:
            g2 = (1.0 / (n - 2) / (n - 3) * ((n**2 - 1.0) * m4 / m2**2.0 - 3 * (n - 1)**2.0)
                  + 3.0) - 3
    return _finite(g1), None if g2 is None else _finite(g2)


def normality(label: str, x: np.ndarray, brief: bool = False) -> Normality:
    """Shapiro-Wilk (3 <= n <= 5000), D'Agostino-Pearson K2 (n >= 20), Anderson-Darling, G1, G2.

    G1 and G2 are the bias-corrected sample skewness and excess kurtosis (Joanes & Gill 1998,
    'G' estimators; scipy.stats.skew/kurtosis with bias=False). `brief` (a screen) leaves out
    K2 and Anderson-Darling, which the policy's checks do not read.
    """
    n = int(x.size)
    notes: list[str] = []
    constant = n > 0 and bool(np.all(x == x[0]))
    sw_w = sw_p = k2 = k2_p = a2 = a2_p = a2_method = g1 = g2 = None
    if constant:
        notes.append("all values are equal: normality tests and shape statistics are undefined")
    else:
        if 3 <= n <= SHAPIRO_MAX_N:
            res = _quiet(stats.shapiro, x)
            sw_w = _finite(res.statistic)
            sw_p = _floored(_finite(res.pvalue), "Shapiro-Wilk", notes)
        elif n > SHAPIRO_MAX_N:
            notes.append(f"Shapiro-Wilk is not run above n = {SHAPIRO_MAX_N}; rely on the"
                         " other tests and on skewness and kurtosis")
        else:
            notes.append("Shapiro-Wilk needs at least 3 values")
        # Skewness, kurtosis and K2 are scale-free; scipy forms third and fourth powers of the
        # data, which under- or overflow near 1e-150 or 1e+150, so they are computed on the
        # data centred on the median and scaled by the largest distance from it.
        with np.errstate(all="ignore"):
            centre = float(np.median(x))
            reach = float(np.max(np.abs(x - centre)))
        shape_x = (x - centre) / reach if 0 < reach < math.inf else x
        if brief:
            notes.append(f"D'Agostino-Pearson and Anderson-Darling: {BRIEF_NOTE}")
        elif n >= DAGOSTINO_MIN_N:
            res = _quiet(stats.normaltest, shape_x)
            k2 = _finite(res.statistic)
            k2_p = _floored(_finite(res.pvalue), "D'Agostino-Pearson", notes)
        else:
            notes.append(f"D'Agostino-Pearson needs at least {DAGOSTINO_MIN_N} values")
        if n >= 3 and not brief:
            ad = anderson_darling.test(x)
            a2, a2_p, a2_method = ad.statistic, ad.p_value, ad.method
            if ad.p_is_bound:
                notes.append(f"Anderson-Darling p is below {anderson_darling.P_FLOOR:g}"
                             f" (A2* = {ad.modified:.4g}); the bound is reported")
        if n >= 3:
            g1, g2 = shape_statistics(shape_x)
    return Normality(
        label=label, n=n, shapiro_w=sw_w, shapiro_p=sw_p, dagostino_k2=k2, dagostino_p=k2_p,
        anderson_a2=a2, anderson_p=a2_p, anderson_p_method=a2_method, skewness=g1, skewness_se=_finite(skewness_se(n)),
        excess_kurtosis=g2, kurtosis_se=_finite(kurtosis_se(n)), notes=tuple(notes),
    )


def _ratio(x: float, y: float) -> float | None:
    big, small = max(x, y), min(x, y)
    if small <= 0:
        return None
    return big / small


def equal_spread_tests(*groups: np.ndarray):
    """(statistic, p) of Levene's test centred on means, the Brown-Forsythe variant centred on
    medians, and Fligner-Killeen, across all groups (scipy.stats.levene and scipy.stats.fligner)."""
    out = []
    for fn, kwargs in ((stats.levene, {"center": "mean"}), (stats.levene, {"center": "median"}),
                       (stats.fligner, {})):
        res = _quiet(fn, *groups, **kwargs)
        out.append((_finite(res.statistic), _finite(res.pvalue)))
    return tuple(out)


def _spread_tests(groups, smallest_sd: float, brief: bool, notes: list[str]):
    """`equal_spread_tests`, or three undefined results with the note saying why: a group with
    zero spread, or a screen (`brief`), whose checks do not read them."""
    if smallest_sd == 0:
        notes.append("a group has zero spread: tests of equal spread are undefined")
        return ((None, None),) * 3
    if brief:
        notes.append(f"tests of equal spread: {BRIEF_NOTE}")
        return ((None, None),) * 3
    return equal_spread_tests(*groups)


def median_abs_deviation(x: np.ndarray) -> float:
    """median(|x - median(x)|), unscaled: scipy.stats.median_abs_deviation's defaults, by the
    same two medians, without its wrappers."""
    return float(np.median(np.abs(x - np.median(x))))


def spread(labels: tuple[str, str], a: np.ndarray, b: np.ndarray, brief: bool = False) -> Spread:
    """Compare the spread of two groups.

    SD ratio (larger over smaller), IQR and MAD ratios (robust), Levene's test centred on means,
    the Brown-Forsythe variant centred on medians, and Fligner-Killeen (scipy.stats.levene and
    scipy.stats.fligner). Ratios are None when the smaller spread is zero. `brief` (a screen)
    leaves out the three tests, which the policy's checks do not read.
    """
    notes: list[str] = []
    sd = (float(sample_sd(a)), float(sample_sd(b)))
    iqr = (float(stats.iqr(a)), float(stats.iqr(b)))
    mad = (median_abs_deviation(a), median_abs_deviation(b))
    lev, bf, fl = _spread_tests((a, b), min(sd), brief, notes)
    larger = 0 if sd[0] >= sd[1] else 1
    return Spread(
        sd_ratio=_ratio(*sd), larger_sd_group=labels[larger], iqr_ratio=_ratio(*iqr),
        mad_ratio=_ratio(*mad), levene_w=lev[0], levene_p=lev[1], brown_forsythe_w=bf[0],
        brown_forsythe_p=bf[1], fligner_x2=fl[0], fligner_p=fl[1],
        n_ratio=max(a.size, b.size) / min(a.size, b.size),
        smaller_group_has_larger_sd=bool(a.size != b.size and sd[0] != sd[1]
                                         and (a.size < b.size) == (sd[0] > sd[1])),
        notes=tuple(notes),
    )


def ties(label: str, x: np.ndarray) -> Ties:
    """Ties in x: share of values that equal another, distinct values, largest block, and the
    tie correction factor 1 - sum(t^3 - t) / (N^3 - N) used by rank tests (scipy.stats.tiecorrect).
    """
    _, counts = np.unique(x, return_counts=True)
    n = int(x.size)
    tied = int(counts[counts > 1].sum())
    t = counts.astype(float)
    correction = 1.0 - float(np.sum(t**3 - t)) / (float(n) ** 3 - n) if n > 1 else 1.0
    # The smallest correction of data not all tied is 3 / (n + 1) (one value apart from n - 1
    # equal ones); below 1.5 / (n + 1) it is rounding error of the float sum: every value tied.
    if n > 1 and correction < 1.5 / (n + 1):
        correction = 0.0
    return Ties(
        label=label, n=n, tie_fraction=tied / n if n else 0.0, distinct_values=int(counts.size),
        largest_tie_block=int(counts.max()) if n else 0, tie_correction=correction,
        looks_discrete=bool(counts.size <= DISCRETE_MAX_DISTINCT),
    )


def outliers(label: str, x: np.ndarray, rows: np.ndarray, floor: float, ceiling: float) -> Outliers:
    """Cases beyond Tukey's fences (Q1 - k IQR, Q3 + k IQR for k = 1.5 and 3; quartiles by linear
    interpolation) and with |modified z| > 3.5, M = 0.6745 (x - median) / MAD (Iglewicz & Hoaglin
    1993). Cases are named by file line. Floor and ceiling shares are the shares of this group at
    the pooled minimum and maximum.
    """
    q1, q3 = np.percentile(x, [25, 75])
    iqr = q3 - q1
    lo15, hi15 = q1 - 1.5 * iqr, q3 + 1.5 * iqr
    lo3, hi3 = q1 - 3 * iqr, q3 + 3 * iqr
    beyond15 = (x < lo15) | (x > hi15)
    beyond3 = (x < lo3) | (x > hi3)
    med = np.median(x)
    mad = np.median(np.abs(x - med))
    if mad > 0:
        mz = np.abs(0.6745 * (x - med) / mad) > MODIFIED_Z_CUTOFF
    else:
        mz = np.zeros(x.size, dtype=bool)
    any_flag = beyond15 | mz

    def lines(mask):
        return tuple(int(r) for r in np.sort(rows[mask]))

    return Outliers(
        label=label, rows=lines(any_flag), beyond_1_5_iqr_rows=lines(beyond15),
        beyond_3_iqr_rows=lines(beyond3), modified_z_rows=lines(mz), lower_fence=float(lo15),
        upper_fence=float(hi15), floor_share=float(np.mean(x == floor)),
        ceiling_share=float(np.mean(x == ceiling)),
    )


def normal_theory_check(d: float | None, observed_a: float | None) -> NormalTheoryCheck:
    """Compare the overlap the normal model implies with the overlap observed.

    Under normality with equal variances, P(X_A > X_B) = Phi(d / sqrt(2)) (McGraw & Wong 1992,
    common-language effect size); conversely d = sqrt(2) Phi^-1(A). A large gap says d misreads
    the overlap of these data.
    """
    implied = None if d is None else float(special.ndtr(d / math.sqrt(2.0)))
    back = None
    if observed_a is not None and 0.0 < observed_a < 1.0:
        back = float(math.sqrt(2.0) * special.ndtri(observed_a))
    gap = None if implied is None or observed_a is None else observed_a - implied
    return NormalTheoryCheck(d, implied, observed_a, gap, back)


def paired_screen(labels: tuple[str, str], a: np.ndarray, b: np.ndarray, d: np.ndarray,
                  rows: np.ndarray, digits: int, sign: dict,
                  brief: bool = False) -> PairedDiagnostics:
    """Screening of paired data: normality, ties and outliers of the differences d = a - b (the
    quantities the paired t interval and the signed-rank methods assume things about), the share
    of zero differences, the Pearson correlation of the two conditions (scipy.stats.pearsonr),
    and each condition's own normality for reference."""
    corr = corr_p = None
    if np.ptp(a) > 0 and np.ptp(b) > 0:
        res = _quiet(stats.pearsonr, a, b)
        corr, corr_p = _finite(res.statistic), _finite(res.pvalue)
    return PairedDiagnostics(
        differences_normality=normality("differences", d, brief),
        conditions_normality=tuple(normality(lab, x, brief) for lab, x in zip(labels, (a, b))),
        differences_ties=ties("differences", d),
        differences_outliers=outliers("differences", d, rows, float(d.min()), float(d.max())),
        zero_share=float(np.mean(d == 0)), correlation=corr, correlation_p=corr_p,
        rounding_decimals=int(digits), sign_test=sign,
    )


def k_spread(labels: tuple[str, ...], groups: tuple[np.ndarray, ...],
             brief: bool = False) -> KSpread:
    """Spread across k groups: largest over smallest SD, Levene (mean-centred), Brown-Forsythe
    (median-centred) and Fligner-Killeen across all groups (scipy.stats), and the n ratio.
    `brief` (a screen) leaves out the three tests, which the policy's checks do not read."""
    sds = [float(sample_sd(g)) for g in groups]
    hi, lo = int(np.argmax(sds)), int(np.argmin(sds))
    notes: list[str] = []
    lev, bf, fl = _spread_tests(groups, sds[lo], brief, notes)
    sizes = [g.size for g in groups]
    return KSpread(
        sd_ratio=sds[hi] / sds[lo] if sds[lo] > 0 else None, largest_sd_group=labels[hi],
        smallest_sd_group=labels[lo], levene_w=lev[0], levene_p=lev[1], brown_forsythe_w=bf[0],
        brown_forsythe_p=bf[1], fligner_x2=fl[0], fligner_p=fl[1],
        n_ratio=max(sizes) / min(sizes), notes=tuple(notes),
    )


def k_screen(labels: tuple[str, ...], groups: tuple[np.ndarray, ...],
             rows: tuple[np.ndarray, ...], sphericity: dict | None = None,
             brief: bool = False) -> KDiagnostics:
    """Screening of k groups or conditions: each one's normality and outliers, spread across
    all, pooled ties, and (repeated conditions) Mauchly's sphericity test. `brief`: see
    `normality` and `k_spread`."""
    pooled = np.concatenate(groups)
    floor, ceiling = float(pooled.min()), float(pooled.max())
    return KDiagnostics(
        normality=tuple(normality(lab, g, brief) for lab, g in zip(labels, groups)),
        spread=k_spread(labels, groups, brief),
        ties=ties("pooled", pooled),
        outliers=tuple(outliers(lab, g, r, floor, ceiling)
                       for lab, g, r in zip(labels, groups, rows)),
        sphericity=sphericity,
    )
