"""Turn a table into a design: which values are compared, how they pair, and which rows were left
out and why.

Four designs, detected from the arguments:
- two_independent: --group G with two levels (or --groups naming two);
- k_independent:   --group G with three or more levels;
- paired:          --paired COL_A,COL_B (wide) or --subject ID --group G with two levels (long);
- k_repeated:      --paired with three or more columns, or --subject ID --group G with three or
                   more levels.
Direction is fixed here once: conditions keep the order given (or of first appearance); in a
two-condition design every signed effect is the first relative to the second.
"""

from __future__ import annotations

import re
from collections import Counter, defaultdict
from dataclasses import dataclass

import numpy as np

from auditor.errors import DesignError
from auditor.load import MISSING_MARKERS, Table, parse_numbers, suggest
from auditor.results import DataAccount, Exclusion

MIN_PER_GROUP = 2
MIN_PARTICIPANTS = 3
_DECIMALS = re.compile(r"^[+-]?\d*\.(\d+)$")


@dataclass(frozen=True)
class Groups:
    """Independent groups: values and file lines of each, and the data accounting."""

    outcome: str
    group_column: str
    labels: tuple[str, ...]
    values: tuple[np.ndarray, ...]
    rows: tuple[np.ndarray, ...]
    missing: tuple[int, ...]
    account: DataAccount

    @property
    def kind(self) -> str:
        return "two_independent" if len(self.labels) == 2 else "k_independent"

    @property
    def a(self) -> np.ndarray:
        return self.values[0]

    @property
    def b(self) -> np.ndarray:
        return self.values[1]


TwoGroups = Groups  # the two-group case is the same object with two levels


@dataclass(frozen=True)
class Repeated:
    """Conditions measured on the same participants: one row of `matrix` per complete participant.

    `rows[i]` is the first file line of participant i; `subjects[i]` its id (the line number as
    text when the file is wide and has no id column). `decimals` is the largest number of decimal
    places in the values used (None when a value is written with an exponent).
    """

    outcome: str
    group_column: str | None
    subject_column: str | None
    labels: tuple[str, ...]
    matrix: np.ndarray
    rows: np.ndarray
    subjects: tuple[str, ...]
    decimals: int | None
    account: DataAccount
    cell_rows: np.ndarray | None = None  # file line of each value, shape (n, k)
    missing: tuple[int, ...] = ()  # per condition: participants left out for lacking it

    @property
    def kind(self) -> str:
        return "paired" if len(self.labels) == 2 else "k_repeated"

    @property
    def a(self) -> np.ndarray:
        return self.matrix[:, 0]

    @property
    def b(self) -> np.ndarray:
        return self.matrix[:, 1]


def parse_group_list(text: str, option: str = "--groups") -> list[str]:
    """Split a value such as 'treated,control' into labels (blanks around commas dropped)."""
    labels = [part.strip() for part in text.split(",")]
    if any(not lab for lab in labels):
        raise DesignError(f"{option} '{text}': a name is empty; write names separated by commas")
    duplicated = [lab for lab, c in Counter(labels).items() if c > 1]
    if duplicated:
        raise DesignError(f"{option} '{text}': '{duplicated[0]}' is named twice")
    return labels


def data_decimals(cells) -> int | None:
    """Largest number of decimal places among numeric text cells; None if any uses an exponent."""
    most = 0
    for cell in cells:
        s = cell.strip()
        if "e" in s.lower():
            return None
        m = _DECIMALS.match(s)
        if m:
            most = max(most, len(m.group(1)))
    return most


def is_missing(label: str) -> bool:
    """Whether a label (blanks trimmed) is empty or a missing marker such as NA."""
    return label.lower() in MISSING_MARKERS



def ordered_levels(labels: list[str]) -> list[str]:
    return list(dict.fromkeys(lab for lab in labels if not is_missing(lab)))


def _account(table: Table, used: int, excluded: list[Exclusion], not_selected,
             notes: tuple[str, ...] = ()) -> DataAccount:
    return DataAccount(
        source=table.path, rows_read=table.n_rows, rows_used=used,
        excluded=tuple(sorted(excluded, key=lambda e: e.row)), not_selected=dict(not_selected),
        blank_lines=table.blank_lines, encoding=table.encoding, delimiter=table.delimiter,
        notes=notes,
    )


def label_notes(raw_labels, what: str = "group") -> tuple[str, ...]:
    """Say how labels were read when that could surprise: labels written with surrounding blanks
    are trimmed (so 'A ' counts as 'A'), and levels that differ only in upper/lower case are kept
    apart (so 'A' and 'a' are two levels)."""
    notes = []
    padded: dict[str, set[str]] = {}
    for raw in raw_labels:
        lab = raw.strip()
        if raw != lab and lab:
            padded.setdefault(lab, set()).add(raw)
    for lab, variants in padded.items():
        shown = ", ".join(f"'{v}'" for v in sorted(variants)[:3])
        notes.append(f"{what} labels {shown} were read as '{lab}' (surrounding blanks trimmed)")
    by_case: dict[str, set[str]] = {}
    for raw in raw_labels:
        lab = raw.strip()
        if lab and not is_missing(lab):
            by_case.setdefault(lab.lower(), set()).add(lab)
    for variants in by_case.values():
        if len(variants) > 1:
            shown = " and ".join(f"'{v}'" for v in sorted(variants))
            notes.append(f"{what} levels {shown} differ only in upper/lower case and are kept"
                         " apart; make them equal in the file if they are one group")
    return tuple(notes)


# ------------------------------------------------------------------ independent groups


def independent_groups(table: Table, outcome: str, group: str,
                       groups: list[str] | None = None) -> Groups:
    """Two or more independent groups from long-format columns `outcome` and `group`.

    Rows whose group is empty (or a missing marker such as NA) and rows of the chosen groups whose
    outcome is not a finite number are excluded with their line and a reason. Rows of other levels
    are counted apart in `not_selected`. Group labels are compared after trimming blanks.
    """
    if outcome == group:
        raise DesignError(f"the outcome and the group are the same column '{outcome}'")
    labels_all = [lab.strip() for lab in table.columns[group]]
    chosen = choose_levels(ordered_levels(labels_all), groups, table.path, group, "--groups")

    values, reasons = parse_numbers(table.columns[outcome], what=f"{outcome}")
    excluded: list[Exclusion] = []
    not_selected: Counter[str] = Counter()
    index = {lab: i for i, lab in enumerate(chosen)}
    members: list[list[int]] = [[] for _ in chosen]
    missing = [0] * len(chosen)
    first_reason: dict[int, str] = {}  # per chosen group: the first exclusion, shown if it empties
    lines = table.lines
    for i, lab in enumerate(labels_all):
        if i in table.shape_problems:
            excluded.append(Exclusion(int(lines[i]), table.shape_problems[i]))
            if lab in index:
                missing[index[lab]] += 1
                first_reason.setdefault(index[lab], f"line {lines[i]}: {table.shape_problems[i]}")
            continue
        if is_missing(lab):
            excluded.append(Exclusion(int(lines[i]), f"{group} is empty" if not lab
                                      else f"{group} is missing ('{lab}')"))
            continue
        k = index.get(lab)
        if k is None:
            not_selected[lab] += 1
            continue
        if reasons[i] is not None:
            excluded.append(Exclusion(int(lines[i]), reasons[i]))
            missing[k] += 1
            first_reason.setdefault(k, f"line {lines[i]}: {reasons[i]}")
            continue
        members[k].append(i)

    for k, (lab, m) in enumerate(zip(chosen, members)):
        if len(m) < MIN_PER_GROUP:
            why = f" (first excluded row, {first_reason[k]})" if k in first_reason else ""
            raise DesignError(
                f"{table.path}: group '{lab}' has {len(m)} valid value(s) of '{outcome}';"
                f" at least {MIN_PER_GROUP} are needed per group{why}"
            )
    idx = [np.asarray(m, dtype=np.int64) for m in members]
    return Groups(
        outcome=outcome, group_column=group, labels=tuple(chosen),
        values=tuple(values[i] for i in idx), rows=tuple(lines[i] for i in idx),
        missing=tuple(missing),
        account=_account(table, sum(len(m) for m in members), excluded, not_selected,
                         label_notes(table.columns[group])),
    )


def two_groups(table: Table, outcome: str, group: str, groups: list[str] | None = None) -> Groups:
    """Exactly two independent groups (A = first, B = second); an error naming the levels
    otherwise."""
    design = independent_groups(table, outcome, group, groups)
    if len(design.labels) != 2:
        shown = ", ".join(f"'{lab}'" for lab in design.labels)
        raise DesignError(f"{table.path}: column '{group}' has {len(design.labels)} levels"
                          f" ({shown}); choose two with --groups A,B")
    return design


def choose_levels(levels: list[str], chosen: list[str] | None, path: str, column: str,
                   option: str) -> list[str]:
    shown = ", ".join(f"'{lev}'" for lev in levels[:12]) + (" ..." if len(levels) > 12 else "")
    if chosen is None:
        if len(levels) < 2:
            raise DesignError(
                f"{path}: column '{column}' has {len(levels)} group level(s) ({shown or 'none'});"
                " two or more are needed to compare"
            )
        return levels
    if len(chosen) < 2:
        raise DesignError(f"{option} names {len(chosen)} level(s); name two or more, as A,B")
    for lab in chosen:
        if lab not in levels:
            marker = (f"; '{lab}' is read as a missing-value marker, so its rows are excluded"
                      " (rename the level in the file)" if is_missing(lab) else "")
            raise DesignError(
                f"{path}: column '{column}' has no level '{lab}'; {suggest(lab, levels, 'levels')}"
                f"{marker}"
            )
    return list(chosen)


# ------------------------------------------------------------------ repeated measures


def wide_repeated(table: Table, columns: list[str], subject: str | None = None) -> Repeated:
    """Paired or repeated measures in wide format: one row per participant, one column per
    condition. A row with any condition missing or not a finite number is excluded (the whole
    participant), with the reason naming the column."""
    if len(columns) < 2:
        raise DesignError("--paired needs two or more columns, as BEFORE,AFTER")
    if subject in columns:
        raise DesignError(f"--subject '{subject}' is also one of the --paired columns; the"
                          " participant id needs a column of its own")
    missing = [0] * len(columns)
    parsed = [parse_numbers(table.columns[c], what=c) for c in columns]
    ids = ([s.strip() for s in table.columns[subject]] if subject
           else [str(int(line)) for line in table.lines])
    excluded: list[Exclusion] = []
    keep: list[int] = []
    seen: dict[str, int] = {}
    for i in range(table.n_rows):
        line = int(table.lines[i])
        if i in table.shape_problems:
            excluded.append(Exclusion(line, table.shape_problems[i]))
            continue
        if subject and is_missing(ids[i]):
            excluded.append(Exclusion(line, f"{subject} (participant id) is empty"))
            continue
        problems = [reasons[i] for _, reasons in parsed if reasons[i] is not None]
        for k, (_, reasons) in enumerate(parsed):
            missing[k] += reasons[i] is not None
        if problems:
            excluded.append(Exclusion(line, "participant left out: " + "; ".join(problems)))
            continue
        if subject and ids[i] in seen:
            raise DesignError(f"{table.path}: participant '{ids[i]}' appears on lines"
                              f" {seen[ids[i]]} and {line}; give each participant one row")
        seen[ids[i]] = line
        keep.append(i)
    _check_participants(len(keep), table.path)
    idx = np.asarray(keep, dtype=np.int64)
    matrix = np.column_stack([values[idx] for values, _ in parsed])
    cells = [table.columns[c][i] for c in columns for i in keep]
    return Repeated(
        outcome=", ".join(columns), group_column=None, subject_column=subject,
        labels=tuple(columns), matrix=matrix, rows=table.lines[idx],
        subjects=tuple(ids[i] for i in keep), decimals=data_decimals(cells),
        account=_account(table, len(keep), excluded, {}),
        cell_rows=np.repeat(table.lines[idx][:, None], len(columns), axis=1),
        missing=tuple(missing),
    )


def long_repeated(table: Table, outcome: str, group: str, subject: str,
                  groups: list[str] | None = None) -> Repeated:
    """Paired or repeated measures in long format: one row per participant and condition.

    A participant id repeated within a condition is an error naming the id and the lines.
    Participants lacking a valid value in any chosen condition are excluded whole: each of their
    rows is listed with the reason.
    """
    if len({outcome, group, subject}) < 3:
        raise DesignError("--outcome, --group and --subject must name three different columns")
    labels_all = [lab.strip() for lab in table.columns[group]]
    ids = [s.strip() for s in table.columns[subject]]
    chosen = choose_levels(ordered_levels(labels_all), groups, table.path, group, "--groups")
    values, reasons = parse_numbers(table.columns[outcome], what=outcome)
    index = {lab: k for k, lab in enumerate(chosen)}
    excluded: list[Exclusion] = []
    not_selected: Counter[str] = Counter()
    cell: dict[tuple[str, int], int] = {}
    rows_of: dict[str, list[int]] = defaultdict(list)
    bad: dict[str, list[str]] = defaultdict(list)
    for i, lab in enumerate(labels_all):
        line = int(table.lines[i])
        if i in table.shape_problems:
            excluded.append(Exclusion(line, table.shape_problems[i]))
            continue
        if is_missing(lab):
            excluded.append(Exclusion(line, f"{group} is empty" if not lab
                                      else f"{group} is missing ('{lab}')"))
            continue
        if lab not in index:
            not_selected[lab] += 1
            continue
        if is_missing(ids[i]):
            excluded.append(Exclusion(line, f"{subject} (participant id) is empty"))
            continue
        key = (ids[i], index[lab])
        if key in cell:
            first = int(table.lines[cell[key]])
            raise DesignError(f"{table.path}: participant '{ids[i]}' has two rows for '{lab}'"
                              f" (lines {first} and {line}); keep one row per participant and"
                              " condition")
        cell[key] = i
        rows_of[ids[i]].append(i)
        if reasons[i] is not None:
            bad[ids[i]].append(f"{reasons[i]} (line {line})")
    complete: list[str] = []
    missing = [0] * len(chosen)
    for pid, members in rows_of.items():
        have = {index[labels_all[i]] for i in members}
        problems = list(bad.get(pid, []))
        problems += [f"no row for '{chosen[k]}'" for k in range(len(chosen)) if k not in have]
        for k in range(len(chosen)):
            i = cell.get((pid, k))
            missing[k] += i is None or reasons[i] is not None
        if problems:
            for i in members:
                excluded.append(Exclusion(int(table.lines[i]),
                                          f"participant '{pid}' left out: " + "; ".join(problems)))
        else:
            complete.append(pid)
    _check_participants(len(complete), table.path)
    matrix = np.array([[values[cell[(pid, k)]] for k in range(len(chosen))] for pid in complete])
    first_lines = np.array([min(int(table.lines[i]) for i in rows_of[pid]) for pid in complete],
                           dtype=np.int64)
    used_cells = [table.columns[outcome][cell[(pid, k)]] for pid in complete
                  for k in range(len(chosen))]
    return Repeated(
        outcome=outcome, group_column=group, subject_column=subject, labels=tuple(chosen),
        matrix=matrix, rows=first_lines, subjects=tuple(complete),
        decimals=data_decimals(used_cells),
        account=_account(table, len(complete) * len(chosen), excluded, not_selected),
        cell_rows=np.array([[int(table.lines[cell[(pid, k)]]) for k in range(len(chosen))]
                            for pid in complete], dtype=np.int64),
        missing=tuple(missing),
    )


def _check_participants(n: int, path: str) -> None:
    if n < MIN_PARTICIPANTS:
        raise DesignError(f"{path}: {n} complete participant(s); at least {MIN_PARTICIPANTS} are"
                          " needed for a paired or repeated-measures audit")
