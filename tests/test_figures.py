"""The report's figures: names per design, valid PNG and SVG, alt text from the numbers,
byte-identical output, escaping of user text, and the awkward data that must not break them."""

from __future__ import annotations

import dataclasses
import warnings
import xml.etree.ElementTree as ET
from pathlib import Path

import matplotlib
import numpy as np
import pandas as pd
import pytest

from auditor import audit
from auditor.figures import ALT_LIMIT, NAMES, PALETTE, Figure, clean, figures
from auditor.formatting import number as num

pytestmark = pytest.mark.slow  # `make check` leaves these out: every figure of every design is drawn

DEMO = Path(__file__).resolve().parent.parent / "demo" / "cycling_commute.csv"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def quiet_audit(data, **kwargs):
    """An audit with its own (expected) warnings silenced; the figures are drawn outside, where
    every warning is an error."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return audit(data, resamples=200, **kwargs)


def svg_texts(svg: str) -> list[str]:
    root = ET.fromstring(svg)
    return ["".join(el.itertext()) for el in root.iter() if el.tag.endswith("}text")]


def by_name(figs) -> dict[str, Figure]:
    return {f.name: f for f in figs}


def check_valid(figs) -> None:
    for f in figs:
        assert isinstance(f, Figure)
        assert f.png.startswith(PNG_SIGNATURE), f.name
        root = ET.fromstring(f.svg)
        assert root.tag == "{http://www.w3.org/2000/svg}svg", f.name
        assert f.title.strip(), f.name
        assert f.alt.strip() and len(f.alt) <= ALT_LIMIT, (f.name, len(f.alt))


def _rng(seed=7):
    return np.random.default_rng(seed)


def two_groups_frame(n=14):
    rng = _rng()
    y = np.concatenate([rng.normal(10, 2, n), rng.normal(12, 2, n)])
    return pd.DataFrame({"score": np.round(y, 2), "arm": ["control"] * n + ["treated"] * n})


DESIGNS = {
    "two_independent": lambda: quiet_audit(two_groups_frame(), outcome="score", group="arm"),
    "paired": lambda: quiet_audit(
        pd.DataFrame({"pre": np.round(_rng(3).normal(5, 1, 15), 1),
                      "post": np.round(_rng(4).normal(5.8, 1, 15), 1)}),
        paired_columns="pre,post"),
    "k_independent": lambda: quiet_audit(DEMO, outcome="repair_spend", group="route_type"),
    "k_repeated": lambda: quiet_audit(
        pd.DataFrame({"a": _rng(1).normal(0, 1, 12), "b": _rng(2).normal(0.5, 1, 12),
                      "c": _rng(5).normal(1, 1, 12)}), paired_columns="a,b,c"),
}


@pytest.fixture(scope="module")
def results():
    return {name: make() for name, make in DESIGNS.items()}


@pytest.fixture(scope="module")
def drawn(results):
    return {name: figures(r) for name, r in results.items()}


# ------------------------------------------------------------------ every design


@pytest.mark.parametrize("design", list(DESIGNS))
def test_every_design_gives_all_figures(design, results, drawn):
    assert results[design].design == design
    assert tuple(f.name for f in drawn[design]) == NAMES
    check_valid(drawn[design])


@pytest.mark.parametrize("design", list(DESIGNS))
def test_alt_text_quotes_the_primary_estimate_as_printed(design, results, drawn):
    primary = results[design].effect(results[design].decision.primary)
    assert primary.estimate is not None
    printed = num(primary.estimate)
    for f in drawn[design]:
        assert printed in f.alt, (f.name, printed, f.alt)
    assert f"[{num(primary.ci_low)}, {num(primary.ci_high)}]" in by_name(drawn[design])[
        "intervals"].alt


def test_alt_text_gives_group_medians(results, drawn):
    r = results["two_independent"]
    alt = by_name(drawn["two_independent"])["distributions"].alt
    for g in r.groups:
        assert f"{g.label} {num(g.median)} (n = {g.n})" in alt


def test_paired_distributions_describe_the_differences(results, drawn):
    r = results["paired"]
    d = r.samples.differences
    fig = by_name(drawn["paired"])["distributions"]
    assert f"median {num(float(np.median(d)))}" in fig.alt
    assert "paired differences" in svg_texts(fig.svg)
    assert "pre \u2212 post" in svg_texts(fig.svg)


def test_primary_index_is_bold_in_the_forest_plot(results, drawn):
    r = results["two_independent"]
    root = ET.fromstring(by_name(drawn["two_independent"])["intervals"].svg)
    bold = ["".join(el.itertext()) for el in root.iter()
            if el.tag.endswith("}text") and "font-weight: 700" in el.get("style", "")]
    primary = r.decision.primary
    assert any(primary in t for t in bold), bold
    assert not any(e.name in t for t in bold for e in r.effects if e.name != primary)


def test_group_colours_are_the_same_in_every_figure(drawn):
    figs = by_name(drawn["two_independent"])
    for name in ("distributions", "qq", "ecdf", "influence"):
        svg = figs[name].svg.lower()
        for colour in PALETTE[:2]:
            assert colour.lower() in svg, (name, colour)


# ------------------------------------------------------------------ determinism, purity


def test_same_result_gives_identical_bytes(results, drawn):
    again = figures(results["two_independent"])
    for first, second in zip(drawn["two_independent"], again):
        assert first.png == second.png, first.name
        assert first.svg == second.svg, first.name
        assert first.alt == second.alt


def test_a_fresh_audit_of_the_same_data_gives_identical_bytes(drawn):
    fresh = figures(DESIGNS["k_repeated"]())
    assert [f.png for f in fresh] == [f.png for f in drawn["k_repeated"]]
    assert [f.svg for f in fresh] == [f.svg for f in drawn["k_repeated"]]


def test_no_date_or_software_stamp(drawn):
    for f in drawn["paired"]:
        assert b"Software" not in f.png
        assert "<dc:date>" not in f.svg


def test_svg_ids_differ_between_figures(drawn):
    import re

    seen = {}
    for f in drawn["two_independent"]:
        for ident in re.findall(r'id="(p[0-9a-f]+)"', f.svg):
            assert seen.setdefault(ident, f.name) == f.name, ident


def test_global_matplotlib_state_is_left_alone(results):
    before = dict(matplotlib.rcParams)
    backend = matplotlib.get_backend()
    figures(results["k_independent"])
    assert dict(matplotlib.rcParams) == before
    assert matplotlib.get_backend() == backend


def test_user_rc_settings_do_not_change_the_output(results, drawn):
    with matplotlib.rc_context({"font.size": 20, "lines.linewidth": 5, "axes.grid": True,
                                "svg.fonttype": "path"}):
        styled = figures(results["paired"])
    assert [f.svg for f in styled] == [f.svg for f in drawn["paired"]]


# ------------------------------------------------------------------ user text


NASTY = ("<script>alert(1)</script>", 'A & B "quoted"')


@pytest.fixture(scope="module")
def nasty_result():
    rng = _rng(11)
    frame = pd.DataFrame({"spend <b>&</b> 'x'": np.round(rng.normal(0, 1, 20), 2),
                          "team": [NASTY[0]] * 10 + [NASTY[1]] * 10})
    return quiet_audit(frame, outcome="spend <b>&</b> 'x'", group="team")


def test_user_text_is_escaped_in_svg(nasty_result):
    figs = figures(nasty_result)
    check_valid(figs)
    for f in figs:
        assert "<script" not in f.svg.lower(), f.name
        assert "<b>" not in f.svg, f.name
    svg = by_name(figs)["distributions"].svg
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in svg
    assert "A &amp; B" in svg
    texts = " ".join(svg_texts(svg))
    assert NASTY[0] in texts and NASTY[1] in texts
    assert "spend <b>&</b> 'x'" in " ".join(svg_texts(by_name(figs)["ecdf"].svg))


def test_dollars_backslashes_and_other_scripts_are_shown_literally():
    rng = _rng(12)
    labels = ("$x^2$ \\frac{a}", "日本語の群")
    frame = pd.DataFrame({"y": np.round(rng.normal(0, 1, 16), 2),
                          "g": [labels[0]] * 8 + [labels[1]] * 8})
    figs = figures(quiet_audit(frame, outcome="y", group="g"))
    check_valid(figs)
    texts = " ".join(svg_texts(by_name(figs)["distributions"].svg))
    assert labels[0] in texts and labels[1] in texts


def test_control_characters_and_long_labels_are_tidied():
    assert clean("a\tb\nc\x00d\u200be") == "a b c d e"
    long = clean("x" * 60 + "y" * 40)
    assert len(long) == 40 and long.startswith("x") and long.endswith("y") and "\u2026" in long
    assert clean("a rather long label for group 1", 12) != clean("a rather long label for group 2",
                                                                12)
    rng = _rng(13)
    labels = ("first\tgroup\x07 " + "very " * 30, "second\ngroup")
    frame = pd.DataFrame({"y": np.round(rng.normal(0, 1, 16), 2),
                          "g": [labels[0]] * 8 + [labels[1]] * 8})
    figs = figures(quiet_audit(frame, outcome="y", group="g"))
    check_valid(figs)  # an XML-illegal control character would fail to parse


def test_many_groups_with_long_labels_keep_alt_text_short():
    rng = _rng(14)
    labels = [f"a rather long label for group number {k}" for k in range(8)]
    frame = pd.DataFrame({"y": np.round(rng.normal(0, 1, 80), 2),
                          "g": [lab for lab in labels for _ in range(10)]})
    figs = figures(quiet_audit(frame, outcome="y", group="g"))
    assert tuple(f.name for f in figs) == NAMES
    check_valid(figs)
    assert "more not listed" in by_name(figs)["distributions"].alt
    titles = [t for t in svg_texts(by_name(figs)["qq"].svg) if "\u2026" in t]
    assert len(set(titles)) == 8  # shortened labels keep their distinguishing ends


# ------------------------------------------------------------------ awkward data


EDGE_CASES = {
    "constant_group": (pd.DataFrame({"y": [1.0, 2, 3, 4, 5, 6, 5, 5, 5, 5, 5, 5],
                                     "g": ["a"] * 6 + ["b"] * 6}), dict(outcome="y", group="g")),
    "both_constant": (pd.DataFrame({"y": [3.0] * 12, "g": ["a"] * 6 + ["b"] * 6}),
                      dict(outcome="y", group="g")),
    "two_per_group": (pd.DataFrame({"y": [1.0, 2, 3, 5], "g": ["a", "a", "b", "b"]}),
                      dict(outcome="y", group="g")),
    "heavy_ties": (pd.DataFrame({"y": [1.0, 1, 1, 2, 2, 2, 1, 2, 2, 2, 2, 3, 3, 3],
                                 "g": ["a"] * 7 + ["b"] * 7}), dict(outcome="y", group="g")),
    "two_distinct_values": (pd.DataFrame({"y": [0.0, 0, 0, 1, 0, 1, 1, 1],
                                          "g": ["a"] * 4 + ["b"] * 4}),
                            dict(outcome="y", group="g")),
    "paired_no_change": (pd.DataFrame({"x": [1.0, 2, 3, 4, 5], "z": [1.0, 2, 3, 4, 5]}),
                         dict(paired_columns="x,z")),
    "repeated_constant_condition": (pd.DataFrame({"x": [1.0, 2, 3], "z": [2, 3, 4.5],
                                                  "w": [3.0, 3, 3]}),
                                    dict(paired_columns="x,z,w")),
    "k_two_per_group": (pd.DataFrame({"y": [1.0, 2, 3, 4, 5, 6], "g": list("aabbcc")}),
                        dict(outcome="y", group="g")),
}


@pytest.mark.parametrize("case", list(EDGE_CASES))
def test_awkward_data_still_draws(case):
    frame, kwargs = EDGE_CASES[case]
    result = quiet_audit(frame, **kwargs)
    figs = figures(result)
    assert tuple(f.name for f in figs) == NAMES
    check_valid(figs)


def test_missing_influence_values(results):
    r = results["two_independent"]
    infl = r.influence
    blank = {k: np.full(v.shape, np.nan) for k, v in infl.changes.items()}
    gappy = {k: np.where(np.arange(v.size) % 3 == 0, np.nan, v) for k, v in infl.changes.items()}
    for changes in (blank, gappy, {}):
        modified = dataclasses.replace(r, influence=dataclasses.replace(infl, changes=changes))
        figs = figures(modified)
        assert tuple(f.name for f in figs) == NAMES
        check_valid(figs)
    figs = figures(dataclasses.replace(r, influence=dataclasses.replace(
        infl, changes=blank, values=None)))
    assert "no leave-one-out values" in by_name(figs)["influence"].alt


def test_without_influence_the_figure_is_skipped(results):
    figs = figures(dataclasses.replace(results["paired"], influence=None))
    assert tuple(f.name for f in figs) == ("distributions", "qq", "ecdf", "intervals")
    check_valid(figs)


def test_without_samples_only_the_summary_figures_remain(results):
    figs = figures(dataclasses.replace(results["k_independent"], samples=None))
    assert tuple(f.name for f in figs) == ("influence", "intervals")


# ------------------------------------------------------------------ influence labels


def _flagged(result, name):
    summary = next(e for e in result.influence.effects if e.effect == name)
    return sorted(set(summary.sign_flips) | set(summary.interval_flips)), summary


def three_shifted_groups():
    """Three groups of 12 whose eta^2 noncentral-F interval just excludes 0 (seed chosen so that
    a few removals put 0 back in it: analytic, so the flags do not depend on the resamples)."""
    rng = _rng(3)
    y = np.round(np.r_[rng.normal(0, 1, 12), rng.normal(0.6, 1, 12), rng.normal(1.0, 1, 12)], 2)
    return quiet_audit(pd.DataFrame({"y": y, "g": ["a"] * 12 + ["b"] * 12 + ["c"] * 12}),
                       outcome="y", group="g")


@pytest.mark.parametrize("design, index", [("k_independent", "eta_squared"),
                                           ("k_repeated", "kendall_w")])
def test_flagged_cases_are_labelled_by_file_line(design, index, results, drawn):
    result = three_shifted_groups() if design == "k_independent" else results[design]
    flagged, summary = _flagged(result, index)
    assert 0 < len(flagged) <= 8  # the fixture must have a few flags to show
    figure = by_name(figures(result) if design == "k_independent" else drawn[design])["influence"]
    texts = set(svg_texts(figure.svg))
    for row in flagged + [summary.most_influential_row]:
        assert f"line {row}" in texts, (row, sorted(t for t in texts if t.startswith("line")))
    assert str(flagged[0]) in figure.alt


def test_an_outlier_that_flips_the_interval_is_marked():
    rng = _rng(21)
    a = np.round(rng.normal(0, 1, 15), 2)
    b = np.round(rng.normal(0, 1, 15), 2)
    a[4] = 9.0  # file line 6
    frame = pd.DataFrame({"y": np.concatenate([a, b]), "g": ["a"] * 15 + ["b"] * 15})
    result = quiet_audit(frame, outcome="y", group="g")
    summary = next(e for e in result.influence.effects if e.effect == "cohen_d")
    assert summary.most_influential_row == 6
    fig = by_name(figures(result))["influence"]
    assert "line 6" in svg_texts(fig.svg)
    assert "(line 6)" in fig.alt


def test_the_influence_text_names_a_case_without_which_d_is_undefined():
    a, b = np.r_[np.full(24, 10.0), 1000.0], np.full(25, 10.0)
    frame = pd.DataFrame({"arm": ["t"] * 25 + ["c"] * 25, "score": np.r_[a, b]})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = audit(frame, outcome="score", group="arm", resamples=200)
    alt = next(f.alt for f in figures(result) if f.name == "influence")
    assert "cohen_d is undefined without line 26; otherwise it moves by at most" in alt, alt
