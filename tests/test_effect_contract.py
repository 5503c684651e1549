"""The contract every registered effect size must keep, in each of the four designs.

The effects are read from the registries at collection time (`two_group_effects`,
`paired_effects`, `k_independent_effects`, `k_repeated_effects`), so an effect added to any of
them is checked here without touching this file. The samples of a design are what its
`estimate(*samples, level)` takes: (A, B) for two groups, (rows,) with rows of shape (n, 2) or
(n, k) for paired and repeated conditions, and the k groups for k independent groups. A unit, what
a resample draws and leave-one-out removes, is one value of one group in the independent designs
and one participant's whole row in the paired and repeated ones.

The checks after the contract over every design concern two independent groups only (constant
groups with decimal values, the audit of constant groups).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

from auditor import catalogue
from auditor.catalogue import Design
from auditor.effects import (k_independent_effects, k_repeated_effects, paired_effects,
                             two_group_effects)
from auditor.errors import UndefinedEffectWarning
from auditor.pipeline import audit

LEVEL = 0.95
TWO, PAIRED, K_INDEPENDENT, K_REPEATED = (Design.TWO_INDEPENDENT, Design.PAIRED,
                                          Design.K_INDEPENDENT, Design.K_REPEATED)
DESIGNS = (TWO, PAIRED, K_INDEPENDENT, K_REPEATED)
OMNIBUS = {K_INDEPENDENT, K_REPEATED}  # three or more groups or conditions: no direction
FAMILIES = {"mean", "standardized_mean", "dominance", "shift", "variance_explained", "agreement"}
# families whose index divides by a spread of the data: undefined when every value is equal
SPREAD_SCALED = {"standardized_mean", "variance_explained", "agreement"}

REGISTRY = two_group_effects()
NAMES = [spec.name for spec in REGISTRY]
STANDARDIZED = [spec.name for spec in REGISTRY if spec.family == "standardized_mean"]


def registry(design: Design, reordered: bool = False):
    """The design's registry. After two independent groups swap, an index scaled by one group's
    SD (Glass's delta, by B) must keep that group, which is then the first: reference 0."""
    if design is TWO:
        return two_group_effects(reference=0 if reordered else 1)
    return {PAIRED: paired_effects, K_INDEPENDENT: k_independent_effects,
            K_REPEATED: k_repeated_effects}[design]()


def spec_of(design: Design, name: str, reordered: bool = False):
    for spec in registry(design, reordered):
        if spec.name == name:
            return spec
    raise KeyError((design, name))


def spec_named(name: str, reference: int = 1):
    """A two-group effect with the given reference group for Glass's delta."""
    return spec_of(TWO, name, reordered=reference == 0)


# ---------------------------------------------------------------- invented data per design


def _two_group_samples():
    """A few unremarkable data sets (fixed seeds): normal, skewed with ties, unequal sizes."""
    gen = np.random.default_rng(52_813)
    return {
        "normal": (gen.normal(10.4, 2.0, 24), gen.normal(9.1, 2.3, 31)),
        "skewed_rounded": (gen.lognormal(1.2, 0.6, 40).round(1), gen.lognormal(1.0, 0.7, 35).round(1)),
        "rating_scale": (gen.integers(1, 8, 50).astype(float), gen.integers(2, 8, 45).astype(float)),
        "small_unequal": (gen.normal(0.0, 1.0, 6), gen.normal(-0.8, 3.0, 13)),
    }


def _paired_samples():
    """Participants' rows (first condition, second condition); sizes are equal by design."""
    gen = np.random.default_rng(60_417)
    reading = gen.normal(48.0, 9.0, 28)  # reading scores before and after a term
    recovery = gen.lognormal(1.4, 0.5, 36)  # recovery days under two routines, in tenths
    rating = gen.integers(1, 8, 45).astype(float)  # a 1-7 rating given twice, many ties
    return {
        "normal": (np.column_stack([reading + gen.normal(2.0, 4.0, 28),
                                    reading + gen.normal(0.0, 4.0, 28)]),),
        "skewed_rounded": (np.column_stack([(recovery * gen.lognormal(0.15, 0.3, 36)).round(1),
                                            recovery.round(1)]),),
        "rating_scale": (np.column_stack([rating,
                                          np.clip(rating + gen.integers(-2, 3, 45), 1, 7)]),),
        "small": (gen.normal(0.0, 1.0, (7, 2)) + [0.6, 0.0],),
    }


def _k_independent_samples():
    """Three or four groups of unequal sizes."""
    gen = np.random.default_rng(71_529)
    return {
        "normal": (gen.normal(20.0, 3.0, 14), gen.normal(21.5, 3.0, 17), gen.normal(23.0, 3.5, 11)),
        "skewed_rounded": tuple(gen.lognormal(mu, 0.6, n).round(1)
                                for mu, n in ((1.0, 22), (1.2, 27), (0.9, 19), (1.3, 24))),
        "rating_scale": tuple(gen.integers(low, 8, n).astype(float)
                              for low, n in ((1, 30), (2, 26), (1, 33))),
        "small_unequal": (gen.normal(0.0, 1.0, 4), gen.normal(0.9, 2.0, 7),
                          gen.normal(-0.5, 1.0, 5)),
    }


def _k_repeated_samples():
    """Participants' rows over three or four conditions, with a participant effect."""
    gen = np.random.default_rng(83_602)

    def rows(n, shifts, noise):
        person = gen.normal(0.0, 2.0, (n, 1))
        return person + np.asarray(shifts) + gen.normal(0.0, noise, (n, len(shifts)))

    return {
        "normal": (30.0 + rows(18, [0.0, 0.8, 1.5], 1.0),),
        "skewed_rounded": ((gen.lognormal(1.0, 0.5, (24, 1))
                            * gen.lognormal([0.0, 0.1, 0.25, 0.15], 0.3, (24, 4))).round(1),),
        "rating_scale": (np.clip((4.0 + rows(30, [0.0, 0.5, 1.0], 1.0)).round(), 1, 7),),
        "small": (rows(6, [0.0, 1.0, 0.5], 1.0),),
    }


ORDINARY = {TWO: _two_group_samples(), PAIRED: _paired_samples(),
            K_INDEPENDENT: _k_independent_samples(), K_REPEATED: _k_repeated_samples()}


def _no_effect_samples():
    """Data with no effect at all, per design."""
    values = np.array([3.1, 4.7, 2.2, 5.0, 3.9, 4.4, 2.8])
    base = np.array([12.0, 15.5, 9.0, 20.0, 14.0, 11.5, 17.0, 13.0])
    steps = np.array([1.5, -1.5, 0.5, -0.5, 3.0, -3.0, 2.0, -2.0])  # differences symmetric about 0
    orderings = np.array([[1, 2, 3], [1, 3, 2], [2, 1, 3], [2, 3, 1], [3, 1, 2], [3, 2, 1]], float)
    return {
        TWO: (values, values.copy()),  # the same values in both groups
        PAIRED: (np.column_stack([base, base + steps]),),
        K_INDEPENDENT: (values, values.copy(), values.copy()),
        # every ordering of three conditions once, on participants of different levels
        K_REPEATED: (orderings + np.array([10.0, 4.0, 7.0, 0.0, 2.0, 5.0])[:, None],),
    }


NO_EFFECT = _no_effect_samples()

ALL_EQUAL = {
    TWO: (np.full(5, 2.5), np.full(7, 2.5)),
    PAIRED: (np.full((6, 2), 4.2),),
    K_INDEPENDENT: (np.full(4, 0.3), np.full(5, 0.3), np.full(6, 0.3)),
    K_REPEATED: (np.full((7, 3), 1.1),),
}

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

# Smallest and flattest data each design allows: an estimate or a reason, never NaN.
EDGE_CASES = {
    TWO: {case: (np.array(a), np.array(b)) for case, (a, b) in PAIRS_OF_TWO.items()},
    PAIRED: {
        "two_participants": (np.array([[1.0, 2.0], [4.0, 3.0]]),),
        "constant_difference": (np.column_stack([[2.1, 3.4, 5.0, 1.2] + np.array(1.5),
                                                 [2.1, 3.4, 5.0, 1.2]]),),
        "both_constant": (np.column_stack([np.full(5, 3.0), np.full(5, 1.0)]),),
        "no_differences": (np.column_stack([[0.4, 0.9, 1.7, 2.2], [0.4, 0.9, 1.7, 2.2]]),),
        "one_sign": (np.array([[5.2, 1.0], [6.0, 2.5], [4.1, 4.0], [9.9, 0.3]]),),
    },
    K_INDEPENDENT: {
        "two_per_group": (np.array([1.0, 4.0]), np.array([2.0, 3.0]), np.array([0.5, 5.5])),
        "constant_groups": (np.full(4, 1.0), np.full(5, 2.0), np.full(3, 3.5)),
        "one_group_varies": (np.full(3, 0.7), np.array([0.1, 0.2, 0.9]), np.full(4, 0.7)),
        "separated": (np.array([1.0, 1.5]), np.array([4.0, 4.5]), np.array([8.0, 9.0])),
    },
    K_REPEATED: {
        "two_participants": (np.array([[1.0, 2.0, 3.0], [2.0, 1.5, 4.0]]),),
        "identical_participants": (np.tile([1.2, 2.4, 3.6], (5, 1)),),
        "additive": (np.array([[0.1, 0.3, 0.2]]) + np.array([[0.0], [1.0], [2.5], [4.0]]),),
        "one_participant_varies": (np.array([[2.0, 2.0, 2.0], [2.0, 2.0, 2.0], [1.0, 3.0, 2.5]]),),
    },
}


def reordered(design: Design, samples):
    """The samples with the groups or conditions in another order: the two swapped, or (k
    designs) every group or condition moved one place, the first last."""
    if design is TWO:
        return samples[1], samples[0]
    if design is PAIRED:
        return (samples[0][:, ::-1],)
    if design is K_INDEPENDENT:
        return samples[1:] + samples[:1]
    x = samples[0]
    return (x[:, np.r_[1:x.shape[1], 0]],)


def after_reordering(design: Design, spec, value: float) -> float:
    """What `value` must become when the groups or conditions change order."""
    if design in OMNIBUS:
        return value  # an omnibus index does not depend on the order of the groups
    if spec.signed:
        return -value
    return 1.0 - value  # an unsigned probability (no-effect value 1/2)


def interval_after_reordering(design: Design, spec, low: float, high: float):
    if design in OMNIBUS:
        return low, high
    if spec.signed:
        return -high, -low
    return 1.0 - high, 1.0 - low


def resampled(samples, resamples: int, seed: int):
    """Bootstrap resamples stacked along a new leading axis, as `resampling.resample_units` hands
    them to a statistic: each stratum's units drawn with replacement on their own, shape
    (resamples, n_j, ...), so a participant's row stays whole."""
    gen = np.random.default_rng(seed)
    return tuple(s[gen.integers(0, s.shape[0], (resamples, s.shape[0]))] for s in samples)


def refit_without(spec, samples, stratum: int, unit: int) -> float:
    """`spec.values` on the samples with one unit (a value, or a participant's row) removed."""
    reduced = [np.delete(s, unit, axis=0) if j == stratum else s for j, s in enumerate(samples)]
    with np.errstate(all="ignore"):  # as the pipeline calls it: undefined is NaN, not a warning
        return float(np.asarray(spec.values(*(r[None] for r in reduced)))[0])


def _cases(with_samples: bool = False, where=lambda design, spec: True):
    out = []
    for design in DESIGNS:
        for spec in registry(design):
            if not where(design, spec):
                continue
            if with_samples:
                out += [pytest.param(design, spec.name, sample,
                                     id=f"{design.value}-{spec.name}-{sample}")
                        for sample in sorted(ORDINARY[design])]
            else:
                out.append(pytest.param(design, spec.name, id=f"{design.value}-{spec.name}"))
    return out


EVERY_EFFECT = _cases()
EVERY_EFFECT_AND_SAMPLE = _cases(with_samples=True)


def _assert_clean(est, name):
    """Defined and finite, or null with a reason; an interval, if any, is finite and ordered."""
    if est.value is None:
        assert isinstance(est.reason, str) and est.reason.strip(), name
        assert est.interval is None and est.more == (), name
        return
    assert isinstance(est.value, (float, np.floating)), (name, type(est.value))
    assert math.isfinite(est.value), (name, est.value)
    for iv in (est.interval, *est.more):
        if iv is not None:
            assert math.isfinite(iv.low) and math.isfinite(iv.high), (name, iv)
            assert iv.low <= iv.high, (name, iv)


def _assert_within(bounds, est, name):
    """A bounded index's value and intervals stay within its range."""
    if bounds is None or est.value is None:
        return
    lo, hi = bounds
    assert lo <= est.value <= hi, (name, est.value)
    for iv in (est.interval, *est.more):
        if iv is not None:
            assert lo <= iv.low and iv.high <= hi, (name, iv)


# ---------------------------------------------------------------- registry and catalogue


@pytest.mark.parametrize("design", DESIGNS, ids=lambda d: d.value)
def test_registry_is_well_formed(design):
    specs = registry(design)
    names = [spec.name for spec in specs]
    assert names and len(names) == len(set(names))
    for spec in specs:
        assert spec.family in FAMILIES, spec.name
        assert isinstance(spec.signed, bool) and spec.assumes.strip(), spec.name
        assert callable(spec.estimate) and callable(spec.values), spec.name
        if spec.bounds is not None:
            lo, hi = spec.bounds
            assert lo < hi and lo <= spec.null_value <= hi, spec.name
        if design in OMNIBUS:  # no direction to reverse: unsigned, no effect at 0
            assert not spec.signed and spec.null_value == 0.0, spec.name
        elif not spec.signed:  # a value that maps to 1 - value must have 1/2 as its no-effect value
            assert spec.null_value == 0.5, spec.name
        else:
            assert spec.null_value == 0.0, spec.name


@pytest.mark.parametrize("design", DESIGNS, ids=lambda d: d.value)
def test_registry_lists_the_catalogue_indices_in_order(design):
    assert [s.name for s in registry(design)] == [i.name for i in catalogue.indices(design)]


@pytest.mark.parametrize(("design", "name"), EVERY_EFFECT)
def test_spec_agrees_with_its_catalogue_record(design, name):
    spec, record = spec_of(design, name), catalogue.index(design, name)
    assert record.design is design
    assert spec.family == record.family
    assert spec.null_value == record.null_value
    assert spec.bounds == record.bounds
    assert spec.signed is record.signed
    assert spec.assumes == record.assumes


# ---------------------------------------------------------------- ordinary data


@pytest.mark.parametrize(("design", "name", "sample"), EVERY_EFFECT_AND_SAMPLE)
def test_ordinary_data_give_a_finite_estimate_and_interval(design, name, sample):
    spec = spec_of(design, name)
    est = spec.estimate(*ORDINARY[design][sample], LEVEL)
    assert type(est.value) is float and math.isfinite(est.value), (name, est.value)
    assert est.reason is None
    _assert_clean(est, name)
    _assert_within(spec.bounds, est, name)
    if est.interval is not None:
        assert est.interval.level == LEVEL
        low, high = est.interval.low, est.interval.high
        if design in OMNIBUS and not low <= est.value <= high:
            # the noncentral interval of an omnibus index is for the population value, never
            # negative, while the sample value is biased or can fall below zero: it may lie
            # outside its interval, and a note must then say on which side
            side = "below" if est.value < low else "above"
            assert any(f"lies {side} its interval" in note for note in est.notes), est.notes
        else:
            assert low <= est.value <= high, (name, est.value, est.interval)
    for iv in est.more:  # intervals beside the index's own: same level
        assert iv.level == LEVEL, (name, iv.method)


@pytest.mark.parametrize(("design", "name", "sample"), EVERY_EFFECT_AND_SAMPLE)
def test_stacked_values_equal_the_estimate_row_by_row(design, name, sample):
    spec = spec_of(design, name)
    samples = ORDINARY[design][sample]
    draws = resampled(samples, resamples=6, seed=4_021)
    # the observed samples as the first row, then the resamples
    stacked = tuple(np.concatenate([s[None], d]) for s, d in zip(samples, draws))
    with np.errstate(all="ignore"):  # as the bootstrap calls it
        rows = np.asarray(spec.values(*stacked), dtype=float)
    assert rows.shape == (7,)
    for i, value in enumerate(rows):
        est = spec.estimate(*(s[i] for s in stacked), LEVEL)
        if est.value is None:
            assert np.isnan(value), (name, i, value)
        else:
            assert value == pytest.approx(est.value, rel=1e-12, abs=1e-12), (name, i)


@pytest.mark.parametrize(("design", "name"), _cases(where=lambda d, s: s.derived_from is not None))
def test_derived_values_are_the_mapped_values_of_their_source(design, name):
    # the bootstrap and leave-one-out use map(source's values) for a derived index
    spec = spec_of(design, name)
    source_name, mapping = spec.derived_from
    source = spec_of(design, source_name)
    for samples in ORDINARY[design].values():
        stacked = resampled(samples, resamples=5, seed=77)
        np.testing.assert_allclose(np.asarray(spec.values(*stacked)),
                                   mapping(np.asarray(source.values(*stacked))),
                                   rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize(("design", "name", "sample"),
                         _cases(with_samples=True, where=lambda d, s: s.leave_one_out is not None))
def test_leave_one_out_fast_path_equals_refitting(design, name, sample):
    spec = spec_of(design, name)
    samples = ORDINARY[design][sample]
    with np.errstate(all="ignore"):  # as the pipeline calls it
        fast = tuple(np.asarray(v, dtype=float) for v in spec.leave_one_out(*samples))
    assert len(fast) == len(samples)  # one array per stratum
    for j, (stratum, values) in enumerate(zip(samples, fast)):
        assert values.shape == (stratum.shape[0],), (name, j)
        refit = np.array([refit_without(spec, samples, j, i) for i in range(stratum.shape[0])])
        np.testing.assert_allclose(values, refit, rtol=1e-10, atol=1e-10, equal_nan=True,
                                   err_msg=f"{name}, stratum {j}")


@pytest.mark.parametrize(("design", "name"), EVERY_EFFECT)
def test_no_effect_data_sit_at_the_null_value(design, name):
    spec = spec_of(design, name)
    est = spec.estimate(*NO_EFFECT[design], LEVEL)
    assert est.value is not None, (name, est.reason)
    if design in OMNIBUS and spec.bounds is None:
        # an omnibus index corrected for chance (its range is open below: it "can fall below
        # zero") reads groups that differ by nothing at all as less than no effect
        assert est.value < spec.null_value, (name, est.value)
    else:
        assert math.isclose(est.value, spec.null_value, abs_tol=1e-12), (name, est.value)


# ---------------------------------------------------------------- order of the groups


@pytest.mark.parametrize(("design", "name", "sample"), EVERY_EFFECT_AND_SAMPLE)
def test_reordering_groups_flips_complements_or_keeps(design, name, sample):
    # two groups or conditions swap: signed indices negate, probabilities with no-effect value
    # 1/2 map to 1 - value. k groups or conditions move one place: an omnibus index has no
    # direction, so it must not change (nor its interval)
    samples = ORDINARY[design][sample]
    spec, other = spec_of(design, name), spec_of(design, name, reordered=True)
    there = spec.estimate(*samples, LEVEL)
    back = other.estimate(*reordered(design, samples), LEVEL)
    assert back.value == pytest.approx(after_reordering(design, spec, there.value),
                                       rel=1e-9, abs=1e-12)
    assert (there.interval is None) == (back.interval is None)
    if there.interval is not None:
        expected = interval_after_reordering(design, spec, there.interval.low, there.interval.high)
        assert back.interval.method == there.interval.method
        assert ((back.interval.low, back.interval.high)
                == pytest.approx(expected, rel=1e-7, abs=1e-9)), name
    assert [iv.method for iv in back.more] == [iv.method for iv in there.more]
    for iv, bk in zip(there.more, back.more):
        expected = interval_after_reordering(design, spec, iv.low, iv.high)
        assert (bk.low, bk.high) == pytest.approx(expected, rel=1e-7, abs=1e-9), (name, iv.method)


# ---------------------------------------------------------------- undefined and edge cases


@pytest.mark.parametrize(("design", "name"), EVERY_EFFECT)
def test_all_equal_values_give_no_effect_or_a_reason(design, name):
    # the registry's estimate warns of nothing (the pipeline does, see the audit test below):
    # any warning here is an error of the suite, and so is any exception
    spec = spec_of(design, name)
    est = spec.estimate(*ALL_EQUAL[design], LEVEL)
    if spec.family in SPREAD_SCALED:  # it divides by a spread that is zero
        assert est.value is None, f"{name} = {est.value!r} when every value is equal"
    if est.value is None:
        assert isinstance(est.reason, str) and est.reason.strip(), name
        assert est.interval is None and est.more == (), name
    else:  # defined without a spread: it must say there is no effect
        assert type(est.value) is float, (name, type(est.value))
        assert est.value == pytest.approx(spec.null_value, abs=1e-12), name


def _edge_cases():
    return [pytest.param(design, spec.name, case, id=f"{design.value}-{spec.name}-{case}")
            for design in DESIGNS for spec in registry(design)
            for case in sorted(EDGE_CASES[design])]


@pytest.mark.parametrize(("design", "name", "case"), _edge_cases())
def test_edge_cases_are_defined_or_null_with_reason(design, name, case):
    samples = EDGE_CASES[design][case]
    spec = spec_of(design, name)
    est = spec.estimate(*samples, LEVEL)
    _assert_clean(est, name)
    _assert_within(spec.bounds, est, name)
    moved = spec_of(design, name, reordered=True).estimate(*reordered(design, samples), LEVEL)
    _assert_clean(moved, name)
    assert (est.value is None) == (moved.value is None), name


def _all_equal_frame(design: Design):
    """An audit's input in which every value is equal, and the arguments naming its design."""
    if design is TWO:
        return (pd.DataFrame({"arm": ["treated"] * 5 + ["control"] * 7, "score": [2.5] * 12}),
                {"outcome": "score", "group": "arm", "groups": ["treated", "control"]})
    if design is K_INDEPENDENT:
        return (pd.DataFrame({"site": ["north"] * 4 + ["east"] * 5 + ["south"] * 6,
                              "score": [0.3] * 15}),
                {"outcome": "score", "group": "site", "groups": ["north", "east", "south"]})
    columns = ["before", "after"] if design is PAIRED else ["week1", "week2", "week3"]
    return (pd.DataFrame({c: [4.2] * 7 for c in columns}), {"paired_columns": columns})


@pytest.mark.parametrize("design", DESIGNS, ids=lambda d: d.value)
def test_audit_of_all_equal_data_warns_and_stays_json_clean(design):
    frame, arguments = _all_equal_frame(design)
    with pytest.warns(UndefinedEffectWarning) as caught:
        result = audit(frame, resamples=200, seed=5, **arguments)
    warned = " ".join(str(w.message) for w in caught)
    names = [spec.name for spec in registry(design)]
    for spec in registry(design):
        effect = result.effect(spec.name)
        if spec.family in SPREAD_SCALED:
            assert effect.estimate is None, f"{spec.name} = {effect.estimate!r}"
            assert effect.reason and effect.ci_low is None and effect.ci_high is None
            assert f"{spec.name} is undefined" in warned
    text = json.dumps(result.to_dict(), allow_nan=False)  # raises ValueError on NaN or infinity
    document = json.loads(text)
    assert document["design"] == design.value
    assert document["effects"].keys() == set(names)


# ---------------------------------------------------------------- two groups: constant groups

# (value of every A, value of every B, n_A, n_B). Decimal constants are what real data look like.
CONSTANT_GROUPS = {
    "integers": (3.0, 1.0, 5, 6),
    "halves": (-2.5, 0.5, 4, 4),
    "tenths": (0.7, 0.1, 13, 14),
    "decimal_a": (0.1, 0.7, 3, 4),
    "decimal_both": (2.2, 1.1, 10, 11),
}


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
