"""Intervals at the edges: every bounded index in its boundary case gets no bootstrap interval,
with the reason, and an interval that is valid there; the decision's test and interval agree.

The boundary data sets are constructed (complete separation, differences of one sign, perfect
agreement, no differences at all): they are cases of a property, not reference values. The
fallback methods themselves are checked against outside references in tests/references.
"""

from __future__ import annotations

import dataclasses
import warnings

import numpy as np
import pandas as pd
import pytest

from auditor import resampling
from auditor.pipeline import audit
from honest import assert_honest_intervals

BOOT = 400


def run(frame, **design):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # undefined-effect warnings are part of the result
        result = audit(frame, resamples=BOOT, seed=5, **design)
    assert_honest_intervals(result.to_dict())
    return result


def two_groups(a, b) -> pd.DataFrame:
    return pd.DataFrame({"y": np.r_[a, b], "g": ["a"] * len(a) + ["b"] * len(b)})


def pairs(first, second) -> pd.DataFrame:
    return pd.DataFrame({"first": first, "second": second})


def wide(matrix) -> pd.DataFrame:
    return pd.DataFrame(np.asarray(matrix, dtype=float),
                        columns=[f"c{k}" for k in range(np.shape(matrix)[1])])


RNG = np.random.default_rng(20261203)
SEPARATED = two_groups(np.round(RNG.normal(30, 2, 9), 1), np.round(RNG.normal(18, 2, 8), 1))
_BEFORE = np.round(RNG.normal(50, 5, 10), 1)
ONE_SIGNED = pairs(_BEFORE, _BEFORE - np.round(RNG.uniform(0.5, 4, 10), 1))
_BASE = RNG.normal(0, 1, (12, 1))
AGREEING = wide(_BASE + np.array([0.0, 5.0, 10.0, 15.0]))  # every participant ranks c0<c1<c2<c3


def assert_withheld_with_fallback(effect, bounds):
    """No bootstrap interval, a reason, and an interval inside the index's range that does not
    collapse: wider than one step of the index on these data."""
    assert effect.interval("bca_bootstrap") is None, effect.name
    assert effect.bootstrap_reason, effect.name
    assert effect.ci_low is not None, (effect.name, effect.ci_method)
    assert bounds[0] <= effect.ci_low <= effect.estimate <= effect.ci_high <= bounds[1]
    assert effect.ci_high - effect.ci_low > 0.02 * (bounds[1] - bounds[0]), effect.name


@pytest.mark.parametrize("name, bounds", [("prob_superiority", (0, 1)), ("cliff_delta", (-1, 1)),
                                          ("rank_biserial", (-1, 1)), ("r_from_z", (-1, 1))])
def test_complete_separation_withholds_the_bootstrap_of_the_dominance_indices(name, bounds):
    result = run(SEPARATED, outcome="y", group="g")
    effect = result.effect(name)
    assert abs(effect.estimate) > 0.5
    assert "do not overlap" in effect.bootstrap_reason
    assert_withheld_with_fallback(effect, bounds)


@pytest.mark.parametrize("name, bounds", [("matched_rank_biserial", (-1, 1)),
                                          ("r_from_z", (-1, 1))])
def test_differences_of_one_sign_withhold_the_bootstrap_of_the_signed_rank_indices(name, bounds):
    result = run(ONE_SIGNED, paired_columns=["first", "second"])
    effect = result.effect(name)
    assert "same sign" in effect.bootstrap_reason
    assert_withheld_with_fallback(effect, bounds)


def test_ps_dep_at_one_keeps_its_wilson_interval_and_no_bootstrap():
    effect = run(ONE_SIGNED, paired_columns=["first", "second"]).effect("ps_dep")
    assert effect.estimate == 1.0
    assert_withheld_with_fallback(effect, (0, 1))
    assert effect.ci_method == "wilson"


def test_perfect_agreement_withholds_the_bootstrap_of_kendall_w():
    effect = run(AGREEING, paired_columns=list(AGREEING.columns)).effect("kendall_w")
    assert effect.estimate == pytest.approx(1.0)
    assert_withheld_with_fallback(effect, (0, 1))


def test_a_staircase_of_few_replicate_values_gives_no_interval():
    replicates = np.repeat(np.arange(4) / 4.0, 250)
    summary = resampling.bca_interval(0.5, replicates, (np.linspace(0.4, 0.6, 8),), 0.95, (0, 1))
    assert summary.interval is None and "4 distinct values" in summary.reason


def test_every_resample_equal_gives_no_interval():
    summary = resampling.bca_interval(0.3, np.full(500, 0.3), (np.full(6, 0.3),), 0.95)
    assert summary.interval is None and "one value" in summary.reason


def test_an_estimate_at_a_bound_gives_no_bootstrap_interval_even_with_varied_replicates():
    replicates = np.r_[np.full(100, 1.0), np.linspace(0.8, 0.999, 400)]
    summary = resampling.bca_interval(1.0, replicates, (np.linspace(0.9, 1, 8),), 0.95, (0, 1))
    assert summary.interval is None and "bound (1)" in summary.reason


# ------------------------------------------------------------------ the test and the interval agree

from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from auditor.agreement import MATCHED  # noqa: E402

AGREEMENT = settings(max_examples=40, deadline=None, derandomize=True,
                     suppress_health_check=[HealthCheck.too_slow])
PERMUTATION = "permutation_mean"  # no matched interval: the decision states agreement either way


def _agreement(result):
    decision = result.decision
    iv, test = decision.interval, decision.test
    return iv, test


@st.composite
def two_group_data(draw):
    na, nb = draw(st.integers(5, 30)), draw(st.integers(5, 30))
    shape = draw(st.sampled_from(["normal", "skewed", "ratings", "separated"]))
    shift = draw(st.floats(-1.5, 1.5))
    seed = draw(st.integers(0, 2**31))
    rng = np.random.default_rng(seed)
    if shape == "normal":
        a, b = rng.normal(shift, 1, na), rng.normal(0, draw(st.floats(0.5, 3)), nb)
    elif shape == "skewed":
        a, b = rng.lognormal(shift, 1, na), rng.lognormal(0, 1, nb)
    elif shape == "ratings":
        a = np.clip(np.round(rng.normal(4 + shift, 1.3, na)), 1, 7)
        b = np.clip(np.round(rng.normal(4, 1.3, nb)), 1, 7)
    else:
        a, b = rng.normal(10, 1, na), rng.normal(0, 1, nb)
    return two_groups(np.round(a, 2), np.round(b, 2))


@st.composite
def paired_data(draw):
    n = draw(st.integers(5, 40))
    shape = draw(st.sampled_from(["normal", "skewed", "ratings", "one_signed", "zeros"]))
    shift = draw(st.floats(-1.5, 1.5))
    rng = np.random.default_rng(draw(st.integers(0, 2**31)))
    first = np.round(rng.normal(50, 5, n), 1)
    if shape == "normal":
        d = rng.normal(shift, 1, n)
    elif shape == "skewed":
        d = rng.lognormal(0, 1, n) - np.exp(0.5) + shift
    elif shape == "ratings":
        d = np.round(rng.normal(shift, 1.2, n))
    elif shape == "one_signed":
        d = np.abs(rng.normal(1, 0.5, n)) + 0.1
    else:
        d = np.where(rng.random(n) < 0.4, 0.0, np.round(rng.normal(shift, 1, n)))
    return pairs(first, np.round(first - d, 1))


def _check_agreement(result, design):
    iv, test = _agreement(result)
    if test["name"] not in MATCHED[design] and test["p"] is not None:
        assert "agrees_with_test" in iv  # stated either way, also without a matched interval
        return
    if test["p"] is None or iv["low"] is None:
        assert iv["agrees_with_test"] is None
        return
    assert iv["agrees_with_test"] is True, (iv, test["name"], test["p"])
    excludes = not (iv["low"] <= result.effect(result.decision.primary).null_value <= iv["high"])
    assert excludes == (test["p"] < 1 - result.settings.level)


@AGREEMENT
@given(frame=two_group_data())
@pytest.mark.slow
def test_the_quoted_interval_agrees_with_the_reported_test_for_two_groups(frame):
    result = run(frame, outcome="y", group="g")
    name = result.decision.test["name"]
    if name == PERMUTATION:
        assert "agrees_with_test" in result.decision.interval
        return
    _check_agreement(result, "two_groups")


@AGREEMENT
@given(frame=paired_data())
@pytest.mark.slow
def test_the_quoted_interval_agrees_with_the_reported_test_for_paired_data(frame):
    result = run(frame, paired_columns=["first", "second"])
    name = result.decision.test["name"]
    if name == PERMUTATION:
        assert "agrees_with_test" in result.decision.interval
        return
    _check_agreement(result, "paired")


# ------------------------------------------------------------------ the decision's choices

from auditor import rationale  # noqa: E402
from auditor.coverage_check import verdict  # noqa: E402
from auditor.policy import default_text, parse_policy  # noqa: E402


def _policy(replace: dict, name: str):
    text = default_text()
    for old, new in replace.items():
        assert old in text, old
        text = text.replace(old, new)
    return parse_policy(text, name)


SKEWED_SEPARATED = two_groups(np.round(40 + RNG.lognormal(0, 1, 20), 2),
                              np.round(RNG.lognormal(0, 1, 20), 2))


RANK_BRANCHES = ("non_normal", "heavy_ties", "outliers")
BRUNNER_MUNZEL = {f'{line}test = "mann_whitney" }}': f'{line}test = "brunner_munzel" }}'
                  for line in ('"hedges_g"], ', '"rank_biserial"], ')}


def test_under_complete_separation_the_mann_whitney_test_stands_in_for_brunner_munzel():
    policy = _policy(BRUNNER_MUNZEL, "A with the Brunner-Munzel test on non-normal data")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = audit(SKEWED_SEPARATED, outcome="y", group="g", resamples=BOOT, seed=5,
                       policy=policy)
    assert {policy.branch("two_groups", b).test for b in RANK_BRANCHES} == {"brunner_munzel"}
    decision = result.decision
    assert decision.primary == "prob_superiority"
    assert decision.test["name"] == "mann_whitney"
    assert any("Brunner-Munzel test is undefined" in n for n in decision.notes)
    iv = decision.interval
    assert iv["method"] == "proportional_odds_score" and iv["matched_to_test"] == "mann_whitney"
    assert iv["agrees_with_test"] is True and iv["high"] == 1.0 and iv["low"] < 0.95


def test_the_default_policy_pairs_a_with_the_mann_whitney_test_and_its_score_interval():
    decision = run(SKEWED_SEPARATED, outcome="y", group="g").decision
    assert decision.branch in RANK_BRANCHES and decision.test["name"] == "mann_whitney"
    assert decision.interval["method"] == "proportional_odds_score"
    assert not any("Brunner-Munzel" in n for n in decision.notes)


def test_without_match_test_the_index_s_own_interval_is_quoted():
    policy = _policy({"match_test = true": "match_test = false"}, "no matching")
    frame = pairs(_BEFORE, _BEFORE - np.round(RNG.normal(0.8, 1.5, 10), 1))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        matched = audit(frame, paired_columns=["first", "second"], resamples=BOOT, seed=5)
        own = audit(frame, paired_columns=["first", "second"], resamples=BOOT, seed=5,
                    policy=policy)
    assert "matched_to_test" not in own.decision.interval
    effect = own.effect(own.decision.primary)
    assert own.decision.interval["method"] == effect.ci_method
    assert "agrees_with_test" in own.decision.interval  # the agreement is stated either way
    if matched.decision.interval["method"] != effect.ci_method:
        assert matched.decision.interval["instead_of"]["method"] == effect.ci_method


def test_the_coverage_check_is_reported_and_a_shortfall_reaches_the_reviewer_note():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = audit(SEPARATED, outcome="y", group="g", resamples=BOOT, seed=5,
                       coverage_check=True)
    check = result.coverage_check
    assert check is not None and check.index == result.decision.primary
    assert check.method == result.decision.interval["method"]
    doc = result.to_dict()["coverage_check"]
    assert doc["usable"] + doc["undefined"] == doc["simulations"] == 200  # the policy's default
    assert doc["coverage"] == pytest.approx(doc["covered"] / doc["usable"], abs=1e-15)
    assert (doc["shortfall_points"], doc["verdict"]) == verdict(doc["coverage"], doc["mc_se"],
                                                                doc["level"])
    short = dataclasses.replace(check, coverage=0.88, verdict="falls short by 7.0 points")
    note = rationale.reviewer_note(dataclasses.replace(result, coverage_check=short),
                                   result.decision, parse_policy(default_text(), "default"))
    assert "falls short by 7.0 points" in note and "88.0%" in note


def test_the_coverage_check_is_off_by_default_and_never_runs_in_a_screen():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain = audit(SEPARATED, outcome="y", group="g", resamples=BOOT, seed=5)
        screen = audit(SEPARATED, outcome="y", group="g", resamples=BOOT, seed=5,
                       scope="screen", coverage_check=True)
    assert plain.coverage_check is None and plain.to_dict()["coverage_check"] is None
    assert screen.coverage_check is None


def test_identical_groups_give_no_omnibus_interval_and_both_reasons():
    """Three groups holding the same values: H = 0 and F = 0, so epsilon^2_H = eta^2 = 0 sit at
    their lower bound. The bootstrap is withheld there, and the noncentral inversions give the
    single point 0 (no noncentrality makes a statistic that small): no interval at all is
    reported, with both reasons, rather than a point passed off as an interval."""
    values = np.array([3.1, 4.2, 5.0, 5.9, 7.3, 8.8, 2.2, 6.4])
    frame = pd.DataFrame({"y": np.r_[values, values, values], "g": list("a" * 8 + "b" * 8 + "c" * 8)})
    result = run(frame, outcome="y", group="g")
    for name in ("epsilon_squared_h", "eta_squared"):
        effect = result.effect(name)
        assert effect.estimate == 0.0 and effect.ci_low is None, name
        assert "bound (0)" in effect.bootstrap_reason
        assert any("single point 0" in note for note in effect.notes), effect.notes


def test_near_zero_omnibus_effects_keep_an_interval_from_zero():
    rng = np.random.default_rng(8)
    frame = pd.DataFrame({"y": np.round(rng.normal(0, 1, 90), 2), "g": list("abc") * 30})
    result = run(frame, outcome="y", group="g")
    for name in ("eta_squared", "omega_squared"):
        effect = result.effect(name)
        assert effect.ci_method == "noncentral_f"
        assert effect.ci_low == 0.0 < effect.ci_high < 0.2, (name, effect.ci_low, effect.ci_high)
