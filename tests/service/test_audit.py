"""The audit trail API: who, when (UTC), what and why; filters, time range and pages."""

from __future__ import annotations

import datetime as dt

from sqlalchemy import update

from service.models import AuditEvent
from service.security import issue_key
from service_helpers import make_study, series_run_body, study_body, substance_body


def _events(client, **params):
    r = client.get("/v1/audit", params=params)
    assert r.status_code == 200, r.text
    return r.json()


def test_every_change_has_an_event_with_actor_reason_and_version(app, client):
    sid, study = make_study(client)
    ingest = issue_key(app.state.session_factory, label="LIMS building 2 (invented)",
                       scopes="ingest", actor="test")[1]
    lims = {"Authorization": f"Bearer {ingest}"}
    run = client.post("/v1/runs", json=series_run_body(study), headers=lims).json()
    corrected = {k: v for k, v in series_run_body(study).items() if k != "study_id"}
    corrected["reason"] = "dilution factor applied twice (invented)"
    r = client.post(f"/v1/runs/{run['run_uid']}/versions", json=corrected, headers=lims)
    assert r.status_code == 201
    r = client.post(f"/v1/runs/{run['run_uid']}/withdraw",
                    json={"reason": "sterility failed (invented)"}, headers=lims)
    assert r.status_code == 200
    page = _events(client, entity="run", entity_id=run["run_uid"])
    got = [(e["action"], e["version"], e["actor"], e["reason"]) for e in page["items"]]
    assert got == [
        ("create", 1, "LIMS building 2 (invented)", None),
        ("supersede", 2, "LIMS building 2 (invented)", "dilution factor applied twice (invented)"),
        ("withdraw", 2, "LIMS building 2 (invented)", "sterility failed (invented)"),
    ]
    for e in page["items"]:
        assert e["substance_id"] == sid
        at = dt.datetime.fromisoformat(e["at"].replace("Z", "+00:00"))
        assert at.utcoffset() == dt.timedelta(0)


def test_filter_by_substance_and_action(client):
    sid_a, study_a = make_study(client)
    sid_b = client.post("/v1/substances", json=substance_body("Orbitamide (invented)")).json()["id"]
    study_b = client.post("/v1/studies", json=study_body(sid_b)).json()["id"]
    client.post("/v1/runs", json=series_run_body(study_a))
    client.post("/v1/runs", json=series_run_body(study_b))
    client.post("/v1/runs", json=series_run_body(study_b, replicate_label="B"))
    a = _events(client, substance_id=sid_a)
    b = _events(client, substance_id=sid_b)
    assert {e["substance_id"] for e in a["items"]} == {sid_a}
    assert [e["entity"] for e in b["items"]] == ["substance", "study", "run", "run"]
    assert _events(client, substance_id=sid_b, entity="run", action="create")["total"] == 2
    assert _events(client, action="supersede")["total"] == 0


def test_time_range_and_pagination(app, client):
    sid, study = make_study(client)
    for i in range(5):
        assert client.post("/v1/runs", json=series_run_body(study, replicate_label=f"R{i}")
                           ).status_code == 201
    # place the run events at known times, one hour apart (the test controls the clock)
    base = dt.datetime(2026, 3, 1, 8, 0, tzinfo=dt.timezone.utc)
    with app.state.session_factory() as s:
        ids = [e.id for e in s.query(AuditEvent).filter(AuditEvent.entity == "run")
               .order_by(AuditEvent.id)]
        for i, event_id in enumerate(ids):
            s.execute(update(AuditEvent).where(AuditEvent.id == event_id)
                      .values(at=base + dt.timedelta(hours=i)))
        s.commit()
    window = _events(client, entity="run", since="2026-03-01T09:00:00Z",
                     until="2026-03-01T11:00:00Z")
    assert [e["id"] for e in window["items"]] == ids[1:3]
    # another time zone, same instant
    window_cet = _events(client, entity="run", since="2026-03-01T10:00:00+01:00",
                         until="2026-03-01T12:00:00+01:00")
    assert window_cet["items"] == window["items"]
    page1 = _events(client, entity="run", limit=2, offset=0)
    page2 = _events(client, entity="run", limit=2, offset=2)
    page3 = _events(client, entity="run", limit=2, offset=4)
    assert page1["total"] == page2["total"] == 5
    assert [e["id"] for e in page1["items"] + page2["items"] + page3["items"]] == ids
    assert _events(client, substance_id=sid, offset=100)["items"] == []


def test_bad_filters_are_422(client):
    r = client.get("/v1/audit", params={"since": "2026-03-01T09:00:00"})
    assert r.status_code == 422 and "since" in r.text
    r = client.get("/v1/audit", params={"since": "2026-03-02T00:00:00Z",
                                        "until": "2026-03-01T00:00:00Z"})
    assert r.status_code == 422 and "must be later" in r.json()["detail"]
    assert client.get("/v1/audit", params={"action": "delete"}).status_code == 422
    assert client.get("/v1/audit", params={"limit": 0}).status_code == 422


def test_read_scope_suffices_and_no_key_does_not(app, client):
    read = issue_key(app.state.session_factory, label="auditor (invented)", scopes="read",
                     actor="test")[1]
    r = client.get("/v1/audit", headers={"Authorization": f"Bearer {read}"})
    assert r.status_code == 200
    client.headers.pop("Authorization")
    assert client.get("/v1/audit").status_code == 401
