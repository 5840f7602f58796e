"""Fast JSON for columnar prediction results (100,000 conditions in one response).

Numbers are written by orjson with the shortest round-trip representation, so a client
that parses the JSON gets exactly the float64 values :func:`kinetics.prediction.predict`
returned (orjson formats a float64 array about ten times faster than Python's ``repr``,
which is what makes 100,000 conditions per request practical). Non-finite values (which
the kinetics package does not produce for valid input) would be written as ``null``,
never as NaN. Rows are produced in chunks so that a
:class:`~fastapi.responses.StreamingResponse` can send them as they are formatted.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from typing import Any

import numpy as np
import orjson

from kinetics import units

__all__ = ["ROW_FLOAT_FIELDS", "FLAG_NAMES", "prediction_arrays", "prediction_chunks", "CHUNK_ROWS"]

CHUNK_ROWS = 5000

#: float fields of each prediction row, in output order
ROW_FLOAT_FIELDS = (
    "temperature_K", "temperature_C", "pH", "ionic_strength_M", "salinity",
    "k_per_s", "k_ci_low_per_s", "k_ci_high_per_s", "k_pi_low_per_s", "k_pi_high_per_s",
    "ln_k", "se_ln_k",
    "dt50_s", "dt50_ci_low_s", "dt50_ci_high_s", "dt50_pi_low_s", "dt50_pi_high_s",
    "dt90_s", "dt90_ci_low_s", "dt90_ci_high_s", "dt90_pi_low_s", "dt90_pi_high_s",
    "extrapolation_ln_k",
)

FLAG_NAMES = (
    "temperature_outside_range", "pH_outside_range", "uncharacterised_pathway_matters",
    "ea_from_prior",
)


def prediction_arrays(pred: Any) -> dict[str, np.ndarray]:
    """The float columns of a :class:`kinetics.prediction.Prediction`, flattened."""
    cols = {}
    for name in ROW_FLOAT_FIELDS:
        if name == "temperature_C":
            cols[name] = units.kelvin_to_celsius(np.asarray(pred.temperature_K, dtype=float).ravel())
        else:
            cols[name] = np.asarray(getattr(pred, name), dtype=float).ravel()
    return cols


def _tokens(a: np.ndarray) -> list[bytes]:
    """One JSON number per element (orjson writes ``null`` for a non-finite value)."""
    text = orjson.dumps(np.ascontiguousarray(a, dtype=np.float64), option=orjson.OPT_SERIALIZE_NUMPY)
    return text[1:-1].split(b",") if a.size else []


def _open_object(header: dict[str, Any]) -> bytes:
    text = json.dumps(header, allow_nan=False, ensure_ascii=False)
    return (text[:-1] + ("," if header else "")).encode()


def prediction_chunks(header: dict[str, Any], pred: Any, layout: str, *, suffix: str = "}") -> Iterator[bytes]:
    """The JSON body: ``header`` fields, then the predictions in ``layout``.

    Parameters
    ----------
    header : dict
        Fields written first (caution, level, ...), JSON-safe.
    pred : kinetics.prediction.Prediction
        The predictions.
    layout : {"rows", "columns"}
        ``rows``: ``"predictions": [{...}, ...]``; ``columns``: ``"columns": {...}``.
    suffix : str
        Text closing the object (lets a caller nest the body inside another object).
    """
    cols = prediction_arrays(pred)
    pathways = list(pred.contributions)
    contributions = {p: np.asarray(pred.contributions[p], dtype=float).ravel() for p in pathways}
    flags = {name: np.asarray(pred.flags[name], dtype=bool).ravel() for name in FLAG_NAMES}
    dominant = np.asarray(pred.dominant_pathway).ravel()
    head = _open_object(header)
    if layout == "columns":
        # one orjson call over the arrays: no intermediate copies of the (50 MB) body
        body = {
            "columns": {
                "values": {name: np.ascontiguousarray(cols[name]) for name in ROW_FLOAT_FIELDS},
                "dominant_pathway": dominant.tolist(),
                "contributions": {p: np.ascontiguousarray(contributions[p]) for p in pathways},
                "flags": {name: np.ascontiguousarray(flags[name]) for name in FLAG_NAMES},
            },
        }
        yield head
        yield memoryview(orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY))[1:-1]
        yield suffix.encode()
        return
    yield head + b'"predictions":['
    n = dominant.size
    template = (
        "{" + ",".join(f'"{name}":%b' for name in ROW_FLOAT_FIELDS)
        + ',"dominant_pathway":%b,"contributions":{'
        + ",".join(f'"{p}":%b' for p in pathways)
        + '},"flags":{' + ",".join(f'"{name}":%b' for name in FLAG_NAMES) + "}}"
    ).encode()
    quoted = {p: orjson.dumps(str(p)) for p in set(dominant.tolist())}
    for start in range(0, n, CHUNK_ROWS):
        stop = min(n, start + CHUNK_ROWS)
        columns = [_tokens(cols[name][start:stop]) for name in ROW_FLOAT_FIELDS]
        columns.append([quoted[p] for p in dominant[start:stop].tolist()])
        columns += [_tokens(contributions[p][start:stop]) for p in pathways]
        columns += [np.where(flags[name][start:stop], b"true", b"false").tolist() for name in FLAG_NAMES]
        rows = b",".join([template % row for row in zip(*columns)])
        yield rows if start == 0 else b"," + rows
    yield b"]" + suffix.encode()
