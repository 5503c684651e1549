"""Text forms of a finished audit: the JSON document and the terminal summary.

This is the only place numbers are rounded; JSON keeps full precision.
"""

from __future__ import annotations

import json
import math

from auditor.results import AuditResult


def to_json(result: AuditResult) -> str:
    """The audit as a JSON document (full precision; nulls where a value is undefined)."""
    return json.dumps(result.to_dict(), indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def num(x: float | None, digits: int = 3) -> str:
    """A number for people: fixed decimals, 'n/a' when undefined."""
    if x is None or not math.isfinite(x):
        return "n/a"
    if x != 0 and abs(x) < 10 ** (-digits):
        return f"{x:.{digits - 1}e}"
    return f"{x:.{digits}f}"


def pval(p: float | None) -> str:
    if p is None:
        return "n/a"
    return "< 0.001" if p < 0.001 else f"{p:.3f}"


def lines_list(rows, limit: int = 8) -> str:
    rows = list(rows)
    if not rows:
        return "none"
    shown = ", ".join(str(r) for r in rows[:limit])
    return shown + (f" and {len(rows) - limit} more" if len(rows) > limit else "")


def terminal_summary(result: AuditResult) -> str:
    """A compact summary for the terminal: data accounting, screening, effects, caution."""
    g_a, g_b = result.groups
    d = result.data
    out: list[str] = []
    out.append(f"Two independent groups; outcome '{result.outcome}' by '{result.group_column}'")
    out.append(f"Direction: A = '{g_a.label}' relative to B = '{g_b.label}'")
    other = sum(d.not_selected.values())
    out.append(f"Rows: {d.rows_read} read, {d.rows_used} used, {len(d.excluded)} excluded"
               + (f", {other} in other groups" if other else ""))
    for ex in d.excluded[:5]:
        out.append(f"  line {ex.row}: {ex.reason}")
    if len(d.excluded) > 5:
        out.append(f"  ... {len(d.excluded) - 5} more in the JSON 'data.excluded' list")
    out.append("")
    width = max(8, len(g_a.label), len(g_b.label))
    out.append(f"{'group':<{width}} {'n':>6} {'mean':>10} {'SD':>10} {'median':>10}"
               f" {'Q1':>10} {'Q3':>10} {'min':>10} {'max':>10}")
    for g in result.groups:
        out.append(f"{g.label:<{width}} {g.n:>6} {num(g.mean):>10} {num(g.sd):>10}"
                   f" {num(g.median):>10} {num(g.q1):>10} {num(g.q3):>10} {num(g.min):>10}"
                   f" {num(g.max):>10}")
    out.append("")
    diag = result.diagnostics
    out.append("Screening")
    for nm in diag.normality[:2]:
        out.append(f"  shape of {nm.label}: Shapiro-Wilk p {pval(nm.shapiro_p)},"
                   f" skewness {num(nm.skewness, 2)} (SE {num(nm.skewness_se, 2)}),"
                   f" excess kurtosis {num(nm.excess_kurtosis, 2)} (SE {num(nm.kurtosis_se, 2)})")
    sp = diag.spread
    out.append(f"  spread: SD ratio {num(sp.sd_ratio, 2)} (larger in '{sp.larger_sd_group}'"
               + (", the smaller group" if sp.smaller_group_has_larger_sd else "") + "),"
               f" Levene p {pval(sp.levene_p)}, Brown-Forsythe p {pval(sp.brown_forsythe_p)}")
    t = diag.ties
    out.append(f"  ties: {num(100 * t.tie_fraction, 1)}% of values tied, {t.distinct_values}"
               f" distinct" + ("; looks discrete" if t.looks_discrete else ""))
    for o in diag.outliers:
        out.append(f"  extreme cases in '{o.label}' (lines): {lines_list(o.rows)}")
    nt = diag.normal_theory
    out.append(f"  normal model: d implies A = {num(nt.implied_prob_superiority)};"
               f" observed A = {num(nt.observed_prob_superiority)}")
    out.append("")
    pct = f"{100 * result.settings.level:g}%"
    out.append(f"Effect sizes, A relative to B ({pct} intervals)")
    out.append(f"  {'index':<17} {'estimate':>9}  {'interval':<22} {'method':<28} {'bootstrap BCa':<22}")
    for e in result.effects:
        if e.estimate is None:
            out.append(f"  {e.name:<17} {'n/a':>9}  {e.reason}")
            continue
        ci = f"[{num(e.ci_low)}, {num(e.ci_high)}]" if e.ci_low is not None else "n/a"
        boot = e.interval("bca_bootstrap")
        bci = f"[{num(boot.low)}, {num(boot.high)}]" if boot is not None else "n/a"
        out.append(f"  {e.name:<17} {num(e.estimate):>9}  {ci:<22} {e.ci_method:<28} {bci:<22}")
    out.append("")
    s = result.settings
    out.append(f"Bootstrap: {s.bootstrap_resamples} stratified resamples, seed {s.seed}."
               f" Glass's delta uses the SD of '{s.reference}'.")
    for w in result.warnings:
        out.append(f"Note: {w}")
    out.append("")
    out.append(result.caution)
    return "\n".join(out) + "\n"
