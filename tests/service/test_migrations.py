"""Alembic migrations: a fresh database reaches head, and head matches the models."""

from __future__ import annotations

from alembic.autogenerate import compare_metadata
from alembic.migration import MigrationContext
from sqlalchemy import inspect

from service.db import make_engine
from service.migrate import current_revision, head_revision, upgrade_head
from service.models import Base

EXPECTED_TABLES = {
    "substance", "study", "run", "observation", "fit_cache", "api_key",
    "idempotency_record", "audit_event", "alembic_version",
}


def test_upgrade_head_on_fresh_database(db_url):
    engine = make_engine(db_url)
    try:
        assert current_revision(engine) is None
        upgrade_head(db_url)
        assert current_revision(engine) == head_revision()
        assert EXPECTED_TABLES <= set(inspect(engine).get_table_names())
        upgrade_head(db_url)  # a second upgrade is a no-op
        assert current_revision(engine) == head_revision()
    finally:
        engine.dispose()


def test_autogenerate_diff_is_empty(db_url):
    upgrade_head(db_url)
    engine = make_engine(db_url)
    try:
        with engine.connect() as conn:
            ctx = MigrationContext.configure(conn, opts={"compare_type": True})
            diff = compare_metadata(ctx, Base.metadata)
        assert diff == []
    finally:
        engine.dispose()
