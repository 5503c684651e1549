"""The tidy table of effect sizes (`AuditResult.to_frame()`, `auditor check --table`): one row per
index and comparison, its numbers the audit's own, checked against scipy and pingouin where a
reference exists. Data are invented (two groups, three groups, paired)."""

from __future__ import annotations

import io
import warnings

import numpy as np
import pandas as pd
import pingouin as pg
import pytest
from scipy import stats

from auditor.pipeline import audit
from auditor.tidy import TABLE_FIELDS, effect_rows
from cli_checks import one_line_error

BOOT = 300


def _two_groups(seed=3, n=25):
    rng = np.random.default_rng(seed)
    a, b = np.round(rng.normal(0.5, 1.0, n), 3), np.round(rng.normal(0.0, 1.3, n + 3), 3)
    frame = pd.DataFrame({"arm": ["coached"] * a.size + ["usual"] * b.size,
                          "score": np.concatenate([a, b])})
    return frame, a, b


def _audit(frame, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return audit(frame, resamples=BOOT, seed=5, **kw)


def test_two_groups_give_one_row_per_index_with_the_audit_s_numbers():
    frame, a, b = _two_groups()
    result = _audit(frame, outcome="score", group="arm")
    table = result.to_frame()
    assert list(table.columns) == list(TABLE_FIELDS)
    assert list(table["index"]) == [e.name for e in result.effects]
    assert set(table["comparison"]) == {"coached relative to usual"}
    rows = table.set_index("index")
    # outside references: pingouin's Cohen's d and Welch's interval of the mean difference
    assert rows.loc["cohen_d", "estimate"] == pytest.approx(
        pg.compute_effsize(a, b, eftype="cohen"), rel=1e-12)
    welch = stats.ttest_ind(a, b, equal_var=False).confidence_interval(0.95)
    assert rows.loc["mean_difference", "ci_method"] == "welch_t"
    assert (rows.loc["mean_difference", "ci_low"], rows.loc["mean_difference", "ci_high"]) == \
        pytest.approx((welch.low, welch.high), rel=1e-10)
    # the primary index carries the interval the report quotes
    primary = result.decision.primary
    assert rows.loc[primary, "role"] == "primary"
    assert rows.loc[primary, "ci_low"] == result.decision.interval["low"]
    assert rows.loc[primary, "ci_method"] == result.decision.interval["method"]
    for name in result.decision.also_report:
        assert rows.loc[name, "role"] == "also reported"
    for effect in result.effects:  # the bootstrap interval beside the quoted one
        boot = effect.interval("bca_bootstrap")
        if boot is not None:
            assert rows.loc[effect.name, "bootstrap_low"] == boot.low
        assert rows.loc[effect.name, "estimate"] == effect.estimate


def test_an_omnibus_design_adds_each_pair_s_rows():
    rng = np.random.default_rng(8)
    labels = ["low", "mid", "high"]
    frame = pd.DataFrame({"dose": np.repeat(labels, 15),
                          "y": np.round(np.concatenate([rng.normal(m, 1, 15)
                                                        for m in (0, 0.4, 1.0)]), 3)})
    result = _audit(frame, outcome="y", group="dose")
    rows = effect_rows(result)
    omnibus = [r for r in rows if r["role"] != "pair"]
    pairs = [r for r in rows if r["role"] == "pair"]
    assert {r["comparison"] for r in omnibus} == {"omnibus across low, mid, high"}
    assert len(pairs) == sum(len(p.effects) for p in result.pairwise)
    assert {r["comparison"] for r in pairs} == {
        f"{p.first} relative to {p.second}" for p in result.pairwise}
    # eta^2 of the omnibus against pingouin's one-way ANOVA
    eta = next(r for r in omnibus if r["index"] == "eta_squared")
    aov = pg.anova(data=frame, dv="y", between="dose")
    assert eta["estimate"] == pytest.approx(float(aov["np2"].iloc[0]), rel=1e-10)


def test_an_undefined_index_keeps_its_row_with_the_reason():
    frame = pd.DataFrame({"g": ["a"] * 6 + ["b"] * 6,
                          "y": [2.0, 2.5, 3.0, 2.0, 2.2, 2.9] + [1.0] * 6})
    rows = {r["index"]: r for r in effect_rows(_audit(frame, outcome="y", group="g"))}
    glass = rows["glass_delta"]  # the second group's SD scales it, and that group is constant
    assert glass["estimate"] is None
    assert glass["reason"] and glass["ci_low"] is None and glass["ci_method"] is None


def test_the_command_line_writes_the_table(run_cli, write_file, tmp_path):
    frame, _, _ = _two_groups()
    path = write_file("study.csv", frame.to_csv(index=False))
    res = run_cli("check", path, "--outcome", "score", "--group", "arm", "--boot", BOOT,
                  "--seed", "5", "--table", "-", "--quiet")
    assert res.code == 0, res.err
    printed = pd.read_csv(io.StringIO(res.out), keep_default_na=False)
    assert list(printed.columns) == list(TABLE_FIELDS)
    expected = _audit(frame, outcome="score", group="arm").to_frame()
    assert list(printed["index"]) == list(expected["index"])
    np.testing.assert_array_equal(printed["estimate"].to_numpy(float),
                                  expected["estimate"].to_numpy(float))
    out = tmp_path / "effects.csv"
    res = run_cli("check", path, "--outcome", "score", "--group", "arm", "--boot", BOOT,
                  "--seed", "5", "--table", out, "--json", "-")
    assert res.code == 0, res.err
    assert out.read_text(encoding="utf-8").splitlines()[0] == ",".join(TABLE_FIELDS)
    assert res.out.lstrip().startswith("{")  # the JSON document alone on standard output


def test_two_documents_on_standard_output_are_refused(run_cli, write_file):
    frame, _, _ = _two_groups()
    path = write_file("study.csv", frame.to_csv(index=False))
    res = run_cli("check", path, "--outcome", "score", "--group", "arm", "--json", "-",
                  "--table", "-")
    one_line_error(res, "--table -", "standard output")


def test_the_table_never_overwrites_the_data(run_cli, write_file):
    frame, _, _ = _two_groups()
    path = write_file("study.csv", frame.to_csv(index=False))
    before = path.read_bytes()
    res = run_cli("check", path, "--outcome", "score", "--group", "arm", "--table", path)
    one_line_error(res, "is the data file itself")
    assert path.read_bytes() == before
