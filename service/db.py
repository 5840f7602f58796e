"""Database engine and sessions.

SQLite (the default) is opened in WAL mode with foreign keys enforced and a busy
timeout; write transactions start with ``BEGIN IMMEDIATE`` so that two writers queue
instead of failing on a lock upgrade. PostgreSQL is reached through
``postgresql+psycopg://`` URLs with the same models.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from sqlalchemy import Engine, create_engine, event
from sqlalchemy.engine import make_url
from sqlalchemy.orm import Session, sessionmaker

__all__ = ["make_engine", "make_session_factory", "session_scope", "WRITE_OPTION"]

#: execution option that marks a connection as the start of a write transaction
WRITE_OPTION = "fieldrate_write"


def make_engine(url: str, *, busy_timeout_ms: int = 30_000) -> Engine:
    """Create the engine for ``url``.

    Parameters
    ----------
    url : str
        SQLAlchemy URL, e.g. ``sqlite:////home/me/.local/share/fieldrate/fieldrate.db`` or
        ``postgresql+psycopg://user@host:5432/db``.
    busy_timeout_ms : int
        How long [ms] a SQLite connection waits for a lock before giving up.
    """
    parsed = make_url(url)
    if parsed.get_backend_name() == "sqlite":
        database = parsed.database or ""
        if database and database != ":memory:" and not database.startswith("file:"):
            Path(database).expanduser().parent.mkdir(parents=True, exist_ok=True)
        engine = create_engine(
            url,
            connect_args={"check_same_thread": False, "timeout": busy_timeout_ms / 1000.0},
        )

        @event.listens_for(engine, "connect")
        def _sqlite_on_connect(dbapi_connection, _record):  # pragma: no cover - driver hook
            # let SQLAlchemy, not the driver, decide when transactions begin
            dbapi_connection.isolation_level = None
            cursor = dbapi_connection.cursor()
            cursor.execute("PRAGMA journal_mode=WAL")
            cursor.execute("PRAGMA foreign_keys=ON")
            cursor.execute(f"PRAGMA busy_timeout={int(busy_timeout_ms)}")
            cursor.execute("PRAGMA synchronous=NORMAL")
            cursor.close()

        @event.listens_for(engine, "begin")
        def _sqlite_on_begin(conn):  # pragma: no cover - driver hook
            if conn.get_execution_options().get(WRITE_OPTION):
                conn.exec_driver_sql("BEGIN IMMEDIATE")
            else:
                conn.exec_driver_sql("BEGIN")

        return engine
    return create_engine(url, pool_pre_ping=True)


def make_session_factory(engine: Engine) -> sessionmaker[Session]:
    """Session factory bound to ``engine`` (objects stay readable after commit)."""
    return sessionmaker(engine, expire_on_commit=False, autoflush=False)


@contextmanager
def session_scope(factory: sessionmaker[Session], *, write: bool = False) -> Iterator[Session]:
    """One transaction: commit on success, roll back on any exception.

    Parameters
    ----------
    factory : sessionmaker
        From :func:`make_session_factory`.
    write : bool
        Start the transaction as a writer (``BEGIN IMMEDIATE`` on SQLite).
    """
    session = factory()
    try:
        if write:
            session.connection(execution_options={WRITE_OPTION: True})
        yield session
        session.commit()
    except BaseException:
        session.rollback()
        raise
    finally:
        session.close()
