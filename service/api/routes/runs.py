"""Runs: create (one or a batch), read, list, supersede, withdraw, version history."""

from __future__ import annotations

from typing import Annotated, Literal, Optional

from fastapi import APIRouter, Depends, Query

from service import crud
from service.api.examples import openapi_examples
from service.deps import Principal, ReadSession, SettingsDep, WriteSession, require_scope
from service.schemas import (
    Page,
    RunBatchCreate,
    RunBatchPublic,
    RunCreate,
    RunPublic,
    RunSupersede,
    RunWithdraw,
    run_public,
)

router = APIRouter(prefix="/runs", tags=["runs"])

Finite = dict(allow_inf_nan=False)


@router.post("", status_code=201, response_model=RunPublic, summary="Store one run")
def create_run(
    session: WriteSession,
    settings: SettingsDep,
    principal: Annotated[Principal, Depends(require_scope("ingest"))],
    body: Annotated[RunCreate, openapi_examples("run_create")],
) -> RunPublic:
    """Store one incubation run: a concentration-time series or a reported rate constant.

    Units are converted to SI on the way in; the stored run is version 1 of a new run id.
    A current run of the same study at the same temperature, pH and replicate label is a
    409 (supersede it instead).
    """
    run = crud.create_run(
        session, data=body, actor=principal.label, max_points=settings.max_points_per_series
    )
    session.commit()
    return run_public(run)


@router.post(
    "/batch", status_code=201, response_model=RunBatchPublic, summary="Store many runs, all or nothing"
)
def create_runs_batch(
    session: WriteSession,
    settings: SettingsDep,
    principal: Annotated[Principal, Depends(require_scope("ingest"))],
    body: Annotated[RunBatchCreate, openapi_examples("run_batch_create")],
) -> RunBatchPublic:
    """Store many runs in one transaction. If any item is invalid nothing is stored and
    every problem is reported with its index (``loc`` = ``["body", "runs", i, ...]``)."""
    from service.errors import TooLarge

    if len(body.runs) > settings.max_runs_per_batch:
        raise TooLarge(
            f"the batch holds {len(body.runs)} runs; at most {settings.max_runs_per_batch} "
            "are accepted per request"
        )
    runs = crud.create_runs_batch(
        session, runs=body.runs, actor=principal.label, max_points=settings.max_points_per_series
    )
    session.commit()
    created = [run_public(r) for r in runs]
    return RunBatchPublic(created=created, count=len(created))


@router.get("", response_model=Page[RunPublic], summary="List runs")
def list_runs(
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("read"))],
    substance_id: Annotated[Optional[int], Query(ge=1)] = None,
    study_id: Annotated[Optional[int], Query(ge=1)] = None,
    status: Annotated[
        Literal["current", "superseded", "withdrawn", "any"], Query()
    ] = "current",
    temperature_min_K: Annotated[Optional[float], Query(**Finite)] = None,
    temperature_max_K: Annotated[Optional[float], Query(**Finite)] = None,
    pH_min: Annotated[Optional[float], Query(**Finite)] = None,
    pH_max: Annotated[Optional[float], Query(**Finite)] = None,
    limit: Annotated[int, Query(ge=1, le=1000)] = 100,
    offset: Annotated[int, Query(ge=0)] = 0,
) -> Page[RunPublic]:
    rows, total = crud.list_runs(
        session,
        limit=limit,
        offset=offset,
        substance_id=substance_id,
        study_id=study_id,
        status=None if status == "any" else status,
        temperature_min_K=temperature_min_K,
        temperature_max_K=temperature_max_K,
        pH_min=pH_min,
        pH_max=pH_max,
    )
    return Page[RunPublic](items=[run_public(r) for r in rows], total=total, limit=limit, offset=offset)


@router.get("/{run_uid}", response_model=RunPublic, summary="Read a run (newest version)")
def get_run(
    run_uid: str,
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("read"))],
    version: Annotated[Optional[int], Query(ge=1)] = None,
) -> RunPublic:
    return run_public(crud.get_run(session, run_uid=run_uid, version=version))


@router.get("/{run_uid}/versions", response_model=list[RunPublic], summary="All versions of a run")
def list_versions(
    run_uid: str,
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> list[RunPublic]:
    return [run_public(r) for r in crud.list_run_versions(session, run_uid=run_uid)]


@router.post(
    "/{run_uid}/versions", status_code=201, response_model=RunPublic,
    summary="Correct a run (supersede its current version)",
)
def supersede_run(
    run_uid: str,
    session: WriteSession,
    settings: SettingsDep,
    principal: Annotated[Principal, Depends(require_scope("ingest"))],
    body: Annotated[RunSupersede, openapi_examples("run_supersede")],
) -> RunPublic:
    """Store a corrected version of a run. The previous version is kept, marked superseded,
    and the reason is recorded in the version and the audit trail."""
    run = crud.supersede_run(
        session, run_uid=run_uid, data=body, actor=principal.label,
        max_points=settings.max_points_per_series,
    )
    session.commit()
    return run_public(run)


@router.post("/{run_uid}/withdraw", response_model=RunPublic, summary="Retract a run")
def withdraw_run(
    run_uid: str,
    session: WriteSession,
    principal: Annotated[Principal, Depends(require_scope("ingest"))],
    body: Annotated[RunWithdraw, openapi_examples("run_withdraw")],
) -> RunPublic:
    """Mark the current version withdrawn (kept, never deleted); fits stop using it."""
    run = crud.withdraw_run(session, run_uid=run_uid, reason=body.reason, actor=principal.label)
    session.commit()
    return run_public(run)
