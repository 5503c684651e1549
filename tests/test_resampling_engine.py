"""The resampling engine: count-based rank statistics give the same replicates as sorting every
resample; chunking does not change the random stream; scipy.stats.bootstrap agrees."""

from __future__ import annotations

from unittest import mock

import numpy as np
import pytest
from scipy import stats

from auditor import ranks, resampling
from auditor.effects import two_group_effects


def _data():
    rng = np.random.default_rng(77)
    yield rng.normal(size=41), rng.normal(0.3, 2.0, size=36)
    yield rng.integers(1, 6, 52).astype(float), rng.integers(1, 8, 47).astype(float)
    # one-decimal values: pair differences such as 0.3 - 0.1 round in floating point
    yield np.round(rng.normal(0.2, 1, 90), 1), np.round(rng.normal(0, 1.5, 75), 1)
    yield np.array([2.0, 5.0]), np.array([1.0, 4.0, 4.0])


@pytest.mark.parametrize("presorted", [False, True])
@pytest.mark.parametrize("a,b", list(_data()))
def test_count_statistics_equal_sorting_each_resample(a, b, presorted):
    if presorted:  # the pipeline passes sorted groups; the no-permutation path must agree too
        a, b = np.sort(a), np.sort(b)
    specs = [s for s in two_group_effects() if s.by_counts is not None]
    assert {s.name for s in specs} == {s.name for s in two_group_effects()}
    for spec in specs:
        by_values = resampling.resample_units({"x": spec.values}, (a, b), 700,
                                              np.random.default_rng(5))["x"]
        by_counts = resampling.resample_units({}, (a, b), 700, np.random.default_rng(5), None,
                                              {"x": spec.by_counts(a, b)})["x"]
        np.testing.assert_allclose(by_counts, by_values, rtol=0, atol=1e-12)


def test_counts_from_indices_counts_every_draw():
    idx = np.array([[0, 0, 2], [1, 2, 2]])
    np.testing.assert_array_equal(resampling.counts_from_indices(idx), [[2, 0, 1], [0, 1, 2]])


@pytest.mark.parametrize("block", [1, 5, 13 * 4, 32_768])
@pytest.mark.parametrize("m,n", [(1, 1), (1, 5), (6, 1), (37, 13), (500, 200)])
def test_counts_written_over_the_indices_equal_counts_from_indices(m, n, block):
    rng = np.random.default_rng(m * 1000 + n)
    idx = rng.integers(0, n, (m, n))
    want = resampling.counts_from_indices(idx)
    with mock.patch.object(resampling, "COUNT_BLOCK_VALUES", block):
        got = resampling.counts_over_indices(idx.copy())
    assert got.dtype == np.float64 and got.shape == (m, n)
    np.testing.assert_array_equal(got, want)
    assert np.all(got.sum(axis=1) == n)
    # arrays it cannot reuse (other integer widths, views) are counted into new memory
    for other in (idx.astype(np.int32), idx[:, ::-1], idx[::-1]):
        kept = other.copy()
        np.testing.assert_array_equal(resampling.counts_over_indices(other),
                                      resampling.counts_from_indices(kept))
        np.testing.assert_array_equal(other, kept)


@pytest.mark.parametrize("block", [1, 7, 64, 10**6])
@pytest.mark.parametrize("a,b", list(_data()))
def test_superiority_counts_are_exact_whatever_the_blocking(a, b, block):
    """U of each resample, counted pair by pair on the expanded resample, equals the count
    statistic exactly (no rounding), however many resamples a block holds."""
    rng = np.random.default_rng(31)
    m = 23
    ca = resampling.counts_from_indices(rng.integers(0, a.size, (m, a.size)))
    cb = resampling.counts_from_indices(rng.integers(0, b.size, (m, b.size)))
    with mock.patch.object(ranks, "BLOCK_VALUES", block):
        got = ranks.superiority_by_counts(a, b)[0](ca, cb)
    want = []
    for i in range(m):
        x, y = np.repeat(a, ca[i].astype(int)), np.repeat(b, cb[i].astype(int))
        want.append(np.sum(x[:, None] > y[None, :]) + 0.5 * np.sum(x[:, None] == y[None, :]))
    np.testing.assert_array_equal(got, want)


def test_chunking_keeps_the_random_stream_per_chunk_size():
    # smaller chunks interleave the draws of A and B differently, so the replicates change;
    # with the chunk equal to scipy's batch the replicates equal scipy's (scipy.stats.bootstrap)
    a, b = next(_data())
    stat = two_group_effects()[1].values  # cohen_d
    with mock.patch.object(resampling, "CHUNK_VALUES", 77 * 10):
        ours = resampling.resample_units({"d": stat}, (a, b), 300, np.random.default_rng(9))["d"]
    res = stats.bootstrap((a, b), lambda x, y, axis=-1: stat(x, y), n_resamples=300, batch=10,
                          method="percentile", rng=np.random.default_rng(9))
    np.testing.assert_allclose(ours, res.bootstrap_distribution, rtol=1e-12)


def test_superiority_counts_match_mann_whitney_u():
    # U of the original sample = counts of one everywhere (scipy.stats.mannwhitneyu)
    a, b = next(_data())
    u = ranks.superiority_by_counts(a, b)[0](np.ones((1, a.size)), np.ones((1, b.size)))[0]
    assert u == pytest.approx(stats.mannwhitneyu(a, b).statistic, abs=1e-9)


def test_shift_by_counts_handles_resamples_far_outside_the_starting_bracket():
    """Resamples made of one repeated value put the shift at the edge of all pair differences,
    far outside the search's starting bracket (the estimate +- 3 interval half-widths)."""
    from auditor.shifts import hodges_lehmann_by_counts

    rng = np.random.default_rng(12)
    a, b = rng.normal(0, 1, 30), rng.normal(0.5, 1, 25)
    ca = np.zeros((4, a.size))
    cb = np.zeros((4, b.size))
    ca[0, np.argmin(a)], cb[0, np.argmax(b)] = a.size, b.size  # lowest shift possible
    ca[1, np.argmax(a)], cb[1, np.argmin(b)] = a.size, b.size  # highest
    ca[2] = 1.0
    cb[2] = 1.0  # the sample itself
    ca[3, :2], cb[3, -3:] = a.size / 2, [10.0, 10.0, 5.0]
    got = hodges_lehmann_by_counts(a, b)(ca, cb)
    want = [float(np.median(np.subtract.outer(np.repeat(a, ca[i].astype(int)),
                                              np.repeat(b, cb[i].astype(int)))))
            for i in range(4)]
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)
    assert got[0] == a.min() - b.max() and got[1] == a.max() - b.min()


@pytest.mark.parametrize("a,b", list(_data()))
def test_derived_effects_equal_their_own_computation(a, b):
    """Delta and the rank-biserial r are mapped from A's replicates and leave-one-out values in
    the pipeline; the mapping must give what their own count statistics and fast paths give."""
    specs = {s.name: s for s in two_group_effects()}
    derived = [s for s in specs.values() if s.derived_from is not None]
    assert {s.name for s in derived} == {"cliff_delta", "rank_biserial"}
    for spec in derived:
        source, mapping = spec.derived_from
        draws = lambda fn: resampling.resample_units(  # noqa: E731
            {}, (a, b), 300, np.random.default_rng(9), None, {"x": fn(a, b)})["x"]
        np.testing.assert_allclose(mapping(draws(specs[source].by_counts)),
                                   draws(spec.by_counts), rtol=0, atol=1e-12)
        for mine, theirs in zip(spec.leave_one_out(a, b), specs[source].leave_one_out(a, b)):
            np.testing.assert_allclose(mapping(theirs), mine, rtol=0, atol=1e-12)


def test_bca_gives_no_interval_when_the_estimate_sits_outside_the_central_replicates():
    """An omnibus effect near zero: almost every resample is larger than the estimate, so the
    bias correction would pin both limits to the lowest replicates."""
    rng = np.random.default_rng(2)
    replicates = np.abs(rng.normal(0.05, 0.02, 2000))
    theta = float(np.quantile(replicates, 0.01))  # 1% of resamples below it
    loo = (rng.normal(theta, 1e-3, 30),)
    summary = resampling.bca_interval(theta, replicates, loo, 0.95)
    assert summary.interval is None and "bias correction is extreme" in summary.reason
    inside = float(np.quantile(replicates, 0.3))
    assert resampling.bca_interval(inside, replicates, loo, 0.95).interval is not None
