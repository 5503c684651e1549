"""A catalogue of large data: ordinary but skewed samples, of the sizes real registries and
wearable devices produce, run through `auditor check`, `auditor screen` and the library.

Six shapes, each drawn from a seeded `numpy.random.default_rng` and written to CSV once per
module: lognormal, exponential, Student t with 2 df, a 1-7 rating bunched at the top (about 70%
answer 6 or 7), a zero-inflated count (60% structural zeros, otherwise negative binomial) and a
constant with one far value. Every group or condition after the first is shifted a little, so
that each file is a real comparison (the constant shape excepted: one far value is its only
departure). Four designs: two independent groups, two paired conditions (wide file), three
independent groups, three repeated conditions (wide file).

What every finished run must give:

- exit status 0 and nothing on standard error (no traceback, no warning escaped);
- a JSON document that parses strictly, with no NaN and no infinite number anywhere;
- every p-value (keys `p`, `*_p`, `p_*`, or containing `pvalue` / `p_value`) null or in [0, 1];
- every interval (`low`/`high`, `*_low`/`*_high`, the Tukey fences) null or finite and ordered;
- every row of the file used, and an undefined index null with its reason;
- the decision's non-normality check fired, and the Anderson-Darling and D'Agostino-Pearson p
  below 0.05 for every group or condition that is not constant (at n >= 4,000 every shape here
  departs clearly from normality); Anderson-Darling p below 1e-10 for the lognormal and
  exponential groups, whose statistic used to overflow the p-value formula.

Which combinations run, and how (chosen from single runs timed by hand on a 2-core machine so
that the whole module stays within about four minutes; the times are beside `CLI_COMBOS`,
`LIBRARY_AT_5000` and `LIBRARY_AT_MILLION`):

- `auditor check` in a subprocess, two at a time: two and three independent groups at 5,000 per
  group for every shape; lognormal and exponential at 4,000 and 20,000; the zero-inflated count
  at 50,000; lognormal at 1,000,000 per group; a full audit of paired and of repeated conditions
  at 1,000 participants; paired and repeated conditions at 50,000 (one shape each: what stops
  them there does not depend on the shape).
- the library, in this process: paired and repeated conditions at 5,000 through
  `auditor.audit(..., scope="screen")`, with the full normality tests run on the values the
  audit analysed; and at 1,000,000, `diagnostics.normality` and every estimator with its
  analytic interval (`pipeline.estimate_all`) on the arrays, for the designs and shapes where
  the command line would take too long.
- `auditor screen` on one file of 50 outcomes cycling through the shapes, 2 x 2,000 each.

Each subprocess runs with its address space capped (`ADDRESS_SPACE`): an audit that tries to
hold a quadratic number of values then fails with a MemoryError instead of exhausting the
machine.
"""

from __future__ import annotations

import csv
import dataclasses
import json
import math
import subprocess
import sys
import textwrap
import threading
import time
import warnings
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pytest

from auditor import audit
from auditor.diagnostics import normality
from auditor.effects import (k_independent_effects, k_repeated_effects, paired_effects,
                             two_group_effects)
from auditor.errors import UndefinedEffectWarning
from auditor.pipeline import estimate_all
from auditor.render import to_json

pytestmark = pytest.mark.slow

# ------------------------------------------------------------------ the shapes

SHAPES = ("lognormal", "exponential", "t2", "rating_top", "zero_inflated", "constant_outlier")
DISCRETE = frozenset({"rating_top", "zero_inflated", "constant_outlier"})
SHIFT = 0.15  # location (log-location for the lognormal) added per group or condition
RATING_WEIGHTS = np.array([0.01, 0.02, 0.04, 0.08, 0.15, 0.30, 0.40])  # answers 1..7
RATING_STEPS = np.array([-1, 0, 1, 2])  # a participant's change between two conditions
ZERO_SHARE = 0.6
CONSTANT, FAR = 10.0, 1000.0
DESIGNS = ("two", "paired", "k", "k_rep")
CONDITIONS = {"two": 2, "paired": 2, "k": 3, "k_rep": 3}
LEVEL = 0.95


def _zero_inflated(rng, n: int, j: int) -> np.ndarray:
    mean = 3.0 + 0.4 * j
    counts = rng.negative_binomial(2, 2.0 / (2.0 + mean), n)
    return np.where(rng.random(n) < ZERO_SHARE, 0, counts).astype(float)


def draw(shape: str, rng, n: int, j: int) -> np.ndarray:
    """n values of `shape` for group (or first condition) j, shifted by j steps."""
    if shape == "lognormal":
        return rng.lognormal(SHIFT * j, 1.0, n)
    if shape == "exponential":
        return rng.exponential(1.0 + SHIFT * j, n)
    if shape == "t2":
        return rng.standard_t(2, n) + SHIFT * j
    if shape == "rating_top":
        weights = RATING_WEIGHTS * np.exp(0.12 * j * np.arange(7))
        return rng.choice(np.arange(1, 8), size=n, p=weights / weights.sum()).astype(float)
    if shape == "zero_inflated":
        return _zero_inflated(rng, n, j)
    if shape == "constant_outlier":
        x = np.full(n, CONSTANT)
        if j == 0:
            x[far_position(n)] = FAR
        return x
    raise ValueError(shape)


def later(shape: str, rng, first: np.ndarray, j: int) -> np.ndarray:
    """Condition j of the participants whose first condition is `first`: the same people, so the
    change, not the level, carries the shape (the differences are what a paired audit screens)."""
    n = first.size
    if shape == "lognormal":
        return first * rng.lognormal(SHIFT * j, 0.6, n)
    if shape == "exponential":
        return first + rng.exponential(1.0 + SHIFT * j, n) - 1.0
    if shape == "t2":
        return first + rng.standard_t(2, n) + SHIFT * j
    if shape == "rating_top":
        p = np.array([0.03, 0.72 - 0.04 * j, 0.15 + 0.04 * j, 0.10])
        return np.clip(first + rng.choice(RATING_STEPS, size=n, p=p), 1, 7)
    if shape == "zero_inflated":
        return first + _zero_inflated(rng, n, j - 1)
    if shape == "constant_outlier":
        return np.full(n, CONSTANT)
    raise ValueError(shape)


def far_position(n: int) -> int:
    return n // 2


def samples_of(design: str, shape: str, n: int, seed) -> list[np.ndarray]:
    """The groups (independent designs) or the conditions of the same participants."""
    rng = np.random.default_rng(seed)
    k = CONDITIONS[design]
    if design in ("two", "k"):
        return [draw(shape, rng, n, j) for j in range(k)]
    first = draw(shape, rng, n, 0)
    return [first] + [later(shape, rng, first, j) for j in range(1, k)]


def seed_of(design: str, shape: str, n: int) -> list[int]:
    return [DESIGNS.index(design), SHAPES.index(shape), n]


def recorded(shape: str, x: np.ndarray, decimals: int) -> np.ndarray:
    """The values as a file with `decimals` places (whole numbers for the discrete shapes) holds
    them."""
    return np.round(x, 0 if shape in DISCRETE else decimals)


def cells(shape: str, x: np.ndarray, decimals: int | None) -> np.ndarray:
    if shape in DISCRETE:
        return np.char.mod("%d", x.astype(np.int64)).astype(object)
    return np.char.mod("%.9g" if decimals is None else f"%.{decimals}f", x).astype(object)


LABELS = ("A", "B", "C")


def condition_names(design: str) -> list[str]:
    return [f"t{j + 1}" for j in range(CONDITIONS[design])]


def write_data(path: Path, design: str, shape: str, n: int, decimals: int | None) -> Path:
    """Long file `g,y` (groups one after the other) or wide file `id,t1,t2[,t3]`."""
    parts = samples_of(design, shape, n, seed_of(design, shape, n))
    if design in ("two", "k"):
        body = np.concatenate([(label + ",") + cells(shape, x, decimals)
                               for label, x in zip(LABELS, parts)])
        header = "g,y"
    else:
        body = np.char.mod("p%d", np.arange(1, n + 1)).astype(object)
        for x in parts:
            body = body + "," + cells(shape, x, decimals)
        header = "id," + ",".join(condition_names(design))
    path.write_text(header + "\n" + "\n".join(body) + "\n", encoding="utf-8")
    return path


def design_options(design: str) -> tuple[str, ...]:
    if design in ("two", "k"):
        return ("--outcome", "y", "--group", "g")
    return ("--paired", ",".join(condition_names(design)), "--subject", "id")


def far_line(design: str, n: int) -> int:
    """File line of the constant shape's far value (header = line 1; group A comes first)."""
    return far_position(n) + 2


# the mean-based index the policy's outlier check reads, per design
OUTLIER_INDEX = {"two": "cohen_d", "paired": "d_z", "k": "eta_squared",
                 "k_rep": "generalized_eta_squared"}


def far_case_problems(doc, design: str, n: int) -> list[str]:
    """For the constant shape: the one far value is the only case whose removal changes
    anything (without it every group, or every condition, is the same constant), so it must be
    the most influential case of the outlier check's index, and the only line that check names."""
    line, index = far_line(design, n), OUTLIER_INDEX[design]
    bad = []
    summary = doc["influence"]["effects"][index]
    if summary["most_influential_row"] != line:
        bad.append(f"{index}: most influential line {summary['most_influential_row']}, not the"
                   f" far value's line {line} (jackknife SE {summary['jackknife_se']!r},"
                   f" largest change {summary['max_abs_change']!r})")
    named = sorted({e["subject"] for e in reason(doc, "outliers")["evidence"]
                    if e["subject"].startswith("line ")} - {f"line {line}"})
    if named:
        bad.append(f"the outlier check names {len(named)} other line(s): {named[:5]}")
    return bad


# ------------------------------------------------------------------ what the documents must hold


def _refuse_constant(name: str):
    raise ValueError(f"the JSON document contains the non-standard constant {name}")


def strict_loads(text: str):
    return json.loads(text, parse_constant=_refuse_constant)


def _is_p_key(key: str) -> bool:
    # 'group', 'larger_sd_group' and the index 'ps_dep' end in p but are no p-values
    k = key.lower()
    return k == "p" or k.endswith("_p") or k.startswith("p_") or "pvalue" in k or "p_value" in k


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _walk(node, path: str = ""):
    """(path, key, value, parent) for every entry of every object, depth first."""
    if isinstance(node, dict):
        for key, value in node.items():
            yield f"{path}.{key}", key, value, node
            yield from _walk(value, f"{path}.{key}")
    elif isinstance(node, list):
        for i, value in enumerate(node):
            yield from _walk(value, f"{path}[{i}]")


def p_value_problems(doc) -> list[str]:
    bad = []
    for path, key, value, _ in _walk(doc):
        if not _is_p_key(key):
            continue
        for v in (value if isinstance(value, list) else [value]):
            if v is None:
                continue
            if not _is_number(v) or not math.isfinite(v) or not 0.0 <= v <= 1.0:
                bad.append(f"{path} = {v!r}")
    return bad


def _interval_partner(key: str) -> str | None:
    if key == "lower_fence":
        return "upper_fence"
    if key.endswith("low"):
        return key[: -len("low")] + "high"
    return None


def interval_problems(doc) -> list[str]:
    """Every (low, high) pair of one object: both null, or both finite numbers with low <= high;
    and each group's five-number summary in order."""
    bad = []
    for path, key, low, parent in _walk(doc):
        partner = _interval_partner(key)
        if partner is None or partner not in parent:
            continue
        high = parent[partner]
        if low is None and high is None:
            continue
        if not (_is_number(low) and _is_number(high) and math.isfinite(low)
                and math.isfinite(high) and low <= high):
            bad.append(f"{path} = {low!r}, {partner} = {high!r}")
    for g in doc.get("groups", []) if isinstance(doc, dict) else []:
        five = [g.get(k) for k in ("min", "q1", "median", "q3", "max")]
        if all(_is_number(v) for v in five) and five != sorted(five):
            bad.append(f"groups '{g.get('label')}': min, q1, median, q3, max = {five}")
    return bad


def _leaves(node, path: str = ""):
    if isinstance(node, dict):
        for key, value in node.items():
            yield from _leaves(value, f"{path}.{key}")
    elif isinstance(node, list):
        for i, value in enumerate(node):
            yield from _leaves(value, f"{path}[{i}]")
    else:
        yield path, node


def non_finite_problems(doc) -> list[str]:
    return [f"{path} = {v!r}" for path, v in _leaves(doc)
            if isinstance(v, float) and not math.isfinite(v)]


def raw_non_finite(obj, path: str = "") -> list[str]:
    """NaN or infinite floats inside result objects, before `to_dict` turns them into null
    (which would hide them from the JSON checks). Arrays of analysed values are not searched."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return [bad for f in dataclasses.fields(obj)
                for bad in raw_non_finite(getattr(obj, f.name), f"{path}.{f.name}")]
    if isinstance(obj, dict):
        return [bad for k, v in obj.items() for bad in raw_non_finite(v, f"{path}.{k}")]
    if isinstance(obj, (list, tuple)):
        return [bad for i, v in enumerate(obj) for bad in raw_non_finite(v, f"{path}[{i}]")]
    if isinstance(obj, (float, np.floating)) and not math.isfinite(obj):
        return [f"{path} = {obj!r}"]
    return []


def unexplained_nulls(doc) -> list[str]:
    """Effects with a null estimate, and a decision's test with a null p, that give no reason."""
    bad = []
    test = doc.get("decision", {}).get("test") if isinstance(doc, dict) else None
    if isinstance(test, dict) and test.get("p") is None and not test.get("reason"):
        bad.append(f".decision.test ({test.get('name')}) has no p and no reason")
    for path, key, value, _ in _walk(doc):
        if key == "effects" and isinstance(value, dict):
            for name, e in value.items():
                if isinstance(e, dict) and "estimate" in e and e["estimate"] is None:
                    if not e.get("reason"):
                        bad.append(f"{path}.{name} is null without a reason")
    return bad


def document_problems(doc) -> dict[str, list[str]]:
    return {"p_values": p_value_problems(doc), "intervals": interval_problems(doc),
            "non_finite": non_finite_problems(doc), "nulls": unexplained_nulls(doc)}


def normality_entries(doc) -> list[dict]:
    diag = doc["diagnostics"]
    if doc["design"] == "paired":
        return [diag["differences_normality"], *diag["conditions_normality"]]
    return list(diag["normality"])


def reason(doc, rule: str) -> dict:
    return next(r for r in doc["decision"]["reasons"] if r["rule"] == rule)


def is_constant(entry: dict) -> bool:
    return any("all values are equal" in note for note in entry.get("notes", []))


def normality_test_problems(entries, label_of=lambda e: e["label"]) -> list[str]:
    """For every entry (a dict with anderson_p and dagostino_p): both below 0.05, or, for a
    constant group, both null."""
    bad = []
    for e in entries:
        pair = (e["anderson_p"], e["dagostino_p"])
        if is_constant(e):
            if pair != (None, None):
                bad.append(f"{label_of(e)}: constant, yet p = {pair}")
        elif not all(p is not None and 0.0 <= p < 0.05 for p in pair):
            bad.append(f"{label_of(e)}: Anderson-Darling p, D'Agostino p = {pair}")
    return bad


def test_the_checks_catch_a_broken_document():
    nan, inf = float("nan"), float("inf")
    broken = {
        "groups": [{"label": "A", "min": 1.0, "q1": 3.0, "median": 2.0, "q3": 4.0, "max": 5.0}],
        "tests": {"welch_t": {"p": 1.5, "p_holm": -0.1}, "sign_test": {"p": "0.2"}},
        "diagnostics": {"spread": {"levene_p": nan, "larger_sd_group": "A"}},
        "effects": {"cohen_d": {"estimate": None, "reason": None, "ci_low": 0.3, "ci_high": 0.1,
                                "intervals": [{"low": None, "high": 2.0},
                                              {"low": -inf, "high": 1.0}]},
                    "ps_dep": {"estimate": 0.6, "reason": None, "ci_low": 0.5, "ci_high": 0.7}},
        "rows": [{"cohen_d_low": 1.0, "cohen_d_high": 0.0, "df": [1.0, inf], "p_bh": None}],
    }
    assert sorted(p_value_problems(broken)) == [
        ".diagnostics.spread.levene_p = nan", ".tests.sign_test.p = '0.2'",
        ".tests.welch_t.p = 1.5", ".tests.welch_t.p_holm = -0.1"]
    assert sorted(interval_problems(broken)) == [
        ".effects.cohen_d.ci_low = 0.3, ci_high = 0.1",
        ".effects.cohen_d.intervals[0].low = None, high = 2.0",
        ".effects.cohen_d.intervals[1].low = -inf, high = 1.0",
        ".rows[0].cohen_d_low = 1.0, cohen_d_high = 0.0",
        "groups 'A': min, q1, median, q3, max = [1.0, 3.0, 2.0, 4.0, 5.0]"]
    assert sorted(non_finite_problems(broken)) == [
        ".diagnostics.spread.levene_p = nan", ".effects.cohen_d.intervals[1].low = -inf",
        ".rows[0].df[1] = inf"]
    assert unexplained_nulls(broken) == [".effects.cohen_d is null without a reason"]
    entries = [{"label": "A", "anderson_p": 0.2, "dagostino_p": 1e-9, "notes": []},
               {"label": "B", "anderson_p": None, "dagostino_p": None,
                "notes": ["all values are equal: normality tests are undefined"]},
               {"label": "C", "anderson_p": None, "dagostino_p": 0.01, "notes": []},
               {"label": "D", "anderson_p": 1e-300, "dagostino_p": 0.0, "notes": []}]
    assert [b.split(":")[0] for b in normality_test_problems(entries)] == ["A", "C"]
    assert raw_non_finite(normality("x", np.array([1.0, 2.0, 4.0, 8.0] * 10))) == []


# ------------------------------------------------------------------ the command line, two at a time

WORKERS = 2  # the machine the suite targets has two cores
ADDRESS_SPACE = 8 << 30  # bytes; four times the 2 GB the 10^6-row check allows
TIMEOUT = 900  # seconds; a guard against a hang, not a speed requirement

LAUNCH = textwrap.dedent("""
    import sys
    limit = int(sys.argv[1])
    try:
        import resource
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    except (ImportError, ValueError, OSError):
        pass  # no address-space limit on this platform
    from auditor.cli import main
    sys.exit(main(sys.argv[2:]))
""")


@dataclass(frozen=True)
class Combo:
    design: str
    shape: str
    n: int  # per group, or participants
    boot: int = 200
    decimals: int | None = None  # None: nine significant digits

    @property
    def id(self) -> str:
        places = "" if self.decimals is None else f"_{self.decimals}dp"
        return f"{self.design}-{self.shape}-{self.n}{places}"

    @property
    def file_name(self) -> str:
        places = "" if self.decimals is None else f"_{self.decimals}dp"
        return f"{self.design}_{self.shape}_{self.n}{places}.csv"


# `auditor check` combinations. Seconds of one run measured by hand on a 2-core machine (the
# module runs them two at a time beside the library checks, each then about 1.3 times slower):
# two groups at 5,000: 20-27 for the continuous shapes (the fragility search over 10,000 cases
# runs the full 200 steps), 3-5 for the discrete ones; three groups at 5,000: 4-11; lognormal
# and exponential at 4,000: 14-16, at 20,000: about 26; the count at 50,000: about 6; the
# constant shape at 4,000: 3; paired at 1,000: 9, repeated at 1,000: 11. Lognormal at 1,000,000
# per group with --boot 100 (the least the tool accepts): 94 with 3 decimals, 142 with 4, about
# 900 with nine significant digits (2 x 10^6 distinct values; the fragility search of the
# Hodges-Lehmann shift dominates), so that file records 3 decimals, as a millisecond clock
# would. Paired and repeated conditions at 50,000 participants currently stop after 5-15 with a
# MemoryError (quadratic Walsh averages), and are kept to show it. Not run: paired at 5,000
# (60-200 each) and repeated at 5,000 (about 240), the same quadratic cost; see LIBRARY_AT_5000.
CLI_COMBOS = (
    [Combo("two", "lognormal", 1_000_000, boot=100, decimals=3)]
    + [Combo("two", s, 5000) for s in SHAPES]
    + [Combo("two", s, n) for n in (4000, 20_000) for s in ("lognormal", "exponential")]
    + [Combo("k", s, 5000) for s in SHAPES]
    + [Combo("two", "zero_inflated", 50_000), Combo("two", "constant_outlier", 4000)]
    + [Combo("paired", "lognormal", 1000), Combo("k_rep", "rating_top", 1000)]
    + [Combo("paired", "exponential", 50_000), Combo("k_rep", "t2", 50_000)]
)
SKEWED = ("lognormal", "exponential")  # Anderson-Darling p must be below 1e-10 at every size
AD_FLOOR = 1e-10

SCREEN_N, SCREEN_OUTCOMES = 2000, 50


@dataclass
class Run:
    combo: Combo | None
    code: int | None
    seconds: float
    stderr: str
    doc: dict | None = None  # parsed strictly; the per-case table dropped after the checks
    problems: dict[str, list[str]] = field(default_factory=dict)
    parse_error: str | None = None


class DataFiles:
    """Each data file written once, on first request, in one folder for the module."""

    def __init__(self, folder: Path):
        self.folder = folder
        self._lock = threading.Lock()
        self._locks: dict[str, threading.Lock] = {}

    def get(self, combo: Combo) -> Path:
        with self._lock:
            lock = self._locks.setdefault(combo.file_name, threading.Lock())
        with lock:
            path = self.folder / combo.file_name
            if not path.exists():
                write_data(path, combo.design, combo.shape, combo.n, combo.decimals)
            return path


def _cli(args, timeout: float = TIMEOUT):
    start = time.perf_counter()
    try:
        proc = subprocess.run([sys.executable, "-c", LAUNCH, str(ADDRESS_SPACE), *map(str, args)],
                              capture_output=True, text=True, timeout=timeout)
    except subprocess.TimeoutExpired:
        return None, time.perf_counter() - start, f"did not finish within {timeout} s"
    return proc.returncode, time.perf_counter() - start, proc.stderr


def _checked(run: Run, doc) -> Run:
    run.problems = document_problems(doc)
    if isinstance(doc, dict) and isinstance(doc.get("influence"), dict):
        doc["influence"].pop("cases", None)  # the bulk of the document; checked above
    run.doc = doc
    return run


def _audit(files: DataFiles, combo: Combo) -> Run:
    path = files.get(combo)
    out = path.with_suffix(".json")
    code, seconds, err = _cli(["check", path, *design_options(combo.design),
                               "--boot", combo.boot, "--json", out, "--quiet"])
    run = Run(combo, code, seconds, err)
    if code == 0:
        try:
            _checked(run, strict_loads(out.read_text(encoding="utf-8")))
        except ValueError as exc:
            run.parse_error = str(exc)
        out.unlink()  # up to 35 MB; do not keep it in pytest's folders
    return run


def write_screen_file(path: Path) -> list[str]:
    rng = np.random.default_rng(20240601)
    names, columns = [], []
    for c in range(SCREEN_OUTCOMES):
        shape = SHAPES[c % len(SHAPES)]
        names.append(f"{shape}_{c:02d}")
        columns.append(np.concatenate([cells(shape, draw(shape, rng, SCREEN_N, j), None)
                                       for j in range(2)]))
    body = np.array(["A"] * SCREEN_N + ["B"] * SCREEN_N, dtype=object)
    for column in columns:
        body = body + "," + column
    path.write_text("g," + ",".join(names) + "\n" + "\n".join(body) + "\n", encoding="utf-8")
    return names


def _screen(folder: Path) -> Run:
    path = folder / "screen_50_outcomes.csv"
    names = write_screen_file(path)
    out = folder / "screen_out"
    code, seconds, err = _cli(["screen", path, "--group", "g", "--boot", 200, "--jobs", 1,
                               "--out", out, "--quiet"])
    run = Run(None, code, seconds, err)
    if code == 0:
        try:
            _checked(run, strict_loads((out / "screen.json").read_text(encoding="utf-8")))
            with open(out / "screen.csv", newline="", encoding="utf-8") as fh:
                run.doc["csv_rows"] = list(csv.DictReader(fh))
            run.doc["names"] = names
        except ValueError as exc:
            run.parse_error = str(exc)
    return run


def _report(runs: dict[str, Future], library: dict[str, float]) -> None:
    """Seconds of every run, printed at the end of the module (shown with -s)."""
    lines = ["", "large-data runs (seconds, two at a time):"]
    for name, future in runs.items():
        if future.done() and not future.cancelled() and future.exception() is None:
            run = future.result()
            lines.append(f"  {name:<40} exit {run.code}  {run.seconds:7.1f}")
    lines.append("library checks (seconds, in the test process):")
    lines += [f"  {name:<40} {seconds:7.1f}" for name, seconds in library.items()]
    print("\n".join(lines))


@pytest.fixture(scope="module")
def library_seconds():
    return {}


@pytest.fixture(scope="module")
def data_files(tmp_path_factory):
    return DataFiles(tmp_path_factory.mktemp("large_data"))


def _selected(session) -> tuple[list[Combo], bool]:
    """The command-line combinations (and whether the screen) the selected tests read."""
    module = Path(__file__).name
    ids, screen = set(), False
    for item in session.items:
        if Path(str(item.fspath)).name != module:
            continue
        if item.originalname.startswith("test_check_"):
            ids.add(item.callspec.params["combo"].id)
        elif item.originalname == "test_screen_of_fifty_skewed_outcomes":
            screen = True
    return [c for c in CLI_COMBOS if c.id in ids], screen


@pytest.fixture(scope="module", autouse=True)
def cli_runs(request, data_files, library_seconds):
    """The command-line runs the selected tests read, started when the module starts and run two
    at a time (longest first) while the library checks use this process; each test waits for
    the run it reads."""
    combos, screen = _selected(request.session)
    pool = ThreadPoolExecutor(max_workers=WORKERS)
    runs: dict[str, Future] = {c.id: pool.submit(_audit, data_files, c) for c in combos}
    if screen:
        runs["screen"] = pool.submit(_screen, data_files.folder)
    yield runs
    pool.shutdown(wait=True, cancel_futures=True)
    _report(runs, library_seconds)


def finished(cli_runs, combo_id: str) -> Run:
    """The run's result, for a check that needs its document (the exit check reports failures)."""
    run = cli_runs[combo_id].result()
    if run.code != 0 or run.doc is None:
        pytest.skip(f"no document: the run exited {run.code} (see the exit-status check)")
    return run


# ------------------------------------------------------------------ library: conditions at 5,000

# A full paired audit of 5,000 participants takes 60-200 s and three repeated conditions about
# 240 s (every bootstrap resample of the paired Hodges-Lehmann shift lists all n(n+1)/2 Walsh
# averages, and so does each step of its fragility search), too long for every shape here. The
# screen scope computes every estimate and the decision with the same checks in 0.5-5 s; the
# normality tests it leaves out are run on the values the audit analysed.
LIBRARY_AT_5000 = [Combo(d, s, 5000) for d in ("paired", "k_rep") for s in SHAPES]


def _screen_audit(path: Path, combo: Combo):
    with warnings.catch_warnings():
        if combo.shape == "constant_outlier":  # d_rm and others are undefined there, by design
            warnings.filterwarnings("ignore", category=UndefinedEffectWarning)
        return audit(path, paired_columns=condition_names(combo.design), subject="id",
                     resamples=combo.boot, scope="screen")


# Known gaps (strict xfail: fixing one turns its test red until the entry is removed).
KNOWN_GAPS = {
    "k_rep-constant_outlier-5000": "the outlier check judges every participant, not only those"
    " with an extreme cell, and names 4,999 ordinary ones instead of the far one",
}


def _known_gap(request, combo) -> None:
    if combo.id in KNOWN_GAPS:
        request.node.add_marker(pytest.mark.xfail(strict=True, reason=KNOWN_GAPS[combo.id]))


@pytest.mark.parametrize("combo", LIBRARY_AT_5000, ids=lambda c: c.id)
def test_library_screen_scope_of_conditions_at_5000(combo, data_files, library_seconds, request):
    _known_gap(request, combo)
    start = time.perf_counter()
    path = data_files.get(combo)
    result = _screen_audit(path, combo)
    doc = strict_loads(to_json(result))  # to_json itself refuses NaN
    kept = result.samples
    arrays = ([("differences", kept.differences)] if combo.design == "paired" else [])
    arrays += list(zip(kept.labels, kept.values))
    tests = [normality(label, np.asarray(x)) for label, x in arrays]
    entries = [t.to_dict() for t in tests]
    library_seconds[f"screen scope {combo.id}"] = time.perf_counter() - start

    assert not raw_non_finite(result), raw_non_finite(result)[:10]
    assert not raw_non_finite(tests), raw_non_finite(tests)[:10]
    assert doc["data"]["rows_used"] == combo.n and not doc["data"]["excluded"], doc["data"]
    for kind, bad in document_problems(doc).items():
        assert not bad, (kind, bad[:10])
    assert reason(doc, "non_normal")["fired"], reason(doc, "non_normal")
    for entry in entries:
        assert not p_value_problems(entry), entry
    assert any(not is_constant(e) for e in entries)
    assert not normality_test_problems(entries)
    if combo.shape == "constant_outlier":
        assert reason(doc, "heavy_ties")["fired"], reason(doc, "heavy_ties")
        line = far_line(combo.design, combo.n)
        extreme = [r for o in ([doc["diagnostics"]["differences_outliers"]]
                               if combo.design == "paired" else doc["diagnostics"]["outliers"])
                   for r in o["beyond_3_iqr_rows"]]
        assert extreme == [line], extreme
        assert not far_case_problems(doc, combo.design, combo.n)
    else:
        assert _is_number(doc["decision"]["test"]["p"]), doc["decision"]["test"]


# ------------------------------------------------------------------ library: 10^6 on the arrays

# The full command line at 10^6 per group is run for the lognormal alone (CLI_COMBOS); here the
# diagnostics and every estimator with its analytic interval run on the arrays directly
# (`estimate_all` with an empty focus: no bootstrap and no leave-one-out), values recorded to 4
# decimals. Seconds, generation included: two groups 5, paired 0.5-2, three groups 1.5-3.5,
# three conditions about 1.
MILLION = 1_000_000
LIBRARY_AT_MILLION = ([Combo("two", "exponential", MILLION)]
                      + [Combo(d, s, MILLION) for d in ("paired", "k_rep") for s in SHAPES]
                      + [Combo("k", s, MILLION)
                         for s in ("lognormal", "rating_top", "zero_inflated", "constant_outlier")])


def _registry(design: str, digits: int):
    return {"two": two_group_effects, "k": k_independent_effects, "k_rep": k_repeated_effects,
            "paired": lambda: paired_effects(digits)}[design]()


@pytest.mark.parametrize("combo", LIBRARY_AT_MILLION, ids=lambda c: c.id)
def test_library_estimates_and_normality_at_a_million(combo, library_seconds):
    start = time.perf_counter()
    digits = 0 if combo.shape in DISCRETE else 4
    parts = [recorded(combo.shape, x, digits)
             for x in samples_of(combo.design, combo.shape, combo.n,
                                 seed_of(combo.design, combo.shape, combo.n))]
    if combo.design == "two":
        samples = (parts[0], parts[1])
    elif combo.design == "k":
        samples = tuple(parts)
    else:
        samples = (np.column_stack(parts),)
    arrays = list(zip(LABELS, parts))
    if combo.design == "paired":
        arrays.append(("differences", np.round(parts[0] - parts[1], digits)))
    with warnings.catch_warnings():
        if combo.shape == "constant_outlier":
            warnings.filterwarnings("ignore", category=UndefinedEffectWarning)
        effects, notes, _ = estimate_all(_registry(combo.design, digits), samples, LEVEL,
                                         100, np.random.default_rng(1), focus=frozenset())
    tests = [normality(label, x) for label, x in arrays]
    entries = [t.to_dict() for t in tests]
    library_seconds[f"arrays {combo.id}"] = time.perf_counter() - start

    assert not raw_non_finite(effects), raw_non_finite(effects)[:10]
    assert not raw_non_finite(tests), raw_non_finite(tests)[:10]
    doc = strict_loads(json.dumps({"effects": {e.name: e.to_dict() for e in effects},
                                   "normality": entries}, allow_nan=False))
    for kind, bad in document_problems(doc).items():
        assert not bad, (kind, bad[:10])
    if combo.shape != "constant_outlier":
        assert all(e["estimate"] is not None for e in doc["effects"].values()), notes
    assert any(not is_constant(e) for e in entries)
    assert not normality_test_problems(entries)
    if combo.shape in SKEWED:
        assert all(e["anderson_p"] < AD_FLOOR for e in entries
                   if e["label"] != "differences"), entries


# ------------------------------------------------------------------ the command line: checks


@pytest.mark.parametrize("combo", CLI_COMBOS, ids=lambda c: c.id)
def test_check_exits_cleanly(combo, cli_runs):
    run = cli_runs[combo.id].result()
    assert "Traceback" not in run.stderr, run.stderr[-3000:]
    assert run.code == 0, (run.code, run.stderr[-3000:])
    assert run.stderr == "", run.stderr[-3000:]  # --quiet with --json FILE: nothing to say
    assert run.parse_error is None, run.parse_error


@pytest.mark.parametrize("combo", CLI_COMBOS, ids=lambda c: c.id)
def test_check_every_row_is_used(combo, cli_runs):
    doc = finished(cli_runs, combo.id).doc
    data = doc["data"]
    rows = combo.n * (1 if combo.design in ("paired", "k_rep") else CONDITIONS[combo.design])
    assert data["rows_read"] == data["rows_used"] == rows, data
    assert data["excluded"] == [] and data["blank_lines"] == 0, data
    assert [g["n"] for g in doc["groups"]] == [combo.n] * CONDITIONS[combo.design]


@pytest.mark.parametrize("combo", CLI_COMBOS, ids=lambda c: c.id)
def test_check_p_values_are_probabilities(combo, cli_runs):
    bad = finished(cli_runs, combo.id).problems["p_values"]
    assert not bad, bad[:10]


@pytest.mark.parametrize("combo", CLI_COMBOS, ids=lambda c: c.id)
def test_check_intervals_are_finite_and_ordered(combo, cli_runs):
    bad = finished(cli_runs, combo.id).problems["intervals"]
    assert not bad, bad[:10]


@pytest.mark.parametrize("combo", CLI_COMBOS, ids=lambda c: c.id)
def test_check_numbers_are_finite_and_nulls_explained(combo, cli_runs):
    run = finished(cli_runs, combo.id)
    assert not run.problems["non_finite"], run.problems["non_finite"][:10]
    assert not run.problems["nulls"], run.problems["nulls"][:10]


@pytest.mark.parametrize("combo", CLI_COMBOS, ids=lambda c: c.id)
def test_check_reports_the_departure_from_normality(combo, cli_runs):
    doc = finished(cli_runs, combo.id).doc
    assert reason(doc, "non_normal")["fired"], reason(doc, "non_normal")
    entries = normality_entries(doc)
    assert any(not is_constant(e) for e in entries)
    bad = normality_test_problems(entries)
    assert not bad, bad


def reported_p_values(doc) -> list[tuple[str, object]]:
    found = [(f"tests.{name}", t.get("p")) for name, t in doc["tests"].items()]
    found += [(f"pairwise {pc['first']} vs {pc['second']}", pc["p_holm"]) for pc in doc["pairwise"]]
    return found + [(f"decision.test {doc['decision']['test']['name']}",
                     doc["decision"]["test"]["p"])]


@pytest.mark.parametrize("combo", [c for c in CLI_COMBOS if c.shape != "constant_outlier"],
                         ids=lambda c: c.id)
def test_check_every_test_has_a_p(combo, cli_runs):
    # a null p here would be a NaN hidden by the conversion to JSON: these data have no
    # condition that leaves a test undefined
    found = reported_p_values(finished(cli_runs, combo.id).doc)
    assert all(_is_number(p) for _, p in found), found


@pytest.mark.parametrize("combo", [c for c in CLI_COMBOS
                                   if c.design == "two" and c.shape in SKEWED],
                         ids=lambda c: c.id)
def test_check_anderson_darling_p_is_far_below_any_level(combo, cli_runs):
    doc = finished(cli_runs, combo.id).doc
    groups = [e for e in doc["diagnostics"]["normality"] if e["label"] in LABELS]
    assert [e["label"] for e in groups] == ["A", "B"]
    for e in groups:
        assert e["n"] == combo.n
        assert e["anderson_a2"] is not None and math.isfinite(e["anderson_a2"]), e
        assert e["anderson_p"] is not None and 0.0 <= e["anderson_p"] < AD_FLOOR, e


@pytest.mark.parametrize("combo", [c for c in CLI_COMBOS if c.shape == "constant_outlier"],
                         ids=lambda c: c.id)
def test_check_constant_with_one_far_value(combo, cli_runs, request):
    _known_gap(request, combo)
    # Every value is 10 but one 1000 in group A. Sensible: the file reads as one heavily tied
    # value, the far case is named by its line, the constant groups' shape statistics are null
    # with a note, Glass's delta (scaled by the constant group B) is null with its reason, and
    # the far case is the one that moves the mean-based index (`far_case_problems`).
    doc = finished(cli_runs, combo.id).doc
    assert reason(doc, "heavy_ties")["fired"], reason(doc, "heavy_ties")
    outliers = doc["diagnostics"]["outliers"]
    assert far_line(combo.design, combo.n) in outliers[0]["beyond_3_iqr_rows"], outliers[0]
    assert all(o["beyond_3_iqr_rows"] == [] for o in outliers[1:])
    entries = normality_entries(doc)
    assert [is_constant(e) for e in entries[:CONDITIONS[combo.design]]] == (
        [False] + [True] * (CONDITIONS[combo.design] - 1))
    if combo.design == "two":
        glass = doc["effects"]["glass_delta"]
        assert glass["estimate"] is None and "constant" in glass["reason"], glass
    assert not far_case_problems(doc, combo.design, combo.n)


# ------------------------------------------------------------------ the screen


def test_screen_of_fifty_skewed_outcomes(cli_runs):
    run = cli_runs["screen"].result()
    assert "Traceback" not in run.stderr, run.stderr[-3000:]
    assert run.code == 0, (run.code, run.stderr[-3000:])
    assert run.stderr == "" and run.parse_error is None, (run.stderr[-3000:], run.parse_error)
    for kind, bad in run.problems.items():
        assert not bad, (kind, bad[:10])
    doc = run.doc
    rows = doc["rows"]
    assert [r["outcome"] for r in rows] == doc["names"]
    assert [r["outcome"] for r in doc["csv_rows"]] == doc["names"]
    assert doc["skipped"] == []
    for row in rows:
        assert row["status"] == "audited", row
        assert row["n"] == f"A: {SCREEN_N}; B: {SCREEN_N}", row
        assert row["excluded_rows"] == 0, row
        assert row["non_normal"] is True, row
        assert row["p"] is not None and row["p_holm"] >= row["p"], row
        shape = row["outcome"].rsplit("_", 1)[0]
        if shape in DISCRETE:
            assert row["heavy_ties"] is True, row
