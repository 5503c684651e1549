"""The written report: files, section order, self-containment, escaping of user text, the
descriptives the decision asks for, and the command line's --out."""

from __future__ import annotations

import json
import warnings
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from auditor.pipeline import audit
from auditor.report import SECTIONS, folder_name, render_html, render_markdown, write_report

HOSTILE_OUTCOME = '<script>alert(1)</script>'
HOSTILE_LABELS = ('A & B "quoted"', "<b>bold</b>")


def _result(outcome="score", labels=("treated", "control"), skewed=False):
    q = stats.norm.ppf((np.arange(1, 31) - 0.5) / 30)
    a, b = (np.exp(q + 0.5), np.exp(q)) if skewed else (q + 0.6, q)
    frame = pd.DataFrame({"arm": [labels[0]] * 30 + [labels[1]] * 30, outcome: np.r_[a, b]})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return audit(frame, outcome=outcome, group="arm", resamples=200)


class _Outline(HTMLParser):
    """Section ids in order, every tag name, img attributes and the visible text."""

    def __init__(self):
        super().__init__()
        self.sections, self.tags, self.images, self.text = [], [], [], []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append(tag)
        if tag == "section":
            self.sections.append(attrs.get("id"))
        if tag == "img":
            self.images.append(attrs)

    def handle_data(self, data):
        self.text.append(data)


def _outline(text: str) -> _Outline:
    parser = _Outline()
    parser.feed(text)
    return parser


def test_sections_come_in_reading_order_in_both_forms():
    result = _result()
    page = _outline(render_html(result))
    assert page.sections == [key for key, _ in SECTIONS]
    md = render_markdown(result)
    positions = [md.index(f"## {title}\n") for _, title in SECTIONS]
    assert positions == sorted(positions)


def test_user_text_is_escaped_everywhere():
    result = _result(HOSTILE_OUTCOME, HOSTILE_LABELS)
    page = render_html(result)
    outline = _outline(page)
    assert "script" not in outline.tags and "b" not in outline.tags  # nothing the data injected
    assert "<script" not in page and "<b>bold" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "A &amp; B &quot;quoted&quot;" in page
    text = "".join(outline.text)
    assert HOSTILE_OUTCOME in text and 'A & B "quoted"' in text  # shown literally
    md = render_markdown(result)
    assert "<script" not in md and "<b>" not in md
    assert "&lt;script&gt;" in md
    summary = result._repr_html_()
    assert "<script" not in summary and "&lt;script&gt;" in summary


def test_the_page_requests_nothing_from_outside():
    page = render_html(_result())
    for needle in ("http://", "https://", 'src="//', "href=", "@import", "url("):
        assert needle not in page, needle


def test_descriptives_follow_the_decision():
    normal, skewed = _result(), _result(skewed=True)
    assert normal.decision.descriptives == "mean_sd"
    assert skewed.decision.descriptives == "median_iqr_range"
    normal_md = render_markdown(normal)
    skewed_md = render_markdown(skewed)
    desc = lambda md: md.split("## Descriptives")[1].split("## ")[0]  # noqa: E731
    assert "| mean | SD |" in desc(normal_md) and "median" not in desc(normal_md).split("\n\n")[0]
    assert "| median | Q1 | Q3 | min | max |" in desc(skewed_md)
    g = skewed.groups[0]
    assert f"{g.median:.3f}" in desc(skewed_md)


def test_effect_table_quotes_the_json():
    result = _result()
    doc = json.loads(json.dumps(result.to_dict()))
    md = render_markdown(result)
    table = md.split("## Effect sizes")[1].split("## ")[0]
    for name, effect in doc["effects"].items():
        assert f"{effect['estimate']:.3f}" in table, name
        assert f"[{effect['ci_low']:.3f}, {effect['ci_high']:.3f}]" in table, name


def test_folder_names_stay_inside_the_reports_folder():
    assert folder_name("../../etc") == "etc"
    assert folder_name("..") == "outcome"
    assert folder_name(HOSTILE_OUTCOME) == "script_alert_1_script"
    assert "/" not in folder_name("a/b\\c") and "\\" not in folder_name("a/b\\c")


def test_write_report_without_figures_writes_the_three_documents(tmp_path):
    result = _result()
    files = write_report(result, tmp_path / "out", with_figures=False)
    assert files.html.read_text(encoding="utf-8") == render_html(result)
    assert files.markdown.read_text(encoding="utf-8") == render_markdown(result)
    doc = json.loads(files.json.read_text(encoding="utf-8"))
    assert doc["decision"]["primary"] == result.decision.primary
    written = sorted(p.relative_to(tmp_path) for p in (tmp_path / "out").rglob("*"))
    assert written == sorted(Path(x) for x in ("out/audit.json", "out/figures", "out/report.html",
                                               "out/report.md"))


def test_an_unwritable_folder_is_one_clear_error(tmp_path):
    from auditor.errors import AuditError

    blocker = tmp_path / "file.txt"
    blocker.write_text("x")
    with pytest.raises(AuditError, match="cannot write the report"):
        write_report(_result(), blocker / "sub", with_figures=False)


@pytest.mark.slow
def test_out_alone_writes_reports_outcome_and_matches_result_report(run_cli, tmp_path,
                                                                   monkeypatch):
    data = tmp_path / "trial.csv"
    q = stats.norm.ppf((np.arange(1, 21) - 0.5) / 20)
    pd.DataFrame({"arm": ["x"] * 20 + ["y"] * 20, "grip strength": np.r_[q + 1, q]}).to_csv(
        data, index=False)
    monkeypatch.chdir(tmp_path)
    res = run_cli("check", data, "--outcome", "grip strength", "--group", "arm", "--boot", 200,
                  "--out", "--quiet")
    assert res.code == 0, res.err
    folder = tmp_path / "reports" / "grip_strength"
    names = {p.name for p in folder.iterdir()}
    assert names == {"report.html", "report.md", "audit.json", "figures"}
    assert {p.name for p in (folder / "figures").iterdir()} == {
        f"{n}.{ext}" for n in ("distributions", "qq", "ecdf", "influence", "intervals")
        for ext in ("png", "svg")}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = audit(str(data), outcome="grip strength", group="arm", resamples=200)
    again = result.report(tmp_path / "again")
    for name in ("report.html", "report.md", "audit.json", "figures/qq.png", "figures/qq.svg"):
        assert (folder / name).read_bytes() == (tmp_path / "again" / name).read_bytes(), name
