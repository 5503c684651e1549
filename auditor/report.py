"""Reports a person reads: one self-contained HTML file and a Markdown file, with figures.

`write_report(result, folder)` writes, inside `folder` and nowhere else:
    report.html   one file: inline CSS, figures embedded as PNG data, no network request of any
                  kind, laid out to print on A4;
    report.md     the same content, figures as files beside it;
    audit.json    the full JSON document;
    figures/NAME.png and figures/NAME.svg.
Sections follow the order a reader needs: the decision and its rationale, the descriptives the
decision asks for, the diagnostics with plain verdicts, every effect size, single-case influence,
the note for a reviewer, the methods sentence, the caution, and where every row of the file went.
Every piece of user text (file, column and group names, labels) is escaped for HTML, and for
Markdown its markup characters are neutralised.
"""

from __future__ import annotations

import base64
import dataclasses
import html
import re
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from auditor import __version__
from auditor.errors import AuditError
from auditor.formatting import count_or as _count_or, number as _n, p_value as _p
from auditor.magnitude import magnitude_label
from auditor.rationale import INTERVAL_WORDS, NAMES, coverage_text

SECTIONS = (
    ("decision", "Decision"),
    ("descriptives", "Descriptives"),
    ("diagnostics", "Diagnostics"),
    ("effects", "Effect sizes"),
    ("influence", "Single cases"),
    ("reviewer-note", "For a reviewer"),
    ("methods", "Methods sentence"),
    ("caution", "Caution"),
    ("data-accounting", "Data accounting"),
)

_DESIGN_WORDS = {
    "two_independent": "two independent groups",
    "paired": "two conditions on the same participants",
    "k_independent": "independent groups",
    "k_repeated": "repeated conditions on the same participants",
}

_RULE_WORDS = {
    "small_sample": "Sample size", "heavy_ties": "Ties and scale", "outliers": "Extreme cases",
    "non_normal": "Shape (normality)", "unequal_spread": "Spread", "many_zeros": "Zero differences",
    "fragile": "Fragility of the primary index",
}

_CSS = """
@page { size: A4; margin: 16mm 14mm; }
body { font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; color: #1b1b1b;
       max-width: 182mm; margin: 0 auto; padding: 8px; line-height: 1.45; font-size: 10.5pt; }
h1 { font-size: 17pt; margin: 0 0 4px; }
h2 { font-size: 13pt; border-bottom: 2px solid #3a6e8f; padding-bottom: 2px; margin-top: 22px; }
p.meta { color: #4a4a4a; margin: 2px 0; font-size: 9.5pt; }
table { border-collapse: collapse; width: 100%; margin: 8px 0; font-size: 9.5pt; }
th, td { border-bottom: 1px solid #c9c9c9; padding: 3px 6px; text-align: left;
         vertical-align: top; }
th { background: #eef3f6; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tr.primary td { font-weight: bold; }
.fired { color: #8a3b00; font-weight: bold; }
.passed { color: #255e2e; }
.lead { font-size: 11pt; background: #f4f8fa; border-left: 4px solid #3a6e8f;
        padding: 8px 10px; }
figure { margin: 12px 0; page-break-inside: avoid; break-inside: avoid; }
figure img { max-width: 100%; height: auto; border: 1px solid #e2e2e2; }
figcaption { font-size: 9pt; color: #4a4a4a; }
section { page-break-inside: auto; }
.caution { border: 1px solid #b58900; background: #fdf6e3; padding: 8px 10px; }
code { font-size: 9pt; }
@media print { h2 { break-after: avoid; } a { color: inherit; text-decoration: none; } }
"""


@dataclass(frozen=True)
class ReportFiles:
    folder: Path
    html: Path
    markdown: Path
    json: Path
    figures: tuple[Path, ...]


def _e(text) -> str:
    """Escape user text for HTML (quotes included)."""
    return html.escape(str(text), quote=True)


_MD_SPECIAL = re.compile(r"([\\`*_\[\]|~])")


def _m(text) -> str:
    """Neutralise user text for Markdown: HTML entities for <, > and &, backslashes before
    markup characters, and no line breaks (a label must not end a table row)."""
    text = html.escape(str(text), quote=False).replace("\n", " ").replace("\r", " ")
    return _MD_SPECIAL.sub(r"\\\1", text)


# ------------------------------------------------------------------ content, shared by both forms


def _title(result) -> str:
    return f"Audit of '{result.outcome}'"


def _header_lines(result) -> list[str]:
    labels = [g.label for g in result.groups]
    by = f" by '{result.group_column}'" if result.group_column else ""
    lines = [f"Design: {_DESIGN_WORDS[result.design]}{by}; "
             + (f"direction: '{labels[0]}' relative to '{labels[1]}'" if len(labels) == 2
                else "groups: " + ", ".join(f"'{x}'" for x in labels)) + "."]
    if result.policy:
        p = result.policy
        lines.append(f"Policy '{p['name']}' version {p['version']} (SHA-256 {p['sha256'][:16]}),"
                     f" from {p['source']}; auditor {result.tool_version};"
                     f" data file {result.data.source}.")
    return lines


def _descriptive_rows(result):
    ranks = result.decision is not None and result.decision.descriptives == "median_iqr_range"
    if ranks:
        head = ["group", "n", "median", "Q1", "Q3", "min", "max"]
        rows = [[g.label, str(g.n), _n(g.median), _n(g.q1), _n(g.q3), _n(g.min), _n(g.max)]
                for g in result.groups]
        note = ("Medians, quartiles and ranges, because the primary index compares ranks; means"
                " and SDs are in audit.json.")
    else:
        head = ["group", "n", "mean", "SD"]
        rows = [[g.label, str(g.n), _n(g.mean), _n(g.sd)] for g in result.groups]
        note = ("Means and SDs, because the primary index compares means; medians, quartiles and"
                " ranges are in audit.json.")
    return head, rows, note


def _verdicts(result):
    """(title, verdict text, fired) per check of the decision's rule trace."""
    out = []
    if result.decision is None:
        return out
    for reason in result.decision.reasons:
        parts = []
        for ev in reason.evidence:
            value = _p(ev.value) if ev.statistic.endswith(" p") else _count_or(ev.value)
            limit = "" if ev.limit is None else f" (limit {ev.comparison} {_count_or(ev.limit)})"
            mark = " [met]" if ev.met else ""
            parts.append(f"{ev.subject}: {ev.statistic} {value}{limit}{mark}")
        out.append((_RULE_WORDS.get(reason.rule, reason.rule), reason.effect, reason.fired,
                    parts))
    return out


def _effect_rows(result, benchmarks=None):
    primary = result.decision.primary if result.decision else None
    head = ["index", "estimate", "interval", "method", "bootstrap BCa", "label", "assumes"]
    rows = []
    for e in result.effects:
        if e.estimate is None:
            rows.append(([NAMES.get(e.name, e.name), "undefined", "", "", "", "",
                          e.reason or ""], e.name == primary))
            continue
        boot = e.interval("bca_bootstrap")
        label = (result.decision.magnitude.get(e.name) if result.decision
                 and e.name in result.decision.magnitude else magnitude_label(e.name, e.estimate))
        rows.append(([NAMES.get(e.name, e.name), _n(e.estimate),
                      f"[{_n(e.ci_low)}, {_n(e.ci_high)}]" if e.ci_low is not None else "n/a",
                      INTERVAL_WORDS.get(e.ci_method, e.ci_method.replace("_", " ")),
                      f"[{_n(boot.low)}, {_n(boot.high)}]" if boot and boot.low is not None
                      else ("withheld" if e.bootstrap_reason else "n/a"), label or "",
                      e.assumes], e.name == primary))
    return head, rows


def _conversion_lines(result) -> list[str]:
    """Under the effects table (two groups): each conversion between scales whose gap to the
    directly estimated index passes its limit, with the assumption that would make it exact."""
    conv = getattr(result, "conversions", None)
    if conv is None:
        return []
    out = []
    for link in conv.links:
        if link.flagged:
            out.append(f"Converting {NAMES.get(link.source, link.source)} to"
                       f" {NAMES.get(link.target, link.target)} ({link.formula}) would mislead"
                       f" here: {_n(link.value)} against {_n(link.direct)} estimated directly"
                       f" (gap {_n(link.gap)}); it is exact only for {link.exact_if}.")
    return out


def _cluster_lines(result) -> list[str]:
    """Under the effects table, when a cluster column was named: the clustering (clusters,
    intraclass correlation, design effect, effective sizes), then each index's cluster-bootstrap
    interval beside the quoted one, then the block's notes."""
    block = getattr(result, "clusters", None)
    if block is None:
        return []
    icc = block.icc
    counts = "; ".join(
        f"{g.label} {g.clusters} clusters of {g.mean_size:.3g} cases on average (design effect"
        f" {_n(g.design_effect)}, effective size {_n(g.effective_n, 1)})" for g in block.groups)
    lines = [f"Cases are clustered in {block.column}: {counts}. Intraclass correlation"
             f" {_n(icc.icc) if icc.icc is not None else 'undefined (' + str(icc.reason) + ')'},"
             f" design effect of the difference {_n(block.design_effect)}. The intervals above"
             " assume independent cases; the cluster-bootstrap intervals below resample whole"
             " clusters within each group."]
    for e in result.effects:
        found = block.interval(e.name)
        if found is None or e.estimate is None:
            continue
        name = NAMES.get(e.name, e.name)
        iv = found.interval
        quoted = (f"[{_n(e.ci_low)}, {_n(e.ci_high)}]" if e.ci_low is not None else "none")
        lines.append(f"{name}: cluster bootstrap [{_n(iv.low)}, {_n(iv.high)}] against {quoted}"
                     " quoted." if iv is not None else
                     f"{name}: no cluster-bootstrap interval, {found.reason}.")
    return lines + [f"{n[0].upper()}{n[1:]}." for n in block.notes]


def _interval_lines(result) -> list[str]:
    """Under the effects table: each withheld bootstrap with its reason, and each interval
    computed beside an index's own (test-matched or boundary-valid ones)."""
    lines = []
    for e in result.effects:
        if e.estimate is None:
            continue
        name = NAMES.get(e.name, e.name)
        if e.bootstrap_reason:
            lines.append(f"{name}: no bootstrap interval, {e.bootstrap_reason}.")
        for iv in e.intervals:
            if iv.method in (e.ci_method, "bca_bootstrap") or iv.low is None:
                continue
            word = INTERVAL_WORDS.get(iv.method, iv.method.replace("_", " "))
            lines.append(f"{name}: {word} interval [{_n(iv.low)}, {_n(iv.high)}]"
                         + (f" ({iv.note})" if iv.note else "") + ".")
    return lines


def _influence_rows(result):
    infl = result.influence
    head = ["index", "jackknife SE", "most influential line", "sign flips", "interval flips",
            "fragility: sign", "fragility: interval"]
    rows = []
    if infl is None:
        return head, rows

    def frag(f):
        if f.count is None:
            return f"not within {f.step_limit}" if f.step_limit else "not reached"
        lines = ", ".join(str(r) for r in f.rows[:6]) + (" ..." if len(f.rows) > 6 else "")
        return f"{f.count}" + (f" (lines {lines})" if f.rows else "")

    for e in infl.effects:
        rows.append([NAMES.get(e.effect, e.effect), _n(e.jackknife_se),
                     str(e.most_influential_row) if e.most_influential_row else "n/a",
                     str(len(e.sign_flips)), str(len(e.interval_flips)),
                     frag(e.fragility_sign), frag(e.fragility_null)])
    return head, rows


def _accounting_lines(result):
    d = result.data
    lines = [f"{d.rows_read} rows read from {d.source}, {d.rows_used} used,"
             f" {len(d.excluded)} excluded" + (
                 "; not selected: " + ", ".join(f"{k}: {v}" for k, v in d.not_selected.items())
                 if d.not_selected else "") + "."]
    lines += [f"Note: {n}" for n in d.notes]
    exclusions = [f"line {x.row}: {x.reason}" for x in d.excluded]
    return lines, exclusions


# ------------------------------------------------------------------ HTML


def _table(head, rows, primary_flags=None) -> str:
    out = ["<table><thead><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr></thead><tbody>"]
    for i, row in enumerate(rows):
        cls = ' class="primary"' if primary_flags and primary_flags[i] else ""
        cells = []
        for j, cell in enumerate(row):
            numeric = j > 0 and _looks_numeric(str(cell))
            cells.append(f'<td class="num">{_e(cell)}</td>' if numeric else f"<td>{_e(cell)}</td>")
        out.append(f"<tr{cls}>" + "".join(cells) + "</tr>")
    out.append("</tbody></table>")
    return "\n".join(out)


def _looks_numeric(cell: str) -> bool:
    """A number, an interval '[a, b]' or 'n/a' (right-aligned in tables)."""
    if cell == "n/a" or (cell.startswith("[") and cell.endswith("]")):
        return True
    try:
        float(cell)
    except ValueError:
        return False
    return True


def _figure_html(fig) -> str:
    data = base64.b64encode(fig.png).decode("ascii")
    return (f'<figure class="figure" id="figure-{_e(fig.name)}">'
            f'<img src="data:image/png;base64,{data}" alt="{_e(fig.alt)}">'
            f"<figcaption>{_e(fig.title)}. {_e(fig.alt)}</figcaption></figure>")


_FIGURE_HOME = {"distributions": "descriptives", "qq": "diagnostics", "ecdf": "diagnostics",
                "intervals": "effects", "influence": "influence"}


def render_html(result, figures=()) -> str:
    """The whole report as one HTML document (see the module docstring)."""
    by_section: dict[str, list[str]] = {key: [] for key, _ in SECTIONS}
    for fig in figures:
        by_section[_FIGURE_HOME.get(fig.name, "effects")].append(_figure_html(fig))
    body = [f"<h1>{_e(_title(result))}</h1>"]
    body += [f'<p class="meta">{_e(line)}</p>' for line in _header_lines(result)]
    dec = result.decision
    for key, title in SECTIONS:
        body.append(f'<section id="{key}"><h2>{_e(title)}</h2>')
        if key == "decision":
            if dec is None:
                body.append("<p>No policy decision was made.</p>")
            else:
                body.append(f'<p class="lead">{_e(dec.rationale)}</p>')
                body += [f"<p>Note: {_e(n)}</p>" for n in dec.notes]
                if result.coverage_check is not None:
                    body.append(f'<p class="coverage">{_e(coverage_text(result.coverage_check))}'
                                "</p>")
                also = ", ".join(NAMES.get(a, a) for a in dec.also_report) or "none"
                body.append(f"<p>Reported beside it: {_e(also)}. Branch of the policy:"
                            f" {_e(dec.branch.replace('_', ' '))}.</p>")
        elif key == "descriptives":
            head, rows, note = _descriptive_rows(result)
            body.append(_table(head, rows))
            body.append(f"<p>{_e(note)}</p>")
        elif key == "diagnostics":
            verdicts = _verdicts(result)
            body.append("<table><thead><tr><th>check</th><th>verdict</th><th>evidence</th>"
                        "</tr></thead><tbody>")
            for name, verdict, fired, parts in verdicts:
                cls = "fired" if fired else "passed"
                body.append(f'<tr><td>{_e(name)}</td><td class="{cls}">'
                            f"{'flagged' if fired else 'passed'}: {_e(verdict)}</td>"
                            f"<td>{'<br>'.join(_e(p) for p in parts)}</td></tr>")
            body.append("</tbody></table>")
        elif key == "effects":
            head, rows = _effect_rows(result)
            body.append(_table(head, [r for r, _ in rows], [p for _, p in rows]))
            level = result.settings.level
            body.append(f"<p>{_e(f'{level * 100:g}% intervals; the primary index is in bold;')}"
                        f" {_e('labels are conventional benchmarks (see the policy).')}</p>")
            lines = _interval_lines(result) + _conversion_lines(result) + _cluster_lines(result)
            if lines:
                body.append('<ul class="intervals">'
                            + "".join(f"<li>{_e(x)}</li>" for x in lines) + "</ul>")
        elif key == "influence":
            head, rows = _influence_rows(result)
            if rows:
                body.append(_table(head, rows))
                unit = result.influence.unit
                body.append(f"<p>{_e(f'Each {unit} left out in turn; fragility counts the {unit}s removed greedily until the sign flips or the interval reaches the no-effect value.')}</p>")
            else:
                body.append("<p>Influence was not computed.</p>")
        elif key == "reviewer-note":
            body.append(f"<p>{_e(dec.reviewer_note if dec else '')}</p>")
        elif key == "methods":
            body.append(f"<p>{_e(dec.methods_sentence if dec else '')}</p>")
        elif key == "caution":
            body.append(f'<p class="caution">{_e(result.caution)}</p>')
        elif key == "data-accounting":
            lines, exclusions = _accounting_lines(result)
            body += [f"<p>{_e(line)}</p>" for line in lines]
            if exclusions:
                body.append("<ul>" + "".join(f"<li>{_e(x)}</li>" for x in exclusions) + "</ul>")
            for w in result.warnings:
                body.append(f"<p>Note: {_e(w)}</p>")
        body += by_section[key]
        body.append("</section>")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f'<meta name="generator" content="auditor {_e(__version__)}">'
            '<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>{_e(_title(result))}</title><style>{_CSS}</style></head>\n<body>\n"
            + "\n".join(body) + "\n</body></html>\n")


def summary_html(result) -> str:
    """A short HTML fragment (decision and effect table) for notebooks."""
    dec = result.decision
    head, rows = _effect_rows(result)
    parts = [f"<h3>{_e(_title(result))}</h3>"]
    parts += [f"<p>{_e(line)}</p>" for line in _header_lines(result)]
    if dec is not None:
        parts.append(f"<p><b>{_e(dec.rationale)}</b></p>")
    parts.append(_table(head, [r for r, _ in rows], [p for _, p in rows]))
    parts.append(f"<p><i>{_e(result.caution)}</i></p>")
    return "\n".join(parts)


# ------------------------------------------------------------------ Markdown


def _md_table(head, rows, primary_flags=None) -> list[str]:
    out = ["| " + " | ".join(_m(h) for h in head) + " |",
           "|" + "|".join(" --- " for _ in head) + "|"]
    for i, row in enumerate(rows):
        cells = [str(c) if j and _looks_numeric(str(c)) else _m(c) for j, c in enumerate(row)]
        if primary_flags and primary_flags[i]:
            cells[0] = f"**{cells[0]}**"
        out.append("| " + " | ".join(cells) + " |")
    return out


def render_markdown(result, figures=(), figure_folder: str = "figures") -> str:
    """The report as Markdown; figures are referenced as files in `figure_folder`."""
    by_section: dict[str, list[str]] = {key: [] for key, _ in SECTIONS}
    for fig in figures:
        by_section[_FIGURE_HOME.get(fig.name, "effects")].append(
            f"![{_m(fig.alt)}]({figure_folder}/{fig.name}.png)\n\n*{_m(fig.title)}*")
    dec = result.decision
    out = [f"# {_m(_title(result))}", ""]
    out += [_m(line) + "  " for line in _header_lines(result)] + [""]
    for key, title in SECTIONS:
        out += [f"## {title}", ""]
        if key == "decision" and dec is not None:
            out += [_m(dec.rationale), ""]
            out += [f"Note: {_m(n)}" for n in dec.notes]
            if result.coverage_check is not None:
                out += ["", _m(coverage_text(result.coverage_check))]
            also = ", ".join(NAMES.get(a, a) for a in dec.also_report) or "none"
            out += [f"Reported beside it: {_m(also)}. Branch of the policy:"
                    f" {_m(dec.branch.replace('_', ' '))}.", ""]
        elif key == "descriptives":
            head, rows, note = _descriptive_rows(result)
            out += _md_table(head, rows) + ["", _m(note), ""]
        elif key == "diagnostics":
            for name, verdict, fired, parts in _verdicts(result):
                state = "**flagged**" if fired else "passed"
                out.append(f"- {_m(name)}: {state}: {_m(verdict)}. " + _m("; ".join(parts)))
            out.append("")
        elif key == "effects":
            head, rows = _effect_rows(result)
            out += _md_table(head, [r for r, _ in rows], [p for _, p in rows]) + [""]
            lines = _interval_lines(result) + _conversion_lines(result) + _cluster_lines(result)
            out += [f"- {_m(x)}" for x in lines] + ([""] if lines else [])
        elif key == "influence":
            head, rows = _influence_rows(result)
            out += (_md_table(head, rows) if rows else ["Influence was not computed."]) + [""]
        elif key == "reviewer-note":
            out += [_m(dec.reviewer_note if dec else ""), ""]
        elif key == "methods":
            out += [_m(dec.methods_sentence if dec else ""), ""]
        elif key == "caution":
            out += [f"> {_m(result.caution)}", ""]
        elif key == "data-accounting":
            lines, exclusions = _accounting_lines(result)
            out += [_m(line) for line in lines] + [""]
            out += [f"- {_m(x)}" for x in exclusions]
            out += [f"Note: {_m(w)}  " for w in result.warnings] + [""]
        for block in by_section[key]:
            out += [block, ""]
    return "\n".join(out).rstrip() + "\n"


# ------------------------------------------------------------------ files


def folder_name(outcome: str) -> str:
    """A folder name made from an outcome name: letters, digits, '-', '_' and '.' kept, other
    characters replaced by '_', never empty, never '.' or '..'."""
    name = re.sub(r"[^A-Za-z0-9._-]+", "_", outcome).strip("._") or "outcome"
    return name[:80]


def write_report(result, folder, with_figures: bool = True) -> ReportFiles:
    """Write report.html, report.md, audit.json and the figures into `folder` (created if
    needed). Nothing is written outside it."""
    from auditor.render import to_json

    folder = Path(folder)
    figs = ()
    if with_figures:
        from auditor.figures import figures as make_figures

        try:
            with np.errstate(all="ignore"), warnings.catch_warnings():
                warnings.simplefilter("ignore")
                figs = make_figures(result)
        except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
            # values at the edge of double precision can defeat the plotting; the numbers stand
            result = dataclasses.replace(result, warnings=result.warnings + (
                f"the figures could not be drawn ({type(exc).__name__}: {exc})",))
    paths = []
    try:
        folder.mkdir(parents=True, exist_ok=True)
        (folder / "figures").mkdir(exist_ok=True)
        for fig in figs:
            png, svg = folder / "figures" / f"{fig.name}.png", folder / "figures" / f"{fig.name}.svg"
            png.write_bytes(fig.png)
            svg.write_text(fig.svg, encoding="utf-8")
            paths += [png, svg]
        html_path, md_path, json_path = (folder / "report.html", folder / "report.md",
                                         folder / "audit.json")
        html_path.write_text(render_html(result, figs), encoding="utf-8")
        md_path.write_text(render_markdown(result, figs), encoding="utf-8")
        json_path.write_text(to_json(result), encoding="utf-8")
    except OSError as exc:
        raise AuditError(f"{folder}: cannot write the report ({exc.strerror or exc})") from None
    return ReportFiles(folder, html_path, md_path, json_path, tuple(paths))
