"""Run and inspect Alembic migrations for a database URL."""

from __future__ import annotations

import fcntl
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Optional

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Connection, Engine
from sqlalchemy.engine import make_url

__all__ = ["MIGRATIONS_DIR", "alembic_config", "upgrade_head", "head_revision", "current_revision"]

#: the Alembic environment shipped beside the service package
MIGRATIONS_DIR = Path(__file__).resolve().parent.parent / "migrations"


def alembic_config(database_url: str) -> Config:
    """An Alembic configuration for ``database_url`` (no ini file needed)."""
    if not (MIGRATIONS_DIR / "env.py").is_file():
        raise RuntimeError(
            f"the migrations directory {MIGRATIONS_DIR} is missing; install fieldrate from its "
            "source tree (pip install -e .) so that migrations/ is available"
        )
    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
    cfg.attributes["database_url"] = database_url
    return cfg


#: key of the PostgreSQL advisory lock held while migrating (any constant 64-bit integer)
_PG_MIGRATION_LOCK = 0x66696C6472617465


@contextmanager
def _migration_lock(database_url: str) -> Iterator[Optional[Connection]]:
    """Serialise concurrent upgrades (several workers starting at once).

    PostgreSQL: a session advisory lock on the connection that runs the migration.
    SQLite: an exclusive lock on a file beside the database. Yields the connection to
    migrate with (PostgreSQL) or None.
    """
    url = make_url(database_url)
    if url.get_backend_name() == "postgresql":
        from service.db import make_engine

        engine = make_engine(database_url)
        try:
            with engine.connect() as conn:
                conn.exec_driver_sql(f"SELECT pg_advisory_lock({_PG_MIGRATION_LOCK})")
                conn.commit()
                try:
                    yield conn
                finally:
                    conn.rollback()
                    conn.exec_driver_sql(f"SELECT pg_advisory_unlock({_PG_MIGRATION_LOCK})")
                    conn.commit()
        finally:
            engine.dispose()
        return
    database = url.database or ""
    if url.get_backend_name() != "sqlite" or not database or database == ":memory:" or database.startswith("file:"):
        yield None
        return
    lock_path = Path(database).expanduser()
    lock_path.parent.mkdir(parents=True, exist_ok=True)
    with open(f"{lock_path}.migrate-lock", "a+b") as handle:
        fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
        try:
            yield None
        finally:
            fcntl.flock(handle.fileno(), fcntl.LOCK_UN)


def upgrade_head(database_url: str) -> None:
    """Bring the database at ``database_url`` to the newest schema revision.

    Safe when several processes start at once: they migrate one after the other and the
    later ones find the schema already at head.
    """
    cfg = alembic_config(database_url)
    with _migration_lock(database_url) as conn:
        if conn is not None:
            cfg.attributes["connection"] = conn
            command.upgrade(cfg, "head")
            conn.commit()
        else:
            command.upgrade(cfg, "head")


def head_revision() -> str | None:
    """The newest revision identifier in ``migrations/versions``."""
    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
    return ScriptDirectory.from_config(cfg).get_current_head()


def current_revision(engine: Engine) -> str | None:
    """The revision the database behind ``engine`` is at (None if never migrated)."""
    with engine.connect() as connection:
        return MigrationContext.configure(connection).get_current_revision()
