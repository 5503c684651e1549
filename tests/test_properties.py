"""Property-based checks of the two-group effect sizes and the numerical helpers behind them.

Hypothesis runs derandomized (a fixed search) so that every run explores the same cases.
"""

from __future__ import annotations

import math
from unittest import mock

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from auditor import parametric as par
from auditor import ranks, resampling
from auditor.effects import two_group_effects

STEADY = settings(derandomize=True, deadline=None, max_examples=60, database=None,
                  suppress_health_check=[HealthCheck.too_slow])
BRIEF = settings(STEADY, max_examples=30)

LEVEL = 0.95
RANK_INDICES = ("prob_superiority", "cliff_delta", "rank_biserial", "r_from_z")
D_FAMILY = ("cohen_d", "hedges_g", "glass_delta", "d_unpooled", "robust_d")


def by_name(reference: int = 1):
    return {spec.name: spec for spec in two_group_effects(reference)}


# ---------------------------------------------------------------- data generators


@st.composite
def gridded_pair(draw, min_size=3, max_size=18):
    """Two groups on a coarse grid (step 1/4), so ties inside and across groups are common."""
    na = draw(st.integers(min_size, max_size))
    nb = draw(st.integers(min_size, max_size))
    cells = st.integers(-40, 40)
    a = np.array(draw(st.lists(cells, min_size=na, max_size=na)), dtype=float) / 4.0
    b = np.array(draw(st.lists(cells, min_size=nb, max_size=nb)), dtype=float) / 4.0
    return a, b


@st.composite
def spread_pair(draw, min_size=3, max_size=18, max_gap=4.0):
    """Two groups whose values are distinct within each group and have a healthy spread relative
    to their location, so standardized differences are numerically well conditioned. Each group
    is centred and then moved apart by `gap` pooled SDs, which keeps |d| moderate."""
    def one(n):
        ints = draw(st.lists(st.integers(-10_000, 10_000), min_size=n, max_size=n, unique=True))
        x = np.array(ints, dtype=float) / 100.0
        return x - x.mean()

    na = draw(st.integers(min_size, max_size))
    nb = draw(st.integers(min_size, max_size))
    ua, ub = one(na), one(nb)
    sd = math.sqrt(((na - 1) * ua.var(ddof=1) + (nb - 1) * ub.var(ddof=1)) / (na + nb - 2))
    centre = draw(st.floats(-100.0, 100.0, allow_nan=False))
    stretch = draw(st.floats(0.5, 20.0, allow_nan=False))
    gap = draw(st.floats(-max_gap, max_gap, allow_nan=False))
    return centre + stretch * (ua + gap * sd), centre + stretch * ub


@st.composite
def loose_pair(draw, min_size=3, max_size=15, max_gap=4.0):
    """Either kind of data: heavily tied or well spread, sometimes tiny groups."""
    if draw(st.booleans()):
        return draw(gridded_pair(min_size, max_size))
    return draw(spread_pair(min_size, max_size, max_gap))


def close(x, y, rel=1e-9, abs_=1e-9):
    return math.isclose(x, y, rel_tol=rel, abs_tol=abs_)


# ---------------------------------------------------------------- swapping the groups


EVENLY_SPACED = np.arange(1.0, 12.0)


@STEADY
@given(pair=loose_pair(min_size=2, max_gap=8.0))
@example(pair=(EVENLY_SPACED + 4.5, EVENLY_SPACED))  # d = 1.36 with 11 per group
def test_swapping_groups_negates_signed_and_complements_probability(pair):
    a, b = pair
    forward = by_name(reference=1)   # Glass's delta scaled by B ...
    backward = by_name(reference=0)  # ... which is the first group once swapped
    for name, spec in forward.items():
        there = spec.estimate(a, b, LEVEL)
        back = backward[name].estimate(b, a, LEVEL)
        if there.value is None:
            assert back.value is None, name
            continue
        assert back.value is not None, name
        if spec.signed:
            expected, flip = -there.value, (lambda lo, hi: (-hi, -lo))
        else:
            expected, flip = 1.0 - there.value, (lambda lo, hi: (1.0 - hi, 1.0 - lo))
        assert close(back.value, expected, rel=1e-9, abs_=1e-12), name
        if there.interval is None:
            assert back.interval is None, name
            continue
        assert back.interval is not None, name
        lo, hi = flip(there.interval.low, there.interval.high)
        assert close(back.interval.low, lo, rel=1e-7, abs_=1e-9), name
        assert close(back.interval.high, hi, rel=1e-7, abs_=1e-9), name
        assert back.interval.method == there.interval.method, name


def test_swap_uses_the_right_reference_for_glass():
    # B has a much larger SD than A: Glass's delta must follow the reference group, not the slot.
    a = np.array([10.0, 10.5, 11.0, 11.5, 12.0])
    b = np.array([0.0, 4.0, 8.0, 12.0, 16.0, 20.0])
    scaled_by_b = par.glass_delta(a, b, LEVEL, reference=1).value
    assert close(scaled_by_b, (a.mean() - b.mean()) / b.std(ddof=1))
    swapped_same_ref = par.glass_delta(b, a, LEVEL, reference=0).value
    swapped_other_ref = par.glass_delta(b, a, LEVEL, reference=1).value
    assert close(swapped_same_ref, -scaled_by_b)
    assert not close(swapped_other_ref, -scaled_by_b, rel=1e-3, abs_=1e-3)


# ---------------------------------------------------------------- monotone transformations


INCREASING = {
    "exp": lambda x: np.exp(x / 8.0),
    "cube": lambda x: x**3,
    "affine": lambda x: 2.5 * x - 7.0,
    "arctan": np.arctan,
    "shifted_log": lambda x: np.log(x + 11.0),
}


@STEADY
@given(pair=gridded_pair(), transform=st.sampled_from(sorted(INCREASING)))
def test_rank_indices_ignore_increasing_transforms(pair, transform):
    a, b = pair
    f = INCREASING[transform]
    ta, tb = f(a), f(b)
    # the transform must keep the order and the ties of the pooled sample, or the test is void
    pooled, tpooled = np.concatenate([a, b]), np.concatenate([ta, tb])
    assert np.array_equal(np.argsort(pooled, kind="stable"), np.argsort(tpooled, kind="stable"))
    assert np.unique(pooled).size == np.unique(tpooled).size
    specs = by_name()
    for name in RANK_INDICES:
        before = specs[name].estimate(a, b, LEVEL)
        after = specs[name].estimate(ta, tb, LEVEL)
        assert (before.value is None) == (after.value is None), name
        if before.value is not None:
            assert close(after.value, before.value, rel=1e-12, abs_=1e-12), name
        assert (before.interval is None) == (after.interval is None), name
        if before.interval is not None:
            assert close(after.interval.low, before.interval.low, rel=1e-12, abs_=1e-12), name
            assert close(after.interval.high, before.interval.high, rel=1e-12, abs_=1e-12), name


@STEADY
@given(pair=loose_pair(),
       shift=st.floats(-500.0, 500.0, allow_nan=False),
       factor=st.floats(0.01, 100.0, allow_nan=False))
def test_hodges_lehmann_moves_with_location_and_scale(pair, shift, factor):
    a, b = pair
    base = ranks.hodges_lehmann(a, b, LEVEL)
    tol = 1e-9 * (1.0 + abs(shift) + factor * (np.abs(a).max() + np.abs(b).max()))

    both = ranks.hodges_lehmann(factor * a + shift, factor * b + shift, LEVEL)
    assert math.isclose(both.value, factor * base.value, abs_tol=tol)
    assert math.isclose(both.interval.low, factor * base.interval.low, abs_tol=tol)
    assert math.isclose(both.interval.high, factor * base.interval.high, abs_tol=tol)

    # Shifting A alone moves the estimate by the shift. (Not the interval: with ties the shift
    # changes which values tie across the groups, hence the tie correction and the order k.)
    moved = ranks.hodges_lehmann(a + shift, b, LEVEL)
    assert math.isclose(moved.value, base.value + shift, abs_tol=tol)


# ---------------------------------------------------------------- the d family: location and scale


def _same_estimate(before, after, sign, name):
    assert before.value is not None and after.value is not None, name
    assert close(after.value, sign * before.value, rel=1e-9, abs_=1e-9), name
    assert (before.interval is None) == (after.interval is None), name
    if before.interval is not None:
        lo, hi = before.interval.low, before.interval.high
        if sign < 0:
            lo, hi = -hi, -lo
        assert close(after.interval.low, lo, rel=1e-7, abs_=1e-8), name
        assert close(after.interval.high, hi, rel=1e-7, abs_=1e-8), name


@STEADY
@given(pair=spread_pair(), shift=st.floats(-100.0, 100.0, allow_nan=False))
def test_d_family_ignores_a_common_shift(pair, shift):
    a, b = pair
    specs = by_name()
    for name in D_FAMILY:
        before = specs[name].estimate(a, b, LEVEL)
        after = specs[name].estimate(a + shift, b + shift, LEVEL)
        _same_estimate(before, after, 1.0, name)


@STEADY
@given(pair=spread_pair(), factor=st.floats(0.001, 1000.0, allow_nan=False),
       negative=st.booleans())
def test_d_family_follows_the_sign_of_a_common_factor(pair, factor, negative):
    a, b = pair
    k = -factor if negative else factor
    specs = by_name()
    for name in D_FAMILY:
        before = specs[name].estimate(a, b, LEVEL)
        after = specs[name].estimate(k * a, k * b, LEVEL)
        _same_estimate(before, after, -1.0 if negative else 1.0, name)


# ---------------------------------------------------------------- analytic intervals


@STEADY
@given(pair=loose_pair(min_size=2), level=st.sampled_from([0.5, 0.8, 0.9, 0.95, 0.99]))
def test_analytic_intervals_hold_the_estimate_and_respect_bounds(pair, level):
    a, b = pair
    for spec in two_group_effects():
        est = spec.estimate(a, b, level)
        if est.value is None:
            assert est.reason, spec.name
            continue
        assert math.isfinite(est.value), spec.name
        if spec.bounds is not None:
            assert spec.bounds[0] <= est.value <= spec.bounds[1], spec.name
        iv = est.interval
        if iv is None:
            continue
        assert math.isfinite(iv.low) and math.isfinite(iv.high), spec.name
        assert iv.level == level, spec.name
        slack = 1e-12 * (1.0 + abs(est.value))
        assert iv.low - slack <= est.value <= iv.high + slack, (spec.name, iv, est.value)
        if spec.bounds is not None:
            assert spec.bounds[0] <= iv.low and iv.high <= spec.bounds[1], (spec.name, iv)


# ---------------------------------------------------------------- vectorised values


@st.composite
def stacked_pair(draw):
    rows = draw(st.integers(1, 5))
    na, nb = draw(st.integers(2, 14)), draw(st.integers(2, 14))
    if draw(st.booleans()):
        cells = st.integers(-6, 6).map(lambda k: k / 2.0)
    else:
        cells = st.floats(-1e3, 1e3, allow_nan=False, allow_infinity=False, width=32)
    flat_a = draw(st.lists(cells, min_size=rows * na, max_size=rows * na))
    flat_b = draw(st.lists(cells, min_size=rows * nb, max_size=rows * nb))
    return (np.array(flat_a, dtype=float).reshape(rows, na),
            np.array(flat_b, dtype=float).reshape(rows, nb))


def _row_matches(spec, va, row_a, row_b):
    est = spec.estimate(row_a, row_b, LEVEL)
    if est.value is None:
        assert not np.isfinite(va), (spec.name, va)
    else:
        assert math.isclose(float(va), est.value, rel_tol=1e-9, abs_tol=1e-12), (
            spec.name, float(va), est.value)


@STEADY
@given(stack=stacked_pair(), reference=st.sampled_from([0, 1]))
@pytest.mark.slow
def test_vectorised_values_match_scalar_estimates(stack, reference):
    A, B = stack
    for spec in two_group_effects(reference):
        with np.errstate(all="ignore"):
            vals = np.asarray(spec.values(A, B))
        assert vals.shape == (A.shape[0],), spec.name
        for i in range(A.shape[0]):
            _row_matches(spec, vals[i], A[i], B[i])


def test_vectorised_values_match_on_large_groups():
    # n_A n_B above the all-pairs limit sends the Hodges-Lehmann shift through the selection path
    gen = np.random.default_rng(4411)
    A = gen.gamma(2.0, 3.0, size=(3, 61)).round(1)
    B = gen.gamma(2.5, 3.0, size=(3, 47)).round(1)
    assert A.shape[1] * B.shape[1] > ranks.EXACT_MAX_PAIRS
    for spec in two_group_effects():
        vals = np.asarray(spec.values(A, B))
        for i in range(A.shape[0]):
            _row_matches(spec, vals[i], A[i], B[i])


# ---------------------------------------------------------------- selection of pairwise differences


@st.composite
def offset_samples(draw):
    offset = draw(st.sampled_from([0.0, 1.0, 1e3, 1e6, -1e6, 1e9]))
    step = draw(st.sampled_from([0.5, 0.1, 0.01, 1e-3]))
    spread = draw(st.integers(0, 30))
    na, nb = draw(st.integers(1, 30)), draw(st.integers(1, 30))
    cells = st.integers(-spread, spread)
    a = offset + step * np.array(draw(st.lists(cells, min_size=na, max_size=na)), dtype=float)
    b = offset + step * np.array(draw(st.lists(cells, min_size=nb, max_size=nb)), dtype=float)
    k = draw(st.integers(1, na * nb))
    return np.sort(a), np.sort(b), k


@settings(STEADY, max_examples=120)
@given(case=offset_samples())
@example(case=(np.full(20, 1e6 + 0.1), np.full(20, 1e6), 200))
@example(case=(np.ones(7), np.ones(10), 1))
def test_kth_pairwise_difference_equals_naive_selection(case):
    a, b, k = case
    naive = np.sort(np.subtract.outer(a, b).ravel())
    assert ranks.kth_pairwise_difference(a, b, k) == naive[k - 1]


@pytest.mark.parametrize(("a", "b", "median_gap"), [
    (np.ones(7), np.ones(10), 0.0),                       # identical groups: no shift at all
    (np.full(30, 1e9 + 0.5), np.full(30, 1e9), 0.5),      # tied readings on a large baseline
], ids=["identical_tied_groups", "tied_far_from_zero"])
def test_hodges_lehmann_is_exactly_the_median_difference_for_tied_data(a, b, median_gap):
    assert float(np.median(np.subtract.outer(a, b))) == median_gap
    est = ranks.hodges_lehmann(a, b, LEVEL)
    assert est.value == median_gap
    assert est.interval.low == est.interval.high == median_gap  # every difference is the same
    assert float(ranks.hodges_lehmann_values(a[None, :], b[None, :])[0]) == median_gap


# ---------------------------------------------------------------- tie blocks


@st.composite
def tied_matrix(draw):
    rows, cols = draw(st.integers(1, 4)), draw(st.integers(1, 25))
    levels = draw(st.integers(1, 8))
    cells = st.integers(0, levels - 1).map(lambda k: k * 0.3 - 1.0)
    flat = draw(st.lists(cells, min_size=rows * cols, max_size=rows * cols))
    return np.array(flat, dtype=float).reshape(rows, cols)


@STEADY
@given(x=tied_matrix())
def test_tie_sizes_agree_with_unique_counts(x):
    got = ranks.tie_sizes(x)
    assert got.shape == x.shape
    for row, sizes in zip(x, got):
        values, counts = np.unique(row, return_counts=True)
        expected = counts[np.searchsorted(values, row)]
        assert np.array_equal(sizes, expected)
    assert np.array_equal(ranks.tie_sizes(x[0]), got[0])  # one-dimensional input too


# ---------------------------------------------------------------- leave-one-out


def _loop_leave_one_out(statistic, a, b):
    with np.errstate(all="ignore"):
        drop_a = [float(statistic(np.delete(a, i)[None, :], b[None, :])[0]) for i in range(a.size)]
        drop_b = [float(statistic(a[None, :], np.delete(b, j)[None, :])[0]) for j in range(b.size)]
    return np.array(drop_a), np.array(drop_b)


@BRIEF
@given(pair=loose_pair(min_size=3, max_size=12), chunk=st.sampled_from([None, 1, 7, 40]))
def test_leave_one_out_equals_a_plain_loop(pair, chunk):
    a, b = pair
    budget = resampling.CHUNK_VALUES if chunk is None else chunk
    with mock.patch.object(resampling, "CHUNK_VALUES", budget):
        for spec in two_group_effects():
            got_a, got_b = resampling.leave_one_out(spec.values, a, b)
            want_a, want_b = _loop_leave_one_out(spec.values, a, b)
            assert got_a.shape == (a.size,) and got_b.shape == (b.size,)
            np.testing.assert_allclose(got_a, want_a, rtol=1e-12, atol=1e-12, equal_nan=True,
                                       err_msg=spec.name)
            np.testing.assert_allclose(got_b, want_b, rtol=1e-12, atol=1e-12, equal_nan=True,
                                       err_msg=spec.name)


# ---------------------------------------------------------------- BCa


def _normal_groups():
    gen = np.random.default_rng(90210)
    return gen.normal(0.4, 1.0, 200), gen.normal(0.0, 1.4, 200)


def test_bca_mean_difference_is_close_to_welch_for_normal_data():
    a, b = _normal_groups()
    theta = float(par.mean_difference_values(a, b))
    reps = resampling.bootstrap_replicates({"md": par.mean_difference_values}, a, b, 4000,
                                           np.random.default_rng(7))["md"]
    loo = resampling.leave_one_out(par.mean_difference_values, a, b)
    boot = resampling.bca_interval(theta, reps, loo, LEVEL)
    welch = par.mean_difference(a, b, LEVEL).interval
    assert boot.interval is not None and boot.undefined_resamples == 0
    assert boot.interval.low < theta < boot.interval.high
    half = (welch.high - welch.low) / 2
    assert abs(boot.interval.low - welch.low) < 0.15 * half
    assert abs(boot.interval.high - welch.high) < 0.15 * half
    assert abs(boot.bias_correction) < 0.1 and abs(boot.acceleration) < 0.05


def test_bca_matches_scipy_bootstrap_on_the_same_stream():
    from scipy import stats

    a, b = _normal_groups()
    resamples = 2000

    def mean_gap(x, y, axis=-1):
        return np.mean(x, axis=axis) - np.mean(y, axis=axis)

    reps = resampling.bootstrap_replicates({"md": par.mean_difference_values}, a, b, resamples,
                                           np.random.default_rng(31))["md"]
    loo = resampling.leave_one_out(par.mean_difference_values, a, b)
    ours = resampling.bca_interval(float(mean_gap(a, b)), reps, loo, LEVEL).interval
    ref = stats.bootstrap((a, b), mean_gap, n_resamples=resamples, method="BCa",
                          batch=resampling.chunk_size(a.size, b.size, resamples),
                          confidence_level=LEVEL, rng=np.random.default_rng(31))
    assert ours.low == pytest.approx(ref.confidence_interval.low, rel=1e-9)
    assert ours.high == pytest.approx(ref.confidence_interval.high, rel=1e-9)


# ---------------------------------------------------------------- mid-ranks


@STEADY
@given(st.lists(st.one_of(st.integers(-3, 3).map(float),
                          st.floats(allow_nan=False, width=64),
                          st.sampled_from([0.0, -0.0, math.inf, -math.inf])),
                min_size=1, max_size=40))
def test_midranks_equal_scipy_rankdata(values):
    from scipy import stats

    x = np.asarray(values, dtype=float)
    assert np.array_equal(ranks.midranks(x), stats.rankdata(x))
    whole = np.round(np.clip(x[np.isfinite(x)], -1e6, 1e6)).astype(np.int64)
    assert np.array_equal(ranks.midranks(whole), stats.rankdata(whole))


def test_midranks_of_arrays_with_nan_or_more_axes_are_scipy_s():
    from scipy import stats

    with_nan = np.array([2.0, np.nan, 1.0])
    assert np.array_equal(ranks.midranks(with_nan), stats.rankdata(with_nan), equal_nan=True)
    grid = np.array([[3.0, 1.0, 3.0], [0.0, 0.0, 5.0]])
    assert np.array_equal(ranks.midranks(grid), stats.rankdata(grid, axis=-1))


@STEADY
@given(st.lists(st.integers(-3, 3).map(float), min_size=1, max_size=30),
       st.lists(st.one_of(st.integers(-3, 3).map(float), st.floats(-4, 4, width=16),
                          st.sampled_from([-0.0, math.inf, -math.inf])), min_size=1, max_size=30))
def test_placements_from_one_sort_are_the_mid_rank_differences(a, b):
    """P_A = R_A - R^(A)_A, P_B = R_B - R^(B)_B exactly (Brunner & Munzel 2000), and each is a
    count of the other group's values below plus half of those equal."""
    a, b = np.asarray(a), np.asarray(b)
    pooled = ranks.midranks(np.concatenate([a, b]))
    pa, pb = ranks.placements(a, b)
    assert np.array_equal(pa, pooled[:a.size] - ranks.midranks(a))
    assert np.array_equal(pb, pooled[a.size:] - ranks.midranks(b))
    assert np.array_equal(pa, [np.sum(b < x) + 0.5 * np.sum(b == x) for x in a])
    assert np.array_equal(pb, [np.sum(a < y) + 0.5 * np.sum(a == y) for y in b])


def test_placements_with_nan_are_the_mid_rank_differences():
    a, b = np.array([1.0, np.nan, 2.0]), np.array([2.0, 0.5])
    pooled = ranks.midranks(np.concatenate([a, b]))
    pa, pb = ranks.placements(a, b)
    assert np.array_equal(pa, pooled[:3] - ranks.midranks(a), equal_nan=True)
    assert np.array_equal(pb, pooled[3:] - ranks.midranks(b), equal_nan=True)


@STEADY
@given(st.one_of(
    st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=3, max_size=60),
    st.lists(st.integers(1, 3).map(float), min_size=3, max_size=60),
    st.lists(st.floats(-1e-6, 1e-6).map(lambda v: 1e8 + v), min_size=3, max_size=20)))
def test_shape_statistics_and_mad_are_scipy_s(values):
    """G1, G2 and the MAD equal scipy.stats.skew / kurtosis (bias=False) and
    median_abs_deviation exactly, None where scipy's are not finite."""
    import warnings

    from scipy import stats

    from auditor import diagnostics

    x = np.asarray(values)
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        g1, g2 = stats.skew(x, bias=False), stats.kurtosis(x, bias=False)
    want = (diagnostics._finite(g1), diagnostics._finite(g2) if x.size >= 4 else None)
    assert diagnostics.shape_statistics(x) == want
    assert diagnostics.median_abs_deviation(x) == stats.median_abs_deviation(x)


@pytest.mark.parametrize("row", [[4.0], [2.0, 2.0], [3.0, 1.0, 3.0, -0.0, 0.0, 7.5, 1.0],
                                 [2.0, np.nan, 1.0], [np.inf, -np.inf, 5.0, np.inf]])
@pytest.mark.parametrize("shape", [(1, -1), (1, 1, -1)])
def test_midranks_of_a_single_row_are_scipy_s(row, shape):
    from scipy import stats

    x = np.asarray(row).reshape(shape)
    ours = ranks.midranks(x)
    assert ours.shape == x.shape
    assert np.array_equal(ours, stats.rankdata(x, axis=-1), equal_nan=True)
