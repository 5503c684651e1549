"""The reporting policy file: parsing, checking, fingerprint, explanation, comparison, commands."""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

import pytest

from auditor.policy import (CHECKS, DESIGNS, INDICES, TESTS, PolicyError, default_policy,
                            default_text, describe, differences, load_policy, parse_policy)


DEMO = Path(__file__).resolve().parents[1] / "demo" / "cycling_commute.csv"


def _edit(old: str, new: str, text: str | None = None) -> str:
    text = default_text() if text is None else text
    assert old in text, old
    return text.replace(old, new, 1)


def test_the_built_in_policy_is_valid_and_documented_line_by_line():
    policy = default_policy()
    assert policy.name and policy.version
    text = default_text()
    # every scalar setting carries a comment on its line or in the block above it (the
    # magnitude tables share the comment above the first of them)
    settings = text[:text.index("[magnitude.")]
    for line in settings.splitlines():
        if re.match(r"^[a-z_]+ = [^{\[]", line) and not line.startswith(("name", "version")):
            key = line.split("=")[0].strip()
            before = settings[:settings.index(line)].splitlines()[-3:]
            assert "#" in line or any(b.startswith("#") for b in before), key
    for design in DESIGNS:
        assert policy.branch(design, "assumptions_hold") is not None
        for check in policy.precedence(design):
            assert check in CHECKS[design]


def test_every_branch_pairs_a_test_with_an_index_that_compares_the_same_thing():
    policy = default_policy()
    for design in DESIGNS:
        for check in ("assumptions_hold", *policy.precedence(design)):
            b = policy.branch(design, check)
            assert INDICES[design][b.primary] == TESTS[design][b.test], (design, check)


def test_the_fingerprint_ignores_key_order_comments_and_spacing():
    base = default_policy().sha256
    text = default_text()
    no_comments = "\n".join(line.split("#")[0].rstrip() if not line.lstrip().startswith("source")
                            else line for line in text.splitlines())
    assert parse_policy(no_comments).sha256 == base
    spaced = "\n".join(line.replace(" = ", "   =   ", 1) for line in text.splitlines())
    assert parse_policy(spaced).sha256 == base
    # the same tables written in another order
    data = tomllib.loads(text)
    reordered = []
    for section in reversed(list(data)):
        value = data[section]
        if not isinstance(value, dict):
            reordered.insert(0, f"{section} = {_toml(value)}")
    for section in reversed([s for s in data if isinstance(data[s], dict)]):
        if section == "magnitude":
            for name in reversed(list(data[section])):
                reordered.append(f"[magnitude.{name}]")
                for key in reversed(list(data[section][name])):
                    reordered.append(f"{key} = {_toml(data[section][name][key])}")
            continue
        reordered.append(f"[{section}]")
        for key in reversed(list(data[section])):
            reordered.append(f"{key} = {_toml(data[section][key])}")
    assert parse_policy("\n".join(reordered)).sha256 == base


def _toml(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace('"', '\\"') + '"'
    if isinstance(value, list):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml(v)}" for k, v in value.items()) + " }"
    return repr(value)


def test_a_changed_threshold_changes_the_fingerprint():
    changed = parse_policy(_edit("sd_ratio = 2.0 ", "sd_ratio = 2.5 "))
    assert changed.sha256 != default_policy().sha256


def test_diff_of_policies_differing_in_one_threshold_reports_exactly_that():
    changed = parse_policy(_edit("sd_ratio = 2.0 ", "sd_ratio = 2.5 "), "lab.toml")
    assert differences(default_policy(), changed) == ["spread.sd_ratio: 2.0 -> 2.5"]
    assert differences(default_policy(), default_policy()) == []
    swapped = parse_policy(_edit('test = "student_t"', 'test = "welch_t"'))
    assert differences(default_policy(), swapped) == [
        'two_groups.assumptions_hold.test: "student_t" -> "welch_t"']


@pytest.mark.parametrize("old,new,message", [
    ("skewness = 1.0 ", "skewnes = 1.0 ", "normality.skewnes: unknown key (did you mean 'skewness'?)"),
    ("test_p = 0.05", "test_p = 1.5", "normality.test_p: 1.5 is out of range; give a number in (0, 1)"),
    ("test_p = 0.05", 'test_p = "0.05"', "normality.test_p: '0.05' is not a number"),
    ("minimum_n = 10", "minimum_n = 2.5", "sample_size.minimum_n: 2.5 is not a whole number"),
    ("resamples = 2000", "resamples = 10", "bootstrap.resamples: 10 is out of range"),
    ('method = "analytic"', 'method = "exact"', "intervals.method: 'exact' is out of range; give one of analytic, bootstrap"),
    ('rule = "beyond_3_iqr"', 'rule = "far"', "outliers.rule: 'far' is out of range"),
    ("any_sign_or_interval_flip = true", "any_sign_or_interval_flip = 1", "is not true or false"),
    ('test = "student_t"', 'test = "mann_whitney"',
     "two_groups.assumptions_hold.test: mann_whitney compares ranks but hedges_g compares means;"
     " tests that do: student_t, welch_t, permutation_mean"),
    ('primary = "hedges_g"', 'primary = "hedge_g"', "two_groups.assumptions_hold.primary: hedge_g: unknown key"),
    ('test = "student_t"', 'test = "t_test"', "two_groups.assumptions_hold.test: t_test: unknown key"),
    ('precedence = ["small_sample", "heavy_ties", "outliers", "non_normal", "unequal_spread"]',
     'precedence = ["small_sample", "ties"]', "two_groups.precedence: ties: unknown key"),
    ("small_n = 20 ", "small_n = 500 ", "normality.small_n: must not exceed normality.large_n"),
    ("small = 0.2\nmedium = 0.5\nlarge = 0.8\nsource = \"Cohen 1988, sec. 2.2\"",
     "small = 0.5\nmedium = 0.2\nlarge = 0.8\nsource = \"Cohen 1988, sec. 2.2\"",
     "magnitude.cohen_d: [0.5, 0.2, 0.8]: need 0 < small < medium < large"),
    ("[magnitude.kendall_w]", "[magnitude.kendalls_w]", "magnitude.kendalls_w: unknown key"),
    ('name = "auditor default"', "", "name: required text"),
    ("[report]", "[reports]", "reports: unknown key (did you mean 'report'?)"),
])
def test_a_bad_policy_gives_one_clear_error_naming_the_key(old, new, message):
    with pytest.raises(PolicyError) as err:
        parse_policy(_edit(old, new), "lab.toml")
    text = str(err.value)
    assert text.startswith("lab.toml: ") and "\n" not in text
    assert message in text


def test_policy_that_is_not_toml_or_not_a_file(tmp_path):
    with pytest.raises(PolicyError, match="not valid TOML"):
        parse_policy("name = ", "x.toml")
    with pytest.raises(PolicyError, match="policy file not found"):
        load_policy(tmp_path / "missing.toml")
    with pytest.raises(PolicyError, match="is a folder"):
        load_policy(tmp_path)


def test_show_explains_every_threshold_with_its_value():
    text = describe(default_policy())
    policy = default_policy()
    for section, key in [("normality", "test_p"), ("spread", "sd_ratio"),
                         ("sample_size", "minimum_n"), ("bootstrap", "resamples")]:
        value = policy.value(section, key)
        assert f"{value:g}" in text, (section, key)
    for design in DESIGNS:
        for check in ("assumptions_hold", *policy.precedence(design)):
            b = policy.branch(design, check)
            assert f"report {b.primary} " in text and f"test {b.test}." in text


def test_policy_commands(run_cli, tmp_path):
    target = tmp_path / "lab.toml"
    def run(*args):
        res = run_cli(*args)
        return res.code, res.out, res.err

    code, out, err = run("policy", "init", str(target))
    assert code == 0 and target.read_text(encoding="utf-8") == default_text()
    code, out, err = run("policy", "init", str(target))
    assert code == 1 and "already exists" in err and "Traceback" not in err
    code, out, err = run("policy", "show", str(target))
    assert code == 0 and out == describe(load_policy(target))
    other = tmp_path / "other.toml"
    other.write_text(_edit("minimum_n = 10", "minimum_n = 15"), encoding="utf-8")
    code, out, err = run("policy", "diff", str(target), str(other))
    assert code == 0 and "sample_size.minimum_n: 10 -> 15" in out
    assert len([line for line in out.splitlines() if line.startswith("  ")]) == 1
    code, out, err = run("policy", "diff", "default", str(target))
    assert code == 0 and "decide alike" in out
    bad = tmp_path / "bad.toml"
    bad.write_text(_edit("sd_ratio = 2.0 ", "sd_ratio = 0.5 "), encoding="utf-8")
    code, out, err = run("policy", "show", str(bad))
    assert code == 1 and err.strip().count("\n") == 0 and "spread.sd_ratio" in err


@pytest.mark.slow
def test_check_with_a_policy_reports_its_fingerprint_for_every_design(run_cli, strict_json,
                                                                     tmp_path):
    policy_path = tmp_path / "lab.toml"
    policy_path.write_text(_edit("minimum_n = 10", "minimum_n = 12"), encoding="utf-8")
    lab = load_policy(policy_path)
    demo = DEMO
    designs = {
        "two_independent": ["--outcome", "weekly_km", "--group", "scheme", "--groups", "buddy,solo"],
        "k_independent": ["--outcome", "weekly_km", "--group", "route_type"],
        "paired": ["--paired", "confidence_before,confidence_after", "--subject", "rider_id"],
    }
    for design, options in designs.items():
        res = run_cli("check", demo, *options, "--boot", 200, "--json", "-", "--quiet",
                      "--policy", policy_path)
        assert res.code == 0, res.err
        doc = strict_json(res.out)
        assert doc["design"] == design
        assert doc["policy"]["sha256"] == lab.sha256 and doc["policy"]["source"] == str(policy_path)
        decision = doc["decision"]
        assert decision["primary"] in doc["effects"]
        assert set(decision["test"]) >= {"name", "statistic", "df", "p", "why"}
        assert decision["rationale"] and decision["reviewer_note"] and decision["methods_sentence"]
        assert lab.sha256[:16] in decision["methods_sentence"]
        assert all(name in doc["effects"] for name in decision["also_report"])
        assert set(decision["magnitude"]) == {decision["primary"], *decision["also_report"]}


def test_check_with_a_broken_policy_stops_with_one_line(run_cli, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(_edit('test = "welch_t"', 'test = "wilcoxon"'), encoding="utf-8")
    res = run_cli("check", DEMO, "--outcome", "weekly_km", "--group",
                  "scheme", "--policy", bad)
    assert res.code == 1 and res.out == ""
    assert res.err.count("\n") == 1 and "Traceback" not in res.err
    assert "two_groups.unequal_spread.test: wilcoxon: unknown key" in res.err
    res = run_cli("check", DEMO, "--outcome", "weekly_km", "--group",
                  "scheme", "--policy", tmp_path / "absent.toml")
    assert res.code == 1 and "policy file not found" in res.err
