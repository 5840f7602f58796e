"""Run routes: storage in SI units, versions, withdrawal, batches, and every bad-input class."""

from __future__ import annotations

import json

import pytest
from numpy.testing import assert_allclose

from service_helpers import make_study, series_run_body


def _audit_count(app) -> int:
    from sqlalchemy import func, select

    from service.models import AuditEvent

    with app.state.session_factory() as s:
        # events about data records (the test client's API key has its own event)
        return s.scalar(
            select(func.count()).select_from(AuditEvent).where(AuditEvent.entity != "api_key")
        )


def _run_count(client) -> int:
    return client.get("/v1/runs", params={"status": "any"}).json()["total"]


def test_series_stored_in_si(client):
    _, study = make_study(client)
    r = client.post("/v1/runs", json=series_run_body(study, temperature_C=25.0))
    assert r.status_code == 201, r.text
    run = r.json()
    # 1 d = 86400 s, 1 mg/L = 1e-3 kg/m3, 25 °C = 298.15 K (SI definitions)
    assert_allclose(run["series"]["time_s"], [0, 86400, 172800, 345600, 604800], rtol=0, atol=1e-9)
    assert_allclose(run["series"]["concentration"][0], 0.01, rtol=1e-12)
    assert run["series"]["concentration_unit"] == "kg/m3"
    assert_allclose(run["temperature_K"], 298.15, rtol=0, atol=1e-9)
    assert (run["version"], run["status"], run["kind"]) == (1, "current", "series")


def test_rate_run(client):
    _, study = make_study(client)
    body = {"study_id": study, "temperature_K": 323.15, "pH": 9.0,
            "rate": {"k": 0.0864, "k_unit": "1/d", "se_ln_k": 0.05}}
    r = client.post("/v1/runs", json=body)
    assert r.status_code == 201, r.text
    # 0.0864 per day = 1e-6 per second
    assert_allclose(r.json()["k_per_s"], 1e-6, rtol=1e-12)
    body2 = {"study_id": study, "temperature_K": 323.15, "pH": 4.0, "rate": {"dt50": 12, "dt50_unit": "h"}}
    r = client.post("/v1/runs", json=body2)
    assert r.status_code == 201
    assert_allclose(r.json()["dt50_s"], 43200.0, rtol=1e-12)


def test_supersede_and_withdraw_keep_history(client, app):
    _, study = make_study(client)
    uid = client.post("/v1/runs", json=series_run_body(study)).json()["run_uid"]
    corrected = series_run_body(study, conc=[10.0, 8.0, 6.6, 4.4, 2.4])
    corrected.pop("study_id")
    r = client.post(f"/v1/runs/{uid}/versions", json={**corrected, "reason": "day-1 value re-integrated"})
    assert r.status_code == 201, r.text
    assert r.json()["version"] == 2 and r.json()["reason"] == "day-1 value re-integrated"
    versions = client.get(f"/v1/runs/{uid}/versions").json()
    assert [(v["version"], v["status"]) for v in versions] == [(1, "superseded"), (2, "current")]
    assert versions[0]["series"]["concentration"][1] == pytest.approx(0.0081)  # old data intact
    assert versions[0]["valid_to"] is not None
    r = client.post(f"/v1/runs/{uid}/withdraw", json={"reason": "buffer contaminated"})
    assert r.status_code == 200 and r.json()["status"] == "withdrawn"
    assert client.post(f"/v1/runs/{uid}/withdraw", json={"reason": "again"}).status_code == 409
    again = {**corrected, "reason": "try to revive"}
    assert client.post(f"/v1/runs/{uid}/versions", json=again).status_code == 409
    assert client.get("/v1/runs").json()["total"] == 0  # no current run left
    assert _run_count(client) == 2
    # substance + study + create + supersede + withdraw
    assert _audit_count(app) == 5


def test_supersede_needs_reason(client):
    _, study = make_study(client)
    uid = client.post("/v1/runs", json=series_run_body(study)).json()["run_uid"]
    corrected = series_run_body(study)
    corrected.pop("study_id")
    r = client.post(f"/v1/runs/{uid}/versions", json=corrected)
    assert r.status_code == 422
    assert r.json()["detail"][0]["loc"] == ["body", "reason"]


def test_list_filters(client):
    sid, study = make_study(client)
    for t in (20.0, 40.0, 60.0):
        assert client.post("/v1/runs", json=series_run_body(study, temperature_C=t)).status_code == 201
    page = client.get("/v1/runs", params={"substance_id": sid, "temperature_min_K": 300,
                                          "temperature_max_K": 320}).json()
    assert page["total"] == 1 and page["items"][0]["temperature_C"] == pytest.approx(40.0)
    page = client.get("/v1/runs", params={"limit": 2, "offset": 2}).json()
    assert (page["total"], len(page["items"])) == (3, 1)


BAD_INPUTS = {
    "pH above 14": ({"pH": 14.5}, "pH", "14.5"),
    "pH below 0": ({"pH": -1}, "pH", "-1"),
    "temperature not liquid water (K)": ({"temperature_C": None, "temperature_K": 400.0},
                                         "temperature_K", "400"),
    "temperature not liquid water (C)": ({"temperature_C": -5.0}, "temperature_C", "-5"),
    "negative concentration": ({"series": {"time": [0, 1, 2], "concentration": [1, -0.5, 0.2],
                                           "concentration_unit": "mg/L"}},
                               "series.concentration", "-0.5"),
    "unknown concentration unit": ({"series": {"time": [0, 1, 2], "concentration": [1, 0.5, 0.2],
                                               "concentration_unit": "ppq"}},
                                   "series.concentration_unit", "ppq"),
    "unknown time unit": ({"series": {"time": [0, 1, 2], "time_unit": "fortnight",
                                      "concentration": [1, 0.5, 0.2], "concentration_unit": "mg/L"}},
                          "series.time_unit", "fortnight"),
    "too few points": ({"series": {"time": [0, 1], "concentration": [1, 0.5],
                                   "concentration_unit": "mg/L"}}, "series", "at least 3"),
    "unknown rate unit": ({"series": None, "rate": {"k": 1.0, "k_unit": "1/week"}},
                          "rate.k_unit", "1/week"),
}


@pytest.mark.parametrize("case", list(BAD_INPUTS), ids=list(BAD_INPUTS))
def test_bad_input_is_422_and_stores_nothing(client, app, case):
    _, study = make_study(client)
    change, field, fragment = BAD_INPUTS[case]
    body = series_run_body(study)
    body.update(change)
    body = {k: v for k, v in body.items() if v is not None}
    before = _audit_count(app)
    r = client.post("/v1/runs", json=body)
    assert r.status_code == 422, r.text
    msgs = [d["msg"] for d in r.json()["detail"]]
    assert any(m.startswith(field) and fragment in m for m in msgs), msgs
    assert _run_count(client) == 0
    assert _audit_count(app) == before


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity"])
def test_non_finite_numbers_are_422(client, literal):
    _, study = make_study(client)
    text = json.dumps(series_run_body(study)).replace('"pH": 7.0', f'"pH": {literal}')
    r = client.post("/v1/runs", content=text, headers={"content-type": "application/json"})
    assert r.status_code == 422
    assert r.json()["detail"][0]["loc"] == ["body", "pH"]
    text = json.dumps(series_run_body(study)).replace("8.1", literal)
    r = client.post("/v1/runs", content=text, headers={"content-type": "application/json"})
    assert r.status_code == 422
    assert _run_count(client) == 0


def test_duplicate_run_is_409(client):
    _, study = make_study(client)
    assert client.post("/v1/runs", json=series_run_body(study)).status_code == 201
    r = client.post("/v1/runs", json=series_run_body(study))
    assert r.status_code == 409
    assert "replicate_label" in r.json()["detail"]
    assert client.post("/v1/runs", json=series_run_body(study, replicate_label="B")).status_code == 201


def test_unknown_ids_are_404(client):
    r = client.post("/v1/runs", json=series_run_body(77))
    assert r.status_code == 404 and "77" in r.json()["detail"]
    assert client.get("/v1/runs/no-such-run").status_code == 404
    assert client.post("/v1/runs/no-such-run/withdraw", json={"reason": "xyz"}).status_code == 404


def test_batch_all_or_nothing_with_indexed_errors(client, app):
    _, study = make_study(client)
    runs = [series_run_body(study, temperature_C=t) for t in (20.0, 30.0, 40.0)]
    runs[1]["pH"] = 15.0
    runs[2]["series"]["concentration_unit"] = "furlong"
    before = _audit_count(app)
    r = client.post("/v1/runs/batch", json={"runs": runs})
    assert r.status_code == 422
    locs = [d["loc"][:3] for d in r.json()["detail"]]
    assert ["body", "runs", 1] in locs and ["body", "runs", 2] in locs
    assert ["body", "runs", 0] not in locs
    assert _run_count(client) == 0 and _audit_count(app) == before


def test_batch_unknown_study_and_duplicates(client):
    _, study = make_study(client)
    runs = [series_run_body(study), series_run_body(study), series_run_body(999, pH=4.0)]
    r = client.post("/v1/runs/batch", json={"runs": runs})
    assert r.status_code == 422
    detail = r.json()["detail"]
    assert {tuple(d["loc"][:3]) for d in detail} == {("body", "runs", 1), ("body", "runs", 2)}
    r = client.post("/v1/runs/batch", json={"runs": runs[:2]})
    assert r.status_code == 409
    assert _run_count(client) == 0
    r = client.post("/v1/runs/batch", json={"runs": [series_run_body(study, pH=p) for p in (4, 7, 9)]})
    assert r.status_code == 201 and r.json()["count"] == 3
    assert _run_count(client) == 3


def test_too_many_points_is_413(app, client):
    app.state.settings.max_points_per_series = 4
    _, study = make_study(client)
    r = client.post("/v1/runs", json=series_run_body(study))
    assert r.status_code == 413
    assert "at most 4" in r.json()["detail"]


def test_body_size_limit_is_413(db_url):
    import warnings

    from service.config import Settings
    from service.main import create_app

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from fastapi.testclient import TestClient

    from service.security import issue_key

    app = create_app(Settings(database_url=db_url, max_body_bytes=4096))
    with TestClient(app) as client:
        _, secret = issue_key(app.state.session_factory, label="test", scopes="admin", actor="test")
        client.headers["Authorization"] = f"Bearer {secret}"
        _, study = make_study(client)
        r = client.post("/v1/runs", json=series_run_body(study, notes="x" * 5000))
        assert r.status_code == 413
        assert "4096" in r.json()["detail"]
        assert _run_count(client) == 0
        assert client.post("/v1/runs", json=series_run_body(study, notes="x" * 100)).status_code == 201
