"""Equivalence and minimal-effect tests by two one-sided tests (TOST).

An ordinary test asks whether an effect theta differs from its no-effect value theta_0. With a
margin of practical importance it can be asked two more things, each by a pair of one-sided tests
at level alpha on the same statistic (Schuirmann 1987; Lakens 2017; Lakens, Scheel & Isager
2018). With bounds low < theta_0 < high (theta_0 - m and theta_0 + m by default):

  p_lower           tests H0: theta <= low   against theta > low
  p_upper           tests H0: theta >= high  against theta < high
  p_tost            = max(p_lower, p_upper): equivalence, H0: theta <= low or theta >= high
  p_minimal_effect  = min(P(statistic at least as large | theta = high),
                          P(statistic at least as small | theta = low)):
                    the minimal-effect test, H0: low <= theta <= high
  p_difference      the ordinary two-sided test of H0: theta = theta_0

The interval [interval_low, interval_high] has level 1 - 2 alpha and is the inversion of the same
one-sided tests, so that (up to rounding at the boundary)

  p_tost < alpha            iff  low < interval_low  and  interval_high < high
  p_minimal_effect < alpha  iff  interval_low > high  or  interval_high < low

The verdict is one of four outcomes (module constant `VERDICTS`), decided in this order:

  "at_least_margin"      p_minimal_effect < alpha: the whole 1 - 2 alpha interval lies beyond one
                         bound (above high, or below low). It therefore excludes theta_0 too: the
                         null region [low, high] contains theta_0, so the minimal-effect test is
                         also a level-alpha test against no effect.
  "smaller_than_margin"  p_tost < alpha and p_difference < alpha: the interval lies inside
                         (low, high), and the ordinary test at alpha rejects no effect (the
                         1 - alpha interval excludes theta_0): different from zero, but by less
                         than the margin.
  "equivalent"           p_tost < alpha and p_difference >= alpha: inside the bounds, and not
                         shown to differ from theta_0.
  "undecided"            neither p_tost < alpha nor p_minimal_effect < alpha: the interval
                         reaches across a bound. This includes data that differ from theta_0
                         (p_difference < alpha) without settling whether the effect is smaller
                         or larger than the margin.

The first two cannot hold together, since alpha < 1/2 (p_tost < alpha puts the statistic below
its upper alpha point at `high` and above its lower alpha point at `low`), so the four outcomes
partition every defined result. As in Lakens (2017, Fig. 1), "differs from theta_0" inside the
bounds is the two-sided test at alpha (the 1 - alpha interval), while the margins are read from
the 1 - 2 alpha interval.

Every index is A relative to B (or first relative to second condition for paired data). Swapping
the groups negates a signed estimate (A -> 1 - A) and swaps p_lower with p_upper once the bounds
are mirrored, leaving the verdict unchanged:

>>> import numpy as np
>>> a, b = np.array([5.1, 6.0, 7.2, 6.4, 5.8]), np.array([4.8, 5.5, 6.9, 6.1, 5.2])
>>> ab, ba = mean_difference_tost(a, b, 1.0), mean_difference_tost(b, a, 1.0)
>>> round(ab.estimate, 2), round(ba.estimate, 2), ab.verdict == ba.verdict
(0.4, -0.4, True)
>>> math.isclose(ab.p_lower, ba.p_upper), math.isclose(ab.p_upper, ba.p_lower)
(True, True)

Bad arguments (a margin that is not positive, alpha outside (0, 1/2), arrays of the wrong shape)
raise ValueError. Data that leave a test undefined (constant groups, too few values, complete
separation for A) give a result with `reason` set and the p-values, interval and verdict None.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from numbers import Real

import numpy as np
from scipy import special

from auditor import paired, ranks
from auditor.moments import mean_var
from auditor.parametric import (cohen_d_values, hedges_correction, mean_difference_values,
                                noncentral_t_cdf, noncentral_t_limits, welch_df)
from auditor.results import Record

AT_LEAST_MARGIN = "at_least_margin"
SMALLER_THAN_MARGIN = "smaller_than_margin"
EQUIVALENT = "equivalent"
UNDECIDED = "undecided"

VERDICTS = {
    AT_LEAST_MARGIN: "different from no effect, and by at least the margin",
    SMALLER_THAN_MARGIN: "different from no effect, but by less than the margin",
    EQUIVALENT: "within the margin of no effect",
    UNDECIDED: "neither within the margin nor shown to reach it",
}


@dataclass(frozen=True)
class EquivalenceResult(Record):
    """Two one-sided tests of one index against the bounds (margin_low, margin_high).

    p-values as in the module docstring; `interval_low`/`interval_high` at `interval_level` =
    1 - 2 alpha; `statistic` and `df` are those of the ordinary test of no effect (t, or the
    Brunner-Munzel statistic). `estimate` may be given while the tests are not (`reason` says
    why); then every p-value, the interval and the verdict are None.
    """

    index: str
    method: str
    estimate: float | None
    null_value: float
    margin_low: float
    margin_high: float
    alpha: float
    p_lower: float | None
    p_upper: float | None
    p_tost: float | None
    p_minimal_effect: float | None
    p_difference: float | None
    interval_low: float | None
    interval_high: float | None
    interval_level: float
    statistic: float | None
    df: float | None
    verdict: str | None
    reason: str | None = None
    notes: tuple[str, ...] = ()


# ------------------------------------------------------------------ argument checks


def check_alpha(alpha) -> float:
    if isinstance(alpha, bool) or not isinstance(alpha, Real) or not 0.0 < float(alpha) < 0.5:
        raise ValueError(f"alpha={alpha!r}: the level of each one-sided test must be a number"
                         " between 0 and 0.5 (the interval has level 1 - 2 alpha); use, for"
                         " example, alpha=0.05")
    return float(alpha)


def check_bounds(margin, null: float, floor: float = -math.inf,
                  ceiling: float = math.inf) -> tuple[float, float]:
    """(low, high) from a positive margin m (null - m, null + m) or an explicit pair, checked to
    satisfy floor <= low < null < high <= ceiling."""
    where = (f" within [{floor:g}, {ceiling:g}]" if math.isfinite(floor) else "")
    if isinstance(margin, np.ndarray) and margin.ndim == 0:
        margin = margin.item()
    if isinstance(margin, (tuple, list, np.ndarray)):
        pair = list(np.ravel(np.asarray(margin, dtype=object)))
        if len(pair) != 2 or not all(isinstance(v, Real) and not isinstance(v, bool)
                                     for v in pair):
            raise ValueError(f"margin={margin!r}: a pair of bounds must be two numbers (low,"
                             f" high); give, for example, margin=({null - 0.1:g}, {null + 0.1:g})"
                             " or a single positive margin")
        low, high = float(pair[0]), float(pair[1])
        if not (floor <= low < null < high <= ceiling):
            raise ValueError(f"margin=({low:g}, {high:g}): the bounds must lie on either side of"
                             f" the no-effect value {null:g}{where} (low < {null:g} < high);"
                             " reorder or widen them")
        return low, high
    if isinstance(margin, bool) or not isinstance(margin, Real):
        raise ValueError(f"margin={margin!r}: the margin must be a positive number (or a pair"
                         " of bounds); give the smallest effect that would matter, for example"
                         " margin=0.5")
    m = float(margin)
    if not (m > 0 and math.isfinite(m)):
        raise ValueError(f"margin={margin!r}: the margin must be a positive, finite number"
                         " (bounds no-effect -/+ margin); give the smallest effect that would"
                         " matter, for example margin=0.5")
    low, high = null - m, null + m
    if not (floor <= low and high <= ceiling):
        raise ValueError(f"margin={margin!r}: the bounds {low:g} and {high:g} leave the index's"
                         f" range{where}; use a margin of at most"
                         f" {min(null - floor, ceiling - null):g}")
    return low, high


def data_vector(values, what: str) -> np.ndarray:
    arr = np.asarray(values, dtype=float)
    if arr.ndim != 1:
        raise ValueError(f"{what} must be a 1-D array of values, got shape {arr.shape}; pass one"
                         " group's values")
    return arr


def paired_differences(x_or_d, digits: int) -> np.ndarray:
    """d from an (n, 2) array (first minus second, rounded to `digits` places as
    `paired.differences` does) or a 1-D array of differences taken as given."""
    arr = np.asarray(x_or_d, dtype=float)
    if arr.ndim == 1:
        return arr
    if arr.ndim == 2 and arr.shape[1] == 2:
        if not np.all(np.isfinite(arr)):
            return arr[:, 0] - arr[:, 1]  # the finite check of the caller reports it
        return paired.differences(arr, digits)
    raise ValueError(f"paired data must be an (n, 2) array (first, second condition) or a 1-D"
                     f" array of differences, got shape {arr.shape}")


def not_finite(*arrays) -> str | None:
    if any(not np.all(np.isfinite(a)) for a in arrays):
        return "the data contain missing or non-finite values; remove them before testing"
    return None


# ------------------------------------------------------------------ the decision


def input_problem(*samples, paired: bool = False) -> str | None:
    """Why the tests cannot run on these samples, or None: a value that is not finite, or
    fewer than two values in a group (two pairs, with `paired`)."""
    reason = not_finite(*samples)
    if reason is None and any(s.size < 2 for s in samples):
        reason = ("too few pairs: at least two are needed" if paired
                  else "too few values: each group needs at least two")
    return reason


def verdict_of(p_tost: float, p_minimal_effect: float, p_difference: float,
               alpha: float) -> str:
    """The four-way outcome of the module docstring, from the three p-values and alpha."""
    if p_minimal_effect < alpha:
        return AT_LEAST_MARGIN
    if p_tost < alpha:
        return SMALLER_THAN_MARGIN if p_difference < alpha else EQUIVALENT
    return UNDECIDED


def opening(index: str, method: str, null: float, bounds, alpha: float, *samples,
            paired: bool = False):
    """The start every two one-sided tests share: `make(estimate, reason)`, an undefined result
    of this index and method, and that result already when the samples leave the tests
    undefined (`input_problem`), else None."""
    def make(estimate, reason, notes=()):
        return undefined_result(index, method, estimate, null, bounds, alpha, reason, notes)

    reason = input_problem(*samples, paired=paired)
    return make, (None if reason is None else make(None, reason))


def undefined_result(index, method, estimate, null, bounds, alpha, reason, notes=()):
    est = None if estimate is None or not math.isfinite(estimate) else float(estimate)
    return EquivalenceResult(index, method, est, null, bounds[0], bounds[1], alpha, None, None,
                             None, None, None, None, None, 1.0 - 2.0 * alpha, None, None, None,
                             reason, tuple(notes))


def assemble(index, method, estimate, null, bounds, alpha, p_lower, p_upper, p_met, p_diff,
              interval, statistic, df, notes=()) -> EquivalenceResult:
    """The result of two one-sided tests from their parts, with the verdict; an undefined result
    when a p-value is not finite. A df that is None or not finite (a normal reference, a rank
    statistic) is stored as None."""
    ps = (p_lower, p_upper, p_met, p_diff)
    if not all(math.isfinite(p) for p in ps):
        return undefined_result(index, method, estimate, null, bounds, alpha,
                          "a p-value could not be computed in double precision", notes)
    p_lower, p_upper, p_met, p_diff = (min(1.0, max(0.0, float(p))) for p in ps)
    p_tost = max(p_lower, p_upper)
    low, high = (None, None) if interval is None else (float(interval[0]), float(interval[1]))
    return EquivalenceResult(index, method, float(estimate), null, bounds[0], bounds[1], alpha,
                             p_lower, p_upper, p_tost, p_met, p_diff, low, high,
                             1.0 - 2.0 * alpha, float(statistic),
                             None if df is None or not math.isfinite(df) else float(df),
                             verdict_of(p_tost, p_met, p_diff, alpha), None, tuple(notes))


def location_t(index, method, estimate, se, df, null, bounds, alpha, notes=(),
                clip=None) -> EquivalenceResult:
    """Two one-sided t tests for an estimate with standard error `se` referred to Student's t on
    `df` degrees of freedom:
        p_lower = P(T >= (est - low) / se),  p_upper = P(T <= (est - high) / se),
        interval = est -/+ t(1 - alpha; df) se,  p_difference = 2 P(T >= |est - null| / se).
    Each tail is taken directly (scipy.special.stdtr at the negated statistic for an upper
    tail), never as 1 minus the other, so small p-values keep their precision. `clip` = (lo, hi)
    is the index's range; the interval is cut to it (which moves no endpoint across a bound
    inside the range)."""
    low, high = bounds
    p_lower = special.stdtr(df, (low - estimate) / se)
    p_upper = special.stdtr(df, (estimate - high) / se)
    p_met = min(special.stdtr(df, (high - estimate) / se), special.stdtr(df, (estimate - low) / se))
    statistic = (estimate - null) / se
    p_diff = 2.0 * special.stdtr(df, -abs(statistic))
    half = special.stdtrit(df, 1.0 - alpha) * se
    lo, hi = estimate - half, estimate + half
    if clip is not None and (lo < clip[0] or hi > clip[1]):
        lo, hi = max(lo, clip[0]), min(hi, clip[1])
        notes = tuple(notes) + (f"interval clipped to the index's range [{clip[0]:g},"
                                f" {clip[1]:g}]",)
    return assemble(index, method, estimate, null, bounds, alpha, p_lower, p_upper, p_met,
                     p_diff, (lo, hi), statistic, df, notes)


def noncentral_t_tost(index, estimate, t_obs, df, scale, factor, bounds, alpha) -> EquivalenceResult:
    """Two one-sided tests of a standardized index by the noncentral t.

    The statistic t_obs = estimate * scale / factor is noncentral t on `df` degrees of freedom
    with noncentrality delta * scale / factor when the index's population value is delta, so
        p_lower = P(T >= t_obs | ncp = low * scale / factor)
                = P(T <= -t_obs | ncp = -low * scale / factor),
        p_upper = P(T <= t_obs | ncp = high * scale / factor),
    p_minimal_effect the smaller of the opposite tails, p_difference the central two-sided p
    (ncp = 0), and the interval the noncentrality limits at level 1 - 2 alpha
    (`parametric.noncentral_t_limits`, Steiger & Fouladi 1997) times factor / scale; these limits
    are where the one-sided p-values equal alpha, so the interval agrees with p_tost. The
    distribution function is `parametric.noncentral_t_cdf`; the upper tail is read as the lower
    tail at (-t, -ncp), never as 1 minus the lower tail.
    """
    low, high = bounds
    c = scale / factor
    p_lower = noncentral_t_cdf(-t_obs, df, -low * c)
    p_upper = noncentral_t_cdf(t_obs, df, high * c)
    p_met = min(noncentral_t_cdf(-t_obs, df, -high * c), noncentral_t_cdf(t_obs, df, low * c))
    p_diff = 2.0 * special.stdtr(df, -abs(t_obs))
    limits = noncentral_t_limits(t_obs, df, 1.0 - 2.0 * alpha)
    notes = ()
    if limits is None:
        notes = ("no interval: the noncentral-t limits could not be found numerically",)
        interval = None
    else:
        interval = (limits[0] / c, limits[1] / c)
    return assemble(index, "noncentral_t", estimate, 0.0, bounds, alpha, p_lower, p_upper,
                     p_met, p_diff, interval, t_obs, df, notes)


# ------------------------------------------------------------------ two independent groups


def mean_difference_tost(a, b, margin, alpha: float = 0.05) -> EquivalenceResult:
    """TOST of mean_A - mean_B with Welch's t (Schuirmann 1987, with the Welch-Satterthwaite df).

        t_low = (diff - low) / se,  t_high = (diff - high) / se,
        se = sqrt(s_A^2 / n_A + s_B^2 / n_B),
        nu = (s_A^2/n_A + s_B^2/n_B)^2 / ((s_A^2/n_A)^2/(n_A - 1) + (s_B^2/n_B)^2/(n_B - 1)),
        p_lower = P(T_nu >= t_low),  p_upper = P(T_nu <= t_high)
    (Welch 1947; `parametric.welch_df`). The bounds are in the outcome's units: a margin m gives
    (-m, m). Assumes independent observations and normal populations (or large groups); the
    variances may differ. The same numbers as statsmodels.stats.weightstats.ttost_ind with
    usevar='unequal'. Undefined with fewer than two values in a group or both groups constant.
    """
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.0)
    a, b = data_vector(a, "group a"), data_vector(b, "group b")
    make = lambda est, reason: undefined_result("mean_difference", "welch_t", est, 0.0,  # noqa: E731
                                          bounds, alpha, reason)
    reason = not_finite(a, b)
    if reason is None and (a.size < 2 or b.size < 2):
        reason = "too few values: each group needs at least two for its variance"
    if reason:
        return make(None, reason)
    diff = float(mean_difference_values(a, b))
    va, vb = float(mean_var(a)[1]), float(mean_var(b)[1])
    se = math.sqrt(va / a.size + vb / b.size)
    if se == 0:
        return make(diff, "no variation within either group: the standard error is zero")
    nu = welch_df(va, a.size, vb, b.size)
    if not (math.isfinite(se) and math.isfinite(nu)):
        return make(diff, "the variances overflow double precision: no standard error")
    return location_t("mean_difference", "welch_t", diff, se, nu, 0.0, bounds, alpha)


def _pooled_d_inputs(a, b, index):
    a, b = data_vector(a, "group a"), data_vector(b, "group b")
    reason = not_finite(a, b)
    if reason is None and (a.size < 1 or b.size < 1 or a.size + b.size < 3):
        reason = "too few values: each group needs one and the two together at least three"
    if reason is None and index == "hedges_g" and a.size + b.size < 4:
        reason = ("too few values: the small-sample factor J needs n_A + n_B - 2 > 1, so at"
                  " least four values in all")
    if reason:
        return a, b, None, reason
    d = float(cohen_d_values(a, b))
    if not math.isfinite(d):
        return a, b, None, "no variation within either group: the pooled SD is zero"
    return a, b, d, None


def cohen_d_tost(a, b, margin, alpha: float = 0.05) -> EquivalenceResult:
    """TOST of Cohen's d (pooled SD) by the noncentral t.

    Under normal populations with equal variances, t = d sqrt(n_A n_B / (n_A + n_B)) (Student's
    t) is noncentral t with df = n_A + n_B - 2 and noncentrality delta sqrt(n_A n_B/(n_A + n_B)),
    delta the population standardized difference. Hence
        p_lower = P(T >= t | ncp = low sqrt(n_A n_B/(n_A + n_B))),
        p_upper = P(T <= t | ncp = high sqrt(n_A n_B/(n_A + n_B)))
    (the bounds on the standardized scale; Lakens 2017 discusses bounds set in d units), and the
    1 - 2 alpha interval is d's noncentral-t interval (Steiger & Fouladi 1997), as in
    `parametric.cohen_d`. p_difference is Student's t test. Undefined when both groups are
    constant or fewer than three values are given in all.
    """
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.0)
    a, b, d, reason = _pooled_d_inputs(a, b, "cohen_d")
    if reason:
        return undefined_result("cohen_d", "noncentral_t", d, 0.0, bounds, alpha, reason)
    scale = math.sqrt(a.size * b.size / (a.size + b.size))
    return noncentral_t_tost("cohen_d", d, d * scale, a.size + b.size - 2, scale, 1.0, bounds, alpha)


def hedges_g_tost(a, b, margin, alpha: float = 0.05) -> EquivalenceResult:
    """TOST of Hedges' g = J d, J = J(n_A + n_B - 2) the exact small-sample factor
    (`parametric.hedges_correction`), with the bounds on g's scale.

    The test is d's noncentral-t test (`cohen_d_tost`) with each bound divided by J:
        p_lower = P(T >= t | ncp = (low / J) sqrt(n_A n_B/(n_A + n_B))), likewise p_upper,
    and the 1 - 2 alpha interval is J times d's noncentral-t interval, as `parametric.hedges_g`
    reports it, so that the test agrees with g's interval. Same assumptions as `cohen_d_tost`.
    """
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.0)
    a, b, d, reason = _pooled_d_inputs(a, b, "hedges_g")
    j = hedges_correction(a.size + b.size - 2) if d is not None else math.nan
    if reason:
        return undefined_result("hedges_g", "noncentral_t", None if d is None else j * d, 0.0, bounds,
                          alpha, reason)
    scale = math.sqrt(a.size * b.size / (a.size + b.size))
    res = noncentral_t_tost("hedges_g", j * d, d * scale, a.size + b.size - 2, scale, j, bounds,
                        alpha)
    return with_note(res, f"exact small-sample factor J = {j:.6f}; bounds divided by J for"
                           " the noncentrality")


def with_note(res: EquivalenceResult, note: str) -> EquivalenceResult:
    return replace(res, notes=res.notes + (note,))


def prob_superiority_tost(a, b, margin, alpha: float = 0.05) -> EquivalenceResult:
    """TOST of A = P(X_A > X_B) + P(X_A = X_B) / 2 against bounds around 1/2 by the
    Brunner-Munzel statistic (Munzel & Hauschke 2003; Brunner & Munzel 2000).

        t_low = (A-hat - low) / se,  t_high = (A-hat - high) / se,
        p_lower = P(T_nu >= t_low),  p_upper = P(T_nu <= t_high),
    with A-hat, se^2 = S_A^2 / (n_A n_B^2) + S_B^2 / (n_B n_A^2) from the placements and the
    Satterthwaite-type nu (`ranks.brunner_munzel_parts`, the same numbers as
    `ranks.prob_superiority`). The bounds are on A's scale: a margin m gives (1/2 - m, 1/2 + m),
    so m must be at most 1/2; explicit bounds must satisfy 0 <= low < 1/2 < high <= 1. The
    1 - 2 alpha interval A-hat -/+ t(1 - alpha; nu) se is clipped to [0, 1]. p_difference is the
    Brunner-Munzel test of A = 1/2. Assumes independent observations only (unequal spreads and
    shapes, ties and ordinal data allowed); the t approximation is the authors' small-sample
    choice. A is statsmodels' prob1 of rank_compare_2indep(a, b). Undefined when a group has
    fewer than two values or the variance estimate is zero (complete separation, or placements
    constant in both groups).
    """
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.5, 0.0, 1.0)
    a, b = data_vector(a, "group a"), data_vector(b, "group b")
    make, undefined = opening("prob_superiority", "brunner_munzel_t", 0.5, bounds, alpha, a, b)
    if undefined is not None:
        return undefined
    with np.errstate(all="ignore"):
        a_hat, var, df = ranks.brunner_munzel_parts(a, b)
    if not var > 0:
        why = ("the groups do not overlap (complete separation)" if a_hat in (0.0, 1.0)
               else "the placements do not vary within either group")
        return make(a_hat, f"{why}: the Brunner-Munzel variance is zero")
    return location_t("prob_superiority", "brunner_munzel_t", a_hat, math.sqrt(var), df, 0.5,
                       bounds, alpha, clip=(0.0, 1.0))


def _dominance_tost(index: str, a, b, margin, alpha) -> EquivalenceResult:
    """TOST of an index equal to 2A - 1 (Cliff's delta; the rank-biserial correlation of two
    independent groups) as A's test (`prob_superiority_tost`) at the bounds carried to A's
    scale, (1 + low) / 2 and (1 + high) / 2, with the estimate, bounds and interval carried
    back by 2x - 1. The map is increasing, so every p-value and the verdict are A's."""
    alpha = check_alpha(alpha)
    low, high = check_bounds(margin, 0.0, -1.0, 1.0)
    res = prob_superiority_tost(a, b, ((1.0 + low) / 2.0, (1.0 + high) / 2.0), alpha)
    back = lambda x: None if x is None else 2.0 * x - 1.0  # noqa: E731
    notes = tuple(n.replace("[0, 1]", "[-1, 1]") for n in res.notes)
    return replace(res, index=index, estimate=back(res.estimate), null_value=0.0,
                   margin_low=low, margin_high=high, interval_low=back(res.interval_low),
                   interval_high=back(res.interval_high),
                   notes=notes + (f"{index} = 2A - 1: A's Brunner-Munzel tests at the bounds"
                                  f" ({(1 + low) / 2:.6g}, {(1 + high) / 2:.6g}) on A's scale",))


def cliff_delta_tost(a, b, margin, alpha: float = 0.05) -> EquivalenceResult:
    """TOST of Cliff's delta = P(X_A > X_B) - P(X_A < X_B) = 2A - 1 (Cliff 1993) by A's
    Brunner-Munzel tests (`prob_superiority_tost`, Munzel & Hauschke 2003): the bounds
    (-m, m) on delta's scale are (1/2 - m/2, 1/2 + m/2) on A's. A margin m must be at most 1;
    explicit bounds must satisfy -1 <= low < 0 < high <= 1. Same assumptions as A's test.
    Note that the same number means twice the distance from no effect on delta's scale as on
    A's: a margin of 0.1 for delta is a margin of 0.05 for A."""
    return _dominance_tost("cliff_delta", a, b, margin, alpha)


def rank_biserial_tost(a, b, margin, alpha: float = 0.05) -> EquivalenceResult:
    """TOST of the rank-biserial correlation of two independent groups, which equals Cliff's
    delta (Kerby 2014; `ranks.rank_biserial`), by the same tests as `cliff_delta_tost`."""
    return _dominance_tost("rank_biserial", a, b, margin, alpha)


def d_unpooled_tost(a, b, margin, alpha: float = 0.05) -> EquivalenceResult:
    """TOST of d with the average of the two variances, d = diff / s, s^2 = (s_A^2 + s_B^2) / 2
    (Bonett 2008), by the noncentral t with Welch's df.

    Welch's t_W = diff / se, se^2 = s_A^2/n_A + s_B^2/n_B, is taken as noncentral t on Welch's
    nu with noncentrality delta / c, c = se / s held at its observed value, so
        p_lower = P(T >= t_W | ncp = low / c),  p_upper = P(T <= t_W | ncp = high / c),
    p_difference is Welch's test, and the 1 - 2 alpha interval is
    `parametric.d_unpooled_welch_interval` (noncentral-t limits times c), with which the tests
    agree. An approximation (Delacre et al. 2021 discuss it for unpooled d; from memory): exact
    only when c is known. Does not assume equal variances. Undefined when both groups are
    constant or a group has fewer than two values."""
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.0)
    a, b = data_vector(a, "group a"), data_vector(b, "group b")
    make, undefined = opening("d_unpooled", "noncentral_t_welch", 0.0, bounds, alpha, a, b)
    if undefined is not None:
        return undefined
    ma, va, na = mean_var(a)
    mb, vb, nb = mean_var(b)
    va, vb = float(va), float(vb)
    se, s = math.sqrt(va / na + vb / nb), math.sqrt((va + vb) / 2.0)
    if not (s > 0 and se > 0 and math.isfinite(s) and math.isfinite(se)):
        return make(None, "both groups are constant: the average variance is zero")
    nu = welch_df(va, na, vb, nb)
    d = float(ma - mb) / s
    c = se / s
    res = noncentral_t_tost("d_unpooled", d, d / c, nu, 1.0 / c, 1.0, bounds, alpha)
    return with_note(replace(res, method="noncentral_t_welch"),
                     f"Welch's df = {nu:.6g}; c = se / s = {c:.6g} held at its observed value")


def glass_delta_tost(a, b, margin, alpha: float = 0.05, reference: int = 1) -> EquivalenceResult:
    """TOST of Glass's delta = diff / s_ref (the reference group B when reference = 1, A when
    0) by normal-approximation (Wald) tests with the standard error of `parametric.glass_delta`,
    SE^2 = (s_other^2 / s_ref^2) / n_other + 1 / n_ref + delta^2 / (2 (n_ref - 1)):
        p_lower = 1 - Phi((delta - low) / SE),  p_upper = Phi((delta - high) / SE),
    the interval delta -/+ z(1 - alpha) SE (the index's own interval at 1 - 2 alpha) and
    p_difference the Wald test of 0. SE is evaluated at the estimate, so the tests are
    large-sample ones; they agree with the interval exactly. Undefined when the reference group
    is constant or a group has fewer than two values."""
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.0)
    a, b = data_vector(a, "group a"), data_vector(b, "group b")
    make, undefined = opening("glass_delta", "normal_approximation", 0.0, bounds, alpha, a, b)
    if undefined is not None:
        return undefined
    ref, other = (b, a) if reference == 1 else (a, b)
    v_ref, v_other = float(mean_var(ref)[1]), float(mean_var(other)[1])
    if not v_ref > 0:
        return make(None, "the reference group is constant: its SD is zero")
    delta = float(np.mean(a) - np.mean(b)) / math.sqrt(v_ref)
    se = math.sqrt(v_other / v_ref / other.size + 1.0 / ref.size
                   + delta**2 / (2.0 * (ref.size - 1)))
    return location_t("glass_delta", "normal_approximation", delta, se, math.inf, 0.0, bounds,
                      alpha)


# ------------------------------------------------------------------ paired data


def paired_mean_difference_tost(x_or_d, margin, alpha: float = 0.05, *,
                                digits: int = 12) -> EquivalenceResult:
    """TOST of the mean difference of paired data by the paired t (Schuirmann 1987).

        t_low = (mean(d) - low) / (s_d / sqrt(n)),  t_high = (mean(d) - high) / (s_d / sqrt(n)),
        p_lower = P(T_{n-1} >= t_low),  p_upper = P(T_{n-1} <= t_high).
    `x_or_d` is an (n, 2) array (d = first - second, rounded to `digits` places as in
    `paired.differences`) or a 1-D array of differences used as given. Assumes independent pairs
    and normal differences (or many pairs). The same numbers as
    statsmodels.stats.weightstats.ttost_paired. Undefined with fewer than two pairs or when
    every difference is equal.
    """
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.0)
    d = paired_differences(x_or_d, digits)
    make, undefined = opening("mean_difference", "paired_t", 0.0, bounds, alpha, d, paired=True)
    if undefined is not None:
        return undefined
    m, v, n = mean_var(d)
    m, v = float(m), float(v)
    if v == 0:
        return make(m, "every difference is equal: the SD of the differences is zero")
    se = math.sqrt(v / n)
    if not math.isfinite(se):
        return make(m, "the variance overflows double precision: no standard error")
    return location_t("mean_difference", "paired_t", m, se, n - 1, 0.0, bounds, alpha)


def d_z_tost(x_or_d, margin, alpha: float = 0.05, *, digits: int = 12) -> EquivalenceResult:
    """TOST of d_z = mean(d) / s_d by the noncentral t.

    Under normal differences t = d_z sqrt(n) is noncentral t with df = n - 1 and noncentrality
    delta_z sqrt(n), so
        p_lower = P(T >= t | ncp = low sqrt(n)),  p_upper = P(T <= t | ncp = high sqrt(n)),
    and the 1 - 2 alpha interval is d_z's noncentral-t interval (Steiger & Fouladi 1997), as in
    `paired.d_z`. p_difference is the paired t test. `x_or_d` as in
    `paired_mean_difference_tost`. Undefined with fewer than two pairs or when every difference
    is equal.
    """
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.0)
    d = paired_differences(x_or_d, digits)
    make = lambda reason: undefined_result("d_z", "noncentral_t", None, 0.0, bounds,  # noqa: E731
                                     alpha, reason)
    reason = input_problem(d, paired=True)
    if reason:
        return make(reason)
    m, v, n = mean_var(d)
    with np.errstate(divide="ignore", invalid="ignore"):
        value = float(m / np.sqrt(v))
    if not math.isfinite(value):
        return make("every difference is equal: the SD of the differences is zero")
    scale = math.sqrt(n)
    return noncentral_t_tost("d_z", value, value * scale, n - 1, scale, 1.0, bounds, alpha)
