"""Reading data files through `auditor check`: formats, encodings, delimiters, line numbers,
exclusions and their reasons, group order and direction."""

from __future__ import annotations

import re
import statistics
import tempfile
import zipfile
from pathlib import Path

import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

# Plant height (cm) after six weeks in loam or clay soil.
PLANTS = [("loam", "31.5"), ("clay", "24.0"), ("loam", "29.0"), ("clay", "26.5"),
          ("loam", "33.0"), ("clay", "22.5"), ("loam", "30.5"), ("clay", "25.0")]


def table(rows, header=("soil", "height_cm"), sep=",", newline="\n"):
    lines = [sep.join(header)] + [sep.join(r) for r in rows]
    return newline.join(lines) + newline


def heights(doc, label):
    return next(g for g in doc["groups"] if g["label"] == label)


def excluded(doc):
    return {e["row"]: e["reason"] for e in doc["data"]["excluded"]}


def assert_accounting(doc):
    data = doc["data"]
    assert data["rows_read"] == (data["rows_used"] + len(data["excluded"])
                                 + sum(data["not_selected"].values()))
    assert data["rows_used"] == sum(g["n"] for g in doc["groups"])


def run_plants(audit_json, path, *extra):
    doc = audit_json(path, "height_cm", "soil", *extra)
    assert_accounting(doc)
    return doc


def one_line_error(res, *fragments):
    assert res.code == 1, (res.code, res.err)
    assert res.err.startswith("auditor: error:") and res.err.count("\n") == 1, res.err
    for fragment in fragments:
        assert fragment in res.err, (fragment, res.err)


# ------------------------------------------------------------------ formats and encodings


def test_plain_csv(audit_json, write_file):
    doc = run_plants(audit_json, write_file("plants.csv", table(PLANTS)))
    assert doc["data"]["delimiter"] == ","
    assert doc["data"]["encoding"] == "utf-8"
    assert (doc["data"]["rows_read"], doc["data"]["rows_used"]) == (8, 8)
    assert heights(doc, "loam")["mean"] == pytest.approx(statistics.mean([31.5, 29.0, 33.0, 30.5]))
    assert heights(doc, "clay")["median"] == pytest.approx(24.5)


def test_tsv_detected_by_content(audit_json, write_file):
    # a .txt file whose labels contain commas: only the tab makes sense as delimiter
    rows = [(f"{soil}, sieved", h) for soil, h in PLANTS]
    doc = run_plants(audit_json, write_file("plants.txt", table(rows, sep="\t")))
    assert doc["data"]["delimiter"] == "\t"
    assert [g["label"] for g in doc["groups"]] == ["loam, sieved", "clay, sieved"]


def test_tsv_detected_by_suffix(audit_json, write_file):
    # the header has more commas than tabs, yet the .tsv suffix decides
    header = ("soil", "height, cm, week 6")
    path = write_file("plants.tsv", table(PLANTS, header=header, sep="\t"))
    doc = audit_json(path, "height, cm, week 6", "soil")
    assert doc["data"]["delimiter"] == "\t"
    assert doc["data"]["rows_used"] == 8


def test_semicolon_delimited_with_decimal_comma_cell(audit_json, write_file):
    rows = PLANTS[:3] + [("clay", "26,5")] + PLANTS[4:]
    doc = run_plants(audit_json, write_file("plants.csv", table(rows, sep=";")))
    assert doc["data"]["delimiter"] == ";"
    reasons = excluded(doc)
    assert list(reasons) == [5]
    assert "26,5" in reasons[5] and "decimal comma" in reasons[5]


def test_pipe_delimited(audit_json, write_file):
    doc = run_plants(audit_json, write_file("plants.csv", table(PLANTS, sep="|")))
    assert doc["data"]["delimiter"] == "|"
    assert doc["data"]["rows_used"] == 8


def test_utf8_with_bom(audit_json, write_file):
    # the group column comes first, so a BOM left in place would hide its name
    path = write_file("plants.csv", b"\xef\xbb\xbf" + table(PLANTS).encode("utf-8"))
    doc = run_plants(audit_json, path)
    assert doc["group_column"] == "soil"
    assert doc["data"]["encoding"] == "utf-8"
    assert doc["data"]["rows_used"] == 8


def test_utf8_labels_kept(audit_json, write_file):
    rows = [("prairie fleurie" if s == "loam" else "sous-bois ombragé", h) for s, h in PLANTS]
    doc = run_plants(audit_json, write_file("plants.csv", table(rows)))
    assert [g["label"] for g in doc["groups"]] == ["prairie fleurie", "sous-bois ombragé"]


def test_latin1_text(audit_json, write_file):
    rows = [("prés" if s == "loam" else "forêt", h) for s, h in PLANTS] + [("forêt", "n°9")]
    path = write_file("plots.csv", table(rows, header=("parcelle", "hauteur")).encode("latin-1"))
    doc = audit_json(path, "hauteur", "parcelle")
    assert_accounting(doc)
    assert doc["data"]["encoding"] == "latin-1"
    assert [g["label"] for g in doc["groups"]] == ["prés", "forêt"]
    assert excluded(doc) == {10: "hauteur 'n°9' is not a number"}


def _long_plants(size: int) -> bytes:
    """The plant table with a filler column, repeated until it is `size` bytes or longer."""
    filler = "x" * 200
    rows = [(s, h, filler) for s, h in PLANTS] * (size // (8 * 200) + 2)
    return table(rows, header=("soil", "height_cm", "note")).encode("ascii")


@pytest.mark.parametrize("shift", range(3))
def test_utf8_character_split_by_the_reading_chunk_is_still_utf8(tmp_path, shift):
    from auditor.load import _CHUNK_BYTES, read_table

    raw = _long_plants(_CHUNK_BYTES + 1000)
    assert raw[_CHUNK_BYTES - 3:_CHUNK_BYTES + 3] == b"x" * 6  # inside a filler cell
    at = _CHUNK_BYTES - 2 + shift  # the three bytes of a euro sign straddle the boundary
    raw = raw[:at] + "\u20ac".encode("utf-8") + raw[at + 3:]
    (tmp_path / "plants.csv").write_bytes(raw)
    found = read_table(tmp_path / "plants.csv", ["soil", "note"])
    assert found.encoding == "utf-8"
    assert sum("\u20ac" in cell for cell in found.columns["note"]) == 1


def test_windows_1252_byte_after_the_first_chunk_is_found(tmp_path):
    from auditor.load import _CHUNK_BYTES, read_table

    raw = _long_plants(2 * _CHUNK_BYTES)
    at = raw.index(b"xxx", _CHUNK_BYTES + 100)
    raw = raw[:at] + "\u2013".encode("cp1252") + raw[at + 1:]  # an en dash, byte 0x96
    (tmp_path / "plants.csv").write_bytes(raw)
    found = read_table(tmp_path / "plants.csv", ["soil", "note"])
    assert found.encoding == "cp1252"
    assert sum("\u2013" in cell for cell in found.columns["note"]) == 1
    undefined = raw[:at] + b"\x81" + raw[at + 1:]  # not a Windows-1252 character: Latin-1
    (tmp_path / "plants.csv").write_bytes(undefined)
    assert read_table(tmp_path / "plants.csv", ["soil"]).encoding == "latin-1"


@pytest.mark.parametrize("newline", ["\n", "\r\n"], ids=["lf", "crlf"])
def test_quoted_field_with_embedded_newline(audit_json, write_file, newline):
    nl = newline
    text = nl.join([
        "soil,height_cm,note",                 # line 1
        'loam,31.5,"leaf curl' + nl + 'on two stems"',   # lines 2-3
        "clay,24.0,ok",                        # line 4
        'loam,tall,"measured' + nl + 'twice' + nl + 'by mistake"',  # lines 5-7 (bad)
        "loam,29.0,ok",                        # line 8
        "clay,26.5,ok",                        # line 9
        "loam,33.0,ok",                        # line 10
        "clay,22.5,ok",                        # line 11
        "clay,n/a,ok",                         # line 12 (bad)
        "loam,30.5,ok",                        # line 13
        "clay,25.0,ok",                        # line 14
    ]) + nl
    doc = run_plants(audit_json, write_file("notes.csv", text))
    assert excluded(doc) == {5: "height_cm 'tall' is not a number",
                             12: "height_cm is missing ('n/a')"}
    assert doc["data"]["rows_read"] == 10


def test_outlier_rows_are_file_lines_after_multiline_record(audit_json, write_file):
    text = ('soil,height_cm,note\n'
            'loam,31.5,"first\nsecond\nthird"\n'  # lines 2-4
            'loam,29.0,\nloam,33.0,\nloam,30.5,\nloam,30.0,\nloam,31.0,\nloam,95.0,\n'  # 5-10
            'clay,24.0,\nclay,26.5,\nclay,22.5,\nclay,25.0,\n')
    doc = run_plants(audit_json, write_file("notes.csv", text))
    assert doc["diagnostics"]["outliers"][0]["rows"] == [10]
    assert doc["data"]["rows_read"] == 11


@pytest.mark.parametrize("newline", ["\n", "\r\n"], ids=["lf", "crlf"])
def test_blank_lines_not_counted_and_lines_still_right(audit_json, write_file, newline):
    nl = newline
    text = nl.join([
        "soil,height_cm",   # 1
        "loam,31.5",        # 2
        "",                 # 3 blank
        "clay,24.0",        # 4
        "   ",              # 5 blank (spaces only)
        "",                 # 6 blank
        "loam,?",           # 7 bad
        "loam,29.0",        # 8
        "clay,26.5",        # 9
        "loam,33.0",        # 10
        "clay,22.5",        # 11
        "",                 # 12 blank
        "clay,Inf",         # 13 bad
        "loam,30.5",        # 14
        "clay,25.0",        # 15
        "",                 # 16 blank
    ]) + nl
    doc = run_plants(audit_json, write_file("gaps.csv", text))
    data = doc["data"]
    assert data["rows_read"] == 10
    assert data["blank_lines"] == 5
    assert excluded(doc) == {7: "height_cm '?' is not a number", 13: "height_cm 'Inf' is not finite"}


def test_rows_with_wrong_number_of_fields(audit_json, write_file):
    text = table(PLANTS[:4]) + "loam,30.0,extra\nclay\n" + "\n".join(",".join(r) for r in PLANTS[4:]) + "\n"
    doc = run_plants(audit_json, write_file("ragged.csv", text))
    reasons = excluded(doc)
    assert sorted(reasons) == [6, 7]
    assert re.search(r"\b3 fields\b", reasons[6]) and "header has 2" in reasons[6]
    assert re.search(r"\b1 field", reasons[7]) and "header has 2" in reasons[7]
    # a malformed row of a compared group counts as that group's missing value
    assert heights(doc, "loam")["missing"] == 1 and heights(doc, "clay")["missing"] == 1
    assert doc["data"]["rows_read"] == 10


def _plants_workbook(path: Path) -> Path:
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(["soil", "height_cm", "note"])      # row 1
    sheet.append(["loam", 31.5, "staked"])           # row 2
    sheet.append(["clay", 24, None])                 # row 3
    sheet.append([None, None, None])                 # row 4: empty
    sheet.append(["loam", "not measured", None])     # row 5: bad
    sheet.append(["loam", 29.0, None])               # row 6
    sheet.append(["clay", 26.5, None])               # row 7
    sheet.append(["loam", 33, None])                 # row 8
    sheet.append(["clay", 22.5, None])               # row 9
    sheet.cell(row=12, column=1, value="clay")       # rows 10-11 never written
    sheet.cell(row=12, column=2, value=25.0)         # row 12
    sheet.cell(row=13, column=1, value="NA")         # row 13: missing group
    sheet.cell(row=13, column=2, value=27.0)
    sheet.cell(row=14, column=1, value="loam")       # row 14
    sheet.cell(row=14, column=2, value=30.5)
    book.save(path)
    return path


def test_xlsx_line_numbers_are_sheet_rows(audit_json, tmp_path):
    path = _plants_workbook(tmp_path / "plants.xlsx")
    doc = run_plants(audit_json, path)
    data = doc["data"]
    assert data["encoding"] == "xlsx" and data["delimiter"] is None
    assert excluded(doc) == {5: "height_cm 'not measured' is not a number",
                             13: "soil is missing ('NA')"}
    assert data["rows_read"] == 10
    assert heights(doc, "loam")["n"] == 4 and heights(doc, "clay")["n"] == 4
    assert heights(doc, "clay")["mean"] == pytest.approx(statistics.mean([24, 26.5, 22.5, 25.0]))


def test_xlsx_with_understated_dimension_record(audit_json, tmp_path):
    # Some programs store a stale used-range ("dimension") in the sheet; the rows are still there
    # and none may be dropped silently.
    plain = _plants_workbook(tmp_path / "plants.xlsx")
    stale = tmp_path / "stale.xlsx"
    with zipfile.ZipFile(plain) as src, zipfile.ZipFile(stale, "w", zipfile.ZIP_DEFLATED) as dst:
        for item in src.infolist():
            data = src.read(item.filename)
            if item.filename.startswith("xl/worksheets/sheet"):
                data, count = re.subn(rb'<dimension ref="[^"]*"', b'<dimension ref="A1:C9"', data)
                assert count == 1
            dst.writestr(item, data)
    doc = run_plants(audit_json, stale)
    assert doc["data"]["rows_read"] == 10
    assert excluded(doc) == {5: "height_cm 'not measured' is not a number",
                             13: "soil is missing ('NA')"}


def test_damaged_workbook(run_cli, write_file):
    path = write_file("broken.xlsx", b"PK\x03\x04 this is not really a workbook")
    res = run_cli("check", path, "--outcome", "height_cm", "--group", "soil", "--boot", 200)
    one_line_error(res, "broken.xlsx")


# ------------------------------------------------------------------ header problems


def test_duplicate_column_name(run_cli, write_file):
    text = "soil,height_cm,height_cm\n" + "".join(f"{s},{h},{h}\n" for s, h in PLANTS)
    res = run_cli("check", write_file("twice.csv", text), "--outcome", "height_cm",
                  "--group", "soil", "--boot", 200)
    one_line_error(res, "'height_cm'", "2 times")


def test_header_names_are_trimmed(audit_json, write_file):
    path = write_file("spaced.csv", table(PLANTS, header=(" soil ", "  height_cm")))
    doc = run_plants(audit_json, path)
    assert doc["outcome"] == "height_cm" and doc["data"]["rows_used"] == 8


@pytest.mark.parametrize("content", ["", "\n\n  \n"], ids=["empty", "blank_lines_only"])
def test_empty_file(run_cli, write_file, content):
    res = run_cli("check", write_file("empty.csv", content), "--outcome", "height_cm",
                  "--group", "soil", "--boot", 200)
    one_line_error(res, "empty")


def test_header_only(run_cli, write_file):
    res = run_cli("check", write_file("header.csv", "soil,height_cm\n"), "--outcome", "height_cm",
                  "--group", "soil", "--boot", 200)
    one_line_error(res, "0 group level")


def test_binary_file(run_cli, write_file):
    res = run_cli("check", write_file("photo.csv", b"\xff\xd8\xff\xe0\x00\x10JFIF\x00"),
                  "--outcome", "height_cm", "--group", "soil", "--boot", 200)
    one_line_error(res, "binary")


def test_unbalanced_quote_does_not_swallow_rows(run_cli, strict_json, write_file):
    # Line 10 opens a quote that never closes. Either the file is refused with a message naming
    # a line of the damaged stretch (10 to 13), or every later line still counts as its own row.
    text = table(PLANTS) + 'loam,"30.0\nclay,23.5\nloam,32.0\nclay,26.0\n'
    res = run_cli("check", write_file("quote.csv", text), "--outcome", "height_cm",
                  "--group", "soil", "--boot", 200, "--json", "-", "--quiet")
    if res.code == 1:
        assert re.search(r"\bline 1[0-3]\b", res.err), res.err
    else:
        assert res.code == 0, res.err
        assert strict_json(res.out)["data"]["rows_read"] == 12


# ------------------------------------------------------------------ labels and exclusions


def test_labels_with_surrounding_spaces_are_one_level(audit_json, write_file):
    rows = [(" loam", "31.5"), ("clay ", "24.0"), ("loam  ", "29.0"), ("\tclay", "26.5"),
            ("loam", "33.0"), (" clay ", "22.5")]
    doc = run_plants(audit_json, write_file("spaces.csv", table(rows)))
    assert [(g["label"], g["n"]) for g in doc["groups"]] == [("loam", 3), ("clay", 3)]


def test_groups_option_matches_trimmed_labels(audit_json, write_file):
    rows = [(" loam", "31.5"), ("clay ", "24.0"), ("loam", "29.0"), ("clay", "26.5"),
            ("loam ", "33.0"), ("clay", "22.5")]
    doc = run_plants(audit_json, write_file("spaces.csv", table(rows)), "--groups", " clay , loam")
    assert [g["label"] for g in doc["groups"]] == ["clay", "loam"]


def test_missing_group_labels_are_excluded(audit_json, write_file):
    rows = PLANTS + [("NA", "28.0"), ("", "27.0"), ("n/a", "20.0"), ("  ", "21.0")]
    doc = run_plants(audit_json, write_file("unlabelled.csv", table(rows)))
    reasons = excluded(doc)
    assert sorted(reasons) == [10, 11, 12, 13]
    assert reasons[10] == "soil is missing ('NA')"
    assert reasons[11] == "soil is empty"
    assert reasons[12] == "soil is missing ('n/a')"
    assert reasons[13] == "soil is empty"
    assert [g["label"] for g in doc["groups"]] == ["loam", "clay"]


def test_every_bad_outcome_is_listed_with_its_line_and_value(audit_json, write_file):
    bad = {  # line -> (cell as written, text the reason must contain)
        10: ("", "empty"),
        11: ("NA", "'NA'"),
        12: ("NaN", "'NaN'"),
        13: ("inf", "'inf'"),
        14: ("-Infinity", "'-Infinity'"),
        15: ("1e999", "'1e999'"),
        16: ('"27,5"', "'27,5'"),
        17: ("about 30", "'about 30'"),
        18: ("30 cm", "'30 cm'"),
        19: ("-", "'-'"),
    }
    rows = PLANTS + [("loam" if line % 2 else "clay", cell) for line, (cell, _) in sorted(bad.items())]
    doc = run_plants(audit_json, write_file("messy.csv", table(rows)))
    reasons = excluded(doc)
    assert sorted(reasons) == sorted(bad)
    for line, (_, fragment) in bad.items():
        assert fragment in reasons[line], (line, reasons[line])
        assert reasons[line].startswith("height_cm")
    assert [e["row"] for e in doc["data"]["excluded"]] == sorted(bad)  # listed in file order
    assert heights(doc, "loam")["missing"] + heights(doc, "clay")["missing"] == len(bad)


def test_accepted_number_forms(audit_json, write_file):
    rows = [("loam", " 31.5 "), ("loam", "+29"), ("loam", "3.3e1"), ("loam", ".305e2"),
            ("clay", "24."), ("clay", "2.65E+01"), ("clay", "22.5"), ("clay", "25")]
    doc = run_plants(audit_json, write_file("forms.csv", table(rows)))
    assert doc["data"]["excluded"] == []
    assert heights(doc, "loam")["mean"] == pytest.approx(statistics.mean([31.5, 29, 33, 30.5]))
    assert heights(doc, "clay")["max"] == pytest.approx(26.5)


def test_rows_of_other_levels_are_counted_not_excluded(audit_json, write_file):
    rows = PLANTS + [("sand", "18.0"), ("sand", "oops"), ("peat", "35.0")]
    doc = run_plants(audit_json, write_file("soils.csv", table(rows)), "--groups", "loam,clay")
    assert doc["data"]["not_selected"] == {"sand": 2, "peat": 1}
    assert doc["data"]["excluded"] == []
    assert doc["data"]["rows_read"] == 11


# ------------------------------------------------------------------ which group is A


def test_order_of_first_appearance_sets_a_and_b(audit_json, write_file):
    clay_first = [PLANTS[1]] + PLANTS[:1] + PLANTS[2:]
    doc = run_plants(audit_json, write_file("clay_first.csv", table(clay_first)))
    assert [g["label"] for g in doc["groups"]] == ["clay", "loam"]
    assert doc["direction"] == "clay relative to loam"
    clay, loam = heights(doc, "clay")["mean"], heights(doc, "loam")["mean"]
    assert doc["effects"]["mean_difference"]["estimate"] == pytest.approx(clay - loam)
    assert doc["effects"]["mean_difference"]["estimate"] < 0


def test_groups_option_reorders_and_flips_signs(audit_json, write_file):
    path = write_file("plants.csv", table(PLANTS))
    natural = run_plants(audit_json, path)
    flipped = run_plants(audit_json, path, "--groups", "clay,loam")
    assert natural["direction"] == "loam relative to clay"
    assert flipped["direction"] == "clay relative to loam"
    assert [g["label"] for g in flipped["groups"]] == ["clay", "loam"]
    md, md_flipped = natural["effects"]["mean_difference"], flipped["effects"]["mean_difference"]
    assert md["estimate"] > 0
    assert md_flipped["estimate"] == pytest.approx(-md["estimate"])
    assert md_flipped["ci_low"] == pytest.approx(-md["ci_high"])
    assert md_flipped["ci_high"] == pytest.approx(-md["ci_low"])
    for name in ("cohen_d", "cliff_delta", "hodges_lehmann"):
        assert flipped["effects"][name]["estimate"] == pytest.approx(
            -natural["effects"][name]["estimate"]), name
    assert flipped["effects"]["prob_superiority"]["estimate"] == pytest.approx(
        1 - natural["effects"]["prob_superiority"]["estimate"])


# ------------------------------------------------------------------ property: accounting


_ROW_KINDS = st.sampled_from(["good", "good", "good", "blank", "bad_outcome", "bad_group",
                              "other_level"])
_BAD_OUTCOMES = st.sampled_from(["", "NA", "x", "inf", "1,5", "-"])


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(kinds=st.lists(st.tuples(_ROW_KINDS, st.sampled_from(["loam", "clay"]), _BAD_OUTCOMES,
                                st.integers(10, 40)), max_size=25))
@pytest.mark.slow
def test_every_line_is_accounted_for(run_cli, strict_json, kinds):
    lines = ["soil,height_cm"] + [f"{s},{h}" for s, h in PLANTS]  # lines 1-9
    expected_bad, expected_other, rows = [], 0, len(PLANTS)
    for kind, soil, bad_cell, value in kinds:
        number = len(lines) + 1
        if kind == "blank":
            lines.append("")
            continue
        rows += 1
        if kind == "good":
            lines.append(f"{soil},{value}")
        elif kind == "bad_outcome":
            lines.append(f'{soil},"{bad_cell}"')
            expected_bad.append(number)
        elif kind == "bad_group":
            lines.append(f",{value}")
            expected_bad.append(number)
        else:
            lines.append(f"sand,{value}")
            expected_other += 1
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "plants.csv"
        path.write_text("\n".join(lines) + "\n", encoding="utf-8")
        args = ["check", path, "--outcome", "height_cm", "--group", "soil", "--boot", 100,
                "--json", "-", "--quiet"]
        if expected_other:
            args += ["--groups", "loam,clay"]
        res = run_cli(*args)
    assert res.code == 0, res.err
    doc = strict_json(res.out)
    assert_accounting(doc)
    assert doc["data"]["rows_read"] == rows
    assert [e["row"] for e in doc["data"]["excluded"]] == expected_bad
    assert sum(doc["data"]["not_selected"].values()) == expected_other
