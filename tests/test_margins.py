"""The question of size through the audit: margins from the policy or the command line, the two
one-sided tests per index with a margin, the verdict in the texts.

The tests themselves are checked against statsmodels in tests/references/test_equivalence_reference.py;
here the audit must report exactly what `auditor.equivalence` computes on the same samples, say
where each margin came from, and refuse a malformed margin in one line.
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest

from auditor import equivalence as eq
from auditor import equivalence_ranks as rank_tests
from auditor.errors import DesignError
from auditor.margins import NOT_AVAILABLE, parse_margin_options
from auditor.pipeline import audit
from auditor.policy import PolicyError, default_text, parse_policy

RNG = np.random.default_rng(31)
A = np.round(RNG.normal(10.4, 2, 40), 2)
B = np.round(RNG.normal(10.0, 2, 45), 2)
TWO = pd.DataFrame({"y": np.r_[A, B], "g": ["a"] * 40 + ["b"] * 45})
BEFORE = np.round(RNG.normal(30, 4, 25), 1)
PAIRS = pd.DataFrame({"pre": BEFORE, "post": np.round(BEFORE - RNG.normal(0.2, 1, 25), 1)})
THREE = pd.DataFrame({"y": np.round(np.r_[RNG.normal(5, 1, 20), RNG.normal(5.3, 1, 22),
                                            RNG.normal(5.8, 1.2, 18)], 1),
                      "g": ["a"] * 20 + ["b"] * 22 + ["c"] * 18})
_T1 = np.round(RNG.normal(20, 3, 24), 1)
REPEATED = pd.DataFrame({"t1": _T1, "t2": np.round(_T1 + RNG.normal(0.4, 1, 24), 1),
                         "t3": np.round(_T1 + RNG.normal(0.9, 1, 24), 1)})


def run(frame, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return audit(frame, resamples=200, seed=2, **kw)


def policy_with(margins: str):
    return parse_policy(default_text() + "\n[margins]\n" + margins + "\n", "with margins")


def test_no_margin_asks_no_question_of_size():
    result = run(TWO, outcome="y", group="g")
    assert result.equivalence == {} and result.to_dict()["equivalence"] == {}
    assert "Smallest effect of interest" not in result.decision.rationale


def test_command_line_margins_give_exactly_the_two_one_sided_tests():
    result = run(TWO, outcome="y", group="g",
                 margins={"cohen_d": 0.3, "mean_difference": 1.5, "prob_superiority": 0.08})
    records = result.to_dict()["equivalence"]
    expected = {"cohen_d": eq.cohen_d_tost(A, B, 0.3, 0.05),
                "mean_difference": eq.mean_difference_tost(A, B, 1.5, 0.05),
                "prob_superiority": eq.prob_superiority_tost(A, B, 0.08, 0.05)}
    for name, ref in expected.items():
        record = records[name]
        assert record["margin_from"] == "command line" and record["alpha"] == pytest.approx(0.05)
        assert record["verdict"] == ref.verdict, name
        for key in ("p_lower", "p_upper", "p_tost", "p_difference", "interval_low",
                    "interval_high"):
            assert record[key] == pytest.approx(getattr(ref, key), rel=1e-12), (name, key)
    json.dumps(records, allow_nan=False)


def test_policy_margins_by_index_and_by_family_with_the_justification_quoted():
    policy = policy_with('standardized_mean = 0.25\nprob_superiority = 0.06\n'
                         'justification = "half the smallest change the clinic acts on"')
    result = run(TWO, outcome="y", group="g", policy=policy, margins={"hedges_g": 0.4})
    eqv = result.equivalence
    assert eqv["cohen_d"]["margin"] == 0.25 and "family" in eqv["cohen_d"]["margin_from"]
    assert eqv["hedges_g"]["margin"] == 0.4 and eqv["hedges_g"]["margin_from"] == "command line"
    assert eqv["prob_superiority"]["margin_from"] == "policy"
    assert eqv["glass_delta"]["margin"] == 0.25 and eqv["glass_delta"]["verdict"] is not None
    assert eqv["robust_d"]["reason"] == NOT_AVAILABLE  # a family margin, no procedure yet
    primary = result.decision.primary
    if primary in eqv and eqv[primary].get("verdict"):
        assert "Smallest effect of interest" in result.decision.rationale
        assert "Is the effect large enough to matter?" in result.decision.reviewer_note
        assert "half the smallest change the clinic acts on" in result.decision.methods_sentence


def test_paired_margins_use_the_rounded_differences():
    result = run(PAIRS, paired_columns=["pre", "post"], margins={"d_z": 0.5, "ps_dep": 0.1})
    d = result.samples.differences
    ref = eq.d_z_tost(d, 0.5, 0.05)
    assert result.equivalence["d_z"]["p_tost"] == pytest.approx(ref.p_tost, rel=1e-12)
    ps = rank_tests.ps_dep_tost(d, 0.1, 0.05)
    assert result.equivalence["ps_dep"]["p_tost"] == pytest.approx(ps.p_tost, rel=1e-12)
    assert result.equivalence["ps_dep"]["estimate"] == pytest.approx(
        result.effect("ps_dep").estimate, rel=1e-12)


def test_hodges_lehmann_margins_in_both_designs_and_an_index_without_a_test():
    two = run(TWO, outcome="y", group="g", margins={"hodges_lehmann": 0.5, "r_from_z": 0.1})
    ref = rank_tests.hodges_lehmann_tost(A, B, 0.5, 0.05)
    record = two.equivalence["hodges_lehmann"]
    assert record["p_tost"] == pytest.approx(ref.p_tost, rel=1e-12)
    assert record["estimate"] == pytest.approx(two.effect("hodges_lehmann").estimate, rel=1e-12)
    assert record["df"] is None  # a rank statistic has no degrees of freedom
    assert two.equivalence["r_from_z"]["reason"] == NOT_AVAILABLE
    pairs = run(PAIRS, paired_columns=["pre", "post"], margins={"hodges_lehmann": 0.4})
    ref = rank_tests.paired_hodges_lehmann_tost(pairs.samples.differences, 0.4, 0.05)
    assert pairs.equivalence["hodges_lehmann"]["p_tost"] == pytest.approx(ref.p_tost, rel=1e-12)
    json.dumps(two.to_dict()["equivalence"], allow_nan=False)
    json.dumps(pairs.to_dict()["equivalence"], allow_nan=False)


def test_a_margin_for_an_index_the_design_does_not_have_is_refused_before_any_statistic(
        monkeypatch):
    import auditor.pipeline as pipeline

    def never(*args, **kwargs):
        raise AssertionError("the audit ran before the margin's index was checked")

    monkeypatch.setattr(pipeline, "_audit_two_groups", never)
    monkeypatch.setattr(pipeline, "_audit_repeated", never)
    monkeypatch.setattr(pipeline, "_audit_k_groups", never)
    with pytest.raises(DesignError, match="--margin d_z: not an index of two independent groups"):
        run(TWO, outcome="y", group="g", margins={"d_z": 0.3})
    with pytest.raises(DesignError, match="--margin cohen_d: not an index of two paired"):
        run(PAIRS, paired_columns=["pre", "post"], margins={"cohen_d": 0.3})
    with pytest.raises(DesignError, match="--margin kendall_w: not an index of 3 independent"):
        run(THREE, outcome="y", group="g", margins={"kendall_w": 0.1})
    with pytest.raises(DesignError, match="--margin eta_squared: not an index of 3 repeated"):
        run(REPEATED, paired_columns=["t1", "t2", "t3"], margins={"eta_squared": 0.1})


def test_glass_delta_s_margin_follows_the_reference_group():
    for reference, position in ((None, 1), ("b", 1), ("a", 0)):
        result = run(TWO, outcome="y", group="g", reference=reference,
                     margins={"glass_delta": 0.4})
        ref = eq.glass_delta_tost(A, B, 0.4, 0.05, reference=position)
        record = result.equivalence["glass_delta"]
        effect = result.effect("glass_delta")
        assert record["p_tost"] == pytest.approx(ref.p_tost, rel=1e-12), reference
        assert record["estimate"] == pytest.approx(effect.estimate, rel=1e-12), reference


def test_k_group_and_repeated_margins_give_the_one_sided_omnibus_tests():
    from auditor import equivalence_omnibus as omnibus

    result = run(THREE, outcome="y", group="g",
                 margins={"eta_squared": 0.1, "epsilon_squared_h": 0.1, "omega_squared": 0.1})
    groups = [THREE.y[THREE.g == g].to_numpy() for g in ("a", "b", "c")]
    for name, fn in (("eta_squared", omnibus.eta_squared_tost),
                     ("epsilon_squared_h", omnibus.epsilon_squared_h_tost),
                     ("omega_squared", omnibus.omega_squared_tost)):
        record, ref = result.equivalence[name], fn(groups, 0.1, 0.05)
        assert record["verdict"] == ref.verdict and record["p_lower"] is None, name
        assert record["p_upper"] == pytest.approx(ref.p_upper, rel=1e-12), name
        assert record["estimate"] == pytest.approx(result.effect(name).estimate, rel=1e-12)
    assert result.equivalence["eta_squared"]["margin_low"] == 0.0
    rep = run(REPEATED, paired_columns=["t1", "t2", "t3"], margins={"kendall_w": 0.2})
    ref = omnibus.kendall_w_tost(REPEATED[["t1", "t2", "t3"]].to_numpy(), 0.2, 0.05)
    assert rep.equivalence["kendall_w"]["p_upper"] == pytest.approx(ref.p_upper, rel=1e-12)


def test_a_margin_outside_an_index_s_range_is_explained_not_raised():
    result = run(THREE, outcome="y", group="g", margins={"eta_squared": 1.5})
    assert "eta_squared" in result.equivalence["eta_squared"]["reason"]
    assert result.equivalence["eta_squared"].get("verdict") is None


@pytest.mark.parametrize("option", ["cohen_d", "cohen_d=", "=0.3", "cohen_d=-1", "cohen_d=x",
                                    "cohen_d=nan", "cohen_d=inf"])
def test_malformed_margin_options_are_one_line_errors(option):
    with pytest.raises(ValueError, match="give INDEX=VALUE with a positive number"):
        parse_margin_options([option])


@pytest.mark.parametrize("body, fragment", [
    ("cohen_d = -0.2", "margins.cohen_d"),
    ("cohen_dd = 0.2", "did you mean 'cohen_d'"),
    ('justification = ""', "margins.justification"),
    ("cohen_d = true", "margins.cohen_d"),
])
def test_bad_policy_margins_name_the_key(body, fragment):
    with pytest.raises(PolicyError, match=fragment):
        policy_with(body)


def test_the_command_line_takes_margins_and_refuses_bad_ones(run_cli, tmp_path):
    path = tmp_path / "two.csv"
    TWO.to_csv(path, index=False)
    res = run_cli("check", path, "--outcome", "y", "--group", "g", "--boot", "200", "--json", "-",
                  "--quiet", "--margin", "cohen_d=0.3", "--margin", "mean_difference=1.5")
    assert res.code == 0, res.err
    doc = json.loads(res.out)
    assert set(doc["equivalence"]) == {"cohen_d", "mean_difference"}
    bad = run_cli("check", path, "--outcome", "y", "--group", "g", "--margin", "cohen_d=big")
    assert bad.code == 1 and bad.err.startswith("auditor: error: --margin 'cohen_d=big'")
    assert "Traceback" not in bad.err and bad.err.count("\n") == 1


def test_two_group_audits_carry_the_scale_conversions_of_their_own_estimates():
    from auditor.conversions import conversion_table

    result = run(TWO, outcome="y", group="g")
    value = {e.name: e.estimate for e in result.effects}
    expected = conversion_table(value["cohen_d"], value["prob_superiority"], 40, 45,
                                value["cliff_delta"], d_unpooled=value["d_unpooled"])
    assert result.to_dict()["conversions"] == expected.to_dict()
    link = result.conversions.link("prob_superiority_from_cohen_d")
    assert link.gap == pytest.approx(value["prob_superiority"] - link.value, abs=1e-15)
    assert run(PAIRS, paired_columns=["pre", "post"]).to_dict()["conversions"] is None


def test_the_screen_shows_the_primary_index_s_verdict_at_the_policy_s_margin(tmp_path):
    from auditor.screen import run_screen

    frame = TWO.assign(z=np.round(RNG.normal(0, 1, 85), 2))
    policy = policy_with("standardized_mean = 0.3\nprob_superiority = 0.08\nmean = 1.0")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rows, _ = run_screen(frame, group="g", policy=policy, resamples=200)
    assert rows
    for row in rows:
        result = run(frame, outcome=row["outcome"], group="g", policy=policy)
        expected = result.equivalence[result.decision.primary]["verdict"]
        assert row["size_verdict"] == expected, row["outcome"]


def test_policy_show_lists_the_margins_with_their_justification():
    from auditor.policy import describe

    text = describe(policy_with('cohen_d = 0.3\njustification = "a tenth of the scale"'))
    assert "- cohen_d: 0.3" in text and "a tenth of the scale" in text


def test_a_misleading_conversion_is_named_in_the_report():
    from auditor.report import render_markdown

    rng = np.random.default_rng(5)
    a, b = np.round(rng.lognormal(1.0, 1.6, 60), 2), np.round(rng.lognormal(0, 1.6, 60), 2)
    result = run(pd.DataFrame({"y": np.r_[a, b], "g": ["a"] * 60 + ["b"] * 60}),
                 outcome="y", group="g")
    flagged = [link for link in result.conversions.links if link.flagged]
    text = render_markdown(result)
    assert flagged, [(link.key, link.gap) for link in result.conversions.links]
    for link in flagged:
        assert f"({link.formula}) would mislead here" in text.replace("\\", "")


def test_the_screen_command_takes_margins(run_cli, tmp_path):
    path = tmp_path / "two.csv"
    TWO.assign(z=np.round(RNG.normal(0, 1, 85), 2)).to_csv(path, index=False)
    res = run_cli("screen", path, "--group", "g", "--boot", "200", "--quiet", "--out",
                  tmp_path / "out", "--margin", "prob_superiority=0.08", "--margin",
                  "hedges_g=0.3", "--margin", "d_unpooled=0.3", "--margin", "cohen_d=0.3")
    assert res.code == 0, res.err
    rows = json.loads((tmp_path / "out" / "screen.json").read_text())["rows"]
    assert rows and all(r["size_verdict"] for r in rows if r["status"] == "audited")
    bad = run_cli("screen", path, "--group", "g", "--quiet", "--out", tmp_path / "o2",
                  "--margin", "cohens_d=0.3")
    assert bad.code == 1 and bad.err.startswith("auditor: error: --margin cohens_d: not an index")


def test_the_texts_call_an_omnibus_index_s_test_one_sided():
    from auditor.rationale import size_text

    result = run(THREE, outcome="y", group="g", margins={"eta_squared": 0.2})
    text = size_text(result, "eta_squared")
    assert "one-sided test below the margin p" in text and "two one-sided" not in text, text
    two = run(TWO, outcome="y", group="g", margins={"cohen_d": 0.3})
    assert "two one-sided tests p" in size_text(two, "cohen_d")
    both = run(THREE, outcome="y", group="g",
               margins={"eta_squared": 0.2, "epsilon_squared_h": 0.2})
    sentence = both.decision.methods_sentence
    assert both.decision.primary in ("eta_squared", "epsilon_squared_h"), both.decision.primary
    assert "by a one-sided test below the margin at alpha" in sentence, sentence
    assert " none interval" not in sentence


def test_the_methods_sentence_says_when_the_primary_index_has_no_interval():
    # every value one of two ratings, the groups identical: epsilon^2_H is 0 and its bootstrap
    # interval is withheld (the estimate lies outside every resample)
    tied = pd.DataFrame({"y": [1.0, 2.0] * 30, "g": ["a", "b", "c"] * 20})
    result = run(tied, outcome="y", group="g")
    sentence = result.decision.methods_sentence
    assert result.decision.interval.get("method") == "none", result.decision.interval
    assert "no interval could be computed on these data" in sentence, sentence
    assert " none interval" not in sentence and "  " not in sentence, sentence


def test_a_dominance_family_margin_asks_one_question_of_a_and_of_cliff_s_delta():
    # 0.06 is a distance from 1/2 on A's scale; delta = 2A - 1 takes it as 0.12 from 0, so
    # the two indices get the same two one-sided tests and the same verdict
    result = run(TWO, outcome="y", group="g", policy=policy_with("dominance = 0.06"))
    eqv = result.equivalence
    assert eqv["prob_superiority"]["margin"] == 0.06
    assert eqv["cliff_delta"]["margin"] == pytest.approx(0.12)
    assert "0.12 on the scale of cliff_delta" in eqv["cliff_delta"]["margin_from"]
    for key in ("p_lower", "p_upper", "p_difference"):
        assert eqv["cliff_delta"][key] == pytest.approx(eqv["prob_superiority"][key], rel=1e-12)
    assert eqv["cliff_delta"]["verdict"] == eqv["prob_superiority"]["verdict"]
    assert eqv["rank_biserial"]["margin"] == pytest.approx(0.12)


def test_a_margin_for_an_undefined_index_keeps_its_record_with_the_reason():
    constant_b = pd.DataFrame({"y": np.r_[A[:20], np.full(20, 10.0)], "g": ["a"] * 20 + ["b"] * 20})
    result = run(constant_b, outcome="y", group="g", margins={"glass_delta": 0.5})
    record = result.equivalence["glass_delta"]
    assert result.effect("glass_delta").estimate is None
    assert record["verdict"] is None and "constant" in record["reason"], record


def test_a_dominance_family_margin_leaves_r_from_z_alone():
    result = run(TWO, outcome="y", group="g", policy=policy_with("dominance = 0.1"))
    assert "r_from_z" not in result.equivalence
    named = run(TWO, outcome="y", group="g", policy=policy_with("r_from_z = 0.1"))
    assert named.equivalence["r_from_z"]["reason"] == NOT_AVAILABLE
