"""`auditor screen` over many files: several names, folders, patterns and manifests give one
table with a file column. Each row must be the row a screen of its file alone gives (same seed,
same numbers); the adjusted p-values across all rows and within each file are checked against
statsmodels' multipletests. Data are invented (property-style checks of the screen's own
bookkeeping); the statistics themselves are checked against outside references elsewhere."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import numpy as np
import pytest
from statsmodels.stats.multitest import multipletests

from auditor.screen import FIELDS, MANY_FIELDS, run_screen, run_screens
from auditor.sources import expand, read_manifest, sources_from_paths
from cli_checks import one_line_error as _one_line_error

pytestmark = pytest.mark.slow  # `make check` leaves these out: many files are screened end to end

BOOT = 200
FILES = ("screen.csv", "screen.json", "screen.html")


def _data_text(seed: int, n: int = 18, outcomes=("y1", "y2", "y3"), group="arm",
               labels=("treated", "control"), text_column=False) -> str:
    rng = np.random.default_rng(seed)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([group, *outcomes] + (["note"] if text_column else []))
    for k, label in enumerate(labels):
        for i in range(n):
            cells = [f"{rng.normal(0.6 * (k == 0) * (j + 1) / 2, 1.0):.3f}"
                     for j, _ in enumerate(outcomes)]
            writer.writerow([label, *cells] + (["free text"] if text_column else []))
    return buffer.getvalue()


@pytest.fixture
def waves(tmp_path):
    """A folder of three data files (waves of one study), different data in each."""
    folder = tmp_path / "waves"
    folder.mkdir()
    for k in range(3):
        (folder / f"wave{k}.csv").write_text(_data_text(100 + k, text_column=k == 1),
                                             encoding="utf-8")
    (folder / "readme.md").write_text("not data", encoding="utf-8")  # not a data file
    return folder


def _csv_rows(folder) -> list[dict]:
    with (Path(folder) / "screen.csv").open(encoding="utf-8", newline="") as f:
        return list(csv.DictReader(f))


# ------------------------------------------------------------------ one table, same rows


def test_a_folder_gives_one_table_whose_rows_are_each_file_s_own(waves):
    sources = sources_from_paths([str(waves)], group="arm")
    assert [Path(s.path).name for s in sources] == ["wave0.csv", "wave1.csv", "wave2.csv"]
    rows, skipped = run_screens(sources, resamples=BOOT)
    assert [r["file"] for r in rows] == [s.label for s in sources for _ in range(3)]
    assert skipped == [(sources[1].label, "note", skipped[0][2])]
    assert skipped[0][2].startswith("not numeric")
    for source in sources:
        alone, _ = run_screen(source.path, group="arm", resamples=BOOT)
        mine = [r for r in rows if r["file"] == source.label]
        for own, joined in zip(alone, mine, strict=True):
            for field in FIELDS:
                if field in ("p_holm", "p_bh"):
                    continue
                assert joined[field] == own[field], (source.label, field)
            # within the file, the adjustments are the single-file screen's own
            assert joined["p_holm_file"] == own["p_holm"]
            assert joined["p_bh_file"] == own["p_bh"]


def test_adjustments_across_all_rows_and_within_each_file_match_statsmodels(waves):
    rows, _ = run_screens(sources_from_paths([str(waves)], group="arm"), resamples=BOOT)
    p = np.array([r["p"] for r in rows])
    np.testing.assert_allclose([r["p_holm"] for r in rows], multipletests(p, method="holm")[1],
                               rtol=1e-12)
    np.testing.assert_allclose([r["p_bh"] for r in rows],
                               multipletests(p, method="fdr_bh")[1], rtol=1e-12)
    for label in {r["file"] for r in rows}:
        mine = [r for r in rows if r["file"] == label]
        q = np.array([r["p"] for r in mine])
        np.testing.assert_allclose([r["p_holm_file"] for r in mine],
                                   multipletests(q, method="holm")[1], rtol=1e-12)
        np.testing.assert_allclose([r["p_bh_file"] for r in mine],
                                   multipletests(q, method="fdr_bh")[1], rtol=1e-12)


def test_two_workers_write_the_serial_screen_s_files_byte_for_byte(waves, tmp_path):
    sources = sources_from_paths([str(waves)], group="arm")
    written = {}
    for jobs in (1, 2):
        out = tmp_path / f"jobs{jobs}"
        run_screens(sources, resamples=BOOT, jobs=jobs, out=out)
        written[jobs] = {name: (out / name).read_bytes() for name in FILES}
    assert written[1] == written[2]


def test_the_outputs_carry_the_file_column_and_the_files(waves, tmp_path, strict_json):
    out = tmp_path / "out"
    files, _ = run_screens(sources_from_paths([str(waves)], group="arm"), resamples=BOOT,
                           out=out)
    assert files.rows == 9
    header = next(csv.reader(io.StringIO((out / "screen.csv").read_text(encoding="utf-8"))))
    assert header == list(MANY_FIELDS) + ["report"]
    document = strict_json((out / "screen.json").read_text(encoding="utf-8"))
    assert document["files"] == [str(waves / f"wave{k}.csv") for k in range(3)]
    assert document["skipped"][0]["file"] == str(waves / "wave1.csv")
    assert all(set(MANY_FIELDS) <= set(row) for row in document["rows"])
    page = (out / "screen.html").read_text(encoding="utf-8")
    assert "p (Holm, file)" in page and "wave2.csv" in page


def test_sorting_by_outcome_keeps_the_files_in_order_within_a_name(waves):
    rows, _ = run_screens(sources_from_paths([str(waves)], group="arm"), resamples=BOOT,
                          sort="outcome")
    assert [(r["outcome"], Path(r["file"]).name) for r in rows] == [
        (y, f"wave{k}.csv") for y in ("y1", "y2", "y3") for k in range(3)]
    by_p, _ = run_screens(sources_from_paths([str(waves)], group="arm"), resamples=BOOT,
                          sort="p")
    assert [r["p"] for r in by_p] == sorted(r["p"] for r in rows)


# ------------------------------------------------------------------ names, patterns, folders


def test_patterns_and_names_that_meet_screen_each_file_once(waves, monkeypatch):
    monkeypatch.chdir(waves.parent)
    found = expand(["waves/wave1.csv", "waves/wave*.csv", "./waves/wave0.csv"])
    assert found == ["waves/wave1.csv", "waves/wave0.csv", "waves/wave2.csv"]


@pytest.mark.parametrize("name, needle", [
    ("missing/*.csv", "no file matches this pattern"),
    ("missing.csv", "no such file or folder"),
])
def test_a_name_that_stands_for_no_file_is_one_line(run_cli, waves, tmp_path, name, needle):
    res = run_cli("screen", str(waves), name, "--group", "arm", "--out", tmp_path / "o")
    _one_line_error(res, name, needle)
    assert not (tmp_path / "o").exists()


def test_an_empty_folder_is_one_line(run_cli, tmp_path):
    (tmp_path / "empty").mkdir()
    res = run_cli("screen", tmp_path / "empty", "--group", "arm", "--out", tmp_path / "o")
    _one_line_error(res, "holds no data file")


def test_the_command_line_screens_a_folder_and_lists_skipped_columns_by_file(run_cli, waves,
                                                                             tmp_path):
    res = run_cli("screen", waves, "--group", "arm", "--boot", BOOT, "--out", tmp_path / "o")
    assert res.code == 0, res.err
    assert "9 outcome(s) screened; 1 column(s) skipped" in res.out
    assert f"skipped {waves / 'wave1.csv'}: 'note'" in res.out
    assert len(_csv_rows(tmp_path / "o")) == 9


def test_an_output_folder_inside_the_screened_folder_never_overwrites_data(run_cli, waves):
    (waves / "screen.csv").write_text(_data_text(9), encoding="utf-8")  # a data file by that name
    before = (waves / "screen.csv").read_bytes()
    res = run_cli("screen", waves, "--group", "arm", "--boot", BOOT, "--out", waves)
    _one_line_error(res, "screen.csv", "own output files")
    assert (waves / "screen.csv").read_bytes() == before


def _usage_error(res, needle):
    assert res.code == 2 and "Traceback" not in res.err, (res.code, res.err)
    assert needle in res.err.strip().splitlines()[-1], res.err


def test_group_is_required_without_a_manifest(run_cli, waves, tmp_path):
    _usage_error(run_cli("screen", waves, "--out", tmp_path / "o"), "needs --group")
    _usage_error(run_cli("screen", waves / "wave0.csv", "--out", tmp_path / "o"), "needs --group")
    _usage_error(run_cli("screen", "--out", tmp_path / "o"), "needs a data file")
    assert not (tmp_path / "o").exists()


# ------------------------------------------------------------------ manifests


def _manifest(folder: Path, text: str) -> Path:
    path = folder / "manifest.csv"
    path.write_text(text, encoding="utf-8")
    return path


def test_a_manifest_gives_each_file_its_own_options(tmp_path):
    sites = tmp_path / "sites"
    sites.mkdir()
    (sites / "north.csv").write_text(_data_text(1, group="arm"), encoding="utf-8")
    (sites / "south.csv").write_text(_data_text(2, group="allocation", labels=("B", "A")),
                                     encoding="utf-8")
    manifest = _manifest(tmp_path, "file,group,groups,outcomes,exclude\n"
                                   "sites/north.csv,,,\"y1,y3\",\n"
                                   "sites/south.csv,allocation,\"A,B\",,y2\n")
    sources = read_manifest(manifest, group="arm")
    assert [s.label for s in sources] == ["sites/north.csv", "sites/south.csv"]
    rows, skipped = run_screens(sources, resamples=BOOT)
    assert [(r["file"], r["outcome"]) for r in rows] == [
        ("sites/north.csv", "y1"), ("sites/north.csv", "y3"),
        ("sites/south.csv", "y1"), ("sites/south.csv", "y3")]
    assert skipped == [("sites/south.csv", "y2", "excluded with --exclude")]
    alone, _ = run_screen(sites / "south.csv", group="allocation", groups=["A", "B"],
                          exclude=["y2"], resamples=BOOT)
    assert [r["estimate"] for r in rows[2:]] == [r["estimate"] for r in alone]
    assert rows[2]["n"].startswith("A: ")  # the manifest's order of the groups


def test_the_command_line_takes_a_manifest(run_cli, waves, tmp_path):
    manifest = _manifest(tmp_path, "file\nwaves/wave0.csv\nwaves/wave2.csv\n")
    res = run_cli("screen", "--manifest", manifest, "--group", "arm", "--boot", BOOT,
                  "--out", tmp_path / "o", "--quiet")
    assert res.code == 0, res.err
    assert [r["file"] for r in _csv_rows(tmp_path / "o")] == ["waves/wave0.csv"] * 3 + \
        ["waves/wave2.csv"] * 3


@pytest.mark.parametrize("text, needles", [
    ("name,group\nwaves/wave0.csv,arm\n", ["line 1", "'file' column"]),
    ("file,grouping\nwaves/wave0.csv,arm\n", ["line 1", "unknown column 'grouping'"]),
    ("file,file\nwaves/wave0.csv,waves/wave1.csv\n", ["line 1", "named twice"]),
    ("file,group\n,arm\n", ["line 2", "file cell is empty"]),
    ("file,group\nwaves/wave0.csv,\n", ["line 2", "no group column"]),
    ("file,group\nwaves/wave9.csv,arm\n", ["line 2", "waves/wave9.csv", "no such file"]),
    ("file,group,outcomes\nwaves/wave0.csv,arm,\"y1,y1\"\n", ["line 2", "'y1' is named twice"]),
    ("file,group\nwaves/wave0.csv,arm,extra\n", ["line 2", "3 cells"]),
    ("file,group\nwaves/wave0.csv,arm\n./waves/wave0.csv,arm\n", ["./waves/wave0.csv",
                                                                  "listed twice"]),
    ("file,group\nwaves/wave0.csv,nosuch\n", ["wave0.csv", "nosuch"]),
    ("file\n", ["lists no file"]),
])
def test_a_faulty_manifest_is_one_line_and_writes_nothing(run_cli, waves, tmp_path, text,
                                                          needles):
    manifest = _manifest(tmp_path, text)
    res = run_cli("screen", "--manifest", manifest, "--boot", BOOT, "--out", tmp_path / "o")
    _one_line_error(res, *needles)
    assert not (tmp_path / "o").exists()


def test_a_manifest_and_file_names_together_are_refused(run_cli, waves, tmp_path):
    manifest = _manifest(tmp_path, "file,group\nwaves/wave0.csv,arm\n")
    res = run_cli("screen", waves, "--manifest", manifest, "--out", tmp_path / "o")
    _usage_error(res, "not both")


# ------------------------------------------------------------------ reports and escaping


def test_reports_of_files_with_the_same_name_get_their_own_folders(tmp_path):
    for site in ("north", "south"):
        (tmp_path / site).mkdir()
        (tmp_path / site / "visit.csv").write_text(_data_text(len(site), outcomes=("y1",)),
                                                   encoding="utf-8")
    sources = sources_from_paths([str(tmp_path / "north" / "visit.csv"),
                                  str(tmp_path / "south" / "visit.csv")], group="arm")
    out = tmp_path / "o"
    run_screens(sources, resamples=BOOT, out=out, reports=True)
    links = [r["report"] for r in _csv_rows(out)]
    assert links == ["visit-y1/report.html", "visit-y1-2/report.html"]
    assert all((out / "reports" / link).is_file() for link in links)


def test_file_names_are_escaped_in_the_page(tmp_path):
    hostile = tmp_path / "<b>x&y"
    hostile.mkdir()
    (hostile / "a.csv").write_text(_data_text(5), encoding="utf-8")
    (tmp_path / "b.csv").write_text(_data_text(6), encoding="utf-8")
    out = tmp_path / "o"
    run_screens(sources_from_paths([str(hostile / "a.csv"), str(tmp_path / "b.csv")],
                                   group="arm"), resamples=BOOT, out=out)
    page = (out / "screen.html").read_text(encoding="utf-8")
    assert "<b>x&y" not in page and "&lt;b&gt;x&amp;y" in page
    assert json.loads((out / "screen.json").read_text(encoding="utf-8"))["files"][0].endswith(
        "<b>x&y/a.csv")


@pytest.mark.parametrize("jobs", [1, 2])
def test_ctrl_c_leaves_no_table_and_no_spool(waves, tmp_path, jobs):
    def interrupt(done, total, column):
        raise KeyboardInterrupt

    out = tmp_path / "out"
    with pytest.raises(KeyboardInterrupt):
        run_screens(sources_from_paths([str(waves)], group="arm"), resamples=BOOT, jobs=jobs,
                    out=out, progress=interrupt)
    assert not any((out / name).exists() for name in FILES + ("screen.rows.jsonl",))


def test_the_python_screen_takes_a_list_of_paths(waves):
    from auditor.screen import screen

    table = screen([waves / "wave0.csv", str(waves / "wave2.csv")], group="arm", resamples=BOOT)
    assert list(table.columns) == list(MANY_FIELDS)
    assert list(table["file"]) == [str(waves / "wave0.csv")] * 3 + [str(waves / "wave2.csv")] * 3
    alone = screen(waves / "wave2.csv", group="arm", resamples=BOOT)
    assert list(table["estimate"][3:]) == list(alone["estimate"])
