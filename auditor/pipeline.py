"""audit(): detects the design and runs the stages in order (load, design, diagnose, estimate,
resample). No printing, no files written."""

from __future__ import annotations

import dataclasses
import itertools
import os
import warnings
from collections.abc import Callable

import numpy as np

from auditor import (__version__, adjust, catalogue, diagnostics, kgroups, paired, rationale,
                     significance)
from auditor.catalogue import Design
from auditor.decide import (MEAN_INDEX, POLICY_DESIGN, choose, decide, extreme_rows,
                            test_matched_effect)
from auditor.design import (Groups, Repeated, independent_groups, is_missing, long_repeated,
                            parse_group_list, wide_repeated)
from auditor.effects import (EffectSpec, k_independent_effects, k_repeated_effects,
                             paired_effects, two_group_effects)
from auditor.errors import DesignError, UndefinedEffectWarning
from auditor.guard import (OVERRIDES, check_independent, check_repeated,
                           columns_to_look_at)
from auditor.influence import Units, influence_table, with_fragility
from auditor.load import Table, column_position, read_table
from auditor.margins import equivalence_records, margins_for
from auditor.parametric import Estimate
from auditor.policy import INDICES, Policy, load_policy
from auditor.rationale import CAUTION
from auditor.resampling import bca_interval, leave_one_out_units, resample_units
from auditor.results import (AuditResult, Diagnostics, Effect, PairComparison, Samples,
                             Settings)

SCOPES = ("full", "screen")
# design -> (mean-based, rank-based) index a screen row shows beside the primary (catalogue.py)
SCREEN_COMPANIONS = {d.value: pair for d, pair in catalogue.SCREEN_COMPANIONS.items()}
DEFAULT_SEED = 20240917
DEFAULT_RESAMPLES = 2000
DEFAULT_LEVEL = 0.95
PERMUTATION_STREAM = 7  # spawn key of the random stream the permutation tests draw from

Progress = Callable[[int, int], None] | None


def table_from_frame(frame, columns: list[str], name: str = "<data frame>") -> Table:
    """Wrap a pandas DataFrame as a Table; row i gets line i + 2 (as if written with a header)."""
    import pandas as pd

    header = tuple(str(c) for c in frame.columns)
    positions = {c: column_position(header, c, name) for c in dict.fromkeys(columns)}
    cols = {}
    for c, i in positions.items():
        series = frame.iloc[:, i]
        cols[c] = tuple("" if v is None or (np.ndim(v) == 0 and pd.isna(v))
                        else (repr(float(v)) if isinstance(v, (float, np.floating)) else str(v))
                        for v in series.tolist())
    return Table(name, header, cols, np.arange(2, len(frame) + 2, dtype=np.int64), 0, "in memory", None)


def audit(data, *, outcome: str | None = None, group: str | None = None,
          groups: list[str] | str | None = None, subject: str | None = None,
          paired_columns: list[str] | str | None = None,
          level: float | None = None, resamples: int | None = None,
          seed: int | None = None, reference: str | None = None,
          progress: Progress = None, policy=None, scope: str = "full",
          coverage_check: bool | None = None,
          margins: dict[str, float] | None = None, overrides=(),
          cluster: str | None = None) -> AuditResult:
    """Audit a comparison of groups or conditions.

    The design follows from the arguments:
    - `outcome` + `group`: two independent groups (two levels) or k independent groups (more);
    - `outcome` + `group` + `subject` (long) or `paired_columns` (wide, one row per participant):
      paired (two conditions) or k repeated conditions (more).
    `data` is a path (CSV, TSV, .xlsx) or a pandas DataFrame. `groups` picks and orders levels;
    in two-condition designs every signed effect is the first relative to the second.
    `reference` names the group whose SD scales Glass's delta (default the second). The bootstrap
    uses `numpy.random.default_rng(seed)`; the seed is recorded in the result.
    `policy` is a `policy.Policy`, a path to a policy file, or None for the built-in default; it
    supplies the level, resamples and seed not given here, the magnitude benchmarks, and the
    decision (which index and test to report, with its rationale).

    `scope` "screen" computes only what a screen row shows (`auditor.screen`): every estimate with
    its analytic interval, but bootstrap intervals and influence only for the indices the row can
    show (`screen_focus`), the fragility search only for the primary index, no pairwise
    comparisons and no texts. Every number a screen row shows equals the full run's; so do the
    estimates and intervals, while the outlier check's index, rechecked only for the extreme
    cases, says so in its interval rule.

    `margins` (index -> smallest effect of interest; overrides the policy's `[margins]`) asks
    the question of size: two one-sided tests and a verdict per index with a margin
    (`with_equivalence`, in the full and the screen scope).

    Before any statistic, the design guard (`guard.py`) looks at the file's other columns and
    stops, with one line saying what to run instead, on a design the audit does not cover
    (repeated rows of one participant in independent groups, a second factor crossed with the
    groups, a between-participant factor crossed with repeated conditions, a long file where no
    participant has two rows). `overrides` ("independent_rows", "one_factor") lets a stated
    design on where the audit can still be read; the result's warnings record it. A `Table`
    passed in (a screen's batch) is not guarded again: the screen guards each file once.

    `cluster` names the column saying which cluster each case belongs to (class, clinic, coach)
    in two independent groups: the result then has `clusters` (`with_clusters`: the intraclass
    correlation, the design effect and cluster-bootstrap intervals of every index) and a warning
    that the other intervals assume independent cases.

    `coverage_check` (default: the policy's `intervals.coverage_check`) adds the estimated
    coverage of the primary index's quoted interval on populations shaped like the data
    (`with_coverage_check`); a screen never runs it.
    """
    if scope not in SCOPES:
        raise DesignError(f"scope '{scope}': use one of {', '.join(SCOPES)}")
    policy = policy if isinstance(policy, Policy) else load_policy(policy)
    level = policy.value("intervals", "level") if level is None else level
    resamples = policy.value("bootstrap", "resamples") if resamples is None else resamples
    seed = policy.value("bootstrap", "seed") if seed is None else seed
    level, resamples = check_settings(level, resamples, seed)
    chosen = parse_group_list(groups) if isinstance(groups, str) else groups
    wide = (parse_group_list(paired_columns, "--paired") if isinstance(paired_columns, str)
            else paired_columns)
    if wide is not None:
        if group is not None or chosen is not None:
            raise DesignError("--paired names the condition columns of a wide file; do not also"
                              " give --group or --groups")
        columns = list(wide) + ([subject] if subject else [])
    elif outcome is None or group is None:
        raise DesignError("name the outcome and the group columns (--outcome, --group), or the"
                          " condition columns of a wide file (--paired BEFORE,AFTER)")
    else:
        columns = [outcome, group] + ([subject] if subject else [])
    if cluster is not None:
        check_cluster_column(cluster, columns, wide is not None or subject is not None)
        columns.append(cluster)
    overrides = check_overrides(overrides)
    guarded = not isinstance(data, Table)
    if isinstance(data, Table):  # already read (the screen reads a batch of columns at a time)
        table = data
    elif isinstance(data, (str, os.PathLike)):
        table = read_table(data, columns)
        others = columns_to_look_at(table.header, columns, table.n_rows)
        if others:  # the design guard looks at the other columns too
            table = read_table(data, columns + others)
    else:
        header = tuple(str(c) for c in data.columns)
        table = table_from_frame(data, columns + columns_to_look_at(header, columns, len(data)))
    run = RunSettings(level, resamples, int(seed), policy, scope, progress)
    if reference is not None and (wide is not None or subject is not None):
        raise DesignError("--reference applies to two independent groups only (it names the"
                          " group whose SD scales Glass's delta)")
    coverage = (policy.value("intervals", "coverage_check") if coverage_check is None
                else bool(coverage_check)) and scope == "full"
    notes: tuple[str, ...] = ()
    if wide is not None:
        design = wide_repeated(table, list(wide), subject)
        if guarded:
            notes = check_repeated(table, None, subject, columns, overrides=overrides)
        check_margin_names(margins, design)
        result = _audit_repeated(design, outcome or design.outcome, run)
    elif subject is not None:
        if guarded:
            notes = check_repeated(table, group, subject, columns, chosen, overrides)
        design = long_repeated(table, outcome, group, subject, chosen)
        check_margin_names(margins, design)
        result = _audit_repeated(design, outcome, run)
    else:
        design = independent_groups(table, outcome, group, chosen)
        if guarded:
            notes = check_independent(table, [outcome, group] + ([cluster] if cluster else []),
                                      group, list(design.labels), overrides)
        check_margin_names(margins, design)
        if cluster is not None and len(design.labels) != 2:
            raise DesignError(f"--cluster applies to two independent groups; '{group}' has"
                              f" {len(design.labels)} here: choose two with --groups")
        labels = cluster_labels(table, design, cluster) if cluster is not None else None
        if len(design.labels) == 2:
            result = _audit_two_groups(design, reference, run)
            if labels is not None:
                result = with_texts(with_clusters(result, design, cluster, labels, progress),
                                    policy)
        elif reference is not None:
            raise DesignError("--reference applies to two independent groups only")
        else:
            result = _audit_k_groups(design, run)
    if notes:
        result = dataclasses.replace(result, warnings=tuple(result.warnings) + notes)
    result = with_equivalence(result, policy, margins or {})
    if result.design == Design.TWO_INDEPENDENT:
        result = dataclasses.replace(result, conversions=scale_conversions(result))
    return with_coverage_check(result, policy) if coverage else result


def check_cluster_column(cluster: str, columns: list[str], within: bool) -> None:
    """A DesignError before the file is read when `cluster` cannot name clusters of cases."""
    if within:
        raise DesignError("--cluster applies to two independent groups; with --subject or"
                          " --paired the participant is already the unit that is resampled")
    if cluster in columns:
        raise DesignError(f"--cluster '{cluster}' is also named as the outcome or the group;"
                          " name the column that says which cluster each case belongs to")


def cluster_labels(table: Table, design: Groups, cluster: str) -> tuple[tuple[str, ...], ...]:
    """Each analysed case's cluster label (blanks trimmed), group by group in the design's
    order; a DesignError naming the file and line when one is empty."""
    position = {int(line): i for i, line in enumerate(table.lines)}
    column = table.columns[cluster]
    out = []
    for rows in design.rows:
        found = []
        for line in rows:
            label = column[position[int(line)]].strip()
            if is_missing(label):
                what = "is empty" if not label else f"holds the missing-value marker '{label}'"
                raise DesignError(f"{table.path}, line {int(line)}: the cluster column"
                                  f" '{cluster}' {what}; every case needs its cluster for"
                                  " --cluster (fill it in, or leave the row out of the file)")
            found.append(label)
        out.append(tuple(found))
    return tuple(out)


def with_clusters(result: AuditResult, design: Groups, cluster: str,
                  labels: tuple[tuple[str, ...], ...], progress: Progress = None) -> AuditResult:
    """The two-group result with `clusters` (`clusters.clustering`: the intraclass correlation,
    the design effect and every index's cluster-bootstrap interval, from the audit's level,
    resamples and seed) and its warning."""
    from auditor.clusters import clustering, clustering_warning

    settings = result.settings
    specs = two_group_effects(_reference_index(design.labels, settings.reference))
    estimates = {e.name: e.estimate for e in result.effects}
    block = clustering(cluster, design.labels, design.values, labels, specs, estimates,
                       settings.level, settings.bootstrap_resamples, settings.seed, progress)
    return dataclasses.replace(result, clusters=block,
                               warnings=tuple(result.warnings) + (clustering_warning(block),)
                               + tuple(f"clusters: {n}" for n in block.notes))


def check_overrides(given) -> frozenset:
    """The design guard's overrides (`guard.OVERRIDES`), checked by name."""
    chosen = frozenset(given or ())
    unknown = sorted(chosen - set(OVERRIDES))
    if unknown:
        raise DesignError(f"override '{unknown[0]}': use one of {', '.join(sorted(OVERRIDES))}")
    return chosen


def check_margin_names(given, design: Groups | Repeated) -> None:
    """A DesignError, before any statistic is computed, when a command-line margin names an
    index the design does not report (a paired index in a two-group file, say)."""
    if not given:
        return
    k = len(design.labels)
    kind = ((Design.TWO_INDEPENDENT if k == 2 else Design.K_INDEPENDENT)
            if isinstance(design, Groups) else (Design.PAIRED if k == 2 else Design.K_REPEATED))
    names = INDICES[kind.policy_table]
    unknown = sorted(set(given) - set(names))
    if unknown:
        what = kind.words if k == 2 else f"{k} {kind.words}"
        raise DesignError(f"--margin {unknown[0]}: not an index of {what}; use one of"
                          f" {', '.join(names)}")


def with_equivalence(result: AuditResult, policy: Policy,
                     given: dict[str, float]) -> AuditResult:
    """The result with `equivalence`: for every index with a margin (the command line's
    `given`, else the policy's `[margins]` by index or family), the two one-sided tests at that
    margin and their verdict (`margins.equivalence_records`); the rationale and the methods
    sentence then quote the primary index's."""
    known = {e.name for e in result.effects}
    unknown = sorted(set(given) - known)
    if unknown:
        raise DesignError(f"--margin {unknown[0]}: not an index of this design; use one of"
                          f" {', '.join(e.name for e in result.effects)}")
    chosen = margin_choice(result.effects, policy, given)
    if not chosen or result.samples is None:
        return result
    if result.design == Design.PAIRED:
        samples = (result.samples.differences,)
    else:
        samples = tuple(result.samples.values)
    reference = (result.samples.labels.index(result.settings.reference)
                 if result.settings.reference in result.samples.labels else 1)
    records = equivalence_records(result.design, samples, chosen, result.settings.level,
                                  policy.settings["margins"].get("justification"), reference)
    result = dataclasses.replace(result, equivalence=records)
    if result.decision is None or result.settings.scope == "screen":
        return result
    return with_texts(result, policy)


def scale_conversions(result: AuditResult):
    """Two groups: d, A, delta, r and the log odds ratio converted into one another, each with
    the assumption that makes it exact and its gap to the directly estimated index
    (`conversions.conversion_table`)."""
    from auditor.conversions import conversion_table

    value = {e.name: e.estimate for e in result.effects}
    n_a, n_b = (g.n for g in result.groups)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # an undefined conversion carries its reason
        return conversion_table(value["cohen_d"], value["prob_superiority"], n_a, n_b,
                                value["cliff_delta"], d_unpooled=value["d_unpooled"])


def margin_choice(effects, policy: Policy, given: dict[str, float]):
    """index -> (margin, its source) for every effect (`margins.margins_for`); an undefined one
    gets a record with the reason, so that no margin asked for vanishes."""
    names = [e.name for e in effects]
    families = {e.name: e.family for e in effects}
    table = {k: v for k, v in policy.settings["margins"].items() if k != "justification"}
    return margins_for(names, families, table, given)


COVERAGE_STREAM = 8  # spawn key of the random stream the coverage check draws from


def with_coverage_check(result: AuditResult, policy: Policy,
                        simulations: int | None = None) -> AuditResult:
    """The result with `coverage_check`: how often the primary index's quoted interval method
    covers the index's true value in populations shaped like the observed groups (smoothed
    bootstrap, `coverage_check.coverage_check`), data sets of the observed sizes, `simulations`
    of them (default: the policy's `intervals.coverage_simulations`), the bootstrap with the
    audit's resamples; drawn from its own stream of the seed. The reviewer note quotes a
    shortfall."""
    from auditor.coverage_check import coverage_check

    decision = result.decision
    if decision is None or result.samples is None:
        return result
    method = decision.interval.get("method")
    if method in (None, "none"):
        note = (f"coverage check: {decision.primary} has no interval here, so there is no"
                " coverage to check")
        return dataclasses.replace(result, warnings=result.warnings + (note,))
    labels = tuple(g.label for g in result.groups)
    values = result.samples.values
    if result.design == Design.TWO_INDEPENDENT:
        reference = labels.index(result.settings.reference) if result.settings.reference else 1
        specs, samples = two_group_effects(reference), tuple(values)
    elif result.design == Design.K_INDEPENDENT:
        specs, samples = k_independent_effects(), tuple(values)
    else:
        x = np.column_stack(values)
        specs = paired_effects() if x.shape[1] == 2 else k_repeated_effects()
        samples = (x,)
    spec = next(s for s in specs if s.name == decision.primary)
    rng = np.random.default_rng(np.random.SeedSequence(result.settings.seed,
                                                       spawn_key=(COVERAGE_STREAM,)))
    check = coverage_check(
        spec, samples, method=method, level=result.settings.level,
        simulations=simulations or policy.value("intervals", "coverage_simulations"),
        resamples=result.settings.bootstrap_resamples, rng=rng)
    result = dataclasses.replace(result, coverage_check=check)
    decision = dataclasses.replace(decision, reviewer_note=rationale.reviewer_note(
        result, decision, policy))
    return dataclasses.replace(result, decision=decision)


RESERVED_STREAMS = frozenset({7, 8, 9})  # permutation tests, coverage check, cluster bootstrap


def comparison_streams(seed: int, count: int) -> list[np.random.SeedSequence]:
    """The random streams of an omnibus audit's bootstrap (the first) and of its pairwise
    comparisons: SeedSequence(seed, spawn_key=(i,)) for i = 0, 1, 2, ..., skipping the keys
    that name other streams of the same seed (RESERVED_STREAMS), so that no pair draws the
    very numbers of the permutation tests, the coverage check or the cluster bootstrap. Up to
    seven streams (four groups or conditions) these are `SeedSequence(seed).spawn(count)`."""
    keys = [k for k in range(count + len(RESERVED_STREAMS)) if k not in RESERVED_STREAMS][:count]
    return [np.random.SeedSequence(seed, spawn_key=(k,)) for k in keys]


def check_settings(level: float, resamples: int, seed: int) -> tuple[float, int]:
    level = float(level)
    if not 0.5 <= level < 1.0:
        raise DesignError(f"confidence level {level} is out of range; use a value in [0.5, 1), e.g. 0.95")
    if int(resamples) != resamples or resamples < 100:
        raise DesignError(f"bootstrap resamples {resamples}: use a whole number of at least 100")
    if int(seed) != seed or seed < 0:
        raise DesignError(f"seed {seed}: use a non-negative whole number")
    return level, int(resamples)


def _reference_index(labels: tuple[str, ...], reference: str | None) -> int:
    if reference is None:
        return 1
    if reference not in labels:
        raise DesignError(
            f"--reference '{reference}' is not one of the compared groups"
            f" ('{labels[0]}', '{labels[1]}')"
        )
    return labels.index(reference)


def _summaries(labels, values, missing=None):
    missing = missing or (0,) * len(labels)
    return tuple(diagnostics.describe(lab, x, m) for lab, x, m in zip(labels, values, missing))


def _group_units(design: Groups) -> Units:
    return Units(rows=design.rows,
                 groups=tuple((lab,) * len(v) for lab, v in zip(design.labels, design.values)),
                 values=design.values, minimum=(2,) * len(design.labels), kind="case")


def _participant_units(design: Repeated, differences) -> Units:
    return Units(rows=(design.rows,), groups=(design.subjects,), values=(differences,),
                 minimum=(3,), kind="participant")


def _result(design, outcome, group_column, summaries, account, diag, effects, notes, settings,
            reference=None, subject=None, tests=None, pairwise=(), influence=None):
    return AuditResult(
        design=design, outcome=outcome, group_column=group_column, groups=summaries,
        data=account, diagnostics=diag, effects=effects,
        settings=Settings(settings.level, settings.resamples, settings.seed, reference,
                          settings.scope),
        caution=CAUTION, tool_version=__version__, warnings=tuple(notes),
        subject_column=subject, tests=tests or {}, pairwise=tuple(pairwise),
        influence=influence,
    )


@dataclasses.dataclass(frozen=True)
class RunSettings:
    """What every stage of one audit runs with: the confidence level, the bootstrap resamples,
    the seed, the policy, the scope ("full" or "screen") and where to report progress."""

    level: float
    resamples: int
    seed: int
    policy: Policy
    scope: str = "full"
    progress: Progress = dataclasses.field(default=None, compare=False)

    @property
    def screen(self) -> bool:
        return self.scope == "screen"


@dataclasses.dataclass(frozen=True)
class _Work:
    """What an audit keeps to finish the primary index once it is chosen: in the screen scope its
    fragility search and its interval when it is a fallback the focus did not cover; in both
    scopes the fragility search against a test-matched interval the decision will quote."""

    specs: tuple[EffectSpec, ...]
    loo: dict
    units: Units
    settings: RunSettings
    rng: Callable[[], np.random.Generator]  # a fresh generator drawing the same resamples


def screen_focus(design: str, policy: Policy) -> frozenset[str]:
    """The indices a screen row shows for `design`: the primary index of every branch of the
    policy, the two companions shown beside it, and the index the outlier check watches. (A
    companion that replaces an undefined primary is finished when it is chosen.)"""
    table = POLICY_DESIGN[design]
    primaries = {policy.branch(table, name).primary
                 for name in (*policy.precedence(table), "assumptions_hold")
                 if policy.branch(table, name) is not None}
    return frozenset(primaries | set(SCREEN_COMPANIONS[design]) | {MEAN_INDEX[table]})


def _estimate(specs, samples, settings, rng, progress=None, design: str | None = None):
    """`estimate_all` over the whole registry, or, in the screen scope, focused on the indices
    the row can show."""
    policy = settings.policy
    focus = screen_focus(design, policy) if settings.screen else None
    return estimate_all(specs, samples, settings.level, settings.resamples, rng, progress,
                        focus, policy.value("intervals", "method"))


def _influence(specs, effects, samples, loo, units, settings, design: str, diag):
    """Influence of every effect, or, in the screen scope, of the outlier check's index alone,
    without its fragility search (`_decided` adds the primary index's) and with exact interval
    rechecks only for the cases the outlier check reads (the extreme ones; every participant in
    k repeated conditions)."""
    policy = settings.policy
    if settings.screen:
        mean = MEAN_INDEX[POLICY_DESIGN[design]]
        specs = tuple(s for s in specs if s.name == mean and s.name in loo)
        outliers = {Design.TWO_INDEPENDENT: getattr(diag, "outliers", None),
                    Design.K_INDEPENDENT: getattr(diag, "outliers", None),
                    Design.PAIRED: (getattr(diag, "differences_outliers", None),)}.get(design)
        rows = (None if outliers is None
                else frozenset(extreme_rows(outliers, policy.value("outliers", "rule"))))
        return influence_table(specs, effects, samples, loo, units, settings.level,
                               policy.benchmarks(), search=False, recheck_rows=rows)
    return influence_table(specs, effects, samples, loo, units, settings.level,
                           policy.benchmarks())


def _decided(result: AuditResult, samples, policy: Policy, digits: int = 12,
             work: _Work | None = None) -> AuditResult:
    """The result with the policy's decision and its texts (`decide`, `rationale`), and the
    analysed values kept for figures. The permutation tests draw from their own stream, derived
    from the seed. In the screen scope (`work` given) the primary index's fragility is searched
    first, and the texts are left empty."""
    rng = np.random.default_rng(np.random.SeedSequence(result.settings.seed,
                                                       spawn_key=(PERMUTATION_STREAM,)))
    screen = work.settings.screen
    choice = choose(result, policy)
    if screen:
        result = _finish_primary(result, samples, policy, work, choice)
    else:
        result = _refragile(result, samples, policy, work, choice)
    decision = decide(result, samples, policy, digits, rng, choice)
    labels = tuple(g.label for g in result.groups)
    if len(samples) == 1:  # participants x conditions
        x = samples[0]
        kept = Samples(labels, tuple(x[:, k] for k in range(x.shape[1])),
                       paired.differences(x, digits) if x.shape[1] == 2 else None, True)
    else:
        kept = Samples(labels, tuple(samples))
    result = dataclasses.replace(result, decision=decision, policy=policy.stamp(), samples=kept)
    if screen:
        return result
    return with_texts(result, policy)


def with_texts(result: AuditResult, policy: Policy) -> AuditResult:
    """The result with its decision's texts written from it (`rationale`): the rationale, the
    reviewer note and the methods sentence."""
    decision = dataclasses.replace(
        result.decision, rationale=rationale.rationale(result, result.decision, policy),
        reviewer_note=rationale.reviewer_note(result, result.decision, policy),
        methods_sentence=rationale.methods_sentence(result, result.decision, policy))
    return dataclasses.replace(result, decision=decision)


def _refragile(result: AuditResult, samples, policy: Policy, work: _Work,
               choice) -> AuditResult:
    """Full scope: when the decision will quote a test-matched interval of the primary index
    other than the index's own (`decide.test_matched_effect`), its fragility is searched again
    against that interval, so that the count speaks of the interval the report quotes."""
    effect = result.effect(choice.primary)
    quoted = test_matched_effect(effect, result.design, choice, policy)
    if quoted is effect or effect.estimate is None or choice.primary not in work.loo:
        return result
    spec = next(s for s in work.specs if s.name == choice.primary)
    return dataclasses.replace(result, influence=with_fragility(
        result.influence, spec, quoted, samples, work.loo[choice.primary], work.units,
        work.settings.level, policy.benchmarks()))


def _finish_primary(result: AuditResult, samples, policy: Policy, work: _Work,
                    choice) -> AuditResult:
    """Screen scope: the chosen primary index with its bootstrap interval (when the focus left
    it out) and its fragility search (against the interval the decision quotes)."""
    primary = choice.primary
    spec = next(s for s in work.specs if s.name == primary)
    effect = result.effect(primary)
    if effect.estimate is None:
        return result
    loo = work.loo.get(primary)
    if loo is None:  # a fallback index: estimate it as the full run does, from the same stream
        (effect,), _, found = estimate_all(
            (spec,), samples, work.settings.level, work.settings.resamples, work.rng(),
            None, {primary}, policy.value("intervals", "method"))
        loo = found[primary]
        result = dataclasses.replace(result, effects=tuple(
            effect if e.name == primary else e for e in result.effects))
    return dataclasses.replace(result, influence=with_fragility(
        result.influence, spec, test_matched_effect(effect, result.design, choice, policy),
        samples, loo, work.units, work.settings.level, policy.benchmarks()))


def _work(specs, loo, units, settings, rng) -> _Work:
    return _Work(tuple(specs), loo, units, settings, rng)


# ------------------------------------------------------------------ designs


def _sorted_groups(design: Groups) -> Groups:
    """The same groups with each one's values (and their file lines) in increasing order: every
    index is unchanged, and rank statistics then resample without permuting anything."""
    orders = [np.argsort(v, kind="stable") for v in design.values]
    return dataclasses.replace(design, values=tuple(v[o] for v, o in zip(design.values, orders)),
                               rows=tuple(r[o] for r, o in zip(design.rows, orders)))


def _audit_two_groups(design: Groups, reference, settings: RunSettings):
    level, resamples, seed, progress, policy, scope = (
        settings.level, settings.resamples, settings.seed, settings.progress, settings.policy,
        settings.scope)
    ref_index = _reference_index(design.labels, reference)
    design = _sorted_groups(design)
    a, b = design.a, design.b
    specs = two_group_effects(ref_index)
    effects, notes, loo = _estimate(specs, (a, b), settings, np.random.default_rng(seed),
                                    progress, Design.TWO_INDEPENDENT)
    units = _group_units(design)
    diag = _diagnose_two(design, effects, scope == "screen")
    result = _result(Design.TWO_INDEPENDENT, design.outcome, design.group_column,
                     _summaries(design.labels, design.values, design.missing), design.account,
                     diag, effects, notes, settings, design.labels[ref_index],
                     influence=_influence(specs, effects, (a, b), loo, units, settings,
                                          Design.TWO_INDEPENDENT, diag))
    return _decided(result, (a, b), policy,
                    work=_work(specs, loo, units, settings, lambda: np.random.default_rng(seed)))


SCREEN_NO_PAIRS = "pairwise comparisons are not computed in a screen; audit the outcome for them"


def _audit_k_groups(design: Groups, settings: RunSettings):
    level, resamples, seed, progress, policy, scope = (
        settings.level, settings.resamples, settings.seed, settings.progress, settings.policy,
        settings.scope)
    groups = design.values
    pairs = list(itertools.combinations(range(len(groups)), 2))
    rngs = [np.random.default_rng(s) for s in comparison_streams(seed, 1 + len(pairs))]
    first = np.random.SeedSequence(seed).spawn(1)[0]
    specs = k_independent_effects()
    effects, notes, loo = _estimate(specs, groups, settings, rngs[0], progress, Design.K_INDEPENDENT)
    pairwise = []
    if scope == "screen":
        notes.append(SCREEN_NO_PAIRS)
    else:
        comparisons, dunn_p = [], []
        for (i, j), rng in zip(pairs, rngs[1:]):
            pair_effects, pair_notes, _ = estimate_all(two_group_effects(1), (groups[i], groups[j]),
                                                       level, resamples, rng, None)
            z, p = kgroups.dunn_z(groups, i, j)
            dunn_p.append(None if not np.isfinite(p) else p)
            comparisons.append((i, j, pair_effects, None if not np.isfinite(z) else z))
            notes += [f"{design.labels[i]} vs {design.labels[j]}: {n}" for n in pair_notes]
        holm = adjust.holm(dunn_p)
        pairwise = [PairComparison(design.labels[i], design.labels[j], eff, "dunn_z", z, p, ph)
                    for (i, j, eff, z), p, ph in zip(comparisons, dunn_p, holm)]
    diag = diagnostics.k_screen(design.labels, groups, design.rows, brief=scope == "screen")
    units = _group_units(design)
    result = _result(Design.K_INDEPENDENT, design.outcome, design.group_column,
                     _summaries(design.labels, groups, design.missing), design.account, diag,
                     effects, notes, settings,
                     tests=kgroups.independent_tests(groups), pairwise=pairwise,
                     influence=_influence(specs, effects, groups, loo, units, settings,
                                          Design.K_INDEPENDENT, diag))
    return _decided(result, groups, policy,
                    work=_work(specs, loo, units, settings, lambda: np.random.default_rng(first)))


def _audit_repeated(design: Repeated, outcome, settings: RunSettings):
    level, resamples, seed, progress, policy, scope = (
        settings.level, settings.resamples, settings.seed, settings.progress, settings.policy,
        settings.scope)
    x = design.matrix
    digits = paired.difference_digits(x, design.decimals)
    labels = design.labels
    columns = tuple(x[:, k] for k in range(x.shape[1]))
    if x.shape[1] == 2:
        specs = paired_effects(digits)
        effects, notes, loo = _estimate(specs, (x,), settings, np.random.default_rng(seed),
                                        progress, Design.PAIRED)
        d = paired.differences(x, digits)
        diag = diagnostics.paired_screen((labels[0], labels[1]), x[:, 0], x[:, 1], d,
                                         design.rows, digits, paired.sign_test(d),
                                         brief=scope == "screen")
        tests = {"sign_test": diag.sign_test, "wilcoxon": _wilcoxon(x, digits),
                 "paired_t": _paired_t(x, digits)}
        units = _participant_units(design, d)
        result = _result(Design.PAIRED, outcome, design.group_column,
                         _summaries(labels, columns, design.missing),
                         design.account, diag, effects, notes, settings,
                         subject=design.subject_column, tests=tests,
                         influence=_influence(specs, effects, (x,), loo, units, settings,
                                              Design.PAIRED, diag))
        return _decided(result, (x,), policy, digits, work=_work(
            specs, loo, units, settings, lambda: np.random.default_rng(seed)))
    pairs = list(itertools.combinations(range(x.shape[1]), 2))
    rngs = [np.random.default_rng(s) for s in comparison_streams(seed, 1 + len(pairs))]
    first = np.random.SeedSequence(seed).spawn(1)[0]
    specs = k_repeated_effects()
    effects, notes, loo = _estimate(specs, (x,), settings, rngs[0], progress, Design.K_REPEATED)
    pairwise = []
    if scope == "screen":
        notes.append(SCREEN_NO_PAIRS)
    else:
        comparisons, wil_p = [], []
        for (i, j), rng in zip(pairs, rngs[1:]):
            sub = x[:, [i, j]]
            pair_effects, pair_notes, _ = estimate_all(paired_effects(digits), (sub,), level,
                                                       resamples, rng, None)
            w = _wilcoxon(sub, digits)
            wil_p.append(w["p"])
            comparisons.append((i, j, pair_effects, w["statistic"]))
            notes += [f"{labels[i]} vs {labels[j]}: {n}" for n in pair_notes]
        holm = adjust.holm(wil_p)
        pairwise = [PairComparison(labels[i], labels[j], eff, "wilcoxon_signed_rank", stat, p, ph)
                    for (i, j, eff, stat), p, ph in zip(comparisons, wil_p, holm)]
    sphericity = kgroups.mauchly(x)
    cell_rows = tuple(design.cell_rows[:, k] for k in range(x.shape[1]))
    diag = diagnostics.k_screen(labels, columns, cell_rows, sphericity, brief=scope == "screen")
    units = _participant_units(design, None)
    result = _result(Design.K_REPEATED, outcome, design.group_column,
                     _summaries(labels, columns, design.missing),
                     design.account, diag, effects, notes, settings,
                     subject=design.subject_column, tests=kgroups.repeated_tests(x, labels),
                     pairwise=pairwise,
                     influence=_influence(specs, effects, (x,), loo, units, settings,
                                          Design.K_REPEATED, diag))
    return _decided(result, (x,), policy, digits,
                    work=_work(specs, loo, units, settings, lambda: np.random.default_rng(first)))


def _wilcoxon(x: np.ndarray, digits: int) -> dict:
    """The Wilcoxon signed-rank test of the pairs x (n x 2) exactly as a policy's decision runs
    it (`significance.wilcoxon_signed_rank`): T+ of the differences rounded to `digits` places,
    zeros dropped, exact p up to 50 non-zero differences. One definition for the tests block, the
    pairwise follow-ups and the decision."""
    res = significance.wilcoxon_signed_rank(x, digits=digits)
    out = {"statistic": res.statistic, "statistic_name": res.statistic_name, "p": res.p,
           "method": res.method}
    return out if res.reason is None else {**out, "reason": res.reason}


def _paired_t(x: np.ndarray, digits: int) -> dict:
    """The paired t test as a policy's decision runs it (`significance.paired_t`, on the
    differences rounded to `digits` places): undefined, with the reason, when they do not vary."""
    res = significance.paired_t(x, digits=digits)
    out = {"statistic": res.statistic, "df": None if res.df is None else int(res.df), "p": res.p}
    return out if res.reason is None else {**out, "reason": res.reason}


# ------------------------------------------------------------------ estimation


def _guarded(spec: EffectSpec, samples, level) -> Estimate:
    """The effect's estimate, or null with a reason when the values overflow double precision."""
    try:
        with np.errstate(over="raise", invalid="ignore", divide="ignore"):
            est = spec.estimate(*samples, level)
    except (OverflowError, FloatingPointError):
        return Estimate(None, None, "the values are too large for double precision arithmetic")
    if est.value is not None and not np.isfinite(est.value):
        return Estimate(None, None, "the estimate is not finite in double precision")
    if est.interval is not None and not (np.isfinite(est.interval.low)
                                         and np.isfinite(est.interval.high)):
        return Estimate(est.value, None, None,
                        est.notes + ("the analytic interval is not finite in double precision",))
    return est


SCREENED_OUT = "no interval: a screen resamples only the indices its row can show"


def estimate_all(specs: tuple[EffectSpec, ...], samples: tuple[np.ndarray, ...], level: float,
                 resamples: int, rng: np.random.Generator, progress: Progress = None,
                 focus=None, quoted: str = "analytic"):
    """Every effect in `specs` with its analytic interval and a BCa interval over shared
    stratified resamples of `samples`. Returns (effects, notes about undefined effects,
    leave-one-out values by effect name).

    With `focus` (a set of effect names; used by the screen), only the focus effects whose quoted
    interval is the bootstrap's (`quoted` is "bootstrap", or the effect has no analytic interval)
    are resampled, with the effects they are derived from; those and the other focus effects get
    leave-one-out values; the rest keep their analytic interval alone. The resamples are drawn from `rng` exactly as without a focus, so every
    interval computed is the one the full run gives."""
    estimates = {s.name: _guarded(s, samples, level) for s in specs}
    defined = [s for s in specs if estimates[s.name].value is not None]
    names = {s.name for s in defined}
    if focus is None:
        boot_names = loo_names = names
    else:
        boot_names = {n for n in names & set(focus)
                      if quoted == "bootstrap" or estimates[n].interval is None}
        boot_names |= {s.derived_from[0] for s in defined if s.name in boot_names
                       and s.derived_from is not None and s.derived_from[0] in names}
        loo_names = (names & set(focus)) | boot_names
    derived = {s.name: s.derived_from for s in defined
               if s.derived_from is not None and s.derived_from[0] in names}
    own = [s for s in defined if s.name not in derived and s.name in boot_names]
    by_values = {s.name: s.values for s in own if s.by_counts is None}
    by_counts = {s.name: s.by_counts(*samples) for s in own if s.by_counts is not None}
    replicates = (resample_units(by_values, samples, resamples, rng, progress, by_counts)
                  if own or focus is None else {})
    for name, (source, mapping) in derived.items():
        if name in boot_names:
            replicates[name] = mapping(replicates[source])
    all_loo = leave_one_out_all([s for s in defined if s.name in loo_names], samples)
    effects, notes, loo_by_name = [], [], {}
    for spec in specs:
        est = estimates[spec.name]
        if est.value is None:
            notes.append(f"{spec.name}: {est.reason}")
            warnings.warn(f"{spec.name} is undefined: {est.reason}", UndefinedEffectWarning,
                          stacklevel=3)
            effects.append(Effect(spec.name, spec.family, None, None, None, "none", (),
                                  spec.null_value, spec.assumes, est.reason, est.notes))
            continue
        if spec.name in loo_names:
            loo_by_name[spec.name] = all_loo[spec.name]
        boot_reason = None
        if spec.name in boot_names:
            boot = bca_interval(est.value, replicates[spec.name], all_loo[spec.name], level,
                                spec.bounds,
                                None if spec.degenerate is None else spec.degenerate(*samples))
            extra = () if boot.reason is None else (f"bootstrap: {boot.reason}",)
            boot_interval, boot_reason = boot.interval, boot.reason
        else:
            extra = () if est.interval is not None or est.more else (SCREENED_OUT,)
            boot_interval = None
        intervals = tuple(iv for iv in (est.interval, *est.more, boot_interval) if iv is not None)
        primary = next((iv for iv in (est.interval, boot_interval, *est.more) if iv is not None),
                       None)
        effects.append(Effect(
            spec.name, spec.family, float(est.value),
            None if primary is None else primary.low, None if primary is None else primary.high,
            "none" if primary is None else primary.method, intervals, spec.null_value,
            spec.assumes, None, est.notes + extra, dict(est.details), boot_reason,
        ))
    return tuple(effects), notes, loo_by_name


def leave_one_out_all(specs, samples) -> dict[str, tuple[np.ndarray, ...]]:
    """Leave-one-out values of every effect in `specs`; an effect derived from another one in
    `specs` (delta = 2A - 1) maps the other's values instead of recomputing them."""
    names = {s.name for s in specs}
    out = {s.name: leave_one_out_values(s, samples) for s in specs
           if s.derived_from is None or s.derived_from[0] not in names}
    for s in specs:
        if s.name not in out:
            source, mapping = s.derived_from
            out[s.name] = tuple(mapping(v) for v in out[source])
    return out


def leave_one_out_values(spec: EffectSpec, samples) -> tuple[np.ndarray, ...]:
    """Leave-one-out values of an effect: its exact fast path when it has one, else the refit
    loop of `resampling.leave_one_out_units`."""
    if spec.leave_one_out is not None:
        with np.errstate(all="ignore"):
            return tuple(np.asarray(v, dtype=float) for v in spec.leave_one_out(*samples))
    return leave_one_out_units(spec.values, samples)


def _diagnose_two(design: Groups, effects: tuple[Effect, ...], brief: bool = False) -> Diagnostics:
    a, b = design.a, design.b
    labels = (design.labels[0], design.labels[1])
    pooled = np.concatenate([a, b])
    residuals = np.concatenate([a - a.mean(), b - b.mean()])
    normality = tuple(diagnostics.normality(lab, x, brief) for lab, x in zip(labels, (a, b))) + (
        diagnostics.normality("residuals (each group centred on its mean)", residuals, brief),)
    floor, ceiling = float(pooled.min()), float(pooled.max())
    outliers = tuple(diagnostics.outliers(lab, x, rows, floor, ceiling)
                     for lab, x, rows in zip(labels, design.values, design.rows))
    by_name = {e.name: e for e in effects}
    check = diagnostics.normal_theory_check(by_name["cohen_d"].estimate,
                                            by_name["prob_superiority"].estimate)
    return Diagnostics(
        normality=normality,
        spread=diagnostics.spread(labels, a, b, brief),
        ties=diagnostics.ties("pooled", pooled),
        ties_by_group=tuple(diagnostics.ties(lab, x) for lab, x in zip(labels, (a, b))),
        outliers=outliers,
        normal_theory=check,
    )
