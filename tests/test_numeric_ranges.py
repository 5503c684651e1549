"""Validity ranges and numerical hazards of the package's formulas: large n, large statistics,
separation, zero variance, heavy ties, extreme scales.

Each test builds the hazardous input and checks the guarded behaviour (a finite value inside its
range, or None with a named reason; never NaN, never an exception, never a p outside [0, 1]);
where a value is defined it is also checked against an outside reference (scipy.stats,
statsmodels, pingouin, or an exact rational computation written here), cited beside the check.
Tests with 10^6 values per group are marked `slow` (still part of `make test`). Property tests
use invented data and run derandomized.
"""

from __future__ import annotations

import json
import math
import warnings
from fractions import Fraction

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import integrate, special, stats
from statsmodels.stats.nonparametric import rank_compare_2indep

from auditor import diagnostics, kgroups, paired, parametric, ranks, render, significance
from auditor import jackknife_omnibus as jo
from auditor.pipeline import audit
from auditor.ranks import midranks

LEVEL = 0.95
STEADY = settings(derandomize=True, deadline=None, max_examples=60, database=None,
                  suppress_health_check=[HealthCheck.too_slow])


# ------------------------------------------------------------------ noncentral t


def _nct_cdf_over_chi(t: float, df: float, ncp: float) -> float:
    """P(T <= t) = E[Phi(t S - ncp)], S = sqrt(V / df) chi-distributed: integration over S
    (scipy.stats.chi and scipy.integrate.quad), a different route from the module's
    integration over the normal variable."""
    dist = stats.chi(df, scale=1.0 / math.sqrt(df))
    lo, hi = float(dist.ppf(1e-16)), float(dist.isf(1e-16))
    cuts = {float(dist.ppf(q)) for q in (1e-9, 1e-5, 1e-3, 0.02, 0.1, 0.3, 0.5, 0.7, 0.9, 0.98,
                                        1 - 1e-3, 1 - 1e-5, 1 - 1e-9)}
    if t != 0:
        cuts |= {(ncp + k) / t for k in range(-8, 9)}
    cuts = sorted(c for c in cuts if lo < c < hi)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", integrate.IntegrationWarning)
        value, _ = integrate.quad(lambda s: dist.pdf(s) * special.ndtr(t * s - ncp), lo, hi,
                                  points=cuts, limit=1000, epsabs=1e-15, epsrel=1e-13)
    return value


@pytest.mark.parametrize("df", [1, 3, 10, 30, 100, 1000, 1e5])
@pytest.mark.parametrize("t", [-800.0, -30.0, -2.5, 0.0, 0.7, 4.0, 60.0, 900.0])
@pytest.mark.slow
def test_noncentral_t_quadrature_matches_scipy_where_scipy_is_valid(df, t):
    # the fallback integration against scipy.stats.nct.cdf in scipy's valid range (|t| <= 1000)
    se = math.sqrt(1.0 + t * t / (2.0 * df))
    for k in (-3.0, -1.0, 0.0, 1.5, 3.0):
        ncp = t + k * se
        ref = float(stats.nct.cdf(t, df, ncp))  # scipy.stats.nct
        ours = parametric._nct_cdf_by_quadrature(t, df, ncp)
        if math.isnan(ref):  # scipy fails in some far tails too (t = -800, ncp = 48.5, df = 1)
            assert 0.0 <= parametric.noncentral_t_cdf(t, df, ncp) == ours <= 1e-12
        else:
            # scipy drifts by up to 3e-12 at |t| near 900 (df = 10, 30), where the integration
            # over the chi variable sides with the module's to 1e-14
            assert ours == pytest.approx(ref, abs=1e-12 if abs(t) < 100 else 5e-12)
            if abs(t) >= 100 and df <= 30:
                assert ours == pytest.approx(_nct_cdf_over_chi(t, df, ncp), abs=2e-14)


@pytest.mark.parametrize("t_obs, df", [(1e5, 10), (-1e5, 10), (2.5e5, 3), (1e6, 3),
                                       (4e4, 1), (1e4, 2e6 - 2), (3e3, 2e6 - 2), (1e6, 1e12)])
def test_noncentral_t_limits_beyond_scipys_range(t_obs, df):
    # scipy.special.nctdtr is NaN once |ncp| passes about 1.01e5 (scipy 1.17) and drifts by up to
    # 1e-6 for |t| >= 1e4; the limits must still solve their defining equations, checked by an
    # independent integration over the chi variable (scipy.stats.chi, scipy.integrate.quad)
    limits = parametric.noncentral_t_limits(t_obs, df, LEVEL)
    assert limits is not None
    lo, hi = limits
    assert lo < t_obs < hi if t_obs > 0 else lo < t_obs < hi
    if df < 1e9:  # the chi density is too narrow for the reference integration at df = 1e12
        assert _nct_cdf_over_chi(t_obs, df, lo) == pytest.approx(0.5 + LEVEL / 2, abs=1e-8)
        assert _nct_cdf_over_chi(t_obs, df, hi) == pytest.approx(0.5 - LEVEL / 2, abs=1e-8)
    else:  # df = 1e12: T is normal with mean ncp and SD sqrt(1 + t^2 / (2 df)) to O(1/df)
        se = math.sqrt(1.0 + t_obs * t_obs / (2.0 * df))
        z = special.ndtri(0.5 + LEVEL / 2)
        assert lo == pytest.approx(t_obs - z * se, abs=1e-3 * se)
        assert hi == pytest.approx(t_obs + z * se, abs=1e-3 * se)


@pytest.mark.parametrize("df", [1, 3, 10])
def test_noncentral_t_limits_approach_the_chi_square_ratio_for_huge_t(df):
    # for ncp -> infinity, T / ncp -> sqrt(df / V): the limits tend to t sqrt(chi2_q(df) / df)
    # (derived here; quantiles from scipy.stats.chi2), with a relative error of O(1 / t)
    t_obs = 2e5
    lo, hi = parametric.noncentral_t_limits(t_obs, df, LEVEL)
    assert lo == pytest.approx(t_obs * math.sqrt(stats.chi2.ppf(0.5 - LEVEL / 2, df) / df),
                               rel=1e-4)
    assert hi == pytest.approx(t_obs * math.sqrt(stats.chi2.ppf(0.5 + LEVEL / 2, df) / df),
                               rel=1e-4)


@pytest.mark.parametrize("t_obs, df, level", [(math.nan, 10, LEVEL), (math.inf, 10, LEVEL),
                                              (3.0, 0.5, LEVEL), (3.0, math.nan, LEVEL),
                                              (3.0, 10, 1.0)])
def test_noncentral_t_limits_outside_their_range_give_none(t_obs, df, level):
    assert parametric.noncentral_t_limits(t_obs, df, level) is None


def test_cohen_d_of_separated_groups_with_tiny_spread_keeps_the_exact_interval():
    # ten values per group, SD 1e-4 and a mean gap of 10: t is about 2e5, where scipy's
    # noncentral t is NaN; the interval stays the exact inversion (noted), not a normal guess
    rng = np.random.default_rng(11)
    a = 10.0 + 1e-4 * rng.standard_normal(10)
    b = 1e-4 * rng.standard_normal(10)
    for est in (parametric.cohen_d(a, b, LEVEL), parametric.hedges_g(a, b, LEVEL)):
        iv = est.interval
        assert iv.method == "noncentral_t"
        assert "numerical integration" in iv.note
        assert iv.low < est.value < iv.high
    d = parametric.cohen_d(a, b, LEVEL)
    t_obs = d.value * math.sqrt(5.0)
    lo, hi = d.interval.low * math.sqrt(5.0), d.interval.high * math.sqrt(5.0)
    assert _nct_cdf_over_chi(t_obs, 18, lo) == pytest.approx(0.975, abs=1e-8)
    assert _nct_cdf_over_chi(t_obs, 18, hi) == pytest.approx(0.025, abs=1e-8)


def test_paired_d_z_with_huge_t_keeps_the_exact_interval():
    rng = np.random.default_rng(12)
    b = rng.normal(50, 5, 12)
    a = b + 3.0 + 1e-5 * rng.standard_normal(12)  # differences 3 +- 1e-5: t near 1e6
    est = paired.d_z(a, b, LEVEL)
    assert est.interval.method == "noncentral_t"
    assert "numerical integration" in est.interval.note
    t_obs = est.value * math.sqrt(12)
    assert _nct_cdf_over_chi(t_obs, 11, est.interval.low * math.sqrt(12)) == pytest.approx(
        0.975, abs=1e-8)


@pytest.mark.slow
def test_cohen_d_interval_at_a_million_per_group():
    rng = np.random.default_rng(13)
    a, b = rng.normal(0.3, 1.0, 1_000_000), rng.normal(0.0, 1.0, 1_000_000)
    est = parametric.cohen_d(a, b, LEVEL)
    assert est.interval.method == "noncentral_t"
    # pingouin.compute_esci (normal approximation with the large-sample SE): at this n the exact
    # limits agree with it to far below the interval's width
    low, high = pg.compute_esci(est.value, a.size, b.size, eftype="cohen", confidence=LEVEL,
                                decimals=15)
    half = (high - low) / 2
    assert est.interval.low == pytest.approx(low, abs=1e-3 * half)
    assert est.interval.high == pytest.approx(high, abs=1e-3 * half)


# ------------------------------------------------------------------ Hedges' J


def _j_exact(df: int) -> float:
    """J(df) = Gamma(m) / (sqrt(m) Gamma(m - 1/2)), m = df/2, from exact integers:
    Gamma(k + 1/2) = (2k)! sqrt(pi) / (4^k k!), so for even df = 2m
    J = 4^(m-1) / (C(2m-2, m-1) sqrt(pi m)), and for odd df = 2k + 1
    J = C(2k, k) k sqrt(pi) / (4^k sqrt(df / 2)). The ratios are exact fractions rounded once."""
    if df % 2 == 0:
        m = df // 2
        return float(Fraction(4 ** (m - 1), math.comb(2 * m - 2, m - 1))) / math.sqrt(math.pi * m)
    k = (df - 1) // 2
    return float(Fraction(math.comb(2 * k, k) * k, 4 ** k)) * math.sqrt(math.pi) / math.sqrt(df / 2)


@pytest.mark.parametrize("df", list(range(2, 41)) + [50, 101, 1000, 1001, 12345, 100_000,
                                                     100_001])
def test_hedges_factor_against_exact_rational_values(df):
    # the log-gamma form loses m ln m * 1e-16 relatively (7e-15 at df = 29, 5e-11 at df = 1e5)
    # (the exact reference is rounded twice, about 2 ulp)
    assert parametric.hedges_correction(df) == pytest.approx(_j_exact(df), rel=1e-15, abs=0)


def test_hedges_factor_at_very_large_df_against_the_hedges_approximation():
    # J = 1 - 3 / (4 df - 1) + O(df^-2) (Hedges 1981, eq. 6e, from memory; its error measured here
    # against the exact values is about 4e-3 / df^2)
    for df in (1e6, 2e6 - 2, 1e8, 1e12):
        assert parametric.hedges_correction(df) == pytest.approx(1 - 3 / (4 * df - 1),
                                                                 abs=1e-13)
    assert parametric.hedges_correction(math.inf) == 1.0


@given(st.floats(1.0001, 1e9))
@STEADY
def test_hedges_factor_inside_its_range(df):
    j = parametric.hedges_correction(df)
    assert 0.0 < j < 1.0
    assert parametric.hedges_correction(df * 1.5) >= j  # increasing in df


@pytest.mark.parametrize("df", [1, 0.5, 0, -3, math.nan])
def test_hedges_factor_outside_its_range_is_nan_without_an_exception(df):
    assert math.isnan(parametric.hedges_correction(df))


def test_hedges_g_of_two_single_values_is_undefined_without_an_exception():
    with np.errstate(all="ignore"):
        value = parametric.hedges_g_values(np.array([1.0]), np.array([2.0]))
    assert math.isnan(float(value))


# ------------------------------------------------------------------ Welch degrees of freedom


def test_welch_df_with_one_constant_group_is_the_other_groups_n_minus_one():
    a = np.full(8, 3.5)
    b = np.array([1.0, 4, 2, 8, 5, 7])
    assert parametric.welch_df(0.0, 8, float(np.var(b, ddof=1)), 6) == 5.0
    res = significance.welch_t(a, b)
    # scipy.stats.ttest_ind(equal_var=False) agrees in the valid range (it warns of a precision
    # loss for the exactly constant group, wrongly)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ref = stats.ttest_ind(a, b, equal_var=False)
    assert res.df == pytest.approx(float(ref.df), rel=1e-12)
    assert res.p == pytest.approx(float(ref.pvalue), rel=1e-10)
    assert not res.notes  # an exactly constant group is no precision loss
    est = parametric.mean_difference(a, b, LEVEL)
    lo, hi = ref.confidence_interval(LEVEL)
    assert (est.interval.low, est.interval.high) == pytest.approx((float(lo), float(hi)),
                                                                  rel=1e-10)


@pytest.mark.parametrize("scale", [1e-140, 1e-100, 1e100, 1e140])
def test_welch_interval_and_test_are_scale_free_at_extreme_scales(scale):
    # squares of s^2 / n under- or overflow at these scales; scipy.stats.ttest_ind then puts
    # df = 1 (scipy 1.17). Reference: the same data at scale 1 (scipy.stats.ttest_ind)
    a = np.array([1.0, 3, 2, 7, 4.5])
    b = np.array([5.0, 4, 9, 6])
    ref = stats.ttest_ind(a, b, equal_var=False)
    res = significance.welch_t(a * scale, b * scale)
    assert res.reason is None
    assert res.df == pytest.approx(float(ref.df), rel=1e-12)
    assert res.p == pytest.approx(float(ref.pvalue), rel=1e-10)
    est = parametric.mean_difference(a * scale, b * scale, LEVEL)
    lo, hi = ref.confidence_interval(LEVEL)
    assert est.interval.low / scale == pytest.approx(float(lo), rel=1e-10)
    assert est.interval.high / scale == pytest.approx(float(hi), rel=1e-10)


@given(st.floats(0, 1e6), st.integers(2, 500), st.floats(0, 1e6), st.integers(2, 500))
@STEADY
def test_welch_df_inside_its_range(va, na, vb, nb):
    nu = parametric.welch_df(va, na, vb, nb)
    if va == 0 and vb == 0:
        assert math.isnan(nu)
    else:
        assert min(na, nb) - 1 - 1e-9 <= nu <= na + nb - 2 + 1e-9


@pytest.mark.parametrize("scale", [1e-140, 1e140])
def test_welch_anova_is_scale_free_at_extreme_scales(scale):
    groups = [np.array([1.0, 3, 2, 7, 4.5]), np.array([5.0, 4, 9, 6]),
              np.array([2.0, 2.5, 3.0, 8.0, 1.0, 0.5])]
    frame = pd.DataFrame({"y": np.concatenate(groups),
                          "g": np.repeat(["a", "b", "c"], [g.size for g in groups])})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = pg.welch_anova(data=frame, dv="y", between="g").iloc[0]  # pingouin, scale 1
    res = kgroups.welch_anova([g * scale for g in groups])
    assert res["statistic"] == pytest.approx(float(ref["F"]), rel=1e-10)
    assert res["df"][1] == pytest.approx(float(ref["ddof2"]), rel=1e-10)
    assert res["p"] == pytest.approx(float(ref["p_unc"]), rel=1e-8)


# ------------------------------------------------------------------ Brunner-Munzel


def test_brunner_munzel_at_complete_separation_is_undefined_with_a_reason():
    a, b = np.array([5.0, 6, 7, 8]), np.array([1.0, 2, 3])
    a_hat, var, df = ranks.brunner_munzel_parts(a, b)
    assert (a_hat, var) == (1.0, 0.0) and math.isnan(df)
    est = ranks.prob_superiority(a, b, LEVEL)
    assert est.value == 1.0 and est.interval is None and "variance is zero" in est.notes[0]
    res = significance.brunner_munzel(a, b)
    assert res.p is None and "do not overlap" in res.reason


def test_brunner_munzel_df_with_one_groups_placements_constant():
    # every b lies between a's third and fourth value: b's placements are all 3, S_B^2 = 0, and
    # df is n_A - 1 (statsmodels.stats.nonparametric.rank_compare_2indep reports 4.0)
    a, b = np.array([1.0, 2, 3, 10, 11]), np.array([4.0, 5, 6, 7])
    _, var, df = ranks.brunner_munzel_parts(a, b)
    assert var > 0 and df == 4.0
    ref = rank_compare_2indep(a, b)
    assert df == pytest.approx(float(ref.df), rel=1e-12)
    res = significance.brunner_munzel(a, b)
    assert res.df == 4.0 and res.p == pytest.approx(float(ref.pvalue), rel=1e-9)


def test_brunner_munzel_with_a_single_value_group_is_undefined_without_warning():
    est = ranks.prob_superiority(np.array([3.0]), np.array([1.0, 4, 5]), LEVEL)
    assert est.value == pytest.approx(1 / 3) and est.interval is None


@given(st.lists(st.integers(0, 6), min_size=2, max_size=30),
       st.lists(st.integers(0, 6), min_size=2, max_size=30))
@STEADY
def test_brunner_munzel_df_inside_its_range(a, b):
    a, b = np.array(a, float), np.array(b, float)
    a_hat, var, df = ranks.brunner_munzel_parts(a, b)
    assert 0.0 <= a_hat <= 1.0
    if var > 0:
        assert min(a.size, b.size) - 1 - 1e-9 <= df <= a.size + b.size - 2 + 1e-9
    else:
        assert math.isnan(df)


# ------------------------------------------------------------------ rank z-scores at large n


@pytest.mark.slow
def test_signed_rank_z_at_two_million_pairs():
    # N(N+1)(2N+1) overflows int64 from N = 1,664,510 on; before the fix z, p and r were undefined
    rng = np.random.default_rng(21)
    n = 2_000_000
    x = np.column_stack([rng.normal(0.002, 1, n), rng.normal(0, 1, n)])
    z = float(paired.wilcoxon_z_values(x))
    d = paired.differences(x, 12)
    ref = stats.wilcoxon(d, method="asymptotic", correction=False)  # scipy.stats.wilcoxon
    assert abs(z) == pytest.approx(abs(float(ref.zstatistic)), rel=1e-9)
    res = significance.wilcoxon_signed_rank(x)
    assert res.reason is None and res.p == pytest.approx(float(ref.pvalue), rel=1e-8)
    r = paired.r_from_z(x[:, 0], x[:, 1], LEVEL)
    assert r.value == pytest.approx(z / math.sqrt(n), rel=1e-12)


@pytest.mark.slow
def test_mann_whitney_at_a_million_per_group_with_ties():
    rng = np.random.default_rng(22)
    a = np.round(rng.normal(0.003, 1, 1_000_000), 2)
    b = np.round(rng.normal(0.0, 1, 1_000_000), 2)
    res = significance.mann_whitney(a, b)
    ref = stats.mannwhitneyu(a, b, use_continuity=False, method="asymptotic")  # scipy
    assert res.statistic == float(ref.statistic)
    assert res.p == pytest.approx(float(ref.pvalue), rel=1e-8)
    r = ranks.r_from_z(a, b, LEVEL)
    assert -1.0 <= r.value <= 1.0


@pytest.mark.slow
def test_every_value_tied_at_two_million_is_undefined_not_zero():
    a, b = np.zeros(1_000_000), np.zeros(1_000_001)
    assert math.isnan(float(ranks.mann_whitney_z_values(a, b)))
    assert ranks.r_from_z(a, b, LEVEL).reason is not None
    assert float(kgroups.tie_correction_values(np.concatenate([a, b]))) == 0.0
    assert significance.mann_whitney(a, b).reason is not None
    res = significance.kruskal_wallis(a, b, np.zeros(5))
    assert res.p is None and "tied" in res.reason


def test_mann_whitney_variance_snaps_rounding_to_zero():
    # the bracket (N + 1) - T / (N (N - 1)) is 3 with one value apart from N - 1 tied ones
    n = 2_000_001
    one_apart = float(n - 1) ** 3 - (n - 1)
    assert float(ranks.mann_whitney_variance(1_000_000, 1_000_001, one_apart)) == pytest.approx(
        1_000_000 * 1_000_001 / 12 * 3, rel=1e-8)
    all_tied = float(n) ** 3 - n
    for wobble in (0.0, 1e-16, -1e-16):
        assert ranks.mann_whitney_variance(1_000_000, 1_000_001, all_tied * (1 + wobble)) == 0.0


def _exact_kruskal_h(groups) -> float:
    """H from integer rank sums and tie counts, in exact rational arithmetic."""
    pooled = np.concatenate(groups)
    n = pooled.size
    doubled = np.rint(2 * midranks(pooled)).astype(np.int64)
    bounds = np.cumsum([0] + [g.size for g in groups])
    sums = [int(np.sum(doubled[bounds[j]:bounds[j + 1]])) for j in range(len(groups))]
    _, counts = np.unique(pooled, return_counts=True)
    ties = sum(int(c) ** 3 - int(c) for c in counts)
    h = Fraction(12, n * (n + 1)) * sum(Fraction(s * s, 4 * g.size)
                                        for s, g in zip(sums, groups)) - 3 * (n + 1)
    return float(h / (1 - Fraction(ties, n ** 3 - n)))


@pytest.mark.slow
def test_kruskal_wallis_h_keeps_its_precision_at_three_million_values():
    # the textbook form loses about 1e-16 N / H relatively (scipy.stats.kruskal: 3e-10 here)
    rng = np.random.default_rng(23)
    groups = [np.round(rng.normal(0, 1, 1_000_000), 2) for _ in range(3)]
    exact = _exact_kruskal_h(groups)
    assert float(kgroups.kruskal_h_values(*groups)) == pytest.approx(exact, rel=1e-13)
    res = significance.kruskal_wallis(*groups)
    assert res.statistic == pytest.approx(exact, rel=1e-13)
    assert res.p == pytest.approx(float(stats.chi2.sf(exact, 2)), rel=1e-12)
    assert res.statistic == pytest.approx(float(stats.kruskal(*groups).statistic), rel=1e-8)


@pytest.mark.slow
def test_friedman_and_dunn_at_a_million_values_per_condition():
    rng = np.random.default_rng(24)
    x = np.round(rng.normal(0, 1, (1_000_000, 3)) + np.array([0.0, 0.002, 0.004]), 1)
    chi2 = float(kgroups.friedman_values(x))
    ref = stats.friedmanchisquare(*x.T)  # scipy.stats.friedmanchisquare
    assert chi2 == pytest.approx(float(ref.statistic), rel=1e-10)
    res = significance.friedman(x)
    assert res.p == pytest.approx(float(ref.pvalue), rel=1e-8)
    w = float(kgroups.kendall_w_values(x))
    assert 0.0 <= w <= 1.0
    groups = list(x.T)
    z, p = kgroups.dunn_z(groups, 0, 2)
    # Dunn's z from the same formula in exact integers (tie sum) and fractions (mean ranks)
    pooled = np.concatenate(groups)
    n = pooled.size
    doubled = np.rint(2 * midranks(pooled)).astype(np.int64)
    r0 = Fraction(int(np.sum(doubled[:1_000_000])), 2 * 1_000_000)
    r2 = Fraction(int(np.sum(doubled[2_000_000:])), 2 * 1_000_000)
    _, counts = np.unique(pooled, return_counts=True)
    ties = sum(int(c) ** 3 - int(c) for c in counts)
    var = (Fraction(n * (n + 1), 12) - Fraction(ties, 12 * (n - 1))) * Fraction(2, 1_000_000)
    assert z == pytest.approx(float(r0 - r2) / math.sqrt(float(var)), rel=1e-12)
    assert p == pytest.approx(2 * float(stats.norm.sf(abs(z))), rel=1e-12) and 0 <= p <= 1


@given(st.integers(2, 60), st.integers(3, 7), st.booleans())
@STEADY
def test_kendall_w_inside_its_range(n, k, agree):
    rng = np.random.default_rng(n * 10 + k)
    x = np.tile(np.arange(k, dtype=float), (n, 1)) if agree else rng.integers(0, 3, (n, k))
    with np.errstate(all="ignore"):
        w = float(kgroups.kendall_w_values(x.astype(float)))
    if agree:
        assert w == pytest.approx(1.0, abs=1e-15) and w <= 1.0
    assert math.isnan(w) or 0.0 <= w <= 1.0


@given(st.lists(st.lists(st.integers(0, 5), min_size=1, max_size=25), min_size=2, max_size=5))
@STEADY
def test_kruskal_h_against_exact_rational_arithmetic(raw):
    groups = [np.array(g, float) for g in raw]
    pooled = np.concatenate(groups)
    h = float(kgroups.kruskal_h_values(*groups))
    if np.all(pooled == pooled[0]):
        assert math.isnan(h)
        assert kgroups.kruskal_wallis(groups)["reason"]
        return
    assert h == pytest.approx(_exact_kruskal_h(groups), rel=1e-12, abs=1e-12)
    res = kgroups.kruskal_wallis(groups)
    assert 0.0 <= res["p"] <= 1.0


def test_dunn_z_is_undefined_when_every_value_is_tied():
    groups = [np.full(4, 2.0), np.full(3, 2.0), np.full(5, 2.0)]
    z, p = kgroups.dunn_z(groups, 0, 1)
    assert math.isnan(z) and math.isnan(p)
    groups = [np.array([1.0, 2, 2]), np.array([2.0, 2, 5]), np.array([3.0, 4, 4])]
    z, p = kgroups.dunn_z(groups, 0, 2)
    assert 0.0 <= p <= 1.0


# ------------------------------------------------------------------ repeated measures


def test_exactly_additive_repeated_data_have_no_error_term():
    # x_ij = a_i + b_j in one decimal: the residuals are rounding error only; F was about 7e16
    rng = np.random.default_rng(31)
    a = np.round(rng.normal(10, 2, 30), 1)
    x = np.round(a[:, None] + np.array([0.1, 0.7, 1.3, 2.9])[None, :], 1)
    res = kgroups.repeated_tests(x, list("abcd"))["rm_anova"]
    assert res["statistic"] is None and "error sum of squares is zero" in res["reason"]
    assert significance.rm_anova(x).reason is not None
    sc, ss, se, _, _ = kgroups._rm_parts(x)
    assert se == 0.0
    assert float(kgroups.generalized_eta_squared_values(x)) == pytest.approx(sc / (sc + ss),
                                                                             rel=1e-15)
    sph = kgroups.mauchly(x)
    assert sph["p"] is None and sph["w"] is None
    assert kgroups.greenhouse_geisser(x) == 1.0


def test_generalized_eta_squared_stays_at_most_one_when_participants_do_not_differ():
    x = np.round(np.full(30, 5.3)[:, None] + np.array([0.1, 0.7, 1.3, 2.9])[None, :], 1)
    value = float(kgroups.generalized_eta_squared_values(x))
    assert 0.0 <= value <= 1.0
    (loo,) = jo.generalized_eta_squared(x)
    assert np.all((loo >= 0.0) & (loo <= 1.0))


@st.composite
def repeated(draw):
    n, k = draw(st.integers(3, 12)), draw(st.integers(3, 5))
    cells = draw(st.lists(st.integers(-3, 3), min_size=n * k, max_size=n * k))
    rows = np.array(cells, float).reshape(n, k)
    mode = draw(st.sampled_from(["raw", "additive", "scaled"]))
    if mode == "additive":  # exactly additive: row effect plus column effect
        rows = np.round(rows[:, :1] * 0.7 + rows[:1, :] * 0.3 + 0.1, 1)
    elif mode == "scaled":
        rows = rows * 1e-120 + 1.0
    return rows


@given(repeated())
@STEADY
def test_repeated_measures_quantities_inside_their_ranges(x):
    with np.errstate(all="ignore"):
        ges = float(kgroups.generalized_eta_squared_values(x))
    assert math.isnan(ges) or 0.0 <= ges <= 1.0
    k = x.shape[1]
    eps = kgroups.greenhouse_geisser(x)
    assert 1.0 / (k - 1) - 1e-12 <= eps <= 1.0
    tests = kgroups.repeated_tests(x, [str(j) for j in range(k)])
    for name in ("friedman", "rm_anova"):
        p = tests[name]["p"]
        assert p is None or 0.0 <= p <= 1.0
    sph = kgroups.mauchly(x)
    assert sph["p"] is None or 0.0 <= sph["p"] <= 1.0


def test_mauchly_p_is_clipped_when_the_second_order_term_overshoots():
    # k = 21 conditions on 21 participants: the second-order term pushed p to 1.14 (pingouin's
    # sphericity, which uses the same expansion, reports such values unclipped)
    rng = np.random.default_rng(32)
    seen_note = False
    for _ in range(200):
        res = kgroups.mauchly(rng.normal(size=(21, 21)))
        if res["p"] is not None:
            assert 0.0 <= res["p"] <= 1.0
            seen_note |= "clipped" in res.get("note", "")
    assert seen_note


# ------------------------------------------------------------------ paired data at tiny scale


def test_paired_differences_of_data_near_1e_minus_300_are_finite():
    base = np.array([[1.0, 3.0], [5.0, 2.0], [4.1, 4.0], [2.0, 2.0], [7.5, 1.5]])
    x = base * 1e-300
    digits = paired.difference_digits(x, None)
    assert digits > 300  # numpy.round would multiply by 10^digits = inf
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        d = paired.differences(x, digits)
    assert np.all(np.isfinite(d))
    np.testing.assert_allclose(d / 1e-300, paired.differences(base, 12), rtol=1e-12)
    assert paired.ps_dep_values(x, digits) == paired.ps_dep_values(base, 12)
    assert paired.matched_rank_biserial_values(x, digits) == pytest.approx(
        float(paired.matched_rank_biserial_values(base, 12)), rel=1e-15)


# ------------------------------------------------------------------ every p in [0, 1]


@st.composite
def samples(draw, min_size=1, max_size=40):
    size = draw(st.integers(min_size, max_size))
    kind = draw(st.sampled_from(["grid", "float", "constant", "separated"]))
    scale = draw(st.sampled_from([1.0, 1e-150, 1e150]))
    if kind == "grid":
        values = draw(st.lists(st.integers(0, 4), min_size=size, max_size=size))
    elif kind == "float":
        values = draw(st.lists(st.floats(-1e3, 1e3), min_size=size, max_size=size))
    elif kind == "constant":
        values = [draw(st.integers(-5, 5))] * size
    else:
        values = [1e3 + i for i in range(size)]
    return np.array(values, float) * scale


def _check(res):
    assert (res.p is None) == (res.statistic is None)
    if res.p is None:
        assert res.reason
    else:
        assert 0.0 <= res.p <= 1.0 and math.isfinite(res.statistic)


@given(samples(), samples())
@STEADY
def test_two_group_tests_give_p_in_range_or_a_reason(a, b):
    rng = np.random.default_rng(0)
    for name in significance.TESTS["two_groups"]:
        _check(significance.run_test("two_groups", name, (a, b), rng=rng, permutations=99))


@given(samples(min_size=2), st.integers(0, 3))
@STEADY
def test_paired_tests_give_p_in_range_or_a_reason(a, shift):
    rng = np.random.default_rng(0)
    b = np.roll(a, shift)
    x = np.column_stack([a, b])
    for name in significance.TESTS["paired"]:
        _check(significance.run_test("paired", name, (x,), rng=rng, permutations=99))


@given(st.lists(samples(max_size=15), min_size=2, max_size=4))
@STEADY
def test_k_group_tests_give_p_in_range_or_a_reason(groups):
    for name in significance.TESTS["k_groups"]:
        _check(significance.run_test("k_groups", name, tuple(groups)))


@given(repeated())
@STEADY
def test_k_repeated_tests_give_p_in_range_or_a_reason(x):
    for name in significance.TESTS["k_repeated"]:
        _check(significance.run_test("k_repeated", name, (x,)))


@given(samples(min_size=1, max_size=60))
@STEADY
def test_normality_p_values_in_range_or_absent(x):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        res = diagnostics.normality("x", x)
    for p in (res.shapiro_p, res.dagostino_p, res.anderson_p):
        assert p is None or 0.0 <= p <= 1.0
    for se in (res.skewness_se, res.kurtosis_se):
        assert se is None or (math.isfinite(se) and se > 0)


def test_shape_statistics_are_scale_free_at_extreme_scales():
    x = np.random.default_rng(41).gamma(2.0, 1.0, 40)
    plain = diagnostics.normality("x", x)
    for scale in (1e-150, 1e150):
        far = diagnostics.normality("x", x * scale)
        assert far.skewness == pytest.approx(plain.skewness, rel=1e-12)
        assert far.excess_kurtosis == pytest.approx(plain.excess_kurtosis, rel=1e-12)
        assert far.dagostino_p == pytest.approx(plain.dagostino_p, rel=1e-10)


# ------------------------------------------------------------------ through the whole audit


@pytest.mark.slow
def test_audit_of_separated_groups_with_tiny_spread_gives_a_finite_document():
    rng = np.random.default_rng(51)
    frame = pd.DataFrame({"y": np.concatenate([10.0 + 1e-4 * rng.standard_normal(12),
                                               1e-4 * rng.standard_normal(12)]),
                          "g": np.repeat(["a", "b"], 12)})
    result = audit(frame, outcome="y", group="g", resamples=200, seed=3)
    text = render.to_json(result)
    doc = json.loads(text, parse_constant=lambda name: pytest.fail(f"JSON holds {name}"))
    d = doc["effects"]["cohen_d"]
    assert d["ci_method"] == "noncentral_t" and "numerical integration" in d["intervals"][0]["note"]
    assert d["ci_low"] < d["estimate"] < d["ci_high"]
    assert doc["effects"]["prob_superiority"]["estimate"] == 1.0  # complete separation
    assert doc["effects"]["cliff_delta"]["estimate"] == 1.0


# ------------------------------------------------------------------ permutation tests at large n


def test_permutation_tests_at_large_n_do_not_print_a_huge_count():
    # C(16000, 8000) has 4,815 digits and 2^15000 has 4,516: Python 3.11 refuses to turn such an
    # integer into text (ValueError), which the method description used to do
    rng = np.random.default_rng(61)
    a, b = rng.normal(size=8000), rng.normal(size=8000)
    res = significance.permutation_mean_difference(a, b, rng=rng, permutations=99)
    assert "about 10^4814" in res.method and 0.0 < res.p <= 1.0
    assert res.details["rearrangements"] == 99 and res.details["exact"] is False
    res = significance.sign_flip_mean(rng.normal(size=(15000, 2)), rng=rng, permutations=99)
    assert "about 10^4515" in res.method and 0.0 < res.p <= 1.0
    small = significance.permutation_mean_difference(a[:3], b[:2], rng=rng)
    assert small.method == "exact: all 10 distinct rearrangements"
    assert significance._capped_comb(40, 20, 10**15) == math.comb(40, 20)
    assert significance._capped_comb(80, 40, 10**15) == 10**15 + 1


def test_permutation_tests_with_a_single_value_give_a_reason():
    rng = np.random.default_rng(62)
    res = significance.permutation_mean_difference(np.array([1.0]), np.array([2.0, 3.0]), rng=rng)
    assert res.p is None and "at least two" in res.reason
    res = significance.sign_flip_mean(np.array([[1.0, 2.0]]), rng=rng)
    assert res.p is None and "at least two" in res.reason


@pytest.mark.slow
def test_tie_correction_of_the_diagnostics_near_all_tied():
    n = 2_000_000
    x = np.zeros(n)
    assert diagnostics.ties("x", x).tie_correction == 0.0  # every value tied
    x[0] = 1.0  # one value apart: C = 3 / (N + 1) exactly (scipy.stats.tiecorrect's definition)
    c = diagnostics.ties("x", x).tie_correction
    assert c == pytest.approx(stats.tiecorrect(stats.rankdata(x)), rel=1e-6)
    assert c == pytest.approx(3.0 / (n + 1), rel=1e-6)


@pytest.mark.parametrize("n, decimals", [(80, None), (120, 1), (300, 2)])
def test_paired_shift_selected_above_the_listing_limit_equals_the_median_of_all_averages(
        n, decimals):
    rng = np.random.default_rng(n)
    x = rng.normal(0.2, 1.0, (3, n, 2))
    if decimals is not None:
        x = np.round(x, decimals)
    assert n * (n + 1) // 2 > paired.WALSH_LISTED_MAX  # the selecting branch
    got = paired.hodges_lehmann_values(x)
    for row, value in zip(x, got):
        d = paired.differences(row, 12)
        i, j = np.triu_indices(n)  # numpy: the plain median of every Walsh average
        assert value == pytest.approx(float(np.median((d[i] + d[j]) / 2.0)), rel=1e-15, abs=1e-15)


@pytest.mark.slow
def test_paired_shift_at_50000_pairs_stays_linear_in_memory():
    # Listing the 1.25e9 Walsh averages needed 9.3 GiB; selection needs O(n).
    x = np.random.default_rng(7).exponential(1.0, (50_000, 2))
    value = paired.hodges_lehmann_values(x)
    est = paired.hodges_lehmann(x[:, 0], x[:, 1], 0.95)
    assert value == est.estimate
    assert est.interval.low <= value <= est.interval.high
