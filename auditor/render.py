"""Text forms of a finished audit: the JSON document and the terminal summary.

This is the only place numbers are rounded; JSON keeps full precision.
"""

from __future__ import annotations

import json

import numpy as np

from auditor.formatting import number as num, p_value as pval
from auditor.results import AuditResult
from auditor.rationale import coverage_text


def to_json(result: AuditResult) -> str:
    """The audit as a JSON document (full precision; nulls where a value is undefined)."""
    return json.dumps(result.to_dict(), indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def lines_list(rows, limit: int = 8) -> str:
    rows = list(rows)
    if not rows:
        return "none"
    shown = ", ".join(str(r) for r in rows[:limit])
    return shown + (f" and {len(rows) - limit} more" if len(rows) > limit else "")


_TITLES = {
    "two_independent": "Two independent groups",
    "paired": "Paired conditions (same participants)",
    "k_independent": "Independent groups",
    "k_repeated": "Repeated conditions (same participants)",
}
_PAIR_COLUMNS = {
    "k_independent": ("cliff_delta", "hedges_g"),
    "k_repeated": ("matched_rank_biserial", "d_z"),
}


def terminal_summary(result: AuditResult) -> str:
    """A compact summary for the terminal: data accounting, screening, effects, caution."""
    out: list[str] = []
    by = f" by '{result.group_column}'" if result.group_column else ""
    out.append(f"{_TITLES[result.design]}; outcome '{result.outcome}'{by}"
               + (f"; participants by '{result.subject_column}'" if result.subject_column else ""))
    labels = [g.label for g in result.groups]
    if len(labels) == 2:
        out.append(f"Direction: A = '{labels[0]}' relative to B = '{labels[1]}'")
    _accounting(result, out)
    _decision(result, out)
    _group_table(result, out)
    out.append("Screening")
    if result.design == "two_independent":
        _screen_two(result, out)
    elif result.design == "paired":
        _screen_paired(result, out)
    else:
        _screen_k(result, out)
    out.append("")
    _effect_table(result.effects, result.settings.level, out,
                  "Effect sizes, A relative to B" if len(labels) == 2 else "Omnibus effect sizes")
    if result.tests:
        out.append("Tests")
        for name, t in result.tests.items():
            if name == "sign_test":
                out.append(f"  sign test: {t['positive']} up, {t['negative']} down,"
                           f" {t['zero']} zero; exact p {pval(t['p'])}")
                continue
            df = t.get("df")
            df_text = ("" if df is None else
                       f", df {', '.join(num(v, 2) for v in df)}" if isinstance(df, list)
                       else f", df {df}")
            extra = ("" if "p_greenhouse_geisser" not in t else
                     f" (Greenhouse-Geisser p {pval(t['p_greenhouse_geisser'])})")
            out.append(f"  {name.replace('_', ' ')}: {t.get('statistic_name', 'statistic')}"
                       f" {num(t.get('statistic'))}{df_text}, p {pval(t.get('p'))}{extra}")
        out.append("")
    if result.pairwise:
        first, second = _PAIR_COLUMNS[result.design]
        out.append(f"Pairs (first relative to second; Holm-adjusted p of"
                   f" {result.pairwise[0].test.replace('_', ' ')})")
        out.append(f"  {'pair':<30} {first:>22} {'interval':<18} {second:>10} {'interval':<18}"
                   f" {'p (Holm)':>9}")
        for pc in result.pairwise:
            cells = []
            for name in (first, second):
                e = next(e for e in pc.effects if e.name == name)
                ci = f"[{num(e.ci_low)}, {num(e.ci_high)}]" if e.ci_low is not None else "n/a"
                cells.append((num(e.estimate), ci))
            out.append(f"  {pc.first + ' vs ' + pc.second:<30} {cells[0][0]:>22} {cells[0][1]:<18}"
                       f" {cells[1][0]:>10} {cells[1][1]:<18} {pval(pc.p_holm):>9}")
        out.append("")
    if result.influence is not None:
        _influence(result.influence, out)
    st = result.settings
    unit = "participants" if result.design in ("paired", "k_repeated") else "values within each group"
    out.append(f"Bootstrap: {st.bootstrap_resamples} resamples of {unit}, seed {st.seed}."
               + (f" Glass's delta uses the SD of '{st.reference}'." if st.reference else ""))
    for w in result.warnings:
        out.append(f"Note: {w}")
    out.append("")
    if result.decision is not None:
        out.append("For a reviewer")
        out.extend(_wrap(result.decision.reviewer_note))
        out.append("Methods sentence")
        out.extend(_wrap(result.decision.methods_sentence))
        out.append("")
    out.append(result.caution)
    return "\n".join(out) + "\n"


def _count(f) -> str:
    return str(f.count) if f.reached else "not reached"


def _influence(influence, out: list[str], top: int = 3) -> None:
    unit = influence.unit
    limits = {e.fragility_sign.step_limit for e in influence.effects} - {None}
    upto = f" (at most {max(limits)})" if limits else ""
    out.append(f"Single {unit}s (leave-one-out; fragility = {unit}s removed, greedily{upto}, until"
               " the sign flips / the interval holds the no-effect value)")
    width = max([17] + [len(e.effect) for e in influence.effects])
    out.append(f"  {'index':<{width}} {'jackknife SE':>12} {'most influential':>17}"
               f" {'fragility sign':>15} {'fragility interval':>19}")
    for e in influence.effects:
        out.append(f"  {e.effect:<{width}} {num(e.jackknife_se):>12}"
                   f" {('line ' + str(e.most_influential_row)) if e.most_influential_row else 'n/a':>17}"
                   f" {_count(e.fragility_sign):>15} {_count(e.fragility_null):>19}")
    names = list(influence.standardized)
    if names:
        scores = np.abs(np.vstack([influence.standardized[k] for k in names]))
        scores = np.where(np.isfinite(scores), scores, -1.0)
        best_effect = np.argmax(scores, axis=0)
        best = scores[best_effect, np.arange(scores.shape[1])]
        for i in np.argsort(-best, kind="stable")[:top]:
            if best[i] < 0:
                break
            name = names[best_effect[i]]
            value = ("" if influence.values is None
                     else f", value {num(float(influence.values[i]))}")
            out.append(f"  line {int(influence.rows[i])} ({influence.groups[i]}{value}): removing it"
                       f" moves {name} by {num(float(influence.changes[name][i]))}"
                       f" ({num(float(best[i]), 1)} jackknife SE)")
    out.append("")


def _accounting(result: AuditResult, out: list[str]) -> None:
    d = result.data
    other = sum(d.not_selected.values())
    out.append(f"Rows: {d.rows_read} read, {d.rows_used} used, {len(d.excluded)} excluded"
               + (f", {other} in other groups" if other else ""))
    for ex in d.excluded[:5]:
        out.append(f"  line {ex.row}: {ex.reason}")
    if len(d.excluded) > 5:
        out.append(f"  ... {len(d.excluded) - 5} more in the JSON 'data.excluded' list")
    for note in d.notes:
        out.append(f"  note: {note}")
    out.append("")


def _group_table(result: AuditResult, out: list[str]) -> None:
    """Descriptives as the decision asks: median, IQR and range beside a rank-based primary
    index, mean and SD beside a mean-based one (the JSON always holds both)."""
    width = max([8] + [len(g.label) for g in result.groups])
    ranks = result.decision is not None and result.decision.descriptives == "median_iqr_range"
    if ranks:
        out.append(f"{'group':<{width}} {'n':>6} {'median':>10} {'Q1':>10} {'Q3':>10}"
                   f" {'min':>10} {'max':>10}")
        for g in result.groups:
            out.append(f"{g.label:<{width}} {g.n:>6} {num(g.median):>10} {num(g.q1):>10}"
                       f" {num(g.q3):>10} {num(g.min):>10} {num(g.max):>10}")
    else:
        out.append(f"{'group':<{width}} {'n':>6} {'mean':>10} {'SD':>10}")
        for g in result.groups:
            out.append(f"{g.label:<{width}} {g.n:>6} {num(g.mean):>10} {num(g.sd):>10}")
    out.append("")


def _decision(result: AuditResult, out: list[str]) -> None:
    d, p = result.decision, result.policy
    if d is None:
        return
    out.append(f"Decision (policy '{p['name']}' {p['version']}, SHA-256 {p['sha256'][:12]}...;"
               f" branch: {d.branch.replace('_', ' ')})")
    out.extend(_wrap(d.rationale))
    for note in d.notes:
        out.extend(_wrap("Note: " + note))
    if result.coverage_check is not None:
        out.extend(_wrap(coverage_text(result.coverage_check)))
    out.append("")


def _wrap(text: str, width: int = 96, indent: str = "  ") -> list[str]:
    import textwrap

    return textwrap.wrap(text, width, initial_indent=indent, subsequent_indent=indent)


def _shape(nm) -> str:
    # Above Shapiro-Wilk's range (n > 5000) the Anderson-Darling p stands beside it, if computed.
    other = ("" if nm.shapiro_p is not None or nm.anderson_p is None
             else f" (Anderson-Darling p {pval(nm.anderson_p)})")
    return (f"  shape of {nm.label}: Shapiro-Wilk p {pval(nm.shapiro_p)}{other},"
            f" skewness {num(nm.skewness, 2)} (SE {num(nm.skewness_se, 2)}),"
            f" excess kurtosis {num(nm.excess_kurtosis, 2)} (SE {num(nm.kurtosis_se, 2)})")


def _ties_line(t) -> str:
    return (f"  ties: {num(100 * t.tie_fraction, 1)}% of values tied, {t.distinct_values} distinct"
            + ("; looks discrete" if t.looks_discrete else ""))


def _screen_two(result: AuditResult, out: list[str]) -> None:
    diag = result.diagnostics
    for nm in diag.normality[:2]:
        out.append(_shape(nm))
    sp = diag.spread
    out.append(f"  spread: SD ratio {num(sp.sd_ratio, 2)} (larger in '{sp.larger_sd_group}'"
               + (", the smaller group" if sp.smaller_group_has_larger_sd else "") + "),"
               f" Levene p {pval(sp.levene_p)}, Brown-Forsythe p {pval(sp.brown_forsythe_p)}")
    out.append(_ties_line(diag.ties))
    for o in diag.outliers:
        out.append(f"  extreme cases in '{o.label}' (lines): {lines_list(o.rows)}")
    nt = diag.normal_theory
    out.append(f"  normal model: d implies A = {num(nt.implied_prob_superiority)};"
               f" observed A = {num(nt.observed_prob_superiority)}")


def _screen_paired(result: AuditResult, out: list[str]) -> None:
    diag = result.diagnostics
    out.append(_shape(diag.differences_normality))
    t = diag.differences_ties
    out.append(f"  differences rounded to {diag.rounding_decimals} decimals;"
               f" {num(100 * diag.zero_share, 1)}% are zero; {num(100 * t.tie_fraction, 1)}% tied")
    out.append(f"  correlation of the conditions: r = {num(diag.correlation)}")
    out.append(f"  extreme differences (lines): {lines_list(diag.differences_outliers.rows)}")


def _screen_k(result: AuditResult, out: list[str]) -> None:
    diag = result.diagnostics
    for nm in diag.normality:
        out.append(_shape(nm))
    sp = diag.spread
    out.append(f"  spread: largest/smallest SD {num(sp.sd_ratio, 2)} ('{sp.largest_sd_group}' /"
               f" '{sp.smallest_sd_group}'), Levene p {pval(sp.levene_p)},"
               f" Brown-Forsythe p {pval(sp.brown_forsythe_p)}")
    out.append(_ties_line(diag.ties))
    if result.design == "k_independent":
        for o in diag.outliers:
            out.append(f"  extreme cases in '{o.label}' (lines): {lines_list(o.rows)}")
    if diag.sphericity is not None:
        sph = diag.sphericity
        out.append(f"  sphericity: Mauchly W {num(sph.get('w'))}, p {pval(sph.get('p'))},"
                   f" Greenhouse-Geisser epsilon {num(sph.get('epsilon_gg'))}")


def _effect_table(effects, level: float, out: list[str], title: str) -> None:
    out.append(f"{title} ({100 * level:g}% intervals)")
    width = max([17] + [len(e.name) for e in effects])
    out.append(f"  {'index':<{width}} {'estimate':>9}  {'interval':<22} {'method':<28}"
               f" {'bootstrap BCa':<22}")
    for e in effects:
        if e.estimate is None:
            out.append(f"  {e.name:<{width}} {'n/a':>9}  {e.reason}")
            continue
        ci = f"[{num(e.ci_low)}, {num(e.ci_high)}]" if e.ci_low is not None else "n/a"
        boot = e.interval("bca_bootstrap")
        bci = (f"[{num(boot.low)}, {num(boot.high)}]" if boot is not None
               else "withheld" if e.bootstrap_reason else "n/a")
        out.append(f"  {e.name:<{width}} {num(e.estimate):>9}  {ci:<22} {e.ci_method:<28} {bci:<22}")
    for e in effects:
        if e.estimate is not None and e.bootstrap_reason:
            out.append(f"  {e.name}: bootstrap withheld: {e.bootstrap_reason}")
    out.append("")
