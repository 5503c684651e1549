"""Designs the audit does not cover, found before any statistic: each stops the audit with one
line saying what the file looks like and what to run instead, or, where the audit can still be
read meaningfully, is let through by a stated override that the report then records.

The audit covers four designs: two or k independent groups (one row per participant), and two
or k conditions measured on the same participants. It looks at the columns beside the ones
named, and stops when:

- `repeated_rows` (independent groups): a participant's id repeats. Either the same participant
  sits in two groups (conditions on the same participants: give --subject), or is measured
  several times within one group (rows are not independent: aggregate to one row per
  participant, or give --subject for the repeated conditions). An id column is one whose name
  says so (id, subject, participant_id, patient_no, ...), or one with five or more values each
  of which appears exactly once in every group (a long file of repeated conditions). Override: the rows are independent
  after all (`independent_rows`).
- `factorial` (independent groups): a second grouping column is crossed with the group column:
  every combination of their levels holds at least two rows, and the combinations are balanced
  (equal counts, as in a designed experiment) or the column's name says it is an allocation
  (arm, treatment, dose, ...). The audit would compare the groups pooled over the other factor.
  Override: that is the comparison wanted (`one_factor`).
- `mixed` (repeated conditions): a column constant within each participant splits them into two
  or more groups (a between-participant factor crossed with the conditions), balanced or named
  as an allocation. Override: compare the conditions pooled over it (`one_factor`).
- `single_rows` (repeated conditions, long file): no participant id appears twice, so no one was
  measured in more than one condition.

A covariate that merely varies (sex, site, age group with unequal counts) is not a second factor
by these rules: the rules look for the marks of a design, not for every column with levels.
"""

from __future__ import annotations

import re
from collections import Counter, defaultdict

from auditor.errors import DesignError
from auditor.load import MISSING_MARKERS, Table, parse_numbers

OVERRIDES = {
    "independent_rows": "--independent-rows",
    "one_factor": "--one-factor",
}
ID_WORDS = frozenset({"id", "ids", "subject", "subj", "participant", "person", "patient",
                      "respondent", "pupil", "student", "athlete", "rider", "animal", "mouse",
                      "rat", "pid", "sid", "uid", "case"})
ID_SUFFIXES = frozenset({"no", "nr", "num", "number", "code", "key"})  # patient_no, subject_code
ALLOCATION_WORDS = frozenset({"arm", "treatment", "allocation", "intervention", "dose", "drug",
                              "condition", "factor"})
MAX_LEVELS = 8  # a grouping column has 2 to this many levels
MAX_COLUMNS_READ = 300  # above this many columns only the id-named ones are looked at
MAX_CELLS_READ = 2_000_000  # ... and above this many cells of the other columns


def _words(name: str) -> set[str]:
    return {w for w in re.split(r"[^0-9a-z]+", name.lower()) if w}


def is_id_name(name: str) -> bool:
    """Whether a column's name says it holds participant ids: its words are id-words (id,
    subject, participant, patient, ...), with at most a suffix such as no or code
    (participant_id, patient_no); subject_age is not one."""
    words = _words(name)
    return bool(words & ID_WORDS) and words <= ID_WORDS | ID_SUFFIXES


def columns_to_look_at(header: tuple[str, ...], named: list[str], rows: int) -> list[str]:
    """The columns the guard reads beside the named ones, in a table of `rows` rows: all of them
    (but names the header holds twice, which cannot be read by name), or only the id-named ones
    when there are more than MAX_COLUMNS_READ columns or the others would hold more than
    MAX_CELLS_READ cells (the check then costs no more than reading one batch of a screen)."""
    twice = {c for c, k in Counter(header).items() if k > 1}  # ambiguous: not read by name
    others = [c for c in dict.fromkeys(header) if c not in named and c.strip()
              and c not in twice]
    if len(header) > MAX_COLUMNS_READ or len(others) * rows > MAX_CELLS_READ:
        others = [c for c in others if is_id_name(c)]
    return others


def _filled(cell: str) -> bool:
    text = cell.strip()
    return bool(text) and text.lower() not in MISSING_MARKERS


def _text_like(cells: list[str]) -> bool:
    """Fewer than half of the filled cells are numbers (a label column, not a measurement)."""
    filled = [c for c in cells if _filled(c)]
    if not filled:
        return False
    _, reasons = parse_numbers(tuple(filled))
    return sum(r is not None for r in reasons) * 2 > len(filled)


def _stop(code: str, message: str, overrides: frozenset) -> str | None:
    """The note an override leaves, or a DesignError when the design is not overridden."""
    flag = {"repeated_rows": "independent_rows", "factorial": "one_factor",
            "mixed": "one_factor"}.get(code)
    if flag is not None and flag in overrides:
        return f"design check '{code}' overridden with {OVERRIDES[flag]}: {message}"
    hint = f"; or, if the audit is what you mean, {OVERRIDES[flag]}" if flag else ""
    raise DesignError(message + hint)


def _lines(table: Table, rows: list[int]) -> str:
    shown = ", ".join(str(int(table.lines[i])) for i in rows[:3])
    return shown + (", ..." if len(rows) > 3 else "")


def check_independent(table: Table, named: list[str], group: str, levels: list[str],
                      overrides: frozenset = frozenset()) -> tuple[str, ...]:
    """The guard of an independent-groups audit by `group` over the chosen `levels`, `named` the
    columns the audit uses (module docstring): a DesignError, or the notes of the overrides that
    let the audit on."""
    labels = [c.strip() for c in table.columns[group]]
    chosen = set(levels)
    used = [i for i, lab in enumerate(labels) if lab in chosen]
    notes = []
    others = [c for c in table.columns if c not in named and c != group]
    for column in others:
        cells = [table.columns[column][i].strip() for i in used]
        note = _repeated_ids(table, column, cells, [labels[i] for i in used], used, group,
                             levels, overrides)
        if note:
            notes.append(note)
    for column in others:
        if is_id_name(column):
            continue
        cells = [table.columns[column][i].strip() for i in used]
        if not _text_like(cells):
            continue
        note = _crossed(table, column, cells, [labels[i] for i in used], group, levels,
                        overrides)
        if note:
            notes.append(note)
    return tuple(notes)


def _repeated_ids(table, column, cells, labels, used, group, levels, overrides):
    present = [k for k, c in enumerate(cells) if _filled(c)]
    if len(present) < 2:
        return None
    counts = Counter(cells[k] for k in present)
    by_id: dict[str, list[int]] = defaultdict(list)
    for k in present:
        by_id[cells[k]].append(k)
    once_per_group = (len(counts) >= 5 and len(present) == len(cells) and all(
        sorted(labels[k] for k in members) == sorted(levels) for members in by_id.values()))
    if not (is_id_name(column) or once_per_group):
        return None
    repeated = next((pid for pid in counts if counts[pid] > 1), None)
    if repeated is None:
        return None
    members = by_id[repeated]
    groups_of = list(dict.fromkeys(labels[k] for k in members))
    rows = [used[k] for k in members]
    if len(groups_of) > 1:
        message = (f"{table.path}: '{column}' looks like a participant id and '{repeated}' is in"
                   f" {' and '.join(repr(g) for g in groups_of[:2])} (lines"
                   f" {_lines(table, rows)}): the same participants under several conditions"
                   f" are not independent groups; give --subject {column}")
    else:
        message = (f"{table.path}: participant '{repeated}' of '{column}' has"
                   f" {len(members)} rows in '{groups_of[0]}' (lines {_lines(table, rows)}):"
                   " the independent-groups audit needs one row per participant; aggregate"
                   " each participant's rows (e.g. their mean) first, or give --subject"
                   f" {column} when the rows are repeated conditions")
    return _stop("repeated_rows", message, overrides)


def _crossed(table, column, cells, labels, group, levels, overrides):
    present = [k for k, c in enumerate(cells) if _filled(c)]
    if len(present) != len(cells):
        return None  # a factor of the design has no missing cells
    kinds = list(dict.fromkeys(cells))
    if not 2 <= len(kinds) <= MAX_LEVELS:
        return None
    counts = Counter(zip(labels, cells))
    cells_needed = [(g, v) for g in levels for v in kinds]
    if any(counts.get(key, 0) < 2 for key in cells_needed):
        return None
    balanced = len({counts[key] for key in cells_needed}) == 1
    if not (balanced or _words(column) & ALLOCATION_WORDS):
        return None
    message = (f"{table.path}: '{column}' ({', '.join(kinds[:4])}{', ...' if len(kinds) > 4 else ''})"
               f" is crossed with '{group}' (every combination has rows"
               f"{', ' + str(counts[cells_needed[0]]) + ' each' if balanced else ''}): a"
               f" factorial design, where this audit would compare the levels of '{group}'"
               f" pooled over '{column}'; audit one level of '{column}' at a time (a file or"
               " data frame filtered to it)")
    return _stop("factorial", message, overrides)


def check_repeated(table: Table, group: str | None, subject: str | None, named: list[str],
                   levels: list[str] | None = None,
                   overrides: frozenset = frozenset()) -> tuple[str, ...]:
    """The guard of a paired or repeated-measures audit: long (`group` holds the conditions,
    `subject` the participant) or wide (`group` None, one row per participant). `named` are the
    columns the audit uses. A DesignError, or the notes of the overrides that let the audit on."""
    notes = []
    if group is not None and subject is not None:
        labels = [c.strip() for c in table.columns[group]]
        keep = set(levels) if levels else None
        used = [i for i, lab in enumerate(labels) if _filled(lab) and (keep is None or lab in keep)]
        ids = [table.columns[subject][i].strip() for i in used]
        counted = Counter(pid for pid in ids if _filled(pid))
        if len(counted) >= 2 and max(counted.values()) == 1:
            raise DesignError(f"{table.path}: every id of '{subject}' appears on one row only, so"
                              " no participant was measured in more than one condition; these"
                              " look like independent groups: leave out --subject")
        rows_of: dict[str, list[int]] = defaultdict(list)
        for i, pid in zip(used, ids):
            if _filled(pid):
                rows_of[pid].append(i)
    else:
        rows_of = {str(i): [i] for i in range(table.n_rows)}  # wide: a row is a participant
    for column in table.columns:
        if column in named or is_id_name(column):
            continue
        values = {}
        for pid, rows in rows_of.items():
            cells = {table.columns[column][i].strip() for i in rows}
            if len(cells) != 1:
                break  # varies within a participant: not a between-participant factor
            values[pid] = cells.pop()
        else:
            note = _between(table, column, values, group, overrides)
            if note:
                notes.append(note)
    return tuple(notes)


def _between(table, column, values: dict, group, overrides):
    cells = list(values.values())
    if not cells or not all(_filled(c) for c in cells) or not _text_like(cells):
        return None
    counts = Counter(cells)
    if not 2 <= len(counts) <= MAX_LEVELS or min(counts.values()) < 2:
        return None
    balanced = len(set(counts.values())) == 1
    if not (balanced or _words(column) & ALLOCATION_WORDS):
        return None
    kinds = list(counts)
    within = f"the conditions of '{group}'" if group else "the condition columns"
    message = (f"{table.path}: '{column}' ({', '.join(kinds[:4])}{', ...' if len(kinds) > 4 else ''})"
               f" splits the participants into groups ({', '.join(str(counts[k]) for k in kinds[:4])}"
               f" participants) crossed with {within}: a mixed design, which this audit does not"
               f" cover; audit the conditions within one level of '{column}' at a time (filter"
               f" the file), or compare the levels of '{column}' on each participant's change"
               " (one row per participant) as independent groups")
    return _stop("mixed", message, overrides)
