"""The one place where errors become HTTP responses.

=====================================  ======  ==========================================
error                                   status  meaning
=====================================  ======  ==========================================
request validation (pydantic)           422     a field is missing, mistyped or out of range
:class:`kinetics.errors.InputError`     422     a value the kinetics package refuses
:class:`kinetics.errors.DataError`      422     the data cannot support the requested fit
:class:`kinetics.errors.FitError`       422     the fit ran but cannot characterise the model
:class:`NotFound`                       404     an id that does not exist
:class:`Conflict`                       409     a duplicate, or a change to a non-current run
:class:`TooLarge`                       413     a body, series or request beyond the limits
:class:`ItemErrors`                     422     per-item problems of a batch, by index
=====================================  ======  ==========================================

Every body has ``{"error": <code>, "detail": <message or list of {loc, msg, type}>}``.
"""

from __future__ import annotations

import logging
from typing import Any, Optional, Union

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from pydantic import BaseModel, Field
from sqlalchemy.exc import DataError as DatabaseDataError
from sqlalchemy.exc import IntegrityError, OperationalError
from starlette.exceptions import HTTPException as StarletteHTTPException

from kinetics.errors import (
    ConvergenceError,
    DataError,
    FitError,
    IdentifiabilityError,
    InputError,
    KineticsError,
    UnitError,
)

__all__ = [
    "ServiceError",
    "NotFound",
    "Conflict",
    "TooLarge",
    "ItemErrors",
    "install_error_handlers",
    "kinetics_error_body",
    "ErrorItem",
    "ErrorBody",
    "ERROR_RESPONSES",
    "json_error_media_types",
    "UNAVAILABLE_BODY",
]

#: the 503 body, also sent by the ASGI middlewares (:func:`service.security.send_unavailable`)
UNAVAILABLE_BODY = {
    "error": "unavailable",
    "detail": "the database is busy or unreachable; nothing was stored - retry shortly",
}

log = logging.getLogger("fieldrate.service")


class ErrorItem(BaseModel):
    """One problem, located by its path in the request (``["body", "runs", 3, "pH"]``)."""

    loc: list[Union[str, int]]
    msg: str
    type: str
    input: Optional[Any] = None


class ErrorBody(BaseModel):
    """The body of every error response."""

    error: str = Field(description="machine-readable code, e.g. validation_error, not_found")
    detail: Union[str, list[ErrorItem]] = Field(description="message for a person, or the list of problems")
    loc: Optional[list[Union[str, int]]] = None


#: documented error responses of every /v1 route
ERROR_RESPONSES: dict[Union[int, str], dict[str, Any]] = {
    401: {"model": ErrorBody, "description": "A missing, unknown or revoked API key"},
    403: {"model": ErrorBody, "description": "The API key lacks the scope this operation needs"},
    404: {"model": ErrorBody, "description": "An id that does not exist"},
    409: {"model": ErrorBody, "description": "A duplicate, or a change to a run that is not current"},
    413: {"model": ErrorBody, "description": "A body, series or request beyond the configured limits"},
    422: {"model": ErrorBody, "description": "Invalid input, or data that cannot support the fit"},
    503: {"model": ErrorBody, "description": "The database is busy or unreachable; retry"},
}


class ServiceError(Exception):
    """Base of the errors the service raises on purpose."""

    status_code = 400
    code = "bad_request"

    def __init__(self, message: str, *, loc: list[Any] | None = None):
        super().__init__(message)
        self.message = message
        self.loc = loc


class NotFound(ServiceError):
    status_code = 404
    code = "not_found"


class Conflict(ServiceError):
    status_code = 409
    code = "conflict"


class TooLarge(ServiceError):
    status_code = 413
    code = "too_large"


class ItemErrors(ServiceError):
    """Several problems, each with its location (e.g. ``["body", "runs", 3, "pH"]``)."""

    def __init__(self, items: list[dict[str, Any]], *, status_code: int = 422):
        super().__init__(f"{len(items)} problem(s) in the request")
        self.items = items
        self.status_code = status_code
        self.code = "validation_error" if status_code == 422 else "conflict"


def _jsonable(value: Any) -> Any:
    """Make a validation error's ``input``/``ctx`` safe for JSON (no NaN, no objects)."""
    if isinstance(value, float):
        return value if value == value and value not in (float("inf"), float("-inf")) else repr(value)
    if isinstance(value, (str, int, bool)) or value is None:
        return value
    if isinstance(value, (list, tuple)):
        if len(value) > 20:
            return f"<{len(value)} values>"
        return [_jsonable(v) for v in value]
    if isinstance(value, dict):
        if len(value) > 30:
            return f"<object with {len(value)} fields>"
        return {str(k): _jsonable(v) for k, v in value.items()}
    return str(value)


def _validation_items(errors: list[dict[str, Any]]) -> list[dict[str, Any]]:
    out = []
    for err in errors:
        loc = list(err.get("loc", ()))
        msg = str(err.get("msg", "invalid value"))
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, "):]
        field = ".".join(str(p) for p in loc if p != "body")
        item = {
            "loc": loc,
            "msg": f"{field}: {msg}" if field else msg,
            "type": err.get("type", "value_error"),
        }
        if "input" in err and err.get("type") != "missing":
            item["input"] = _jsonable(err["input"])
        out.append(item)
    return out


def _kinetics_code(exc: KineticsError) -> str:
    if isinstance(exc, UnitError):
        return "unit_error"
    if isinstance(exc, DataError):
        return "data_error"
    if isinstance(exc, InputError):
        return "input_error"
    if isinstance(exc, IdentifiabilityError):
        return "not_identifiable"
    if isinstance(exc, ConvergenceError):
        return "fit_did_not_converge"
    if isinstance(exc, FitError):
        return "fit_error"
    return "kinetics_error"


def kinetics_error_body(exc: KineticsError, *, loc: list[Any] | None = None) -> dict[str, Any]:
    """The JSON body for a kinetics error, with an explanation for fit failures."""
    message = str(exc)
    if isinstance(exc, FitError):
        message = (
            f"{message}. The stored data cannot support this fit; add runs at other pH values "
            "or temperatures, or choose fewer pathways or a simpler model."
        )
    body: dict[str, Any] = {"error": _kinetics_code(exc), "detail": message}
    if loc is not None:
        body["loc"] = loc
    return body


def json_error_media_types(schema: dict[str, Any]) -> dict[str, Any]:
    """Document error bodies as ``application/json`` also on routes answering HTML or CSV.

    FastAPI files the error responses of :data:`ERROR_RESPONSES` under the route's own
    media type (``text/html`` for the report); the handlers above always answer JSON.
    """
    for path_item in schema.get("paths", {}).values():
        for operation in path_item.values():
            if not isinstance(operation, dict):
                continue
            for status, response in operation.get("responses", {}).items():
                content = response.get("content") if isinstance(response, dict) else None
                if not status.startswith(("4", "5")) or not content or "application/json" in content:
                    continue
                for media_type in list(content):
                    schema_ref = content[media_type].get("schema", {}).get("$ref", "")
                    if schema_ref.endswith("/ErrorBody"):
                        content["application/json"] = content.pop(media_type)
    return schema


def install_error_handlers(app: FastAPI) -> None:
    """Register the handlers that turn every foreseen error into a 4xx with a clear message."""

    @app.exception_handler(RequestValidationError)
    async def _validation(_request: Request, exc: RequestValidationError) -> JSONResponse:
        return JSONResponse(
            status_code=422,
            content={"error": "validation_error", "detail": _validation_items(list(exc.errors()))},
        )

    @app.exception_handler(StarletteHTTPException)
    async def _http(_request: Request, exc: StarletteHTTPException) -> JSONResponse:
        if exc.status_code == 400:
            # FastAPI's answer to a body it cannot read at all (not UTF-8 text, cut short)
            return JSONResponse(status_code=422, content={
                "error": "validation_error",
                "detail": [{"loc": ["body"], "type": "json_invalid",
                            "msg": "the request body cannot be read as JSON text (UTF-8); "
                            "nothing was stored"}],
            })
        code = {404: "not_found", 405: "method_not_allowed"}.get(exc.status_code, "http_error")
        return JSONResponse(status_code=exc.status_code, headers=exc.headers,
                            content={"error": code, "detail": str(exc.detail)})

    @app.exception_handler(OverflowError)
    async def _overflow(_request: Request, exc: OverflowError) -> JSONResponse:
        # SQLite's driver refuses integers beyond 64 bits (an id or offset of 30 digits)
        log.info("integer out of range: %s", exc)
        return JSONResponse(status_code=422, content={
            "error": "validation_error",
            "detail": "an integer in the request (an id, limit or offset) is larger than "
            f"{2**63 - 1}, the largest the database holds; nothing was stored",
        })

    @app.exception_handler(ItemErrors)
    async def _items(_request: Request, exc: ItemErrors) -> JSONResponse:
        return JSONResponse(
            status_code=exc.status_code, content={"error": exc.code, "detail": exc.items}
        )

    @app.exception_handler(ServiceError)
    async def _service(_request: Request, exc: ServiceError) -> JSONResponse:
        body: dict[str, Any] = {"error": exc.code, "detail": exc.message}
        if exc.loc is not None:
            body["loc"] = exc.loc
        return JSONResponse(
            status_code=exc.status_code, content=body, headers=getattr(exc, "headers", None)
        )

    @app.exception_handler(KineticsError)
    async def _kinetics(_request: Request, exc: KineticsError) -> JSONResponse:
        return JSONResponse(status_code=422, content=kinetics_error_body(exc))

    @app.exception_handler(IntegrityError)
    async def _integrity(_request: Request, exc: IntegrityError) -> JSONResponse:
        # a unique constraint hit by a concurrent writer: the request changed nothing
        log.info("integrity conflict: %s", exc.orig)
        return JSONResponse(
            status_code=409,
            content={
                "error": "conflict",
                "detail": "the record conflicts with one stored at the same moment (a duplicate "
                "name, CAS RN or run); nothing was stored - read the current state and retry",
            },
        )

    @app.exception_handler(DatabaseDataError)
    async def _database_data(_request: Request, exc: DatabaseDataError) -> JSONResponse:
        # a value the database cannot hold (e.g. a NUL character in text): nothing stored
        log.info("value refused by the database: %s", exc.orig)
        return JSONResponse(
            status_code=422,
            content={
                "error": "validation_error",
                "detail": "a value in the request cannot be stored or searched for (text with a "
                "NUL character, or a number out of range); nothing was stored",
            },
        )

    @app.exception_handler(OperationalError)
    async def _operational(_request: Request, exc: OperationalError) -> JSONResponse:
        log.warning("database unavailable: %s", exc.orig)
        return JSONResponse(
            status_code=503,
            content=UNAVAILABLE_BODY,
            headers={"Retry-After": "1"},
        )
