"""The demo: its CSV is reproducible from the seed and `auditor demo` writes one JSON per outcome."""

from __future__ import annotations

import io
import json

from auditor.cli import main
from auditor.demo import DEMO_OUTCOMES, demo_data_path, make_demo_frame


def test_committed_csv_is_what_the_seeded_generator_writes():
    path = demo_data_path()
    assert path is not None
    buffer = io.StringIO()
    make_demo_frame().to_csv(buffer, index=False)
    assert path.read_text(encoding="utf-8") == buffer.getvalue()


def test_demo_command_writes_a_json_per_outcome(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    for outcome in DEMO_OUTCOMES:
        doc = json.loads((tmp_path / f"{outcome}.json").read_text(encoding="utf-8"))
        assert doc["outcome"] == outcome
        assert doc["data"]["rows_read"] == doc["data"]["rows_used"] + len(doc["data"]["excluded"])
    # the planted extreme case is named by its line in the file
    repair = json.loads((tmp_path / "repair_spend.json").read_text(encoding="utf-8"))
    frame = make_demo_frame()
    line = int(frame.index[frame["repair_spend"] == 640.0][0]) + 2
    flagged = [o for o in repair["diagnostics"]["outliers"] if o["label"] == "buddy"][0]
    assert line in flagged["beyond_3_iqr_rows"]
    assert "buddy" in capsys.readouterr().out
