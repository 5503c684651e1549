"""Reference checks: the one-sided equivalence / minimal-effect tests of
`auditor.equivalence_omnibus` (eta^2, omega^2, epsilon^2_H, Kendall's W) against computations
outside the project.

References:
  * the statistics: scipy.stats.f_oneway and pingouin.anova (one-way F), scipy.stats.kruskal
    (tie-corrected H), scipy.stats.friedmanchisquare and pingouin.friedman (tie-corrected
    chi^2_F, and pingouin's W);
  * the p-values: scipy.stats.ncf / scipy.stats.f and scipy.stats.ncx2 / scipy.stats.chi2 at a
    noncentrality written out here from the published mappings (eta^2 = lambda / (lambda + N),
    Steiger 2004; epsilon^2_H = lambda / (N - 1); W = lambda / (n (k - 1))), never read from the
    module;
  * the estimates: pingouin.anova's np2 (for a one-way design the partial eta^2 is eta^2), sums
    of squares written out with numpy, omega^2 by Hays' formula
    (SS_b - (k - 1) MS_w) / (SS_t + MS_w), epsilon^2_H = H / (N - 1) from scipy's H, and
    W = chi^2_F / (n (k - 1)) from scipy's chi^2_F, and W from pingouin.friedman;
  * the verdicts: the 1 - 2 alpha interval read against the margin as stated in the module
    docstring, over a grid of margins.
No worked example from a publication is used.

Data are seeded draws (numpy default_rng) built here: k = 3 and 4, equal and unequal group
sizes, a clearly null case, a clearly large effect, and whole-number ratings with many ties for
the two rank indices.

Tolerances: 1e-10 relative for the statistics; 1e-9 relative (1e-12 absolute for tiny values)
for the p-values.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import special, stats

from auditor import equivalence as eq
from auditor import equivalence_omnibus as eo

ALPHA = 0.05
STAT_CLOSE = dict(rel=1e-10, abs=1e-12)
P_CLOSE = dict(rel=1e-9, abs=1e-12)
STEADY = settings(derandomize=True, deadline=None, max_examples=40, database=None,
                  suppress_health_check=[HealthCheck.too_slow])


# ================================================================ data


def _normal_groups(seed, sizes, shifts, sd=1.0):
    rng = np.random.default_rng(seed)
    return [rng.normal(10.0 + s, sd, size=n) for n, s in zip(sizes, shifts)]


def _rating_groups(seed, sizes, shifts):
    """Whole-number ratings 1..7 (heavy ties) from a rounded, clipped normal."""
    rng = np.random.default_rng(seed)
    return [np.clip(np.round(rng.normal(4.0 + s, 1.3, size=n)), 1, 7) for n, s in
            zip(sizes, shifts)]


GROUP_SETS = {
    "k3 equal, moderate": _normal_groups(101, (15, 15, 15), (0.0, 0.4, 0.8)),
    "k3 unequal, moderate": _normal_groups(202, (8, 21, 13), (0.0, 0.5, -0.3)),
    "k4 equal, null": _normal_groups(303, (40, 40, 40, 40), (0.0, 0.0, 0.0, 0.0)),
    "k4 unequal, large": _normal_groups(404, (12, 9, 17, 11), (0.0, 2.0, 4.0, 6.0)),
    "k3 unequal, null": _normal_groups(505, (30, 55, 42), (0.0, 0.0, 0.0)),
    "k4 equal, ratings": _rating_groups(606, (20, 20, 20, 20), (0.0, 0.3, 0.6, 1.2)),
    "k3 unequal, ratings": _rating_groups(707, (14, 25, 18), (0.0, 1.0, 0.2)),
}


def _normal_matrix(seed, n, shifts, subject_sd=1.0):
    rng = np.random.default_rng(seed)
    person = rng.normal(0.0, subject_sd, size=(n, 1))
    return person + np.asarray(shifts)[None, :] + rng.normal(0.0, 1.0, size=(n, len(shifts)))


def _rating_matrix(seed, n, shifts):
    return np.clip(np.round(4.0 + 1.2 * _normal_matrix(seed, n, shifts)), 1, 7)


MATRICES = {
    "k3, moderate": _normal_matrix(11, 18, (0.0, 0.4, 0.8)),
    "k4, null": _normal_matrix(26, 60, (0.0, 0.0, 0.0, 0.0)),
    "k4, large": _normal_matrix(33, 15, (0.0, 2.0, 4.0, 6.0)),
    "k3, ratings": _rating_matrix(44, 25, (0.0, 0.3, 0.7)),
    "k4, ratings": _rating_matrix(55, 30, (0.0, 0.2, 0.5, 0.6)),
}

GROUP_IDS = list(GROUP_SETS)
MATRIX_IDS = list(MATRICES)
MARGINS = (0.01, 0.05, 0.1, 0.2, 0.35, 0.6, 0.9)

# The one (data set, margin) of the grids below at which scipy.special.ncfdtr (what scipy.stats.ncf
# calls) returns NaN at the module's F (scipy 1.17.1); two ulp away it returns 1.3e-106, where the
# Poisson mixture below gives 4.5e-276 (a rough hand bound: the numerator's noncentral chi-squared
# on 3 df and lambda 1440 must fall below about 5, P ~ Phi(-35.7) ~ 1e-277). The module falls back
# to the mixture; see test_a_tail_where_scipy_gives_nan_comes_from_the_poisson_mixture.
NAN_TAIL_CASE = ("k4 equal, null", 0.9)


def _ncf_lower_by_mixture(x, df1, df2, lam):
    """P(F <= x | lambda) as the Poisson mixture of central F (beta) distribution functions,
    sum_j Pois(j; lambda/2) I_y(df1/2 + j, df2/2), y = df1 x / (df1 x + df2) (Johnson, Kotz &
    Balakrishnan 1995, ch. 30; from memory), summed in logarithms with scipy.stats.poisson.logpmf
    and scipy.stats.beta.logcdf."""
    j = np.arange(0, int(lam / 2 + 40 * math.sqrt(lam / 2) + 60))
    y = df1 * x / (df1 * x + df2)
    terms = stats.poisson.logpmf(j, lam / 2) + stats.beta.logcdf(y, df1 / 2 + j, df2 / 2)
    return float(np.exp(special.logsumexp(terms)))


def _has_ties(arrays) -> bool:
    flat = np.concatenate([np.ravel(a) for a in arrays])
    return np.unique(flat).size < flat.size


def test_the_rating_data_really_are_tied():
    assert _has_ties(GROUP_SETS["k4 equal, ratings"])
    assert _has_ties(GROUP_SETS["k3 unequal, ratings"])
    for name in ("k3, ratings", "k4, ratings"):
        x = MATRICES[name]
        assert any(np.unique(row).size < row.size for row in x), name


# ================================================================ independent computations


def _ss(groups):
    allv = np.concatenate(groups)
    grand = allv.mean()
    ss_b = sum(g.size * (g.mean() - grand) ** 2 for g in groups)
    ss_w = sum(((g - g.mean()) ** 2).sum() for g in groups)
    return ss_b, ss_w, allv.size, len(groups)


def _long(groups) -> pd.DataFrame:
    return pd.DataFrame({"y": np.concatenate(groups),
                         "g": np.concatenate([[f"g{j}"] * g.size for j, g in enumerate(groups)])})


def _lam_anova(n_total, m):
    # population eta^2 = lambda / (lambda + N)  <=>  lambda = N eta^2 / (1 - eta^2)
    return n_total * m / (1.0 - m)


# ================================================================ statistics and estimates


@pytest.mark.parametrize("name", GROUP_IDS)
def test_anova_statistic_and_estimates(name):
    groups = GROUP_SETS[name]
    ss_b, ss_w, n, k = _ss(groups)
    f_scipy = stats.f_oneway(*groups)
    aov = pg.anova(data=_long(groups), dv="y", between="g", detailed=True)
    ms_w = ss_w / (n - k)
    omega = (ss_b - (k - 1) * ms_w) / (ss_b + ss_w + ms_w)
    r_eta = eo.eta_squared_tost(groups, 0.1)
    r_omega = eo.omega_squared_tost(groups, 0.1)
    for r in (r_eta, r_omega):
        assert r.reason is None
        assert r.statistic == pytest.approx(f_scipy.statistic, **STAT_CLOSE)
        assert r.statistic == pytest.approx(float(aov["F"].iloc[0]), **STAT_CLOSE)
        assert r.df == k - 1
    assert r_eta.estimate == pytest.approx(ss_b / (ss_b + ss_w), **STAT_CLOSE)
    assert r_eta.estimate == pytest.approx(float(aov["np2"].iloc[0]), rel=1e-10)
    assert r_omega.estimate == pytest.approx(omega, **STAT_CLOSE)


@pytest.mark.parametrize("name", GROUP_IDS)
def test_kruskal_statistic_and_estimate(name):
    groups = GROUP_SETS[name]
    n = sum(g.size for g in groups)
    h = stats.kruskal(*groups).statistic
    r = eo.epsilon_squared_h_tost(groups, 0.1)
    assert r.reason is None
    assert r.statistic == pytest.approx(h, **STAT_CLOSE)
    assert r.estimate == pytest.approx(h / (n - 1), **STAT_CLOSE)
    assert r.df == len(groups) - 1


@pytest.mark.parametrize("name", MATRIX_IDS)
def test_friedman_statistic_and_estimate(name):
    x = MATRICES[name]
    n, k = x.shape
    chi2_f = stats.friedmanchisquare(*x.T).statistic
    fr = pg.friedman(pd.DataFrame(x, columns=[f"c{j}" for j in range(k)]))
    r = eo.kendall_w_tost(x, 0.1)
    assert r.reason is None
    assert r.statistic == pytest.approx(chi2_f, **STAT_CLOSE)
    assert r.statistic == pytest.approx(float(fr["Q"].iloc[0]), **STAT_CLOSE)
    assert r.estimate == pytest.approx(chi2_f / (n * (k - 1)), **STAT_CLOSE)
    assert r.estimate == pytest.approx(float(fr["W"].iloc[0]), **STAT_CLOSE)
    assert r.df == k - 1


# ================================================================ p-values


def _anova_params():
    for name in GROUP_IDS:
        for m in MARGINS:
            yield pytest.param(name, m, id=f"{name}-{m}")


@pytest.mark.parametrize("name, margin", list(_anova_params()))
def test_anova_p_values_against_scipy_ncf(name, margin):
    groups = GROUP_SETS[name]
    n, k = sum(g.size for g in groups), len(groups)
    df1, df2 = k - 1, n - k
    res = stats.f_oneway(*groups)
    f_obs = res.statistic
    lam = _lam_anova(n, margin)
    want_upper = stats.ncf.cdf(f_obs, df1, df2, lam)
    if (name, margin) == NAN_TAIL_CASE:  # scipy's value there is wrong (see NAN_TAIL_CASE)
        want_upper = _ncf_lower_by_mixture(f_obs, df1, df2, lam)
    want_met = stats.ncf.sf(f_obs, df1, df2, lam)
    want_diff = stats.f.sf(f_obs, df1, df2)
    for fn in (eo.eta_squared_tost, eo.omega_squared_tost):
        r = fn(groups, margin)
        assert r.p_upper == pytest.approx(want_upper, **P_CLOSE)
        assert r.p_tost == r.p_upper and r.p_lower is None
        assert r.p_minimal_effect == pytest.approx(want_met, **P_CLOSE)
        assert r.p_difference == pytest.approx(want_diff, **P_CLOSE)
        assert r.p_difference == pytest.approx(res.pvalue, **P_CLOSE)
        assert (r.null_value, r.margin_low, r.margin_high) == (0.0, 0.0, margin)
        assert r.interval_level == pytest.approx(1 - 2 * ALPHA)


def test_omega_and_eta_share_their_tests_but_not_their_estimate():
    groups = GROUP_SETS["k3 unequal, moderate"]
    a, b = eo.eta_squared_tost(groups, 0.15), eo.omega_squared_tost(groups, 0.15)
    assert (a.p_upper, a.p_minimal_effect, a.p_difference) == \
        (b.p_upper, b.p_minimal_effect, b.p_difference)
    assert a.estimate > b.estimate  # omega^2 shrinks eta^2 whenever F > 0


@pytest.mark.parametrize("margin", MARGINS + (1.0,))
@pytest.mark.parametrize("name", GROUP_IDS)
def test_kruskal_p_values_against_scipy_ncx2(name, margin):
    groups = GROUP_SETS[name]
    n, k = sum(g.size for g in groups), len(groups)
    res = stats.kruskal(*groups)
    lam = margin * (n - 1)  # population epsilon^2_H = lambda / (N - 1)
    r = eo.epsilon_squared_h_tost(groups, margin)
    assert r.p_upper == pytest.approx(stats.ncx2.cdf(res.statistic, k - 1, lam), **P_CLOSE)
    assert r.p_minimal_effect == pytest.approx(stats.ncx2.sf(res.statistic, k - 1, lam),
                                               **P_CLOSE)
    assert r.p_difference == pytest.approx(stats.chi2.sf(res.statistic, k - 1), **P_CLOSE)
    assert r.p_difference == pytest.approx(res.pvalue, **P_CLOSE)
    assert r.p_lower is None and r.p_tost == r.p_upper


@pytest.mark.parametrize("margin", MARGINS + (1.0,))
@pytest.mark.parametrize("name", MATRIX_IDS)
def test_friedman_p_values_against_scipy_ncx2(name, margin):
    x = MATRICES[name]
    n, k = x.shape
    res = stats.friedmanchisquare(*x.T)
    fr = pg.friedman(pd.DataFrame(x, columns=[f"c{j}" for j in range(k)]))
    lam = margin * n * (k - 1)  # population W = lambda / (n (k - 1))
    r = eo.kendall_w_tost(x, margin)
    assert r.p_upper == pytest.approx(stats.ncx2.cdf(res.statistic, k - 1, lam), **P_CLOSE)
    assert r.p_minimal_effect == pytest.approx(stats.ncx2.sf(res.statistic, k - 1, lam),
                                               **P_CLOSE)
    assert r.p_difference == pytest.approx(stats.chi2.sf(res.statistic, k - 1), **P_CLOSE)
    assert r.p_difference == pytest.approx(res.pvalue, **P_CLOSE)
    assert r.p_difference == pytest.approx(float(fr["p_unc"].iloc[0]), **P_CLOSE)


def test_the_null_and_the_large_cases_behave_as_built():
    """Sanity of the fixtures against scipy alone: the null sets do not reject no effect, the
    large set does, decisively."""
    assert stats.f_oneway(*GROUP_SETS["k4 equal, null"]).pvalue > 0.1
    assert stats.f_oneway(*GROUP_SETS["k3 unequal, null"]).pvalue > 0.1
    assert stats.f_oneway(*GROUP_SETS["k4 unequal, large"]).pvalue < 1e-12
    assert stats.friedmanchisquare(*MATRICES["k4, null"].T).pvalue > 0.1
    assert stats.friedmanchisquare(*MATRICES["k4, large"].T).pvalue < 1e-8


# ================================================================ verdicts and the interval

GRID = tuple(np.round(np.concatenate([np.geomspace(0.002, 0.2, 25),
                                      np.linspace(0.22, 0.98, 20)]), 6))


def _cases():
    for name, groups in GROUP_SETS.items():
        yield f"eta {name}", (lambda m, g=groups: eo.eta_squared_tost(g, m)), False, name
        yield f"omega {name}", (lambda m, g=groups: eo.omega_squared_tost(g, m)), False, name
        yield f"epsH {name}", (lambda m, g=groups: eo.epsilon_squared_h_tost(g, m)), True, None
    for name, x in MATRICES.items():
        yield f"W {name}", (lambda m, x=x: eo.kendall_w_tost(x, m)), True, None


CASES = list(_cases())


def _expected_verdict(r, m):
    low, high = r.interval_low, r.interval_high
    if low > m:
        return eq.AT_LEAST_MARGIN
    if high < m:
        return eq.SMALLER_THAN_MARGIN if low > 0 else eq.EQUIVALENT
    return eq.UNDECIDED


def _near(a, b):
    return abs(a - b) <= 1e-9 * max(abs(b), 1e-12)


@pytest.mark.parametrize("label, run, one_allowed, anova_set", CASES,
                         ids=[c[0] for c in CASES])
def test_verdict_agrees_with_the_interval_over_a_grid_of_margins(label, run, one_allowed,
                                                                 anova_set):
    margins = GRID + ((1.0,) if one_allowed else ())
    checked = 0
    for m in margins:
        r = run(float(m))
        assert r.reason is None and r.verdict in eq.VERDICTS
        low, high = r.interval_low, r.interval_high
        assert 0.0 <= low <= high <= 1.0
        if _near(high, m) or _near(low, m):
            continue  # the root-finder's tolerance decides, not the statistics
        assert (high < m) == (r.p_upper < ALPHA), (m, high, r.p_upper)
        assert (low > m) == (r.p_minimal_effect < ALPHA), (m, low, r.p_minimal_effect)
        assert r.verdict == _expected_verdict(r, m), (m, low, high)
        checked += 1
        if low == 0.0 or low > 1e-6:  # a positive limit within 1e-6 of 0 is a rounding call
            assert (low > 0.0) == (r.p_difference < ALPHA), (low, r.p_difference)
    assert checked >= len(margins) - 2


def test_all_four_verdicts_appear_where_expected():
    seen = {}
    for label, run, _, anova_set in CASES:
        for m in GRID:
            if (anova_set, float(m)) != NAN_TAIL_CASE:
                seen.setdefault(run(float(m)).verdict, set()).add(label)
    assert set(seen) == set(eq.VERDICTS)
    # the large effect is shown to reach small margins, the null cases never are
    large = eo.eta_squared_tost(GROUP_SETS["k4 unequal, large"], 0.3)
    assert large.verdict == eq.AT_LEAST_MARGIN
    assert eo.kendall_w_tost(MATRICES["k4, large"], 0.3).verdict == eq.AT_LEAST_MARGIN
    for name in ("k4 equal, null", "k3 unequal, null"):
        r = eo.eta_squared_tost(GROUP_SETS[name], 0.1)
        assert r.verdict == eq.EQUIVALENT, (name, r.interval_high)
        assert all(eq.AT_LEAST_MARGIN not in {eo.eta_squared_tost(GROUP_SETS[name], m).verdict}
                   for m in GRID)
    assert eo.kendall_w_tost(MATRICES["k4, null"], 0.1).verdict == eq.EQUIVALENT
    # a tiny margin is undecided for the null data: the interval reaches above it
    assert eo.eta_squared_tost(GROUP_SETS["k4 equal, null"], 0.002).verdict == eq.UNDECIDED
    # an effect that is real but small relative to a wide margin
    mod = eo.eta_squared_tost(GROUP_SETS["k4 unequal, large"], 0.98)
    assert mod.verdict == eq.SMALLER_THAN_MARGIN


# ================================================================ order invariance


def _close_p(a, b):
    for name in ("p_upper", "p_minimal_effect", "p_difference"):
        x, y = getattr(a, name), getattr(b, name)
        assert x == pytest.approx(y, rel=1e-12, abs=1e-15), name
    assert a.verdict == b.verdict


@STEADY
@given(order=st.permutations(range(4)), name=st.sampled_from(
    ["k4 equal, null", "k4 unequal, large", "k4 equal, ratings"]),
    margin=st.sampled_from([0.02, 0.1, 0.3]))
def test_group_order_does_not_matter(order, name, margin):
    groups = GROUP_SETS[name]
    shuffled = [groups[i] for i in order]
    for fn in (eo.eta_squared_tost, eo.omega_squared_tost, eo.epsilon_squared_h_tost):
        _close_p(fn(groups, margin), fn(shuffled, margin))


@STEADY
@given(order=st.permutations(range(4)), name=st.sampled_from(["k4, null", "k4, large",
                                                              "k4, ratings"]),
       margin=st.sampled_from([0.02, 0.1, 0.3, 1.0]))
def test_condition_order_does_not_matter(order, name, margin):
    x = MATRICES[name]
    _close_p(eo.kendall_w_tost(x, margin), eo.kendall_w_tost(x[:, list(order)], margin))


# ================================================================ bad arguments and degenerate data

ANOVA_FNS = (eo.eta_squared_tost, eo.omega_squared_tost)


@pytest.mark.parametrize("margin", [0, 0.0, 1, 1.0, -0.1, math.nan, math.inf, (0.0, 0.1),
                                    [0.1], "0.1", True])
@pytest.mark.parametrize("fn", ANOVA_FNS)
def test_bad_margins_anova(fn, margin):
    with pytest.raises(ValueError):
        fn(GROUP_SETS["k3 equal, moderate"], margin)


@pytest.mark.parametrize("margin", [0, -0.1, 1.0000001, 2, math.nan, (0.0, 0.1), "0.1"])
def test_bad_margins_rank_indices(margin):
    with pytest.raises(ValueError):
        eo.epsilon_squared_h_tost(GROUP_SETS["k3 equal, moderate"], margin)
    with pytest.raises(ValueError):
        eo.kendall_w_tost(MATRICES["k3, moderate"], margin)


def test_margin_one_is_accepted_for_the_rank_indices():
    r = eo.epsilon_squared_h_tost(GROUP_SETS["k3 equal, moderate"], 1.0)
    assert r.reason is None and r.p_upper is not None
    r = eo.kendall_w_tost(MATRICES["k3, moderate"], 1.0)
    assert r.reason is None and r.p_upper is not None


@pytest.mark.parametrize("alpha", [0, 0.5, -0.01, math.nan])
def test_bad_alpha(alpha):
    with pytest.raises(ValueError):
        eo.eta_squared_tost(GROUP_SETS["k3 equal, moderate"], 0.1, alpha)


def _assert_undefined(r):
    assert r.reason
    assert r.p_upper is None and r.p_minimal_effect is None and r.p_difference is None
    assert r.p_tost is None and r.p_lower is None
    assert r.interval_low is None and r.interval_high is None and r.verdict is None


def test_all_equal_values_are_undefined():
    flat = [np.full(6, 3.0), np.full(5, 3.0), np.full(7, 3.0)]
    for fn in (eo.eta_squared_tost, eo.omega_squared_tost, eo.epsilon_squared_h_tost):
        _assert_undefined(fn(flat, 0.1))
    _assert_undefined(eo.kendall_w_tost(np.full((8, 3), 2.0), 0.1))


def test_no_within_group_variation_is_undefined_for_f():
    # scipy agrees that F is infinite here
    groups = [np.full(4, 1.0), np.full(4, 2.0), np.full(4, 3.0)]
    with warnings.catch_warnings(), np.errstate(divide="ignore", invalid="ignore"):
        warnings.simplefilter("ignore")
        assert math.isinf(stats.f_oneway(*groups).statistic)
    _assert_undefined(eo.eta_squared_tost(groups, 0.1))


def test_every_participant_tied_is_undefined_for_w():
    rng = np.random.default_rng(9)
    x = np.repeat(rng.normal(size=(10, 1)), 4, axis=1)  # each row constant
    _assert_undefined(eo.kendall_w_tost(x, 0.2))


def test_a_tail_where_scipy_gives_nan_comes_from_the_poisson_mixture():
    name, m = NAN_TAIL_CASE
    groups = GROUP_SETS[name]
    n, k = sum(g.size for g in groups), len(groups)
    r = eo.eta_squared_tost(groups, m)
    lam = _lam_anova(n, m)
    assert math.isnan(special.ncfdtr(k - 1, n - k, lam, r.statistic))  # why the fallback runs
    assert r.reason is None and r.interval_high < m
    assert r.p_upper == pytest.approx(_ncf_lower_by_mixture(r.statistic, k - 1, n - k, lam),
                                      rel=1e-9)
    assert r.p_upper < 1e-270 and r.verdict == eq.EQUIVALENT


@pytest.mark.parametrize("x, df1, df2, lam", [(50.0, 3, 156, 300.0), (100.0, 3, 156, 600.0),
                                               (2.0, 2, 30, 5.0), (0.5, 3, 50, 20.0)])
def test_the_mixture_formula_is_scipy_s_distribution_where_scipy_is_finite(x, df1, df2, lam):
    from auditor.noncentral import ncf_poisson_mixture

    low, high = ncf_poisson_mixture(x, df1, df2, lam)
    assert low == pytest.approx(stats.ncf.cdf(x, df1, df2, lam), rel=1e-10)
    assert high == pytest.approx(stats.ncf.sf(x, df1, df2, lam), rel=1e-10)
    assert low == pytest.approx(_ncf_lower_by_mixture(x, df1, df2, lam), rel=1e-10)


@pytest.mark.parametrize("x", [1.5, 1.6, 1.665775291535044, 1.7])
def test_a_far_lower_tail_comes_from_the_mixture_not_from_scipy_s_noise(x):
    # scipy.special.ncfdtr(3, 156, 1440, x) gives NaN or values near 1e-106 here; the series
    # summed with scipy.stats.poisson / beta (and the hand bound in NAN_TAIL_CASE) put it near
    # 1e-276
    from auditor.noncentral import noncentral_f_tails

    low, high = noncentral_f_tails(x, 3, 156, 1440.0, careful=True)
    assert low == pytest.approx(_ncf_lower_by_mixture(x, 3, 156, 1440.0), rel=1e-9)
    assert low < 1e-270 and high == 1.0
    # and the test at the margin (lambda_m = N m / (1 - m) = 1440 for N = 160, m = 0.9) reports it
    groups = GROUP_SETS[NAN_TAIL_CASE[0]]
    res = eo.eta_squared_tost(groups, NAN_TAIL_CASE[1])
    assert res.p_upper == pytest.approx(
        _ncf_lower_by_mixture(res.statistic, 3, 156, 1440.0), rel=1e-9)


def _ncx2_lower_by_mixture(x, df, lam):
    """P(X <= x | lambda) as sum_j Pois(j; lambda/2) P(chi^2_(df + 2j) <= x) (Johnson, Kotz &
    Balakrishnan 1995, ch. 29; from memory), with scipy.stats.poisson.logpmf and chi2.logcdf."""
    j = np.arange(0, int(lam / 2 + 40 * math.sqrt(lam / 2) + 60))
    return float(np.exp(special.logsumexp(stats.poisson.logpmf(j, lam / 2)
                                          + stats.chi2.logcdf(x, df + 2 * j))))


@pytest.mark.parametrize("x, df, lam", [(0.5, 2, 300.0), (1.0, 3, 1000.0), (5.0, 3, 800.0),
                                         (0.1, 2, 100.0), (4.0, 2, 9.0), (30.0, 3, 2.0)])
def test_far_chi_squared_tails_reported_as_p_values_come_from_the_mixture(x, df, lam):
    # scipy.special.chndtr rounds the first three to 0 (their lower tails are 5e-63, 9e-208
    # and 5e-151); where scipy is finite the careful tails equal it
    from auditor.noncentral import noncentral_chi2_tails

    low, high = noncentral_chi2_tails(x, df, lam, careful=True)
    assert low == pytest.approx(_ncx2_lower_by_mixture(x, df, lam), rel=1e-9)
    assert low > 0.0
    if stats.ncx2.cdf(x, df, lam) > 1e-20:
        assert low == pytest.approx(stats.ncx2.cdf(x, df, lam), rel=1e-9)
        assert high == pytest.approx(stats.ncx2.sf(x, df, lam), rel=1e-9)
