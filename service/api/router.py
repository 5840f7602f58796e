"""The list of routers mounted under ``/v1``: add a resource with one line here."""

from __future__ import annotations

from fastapi import APIRouter

from service.api.routes import audit, keys, runs, studies, substances
from service.api.routes import calculate, models, predictions
from service.api.routes import exchange, reports
from service.api.routes import scenarios
from service.api.routes import design
from service.errors import ERROR_RESPONSES

#: routers mounted under /v1, in OpenAPI order
ROUTERS: list[APIRouter] = [
    substances.router,
    studies.router,
    runs.router,
    audit.router,
    keys.router,
    models.router,
    predictions.router,
    calculate.router,
    reports.router,
    exchange.router,
    scenarios.router,
    design.router,
]

api_router = APIRouter(prefix="/v1", responses=ERROR_RESPONSES)
for _router in ROUTERS:
    api_router.include_router(_router)
