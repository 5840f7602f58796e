"""Crash: SIGKILL the server while it stores a large batch; the batch is all or nothing.

The server is killed at several moments of a batch POST (early, middle, late in the time
one batch takes on this machine, measured first). After each kill: the SQLite file passes
``PRAGMA integrity_check``, the batch's runs are either all present or all absent, and
after a restart the client's retry with the same Idempotency-Key leaves exactly one copy.
No timing is asserted; the moments only spread the kills over the request.
"""

from __future__ import annotations

import threading
import time

import httpx
from sqlalchemy import func, select

from live_server import LiveServer
from service.backup import integrity_check, sqlite_path
from service.db import make_engine, make_session_factory
from service.migrate import upgrade_head
from service.models import AuditEvent, Run
from service.security import issue_key
from service_helpers import study_body, substance_body

N_RUNS = 1500
#: moments of the kills, as fractions of the time one batch took
KILL_AT = (0.2, 0.6, 0.9, 1.0, 1.3)


def _batch(study: int, prefix: str) -> dict:
    times = [0, 1, 2, 3, 5, 7, 10, 14, 21, 28]
    return {"runs": [
        {
            "study_id": study, "temperature_C": 25.0, "pH": 7.0,
            "replicate_label": f"{prefix}-{i}", "notes": "invented crash-test data",
            "series": {"time": times, "time_unit": "d", "concentration_unit": "mg/L",
                       "concentration": [round(10.0 * 0.93 ** t, 4) for t in times]},
        }
        for i in range(N_RUNS)
    ]}


def _count(factory, prefix: str) -> int:
    with factory() as s:
        return s.scalar(select(func.count()).select_from(Run).where(
            Run.replicate_label.like(f"{prefix}-%")))


def test_sigkill_during_a_batch_leaves_it_whole_or_absent(db_url, backend, tmp_path):
    upgrade_head(db_url)
    engine = make_engine(db_url)
    factory = make_session_factory(engine)
    _, admin = issue_key(factory, label="crash test (invented)", scopes="admin", actor="test")
    headers = {"Authorization": f"Bearer {admin}"}
    log = tmp_path / "uvicorn.log"

    server = LiveServer(db_url, log).start()
    with httpx.Client(base_url=server.base_url, headers=headers, timeout=300) as c:
        sid = c.post("/v1/substances", json=substance_body("Crashamide (invented)")).json()["id"]
        study = c.post("/v1/studies", json=study_body(sid)).json()["id"]
        t0 = time.monotonic()
        r = c.post("/v1/runs/batch", json=_batch(study, "calibration"),
                   headers={"Idempotency-Key": "calibration"})
        duration = time.monotonic() - t0
        assert r.status_code == 201, r.text[:300]

    outcomes = []
    for attempt, fraction in enumerate(KILL_AT):
        prefix = f"kill{attempt}"
        body = _batch(study, prefix)
        answer: dict = {}

        def post():
            try:
                with httpx.Client(base_url=server.base_url, headers=headers, timeout=300) as c:
                    answer["status"] = c.post("/v1/runs/batch", json=body,
                                              headers={"Idempotency-Key": prefix}).status_code
            except httpx.HTTPError as exc:
                answer["error"] = type(exc).__name__

        thread = threading.Thread(target=post)
        thread.start()
        time.sleep(duration * fraction)
        server.kill()
        thread.join(timeout=300)

        if backend == "sqlite":
            assert integrity_check(sqlite_path(db_url)) == "ok"
        after_kill = _count(factory, prefix)
        assert after_kill in (0, N_RUNS), after_kill

        server = LiveServer(db_url, log).start()
        with httpx.Client(base_url=server.base_url, headers=headers, timeout=300) as c:
            retry = c.post("/v1/runs/batch", json=body, headers={"Idempotency-Key": prefix})
        if after_kill == 0:
            assert retry.status_code == 201, retry.text[:300]
        else:
            # stored before the kill: replayed, or (killed between commit and recording
            # the response) refused with 409 without storing anything again
            assert retry.status_code in (201, 409), retry.text[:300]
            if retry.status_code == 409:
                assert retry.json()["error"] == "idempotency_key_in_progress"
        assert _count(factory, prefix) == N_RUNS
        outcomes.append((fraction, "present" if after_kill else "absent",
                         answer.get("status", answer.get("error")), retry.status_code))
    server.stop()

    with factory() as s:
        n_audit = s.scalar(select(func.count()).select_from(AuditEvent).where(
            AuditEvent.entity == "run"))
        n_runs = s.scalar(select(func.count()).select_from(Run))
    engine.dispose()
    if backend == "sqlite":
        assert integrity_check(sqlite_path(db_url)) == "ok"
    assert n_runs == n_audit == N_RUNS * (1 + len(KILL_AT))
    print(f"batch of {N_RUNS} runs took {duration:.1f} s; kill outcomes "
          f"(fraction, after kill, first answer, retry status): {outcomes}")
