"""Field scenarios, temperature normalisation, persistence screening, study checks and hints.

Routes (all read-only; nothing is stored):

- ``GET  /v1/scenarios/demo`` - the invented demo water bodies shipped with the service;
- ``POST /v1/substances/{substance_id}/scenarios`` - fraction remaining in a scenario for
  the substance's fitted surface;
- ``POST /v1/scenarios/calculate`` - the same for runs posted in the request;
- ``POST /v1/normalisation`` - a DT50 carried to a reference temperature;
- ``POST /v1/screening/persistence`` - a hydrolysis half-life against water criteria;
- ``POST /v1/studies/{study_id}/check`` - a stored study against the OECD TG 111 tiers;
- ``POST /v1/screening/study-check`` - the same for runs posted in the request;
- ``POST /v1/substances/{substance_id}/hints`` - substance-class plausibility hints.

Every result carries the caution text.
"""

from __future__ import annotations

import json
import math
from functools import lru_cache
from pathlib import Path
from typing import Annotated, Any, Literal, Optional, Union

import numpy as np
from fastapi import APIRouter, Depends, Request
from pydantic import Field, model_validator

from kinetics import units
from kinetics.errors import InputError
from kinetics.hints import class_hints
from kinetics.normalisation import normalise_dt50
from kinetics.prediction import predict
from kinetics.scenarios import (
    DAY_S,
    Scenario,
    ScenarioResult,
    run_scenario,
    scenario_from_dict,
    scenario_to_dict,
)
from kinetics.screening import (
    StudyCheck,
    StudyRun,
    check_study,
    screen_persistence,
)
from kinetics.surface import SurfaceFit
from service import crud
from service.api.examples import openapi_examples
from service.deps import Principal, ReadSession, require_scope
from service.errors import NotFound, TooLarge
from service.fitting import check_posted_runs, compute_fit, run_input_from_payload, stored_surface
from service.modelstore import load_model
from service.schemas import FitOptions, RunData, Strict

__all__ = ["router", "demo_scenarios", "DEMO_SCENARIOS_FILE"]

router = APIRouter(tags=["scenarios and screening"])

DEMO_SCENARIOS_FILE = Path(__file__).resolve().parent.parent.parent / "demo_scenarios.json"
TimeUnit = Literal["s", "min", "h", "d"]
_MAX_OUTPUT_TIMES = 10_000
# words in a stored free-text class that name one of kinetics.hints.SUBSTANCE_CLASSES
_CLASS_WORDS = (
    ("carbamate", ("carbamate",)),
    ("phosphate_ester", ("phosphate", "phosphorothioate", "phosphonate")),
    ("carboxylic_ester", ("carboxylic ester", "carboxylic acid ester", "ester")),
    ("alkyl_halide", ("alkyl halide", "halide", "chloride", "bromide", "iodide")),
    ("amide", ("amide",)),
    ("epoxide", ("epoxide", "oxirane")),
)
_MAX_SERIES_POINTS = 10_000
# largest integration grid (rate evaluations per curve) a request may use
_MAX_GRID_EVALUATIONS = 4_000_000


@lru_cache(maxsize=1)
def demo_scenarios() -> dict[str, dict[str, Any]]:
    """The invented demo scenarios by key (from ``service/demo_scenarios.json``)."""
    data = json.loads(DEMO_SCENARIOS_FILE.read_text(encoding="utf-8"))
    return data["scenarios"]


# --------------------------------------------------------------------------- request bodies


class ConstantIn(Strict):
    kind: Literal["constant"]
    value: float


class SeriesComponentIn(Strict):
    kind: Literal["series"]
    time: list[float] = Field(min_length=2, max_length=_MAX_SERIES_POINTS)
    time_unit: TimeUnit = "d"
    values: list[float] = Field(min_length=2, max_length=_MAX_SERIES_POINTS)
    extend: Literal["error", "hold"] = Field(
        default="error", description="outside the samples: refuse ('error') or keep the end values"
    )


class MonthlyMeansIn(Strict):
    kind: Literal["monthly_means"]
    values: list[float] = Field(min_length=12, max_length=12, description="January first")


class AnnualCycleIn(Strict):
    kind: Literal["annual_cycle"]
    mean: float
    amplitude: float = Field(ge=0, description="half the peak-to-peak swing")
    phase_day: float = Field(default=0.0, ge=0, lt=365, description="calendar day of the maximum")


class DailyCycleIn(Strict):
    kind: Literal["daily_cycle"]
    mean: float = Field(description="0 when added to another component that carries the mean")
    amplitude: float = Field(ge=0, description="half the peak-to-peak swing")
    phase_hour: float = Field(default=0.0, ge=0, lt=24, description="clock hour of the maximum")


Component = Annotated[
    Union[ConstantIn, SeriesComponentIn, MonthlyMeansIn, AnnualCycleIn, DailyCycleIn],
    Field(discriminator="kind"),
]
Signal = Union[float, list[Component]]


class ScenarioIn(Strict):
    """A water body over time. Each quantity is a number or a list of components that add."""

    name: str = Field(min_length=1, max_length=200)
    description: str = Field(default="", max_length=5000)
    invented: bool = False
    start_day_of_year: float = Field(default=0.0, ge=0, lt=365, description="0 = 1 January 00:00")
    temperature_C: Optional[Signal] = Field(default=None, description="water temperature [°C]")
    temperature_K: Optional[Signal] = Field(default=None, description="water temperature [K]")
    pH: Signal
    salinity: Optional[Signal] = Field(default=None, description="practical salinity")
    ionic_strength_M: Optional[Signal] = Field(default=None, description="[mol/L]")


class ScenarioOptions(Strict):
    scenario: Optional[ScenarioIn] = None
    demo_scenario: Optional[str] = Field(
        default=None, description="key of a shipped invented scenario (GET /v1/scenarios/demo)"
    )
    horizon_d: float = Field(default=365.0, gt=0, le=36_500, description="end of the output [d]")
    output_times_d: Optional[list[float]] = Field(
        default=None, max_length=_MAX_OUTPUT_TIMES,
        description="output times [d]; default 366 equally spaced times from 0 to the horizon",
    )
    report_times_d: list[float] = Field(
        default_factory=lambda: [30.0, 90.0, 365.0], max_length=100,
        description="times [d] listed in the summary (must lie within the horizon)",
    )
    n_draws: int = Field(default=1000, ge=0, le=20_000, description="0 = no bands, else >= 100")
    level: float = Field(default=0.95, gt=0, lt=1)
    seed: Optional[int] = Field(default=None, ge=0)
    fit_options: FitOptions = Field(default_factory=FitOptions)

    @model_validator(mode="after")
    def _one_scenario(self) -> "ScenarioOptions":
        if (self.scenario is None) == (self.demo_scenario is None):
            raise ValueError("give either scenario (a definition) or demo_scenario (a key)")
        if 0 < self.n_draws < 100:
            raise ValueError(f"n_draws must be 0 or at least 100, got {self.n_draws}")
        return self


class ScenarioCalculateRequest(ScenarioOptions):
    """A scenario for runs posted in the request (fitted, not stored)."""

    runs: list[RunData] = Field(min_length=1, max_length=5000)


class NormalisationRequest(Strict):
    dt50: float = Field(gt=0, description="half-life at temperature_C / temperature_K")
    time_unit: TimeUnit = "d"
    temperature_C: Optional[float] = None
    temperature_K: Optional[float] = None
    reference_temperature_C: Optional[float] = Field(default=None, description="default 12 °C")
    reference_temperature_K: Optional[float] = None
    method: Literal["fitted", "efsa_2008", "echa_r16"] = "efsa_2008"
    substance_id: Optional[int] = Field(default=None, ge=1, description="for method 'fitted'")
    pH: Optional[float] = Field(default=None, description="for method 'fitted'")
    level: float = Field(default=0.95, gt=0, lt=1)
    fit_options: FitOptions = Field(default_factory=FitOptions)


class PersistenceRequest(Strict):
    """A half-life to screen; or a stored substance whose half-life is predicted first."""

    dt50: Optional[float] = Field(default=None, gt=0, description="hydrolysis half-life")
    dt50_interval: Optional[list[float]] = Field(
        default=None, min_length=2, max_length=2, description="[low, high] in time_unit"
    )
    time_unit: TimeUnit = "d"
    temperature_C: Optional[float] = None
    temperature_K: Optional[float] = None
    water: Literal["fresh", "estuarine", "marine"] = "fresh"
    normalisation: Optional[Literal["fitted", "efsa_2008", "echa_r16"]] = Field(
        default=None, description="default 'fitted' with a substance, else 'echa_r16'"
    )
    substance_id: Optional[int] = Field(default=None, ge=1)
    pH: Optional[float] = None
    salinity: Optional[float] = Field(default=None, ge=0)
    ionic_strength_M: Optional[float] = Field(default=None, ge=0)
    level: float = Field(default=0.95, gt=0, lt=1)
    fit_options: FitOptions = Field(default_factory=FitOptions)


Claim = Literal["hydrolytically_stable", "rate_constants", "activation_energy", "ph_rate_profile"]


class StudyCheckRequest(Strict):
    claims: list[Claim] = Field(default_factory=lambda: ["hydrolytically_stable"], min_length=1)


class StudyRunIn(Strict):
    temperature_C: Optional[float] = None
    temperature_K: Optional[float] = None
    pH: float
    duration: float = Field(gt=0)
    time_unit: TimeUnit = "d"
    percent_loss: float = Field(ge=-20, le=100, description="loss at the end of the run [%]")
    label: str = Field(default="", max_length=200)


class StudyCheckCalculateRequest(StudyCheckRequest):
    runs: list[StudyRunIn] = Field(min_length=1, max_length=5000)


class HintsRequest(Strict):
    substance_class: Optional[Literal[
        "carboxylic_ester", "carbamate", "phosphate_ester", "alkyl_halide", "amide", "epoxide",
        "other",
    ]] = Field(default=None, description="default: the stored class if it names one, else 'other'")
    fit_options: FitOptions = Field(default_factory=FitOptions)


# --------------------------------------------------------------------------- helpers


def _one_temperature_K(c: Optional[float], k: Optional[float], what: str,
                       default_K: Optional[float] = None) -> float:
    if c is not None and k is not None:
        raise InputError(f"give {what} as _C or _K, not both")
    if c is not None:
        return float(units.validate_temperature_K(units.celsius_to_kelvin(c)))
    if k is not None:
        return float(units.validate_temperature_K(k))
    if default_K is None:
        raise InputError(f"give {what}_C or {what}_K")
    return default_K


def _scenario(body: ScenarioOptions) -> Scenario:
    if body.demo_scenario is not None:
        demos = demo_scenarios()
        if body.demo_scenario not in demos:
            raise NotFound(
                f"no demo scenario {body.demo_scenario!r}; available: {', '.join(sorted(demos))}"
            )
        return scenario_from_dict(demos[body.demo_scenario])
    return scenario_from_dict(body.scenario.model_dump(exclude_none=True))


def _floats(values: Any) -> list[Optional[float]]:
    arr = np.asarray(values, dtype=float).ravel()
    return [float(v) if math.isfinite(v) else None for v in arr]


def _opt_d(value_s: Optional[float]) -> Optional[float]:
    return None if value_s is None else float(value_s) / DAY_S


def _estimate_evaluations(scenario: Scenario, horizon_s: float) -> int:
    """Rate-constant evaluations of the first integration grid (see kinetics.scenarios)."""
    end = horizon_s
    repeat = scenario.repeat_period_s()
    const_after = scenario.constant_after_s()
    if repeat is not None:
        end = max(end, repeat)
    elif const_after is not None:
        end = max(end, const_after)
    step = end / 256.0
    period = scenario.shortest_period_s()
    if period is not None:
        step = min(step, period / 8.0)  # the default points_per_period of run_scenario
    return 5 * int(math.ceil(end / step)) + 1


def _run(surface: SurfaceFit, body: ScenarioOptions, max_evaluations: int) -> tuple[Scenario, ScenarioResult]:
    scenario = _scenario(body)
    horizon_s = body.horizon_d * DAY_S
    report = [t for t in body.report_times_d]
    bad = [t for t in report if not 0 <= t <= body.horizon_d]
    if bad:
        raise InputError(
            f"report time {bad[0]!r} d lies outside 0 to horizon_d ({body.horizon_d!r} d)"
        )
    if body.output_times_d is not None:
        out = sorted(set(body.output_times_d) | set(report))
    else:
        out = sorted(set(np.linspace(0.0, body.horizon_d, 366).tolist()) | set(report))
    n_eval = _estimate_evaluations(scenario, horizon_s)
    if n_eval > _MAX_GRID_EVALUATIONS:
        raise TooLarge(
            f"the scenario needs about {n_eval} rate evaluations per curve (a daily cycle over "
            f"{body.horizon_d:g} days); at most {_MAX_GRID_EVALUATIONS} are accepted: shorten "
            "horizon_d"
        )
    if body.n_draws and n_eval * body.n_draws > max_evaluations:
        raise TooLarge(
            f"{body.n_draws} draws x about {n_eval} rate evaluations exceed the limit of "
            f"{max_evaluations} per request; lower n_draws or horizon_d"
        )
    result = run_scenario(
        surface, scenario, horizon_s=horizon_s,
        output_time_s=np.asarray(out, dtype=float) * DAY_S,
        n_draws=body.n_draws, level=body.level, seed=body.seed,
        max_points=min(max(8 * n_eval, 200_000), _MAX_GRID_EVALUATIONS),
    )
    return scenario, result


def _model_summary(surface: SurfaceFit) -> dict[str, Any]:
    return {
        "pathways": list(surface.pathways),
        "temperature_model": surface.temperature_model,
        "temperature_range_K": _floats(surface.temperature_range_K),
        "pH_range": _floats(surface.pH_range),
        "ea_from_prior": list(surface.ea_from_prior),
        "uncharacterised_pathways": list(surface.uncharacterised_pathways),
        "n_measurements": int(surface.n_measurements),
    }


def _scenario_payload(scenario: Scenario, res: ScenarioResult, report_times_d: list[float],
                      extra: dict[str, Any]) -> dict[str, Any]:
    t_d = res.time_s / DAY_S
    temperature_C = units.kelvin_to_celsius(res.temperature_K)
    summary = []
    for t in sorted(set(report_times_d)):
        i = int(np.argmin(np.abs(t_d - t)))
        summary.append({
            "time_d": float(t),
            "fraction_remaining": float(res.fraction_remaining[i]),
            "fraction_ci_low": None if res.fraction_ci_low is None else float(res.fraction_ci_low[i]),
            "fraction_ci_high": None if res.fraction_ci_high is None else float(res.fraction_ci_high[i]),
            "fraction_pi_low": None if res.fraction_pi_low is None else float(res.fraction_pi_low[i]),
            "fraction_pi_high": None if res.fraction_pi_high is None else float(res.fraction_pi_high[i]),
            "temperature_C": float(temperature_C[i]),
            "pH": float(res.pH[i]),
        })
    return {
        "caution": res.caution,
        **extra,
        "scenario": {
            "name": scenario.name,
            "description": scenario.description,
            "definition": scenario_to_dict(scenario),
        },
        "level": res.level,
        "n_draws": res.n_draws,
        "seed": res.seed,
        "draw_distribution": res.draw_distribution,
        "summary": summary,
        "dt50_s": res.dt50_s,
        "dt50_d": _opt_d(res.dt50_s),
        "dt50_ci_low_d": _opt_d(res.dt50_ci_low_s),
        "dt50_ci_high_d": _opt_d(res.dt50_ci_high_s),
        "dt90_s": res.dt90_s,
        "dt90_d": _opt_d(res.dt90_s),
        "dt90_ci_low_d": _opt_d(res.dt90_ci_low_s),
        "dt90_ci_high_d": _opt_d(res.dt90_ci_high_s),
        "effective_k_per_s": res.effective_k_per_s,
        "effective_k_ci_low_per_s": res.effective_k_ci_low_per_s,
        "effective_k_ci_high_per_s": res.effective_k_ci_high_per_s,
        "effective_dt50_d": res.effective_dt50_s / DAY_S,
        "horizon_d": res.horizon_s / DAY_S,
        "flags": res.flags,
        "fraction_of_time_outside_range": res.fraction_of_time_outside_range,
        "notes": list(res.notes),
        "integration": {
            "rule": res.integration_rule,
            "points": res.integration_points,
            "error_estimate": res.integration_rel_error if math.isfinite(res.integration_rel_error) else None,
        },
        "series": {
            "time_s": _floats(res.time_s),
            "time_d": _floats(t_d),
            "temperature_K": _floats(res.temperature_K),
            "pH": _floats(res.pH),
            "salinity": _floats(res.salinity),
            "ionic_strength_M": _floats(res.ionic_strength_M),
            "k_per_s": _floats(res.k_per_s),
            "fraction_remaining": _floats(res.fraction_remaining),
            "fraction_ci_low": None if res.fraction_ci_low is None else _floats(res.fraction_ci_low),
            "fraction_ci_high": None if res.fraction_ci_high is None else _floats(res.fraction_ci_high),
            "fraction_pi_low": None if res.fraction_pi_low is None else _floats(res.fraction_pi_low),
            "fraction_pi_high": None if res.fraction_pi_high is None else _floats(res.fraction_pi_high),
        },
    }


def _fit_posted_runs(request: Request, runs: list[RunData], options: FitOptions) -> SurfaceFit:
    settings = request.app.state.settings
    check_posted_runs(runs, max_runs=settings.max_runs_per_batch,
                      max_points=settings.max_points_per_series)
    fit = compute_fit([run_input_from_payload(r, i) for i, r in enumerate(runs)],
                      **options.kinetics_kwargs())
    # the same JSON round trip as a stored fit, so both paths give identical numbers
    return stored_surface(fit.surface)


def _study_payload(check: StudyCheck, extra: dict[str, Any]) -> dict[str, Any]:
    return {
        "caution": check.caution,
        **extra,
        "guideline": dict(check.guideline),
        "stable_conclusion_supported": check.stable_conclusion_supported,
        "has": list(check.has),
        "missing": list(check.missing),
        "preliminary": [
            {"pH": p.pH, "status": p.status, "evidence": list(p.evidence)} for p in check.preliminary
        ],
        "unstable_pH": list(check.unstable_pH),
        "temperatures_by_pH": [
            {"pH": ph, "temperatures_C": units.kelvin_to_celsius(ts).tolist()}
            for ph, ts in check.temperatures_by_pH.items()
        ],
        "claims": [
            {"claim": a.claim, "supported": a.supported, "reasons": list(a.reasons),
             "missing": list(a.missing)}
            for a in check.claims.values()
        ],
    }


# --------------------------------------------------------------------------- routes


@router.get("/scenarios/demo", summary="List the invented demo scenarios")
def list_demo_scenarios(
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict[str, Any]:
    """The invented water bodies shipped with the service, with their definitions (usable as
    ``demo_scenario`` by key or copied into ``scenario``)."""
    return {
        "note": "Invented demo scenarios: they describe no real water body.",
        "scenarios": [
            {"key": key, "name": d["name"], "description": d.get("description", ""),
             "definition": d}
            for key, d in sorted(demo_scenarios().items())
        ],
    }


@router.post("/substances/{substance_id}/scenarios",
             summary="Fraction remaining in a time-varying water body (stored substance)")
def substance_scenario(
    substance_id: int,
    request: Request,
    body: Annotated[ScenarioOptions, openapi_examples("scenario_substance")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict[str, Any]:
    """C(t)/C0 = exp(-∫k dt) for the substance's fitted surface, with DT50, DT90, the
    time-weighted effective rate constant and Monte Carlo bands from correlated parameter
    draws (``fraction_ci_*``: parameter uncertainty; ``fraction_pi_*``: also the scatter
    of a new run)."""
    stored = load_model(request.app.state.session_factory, substance_id=substance_id,
                        options=body.fit_options)
    surface = stored.result.surface
    scenario, res = _run(surface, body, request.app.state.settings.max_montecarlo_evaluations)
    extra = {"model": {**stored.meta(), **_model_summary(surface)}}
    return _scenario_payload(scenario, res, body.report_times_d, extra)


@router.post("/scenarios/calculate",
             summary="Fraction remaining in a time-varying water body (posted runs)")
def calculate_scenario(
    request: Request,
    body: Annotated[ScenarioCalculateRequest, openapi_examples("scenario_calculate")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict[str, Any]:
    """As for a stored substance, for runs fitted from the request. Nothing is stored."""
    surface = _fit_posted_runs(request, body.runs, body.fit_options)
    scenario, res = _run(surface, body, request.app.state.settings.max_montecarlo_evaluations)
    return _scenario_payload(scenario, res, body.report_times_d, {"model": _model_summary(surface)})


@router.post("/normalisation", summary="Carry a DT50 to a reference temperature")
def normalisation(
    request: Request,
    body: Annotated[NormalisationRequest, openapi_examples("normalisation")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict[str, Any]:
    """Methods: ``efsa_2008`` (Arrhenius, Ea 65.4 kJ/mol), ``echa_r16`` (factor 0.08 per K)
    or ``fitted`` (the stored substance's surface at ``pH``, with an interval)."""
    t1 = _one_temperature_K(body.temperature_C, body.temperature_K, "temperature")
    t2 = _one_temperature_K(body.reference_temperature_C, body.reference_temperature_K,
                            "reference_temperature", default_K=285.15)
    surface = None
    extra: dict[str, Any] = {}
    if body.method == "fitted":
        if body.substance_id is None:
            raise InputError("method 'fitted' needs substance_id (a stored substance)")
        stored = load_model(request.app.state.session_factory, substance_id=body.substance_id,
                            options=body.fit_options)
        surface = stored.result.surface
        extra["model"] = {**stored.meta(), **_model_summary(surface)}
    dt50_s = float(units.time_to_s(body.dt50, body.time_unit))
    res = normalise_dt50(dt50_s, t1, t2, method=body.method, surface=surface, pH=body.pH)
    interval = None
    if res.se_ln_factor is not None:
        iv = res.interval(body.level)
        interval = {"level": iv.level, "dt50_low_d": iv.dt50_low_s / DAY_S,
                    "dt50_high_d": iv.dt50_high_s / DAY_S}
    return {
        "caution": res.caution,
        **extra,
        "method": res.method,
        "method_description": res.method_description,
        "source": res.source,
        "dt50_d": res.dt50_s / DAY_S,
        "temperature_K": res.temperature_K,
        "reference_temperature_K": res.reference_temperature_K,
        "dt50_reference_d": res.dt50_reference_s / DAY_S,
        "dt50_reference_s": res.dt50_reference_s,
        "factor": res.factor,
        "apparent_Ea_J_per_mol": res.apparent_Ea_J_per_mol,
        "pH": res.pH,
        "interval": interval,
        "notes": list(res.notes),
    }


@router.post("/screening/persistence",
             summary="Screen a hydrolysis half-life against water persistence criteria")
def persistence(
    request: Request,
    body: Annotated[PersistenceRequest, openapi_examples("persistence_screening")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict[str, Any]:
    """REACH Annex XIII (P, vP; compared at 12 °C) and Stockholm Convention Annex D 1(b)(i).
    Give ``dt50`` (with ``time_unit``) at ``temperature_C``/``temperature_K``, or a stored
    ``substance_id`` with ``pH`` to predict the half-life at that temperature first.
    Hydrolysis is only one loss process: this is not a persistence assessment."""
    t = _one_temperature_K(body.temperature_C, body.temperature_K, "temperature")
    surface = None
    extra: dict[str, Any] = {}
    interval_s = None
    if body.substance_id is not None:
        stored = load_model(request.app.state.session_factory, substance_id=body.substance_id,
                            options=body.fit_options)
        surface = stored.result.surface
        extra["model"] = {**stored.meta(), **_model_summary(surface)}
    if body.dt50 is not None:
        dt50_s = float(units.time_to_s(body.dt50, body.time_unit))
        if body.dt50_interval is not None:
            interval_s = tuple(float(v) for v in units.time_to_s(body.dt50_interval, body.time_unit))
        source = "given"
    else:
        if surface is None:
            raise InputError("give dt50, or substance_id and pH to predict it")
        if body.pH is None:
            raise InputError("predicting the half-life of a stored substance needs pH")
        pred = predict(surface, t, body.pH, ionic_strength_M=body.ionic_strength_M or 0.0,
                       salinity=body.salinity or 0.0, level=body.level)
        dt50_s = float(np.ravel(pred.dt50_s)[0])
        interval_s = (float(np.ravel(pred.dt50_ci_low_s)[0]), float(np.ravel(pred.dt50_ci_high_s)[0]))
        source = "predicted from the stored substance's fitted surface (delta-method interval)"
    method = body.normalisation or ("fitted" if surface is not None else "echa_r16")
    res = screen_persistence(dt50_s, t, water=body.water, normalisation=method, surface=surface,
                             pH=body.pH, dt50_interval_s=interval_s)
    return {
        "caution": res.caution,
        **extra,
        "dt50_d": res.dt50_s / DAY_S,
        "dt50_source": source,
        "dt50_interval_d": None if interval_s is None else [v / DAY_S for v in interval_s],
        "temperature_K": res.temperature_K,
        "water": res.water,
        "normalisation": [
            {"method": n.method, "method_description": n.method_description, "source": n.source,
             "reference_temperature_K": n.reference_temperature_K, "factor": n.factor,
             "dt50_reference_d": n.dt50_reference_s / DAY_S}
            for n in res.normalisations
        ],
        "criteria": [
            {"key": o.criterion.key, "framework": o.criterion.framework,
             "provision": o.criterion.provision, "category": o.criterion.category,
             "threshold_d": o.criterion.threshold_d, "source": o.criterion.source,
             "compared_at_temperature_K": o.compared_at_temperature_K,
             "half_life_compared_d": o.half_life_compared_d,
             "half_life_low_d": o.half_life_low_d, "half_life_high_d": o.half_life_high_d,
             "exceeds_threshold": o.exceeds_threshold, "outcome": o.outcome,
             "meaning": o.meaning}
            for o in res.outcomes
        ],
        "summary": res.summary,
        "notes": list(res.notes),
    }


def _stored_study_runs(session: Any, study_id: int) -> tuple[list[StudyRun], list[str]]:
    crud.get_study(session, study_id=study_id)
    rows, _ = crud.list_runs(session, limit=100_000, offset=0, study_id=study_id, status="current")
    runs: list[StudyRun] = []
    notes: list[str] = []
    for r in rows:
        label = f"run {r.run_uid} v{r.version}"
        if r.kind != "series":
            notes.append(
                f"{label} ({r.temperature_K - 273.15:.1f} °C, pH {r.pH:g}) reports a rate "
                "constant only: its duration and loss are unknown, so it is not used here"
            )
            continue
        obs = sorted(r.observations, key=lambda o: o.position)
        if len(obs) < 2 or obs[0].concentration <= 0:
            notes.append(f"{label}: fewer than two points or a zero first value; not used")
            continue
        loss = 100.0 * (1.0 - obs[-1].concentration / obs[0].concentration)
        loss = min(max(loss, -20.0), 100.0)
        runs.append(StudyRun(
            temperature_K=r.temperature_K, pH=r.pH,
            duration_s=obs[-1].time_s - obs[0].time_s, percent_loss=loss, label=label,
        ))
    if rows and not runs:
        notes.append("no run of this study has a concentration-time series to check")
    return runs, notes


@router.post("/studies/{study_id}/check",
             summary="Check a stored study against the tiered design of OECD TG 111")
def stored_study_check(
    study_id: int,
    session: ReadSession,
    body: Annotated[StudyCheckRequest, openapi_examples("study_check_stored")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict[str, Any]:
    """Loss = first minus last measured concentration of each current series run (in % of
    the first), duration = last minus first sampling time. Runs that report only a rate
    constant are listed in ``notes`` and not used."""
    runs, notes = _stored_study_runs(session, study_id)
    if not runs:
        raise InputError(
            f"study {study_id} has no concentration-time series runs to check"
            + (f" ({'; '.join(notes)})" if notes else "")
        )
    check = check_study(runs, claims=body.claims)
    return _study_payload(check, {"study_id": study_id, "notes": notes})


@router.post("/screening/study-check",
             summary="Check posted runs against the tiered design of OECD TG 111")
def study_check(
    body: Annotated[StudyCheckCalculateRequest, openapi_examples("study_check")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict[str, Any]:
    """Each run: temperature, pH, duration and percent loss at its end."""
    runs = []
    for i, r in enumerate(body.runs):
        t = _one_temperature_K(r.temperature_C, r.temperature_K, f"runs[{i}] temperature")
        runs.append(StudyRun(
            temperature_K=t, pH=r.pH, duration_s=float(units.time_to_s(r.duration, r.time_unit)),
            percent_loss=r.percent_loss, label=r.label or f"runs[{i}]",
        ))
    check = check_study(runs, claims=body.claims)
    return _study_payload(check, {"notes": []})


@router.post("/substances/{substance_id}/hints",
             summary="Compare the fitted activation energies with typical ranges for a class")
def substance_hints(
    substance_id: int,
    request: Request,
    session: ReadSession,
    body: Annotated[HintsRequest, openapi_examples("hints_substance")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict[str, Any]:
    """Class ranges are approximate and from memory (each hint says so); the 30-150 kJ/mol
    plausibility bounds are a project choice. Hints never change a fit."""
    substance = crud.get_substance(session, substance_id=substance_id)
    notes: list[str] = []
    cls = body.substance_class
    if cls is None:
        stored_cls = (substance.substance_class or "").strip().lower()
        cls = "other"
        for key, words in _CLASS_WORDS:
            if any(w in stored_cls for w in words):
                cls = key
                break
        notes.append(
            f"substance class taken from the stored class {substance.substance_class!r} as "
            f"{cls!r}" if substance.substance_class else "no substance class given or stored: 'other'"
        )
    session.rollback()
    stored = load_model(request.app.state.session_factory, substance_id=substance_id,
                        options=body.fit_options)
    rep = class_hints(stored.result.surface, substance_class=cls)
    return {
        "caution": rep.caution,
        "model": {**stored.meta(), **_model_summary(stored.result.surface)},
        "substance_class": rep.substance_class,
        "implausible": rep.implausible,
        "ea_J_per_mol": rep.ea_J_per_mol,
        "hints": [
            {"level": h.level, "pathway": h.pathway, "message": h.message,
             "range_J_per_mol": None if h.range_J_per_mol is None else list(h.range_J_per_mol),
             "source": h.source}
            for h in rep.hints
        ],
        "notes": notes,
    }

