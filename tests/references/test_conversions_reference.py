"""Reference checks of the effect-size conversions of `auditor.conversions`.

Outside sources:
  * published tables, compared at their printed precision (recalled, not read, where marked
    "from memory"):
      - McGraw & Wong (1992, Psychological Bulletin 111:361), the common-language effect size
        for Cohen's d = 0.2, 0.5, 0.8: 0.556, 0.638, 0.714 (from memory);
      - Vargha & Delaney (2000, J. Educ. Behav. Stat. 25:101, p. 106), A = 0.56, 0.64, 0.71 as
        the "small, medium, large" A matching d = 0.2, 0.5, 0.8 (from memory);
      - Cohen (1988, "Statistical Power Analysis", Table 2.2.1), r for d with equal groups:
        d = 0.2, 0.5, 0.8, 1.0, 2.0 -> r = .100, .243, .371, .447, .707 (from memory);
      - Chinn (2000, Statistics in Medicine 19:3127): d = ln OR / 1.81 (from memory);
  * scipy.stats.pointbiserialr and scipy.stats.pearsonr on a 0/1 group variable, for the
    point-biserial identity, on pingouin's shipped `penguins` data (Palmer penguins, Gorman,
    Williams & Fraser 2014): body mass (g) of males (A) against females (B) within each species
    (equal groups in Adelie and Chinstrap, 61 against 58 in Gentoo); the pooled SD is computed
    here with numpy, not by `auditor`;
  * numerical integration (scipy.integrate.quad) of P(X_A > X_B) for normal populations, and
    scipy.stats.logistic / scipy.stats.norm tail areas for the log odds ratio, checking the
    assumption each map names;
  * counts over all pairs for A and Cliff's delta on data with ties.
Hypothesis runs derandomized (a fixed search), so every run explores the same cases.
"""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pingouin as pg
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import integrate, special, stats

from auditor import conversions as cv
from auditor.diagnostics import normal_theory_check
from auditor.errors import UndefinedEffectWarning
from auditor.parametric import cohen_d_values, d_unpooled_values
from auditor.ranks import prob_superiority_values

STEADY = settings(derandomize=True, deadline=None, max_examples=200, database=None,
                  suppress_health_check=[HealthCheck.too_slow])
ROUND = 1e-10

moderate_d = st.floats(-6.0, 6.0, allow_nan=False)
wide_d = st.floats(-100.0, 100.0, allow_nan=False)
sizes = st.integers(2, 5000)
probability = st.floats(0.0, 1.0, allow_nan=False)
open_probability = st.floats(1e-300, 1.0 - 1e-16, allow_nan=False)


# ================================================================ round trips


@STEADY
@given(moderate_d)
def test_d_to_a_to_d(d):
    # |d| <= 6: A = Phi(d / sqrt 2) near 1 holds d only to about 1e-16 / phi(d / sqrt 2)
    assert cv.a_to_d(cv.d_to_a(d)) == pytest.approx(d, abs=ROUND)


@STEADY
@given(open_probability)
def test_a_to_d_to_a(a):
    assert cv.d_to_a(cv.a_to_d(a)) == pytest.approx(a, abs=ROUND)


@STEADY
@given(wide_d, sizes, sizes, st.sampled_from(cv.DIVISORS))
def test_d_to_r_to_d_unequal_groups(d, n_a, n_b, divisor):
    r = cv.d_to_r(d, n_a, n_b, pooled_divisor=divisor)
    assert abs(r) < 1.0
    assert cv.r_to_d(r, n_a, n_b, pooled_divisor=divisor) == pytest.approx(d, abs=ROUND)


@STEADY
@given(st.floats(-1e4, 1e4, allow_nan=False))
def test_d_to_log_odds_to_d(d):
    assert cv.log_odds_to_d(cv.d_to_log_odds(d)) == pytest.approx(d, abs=ROUND)


@STEADY
@given(probability)
def test_a_to_delta_to_a(a):
    assert cv.delta_to_a(cv.a_to_delta(a)) == pytest.approx(a, abs=ROUND)


@STEADY
@given(moderate_d)
def test_d_to_delta_is_d_to_a_then_exact_delta(d):
    assert cv.d_to_delta(d) == pytest.approx(2.0 * cv.d_to_a(d) - 1.0, abs=1e-15)
    assert cv.delta_to_d(cv.d_to_delta(d)) == pytest.approx(d, abs=ROUND)


def test_edges_carry_the_limits_of_the_formulas():
    assert cv.a_to_d(1.0) == math.inf and cv.a_to_d(0.0) == -math.inf
    assert cv.d_to_a(math.inf) == 1.0 and cv.d_to_a(-math.inf) == 0.0
    assert cv.d_to_r(math.inf, 3, 4) == 1.0 and cv.d_to_r(-math.inf, 3, 4) == -1.0
    assert cv.r_to_d(1.0, 3, 4) == math.inf and cv.r_to_d(-1.0, 3, 4) == -math.inf
    assert cv.d_to_r(1e200, 3, 4) == pytest.approx(1.0)  # hypot: no overflow of d^2
    assert cv.delta_to_d(1.0) == math.inf


@pytest.mark.parametrize("call, error", [
    (lambda: cv.a_to_d(1.2), ValueError),
    (lambda: cv.a_to_d(-0.1), ValueError),
    (lambda: cv.a_to_delta(55.0), ValueError),
    (lambda: cv.delta_to_a(1.5), ValueError),
    (lambda: cv.r_to_d(-1.01, 5, 5), ValueError),
    (lambda: cv.d_to_r(0.5, 0, 5), ValueError),
    (lambda: cv.d_to_r(0.5, 5.0, 5), TypeError),
    (lambda: cv.d_to_r(0.5, 1, 1, pooled_divisor="N-2"), ValueError),
    (lambda: cv.d_to_r(0.5, 5, 5, pooled_divisor="n-1"), ValueError),
    (lambda: cv.d_to_a("0.5"), TypeError),
    (lambda: cv.d_to_a(True), TypeError),
])
def test_bad_arguments_raise(call, error):
    with pytest.raises(error):
        call()


# ================================================================ published tables


@pytest.mark.parametrize("d, printed", [(0.2, 0.556), (0.5, 0.638), (0.8, 0.714)])
def test_mcgraw_wong_common_language(d, printed):
    # McGraw & Wong (1992), CL for d = 0.2, 0.5, 0.8, three decimals (from memory)
    assert abs(cv.d_to_a(d) - printed) <= 0.0005


@pytest.mark.parametrize("d, printed", [(0.2, 0.56), (0.5, 0.64), (0.8, 0.71)])
def test_vargha_delaney_thresholds(d, printed):
    # Vargha & Delaney (2000, p. 106), A matching Cohen's d thresholds, two decimals (from memory)
    assert abs(cv.d_to_a(d) - printed) <= 0.005


@pytest.mark.parametrize("d, printed", [(0.2, 0.100), (0.5, 0.243), (0.8, 0.371), (1.0, 0.447),
                                        (2.0, 0.707)])
@pytest.mark.parametrize("n", [2, 50, 10_000])
def test_cohen_table_2_2_1_equal_groups(d, printed, n):
    # Cohen (1988, Table 2.2.1), r from d for equal groups, three decimals (from memory); with
    # n_A = n_B the sample-size form has a = 4 exactly, whatever n
    assert abs(cv.d_to_r(d, n, n) - printed) <= 0.0005


def test_chinn_divisor():
    # Chinn (2000): d = ln OR / 1.81 (from memory), the rounded pi / sqrt 3
    assert abs(cv.d_to_log_odds(1.0) - 1.81) <= 0.005
    assert cv.log_odds_to_d(1.81) == pytest.approx(1.0, abs=0.003)


# ================================================================ the assumptions the maps name


@pytest.mark.parametrize("d", [-2.5, -0.3, 0.0, 0.5, 1.7, 4.0])
def test_d_to_a_exact_for_normal_equal_variances(d):
    """P(X_A > X_B) = int phi(z) Phi(z + d) dz for X_A ~ N(d, 1), X_B ~ N(0, 1)."""
    value, err = integrate.quad(lambda z: stats.norm.pdf(z) * stats.norm.cdf(z + d), -np.inf,
                                np.inf, epsabs=1e-14, epsrel=1e-13)
    assert err < 1e-11
    assert cv.d_to_a(d) == pytest.approx(value, abs=1e-10)


@pytest.mark.parametrize("mu_a, sd_a, mu_b, sd_b", [(1.0, 1.0, 0.0, 3.0), (0.0, 0.5, 0.4, 2.0),
                                                    (10.0, 4.0, 8.0, 1.0)])
def test_d_to_a_with_average_variance_exact_for_unequal_variances(mu_a, sd_a, mu_b, sd_b):
    value, err = integrate.quad(
        lambda x: stats.norm.pdf(x, mu_a, sd_a) * stats.norm.cdf(x, mu_b, sd_b), -np.inf, np.inf,
        epsabs=1e-14, epsrel=1e-13)
    assert err < 1e-11
    d_average = (mu_a - mu_b) / math.sqrt((sd_a**2 + sd_b**2) / 2)
    assert cv.d_to_a(d_average) == pytest.approx(value, abs=1e-10)
    d_with_b_sd = (mu_a - mu_b) / sd_b  # another standardizer misreads the overlap
    assert abs(cv.d_to_a(d_with_b_sd) - value) > 1e-3


@pytest.mark.parametrize("shift, scale", [(0.7, 1.0), (-1.3, 2.5), (3.0, 0.4)])
def test_log_odds_exact_for_logistic_populations_at_every_cut(shift, scale):
    d = shift / (scale * cv.LOGISTIC_SCALE)  # the logistic SD is scale pi / sqrt 3
    for cut in (-4.0, -1.0, 0.0, 0.5, 2.0, 6.0):
        # logit P(X > c) = log sf(c) - log cdf(c), from scipy's log tails (no cancellation)
        logit_a = (stats.logistic.logsf(cut, loc=shift, scale=scale)
                   - stats.logistic.logcdf(cut, loc=shift, scale=scale))
        logit_b = (stats.logistic.logsf(cut, loc=0.0, scale=scale)
                   - stats.logistic.logcdf(cut, loc=0.0, scale=scale))
        assert cv.d_to_log_odds(d) == pytest.approx(logit_a - logit_b, abs=1e-10)


def test_log_odds_only_approximate_for_normal_populations():
    """For normal populations the log odds ratio of a dichotomy depends on the cut (smallest at
    the midpoint d / 2, larger in the tails); d pi / sqrt 3 is a compromise inside that range."""
    d = 0.8
    by_cut = [special.logit(stats.norm.sf(c, loc=d)) - special.logit(stats.norm.sf(c))
              for c in np.linspace(-1.5, 2.3, 9)]
    assert max(by_cut) - min(by_cut) > 0.05
    assert min(by_cut) < cv.d_to_log_odds(d) < max(by_cut)


def test_delta_is_2a_minus_1_by_pair_counts_with_ties():
    a = np.array([1.0, 2, 2, 3, 5, 5, 5, 8])
    b = np.array([0.0, 2, 2, 4, 5, 6])
    diff = a[:, None] - b[None, :]
    a_count = np.mean(diff > 0) + 0.5 * np.mean(diff == 0)
    delta_count = np.mean(diff > 0) - np.mean(diff < 0)
    assert cv.a_to_delta(a_count) == pytest.approx(delta_count, abs=1e-15)
    assert cv.delta_to_a(delta_count) == pytest.approx(a_count, abs=1e-15)


# ================================================================ point-biserial identity


def _penguin_pairs():
    frame = pg.read_dataset("penguins").dropna(subset=["body_mass_g", "sex"])
    out = []
    for species in ("Adelie", "Chinstrap", "Gentoo"):
        rows = frame[frame["species"] == species]
        male = rows.loc[rows["sex"] == "male", "body_mass_g"].to_numpy(dtype=float)
        female = rows.loc[rows["sex"] == "female", "body_mass_g"].to_numpy(dtype=float)
        out.append(pytest.param(male, female, id=species))
    return out


def _pooled_d(a, b, divisor):
    ss_within = np.sum((a - a.mean()) ** 2) + np.sum((b - b.mean()) ** 2)
    n = a.size + b.size
    return (a.mean() - b.mean()) / math.sqrt(ss_within / (n if divisor == "N" else n - 2))


@pytest.mark.parametrize("a, b", _penguin_pairs())
def test_point_biserial_identity_on_penguins(a, b):
    values = np.concatenate([a, b])
    coded = np.concatenate([np.ones(a.size), np.zeros(b.size)])  # A = 1, B = 0
    r_pb = stats.pointbiserialr(coded, values).statistic
    r_pearson = stats.pearsonr(coded, values).statistic
    assert r_pb == pytest.approx(r_pearson, abs=1e-12)
    n_a, n_b = a.size, b.size
    d_n2, d_n = _pooled_d(a, b, "N-2"), _pooled_d(a, b, "N")
    assert float(cohen_d_values(a, b)) == pytest.approx(d_n2, rel=1e-12)  # auditor's d: N - 2
    # the exact identities: r = d / sqrt(d^2 + N (N-2) / (n_A n_B)) for the N - 2 pooled SD and
    # Borenstein's r = d_N / sqrt(d_N^2 + N^2 / (n_A n_B)) for the N pooled SD
    assert cv.d_to_r(d_n2, n_a, n_b, pooled_divisor="N-2") == pytest.approx(r_pb, abs=1e-10)
    assert cv.d_to_r(d_n, n_a, n_b) == pytest.approx(r_pb, abs=1e-10)
    assert cv.r_to_d(r_pb, n_a, n_b, pooled_divisor="N-2") == pytest.approx(d_n2, abs=1e-10)
    assert cv.r_to_d(r_pb, n_a, n_b) == pytest.approx(d_n, abs=1e-10)
    # mixing the definitions misses by O(1/N): the identity above is not a loose match
    assert abs(cv.d_to_r(d_n2, n_a, n_b) - r_pb) > 1e-4
    # swapping the coding of the groups negates r
    r_swapped = stats.pointbiserialr(1.0 - coded, values).statistic
    assert cv.d_to_r(-d_n2, n_b, n_a, pooled_divisor="N-2") == pytest.approx(r_swapped,
                                                                             abs=1e-10)


# ================================================================ sign conventions


@STEADY
@given(wide_d, sizes, sizes)
def test_swapping_groups_flips_every_scale(d, n_a, n_b):
    assert cv.d_to_a(-d) == pytest.approx(1.0 - cv.d_to_a(d), abs=1e-15)
    assert cv.d_to_r(-d, n_b, n_a) == -cv.d_to_r(d, n_a, n_b)
    assert cv.d_to_log_odds(-d) == -cv.d_to_log_odds(d)
    assert cv.d_to_delta(-d) == -cv.d_to_delta(d)
    if d > 1e-9:  # below, Phi(d / sqrt 2) rounds to 0.5
        assert cv.d_to_a(d) > 0.5 and cv.d_to_r(d, n_a, n_b) > 0 and cv.d_to_log_odds(d) > 0


@STEADY
@given(st.floats(1e-4, 1.0 - 1e-4, allow_nan=False))
def test_swapping_groups_from_a(a):
    # within [1e-4, 1 - 1e-4] the stored 1 - a still carries d to 1e-12
    assert cv.a_to_d(1.0 - a) == pytest.approx(-cv.a_to_d(a), abs=ROUND)
    assert cv.a_to_delta(1.0 - a) == pytest.approx(-cv.a_to_delta(a), abs=1e-15)


# ================================================================ the table


def _close_or_none(x, y):
    return (x is None and y is None) or x == pytest.approx(y, abs=1e-12)


def test_table_values_match_the_scalar_maps():
    d, a, n_a, n_b = 0.5, 0.7, 30, 10
    t = cv.conversion_table(d, a, n_a, n_b)
    assert t.link("prob_superiority_from_cohen_d").value == cv.d_to_a(d)
    assert t.link("cohen_d_from_prob_superiority").value == cv.a_to_d(a)
    assert t.link("cliff_delta_from_cohen_d").value == cv.d_to_delta(d)
    assert t.link("point_biserial_r_from_cohen_d").value == cv.d_to_r(d, n_a, n_b)
    assert t.link("point_biserial_r_from_cohen_d").direct == cv.d_to_r(d, n_a, n_b,
                                                                        pooled_divisor="N-2")
    assert t.link("log_odds_ratio_from_cohen_d").value == cv.d_to_log_odds(d)
    assert t.link("log_odds_ratio_from_prob_superiority").value == pytest.approx(
        cv.d_to_log_odds(cv.a_to_d(a)))
    a_link = t.link("prob_superiority_from_cohen_d")
    assert a_link.gap == pytest.approx(a - cv.d_to_a(d))  # direct minus converted
    assert t.cliff_delta == pytest.approx(2 * a - 1)
    with pytest.raises(KeyError):
        t.link("nothing_from_anything")


@pytest.mark.parametrize("shift, flagged", [(0.06, True), (-0.06, True), (0.04, False),
                                            (-0.04, False)])
def test_a_gap_flag_at_its_limit(shift, flagged):
    d = 0.3
    t = cv.conversion_table(d, cv.d_to_a(d) + shift, 40, 40)
    assert t.link("prob_superiority_from_cohen_d").flagged is flagged
    assert ("prob_superiority_from_cohen_d" in t.flagged) is flagged
    delta_link = t.link("cliff_delta_from_cohen_d")
    assert delta_link.gap == pytest.approx(2 * shift, abs=1e-12)
    assert delta_link.flagged is flagged  # the delta limit is the A limit carried by 2A - 1


def test_d_gap_flag_at_its_limit():
    a = 0.62
    implied = cv.a_to_d(a)
    assert cv.conversion_table(implied + 0.21, a, 20, 25).link(
        "cohen_d_from_prob_superiority").flagged
    assert not cv.conversion_table(implied + 0.19, a, 20, 25).link(
        "cohen_d_from_prob_superiority").flagged


def test_table_agrees_with_normal_theory_check():
    d, a = 0.9, 0.66
    check = normal_theory_check(d, a)
    t = cv.conversion_table(d, a, 12, 17)
    assert t.link("prob_superiority_from_cohen_d").value == pytest.approx(
        check.implied_prob_superiority, abs=1e-15)
    assert t.link("prob_superiority_from_cohen_d").gap == pytest.approx(check.gap, abs=1e-15)
    assert t.link("cohen_d_from_prob_superiority").value == pytest.approx(
        check.implied_d_from_observed, abs=1e-15)


@STEADY
@given(st.floats(-5, 5, allow_nan=False), st.floats(0.001, 0.999, allow_nan=False), sizes, sizes)
def test_table_under_swapping_groups(d, a, n_a, n_b):
    t = cv.conversion_table(d, a, n_a, n_b)
    s = cv.conversion_table(-d, 1.0 - a, n_b, n_a)
    for x, y in zip(t.links, s.links):
        assert x.key == y.key and x.flagged == y.flagged
        if x.target == "prob_superiority":
            assert y.value == pytest.approx(1.0 - x.value, abs=1e-12)
        else:
            assert y.value == pytest.approx(-x.value, abs=1e-9 * (1 + abs(x.value)))
        if x.gap is not None:
            assert y.gap == pytest.approx(-x.gap, abs=1e-9 * (1 + abs(x.gap)))


def test_table_with_unpooled_d_on_penguins():
    frame = pg.read_dataset("penguins").dropna(subset=["body_mass_g", "sex"])
    rows = frame[frame["species"] == "Gentoo"]
    a = rows.loc[rows["sex"] == "male", "body_mass_g"].to_numpy(dtype=float)
    b = rows.loc[rows["sex"] == "female", "body_mass_g"].to_numpy(dtype=float)
    d, du = float(cohen_d_values(a, b)), float(d_unpooled_values(a, b))
    a_hat = float(prob_superiority_values(a, b))
    diff = a[:, None] - b[None, :]
    delta_hat = float(np.mean(diff > 0) - np.mean(diff < 0))
    t = cv.conversion_table(d, a_hat, a.size, b.size, delta_hat, d_unpooled=du)
    assert t.link("prob_superiority_from_d_unpooled").value == pytest.approx(cv.d_to_a(du))
    coded = np.concatenate([np.ones(a.size), np.zeros(b.size)])
    r_data = stats.pointbiserialr(coded, np.concatenate([a, b])).statistic
    assert t.link("point_biserial_r_from_cohen_d").direct == pytest.approx(r_data, abs=1e-10)
    assert set(t.flagged) == {k.key for k in t.links if k.flagged}
    document = json.dumps(t.to_dict(), allow_nan=False)
    assert "prob_superiority_from_d_unpooled" not in document  # keys are derived, not stored
    assert json.loads(document)["links"][0]["target"] == "prob_superiority"


def test_table_complete_separation_warns_and_gives_none():
    with pytest.warns(UndefinedEffectWarning, match="complete separation"):
        t = cv.conversion_table(3.2, 1.0, 6, 6)
    link = t.link("cohen_d_from_prob_superiority")
    assert link.value is None and link.gap is None and not link.flagged
    assert "complete separation" in link.reason
    assert t.link("log_odds_ratio_from_prob_superiority").value is None
    assert t.link("prob_superiority_from_cohen_d").value == pytest.approx(cv.d_to_a(3.2))
    json.dumps(t.to_dict(), allow_nan=False)


@pytest.mark.parametrize("d", [None, math.nan, math.inf])
def test_table_undefined_d_gives_none_with_reason(d):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        t = cv.conversion_table(d, 0.5, 5, 5)
    assert t.cohen_d is None
    for key in ("prob_superiority_from_cohen_d", "cliff_delta_from_cohen_d",
                "point_biserial_r_from_cohen_d", "log_odds_ratio_from_cohen_d"):
        assert t.link(key).value is None and t.link(key).reason
    assert t.link("cohen_d_from_prob_superiority").value == 0.0
    assert t.link("cohen_d_from_prob_superiority").gap is None
    json.dumps(t.to_dict(), allow_nan=False)


def test_table_refuses_inconsistent_delta_and_bad_sizes():
    with pytest.raises(ValueError, match="2A - 1"):
        cv.conversion_table(0.4, 0.6, 10, 10, delta_hat=0.3)
    assert cv.conversion_table(0.4, 0.6, 10, 10, delta_hat=0.2).notes == ()
    with pytest.raises(ValueError):
        cv.conversion_table(0.4, 0.6, 1, 10)
    with pytest.raises(ValueError):
        cv.conversion_table(0.4, 1.6, 10, 10)


def test_table_is_frozen():
    t = cv.conversion_table(0.4, 0.6, 10, 10)
    with pytest.raises(AttributeError):
        t.cohen_d = 1.0  # type: ignore[misc]
    assert set(t.to_dict()) == {"cohen_d", "prob_superiority", "cliff_delta", "d_unpooled",
                                "n_a", "n_b", "links", "flagged", "notes"}
