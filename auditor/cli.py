"""Command line: `auditor check`, `auditor screen`, `auditor policy`, `auditor schema`,
`auditor demo`. The only module that prints or writes files.

Exit codes: 0 ok; 1 a problem with the data, file or options (one line on stderr); 2 usage;
3 unexpected internal error (traceback only with --debug); 130 interrupted.
"""

from __future__ import annotations

import argparse
import sys
import traceback
import warnings
from pathlib import Path

from auditor import __version__
from auditor.schema import SCHEMA_NAMES

EXIT_OK, EXIT_DATA, EXIT_USAGE, EXIT_INTERNAL, EXIT_INTERRUPTED = 0, 1, 2, 3, 130


class _Parser(argparse.ArgumentParser):
    """argparse that raises instead of exiting, so main() can return the usage code."""

    def error(self, message):  # noqa: D401 - argparse API
        self.print_usage(sys.stderr)
        print(f"{self.prog}: error: {message}", file=sys.stderr)
        raise _UsageError(message)


class _UsageError(Exception):
    pass


def _design_overrides(parser) -> None:
    """The design guard's overrides (auditor.guard), on `check` and `screen`."""
    parser.add_argument("--independent-rows", action="store_true",
                        help="the rows are independent observations although an id column"
                             " repeats (the design check stops otherwise)")
    parser.add_argument("--one-factor", action="store_true",
                        help="compare the levels of --group pooled over a second factor crossed"
                             " with it (factorial or mixed design; the check stops otherwise)")


def _overrides(args) -> tuple[str, ...]:
    return tuple(name for name, flag in (("independent_rows", args.independent_rows),
                                         ("one_factor", args.one_factor)) if flag)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="auditor",
        description="Screen a comparison of groups and report parametric and rank-based effect"
                    " sizes side by side, with intervals.",
    )
    parser.add_argument("--version", action="version", version=f"auditor {__version__}")
    parser.add_argument("--debug", action="store_true",
                        help="show the full traceback if an internal error occurs")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    check = sub.add_parser(
        "check", help="audit one outcome compared between groups or conditions",
        description="Audit one outcome compared between groups or conditions: diagnostics,"
                    " effect sizes with analytic and bootstrap intervals, data accounting."
                    " The design follows from the options: --outcome and --group give two or"
                    " more independent groups; adding --subject (long file) or using --paired"
                    " (wide file) gives paired or repeated conditions.",
        epilog="Examples:\n"
               "  auditor check trial.csv --outcome minutes --group arm --groups coached,usual\n"
               "  auditor check trial.csv --paired before,after --subject id\n"
               "  auditor check visits.csv --outcome score --group visit --subject id --json -",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    check.add_argument("file", help="data file: .csv, .tsv (delimiter detected) or .xlsx")
    check.add_argument("--outcome", metavar="COLUMN",
                       help="column holding the numeric outcome (long format)")
    check.add_argument("--group", metavar="COLUMN",
                       help="column holding the group or condition labels (long format)")
    check.add_argument("--groups", metavar="A,B[,C...]",
                       help="the levels to compare, in order; with two, A is compared with B"
                            " (default: every level, in order of first appearance)")
    check.add_argument("--subject", metavar="COLUMN",
                       help="participant id column: makes the design paired (two conditions) or"
                            " repeated (three or more); in a wide file it names the rows")
    check.add_argument("--paired", metavar="COL_A,COL_B[,...]",
                       help="wide file: the condition columns, one row per participant")
    check.add_argument("--cluster", metavar="COLUMN",
                       help="two independent groups: the column saying which cluster (class,"
                            " clinic, coach) each case belongs to; adds the intraclass"
                            " correlation, the design effect and cluster-bootstrap intervals")
    check.add_argument("--level", type=float, default=None,
                       help="confidence level of every interval (default: the policy's, 0.95)")
    check.add_argument("--reference", metavar="LABEL",
                       help="group whose SD scales Glass's delta (default: B)")
    check.add_argument("--boot", type=int, default=None, metavar="N",
                       help="bootstrap resamples (default: the policy's, 2000)")
    check.add_argument("--seed", type=int, default=None,
                       help="seed of the random generator (default: the policy's fixed seed,"
                            " reported in the output)")
    check.add_argument("--policy", metavar="PATH",
                       help="reporting policy (TOML) that decides which index and test to report"
                            " (default: the built-in policy; see 'auditor policy init')")
    check.add_argument("--json", metavar="PATH",
                       help="write the JSON document to PATH ('-' for standard output)")
    check.add_argument("--table", metavar="PATH",
                       help="write the effect sizes as a CSV table, one row per index and"
                            " comparison (estimate, the quoted interval and its method, the"
                            " bootstrap interval, label), to PATH ('-' for standard output)")
    check.add_argument("--out", metavar="DIR", nargs="?", const="",
                       help="write report.html, report.md, audit.json and the figures into DIR"
                            " (--out alone: reports/<outcome>/)")
    check.add_argument("--margin", action="append", metavar="INDEX=VALUE",
                       help="smallest effect size of interest of an index, on its own scale"
                            " (repeatable; overrides the policy's [margins]), e.g."
                            " --margin cohen_d=0.3 --margin mean_difference=2.5: two one-sided"
                            " tests and a verdict at that margin")
    check.add_argument("--coverage-check", action="store_true", default=None,
                       help="estimate how often the primary index's interval covers its true"
                            " value in populations shaped like these data (smoothed bootstrap;"
                            " a few seconds; default: the policy's intervals.coverage_check)")
    _design_overrides(check)
    check.add_argument("--quiet", action="store_true", help="do not print the summary")
    check.add_argument("--debug", action="store_true", default=argparse.SUPPRESS,
                       help="show the full traceback if an internal error occurs")
    check.set_defaults(handler=_check)

    pol = sub.add_parser(
        "policy", help="write, explain or compare reporting policies",
        description="A reporting policy (TOML) sets the screening thresholds and, for each design,"
                    " which effect size and test are reported when the assumptions hold and when"
                    " each check fails. Reports name the policy and its SHA-256.",
        epilog="Examples:\n"
               "  auditor policy init lab_policy.toml\n"
               "  auditor policy show lab_policy.toml\n"
               "  auditor policy diff lab_policy.toml other_lab.toml",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    psub = pol.add_subparsers(dest="policy_command", metavar="ACTION", parser_class=_Parser)
    init = psub.add_parser("init", help="write the built-in policy, with comments, to a file",
                           description="Write the built-in policy, commented line by line.")
    init.add_argument("path", nargs="?", default="auditor_policy.toml",
                      help="file to write (default auditor_policy.toml; never overwritten)")
    init.set_defaults(handler=_policy_init)
    show = psub.add_parser("show", help="explain a policy in sentences",
                           description="Explain a policy (default: the built-in one) in sentences.")
    show.add_argument("path", nargs="?", help="policy file (default: the built-in policy)")
    show.set_defaults(handler=_policy_show)
    diff = psub.add_parser("diff", help="list what two policies set differently",
                           description="List every setting two policies set differently.")
    diff.add_argument("first", help="first policy file ('default' for the built-in one)")
    diff.add_argument("second", help="second policy file ('default' for the built-in one)")
    diff.set_defaults(handler=_policy_diff)
    pol.set_defaults(handler=lambda args: (pol.print_help(sys.stderr), EXIT_USAGE)[1])

    scr = sub.add_parser(
        "screen", help="audit every numeric outcome of a file against one grouping",
        description="Audit every numeric column (or the named ones) against one grouping, in the"
                    " design the options give, and write one summary row per outcome to"
                    " screen.csv, screen.json and screen.html (sortable). Each outcome's seed is"
                    " derived from --seed and its name, so runs with any --jobs agree exactly."
                    " Holm and Benjamini-Hochberg adjusted p-values of each primary test are"
                    " given across outcomes.",
        epilog="Examples:\n"
               "  auditor screen study.csv --group arm --out reports/screen\n"
               "  auditor screen study.csv --group arm --groups coached,usual --jobs 2 --sort p\n"
               "  auditor screen visits.csv --group visit --subject id --exclude age,site\n"
               "  auditor screen waves/ --group arm --jobs 2 --out reports/waves\n"
               "  auditor screen --manifest sites.csv --engine dask --jobs 2\n"
               "\n"
               "Several files give one table with a file column: Holm and BH across every row"
               " (p_holm, p_bh)\nand within each file (p_holm_file, p_bh_file); each row's seed"
               " is the one a screen of its file\nalone would give it.",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    scr.add_argument("file", nargs="*",
                     help="data file (.csv, .tsv or .xlsx); several files, a folder (its data"
                          " files) or a quoted pattern such as 'waves/*.csv' screen them all into"
                          " one table with a file column")
    scr.add_argument("--manifest", metavar="CSV",
                     help="a CSV listing the files to screen, one per line: a 'file' column and"
                          " optional group, groups, subject, outcomes and exclude columns (empty"
                          " cells take the options given here); paths relative to the manifest")
    scr.add_argument("--group", metavar="COLUMN",
                     help="column holding the group or condition labels (required, unless every"
                          " line of --manifest names its own)")
    scr.add_argument("--groups", metavar="A,B[,C...]", help="the levels to compare, in order")
    scr.add_argument("--subject", metavar="COLUMN",
                     help="participant id column: paired or repeated conditions (long file)")
    scr.add_argument("--outcomes", metavar="A,B,...",
                     help="outcome columns to audit (default: every numeric column)")
    scr.add_argument("--exclude", metavar="A,B,...", help="columns to leave out")
    scr.add_argument("--policy", metavar="PATH", help="reporting policy (default: built-in)")
    scr.add_argument("--jobs", type=int, default=1, metavar="N",
                     help="worker processes (default 1; results are identical for any N)")
    scr.add_argument("--engine", default="local", choices=("local", "dask"),
                     help="where the outcomes are audited: local (this machine's processes, the"
                          " default) or dask (a Dask cluster; needs pip install 'auditor[dask]')."
                          " Results are identical")
    scr.add_argument("--scheduler", metavar="ADDRESS",
                     help="with --engine dask: the address of a running Dask scheduler (e.g."
                          " tcp://10.0.0.5:8786); without it a local cluster of --jobs workers"
                          " is started and stopped. The workers read the data file from the same"
                          " path, so it must be on storage they share")
    scr.add_argument("--sort", default="column", metavar="KEY",
                     help="row order: column (file order), p, p_holm, estimate (largest first),"
                          " fragility (most fragile first) or outcome (name)")
    scr.add_argument("--boot", type=int, default=None, metavar="N",
                     help="bootstrap resamples per outcome (default: the policy's)")
    scr.add_argument("--seed", type=int, default=None, help="seed (default: the policy's)")
    scr.add_argument("--level", type=float, default=None, help="confidence level")
    scr.add_argument("--margin", action="append", metavar="INDEX=VALUE",
                     help="smallest effect size of interest of an index (repeatable; overrides"
                          " the policy's [margins]): the row's size_verdict column")
    scr.add_argument("--out", metavar="DIR", default="reports/screen",
                     help="folder for screen.csv, screen.json, screen.html (default"
                          " reports/screen)")
    scr.add_argument("--reports", action="store_true",
                     help="also write a full report per outcome, linked from screen.html")
    _design_overrides(scr)
    scr.add_argument("--quiet", action="store_true", help="no progress and no summary")
    scr.add_argument("--debug", action="store_true", default=argparse.SUPPRESS,
                     help="show the full traceback if an internal error occurs")
    scr.set_defaults(handler=_screen)

    sch = sub.add_parser(
        "schema", help="print the JSON Schema of a document the tool writes",
        description="Print the JSON Schema (draft 2020-12) of a JSON document the tool writes:"
                    " 'audit' for the document of 'auditor check --json' and audit.json in a"
                    " report folder, 'screen' for screen.json. Every field is described in it;"
                    " docs/output-contract.md lists the changes between versions.",
        epilog="Examples:\n"
               "  auditor schema audit > audit.schema.json\n"
               "  auditor schema screen",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    sch.add_argument("name", choices=SCHEMA_NAMES,
                     help="which document: audit or screen")
    sch.set_defaults(handler=_schema)

    demo = sub.add_parser("demo", help="audit the bundled demo data",
                          description="Audit the bundled demo data set and write the results.")
    demo.add_argument("--out", metavar="DIR", default="reports/demo",
                      help="folder for the demo's outputs (default reports/demo)")
    demo.set_defaults(handler=_demo)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except _UsageError:
        return EXIT_USAGE
    except SystemExit as exc:  # --help and --version
        return int(exc.code or 0)
    if args.command is None:
        parser.print_help(sys.stderr)
        return EXIT_USAGE
    if args.command == "check" and not args.paired:
        missing = [opt for opt, value in (("--outcome", args.outcome), ("--group", args.group))
                   if not value]
        if missing:
            try:
                parser.error(f"check needs {' and '.join(missing)} (or --paired COL_A,COL_B for a"
                             " wide file)")
            except _UsageError:
                return EXIT_USAGE
    if args.command == "screen":
        problem = None
        if args.manifest and args.file:
            problem = "screen takes the files either as names or in --manifest, not both"
        elif not args.manifest and not args.file:
            problem = ("screen needs a data file (or several, a folder, a quoted pattern, or"
                       " --manifest CSV)")
        elif not args.manifest and not args.group:
            problem = "screen needs --group (or a --manifest whose lines name their group)"
        if problem:
            try:
                parser.error(problem)
            except _UsageError:
                return EXIT_USAGE
    debug = getattr(args, "debug", False)
    try:
        from auditor.errors import AuditError
    except Exception:  # pragma: no cover
        raise
    try:
        return args.handler(args)
    except AuditError as exc:
        message = str(exc).replace("\r", "\\r").replace("\n", "\\n")  # always one line
        print(f"auditor: error: {message}", file=sys.stderr)
        return EXIT_DATA
    except KeyboardInterrupt:
        print("auditor: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        return EXIT_OK
    except Exception as exc:  # noqa: BLE001 - the one place unexpected errors are caught
        if debug:
            traceback.print_exc()
        print(f"auditor: internal error ({type(exc).__name__}: {exc}). This is a bug; please"
              " report it with the command you ran" + ("" if debug else
              " (add --debug to see the traceback)") + ".", file=sys.stderr)
        return EXIT_INTERNAL


def _progress_printer():
    if not sys.stderr.isatty():
        return None

    def show(done: int, total: int) -> None:
        print(f"\rbootstrap {done}/{total}", end="" if done < total else "\n",
              file=sys.stderr, flush=True)

    return show


def _write_text(path: Path, text: str) -> None:
    from auditor.errors import AuditError

    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise AuditError(f"{path}: cannot write ({exc.strerror or exc})") from None


def _check(args) -> int:
    from auditor.errors import AuditError
    from auditor.margins import parse_margin_options
    from auditor.pipeline import audit
    from auditor.policy import load_policy
    from auditor.render import terminal_summary, to_json

    policy = load_policy(args.policy)
    _refuse_overwriting_the_data(args)  # before the audit, not after minutes of work
    try:
        margins = parse_margin_options(args.margin)
    except ValueError as err:
        raise AuditError(str(err)) from None

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # every condition is reported in the result itself
        result = audit(
            args.file, outcome=args.outcome, group=args.group, groups=args.groups,
            subject=args.subject, paired_columns=args.paired,
            level=args.level, resamples=args.boot, seed=args.seed,
            reference=args.reference, progress=_progress_printer(), policy=policy,
            coverage_check=args.coverage_check, margins=margins, overrides=_overrides(args),
            cluster=args.cluster,
        )
    document = to_json(result)
    if args.out is not None:
        from auditor.report import folder_name, write_report

        folder = Path(args.out) if args.out else Path("reports") / folder_name(result.outcome)
        files = write_report(result, folder)
        print(f"report written to {files.html}", file=sys.stderr)
    table = None
    if args.table:
        from auditor.tidy import effect_rows, table_csv

        table = table_csv(effect_rows(result))
        if args.table != "-":
            _write_text(Path(args.table), table)
    if args.json and args.json != "-":
        _write_text(Path(args.json), document)
    for text in (document if args.json == "-" else None, table if args.table == "-" else None):
        if text is not None:
            sys.stdout.write(text)
    if not args.quiet:
        stdout_taken = "-" in (args.json, args.table)
        (sys.stderr if stdout_taken else sys.stdout).write(terminal_summary(result))
    return EXIT_OK


def _refuse_overwriting_the_data(args) -> None:
    """An output path that is the data file itself would destroy the data: refuse it."""
    from auditor.errors import AuditError

    data = Path(args.file)
    if args.json == "-" and args.table == "-":
        raise AuditError("--json - and --table - both ask for standard output; send one of them"
                         " to a file")
    targets = [Path(p) for p in (args.json, args.table) if p not in (None, "-")]
    if args.out:
        targets.append(Path(args.out))
    for target in targets:
        try:
            same = target.exists() and data.exists() and target.resolve() == data.resolve()
        except OSError:
            same = False
        if same:
            raise AuditError(f"{target}: is the data file itself; choose another output path")


def _screen(args) -> int:
    from auditor.design import parse_group_list
    from auditor.errors import AuditError
    from auditor.margins import parse_margin_options
    from auditor.screen import MULTIPLE_OUTCOMES_NOTE, run_screen, run_screens
    from auditor.sources import read_manifest, sources_from_paths

    try:
        margins = parse_margin_options(args.margin)
    except ValueError as err:
        raise AuditError(str(err)) from None

    def names(text, option):
        return None if text is None else parse_group_list(text, option)

    progress = None
    if not args.quiet and sys.stderr.isatty():
        def progress(done: int, total: int, outcome: str) -> None:
            width = 30
            filled = int(width * done / max(total, 1))
            print(f"\r[{'#' * filled}{'.' * (width - filled)}] {done}/{total} {outcome[:30]:<30}",
                  end="" if done < total else "\n", file=sys.stderr, flush=True)

    options = dict(groups=names(args.groups, "--groups"), subject=args.subject,
                   outcomes=names(args.outcomes, "--outcomes"),
                   exclude=names(args.exclude, "--exclude"))
    settings = dict(policy=args.policy, seed=args.seed, resamples=args.boot, level=args.level,
                    jobs=args.jobs, out=Path(args.out), sort=args.sort, reports=args.reports,
                    progress=progress, margins=margins, engine=args.engine,
                    scheduler=args.scheduler, overrides=_overrides(args))
    single = (not args.manifest and len(args.file) == 1 and Path(args.file[0]).is_file())
    if single:
        files, skipped = run_screen(args.file[0], group=args.group, **options, **settings)
    else:
        if args.manifest:
            sources = read_manifest(args.manifest, group=args.group, **options)
        else:
            sources = sources_from_paths(args.file, group=args.group, **options)
        files, skipped = run_screens(sources, **settings)
    if not args.quiet:
        print(f"{files.rows} outcome(s) screened; {len(skipped)} column(s) skipped")
        for entry in skipped:
            where = f"'{entry[0]}'" if single else f"{entry[0]}: '{entry[1]}'"
            print(f"  skipped {where}: {entry[-1]}")
        print(f"written: {files.csv}, {files.json}, {files.html}")
        print(MULTIPLE_OUTCOMES_NOTE)
    return EXIT_OK


def _policy_init(args) -> int:
    from auditor.errors import AuditError
    from auditor.policy import default_text

    path = Path(args.path)
    if path.exists():
        raise AuditError(f"{path}: already exists; choose another name (a policy is never"
                         " overwritten)")
    _write_text(path, default_text())
    print(f"wrote the built-in policy to {path}; edit it, then use: auditor check ... --policy"
          f" {path}")
    return EXIT_OK


def _policy_show(args) -> int:
    from auditor.policy import describe, load_policy

    sys.stdout.write(describe(load_policy(args.path)))
    return EXIT_OK


def _policy_diff(args) -> int:
    from auditor.policy import differences, load_policy

    first, second = (load_policy(None if p == "default" else p) for p in (args.first, args.second))
    lines = differences(first, second)
    if not lines:
        print(f"the two policies decide alike (SHA-256 {first.sha256[:12]}... for both)")
        return EXIT_OK
    print(f"{len(lines)} setting(s) differ ({first.source} -> {second.source}):")
    for line in lines:
        print(f"  {line}")
    return EXIT_OK


def _schema(args) -> int:
    from auditor.schema import schema_text

    sys.stdout.write(schema_text(args.name))
    return EXIT_OK


def _demo(args) -> int:
    from auditor.demo import run_demo

    return run_demo(Path(args.out), echo=lambda line: print(line))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

