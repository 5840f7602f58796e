"""As-of queries: the model and predictions of a substance as a client received them then.

Predict, correct (supersede) a run, predict again, then ask as of the time of the first
prediction: the answer must carry the first numbers exactly (not approximately), also
when the fit cache has been emptied and the fit is recomputed from the stored versions.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import delete

from service.demo import demo_payloads
from service.models import FitCache

PREDICT = {
    # invented field sites: a pond and an estuary
    "conditions": [
        {"temperature_C": 12.0, "pH": 8.3, "ionic_strength_M": 0.005},
        {"temperature_C": 15.0, "pH": 7.9, "salinity": 20.0},
    ],
    "level": 0.95,
    "method": "delta",
}


def _post_demo_substance(client) -> tuple[int, list[dict]]:
    scenario = demo_payloads()[0]  # Veltrazine (invented), 3 pH x 3 temperatures
    r = client.post("/v1/substances", json=scenario["substance"])
    assert r.status_code == 201, r.text
    sid = r.json()["id"]
    r = client.post("/v1/studies", json={**scenario["study"], "substance_id": sid})
    assert r.status_code == 201, r.text
    study = r.json()["id"]
    runs = [{**run, "study_id": study} for run in scenario["runs"]]
    r = client.post("/v1/runs/batch", json={"runs": runs})
    assert r.status_code == 201, r.text
    return sid, r.json()["created"]


def _without(payload: dict, *keys: str) -> dict:
    return {k: v for k, v in payload.items() if k not in keys}


def _now_iso() -> str:
    return dt.datetime.now(dt.timezone.utc).isoformat()


def test_as_of_reproduces_the_first_prediction_after_a_correction(app, client):
    sid, runs = _post_demo_substance(client)
    first = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT)
    assert first.status_code == 200, first.text
    first_model = client.get(f"/v1/substances/{sid}/model")
    assert first_model.status_code == 200, first_model.text
    t_first = _now_iso()

    # a correction: the pH 9, 40 °C run was mis-transcribed (invented)
    target = next(r for r in runs if r["pH"] == 9.0 and round(r["temperature_C"]) == 40)
    corrected = {
        "temperature_C": target["temperature_C"], "pH": 9.0,
        "replicate_label": target["replicate_label"],
        "series": {
            "time": [0.0, 0.117, 0.293, 0.586, 1.026, 1.466, 2.052, 2.931], "time_unit": "d",
            "concentration": [9.95, 9.05, 7.95, 6.45, 4.55, 3.25, 2.05, 0.95],
            "concentration_unit": "mg/L",
        },
        "reason": "concentrations re-read from the chromatograms (invented correction)",
    }
    r = client.post(f"/v1/runs/{target['run_uid']}/versions", json=corrected)
    assert r.status_code == 201, r.text

    second = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT)
    assert second.status_code == 200
    assert second.json()["data_version"] != first.json()["data_version"]
    assert second.json()["predictions"] != first.json()["predictions"]

    again = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT,
                        params={"as_of": t_first})
    assert again.status_code == 200, again.text
    assert again.json()["as_of"] is not None
    # exactly the first answer (every number, flag and the caution), apart from as_of
    assert _without(again.json(), "as_of") == _without(first.json(), "as_of")

    model_then = client.get(f"/v1/substances/{sid}/model", params={"as_of": t_first})
    assert model_then.status_code == 200
    assert _without(model_then.json(), "as_of", "cached") == _without(
        first_model.json(), "as_of", "cached")

    # without the cache the stored versions give the same numbers again
    with app.state.session_factory() as s:
        s.execute(delete(FitCache))
        s.commit()
    recomputed = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT,
                             params={"as_of": t_first})
    assert recomputed.status_code == 200
    assert recomputed.json()["predictions"] == first.json()["predictions"]
    now = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT)
    assert now.json()["predictions"] == second.json()["predictions"]


def test_as_of_before_a_withdrawal_still_uses_the_withdrawn_run(client):
    sid, runs = _post_demo_substance(client)
    first = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT).json()
    t_first = _now_iso()
    r = client.post(f"/v1/runs/{runs[0]['run_uid']}/withdraw",
                    json={"reason": "buffer contaminated (invented)"})
    assert r.status_code == 200
    after = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT).json()
    assert after["data_version"] != first["data_version"]
    then = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT,
                       params={"as_of": t_first}).json()
    assert then["predictions"] == first["predictions"]
    assert then["data_version"] == first["data_version"]


def test_bad_as_of_times_are_422_with_a_reason(client):
    sid, _runs = _post_demo_substance(client)
    future = (dt.datetime.now(dt.timezone.utc) + dt.timedelta(days=1)).isoformat()
    r = client.get(f"/v1/substances/{sid}/model", params={"as_of": future})
    assert r.status_code == 422 and "future" in r.text
    r = client.get(f"/v1/substances/{sid}/model", params={"as_of": "2026-12-02T06:00:00"})
    assert r.status_code == 422 and "as_of" in r.text
    r = client.get(f"/v1/substances/{sid}/model", params={"as_of": "yesterday"})
    assert r.status_code == 422
    # before any run was stored: nothing to fit, explained, not a 500
    r = client.post(f"/v1/substances/{sid}/predictions", json=PREDICT,
                    params={"as_of": "2000-01-01T00:00:00Z"})
    assert r.status_code == 422, r.text
