"""API keys (admin scope): create (the secret is shown once), list, revoke."""

from __future__ import annotations

import datetime as dt
from typing import Annotated, Literal, Optional

from fastapi import APIRouter, Depends, Path, Query
from pydantic import BaseModel, ConfigDict, Field

from service import security
from service.deps import Principal, ReadSession, SettingsDep, WriteSession, require_scope
from service.idempotency import redact_in_record

router = APIRouter(prefix="/keys", tags=["keys"])


class KeyCreate(BaseModel):
    model_config = ConfigDict(extra="forbid")

    label: str = Field(
        min_length=1, max_length=200,
        description="who uses the key; the audit trail records it", examples=["LIMS building 2 (invented)"],
    )
    scopes: list[Literal["read", "ingest", "admin"]] = Field(
        min_length=1, max_length=3,
        description="read, ingest and/or admin (admin includes ingest, ingest includes read)",
        examples=[["ingest"]],
    )


class KeyRevoke(BaseModel):
    model_config = ConfigDict(extra="forbid")

    reason: Optional[str] = Field(default=None, max_length=2000, description="why the key is revoked")


class KeyPublic(BaseModel):
    model_config = ConfigDict(from_attributes=True)

    id: int
    label: str
    scopes: list[str]
    created_at: dt.datetime
    revoked_at: Optional[dt.datetime]


class KeyCreated(KeyPublic):
    key: str = Field(
        description="the secret: send it as 'Authorization: Bearer <key>'. It is shown only "
        "in this response and cannot be recovered; only its hash is stored"
    )


def key_public(row) -> KeyPublic:
    return KeyPublic(
        id=row.id, label=row.label, scopes=row.scopes.split(), created_at=row.created_at,
        revoked_at=row.revoked_at,
    )


@router.post("", status_code=201, response_model=KeyCreated, summary="Create an API key")
def create_key(
    session: WriteSession,
    settings: SettingsDep,
    principal: Annotated[Principal, Depends(require_scope("admin"))],
    body: KeyCreate,
) -> KeyCreated:
    """Create a key with a label and scopes. The secret is in this response only; a
    repeated request with the same Idempotency-Key replays the response without it."""
    row, secret = security.create_api_key(
        session, label=body.label, scopes=body.scopes, actor=principal.label,
        pepper=settings.api_key_pepper,
    )
    session.commit()
    redact_in_record("key", "the secret is shown only in the original response")
    return KeyCreated(**key_public(row).model_dump(), key=secret)


@router.get("", response_model=list[KeyPublic], summary="List API keys (never their secrets)")
def list_keys(
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("admin"))],
    include_revoked: Annotated[bool, Query()] = True,
) -> list[KeyPublic]:
    return [key_public(r) for r in security.list_api_keys(session, include_revoked=include_revoked)]


@router.post("/{key_id}/revoke", response_model=KeyPublic, summary="Revoke an API key")
def revoke_key(
    key_id: Annotated[int, Path(ge=1, le=2**63 - 1)],
    session: WriteSession,
    principal: Annotated[Principal, Depends(require_scope("admin"))],
    body: Optional[KeyRevoke] = None,
) -> KeyPublic:
    """Revoke a key at once: requests with it are refused (401) from now on. The key stays
    listed with its revocation time; the audit trail records who revoked it and why."""
    row = security.revoke_api_key(
        session, key_id=key_id, actor=principal.label, reason=body.reason if body else None
    )
    session.commit()
    return key_public(row)
