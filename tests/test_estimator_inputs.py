"""The registry's estimators check their inputs as scipy.stats functions do (auditor/inputs.py):
lists and integer arrays are taken as floats, a wrong shape or a level outside (0, 1) is a
ValueError naming it, and a missing or non-finite value makes the estimate undefined with the
reason, never NaN. Invented values: the checks, not a statistic, are tested."""

from __future__ import annotations

import math

import numpy as np
import pytest

from auditor.effects import (k_independent_effects, k_repeated_effects, paired_effects,
                             two_group_effects)

RNG = np.random.default_rng(5)
TWO = (RNG.normal(10, 2, 12), RNG.normal(9, 2, 15))
ROWS2 = RNG.normal(10, 2, (14, 2)) + np.array([0.0, 0.6])
ROWS3 = RNG.normal(10, 2, (14, 3)) + np.array([0.0, 0.4, 0.9])
THREE = (RNG.normal(10, 2, 11), RNG.normal(11, 2, 12), RNG.normal(9, 2, 10))
CASES = ([(s, TWO) for s in two_group_effects()] + [(s, (ROWS2,)) for s in paired_effects()]
         + [(s, THREE) for s in k_independent_effects()]
         + [(s, (ROWS3,)) for s in k_repeated_effects()])
IDS = [f"{i}-{s.name}" for i, (s, _) in enumerate(CASES)]


@pytest.mark.parametrize("spec, samples", CASES, ids=IDS)
def test_lists_give_the_estimate_of_float_arrays(spec, samples):
    from_arrays = spec.estimate(*samples, 0.95)
    from_lists = spec.estimate(*[x.tolist() for x in samples], 0.95)
    assert from_lists.value == from_arrays.value
    assert isinstance(from_arrays.value, float) and math.isfinite(from_arrays.value)


@pytest.mark.parametrize("level", [0.0, 1.0, 1.5, -0.1, "0.95", True, float("nan")])
@pytest.mark.parametrize("spec, samples", CASES[::4], ids=IDS[::4])
def test_a_level_outside_zero_to_one_is_a_value_error(spec, samples, level):
    with pytest.raises(ValueError, match="level"):
        spec.estimate(*samples, level)


@pytest.mark.parametrize("spec, samples", CASES, ids=IDS)
def test_a_missing_value_gives_none_with_the_reason(spec, samples):
    broken = [x.copy() for x in samples]
    broken[-1].flat[3] = np.nan
    est = spec.estimate(*broken, 0.95)
    assert est.value is None and "missing or not finite" in est.reason
    broken[-1].flat[3] = np.inf
    assert spec.estimate(*broken, 0.95).value is None


@pytest.mark.parametrize("spec, samples", CASES, ids=IDS)
def test_a_wrong_shape_is_a_value_error_naming_it(spec, samples):
    wrong = [np.atleast_2d(x) if x.ndim == 1 else x[:, 0] for x in samples]
    with pytest.raises(ValueError, match="shape"):
        spec.estimate(*wrong, 0.95)


@pytest.mark.parametrize("spec, samples", CASES[::3], ids=IDS[::3])
def test_text_is_a_value_error(spec, samples):
    words = [np.array([["a"] * x.shape[1]] * x.shape[0]) if x.ndim == 2 else ["a", "b", "c"]
             for x in samples]
    with pytest.raises(ValueError, match="not numbers"):
        spec.estimate(*words, 0.95)
