"""Study routes."""

from __future__ import annotations

from service_helpers import study_body, substance_body


def test_create_and_list(client):
    sid = client.post("/v1/substances", json=substance_body()).json()["id"]
    r = client.post("/v1/studies", json=study_body(sid, glp=True, start_date="2026-01-05",
                                                   end_date="2026-02-01"))
    assert r.status_code == 201, r.text
    assert r.json()["glp"] is True
    page = client.get("/v1/studies", params={"substance_id": sid}).json()
    assert page["total"] == 1


def test_unknown_substance_is_404_and_nothing_stored(client):
    r = client.post("/v1/studies", json=study_body(42))
    assert r.status_code == 404
    assert client.get("/v1/studies").json()["total"] == 0


def test_end_before_start_is_422(client):
    sid = client.post("/v1/substances", json=substance_body()).json()["id"]
    r = client.post("/v1/studies", json=study_body(sid, start_date="2026-02-01",
                                                   end_date="2026-01-05"))
    assert r.status_code == 422
    assert "before start_date" in r.json()["detail"][0]["msg"]
