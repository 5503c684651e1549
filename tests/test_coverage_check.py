"""The coverage check (`auditor.coverage_check`): its smoothed populations, its exact population
values against Monte Carlo draws from the same populations, two coverage figures whose answer is
known from the literature and docs/coverage.md, reproducibility, and the cases it declines.

Data here are invented (seeded normal, lognormal and rounded draws) to test properties only.
Monte Carlo tolerances: a coverage estimate from S simulations has SE sqrt(p (1 - p) / S); a
Monte Carlo population value carries the SE of its batch means, reported with it.
"""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest

from auditor import coverage_check as cc
from auditor.effects import (k_independent_effects, k_repeated_effects, paired_effects,
                             two_group_effects)
from auditor.parametric import Estimate

TWO = {s.name: s for s in two_group_effects()}
TWO_REF_A = {s.name: s for s in two_group_effects(0)}
PAIRED = {s.name: s for s in paired_effects()}
K_GROUPS = {s.name: s for s in k_independent_effects()}
K_REPEATED = {s.name: s for s in k_repeated_effects()}


def skewed_rounded_groups(seed: int = 3, sizes=(30, 45)):
    """Two skewed groups rounded to one decimal (so with ties), of unequal sizes and spreads."""
    rng = np.random.default_rng(seed)
    a = np.round(rng.lognormal(0.3, 0.8, sizes[0]), 1)
    b = np.round(rng.lognormal(0.0, 0.6, sizes[1]), 1)
    return a, b


def correlated_rows(seed: int, n: int, shifts) -> np.ndarray:
    """Participants' rows: a shared normal level plus normal noise per condition, and shifts."""
    rng = np.random.default_rng(seed)
    k = len(shifts)
    return rng.normal(0, 1, (n, 1)) + rng.normal(0, 0.7, (n, k)) + np.asarray(shifts)


# ------------------------------------------------------------------ the populations


def test_smoothing_keeps_each_groups_mean_and_variance_exactly():
    a, b = skewed_rounded_groups()
    pop = cc.smoothed_population((a, b))
    for x, mu, sd, m, v in zip((a, b), pop.centres, pop.noise_sds, pop.means, pop.variances):
        assert m == pytest.approx(x.mean(), rel=1e-14)
        assert v == pytest.approx(x.var(), rel=1e-12)  # divisor n
        # mixture of N(mu_i, sd^2) with equal weights: mean(mu), var(mu) + sd^2
        assert np.mean(mu) == pytest.approx(m, rel=1e-13)
        assert np.var(mu) + sd**2 == pytest.approx(v, rel=1e-12)


def test_silverman_bandwidth_and_its_special_cases():
    x = np.array([1.0, 2, 4, 7, 11, 16, 22, 29])
    sd = np.std(x, ddof=1)
    iqr = np.subtract(*np.percentile(x, [75, 25]))
    assert cc.silverman_bandwidth(x) == pytest.approx(0.9 * min(sd, iqr / 1.34) * 8 ** -0.2)
    tied = np.array([3.0] * 7 + [4.0, 5.0])  # IQR zero: the SD is used alone
    assert cc.silverman_bandwidth(tied) == pytest.approx(0.9 * np.std(tied, ddof=1) * 9 ** -0.2)
    assert cc.silverman_bandwidth(np.full(5, 2.5)) == 0.0


def test_smoothing_breaks_ties_of_rounded_data():
    ratings = np.array([3.0, 4, 4, 5, 5, 5, 6, 6, 7, 4, 5, 3])
    pop = cc.smoothed_population((ratings, ratings[::-1].copy()))
    a, b = pop.draw(np.random.default_rng(0), (500, 500))
    assert np.unique(np.concatenate([a, b])).size == 1000


def test_rows_keep_means_and_covariance_exactly_and_stay_together():
    x = correlated_rows(4, 40, (0.4, 0.0))
    pop = cc.smoothed_population((x,))
    s = np.cov(x.T, bias=True)
    np.testing.assert_allclose(pop.means, x.mean(axis=0), rtol=1e-13)
    # Cov Y = c^2 (Cov of the rows + h^2 S) = S
    centred = pop.centres - pop.centres.mean(axis=0)
    total = centred.T @ centred / x.shape[0] + pop.noise_factor @ pop.noise_factor.T
    np.testing.assert_allclose(total, s, rtol=1e-12, atol=1e-14)
    (y,) = pop.draw(np.random.default_rng(1), (200_000,))
    assert np.corrcoef(y.T)[0, 1] == pytest.approx(s[0, 1] / math.sqrt(s[0, 0] * s[1, 1]),
                                                   abs=0.01)


# ------------------------------------------------------------------ population values


def _agrees(spec, samples, *, batches=20, values_per_batch=cc.TRUTH_BATCH_VALUES, seed=5):
    pop = cc.smoothed_population(samples)
    exact = cc.population_value(spec, pop, np.random.default_rng(0))
    mc = cc.monte_carlo_value(spec, pop, np.random.default_rng(seed), batches=batches,
                              values_per_batch=values_per_batch)
    assert exact.method == "exact"
    assert abs(mc.value - exact.value) < 4 * mc.se, (exact, mc)
    return exact, mc


@pytest.mark.parametrize("name", ["mean_difference", "prob_superiority", "cliff_delta"])
def test_closed_form_truths_agree_with_monte_carlo_of_the_populations(name):
    # A = mean over pairs of Phi((mu_Ai - mu_Bj) / sqrt(sigma_A^2 + sigma_B^2)); the Monte Carlo
    # value is the index itself on 20 samples of about 200,000 values from the populations.
    _agrees(TWO[name], skewed_rounded_groups())


@pytest.mark.slow
@pytest.mark.parametrize("registry, name", [
    (TWO, "glass_delta"), (TWO_REF_A, "glass_delta"), (TWO, "d_unpooled"),
    (PAIRED, "d_z"), (PAIRED, "d_av"), (PAIRED, "d_rm"), (PAIRED, "ps_dep"),
    (PAIRED, "matched_rank_biserial"),
    (K_GROUPS, "epsilon_squared_h"), (K_GROUPS, "eta_squared"), (K_GROUPS, "omega_squared"),
    (K_REPEATED, "kendall_w"), (K_REPEATED, "generalized_eta_squared"),
])
def test_every_other_closed_form_agrees_with_monte_carlo(registry, name):
    rng = np.random.default_rng(8)
    if registry is PAIRED:
        samples = (correlated_rows(6, 40, (0.4, 0.0)),)
    elif registry is K_REPEATED:
        samples = (correlated_rows(7, 35, (0.4, 0.0, 0.2)),)
    elif registry is K_GROUPS:
        samples = (rng.normal(0, 1, 25), rng.normal(0.5, 1.5, 30), rng.gamma(2.0, 1.0, 20))
    else:
        samples = skewed_rounded_groups()
    _agrees(registry[name], samples)


@pytest.mark.slow
@pytest.mark.parametrize("registry, name", [(TWO, "hodges_lehmann"), (PAIRED, "hodges_lehmann"),
                                            (TWO, "robust_d"), (TWO, "cohen_d")])
def test_root_found_truths_agree_with_monte_carlo(registry, name):
    # equal sizes: the pooled-SD indices' sample versions then estimate the equal-weight value
    samples = ((correlated_rows(6, 40, (0.4, 0.0)),) if registry is PAIRED
               else skewed_rounded_groups(sizes=(30, 30)))
    _agrees(registry[name], samples, batches=30, values_per_batch=40_000)


def test_glass_delta_truth_follows_the_reference_group():
    a, b = skewed_rounded_groups()
    pop = cc.smoothed_population((a, b))
    diff = a.mean() - b.mean()
    by_b = cc.population_value(TWO["glass_delta"], pop, np.random.default_rng(0))
    by_a = cc.population_value(TWO_REF_A["glass_delta"], pop, np.random.default_rng(0))
    assert by_b.value == pytest.approx(diff / b.std(), rel=1e-12)
    assert by_a.value == pytest.approx(diff / a.std(), rel=1e-12)


def test_unequal_sizes_note_the_equal_weight_pooling():
    check = cc.coverage_check(TWO["cohen_d"], skewed_rounded_groups(), method="analytic",
                              simulations=10, rng=np.random.default_rng(0))
    assert any("equal weights" in note for note in check.notes)


# ------------------------------------------------------------------ coverage with a known answer


@pytest.mark.slow
def test_welch_interval_covers_as_promised_on_normal_data():
    # Welch's interval (Welch 1947) is very nearly exact for normal populations; docs/coverage.md
    # reports 96.4%, 94.3% and 94.5% for normal groups of 10, 20 and 50. Smoothing a normal sample
    # gives a normal mixture close to normal. 2000 simulations: SE 0.49 points at 95%.
    rng = np.random.default_rng(11)
    a, b = rng.normal(0.5, 1.0, 30), rng.normal(0.0, 1.5, 30)
    check = cc.coverage_check(TWO["mean_difference"], (a, b), method="analytic",
                              simulations=2000, rng=np.random.default_rng(12))
    se = math.sqrt(0.95 * 0.05 / 2000)
    assert check.usable == 2000 and check.truth_method == "exact"
    assert abs(check.coverage - 0.95) <= 2.5 * se
    assert check.verdict == "holds"


@pytest.mark.slow
def test_bca_of_the_mean_difference_falls_short_on_small_skewed_groups():
    # docs/coverage.md: the BCa interval of the mean difference covers 84.5% for lognormal groups
    # of 10 (and 91.7% even for normal groups of 10: no t-type allowance for the estimated SD).
    rng = np.random.default_rng(0)
    a, b = rng.lognormal(0.0, 1.0, 10) + 0.4, rng.lognormal(0.0, 1.0, 10)
    check = cc.coverage_check(TWO["mean_difference"], (a, b), method="bca_bootstrap",
                              simulations=1000, resamples=2000, rng=np.random.default_rng(100))
    assert check.verdict.startswith("falls short by ")
    assert check.shortfall_points > 100 * 2 * check.mc_se
    assert check.verdict == f"falls short by {check.shortfall_points:.1f} points"


def test_paired_d_z_analytic_interval_on_near_normal_pairs():
    # the noncentral-t interval of d_z is exact for normal differences; the smoothed differences
    # are a normal mixture close to normal. 400 simulations: SE 1.1 points at 95%.
    x = correlated_rows(21, 40, (0.4, 0.0))
    check = cc.coverage_check(PAIRED["d_z"], (x,), method="analytic", simulations=400,
                              rng=np.random.default_rng(22))
    assert check.design == "paired" and check.truth_method == "exact"
    d = x[:, 0] - x[:, 1]
    assert check.truth == pytest.approx(d.mean() / d.std(), rel=1e-12)
    assert abs(check.coverage - 0.95) <= 3 * math.sqrt(0.95 * 0.05 / 400)


def test_paired_ps_dep_is_checked_against_its_exact_value():
    x = correlated_rows(23, 30, (0.3, 0.0))
    check = cc.coverage_check(PAIRED["ps_dep"], (x,), method="analytic", simulations=50,
                              rng=np.random.default_rng(24))
    assert check.computed and check.truth_method == "exact"
    assert 0.5 < check.truth < 1.0
    assert check.usable + check.undefined == 50


def test_k_groups_bca_check_runs():
    rng = np.random.default_rng(31)
    groups = (rng.normal(0, 1, 25), rng.normal(0.8, 1, 25), rng.normal(0.3, 1, 25))
    boot = cc.coverage_check(K_GROUPS["epsilon_squared_h"], groups, method="bca_bootstrap",
                             simulations=20, resamples=200, rng=np.random.default_rng(32))
    assert boot.computed and boot.design == "k_independent" and boot.truth_method == "exact"
    assert boot.usable + boot.undefined == 20 and boot.usable > 0


def test_a_method_that_never_gives_an_interval_gets_a_reason():
    def point_only(a, b, level):
        return Estimate(float(np.mean(a) - np.mean(b)), None)

    spec = dataclasses.replace(TWO["mean_difference"], estimate=point_only)
    check = cc.coverage_check(spec, skewed_rounded_groups(sizes=(12, 12)), method="analytic",
                              simulations=10, rng=np.random.default_rng(32))
    assert check.usable == 0 and check.undefined == 10 and check.coverage is None
    assert "no simulated data set gave an interval by analytic" in check.reason


def test_k_repeated_kendall_w_bca_check_runs():
    x = correlated_rows(33, 30, (0.5, 0.0, 0.2))
    check = cc.coverage_check(K_REPEATED["kendall_w"], (x,), method="bca_bootstrap",
                              simulations=10, resamples=200, rng=np.random.default_rng(34))
    assert check.design == "k_repeated" and check.truth_method == "exact"
    assert check.usable + check.undefined == 10


# ------------------------------------------------------------------ bootstrap details


def test_derived_index_maps_the_source_replicates():
    # Cliff's delta = 2A - 1: its BCa limits are A's mapped, over the same data and resamples
    a, b = skewed_rounded_groups(sizes=(20, 20))
    pop = cc.smoothed_population((a, b))
    common = dict(method="bca_bootstrap", level=0.95, simulations=10, resamples=300,
                  entropy=1234)
    limits_a = cc.simulate_intervals(TWO["prob_superiority"], pop, (20, 20), **common)
    limits_d = cc.simulate_intervals(TWO["cliff_delta"], pop, (20, 20),
                                     source=cc.bootstrap_source(TWO["cliff_delta"],
                                                                "two_independent"), **common)
    np.testing.assert_allclose(limits_d, 2 * limits_a - 1, rtol=0, atol=1e-12)


def test_each_simulation_has_its_own_streams():
    a, b = skewed_rounded_groups(sizes=(15, 15))
    pop = cc.smoothed_population((a, b))
    common = dict(method="bca_bootstrap", level=0.95, resamples=200, entropy=99)
    short = cc.simulate_intervals(TWO["cohen_d"], pop, (15, 15), simulations=10, **common)
    long = cc.simulate_intervals(TWO["cohen_d"], pop, (15, 15), simulations=20, **common)
    np.testing.assert_array_equal(short, long[:10])


# ------------------------------------------------------------------ reproducibility and reporting


def test_same_seed_same_result_and_progress_reports_each_simulation():
    a, b = skewed_rounded_groups(sizes=(25, 25))
    calls = []
    first = cc.coverage_check(TWO["prob_superiority"], (a, b), method="bca_bootstrap",
                              simulations=12, resamples=200, rng=np.random.default_rng(5),
                              progress=lambda done, total: calls.append((done, total)))
    again = cc.coverage_check(TWO["prob_superiority"], (a, b), method="bca_bootstrap",
                              simulations=12, resamples=200, rng=np.random.default_rng(5))
    other = cc.coverage_check(TWO["prob_superiority"], (a, b), method="bca_bootstrap",
                              simulations=12, resamples=200, rng=np.random.default_rng(6))
    assert first.to_dict() == again.to_dict()
    assert first.seed_entropy != other.seed_entropy
    assert calls == [(i, 12) for i in range(1, 13)]


def test_result_is_plain_json_with_its_fields(strict_json):
    a, b = skewed_rounded_groups(sizes=(20, 20))
    check = cc.coverage_check(TWO["cohen_d"], (a, b), method="analytic", simulations=20,
                              rng=np.random.default_rng(3))
    data = strict_json(json.dumps(check.to_dict()))
    assert data["index"] == "cohen_d" and data["method"] == "analytic"
    assert data["resamples"] is None and data["sizes"] == [20, 20]
    assert data["usable"] + data["undefined"] == data["simulations"] == 20
    assert data["coverage"] == data["covered"] / data["usable"]
    assert data["mc_se"] == pytest.approx(math.sqrt(check.coverage * (1 - check.coverage) / 20))
    assert data["verdict"] in ("holds",) or data["verdict"].startswith("falls short by ")
    assert "Silverman" in data["population"] and len(data["bandwidths"]) == 2


def test_verdict_rule():
    assert cc.verdict(0.90, 0.01, 0.95) == (pytest.approx(5.0), "falls short by 5.0 points")
    assert cc.verdict(0.935, 0.01, 0.95) == (None, "holds")  # within two SEs
    assert cc.verdict(0.99, 0.007, 0.95) == (None, "holds")  # above: conservative still holds


# ------------------------------------------------------------------ declined and refused


@pytest.mark.parametrize("registry, samples", [
    (TWO, skewed_rounded_groups(sizes=(20, 20))),
    (PAIRED, (correlated_rows(1, 20, (0.3, 0.0)),)),
])
def test_r_from_z_gets_a_reason_not_a_check(registry, samples):
    calls = []
    check = cc.coverage_check(registry["r_from_z"], samples, method="bca_bootstrap",
                              rng=np.random.default_rng(0), progress=lambda *a: calls.append(a))
    assert not check.computed and "Z / sqrt(N)" in check.reason
    assert check.coverage is None and check.verdict is None and calls == []


def test_data_conditions_give_reasons():
    one = cc.coverage_check(TWO["cohen_d"], (np.array([1.0]), np.array([1.0, 2.0, 3.0])),
                            method="analytic", simulations=10, rng=np.random.default_rng(0))
    assert "at least 2" in one.reason
    constant = cc.coverage_check(TWO["cohen_d"], (np.full(8, 2.0), np.full(8, 3.0)),
                                 method="analytic", simulations=10, rng=np.random.default_rng(0))
    assert "no finite value" in constant.reason and constant.truth is None


@pytest.mark.parametrize("change, message", [
    (dict(method="percentile"), "method 'percentile'"),
    (dict(simulations=5), "simulations 5"),
    (dict(resamples=50), "resamples 50"),
    (dict(level=1.2), "level 1.2"),
])
def test_bad_arguments_raise(change, message):
    a, b = skewed_rounded_groups(sizes=(10, 10))
    args = dict(method="analytic", rng=np.random.default_rng(0)) | change
    with pytest.raises(ValueError, match=message):
        cc.coverage_check(TWO["cohen_d"], (a, b), **args)


def test_a_spec_of_another_design_or_bad_samples_raise():
    x = correlated_rows(2, 20, (0.2, 0.0))
    with pytest.raises(ValueError, match="belongs to the paired design"):
        cc.coverage_check(PAIRED["d_z"], (x[:, 0], x[:, 1]), method="analytic",
                          rng=np.random.default_rng(0))
    with pytest.raises(ValueError, match="missing or infinite"):
        cc.coverage_check(TWO["cohen_d"], (np.array([1.0, np.nan, 2]), x[:, 1]),
                          method="analytic", rng=np.random.default_rng(0))
    with pytest.raises(ValueError, match="form no design"):
        cc.coverage_check(TWO["cohen_d"], (x[:, 0],), method="analytic",
                          rng=np.random.default_rng(0))
