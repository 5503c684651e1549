"""The decision: the team policy applied to the screening, as a deterministic rule trace.

Each check of the design is evaluated with its evidence (the statistic, its value, the policy's
limit); the first check in the policy's precedence that fires chooses the branch, whose primary
index, companion indices and test are then reported. When no check fires the branch is
`assumptions_hold`. Every check appears in the trace, fired or not, so a reviewer can follow the
decision line by line. The test is run here (`significance.run_test`) on the same samples as the
effects, and the primary index's fragility is compared with the policy's limit.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from auditor import significance
from auditor.agreement import MATCHED, agrees, matched_method
from auditor.magnitude import magnitude_label
from auditor.catalogue import OUTLIER_WATCH
from auditor.policy import DESIGNS, INDICES, Policy
from auditor.results import AuditResult, Effect, Record, plain

POLICY_DESIGN = {audit: table for table, audit in DESIGNS.items()}
# policy table -> the index the outlier check watches (catalogue.OUTLIER_WATCH)
MEAN_INDEX = {d.policy_table: name for d, name in OUTLIER_WATCH.items()}


@dataclass(frozen=True)
class Evidence(Record):
    """One number a check looked at: `value` compared with `limit` by `comparison`."""

    subject: str  # the group, the differences, the pooled data ...
    statistic: str
    value: float | None
    comparison: str  # ">=", "<", ...
    limit: float | None
    met: bool


@dataclass(frozen=True)
class Reason(Record):
    rule: str
    fired: bool
    evidence: tuple[Evidence, ...]
    effect: str  # what firing (or not) does to the decision


@dataclass(frozen=True)
class Decision(Record):
    branch: str
    primary: str
    also_report: tuple[str, ...]
    interval: dict
    test: dict
    reasons: tuple[Reason, ...]
    magnitude: dict
    descriptives: str  # "median_iqr_range" or "mean_sd"
    fragile: bool | None
    notes: tuple[str, ...] = ()
    rationale: str = ""
    reviewer_note: str = ""
    methods_sentence: str = ""
    extra: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        out = plain(self)
        out["also_report"] = list(self.also_report)
        return out


# ------------------------------------------------------------------ checks


def _normality_evidence(norm, policy: Policy) -> tuple[list[Evidence], bool]:
    p = policy.settings["normality"]
    factor = p["small_n_factor"] if norm.n < p["small_n"] else 1.0
    skew_limit, kurt_limit = p["skewness"] * factor, p["excess_kurtosis"] * factor
    out = []
    skew, kurt = norm.skewness, norm.excess_kurtosis
    out.append(Evidence(norm.label, "|skewness|", None if skew is None else abs(skew), ">=",
                        skew_limit, skew is not None and abs(skew) >= skew_limit))
    out.append(Evidence(norm.label, "|excess kurtosis|", None if kurt is None else abs(kurt), ">=",
                        kurt_limit, kurt is not None and abs(kurt) >= kurt_limit))
    if norm.n < p["large_n"]:
        sw = norm.shapiro_p
        out.append(Evidence(norm.label, "Shapiro-Wilk p", sw, "<", p["test_p"],
                            sw is not None and sw < p["test_p"]))
    else:
        out.append(Evidence(norm.label, f"Shapiro-Wilk p (ignored at n >= {p['large_n']})",
                            norm.shapiro_p, "<", None, False))
    return out, any(e.met for e in out)


def _check_normality(normals, policy: Policy) -> Reason:
    evidence, fired = [], False
    for norm in normals:
        ev, hit = _normality_evidence(norm, policy)
        evidence += ev
        fired = fired or hit
    return Reason("non_normal", fired, tuple(evidence),
                  "the data depart clearly from normality" if fired
                  else "no marked departure from normality")


def _check_spread(summaries, policy: Policy) -> Reason:
    p = policy.settings["spread"]
    sds = [g.sd for g in summaries]
    if min(sds) <= 0 or not all(math.isfinite(s) for s in sds):
        ev = Evidence("groups", "SD ratio", None, ">=", p["sd_ratio"], False)
        return Reason("unequal_spread", False, (ev,), "SD ratio undefined (a constant group)")
    wide = max(range(len(sds)), key=lambda i: sds[i])
    narrow = min(range(len(sds)), key=lambda i: sds[i])
    ratio = sds[wide] / sds[narrow]
    n_ratio = summaries[narrow].n / summaries[wide].n
    evidence = [Evidence("groups", f"SD ratio ({summaries[wide].label} / {summaries[narrow].label})",
                         ratio, ">=", p["sd_ratio"], ratio >= p["sd_ratio"])]
    smaller_wider = n_ratio >= p["unequal_n_ratio"]
    evidence.append(Evidence(
        "groups", f"n ratio ({summaries[narrow].label} / {summaries[wide].label}), the wider"
        " group being the smaller", n_ratio, ">=", p["unequal_n_ratio"], smaller_wider))
    if smaller_wider:
        limit = p["sd_ratio_when_smaller_group_wider"]
        evidence.append(Evidence("groups", "SD ratio when the smaller group is wider", ratio,
                                 ">=", limit, ratio >= limit))
    fired = evidence[0].met or (smaller_wider and evidence[-1].met)
    return Reason("unequal_spread", fired, tuple(evidence),
                  "the spreads differ" if fired else "spreads comparable")


def _check_ties(ties, policy: Policy) -> Reason:
    p = policy.settings["ties"]
    ev = (Evidence(ties.label, "tie fraction", ties.tie_fraction, ">=", p["tie_fraction"],
                   ties.tie_fraction >= p["tie_fraction"]),
          Evidence(ties.label, "distinct values", float(ties.distinct_values), "<=",
                   float(p["few_distinct_values"]),
                   ties.distinct_values <= p["few_distinct_values"]))
    fired = any(e.met for e in ev)
    return Reason("heavy_ties", fired, ev, "ties are heavy or the scale is coarse" if fired
                  else "ties are few")


def extreme_rows(outliers, rule: str) -> list[int]:
    """File lines of the cases the policy's outlier rule calls extreme, across `outliers`."""
    attr = {"beyond_3_iqr": "beyond_3_iqr_rows", "beyond_1_5_iqr": "beyond_1_5_iqr_rows",
            "modified_z": "modified_z_rows"}[rule]
    return sorted({r for o in outliers for r in getattr(o, attr)})


def _check_outliers(result: AuditResult, outliers, design: str, policy: Policy) -> Reason:
    p = policy.settings["outliers"]
    index = MEAN_INDEX[design]
    infl = result.influence
    rows = extreme_rows(outliers, p["rule"])
    evidence = [Evidence("all groups", f"extreme cases ({p['rule'].replace('_', ' ')})",
                         float(len(rows)), ">=", 1.0, bool(rows))]
    if infl is None or index not in infl.standardized:
        return Reason("outliers", False, tuple(evidence), "influence not available")
    summary = next(e for e in infl.effects if e.effect == index)
    flips = set(summary.sign_flips) | set(summary.interval_flips)
    position = {int(r): i for i, r in enumerate(infl.rows.tolist())}
    if design == "k_repeated":  # extreme cells belong to participants; judge the participants
        candidates = list(position) if rows else []
    else:
        candidates = [r for r in rows if r in position]
    scale = _standard_error(result.effect(index), summary)
    defined = result.effect(index).estimate is not None
    fired, largest = False, None
    for r in candidates:
        change = float(infl.changes[index][position[r]])
        size = abs(change) / scale if scale and math.isfinite(change) else None
        largest = size if largest is None or (size is not None and size > largest) else largest
        moved = size is not None and size >= p["influence_in_se"]
        flipped = p["any_sign_or_interval_flip"] and r in flips
        if defined and not math.isfinite(change):  # the index exists only with this case
            fired = True
            evidence.append(Evidence(f"line {r}", f"{index} undefined without this case", 1.0,
                                     ">=", 1.0, True))
        elif moved or flipped:
            fired = True
            evidence.append(Evidence(f"line {r}", f"change of {index} in standard errors", size,
                                     ">=", p["influence_in_se"], moved))
            if flipped:
                evidence.append(Evidence(f"line {r}", f"{index}: sign or interval flips when"
                                         " removed", 1.0, ">=", 1.0, True))
    if rows and not fired:
        evidence.append(Evidence("all groups", f"largest change of {index} by an extreme case,"
                                 " in standard errors", largest, ">=", p["influence_in_se"], False))
    return Reason("outliers", fired, tuple(evidence),
                  f"an extreme case alone moves {index}" if fired
                  else "no extreme case drives the mean-based index")


def _standard_error(effect: Effect, summary) -> float | None:
    """The index's standard error read from its analytic interval (half-width over the normal
    quantile), else its jackknife SE. The interval's SE is not inflated by the very case being
    judged, as the jackknife SE is."""
    if effect.ci_low is not None and effect.intervals:
        z = float(special.ndtri(0.5 + effect.intervals[0].level / 2))
        width = (effect.ci_high - effect.ci_low) / (2 * z)
        if width > 0:
            return width
    return summary.jackknife_se


def _check_small(sizes: list[tuple[str, int]], policy: Policy) -> Reason:
    limit = policy.settings["sample_size"]["minimum_n"]
    ev = tuple(Evidence(label, "n", float(n), "<", float(limit), n < limit) for label, n in sizes)
    fired = any(e.met for e in ev)
    return Reason("small_sample", fired, ev, f"fewer than {limit} values: screening has little"
                  " power" if fired else "every group reaches the minimum size")


def _check_zeros(diag, policy: Policy) -> Reason:
    limit = policy.settings["paired"]["many_zero_share"]
    ev = (Evidence("differences", "share of zero differences", diag.zero_share, ">=", limit,
                   diag.zero_share >= limit),)
    return Reason("many_zeros", ev[0].met, ev, "many participants did not change" if ev[0].met
                  else "few zero differences")


def checks(result: AuditResult, policy: Policy) -> dict[str, Reason]:
    """Every check of the result's design, by name."""
    design = POLICY_DESIGN[result.design]
    diag = result.diagnostics
    if design == "two_groups":
        normals = diag.normality[:2]
        return {
            "small_sample": _check_small([(g.label, g.n) for g in result.groups], policy),
            "heavy_ties": _check_ties(diag.ties, policy),
            "outliers": _check_outliers(result, diag.outliers, design, policy),
            "non_normal": _check_normality(normals, policy),
            "unequal_spread": _check_spread(result.groups, policy),
        }
    if design == "paired":
        return {
            "small_sample": _check_small([("pairs", result.groups[0].n)], policy),
            "many_zeros": _check_zeros(diag, policy),
            "heavy_ties": _check_ties(diag.differences_ties, policy),
            "outliers": _check_outliers(result, (diag.differences_outliers,), design, policy),
            "non_normal": _check_normality((diag.differences_normality,), policy),
        }
    out = {
        "small_sample": _check_small(
            [(g.label, g.n) for g in result.groups] if design == "k_groups"
            else [("participants", result.groups[0].n)], policy),
        "heavy_ties": _check_ties(diag.ties, policy),
        "outliers": _check_outliers(result, diag.outliers, design, policy),
        "non_normal": _check_normality(diag.normality, policy),
    }
    if design == "k_groups":
        out["unequal_spread"] = _check_spread(result.groups, policy)
    return out


# ------------------------------------------------------------------ the decision


def quoted_interval(effect: Effect, method: str) -> dict:
    """The interval the policy quotes for `effect`: its BCa bootstrap interval when `method` is
    "bootstrap" and one exists, otherwise the effect's own (analytic first)."""
    iv = None
    if method == "bootstrap":
        iv = effect.interval("bca_bootstrap")
    if iv is None:
        return {"method": effect.ci_method, "low": effect.ci_low, "high": effect.ci_high,
                "level": effect.intervals[0].level if effect.intervals else None}
    return {"method": iv.method, "low": iv.low, "high": iv.high, "level": iv.level}


def test_matched_effect(effect: Effect, audit_design: str, choice: "Choice",
                        policy: Policy) -> Effect:
    """The effect as the decision will quote it: with its test-matched interval as its interval
    (`agreement.MATCHED`, when the policy's `intervals.match_test` is on and the matched interval
    is not the index's own), else the effect itself. For the fragility search, which then counts
    the removals that bring the no-effect value into the interval the report quotes."""
    design = POLICY_DESIGN[audit_design]
    branch = policy.branch(design, choice.branch)
    if branch is None or not policy.settings["intervals"].get("match_test", False):
        return effect
    wanted = matched_method(design, branch.test, effect.name)
    iv = effect.interval(wanted) if wanted else None
    if iv is None or iv.method == effect.ci_method or iv.low is None:
        return effect
    return dataclasses.replace(effect, ci_low=iv.low, ci_high=iv.high, ci_method=iv.method)


def interval_with_test(effect: Effect, design: str, test_name: str, test: dict, policy: Policy,
                       level: float) -> tuple[dict, list[str]]:
    """The primary index's quoted interval, squared with the reported test.

    With the policy's `intervals.match_test`, the interval of the index that agrees with the test
    by construction (`agreement.MATCHED`) is quoted when the index has one; the interval the
    policy's `intervals.method` alone would quote is kept under `instead_of`, with whether it
    would have agreed. `agrees_with_test` says whether the quoted interval excludes the no-effect
    value exactly when the test's p is below 1 - level (null when either is undefined). Returns
    the interval record and notes for the decision."""
    own = quoted_interval(effect, policy.settings["intervals"]["method"])
    if design not in MATCHED:  # omnibus designs: a two-sided interval and the F or chi-squared
        return own, []  # test answer different questions (Steiger 2004): no agreement is claimed
    p = test.get("p")
    notes = []
    out = dict(own)
    wanted = matched_method(design, test_name, effect.name)
    matched = effect.interval(wanted) if wanted else None
    if policy.settings["intervals"].get("match_test", False) and matched is not None:
        out = {"method": matched.method, "low": matched.low, "high": matched.high,
               "level": matched.level, "matched_to_test": test_name}
        if own["method"] != matched.method:
            own_agrees = agrees(own["low"], own["high"], effect.null_value, p, level)
            out["instead_of"] = {**own, "agrees_with_test": own_agrees}
            if own_agrees is False:
                notes.append(f"the {own['method']} interval of {effect.name} would have"
                             f" contradicted the {test.get('label', test.get('name'))}; the"
                             f" {matched.method} interval, which agrees with it by construction,"
                             " is quoted instead")
    out["agrees_with_test"] = agrees(out["low"], out["high"], effect.null_value, p, level)
    if out["agrees_with_test"] is False:
        notes.append(f"the quoted {out['method']} interval of {effect.name} and the"
                     f" {test.get('label', test.get('name'))} disagree: no interval of this index"
                     " agrees with that test by construction; read the two together")
    return out, notes


@dataclass(frozen=True)
class Choice:
    """The branch the checks select and the index it reports as primary."""

    branch: str
    primary: str
    found: dict
    notes: tuple[str, ...]


def choose(result: AuditResult, policy: Policy) -> Choice:
    """Run the checks and pick the branch (the first fired check in the policy's precedence, else
    `assumptions_hold`) and its primary index, or the first companion of the same kind when the
    primary is undefined for these data. Needs the influence of the outlier check's index
    (`MEAN_INDEX`), not the fragility of any index."""
    design = POLICY_DESIGN[result.design]
    found = checks(result, policy)
    order = policy.precedence(design)
    fired = [c for c in order if found[c].fired and policy.branch(design, c) is not None]
    branch_name = fired[0] if fired else "assumptions_hold"
    branch = policy.branch(design, branch_name)
    effects = {e.name: e for e in result.effects}
    notes = []
    primary = branch.primary
    if effects[primary].estimate is None:
        fallback = next((a for a in branch.also if effects[a].estimate is not None
                         and INDICES[design][a] == INDICES[design][primary]), None)
        notes.append(f"{primary} is undefined for these data ({effects[primary].reason});"
                     + (f" {fallback} is reported as primary instead" if fallback
                        else " no index of the same kind is defined"))
        primary = fallback or primary
    return Choice(branch_name, primary, found, tuple(notes))


def decide(result: AuditResult, samples, policy: Policy, digits: int = 12,
           rng: np.random.Generator | None = None, choice: Choice | None = None) -> Decision:
    """Apply `policy` to a finished audit (see the module docstring). `choice` is `choose`'s
    result when the caller has it already (it does not depend on any fragility search)."""
    design = POLICY_DESIGN[result.design]
    choice = choose(result, policy) if choice is None else choice
    found, branch_name, primary = choice.found, choice.branch, choice.primary
    order = policy.precedence(design)
    branch = policy.branch(design, branch_name)
    effects = {e.name: e for e in result.effects}
    notes = list(choice.notes)
    also = tuple(a for a in branch.also if a != primary)
    benchmarks = policy.benchmarks()
    magnitude = {name: magnitude_label(name, effects[name].estimate, benchmarks)
                 for name in (primary, *also)}
    test_name = branch.test
    test = significance.run_test(design, test_name, samples, digits=digits, rng=rng)
    if test_name == "brunner_munzel" and test.p is None and test.details.get(
            "prob_superiority") in (0.0, 1.0):
        # complete separation: the Brunner-Munzel variance is zero; the Mann-Whitney test, which
        # compares the same ranks, is defined (its exact p is the smallest attainable)
        test_name = "mann_whitney"
        notes.append(f"the Brunner-Munzel test is undefined here ({test.reason}); the"
                     " Mann-Whitney test of the same ranks is reported instead")
        test = significance.run_test(design, test_name, samples, digits=digits, rng=rng)
    why = ("every check passed" if branch_name == "assumptions_hold"
           else f"{branch_name.replace('_', ' ')} fired: {found[branch_name].effect}")
    test_doc = plain(test)
    test_doc["why"] = why
    reasons = tuple(found[c] for c in order) + tuple(
        found[c] for c in found if c not in order)
    fragile = None
    frag_limit = policy.settings["influence"]["fragile_at_most"]
    if result.influence is not None:
        summary = next((e for e in result.influence.effects if e.effect == primary), None)
        if summary is not None:
            count = summary.fragility_null.count
            fragile = count is not None and 0 < count <= frag_limit
            reasons += (Reason("fragile", fragile, (Evidence(
                primary, "cases whose removal puts the no-effect value in the interval",
                None if count is None else float(count), "<=", float(frag_limit), fragile),),
                "the conclusion rests on a few cases" if fragile
                else "no small set of cases overturns the interval"),)
    rank_like = INDICES[design][primary] in ("ranks", "signs")
    interval, interval_notes = interval_with_test(effects[primary], design, test_name, test_doc,
                                                  policy, result.settings.level)
    return Decision(
        branch=branch_name, primary=primary, also_report=also,
        interval=interval,
        test=test_doc, reasons=reasons, magnitude=magnitude,
        descriptives="median_iqr_range" if rank_like else "mean_sd", fragile=fragile,
        notes=tuple(notes + interval_notes),
    )
