"""POST /v1/design: stateless study-design advice, inline prior or a stored substance's fit.

All substances, laboratories and water bodies are invented.
"""

from __future__ import annotations

import copy
import json
import math

import pytest

from kinetics import design as kdesign
from kinetics.caution import CAUTION_TEXT
from service.api.examples import load_example
from service_helpers import make_study

EXAMPLE = load_example("design_request")


def _body(**changes):
    body = copy.deepcopy(EXAMPLE["request"])
    for key, value in changes.items():
        body[key] = value
    return body


def test_design_matches_the_kinetics_package(client):
    r = client.post("/v1/design", json=_body())
    assert r.status_code == 200, r.text
    out = r.json()
    assert out["caution"] == CAUTION_TEXT
    assert out["all_targets_met"] is True
    assert sum(run["n_vessels"] for run in out["runs"]) == 10
    # the same call made directly on kinetics.design gives the same numbers
    req = EXAMPLE["request"]
    prior = kdesign.KineticsPrior(
        pathways=tuple(kdesign.PathwayGuess(**p) for p in req["prior"]["pathways"]),
        between_run_sd_ln_k=0.1,
    )
    lab = kdesign.LabConstraints(
        allowed_temperatures_K=tuple(t + 273.15 for t in req["lab"]["allowed_temperatures_C"]),
        allowed_pH=(4.0, 7.0, 9.0), max_duration_s=30 * 86400.0, n_vessels=10,
        samples_per_vessel=8, analytical_error_percent=3.0, min_sampling_interval_s=600.0,
    )
    rec = kdesign.recommend_design(prior, kdesign.FieldCondition(285.15, 8.0), lab,
                                   target_width_ratio=1.5)
    field = out["field_conditions"][0]
    assert field["width_ratio"] == pytest.approx(float(rec.width_ratio[0]), rel=1e-9)
    assert field["naive_width_ratio"] > field["width_ratio"]
    assert [(x["temperature_K"], x["pH"], x["n_vessels"]) for x in out["runs"]] == [
        (pytest.approx(x.temperature_K), x.pH, x.n_vessels) for x in rec.runs
    ]
    assert out["reasoning"] and out["sampling_rule"]
    assert "preliminary_test" in out and out["preliminary_test"]["recommended"] is False


def test_stable_prior_recommends_preliminary_test_first(client):
    body = _body(prior={"pathways": [{"pathway": "neutral", "ln_k_ref": math.log(1.5e-9),
                                      "Ea_J_per_mol": 90000}],
                        "label": "invented slow ether"},
                 target_width_ratio=3.0)
    body["lab"] = dict(body["lab"], allowed_temperatures_C=[50, 60, 70], max_duration=60,
                       n_vessels=6, samples_per_vessel=6, analytical_error_percent=1.0)
    r = client.post("/v1/design", json=body)
    assert r.status_code == 200, r.text
    out = r.json()
    assert out["preliminary_test"]["recommended"] is True
    assert "ends there" in out["preliminary_test"]["stop_rule"]


def test_prior_from_a_stored_substance(client):
    sid, study = make_study(client)
    # invented runs of an invented ester: k = kN + kB [OH-] roughly, stored as rates
    runs = []
    for t_c in (20.0, 30.0, 40.0, 50.0):
        for ph in (4.0, 7.0, 9.0):
            prior = kdesign.KineticsPrior(pathways=(
                kdesign.PathwayGuess("neutral", ln_k_ref=math.log(1e-8), Ea_J_per_mol=80000),
                kdesign.PathwayGuess("base", ln_k_ref=math.log(0.5), Ea_J_per_mol=60000),
            ))
            k = float(math.exp(prior.ln_k(t_c + 273.15, ph)[0]))
            runs.append({"study_id": study, "temperature_C": t_c, "pH": ph,
                         "replicate_label": "A", "rate": {"k": k, "k_unit": "1/s",
                                                          "se_ln_k": 0.05}})
    r = client.post("/v1/runs/batch", json={"runs": runs})
    assert r.status_code == 201, r.text
    body = _body(prior_from_substance={"substance_id": sid,
                                       "fit_options": {"pathways": "neutral,base"}})
    body.pop("prior")
    r = client.post("/v1/design", json=body)
    assert r.status_code == 200, r.text
    out = r.json()
    assert out["prior_source"]["kind"] == "stored_substance"
    assert out["prior_source"]["substance_id"] == sid
    assert [p["pathway"] for p in out["prior"]["pathways"]] == ["neutral", "base"]
    assert math.isfinite(out["field_conditions"][0]["width_ratio"])


def test_unknown_substance_is_404(client):
    body = _body(prior_from_substance={"substance_id": 99999})
    body.pop("prior")
    r = client.post("/v1/design", json=body)
    assert r.status_code == 404, r.text


@pytest.mark.parametrize(
    "change, fragment",
    [
        ({"target_width_ratio": 1.0}, "target_width_ratio"),
        ({"prior": None}, "exactly one of prior and prior_from_substance"),
        ({"field_conditions": [{"temperature_C": 12.0, "temperature_K": 285.15, "pH": 8}]},
         "exactly one of temperature_K and temperature_C"),
        ({"criterion": "bayes"}, "criterion"),
        ({"surprise": 1}, "surprise"),
    ],
)
def test_bad_requests_are_422_with_a_message(client, change, fragment):
    r = client.post("/v1/design", json=_body(**change))
    assert r.status_code == 422, r.text
    assert fragment in r.text


def test_lab_that_cannot_measure_a_pathway_is_422_naming_it(client):
    body = _body()
    body["prior"]["pathways"][0]["ln_k_ref"] = math.log(1e-11)  # neutral far too slow
    r = client.post("/v1/design", json=body)
    assert r.status_code == 422, r.text
    assert "neutral at most" in r.json()["detail"]


def test_temperature_in_celsius_by_mistake_is_422(client):
    body = _body()
    body["lab"] = dict(body["lab"], allowed_temperatures_K=[20, 30])
    body["lab"].pop("allowed_temperatures_C")
    r = client.post("/v1/design", json=body)
    assert r.status_code == 422, r.text
    assert "looks like °C" in r.text


def test_response_is_strict_json(client):
    r = client.post("/v1/design", json=_body())
    assert r.status_code == 200
    json.loads(r.text, parse_constant=lambda c: (_ for _ in ()).throw(ValueError(c)))


def _evaluate_body(runs):
    return {
        "prior": EXAMPLE["request"]["prior"],
        "field_conditions": EXAMPLE["request"]["field_conditions"],
        "runs": runs,
        "time_unit": "d",
        "analytical_error_percent": 3.0,
    }


def test_evaluate_the_recommended_design_gives_the_same_width(client):
    out = client.post("/v1/design", json=_body()).json()
    runs = [{"temperature_K": r["temperature_K"], "pH": r["pH"], "n_vessels": r["n_vessels"],
             "sampling_times": [t / 86400.0 for t in r["sampling_times_s"]]}
            for r in out["runs"]]
    r = client.post("/v1/design/evaluate", json=_evaluate_body(runs))
    assert r.status_code == 200, r.text
    ev = r.json()
    assert ev["identifiable"] is True and ev["caution"] == CAUTION_TEXT
    assert ev["field_conditions"][0]["width_ratio"] == pytest.approx(
        out["field_conditions"][0]["width_ratio"], rel=1e-9)


def test_evaluate_a_design_that_cannot_work_says_why(client):
    runs = [{"temperature_C": t, "pH": 9.0, "n_vessels": 2, "sampling_times": [0, 1, 2, 4]}
            for t in (20.0, 40.0)]
    r = client.post("/v1/design/evaluate", json=_evaluate_body(runs))
    assert r.status_code == 200, r.text
    ev = r.json()
    assert ev["identifiable"] is False
    assert "pH levels" in ev["problem"]
    assert ev["field_conditions"][0]["width_ratio"] is None


def test_evaluate_rejects_negative_times(client):
    runs = [{"temperature_C": 20.0, "pH": 9.0, "n_vessels": 2, "sampling_times": [0, -1, 2]}]
    r = client.post("/v1/design/evaluate", json=_evaluate_body(runs))
    assert r.status_code == 422
    assert "sampling times must be >= 0" in r.text
