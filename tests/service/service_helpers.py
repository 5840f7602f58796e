"""Small builders of request bodies shared by the service tests (invented data)."""

from __future__ import annotations

from typing import Any

INVENTED = "invented test data"


def substance_body(name: str = "Testazine (invented)", **extra: Any) -> dict[str, Any]:
    return {"name": name, "notes": INVENTED, **extra}


def study_body(substance_id: int, **extra: Any) -> dict[str, Any]:
    return {"substance_id": substance_id, "laboratory": "Test Bench Laboratory (invented)", **extra}


def series_run_body(study_id: int, *, temperature_C: float = 50.0, pH: float = 7.0,
                    replicate_label: str = "A", conc: list[float] | None = None,
                    **extra: Any) -> dict[str, Any]:
    return {
        "study_id": study_id,
        "temperature_C": temperature_C,
        "pH": pH,
        "replicate_label": replicate_label,
        "series": {
            "time": [0, 1, 2, 4, 7],
            "time_unit": "d",
            "concentration": conc or [10.0, 8.1, 6.6, 4.4, 2.4],
            "concentration_unit": "mg/L",
        },
        **extra,
    }


def make_study(client) -> tuple[int, int]:
    """Create a substance and a study; return their ids."""
    r = client.post("/v1/substances", json=substance_body())
    assert r.status_code == 201, r.text
    sid = r.json()["id"]
    r = client.post("/v1/studies", json=study_body(sid))
    assert r.status_code == 201, r.text
    return sid, r.json()["id"]


def post_demo(client) -> dict[str, int]:
    """Post the invented demo scenario through the API; return substance name -> id."""
    from service.demo import demo_payloads

    ids = {}
    for p in demo_payloads():
        r = client.post("/v1/substances", json=p["substance"])
        assert r.status_code == 201, r.text
        sid = r.json()["id"]
        r = client.post("/v1/studies", json={**p["study"], "substance_id": sid})
        assert r.status_code == 201, r.text
        study = r.json()["id"]
        r = client.post("/v1/runs/batch", json={"runs": [{**run, "study_id": study} for run in p["runs"]]})
        assert r.status_code == 201, r.text
        ids[p["substance"]["name"]] = sid
    return ids
