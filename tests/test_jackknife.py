"""Every exact leave-one-out fast path equals the plain refit loop to 1e-12 (relative to the
size of the values), on tied data, on data far from zero and at the smallest sizes."""

from __future__ import annotations

import numpy as np
import pytest

from auditor.effects import paired_effects, two_group_effects
from auditor.resampling import leave_one_out_units


def _loop(statistic, samples):
    """Plain loop: drop one unit, recompute with the vectorised statistic on a 1-row stack."""
    out = []
    for j, x in enumerate(samples):
        vals = []
        for i in range(x.shape[0]):
            reduced = [np.delete(s, i, axis=0) if k == j else s for k, s in enumerate(samples)]
            with np.errstate(all="ignore"):
                vals.append(float(statistic(*[r[None, ...] for r in reduced])[0]))
        out.append(np.array(vals))
    return out


def _close(fast, slow, scale):
    for f, s in zip(fast, slow):
        both = np.isfinite(s)
        assert np.array_equal(both, np.isfinite(f))
        assert np.all(np.abs(f[both] - s[both]) <= 1e-12 * max(1.0, scale))


def _two_group_cases():
    rng = np.random.default_rng(41)
    yield "normal", rng.normal(0.4, 1.0, 23), rng.normal(0.0, 1.7, 19)
    yield "ties", rng.integers(1, 6, 30).astype(float), rng.integers(1, 8, 27).astype(float)
    yield "far_from_zero", 1e6 + rng.normal(0, 1e-3, 15), 1e6 + rng.normal(1e-3, 2e-3, 17)
    yield "smallest", np.array([1.0, 2.5, 4.0]), np.array([0.5, 2.5, 3.0])


@pytest.mark.parametrize("case,a,b", list(_two_group_cases()), ids=lambda v: v if isinstance(v, str) else "")
@pytest.mark.parametrize("reference", [0, 1])
def test_two_group_fast_paths_equal_the_loop(case, a, b, reference):
    specs = [s for s in two_group_effects(reference) if s.leave_one_out is not None]
    assert {s.name for s in specs} >= {"cohen_d", "prob_superiority", "cliff_delta", "r_from_z"}
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
    assert {s.name for s in specs} >= {"d_z", "d_av", "d_rm", "ps_dep"}
    for spec in specs:
        with np.errstate(all="ignore"):
            fast = spec.leave_one_out(x)
        slow = _loop(spec.values, (x,))
        scale = 1e6 if (case == "far_from_zero" and spec.name == "mean_difference") else 1.0
        _close(fast, slow, scale)
