"""Reference checks: every test of difference in `auditor.significance` against a computation
outside the project (pingouin, statsmodels, scipy where the module does not call it, published
worked examples, or an enumeration / closed-form derivation written out here).

Data are open datasets shipped inside installed packages (no network):
  two groups   pingouin `tips` (Sunday bills, smokers vs not: 19 / 57, no ties; tips by smoker,
               ties), `penguins` (Adelie body mass by sex: 73 / 73, masses rounded to 25 g) and
               statsmodels `spector` (grade point average by teaching method, 14 / 18);
  paired       pingouin `rm_anova_wide` (Before vs 1 week, one decimal, 11 pairs), `blandaltman`
               (A vs B, whole numbers, 30), `partial_corr` (x vs y, untied, 30), `mixed_anova`
               (August vs January, 60), `rm_anova` (disgust high vs low at high frightfulness,
               half points, 90 pairs of which 25 are zero);
  k groups     pingouin `anova` (pain threshold by hair colour), `penguins` (flipper length by
               species), `anova3_unbalanced` (cholesterol by drug), `tips` (bill by day);
  k repeated   pingouin `rm_anova_wide` (4 time points, complete rows), `mixed_anova` (3 time
               points), `pairwise_tests` (3 drugs), statsmodels `elnino` (4 months).

Published worked examples sit beside the dataset checks. A value marked "from memory" was
recalled, not looked up; each one is kept only because a computation written here, or a library
other than the one the module wraps, reproduces it in the same test.

Invented data appear only in the degenerate-input and property checks.
"""

from __future__ import annotations

import functools
import itertools
import json
import math
import warnings
from fractions import Fraction

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
import statsmodels.datasets as sm_datasets
from scipy import stats
from statsmodels.stats.anova import AnovaRM
from statsmodels.stats.descriptivestats import sign_test as sm_sign_test
from statsmodels.stats.nonparametric import rank_compare_2indep
from statsmodels.stats.oneway import anova_oneway
from statsmodels.stats.weightstats import DescrStatsW
from statsmodels.stats.weightstats import ttest_ind as sm_ttest_ind

from auditor import kgroups, paired, ranks
from auditor import significance as sg
from tests.references.common import quiet_pingouin as _quiet_pingouin

# ================================================================================ datasets


def _split(frame, outcome, group, first, second):
    rows = frame.dropna(subset=[outcome, group])
    return (rows.loc[rows[group] == first, outcome].to_numpy(dtype=float),
            rows.loc[rows[group] == second, outcome].to_numpy(dtype=float))


def _sunday_bills():
    tips = pg.read_dataset("tips")
    return _split(tips[tips["day"] == "Sun"], "total_bill", "smoker", "Yes", "No")


def _adelie_mass():
    pen = pg.read_dataset("penguins")
    return _split(pen[pen["species"] == "Adelie"], "body_mass_g", "sex", "male", "female")


TWO = {
    "sunday_bill_smoker_vs_not": _sunday_bills,                                        # untied
    "tips_tip_smoker_vs_not": lambda: _split(pg.read_dataset("tips"), "tip", "smoker", "Yes",
                                             "No"),
    "adelie_mass_male_vs_female": _adelie_mass,
    "spector_gpa_psi_vs_not": lambda: _split(sm_datasets.spector.load_pandas().data, "GPA", "PSI",
                                             1.0, 0.0),
}
TWO_NAMES = list(TWO)


@functools.lru_cache(maxsize=None)
def two(name):
    a, b = TWO[name]()
    a.setflags(write=False)
    b.setflags(write=False)
    return a, b


def _wide_pair(frame, first, second):
    rows = frame.dropna(subset=[first, second])
    return np.column_stack([rows[first].to_numpy(dtype=float), rows[second].to_numpy(dtype=float)])


def _pivot(frame, outcome, within, subject):
    return frame.pivot(index=subject, columns=within, values=outcome)


def _disgust():
    frame = pg.read_dataset("rm_anova")
    wide = _pivot(frame[frame["Frighteningness"] == "High"], "DesireToKill", "Disgustingness",
                  "Subject")
    return _wide_pair(wide, "High", "Low")


PAIRED = {
    # name: (loader returning x of shape (n, 2), decimals the data carry)
    "rm_anova_wide_before_vs_week1": (
        lambda: _wide_pair(pg.read_dataset("rm_anova_wide"), "Before", "1 week"), 1),
    "blandaltman_a_vs_b": (lambda: _wide_pair(pg.read_dataset("blandaltman"), "A", "B"), 0),
    "partial_corr_x_vs_y": (lambda: _wide_pair(pg.read_dataset("partial_corr"), "x", "y"), 12),
    "mixed_anova_aug_vs_jan": (
        lambda: _wide_pair(_pivot(pg.read_dataset("mixed_anova"), "Scores", "Time", "Subject"),
                           "August", "January"), 12),
    "rm_anova_disgust_high_vs_low": (_disgust, 1),
}
PAIRED_NAMES = list(PAIRED)


@functools.lru_cache(maxsize=None)
def pair(name):
    loader, digits = PAIRED[name]
    x = loader()
    x.setflags(write=False)
    return x, digits


def rounded_d(name):
    x, digits = pair(name)
    return np.round(x[:, 0] - x[:, 1], digits)


K_GROUPS = {
    # name: (frame loader, outcome, group)
    "anova_pain_by_hair": (lambda: pg.read_dataset("anova"), "Pain threshold", "Hair color"),
    "penguins_flipper_by_species": (lambda: pg.read_dataset("penguins"), "flipper_length_mm",
                                    "species"),
    "cholesterol_by_drug": (lambda: pg.read_dataset("anova3_unbalanced"), "Cholesterol", "Drug"),
    "tips_bill_by_day": (lambda: pg.read_dataset("tips"), "total_bill", "day"),
}
K_NAMES = list(K_GROUPS)


@functools.lru_cache(maxsize=None)
def k_frame(name):
    loader, outcome, group = K_GROUPS[name]
    frame = loader().dropna(subset=[outcome, group]).reset_index(drop=True)
    frame[group] = frame[group].astype(str)
    return frame


@functools.lru_cache(maxsize=None)
def k_groups(name):
    _, outcome, group = K_GROUPS[name]
    frame = k_frame(name)
    return tuple(frame.loc[frame[group] == lab, outcome].to_numpy(dtype=float)
                 for lab in pd.unique(frame[group]))


K_REPEATED = {
    "rm_anova_wide_time": lambda: pg.read_dataset("rm_anova_wide").dropna(),
    "mixed_anova_time": lambda: _pivot(pg.read_dataset("mixed_anova"), "Scores", "Time",
                                       "Subject"),
    "pairwise_tests_drug": lambda: _pivot(pg.read_dataset("pairwise_tests"), "Scores", "Drug",
                                          "Subject"),
    "elnino_seasons": lambda: sm_datasets.elnino.load_pandas().data[["JAN", "APR", "JUL", "OCT"]],
}
REP_NAMES = list(K_REPEATED)


@functools.lru_cache(maxsize=None)
def wide(name):
    frame = K_REPEATED[name]().astype(float).reset_index(drop=True)
    frame.columns = [str(c) for c in frame.columns]
    return frame


def matrix(name):
    x = wide(name).to_numpy()
    x.setflags(write=False)
    return x


def test_datasets_are_the_intended_designs():
    # Sizes counted with pandas on the shipped files; the checks below rely on them.
    assert {n: tuple(v.size for v in two(n)) for n in TWO_NAMES} == {
        "sunday_bill_smoker_vs_not": (19, 57), "tips_tip_smoker_vs_not": (93, 151),
        "adelie_mass_male_vs_female": (73, 73), "spector_gpa_psi_vs_not": (14, 18)}
    a, b = two("sunday_bill_smoker_vs_not")
    assert pd.Series(np.concatenate([a, b])).is_unique
    assert {n: pair(n)[0].shape[0] for n in PAIRED_NAMES} == {
        "rm_anova_wide_before_vs_week1": 11, "blandaltman_a_vs_b": 30, "partial_corr_x_vs_y": 30,
        "mixed_anova_aug_vs_jan": 60, "rm_anova_disgust_high_vs_low": 90}
    assert int(np.sum(rounded_d("rm_anova_disgust_high_vs_low") == 0)) == 25
    assert [len(k_groups(n)) for n in K_NAMES] == [4, 3, 3, 4]
    assert {n: wide(n).shape for n in REP_NAMES} == {
        "rm_anova_wide_time": (9, 4), "mixed_anova_time": (60, 3), "pairwise_tests_drug": (11, 3),
        "elnino_seasons": (61, 4)}


# ====================================================================== two independent groups


@pytest.mark.parametrize("name", TWO_NAMES)
def test_student_and_welch_t_against_pingouin_and_statsmodels(name):
    a, b = two(name)
    for key, correction, usevar in (("student_t", False, "pooled"), ("welch_t", True, "unequal")):
        res = sg.run_test("two_groups", key, (a, b))
        ref = _quiet_pingouin(pg.ttest, a, b, correction=correction).iloc[0]  # pingouin
        assert res.statistic == pytest.approx(float(ref["T"]), rel=1e-10)
        assert res.df == pytest.approx(float(ref["dof"]), rel=1e-10)
        assert res.p == pytest.approx(float(ref["p_val"]), rel=1e-9)
        t, p, df = sm_ttest_ind(a, b, usevar=usevar)  # statsmodels
        assert (res.statistic, res.p, res.df) == pytest.approx((t, p, df), rel=1e-9)
        assert res.compares == "means" and res.statistic_name == "t"


# Student (1908): the Cushny & Peebles sleep data (extra hours of sleep under two drugs, ten
# patients), as distributed in R's `sleep` data set. Values of the data: from memory.
SLEEP_1 = np.array([0.7, -1.6, -0.2, -1.2, -0.1, 3.4, 3.7, 0.8, 0.0, 2.0])
SLEEP_2 = np.array([1.9, 0.8, 1.1, 0.1, -0.1, 4.4, 5.5, 1.6, 4.6, 3.4])


def test_t_tests_published_sleep_example():
    # R's t.test documentation on these data prints (from memory): Welch t = -1.8608,
    # df = 17.776, p = 0.07939; with var.equal = TRUE, t = -1.8608, df = 18, p = 0.07919.
    # statsmodels reproduces each printed value, which confirms both the data and the values.
    welch = sg.welch_t(SLEEP_1, SLEEP_2)
    student = sg.student_t(SLEEP_1, SLEEP_2)
    sm_w = sm_ttest_ind(SLEEP_1, SLEEP_2, usevar="unequal")
    sm_s = sm_ttest_ind(SLEEP_1, SLEEP_2, usevar="pooled")
    for value, printed, tol in ((welch.statistic, -1.8608, 5e-5), (welch.df, 17.776, 5e-4),
                                (welch.p, 0.07939, 5e-6), (student.p, 0.07919, 5e-6),
                                (sm_w[0], -1.8608, 5e-5), (sm_w[2], 17.776, 5e-4),
                                (sm_w[1], 0.07939, 5e-6), (sm_s[1], 0.07919, 5e-6)):
        assert value == pytest.approx(printed, abs=tol)
    assert student.df == 18


def _tie_corrected_mwu_z(a, b):
    """U for a from pandas mid-ranks and the tie-corrected normal z without continuity correction
    (Lehmann 1975, eq. 1.52), written out here."""
    na, nb = a.size, b.size
    n = na + nb
    pooled = pd.Series(np.concatenate([a, b]))
    u = pooled.rank().iloc[:na].sum() - na * (na + 1) / 2
    t = pooled.value_counts().to_numpy(dtype=float)
    var = na * nb / 12 * ((n + 1) - np.sum(t**3 - t) / (n * (n - 1)))
    return u, (u - na * nb / 2) / math.sqrt(var)


def _exact_mwu_p(u, na, nb):
    """Two-sided exact Mann-Whitney p by counting arrangements: c(m, n, u) = c(m - 1, n, u - n) +
    c(m, n - 1, u) (the largest value is from a or from b; Mann & Whitney 1947), integers only."""
    table = {(0, j): np.ones(1, dtype=object) for j in range(nb + 1)}
    for i in range(1, na + 1):
        table[(i, 0)] = np.ones(1, dtype=object)
        for j in range(1, nb + 1):
            out = np.zeros(i * j + 1, dtype=object)
            top_a = table[(i - 1, j)]
            out[j:j + top_a.size] += top_a
            top_b = table[(i, j - 1)]
            out[:top_b.size] += top_b
            table[(i, j)] = out
    counts = table[(na, nb)]
    total = sum(counts)
    assert total == math.comb(na + nb, na)
    k = int(round(u))
    low, high = Fraction(sum(counts[:k + 1]), total), Fraction(sum(counts[k:]), total)
    return float(min(Fraction(1), 2 * min(low, high)))


@pytest.mark.parametrize("name", TWO_NAMES)
def test_mann_whitney_against_pingouin_and_written_out_reference(name):
    a, b = two(name)
    res = sg.run_test("two_groups", "mann_whitney", (a, b))
    exact = res.method.startswith("exact")
    assert exact == (name == "sunday_bill_smoker_vs_not")  # the only untied split
    ref = _quiet_pingouin(pg.mwu, a, b, method="exact" if exact else "asymptotic",
                          use_continuity=False).iloc[0]  # pingouin
    assert res.statistic == pytest.approx(float(ref["U_val"]), rel=1e-12)
    assert res.p == pytest.approx(float(ref["p_val"]), rel=1e-9)
    u, z = _tie_corrected_mwu_z(a, b)
    assert res.statistic == pytest.approx(u, rel=1e-12)
    if exact:
        assert res.p == pytest.approx(_exact_mwu_p(u, a.size, b.size), rel=1e-9)
    else:
        assert res.details["z"] == pytest.approx(z, rel=1e-10)
        assert res.p == pytest.approx(2 * stats.norm.sf(abs(z)), rel=1e-9)


def test_mann_whitney_published_example():
    # Hollander & Wolfe (1973), permeability constants of the human chorioamnion at term (x) and
    # between 12 and 26 weeks (y), the example of R's wilcox.test: W = 35, one-sided p = 0.1272
    # (from memory). The counting recursion here confirms the two-sided p = 2 x 0.1272.
    x = np.array([0.80, 0.83, 1.89, 1.04, 1.45, 1.38, 1.91, 1.64, 0.73, 1.46])
    y = np.array([1.15, 0.88, 0.90, 0.74, 1.21])
    res = sg.mann_whitney(x, y)
    assert res.method.startswith("exact")
    assert res.statistic == 35
    assert _exact_mwu_p(35, 10, 5) == pytest.approx(2 * 0.1272, abs=1e-4)
    assert res.p == pytest.approx(_exact_mwu_p(35, 10, 5), rel=1e-12)


def test_mann_whitney_exact_limit_follows_the_shift_interval():
    # n_a n_b = 2500 untied: exact; one value more: the normal approximation.
    rng = np.random.default_rng(8)
    a, b = rng.normal(size=50), rng.normal(size=51)
    assert ranks.EXACT_MAX_PAIRS == 2500
    assert sg.mann_whitney(a, b[:50]).method.startswith("exact")
    assert sg.mann_whitney(a, b).method.startswith("normal")


@pytest.mark.parametrize("name", TWO_NAMES)
def test_brunner_munzel_against_statsmodels(name):
    a, b = two(name)
    res = sg.run_test("two_groups", "brunner_munzel", (a, b))
    ref = rank_compare_2indep(a, b, use_t=True)  # statsmodels: Brunner-Munzel with t and df
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-9)
    assert res.df == pytest.approx(ref.df, rel=1e-9)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-8)
    assert res.details["prob_superiority"] == pytest.approx(ref.prob1, rel=1e-12)
    assert res.p == pytest.approx(2 * stats.t.sf(abs(res.statistic), res.df), rel=1e-9)


def test_brunner_munzel_published_example():
    # Brunner & Munzel (2000), pain scores after two surgical procedures, the example of R's
    # lawstat::brunner.munzel.test (from memory): statistic = 3.1375, df = 17.683,
    # p = 0.005786, P(X < Y) + P(X = Y)/2 = 0.789. statsmodels reproduces each value. The module
    # reports the first group relative to the second, so its statistic is -3.1375 and A = 0.211.
    x1 = np.array([1, 2, 1, 1, 1, 1, 1, 1, 1, 1, 2, 4, 1, 1], dtype=float)
    x2 = np.array([3, 3, 4, 3, 1, 2, 3, 1, 1, 5, 4], dtype=float)
    ref = rank_compare_2indep(x2, x1, use_t=True)  # statsmodels, second vs first
    res = sg.brunner_munzel(x1, x2)
    for value, printed, tol in ((ref.statistic, 3.1375, 5e-5), (ref.df, 17.683, 5e-4),
                                (ref.pvalue, 0.005786, 5e-7), (ref.prob1, 0.789, 5e-4),
                                (-res.statistic, 3.1375, 5e-5), (res.df, 17.683, 5e-4),
                                (res.p, 0.005786, 5e-7),
                                (1 - res.details["prob_superiority"], 0.789, 5e-4)):
        assert value == pytest.approx(printed, abs=tol)


def test_brunner_munzel_undefined_when_groups_do_not_overlap():
    res = sg.brunner_munzel(np.array([1.0, 2.0, 3.0]), np.array([4.0, 5.0, 6.0]))
    assert res.statistic is None and res.p is None and "do not overlap" in res.reason
    assert res.details["prob_superiority"] == 0.0


# ------------------------------------------------------------- permutation test, two groups


def test_two_group_permutation_exact_against_enumeration():
    # Hollander & Wolfe's permeability data: C(15, 5) = 3003 splits <= 9999 -> every one is used.
    # Reference: all splits listed with itertools, two-sided p = 2 min(P(<= obs), P(>= obs)).
    x = np.array([0.80, 0.83, 1.89, 1.04, 1.45, 1.38, 1.91, 1.64, 0.73, 1.46])
    y = np.array([1.15, 0.88, 0.90, 0.74, 1.21])
    res = sg.run_test("two_groups", "permutation_mean", (x, y), rng=np.random.default_rng(1))
    assert res.method == "exact: all 3003 distinct rearrangements" and res.details["exact"]
    pooled = np.concatenate([x, y])
    total = pooled.sum()
    obs = x.mean() - y.mean()
    diffs = []
    for idx in itertools.combinations(range(15), 10):
        s = pooled[list(idx)].sum()
        diffs.append(s / 10 - (total - s) / 5)
    diffs = np.array(diffs)
    tol = 1e-12
    p = min(1.0, 2 * min(np.mean(diffs <= obs + tol), np.mean(diffs >= obs - tol)))
    assert res.statistic == pytest.approx(obs, rel=1e-12)
    assert res.p == pytest.approx(p, rel=1e-12)


def _mean_gap(a, b, axis=-1):
    return np.mean(a, axis=axis) - np.mean(b, axis=axis)


def test_two_group_permutation_agrees_with_a_large_scipy_run():
    # Sleep data: C(20, 10) = 184756 splits. The module draws 9999 at random; scipy, asked for
    # 200000 resamples, enumerates all 184756 (exact). The Monte Carlo SE of the module's p is
    # sqrt(p (1 - p) / 9999); allow 4 SE plus the +1 of the random p.
    res = sg.permutation_mean_difference(SLEEP_1, SLEEP_2, rng=np.random.default_rng(11))
    assert not res.details["exact"] and res.details["rearrangements"] == 9999
    ref = stats.permutation_test((SLEEP_1, SLEEP_2), _mean_gap, permutation_type="independent",
                                 vectorized=True, n_resamples=200_000, alternative="two-sided")
    assert ref.null_distribution.size == math.comb(20, 10)  # scipy enumerated every split
    se = math.sqrt(ref.pvalue * (1 - ref.pvalue) / 9999)
    assert abs(res.p - ref.pvalue) <= 4 * se + 1 / 10000
    # Sunday bills, 19 / 57: both random; the SE of the difference combines both runs.
    a, b = two("sunday_bill_smoker_vs_not")
    res = sg.permutation_mean_difference(a, b, rng=np.random.default_rng(12))
    big = stats.permutation_test((a, b), _mean_gap, permutation_type="independent",
                                 vectorized=True, n_resamples=100_000, alternative="two-sided",
                                 rng=np.random.default_rng(99))
    se = math.sqrt(big.pvalue * (1 - big.pvalue) * (1 / 9999 + 1 / 100_000))
    assert 0.02 < big.pvalue < 0.98  # a p where the check has power
    assert abs(res.p - big.pvalue) <= 4 * se + 1 / 10000


def test_permutation_tests_are_reproducible_with_the_same_seed():
    a, b = two("sunday_bill_smoker_vs_not")
    x, digits = pair("mixed_anova_aug_vs_jan")
    for design, samples in (("two_groups", (a, b)), ("paired", (x,))):
        first = sg.run_test(design, "permutation_mean", samples, digits=digits,
                            rng=np.random.default_rng(2024))
        again = sg.run_test(design, "permutation_mean", samples, digits=digits,
                            rng=np.random.default_rng(2024))
        other = sg.run_test(design, "permutation_mean", samples, digits=digits,
                            rng=np.random.default_rng(2025))
        assert first == again
        assert first.statistic == other.statistic
        assert 0 < first.p <= 1 and first.p >= 1 / 10000  # the random p is never below 1/(m + 1)


# ===================================================================================== paired


@pytest.mark.parametrize("name", PAIRED_NAMES)
def test_paired_t_against_pingouin_and_statsmodels(name):
    x, digits = pair(name)
    d = rounded_d(name)
    res = sg.run_test("paired", "paired_t", (x,), digits=digits)
    ref = _quiet_pingouin(pg.ttest, d, 0).iloc[0]  # pingouin one-sample t on the rounded d
    assert res.statistic == pytest.approx(float(ref["T"]), rel=1e-10)
    assert res.df == float(ref["dof"]) == x.shape[0] - 1
    assert res.p == pytest.approx(float(ref["p_val"]), rel=1e-9)
    t, p, df = DescrStatsW(d).ttest_mean(0.0)  # statsmodels
    assert (res.statistic, res.p, res.df) == pytest.approx((t, p, df), rel=1e-9)


def test_paired_t_published_examples():
    # Student (1908), sleep data: R's t.test(paired = TRUE) prints t = -4.0621, df = 9,
    # p = 0.002833 (from memory). Fisher (1935, sec. 17), Darwin's Zea mays, 15 differences of
    # crossed minus self-fertilised plants in eighths of an inch: t = 2.148 on 14 df
    # (from memory; Fisher reads p just under 0.05). statsmodels confirms each value.
    res = sg.paired_t(np.column_stack([SLEEP_1, SLEEP_2]), digits=1)
    t, p, _ = DescrStatsW(np.round(SLEEP_1 - SLEEP_2, 1)).ttest_mean(0.0)
    for value, printed, tol in ((res.statistic, -4.0621, 5e-5), (res.p, 0.002833, 5e-7),
                                (t, -4.0621, 5e-5), (p, 0.002833, 5e-7)):
        assert value == pytest.approx(printed, abs=tol)
    x = np.column_stack([DARWIN, np.zeros_like(DARWIN)])
    res = sg.paired_t(x, digits=0)
    t, p, _ = DescrStatsW(DARWIN).ttest_mean(0.0)
    assert res.statistic == pytest.approx(2.148, abs=5e-4) and t == pytest.approx(2.148, abs=5e-4)
    assert res.df == 14 and 0.049 < res.p < 0.05 and res.p == pytest.approx(p, rel=1e-9)


def _enumerated_signed_rank_p(d):
    """Two-sided signed-rank p from all 2^N sign patterns of the mid-ranks of the non-zero |d|."""
    d = d[d != 0]
    r = stats.rankdata(np.abs(d))
    obs = float(np.sum(r[d > 0]))
    sums = np.array([float(np.dot(r, s)) for s in itertools.product((0, 1), repeat=d.size)])
    return min(1.0, 2 * min(np.mean(sums <= obs + 1e-9), np.mean(sums >= obs - 1e-9)))


def _signed_rank_p_by_halves(d):
    """Two-sided signed-rank p counted over all 2^N sign patterns of the doubled mid-ranks of the
    non-zero |d|, in two halves: every pattern joins a pattern of the first half (sum s) with one
    of the second, so #(2 T+ <= t) = sum over s of #(second-half sums <= t - s). Whole-number
    counts, found by sorting and searching; nothing shared with the module's recursion."""
    d = d[d != 0]
    doubled = np.rint(2 * stats.rankdata(np.abs(d))).astype(np.int64)
    obs = int(doubled[d > 0].sum())

    def subset_sums(r):
        bits = (np.arange(2 ** r.size)[:, None] >> np.arange(r.size)) & 1
        return np.sort(bits @ r)

    first, second = subset_sums(doubled[:d.size // 2]), subset_sums(doubled[d.size // 2:])
    at_most = int(np.sum(np.searchsorted(second, obs - first, side="right")))
    at_least = int(np.sum(second.size - np.searchsorted(second, obs - first, side="left")))
    return min(1.0, 2 * min(at_most, at_least) / 2 ** d.size)


@pytest.mark.parametrize("name", PAIRED_NAMES)
def test_wilcoxon_against_scipy_and_pingouin(name):
    x, digits = pair(name)
    d = rounded_d(name)
    nz = d[d != 0]
    res = sg.run_test("paired", "wilcoxon", (x,), digits=digits)
    untied = pd.Series(np.abs(nz)).is_unique
    exact = res.method.startswith("exact")
    assert exact == (nz.size <= 50)
    assert exact == (name in ("rm_anova_wide_before_vs_week1", "blandaltman_a_vs_b",
                              "partial_corr_x_vs_y"))
    assert untied == (name in ("partial_corr_x_vs_y", "mixed_anova_aug_vs_jan"))
    ranks_nz = stats.rankdata(np.abs(nz))
    t_plus, t_minus = ranks_nz[nz > 0].sum(), ranks_nz[nz < 0].sum()
    assert res.statistic == pytest.approx(t_plus, rel=1e-12)
    assert res.details["n_zero"] == int(np.sum(d == 0))
    if exact and not untied:
        # Tied mid-ranks: the exact p over every sign pattern, counted in two halves here; with
        # 11 pairs also scipy.stats.wilcoxon with an explicit PermutationMethod (2^11 patterns,
        # fewer than its 9999 resamples, so all of them) and a plain listing of the patterns.
        assert "tied mid-ranks" in res.method
        assert res.p == pytest.approx(_signed_rank_p_by_halves(d), rel=1e-12)
        if nz.size <= 13:
            ref = stats.wilcoxon(d, zero_method="wilcox", method=stats.PermutationMethod())
            assert res.p == pytest.approx(ref.pvalue, rel=1e-9)  # scipy, all sign patterns
            assert res.p == pytest.approx(_enumerated_signed_rank_p(d), rel=1e-12)
            assert min(t_plus, t_minus) == pytest.approx(ref.statistic, rel=1e-12)
        return
    method = "exact" if exact else "asymptotic"
    # scipy and pingouin: zeros dropped (zero_method='wilcox'), no continuity correction
    ref = stats.wilcoxon(nz if exact else d, zero_method="wilcox", correction=False,
                         method=method)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-9)
    assert min(t_plus, t_minus) == pytest.approx(ref.statistic, rel=1e-12)  # scipy's min(T+, T-)
    pgr = _quiet_pingouin(pg.wilcoxon, nz, correction=False, method=method).iloc[0]  # pingouin
    assert res.p == pytest.approx(float(pgr["p_val"]), rel=1e-9)
    if not exact:
        z = stats.wilcoxon(d, zero_method="wilcox", correction=False,
                           method="asymptotic").zstatistic
        assert abs(res.details["z"]) == pytest.approx(abs(z), rel=1e-10)


@pytest.mark.slow
def test_signed_rank_exact_p_against_scipy_permutations_and_the_untied_distribution():
    # Property check on invented whole-number differences (3 to 12 of them, with ties and zeros
    # or without): the module's exact p equals scipy.stats.wilcoxon with an explicit
    # PermutationMethod, which lists all 2^n <= 4096 sign patterns (fewer than its 9999
    # resamples); untied, it also equals the p of Wilcoxon's exact distribution
    # (scipy.stats.wilcoxon, method='exact').
    rng = np.random.default_rng(2024)
    for n in range(3, 13):
        for spread in (3, 40):
            d = rng.integers(-spread, spread + 1, n).astype(float)
            nz = d[d != 0]
            if nz.size == 0:
                continue
            p = sg.signed_rank_exact_p(nz)
            ref = stats.wilcoxon(d, zero_method="wilcox", method=stats.PermutationMethod())
            assert p == pytest.approx(ref.pvalue, rel=1e-9), d  # scipy, all sign patterns
            if pd.Series(np.abs(nz)).is_unique:
                exact = stats.wilcoxon(nz, method="exact").pvalue  # scipy, untied distribution
                assert p == pytest.approx(exact, rel=1e-9), d


@pytest.mark.parametrize("name", PAIRED_NAMES)
def test_wilcoxon_agrees_with_the_signed_rank_effect_sizes(name):
    # The test and the effect sizes treat zeros and ties alike: same z, same R+ and R-.
    x, digits = pair(name)
    res = sg.wilcoxon_signed_rank(x, digits=digits)
    z = float(paired.wilcoxon_z_values(x, digits))
    r_plus, r_minus = res.details["r_plus"], res.details["r_minus"]
    assert (r_plus - r_minus) / (r_plus + r_minus) == pytest.approx(
        float(paired.matched_rank_biserial_values(x, digits)), rel=1e-12)
    n_used = res.details["n_used"]
    assert z / math.sqrt(n_used) == pytest.approx(float(paired.r_from_z_values(x, digits)),
                                                  rel=1e-12)
    if "z" in res.details:
        assert res.details["z"] == z


def test_wilcoxon_published_example_and_enumeration():
    # Hollander & Wolfe (1973, p. 29), Hamilton depression scale at the first (x) and second (y)
    # visit after a tranquilizer, the example of R's wilcox.test(paired = TRUE): V = 40,
    # one-sided p = 0.01953 (from memory). Enumerating the 2^9 sign patterns confirms
    # two-sided p = 20 / 512.
    x = np.array([1.83, 0.50, 1.62, 2.48, 1.68, 1.88, 1.55, 3.06, 1.30])
    y = np.array([0.878, 0.647, 0.598, 2.05, 1.06, 1.29, 1.06, 3.14, 1.29])
    res = sg.wilcoxon_signed_rank(np.column_stack([x, y]), digits=3)
    assert res.statistic == 40 and res.method.startswith("exact")
    d = np.round(x - y, 3)
    assert _enumerated_signed_rank_p(d) == pytest.approx(20 / 512, rel=1e-12)
    assert res.p == pytest.approx(20 / 512, rel=1e-12)
    assert res.p / 2 == pytest.approx(0.01953, abs=5e-6)


def test_wilcoxon_exact_with_zeros_dropped_against_enumeration():
    # Invented differences: two zeros, the other eight untied. The zeros are dropped and the
    # exact distribution of the eight non-zero ones applies, as the enumeration of 2^8 patterns.
    d = np.array([0.0, 0.0, 1.0, -2.0, 3.0, 4.0, 5.0, -6.0, 7.0, 8.0])
    x = np.column_stack([d, np.zeros_like(d)])
    res = sg.wilcoxon_signed_rank(x, digits=0)
    assert res.method.startswith("exact") and res.details["n_used"] == 8
    assert res.p == pytest.approx(_enumerated_signed_rank_p(d), rel=1e-12)
    assert any("zero differences dropped" in n for n in res.notes)


@pytest.mark.parametrize("name", PAIRED_NAMES)
def test_sign_test_against_statsmodels_and_exact_sum(name):
    x, digits = pair(name)
    d = rounded_d(name)
    res = sg.run_test("paired", "sign_test", (x,), digits=digits)
    pos, neg = int(np.sum(d > 0)), int(np.sum(d < 0))
    m, p = sm_sign_test(d, 0.0)  # statsmodels: M = (N+ - N-) / 2
    assert res.statistic == pos and res.statistic - (pos + neg) / 2 == pytest.approx(m)
    assert res.p == pytest.approx(p, rel=1e-10)
    n = pos + neg
    tail = sum(Fraction(math.comb(n, i), 2**n) for i in range(min(pos, neg) + 1))
    assert res.p == pytest.approx(float(min(Fraction(1), 2 * tail)), rel=1e-12)
    assert res.details == {"positive": pos, "negative": neg, "zero": int(np.sum(d == 0))}


# -------------------------------------------------------------- sign-flip permutation test

# Fisher (1935, sec. 21): Darwin's Zea mays, differences in eighths of an inch (from memory).
DARWIN = np.array([49, -67, 8, 16, 6, 23, 28, 41, 14, 29, 56, 24, 75, 60, -48], dtype=float)


def test_sign_flip_permutation_published_example():
    # Fisher counted the 2^15 = 32768 sign patterns: 1726 give a sum at least as far from zero
    # as the observed 314 (two-sided p = 0.0527; from memory). The enumeration here confirms it.
    sums = np.array([np.dot(DARWIN, s) for s in itertools.product((1, -1), repeat=15)])
    assert DARWIN.sum() == 314
    assert int(np.sum(np.abs(sums) >= 314)) == 1726
    x = np.column_stack([DARWIN, np.zeros_like(DARWIN)])
    res = sg.run_test("paired", "permutation_mean", (x,), digits=0, permutations=2**15,
                      rng=np.random.default_rng(0))
    assert res.method == "exact: all 32768 distinct rearrangements"
    assert res.statistic == pytest.approx(314 / 15, rel=1e-12)
    assert res.p == pytest.approx(1726 / 32768, rel=1e-12)
    # with the default 9999 random patterns: within Monte Carlo error of the exact p
    rand = sg.run_test("paired", "permutation_mean", (x,), digits=0, rng=np.random.default_rng(5))
    assert not rand.details["exact"]
    p = 1726 / 32768
    assert abs(rand.p - p) <= 4 * math.sqrt(p * (1 - p) / 9999) + 1 / 10000


def test_sign_flip_permutation_exact_against_enumeration_with_zeros_and_ties():
    # rm_anova_wide Before vs 1 week: 11 pairs -> 2^11 = 2048 patterns <= 9999, enumerated.
    x, digits = pair("rm_anova_wide_before_vs_week1")
    d = rounded_d("rm_anova_wide_before_vs_week1")
    res = sg.sign_flip_mean(x, rng=np.random.default_rng(3), digits=digits)
    assert res.details["exact"] and res.details["rearrangements"] == 2048
    means = np.array([np.mean(d * s) for s in itertools.product((1, -1), repeat=d.size)])
    obs = d.mean()
    tol = 1e-9 * max(1.0, abs(obs))
    p = min(1.0, 2 * min(np.mean(means <= obs + tol), np.mean(means >= obs - tol)))
    assert res.p == pytest.approx(p, rel=1e-12)


@pytest.mark.parametrize("name", ["mixed_anova_aug_vs_jan", "rm_anova_disgust_high_vs_low"])
@pytest.mark.slow
def test_sign_flip_permutation_agrees_with_a_large_scipy_run(name):
    x, digits = pair(name)
    d = rounded_d(name)
    res = sg.sign_flip_mean(x, rng=np.random.default_rng(17), digits=digits)
    assert not res.details["exact"]
    big = stats.permutation_test((d,), np.mean, permutation_type="samples", vectorized=True,
                                 n_resamples=200_000, alternative="two-sided",
                                 rng=np.random.default_rng(18))
    assert 0.02 < big.pvalue < 0.98
    se = math.sqrt(big.pvalue * (1 - big.pvalue) * (1 / 9999 + 1 / 200_000))
    assert abs(res.p - big.pvalue) <= 4 * se + 1 / 10000
    assert res.statistic == pytest.approx(d.mean(), rel=1e-12)


# ======================================================================= k independent groups


@pytest.mark.parametrize("name", K_NAMES)
def test_one_way_anova_against_pingouin_and_statsmodels(name):
    groups = k_groups(name)
    _, outcome, group = K_GROUPS[name]
    res = sg.run_test("k_groups", "anova", groups)
    ref = _quiet_pingouin(pg.anova, data=k_frame(name), dv=outcome, between=group).iloc[0]
    assert res.statistic == pytest.approx(float(ref["F"]), rel=1e-9)
    assert res.p == pytest.approx(float(ref["p_unc"]), rel=1e-8)
    assert res.df == [float(ref["ddof1"]), float(ref["ddof2"])]
    sm = anova_oneway(k_frame(name)[outcome], k_frame(name)[group], use_var="equal")
    assert res.statistic == pytest.approx(sm.statistic, rel=1e-9)
    assert res.p == pytest.approx(sm.pvalue, rel=1e-8)


@pytest.mark.parametrize("name", K_NAMES)
def test_welch_anova_against_pingouin_and_statsmodels(name):
    groups = k_groups(name)
    _, outcome, group = K_GROUPS[name]
    res = sg.run_test("k_groups", "welch_anova", groups)
    ref = _quiet_pingouin(pg.welch_anova, data=k_frame(name), dv=outcome, between=group).iloc[0]
    assert res.statistic == pytest.approx(float(ref["F"]), rel=1e-10)
    assert res.df[1] == pytest.approx(float(ref["ddof2"]), rel=1e-10)
    assert res.p == pytest.approx(float(ref["p_unc"]), rel=1e-9)
    sm = anova_oneway(k_frame(name)[outcome], k_frame(name)[group], use_var="unequal")
    assert res.statistic == pytest.approx(sm.statistic, rel=1e-9)
    assert res.df == pytest.approx(list(sm.df), rel=1e-9)
    assert res.p == pytest.approx(sm.pvalue, rel=1e-8)


@pytest.mark.parametrize("name", K_NAMES)
def test_kruskal_wallis_against_pingouin(name):
    groups = k_groups(name)
    _, outcome, group = K_GROUPS[name]
    res = sg.run_test("k_groups", "kruskal_wallis", groups)
    ref = _quiet_pingouin(pg.kruskal, data=k_frame(name), dv=outcome, between=group).iloc[0]
    assert res.statistic == pytest.approx(float(ref["H"]), rel=1e-10)
    assert res.p == pytest.approx(float(ref["p_unc"]), rel=1e-9)
    assert res.df == float(ref["ddof1"]) == len(groups) - 1
    assert res.statistic == pytest.approx(float(kgroups.kruskal_h_values(*groups)), rel=1e-10)


def test_k_group_published_examples():
    # McClave & Dietrich (1991) hair colour data as in pingouin's documentation of `anova`
    # (F = 6.791407, p = 0.004114, as quoted in test_k_groups_reference.py) and of `welch_anova`
    # (F = 5.890115, ddof2 = 8.329841, p = 0.018813; from memory, confirmed by statsmodels).
    groups = k_groups("anova_pain_by_hair")
    frame = k_frame("anova_pain_by_hair")
    res = sg.one_way_anova(*groups)
    assert res.statistic == pytest.approx(6.791407, abs=5e-7)
    assert res.p == pytest.approx(0.004114, abs=5e-7)
    welch = sg.welch_anova(*groups)
    sm = anova_oneway(frame["Pain threshold"], frame["Hair color"], use_var="unequal")
    for value, printed, tol in ((welch.statistic, 5.890115, 5e-7), (welch.df[1], 8.329841, 5e-7),
                                (welch.p, 0.018813, 5e-7), (sm.statistic, 5.890115, 5e-7),
                                (sm.df[1], 8.329841, 5e-7), (sm.pvalue, 0.018813, 5e-7)):
        assert value == pytest.approx(printed, abs=tol)
    # Hollander & Wolfe (1973, p. 116), mucociliary efficiency in normal subjects, with
    # obstructive airway disease and with asbestosis, the example of R's kruskal.test:
    # chi-squared = 0.77143, df = 2, p = 0.68 (from memory). pingouin reproduces it.
    hw = ([2.9, 3.0, 2.5, 2.6, 3.2], [3.8, 2.7, 4.0, 2.4], [2.8, 3.4, 3.7, 2.2, 2.0])
    res = sg.kruskal_wallis(*hw)
    long = pd.DataFrame({"y": np.concatenate(hw),
                         "g": np.repeat(["normal", "airway", "asbestosis"], [5, 4, 5])})
    ref = _quiet_pingouin(pg.kruskal, data=long, dv="y", between="g").iloc[0]
    for value, printed, tol in ((res.statistic, 0.77143, 5e-6), (float(ref["H"]), 0.77143, 5e-6),
                                (res.p, 0.68, 5e-3), (float(ref["p_unc"]), 0.68, 5e-3)):
        assert value == pytest.approx(printed, abs=tol)
    assert res.df == 2


# ==================================================================== k repeated conditions


@pytest.mark.parametrize("name", REP_NAMES)
def test_rm_anova_against_pingouin_and_statsmodels(name):
    x = matrix(name)
    n, k = x.shape
    res = sg.run_test("k_repeated", "rm_anova", (x,))
    ref = _quiet_pingouin(pg.rm_anova, wide(name).copy(), correction=True).iloc[0]  # pingouin
    eps = float(ref["eps"])
    assert res.statistic == pytest.approx(float(ref["F"]), rel=1e-9)
    assert res.p == pytest.approx(float(ref["p_GG_corr"]), rel=1e-8)
    assert res.details["epsilon_gg"] == pytest.approx(eps, rel=1e-10)
    assert res.details["p_uncorrected"] == pytest.approx(float(ref["p_unc"]), rel=1e-8)
    assert res.details["df_uncorrected"] == [float(ref["ddof1"]), float(ref["ddof2"])]
    assert res.df == pytest.approx([eps * (k - 1), eps * (n - 1) * (k - 1)], rel=1e-10)
    long = wide(name).reset_index().melt(id_vars="index", var_name="condition", value_name="y")
    table = AnovaRM(long, "y", "index", within=["condition"]).fit().anova_table  # statsmodels
    assert res.statistic == pytest.approx(float(table["F Value"].iloc[0]), rel=1e-9)
    assert res.details["p_uncorrected"] == pytest.approx(float(table["Pr > F"].iloc[0]), rel=1e-8)
    assert res.p == pytest.approx(stats.f.sf(res.statistic, *res.df), rel=1e-9)


def test_rm_anova_published_example():
    # pingouin's documentation of `rm_anova` on rm_anova_wide (complete rows): F = 5.200652,
    # eps = 0.694329 (as quoted in test_k_groups_reference.py). The corrected p follows from them
    # (scipy's F distribution on eps-scaled df 3 and 24).
    res = sg.rm_anova(matrix("rm_anova_wide_time"))
    assert res.statistic == pytest.approx(5.200652, abs=5e-7)
    assert res.details["epsilon_gg"] == pytest.approx(0.694329, abs=5e-7)
    assert res.p == pytest.approx(stats.f.sf(5.200652, 3 * 0.694329, 24 * 0.694329), rel=1e-5)


@pytest.mark.parametrize("name", REP_NAMES)
def test_friedman_against_scipy_and_pingouin(name):
    x = matrix(name)
    res = sg.run_test("k_repeated", "friedman", (x,))
    ref = stats.friedmanchisquare(*x.T)  # scipy (the module uses kgroups.friedman_values)
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-8)
    assert res.df == x.shape[1] - 1
    fr = _quiet_pingouin(pg.friedman, wide(name).copy(), method="chisq").iloc[0]  # pingouin
    assert res.statistic == pytest.approx(float(fr["Q"]), rel=1e-10)
    assert res.p == pytest.approx(float(fr["p_unc"]), rel=1e-8)


def test_friedman_published_example():
    # Hollander & Wolfe (1973, p. 140), times of 22 baseball players rounding first base by
    # three methods, the example of R's friedman.test: chi-squared = 11.143, df = 2,
    # p = 0.003805 (data and values from memory). scipy reproduces them.
    times = np.array([
        [5.40, 5.50, 5.55], [5.85, 5.70, 5.75], [5.20, 5.60, 5.50], [5.55, 5.50, 5.40],
        [5.90, 5.85, 5.70], [5.45, 5.55, 5.60], [5.40, 5.40, 5.35], [5.45, 5.50, 5.35],
        [5.25, 5.15, 5.00], [5.85, 5.80, 5.70], [5.25, 5.20, 5.10], [5.65, 5.55, 5.45],
        [5.60, 5.35, 5.45], [5.05, 5.00, 4.95], [5.50, 5.50, 5.40], [5.45, 5.55, 5.50],
        [5.55, 5.55, 5.35], [5.45, 5.50, 5.55], [5.50, 5.45, 5.25], [5.65, 5.60, 5.40],
        [5.70, 5.65, 5.55], [6.30, 6.30, 6.25]])
    res = sg.friedman(times)
    ref = stats.friedmanchisquare(*times.T)
    for value, printed, tol in ((res.statistic, 11.143, 5e-4), (ref.statistic, 11.143, 5e-4),
                                (res.p, 0.003805, 5e-7), (ref.pvalue, 0.003805, 5e-7)):
        assert value == pytest.approx(printed, abs=tol)
    assert res.df == 2


# =================================================================== registry and contract


def _shipped_samples():
    """One shipped dataset per design, as `run_test` takes it."""
    x, digits = pair("rm_anova_disgust_high_vs_low")
    return {"two_groups": (two("adelie_mass_male_vs_female"), 12),
            "paired": ((x,), digits),
            "k_groups": (k_groups("tips_bill_by_day"), 12),
            "k_repeated": ((matrix("pairwise_tests_drug"),), 12)}


def test_registry_names_per_design():
    assert {d: list(t) for d, t in sg.TESTS.items()} == {
        "two_groups": ["student_t", "welch_t", "mann_whitney", "brunner_munzel",
                       "permutation_mean"],
        "paired": ["paired_t", "wilcoxon", "sign_test", "permutation_mean"],
        "k_groups": ["anova", "welch_anova", "kruskal_wallis"],
        "k_repeated": ["rm_anova", "friedman"]}


@pytest.mark.parametrize("design, name", [(d, n) for d, t in sg.TESTS.items() for n in t])
def test_every_test_reports_a_coherent_result(design, name):
    # p follows from the statistic and df through the named distribution (scipy.stats), the
    # fields are of the documented kinds and the JSON form has no NaN.
    samples, digits = _shipped_samples()[design]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        res = sg.run_test(design, name, samples, digits=digits, rng=np.random.default_rng(4))
    assert res.name == name and res.reason is None
    assert res.compares in sg.COMPARES and res.label and res.method
    assert 0.0 < res.p <= 1.0
    recompute = {"t": lambda: 2 * stats.t.sf(abs(res.statistic), res.df),
                 "W": lambda: 2 * stats.t.sf(abs(res.statistic), res.df),
                 "F": lambda: stats.f.sf(res.statistic, *res.df),
                 "H": lambda: stats.chi2.sf(res.statistic, res.df),
                 "chi2": lambda: stats.chi2.sf(res.statistic, res.df)}
    if res.statistic_name in recompute:
        assert res.p == pytest.approx(recompute[res.statistic_name](), rel=1e-8)
    else:
        assert res.df is None
    doc = json.loads(json.dumps(res.to_dict(), allow_nan=False))
    assert doc["name"] == name and doc["p"] == res.p


# ============================================================ degenerate and malformed input

DEGENERATE = [
    # (design, name, samples, digits, words expected in the reason)
    ("two_groups", "student_t", ([2.0, 2.0, 2.0], [5.0, 5.0]), 12, "pooled standard deviation"),
    ("two_groups", "student_t", ([1.0], [2.0]), 12, "too few"),
    ("two_groups", "welch_t", ([0.1, 0.1, 0.1], [0.7, 0.7]), 12, "standard error is zero"),
    ("two_groups", "welch_t", ([1.0], [2.0, 3.0, 4.0]), 12, "at least two"),
    ("two_groups", "mann_whitney", ([3.0, 3.0], [3.0, 3.0, 3.0]), 12, "tied"),
    ("two_groups", "mann_whitney", ([], [1.0, 2.0]), 12, "at least one"),
    ("two_groups", "brunner_munzel", ([1.0, 2.0], [3.0, 4.0]), 12, "do not overlap"),
    ("two_groups", "brunner_munzel", ([5.0, 5.0], [5.0, 5.0]), 12, "placements"),
    ("two_groups", "brunner_munzel", ([1.0], [2.0, 3.0]), 12, "at least two"),
    ("two_groups", "permutation_mean", ([], [1.0]), 12, "at least one"),
    ("two_groups", "welch_t", ([1.0, np.nan, 3.0], [2.0, 5.0]), 12, "non-finite"),
    ("paired", "paired_t", (np.array([[1.1, 0.9], [2.3, 2.1], [0.5, 0.3]]),), 1,
     "every difference is equal"),
    ("paired", "paired_t", (np.array([[1.0, 2.0]]),), 12, "too few pairs"),
    ("paired", "wilcoxon", (np.array([[0.3, 0.3], [1.2, 1.2]]),), 1, "every difference is zero"),
    ("paired", "wilcoxon", (np.array([[0.1 + 0.2, 0.3], [1.0, 1.0]]),), 1,
     "every difference is zero"),
    ("paired", "sign_test", (np.array([[4.0, 4.0], [2.0, 2.0]]),), 0, "every difference is zero"),
    ("paired", "permutation_mean", (np.empty((0, 2)),), 12, "too few pairs"),
    ("paired", "sign_test", (np.array([[1.0, np.inf], [2.0, 3.0]]),), 0, "non-finite"),
    ("k_groups", "anova", ([1.0, 1.0], [2.0, 2.0], [3.0]), 12, "within-group"),
    ("k_groups", "anova", ([1.0], [2.0], [3.0]), 12, "too few"),
    ("k_groups", "welch_anova", ([0.1, 0.1, 0.1], [1.0, 2.0], [3.0, 5.0]), 12, "no variation"),
    ("k_groups", "welch_anova", ([1.0, 2.0], [3.0], [4.0, 6.0]), 12, "at least two"),
    ("k_groups", "kruskal_wallis", ([7.0, 7.0], [7.0], [7.0, 7.0]), 12, "tied"),
    ("k_groups", "kruskal_wallis", ([1.0, 2.0], [], [3.0]), 12, "at least one"),
    ("k_repeated", "rm_anova", (np.array([[1.0, 2.0, 3.0]]),), 12, "too few participants"),
    ("k_repeated", "rm_anova", (np.array([[1.0, 2.0, 3.0], [2.0, 3.0, 4.0]]),), 12,
     "error sum of squares is zero"),
    ("k_repeated", "friedman", (np.array([[2.0, 2.0, 2.0], [5.0, 5.0, 5.0]]),), 12, "tied"),
    ("k_repeated", "friedman", (np.array([[1.0, np.nan, 2.0], [1.0, 2.0, 3.0]]),), 12,
     "non-finite"),
]


@pytest.mark.parametrize("design, name, samples, digits, words", DEGENERATE,
                         ids=[f"{d}-{n}-{i}" for i, (d, n, *_) in enumerate(DEGENERATE)])
def test_degenerate_inputs_give_a_reason_and_no_warning(design, name, samples, digits, words):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        res = sg.run_test(design, name, samples, digits=digits, rng=np.random.default_rng(0))
    assert res.statistic is None and res.p is None and res.df is None
    assert words in res.reason
    assert json.dumps(res.to_dict(), allow_nan=False)


def test_welch_anova_catches_constant_decimal_groups():
    # A constant group of 0.1s has np.var(ddof=1) = 2.9e-34, not 0, so Welch's weight would be
    # astronomically large rather than infinite; the module detects the constant group exactly.
    group = np.array([0.1, 0.1, 0.1])
    assert np.var(group, ddof=1) != 0  # numpy
    res = sg.welch_anova(group, np.array([1.0, 2.0]), np.array([3.0, 5.0]))
    assert res.p is None and "no variation" in res.reason


def test_permutation_tests_on_constant_data_give_p_one_with_a_note():
    # Every rearrangement gives the same statistic: p = 1 is exact, not undefined.
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        two_res = sg.permutation_mean_difference(np.full(4, 2.5), np.full(3, 2.5),
                                                 rng=np.random.default_rng(0))
        pair_res = sg.sign_flip_mean(np.full((6, 2), 0.7), rng=np.random.default_rng(0))
    for res in (two_res, pair_res):
        assert res.statistic == 0 and res.p == 1.0 and res.reason is None
        assert any("every" in n for n in res.notes)


def test_rounding_digits_reach_the_paired_tests():
    # 0.3 - 0.1 and 0.2 - 0.0 differ in binary floating point: scipy on the raw differences sees
    # five distinct |d| (exact p 0.4375). Rounded (to 1 or to the default 12 places) they tie,
    # which moves the signed-rank test to the exact distribution over the sign patterns of the
    # tied mid-ranks: scipy's on the rounded d, every pattern listed (PermutationMethod).
    x = np.array([[0.3, 0.1], [0.2, 0.0], [1.5, 1.0], [0.2, 0.9], [2.0, 0.8]])
    raw = x[:, 0] - x[:, 1]
    assert pd.Series(np.abs(raw)).is_unique  # pandas, raw differences
    untied_p = stats.wilcoxon(raw, method="exact").pvalue  # scipy, raw differences
    for digits in (1, 12):
        res = sg.run_test("paired", "wilcoxon", (x,), digits=digits)
        assert "tied mid-ranks" in res.method
        d = np.round(raw, digits)
        ref = stats.wilcoxon(d, method=stats.PermutationMethod()).pvalue  # scipy, 2^5 patterns
        assert res.p == pytest.approx(ref, rel=1e-12)
        assert res.p == pytest.approx(_enumerated_signed_rank_p(d), rel=1e-12)
        assert not math.isclose(res.p, untied_p, rel_tol=1e-6)
    # Whole-number rounding turns 0.2 and 0.4 into zeros: the sign test then counts one sign.
    y = np.array([[1.2, 1.0], [2.4, 2.0], [3.0, 1.0]])
    assert sg.run_test("paired", "sign_test", (y,), digits=1).details["zero"] == 0
    assert sg.run_test("paired", "sign_test", (y,), digits=0).details == {
        "positive": 1, "negative": 0, "zero": 2}


def _one_line_value_error(call, *words):
    with pytest.raises(ValueError) as info:
        call()
    message = str(info.value)
    assert "\n" not in message
    for w in words:
        assert w in message
    return message


def test_unknown_design_or_test_gives_a_clear_error():
    _one_line_value_error(lambda: sg.run_test("three_groups", "anova", ([1.0], [2.0])),
                          "three_groups", "two_groups, paired, k_groups, k_repeated")
    _one_line_value_error(lambda: sg.run_test("paired", "welch_t", (np.ones((3, 2)),)),
                          "welch_t", "paired_t, wilcoxon, sign_test, permutation_mean")
    _one_line_value_error(lambda: sg.run_test("k_groups", "friedman", ([1.0], [2.0])),
                          "anova, welch_anova, kruskal_wallis")


def test_malformed_samples_and_options_give_a_clear_error():
    a, b = two("spector_gpa_psi_vs_not")
    _one_line_value_error(lambda: sg.run_test("two_groups", "welch_t", (a,)), "exactly two")
    _one_line_value_error(lambda: sg.run_test("paired", "paired_t", np.ones((4, 2))), "tuple")
    _one_line_value_error(lambda: sg.run_test("paired", "paired_t", (np.ones((4, 3)),)),
                          "(n, 2)", "(4, 3)")
    _one_line_value_error(lambda: sg.run_test("k_repeated", "friedman", (np.ones(5),)), "(n, k)")
    _one_line_value_error(lambda: sg.run_test("k_groups", "anova", (a,)), "two or more")
    _one_line_value_error(lambda: sg.run_test("two_groups", "welch_t", (np.ones((2, 2)), b)),
                          "1-D")
    _one_line_value_error(lambda: sg.run_test("two_groups", "permutation_mean", (a, b)),
                          "numpy.random.Generator")
    _one_line_value_error(lambda: sg.run_test("paired", "permutation_mean", (np.ones((4, 2)),),
                                              rng=np.random.default_rng(0), permutations=0),
                          "permutations=0")
