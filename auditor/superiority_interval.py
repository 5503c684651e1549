"""A score interval for the probability of superiority A that agrees with the Mann-Whitney test
and does not collapse when the groups separate.

Direction is A relative to B: A = P(X_A > X_B) + P(X_A = X_B)/2, estimated by A-hat = U_A /
(n_A n_B) (`ranks.prob_superiority_values`). The interval is the set of values phi that the
Mann-Whitney z statistic, with its variance taken under a model indexed by phi, does not reject
(Fay & Malinovsky 2018, Statistics in Medicine 37:3991-4006, asymptotic version):

    { phi : |A-hat - phi| <= c sqrt(V(phi)) },

    V(phi) = [phi (1 - phi) + (n_A - 1)(Q1 - phi^2) + (n_B - 1)(Q2 - phi^2)] / (n_A n_B),

the variance of the two-sample U statistic A-hat (Hoeffding 1948; Lehmann 1975, Nonparametrics,
ch. 2) evaluated when the two distributions follow the proportional odds model, a logistic shift
on some monotone scale of the outcome, with P(X_A > X_B) = phi:
  Q1 = P(X_A1 > X_B and X_A2 > X_B)  two A values above one B value, weight n_A - 1
                                     (pairs (i, j), (i', j) share the B value),
  Q2 = P(X_A > X_B1 and X_A > X_B2)  one A value above two B values, weight n_B - 1.
Under this model Q1 = Q2 at every phi (the logistic law is symmetric), so V(phi) = V(1 - phi)
and the roles cannot be mixed up in effect; both are still computed, each from its own integral.
At phi = 1/2 the model is the null (identical distributions), Q1 = Q2 = 1/3 and V is the
Mann-Whitney null variance (n_A + n_B + 1)/(12 n_A n_B). So with c = z_{1 - alpha/2} the interval
excludes 1/2 exactly when the two-sided normal-approximation Mann-Whitney test without continuity
correction rejects at alpha = 1 - level. Because V(phi) shrinks to 0 only as phi reaches 0 or 1,
a sample with A-hat = 1 gives [phi_L, 1] with phi_L < 1, not the single point 1 a Wald interval
with a plug-in variance gives.

Swapping A and B maps the interval to its complement [1 - high, 1 - low]:

>>> import numpy as np
>>> a, b = np.array([3., 5, 7, 9, 11]), np.array([1., 2, 4, 6])
>>> ab = superiority_score_interval(a, b, 0.95)
>>> ba = superiority_score_interval(b, a, 0.95)
>>> bool(np.isclose(ab.low, 1 - ba.high) and np.isclose(ab.high, 1 - ba.low))
True

Ties (our choice, written down here): the proportional odds model is continuous, so it has no
ties. With tied data the model variance is multiplied by the tie-correction factor
rho = 1 - sum(t^3 - t) / (N^3 - N) (t the sizes of the tie blocks of the pooled sample, N =
n_A + n_B), V_ties(phi) = rho V(phi). At phi = 1/2 this is exactly the tie-corrected null variance
of `ranks.mann_whitney_variance` divided by (n_A n_B)^2, so the interval excludes 1/2 exactly when
the tie-corrected z test that `significance.mann_whitney` runs on tied data rejects. Away from 1/2
the scaling is a heuristic (ties shrink the variance of mid-rank statistics by about that factor
near the null) that keeps the variance function continuous through 1/2; it is not offered as the
treatment of ties in Fay & Malinovsky (2018), which is not reproduced here.

Undefined input gives None: a group with no values, or every pooled value tied (the z statistic
is then undefined). Malformed arguments (not 1-D, non-finite values, a level outside (0, 1), a
critical value that is not positive) raise ValueError.

Numerics: Q1 and Q2 come from scipy.integrate.quad on the logistic scale (B ~ Logistic(0, 1),
A ~ Logistic(theta, 1)), with the integrands divided by exp(theta) and formed from log-densities,
so that phi near 0 or 1 (within 1e-12 and beyond) keeps full relative precision; phi itself has a
closed form in theta. For phi above 1/2 the complementary (small) events are integrated and the
mirror symmetry of the logistic distribution is used (see `_small_side`). Results are cached per
phi, so repeated intervals on the same lattice of A-hat values cost almost nothing.
"""

from __future__ import annotations

import functools
import math
from fractions import Fraction

import numpy as np
from scipy import integrate, optimize, special

from auditor import ranks
from auditor.results import Interval

METHOD = "proportional_odds_score"
EDGE = 1e-12  # brackets for the endpoints stop this close to 0 and 1
EXACT_COUNT_MAX_PAIRS = 10_000  # exact integer null counts up to n_A n_B = 10^4, floats beyond
_PAD = 32.0  # the scaled integrands are integrated over [theta - 32, 32]
_XTOL = 1e-13  # absolute tolerance of the endpoints


# ------------------------------------------------------------------ the logistic-shift model


def _expm1_minus_x(t: float) -> float:
    """e^t - 1 - t, by its series sum_{k >= 2} t^k / k! when |t| < 1 (no cancellation)."""
    if abs(t) >= 1.0:
        return math.expm1(t) - t
    term, total, k = t * t / 2.0, 0.0, 2
    while abs(term) > 1e-17 * abs(total) or total == 0.0:
        total += term
        k += 1
        term *= t / k
        if term == 0.0:
            break
    return total


def _phi_over_psi(theta: float) -> float:
    """phi(theta) / e^theta, where phi(theta) = P(X_A > X_B) for B ~ Logistic(0, 1) and
    A ~ Logistic(theta, 1). With psi = e^theta the closed form is
        phi = psi (psi - 1 - log psi) / (psi - 1)^2
    (integrate 1 - G(u) = psi (1 - u) / (psi + (1 - psi) u) over u in (0, 1), G the CDF of A on
    B's probability scale), so phi / psi = (e^theta - 1 - theta) / (e^theta - 1)^2; it tends to
    1/2 as theta -> 0."""
    if abs(theta) < 1e-5:  # series 1/2 - theta/3 + theta^2/12 + O(theta^3), error below 1e-16
        return 0.5 - theta / 3.0 + theta * theta / 12.0
    return _expm1_minus_x(theta) / math.expm1(theta) ** 2


@functools.lru_cache(maxsize=4096)
def _shift_of_small(s: float) -> float:
    """The theta <= 0 with phi(theta) = s, for 0 < s <= 1/2 (phi is increasing in theta).
    Solved on the log scale, log phi(theta) = theta + log(phi / psi), so tiny s is no harder."""
    if s == 0.5:
        return 0.0
    target = math.log(s)

    def gap(theta: float) -> float:
        return theta + math.log(_phi_over_psi(theta)) - target

    low = 2.0 * target - 2.0  # phi/psi < 1 + |theta| makes gap(low) < 0; checked all the same
    while gap(low) >= 0.0:
        low *= 2.0
    return optimize.brentq(gap, low, 0.0, xtol=1e-15, rtol=4 * np.finfo(float).eps)


def logistic_shift(phi: float) -> float:
    """The location shift theta of the proportional odds (logistic shift) model with
    P(X_A > X_B) = phi: B ~ Logistic(0, 1), A ~ Logistic(theta, 1); theta = -inf or inf at
    phi = 0 or 1. Odd about 1/2: theta(1 - phi) = -theta(phi)."""
    phi = _check_phi(phi)
    if phi in (0.0, 1.0):
        return -math.inf if phi == 0.0 else math.inf
    if phi <= 0.5:
        return _shift_of_small(phi)
    return -_shift_of_small(1.0 - phi)


def _integral(integrand, theta: float) -> float:
    points = (theta, 0.0) if theta < 0.0 else (0.0,)
    value, _ = integrate.quad(integrand, theta - _PAD, _PAD, points=points, epsabs=0.0,
                              epsrel=1e-11, limit=200)
    return value


@functools.lru_cache(maxsize=4096)
def _small_side(s: float) -> tuple[float, float, float]:
    """(phi / psi, Q1 / psi, Q2 / psi) at the theta <= 0 where phi = s <= 1/2, psi = e^theta:

        Q1 = P(A1 > B, A2 > B) = integral f(x) S(x - theta)^2 dx,
        Q2 = P(A > B1, A > B2) = integral f(x - theta) F(x)^2 dx,

    F, f, S = 1 - F the standard logistic CDF, density and survival function. Each integrand is
    divided by psi and evaluated as exp(log f - 2 softplus(...) - theta), which keeps it of order
    1 whatever theta. It decays like e^{-|x|} or faster outside [theta, 0], so the line is cut to
    [theta - 32, 32] (the tails left out are below e^{-32}, 1.3e-14, of the integral), with theta
    and 0, where the integrand passes from one exponential regime to the next, as break points.
    (The substitution x -> theta - x turns one integrand into the other, so Q1 = Q2 exactly under
    this model; each is integrated on its own as a check that the variance does not rest on it.)

    For phi > 1/2 (theta > 0) the complementary events are small: by inclusion-exclusion
        Q1 = 1 - 2(1 - phi) + P(A1 < B, A2 < B),   Q2 = 1 - 2(1 - phi) + P(A < B1, A < B2),
    and reflecting every value (x -> -x maps Logistic(theta) to Logistic(-theta) and reverses the
    inequalities) gives P(A1 < B, A2 < B) at theta = Q1 at -theta, P(A < B1, A < B2) at theta =
    Q2 at -theta. Hence Q1 - phi^2 and Q2 - phi^2 are the same at phi and 1 - phi."""
    theta = _shift_of_small(s)
    exp, log1p = math.exp, math.log1p

    def q1(x: float) -> float:  # f(x) S(x - theta)^2 / psi
        z = x - theta
        return exp(-abs(x) - 2.0 * log1p(exp(-abs(x)))
                   - 2.0 * (max(z, 0.0) + log1p(exp(-abs(z)))) - theta)

    def q2(x: float) -> float:  # f(x - theta) F(x)^2 / psi
        z = x - theta
        return exp(-abs(z) - 2.0 * log1p(exp(-abs(z)))
                   - 2.0 * (max(-x, 0.0) + log1p(exp(-abs(x)))) - theta)

    return _phi_over_psi(theta), _integral(q1, theta), _integral(q2, theta)


def _excesses(s: float) -> tuple[float, float]:
    """(Q1 - phi^2, Q2 - phi^2) at phi = s <= 1/2, formed as psi (I - psi r^2) from the scaled
    integrals (no cancellation when phi is tiny)."""
    r, i1, i2 = _small_side(s)
    psi = math.exp(_shift_of_small(s))
    return psi * (i1 - psi * r * r), psi * (i2 - psi * r * r)


def three_observation_probabilities(phi: float) -> tuple[float, float]:
    """(Q1, Q2) under the proportional odds model with P(X_A > X_B) = phi:
    Q1 = P(two A values both above one B value), Q2 = P(one A value above two B values).

    Under this model Q1 = Q2 at every phi (reflect the values and swap the roles of the groups:
    the logistic distribution is symmetric); both are integrated separately all the same. At
    phi = 1/2, Q1 = Q2 = 1/3; at phi = 0 they are 0, at phi = 1 they are 1."""
    phi = _check_phi(phi)
    if phi in (0.0, 1.0):
        return phi, phi
    if phi == 0.5:
        return 1.0 / 3.0, 1.0 / 3.0
    s = min(phi, 1.0 - phi)
    _, i1, i2 = _small_side(s)
    psi = math.exp(_shift_of_small(s))
    if phi <= 0.5:
        return psi * i1, psi * i2
    return 1.0 - 2.0 * s + psi * i1, 1.0 - 2.0 * s + psi * i2


def proportional_odds_variance(phi: float, n_a: int, n_b: int) -> float:
    """Variance of A-hat when the groups follow the proportional odds model with
    P(X_A > X_B) = phi (Fay & Malinovsky 2018, asymptotic version):

        V(phi) = [phi (1 - phi) + (n_A - 1)(Q1 - phi^2) + (n_B - 1)(Q2 - phi^2)] / (n_A n_B),

    Q1, Q2 as `three_observation_probabilities`. V(1/2) = (n_A + n_B + 1) / (12 n_A n_B), the
    Mann-Whitney null variance (returned in that form); V(0) = V(1) = 0; V(phi) = V(1 - phi).
    No ties (see the module docstring for the tie scaling the interval applies)."""
    phi = _check_phi(phi)
    n_a, n_b = _check_size(n_a, "n_a"), _check_size(n_b, "n_b")
    if n_a < 1 or n_b < 1:
        raise ValueError(f"n_a = {n_a}, n_b = {n_b}: the variance needs at least one value in"
                         " each group; pass the two group sizes")
    if phi in (0.0, 1.0):
        return 0.0
    if phi == 0.5:
        return (n_a + n_b + 1) / (12.0 * n_a * n_b)
    e1, e2 = _excesses(min(phi, 1.0 - phi))
    return (phi * (1.0 - phi) + (n_a - 1) * e1 + (n_b - 1) * e2) / (float(n_a) * n_b)


# ------------------------------------------------------------------ the exact test's critical value


def _null_counts(m: int, n: int) -> list[int]:
    """Number of arrangements with U = u, u = 0..m n, for groups of m and n untied values: the
    coefficients of the Gaussian binomial prod_{i=1}^{m} (1 - q^(n+i)) / (1 - q^i)
    (Mann & Whitney 1947), in exact integers. m should be the smaller size (cost O(m^2 n))."""
    size = m * n + 1
    p = np.zeros(size, dtype=object)  # Python integers: no overflow, exact sums
    p[0] = 1
    for i in range(1, m + 1):
        q = p.copy()
        shift = n + i
        if shift < size:
            q[shift:] = q[shift:] - p[:size - shift]
        for start in range(i):
            q[start::i] = np.cumsum(q[start::i])
        p = q
    return [int(v) for v in p]


@functools.lru_cache(maxsize=256)
def exact_critical_value(n_a: int, n_b: int, level: float) -> float | None:
    """The critical value c for which |z| > c exactly when the two-sided exact Mann-Whitney test
    (no ties) has p < 1 - level, z = (U - n_A n_B / 2) / sqrt(n_A n_B (N + 1) / 12).

    The exact p of U = u is min(1, 2 P(U <= min(u, n_A n_B - u))) under the null distribution of
    U (Mann & Whitney 1947), the p scipy.stats.mannwhitneyu(method="exact") gives; it falls as
    |u - n_A n_B / 2| grows, so the rejected outcomes are those at distance d_r or more. c is the
    midpoint of the |z| of the largest non-rejected distance and of d_r, so no attainable |z|
    equals c. Probabilities are exact fractions (integer counts) up to n_A n_B = 10^4 and
    double-precision sums (`ranks.mann_whitney_null_pmf`) beyond.

    Returns math.inf when no outcome at these sizes reaches p < 1 - level (pass it on as
    `critical`: the interval is then [0, 1]); None when a group has no values. The value is for
    untied data: with ties the exact permutation distribution differs and this c does not match
    any exact test.
    """
    n_a, n_b = _check_size(n_a, "n_a"), _check_size(n_b, "n_b")
    level = _check_level(level)
    if n_a < 1 or n_b < 1:
        return None
    m, n = min(n_a, n_b), max(n_a, n_b)
    mn = m * n
    half = mn // 2  # outcomes u = 0..half cover every distance from the centre
    alpha = 1.0 - level
    if mn <= EXACT_COUNT_MAX_PAIRS:
        counts = _null_counts(m, n)
        total = sum(counts)
        a_frac = Fraction(alpha)
        cum, u_star = 0, -1
        for u in range(half + 1):
            cum += counts[u]
            if Fraction(2 * cum, total) < a_frac:
                u_star = u
            else:
                break
    else:
        cdf = np.cumsum(ranks.mann_whitney_null_pmf(m, n))[:half + 1]
        rejected = np.flatnonzero(2.0 * cdf < alpha)
        u_star = int(rejected[-1]) if rejected.size else -1
    if u_star < 0:
        return math.inf
    sd = math.sqrt(mn * (n_a + n_b + 1) / 12.0)
    return (mn / 2.0 - u_star - 0.5) / sd  # midway between distances mn/2 - u* and mn/2 - u* - 1


# ------------------------------------------------------------------ the interval


def _lower_end(a_hat: float, variance, half_var: float, c: float) -> float:
    """Smallest phi with a_hat - phi <= c sqrt(variance(phi)), the model variance at phi = 1/2
    being `half_var`. When a_hat > 1/2 the bracket is split at 1/2 by the sign there, so the
    endpoint falls on the side of 1/2 that the z test decides (at 1/2 the criterion is the test)."""
    if a_hat <= EDGE:
        return 0.0

    def gap(phi: float) -> float:
        return (a_hat - phi) - c * math.sqrt(half_var if phi == 0.5 else variance(phi))

    top = min(a_hat, 1.0 - EDGE)  # at a_hat = 1 the gap is 0 at phi = 1 (V(1) = 0)
    if _beyond_half(a_hat, half_var, c):  # the test rejects (gap(1/2) > 0): the end is above 1/2
        end = optimize.brentq(gap, 0.5, top, xtol=_XTOL)
        return end if end > 0.5 else math.nextafter(0.5, 1.0)
    top = min(a_hat, 0.5)
    if gap(EDGE) <= 0.0:  # the set reaches below EDGE (only for about 10^11 pairs or more)
        return 0.0
    return optimize.brentq(gap, EDGE, top, xtol=_XTOL)


def _pooled_ranks(a: np.ndarray, b: np.ndarray) -> tuple[float, np.ndarray]:
    """(A-hat, sizes of the pooled sample's tie blocks in increasing order of value) from one
    stable sort of the finite pooled sample, for non-empty groups.

    A tie block of t values starting at sorted position s (0-based) has mid-rank s + (t + 1)/2;
    A-hat = (R_A - n_A (n_A + 1)/2) / (n_A n_B), R_A the sum of A's mid-ranks (Mann & Whitney
    1947), which `ranks.prob_superiority_values` gives. The ranks are multiples of 1/2, so R_A
    is exact in any order of summation. The block sizes are those `np.unique(pooled,
    return_counts=True)` gives (-0.0 and 0.0 are one value)."""
    na, nb = a.size, b.size
    pooled = np.concatenate([a, b])
    order = np.argsort(pooled, kind="stable")
    ordered = pooled[order]
    new = np.empty(ordered.size, dtype=bool)
    new[0] = True
    np.not_equal(ordered[1:], ordered[:-1], out=new[1:])
    starts = np.flatnonzero(new)
    sizes = np.diff(np.append(starts, ordered.size))
    rank_of_block = starts + (sizes + 1) / 2.0
    rank_sum = float(np.sum(np.repeat(rank_of_block, sizes)[order < na]))
    return (rank_sum - na * (na + 1) / 2) / (na * nb), sizes


def _score_parts(a: np.ndarray, b: np.ndarray, pooled_ranks=None
                 ) -> tuple[float, float, float] | None:
    """(A-hat, rho, rho V(1/2)) of the score interval (`superiority_score_interval`), or None
    when a group is empty or every pooled value is tied (no interval). `pooled_ranks`: the
    samples' `_pooled_ranks`, when the caller has them."""
    if a.size == 0 or b.size == 0:
        return None
    a_hat, t = _pooled_ranks(a, b) if pooled_ranks is None else pooled_ranks
    if t.size == 1:
        return None
    na, nb = a.size, b.size
    mn = float(na) * nb
    t = t.astype(float)  # sizes of the tie blocks
    tie_term = float(np.sum(t**3 - t))
    var_u = float(ranks.mann_whitney_variance(na, nb, tie_term))
    rho = var_u / (mn * (na + nb + 1) / 12.0)
    return a_hat, rho, var_u / (mn * mn)  # rho V(1/2): the z test's variance of A-hat


def _beyond_half(a_hat: float, half_var: float, c: float) -> bool:
    """Whether the lower end of the score interval lies above 1/2: the test `_lower_end` applies
    at phi = 1/2 (the same expression, so the answer is the one the interval gives)."""
    return a_hat > 0.5 and (a_hat - 0.5) - c * math.sqrt(half_var) > 0.0


def score_interval_holds_half(a, b, level: float, *, critical: float | None = None,
                              pooled_ranks=None) -> bool | None:
    """Whether `superiority_score_interval(a, b, level, critical=critical)` contains 1/2, found
    without its ends: the interval is the set of phi the score test does not reject, split at
    1/2 by the test there (`_lower_end`), so it holds 1/2 exactly when neither end is pushed past
    1/2 by that test, i.e. when |A-hat - 1/2| <= c sqrt(rho V(1/2)) (the tie-corrected
    Mann-Whitney z test without continuity correction does not reject). None when there is no
    interval. One rank pass instead of two root searches over quadratures: the fragility search
    and the per-case recheck ask only this. `pooled_ranks`: see `_score_parts`."""
    a, b, level, c = _check_interval_arguments(a, b, level, critical)
    parts = _score_parts(a, b, pooled_ranks)
    if parts is None:
        return None
    a_hat, _, half_var = parts
    if math.isinf(c):
        return True
    return not (_beyond_half(a_hat, half_var, c) or _beyond_half(1.0 - a_hat, half_var, c))


def superiority_score_interval(a, b, level: float, *, critical: float | None = None
                               ) -> Interval | None:
    """Interval for A = P(X_A > X_B) + P(X_A = X_B)/2 compatible with the Mann-Whitney test
    (Fay & Malinovsky 2018, asymptotic version, no continuity correction):

        { phi : |A-hat - phi| <= c sqrt(rho V(phi)) },

    V as `proportional_odds_variance`, rho = 1 - sum(t^3 - t)/(N^3 - N) the tie-correction factor
    (1 without ties), c = z_{(1 + level)/2} unless `critical` is given. The two ends are the
    roots of A-hat - phi = +-c sqrt(rho V(phi)) (scipy.optimize.brentq); by the symmetry
    V(phi) = V(1 - phi) the upper end is 1 minus the lower end for 1 - A-hat. With A-hat = 1 the
    interval is [phi_L, 1], with A-hat = 0 it is [0, phi_U]; it always lies in [0, 1].

    It excludes 1/2 exactly when |z| > c, z the tie-corrected Mann-Whitney z without continuity
    correction (`ranks.mann_whitney_z_values`): with the default c, when the two-sided
    normal-approximation test rejects at 1 - level; with critical=exact_critical_value(n_A,
    n_B, level), when the exact test rejects (untied data).

    Assumes independent observations. The proportional odds model fixes the variance at each phi;
    coverage under other shapes is approximate (close for shifts of common continuous laws).
    Returns None when a group is empty or every pooled value is tied.
    """
    a, b, level, c = _check_interval_arguments(a, b, level, critical)
    parts = _score_parts(a, b)
    if parts is None:
        return None
    a_hat, rho, half_var = parts
    na, nb = a.size, b.size

    def variance(phi: float) -> float:
        return rho * proportional_odds_variance(phi, na, nb)

    if math.isinf(c):
        low, high = 0.0, 1.0
    else:
        low = _lower_end(a_hat, variance, half_var, c)
        high = 1.0 - _lower_end(1.0 - a_hat, variance, half_var, c)
    if critical is None:
        note = ("compatible with the two-sided Mann-Whitney z test (tie-corrected, no continuity"
                " correction): excludes 1/2 exactly when that test rejects at"
                f" {1 - level:.4g}")
    else:
        note = (f"compatible with the Mann-Whitney test at critical value |z| > {c:.6g}:"
                " excludes 1/2 exactly when |z| exceeds it")
    if rho < 1.0:
        note += f"; ties: model variance scaled by the tie correction {rho:.6g}"
    return Interval(METHOD, low, high, level, note)


# ------------------------------------------------------------------ argument checks


def _check_phi(phi) -> float:
    value = float(phi)
    if not 0.0 <= value <= 1.0:
        raise ValueError(f"phi = {phi!r} is not a probability: it must lie in [0, 1]; pass"
                         " P(X_A > X_B) + P(X_A = X_B)/2")
    return value


def _check_size(n, what: str) -> int:
    if isinstance(n, bool) or int(n) != n or n < 0:
        raise ValueError(f"{what} = {n!r}: a group size must be a whole number of at least 0;"
                         " pass the number of values in the group")
    return int(n)


def _check_level(level) -> float:
    if isinstance(level, bool) or not 0.0 < float(level) < 1.0:
        raise ValueError(f"level = {level!r}: the confidence level must lie strictly between 0"
                         " and 1; use for example 0.95")
    return float(level)


def _check_interval_arguments(a, b, level, critical):
    arrays = []
    for values, what in ((a, "group a"), (b, "group b")):
        arr = np.asarray(values, dtype=float)
        if arr.ndim != 1:
            raise ValueError(f"{what} has shape {arr.shape}: a 1-D array of values is required;"
                             " pass one group's values as a flat sequence")
        if not np.all(np.isfinite(arr)):
            raise ValueError(f"{what} contains missing or non-finite values: every value must be"
                             " a finite number; remove them before computing the interval")
        arrays.append(arr)
    level = _check_level(level)
    if critical is None:
        c = float(special.ndtri(0.5 + level / 2.0))
    else:
        if isinstance(critical, bool) or not float(critical) > 0.0:
            raise ValueError(f"critical = {critical!r}: the critical value must be a positive"
                             " number (math.inf for an interval that never excludes 1/2); leave"
                             " it out for the normal quantile of the level")
        c = float(critical)
    return arrays[0], arrays[1], level, c


# ------------------------------------------------------------------ as the audit reports it


def mann_whitney_is_exact(n_a: int, n_b: int, untied: bool) -> bool:
    """Whether the tool's Mann-Whitney test (`significance.mann_whitney`) uses the exact null
    distribution: no ties and n_A n_B <= ranks.EXACT_MAX_PAIRS."""
    return untied and n_a * n_b <= ranks.EXACT_MAX_PAIRS


def _matched_critical(a: np.ndarray, b: np.ndarray, level: float,
                      untied: bool | None = None) -> float | None:
    """The critical value of the Mann-Whitney test the tool reports on these groups: the exact
    test's (`exact_critical_value`) when that test is exact, None (the normal quantile)
    otherwise. `untied`: whether no pooled value is tied, when the caller knows."""
    if untied is None:
        pooled = np.concatenate([a, b])
        untied = np.unique(pooled).size == pooled.size
    if mann_whitney_is_exact(a.size, b.size, untied):
        return exact_critical_value(a.size, b.size, level)
    return None


def matched_interval(a: np.ndarray, b: np.ndarray, level: float) -> Interval | None:
    """The proportional-odds score interval of A with the critical value of the Mann-Whitney test
    the tool reports (`_matched_critical`), so it excludes 1/2 exactly when the reported test
    rejects."""
    if a.size == 0 or b.size == 0:
        return None
    return superiority_score_interval(a, b, level, critical=_matched_critical(a, b, level))


def matched_holds_half(a: np.ndarray, b: np.ndarray, level: float) -> bool | None:
    """Whether `matched_interval(a, b, level)` contains 1/2 (`score_interval_holds_half` with the
    same critical value); None when there is no interval. The pooled sample is sorted once, for
    both the exactness of the test (no ties) and the score test's parts."""
    if a.size == 0 or b.size == 0:
        return None
    checked_a, checked_b, _, _ = _check_interval_arguments(a, b, level, None)
    pooled_ranks = _pooled_ranks(checked_a, checked_b)
    critical = _matched_critical(a, b, level, untied=bool(np.all(pooled_ranks[1] == 1)))
    return score_interval_holds_half(checked_a, checked_b, level, critical=critical,
                                     pooled_ranks=pooled_ranks)


def carried(interval: Interval | None, slope: float, at_half: float, bounds: tuple[float, float],
            method: str) -> Interval | None:
    """An interval of A carried to an index that is the increasing linear function
    at_half + slope (A - 1/2) of A on these data (Cliff's delta and the rank-biserial r:
    slope 2; r = Z/sqrt(N): the sample's slope, `r_from_z_slope`), clipped to its bounds."""
    if interval is None:
        return None
    lo, hi = bounds

    def carry(v: float) -> float:
        return min(max(at_half + slope * (v - 0.5), lo), hi)

    return Interval(method, carry(interval.low), carry(interval.high), interval.level,
                    interval.note)


def r_from_z_slope(a: np.ndarray, b: np.ndarray) -> float | None:
    """k with r = Z/sqrt(N) = k (A - 1/2) for these groups: Z = (A - 1/2) n_A n_B / sigma_U with
    the tie-corrected sigma_U (`ranks.mann_whitney_variance`), so k = n_A n_B / (sigma_U
    sqrt(N)). None when every value is tied."""
    pooled = np.concatenate([a, b])
    t = np.unique(pooled, return_counts=True)[1].astype(float)
    var_u = float(ranks.mann_whitney_variance(a.size, b.size, float(np.sum(t**3 - t))))
    if not var_u > 0:
        return None
    return float(a.size) * b.size / (math.sqrt(var_u) * math.sqrt(a.size + b.size))


def dominance_extras(name: str):
    """For the registry: (a, b, level) -> the intervals reported beside the index `name`
    (prob_superiority, cliff_delta, rank_biserial, r_from_z): the test-matched proportional-odds
    score interval, carried from A where the index is a function of A."""
    def extras(a, b, level) -> tuple[Interval, ...]:
        iv = matched_interval(a, b, level)
        if iv is None:
            return ()
        if name == "prob_superiority":
            return (iv,)
        if name in ("cliff_delta", "rank_biserial"):
            return (carried(iv, 2.0, 0.0, (-1.0, 1.0), METHOD + "_via_A"),)
        slope = r_from_z_slope(a, b)
        return () if slope is None else (carried(iv, slope, 0.0, (-1.0, 1.0),
                                                 METHOD + "_via_A"),)
    return extras


def dominance_holds_null(name: str):
    """For the registry: (a, b, level, method) -> whether the interval of `method` that
    `dominance_extras(name)` reports contains the index's no-effect value, or None (another
    method, or no interval: the caller computes it). The carried intervals are increasing maps
    of A's with 1/2 going to 0 (clipping to [-1, 1] keeps 0 inside), so each holds its no-effect
    value exactly when A's holds 1/2."""
    method = METHOD if name == "prob_superiority" else METHOD + "_via_A"

    def holds_null(a, b, level, asked: str) -> bool | None:
        if asked != method:
            return None
        if name == "r_from_z" and r_from_z_slope(a, b) is None:
            return None
        return matched_holds_half(a, b, level)
    return holds_null
