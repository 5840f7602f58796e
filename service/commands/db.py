"""``fieldrate db upgrade``: bring the configured database to the newest schema."""

from __future__ import annotations

import argparse

from service.config import Settings


def _upgrade(args: argparse.Namespace) -> int:
    from service.db import make_engine
    from service.migrate import current_revision, upgrade_head

    settings = Settings()
    url = args.database_url or settings.database_url
    upgrade_head(url)
    engine = make_engine(url)
    try:
        print(f"database schema at revision {current_revision(engine)}")
    finally:
        engine.dispose()
    return 0


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser("db", help="database schema management")
    db_sub = parser.add_subparsers(dest="db_command", metavar="ACTION", required=True)
    up = db_sub.add_parser("upgrade", help="apply all migrations (Alembic upgrade head)")
    up.add_argument(
        "--database-url", default=None,
        help="SQLAlchemy URL (default: FIELDRATE_DATABASE_URL or the per-user SQLite file)",
    )
    up.set_defaults(func=_upgrade)
