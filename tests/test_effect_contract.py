"""The contract every registered two-group effect size must keep.

The effects are read from the registry at collection time, so an effect added to
`auditor.effects.two_group_effects` is checked here without touching this file.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

from auditor.effects import two_group_effects
from auditor.errors import UndefinedEffectWarning
from auditor.pipeline import audit

LEVEL = 0.95
REGISTRY = two_group_effects()
NAMES = [spec.name for spec in REGISTRY]
STANDARDIZED = [spec.name for spec in REGISTRY if spec.family == "standardized_mean"]
FAMILIES = {"mean", "standardized_mean", "dominance", "shift"}


def spec_named(name: str, reference: int = 1):
    for spec in two_group_effects(reference):
        if spec.name == name:
            return spec
    raise KeyError(name)


def ordinary_samples():
    """A few unremarkable data sets (fixed seeds): normal, skewed with ties, unequal sizes."""
    gen = np.random.default_rng(52_813)
    return {
        "normal": (gen.normal(10.4, 2.0, 24), gen.normal(9.1, 2.3, 31)),
        "skewed_rounded": (gen.lognormal(1.2, 0.6, 40).round(1), gen.lognormal(1.0, 0.7, 35).round(1)),
        "rating_scale": (gen.integers(1, 8, 50).astype(float), gen.integers(2, 8, 45).astype(float)),
        "small_unequal": (gen.normal(0.0, 1.0, 6), gen.normal(-0.8, 3.0, 13)),
    }


ORDINARY = ordinary_samples()

PAIRS_OF_TWO = {
    "interleaved": ([1.0, 4.0], [2.0, 3.0]),
    "separated": ([7.5, 9.0], [1.0, 2.5]),
    "one_cross_tie": ([2.0, 5.0], [2.0, 3.0]),
    "a_constant": ([4.0, 4.0], [1.0, 6.0]),
    "b_constant": ([0.3, 0.9], [0.5, 0.5]),
    "both_constant": ([3.0, 3.0], [1.0, 1.0]),
    "all_equal": ([2.0, 2.0], [2.0, 2.0]),
    "decimal_values": ([0.1, 0.2], [0.3, 0.7]),
}

# (value of every A, value of every B, n_A, n_B). Decimal constants are what real data look like.
CONSTANT_GROUPS = {
    "integers": (3.0, 1.0, 5, 6),
    "halves": (-2.5, 0.5, 4, 4),
    "tenths": (0.7, 0.1, 13, 14),
    "decimal_a": (0.1, 0.7, 3, 4),
    "decimal_both": (2.2, 1.1, 10, 11),
}


def _assert_clean(est, name):
    """Defined and finite, or null with a reason; an interval, if any, is finite and ordered."""
    if est.value is None:
        assert isinstance(est.reason, str) and est.reason.strip(), name
        assert est.interval is None, name
        return
    assert isinstance(est.value, (float, np.floating)), (name, type(est.value))
    assert math.isfinite(est.value), (name, est.value)
    if est.interval is not None:
        assert math.isfinite(est.interval.low) and math.isfinite(est.interval.high), name
        assert est.interval.low <= est.interval.high, name


# ---------------------------------------------------------------- registry metadata


def test_registry_is_well_formed():
    assert len(NAMES) == len(set(NAMES)) and NAMES
    for spec in REGISTRY:
        assert spec.family in FAMILIES, spec.name
        assert isinstance(spec.signed, bool) and spec.assumes.strip(), spec.name
        if spec.bounds is not None:
            lo, hi = spec.bounds
            assert lo < hi and lo <= spec.null_value <= hi, spec.name
        if not spec.signed:  # a value that maps to 1 - value must have 1/2 as its no-effect value
            assert spec.null_value == 0.5, spec.name
        else:
            assert spec.null_value == 0.0, spec.name


# ---------------------------------------------------------------- ordinary data


@pytest.mark.parametrize("sample", sorted(ORDINARY))
@pytest.mark.parametrize("name", NAMES)
def test_ordinary_data_give_a_finite_estimate_and_interval(name, sample):
    a, b = ORDINARY[sample]
    spec = spec_named(name)
    est = spec.estimate(a, b, LEVEL)
    assert est.value is not None and est.reason is None, name
    _assert_clean(est, name)
    if spec.bounds is not None:
        assert spec.bounds[0] <= est.value <= spec.bounds[1]
    if est.interval is not None:
        assert est.interval.level == LEVEL
        assert est.interval.low <= est.value <= est.interval.high
        if spec.bounds is not None:
            assert spec.bounds[0] <= est.interval.low and est.interval.high <= spec.bounds[1]
    row = np.asarray(spec.values(a[None, :], b[None, :]))
    assert row.shape == (1,) and math.isclose(float(row[0]), est.value, rel_tol=1e-9, abs_tol=1e-12)


@pytest.mark.parametrize("name", NAMES)
def test_no_effect_data_sit_at_the_null_value(name):
    # the same values in both groups: every index must report no effect
    a = np.array([3.1, 4.7, 2.2, 5.0, 3.9, 4.4, 2.8])
    spec = spec_named(name)
    est = spec.estimate(a, a.copy(), LEVEL)
    assert est.value is not None
    assert math.isclose(est.value, spec.null_value, abs_tol=1e-12), (name, est.value)


# ---------------------------------------------------------------- swapping the groups


@pytest.mark.parametrize("sample", sorted(ORDINARY))
@pytest.mark.parametrize("name", NAMES)
def test_swapping_groups_flips_or_complements(name, sample):
    a, b = ORDINARY[sample]
    forward = spec_named(name, reference=1)   # a reference-scaled index keeps group B ...
    backward = spec_named(name, reference=0)  # ... which is the first group after the swap
    there, back = forward.estimate(a, b, LEVEL), backward.estimate(b, a, LEVEL)
    if forward.signed:
        assert back.value == pytest.approx(-there.value, rel=1e-9, abs=1e-12)
    else:
        assert back.value == pytest.approx(1.0 - there.value, rel=1e-9, abs=1e-12)
    assert (there.interval is None) == (back.interval is None)
    if there.interval is not None:
        if forward.signed:
            mirror = (-there.interval.high, -there.interval.low)
        else:
            mirror = (1.0 - there.interval.high, 1.0 - there.interval.low)
        assert (back.interval.low, back.interval.high) == pytest.approx(mirror, rel=1e-7, abs=1e-9)


# ---------------------------------------------------------------- two values per group


@pytest.mark.parametrize("case", sorted(PAIRS_OF_TWO))
@pytest.mark.parametrize("name", NAMES)
def test_two_values_per_group_are_defined_or_null_with_reason(name, case):
    a, b = (np.array(x) for x in PAIRS_OF_TWO[case])
    spec = spec_named(name)
    est = spec.estimate(a, b, LEVEL)
    _assert_clean(est, name)
    swapped = spec_named(name, reference=0).estimate(b, a, LEVEL)
    _assert_clean(swapped, name)
    assert (est.value is None) == (swapped.value is None), name


# ---------------------------------------------------------------- constant groups


@pytest.mark.parametrize("case", sorted(CONSTANT_GROUPS))
@pytest.mark.parametrize("name", STANDARDIZED)
def test_standardized_differences_are_null_for_constant_groups(name, case):
    va, vb, na, nb = CONSTANT_GROUPS[case]
    a, b = np.full(na, va), np.full(nb, vb)
    est = spec_named(name).estimate(a, b, LEVEL)  # must not raise
    assert est.value is None, f"{name} = {est.value!r} for two constant groups"
    assert isinstance(est.reason, str) and est.reason.strip()
    assert est.interval is None


@pytest.mark.parametrize("case", sorted(CONSTANT_GROUPS))
@pytest.mark.parametrize("name", NAMES)
def test_constant_groups_never_give_nan_or_infinity(name, case):
    va, vb, na, nb = CONSTANT_GROUPS[case]
    est = spec_named(name).estimate(np.full(na, va), np.full(nb, vb), LEVEL)
    _assert_clean(est, name)


@pytest.mark.parametrize("case", sorted(CONSTANT_GROUPS))
def test_dominance_is_complete_for_constant_groups(case):
    va, vb, na, nb = CONSTANT_GROUPS[case]
    high, low = max(va, vb), min(va, vb)
    spec = spec_named("prob_superiority")
    assert spec.estimate(np.full(na, high), np.full(nb, low), LEVEL).value == 1.0
    assert spec.estimate(np.full(na, low), np.full(nb, high), LEVEL).value == 0.0
    assert spec_named("cliff_delta").estimate(np.full(na, high), np.full(nb, low), LEVEL).value == 1.0


def _constant_frame(case):
    va, vb, na, nb = CONSTANT_GROUPS[case]
    return pd.DataFrame({"arm": ["treated"] * na + ["control"] * nb,
                         "score": [va] * na + [vb] * nb})


@pytest.mark.parametrize("case", ["integers", "decimal_a"])
def test_audit_of_constant_groups_warns_and_stays_json_clean(case):
    frame = _constant_frame(case)
    with pytest.warns(UndefinedEffectWarning) as caught:
        result = audit(frame, outcome="score", group="arm", groups=["treated", "control"],
                       resamples=200, seed=11)
    warned = " ".join(str(w.message) for w in caught)
    for name in STANDARDIZED:
        effect = result.effect(name)
        assert effect.estimate is None, f"{name} = {effect.estimate!r}"
        assert effect.reason and effect.ci_low is None and effect.ci_high is None
        assert name in warned
        assert any(note.startswith(f"{name}:") for note in result.warnings)
    assert result.effect("prob_superiority").estimate == (1.0 if frame.score.iloc[0] > frame.score.iloc[-1]
                                                          else 0.0)
    document = result.to_dict()
    text = json.dumps(document, allow_nan=False)  # raises ValueError on NaN or infinity
    assert json.loads(text)["effects"].keys() == set(NAMES)
