"""Two one-sided rank tests (TOST) for location shifts and for PS_dep.

The decision rules, p-value names and verdicts are those of `auditor.equivalence`. Here each
one-sided test is a rank or sign test whose null value is moved to a bound:

* `hodges_lehmann_tost`: the two-sample shift Delta (A minus B). Under the shift model
  X_A ~ X_B + Delta, a - theta0 and b come from one distribution when Delta = theta0, so the
  Mann-Whitney test of a - theta0 against b tests Delta = theta0 (Lehmann 1975, sec. 2.6;
  Hodges & Lehmann 1963).
* `paired_hodges_lehmann_tost`: the centre of symmetry of the paired differences, by the
  Wilcoxon signed-rank test of d - theta0 (Wilcoxon 1945; Hollander & Wolfe 1999, sec. 3.3).
* `ps_dep_tost`: PS_dep = P(D > 0) + P(D = 0)/2 by the score (Wilson 1927) test of a proportion.

Direction is A relative to B (first relative to second condition). Swapping the groups negates
the shift and, with the bounds mirrored, swaps p_lower with p_upper and keeps the verdict:

>>> import numpy as np
>>> a = np.array([5.1, 6.3, 7.2, 6.4, 5.8, 6.9])
>>> b = np.array([4.8, 5.5, 6.7, 6.0, 5.2, 6.6])
>>> ab, ba = hodges_lehmann_tost(a, b, 1.5), hodges_lehmann_tost(b, a, 1.5)
>>> round(ab.estimate, 2), round(ba.estimate, 2), ab.verdict == ba.verdict
(0.45, -0.45, True)
>>> math.isclose(ab.p_lower, ba.p_upper), math.isclose(ab.p_upper, ba.p_lower)
(True, True)

Interval and verdict. The 1 - 2 alpha interval is the project's own interval for the index at
that level (`ranks.hodges_lehmann`, `paired.hodges_lehmann`, `paired.ps_dep`). How closely it
agrees with the tests:

* exact rank tests (small samples without ties): the interval [D_(k), D_(M+1-k)] is the set of
  theta0 that neither one-sided exact test rejects, so p_lower < alpha iff interval_low > low and
  p_upper < alpha iff interval_high < high, except at the boundary: when a bound equals one of
  the pairwise differences (Walsh averages), the shifted data hold a tie (a zero) and the test
  switches to the normal approximation, and when P(U <= k - 1) equals alpha exactly the
  interval excludes the bound while p = alpha does not reject;
* normal approximation: the project's order statistic k = floor(M/2 - z sd) is one below the
  inversion of the uncorrected normal test (which would be floor(M/2 - z sd) + 1), so the
  interval can be one order statistic wider than the test: an interval that excludes a bound
  implies the test rejects, but a bound lying between D_(k) and D_(k+1) may be rejected by
  the test although the interval contains it. With ties the variance of the interval is that of
  the original data while each test uses the ties of its shifted data, a further difference of
  the order of the tie correction;
* PS_dep: the Wilson interval is the exact inversion of the score test used here (same N, same
  variance theta0 (1 - theta0) / N), so the agreement holds up to rounding.

The verdict is always taken from the p-values (`equivalence.verdict_of`).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special, stats

from auditor import paired, ranks
from auditor.equivalence import (EquivalenceResult, assemble, check_alpha, check_bounds,
                                 data_vector, opening, paired_differences)

EXACT = "exact"
NORMAL = "normal_approximation"


# ------------------------------------------------------------------ Mann-Whitney tails


def mann_whitney_is_exact(na: int, nb: int, tie_correction: float) -> bool:
    """The exact-vs-normal rule of `ranks.shift_interval_order`: the exact null distribution
    when n_A n_B <= ranks.EXACT_MAX_PAIRS and no value of the pooled sample is tied."""
    return na * nb <= ranks.EXACT_MAX_PAIRS and tie_correction == 1.0


def mann_whitney_tails(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float, str]:
    """(P(U >= u), P(U <= u), u, method) for U = #(x > y) + #(x = y)/2 under H0: x and y come
    from one distribution.

    Exact: the untied null distribution (`ranks.mann_whitney_null_pmf`, Mann & Whitney 1947).
    Normal: z = (u - n_x n_y / 2) / sigma_U with the tie-corrected
    sigma_U^2 = n_x n_y / 12 [(N + 1) - sum(t^3 - t) / (N (N - 1))] (Lehmann 1975, eq. 1.52),
    no continuity correction, P(U >= u) = Phi(-z) and P(U <= u) = Phi(z). Each tail is summed
    or evaluated directly, never as 1 minus the other. Requires sigma_U > 0 (not every pooled
    value tied), which the callers ensure."""
    na, nb = x.size, y.size
    pooled = np.concatenate([x, y])
    u = float(ranks.superiority_count_values(x, y))
    t = ranks.tie_sizes(pooled).astype(float)
    tie_term = float(np.sum(t * t - 1.0))  # sum over tie blocks of t^3 - t
    if mann_whitney_is_exact(na, nb, float(stats.tiecorrect(pooled))):
        pmf = ranks.mann_whitney_null_pmf(na, nb)
        k = int(round(u))
        return float(np.sum(pmf[k:])), float(np.sum(pmf[:k + 1])), u, EXACT
    sd = math.sqrt(float(ranks.mann_whitney_variance(na, nb, tie_term)))
    z = (u - na * nb / 2.0) / sd
    return float(special.ndtr(-z)), float(special.ndtr(z)), u, NORMAL


def two_sided(upper: float, lower: float) -> float:
    """Two-sided p from the two tails: min(1, 2 min(upper, lower)) (for exact tails, as scipy's
    mannwhitneyu and wilcoxon do), which is 2 Phi(-|z|) for the normal approximation."""
    return min(1.0, 2.0 * min(upper, lower))


def _method_note(what: str, methods: dict[str, str]) -> str:
    parts = [f"{name}: {m.replace('_', ' ')}" for name, m in methods.items()]
    return f"{what} ({'; '.join(parts)})"


# ------------------------------------------------------------------ two independent groups


SNAP = 1e-10  # relative distance below which a_i - theta and b_j count as tied


def shifted_against(a: np.ndarray, b: np.ndarray, theta: float) -> np.ndarray:
    """a - theta, with each value that lies within SNAP (relative to the largest magnitude of
    the data and theta) of a value of b set to that value, so that a difference a_i - b_j equal
    to the bound in decimal (0.4 - (-0.5) against 0.9) is an exact tie whichever group comes
    first: the test reads |fl(a_i - b_j) - theta|, which swapping the groups and negating theta
    leaves exactly as it was."""
    x = a - theta
    if theta == 0.0 or b.size == 0:
        return x
    sb = np.sort(b)
    tol = SNAP * max(float(np.max(np.abs(a))), float(np.max(np.abs(b))), abs(theta))
    pos = np.searchsorted(sb, x)
    for side in (np.clip(pos - 1, 0, sb.size - 1), np.clip(pos, 0, sb.size - 1)):
        near = np.abs((a - sb[side]) - theta) <= tol
        x = np.where(near, sb[side], x)
    return x


def hodges_lehmann_tost(a, b, margin, alpha: float = 0.05) -> EquivalenceResult:
    """TOST of the Hodges-Lehmann shift Delta (A minus B) by shifted Mann-Whitney tests.

    With U(theta) = #(a_i - theta > b_j) + #(a_i - theta = b_j)/2, the Mann-Whitney count of
    a - theta against b (Lehmann 1975, sec. 2.6):
        p_lower          = P0(U >= U(low))             H0: Delta <= low
        p_upper          = P0(U <= U(high))            H0: Delta >= high
        p_minimal_effect = min(P0(U >= U(high)), P0(U <= U(low)))   H0: low <= Delta <= high
        p_difference     = two-sided Mann-Whitney test of Delta = 0
    P0 the null distribution: exact when n_A n_B <= ranks.EXACT_MAX_PAIRS and the shifted pooled
    sample (a - theta, b) has no ties, else the normal approximation with tie correction and no
    continuity correction (`mann_whitney_tails`); the choice is made at each bound separately.
    These are scipy.stats.mannwhitneyu(a - theta, b, alternative='greater' / 'less',
    method='exact' / 'asymptotic', use_continuity=False), with a - theta snapped onto the values
    of b it equals up to rounding (`shifted_against`), so that the tests do not depend on which
    group is named first.

    The estimate is the median of all a_i - b_j (Hodges & Lehmann 1963) and the interval
    `ranks.hodges_lehmann(a, b, 1 - 2 alpha)`; see the module docstring for how exactly it agrees
    with the tests. Bounds (-m, m) from a margin m, or an explicit pair low < 0 < high, in the
    outcome's units. Assumes independent observations and, for the tests to be about the shift,
    two distributions of the same shape (a pure location shift). `statistic` is U_A of the test
    at 0; `df` is not applicable (NaN).

    Undefined when a group has fewer than two values or both groups are constant.
    """
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.0)
    a, b = data_vector(a, "group a"), data_vector(b, "group b")
    make, undefined = opening("hodges_lehmann", "mann_whitney_shift", 0.0, bounds, alpha, a, b)
    if undefined is not None:
        return undefined
    shift = ranks.hodges_lehmann(a, b, 1.0 - 2.0 * alpha)
    if np.ptp(a) == 0 and np.ptp(b) == 0:
        return make(shift.value, "both groups are constant: the rank tests only see whether"
                                 " the two values differ, not by how much")
    return _shift_tests("mann_whitney_shift", lambda x: mann_whitney_tails(x, b),
                        lambda bound: shifted_against(a, b, bound), a, shift, bounds, alpha)


def _shift_tests(method: str, tails, shifted, data, shift, bounds, alpha) -> EquivalenceResult:
    """The two one-sided rank tests of a Hodges-Lehmann shift at its bounds and the two-sided
    test at 0, assembled: `tails(x)` gives (upper p, lower p, statistic, method) of the rank
    test on data x, `shifted(bound)` the data moved by a bound, `data` the data as they are."""
    low, high = bounds
    up_low, down_low, _, m_low = tails(shifted(low))
    up_high, down_high, _, m_high = tails(shifted(high))
    up0, down0, statistic0, m0 = tails(data)
    iv = shift.interval
    notes = (_method_note("null distributions", {"low": m_low, "high": m_high, "zero": m0}),
             *shift.notes)
    return assemble("hodges_lehmann", method, shift.value, 0.0, bounds, alpha, up_low,
                    down_high, min(up_high, down_low), two_sided(up0, down0), (iv.low, iv.high),
                    statistic0, math.nan, notes)


# ------------------------------------------------------------------ paired data: signed ranks


def signed_rank_is_exact(n_nonzero: int, n_total: int, tie_term: float) -> bool:
    """The rule of `paired.hodges_lehmann`'s interval: Wilcoxon's exact null distribution when
    no difference is zero, no |d| is tied and n <= paired.EXACT_MAX_N."""
    return n_nonzero == n_total and tie_term == 0.0 and n_total <= paired.EXACT_MAX_N


def signed_rank_tails(e: np.ndarray) -> tuple[float, float, float, str]:
    """(P(T+ >= t), P(T+ <= t), t, method) for the signed-rank sum T+ of the differences e
    (zeros dropped, mid-ranks of |e|; Wilcoxon 1945) under H0: e symmetric about 0.

    Exact: Wilcoxon's untied null distribution (`paired.signed_rank_null_pmf`). Normal:
    z = (t - n(n+1)/4) / sqrt(n(n+1)(2n+1)/24 - sum(t^3 - t)/48), n the non-zero count, no
    continuity correction (as `paired.wilcoxon_z_values`). Requires n >= 1."""
    r_plus, _, tie_term, n = (float(np.asarray(v)) for v in paired.signed_rank_parts(e))
    n = int(n)
    if signed_rank_is_exact(n, e.size, tie_term):
        pmf = paired.signed_rank_null_pmf(n)
        k = int(round(r_plus))
        return float(np.sum(pmf[k:])), float(np.sum(pmf[:k + 1])), r_plus, EXACT
    var = n * (n + 1) * (2 * n + 1) / 24.0 - tie_term / 48.0
    z = (r_plus - n * (n + 1) / 4.0) / math.sqrt(var)
    return float(special.ndtr(-z)), float(special.ndtr(z)), r_plus, NORMAL


def _shifted(d: np.ndarray, theta: float, digits: int) -> np.ndarray:
    """d - theta rounded to `digits` decimal places (`paired.differences`), so that a difference
    equal to the bound in decimal gives an exact zero and equal distances give exact ties."""
    return paired.differences(np.column_stack([d, np.full(d.size, theta)]), digits)


def paired_hodges_lehmann_tost(x_or_d, margin, alpha: float = 0.05, *,
                               digits: int = 12) -> EquivalenceResult:
    """TOST of the centre of symmetry of paired differences by shifted signed-rank tests.

    With T+(theta) the Wilcoxon signed-rank sum of d - theta (zeros dropped, mid-ranks):
        p_lower          = P0(T+ >= T+(low))            H0: centre <= low
        p_upper          = P0(T+ <= T+(high))           H0: centre >= high
        p_minimal_effect = min(P0(T+ >= T+(high)), P0(T+ <= T+(low)))  H0: low <= centre <= high
        p_difference     = two-sided signed-rank test of centre = 0
    P0 exact (Wilcoxon's distribution) when d - theta has no zeros, no tied |d - theta| and at
    most paired.EXACT_MAX_N values, else the normal approximation with tie correction and no
    continuity correction, chosen at each bound separately: the rule of the project's paired
    Hodges-Lehmann interval. These are scipy.stats.wilcoxon(d - theta, zero_method='wilcox',
    correction=False, alternative='greater' / 'less', method='exact' / 'asymptotic'). The
    project's own signed-rank test (`significance.wilcoxon_signed_rank`) is exact also with
    ties (conditional on the mid-ranks); here the interval's rule is kept instead.

    `x_or_d` is an (n, 2) array (d = first - second) or a 1-D array of differences; d and each
    d - theta are rounded to `digits` decimal places (`paired.differences`). The estimate is the
    median of the Walsh averages (Hodges & Lehmann 1963) and the interval
    `paired.hodges_lehmann` at 1 - 2 alpha; see the module docstring for the agreement.
    Assumes independent pairs with differences symmetric about their centre. `statistic` is T+
    of the test at 0; `df` is not applicable (NaN).

    Undefined with fewer than two pairs or when every difference is equal.
    """
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.0)
    d = paired_differences(x_or_d, digits)
    make, undefined = opening("hodges_lehmann", "signed_rank_shift", 0.0, bounds,
                              alpha, d, paired=True)
    if undefined is not None:
        return undefined
    d = _shifted(d, 0.0, digits)
    shift = paired.hodges_lehmann(d, np.zeros(d.size), 1.0 - 2.0 * alpha, digits)
    if np.ptp(d) == 0:
        return make(shift.value, "every difference is equal: the signed ranks carry no"
                                 " information about the size of the shift")
    return _shift_tests("signed_rank_shift", signed_rank_tails,
                        lambda bound: _shifted(d, bound, digits), d, shift, bounds, alpha)


# ------------------------------------------------------------------ paired data: PS_dep


def score_z(p_hat: float, theta: float, n: int) -> float:
    """z = (p_hat - theta) / sqrt(theta (1 - theta) / N), the score statistic of a proportion
    (Wilson 1927), for 0 < theta < 1."""
    return (p_hat - theta) / math.sqrt(theta * (1.0 - theta) / n)


def ps_dep_tost(x_or_d, margin, alpha: float = 0.05, *, digits: int = 12) -> EquivalenceResult:
    """TOST of PS_dep = P(D > 0) + P(D = 0)/2 by score tests of a proportion.

    PS_dep-hat = (N+ + N0/2) / N as in `paired.ps_dep`: N is the number of pairs, zero
    differences included and counted one half each (Grissom & Kim 2012, sec. 5.6). With
    z(theta) = (PS_dep-hat - theta) / sqrt(theta (1 - theta) / N):
        p_lower          = Phi(-z(low))                   H0: PS_dep <= low
        p_upper          = Phi(z(high))                   H0: PS_dep >= high
        p_minimal_effect = min(Phi(-z(high)), Phi(z(low)))  H0: low <= PS_dep <= high
        p_difference     = exact two-sided sign test of the N+ + N- non-zero differences
                           (scipy.stats.binomtest(N+, N+ + N-, 1/2)), zeros dropped.
    The interval is the Wilson score interval at level 1 - 2 alpha, c = z_(1 - alpha)
    (`paired.ps_dep` at 1 - 2 alpha; Wilson 1927, Newcombe 1998 method 3), which is the set of
    theta with |z(theta)| <= c: it excludes a bound exactly when that one-sided test rejects.

    Approximations: the score variance theta (1 - theta) / N is binomial; with zero differences
    the trinomial variance (theta (1 - theta) - P(D = 0)/4) / N is smaller, so the tests are
    then conservative. The score test and the sign test use different counts (N with zeros at
    one half, and N+ + N- without them), so at 1/2 they need not agree.

    Bounds 1/2 -/+ m from a margin m < 1/2, or an explicit pair with 0 < low < 1/2 < high < 1
    (the score variance vanishes at 0 and 1). Assumes independent pairs. `statistic` is N+, the
    sign test's count; `df` is not applicable (NaN).

    Undefined with fewer than two pairs or when every difference is zero.
    """
    alpha = check_alpha(alpha)
    bounds = check_bounds(margin, 0.5, 0.0, 1.0)
    if not (0.0 < bounds[0] and bounds[1] < 1.0):
        raise ValueError(f"margin={margin!r}: the bounds ({bounds[0]:g}, {bounds[1]:g}) reach 0"
                         " or 1, where the score test of a proportion has no variance; keep them"
                         " strictly inside (0, 1), for example margin=0.2")
    d = paired_differences(x_or_d, digits)
    make, undefined = opening("ps_dep", "score_wilson", 0.5, bounds, alpha, d, paired=True)
    if undefined is not None:
        return undefined
    est = paired.ps_dep(d, np.zeros(d.size), 1.0 - 2.0 * alpha, digits)
    pos, zero, n = est.details["n_positive"], est.details["n_zero"], est.details["n"]
    neg = n - pos - zero
    if pos + neg == 0:
        return make(est.value, "every difference is zero: the sign test has no signs")
    low, high = bounds
    p_hat = est.value
    z_low, z_high = score_z(p_hat, low, n), score_z(p_hat, high, n)
    p_lower, p_upper = special.ndtr(-z_low), special.ndtr(z_high)
    p_met = min(special.ndtr(-z_high), special.ndtr(z_low))
    p_diff = stats.binomtest(pos, pos + neg, 0.5).pvalue
    iv = est.interval
    notes = (f"N = {n} pairs ({zero} zero differences counted one half each); sign test on"
             f" {pos + neg} non-zero differences", *est.notes)
    return assemble("ps_dep", "score_wilson", p_hat, 0.5, bounds, alpha, p_lower, p_upper,
                    p_met, p_diff, (iv.low, iv.high), pos, math.nan, notes)


__all__ = ["hodges_lehmann_tost", "paired_hodges_lehmann_tost", "ps_dep_tost",
           "mann_whitney_tails", "signed_rank_tails"]
