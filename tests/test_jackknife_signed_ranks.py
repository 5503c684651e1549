"""The exact leave-one-out paths of the paired signed-rank indices equal the plain refit loop and
the generic `leave_one_out_units` to 1e-12, with the same finiteness: continuous and decimal data,
heavy ties, many zero differences (down to a single non-zero one), data far from zero and the
smallest designs."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats

from auditor import jackknife_signed_ranks as jsr
from auditor import paired
from refit import assert_close as _close
from refit import refit_loop as _loop
from auditor.resampling import leave_one_out_units

STEADY = settings(derandomize=True, deadline=None, max_examples=60, database=None,
                  suppress_health_check=[HealthCheck.too_slow])

PATHS = {
    "matched_rank_biserial": (jsr.matched_rank_biserial, paired.matched_rank_biserial_values),
    "r_from_z": (jsr.r_from_z, paired.r_from_z_values),
}




def _check(name, x, digits):
    fast_fn, values_fn = PATHS[name]
    fast = fast_fn(x, digits)

    def values(rows):
        return values_fn(rows, digits)

    slow = _loop(values, (x,))
    _close(fast, slow)
    _close(fast, leave_one_out_units(values, (x,)))
    return fast[0]


def _cases():
    rng = np.random.default_rng(20240611)
    a = rng.normal(3.0, 1.0, 41)
    yield "continuous", np.column_stack([a, a - 0.4 + rng.normal(0, 0.8, 41)]), 12
    b = np.round(rng.normal(5, 1, 27), 1)
    yield "decimal", np.column_stack([b, np.round(b - 0.2 + rng.normal(0, 0.5, 27), 1)]), 1
    c = rng.integers(1, 6, 60).astype(float)
    yield "ties_1_to_5", np.column_stack([c, rng.integers(1, 6, 60).astype(float)]), 0
    d = rng.integers(1, 6, 35).astype(float)
    yield "many_zeros", np.column_stack([d, np.clip(d + rng.choice([-1, 0, 0, 0, 1], 35), 1, 5)]), 0
    e = 1e6 + rng.normal(0, 1e-3, 19)
    yield "far_from_zero", np.column_stack([e, e + rng.normal(3e-4, 1e-3, 19)]), 12
    yield "smallest", np.array([[2.0, 1.0], [4.0, 4.5], [3.0, 1.5]]), 12
    yield "smallest_with_zero", np.array([[2.0, 2.0], [4.0, 3.0], [1.0, 3.0]]), 12


CASES = list(_cases())


@pytest.mark.parametrize("name", sorted(PATHS))
@pytest.mark.parametrize("case,x,digits", CASES, ids=[c[0] for c in CASES])
def test_fast_path_equals_the_refit_loop(name, case, x, digits):
    values = _check(name, x, digits)
    assert values.shape == (x.shape[0],)
    assert np.all(np.isfinite(values))  # none of these cases leaves a removal undefined


@pytest.mark.parametrize("name", sorted(PATHS))
def test_lone_non_zero_difference(name):
    # one participant differs; removing that participant leaves every difference zero
    x = np.array([[3.0, 3.0], [1.0, 1.0], [5.0, 2.0], [2.0, 2.0], [4.0, 4.0]])
    values = _check(name, x, 0)
    assert np.isnan(values[2])
    assert np.all(np.isfinite(np.delete(values, 2)))


@pytest.mark.parametrize("name", sorted(PATHS))
def test_two_non_zero_differences_tied_in_size(name):
    # |d| tie (+2 and -2) among zeros: each removal leaves the other alone with rank 1
    x = np.array([[3.0, 1.0], [1.0, 1.0], [2.0, 4.0], [2.0, 2.0]])
    values = _check(name, x, 0)
    assert values[0] == pytest.approx(-1.0) and values[2] == pytest.approx(1.0)
    assert values[1] == pytest.approx(0.0) and values[3] == pytest.approx(0.0)


@pytest.mark.parametrize("name", sorted(PATHS))
def test_every_difference_zero(name):
    x = np.repeat(np.array([[1.5], [2.5], [4.0], [7.0]]), 2, axis=1)
    values = _check(name, x, 12)
    assert np.all(np.isnan(values))


@pytest.mark.parametrize("name", sorted(PATHS))
def test_decimal_differences_tie_after_rounding(name):
    # 5.1 - 4.9 and 0.3 - 0.1 are the same difference only once rounded to the data's decimals
    x = np.array([[5.1, 4.9], [0.3, 0.1], [7.4, 7.2], [2.2, 2.0], [6.3, 5.9], [3.8, 4.1]])
    _check(name, x, 1)


def test_rank_blocks_against_direct_counts():
    rng = np.random.default_rng(7)
    values = rng.integers(0, 6, 40).astype(float)
    labels = rng.integers(0, 3, 40)
    mid, size, above, level = jsr.rank_blocks(values, labels, 3)
    assert np.array_equal(mid, stats.rankdata(values))
    assert np.array_equal(size, np.sum(values[:, None] == values[None, :], axis=1))
    for lab in range(3):
        mine = values[labels == lab]
        assert np.array_equal(above[:, lab], np.sum(mine[None, :] > values[:, None], axis=1))
        assert np.array_equal(level[:, lab], np.sum(mine[None, :] == values[:, None], axis=1))


def test_rank_blocks_of_an_empty_sample():
    mid, size, above, level = jsr.rank_blocks(np.array([]), np.array([], dtype=int), 2)
    assert mid.shape == size.shape == (0,) and above.shape == level.shape == (0, 2)


@st.composite
def small_integer_pairs(draw):
    """Rows (n, 2) of small integers: many ties in |d| and many zero differences."""
    n = draw(st.integers(2, 14))
    cells = draw(st.lists(st.integers(0, 4), min_size=2 * n, max_size=2 * n))
    return np.array(cells, dtype=float).reshape(n, 2)


@STEADY
@given(x=small_integer_pairs())
def test_property_fast_paths_equal_the_loop(x):
    for fast_fn, values_fn in PATHS.values():
        def values(rows):
            return values_fn(rows, 0)
        _close(fast_fn(x, 0), _loop(values, (x,)))
