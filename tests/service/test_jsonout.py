"""The fast JSON writer gives back exactly the float64 values, never NaN."""

from __future__ import annotations

import json
from types import SimpleNamespace

import numpy as np
import pytest

from service.jsonout import CHUNK_ROWS, FLAG_NAMES, ROW_FLOAT_FIELDS, prediction_chunks


def _fake_prediction(n, *, with_nan=False):
    rng = np.random.default_rng(5)
    values = {name: rng.lognormal(-10, 3, n) for name in ROW_FLOAT_FIELDS if name != "temperature_C"}
    values["temperature_K"] = rng.uniform(273.15, 310.0, n)
    if with_nan:
        values["k_per_s"][1] = np.nan
        values["dt50_s"][2] = np.inf
    return SimpleNamespace(
        **values,
        contributions={"acid": rng.uniform(0, 1, n), "base": rng.uniform(0, 1, n)},
        flags={name: rng.uniform(0, 1, n) > 0.5 for name in FLAG_NAMES},
        dominant_pathway=np.where(rng.uniform(0, 1, n) > 0.5, "acid", "base"),
    )


@pytest.mark.parametrize("layout", ["rows", "columns"])
@pytest.mark.parametrize("n", [1, CHUNK_ROWS + 3])
def test_round_trip_exact(layout, n):
    pred = _fake_prediction(n)
    body = json.loads(b"".join(prediction_chunks({"caution": "c", "n": n}, pred, layout)))
    assert body["caution"] == "c"
    if layout == "rows":
        rows = body["predictions"]
        assert len(rows) == n
        assert [r["k_per_s"] for r in rows] == pred.k_per_s.tolist()
        assert [r["temperature_C"] for r in rows] == (pred.temperature_K - 273.15).tolist()
        assert [r["flags"]["pH_outside_range"] for r in rows] == pred.flags["pH_outside_range"].tolist()
        assert [r["contributions"]["base"] for r in rows] == pred.contributions["base"].tolist()
        assert [r["dominant_pathway"] for r in rows] == pred.dominant_pathway.tolist()
    else:
        cols = body["columns"]
        assert cols["values"]["dt90_s"] == pred.dt90_s.tolist()
        assert cols["flags"]["ea_from_prior"] == pred.flags["ea_from_prior"].tolist()
        assert cols["dominant_pathway"] == pred.dominant_pathway.tolist()


@pytest.mark.parametrize("layout", ["rows", "columns"])
def test_non_finite_written_as_null(layout):
    pred = _fake_prediction(4, with_nan=True)
    text = b"".join(prediction_chunks({}, pred, layout))
    assert b"NaN" not in text and b"Infinity" not in text
    body = json.loads(text)
    if layout == "rows":
        assert body["predictions"][1]["k_per_s"] is None and body["predictions"][2]["dt50_s"] is None
    else:
        assert body["columns"]["values"]["k_per_s"][1] is None


def test_nested_suffix():
    pred = _fake_prediction(2)
    text = b'{"outer":' + b"".join(prediction_chunks({"a": 1}, pred, "rows", suffix="}}"))
    assert json.loads(text)["outer"]["a"] == 1
