"""audit(): runs the stages in order (load, design, diagnose, estimate, resample). No printing,
no files written."""

from __future__ import annotations

import os
import warnings
from collections.abc import Callable

import numpy as np

from auditor import __version__, diagnostics
from auditor.design import TwoGroups, parse_group_list, two_groups
from auditor.effects import EffectSpec, two_group_effects
from auditor.parametric import Estimate
from auditor.errors import DesignError, UndefinedEffectWarning
from auditor.load import Table, read_table
from auditor.rationale import CAUTION
from auditor.resampling import bca_interval, bootstrap_replicates, leave_one_out
from auditor.results import AuditResult, Diagnostics, Effect, Settings

DEFAULT_SEED = 20240917
DEFAULT_RESAMPLES = 2000
DEFAULT_LEVEL = 0.95


def table_from_frame(frame, columns: list[str], name: str = "<data frame>") -> Table:
    """Wrap a pandas DataFrame as a Table; row i gets line i + 2 (as if written with a header)."""
    from auditor.load import column_position

    header = tuple(str(c) for c in frame.columns)
    positions = {c: column_position(header, c, name) for c in dict.fromkeys(columns)}
    cols = {}
    for c, i in positions.items():
        series = frame.iloc[:, i]
        cols[c] = tuple("" if v is None or (isinstance(v, float) and np.isnan(v))
                        else (repr(float(v)) if isinstance(v, (float, np.floating)) else str(v))
                        for v in series.tolist())
    return Table(name, header, cols, np.arange(2, len(frame) + 2, dtype=np.int64), 0, "in memory", None)


def audit(data, *, outcome: str, group: str, groups: list[str] | str | None = None,
          level: float = DEFAULT_LEVEL, resamples: int = DEFAULT_RESAMPLES,
          seed: int = DEFAULT_SEED, reference: str | None = None,
          progress: Callable[[int, int], None] | None = None) -> AuditResult:
    """Audit a comparison of two independent groups.

    `data` is a path (CSV, TSV, .xlsx) or a pandas DataFrame in long format; `groups` picks and
    orders two levels (A, B); every signed effect is A relative to B. `reference` names the
    group whose SD scales Glass's delta (default B). The bootstrap uses
    `numpy.random.default_rng(seed)`; the seed is recorded in the result.
    """
    level, resamples = _check_settings(level, resamples, seed)
    chosen = parse_group_list(groups) if isinstance(groups, str) else groups
    if isinstance(data, (str, os.PathLike)):
        table = read_table(data, [outcome, group])
    else:
        table = table_from_frame(data, [outcome, group])
    design = two_groups(table, outcome, group, chosen)
    ref_index = _reference_index(design, reference)
    rng = np.random.default_rng(seed)
    a, b = design.a, design.b

    groups_summary = tuple(diagnostics.describe(lab, x, miss)
                           for lab, x, miss in zip(design.labels, design.values, design.missing))
    specs = two_group_effects(ref_index)
    effects, notes = _estimate_all(specs, a, b, level, resamples, rng, progress)
    diag = _diagnose(design, effects)
    return AuditResult(
        design="two_independent", outcome=outcome, group_column=group, groups=groups_summary,
        data=design.account, diagnostics=diag, effects=effects,
        settings=Settings(level, resamples, int(seed), design.labels[ref_index]),
        caution=CAUTION, tool_version=__version__, warnings=tuple(notes),
    )


def _check_settings(level: float, resamples: int, seed: int) -> tuple[float, int]:
    level = float(level)
    if not 0.5 <= level < 1.0:
        raise DesignError(f"confidence level {level} is out of range; use a value in [0.5, 1), e.g. 0.95")
    if int(resamples) != resamples or resamples < 100:
        raise DesignError(f"bootstrap resamples {resamples}: use a whole number of at least 100")
    if int(seed) != seed or seed < 0:
        raise DesignError(f"seed {seed}: use a non-negative whole number")
    return level, int(resamples)


def _reference_index(design: TwoGroups, reference: str | None) -> int:
    if reference is None:
        return 1
    if reference not in design.labels:
        raise DesignError(
            f"--reference '{reference}' is not one of the compared groups"
            f" ('{design.labels[0]}', '{design.labels[1]}')"
        )
    return design.labels.index(reference)


def _estimate_all(specs: tuple[EffectSpec, ...], a, b, level, resamples, rng, progress):
    estimates = {s.name: _guarded(s, a, b, level) for s in specs}
    defined = {s.name: s.values for s in specs if estimates[s.name].value is not None}
    replicates = bootstrap_replicates(defined, a, b, resamples, rng, progress)
    effects, notes = [], []
    for spec in specs:
        est = estimates[spec.name]
        if est.value is None:
            notes.append(f"{spec.name}: {est.reason}")
            warnings.warn(f"{spec.name} is undefined: {est.reason}", UndefinedEffectWarning,
                          stacklevel=3)
            effects.append(Effect(spec.name, spec.family, None, None, None, "none", (),
                                  spec.null_value, spec.assumes, est.reason, est.notes))
            continue
        loo = leave_one_out(spec.values, a, b)
        boot = bca_interval(est.value, replicates[spec.name], loo, level, spec.bounds)
        intervals = tuple(iv for iv in (est.interval, boot.interval) if iv is not None)
        primary = est.interval if est.interval is not None else boot.interval
        extra = () if boot.reason is None else (f"bootstrap: {boot.reason}",)
        effects.append(Effect(
            spec.name, spec.family, float(est.value),
            None if primary is None else primary.low, None if primary is None else primary.high,
            "none" if primary is None else primary.method, intervals, spec.null_value,
            spec.assumes, None, est.notes + extra,
        ))
    return tuple(effects), notes


def _guarded(spec: EffectSpec, a, b, level) -> Estimate:
    """The effect's estimate, or null with a reason when the values overflow double precision."""
    try:
        with np.errstate(over="raise", invalid="ignore", divide="ignore"):
            est = spec.estimate(a, b, level)
    except (OverflowError, FloatingPointError):
        return Estimate(None, None, "the values are too large for double precision arithmetic")
    if est.value is not None and not np.isfinite(est.value):
        return Estimate(None, None, "the estimate is not finite in double precision")
    if est.interval is not None and not (np.isfinite(est.interval.low)
                                         and np.isfinite(est.interval.high)):
        return Estimate(est.value, None, None,
                        est.notes + ("the analytic interval is not finite in double precision",))
    return est


def _diagnose(design: TwoGroups, effects: tuple[Effect, ...]) -> Diagnostics:
    a, b = design.a, design.b
    labels = design.labels
    pooled = np.concatenate([a, b])
    residuals = np.concatenate([a - a.mean(), b - b.mean()])
    normality = tuple(diagnostics.normality(lab, x) for lab, x in zip(labels, (a, b))) + (
        diagnostics.normality("residuals (each group centred on its mean)", residuals),)
    floor, ceiling = float(pooled.min()), float(pooled.max())
    outliers = tuple(diagnostics.outliers(lab, x, rows, floor, ceiling)
                     for lab, x, rows in zip(labels, design.values, design.rows))
    by_name = {e.name: e for e in effects}
    check = diagnostics.normal_theory_check(by_name["cohen_d"].estimate,
                                            by_name["prob_superiority"].estimate)
    return Diagnostics(
        normality=normality,
        spread=diagnostics.spread(labels, a, b),
        ties=diagnostics.ties("pooled", pooled),
        ties_by_group=tuple(diagnostics.ties(lab, x) for lab, x in zip(labels, (a, b))),
        outliers=outliers,
        normal_theory=check,
    )
