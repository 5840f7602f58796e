"""Idempotency-Key: replay of the original answer, 409 on reuse, retention, scope of keys."""

from __future__ import annotations

import datetime as dt
import json
import threading
import warnings

import pytest
from sqlalchemy import func, select, update

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from fastapi.testclient import TestClient

from service.config import Settings
from service.idempotency import REPLAYED_HEADER, request_fingerprint
from service.models import IdempotencyRecord, Run, Study, utcnow
from service.security import issue_key
from service_helpers import make_study, series_run_body, study_body


def _count(app, model) -> int:
    with app.state.session_factory() as s:
        return s.scalar(select(func.count()).select_from(model))


def _idem(key: str | bytes) -> dict:
    return {"Idempotency-Key": key}


def test_fingerprint_ignores_key_order_and_spacing_but_not_content():
    a = request_fingerprint("POST", "/v1/runs", b"", b'{"a": 1, "b": [1, 2]}')
    assert a == request_fingerprint("POST", "/v1/runs", b"", b'{"b":[1,2],"a":1}')
    assert a != request_fingerprint("POST", "/v1/runs", b"", b'{"a": 1, "b": [2, 1]}')
    assert a != request_fingerprint("POST", "/v1/studies", b"", b'{"a": 1, "b": [1, 2]}')
    assert a != request_fingerprint("POST", "/v1/runs", b"x=1", b'{"a": 1, "b": [1, 2]}')


def test_same_key_same_body_replays_and_stores_nothing_new(app, client):
    _sid, study = make_study(client)
    body = series_run_body(study)
    first = client.post("/v1/runs", json=body, headers=_idem("lims-0001"))
    assert first.status_code == 201 and REPLAYED_HEADER.lower() not in first.headers
    for _ in range(3):
        again = client.post("/v1/runs", json=body, headers=_idem("lims-0001"))
        assert again.status_code == 201
        assert again.headers[REPLAYED_HEADER.lower()] == "true"
        assert again.json() == first.json()
    # same content, other key order: still the same request
    reordered = json.dumps(dict(reversed(list(body.items()))))
    r = client.post("/v1/runs", content=reordered,
                    headers={**_idem("lims-0001"), "content-type": "application/json"})
    assert r.status_code == 201 and r.json() == first.json()
    assert _count(app, Run) == 1


def test_same_key_different_body_is_409_and_stores_nothing(app, client):
    _sid, study = make_study(client)
    assert client.post("/v1/runs", json=series_run_body(study), headers=_idem("k-1")).status_code == 201
    r = client.post("/v1/runs", json=series_run_body(study, pH=9.0), headers=_idem("k-1"))
    assert r.status_code == 409
    assert r.json()["error"] == "idempotency_key_reused" and "'k-1'" in r.json()["detail"]
    r = client.post("/v1/studies", json=study_body(1), headers=_idem("k-1"))
    assert r.status_code == 409
    assert _count(app, Run) == 1


def test_a_refused_request_is_not_remembered(app, client):
    _sid, study = make_study(client)
    bad = series_run_body(study, pH=15.0)
    assert client.post("/v1/runs", json=bad, headers=_idem("k-2")).status_code == 422
    good = series_run_body(study)
    r = client.post("/v1/runs", json=good, headers=_idem("k-2"))
    assert r.status_code == 201 and REPLAYED_HEADER.lower() not in r.headers
    # a conflict (duplicate run) is not remembered either: the key stays usable
    assert client.post("/v1/runs", json=good, headers=_idem("k-3")).status_code == 409
    assert client.post("/v1/runs", json=series_run_body(study, replicate_label="B"),
                       headers=_idem("k-3")).status_code == 201
    assert _count(app, Run) == 2


def test_batches_replay_whole(app, client):
    _sid, study = make_study(client)
    batch = {"runs": [series_run_body(study, replicate_label=f"R{i}") for i in range(5)]}
    first = client.post("/v1/runs/batch", json=batch, headers=_idem("batch-7"))
    assert first.status_code == 201 and first.json()["count"] == 5
    again = client.post("/v1/runs/batch", json=batch, headers=_idem("batch-7"))
    assert again.status_code == 201 and again.json() == first.json()
    assert _count(app, Run) == 5


def test_keys_belong_to_the_api_key_that_sent_them(app, client):
    _sid, study = make_study(client)
    _, other = issue_key(app.state.session_factory, label="second LIMS (invented)",
                         scopes="ingest", actor="test")
    a = client.post("/v1/runs", json=series_run_body(study, replicate_label="A"),
                    headers=_idem("shared"))
    b = client.post("/v1/runs", json=series_run_body(study, replicate_label="B"),
                    headers={**_idem("shared"), "Authorization": f"Bearer {other}"})
    assert a.status_code == b.status_code == 201
    assert a.json()["run_uid"] != b.json()["run_uid"]
    assert b.json()["created_by"] == "second LIMS (invented)"


def test_expired_keys_are_forgotten(app, client):
    sid, _study = make_study(client)
    first = client.post("/v1/studies", json=study_body(sid), headers=_idem("old"))
    assert first.status_code == 201
    ttl = app.state.settings.idempotency_ttl_s
    with app.state.session_factory() as s:
        s.execute(update(IdempotencyRecord).values(
            created_at=utcnow() - dt.timedelta(seconds=ttl + 60)))
        s.commit()
    again = client.post("/v1/studies", json=study_body(sid), headers=_idem("old"))
    assert again.status_code == 201 and REPLAYED_HEADER.lower() not in again.headers
    assert again.json()["id"] != first.json()["id"]
    assert _count(app, Study) == 3  # make_study's, the first and the one after expiry


def test_retention_time_is_a_setting(db_url, monkeypatch):
    monkeypatch.setenv("FIELDRATE_IDEMPOTENCY_TTL_S", "120")
    assert Settings(database_url=db_url).idempotency_ttl_s == 120.0


@pytest.mark.parametrize("key", ["", "has space", "x" * 201, "caf\u00e9".encode("utf-8")])
def test_malformed_keys_are_422(client, key):
    sid, _ = make_study(client)
    r = client.post("/v1/studies", json=study_body(sid), headers=_idem(key))
    assert r.status_code == 422
    assert r.json()["detail"][0]["loc"] == ["header", "Idempotency-Key"]


def test_a_new_api_key_is_not_replayed_in_clear(client):
    body = {"label": "plate reader (invented)", "scopes": ["read"]}
    first = client.post("/v1/keys", json=body, headers=_idem("key-create-1"))
    assert first.status_code == 201 and first.json()["key"].startswith("frk_")
    again = client.post("/v1/keys", json=body, headers=_idem("key-create-1"))
    assert again.status_code == 201 and again.json()["id"] == first.json()["id"]
    assert "shown only in the original response" in again.json()["key"]
    assert len(client.get("/v1/keys").json()) == 2  # the test client's key and this one


def test_concurrent_retries_store_once(app, client):
    """Eight threads send the same request with the same key at once."""
    _sid, study = make_study(client)
    body = series_run_body(study)
    headers = {**client.headers, **_idem("burst")}
    barrier = threading.Barrier(8)
    answers = []

    def worker():
        with TestClient(app, raise_server_exceptions=False) as c:
            barrier.wait()
            r = c.post("/v1/runs", json=body, headers=headers)
            answers.append((r.status_code, r.json().get("run_uid")))

    threads = [threading.Thread(target=worker) for _ in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert [s for s, _ in answers] == [201] * 8, answers
    assert len({u for _, u in answers}) == 1
    assert _count(app, Run) == 1


def test_openapi_documents_the_header_on_storing_posts_only(client):
    paths = client.get("/openapi.json").json()["paths"]

    def has_header(path):
        params = paths[path]["post"].get("parameters", [])
        return any(p["name"] == "Idempotency-Key" and p["in"] == "header" for p in params)

    for path in ("/v1/substances", "/v1/studies", "/v1/runs", "/v1/runs/batch",
                 "/v1/runs/{run_uid}/versions", "/v1/runs/{run_uid}/withdraw", "/v1/keys"):
        assert has_header(path), path
    predictions = [p for p in paths if p.endswith("/predictions")]
    for path in predictions:
        assert not has_header(path)


def test_csv_import_replays(app, client):
    from service.api.examples import EXAMPLES_DIR

    text = (EXAMPLES_DIR / "runs_template.csv").read_bytes()
    headers = {"content-type": "text/csv", **_idem("csv-import-1")}
    first = client.post("/v1/imports/runs.csv", content=text, headers=headers)
    assert first.status_code == 201, first.text
    n = _count(app, Run)
    again = client.post("/v1/imports/runs.csv", content=text, headers=headers)
    assert again.status_code == 201 and again.json() == first.json()
    assert again.headers[REPLAYED_HEADER.lower()] == "true"
    assert _count(app, Run) == n
