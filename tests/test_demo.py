"""The demo: its CSV is reproducible from the seed and `auditor demo` writes one JSON per outcome."""

from __future__ import annotations

import io
import json

from auditor.cli import main
from auditor.demo import demo_audits, demo_data_path, make_demo_frame


def test_committed_csv_is_what_the_seeded_generator_writes():
    path = demo_data_path()
    assert path is not None
    buffer = io.StringIO()
    make_demo_frame().to_csv(buffer, index=False)
    assert path.read_text(encoding="utf-8") == buffer.getvalue()


def test_demo_command_writes_a_json_per_outcome(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    designs = {}
    for name, options in demo_audits():
        doc = json.loads((tmp_path / f"{name}.json").read_text(encoding="utf-8"))
        designs[name] = doc["design"]
        data = doc["data"]
        assert data["rows_read"] == (data["rows_used"] + len(data["excluded"])
                                     + sum(data["not_selected"].values()))
    assert designs["confidence_before_after"] == "paired"
    assert designs["weekly_km_by_route"] == "k_independent"
    assert designs["weekly_km"] == "two_independent"
    # the planted extreme case is named by its line in the file
    repair = json.loads((tmp_path / "repair_spend.json").read_text(encoding="utf-8"))
    frame = make_demo_frame()
    line = int(frame.index[frame["repair_spend"] == 640.0][0]) + 2
    flagged = [o for o in repair["diagnostics"]["outliers"] if o["label"] == "buddy"][0]
    assert line in flagged["beyond_3_iqr_rows"]
    assert "buddy" in capsys.readouterr().out
