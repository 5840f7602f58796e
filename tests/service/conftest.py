"""Fixtures for the service tests: a fresh database per test, on SQLite and PostgreSQL.

SQLite is always tested (a file in the test's temporary directory). PostgreSQL is tested
when ``FIELDRATE_TEST_DATABASE_URL`` is set: each test gets its own schema, created
before and dropped after it, so tests never see each other's rows.
"""

from __future__ import annotations

import os
import uuid
import warnings
from collections.abc import Iterator

import pytest
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from fastapi.testclient import TestClient

from service.config import Settings
from service.main import create_app

PG_ENV = "FIELDRATE_TEST_DATABASE_URL"
BACKENDS = ["sqlite", "postgresql"]


def pg_base_url() -> str | None:
    return os.environ.get(PG_ENV) or None


def _pg_schema_url(base: str, schema: str) -> str:
    url = make_url(base).update_query_dict({"options": f"-csearch_path={schema}"})
    return url.render_as_string(hide_password=False)


class PgSchema:
    """A throw-away PostgreSQL schema and a URL whose search_path points at it."""

    def __init__(self, base: str):
        self.base = base
        self.schema = f"fr_test_{uuid.uuid4().hex[:12]}"
        self.url = _pg_schema_url(base, self.schema)
        self._admin = create_engine(make_url(base).difference_update_query(["options"]))

    def create(self) -> str:
        with self._admin.begin() as conn:
            conn.execute(text(f'CREATE SCHEMA "{self.schema}"'))
        return self.url

    def drop(self) -> None:
        with self._admin.begin() as conn:
            conn.execute(text(f'DROP SCHEMA IF EXISTS "{self.schema}" CASCADE'))
        self._admin.dispose()


@pytest.fixture(params=BACKENDS)
def backend(request) -> str:
    if request.param == "postgresql" and not pg_base_url():
        pytest.skip(f"PostgreSQL tests need {PG_ENV}")
    return request.param


@pytest.fixture
def db_url(backend: str, tmp_path) -> Iterator[str]:
    """URL of an empty database (no tables yet) on the parametrized backend."""
    if backend == "sqlite":
        yield f"sqlite:///{tmp_path / 'fieldrate-test.db'}"
        return
    schema = PgSchema(pg_base_url())
    try:
        yield schema.create()
    finally:
        schema.drop()


@pytest.fixture
def settings(db_url: str) -> Settings:
    return Settings(database_url=db_url)


@pytest.fixture
def app(settings: Settings):
    return create_app(settings)


@pytest.fixture
def client(app) -> Iterator[TestClient]:
    """An HTTP client talking to the ASGI app in-process (startup runs upgrade head).

    It sends an admin API key (created for the test) with every request.
    """
    from service.security import issue_key

    with TestClient(app, raise_server_exceptions=False) as c:
        _key_id, secret = issue_key(
            app.state.session_factory, label="test suite (admin)", scopes="admin",
            actor="test setup", pepper=app.state.settings.api_key_pepper,
        )
        c.headers["Authorization"] = f"Bearer {secret}"
        yield c
