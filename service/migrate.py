"""Run and inspect Alembic migrations for a database URL."""

from __future__ import annotations

from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Engine

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


def upgrade_head(database_url: str) -> None:
    """Bring the database at ``database_url`` to the newest schema revision."""
    command.upgrade(alembic_config(database_url), "head")


def head_revision() -> str | None:
    """The newest revision identifier in ``migrations/versions``."""
    cfg = Config()
    cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
    return ScriptDirectory.from_config(cfg).get_current_head()


def current_revision(engine: Engine) -> str | None:
    """The revision the database behind ``engine`` is at (None if never migrated)."""
    with engine.connect() as connection:
        return MigrationContext.configure(connection).get_current_revision()
