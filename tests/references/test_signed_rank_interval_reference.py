"""Reference checks for `auditor.signed_rank_interval`: the sign-test interval of PS_dep, the
score-type interval of the matched-pairs rank-biserial correlation and its image for
r = z / sqrt(N), each against a computation outside the project.

Sources:
  * Clopper-Pearson limits: statsmodels.stats.proportion.proportion_confint(method='beta') and
    scipy.stats.binomtest(...).proportion_ci(method='exact'), both double precision (1e-10);
  * sign-test p: scipy.stats.binomtest (two-sided);
  * signed-rank p: scipy.stats.wilcoxon (zero_method='wilcox', correction=False, method='approx'
    for the tie-corrected normal approximation; method='exact' for untied data), and its
    zstatistic for r = z / sqrt(N);
  * orthant probabilities: scipy.stats.multivariate_normal.cdf (Genz' algorithm, tolerance set
    to 1e-10) and scipy.integrate.quad of the one-dimensional integral;
  * moments of T+ and r under the normal model: Monte Carlo with ranks from
    scipy.stats.rankdata (within 4 standard errors), and the closed-form null variance
    n(n+1)(2n+1)/24 of the signed-rank sum (Wilcoxon 1945);
  * coverage: simulation from normal differences (marked slow).
Hypothesis runs derandomized (a fixed search), so every run explores the same cases.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize, stats
from statsmodels.stats.proportion import proportion_confint

from auditor import paired
from auditor import signed_rank_interval as sri

STEADY = settings(derandomize=True, deadline=None, max_examples=150, database=None,
                  suppress_health_check=[HealthCheck.too_slow])
LEVELS = (0.8, 0.9, 0.95, 0.99)


def _excludes(interval, null):
    return interval.low > null or interval.high < null


def _tie_term(d):
    """sum(t^3 - t) over the tie blocks of |d| among the non-zero differences (counted here with
    numpy.unique, independently of the project's ranking code)."""
    _, counts = np.unique(np.abs(d[d != 0]), return_counts=True)
    return float(np.sum(counts.astype(float) ** 3 - counts))


def _scipy_approx_p(d):
    return float(stats.wilcoxon(d, zero_method="wilcox", correction=False,
                                method="approx").pvalue)


# ------------------------------------------------------------------ undefined and bad input


@pytest.mark.parametrize("fn", [sri.sign_test_interval, sri.signed_rank_score_interval,
                                sri.r_from_z_interval])
@pytest.mark.parametrize("d", [np.zeros(4), np.zeros(1), np.array([])])
def test_every_difference_zero_gives_none(fn, d):
    assert fn(d, 0.95) is None


@pytest.mark.parametrize("fn", [sri.sign_test_interval, sri.signed_rank_score_interval,
                                sri.r_from_z_interval])
@pytest.mark.parametrize("d, level", [(np.ones((2, 2)), 0.95), (np.array([1.0, np.nan]), 0.95),
                                      (np.array([1.0, -2.0]), 1.0), (np.array([1.0]), 0.0),
                                      (np.array([1.0]), True), (np.array([1.0]), "0.95")])
def test_bad_arguments_raise(fn, d, level):
    with pytest.raises(ValueError):
        fn(d, level)


@pytest.mark.parametrize("critical", [0.0, -1.0, math.nan, True])
def test_bad_critical_raises(critical):
    with pytest.raises(ValueError):
        sri.signed_rank_score_interval(np.array([1.0, 2.0, -0.5]), 0.95, critical)


@pytest.mark.parametrize("n, expected", [(0, None), (51, None)])
def test_exact_critical_outside_its_range_is_none(n, expected):
    assert sri.exact_signed_rank_critical(n, 0.95) is expected


@pytest.mark.parametrize("n", [-1, 2.5, True])
def test_exact_critical_rejects_bad_n(n):
    with pytest.raises(ValueError):
        sri.exact_signed_rank_critical(n, 0.95)


# ------------------------------------------------------------------ sign test: Clopper-Pearson


@pytest.mark.parametrize("pos, neg, zero", [(7, 3, 0), (7, 3, 5), (0, 4, 2), (9, 0, 1),
                                            (12, 12, 30), (1, 0, 0), (30, 0, 0), (18, 2, 9)])
@pytest.mark.parametrize("level", [0.9, 0.95])
def test_sign_interval_solves_its_defining_inequality(pos, neg, zero, level):
    """The limits are where (PS-hat - psi)^2 = c^2 (1 - N0/N) psi (1 - psi) / N, checked by an
    independent root search with scipy.optimize.brentq on that equation, and the interval holds
    the estimate."""
    d = np.array([2.5] * pos + [-1.0] * neg + [0.0] * zero)
    iv = sri.sign_test_interval(d, level)
    n, m = d.size, pos + neg
    c = sri.exact_sign_critical(m, level)
    estimate = (pos + zero / 2) / n  # PS_dep, Grissom & Kim's definition
    assert iv.low <= estimate <= iv.high and 0.0 <= iv.low and iv.high <= 1.0
    assert iv.method == "sign_test_score"
    if not np.isfinite(c):
        assert (iv.low, iv.high) == (0.0, 1.0)
        return

    def gap(psi):
        return (estimate - psi) ** 2 - c * c * (1 - zero / n) * psi * (1 - psi) / n

    for limit, end in ((iv.low, 0.0), (iv.high, 1.0)):
        if gap(end) <= 0 or estimate == end:  # the set reaches the end of [0, 1]
            assert limit == pytest.approx(end, abs=1e-12)
        else:
            inner = min(max(estimate, 1e-9), 1 - 1e-9)  # gap < 0 there, also at PS-hat = 0, 1
            root = optimize.brentq(gap, min(end, inner), max(end, inner), xtol=1e-14)
            assert limit == pytest.approx(root, abs=1e-10)


@pytest.mark.slow
def test_exact_sign_critical_matches_binomtest_at_every_count():
    """|N+ - N-| / sqrt(m) > c exactly when scipy.stats.binomtest rejects, for m = 1..80."""
    for level in (0.9, 0.95, 0.99):
        for m in range(1, 81):
            c = sri.exact_sign_critical(m, level)
            for x in range(m + 1):
                z = abs(2 * x - m) / np.sqrt(m)
                assert (z > c) == (stats.binomtest(x, m, 0.5).pvalue < 1 - level), (m, x)


@pytest.mark.slow
def test_sign_interval_coverage_with_zero_differences():
    """Differences rounded to whole units, so that zeros are common; the true PS_dep of the
    rounded population is computed exactly from the normal distribution function."""
    rng = np.random.default_rng(99)
    reps, lines, worst = 2000, [], 1.0
    for n in (10, 20, 50):
        for mu in (0.0, 0.8, 1.6, 2.4):
            # D = round(N(mu, 1)): P(D > 0) = P(N > 0.5), P(D = 0) = P(-0.5 < N < 0.5)
            p_pos = stats.norm.sf(0.5 - mu)
            p_zero = stats.norm.cdf(0.5 - mu) - stats.norm.cdf(-0.5 - mu)
            truth = p_pos + p_zero / 2
            hit = usable = 0
            for _ in range(reps):
                d = np.round(rng.normal(mu, 1.0, n))
                iv = sri.sign_test_interval(d, 0.95)
                if iv is None:
                    continue
                usable += 1
                hit += iv.low <= truth <= iv.high
            cov = hit / usable
            worst = min(worst, cov)
            lines.append(f"n={n:3d} PS_dep={truth:.3f} zero share={p_zero:.2f}: coverage {cov:.3f}")
    print("\nsign-test score interval, nominal 95%, 2000 replications\n" + "\n".join(lines))
    assert worst >= 0.90


@STEADY
@given(pos=st.integers(0, 60), neg=st.integers(0, 60), zero=st.integers(0, 40),
       level=st.sampled_from(LEVELS))
def test_sign_interval_excludes_half_iff_binomtest_rejects(pos, neg, zero, level):
    d = np.concatenate([np.full(pos, 0.7), np.full(neg, -3.0), np.zeros(zero)])
    iv = sri.sign_test_interval(d, level)
    if pos + neg == 0:
        assert iv is None
        return
    test = stats.binomtest(pos, pos + neg, 0.5)  # scipy, two-sided
    # the symmetry argument: scipy's two-sided p is twice the smaller tail, capped at 1
    binom = stats.binom(pos + neg, 0.5)
    assert test.pvalue == pytest.approx(min(1.0, 2 * min(binom.cdf(pos), binom.sf(pos - 1))),
                                        rel=1e-12)
    assert _excludes(iv, 0.5) == (test.pvalue < 1 - level)


# ------------------------------------------------------------------ normal-model probabilities


def _p4_quad(mu):
    # P(D1 + D2 > 0, D1 + D3 > 0) = int phi(x - mu) Phi(x + mu)^2 dx, D ~ N(mu, 1)
    val, _ = integrate.quad(lambda x: stats.norm.pdf(x - mu) * stats.norm.cdf(x + mu) ** 2,
                            -np.inf, np.inf, epsabs=1e-14, epsrel=1e-12)
    return val


def _p3_quad(mu):
    # P(D1 > 0, D1 + D2 > 0) = int_0^inf phi(x - mu) Phi(x + mu) dx
    val, _ = integrate.quad(lambda x: stats.norm.pdf(x - mu) * stats.norm.cdf(x + mu),
                            0, np.inf, epsabs=1e-14, epsrel=1e-12)
    return val


@pytest.mark.parametrize("mu", [-3.0, -1.2, -0.3, 0.0, 0.15, 0.7, 1.9, 4.0])
def test_orthant_probabilities_against_scipy(mu):
    p1, p2, p3, p4 = (float(v) for v in sri.walsh_probabilities(mu))
    assert p1 == pytest.approx(stats.norm.cdf(mu), abs=1e-15)
    assert p2 == pytest.approx(stats.norm.cdf(math.sqrt(2) * mu), abs=1e-15)
    assert p3 == pytest.approx(_p3_quad(mu), abs=1e-11)
    assert p4 == pytest.approx(_p4_quad(mu), abs=1e-11)
    # bivariate normal orthants: standardised sums have correlations 1/sqrt(2) and 1/2
    r = 1 / math.sqrt(2)
    cov3 = [[1, r], [r, 1]]
    cov4 = [[1, 0.5], [0.5, 1]]
    assert p3 == pytest.approx(stats.multivariate_normal.cdf([mu, math.sqrt(2) * mu], cov=cov3,
                                                            abseps=1e-10, releps=1e-10),
                               abs=1e-8)
    assert p4 == pytest.approx(stats.multivariate_normal.cdf([math.sqrt(2) * mu] * 2, cov=cov4,
                                                            abseps=1e-10, releps=1e-10),
                               abs=1e-8)


def test_probabilities_at_zero_are_the_arcsine_values():
    # Sheppard's formula P(X > 0, Y > 0) = 1/4 + arcsin(rho) / (2 pi)
    p1, p2, p3, p4 = (float(v) for v in sri.walsh_probabilities(0.0))
    assert (p1, p2) == (0.5, 0.5)
    assert p3 == pytest.approx(0.25 + math.asin(1 / math.sqrt(2)) / (2 * math.pi), abs=1e-15)
    assert p4 == pytest.approx(0.25 + math.asin(0.5) / (2 * math.pi), abs=1e-15)


@pytest.mark.parametrize("n", [1, 2, 3, 4, 5, 10, 30, 50, 200, 1000])
def test_null_variance_is_wilcoxons_closed_form(n):
    assert float(sri.signed_rank_variance(n, 0.0)) == pytest.approx(
        n * (n + 1) * (2 * n + 1) / 24, rel=1e-13)
    assert float(sri.signed_rank_mean(n, 0.0)) == pytest.approx(n * (n + 1) / 4, rel=1e-15)
    assert float(sri.expected_rank_biserial(n, 0.0)) == 0.0


@pytest.mark.parametrize("mu", [-2.0, -0.4, 0.3, 1.1, 3.5])
def test_one_difference_is_a_bernoulli(mu):
    # n = 1: T+ = 1(D > 0), so Var = Phi(mu) Phi(-mu) and rho_1 = 2 Phi(mu) - 1
    q = stats.norm.cdf(mu)
    assert float(sri.signed_rank_variance(1, mu)) == pytest.approx(q * (1 - q), rel=1e-12)
    assert float(sri.expected_rank_biserial(1, mu)) == pytest.approx(2 * q - 1, abs=1e-15)


def _walsh_positive(sample):
    i, j = np.triu_indices(sample.shape[1])
    return np.sum(sample[:, i] + sample[:, j] > 0, axis=1)


def _se_of_variance(x):
    m2 = np.var(x)
    m4 = np.mean((x - x.mean()) ** 4)
    return math.sqrt((m4 - m2 * m2) / x.size)


@pytest.mark.parametrize("n", [3, 5, 10, 30])
@pytest.mark.parametrize("mu", [0.0, 0.25, 0.8, 1.6])
@pytest.mark.slow
def test_moments_against_monte_carlo(n, mu):
    rng = np.random.default_rng(1000 * n + int(100 * mu))
    reps = 60_000
    sample = rng.normal(mu, 1.0, (reps, n))
    # R+ from scipy's ranks of |D| (the index's definition) and T+ from the Walsh averages
    ranks = stats.rankdata(np.abs(sample), axis=1)
    r_plus = np.sum(np.where(sample > 0, ranks, 0.0), axis=1)
    t_plus = _walsh_positive(sample)
    np.testing.assert_array_equal(r_plus, t_plus)  # Tukey's identity, continuous data
    s = n * (n + 1) / 2
    r_hat = 2 * r_plus / s - 1
    mean, var = float(sri.signed_rank_mean(n, mu)), float(sri.signed_rank_variance(n, mu))
    assert abs(t_plus.mean() - mean) <= 4 * t_plus.std() / math.sqrt(reps)
    assert abs(t_plus.var() - var) <= 4 * _se_of_variance(t_plus.astype(float))
    rho, v = float(sri.expected_rank_biserial(n, mu)), float(sri.rank_biserial_variance(n, mu))
    assert abs(r_hat.mean() - rho) <= 4 * r_hat.std() / math.sqrt(reps)
    assert abs(r_hat.var() - v) <= 4 * _se_of_variance(r_hat)


# ------------------------------------------------------------------ signed-rank score interval


def _assert_agrees_with_approximate_test(d, level):
    iv = sri.signed_rank_score_interval(d, level)
    if np.all(d == 0):
        assert iv is None
        return
    assert _excludes(iv, 0.0) == (_scipy_approx_p(d) < 1 - level)


@STEADY
@given(values=st.lists(st.integers(-6, 6), min_size=1, max_size=60),
       shift=st.integers(-3, 3), level=st.sampled_from(LEVELS))
def test_score_interval_excludes_zero_iff_approximate_test_rejects_tied_data(values, shift,
                                                                             level):
    d = np.array(values, dtype=float) + shift  # whole numbers: ties and zeros
    _assert_agrees_with_approximate_test(d, level)


@STEADY
@given(values=st.lists(st.floats(-50, 50, allow_nan=False), min_size=1, max_size=80),
       shift=st.floats(-30, 30), level=st.sampled_from(LEVELS))
def test_score_interval_excludes_zero_iff_approximate_test_rejects_continuous(values, shift,
                                                                              level):
    d = np.round(np.array(values) + shift, 6)
    _assert_agrees_with_approximate_test(d, level)


@STEADY
@given(magnitudes=st.sets(st.integers(1, 10**6), min_size=1, max_size=50),
       uniforms=st.lists(st.floats(0, 1), min_size=50, max_size=50),
       share=st.sampled_from([0.5, 0.7, 0.85, 1.0]), level=st.sampled_from(LEVELS))
def test_score_interval_with_exact_critical_matches_exact_test(magnitudes, uniforms, share,
                                                               level):
    mags = np.array(sorted(magnitudes), dtype=float)  # distinct |d|, no zeros: untied
    d = np.where(np.array(uniforms[:mags.size]) < share, mags, -mags)
    c = sri.exact_signed_rank_critical(d.size, level)
    iv = sri.signed_rank_score_interval(d, level, critical=c)
    p = float(stats.wilcoxon(d, method="exact").pvalue)  # scipy's exact untied test
    assert _excludes(iv, 0.0) == (p < 1 - level)


def _data_with_t_plus(n, t):
    """Untied differences 1..n with the signs chosen so that T+ = t (greedy subset sum)."""
    signs, left = np.full(n, -1.0), t
    for rank in range(n, 0, -1):
        if rank <= left:
            signs[rank - 1], left = 1.0, left - rank
    return signs * np.arange(1, n + 1)


@pytest.mark.parametrize("level", LEVELS)
def test_exact_critical_separates_scipys_exact_decisions(level):
    for n in range(1, 51):
        c = sri.exact_signed_rank_critical(n, level)
        s, sd = n * (n + 1) / 2, math.sqrt(n * (n + 1) * (2 * n + 1) / 24)
        if math.isinf(c):  # no attainable T+ rejects: the most extreme one does not
            assert float(stats.wilcoxon(np.arange(1.0, n + 1), method="exact").pvalue) \
                >= 1 - level
            continue
        # the largest T+ with |z| <= c is kept and the next one is rejected by scipy
        t_kept = math.floor(s / 2 + c * sd)
        for t, rejected in ((t_kept, False), (t_kept + 1, True)):
            d = _data_with_t_plus(n, t)
            assert np.sum(np.arange(1, n + 1)[d > 0]) == t
            p = float(stats.wilcoxon(d, method="exact").pvalue)
            assert (p < 1 - level) == rejected, (n, t, p)


CASES = {
    "continuous": np.random.default_rng(7).normal(0.4, 1.0, 25),
    "ties_and_zeros": np.array([1, 1, 2, -1, 0, 3, 2, 2, -2, 0, 4, 1, 1, -3, 2], dtype=float),
    "small": np.array([0.5, -1.5, 2.0]),
    "one_signed": np.array([0.3, 1.2, 2.2, 0.8, 1.9, 0.1]),
    "one_signed_tied": np.array([2.0, 2.0, 2.0, 0.0, 2.0]),
    "one_negative": np.array([-4.0]),
}


@pytest.mark.parametrize("name", list(CASES))
@pytest.mark.parametrize("level", [0.9, 0.95])
def test_score_interval_is_the_set_it_defines(name, level):
    """Brute force: evaluate |r - rho_n(mu)| <= c sqrt(lambda V_n(mu)) on a fine grid of mu; the
    points inside form one run whose ends are the computed limits (to the grid's step)."""
    d = CASES[name]
    nz = d[d != 0]
    n = nz.size
    ranks = stats.rankdata(np.abs(nz))  # scipy mid-ranks
    r_hat = (np.sum(ranks[nz > 0]) - np.sum(ranks[nz < 0])) / (n * (n + 1) / 2)
    lam = 1 - _tie_term(d) / 48 / (n * (n + 1) * (2 * n + 1) / 24)
    c = stats.norm.ppf(0.5 + level / 2)
    mu = np.linspace(-12, 12, 400_001)
    rho = sri.expected_rank_biserial(n, mu)
    inside = np.abs(r_hat - rho) <= c * np.sqrt(lam * sri.rank_biserial_variance(n, mu))
    idx = np.flatnonzero(inside)
    assert np.all(np.diff(idx) == 1)  # one run: the set is an interval
    step = float(np.max(np.diff(rho)))
    iv = sri.signed_rank_score_interval(d, level)
    assert abs(iv.low - rho[idx[0]]) <= step + 1e-12
    assert abs(iv.high - rho[idx[-1]]) <= step + 1e-12
    assert -1.0 <= iv.low <= r_hat <= iv.high <= 1.0


@pytest.mark.parametrize("name", list(CASES))
def test_score_interval_mirrors_under_swap_and_ignores_scale(name):
    d = CASES[name]
    a, b = sri.signed_rank_score_interval(d, 0.95), sri.signed_rank_score_interval(-d, 0.95)
    assert a.low == pytest.approx(-b.high, abs=1e-12) and a.high == pytest.approx(-b.low,
                                                                                  abs=1e-12)
    scaled = sri.signed_rank_score_interval(37.5 * d, 0.95)
    assert (scaled.low, scaled.high) == (a.low, a.high)


@pytest.mark.parametrize("n", [1, 2, 3, 5, 10, 20, 50, 200, 1000])
def test_one_signed_data_give_a_proper_interval(n):
    d = np.linspace(0.1, 3.0, n)
    up, down = sri.signed_rank_score_interval(d, 0.95), sri.signed_rank_score_interval(-d, 0.95)
    assert up.high == 1.0 and -1.0 <= up.low < 1.0
    assert (down.low, down.high) == (-1.0, -up.low)
    # the limit solves 1 - rho = c sqrt(V_n(mu(rho))) (the set's boundary, not a point)
    mu = optimize.brentq(lambda m: float(sri.expected_rank_biserial(n, m)) - up.low, -20, 20,
                         xtol=1e-14)
    c = stats.norm.ppf(0.975)
    assert 1 - up.low == pytest.approx(c * math.sqrt(float(sri.rank_biserial_variance(n, mu))),
                                       rel=1e-8)


def test_one_signed_interval_narrows_as_n_grows():
    lows = [sri.signed_rank_score_interval(np.arange(1.0, n + 1), 0.95).low
            for n in (1, 2, 3, 5, 10, 20, 50, 200)]
    assert np.all(np.diff(lows) > 0)
    assert lows[4] < 0.9  # n = 10: clearly below 1


def test_one_signed_interval_shown_at_n_10():
    iv = sri.signed_rank_score_interval(np.arange(1.0, 11), 0.95)
    start = time.perf_counter()
    for _ in range(50):
        sri.signed_rank_score_interval(np.arange(1.0, 11), 0.95)
    each = (time.perf_counter() - start) / 50
    print(f"\nr = 1, n = 10: [{iv.low:.4f}, {iv.high:.4f}]; {1000 * each:.2f} ms per interval")
    assert iv.low < iv.high == 1.0


@pytest.mark.parametrize("n", [3, 10, 40])
def test_larger_level_gives_wider_interval(n):
    d = np.random.default_rng(n).normal(0.5, 1.0, n)
    ivs = [sri.signed_rank_score_interval(d, lv) for lv in LEVELS]
    for narrow, wide in zip(ivs, ivs[1:]):
        assert wide.low <= narrow.low and narrow.high <= wide.high


def test_infinite_critical_gives_the_whole_range():
    iv = sri.signed_rank_score_interval(np.arange(1.0, 5), 0.95,
                                        sri.exact_signed_rank_critical(4, 0.95))
    assert (iv.low, iv.high) == (-1.0, 1.0)


# ------------------------------------------------------------------ r = z / sqrt(N)


@pytest.mark.parametrize("name", ["continuous", "ties_and_zeros", "small", "one_signed_tied"])
def test_r_from_z_is_linear_in_rank_biserial(name):
    d = CASES[name]
    x = np.column_stack([d, np.zeros_like(d)])
    n = int(np.sum(d != 0))
    k = sri.r_from_z_slope(n, _tie_term(d))
    r_z = float(paired.r_from_z_values(x))
    r_rb = float(paired.matched_rank_biserial_values(x))
    assert r_z == pytest.approx(k * r_rb, abs=1e-13)
    # scipy's zstatistic is signed by min(T+, T-): compare magnitudes
    z = stats.wilcoxon(d, zero_method="wilcox", correction=False, method="approx").zstatistic
    assert abs(r_z) == pytest.approx(abs(z) / math.sqrt(n), abs=1e-12)
    base, mapped = sri.signed_rank_score_interval(d, 0.95), sri.r_from_z_interval(d, 0.95)
    assert mapped.method == "signed_rank_score_via_rank_biserial"
    assert mapped.low == pytest.approx(k * base.low, abs=1e-15)
    assert mapped.high == pytest.approx(k * base.high, abs=1e-15)
    assert mapped.low <= r_z <= mapped.high
    assert _excludes(mapped, 0.0) == (_scipy_approx_p(d) < 0.05)


@pytest.mark.parametrize("n", [1, 2, 7, 50, 10_000])
def test_untied_slope_closed_form(n):
    assert sri.r_from_z_slope(n) == pytest.approx(math.sqrt(3 * (n + 1) / (2 * (2 * n + 1))),
                                                  rel=1e-14)


# ------------------------------------------------------------------ coverage (slow)


def _mu_for_rho(n, rho):
    return optimize.brentq(lambda m: float(sri.expected_rank_biserial(n, m)) - rho, 0, 30,
                           xtol=1e-14)


@pytest.mark.slow
def test_coverage_simulation():
    rng = np.random.default_rng(20250117)
    reps = 400
    lines = []
    worst = 1.0
    for n in (5, 10, 20):
        for target in (0.8, 0.9, 0.98):
            mu_r = _mu_for_rho(n, target)
            hit_r = hit_s = 0
            for _ in range(reps):
                d = rng.normal(mu_r, 1.0, n)
                iv = sri.signed_rank_score_interval(d, 0.95)
                hit_r += iv.low <= target <= iv.high
            mu_s = stats.norm.ppf(target)  # PS_dep = P(D > 0) = Phi(mu) without zeros
            for _ in range(reps):
                d = rng.normal(mu_s, 1.0, n)
                iv = sri.sign_test_interval(d, 0.95)
                hit_s += iv.low <= target <= iv.high
            cov_r, cov_s = hit_r / reps, hit_s / reps
            worst = min(worst, cov_r, cov_s)
            lines.append(f"n={n:3d} true={target:.2f}  rank-biserial {cov_r:.3f}"
                         f"  PS_dep {cov_s:.3f}")
    print("\ncoverage of nominal 95% intervals, 400 replications each\n" + "\n".join(lines))
    assert worst >= 0.88
