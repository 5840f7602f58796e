"""FastAPI dependencies: settings, database sessions and the calling principal.

Handlers commit explicitly (``session.commit()``) before they build their response; the
session dependency only rolls back and closes, so a failure at any point leaves nothing
behind. Write sessions start as writers (``BEGIN IMMEDIATE`` on SQLite).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Annotated

from fastapi import Depends, Request
from sqlalchemy.orm import Session

from service.config import Settings
from service.db import WRITE_OPTION

__all__ = [
    "Principal",
    "get_settings_dep",
    "get_read_session",
    "get_write_session",
    "get_principal",
    "require_scope",
    "SettingsDep",
    "ReadSession",
    "WriteSession",
    "ALL_SCOPES",
]

ALL_SCOPES = frozenset({"read", "ingest", "admin"})


@dataclass(frozen=True)
class Principal:
    """Who is calling: the label recorded in the audit trail and the scopes granted."""

    label: str
    scopes: frozenset[str] = field(default_factory=lambda: ALL_SCOPES)


def get_settings_dep(request: Request) -> Settings:
    return request.app.state.settings


def _session(request: Request, *, write: bool) -> Iterator[Session]:
    session: Session = request.app.state.session_factory()
    try:
        if write:
            session.connection(execution_options={WRITE_OPTION: True})
        yield session
    finally:
        session.rollback()
        session.close()


def get_read_session(request: Request) -> Iterator[Session]:
    yield from _session(request, write=False)


def get_write_session(request: Request) -> Iterator[Session]:
    yield from _session(request, write=True)


# API keys (401/403, scopes, anonymous reads) are checked in service.security
from service.security import principal_for_request as get_principal  # noqa: E402
from service.security import require_scope  # noqa: E402

SettingsDep = Annotated[Settings, Depends(get_settings_dep)]
ReadSession = Annotated[Session, Depends(get_read_session)]
WriteSession = Annotated[Session, Depends(get_write_session)]
