"""Reduced coverage study of the analytic intervals (the full study is
tools/coverage_study.py, its table docs/coverage.md).

Each check simulates from populations whose true effect is known, so the expected coverage is the
interval's promise. 600 replications give a Monte Carlo SE of about 0.009 at 95%; the accepted
band [0.92, 0.98] is about three SEs wide either way.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from auditor import parametric, ranks

REPS = 600
LEVEL = 0.95


def coverage(draw, estimate, truth, seed):
    rng = np.random.default_rng(seed)
    hits = 0
    for _ in range(REPS):
        a, b = draw(rng)
        iv = estimate(a, b, LEVEL).interval
        hits += iv.low <= truth <= iv.high
    return hits / REPS


def test_noncentral_t_interval_for_d_under_normality():
    # normal populations, equal SD 2, mean gap 1: true d = 0.5
    cov = coverage(lambda r: (r.normal(1, 2, 15), r.normal(0, 2, 20)), parametric.cohen_d, 0.5, 11)
    assert 0.92 <= cov <= 0.98


def test_bonett_interval_with_unequal_variances():
    # SDs 1 and 3: true delta = 1.2 / sqrt((1 + 9) / 2)
    truth = 1.2 / math.sqrt(5.0)
    cov = coverage(lambda r: (r.normal(1.2, 1, 40), r.normal(0, 3, 40)), parametric.d_unpooled,
                   truth, 12)
    assert 0.92 <= cov <= 0.98


def test_welch_interval_with_unequal_variances_and_sizes():
    cov = coverage(lambda r: (r.normal(0.5, 1, 12), r.normal(0, 3, 30)),
                   parametric.mean_difference, 0.5, 13)
    assert 0.92 <= cov <= 0.98


def test_brunner_munzel_interval_for_a_with_skewed_unequal_populations():
    # true A = P(X > Y) for X ~ lognormal(0.3, 0.5), Y ~ lognormal(0, 1), by numerical integration
    x, y = stats.lognorm(0.5, scale=math.exp(0.3)), stats.lognorm(1.0, scale=1.0)
    from scipy import integrate

    truth = integrate.quad(lambda t: y.cdf(t) * x.pdf(t), 0, np.inf)[0]
    cov = coverage(lambda r: (r.lognormal(0.3, 0.5, 30), r.lognormal(0, 1, 25)),
                   ranks.prob_superiority, truth, 14)
    assert 0.92 <= cov <= 0.98


def test_distribution_free_shift_interval_is_at_least_nominal():
    # a pure shift of 0.7 between t(3) populations: coverage >= level by construction
    cov = coverage(lambda r: (r.standard_t(3, 14) + 0.7, r.standard_t(3, 17)),
                   ranks.hodges_lehmann, 0.7, 15)
    assert cov >= 0.93


@pytest.mark.parametrize("na,nb", [(30, 30), (400, 500)])
def test_glass_interval_with_normal_data(na, nb):
    # reference B with SD 2; true delta = 1 / 2
    cov = coverage(lambda r: (r.normal(1, 2, na), r.normal(0, 2, nb)), parametric.glass_delta,
                   0.5, 16 + na)
    assert 0.92 <= cov <= 0.98
