"""One test, one answer: the pre-policy `tests` block of an audit, the policy's decision and the
pairwise follow-ups of k repeated conditions must report the same statistic and p for the same
test on the same data.

The data are invented small paired sets built to land in each branch of the signed-rank test
(tied mid-ranks, zero differences, neither, more than 50 non-zero differences). Invented data are
enough here: these are consistency checks between two places of the tool, not reference values;
the values themselves are checked against scipy and enumeration in tests/references.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditor import paired
from auditor import significance as sg
from auditor.pipeline import audit
from auditor.policy import default_text, parse_policy

SIGNED_RANKS = '{ primary = "matched_rank_biserial", also = ["d_z"], test = "wilcoxon" }'


def wilcoxon_policy():
    """The built-in policy with every paired branch reporting the Wilcoxon signed-rank test, so
    that the decision runs it whatever the screening finds."""
    head, rest = default_text().split("[paired]\n", 1)
    body, tail = rest.split("\n[k_groups]", 1)
    lines = [f"{line.split(' = {')[0]} = {SIGNED_RANKS}" if " = {" in line else line
             for line in body.splitlines()]
    return parse_policy(head + "[paired]\n" + "\n".join(lines) + "\n\n[k_groups]" + tail,
                        "every paired branch picks wilcoxon")


def paired_frame(differences, start=20) -> pd.DataFrame:
    """Whole-number pairs whose differences (before - after) are exactly `differences`."""
    d = np.asarray(differences, dtype=float)
    before = start + np.arange(d.size) % 7
    return pd.DataFrame({"id": np.arange(1, d.size + 1), "before": before, "after": before - d})


def run(frame, columns, policy=None):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # undefined-effect warnings are reported in the result
        return audit(frame, paired_columns=columns, resamples=200, seed=11, policy=policy)


DATA = {
    # ten differences with tied |d| (four of 1, three of 2, two of 3): few enough for every
    # sign pattern to be counted, too few for the normal approximation to be trusted
    "small_tied": [1, 1, 1, 2, 2, -1, 3, 3, 4, -2],
    # twenty differences with ties and two zeros
    "ties_and_zeros": [0, 0, 1, 1, 2, -2, 2, 3, 3, -3, 4, 4, 5, -1, 6, 6, 7, 2, 1, -4],
    # nine untied differences
    "untied": [1, -2, 3, 4, 5, -6, 7, 8, 9],
    # 56 non-zero differences with ties: beyond the exact limit, the normal approximation
    "many_tied": [((i % 9) - 2) or 5 for i in range(56)],
}


@pytest.mark.parametrize("name", list(DATA))
def test_paired_tests_block_and_decision_report_one_wilcoxon(name):
    frame = paired_frame(DATA[name])
    result = run(frame, ["before", "after"], wilcoxon_policy())
    decided = result.decision.test
    assert decided["name"] == "wilcoxon"
    listed = result.tests["wilcoxon"]
    assert listed["statistic"] == decided["statistic"]
    assert listed["p"] == decided["p"]
    assert listed["method"] == decided["method"]
    # both are the registry's test on the audit's rounded differences
    x = frame[["before", "after"]].to_numpy(dtype=float)
    direct = sg.run_test("paired", "wilcoxon", (x,), digits=0)
    assert (listed["statistic"], listed["p"]) == (direct.statistic, direct.p)


def test_wilcoxon_undefined_in_both_places_when_every_difference_is_zero():
    result = run(paired_frame([0] * 6), ["before", "after"], wilcoxon_policy())
    listed, decided = result.tests["wilcoxon"], result.decision.test
    assert listed["statistic"] is None and listed["p"] is None
    assert decided["statistic"] is None and decided["p"] is None
    assert listed["reason"] == decided["reason"]


def test_paired_t_in_the_tests_block_is_the_registry_test():
    # 0.3 - 0.1, 0.2 - 0.0, ... are all 0.2 once rounded to the data's one decimal, but not in
    # binary floating point: t must be undefined (no spread), not a huge number.
    frame = pd.DataFrame({"first": [0.3, 0.2, 1.5, 2.4, 0.7], "second": [0.1, 0.0, 1.3, 2.2, 0.5]})
    result = run(frame, ["first", "second"])
    listed = result.tests["paired_t"]
    direct = sg.paired_t(frame.to_numpy(dtype=float), digits=1)
    assert direct.statistic is None and direct.reason
    assert listed["statistic"] is None and listed["p"] is None and listed["reason"] == direct.reason
    frame["second"] = [0.1, 0.0, 1.0, 2.3, 0.9]
    listed = run(frame, ["first", "second"]).tests["paired_t"]
    direct = sg.paired_t(frame.to_numpy(dtype=float), digits=1)
    assert (listed["statistic"], listed["p"], listed["df"]) == (direct.statistic, direct.p,
                                                                 direct.df)


def test_k_repeated_pairwise_follow_ups_are_the_registry_wilcoxon():
    d1 = np.array(DATA["small_tied"], dtype=float)
    d2 = np.array([2, 0, 1, 1, -1, 3, 3, 0, 2, 2], dtype=float)
    base = 30 + np.arange(d1.size) % 5
    frame = pd.DataFrame({"a": base, "b": base - d1, "c": base - d1 - d2})
    result = run(frame, ["a", "b", "c"])
    x = frame.to_numpy(dtype=float)
    for comp, (i, j) in zip(result.pairwise, [(0, 1), (0, 2), (1, 2)]):
        direct = sg.run_test("paired", "wilcoxon", (x[:, [i, j]],), digits=0)
        assert comp.test == "wilcoxon_signed_rank"
        assert (comp.statistic, comp.p) == (direct.statistic, direct.p)
        d = paired.differences(x[:, [i, j]], 0)
        nonzero = d[d != 0]
        ranks = stats.rankdata(np.abs(nonzero))  # scipy mid-ranks of |d|, zeros dropped
        assert comp.statistic == pytest.approx(float(np.sum(ranks[nonzero > 0])), abs=1e-12)


# ------------------------------------------------------------------ k groups


def k_frame(groups) -> pd.DataFrame:
    return pd.DataFrame({"g": np.repeat([f"g{j}" for j in range(len(groups))],
                                        [len(v) for v in groups]),
                         "y": np.concatenate([np.asarray(v, dtype=float) for v in groups])})


K_DATA = {
    "spread out": [[3.1, 4.2, 5.0, 2.2, 3.3], [4.4, 6.1, 5.5, 5.9, 4.8], [2.0, 2.6, 3.1, 1.9]],
    "a constant decimal group": [[0.1, 0.1, 0.1], [0.2, 0.4, 0.3], [0.5, 0.9, 0.7]],
    "every group constant": [[0.1, 0.1, 0.1], [0.3, 0.3, 0.3], [0.7, 0.7]],
}


@pytest.mark.parametrize("name", sorted(K_DATA))
def test_k_group_tests_block_agrees_with_the_tests_a_policy_runs(name):
    groups = K_DATA[name]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # undefined effects of constant groups are reported
        result = audit(k_frame(groups), outcome="y", group="g", resamples=200, seed=3)
    samples = tuple(np.asarray(v, dtype=float) for v in groups)
    for test in ("anova", "welch_anova", "kruskal_wallis"):
        listed, ran = result.tests[test], sg.run_test("k_groups", test, samples)
        assert (listed["p"] is None) == (ran.p is None), (name, test, listed, ran.reason)
        if ran.p is not None:
            assert listed["p"] == pytest.approx(ran.p, rel=1e-12), (name, test)
            assert listed["statistic"] == pytest.approx(ran.statistic, rel=1e-12), (name, test)
