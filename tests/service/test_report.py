"""Tests of the HTML report (service.report) and its route, and of the CSV exchange routes."""

from __future__ import annotations

import datetime as dt
import html.parser
import math
import re
from pathlib import Path

import numpy as np
import pytest
import scipy.constants
from numpy.testing import assert_allclose

from kinetics.caution import CAUTION_TEXT
from service import csv_io, report

TEMPLATE = Path(__file__).resolve().parents[2] / "openapi_examples" / "runs_template.csv"


class _Plots(html.parser.HTMLParser):
    """Collects every <svg> with its declared and drawn series."""

    def __init__(self):
        super().__init__()
        self.plots: list[dict] = []
        self._current: dict | None = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "svg":
            self._current = {"id": a.get("data-plot"), "declared": int(a["data-series"]),
                             "drawn": 0}
            self.plots.append(self._current)
        elif tag == "path" and self._current is not None and \
                "series" in (a.get("class") or "").split():
            self._current["drawn"] += 1

    def handle_endtag(self, tag):
        if tag == "svg":
            self._current = None


def plots_of(page: str) -> dict[str, dict]:
    parser = _Plots()
    parser.feed(page)
    return {p["id"]: p for p in parser.plots}


@pytest.fixture(scope="module")
def template_data() -> report.ReportData:
    runs = csv_io.read_runs_csv(TEMPLATE)
    return report.gather_from_csv(runs, field_temperature_K=285.15, source="template",
                                  now=dt.datetime(2026, 1, 2, 3, 4, 5, tzinfo=dt.timezone.utc))


def test_report_has_every_section_and_plot(template_data):
    page = report.render_report(template_data)
    assert page.startswith("<!DOCTYPE html>")
    assert page.count(CAUTION_TEXT.replace("'", "&#x27;")) == 2  # top and bottom
    for heading in ("Study summary", "Rate surface", "pH-rate profile",
                    "Temperature dependence per pathway", "Field predictions",
                    "Fits of the individual runs"):
        assert f"<h2>{heading}</h2>" in page
    assert template_data.data_version in page
    assert "2026-01-02T03:04:05Z" in page
    plots = plots_of(page)
    n_runs = len(template_data.runs)
    surface = template_data.surface
    assert surface is not None
    # measured profile: a fitted line and the measured points at each of 3 temperatures
    assert plots["profile-measured"]["declared"] == 2 * 3
    # field profile: total, one line per pathway, two prediction limits
    assert plots["profile-field"]["declared"] == 1 + len(surface.pathways) + 2
    assert plots["contributions"]["declared"] == len(surface.pathways)
    for p in surface.pathways:
        assert plots[f"arrhenius-{p}"]["declared"] == 3
    assert sum(1 for k in plots if k.startswith("run-fit-")) == n_runs
    assert sum(1 for k in plots if k.startswith("run-res-")) == n_runs
    for p in plots.values():
        assert p["drawn"] == p["declared"], p
    assert not re.search(r"\bnan\b|\binf\b", page, flags=re.IGNORECASE)


def test_report_table_rows_match_a_direct_prediction(template_data):
    from kinetics.prediction import predict

    page = report.render_report(template_data)
    conds = template_data.conditions
    pred = predict(template_data.surface, np.array([c.temperature_K for c in conds]),
                   np.array([c.pH for c in conds]), level=0.95)
    body = page.split("<table class=predictions>")[1].split("</table>")[0]
    rows = body.split("<tr")[2:]
    assert len(rows) == len(conds)
    for row, dt50 in zip(rows, pred.dt50_s):
        shown = re.search(r"<b>([^<]+)</b>", row).group(1)
        assert shown == report.format_number(dt50 / 86400.0)


def test_pathway_line_matches_the_surface_rate_law(template_data):
    from kinetics.water import hydronium_hydroxide_molar

    surface = template_data.surface
    T = np.array([283.15, 298.15, 323.15])
    pH = 6.0
    k = surface.rate_per_s(T, np.full(3, pH))
    share = surface.contributions(T, np.full(3, pH))
    h, oh = hydronium_hydroxide_molar(np.full(3, pH), T)
    conc = {"acid": h, "neutral": np.ones(3), "base": oh}
    for p in surface.pathways:
        ln_k, lo, hi = report.pathway_ln_k(surface, p, T)
        # k_obs = sum_p k_p c_p, so k_p = share_p k_obs / c_p
        assert_allclose(np.exp(ln_k), share[p] * k / conc[p], rtol=1e-9, atol=0)
        assert np.all(lo < ln_k) and np.all(ln_k < hi)


def test_arrhenius_slope_is_minus_ea_over_r(template_data):
    surface = template_data.surface
    names = list(surface.parameter_names)
    for p in surface.pathways:
        ea = surface.estimates[names.index(f"Ea_{p}_J_per_mol")]
        T = np.array([290.0, 330.0])
        ln_k, _, _ = report.pathway_ln_k(surface, p, T)
        slope = (ln_k[1] - ln_k[0]) / (1 / T[1] - 1 / T[0])
        # Arrhenius: d ln k / d(1/T) = -Ea/R; R from scipy.constants (CODATA 2018 value)
        assert_allclose(slope, -ea / scipy.constants.R, rtol=1e-8)


def test_pathway_not_in_surface_is_refused(template_data):
    from kinetics.errors import InputError

    missing = [p for p in ("acid", "neutral", "base") if p not in template_data.surface.pathways]
    if not missing:
        missing = ["nonsense"]
    with pytest.raises(InputError, match="not in the fitted surface"):
        report.pathway_ln_k(template_data.surface, missing[0], [300.0])


@pytest.mark.parametrize(
    "value, expected",
    [(None, "–"), (float("nan"), "–"), (0.0, "0"), (123.456, "123"), (0.0123456, "0.0123"),
     (1234567.0, "1.23×10<sup>6</sup>"), (2.5e-7, "2.50×10<sup>−7</sup>"), (-1.5, "−1.50"),
     (9.996e-5, "1.00×10<sup>−4</sup>")],
)
def test_format_number(value, expected):
    assert report.format_number(value) == expected


def test_report_without_a_surface_explains_why():
    runs = csv_io.read_runs_csv(TEMPLATE)[:1]
    data = report.gather_from_csv(runs, field_temperature_K=285.15)
    page = report.render_report(data)
    assert data.surface is None
    assert "No rate surface could be fitted" in page
    assert "No predictions" in page
    assert CAUTION_TEXT.split(".")[0] in page


# ------------------------------------------------------------------ through the API
def _import_template(client) -> int:
    r = client.post("/v1/imports/runs.csv", content=TEMPLATE.read_bytes(),
                    headers={"Content-Type": "text/csv"})
    assert r.status_code == 201, r.text
    return r.json()["substance_ids"]["Quillorane (invented)"]


def test_report_route_serves_html_with_its_data_version(client):
    sid = _import_template(client)
    r = client.get(f"/v1/substances/{sid}/report", params={"field_temperature_C": 10,
                                                            "pH": [6.5, 8.5]})
    assert r.status_code == 200, r.text
    assert r.headers["content-type"].startswith("text/html")
    page = r.text
    model = client.get(f"/v1/substances/{sid}/model").json()
    assert f'data-version">{model["data_version"]}<' in page
    assert "10 °C, pH 6.5" in page and "10 °C, pH 8.5" in page
    plots = plots_of(page)
    assert all(p["drawn"] == p["declared"] for p in plots.values())
    # the request the page shows reproduces the data version
    shown = re.search(r"<code>GET ([^<]+)</code>", page).group(1).replace("&amp;", "&")
    again = client.get(shown)
    assert again.status_code == 200
    assert f'data-version">{model["data_version"]}<' in again.text


def test_report_as_of_before_the_data_has_no_fit_but_answers(client):
    sid = _import_template(client)
    r = client.get(f"/v1/substances/{sid}/report", params={"as_of": "2000-01-01T00:00:00Z"})
    assert r.status_code == 200
    assert "No rate surface could be fitted" in r.text
    assert "0 run(s)" in r.text


@pytest.mark.parametrize(
    "params, status, fragment",
    [
        ({"pH": 15}, 422, "pH 15"),
        ({"field_temperature_C": 150}, 422, "field_temperature_C"),
        ({"level": 1.5}, 422, "level"),
        ({"temperature_model": "quadratic"}, 422, "temperature_model"),
        ({"as_of": "2026-01-01T00:00:00"}, 422, "as_of"),
    ],
)
def test_report_route_rejects_bad_queries(client, params, status, fragment):
    sid = _import_template(client)
    r = client.get(f"/v1/substances/{sid}/report", params=params)
    assert r.status_code == status, r.text
    assert fragment in r.text


def test_report_route_unknown_substance_and_missing_key(client):
    assert client.get("/v1/substances/999/report").status_code == 404
    r = client.get("/v1/substances/1/report", headers={"Authorization": ""})
    assert r.status_code == 401


def test_csv_import_route_reports_line_numbers_and_stores_nothing(client):
    bad = TEMPLATE.read_text(encoding="utf-8").replace(",4,acetate", ",41,acetate", 1)
    r = client.post("/v1/imports/runs.csv", content=bad.encode(),
                    headers={"Content-Type": "text/csv"})
    assert r.status_code == 422
    item = r.json()["detail"][0]
    assert item["loc"] == ["body", "line", 3, "pH"]
    assert item["msg"].startswith("line 3, column 'pH': pH 41.0")
    assert client.get("/v1/substances").json()["total"] == 0
    r = client.post("/v1/imports/runs.csv", content=b"\xff\xfe\x00", headers={
        "Content-Type": "text/csv"})
    assert r.status_code == 422 and "UTF-8" in r.text


def test_csv_import_twice_is_a_conflict_naming_the_line(client):
    _import_template(client)
    r = client.post("/v1/imports/runs.csv", content=TEMPLATE.read_bytes(),
                    headers={"Content-Type": "text/csv"})
    assert r.status_code == 409
    assert r.json()["detail"][0]["msg"].startswith("line 3 (run 'pH4-20C-A')")


def test_exported_runs_import_again_unchanged(client):
    sid = _import_template(client)
    text = client.get(f"/v1/substances/{sid}/export/runs").text
    assert text.startswith("# runs of Quillorane (invented)")
    exported = csv_io.parse_runs_csv(text.splitlines())
    original = csv_io.read_runs_csv(TEMPLATE)
    assert len(exported) == len(original)
    for a, b in zip(exported, original):
        assert (a.replicate_label, a.time_unit, a.concentration_unit) == \
            (b.replicate_label, b.time_unit, b.concentration_unit)
        assert_allclose([o.concentration for o in a.observations],
                        [o.concentration for o in b.observations], rtol=1e-12, atol=0)
    as_json = client.get(f"/v1/substances/{sid}/export/runs", params={"format": "json"}).json()
    assert len(as_json["runs"]) == len(original)


def test_exported_fits_equal_the_model_endpoint(client):
    sid = _import_template(client)
    model = client.get(f"/v1/substances/{sid}/model").json()
    fits = client.get(f"/v1/substances/{sid}/export/fits", params={"format": "json"}).json()
    assert fits["data_version"] == model["data_version"]
    by_uid = {r["run_uid"]: r for r in model["runs"]}
    for row in fits["runs"]:
        assert_allclose(row["k_per_s"], by_uid[row["run_uid"]]["k_per_s"], rtol=1e-12, atol=0)
    est = {p["name"]: p["estimate"] for p in model["parameters"]}
    for row in fits["surface"]["parameters"]:
        assert_allclose(row["estimate"], est[row["parameter"]], rtol=1e-12, atol=0)
    text = client.get(f"/v1/substances/{sid}/export/fits", params={"part": "surface"}).text
    assert "# Screening estimate only." in text
    assert text.splitlines()[2].startswith("parameter,estimate,standard_error")


def test_exported_predictions_equal_the_predictions_endpoint(client):
    sid = _import_template(client)
    conditions = [{"temperature_C": 12, "pH": 8.3}, {"temperature_K": 300.0, "pH": 6.0}]
    api = client.post(f"/v1/substances/{sid}/predictions", json={"conditions": conditions})
    assert api.status_code == 200, api.text
    exported = client.post(f"/v1/substances/{sid}/export/predictions",
                           params={"format": "json"}, json={"conditions": conditions}).json()
    assert exported["caution"] == CAUTION_TEXT
    for a, b in zip(api.json()["predictions"], exported["predictions"]):
        assert_allclose(b["dt50_s"], a["dt50_s"], rtol=1e-12, atol=0)
        assert_allclose(b["k_pi_high_per_s"], a["k_pi_high_per_s"], rtol=1e-12, atol=0)
    text = client.post(f"/v1/substances/{sid}/export/predictions",
                       json={"conditions": conditions}).text
    lines = text.splitlines()
    assert lines[0] == f"# {CAUTION_TEXT}"
    header = lines[2].split(",")
    assert header[:2] == ["temperature_K", "pH"] and "dt50_ci_low_s" in header
    assert len(lines) == 3 + len(conditions)
    assert not any(math.isnan(float(v)) for v in lines[3].split(",")[:3])
