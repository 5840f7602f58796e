"""The HTML report of a substance (read scope)."""

from __future__ import annotations

import datetime as dt
from typing import Annotated, Optional
from urllib.parse import urlencode

from fastapi import APIRouter, Depends, Query, Request
from fastapi.responses import HTMLResponse
from pydantic import AwareDatetime, Field

from kinetics import units
from service import report
from service.deps import Principal, require_scope
from service.schemas import FitOptions

router = APIRouter(tags=["reports"])


class ReportQuery(FitOptions):
    """What the report shows, plus the fit options of the model it is built on."""

    field_temperature_C: float = Field(default=12.0, ge=0.0, le=100.0,
                                       description="temperature of the field pH-rate profile "
                                       "and of the prediction table [°C]")
    pH: Optional[list[float]] = Field(default=None, description="pH values of the prediction "
                                      "table (repeat the parameter); default 5, 6, 7, 8, 9")
    salinity: float = Field(default=0.0, ge=0.0, le=45.0, description="practical salinity of "
                            "the prediction table (0: fresh water)")
    level: float = Field(default=0.95, gt=0.0, lt=1.0,
                         description="confidence level of bands and intervals")
    as_of: Optional[AwareDatetime] = Field(default=None, description="show the data as they "
                                           "were at this time (ISO 8601 with a time zone)")

    def fit_options(self) -> FitOptions:
        return FitOptions(**self.model_dump(include=set(FitOptions.model_fields)))


def reproduce_query(substance_id: int, q: ReportQuery, when: dt.datetime,
                    pH_values: tuple[float, ...]) -> str:
    """The request (path and query) that rebuilds a report from the data as of ``when``."""
    items: list[tuple[str, str]] = [
        ("field_temperature_C", f"{q.field_temperature_C:g}"), ("salinity", f"{q.salinity:g}"),
        ("level", f"{q.level:g}")]
    for name, value in q.fit_options().model_dump(mode="json").items():
        if value is not None and value != FitOptions.model_fields[name].default:
            items.append((name, str(value)))
    items += [("pH", f"{p:g}") for p in pH_values]
    items.append(("as_of", when.astimezone(dt.timezone.utc).isoformat().replace("+00:00", "Z")))
    return f"/v1/substances/{substance_id}/report?{urlencode(items)}"


@router.get(
    "/substances/{substance_id}/report",
    response_class=HTMLResponse,
    summary="HTML report of a substance: fits, pH-rate profiles, Arrhenius plots, predictions",
    responses={200: {"content": {"text/html": {}}, "description": "a self-contained HTML page"}},
)
def substance_report(
    substance_id: int,
    request: Request,
    q: Annotated[ReportQuery, Query()],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> HTMLResponse:
    """A printable HTML page with the study summary, every run's fit and residuals, the
    pH-rate profile at the measured temperatures and at the field temperature (pathway
    contributions, confidence band), an Arrhenius plot per pathway, field predictions with
    intervals and flags, and the caution. The page names its data version and generation
    time and shows the request (with ``as_of``) that reproduces it.
    """
    pH_values = tuple(q.pH) if q.pH else report.DEFAULT_FIELD_PH
    for value in pH_values:
        units.validate_pH(value)
    now = dt.datetime.now(dt.timezone.utc)
    data = report.gather(
        request.app.state.session_factory, substance_id,
        field_temperature_K=float(units.celsius_to_kelvin(q.field_temperature_C)),
        pH_values=pH_values, salinity=q.salinity, level=q.level, as_of=q.as_of,
        options=q.fit_options(),
        reproduce_query=reproduce_query(substance_id, q, q.as_of or now, pH_values), now=now,
    )
    return HTMLResponse(report.render_report(data))
