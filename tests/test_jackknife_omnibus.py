"""The exact leave-one-out paths of the omnibus effects (k independent groups, k repeated
conditions) equal the plain refit loop and the generic `leave_one_out_units` to 1e-12, with the
same finiteness: continuous data, heavy ties, data far from zero, gross outliers, the smallest
designs, k = 3 and k = 5, unequal group sizes."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from auditor import jackknife_omnibus as jo
from auditor import kgroups
from refit import assert_close as _close
from refit import refit_loop as _loop
from auditor.resampling import leave_one_out_units

STEADY = settings(derandomize=True, deadline=None, max_examples=60, database=None,
                  suppress_health_check=[HealthCheck.too_slow])

GROUP_PATHS = {
    "epsilon_squared_h": (jo.epsilon_squared_h, kgroups.epsilon_squared_h_values),
    "eta_squared_h": (jo.eta_squared_h, kgroups.eta_squared_h_values),
    "eta_squared": (jo.eta_squared, kgroups.eta_squared_values),
    "omega_squared": (jo.omega_squared, kgroups.omega_squared_values),
}
RANK_GROUP_PATHS = ("epsilon_squared_h", "eta_squared_h")
ROW_PATHS = {
    "kendall_w": (jo.kendall_w, kgroups.kendall_w_values),
    "generalized_eta_squared": (jo.generalized_eta_squared,
                                kgroups.generalized_eta_squared_values),
}




def _check(paths, name, samples):
    fast_fn, values_fn = paths[name]
    fast = fast_fn(*samples)
    _close(fast, _loop(values_fn, samples))
    _close(fast, leave_one_out_units(values_fn, samples))
    return fast


# ------------------------------------------------------------------ k independent groups


def _group_cases():
    rng = np.random.default_rng(90210)
    yield "continuous_k3", (rng.normal(0.0, 1.0, 14), rng.normal(0.6, 1.0, 9),
                            rng.normal(0.2, 1.5, 21))
    yield "ties_1_to_5_k5", tuple(rng.integers(1, 6, n).astype(float) for n in (12, 7, 15, 9, 20))
    yield "far_from_zero_k3", tuple(1e6 + rng.normal(shift, 1e-3, n)
                                    for shift, n in ((0.0, 11), (5e-4, 8), (-3e-4, 13)))
    yield "smallest_k3", (np.array([1.0, 2.5]), np.array([4.0, 3.0]), np.array([2.0, 0.5]))
    yield "smallest_k5_tied", (np.array([1.0, 2.0]), np.array([2.0, 2.0]), np.array([3.0, 1.0]),
                               np.array([2.0, 3.0]), np.array([1.0, 1.0]))
    yield "outlier_k3", (np.append(rng.normal(0.0, 1.0, 8), 1e9), rng.normal(0.5, 1.0, 6),
                         rng.normal(-0.5, 1.0, 7))


GROUP_CASES = list(_group_cases())


@pytest.mark.parametrize("name", sorted(GROUP_PATHS))
@pytest.mark.parametrize("case,groups", GROUP_CASES, ids=[c[0] for c in GROUP_CASES])
def test_group_fast_path_equals_the_refit_loop(name, case, groups):
    fast = _check(GROUP_PATHS, name, groups)
    assert len(fast) == len(groups)
    assert [v.shape for v in fast] == [g.shape for g in groups]
    assert all(np.all(np.isfinite(v)) for v in fast)


@pytest.mark.parametrize("name", sorted(GROUP_PATHS))
def test_removal_that_leaves_every_value_equal(name):
    # 2 everywhere but one 9 (and then 0.1 everywhere but one 0.7, whose mean is inexact)
    for low, high in ((2.0, 9.0), (0.1, 0.7)):
        groups = (np.array([low, low, low, high]), np.array([low, low]), np.array([low, low, low]))
        fast = _check(GROUP_PATHS, name, groups)
        assert np.isnan(fast[0][3])
        assert np.all(np.isfinite(fast[0][:3])) and np.all(np.isfinite(fast[1]))


@pytest.mark.parametrize("name", sorted(GROUP_PATHS))
def test_every_value_equal(name):
    groups = (np.full(3, 4.2), np.full(2, 4.2), np.full(4, 4.2))
    assert all(np.all(np.isnan(v)) for v in _check(GROUP_PATHS, name, groups))


@pytest.mark.parametrize("name", RANK_GROUP_PATHS)
def test_single_value_group_ranks(name):
    # removing the lone value of a group leaves it empty: undefined
    groups = (np.array([3.0]), np.array([1.0, 2.0, 2.0]), np.array([2.0, 5.0]))
    fast = _check(GROUP_PATHS, name, groups)
    assert np.isnan(fast[0][0]) and np.all(np.isfinite(fast[1]))


@pytest.mark.filterwarnings("ignore:Mean of empty slice:RuntimeWarning")  # the refit loop's own
@pytest.mark.parametrize("name", ["eta_squared", "omega_squared"])
def test_single_value_group_sums_of_squares(name):
    groups = (np.array([1.0, 2.0, 2.5]), np.array([2.0, 5.0]), np.array([3.0]))
    fast = _check(GROUP_PATHS, name, groups)
    assert np.isnan(fast[2][0]) and np.all(np.isfinite(fast[0]))


def test_group_paths_do_not_warn_on_a_single_value_group():
    groups = (np.array([3.0, 4.0]), np.array([1.0]), np.array([2.0, 5.0]))
    for fast_fn, _ in GROUP_PATHS.values():  # filterwarnings=error turns any warning into failure
        assert np.isnan(fast_fn(*groups)[1][0])


# ------------------------------------------------------------------ k repeated conditions


def _row_cases():
    rng = np.random.default_rng(31337)
    yield "continuous_k3", rng.normal(0.0, 1.0, (17, 3)) + np.array([0.0, 0.4, 0.9])
    yield "ties_1_to_5_k5", rng.integers(1, 6, (23, 5)).astype(float)
    yield "far_from_zero_k4", 1e6 + rng.normal(0.0, 1e-3, (12, 4)) + np.array([0, 4e-4, 0, 1e-3])
    yield "smallest_k3", np.array([[1.0, 2.0, 4.0], [2.5, 2.0, 3.0], [0.5, 1.0, 1.0]])
    yield "two_rows_k5", np.array([[1.0, 3.0, 2.0, 2.0, 5.0], [4.0, 1.0, 2.0, 3.0, 0.0]])
    yield "outlier_row_k3", np.vstack([rng.normal(0.0, 1.0, (9, 3)), [[1e9, 0.0, 3.0]]])


ROW_CASES = list(_row_cases())


@pytest.mark.parametrize("name", sorted(ROW_PATHS))
@pytest.mark.parametrize("case,x", ROW_CASES, ids=[c[0] for c in ROW_CASES])
def test_row_fast_path_equals_the_refit_loop(name, case, x):
    (values,) = _check(ROW_PATHS, name, (x,))
    assert values.shape == (x.shape[0],)
    assert np.all(np.isfinite(values))


@pytest.mark.parametrize("name", sorted(ROW_PATHS))
def test_removal_that_leaves_every_row_constant(name):
    # every participant tied across conditions but the last one
    for level in (2.0, 0.1):
        x = np.vstack([np.full((4, 3), level), [[level, 2 * level, 3 * level]]])
        (values,) = _check(ROW_PATHS, name, (x,))
        assert np.isnan(values[4]) and np.all(np.isfinite(values[:4]))


@pytest.mark.parametrize("name", sorted(ROW_PATHS))
def test_rows_tied_within_but_not_across(name):
    # every row constant, rows differ: Kendall's W undefined; generalized eta^2 zero
    x = np.repeat(np.array([[1.0], [3.0], [2.0], [7.0]]), 4, axis=1)
    (values,) = _check(ROW_PATHS, name, (x,))
    if name == "kendall_w":
        assert np.all(np.isnan(values))
    else:
        assert np.allclose(values, 0.0, atol=1e-12)


# ------------------------------------------------------------------ properties


@st.composite
def small_integer_groups(draw):
    """3 to 5 groups of 2 to 7 integers 1..5 (ties within and across groups)."""
    k = draw(st.integers(3, 5))
    return tuple(np.array(draw(st.lists(st.integers(1, 5), min_size=2, max_size=7)), dtype=float)
                 for _ in range(k))


@st.composite
def small_integer_rows(draw):
    """Rows (n, k), n 2..9, k 3..5, of integers 1..4 (ties within rows are common)."""
    n, k = draw(st.integers(2, 9)), draw(st.integers(3, 5))
    cells = draw(st.lists(st.integers(1, 4), min_size=n * k, max_size=n * k))
    return np.array(cells, dtype=float).reshape(n, k)


@STEADY
@given(groups=small_integer_groups(), x=small_integer_rows())
def test_property_fast_paths_equal_the_loop(groups, x):
    for fast_fn, values_fn in GROUP_PATHS.values():
        _close(fast_fn(*groups), _loop(values_fn, groups))
    for fast_fn, values_fn in ROW_PATHS.values():
        _close(fast_fn(x), _loop(values_fn, (x,)))
