"""The fitted rate surface of a stored substance."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Depends, Query, Request
from pydantic import Field

from service.deps import Principal, require_scope
from service.fitting import model_payload
from service.modelstore import load_model
from service.schemas import FitOptions, SurfaceModelPublic

router = APIRouter(prefix="/substances", tags=["models"])


class ModelQuery(FitOptions):
    level: float = Field(default=0.95, gt=0, lt=1, description="level of the parameter intervals")


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
    options = FitOptions(**query.model_dump(exclude={"level"}))
    stored = load_model(request.app.state.session_factory, substance_id=substance_id, options=options)
    return model_payload(
        stored.result, level=query.level, options=options.model_dump(mode="json"), extra=stored.meta()
    )
