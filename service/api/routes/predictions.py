"""Predictions for a stored substance at field conditions (100,000 conditions per request)."""

from __future__ import annotations

from typing import Annotated, Optional

from fastapi import APIRouter, Depends, Query, Request
from fastapi.responses import Response, StreamingResponse
from pydantic import AwareDatetime

from service.api.examples import openapi_examples
from service.api.fastjson import FastJSONRoute
from service.conditions import condition_arrays
from service.deps import Principal, require_scope
from service.fitting import excluded_runs
from service.jsonout import CHUNK_ROWS, prediction_chunks
from service.modelstore import load_model
from service.predicting import prediction_header, run_predictions
from service.schemas import PredictionRequest, PredictionResponse

router = APIRouter(prefix="/substances", tags=["predictions"], route_class=FastJSONRoute)


@router.post(
    "/{substance_id}/predictions",
    response_model=None,
    responses={200: {"model": PredictionResponse, "description": "Predictions with intervals and the caution"}},
    summary="Predict k, DT50 and DT90 at field conditions",
)
def predict_substance(
    substance_id: int,
    request: Request,
    body: Annotated[PredictionRequest, openapi_examples("prediction_request", "prediction_columns_request")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
    as_of: Annotated[Optional[AwareDatetime], Query(
        description="predict with the model as it was at this past time (ISO 8601 with a time "
        "zone): the same numbers a client got then",
    )] = None,
) -> Response:
    """Give conditions as objects (``conditions``) or, for many, as columns (``columns``).
    Both intervals (confidence of the mean rate, prediction for a new run) are at ``level``.
    Every response carries the caution text."""
    settings = request.app.state.settings
    arrays = condition_arrays(body.conditions, body.columns, max_conditions=settings.max_conditions_per_request)
    stored = load_model(
        request.app.state.session_factory, substance_id=substance_id, options=body.fit_options,
        as_of=as_of,
    )
    pred = run_predictions(
        stored.result.surface, arrays, body, max_mc_evaluations=settings.max_montecarlo_evaluations
    )
    header = prediction_header(
        stored.result.surface, pred, opts=body, fit_options=body.fit_options,
        substance_id=substance_id, data_version=stored.data_version,
        excluded_runs=excluded_runs(stored.result.runs),
    )
    if as_of is not None:
        header["as_of"] = stored.meta()["as_of"]
    chunks = prediction_chunks(header, pred, body.layout)
    if len(arrays) <= CHUNK_ROWS:
        # one chunk: send it at once (streaming would cost a thread hand-off per chunk)
        return Response(content=b"".join(chunks), media_type="application/json")
    return StreamingResponse(chunks, media_type="application/json")
