"""Each random stream of an audit is its own: the omnibus bootstrap and the pairwise comparisons
of k groups or conditions draw from SeedSequence(seed, spawn_key=(i,)), skipping the keys of the
permutation tests, the coverage check and the cluster bootstrap (`pipeline.comparison_streams`).
Checked on the generators' states, which numpy derives from the seed and the key."""

from __future__ import annotations

import numpy as np
import pytest

from auditor.clusters import CLUSTER_STREAM
from auditor.pipeline import (COVERAGE_STREAM, PERMUTATION_STREAM, RESERVED_STREAMS,
                              comparison_streams)


def _state(sequence: np.random.SeedSequence) -> tuple:
    return tuple(sequence.generate_state(4))


@pytest.mark.parametrize("count", [1, 4, 7])
def test_up_to_four_groups_the_streams_are_the_seeds_children(count):
    old = [_state(s) for s in np.random.SeedSequence(2024).spawn(count)]
    assert [_state(s) for s in comparison_streams(2024, count)] == old


@pytest.mark.parametrize("count", [8, 11, 16, 29])  # 5, 5, 6 and 8 groups' pairs plus one
def test_no_comparison_draws_another_streams_numbers(count):
    others = {_state(np.random.SeedSequence(2024, spawn_key=(k,)))
              for k in (PERMUTATION_STREAM, COVERAGE_STREAM, CLUSTER_STREAM)}
    streams = [_state(s) for s in comparison_streams(2024, count)]
    assert len(streams) == count == len(set(streams))
    assert not set(streams) & others
    assert RESERVED_STREAMS == {PERMUTATION_STREAM, COVERAGE_STREAM, CLUSTER_STREAM}
