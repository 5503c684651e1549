"""The demo: its CSV is reproducible from the seed and `auditor demo` writes one JSON per outcome."""

from __future__ import annotations

import io
import json

import pytest

from auditor.cli import main
from auditor.demo import demo_audits, demo_data_path, make_demo_frame
from honest import assert_honest_intervals

pytestmark = pytest.mark.slow  # `make check` leaves these out: the whole demo is run


def test_committed_csv_is_what_the_seeded_generator_writes():
    path = demo_data_path()
    assert path is not None
    buffer = io.StringIO()
    make_demo_frame().to_csv(buffer, index=False)
    assert path.read_text(encoding="utf-8") == buffer.getvalue()


def test_demo_writes_a_report_per_audit_and_an_index(tmp_path, capsys):
    from auditor.demo import run_demo

    assert run_demo(tmp_path, echo=lambda line: None, with_figures=False) == 0
    designs = {}
    index = (tmp_path / "index.html").read_text(encoding="utf-8")
    for name, options in demo_audits():
        assert f'href="{name}/report.html"' in index
        assert (tmp_path / name / "report.html").is_file()
        assert (tmp_path / name / "report.md").is_file()
        doc = json.loads((tmp_path / name / "audit.json").read_text(encoding="utf-8"))
        designs[name] = doc["design"]
        assert_honest_intervals(doc)
        data = doc["data"]
        assert data["rows_read"] == (data["rows_used"] + len(data["excluded"])
                                     + sum(data["not_selected"].values()))
    assert designs["confidence_before_after"] == "paired"
    assert designs["weekly_km_by_route"] == "k_independent"
    assert designs["weekly_km"] == "two_independent"
    # the planted extreme case is named by its line in the file
    repair = json.loads((tmp_path / "repair_spend" / "audit.json").read_text(encoding="utf-8"))
    frame = make_demo_frame()
    line = int(frame.index[frame["repair_spend"] == 640.0][0]) + 2
    flagged = [o for o in repair["diagnostics"]["outliers"] if o["label"] == "buddy"][0]
    assert line in flagged["beyond_3_iqr_rows"]


def test_demo_command_prints_the_summaries(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "buddy" in out and "index of the demo reports" in out
    assert (tmp_path / "weekly_km" / "figures").is_dir()
