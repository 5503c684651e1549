"""Reference checks: every paired-design statistic of `auditor` against a computation outside the
project (scipy, pingouin, statsmodels, pandas, or a closed-form derivation done here).

Data are open datasets shipped inside installed packages (no network):
  * pingouin's `rm_anova_wide` (scores before and one week after, one decimal; one participant
    lacks the first score), `blandaltman` (two measurement methods, whole numbers),
    `partial_corr` (x and y, continuous, no ties), `mixed_anova` (scores in August and January,
    continuous), `rm_anova` (desire to kill an insect rated in half points, high vs low
    disgustingness at high frighteningness: many zero differences and ties) and
    `pairwise_tests` (drug A vs B, whole numbers, n = 11);
  * statsmodels' bundled `elnino` (monthly sea-surface temperature, January vs July over 61
    years, two decimals).

Direction: d = first - second; every signed effect is the first condition relative to the second.
Differences are rounded to the data's decimals (`digits`) before signs, zeros and ranks are taken,
so every rank-based reference below is computed on the same rounded differences.
The source of each reference value is named in a comment beside the assertion; docs/references.md
lists the same checks with their tolerances and the reason for each tolerance.
"""

from __future__ import annotations

import functools
import itertools
import math
import statistics
from fractions import Fraction

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
import statsmodels.datasets as sm_datasets
from scipy import stats
from statsmodels.stats.proportion import proportion_confint

from auditor.errors import DesignError
from auditor import diagnostics, paired, resampling
from auditor.pipeline import audit
from tests.references.common import quiet_pingouin as _quiet_pingouin

LEVEL = 0.95

# ---------------------------------------------------------------------------------- datasets


def _wide_pair(frame, first, second):
    rows = frame.dropna(subset=[first, second])
    return rows[first].to_numpy(dtype=float), rows[second].to_numpy(dtype=float)


def _long_pair(frame, outcome, within, subject, first, second):
    piv = frame.pivot(index=subject, columns=within, values=outcome).dropna(subset=[first, second])
    return piv[first].to_numpy(dtype=float), piv[second].to_numpy(dtype=float)


def _rm_anova_disgust():
    frame = pg.read_dataset("rm_anova")
    frame = frame[frame["Frighteningness"] == "High"]
    return _long_pair(frame, "DesireToKill", "Disgustingness", "Subject", "High", "Low")


DATASETS = {
    # name: (loader returning (first, second), decimals the data carry)
    "rm_anova_wide_before_vs_week1": (
        lambda: _wide_pair(pg.read_dataset("rm_anova_wide"), "Before", "1 week"), 1),   # 11 pairs
    "elnino_jan_vs_jul": (
        lambda: _wide_pair(sm_datasets.elnino.load_pandas().data, "JAN", "JUL"), 2),     # 61 pairs
    "blandaltman_a_vs_b": (
        lambda: _wide_pair(pg.read_dataset("blandaltman"), "A", "B"), 0),                # 30 pairs
    "partial_corr_x_vs_y": (
        lambda: _wide_pair(pg.read_dataset("partial_corr"), "x", "y"), 12),             # 30, untied
    "mixed_anova_aug_vs_jan": (
        lambda: _long_pair(pg.read_dataset("mixed_anova"), "Scores", "Time", "Subject",
                           "August", "January"), 12),                                   # 60, untied
    "rm_anova_disgust_high_vs_low": (_rm_anova_disgust, 1),                              # 90, zeros
    "pairwise_tests_drug_a_vs_b": (
        lambda: _long_pair(pg.read_dataset("pairwise_tests"), "Scores", "Drug", "Subject",
                           "A", "B"), 0),                                               # 11, a zero
}
NAMES = list(DATASETS)
UNTIED = ["partial_corr_x_vs_y", "mixed_anova_aug_vs_jan"]
TIED = [n for n in NAMES if n not in UNTIED]


@functools.lru_cache(maxsize=None)
def load(name):
    loader, digits = DATASETS[name]
    a, b = loader()
    a.setflags(write=False)
    b.setflags(write=False)
    return a, b, digits


def rounded_d(name):
    """d = first - second rounded to the data's decimals with numpy (the references' input)."""
    a, b, digits = load(name)
    return np.round(a - b, digits)


def test_datasets_are_the_intended_pairs():
    # Sizes, zeros and tie blocks counted with pandas on the shipped files; the other checks rely
    # on this mix (small and large n, with and without ties and zeros).
    sizes = {name: load(name)[0].size for name in NAMES}
    assert sizes == {"rm_anova_wide_before_vs_week1": 11, "elnino_jan_vs_jul": 61,
                     "blandaltman_a_vs_b": 30, "partial_corr_x_vs_y": 30,
                     "mixed_anova_aug_vs_jan": 60, "rm_anova_disgust_high_vs_low": 90,
                     "pairwise_tests_drug_a_vs_b": 11}
    for name in UNTIED:
        s = pd.Series(np.abs(rounded_d(name)))
        assert not s.duplicated().any() and (s > 0).all()
    assert (rounded_d("rm_anova_disgust_high_vs_low") == 0).sum() == 25
    assert (rounded_d("pairwise_tests_drug_a_vs_b") == 0).sum() == 1


# ---------------------------------------------------------------------------- mean difference


@pytest.mark.parametrize("level", [0.95, 0.90])
@pytest.mark.parametrize("name", NAMES)
def test_mean_difference_and_paired_t_interval(name, level):
    a, b, digits = load(name)
    est = paired.mean_difference(a, b, level, digits)
    ci = stats.ttest_rel(a, b).confidence_interval(confidence_level=level)  # scipy paired t
    assert est.value == pytest.approx(np.mean(a) - np.mean(b), rel=1e-12, abs=1e-12)
    assert est.interval.method == "paired_t"
    assert est.interval.low == pytest.approx(ci.low, rel=1e-9)
    assert est.interval.high == pytest.approx(ci.high, rel=1e-9)


# ---------------------------------------------------------------------------------------- d_z


@pytest.mark.parametrize("name", NAMES)
def test_d_z_point_estimate(name):
    a, b, digits = load(name)
    est = paired.d_z(a, b, LEVEL, digits)
    # pingouin: mean(x - y) / SD(x - y), ddof = 1
    assert est.value == pytest.approx(
        _quiet_pingouin(pg.compute_effsize, a, b, paired=True, eftype="cohen_dz"), rel=1e-10)
    # scipy: d_z = t / sqrt(n) for the paired t statistic
    assert est.value == pytest.approx(stats.ttest_rel(a, b).statistic / math.sqrt(a.size),
                                      rel=1e-10)


@pytest.mark.parametrize("level", [0.95, 0.80])
@pytest.mark.parametrize("name", NAMES)
def test_d_z_noncentral_t_limits_invert_the_distribution(name, level):
    a, b, digits = load(name)
    n = a.size
    est = paired.d_z(a, b, level, digits)
    assert est.interval.method == "noncentral_t"
    t_obs = est.value * math.sqrt(n)
    # Defining property (scipy.stats.nct, df = n - 1, ncp = limit * sqrt(n)):
    # P(T <= t_obs | lower) = (1 + level)/2 and P(T <= t_obs | upper) = (1 - level)/2.
    assert stats.nct.cdf(t_obs, n - 1, est.interval.low * math.sqrt(n)) == pytest.approx(
        (1 + level) / 2, abs=1e-8)
    assert stats.nct.cdf(t_obs, n - 1, est.interval.high * math.sqrt(n)) == pytest.approx(
        (1 - level) / 2, abs=1e-8)
    assert est.interval.low < est.value < est.interval.high


# ------------------------------------------------------------------------------ d_av and d_rm


@pytest.mark.parametrize("name", NAMES)
def test_d_av_against_pingouin_and_formula(name):
    a, b, digits = load(name)
    est = paired.d_av(a, b, LEVEL, digits)
    # pingouin.compute_effsize(paired=True, eftype='cohen') is d_av (Cumming 2012):
    # (mean_x - mean_y) / sqrt((s_x^2 + s_y^2) / 2); its source says so, and it is not d_z.
    ref = _quiet_pingouin(pg.compute_effsize, a, b, paired=True, eftype="cohen")
    assert est.value == pytest.approx(ref, rel=1e-10)
    # The same formula written here with pandas (ddof = 1)
    sa, sb = pd.Series(a), pd.Series(b)
    d_av = (sa.mean() - sb.mean()) / math.sqrt((sa.var() + sb.var()) / 2)
    assert est.value == pytest.approx(d_av, rel=1e-10)
    assert est.interval is None  # the bootstrap gives its interval


@pytest.mark.parametrize("name", NAMES)
def test_d_rm_against_lakens_formula(name):
    a, b, digits = load(name)
    est = paired.d_rm(a, b, LEVEL, digits)
    # Lakens (2013, eq. 9) with numpy:
    # d_rm = M_diff / sqrt(s1^2 + s2^2 - 2 r s1 s2) * sqrt(2(1 - r)), r from scipy.stats.pearsonr.
    # pingouin has no d_rm.
    r = stats.pearsonr(a, b).statistic
    s1, s2 = np.std(a, ddof=1), np.std(b, ddof=1)
    sd_diff = math.sqrt(s1**2 + s2**2 - 2 * r * s1 * s2)
    ref = (np.mean(a) - np.mean(b)) / sd_diff * math.sqrt(2 * (1 - r))
    assert est.value == pytest.approx(ref, rel=1e-9)
    # The A-B correlation behind it: scipy.stats.pearsonr
    assert float(paired.correlation_values(np.column_stack([a, b]))) == pytest.approx(r, rel=1e-12)


# -------------------------------------------------------------------------------------- PS_dep


@pytest.mark.parametrize("level", [0.95, 0.90])
@pytest.mark.parametrize("name", NAMES)
def test_ps_dep_wilson_interval_and_ties_discarded(name, level):
    a, b, digits = load(name)
    d = pd.Series(rounded_d(name))
    pos, zero, n = int((d > 0).sum()), int((d == 0).sum()), d.size
    est = paired.ps_dep(a, b, level, digits)
    assert est.value == pytest.approx((pos + 0.5 * zero) / n, rel=1e-12)  # pandas counts
    # statsmodels Wilson score interval on the count N+ + N0/2 out of N
    low, high = proportion_confint(pos + 0.5 * zero, n, alpha=1 - level, method="wilson")
    assert est.interval.method == "wilson"
    assert est.interval.low == pytest.approx(low, rel=1e-9)
    assert est.interval.high == pytest.approx(high, rel=1e-9)
    # With ties discarded: N+ / (N - N0), the proportion scipy.stats.binomtest reports for the
    # non-zero differences (its `statistic`).
    ref = stats.binomtest(pos, n - zero).statistic
    assert est.details["ties_discarded"] == pytest.approx(ref, rel=1e-12)
    assert est.details["n_zero"] == zero and est.details["n_positive"] == pos
    assert f"ties discarded: N+/(N - N0) = {pos}/{n - zero} = {ref:.4f}" in est.notes


def test_ps_dep_swapping_conditions():
    # Swapping the conditions maps PS_dep to 1 - PS_dep (ties counted one half either way);
    # checked on the data with 25 zero differences.
    a, b, digits = load("rm_anova_disgust_high_vs_low")
    forward = paired.ps_dep(a, b, LEVEL, digits)
    backward = paired.ps_dep(b, a, LEVEL, digits)
    assert backward.value == pytest.approx(1 - forward.value, rel=1e-12)
    assert backward.interval.low == pytest.approx(1 - forward.interval.high, rel=1e-12)


# ----------------------------------------------------------- signed ranks: RBC and r = Z/sqrt(N)


def _scipy_r_plus_and_z(d):
    """R+ and its z (zeros dropped, tie-corrected, no continuity correction) from
    scipy.stats.wilcoxon: with alternative='greater' the statistic is R+ and zstatistic is
    (R+ - N(N+1)/4) / SE."""
    res = stats.wilcoxon(d, zero_method="wilcox", correction=False, method="asymptotic",
                         alternative="greater")
    return float(res.statistic), float(res.zstatistic)


@pytest.mark.parametrize("name", NAMES)
def test_matched_rank_biserial_against_pingouin(name):
    a, b, digits = load(name)
    d = rounded_d(name)
    est = paired.matched_rank_biserial(a, b, LEVEL, digits)
    # pingouin.wilcoxon(x) on the rounded differences: RBC = (R+ - R-) / (R+ + R-), zeros dropped,
    # positive when the first condition is larger (two-sided alternative).
    rbc = float(_quiet_pingouin(pg.wilcoxon, d)["RBC"].iloc[0])
    assert est.value == pytest.approx(rbc, rel=1e-12, abs=1e-15)
    # The same from scipy's R+: RBC = (2 R+ - S) / S, S = N(N+1)/2 over the N non-zero differences
    r_plus, _ = _scipy_r_plus_and_z(d)
    total = np.count_nonzero(d) * (np.count_nonzero(d) + 1) / 2
    assert est.value == pytest.approx((2 * r_plus - total) / total, rel=1e-12, abs=1e-15)


@pytest.mark.parametrize("name", NAMES)
def test_r_from_z_against_scipy_signed_rank_z(name):
    a, b, digits = load(name)
    d = rounded_d(name)
    est = paired.r_from_z(a, b, LEVEL, digits)
    _, z = _scipy_r_plus_and_z(d)  # scipy, on the same rounded differences
    n_used = np.count_nonzero(d)
    assert est.value == pytest.approx(z / math.sqrt(n_used), rel=1e-10)
    assert est.details["n_used"] == n_used and est.details["n_pairs"] == d.size


@pytest.mark.parametrize("name", ["rm_anova_disgust_high_vs_low", "elnino_jan_vs_jul"])
def test_signed_rank_values_on_stacked_resamples(name):
    # The bootstrap path: rows of resampled participants, ranked along the last axis. References
    # per row: scipy.stats.wilcoxon along axis=-1 (z) and pingouin.wilcoxon (RBC), rounded d.
    a, b, digits = load(name)
    x = np.column_stack([a, b])
    rng = np.random.default_rng(11)
    stacked = x[rng.integers(0, a.size, (25, a.size))]
    d = np.round(stacked[..., 0] - stacked[..., 1], digits)
    res = stats.wilcoxon(d, axis=-1, zero_method="wilcox", correction=False, method="asymptotic",
                         alternative="greater")
    n_used = np.count_nonzero(d, axis=-1)
    np.testing.assert_allclose(paired.r_from_z_values(stacked, digits),
                               res.zstatistic / np.sqrt(n_used), rtol=1e-10)
    rbc = [float(_quiet_pingouin(pg.wilcoxon, row)["RBC"].iloc[0]) for row in d]
    np.testing.assert_allclose(paired.matched_rank_biserial_values(stacked, digits), rbc,
                               rtol=1e-12, atol=1e-15)
    dz = [_quiet_pingouin(pg.compute_effsize, r[:, 0], r[:, 1], paired=True, eftype="cohen_dz")
          for r in stacked]
    np.testing.assert_allclose(paired.d_z_values(stacked, digits), dz, rtol=1e-10)


# --------------------------------------------------------------------- rounding of differences


def test_rounding_makes_decimal_differences_tie():
    # Binary floating point: 5.1 - 4.9 and 0.1 - 0.3 are +0.2 and -0.2 in decimal, but as doubles
    # their sizes differ (0.19999999999999929 vs 0.19999999999999998), and 0.3 - (0.1 + 0.2) is
    # not zero. Rounded to the data's one decimal (numpy.round) the two tie and the third is zero.
    assert abs(5.1 - 4.9) != abs(0.1 - 0.3) and 0.3 - (0.1 + 0.2) != 0
    x = np.array([[5.1, 4.9], [0.1, 0.3], [0.3, 0.1 + 0.2], [1.0, 0.4], [0.2, 1.1]])
    d = paired.differences(x, 1)
    assert d[0] == -d[1] == 0.2 and d[2] == 0.0
    # Hand count on the rounded differences: the zero is dropped, |0.2| and |-0.2| share rank 1.5,
    # then 0.6 (rank 3, +) and 0.9 (rank 4, -): R+ = 4.5, R- = 5.5, RBC = -1/10.
    assert paired.matched_rank_biserial_values(x, 1) == pytest.approx(-0.1, rel=1e-12)
    rbc_rounded = float(_quiet_pingouin(pg.wilcoxon, np.round(x[:, 0] - x[:, 1], 1))["RBC"].iloc[0])
    assert rbc_rounded == pytest.approx(-0.1, rel=1e-12)  # pingouin on the rounded differences
    # pingouin on the raw doubles keeps the tiny negative difference (rank 1) and breaks the tie
    # (+ rank 2, - rank 3): R+ = 6, R- = 9, RBC = -3/15.
    rbc_raw = float(_quiet_pingouin(pg.wilcoxon, x[:, 0], x[:, 1])["RBC"].iloc[0])
    assert rbc_raw == pytest.approx(-0.2, rel=1e-12)
    # The same contrast for the signed-rank z (scipy): the project follows the rounded differences.
    z_rounded = _scipy_r_plus_and_z(np.round(x[:, 0] - x[:, 1], 1))[1]
    assert paired.r_from_z_values(x, 1) == pytest.approx(z_rounded / 2, rel=1e-10)  # N = 4
    assert paired.ps_dep_values(x, 1) == pytest.approx((2 + 0.5) / 5, rel=1e-12)


def test_rounding_matters_on_shipped_data():
    # rm_anova_wide: Before - 1 week gives 1.6 and -1.6000000000000005 as doubles. Rounded to one
    # decimal they tie; raw, they do not. The project's values must follow the rounded
    # differences, and the raw-difference references must differ from them.
    a, b, digits = load("rm_anova_wide_before_vs_week1")
    raw = a - b
    d = rounded_d("rm_anova_wide_before_vs_week1")
    assert pd.Series(np.abs(raw)).duplicated().sum() == 0
    assert pd.Series(np.abs(d)).duplicated().sum() == 1
    rbc_rounded = float(_quiet_pingouin(pg.wilcoxon, d)["RBC"].iloc[0])
    rbc_raw = float(_quiet_pingouin(pg.wilcoxon, a, b)["RBC"].iloc[0])
    ours = paired.matched_rank_biserial(a, b, LEVEL, digits).value
    assert ours == pytest.approx(rbc_rounded, rel=1e-12)  # 13/66 = 0.19697
    assert ours == pytest.approx(13 / 66, rel=1e-12)
    assert abs(ours - rbc_raw) > 0.01  # raw: 12/66 = 0.18182
    z_rounded = _scipy_r_plus_and_z(d)[1]
    z_raw = _scipy_r_plus_and_z(raw)[1]
    r = paired.r_from_z(a, b, LEVEL, digits).value
    assert r == pytest.approx(z_rounded / math.sqrt(11), rel=1e-10)
    assert abs(r - z_raw / math.sqrt(11)) > 0.01


# ------------------------------------------------------------ exact signed-rank distribution


def _untied_differences_with_r_plus(t, n):
    """Differences +-1, ..., +-n (untied, no zeros) whose R+ is exactly t (greedy from n down)."""
    signs = -np.ones(n)
    left = t
    for rank in range(n, 0, -1):
        if rank <= left:
            signs[rank - 1] = 1.0
            left -= rank
    assert left == 0
    return signs * np.arange(1, n + 1)


def _scipy_exact_cdf(t, n):
    """P(T+ <= t) under the null from scipy.stats.wilcoxon(method='exact', alternative='less')."""
    res = stats.wilcoxon(_untied_differences_with_r_plus(t, n), method="exact", alternative="less")
    assert res.statistic == t
    return float(res.pvalue)


@pytest.mark.parametrize("n", [1, 2, 5, 10, 20, 30, 50])
def test_signed_rank_null_pmf_against_scipy_exact(n):
    m = n * (n + 1) // 2
    cdf = np.cumsum(paired.signed_rank_null_pmf(n))
    assert cdf.size == m + 1
    for t in sorted({0, 1, min(2, m), m // 7, m // 3, m // 2 - 1, m // 2, m - 1, m}):
        if t < 0:
            continue
        assert cdf[t] == pytest.approx(_scipy_exact_cdf(t, n), rel=1e-9, abs=1e-15)


def _reference_walsh_order(n, level):
    """k = 1 + max{t : P(T+ <= t) <= (1 - level)/2} with scipy's exact distribution (bisection);
    then [W_(k), W_(M+1-k)] covers with probability 1 - 2 P(T+ <= k - 1) >= level."""
    alpha2 = (1 - level) / 2
    lo, hi = -1, n * (n + 1) // 4 + 1  # invariant: cdf(lo) <= alpha2 < cdf(hi); cdf(-1) = 0
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if _scipy_exact_cdf(mid, n) <= alpha2 + 1e-12:
            lo = mid
        else:
            hi = mid
    return lo + 1


@pytest.mark.parametrize("level", [0.95, 0.90])
@pytest.mark.parametrize("n", [6, 10, 11, 20, 30, 50])
def test_walsh_interval_order_exact(n, level):
    k, method, achieved = paired.walsh_interval_order(n, level, True)
    assert method == "exact"
    assert k == _reference_walsh_order(n, level)
    alpha2 = (1 - level) / 2
    assert _scipy_exact_cdf(k - 1, n) <= alpha2 + 1e-12  # coverage >= level
    assert _scipy_exact_cdf(k, n) > alpha2                # and k is the largest such
    assert achieved == pytest.approx(1 - 2 * _scipy_exact_cdf(k - 1, n), rel=1e-9)


@pytest.mark.parametrize("n, critical", [(6, 0), (8, 3), (10, 8), (15, 25), (20, 52), (25, 89)])
def test_walsh_interval_order_published_critical_values(n, critical):
    # Two-sided 5% critical values of the signed-rank statistic (reject when T <= critical) as
    # printed in standard tables (from memory); verified here with scipy's exact distribution:
    # P(T <= critical) <= 0.025 < P(T <= critical + 1). The interval's order is k = critical + 1.
    assert _scipy_exact_cdf(critical, n) <= 0.025 < _scipy_exact_cdf(critical + 1, n)
    assert paired.walsh_interval_order(n, 0.95, True)[0] == critical + 1


def test_walsh_interval_order_when_the_level_is_out_of_reach():
    # n = 5: even the widest interval [W_(1), W_(15)] covers only 1 - 2 P(T+ = 0) = 1 - 2/32.
    # The order falls back to k = 1 and the achieved confidence says so (scipy exact: 1/32).
    k, method, achieved = paired.walsh_interval_order(5, 0.95, True)
    assert (k, method) == (1, "exact")
    assert achieved == pytest.approx(1 - 2 * _scipy_exact_cdf(0, 5), rel=1e-12)
    assert achieved == pytest.approx(0.9375, rel=1e-12)


@pytest.mark.parametrize("n", [60, 90])
def test_walsh_interval_order_normal_branch_close_to_exact(n):
    # Above 50 pairs the order comes from the normal approximation; it may differ from the exact
    # order (scipy's exact distribution) by one order statistic.
    k, method, _ = paired.walsh_interval_order(n, LEVEL, False)
    assert method == "normal_approximation"
    assert abs(k - _reference_walsh_order(n, LEVEL)) <= 1


# --------------------------------------------------------------------- Hodges-Lehmann estimate


def _walsh_sorted(d):
    """All (d_i + d_j)/2 with i <= j, listed with itertools (independent of the project)."""
    return np.sort([(x + y) / 2 for x, y in itertools.combinations_with_replacement(d, 2)])


@pytest.mark.parametrize("name", NAMES)
def test_hodges_lehmann_estimate_is_median_of_walsh_averages(name):
    a, b, digits = load(name)
    d = rounded_d(name)
    # statistics.median over itertools' Walsh averages; zero differences are kept (the one-sample
    # estimator of the centre of d; R's wilcox.test would drop them first)
    ref = statistics.median((x + y) / 2 for x, y in itertools.combinations_with_replacement(d, 2))
    est = paired.hodges_lehmann(a, b, LEVEL, digits)
    assert est.value == pytest.approx(ref, rel=1e-12, abs=1e-12)


def test_hodges_lehmann_values_on_stacked_resamples_in_chunks():
    # 1000 resamples of 90 pairs: 4095 Walsh averages per row, so the project takes them in two
    # chunks (4,000,000 // 4095 = 976 rows per chunk). Reference: statistics.median per row.
    a, b, digits = load("rm_anova_disgust_high_vs_low")
    x = np.column_stack([a, b])
    rng = np.random.default_rng(3)
    stacked = x[rng.integers(0, a.size, (1000, a.size))]
    got = paired.hodges_lehmann_values(stacked, digits)
    rows = [0, 1, 500, 975, 976, 977, 999]
    for r in rows:
        d = np.round(stacked[r, :, 0] - stacked[r, :, 1], digits)
        ref = statistics.median((p + q) / 2
                                for p, q in itertools.combinations_with_replacement(d, 2))
        assert got[r] == pytest.approx(ref, rel=1e-12, abs=1e-12)


# ---------------------------------------------------------------- Hodges-Lehmann interval


@pytest.mark.parametrize("level", [0.95, 0.90])
def test_hodges_lehmann_interval_inverts_scipy_exact_test(level):
    # Untied data, n = 30 (exact branch). The interval is the set of centres mu that the exact
    # two-sided signed-rank test on d - mu (scipy.stats.wilcoxon, method='exact') does not reject
    # at 1 - level: just inside each end p > alpha, just outside p <= alpha.
    a, b, digits = load("partial_corr_x_vs_y")
    d = rounded_d("partial_corr_x_vs_y")
    est = paired.hodges_lehmann(a, b, level, digits)
    walsh = _walsh_sorted(d)
    alpha = 1 - level
    k = int(np.searchsorted(walsh, est.interval.low)) + 1  # W_(k) = lower end
    assert walsh[k - 1] == pytest.approx(est.interval.low, rel=1e-12)
    assert walsh[walsh.size - k] == pytest.approx(est.interval.high, rel=1e-12)
    assert len(np.unique(walsh)) == walsh.size  # midpoints below avoid every Walsh average
    inside = [(walsh[k - 1] + walsh[k]) / 2, (walsh[-k] + walsh[-k - 1]) / 2]
    outside = [(walsh[k - 2] + walsh[k - 1]) / 2 if k > 1 else walsh[0] - 1.0,
               (walsh[-k] + walsh[-k + 1]) / 2 if k > 1 else walsh[-1] + 1.0]
    for mu in inside:
        assert stats.wilcoxon(d - mu, method="exact").pvalue > alpha
    for mu in outside:
        assert stats.wilcoxon(d - mu, method="exact").pvalue <= alpha
    assert any("exact" in note for note in est.notes)


def _scipy_signed_rank_se_with_zeros_ranked(d):
    """SE of the signed-rank sum with zeros kept and ranked (tie-corrected):
    scipy.stats.wilcoxon(zero_method='zsplit', method='asymptotic'); recovered from |d| (the SE
    depends on |d| only) as (R+ - N(N+1)/4) / z."""
    absd = np.abs(d)
    res = stats.wilcoxon(absd, zero_method="zsplit", correction=False, method="asymptotic",
                         alternative="greater")
    n = absd.size
    return (float(res.statistic) - n * (n + 1) / 4) / float(res.zstatistic)


@pytest.mark.parametrize("name", TIED + ["mixed_anova_aug_vs_jan"])
def test_hodges_lehmann_interval_normal_branch(name):
    # Ties, zeros or n > 50: the order is k = floor(M/2 - z SE) with the tie-corrected SE of the
    # signed-rank sum over all n differences (scipy, zsplit), and the ends are the order
    # statistics W_(k) and W_(M+1-k) of itertools' Walsh averages.
    a, b, digits = load(name)
    d = rounded_d(name)
    est = paired.hodges_lehmann(a, b, LEVEL, digits)
    walsh = _walsh_sorted(d)
    m = walsh.size
    se = _scipy_signed_rank_se_with_zeros_ranked(d)
    k = max(1, math.floor(m / 2 - stats.norm.ppf(0.5 + LEVEL / 2) * se))
    assert est.interval.low == pytest.approx(walsh[k - 1], rel=1e-12, abs=1e-12)
    assert est.interval.high == pytest.approx(walsh[m - k], rel=1e-12, abs=1e-12)
    assert any("normal approximation" in note for note in est.notes)
    if name in TIED:
        assert "ties or zero differences: coverage of the interval is approximate" in est.notes


# ---------------------------------------------------------------------------------- sign test


@pytest.mark.parametrize("name", NAMES)
def test_sign_test_against_binomtest_and_exact_sum(name):
    d = rounded_d(name)
    res = paired.sign_test(d)
    s = pd.Series(d)
    pos, neg = int((s > 0).sum()), int((s < 0).sum())
    assert (res["positive"], res["negative"], res["zero"]) == (pos, neg, int((s == 0).sum()))
    assert res["p"] == pytest.approx(stats.binomtest(pos, pos + neg, 0.5).pvalue, rel=1e-12)
    # Exact two-sided sign test with fractions: min(1, 2 sum_{i <= min(N+, N-)} C(N, i) / 2^N)
    n = pos + neg
    tail = sum(Fraction(math.comb(n, i), 2**n) for i in range(min(pos, neg) + 1))
    assert res["p"] == pytest.approx(float(min(Fraction(1), 2 * tail)), rel=1e-12)


# ------------------------------------------------------------------------- paired screening


@pytest.mark.parametrize("name", NAMES)
def test_paired_screen_against_scipy_and_pandas(name):
    a, b, digits = load(name)
    d = rounded_d(name)
    diag = paired.sign_test(d)
    res = diagnostics.paired_screen(("A", "B"), a, b, d, np.arange(a.size) + 2, digits, diag)
    r = stats.pearsonr(a, b)  # scipy
    assert res.correlation == pytest.approx(r.statistic, rel=1e-12)
    assert res.correlation_p == pytest.approx(r.pvalue, rel=1e-9)
    assert res.zero_share == pytest.approx(pd.Series(d).eq(0).mean(), rel=1e-12)  # pandas
    sw = stats.shapiro(d)  # scipy, on the rounded differences
    assert res.differences_normality.shapiro_w == pytest.approx(sw.statistic, rel=1e-12)
    assert res.differences_normality.shapiro_p == pytest.approx(sw.pvalue, rel=1e-9)
    assert res.differences_ties.tie_correction == pytest.approx(stats.tiecorrect(d), rel=1e-12)
    assert res.rounding_decimals == digits


# ------------------------------------------------------------------------------ end to end


def _enumerated_signed_rank_p(d):
    """Two-sided p of the signed-rank sum by enumerating all 2^N sign patterns of the mid-ranks
    of |d| (zeros dropped): 2 min(P(R+ <= obs), P(R+ >= obs)), capped at 1."""
    d = d[d != 0]
    ranks = stats.rankdata(np.abs(d))
    obs = float(np.sum(ranks[d > 0]))
    sums = np.array([sum(r for r, s in zip(ranks, signs) if s)
                     for signs in itertools.product((0, 1), repeat=d.size)])
    eps = 1e-9
    return min(1.0, 2 * min(np.mean(sums <= obs + eps), np.mean(sums >= obs - eps)))


def test_audit_end_to_end_paired_wide():
    # pingouin rm_anova_wide, columns Before and 1 week (one decimal). The participant on line 12
    # lacks Before and is left out; the NaNs in the other two columns do not matter.
    frame = pg.read_dataset("rm_anova_wide")
    seed, resamples = 97, 200
    result = audit(frame, paired_columns=["Before", "1 week"], resamples=resamples, seed=seed)
    assert result.design == "paired"
    acc = result.data
    assert (acc.rows_read, acc.rows_used) == (12, 11)
    assert [e.row for e in acc.excluded] == [12]  # pandas: index 10 has Before = NaN -> line 12
    assert acc.rows_read == acc.rows_used + len(acc.excluded) + sum(acc.not_selected.values())
    a, b, digits = load("rm_anova_wide_before_vs_week1")
    assert [g.label for g in result.groups] == ["Before", "1 week"]
    assert result.diagnostics.rounding_decimals == 1
    d = np.round(a - b, 1)

    eff = {e.name: e for e in result.effects}
    ci = stats.ttest_rel(a, b).confidence_interval(LEVEL)  # scipy paired t
    assert eff["mean_difference"].ci_low == pytest.approx(ci.low, rel=1e-9)
    assert eff["mean_difference"].ci_high == pytest.approx(ci.high, rel=1e-9)
    assert eff["d_z"].estimate == pytest.approx(
        _quiet_pingouin(pg.compute_effsize, a, b, paired=True, eftype="cohen_dz"), rel=1e-10)
    assert eff["d_av"].estimate == pytest.approx(
        _quiet_pingouin(pg.compute_effsize, a, b, paired=True, eftype="cohen"), rel=1e-10)
    assert eff["matched_rank_biserial"].estimate == pytest.approx(
        float(_quiet_pingouin(pg.wilcoxon, d)["RBC"].iloc[0]), rel=1e-12)  # pingouin, rounded d
    assert eff["r_from_z"].estimate == pytest.approx(
        _scipy_r_plus_and_z(d)[1] / math.sqrt(np.count_nonzero(d)), rel=1e-10)  # scipy
    assert eff["ps_dep"].estimate == pytest.approx(
        (np.sum(d > 0) + 0.5 * np.sum(d == 0)) / d.size, rel=1e-12)
    assert eff["hodges_lehmann"].estimate == pytest.approx(
        statistics.median((x + y) / 2 for x, y in itertools.combinations_with_replacement(d, 2)),
        rel=1e-12)

    tests = result.tests
    t = stats.ttest_rel(a, b)  # scipy
    assert tests["paired_t"]["statistic"] == pytest.approx(t.statistic, rel=1e-10)
    assert tests["paired_t"]["p"] == pytest.approx(t.pvalue, rel=1e-9)
    assert tests["paired_t"]["df"] == a.size - 1
    pos, neg = int(np.sum(d > 0)), int(np.sum(d < 0))
    assert tests["sign_test"]["p"] == pytest.approx(stats.binomtest(pos, pos + neg).pvalue,
                                                    rel=1e-12)  # scipy
    # Ties among the rounded differences: the exact p over the sign patterns of the tied
    # mid-ranks; an enumeration of all 2^11 patterns, and scipy.stats.wilcoxon listing them
    # (explicit PermutationMethod: 2^11 patterns, fewer than its 9999 resamples), give the same p.
    # The statistic is T+, the sum of the mid-ranks of the positive differences (scipy's is
    # min(T+, T-)), as the policy's decision reports it.
    assert tests["wilcoxon"]["p"] == pytest.approx(_enumerated_signed_rank_p(d), rel=1e-9)
    assert tests["wilcoxon"]["p"] == pytest.approx(
        stats.wilcoxon(d, zero_method="wilcox", method=stats.PermutationMethod()).pvalue,
        rel=1e-9)
    assert tests["wilcoxon"]["statistic"] == pytest.approx(
        np.sum(stats.rankdata(np.abs(d))[d > 0]), rel=1e-12)
    assert result.diagnostics.correlation == pytest.approx(stats.pearsonr(a, b).statistic,
                                                           rel=1e-12)  # scipy

    # BCa interval of the mean difference: scipy.stats.bootstrap(paired=True) draws participants'
    # indices from default_rng(seed) exactly as the audit does, so the intervals agree.
    def mean_diff(x, y, axis=-1):
        assert axis == -1
        return paired.mean_difference_values(np.stack([x, y], axis=-1), digits)
    ref = stats.bootstrap((a, b), mean_diff, paired=True, n_resamples=resamples,
                          batch=resampling.resamples_per_chunk(2 * a.size, resamples), method="BCa",
                          confidence_level=LEVEL, vectorized=True, rng=np.random.default_rng(seed))
    boot = eff["mean_difference"].interval("bca_bootstrap")
    assert boot.low == pytest.approx(ref.confidence_interval.low, rel=1e-9)
    assert boot.high == pytest.approx(ref.confidence_interval.high, rel=1e-9)


def test_audit_end_to_end_paired_long_and_direction():
    # pingouin mixed_anova in long format: August vs January by Subject; June rows are not
    # selected. Swapping the conditions negates the signed effects and maps PS_dep to 1 - PS_dep.
    # The data set is a mixed design (Group, between participants, crossed with Time): the
    # design guard stops it unless the pooled comparison is stated (`one_factor`).
    frame = pg.read_dataset("mixed_anova")
    with pytest.raises(DesignError, match="'Group' .* mixed design"):
        audit(frame, outcome="Scores", group="Time", subject="Subject",
              groups=["August", "January"], resamples=200, seed=5)
    forward = audit(frame, outcome="Scores", group="Time", subject="Subject",
                    groups=["August", "January"], resamples=200, seed=5, overrides=["one_factor"])
    backward = audit(frame, outcome="Scores", group="Time", subject="Subject",
                     groups=["January", "August"], resamples=200, seed=5,
                     overrides=["one_factor"])
    assert any("--one-factor" in w and "'Group'" in w for w in forward.warnings)
    acc = forward.data
    assert forward.design == "paired"
    assert acc.not_selected == {"June": 60}  # pandas value_counts of Time
    assert (acc.rows_read, acc.rows_used, len(acc.excluded)) == (180, 120, 0)
    assert acc.rows_read == acc.rows_used + len(acc.excluded) + sum(acc.not_selected.values())
    a, b, _ = load("mixed_anova_aug_vs_jan")
    f = {e.name: e.estimate for e in forward.effects}
    r = {e.name: e.estimate for e in backward.effects}
    assert f["d_z"] == pytest.approx(
        _quiet_pingouin(pg.compute_effsize, a, b, paired=True, eftype="cohen_dz"), rel=1e-10)
    for name in ("mean_difference", "d_z", "d_av", "d_rm", "matched_rank_biserial", "r_from_z",
                 "hodges_lehmann"):
        assert r[name] == pytest.approx(-f[name], rel=1e-12, abs=1e-15)
    assert r["ps_dep"] == pytest.approx(1 - f["ps_dep"], rel=1e-12)
