"""Field conditions from a request, as validated numpy arrays (vectorised checks).

Problems are reported with the index of the condition (``["body", "conditions", 17,
"pH"]`` or ``["body", "columns", "pH", 17]``), at most :data:`MAX_REPORTED` of them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Optional

import numpy as np

from kinetics import units
from service.errors import ItemErrors, TooLarge

__all__ = ["ConditionArrays", "condition_arrays", "MAX_REPORTED"]

MAX_REPORTED = 20


@dataclass(frozen=True)
class ConditionArrays:
    temperature_K: np.ndarray
    pH: np.ndarray
    ionic_strength_M: np.ndarray
    salinity: np.ndarray

    def __len__(self) -> int:
        return int(self.pH.size)


def _column(values: Optional[list[float]], n: int, fill: float) -> np.ndarray:
    if values is None:
        return np.full(n, fill)
    return np.asarray(values, dtype=float)


def _problems(mask: np.ndarray, loc_of, msg_of, kind: str) -> list[dict[str, Any]]:
    out = []
    for i in np.flatnonzero(mask)[:MAX_REPORTED]:
        out.append({"loc": loc_of(int(i)), "msg": msg_of(int(i)), "type": kind})
    return out


def condition_arrays(conditions: Any, columns: Any, *, max_conditions: int) -> ConditionArrays:
    """Arrays of temperature [K], pH, ionic strength [mol/L] and salinity, checked.

    Raises
    ------
    TooLarge
        More than ``max_conditions`` conditions.
    ItemErrors
        A condition without (or with two) temperatures, with both an ionic strength and a
        salinity, a temperature outside liquid water or a pH outside 0-14.
    """
    if conditions is not None:
        n = len(conditions)
        if n > max_conditions:
            raise TooLarge(f"{n} conditions were sent; at most {max_conditions} are accepted per request")
        def col(name: str) -> np.ndarray:
            return np.array([c.get(name) for c in conditions], dtype=float)  # None -> nan

        t_C, t_K, ph = col("temperature_C"), col("temperature_K"), col("pH")
        ionic, sal = col("ionic_strength_M"), col("salinity")

        def loc(field: str):
            return lambda i: ["body", "conditions", i, field]
    else:
        n = len(columns.pH)
        if n > max_conditions:
            raise TooLarge(f"{n} conditions were sent; at most {max_conditions} are accepted per request")
        problems = []
        for name in ("temperature_C", "temperature_K", "ionic_strength_M", "salinity"):
            col = getattr(columns, name)
            if col is not None and len(col) != n:
                problems.append({
                    "loc": ["body", "columns", name],
                    "msg": f"columns.{name} has {len(col)} values but columns.pH has {n}",
                    "type": "length_mismatch",
                })
        if (columns.temperature_C is None) == (columns.temperature_K is None):
            problems.append({
                "loc": ["body", "columns"],
                "msg": "columns: give exactly one of temperature_C or temperature_K",
                "type": "value_error",
            })
        if columns.ionic_strength_M is not None and columns.salinity is not None:
            problems.append({
                "loc": ["body", "columns"],
                "msg": "columns: give ionic_strength_M (fresh water) or salinity (sea water), not both",
                "type": "value_error",
            })
        if problems:
            raise ItemErrors(problems)
        t_C = _column(columns.temperature_C, n, np.nan)
        t_K = _column(columns.temperature_K, n, np.nan)
        ph = np.asarray(columns.pH, dtype=float)
        ionic = _column(columns.ionic_strength_M, n, np.nan)
        sal = _column(columns.salinity, n, np.nan)

        def loc(field: str):
            return lambda i: ["body", "columns", field, i]

    if n == 0:
        raise ItemErrors([{"loc": ["body"], "msg": "no field conditions were given", "type": "value_error"}])
    problems: list[dict[str, Any]] = []
    has_C, has_K = ~np.isnan(t_C), ~np.isnan(t_K)
    both_or_none = has_C == has_K
    problems += _problems(
        both_or_none, loc("temperature_C"),
        lambda i: f"condition {i}: give exactly one of temperature_C or temperature_K", "value_error",
    )
    both_water = ~np.isnan(ionic) & ~np.isnan(sal)
    problems += _problems(
        both_water, loc("salinity"),
        lambda i: f"condition {i}: give ionic_strength_M (fresh water) or salinity (sea water), not both",
        "value_error",
    )
    T = np.where(has_C, t_C + units.ZERO_CELSIUS_K, t_K)
    bad_T = ~both_or_none & ((T < units.LIQUID_WATER_MIN_K) | (T > units.LIQUID_WATER_MAX_K))
    problems += _problems(
        bad_T & has_C, loc("temperature_C"),
        lambda i: f"condition {i}: temperature_C {float(t_C[i])!r} °C is not liquid water at 0.1 MPa (0-100 °C)",
        "value_error",
    )
    problems += _problems(
        bad_T & has_K, loc("temperature_K"),
        lambda i: f"condition {i}: temperature_K {float(t_K[i])!r} K is not liquid water at 0.1 MPa "
        f"({units.LIQUID_WATER_MIN_K}-{units.LIQUID_WATER_MAX_K} K)",
        "value_error",
    )
    bad_pH = (ph < units.PH_MIN) | (ph > units.PH_MAX)
    problems += _problems(
        bad_pH, loc("pH"), lambda i: f"condition {i}: pH {float(ph[i])!r} is outside 0 to 14", "value_error"
    )
    for name, arr in (("ionic_strength_M", ionic), ("salinity", sal)):
        neg = arr < 0
        problems += _problems(
            neg, loc(name), lambda i, a=arr, nm=name: f"condition {i}: {nm} {float(a[i])!r} is negative",
            "value_error",
        )
    if problems:
        raise ItemErrors(problems[:MAX_REPORTED])
    return ConditionArrays(
        temperature_K=T,
        pH=ph,
        ionic_strength_M=np.nan_to_num(ionic, nan=0.0),
        salinity=np.nan_to_num(sal, nan=0.0),
    )
