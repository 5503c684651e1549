"""Equivalence and minimal-effect tests of the omnibus effect sizes of k groups or conditions.

For eta^2, omega^2, epsilon^2_H and Kendall's W the no-effect value 0 is also the smallest value
the population index can take, so a question of size has one side only (Campbell & Lakens 2021,
British Journal of Mathematical and Statistical Psychology 74, 64-89; from memory). With a
margin m > 0 on the index's scale, S the omnibus statistic (the one-way ANOVA F, the
Kruskal-Wallis H or the Friedman chi^2_F) and lambda_m the noncentrality at which the population
index equals m,

  p_upper           = P(S <= s_obs | lambda_m):  equivalence,     H0: index >= m vs index < m
  p_minimal_effect  = P(S >= s_obs | lambda_m):  minimal effect,  H0: index <= m vs index > m
  p_difference      = P(S >= s_obs | lambda = 0): the ordinary omnibus test of no effect

and p_tost = p_upper. lambda_m comes from the mapping `auditor.noncentral` uses for the
intervals, so that tests and intervals describe one parameter:

  eta^2, omega^2   lambda_m = N m / (1 - m)   (population eta^2 = lambda / (lambda + N))
  epsilon^2_H      lambda_m = m (N - 1)       (population epsilon^2_H = lambda / (N - 1))
  Kendall's W      lambda_m = m n (k - 1)     (population W = lambda / (n (k - 1)))

Both p-values at lambda_m are the two tails of one distribution function,
`noncentral.noncentral_f_tails` / `noncentral.noncentral_chi2_tails`, each read from its own
tail rather than as 1 minus the other (those functions switch to the library's upper tail
wherever the lower one is within 1e-6 of 1).

How the result fills `equivalence.EquivalenceResult`: null_value = margin_low = 0 and
margin_high = m. There is no lower test, and p_lower is None. It is not 0.0 because the lower
bound coincides with the no-effect value: the one-sided test "H0: index <= 0" would be the
ordinary test of no effect (p_difference). A p_lower of 0 would read as a lower test that
rejects decisively, even for data showing no effect at all. The equivalence hypothesis
0 <= index < m already includes the lower bound, so the upper test alone decides it. So this
module assembles its results itself (`one_sided_result`): it calls `equivalence.verdict_of`
with p_tost = p_upper, instead of `equivalence.assemble`, which requires a finite p_lower.

The interval is the 1 - 2 alpha noncentral interval of `auditor.noncentral` (Steiger 2004):
lambda_high solves P(S <= s_obs | lambda) = alpha and lambda_low solves
P(S > s_obs | lambda) = alpha, each 0 when lambda = 0 does not reach its target. The tails are
monotone in lambda, so (up to the root-finder's relative 1e-13 in lambda)

  p_upper < alpha            iff  interval_high < m
  p_minimal_effect < alpha   iff  interval_low > m
  p_difference < alpha       iff  interval_low > 0

and the four verdicts of `equivalence.VERDICTS` can be read off the interval: "at_least_margin"
when it lies above m, "smaller_than_margin" when it lies inside (0, m), "equivalent" when it is
[0, high] with high < m, and "undecided" when it contains m. For epsilon^2_H and W the upper
limit is clipped at 1, the index's maximum. This moves no limit across a margin m <= 1: an
unclipped limit above 1 >= m means p_upper > alpha, and the clipped limit 1 is not below m
either. The lower limit would be clipped only if the statistic exceeded its largest possible
value, which data cannot do.

Undefined cases are those of `auditor.noncentral` (a group with a single value, every value
equal, no variation within any group so that F is infinite, every value tied, a single
participant, every participant tied across the conditions). They give a result with `reason`
set and the p-values, interval and verdict None. The sample estimate is kept when it is itself
defined. Bad arguments raise ValueError: a margin that is not a number in (0, 1) for eta^2 and
omega^2 or in (0, 1] for epsilon^2_H and W, alpha outside (0, 1/2), fewer than two groups,
empty groups, non-finite values.

The results do not depend on the order of the groups (or conditions). Reversing them leaves
the p-values and the verdict as they were:

>>> import numpy as np
>>> g = [np.array([4.1, 5.0, 5.9, 6.3, 4.8]), np.array([5.2, 6.1, 6.8, 7.4, 5.9]),
...      np.array([6.0, 7.1, 7.7, 8.2, 6.6])]
>>> a, b = eta_squared_tost(g, 0.3), eta_squared_tost(g[::-1], 0.3)
>>> a.verdict == b.verdict, math.isclose(a.p_upper, b.p_upper, rel_tol=1e-9)
(True, True)
>>> a.p_lower is None, a.p_tost == a.p_upper, (a.margin_low, a.margin_high)
(True, True, (0.0, 0.3))
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from numbers import Real

import numpy as np

from auditor import noncentral as nc
from auditor.equivalence import EquivalenceResult, check_alpha, undefined_result, verdict_of
from auditor.parametric import Estimate

NULL = 0.0  # the no-effect value, and the smallest value, of every index here


# ------------------------------------------------------------------ argument checks


def check_margin(margin, index: str, one_allowed: bool) -> float:
    """The margin m as a float: a finite number with 0 < m < 1 (eta^2, omega^2: m = 1 would put
    lambda_m at infinity) or 0 < m <= 1 (epsilon^2_H, W: lambda_m = m times a finite scale).
    A pair of bounds is refused, because the lower bound is fixed at 0."""
    top = "0 < margin <= 1" if one_allowed else "0 < margin < 1"
    if isinstance(margin, np.ndarray) and margin.ndim == 0:
        margin = margin.item()
    if isinstance(margin, (tuple, list, np.ndarray)):
        raise ValueError(f"margin={margin!r}: {index} is tested against the single bound m"
                         f" (the lower bound is its smallest value, 0); give one number with"
                         f" {top}, for example margin=0.06")
    if isinstance(margin, bool) or not isinstance(margin, Real):
        raise ValueError(f"margin={margin!r}: the margin must be a number with {top} on the"
                         f" scale of {index}; give, for example, margin=0.06")
    m = float(margin)
    if not (math.isfinite(m) and 0.0 < m and (m <= 1.0 if one_allowed else m < 1.0)):
        reach = ("1 is its largest value" if one_allowed
                 else "at 1 the noncentrality would be infinite")
        raise ValueError(f"margin={margin!r}: the margin of {index} must satisfy {top} ({reach});"
                         f" give the smallest value of {index} that would matter, for example"
                         f" margin=0.06")
    return m


# ------------------------------------------------------------------ the one-sided assembly


def one_sided_result(index: str, method: str, estimate: float | None, margin: float,
                     alpha: float, p_upper: float, p_minimal_effect: float, p_difference: float,
                     interval: tuple[float, float] | None, statistic: float, df: float,
                     notes: tuple[str, ...] = ()) -> EquivalenceResult:
    """An `EquivalenceResult` for bounds (0, margin) with no lower test: p_lower None,
    p_tost = p_upper, and the verdict `verdict_of(p_upper, p_minimal_effect, p_difference,
    alpha)`. The p-values must be finite (else an undefined result with a reason, as
    `equivalence.assemble` does); they are clamped to [0, 1]."""
    bounds = (NULL, margin)
    ps = (p_upper, p_minimal_effect, p_difference)
    if not all(math.isfinite(p) for p in ps):
        return undefined_result(index, method, estimate, NULL, bounds, alpha,
                                "a p-value could not be computed in double precision", notes)
    p_upper, p_met, p_diff = (min(1.0, max(0.0, float(p))) for p in ps)
    low, high = (None, None) if interval is None else (float(interval[0]), float(interval[1]))
    est = None if estimate is None or not math.isfinite(estimate) else float(estimate)
    return EquivalenceResult(index, method, est, NULL, NULL, margin, alpha, None, p_upper,
                             p_upper, p_met, p_diff, low, high, 1.0 - 2.0 * alpha,
                             float(statistic), float(df),
                             verdict_of(p_upper, p_met, p_diff, alpha), None, tuple(notes))


def _from_interval(index: str, method: str, found: Estimate, margin: float, alpha: float,
                   tails: Callable[[float], tuple[float, float]], lam_m: float, df: float,
                   notes: tuple[str, ...] = ()) -> EquivalenceResult:
    """The tests at lambda_m beside the 1 - 2 alpha interval `found` of `auditor.noncentral`.
    `tails(lambda)` = (P(S <= s_obs | lambda), P(S > s_obs | lambda))."""
    if "statistic" not in found.details:  # the statistic itself is undefined
        return undefined_result(index, method, found.value, NULL, (NULL, margin), alpha,
                                found.reason, notes)
    p_upper, p_met = tails(lam_m)
    p_diff = tails(0.0)[1]
    notes = tuple(notes) + tuple(found.notes)
    if found.interval is None:  # the statistic is defined, its inversion failed
        notes += (f"no interval: {found.reason}",)
        interval = None
    else:
        interval = (found.interval.low, found.interval.high)
        if found.interval.note:
            notes += (found.interval.note,)
    if lam_m > nc.LIBRARY_MAX_NCP:
        notes += (f"lambda_m = {lam_m:.6g} is above {nc.LIBRARY_MAX_NCP:g}: the tails at the"
                  " margin come from the large-noncentrality forms of auditor.noncentral",)
    return one_sided_result(index, method, found.value, margin, alpha, p_upper, p_met, p_diff,
                            interval, found.details["statistic"], df, notes)


# ------------------------------------------------------------------ one-way ANOVA: eta^2, omega^2


def _anova_tost(index: str, interval_fn, groups, margin, alpha) -> EquivalenceResult:
    alpha = check_alpha(alpha)
    m = check_margin(margin, index, one_allowed=False)
    found = interval_fn(groups, 1.0 - 2.0 * alpha)  # checks the groups (ValueError)
    n = sum(np.asarray(g).size for g in groups)
    k = len(groups)
    df1, df2 = k - 1, n - k
    lam_m = n * m / (1.0 - m)
    notes = (f"F on df1 = {df1} and df2 = {df2} degrees of freedom (df is df1);"
             f" noncentrality at the margin lambda_m = N m / (1 - m) = {lam_m:.6g}",)
    f_obs = found.details.get("statistic")
    return _from_interval(index, nc.F_METHOD, found, m, alpha,
                          lambda lam: nc.noncentral_f_tails(f_obs, df1, df2, lam, careful=True),
                          lam_m, df1,
                          notes)


def eta_squared_tost(groups: Sequence, margin, alpha: float = 0.05) -> EquivalenceResult:
    """Equivalence and minimal-effect tests of eta^2 at the margin m by the noncentral F.

    Model (as `noncentral.eta_squared_interval`): independent groups, normal with a common
    variance. The one-way ANOVA F (df1 = k - 1, df2 = N - k) is noncentral F with
    lambda = N f^2, and the population eta^2 = lambda / (lambda + N) (Steiger 2004), so the
    index equals m at lambda_m = N m / (1 - m), and

        p_upper = P(F <= F_obs | df1, df2, lambda_m)          (H0: eta^2 >= m),
        p_minimal_effect = P(F >= F_obs | df1, df2, lambda_m)  (H0: eta^2 <= m),
        p_difference = P(F >= F_obs | df1, df2, 0)            (the ANOVA F test),

    one-sided because eta^2 cannot fall below 0 (Campbell & Lakens 2021; from memory). The tests
    are exact under the model. `estimate` is the sample eta^2 = SS_between / SS_total
    (`kgroups.eta_squared`), `statistic` the F and `df` df1 (df2 is in a note). The interval is
    `noncentral.eta_squared_interval` at level 1 - 2 alpha, and it agrees with the tests (module
    docstring). `groups` is a sequence of 1-D arrays, one per group. The margin must satisfy
    0 < m < 1. Undefined when a group has a single value, every value is equal, or there is no
    variation within any group (F infinite).
    """
    return _anova_tost("eta_squared", nc.eta_squared_interval, groups, margin, alpha)


def omega_squared_tost(groups: Sequence, margin, alpha: float = 0.05) -> EquivalenceResult:
    """Equivalence and minimal-effect tests of omega^2 at the margin m by the noncentral F.

    In one-way fixed-effects ANOVA the population omega^2 is the same parameter as the
    population eta^2, sigma_effect^2 / (sigma_effect^2 + sigma^2) = lambda / (lambda + N)
    (Hays 1963; Steiger 2004, see `noncentral.omega_squared_interval`). The sample omega^2 is
    the less biased estimator of it. So the tests, p-values, interval and verdict are those of
    `eta_squared_tost` at the same margin; only `estimate` differs: the sample
    omega^2 = (SS_between - (k - 1) MS_within) / (SS_total + MS_within) (`kgroups.omega_squared`),
    which can be negative, below the interval's lower limit 0 (a note then says so). Same
    model, arguments and undefined cases as `eta_squared_tost`.
    """
    return _anova_tost("omega_squared", nc.omega_squared_interval, groups, margin, alpha)


# ------------------------------------------------------------------ rank statistics: chi^2


def epsilon_squared_h_tost(groups: Sequence, margin, alpha: float = 0.05) -> EquivalenceResult:
    """Equivalence and minimal-effect tests of epsilon^2_H = H / (N - 1) at the margin m by the
    noncentral chi-squared approximation of the Kruskal-Wallis H.

    As in `noncentral.epsilon_squared_h_interval`, the tie-corrected H is taken as noncentral
    chi-squared on df = k - 1 with the population epsilon^2_H = lambda / (N - 1). So the index
    equals m at lambda_m = m (N - 1), and

        p_upper = P(X <= H | k - 1, lambda_m),  p_minimal_effect = P(X >= H | k - 1, lambda_m),
        p_difference = P(X >= H | k - 1, 0)  (the Kruskal-Wallis test, chi-squared form).

    An approximation, for large samples and alternatives near the null (Andrews 1954; from
    memory). Away from the null the variance of H is below the noncentral chi-squared's, which
    makes the tests conservative. In the simulation reported in `auditor.noncentral` (normal
    populations one half SD apart, k = 3, n = 20 to 200 per group), Var(H) was about 0.7 of
    2 (df + 2 lambda) and the 95% interval covered 97-98% instead of 95%, so each one-sided
    test here rejects less often than alpha near the margin. No guarantee is known for small
    groups or heavy ties. `estimate` is the sample epsilon^2_H (`kgroups.epsilon_squared_h`),
    `statistic` H and `df` k - 1. The interval is `noncentral.epsilon_squared_h_interval` at
    1 - 2 alpha (upper limit clipped at 1). It agrees with the tests (module docstring). The
    margin must satisfy 0 < m <= 1. Undefined when a group has a single value or every value
    is tied.
    """
    alpha = check_alpha(alpha)
    m = check_margin(margin, "epsilon_squared_h", one_allowed=True)
    found = nc.epsilon_squared_h_interval(groups, 1.0 - 2.0 * alpha)  # checks the groups
    n = sum(np.asarray(g).size for g in groups)
    k = len(groups)
    lam_m = m * (n - 1.0)
    h = found.details.get("statistic")
    notes = (f"noncentral chi-squared approximation; lambda_m = m (N - 1) = {lam_m:.6g}",)
    return _from_interval("epsilon_squared_h", nc.CHI2_METHOD, found, m, alpha,
                          lambda lam: nc.noncentral_chi2_tails(h, k - 1, lam, careful=True),
                          lam_m, k - 1,
                          notes)


def kendall_w_tost(x, margin, alpha: float = 0.05) -> EquivalenceResult:
    """Equivalence and minimal-effect tests of Kendall's W = chi^2_F / (n (k - 1)) at the margin
    m by the noncentral chi-squared approximation of the Friedman statistic.

    x has one row per participant (n rows) and one column per condition (k columns). As in
    `noncentral.kendall_w_interval`, the tie-corrected chi^2_F is taken as noncentral
    chi-squared on df = k - 1 with the population W = lambda / (n (k - 1)), so the index equals m
    at lambda_m = m n (k - 1), and

        p_upper = P(X <= chi^2_F | k - 1, lambda_m),
        p_minimal_effect = P(X >= chi^2_F | k - 1, lambda_m),
        p_difference = P(X >= chi^2_F | k - 1, 0)  (the Friedman test, chi-squared form).

    A large-sample approximation, conservative in the same way as `epsilon_squared_h_tost`: in
    the simulation reported in `auditor.noncentral` (conditions one half SD apart, n = 20 to
    200) the 95% interval covered 97%. `estimate` is the sample W (`kgroups.kendall_w`),
    `statistic` chi^2_F and `df` k - 1. The interval is `noncentral.kendall_w_interval` at
    1 - 2 alpha (upper limit clipped at 1). The margin must satisfy 0 < m <= 1. Undefined with
    a single participant or when every participant is tied across the conditions.
    """
    alpha = check_alpha(alpha)
    m = check_margin(margin, "kendall_w", one_allowed=True)
    found = nc.kendall_w_interval(x, 1.0 - 2.0 * alpha)  # checks the array
    n, k = np.shape(x)
    lam_m = m * n * (k - 1.0)
    chi2 = found.details.get("statistic")
    notes = (f"noncentral chi-squared approximation; lambda_m = m n (k - 1) = {lam_m:.6g}",)
    return _from_interval("kendall_w", nc.CHI2_METHOD, found, m, alpha,
                          lambda lam: nc.noncentral_chi2_tails(chi2, k - 1, lam, careful=True),
                          lam_m, k - 1,
                          notes)
