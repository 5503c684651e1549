"""The mean-difference family: raw and standardized mean differences with analytic intervals.

Every index is A relative to B: positive when group A has the larger mean. Swapping A and B
negates each estimate and mirrors its interval:

>>> import numpy as np
>>> a, b = np.array([5., 6, 7, 9]), np.array([3., 4, 4, 6])
>>> round(cohen_d(a, b, 0.95).estimate, 4), round(cohen_d(b, a, 0.95).estimate, 4)
(1.5811, -1.5811)

Each function returns an `Estimate`; the `*_values` functions compute the same point estimates
along the last axis of stacked samples (used by the bootstrap and the jackknife).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from scipy import integrate, optimize, special, stats

from auditor.moments import mean_var, sample_sd
from auditor.results import Interval

ROBUST_TRIM = 0.2
ROBUST_SCALE = 0.642  # Algina, Keselman & Penfield (2005): makes robust d equal d under normality


@dataclass(frozen=True)
class Estimate:
    """A point estimate, its analytic interval (or None), and why it is undefined (or None).

    `more` holds further intervals reported beside the index's own: those that agree with a test
    by construction (`agreement.MATCHED`) and those valid where the bootstrap is not (complete
    separation, differences of one sign). When the index has neither an analytic nor a bootstrap
    interval, the first of them is its interval (`pipeline.estimate_all`)."""

    value: float | None
    interval: Interval | None
    reason: str | None = None
    notes: tuple[str, ...] = ()
    details: dict = field(default_factory=dict)  # named numbers reported beside the estimate
    more: tuple[Interval, ...] = ()

    @property
    def estimate(self) -> float | None:
        return self.value


def _undefined(reason: str) -> Estimate:
    return Estimate(None, None, reason)


# ------------------------------------------------------------------ vectorised point estimates


def mean_difference_values(a, b):
    """mean(A) - mean(B) along the last axis, both taken about a common data value so that the
    difference of two large, close means keeps its precision."""
    origin = a[..., :1]
    return np.mean(a - origin, axis=-1) - np.mean(b - origin, axis=-1)


def pooled_sd_values(a, b):
    """sqrt(((n_A - 1) s_A^2 + (n_B - 1) s_B^2) / (n_A + n_B - 2))."""
    _, va, na = mean_var(a)
    _, vb, nb = mean_var(b)
    return np.sqrt(((na - 1) * va + (nb - 1) * vb) / (na + nb - 2))


def cohen_d_values(a, b):
    """d = (mean_A - mean_B) / s_pooled (Cohen 1988, eq. 2.5.1 with the pooled SD)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return mean_difference_values(a, b) / pooled_sd_values(a, b)


HEDGES_SERIES_FROM = 15.0  # J is taken from the Stirling series at m = df/2 >= 15
_STIRLING = (1 / 12, -1 / 360, 1 / 1260, -1 / 1680, 1 / 1188, -691 / 360360)  # B_2k / (2k(2k-1))


def _stirling_tail(z: float) -> float:
    """S(z) = ln Gamma(z) - [(z - 1/2) ln z - z + ln(2 pi)/2] by its asymptotic series
    sum_k B_2k / (2k (2k - 1) z^(2k - 1)), k = 1..6 (Abramowitz & Stegun 1964, 6.1.40). The
    first omitted term, B_14 / (182 z^13), is below 1e-17 for z >= 14.5."""
    inv = 1.0 / z
    inv2, power, total = inv * inv, inv, 0.0
    for c in _STIRLING:
        total += c * power
        power *= inv2
    return total


def hedges_correction(df: float) -> float:
    """Exact small-sample factor J(df) = Gamma(df/2) / (sqrt(df/2) Gamma((df - 1)/2))
    (Hedges 1981, eq. 6c; Hedges & Olkin 1985, p. 80), 0 < J < 1, increasing to 1 with df.

    Range: defined for df > 1 (Gamma((df - 1)/2) has its pole at df = 1, where J falls to 0);
    NaN for df <= 1 or NaN (the caller's d is undefined there anyway: a group of one value has
    no variance), 1 for df = inf.

    Numerics. The plain log-gamma form exp(ln G(m) - ln G(m - 1/2) - ln(m)/2), m = df/2,
    subtracts two numbers of size m ln m and loses about m ln m * 1e-16 relatively (7e-15 at
    df = 29, 1e-9 at df = 2e6, measured against exact rational values), so it is not used. With
    m >= 15 the Stirling expansions of both log-gammas are subtracted with their large parts
    cancelled analytically,
        ln J = -(m - 1) log1p(-1/(2m)) - 1/2 + S(m) - S(m - 1/2)      (S: `_stirling_tail`);
    below, J is carried down from M = m + k >= 15 by Gamma(x + 1) = x Gamma(x):
        J(2m) = J(2M) sqrt(M / m) prod_{j=0}^{k-1} (m + j - 1/2) / (m + j).
    The relative error is within 1e-15 of exact rational values for every df tried (2..40 and up
    to 100001, tests/test_numeric_ranges.py; the reference's own rounding included).
    """
    df = float(df)
    if not df > 1.0:
        return math.nan
    if math.isinf(df):
        return 1.0
    m = df / 2.0
    k = max(0, math.ceil(HEDGES_SERIES_FROM - m))
    top = m + k
    j = math.exp(-(top - 1.0) * math.log1p(-0.5 / top) - 0.5
                 + (_stirling_tail(top) - _stirling_tail(top - 0.5)))
    if k:
        factor = 1.0
        for i in range(k):
            factor *= (m + i - 0.5) / (m + i)
        j *= math.sqrt(top / m) * factor
    return j


def hedges_g_values(a, b):
    """g = J(n_A + n_B - 2) d."""
    df = a.shape[-1] + b.shape[-1] - 2
    return hedges_correction(df) * cohen_d_values(a, b)


def glass_delta_values(a, b, reference: int = 1):
    """Glass's delta: (mean_A - mean_B) / s_ref, with s_ref the SD of the reference group
    (B when reference = 1, A when reference = 0) (Glass, McGaw & Smith 1981)."""
    ref = b if reference == 1 else a
    with np.errstate(divide="ignore", invalid="ignore"):
        return mean_difference_values(a, b) / sample_sd(ref)


def d_unpooled_values(a, b):
    """(mean_A - mean_B) / sqrt((s_A^2 + s_B^2) / 2): the SD is the root of the average variance,
    which does not assume equal variances (Bonett 2008)."""
    _, va, _ = mean_var(a)
    _, vb, _ = mean_var(b)
    with np.errstate(divide="ignore", invalid="ignore"):
        return mean_difference_values(a, b) / np.sqrt((va + vb) / 2)


def trim_count(n: int, proportion: float = ROBUST_TRIM) -> int:
    return int(math.floor(proportion * n))


def trimmed_mean_values(x, proportion: float = ROBUST_TRIM):
    """Mean after removing g = floor(proportion n) values from each end (scipy.stats.trim_mean)."""
    n = x.shape[-1]
    g = trim_count(n, proportion)
    s = np.sort(x, axis=-1)
    return np.mean(s[..., g:n - g], axis=-1)


def winsorized_variance_values(x, proportion: float = ROBUST_TRIM):
    """Variance (n - 1 denominator) after replacing the g lowest values by the (g+1)-th and the
    g highest by the (n-g)-th, g = floor(proportion n) (Wilcox 2012, sec. 3.2)."""
    n = x.shape[-1]
    g = trim_count(n, proportion)
    s = np.sort(x, axis=-1)
    if g > 0:
        s = s.copy()
        s[..., :g] = s[..., g:g + 1]
        s[..., n - g:] = s[..., n - g - 1:n - g]
    return mean_var(s)[1]


def robust_d_values(a, b):
    """Algina, Keselman & Penfield (2005) robust d:
    0.642 (trimmed mean_A - trimmed mean_B) / s_W, with 20% trimming and
    s_W^2 = ((n_A - 1) s_WA^2 + (n_B - 1) s_WB^2) / (n_A + n_B - 2) the pooled winsorized variance."""
    na, nb = a.shape[-1], b.shape[-1]
    sw2 = ((na - 1) * winsorized_variance_values(a) + (nb - 1) * winsorized_variance_values(b)) / (
        na + nb - 2)
    origin = a[..., :1]
    with np.errstate(divide="ignore", invalid="ignore"):
        return ROBUST_SCALE * (trimmed_mean_values(a - origin) - trimmed_mean_values(b - origin)
                               ) / np.sqrt(sw2)


# ------------------------------------------------------------------ estimates with intervals


def welch_df(va: float, na: int, vb: float, nb: int) -> float:
    """Welch-Satterthwaite degrees of freedom
    nu = (w_A + w_B)^2 / (w_A^2 / (n_A - 1) + w_B^2 / (n_B - 1)), w = s^2 / n
    (Welch 1947; Satterthwaite 1946).

    Range: min(n_A, n_B) - 1 <= nu <= n_A + n_B - 2; with one variance zero nu is the other
    group's n - 1 (the limit of the formula). The weights are divided by the larger one first, so
    squares of very small or very large variances (data near 1e-140 or 1e+140) neither underflow
    to 0/0 nor overflow (variances themselves underflow below data of about 1e-154: a gap). NaN
    when both variances are zero (no standard error) or a group has fewer than two values.
    """
    return satterthwaite_df(va / na, na, vb / nb, nb)


def satterthwaite_df(wa: float, na: int, wb: float, nb: int) -> float:
    """(w_A + w_B)^2 / (w_A^2 / (n_A - 1) + w_B^2 / (n_B - 1)) for variance parts w_A, w_B,
    with the parts divided by the larger first (no underflow or overflow of the squares). NaN
    when both parts are zero or not finite, or a group has fewer than two values. Shared by
    Welch's df and the Brunner-Munzel df."""
    top = max(wa, wb) if na > 1 and nb > 1 else math.nan
    if not (top > 0 and math.isfinite(top)):
        return math.nan
    ra, rb = wa / top, wb / top
    return (ra + rb) ** 2 / (ra * ra / (na - 1) + rb * rb / (nb - 1))


def mean_difference(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """mean_A - mean_B with the Welch interval: diff +- t(level; nu) sqrt(s_A^2/n_A + s_B^2/n_B),
    nu by Welch-Satterthwaite (`welch_df`). Assumes independent observations; not equal
    variances. No interval when both groups are constant, or when the variances overflow double
    precision (|values| beyond about 1e154)."""
    ma, va, na = mean_var(a)
    mb, vb, nb = mean_var(b)
    diff = float(ma - mb)
    va, vb = float(va), float(vb)
    se2 = va / na + vb / nb
    if se2 == 0:
        return Estimate(diff, None, None, ("both groups are constant: no interval",))
    nu = welch_df(va, na, vb, nb)
    if not (math.isfinite(se2) and math.isfinite(nu)):
        return Estimate(diff, None, None, ("the variances overflow double precision: no"
                                           " interval",))
    h = special.stdtrit(nu, 0.5 + level / 2) * math.sqrt(se2)
    return Estimate(diff, Interval("welch_t", diff - h, diff + h, level), None, (), {},
                    _student_interval(diff, va, na, vb, nb, level))


def _student_interval(diff: float, va: float, na: int, vb: float, nb: int,
                      level: float) -> tuple[Interval, ...]:
    """The pooled-variance (Student) interval diff +- t(level; n_A + n_B - 2) s_p
    sqrt(1/n_A + 1/n_B), the one that agrees with Student's t test; assumes equal variances."""
    df = na + nb - 2
    sp2 = ((na - 1) * va + (nb - 1) * vb) / df
    se = math.sqrt(sp2 * (1.0 / na + 1.0 / nb))
    if not (se > 0 and math.isfinite(se)):
        return ()
    h = special.stdtrit(df, 0.5 + level / 2) * se
    return (Interval("student_t", diff - h, diff + h, level,
                     "pooled variance: agrees with Student's t test; assumes equal variances"),)


NCT_LIBRARY_MAX_T = 2000.0  # |t| up to which scipy's noncentral-t distribution function is used
_Z_REACH = 9.0  # the standard normal mass beyond +-9 is below 1e-18
_CHI_QUANTILES = (1e-15, 1e-9, 1e-5, 1e-3, 0.02, 0.1, 0.3, 0.5, 0.7, 0.9, 0.98, 1 - 1e-3, 1 - 1e-5,
                  1 - 1e-9, 1 - 1e-15)


def _nct_cdf_by_quadrature(t: float, df: float, ncp: float) -> float:
    """P(T <= t) for T = (Z + ncp) / sqrt(V / df), Z standard normal, V chi-squared on df, by
    numerical integration over Z:

        P(T <= t) = Phi(-ncp) + int_{-ncp}^{inf} phi(z) Q_df(df (z + ncp)^2 / t^2) dz   (t > 0),

    Q_df the chi-squared upper tail (conditioning on Z; e.g. Johnson, Kotz & Balakrishnan 1995,
    ch. 31), and P(T <= t | ncp) = 1 - P(T <= -t | -ncp) for t < 0. The integrand falls from
    phi(z) to 0 where Q_df does, so the integration is split at the z matching fifteen chi-squared
    quantiles (from 1e-15 to 1 - 1e-15); the interval is cut at |z| = 9. NaN when the integration
    reports an error above 1e-11.
    """
    if t < 0:
        return 1.0 - _nct_cdf_by_quadrature(-t, df, -ncp)
    head = float(special.ndtr(-ncp))
    low = max(-ncp, -_Z_REACH)
    if t == 0 or low >= _Z_REACH:
        return head

    def integrand(z):
        u = (z + ncp) / t
        return math.exp(-0.5 * z * z) * float(special.chdtrc(df, df * u * u))

    cuts = sorted({t * math.sqrt(float(special.chdtri(df, 1.0 - q)) / df) - ncp
                   for q in _CHI_QUANTILES})
    cuts = [c for c in cuts if low < c < _Z_REACH and math.isfinite(c)]
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")  # quadpack's accuracy notes: its error estimate is read
        value, error = integrate.quad(integrand, low, _Z_REACH, points=cuts or None, limit=400,
                                      epsabs=1e-15, epsrel=1e-13)
    if not error < 1e-11:
        return math.nan
    return min(1.0, max(0.0, head + value / math.sqrt(2.0 * math.pi)))


def noncentral_t_cdf(t: float, df: float, ncp: float) -> float:
    """P(T <= t) for T noncentral t with `df` degrees of freedom and noncentrality `ncp`.

    Range: scipy.special.nctdtr for |t| <= 2000 (NCT_LIBRARY_MAX_T), the numerical integration of
    `_nct_cdf_by_quadrature` above that, and wherever nctdtr is not finite. scipy 1.17's nctdtr
    returns NaN once |ncp| exceeds about 1.01e5 and drifts by up to 1e-6 from the integral for
    |t| >= 1e4 (measured against the integral written two ways, over z and over the chi-squared
    variable, which agree with each other to 1e-14; below |t| = 2000 nctdtr is within 1e-11 of
    them for df <= 1e5, within 1e-8 up to df = 1e12). NaN when both fail.
    """
    if abs(t) <= NCT_LIBRARY_MAX_T:
        with np.errstate(all="ignore"):
            value = float(special.nctdtr(df, ncp, t))
        if math.isfinite(value):
            return value
    return _nct_cdf_by_quadrature(t, df, ncp)


def noncentral_t_limits(t_obs: float, df: float, level: float) -> tuple[float, float] | None:
    """Noncentrality parameters (lo, hi) with P(T <= t_obs | lo) = (1 + level)/2 and
    P(T <= t_obs | hi) = (1 - level)/2 for T noncentral t with `df` degrees of freedom
    (Steiger & Fouladi 1997, confidence-interval inversion), the distribution function from
    `noncentral_t_cdf`.

    Each root is bracketed by stepping outward from t_obs in half-SE steps (SE of t under the
    normal approximation, sqrt(1 + t^2 / (2 df))), so the distribution function is only evaluated
    near the root. Range: any finite t_obs and df >= 1 (tested up to |t| = 1e6 and df = 1e12).
    None when t_obs or df is outside that range, no bracket is found within 40 SE or the
    distribution function fails numerically; the caller then says which approximation it uses.
    """
    if not (math.isfinite(t_obs) and math.isfinite(df) and df >= 1.0 and 0.0 < level < 1.0):
        return None
    step = 0.5 * math.sqrt(1.0 + t_obs * t_obs / (2.0 * df))
    limits = []
    for target, direction in ((0.5 + level / 2, -1.0), (0.5 - level / 2, 1.0)):
        f = lambda ncp, tgt=target: noncentral_t_cdf(t_obs, df, ncp) - tgt  # noqa: E731
        prev, f_prev = t_obs, f(t_obs)
        bracket = None
        for i in range(1, 81):
            x = t_obs + direction * step * i
            fx = f(x)
            if not (math.isfinite(f_prev) and math.isfinite(fx)):
                return None
            if f_prev * fx <= 0:
                bracket = (min(prev, x), max(prev, x))
                break
            prev, f_prev = x, fx
        if bracket is None:
            return None
        try:
            root = optimize.brentq(f, *bracket, xtol=1e-12, rtol=1e-12, maxiter=200)
        except (ValueError, RuntimeError):
            return None
        limits.append(root)
    return limits[0], limits[1]


def noncentral_t_note(t_obs: float) -> str | None:
    """The interval's note when `noncentral_t_limits` integrated the distribution numerically."""
    if abs(t_obs) > NCT_LIBRARY_MAX_T:
        return (f"|t| = {abs(t_obs):.4g} > {NCT_LIBRARY_MAX_T:g}: noncentral-t distribution"
                " function by numerical integration")
    return None


def _d_normal_se(d: float, na: int, nb: int) -> float:
    """Large-sample SE of d: sqrt((n_A + n_B)/(n_A n_B) + d^2 / (2 (n_A + n_B)))
    (Hedges & Olkin 1985, ch. 5: the usual large-sample approximation)."""
    return math.sqrt((na + nb) / (na * nb) + d * d / (2.0 * (na + nb)))


def cohen_d(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """Cohen's d with the pooled SD and a noncentral-t interval.

    t = d sqrt(n_A n_B / (n_A + n_B)) is noncentral t with df = n_A + n_B - 2 and noncentrality
    delta sqrt(n_A n_B / (n_A + n_B)); inverting it gives exact limits for delta under normality
    with equal variances (Steiger & Fouladi 1997; Cumming & Finch 2001). If the inversion fails
    numerically the normal approximation is used and the note says so.
    """
    na, nb = a.size, b.size
    d = float(cohen_d_values(a, b))
    if not math.isfinite(d):
        return _undefined("both groups are constant: the pooled SD is zero")
    scale = math.sqrt(na * nb / (na + nb))
    limits = noncentral_t_limits(d * scale, na + nb - 2, level)
    if limits is not None:
        return Estimate(d, Interval("noncentral_t", limits[0] / scale, limits[1] / scale, level,
                                    noncentral_t_note(d * scale)))
    z = special.ndtri(0.5 + level / 2)
    se = _d_normal_se(d, na, nb)
    return Estimate(d, Interval("normal_approximation", d - z * se, d + z * se, level,
                                "noncentral-t inversion failed numerically; normal approximation"))


DECISIVE = 1e-6  # relative distance of |t| from the critical value that settles containment


def noncentral_t_holds_zero(a: np.ndarray, b: np.ndarray, level: float,
                            method: str) -> bool | None:
    """Whether the noncentral-t interval of d (and of g = J d, a positive multiple) on these
    groups contains 0, without its ends: P(T <= t | ncp) falls as ncp grows and is the central t
    distribution at ncp = 0, so the lower limit is below 0 exactly when t < t_crit and the upper
    one above 0 exactly when t > -t_crit, t_crit the (1 + level)/2 quantile of Student's t with
    n_A + n_B - 2 df: the interval holds 0 exactly when Student's two-sided t test does not
    reject. Answered only where that is decisive, |t| at least DECISIVE (relatively) away from
    t_crit and within the range where the inversion uses scipy's distribution function
    (NCT_LIBRARY_MAX_T); otherwise, for another `method` or undefined d, None (the caller
    computes the interval)."""
    if method != "noncentral_t":
        return None
    na, nb = a.size, b.size
    with np.errstate(all="ignore"):
        d = float(cohen_d_values(a, b))
    df = na + nb - 2
    if not (math.isfinite(d) and df >= 1 and 0.0 < level < 1.0):
        return None
    t = abs(d * math.sqrt(na * nb / (na + nb)))
    critical = float(special.stdtrit(df, 0.5 + level / 2))
    if t > NCT_LIBRARY_MAX_T or abs(t - critical) <= DECISIVE * max(1.0, critical):
        return None
    return t < critical


def hedges_g(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """Hedges' g = J d with the exact J; its interval is d's noncentral-t interval scaled by J."""
    d = cohen_d(a, b, level)
    if d.value is None:
        return d
    j = hedges_correction(a.size + b.size - 2)
    iv = d.interval
    scaled = Interval(iv.method, iv.low * j, iv.high * j, level, iv.note)
    return Estimate(j * d.value, scaled, None, (f"exact small-sample factor J = {j:.6f}",))


def glass_delta(a: np.ndarray, b: np.ndarray, level: float, reference: int = 1) -> Estimate:
    """Glass's delta standardized by the reference group's SD, with the normal-approximation
    interval SE^2 = (s_other^2 / s_ref^2) / n_other + 1 / n_ref + delta^2 / (2 (n_ref - 1)):
    the mean difference's variance without assuming equal variances (Welch), over s_ref^2, plus
    the term for estimating s_ref (Hedges & Olkin 1985, p. 79, whose formula this is when the
    two variances are equal). The equal-variance form undercovers badly when the spreads differ
    (about 77% for a nominal 95% at an SD ratio of 2; docs/coverage.md)."""
    value = float(glass_delta_values(a, b, reference))
    if not math.isfinite(value):
        return _undefined("the reference group is constant: its SD is zero")
    ref, other = (b, a) if reference == 1 else (a, b)
    ratio = mean_var(other)[1] / mean_var(ref)[1]
    se = math.sqrt(ratio / other.size + 1.0 / ref.size + value**2 / (2.0 * (ref.size - 1)))
    z = special.ndtri(0.5 + level / 2)
    return Estimate(value, Interval("normal_approximation", value - z * se, value + z * se, level))


def d_unpooled(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """Bonett's (2008) d with the average of the two variances and his variance estimate
    var = d^2 (s_A^4/(n_A-1) + s_B^4/(n_B-1)) / (8 s^4) + (s_A^2/(n_A-1) + s_B^2/(n_B-1)) / s^2,
    s^2 = (s_A^2 + s_B^2)/2 (Bonett 2008, eq. 5, from memory; checked by simulation in the tests).
    Does not assume equal variances."""
    _, va, na = mean_var(a)
    _, vb, nb = mean_var(b)
    s2 = (va + vb) / 2
    value = float(d_unpooled_values(a, b))
    if not math.isfinite(value):
        return _undefined("both groups are constant: the average variance is zero")
    var = value**2 * (va**2 / (na - 1) + vb**2 / (nb - 1)) / (8 * s2**2) + (
        va / (na - 1) + vb / (nb - 1)) / s2
    z = special.ndtri(0.5 + level / 2)
    se = math.sqrt(var)
    welch = d_unpooled_welch_interval(a, b, level)
    return Estimate(value, Interval("bonett_normal", value - z * se, value + z * se, level),
                    None, (), {}, () if welch is None else (welch,))


def d_unpooled_welch_interval(a: np.ndarray, b: np.ndarray, level: float) -> Interval | None:
    """The interval of d with unpooled SDs that agrees with Welch's t test: Welch's
    t_W = diff / sqrt(s_A^2/n_A + s_B^2/n_B) is taken as noncentral t with Welch's df, its
    noncentrality limits (`noncentral_t_limits`) are carried to d by d = c t_W with
    c = sqrt(s_A^2/n_A + s_B^2/n_B) / sqrt((s_A^2 + s_B^2)/2), c held at its observed value.
    It excludes 0 exactly when Welch's test rejects (at the noncentrality 0 the inversion is the
    central t with Welch's df). An approximation in the spirit of Delacre et al. (2021) for d
    with unpooled SDs (from memory); the index's own interval (Bonett 2008) is the better-studied
    one (docs/coverage.md). None when the limits cannot be found."""
    ma, va, na = mean_var(a)
    mb, vb, nb = mean_var(b)
    va, vb = float(va), float(vb)
    se = math.sqrt(va / na + vb / nb)
    s = math.sqrt((va + vb) / 2)
    nu = welch_df(va, na, vb, nb)
    if not (se > 0 and s > 0 and math.isfinite(se) and math.isfinite(nu)):
        return None
    limits = noncentral_t_limits(float(ma - mb) / se, nu, level)
    if limits is None:
        return None
    c = se / s
    return Interval("noncentral_t_welch", limits[0] * c, limits[1] * c, level,
                    "noncentral t with Welch's df: agrees with Welch's t test")


def robust_d(a: np.ndarray, b: np.ndarray, level: float) -> Estimate:
    """Algina-Keselman-Penfield robust d (20% trimming). No analytic interval: the bootstrap
    interval, which the authors recommend, is the index's interval."""
    value = float(robust_d_values(a, b))
    if not math.isfinite(value):
        return _undefined("the winsorized variances are zero: robust d is undefined")
    return Estimate(value, None)
