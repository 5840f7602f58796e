"""Liveness and readiness."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse
from sqlalchemy import text

from service.migrate import current_revision, head_revision

router = APIRouter(tags=["health"])


@router.get("/health", summary="The process is alive")
def health() -> dict[str, str]:
    return {"status": "ok"}


@router.get("/ready", summary="The database is reachable and its schema is at the newest revision")
def ready(request: Request) -> JSONResponse:
    engine = request.app.state.engine
    head = head_revision()
    try:
        with engine.connect() as conn:
            conn.execute(text("SELECT 1"))
        current = current_revision(engine)
    except Exception as exc:  # any driver error means "not ready", reported, never a 500
        return JSONResponse(
            status_code=503,
            content={"status": "unavailable", "database": "unreachable", "detail": type(exc).__name__},
        )
    if current != head:
        return JSONResponse(
            status_code=503,
            content={"status": "unavailable", "database": "reachable",
                     "schema_revision": current, "head_revision": head},
        )
    return JSONResponse(
        content={"status": "ready", "database": "reachable", "schema_revision": current,
                 "head_revision": head}
    )
