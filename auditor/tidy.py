"""One row per effect: the audit's effect sizes as a tidy table, for pandas users and for
manuscript tables (`AuditResult.to_frame()`, `auditor check --table`).

A row is one index on one comparison: the audit's own comparison (every group or condition, in
the direction of the audit) and, after an omnibus design, each pair. Its interval is the one the
report quotes: for the primary index, the decision's (the test-matched one when the policy
matches intervals to tests), for the others the index's own; the BCa bootstrap interval, when
it was computed, sits beside it. Nothing is computed here.
"""

from __future__ import annotations

import csv
import io
import math

TABLE_FIELDS = (
    "design", "outcome", "comparison", "index", "family", "role", "estimate", "ci_low",
    "ci_high", "ci_method", "level", "bootstrap_low", "bootstrap_high", "null_value",
    "magnitude", "reason",
)


def _number(value):
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _row(result, comparison: str, effect, role: str, quoted: dict | None,
         magnitude: str | None) -> dict:
    boot = effect.interval("bca_bootstrap")
    if quoted is not None:
        low, high, method, level = (quoted.get("low"), quoted.get("high"), quoted.get("method"),
                                    quoted.get("level"))
    else:
        own = effect.interval(effect.ci_method)
        low, high, method = effect.ci_low, effect.ci_high, effect.ci_method
        level = None if own is None else own.level
    if low is None:
        method = None
    return {
        "design": result.design, "outcome": result.outcome, "comparison": comparison,
        "index": effect.name, "family": effect.family, "role": role,
        "estimate": _number(effect.estimate), "ci_low": _number(low), "ci_high": _number(high),
        "ci_method": method, "level": level,
        "bootstrap_low": None if boot is None else _number(boot.low),
        "bootstrap_high": None if boot is None else _number(boot.high),
        "null_value": effect.null_value, "magnitude": magnitude, "reason": effect.reason,
    }


def effect_rows(result) -> list[dict]:
    """The rows of the table (fields `TABLE_FIELDS`), the audit's comparison first, in the
    registry's order of the indices, then each pair's. `role` is "primary", "also reported"
    (the policy's companions) or "" for the other indices."""
    decision = result.decision
    primary = None if decision is None else decision.primary
    also = () if decision is None else decision.also_report
    labels = {} if decision is None else dict(decision.magnitude)
    rows = []
    labels_of_groups = [g.label for g in result.groups]
    comparison = (result.direction if len(labels_of_groups) == 2
                  else "omnibus across " + ", ".join(labels_of_groups))
    for effect in result.effects:
        role = ("primary" if effect.name == primary
                else "also reported" if effect.name in also else "")
        quoted = decision.interval if effect.name == primary else None
        rows.append(_row(result, comparison, effect, role, quoted, labels.get(effect.name)))
    for pair in result.pairwise:
        for effect in pair.effects:
            rows.append(_row(result, f"{pair.first} relative to {pair.second}", effect, "pair",
                             None, None))
    return rows


def table_csv(rows: list[dict]) -> str:
    """The rows as CSV text (header `TABLE_FIELDS`; an empty cell for a null; numbers in full
    precision)."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(TABLE_FIELDS)
    for row in rows:
        writer.writerow(["" if row[f] is None else row[f] for f in TABLE_FIELDS])
    return buffer.getvalue()
