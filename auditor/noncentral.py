"""Analytic intervals for the omnibus effect sizes of k groups, by inverting a noncentral
distribution in its noncentrality parameter (Steiger & Fouladi 1997; Steiger 2004).

The observed statistic S (an F or a chi-squared statistic) is taken as a draw from a family
indexed by a noncentrality lambda >= 0 whose distribution function P(S <= s | lambda) falls as
lambda grows. The limits at confidence `level`, alpha = 1 - level, are

    lambda_low:   P(S <= s_obs | lambda_low)  = 1 - alpha / 2
    lambda_high:  P(S <= s_obs | lambda_high) = alpha / 2,

each set to 0 when even lambda = 0 does not reach its target (Steiger 2004). lambda_low > 0 exactly when the test of lambda = 0 at level alpha / 2 is
significant, so a (1 - 2 alpha) interval excludes zero exactly when the usual alpha-level test
rejects (Steiger 2004's reason for reporting 90% intervals beside a 5% F test). Each limit is
then mapped to the effect size by a function increasing in lambda.

    one-way ANOVA F              -> eta^2 and omega^2  (exact under normality, equal variances)
    Kruskal-Wallis H             -> epsilon^2_H        (large-sample approximation)
    Friedman chi^2_F             -> Kendall's W        (large-sample approximation)

Every public `*_interval` function returns an `auditor.parametric.Estimate`: `value` is the
point estimate of `auditor.kgroups` (the same number the rest of the audit reports), `interval`
an `auditor.results.Interval`, and `details` the statistic, its degrees of freedom, the p-value
of the test of no effect and the noncentrality limits. When the interval is undefined for the
data (every value equal, F infinite, a group with a single value, every participant tied),
`interval` is None and `reason` says why in plain words; the point estimate is kept when it is
itself defined. Bad arguments (a level outside (0, 1), fewer than two groups, empty groups,
non-finite values) raise ValueError.

The effect sizes do not depend on the order of the groups (or conditions): permuting them leaves
every estimate and interval unchanged.

>>> import numpy as np
>>> g = [np.array([1., 2, 3, 4]), np.array([3., 4, 5, 6]), np.array([5., 6, 7, 8])]
>>> a = eta_squared_interval(g, 0.95).interval
>>> b = eta_squared_interval(g[::-1], 0.95).interval
>>> (round(a.low, 6), round(a.high, 6)) == (round(b.low, 6), round(b.high, 6))
True
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Sequence

import numpy as np
from scipy import integrate, optimize, special, stats

from auditor import kgroups
from auditor.parametric import Estimate
from auditor.results import Interval

F_METHOD = "noncentral_f"
CHI2_METHOD = "noncentral_chi2"

# scipy 1.17's noncentral F and chi-squared distribution functions (Boost) agree with an
# independent quadrature to about 1e-12 up to lambda = 1e10 and return NaN (or run for tens of
# seconds) from about 1e11; above LIBRARY_MAX_NCP the large-lambda forms below are used instead.
LIBRARY_MAX_NCP = 1e9
UPPER_FROM = 1.0 - 1e-6  # above this cdf the upper tail comes from scipy.stats, not 1 - cdf
NCP_CEILING = 1e300  # no limit is sought beyond this (it would overflow double precision)
_MAX_STEPS = 2000  # bracket expansions; the step doubles each time, so this is never the bound
_Z_REACH = 9.0  # the standard normal mass beyond +-9 is below 1e-18
_CHI2_QUANTILES = (1e-15, 1e-9, 1e-5, 1e-3, 0.02, 0.1, 0.3, 0.5, 0.7, 0.9, 0.98, 1 - 1e-3,
                   1 - 1e-5, 1 - 1e-9, 1 - 1e-15)


# ------------------------------------------------------------------ argument checks


def _check_level(level: float) -> float:
    level = float(level)
    if not 0.0 < level < 1.0:
        raise ValueError(f"level {level!r}: a confidence level must lie strictly between 0 and 1;"
                         " pass for example 0.95")
    return level


def _check_df(name: str, df: float) -> float:
    df = float(df)
    if not (math.isfinite(df) and df > 0):
        raise ValueError(f"{name} = {df!r}: degrees of freedom must be finite and positive;"
                         " pass the test's degrees of freedom")
    return df


def _check_statistic(name: str, value, what: str, hint: str) -> float:
    value = float(value)
    if math.isnan(value) or value < 0:
        raise ValueError(f"{name} = {value!r}: {what} is a non-negative number; pass {hint}")
    return value


def _check_groups(groups: Sequence) -> tuple[np.ndarray, ...]:
    out = tuple(np.asarray(g, dtype=float) for g in groups)
    if len(out) < 2:
        raise ValueError(f"{len(out)} group(s) given: an omnibus effect size needs at least two;"
                         " pass one array of values per group")
    for j, g in enumerate(out):
        if g.ndim != 1 or g.size == 0:
            raise ValueError(f"group {j}: found an array of shape {g.shape}; each group must be a"
                             " non-empty one-dimensional array of values")
        if not np.all(np.isfinite(g)):
            raise ValueError(f"group {j}: contains NaN or infinite values; only finite values can"
                             " be analysed, drop the missing ones first")
    return out


def _check_rows(x) -> np.ndarray:
    x = np.asarray(x, dtype=float)
    if x.ndim != 2 or x.shape[0] == 0 or x.shape[1] < 2:
        raise ValueError(f"found an array of shape {x.shape}; repeated conditions need a"
                         " two-dimensional array with one row per participant and at least two"
                         " columns (conditions)")
    if not np.all(np.isfinite(x)):
        raise ValueError("the rows contain NaN or infinite values; keep only complete"
                         " participants with finite values")
    return x


def _single_value_group(groups) -> str | None:
    sizes = [g.size for g in groups]
    if min(sizes) < 2:
        j = sizes.index(min(sizes))
        return (f"group {j} has a single value: the interval needs at least two values in every"
                " group")
    return None


# ------------------------------------------------------------------ distribution functions


def _quiet(fn: Callable[[], float]) -> float:
    """fn() with scipy's numerical warnings silenced (a failure shows as NaN, handled by the
    caller)."""
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        return float(fn())


def _ncf_large_ncp(x: float, df1: float, df2: float, ncp: float) -> tuple[float, float]:
    """(P(F <= x), P(F > x)) for large lambda, by integration over the numerator.

    The numerator chi^2(df1, lambda) = (Z + sqrt(lambda))^2 + W, Z standard normal and W
    chi-squared on df1 - 1 (Johnson, Kotz & Balakrishnan 1995, ch. 29); W is replaced by its mean
    df1 - 1, which changes the numerator's variance by the fraction (df1 - 1) / (2 lambda), below
    1e-8 at lambda >= 1e9 for df1 < 20. Conditioning on Z,

        P(F <= x) = int phi(z) Q_df2(df2 ((z + sqrt(lambda))^2 + df1 - 1) / (x df1)) dz,

    Q the chi-squared upper tail; the integral is split where Q crosses fifteen quantiles and cut
    at |z| = 9. (NaN, NaN) when the integration reports an error above 1e-11.
    """
    root = math.sqrt(ncp)
    scale = df2 / (x * df1)

    def pieces(z, upper):
        u = scale * ((z + root) ** 2 + df1 - 1.0)
        return float(special.chdtrc(df2, u) if upper else special.chdtr(df2, u))

    cuts = []
    for q in _CHI2_QUANTILES:
        u = float(special.chdtri(df2, q))  # Q_df2(u) = q
        inner = u / scale - (df1 - 1.0)
        if inner > 0:
            cuts.append(math.sqrt(inner) - root)
    cuts = sorted(c for c in cuts if -_Z_REACH < c < _Z_REACH)
    out = []
    for upper in (True, False):  # P(F <= x) needs V above the threshold, P(F > x) below it
        with warnings.catch_warnings(), np.errstate(all="ignore"):
            warnings.simplefilter("ignore")
            value, error = integrate.quad(
                lambda z, up=upper: math.exp(-0.5 * z * z) * pieces(z, up), -_Z_REACH, _Z_REACH,
                points=cuts or None, limit=400, epsabs=1e-15, epsrel=1e-13)
        if not error < 1e-11:
            return math.nan, math.nan
        out.append(min(1.0, max(0.0, value / math.sqrt(2.0 * math.pi))))
    return out[0], out[1]


def noncentral_f_tails(x: float, df1: float, df2: float, ncp: float,
                       careful: bool = False) -> tuple[float, float]:
    """(P(F <= x), P(F > x)) for F noncentral F(df1, df2, lambda = ncp).

    lambda = 0: the central F (scipy.special.fdtr / fdtrc). 0 < lambda <= LIBRARY_MAX_NCP:
    scipy.stats.ncf; where scipy returns NaN (or, with `careful`, a tail below MIXTURE_BELOW),
    the Poisson mixture of `ncf_poisson_mixture` below lambda = 1e6, and the large-lambda
    integral of `_ncf_large_ncp` above (and for every lambda > LIBRARY_MAX_NCP) when scipy gives
    NaN. `careful` is for tails reported as p-values; the interval's root-finding, which
    evaluates many tails and only needs them near alpha, leaves it off (the mixture costs about
    ten times scipy's routine there).
    """
    if ncp == 0.0:
        return (_quiet(lambda: special.fdtr(df1, df2, x)),
                _quiet(lambda: special.fdtrc(df1, df2, x)))
    if ncp <= LIBRARY_MAX_NCP:
        # the distribution function straight from scipy.special (the routine scipy.stats.ncf
        # calls, about 35 times faster without the distribution object); the upper tail as
        # 1 - cdf unless that would lose digits (cdf above UPPER_FROM)
        low = _quiet(lambda: special.ncfdtr(df1, df2, ncp, x))
        high = (1.0 - low if low < UPPER_FROM
                else _quiet(lambda: stats.ncf.sf(x, df1, df2, ncp)))
        if math.isfinite(low) and math.isfinite(high) and (
                not careful or min(low, high) >= MIXTURE_BELOW):
            return low, high
        if ncp < 1e6:
            return ncf_poisson_mixture(x, df1, df2, ncp)
        if math.isfinite(low) and math.isfinite(high):
            return low, high
    return _ncf_large_ncp(x, df1, df2, ncp)


# Below this, a tail of scipy.special.ncfdtr reported as a p-value is not trusted and the Poisson
# mixture is summed instead: at (3, 156) df and lambda = 1440, scipy 1.17.1 returns values between 4e-107 and
# 3e-106 (and NaN) for F from 1.5 to 1.7, where the lower tail is about 1e-276.
MIXTURE_BELOW = 1e-30


def ncf_poisson_mixture(x: float, df1: float, df2: float, ncp: float) -> tuple[float, float]:
    """(P(F <= x), P(F > x)) as the Poisson mixture of central F distributions,
    P(F <= x) = sum_j e^(-lambda/2) (lambda/2)^j / j! I_y(df1/2 + j, df2/2),
    y = df1 x / (df1 x + df2) (Johnson, Kotz & Balakrishnan 1995, ch. 30; from memory), summed
    in logarithms over j = 0 .. lambda/2 + 40 sqrt(lambda/2) + 50, where the Poisson weights
    beyond are below 1e-300. The fallback where scipy.special.ncfdtr returns NaN (seen at
    scattered points with the lower tail near 1e-106, scipy 1.17.1); each tail from its own
    sum. (NaN, NaN) when x is not a number."""
    if not math.isfinite(x):
        return (1.0, 0.0) if x == math.inf else (math.nan, math.nan)
    if x <= 0:
        return 0.0, 1.0
    y = df1 * x / (df1 * x + df2)
    return _poisson_mixture(ncp, lambda j, part: part(df1 / 2.0 + j, df2 / 2.0, y),
                            (special.betainc, special.betaincc))


def _poisson_mixture(ncp: float, term, parts) -> tuple[float, float]:
    """(sum_j w_j term(j, parts[0]), sum_j w_j term(j, parts[1])) with the Poisson weights
    w_j = e^(-lambda/2) (lambda/2)^j / j!, j = 0 .. lambda/2 + 40 sqrt(lambda/2) + 50 (beyond,
    the weights are below 1e-300), summed in logarithms so that tails far below the smallest
    double's square root keep their digits."""
    mu = ncp / 2.0
    j = np.arange(0, int(math.ceil(mu + 40.0 * math.sqrt(mu) + 50.0)) + 1, dtype=float)
    log_weight = j * math.log(mu) - mu - special.gammaln(j + 1.0)
    out = []
    for part in parts:
        with np.errstate(all="ignore"):
            tail = term(j, part)
        keep = tail > 0
        out.append(float(min(1.0, math.exp(special.logsumexp(log_weight[keep]
                                                              + np.log(tail[keep])))))
                   if keep.any() else 0.0)
    return out[0], out[1]


def _ncx2_poisson_mixture(x: float, df: float, ncp: float) -> tuple[float, float]:
    """(P(X <= x), P(X > x)) as the Poisson mixture of central chi-squared distributions,
    P(X <= x) = sum_j e^(-lambda/2) (lambda/2)^j / j! P(chi^2_(df + 2j) <= x) (Johnson, Kotz &
    Balakrishnan 1995, ch. 29; from memory), summed in logarithms as `ncf_poisson_mixture`
    is. For tails scipy.special.chndtr rounds to 0 (below about 1e-23 here: 0 where the lower
    tail at (0.5, 2 df, lambda 300) is 5e-63)."""
    if not math.isfinite(x):
        return (1.0, 0.0) if x == math.inf else (math.nan, math.nan)
    if x <= 0:
        return 0.0, 1.0
    return _poisson_mixture(ncp, lambda j, part: part(df + 2.0 * j, x),
                            (special.chdtr, special.chdtrc))


def noncentral_chi2_tails(x: float, df: float, ncp: float,
                          careful: bool = False) -> tuple[float, float]:
    """(P(X <= x), P(X > x)) for X noncentral chi-squared(df, lambda = ncp).

    lambda = 0: the central chi-squared; up to LIBRARY_MAX_NCP scipy.stats.ncx2 (with `careful`,
    for tails reported as p-values, a tail below MIXTURE_BELOW from `_ncx2_poisson_mixture`,
    since scipy rounds far tails to 0); above that
    X = (Z + sqrt(lambda))^2 + W with W (chi-squared on df - 1) replaced by its mean df - 1, so
    P(X <= x) = Phi(r - sqrt(lambda)) - Phi(-r - sqrt(lambda)), r = sqrt(x - df + 1) (the
    variance changes by the fraction (df - 1) / (2 lambda), below 1e-8 at lambda >= 1e9 for
    df < 20).
    """
    if ncp == 0.0:
        return (_quiet(lambda: special.chdtr(df, x)), _quiet(lambda: special.chdtrc(df, x)))
    if ncp <= LIBRARY_MAX_NCP:
        low = _quiet(lambda: special.chndtr(x, df, ncp))  # as for F: scipy.special directly
        high = (1.0 - low if low < UPPER_FROM
                else _quiet(lambda: stats.ncx2.sf(x, df, ncp)))
        if careful and ncp < 1e6 and not min(low, high) >= MIXTURE_BELOW:
            return _ncx2_poisson_mixture(x, df, ncp)
        if math.isfinite(low) and math.isfinite(high):
            return low, high
        if ncp < 1e6:
            return math.nan, math.nan
    inner = x - (df - 1.0)
    root = math.sqrt(ncp)
    if inner <= 0:
        return 0.0, 1.0
    r = math.sqrt(inner)
    low = float(special.ndtr(r - root) - special.ndtr(-r - root))
    high = float(special.ndtr(root - r) + special.ndtr(-r - root))
    return low, high


# ------------------------------------------------------------------ inversion in lambda


def _increasing_root(excess: Callable[[float], float], guess: float, step: float) -> float | None:
    """The lambda > 0 where the increasing function `excess` crosses zero, given excess(0) < 0.

    The bracket [lo, hi] starts at [0, guess + step] and moves outward, lo taking the last hi
    and the step doubling, until excess(hi) >= 0; then Brent's method (scipy.optimize.brentq).
    None when excess is not finite on the way or no bracket is found below NCP_CEILING.
    """
    lo, hi = 0.0, guess + step
    for _ in range(_MAX_STEPS):
        if hi > NCP_CEILING:
            return None
        value = excess(hi)
        if not math.isfinite(value):
            return None
        if value >= 0:
            break
        lo, step = hi, 2.0 * step
        hi = lo + step
    else:
        return None
    try:
        return optimize.brentq(excess, lo, hi, xtol=1e-14, rtol=1e-13, maxiter=500)
    except (ValueError, RuntimeError):
        return None


def _limits(tails: Callable[[float], tuple[float, float]], guess: float, step: float,
            level: float) -> tuple[float, float] | None:
    """(lambda_low, lambda_high) from tails(lambda) = (P(S <= s_obs), P(S > s_obs))."""
    alpha_half = (1.0 - level) / 2.0
    central_cdf, central_sf = tails(0.0)
    if not (math.isfinite(central_cdf) and math.isfinite(central_sf)):
        return None
    # lambda_low: P(S > s_obs | lambda) = alpha/2, written with the upper tail for precision
    if central_sf >= alpha_half:
        low = 0.0
    else:
        low = _increasing_root(lambda lam: tails(lam)[1] - alpha_half, guess, step)
    # lambda_high: P(S <= s_obs | lambda) = alpha/2
    if central_cdf <= alpha_half:
        high = 0.0
    else:
        high = _increasing_root(lambda lam: alpha_half - tails(lam)[0], guess, step)
    if low is None or high is None:
        return None
    return low, max(low, high)


def noncentral_f_limits(f_obs: float, df1: float, df2: float,
                        level: float) -> tuple[float, float] | None:
    """Noncentrality limits (lambda_low, lambda_high) for an observed F with (df1, df2) degrees
    of freedom (Steiger & Fouladi 1997; Steiger 2004, Psychological Methods 9, 164-182):

        P(F <= f_obs | df1, df2, lambda_low)  = 1 - (1 - level) / 2
        P(F <= f_obs | df1, df2, lambda_high) = (1 - level) / 2,

    F noncentral F, a limit being 0 when even lambda = 0 does not reach its target (so
    lambda_low > 0 exactly when P(F > f_obs | lambda = 0) < (1 - level) / 2). f_obs = 0 gives
    (0, 0). Distribution function from `noncentral_f_tails`; each root is bracketed from
    [0, g + s] outward with a doubling step, g = max(0, df1 (f_obs - 1)) the moment guess for
    lambda and s about two standard deviations of a noncentral chi-squared there, then located by
    Brent's method to a relative 1e-13 (tested for f_obs from 0 to 3e12 and df2 up to 10^6).

    Raises ValueError for a level outside (0, 1), a negative or NaN f_obs or degrees of freedom
    that are not positive. Returns None when f_obs is infinite, or the limits lie beyond 1e300
    or the distribution function fails numerically.
    """
    level = _check_level(level)
    df1, df2 = _check_df("df1", df1), _check_df("df2", df2)
    f_obs = _check_statistic("f_obs", f_obs, "an F statistic", "the observed F")
    if math.isinf(f_obs):
        return None
    guess = max(0.0, df1 * (f_obs - 1.0))
    step = 1.0 + 2.0 * math.sqrt(2.0 * (df1 + 2.0 * guess))
    return _limits(lambda lam: noncentral_f_tails(f_obs, df1, df2, lam), guess, step, level)


def noncentral_chi2_limits(x_obs: float, df: float, level: float) -> tuple[float, float] | None:
    """Noncentrality limits (lambda_low, lambda_high) for an observed chi-squared statistic with
    `df` degrees of freedom, by the same inversion as `noncentral_f_limits`:

        P(X <= x_obs | df, lambda_low) = 1 - (1 - level) / 2,  P(X <= x_obs | df, lambda_high)
        = (1 - level) / 2,

    X noncentral chi-squared (distribution function from `noncentral_chi2_tails`), a limit being
    0 when lambda = 0 does not reach its target. Smithson (2003, "Confidence Intervals", Sage,
    ch. 4; from memory) uses this inversion for chi-squared based effect sizes.

    Raises ValueError for a level outside (0, 1), a negative or NaN x_obs or df that is not
    positive. None when x_obs is infinite or the inversion fails numerically.
    """
    level = _check_level(level)
    df = _check_df("df", df)
    x_obs = _check_statistic("x_obs", x_obs, "a chi-squared statistic", "the observed statistic")
    if math.isinf(x_obs):
        return None
    guess = max(0.0, x_obs - df)
    step = 1.0 + 2.0 * math.sqrt(2.0 * (df + 2.0 * guess))
    return _limits(lambda lam: noncentral_chi2_tails(x_obs, df, lam), guess, step, level)


# ------------------------------------------------------------------ one-way ANOVA: eta^2, omega^2


def _position_note(value: float | None, low: float, high: float, name: str,
                   bias: str) -> tuple[str, ...]:
    """A note when the point estimate falls outside its interval: possible, and not an error,
    because the interval is for the population value (never negative) while the sample value is
    biased or can fall below zero (`bias` says how)."""
    if value is None or low <= value <= high:
        return ()
    side = "above" if value > high else "below"
    return (f"the point estimate of {name} ({value:.4g}) lies {side} its interval: the interval"
            f" is for the population value, which is never negative, and {bias}",)


def _empty_note(lam_high: float, statistic: str, level: float) -> str | None:
    """The interval's note when both limits are 0 (the statistic is below its central
    (1 - level) / 2 quantile, e.g. 0 for identical group means or mean ranks)."""
    if lam_high > 0:
        return None
    return (f"{statistic} lies below the {(1 - level) / 2:.3g} quantile of its no-effect"
            " distribution: no noncentrality makes it that small, and the inversion gives the"
            " single point 0")


def _one_way_f(groups) -> tuple[float | None, int, int, int, str | None]:
    """(F, df1, df2, N, reason) of the one-way ANOVA, from the sums of squares
    `auditor.kgroups` uses for eta^2 and omega^2; F is None with the reason when undefined."""
    n, k = sum(g.size for g in groups), len(groups)
    df1, df2 = k - 1, n - k
    reason = _single_value_group(groups)
    if reason is not None:
        return None, df1, df2, n, reason
    if all(np.all(g == g[0]) for g in groups):
        if np.all(np.concatenate(groups) == groups[0][0]):
            return None, df1, df2, n, "every value is equal: F and the effect size are undefined"
        return None, df1, df2, n, ("no variation within any group: F is infinite, so the"
                                   " noncentrality has no finite upper limit")
    sb, sw, _, _ = kgroups.anova_parts(groups)
    f = float(sb / df1 / (sw / df2))
    if not math.isfinite(f):
        return None, df1, df2, n, "F is not finite in double precision"
    return f, df1, df2, n, None


def _anova_interval(groups, level: float, point, name: str, bias: str) -> Estimate:
    level = _check_level(level)
    groups = _check_groups(groups)
    f, df1, df2, n, reason = _one_way_f(groups)
    value = point(*groups).value
    if f is None:
        return Estimate(value=value, interval=None, reason=reason)
    p = float(stats.f.sf(f, df1, df2))
    details = {"statistic": f, "df": (df1, df2), "p": p}
    limits = noncentral_f_limits(f, df1, df2, level)
    if limits is None:
        return Estimate(value=value, interval=None,
                        reason=f"F = {f:.6g} is beyond the range where the noncentral-F"
                               " inversion succeeds numerically", details=details)
    lam_low, lam_high = limits
    # population eta^2 = lambda / (lambda + N) (Steiger 2004); the same parameter as omega^2
    low, high = lam_low / (lam_low + n), lam_high / (lam_high + n)
    note = _empty_note(lam_high, f"F = {f:.4g}", level)
    if lam_high > LIBRARY_MAX_NCP:
        note = (f"lambda above {LIBRARY_MAX_NCP:g}: noncentral-F distribution function by"
                " numerical integration")
    interval = Interval(F_METHOD, low, high, level, note)
    return Estimate(value=value, interval=interval, reason=None,
                    notes=_position_note(value, low, high, name, bias),
                    details={**details, "noncentrality": (lam_low, lam_high)})


def eta_squared_interval(groups: Sequence, level: float) -> Estimate:
    """eta^2 = SS_between / SS_total (`auditor.kgroups.eta_squared`) with the noncentral-F
    interval for the population eta^2 of one-way fixed-effects ANOVA (Steiger 2004; the mapping
    below is derived here, and matches Steiger's from memory).

    Model: independent groups, normal with a common variance sigma^2, means mu_j. The ANOVA
    F = MS_between / MS_within (df1 = k - 1, df2 = N - k) is noncentral F with
    lambda = sum_j n_j (mu_j - mu)^2 / sigma^2, mu = sum_j n_j mu_j / N. With
    sigma_effect^2 = sum_j (n_j / N)(mu_j - mu)^2 (the group proportions of the sample taken as
    fixed), lambda = N sigma_effect^2 / sigma^2 = N f^2 (Cohen's f), so

        population eta^2 = sigma_effect^2 / (sigma_effect^2 + sigma^2) = lambda / (lambda + N),

    increasing in lambda; the limits of `noncentral_f_limits` map to [lambda_low / (lambda_low +
    N), lambda_high / (lambda_high + N)], below 1 for any finite F (in double precision until
    lambda_high exceeds about 1e16 N, where the ratio rounds to 1). The coverage is exact
    under the model. The sample eta^2 is biased upward, so with F near or below 1 it can exceed
    the upper limit (a note says so).

    Returns an `Estimate` (module docstring); the interval is None with a reason when a group
    has a single value, every value is equal, there is no variation within any group (F
    infinite) or the inversion fails.
    """
    return _anova_interval(groups, level, kgroups.eta_squared, "eta^2",
                           "the sample eta^2 is biased upward (F at or below about 1)")


def omega_squared_interval(groups: Sequence, level: float) -> Estimate:
    """omega^2 = (SS_between - (k - 1) MS_within) / (SS_total + MS_within)
    (`auditor.kgroups.omega_squared`, Hays 1963) with the noncentral-F interval of
    `eta_squared_interval`.

    In one-way fixed-effects ANOVA the sample omega^2 and the sample eta^2 estimate one and the
    same population quantity, sigma_effect^2 / (sigma_effect^2 + sigma^2) = lambda / (lambda + N):
    omega^2 is the less biased estimator of it (Hays 1963; Olejnik & Algina 2003). Steiger
    (2004) sets up the interval for this population quantity and notes that it is the parameter
    usually written omega^2 (from memory). So the interval is the same as eta^2's; only the point
    estimate differs. (Putting the limits for F through the sample omega^2 formula, as is
    sometimes done, gives an interval for a different, sample-dependent quantity and can fall
    below zero; it is not used here.) The sample omega^2 can be negative, below the lower limit
    0; a note then says so.

    Returns an `Estimate` as `eta_squared_interval` does, undefined in the same cases.
    """
    return _anova_interval(groups, level, kgroups.omega_squared, "omega^2",
                           "the sample omega^2 falls below zero when F < 1")


# ------------------------------------------------------------------ rank statistics: chi^2


def _chi2_interval(statistic: float, df: int, scale: float, level: float, value: float | None,
                   name: str, bias: str) -> Estimate:
    """The noncentral chi-squared interval of an index = lambda / scale (see the callers)."""
    p = float(stats.chi2.sf(statistic, df))
    details = {"statistic": statistic, "df": df, "p": p}
    limits = noncentral_chi2_limits(statistic, df, level)
    if limits is None:
        return Estimate(value=value, interval=None,
                        reason=f"the noncentral chi-squared inversion failed numerically for the"
                               f" statistic {statistic:.6g}", details=details)
    lam_low, lam_high = limits
    low, high = lam_low / scale, lam_high / scale
    note = _empty_note(lam_high, f"the statistic {statistic:.4g}", level)
    if high > 1.0:
        note = (f"upper limit {high:.6g} clipped to 1, the largest value of {name}: the"
                " noncentral chi-squared approximation puts mass beyond the statistic's maximum")
        high = 1.0
    low = min(low, 1.0)
    interval = Interval(CHI2_METHOD, low, high, level, note)
    return Estimate(value=value, interval=interval, reason=None,
                    notes=_position_note(value, low, high, name, bias),
                    details={**details, "noncentrality": (lam_low, lam_high)})


def epsilon_squared_h_interval(groups: Sequence, level: float) -> Estimate:
    """epsilon^2_H = H / (N - 1) (`auditor.kgroups.epsilon_squared_h`) with an approximate
    interval from the noncentral chi-squared distribution of the Kruskal-Wallis H.

    Under alternatives near the null, H (tie-corrected) is approximately noncentral chi-squared
    on df = k - 1 with noncentrality lambda = 12 / (N (N + 1)) sum_j n_j (E Rbar_j - (N+1)/2)^2,
    the value H takes at the expected mean ranks (Andrews 1954; from memory), so that
    E[H] ~ df + lambda: df is the part of H present with no effect at all, lambda the part due to
    the effect. The index is mapped from lambda with the scale of the point estimate,

        population epsilon^2_H = lambda / (N - 1),

    which is H / (N - 1) evaluated at the expected mean ranks, i.e.
    12 N / ((N + 1)(N - 1)) sum_j (n_j / N)(p_j - 1/2)^2 with p_j the probability that a value of
    group j exceeds one of the pooled population (ties counted half); 0 under no effect. Mapping
    df + lambda instead would give the expected sample epsilon^2_H, which is df / (N - 1) > 0
    even with no effect, so its interval would never reach 0. The limits are lambda_low / (N - 1)
    and lambda_high / (N - 1), the upper one clipped to 1 (the index's maximum) with a note.

    Approximation: the noncentral chi-squared is a large-sample, local-alternative form; away
    from the null the variance of H is smaller than the noncentral chi-squared's 2 (df + 2 lambda),
    which makes the interval conservative (Smithson 2003, ch. 4, for noncentral chi-squared
    intervals of chi-squared based indices; from memory). Simulated with normal populations one
    half SD apart (k = 3, n = 20, 50 and 200 per group, 1,000 to 3,000 replications): Var(H) was
    about 0.7 of 2 (df + 2 lambda), and the 95% interval covered the population value 97-98% of
    the time, missing on both sides (`tests/references/test_noncentral_reference.py` repeats a
    smaller simulation).

    Returns an `Estimate` (module docstring); the interval is None with a reason when a group
    has a single value or every value is tied (H undefined).
    """
    level = _check_level(level)
    groups = _check_groups(groups)
    value = kgroups.epsilon_squared_h(*groups).value
    reason = _single_value_group(groups)
    if reason is not None:
        return Estimate(value=value, interval=None, reason=reason)
    h = float(kgroups.kruskal_h_values(*groups))
    if not math.isfinite(h):
        return Estimate(value=value, interval=None,
                        reason="every value is tied: the Kruskal-Wallis H is undefined")
    n, k = sum(g.size for g in groups), len(groups)
    return _chi2_interval(h, k - 1, n - 1.0, level, value, "epsilon^2_H",
                          f"the sample epsilon^2_H is biased upward by about (k - 1) / (N - 1)"
                          f" = {(k - 1) / (n - 1):.3g}")


def kendall_w_interval(x, level: float) -> Estimate:
    """Kendall's W = chi^2_F / (n (k - 1)) (`auditor.kgroups.kendall_w`) with an approximate
    interval from the noncentral chi-squared distribution of the Friedman statistic.

    x has one row per participant (n rows) and one column per condition (k columns). Under
    alternatives near the null the tie-corrected Friedman chi^2_F is approximately noncentral
    chi-squared on df = k - 1 with lambda = 12 n / (k (k + 1)) sum_j (E Rbar_j - (k+1)/2)^2,
    Rbar_j the mean within-participant rank of condition j (from memory), so E[chi^2_F] ~ df +
    lambda. As for `epsilon_squared_h_interval`, the index is mapped from lambda on the scale of
    the point estimate,

        population W = lambda / (n (k - 1)) = 12 / (k (k^2 - 1)) sum_j (E Rbar_j - (k+1)/2)^2,

    0 when no condition tends to rank above another, 1 when every participant orders them alike;
    the limits are lambda_low / (n (k - 1)) and lambda_high / (n (k - 1)), the upper one clipped
    to 1 with a note. The sample W has expectation near 1 / n with no effect (df / (n (k - 1))),
    which is why the mapping uses lambda and not df + lambda. A large-sample approximation,
    conservative as for `epsilon_squared_h_interval`: in the same simulation (conditions one
    half SD apart, independent normal errors, n = 20 to 200 participants) the 95% interval
    covered 97%.

    Returns an `Estimate` (module docstring); the interval is None with a reason when there is a
    single participant or every participant is tied across the conditions.
    """
    level = _check_level(level)
    x = _check_rows(x)
    n, k = x.shape
    value = kgroups.kendall_w(x).value
    if n < 2:
        return Estimate(value=value, interval=None,
                        reason="a single participant: the interval needs at least two")
    with np.errstate(all="ignore"):
        chi2 = float(kgroups.friedman_values(x))
    if not math.isfinite(chi2):
        return Estimate(value=value, interval=None,
                        reason="every participant is tied across the conditions: the Friedman"
                               " statistic is undefined")
    return _chi2_interval(chi2, k - 1, float(n * (k - 1)), level, value, "Kendall's W",
                          f"the sample W is biased upward by about 1 / n = {1 / n:.3g}")
