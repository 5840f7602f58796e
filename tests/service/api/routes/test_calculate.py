"""The stateless calculation: same numbers as a stored substance, nothing stored."""

from __future__ import annotations

import pytest

from kinetics.caution import CAUTION_TEXT
from service.demo import demo_payloads
from service_helpers import post_demo

VELTRAZINE = "Veltrazine (invented)"


def _demo_runs():
    return demo_payloads()[0]["runs"]


def test_same_fit_and_predictions_as_stored(client):
    cond = [{"temperature_C": 12.0, "pH": 8.3, "ionic_strength_M": 0.005}]
    r = client.post("/v1/calculate", json={"runs": _demo_runs(), "conditions": cond})
    assert r.status_code == 200, r.text
    calc = r.json()
    assert calc["caution"] == CAUTION_TEXT and calc["prediction"]["caution"] == CAUTION_TEXT
    assert client.get("/v1/substances").json()["total"] == 0  # nothing stored
    sid = post_demo(client)[VELTRAZINE]
    stored = client.get(f"/v1/substances/{sid}/model").json()
    assert calc["model"]["parameters"] == stored["parameters"]
    assert calc["model"]["covariance"] == stored["covariance"]
    assert [r["k_per_s"] for r in calc["model"]["runs"]] == [r["k_per_s"] for r in stored["runs"]]
    pred = client.post(f"/v1/substances/{sid}/predictions", json={"conditions": cond}).json()
    assert calc["prediction"]["predictions"] == pred["predictions"]


def test_without_conditions_only_the_fit(client):
    r = client.post("/v1/calculate", json={"runs": _demo_runs(), "fit_options": {"temperature_model": "eyring"}})
    assert r.status_code == 200
    body = r.json()
    assert body["prediction"] is None and body["model"]["temperature_model"] == "eyring"
    assert body["model"]["runs"][0]["run_uid"] is None and body["model"]["runs"][0]["label"].startswith("runs[0]")


def test_rates_only(client):
    runs = [
        {"temperature_C": t, "pH": p, "rate": {"dt50": d, "dt50_unit": "d", "se_ln_k": 0.1}}
        for t, p, d in [(20, 4, 60), (20, 7, 400), (20, 9, 21), (40, 4, 10), (40, 7, 60), (40, 9, 1.2),
                        (60, 4, 2.2), (60, 7, 6.0), (60, 9, 0.1)]
    ]
    r = client.post("/v1/calculate", json={"runs": runs, "columns": {"temperature_C": [10, 20], "pH": [7, 7]},
                                           "layout": "columns"})
    assert r.status_code == 200, r.text
    body = r.json()
    assert body["prediction"]["n_conditions"] == 2
    assert body["model"]["runs"][0]["kind"] == "rate"


def test_one_run_is_422(client):
    r = client.post("/v1/calculate", json={"runs": _demo_runs()[:1]})
    assert r.status_code == 422 and "at least 2" in r.json()["detail"]


def test_reported_rate_without_se_among_series_is_weighted_as_typical(client):
    runs = _demo_runs()[:3] + [{"temperature_C": 30, "pH": 7, "rate": {"k": 0.01, "k_unit": "1/d"}}]
    r = client.post("/v1/calculate", json={"runs": runs})
    assert r.status_code == 200, r.text
    model = r.json()["model"]
    assert [e["label"] for e in model["se_imputed_runs"]] == ["runs[3] (30.0 °C, pH 7.00)"]
    assert model["se_imputed_ln_k"] > 0
    assert any(f.startswith("no standard error of ln k for: runs[3]") for f in model["flags"])


def test_series_the_model_cannot_fit_names_the_run(client):
    runs = _demo_runs()
    runs[2] = {**runs[2], "series_model": "DFOP",
               "series": {**runs[2]["series"], "time": runs[2]["series"]["time"][:4],
                          "concentration": runs[2]["series"]["concentration"][:4]}}
    r = client.post("/v1/calculate", json={"runs": runs})
    assert r.status_code == 422
    assert "runs[2]" in r.json()["detail"]


@pytest.mark.parametrize("bad, loc", [
    ({"pH": 14.2}, ["body", "runs", 1, "pH"]),
    ({"temperature_C": 120.0}, ["body", "runs", 1, "temperature_C"]),
])
def test_bad_run_is_422_by_index(client, bad, loc):
    runs = _demo_runs()
    runs[1] = {**runs[1], **bad}
    r = client.post("/v1/calculate", json={"runs": runs})
    assert r.status_code == 422
    assert any(d["loc"] == loc for d in r.json()["detail"])


def test_flat_run_excluded_in_a_calculation(client):
    runs = _demo_runs()
    flat = dict(runs[1])  # 20 °C, pH 7
    flat["replicate_label"] = "B"
    flat["series"] = {**flat["series"], "concentration": [10.0] * len(flat["series"]["time"])}
    body = {"runs": runs + [flat], "conditions": [{"temperature_C": 12.0, "pH": 7.0}]}
    r = client.post("/v1/calculate", json=body)
    assert r.status_code == 200, r.text
    calc = r.json()
    label = calc["model"]["runs"][len(runs)]["label"]
    assert label.startswith(f"runs[{len(runs)}]")
    assert [e["label"] for e in calc["model"]["excluded_runs"]] == [label]
    assert [e["label"] for e in calc["prediction"]["excluded_runs"]] == [label]
    assert calc["model"]["n_measurements"] == len(runs)
    # the other runs give the same surface as without the flat run
    alone = client.post("/v1/calculate", json={"runs": runs}).json()
    assert calc["model"]["parameters"] == alone["model"]["parameters"]
