"""`auditor screen` and `auditor.screen`: one summary row per outcome, written as CSV, strict JSON
and a self-contained sortable HTML page; per-outcome seeds, identical serial and parallel runs,
rows that agree with single `auditor check` audits, Holm and Benjamini-Hochberg adjustments,
sorting, selection of outcomes, per-outcome reports and the Python API."""

from __future__ import annotations

import csv
import io
import re
import warnings
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from auditor.cli import main
from auditor.effects import two_group_effects
from auditor.policy import default_policy
from auditor.adjust import benjamini_hochberg, holm
from auditor.screen import (FIELDS, MULTIPLE_OUTCOMES_NOTE, SORT_KEYS,
                            outcome_seed, screen)
from cli_checks import one_line_error as _one_line_error

pytestmark = pytest.mark.slow  # `make check` leaves these out: whole screens are run end to end

DEMO = Path(__file__).resolve().parents[1] / "demo" / "cycling_commute.csv"
DEMO_ARGS = ("--group", "scheme", "--groups", "buddy,solo")
BOOT = 200
SEED = default_policy().value("bootstrap", "seed")
HOSTILE = ("<script>alert(1)</script>", 'A & B "quoted"')
NULL_VALUE = {spec.name: spec.null_value for spec in two_group_effects()}


# ------------------------------------------------------------------ helpers


def _csv_text(header, rows) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return buffer.getvalue()


def _two_groups(columns: dict, labels=("A", "B"), n: int = 30, group: str = "g"):
    """Header and rows of a two-group file: `columns` maps a name to a function
    (group index, row index within the group, rng) -> cell."""
    rng = np.random.default_rng(7)
    rows = []
    for k, label in enumerate(labels):
        for i in range(n):
            rows.append([label] + [make(k, i, rng) for make in columns.values()])
    return [group, *columns], rows


def _normal(shift_a: float = 0.0, scale: float = 1.0):
    return lambda k, i, rng: f"{rng.normal(shift_a if k == 0 else 0.0, scale):.3f}"


def _rating(shift_a: float = 0.0):
    return lambda k, i, rng: str(int(np.clip(np.round(rng.normal(4 + (shift_a if k == 0 else 0),
                                                                   1.3)), 1, 7)))


def _only_one_in_a(k, i, rng):
    return f"{rng.normal():.3f}" if k == 1 or i == 0 else ""


def _all_missing_in_a(k, i, rng):
    return "NA" if k == 0 else f"{rng.normal():.3f}"


SORT_COLUMNS = {
    "no_effect": _normal(0.0),
    "large_up": _normal(1.6),
    "small_up": _normal(0.45),
    "large_down": _normal(-1.1, 1.4),
    "rating": _rating(1.0),
    "broken": _only_one_in_a,
}


def _screen(run_cli, path, out, *extra, group="g"):
    res = run_cli("screen", path, "--group", group, "--out", out, "--boot", BOOT, "--quiet",
                  *extra)
    assert res.code == 0, res.err
    assert "Traceback" not in res.err
    return res


def _rows_csv(folder) -> list[dict]:
    with (Path(folder) / "screen.csv").open(encoding="utf-8", newline="") as f:
        return list(csv.DictReader(f))


def _document(folder, strict_json) -> dict:
    return strict_json((Path(folder) / "screen.json").read_text(encoding="utf-8"))


def _numeric_share_columns(path: Path, skip: set[str]) -> list[str]:
    """Columns of which at least half of the filled cells are numbers (read with pandas)."""
    frame = pd.read_csv(path, dtype=str, keep_default_na=False)
    chosen = []
    for column in frame.columns:
        if column in skip:
            continue
        cells = frame[column].str.strip()
        filled = cells[(cells != "") & (~cells.str.lower().isin({"na", "nan"}))]
        numbers = pd.to_numeric(filled, errors="coerce").notna()
        if len(filled) and numbers.mean() >= 0.5:
            chosen.append(column)
    return chosen


class _Page(HTMLParser):
    """Start tags, attribute values and text of an HTML page."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags, self.attributes, self.text = [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attributes += [(tag, name, value or "") for name, value in attrs]

    def handle_data(self, data):
        self.text.append(data)


def _parse(html_text: str) -> _Page:
    page = _Page()
    page.feed(html_text)
    page.close()
    return page


def _links(html_text: str) -> list[str]:
    return [value for _, name, value in _parse(html_text).attributes if name in ("src", "href")]


# ------------------------------------------------------------------ the demo file


@pytest.fixture(scope="module")
def demo_screen(tmp_path_factory):
    """The demo screened once (serially) for the tests that only read its outputs."""
    out = tmp_path_factory.mktemp("demo_screen")
    assert main(["screen", str(DEMO), *DEMO_ARGS, "--out", str(out), "--boot", str(BOOT),
                 "--quiet"]) == 0
    return out


def test_the_demo_screen_writes_three_files_with_a_row_per_numeric_column(run_cli, tmp_path):
    res = run_cli("screen", DEMO, *DEMO_ARGS, "--out", tmp_path, "--boot", BOOT)
    assert res.code == 0, res.err
    assert "Traceback" not in res.err
    for name in ("screen.csv", "screen.json", "screen.html"):
        assert (tmp_path / name).is_file(), name
    assert not (tmp_path / "screen.rows.jsonl").exists()  # the spool is removed
    rows = _rows_csv(tmp_path)
    expected = _numeric_share_columns(DEMO, {"scheme"})
    assert [r["outcome"] for r in rows] == expected
    assert len(rows) == 6 and {"rider_id", "route_type"}.isdisjoint(expected)
    assert all(r["status"] == "audited" for r in rows)
    with (tmp_path / "screen.csv").open(encoding="utf-8", newline="") as f:
        assert next(csv.reader(f)) == [*FIELDS, "report"]
    # the summary names every skipped text column with its reason, and warns about the family
    for column in ("rider_id", "route_type"):
        line = next(line for line in res.out.splitlines() if f"'{column}'" in line)
        assert "not numeric" in line
    assert "false positives" in res.out
    assert f"{len(rows)} outcome(s) screened; 2 column(s) skipped" in res.out


def test_the_demo_json_is_strict_and_holds_policy_note_skipped_columns_and_rows(demo_screen,
                                                                                strict_json):
    doc = _document(demo_screen, strict_json)
    assert doc["policy"] == default_policy().stamp()
    assert re.fullmatch(r"[0-9a-f]{64}", doc["policy"]["sha256"])
    assert doc["seed"] == SEED and doc["sorted_by"] == "column"
    assert doc["note"] == MULTIPLE_OUTCOMES_NOTE and "false positives" in doc["note"]
    skipped = {s["column"]: s["reason"] for s in doc["skipped"]}
    assert set(skipped) == {"rider_id", "route_type"}
    assert all(reason.startswith("not numeric") for reason in skipped.values())
    csv_rows = _rows_csv(demo_screen)
    assert [r["outcome"] for r in doc["rows"]] == [r["outcome"] for r in csv_rows]
    for row, text_row in zip(doc["rows"], csv_rows):
        assert set(FIELDS) <= set(row)
        assert row["seed"] == outcome_seed(SEED, row["outcome"])
        for key in ("estimate", "ci_low", "ci_high", "p", "p_holm", "p_bh"):
            assert float(text_row[key]) == row[key], key  # the CSV holds the same numbers
        assert row["ci_low"] <= row["estimate"] <= row["ci_high"]
        assert 0 <= row["p"] <= row["p_bh"] <= row["p_holm"] <= 1


def test_the_demo_html_loads_nothing_from_outside(demo_screen):
    page = (demo_screen / "screen.html").read_text(encoding="utf-8")
    assert "http:" not in page and "https:" not in page
    for link in _links(page):
        assert "//" not in link, link
    assert "<link" not in page and "@import" not in page and "url(" not in page
    parsed = _parse(page)
    assert parsed.tags.count("tr") == 1 + 6  # heading row and one per outcome
    assert MULTIPLE_OUTCOMES_NOTE in "".join(parsed.text)


def test_the_html_escapes_column_names_group_labels_and_cells(run_cli, write_file, tmp_path,
                                                              strict_json):
    header, rows = _two_groups({HOSTILE[0]: _normal(0.8), HOSTILE[1]: _normal(0.0),
                                "comment": lambda k, i, rng: HOSTILE[0]}, labels=HOSTILE)
    path = write_file("hostile.csv", _csv_text(header, rows))
    _screen(run_cli, path, tmp_path / "out")
    page = (tmp_path / "out" / "screen.html").read_text(encoding="utf-8")
    parsed = _parse(page)
    # the only script is the page's own sorting code, and no tag came from the data
    assert page.count("<script") == 1 and parsed.tags.count("script") == 1
    assert set(parsed.tags) <= {"html", "head", "meta", "title", "style", "body", "h1", "p", "ul",
                                "li", "table", "thead", "tbody", "tr", "th", "td", "a", "script"}
    assert HOSTILE[1] not in page and "A &amp; B &quot;quoted&quot;" in page
    text = "".join(parsed.text)
    for label in HOSTILE:  # shown as text, as written
        assert label in text
        assert f"{label}: 30" in text  # the group sizes
    assert "comment" in text and "not numeric" in text  # the skipped column and its reason
    doc = _document(tmp_path / "out", strict_json)
    assert [r["outcome"] for r in doc["rows"]] == list(HOSTILE)
    assert [r["outcome"] for r in _rows_csv(tmp_path / "out")] == list(HOSTILE)


# ------------------------------------------------------------------ rows that cannot be audited


def test_an_outcome_that_cannot_be_audited_is_a_row_with_its_reason(run_cli, write_file,
                                                                    tmp_path, strict_json):
    header, rows = _two_groups({"fine": _normal(0.9), "one_value_in_a": _only_one_in_a,
                                "empty_in_a": _all_missing_in_a, "also_fine": _normal(0.2)})
    path = write_file("broken.csv", _csv_text(header, rows))
    res = _screen(run_cli, path, tmp_path)
    assert res.out == ""  # --quiet
    by_name = {r["outcome"]: r for r in _document(tmp_path, strict_json)["rows"]}
    assert list(by_name) == ["fine", "one_value_in_a", "empty_in_a", "also_fine"]
    for name in ("one_value_in_a", "empty_in_a"):
        row = by_name[name]
        assert row["status"] == "not audited"
        assert "'A'" in row["reason"] and name in row["reason"]
        assert all(row[k] is None for k in ("estimate", "ci_low", "p", "p_holm", "p_bh"))
        assert row["seed"] == outcome_seed(SEED, name)
    assert "1 valid value" in by_name["one_value_in_a"]["reason"]
    assert "0 valid value" in by_name["empty_in_a"]["reason"]
    # the adjustments count only the two audited outcomes
    audited = [by_name["fine"], by_name["also_fine"]]
    assert all(r["status"] == "audited" and r["reason"] is None for r in audited)
    low, high = sorted(audited, key=lambda r: r["p"])
    assert low["p_holm"] == pytest.approx(min(1.0, 2 * low["p"]), rel=1e-12)
    assert low["p_bh"] == pytest.approx(min(1.0, 2 * low["p"], high["p"]), rel=1e-12)
    page = (tmp_path / "screen.html").read_text(encoding="utf-8")
    assert "not audited: " in page


# ------------------------------------------------------------------ reproducibility


def test_serial_and_parallel_runs_write_the_same_bytes(run_cli, demo_screen, tmp_path):
    _screen(run_cli, DEMO, tmp_path, *DEMO_ARGS[2:], "--jobs", 2, group=DEMO_ARGS[1])
    for name in ("screen.csv", "screen.json", "screen.html"):
        assert (tmp_path / name).read_bytes() == (demo_screen / name).read_bytes(), name


def test_adding_a_column_changes_no_other_row(run_cli, write_file, tmp_path, strict_json):
    columns = {"first": _normal(0.5), "second": _rating(0.7), "third": _normal(0.0, 2.0)}
    header, rows = _two_groups(columns)
    base = write_file("base.csv", _csv_text(header, rows))
    extra = np.random.default_rng(99).normal(size=len(rows)).round(3)
    wider = write_file("wider.csv", _csv_text(
        [header[0], "added", *header[1:]],
        [[r[0], str(x), *r[1:]] for r, x in zip(rows, extra)]))
    _screen(run_cli, base, tmp_path / "base")
    _screen(run_cli, wider, tmp_path / "wider")
    before = {r["outcome"]: r for r in _document(tmp_path / "base", strict_json)["rows"]}
    after = {r["outcome"]: r for r in _document(tmp_path / "wider", strict_json)["rows"]}
    assert list(after) == ["added", *columns]
    family = ("p_holm", "p_bh")  # adjusted across the outcomes, so they follow the family's size
    for name, row in before.items():
        assert row["seed"] == after[name]["seed"] == outcome_seed(SEED, name)
        assert {k: v for k, v in row.items() if k not in family} == \
            {k: v for k, v in after[name].items() if k not in family}, name
    p_values = [after[name]["p"] for name in after]
    assert [after[name]["p_holm"] for name in after] == holm(p_values)
    assert [after[name]["p_bh"] for name in after] == benjamini_hochberg(p_values)


def test_outcome_seeds_depend_on_the_seed_and_the_name_only():
    assert outcome_seed(1, "a") == outcome_seed(1, "a")
    seeds = {outcome_seed(s, name) for s in (0, 1, 2) for name in ("a", "b", "a ", "A")}
    assert len(seeds) == 12
    assert all(0 <= s < 2**63 for s in seeds)


def test_each_row_equals_the_single_check_audit_of_its_outcome(demo_screen, run_cli,
                                                               strict_json):
    rows = _document(demo_screen, strict_json)["rows"]
    for row in rows:
        name = row["outcome"]
        res = run_cli("check", DEMO, "--outcome", name, *DEMO_ARGS, "--boot", BOOT,
                      "--seed", outcome_seed(SEED, name), "--json", "-", "--quiet")
        assert res.code == 0, res.err
        _assert_row_matches_check(row, strict_json(res.out))


def _assert_row_matches_check(row: dict, single: dict) -> None:
    decision = single["decision"]
    name = row["outcome"]
    assert single["policy"]["sha256"] == default_policy().sha256
    assert single["settings"]["seed"] == row["seed"]
    assert (row["design"], row["branch"], row["primary"]) == \
        (single["design"], decision["branch"], decision["primary"]), name
    assert row["estimate"] == single["effects"][row["primary"]]["estimate"], name
    assert (row["ci_low"], row["ci_high"]) == \
        (decision["interval"]["low"], decision["interval"]["high"]), name
    assert row["test"] == decision["test"]["name"], name
    assert row["statistic"] == decision["test"]["statistic"], name
    assert row["p"] == decision["test"]["p"], name
    assert row["n"] == "; ".join(f"{g['label']}: {g['n']}" for g in single["groups"])
    assert row["excluded_rows"] == len(single["data"]["excluded"])
    influence = single["influence"]["effects"][row["primary"]]
    assert row["fragility"] == influence["fragility_null"]["count"], name
    assert row["most_influential_row"] == influence["most_influential_row"], name


# ------------------------------------------------------------------ multiple testing


def _statsmodels(pvalues, method):
    from statsmodels.stats.multitest import multipletests

    present = [i for i, p in enumerate(pvalues) if p is not None]
    out = [None] * len(pvalues)
    if present:
        adjusted = multipletests([pvalues[i] for i in present], method=method)[1]
        for i, value in zip(present, adjusted):
            out[i] = float(value)
    return out


def _assert_same(ours, theirs):
    assert len(ours) == len(theirs)
    for a, b in zip(ours, theirs):
        assert (a is None) == (b is None)
        if a is not None:
            assert a == pytest.approx(b, rel=1e-12, abs=1e-15)
            assert 0.0 <= a <= 1.0


_P_VALUE = st.one_of(st.none(), st.sampled_from([0.0, 1e-8, 0.01, 0.02, 0.05, 0.3, 0.999, 1.0]),
                     st.floats(0.0, 1.0, allow_nan=False))


@settings(max_examples=100, deadline=None)
@given(st.lists(_P_VALUE, max_size=40))
def test_holm_and_benjamini_hochberg_agree_with_statsmodels(pvalues):
    _assert_same(holm(pvalues), _statsmodels(pvalues, "holm"))
    _assert_same(benjamini_hochberg(pvalues), _statsmodels(pvalues, "fdr_bh"))


def test_holm_and_benjamini_hochberg_on_random_p_values_with_ties_and_gaps():
    rng = np.random.default_rng(11)
    for size in (1, 2, 5, 20, 200):
        raw = rng.uniform(size=size)
        raw[rng.uniform(size=size) < 0.3] = 0.04  # ties
        pvalues = [None if u < 0.2 else float(p) for p, u in zip(raw, rng.uniform(size=size))]
        _assert_same(holm(pvalues), _statsmodels(pvalues, "holm"))
        _assert_same(benjamini_hochberg(pvalues), _statsmodels(pvalues, "fdr_bh"))
    assert holm([None, None]) == [None, None] and benjamini_hochberg([]) == []
    assert holm([0.01, None, 0.04, 0.03]) == pytest.approx([0.03, None, 0.06, 0.06])


# ------------------------------------------------------------------ sorting


@pytest.fixture
def sort_file(write_file):
    return write_file("many.csv", _csv_text(*_two_groups(SORT_COLUMNS)))


def _sorted_rows(run_cli, path, out, key, strict_json):
    _screen(run_cli, path, out, "--sort", key)
    doc = _document(out, strict_json)
    assert doc["sorted_by"] == key
    return doc["rows"]


def _distance(row):
    return abs(row["estimate"] - NULL_VALUE[row["primary"]])


def _assert_ordered(values):
    present = [v for v in values if v is not None]
    assert present == sorted(present)
    assert values == present + [None] * (len(values) - len(present))  # missing values last


def test_sorting_by_p_fragility_and_estimate(run_cli, sort_file, tmp_path, strict_json):
    by_column = _sorted_rows(run_cli, sort_file, tmp_path / "column", "column", strict_json)
    assert [r["outcome"] for r in by_column] == list(SORT_COLUMNS)
    assert {r["primary"] for r in by_column if r["primary"]} >= {"hedges_g", "prob_superiority"}
    same = {r["outcome"]: r for r in by_column}
    for key in ("p", "fragility", "estimate"):
        rows = _sorted_rows(run_cli, sort_file, tmp_path / key, key, strict_json)
        # the same rows (adjusted p-values included), only in another order
        assert sorted(r["outcome"] for r in rows) == sorted(same)
        assert all(r == same[r["outcome"]] for r in rows), key
        if key == "estimate":  # farthest from the no-effect value first
            _assert_ordered([None if r["estimate"] is None else -_distance(r) for r in rows])
        elif key == "fragility":  # real counts first, fewest first; 0 (no finding) and none last
            _assert_ordered([r[key] or None for r in rows])
        else:
            _assert_ordered([r[key] for r in rows])
        assert rows[-1]["outcome"] == "broken"  # not audited: no value, so last
    page = (tmp_path / "p" / "screen.html").read_text(encoding="utf-8")
    by_p = _document(tmp_path / "p", strict_json)["rows"]
    places = [page.index(f">{r['outcome']}</td>") for r in by_p]
    assert places == sorted(places)  # the page lists the rows in the chosen order too


def test_an_unknown_sort_key_stops_with_one_line(run_cli, sort_file, tmp_path):
    res = run_cli("screen", sort_file, "--group", "g", "--out", tmp_path / "out", "--sort",
                  "size")
    _one_line_error(res, "--sort size", *SORT_KEYS)
    assert not (tmp_path / "out").exists()


# ------------------------------------------------------------------ choosing outcomes, reports


def test_named_outcomes_are_audited_in_the_given_order(run_cli, sort_file, tmp_path):
    _screen(run_cli, sort_file, tmp_path, "--outcomes", "rating,no_effect")
    assert [r["outcome"] for r in _rows_csv(tmp_path)] == ["rating", "no_effect"]


def test_excluded_columns_are_left_out_and_listed(run_cli, sort_file, tmp_path, strict_json):
    res = run_cli("screen", sort_file, "--group", "g", "--out", tmp_path, "--boot", BOOT,
                  "--exclude", "large_up,broken")
    assert res.code == 0, res.err
    names = [r["outcome"] for r in _rows_csv(tmp_path)]
    assert names == [c for c in SORT_COLUMNS if c not in ("large_up", "broken")]
    skipped = {s["column"]: s["reason"] for s in _document(tmp_path, strict_json)["skipped"]}
    assert set(skipped) == {"large_up", "broken"}
    assert "--exclude" in skipped["large_up"]
    assert "skipped 'large_up'" in res.out


def test_a_named_outcome_that_does_not_exist_stops_with_one_line(run_cli, sort_file, tmp_path):
    res = run_cli("screen", sort_file, "--group", "g", "--out", tmp_path / "out", "--outcomes",
                  "rating,raiting")
    _one_line_error(res, "'raiting'", "'rating'")
    assert not (tmp_path / "out" / "screen.csv").exists()


def test_reports_are_written_per_outcome_and_linked_relatively(run_cli, write_file, tmp_path,
                                                               strict_json):
    header, rows = _two_groups({"minutes": _normal(0.7), HOSTILE[0]: _rating(0.5),
                                "broken": _only_one_in_a})
    path = write_file("reports.csv", _csv_text(header, rows))
    out = tmp_path / "screen"
    _screen(run_cli, path, out, "--reports")
    page = (out / "screen.html").read_text(encoding="utf-8")
    links = _links(page)
    assert len(links) == 2  # one per audited outcome
    doc = _document(out, strict_json)
    for row in doc["rows"]:
        if row["status"] != "audited":
            assert row.get("report") is None
            continue
        assert f"reports/{row['report']}" in links
    for link in links:
        assert not link.startswith("/") and ":" not in link and ".." not in link
        assert "<" not in link and '"' not in link and "//" not in link
        target = out / link
        assert target.is_file(), link
        assert target.resolve().is_relative_to(out.resolve())
        audit = strict_json((target.parent / "audit.json").read_text(encoding="utf-8"))
        row = next(r for r in doc["rows"] if f"reports/{r['report']}" == link)
        assert audit["outcome"] == row["outcome"]
        assert audit["settings"]["seed"] == row["seed"]
    assert [r["report"] for r in _rows_csv(out)][2] == ""


# ------------------------------------------------------------------ Python API, other designs


def test_the_python_api_returns_a_frame_with_the_fields_and_the_skipped_columns(
        run_cli, tmp_path):
    rng = np.random.default_rng(5)
    frame = pd.DataFrame({
        "arm": ["treated"] * 30 + ["control"] * 30,
        "score": np.round(rng.normal(0.6, 1, 60) - np.repeat([0, 0.6], 30), 3),
        "rating": rng.integers(1, 8, 60),
        "site": ["north"] * 60,
    })
    frame.loc[4, "score"] = np.nan
    table = screen(frame, group="arm", resamples=BOOT)
    assert isinstance(table, pd.DataFrame)
    assert list(table.columns) == list(FIELDS)
    assert list(table["outcome"]) == ["score", "rating"]
    assert (table["status"] == "audited").all()
    assert [c for c, _ in table.attrs["skipped"]] == ["site"]
    assert table.attrs["note"] == MULTIPLE_OUTCOMES_NOTE
    assert table.loc[0, "excluded_rows"] == 1
    # the same numbers as the command line on the same data written to a file
    path = tmp_path / "frame.csv"
    frame.to_csv(path, index=False)
    _screen(run_cli, path, tmp_path / "cli", group="arm")
    for api_row, cli_row in zip(table.to_dict("records"), _rows_csv(tmp_path / "cli")):
        for key in ("seed", "estimate", "ci_low", "ci_high", "p", "p_holm"):
            assert cli_row[key] == str(api_row[key]), key


def test_a_paired_long_file_screens_and_matches_the_single_audits(run_cli, write_file, tmp_path,
                                                                  strict_json):
    rng = np.random.default_rng(8)
    rows = []
    for i in range(25):
        level, spread = rng.normal(), rng.lognormal()
        for condition, shift in (("pre", 0.0), ("post", 0.4)):
            rows.append([f"P{i:02d}", condition, f"{level + shift + rng.normal(0, 0.5):.3f}",
                         f"{spread * rng.lognormal(shift):.3f}", "ok"])
    path = write_file("long.csv", _csv_text(["id", "condition", "score", "seconds", "note"], rows))
    _screen(run_cli, path, tmp_path, "--subject", "id", "--groups", "pre,post",
            group="condition")
    doc = _document(tmp_path, strict_json)
    assert [r["outcome"] for r in doc["rows"]] == ["score", "seconds"]
    assert [s["column"] for s in doc["skipped"]] == ["note"]  # the subject column is not one
    for row in doc["rows"]:
        assert row["status"] == "audited" and row["design"] == "paired"
        res = run_cli("check", path, "--outcome", row["outcome"], "--group", "condition",
                      "--groups", "pre,post", "--subject", "id", "--boot", BOOT,
                      "--seed", row["seed"], "--json", "-", "--quiet")
        assert res.code == 0, res.err
        _assert_row_matches_check(row, strict_json(res.out))


# ------------------------------------------------------------------ errors


@pytest.mark.parametrize("extra, needles", [
    (("--sort", "bogus"), ("--sort bogus",)),
    (("--outcomes", "missing_one"), ("'missing_one'",)),
    (("--jobs", "0"), ("--jobs 0",)),
    (("--policy", "no_such_policy.toml"), ("no_such_policy.toml",)),
    (("--subject", "nobody"), ("'nobody'",)),
])
def test_errors_stop_with_one_line_and_no_traceback(run_cli, sort_file, tmp_path, extra, needles):
    res = run_cli("screen", sort_file, "--group", "g", "--out", tmp_path / "out", *extra)
    _one_line_error(res, *needles)


def test_a_missing_file_or_group_column_stops_with_one_line(run_cli, sort_file, tmp_path):
    _one_line_error(run_cli("screen", tmp_path / "absent.csv", "--group", "g", "--out", tmp_path),
                    "absent.csv")
    _one_line_error(run_cli("screen", sort_file, "--group", "arm", "--out", tmp_path), "'arm'")
    res = run_cli("screen", sort_file, "--out", tmp_path)  # --group is required
    assert res.code == 2 and "--group" in res.err and "Traceback" not in res.err


# ------------------------------------------------------------------ settings checked once


@pytest.mark.parametrize("extra,needle", [
    (("--boot", "5"), "bootstrap resamples 5"),
    (("--level", "2"), "confidence level 2"),
    (("--seed", "-1"), "seed -1"),
    (("--groups", "A,Z"), "no level 'Z'"),
    (("--exclude", "nosuch"), "--exclude names no column 'nosuch'"),
])
def test_bad_settings_stop_the_screen_before_any_outcome(run_cli, tmp_path, extra, needle):
    path = tmp_path / "d.csv"
    rows = ["g,y,z"] + [f"{'AB'[i % 2]},{i},{i * 2}" for i in range(40)]
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    res = run_cli("screen", path, "--group", "g", "--out", tmp_path / "out", *extra)
    _one_line_error(res, needle)


def test_outcomes_whose_names_map_to_one_folder_get_their_own_reports(run_cli, tmp_path):
    path = tmp_path / "d.csv"
    rows = ["g,a b,a_b"] + [f"{'AB'[i % 2]},{i},{40 - i}" for i in range(40)]
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    _screen(run_cli, path, tmp_path / "out", "--reports")
    links = {r["outcome"]: r["report"] for r in _rows_csv(tmp_path / "out")}
    assert links == {"a b": "a_b/report.html", "a_b": "a_b-2/report.html"}
    for link in links.values():
        assert (tmp_path / "out" / "reports" / link).is_file()


def test_the_api_accepts_column_labels_that_are_not_text():
    import pandas as pd

    from auditor.screen import screen

    frame = pd.DataFrame({"g": ["A", "B"] * 20, 0: np.arange(40.0), 1: np.arange(40.0)[::-1]})
    table = screen(frame, group="g", resamples=BOOT)
    assert list(table["outcome"]) == ["0", "1"] and set(table["status"]) == {"audited"}


# ------------------------------------------------------------------ the screen's scope


def _bootstrap_policy():
    """The default policy quoting BCa bootstrap intervals for every index."""
    from auditor.policy import default_text, parse_policy

    text = default_text().replace('method = "analytic"', 'method = "bootstrap"', 1)
    assert 'method = "bootstrap"' in text
    return parse_policy(text, "bootstrap intervals")


def _glass_policy():
    """Every two-group branch reports Glass's delta, with the mean difference next in line (a
    companion no branch makes primary), and BCa intervals: when the reference group is constant
    the screen must finish the fallback index on its own."""
    from auditor.policy import default_text, parse_policy

    head, rest = default_text().split("[two_groups]", 1)
    section, tail = rest.split("[paired]", 1)
    lines = []
    for line in section.splitlines():
        name = line.split("=", 1)[0].strip()
        if line.lstrip().startswith(name) and "= { primary" in line:
            line = (f'{name} = {{ primary = "glass_delta", also = ["mean_difference",'
                    f' "cohen_d"], test = "welch_t" }}')
        lines.append(line)
    text = head + "[two_groups]" + "\n".join(lines) + "\n[paired]" + tail
    text = text.replace('method = "analytic"', 'method = "bootstrap"', 1)
    return parse_policy(text, "glass first")


def _scope_frames():
    rng = np.random.default_rng(2026)
    n = 40
    two = {
        "normal shift": np.r_[rng.normal(0.6, 1, n), rng.normal(0, 1, n)],
        "lognormal": np.r_[rng.lognormal(0.4, 0.9, n), rng.lognormal(0, 0.9, n)],
        "ratings": np.r_[np.clip(np.round(rng.normal(4.6, 1.3, n)), 1, 7),
                         np.clip(np.round(rng.normal(4, 1.3, n)), 1, 7)],
        "one extreme case": np.r_[rng.normal(0.3, 1, n - 1), 14.0, rng.normal(0, 1, n)],
        "wider second group": np.r_[rng.normal(0.5, 1, n), rng.normal(0, 3, n)],
        "small groups": np.r_[rng.normal(1, 1, 6), rng.normal(0, 1, 6)],
        "constant second group": np.r_[rng.normal(0.5, 1, n), np.full(n, 0.25)],
    }
    frames = []
    for name, y in two.items():
        half = y.size // 2
        frames.append((name, pd.DataFrame({"g": ["A"] * half + ["B"] * half, "y": y}),
                       dict(outcome="y", group="g")))
    k = pd.DataFrame({"g": np.repeat(["a", "b", "c"], 25),
                      "y": np.r_[rng.normal(0, 1, 25), rng.lognormal(0, 1, 25),
                                 rng.normal(0.7, 1, 25)]})
    frames.append(("three groups", k, dict(outcome="y", group="g")))
    shift = np.repeat([0.0, 0.4, 0.8], 20)
    long = pd.DataFrame({"id": np.tile(np.arange(20), 3), "t": np.repeat(["t1", "t2", "t3"], 20),
                         "y": rng.normal(0, 1, 60) + shift})
    frames.append(("three conditions", long, dict(outcome="y", group="t", subject="id")))
    frames.append(("two conditions", long[long.t != "t3"], dict(outcome="y", group="t",
                                                                 subject="id")))
    wide = pd.DataFrame({"before": rng.lognormal(0, 1, 30), "after": rng.lognormal(0.4, 1, 30)})
    frames.append(("wide pairs", wide, dict(paired_columns=["before", "after"])))
    return frames


@pytest.mark.parametrize("policy_name", ["default", "bootstrap", "glass"])
def test_the_screen_scope_gives_the_rows_of_the_full_audit(policy_name):
    """The screen audits each outcome in the 'screen' scope (bootstrap intervals and influence
    only where its row looks); every row must equal the one built from the full audit."""
    from auditor.pipeline import audit
    from auditor.screen import summary_row

    policy = {"default": default_policy(), "bootstrap": _bootstrap_policy(),
              "glass": _glass_policy()}[policy_name]
    fallbacks = 0
    for name, frame, args in _scope_frames():
        kwargs = dict(args, policy=policy, seed=11, resamples=BOOT)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # undefined indices of the constant group
            full = audit(frame, **kwargs)
            lean = audit(frame, scope="screen", **kwargs)
        assert lean.settings.scope == "screen" and full.settings.scope == "full"
        assert summary_row(lean, 1, policy) == summary_row(full, 1, policy), (policy_name, name)
        assert lean.decision.primary == full.decision.primary
        fallbacks += bool(lean.decision.notes)
        for effect in lean.effects:  # what the screen computed, the full audit computed alike
            assert set(effect.intervals) <= set(full.effect(effect.name).intervals), name
            assert effect.estimate == full.effect(effect.name).estimate, name
    if policy_name == "glass":
        assert fallbacks >= 1  # the constant reference group left Glass's delta undefined


def test_the_screen_scope_skips_what_no_row_shows():
    from auditor.pipeline import SCREENED_OUT, audit

    name, frame, args = _scope_frames()[0]
    lean = audit(frame, scope="screen", seed=3, resamples=BOOT, **args)
    searched = [e.effect for e in lean.influence.effects if e.fragility_null.step_limit]
    assert searched == [lean.decision.primary]
    assert {e.effect for e in lean.influence.effects} <= {"cohen_d", lean.decision.primary}
    robust = lean.effect("robust_d")  # no analytic interval, and no row shows it
    assert robust.estimate is not None and robust.ci_low is None and SCREENED_OUT in robust.notes
    assert lean.decision.rationale == ""
    three = next(f for f in _scope_frames() if f[0] == "three groups")
    lean_k = audit(three[1], scope="screen", seed=3, resamples=BOOT, **three[2])
    assert lean_k.pairwise == () and any("pairwise" in n for n in lean_k.warnings)


def test_an_unknown_scope_is_refused():
    from auditor.errors import DesignError
    from auditor.pipeline import audit

    name, frame, args = _scope_frames()[0]
    with pytest.raises(DesignError, match="scope 'quick'"):
        audit(frame, scope="quick", **args)


@pytest.mark.slow
def test_a_thousand_column_file_is_screened_into_the_three_outputs(run_cli, write_file, tmp_path,
                                                                   strict_json):
    """1,000 outcome columns (four shapes in turn) of two groups of 12, two worker processes."""
    rng = np.random.default_rng(1000)
    n, width = 12, 1000
    names = [f"m{j:04d}" for j in range(width)]
    shapes = [rng.normal(0.5, 1, (2 * n, width)), rng.lognormal(0, 1, (2 * n, width)),
              np.round(rng.uniform(1, 7, (2 * n, width))), rng.normal(0, 1, (2 * n, width))]
    cells = np.where(np.arange(width) % 4 == 0, shapes[0],
                     np.where(np.arange(width) % 4 == 1, shapes[1],
                              np.where(np.arange(width) % 4 == 2, shapes[2], shapes[3])))
    rows = [[("A" if i < n else "B")] + [f"{v:.3f}" for v in cells[i]] for i in range(2 * n)]
    path = write_file("wide.csv", _csv_text(["g", *names], rows))
    out = tmp_path / "wide"
    _screen(run_cli, path, out, "--jobs", "2")
    assert {p.name for p in out.iterdir()} == {"screen.csv", "screen.json", "screen.html"}
    document = _document(out, strict_json)
    assert [r["outcome"] for r in document["rows"]] == names
    assert all(r["status"] == "audited" for r in document["rows"])
    assert [r["outcome"] for r in _rows_csv(out)] == names
    page = (out / "screen.html").read_text(encoding="utf-8")
    assert all(f">{name}<" in page for name in names[:: 97])


# ------------------------------------------------------------------ batches


def test_batches_are_bounded_in_columns_and_cells_and_feed_every_job():
    from auditor.screen import BATCH_CELLS, BATCH_OUTCOMES, batches

    names = [f"c{i}" for i in range(1000)]
    serial = batches(names, 400, 1)
    assert [n for part in serial for n in part] == names
    assert max(len(p) for p in serial) == BATCH_OUTCOMES
    tall = batches(names, BATCH_CELLS // 3, 1)  # a tall file: three columns' cells per batch
    assert max(len(p) for p in tall) == 3
    assert max(len(p) for p in batches(names, 10 * BATCH_CELLS, 1)) == 1
    few = batches(names[:24], 400, 2)
    assert len(few) >= 8 and [n for part in few for n in part] == names[:24]
    assert batches([], 400, 2) == []


def test_small_batches_give_the_rows_and_skips_of_one_batch(run_cli, write_file, tmp_path,
                                                            strict_json, monkeypatch):
    import auditor.screen as screen_module

    columns = dict(SORT_COLUMNS)
    columns["words"] = lambda k, i, rng: "some text"
    columns["later"] = _normal(0.3)
    path = write_file("mixed.csv", _csv_text(*_two_groups(columns)))
    _screen(run_cli, path, tmp_path / "one")
    asked = []
    real_read = screen_module.read_table

    def recording_read(source, names):
        asked.append(list(names))
        return real_read(source, names)

    monkeypatch.setattr(screen_module, "BATCH_OUTCOMES", 2)
    monkeypatch.setattr(screen_module, "read_table", recording_read)
    _screen(run_cli, path, tmp_path / "twos")
    assert (tmp_path / "one" / "screen.json").read_bytes() == \
        (tmp_path / "twos" / "screen.json").read_bytes()
    skipped = _document(tmp_path / "twos", strict_json)["skipped"]
    assert [(s["column"], s["reason"][:11]) for s in skipped] == [("words", "not numeric")]
    # the file is read for the grouping first, once for the design check (every other column:
    # they hold fewer cells than a batch), then for two outcome columns at a time
    assert asked[0] == ["g"] and asked[1] == ["g", *columns]
    assert all(len(a) <= 3 and a[0] == "g" for a in asked[2:])
    assert [n for a in asked[2:] for n in a[1:]] == list(columns)


def test_a_file_that_changes_during_the_screen_stops_it_with_one_line(run_cli, write_file,
                                                                       tmp_path, monkeypatch):
    import auditor.screen as screen_module

    path = write_file("changing.csv", _csv_text(*_two_groups(SORT_COLUMNS)))
    real_read = screen_module.read_table
    reads = []

    def read_then_edit(source, names):
        found = real_read(source, names)
        reads.append(names)
        if len(reads) == 2:  # after the first batch, someone saves the file again
            with open(path, "a", encoding="utf-8") as f:
                f.write("A,1,2,3,4,5,6\n")
        return found

    monkeypatch.setattr(screen_module, "BATCH_OUTCOMES", 2)
    monkeypatch.setattr(screen_module, "read_table", read_then_edit)
    res = run_cli("screen", path, "--group", "g", "--out", tmp_path / "out", "--boot", BOOT,
                  "--quiet")
    _one_line_error(res, "changing.csv", "changed", "during the screen")
    assert not (tmp_path / "out" / "screen.csv").exists()


def test_a_workbook_is_read_once_and_screened_like_its_csv(run_cli, write_file, tmp_path,
                                                           strict_json, monkeypatch):
    import openpyxl

    import auditor.screen as screen_module

    header, rows = _two_groups(SORT_COLUMNS)
    csv_path = write_file("many.csv", _csv_text(header, rows))
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(header)
    for row in rows:
        sheet.append([row[0]] + [float(c) if c not in ("", "NA") else c for c in row[1:]])
    book.save(tmp_path / "many.xlsx")
    reads = []
    real_read = screen_module.read_table
    monkeypatch.setattr(screen_module, "BATCH_OUTCOMES", 2)
    monkeypatch.setattr(screen_module, "read_table",
                        lambda source, names: reads.append(names) or real_read(source, names))
    _screen(run_cli, tmp_path / "many.xlsx", tmp_path / "book")
    assert len(reads) == 2  # the header, then every column once
    _screen(run_cli, csv_path, tmp_path / "text")
    book_rows = _document(tmp_path / "book", strict_json)["rows"]
    text_rows = _document(tmp_path / "text", strict_json)["rows"]
    assert len(book_rows) == len(text_rows) == len(SORT_COLUMNS)
    for mine, theirs in zip(book_rows, text_rows):
        assert (mine["outcome"], mine["estimate"], mine["p"]) == \
            (theirs["outcome"], theirs["estimate"], theirs["p"])


def test_skipped_columns_keep_the_order_of_the_named_outcomes(run_cli, write_file, tmp_path,
                                                              strict_json):
    columns = {"b_text": lambda k, i, rng: "words", "a_normal": _normal(0.5),
               "e_empty": lambda k, i, rng: ""}
    path = write_file("order.csv", _csv_text(*_two_groups(columns)))
    _screen(run_cli, path, tmp_path, "--outcomes", "b_text,g,a_normal,e_empty")
    skipped = [s["column"] for s in _document(tmp_path, strict_json)["skipped"]]
    assert skipped == ["b_text", "g", "e_empty"]


def test_a_serial_screen_reports_progress_after_every_column(write_file, tmp_path):
    from auditor.screen import run_screen

    columns = dict(SORT_COLUMNS)
    columns["words"] = lambda k, i, rng: "text"
    path = write_file("progress.csv", _csv_text(*_two_groups(columns)))
    seen = []
    run_screen(path, group="g", resamples=BOOT, progress=lambda d, t, c: seen.append((d, t, c)))
    assert seen == [(k + 1, len(columns), c) for k, c in enumerate(columns)]


def test_a_data_frame_screen_sends_each_worker_only_its_batch(monkeypatch):
    import auditor.screen as screen_module

    name, frame, args = _scope_frames()[0]
    wide = pd.concat([frame] + [frame[["y"]].rename(columns={"y": f"y{k}"}) for k in range(5)],
                     axis=1)
    sent = []
    real_results = screen_module._results

    def recording(job, tasks, jobs, each=None):
        sent.extend(sorted(table.columns) for _, _, table in tasks)
        return real_results(job, tasks, jobs, each)

    monkeypatch.setattr(screen_module, "BATCH_OUTCOMES", 2)
    monkeypatch.setattr(screen_module, "_results", recording)
    rows = screen(wide, group="g", resamples=BOOT)
    assert len(rows) == 6 and len(sent) == 3
    assert all(len(columns) == 3 and "g" in columns for columns in sent)


@pytest.mark.parametrize("case", ["modified_z", "many_cases", "paired_fallback"])
def test_the_screen_scope_matches_the_full_audit_in_harder_cases(case):
    """Cases the first scope test leaves out: another outlier rule, more than EXACT_ALL_UNITS
    cases with extreme ones (the nearest-first rechecks), and a paired primary that is undefined
    (constant differences), whose fallback the screen finishes on its own."""
    from auditor.pipeline import audit
    from auditor.policy import default_text, parse_policy
    from auditor.screen import summary_row

    rng = np.random.default_rng(350)
    policy = default_policy()
    if case == "modified_z":
        policy = parse_policy(default_text().replace('rule = "beyond_3_iqr"',
                                                     'rule = "modified_z"', 1), "modified z")
        y = np.r_[rng.normal(0.4, 1, 30), 6.5, rng.normal(0, 1, 31)]
        frame, args = pd.DataFrame({"g": ["A"] * 31 + ["B"] * 31, "y": y}), dict(group="g")
    elif case == "many_cases":
        y = np.r_[rng.normal(0.2, 1, 348), 9.0, -8.0, rng.normal(0, 1, 350)]
        frame, args = pd.DataFrame({"g": ["A"] * 350 + ["B"] * 350, "y": y}), dict(group="g")
    else:
        policy = _bootstrap_policy()
        before = np.round(rng.normal(20, 2, 8), 1)
        frame = pd.DataFrame({"id": np.tile(np.arange(8), 2), "t": ["pre"] * 8 + ["post"] * 8,
                              "y": np.r_[before, before - 0.5]})  # every difference 0.5
        args = dict(group="t", subject="id")
    kwargs = dict(args, outcome="y", policy=policy, seed=5, resamples=BOOT)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        full = audit(frame, **kwargs)
        lean = audit(frame, scope="screen", **kwargs)
    assert summary_row(lean, 1, policy) == summary_row(full, 1, policy)
    if case == "paired_fallback":
        assert lean.decision.notes and "undefined" in lean.decision.notes[0]
    if case == "many_cases":
        assert lean.decision.branch == full.decision.branch


def test_the_design_check_of_a_large_file_reads_only_its_id_columns(run_cli, write_file,
                                                                   tmp_path, monkeypatch):
    import auditor.guard as guard
    import auditor.screen as screen_module

    columns = dict(SORT_COLUMNS)
    columns["participant_id"] = lambda k, i, rng: f"{'AB'[k]}{i}"
    path = write_file("wide.csv", _csv_text(*_two_groups(columns)))
    asked = []
    real_read = screen_module.read_table

    def recording_read(source, names):
        asked.append(list(names))
        return real_read(source, names)

    monkeypatch.setattr(guard, "MAX_CELLS_READ", 100)  # the other columns hold more
    monkeypatch.setattr(screen_module, "read_table", recording_read)
    _screen(run_cli, path, tmp_path / "out")
    assert asked[1] == ["g", "participant_id"]  # the design check's one read
