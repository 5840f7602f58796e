"""Concurrency through a real server: 8 client processes x 200 runs with deliberate retries.

Every run is posted with its own Idempotency-Key and retried on purpose (again after the
answer, twice at the same moment, and after abandoning the first attempt); the database
must end with exactly 1,600 runs, one per key, and no request may get a 5xx. Runs on
SQLite and, when FIELDRATE_TEST_DATABASE_URL is set, on PostgreSQL.
"""

from __future__ import annotations

import json
import subprocess
import sys
from collections import Counter

import httpx
from sqlalchemy import func, select

from live_server import REPO, LiveServer
from service.db import make_engine, make_session_factory
from service.migrate import upgrade_head
from service.models import AuditEvent, IdempotencyRecord, Run
from service.security import issue_key
from service_helpers import study_body, substance_body

N_CLIENTS = 8
RUNS_PER_CLIENT = 200


def test_eight_clients_with_retries_store_each_run_once(db_url, tmp_path):
    upgrade_head(db_url)
    engine = make_engine(db_url)
    factory = make_session_factory(engine)
    _, admin = issue_key(factory, label="load-test admin (invented)", scopes="admin", actor="test")
    _, ingest = issue_key(factory, label="LIMS load test (invented)", scopes="ingest", actor="test")
    server = LiveServer(db_url, tmp_path / "uvicorn.log")
    with server:
        with httpx.Client(base_url=server.base_url,
                          headers={"Authorization": f"Bearer {admin}"}) as c:
            sid = c.post("/v1/substances", json=substance_body("Loadazine (invented)")).json()["id"]
            study = c.post("/v1/studies", json=study_body(sid)).json()["id"]
        clients = [
            subprocess.Popen(
                [sys.executable, str(REPO / "scripts" / "idempotent_load.py"),
                 "--base-url", server.base_url, "--key", ingest, "--study-id", str(study),
                 "--client", str(i), "--runs", str(RUNS_PER_CLIENT)],
                stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
            )
            for i in range(N_CLIENTS)
        ]
        outputs = [p.communicate(timeout=900) for p in clients]
        log = server.log_path.read_text(errors="replace")

    summaries = []
    for (out, err), p in zip(outputs, clients):
        assert out.strip(), f"client produced no summary: {err[-2000:]}"
        summaries.append(json.loads(out.strip().splitlines()[-1]))
    statuses: Counter[str] = Counter()
    for s in summaries:
        statuses.update(s["statuses"])
    print(f"load test statuses over {N_CLIENTS} clients: {dict(statuses)}")
    problems = [p for s in summaries for p in s["problems"]]
    assert not problems, problems[:20]
    assert not any(code.startswith("5") for code in statuses), statuses
    assert "Traceback" not in log, log[-3000:]

    uids_by_key = {k: v[0] for s in summaries for k, v in s["stored"].items()}
    assert len(uids_by_key) == N_CLIENTS * RUNS_PER_CLIENT
    assert len(set(uids_by_key.values())) == N_CLIENTS * RUNS_PER_CLIENT

    with factory() as session:
        n_runs = session.scalar(select(func.count()).select_from(Run).where(Run.study_id == study))
        n_uids = session.scalar(select(func.count(func.distinct(Run.run_uid))).where(Run.study_id == study))
        n_labels = session.scalar(
            select(func.count(func.distinct(Run.replicate_label))).where(Run.study_id == study)
        )
        n_audit = session.scalar(
            select(func.count()).select_from(AuditEvent).where(
                AuditEvent.entity == "run", AuditEvent.action == "create"
            )
        )
        stored_uids = set(session.scalars(select(Run.run_uid).where(Run.study_id == study)))
        pending = session.scalar(
            select(func.count()).select_from(IdempotencyRecord).where(
                IdempotencyRecord.response_status == 0
            )
        )
    engine.dispose()
    print(f"runs stored: {n_runs}")
    assert n_runs == n_uids == n_labels == n_audit == N_CLIENTS * RUNS_PER_CLIENT
    assert stored_uids == set(uids_by_key.values())
    assert pending == 0
