"""The fitted surface of a stored substance: content, cache, invalidation, failures."""

from __future__ import annotations

import math

import pytest

from service_helpers import make_study, post_demo, series_run_body

VELTRAZINE = "Veltrazine (invented)"


@pytest.fixture
def demo(client):
    return post_demo(client)


def test_model_content(client, demo):
    r = client.get(f"/v1/substances/{demo[VELTRAZINE]}/model", params={"level": 0.9})
    assert r.status_code == 200, r.text
    m = r.json()
    assert m["caution"] and m["level"] == 0.9 and m["cached"] is False
    assert set(m["pathways_supported"]) <= {"acid", "neutral", "base"}
    assert m["n_measurements"] == 9 and len(m["runs"]) == 9
    n = len(m["parameter_names"])
    assert len(m["covariance"]) == n and all(len(row) == n for row in m["covariance"])
    for p in m["parameters"]:
        assert p["ci_low"] < p["estimate"] < p["ci_high"]
        assert p["standard_error"] == pytest.approx(math.sqrt(m["covariance"][m["parameter_names"].index(p["name"])][m["parameter_names"].index(p["name"])]), rel=1e-12)
    run = m["runs"][0]
    assert run["series_model"] == "SFO" and run["chi2_error_level_percent"] > 0
    assert len(run["residuals"]) == run["n_points"] == len(run["fitted"])
    assert run["dt50_s"] == pytest.approx(math.log(2) / run["k_per_s"], rel=1e-9)
    assert m["temperature_range_K"] == pytest.approx([293.15, 333.15])
    assert m["pH_range"] == [4.0, 9.0]


def test_biphasic_run_fitted_with_its_model(client, demo):
    m = client.get(f"/v1/substances/{demo['Orbitamide (invented)']}/model").json()
    dfop = [r for r in m["runs"] if r["series_model"] == "DFOP"]
    assert len(dfop) == 1 and dfop[0]["pH"] == 9.0
    assert any("DFOP" in f for f in m["flags"])
    all_sfo = client.get(f"/v1/substances/{demo['Orbitamide (invented)']}/model",
                         params={"series_model": "SFO"}).json()
    assert {r["series_model"] for r in all_sfo["runs"]} == {"SFO"}
    assert all_sfo["data_version"] == m["data_version"]


def test_cache_hit_is_identical_and_new_data_invalidates(client, demo):
    sid = demo[VELTRAZINE]
    first = client.get(f"/v1/substances/{sid}/model").json()
    second = client.get(f"/v1/substances/{sid}/model").json()
    assert second["cached"] is True and first["cached"] is False
    for key in ("parameters", "covariance", "runs", "data_version", "fitted_at"):
        assert first[key] == second[key]
    # a correction changes the data version, so the cache misses and the fit uses the new data
    run = client.get("/v1/runs", params={"substance_id": sid, "pH_min": 8.5, "temperature_min_K": 330}).json()["items"][0]
    corrected = {k: run[k] for k in ("pH", "buffer", "ionic_strength_M", "replicate_label")}
    corrected["temperature_K"] = run["temperature_K"]
    corrected["series"] = {"time": [t / 86400 for t in run["series"]["time_s"]], "time_unit": "d",
                           "concentration": [c * 1000 * 1.02 for c in run["series"]["concentration"]],
                           "concentration_unit": "mg/L"}
    r = client.post(f"/v1/runs/{run['run_uid']}/versions", json={**corrected, "reason": "calibration corrected (invented)"})
    assert r.status_code == 201, r.text
    third = client.get(f"/v1/substances/{sid}/model").json()
    assert third["cached"] is False and third["data_version"] != first["data_version"]
    assert any(d["run_uid"] == run["run_uid"] and d["version"] == 2 for d in third["runs"])
    # withdrawing changes it again
    client.post(f"/v1/runs/{run['run_uid']}/withdraw", json={"reason": "invented retraction"})
    fourth = client.get(f"/v1/substances/{sid}/model").json()
    assert fourth["n_measurements"] == 8 and fourth["data_version"] != third["data_version"]


def test_other_options_are_cached_separately(client, demo):
    sid = demo[VELTRAZINE]
    a = client.get(f"/v1/substances/{sid}/model").json()
    b = client.get(f"/v1/substances/{sid}/model", params={"temperature_model": "eyring"}).json()
    assert b["cached"] is False and b["temperature_model"] == "eyring"
    assert any(n.startswith("dH_") for n in b["parameter_names"])
    assert a["data_version"] == b["data_version"]


def test_one_run_is_422_with_explanation(client):
    sid, study = make_study(client)
    client.post("/v1/runs", json=series_run_body(study))
    r = client.get(f"/v1/substances/{sid}/model")
    assert r.status_code == 422
    body = r.json()
    assert body["error"] == "data_error" and "at least 2" in body["detail"] and "has 1" in body["detail"]


def test_no_runs_is_422(client):
    sid, _ = make_study(client)
    r = client.get(f"/v1/substances/{sid}/model")
    assert r.status_code == 422 and "has 0" in r.json()["detail"]


def test_unknown_substance_is_404(client):
    assert client.get("/v1/substances/4242/model").status_code == 404


@pytest.mark.parametrize("params, field", [
    ({"temperature_model": "vant-hoff"}, "temperature_model"),
    ({"pathways": "acid,photolysis"}, "pathways"),
    ({"series_model": "XYZ"}, "series_model"),
    ({"level": 1.5}, "level"),
    ({"level": "nan"}, "level"),
    ({"ea_prior_mean_J_per_mol": 60000}, "ea_prior"),
])
def test_bad_fit_options_are_422(client, demo, params, field):
    r = client.get(f"/v1/substances/{demo[VELTRAZINE]}/model", params=params)
    assert r.status_code == 422, r.text
    assert any(field in d["msg"] or field in str(d["loc"]) for d in r.json()["detail"])


def test_fixed_pathways_that_cannot_be_identified_is_422(client):
    sid, study = make_study(client)
    for t in (30.0, 50.0):
        client.post("/v1/runs", json=series_run_body(study, temperature_C=t, pH=7.0))
    r = client.get(f"/v1/substances/{sid}/model", params={"pathways": "acid,neutral,base"})
    assert r.status_code == 422
    assert r.json()["error"] in ("not_identifiable", "data_error")


def test_run_without_decline_is_excluded_and_named(client):
    sid, study = make_study(client)
    for t, p in ((30.0, 4.0), (50.0, 4.0), (50.0, 9.0)):
        client.post("/v1/runs", json=series_run_body(study, temperature_C=t, pH=p))
    flat = client.post("/v1/runs", json=series_run_body(
        study, temperature_C=20.0, pH=7.0, conc=[10.0, 10.1, 10.2, 10.3, 10.4])).json()
    r = client.get(f"/v1/substances/{sid}/model")
    assert r.status_code == 200, r.text
    m = r.json()
    assert m["n_measurements"] == 3 and len(m["runs"]) == 4
    (excluded,) = m["excluded_runs"]
    assert excluded["run_uid"] == flat["run_uid"]
    assert "no measurable decline over 7 d" in excluded["reason"]
    assert "less than 10% loss" in excluded["reason"]  # a rising series has no regression bound
    diag = next(d for d in m["runs"] if d["run_uid"] == flat["run_uid"])
    assert diag["status"] == "excluded" and diag["k_per_s"] is None
    # 10 % loss over 7 d: k = -ln(0.9) / 7 d (the documented rule)
    assert diag["k_upper_bound_per_s"] == pytest.approx(-math.log(0.9) / (7 * 86400.0), rel=1e-12)
    assert all(d["status"] == "fitted" for d in m["runs"] if d["run_uid"] != flat["run_uid"])
    assert any(flat["run_uid"] in f and "left out" in f for f in m["flags"])
    pred = client.post(f"/v1/substances/{sid}/predictions",
                       json={"conditions": [{"temperature_C": 20.0, "pH": 7.0}]}).json()
    assert [e["run_uid"] for e in pred["excluded_runs"]] == [flat["run_uid"]]
    # the stored run is untouched
    stored = client.get(f"/v1/runs/{flat['run_uid']}").json()
    assert stored["status"] == "current" and stored["version"] == 1
    # withdrawing that run gives the same surface, now without exclusions
    client.post(f"/v1/runs/{flat['run_uid']}/withdraw", json={"reason": "no decline (invented)"})
    r2 = client.get(f"/v1/substances/{sid}/model")
    assert r2.status_code == 200 and r2.json()["excluded_runs"] == []
    assert r2.json()["parameters"] == m["parameters"]


def test_too_few_runs_with_decline_is_422_naming_the_excluded(client):
    sid, study = make_study(client)
    client.post("/v1/runs", json=series_run_body(study, temperature_C=50.0, pH=4.0))
    flat = client.post("/v1/runs", json=series_run_body(
        study, temperature_C=20.0, pH=7.0, conc=[10.0, 10.05, 9.98, 10.02, 9.97])).json()
    r = client.get(f"/v1/substances/{sid}/model")
    assert r.status_code == 422
    detail = r.json()["detail"]
    assert "at least 2 runs with a measurable decline" in detail and flat["run_uid"] in detail


def test_noisy_flat_run_bound_from_regression(client):
    sid, study = make_study(client)
    for t, p in ((30.0, 4.0), (50.0, 4.0), (50.0, 9.0)):
        client.post("/v1/runs", json=series_run_body(study, temperature_C=t, pH=p))
    flat = client.post("/v1/runs", json=series_run_body(
        study, temperature_C=20.0, pH=7.0, conc=[10.0, 10.05, 9.98, 10.02, 9.97])).json()
    m = client.get(f"/v1/substances/{sid}/model").json()
    diag = next(d for d in m["runs"] if d["run_uid"] == flat["run_uid"])
    assert diag["status"] == "excluded"
    assert "upper confidence bound" in diag["k_upper_bound_basis"]
    assert diag["k_upper_bound_per_s"] > 0
    assert diag["dt50_lower_bound_s"] == pytest.approx(
        math.log(2) / diag["k_upper_bound_per_s"], rel=1e-12
    )


def _sfo_conc(k_per_d: float, wobble: tuple[float, ...]) -> list[float]:
    """An SFO decline at the helper's sampling times, with a small fixed relative wobble."""
    return [10.0 * math.exp(-k_per_d * t) * (1.0 + w)
            for t, w in zip((0, 1, 2, 4, 7), wobble)]


def test_series_runs_with_a_reported_rate_without_se_give_a_model_naming_it(client):
    sid, study = make_study(client)
    wobbles = ((0.01, -0.02, 0.015, -0.01, 0.02), (-0.015, 0.01, -0.02, 0.02, -0.01),
               (0.02, -0.01, 0.01, -0.015, 0.01))
    for (t, k), w in zip(((40.0, 0.08), (50.0, 0.2), (60.0, 0.45)), wobbles):
        r = client.post("/v1/runs", json=series_run_body(study, temperature_C=t, conc=_sfo_conc(k, w)))
        assert r.status_code == 201, r.text
    reported = client.post("/v1/runs", json={
        "study_id": study, "temperature_C": 55.0, "pH": 7.0, "replicate_label": "R",
        "rate": {"k": 0.3, "k_unit": "1/d"},
    })
    assert reported.status_code == 201, reported.text
    uid = reported.json()["run_uid"]
    r = client.get(f"/v1/substances/{sid}/model")
    assert r.status_code == 200, r.text
    m = r.json()
    assert m["n_measurements"] == 4
    assert [e["run_uid"] for e in m["se_imputed_runs"]] == [uid]
    label = m["se_imputed_runs"][0]["label"]
    assert any(f.startswith("no standard error of ln k for: " + label) for f in m["flags"])
    series_se = [d["se_ln_k"] for d in m["runs"] if d["kind"] == "series"]
    # the imputed value is the root mean (moderated) within-run variance of the series runs;
    # moderation shrinks each variance towards a pooled value between the smallest and largest,
    # so the result lies between the smallest and largest series standard error
    # (common practice, no source)
    assert min(series_se) <= m["se_imputed_ln_k"] <= max(series_se)
    diag = next(d for d in m["runs"] if d["run_uid"] == uid)
    assert diag["se_ln_k"] is None and diag["status"] == "fitted"


def test_cached_fit_found_behind_newer_fits_of_past_data_versions(client):
    import datetime as dt

    sid, study = make_study(client)
    wobble = (0.01, -0.02, 0.015, -0.01, 0.02)
    moments = []
    for i, (t, k) in enumerate(((30.0, 0.03), (40.0, 0.08), (50.0, 0.2), (60.0, 0.45),
                                (70.0, 1.0), (45.0, 0.13), (35.0, 0.05))):
        r = client.post("/v1/runs", json=series_run_body(study, temperature_C=t, conc=_sfo_conc(k, wobble)))
        assert r.status_code == 201, r.text
        if i >= 2:
            moments.append(dt.datetime.now(dt.timezone.utc).isoformat())
    current = client.get(f"/v1/substances/{sid}/model").json()
    # fits of four past data versions are stored after the current one
    for moment in moments[:-1]:  # 3, 4, 5 and 6 runs
        past = client.get(f"/v1/substances/{sid}/model", params={"as_of": moment})
        assert past.status_code == 200, past.text
        assert past.json()["data_version"] != current["data_version"]
    again = client.get(f"/v1/substances/{sid}/model").json()
    assert again["cached"] is True
    assert (again["data_version"], again["fitted_at"]) == (current["data_version"], current["fitted_at"])
    client.post("/v1/runs", json=series_run_body(study, temperature_C=55.0, conc=_sfo_conc(0.3, wobble)))
    fresh = client.get(f"/v1/substances/{sid}/model").json()
    assert fresh["cached"] is False and fresh["n_measurements"] == 8
