"""Studies: create, read, list."""

from __future__ import annotations

from typing import Annotated, Optional

from fastapi import APIRouter, Depends, Query

from service import crud
from service.api.examples import openapi_examples
from service.deps import Principal, ReadSession, WriteSession, require_scope
from service.schemas import Page, StudyCreate, StudyPublic

router = APIRouter(prefix="/studies", tags=["studies"])


@router.post("", status_code=201, response_model=StudyPublic, summary="Register a study")
def create_study(
    session: WriteSession,
    principal: Annotated[Principal, Depends(require_scope("ingest"))],
    body: Annotated[StudyCreate, openapi_examples("study_create")],
) -> StudyPublic:
    study = crud.create_study(session, data=body, actor=principal.label)
    session.commit()
    return StudyPublic.model_validate(study)


@router.get("", response_model=Page[StudyPublic], summary="List studies")
def list_studies(
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("read"))],
    substance_id: Annotated[Optional[int], Query(ge=1)] = None,
    limit: Annotated[int, Query(ge=1, le=1000)] = 100,
    offset: Annotated[int, Query(ge=0)] = 0,
) -> Page[StudyPublic]:
    rows, total = crud.list_studies(session, limit=limit, offset=offset, substance_id=substance_id)
    return Page[StudyPublic](
        items=[StudyPublic.model_validate(r) for r in rows], total=total, limit=limit, offset=offset
    )


@router.get("/{study_id}", response_model=StudyPublic, summary="Read a study")
def get_study(
    study_id: int,
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> StudyPublic:
    return StudyPublic.model_validate(crud.get_study(session, study_id=study_id))
