"""Reference checks: the two one-sided tests of `auditor.equivalence` against computations outside
the project, and their properties.

Data are open datasets shipped inside installed packages (no network):
  * pingouin `penguins` (Palmer penguins, Gorman, Williams & Fraser 2014, via the palmerpenguins
    package): body mass (g) by sex within each species, and of females between islands within
    Adelie; flipper length (mm, whole numbers, many ties) for the rank-based index;
  * pingouin `blandaltman` (two measurement methods A and B on 30 subjects, whole numbers) and
    `rm_anova_wide` (scores before and one week after, one decimal) for paired data;
  * pingouin `pairwise_tests` (scores 1-10 by gender: heavy ties) for the rank-based index.

References:
  * Welch TOST: statsmodels.stats.weightstats.ttost_ind(a, b, low, upp, usevar='unequal'),
    the 1 - 2 alpha interval by CompareMeans.tconfint_diff(alpha=2 alpha, usevar='unequal'), and
    p of no difference by scipy.stats.ttest_ind(equal_var=False);
  * paired TOST: statsmodels.stats.weightstats.ttost_paired(x1, x2, low, upp) and
    scipy.stats.ttest_rel;
  * A against nulls other than 1/2: statsmodels.stats.nonparametric.rank_compare_2indep(x1, x2)
    (.test_prob_superior, .tost_prob_superior, .conf_int, .pvalue). Its prob1 is
    P(x1 > x2) + 0.5 P(x1 = x2), the same direction as `auditor`'s A with x1 = group A: checked
    below against a count over all pairs;
  * noncentral-t tests of d, g and d_z: scipy.stats.nct.sf / nct.cdf with the noncentrality
    written out in the test, and a numerical integration of the noncentral-t distribution
    function over the chi-squared variable (scipy.integrate.quad), a route independent of the
    library's distribution function and of `parametric.noncentral_t_cdf` (which integrates over
    the normal variable).
No worked example from a publication is used: none is recalled reliably enough to quote.

Tolerances: 1e-8 relative (1e-10 absolute) for numbers both sides compute in closed form from
the same t distribution; 1e-8 absolute for the noncentral t.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from hypothesis import HealthCheck, assume, example, given, settings
from hypothesis import strategies as st
from scipy import integrate, special, stats
from statsmodels.stats.nonparametric import rank_compare_2indep
from statsmodels.stats.weightstats import CompareMeans, DescrStatsW, ttost_ind, ttost_paired

from auditor import equivalence as eq
from auditor.parametric import hedges_correction

ALPHA = 0.05
CLOSE = dict(rel=1e-8, abs=1e-10)
NCT_CLOSE = dict(abs=1e-8)
STEADY = settings(derandomize=True, deadline=None, max_examples=60, database=None,
                  suppress_health_check=[HealthCheck.too_slow])


# ================================================================ data


def _penguins() -> pd.DataFrame:
    return pg.read_dataset("penguins").dropna(subset=["body_mass_g", "flipper_length_mm", "sex"])


def _values(frame, column, **where) -> np.ndarray:
    rows = frame
    for key, value in where.items():
        rows = rows[rows[key] == value]
    return rows[column].to_numpy(dtype=float)


def _body_mass_pairs():
    """(name, a, b) body-mass comparisons from pingouin's penguins (grams)."""
    p = _penguins()
    out = []
    for species in ("Adelie", "Chinstrap", "Gentoo"):
        out.append((f"{species} male vs female",
                    _values(p, "body_mass_g", species=species, sex="male"),
                    _values(p, "body_mass_g", species=species, sex="female")))
    for first, second in (("Biscoe", "Dream"), ("Torgersen", "Dream"), ("Biscoe", "Torgersen")):
        out.append((f"Adelie females {first} vs {second}",
                    _values(p, "body_mass_g", species="Adelie", sex="female", island=first),
                    _values(p, "body_mass_g", species="Adelie", sex="female", island=second)))
    return out


def _rank_pairs():
    """(name, a, b) comparisons with ties for A (pingouin penguins and pairwise_tests)."""
    p = _penguins()
    out = [("Adelie flipper male vs female",
            _values(p, "flipper_length_mm", species="Adelie", sex="male"),
            _values(p, "flipper_length_mm", species="Adelie", sex="female")),
           ("Adelie female flipper Biscoe vs Dream",
            _values(p, "flipper_length_mm", species="Adelie", sex="female", island="Biscoe"),
            _values(p, "flipper_length_mm", species="Adelie", sex="female", island="Dream")),
           ("Adelie female body mass Torgersen vs Dream",
            _values(p, "body_mass_g", species="Adelie", sex="female", island="Torgersen"),
            _values(p, "body_mass_g", species="Adelie", sex="female", island="Dream"))]
    scores = pg.read_dataset("pairwise_tests")
    out.append(("pairwise_tests scores F vs M", _values(scores, "Scores", Gender="F"),
                _values(scores, "Scores", Gender="M")))
    return out


def _paired_sets():
    """(name, x) with x of shape (n, 2), complete rows only (pingouin datasets)."""
    ba = pg.read_dataset("blandaltman")
    wide = pg.read_dataset("rm_anova_wide").dropna(subset=["Before", "1 week"])
    return [("blandaltman A vs B", ba[["A", "B"]].to_numpy(dtype=float)),
            ("rm_anova_wide Before vs 1 week", wide[["Before", "1 week"]].to_numpy(dtype=float))]


BODY_MASS = _body_mass_pairs()
RANKED = _rank_pairs()
PAIRED = _paired_sets()
MASS_MARGINS = (50.0, 150.0, 400.0, 700.0, (-100.0, 300.0))
A_MARGINS = (0.05, 0.1, 0.2, 0.4, (0.35, 0.8))
PAIRED_MARGINS = (0.5, 2.0, 5.0, 20.0, (-3.0, 1.0))


def _bounds(margin, null):
    return (null - margin, null + margin) if not isinstance(margin, tuple) else margin


# ================================================================ Welch and paired t


@pytest.mark.parametrize("margin", MASS_MARGINS)
@pytest.mark.parametrize("name,a,b", BODY_MASS, ids=[c[0] for c in BODY_MASS])
def test_welch_tost_matches_statsmodels(name, a, b, margin):
    res = eq.mean_difference_tost(a, b, margin, ALPHA)
    low, high = _bounds(margin, 0.0)
    assert (res.margin_low, res.margin_high) == (low, high)
    # statsmodels.stats.weightstats.ttost_ind, Welch-Satterthwaite df
    p_tost, (t1, p1, df1), (t2, p2, df2) = ttost_ind(a, b, low, high, usevar="unequal")
    assert res.p_lower == pytest.approx(p1, **CLOSE)
    assert res.p_upper == pytest.approx(p2, **CLOSE)
    assert res.p_tost == pytest.approx(p_tost, **CLOSE)
    assert res.df == pytest.approx(df1, **CLOSE)
    # statsmodels CompareMeans.tconfint_diff at 2 alpha: the interval of the same t
    lo, hi = CompareMeans(DescrStatsW(a), DescrStatsW(b)).tconfint_diff(alpha=2 * ALPHA,
                                                                        usevar="unequal")
    assert (res.interval_low, res.interval_high) == (pytest.approx(lo, **CLOSE),
                                                     pytest.approx(hi, **CLOSE))
    # scipy.stats.ttest_ind(equal_var=False): the ordinary test of no difference
    welch = stats.ttest_ind(a, b, equal_var=False)
    assert res.statistic == pytest.approx(welch.statistic, **CLOSE)
    assert res.p_difference == pytest.approx(welch.pvalue, **CLOSE)
    # minimal-effect p: the opposite tails of the same two statistics (scipy t.cdf / t.sf)
    assert res.p_minimal_effect == pytest.approx(
        min(stats.t.cdf(t1, df1), stats.t.sf(t2, df2)), **CLOSE)


@pytest.mark.parametrize("margin", PAIRED_MARGINS)
@pytest.mark.parametrize("name,x", PAIRED, ids=[c[0] for c in PAIRED])
def test_paired_tost_matches_statsmodels(name, x, margin):
    low, high = _bounds(margin, 0.0)
    # statsmodels.stats.weightstats.ttost_paired on the raw columns
    p_tost, (t1, p1, df1), (t2, p2, df2) = ttost_paired(x[:, 0], x[:, 1], low, high)
    rel = stats.ttest_rel(x[:, 0], x[:, 1])  # scipy: the ordinary paired t test
    for data in (x, x[:, 0] - x[:, 1]):  # the (n, 2) array and the differences themselves
        res = eq.paired_mean_difference_tost(data, margin, ALPHA)
        assert res.p_lower == pytest.approx(p1, **CLOSE)
        assert res.p_upper == pytest.approx(p2, **CLOSE)
        assert res.p_tost == pytest.approx(p_tost, **CLOSE)
        assert res.df == df1
        assert res.statistic == pytest.approx(rel.statistic, **CLOSE)
        assert res.p_difference == pytest.approx(rel.pvalue, **CLOSE)
        ci = stats.ttest_1samp(x[:, 0] - x[:, 1], 0.0).confidence_interval(1 - 2 * ALPHA)
        assert res.interval_low == pytest.approx(ci.low, **CLOSE)
        assert res.interval_high == pytest.approx(ci.high, **CLOSE)


# ================================================================ A by the Brunner-Munzel statistic


@pytest.mark.parametrize("name,a,b", RANKED, ids=[c[0] for c in RANKED])
def test_statsmodels_prob1_has_the_direction_of_a(name, a, b):
    """statsmodels' prob1 is P(x1 > x2) + 0.5 P(x1 = x2): counted here over all pairs."""
    counted = np.mean((a[:, None] > b[None, :]) + 0.5 * (a[:, None] == b[None, :]))
    res = eq.prob_superiority_tost(a, b, 0.1)
    assert rank_compare_2indep(a, b).prob1 == pytest.approx(counted, rel=1e-12)
    assert res.estimate == pytest.approx(counted, rel=1e-12)


@pytest.mark.parametrize("margin", A_MARGINS)
@pytest.mark.parametrize("name,a,b", RANKED, ids=[c[0] for c in RANKED])
def test_prob_superiority_tost_matches_statsmodels(name, a, b, margin):
    res = eq.prob_superiority_tost(a, b, margin, ALPHA)
    low, high = _bounds(margin, 0.5)
    assert (res.margin_low, res.margin_high) == (pytest.approx(low, abs=1e-15),
                                                 pytest.approx(high, abs=1e-15))
    rc = rank_compare_2indep(a, b)  # use_t=True: the t distribution with the BM df
    larger = rc.test_prob_superior(value=res.margin_low, alternative="larger")
    smaller = rc.test_prob_superior(value=res.margin_high, alternative="smaller")
    tost = rc.tost_prob_superior(res.margin_low, res.margin_high)
    assert res.p_lower == pytest.approx(larger.pvalue, **CLOSE)
    assert res.p_upper == pytest.approx(smaller.pvalue, **CLOSE)
    assert res.p_tost == pytest.approx(tost.pvalue, **CLOSE)
    assert res.df == pytest.approx(rc.df, **CLOSE)
    assert res.statistic == pytest.approx(rc.statistic, **CLOSE)  # Brunner-Munzel W
    assert res.p_difference == pytest.approx(rc.pvalue, **CLOSE)
    lo, hi = rc.conf_int(alpha=2 * ALPHA)
    assert res.interval_low == pytest.approx(max(lo, 0.0), **CLOSE)
    assert res.interval_high == pytest.approx(min(hi, 1.0), **CLOSE)
    # the minimal-effect p: the opposite one-sided tests at the two bounds (statsmodels)
    above = rc.test_prob_superior(value=res.margin_high, alternative="larger").pvalue
    below = rc.test_prob_superior(value=res.margin_low, alternative="smaller").pvalue
    assert res.p_minimal_effect == pytest.approx(min(above, below), **CLOSE)


# ================================================================ noncentral t: d, g, d_z


def _nct_cdf_over_chi2(t: float, df: float, ncp: float) -> float:
    """P(T <= t) for T = (Z + ncp) / sqrt(V / df), written as
    int_0^inf Phi(t sqrt(v / df) - ncp) chi2_df(v) dv (conditioning on V), integrated by quad
    over the chi-squared quantile scale u = F_chi2(v) in (0, 1)."""
    def integrand(u):
        v = stats.chi2.ppf(u, df)
        return special.ndtr(t * math.sqrt(v / df) - ncp)

    value, err = integrate.quad(integrand, 0.0, 1.0, limit=500, epsabs=1e-13, epsrel=1e-12)
    assert err < 1e-10
    return value


def _nct_lower(t: float, df: float, ncp: float) -> float:
    """P(T <= t | ncp): scipy.stats.nct.cdf, or the integration over the chi-squared variable
    where scipy gives NaN (scipy 1.17.1 does far in the lower tail, e.g. t = -4.28, df = 29,
    ncp = 8.2, where the probability is about 3e-30)."""
    value = stats.nct.cdf(t, df, ncp)
    return value if math.isfinite(value) else _nct_cdf_over_chi2(t, df, ncp)


def _nct_upper(t: float, df: float, ncp: float) -> float:
    """P(T >= t | ncp): scipy.stats.nct.sf, with the same fallback (by symmetry)."""
    value = stats.nct.sf(t, df, ncp)
    return value if math.isfinite(value) else _nct_cdf_over_chi2(-t, df, -ncp)


def _standardized_cases():
    cases = []
    for name, a, b in BODY_MASS:
        for margin in (0.3, 0.8, 2.0, (-0.5, 1.5)):
            cases.append((name, a, b, margin))
    return cases


STANDARDIZED = _standardized_cases()


@pytest.mark.parametrize("name,a,b,margin", STANDARDIZED,
                         ids=[f"{c[0]} m={c[3]}" for c in STANDARDIZED])
@pytest.mark.parametrize("index", ["cohen_d", "hedges_g"])
def test_d_and_g_tost_by_the_noncentral_t(index, name, a, b, margin):
    fn = eq.cohen_d_tost if index == "cohen_d" else eq.hedges_g_tost
    res = fn(a, b, margin, ALPHA)
    na, nb = a.size, b.size
    df = na + nb - 2
    scale = math.sqrt(na * nb / (na + nb))
    j = 1.0 if index == "cohen_d" else hedges_correction(df)
    low, high = _bounds(margin, 0.0)
    student = stats.ttest_ind(a, b, equal_var=True)  # t = d sqrt(n_A n_B / (n_A + n_B))
    t = student.statistic
    assert res.statistic == pytest.approx(t, **CLOSE)
    assert res.df == df
    # scipy.stats.nct with the bounds on d's scale (g's bounds divided by J)
    assert res.p_lower == pytest.approx(_nct_upper(t, df, low / j * scale), **NCT_CLOSE)
    assert res.p_upper == pytest.approx(_nct_lower(t, df, high / j * scale), **NCT_CLOSE)
    assert res.p_tost == pytest.approx(max(_nct_upper(t, df, low / j * scale),
                                           _nct_lower(t, df, high / j * scale)), **NCT_CLOSE)
    assert res.p_minimal_effect == pytest.approx(
        min(_nct_upper(t, df, high / j * scale), _nct_lower(t, df, low / j * scale)),
        **NCT_CLOSE)
    assert res.p_difference == pytest.approx(student.pvalue, **CLOSE)  # Student's t test
    # the interval's ends are where the one-sided noncentral-t p-values equal alpha
    assert _nct_upper(t, df, res.interval_low / j * scale) == pytest.approx(ALPHA, abs=1e-8)
    assert _nct_lower(t, df, res.interval_high / j * scale) == pytest.approx(ALPHA, abs=1e-8)


@pytest.mark.parametrize("name,a,b", BODY_MASS[3:], ids=[c[0] for c in BODY_MASS[3:]])
def test_d_tost_by_an_independent_integration(name, a, b):
    """The same p-values by integrating over the chi-squared variable (see the helper)."""
    res = eq.cohen_d_tost(a, b, 0.6, ALPHA)
    df = a.size + b.size - 2
    scale = math.sqrt(a.size * b.size / (a.size + b.size))
    t = res.statistic
    assert res.p_upper == pytest.approx(_nct_cdf_over_chi2(t, df, 0.6 * scale), **NCT_CLOSE)
    assert res.p_lower == pytest.approx(1.0 - _nct_cdf_over_chi2(t, df, -0.6 * scale),
                                        **NCT_CLOSE)


@pytest.mark.parametrize("margin", (0.1, 0.4, 1.5, (-0.8, 0.2)))
@pytest.mark.parametrize("name,x", PAIRED, ids=[c[0] for c in PAIRED])
def test_d_z_tost_by_the_noncentral_t(name, x, margin):
    res = eq.d_z_tost(x, margin, ALPHA)
    n = x.shape[0]
    low, high = _bounds(margin, 0.0)
    rel = stats.ttest_rel(x[:, 0], x[:, 1])  # t = d_z sqrt(n)
    t, df = rel.statistic, n - 1
    d = x[:, 0] - x[:, 1]
    assert res.estimate == pytest.approx(np.mean(d) / np.std(d, ddof=1), **CLOSE)
    assert res.p_lower == pytest.approx(_nct_upper(t, df, low * math.sqrt(n)), **NCT_CLOSE)
    assert res.p_upper == pytest.approx(_nct_lower(t, df, high * math.sqrt(n)), **NCT_CLOSE)
    assert res.p_upper == pytest.approx(_nct_cdf_over_chi2(t, df, high * math.sqrt(n)),
                                        **NCT_CLOSE)
    assert res.p_difference == pytest.approx(rel.pvalue, **CLOSE)
    assert _nct_upper(t, df, res.interval_low * math.sqrt(n)) == pytest.approx(ALPHA, abs=1e-8)
    assert _nct_lower(t, df, res.interval_high * math.sqrt(n)) == pytest.approx(ALPHA,
                                                                                   abs=1e-8)


def test_hedges_g_is_d_with_bounds_divided_by_j():
    _, a, b = BODY_MASS[3]
    j = hedges_correction(a.size + b.size - 2)
    g = eq.hedges_g_tost(a, b, (-0.3, 0.5), ALPHA)
    d = eq.cohen_d_tost(a, b, (-0.3 / j, 0.5 / j), ALPHA)
    assert g.estimate == pytest.approx(j * d.estimate, rel=1e-13)
    for field in ("p_lower", "p_upper", "p_tost", "p_minimal_effect", "p_difference"):
        assert getattr(g, field) == pytest.approx(getattr(d, field), rel=1e-12, abs=1e-15)
    assert g.interval_low == pytest.approx(j * d.interval_low, rel=1e-10)
    assert g.verdict == d.verdict


# ================================================================ the verdicts


def _normal_scores(n: int) -> np.ndarray:
    """Evenly spaced standard-normal quantiles: normal-looking data without a random draw."""
    return stats.norm.ppf((np.arange(n) + 0.5) / n)


def _reading(res) -> str:
    """The verdict read from the interval and p_difference by the module's definitions."""
    inside = res.margin_low < res.interval_low and res.interval_high < res.margin_high
    beyond = res.interval_low > res.margin_high or res.interval_high < res.margin_low
    if beyond:
        return eq.AT_LEAST_MARGIN
    if inside:
        return eq.SMALLER_THAN_MARGIN if res.p_difference < res.alpha else eq.EQUIVALENT
    return eq.UNDECIDED


# (shift of A over B, margin on the index's own scale, expected verdict); n = 40 per group
DESIGNED = {
    "mean_difference": [(0.0, 1.0, eq.EQUIVALENT), (0.6, 1.5, eq.SMALLER_THAN_MARGIN),
                        (2.5, 1.0, eq.AT_LEAST_MARGIN), (0.8, 1.0, eq.UNDECIDED),
                        (0.1, 0.2, eq.UNDECIDED)],
    "cohen_d": [(0.0, 0.6, eq.EQUIVALENT), (0.6, 1.3, eq.SMALLER_THAN_MARGIN),
                (2.5, 1.0, eq.AT_LEAST_MARGIN), (0.8, 1.0, eq.UNDECIDED)],
    "prob_superiority": [(0.0, 0.15, eq.EQUIVALENT), (0.8, 0.35, eq.SMALLER_THAN_MARGIN),
                         (2.5, 0.2, eq.AT_LEAST_MARGIN), (0.8, 0.2, eq.UNDECIDED)],
    "paired": [(0.0, 0.5, eq.EQUIVALENT), (0.6, 1.0, eq.SMALLER_THAN_MARGIN),
               (1.5, 0.8, eq.AT_LEAST_MARGIN), (0.6, 0.6, eq.UNDECIDED)],
    "d_z": [(0.0, 0.5, eq.EQUIVALENT), (0.6, 1.0, eq.SMALLER_THAN_MARGIN),
            (1.5, 0.8, eq.AT_LEAST_MARGIN), (0.6, 0.6, eq.UNDECIDED)],
}
TWO_GROUP = {"mean_difference": eq.mean_difference_tost, "cohen_d": eq.cohen_d_tost,
             "prob_superiority": eq.prob_superiority_tost}
ONE_SAMPLE = {"paired": eq.paired_mean_difference_tost, "d_z": eq.d_z_tost}


@pytest.mark.parametrize("index", list(DESIGNED))
def test_each_verdict_occurs_and_agrees_with_its_definition(index):
    base = _normal_scores(40)
    seen = set()
    for shift, margin, expected in DESIGNED[index]:
        if index in TWO_GROUP:
            res = TWO_GROUP[index](base + shift, base[::-1].copy(), margin, ALPHA)
        else:
            res = ONE_SAMPLE[index](base + shift, margin, ALPHA)
        assert res.verdict == expected, (shift, margin, res)
        assert _reading(res) == expected
        seen.add(res.verdict)
    assert eq.AT_LEAST_MARGIN in seen and eq.EQUIVALENT in seen and eq.UNDECIDED in seen
    assert eq.SMALLER_THAN_MARGIN in seen


def test_verdict_of_is_a_partition():
    """The order of the rules: each combination of the three p-values on either side of alpha
    gives the verdict the module docstring names. (That the two margin tests never reject
    together is checked on data in `test_the_p_values_agree_with_the_interval`.)"""
    for p_tost in (0.01, 0.5):
        for p_met in (0.01, 0.5):
            for p_diff in (0.01, 0.5):
                got = eq.verdict_of(p_tost, p_met, p_diff, 0.05)
                assert got in eq.VERDICTS
                if p_met < 0.05:
                    assert got == eq.AT_LEAST_MARGIN
                elif p_tost < 0.05:
                    assert got == (eq.SMALLER_THAN_MARGIN if p_diff < 0.05 else eq.EQUIVALENT)
                else:
                    assert got == eq.UNDECIDED


# ================================================================ Cliff's delta, d unpooled, Glass


DELTA_MARGINS = (0.1, 0.3, 0.6, (-0.2, 0.5))


@pytest.mark.parametrize("margin", DELTA_MARGINS)
@pytest.mark.parametrize("name,a,b", RANKED, ids=[c[0] for c in RANKED])
@pytest.mark.parametrize("index", ["cliff_delta", "rank_biserial"])
def test_cliff_delta_tost_is_statsmodels_a_test_on_the_mapped_bounds(index, name, a, b, margin):
    """delta = 2A - 1: statsmodels' Brunner-Munzel tests of prob1 at ((1 + low)/2, (1 + high)/2),
    and its interval carried by 2x - 1."""
    fn = eq.cliff_delta_tost if index == "cliff_delta" else eq.rank_biserial_tost
    res = fn(a, b, margin, ALPHA)
    low, high = _bounds(margin, 0.0)
    assert (res.margin_low, res.margin_high, res.null_value) == (low, high, 0.0)
    rc = rank_compare_2indep(a, b)
    a_low, a_high = (1 + low) / 2, (1 + high) / 2
    larger = rc.test_prob_superior(value=a_low, alternative="larger")
    smaller = rc.test_prob_superior(value=a_high, alternative="smaller")
    assert res.p_lower == pytest.approx(larger.pvalue, **CLOSE)
    assert res.p_upper == pytest.approx(smaller.pvalue, **CLOSE)
    assert res.p_tost == pytest.approx(rc.tost_prob_superior(a_low, a_high).pvalue, **CLOSE)
    assert res.p_difference == pytest.approx(rc.pvalue, **CLOSE)
    assert res.estimate == pytest.approx(2 * rc.prob1 - 1, **CLOSE)
    lo, hi = rc.conf_int(alpha=2 * ALPHA)
    assert res.interval_low == pytest.approx(2 * max(lo, 0.0) - 1, **CLOSE)
    assert res.interval_high == pytest.approx(2 * min(hi, 1.0) - 1, **CLOSE)


@pytest.mark.parametrize("margin", (0.2, 0.5, 1.2, (-0.4, 0.9)))
@pytest.mark.parametrize("name,a,b", BODY_MASS, ids=[c[0] for c in BODY_MASS])
def test_d_unpooled_tost_by_the_noncentral_t_with_welch_df(name, a, b, margin):
    """Welch's t is noncentral t on Welch's df with ncp = delta / c, c = se / s (scipy.stats.nct,
    scipy's Welch test for the p of no effect)."""
    res = eq.d_unpooled_tost(a, b, margin, ALPHA)
    va, vb = np.var(a, ddof=1), np.var(b, ddof=1)
    se = math.sqrt(va / a.size + vb / b.size)
    s = math.sqrt((va + vb) / 2)
    nu = (va / a.size + vb / b.size) ** 2 / (
        (va / a.size) ** 2 / (a.size - 1) + (vb / b.size) ** 2 / (b.size - 1))
    t = (a.mean() - b.mean()) / se
    c = se / s
    low, high = _bounds(margin, 0.0)
    assert res.estimate == pytest.approx((a.mean() - b.mean()) / s, rel=1e-12)
    assert res.p_lower == pytest.approx(_nct_upper(t, nu, low / c), **NCT_CLOSE)
    assert res.p_upper == pytest.approx(_nct_lower(t, nu, high / c), **NCT_CLOSE)
    welch = stats.ttest_ind(a, b, equal_var=False)
    assert res.p_difference == pytest.approx(welch.pvalue, **CLOSE)
    assert res.df == pytest.approx(nu, rel=1e-12)
    # the interval: where each one-sided p equals alpha
    assert _nct_upper(t, nu, res.interval_low / c) == pytest.approx(ALPHA, abs=1e-8)
    assert _nct_lower(t, nu, res.interval_high / c) == pytest.approx(ALPHA, abs=1e-8)


@pytest.mark.parametrize("margin", (0.2, 0.5, 1.2, (-0.4, 0.9)))
@pytest.mark.parametrize("name,a,b", BODY_MASS, ids=[c[0] for c in BODY_MASS])
@pytest.mark.parametrize("reference", [0, 1])
def test_glass_delta_tost_by_normal_theory(reference, name, a, b, margin):
    """Wald tests with Glass's delta's large-sample SE (Hedges & Olkin 1985, p. 79, with the
    other group's own variance), written out here with scipy.stats.norm."""
    res = eq.glass_delta_tost(a, b, margin, ALPHA, reference=reference)
    ref, other = (b, a) if reference == 1 else (a, b)
    delta = (a.mean() - b.mean()) / np.std(ref, ddof=1)
    se = math.sqrt(np.var(other, ddof=1) / np.var(ref, ddof=1) / other.size + 1 / ref.size
                   + delta**2 / (2 * (ref.size - 1)))
    low, high = _bounds(margin, 0.0)
    assert res.estimate == pytest.approx(delta, rel=1e-12)
    assert res.p_lower == pytest.approx(stats.norm.sf((delta - low) / se), **CLOSE)
    assert res.p_upper == pytest.approx(stats.norm.cdf((delta - high) / se), **CLOSE)
    assert res.p_difference == pytest.approx(2 * stats.norm.sf(abs(delta) / se), **CLOSE)
    z = stats.norm.ppf(1 - ALPHA)
    assert res.interval_low == pytest.approx(delta - z * se, **CLOSE)
    assert res.interval_high == pytest.approx(delta + z * se, **CLOSE)


# ================================================================ properties


@st.composite
def two_groups(draw, min_size=3, max_size=25):
    """Two groups on a grid of 1/8 (ties happen), with a drawn shift of A over B."""
    na = draw(st.integers(min_size, max_size))
    nb = draw(st.integers(min_size, max_size))
    cells = st.integers(-24, 24)
    shift = draw(st.integers(-24, 24)) / 8.0
    a = np.array(draw(st.lists(cells, min_size=na, max_size=na)), dtype=float) / 8.0 + shift
    b = np.array(draw(st.lists(cells, min_size=nb, max_size=nb)), dtype=float) / 8.0
    assume(np.ptp(a) > 0 and np.ptp(b) > 0)
    return a, b


MARGINS = st.floats(0.05, 5.0)
A_MARGIN = st.floats(0.02, 0.45)
FUNCTIONS = {"mean_difference": eq.mean_difference_tost, "cohen_d": eq.cohen_d_tost,
             "hedges_g": eq.hedges_g_tost, "prob_superiority": eq.prob_superiority_tost,
             "cliff_delta": eq.cliff_delta_tost, "d_unpooled": eq.d_unpooled_tost}
# Glass's delta is scaled by the second group's SD: swapping the groups changes the index
UNSWAPPABLE = {"glass_delta": eq.glass_delta_tost}
RANGE = {"prob_superiority": (0.0, 1.0), "cliff_delta": (-1.0, 1.0)}
P_FIELDS = ("p_lower", "p_upper", "p_tost", "p_minimal_effect")


def _clear_of_alpha(res, gap=1e-9) -> bool:
    """Away from the knife edge p = alpha, where rounding may tip a comparison either way."""
    return all(abs(getattr(res, f) - res.alpha) > gap
               for f in P_FIELDS + ("p_difference",))


def _margin_for(index, draw_margin, draw_a_margin):
    return {"prob_superiority": draw_a_margin, "cliff_delta": 2 * draw_a_margin}.get(
        index, draw_margin)


@STEADY
@given(data=two_groups(), m=MARGINS, ma=A_MARGIN, skew=st.floats(0.1, 0.9))
@example(data=(np.array([0., 1, 2, 3]), np.array([0., 1, 2, 3.5])), m=0.5, ma=0.2, skew=0.5)
@pytest.mark.parametrize("index", list(FUNCTIONS))
def test_swapping_the_groups_mirrors_the_tests(index, data, m, ma, skew):
    a, b = data
    fn = FUNCTIONS[index]
    null = 0.5 if index == "prob_superiority" else 0.0
    margin = _margin_for(index, m, ma)
    # asymmetric bounds: (null - skew 2m, null + (1 - skew) 2m), mirrored for the swap
    low, high = null - skew * 2 * margin, null + (1 - skew) * 2 * margin
    if index in RANGE:
        low, high = max(low, RANGE[index][0]), min(high, RANGE[index][1])
    ab = fn(a, b, (low, high), ALPHA)
    ba = fn(b, a, (2 * null - high, 2 * null - low), ALPHA)
    assert (ab.reason is None) == (ba.reason is None)
    assume(ab.reason is None)  # A under complete separation: no test either way
    assert ba.estimate == pytest.approx(2 * null - ab.estimate, rel=1e-9, abs=1e-12)
    assert ba.p_lower == pytest.approx(ab.p_upper, rel=1e-7, abs=1e-12)
    assert ba.p_upper == pytest.approx(ab.p_lower, rel=1e-7, abs=1e-12)
    assert ba.p_tost == pytest.approx(ab.p_tost, rel=1e-7, abs=1e-12)
    assert ba.p_difference == pytest.approx(ab.p_difference, rel=1e-9, abs=1e-12)
    if _clear_of_alpha(ab):
        assert ba.verdict == ab.verdict


@STEADY
@given(data=two_groups(), m=MARGINS, ma=A_MARGIN, c=st.sampled_from([1e-3, 0.37, 6.0, 2.5e4]))
@pytest.mark.parametrize("index", list(FUNCTIONS) + list(UNSWAPPABLE))
def test_units_do_not_change_the_standardized_verdicts(index, data, m, ma, c):
    """Multiplying every value by c > 0 leaves d, g and A and their tests unchanged; the raw
    mean difference is unchanged once its margin is multiplied by c too."""
    a, b = data
    fn = {**FUNCTIONS, **UNSWAPPABLE}[index]
    margin = _margin_for(index, m, ma)
    scaled_margin = margin * c if index == "mean_difference" else margin
    one, other = fn(a, b, margin, ALPHA), fn(a * c, b * c, scaled_margin, ALPHA)
    assert one.reason == other.reason
    assume(one.reason is None)
    for f in P_FIELDS + ("p_difference",):
        assert getattr(other, f) == pytest.approx(getattr(one, f), rel=1e-7, abs=1e-12)
    if _clear_of_alpha(one):
        assert other.verdict == one.verdict


@STEADY
@given(data=two_groups(), m=MARGINS, ma=A_MARGIN)
@pytest.mark.parametrize("index", list(FUNCTIONS) + list(UNSWAPPABLE))
def test_the_p_values_agree_with_the_interval(index, data, m, ma):
    """p_tost < alpha iff the 1 - 2 alpha interval lies inside the bounds; p_minimal_effect <
    alpha iff it lies beyond one; the verdict is the interval's reading (`_reading`)."""
    a, b = data
    res = {**FUNCTIONS, **UNSWAPPABLE}[index](a, b, _margin_for(index, m, ma), ALPHA)
    assume(res.reason is None)
    assert res.interval_low is not None
    assert res.p_tost == max(res.p_lower, res.p_upper)
    assume(_clear_of_alpha(res))
    inside = res.margin_low < res.interval_low and res.interval_high < res.margin_high
    beyond = res.interval_low > res.margin_high or res.interval_high < res.margin_low
    assert (res.p_tost < ALPHA) == inside
    assert (res.p_minimal_effect < ALPHA) == beyond
    assert not (inside and beyond)
    assert res.verdict == _reading(res)
    assert res.interval_low <= res.estimate <= res.interval_high


@st.composite
def paired_differences(draw, min_size=3, max_size=30):
    n = draw(st.integers(min_size, max_size))
    shift = draw(st.integers(-16, 16)) / 8.0
    d = np.array(draw(st.lists(st.integers(-16, 16), min_size=n, max_size=n)), dtype=float) / 8
    assume(np.ptp(d) > 0)
    return d + shift


@STEADY
@given(d=paired_differences(), m=MARGINS, c=st.sampled_from([0.01, 3.0, 700.0]))
@pytest.mark.parametrize("index", ["paired", "d_z"])
def test_paired_properties(index, d, m, c):
    fn = ONE_SAMPLE[index]
    res = fn(d, m, ALPHA)
    flipped = fn(-d, m, ALPHA)  # swapping the two conditions negates every difference
    assert flipped.p_lower == pytest.approx(res.p_upper, rel=1e-7, abs=1e-12)
    assert flipped.p_upper == pytest.approx(res.p_lower, rel=1e-7, abs=1e-12)
    units = fn(d * c, m * c if index == "paired" else m, ALPHA)
    assert units.p_tost == pytest.approx(res.p_tost, rel=1e-7, abs=1e-12)
    assume(_clear_of_alpha(res))
    assert flipped.verdict == res.verdict == units.verdict
    inside = res.margin_low < res.interval_low and res.interval_high < res.margin_high
    assert (res.p_tost < ALPHA) == inside
    assert res.verdict == _reading(res)


# ================================================================ undefined data, bad arguments


@pytest.mark.parametrize("index", list(FUNCTIONS))
def test_constant_groups_give_a_reason(index):
    margin = 0.1 if index == "prob_superiority" else 1.0
    res = FUNCTIONS[index](np.full(5, 2.0), np.full(4, 2.0), margin)
    assert res.reason and res.verdict is None
    assert all(getattr(res, f) is None for f in P_FIELDS + ("p_difference", "interval_low"))
    assert res.to_dict()["reason"] == res.reason


@pytest.mark.parametrize("index", list(FUNCTIONS))
def test_too_few_values_give_a_reason(index):
    margin = 0.1 if index == "prob_superiority" else 1.0
    res = FUNCTIONS[index](np.array([1.0]), np.array([2.0]), margin)
    assert res.reason.startswith("too few values") and res.p_tost is None


def test_complete_separation_gives_a_reason_for_a():
    res = eq.prob_superiority_tost(np.array([5.0, 6, 7]), np.array([1.0, 2, 3]), 0.2)
    assert res.estimate == 1.0 and res.p_tost is None and "separation" in res.reason


@pytest.mark.parametrize("fn", [eq.paired_mean_difference_tost, eq.d_z_tost])
def test_paired_undefined(fn):
    assert "every difference is equal" in fn(np.full(6, 0.5), 1.0).reason
    assert "too few pairs" in fn(np.array([[1.0, 2.0]]), 1.0).reason
    assert "non-finite" in fn(np.array([[1.0, 2.0], [np.nan, 1.0], [2, 3]]), 1.0).reason


@pytest.mark.parametrize("margin", [0.0, -1.0, math.nan, math.inf, "0.3", True, (0.2, 0.1),
                                    (0.1, 0.5), (-0.2,)])
def test_bad_margin_raises(margin):
    with pytest.raises(ValueError, match="margin"):
        eq.cohen_d_tost(np.arange(5.0), np.arange(5.0) + 1, margin)


@pytest.mark.parametrize("margin", [0.6, (0.4, 1.2), (-0.1, 0.7), (0.55, 0.8)])
def test_bounds_off_the_scale_of_a_raise(margin):
    with pytest.raises(ValueError, match="margin"):
        eq.prob_superiority_tost(np.arange(5.0), np.arange(5.0) + 1, margin)


@pytest.mark.parametrize("alpha", [0.0, 0.5, 0.7, -0.05, math.nan, "0.05"])
def test_bad_alpha_raises(alpha):
    with pytest.raises(ValueError, match="alpha"):
        eq.mean_difference_tost(np.arange(5.0), np.arange(5.0) + 1, 1.0, alpha)


def test_shapes_are_checked():
    with pytest.raises(ValueError, match="1-D"):
        eq.mean_difference_tost(np.ones((3, 2)), np.arange(4.0), 1.0)
    with pytest.raises(ValueError, match=r"\(n, 2\)"):
        eq.d_z_tost(np.ones((4, 3)), 1.0)


# ================================================================ a published paired example

# Student (1908, Biometrika 6:1-25, p. 20): extra hours of sleep of ten patients under two
# soporifics (values from memory, as R ships them in its `sleep` data set). The paired t of
# drug 2 against drug 1 is 4.062 on 9 df, two-sided p = 0.002833, mean difference 1.58 with the
# 95% interval 0.700 to 2.460 (R's t.test(..., paired = TRUE); from memory).
SLEEP_1 = np.array([0.7, -1.6, -0.2, -1.2, -0.1, 3.4, 3.7, 0.8, 0.0, 2.0])
SLEEP_2 = np.array([1.9, 0.8, 1.1, 0.1, -0.1, 4.4, 5.5, 1.6, 4.6, 3.4])


def test_student_s_sleep_data_paired_test_and_interval():
    d = np.round(SLEEP_2 - SLEEP_1, 10)
    res = eq.paired_mean_difference_tost(d, 1.0, alpha=0.025)  # its interval is the 95% one
    assert res.estimate == pytest.approx(1.58, abs=1e-12)
    assert res.statistic == pytest.approx(4.062, abs=5e-4)
    assert res.df == 9
    assert res.p_difference == pytest.approx(0.002833, abs=5e-7)
    assert res.interval_low == pytest.approx(0.7001142, abs=5e-7)
    assert res.interval_high == pytest.approx(2.4598858, abs=5e-7)
    # at a margin of 1 hour the interval 0.70 to 2.46 contains the bound 1: different from no
    # effect, but not shown to reach the margin (p of the test above 1 hour, t = (1.58 - 1)/se)
    se = 1.58 / res.statistic
    assert res.p_minimal_effect == pytest.approx(stats.t.sf((1.58 - 1.0) / se, 9), rel=1e-10)
    assert res.verdict == eq.UNDECIDED
    # and statsmodels agrees on both one-sided tests
    p, lower, upper = ttost_paired(SLEEP_2, SLEEP_1, -1.0, 1.0)
    assert res.p_lower == pytest.approx(lower[1], rel=1e-8)
    assert res.p_upper == pytest.approx(upper[1], rel=1e-8)


@pytest.mark.parametrize("margin", MASS_MARGINS[:4])
@pytest.mark.parametrize("name,a,b", BODY_MASS, ids=[c[0] for c in BODY_MASS])
def test_welch_tost_matches_pingouin(name, a, b, margin):
    """pingouin.tost with correction=True (Welch) reports the larger one-sided p."""
    res = eq.mean_difference_tost(a, b, margin, ALPHA)
    want = float(pg.tost(a, b, bound=margin, correction=True)["pval"].iloc[0])
    assert res.p_tost == pytest.approx(want, **CLOSE)


@pytest.mark.parametrize("margin", PAIRED_MARGINS[:4])
@pytest.mark.parametrize("name,x", PAIRED, ids=[c[0] for c in PAIRED])
def test_paired_tost_matches_pingouin(name, x, margin):
    res = eq.paired_mean_difference_tost(x, margin, ALPHA)
    want = float(pg.tost(x[:, 0], x[:, 1], bound=margin, paired=True)["pval"].iloc[0])
    assert res.p_tost == pytest.approx(want, **CLOSE)
