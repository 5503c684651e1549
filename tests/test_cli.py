"""Command-line behaviour of `auditor check`: exit codes, messages, output streams and files,
the JSON document's shape, and the light start-up of `--help`."""

from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

import auditor.pipeline
from auditor.errors import UndefinedEffectWarning
from auditor.results import SCHEMA_VERSION

# Reading speed (words per minute) of volunteers given a page set in a serif or a sans font.
READING = """font,words_per_min
serif,212
sans,230
serif,198
sans,241
serif,225
sans,219
serif,205
sans,236
serif,190
sans,228
"""

EFFECT_NAMES = ("mean_difference", "cohen_d", "hedges_g", "glass_delta", "d_unpooled",
                "robust_d", "prob_superiority", "cliff_delta", "rank_biserial", "r_from_z",
                "hodges_lehmann")
D_FAMILY = ("cohen_d", "hedges_g", "glass_delta", "d_unpooled", "robust_d")


@pytest.fixture
def reading_csv(write_file):
    return write_file("reading.csv", READING)


def check_args(path, *extra, outcome="words_per_min", group="font"):
    return ("check", path, "--outcome", outcome, "--group", group, "--boot", 200, *extra)


def assert_one_line_error(res, *fragments):
    """Exit 1, nothing on stdout, one line on stderr starting 'auditor: error:'."""
    assert res.code == 1, (res.code, res.err)
    assert res.out == ""
    assert res.err.startswith("auditor: error:"), res.err
    assert res.err.endswith("\n") and res.err.count("\n") == 1, repr(res.err)
    assert "Traceback" not in res.err
    for fragment in fragments:
        assert fragment in res.err, (fragment, res.err)


# ------------------------------------------------------------------ data, file and option errors


def test_missing_file(run_cli, tmp_path):
    path = tmp_path / "no_such_data.csv"
    res = run_cli(*check_args(path))
    assert_one_line_error(res, "no_such_data.csv", "no such file")


def test_folder_instead_of_file(run_cli, tmp_path):
    folder = tmp_path / "survey"
    folder.mkdir()
    res = run_cli(*check_args(folder))
    assert_one_line_error(res, "survey", "folder")


def test_unreadable_file(run_cli, reading_csv):
    reading_csv.chmod(0)
    try:
        if os.access(reading_csv, os.R_OK):
            pytest.skip("running with privileges that read a mode-000 file anyway")
        res = run_cli(*check_args(reading_csv))
        assert_one_line_error(res, "reading.csv", "cannot be read")
    finally:
        reading_csv.chmod(0o644)


@pytest.mark.parametrize("failing_open", [1, 2], ids=["scanning the bytes", "reading the text"])
def test_read_failure_after_access_check(run_cli, reading_csv, monkeypatch, failing_open):
    # os.access can approve a file that then fails to read (ACLs, network folders, races); the
    # file is opened twice, once to find its encoding and once to read it
    real_open = Path.open
    opened = []

    def refuse(self, *args, **kwargs):
        if self.name == "reading.csv":
            opened.append(self)
            if len(opened) == failing_open:
                raise PermissionError(13, "Permission denied", str(self))
        return real_open(self, *args, **kwargs)

    monkeypatch.setattr(Path, "open", refuse)
    res = run_cli(*check_args(reading_csv))
    assert_one_line_error(res, "reading.csv", "cannot be read", "Permission denied")


def test_unknown_outcome_column_suggests_closest_name(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv, outcome="words_per_minute"))
    assert_one_line_error(res, "no column named 'words_per_minute'", "did you mean 'words_per_min'")


def test_unknown_group_column_suggests_closest_name(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv, group="fonts"))
    assert_one_line_error(res, "no column named 'fonts'", "did you mean 'font'")


def test_outcome_and_group_the_same_column(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv, outcome="font", group="font"))
    assert_one_line_error(res, "same column")


def test_only_one_group_level(run_cli, write_file):
    path = write_file("one.csv", "font,words_per_min\nserif,200\nserif,210\nserif,190\n")
    res = run_cli(*check_args(path))
    assert_one_line_error(res, "1 group level", "'serif'")


def test_three_levels_without_groups_is_a_k_group_audit(audit_json, write_file):
    path = write_file("three.csv", READING + "mono,201\nmono,207\nmono,199\n")
    doc = audit_json(path, "words_per_min", "font")
    assert doc["design"] == "k_independent"
    assert [g["label"] for g in doc["groups"]] == ["serif", "sans", "mono"]
    assert len(doc["pairwise"]) == 3


def test_three_levels_with_groups_selects_two(audit_json, write_file):
    path = write_file("three.csv", READING + "mono,201\nmono,207\nmono,199\n")
    doc = audit_json(path, "words_per_min", "font", "--groups", "mono,sans")
    assert [g["label"] for g in doc["groups"]] == ["mono", "sans"]
    assert doc["data"]["not_selected"] == {"serif": 5}


def test_groups_naming_an_unknown_level(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv, "--groups", "serif,sanz"))
    assert_one_line_error(res, "no level 'sanz'", "did you mean 'sans'")


@pytest.mark.parametrize("value", ["serif", "serif,,sans", "serif,serif"])
def test_groups_must_name_two_distinct_levels(run_cli, reading_csv, value):
    res = run_cli(*check_args(reading_csv, "--groups", value))
    assert_one_line_error(res, "--groups")


def test_group_with_fewer_than_two_valid_values(run_cli, write_file):
    path = write_file("thin.csv", "font,words_per_min\nserif,200\nserif,210\nserif,190\n"
                                  "sans,NA\nsans,231\nsans,\n")
    res = run_cli(*check_args(path))
    assert_one_line_error(res, "group 'sans'", "1 valid value")


def test_group_with_exactly_two_valid_values_is_audited(run_cli, strict_json, write_file):
    # Two values per group is the documented minimum, so it must be audited, not crash.
    path = write_file("pairs.csv", "font,words_per_min\nserif,200\nserif,210\nsans,231\n"
                                   "sans,226\nsans,240\n")
    res = run_cli(*check_args(path, "--json", "-", "--quiet"))
    assert res.code == 0, res.err
    doc = strict_json(res.out)
    assert [g["n"] for g in doc["groups"]] == [2, 3]


@pytest.mark.parametrize("level", ["1.5", "1", "0.2", "0", "-0.95", "nan"])
def test_level_out_of_range(run_cli, reading_csv, level):
    res = run_cli(*check_args(reading_csv, "--level", level))
    assert_one_line_error(res, "confidence level")


def test_level_not_a_number_is_a_usage_error(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv, "--level", "high"))
    assert res.code == 2
    assert res.out == ""
    assert "--level" in res.err and "Traceback" not in res.err


@pytest.mark.parametrize("boot", ["0", "-200", "99"])
def test_boot_too_small(run_cli, reading_csv, boot):
    res = run_cli("check", reading_csv, "--outcome", "words_per_min", "--group", "font",
                  "--boot", boot)
    assert_one_line_error(res, "bootstrap resamples")


@pytest.mark.parametrize("boot", ["many", "250.5"])
def test_boot_not_a_whole_number_is_a_usage_error(run_cli, reading_csv, boot):
    res = run_cli("check", reading_csv, "--outcome", "words_per_min", "--group", "font",
                  "--boot", boot)
    assert res.code == 2
    assert "--boot" in res.err


def test_negative_seed(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv, "--seed", "-3"))
    assert_one_line_error(res, "seed")


def test_reference_not_a_compared_group(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv, "--reference", "mono"))
    assert_one_line_error(res, "--reference 'mono'")


def test_reference_chooses_glass_delta_scale(audit_json, reading_csv):
    default = audit_json(reading_csv, "words_per_min", "font")
    by_serif = audit_json(reading_csv, "words_per_min", "font", "--reference", "serif")
    assert default["settings"]["reference"] == "sans"
    assert by_serif["settings"]["reference"] == "serif"
    groups = {g["label"]: g for g in default["groups"]}
    diff = groups["serif"]["mean"] - groups["sans"]["mean"]
    assert default["effects"]["glass_delta"]["estimate"] == pytest.approx(diff / groups["sans"]["sd"])
    assert by_serif["effects"]["glass_delta"]["estimate"] == pytest.approx(
        diff / groups["serif"]["sd"])


# ------------------------------------------------------------------ usage (argparse) errors


def test_unknown_option_is_a_usage_error(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv, "--colour", "blue"))
    assert res.code == 2
    assert res.out == ""
    assert "--colour" in res.err and "Traceback" not in res.err


def test_missing_required_option_is_a_usage_error(run_cli, reading_csv):
    res = run_cli("check", reading_csv, "--group", "font")
    assert res.code == 2
    assert "--outcome" in res.err


def test_no_command_is_a_usage_error(run_cli):
    res = run_cli()
    assert res.code == 2
    assert "check" in res.err


def test_unknown_command_is_a_usage_error(run_cli):
    res = run_cli("inspect", "data.csv")
    assert res.code == 2


def test_top_level_help(run_cli):
    res = run_cli("--help")
    assert res.code == 0
    assert res.out.startswith("usage: auditor")
    assert "check" in res.out


def test_check_help(run_cli):
    res = run_cli("check", "--help")
    assert res.code == 0
    for option in ("--outcome", "--group", "--groups", "--level", "--boot", "--seed", "--json",
                   "--out", "--quiet"):
        assert option in res.out


def test_version(run_cli):
    res = run_cli("--version")
    assert res.code == 0
    assert res.out.strip() == f"auditor {auditor.__version__}"


# ------------------------------------------------------------------ internal errors, interrupts


def _explode(*args, **kwargs):
    raise RuntimeError("simulated failure inside the audit")


def test_internal_error_exit_3_without_traceback(run_cli, reading_csv, monkeypatch):
    monkeypatch.setattr(auditor.pipeline, "audit", _explode)
    res = run_cli(*check_args(reading_csv))
    assert res.code == 3
    assert "Traceback" not in res.err
    assert "RuntimeError" in res.err and "--debug" in res.err


@pytest.mark.parametrize("where", ["before", "after"])
def test_internal_error_traceback_with_debug(run_cli, reading_csv, monkeypatch, where):
    monkeypatch.setattr(auditor.pipeline, "audit", _explode)
    args = check_args(reading_csv)
    args = ("--debug", *args) if where == "before" else (*args, "--debug")
    res = run_cli(*args)
    assert res.code == 3
    assert "Traceback" in res.err
    assert "simulated failure inside the audit" in res.err


def test_interrupt_exits_130(run_cli, reading_csv, monkeypatch):
    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(auditor.pipeline, "audit", interrupted)
    res = run_cli(*check_args(reading_csv))
    assert res.code == 130
    assert "interrupted" in res.err and "Traceback" not in res.err


# ------------------------------------------------------------------ output streams and files


def test_json_to_stdout_keeps_summary_on_stderr(run_cli, strict_json, reading_csv):
    res = run_cli(*check_args(reading_csv, "--json", "-"))
    assert res.code == 0, res.err
    doc = strict_json(res.out)  # stdout holds the document and nothing else
    assert doc["outcome"] == "words_per_min"
    assert "Direction: A = 'serif' relative to B = 'sans'" in res.err
    assert "Effect sizes" in res.err


def test_json_to_stdout_quiet_prints_nothing_else(run_cli, strict_json, reading_csv):
    res = run_cli(*check_args(reading_csv, "--json", "-", "--quiet"))
    assert res.code == 0
    assert res.err == ""
    strict_json(res.out)


def test_summary_on_stdout_by_default(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv))
    assert res.code == 0
    assert "Direction: A = 'serif' relative to B = 'sans'" in res.out
    assert "Rows: 10 read, 10 used, 0 excluded" in res.out
    assert res.err == ""


def test_quiet_prints_nothing(run_cli, reading_csv):
    res = run_cli(*check_args(reading_csv, "--quiet"))
    assert res.code == 0
    assert res.out == "" and res.err == ""


def test_json_to_file(run_cli, strict_json, reading_csv, tmp_path):
    target = tmp_path / "results" / "reading.json"
    res = run_cli(*check_args(reading_csv, "--json", target))
    assert res.code == 0, res.err
    assert "Direction:" in res.out
    doc = strict_json(target.read_text(encoding="utf-8"))
    assert doc["group_column"] == "font"


@pytest.mark.slow
def test_out_dir_writes_audit_json(run_cli, strict_json, reading_csv, tmp_path):
    out_dir = tmp_path / "runs" / "first"
    res = run_cli(*check_args(reading_csv, "--out", out_dir, "--quiet"))
    assert res.code == 0, res.err
    written = (out_dir / "audit.json").read_text(encoding="utf-8")
    doc = strict_json(written)
    assert doc["design"] == "two_independent"
    # same settings, same document as on standard output
    again = run_cli(*check_args(reading_csv, "--json", "-", "--quiet"))
    assert again.out == written


@pytest.mark.slow
def test_out_dir_under_a_regular_file(run_cli, reading_csv, tmp_path):
    blocker = tmp_path / "notes.txt"
    blocker.write_text("not a folder\n")
    res = run_cli(*check_args(reading_csv, "--out", blocker / "reports", "--quiet"))
    assert_one_line_error(res, "cannot write")


def test_json_path_under_a_regular_file(run_cli, reading_csv, tmp_path):
    blocker = tmp_path / "notes.txt"
    blocker.write_text("not a folder\n")
    res = run_cli(*check_args(reading_csv, "--json", blocker / "audit.json", "--quiet"))
    assert_one_line_error(res, "cannot write")


def test_json_path_that_is_a_folder(run_cli, reading_csv, tmp_path):
    res = run_cli(*check_args(reading_csv, "--json", tmp_path, "--quiet"))
    assert_one_line_error(res, "cannot write")


# ------------------------------------------------------------------ the JSON document


def test_json_document_shape(audit_json, reading_csv):
    doc = audit_json(reading_csv, "words_per_min", "font")
    assert doc["schema_version"] == SCHEMA_VERSION and isinstance(doc["schema_version"], int)
    assert doc["design"] == "two_independent"
    assert doc["outcome"] == "words_per_min"
    assert doc["direction"] == "serif relative to sans"

    assert [g["label"] for g in doc["groups"]] == ["serif", "sans"]
    for g in doc["groups"]:
        for key in ("label", "n", "missing", "mean", "sd", "median", "q1", "q3", "min", "max"):
            assert key in g, key
        assert g["n"] == 5 and g["missing"] == 0
        assert g["min"] <= g["q1"] <= g["median"] <= g["q3"] <= g["max"]
    serif = [212, 198, 225, 205, 190]
    assert doc["groups"][0]["mean"] == pytest.approx(sum(serif) / 5)

    data = doc["data"]
    assert (data["rows_read"], data["rows_used"], data["excluded"]) == (10, 10, [])

    diag = doc["diagnostics"]
    assert [n["label"] for n in diag["normality"]][:2] == ["serif", "sans"]
    for entry in diag["normality"]:
        for key in ("shapiro_w", "shapiro_p", "skewness", "excess_kurtosis"):
            assert key in entry
    assert 0 < diag["normality"][0]["shapiro_w"] <= 1
    for key in ("sd_ratio", "levene_p", "brown_forsythe_p", "fligner_p"):
        assert key in diag["spread"]
        assert diag["spread"][key] is not None
    assert diag["spread"]["sd_ratio"] >= 1
    for key in ("tie_fraction", "distinct_values", "tie_correction"):
        assert key in diag["ties"]
    assert diag["ties"]["distinct_values"] == 10 and diag["ties"]["tie_fraction"] == 0
    assert [o["label"] for o in diag["outliers"]] == ["serif", "sans"]
    for o in diag["outliers"]:
        assert isinstance(o["rows"], list)

    assert set(EFFECT_NAMES) <= set(doc["effects"])
    for name in EFFECT_NAMES:
        e = doc["effects"][name]
        for key in ("estimate", "ci_low", "ci_high", "ci_method", "intervals"):
            assert key in e, (name, key)
        assert isinstance(e["estimate"], float), name
        assert e["ci_low"] <= e["ci_high"], name
        methods = [iv["method"] for iv in e["intervals"]]
        assert e["ci_method"] in methods, name
        # near separation (A = 0.04 here) most resamples sit at A = 0: the bootstrap is withheld
        assert ("bca_bootstrap" in methods) != bool(e["bootstrap_reason"]), name
        for iv in e["intervals"]:
            assert iv["level"] == 0.95
            assert iv["low"] <= iv["high"]


def test_level_option_reaches_every_interval(audit_json, reading_csv):
    doc = audit_json(reading_csv, "words_per_min", "font", "--level", "0.9")
    assert doc["settings"]["level"] == 0.9
    for name in EFFECT_NAMES:
        assert {iv["level"] for iv in doc["effects"][name]["intervals"]} == {0.9}, name


def test_constant_groups_give_nulls_not_nan(run_cli, strict_json, write_file):
    # Every volunteer in a group read at the same (rounded) speed.
    path = write_file("flat.csv", "font,words_per_min\nserif,200\nserif,200\nserif,200\n"
                                  "sans,220\nsans,220\nsans,220\nsans,220\n")
    res = run_cli(*check_args(path, "--json", "-"))
    assert res.code == 0, res.err
    assert re.search(r"\bNaN\b|Infinity", res.out) is None
    doc = strict_json(res.out)
    for name in D_FAMILY:
        e = doc["effects"][name]
        assert e["estimate"] is None, name
        assert e["ci_low"] is None and e["ci_high"] is None, name
        assert isinstance(e["reason"], str) and e["reason"], name
        assert any(w.startswith(name) for w in doc["warnings"]), name
    assert doc["effects"]["mean_difference"]["estimate"] == pytest.approx(-20.0)
    assert doc["effects"]["cliff_delta"]["estimate"] == pytest.approx(-1.0)
    assert doc["diagnostics"]["spread"]["sd_ratio"] is None
    assert "n/a" in res.err  # the summary shows undefined values plainly


def test_constant_groups_warn_by_name_in_the_library(write_file):
    path = write_file("flat.csv", "font,words_per_min\nserif,200\nserif,200\nserif,200\n"
                                  "sans,220\nsans,220\nsans,220\n")
    with pytest.warns(UndefinedEffectWarning) as caught:
        result = auditor.audit(path, outcome="words_per_min", group="font", resamples=200)
    assert result.effect("cohen_d").estimate is None
    assert any("cohen_d" in str(w.message) for w in caught)


def test_same_seed_same_document(run_cli, reading_csv):
    first = run_cli(*check_args(reading_csv, "--seed", "11", "--json", "-", "--quiet"))
    second = run_cli(*check_args(reading_csv, "--seed", "11", "--json", "-", "--quiet"))
    assert first.code == second.code == 0
    assert first.out == second.out


def test_default_seed_is_recorded_and_reproducible(run_cli, strict_json, reading_csv):
    first = run_cli(*check_args(reading_csv, "--json", "-", "--quiet"))
    second = run_cli(*check_args(reading_csv, "--json", "-", "--quiet"))
    assert first.out == second.out
    seed = strict_json(first.out)["settings"]["seed"]
    explicit = run_cli(*check_args(reading_csv, "--seed", seed, "--json", "-", "--quiet"))
    assert explicit.out == first.out


def test_different_seed_moves_bootstrap_bounds(audit_json, reading_csv):
    one = audit_json(reading_csv, "words_per_min", "font", "--seed", "1")
    two = audit_json(reading_csv, "words_per_min", "font", "--seed", "2")
    assert (one["settings"]["seed"], two["settings"]["seed"]) == (1, 2)

    def bca(doc, name):  # None where the bootstrap is withheld (A near separation here)
        iv = next((i for i in doc["effects"][name]["intervals"]
                   if i["method"] == "bca_bootstrap"), None)
        return None if iv is None else (iv["low"], iv["high"])

    moved = [name for name in EFFECT_NAMES if bca(one, name) != bca(two, name)]
    assert "mean_difference" in moved and "cohen_d" in moved
    # point estimates and analytic intervals do not depend on the seed
    for name in EFFECT_NAMES:
        assert one["effects"][name]["estimate"] == two["effects"][name]["estimate"]
    assert one["effects"]["cohen_d"]["ci_low"] == two["effects"]["cohen_d"]["ci_low"]


def _assert_all_finite(node):
    if isinstance(node, dict):
        for v in node.values():
            _assert_all_finite(v)
    elif isinstance(node, list):
        for v in node:
            _assert_all_finite(v)
    elif isinstance(node, float):
        assert math.isfinite(node)


def test_json_numbers_are_finite_with_ties_and_an_outlier(audit_json, write_file):
    # heavy ties, one far-out value and a group with a single distinct value but one
    rows = [("serif", 200)] * 6 + [("serif", 9000)] + [("sans", 200)] * 5 + [("sans", 210)]
    path = write_file("odd.csv", "font,words_per_min\n" + "".join(f"{f},{v}\n" for f, v in rows))
    doc = audit_json(path, "words_per_min", "font")
    _assert_all_finite(doc)
    assert doc["diagnostics"]["outliers"][0]["rows"] == [8]  # the 9000 sits on line 8


@pytest.mark.parametrize("rows", [
    # one enormous (finite) value among ordinary ones
    [("serif", 200)] * 6 + [("serif", 1e300)] + [("sans", 200)] * 3 + [("sans", 210)] * 3,
    # a whole group on a very large scale
    [("serif", 1e150), ("serif", 2e150), ("serif", 3e150), ("sans", 1), ("sans", 2), ("sans", 3)],
], ids=["one_huge_value", "huge_scale"])
def test_huge_finite_values_do_not_crash(run_cli, strict_json, write_file, rows):
    # The loader accepts these as finite numbers, so the audit must finish (exit 0) or refuse
    # them with a data error (exit 1); it must not end in an internal error.
    path = write_file("huge.csv", "font,words_per_min\n" + "".join(f"{f},{v!r}\n" for f, v in rows))
    res = run_cli(*check_args(path, "--json", "-", "--quiet"))
    assert res.code in (0, 1), res.err
    if res.code == 0:
        _assert_all_finite(strict_json(res.out))


# ------------------------------------------------------------------ subprocesses


def _run(args, cwd, **kwargs):
    return subprocess.run(args, cwd=cwd, capture_output=True, text=True, timeout=120, **kwargs)


@pytest.mark.parametrize("case,expected", [
    ("missing_file", 1), ("unknown_column", 1), ("bad_level", 1), ("thin_third_level", 1),
    ("unknown_option", 2), ("not_numeric_boot", 2), ("binary_file", 1),
])
@pytest.mark.slow
def test_module_bad_inputs_never_show_a_traceback(tmp_path, reading_csv, case, expected):
    three = tmp_path / "three.csv"
    three.write_text(READING + "mono,201\n")  # a third level with a single value
    binary = tmp_path / "picture.csv"
    binary.write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR")
    base = ["--outcome", "words_per_min", "--group", "font", "--boot", "200"]
    args = {
        "missing_file": ["check", str(tmp_path / "absent.csv"), *base],
        "unknown_column": ["check", str(reading_csv), "--outcome", "speed", "--group", "font"],
        "bad_level": ["check", str(reading_csv), *base, "--level", "2"],
        "thin_third_level": ["check", str(three), *base],
        "unknown_option": ["check", str(reading_csv), *base, "--fast"],
        "not_numeric_boot": ["check", str(reading_csv), *base[:4], "--boot", "lots"],
        "binary_file": ["check", str(binary), *base],
    }[case]
    proc = _run([sys.executable, "-m", "auditor", *args], tmp_path)
    assert proc.returncode == expected, proc.stderr
    assert "Traceback" not in proc.stderr
    assert proc.stdout == ""
    if expected == 1:
        assert proc.stderr.startswith("auditor: error:")
        assert proc.stderr.count("\n") == 1


def test_module_runs_a_check(tmp_path, reading_csv):
    proc = _run([sys.executable, "-m", "auditor", "check", str(reading_csv), "--outcome",
                 "words_per_min", "--group", "font", "--boot", "200", "--json", "-", "--quiet"],
                tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["design"] == "two_independent"


@pytest.mark.slow
def test_installed_console_script(tmp_path, reading_csv):
    script = Path(sys.executable).parent / "auditor"
    if not script.exists():
        pytest.skip("the auditor console script is not installed next to this Python")
    version = _run([str(script), "--version"], tmp_path)
    assert version.returncode == 0
    assert version.stdout.strip() == f"auditor {auditor.__version__}"
    proc = _run([str(script), "check", str(reading_csv), "--outcome", "words_per_min",
                 "--group", "font", "--boot", "200", "--json", "-", "--quiet"], tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["groups"][0]["label"] == "serif"
    missing = _run([str(script), "check", str(tmp_path / "absent.csv"), "--outcome", "x",
                    "--group", "y"], tmp_path)
    assert missing.returncode == 1 and "Traceback" not in missing.stderr


HEAVY_PROBE = """
import json, sys
from auditor.cli import main
code = main({args!r})
heavy = sorted(m for m in ("numpy", "scipy", "pandas", "pingouin") if m in sys.modules)
sys.stdout.write("\\nPROBE " + json.dumps({{"code": code, "heavy": heavy}}) + "\\n")
"""


def _probe(args, cwd):
    proc = _run([sys.executable, "-c", HEAVY_PROBE.format(args=args)], cwd)
    assert proc.returncode == 0, proc.stderr
    last = proc.stdout.strip().splitlines()[-1]
    assert last.startswith("PROBE ")
    return json.loads(last[len("PROBE "):])


@pytest.mark.parametrize("args", [["--help"], ["check", "--help"], ["--version"]])
def test_help_does_not_import_the_statistics_stack(tmp_path, args):
    result = _probe(args, tmp_path)
    assert result["code"] == 0
    assert "scipy" not in result["heavy"]
    assert "pingouin" not in result["heavy"]
    assert result["heavy"] == []


def test_import_probe_sees_the_stack_after_a_real_check(tmp_path, reading_csv):
    # control for the probe above: a real audit does load scipy
    result = _probe(["check", str(reading_csv), "--outcome", "words_per_min", "--group", "font",
                     "--boot", "200", "--quiet"], tmp_path)
    assert result["code"] == 0
    assert "scipy" in result["heavy"]
