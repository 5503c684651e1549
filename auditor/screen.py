"""Screen a whole data set: every numeric outcome audited against one grouping, one summary row
per outcome.

Outcomes are audited in batches of columns (`batches`). A text file is streamed again for each
batch, keeping that batch's columns only, so no process holds more than a batch of the data
whatever the number of outcomes (the file must not change meanwhile: its size and modification
time are checked at every read). A workbook (slow to parse) and a data frame are held whole by the
calling process, and each batch is handed its own columns only.
Each outcome is audited in the pipeline's screen scope (everything its row shows, computed as the
full audit computes it; `--reports` runs the full audit) under its own seed, derived from the
user's seed and the outcome's name (SHA-256 of both), so adding or removing a column changes no
other row, and a parallel run (`jobs` > 1, one process per job, batches handed out in turn) gives
exactly the rows of a serial one. A column that is mostly text is skipped with the reason; an
outcome that cannot be audited (too few values, one group empty, ...) is a row with its reason,
never a crash.

Across the outcomes that were audited, the p-values of each outcome's primary test are adjusted by
Holm's step-down method (family-wise error) and by Benjamini-Hochberg (false discovery rate).
Rows are written to disk as they arrive (a JSON-lines file beside the outputs), and only the sort
keys and p-values stay in memory, so memory does not grow with the number of outcomes.
"""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import html
import io
import json
import math
import os
import warnings
from collections.abc import Callable, Iterator
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from auditor.errors import AuditError, DesignError, InputFileError
from auditor.load import MISSING_MARKERS, Table, parse_numbers, read_table
from auditor.decide import quoted_interval
from auditor.pipeline import SCREEN_COMPANIONS
from auditor.policy import INDICES

MULTIPLE_OUTCOMES_NOTE = (
    "Screening many outcomes inflates false positives: with 20 independent outcomes and no real"
    " difference, about one is expected below p = 0.05. Read the Holm (family-wise) or"
    " Benjamini-Hochberg (false discovery rate) adjusted p-values, and treat the screen as a guide"
    " to the planned analysis, not as its result."
)

SORT_KEYS = ("column", "p", "p_holm", "estimate", "fragility", "outcome")

FIELDS = (
    "outcome", "status", "reason", "design", "n", "excluded_rows", "non_normal", "unequal_spread",
    "heavy_ties", "outliers", "small_sample", "branch", "primary", "estimate", "ci_low", "ci_high",
    "magnitude", "cohen_d", "cohen_d_low", "cohen_d_high", "prob_superiority",
    "prob_superiority_low", "prob_superiority_high", "normal_theory_gap", "fragility",
    "most_influential_row", "size_verdict", "test", "statistic", "df", "p", "p_holm", "p_bh",
    "seed",
)



def outcome_seed(seed: int, outcome: str) -> int:
    """The seed of one outcome: the first 8 bytes of SHA-256('seed:outcome'), below 2^63."""
    digest = hashlib.sha256(f"{int(seed)}:{outcome}".encode("utf-8")).digest()
    return int.from_bytes(digest[:8], "little") % (2**63)


def _numeric_share(cells: tuple[str, ...]) -> tuple[float, str | None]:
    """Share of the non-empty, non-missing cells that are numbers, and the first one that is not."""
    values, reasons = parse_numbers(cells)
    filled = [i for i, c in enumerate(cells) if c.strip() and c.strip().lower() not in MISSING_MARKERS]
    if not filled:
        return 0.0, None
    bad = [i for i in filled if reasons[i] is not None]
    example = None if not bad else cells[bad[0]].strip()
    return 1.0 - len(bad) / len(filled), example


def candidate_columns(header, group: str, subject: str | None, outcomes, exclude):
    """(columns to look at, columns skipped already, with reasons): the named outcomes, or every
    column but the grouping, the subject and the excluded ones (listed as skipped)."""
    taken = {group} | ({subject} if subject else set())
    excluded = set(exclude or ())
    skipped = []
    if outcomes:
        candidates = [c for c in outcomes if c not in excluded]
    else:
        candidates = [c for c in header if c not in taken and c not in excluded]
        skipped += [(c, "excluded with --exclude") for c in header if c in excluded]
    looked_at = []
    for column in candidates:
        if column in taken:
            skipped.append((column, "it is the grouping or subject column"))
        else:
            looked_at.append(column)
    return looked_at, skipped


def not_numeric(cells) -> str | None:
    """Why a column is not an outcome (fewer than half of its filled cells are numbers), or
    None when it is one."""
    share, example = _numeric_share(tuple(cells))
    if share >= 0.5:
        return None
    why = ("no values" if example is None and share == 0.0
           else f"mostly text (e.g. '{example[:30]}'), {share:.0%} numbers")
    return f"not numeric: {why}"


# ------------------------------------------------------------------ one outcome


def _fired(result) -> dict[str, bool]:
    names = ("non_normal", "unequal_spread", "heavy_ties", "outliers", "small_sample")
    fired = {r.rule for r in result.decision.reasons if r.fired}
    return {n: n in fired for n in names}


def summary_row(result, seed: int, policy=None) -> dict:
    """The screen's row for one audited outcome (see FIELDS); intervals are those `policy` (the
    one the audit ran under; None for the default) quotes."""
    d = result.decision
    effects = {e.name: e for e in result.effects}
    primary = effects[d.primary]
    mean_name, rank_name = SCREEN_COMPANIONS[result.design]
    row = {f: None for f in FIELDS}
    row.update(outcome=result.outcome, status="audited", design=result.design,
               n="; ".join(f"{g.label}: {g.n}" for g in result.groups),
               excluded_rows=len(result.data.excluded), branch=d.branch, primary=d.primary,
               estimate=primary.estimate, ci_low=d.interval.get("low"),
               ci_high=d.interval.get("high"), magnitude=d.magnitude.get(d.primary),
               test=d.test["name"], statistic=d.test.get("statistic"),
               df=json.dumps(d.test.get("df")) if isinstance(d.test.get("df"), list)
               else d.test.get("df"), p=d.test.get("p"), seed=seed, **_fired(result))
    method = "analytic" if policy is None else policy.value("intervals", "method")
    for key, name in (("cohen_d", mean_name), ("prob_superiority", rank_name)):
        e = effects.get(name)
        if e is not None:  # the interval the policy quotes, as for the primary index
            quoted = quoted_interval(e, method)
            row[key], row[f"{key}_low"], row[f"{key}_high"] = (e.estimate, quoted["low"],
                                                               quoted["high"])
    check = getattr(result.diagnostics, "normal_theory", None)
    if check is not None:
        row["normal_theory_gap"] = check.gap
    size = (result.equivalence or {}).get(d.primary)
    if size is not None:  # the question of size at the policy's margin (margins.py)
        row["size_verdict"] = size.get("verdict") or "not available"
    if result.influence is not None:
        summary = next((e for e in result.influence.effects if e.effect == d.primary), None)
        if summary is not None:
            row["fragility"] = summary.fragility_null.count
            row["most_influential_row"] = summary.most_influential_row
    return row


def _failed_row(outcome: str, reason: str, seed: int, status: str = "not audited") -> dict:
    row = {f: None for f in FIELDS}
    row.update(outcome=outcome, status=status, reason=reason, seed=seed)
    return row


@dataclasses.dataclass(frozen=True)
class _Job:
    path: str | None  # the file each batch reads its columns from (None: batches carry theirs)
    stamp: tuple | None  # the file's size and modification time when the screen began
    group: str
    groups: tuple[str, ...] | None
    subject: str | None
    policy: object
    seed: int
    resamples: int | None
    level: float | None
    report_folder: str | None
    report_names: dict | None = None  # outcome -> its own folder name (never shared)
    margins: tuple[tuple[str, float], ...] = ()  # --margin INDEX=VALUE, over the policy's


_WORKER_JOB: _Job | None = None


def _init_worker(job: _Job) -> None:  # runs once in each worker process
    global _WORKER_JOB
    _WORKER_JOB = job


def _batch_in_worker(task) -> list:
    names, table = task
    return audit_batch(_WORKER_JOB, names, table)


def file_stamp(path) -> tuple[int, int]:
    """(size, modification time in ns) of a file: a screen that reads the file again for each
    batch checks that it is still the file it began with."""
    info = os.stat(path)
    return info.st_size, info.st_mtime_ns


def _read_batch(job: _Job, names: list[str]) -> Table:
    """The batch's columns (and the grouping and subject) read from the job's file, which must
    not have changed since the screen began."""
    def unchanged() -> None:
        try:
            same = file_stamp(job.path) == job.stamp
        except OSError:
            same = False
        if not same:
            raise InputFileError(f"{job.path}: the file changed (or went away) during the"
                                 " screen; run the screen again on the finished file")

    fixed = [job.group] + ([job.subject] if job.subject else [])
    unchanged()
    table = read_table(job.path, fixed + [n for n in names if n not in fixed])
    unchanged()
    return table


def audit_batch(job: _Job, names: list[str], table: Table | None = None,
                each: Callable[[str], None] | None = None) -> list[tuple[str, object]]:
    """Audit a batch of columns of `table` (None: read them from the job's file): per column
    ("row", row) or ("skipped", reason). `each(column)` is called after every column."""
    table = _read_batch(job, names) if table is None else table
    out = []
    for name in names:
        why = not_numeric(table.columns[name])
        out.append(("skipped", why) if why else ("row", audit_one(job, name, table)))
        if each is not None:
            each(name)
    return out


def audit_one(job: _Job, outcome: str, table: Table) -> dict:
    """Audit one outcome of `table`; a data problem becomes a row with its reason."""
    from auditor.pipeline import audit


    seed = outcome_seed(job.seed, outcome)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # every condition is reported in the result
            result = audit(table, outcome=outcome, group=job.group,
                           groups=list(job.groups) if job.groups else None, subject=job.subject,
                           policy=job.policy, seed=seed, resamples=job.resamples, level=job.level,
                           scope="full" if job.report_folder else "screen",
                           margins=dict(job.margins))
    except AuditError as exc:
        return _failed_row(outcome, str(exc), seed)
    except Exception as exc:  # noqa: BLE001 - one outcome's failure must not end the screen
        return _failed_row(outcome, f"internal error ({type(exc).__name__}: {exc}); please"
                           " report it", seed, status="failed")
    row = summary_row(result, seed, job.policy)
    if job.report_folder:
        from auditor.report import write_report

        folder = Path(job.report_folder) / job.report_names[outcome]
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                write_report(result, folder)
            row["report"] = f"{folder.name}/report.html"
        except AuditError:
            raise  # an unwritable folder stops the screen
        except Exception as exc:  # noqa: BLE001 - one outcome's figure must not end the screen
            row["reason"] = f"report not written: {type(exc).__name__}: {exc}"
    return row


def _report_names(outcomes) -> dict:
    """A distinct folder name per outcome: names that map to the same folder get -2, -3, ..."""
    from auditor.report import folder_name

    names, taken = {}, set()
    for outcome in outcomes:
        base = folder_name(outcome)
        name, k = base, 1
        while name.lower() in taken:
            k += 1
            name = f"{base}-{k}"
        taken.add(name.lower())
        names[outcome] = name
    return names


# ------------------------------------------------------------------ the whole screen


BATCH_OUTCOMES = 50  # columns audited per batch ...
BATCH_CELLS = 2_000_000  # ... and at most about this many cells of text per batch


def batches(columns: list[str], rows: int, jobs: int) -> list[list[str]]:
    """`columns` in consecutive batches: at most BATCH_OUTCOMES columns or BATCH_CELLS cells, and
    with several jobs at least four batches per job when there are enough columns."""
    size = min(BATCH_OUTCOMES, max(1, BATCH_CELLS // max(rows, 1)))
    if jobs > 1:
        size = min(size, max(1, math.ceil(len(columns) / (4 * jobs))))
    return [columns[i:i + size] for i in range(0, len(columns), size)]


ENGINES = ("local", "dask")
DASK_MISSING = ("--engine dask needs Dask, which is not installed: pip install 'auditor[dask]'"
                " (or pip install 'dask[distributed]')")


def _results(job: _Job, tasks: list[tuple[list[str], Table | None]], jobs: int,
             each: Callable[[str], None] | None = None) -> Iterator[list]:
    """The results of each batch, in order, serially (calling `each` after every column) or from
    `jobs` worker processes (the local engine; `dask_results` is the Dask one). A task is
    (columns, their table or None to read them from the file)."""
    if jobs <= 1 or len(tasks) <= 1:
        for names, table in tasks:
            yield audit_batch(job, names, table, each)
        return
    import multiprocessing

    context = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=jobs, mp_context=context, initializer=_init_worker,
                             initargs=(job,)) as pool:
        yield from pool.map(_batch_in_worker, tasks, chunksize=1)


def dask_client(jobs: int, scheduler: str | None):
    """(client, cluster): a client of the scheduler at `scheduler`, or of a new
    dask.distributed.LocalCluster with `jobs` single-threaded worker processes (cluster None when
    the scheduler is someone else's). A DesignError in one line when Dask is not installed or
    the scheduler cannot be reached."""
    try:
        from dask.distributed import Client, LocalCluster
    except ImportError:
        raise DesignError(DASK_MISSING) from None
    if scheduler:
        try:
            return Client(scheduler, timeout="10s"), None
        except (OSError, TimeoutError) as exc:
            raise DesignError(f"--scheduler {scheduler}: no Dask scheduler answered ({exc})")
    cluster = LocalCluster(n_workers=jobs, threads_per_worker=1, processes=True,
                           dashboard_address=None)
    return Client(cluster), cluster


def _batch_on_dask(job: _Job, names: list[str], table: Table | None) -> list:
    return audit_batch(job, names, table)


def close_dask(handle) -> None:
    """Close the client of a `dask_client` pair, and the cluster when it was started here."""
    client, cluster = handle
    client.close()
    if cluster is not None:
        cluster.close()


def dask_results(job: _Job, tasks: list[tuple[list[str], Table | None]],
                 handle) -> Iterator[list]:
    """The results of each batch, in order, from a Dask cluster: the job (policy, seed, ...) is
    sent to every worker once, one task per batch, results gathered in submission order as they
    finish. A task that holds no table makes the worker read the file itself, from the same
    path: the workers must see the file where this process does (shared storage); one that
    cannot stops the screen with the reader's message. Dask resubmits the batches of a worker
    lost mid-run (its own bookkeeping). On an error or Ctrl-C the pending tasks are cancelled;
    the caller, which opened `handle` with `dask_client`, closes it (`close_dask`)."""
    client = handle[0]
    futures = []
    try:
        shared = client.scatter(job, broadcast=True)
        futures = [client.submit(_batch_on_dask, shared, names, table, pure=False)
                   for names, table in tasks]
        for future in futures:
            yield future.result()
    finally:
        if futures:
            client.cancel(futures)


def _part(table: Table, fixed: list[str], names: list[str]) -> Table:
    """The table cut down to the fixed columns and a batch's columns."""
    keep = dict.fromkeys(fixed + names)
    return dataclasses.replace(table, columns={c: table.columns[c] for c in keep})


def holm(pvalues: list[float | None]) -> list[float | None]:
    """Holm's step-down adjusted p-values (Holm 1979); None stays None."""
    idx = [i for i, p in enumerate(pvalues) if p is not None]
    m = len(idx)
    out: list[float | None] = [None] * len(pvalues)
    running = 0.0
    for rank, i in enumerate(sorted(idx, key=lambda i: pvalues[i])):
        running = max(running, min(1.0, (m - rank) * pvalues[i]))
        out[i] = running
    return out


def benjamini_hochberg(pvalues: list[float | None]) -> list[float | None]:
    """Benjamini-Hochberg adjusted p-values (Benjamini & Hochberg 1995); None stays None."""
    idx = [i for i, p in enumerate(pvalues) if p is not None]
    m = len(idx)
    out: list[float | None] = [None] * len(pvalues)
    running = 1.0
    for rank, i in reversed(list(enumerate(sorted(idx, key=lambda i: pvalues[i]), start=1))):
        running = min(running, pvalues[i] * m / rank)
        out[i] = min(1.0, running)
    return out


@dataclasses.dataclass(frozen=True)
class ScreenFiles:
    csv: Path
    json: Path
    html: Path
    rows: int
    skipped: tuple[tuple[str, str], ...]


def _sort_value(row: dict, key: str, position: int):
    if key == "column":
        return (0, position)
    value = row.get(key)
    if key == "estimate" and value is not None:
        value = -abs(value - (0.5 if row.get("primary") in ("prob_superiority", "ps_dep")
                              else 0.0))
    if key == "outcome":
        return (0, str(value))
    if key == "fragility" and not value:  # 0: the interval already holds the null; None: no count
        return (1, 0)
    return (1, 0) if value is None else (0, value)


def run_screen(data, *, group: str, groups=None, subject: str | None = None, outcomes=None,
               exclude=None, policy=None, seed: int | None = None, resamples: int | None = None,
               level: float | None = None, jobs: int = 1, out: Path | None = None,
               sort: str = "column", reports: bool = False,
               progress: Callable[[int, int, str], None] | None = None,
               margins: dict[str, float] | None = None, engine: str = "local",
               scheduler: str | None = None):
    """Screen every outcome; write screen.csv, screen.json and screen.html into `out` when given.
    Returns (rows as a list of dicts in the chosen order, skipped columns). `engine` "local"
    runs the batches here or in `jobs` processes; "dask" on a Dask cluster (`dask_results`):
    the scheduler at `scheduler`, or a LocalCluster of `jobs` workers. Every engine gives the
    same rows."""
    from auditor.pipeline import table_from_frame
    from auditor.policy import Policy, load_policy

    if sort not in SORT_KEYS:
        raise DesignError(f"--sort {sort}: choose one of {', '.join(SORT_KEYS)}")
    if jobs < 1:
        raise DesignError(f"--jobs {jobs}: use 1 or more")
    if engine not in ENGINES:
        raise DesignError(f"--engine {engine}: use one of {', '.join(ENGINES)}")
    if scheduler and engine != "dask":
        raise DesignError("--scheduler names a Dask scheduler: give --engine dask too")
    if engine == "dask":
        try:
            import dask.distributed  # noqa: F401 - checked before any file is read
        except ImportError:
            raise DesignError(DASK_MISSING) from None
    from auditor.design import _choose_levels, _levels
    from auditor.pipeline import _check_settings

    policy = policy if isinstance(policy, Policy) else load_policy(policy)
    seed = policy.value("bootstrap", "seed") if seed is None else seed
    _check_settings(policy.value("intervals", "level") if level is None else level,
                    policy.value("bootstrap", "resamples") if resamples is None else resamples,
                    seed)
    seed = int(seed)
    fixed = [group] + ([subject] if subject else [])
    table = path = stamp = None
    if isinstance(data, (str, os.PathLike)):
        if Path(data).suffix.lower() in {".xlsx", ".xlsm"}:  # a workbook is read once, whole
            header = read_table(data, fixed).header
            wanted = list(outcomes) if outcomes else [c for c in header if c not in fixed]
            _check_columns(header, wanted, str(data))
            first = table = read_table(data, fixed + wanted)
        else:  # a text file is read again for each batch of columns, streamed
            stamp = file_stamp(data) if Path(data).is_file() else None
            first = read_table(data, fixed)
            path = first.path
            wanted = list(outcomes) if outcomes else [c for c in first.header if c not in fixed]
            _check_columns(first.header, wanted, first.path)
    else:
        data = data.rename(columns=str)  # the table holds column names as text
        wanted = list(outcomes) if outcomes else [c for c in data.columns if c not in fixed]
        first = table = table_from_frame(data, fixed + wanted)
    header, name = first.header, first.path
    unknown = [c for c in (exclude or ()) if c not in header]
    if unknown:
        raise DesignError(f"--exclude names no column '{unknown[0]}' of {name}")
    if subject is None:  # the levels are checked once, not once per outcome
        _choose_levels(_levels([x.strip() for x in first.columns[group]]),
                       list(groups) if groups else None, name, group, "--groups")
    looked_at, skipped = candidate_columns(header, group, subject, outcomes, exclude)
    report_folder = None
    if reports:
        if out is None:
            raise DesignError("--reports needs --out: the reports are written beside the screen")
        report_folder = str(Path(out) / "reports")
    known = {name for table in INDICES.values() for name in table}
    for name in sorted(margins or {}):
        if name not in known:
            raise DesignError(f"--margin {name}: not an index; use one of"
                              f" {', '.join(sorted(known))}")
    job = _Job(path, stamp, group, tuple(groups) if groups else None, subject, policy, seed,
               resamples, level, report_folder, _report_names(looked_at) if reports else None,
               tuple(sorted((margins or {}).items())))
    # a Dask scheduler is reached before any output is written, so that one that cannot be
    # reached leaves nothing behind
    cluster = dask_client(jobs, scheduler) if engine == "dask" else None
    spool = io.StringIO() if out is None else None
    if out is not None:
        Path(out).mkdir(parents=True, exist_ok=True)
        spool_path = Path(out) / "screen.rows.jsonl"
        spool = spool_path.open("w+", encoding="utf-8")
    keys, pvalues, offsets = [], [], []
    parts = batches(looked_at, first.n_rows, jobs)
    tasks = [(names, None if table is None else _part(table, fixed, names)) for names in parts]
    del table, first  # the batches hold what is needed
    serial = engine == "local" and (jobs <= 1 or len(tasks) <= 1)
    done = 0

    def tick(column: str) -> None:
        nonlocal done
        done += 1
        if progress is not None:
            progress(done, len(looked_at), column)

    stream = None
    try:
        stream = (dask_results(job, tasks, cluster) if cluster is not None
                  else _results(job, tasks, jobs, tick if serial else None))
        for names, results in zip(parts, stream):
            for column, (kind, found) in zip(names, results):
                if not serial:
                    tick(column)
                if kind == "skipped":
                    skipped.append((column, found))
                    continue
                i = len(offsets)
                offsets.append(spool.tell())
                spool.write(json.dumps(found, allow_nan=False, default=_plain_number) + "\n")
                keys.append(_sort_value(found, sort if sort not in ("p_holm",) else "p", i))
                pvalues.append(found.get("p"))
        # the excluded columns first, then the others in the order of the columns
        position, excluded = {c: i for i, c in enumerate(wanted)}, set(exclude or ())
        skipped.sort(key=lambda s: (s[0] not in excluded, position.get(s[0], -1)))
        adjusted = (holm(pvalues), benjamini_hochberg(pvalues))
        order = sorted(range(len(offsets)), key=lambda i: (keys[i], i))

        def ordered_rows() -> Iterator[dict]:
            for i in order:
                spool.seek(offsets[i])
                row = json.loads(spool.readline())
                row["p_holm"], row["p_bh"] = adjusted[0][i], adjusted[1][i]
                yield row

        if out is None:
            return list(ordered_rows()), skipped
        files = _write_outputs(Path(out), ordered_rows, skipped, policy, seed, sort)
        return files, skipped
    finally:
        if cluster is not None:
            if stream is not None:
                stream.close()  # cancels what is pending while the client is still open
            close_dask(cluster)
        spool.close()
        if out is not None:
            try:
                spool_path.unlink()
            except OSError:
                pass


def _check_columns(header: tuple[str, ...], names: list[str], path: str) -> None:
    """Every name is exactly one column of the header, else the loader's one-line error."""
    from collections import Counter

    from auditor.load import column_position

    counts = Counter(header)
    for name in names:
        if counts.get(name, 0) != 1:
            column_position(header, name, Path(path))


def _plain_number(value):
    if isinstance(value, (np.floating, np.integer)):
        return value.item()
    raise TypeError(f"not JSON: {value!r}")


def _clean(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _write_outputs(out: Path, ordered_rows, skipped, policy, seed, sort) -> ScreenFiles:
    paths = out / "screen.csv", out / "screen.json", out / "screen.html"
    count = 0
    try:
        with paths[0].open("w", encoding="utf-8", newline="") as f_csv, \
                paths[1].open("w", encoding="utf-8") as f_json, \
                paths[2].open("w", encoding="utf-8") as f_html:
            writer = csv.writer(f_csv)
            fields = list(FIELDS) + ["report"]
            writer.writerow(fields)
            f_json.write('{\n  "policy": ' + json.dumps(policy.stamp()) + ',\n  "seed": '
                         + json.dumps(seed) + ',\n  "sorted_by": ' + json.dumps(sort)
                         + ',\n  "note": ' + json.dumps(MULTIPLE_OUTCOMES_NOTE)
                         + ',\n  "skipped": ' + json.dumps([{"column": c, "reason": r}
                                                            for c, r in skipped])
                         + ',\n  "rows": [')
            f_html.write(_html_head(policy, seed, skipped))
            for row in ordered_rows():
                row = {k: _clean(v) for k, v in row.items()}
                writer.writerow(["" if row.get(f) is None else row.get(f) for f in fields])
                f_json.write(("\n    " if count == 0 else ",\n    ")
                             + json.dumps(row, allow_nan=False))
                f_html.write(_html_row(row))
                count += 1
            f_json.write("\n  ]\n}\n")
            f_html.write(_HTML_TAIL)
    except OSError as exc:
        raise AuditError(f"{out}: cannot write the screen ({exc.strerror or exc})") from None
    return ScreenFiles(*paths, count, tuple(skipped))


_HTML_COLUMNS = (("outcome", "outcome"), ("status", "status"), ("n", "n"),
                 ("excluded_rows", "excluded"), ("flags", "flags"), ("primary", "primary index"),
                 ("estimate", "estimate"), ("interval", "interval"), ("magnitude", "label"),
                 ("cohen_d", "mean-based"), ("prob_superiority", "rank-based"),
                 ("normal_theory_gap", "normal-theory gap"), ("fragility", "fragility"),
                 ("most_influential_row", "most influential line"),
                 ("size_verdict", "at the margin"), ("test", "test"),
                 ("p", "p"), ("p_holm", "p (Holm)"), ("p_bh", "p (BH)"))


def _fmt(x, digits=3) -> str:
    if x is None:
        return ""
    if isinstance(x, float):
        return f"{x:.{digits}g}" if abs(x) < 1e-3 and x != 0 else f"{x:.{digits}f}"
    return str(x)


def _html_head(policy, seed, skipped) -> str:
    e = html.escape
    skipped_html = "".join(f"<li>{e(c)}: {e(r)}</li>" for c, r in skipped)
    head = "".join(f'<th data-col="{i}" tabindex="0">{e(t)}</th>'
                   for i, (_, t) in enumerate(_HTML_COLUMNS))
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<title>Screen of all outcomes</title><style>" + _CSS + "</style></head><body>"
            f"<h1>Screen of all outcomes</h1><p>Policy '{e(policy.name)}' {e(policy.version)}"
            f" (SHA-256 {e(policy.sha256[:16])}), seed {e(str(seed))}. Click a column heading to"
            " sort.</p>"
            f"<p class=\"note\">{e(MULTIPLE_OUTCOMES_NOTE)}</p>"
            + (f"<p>Skipped columns:</p><ul>{skipped_html}</ul>" if skipped else "")
            + f"<table id=\"screen\"><thead><tr>{head}</tr></thead><tbody>\n")


def _html_row(row: dict) -> str:
    e = html.escape
    flags = ", ".join(k.replace("_", " ") for k in ("non_normal", "unequal_spread", "heavy_ties",
                                                    "outliers", "small_sample") if row.get(k))
    cells = []
    for key, _ in _HTML_COLUMNS:
        if key == "flags":
            text, sort = flags, flags
        elif key == "interval":
            text = (f"[{_fmt(row.get('ci_low'))}, {_fmt(row.get('ci_high'))}]"
                    if row.get("ci_low") is not None else "")
            sort = row.get("ci_low")
        elif key == "outcome" and row.get("report"):
            text = None
            link = e(row["report"], quote=True)
            cells.append(f'<td data-sort="{e(row["outcome"], quote=True)}"><a href="reports/'
                         f'{link}">{e(row["outcome"])}</a></td>')
            continue
        elif key == "status" and row.get("reason"):
            text, sort = f"{row['status']}: {row['reason']}", row["status"]
        else:
            text, sort = _fmt(row.get(key)), row.get(key)
        sort_attr = "" if sort is None else e(str(sort), quote=True)
        cells.append(f'<td data-sort="{sort_attr}">{e(text)}</td>')
    return "<tr>" + "".join(cells) + "</tr>\n"


_CSS = ("body{font-family:'DejaVu Sans',Arial,sans-serif;font-size:10pt;margin:12px}"
        "table{border-collapse:collapse}th,td{border-bottom:1px solid #ccc;padding:3px 6px;"
        "text-align:left;white-space:nowrap}th{background:#eef3f6;cursor:pointer}"
        ".note{background:#fdf6e3;border:1px solid #b58900;padding:6px}")

_HTML_TAIL = """</tbody></table>
<script>
(function () {
  var table = document.getElementById("screen");
  var body = table.tBodies[0];
  var direction = {};
  function key(cell) {
    var raw = cell.getAttribute("data-sort");
    if (raw === null || raw === "") return [1, ""];
    var number = Number(raw);
    return isNaN(number) ? [0, raw.toLowerCase()] : [0, number];
  }
  function sortBy(col) {
    var rows = Array.prototype.slice.call(body.rows);
    var sign = direction[col] = -(direction[col] || -1);
    rows.sort(function (a, b) {
      var x = key(a.cells[col]), y = key(b.cells[col]);
      if (x[0] !== y[0]) return x[0] - y[0];
      if (x[1] < y[1]) return -sign;
      if (x[1] > y[1]) return sign;
      return 0;
    });
    rows.forEach(function (r) { body.appendChild(r); });
  }
  Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th) {
    var col = Number(th.getAttribute("data-col"));
    th.addEventListener("click", function () { sortBy(col); });
    th.addEventListener("keydown", function (e) { if (e.key === "Enter") sortBy(col); });
  });
})();
</script>
</body></html>
"""


def screen(frame, *, group: str, groups=None, subject: str | None = None, outcomes=None,
           exclude=None, policy=None, seed: int | None = None, resamples: int | None = None,
           level: float | None = None, jobs: int = 1, sort: str = "column"):
    """Screen every numeric column of a pandas DataFrame (or a file path) against `group`;
    returns a pandas DataFrame with one row per outcome (columns: FIELDS). Skipped columns are
    listed in `result.attrs["skipped"]`."""
    import pandas as pd

    rows, skipped = run_screen(frame, group=group, groups=groups, subject=subject,
                               outcomes=outcomes, exclude=exclude, policy=policy, seed=seed,
                               resamples=resamples, level=level, jobs=jobs, sort=sort)
    table = pd.DataFrame(rows, columns=[f for f in FIELDS])
    table.attrs["skipped"] = list(skipped)
    table.attrs["note"] = MULTIPLE_OUTCOMES_NOTE
    return table
