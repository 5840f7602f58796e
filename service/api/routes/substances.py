"""Substances: create, read, list."""

from __future__ import annotations

from typing import Annotated, Optional

from fastapi import APIRouter, Depends, Query

from service import crud
from service.api.examples import openapi_examples
from service.deps import Principal, ReadSession, WriteSession, require_scope
from service.schemas import Page, SubstanceCreate, SubstancePublic

router = APIRouter(prefix="/substances", tags=["substances"])


@router.post("", status_code=201, response_model=SubstancePublic, summary="Register a substance")
def create_substance(
    session: WriteSession,
    principal: Annotated[Principal, Depends(require_scope("admin"))],
    body: Annotated[SubstanceCreate, openapi_examples("substance_create")],
) -> SubstancePublic:
    substance = crud.create_substance(session, data=body, actor=principal.label)
    session.commit()
    return SubstancePublic.model_validate(substance)


@router.get("", response_model=Page[SubstancePublic], summary="List substances")
def list_substances(
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("read"))],
    limit: Annotated[int, Query(ge=1, le=1000)] = 100,
    offset: Annotated[int, Query(ge=0)] = 0,
    name_contains: Annotated[Optional[str], Query(max_length=200)] = None,
) -> Page[SubstancePublic]:
    rows, total = crud.list_substances(session, limit=limit, offset=offset, name_contains=name_contains)
    return Page[SubstancePublic](
        items=[SubstancePublic.model_validate(r) for r in rows], total=total, limit=limit, offset=offset
    )


@router.get("/{substance_id}", response_model=SubstancePublic, summary="Read a substance")
def get_substance(
    substance_id: int,
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> SubstancePublic:
    return SubstancePublic.model_validate(crud.get_substance(session, substance_id=substance_id))
