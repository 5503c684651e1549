"""Reference checks: the rank-based two one-sided tests of `auditor.equivalence_ranks` against
computations outside the project, and their properties.

References:
  * two-sample shift: scipy.stats.mannwhitneyu(a - theta, b, alternative='greater' / 'less',
    method='exact' or 'asymptotic', use_continuity=False) on the shifted data, and the
    two-sided test at 0;
  * paired shift: scipy.stats.wilcoxon(d - theta, zero_method='wilcox', correction=False,
    alternative='greater' / 'less', method='exact' or 'asymptotic');
  * PS_dep: the score statistic written out here with scipy.stats.norm, and the exact sign test
    scipy.stats.binomtest(N+, N+ + N-, 0.5).
The exact-vs-normal rule is restated in this file from its definition (n_A n_B <= 2500 and no
tied pooled value; n <= 50 with no zero and no tied |d|), not read from the module.
Intervals are compared with the project's own interval functions called at 1 - 2 alpha, and
the Wilson interval also with statsmodels.stats.proportion.proportion_confint(method='wilson').
No worked example from a publication is used: none is recalled reliably enough to quote.

Data are seeded draws: normal, skewed (lognormal), whole-number ratings 1-7 (heavy ties), six
values per group (the exact path) and differences all of one sign, plus a short paired sample
holding a zero and several of the bounds (so a shifted sample has a zero).

Tolerance: 1e-10 (relative, with 1e-13 absolute) for the p-values, which both sides compute
from the same null distribution by different code.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

from auditor import equivalence_ranks as er
from auditor import paired, ranks
from auditor.equivalence_ranks import (hodges_lehmann_tost, paired_hodges_lehmann_tost,
                                       ps_dep_tost)

ALPHA = 0.05
STEADY = settings(derandomize=True, deadline=None, max_examples=60, database=None)


def close(x, y):
    return math.isclose(x, y, rel_tol=1e-10, abs_tol=1e-13)


# ------------------------------------------------------------------ data


def two_group_sets():
    rng = np.random.default_rng(20261204)
    return {
        "normal_exact": (rng.normal(10.4, 2.0, 25), rng.normal(10.0, 2.0, 30)),
        "normal_large": (rng.normal(0.3, 1.0, 70), rng.normal(0.0, 1.0, 60)),
        "skewed": (rng.lognormal(0.2, 0.7, 20), rng.lognormal(0.0, 0.7, 35)),
        "ratings": (rng.integers(1, 8, 40).astype(float), rng.integers(2, 8, 45).astype(float)),
        "small_n6": (rng.normal(1.0, 1.0, 6), rng.normal(0.0, 1.0, 6)),
        "separated": (rng.normal(6.0, 0.5, 12), rng.normal(0.0, 0.5, 10)),
    }


def paired_sets():
    rng = np.random.default_rng(4120)
    return {
        "normal_exact": rng.normal(0.2, 1.0, 30),
        "normal_large": rng.normal(0.1, 1.0, 90),
        "skewed": rng.lognormal(0.0, 0.8, 40) - 1.0,
        "ratings": (rng.integers(1, 8, 60) - rng.integers(1, 8, 60)).astype(float),
        "small_n6": rng.normal(0.5, 1.0, 6),
        "one_signed": rng.lognormal(0.0, 0.5, 15),
        # bounds 0.25, 0.5, 1.5 and 1.9 of MARGINS hit a difference: zeros after the shift
        "bound_hit": np.array([0.0, 0.5, 1.5, -0.25, 2.0, 0.8, 1.3, 3.1, -1.1, 0.45, 2.7, 1.9]),
    }


TWO = two_group_sets()
PAIRED = paired_sets()
MARGINS = (0.25, 0.5, 1.0, 1.5, 2.5, (-0.7, 1.9), (-3.0, 0.4))
PS_MARGINS = (0.05, 0.1, 0.2, 0.3, 0.45, (0.2, 0.6), (0.45, 0.95))


def bounds_of(margin, null=0.0):
    return (null - margin, null + margin) if np.isscalar(margin) else margin


# ------------------------------------------------------------------ independent references


def mwu_method(x, y):
    pooled = np.concatenate([x, y])
    untied = np.unique(pooled).size == pooled.size
    return "exact" if x.size * y.size <= 2500 and untied else "asymptotic"


def mwu_p(x, y, alternative):
    return stats.mannwhitneyu(x, y, alternative=alternative, method=mwu_method(x, y),
                              use_continuity=False).pvalue


def wilcoxon_method(e):
    nonzero = e[e != 0]
    untied = np.unique(np.abs(nonzero)).size == nonzero.size
    return "exact" if e.size <= 50 and untied and nonzero.size == e.size else "asymptotic"


def wilcoxon_p(e, alternative):
    return stats.wilcoxon(e, zero_method="wilcox", correction=False, alternative=alternative,
                          method=wilcoxon_method(e)).pvalue


def shifted(d, theta):
    return np.round(d - theta, 12)  # the stated preprocessing: d - theta to 12 decimal places


# ------------------------------------------------------------------ two-sample shift


@pytest.mark.parametrize("name", list(TWO))
@pytest.mark.parametrize("margin", MARGINS)
def test_hodges_lehmann_p_values_match_scipy(name, margin):
    a, b = TWO[name]
    low, high = bounds_of(margin)
    res = hodges_lehmann_tost(a, b, margin, ALPHA)
    assert close(res.p_lower, mwu_p(a - low, b, "greater"))
    assert close(res.p_upper, mwu_p(a - high, b, "less"))
    assert close(res.p_minimal_effect,
                 min(mwu_p(a - high, b, "greater"), mwu_p(a - low, b, "less")))
    assert close(res.p_difference, mwu_p(a, b, "two-sided"))
    assert res.p_tost == max(res.p_lower, res.p_upper)


def test_both_null_distributions_are_exercised():
    """The references above reach both of scipy's methods (else a wrong rule could pass)."""
    methods = {mwu_method(a - 0.5, b) for a, b in TWO.values()}
    assert methods == {"exact", "asymptotic"}
    methods = {wilcoxon_method(shifted(d, 0.5)) for d in PAIRED.values()}
    assert methods == {"exact", "asymptotic"}


@pytest.mark.parametrize("name", list(TWO))
def test_hodges_lehmann_estimate_and_interval(name):
    a, b = TWO[name]
    res = hodges_lehmann_tost(a, b, 1.0, ALPHA)
    assert res.estimate == pytest.approx(np.median(np.subtract.outer(a, b)), abs=1e-12)
    own = ranks.hodges_lehmann(a, b, 1.0 - 2.0 * ALPHA).interval
    assert (res.interval_low, res.interval_high) == (own.low, own.high)
    assert res.interval_level == pytest.approx(0.9)


def sweep(lo, hi, count=41):
    return [(float(x), float(y)) for x in np.linspace(lo, -0.01, count)
            for y in (0.05, 0.4, 1.1, 3.0)]


def interval_agreement(res, low, high, sorted_values, exact_low, exact_high):
    """Check interval vs tests. Exact path: iff. Normal path: the interval excluding a bound
    implies rejection, and a rejection with the bound inside the interval needs the bound to lie
    before the next order statistic (one step of the documented conservatism)."""
    rej_low, rej_high = res.p_lower < ALPHA, res.p_upper < ALPHA
    out_low, out_high = res.interval_low > low, res.interval_high < high
    if exact_low:
        assert rej_low == out_low
    else:
        assert (not out_low) or rej_low
        if rej_low and not out_low:
            nxt = sorted_values[np.searchsorted(sorted_values, res.interval_low, side="right")]
            assert low < nxt
    if exact_high:
        assert rej_high == out_high
    else:
        assert (not out_high) or rej_high
        if rej_high and not out_high:
            prev = sorted_values[np.searchsorted(sorted_values, res.interval_high, "left") - 1]
            assert high > prev
    return rej_low, rej_high


def both_outcomes(seen):
    """The sweep rejected and kept at least one of the two bounds (else the check is empty)."""
    return len({s[0] for s in seen}) == 2 or len({s[1] for s in seen}) == 2


@pytest.mark.parametrize("name", list(TWO))
@pytest.mark.slow
def test_hodges_lehmann_interval_agrees_with_verdict(name):
    a, b = TWO[name]
    diffs = np.sort(np.subtract.outer(a, b).ravel())
    est = float(np.median(diffs))
    seen = set()
    for lo_off, hi_off in sweep(-4.0, 0.0):
        low, high = est + lo_off * 1.5, est + hi_off * 1.5
        if not low < 0 < high:
            continue
        res = hodges_lehmann_tost(a, b, (low, high), ALPHA)
        exact_low = mwu_method(a - low, b) == "exact"
        exact_high = mwu_method(a - high, b) == "exact"
        seen.add(interval_agreement(res, low, high, diffs, exact_low, exact_high))
        if exact_low and exact_high:
            inside = res.interval_low > low and res.interval_high < high
            assert (res.p_tost < ALPHA) == inside
    assert both_outcomes(seen)


def test_hodges_lehmann_separated_groups_reach_the_margin():
    a, b = TWO["separated"]
    res = hodges_lehmann_tost(a, b, 2.0, ALPHA)
    assert res.verdict == "at_least_margin"
    assert res.interval_low > 2.0


# ------------------------------------------------------------------ paired shift


@pytest.mark.parametrize("name", list(PAIRED))
@pytest.mark.parametrize("margin", MARGINS)
def test_paired_hodges_lehmann_p_values_match_scipy(name, margin):
    d = PAIRED[name]
    low, high = bounds_of(margin)
    res = paired_hodges_lehmann_tost(d, margin, ALPHA)
    assert close(res.p_lower, wilcoxon_p(shifted(d, low), "greater"))
    assert close(res.p_upper, wilcoxon_p(shifted(d, high), "less"))
    assert close(res.p_minimal_effect, min(wilcoxon_p(shifted(d, high), "greater"),
                                           wilcoxon_p(shifted(d, low), "less")))
    assert close(res.p_difference, wilcoxon_p(shifted(d, 0.0), "two-sided"))


def test_paired_takes_pairs_as_columns():
    rng = np.random.default_rng(7)
    x = np.column_stack([rng.normal(5.0, 1.0, 20), rng.normal(4.8, 1.0, 20)])
    from_pairs = paired_hodges_lehmann_tost(x, 0.6)
    from_d = paired_hodges_lehmann_tost(np.round(x[:, 0] - x[:, 1], 12), 0.6)
    assert from_pairs == from_d


@pytest.mark.parametrize("name", list(PAIRED))
@pytest.mark.slow
def test_paired_hodges_lehmann_interval_agrees_with_verdict(name):
    d = shifted(PAIRED[name], 0.0)
    i, j = np.triu_indices(d.size)
    walsh = np.sort((d[i] + d[j]) / 2.0)
    own = paired.hodges_lehmann(d, np.zeros(d.size), 1.0 - 2.0 * ALPHA).interval
    res0 = paired_hodges_lehmann_tost(d, 1.0, ALPHA)
    assert (res0.interval_low, res0.interval_high) == (own.low, own.high)
    assert res0.estimate == pytest.approx(np.median(walsh), abs=1e-12)
    est = float(np.median(walsh))
    seen = set()
    for lo_off, hi_off in sweep(-4.0, 0.0):
        low, high = est + lo_off, est + hi_off
        if not low < 0 < high:
            continue
        res = paired_hodges_lehmann_tost(d, (low, high), ALPHA)
        exact_low = wilcoxon_method(shifted(d, low)) == "exact"
        exact_high = wilcoxon_method(shifted(d, high)) == "exact"
        seen.add(interval_agreement(res, low, high, walsh, exact_low, exact_high))
    assert both_outcomes(seen)


def test_paired_one_signed_differences():
    d = PAIRED["one_signed"]
    res = paired_hodges_lehmann_tost(d, 0.3, ALPHA)
    assert res.verdict == "at_least_margin"
    assert res.p_difference == pytest.approx(2.0 / 2 ** d.size, rel=1e-12)  # all signs +


# ------------------------------------------------------------------ PS_dep


def score_reference(d, low, high):
    n = d.size
    pos, zero = int(np.sum(d > 0)), int(np.sum(d == 0))
    p_hat = (pos + 0.5 * zero) / n
    z = lambda theta: (p_hat - theta) / math.sqrt(theta * (1 - theta) / n)  # noqa: E731
    return (stats.norm.sf(z(low)), stats.norm.cdf(z(high)),
            min(stats.norm.sf(z(high)), stats.norm.cdf(z(low))), p_hat, n)


@pytest.mark.parametrize("name", list(PAIRED))
@pytest.mark.parametrize("margin", PS_MARGINS)
def test_ps_dep_p_values_match_score_and_sign_tests(name, margin):
    d = shifted(PAIRED[name], 0.0)
    low, high = bounds_of(margin, 0.5)
    res = ps_dep_tost(d, margin, ALPHA)
    p_lower, p_upper, p_met, p_hat, _ = score_reference(d, low, high)
    assert res.estimate == pytest.approx(p_hat, abs=1e-15)
    assert close(res.p_lower, p_lower) and close(res.p_upper, p_upper)
    assert close(res.p_minimal_effect, p_met)
    pos, neg = int(np.sum(d > 0)), int(np.sum(d < 0))
    assert close(res.p_difference, stats.binomtest(pos, pos + neg, 0.5).pvalue)


@pytest.mark.parametrize("name", list(PAIRED))
@pytest.mark.slow
def test_ps_dep_interval_is_wilson_and_agrees_with_verdict(name):
    d = shifted(PAIRED[name], 0.0)
    n = d.size
    res = ps_dep_tost(d, 0.2, ALPHA)
    own = paired.ps_dep(d, np.zeros(n), 1.0 - 2.0 * ALPHA).interval
    assert (res.interval_low, res.interval_high) == (own.low, own.high)
    count = float(np.sum(d > 0)) + 0.5 * float(np.sum(d == 0))
    wl, wh = proportion_confint(count, n, alpha=2 * ALPHA, method="wilson")
    assert res.interval_low == pytest.approx(max(0.0, wl), abs=1e-12)
    assert res.interval_high == pytest.approx(min(1.0, wh), abs=1e-12)
    outcomes = set()
    for low in np.linspace(0.02, 0.49, 37):
        for high in np.linspace(0.51, 0.98, 37):
            r = ps_dep_tost(d, (float(low), float(high)), ALPHA)
            assert (r.p_lower < ALPHA) == (r.interval_low > low)
            assert (r.p_upper < ALPHA) == (r.interval_high < high)
            assert (r.p_tost < ALPHA) == (low < r.interval_low and r.interval_high < high)
            assert (r.p_minimal_effect < ALPHA) == (r.interval_low > high
                                                    or r.interval_high < low)
            outcomes.add((r.p_lower < ALPHA, r.p_minimal_effect < ALPHA))
    assert both_outcomes(outcomes)


def test_ps_dep_zero_differences_count_half():
    d = np.array([1.0, 2.0, 0.0, 0.0, -1.0, 3.0, 0.5, 0.0, 2.5, -0.5])
    res = ps_dep_tost(d, 0.3, ALPHA)
    assert res.estimate == pytest.approx((5 + 1.5) / 10)  # 5 positive, 3 zero, 2 negative
    assert res.statistic == 5
    assert res.p_difference == pytest.approx(stats.binomtest(5, 7, 0.5).pvalue, rel=1e-12)


# ------------------------------------------------------------------ undefined and bad input


def test_undefined_results_say_why():
    const = hodges_lehmann_tost([2.0, 2.0, 2.0], [1.0, 1.0], 0.5)
    assert const.reason and const.p_lower is None and const.verdict is None
    assert hodges_lehmann_tost([1.0], [1.0, 2.0], 0.5).reason.startswith("too few")
    assert hodges_lehmann_tost([1.0, np.nan], [1.0, 2.0], 0.5).reason is not None
    equal = paired_hodges_lehmann_tost([0.4, 0.4, 0.4], 1.0)
    assert equal.reason and equal.estimate == pytest.approx(0.4)
    assert paired_hodges_lehmann_tost([1.0], 1.0).reason.startswith("too few")
    zeros = ps_dep_tost([0.0, 0.0, 0.0, 0.0], 0.2)
    assert zeros.reason and zeros.estimate == 0.5 and zeros.p_tost is None


@pytest.mark.parametrize("call", [
    lambda: hodges_lehmann_tost([1, 2, 3], [2, 3, 4], -1.0),
    lambda: hodges_lehmann_tost([1, 2, 3], [2, 3, 4], (0.5, 1.0)),
    lambda: hodges_lehmann_tost([1, 2, 3], [2, 3, 4], 1.0, alpha=0.6),
    lambda: hodges_lehmann_tost([[1, 2], [3, 4]], [2, 3, 4], 1.0),
    lambda: paired_hodges_lehmann_tost([1, 2, 3], "wide"),
    lambda: ps_dep_tost([1, 2, -3], 0.5),
    lambda: ps_dep_tost([1, 2, -3], (0.0, 0.7)),
    lambda: ps_dep_tost([1, 2, -3], (0.6, 0.7)),
])
def test_bad_arguments_raise(call):
    with pytest.raises(ValueError):
        call()


# ------------------------------------------------------------------ properties

ints = st.lists(st.integers(-6, 6), min_size=2, max_size=14)
halves = st.integers(1, 10).map(lambda k: k / 2.0)


def far_from_alpha(*results):
    return all(abs(p - ALPHA) > 1e-9 for r in results
               for p in (r.p_lower, r.p_upper, r.p_minimal_effect, r.p_difference))


@STEADY
@given(ints, ints, halves, halves)
def test_swapping_groups_mirrors_p_values(a, b, lo, hi):
    a, b = np.array(a, float), np.array(b, float)
    assume(np.ptp(a) > 0 or np.ptp(b) > 0)
    ab = hodges_lehmann_tost(a, b, (-lo, hi))
    ba = hodges_lehmann_tost(b, a, (-hi, lo))
    assert math.isclose(ab.p_lower, ba.p_upper, rel_tol=1e-9, abs_tol=1e-14)
    assert math.isclose(ab.p_upper, ba.p_lower, rel_tol=1e-9, abs_tol=1e-14)
    assert math.isclose(ab.p_minimal_effect, ba.p_minimal_effect, rel_tol=1e-9, abs_tol=1e-14)
    assert math.isclose(ab.p_difference, ba.p_difference, rel_tol=1e-9, abs_tol=1e-14)
    assert ab.estimate == -ba.estimate
    assert (ab.interval_low, ab.interval_high) == (-ba.interval_high, -ba.interval_low)
    if far_from_alpha(ab, ba):
        assert ab.verdict == ba.verdict


@STEADY
@given(ints, ints, halves, halves, st.integers(-19, 19))
def test_translation_leaves_p_values_unchanged(a, b, lo, hi, c2):
    c = c2 / 2.0
    assume(-hi < c < lo)  # bounds (-lo + c, hi + c) still straddle 0
    a, b = np.array(a, float), np.array(b, float)
    assume(np.ptp(a) > 0 or np.ptp(b) > 0)
    base = hodges_lehmann_tost(a, b, (-lo, hi))
    moved = hodges_lehmann_tost(a + c, b, (-lo + c, hi + c))
    for field in ("p_lower", "p_upper", "p_minimal_effect"):
        assert getattr(base, field) == getattr(moved, field)
    assert moved.estimate == base.estimate + c
    # the project's interval takes its tie correction from the pooled (a, b), whose cross-group
    # ties move with c; it translates whenever that correction is unchanged
    if stats.tiecorrect(np.concatenate([a, b])) == stats.tiecorrect(np.concatenate([a + c, b])):
        assert moved.interval_low == base.interval_low + c
        assert moved.interval_high == base.interval_high + c


@STEADY
@given(st.lists(st.integers(-6, 6), min_size=2, max_size=30), halves, halves,
       st.integers(-19, 19))
def test_paired_mirror_and_translation(d, lo, hi, c2):
    d = np.array(d, float)
    assume(np.ptp(d) > 0)
    ab = paired_hodges_lehmann_tost(d, (-lo, hi))
    ba = paired_hodges_lehmann_tost(-d, (-hi, lo))
    assert math.isclose(ab.p_lower, ba.p_upper, rel_tol=1e-9, abs_tol=1e-14)
    assert math.isclose(ab.p_upper, ba.p_lower, rel_tol=1e-9, abs_tol=1e-14)
    assert math.isclose(ab.p_difference, ba.p_difference, rel_tol=1e-9, abs_tol=1e-14)
    if far_from_alpha(ab, ba):
        assert ab.verdict == ba.verdict
    c = c2 / 2.0
    if -hi < c < lo:
        moved = paired_hodges_lehmann_tost(d + c, (-lo + c, hi + c))
        assert moved.p_lower == ab.p_lower and moved.p_upper == ab.p_upper
        assert moved.estimate == ab.estimate + c


@STEADY
@given(st.lists(st.integers(-4, 4), min_size=2, max_size=40), st.integers(1, 7),
       st.integers(1, 7))
def test_ps_dep_mirror_and_scale(d, lo8, hi8):
    d = np.array(d, float)
    assume(np.any(d != 0))
    low, high = 0.5 - lo8 / 16.0, 0.5 + hi8 / 16.0
    ab = ps_dep_tost(d, (low, high))
    ba = ps_dep_tost(-d, (1.0 - high, 1.0 - low))
    assert math.isclose(ab.p_lower, ba.p_upper, rel_tol=1e-9, abs_tol=1e-14)
    assert math.isclose(ab.p_upper, ba.p_lower, rel_tol=1e-9, abs_tol=1e-14)
    assert math.isclose(ab.estimate, 1.0 - ba.estimate)
    if far_from_alpha(ab, ba):
        assert ab.verdict == ba.verdict
    scaled = ps_dep_tost(3.0 * d, (low, high))
    assert scaled.p_lower == ab.p_lower and scaled.p_upper == ab.p_upper


def test_normal_path_interval_is_one_order_statistic_wider():
    """Documented conservatism: with the normal approximation the project's interval uses
    k = floor(mn/2 - z sd), one below the inversion of the uncorrected test, so a bound between
    D_(k) and D_(k+1) is rejected by the test (scipy) while the interval still holds it."""
    a, b = TWO["normal_large"]
    diffs = np.sort(np.subtract.outer(a, b).ravel())
    mn, n = a.size * b.size, a.size + b.size
    k = math.floor(mn / 2 - stats.norm.ppf(1 - ALPHA) * math.sqrt(mn * (n + 1) / 12))
    low = 0.5 * (diffs[k - 1] + diffs[k])  # between D_(k) and D_(k+1)
    assert low < 0
    res = hodges_lehmann_tost(a, b, (low, 5.0), ALPHA)
    assert res.interval_low == diffs[k - 1]
    assert mwu_p(a - low, b, "greater") < ALPHA
    assert res.p_lower < ALPHA and res.interval_low < low


def test_a_difference_equal_to_a_bound_in_decimal_is_a_tie_whichever_group_comes_first():
    # 0.4 - (-0.5) and 0.9 differ in floating point (0.9000000000000001 against 0.9); without
    # snapping, A against B used the normal approximation at the lower bound and B against A
    # the exact distribution at the mirrored one, and their p-values differed
    a = np.array([0.4, -0.9, -1.5, 1.8, -0.1])
    b = np.array([0.4, -0.0, 1.3, 0.2])
    ab, ba = er.hodges_lehmann_tost(a, b, 0.5), er.hodges_lehmann_tost(b, a, 0.5)
    assert ab.p_lower == pytest.approx(ba.p_upper, rel=1e-12)
    assert ab.p_upper == pytest.approx(ba.p_lower, rel=1e-12)
    # the tie is real in decimal: scipy on the decimal-exact shifted data (in tenths) agrees
    tenths_a, tenths_b = np.round(a * 10) + 5, np.round(b * 10)
    want = stats.mannwhitneyu(tenths_a, tenths_b, alternative="greater", method="asymptotic",
                              use_continuity=False).pvalue
    assert ab.p_lower == pytest.approx(want, rel=1e-10)


def test_swapping_decimal_groups_mirrors_the_shift_tests():
    rng = np.random.default_rng(5)
    for _ in range(300):
        a = np.round(rng.normal(0, 1, rng.integers(3, 12)), 1)
        b = np.round(rng.normal(0.3, 1, rng.integers(3, 12)), 1)
        margin = float(rng.choice([0.3, 0.5, 1.0]))
        ab, ba = er.hodges_lehmann_tost(a, b, margin), er.hodges_lehmann_tost(b, a, margin)
        if ab.reason:
            continue
        assert ab.p_lower == pytest.approx(ba.p_upper, rel=1e-9), (a, b, margin)
        assert ab.p_upper == pytest.approx(ba.p_lower, rel=1e-9), (a, b, margin)
        assert ab.verdict == ba.verdict
