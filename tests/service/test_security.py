"""API keys: hashing, scopes, 401/403 with one message, revocation, anonymous reads, CLI."""

from __future__ import annotations

import hashlib
import hmac
import os
import warnings

import pytest
from sqlalchemy import select

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from fastapi.testclient import TestClient

from kinetics.errors import InputError
from service.cli import main as cli_main
from service.config import Settings
from service.main import create_app
from service.db import make_engine, session_scope
from service.models import ApiKey, AuditEvent, Run, utcnow
from service.security import (
    DENIED_MESSAGE,
    KEY_PREFIX,
    expand_scopes,
    generate_secret,
    hash_secret,
    issue_key,
    parse_scopes,
)
from service_helpers import make_study, series_run_body, substance_body


def _key(app, scopes: str, label: str = "LIMS building 2 (invented)") -> str:
    _id, secret = issue_key(
        app.state.session_factory, label=label, scopes=scopes, actor="test setup",
        pepper=app.state.settings.api_key_pepper,
    )
    return secret


def _bearer(secret: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {secret}"}


@pytest.fixture
def anon(app):
    """A client that sends no key by default."""
    with TestClient(app, raise_server_exceptions=False) as c:
        yield c


def test_secret_shape_and_hash():
    secret = generate_secret()
    assert secret.startswith(KEY_PREFIX) and len(secret) == len(KEY_PREFIX) + 43
    assert generate_secret() != secret
    # HMAC-SHA256 as specified in RFC 2104 / FIPS 180-4, computed independently here
    expected = hmac.new(b"pepper", secret.encode(), hashlib.sha256).hexdigest()
    assert hash_secret(secret, "pepper") == expected
    assert hash_secret(secret, "") != hash_secret(secret, "pepper")


@pytest.mark.parametrize("text, expected", [
    ("read", ("read",)),
    ("ingest,read", ("read", "ingest")),
    (["admin", "read"], ("read", "admin")),
    ("admin ingest", ("ingest", "admin")),
])
def test_parse_scopes(text, expected):
    assert parse_scopes(text) == expected


@pytest.mark.parametrize("bad", ["write", "", "read,owner"])
def test_unknown_scope_lists_valid_ones(bad):
    with pytest.raises(InputError, match="read, ingest, admin"):
        parse_scopes(bad)


def test_scope_ladder():
    assert expand_scopes("read") == {"read"}
    assert expand_scopes("ingest") == {"read", "ingest"}
    assert expand_scopes("admin") == {"read", "ingest", "admin"}
    assert expand_scopes("bogus") == frozenset()


def test_only_the_hash_is_stored(app, anon, db_url, backend, tmp_path):
    secret = _key(app, "read")
    with app.state.session_factory() as s:
        rows = s.scalars(select(ApiKey)).all()
    assert len(rows) == 1
    assert rows[0].key_hash == hash_secret(secret) and secret not in rows[0].key_hash
    if backend == "sqlite":
        path = db_url.removeprefix("sqlite:///")
        raw = b"".join(open(path + suffix, "rb").read() for suffix in ("", "-wal")
                       if os.path.exists(path + suffix))
        assert secret.encode() not in raw


def _denied(r, status: int) -> None:
    assert r.status_code == status, r.text
    assert r.json() == {"error": "not_authorised", "detail": DENIED_MESSAGE}


def test_missing_wrong_revoked_and_malformed_keys_are_401_with_one_message(app, anon):
    read = _key(app, "read")
    admin = _key(app, "admin", label="admin (invented)")
    cases = [
        {},
        _bearer("frk_" + "x" * 43),
        _bearer(""),
        {"Authorization": "Basic dXNlcjpwYXNz"},
        {"X-API-Key": "not-a-key"},
        _bearer("y" * 5000),
    ]
    for headers in cases:
        r = anon.get("/v1/substances", headers=headers)
        _denied(r, 401)
        assert r.headers["www-authenticate"].startswith("Bearer")
    assert anon.get("/v1/substances", headers=_bearer(read)).status_code == 200
    key_id = anon.get("/v1/keys", headers=_bearer(admin)).json()[0]["id"]
    r = anon.post(f"/v1/keys/{key_id}/revoke", headers=_bearer(admin), json={"reason": "laptop lost"})
    assert r.status_code == 200 and r.json()["revoked_at"]
    _denied(anon.get("/v1/substances", headers=_bearer(read)), 401)


def test_right_key_wrong_scope_is_403_with_the_same_message(app, anon):
    read = _key(app, "read")
    ingest = _key(app, "ingest", label="LIMS (invented)")
    admin = _key(app, "admin", label="admin (invented)")
    _denied(anon.post("/v1/substances", json=substance_body(), headers=_bearer(read)), 403)
    _denied(anon.post("/v1/substances", json=substance_body(), headers=_bearer(ingest)), 403)
    _denied(anon.get("/v1/keys", headers=_bearer(ingest)), 403)
    r = anon.post("/v1/substances", json=substance_body(), headers=_bearer(admin))
    assert r.status_code == 201
    sid = r.json()["id"]
    r = anon.post("/v1/studies", json={"substance_id": sid, "laboratory": "Lab (invented)"},
                  headers=_bearer(read))
    _denied(r, 403)
    r = anon.post("/v1/studies", json={"substance_id": sid, "laboratory": "Lab (invented)"},
                  headers={"X-API-Key": ingest})
    assert r.status_code == 201
    _denied(anon.post("/v1/runs", json=series_run_body(r.json()["id"]), headers=_bearer(read)), 403)


def test_writes_are_never_anonymous_even_with_anonymous_reads(db_url):
    app = create_app(Settings(database_url=db_url, anonymous_read=True))
    with TestClient(app, raise_server_exceptions=False) as c:
        assert c.get("/v1/substances").status_code == 200
        assert c.get("/v1/audit").status_code == 200
        _denied(c.get("/v1/keys"), 401)
        _denied(c.post("/v1/substances", json=substance_body()), 401)
        # a bad key is refused even where anonymous reading is allowed
        _denied(c.get("/v1/substances", headers=_bearer("frk_wrong")), 401)


def test_anonymous_reads_are_off_by_default(anon):
    _denied(anon.get("/v1/substances"), 401)
    assert anon.get("/health").status_code == 200


def _revoke_behind_the_service(db_url: str, secret: str) -> None:
    """Revoke a key with plain SQL on an engine of its own, as another process would."""
    from sqlalchemy import update

    engine = make_engine(db_url)
    try:
        with engine.begin() as conn:
            conn.execute(update(ApiKey).where(ApiKey.key_hash == hash_secret(secret))
                         .values(revoked_at=utcnow()))
    finally:
        engine.dispose()


def test_a_key_revoked_by_the_command_line_in_this_process_is_refused_at_once(db_url, capsys):
    app = create_app(Settings(database_url=db_url, key_cache_ttl_s=60.0))
    with TestClient(app, raise_server_exceptions=False) as c:
        secret = _key(app, "read")
        assert c.get("/v1/substances", headers=_bearer(secret)).status_code == 200  # remembered
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            assert cli_main(["keys", "revoke", "1", "--database-url", db_url]) == 0
        _denied(c.get("/v1/substances", headers=_bearer(secret)), 401)


def test_a_key_revoked_elsewhere_is_refused_at_once_without_the_key_cache(db_url):
    app = create_app(Settings(database_url=db_url, key_cache_ttl_s=0))
    with TestClient(app, raise_server_exceptions=False) as c:
        secret = _key(app, "read")
        assert c.get("/v1/substances", headers=_bearer(secret)).status_code == 200
        _revoke_behind_the_service(db_url, secret)
        _denied(c.get("/v1/substances", headers=_bearer(secret)), 401)


def test_a_verified_key_is_remembered_and_an_unknown_one_is_not(db_url):
    # a revocation made outside this process is seen only after key_cache_ttl_s (60 s
    # here, far longer than the test): the documented bound, not a timing measurement
    app = create_app(Settings(database_url=db_url, key_cache_ttl_s=60.0))
    with TestClient(app, raise_server_exceptions=False) as c:
        secret = _key(app, "read")
        assert c.get("/v1/substances", headers=_bearer(secret)).status_code == 200
        _revoke_behind_the_service(db_url, secret)
        assert c.get("/v1/substances", headers=_bearer(secret)).status_code == 200
        # a key unknown at first works as soon as it exists: refusals are never remembered
        late = generate_secret()
        _denied(c.get("/v1/substances", headers=_bearer(late)), 401)
        with session_scope(app.state.session_factory, write=True) as session:
            session.add(ApiKey(label="late (invented)", key_hash=hash_secret(late),
                               scopes="read", created_at=utcnow()))
        assert c.get("/v1/substances", headers=_bearer(late)).status_code == 200


def test_a_key_made_with_another_pepper_does_not_work(db_url):
    app = create_app(Settings(database_url=db_url, api_key_pepper="first server secret"))
    with TestClient(app, raise_server_exceptions=False) as c:
        secret = _key(app, "read")
        assert c.get("/v1/substances", headers=_bearer(secret)).status_code == 200
    app2 = create_app(Settings(database_url=db_url, api_key_pepper="another secret"))
    with TestClient(app2, raise_server_exceptions=False) as c:
        _denied(c.get("/v1/substances", headers=_bearer(secret)), 401)


def test_the_audit_trail_and_runs_record_the_key_label(app, client):
    _sid, study = make_study(client)
    ingest = _key(app, "ingest", label="LIMS building 2 (invented)")
    r = client.post("/v1/runs", json=series_run_body(study), headers=_bearer(ingest))
    assert r.status_code == 201
    assert r.json()["created_by"] == "LIMS building 2 (invented)"
    with app.state.session_factory() as s:
        actors = s.scalars(select(AuditEvent.actor).where(AuditEvent.entity == "run")).all()
        assert actors == ["LIMS building 2 (invented)"]
        assert s.scalar(select(Run.created_by)) == "LIMS building 2 (invented)"


def test_key_routes_show_the_secret_once(client):
    r = client.post("/v1/keys", json={"label": "dashboard (invented)", "scopes": ["read"]})
    assert r.status_code == 201
    body = r.json()
    assert body["key"].startswith(KEY_PREFIX) and body["scopes"] == ["read"]
    listed = client.get("/v1/keys").json()
    assert all("key" not in k for k in listed)
    assert body["id"] in [k["id"] for k in listed]
    assert client.get("/v1/substances", headers=_bearer(body["key"])).status_code == 200
    r = client.post("/v1/keys", json={"label": "x", "scopes": ["owner"]})
    assert r.status_code == 422
    assert client.post("/v1/keys", json={"label": "anonymous", "scopes": ["read"]}).status_code == 422
    r = client.post(f"/v1/keys/{body['id']}/revoke")
    assert r.status_code == 200
    again = client.post(f"/v1/keys/{body['id']}/revoke")
    assert again.status_code == 409 and "already revoked" in again.json()["detail"]
    assert client.post("/v1/keys/999999/revoke").status_code == 404
    assert [k["id"] for k in client.get("/v1/keys", params={"include_revoked": False}).json()
            ].count(body["id"]) == 0
    audit = client.get("/v1/audit", params={"entity": "api_key"}).json()["items"]
    assert {(a["entity_id"], a["action"]) for a in audit} >= {
        (str(body["id"]), "create"), (str(body["id"]), "revoke")
    }


def test_keys_command_creates_lists_and_revokes(db_url, capsys):
    assert cli_main(["keys", "create", "--label", "LIMS hall 3 (invented)", "--scopes",
                     "ingest", "--database-url", db_url]) == 0
    out = capsys.readouterr().out
    secret = out.strip().splitlines()[-1].split(": ", 1)[1]
    assert secret.startswith(KEY_PREFIX)
    assert cli_main(["keys", "list", "--database-url", db_url]) == 0
    listing = capsys.readouterr().out
    assert "LIMS hall 3 (invented)" in listing and "ingest" in listing and secret not in listing
    app = create_app(Settings(database_url=db_url))
    with TestClient(app, raise_server_exceptions=False) as c:
        assert c.get("/v1/substances", headers=_bearer(secret)).status_code == 200
        _denied(c.post("/v1/substances", json=substance_body(), headers=_bearer(secret)), 403)
        assert cli_main(["keys", "revoke", "1", "--reason", "rotated", "--database-url", db_url]) == 0
        assert "revoked key 1" in capsys.readouterr().out
        _denied(c.get("/v1/substances", headers=_bearer(secret)), 401)
    assert cli_main(["keys", "revoke", "1", "--database-url", db_url]) == 1
    assert "already revoked" in capsys.readouterr().err
    assert cli_main(["keys", "create", "--label", "x", "--scopes", "root",
                     "--database-url", db_url]) == 1
    assert "valid scopes are read, ingest, admin" in capsys.readouterr().err


def test_openapi_declares_both_key_headers(client):
    schema = client.get("/openapi.json").json()
    schemes = schema["components"]["securitySchemes"]
    assert schemes["BearerKey"]["scheme"].lower() == "bearer"
    assert schemes["ApiKeyHeader"]["name"] == "X-API-Key"
    assert "401" in schema["paths"]["/v1/runs"]["post"]["responses"]
    assert "403" in schema["paths"]["/v1/runs"]["post"]["responses"]


def test_serve_demo_prints_a_working_admin_key(db_url, monkeypatch, capsys):
    import uvicorn

    served = []
    # stand in for the blocking server loop; everything before it runs for real
    monkeypatch.setattr(uvicorn, "run", lambda app, **kw: served.append((app, kw)))
    monkeypatch.setenv("FIELDRATE_DATABASE_URL", db_url)
    assert cli_main(["serve", "--demo", "--port", "8765"]) == 0
    out = capsys.readouterr().out
    line = next(l for l in out.splitlines() if l.startswith("demo API key"))
    secret = line.rsplit(": ", 1)[1]
    assert secret.startswith(KEY_PREFIX)
    app = served[0][0]
    with TestClient(app, raise_server_exceptions=False) as c:
        r = c.post("/v1/substances", json=substance_body("Postable (invented)"),
                   headers=_bearer(secret))
        assert r.status_code == 201
        assert r.json()["created_by"] == "demo key (fieldrate serve --demo)"
    app.state.engine.dispose()


def test_an_unreachable_database_is_503_not_500():
    # nothing listens on port 1 of the loopback interface
    url = "postgresql+psycopg://postgres@127.0.0.1:1/none?connect_timeout=2"
    app = create_app(Settings(database_url=url, run_migrations_on_startup=False))
    with TestClient(app, raise_server_exceptions=False) as c:
        for method, path in (("GET", "/v1/substances"), ("POST", "/v1/runs")):
            r = c.request(method, path, json={}, headers={
                **_bearer("frk_" + "z" * 43), "Idempotency-Key": "unreachable-1"})
            assert r.status_code == 503, r.text
            assert r.json()["error"] == "unavailable" and r.headers["retry-after"] == "1"
    app.state.engine.dispose()
