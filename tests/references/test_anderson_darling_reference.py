"""Reference checks of the Anderson-Darling p-value (auditor/anderson_darling.py) over the whole
range of the statistic.

Outside sources:
  * statsmodels.stats.diagnostic.normal_ad, an independent implementation of D'Agostino &
    Stephens (1986, Table 4.9), for the tabled range;
  * the asymptotic percentage points of A2 for normality with both parameters estimated,
    Stephens (1974, JASA 69:730): 0.561, 0.631, 0.752, 0.873, 1.035 at 15, 10, 5, 2.5 and 1%
    (the values scipy.stats.anderson tabulates for dist='norm'), and the 0.5% point 1.159
    (D'Agostino & Stephens 1986, Table 4.7; from memory);
  * Imhof's (1961, Biometrika 48:419) numerical inversion of the characteristic function of
    sum_j lambda_j Z_j^2, a computation independent of the saddlepoint approximation the
    module uses in the tail, reliable here down to p of about 1e-8 (at A2* = 4 its quadrature
    already misses by half);
  * further out, an importance-sampling estimate of the same tail (exponential tilting at the
    saddlepoint, Siegmund 1976, Ann. Statist. 4:673), exact up to its Monte-Carlo error of
    about 1-2% at 200,000 draws;
  * the eigenvalues recomputed here on other quadrature nodes, and their sum against the
    kernel's trace by adaptive quadrature.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy import integrate, optimize, special, stats
from statsmodels.stats.diagnostic import normal_ad

from auditor import anderson_darling as ad
from auditor import diagnostics


def _nystrom(m: int) -> np.ndarray:
    """Eigenvalues of the case-3 kernel on m Gauss-Legendre nodes (written anew here, not
    imported from tools/, so that the check does not reuse the code it checks)."""
    nodes, weights = np.polynomial.legendre.leggauss(m)
    s, w = 0.5 * (nodes + 1.0), 0.5 * weights
    z = special.ndtri(s)
    dens = np.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi)
    cov = (np.minimum.outer(s, s) - np.outer(s, s) - np.outer(dens, dens)
           - 0.5 * np.outer(z * dens, z * dens))
    scale = np.sqrt(w / (s * (1.0 - s)))
    return np.sort(np.linalg.eigvalsh(scale[:, None] * cov * scale[None, :]))[::-1]


def _imhof_tail(x: float) -> float:
    """P(sum_j lambda_j Z_j^2 + REST > x) by Imhof (1961, eq. 3.2)."""
    lam = np.asarray(ad.EIGENVALUES)
    y = x - ad.REST

    def integrand(u):
        theta = 0.5 * np.sum(np.arctan(lam * u)) - 0.5 * y * u
        rho = np.prod((1.0 + (lam * u) ** 2) ** 0.25)
        return math.sin(theta) / (u * rho)

    value, _ = integrate.quad(integrand, 0.0, np.inf, limit=2000, epsabs=1e-15)
    return 0.5 + value / math.pi


def test_eigenvalues_match_a_recomputation_on_other_nodes():
    coarse, fine = _nystrom(700), _nystrom(1400)
    extrapolated = (4.0 * fine[:12] - coarse[:12]) / 3.0  # the Nystrom error falls as 1/m^2
    assert np.allclose(ad.EIGENVALUES[:12], extrapolated, rtol=1e-5, atol=0)
    assert list(ad.EIGENVALUES) == sorted(ad.EIGENVALUES, reverse=True)


def test_eigenvalues_and_rest_add_up_to_the_kernel_trace():
    def diagonal(s):  # K(s, s) of the case-3 kernel
        z = special.ndtri(s)
        dens = math.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi)
        return (s * (1 - s) - dens**2 - 0.5 * (z * dens) ** 2) / (s * (1 - s))

    trace, _ = integrate.quad(diagonal, 0.0, 1.0, limit=400, epsabs=1e-12)
    assert sum(ad.EIGENVALUES) + ad.REST == pytest.approx(trace, rel=1e-7)


# Stephens (1974, JASA 69:730): asymptotic upper-tail points of A2, case 3 (both estimated);
# the 0.5% point from D'Agostino & Stephens (1986, Table 4.7), from memory.
STEPHENS_POINTS = [(0.15, 0.561), (0.10, 0.631), (0.05, 0.752), (0.025, 0.873), (0.01, 1.035),
                   (0.005, 1.159)]


@pytest.mark.parametrize("level, point", STEPHENS_POINTS)
def test_asymptotic_distribution_reproduces_stephens_points(level, point):
    quantile = optimize.brentq(lambda x: _imhof_tail(x) - level, 0.3, 3.0, xtol=1e-9)
    assert quantile == pytest.approx(point, abs=1.5e-3)  # points are printed to 3 decimals


def _tilted_tail(x: float, draws: int = 200_000, seed: int = 1) -> float:
    """P(sum_j lambda_j Z_j^2 + REST > x) by importance sampling: draw Q from the distribution
    tilted by theta (each Z_j^2 scaled by 1 / (1 - 2 theta lambda_j)), theta solving
    E_theta[Q] = x, and average M(theta) exp(-theta Q) 1{Q > x}."""
    lam = np.asarray(ad.EIGENVALUES)
    theta = optimize.brentq(lambda t: np.sum(lam / (1 - 2 * t * lam)) + ad.REST - x, 0.0,
                            (1 - 1e-13) / (2 * lam[0]), xtol=1e-15)
    log_m = -0.5 * np.sum(np.log1p(-2 * theta * lam)) + ad.REST * theta
    z = np.random.default_rng(seed).standard_normal((draws, lam.size))
    q = (z * z) @ (lam / (1 - 2 * theta * lam)) + ad.REST
    return float(np.mean(np.exp(log_m - theta * q) * (q > x)))


@pytest.mark.parametrize("a_star", [1.2, 1.5, 2.0, 2.5, 3.0])
def test_saddlepoint_tail_agrees_with_imhof_inversion(a_star):
    saddle = math.exp(ad._log_tail(a_star))
    assert saddle == pytest.approx(_imhof_tail(a_star), rel=0.06)


@pytest.mark.parametrize("a_star", [2.0, 4.0, 6.0, 10.0, 20.0, 40.0])
def test_saddlepoint_tail_agrees_with_importance_sampling(a_star):
    saddle = math.exp(ad._log_tail(a_star))
    exact = _tilted_tail(a_star)
    assert saddle == pytest.approx(exact, rel=0.15)
    assert saddle >= 0.97 * exact  # errs, if at all, towards the larger p


@pytest.mark.parametrize("a_star", [1.2, 1.5, 2.0, 4.0, 10.0, 40.0])
def test_reported_tail_stays_near_the_asymptotic_distribution(a_star):
    p, method, bound = ad.p_value(a_star)
    assert method == ad.TAIL and not bound
    assert p == pytest.approx(_tilted_tail(a_star), rel=0.2)


def test_table_branches_match_statsmodels_in_the_tabled_range():
    rng = np.random.default_rng(20261203)
    checked = 0
    for n in (8, 15, 40, 120, 500):
        for _ in range(40):
            x = rng.standard_t(rng.choice([3, 10, 100]), n) * rng.uniform(0.5, 3)
            res = ad.test(x)
            a2_sm, p_sm = normal_ad(x)  # statsmodels: A2 and the Table 4.9 p-value
            # statsmodels takes ln(1 - Phi(z)) as written: digits lost for far z, and inf
            # once Phi(z) rounds to 1 (t with 3 df); the project's log_ndtr stays finite
            if not math.isfinite(a2_sm):
                assert math.isfinite(res.statistic) and res.p_value < 1e-10
                continue
            assert res.statistic == pytest.approx(a2_sm, rel=1e-6)
            if res.modified > ad.TABLE_LIMIT or 0.6 <= res.modified < 0.6038:
                continue  # beyond the table, or in the held step (below)
            assert res.p_value == pytest.approx(p_sm, rel=1e-6)
            assert res.method == ad.TABLE
            checked += 1
    assert checked > 100


def test_step_at_point_six_is_held_not_risen():
    # Table 4.9's last branch starts 0.0025 above the one before it at A2* = 0.6.
    left = math.exp(0.9177 - 4.279 * 0.6 - 1.38 * 0.36)
    right = math.exp(1.2937 - 5.709 * 0.6 + 0.0186 * 0.36)
    assert right > left
    assert ad.p_value(0.6)[0] == pytest.approx(left, rel=1e-12)
    assert ad.p_value(0.6037)[0] == pytest.approx(left, rel=1e-12)
    assert ad.p_value(0.62)[0] == pytest.approx(math.exp(1.2937 - 5.709 * 0.62 + 0.0186 * 0.62**2))


def test_published_formula_turns_back_where_the_tail_does_not():
    def published(a):
        return math.exp(1.2937 - 5.709 * a + 0.0186 * a * a)

    assert published(300.0) > published(153.0)  # the source formula alone rises again
    assert ad.p_value(300.0)[0] <= ad.p_value(153.0)[0] <= ad.p_value(100.0)[0]
    assert ad.p_value(100.0)[0] < 1e-200


def test_floor_is_reported_as_a_bound():
    p, method, bound = ad.p_value(150.0)
    assert (p, method, bound) == (ad.P_FLOOR, ad.FLOOR, True)
    assert ad.p_value(ad.FLOOR_FROM - 1e-9)[2]  # already below the floor where the search stops


@settings(max_examples=300, deadline=None, derandomize=True)
@given(st.floats(0.0, 1e6), st.floats(0.0, 1e6))
def test_p_is_monotone_non_increasing_over_the_whole_range(a, b):
    lo, hi = sorted((a, b))
    p_lo, p_hi = ad.p_value(lo)[0], ad.p_value(hi)[0]
    assert ad.P_FLOOR <= p_hi <= p_lo <= 1.0


@pytest.mark.slow
def test_p_is_monotone_on_a_fine_grid_across_every_junction():
    grid = np.concatenate([np.linspace(0, 2, 20001), np.linspace(2, 250, 5001)])
    p = np.array([ad.p_value(a)[0] for a in grid])
    assert np.all(np.diff(p) <= 0)
    assert p[0] <= 1.0 and p[-1] == ad.P_FLOOR


@pytest.mark.parametrize("n", [3500, 4000, 20000])
@pytest.mark.parametrize("shape", ["lognormal", "exponential"])
def test_large_skewed_samples_get_a_tiny_p(n, shape):
    rng = np.random.default_rng(n)
    x = rng.lognormal(0, 1, n) if shape == "lognormal" else rng.exponential(1.0, n)
    res = diagnostics.normality("g", x)
    assert res.anderson_p is not None and res.anderson_p < 1e-10
    assert res.anderson_p >= ad.P_FLOOR


def test_normal_sample_keeps_a_table_p():
    x = np.random.default_rng(5).normal(0, 1, 400)
    res = diagnostics.normality("g", x)
    assert res.anderson_p > 0.01 and res.anderson_p_method == ad.TABLE


def test_underflowed_dagostino_p_is_reported_at_the_floor_with_a_note():
    x = np.random.default_rng(11).lognormal(0, 1.5, 20000)
    k2 = stats.normaltest(x)  # scipy: the chi-square tail exp(-K2/2) underflows to 0
    assert k2.pvalue == 0.0
    res = diagnostics.normality("g", x)
    assert res.dagostino_k2 == pytest.approx(k2.statistic, rel=1e-12)
    assert res.dagostino_p == ad.P_FLOOR
    assert any(note.startswith("D'Agostino-Pearson p is below") for note in res.notes)
