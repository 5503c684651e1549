"""Property-based checks of the paired, k-independent and k-repeated effect sizes, taken from the
registry (`paired_effects`, `k_independent_effects`, `k_repeated_effects`), and of Holm's
adjustment.

Hypothesis runs derandomized (a fixed search) so that every run explores the same cases.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.stats.multitest import multipletests

from auditor import adjust
from auditor.effects import k_independent_effects, k_repeated_effects, paired_effects
from auditor.ranks import midranks

STEADY = settings(derandomize=True, deadline=None, max_examples=40, database=None,
                  suppress_health_check=[HealthCheck.too_slow])
LEVEL = 0.95
DIGITS = 2  # every generated value has at most two decimals

SIGNED_PAIRED = {"mean_difference", "d_z", "d_av", "d_rm", "matched_rank_biserial", "r_from_z",
                 "hodges_lehmann"}

INCREASING = {
    "exp": lambda x: np.exp(x / 8.0),
    "cube": lambda x: x**3,
    "affine": lambda x: 3.5 * x + 11.0,
    "arctan": np.arctan,
    "shifted_log": lambda x: np.log(x + 41.0),
}


def specs_by_name(specs):
    return {s.name: s for s in specs}


def close(x, y, rel=1e-9, abs_=1e-12):
    return math.isclose(x, y, rel_tol=rel, abs_tol=abs_)


def same_value(value, estimate, rel=1e-9, abs_=1e-12):
    """A vectorised value (NaN when undefined) against a scalar estimate (None when undefined)."""
    if estimate.value is None:
        return not np.isfinite(value)
    return bool(np.isfinite(value)) and close(float(value), estimate.value, rel, abs_)


# ---------------------------------------------------------------- data generators


@st.composite
def paired_rows(draw, min_n=3, max_n=16):
    """Rows (n, 2): either coarse quarters with many ties and zero differences, or spread values
    with two decimals."""
    n = draw(st.integers(min_n, max_n))
    if draw(st.booleans()):
        cells = st.integers(-24, 24)
        scale = 4.0
    else:
        cells = st.integers(-50_000, 50_000)
        scale = 100.0
    values = draw(st.lists(cells, min_size=2 * n, max_size=2 * n))
    return np.array(values, dtype=float).reshape(n, 2) / scale


@st.composite
def repeated_rows(draw, min_n=3, max_n=12, min_k=3, max_k=5):
    """Rows (n, k) of small integers (ties within rows are common)."""
    n = draw(st.integers(min_n, max_n))
    k = draw(st.integers(min_k, max_k))
    values = draw(st.lists(st.integers(-30, 30), min_size=n * k, max_size=n * k))
    return np.array(values, dtype=float).reshape(n, k)


@st.composite
def k_groups(draw, min_k=3, max_k=5, min_size=2, max_size=10):
    """Three or more groups of quarter-step values (ties within and across groups)."""
    k = draw(st.integers(min_k, max_k))
    out = []
    for _ in range(k):
        size = draw(st.integers(min_size, max_size))
        cells = draw(st.lists(st.integers(-40, 40), min_size=size, max_size=size))
        out.append(np.array(cells, dtype=float) / 4.0)
    return tuple(out)


# ---------------------------------------------------------------- paired: swapping conditions


def test_signed_flags_of_the_paired_registry():
    # the swap property below relies on these flags; a wrong flag must not hide a wrong sign
    specs = paired_effects(DIGITS)
    assert {s.name for s in specs if s.signed} == SIGNED_PAIRED
    assert {s.name for s in specs if not s.signed} == {"ps_dep"}


@STEADY
@given(x=paired_rows())
@example(x=np.array([[5.1, 4.9], [0.3, 0.1], [7.4, 7.2], [2.2, 2.0], [6.3, 5.9], [3.8, 4.1]]))
@example(x=np.array([[1.0, 1.0], [2.0, 2.0], [3.0, 2.5], [4.0, 4.0]]))
def test_swapping_conditions_negates_signed_and_complements_ps_dep(x):
    swapped = x[:, ::-1]
    for spec in paired_effects(DIGITS):
        there = spec.estimate(x, LEVEL)
        back = spec.estimate(swapped, LEVEL)
        if there.value is None:
            assert back.value is None, spec.name
            continue
        assert back.value is not None, spec.name
        if spec.name == "ps_dep":
            expected, flip = 1.0 - there.value, (lambda lo, hi: (1.0 - hi, 1.0 - lo))
        else:
            expected, flip = -there.value, (lambda lo, hi: (-hi, -lo))
        assert close(back.value, expected, rel=1e-9, abs_=1e-12), spec.name
        if there.interval is None:
            assert back.interval is None, spec.name
            continue
        assert back.interval is not None, spec.name
        assert back.interval.method == there.interval.method, spec.name
        lo, hi = flip(there.interval.low, there.interval.high)
        assert close(back.interval.low, lo, rel=1e-7, abs_=1e-9), spec.name
        assert close(back.interval.high, hi, rel=1e-7, abs_=1e-9), spec.name


@STEADY
@given(x=paired_rows(), seed=st.integers(0, 2**32 - 1))
def test_paired_values_match_the_estimate_row_by_row(x, seed):
    rng = np.random.default_rng(seed)
    n = x.shape[0]
    stacked = x[rng.integers(0, n, (6, n))]  # (m, n, 2): whole participants resampled
    assert stacked.shape == (6, n, 2)
    for spec in paired_effects(DIGITS):
        values = spec.values(stacked)
        assert values.shape == (6,), spec.name
        for row, value in zip(stacked, values):
            assert same_value(value, spec.estimate(row, LEVEL)), spec.name


@STEADY
@given(x=paired_rows(), shift=st.integers(-1000, 1000))
def test_difference_based_indices_ignore_a_common_shift_of_both_conditions(x, shift):
    # differences, and so every index built on them, do not move when both conditions move
    specs = specs_by_name(paired_effects(DIGITS))
    moved = x + shift
    for name in ("ps_dep", "matched_rank_biserial", "r_from_z", "hodges_lehmann",
                 "mean_difference"):
        a, b = specs[name].estimate(x, LEVEL), specs[name].estimate(moved, LEVEL)
        assert (a.value is None) == (b.value is None), name
        if a.value is not None:
            assert close(a.value, b.value, rel=1e-9, abs_=1e-9), name


# ---------------------------------------------------------------- Kendall's W


def kendall_w(x):
    return specs_by_name(k_repeated_effects())["kendall_w"].estimate(x, LEVEL)


@STEADY
@given(x=repeated_rows())
def test_kendall_w_lies_in_unit_interval(x):
    est = kendall_w(x)
    if np.all(np.ptp(x, axis=1) == 0):
        assert est.value is None  # every participant tied across conditions
        return
    assert est.value is not None
    assert -1e-12 <= est.value <= 1.0 + 1e-12


@STEADY
@given(n=st.integers(3, 12), k=st.integers(3, 6), seed=st.integers(0, 2**32 - 1))
def test_kendall_w_is_one_when_every_participant_orders_alike(n, k, seed):
    rng = np.random.default_rng(seed)
    steps = rng.integers(1, 20, size=(n, k)).astype(float)
    rows = np.cumsum(steps, axis=1) + rng.integers(-50, 50, size=(n, 1))
    assert np.all(np.diff(rows, axis=1) > 0)
    assert math.isclose(kendall_w(rows).value, 1.0, rel_tol=1e-12)
    order = rng.permutation(k)  # the same ordering, columns relabelled
    assert math.isclose(kendall_w(rows[:, order]).value, 1.0, rel_tol=1e-12)


@STEADY
@given(x=repeated_rows(), transform=st.sampled_from(sorted(INCREASING)))
def test_kendall_w_ignores_an_increasing_transform(x, transform):
    y = INCREASING[transform](x)
    # the transform must keep every within-row order and tie, or the check is void
    assert np.array_equal(midranks(x), midranks(y))
    before, after = kendall_w(x), kendall_w(y)
    assert (before.value is None) == (after.value is None)
    if before.value is not None:
        assert close(after.value, before.value, rel=1e-12, abs_=1e-12)


@STEADY
@given(x=repeated_rows(), seed=st.integers(0, 2**32 - 1))
def test_kendall_w_ignores_each_participants_own_scale_and_level(x, seed):
    rng = np.random.default_rng(seed)
    n = x.shape[0]
    y = x * rng.integers(1, 9, size=(n, 1)) + rng.integers(-100, 100, size=(n, 1))
    assert np.array_equal(midranks(x), midranks(y))
    before, after = kendall_w(x), kendall_w(y)
    assert (before.value is None) == (after.value is None)
    if before.value is not None:
        assert close(after.value, before.value, rel=1e-12, abs_=1e-12)


@STEADY
@given(x=repeated_rows())
def test_kendall_w_agrees_with_scipy_friedman(x):
    est = kendall_w(x)
    if est.value is None:
        return
    n, k = x.shape
    with np.errstate(all="ignore"):
        chi2 = stats.friedmanchisquare(*x.T).statistic
    assert close(est.value, float(chi2) / (n * (k - 1)), rel=1e-9, abs_=1e-12)


# ---------------------------------------------------------------- generalized eta squared


def ges(x):
    return specs_by_name(k_repeated_effects())["generalized_eta_squared"].estimate(x, LEVEL)


@STEADY
@given(x=repeated_rows())
def test_generalized_eta_squared_lies_in_unit_interval(x):
    est = ges(x)
    if np.all(x == x[0, 0]):
        assert est.value is None
        return
    assert est.value is not None
    assert -1e-12 <= est.value <= 1.0 + 1e-12


@STEADY
@given(x=repeated_rows(), shift=st.floats(-1e4, 1e4, allow_nan=False),
       factor=st.floats(0.01, 100.0, allow_nan=False), negate=st.booleans())
def test_generalized_eta_squared_ignores_common_location_and_scale(x, shift, factor, negate):
    scale = -factor if negate else factor
    before, after = ges(x), ges(scale * x + shift)
    assert (before.value is None) == (after.value is None)
    if before.value is not None:
        assert close(after.value, before.value, rel=1e-8, abs_=1e-10)


@STEADY
@given(x=repeated_rows(), seed=st.integers(0, 2**32 - 1))
def test_generalized_eta_squared_ignores_order_of_participants_and_conditions(x, seed):
    rng = np.random.default_rng(seed)
    y = x[rng.permutation(x.shape[0])][:, rng.permutation(x.shape[1])]
    before, after = ges(x), ges(y)
    assert (before.value is None) == (after.value is None)
    if before.value is not None:
        assert close(after.value, before.value, rel=1e-9, abs_=1e-12)


@STEADY
@given(x=repeated_rows())
def test_generalized_eta_squared_grows_when_participant_levels_are_removed(x):
    # Shifting a participant's values by a constant changes only SS_participants: removing every
    # participant's own level (SS_participants = 0) can only raise the index, to the partial
    # SS_conditions / (SS_conditions + SS_error).
    before = ges(x)
    centred = x - x.mean(axis=1, keepdims=True)
    after = ges(centred)
    if before.value is None or after.value is None:
        return
    assert after.value >= before.value - 1e-12
    n, k = x.shape
    grand = x.mean()
    ss_cond = n * np.sum((x.mean(axis=0) - grand) ** 2)
    ss_subj = k * np.sum((x.mean(axis=1) - grand) ** 2)
    ss_total = np.sum((x - grand) ** 2)
    assert close(before.value, ss_cond / ss_total, rel=1e-9, abs_=1e-12)
    assert close(after.value, ss_cond / (ss_total - ss_subj), rel=1e-9, abs_=1e-12)


@STEADY
@given(x=repeated_rows(), seed=st.integers(0, 2**32 - 1))
def test_repeated_values_match_the_estimate_row_by_row(x, seed):
    rng = np.random.default_rng(seed)
    n = x.shape[0]
    stacked = x[rng.integers(0, n, (5, n))]  # (m, n, k)
    for spec in k_repeated_effects():
        values = spec.values(stacked)
        assert values.shape == (5,), spec.name
        for rows, value in zip(stacked, values):
            assert same_value(value, spec.estimate(rows, LEVEL)), spec.name


# ---------------------------------------------------------------- k independent groups


def k_estimate(name, groups):
    return specs_by_name(k_independent_effects())[name].estimate(*groups, LEVEL)


@STEADY
@given(groups=k_groups(), transform=st.sampled_from(sorted(INCREASING)))
def test_rank_omnibus_indices_ignore_an_increasing_transform(groups, transform):
    f = INCREASING[transform]
    moved = tuple(f(g) for g in groups)
    pooled, tpooled = np.concatenate(groups), np.concatenate(moved)
    assert np.array_equal(midranks(pooled), midranks(tpooled))
    for name in ("epsilon_squared_h", "eta_squared_h"):
        before, after = k_estimate(name, groups), k_estimate(name, moved)
        assert (before.value is None) == (after.value is None), name
        if before.value is not None:
            assert close(after.value, before.value, rel=1e-12, abs_=1e-12), name


@STEADY
@given(groups=k_groups(), seed=st.integers(0, 2**32 - 1))
def test_omnibus_indices_ignore_the_order_of_the_groups(groups, seed):
    order = np.random.default_rng(seed).permutation(len(groups))
    shuffled = tuple(groups[i] for i in order)
    for spec in k_independent_effects():
        before = spec.estimate(*groups, LEVEL)
        after = spec.estimate(*shuffled, LEVEL)
        assert (before.value is None) == (after.value is None), spec.name
        if before.value is not None:
            assert close(after.value, before.value, rel=1e-9, abs_=1e-12), spec.name


@STEADY
@given(groups=k_groups(), shift=st.floats(-1e4, 1e4, allow_nan=False),
       factor=st.floats(0.01, 100.0, allow_nan=False), negate=st.booleans())
def test_anova_indices_ignore_location_and_scale(groups, shift, factor, negate):
    scale = -factor if negate else factor
    moved = tuple(scale * g + shift for g in groups)
    for name in ("eta_squared", "omega_squared"):
        before, after = k_estimate(name, groups), k_estimate(name, moved)
        assert (before.value is None) == (after.value is None), name
        if before.value is not None:
            assert close(after.value, before.value, rel=1e-8, abs_=1e-10), name


@STEADY
@given(groups=k_groups())
def test_epsilon_squared_h_is_eta_squared_of_the_ranks(groups):
    # H (tie-corrected) = (N - 1) SS_between / SS_total of the pooled mid-ranks, so
    # epsilon^2_H = H / (N - 1) is the ANOVA eta^2 computed on the ranks: within [0, 1]
    sizes = [g.size for g in groups]
    ranks = np.split(midranks(np.concatenate(groups)), np.cumsum(sizes)[:-1])
    eps = k_estimate("epsilon_squared_h", groups)
    on_ranks = k_estimate("eta_squared", tuple(ranks))
    assert (eps.value is None) == (on_ranks.value is None)
    if eps.value is not None:
        assert close(eps.value, on_ranks.value, rel=1e-9, abs_=1e-12)
        assert -1e-12 <= eps.value <= 1.0 + 1e-12
        n, k = sum(sizes), len(groups)
        h = eps.value * (n - 1)
        assert close(k_estimate("eta_squared_h", groups).value, (h - k + 1) / (n - k),
                     rel=1e-9, abs_=1e-12)


@STEADY
@given(groups=k_groups())
def test_omnibus_indices_agree_with_scipy(groups):
    n, k = sum(g.size for g in groups), len(groups)
    eps = k_estimate("epsilon_squared_h", groups)
    eta = k_estimate("eta_squared", groups)
    if eps.value is None or eta.value is None:
        assert np.all(np.concatenate(groups) == groups[0][0])
        return
    with np.errstate(all="ignore"):
        h = stats.kruskal(*groups).statistic
        f = stats.f_oneway(*groups).statistic
    assert close(eps.value, float(h) / (n - 1), rel=1e-9, abs_=1e-12)
    if np.isfinite(f):
        assert close(eta.value, f * (k - 1) / (f * (k - 1) + n - k), rel=1e-8, abs_=1e-12)
        # omega^2 = df_b (F - 1) / (df_b (F - 1) + N)
        assert close(k_estimate("omega_squared", groups).value,
                     (k - 1) * (f - 1) / ((k - 1) * (f - 1) + n), rel=1e-8, abs_=1e-12)
    assert -1e-12 <= eta.value <= 1.0 + 1e-12
    assert k_estimate("omega_squared", groups).value <= eta.value + 1e-12


@STEADY
@given(groups=k_groups(), seed=st.integers(0, 2**32 - 1))
def test_k_independent_values_match_the_estimate_row_by_row(groups, seed):
    rng = np.random.default_rng(seed)
    stacked = tuple(g[rng.integers(0, g.size, (5, g.size))] for g in groups)  # (m, n_j) each
    for spec in k_independent_effects():
        values = spec.values(*stacked)
        assert values.shape == (5,), spec.name
        for r, value in enumerate(values):
            est = spec.estimate(*(s[r] for s in stacked), LEVEL)
            assert same_value(value, est), spec.name


# ---------------------------------------------------------------- Holm's adjustment


def holm_direct(pvalues):
    """Holm (1979) written from its definition: the adjusted p of the i-th smallest is the
    largest of (m - j) p_(j), j <= i (0-based), capped at 1; None entries are skipped."""
    present = [i for i, p in enumerate(pvalues) if p is not None]
    m = len(present)
    ordered = sorted(present, key=lambda i: pvalues[i])
    out = [None] * len(pvalues)
    for pos, i in enumerate(ordered):
        out[i] = min(1.0, max((m - j) * pvalues[ordered[j]] for j in range(pos + 1)))
    return out


p_values = st.lists(st.one_of(st.none(), st.floats(0.0, 1.0, allow_nan=False),
                              st.sampled_from([0.01, 0.02, 0.05])), min_size=0, max_size=12)


@STEADY
@given(ps=p_values)
def test_holm_matches_its_definition(ps):
    got = adjust.holm(ps)
    want = holm_direct(ps)
    assert len(got) == len(ps)
    for g, w, p in zip(got, want, ps):
        if p is None:
            assert g is None
        else:
            assert close(g, w, rel=1e-12, abs_=1e-15)


@STEADY
@given(ps=p_values)
def test_holm_is_monotone_and_bounded(ps):
    got = adjust.holm(ps)
    present = [(p, a) for p, a in zip(ps, got) if p is not None]
    for p, a in present:
        assert p <= a <= 1.0
    for p1, a1 in present:
        for p2, a2 in present:
            if p1 <= p2:
                assert a1 <= a2


@STEADY
@given(ps=st.lists(st.floats(1e-12, 1.0, allow_nan=False), min_size=1, max_size=12))
@pytest.mark.slow
def test_holm_agrees_with_statsmodels(ps):
    _, expected, _, _ = multipletests(ps, method="holm")
    assert adjust.holm(ps) == pytest.approx(list(expected), rel=1e-12, abs=1e-15)


def test_holm_small_example():
    # four p-values: 0.01 x 4 = 0.04, 0.02 x 3 = 0.06, 0.03 x 2 = 0.06, 0.04 x 1 -> 0.06 (monotone)
    got = adjust.holm([0.03, None, 0.01, 0.02, 0.04])
    assert got[1] is None
    assert [got[i] for i in (0, 2, 3, 4)] == pytest.approx([0.06, 0.04, 0.06, 0.06])
    assert adjust.holm([0.02, 0.01, 0.04]) == pytest.approx([0.04, 0.03, 0.04])
    assert adjust.holm([0.5, None, 0.5]) == [1.0, None, 1.0]
    assert adjust.holm([]) == []
