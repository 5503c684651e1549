"""Intervals for the paired sign and signed-rank indices that agree with the tests beside them and
do not shrink to a point when every difference has the same sign.

Direction: d = first - second condition. Each function takes the (already rounded) differences d,
drops the zero ones where its index does, and returns an `Interval`, or None when every difference
is zero (the index is then undefined). Swapping the conditions negates d; the intervals then turn
into their mirror images (rank-biserial r and r = z / sqrt(N): [L, U] -> [-U, -L]; PS_dep:
[L, U] -> [1 - U, 1 - L]):

>>> import numpy as np
>>> d = np.array([1.5, 0.4, -0.2, 2.0, 0.9, 1.1])
>>> a, b = signed_rank_score_interval(d, 0.95), signed_rank_score_interval(-d, 0.95)
>>> bool(np.isclose(a.low, -b.high) and np.isclose(a.high, -b.low))
True

Three intervals:

* `sign_test_interval`: PS_dep = (N+ + N0/2) / N by a score interval with the trinomial variance
  whose critical value is the exact sign test's.
* `signed_rank_score_interval`: the matched-pairs rank-biserial correlation
  r = (R+ - R-) / (R+ + R-) inverted from its exact mean and variance under a normal shift model,
  a score-type interval in the manner of Fay & Malinovsky (2018, two groups) for one sample.
* `r_from_z_interval`: r = z / sqrt(N), a fixed linear function of the rank-biserial r for the
  sample's N and tie pattern, carried through that map.

Each excludes the null value exactly when its test rejects at 1 - level: the exact two-sided sign
test, and the signed-rank test (normal approximation with tie correction and no continuity
correction, or, with `critical=exact_signed_rank_critical(n, level)`, the exact untied test).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import optimize, special

from auditor.paired import (EXACT_MAX_N, signed_rank_parts, sign_pattern_pmf,
                            signed_rank_null_pmf)
from auditor.ranks import midranks
from auditor.results import Interval

SQRT2 = math.sqrt(2.0)
MU_SEARCH_MAX = 32.0  # search bound for mu: Phi(-32) is about 1e-225, still a normal double


# ------------------------------------------------------------------ argument checks


def _check_differences(d) -> np.ndarray:
    arr = np.asarray(d, dtype=float)
    if arr.ndim != 1:
        raise ValueError(f"differences d must be a 1-D array, got shape {arr.shape}; pass"
                         " d = first - second for one pair per entry")
    if not np.all(np.isfinite(arr)):
        raise ValueError("differences d contain missing or non-finite values; remove those"
                         " pairs before computing an interval")
    return arr


def _check_level(level) -> float:
    if isinstance(level, bool) or not isinstance(level, (int, float, np.floating)) \
            or not 0.0 < float(level) < 1.0:
        raise ValueError(f"level={level!r}: the confidence level must be a number strictly"
                         " between 0 and 1, for example 0.95")
    return float(level)


def _check_critical(critical, level: float) -> float:
    if critical is None:
        return float(special.ndtri(0.5 + level / 2.0))
    if isinstance(critical, bool) or not isinstance(critical, (int, float, np.floating)) \
            or math.isnan(float(critical)) or float(critical) <= 0.0:
        raise ValueError(f"critical={critical!r}: the critical value must be a positive number"
                         " (or infinity, or None for the normal quantile z_(1 - alpha/2))")
    return float(critical)


# ------------------------------------------------------------------ sign test: PS_dep


def clopper_pearson(successes: int, trials: int, level: float) -> tuple[float, float]:
    """Clopper & Pearson (1934) interval for a binomial proportion from `successes` of `trials`:
    low = B^-1(alpha/2; x, m - x + 1) (0 when x = 0), high = B^-1(1 - alpha/2; x + 1, m - x)
    (1 when x = m), B^-1 the inverse regularised incomplete beta function, alpha = 1 - level.

    It is the set of p that neither one-sided exact binomial test at alpha/2 rejects, so
    P(X >= x | low) = alpha/2 and P(X <= x | high) = alpha/2."""
    x, m = int(successes), int(trials)
    alpha = 1.0 - level
    low = 0.0 if x == 0 else float(special.betaincinv(x, m - x + 1, alpha / 2.0))
    high = 1.0 if x == m else float(special.betaincinv(x + 1, m - x, 1.0 - alpha / 2.0))
    return low, high


def exact_sign_critical(m: int, level: float) -> float | None:
    """Critical value c such that |z| > c, z = (N+ - N-) / sqrt(m), exactly when the exact
    two-sided sign test of m non-zero differences rejects at 1 - level (p < 1 - level,
    p = min(1, 2 min tail) of Binomial(m, 1/2), as scipy.stats.binomtest gives it). The midpoint
    between the largest |z| kept and the smallest rejected; infinity when no count is rejected;
    None when m < 1."""
    level = _check_level(level)
    m = int(m)
    if m < 1:
        return None
    x = np.arange(m + 1)
    lower = special.bdtr(x, m, 0.5)  # P(X <= x)
    upper = special.bdtr(m - x, m, 0.5)  # P(X >= x) by symmetry
    p = np.minimum(1.0, 2.0 * np.minimum(lower, upper))
    distance = np.abs(2 * x - m) / math.sqrt(m)  # |N+ - N-| / sqrt(m)
    rejected = p < 1.0 - level
    if not np.any(rejected):
        return math.inf
    return 0.5 * (float(np.max(distance[~rejected])) + float(np.min(distance[rejected])))


def sign_test_interval(d, level: float) -> Interval | None:
    """Score interval for PS_dep = P(D > 0) + P(D = 0)/2 that agrees with the exact sign test.

    Each participant contributes 1 (D > 0), 1/2 (D = 0) or 0 (D < 0), so PS_dep-hat is a
    trinomial mean with variance [PS(1 - PS) - p0/4] / N, p0 = P(D = 0). The interval uses the
    variance (1 - z0) PS(1 - PS) / N, z0 = N0/N the observed share of zeros, in the Wilson-type
    score set (Wilson 1927)

        { psi : (PS_dep-hat - psi)^2 <= c^2 (1 - z0) psi (1 - psi) / N },

    the roots of a quadratic. That variance equals the trinomial one at psi = 1/2 and is larger
    elsewhere (PS(1 - PS) <= 1/4), so the interval errs on the wide side away from no effect,
    and stays positive up to the bounds, so the interval has width when every non-zero difference
    has one sign. At psi = 1/2 the inequality reads |N+ - N-| / sqrt(N+ + N-) <= c, the sign
    test's z, and c is the exact sign test's critical value in that scale
    (`exact_sign_critical`): the interval excludes 1/2 exactly when the exact two-sided sign test
    (scipy.stats.binomtest(N+, N+ + N-, 1/2)) has p < 1 - level. When the exact test can never
    reject (few non-zero differences) the interval is [0, 1].

    Assumes independent participants only. Returns None when every difference is zero.
    """
    d, level = _check_differences(d), _check_level(level)
    n = d.size
    pos, neg = int(np.sum(d > 0)), int(np.sum(d < 0))
    zero, m = n - pos - neg, pos + neg
    if m == 0:
        return None
    c = exact_sign_critical(m, level)
    note = (f"score interval, variance (1 - {zero}/{n}) psi (1 - psi) / {n}; critical value"
            f" {c:.6g} of the exact sign test of {m} non-zero differences")
    if not math.isfinite(c):
        return Interval("sign_test_score", 0.0, 1.0, level,
                        note + ": the test cannot reject with so few signs")
    est = (pos + 0.5 * zero) / n
    k = c * c * (m / n) / n
    # (1 + k) psi^2 - (2 est + k) psi + est^2 = 0
    a2, a1, a0 = 1.0 + k, -(2.0 * est + k), est * est
    root = math.sqrt(max(a1 * a1 - 4.0 * a2 * a0, 0.0))
    low, high = (-a1 - root) / (2.0 * a2), (-a1 + root) / (2.0 * a2)
    return Interval("sign_test_score", min(max(0.0, low), est), max(min(1.0, high), est), level,
                    note)


# ------------------------------------------------------------------ signed ranks: normal model


def walsh_probabilities(mu):
    """Sign probabilities of one, two and three differences D ~ N(mu, 1), independent:

    p1 = P(D1 > 0)                     = Phi(mu)
    p2 = P(D1 + D2 > 0)                = Phi(sqrt(2) mu)
    p3 = P(D1 > 0, D1 + D2 > 0)        = (p1^2 + p2) / 2
    p4 = P(D1 + D2 > 0, D1 + D3 > 0)   = Phi2(sqrt(2) mu, sqrt(2) mu; 1/2)
                                       = Phi(sqrt(2) mu) - 2 T(sqrt(2) mu, 1/sqrt(3))

    p3: D1 and D2 are exchangeable, so 2 p3 = E[(1(D1 > 0) + 1(D2 > 0)) 1(D1 + D2 > 0)]; a positive
    sum has both or exactly one of D1, D2 positive, and both positive implies a positive sum, so
    2 p3 = 2 p1^2 + (p2 - p1^2). This holds for any continuous distribution. p4: the two sums have
    correlation 1/2; Phi2(h, h; rho) = Phi(h) - 2 T(h, sqrt((1 - rho)/(1 + rho))) with Owen's
    T function (Owen 1956, his bivariate formula with h = k; cited from memory, checked in the
    tests against scipy). At mu = 0: 1/2, 1/2, 3/8, 1/3."""
    mu = np.asarray(mu, dtype=float)
    p1 = special.ndtr(mu)
    p2 = special.ndtr(SQRT2 * mu)
    p3 = (p1 * p1 + p2) / 2.0
    p4 = p2 - 2.0 * special.owens_t(SQRT2 * mu, 1.0 / math.sqrt(3.0))
    return p1, p2, p3, p4


def signed_rank_mean(n: int, mu):
    """E[T+] = n p1 + n(n - 1)/2 p2 for T+ = sum_{i <= j} 1(D_i + D_j > 0), the number of positive
    Walsh averages, which equals the signed-rank sum R+ when no |D| is tied (Tukey 1949)."""
    p1, p2, _, _ = walsh_probabilities(mu)
    return n * p1 + 0.5 * n * (n - 1) * p2


def signed_rank_variance(n: int, mu):
    """Var(T+) for n independent differences N(mu, 1), exact:

    Var(T+) = n p1 (1 - p1) + n(n-1)/2 p2 (1 - p2) + n(n-1)(n-2) (p4 - p2^2)
              + 2 n(n-1) (p3 - p1 p2)

    T+ = A + B, A = sum_i 1(D_i > 0), B = sum_{i<j} 1(D_i + D_j > 0). Var(A) is binomial. Two
    distinct pairs {i, j}, {k, l} are dependent only when they share one index: there are
    n(n-1)(n-2) ordered such couples, each of covariance p4 - p2^2. A term 1(D_i > 0) and a pair
    are dependent only when i is in the pair: 2 x n(n-1)/2 couples, covariance p3 - p1 p2, counted
    twice in Var(A + B). With p3 = (p1^2 + p2)/2 (`walsh_probabilities`) the last two pair terms
    equal n(n-1)/2 [2 (p1 - p2)^2 + 3 p2 (1 - p2)], the form of Lehmann (1975, Nonparametrics,
    ch. 4; cited from memory). At mu = 0 it is n(n + 1)(2n + 1)/24.

    Var(T+) = Var(T-) because T+ + T- = n(n+1)/2, so the variance is even in mu; it is computed at
    -|mu|, where the probabilities are small and their products do not cancel."""
    p1, p2, p3, p4 = walsh_probabilities(-np.abs(np.asarray(mu, dtype=float)))
    var = (n * p1 * (1.0 - p1) + 0.5 * n * (n - 1) * p2 * (1.0 - p2)
           + n * (n - 1) * (n - 2) * (p4 - p2 * p2) + 2.0 * n * (n - 1) * (p3 - p1 * p2))
    return np.maximum(var, 0.0)


def _gap_to_one(n: int, mu):
    """1 - rho_n(mu) = [2 erfc(mu / sqrt 2) + (n - 1) erfc(mu)] / (n + 1), accurate for mu > 0
    where it is small."""
    mu = np.asarray(mu, dtype=float)
    return (2.0 * special.erfc(mu / SQRT2) + (n - 1) * special.erfc(mu)) / (n + 1)


def expected_rank_biserial(n: int, mu):
    """rho_n(mu) = E[r-hat] for n differences N(mu, 1), r-hat = 2 T+ / S - 1, S = n(n+1)/2:

    rho_n(mu) = [2 erf(mu / sqrt 2) + (n - 1) erf(mu)] / (n + 1)

    (from E[T+], `signed_rank_mean`). Odd, strictly increasing from -1 to 1; for n = 1 it is
    2 Phi(mu) - 1, and as n grows it tends to erf(mu) = 2 P(D1 + D2 > 0) - 1."""
    mu = np.asarray(mu, dtype=float)
    return (2.0 * special.erf(mu / SQRT2) + (n - 1) * special.erf(mu)) / (n + 1)


def rank_biserial_variance(n: int, mu):
    """V_n(mu) = Var(r-hat) = 4 Var(T+) / S^2, S = n(n + 1)/2 (`signed_rank_variance`)."""
    s = 0.5 * n * (n + 1)
    return 4.0 * signed_rank_variance(n, mu) / (s * s)


def null_signed_rank_variance(n: int, tie_term: float = 0.0) -> float:
    """Var0(T+) = n(n+1)(2n+1)/24 - sum(t^3 - t)/48 over tie blocks of |d| (mid-ranks), the
    tie-corrected null variance of the signed-rank sum (as `paired.wilcoxon_z_values`)."""
    n = float(n)
    return n * (n + 1) * (2 * n + 1) / 24.0 - float(tie_term) / 48.0


def tie_variance_factor(n: int, tie_term: float) -> float:
    """lambda = Var0 with ties / Var0 without ties, in (0, 1]; 1 when no |d| is tied."""
    return null_signed_rank_variance(n, tie_term) / null_signed_rank_variance(n)


def exact_signed_rank_critical(n: int, level: float) -> float | None:
    """Critical value c such that |z| > c exactly when the exact untied signed-rank test of n
    non-zero differences rejects: z = (T+ - n(n+1)/4) / sqrt(n(n+1)(2n+1)/24), exact two-sided
    p = min(1, 2 min(P(T+ <= t), P(T+ >= t))) under Wilcoxon's null distribution
    (`paired.signed_rank_null_pmf`), rejection when p < 1 - level.

    The null distribution is symmetric about n(n+1)/4, so p falls as |t - n(n+1)/4| grows; c is
    the midpoint between the largest |z| not rejected and the smallest |z| rejected, which keeps
    the decision away from rounding. Infinity when no attainable T+ is rejected (n <= 5 at
    level 0.95): the interval is then all of [-1, 1], as the test never rejects.

    None when n < 1 (no differences) or n > 50 (`paired.EXACT_MAX_N`: beyond it the tool's
    signed-rank test is the normal approximation, whose critical value is the default). Only for
    untied differences: with tied |d| the exact test conditions on the mid-ranks."""
    level = _check_level(level)
    if isinstance(n, bool) or int(n) != n:
        raise ValueError(f"n={n!r}: the number of non-zero differences must be a whole number")
    n = int(n)
    if n < 0:
        raise ValueError(f"n={n}: the number of non-zero differences cannot be negative")
    if n < 1 or n > EXACT_MAX_N:
        return None
    pmf = signed_rank_null_pmf(n)
    cdf = np.cumsum(pmf)
    sf = np.cumsum(pmf[::-1])[::-1]
    p = np.minimum(1.0, 2.0 * np.minimum(cdf, sf))
    s = n * (n + 1) / 2.0
    distance = np.abs(np.arange(pmf.size) - s / 2.0)
    rejected = p < 1.0 - level
    if not np.any(rejected):
        return math.inf
    kept_max = float(np.max(distance[~rejected]))
    rejected_min = float(np.min(distance[rejected]))
    return 0.5 * (kept_max + rejected_min) / math.sqrt(null_signed_rank_variance(n))


def exact_signed_rank_critical_given(nonzero, level: float) -> float | None:
    """Critical value c such that |z| > c exactly when the tool's exact signed-rank test rejects
    at 1 - level, given the mid-ranks of these non-zero differences (with or without ties):
    z = (T+ - S/2) / sqrt(sum r_i^2 / 4), the tie-corrected z, and the exact p of
    `significance.signed_rank_exact_p` (the distribution of T+ over the 2^n sign patterns of the
    mid-ranks, symmetric about S/2). The midpoint between the largest |z| kept and the smallest
    rejected; infinity when no sign pattern is rejected; None when there are no non-zero
    differences or more than EXACT_MAX_N (the test is then the normal approximation, whose
    critical value is the default). Without ties it equals `exact_signed_rank_critical`."""
    level = _check_level(level)
    nonzero = np.asarray(nonzero, dtype=float)
    n = nonzero.size
    if n < 1 or n > EXACT_MAX_N:
        return None
    doubled = np.rint(2.0 * midranks(np.abs(nonzero))).astype(np.int64)
    pmf = sign_pattern_pmf(doubled)
    size = pmf.size
    attainable = np.flatnonzero(pmf > 0)
    cdf, sf = np.cumsum(pmf), np.cumsum(pmf[::-1])[::-1]
    p = np.minimum(1.0, 2.0 * np.minimum(cdf, sf))[attainable]
    centre = (size - 1) / 2.0  # S in doubled units is size - 1; T+ centre S/2
    distance = np.abs(attainable - centre) / 2.0  # |T+ - S/2|
    rejected = p < 1.0 - level
    if not np.any(rejected):
        return math.inf
    sd = math.sqrt(float(np.sum((doubled / 2.0) ** 2)) / 4.0)
    return 0.5 * (float(np.max(distance[~rejected])) + float(np.min(distance[rejected]))) / sd


def _score_limits(r_hat: float, n: int, lam: float, c: float) -> tuple[float, float]:
    """Limits of { rho : |r_hat - rho| <= c sqrt(lam V_n(mu(rho))) } for r_hat >= 0, found in mu.

    f(mu) = (r_hat - rho_n(mu)) / sqrt(lam V_n(mu)) decreases in mu, so each limit is the one root
    of f(mu) = +-c. The side of 0 on which the lower limit falls is decided by f(0) = z, the
    signed-rank z, before the root is sought, so the interval excludes 0 exactly when |z| > c."""
    sd0 = c * math.sqrt(lam * float(rank_biserial_variance(n, 0.0)))
    one_minus_r = 1.0 - r_hat

    def distance_below(mu):  # r_hat - rho_n(mu), without cancellation near rho = +-1
        if mu >= 0:
            return float(_gap_to_one(n, mu)) - one_minus_r
        return r_hat + 1.0 - float(_gap_to_one(n, -mu))

    def spread(mu):
        return c * math.sqrt(lam * float(rank_biserial_variance(n, mu)))

    def lower_gap(mu):
        return distance_below(mu) - spread(mu)

    def upper_gap(mu):
        return -distance_below(mu) - spread(mu)

    def rho(mu):
        return 1.0 - float(_gap_to_one(n, mu)) if mu >= 0 else float(_gap_to_one(n, -mu)) - 1.0

    def solve(fn, a, b):
        return optimize.brentq(fn, a, b, xtol=1e-13, rtol=4 * np.finfo(float).eps, maxiter=200)

    def reach(fn, start, step):
        # first point start + step * 2^k (k = 0, 1, ...) where fn changes sign from fn(start)
        here, sign = start, fn(start) > 0
        width = step
        while abs(here) < MU_SEARCH_MAX:
            nxt = start + width
            if (fn(nxt) > 0) != sign:
                return here, nxt
            here, width = nxt, 2.0 * width
        return None

    # lower limit: lower_gap > 0 below the set, < 0 inside
    if not math.isfinite(c):
        return -1.0, 1.0
    if r_hat - sd0 > 0:  # z > c: the lower limit is above 0
        found = reach(lower_gap, 0.0, 0.5)
    else:
        found = reach(lower_gap, 0.0, -0.5)
    if found is None:
        low = -1.0 if r_hat - sd0 <= 0 else 1.0
    else:
        a, b = sorted(found)
        low = rho(solve(lower_gap, a, b))
    if r_hat == 1.0:
        return low, 1.0
    found = reach(upper_gap, 0.0, 0.5)  # upper_gap(0) = -r_hat - sd0 < 0
    if found is None:
        return low, 1.0
    a, b = sorted(found)
    return low, rho(solve(upper_gap, a, b))


def _rank_parts(d: np.ndarray):
    r_plus, r_minus, tie_term, n = (float(np.asarray(v)) for v in signed_rank_parts(d))
    return r_plus, r_minus, tie_term, int(n)


def signed_rank_score_interval(d, level: float, critical: float | None = None) -> Interval | None:
    """Score-type interval for the matched-pairs rank-biserial correlation
    r = (R+ - R-) / (R+ + R-) over the n non-zero differences (zeros dropped, |d| ranked with
    mid-ranks; Kerby 2014, as `paired.matched_rank_biserial_values`).

    Model: the non-zero differences are independent N(mu, 1) (r is scale free, so only the
    standardised shift matters). Then r-hat = 2 T+ / S - 1 (S = n(n+1)/2) has the exact mean
    rho_n(mu) = [2 erf(mu / sqrt 2) + (n - 1) erf(mu)] / (n + 1) (`expected_rank_biserial`) and
    variance V_n(mu) = 4 Var(T+) / S^2 (`signed_rank_variance`). The interval is

        { rho in [-1, 1] : |r-hat - rho| <= c sqrt(lambda V_n(mu(rho))) },

    mu(rho) the inverse of rho_n, c = z_(1 - alpha/2) unless `critical` is given, lambda the tie
    factor Var0(ties) / Var0(no ties) (`tie_variance_factor`; 1 without tied |d|): a deliberate
    approximation, exact at rho = 0, so that there the inequality is |z| <= c with the
    tie-corrected z of `paired.wilcoxon_z_values`. The construction follows the score intervals
    of Fay & Malinovsky (2018) for the two-group Mann-Whitney parameter, written here for the
    one-sample signed-rank statistic.

    Properties: the interval excludes 0 exactly when |z| > c, that is when the signed-rank test
    (normal approximation, tie correction, no continuity correction) has p < 1 - level; with
    critical = `exact_signed_rank_critical(n, level)`, when the exact untied test rejects. Since
    V_n stays positive for every finite mu, r-hat = +-1 (all non-zero differences of one sign)
    gives a proper interval [rho_L, 1] (or [-1, rho_U]) inside [-1, 1], not a point.
    Coverage of rho_n(mu) is exact-model only for normal differences; for other shapes rho_n is
    the normal-model summary of the observed r.

    Returns None when every difference is zero."""
    d, level = _check_differences(d), _check_level(level)
    c = _check_critical(critical, level)
    r_plus, r_minus, tie_term, n = _rank_parts(d)
    if n == 0:
        return None
    r_hat = (r_plus - r_minus) / (r_plus + r_minus)
    lam = tie_variance_factor(n, tie_term)
    if r_hat >= 0:
        low, high = _score_limits(r_hat, n, lam, c)
    else:
        low, high = (-v for v in reversed(_score_limits(-r_hat, n, lam, c)))
    parts = [f"{n} non-zero differences", f"critical value {c:.6g}"]
    if tie_term > 0:
        parts.append(f"variance scaled by the tie factor {lam:.6g}")
    if n < d.size:
        parts.append(f"{d.size - n} zero difference(s) dropped")
    note = ("inverts |r - rho_n(mu)| <= c sd_n(mu) under a normal shift model; " + ", ".join(parts))
    return Interval("signed_rank_score", low, high, level, note)


def r_from_z_slope(n: int, tie_term: float = 0.0) -> float:
    """k with r_z = k r_rb for one sample's n non-zero differences and tie pattern:
    z = (R+ - S/2) / sqrt(Var0) and r_rb = 2 R+ / S - 1 (S = n(n+1)/2 = R+ + R-, mid-ranks keep
    the sum), so R+ - S/2 = S r_rb / 2 and r_z = z / sqrt(n) = S r_rb / (2 sqrt(n Var0)).
    Without ties k = sqrt(3(n + 1) / (2(2n + 1))): 1 at n = 1, tending to sqrt(3)/2."""
    s = 0.5 * n * (n + 1)
    return s / (2.0 * math.sqrt(n * null_signed_rank_variance(n, tie_term)))


def r_from_z_interval(d, level: float, critical: float | None = None) -> Interval | None:
    """Interval for r = z / sqrt(N) (N non-zero differences, tie-corrected z without continuity
    correction, as `paired.r_from_z_values`): for the sample's N and tie pattern r_z = k r_rb
    with k = `r_from_z_slope`, so the `signed_rank_score_interval` [L, U] of the rank-biserial r
    maps to [k L, k U] and keeps its consistency with the signed-rank test (0 is excluded by
    both or by neither). The range of r_z for these n and ties is [-k, k].

    Returns None when every difference is zero."""
    base = signed_rank_score_interval(d, level, critical)
    if base is None:
        return None
    _, _, tie_term, n = _rank_parts(_check_differences(d))
    k = r_from_z_slope(n, tie_term)
    note = f"{base.note}; mapped by r_z = {k:.6g} x r_rb"
    return Interval("signed_rank_score_via_rank_biserial", k * base.low, k * base.high, level,
                    note)


# ------------------------------------------------------------------ as the audit reports it


def paired_extras(name: str, digits: int = 12):
    """For the registry: (x, level) -> the intervals reported beside the paired index `name`
    (ps_dep, matched_rank_biserial, r_from_z), x the n x 2 pairs, differences rounded to
    `digits` places (`paired.differences`). The signed-rank ones take the critical value of the
    tool's Wilcoxon test (`exact_signed_rank_critical_given` when it is exact, else the normal
    quantile), so that each excludes its no-effect value exactly when the reported test rejects."""
    from auditor.paired import differences

    def extras(x, level) -> tuple[Interval, ...]:
        d = differences(x, digits)
        if name == "ps_dep":
            iv = sign_test_interval(d, level)
        else:
            critical = exact_signed_rank_critical_given(d[d != 0], level)
            fn = signed_rank_score_interval if name == "matched_rank_biserial" else r_from_z_interval
            iv = fn(d, level, critical)
        return () if iv is None else (iv,)
    return extras
