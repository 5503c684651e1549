"""How much single cases move each effect: exact leave-one-out changes, flags, and fragility.

A unit is one case (independent groups) or one participant (paired and repeated designs).
For every effect: the estimate without each unit, its change, the change over the jackknife SE;
flags for units whose removal flips the sign, moves the interval across the no-effect value, or
changes the conventional magnitude label; and two fragility counts found greedily (below).

Jackknife SE and bias are stratified (Efron & Tibshirani 1993, sec. 11.2 and 10.5, summed over
the strata, as the BCa acceleration is): SE^2 = sum_j (n_j - 1)/n_j sum_i (theta_(ji) - mean_j)^2,
bias = sum_j (n_j - 1)(mean_j - theta-hat).
A unit without which the effect is undefined (every other value of its group equal, say) is left
out of the SE and the largest change, which only finite changes have; when it is the only such
unit it is the most influential one, since the effect exists only with it (when several are, as
in a group of two, none of them is singled out and the largest finite change names the line).

Intervals after removal: for an effect whose interval is analytic, the interval is recomputed
exactly on the reduced data. For an effect whose interval is the bootstrap's, the bootstrap is not
rerun per case; its interval is shifted by the change in the estimate, and the output says so.
Per case, exact recomputation is done for every unit when there are at most EXACT_ALL_UNITS, and
otherwise for the units (at most EXACT_NEAR_MAX, nearest first) whose shifted interval ends within
a quarter of the interval's width of the no-effect value (the only ones whose status can
plausibly change); the others keep the shifted interval.

Fragility: units are removed one at a time, each time the one whose removal moves the estimate
furthest toward the no-effect value, with the leave-one-out values recomputed exactly on the
reduced data at every step (the exact fast path when the effect has one; for effects without one
and more than ADAPTIVE_MAX_UNITS units, the order of the first leave-one-out pass is kept and only
the estimate is recomputed at each step); among equally good candidates the one on the earlier
file line goes first, so the count does not depend on which group is named first.
Each step costs a pass over all units, so the search runs at most `step_limit(units)` steps:
MAX_STEPS, or fewer for large samples (FRAGILITY_WORK unit-steps, never fewer than MIN_STEPS);
the limit is reported with each count.
`fragility_sign` counts the removals until the estimate
reaches or crosses the no-effect value; `fragility_null` those until the interval contains it
(0 when it already does). Greedy counts are upper bounds on the true minimum. A search stops when a
group would fall below its minimum size or at the step limit; the count is then null with
`reached: false`.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from auditor.effects import EffectSpec
from auditor.magnitude import DEFAULT_BENCHMARKS, Benchmarks, magnitude_levels
from auditor.resampling import leave_one_out_units
from auditor.results import Effect, Record, plain

EXACT_ALL_UNITS = 300
EXACT_NEAR_MAX = 100
ADAPTIVE_MAX_UNITS = 400
MAX_STEPS = 200
MIN_STEPS = 20
FRAGILITY_WORK = 2_000_000
CASES_LISTED_MAX = 20_000  # per-case rows in the JSON; beyond, the most influential ones


def step_limit(units: int) -> int:
    """Most removals the fragility search tries: MAX_STEPS, fewer when each step is a pass over
    more than FRAGILITY_WORK / MAX_STEPS units, never fewer than MIN_STEPS."""
    return int(min(MAX_STEPS, max(MIN_STEPS, FRAGILITY_WORK // max(units, 1))))


@dataclass(frozen=True)
class Units:
    """Who each unit is: per stratum, the file line, the group label and a value to show."""

    rows: tuple[np.ndarray, ...]
    groups: tuple[tuple[str, ...], ...]
    values: tuple[np.ndarray | None, ...]
    minimum: tuple[int, ...]  # smallest size each stratum may shrink to
    kind: str  # "case" or "participant"


@dataclass(frozen=True)
class Fragility(Record):
    count: int | None
    rows: tuple[int, ...]
    reached: bool
    interval_rule: str | None = None
    step_limit: int | None = None


@dataclass(frozen=True)
class EffectInfluence(Record):
    effect: str
    jackknife_se: float | None
    bias: float | None
    max_abs_change: float | None
    most_influential_row: int | None
    sign_flips: tuple[int, ...]
    interval_flips: tuple[int, ...]
    label_changes: tuple[int, ...]
    fragility_sign: Fragility
    fragility_null: Fragility
    interval_rule: str


@dataclass(frozen=True)
class Influence(Record):
    """Summaries per effect and the per-case table, held as columns (one entry per unit, in file
    line order) so that large samples stay compact; `cases` lists it row by row."""

    unit: str
    effects: tuple[EffectInfluence, ...]
    rows: np.ndarray
    groups: tuple[str, ...]
    values: np.ndarray | None
    changes: dict[str, np.ndarray]
    standardized: dict[str, np.ndarray]

    def __eq__(self, other) -> bool:
        """Field by field, the per-case columns element by element (undefined entries, NaN,
        equal to each other), so that two audits of the same data and seed compare equal."""
        if not isinstance(other, Influence):
            return NotImplemented

        def same(x, y) -> bool:
            if isinstance(x, np.ndarray) or isinstance(y, np.ndarray):
                return (isinstance(x, np.ndarray) and isinstance(y, np.ndarray)
                        and x.shape == y.shape
                        and np.array_equal(x, y, equal_nan=x.dtype.kind == "f"))
            if isinstance(x, dict) and isinstance(y, dict):
                return x.keys() == y.keys() and all(same(x[k], y[k]) for k in x)
            return x == y

        return all(same(getattr(self, f.name), getattr(other, f.name))
                   for f in dataclasses.fields(self))

    __hash__ = None  # holds arrays

    @property
    def cases(self) -> list[dict]:
        return self._cases(range(self.rows.size))

    def listed(self) -> np.ndarray:
        """Positions of the cases the JSON lists: all of them up to CASES_LISTED_MAX, otherwise
        the CASES_LISTED_MAX with the largest standardized change on any effect (in line order)."""
        n = self.rows.size
        if n <= CASES_LISTED_MAX or not self.standardized:
            return np.arange(n)
        scores = np.abs(np.vstack(list(self.standardized.values())))
        scores = np.where(np.isfinite(scores), scores, -1.0).max(axis=0)
        top = np.argpartition(-scores, CASES_LISTED_MAX - 1)[:CASES_LISTED_MAX]
        return np.sort(top)

    def _cases(self, positions) -> list[dict]:
        def number(x):
            x = float(x)
            return x if math.isfinite(x) else None

        rows = self.rows.tolist()
        out = []
        for i in positions:
            row = rows[i]
            out.append({
                "row": row, "group": self.groups[i],
                "value": None if self.values is None else number(self.values[i]),
                "change": {k: number(v[i]) for k, v in self.changes.items()},
                "standardized_change": {k: number(v[i]) for k, v in self.standardized.items()},
            })
        return out

    def to_dict(self):
        listed = self.listed()
        out = {"unit": self.unit, "definitions": dict(FLIP_DEFINITIONS),
               "effects": {e.effect: plain(e) for e in self.effects},
               "cases": self._cases(listed.tolist())}
        if listed.size < self.rows.size:
            out["cases_listed"] = {
                "listed": int(listed.size), "of": int(self.rows.size),
                "rule": f"above {CASES_LISTED_MAX} {self.unit}s only the {CASES_LISTED_MAX} with"
                        " the largest standardized change on any effect are listed, in line"
                        " order; every summary above uses all of them"}
        return out


FLIP_DEFINITIONS = {
    "sign_flips": "cases whose removal takes the estimate from one side of the no-effect value to"
                  " it or beyond it; an estimate exactly at the no-effect value has no sign, so no"
                  " removal flips it (moving it off the value is a move, not a flip)",
    "interval_flips": "cases whose removal changes whether the interval contains the no-effect"
                      " value",
    "label_changes": "cases whose removal changes the conventional magnitude label",
}


def _side(value: float, null: float) -> int:
    return 0 if value == null else (1 if value > null else -1)


def _delete(samples, stratum: int, index: int):
    return tuple(np.delete(s, index, axis=0) if k == stratum else s for k, s in enumerate(samples))


def _loo(spec: EffectSpec, samples) -> tuple[np.ndarray, ...]:
    if spec.leave_one_out is not None:
        with np.errstate(all="ignore"):
            return tuple(np.asarray(v, dtype=float) for v in spec.leave_one_out(*samples))
    return leave_one_out_units(spec.values, samples)


def _interval_contains(spec: EffectSpec, effect: Effect, reduced, level: float,
                       new_value: float) -> bool | None:
    """Does the interval on the reduced data contain the no-effect value? Exact recomputation for
    analytic intervals, shifted bootstrap interval otherwise; None if no interval exists."""
    if effect.ci_low is None:
        return None
    if effect.ci_method != "bca_bootstrap" and spec.holds_null is not None:
        with np.errstate(all="ignore"):  # the answer without the interval's ends, when known
            answer = spec.holds_null(*reduced, level, effect.ci_method)
        if answer is not None:
            return answer
    if effect.ci_method != "bca_bootstrap":
        # the index's own interval first (cheap); the intervals beside it only when the
        # effect's interval is one of those (`effects.with_extras`)
        own = getattr(spec.estimate, "without_extras", None)
        with np.errstate(all="ignore"):
            est = (own or spec.estimate)(*reduced, level)
            same = [iv for iv in (est.interval, *est.more)
                    if iv is not None and iv.method == effect.ci_method]
            if not same and own is not None:
                est = spec.estimate(*reduced, level)
                same = [iv for iv in (est.interval, *est.more)
                        if iv is not None and iv.method == effect.ci_method]
        iv = same[0] if same else est.interval
        if iv is not None and math.isfinite(iv.low) and math.isfinite(iv.high):
            return iv.low <= spec.null_value <= iv.high
    shift = new_value - effect.estimate
    return effect.ci_low + shift <= spec.null_value <= effect.ci_high + shift


def _rule(effect: Effect, per_case: bool = False) -> str:
    if effect.ci_method == "bca_bootstrap":
        return "bootstrap interval shifted by the change in the estimate (not rerun per case)"
    rule = f"{effect.ci_method} interval recomputed exactly on the reduced data"
    if per_case:
        rule += (f" (for every unit when there are at most {EXACT_ALL_UNITS}; otherwise for the"
                 f" {EXACT_NEAR_MAX} whose shifted interval ends nearest the no-effect value,"
                 " the others shifted)")
    return rule


NOT_SEARCHED = "not searched: a screen searches only for the primary index"


def effect_influence(spec: EffectSpec, effect: Effect, samples, loo: tuple[np.ndarray, ...],
                     units: Units, level: float,
                     benchmarks: dict[str, Benchmarks] = DEFAULT_BENCHMARKS,
                     search: bool = True, recheck_rows=None) -> EffectInfluence:
    """Leave-one-out summary, flags and fragility of one effect (see the module docstring).
    With `search` false the fragility counts are left null (`NOT_SEARCHED`). With `recheck_rows`
    (file lines), only those units get the exact interval recheck they would otherwise get; the
    other units' interval flips rest on the shifted interval (a screen passes the extreme cases,
    the only units whose flips the outlier check reads)."""
    rule = _rule(effect, per_case=True)
    if recheck_rows is not None and effect.ci_method != "bca_bootstrap":
        rule = (f"{effect.ci_method} interval recomputed exactly on the reduced data only for the"
                " extreme cases (a screen reads no other flip); the other cases' flips use the"
                " interval shifted by the change in the estimate")
    if effect.estimate is None:
        empty = Fragility(None, (), False)
        return EffectInfluence(effect.name, None, None, None, None, (), (), (), empty, empty, rule)
    theta, null = effect.estimate, spec.null_value
    se2 = bias = 0.0
    for values in loo:
        ok = values[np.isfinite(values)]
        n = ok.size
        if n > 1:
            se2 += (n - 1) / n * float(np.sum((ok - ok.mean()) ** 2))
            bias += (n - 1) * (float(ok.mean()) - theta)
    all_changes = np.concatenate([v - theta for v in loo])
    all_rows = np.concatenate(units.rows)
    finite = np.isfinite(all_changes)
    max_change = float(np.max(np.abs(all_changes[finite]))) if finite.any() else None
    top_row = (int(all_rows[finite][np.argmax(np.abs(all_changes[finite]))])
               if max_change else None)  # no case moves the estimate: none is most influential
    if np.count_nonzero(~finite) == 1:  # the one case without which the index is undefined
        top_row = int(all_rows[~finite][0])  # decides it outright

    side = _side(theta, null)
    values = np.concatenate(loo)
    strata = np.concatenate([np.full(v.size, j) for j, v in enumerate(loo)])
    positions = np.concatenate([np.arange(v.size) for v in loo])
    total = int(values.size)
    with np.errstate(invalid="ignore"):
        sides = np.sign(values - null).astype(int)
    # an estimate at the no-effect value has no sign: no removal flips it (see FLIP_DEFINITIONS)
    sign_flips = all_rows[finite & (sides != side)] if side != 0 else all_rows[:0]
    levels = magnitude_levels(spec.name, values, benchmarks)
    label_changes = (all_rows[finite & (levels != magnitude_levels(spec.name, [theta],
                                                                   benchmarks)[0])]
                     if levels is not None else all_rows[:0])
    interval_flips = all_rows[:0]
    if effect.ci_low is not None:
        base_contains = effect.ci_low <= null <= effect.ci_high
        width = effect.ci_high - effect.ci_low
        with np.errstate(invalid="ignore"):
            low, high = effect.ci_low + (values - theta), effect.ci_high + (values - theta)
            contains = (low <= null) & (null <= high)
            distance = np.minimum(np.abs(low - null), np.abs(high - null))
        known = finite.copy()
        if effect.ci_method != "bca_bootstrap":
            near = finite & ((distance <= 0.25 * width) | (total <= EXACT_ALL_UNITS))
            picked = np.flatnonzero(near)
            if total > EXACT_ALL_UNITS:
                picked = picked[np.argsort(distance[picked], kind="stable")][:EXACT_NEAR_MAX]
            if recheck_rows is not None:
                picked = picked[np.isin(all_rows[picked], np.asarray(list(recheck_rows),
                                                                     dtype=all_rows.dtype))]
            for k in picked:
                j, i = int(strata[k]), int(positions[k])
                exact = _interval_contains(spec, effect, _delete(samples, j, i), level,
                                           float(values[k]))
                if exact is None:
                    known[k] = False
                else:
                    contains[k] = exact
        interval_flips = all_rows[known & (contains != base_contains)]
    if search:
        frag_sign, frag_null = fragility(spec, effect, samples, units, level)
    else:
        frag_sign = frag_null = Fragility(None, (), False, NOT_SEARCHED)
    return EffectInfluence(
        effect=effect.name, jackknife_se=math.sqrt(se2), bias=bias, max_abs_change=max_change,
        most_influential_row=top_row, sign_flips=tuple(sorted(sign_flips.tolist())),
        interval_flips=tuple(sorted(interval_flips.tolist())),
        label_changes=tuple(sorted(label_changes.tolist())),
        fragility_sign=frag_sign, fragility_null=frag_null, interval_rule=rule,
    )


def fragility(spec: EffectSpec, effect: Effect, samples, units: Units, level: float):
    """Greedy counts of removals until the sign flips and until the interval holds the no-effect
    value (module docstring). Returns (fragility_sign, fragility_null), each with the search's
    step limit."""
    limit = step_limit(sum(s.shape[0] for s in samples))
    found = _greedy_search(spec, effect, samples, units, level, limit)
    return tuple(dataclasses.replace(f, step_limit=limit) for f in found)


def _greedy_search(spec: EffectSpec, effect: Effect, samples, units: Units, level: float,
                   limit: int):
    theta, null = effect.estimate, spec.null_value
    side = _side(theta, null)
    rule = _rule(effect)
    already_null = effect.ci_low is not None and effect.ci_low <= null <= effect.ci_high
    null_result = Fragility(0, (), True, rule) if already_null else None
    if side == 0:
        return Fragility(0, (), True), null_result or Fragility(0, (), True, rule)
    if effect.ci_low is None:
        null_result = Fragility(None, (), False, "no interval")
    keep = [np.arange(s.shape[0]) for s in samples]
    removed: list[int] = []
    total = sum(s.shape[0] for s in samples)
    adaptive = spec.leave_one_out is not None or total <= ADAPTIVE_MAX_UNITS
    static_scores = None  # per stratum: first-pass scores, by original index
    sign_result = None
    for _ in range(limit):
        current = tuple(s[k] for s, k in zip(samples, keep))
        if adaptive or static_scores is None:
            loo = _loo(spec, current)
            scores = [side * (v - null) for v in loo]  # lower = closer to (or past) the null
            if not adaptive:
                static_scores = [np.full(s.shape[0], np.inf) for s in samples]
                for j, k in enumerate(keep):
                    static_scores[j][k] = scores[j]
        if not adaptive:
            scores = [static_scores[j][k] for j, k in enumerate(keep)]
        best = None  # (score, file line, stratum, position); ties go to the earlier line
        for j, sc in enumerate(scores):
            if keep[j].size - 1 < units.minimum[j]:
                continue
            sc = np.where(np.isfinite(sc), sc, np.inf)
            low = float(np.min(sc)) if sc.size else np.inf
            if not np.isfinite(low):
                continue
            tied = np.flatnonzero(sc == low)
            lines = units.rows[j][keep[j][tied]]
            i = int(tied[np.argmin(lines)])
            candidate = (low, int(units.rows[j][keep[j][i]]), j, i)
            if best is None or candidate[:2] < best[:2]:
                best = candidate
        if best is None:
            break
        _, _, j, i = best
        original = int(keep[j][i])
        keep[j] = np.delete(keep[j], i)
        removed.append(int(units.rows[j][original]))
        reduced = tuple(s[k] for s, k in zip(samples, keep))
        with np.errstate(all="ignore"):
            value = float(spec.values(*[r[None, ...] for r in reduced])[0])
        if not math.isfinite(value):
            break
        if sign_result is None and _side(value, null) != side:
            sign_result = Fragility(len(removed), tuple(removed), True)
        if null_result is None:
            contains = _interval_contains(spec, effect, reduced, level, value)
            if contains:
                null_result = Fragility(len(removed), tuple(removed), True, rule)
        if sign_result is not None and null_result is not None:
            break
    if sign_result is None:
        sign_result = Fragility(None, (), False)
    if null_result is None:
        null_result = Fragility(None, (), False, rule)
    return sign_result, null_result


def influence_table(specs: Sequence[EffectSpec], effects: Sequence[Effect], samples,
                    loo_by_name: dict[str, tuple[np.ndarray, ...]], units: Units,
                    level: float,
                    benchmarks: dict[str, Benchmarks] = DEFAULT_BENCHMARKS,
                    search: bool = True, recheck_rows=None) -> Influence:
    """Influence of every effect in `specs` and the per-case table (row, group, value, change per
    effect). With `search` false no fragility search is run (see `with_fragility`);
    `recheck_rows`: see `effect_influence`."""
    by_name = {e.name: e for e in effects}
    summaries = tuple(effect_influence(spec, by_name[spec.name], samples,
                                       loo_by_name.get(spec.name, ()), units, level, benchmarks,
                                       search, recheck_rows)
                      for spec in specs)
    se = {s.effect: s.jackknife_se for s in summaries}
    rows = np.concatenate(units.rows).astype(np.int64)
    order = np.argsort(rows, kind="stable")
    labels = tuple(label for group in units.groups for label in group)
    values = (None if any(v is None for v in units.values)
              else np.concatenate([np.asarray(v, dtype=float) for v in units.values])[order])
    changes, standardized = {}, {}
    for spec in specs:
        loo = loo_by_name.get(spec.name)
        theta = by_name[spec.name].estimate
        if loo is None or theta is None:
            continue
        change = (np.concatenate(loo) - theta)[order]
        changes[spec.name] = change
        scale = se.get(spec.name)
        standardized[spec.name] = change / scale if scale else np.full(change.size, np.nan)
    return Influence(units.kind, summaries, rows[order], tuple(labels[i] for i in order),
                     values, changes, standardized)


def with_fragility(influence: Influence, spec: EffectSpec, effect: Effect, samples,
                   loo: tuple[np.ndarray, ...], units: Units, level: float,
                   benchmarks: dict[str, Benchmarks] = DEFAULT_BENCHMARKS) -> Influence:
    """`influence` with one effect's fragility searched: its summary gains the counts, or, when
    the table has no summary of it yet, its whole influence (summary and per-case columns) is
    added. The counts are those `influence_table` finds for the effect."""
    present = {e.effect: e for e in influence.effects}
    if spec.name in present:
        sign, null = fragility(spec, effect, samples, units, level)
        summary = dataclasses.replace(present[spec.name], fragility_sign=sign,
                                      fragility_null=null)
        return dataclasses.replace(influence, effects=tuple(
            summary if e.effect == spec.name else e for e in influence.effects))
    added = influence_table([spec], [effect], samples, {spec.name: loo}, units, level, benchmarks)
    return dataclasses.replace(
        influence, effects=influence.effects + added.effects,
        changes={**influence.changes, **added.changes},
        standardized={**influence.standardized, **added.standardized})
