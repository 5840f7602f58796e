"""Limits (body size, points per series, runs per batch, conditions per request) and the
rejection of NaN / Infinity everywhere with 422."""

from __future__ import annotations

import copy
import json
import math
import warnings
from pathlib import Path

import pytest

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from fastapi.testclient import TestClient

from service.api.examples import EXAMPLES_DIR
from service.config import Settings
from service.demo import load_demo
from service.main import create_app
from service.migrate import upgrade_head
from service.security import issue_key
from service_helpers import make_study, series_run_body


def _client(settings: Settings):
    app = create_app(settings)
    client = TestClient(app, raise_server_exceptions=False)
    client.__enter__()
    _, secret = issue_key(app.state.session_factory, label="limits test (invented)",
                          scopes="admin", actor="test")
    client.headers["Authorization"] = f"Bearer {secret}"
    return client


@pytest.fixture
def small(db_url):
    client = _client(Settings(database_url=db_url, max_body_bytes=8192, max_points_per_series=6,
                              max_runs_per_batch=3, max_conditions_per_request=100_000))
    yield client
    client.__exit__(None, None, None)


def test_body_limit_without_content_length_is_413(small):
    _sid, study = make_study(small)
    payload = json.dumps(series_run_body(study, notes="x" * 20_000)).encode()

    def chunks():
        for i in range(0, len(payload), 1000):
            yield payload[i:i + 1000]

    r = small.post("/v1/runs", content=chunks(), headers={"content-type": "application/json"})
    assert r.status_code == 413, r.text
    assert "8192" in r.json()["detail"]
    assert small.get("/v1/runs").json()["total"] == 0


def test_body_limit_with_content_length_is_413(small):
    _sid, study = make_study(small)
    r = small.post("/v1/runs", json=series_run_body(study, notes="x" * 20_000),
                   headers={"Idempotency-Key": "big-1"})
    assert r.status_code == 413 and "at most 8192 bytes" in r.json()["detail"]


def test_points_per_series_limit(small):
    _sid, study = make_study(small)
    body = series_run_body(study)
    body["series"]["time"] = [0, 1, 2, 3, 4, 5, 6]
    body["series"]["concentration"] = [10, 9, 8, 7, 6, 5, 4]
    r = small.post("/v1/runs", json=body)
    assert r.status_code == 413 and "at most 6" in r.json()["detail"]
    r = small.post("/v1/runs/batch", json={"runs": [body]})
    assert r.status_code in (413, 422) and "at most 6" in r.text
    assert small.get("/v1/runs").json()["total"] == 0


def test_runs_per_batch_limit(small):
    _sid, study = make_study(small)
    runs = [series_run_body(study, replicate_label=f"R{i}") for i in range(4)]
    r = small.post("/v1/runs/batch", json={"runs": runs})
    assert r.status_code == 413 and "at most 3" in r.json()["detail"]


def test_conditions_per_request_limit(small):
    # the limit can be set no lower than 100,000 (the service must handle that many)
    load_demo(Settings(database_url=str(small.app.state.settings.database_url)))
    n = 100_001
    body = {"columns": {"temperature_C": [12.0] * n, "pH": [8.0] * n}}
    big = _client(Settings(database_url=small.app.state.settings.database_url,
                           max_conditions_per_request=100_000))
    try:
        r = big.post("/v1/substances/1/predictions", json=body)
        assert r.status_code == 413, r.text[:300]
        assert "100001" in r.json()["detail"].replace(",", "") and "100000" in r.json()["detail"]
    finally:
        big.__exit__(None, None, None)


def test_limits_are_settings(monkeypatch, db_url):
    monkeypatch.setenv("FIELDRATE_MAX_BODY_BYTES", "100000")
    monkeypatch.setenv("FIELDRATE_MAX_POINTS_PER_SERIES", "50")
    monkeypatch.setenv("FIELDRATE_MAX_CONDITIONS_PER_REQUEST", "150000")
    s = Settings(database_url=db_url)
    assert (s.max_body_bytes, s.max_points_per_series, s.max_conditions_per_request) == (
        100_000, 50, 150_000)


# --------------------------------------------------------------------------- NaN / Infinity
EXAMPLES = sorted(
    (json.loads(p.read_text(encoding="utf-8")) | {"file": p.name}
     for p in Path(EXAMPLES_DIR).glob("*.json")),
    key=lambda e: e["order"],
)


def _numeric_paths(value, path=()):
    if isinstance(value, bool):
        return
    if isinstance(value, (int, float)):
        yield path
    elif isinstance(value, dict):
        for k, v in value.items():
            yield from _numeric_paths(v, path + (k,))
    elif isinstance(value, list):
        for i, v in enumerate(value[:2]):
            yield from _numeric_paths(v, path + (i,))


def _set(obj, path, value):
    obj = copy.deepcopy(obj)
    target = obj
    for p in path[:-1]:
        target = target[p]
    target[path[-1]] = value
    return obj


NON_FINITE = [math.nan, math.inf, -math.inf]


def test_non_finite_numbers_are_422_in_every_example_body(client):
    """Every numeric field of every documented request body, set to NaN, Infinity and
    -Infinity (the literals Python's json module writes), is refused with 422."""
    context: dict[str, str] = {}
    checked = 0
    for ex in EXAMPLES:
        request = ex.get("request")
        path = ex["path"].format(**context)
        if isinstance(request, dict) and ex["method"] == "POST":
            for field in _numeric_paths(request):
                for bad in NON_FINITE:
                    text = json.dumps(_set(request, field, bad))
                    r = client.post(path, content=text, params=ex.get("params"),
                                    headers={"content-type": "application/json"})
                    assert r.status_code == 422, (ex["file"], field, bad, r.status_code, r.text[:300])
                    checked += 1
        # then the example itself, so that later examples find what they refer to
        r = client.request(ex["method"], path, json=request, params=ex.get("params"))
        assert r.status_code == ex["response_status"], (ex["file"], r.text[:300])
        if ex["file"] == "run_create.json":
            context["run_uid"] = r.json()["run_uid"]
    print(f"non-finite bodies refused: {checked}")
    assert checked > 100


@pytest.mark.parametrize("name, value", [
    ("temperature_min_K", "nan"), ("temperature_max_K", "inf"), ("pH_min", "-Infinity"),
    ("pH_max", "NaN"),
])
def test_non_finite_query_numbers_are_422(client, name, value):
    r = client.get("/v1/runs", params={name: value})
    assert r.status_code == 422, r.text


def _number_query_params(spec):
    for path, item in spec["paths"].items():
        for method, op in item.items():
            for param in op.get("parameters", []):
                if param.get("in") != "query":
                    continue
                schema = param.get("schema", {})
                types = {schema.get("type")} | {s.get("type") for s in schema.get("anyOf", [])}
                if "number" in types:
                    yield method, path, param["name"]


def test_non_finite_numbers_are_422_in_every_query_parameter(db_url):
    upgrade_head(db_url)
    settings = Settings(database_url=db_url)
    load_demo(settings)
    client = _client(settings)
    try:
        found = list(_number_query_params(client.get("/openapi.json").json()))
        assert found
        for method, path, name in found:
            url = path.replace("{substance_id}", "1").replace("{study_id}", "1").replace(
                "{run_uid}", "x")
            for bad in ("nan", "inf", "-Infinity"):
                r = client.request(method.upper(), url, params={name: bad},
                                   json={} if method == "post" else None)
                assert r.status_code == 422, (method, path, name, bad, r.status_code, r.text[:200])
                assert name in r.text, (method, path, name, r.text[:300])
        print(f"non-finite query parameters refused: {len(found)} parameters x 3 values")
    finally:
        client.__exit__(None, None, None)
