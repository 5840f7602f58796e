"""Round trip: the demo scenario posted through the API gives exactly the numbers of
calling :mod:`kinetics` directly on the same data."""

from __future__ import annotations

import numpy as np
from numpy.testing import assert_array_equal

from kinetics import units
from kinetics.prediction import predict
from kinetics.series import fit_series
from kinetics.surface import RateMeasurement, fit_surface
from service.demo import demo_payloads
from service_helpers import post_demo

FIELD = {"temperature_C": 12.0, "pH": 8.3, "ionic_strength_M": 0.005}


def _direct(payload):
    """The same data through kinetics alone: units converted, each series fitted, the surface fitted."""
    measurements = []
    for run in payload["runs"]:
        s = run["series"]
        t_K = float(units.celsius_to_kelvin(run["temperature_C"]))
        conc, _ = units.concentration_to_canonical(s["concentration"], s["concentration_unit"])
        loq = None
        if "loq" in s:
            loq = float(units.concentration_to_canonical(s["loq"], s["concentration_unit"])[0])
        below = np.asarray(s["below_loq"], dtype=bool) if s.get("below_loq") else None
        fit = fit_series(units.time_to_s(s["time"], s["time_unit"]), conc, time_unit="s",
                         model=run.get("series_model") or "SFO", loq=loq, below_loq=below)
        measurements.append(RateMeasurement.from_series_fit(
            fit, temperature_K=t_K, pH=run["pH"], ionic_strength_M=run["ionic_strength_M"]))
    return fit_surface(measurements)


def test_demo_round_trip_identical_numbers(client):
    ids = post_demo(client)
    for payload in demo_payloads():
        sid = ids[payload["substance"]["name"]]
        model = client.get(f"/v1/substances/{sid}/model").json()
        row = client.post(f"/v1/substances/{sid}/predictions", json={"conditions": [FIELD]}).json()["predictions"][0]
        surface = _direct(payload)
        assert model["parameter_names"] == list(surface.parameter_names)
        assert_array_equal([p["estimate"] for p in model["parameters"]], surface.estimates)
        assert_array_equal(model["covariance"], surface.covariance)
        direct = predict(surface, float(units.celsius_to_kelvin(FIELD["temperature_C"])), FIELD["pH"],
                         ionic_strength_M=FIELD["ionic_strength_M"])
        for name in ("k_per_s", "k_ci_low_per_s", "k_ci_high_per_s", "k_pi_low_per_s", "k_pi_high_per_s",
                     "dt50_s", "dt50_pi_low_s", "dt50_pi_high_s", "dt90_s", "extrapolation_ln_k"):
            assert row[name] == float(np.asarray(getattr(direct, name)).ravel()[0]), name
        assert row["dominant_pathway"] == str(np.asarray(direct.dominant_pathway).ravel()[0])
        assert row["flags"] == {k: bool(np.asarray(v).ravel()[0]) for k, v in direct.flags.items()}
