"""Wording: the sentences a report carries, generated from the numbers of one audit.

Nothing here computes a statistic. Every number quoted is a value of the audit's JSON (the
decision, the effects, the diagnostics, the influence), rounded to the policy's decimals by `fmt`,
so a reader can find each one in the JSON; the tests check that they match.
"""

from __future__ import annotations

from auditor.catalogue import CATALOGUE, OUTLIER_WATCH, as_design, index, labels
from auditor.formatting import fixed as fmt, percent as _percent
from auditor.policy import Policy

CAUTION = (
    "This audit supports, and does not replace, a pre-registered analysis plan and qualified"
    " statistical advice. Magnitude labels are conventions; weigh them against the effects"
    " reported in your own field's literature."
)

NAMES = labels()  # index -> how the texts name it (catalogue.py)

INTERVAL_WORDS = {
    "noncentral_t": "noncentral-t", "welch_t": "Welch t", "t": "t", "brunner_munzel":
    "Brunner-Munzel", "distribution_free": "distribution-free", "bca_bootstrap": "BCa bootstrap",
    "wilson": "Wilson", "student_t": "Student t", "paired_t": "paired t",
    "noncentral_t_welch": "noncentral-t (Welch df)", "noncentral_t_scaled": "scaled noncentral-t",
    "brunner_munzel_via_A": "Brunner-Munzel (via A)",
    "proportional_odds_score": "proportional-odds score",
    "proportional_odds_score_via_A": "proportional-odds score (via A)",
    "signed_rank_score": "signed-rank score",
    "signed_rank_score_via_rank_biserial": "signed-rank score (via the rank-biserial r)",
    "sign_test_score": "sign-test score", "noncentral_f": "noncentral-F",
    "noncentral_chi2": "noncentral chi-square", "bonett_normal": "Bonett",
    "normal_approximation": "normal-approximation",
}

CHECK_WORDS = {
    "small_sample": "a small sample", "heavy_ties": "heavy ties", "outliers": "an influential"
    " extreme case", "non_normal": "non-normality", "unequal_spread": "unequal spread",
    "many_zeros": "many zero differences", "assumptions_hold": "no failed check",
}


def meaning(name: str, value: float | None, labels: tuple[str, ...], outcome: str,
            decimals: int, design: str | None = None) -> str:
    """What the index's value says, in plain words: its reading in the catalogue (of `design`;
    without one, of the first design that has the index)."""
    if value is None:
        return "it is undefined for these data"
    a, b = (labels + ("the second", ""))[:2]
    record = (index(design, name) if design is not None
              else next((i for i in CATALOGUE if i.name == name), None))
    if record is None:
        return f"its value is {fmt(value, decimals)}"
    return record.reading.format(a=a, b=b, v=fmt(value, decimals), outcome=outcome,
                                 pct=_percent(value, decimals))


def _interval_text(interval: dict, decimals: int) -> str:
    level = interval.get("level")
    method = INTERVAL_WORDS.get(interval.get("method"), str(interval.get("method")))
    if interval.get("low") is None:
        return "no interval"
    lvl = f"{level * 100:g}%" if level else ""
    return (f"{lvl} {method} interval {fmt(interval['low'], decimals)} to"
            f" {fmt(interval['high'], decimals)}")


def _evidence_text(reason, decimals: int, most: int | None = None) -> str:
    """The evidence that met its limit, as 'subject: statistic value (limit ...)'; p-values as
    p-values. `most` keeps the first few items."""
    parts = []
    for e in reason.evidence:
        if not e.met or e.value is None:
            continue
        is_p = e.statistic.endswith(" p") or e.statistic.startswith("p ")
        value = _p(e.value) if is_p else fmt(e.value, decimals)
        limit = ("" if e.limit is None else
                 f" (limit {e.comparison} {fmt(e.limit, 3) if is_p else fmt(e.limit, decimals)})")
        parts.append(f"{e.subject}: {e.statistic} {value}{limit}")
    if most is not None and len(parts) > most:
        parts = parts[:most] + [f"{len(parts) - most} more in the rule trace"]
    return "; ".join(parts)


def _p(p: float) -> str:
    return "< 0.001" if p < 0.001 else fmt(p, 3)


def _series(names: list[str]) -> str:
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]


def _test_text(test: dict, decimals: int) -> str:
    if test.get("p") is None:
        return f"{test['label']}: not computable ({test.get('reason') or 'undefined'})"
    df = test.get("df")
    if df is None:
        df_text = ""
    else:
        df_text = "(" + ", ".join(_df(x, decimals) for x in (df if isinstance(df, (list, tuple))
                                                          else [df])) + ")"
    p = test["p"]
    p_text = "p < 0.001" if p < 0.001 else f"p = {fmt(p, 3)}"
    return (f"{test['label']}: {test['statistic_name']}{df_text} ="
            f" {fmt(test['statistic'], decimals)}, {p_text}")


def _df(value: float, decimals: int) -> str:
    """Degrees of freedom: whole numbers as such, others with the report's decimals."""
    return str(int(value)) if float(value).is_integer() else fmt(value, decimals)


def rationale(result, decision, policy: Policy) -> str:
    """Why this index, what the screening showed, the estimate, its interval and its meaning."""
    dec = policy.settings["report"]["decimals"]
    labels = tuple(g.label for g in result.groups)
    primary = result.effect(decision.primary)
    fired = [r for r in decision.reasons if r.fired and r.rule != "fragile"]
    if decision.branch == "assumptions_hold":
        why = ("Every screening check passed, so the policy's index for well-behaved data is"
               f" reported: {NAMES[decision.primary]}.")
    else:
        lead = next(r for r in fired if r.rule == decision.branch)
        why = (f"The screening found {CHECK_WORDS[decision.branch]}"
               f" ({_evidence_text(lead, dec, most=2)}), so the policy reports"
               f" {NAMES[decision.primary]}.")
        others = [r for r in fired if r.rule != decision.branch]
        if others:
            why += " Also flagged: " + "; ".join(
                f"{CHECK_WORDS.get(r.rule, r.rule)} ({_evidence_text(r, dec, most=2)})"
                for r in others) + "."
    label = decision.magnitude.get(decision.primary)
    size = f", conventionally {label}" if label else ""
    estimate = (f"{NAMES[decision.primary][0].upper()}{NAMES[decision.primary][1:]} ="
                f" {fmt(primary.estimate, dec)}"
                f" ({_interval_text(decision.interval, dec)}{size}): "
                f"{meaning(decision.primary, primary.estimate, labels, result.outcome, dec, result.design)}.")
    test = f"Test: {_test_text(decision.test, dec)}."
    size = size_text(result, decision.primary, dec)
    return " ".join([why, estimate, test] + ([size] if size else []))


def _p_text(p: float | None, decimals: int) -> str:
    if p is None:
        return "n/a"
    return "< 0.001" if p < 0.001 else f"= {p:.{max(decimals + 1, 3)}f}"


def size_text(result, name: str, decimals: int = 2) -> str:
    """The question of size for index `name` in one sentence (margins.py), or ''."""
    record = (getattr(result, "equivalence", None) or {}).get(name)
    if not record:
        return ""
    m = fmt(record["margin"], decimals)
    why = f"; {record['justification']}" if record.get("justification") else ""
    head = (f"Smallest effect of interest for {NAMES[name]}: {m} ({record['margin_from']}"
            f"{why})")
    if record.get("reason") or record.get("verdict") is None:
        return f"{head}: no verdict ({record.get('reason', 'the tests are undefined here')})."
    level = f"{record['interval_level'] * 100:g}%"
    tests = ("two one-sided tests" if record.get("p_lower") is not None
             else "one-sided test below the margin")  # an omnibus index: 0 is its floor
    return (f"{head}: {record['verdict_text']} ({tests} p"
            f" {_p_text(record['p_tost'], decimals)}, test of no effect p"
            f" {_p_text(record['p_difference'], decimals)}; {level} interval"
            f" {fmt(record['interval_low'], decimals)} to {fmt(record['interval_high'], decimals)}"
            f" against the bounds {fmt(record['margin_low'], decimals)} and"
            f" {fmt(record['margin_high'], decimals)}).")


def reviewer_note(result, decision, policy: Policy) -> str:
    """The answer to 'why not Cohen's d?' (or 'why not a rank-based index?'), with evidence."""
    dec = policy.settings["report"]["decimals"]
    rank_like = decision.descriptives == "median_iqr_range"
    parts = []
    fired = [r for r in decision.reasons if r.fired and r.rule != "fragile"]
    if rank_like:
        parts.append("Why not a mean-based index such as Cohen's d? "
                     + ("; ".join(f"{CHECK_WORDS.get(r.rule, r.rule)}: {_evidence_text(r, dec)}"
                                  for r in fired) or "the policy prefers ranks here") + ".")
    else:
        passed = [r for r in decision.reasons if not r.fired and r.rule not in ("fragile",)]
        parts.append("Why not a rank-based index? " + (
            "The screening found no reason to leave the mean-based index: "
            + "; ".join(f"{r.rule.replace('_', ' ')} not flagged" for r in passed)
            if decision.branch == "assumptions_hold"
            else f"the policy keeps a mean-based index under {CHECK_WORDS[decision.branch]}") + ".")
    check = getattr(result.diagnostics, "normal_theory", None)
    if check is not None and check.implied_prob_superiority is not None \
            and check.observed_prob_superiority is not None:
        parts.append(
            f"Normal-theory check: d = {fmt(check.cohen_d, dec)} implies A ="
            f" {fmt(check.implied_prob_superiority, dec)} under normality with equal variances;"
            f" the observed A is {fmt(check.observed_prob_superiority, dec)} (gap"
            f" {fmt(check.gap, dec)}).")
    if result.influence is not None:
        frag = {e.effect: e for e in result.influence.effects}
        for name in dict.fromkeys((decision.primary, _mean_index(result))):
            if name in frag and frag[name].fragility_null is not None:
                f = frag[name].fragility_null
                if f.count == 0:
                    text = "its interval already holds the no-effect value"
                elif f.count is None:
                    text = (f"no set of up to {f.step_limit} removed cases (greedy) brings the"
                            " no-effect value into its interval")
                else:
                    lines = ", ".join(str(r) for r in f.rows)
                    text = (f"removing {f.count} case(s) (lines {lines}) brings the no-effect"
                            " value into its interval")
                parts.append(f"Fragility of {NAMES[name]}: {text}.")
    parts += _interval_remarks(result, decision, dec)
    size = size_text(result, decision.primary, dec)
    if size:
        parts.append("Is the effect large enough to matter? " + size)
    return " ".join(parts)


def coverage_text(check, decimals: int = 2) -> str:
    """The coverage check in one sentence (what the reports print), or '' without one."""
    if check is None:
        return ""
    method = INTERVAL_WORDS.get(check.method, check.method)
    name = NAMES.get(check.index, check.index)
    if check.reason:
        return f"Coverage check of the {method} interval of {name}: not run ({check.reason})."
    return (f"Coverage check: in {check.usable} data sets simulated from populations shaped like"
            f" these groups (smoothed bootstrap, sizes as observed; true value"
            f" {fmt(check.truth, decimals + 1)}), the {method} interval of {name} covered the"
            f" true value in {_percent(check.coverage, decimals)} (Monte-Carlo SE"
            f" {_percent(check.mc_se, decimals)}) against the nominal"
            f" {_percent(check.level, decimals)}: coverage {check.verdict}.")


def _interval_remarks(result, decision, dec: int) -> list[str]:
    """What the reviewer should know about the quoted interval: a bootstrap withheld at a bound,
    an interval chosen to agree with the test, a disagreement, a coverage shortfall."""
    out = []
    primary = result.effect(decision.primary)
    if primary.bootstrap_reason:
        out.append(f"No bootstrap interval for {NAMES[decision.primary]}:"
                   f" {primary.bootstrap_reason}.")
    iv = decision.interval
    instead = iv.get("instead_of")
    if iv.get("matched_to_test") and instead:
        word = INTERVAL_WORDS.get(instead.get("method"), str(instead.get("method")))
        verdict = {False: "would have contradicted the test",
                   True: "would have agreed with the test too",
                   None: "could not be compared with the test"}[instead.get("agrees_with_test")]
        out.append(f"The interval quoted agrees with the {decision.test['label']} by"
                   f" construction; the index's {word} interval"
                   f" ({_interval_text(instead, dec)}) {verdict}.")
    if iv.get("agrees_with_test") is False:
        out.append(f"The quoted interval and the {decision.test['label']} disagree about the"
                   " no-effect value; no interval of this index agrees with that test by"
                   " construction.")
    out += _cluster_remarks(result, decision, dec)
    check = getattr(result, "coverage_check", None)
    if check is not None and check.verdict and check.verdict.startswith("falls short"):
        out.append(coverage_text(check, dec) + " Read the interval as narrower than its"
                   " nominal level claims.")
    return out


def _cluster_remarks(result, decision, dec: int) -> list[str]:
    """With a named cluster column: the clustering, and the primary index's cluster-bootstrap
    interval beside the quoted one (and whether the two agree about the no-effect value)."""
    block = getattr(result, "clusters", None)
    if block is None:
        return []
    icc = "undefined" if block.icc.icc is None else fmt(block.icc.icc, dec)
    effect = "undefined" if block.design_effect is None else fmt(block.design_effect, dec)
    text = (f"The cases are clustered in '{block.column}' (intraclass correlation {icc}, design"
            f" effect of the difference {effect}), and the quoted interval and the test assume"
            " independent cases.")
    found = block.interval(decision.primary)
    primary = result.effect(decision.primary)
    if found is None or found.interval is None:
        reason = "the index is not resampled by cluster" if found is None else found.reason
        return [text + f" No cluster-bootstrap interval of {NAMES[decision.primary]}: {reason}."]
    iv = found.interval
    holds = iv.low <= primary.null_value <= iv.high
    quoted = decision.interval
    quoted_holds = (None if quoted.get("low") is None or quoted.get("high") is None
                    else quoted["low"] <= primary.null_value <= quoted["high"])
    verdict = ("; unlike the quoted one, it holds the no-effect value" if holds and quoted_holds
               is False else "; unlike the quoted one, it excludes the no-effect value"
               if not holds and quoted_holds else "")
    return [text + f" Resampling whole clusters within each group, {NAMES[decision.primary]} has"
            f" the {iv.level * 100:g}% interval [{fmt(iv.low, dec)}, {fmt(iv.high, dec)}]"
            + verdict + "; quote it, or an analysis that models the clusters."]


def _mean_index(result) -> str:
    return OUTLIER_WATCH[as_design(result.design)]


def methods_sentence(result, decision, policy: Policy) -> str:
    """One sentence for a manuscript's methods section."""
    also = _series([NAMES[a] for a in decision.also_report]) if decision.also_report else ""
    iv = decision.interval
    method = INTERVAL_WORDS.get(iv.get("method"), str(iv.get("method")))
    level = f"{iv['level'] * 100:g}%" if iv.get("level") else ""
    s = result.settings
    return (f"Effect sizes were screened and chosen with auditor {result.tool_version} under the"
            f" policy '{policy.name}' (version {policy.version}, SHA-256"
            f" {policy.sha256[:16]}): the primary index was {NAMES[decision.primary]}"
            + (f" with its {level} {method} interval" if iv.get("method") not in (None, "none")
               else " (no interval could be computed on these data)")
            + (" (which agrees with the test by construction)" if iv.get("matched_to_test")
               else "")
            + (f", reported beside {also}" if also else "")
            + f"; the test was the {decision.test['label']}"
            + _size_clause(result, decision.primary)
            + f"; bootstrap intervals used"
            f" {s.bootstrap_resamples} stratified resamples (BCa) with seed {s.seed}"
            + _cluster_clause(result) + ".")


def _cluster_clause(result) -> str:
    block = getattr(result, "clusters", None)
    if block is None:
        return ""
    return (f", and cluster-bootstrap intervals as many resamples of whole clusters of"
            f" '{block.column}' within each group (BCa, acceleration from leaving out one cluster"
            " at a time)")


def _size_clause(result, name: str) -> str:
    record = (getattr(result, "equivalence", None) or {}).get(name)
    if not record or record.get("verdict") is None:
        return ""
    why = f" ({record['justification']})" if record.get("justification") else ""
    tests = ("two one-sided tests" if record.get("p_lower") is not None
             else "a one-sided test below the margin")
    return (f"; equivalence and minimal-effect questions were asked at a smallest effect of"
            f" interest of {record['margin']:g}{why} by {tests} at alpha ="
            f" {record['alpha']:g}")
