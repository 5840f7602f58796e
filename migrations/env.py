"""Alembic environment for fieldrate.

The database URL comes, in this order, from ``config.attributes["database_url"]`` (set by
:mod:`service.migrate`), a connection passed in ``config.attributes["connection"]``, or the
service settings (``FIELDRATE_DATABASE_URL``). ``render_as_batch`` lets SQLite alter tables.
"""

from __future__ import annotations

from alembic import context

from service.models import Base

config = context.config
target_metadata = Base.metadata


def _url() -> str:
    url = config.attributes.get("database_url")
    if url:
        return url
    from service.config import Settings

    return Settings().database_url


def run_migrations_offline() -> None:
    context.configure(
        url=_url(),
        target_metadata=target_metadata,
        literal_binds=True,
        render_as_batch=True,
        dialect_opts={"paramstyle": "named"},
    )
    with context.begin_transaction():
        context.run_migrations()


def _run_with(connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        render_as_batch=True,
        compare_type=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _run_with(connection)
        return
    from service.db import make_engine

    engine = make_engine(_url())
    try:
        with engine.connect() as connection:
            _run_with(connection)
            connection.commit()
    finally:
        engine.dispose()


if context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
