"""Anderson-Darling test of normality with the mean and the SD estimated, and its p-value over
the whole range of the statistic.

The p-value has three parts, each with its source and range:

1. A2* <= 1.035 (p >= about 0.01): the four formulas of D'Agostino & Stephens (1986,
   Table 4.9, case 3) for A2* = A2 (1 + 0.75/n + 2.25/n^2), used up to the last tabled
   percentage point, the 1% point 1.035 (Stephens 1974, JASA 69:730, the asymptotic points
   0.561, 0.631, 0.752, 0.873, 1.035 at 15, 10, 5, 2.5, 1%; the same values scipy.stats.anderson
   tabulates for the normal). Where two published branches meet with a step up (at A2* = 0.6 the
   right branch starts 0.0025 higher), p is held at the left branch's value until the right one
   falls below it, so that p never rises with A2*.
2. A2* > 1.035: the tail of the asymptotic null distribution, sum_j lambda_j Z_j^2 (Stephens
   1976, Ann. Statist. 4:357; eigenvalues lambda_j from `tools/anderson_darling_eigenvalues.py`),
   by the saddlepoint approximation of Lugannani & Rice (1980, Adv. Appl. Prob. 12:475), computed
   in logarithms so that it neither overflows nor turns back, and scaled to meet part 1 at
   1.035 (a scale of about 1.04: the two agree to 4% there). Past the tabled points no finite-sample table exists; this part is an asymptotic
   approximation whose relative accuracy far out in the tail is not known, so a value below
   1e-10 reads as "far below any level used in practice".
3. Below P_FLOOR (1e-300, near the smallest normal double): p is reported at P_FLOOR and flagged
   as a bound.

The published formulas alone, used past their range, fall to about 1e-59 at A2* = 26, then rise
again (the quadratic in the exponent turns at A2* = 153.5) and overflow; that is what this module
replaces.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize, special

TABLE_LIMIT = 1.035  # the 1% point of A2*, the last tabled one (Stephens 1974)
P_FLOOR = 1e-300
FLOOR_FROM = 200.0  # p(A2*) is below P_FLOOR from about A2* = 139 on; past this, no search

TABLE = "D'Agostino & Stephens 1986, Table 4.9"
TAIL = ("asymptotic tail beyond the tabled 1% point (saddlepoint approximation), scaled to meet"
        " Table 4.9")
FLOOR = f"below {P_FLOOR:g}: reported at that bound"

# Largest eigenvalues of the case-3 kernel and the sum of the rest (its trace less these), from
# tools/anderson_darling_eigenvalues.py; tests/references recompute them.
EIGENVALUES = (
    0.09843098891290213,
    0.07206030432474358,
    0.03595492718476065,
    0.028967912899704115,
    0.01869920292680338,
    0.01581734920179823,
    0.011473184155054014,
    0.01000192247805084,
    0.0077606683350464395,
    0.006906660137264652,
    0.005600318781012529,
    0.0050598560931390535,
    0.004232318935159476,
    0.003868275160115843,
    0.003311247789123053,
    0.0030541805521626594,
    0.00266147307837176,
    0.002473098707534772,
    0.0021859420189110058,
    0.0020437232681753776,
    0.0018274487601355072,
    0.0017174054271131814,
    0.001550488385674266,
    0.0014635694905651532,
    0.0013320731538099993,
    0.0012622064471460978,
    0.0011567849463951629,
    0.001099771857764784,
    0.001013968519669348,
    0.0009668299177515424,
    0.0008960684108779117,
    0.0008566424405864743,
    0.000797606166663592,
    0.0007642928872445379,
    0.0007145307993671647,
    0.0006861253792123846,
    0.0006437945146501353,
    0.0006193755199444261,
    0.000583068629081087,
    0.0005619215338479133,
)
REST = 0.023349332171815673  # trace 0.3844268602991499 less the kept eigenvalues

_LAMBDA = np.asarray(EIGENVALUES)


@dataclass(frozen=True)
class AndersonDarling:
    """A2, the modified A2* that the p-value reads, p, which part of the p-value gave it, and
    whether p is only a bound (below P_FLOOR)."""

    statistic: float
    modified: float
    p_value: float
    method: str
    p_is_bound: bool


def statistic(x: np.ndarray) -> float:
    """A2 = -n - (1/n) sum_i (2i - 1) [ln Phi(z_(i)) + ln(1 - Phi(z_(n+1-i)))], z the sorted
    values standardised by the sample mean and SD (n - 1) (Anderson & Darling 1954; D'Agostino &
    Stephens 1986, eq. 4.2). Needs n >= 3 and a positive SD; ln Phi is scipy.special.log_ndtr,
    finite for any finite z."""
    x = np.asarray(x, dtype=float)
    n = x.size
    z = np.sort((x - np.mean(x)) / np.std(x, ddof=1))
    i = np.arange(1, n + 1)
    return float(-n - np.sum((2 * i - 1) * (special.log_ndtr(z) + special.log_ndtr(-z[::-1]))) / n)


def modified(a2: float, n: int) -> float:
    """A2* = A2 (1 + 0.75/n + 2.25/n^2) (D'Agostino & Stephens 1986, Table 4.7, case 3)."""
    return a2 * (1.0 + 0.75 / n + 2.25 / n**2)


# Table 4.9's four branches with their left edges; each is decreasing on its own interval.
_BRANCHES = (
    (0.0, lambda a: -math.expm1(-13.436 + 101.14 * a - 223.73 * a * a)),
    (0.2, lambda a: -math.expm1(-8.318 + 42.796 * a - 59.938 * a * a)),
    (0.34, lambda a: math.exp(0.9177 - 4.279 * a - 1.38 * a * a)),
    (0.6, lambda a: math.exp(1.2937 - 5.709 * a + 0.0186 * a * a)),
)


def _table_p(a: float) -> float:
    """Table 4.9 at A2* = a in [0, TABLE_LIMIT], made non-increasing: the smallest of the
    branch value at a and the left branches' values at each junction at or below a."""
    a = max(a, 0.0)
    p = 1.0
    for k, (edge, branch) in enumerate(_BRANCHES):
        if a < edge:
            break
        nxt = _BRANCHES[k + 1][0] if k + 1 < len(_BRANCHES) else math.inf
        p = min(p, branch(min(a, nxt)))
    return min(max(p, 0.0), 1.0)


def _cumulants(s: float) -> tuple[float, float, float, float]:
    """t, K(t), K'(t), K''(t) of sum_j lambda_j Z_j^2 + REST at t = (1 - exp(-s)) / (2 lambda_1),
    s > 0 (the small eigenvalues are taken at their mean, a shift: their variance,
    2 sum lambda_j^2, is below 1e-5). With this change of variable 1 - 2 t lambda_j is computed
    as (1 - r_j) + exp(-s) r_j, r_j = lambda_j / lambda_1, which keeps its precision when t nears
    the pole 1/(2 lambda_1) (large x)."""
    lam = _LAMBDA
    r = lam / lam[0]
    e = math.exp(-s)
    v = (1.0 - r) + e * r
    t = -math.expm1(-s) / (2.0 * lam[0])
    k0 = -0.5 * float(np.sum(np.log(v))) + REST * t
    k1 = float(np.sum(lam / v)) + REST
    k2 = float(np.sum(2.0 * lam * lam / (v * v)))
    return t, k0, k1, k2


def _log_tail(x: float) -> float:
    """ln P(sum_j lambda_j Z_j^2 + REST > x) for x above the mean, by Lugannani & Rice (1980):
    P ~ 1 - Phi(w) + phi(w) (1/u - 1/w), w = sqrt(2 (t x - K(t))), u = t sqrt(K''(t)), with the
    saddlepoint t solving K'(t) = x (see `_cumulants` for the variable s it is found in)."""
    def gap(s):
        return _cumulants(s)[2] - x

    hi = 1.0
    while gap(hi) < 0:
        hi *= 2.0
    s = optimize.brentq(gap, 1e-12, hi, xtol=1e-14, rtol=1e-14, maxiter=500)
    t, k0, _, k2 = _cumulants(s)
    w = math.sqrt(max(2.0 * (t * x - k0), 0.0))
    u = t * math.sqrt(k2)
    mills = math.sqrt(math.pi / 2.0) * float(special.erfcx(w / math.sqrt(2.0)))  # Phi(-w)/phi(w)
    bracket = mills + 1.0 / u - 1.0 / w
    if bracket <= 0:  # does not happen this far above the mean; the first term alone then
        return float(special.log_ndtr(-w))
    return -0.5 * w * w - 0.5 * math.log(2.0 * math.pi) + math.log(bracket)


def p_value(a_star: float) -> tuple[float, str, bool]:
    """(p, method, p_is_bound) for the modified statistic A2*; non-increasing in A2* over
    [0, inf) and in [P_FLOOR, 1]. See the module docstring for the parts and their sources."""
    if math.isnan(a_star) or a_star >= FLOOR_FROM:
        return P_FLOOR, FLOOR, True
    if a_star <= TABLE_LIMIT:
        return _table_p(a_star), TABLE, False
    at_limit, log_scale = _junction()
    log_p = log_scale + _log_tail(a_star)
    if log_p < math.log(P_FLOOR):
        return P_FLOOR, FLOOR, True
    return min(math.exp(log_p), at_limit), TAIL, False


@functools.lru_cache(maxsize=1)
def _junction() -> tuple[float, float]:
    """(p at TABLE_LIMIT from the table, ln of the scale that makes the tail meet it there):
    constants, computed once."""
    at_limit = _table_p(TABLE_LIMIT)
    return at_limit, math.log(at_limit) - _log_tail(TABLE_LIMIT)


def test(x: np.ndarray) -> AndersonDarling:
    """The test of normality on x (n >= 3, positive SD): A2, A2*, p and its method."""
    x = np.asarray(x, dtype=float)
    a2 = statistic(x)
    a_star = modified(a2, x.size)
    p, method, bound = p_value(a_star)
    return AndersonDarling(a2, a_star, float(p), method, bound)
