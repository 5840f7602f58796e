"""``fieldrate import-csv FILE``: import runs from a CSV file (one row per observation)."""

from __future__ import annotations

import argparse
import sys

from service.commands.clitools import (
    CommandError,
    ProgressBar,
    add_database_arguments,
    api_key,
    guarded,
    open_database,
)

#: files with more lines than this get a progress bar (unless --no-progress)
PROGRESS_MIN_LINES = 2000
#: the audit trail's actor for imports made from the command line
CLI_ACTOR = "command line import"

_EPILOG = """\
columns (one row per observation; the header is line 1; rows starting with # are comments):
  substance, laboratory, run            required: who, where and which run
  temperature_C or temperature_K, pH    required: incubation conditions
  time_<s|min|h|d>                      time since the start, unit in the name
  concentration_<unit>                  e.g. concentration_mg_per_L, concentration_umol_per_L,
                                        concentration_percent (of the initial value)
  (or time + time_unit, concentration + concentration_unit columns)
  k_obs_per_<s|min|h|d> or dt50_<s|min|h|d>, se_ln_k
                                        a reported rate instead of a series (one row per run)
  optional: study_reference, test_guideline, glp, buffer, ionic_strength_M,
            cosolvent_percent_v_v, sterile, dark, below_loq, loq, model, notes
template: openapi_examples/runs_template.csv (invented data)

exit status: 0 imported (or checked, with --check), 1 nothing imported (the reason is
printed on stderr, with the CSV line number), 2 wrong command-line arguments.
"""


def _count_lines(path: str) -> int:
    with open(path, "rb") as handle:
        return sum(1 for _ in handle)


def _import(args: argparse.Namespace) -> int:
    from service import csv_io

    n_lines = _count_lines(args.file)
    show = args.progress if args.progress is not None else (
        n_lines > PROGRESS_MIN_LINES)
    bar = ProgressBar(n_lines, "reading ", enabled=show)
    try:
        runs = csv_io.read_runs_csv(args.file, progress=bar.update)
    except csv_io.CsvFormatError as exc:
        if show:
            sys.stderr.write("\n")
        if args.all_problems:
            for problem in exc.problems:
                print(f"{args.file}: {problem}", file=sys.stderr)
        raise CommandError(f"{args.file}: {exc}") from None
    bar.finish()
    if args.url:
        return _import_remote(args, runs, show)
    settings, engine, factory = open_database(args)
    try:
        session = factory()
        try:
            from service.db import WRITE_OPTION

            session.connection(execution_options={WRITE_OPTION: True})
            store_bar = ProgressBar(len(runs), "checking", enabled=show)
            summary = csv_io.store_runs(session, runs, actor=CLI_ACTOR,
                                        max_points=settings.max_points_per_series,
                                        progress=lambda done, total: store_bar.update(done))
            store_bar.finish()
            if args.check:
                session.rollback()
            else:
                session.commit()
        except csv_io.CsvFormatError as exc:
            raise CommandError(f"{args.file}: {exc}") from None
        finally:
            session.rollback()
            session.close()
    finally:
        engine.dispose()
    _print_summary(args, summary.to_dict(), settings.database_url)
    return 0


def _import_remote(args: argparse.Namespace, runs, show: bool) -> int:
    from service.client import Client

    if args.check:
        raise CommandError("--check works on the local database only; drop --url to check")
    with open(args.file, encoding="utf-8-sig") as handle:
        text = handle.read()
    if show:
        print(f"uploading {len(runs)} runs to {args.url} ...", file=sys.stderr)
    with Client(args.url, api_key=api_key(args)) as client:
        summary = client.import_csv(text)
    _print_summary(args, summary, args.url)
    return 0


def _print_summary(args: argparse.Namespace, summary: dict, where: str) -> None:
    verb = "checked (nothing stored)" if args.check else "imported"
    print(f"{verb}: {summary['runs_created']} run(s) from {args.file} into {where}")
    for name in summary.get("substances_created", []):
        print(f"  new substance: {name}")
    for name in summary.get("studies_created", []):
        print(f"  new study: {name}")
    for name, sid in summary.get("substance_ids", {}).items():
        print(f"  substance {sid}: {name}  (report: fieldrate report {sid} -o report.html)")


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "import-csv", help="import runs from a CSV file (all or nothing)",
        description="Import hydrolysis runs from a CSV file into the local database (default) "
                    "or a running service (--url). Every row is validated; on any problem "
                    "nothing is stored and the problem is reported with its line number. "
                    "Missing substances and studies are created.",
        epilog=_EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("file", help="the CSV file (UTF-8)")
    add_database_arguments(parser)
    parser.add_argument("--check", action="store_true",
                        help="validate everything (including duplicates of stored runs) and "
                             "store nothing")
    parser.add_argument("--all-problems", action="store_true",
                        help="list every problem found, one per line, before the summary line")
    progress = parser.add_mutually_exclusive_group()
    progress.add_argument("--progress", dest="progress", action="store_true", default=None,
                          help=f"always show a progress bar on stderr (default: only for "
                               f"files over {PROGRESS_MIN_LINES} lines)")
    progress.add_argument("--no-progress", dest="progress", action="store_false",
                          help="never show a progress bar")
    parser.set_defaults(func=guarded(_import))
