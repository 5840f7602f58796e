"""``fieldrate backup create|restore``: online backup and restore of the SQLite database."""

from __future__ import annotations

import argparse
import sys

from service.config import Settings


def _url(args: argparse.Namespace) -> str:
    return args.database_url or Settings().database_url


def _create(args: argparse.Namespace) -> int:
    from kinetics.errors import InputError
    from service.backup import backup_sqlite

    try:
        result = backup_sqlite(_url(args), args.destination, overwrite=args.overwrite)
    except InputError as exc:
        print(f"backup failed: {exc}", file=sys.stderr)
        return 1
    print(
        f"backed up {result.source} to {result.destination} ({result.size_bytes} bytes, "
        f"{result.pages} pages, integrity {result.integrity})"
    )
    return 0


def _restore(args: argparse.Namespace) -> int:
    from kinetics.errors import InputError
    from service.backup import restore_sqlite

    url = _url(args)
    if not args.yes:
        print(
            f"restore replaces the database {url} by {args.backup_file}. Stop the service "
            "first, then repeat with --yes.",
            file=sys.stderr,
        )
        return 2
    try:
        result = restore_sqlite(args.backup_file, url)
    except InputError as exc:
        print(f"restore failed: {exc}", file=sys.stderr)
        return 1
    print(
        f"restored {result.destination} from {result.source} ({result.size_bytes} bytes, "
        f"integrity {result.integrity}); start the service again"
    )
    return 0


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "backup", help="online backup / restore of the SQLite database"
    )
    sub = parser.add_subparsers(dest="backup_command", metavar="ACTION", required=True)
    url_help = "SQLAlchemy URL (default: FIELDRATE_DATABASE_URL or the per-user SQLite file)"

    create = sub.add_parser("create", help="copy the live database to a file (service may run)")
    create.add_argument("destination", help="backup file to write, e.g. fieldrate-2026-12-02.db")
    create.add_argument("--overwrite", action="store_true", help="replace an existing file")
    create.add_argument("--database-url", default=None, help=url_help)
    create.set_defaults(func=_create)

    restore = sub.add_parser("restore", help="replace the database by a backup (service stopped)")
    restore.add_argument("backup_file", help="a file written by 'fieldrate backup create'")
    restore.add_argument("--yes", action="store_true", help="confirm that the service is stopped")
    restore.add_argument("--database-url", default=None, help=url_help)
    restore.set_defaults(func=_restore)
