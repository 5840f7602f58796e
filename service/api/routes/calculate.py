"""A stateless calculation: fit posted runs (nothing stored) and optionally predict."""

from __future__ import annotations

import json
from typing import Annotated

from fastapi import APIRouter, Depends, Request
from fastapi.responses import Response, StreamingResponse

from kinetics.caution import CAUTION_TEXT
from service.api.examples import openapi_examples
from service.api.fastjson import FastJSONRoute
from service.conditions import condition_arrays
from service.deps import Principal, require_scope
from service.fitting import (
    FitResult,
    check_posted_runs,
    compute_fit,
    excluded_runs,
    model_payload,
    run_input_from_payload,
    stored_surface,
)
from service.jsonout import prediction_chunks
from service.predicting import prediction_header, run_predictions
from service.schemas import CalculationRequest, CalculationResponse

router = APIRouter(prefix="/calculate", tags=["calculate"], route_class=FastJSONRoute)


@router.post(
    "",
    response_model=None,
    responses={200: {"model": CalculationResponse, "description": "The fit and the predictions"}},
    summary="Fit runs without storing them, and predict",
)
def calculate(
    request: Request,
    body: Annotated[CalculationRequest, openapi_examples("calculate_request")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> Response:
    """The same fit and predictions as for a stored substance, computed from the runs in the
    request. Nothing is stored."""
    settings = request.app.state.settings
    check_posted_runs(body.runs, max_runs=settings.max_runs_per_batch,
                      max_points=settings.max_points_per_series)
    arrays = None
    if body.conditions is not None or body.columns is not None:
        arrays = condition_arrays(
            body.conditions, body.columns, max_conditions=settings.max_conditions_per_request
        )
    fit = compute_fit(
        [run_input_from_payload(r, i) for i, r in enumerate(body.runs)],
        **body.fit_options.kinetics_kwargs(),
    )
    # the same JSON round trip as a stored fit, so both paths give identical numbers
    fit = FitResult(
        surface=stored_surface(fit.surface),
        runs=json.loads(fit.diagnostics_json()),
    )
    options = body.fit_options.model_dump(mode="json")
    model = model_payload(fit, level=body.level, options=options, extra={})
    head = {"caution": CAUTION_TEXT, "model": model}
    if arrays is None:
        return Response(
            content=json.dumps({**head, "prediction": None}, allow_nan=False, ensure_ascii=False),
            media_type="application/json",
        )
    pred = run_predictions(fit.surface, arrays, body, max_mc_evaluations=settings.max_montecarlo_evaluations)
    header = prediction_header(
        fit.surface, pred, opts=body, fit_options=body.fit_options,
        excluded_runs=excluded_runs(fit.runs),
    )
    prefix = json.dumps(head, allow_nan=False, ensure_ascii=False)[:-1] + ',"prediction":'

    def chunks():
        yield prefix.encode()
        yield from prediction_chunks(header, pred, body.layout, suffix="}}")

    return StreamingResponse(chunks(), media_type="application/json")
