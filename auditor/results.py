"""Frozen result objects for every stage of an audit, and their conversion to plain JSON data.

No statistics are computed here. Every object has `to_dict()`; non-finite floats become `None`
(JSON has no NaN or infinity), tuples become lists, and numbers keep full precision.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # the classes of the later stages, named here for the annotations only
    from auditor.clusters import Clusters
    from auditor.conversions import Conversions
    from auditor.coverage_check import CoverageCheck
    from auditor.decide import Decision
    from auditor.influence import Influence

SCHEMA_VERSION = 2  # integer; raised on every incompatible change (docs/output-contract.md)


def plain(value: Any) -> Any:
    """Convert a result tree to JSON-ready Python values (dict, list, str, int, float, None)."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return value
    if hasattr(value, "item") and not isinstance(value, (list, tuple)):  # numpy scalar
        value = value.item()
    if isinstance(value, bool):
        return value
    if isinstance(value, int):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    return value


def _float_or_none(value):
    """A number as a Python float (numpy scalars included); None stays None."""
    return None if value is None else float(value)


class Record:
    """Base of the frozen result classes: `to_dict()` gives the object as JSON-ready data
    (`plain`)."""

    def to_dict(self) -> dict[str, Any]:
        return plain(self)


# ---------------------------------------------------------------- data accounting


@dataclass(frozen=True)
class Exclusion(Record):
    """One data row left out of the analysis: its line in the file (header = line 1) and why."""

    row: int
    reason: str


@dataclass(frozen=True)
class DataAccount(Record):
    """Where every row of the file went.

    rows_read = rows_used + len(excluded) + sum(not_selected.values())
    """

    source: str
    rows_read: int
    rows_used: int
    excluded: tuple[Exclusion, ...]
    not_selected: dict[str, int]
    blank_lines: int = 0
    encoding: str = "utf-8"
    delimiter: str | None = None
    notes: tuple[str, ...] = ()  # how labels were read (blanks trimmed, levels differing in case)


# ---------------------------------------------------------------- diagnostics


@dataclass(frozen=True)
class GroupSummary(Record):
    label: str
    n: int
    missing: int
    mean: float
    sd: float
    median: float
    q1: float
    q3: float
    min: float
    max: float


@dataclass(frozen=True)
class Normality(Record):
    label: str
    n: int
    shapiro_w: float | None
    shapiro_p: float | None
    dagostino_k2: float | None
    dagostino_p: float | None
    anderson_a2: float | None
    anderson_p: float | None
    anderson_p_method: str | None
    skewness: float | None
    skewness_se: float | None
    excess_kurtosis: float | None
    kurtosis_se: float | None
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class Spread(Record):
    sd_ratio: float | None
    larger_sd_group: str
    iqr_ratio: float | None
    mad_ratio: float | None
    levene_w: float | None
    levene_p: float | None
    brown_forsythe_w: float | None
    brown_forsythe_p: float | None
    fligner_x2: float | None
    fligner_p: float | None
    n_ratio: float
    smaller_group_has_larger_sd: bool
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class Ties(Record):
    label: str
    n: int
    tie_fraction: float
    distinct_values: int
    largest_tie_block: int
    tie_correction: float
    looks_discrete: bool


@dataclass(frozen=True)
class Outliers(Record):
    label: str
    rows: tuple[int, ...]
    beyond_1_5_iqr_rows: tuple[int, ...]
    beyond_3_iqr_rows: tuple[int, ...]
    modified_z_rows: tuple[int, ...]
    lower_fence: float
    upper_fence: float
    floor_share: float
    ceiling_share: float


@dataclass(frozen=True)
class NormalTheoryCheck(Record):
    """How well the normal model reads the overlap of the two groups."""

    cohen_d: float | None
    implied_prob_superiority: float | None
    observed_prob_superiority: float | None
    gap: float | None
    implied_d_from_observed: float | None


@dataclass(frozen=True)
class Diagnostics(Record):
    normality: tuple[Normality, ...]
    spread: Spread
    ties: Ties
    ties_by_group: tuple[Ties, ...]
    outliers: tuple[Outliers, ...]
    normal_theory: NormalTheoryCheck

    def to_dict(self) -> dict[str, Any]:
        out = plain(self)
        ties = out.pop("ties")
        ties["by_group"] = out.pop("ties_by_group")
        out["ties"] = ties
        return out


@dataclass(frozen=True)
class PairedDiagnostics(Record):
    """Screening of paired data: the differences carry the assumptions."""

    differences_normality: Normality
    conditions_normality: tuple[Normality, ...]
    differences_ties: Ties
    differences_outliers: Outliers
    zero_share: float
    correlation: float | None
    correlation_p: float | None
    rounding_decimals: int
    sign_test: dict


@dataclass(frozen=True)
class KSpread(Record):
    sd_ratio: float | None
    largest_sd_group: str
    smallest_sd_group: str
    levene_w: float | None
    levene_p: float | None
    brown_forsythe_w: float | None
    brown_forsythe_p: float | None
    fligner_x2: float | None
    fligner_p: float | None
    n_ratio: float
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class KDiagnostics(Record):
    """Screening of three or more groups or conditions."""

    normality: tuple[Normality, ...]
    spread: KSpread
    ties: Ties
    outliers: tuple[Outliers, ...]
    sphericity: dict | None = None


# ---------------------------------------------------------------- effects


@dataclass(frozen=True)
class Interval(Record):
    """A confidence interval and the method that produced it."""

    method: str
    low: float | None
    high: float | None
    level: float
    note: str | None = None

    def __post_init__(self):  # Python floats, whatever the arithmetic handed in
        for name in ("low", "high", "level"):
            object.__setattr__(self, name, _float_or_none(getattr(self, name)))


@dataclass(frozen=True)
class Effect(Record):
    """One effect size with its intervals.

    `ci_low`/`ci_high` repeat the interval of the index's own method (`ci_method`); `intervals`
    lists every interval computed, the bootstrap one included. `estimate` is None with a `reason`
    when the index is undefined for these data. `bootstrap_reason` says why no bootstrap interval
    is given when one was attempted and withheld (a degenerate or boundary bootstrap
    distribution: `resampling.bca_interval`); the index's other intervals then stand alone.
    """

    name: str
    family: str
    estimate: float | None
    ci_low: float | None
    ci_high: float | None
    ci_method: str
    intervals: tuple[Interval, ...]
    null_value: float
    assumes: str
    reason: str | None = None
    notes: tuple[str, ...] = ()
    details: dict = field(default_factory=dict)
    bootstrap_reason: str | None = None

    def __post_init__(self):  # Python floats, whatever the arithmetic handed in
        for name in ("estimate", "ci_low", "ci_high", "null_value"):
            object.__setattr__(self, name, _float_or_none(getattr(self, name)))

    def interval(self, method: str) -> Interval | None:
        for iv in self.intervals:
            if iv.method == method:
                return iv
        return None


# ---------------------------------------------------------------- whole audit


@dataclass(frozen=True)
class PairComparison(Record):
    """One pair of groups or conditions after an omnibus audit: the two-condition effects
    (first relative to second) and the follow-up test with its Holm-adjusted p."""

    first: str
    second: str
    effects: tuple[Effect, ...]
    test: str
    statistic: float | None
    p: float | None
    p_holm: float | None

    def to_dict(self) -> dict[str, Any]:
        out = plain(self)
        out["effects"] = {e.name: plain(e) for e in self.effects}
        return out


@dataclass(frozen=True)
class Settings(Record):
    level: float
    bootstrap_resamples: int
    seed: int
    reference: str | None = None
    scope: str = "full"  # "screen": only what a screen row shows was computed


@dataclass(frozen=True)
class Samples:
    """The values the audit analysed, for figures and reports (not part of the JSON, whose
    per-case table already lists them): per group or condition its label and values; for
    paired data also the rounded differences (first minus second)."""

    labels: tuple[str, ...]
    values: tuple[Any, ...]  # numpy arrays, one per group or condition
    differences: Any = None
    paired: bool = False


@dataclass(frozen=True)
class AuditResult(Record):
    """Everything one audit found. `to_dict()` is the JSON document the command line writes,
    whose layout is published as a JSON Schema (`auditor schema audit`, docs/output-contract.md):
    each attribute below is the document's field of the same name, described there, and each
    nested result class has the fields of its schema object (tests/test_result_api.py).

    design: "two_independent", "paired", "k_independent" or "k_repeated".
    groups: descriptives per group or condition, in the compared order (the first named first).
    data: where every row of the file went (`DataAccount`).
    diagnostics: `Diagnostics` (two groups), `PairedDiagnostics` or `KDiagnostics`.
    effects: every index of the design's registry, in its order (`effect(name)` finds one).
    tests: the design's tests of difference (omnibus or paired), by name; empty for two groups.
    pairwise: after an omnibus design, each pair's two-condition effects and Holm-adjusted test.
    influence: the jackknife of every index and the per-case table (`influence.Influence`).
    decision: the policy's choice with its evidence and texts (`decide.Decision`).
    policy: name, version, SHA-256 and source of the policy applied.
    coverage_check: the primary interval's coverage on populations shaped like the data, when
        asked (`coverage_check.CoverageCheck`).
    equivalence: index -> its question of size at a margin (`margins.equivalence_records`).
    conversions: two groups: d, A, delta, r and log odds ratio into one another.
    clusters: two groups with a cluster column: ICC, design effect, cluster-bootstrap intervals.
    samples: the analysed values, for figures; not part of the JSON.
    """

    design: str
    outcome: str
    group_column: str | None
    groups: tuple[GroupSummary, ...]
    data: DataAccount
    diagnostics: Diagnostics | PairedDiagnostics | KDiagnostics
    effects: tuple[Effect, ...]
    settings: Settings
    caution: str
    tool_version: str
    schema_version: int = SCHEMA_VERSION
    warnings: tuple[str, ...] = field(default=())
    subject_column: str | None = None
    tests: dict = field(default_factory=dict)
    pairwise: tuple[PairComparison, ...] = ()
    influence: Influence | None = None
    decision: Decision | None = None
    policy: dict | None = None
    coverage_check: CoverageCheck | None = None
    equivalence: dict = field(default_factory=dict)
    conversions: Conversions | None = None
    clusters: Clusters | None = None
    samples: Samples | None = field(default=None, repr=False, compare=False)

    @property
    def direction(self) -> str:
        labels = [g.label for g in self.groups]
        if len(labels) == 2:
            return f"{labels[0]} relative to {labels[1]}"
        return ("omnibus across " + ", ".join(labels)
                + "; in each pair, the first named relative to the second")

    def report(self, folder) -> Any:
        """Write report.html, report.md, audit.json and the figures into `folder`, as the
        command line's --out does (see `auditor.report.write_report`)."""
        from auditor.report import write_report

        return write_report(self, folder)

    def _repr_html_(self) -> str:  # notebooks show the report's summary
        from auditor.report import summary_html

        return summary_html(self)

    def to_frame(self):
        """The effect sizes as a pandas DataFrame, one row per index and comparison (columns
        `tidy.TABLE_FIELDS`: design, outcome, comparison, index, family, role, estimate, the
        quoted interval with its method and level, the bootstrap interval, the no-effect value,
        the magnitude label and the reason an index is undefined)."""
        import pandas as pd

        from auditor.tidy import TABLE_FIELDS, effect_rows

        return pd.DataFrame(effect_rows(self), columns=list(TABLE_FIELDS))

    def effect(self, name: str) -> Effect:
        for e in self.effects:
            if e.name == name:
                return e
        raise KeyError(name)

    def to_dict(self) -> dict[str, Any]:
        return {
            "schema_version": self.schema_version,
            "tool_version": self.tool_version,
            "design": self.design,
            "outcome": self.outcome,
            "group_column": self.group_column,
            "subject_column": self.subject_column,
            "direction": self.direction,
            "groups": plain(self.groups),
            "data": plain(self.data),
            "diagnostics": self.diagnostics.to_dict(),
            "effects": {e.name: plain(e) for e in self.effects},
            "tests": plain(self.tests),
            "pairwise": [p.to_dict() for p in self.pairwise],
            "influence": None if self.influence is None else self.influence.to_dict(),
            "decision": None if self.decision is None else self.decision.to_dict(),
            "policy": self.policy,
            "coverage_check": (None if self.coverage_check is None
                               else self.coverage_check.to_dict()),
            "equivalence": plain(self.equivalence),
            "conversions": None if self.conversions is None else self.conversions.to_dict(),
            "clusters": None if self.clusters is None else self.clusters.to_dict(),
            "settings": plain(self.settings),
            "warnings": list(self.warnings),
            "caution": self.caution,
        }
