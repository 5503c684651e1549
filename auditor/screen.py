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
from auditor.sources import Source
from auditor.pipeline import SCREEN_COMPANIONS
from auditor.adjust import benjamini_hochberg, holm
from auditor.formatting import compact as _fmt
from auditor.catalogue import AT_ONE_HALF
from auditor.policy import INDICES
from auditor.results import SCHEMA_VERSION

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


_WORKER_JOBS: tuple[_Job, ...] = ()


def _init_worker(jobs: tuple[_Job, ...]) -> None:  # runs once in each worker process
    global _WORKER_JOBS
    _WORKER_JOBS = jobs


def _batch_in_worker(task) -> list:
    k, names, table = task
    return audit_batch(_WORKER_JOBS[k], names, table)


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


def _report_names(outcomes, prefix: str | None = None, taken: set | None = None) -> dict:
    """A distinct folder name per outcome (prefixed with `prefix`, a file's stem, in a screen of
    many files, where `taken` holds the names given to the files before): names that map to the
    same folder get -2, -3, ..."""
    from auditor.report import folder_name

    names, taken = {}, set() if taken is None else taken
    for outcome in outcomes:
        base = folder_name(outcome if prefix is None else f"{prefix}-{outcome}")
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


def _results(jobs_of: tuple[_Job, ...], tasks: list[tuple[int, list[str], Table | None]],
             jobs: int, each: Callable[[str], None] | None = None) -> Iterator[tuple[int, list]]:
    """(task number, results) of each batch: serially and in order (calling `each` after every
    column), or from `jobs` worker processes as they finish (the local engine; `dask_results` is
    the Dask one). A task is (source number, columns, their table or None to read them from the
    source's file)."""
    if jobs <= 1 or len(tasks) <= 1:
        for t, (k, names, table) in enumerate(tasks):
            yield t, audit_batch(jobs_of[k], names, table, each)
        return
    import multiprocessing
    from concurrent.futures import as_completed

    context = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=jobs, mp_context=context, initializer=_init_worker,
                             initargs=(jobs_of,)) as pool:
        futures = {pool.submit(_batch_in_worker, task): t for t, task in enumerate(tasks)}
        try:
            for future in as_completed(futures):
                yield futures[future], future.result()
        finally:
            for future in futures:
                future.cancel()


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


WORKER_CANNOT_READ = ("a Dask worker ({worker}) cannot read this file ({why}); with --engine dask"
                      " the workers read the data files themselves, from the path given here,"
                      " so the files must be on shared storage every worker sees at that path")


def _batch_on_dask(jobs_of: tuple[_Job, ...], k: int, names: list[str],
                   table: Table | None) -> list:
    job = jobs_of[k]
    if table is None and job.path is not None and not os.access(job.path, os.R_OK):
        import socket

        why = "no such file" if not os.path.exists(job.path) else "permission denied"
        raise InputFileError(f"{job.path}: " + WORKER_CANNOT_READ.format(
            worker=socket.gethostname(), why=why))
    return audit_batch(job, names, table)


def close_dask(handle) -> None:
    """Close the client of a `dask_client` pair, and the cluster when it was started here."""
    client, cluster = handle
    client.close()
    if cluster is not None:
        cluster.close()


def dask_results(jobs_of: tuple[_Job, ...], tasks: list[tuple[int, list[str], Table | None]],
                 handle) -> Iterator[tuple[int, list]]:
    """(task number, results) of each batch from a Dask cluster, as the batches finish: the
    jobs (policy, seed, ...) are sent to every worker once, one task per batch. A task that
    holds no table makes the worker read the file itself, from the same path: the workers must
    see the file where this process does (shared storage); one that cannot stops the screen
    with a message naming the file and the worker. Dask resubmits the batches of a worker lost
    mid-run (its own bookkeeping). On an error or Ctrl-C the pending tasks are cancelled; the
    caller, which opened `handle` with `dask_client`, closes it (`close_dask`)."""
    from dask.distributed import as_completed

    client = handle[0]
    futures = []
    try:
        shared = client.scatter(jobs_of, broadcast=True)
        futures = [client.submit(_batch_on_dask, shared, k, names, table, pure=False)
                   for k, names, table in tasks]
        number = {future.key: t for t, future in enumerate(futures)}
        for future in as_completed(futures):
            yield number[future.key], future.result()
    finally:
        if futures:
            client.cancel(futures)


def _part(table: Table, fixed: list[str], names: list[str]) -> Table:
    """The table cut down to the fixed columns and a batch's columns."""
    keep = dict.fromkeys(fixed + names)
    return dataclasses.replace(table, columns={c: table.columns[c] for c in keep})


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
        value = -abs(value - (0.5 if row.get("primary") in AT_ONE_HALF else 0.0))
    if key == "outcome":
        return (0, str(value))
    if key == "fragility" and not value:  # 0: the interval already holds the null; None: no count
        return (1, 0)
    return (1, 0) if value is None else (0, value)


@dataclasses.dataclass(frozen=True)
class _Plan:
    """What the screen of one data source does: its job, its columns and its batches."""

    label: str | None  # the file column's value (None: a single-source screen has no file column)
    job: _Job
    wanted: list[str]  # the columns named or found, in file order
    excluded: frozenset
    looked_at: list[str]  # the candidate outcomes
    skipped: list  # (column, reason), known before any outcome is audited
    parts: list[list[str]]  # the batches of columns
    tables: list  # per batch: its own table, or None when the workers read the file
    notes: tuple[str, ...] = ()  # the design guard's notes of the overrides given


def _settings(policy, seed, resamples, level, jobs, sort, engine, scheduler):
    """The checked settings shared by every source: (policy, seed)."""
    from auditor.pipeline import check_settings
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
    policy = policy if isinstance(policy, Policy) else load_policy(policy)
    seed = policy.value("bootstrap", "seed") if seed is None else seed
    check_settings(policy.value("intervals", "level") if level is None else level,
                    policy.value("bootstrap", "resamples") if resamples is None else resamples,
                    seed)
    return policy, int(seed)


def _check_margins(margins) -> tuple[tuple[str, float], ...]:
    known = {name for table in INDICES.values() for name in table}
    for name in sorted(margins or {}):
        if name not in known:
            raise DesignError(f"--margin {name}: not an index; use one of"
                              f" {', '.join(sorted(known))}")
    return tuple(sorted((margins or {}).items()))


def _plan(data, label, *, group, groups, subject, outcomes, exclude, common: dict,
          split_for: int) -> _Plan:
    """Read the header of one source (a path or a data frame), check the options against it and
    cut its outcomes into batches (`batches`, split for `split_for` jobs). `common` holds the
    settings of every source (policy, seed, resamples, level, margins, report_folder)."""
    from auditor.design import choose_levels, ordered_levels
    from auditor.pipeline import table_from_frame

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
        choose_levels(ordered_levels([x.strip() for x in first.columns[group]]),
                       list(groups) if groups else None, name, group, "--groups")
    looked_at, skipped = candidate_columns(header, group, subject, outcomes, exclude)
    notes = _guard(data, first, fixed, group, groups, subject, common["overrides"])
    folder = common["report_folder"]
    names = None
    if folder is not None:
        names = _report_names(looked_at, None if label is None else Path(label).stem,
                              common["report_taken"])
    job = _Job(path, stamp, group, tuple(groups) if groups else None, subject, common["policy"],
               common["seed"], common["resamples"], common["level"], folder, names,
               common["margins"])
    parts = batches(looked_at, first.n_rows, split_for)
    tables = [None if table is None else _part(table, fixed, names_) for names_ in parts]
    return _Plan(label, job, wanted, frozenset(exclude or ()), looked_at, skipped, parts, tables,
                 notes)


def _guard(data, first: Table, fixed: list[str], group: str, groups, subject,
           overrides) -> tuple[str, ...]:
    """The design guard (`guard.py`) of one source, once, on its columns beside the grouping and
    the subject (`guard.columns_to_look_at`): a DesignError naming the file, or the override
    notes."""
    from auditor.design import choose_levels, ordered_levels
    from auditor.guard import check_independent, check_repeated, columns_to_look_at
    from auditor.pipeline import table_from_frame

    named = list(fixed)  # the outcomes are looked at too: a text column among them is no outcome
    others = columns_to_look_at(first.header, named, first.n_rows)
    if not isinstance(data, (str, os.PathLike)):
        table = table_from_frame(data, fixed + others)
    elif all(c in first.columns for c in others):  # a workbook, read whole already
        table = first
    else:  # one read of a text file for the check, of at most a batch's cells
        table = read_table(data, fixed + others) if others else first
    if subject is not None:
        return check_repeated(table, group, subject, named,
                              list(groups) if groups else None, overrides)
    levels = choose_levels(ordered_levels([x.strip() for x in table.columns[group]]),
                            list(groups) if groups else None, table.path, group, "--groups")
    return check_independent(table, named, group, levels, overrides)


def run_screen(data, *, group: str, groups=None, subject: str | None = None, outcomes=None,
               exclude=None, policy=None, seed: int | None = None, resamples: int | None = None,
               level: float | None = None, jobs: int = 1, out: Path | None = None,
               sort: str = "column", reports: bool = False,
               progress: Callable[[int, int, str], None] | None = None,
               margins: dict[str, float] | None = None, engine: str = "local",
               scheduler: str | None = None, overrides=()):
    """Screen every outcome of one data file or data frame; write screen.csv, screen.json and
    screen.html into `out` when given. Returns (rows as a list of dicts in the chosen order,
    skipped columns as (column, reason)) without `out`, else (ScreenFiles, skipped). `engine`
    "local" runs the batches here or in `jobs` processes; "dask" on a Dask cluster
    (`dask_results`): the scheduler at `scheduler`, or a LocalCluster of `jobs` workers. Every
    engine gives the same rows. `run_screens` screens many files into one table."""
    policy, seed = _settings(policy, seed, resamples, level, jobs, sort, engine, scheduler)
    _refuse_writing_over([data], out)
    common = _common(policy, seed, resamples, level, margins, reports, out, overrides)
    plan = _plan(data, None, group=group, groups=groups, subject=subject, outcomes=outcomes,
                 exclude=exclude, common=common, split_for=jobs)
    return _execute([plan], policy=policy, seed=seed, jobs=jobs, out=out, sort=sort,
                    progress=progress, engine=engine, scheduler=scheduler)


def run_screens(sources: list[Source], *, policy=None, seed: int | None = None, resamples: int | None = None,
                level: float | None = None, jobs: int = 1, out: Path | None = None,
                sort: str = "column", reports: bool = False,
                progress: Callable[[int, int, str], None] | None = None,
                margins: dict[str, float] | None = None, engine: str = "local",
                scheduler: str | None = None, overrides=()):
    """Screen many data files (`sources.Source`s, from `sources.sources_from_paths` or
    `sources.read_manifest`)
    into one table: every row carries its file, and the Holm and Benjamini-Hochberg adjustments
    are given across all rows (p_holm, p_bh) and within each file (p_holm_file, p_bh_file). A
    row's seed is its outcome's, as in a single-file screen, so a file screened alone or among
    others gives the same rows. Every file is checked (header, columns, groups) before any
    outcome is audited. Returns as `run_screen`, skipped columns as (file, column, reason)."""
    sources = list(sources)
    if not sources:
        raise DesignError("no data file to screen: name files, a folder, a pattern or --manifest")
    policy, seed = _settings(policy, seed, resamples, level, jobs, sort, engine, scheduler)
    _refuse_writing_over([s.path for s in sources], out)
    common = _common(policy, seed, resamples, level, margins, reports, out, overrides)
    seen: dict[str, str] = {}
    for source in sources:
        key = os.path.normcase(os.path.realpath(source.path))
        if key in seen:
            raise DesignError(f"{source.label}: listed twice (also as {seen[key]}); screen each"
                              " file once (a second grouping of the same file needs its own run)")
        seen[key] = source.label
    plans = [_plan(s.path, s.label, group=s.group, groups=s.groups, subject=s.subject,
                   outcomes=s.outcomes, exclude=s.exclude, common=common, split_for=1)
             for s in sources]
    return _execute(plans, policy=policy, seed=seed, jobs=jobs, out=out, sort=sort,
                    progress=progress, engine=engine, scheduler=scheduler)


OUTPUT_NAMES = ("screen.csv", "screen.json", "screen.html", "screen.rows.jsonl")


def _refuse_writing_over(paths, out) -> None:
    """A data file that is one of the screen's own output files would be overwritten (and, in a
    folder screened again, screened as data): refuse before any work."""
    if out is None:
        return
    outputs = {os.path.normcase(os.path.realpath(Path(out) / name)): name for name in OUTPUT_NAMES}
    for path in paths:
        if isinstance(path, (str, os.PathLike)):
            if os.path.normcase(os.path.realpath(path)) in outputs:
                raise DesignError(f"{path}: is one of the screen's own output files in {out};"
                                  " choose another --out")


def _common(policy, seed, resamples, level, margins, reports, out, overrides=()) -> dict:
    from auditor.pipeline import check_overrides

    report_folder = None
    if reports:
        if out is None:
            raise DesignError("--reports needs --out: the reports are written beside the screen")
        report_folder = str(Path(out) / "reports")
    return {"policy": policy, "seed": seed, "resamples": resamples, "level": level,
            "margins": _check_margins(margins), "report_folder": report_folder,
            "report_taken": set(),  # report folder names given so far, across the files
            "overrides": check_overrides(overrides)}


def _execute(plans: list[_Plan], *, policy, seed, jobs, out, sort, progress, engine, scheduler):
    """Run every plan's batches on the engine and spool the rows; then `_adjust` the p-values
    and `_write_outputs` (or return the rows). The stages: `_plan` (per file), this run,
    `_adjust`, `_write_outputs`."""
    many = plans[0].label is not None
    jobs_of = tuple(plan.job for plan in plans)
    tasks = [(k, names, table) for k, plan in enumerate(plans)
             for names, table in zip(plan.parts, plan.tables)]
    total = sum(len(plan.looked_at) for plan in plans)
    # a Dask scheduler is reached before any output is written, so that one that cannot be
    # reached leaves nothing behind
    cluster = dask_client(jobs, scheduler) if engine == "dask" else None
    spool = io.StringIO() if out is None else None
    if out is not None:
        Path(out).mkdir(parents=True, exist_ok=True)
        spool_path = Path(out) / "screen.rows.jsonl"
        spool = spool_path.open("w+", encoding="utf-8")
    arrived = []  # per spooled row: (plan, column position, offset, sort key, p)
    skipped = [[] for _ in plans]  # per plan: (column, reason) found while auditing
    serial = engine == "local" and (jobs <= 1 or len(tasks) <= 1)
    done = 0

    def tick(column: str) -> None:
        nonlocal done
        done += 1
        if progress is not None:
            progress(done, total, column)

    stream = None
    try:
        stream = (dask_results(jobs_of, tasks, cluster) if cluster is not None
                  else _results(jobs_of, tasks, jobs, tick if serial else None))
        for t, results in stream:
            k, names = tasks[t][0], tasks[t][1]
            plan = plans[k]
            first = plan.looked_at.index(names[0]) if names else 0
            for j, (column, (kind, found)) in enumerate(zip(names, results)):
                if not serial:
                    tick(column)
                if kind == "skipped":
                    skipped[k].append((column, found))
                    continue
                if many:
                    found = {"file": plan.label, **found}
                offset = spool.tell()
                spool.write(json.dumps(found, allow_nan=False, default=_plain_number) + "\n")
                arrived.append((k, first + j, offset, found))
        # every row in (file, column) order, whatever order the batches came back in
        arrived.sort(key=lambda r: (r[0], r[1]))
        position = [(k, j) for k, j, _, _ in arrived]
        offsets = [offset for _, _, offset, _ in arrived]
        pvalues = [found.get("p") for *_, found in arrived]
        key_name = sort if sort != "p_holm" else "p"
        keys = [_sort_value(found, key_name, i) for i, (*_, found) in enumerate(arrived)]
        del arrived
        listed = []
        for k, plan in enumerate(plans):  # the excluded columns first, then in column order
            place = {c: i for i, c in enumerate(plan.wanted)}
            found = list(plan.skipped) + skipped[k]
            found.sort(key=lambda s: (s[0] not in plan.excluded, place.get(s[0], -1)))
            listed += [(plan.label, c, r) if many else (c, r) for c, r in found]
        adjusted = _adjust(pvalues, [k for k, _ in position] if many else None, len(plans))
        if sort == "outcome" and many:
            keys = [(key, position[i][0]) for i, key in enumerate(keys)]
        order = sorted(range(len(offsets)), key=lambda i: (keys[i], i))

        def ordered_rows() -> Iterator[dict]:
            for i in order:
                spool.seek(offsets[i])
                row = json.loads(spool.readline())
                row["p_holm"], row["p_bh"] = adjusted[0][i], adjusted[1][i]
                if many:
                    row["p_holm_file"], row["p_bh_file"] = adjusted[2][i], adjusted[3][i]
                yield row

        if out is None:
            return list(ordered_rows()), listed
        notes = [note for plan in plans for note in plan.notes]
        files = _write_outputs(Path(out), ordered_rows, listed, policy, seed, sort,
                               [p.label for p in plans] if many else None, notes)
        return files, listed
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


def _adjust(pvalues: list, files: list[int] | None, count: int) -> list[list]:
    """The adjusted p-values of the rows (in (file, column) order): Holm and Benjamini-Hochberg
    across all rows, and, when `files` gives each row's file (a screen of many), within each of
    the `count` files too: [holm, bh] or [holm, bh, holm within file, bh within file]."""
    adjusted = [holm(pvalues), benjamini_hochberg(pvalues)]
    if files is None:
        return adjusted
    within = [[None] * len(pvalues), [None] * len(pvalues)]
    rows_of = [[] for _ in range(count)]
    for i, k in enumerate(files):
        rows_of[k].append(i)
    for members in rows_of:
        for a, method in enumerate((holm, benjamini_hochberg)):
            for i, value in zip(members, method([pvalues[i] for i in members])):
                within[a][i] = value
    return adjusted + within


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


MANY_FIELDS = ("file",) + FIELDS + ("p_holm_file", "p_bh_file")  # a screen of many files


def _write_outputs(out: Path, ordered_rows, skipped, policy, seed, sort,
                   labels: list[str] | None = None, notes=()) -> ScreenFiles:
    """Write screen.csv, screen.json and screen.html from the rows; `labels` (the files, in a
    screen of many) adds the file column and the within-file adjustments."""
    paths = out / "screen.csv", out / "screen.json", out / "screen.html"
    count = 0
    many = labels is not None
    if many:
        skipped_doc = [{"file": f, "column": c, "reason": r} for f, c, r in skipped]
        files_doc = ',\n  "files": ' + json.dumps(labels)
    else:
        skipped_doc = [{"column": c, "reason": r} for c, r in skipped]
        files_doc = ""
    try:
        with paths[0].open("w", encoding="utf-8", newline="") as f_csv, \
                paths[1].open("w", encoding="utf-8") as f_json, \
                paths[2].open("w", encoding="utf-8") as f_html:
            writer = csv.writer(f_csv)
            fields = list(MANY_FIELDS if many else FIELDS) + ["report"]
            writer.writerow(fields)
            f_json.write('{\n  "schema_version": ' + json.dumps(SCHEMA_VERSION)
                         + ',\n  "policy": ' + json.dumps(policy.stamp()) + ',\n  "seed": '
                         + json.dumps(seed) + ',\n  "sorted_by": ' + json.dumps(sort)
                         + ',\n  "note": ' + json.dumps(MULTIPLE_OUTCOMES_NOTE) + files_doc
                         + ',\n  "skipped": ' + json.dumps(skipped_doc)
                         + (',\n  "design_notes": ' + json.dumps(list(notes)) if notes else "")
                         + ',\n  "rows": [')
            f_html.write(_html_head(policy, seed, skipped, labels, notes))
            for row in ordered_rows():
                row = {k: _clean(v) for k, v in row.items()}
                writer.writerow(["" if row.get(f) is None else row.get(f) for f in fields])
                f_json.write(("\n    " if count == 0 else ",\n    ")
                             + json.dumps(row, allow_nan=False))
                f_html.write(_html_row(row, many))
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


_MANY_COLUMNS = ((("file", "file"),) + _HTML_COLUMNS
                 + (("p_holm_file", "p (Holm, file)"), ("p_bh_file", "p (BH, file)")))


def _html_head(policy, seed, skipped, labels=None, notes=()) -> str:
    e = html.escape
    many = labels is not None
    skipped_html = "".join(
        f"<li>{e(s[0])}: {e(s[1])}: {e(s[2])}</li>" if many else f"<li>{e(s[0])}: {e(s[1])}</li>"
        for s in skipped)
    columns = _MANY_COLUMNS if many else _HTML_COLUMNS
    head = "".join(f'<th data-col="{i}" tabindex="0">{e(t)}</th>'
                   for i, (_, t) in enumerate(columns))
    title = (f"Screen of all outcomes of {len(labels)} files" if many
             else "Screen of all outcomes")
    adjusted = (" Holm and BH adjust across every row of every file; the '(file)' columns"
                " adjust within each file." if many else "")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{e(title)}</title><style>" + _CSS + "</style></head><body>"
            f"<h1>{e(title)}</h1><p>Policy '{e(policy.name)}' {e(policy.version)}"
            f" (SHA-256 {e(policy.sha256[:16])}), seed {e(str(seed))}. Click a column heading to"
            f" sort.{e(adjusted)}</p>"
            f"<p class=\"note\">{e(MULTIPLE_OUTCOMES_NOTE)}</p>"
            + "".join(f"<p class=\"note\">{e(note)}</p>" for note in notes)
            + (f"<p>Skipped columns:</p><ul>{skipped_html}</ul>" if skipped else "")
            + f"<table id=\"screen\"><thead><tr>{head}</tr></thead><tbody>\n")


def _html_row(row: dict, many: bool = False) -> str:
    e = html.escape
    flags = ", ".join(k.replace("_", " ") for k in ("non_normal", "unequal_spread", "heavy_ties",
                                                    "outliers", "small_sample") if row.get(k))
    cells = []
    for key, _ in (_MANY_COLUMNS if many else _HTML_COLUMNS):
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
    listed in `result.attrs["skipped"]`. A list of paths (files, folders or patterns, as on the
    command line) screens them all into one table with a file column (columns: MANY_FIELDS;
    skipped columns as (file, column, reason))."""
    import pandas as pd

    from auditor.sources import sources_from_paths

    settings = dict(policy=policy, seed=seed, resamples=resamples, level=level, jobs=jobs,
                    sort=sort)
    if isinstance(frame, (list, tuple)):
        sources = sources_from_paths([str(p) for p in frame], group=group, groups=groups,
                                     subject=subject, outcomes=outcomes, exclude=exclude)
        rows, skipped = run_screens(sources, **settings)
        fields = MANY_FIELDS
    else:
        rows, skipped = run_screen(frame, group=group, groups=groups, subject=subject,
                                   outcomes=outcomes, exclude=exclude, **settings)
        fields = FIELDS
    table = pd.DataFrame(rows, columns=list(fields))
    table.attrs["skipped"] = list(skipped)
    table.attrs["note"] = MULTIPLE_OUTCOMES_NOTE
    return table
