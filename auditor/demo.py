"""The bundled demo: an invented study of two commuter cycling schemes, audited end to end.

Scenario (invented): a city offered new cyclists either a 'buddy' scheme (riding with an
experienced commuter for a month) or a 'solo' scheme (a map pack and an app). Outcomes of
different shapes let the audit show where mean-based and rank-based indices agree and where they
part: commute minutes (near normal), weekly kilometres (right-skewed), a 1-7 comfort rating (heavy
ties), and repair spending with one planted extreme case. A before/after confidence score and a
three-level route type are included for paired and k-group designs.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np

DEMO_SEED = 7301
DEMO_FILE = "cycling_commute.csv"
DEMO_OUTCOMES = ("commute_minutes", "weekly_km", "comfort_rating", "repair_spend")


def make_demo_frame(seed: int = DEMO_SEED):
    """The demo table, generated from `seed` (same seed, same table)."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    n_buddy, n_solo = 46, 52
    scheme = np.array(["buddy"] * n_buddy + ["solo"] * n_solo)
    order = rng.permutation(scheme.size)
    scheme = scheme[order]
    buddy = scheme == "buddy"
    n = scheme.size
    minutes = np.where(buddy, rng.normal(27.0, 5.0, n), rng.normal(30.0, 5.5, n))
    km = np.where(buddy, rng.lognormal(3.3, 0.45, n), rng.lognormal(3.0, 0.75, n))
    comfort = np.clip(np.round(np.where(buddy, rng.normal(5.2, 1.1, n),
                                        rng.normal(4.4, 1.4, n))), 1, 7)
    repair = np.round(np.where(buddy, rng.gamma(2.0, 9.0, n), rng.gamma(2.0, 8.0, n)), 2)
    planted = int(np.flatnonzero(buddy)[3])
    repair[planted] = 640.0  # one rider replaced a stolen wheel set
    before = np.round(rng.normal(3.1, 0.8, n), 1)
    after = np.round(before + np.where(buddy, 0.9, 0.5) + rng.normal(0, 0.6, n), 1)
    route = rng.choice(["river path", "main road", "mixed"], size=n, p=[0.35, 0.35, 0.30])
    frame = pd.DataFrame({
        "rider_id": [f"R{i + 1:03d}" for i in range(n)],
        "scheme": scheme,
        "route_type": route,
        "commute_minutes": np.round(minutes, 1),
        "weekly_km": np.round(km, 1),
        "comfort_rating": comfort.astype(int),
        "repair_spend": repair,
        "confidence_before": before,
        "confidence_after": after,
    })
    # two riders left the comfort question blank, one typed a word into the minutes column
    frame["comfort_rating"] = frame["comfort_rating"].astype(object)
    frame.loc[[10, 61], "comfort_rating"] = ""
    frame["commute_minutes"] = frame["commute_minutes"].astype(object)
    frame.loc[33, "commute_minutes"] = "varies"
    return frame


def demo_audits() -> list[tuple[str, dict]]:
    """The demo's audits: (name, options for `audit`). Every two-group outcome compares buddy
    relative to solo; then the riders' confidence before relative to after (paired), and weekly
    distance across the three route types (k independent groups)."""
    audits = [(outcome, dict(outcome=outcome, group="scheme", groups=["buddy", "solo"]))
              for outcome in DEMO_OUTCOMES]
    audits.append(("confidence_before_after",
                   dict(paired_columns=["confidence_before", "confidence_after"],
                        subject="rider_id", outcome="confidence")))
    audits.append(("weekly_km_by_route", dict(outcome="weekly_km", group="route_type")))
    return audits


def demo_data_path() -> Path | None:
    """The committed demo CSV when running from the repository, else None."""
    candidate = Path(__file__).resolve().parent.parent / "demo" / DEMO_FILE
    return candidate if candidate.is_file() else None


def run_demo(out: Path, echo: Callable[[str], None] = print, with_figures: bool = True) -> int:
    """Run every demo audit; write one report folder per audit (report.html, report.md,
    audit.json, figures) into `out`, and `out/index.html` linking them all."""
    import os
    import warnings

    from auditor.errors import AuditError
    from auditor.pipeline import audit
    from auditor.render import terminal_summary
    from auditor.report import write_report

    source = demo_data_path()
    if source is not None:  # a path relative to the working folder keeps the reports portable
        try:
            data = os.path.relpath(source)
        except ValueError:  # another drive
            data = str(source)
    else:
        data = make_demo_frame()
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise AuditError(f"{out}: cannot create the output folder ({exc.strerror or exc})") from None
    entries = []
    for name, options in demo_audits():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = audit(data, **options)
        files = write_report(result, out / name, with_figures=with_figures)
        entries.append((name, result))
        echo(f"=== {name} ===")
        echo(terminal_summary(result))
        echo(f"(report written to {files.html})")
    index = out / "index.html"
    try:
        index.write_text(index_html(entries), encoding="utf-8")
    except OSError as exc:
        raise AuditError(f"{index}: cannot write ({exc.strerror or exc})") from None
    echo(f"index of the demo reports: {index}")
    return 0


def index_html(entries) -> str:
    """A page linking every demo report, with each one's design and decision."""
    import html

    rows = []
    for name, result in entries:
        d = result.decision
        link = html.escape(f"{name}/report.html", quote=True)
        primary = html.escape(d.primary if d else "")
        test = html.escape(d.test["label"] if d else "")
        rows.append(f'<tr><td><a href="{link}">{html.escape(name)}</a></td>'
                    f"<td>{html.escape(result.design.replace('_', ' '))}</td>"
                    f"<td>{html.escape(d.branch.replace('_', ' ') if d else '')}</td>"
                    f"<td>{primary}</td><td>{test}</td></tr>")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<title>auditor demo reports</title><style>body{font-family:sans-serif;max-width:"
            "180mm;margin:auto;padding:8px}table{border-collapse:collapse;width:100%}"
            "td,th{border-bottom:1px solid #ccc;padding:4px 6px;text-align:left}</style></head>"
            "<body><h1>Demo reports: an invented study of two commuter cycling schemes</h1>"
            "<p>Each report audits one outcome of the bundled demo data set"
            " (demo/cycling_commute.csv).</p><table><thead><tr><th>report</th><th>design</th>"
            "<th>policy branch</th><th>primary index</th><th>test</th></tr></thead><tbody>"
            + "".join(rows) + "</tbody></table></body></html>\n")
