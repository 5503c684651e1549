"""The decision under the built-in policy: one constructed data set per branch, proving that the
branch fires and picks the expected index and test; the rule trace; the texts quote the JSON.

Data are built from normal quantiles (exactly normal shape, no random draws) or from small
integer scales, so each branch fires for the reason it is meant to test and no other.
"""

from __future__ import annotations

import json
import re
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditor.pipeline import audit
from auditor.policy import default_policy, default_text, parse_policy


def normal_values(n: int, mean: float = 0.0, sd: float = 1.0) -> np.ndarray:
    """n values exactly at the normal quantiles (i - 0.5) / n: normal in shape, no ties."""
    return mean + sd * stats.norm.ppf((np.arange(1, n + 1) - 0.5) / n)


def two(a, b, labels=("treated", "control")) -> pd.DataFrame:
    return pd.DataFrame({"arm": [labels[0]] * len(a) + [labels[1]] * len(b),
                         "score": np.r_[a, b]})


def run(frame, **kw):
    with _quiet():
        return audit(frame, outcome=kw.pop("outcome", "score"), group=kw.pop("group", "arm"),
                     resamples=kw.pop("resamples", 300), **kw)


class _quiet:
    """Undefined-effect warnings are expected on some constructed data; the result reports them."""

    def __enter__(self):
        self._w = warnings.catch_warnings()
        self._w.__enter__()
        warnings.simplefilter("ignore")

    def __exit__(self, *exc):
        return self._w.__exit__(*exc)


def fired(result) -> set[str]:
    return {r.rule for r in result.decision.reasons if r.fired}


# ------------------------------------------------------------------ two groups, one per branch


def test_normal_equal_spread_keeps_hedges_g_and_student_t():
    r = run(two(normal_values(40, 0.6), normal_values(40)))
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("assumptions_hold", "hedges_g", "student_t")
    assert fired(r) == set()
    assert d.descriptives == "mean_sd"
    ref = stats.ttest_ind(normal_values(40, 0.6), normal_values(40))
    assert d.test["statistic"] == pytest.approx(ref.statistic, rel=1e-10)
    assert d.test["p"] == pytest.approx(ref.pvalue, rel=1e-10)
    assert d.magnitude["hedges_g"] == "medium"  # g about 0.6 (Cohen 1988 benchmarks)


def test_skewed_data_turn_to_a_and_the_mann_whitney_test():
    rng = np.random.default_rng(4)
    a, b = rng.lognormal(0.4, 1.0, 60), rng.lognormal(0.0, 1.0, 60)
    r = run(two(a, b))
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("non_normal", "prob_superiority",
                                                     "mann_whitney")
    assert d.descriptives == "median_iqr_range"
    ref = stats.mannwhitneyu(a, b, use_continuity=False, method="asymptotic")  # 3600 pairs
    assert d.test["p"] == pytest.approx(ref.pvalue, rel=1e-9)
    assert d.interval["method"] == "proportional_odds_score" and d.interval["agrees_with_test"]
    skew = next(e for e in next(x for x in d.reasons if x.rule == "non_normal").evidence
                if e.statistic == "|skewness|" and e.met)
    assert skew.value >= 1.0 and skew.limit == 1.0


def test_unequal_spread_with_unequal_n_turns_to_unpooled_d_and_welch():
    a, b = normal_values(30, 0.5, 2.2), normal_values(80, 0.0, 1.0)  # smaller group wider
    r = run(two(a, b))
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("unequal_spread", "d_unpooled", "welch_t")
    assert fired(r) == {"unequal_spread"}
    ref = stats.ttest_ind(a, b, equal_var=False)
    assert d.test["p"] == pytest.approx(ref.pvalue, rel=1e-10)
    assert d.test["df"] == pytest.approx(ref.df, rel=1e-10)


@pytest.mark.slow
def test_a_milder_sd_ratio_fires_only_when_the_smaller_group_is_wider():
    wide_small = run(two(normal_values(30, 0.5, 1.7), normal_values(80)))
    wide_large = run(two(normal_values(80, 0.5, 1.7), normal_values(30)))
    assert wide_small.decision.branch == "unequal_spread"
    assert wide_large.decision.branch == "assumptions_hold"


def test_heavy_ties_on_a_rating_scale_turn_to_a():
    a = np.repeat([3, 4, 5, 6, 7], [4, 8, 12, 10, 6]).astype(float)
    b = np.repeat([2, 3, 4, 5, 6], [5, 10, 12, 8, 5]).astype(float)
    r = run(two(a, b))
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("heavy_ties", "prob_superiority",
                                                     "mann_whitney")
    ties = next(x for x in d.reasons if x.rule == "heavy_ties")
    assert any(e.statistic == "distinct values" and e.value == 6 and e.met for e in ties.evidence)


def test_one_dominant_extreme_case_turns_to_a_with_robust_d_beside_it():
    a, b = normal_values(30, 0.6), normal_values(30)
    b = np.r_[b, 14.0]  # one control case far beyond 3 IQR that cancels the difference in means
    r = run(two(a, b))
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("outliers", "prob_superiority",
                                                     "mann_whitney")
    assert "robust_d" in d.also_report
    line = 2 + 30 + 30  # the extreme case's line in the file (header = line 1)
    ev = next(x for x in d.reasons if x.rule == "outliers").evidence
    assert any(e.subject == f"line {line}" and e.met for e in ev)


def test_tiny_samples_turn_to_unpooled_d_with_a_permutation_test():
    a, b = normal_values(6, 1.0), normal_values(6)
    r = run(two(a, b))
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("small_sample", "d_unpooled",
                                                     "permutation_mean")
    assert "hedges_g" in d.also_report
    # 12 values: all C(12, 6) = 924 splits are enumerated, so p is exact
    ref = stats.permutation_test((a, b), lambda x, y: np.mean(x) - np.mean(y),
                                 permutation_type="independent", n_resamples=np.inf)
    assert d.test["p"] == pytest.approx(ref.pvalue, rel=1e-12)


# ------------------------------------------------------------------ other designs


def test_paired_with_many_zero_differences_turns_to_ps_dep_and_the_sign_test():
    before = np.repeat([3.0, 4.0, 5.0, 6.0], 10)
    change = np.array([0] * 16 + [1] * 18 + [-1] * 6, dtype=float)
    frame = pd.DataFrame({"id": range(40), "before": before, "after": before + change})
    with _quiet():
        r = audit(frame, paired_columns=["after", "before"], subject="id", resamples=300)
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("many_zeros", "ps_dep", "sign_test")
    assert d.test["p"] == pytest.approx(stats.binomtest(18, 24, 0.5).pvalue, rel=1e-12)


def test_paired_normal_differences_keep_d_av_and_the_paired_t():
    base = normal_values(40, 10, 2)
    change = normal_values(40, 0.5, 1)[np.r_[np.arange(0, 40, 2), np.arange(1, 40, 2)]]
    frame = pd.DataFrame({"id": range(40), "post": base + change, "pre": base})
    with _quiet():
        r = audit(frame, paired_columns=["post", "pre"], subject="id", resamples=300)
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("assumptions_hold", "d_av", "paired_t")
    ref = stats.ttest_rel(base + change, base)
    assert d.test["statistic"] == pytest.approx(ref.statistic, rel=1e-9)


def test_k_groups_normal_keep_omega_squared_and_anova_skewed_turn_to_kruskal():
    groups = [normal_values(30, m) for m in (0.0, 0.4, 0.8)]
    frame = pd.DataFrame({"arm": np.repeat(["a", "b", "c"], 30), "score": np.concatenate(groups)})
    r = run(frame)
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("assumptions_hold", "omega_squared", "anova")
    assert d.test["p"] == pytest.approx(stats.f_oneway(*groups).pvalue, rel=1e-10)
    rng = np.random.default_rng(9)
    skewed = [rng.lognormal(m, 1.0, 40) for m in (0.0, 0.3, 0.6)]
    frame = pd.DataFrame({"arm": np.repeat(["a", "b", "c"], 40), "score": np.concatenate(skewed)})
    r = run(frame)
    d = r.decision
    assert (d.branch, d.primary, d.test["name"]) == ("non_normal", "epsilon_squared_h",
                                                     "kruskal_wallis")
    assert d.test["p"] == pytest.approx(stats.kruskal(*skewed).pvalue, rel=1e-10)


def test_k_repeated_normal_keep_generalized_eta_squared_and_rm_anova():
    base = normal_values(30, 10, 2)
    x = np.column_stack([base, base + normal_values(30, 0.5)[::-1], base + normal_values(30, 1.0)])
    frame = pd.DataFrame({"id": range(30), "t1": x[:, 0], "t2": x[:, 1], "t3": x[:, 2]})
    with _quiet():
        r = audit(frame, paired_columns=["t1", "t2", "t3"], subject="id", resamples=300)
    d = r.decision
    assert (d.primary, d.test["name"]) == ("generalized_eta_squared", "rm_anova")
    assert d.branch == "assumptions_hold"


# ------------------------------------------------------------------ policy in the result


def test_the_result_names_the_policy_and_a_changed_policy_changes_the_decision():
    frame = two(normal_values(40, 0.6), normal_values(40))
    r = run(frame)
    policy = default_policy()
    assert r.policy["sha256"] == policy.sha256 and r.policy["name"] == policy.name
    strict = parse_policy(default_text().replace(
        'assumptions_hold = { primary = "hedges_g", also = ["cohen_d", "mean_difference",'
        ' "prob_superiority"], test = "student_t" }',
        'assumptions_hold = { primary = "prob_superiority", also = ["hedges_g"],'
        ' test = "mann_whitney" }'), "ranks_always.toml")
    r2 = run(frame, policy=strict)
    assert r2.decision.primary == "prob_superiority" and r2.decision.test["name"] == "mann_whitney"
    assert r2.policy["sha256"] == strict.sha256 != policy.sha256
    assert r2.decision.descriptives == "median_iqr_range"


def test_policy_supplies_level_resamples_and_seed_unless_given():
    text = (default_text().replace("level = 0.95 ", "level = 0.9 ")
            .replace("resamples = 2000 ", "resamples = 400 ").replace("seed = 20240917", "seed = 5"))
    policy = parse_policy(text)
    with _quiet():
        r = audit(two(normal_values(20, 0.5), normal_values(20)), outcome="score", group="arm",
                  policy=policy)
    assert (r.settings.level, r.settings.bootstrap_resamples, r.settings.seed) == (0.9, 400, 5)
    with _quiet():
        r = audit(two(normal_values(20, 0.5), normal_values(20)), outcome="score", group="arm",
                  policy=policy, level=0.8, resamples=300, seed=7)
    assert (r.settings.level, r.settings.bootstrap_resamples, r.settings.seed) == (0.8, 300, 7)


# ------------------------------------------------------------------ texts quote the JSON


def _json_numbers(doc, decimals: int) -> set[str]:
    """Every number of the JSON as the texts may print it. The texts themselves are left out, and
    of the strings only the version fields count, so a number cannot vouch for itself."""
    out: set[str] = set()
    texts = ("rationale", "reviewer_note", "methods_sentence")

    def walk(v, key=None):
        if isinstance(v, dict):
            for k, x in v.items():
                if k not in texts:
                    walk(x, k)
        elif isinstance(v, list):
            for x in v:
                walk(x)
        elif isinstance(v, bool) or v is None:
            return
        elif isinstance(v, str):
            if key in ("tool_version", "version"):  # "0.1.0", "1.0" are text in the JSON
                out.add(v)
        elif isinstance(v, int):
            out.add(str(v))
        elif isinstance(v, float):
            for d in (decimals, 3):
                out.add(f"{v:.{d}f}")
                out.add(f"{abs(v):.{d}f}")
            out.add(f"{v * 100:.{max(decimals - 1, 0)}f}%")
            out.add(f"{v * 100:g}%")
            out.add(f"{v:g}")
    walk(doc)
    return out


@pytest.mark.parametrize("case", ["normal", "skewed", "ties", "outlier", "tiny", "k"])
@pytest.mark.slow
def test_every_number_in_the_texts_is_a_json_value(case):
    rng = np.random.default_rng(21)
    frames = {
        "normal": two(normal_values(40, 0.6), normal_values(40)),
        "skewed": two(rng.lognormal(0.4, 1.0, 50), rng.lognormal(0.0, 1.0, 50)),
        "ties": two(np.repeat([3., 4, 5, 6, 7], [4, 8, 12, 10, 6]),
                    np.repeat([2., 3, 4, 5, 6], [5, 10, 12, 8, 5])),
        "outlier": two(normal_values(30, 0.6), np.r_[normal_values(30), 14.0]),
        "tiny": two(normal_values(6, 1.0), normal_values(6)),
        "k": pd.DataFrame({"arm": np.repeat(["a", "b", "c"], 30),
                           "score": np.concatenate([normal_values(30, m) for m in (0, .4, .8)])}),
    }
    r = run(frames[case])
    doc = json.loads(json.dumps(r.to_dict()))
    decimals = default_policy().value("report", "decimals")
    known = _json_numbers(doc, decimals)
    for field in ("rationale", "reviewer_note", "methods_sentence"):
        text = doc["decision"][field]
        assert text
        # names such as d_z, SHA-256, r = Z/sqrt(N), policy hash characters are not numbers
        cleaned = re.sub(r"SHA-256 [0-9a-f]+|[A-Za-z_]+\d+|\d+(st|nd|rd|th)\b", " ", text)
        for token in re.findall(r"(?<![\w.])-?\d+(?:\.\d+)*%?", cleaned):
            assert token in known or token.lstrip("-") in known, (field, token, text)


def test_a_case_without_which_cohen_d_is_undefined_is_the_decisive_one():
    # every value 10 but one 1000: without that case both groups are constant and d has no
    # value at all, so the case is the most influential one and the outlier check names it alone
    r = run(two(np.r_[np.full(24, 10.0), 1000.0], np.full(25, 10.0)))
    far = 2 + 24  # file line of the 25th treated row (line 1 is the header)
    d = next(e for e in r.influence.effects if e.effect == "cohen_d")
    assert d.most_influential_row == far, d
    outliers = next(x for x in r.decision.reasons if x.rule == "outliers")
    assert outliers.fired, outliers
    named = {e.subject for e in outliers.evidence if e.subject.startswith("line ")}
    assert named == {f"line {far}"}, outliers.evidence


def test_in_a_group_of_two_no_case_is_singled_out_for_leaving_d_undefined():
    # removing either value of the group of two leaves one value and no SD within it; neither is
    # decisive alone, so the most influential line is the one with the largest finite change
    r = run(two(np.array([1.0, 2.0]), np.arange(2.0, 10.0)))
    d = next(e for e in r.influence.effects if e.effect == "cohen_d")
    changes = r.influence.changes["cohen_d"]
    finite = np.isfinite(changes)
    top = int(r.influence.rows[finite][np.argmax(np.abs(changes[finite]))])
    assert d.most_influential_row == top, (d.most_influential_row, top)
