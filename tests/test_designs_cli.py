"""Command-line behaviour of the paired, k-independent and k-repeated designs: design detection
from wide and long files, the order of conditions, the JSON document's effects, tests, pairwise
follow-ups and diagnostics, the accounting of every row, one-line errors, and the terminal
summary."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditor.errors import UndefinedEffectWarning
from auditor.pipeline import audit

BOOT = 200

PAIRED_EFFECTS = ("mean_difference", "d_z", "d_av", "d_rm", "ps_dep", "matched_rank_biserial",
                  "r_from_z", "hodges_lehmann")
K_INDEPENDENT_EFFECTS = ("epsilon_squared_h", "eta_squared_h", "eta_squared", "omega_squared")
K_REPEATED_EFFECTS = ("kendall_w", "generalized_eta_squared")
TWO_GROUP_EFFECTS = ("mean_difference", "cohen_d", "hedges_g", "glass_delta", "d_unpooled",
                     "robust_d", "prob_superiority", "cliff_delta", "rank_biserial", "r_from_z",
                     "hodges_lehmann")
PAIR_KEYS = {"first", "second", "effects", "test", "statistic", "p", "p_holm"}

# Height gained (cm) over three weeks by seedlings of the same pot moved from peat to loam.
# Line 5 (P04) has no loam value and line 8 (P07) has text instead of a number.
SEEDLINGS = """pot,peat,loam
P01,4.2,5.1
P02,3.8,4.9
P03,5.0,5.2
P04,4.4,
P05,3.9,4.6
P06,4.7,4.5
P07,4.1,tall
P08,4.6,5.8
P09,3.5,4.0
P10,4.0,4.3
"""
SEEDLINGS_USED = {  # pot -> (peat, loam), in file order
    "P01": (4.2, 5.1), "P02": (3.8, 4.9), "P03": (5.0, 5.2), "P05": (3.9, 4.6),
    "P06": (4.7, 4.5), "P08": (4.6, 5.8), "P09": (3.5, 4.0), "P10": (4.0, 4.3),
}

# Words per minute of volunteers typing the same passage on two keyboard layouts, one row per
# volunteer and layout, rows in no particular order. 'dev' never tried dvorak (line 8); 'eli'
# has an unreadable dvorak value (line 10), so both of eli's rows (9 and 10) are left out.
TYPING_LONG = """typist,layout,wpm
ana,qwerty,61
ana,dvorak,58
ben,qwerty,55
cho,dvorak,66
ben,dvorak,57
cho,qwerty,70
dev,qwerty,48
eli,qwerty,59
eli,dvorak,fast
fay,dvorak,60
fay,qwerty,63
gus,qwerty,54
gus,dvorak,52
hal,dvorak,64
hal,qwerty,64
"""
TYPING_USED = {  # typist -> (qwerty, dvorak)
    "ana": (61, 58), "ben": (55, 57), "cho": (70, 66), "fay": (63, 60), "gus": (54, 52),
    "hal": (64, 64),
}

# Rise (cm) of test loaves made with three flours. Line 14 has no reading, line 15 no flour.
LOAVES = """flour,rise_cm
rye,3.1
spelt,4.0
wheat,4.2
rye,3.8
spelt,4.4
wheat,5.9
rye,3.5
spelt,3.6
wheat,4.8
rye,4.1
spelt,4.6
wheat,5.5
rye,NA
,4.9
wheat,5.1
"""
LOAVES_USED = {"rye": [3.1, 3.8, 3.5, 4.1], "spelt": [4.0, 4.4, 3.6, 4.6],
               "wheat": [4.2, 5.9, 4.8, 5.5, 5.1]}

# Typing speed of the same volunteers at three times of day (wide). Line 6 lacks the noon value.
SHIFTS_WIDE = """typist,morning,noon,evening
ana,61,64,58
ben,55,54,57
cho,70,71,66
dev,48,53,47
eli,59,,57
fay,63,66,60
gus,52,56,53
hal,58,57,58
"""
SHIFTS_USED = {
    "ana": (61, 64, 58), "ben": (55, 54, 57), "cho": (70, 71, 66), "dev": (48, 53, 47),
    "fay": (63, 66, 60), "gus": (52, 56, 53), "hal": (58, 57, 58),
}
SHIFT_NAMES = ("morning", "noon", "evening")


def shifts_long() -> str:
    """SHIFTS_WIDE in long form, rows grouped by time of day, volunteers in the same order;
    eli's noon value is written as NA."""
    wide = {"ana": (61, 64, 58), "ben": (55, 54, 57), "cho": (70, 71, 66),
            "dev": (48, 53, 47), "eli": (59, "NA", 57), "fay": (63, 66, 60),
            "gus": (52, 56, 53), "hal": (58, 57, 58)}
    lines = ["typist,time,wpm"]
    for k, name in enumerate(SHIFT_NAMES):
        lines += [f"{who},{name},{values[k]}" for who, values in wide.items()]
    return "\n".join(lines) + "\n"


# ------------------------------------------------------------------ helpers


def run_json(run_cli, strict_json, path, *options) -> dict:
    res = run_cli("check", path, *options, "--boot", BOOT, "--json", "-", "--quiet")
    assert res.code == 0, res.err
    assert res.err == ""
    return strict_json(res.out)


def assert_accounted(doc: dict) -> None:
    data = doc["data"]
    assert data["rows_read"] == (data["rows_used"] + len(data["excluded"])
                                 + sum(data["not_selected"].values()))


def assert_effects(doc: dict, names) -> None:
    effects = doc["effects"]
    assert tuple(effects) == tuple(names)
    for name in names:
        e = effects[name]
        assert {"estimate", "ci_low", "ci_high", "intervals"} <= set(e), name
        assert e["name"] == name
        assert isinstance(e["estimate"], float), (name, e)
        assert isinstance(e["intervals"], list) and e["intervals"], (name, e)
        assert e["ci_low"] is not None and e["ci_high"] is not None, (name, e)
        assert e["ci_low"] <= e["ci_high"], (name, e)
        methods = [iv["method"] for iv in e["intervals"]]
        # withheld with its reason where the resamples cannot support an interval
        assert ("bca_bootstrap" in methods) != bool(e["bootstrap_reason"]), (name, methods)
        own = next(iv for iv in e["intervals"] if iv["method"] == e["ci_method"])
        assert (own["low"], own["high"]) == (e["ci_low"], e["ci_high"]), name


def assert_one_line_error(res, *fragments) -> None:
    assert res.code == 1, (res.code, res.out, res.err)
    assert res.out == ""
    assert res.err.startswith("auditor: error:"), res.err
    assert res.err.count("\n") == 1 and res.err.endswith("\n"), repr(res.err)
    assert "Traceback" not in res.err
    for fragment in fragments:
        assert fragment in res.err, (fragment, res.err)


def holm_direct(pvalues):
    """Holm's step-down adjustment written out plainly, for comparison."""
    m = len(pvalues)
    order = sorted(range(m), key=lambda i: pvalues[i])
    out = [0.0] * m
    best = 0.0
    for step, i in enumerate(order):
        best = max(best, min(1.0, (m - step) * pvalues[i]))
        out[i] = best
    return out


@pytest.fixture
def seedlings(write_file):
    return write_file("seedlings.csv", SEEDLINGS)


@pytest.fixture
def typing_long(write_file):
    return write_file("typing.csv", TYPING_LONG)


@pytest.fixture
def loaves(write_file):
    return write_file("loaves.csv", LOAVES)


@pytest.fixture
def shifts_wide(write_file):
    return write_file("shifts_wide.csv", SHIFTS_WIDE)


@pytest.fixture
def shifts_long_file(write_file):
    return write_file("shifts_long.csv", shifts_long())


# ------------------------------------------------------------------ paired, wide


def test_paired_wide_design_labels_and_effects(run_cli, strict_json, seedlings):
    doc = run_json(run_cli, strict_json, seedlings, "--paired", "peat,loam", "--subject", "pot")
    assert doc["design"] == "paired"
    assert doc["subject_column"] == "pot"
    assert [g["label"] for g in doc["groups"]] == ["peat", "loam"]
    assert [g["n"] for g in doc["groups"]] == [8, 8]
    assert doc["direction"] == "peat relative to loam"
    assert_effects(doc, PAIRED_EFFECTS)
    peat = np.array([v[0] for v in SEEDLINGS_USED.values()])
    loam = np.array([v[1] for v in SEEDLINGS_USED.values()])
    assert math.isclose(doc["effects"]["mean_difference"]["estimate"],
                        float(np.mean(peat - loam)), rel_tol=1e-12)
    assert doc["pairwise"] == []


def test_paired_wide_tests_and_diagnostics(run_cli, strict_json, seedlings):
    doc = run_json(run_cli, strict_json, seedlings, "--paired", "peat,loam")
    tests = doc["tests"]
    assert set(tests) == {"sign_test", "wilcoxon", "paired_t"}
    peat = np.array([v[0] for v in SEEDLINGS_USED.values()])
    loam = np.array([v[1] for v in SEEDLINGS_USED.values()])
    t = stats.ttest_rel(peat, loam)
    assert math.isclose(tests["paired_t"]["statistic"], float(t.statistic), rel_tol=1e-9)
    assert math.isclose(tests["paired_t"]["p"], float(t.pvalue), rel_tol=1e-9)
    assert tests["paired_t"]["df"] == 7
    # differences: -0.9 -1.1 -0.2 -0.7 +0.2 -1.2 -0.5 -0.3 -> one up, seven down
    sign = tests["sign_test"]
    assert (sign["positive"], sign["negative"], sign["zero"]) == (1, 7, 0)
    assert math.isclose(tests["sign_test"]["p"], stats.binomtest(1, 8).pvalue, rel_tol=1e-12)

    diag = doc["diagnostics"]
    for key in ("differences_normality", "zero_share", "correlation", "sign_test",
                "rounding_decimals", "differences_ties"):
        assert key in diag, key
    assert diag["rounding_decimals"] == 1
    assert diag["zero_share"] == 0.0
    assert math.isclose(diag["correlation"], float(stats.pearsonr(peat, loam).statistic),
                        rel_tol=1e-9)
    assert diag["differences_normality"]["n"] == 8
    assert diag["sign_test"] == tests["sign_test"]


def test_paired_wide_excluded_rows_name_line_and_column(run_cli, strict_json, seedlings):
    doc = run_json(run_cli, strict_json, seedlings, "--paired", "peat,loam", "--subject", "pot")
    data = doc["data"]
    assert data["rows_read"] == 10
    assert data["rows_used"] == 8
    assert [e["row"] for e in data["excluded"]] == [5, 8]
    empty, text = (e["reason"] for e in data["excluded"])
    assert "loam" in empty and "empty" in empty
    assert "loam" in text and "'tall'" in text and "not a number" in text
    assert data["not_selected"] == {}
    assert_accounted(doc)


def test_paired_wide_blank_line_keeps_file_line_numbers(run_cli, strict_json, write_file):
    # header = line 1; the blank line 4 is skipped but still counts as a line of the file
    path = write_file("gaps.csv", "pot,peat,loam\nP01,4.2,5.1\nP02,3.8,4.9\n\nP03,5.0,\n"
                                  "P04,3.9,4.6\nP05,4.7,n/a\nP06,4.6,5.8\n")
    doc = run_json(run_cli, strict_json, path, "--paired", "peat,loam")
    data = doc["data"]
    assert [e["row"] for e in data["excluded"]] == [5, 7]
    assert all("loam" in e["reason"] for e in data["excluded"])
    assert data["blank_lines"] == 1
    assert (data["rows_read"], data["rows_used"]) == (6, 4)
    assert_accounted(doc)


def test_paired_wide_bad_value_in_first_column_is_named(run_cli, strict_json, write_file):
    # line 3 has a decimal comma written unquoted (one field too many); line 5 a missing peat
    path = write_file("first.csv", "pot,peat,loam\nP01,4.2,5.1\nP02,3,8,4.9\nP03,5.0,5.2\n"
                                   "P04,-,4.6\nP05,3.9,4.6\nP06,4.0,4.1\n")
    doc = run_json(run_cli, strict_json, path, "--paired", "peat,loam")
    reasons = {e["row"]: e["reason"] for e in doc["data"]["excluded"]}
    assert set(reasons) == {3, 5}
    assert "fields" in reasons[3]
    assert "peat" in reasons[5] and "missing" in reasons[5]
    assert doc["data"]["rows_used"] == 4
    assert_accounted(doc)


def test_paired_wide_outlying_difference_is_named_by_its_line(run_cli, strict_json, write_file):
    rows = ["pot,peat,loam"] + [f"P{i:02d},{4 + 0.1 * i:.1f},{4.5 + 0.1 * i + 0.02 * (i % 3):.2f}"
                                for i in range(1, 12)]
    rows[7] = "P07,9.5,4.6"  # line 8: a difference far from the others
    path = write_file("odd.csv", "\n".join(rows) + "\n")
    doc = run_json(run_cli, strict_json, path, "--paired", "peat,loam")
    assert doc["diagnostics"]["differences_outliers"]["rows"] == [8]


def test_swapping_the_paired_columns_negates_signed_effects(run_cli, strict_json, seedlings):
    ahead = run_json(run_cli, strict_json, seedlings, "--paired", "peat,loam")
    back = run_json(run_cli, strict_json, seedlings, "--paired", "loam,peat")
    assert back["direction"] == "loam relative to peat"
    for name in PAIRED_EFFECTS:
        x, y = ahead["effects"][name]["estimate"], back["effects"][name]["estimate"]
        expected = 1.0 - x if name == "ps_dep" else -x
        assert math.isclose(y, expected, rel_tol=1e-9, abs_tol=1e-12), name


def test_decimal_differences_tie(run_cli, strict_json, write_file):
    # Each pair differs by 0.2 in four rows (5.1 - 4.9, 0.3 - 0.1, ...): in binary floating point
    # these differences are not equal, but they must tie when ranked.
    warm = np.array([5.1, 0.3, 7.4, 2.2, 6.3, 3.8, 9.0, 1.7])
    cool = np.array([4.9, 0.1, 7.2, 2.0, 5.9, 4.1, 8.5, 1.2])
    raw = warm - cool
    assert np.unique(raw).size > np.unique(np.round(raw, 1)).size  # the float trap is real
    text = "loaf,warm,cool\n" + "".join(f"L{i},{w},{c}\n" for i, (w, c)
                                        in enumerate(zip(warm, cool), 1))
    doc = run_json(run_cli, strict_json, write_file("loaves_paired.csv", text),
                   "--paired", "warm,cool", "--subject", "loaf")
    ties = doc["diagnostics"]["differences_ties"]
    assert ties["largest_tie_block"] == 4
    assert ties["distinct_values"] == 4  # 0.2 (x4), 0.4, -0.3, 0.5 (x2)
    d = np.round(raw, 1)
    res = stats.wilcoxon(d, zero_method="wilcox", correction=False, method="asymptotic")
    nonzero = np.count_nonzero(d)
    expected = math.copysign(abs(float(res.zstatistic)), float(np.mean(d))) / math.sqrt(nonzero)
    assert math.isclose(doc["effects"]["r_from_z"]["estimate"], expected, rel_tol=1e-9)
    untied = stats.wilcoxon(raw, zero_method="wilcox", correction=False, method="asymptotic")
    assert not math.isclose(abs(float(untied.zstatistic)) / math.sqrt(nonzero), expected,
                            rel_tol=1e-6)
    assert math.isclose(doc["tests"]["wilcoxon"]["p"], float(stats.wilcoxon(d).pvalue),
                        rel_tol=1e-9)
    # signed ranks: 0.2 x4 share rank 2.5, 0.3 is 5, 0.4 is 6, 0.5 x2 share 7.5 -> R+ 31, R- 5
    assert math.isclose(doc["effects"]["matched_rank_biserial"]["estimate"], 26 / 36,
                        rel_tol=1e-12)


def test_exponent_notation_rounds_to_twelve_significant_digits(run_cli, strict_json,
                                                              write_file):
    # with an exponent in the file the decimals cannot be read off the text: differences are
    # rounded to 12 significant digits of the largest value (9.0 -> 11 decimals)
    warm = ["5.1e0", "3e-1", "7.4e0", "2.2e0", "6.3e0", "3.8e0", "9.0e0", "1.7e0"]
    cool = ["4.9e0", "1e-1", "7.2e0", "2.0e0", "5.9e0", "4.1e0", "8.5e0", "1.2e0"]
    text = "loaf,warm,cool\n" + "".join(f"L{i},{w},{c}\n" for i, (w, c)
                                        in enumerate(zip(warm, cool), 1))
    doc = run_json(run_cli, strict_json, write_file("exp.csv", text), "--paired", "warm,cool")
    diag = doc["diagnostics"]
    assert diag["rounding_decimals"] == 11
    assert diag["differences_ties"]["largest_tie_block"] == 4


# ------------------------------------------------------------------ paired, long


def test_paired_long_design_accounting_and_direction(run_cli, strict_json, typing_long):
    doc = run_json(run_cli, strict_json, typing_long, "--outcome", "wpm", "--group", "layout",
                   "--subject", "typist")
    assert doc["design"] == "paired"
    assert doc["group_column"] == "layout" and doc["subject_column"] == "typist"
    assert [g["label"] for g in doc["groups"]] == ["qwerty", "dvorak"]  # first appearance
    assert_effects(doc, PAIRED_EFFECTS)
    q = np.array([v[0] for v in TYPING_USED.values()], dtype=float)
    dv = np.array([v[1] for v in TYPING_USED.values()], dtype=float)
    assert math.isclose(doc["effects"]["mean_difference"]["estimate"], float(np.mean(q - dv)),
                        rel_tol=1e-12)
    assert doc["diagnostics"]["zero_share"] == pytest.approx(1 / 6)
    assert doc["diagnostics"]["rounding_decimals"] == 0

    data = doc["data"]
    assert (data["rows_read"], data["rows_used"]) == (15, 12)
    reasons = {e["row"]: e["reason"] for e in data["excluded"]}
    assert set(reasons) == {8, 9, 10}
    assert "'dev'" in reasons[8] and "no row for 'dvorak'" in reasons[8]
    for line in (9, 10):  # both of eli's rows, each with the reason naming the bad value
        assert "'eli'" in reasons[line] and "'fast'" in reasons[line]
        assert "line 10" in reasons[line]
    assert_accounted(doc)


def test_paired_long_groups_option_sets_direction(run_cli, strict_json, typing_long):
    default = run_json(run_cli, strict_json, typing_long, "--outcome", "wpm", "--group", "layout",
                       "--subject", "typist")
    flipped = run_json(run_cli, strict_json, typing_long, "--outcome", "wpm", "--group",
                       "layout", "--subject", "typist", "--groups", "dvorak,qwerty")
    assert [g["label"] for g in flipped["groups"]] == ["dvorak", "qwerty"]
    assert flipped["direction"] == "dvorak relative to qwerty"
    for name in PAIRED_EFFECTS:
        x, y = default["effects"][name]["estimate"], flipped["effects"][name]["estimate"]
        assert math.isclose(y, 1.0 - x if name == "ps_dep" else -x, abs_tol=1e-12), name
    s1, s2 = default["tests"]["sign_test"], flipped["tests"]["sign_test"]
    assert (s1["positive"], s1["negative"]) == (s2["negative"], s2["positive"])


def test_paired_long_groups_picks_two_of_three_levels(run_cli, strict_json, write_file):
    extra = "ana,colemak,60\ncho,colemak,68\nfay,colemak,62\n"
    path = write_file("three_layouts.csv", TYPING_LONG + extra)
    doc = run_json(run_cli, strict_json, path, "--outcome", "wpm", "--group", "layout",
                   "--subject", "typist", "--groups", "dvorak,qwerty")
    assert doc["design"] == "paired"
    assert doc["data"]["not_selected"] == {"colemak": 3}
    assert doc["data"]["rows_used"] == 12
    assert_accounted(doc)


def test_paired_wide_and_long_agree(run_cli, strict_json, write_file, seedlings):
    long_text = "pot,soil,cm\n" + "".join(
        f"{pot},peat,{v[0]}\n{pot},loam,{v[1]}\n" for pot, v in SEEDLINGS_USED.items())
    long_doc = run_json(run_cli, strict_json, write_file("seedlings_long.csv", long_text),
                        "--outcome", "cm", "--group", "soil", "--subject", "pot")
    wide_doc = run_json(run_cli, strict_json, seedlings, "--paired", "peat,loam")
    assert long_doc["effects"] == wide_doc["effects"]
    assert long_doc["tests"] == wide_doc["tests"]


# ------------------------------------------------------------------ k independent


def test_k_independent_design_effects_and_tests(run_cli, strict_json, loaves):
    doc = run_json(run_cli, strict_json, loaves, "--outcome", "rise_cm", "--group", "flour")
    assert doc["design"] == "k_independent"
    assert [g["label"] for g in doc["groups"]] == ["rye", "spelt", "wheat"]
    assert [g["n"] for g in doc["groups"]] == [4, 4, 5]
    assert_effects(doc, K_INDEPENDENT_EFFECTS)
    groups = [np.array(v) for v in LOAVES_USED.values()]
    h = stats.kruskal(*groups)
    n = sum(g.size for g in groups)
    assert math.isclose(doc["effects"]["epsilon_squared_h"]["estimate"],
                        float(h.statistic) / (n - 1), rel_tol=1e-9)
    tests = doc["tests"]
    assert set(tests) == {"kruskal_wallis", "anova", "welch_anova"}
    assert math.isclose(tests["kruskal_wallis"]["p"], float(h.pvalue), rel_tol=1e-9)
    f = stats.f_oneway(*groups)
    assert math.isclose(tests["anova"]["statistic"], float(f.statistic), rel_tol=1e-9)
    assert tests["anova"]["df"] == [2, n - 3]
    f_df = float(f.statistic) * 2
    assert math.isclose(doc["effects"]["eta_squared"]["estimate"], f_df / (f_df + n - 3),
                        rel_tol=1e-9)
    assert math.isclose(doc["effects"]["omega_squared"]["estimate"],
                        (f_df - 2) / (f_df - 2 + n), rel_tol=1e-9)


def test_k_independent_pairwise_and_diagnostics(run_cli, strict_json, loaves):
    doc = run_json(run_cli, strict_json, loaves, "--outcome", "rise_cm", "--group", "flour")
    pairs = doc["pairwise"]
    assert [(p["first"], p["second"]) for p in pairs] == [("rye", "spelt"), ("rye", "wheat"),
                                                           ("spelt", "wheat")]
    for p in pairs:
        assert set(p) == PAIR_KEYS
        assert p["test"] == "dunn_z"
        assert tuple(p["effects"]) == TWO_GROUP_EFFECTS
        assert p["p_holm"] >= p["p"]
    assert [p["p_holm"] for p in pairs] == pytest.approx(holm_direct([p["p"] for p in pairs]),
                                                          rel=1e-12)
    first = np.array(LOAVES_USED["rye"])
    second = np.array(LOAVES_USED["wheat"])
    assert math.isclose(pairs[1]["effects"]["mean_difference"]["estimate"],
                        float(first.mean() - second.mean()), rel_tol=1e-12)

    diag = doc["diagnostics"]
    assert [nm["label"] for nm in diag["normality"]] == ["rye", "spelt", "wheat"]
    assert [nm["n"] for nm in diag["normality"]] == [4, 4, 5]
    sds = [np.std(v, ddof=1) for v in LOAVES_USED.values()]
    assert math.isclose(diag["spread"]["sd_ratio"], max(sds) / min(sds), rel_tol=1e-9)
    assert math.isclose(diag["spread"]["levene_p"],
                        float(stats.levene(*map(np.array, LOAVES_USED.values()),
                                           center="mean").pvalue), rel_tol=1e-9)
    assert diag["ties"]["n"] == 13
    assert diag["sphericity"] is None


def dunn_direct(groups, i, j):
    pooled = np.concatenate(groups)
    ranks = stats.rankdata(pooled)
    edges = np.cumsum([0] + [len(g) for g in groups])
    mean_rank = [ranks[edges[g]:edges[g + 1]].mean() for g in range(len(groups))]
    n = pooled.size
    _, t = np.unique(pooled, return_counts=True)
    var = (n * (n + 1) / 12 - np.sum(t**3 - t) / (12 * (n - 1))) * (
        1 / len(groups[i]) + 1 / len(groups[j]))
    z = (mean_rank[i] - mean_rank[j]) / math.sqrt(var)
    return z, 2 * stats.norm.sf(abs(z))


def test_k_independent_dunn_with_tied_ratings(run_cli, strict_json, write_file):
    # crumb softness rated 1-7 for loaves from three ovens: many ties
    ratings = {"gas": [3, 4, 4, 5, 3, 4, 6], "wood": [5, 6, 6, 7, 5, 6], "electric": [4, 4, 5,
                                                                                   3, 4, 5, 4]}
    text = "oven,softness\n" + "".join(f"{oven},{r}\n" for oven, rs in ratings.items()
                                       for r in rs)
    doc = run_json(run_cli, strict_json, write_file("ovens.csv", text), "--outcome", "softness",
                   "--group", "oven")
    groups = [np.array(v, dtype=float) for v in ratings.values()]
    for p, (i, j) in zip(doc["pairwise"], [(0, 1), (0, 2), (1, 2)]):
        z, pv = dunn_direct(groups, i, j)
        assert math.isclose(p["statistic"], z, rel_tol=1e-9)
        assert math.isclose(p["p"], pv, rel_tol=1e-9)
    assert doc["diagnostics"]["ties"]["looks_discrete"] is True


def test_k_independent_accounting(run_cli, strict_json, loaves):
    doc = run_json(run_cli, strict_json, loaves, "--outcome", "rise_cm", "--group", "flour")
    data = doc["data"]
    assert (data["rows_read"], data["rows_used"]) == (15, 13)
    reasons = {e["row"]: e["reason"] for e in data["excluded"]}
    assert set(reasons) == {14, 15}
    assert "rise_cm" in reasons[14] and "flour" in reasons[15]
    assert_accounted(doc)


def test_k_independent_groups_option_orders_and_selects(run_cli, strict_json, write_file):
    path = write_file("four_flours.csv", LOAVES + "emmer,4.0\nemmer,4.3\n")
    doc = run_json(run_cli, strict_json, path, "--outcome", "rise_cm", "--group", "flour",
                   "--groups", "wheat,rye,spelt")
    assert [g["label"] for g in doc["groups"]] == ["wheat", "rye", "spelt"]
    assert [(p["first"], p["second"]) for p in doc["pairwise"]] == [
        ("wheat", "rye"), ("wheat", "spelt"), ("rye", "spelt")]
    assert doc["data"]["not_selected"] == {"emmer": 2}
    assert_accounted(doc)
    default = run_json(run_cli, strict_json, path, "--outcome", "rise_cm", "--group", "flour",
                       "--groups", "rye,spelt,wheat")
    for name in K_INDEPENDENT_EFFECTS:  # omnibus indices do not depend on the order
        assert math.isclose(doc["effects"][name]["estimate"],
                            default["effects"][name]["estimate"], rel_tol=1e-9), name
    wr = doc["pairwise"][0]["effects"]["cliff_delta"]["estimate"]
    rw = default["pairwise"][1]["effects"]["cliff_delta"]["estimate"]  # rye vs wheat
    assert math.isclose(wr, -rw, abs_tol=1e-12)


def test_k_independent_outlier_named_by_line(run_cli, strict_json, write_file):
    path = write_file("odd_loaf.csv", LOAVES.replace("spelt,3.6\n", "spelt,9.6\n"))
    doc = run_json(run_cli, strict_json, path, "--outcome", "rise_cm", "--group", "flour")
    rows = {o["label"]: o["rows"] for o in doc["diagnostics"]["outliers"]}
    assert rows["spelt"] == [9]


# ------------------------------------------------------------------ k repeated


def test_k_repeated_wide_design_effects_and_tests(run_cli, strict_json, shifts_wide):
    doc = run_json(run_cli, strict_json, shifts_wide, "--paired", "morning,noon,evening",
                   "--subject", "typist")
    assert doc["design"] == "k_repeated"
    assert [g["label"] for g in doc["groups"]] == list(SHIFT_NAMES)
    assert_effects(doc, K_REPEATED_EFFECTS)
    x = np.array(list(SHIFTS_USED.values()), dtype=float)
    chi2 = stats.friedmanchisquare(*x.T)
    n, k = x.shape
    assert math.isclose(doc["effects"]["kendall_w"]["estimate"],
                        float(chi2.statistic) / (n * (k - 1)), rel_tol=1e-9)
    tests = doc["tests"]
    assert set(tests) == {"friedman", "rm_anova"}
    assert math.isclose(tests["friedman"]["p"], float(chi2.pvalue), rel_tol=1e-9)
    assert tests["rm_anova"]["df"] == [2, 12]
    grand = x.mean()
    ss_cond = n * np.sum((x.mean(axis=0) - grand) ** 2)
    assert math.isclose(doc["effects"]["generalized_eta_squared"]["estimate"],
                        ss_cond / np.sum((x - grand) ** 2), rel_tol=1e-9)


def test_k_repeated_pairwise_and_diagnostics(run_cli, strict_json, shifts_wide):
    doc = run_json(run_cli, strict_json, shifts_wide, "--paired", "morning,noon,evening")
    x = np.array(list(SHIFTS_USED.values()), dtype=float)
    pairs = doc["pairwise"]
    assert [(p["first"], p["second"]) for p in pairs] == [
        ("morning", "noon"), ("morning", "evening"), ("noon", "evening")]
    for p, (i, j) in zip(pairs, [(0, 1), (0, 2), (1, 2)]):
        assert set(p) == PAIR_KEYS
        assert p["test"] == "wilcoxon_signed_rank"
        assert tuple(p["effects"]) == PAIRED_EFFECTS
        d = x[:, i] - x[:, j]
        assert math.isclose(p["effects"]["mean_difference"]["estimate"], float(d.mean()),
                            rel_tol=1e-12)
        assert math.isclose(p["p"], float(stats.wilcoxon(d).pvalue), rel_tol=1e-9)
    assert [p["p_holm"] for p in pairs] == pytest.approx(holm_direct([p["p"] for p in pairs]),
                                                          rel=1e-12)
    diag = doc["diagnostics"]
    assert [nm["label"] for nm in diag["normality"]] == list(SHIFT_NAMES)
    assert {"sd_ratio", "levene_p"} <= set(diag["spread"])
    assert diag["ties"]["n"] == x.size
    sph = diag["sphericity"]
    assert {"w", "p", "epsilon_gg"} <= set(sph)
    assert 0.0 < sph["w"] <= 1.0
    assert 1 / (3 - 1) <= sph["epsilon_gg"] <= 1.0


def test_k_repeated_wide_accounting(run_cli, strict_json, shifts_wide):
    doc = run_json(run_cli, strict_json, shifts_wide, "--paired", "morning,noon,evening")
    data = doc["data"]
    assert (data["rows_read"], data["rows_used"]) == (8, 7)
    assert [e["row"] for e in data["excluded"]] == [6]
    assert "noon" in data["excluded"][0]["reason"]
    assert_accounted(doc)


def test_k_repeated_long_matches_wide(run_cli, strict_json, shifts_wide, shifts_long_file):
    wide = run_json(run_cli, strict_json, shifts_wide, "--paired", "morning,noon,evening")
    long = run_json(run_cli, strict_json, shifts_long_file, "--outcome", "wpm", "--group",
                    "time", "--subject", "typist")
    assert long["design"] == "k_repeated"
    assert [g["label"] for g in long["groups"]] == list(SHIFT_NAMES)
    assert_effects(long, K_REPEATED_EFFECTS)
    assert long["effects"] == wide["effects"]
    assert long["tests"] == wide["tests"]
    assert [p["p_holm"] for p in long["pairwise"]] == [p["p_holm"] for p in wide["pairwise"]]

    data = long["data"]
    # eli is on lines 6 (morning), 14 (noon, NA) and 22 (evening): all three are left out
    assert [e["row"] for e in data["excluded"]] == [6, 14, 22]
    for e in data["excluded"]:
        assert "'eli'" in e["reason"] and "line 14" in e["reason"]
    assert (data["rows_read"], data["rows_used"]) == (24, 21)
    assert_accounted(long)


def test_k_repeated_long_participant_lacking_a_condition(run_cli, strict_json, write_file):
    text = shifts_long().replace("dev,noon,53\n", "")
    doc = run_json(run_cli, strict_json, write_file("gap.csv", text), "--outcome", "wpm",
                   "--group", "time", "--subject", "typist")
    data = doc["data"]
    dev = [e for e in data["excluded"] if "'dev'" in e["reason"]]
    # dev's morning row is line 5; without the noon row, the evening row moves up to line 20
    assert [e["row"] for e in dev] == [5, 20]
    assert all("no row for 'noon'" in e["reason"] for e in dev)
    assert data["rows_used"] == 6 * 3
    assert_accounted(doc)


def test_k_repeated_long_groups_option_orders_conditions(run_cli, strict_json,
                                                          shifts_long_file):
    default = run_json(run_cli, strict_json, shifts_long_file, "--outcome", "wpm", "--group",
                       "time", "--subject", "typist")
    doc = run_json(run_cli, strict_json, shifts_long_file, "--outcome", "wpm", "--group", "time",
                   "--subject", "typist", "--groups", "evening,morning,noon")
    assert [g["label"] for g in doc["groups"]] == ["evening", "morning", "noon"]
    assert [(p["first"], p["second"]) for p in doc["pairwise"]] == [
        ("evening", "morning"), ("evening", "noon"), ("morning", "noon")]
    for name in K_REPEATED_EFFECTS:
        assert math.isclose(doc["effects"][name]["estimate"],
                            default["effects"][name]["estimate"], rel_tol=1e-9), name
    em = doc["pairwise"][0]["effects"]["mean_difference"]["estimate"]
    me = default["pairwise"][1]["effects"]["mean_difference"]["estimate"]  # morning vs evening
    assert math.isclose(em, -me, abs_tol=1e-12)


def test_k_repeated_wide_outlier_named_by_its_line(run_cli, strict_json, write_file):
    path = write_file("late.csv", SHIFTS_WIDE.replace("cho,70,71,66", "cho,70,71,99"))
    doc = run_json(run_cli, strict_json, path, "--paired", "morning,noon,evening")
    rows = {o["label"]: o["rows"] for o in doc["diagnostics"]["outliers"]}
    assert 4 in rows["evening"]  # cho's row


def test_k_repeated_long_outlier_named_by_the_line_holding_it(run_cli, strict_json,
                                                               write_file):
    # In a long file each value has its own line: an extreme evening value must be named by its
    # evening line, not by the line of the same participant's morning value.
    text = shifts_long().replace("cho,evening,66", "cho,evening,99")
    lines = text.splitlines()
    evening_lines = {i for i, line in enumerate(lines, 1) if ",evening," in line}
    cho_evening = lines.index("cho,evening,99") + 1
    assert cho_evening == 20
    doc = run_json(run_cli, strict_json, write_file("late_long.csv", text), "--outcome", "wpm",
                   "--group", "time", "--subject", "typist")
    rows = {o["label"]: o["rows"] for o in doc["diagnostics"]["outliers"]}
    assert cho_evening in rows["evening"], rows
    assert set(rows["evening"]) <= evening_lines, rows


def test_k_repeated_long_groups_selects_three_of_four(run_cli, strict_json, write_file):
    text = shifts_long() + "ana,night,50\nben,night,49\n"
    doc = run_json(run_cli, strict_json, write_file("four.csv", text), "--outcome", "wpm",
                   "--group", "time", "--subject", "typist", "--groups", "noon,morning,evening")
    assert doc["design"] == "k_repeated"
    assert doc["data"]["not_selected"] == {"night": 2}
    assert_accounted(doc)


# ------------------------------------------------------------------ accounting on generated files


def generated_long_file(seed: int):
    """A long file of bean sprout lengths under three lamps (plus a 'dark' level that is not
    chosen), rows shuffled, with some rows dropped, unreadable, without a lamp or without a
    sprout id. Returns the text and the expected accounting, by file line."""
    rng = np.random.default_rng(seed)
    lamps = ["red", "blue", "white"]
    rows = []
    for s in range(1, 16):
        for lamp in lamps + ["dark"]:
            rows.append([f"s{s}", lamp, f"{rng.normal(20, 4):.1f}"])
    rows = [rows[i] for i in rng.permutation(len(rows))]
    keep = rng.random(len(rows)) > 0.06
    rows = [r for r, k in zip(rows, keep) if k]
    for r in rows:
        u = rng.random()
        if u < 0.04:
            r[2] = "NA"
        elif u < 0.07:
            r[2] = "long"
        elif u < 0.09:
            r[1] = ""
        elif u < 0.11:
            r[0] = ""
    text = "sprout,lamp,mm\n" + "".join(",".join(r) + "\n" for r in rows)

    lines = {i + 2: r for i, r in enumerate(rows)}  # header = line 1
    expected_excluded, not_selected = set(), 0
    by_sprout: dict[str, list[int]] = {}
    for line, (sid, lamp, value) in lines.items():
        if lamp == "":
            expected_excluded.add(line)
        elif lamp == "dark":
            not_selected += 1
        elif sid == "":
            expected_excluded.add(line)
        else:
            by_sprout.setdefault(sid, []).append(line)
    used = 0
    for sid, its in by_sprout.items():
        have = {lines[line][1] for line in its}
        bad = any(lines[line][2] in ("NA", "long") for line in its)
        if bad or have != set(lamps):
            expected_excluded.update(its)
        else:
            used += len(its)
    return text, sorted(expected_excluded), not_selected, used, len(rows)


@pytest.mark.parametrize("seed", [3, 11, 2024])
def test_long_accounting_on_generated_files(run_cli, strict_json, write_file, seed):
    text, excluded, not_selected, used, total = generated_long_file(seed)
    assert used >= 9  # enough complete sprouts for the audit to run
    doc = run_json(run_cli, strict_json, write_file(f"sprouts_{seed}.csv", text), "--outcome",
                   "mm", "--group", "lamp", "--subject", "sprout", "--groups", "red,blue,white")
    data = doc["data"]
    assert data["rows_read"] == total
    assert [e["row"] for e in data["excluded"]] == excluded
    assert data["not_selected"] == {"dark": not_selected}
    assert data["rows_used"] == used
    assert_accounted(doc)
    assert [g["n"] for g in doc["groups"]] == [used // 3] * 3


@pytest.mark.parametrize("seed", [5, 17])
def test_wide_accounting_on_generated_files(run_cli, strict_json, write_file, seed):
    rng = np.random.default_rng(seed)
    out, expected = ["sprout,red,blue,white"], {}
    for s in range(1, 21):
        cells = [f"{v:.1f}" for v in rng.normal(20, 4, size=3)]
        u = rng.random()
        if u < 0.25:
            col = int(rng.integers(0, 3))
            cells[col] = str(rng.choice(["", "NA", "n/a", "tall", "\"1,5\""]))
            expected[len(out) + 1] = ("red", "blue", "white")[col]
        out.append(f"s{s}," + ",".join(cells))
    doc = run_json(run_cli, strict_json, write_file(f"wide_{seed}.csv", "\n".join(out) + "\n"),
                   "--paired", "red,blue,white", "--subject", "sprout")
    data = doc["data"]
    assert [e["row"] for e in data["excluded"]] == sorted(expected)
    for e in data["excluded"]:
        named = [c for c in ("red", "blue", "white") if c in e["reason"]]
        assert named == [expected[e["row"]]], e
    assert data["rows_used"] == 20 - len(expected)
    assert_accounted(doc)


# ------------------------------------------------------------------ degenerate data


def test_paired_all_zero_differences_give_nulls_with_reasons(run_cli, strict_json, write_file):
    path = write_file("still.csv", "pot,peat,loam\nP1,5,5\nP2,6,6\nP3,4,4\nP4,7,7\n")
    doc = run_json(run_cli, strict_json, path, "--paired", "peat,loam")
    effects = doc["effects"]
    for name in ("d_z", "d_rm", "matched_rank_biserial", "r_from_z"):
        assert effects[name]["estimate"] is None and effects[name]["reason"], name
        assert effects[name]["intervals"] == [], name
    assert effects["mean_difference"]["estimate"] == 0.0
    assert effects["ps_dep"]["estimate"] == 0.5
    assert doc["tests"]["sign_test"]["p"] is None
    assert doc["tests"]["wilcoxon"]["p"] is None and doc["tests"]["wilcoxon"]["reason"]
    assert doc["diagnostics"]["zero_share"] == 1.0
    assert len(doc["warnings"]) == 4


def test_k_repeated_identical_conditions_leave_that_pair_unadjusted(run_cli, strict_json,
                                                                     write_file):
    path = write_file("twins.csv", "id,a,b,c\n1,5,5,7\n2,6,6,9\n3,4,4,8\n4,7,7,6\n5,3,3,5\n")
    doc = run_json(run_cli, strict_json, path, "--paired", "a,b,c")
    pairs = {(p["first"], p["second"]): p for p in doc["pairwise"]}
    assert pairs[("a", "b")]["p"] is None and pairs[("a", "b")]["p_holm"] is None
    rest = [pairs[("a", "c")], pairs[("b", "c")]]
    # Holm over the two defined p-values only
    assert [p["p_holm"] for p in rest] == pytest.approx(holm_direct([p["p"] for p in rest]))
    assert any("a vs b" in w for w in doc["warnings"])


# ------------------------------------------------------------------ errors


def test_long_subject_must_be_a_third_column(run_cli, typing_long):
    res = run_cli("check", typing_long, "--outcome", "wpm", "--group", "layout", "--subject",
                  "layout", "--boot", BOOT)
    assert_one_line_error(res, "--subject")



def test_long_subject_repeated_within_a_condition(run_cli, write_file):
    path = write_file("twice.csv", TYPING_LONG + "ben,qwerty,56\n")
    res = run_cli("check", path, "--outcome", "wpm", "--group", "layout", "--subject", "typist",
                  "--boot", BOOT)
    assert_one_line_error(res, "'ben'", "'qwerty'", "4", "17")
    assert "lines 4 and 17" in res.err


def test_wide_subject_repeated(run_cli, write_file):
    path = write_file("twice_wide.csv", SEEDLINGS + "P03,4.9,5.0\n")
    res = run_cli("check", path, "--paired", "peat,loam", "--subject", "pot", "--boot", BOOT)
    assert_one_line_error(res, "'P03'", "lines 4 and 12")


@pytest.mark.parametrize("layout", ["wide", "long"])
def test_fewer_than_three_complete_participants(run_cli, write_file, layout):
    if layout == "wide":
        path = write_file("few.csv", "pot,peat,loam\nP1,4.2,5.1\nP2,3.8,\nP3,5.0,5.2\n")
        res = run_cli("check", path, "--paired", "peat,loam", "--boot", BOOT)
    else:
        path = write_file("few_long.csv", "pot,soil,cm\nP1,peat,4.2\nP1,loam,5.1\nP2,peat,3.8\n"
                                          "P3,peat,5.0\nP3,loam,5.2\nP4,loam,4.4\n")
        res = run_cli("check", path, "--outcome", "cm", "--group", "soil", "--subject", "pot",
                      "--boot", BOOT)
    assert_one_line_error(res, "2 complete participant", "at least 3")


def test_paired_with_one_column(run_cli, seedlings):
    res = run_cli("check", seedlings, "--paired", "peat", "--boot", BOOT)
    assert_one_line_error(res, "--paired", "two or more columns")


@pytest.mark.parametrize("extra", [("--group", "pot"), ("--groups", "peat,loam")])
def test_paired_with_group_options(run_cli, seedlings, extra):
    res = run_cli("check", seedlings, "--paired", "peat,loam", *extra, "--boot", BOOT)
    assert_one_line_error(res, "--paired", extra[0])


def test_unknown_paired_column_suggests_closest(run_cli, seedlings):
    res = run_cli("check", seedlings, "--paired", "peat,lome", "--boot", BOOT)
    assert_one_line_error(res, "no column named 'lome'", "did you mean 'loam'")


def test_reference_with_k_groups(run_cli, loaves):
    res = run_cli("check", loaves, "--outcome", "rise_cm", "--group", "flour", "--reference",
                  "rye", "--boot", BOOT)
    assert_one_line_error(res, "--reference")


@pytest.mark.parametrize("design", ["paired", "k_repeated"])
def test_reference_with_repeated_designs_is_refused(run_cli, seedlings, shifts_wide, design):
    # --reference only scales Glass's delta of two independent groups; it must not be
    # accepted and silently ignored by designs that have no Glass's delta.
    if design == "paired":
        res = run_cli("check", seedlings, "--paired", "peat,loam", "--reference", "loam",
                      "--boot", BOOT, "--quiet")
    else:
        res = run_cli("check", shifts_wide, "--paired", "morning,noon,evening", "--reference",
                      "noon", "--boot", BOOT, "--quiet")
    assert_one_line_error(res, "--reference")


@pytest.mark.parametrize("options", [(), ("--outcome", "peat"), ("--group", "pot"),
                                     ("--subject", "pot")])
def test_check_without_design_options_is_a_usage_error(run_cli, seedlings, options):
    res = run_cli("check", seedlings, *options)
    assert res.code == 2, (res.code, res.err)
    assert res.out == ""
    assert "--paired" in res.err and "Traceback" not in res.err


# ------------------------------------------------------------------ terminal summary


@pytest.mark.parametrize("design", ["two_independent", "paired_wide", "paired_long",
                                    "k_independent", "k_repeated_wide", "k_repeated_long"])
def test_terminal_summary_names_each_design(run_cli, seedlings, typing_long, loaves,
                                            shifts_wide, shifts_long_file, design):
    args, title = {
        "two_independent": ((loaves, "--outcome", "rise_cm", "--group", "flour", "--groups",
                             "rye,wheat"), "Two independent groups"),
        "paired_wide": ((seedlings, "--paired", "peat,loam", "--subject", "pot"),
                        "Paired conditions"),
        "paired_long": ((typing_long, "--outcome", "wpm", "--group", "layout",
                         "--subject", "typist"), "Paired conditions"),
        "k_independent": ((loaves, "--outcome", "rise_cm", "--group", "flour"),
                          "Independent groups"),
        "k_repeated_wide": ((shifts_wide, "--paired", "morning,noon,evening"),
                            "Repeated conditions"),
        "k_repeated_long": ((shifts_long_file, "--outcome", "wpm", "--group", "time",
                             "--subject", "typist"), "Repeated conditions"),
    }[design]
    res = run_cli("check", *args, "--boot", BOOT)
    assert res.code == 0, res.err
    assert res.err == ""
    assert res.out.splitlines()[0].startswith(title)
    assert "Rows:" in res.out and "Screening" in res.out
    if design.startswith("k_"):
        assert "Omnibus effect sizes" in res.out and "Tests" in res.out
        assert "Pairs (first relative to second" in res.out
    else:
        assert "Effect sizes, A relative to B" in res.out
        assert "Direction: A = " in res.out
    if design.startswith("paired"):
        assert "Tests" in res.out and "sign test:" in res.out


def test_terminal_summary_goes_to_stderr_with_json_on_stdout(run_cli, strict_json, shifts_wide):
    res = run_cli("check", shifts_wide, "--paired", "morning,noon,evening", "--boot", BOOT,
                  "--json", "-")
    assert res.code == 0
    assert strict_json(res.out)["design"] == "k_repeated"
    assert res.err.startswith("Repeated conditions")


# ------------------------------------------------------------------ library use


def test_constant_differences_warn_by_name_and_report_null():
    frame = pd.DataFrame({"before": [3.0, 4.0, 5.0, 6.0], "after": [2.0, 3.0, 4.0, 5.0]})
    with pytest.warns(UndefinedEffectWarning) as caught:
        result = audit(frame, paired_columns=["before", "after"], resamples=BOOT)
    assert any(str(w.message).startswith("d_z is undefined") for w in caught)
    d_z = result.effect("d_z")
    assert d_z.estimate is None and d_z.reason
    assert result.effect("mean_difference").estimate == pytest.approx(1.0)
    assert result.design == "paired"


# ------------------------------------------------------------------ follow-ups


def test_subject_column_cannot_also_be_a_condition(run_cli, seedlings):
    res = run_cli("check", seedlings, "--paired", "peat,loam", "--subject", "peat")
    assert_one_line_error(res, "--subject 'peat'", "--paired")


def test_missing_counts_participants_left_out_per_condition(run_cli, strict_json,
                                                            shifts_wide, shifts_long_file):
    # eli lacks the noon value in both layouts: counted once, under noon only
    wide = run_json(run_cli, strict_json, shifts_wide, "--paired", ",".join(SHIFT_NAMES),
                    "--subject", "typist")
    long = run_json(run_cli, strict_json, shifts_long_file, "--outcome", "wpm", "--group",
                    "time", "--subject", "typist")
    for doc in (wide, long):
        assert [g["missing"] for g in doc["groups"]] == [0, 1, 0]
        assert [g["n"] for g in doc["groups"]] == [len(SHIFTS_USED)] * 3
