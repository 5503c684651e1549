"""Read a data file into text columns, keeping each row's line number.

CSV and TSV (the delimiter is detected) and `.xlsx` workbooks (first sheet) are read. Nothing is
converted or dropped here: cells stay text so that the next stage can say exactly which row was
left out and why. Line numbers count the header as line 1; for a workbook they are sheet rows.
"""

from __future__ import annotations

import codecs
import csv
import difflib
import io
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from auditor.errors import ColumnError, InputFileError

DELIMITERS = ",\t;|"
MISSING_MARKERS = frozenset({"", "na", "n/a", "nan", "null", "none", ".", "-", "missing", "#n/a"})
_NUMBER = re.compile(r"^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$")
_INFINITE = frozenset({"inf", "+inf", "-inf", "infinity", "+infinity", "-infinity"})
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")


@dataclass(frozen=True)
class Table:
    """Text cells of the columns asked for, and the file line each row came from."""

    path: str
    header: tuple[str, ...]
    columns: dict[str, tuple[str, ...]]
    lines: np.ndarray
    blank_lines: int
    encoding: str
    delimiter: str | None
    shape_problems: dict[int, str] = field(default_factory=dict)  # row index -> why the row is malformed

    @property
    def n_rows(self) -> int:
        return int(self.lines.size)


def read_table(path: str | os.PathLike, columns: list[str]) -> Table:
    """Read `columns` of the file at `path` as text, with the line number of every data row."""
    p = Path(path)
    _check_path(p)
    if p.suffix.lower() in {".xlsx", ".xlsm"}:
        header, rows, lines, blank = _read_workbook(p)
        encoding, delimiter = "xlsx", None
    else:
        codec, encoding = _detect_encoding(p)
        try:
            with p.open("r", encoding=codec, newline="") as stream:
                delimiter = _detect_delimiter(stream.read(SAMPLE_CHARS), p)
                stream.seek(0)
                header, rows, lines, blank = _read_text(stream, delimiter, p, columns)
        except OSError as exc:
            raise InputFileError(f"{p}: cannot be read ({exc.strerror or exc})") from None
    if not header or all(not h.strip() for h in header):
        raise InputFileError(f"{p}: the file is empty or has no header line")
    header = tuple(h.strip() for h in header)
    names = list(dict.fromkeys(columns))
    width = len(header)
    if encoding != "xlsx":  # rows hold the asked columns, then the row's field count
        cols = {name: tuple(r[k] for r in rows) for k, name in enumerate(names)}
        problems = {k: f"the line has {r[-1]} fields where the header has {width}"
                    for k, r in enumerate(rows) if r[-1] != width}
    else:
        positions = {name: column_position(header, name, p) for name in names}
        cols = {
            name: tuple(r[i] if i < len(r) else "" for r in rows) for name, i in positions.items()
        }
        problems = {k: f"the line has {len(r)} fields where the header has {width}"
                    for k, r in enumerate(rows) if len(r) != width}
    return Table(str(p), header, cols, np.asarray(lines, dtype=np.int64), blank, encoding,
                 delimiter, problems)


def column_position(header: tuple[str, ...], name: str, path: Path) -> int:
    """Index of column `name`; a clear error (with the closest names) if absent or repeated."""
    hits = [i for i, h in enumerate(header) if h == name]
    if len(hits) > 1:
        places = ", ".join(str(i + 1) for i in hits)
        raise ColumnError(
            f"{path}: column '{name}' appears {len(hits)} times in the header (positions {places});"
            " rename the copies so each column name is unique"
        )
    if hits:
        return hits[0]
    raise ColumnError(f"{path}: no column named '{name}'; {suggest(name, header)}")


def suggest(name: str, choices: tuple[str, ...] | list[str], noun: str = "columns") -> str:
    """'did you mean ...' text for a name that was not found among `choices`."""
    lowered = {c.lower(): c for c in choices}
    close = [lowered[name.lower()]] if name.lower() in lowered else []
    close += [c for c in difflib.get_close_matches(name, list(choices), n=3, cutoff=0.5)
              if c not in close]
    shown = ", ".join(f"'{c}'" for c in list(choices)[:20])
    more = " ..." if len(choices) > 20 else ""
    if close:
        return f"did you mean {' or '.join(repr(c) for c in close)}? {noun.capitalize()} are: {shown}{more}"
    return f"{noun} are: {shown}{more}"


def parse_numbers(cells: tuple[str, ...] | list[str], what: str = "outcome"):
    """Convert text cells to floats.

    Returns `(values, reasons)`: `values` holds NaN where a cell is not a finite number and
    `reasons[i]` says why (None for valid cells). Accepted: plain decimal numbers with an optional
    sign and exponent, surrounding blanks ignored. Refused with a reason: empty cells and missing
    markers (NA, NaN, ...), infinities and overflowing values, text, and decimal commas.
    """
    values = np.full(len(cells), np.nan)
    reasons: list[str | None] = [None] * len(cells)
    for i, raw in enumerate(cells):
        s = raw.strip()
        if _NUMBER.match(s):
            v = float(s)
            if np.isfinite(v):
                values[i] = v
            else:
                reasons[i] = f"{what} '{_short(s)}' is too large to be a finite number"
            continue
        low = s.lower()
        if s == "":
            reasons[i] = f"{what} is empty"
        elif low in MISSING_MARKERS:
            reasons[i] = f"{what} is missing ('{_short(s)}')"
        elif low in _INFINITE:
            reasons[i] = f"{what} '{_short(s)}' is not finite"
        elif _DECIMAL_COMMA.match(s):
            reasons[i] = f"{what} '{_short(s)}' has a decimal comma; use a point"
        else:
            reasons[i] = f"{what} '{_short(s)}' is not a number"
    return values, reasons


def _short(s: str, limit: int = 40) -> str:
    return s if len(s) <= limit else s[: limit - 3] + "..."


def _check_path(p: Path) -> None:
    if not p.exists():
        raise InputFileError(f"{p}: no such file")
    if p.is_dir():
        raise InputFileError(f"{p}: is a folder, not a data file")
    if not os.access(p, os.R_OK):
        raise InputFileError(f"{p}: cannot be read (permission denied)")


SAMPLE_CHARS = 65536  # text the delimiter is detected from
_CHUNK_BYTES = 1 << 20


def _detect_encoding(p: Path) -> tuple[str, str]:
    """(codec to read the file with, its name for the report), found by one pass over the bytes
    in chunks, so the file is never held in memory whole: UTF-16 when it starts with a UTF-16 byte
    order mark (spreadsheets' "Unicode text"), else UTF-8 (a byte order mark is skipped) when every
    byte decodes as UTF-8, else Windows-1252 when bytes 0x80-0x9F occur and all of them are defined
    there (curly quotes and dashes), else Latin-1 (which agrees with Windows-1252 elsewhere)."""
    c1 = re.compile(rb"[\x80-\x9f]")
    undefined_in_cp1252 = re.compile(rb"[\x81\x8d\x8f\x90\x9d]")
    try:
        with p.open("rb") as f:
            head = f.read(4096)
            utf16 = head[:2] in (b"\xff\xfe", b"\xfe\xff")
            if not utf16 and b"\x00" in head:
                raise InputFileError(f"{p}: looks like a binary file, not a CSV/TSV text or .xlsx"
                                     " workbook")
            decoder = codecs.getincrementaldecoder("utf-16" if utf16 else "utf-8-sig")()
            valid, has_c1, cp1252_ok = True, False, True
            f.seek(0)
            for chunk in iter(lambda: f.read(_CHUNK_BYTES), b""):
                if valid:
                    try:
                        decoder.decode(chunk)
                    except UnicodeDecodeError:
                        valid = False
                if not utf16:
                    has_c1 = has_c1 or c1.search(chunk) is not None
                    cp1252_ok = cp1252_ok and undefined_in_cp1252.search(chunk) is None
                if utf16 and not valid:
                    break
            if valid:
                try:
                    decoder.decode(b"", final=True)
                except UnicodeDecodeError:
                    valid = False
    except OSError as exc:
        raise InputFileError(f"{p}: cannot be read ({exc.strerror or exc})") from None
    if utf16:
        if not valid:
            raise InputFileError(f"{p}: starts like UTF-16 text but does not decode as it;"
                                 " save the file as UTF-8")
        return "utf-16", "utf-16"
    if valid:
        return "utf-8-sig", "utf-8"
    if has_c1 and cp1252_ok:
        return "cp1252", "cp1252"
    return "latin-1", "latin-1"


def _detect_delimiter(text: str, p: Path) -> str:
    if p.suffix.lower() in {".tsv", ".tab"}:
        return "\t"
    first = next((line for line in text.splitlines() if line.strip()), "")
    counts = {d: first.count(d) for d in DELIMITERS}
    best = max(counts, key=lambda d: counts[d])
    if counts[best] == 0:
        return ","  # one column only; reading it as CSV is harmless
    try:
        sniffed = csv.Sniffer().sniff(text[:65536], delimiters=DELIMITERS).delimiter
        if counts.get(sniffed, 0) > 0:
            return sniffed
    except csv.Error:
        pass
    return best


def _read_text(text, delimiter: str, p: Path, columns: list[str] | None = None):
    """Header, rows, their first lines and the number of blank lines of `text` (a string, or a
    text stream opened with newline=""). With `columns`, each row keeps only the cells of those
    columns (in that order) followed by the row's field count, so a wide file costs memory for
    the columns asked for only."""
    stream = io.StringIO(text, newline="") if isinstance(text, str) else text
    reader = csv.reader(stream, delimiter=delimiter, strict=True)
    header: list[str] = []
    rows: list[list[str]] = []
    lines: list[int] = []
    blank = 0
    previous_end = 0
    keep: list[int] | None = None
    try:
        for record in reader:
            start = previous_end + 1
            previous_end = reader.line_num
            if not header:
                if record and any(c.strip() for c in record):
                    header = record
                    if columns is not None:
                        stripped = tuple(h.strip() for h in header)
                        keep = [column_position(stripped, name, p)
                                for name in dict.fromkeys(columns)]
                else:
                    blank += 1
                continue
            if not record or not any(c.strip() for c in record):
                blank += 1
                continue
            if keep is not None:
                record = [record[i] if i < len(record) else "" for i in keep] + [len(record)]
            rows.append(record)
            lines.append(start)
    except csv.Error as exc:
        raise InputFileError(f"{p}: cannot parse line {reader.line_num}: {exc}") from None
    return header, rows, lines, blank


def _read_workbook(p: Path):
    try:
        import openpyxl
    except ImportError:  # pragma: no cover - openpyxl is a dependency
        raise InputFileError(f"{p}: reading .xlsx needs the openpyxl package") from None
    try:
        book = openpyxl.load_workbook(p, read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises many kinds for a damaged file
        raise InputFileError(f"{p}: not a readable .xlsx workbook ({type(exc).__name__})") from None
    try:
        sheet = book.worksheets[0]
        sheet.reset_dimensions()  # read every row, whatever used range the file claims
        header: list[str] = []
        rows: list[list[str]] = []
        lines: list[int] = []
        blank = 0
        for number, values in enumerate(sheet.iter_rows(values_only=True), start=1):
            cells = ["" if v is None else (repr(v) if isinstance(v, float) else str(v))
                     for v in values]
            if not any(c.strip() for c in cells):
                blank += 1
                continue
            while cells and not cells[-1].strip():  # trailing empty cells carry nothing
                cells.pop()
            if not header:
                header = cells
                continue
            cells += [""] * (len(header) - len(cells))  # a sheet row may stop early
            rows.append(cells)
            lines.append(number)
    finally:
        book.close()
    return header, rows, lines, blank
