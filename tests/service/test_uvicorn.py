"""Through a real uvicorn process on a free loopback port.

Also: two server processes against one PostgreSQL database answer consistently.
"""

from __future__ import annotations

import concurrent.futures as cf
import os
import subprocess
import sys
import time

import httpx
import pytest

from live_server import REPO, LiveServer, free_port
from service.security import issue_key
from service_helpers import make_study, series_run_body

VELTRAZINE = "Veltrazine (invented)"


def _admin_key(database_url: str) -> dict[str, str]:
    from service.db import make_engine, make_session_factory
    from service.migrate import upgrade_head

    upgrade_head(database_url)
    engine = make_engine(database_url)
    try:
        _, secret = issue_key(make_session_factory(engine), label="live test (invented)",
                              scopes="admin", actor="test setup")
    finally:
        engine.dispose()
    return {"Authorization": f"Bearer {secret}"}


def test_live_server_round_trip(db_url, tmp_path):
    headers = _admin_key(db_url)
    with LiveServer(db_url, tmp_path / "uvicorn.log") as server:
        with httpx.Client(base_url=server.base_url, headers=headers, timeout=60) as c:
            assert c.get("/ready").json()["status"] == "ready"
            sid, study = make_study(c)
            for t in (30.0, 50.0):
                for p in (4.0, 9.0):
                    conc = [10.0, 8.6, 7.4, 5.5, 3.5] if p == 9.0 else [10.0, 9.5, 9.1, 8.2, 7.1]
                    r = c.post("/v1/runs", json=series_run_body(study, temperature_C=t, pH=p, conc=conc))
                    assert r.status_code == 201, r.text
            model = c.get(f"/v1/substances/{sid}/model")
            assert model.status_code == 200, model.text
            r = c.post(f"/v1/substances/{sid}/predictions",
                       json={"conditions": [{"temperature_C": 12.0, "pH": 8.0}]})
            assert r.status_code == 200 and r.json()["caution"]
            assert r.json()["predictions"][0]["k_per_s"] > 0
            assert c.get("/v1/substances/999").status_code == 404
            bad = c.post("/v1/runs", content=b'{"study_id": 1, "pH": NaN}', headers={"content-type": "application/json"})
            assert bad.status_code == 422
            assert c.get("/docs").status_code == 200


@pytest.mark.postgres
def test_two_server_processes_on_one_postgres_agree(backend, db_url, tmp_path):
    if backend != "postgresql":
        pytest.skip("two processes sharing one database is the PostgreSQL deployment")
    headers = _admin_key(db_url)
    servers = [LiveServer(db_url, tmp_path / f"uvicorn-{i}.log") for i in range(2)]
    # start both at once: their startup migrations must not collide
    with cf.ThreadPoolExecutor(2) as pool:
        list(pool.map(lambda s: s.start(), servers))
    try:
        a, b = (httpx.Client(base_url=s.base_url, headers=headers, timeout=120) for s in servers)
        sid, study = make_study(a)
        # the same run posted to both at once: exactly one is stored, the other is a 409
        body = series_run_body(study, temperature_C=40.0, pH=9.0, conc=[10.0, 8.2, 6.9, 4.6, 2.6])
        with cf.ThreadPoolExecutor(2) as pool:
            codes = sorted(pool.map(lambda c: c.post("/v1/runs", json=body).status_code, (a, b)))
        assert codes == [201, 409]
        for i, (t, p) in enumerate([(40.0, 4.0), (60.0, 4.0), (60.0, 9.0)]):
            client = (a, b)[i % 2]
            conc = [10.0, 8.0, 6.3, 4.0, 2.0] if p == 9.0 else [10.0, 9.6, 9.2, 8.4, 7.4]
            assert client.post("/v1/runs", json=series_run_body(study, temperature_C=t, pH=p, conc=conc)).status_code == 201
        assert a.get("/v1/runs", params={"substance_id": sid}).json()["total"] == 4
        assert b.get("/v1/runs", params={"substance_id": sid}).json()["total"] == 4
        # both fit at once (racing to fill the cache) and give identical models and predictions
        with cf.ThreadPoolExecutor(2) as pool:
            models = list(pool.map(lambda c: c.get(f"/v1/substances/{sid}/model").json(), (a, b)))
        assert models[0]["data_version"] == models[1]["data_version"]
        assert models[0]["parameters"] == models[1]["parameters"]
        cond = {"conditions": [{"temperature_C": 15.0, "pH": 8.5}]}
        preds = [c.post(f"/v1/substances/{sid}/predictions", json=cond).json()["predictions"] for c in (a, b)]
        assert preds[0] == preds[1]
        # a correction through one process is seen by the other at once
        uid = a.get("/v1/runs", params={"substance_id": sid}).json()["items"][0]["run_uid"]
        assert b.post(f"/v1/runs/{uid}/withdraw", json={"reason": "invented retraction"}).status_code == 200
        after = a.get(f"/v1/substances/{sid}/model").json()
        assert after["n_measurements"] == 3 and after["data_version"] != models[0]["data_version"]
        a.close()
        b.close()
    finally:
        for s in servers:
            s.stop()


def test_serve_demo_command_prints_url(tmp_path):
    port = free_port()
    env = dict(os.environ, XDG_DATA_HOME=str(tmp_path / "data"), PYTHONPATH=str(REPO))
    env.pop("FIELDRATE_DATABASE_URL", None)
    proc = subprocess.Popen(
        [sys.executable, "-m", "service.cli", "serve", "--demo", "--port", str(port)],
        cwd=str(tmp_path), env=env, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
    )
    try:
        lines = []
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline:
            line = proc.stdout.readline()
            if not line:
                break
            lines.append(line)
            if f"http://127.0.0.1:{port}/docs" in line:
                break
        assert any(f"http://127.0.0.1:{port}/docs" in line for line in lines), "".join(lines)
        assert any("invented" in line for line in lines)
        for _ in range(200):
            try:
                if httpx.get(f"http://127.0.0.1:{port}/ready", timeout=1).status_code == 200:
                    break
            except httpx.HTTPError:
                time.sleep(0.2)
        assert httpx.get(f"http://127.0.0.1:{port}/docs", timeout=10).status_code == 200
        assert (tmp_path / "data" / "fieldrate" / "fieldrate.db").exists()
        assert not list(tmp_path.glob("*.db"))  # nothing written to the working directory
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()
