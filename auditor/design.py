"""Turn a table into a design: which values form group A and group B, and which rows were left out.

Direction is fixed here once: A is the first level (the first named by `groups`, or the first to
appear in the file) and B the second; every signed effect is A relative to B.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass

import numpy as np

from auditor.errors import DesignError
from auditor.load import MISSING_MARKERS, Table, parse_numbers, suggest
from auditor.results import DataAccount, Exclusion

MIN_PER_GROUP = 2


@dataclass(frozen=True)
class TwoGroups:
    """Two independent groups: values and file line numbers of A and B, and the data accounting."""

    outcome: str
    group_column: str
    labels: tuple[str, str]
    values: tuple[np.ndarray, np.ndarray]
    rows: tuple[np.ndarray, np.ndarray]
    missing: tuple[int, int]
    account: DataAccount

    @property
    def a(self) -> np.ndarray:
        return self.values[0]

    @property
    def b(self) -> np.ndarray:
        return self.values[1]


def parse_group_list(text: str) -> list[str]:
    """Split a `--groups` value such as 'treated,control' into labels (blanks around commas dropped)."""
    labels = [part.strip() for part in text.split(",")]
    if any(not lab for lab in labels):
        raise DesignError(f"--groups '{text}': a label is empty; write labels separated by commas")
    duplicated = [lab for lab, c in Counter(labels).items() if c > 1]
    if duplicated:
        raise DesignError(f"--groups '{text}': label '{duplicated[0]}' is named twice")
    return labels


def two_groups(table: Table, outcome: str, group: str, groups: list[str] | None = None) -> TwoGroups:
    """Build a two-independent-groups design from long-format columns `outcome` and `group`.

    Rows whose group is empty (or a missing marker such as NA) and rows of the chosen groups whose
    outcome is not a finite number are excluded with their line and a reason. Rows of other levels
    are counted apart in `not_selected`. Group labels are compared after trimming blanks.
    """
    if outcome == group:
        raise DesignError(f"the outcome and the group are the same column '{outcome}'")
    labels_raw = table.columns[group]
    labels_all = [lab.strip() for lab in labels_raw]
    levels = list(dict.fromkeys(lab for lab in labels_all if lab.lower() not in MISSING_MARKERS))
    chosen = _choose_levels(levels, groups, table.path, group)

    values, reasons = parse_numbers(table.columns[outcome], what=f"{outcome}")
    excluded: list[Exclusion] = []
    not_selected: Counter[str] = Counter()
    index = {lab: i for i, lab in enumerate(chosen)}
    members: list[list[int]] = [[] for _ in chosen]
    missing = [0] * len(chosen)
    lines = table.lines
    for i, lab in enumerate(labels_all):
        if i in table.shape_problems:
            excluded.append(Exclusion(int(lines[i]), table.shape_problems[i]))
            if lab in index:
                missing[index[lab]] += 1
            continue
        if lab.lower() in MISSING_MARKERS:
            shown = f" ('{lab}')" if lab else ""
            excluded.append(Exclusion(int(lines[i]), f"{group} is empty{shown}" if not lab
                                      else f"{group} is missing{shown}"))
            continue
        k = index.get(lab)
        if k is None:
            not_selected[lab] += 1
            continue
        if reasons[i] is not None:
            excluded.append(Exclusion(int(lines[i]), reasons[i]))
            missing[k] += 1
            continue
        members[k].append(i)

    for lab, m in zip(chosen, members):
        if len(m) < MIN_PER_GROUP:
            raise DesignError(
                f"{table.path}: group '{lab}' has {len(m)} valid value(s) of '{outcome}';"
                f" at least {MIN_PER_GROUP} are needed per group"
            )
    excluded.sort(key=lambda e: e.row)
    used = sum(len(m) for m in members)
    account = DataAccount(
        source=table.path,
        rows_read=table.n_rows,
        rows_used=used,
        excluded=tuple(excluded),
        not_selected=dict(not_selected),
        blank_lines=table.blank_lines,
        encoding=table.encoding,
        delimiter=table.delimiter,
    )
    idx = [np.asarray(m, dtype=np.int64) for m in members]
    return TwoGroups(
        outcome=outcome,
        group_column=group,
        labels=(chosen[0], chosen[1]),
        values=(values[idx[0]], values[idx[1]]),
        rows=(lines[idx[0]], lines[idx[1]]),
        missing=(missing[0], missing[1]),
        account=account,
    )


def _choose_levels(levels: list[str], groups: list[str] | None, path: str, column: str) -> list[str]:
    shown = ", ".join(f"'{lev}'" for lev in levels[:12]) + (" ..." if len(levels) > 12 else "")
    if groups is None:
        if len(levels) < 2:
            raise DesignError(
                f"{path}: column '{column}' has {len(levels)} group level(s) ({shown or 'none'});"
                " two are needed to compare"
            )
        if len(levels) > 2:
            raise DesignError(
                f"{path}: column '{column}' has {len(levels)} levels ({shown}); choose two with"
                f" --groups A,B"
            )
        return levels
    if len(groups) != 2:
        raise DesignError(f"--groups names {len(groups)} level(s); name exactly two, as A,B")
    for lab in groups:
        if lab not in levels:
            raise DesignError(
                f"{path}: column '{column}' has no level '{lab}'; {suggest(lab, levels, 'levels')}"
            )
    return list(groups)
