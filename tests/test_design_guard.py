"""Designs the audit does not cover (auditor/guard.py): a catalogue of files, each of which must
stop with its one-line message naming what the file looks like and what to run instead, exit 1,
no traceback and nothing written; the files that are covered (covariates, unique ids) must pass;
the stated overrides let an audit on and leave their note in the document. Invented data: the
guard's bookkeeping is checked, not a statistic."""

from __future__ import annotations

import csv
import io
import json
from dataclasses import dataclass

import numpy as np
import pytest

from cli_checks import one_line_error


def _csv(header, rows) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return buffer.getvalue()


def _values(n, seed=1, shift=0.0):
    rng = np.random.default_rng(seed)
    return [f"{v:.2f}" for v in rng.normal(10 + shift, 2, n)]


def long_paired(id_name="id"):
    v = _values(16)
    rows = [(f"P{i:02d}", t, v[i + 8 * k]) for k, t in enumerate(("pre", "post")) for i in range(8)]
    return _csv((id_name, "time", "score"), rows)


def several_rows_within_a_group():
    v = _values(24)
    rows = [(f"{g}{i}", g, v[12 * k + 3 * i + r]) for k, g in enumerate(("A", "B"))
            for i in range(4) for r in range(3)]
    return _csv(("participant_id", "arm", "score"), rows)


def balanced_factorial():
    v = _values(24)
    rows = [(d, dose, v[12 * a + 6 * b + r]) for a, d in enumerate(("A", "B"))
            for b, dose in enumerate(("low", "high")) for r in range(6)]
    return _csv(("drug", "dose", "y"), rows)


def factorial_named_as_allocation():
    v = _values(26)
    levels = [("F", "active")] * 7 + [("F", "placebo")] * 5 + [("M", "active")] * 6 + \
        [("M", "placebo")] * 8
    return _csv(("sex", "treatment", "y"), [(s, t, v[i]) for i, (s, t) in enumerate(levels)])


def mixed_long():
    v = _values(24)
    rows = [(f"P{i:02d}", "coached" if i < 6 else "usual", t, v[12 * k + i])
            for k, t in enumerate(("pre", "post")) for i in range(12)]
    return _csv(("subject", "arm", "time", "score"), rows)


def mixed_wide():
    v = _values(24)
    rows = [(f"P{i:02d}", "coached" if i < 6 else "usual", v[i], v[12 + i]) for i in range(12)]
    return _csv(("subject", "arm", "pre", "post"), rows)


def long_with_unique_ids():
    v = _values(16)
    rows = [(f"P{k}{i:02d}", t, v[8 * k + i]) for k, t in enumerate(("pre", "post"))
            for i in range(8)]
    return _csv(("id", "time", "score"), rows)


def duplicate_row_per_condition():
    text = long_paired()
    return text + "P01,pre,11.00\n"


def wide_duplicate_subject():
    v = _values(20)
    rows = [(f"P{i:02d}", v[i], v[10 + i]) for i in range(10)] + [("P03", "9.00", "9.50")]
    return _csv(("subject", "before", "after"), rows)


@dataclass(frozen=True)
class Case:
    id: str
    text: str
    options: tuple
    needles: tuple


CHECK = ("--outcome",)
CATALOGUE = [
    Case("long_paired_file_without_subject", long_paired(),
         ("--outcome", "score", "--group", "time"),
         ("'id' looks like a participant id", "'P00'", "'pre' and 'post'", "--subject id")),
    Case("ids_found_from_their_repeats", long_paired("code"),
         ("--outcome", "score", "--group", "time"),
         ("'code' looks like a participant id", "--subject code")),
    Case("several_rows_of_one_participant_in_a_group", several_rows_within_a_group(),
         ("--outcome", "score", "--group", "arm"),
         ("participant 'A0'", "3 rows in 'A'", "aggregate", "--independent-rows")),
    Case("balanced_factorial", balanced_factorial(), ("--outcome", "y", "--group", "drug"),
         ("'dose'", "crossed with 'drug'", "6 each", "factorial", "--one-factor")),
    Case("factorial_by_an_allocation_column", factorial_named_as_allocation(),
         ("--outcome", "y", "--group", "sex"),
         ("'treatment'", "crossed with 'sex'", "factorial")),
    Case("mixed_design_long", mixed_long(),
         ("--outcome", "score", "--group", "time", "--subject", "subject"),
         ("'arm'", "mixed design", "6, 6 participants", "change")),
    Case("mixed_design_wide", mixed_wide(), ("--paired", "pre,post", "--subject", "subject"),
         ("'arm'", "mixed design", "condition columns")),
    Case("long_file_with_every_id_once", long_with_unique_ids(),
         ("--outcome", "score", "--group", "time", "--subject", "id"),
         ("appears on one row only", "leave out --subject")),
    Case("two_rows_of_a_participant_in_one_condition", duplicate_row_per_condition(),
         ("--outcome", "score", "--group", "time", "--subject", "id"),
         ("'P01' has two rows for 'pre'",)),
    Case("a_participant_on_two_rows_of_a_wide_file", wide_duplicate_subject(),
         ("--paired", "before,after", "--subject", "subject"), ("'P03'", "one row")),
]


@pytest.mark.parametrize("case", CATALOGUE, ids=lambda c: c.id)
def test_an_uncovered_design_stops_in_one_line_and_writes_nothing(case, run_cli, write_file,
                                                                  tmp_path):
    path = write_file(f"{case.id}.csv", case.text)
    out, doc = tmp_path / "report", tmp_path / "audit.json"
    res = run_cli("check", path, *case.options, "--boot", "200", "--out", out, "--json", doc)
    one_line_error(res, *case.needles)
    assert not out.exists() and not doc.exists()


@pytest.mark.parametrize("case", [c for c in CATALOGUE if "--paired" not in c.options][:6],
                         ids=lambda c: c.id)
def test_the_screen_stops_on_the_same_files_before_any_outcome(case, run_cli, write_file,
                                                               tmp_path):
    options = list(case.options)
    k = options.index("--outcome")
    del options[k:k + 2]  # the screen takes every numeric outcome
    path = write_file(f"{case.id}.csv", case.text)
    res = run_cli("screen", path, *options, "--boot", "200", "--out", tmp_path / "screen")
    one_line_error(res, path.name, case.needles[0])
    assert not (tmp_path / "screen").exists()


# ------------------------------------------------------------------ covered designs pass


def _covariate_file():
    v = _values(30)
    sex = ["F", "M", "F", "F", "M"] * 6  # unbalanced within the arms: a covariate
    site = ["north"] * 11 + ["south"] * 19
    rows = [(f"R{i:02d}", "coached" if i < 15 else "usual", sex[i], site[i], 30 + i, v[i])
            for i in range(30)]
    return _csv(("rider_id", "arm", "sex", "site", "age", "score"), rows)


def test_covariates_and_unique_ids_do_not_stop_the_audit(run_cli, write_file, strict_json):
    path = write_file("covariates.csv", _covariate_file())
    res = run_cli("check", path, "--outcome", "score", "--group", "arm", "--boot", "200",
                  "--json", "-", "--quiet")
    assert res.code == 0, res.err
    assert not any("design check" in w for w in strict_json(res.out)["warnings"])


def test_a_wide_paired_file_with_its_ids_passes(run_cli, write_file):
    v = _values(20)
    path = write_file("wide.csv", _csv(("subject", "before", "after"),
                                       [(f"P{i:02d}", v[i], v[10 + i]) for i in range(10)]))
    res = run_cli("check", path, "--paired", "before,after", "--subject", "subject", "--boot",
                  "200", "--quiet")
    assert res.code == 0, res.err


@pytest.mark.parametrize("case_id, flag", [("balanced_factorial", "--one-factor"),
                                           ("several_rows_of_one_participant_in_a_group",
                                            "--independent-rows"),
                                           ("mixed_design_long", "--one-factor")])
def test_a_stated_override_lets_the_audit_on_and_records_it(case_id, flag, run_cli, write_file,
                                                            strict_json):
    case = next(c for c in CATALOGUE if c.id == case_id)
    path = write_file(f"{case.id}.csv", case.text)
    res = run_cli("check", path, *case.options, "--boot", "200", "--json", "-", "--quiet", flag)
    assert res.code == 0, res.err
    notes = [w for w in strict_json(res.out)["warnings"] if "design check" in w]
    assert len(notes) == 1 and flag in notes[0] and case.needles[0] in notes[0]


def test_an_override_on_the_screen_is_recorded_in_its_document(run_cli, write_file, tmp_path):
    path = write_file("factorial.csv", balanced_factorial())
    res = run_cli("screen", path, "--group", "drug", "--boot", "200", "--out", tmp_path / "s",
                  "--quiet", "--one-factor")
    assert res.code == 0, res.err
    document = json.loads((tmp_path / "s" / "screen.json").read_text(encoding="utf-8"))
    assert len(document["design_notes"]) == 1 and "'dose'" in document["design_notes"][0]
    assert "--one-factor" in (tmp_path / "s" / "screen.html").read_text(encoding="utf-8")


def test_an_unknown_override_is_refused_in_python():
    import pandas as pd

    from auditor.errors import DesignError
    from auditor.pipeline import audit

    frame = pd.read_csv(io.StringIO(balanced_factorial()))
    with pytest.raises(DesignError, match="override 'two_factors'"):
        audit(frame, outcome="y", group="drug", overrides=["two_factors"])
    result = audit(frame, outcome="y", group="drug", overrides=["one_factor"], resamples=200)
    assert any("'dose'" in w for w in result.warnings)


def test_a_large_table_is_checked_on_its_id_columns_only(monkeypatch):
    """Above MAX_CELLS_READ cells in the other columns the check reads only the id-named ones:
    a repeated participant still stops the audit, a crossed factor is no longer looked at."""
    import pandas as pd

    import auditor.guard as guard
    from auditor.errors import DesignError
    from auditor.pipeline import audit

    monkeypatch.setattr(guard, "MAX_CELLS_READ", 10)
    factorial = pd.read_csv(io.StringIO(balanced_factorial()))
    result = audit(factorial, outcome="y", group="drug", resamples=200)
    assert not any("design check" in w for w in result.warnings)
    repeated = pd.read_csv(io.StringIO(several_rows_within_a_group()))
    with pytest.raises(DesignError, match="participant 'A0'"):
        audit(repeated, outcome="score", group="arm", resamples=200)
