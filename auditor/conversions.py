"""Conversions between effect-size scales, each with the assumption that makes it exact, and the
gap between a converted value and the same index estimated directly from the data.

Every map keeps the A-relative-to-B direction: a positive d means A has the larger mean,
A > 1/2 means A tends to be larger, delta = 2A - 1, and the point-biserial r codes group A as 1
and group B as 0. Swapping the groups negates d, r, delta and ln OR and takes A to 1 - A:

>>> round(d_to_a(0.5), 6), round(d_to_a(-0.5), 6)
(0.638163, 0.361837)
>>> round(d_to_r(0.5, 30, 10), 6), round(d_to_r(-0.5, 10, 30), 6)
(0.211604, -0.211604)

The scalar maps are pure functions of floats. They raise on arguments outside their domain
(A outside [0, 1], |r| > 1, group sizes below 1) and carry the limits of the formula at the
edges (A = 1 gives d = +inf). `conversion_table` is the audit-facing summary: for an observed
d and A it lists each converted value, the assumption under which the conversion is exact, and
the gap to the directly estimated index, flagged when it is large (`A_GAP_LIMIT`,
`D_GAP_LIMIT`, `DELTA_GAP_LIMIT`). It generalises `diagnostics.normal_theory_check` and uses
the same sign for its gaps: directly estimated minus converted.
"""

from __future__ import annotations

import math
import numbers
import warnings
from dataclasses import dataclass

from scipy import special

from auditor.errors import UndefinedEffectWarning
from auditor.results import Record

SQRT2 = math.sqrt(2.0)
LOGISTIC_SCALE = math.pi / math.sqrt(3.0)  # SD of the standard logistic distribution

# Flag limits for a gap between a converted and a directly estimated index. They are a choice
# made here, not a published rule: 0.05 on the A scale is about the distance from A = 0.5 to
# Vargha & Delaney's (2000) "small" A of 0.56, and near A = 0.5 it corresponds to a d gap of
# 0.05 sqrt(2) / phi(0) = 0.177; the d limit is Cohen's (1988) "small" d of 0.2; the delta limit
# is the A limit carried by delta = 2A - 1. A flagged gap thus changes the reading by about one
# "small" effect. The flag reads the size of the disagreement, not its significance: in small
# groups a gap of this size arises by sampling error alone even when the model holds.
A_GAP_LIMIT = 0.05
D_GAP_LIMIT = 0.2
DELTA_GAP_LIMIT = 2.0 * A_GAP_LIMIT

DIVISORS = ("N", "N-2")  # how the pooled SD behind d divides the within-group sum of squares


# ------------------------------------------------------------------ argument checks


def _real(value, name: str) -> float:
    """A real number as float (NaN passes through); booleans and other types raise TypeError."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} is {value!r} of type {type(value).__name__}; a real number is "
                        f"required; pass {name} as a float")
    return float(value)


def _probability(value, name: str = "a") -> float:
    x = _real(value, name)
    if not (0.0 <= x <= 1.0 or math.isnan(x)):
        raise ValueError(f"{name} = {x!r} is outside [0, 1]; a probability of superiority is "
                         f"required; pass P(X_A > X_B) + P(X_A = X_B)/2, not a percentage")
    return x


def _correlation(value, name: str) -> float:
    x = _real(value, name)
    if not (-1.0 <= x <= 1.0 or math.isnan(x)):
        raise ValueError(f"{name} = {x!r} is outside [-1, 1]; a correlation or dominance "
                         f"statistic is required; check that {name} is not on another scale")
    return x


def _sizes(n_a, n_b, least: int = 1) -> tuple[int, int]:
    out = []
    for value, name in ((n_a, "n_a"), (n_b, "n_b")):
        if isinstance(value, bool) or not isinstance(value, numbers.Integral):
            raise TypeError(f"{name} is {value!r} of type {type(value).__name__}; a whole "
                            f"number of observations is required; pass the group's size as int")
        if value < least:
            raise ValueError(f"{name} = {value} is below {least}; each group needs at least "
                             f"{least} observation(s) here; check the group sizes passed")
        out.append(int(value))
    return out[0], out[1]


def _r_constant(n_a: int, n_b: int, pooled_divisor: str) -> float:
    """a in r = d / sqrt(d^2 + a): N^2 / (n_A n_B) for divisor N (Borenstein et al. 2009,
    ch. 7), N (N - 2) / (n_A n_B) for divisor N - 2."""
    if pooled_divisor not in DIVISORS:
        raise ValueError(f"pooled_divisor = {pooled_divisor!r} is not one of {DIVISORS}; it names "
                         f"the divisor of the within-group sum of squares in d's pooled SD; pass "
                         f"'N-2' for Cohen's d as auditor.parametric computes it")
    n = n_a + n_b
    if pooled_divisor == "N-2" and n < 3:
        raise ValueError(f"n_a + n_b = {n}; the divisor N - 2 needs at least 3 observations in "
                         f"all; pass larger groups or pooled_divisor='N'")
    top = float(n) * (n if pooled_divisor == "N" else n - 2)
    return top / (float(n_a) * n_b)


# ------------------------------------------------------------------ d and A


def d_to_a(d: float) -> float:
    """A = Phi(d / sqrt 2).

    Exact when both populations are normal with equal variances and d is the population
    standardized difference (mu_A - mu_B) / sigma: X_A - X_B is then normal with mean
    d sigma and variance 2 sigma^2, so P(X_A > X_B) = Phi(d / sqrt 2) (McGraw & Wong 1992,
    the common-language effect size; Ruscio 2008). With unequal variances the same formula is
    exact for d standardized by sqrt((sigma_A^2 + sigma_B^2) / 2) (the `d_unpooled` of
    `auditor.parametric`), because the variance of X_A - X_B is sigma_A^2 + sigma_B^2.

    Range: any real d; +-inf give 1 and 0; NaN gives NaN. In double precision A near 1 holds
    d only to about 1e-16 / phi(d / sqrt 2) (about 2e-12 at |d| = 6, 2e-9 at |d| = 8).
    """
    d = _real(d, "d")
    return float(special.ndtr(d / SQRT2))


def a_to_d(a: float) -> float:
    """d = sqrt 2 Phi^-1(A), the inverse of `d_to_a`, exact under the same model (normal
    populations with equal variances; McGraw & Wong 1992; Ruscio 2008).

    Range: A in [0, 1]; A = 0 and 1 (complete separation) give -inf and +inf."""
    a = _probability(a)
    return float(SQRT2 * special.ndtri(a))


# ------------------------------------------------------------------ A and Cliff's delta


def a_to_delta(a: float) -> float:
    """delta = 2A - 1. Exact, no assumption: with A = P(X_A > X_B) + P(X_A = X_B)/2 and
    delta = P(X_A > X_B) - P(X_A < X_B) (Cliff 1993), 2A - 1 = P(>) + P(=) - 1 = P(>) - P(<)."""
    a = _probability(a)
    return 2.0 * a - 1.0


def delta_to_a(delta: float) -> float:
    """A = (1 + delta) / 2, the inverse of `a_to_delta` (exact, no assumption)."""
    delta = _correlation(delta, "delta")
    return 0.5 * (1.0 + delta)


def d_to_delta(d: float) -> float:
    """delta = 2 Phi(d / sqrt 2) - 1 = erf(d / 2): d to A (`d_to_a`) followed by the exact
    delta = 2A - 1. Exact under normal populations with equal variances (McGraw & Wong 1992;
    Cliff 1993). Computed as erf(d / 2), which keeps full relative precision near d = 0."""
    d = _real(d, "d")
    return float(special.erf(d / 2.0))


def delta_to_d(delta: float) -> float:
    """d = 2 erf^-1(delta), the inverse of `d_to_delta`, exact under the same model (normal
    populations with equal variances). delta = -1 and 1 give -inf and +inf."""
    delta = _correlation(delta, "delta")
    return float(2.0 * special.erfinv(delta))


# ------------------------------------------------------------------ d and the point-biserial r


def d_to_r(d: float, n_a: int, n_b: int, *, pooled_divisor: str = "N") -> float:
    """Point-biserial r = d / sqrt(d^2 + a), group A coded 1 and group B coded 0.

    The form used is the sample-size form of Borenstein, Hedges, Higgins & Rothstein (2009,
    "Introduction to Meta-Analysis", ch. 7, eq. 7.7, the equation number from memory;
    Rosenthal 1994):
    a = (n_A + n_B)^2 / (n_A n_B), the default (`pooled_divisor="N"`). It is an algebraic
    identity, not a model: with SS_W the within-group and (n_A n_B / N) D^2 the between-group sum
    of squares of the outcome (D = mean_A - mean_B, N = n_A + n_B), the sample point-biserial
    correlation satisfies r^2 = between / (between + SS_W). Hence

        r = d_N / sqrt(d_N^2 + N^2 / (n_A n_B))           with d_N = D / sqrt(SS_W / N),
        r = d / sqrt(d^2 + N (N - 2) / (n_A n_B))         with d = D / sqrt(SS_W / (N - 2)),

    the second being Cohen's d with the usual pooled SD (`auditor.parametric.cohen_d`; select it
    with `pooled_divisor="N-2"`). Borenstein's form applied to that d gives a slightly smaller
    |r| (its a is larger by N / (N - 2)); the difference vanishes as N grows. In a population
    with a share p = n_A / N in group A, a = 1 / (p (1 - p)); with equal groups a = 4, Cohen's
    (1988, Table 2.2.1) r = d / sqrt(d^2 + 4). r depends on the split between the groups, so it
    is comparable across studies only at equal splits.

    Range: any real d (computed as d / hypot(d, sqrt a), no overflow); +-inf give +-1.
    """
    d = _real(d, "d")
    n_a, n_b = _sizes(n_a, n_b)
    a = _r_constant(n_a, n_b, pooled_divisor)
    if math.isinf(d):
        return math.copysign(1.0, d)
    return d / math.hypot(d, math.sqrt(a))


def r_to_d(r: float, n_a: int, n_b: int, *, pooled_divisor: str = "N") -> float:
    """d = sqrt(a) r / sqrt(1 - r^2), the inverse of `d_to_r` with the same a (same divisor).

    Deviation: Borenstein et al. (2009, eq. 7.5, from memory) convert r to d with a = 4,
    d = 2r / sqrt(1 - r^2), which is the inverse of their eq. 7.7 only for equal groups; here
    the inverse of the same a is used, so that the two maps are inverse to each other for any
    group sizes.
    Range: |r| <= 1; r = +-1 gives +-inf. 1 - r^2 is computed as (1 - r)(1 + r)."""
    r = _correlation(r, "r")
    n_a, n_b = _sizes(n_a, n_b)
    a = _r_constant(n_a, n_b, pooled_divisor)
    if abs(r) == 1.0:
        return math.copysign(math.inf, r)
    return math.sqrt(a) * r / math.sqrt((1.0 - r) * (1.0 + r))


# ------------------------------------------------------------------ d and the log odds ratio


def d_to_log_odds(d: float) -> float:
    """ln OR = d pi / sqrt 3 (Hasselblad & Hedges 1995; Chinn 2000).

    Exact when both populations are logistic with a common scale s: then the log odds of
    exceeding any cut c are (mu - c) / s, their difference between A and B is (mu_A - mu_B) / s at
    every cut, and the SD is s pi / sqrt 3. For normal populations it is an approximation (the
    logistic distribution standing in for the normal), and the log odds ratio of a dichotomized
    normal outcome changes with the cut. The odds ratio compares the odds of A exceeding a cut
    with those of B, so it is positive when A tends to be larger."""
    d = _real(d, "d")
    return d * LOGISTIC_SCALE


def log_odds_to_d(log_odds: float) -> float:
    """d = ln OR sqrt 3 / pi, the inverse of `d_to_log_odds` (exact under logistic populations
    with a common scale; Hasselblad & Hedges 1995; Chinn 2000)."""
    log_odds = _real(log_odds, "log_odds")
    return log_odds / LOGISTIC_SCALE


# ------------------------------------------------------------------ table of conversions


@dataclass(frozen=True)
class ScaleLink(Record):
    """One conversion: `target` computed from `source` by `formula`, exact when `exact_if`
    holds (reference: `reference`). `direct` is `target` estimated directly from the data, when
    it was; `gap` = direct - value, and `flagged` is True when |gap| >= `limit`. `value` is None
    with a `reason` when the conversion is undefined for these data."""

    target: str
    source: str
    value: float | None
    direct: float | None
    gap: float | None
    limit: float | None
    flagged: bool
    formula: str
    exact_if: str
    reference: str
    reason: str | None = None

    @property
    def key(self) -> str:
        return f"{self.target}_from_{self.source}"


@dataclass(frozen=True)
class Conversions(Record):
    """Every conversion of an observed d and A, with its gap to the directly estimated index.

    `cohen_d` (pooled SD), `prob_superiority` and `cliff_delta` are the direct estimates the
    links are read against; `flagged` lists the keys of the links whose gap reached its limit."""

    cohen_d: float | None
    prob_superiority: float | None
    cliff_delta: float | None
    d_unpooled: float | None
    n_a: int
    n_b: int
    links: tuple[ScaleLink, ...]
    flagged: tuple[str, ...]
    notes: tuple[str, ...] = ()

    def link(self, key: str) -> ScaleLink:
        """The link named `key` ("<target>_from_<source>", e.g. "prob_superiority_from_cohen_d")."""
        for item in self.links:
            if item.key == key:
                return item
        raise KeyError(f"no conversion {key!r}; available: {', '.join(i.key for i in self.links)}")


NORMAL_EQUAL = "normal populations with equal variances"
NORMAL_ANY = "normal populations (the variances may differ)"
LOGISTIC = "logistic populations with a common scale"
REF_CL = "McGraw & Wong 1992; Ruscio 2008"
REF_LOR = "Hasselblad & Hedges 1995; Chinn 2000"


def _optional_d(value, name: str) -> float | None:
    """d as float, or None when undefined (None, NaN or infinite, as the vectorised estimators
    return for constant groups)."""
    if value is None:
        return None
    x = _real(value, name)
    return x if math.isfinite(x) else None


def _link(target: str, source: str, value: float | None, direct: float | None,
          limit: float | None, formula: str, exact_if: str, reference: str,
          reason: str | None = None) -> ScaleLink:
    if value is not None and not math.isfinite(value):
        value, reason = None, reason or "the converted value is infinite"
    gap = None if value is None or direct is None else direct - value
    flagged = bool(gap is not None and limit is not None and abs(gap) >= limit)
    return ScaleLink(target, source, value, direct, gap, limit, flagged, formula, exact_if,
                     reference, None if value is not None else reason)


def _table_iv(d, a_hat, n_a, n_b, delta_hat, d_unpooled):
    d = _optional_d(d, "d")
    du = _optional_d(d_unpooled, "d_unpooled")
    n_a, n_b = _sizes(n_a, n_b, least=2)
    a = None if a_hat is None else _probability(a_hat, "a_hat")
    if a is not None and math.isnan(a):
        a = None
    notes = []
    delta = None if a is None else 2.0 * a - 1.0
    if delta_hat is not None:
        given = _correlation(delta_hat, "delta_hat")
        if delta is not None and not abs(given - delta) <= 1e-9:
            raise ValueError(f"delta_hat = {given!r} but 2 a_hat - 1 = {delta!r}; for two "
                             f"independent groups Cliff's delta equals 2A - 1 exactly; pass "
                             f"both from the same data (or leave delta_hat out)")
        delta = None if math.isnan(given) else given
    elif delta is not None:
        notes.append("Cliff's delta taken as 2A - 1 (exact for two independent groups)")
    return d, a, delta, du, n_a, n_b, notes


def conversion_table(d: float | None, a_hat: float | None, n_a: int, n_b: int,
                     delta_hat: float | None = None, *,
                     d_unpooled: float | None = None) -> Conversions:
    """Convert the observed Cohen's d (pooled SD, divisor N - 2) and the observed probability of
    superiority A to the other scales, and compare each conversion with the index estimated
    directly.

    Links (target from source: formula; exact when):
      * prob_superiority from cohen_d: Phi(d / sqrt 2); normal, equal variances (`d_to_a`);
      * prob_superiority from d_unpooled (when given): Phi(d_unpooled / sqrt 2); normal, any
        variances;
      * cohen_d from prob_superiority: sqrt 2 Phi^-1(A); normal, equal variances (`a_to_d`);
      * cliff_delta from cohen_d: erf(d / 2); normal, equal variances (`d_to_delta`);
      * point_biserial_r from cohen_d: Borenstein et al.'s d / sqrt(d^2 + N^2 / (n_A n_B)),
        read against the data's own point-biserial r, d / sqrt(d^2 + N (N - 2) / (n_A n_B))
        (exact: `d_to_r`); the gap is the cost of the published form, O(1/N), not flagged;
      * log_odds_ratio from cohen_d and from the A-implied d: d pi / sqrt 3; logistic
        populations (`d_to_log_odds`); no direct estimate (no dichotomy is observed).
    Gaps are direct minus converted (the sign of `diagnostics.normal_theory_check`), flagged at
    `A_GAP_LIMIT`, `D_GAP_LIMIT`, `DELTA_GAP_LIMIT` (see their comment for the choice).

    Undefined inputs (d None, NaN or infinite: constant groups; A None) leave the links that need
    them None with a reason. A of 0 or 1 (complete separation) implies an infinite d: those
    links are None and an `UndefinedEffectWarning` is issued. `delta_hat`, when given, must equal
    2 a_hat - 1 (to 1e-9); otherwise ValueError.

    Swapping the groups (d -> -d, A -> 1 - A, n_a <-> n_b) negates every d, r, delta and ln OR,
    complements every A and negates every gap.
    """
    d, a, delta, du, n_a, n_b, notes = _table_iv(d, a_hat, n_a, n_b, delta_hat, d_unpooled)
    no_d = "d is undefined (both groups constant)"
    no_a = "A was not estimated"
    d_from_a = None
    why_a = no_a
    if a is not None:
        if a in (0.0, 1.0):
            why_a = (f"A = {a:g}: complete separation, which the normal model reads as an "
                     f"infinite d")
            warnings.warn(f"conversion of A to d is undefined: {why_a}", UndefinedEffectWarning,
                          stacklevel=2)
        else:
            d_from_a = a_to_d(a)
    links = [
        _link("prob_superiority", "cohen_d", None if d is None else d_to_a(d), a, A_GAP_LIMIT,
              "Phi(d / sqrt(2))", NORMAL_EQUAL, REF_CL, no_d),
    ]
    if d_unpooled is not None:
        links.append(_link("prob_superiority", "d_unpooled", None if du is None else d_to_a(du),
                           a, A_GAP_LIMIT, "Phi(d_unpooled / sqrt(2))", NORMAL_ANY, REF_CL,
                           "d_unpooled is undefined (both groups constant)"))
    r_direct = None if d is None else d_to_r(d, n_a, n_b, pooled_divisor="N-2")
    links += [
        _link("cohen_d", "prob_superiority", d_from_a, d, D_GAP_LIMIT, "sqrt(2) Phi^-1(A)",
              NORMAL_EQUAL, REF_CL, why_a),
        _link("cliff_delta", "cohen_d", None if d is None else d_to_delta(d), delta,
              DELTA_GAP_LIMIT, "2 Phi(d / sqrt(2)) - 1 = erf(d / 2)", NORMAL_EQUAL,
              REF_CL + "; Cliff 1993", no_d),
        _link("point_biserial_r", "cohen_d", None if d is None else d_to_r(d, n_a, n_b),
              r_direct, None, "d / sqrt(d^2 + (n_A + n_B)^2 / (n_A n_B))",
              "no model (algebra); exact for a d whose pooled SD divides by N, while Cohen's d"
              " divides by N - 2", "Borenstein et al. 2009, ch. 7; Rosenthal 1994", no_d),
        _link("log_odds_ratio", "cohen_d", None if d is None else d_to_log_odds(d), None, None,
              "d pi / sqrt(3)", LOGISTIC, REF_LOR, no_d),
        _link("log_odds_ratio", "prob_superiority",
              None if d_from_a is None else d_to_log_odds(d_from_a), None, None,
              "pi / sqrt(3) sqrt(2) Phi^-1(A)",
              "normal populations with equal variances (A to d), then logistic ones (d to"
              " ln OR): two approximations in a row", REF_CL + "; " + REF_LOR, why_a),
    ]
    flagged = tuple(item.key for item in links if item.flagged)
    return Conversions(d, a, delta, du, n_a, n_b, tuple(links), flagged, tuple(notes))
