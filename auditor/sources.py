"""The data files of a screen of many: files, folders and patterns named on the command line, or
a manifest listing each file with its own options.

A folder stands for the data files directly inside it (.csv, .tsv, .tab, .txt, .xlsx, .xlsm; not
its subfolders), in name order. A name with *, ? or [ that is not itself a file is a pattern
(Python's glob, `**` for any depth), its files in name order. Everything else must be a file.

A manifest is a CSV file with a header line naming its columns: `file` (required), and any of
`group`, `groups`, `subject`, `outcomes`, `exclude`, each with the meaning of the option of the
same name; list cells hold names separated by commas (quote the cell). An empty cell takes the
command line's option. A file's path is taken relative to the manifest's folder unless it is
absolute, and shown in the file column as written.
"""

from __future__ import annotations

import csv
import dataclasses
import glob
import os
from pathlib import Path

from auditor.errors import DesignError, InputFileError

DATA_SUFFIXES = (".csv", ".tsv", ".tab", ".txt", ".xlsx", ".xlsm")
MANIFEST_COLUMNS = ("file", "group", "groups", "subject", "outcomes", "exclude")
_PATTERN_CHARACTERS = set("*?[")


@dataclasses.dataclass(frozen=True)
class Source:
    """One data file of a screen of many, and how its outcomes are audited: the file as shown in
    the table's file column (`label`), where it is read from (`path`), and the options a
    single-file screen takes."""

    label: str
    path: str
    group: str
    groups: tuple[str, ...] | None = None
    subject: str | None = None
    outcomes: tuple[str, ...] | None = None
    exclude: tuple[str, ...] | None = None


def expand(names: list[str]) -> list[str]:
    """The data files that `names` stand for, each once (at its first mention), in the order
    given (a folder's and a pattern's files in name order). One line naming the entry when a folder holds no data file,
    a pattern matches none, or a name is neither a file, a folder nor a pattern."""
    found: list[str] = []
    for name in names:
        path = Path(name)
        if path.is_dir():
            inside = sorted(str(p) for p in path.iterdir()
                            if p.is_file() and p.suffix.lower() in DATA_SUFFIXES)
            if not inside:
                raise InputFileError(f"{name}: the folder holds no data file"
                                     f" ({', '.join(DATA_SUFFIXES)})")
            found += inside
        elif path.is_file():
            found.append(name)
        elif _PATTERN_CHARACTERS & set(name):
            matched = sorted(p for p in glob.glob(name, recursive=True) if Path(p).is_file())
            if not matched:
                raise InputFileError(f"{name}: no file matches this pattern")
            found += matched
        else:
            raise InputFileError(f"{name}: no such file or folder")
    once: dict[str, str] = {}  # a file named twice (by a pattern and by name, say) is screened once
    for path in found:
        once.setdefault(os.path.normcase(os.path.realpath(path)), path)
    return list(once.values())


def sources_from_paths(names: list[str], *, group: str | None, groups=None, subject=None,
                       outcomes=None, exclude=None) -> list[Source]:
    """One `Source` per data file that `names` stand for (`expand`), all with the same options."""
    if not group:
        raise DesignError("--group is required: name the column holding the groups")
    return [Source(path, path, group, _tuple(groups), subject, _tuple(outcomes), _tuple(exclude))
            for path in expand(names)]


def read_manifest(path, *, group: str | None = None, groups=None, subject=None, outcomes=None,
                  exclude=None) -> list[Source]:
    """The `Source`s a manifest lists (module docstring); the keyword options fill its empty
    cells. One line naming the manifest and its line for: no `file` column, a column the
    manifest does not know, an empty file cell, a line with no group from either side, a file
    that does not exist, a list cell that names a name twice."""
    from auditor.design import parse_group_list

    manifest = Path(path)
    try:
        with manifest.open("r", encoding="utf-8-sig", newline="") as stream:
            lines = list(csv.reader(stream))
    except OSError as exc:
        raise InputFileError(f"{manifest}: the manifest cannot be read"
                             f" ({exc.strerror or exc})") from None
    except UnicodeDecodeError:
        raise InputFileError(f"{manifest}: the manifest is not UTF-8 text; save it as UTF-8"
                             " CSV") from None
    header = [h.strip().lower() for h in lines[0]] if lines else []
    if "file" not in header:
        raise InputFileError(f"{manifest}: line 1: a manifest needs a 'file' column (and may"
                             f" have {', '.join(MANIFEST_COLUMNS[1:])})")
    unknown = [h for h in header if h not in MANIFEST_COLUMNS]
    if unknown:
        raise InputFileError(f"{manifest}: line 1: unknown column '{unknown[0]}'; a manifest's"
                             f" columns are {', '.join(MANIFEST_COLUMNS)}")
    twice = [h for h in header if header.count(h) > 1]
    if twice:
        raise InputFileError(f"{manifest}: line 1: the column '{twice[0]}' is named twice")
    defaults = {"group": group, "groups": _tuple(groups), "subject": subject,
                "outcomes": _tuple(outcomes), "exclude": _tuple(exclude)}
    base = manifest.parent
    sources = []
    for number, cells in enumerate(lines[1:], start=2):
        if not any(c.strip() for c in cells):
            continue  # a blank line
        if len(cells) > len(header):
            raise InputFileError(f"{manifest}: line {number}: {len(cells)} cells where the"
                                 f" header has {len(header)}; quote a cell that holds commas")
        row = {h: (cells[k].strip() if k < len(cells) else "") for k, h in enumerate(header)}
        where = f"{manifest}: line {number}"
        if not row["file"]:
            raise InputFileError(f"{where}: the file cell is empty")
        values = dict(defaults)
        for key in ("group", "subject"):
            if row.get(key):
                values[key] = row[key]
        for key in ("groups", "outcomes", "exclude"):
            if row.get(key):
                try:
                    values[key] = tuple(parse_group_list(row[key], key))
                except DesignError as err:
                    raise InputFileError(f"{where}: {err}") from None
        if not values["group"]:
            raise InputFileError(f"{where}: no group column: fill its group cell or give"
                                 " --group")
        target = Path(row["file"]).expanduser()
        target = target if target.is_absolute() else base / target
        if not target.is_file():
            raise InputFileError(f"{where}: {row['file']}: no such file"
                                 f" (looked for {os.path.normpath(target)})")
        sources.append(Source(row["file"], str(target), values["group"], values["groups"],
                              values["subject"], values["outcomes"], values["exclude"]))
    if not sources:
        raise InputFileError(f"{manifest}: the manifest lists no file")
    return sources


def _tuple(names) -> tuple[str, ...] | None:
    return None if not names else tuple(names)
