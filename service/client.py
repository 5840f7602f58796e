"""Python clients of the fieldrate HTTP API (synchronous and asynchronous, on httpx).

Example
-------
>>> from service.client import Client
>>> with Client("http://127.0.0.1:8000", api_key="frk_...") as fr:   # doctest: +SKIP
...     substance = fr.find_substance("Veltrazine (invented)")
...     result = fr.predict(substance.id, [{"temperature_C": 12, "pH": 8.3}])
...     print(result["predictions"][0]["dt50_s"] / 86400, "days")

Behaviour common to both clients:

* **Typed results.** Stored resources come back as the service's own pydantic models
  (:class:`~service.schemas.SubstancePublic`, :class:`~service.schemas.StudyPublic`,
  :class:`~service.schemas.RunPublic`, :class:`~service.schemas.Page`); computed results
  (models, predictions, fits) as the JSON dictionaries the API documents.
* **Retries.** Connection failures, timeouts and the answers 429, 502, 503 and 504 are
  retried (``retries`` times, exponential back-off from ``backoff_s``, honouring
  ``Retry-After`` up to ``max_backoff_s``). Every POST carries an ``Idempotency-Key``
  generated once per call and reused on each retry, so a retried POST never stores
  anything twice.
* **Errors.** Any other 4xx/5xx answer raises a subclass of :class:`FieldrateError`
  carrying the status code, the service's error code and its message; a network failure
  that outlasts the retries raises :class:`ServiceUnreachable`.
"""

from __future__ import annotations

import asyncio
import random
import time
import uuid
from collections.abc import Iterable, Mapping, Sequence
from typing import Any, Optional, TypeVar

import httpx
from pydantic import BaseModel

from service.schemas import Page, RunPublic, StudyPublic, SubstancePublic

__all__ = [
    "Client",
    "AsyncClient",
    "FieldrateError",
    "BadRequest",
    "AuthenticationError",
    "PermissionDenied",
    "NotFoundError",
    "ConflictError",
    "PayloadTooLarge",
    "ValidationFailed",
    "ServerError",
    "ServiceUnavailable",
    "ServiceUnreachable",
    "RETRY_STATUSES",
    "DEFAULT_BASE_URL",
]

DEFAULT_BASE_URL = "http://127.0.0.1:8000"
#: answers that are retried (the request may succeed later)
RETRY_STATUSES = frozenset({429, 502, 503, 504})
_IDEMPOTENCY_HEADER = "Idempotency-Key"
_RETRY_EXCEPTIONS = (httpx.TransportError,)

M = TypeVar("M", bound=BaseModel)


# ------------------------------------------------------------------ errors
class FieldrateError(Exception):
    """An error answer of the service.

    Attributes
    ----------
    status_code : int
        HTTP status (0 when the service was not reached).
    code : str
        The service's error code (``"validation_error"``, ``"not_found"``, ...).
    detail : str or list
        The service's message, or for validation errors the list of problems
        (each with ``loc`` and ``msg``).
    method, url : str
        The request that failed.
    """

    def __init__(self, message: str, *, status_code: int = 0, code: str = "",
                 detail: Any = None, method: str = "", url: str = ""):
        super().__init__(message)
        self.status_code = status_code
        self.code = code
        self.detail = detail
        self.method = method
        self.url = url


class BadRequest(FieldrateError):
    """400: the request is malformed."""


class AuthenticationError(FieldrateError):
    """401: no API key, or an unknown or revoked one."""


class PermissionDenied(FieldrateError):
    """403: the API key lacks the scope the operation needs."""


class NotFoundError(FieldrateError):
    """404: the substance, study or run does not exist."""


class ConflictError(FieldrateError):
    """409: a duplicate, or an Idempotency-Key reused for a different request."""


class PayloadTooLarge(FieldrateError):
    """413: the request exceeds a size limit."""


class ValidationFailed(FieldrateError):
    """422: the values are not acceptable (``detail`` lists each problem)."""


class ServerError(FieldrateError):
    """5xx: the service failed."""


class ServiceUnavailable(ServerError):
    """503 (after the retries): the database is busy or unreachable."""


class ServiceUnreachable(FieldrateError):
    """The service could not be reached (connection refused, timeout) after the retries."""


_BY_STATUS: dict[int, type[FieldrateError]] = {
    400: BadRequest, 401: AuthenticationError, 403: PermissionDenied, 404: NotFoundError,
    409: ConflictError, 413: PayloadTooLarge, 422: ValidationFailed, 503: ServiceUnavailable,
}


def _summarise(detail: Any) -> str:
    if isinstance(detail, list):
        msgs = [str(d.get("msg", d)) if isinstance(d, Mapping) else str(d) for d in detail]
        head = "; ".join(msgs[:3])
        return head + (f" (and {len(msgs) - 3} more)" if len(msgs) > 3 else "")
    return str(detail)


def _error_for(response: httpx.Response) -> FieldrateError:
    code, detail = "", None
    try:
        body = response.json()
    except ValueError:
        body = None
    if isinstance(body, Mapping):
        code = str(body.get("error", ""))
        detail = body.get("detail", body)
    if detail is None:
        detail = response.text.strip()[:500] or response.reason_phrase
    status = response.status_code
    cls = _BY_STATUS.get(status) or (ServerError if status >= 500 else FieldrateError)
    req = response.request
    message = f"{status} {code or response.reason_phrase}: {_summarise(detail)}"
    return cls(message, status_code=status, code=code, detail=detail, method=req.method,
               url=str(req.url))


# ------------------------------------------------------------------ shared request logic
class _Base:
    def __init__(self, base_url: str, api_key: Optional[str], timeout: float, retries: int,
                 backoff_s: float, max_backoff_s: float):
        if retries < 0:
            raise ValueError(f"retries must be >= 0, got {retries!r}")
        if backoff_s < 0 or max_backoff_s < 0:
            raise ValueError("backoff_s and max_backoff_s must be >= 0")
        self.base_url = base_url.rstrip("/")
        self.retries = int(retries)
        self.backoff_s = float(backoff_s)
        self.max_backoff_s = float(max_backoff_s)
        self.timeout = timeout
        self._headers = {"Accept": "application/json", "User-Agent": "fieldrate-client/0.1"}
        if api_key:
            self._headers["Authorization"] = f"Bearer {api_key}"

    def _delay(self, attempt: int, response: Optional[httpx.Response]) -> float:
        if response is not None:
            retry_after = response.headers.get("Retry-After")
            if retry_after:
                try:
                    return min(self.max_backoff_s, max(0.0, float(retry_after)))
                except ValueError:
                    pass
        base = self.backoff_s * (2 ** attempt)
        return min(self.max_backoff_s, base * (0.5 + random.random() / 2))

    @staticmethod
    def _prepare(method: str, headers: Optional[Mapping[str, str]]) -> dict[str, str]:
        out = dict(headers or {})
        if method.upper() == "POST" and _IDEMPOTENCY_HEADER not in out:
            out[_IDEMPOTENCY_HEADER] = f"fr-{uuid.uuid4()}"
        return out

    @staticmethod
    def _result(response: httpx.Response) -> httpx.Response:
        if response.status_code >= 400:
            raise _error_for(response)
        return response

    @staticmethod
    def _unreachable(method: str, url: str, exc: Exception, attempts: int) -> ServiceUnreachable:
        return ServiceUnreachable(
            f"could not reach the fieldrate service at {url} after {attempts} attempt(s): "
            f"{type(exc).__name__}: {exc}", method=method, url=url)

    # request bodies ------------------------------------------------------
    @staticmethod
    def _drop_none(values: Mapping[str, Any]) -> dict[str, Any]:
        return {k: v for k, v in values.items() if v is not None}


def _report_params(field_temperature_C: float, pH: Optional[Sequence[float]], salinity: float,
                   level: float, as_of: Optional[str], fit_options: Mapping[str, Any]) -> dict:
    params: dict[str, Any] = {"field_temperature_C": field_temperature_C, "salinity": salinity,
                              "level": level}
    if pH:
        params["pH"] = list(pH)
    if as_of:
        params["as_of"] = as_of
    params.update({k: v for k, v in fit_options.items() if v is not None})
    return params


def _page(model: type[M], data: Any) -> Page[M]:
    return Page[model].model_validate(data)  # type: ignore[valid-type]


class Client(_Base):
    """Synchronous client.

    Parameters
    ----------
    base_url : str
        Address of the service, e.g. ``http://127.0.0.1:8000``.
    api_key : str or None
        API key, sent as ``Authorization: Bearer <key>``.
    timeout : float
        Timeout of each attempt [s].
    retries : int
        How many times a failed attempt is repeated (0: never).
    backoff_s, max_backoff_s : float
        First back-off delay and the longest delay between attempts [s].
    transport : httpx.BaseTransport or None
        Custom transport (tests; a WSGI or mounted transport).
    """

    def __init__(self, base_url: str = DEFAULT_BASE_URL, *, api_key: Optional[str] = None,
                 timeout: float = 60.0, retries: int = 3, backoff_s: float = 0.5,
                 max_backoff_s: float = 8.0, transport: Optional[httpx.BaseTransport] = None):
        super().__init__(base_url, api_key, timeout, retries, backoff_s, max_backoff_s)
        self._http = httpx.Client(base_url=self.base_url, headers=self._headers,
                                  timeout=timeout, transport=transport)

    def close(self) -> None:
        """Close the connection pool."""
        self._http.close()

    def __enter__(self) -> "Client":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()

    def request(self, method: str, path: str, *, json: Any = None, params: Any = None,
                content: Any = None, headers: Optional[Mapping[str, str]] = None) -> httpx.Response:
        """Send a request with retries; raise :class:`FieldrateError` on an error answer.

        A POST gets an ``Idempotency-Key`` (unless ``headers`` has one) that every retry
        of this call reuses.
        """
        hdrs = self._prepare(method, headers)
        url = f"{self.base_url}{path}"
        last_exc: Optional[Exception] = None
        for attempt in range(self.retries + 1):
            response = None
            try:
                response = self._http.request(method, path, json=json, params=params,
                                              content=content, headers=hdrs)
            except _RETRY_EXCEPTIONS as exc:
                last_exc = exc
            else:
                if response.status_code not in RETRY_STATUSES or attempt == self.retries:
                    return self._result(response)
            if attempt < self.retries:
                time.sleep(self._delay(attempt, response))
        assert last_exc is not None
        raise self._unreachable(method, url, last_exc, self.retries + 1)

    def _json(self, method: str, path: str, **kw: Any) -> Any:
        return self.request(method, path, **kw).json()

    # health -------------------------------------------------------------
    def health(self) -> dict[str, Any]:
        """``GET /health``: the process is alive."""
        return self._json("GET", "/health")

    def ready(self) -> dict[str, Any]:
        """``GET /ready``: database reachable and schema current (503 otherwise)."""
        return self._json("GET", "/ready")

    # substances ---------------------------------------------------------
    def create_substance(self, name: str, *, cas_rn: Optional[str] = None,
                         smiles: Optional[str] = None, substance_class: Optional[str] = None,
                         notes: Optional[str] = None) -> SubstancePublic:
        """Register a substance (needs the ``admin`` scope)."""
        body = self._drop_none(dict(name=name, cas_rn=cas_rn, smiles=smiles,
                                    substance_class=substance_class, notes=notes))
        return SubstancePublic.model_validate(self._json("POST", "/v1/substances", json=body))

    def get_substance(self, substance_id: int) -> SubstancePublic:
        """Read one substance."""
        return SubstancePublic.model_validate(self._json("GET", f"/v1/substances/{substance_id}"))

    def list_substances(self, *, name_contains: Optional[str] = None, limit: int = 100,
                        offset: int = 0) -> Page[SubstancePublic]:
        """One page of substances."""
        params = self._drop_none(dict(name_contains=name_contains, limit=limit, offset=offset))
        return _page(SubstancePublic, self._json("GET", "/v1/substances", params=params))

    def find_substance(self, name: str) -> Optional[SubstancePublic]:
        """The substance with exactly this name, or None."""
        page = self.list_substances(name_contains=name, limit=1000)
        return next((s for s in page.items if s.name == name.strip()), None)

    # studies ------------------------------------------------------------
    def create_study(self, substance_id: int, laboratory: str, **fields: Any) -> StudyPublic:
        """Register a study (``test_guideline``, ``glp``, ``reference``, dates, ``notes``)."""
        body = self._drop_none(dict(substance_id=substance_id, laboratory=laboratory, **fields))
        return StudyPublic.model_validate(self._json("POST", "/v1/studies", json=body))

    def list_studies(self, *, substance_id: Optional[int] = None, limit: int = 100,
                     offset: int = 0) -> Page[StudyPublic]:
        """One page of studies."""
        params = self._drop_none(dict(substance_id=substance_id, limit=limit, offset=offset))
        return _page(StudyPublic, self._json("GET", "/v1/studies", params=params))

    # runs ---------------------------------------------------------------
    def create_run(self, study_id: int, run: Mapping[str, Any]) -> RunPublic:
        """Store one run (``run`` as the API's run body, without ``study_id``)."""
        body = {**run, "study_id": study_id}
        return RunPublic.model_validate(self._json("POST", "/v1/runs", json=body))

    def create_runs(self, runs: Sequence[Mapping[str, Any]]) -> list[RunPublic]:
        """Store many runs in one all-or-nothing request (each with its ``study_id``)."""
        data = self._json("POST", "/v1/runs/batch", json={"runs": list(runs)})
        return [RunPublic.model_validate(r) for r in data["created"]]

    def get_run(self, run_uid: str) -> RunPublic:
        """The newest version of a run."""
        return RunPublic.model_validate(self._json("GET", f"/v1/runs/{run_uid}"))

    def list_runs(self, *, limit: int = 100, offset: int = 0, **filters: Any) -> Page[RunPublic]:
        """One page of runs; filters: ``substance_id``, ``study_id``, ``status``, ..."""
        params = self._drop_none(dict(limit=limit, offset=offset, **filters))
        return _page(RunPublic, self._json("GET", "/v1/runs", params=params))

    def iter_runs(self, *, page_size: int = 500, **filters: Any) -> Iterable[RunPublic]:
        """All runs matching the filters, page by page."""
        offset = 0
        while True:
            page = self.list_runs(limit=page_size, offset=offset, **filters)
            yield from page.items
            offset += len(page.items)
            if not page.items or offset >= page.total:
                return

    def supersede_run(self, run_uid: str, run: Mapping[str, Any], reason: str) -> RunPublic:
        """Replace the current version of a run by a corrected one."""
        body = {**run, "reason": reason}
        return RunPublic.model_validate(
            self._json("POST", f"/v1/runs/{run_uid}/supersede", json=body))

    def withdraw_run(self, run_uid: str, reason: str) -> RunPublic:
        """Retract a run."""
        return RunPublic.model_validate(
            self._json("POST", f"/v1/runs/{run_uid}/withdraw", json={"reason": reason}))

    # models and predictions ----------------------------------------------
    def get_model(self, substance_id: int, *, level: float = 0.95,
                  **fit_options: Any) -> dict[str, Any]:
        """The fitted rate surface of a substance (parameters, covariance, per-run fits,
        flags, caution); ``fit_options`` as the API's fit options."""
        params = {"level": level, **{k: v for k, v in fit_options.items() if v is not None}}
        return self._json("GET", f"/v1/substances/{substance_id}/model", params=params)

    def predict(self, substance_id: int, conditions: Sequence[Mapping[str, Any]], *,
                level: float = 0.95, method: str = "delta",
                fit_options: Optional[Mapping[str, Any]] = None,
                **options: Any) -> dict[str, Any]:
        """k, DT50 and DT90 with intervals at field conditions (``temperature_C`` or
        ``temperature_K``, ``pH``, optional ``ionic_strength_M`` / ``salinity``)."""
        body = {"conditions": list(conditions), "level": level, "method": method, **options}
        if fit_options:
            body["fit_options"] = dict(fit_options)
        return self._json("POST", f"/v1/substances/{substance_id}/predictions", json=body)

    def calculate(self, runs: Sequence[Mapping[str, Any]],
                  conditions: Optional[Sequence[Mapping[str, Any]]] = None, *,
                  level: float = 0.95, fit_options: Optional[Mapping[str, Any]] = None,
                  **options: Any) -> dict[str, Any]:
        """Fit posted runs (not stored) and optionally predict at ``conditions``."""
        body: dict[str, Any] = {"runs": list(runs), "level": level, **options}
        if conditions is not None:
            body["conditions"] = list(conditions)
        if fit_options:
            body["fit_options"] = dict(fit_options)
        return self._json("POST", "/v1/calculate", json=body)

    # CSV, reports ---------------------------------------------------------
    def import_csv(self, csv_text: str) -> dict[str, Any]:
        """Import runs from CSV text (the documented column set); all or nothing."""
        return self._json("POST", "/v1/imports/runs.csv", content=csv_text.encode("utf-8"),
                          headers={"Content-Type": "text/csv"})

    def export_runs(self, substance_id: int, *, format: str = "csv",
                    as_of: Optional[str] = None) -> Any:
        """The current runs of a substance: CSV text in the import format, or JSON."""
        params = self._drop_none({"format": format, "as_of": as_of})
        r = self.request("GET", f"/v1/substances/{substance_id}/export/runs", params=params)
        return r.json() if format == "json" else r.text

    def export_fits(self, substance_id: int, *, format: str = "csv", part: str = "runs",
                    level: float = 0.95) -> Any:
        """Per-run fits (``part="runs"``) or surface parameters (``"surface"``): CSV or JSON."""
        params = {"format": format, "part": part, "level": level}
        r = self.request("GET", f"/v1/substances/{substance_id}/export/fits", params=params)
        return r.json() if format == "json" else r.text

    def export_predictions(self, substance_id: int, conditions: Sequence[Mapping[str, Any]], *,
                           level: float = 0.95, format: str = "csv") -> Any:
        """Predictions at ``conditions`` (``temperature_C`` or ``temperature_K``, ``pH``,
        optional ``ionic_strength_M``, ``salinity``): CSV text or JSON."""
        r = self.request("POST", f"/v1/substances/{substance_id}/export/predictions",
                         params={"format": format},
                         json={"conditions": list(conditions), "level": level})
        return r.json() if format == "json" else r.text

    def report_html(self, substance_id: int, *, field_temperature_C: float = 12.0,
                    pH: Optional[Sequence[float]] = None, salinity: float = 0.0,
                    level: float = 0.95, as_of: Optional[str] = None,
                    **fit_options: Any) -> str:
        """The HTML report of a substance.

        ``fit_options`` are the model's fit options (``temperature_model``, ``pathways``,
        ``series_model``, ``error_model``, ...); ``as_of`` an ISO 8601 time with zone.
        """
        params = _report_params(field_temperature_C, pH, salinity, level, as_of, fit_options)
        return self.request("GET", f"/v1/substances/{substance_id}/report", params=params,
                            headers={"Accept": "text/html"}).text


class AsyncClient(_Base):
    """Asynchronous client; the same methods as :class:`Client`, as coroutines.

    Parameters
    ----------
    base_url, api_key, timeout, retries, backoff_s, max_backoff_s
        As for :class:`Client`.
    transport : httpx.AsyncBaseTransport or None
        Custom transport, e.g. ``httpx.ASGITransport(app=create_app(settings))`` to talk
        to an application in the same process.
    """

    def __init__(self, base_url: str = DEFAULT_BASE_URL, *, api_key: Optional[str] = None,
                 timeout: float = 60.0, retries: int = 3, backoff_s: float = 0.5,
                 max_backoff_s: float = 8.0,
                 transport: Optional[httpx.AsyncBaseTransport] = None):
        super().__init__(base_url, api_key, timeout, retries, backoff_s, max_backoff_s)
        self._http = httpx.AsyncClient(base_url=self.base_url, headers=self._headers,
                                       timeout=timeout, transport=transport)

    async def aclose(self) -> None:
        """Close the connection pool."""
        await self._http.aclose()

    async def __aenter__(self) -> "AsyncClient":
        return self

    async def __aexit__(self, *exc: Any) -> None:
        await self.aclose()

    async def request(self, method: str, path: str, *, json: Any = None, params: Any = None,
                      content: Any = None,
                      headers: Optional[Mapping[str, str]] = None) -> httpx.Response:
        """As :meth:`Client.request`."""
        hdrs = self._prepare(method, headers)
        url = f"{self.base_url}{path}"
        last_exc: Optional[Exception] = None
        for attempt in range(self.retries + 1):
            response = None
            try:
                response = await self._http.request(method, path, json=json, params=params,
                                                    content=content, headers=hdrs)
            except _RETRY_EXCEPTIONS as exc:
                last_exc = exc
            else:
                if response.status_code not in RETRY_STATUSES or attempt == self.retries:
                    return self._result(response)
            if attempt < self.retries:
                await asyncio.sleep(self._delay(attempt, response))
        assert last_exc is not None
        raise self._unreachable(method, url, last_exc, self.retries + 1)

    async def _json(self, method: str, path: str, **kw: Any) -> Any:
        return (await self.request(method, path, **kw)).json()

    async def health(self) -> dict[str, Any]:
        return await self._json("GET", "/health")

    async def ready(self) -> dict[str, Any]:
        return await self._json("GET", "/ready")

    async def create_substance(self, name: str, *, cas_rn: Optional[str] = None,
                               smiles: Optional[str] = None,
                               substance_class: Optional[str] = None,
                               notes: Optional[str] = None) -> SubstancePublic:
        body = self._drop_none(dict(name=name, cas_rn=cas_rn, smiles=smiles,
                                    substance_class=substance_class, notes=notes))
        return SubstancePublic.model_validate(await self._json("POST", "/v1/substances", json=body))

    async def get_substance(self, substance_id: int) -> SubstancePublic:
        return SubstancePublic.model_validate(
            await self._json("GET", f"/v1/substances/{substance_id}"))

    async def list_substances(self, *, name_contains: Optional[str] = None, limit: int = 100,
                              offset: int = 0) -> Page[SubstancePublic]:
        params = self._drop_none(dict(name_contains=name_contains, limit=limit, offset=offset))
        return _page(SubstancePublic, await self._json("GET", "/v1/substances", params=params))

    async def find_substance(self, name: str) -> Optional[SubstancePublic]:
        page = await self.list_substances(name_contains=name, limit=1000)
        return next((s for s in page.items if s.name == name.strip()), None)

    async def create_study(self, substance_id: int, laboratory: str, **fields: Any) -> StudyPublic:
        body = self._drop_none(dict(substance_id=substance_id, laboratory=laboratory, **fields))
        return StudyPublic.model_validate(await self._json("POST", "/v1/studies", json=body))

    async def list_studies(self, *, substance_id: Optional[int] = None, limit: int = 100,
                           offset: int = 0) -> Page[StudyPublic]:
        params = self._drop_none(dict(substance_id=substance_id, limit=limit, offset=offset))
        return _page(StudyPublic, await self._json("GET", "/v1/studies", params=params))

    async def create_run(self, study_id: int, run: Mapping[str, Any]) -> RunPublic:
        body = {**run, "study_id": study_id}
        return RunPublic.model_validate(await self._json("POST", "/v1/runs", json=body))

    async def create_runs(self, runs: Sequence[Mapping[str, Any]]) -> list[RunPublic]:
        data = await self._json("POST", "/v1/runs/batch", json={"runs": list(runs)})
        return [RunPublic.model_validate(r) for r in data["created"]]

    async def get_run(self, run_uid: str) -> RunPublic:
        return RunPublic.model_validate(await self._json("GET", f"/v1/runs/{run_uid}"))

    async def list_runs(self, *, limit: int = 100, offset: int = 0,
                        **filters: Any) -> Page[RunPublic]:
        params = self._drop_none(dict(limit=limit, offset=offset, **filters))
        return _page(RunPublic, await self._json("GET", "/v1/runs", params=params))

    async def supersede_run(self, run_uid: str, run: Mapping[str, Any], reason: str) -> RunPublic:
        body = {**run, "reason": reason}
        return RunPublic.model_validate(
            await self._json("POST", f"/v1/runs/{run_uid}/supersede", json=body))

    async def withdraw_run(self, run_uid: str, reason: str) -> RunPublic:
        return RunPublic.model_validate(
            await self._json("POST", f"/v1/runs/{run_uid}/withdraw", json={"reason": reason}))

    async def get_model(self, substance_id: int, *, level: float = 0.95,
                        **fit_options: Any) -> dict[str, Any]:
        params = {"level": level, **{k: v for k, v in fit_options.items() if v is not None}}
        return await self._json("GET", f"/v1/substances/{substance_id}/model", params=params)

    async def predict(self, substance_id: int, conditions: Sequence[Mapping[str, Any]], *,
                      level: float = 0.95, method: str = "delta",
                      fit_options: Optional[Mapping[str, Any]] = None,
                      **options: Any) -> dict[str, Any]:
        body = {"conditions": list(conditions), "level": level, "method": method, **options}
        if fit_options:
            body["fit_options"] = dict(fit_options)
        return await self._json("POST", f"/v1/substances/{substance_id}/predictions", json=body)

    async def calculate(self, runs: Sequence[Mapping[str, Any]],
                        conditions: Optional[Sequence[Mapping[str, Any]]] = None, *,
                        level: float = 0.95, fit_options: Optional[Mapping[str, Any]] = None,
                        **options: Any) -> dict[str, Any]:
        body: dict[str, Any] = {"runs": list(runs), "level": level, **options}
        if conditions is not None:
            body["conditions"] = list(conditions)
        if fit_options:
            body["fit_options"] = dict(fit_options)
        return await self._json("POST", "/v1/calculate", json=body)

    async def import_csv(self, csv_text: str) -> dict[str, Any]:
        return await self._json("POST", "/v1/imports/runs.csv", content=csv_text.encode("utf-8"),
                                headers={"Content-Type": "text/csv"})

    async def export_runs(self, substance_id: int, *, format: str = "csv",
                          as_of: Optional[str] = None) -> Any:
        params = self._drop_none({"format": format, "as_of": as_of})
        r = await self.request("GET", f"/v1/substances/{substance_id}/export/runs", params=params)
        return r.json() if format == "json" else r.text

    async def export_fits(self, substance_id: int, *, format: str = "csv", part: str = "runs",
                          level: float = 0.95) -> Any:
        params = {"format": format, "part": part, "level": level}
        r = await self.request("GET", f"/v1/substances/{substance_id}/export/fits", params=params)
        return r.json() if format == "json" else r.text

    async def export_predictions(self, substance_id: int, conditions: Sequence[Mapping[str, Any]],
                                 *, level: float = 0.95, format: str = "csv") -> Any:
        r = await self.request("POST", f"/v1/substances/{substance_id}/export/predictions",
                               params={"format": format},
                               json={"conditions": list(conditions), "level": level})
        return r.json() if format == "json" else r.text

    async def report_html(self, substance_id: int, *, field_temperature_C: float = 12.0,
                          pH: Optional[Sequence[float]] = None, salinity: float = 0.0,
                          level: float = 0.95, as_of: Optional[str] = None,
                          **fit_options: Any) -> str:
        params = _report_params(field_temperature_C, pH, salinity, level, as_of, fit_options)
        return (await self.request("GET", f"/v1/substances/{substance_id}/report", params=params,
                                   headers={"Accept": "text/html"})).text
