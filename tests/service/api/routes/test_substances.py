"""Substance routes: create, read, list, duplicates and CAS RN check digits."""

from __future__ import annotations

import pytest

from service_helpers import substance_body


def test_create_read_list(client):
    r = client.post("/v1/substances", json=substance_body(cas_rn="64-17-5"))
    assert r.status_code == 201, r.text
    body = r.json()
    assert body["cas_rn"] == "64-17-5" and body["created_by"]
    assert client.get(f"/v1/substances/{body['id']}").json()["name"] == "Testazine (invented)"
    page = client.get("/v1/substances", params={"name_contains": "testaz"}).json()
    assert page["total"] == 1 and page["items"][0]["id"] == body["id"]


def test_duplicate_name_is_409(client):
    assert client.post("/v1/substances", json=substance_body()).status_code == 201
    r = client.post("/v1/substances", json=substance_body())
    assert r.status_code == 409
    assert "already exists" in r.json()["detail"]


# CAS numbers of water, ethanol and benzene (from memory); the check digit rule is the one
# published by Chemical Abstracts Service (weighted digit sum modulo 10).
@pytest.mark.parametrize("cas", ["7732-18-5", "64-17-5", "71-43-2"])
def test_valid_cas(client, cas):
    r = client.post("/v1/substances", json=substance_body(name=f"S {cas} (invented)", cas_rn=cas))
    assert r.status_code == 201, r.text


@pytest.mark.parametrize("cas", ["7732-18-4", "64-17-6", "7732185", "1-00-0"])
def test_bad_cas_is_422(client, cas):
    r = client.post("/v1/substances", json=substance_body(cas_rn=cas))
    assert r.status_code == 422
    assert r.json()["detail"][0]["loc"] == ["body", "cas_rn"]
    assert cas in r.json()["detail"][0]["msg"]


def test_unknown_id_is_404(client):
    r = client.get("/v1/substances/999")
    assert r.status_code == 404
    assert "999" in r.json()["detail"]


def test_unknown_field_is_422(client):
    r = client.post("/v1/substances", json={"name": "X (invented)", "colour": "blue"})
    assert r.status_code == 422


def test_nul_character_is_422_not_500(client):
    r = client.post("/v1/substances", json=substance_body(name="Nul\u0000azine (invented)"))
    assert r.status_code == 422
    assert "NUL" in r.json()["detail"][0]["msg"]
    assert client.get("/v1/runs/abc%00def").status_code in (404, 422)
    assert client.get("/v1/substances", params={"name_contains": "a\u0000b"}).status_code in (200, 422)
