"""The invented demo scenario: shape, invented marks, idempotent loading."""

from __future__ import annotations

import json

from sqlalchemy import func, select

from service.db import make_engine, make_session_factory
from service.demo import demo_payloads, load_demo
from service.migrate import upgrade_head
from service.models import Run, Substance


def test_scenario_shape_and_invented_marks():
    payloads = demo_payloads()
    assert len(payloads) >= 2
    for p in payloads:
        assert "(invented)" in p["substance"]["name"] and "nvented" in p["substance"]["notes"]
        assert "invented" in p["study"]["laboratory"]
        conditions = {(r["temperature_C"], r["pH"]) for r in p["runs"]}
        assert {ph for _, ph in conditions} == {4.0, 7.0, 9.0}
        assert len({t for t, _ in conditions}) == 3 and len(conditions) == 9
        assert all("nvented" in r["notes"] for r in p["runs"])
    assert sum(r.get("series_model") == "DFOP" for p in payloads for r in p["runs"]) == 1
    assert "invented" in json.dumps(payloads)


def test_load_demo_is_idempotent(settings):
    upgrade_head(settings.database_url)
    first = load_demo(settings)
    second = load_demo(settings)
    assert first["created"] is True and second["created"] is False
    engine = make_engine(settings.database_url)
    try:
        with make_session_factory(engine)() as s:
            assert s.scalar(select(func.count()).select_from(Substance)) == 2
            assert s.scalar(select(func.count()).select_from(Run)) == 18
    finally:
        engine.dispose()
