"""Predictions at field conditions for the HTTP layer (calls :func:`kinetics.prediction.predict`)."""

from __future__ import annotations

import logging
from typing import Any, Optional

import numpy as np

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import FitError, KineticsError
from kinetics.prediction import Prediction, predict
from kinetics.surface import SurfaceFit
from service.conditions import ConditionArrays
from service.errors import TooLarge
from service.schemas import FitOptions, PredictionOptions

__all__ = ["run_predictions", "prediction_header"]

log = logging.getLogger("fieldrate.service")


def run_predictions(
    surface: SurfaceFit, arrays: ConditionArrays, opts: PredictionOptions, *, max_mc_evaluations: int
) -> Prediction:
    """Predict at ``arrays`` with the level and method of ``opts``."""
    if opts.method == "montecarlo" and opts.n_draws * len(arrays) > max_mc_evaluations:
        raise TooLarge(
            f"a Monte Carlo prediction of {len(arrays)} conditions with {opts.n_draws} draws "
            f"needs {opts.n_draws * len(arrays)} evaluations; at most {max_mc_evaluations} are "
            "accepted per request (use method='delta', fewer draws or fewer conditions)"
        )
    try:
        return predict(
            surface,
            arrays.temperature_K,
            arrays.pH,
            ionic_strength_M=arrays.ionic_strength_M,
            salinity=arrays.salinity,
            level=opts.level,
            method=opts.method,
            n_draws=opts.n_draws,
            seed=opts.seed,
        )
    except KineticsError:
        raise
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        log.exception("unforeseen numerical failure in a prediction")
        raise FitError(
            f"the prediction failed numerically ({type(exc).__name__}: {exc}) for these "
            "conditions; check them against the measured ranges"
        ) from exc


def prediction_header(
    surface: SurfaceFit,
    pred: Prediction,
    *,
    opts: PredictionOptions,
    fit_options: FitOptions,
    substance_id: Optional[int] = None,
    data_version: Optional[str] = None,
    excluded_runs: Optional[list[dict[str, Any]]] = None,
) -> dict[str, Any]:
    """Everything of the prediction response except the predictions themselves.

    ``excluded_runs`` lists the runs the surface left out (:func:`service.fitting.excluded_runs`).
    """
    rs = float(pred.residual_scale)
    return {
        "caution": CAUTION_TEXT,
        "substance_id": substance_id,
        "data_version": data_version,
        "fit_options": fit_options.model_dump(mode="json"),
        "level": float(pred.level),
        "method": pred.method,
        "dof": int(pred.dof),
        "residual_scale": rs if rs == rs else None,
        "temperature_range_K": [float(v) for v in surface.temperature_range_K],
        "pH_range": [float(v) for v in surface.pH_range],
        "pathways_supported": list(surface.pathways),
        "excluded_runs": list(excluded_runs or []),
        "n_conditions": len(pred),
        "layout": opts.layout,
    }
