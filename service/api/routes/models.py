"""The fitted rate surface of a stored substance."""

from __future__ import annotations

from typing import Annotated, Optional

from fastapi import APIRouter, Depends, Query, Request
from pydantic import AwareDatetime, Field

from service.deps import Principal, require_scope
from service.fitting import model_payload
from service.modelstore import load_model
from service.schemas import FitOptions, SurfaceModelPublic

router = APIRouter(prefix="/substances", tags=["models"])


class ModelQuery(FitOptions):
    level: float = Field(default=0.95, gt=0, lt=1, description="level of the parameter intervals")
    as_of: Optional[AwareDatetime] = Field(
        default=None,
        description="the model as it was at this past time (ISO 8601 with a time zone, e.g. "
        "2026-12-02T06:00:00Z): fitted to the run versions current then",
    )


@router.get(
    "/{substance_id}/model",
    response_model=SurfaceModelPublic,
    summary="The fitted pH-temperature rate surface of a substance",
)
def get_model(
    substance_id: int,
    request: Request,
    query: Annotated[ModelQuery, Query()],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict:
    """Fits every current run's series, then the rate surface; cached per data version and
    fit options. Answers 422 with an explanation when the runs cannot support the fit
    (e.g. a substance with a single run)."""
    options = FitOptions(**query.model_dump(exclude={"level", "as_of"}))
    stored = load_model(
        request.app.state.session_factory, substance_id=substance_id, options=options,
        as_of=query.as_of,
    )
    return model_payload(
        stored.result, level=query.level, options=options.model_dump(mode="json"), extra=stored.meta()
    )
