"""CSV exchange: import runs from CSV; export runs, fits and predictions as CSV or JSON."""

from __future__ import annotations

import math
from typing import Annotated, Any, Literal, Optional

import numpy as np
from fastapi import APIRouter, Body, Depends, Query, Request
from fastapi.responses import JSONResponse, Response
from pydantic import AwareDatetime, BaseModel, ConfigDict, Field, model_validator
from sqlalchemy import select

from kinetics import units
from kinetics.caution import CAUTION_TEXT
from service import crud, csv_io, report
from service.deps import Principal, ReadSession, SettingsDep, require_scope
from service.errors import ItemErrors, ServiceError, TooLarge
from service.idempotency import stores_data
from service.schemas import FitOptions

router = APIRouter(tags=["csv exchange"])

Format = Literal["csv", "json"]

_CSV_EXAMPLE = (
    "# INVENTED DATA for illustration only\n"
    "substance,laboratory,run,temperature_C,pH,time_d,concentration_mg_per_L\n"
    "Quillorane (invented),Invented Riverside Laboratory,A,50,9,0,10.0\n"
    "Quillorane (invented),Invented Riverside Laboratory,A,50,9,1,6.1\n"
    "Quillorane (invented),Invented Riverside Laboratory,A,50,9,2,3.7\n"
    "Quillorane (invented),Invented Riverside Laboratory,A,50,9,4,1.4\n"
)


class _Forbidden(ServiceError):
    status_code = 403
    code = "forbidden"


def _csv_response(text: str, filename: str) -> Response:
    return Response(text, media_type="text/csv; charset=utf-8",
                    headers={"Content-Disposition": f'attachment; filename="{filename}"'})


def _problems_to_items(exc: csv_io.CsvFormatError) -> list[dict[str, Any]]:
    items = [{"loc": ["body", "line", p.line] + ([p.column] if p.column else []),
              "msg": str(p), "type": "csv_error"} for p in exc.problems]
    if exc.truncated:
        items.append({"loc": ["body"], "msg": "stopped after the first problems; fix these "
                      "and import again", "type": "csv_error"})
    return items


@router.post(
    "/imports/runs.csv",
    status_code=201,
    dependencies=[Depends(stores_data)],  # honours Idempotency-Key
    summary="Import runs from a CSV file (one row per observation), all or nothing",
    openapi_extra={"requestBody": {"required": True, "content": {
        "text/csv": {"schema": {"type": "string"}, "example": _CSV_EXAMPLE}}}},
)
async def import_runs_csv(
    request: Request,
    settings: SettingsDep,
    principal: Annotated[Principal, Depends(require_scope("ingest"))],
) -> JSONResponse:
    """Read the CSV body (columns documented in the README and in
    ``openapi_examples/runs_template.csv``), validate every row and store all runs in one
    transaction. Substances and studies named in the file are created when missing (a new
    substance needs the ``admin`` scope). Problems are answered as 422 with one item per
    problem, located by line number (the header is line 1); duplicates of stored runs are
    409. Nothing is stored unless everything is valid.
    """
    raw = await request.body()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ItemErrors([{"loc": ["body"], "msg": f"the file is not UTF-8 text (byte "
                           f"{exc.start} cannot be decoded); save it as UTF-8 CSV",
                           "type": "csv_error"}]) from None
    try:
        runs = csv_io.parse_runs_csv(text.splitlines())
    except csv_io.CsvFormatError as exc:
        raise ItemErrors(_problems_to_items(exc)) from None
    import anyio

    def _store() -> dict[str, Any]:
        from service.db import WRITE_OPTION

        session = request.app.state.session_factory()
        try:
            session.connection(execution_options={WRITE_OPTION: True})
            summary = csv_io.store_runs(
                session, runs, actor=principal.label, max_points=settings.max_points_per_series,
                may_create_substances="admin" in principal.scopes)
            session.commit()
            return summary.to_dict()
        except csv_io.CsvFormatError as exc:
            raise ItemErrors(_problems_to_items(exc)) from None
        except csv_io.NewSubstanceRefused as exc:
            raise _Forbidden(str(exc)) from None
        finally:
            session.rollback()
            session.close()

    body = await anyio.to_thread.run_sync(_store)
    return JSONResponse(status_code=201, content=body)


def _as_of_runs(session, substance_id: int, as_of):
    crud.get_substance(session, substance_id=substance_id)
    return report.runs_as_of(session, substance_id, as_of)


@router.get("/substances/{substance_id}/export/runs",
            summary="Export the runs of a substance (CSV in the import format, or JSON)",
            responses={200: {"content": {"text/csv": {}, "application/json": {}}}})
def export_runs(
    substance_id: int,
    session: ReadSession,
    _p: Annotated[Principal, Depends(require_scope("read"))],
    format: Annotated[Format, Query(description="csv (import format) or json")] = "csv",
    as_of: Annotated[Optional[AwareDatetime], Query(description="data as they were then")]
    = None,
) -> Response:
    """The current run versions (or those current at ``as_of``) in the units the laboratory
    sent. The CSV imports again unchanged; the JSON holds the runs as the API shows them."""
    from service.models import Study
    from service.schemas import run_public

    runs = _as_of_runs(session, substance_id, as_of)
    version = report.data_version_of(substance_id, [r.id for r in runs])
    substance = crud.get_substance(session, substance_id=substance_id)
    if format == "json":
        return JSONResponse({"substance_id": substance_id, "data_version": version,
                             "runs": [run_public(r).model_dump(mode="json") for r in runs]})
    studies = {st.id: st for st in session.scalars(
        select(Study).where(Study.substance_id == substance_id)).all()}
    csv_runs = [csv_io.csv_run_from_stored(r, substance=substance.name, study=studies[r.study_id])
                for r in runs]
    comment = f"runs of {substance.name}; data version {version}"
    return _csv_response(csv_io.runs_to_csv(csv_runs, comment=comment),
                         f"runs-substance-{substance_id}.csv")


def _fit(request: Request, substance_id: int, as_of, options: FitOptions):
    fitted = report.fit_substance(request.app.state.session_factory, substance_id,
                                  as_of=as_of, options=options)
    fitted.raise_error()
    model_of = {d.get("run_uid"): d.get("series_model") for d in fitted.result.runs}
    views = [report.run_view(r, error_model=options.error_model, model=model_of.get(r.run_uid))
             for r in fitted.runs]
    return fitted, views


def _options(q: FitOptions) -> FitOptions:
    return FitOptions(**q.model_dump(include=set(FitOptions.model_fields)))


class FitsQuery(FitOptions):
    """Export format and the fit options of the model."""

    format: Format = "csv"
    part: Literal["runs", "surface"] = Field(
        default="runs", description="CSV only: the per-run fits or the surface parameters")
    level: float = Field(default=0.95, gt=0.0, lt=1.0, description="confidence level")
    as_of: Optional[AwareDatetime] = Field(default=None, description="data as they were then")


class PredictionsQuery(FitOptions):
    """Export format and the fit options of the model."""

    format: Format = "csv"


@router.get("/substances/{substance_id}/export/fits",
            summary="Export the per-run fits and the rate-surface parameters (CSV or JSON)",
            responses={200: {"content": {"text/csv": {}, "application/json": {}}}})
def export_fits(
    substance_id: int,
    request: Request,
    q: Annotated[FitsQuery, Query()],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> Response:
    """Per run: model, k with its interval, DT50, DT90, chi-square error level; per surface
    parameter: estimate, standard error and interval. Same fit options as the model endpoint."""
    fitted, views = _fit(request, substance_id, q.as_of, _options(q))
    surface, version = fitted.result.surface, fitted.data_version
    level, format, part = q.level, q.format, q.part
    entries = [({"run_uid": v.run_uid, "run": v.label, "temperature_K": v.temperature_K,
                 "pH": v.pH}, v.fit) for v in views if v.fit is not None]
    run_rows = csv_io.series_fit_rows(entries, level)
    surface_rows = csv_io.surface_parameter_rows(surface, level)
    if format == "json":
        return JSONResponse({"substance_id": substance_id, "data_version": version,
                             "level": level, "runs": _clean(run_rows),
                             "surface": {"pathways": list(surface.pathways),
                                         "temperature_model": surface.temperature_model,
                                         "parameters": _clean(surface_rows)},
                             "caution": CAUTION_TEXT})
    rows = run_rows if part == "runs" else surface_rows
    what = "per-run fits" if part == "runs" else "rate-surface parameters"
    comment = f"{what} of substance {substance_id}; data version {version}\n{CAUTION_TEXT}"
    return _csv_response(csv_io.rows_to_csv(rows, comment=comment),
                         f"fits-{part}-substance-{substance_id}.csv")


def _clean(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    return [{k: (None if isinstance(v, float) and not math.isfinite(v) else v)
             for k, v in r.items()} for r in rows]


class ExportCondition(BaseModel):
    """One field condition."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    temperature_K: Optional[float] = Field(default=None, description="[K]")
    temperature_C: Optional[float] = Field(default=None, description="[°C]")
    pH: float
    ionic_strength_M: float = Field(default=0.0, ge=0.0, le=10.0, description="[mol/L]")
    salinity: float = Field(default=0.0, ge=0.0, le=45.0, description="practical salinity")

    @model_validator(mode="after")
    def _one_temperature(self) -> "ExportCondition":
        if (self.temperature_K is None) == (self.temperature_C is None):
            raise ValueError("give exactly one of temperature_K or temperature_C")
        return self

    @property
    def kelvin(self) -> float:
        if self.temperature_K is not None:
            return float(self.temperature_K)
        return float(units.celsius_to_kelvin(self.temperature_C))


class ExportPredictionsRequest(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    conditions: list[ExportCondition] = Field(min_length=1)
    level: float = Field(default=0.95, gt=0.0, lt=1.0)


@router.post("/substances/{substance_id}/export/predictions",
             summary="Predictions at field conditions as CSV or JSON (one row per condition)",
             responses={200: {"content": {"text/csv": {}, "application/json": {}}}})
def export_predictions(
    substance_id: int,
    request: Request,
    settings: SettingsDep,
    q: Annotated[PredictionsQuery, Query()],
    _p: Annotated[Principal, Depends(require_scope("read"))],
    body: Annotated[ExportPredictionsRequest, Body(openapi_examples={"pond": {
        "summary": "an invented pond at two temperatures",
        "value": {"conditions": [{"temperature_C": 12, "pH": 8.3},
                                 {"temperature_C": 22, "pH": 8.3}], "level": 0.95}}})],
) -> Response:
    """k, DT50 and DT90 with confidence and prediction intervals, the dominant pathway, the
    pathway shares and the extrapolation flags; the caution is the first line of the CSV."""
    from kinetics.prediction import predict

    if len(body.conditions) > settings.max_conditions_per_request:
        raise TooLarge(f"{len(body.conditions)} conditions; at most "
                       f"{settings.max_conditions_per_request} per request")
    format = q.format
    fitted = report.fit_substance(request.app.state.session_factory, substance_id,
                                  options=_options(q))
    fitted.raise_error()
    surface, version = fitted.result.surface, fitted.data_version
    conds = body.conditions
    pred = predict(surface, np.array([c.kelvin for c in conds]), np.array([c.pH for c in conds]),
                   ionic_strength_M=np.array([c.ionic_strength_M for c in conds]),
                   salinity=np.array([c.salinity for c in conds]), level=body.level)
    rows = csv_io.predictions_to_rows(pred)
    if format == "json":
        return JSONResponse({"substance_id": substance_id, "data_version": version,
                             "caution": CAUTION_TEXT, "predictions": _clean(rows)})
    comment = f"{CAUTION_TEXT}\npredictions for substance {substance_id}; data version {version}"
    return _csv_response(csv_io.rows_to_csv(rows, comment=comment),
                         f"predictions-substance-{substance_id}.csv")
