"""fieldrate kinetics: hydrolysis fits and field-condition predictions.

A pure numerical package (numpy and scipy only): no web, database or settings
code is imported here. The public entry points are

- :func:`kinetics.fit_series` - fit one concentration-time series (SFO, FOMC, DFOP, HS),
- :func:`kinetics.fit_surface` - fit the pH-temperature rate surface to many runs,
- :func:`kinetics.predict` - rates, DT50 and DT90 with intervals at field conditions,
- :func:`kinetics.water.pKw` - the ion product of water and seawater,
- :func:`kinetics.equilibrium_ratio` - is hydrolysis effectively irreversible?

Names are resolved lazily so that importing one submodule does not import all.
"""

from __future__ import annotations

import importlib
from typing import Any

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import (
    ConvergenceError,
    DataError,
    FitError,
    IdentifiabilityError,
    InputError,
    KineticsError,
    UnitError,
)

__version__ = "0.1.0"

# public name -> submodule that defines it
_LAZY = {
    "fit_series": "kinetics.series",
    "SeriesFit": "kinetics.series",
    "SERIES_MODELS": "kinetics.series",
    "fit_sfo_batch": "kinetics.series",
    "fit_surface": "kinetics.surface",
    "SurfaceFit": "kinetics.surface",
    "RateMeasurement": "kinetics.surface",
    "PATHWAYS": "kinetics.surface",
    "TEMPERATURE_MODELS": "kinetics.surface",
    "predict": "kinetics.prediction",
    "Prediction": "kinetics.prediction",
    "equilibrium_ratio": "kinetics.equilibrium",
    "EquilibriumResult": "kinetics.equilibrium",
    "Scenario": "kinetics.scenarios",
    "ScenarioResult": "kinetics.scenarios",
    "run_scenario": "kinetics.scenarios",
    "normalise_dt50": "kinetics.normalisation",
    "screen_persistence": "kinetics.screening",
    "check_study": "kinetics.screening",
    "class_hints": "kinetics.hints",
    "recommend_design": "kinetics.design",
}

_SUBMODULES = {
    "water", "series", "surface", "prediction", "units", "equilibrium",
    "scenarios", "normalisation", "screening", "hints", "design", "errors", "caution",
}

__all__ = [
    "CAUTION_TEXT",
    "KineticsError",
    "InputError",
    "UnitError",
    "DataError",
    "FitError",
    "ConvergenceError",
    "IdentifiabilityError",
    *sorted(_LAZY),
]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        module = importlib.import_module(_LAZY[name])
        value = getattr(module, name)
        globals()[name] = value
        return value
    if name in _SUBMODULES:
        return importlib.import_module(f"kinetics.{name}")
    raise AttributeError(f"module 'kinetics' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(__all__) | _SUBMODULES)
