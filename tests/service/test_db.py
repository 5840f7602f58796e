"""SQLite connection settings: WAL, foreign keys, busy timeout."""

from __future__ import annotations

import pytest
from sqlalchemy import text

from service.db import make_engine


def test_sqlite_pragmas(tmp_path):
    engine = make_engine(f"sqlite:///{tmp_path / 'p.db'}", busy_timeout_ms=1234)
    try:
        with engine.connect() as conn:
            assert conn.execute(text("PRAGMA journal_mode")).scalar() == "wal"
            assert conn.execute(text("PRAGMA foreign_keys")).scalar() == 1
            assert conn.execute(text("PRAGMA busy_timeout")).scalar() == 1234
    finally:
        engine.dispose()


def test_sqlite_parent_directory_created(tmp_path):
    path = tmp_path / "nested" / "dir" / "f.db"
    engine = make_engine(f"sqlite:///{path}")
    try:
        with engine.connect() as conn:
            conn.execute(text("SELECT 1"))
        assert path.exists()
    finally:
        engine.dispose()


def test_foreign_keys_enforced(tmp_path):
    from sqlalchemy.exc import IntegrityError

    from service.migrate import upgrade_head

    url = f"sqlite:///{tmp_path / 'fk.db'}"
    upgrade_head(url)
    engine = make_engine(url)
    try:
        with pytest.raises(IntegrityError):
            with engine.begin() as conn:
                conn.execute(text(
                    "INSERT INTO study (substance_id, laboratory, glp, created_at, created_by) "
                    "VALUES (999, 'x', 0, '2026-01-01 00:00:00', 't')"
                ))
    finally:
        engine.dispose()
