"""Every exact leave-one-out fast path equals the plain refit loop to 1e-12 (relative to the
size of the values), on tied data, on data far from zero and at the smallest sizes."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from refit import assert_close as _close
from refit import refit_loop as _loop
from auditor.effects import paired_effects, two_group_effects
from auditor.resampling import leave_one_out_units




def _two_group_cases():
    rng = np.random.default_rng(41)
    yield "normal", rng.normal(0.4, 1.0, 23), rng.normal(0.0, 1.7, 19)
    yield "ties", rng.integers(1, 6, 30).astype(float), rng.integers(1, 8, 27).astype(float)
    yield "far_from_zero", 1e6 + rng.normal(0, 1e-3, 15), 1e6 + rng.normal(1e-3, 2e-3, 17)
    yield "smallest", np.array([1.0, 2.5, 4.0]), np.array([0.5, 2.5, 3.0])
    # one-decimal data: sums such as 0.3 - 0.1 round, so counting by value alone would slip
    yield "decimals", np.round(rng.normal(0.3, 1, 41), 1), np.round(rng.normal(0, 1, 37), 1)
    yield "two_each", np.array([1.0, 2.0]), np.array([3.0, 5.0])
    yield "skewed_unequal", rng.lognormal(0, 1, 60), rng.lognormal(0.2, 0.5, 9)
    # every value equal but one far one: without it both groups are constant and the d family
    # is undefined by refit; the reverse update must not leave a rounding residue (a finite or
    # infinite d) there, and a constant 0.1 has a mean by summation that misses 0.1
    yield pytest.param("one_far_value", np.r_[np.full(4999, 10.0), 1000.0],
                       np.full(5000, 10.0), marks=pytest.mark.slow)  # 5,000 refits per group
    yield "one_far_low_value", np.r_[-250.0, np.full(40, 0.1)], np.full(31, 0.1)
    yield "constant_group", rng.normal(0.1, 1.0, 25), np.full(33, 0.1)


@pytest.mark.parametrize("case,a,b", list(_two_group_cases()), ids=lambda v: v if isinstance(v, str) else "")
@pytest.mark.parametrize("reference", [0, 1])
def test_two_group_fast_paths_equal_the_loop(case, a, b, reference):
    specs = [s for s in two_group_effects(reference) if s.leave_one_out is not None]
    assert {s.name for s in specs} == {s.name for s in two_group_effects(reference)}
    for spec in specs:
        with np.errstate(all="ignore"):
            fast = spec.leave_one_out(a, b)
        slow = _loop(spec.values, (a, b))
        # d-family values are O(1); far-from-zero data only enlarge the raw mean difference
        scale = 1.0 if spec.name != "mean_difference" else float(np.max(np.abs(a)))
        _close(fast, slow, scale if case == "far_from_zero" else 1.0)
        generic = leave_one_out_units(spec.values, (a, b))
        _close(fast, generic, scale if case == "far_from_zero" else 1.0)


def _paired_cases():
    rng = np.random.default_rng(43)
    a = np.round(rng.normal(5, 1, 26), 1)
    yield "decimal", np.column_stack([a, np.round(a - 0.3 + rng.normal(0, 0.6, 26), 1)]), 1
    b = rng.integers(1, 6, 31).astype(float)
    yield "ties_and_zeros", np.column_stack([b, np.clip(b + rng.integers(-1, 2, 31), 1, 7)]), 0
    c = 1e6 + rng.normal(0, 1e-3, 12)
    yield "far_from_zero", np.column_stack([c, c + rng.normal(5e-4, 1e-3, 12)]), 12


@pytest.mark.parametrize("case,x,digits", list(_paired_cases()), ids=lambda v: v if isinstance(v, str) else "")
def test_paired_fast_paths_equal_the_loop(case, x, digits):
    specs = [s for s in paired_effects(digits) if s.leave_one_out is not None]
    assert {s.name for s in specs} == {s.name for s in paired_effects(digits)}
    for spec in specs:
        with np.errstate(all="ignore"):
            fast = spec.leave_one_out(x)
        slow = _loop(spec.values, (x,))
        scale = 1e6 if (case == "far_from_zero" and spec.name == "mean_difference") else 1.0
        _close(fast, slow, scale)


# ------------------------------------------------------------------ shifts: selection without all pairs


def test_pair_sum_selection_equals_sorting_every_pair():
    """Every order statistic of the pair sums equals the sorted list of all sums (numpy)."""
    from auditor.shifts import pair_sums

    rng = np.random.default_rng(5)
    for a, b in ((np.round(rng.normal(0, 1, 13), 1), np.round(rng.normal(0, 1, 11), 1)),
                 (rng.integers(0, 4, 9).astype(float), rng.integers(0, 4, 7).astype(float))):
        everything = np.sort(np.add.outer(a, -b).ravel())
        sums = pair_sums(a, -b)
        assert sums.size == everything.size
        assert [sums.kth(k) for k in range(1, everything.size + 1)] == everything.tolist()
        i, j = np.triu_indices(a.size)
        walsh = np.sort(a[i] + a[j])
        one = pair_sums(a)
        assert one.size == walsh.size
        assert [one.kth(k) for k in range(1, walsh.size + 1)] == walsh.tolist()


@given(st.lists(st.integers(-6, 6), min_size=2, max_size=14),
       st.lists(st.integers(-6, 6), min_size=2, max_size=14), st.sampled_from([1.0, 0.1, 0.25]))
@settings(max_examples=60, deadline=None)
def test_shift_leave_one_out_equals_the_loop_on_tied_grids(xs, ys, step):
    from auditor.shifts import hodges_lehmann_without_each, walsh_median_without_each
    from auditor.ranks import hodges_lehmann_values
    from auditor.paired import walsh_averages

    a, b = np.array(xs) * step, np.array(ys) * step
    fast = hodges_lehmann_without_each(a, b)
    slow = _loop(hodges_lehmann_values, (a, b))
    _close(fast, slow, 1.0)
    walsh = walsh_median_without_each(a)
    plain = [float(np.median(walsh_averages(np.delete(a, i)))) for i in range(a.size)]
    assert np.max(np.abs(walsh - np.array(plain))) <= 1e-12


def test_robust_d_leave_one_out_on_every_trimming_boundary():
    """Sizes where removing one value changes the trimming count g = floor(0.2 n) (n = 10, 11, 15,
    16, 20, 21) and where it does not, against the refit loop."""
    from auditor import parametric as par
    from auditor.jackknife import robust_d

    rng = np.random.default_rng(8)
    for n in (5, 6, 10, 11, 15, 16, 20, 21):
        a, b = rng.standard_t(3, n), rng.normal(0.5, 2, n + 3)
        with np.errstate(all="ignore"):
            fast = robust_d(a, b)
        _close(fast, _loop(par.robust_d_values, (a, b)), 1.0)


def test_every_registered_effect_has_an_exact_fast_path():
    """The influence stage needs leave-one-out values of every effect at every size; a new effect
    must bring its fast path (or this test is the place to argue why not)."""
    from auditor.effects import k_independent_effects, k_repeated_effects

    for registry in (two_group_effects(), paired_effects(), k_independent_effects(),
                     k_repeated_effects()):
        assert [s.name for s in registry if s.leave_one_out is None] == []
