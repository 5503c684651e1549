"""The figures of the audit report, drawn from a finished `AuditResult`.

`figures(result)` returns, in this order, the figures the result supports:

- `distributions`: each group's (condition's) values as dots with a box (quartiles; whiskers to
  the furthest values within 1.5 IQR of the box) and a Gaussian kernel density outline (skipped
  for a group with fewer than 3 distinct values); paired designs add a panel of the differences;
- `qq`: a normal quantile-quantile plot per group (paired: of the differences), with Blom's
  plotting positions (i - 3/8) / (n + 1/4) and the reference line through the quartiles;
- `ecdf`: the empirical cumulative distribution functions of the groups, overlaid;
- `influence`: the leave-one-out change of a mean-based and a rank-based index, case by case,
  with the flagged cases marked and labelled by file line (only when influence was computed);
- `intervals`: every index with its own interval, as a forest plot, the primary index in bold.

Every figure is a `Figure` with its name, a title, an alt text written from the numbers, and the
PNG and SVG renderings. Nothing is written to disk and no global state is left changed: the
figures are `matplotlib.figure.Figure` objects rendered through the Agg canvas inside
`matplotlib.style.context("default")` and `matplotlib.rc_context`, so a user's matplotlibrc does
not alter them. The output is deterministic: the same result gives byte-identical PNG and SVG
(fixed SVG hash salt, no dates or software versions in the metadata, a jitter pattern without
random numbers). SVG text stays text (`svg.fonttype = "none"`), escaped by matplotlib, and math
parsing is off, so labels are shown literally.

Colours: the qualitative palette of Okabe, M. & Ito, K. (2008), "Color Universal Design (CUD):
how to make figures and presentations that are friendly to colorblind people",
https://jfly.uni-koeln.de/color/ . A group keeps its colour (by its position in the result) in
every figure; line styles repeat the distinction where lines overlap.
"""

from __future__ import annotations

import io
import math
import re
import unicodedata
import warnings
from dataclasses import dataclass

import numpy as np

from auditor.catalogue import AT_ONE_HALF
from auditor.formatting import number as num, p_value as pval
from auditor.results import AuditResult, Effect

NAMES = ("distributions", "qq", "ecdf", "influence", "intervals")

# Okabe & Ito (2008): blue, orange, bluish green, reddish purple, sky blue, vermillion, yellow,
# black; yellow last because it has the least contrast on white.
PALETTE = ("#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442",
           "#000000")
NEUTRAL = "#000000"  # differences, participants, flags
HIGHLIGHT = "#D55E00"  # the primary index
LINESTYLES = ("-", "--", ":", "-.")

CM = 1 / 2.54
WIDTH = 17 * CM  # A4 text width
DPI = 200
ALT_LIMIT = 400
LABEL_LIMIT = 40  # characters of a user label shown in a figure
MAX_FLAG_LABELS = 10  # flagged cases labelled per influence panel (all are marked)
GOLDEN = (math.sqrt(5) - 1) / 2

RC = {
    "font.family": "DejaVu Sans",  # ships with matplotlib: same glyphs on every machine
    "font.size": 8,
    "axes.titlesize": 9,
    "axes.labelsize": 8,
    "xtick.labelsize": 7.5,
    "ytick.labelsize": 7.5,
    "legend.fontsize": 7,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.axisbelow": True,
    "grid.color": "#DDDDDD",
    "grid.linewidth": 0.6,
    "lines.linewidth": 1.2,
    "svg.fonttype": "none",
    "text.parse_math": False,
    "text.usetex": False,
    "axes.unicode_minus": True,
    "figure.dpi": 100,
}

PAIRS = {  # the mean-based and the rank-based index of the influence figure
    "two_independent": ("cohen_d", "prob_superiority"),
    "paired": ("d_z", "matched_rank_biserial"),
    "k_independent": ("eta_squared", "epsilon_squared_h"),
    "k_repeated": ("generalized_eta_squared", "kendall_w"),
}
PANELS = (  # intervals figure: (title, families)
    ("standardized mean differences", ("standardized_mean",)),
    ("dominance (rank-based)", ("dominance",)),
    ("in outcome units", ("mean", "shift")),
    ("omnibus indices", ("variance_explained", "agreement")),
)
CENTRED = AT_ONE_HALF  # no effect at 0.5: drawn as value - 0.5


@dataclass(frozen=True)
class Figure:
    """One figure of the report: `name` (one of NAMES), `title`, `alt` (plain sentences for a
    screen reader), and its PNG bytes and SVG text."""

    name: str
    title: str
    alt: str
    png: bytes
    svg: str


# ------------------------------------------------------------------ text helpers


def clean(text, limit: int = LABEL_LIMIT) -> str:
    """User text for a figure: control and format characters become spaces, runs of space one
    space, and text beyond `limit` characters loses its middle to an ellipsis (labels often
    differ only at the end, e.g. "site 1", "site 2")."""
    chars = (" " if unicodedata.category(c)[0] in "CZ" and c != " " else c for c in str(text))
    out = re.sub(r" +", " ", "".join(chars)).strip()
    if len(out) <= limit:
        return out
    head = limit // 2
    tail = limit - 1 - head
    return out[:head].rstrip() + "\u2026" + (out[-tail:].lstrip() if tail else "")


def _fit(head: str, items: list[str], tail: str = "", limit: int = ALT_LIMIT) -> str:
    """`head` + as many of `items` (joined by '; ') as fit + `tail`, within `limit` characters
    when possible; the items left out are counted."""
    shown: list[str] = []
    for k, item in enumerate(items):
        rest = len(items) - k - 1
        more = f"; and {rest} more" if rest else ""
        if len(head) + len("; ".join(shown + [item])) + len(more) + 1 + len(tail) > limit:
            break
        shown.append(item)
    left = len(items) - len(shown)
    body = "; ".join(shown) + (f"{'; ' if shown else ''}{left} more not listed" if left else "")
    return " ".join(p for p in (head + body + ("." if body else ""), tail) if p).strip()


def _primary_sentence(result: AuditResult) -> str:
    effect = _primary_effect(result)
    if effect is None:
        return ""
    if effect.estimate is None:
        return f"The primary index, {effect.name}, is undefined for these data."
    interval = ""
    if _finite(effect.ci_low) and _finite(effect.ci_high):
        interval = (f", {100 * result.settings.level:g}% interval [{num(effect.ci_low)},"
                    f" {num(effect.ci_high)}]")
    return f"The primary index, {effect.name}, is {num(effect.estimate)}{interval}."


def _primary_effect(result: AuditResult) -> Effect | None:
    if result.decision is None:
        return None
    try:
        return result.effect(result.decision.primary)
    except KeyError:
        return None


def _finite(x) -> bool:
    return x is not None and math.isfinite(float(x))


# ------------------------------------------------------------------ rendering


def _new_figure(height_cm: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure as MplFigure

    fig = MplFigure(figsize=(WIDTH, height_cm * CM), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _render(fig, name: str) -> tuple[bytes, str]:
    """PNG and SVG of `fig`. The SVG ids (clip paths) hash with a salt of the figure's own, so
    they are the same on every run and differ between the figures of one report."""
    import matplotlib

    # Lay out once, then freeze the axes at rounded positions: the layout solver's sums run in
    # an order that can vary from run to run in the last bits, and those bits would otherwise
    # reach the SVG's clip-path ids.
    fig.get_layout_engine().execute(fig)
    for ax in fig.axes:
        ax.set_position([round(float(v), 5) for v in ax.get_position().bounds])
    fig.set_layout_engine("none")
    png, svg = io.BytesIO(), io.BytesIO()
    fig.savefig(png, format="png", dpi=DPI, metadata={"Software": None})
    with matplotlib.rc_context({"svg.hashsalt": f"auditor-figure-{name}"}):
        fig.savefig(svg, format="svg", metadata={"Date": None, "Creator": None})
    return png.getvalue(), svg.getvalue().decode("utf-8")


@dataclass(frozen=True)
class _Context:
    result: AuditResult
    labels: tuple[str, ...]  # cleaned group (condition) labels, in the result's order
    values: tuple[np.ndarray, ...]  # finite values per group
    differences: np.ndarray | None
    outcome: str  # axis label of the values: the outcome, or "value" for a wide file
    phrase: str  # the values in a sentence: the outcome, or "the values"

    def colour(self, k: int) -> str:
        return PALETTE[k % len(PALETTE)]

    def short(self, k: int, room: int = 96) -> str:
        """Label k shortened to share `room` characters with the other groups' labels."""
        return clean(self.labels[k], max(8, min(LABEL_LIMIT, room // max(len(self.labels), 1))))


def _context(result: AuditResult) -> _Context | None:
    s = result.samples
    if s is None or not s.values:
        return None
    values = tuple(_finite_array(v) for v in s.values)
    diffs = None if s.differences is None else _finite_array(s.differences)
    measure = _measure(result)
    return _Context(result, tuple(clean(x) for x in s.labels), values, diffs, measure,
                    "the values" if measure == "value" else measure)


def _measure(result: AuditResult) -> str:
    """What the values are: the outcome column, or "value" when the conditions are the columns
    of a wide file (the result's outcome then lists them)."""
    wide = result.design in ("paired", "k_repeated") and result.group_column is None
    return "value" if wide else clean(result.outcome)


def _finite_array(v) -> np.ndarray:
    a = np.asarray(v, dtype=float).ravel()
    return a[np.isfinite(a)]


def figures(result: AuditResult) -> tuple[Figure, ...]:
    """The report's figures for `result` (see the module docstring). Figures that need the
    analysed values are left out when `result.samples` is None; `influence` when
    `result.influence` is None."""
    import matplotlib
    import matplotlib.style

    ctx = _context(result)
    makers = []
    if ctx is not None:
        makers += [_distributions, _qq, _ecdf]
    if result.influence is not None:
        makers.append(_influence)
    makers.append(_intervals)
    out = []
    with warnings.catch_warnings(), matplotlib.style.context("default"), \
            matplotlib.rc_context(RC):
        # a label in a script DejaVu Sans lacks is drawn as empty boxes, not an error
        warnings.filterwarnings("ignore", message=r"Glyph .* missing from", category=UserWarning)
        for make in makers:
            name, title, alt, fig = make(result, ctx)
            png, svg = _render(fig, name)
            out.append(Figure(name, title, alt, png, svg))
    return tuple(out)


# ------------------------------------------------------------------ distributions


def _group_word(result: AuditResult) -> str:
    return "condition" if result.design in ("paired", "k_repeated") else "group"


def _quartiles(v: np.ndarray) -> tuple[float, float, float]:
    q1, med, q3 = np.percentile(v, [25, 50, 75])
    return float(q1), float(med), float(q3)


def _cloud(ax, values, labels, colours) -> None:
    """Density outline (left), box (centre) and dots (right) for each group at x = 0, 1, ..."""
    from matplotlib.patches import Rectangle
    from scipy import stats

    for k, (v, colour) in enumerate(zip(values, colours)):
        if v.size == 0:
            continue
        q1, med, q3 = _quartiles(v)
        if np.unique(v).size >= 3:  # outline cut at the data's range
            grid = np.linspace(v.min(), v.max(), 200)
            dens = stats.gaussian_kde(v)(grid)
            half = 0.36 * dens / dens.max()
            ax.fill_betweenx(grid, k - 0.06 - half, k - 0.06, color=colour, alpha=0.18,
                             linewidth=0)
            ax.plot(k - 0.06 - half, grid, color=colour, linewidth=1.0)
        iqr = q3 - q1
        low = float(v[v >= q1 - 1.5 * iqr].min())
        high = float(v[v <= q3 + 1.5 * iqr].max())
        ax.add_patch(Rectangle((k - 0.05, q1), 0.1, q3 - q1, facecolor="white",
                               edgecolor=NEUTRAL, linewidth=0.9, zorder=3))
        ax.plot([k - 0.05, k + 0.05], [med, med], color=NEUTRAL, linewidth=1.6, zorder=4)
        ax.plot([k, k], [q3, high], color=NEUTRAL, linewidth=0.9, zorder=3)
        ax.plot([k, k], [low, q1], color=NEUTRAL, linewidth=0.9, zorder=3)
        ordered = np.sort(v, kind="stable")
        jitter = (np.arange(1, ordered.size + 1) * GOLDEN) % 1.0  # regular, not random
        size = 12 if ordered.size <= 100 else (7 if ordered.size <= 400 else 3)
        ax.scatter(k + 0.1 + 0.26 * jitter, ordered, s=size, color=colour, alpha=0.75,
                   linewidths=0, zorder=2)
    ax.set_xticks(range(len(values)), labels)
    ax.set_xlim(-0.55, len(values) - 0.5)
    ax.grid(axis="y")


def _distributions(result: AuditResult, ctx: _Context):
    word = _group_word(result)
    k = len(ctx.values)
    fig = _new_figure(9.0)
    paired = ctx.differences is not None
    if paired:
        ax, dax = fig.subplots(1, 2, width_ratios=[2, 1])
    else:
        ax = fig.subplots()
    ticks = [f"{ctx.short(i)}\nn = {v.size}" for i, v in enumerate(ctx.values)]
    _cloud(ax, ctx.values, ticks, [ctx.colour(i) for i in range(k)])
    ax.set_ylabel(ctx.outcome)
    ax.set_title(f"{ctx.phrase} by {word}" if k <= 2 else f"{ctx.phrase}, {k} {word}s",
                 loc="left")
    medians = [f"{ctx.labels[i]} {num(float(np.median(v)))} (n = {v.size})"
               for i, v in enumerate(ctx.values) if v.size]
    tail = ""
    if paired:
        d = ctx.differences
        name = f"{ctx.short(0)} \u2212 {ctx.short(1)}"
        _cloud(dax, [d], [f"{name}\nn = {d.size}"], [NEUTRAL])
        dax.axhline(0, color=NEUTRAL, linewidth=0.8, linestyle="--", zorder=1)
        dax.set_ylabel("difference (dashed line: no change)")
        dax.set_title("paired differences", loc="left")
        if d.size:
            tail = (f"The differences ({ctx.labels[0]} minus {ctx.labels[1]}) have median"
                    f" {num(float(np.median(d)))}, {int(np.sum(d > 0))} positive,"
                    f" {int(np.sum(d < 0))} negative and {int(np.sum(d == 0))} zero.")
    head = (f"Dots, boxes and density outlines of {ctx.phrase} for {k} {word}s"
            f"{' and their paired differences' if paired else ''}. Medians: ")
    alt = _fit(head, medians, " ".join(p for p in (tail, _primary_sentence(result)) if p))
    title = f"Distribution of {ctx.phrase} in each {word}"
    return "distributions", title, alt, fig


# ------------------------------------------------------------------ Q-Q


def _normality_notes(result: AuditResult) -> dict[str, object]:
    diag = result.diagnostics
    found = {}
    if hasattr(diag, "differences_normality"):
        found["differences"] = diag.differences_normality
    for norm in getattr(diag, "normality", ()) or ():
        found[norm.label] = norm
    return found


def _qq(result: AuditResult, ctx: _Context):
    from scipy import stats

    if ctx.differences is not None:
        series = [(f"differences, {ctx.short(0)} \u2212 {ctx.short(1)}", "differences",
                   ctx.differences, NEUTRAL)]
    else:
        room = {1: LABEL_LIMIT, 2: LABEL_LIMIT, 3: 28}.get(len(ctx.values), 20)  # per column
        series = [(clean(ctx.labels[i], room), ctx.result.samples.labels[i], v, ctx.colour(i))
                  for i, v in enumerate(ctx.values)]
    cols = min(len(series), 4)
    rows = math.ceil(len(series) / cols)
    fig = _new_figure(6.5 * rows + 0.8)
    axes = np.atleast_1d(fig.subplots(rows, cols, squeeze=False)).ravel()
    z25, z75 = stats.norm.ppf([0.25, 0.75])
    for ax, (label, _, v, colour) in zip(axes, series):
        n = v.size
        ax.set_title(f"{label}\nn = {n}", loc="left", fontsize=8)
        ax.grid(True)
        if n == 0:
            continue
        z = stats.norm.ppf((np.arange(1, n + 1) - 0.375) / (n + 0.25))
        ax.scatter(z, np.sort(v), s=10, color=colour, alpha=0.8, linewidths=0, zorder=3)
        q1, _, q3 = _quartiles(v)
        slope = (q3 - q1) / (z75 - z25)
        ends = np.array([min(z.min(), -1.0), max(z.max(), 1.0)]) * 1.05
        ax.plot(ends, q1 + slope * (ends - z25), color=NEUTRAL, linewidth=0.9, linestyle="--",
                zorder=2)
        ax.set_xlabel("normal quantile")
    for ax in axes[len(series):]:
        ax.set_visible(False)
    for r in range(rows):
        axes[r * cols].set_ylabel(ctx.outcome if ctx.differences is None else "difference")
    notes = _normality_notes(result)
    items = []
    for label, key, v, _ in series:
        norm = notes.get(key)
        if norm is None or v.size == 0:
            continue
        items.append(f"{clean(key)} skewness {num(norm.skewness, 2)}, Shapiro-Wilk p"
                     f" {pval(norm.shapiro_p)}")
    what = ("the paired differences" if ctx.differences is not None
            else f"each of {len(series)} {_group_word(result)}s")
    head = (f"Normal Q-Q plots of {what}; points near the dashed line through the quartiles"
            " mean a near-normal shape. ")
    alt = _fit(head, items, _primary_sentence(result))
    return "qq", f"Normal Q-Q plot of {what}", alt, fig


# ------------------------------------------------------------------ ECDF


def _ecdf(result: AuditResult, ctx: _Context):
    fig = _new_figure(8.0)
    ax = fig.subplots()
    finite = [v for v in ctx.values if v.size]
    lo = min(float(v.min()) for v in finite) if finite else 0.0
    hi = max(float(v.max()) for v in finite) if finite else 1.0
    pad = 0.03 * (hi - lo) if hi > lo else 0.5
    for i, v in enumerate(ctx.values):
        if v.size == 0:
            continue
        x = np.sort(v, kind="stable")
        xs = np.concatenate([[lo - pad], x, [hi + pad]])
        ys = np.concatenate([[0.0], np.arange(1, x.size + 1) / x.size, [1.0]])
        ax.step(xs, ys, where="post", color=ctx.colour(i),
                linestyle=LINESTYLES[i % len(LINESTYLES)], linewidth=1.5,
                label=f"{ctx.short(i)} (n = {v.size})")
    ax.set_xlim(lo - pad, hi + pad)
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel(ctx.outcome)
    ax.set_ylabel("share of values at or below")
    ax.grid(True)
    ax.legend(loc="lower right", frameon=False)
    word = _group_word(result)
    items = [f"{ctx.labels[i]} median {num(float(np.median(v)))}"
             for i, v in enumerate(ctx.values) if v.size]
    extra = ""
    if result.design == "two_independent":
        a = next((e for e in result.effects if e.name == "prob_superiority"), None)
        if a is not None and a.estimate is not None:
            extra = (f"The chance that a value from {ctx.labels[0]} exceeds one from"
                     f" {ctx.labels[1]} (ties half) is {num(a.estimate)}; the curve further"
                     " right holds the larger values.")
    elif ctx.differences is not None:
        extra = "Both curves come from the same participants."
    head = f"Empirical cumulative distributions of {ctx.phrase} for {len(items)} {word}s: "
    alt = _fit(head, items, " ".join(p for p in (extra, _primary_sentence(result)) if p))
    return "ecdf", f"Cumulative distribution of {ctx.phrase} by {word}", alt, fig


# ------------------------------------------------------------------ influence


def _case_order(infl) -> tuple[np.ndarray, str]:
    """x position (1, 2, ...) of every unit: by value (ties by file line), else by file line."""
    rows = np.asarray(infl.rows, dtype=np.int64)
    values = None if infl.values is None else np.asarray(infl.values, dtype=float)
    if values is not None and values.size == rows.size:
        order = np.lexsort((rows, np.where(np.isfinite(values), values, np.inf)))
        what = "difference" if infl.unit == "participant" else "value"
        axis = f"{infl.unit}s ranked by {what} (1 = lowest)"
    else:
        order = np.argsort(rows, kind="stable")
        axis = f"{infl.unit}s in file order"
    position = np.empty(rows.size, dtype=float)
    position[order] = np.arange(1, rows.size + 1)
    return position, axis


def _place_labels(fig, ax, points, texts, fontsize: float, obstacles=()) -> int:
    """Label `points` (data coordinates) with `texts`, each in the first nearby spot that stays
    inside the axes and clear of the labels placed and the `obstacles` (data coordinates of the
    other points drawn); far spots get a leader
    line. Returns how many were placed. The figure must have been drawn (so that the layout is
    final); the labels are kept out of the layout so that it does not move afterwards."""
    px = fig.dpi / 72.0
    box = ax.bbox
    pts = [ax.transData.transform(p) for p in points]
    taken = [(x - 5 * px, y - 5 * px, x + 5 * px, y + 5 * px) for x, y in pts]
    dots = ax.transData.transform(np.asarray(obstacles, dtype=float).reshape(-1, 2))
    dots = np.column_stack([dots - 2.5 * px, dots + 2.5 * px])  # x0, y0, x1, y1
    spots = [(r * math.cos(a), r * math.sin(a)) for r in (7, 16, 28, 42)
             for a in np.deg2rad([45, -45, 135, -135, 90, -90, 0, 180])]
    placed = 0
    for (x, y), (dx0, dy0), text in zip(pts, points, texts):
        w, h = 0.62 * fontsize * len(text) * px, 1.15 * fontsize * px
        for dx, dy in spots:
            left = x + dx * px if dx >= 0 else x + dx * px - w
            bottom = y + dy * px if dy >= 0 else y + dy * px - h
            if abs(dx) < 1e-9:
                left = x - w / 2
            if abs(dy) < 1e-9:
                bottom = y - h / 2
            cand = (left, bottom, left + w, bottom + h)
            inside = (cand[0] >= box.x0 and cand[2] <= box.x1 and cand[1] >= box.y0
                      and cand[3] <= box.y1)
            if not inside or any(cand[0] < t[2] and t[0] < cand[2] and cand[1] < t[3]
                                 and t[1] < cand[3] for t in taken):
                continue
            if np.any((cand[0] < dots[:, 2]) & (dots[:, 0] < cand[2]) & (cand[1] < dots[:, 3])
                      & (dots[:, 1] < cand[3])):
                continue
            taken.append(cand)
            far = math.hypot(dx, dy) > 10
            ann = ax.annotate(
                text, (dx0, dy0), xytext=((cand[0] - x) / px, (cand[1] - y) / px),
                textcoords="offset points", ha="left", va="bottom", fontsize=fontsize,
                zorder=6, annotation_clip=False,
                arrowprops=dict(arrowstyle="-", color="#555555", linewidth=0.5,
                                shrinkA=0, shrinkB=4) if far else None)
            ann.set_in_layout(False)
            placed += 1
            break
    return placed


def _influence(result: AuditResult, ctx: _Context | None):
    from matplotlib.lines import Line2D

    infl = result.influence
    rows = np.asarray(infl.rows, dtype=np.int64)
    position, axis = _case_order(infl)
    independent = result.design in ("two_independent", "k_independent")
    labels = tuple(result.samples.labels) if result.samples is not None else tuple(
        g.label for g in result.groups)
    colour_of = {lab: PALETTE[k % len(PALETTE)] for k, lab in enumerate(labels)}
    colours = np.array([colour_of.get(g, NEUTRAL) if independent else NEUTRAL
                        for g in infl.groups], dtype=object)
    summaries = {e.effect: e for e in infl.effects}
    names = PAIRS.get(result.design) or tuple(infl.changes)[:2]
    fig = _new_figure(9.0)
    axes = np.atleast_1d(fig.subplots(1, len(names), squeeze=False)).ravel()
    index = {int(r): i for i, r in enumerate(rows.tolist())}
    items, pending, any_flag, any_top = [], [], False, False
    for ax, name, kind in zip(axes, names, ("mean-based", "rank-based")):
        ax.set_title(f"{name} ({kind})", loc="left")
        ax.set_xlabel(axis)
        ax.set_ylabel(f"change in {name} when left out")
        ax.grid(True)
        change = infl.changes.get(name)
        summary = summaries.get(name)
        if change is None or summary is None or not np.isfinite(change).any():
            ax.text(0.5, 0.5, f"no leave-one-out values for {name}", transform=ax.transAxes,
                    ha="center", va="center", color="#555555")
            ax.set_xticks([])
            ax.set_yticks([])
            items.append(f"{name}: no leave-one-out values")
            continue
        change = np.asarray(change, dtype=float)
        ok = np.isfinite(change)
        ax.axhline(0, color=NEUTRAL, linewidth=0.8, linestyle="--", zorder=1)
        ax.scatter(position[ok], change[ok], s=12 if rows.size <= 150 else 6,
                   c=list(colours[ok]), alpha=0.7, linewidths=0, zorder=2)
        flagged = sorted(set(summary.sign_flips) | set(summary.interval_flips))
        marked = [index[r] for r in flagged if r in index and ok[index[r]]]
        if marked:
            any_flag = True
            ax.scatter(position[marked], change[marked], s=55, facecolors="none",
                       edgecolors=NEUTRAL, linewidths=1.0, zorder=4)
        # with no change at all there is no "largest" one to point at
        moved = summary.max_abs_change is not None and summary.max_abs_change > 0
        top = summary.most_influential_row if moved else None
        top_i = index.get(int(top)) if top is not None else None
        top_i = top_i if top_i is not None and ok[top_i] else None
        if top_i is not None:
            any_top = True
            ax.scatter([position[top_i]], [change[top_i]], s=70, marker="D",
                       facecolors="none", edgecolors=HIGHLIGHT, linewidths=1.2, zorder=5)
        ax.margins(x=0.06, y=0.15)
        order = ([top_i] if top_i is not None else []) + sorted(
            (i for i in marked if i != top_i), key=lambda i: (-abs(change[i]), rows[i]))
        pending.append((ax, order[:MAX_FLAG_LABELS], len(order), change, ok))
        lines = ", ".join(str(r) for r in flagged[:6]) + (
            f" and {len(flagged) - 6} more" if len(flagged) > 6 else "")
        decisive = summary.most_influential_row
        decisive_i = index.get(int(decisive)) if decisive is not None else None
        undefined = decisive_i is not None and not ok[decisive_i]
        items.append((f"{name} is undefined without line {decisive}; otherwise it" if undefined
                      else name)
                     + (f" moves by at most {num(summary.max_abs_change)}" if moved
                        else " does not move")
                     + (f" (line {top})" if top is not None and not undefined else "")
                     + (f", flips at lines {lines}" if flagged else ", no flips"))
    handles = []
    if independent:
        handles += [Line2D([], [], linestyle="none", marker="o", markersize=5, color=colour_of[g],
                           label=clean(g, 24)) for g in labels]
    if any_flag:
        handles.append(Line2D([], [], linestyle="none", marker="o", markersize=7,
                              markerfacecolor="none", markeredgecolor=NEUTRAL,
                              label="sign or interval flips when left out"))
    if any_top:
        handles.append(Line2D([], [], linestyle="none", marker="D", markersize=7,
                              markerfacecolor="none", markeredgecolor=HIGHLIGHT,
                              label="largest change"))
    if handles:
        handles.append(Line2D([], [], linestyle="none", label="labels: file line"))
        fig.legend(handles=handles, loc="outside lower center", ncols=min(len(handles), 6),
                   frameon=False, handletextpad=0.3, columnspacing=1.2)
    if pending:
        fig.canvas.draw()  # fixes the layout, so that label spots can be judged on the page
    for ax, order, count, change, ok in pending:
        placed = _place_labels(fig, ax, [(position[i], change[i]) for i in order],
                               [f"line {int(rows[i])}" for i in order], 6.5,
                               np.column_stack([position[ok], change[ok]]))
        if count > placed:
            ax.text(0.99, 0.01, f"{count - placed} flagged, not labelled",
                    transform=ax.transAxes, ha="right", fontsize=6.5, color="#555555")
    head = (f"Change of each index when one of {rows.size} {infl.unit}s is left out, mean-based"
            " beside rank-based. ")
    alt = _fit(head, items, _primary_sentence(result))
    title = f"Influence of single {infl.unit}s: {' and '.join(names)}"
    return "influence", title, alt, fig


# ------------------------------------------------------------------ intervals


def _intervals(result: AuditResult, ctx: _Context | None):
    from matplotlib.transforms import blended_transform_factory

    primary = _primary_effect(result)
    primary_name = None if primary is None else primary.name
    outcome = _measure(result)
    panels = []
    for title, families in PANELS:
        members = [e for e in result.effects if e.family in families]
        if members:
            if families == ("mean", "shift"):
                title += "" if outcome == "value" else f" ({outcome})"
            panels.append((title, members))
    total = sum(len(m) for _, m in panels)
    fig = _new_figure(sum(1.9 + 0.55 * len(m) for _, m in panels))
    axes = np.atleast_1d(fig.subplots(len(panels), 1, squeeze=False,
                                      height_ratios=[0.9 + 0.55 * len(m) for _, m in panels]
                                      )).ravel()
    level = f"{100 * result.settings.level:g}%"
    for ax, (title, members) in zip(axes, panels):
        ys = np.arange(len(members))[::-1]
        xs = [0.0]
        labels = []
        right = blended_transform_factory(ax.transAxes, ax.transData)
        for y, e in zip(ys, members):
            shift = 0.5 if e.name in CENTRED else 0.0
            labels.append(f"{e.name} \u2212 0.5" if e.name in CENTRED else e.name)
            is_primary = e.name == primary_name
            colour = HIGHLIGHT if is_primary else NEUTRAL
            if e.estimate is None or not math.isfinite(e.estimate):
                ax.text(1.01, y, "undefined", transform=right, va="center", fontsize=7,
                        color="#555555")
                continue
            est = e.estimate - shift
            xs.append(est)
            text = num(e.estimate)
            if _finite(e.ci_low) and _finite(e.ci_high):
                lo, hi = e.ci_low - shift, e.ci_high - shift
                xs += [lo, hi]
                ax.plot([lo, hi], [y, y], color=colour, linewidth=2.0 if is_primary else 1.2,
                        solid_capstyle="butt", zorder=2)
                text += f" [{num(e.ci_low)}, {num(e.ci_high)}]"
            else:
                text += " (no interval)"
            ax.plot([est], [y], marker="D" if is_primary else "o", markersize=6 if is_primary
                    else 4.5, color=colour, zorder=3, linestyle="none")
            ax.text(1.01, y, text, transform=right, va="center", fontsize=7,
                    fontweight="bold" if is_primary else "normal")
        ax.axvline(0.0, color=NEUTRAL, linewidth=0.8, linestyle="--", zorder=1)
        ax.set_yticks(ys, labels)
        for tick, e in zip(ax.get_yticklabels(), members):
            if e.name == primary_name:
                tick.set_fontweight("bold")
                tick.set_color(HIGHLIGHT)
        ax.set_ylim(-0.6, len(members) - 0.4)
        lo, hi = min(xs), max(xs)
        pad = 0.08 * (hi - lo) if hi > lo else 0.5
        ax.set_xlim(lo - pad, hi + pad)
        ax.grid(axis="x")
        ax.set_title(title, loc="left")
        centred = any(e.name in CENTRED for e in members)
        ax.set_xlabel(f"estimate and its {level} interval; dashed line: no effect (0"
                      + ("; 0.5 for the probabilities, drawn minus 0.5)" if centred else ")"))
    clear = [e.name for e in result.effects if e.estimate is not None and _finite(e.ci_low)
             and _finite(e.ci_high) and not e.ci_low <= e.null_value <= e.ci_high]
    head = (f"Forest plot of {total} effect sizes, each with its own {level} interval, in"
            f" {len(panels)} panel{'s' if len(panels) > 1 else ''}. ")
    lead = _primary_sentence(result)
    if primary is not None:
        lead += f" Its no-effect value is {primary.null_value:g}."
    items = clear if clear else []
    verb = "excludes" if len(clear) == 1 else "exclude"
    tail_head = (f"{len(clear)} of {total} intervals {verb} the no-effect value: " if clear
                 else f"None of the {total} intervals excludes the no-effect value.")
    alt = _fit(head + lead + " " + tail_head, items)
    return "intervals", f"Effect sizes with their {level} intervals", alt, fig
