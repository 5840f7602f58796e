"""Online SQLite backup and restore: a restored copy answers with identical predictions."""

from __future__ import annotations

import sqlite3
import threading
import warnings

import pytest

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from fastapi.testclient import TestClient

from kinetics.errors import InputError
from service.backup import backup_sqlite, integrity_check, restore_sqlite, sqlite_path
from service.cli import main as cli_main
from service.config import Settings
from service.demo import demo_payloads
from service.main import create_app
from service.security import issue_key
from service_helpers import series_run_body, study_body, substance_body

PREDICT = {
    # an invented pond
    "conditions": [{"temperature_C": 12.0, "pH": 8.3, "ionic_strength_M": 0.005}],
    "level": 0.9,
}


def _client(db_url: str):
    app = create_app(Settings(database_url=db_url))
    client = TestClient(app, raise_server_exceptions=False)
    client.__enter__()
    _, secret = issue_key(app.state.session_factory, label="backup test (invented)",
                          scopes="admin", actor="test")
    client.headers["Authorization"] = f"Bearer {secret}"
    return client


def _load_veltrazine(client) -> int:
    scenario = demo_payloads()[0]
    sid = client.post("/v1/substances", json=scenario["substance"]).json()["id"]
    study = client.post("/v1/studies", json={**scenario["study"], "substance_id": sid}).json()["id"]
    r = client.post("/v1/runs/batch",
                    json={"runs": [{**run, "study_id": study} for run in scenario["runs"]]})
    assert r.status_code == 201, r.text
    return sid


def test_backup_of_a_live_database_restores_to_identical_predictions(tmp_path):
    url = f"sqlite:///{tmp_path / 'live.db'}"
    client = _client(url)
    try:
        sid = _load_veltrazine(client)
        before = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT)
        assert before.status_code == 200, before.text
        other = client.post("/v1/substances", json=substance_body("Writerine (invented)")).json()
        study = client.post("/v1/studies", json=study_body(other["id"])).json()["id"]

        # keep writing to another substance while the backup runs: the copy is a snapshot
        stop = threading.Event()
        codes = []

        def writer():
            i = 0
            while not stop.is_set() and i < 200:
                r = client.post("/v1/runs", json=series_run_body(study, replicate_label=f"W{i}"))
                codes.append(r.status_code)
                i += 1

        thread = threading.Thread(target=writer)
        thread.start()
        try:
            result = backup_sqlite(url, tmp_path / "copy.db")
        finally:
            stop.set()
            thread.join()
        assert set(codes) <= {201}
        assert result.integrity == "ok" and result.size_bytes > 0 and result.pages > 0
        assert not (tmp_path / "copy.db-wal").exists()
    finally:
        client.__exit__(None, None, None)

    restored_url = f"sqlite:///{tmp_path / 'restored.db'}"
    restore_sqlite(tmp_path / "copy.db", restored_url)
    assert integrity_check(tmp_path / "restored.db") == "ok"
    client = _client(restored_url)
    try:
        after = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT)
        assert after.status_code == 200
        assert after.json() == before.json()
        model = client.get(f"/v1/substances/{sid}/model")
        assert model.status_code == 200 and model.json()["cached"] is True
        # the audit trail came along
        assert client.get("/v1/audit", params={"substance_id": sid}).json()["total"] >= 11
    finally:
        client.__exit__(None, None, None)


def test_backup_and_restore_commands(tmp_path, capsys):
    url = f"sqlite:///{tmp_path / 'db.sqlite3'}"
    client = _client(url)
    try:
        sid = _load_veltrazine(client)
        before = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT).json()
    finally:
        client.__exit__(None, None, None)
    backup = tmp_path / "fieldrate-backup.db"
    assert cli_main(["backup", "create", str(backup), "--database-url", url]) == 0
    assert "integrity ok" in capsys.readouterr().out
    assert cli_main(["backup", "create", str(backup), "--database-url", url]) == 1
    assert "already exists" in capsys.readouterr().err
    assert cli_main(["backup", "create", str(backup), "--overwrite", "--database-url", url]) == 0
    capsys.readouterr()

    # damage the live database's content, then restore it from the backup
    conn = sqlite3.connect(tmp_path / "db.sqlite3")
    conn.execute("DELETE FROM fit_cache")
    conn.commit()
    conn.close()
    assert cli_main(["backup", "restore", str(backup), "--database-url", url]) == 2
    assert "--yes" in capsys.readouterr().err
    assert cli_main(["backup", "restore", str(backup), "--yes", "--database-url", url]) == 0
    assert "restored" in capsys.readouterr().out
    client = _client(url)
    try:
        assert client.get(f"/v1/substances/{sid}/model").json()["cached"] is True
        assert client.post(f"/v1/substances/{sid}/predictions", json=PREDICT).json() == before
    finally:
        client.__exit__(None, None, None)


def test_refusals_are_clear(tmp_path):
    with pytest.raises(InputError, match="pg_dump"):
        sqlite_path("postgresql+psycopg://postgres@127.0.0.1:5432/test")
    with pytest.raises(InputError, match="not a plain file"):
        sqlite_path("sqlite://")
    with pytest.raises(InputError, match="no database file"):
        backup_sqlite(f"sqlite:///{tmp_path / 'missing.db'}", tmp_path / "b.db")
    db = tmp_path / "x.db"
    sqlite3.connect(db).close()
    with pytest.raises(InputError, match="is the database itself"):
        backup_sqlite(f"sqlite:///{db}", db)
    with pytest.raises(InputError, match="does not exist"):
        backup_sqlite(f"sqlite:///{db}", tmp_path / "no-such-dir" / "b.db")
    (tmp_path / "junk.db").write_bytes(b"not a database at all" * 100)
    with pytest.raises(InputError, match="not a readable SQLite database"):
        restore_sqlite(tmp_path / "junk.db", f"sqlite:///{tmp_path / 'target.db'}")
    assert not (tmp_path / "target.db").exists()
