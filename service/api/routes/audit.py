"""The audit trail (read scope): who did what to which record, when (UTC) and why."""

from __future__ import annotations

import datetime as dt
from typing import Annotated, Literal, Optional

from fastapi import APIRouter, Depends, Query
from pydantic import AwareDatetime, BaseModel, ConfigDict, Field

from service import crud
from service.deps import Principal, ReadSession, require_scope
from service.errors import ServiceError
from service.schemas import Page

router = APIRouter(prefix="/audit", tags=["audit"])

_MAX_ID = 2**63 - 1


class AuditEventPublic(BaseModel):
    """One audit event. ``entity_id`` is the run id (``run_uid``) for runs, else the row id."""

    model_config = ConfigDict(from_attributes=True)

    id: int
    at: dt.datetime = Field(description="when it happened (UTC)")
    actor: str = Field(description="label of the API key that did it")
    entity: str = Field(description="substance, study, run or api_key")
    entity_id: str
    version: Optional[int] = Field(description="run version created or changed")
    action: str = Field(description="create, supersede, withdraw or revoke")
    reason: Optional[str] = Field(description="why (mandatory for supersede and withdraw)")
    substance_id: Optional[int]


class _BadRange(ServiceError):
    status_code = 422
    code = "validation_error"


@router.get("", response_model=Page[AuditEventPublic], summary="Read the audit trail")
def list_audit(
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("read"))],
    substance_id: Annotated[Optional[int], Query(ge=1, le=_MAX_ID)] = None,
    entity: Annotated[
        Optional[Literal["substance", "study", "run", "api_key"]], Query()
    ] = None,
    entity_id: Annotated[Optional[str], Query(min_length=1, max_length=64)] = None,
    action: Annotated[
        Optional[Literal["create", "supersede", "withdraw", "revoke"]], Query()
    ] = None,
    since: Annotated[
        Optional[AwareDatetime],
        Query(description="events at or after this time (ISO 8601 with a time zone, e.g. "
              "2026-12-02T06:00:00Z)"),
    ] = None,
    until: Annotated[
        Optional[AwareDatetime],
        Query(description="events before this time (ISO 8601 with a time zone)"),
    ] = None,
    limit: Annotated[int, Query(ge=1, le=1000)] = 100,
    offset: Annotated[int, Query(ge=0, le=_MAX_ID)] = 0,
) -> Page[AuditEventPublic]:
    """Audit events, oldest first, filtered by substance, record, action and time range
    (``since`` <= time < ``until``). Every create, supersede, withdraw of a run, every new
    substance and study and every key created or revoked has one event."""
    if since is not None and until is not None and until <= since:
        raise _BadRange(
            f"until ({until.isoformat()}) must be later than since ({since.isoformat()})",
            loc=["query", "until"],
        )
    rows, total = crud.list_audit_events(
        session,
        substance_id=substance_id,
        entity=entity,
        entity_id=entity_id,
        action=action,
        since=since,
        until=until,
        limit=limit,
        offset=offset,
    )
    return Page[AuditEventPublic](
        items=[AuditEventPublic.model_validate(r) for r in rows],
        total=total, limit=limit, offset=offset,
    )
