"""Tests of difference for the four designs, each returning a frozen `TestResult`.

A reporting policy picks one test per design by its registry name (`TESTS[design][name]`, or
`run_test(design, name, samples)`). Every p is two-sided. Samples follow the project's convention:

  two_groups  (a, b)        two 1-D arrays; signed statistics are a relative to b
  paired      (x,)          x of shape (n, 2); d = x[:, 0] - x[:, 1] rounded to `digits` places
  k_groups    (g1, ..., gk) k 1-D arrays
  k_repeated  (x,)          x of shape (n, k), one row per participant

`compares` names what a test compares, so that a policy can pair it with an effect size of the same
kind: "means" (t, F and permutation tests of means), "ranks" (Mann-Whitney, Brunner-Munzel,
Wilcoxon, Kruskal-Wallis, Friedman) or "signs" (the sign test).

Data that leave a test undefined (a constant group, every difference zero, too few values) never
raise: statistic and p are None and `reason` says why. Malformed input (wrong number or shape of
arrays, an unknown name, a missing random generator) raises ValueError with a one-line message.
Numerical warnings from the libraries are not let through; any that occur are kept in `notes`.
"""

from __future__ import annotations

import contextlib
import inspect
import math
import warnings
from dataclasses import dataclass, field
from functools import partial

import numpy as np
from scipy import special, stats

from auditor import kgroups, paired, parametric, ranks, resampling
from auditor.moments import mean_var
from auditor.results import Record

COMPARES = ("means", "ranks", "signs")


@dataclass(frozen=True)
class TestResult(Record):
    """One test of difference.

    `df` is a number for t and chi-squared statistics, [df1, df2] for F, None where no degrees of
    freedom exist. `p` is two-sided. `details` holds named numbers reported beside the statistic
    (counts, z, epsilon, the uncorrected p, ...).
    """

    __test__ = False  # not a pytest test class, although its name starts with "Test"

    name: str
    label: str
    compares: str
    statistic: float | None
    statistic_name: str
    df: float | list[float] | None
    p: float | None
    method: str
    notes: tuple[str, ...] = ()
    reason: str | None = None
    details: dict = field(default_factory=dict)


def _outcome(name, label, compares, statistic_name, method, *, statistic=None, df=None, p=None,
             notes=(), reason=None, details=None) -> TestResult:
    if reason is None and (statistic is None or p is None or not math.isfinite(statistic)
                           or not math.isfinite(p)):
        statistic, p = None, None
        reason = "the statistic is not finite in double precision"
    if reason is not None:
        statistic, df, p = None, None, None
    return TestResult(name, label, compares, None if statistic is None else float(statistic),
                      statistic_name, df, None if p is None else float(p), method, tuple(notes),
                      reason, dict(details or {}))


@contextlib.contextmanager
def _library_call(notes: list):
    """Run a library computation with numpy's floating-point warnings off and the library's
    RuntimeWarnings recorded into `notes` instead of shown."""
    with warnings.catch_warnings(record=True) as caught, np.errstate(all="ignore"):
        warnings.simplefilter("always", RuntimeWarning)
        yield
    for w in caught:
        text = f"library warning: {w.message}"
        if text not in notes:
            notes.append(text)


# ------------------------------------------------------------------ input checks


def _vector(values, what: str) -> np.ndarray:
    arr = np.asarray(values, dtype=float)
    if arr.ndim != 1:
        raise ValueError(f"{what} must be a 1-D array of values, got shape {arr.shape}")
    return arr


def _matrix(x, columns: int | None, what: str) -> np.ndarray:
    arr = np.asarray(x, dtype=float)
    if arr.ndim != 2 or (columns is not None and arr.shape[1] != columns) or arr.shape[1] < 2:
        need = f"(n, {columns})" if columns is not None else "(n, k) with k >= 2"
        raise ValueError(f"{what} must be an array of shape {need}, got shape {arr.shape}")
    return arr


def _not_finite(*arrays) -> str | None:
    if any(not np.all(np.isfinite(a)) for a in arrays):
        return "the data contain missing or non-finite values; remove them before testing"
    return None


def _constant(x: np.ndarray) -> bool:
    """True when every value equals the first (exactly; an empty or single-value array counts)."""
    return bool(x.size == 0 or np.all(x == x[0]))


def _check_rng(rng) -> np.random.Generator:
    if not isinstance(rng, np.random.Generator):
        raise ValueError("permutation tests need rng=numpy.random.Generator (for example"
                         " numpy.random.default_rng(seed))")
    return rng


def _check_permutations(permutations) -> int:
    if isinstance(permutations, bool) or int(permutations) != permutations or permutations < 1:
        raise ValueError(f"permutations={permutations!r}: use a whole number of at least 1")
    return int(permutations)


def _capped_comb(n: int, k: int, cap: int) -> int:
    """min(C(n, k), cap + 1), by the product C = prod_i (n - k + i) / i, stopped once it passes
    `cap`: the full C(2 x 10^6, 10^6) would take tens of seconds and has 600,000 digits, which
    Python 3.11 refuses to print beyond 4,300 digits (ValueError)."""
    k = min(k, n - k)
    count = 1
    for i in range(1, k + 1):
        count = count * (n - k + i) // i
        if count > cap:
            return cap + 1
    return count


def _log10_comb(n: int, k: int) -> float:
    return (math.lgamma(n + 1) - math.lgamma(k + 1) - math.lgamma(n - k + 1)) / math.log(10)


def _permutation_method(distinct: int, permutations: int,
                        log10_distinct: float | None = None) -> tuple[bool, str]:
    """Exact enumeration when the distinct rearrangements are no more than the resamples asked for
    (scipy.stats.permutation_test makes the same choice), else random rearrangements. `distinct`
    may be capped (`_capped_comb`); beyond 10^15 the count is written as a power of ten from
    `log10_distinct`, never as a long integer."""
    if distinct <= permutations:
        return True, f"exact: all {distinct} distinct rearrangements"
    if log10_distinct is not None and log10_distinct >= 15:
        possible = f"about 10^{log10_distinct:.1f}"
    else:
        possible = f"{distinct}"
    return False, (f"{permutations} random rearrangements of {possible} possible;"
                   " p = (count at least as extreme + 1) / (rearrangements + 1)")


# ------------------------------------------------------------------ two independent groups


def student_t(a, b) -> TestResult:
    """Student's t test of equal means with the pooled variance:
    t = (mean_a - mean_b) / (s_p sqrt(1/n_a + 1/n_b)), df = n_a + n_b - 2 (Student 1908;
    scipy.stats.ttest_ind with equal_var=True).

    Assumes independent observations, normal populations (or large groups) and equal variances;
    positive t when a has the larger mean.
    """
    make = partial(_outcome, "student_t", "Student's t test (pooled variance)", "means", "t",
                   "t distribution with n_a + n_b - 2 degrees of freedom")
    a, b = _vector(a, "group a"), _vector(b, "group b")
    reason = _not_finite(a, b)
    if reason is None and (a.size < 1 or b.size < 1 or a.size + b.size < 3):
        reason = "too few values: each group needs one and the two together at least three"
    if reason is None and _constant(a) and _constant(b):
        reason = "no variation within either group: the pooled standard deviation is zero"
    if reason:
        return make(reason=reason)
    notes: list[str] = []
    with _library_call(notes):
        res = stats.ttest_ind(a, b, equal_var=True)
    return make(statistic=res.statistic, df=float(res.df), p=res.pvalue, notes=notes,
                details={"n": [int(a.size), int(b.size)],
                         "mean_difference": float(parametric.mean_difference_values(a, b))})


def welch_t(a, b) -> TestResult:
    """Welch's t test of equal means without assuming equal variances:
    t = (mean_a - mean_b) / sqrt(s_a^2/n_a + s_b^2/n_b), Welch-Satterthwaite df
    (Welch 1947; Satterthwaite 1946; scipy.stats.ttest_ind with equal_var=False).

    Assumes independent observations and normal populations (or large groups); unequal variances
    are allowed. Positive t when a has the larger mean.
    """
    make = partial(_outcome, "welch_t", "Welch's t test (unequal variances)", "means", "t",
                   "t distribution with Welch-Satterthwaite degrees of freedom")
    a, b = _vector(a, "group a"), _vector(b, "group b")
    reason = _not_finite(a, b)
    if reason is None and (a.size < 2 or b.size < 2):
        reason = "too few values: each group needs at least two for its variance"
    if reason is None and _constant(a) and _constant(b):
        reason = "no variation within either group: the standard error is zero"
    if reason:
        return make(reason=reason)
    # t, df and p computed here (the same numbers as scipy.stats.ttest_ind(equal_var=False) to
    # rounding): scipy squares s^2 / n, which underflows to 0/0 for data near 1e-140, and then
    # silently puts df = 1 (scipy 1.17); it also flags an exactly constant group as a precision
    # loss. `parametric.welch_df` scales before squaring (range: see there).
    notes: list[str] = []
    va, vb = float(mean_var(a)[1]), float(mean_var(b)[1])
    with np.errstate(all="ignore"):
        statistic = float(parametric.mean_difference_values(a, b)) / math.sqrt(
            va / a.size + vb / b.size)
    df = parametric.welch_df(va, a.size, vb, b.size)
    p = float(2.0 * special.stdtr(df, -abs(statistic))) if math.isfinite(df) else math.nan
    return make(statistic=statistic, df=df, p=p, notes=notes,
                details={"n": [int(a.size), int(b.size)],
                         "mean_difference": float(parametric.mean_difference_values(a, b))})


def mann_whitney(a, b) -> TestResult:
    """Mann-Whitney U test (Wilcoxon rank-sum test): U = #(a > b) + #(a = b)/2 over all pairs, the
    count for group a (Mann & Whitney 1947; scipy.stats.mannwhitneyu).

    Exact null distribution when no value is tied and n_a n_b <= 2500 (the limit the project's
    distribution-free shift interval uses); otherwise the normal approximation with the tie
    correction and no continuity correction, z as `ranks.mann_whitney_z_values`. Assumes
    independent observations; a small p says one group tends to give larger values, a difference
    in medians only if the two distributions have the same shape.
    """
    make = partial(_outcome, "mann_whitney", "Mann-Whitney U test", "ranks", "U")
    a, b = _vector(a, "group a"), _vector(b, "group b")
    reason = _not_finite(a, b)
    if reason is None and (a.size < 1 or b.size < 1):
        reason = "too few values: each group needs at least one"
    pooled = np.concatenate([a, b])
    if reason is None and _constant(pooled):
        reason = "every value is tied: the ranks carry no information"
    if reason:
        return make("not computed", reason=reason)
    untied = np.unique(pooled).size == pooled.size
    exact = untied and a.size * b.size <= ranks.EXACT_MAX_PAIRS
    details = {"n": [int(a.size), int(b.size)]}
    if exact:
        method = "exact null distribution (no ties)"
    else:
        method = "normal approximation with tie correction, no continuity correction"
        details["z"] = float(ranks.mann_whitney_z_values(a, b))
    notes: list[str] = []
    if not untied:
        notes.append("tied values: exact p is not available, the normal approximation is used")
    with _library_call(notes):
        res = stats.mannwhitneyu(a, b, use_continuity=False, alternative="two-sided",
                                 method="exact" if exact else "asymptotic")
    return make(method, statistic=res.statistic, p=res.pvalue, notes=notes, details=details)


def brunner_munzel(a, b) -> TestResult:
    """Brunner-Munzel test of A = P(X_a > X_b) + P(X_a = X_b)/2 = 1/2:
    W = (A-hat - 1/2) / SE(A-hat) with SE from the placements, referred to a t distribution with
    Satterthwaite-type df (Brunner & Munzel 2000; Neubert & Brunner 2007).

    Assumes independent observations only: unequal variances and shapes are allowed, and an
    ordinal outcome is enough. Positive W when a tends to be larger, as statsmodels'
    rank_compare_2indep reports it (scipy.stats.brunnermunzel(a, b), which computes the value,
    gives the opposite sign). Undefined when the groups do not overlap (the variance estimate is
    zero).
    """
    make = partial(_outcome, "brunner_munzel", "Brunner-Munzel test", "ranks", "W",
                   "t distribution with Brunner-Munzel degrees of freedom")
    a, b = _vector(a, "group a"), _vector(b, "group b")
    reason = _not_finite(a, b)
    if reason is None and (a.size < 2 or b.size < 2):
        reason = "too few values: each group needs at least two"
    if reason:
        return make(reason=reason)
    with np.errstate(all="ignore"):
        a_hat, var, df = ranks.brunner_munzel_parts(a, b)
    details = {"n": [int(a.size), int(b.size)], "prob_superiority": a_hat}
    if not var > 0:
        why = ("the groups do not overlap" if a_hat in (0.0, 1.0)
               else "the placements do not vary within either group")
        return make(reason=f"{why}: the Brunner-Munzel variance is zero and W is undefined",
                    details=details)
    notes: list[str] = []
    with _library_call(notes):
        res = stats.brunnermunzel(a, b, alternative="two-sided", distribution="t")
    return make(statistic=-res.statistic, df=float(df), p=res.pvalue, notes=notes,
                details=details)


def _mean_gap(a, b, axis=-1):
    if axis != -1:
        raise ValueError("axis must be -1")
    return parametric.mean_difference_values(a, b)


def permutation_mean_difference(a, b, *, rng, permutations: int = 9999) -> TestResult:
    """Permutation test of mean_a - mean_b: the group labels are reassigned at random (or in every
    distinct way) and p is the share of rearrangements whose difference is at least as extreme,
    two-sided as 2 min(P_lower, P_upper) (Fisher 1935; Pitman 1937; scipy.stats.permutation_test
    with permutation_type='independent').

    Assumes only that, under the null hypothesis, the values are exchangeable between the groups
    (the same distribution in both). Random rearrangements draw from `rng`.
    """
    rng = _check_rng(rng)
    permutations = _check_permutations(permutations)
    a, b = _vector(a, "group a"), _vector(b, "group b")
    distinct = _capped_comb(a.size + b.size, a.size, max(permutations, 10**15))
    exact, method = _permutation_method(distinct, permutations,
                                        _log10_comb(a.size + b.size, a.size))
    make = partial(_outcome, "permutation_mean", "Permutation test of the mean difference",
                   "means", "mean difference", method)
    reason = _not_finite(a, b)
    if reason is None and (a.size < 1 or b.size < 1):
        reason = "too few values: each group needs at least one"
    if reason is None and (a.size < 2 or b.size < 2):
        # scipy.stats.permutation_test refuses a sample of one value (ValueError)
        reason = "too few values: the permutation routine needs at least two in each group"
    if reason:
        return make(reason=reason)
    notes: list[str] = []
    if _constant(np.concatenate([a, b])):
        notes.append("every value is equal: every rearrangement gives the same difference")
    batch = resampling.resamples_per_chunk(a.size + b.size, min(distinct, permutations))
    with _library_call(notes):
        res = stats.permutation_test((a, b), _mean_gap, permutation_type="independent",
                                     vectorized=True, n_resamples=permutations, batch=batch,
                                     alternative="two-sided", rng=rng)
    return make(statistic=res.statistic, p=res.pvalue, notes=notes,
                details={"n": [int(a.size), int(b.size)], "exact": exact,
                         "rearrangements": int(min(distinct, permutations))})


# ------------------------------------------------------------------ paired


def paired_t(x, *, digits: int = 12) -> TestResult:
    """Paired t test of mean(d) = 0 on the rounded differences d:
    t = mean(d) / (SD(d) / sqrt(n)), df = n - 1 (Student 1908; scipy.stats.ttest_1samp on d, the
    same as scipy.stats.ttest_rel on the rounded pairs).

    Assumes independent participants and normal differences (or many pairs). Positive t when the
    first condition has the larger mean.
    """
    make = partial(_outcome, "paired_t", "Paired t test", "means", "t",
                   "t distribution with n - 1 degrees of freedom")
    x = _matrix(x, 2, "paired data x")
    reason = _not_finite(x)
    if reason is None and x.shape[0] < 2:
        reason = "too few pairs: at least two are needed"
    if reason:
        return make(reason=reason)
    d = paired.differences(x, digits)
    if _constant(d):
        return make(reason="every difference is equal: the SD of the differences is zero")
    notes: list[str] = []
    with _library_call(notes):
        res = stats.ttest_1samp(d, 0.0)
    return make(statistic=res.statistic, df=float(res.df), p=res.pvalue, notes=notes,
                details={"n": int(d.size), "mean_difference": float(np.mean(d))})


def signed_rank_exact_p(nonzero) -> float:
    """Two-sided exact p of the signed-rank sum T+ of the non-zero differences `nonzero`, given
    their mid-ranks r_i of |d|: under the null hypothesis every difference is positive or negative
    with probability 1/2 independently, so each of the 2^N sign patterns has probability 2^-N, and
    p = min(1, 2 min(P(T+ <= t), P(T+ >= t))) at the observed t.

    Mid-ranks are multiples of 1/2, so 2 T+ is a whole number; its distribution is the generating
    function prod_i (1 + q^(2 r_i)) / 2, expanded one difference at a time (the shift algorithm of
    Streitberg & Roehmel 1986). Without ties this is Wilcoxon's exact null distribution
    (`paired.signed_rank_null_pmf`); with ties it is the permutation distribution conditional on
    the tied mid-ranks, which scipy.stats.wilcoxon(method=PermutationMethod()) computes by
    listing the patterns. Every probability is a count over 2^N: exact in double precision for
    N <= 50.
    """
    nonzero = np.asarray(nonzero, dtype=float)
    doubled = np.rint(2.0 * ranks.midranks(np.abs(nonzero))).astype(np.int64)
    observed = int(np.sum(doubled[nonzero > 0]))
    pmf = paired.sign_pattern_pmf(doubled)
    lower, upper = float(np.sum(pmf[:observed + 1])), float(np.sum(pmf[observed:]))
    return min(1.0, 2.0 * min(lower, upper))


def wilcoxon_signed_rank(x, *, digits: int = 12) -> TestResult:
    """Wilcoxon signed-rank test on the rounded differences: T+ = sum of the mid-ranks of |d| over
    the positive differences, zero differences dropped (Wilcoxon 1945; zeros as in Wilcoxon's
    method, scipy's zero_method='wilcox').

    Exact p (`signed_rank_exact_p`) when at most 50 differences are non-zero: Wilcoxon's null
    distribution without ties, the distribution over all sign patterns of the tied mid-ranks with
    them. Beyond 50, the normal approximation with the tie-corrected variance and no continuity
    correction, the z of `paired.wilcoxon_z_values`, which the signed-rank effect sizes use.
    Assumes independent participants and differences symmetric about their centre under the null
    hypothesis. scipy and pingouin report min(T+, T-) as the statistic; T+ keeps the direction
    (large when the first condition tends to be larger), as R's wilcox.test V does.

    This is the tool's one signed-rank test: the audit's tests block and the pairwise follow-ups
    of k repeated conditions report it too. scipy's default method choice differs only in where
    it stops being exact (with ties or zeros, beyond 13 differences in all).
    """
    make = partial(_outcome, "wilcoxon", "Wilcoxon signed-rank test", "ranks", "T+")
    x = _matrix(x, 2, "paired data x")
    reason = _not_finite(x)
    if reason:
        return make("not computed", reason=reason)
    d = paired.differences(x, digits)
    r_plus, r_minus, tie_term, n_used = (v.item() for v in
                                         map(np.asarray, paired.signed_rank_parts(d)))
    n_used = int(n_used)
    details = {"n_pairs": int(d.size), "n_used": n_used, "n_zero": int(d.size - n_used),
               "r_plus": float(r_plus), "r_minus": float(r_minus)}
    if n_used == 0:
        return make("not computed", reason="every difference is zero: no signed ranks",
                    details=details)
    notes = []
    if details["n_zero"]:
        notes.append("zero differences dropped before ranking (Wilcoxon's method)")
    if n_used <= paired.EXACT_MAX_N:
        p = signed_rank_exact_p(d[d != 0])
        if tie_term == 0:
            method = (f"exact null distribution (no ties, at most {paired.EXACT_MAX_N} non-zero"
                      " differences)")
        else:
            method = (f"exact null distribution given the tied mid-ranks (all sign patterns, at"
                      f" most {paired.EXACT_MAX_N} non-zero differences)")
            notes.append("tied non-zero differences: the exact p is conditional on their"
                         " mid-ranks")
    else:
        with np.errstate(all="ignore"):
            z = float(paired.wilcoxon_z_values(x, digits))
        details["z"] = z
        p = float(2.0 * stats.norm.sf(abs(z)))
        method = "normal approximation with tie correction, no continuity correction"
    return make(method, statistic=r_plus, p=p, notes=notes, details=details)


def sign_test(x, *, digits: int = 12) -> TestResult:
    """Sign test: S = number of positive differences among the non-zero ones, exact binomial with
    p = 1/2 (Arbuthnot 1710; Dixon & Mood 1946; `paired.sign_test`, scipy.stats.binomtest).

    Assumes only independent participants: it asks whether a difference is as likely to be
    positive as negative (the median difference is zero), ignoring magnitudes.
    """
    make = partial(_outcome, "sign_test", "Sign test", "signs", "S",
                   "exact binomial distribution with p = 1/2, zero differences dropped")
    x = _matrix(x, 2, "paired data x")
    reason = _not_finite(x)
    if reason:
        return make(reason=reason)
    counts = paired.sign_test(paired.differences(x, digits))
    details = {k: counts[k] for k in ("positive", "negative", "zero")}
    if counts["p"] is None:
        return make(reason="every difference is zero: no signs to count", details=details)
    return make(statistic=counts["positive"], p=counts["p"], details=details)


def _mean_last(d, axis=-1):
    return np.mean(d, axis=axis)


def sign_flip_mean(x, *, rng, permutations: int = 9999, digits: int = 12) -> TestResult:
    """Permutation test of the mean difference for paired data: the sign of each rounded difference
    is flipped at random (or in all 2^n ways), which swaps a participant's two conditions, and p is
    the share of sign patterns whose mean is at least as extreme, two-sided as
    2 min(P_lower, P_upper) (Fisher 1935, sec. 21; Pitman 1937; scipy.stats.permutation_test with
    permutation_type='samples' on the differences).

    Assumes only that, under the null hypothesis, each difference is as likely to be positive as
    negative with the same size (symmetric about zero). Zero differences stay zero. Random sign
    patterns draw from `rng`.
    """
    rng = _check_rng(rng)
    permutations = _check_permutations(permutations)
    x = _matrix(x, 2, "paired data x")
    # capped: for large n, 2^n only needs to exceed the resamples asked for (and 10^15)
    distinct = 2 ** min(x.shape[0], max(64, permutations.bit_length() + 1))
    exact, method = _permutation_method(distinct, permutations, x.shape[0] * math.log10(2))
    make = partial(_outcome, "permutation_mean", "Sign-flip permutation test of the mean"
                   " difference", "means", "mean difference", method)
    reason = _not_finite(x)
    if reason is None and x.shape[0] < 2:
        # scipy.stats.permutation_test refuses a sample of one value (ValueError)
        reason = "too few pairs: at least two are needed"
    if reason:
        return make(reason=reason)
    d = paired.differences(x, digits)
    notes: list[str] = []
    if np.all(d == 0):
        notes.append("every difference is zero: every sign pattern gives the same mean")
    batch = resampling.resamples_per_chunk(d.size, min(distinct, permutations))
    with _library_call(notes):
        res = stats.permutation_test((d,), _mean_last, permutation_type="samples",
                                     vectorized=True, n_resamples=permutations, batch=batch,
                                     alternative="two-sided", rng=rng)
    return make(statistic=res.statistic, p=res.pvalue, notes=notes,
                details={"n": int(d.size), "exact": exact,
                         "rearrangements": int(min(distinct, permutations))})


# ------------------------------------------------------------------ k independent groups


def _k_groups(groups) -> list[np.ndarray]:
    out = [_vector(g, f"group {i + 1}") for i, g in enumerate(groups)]
    if len(out) < 2:
        raise ValueError(f"k independent groups: give at least two groups, got {len(out)}")
    return out


def one_way_anova(*groups) -> TestResult:
    """One-way ANOVA F = MS_between / MS_within on k - 1 and N - k df (Fisher 1925;
    scipy.stats.f_oneway).

    Assumes independent observations, normal populations and equal variances in every group.
    """
    make = partial(_outcome, "anova", "One-way ANOVA", "means", "F",
                   "F distribution with k - 1 and N - k degrees of freedom")
    groups = _k_groups(groups)
    k, n = len(groups), sum(g.size for g in groups)
    reason = _not_finite(*groups)
    if reason is None and (min(g.size for g in groups) < 1 or n - k < 1):
        reason = "too few values: every group needs one and some group at least two"
    if reason is None and all(_constant(g) for g in groups):
        reason = "no variation within any group: the within-group mean square is zero"
    if reason:
        return make(reason=reason)
    notes: list[str] = []
    with _library_call(notes):
        res = stats.f_oneway(*groups)
    return make(statistic=res.statistic, df=[float(k - 1), float(n - k)], p=res.pvalue,
                notes=notes, details={"n": [int(g.size) for g in groups]})


def welch_anova(*groups) -> TestResult:
    """Welch's ANOVA: F weighted by n_j / s_j^2, on k - 1 and (k^2 - 1) / (3 L) df (Welch 1951;
    `kgroups.welch_anova`).

    Assumes independent observations and normal populations; unequal variances are allowed.
    Undefined when a group has no variation (its weight is infinite).
    """
    make = partial(_outcome, "welch_anova", "Welch's ANOVA (unequal variances)", "means", "F",
                   "F distribution with Welch's degrees of freedom")
    groups = _k_groups(groups)
    reason = _not_finite(*groups)
    if reason is None and min(g.size for g in groups) < 2:
        reason = "too few values: every group needs at least two for its variance"
    if reason is None and any(_constant(g) for g in groups):
        reason = "a group has no variation: its weight n / s^2 is infinite"
    if reason:
        return make(reason=reason)
    notes: list[str] = []
    with _library_call(notes):
        res = kgroups.welch_anova(groups)
    if res["statistic"] is None:
        return make(reason=res.get("reason", "Welch's F is undefined for these data"))
    return make(statistic=res["statistic"], df=[float(v) for v in res["df"]], p=res["p"],
                notes=notes, details={"n": [int(g.size) for g in groups]})


def kruskal_wallis(*groups) -> TestResult:
    """Kruskal-Wallis H on the pooled mid-ranks, tie-corrected, referred to chi-squared with k - 1
    df (Kruskal & Wallis 1952; `kgroups.kruskal_wallis`, the H of `kgroups.kruskal_h_values`,
    equal to scipy.stats.kruskal's to rounding but in the centred form, which keeps its precision
    at millions of values where scipy's loses digits to cancellation).

    Assumes independent observations; a small p says at least one group tends to give larger or
    smaller values than the others. The chi-squared approximation wants about five or more values
    per group.
    """
    make = partial(_outcome, "kruskal_wallis", "Kruskal-Wallis test", "ranks", "H",
                   "chi-squared approximation with k - 1 degrees of freedom, tie-corrected")
    groups = _k_groups(groups)
    reason = _not_finite(*groups)
    if reason is None and min(g.size for g in groups) < 1:
        reason = "too few values: every group needs at least one"
    if reason is None and _constant(np.concatenate(groups)):
        reason = "every value is tied: the ranks carry no information"
    if reason:
        return make(reason=reason)
    notes: list[str] = []
    if min(g.size for g in groups) < 5:
        notes.append("a group has fewer than five values: the chi-squared approximation is rough")
    with _library_call(notes):
        res = kgroups.kruskal_wallis(groups)
    if res["statistic"] is None:
        return make(reason=res["reason"])
    return make(statistic=res["statistic"], df=float(len(groups) - 1), p=res["p"], notes=notes,
                details={"n": [int(g.size) for g in groups]})


# ------------------------------------------------------------------ k repeated conditions


def rm_anova(x) -> TestResult:
    """One-way repeated-measures ANOVA, F = MS_conditions / MS_error on k - 1 and (n - 1)(k - 1) df,
    with the Greenhouse-Geisser correction: both df times epsilon (Greenhouse & Geisser 1959;
    `kgroups.repeated_tests`).

    `df` and `p` are the corrected ones; the uncorrected df and p and epsilon are in `details`.
    Assumes independent participants and normal residuals; the correction relaxes sphericity
    (equal variances of all pairwise differences between conditions).
    """
    make = partial(_outcome, "rm_anova", "Repeated-measures ANOVA (Greenhouse-Geisser corrected)",
                   "means", "F", "F distribution with Greenhouse-Geisser corrected degrees of"
                   " freedom")
    x = _matrix(x, None, "repeated data x")
    n, k = x.shape
    reason = _not_finite(x)
    if reason is None and n < 2:
        reason = "too few participants: at least two are needed"
    if reason:
        return make(reason=reason)
    notes: list[str] = []
    with _library_call(notes):
        res = kgroups.repeated_tests(x, [f"condition {j + 1}" for j in range(k)])["rm_anova"]
    if res["statistic"] is None:
        return make(reason=res.get("reason", "F is undefined for these data"), notes=notes)
    eps = float(res["epsilon_gg"])
    df1, df2 = (float(v) for v in res["df"])
    details = {"epsilon_gg": eps, "df_uncorrected": [df1, df2], "p_uncorrected": res["p"]}
    notes.append("p and df corrected by the Greenhouse-Geisser epsilon; the uncorrected p is in"
                 " the details")
    return make(statistic=res["statistic"], df=[eps * df1, eps * df2],
                p=res["p_greenhouse_geisser"], notes=notes, details=details)


def friedman(x) -> TestResult:
    """Friedman test on the ranks within each participant, tie-corrected chi-squared on k - 1 df
    (Friedman 1937; `kgroups.friedman_values`, as scipy.stats.friedmanchisquare).

    Assumes independent participants; a small p says the conditions are not ordered at random
    within participants. The chi-squared approximation wants about ten or more participants.
    """
    make = partial(_outcome, "friedman", "Friedman test", "ranks", "chi2",
                   "chi-squared approximation with k - 1 degrees of freedom, tie-corrected")
    x = _matrix(x, None, "repeated data x")
    n, k = x.shape
    reason = _not_finite(x)
    if reason is None and n < 1:
        reason = "too few participants: at least one is needed"
    if reason is None and all(_constant(row) for row in x):
        reason = "every participant's values are tied across the conditions: no ranks differ"
    if reason:
        return make(reason=reason)
    with np.errstate(all="ignore"):
        chi2 = float(kgroups.friedman_values(x))
    notes = []
    if n < 10:
        notes.append("fewer than ten participants: the chi-squared approximation is rough")
    return make(statistic=chi2, df=float(k - 1), p=stats.chi2.sf(chi2, k - 1), notes=notes,
                details={"n": int(n), "k": int(k)})


# ------------------------------------------------------------------ registry


TESTS = {
    "two_groups": {"student_t": student_t, "welch_t": welch_t, "mann_whitney": mann_whitney,
                   "brunner_munzel": brunner_munzel,
                   "permutation_mean": permutation_mean_difference},
    "paired": {"paired_t": paired_t, "wilcoxon": wilcoxon_signed_rank, "sign_test": sign_test,
               "permutation_mean": sign_flip_mean},
    "k_groups": {"anova": one_way_anova, "welch_anova": welch_anova,
                 "kruskal_wallis": kruskal_wallis},
    "k_repeated": {"rm_anova": rm_anova, "friedman": friedman},
}

_SAMPLE_COUNT = {"two_groups": "exactly two arrays (a, b)",
                 "paired": "one array (x,) of shape (n, 2)",
                 "k_groups": "two or more arrays",
                 "k_repeated": "one array (x,) of shape (n, k)"}


def run_test(design: str, name: str, samples, *, digits: int = 12,
             rng: np.random.Generator | None = None, permutations: int = 9999) -> TestResult:
    """Run the test `name` of `design` on `samples` (see the module docstring for their shapes).
    `digits` rounds paired differences; `rng` and `permutations` serve the permutation tests."""
    if design not in TESTS:
        raise ValueError(f"unknown design {design!r}; choose one of: {', '.join(TESTS)}")
    if name not in TESTS[design]:
        raise ValueError(f"unknown test {name!r} for design {design!r}; choose one of:"
                         f" {', '.join(TESTS[design])}")
    if isinstance(samples, np.ndarray) or not isinstance(samples, (tuple, list)):
        raise ValueError(f"samples for {design!r} must be a tuple: {_SAMPLE_COUNT[design]}")
    wanted = {"two_groups": len(samples) == 2, "paired": len(samples) == 1,
              "k_groups": len(samples) >= 2, "k_repeated": len(samples) == 1}[design]
    if not wanted:
        raise ValueError(f"samples for {design!r}: give {_SAMPLE_COUNT[design]},"
                         f" got {len(samples)}")
    fn = TESTS[design][name]
    options = {"digits": digits, "rng": rng, "permutations": permutations}
    accepted = inspect.signature(fn).parameters
    return fn(*samples, **{k: v for k, v in options.items() if k in accepted})
