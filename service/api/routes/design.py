"""Study-design advice: which temperatures, pH values and sampling times to use.

Stateless: the prior guess of the kinetics comes in the request, or from the fitted
surface of a stored (related) substance. Nothing is stored. The numbers come from
:func:`kinetics.design.recommend_design`.
"""

from __future__ import annotations

from typing import Annotated, Literal, Optional

from fastapi import APIRouter, Depends, Request
from pydantic import Field, model_validator

from kinetics import design as kdesign
from kinetics import units
from service.api.examples import openapi_examples
from service.deps import Principal, require_scope
from service.modelstore import load_model
from service.schemas import FitOptions, Strict

router = APIRouter(prefix="/design", tags=["design"])

PathwayName = Literal["acid", "neutral", "base"]
TimeUnit = Literal["s", "min", "h", "d"]


class PathwayGuessIn(Strict):
    """A rough guess of one pathway (before any study)."""

    pathway: PathwayName
    ln_k_ref: float = Field(
        ge=-150, le=60,
        description="ln of kA or kB [L/(mol s)] or kN [1/s] at the reference temperature",
    )
    Ea_J_per_mol: float = Field(ge=1_000, le=400_000,
                                description="guessed activation energy [J/mol]")
    ln_k_ref_sd: float = Field(default=1.0, ge=0, le=20, description="uncertainty of ln_k_ref [-]")
    Ea_sd_J_per_mol: float = Field(default=15_000.0, ge=0, le=200_000,
                                   description="uncertainty of Ea [J/mol]")


class PriorIn(Strict):
    """The prior guess of the rate surface (Arrhenius per pathway)."""

    pathways: list[PathwayGuessIn] = Field(min_length=1, max_length=3)
    reference_temperature_K: float = Field(default=298.15, ge=273.15, le=373.15)
    between_run_sd_ln_k: float = Field(default=0.1, ge=0, le=5,
                                       description="expected scatter of ln k between runs [-]")
    ea_prior_mean_J_per_mol: Optional[float] = Field(default=None, gt=0, lt=400_000)
    ea_prior_sd_J_per_mol: Optional[float] = Field(default=None, gt=0, lt=400_000)
    label: str = Field(default="", max_length=300)

    @model_validator(mode="after")
    def _prior_pair(self) -> "PriorIn":
        if (self.ea_prior_mean_J_per_mol is None) != (self.ea_prior_sd_J_per_mol is None):
            raise ValueError(
                "give both ea_prior_mean_J_per_mol and ea_prior_sd_J_per_mol, or neither"
            )
        return self

    def to_kinetics(self) -> kdesign.KineticsPrior:
        ea = None
        if self.ea_prior_mean_J_per_mol is not None:
            ea = (self.ea_prior_mean_J_per_mol, self.ea_prior_sd_J_per_mol)
        return kdesign.KineticsPrior(
            pathways=tuple(kdesign.PathwayGuess(**p.model_dump()) for p in self.pathways),
            reference_temperature_K=self.reference_temperature_K,
            between_run_sd_ln_k=self.between_run_sd_ln_k,
            ea_prior_J_per_mol=ea,
            label=self.label,
        )


class StoredPriorIn(Strict):
    """Use the fitted surface of a stored substance (the same or a related one) as prior."""

    substance_id: int = Field(ge=1)
    fit_options: FitOptions = Field(default_factory=FitOptions)
    extra_sd_ln_k: float = Field(
        default=1.0, ge=0, le=20,
        description="added in quadrature to the fit's standard errors of ln_k_ref "
        "(a related substance may differ); 0 for the same substance",
    )
    extra_sd_Ea_J_per_mol: float = Field(default=10_000.0, ge=0, le=200_000)
    between_run_sd_ln_k: Optional[float] = Field(
        default=None, ge=0, le=5, description="default: the fit's between-run scatter"
    )


class FieldConditionIn(Strict):
    """A water body condition where the DT50 must be known (give temperature_K or _C)."""

    temperature_K: Optional[float] = None
    temperature_C: Optional[float] = None
    pH: float = Field(ge=0, le=14)
    salinity: float = Field(default=0.0, ge=0, le=50)
    ionic_strength_M: float = Field(default=0.0, ge=0, le=1)
    label: str = Field(default="", max_length=300)

    @model_validator(mode="after")
    def _one_temperature(self) -> "FieldConditionIn":
        if (self.temperature_K is None) == (self.temperature_C is None):
            raise ValueError("give exactly one of temperature_K and temperature_C")
        return self

    def to_kinetics(self) -> kdesign.FieldCondition:
        t = self.temperature_K
        if t is None:
            t = float(units.celsius_to_kelvin(self.temperature_C))
        return kdesign.FieldCondition(
            temperature_K=t, pH=self.pH, salinity=self.salinity,
            ionic_strength_M=self.ionic_strength_M, label=self.label,
        )


class LabIn(Strict):
    """What the laboratory can do (give allowed_temperatures_K or allowed_temperatures_C)."""

    allowed_temperatures_K: Optional[list[float]] = Field(default=None, min_length=1,
                                                          max_length=10)
    allowed_temperatures_C: Optional[list[float]] = Field(default=None, min_length=1,
                                                          max_length=10)
    allowed_pH: list[float] = Field(min_length=1, max_length=8)
    max_duration: float = Field(gt=0, description="longest incubation, in time_unit")
    min_sampling_interval: float = Field(
        default=10.0 / 1440.0, ge=0, description="shortest time between samples, in time_unit"
    )
    time_unit: TimeUnit = "d"
    n_vessels: int = Field(ge=2, le=60, description="vessels = runs, one temperature and pH each")
    samples_per_vessel: int = Field(ge=3, le=30)
    analytical_error_percent: float = Field(gt=0, lt=50)
    error_model: Literal["proportional", "constant"] = "proportional"
    loq_percent: float = Field(default=2.0, ge=0, lt=50,
                               description="LOQ in % of the initial value")
    buffer_ionic_strength_M: float = Field(default=0.0, ge=0, le=1)

    @model_validator(mode="after")
    def _one_temperature_list(self) -> "LabIn":
        if (self.allowed_temperatures_K is None) == (self.allowed_temperatures_C is None):
            raise ValueError(
                "give exactly one of allowed_temperatures_K and allowed_temperatures_C"
            )
        return self

    def to_kinetics(self) -> kdesign.LabConstraints:
        temps = self.allowed_temperatures_K
        if temps is None:
            temps = [float(units.celsius_to_kelvin(t)) for t in self.allowed_temperatures_C]
        return kdesign.LabConstraints(
            allowed_temperatures_K=tuple(temps),
            allowed_pH=tuple(self.allowed_pH),
            max_duration_s=float(units.time_to_s(self.max_duration, self.time_unit)),
            n_vessels=self.n_vessels,
            samples_per_vessel=self.samples_per_vessel,
            analytical_error_percent=self.analytical_error_percent,
            error_model=self.error_model,
            loq_percent=self.loq_percent,
            min_sampling_interval_s=float(
                units.time_to_s(self.min_sampling_interval, self.time_unit)
            ),
            buffer_ionic_strength_M=self.buffer_ionic_strength_M,
        )


class DesignRequest(Strict):
    """Prior (inline or from a stored substance), field conditions, target and lab."""

    prior: Optional[PriorIn] = None
    prior_from_substance: Optional[StoredPriorIn] = None
    field_conditions: list[FieldConditionIn] = Field(min_length=1, max_length=20)
    target_width_ratio: float = Field(
        default=1.5, gt=1, le=1000,
        description="wanted ratio upper/lower of the DT50 interval at `level`",
    )
    level: float = Field(default=0.95, gt=0, lt=1)
    lab: LabIn
    criterion: Literal["local", "prior_median"] = "local"
    n_prior_draws: int = Field(default=32, ge=2, le=64)
    ea_prior_allowed: Literal["if_needed", "always", "never"] = "if_needed"

    @model_validator(mode="after")
    def _one_prior(self) -> "DesignRequest":
        if (self.prior is None) == (self.prior_from_substance is None):
            raise ValueError("give exactly one of prior and prior_from_substance")
        return self


class RunPlanIn(Strict):
    """One planned design point of the laboratory's own design (temperature_K or _C)."""

    temperature_K: Optional[float] = None
    temperature_C: Optional[float] = None
    pH: float = Field(ge=0, le=14)
    n_vessels: int = Field(ge=1, le=60)
    sampling_times: list[float] = Field(min_length=3, max_length=30,
                                        description="sampling times of each vessel, in time_unit")

    @model_validator(mode="after")
    def _one_temperature(self) -> "RunPlanIn":
        if (self.temperature_K is None) == (self.temperature_C is None):
            raise ValueError("give exactly one of temperature_K and temperature_C")
        if any(t < 0 for t in self.sampling_times):
            raise ValueError("sampling times must be >= 0")
        return self

    def temperature(self) -> float:
        if self.temperature_K is not None:
            return self.temperature_K
        return float(units.celsius_to_kelvin(self.temperature_C))


class EvaluateRequest(Strict):
    """A laboratory's own design, to see what precision it would give."""

    prior: Optional[PriorIn] = None
    prior_from_substance: Optional[StoredPriorIn] = None
    field_conditions: list[FieldConditionIn] = Field(min_length=1, max_length=20)
    runs: list[RunPlanIn] = Field(min_length=1, max_length=60)
    time_unit: TimeUnit = "d"
    analytical_error_percent: float = Field(gt=0, lt=50)
    error_model: Literal["proportional", "constant"] = "proportional"
    loq_percent: float = Field(default=2.0, ge=0, lt=50)
    buffer_ionic_strength_M: float = Field(default=0.0, ge=0, le=1)
    level: float = Field(default=0.95, gt=0, lt=1)

    @model_validator(mode="after")
    def _one_prior(self) -> "EvaluateRequest":
        if (self.prior is None) == (self.prior_from_substance is None):
            raise ValueError("give exactly one of prior and prior_from_substance")
        if sum(r.n_vessels for r in self.runs) > 60:
            raise ValueError("at most 60 vessels in all can be evaluated")
        return self


def _resolve_prior(request: Request, prior: Optional[PriorIn],
                   stored_ref: Optional[StoredPriorIn]) -> tuple[kdesign.KineticsPrior, dict]:
    if prior is not None:
        return prior.to_kinetics(), {"kind": "request"}
    stored = load_model(request.app.state.session_factory, substance_id=stored_ref.substance_id,
                        options=stored_ref.fit_options)
    out = kdesign.KineticsPrior.from_surface_fit(
        stored.result.surface,
        extra_sd_ln_k=stored_ref.extra_sd_ln_k,
        extra_sd_Ea_J_per_mol=stored_ref.extra_sd_Ea_J_per_mol,
        between_run_sd_ln_k=stored_ref.between_run_sd_ln_k,
        label=stored.substance_name,
    )
    source = {"kind": "stored_substance", "substance_id": stored_ref.substance_id,
              "substance_name": stored.substance_name, "data_version": stored.data_version}
    return out, source


@router.post(
    "",
    summary="Recommend a hydrolysis study design for a target DT50 precision",
)
def recommend(
    request: Request,
    body: Annotated[DesignRequest, openapi_examples("design_request")],
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict:
    """Which temperatures, pH values, vessels and sampling times give the DT50 at the field
    condition(s) a 95 % interval no wider than the target ratio, from the Fisher information
    of the two-stage fit (series, then rate surface). Answers 422 with an explanation when
    the constraints cannot identify the pathways of the prior, 404 for an unknown
    substance. Nothing is stored."""
    prior, source = _resolve_prior(request, body.prior, body.prior_from_substance)
    rec = kdesign.recommend_design(
        prior,
        [f.to_kinetics() for f in body.field_conditions],
        body.lab.to_kinetics(),
        target_width_ratio=body.target_width_ratio,
        level=body.level,
        criterion=body.criterion,
        n_prior_draws=body.n_prior_draws,
        ea_prior_allowed=body.ea_prior_allowed,
    )
    return {"prior": prior.to_dict(), "prior_source": source, **rec.to_dict()}


@router.post(
    "/evaluate",
    summary="Expected DT50 precision of a laboratory's own study design",
)
def evaluate(
    request: Request,
    body: EvaluateRequest,
    _p: Annotated[Principal, Depends(require_scope("read"))],
) -> dict:
    """The Fisher-information precision of a given design at the field condition(s): the
    expected interval width ratio, the degrees of freedom of the surface fit, which
    pathways take their activation energy from the prior, which pathways the design
    leaves poorly determined (`weak_pathways`), and which runs dominate the variance.
    `identifiable` is false, with `problem` saying why, when the surface fit could not
    use the design at all. Nothing is stored."""
    prior, source = _resolve_prior(request, body.prior, body.prior_from_substance)
    runs = [
        kdesign.DesignRun(
            temperature_K=r.temperature(), pH=r.pH, n_vessels=r.n_vessels,
            sampling_times_s=tuple(float(x) for x in units.time_to_s(r.sampling_times,
                                                                      body.time_unit)),
        )
        for r in body.runs
    ]
    longest = max(max(r.sampling_times_s) for r in runs)
    lab = kdesign.LabConstraints(
        allowed_temperatures_K=tuple(r.temperature_K for r in runs),
        allowed_pH=tuple(r.pH for r in runs),
        max_duration_s=longest if longest > 0 else 1.0,
        n_vessels=sum(r.n_vessels for r in runs),
        samples_per_vessel=min(len(r.sampling_times_s) for r in runs),
        analytical_error_percent=body.analytical_error_percent,
        error_model=body.error_model,
        loq_percent=body.loq_percent,
        min_sampling_interval_s=0.0,
        buffer_ionic_strength_M=body.buffer_ionic_strength_M,
    )
    ev = kdesign.evaluate_design(runs, prior, [f.to_kinetics() for f in body.field_conditions],
                                 lab, level=body.level)
    return {"prior": prior.to_dict(), "prior_source": source, **ev.to_dict()}
