"""Predictions for a stored substance: intervals, caution, layouts, 100,000 conditions, bad input."""

from __future__ import annotations

import json

import numpy as np
import pytest
from numpy.testing import assert_allclose

from kinetics.caution import CAUTION_TEXT
from service_helpers import post_demo

VELTRAZINE = "Veltrazine (invented)"


@pytest.fixture
def sid(client):
    return post_demo(client)[VELTRAZINE]


def _predict(client, sid, **body):
    return client.post(f"/v1/substances/{sid}/predictions", json=body)


def test_single_prediction(client, sid):
    r = _predict(client, sid, conditions=[{"temperature_C": 12.0, "pH": 8.3, "ionic_strength_M": 0.005}])
    assert r.status_code == 200, r.text
    body = r.json()
    assert body["caution"] == CAUTION_TEXT
    assert body["n_conditions"] == 1 and body["level"] == 0.95 and body["method"] == "delta"
    row = body["predictions"][0]
    assert row["temperature_K"] == pytest.approx(285.15) and row["pH"] == 8.3
    assert row["k_pi_low_per_s"] < row["k_ci_low_per_s"] < row["k_per_s"] < row["k_ci_high_per_s"] < row["k_pi_high_per_s"]
    assert row["dt50_pi_low_s"] < row["dt50_s"] < row["dt50_pi_high_s"]
    # DT50 = ln 2 / k and DT90 = ln 10 / k for first-order loss (definitions)
    assert row["dt50_s"] == pytest.approx(np.log(2) / row["k_per_s"], rel=1e-12)
    assert row["dt90_s"] == pytest.approx(np.log(10) / row["k_per_s"], rel=1e-12)
    assert row["dominant_pathway"] in row["contributions"]
    assert sum(row["contributions"].values()) == pytest.approx(1.0, rel=1e-12)
    assert row["flags"]["temperature_outside_range"] is True  # 12 °C is below the measured 20 °C
    assert row["flags"]["pH_outside_range"] is False
    assert row["extrapolation_ln_k"] > 0


def test_rows_and_columns_agree(client, sid):
    cols = {"temperature_K": [280.0, 293.15, 310.0], "pH": [6.5, 7.0, 8.9], "salinity": [0.0, 5.0, 30.0]}
    rows = _predict(client, sid, columns=cols).json()
    colr = _predict(client, sid, columns=cols, layout="columns").json()
    assert colr["layout"] == "columns" and colr["caution"] == CAUTION_TEXT
    for name, values in colr["columns"]["values"].items():
        assert [row[name] for row in rows["predictions"]] == values
    assert [row["dominant_pathway"] for row in rows["predictions"]] == colr["columns"]["dominant_pathway"]
    objs = [{"temperature_K": t, "pH": p, "salinity": s} for t, p, s in zip(*cols.values())]
    assert _predict(client, sid, conditions=objs).json()["predictions"] == rows["predictions"]


def test_level_widens_intervals(client, sid):
    cond = [{"temperature_C": 25.0, "pH": 7.0}]
    r90 = _predict(client, sid, conditions=cond, level=0.90).json()["predictions"][0]
    r99 = _predict(client, sid, conditions=cond, level=0.99).json()["predictions"][0]
    assert r99["k_ci_low_per_s"] < r90["k_ci_low_per_s"] and r99["k_ci_high_per_s"] > r90["k_ci_high_per_s"]
    assert r99["k_per_s"] == r90["k_per_s"]


def test_montecarlo_with_seed_is_reproducible(client, sid):
    body = dict(conditions=[{"temperature_C": 15.0, "pH": 8.0}], method="montecarlo", n_draws=2000, seed=7)
    a = _predict(client, sid, **body).json()
    b = _predict(client, sid, **body).json()
    assert a["method"] == "montecarlo" and a["predictions"] == b["predictions"]


def test_hundred_thousand_conditions(client, sid):
    n = 100_000
    rng = np.random.default_rng(11)
    t_C = np.round(rng.uniform(1.0, 35.0, n), 2)
    ph = np.round(rng.uniform(5.0, 9.5, n), 2)
    r = _predict(client, sid, columns={"temperature_C": t_C.tolist(), "pH": ph.tolist()}, layout="columns")
    assert r.status_code == 200
    body = json.loads(r.content)
    assert body["n_conditions"] == n and body["caution"] == CAUTION_TEXT
    values = body["columns"]["values"]
    assert len(values["k_per_s"]) == n and len(body["columns"]["flags"]["pH_outside_range"]) == n
    k = np.array(values["k_per_s"])
    assert np.all(np.isfinite(k)) and np.all(k > 0)
    assert_allclose(values["temperature_K"], t_C + 273.15, rtol=0, atol=1e-9)
    r = _predict(client, sid, columns={"temperature_C": t_C[:1000].tolist(), "pH": ph[:1000].tolist()})
    assert [row["k_per_s"] for row in r.json()["predictions"]] == values["k_per_s"][:1000]


BAD = {
    "pH above 14": ({"conditions": [{"temperature_C": 10, "pH": 7}, {"temperature_C": 10, "pH": 15.5}]},
                    ["body", "conditions", 1, "pH"], "15.5"),
    "frozen water": ({"conditions": [{"temperature_C": -3, "pH": 7}]},
                     ["body", "conditions", 0, "temperature_C"], "-3"),
    "boiling water (K)": ({"columns": {"temperature_K": [300, 380], "pH": [7, 7]}},
                          ["body", "columns", "temperature_K", 1], "380"),
    "two temperatures": ({"conditions": [{"temperature_C": 10, "temperature_K": 283.15, "pH": 7}]},
                         ["body", "conditions", 0, "temperature_C"], "exactly one"),
    "no temperature": ({"conditions": [{"pH": 7}]}, ["body", "conditions", 0, "temperature_C"], "exactly one"),
    "ionic strength and salinity": ({"conditions": [{"temperature_C": 10, "pH": 7, "ionic_strength_M": 0.1, "salinity": 30}]},
                                    ["body", "conditions", 0, "salinity"], "not both"),
    "ragged columns": ({"columns": {"temperature_C": [10, 11], "pH": [7]}},
                       ["body", "columns", "temperature_C"], "2 values"),
    "negative salinity": ({"conditions": [{"temperature_C": 10, "pH": 7, "salinity": -1}]},
                          ["body", "conditions", 0, "salinity"], "greater than or equal to 0"),
    "no conditions": ({}, ["body"], "either as conditions or as columns"),
    "bad level": ({"conditions": [{"temperature_C": 10, "pH": 7}], "level": 1.0}, ["body", "level"], "less than 1"),
    "bad method": ({"conditions": [{"temperature_C": 10, "pH": 7}], "method": "bootstrap"}, ["body", "method"], "delta"),
}


@pytest.mark.parametrize("case", list(BAD), ids=list(BAD))
def test_bad_conditions_are_422(client, sid, case):
    body, loc, fragment = BAD[case]
    r = _predict(client, sid, **body)
    assert r.status_code == 422, r.text
    detail = r.json()["detail"]
    assert any(d["loc"] == loc and fragment in d["msg"] for d in detail), detail


@pytest.mark.parametrize("literal", ["NaN", "Infinity"])
def test_non_finite_condition_is_422(client, sid, literal):
    text = '{"conditions": [{"temperature_C": %s, "pH": 7.0}]}' % literal
    r = client.post(f"/v1/substances/{sid}/predictions", content=text,
                    headers={"content-type": "application/json"})
    assert r.status_code == 422
    assert r.json()["detail"][0]["loc"] == ["body", "conditions", 0, "temperature_C"]


def test_too_many_conditions_is_413(app, client, sid):
    app.state.settings.max_conditions_per_request = 100_000
    n = 100_001
    r = _predict(client, sid, columns={"temperature_C": [10.0] * n, "pH": [7.0] * n}, layout="columns")
    assert r.status_code == 413
    assert "100001" in r.json()["detail"] and "100000" in r.json()["detail"]


def test_montecarlo_budget_is_413(app, client, sid):
    app.state.settings.max_montecarlo_evaluations = 1_000_000
    r = _predict(client, sid, columns={"temperature_C": [10.0] * 1000, "pH": [7.0] * 1000},
                 method="montecarlo", n_draws=5000)
    assert r.status_code == 413 and "delta" in r.json()["detail"]


def test_unknown_substance_is_404(client):
    r = _predict(client, 999, conditions=[{"temperature_C": 10, "pH": 7}])
    assert r.status_code == 404
