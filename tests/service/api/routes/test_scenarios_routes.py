"""Routes of service/api/routes/scenarios.py: scenarios, normalisation, persistence screening,
study checks and hints (invented data). Named test_scenarios_routes so that its module name
differs from tests/kinetics/test_scenarios.py."""

from __future__ import annotations

import math

import pytest
from numpy.testing import assert_allclose

from kinetics.caution import CAUTION_TEXT
from kinetics.screening import PERSISTENCE_CAUTION
from service.demo import demo_payloads
from service_helpers import substance_body


def veltrazine_runs():
    """The nine invented demo runs of 'Veltrazine (invented)'."""
    return demo_payloads()[0]["runs"]


@pytest.fixture
def stored(client):
    """The invented Veltrazine substance, study and runs stored through the API."""
    p = demo_payloads()[0]
    sid = client.post("/v1/substances", json=p["substance"]).json()["id"]
    st = client.post("/v1/studies", json={**p["study"], "substance_id": sid}).json()["id"]
    r = client.post("/v1/runs/batch", json={"runs": [{**x, "study_id": st} for x in p["runs"]]})
    assert r.status_code == 201, r.text
    return sid, st


def test_demo_scenarios_are_listed_and_invented(client):
    r = client.get("/v1/scenarios/demo")
    assert r.status_code == 200
    names = {s["name"] for s in r.json()["scenarios"]}
    assert names == {"Lake Tarnholm (invented)", "Brenmouth estuary (invented)"}
    for s in r.json()["scenarios"]:
        assert "invented" in s["description"].lower()


def test_stored_substance_scenario_matches_the_stateless_one(client, stored):
    sid, _ = stored
    body = {"demo_scenario": "lake_tarnholm", "n_draws": 200, "seed": 4}
    a = client.post(f"/v1/substances/{sid}/scenarios", json=body)
    b = client.post("/v1/scenarios/calculate", json={**body, "runs": veltrazine_runs()})
    assert a.status_code == 200, a.text
    assert b.status_code == 200, b.text
    ja, jb = a.json(), b.json()
    assert ja["caution"] == CAUTION_TEXT
    assert ja["model"]["substance_id"] == sid
    # stored and posted runs give the same fit and, with the same seed, the same band
    for ra, rb in zip(ja["summary"], jb["summary"]):
        assert_allclose(ra["fraction_remaining"], rb["fraction_remaining"], rtol=1e-9)
        assert_allclose(ra["fraction_ci_low"], rb["fraction_ci_low"], rtol=1e-9)
    times = [row["time_d"] for row in ja["summary"]]
    assert times == [30.0, 90.0, 365.0]
    for row in ja["summary"]:
        assert row["fraction_ci_low"] < row["fraction_remaining"] < row["fraction_ci_high"]
    # the lake is colder than every run (20-60 °C): flagged
    assert ja["flags"]["temperature_outside_range"]
    assert len(ja["series"]["time_s"]) == len(ja["series"]["fraction_remaining"])


def test_explicit_scenario_constant_conditions_equal_first_order_decay(client):
    body = {
        "runs": veltrazine_runs(),
        "scenario": {"name": "Constant tank (invented)", "invented": True,
                     "temperature_C": 25.0, "pH": 7.0},
        "horizon_d": 100, "output_times_d": [0, 10, 50, 100], "report_times_d": [50],
        "n_draws": 0,
    }
    r = client.post("/v1/scenarios/calculate", json=body)
    assert r.status_code == 200, r.text
    j = r.json()
    k = j["series"]["k_per_s"][0]
    # analytic first-order solution C/C0 = exp(-k t) at constant conditions
    expected = [math.exp(-k * t * 86400.0) for t in (0, 10, 50, 100)]
    assert_allclose(j["series"]["fraction_remaining"], expected, rtol=1e-10)
    assert_allclose(j["dt50_d"], math.log(2) / k / 86400.0, rtol=1e-9)
    assert j["summary"][0]["fraction_ci_low"] is None


@pytest.mark.parametrize(
    "change, status, fragment",
    [
        ({"demo_scenario": "atlantis"}, 404, "available: brenmouth_estuary, lake_tarnholm"),
        ({"scenario": {"name": "x", "temperature_C": 10, "pH": 7}}, 422, "either scenario"),
        ({"n_draws": 50}, 422, "n_draws must be 0 or at least 100"),
        ({"report_times_d": [400]}, 422, "outside 0 to horizon_d"),
        ({"demo_scenario": None, "scenario": {"name": "Frozen (invented)",
          "temperature_C": [{"kind": "annual_cycle", "mean": 2.0, "amplitude": 5.0,
                             "phase_day": 200}], "pH": 7}}, 422, "outside the liquid-water range"),
        ({"n_draws": 20000, "horizon_d": 36500}, 413, "lower n_draws or horizon_d"),
    ],
)
def test_scenario_errors_are_clear(client, change, status, fragment):
    body = {"runs": veltrazine_runs(), "demo_scenario": "lake_tarnholm", "n_draws": 200, **change}
    r = client.post("/v1/scenarios/calculate", json=body)
    assert r.status_code == status, r.text
    assert fragment in r.text


def test_unknown_substance_is_404(client):
    r = client.post("/v1/substances/999/scenarios", json={"demo_scenario": "lake_tarnholm"})
    assert r.status_code == 404


def test_normalisation_defaults_hand_computed(client):
    # EFSA (2008) Ea 65.4 kJ/mol, 20 -> 12 °C: factor 2.122902 (hand computation in
    # tests/kinetics/test_normalisation.py); ECHA R.16: exp(0.08 * 8) = 1.8964809
    r = client.post("/v1/normalisation", json={"dt50": 10, "temperature_C": 20})
    assert r.status_code == 200, r.text
    assert_allclose(r.json()["dt50_reference_d"], 21.22902, rtol=1e-6)
    r = client.post("/v1/normalisation", json={"dt50": 240, "time_unit": "h", "temperature_C": 20,
                                                "method": "echa_r16"})
    assert_allclose(r.json()["dt50_reference_d"], 18.964809, rtol=1e-7)
    assert r.json()["caution"] == CAUTION_TEXT


def test_fitted_normalisation_for_a_stored_substance(client, stored):
    sid, _ = stored
    r = client.post("/v1/normalisation", json={"dt50": 10, "temperature_C": 20,
                                                "method": "fitted", "substance_id": sid, "pH": 9})
    assert r.status_code == 200, r.text
    j = r.json()
    assert j["interval"]["dt50_low_d"] < j["dt50_reference_d"] < j["interval"]["dt50_high_d"]
    assert any("outside the measured temperatures" in n for n in j["notes"])
    r = client.post("/v1/normalisation", json={"dt50": 10, "temperature_C": 20, "method": "fitted"})
    assert r.status_code == 422 and "substance_id" in r.text


def test_persistence_screening_given_and_predicted(client, stored):
    r = client.post("/v1/screening/persistence",
                    json={"dt50": 25, "temperature_C": 20, "normalisation": "efsa_2008"})
    assert r.status_code == 200, r.text
    j = r.json()
    assert j["caution"] == CAUTION_TEXT + " " + PERSISTENCE_CAUTION
    crit = {c["key"]: c for c in j["criteria"]}
    # 25 d * 2.122902 = 53.07 d at 12 °C: above the REACH P threshold of 40 d, below vP 60 d
    assert crit["reach_P_fresh"]["exceeds_threshold"]
    assert not crit["reach_vP_water"]["exceeds_threshold"]
    sid, _ = stored
    r = client.post("/v1/screening/persistence",
                    json={"substance_id": sid, "pH": 9.0, "temperature_C": 12, "water": "marine"})
    assert r.status_code == 200, r.text
    j = r.json()
    assert j["dt50_source"].startswith("predicted")
    assert j["normalisation"][0]["method"] == "fitted"
    assert {c["key"] for c in j["criteria"]} == {
        "reach_P_marine", "reach_vP_water", "stockholm_annex_d_water"}
    r = client.post("/v1/screening/persistence", json={"temperature_C": 12})
    assert r.status_code == 422 and "give dt50" in r.text


def test_stored_study_check(client, stored):
    _, st = stored
    r = client.post(f"/v1/studies/{st}/check",
                    json={"claims": ["hydrolytically_stable", "activation_energy"]})
    assert r.status_code == 200, r.text
    j = r.json()
    assert not j["stable_conclusion_supported"]  # the invented study has no 50 °C runs
    claims = {c["claim"]: c for c in j["claims"]}
    assert claims["activation_energy"]["supported"]
    assert "a 5-day Tier 1 run at 50 °C at pH 4" in j["missing"]
    assert client.post("/v1/studies/999/check", json={}).status_code == 404


def test_stateless_study_check_and_bad_claim(client):
    runs = [{"temperature_C": 50, "pH": ph, "duration": 5, "percent_loss": loss}
            for ph, loss in ((4, 1.0), (7, 2.0), (9, 12.0))]
    r = client.post("/v1/screening/study-check", json={"runs": runs,
                                                        "claims": ["hydrolytically_stable"]})
    assert r.status_code == 200, r.text
    assert r.json()["unstable_pH"] == [9.0]
    r = client.post("/v1/screening/study-check", json={"runs": runs, "claims": ["stable"]})
    assert r.status_code == 422


def test_hints_for_a_stored_substance(client, stored):
    sid, _ = stored
    r = client.post(f"/v1/substances/{sid}/hints", json={})
    assert r.status_code == 200, r.text
    j = r.json()
    # stored class "carboxylic ester (invented)" is recognised
    assert j["substance_class"] == "carboxylic_ester"
    assert j["caution"] == CAUTION_TEXT
    assert all("from memory" in h["message"] or h["level"] == "implausible" for h in j["hints"])
    other = client.post("/v1/substances", json=substance_body("Plainium (invented)")).json()["id"]
    r = client.post(f"/v1/substances/{other}/hints", json={"substance_class": "amide"})
    assert r.status_code == 422  # no runs: the fit cannot be made, said clearly
