"""Request and response bodies (pydantic): a ``...Create`` and a ``...Public`` per resource.

Field names carry their units (``temperature_K``, ``k_per_s``, ``dt50_s``). Input units are
accepted as the laboratory sends them (``time_unit="d"``, ``concentration_unit="mg/L"``)
and converted once, through :mod:`kinetics.units`, to SI / canonical units. NaN and
Infinity are rejected everywhere (``allow_inf_nan=False``) and unknown fields are refused,
so a mistyped field name is a 422, not a silently ignored value.
"""

from __future__ import annotations

import datetime as dt
import re
from typing import Annotated, Any, Generic, Literal, Optional, TypeVar

from typing_extensions import NotRequired, TypedDict

import numpy as np
from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    PrivateAttr,
    field_validator,
    model_validator,
)

from kinetics import units

__all__ = [
    "Strict",
    "Page",
    "SubstanceCreate",
    "SubstancePublic",
    "StudyCreate",
    "StudyPublic",
    "SeriesIn",
    "RateIn",
    "RunData",
    "RunCreate",
    "RunSupersede",
    "RunWithdraw",
    "SeriesPublic",
    "RunPublic",
    "RunBatchCreate",
    "RunBatchPublic",
    "validate_cas_rn",
    "run_public",
]

T = TypeVar("T")

_CAS_PATTERN = re.compile(r"^(\d{2,7})-(\d{2})-(\d)$")


class Strict(BaseModel):
    """Base of every request body: finite numbers only, no unknown fields, no NUL in text."""

    model_config = ConfigDict(allow_inf_nan=False, extra="forbid")

    @model_validator(mode="before")
    @classmethod
    def _no_nul(cls, data: Any) -> Any:
        if isinstance(data, dict):
            for key, v in data.items():
                if isinstance(v, str) and "\x00" in v:
                    raise ValueError(f"{key}: text must not contain NUL characters (\\u0000)")
        return data


class Public(BaseModel):
    """Base of every response body."""

    model_config = ConfigDict(from_attributes=True, allow_inf_nan=False)


class Page(Public, Generic[T]):
    """One page of a list: ``items`` plus the ``total`` matching and the window asked for."""

    items: list[T]
    total: int
    limit: int
    offset: int


def validate_cas_rn(value: str) -> str:
    """Check the format and check digit of a CAS Registry Number.

    The check digit is the sum of the other digits, each multiplied by its position
    counted from the right (starting at 1), modulo 10 (CAS Registry Number check digit
    rule, published by Chemical Abstracts Service).

    Raises
    ------
    ValueError
        If the format is not ``NNNNNNN-NN-N`` or the check digit does not match.
    """
    text = value.strip()
    match = _CAS_PATTERN.match(text)
    if not match:
        raise ValueError(
            f"CAS RN {value!r} is not of the form 2-7 digits, 2 digits, 1 check digit "
            "separated by hyphens (e.g. 7732-18-5)"
        )
    digits = (match.group(1) + match.group(2))[::-1]
    check = sum((i + 1) * int(d) for i, d in enumerate(digits)) % 10
    if check != int(match.group(3)):
        raise ValueError(
            f"CAS RN {value!r} fails its check digit: expected {check}, got {match.group(3)}"
        )
    return text


# --------------------------------------------------------------------------- substances
class SubstanceCreate(Strict):
    name: str = Field(min_length=1, max_length=200, examples=["Veltrazine (invented)"])
    cas_rn: Optional[str] = Field(default=None, description="CAS Registry Number, check digit verified")
    smiles: Optional[str] = Field(default=None, max_length=2000)
    substance_class: Optional[str] = Field(default=None, max_length=200)
    notes: Optional[str] = Field(default=None, max_length=20_000)

    @field_validator("name")
    @classmethod
    def _name_not_blank(cls, v: str) -> str:
        if not v.strip():
            raise ValueError("substance name must not be blank")
        return v.strip()

    @field_validator("cas_rn")
    @classmethod
    def _cas(cls, v: Optional[str]) -> Optional[str]:
        return None if v is None else validate_cas_rn(v)


class SubstancePublic(Public):
    id: int
    name: str
    cas_rn: Optional[str]
    smiles: Optional[str]
    substance_class: Optional[str]
    notes: Optional[str]
    created_at: dt.datetime
    created_by: str


# --------------------------------------------------------------------------- studies
class StudyCreate(Strict):
    substance_id: int = Field(ge=1)
    laboratory: str = Field(min_length=1, max_length=300)
    test_guideline: Optional[str] = Field(default=None, max_length=300)
    glp: bool = False
    reference: Optional[str] = Field(default=None, max_length=1000)
    start_date: Optional[dt.date] = None
    end_date: Optional[dt.date] = None
    notes: Optional[str] = Field(default=None, max_length=20_000)

    @model_validator(mode="after")
    def _dates(self) -> "StudyCreate":
        if self.start_date and self.end_date and self.end_date < self.start_date:
            raise ValueError(
                f"end_date {self.end_date} is before start_date {self.start_date}"
            )
        return self


class StudyPublic(Public):
    id: int
    substance_id: int
    laboratory: str
    test_guideline: Optional[str]
    glp: bool
    reference: Optional[str]
    start_date: Optional[dt.date]
    end_date: Optional[dt.date]
    notes: Optional[str]
    created_at: dt.datetime
    created_by: str


# --------------------------------------------------------------------------- runs
def _check_time_unit(value: str) -> str:
    """A time unit :func:`kinetics.units.time_to_s` knows (else its UnitError lists them)."""
    units.time_to_s(0.0, value)
    return value


def _check_series_model(value: Optional[str]) -> Optional[str]:
    if value is None:
        return None
    from kinetics.series import SERIES_MODELS

    if value not in SERIES_MODELS:
        raise ValueError(
            f"series_model {value!r} is not known; choose one of {', '.join(SERIES_MODELS)}"
        )
    return value


class SeriesIn(Strict):
    """A concentration-time series in the units the laboratory reports."""

    time: list[float] = Field(min_length=1, description="sampling times in time_unit")
    time_unit: str = Field(default="d", description="one of s, min, h, d")
    concentration: list[float] = Field(min_length=1, description="in concentration_unit")
    concentration_unit: str = Field(description="e.g. mg/L, umol/L, % (of initial)")
    below_loq: Optional[list[bool]] = Field(
        default=None, description="true where the value is below the limit of quantification"
    )
    loq: Optional[float] = Field(default=None, gt=0, description="limit of quantification in concentration_unit")

    _time_s: np.ndarray = PrivateAttr()
    _concentration: np.ndarray = PrivateAttr()
    _canonical_unit: str = PrivateAttr()
    _loq_canonical: Optional[float] = PrivateAttr(default=None)

    _time_unit = field_validator("time_unit")(_check_time_unit)

    @field_validator("concentration_unit")
    @classmethod
    def _conc_unit(cls, v: str) -> str:
        units.concentration_to_canonical(1.0, v)
        return v

    @field_validator("time")
    @classmethod
    def _times(cls, v: list[float]) -> list[float]:
        for i, t in enumerate(v):
            if t < 0:
                raise ValueError(f"sampling time {t!r} at position {i} is negative")
        if any(b <= a for a, b in zip(v, v[1:])):
            i = next(i for i, (a, b) in enumerate(zip(v, v[1:])) if b <= a)
            raise ValueError(
                f"sampling times must increase: {v[i + 1]!r} at position {i + 1} "
                f"does not follow {v[i]!r}"
            )
        return v

    @field_validator("concentration")
    @classmethod
    def _concentrations(cls, v: list[float]) -> list[float]:
        for i, c in enumerate(v):
            if c < 0:
                raise ValueError(
                    f"concentration {c!r} at position {i} is negative; report values below "
                    "the limit of quantification with below_loq instead"
                )
        return v

    @model_validator(mode="after")
    def _convert(self) -> "SeriesIn":
        n = len(self.time)
        if len(self.concentration) != n:
            raise ValueError(
                f"time has {n} values but concentration has {len(self.concentration)}"
            )
        if self.below_loq is not None and len(self.below_loq) != n:
            raise ValueError(f"time has {n} values but below_loq has {len(self.below_loq)}")
        if n < 3:
            raise ValueError(
                f"a series needs at least 3 points to estimate a rate constant, got {n}"
            )
        self._time_s = np.asarray(units.time_to_s(self.time, self.time_unit), dtype=float)
        conc, canonical = units.concentration_to_canonical(self.concentration, self.concentration_unit)
        self._concentration = np.asarray(conc, dtype=float)
        self._canonical_unit = canonical
        if self.loq is not None:
            loq, _ = units.concentration_to_canonical(self.loq, self.concentration_unit)
            self._loq_canonical = float(loq)
        return self

    @property
    def time_s(self) -> np.ndarray:
        return self._time_s

    @property
    def concentration_canonical(self) -> np.ndarray:
        return self._concentration

    @property
    def canonical_unit(self) -> str:
        return self._canonical_unit

    @property
    def loq_canonical(self) -> Optional[float]:
        return self._loq_canonical


class RateIn(Strict):
    """A rate constant (or DT50) as reported, with an optional standard error of ln k."""

    k: Optional[float] = Field(default=None, gt=0, description="pseudo-first-order rate constant in k_unit")
    k_unit: str = Field(default="1/d", description="one of 1/s, 1/min, 1/h, 1/d")
    dt50: Optional[float] = Field(default=None, gt=0, description="half-life in dt50_unit")
    dt50_unit: str = Field(default="d", description="one of s, min, h, d")
    se_ln_k: Optional[float] = Field(default=None, gt=0, description="standard error of ln k")

    _k_per_s: Optional[float] = PrivateAttr(default=None)
    _dt50_s: Optional[float] = PrivateAttr(default=None)

    @field_validator("k_unit")
    @classmethod
    def _k_unit(cls, v: str) -> str:
        units.rate_to_per_s(1.0, v)
        return v

    _dt50_unit = field_validator("dt50_unit")(_check_time_unit)

    @model_validator(mode="after")
    def _convert(self) -> "RateIn":
        if (self.k is None) == (self.dt50 is None):
            raise ValueError("give exactly one of k (with k_unit) or dt50 (with dt50_unit)")
        if self.k is not None:
            self._k_per_s = float(units.rate_to_per_s(self.k, self.k_unit))
            if not np.isfinite(self._k_per_s) or self._k_per_s <= 0:
                raise ValueError(f"k {self.k!r} {self.k_unit} is not a usable rate constant")
        else:
            self._dt50_s = float(units.time_to_s(self.dt50, self.dt50_unit))
        return self

    @property
    def k_per_s(self) -> Optional[float]:
        return self._k_per_s

    @property
    def dt50_s(self) -> Optional[float]:
        return self._dt50_s


class RunData(Strict):
    """The measured content of one incubation run (without its study)."""

    temperature_K: Optional[float] = Field(default=None, description="incubation temperature [K]")
    temperature_C: Optional[float] = Field(default=None, description="incubation temperature [°C]")
    pH: float = Field(description="pH measured at the incubation temperature (0-14)")
    buffer: Optional[str] = Field(default=None, max_length=300)
    ionic_strength_M: Optional[float] = Field(default=None, ge=0, le=10, description="[mol/L]")
    cosolvent_percent_v_v: Optional[float] = Field(default=None, ge=0, le=100)
    sterile: bool = True
    dark: bool = True
    replicate_label: str = Field(default="", max_length=100)
    series_model: Optional[str] = Field(
        default=None, description="model for this run's series: SFO, FOMC, DFOP or HS (default SFO)"
    )
    notes: Optional[str] = Field(default=None, max_length=20_000)
    series: Optional[SeriesIn] = None
    rate: Optional[RateIn] = None

    _temperature_K: float = PrivateAttr()

    @field_validator("pH")
    @classmethod
    def _ph(cls, v: float) -> float:
        units.validate_pH(v)
        return v

    @field_validator("temperature_K")
    @classmethod
    def _t_K(cls, v: Optional[float]) -> Optional[float]:
        if v is not None:
            units.validate_temperature_K(v)
        return v

    @field_validator("temperature_C")
    @classmethod
    def _t_C(cls, v: Optional[float]) -> Optional[float]:
        if v is not None and not 0.0 <= v <= 100.0:
            raise ValueError(
                f"temperature_C {v!r} °C is not liquid water at 0.1 MPa (0 °C to 100 °C)"
            )
        return v

    @field_validator("series_model")
    @classmethod
    def _model(cls, v: Optional[str]) -> Optional[str]:
        return _check_series_model(v)

    @model_validator(mode="after")
    def _check(self) -> "RunData":
        if (self.temperature_K is None) == (self.temperature_C is None):
            raise ValueError("give exactly one of temperature_K or temperature_C")
        if self.temperature_K is not None:
            t = float(units.validate_temperature_K(self.temperature_K))
        else:
            t = float(units.validate_temperature_K(units.celsius_to_kelvin(self.temperature_C)))
        self._temperature_K = t
        if (self.series is None) == (self.rate is None):
            raise ValueError(
                "a run holds either a concentration-time series (series) or a reported "
                "rate constant / DT50 (rate): give exactly one"
            )
        if self.rate is not None and self.series_model is not None:
            raise ValueError("series_model applies to a series; this run reports a rate")
        return self

    @property
    def temperature_K_si(self) -> float:
        return self._temperature_K


class RunCreate(RunData):
    study_id: int = Field(ge=1)


class RunSupersede(RunData):
    """A corrected version of a run, replacing the current one."""

    reason: str = Field(min_length=3, max_length=5000, description="why the run is corrected")


class RunWithdraw(Strict):
    reason: str = Field(min_length=3, max_length=5000, description="why the run is retracted")


class RunBatchCreate(Strict):
    runs: list[RunCreate] = Field(min_length=1)


class SeriesPublic(Public):
    time_s: list[float]
    concentration: list[float]
    concentration_unit: str = Field(description="canonical: mol/m3, kg/m3 or fraction")
    below_loq: list[bool]
    loq: Optional[float]
    time_unit_sent: Optional[str]
    concentration_unit_sent: Optional[str]


class RunPublic(Public):
    id: int = Field(description="identifier of this version")
    run_uid: str = Field(description="identifier of the run across its versions")
    version: int
    status: Literal["current", "superseded", "withdrawn"]
    study_id: int
    substance_id: int
    temperature_K: float
    temperature_C: float
    pH: float
    buffer: Optional[str]
    ionic_strength_M: Optional[float]
    cosolvent_percent_v_v: Optional[float]
    sterile: bool
    dark: bool
    replicate_label: str
    series_model: Optional[str]
    notes: Optional[str]
    kind: Literal["series", "rate"]
    series: Optional[SeriesPublic]
    k_per_s: Optional[float]
    dt50_s: Optional[float]
    se_ln_k: Optional[float]
    reason: Optional[str] = Field(description="why this version replaced the previous one")
    supersedes_id: Optional[int]
    created_at: dt.datetime
    created_by: str
    valid_to: Optional[dt.datetime] = Field(description="when this version stopped being current")
    withdrawn_reason: Optional[str]


class RunBatchPublic(Public):
    created: list[RunPublic]
    count: int



def run_public(run: Any) -> RunPublic:
    """The public view of a stored run version (a :class:`service.models.Run`)."""
    series = None
    if run.kind == "series":
        obs = run.observations
        series = SeriesPublic(
            time_s=[o.time_s for o in obs],
            concentration=[o.concentration for o in obs],
            concentration_unit=run.concentration_unit,
            below_loq=[o.below_loq for o in obs],
            loq=run.loq,
            time_unit_sent=run.time_unit_sent,
            concentration_unit_sent=run.concentration_unit_sent,
        )
    return RunPublic(
        id=run.id,
        run_uid=run.run_uid,
        version=run.version,
        status=run.status,
        study_id=run.study_id,
        substance_id=run.substance_id,
        temperature_K=run.temperature_K,
        temperature_C=float(units.kelvin_to_celsius(run.temperature_K)),
        pH=run.pH,
        buffer=run.buffer,
        ionic_strength_M=run.ionic_strength_M,
        cosolvent_percent_v_v=run.cosolvent_percent_v_v,
        sterile=run.sterile,
        dark=run.dark,
        replicate_label=run.replicate_label,
        series_model=run.series_model,
        notes=run.notes,
        kind=run.kind,
        series=series,
        k_per_s=run.k_per_s,
        dt50_s=run.dt50_s,
        se_ln_k=run.se_ln_k,
        reason=run.reason,
        supersedes_id=run.supersedes_id,
        created_at=run.created_at,
        created_by=run.created_by,
        valid_to=run.valid_to,
        withdrawn_reason=run.withdrawn_reason,
    )


# --------------------------------------------------------------------------- fits
TemperatureModel = Literal["arrhenius", "eyring"]
SeriesModelChoice = Literal["run", "SFO", "FOMC", "DFOP", "HS"]
ErrorModel = Literal["constant", "proportional"]

_PATHWAY_NAMES = ("acid", "neutral", "base")


def check_pathways(value: str) -> str:
    """``"auto"`` or a comma-separated set drawn from acid, neutral, base (normalised order)."""
    text = value.strip().lower()
    if text == "auto":
        return "auto"
    parts = [p.strip() for p in text.split(",") if p.strip()]
    unknown = [p for p in parts if p not in _PATHWAY_NAMES]
    if not parts or unknown:
        raise ValueError(
            f"pathways {value!r} is not 'auto' or a comma-separated list drawn from "
            "acid, neutral, base (e.g. 'acid,base')"
        )
    if len(set(parts)) != len(parts):
        raise ValueError(f"pathways {value!r} names a pathway twice")
    return ",".join(p for p in _PATHWAY_NAMES if p in parts)


class FitOptions(Strict):
    """How the surface is fitted. The defaults suit a standard pH 4/7/9 study."""

    temperature_model: TemperatureModel = "arrhenius"
    pathways: str = Field(default="auto", description="'auto' (AICc) or e.g. 'acid,neutral,base'")
    series_model: SeriesModelChoice = Field(
        default="run", description="'run': each run's own series_model (SFO if none); or one model for all"
    )
    error_model: ErrorModel = "constant"
    ea_prior_mean_J_per_mol: Optional[float] = Field(default=None, gt=0, lt=400_000)
    ea_prior_sd_J_per_mol: Optional[float] = Field(default=None, gt=0, lt=400_000)
    reference_temperature_K: float = Field(default=298.15, ge=273.15, le=373.15)

    @field_validator("pathways")
    @classmethod
    def _pathways(cls, v: str) -> str:
        return check_pathways(v)

    @model_validator(mode="after")
    def _prior(self) -> "FitOptions":
        if (self.ea_prior_mean_J_per_mol is None) != (self.ea_prior_sd_J_per_mol is None):
            raise ValueError(
                "give both ea_prior_mean_J_per_mol and ea_prior_sd_J_per_mol, or neither"
            )
        return self

    @property
    def ea_prior(self) -> Optional[tuple[float, float]]:
        if self.ea_prior_mean_J_per_mol is None:
            return None
        return (self.ea_prior_mean_J_per_mol, self.ea_prior_sd_J_per_mol)

    def kinetics_kwargs(self) -> dict[str, Any]:
        return {
            "temperature_model": self.temperature_model,
            "pathways": self.pathways,
            "series_model": self.series_model,
            "error_model": self.error_model,
            "ea_prior_J_per_mol": self.ea_prior,
            "reference_temperature_K": self.reference_temperature_K,
        }


class ParameterPublic(Public):
    name: str
    unit: str
    estimate: Optional[float]
    standard_error: Optional[float]
    ci_low: Optional[float]
    ci_high: Optional[float]


class SeriesParameterPublic(Public):
    name: str
    estimate: Optional[float]
    standard_error: Optional[float]


class RunDiagnosticsPublic(Public):
    run_uid: Optional[str] = Field(description="stored run id (null in a stateless calculation)")
    version: Optional[int]
    label: str
    kind: Literal["series", "rate"]
    temperature_K: float
    pH: float
    ionic_strength_M: float
    series_model: Optional[str]
    k_per_s: Optional[float]
    se_ln_k: Optional[float]
    dt50_s: Optional[float]
    dt90_s: Optional[float]
    chi2_error_level_percent: Optional[float]
    n_points: Optional[int]
    dof: Optional[int]
    parameters: list[SeriesParameterPublic]
    aicc: Optional[float]
    time_s: list[Optional[float]]
    observed: list[Optional[float]]
    fitted: list[Optional[float]]
    residuals: list[Optional[float]]
    p_rate_positive: dict[str, Optional[float]]
    ln_k_residual_from_surface: Optional[float]
    status: Literal["fitted", "excluded"] = Field(
        default="fitted",
        description="'excluded': the series shows no measurable decline and was left out of "
        "the surface (the stored run is unchanged)",
    )
    exclusion_reason: Optional[str] = None
    k_upper_bound_per_s: Optional[float] = Field(
        default=None, description="excluded run: k is below about this value [1/s]"
    )
    k_upper_bound_basis: Optional[str] = None
    dt50_lower_bound_s: Optional[float] = Field(
        default=None, description="excluded run: DT50 is above about this value [s]"
    )


class ExcludedRunPublic(Public):
    """A run left out of the surface fit, with the reason in plain words."""

    run_uid: Optional[str]
    version: Optional[int]
    label: str
    reason: Optional[str]


class RunRefPublic(Public):
    """A stored run named by id, version and label."""

    run_uid: Optional[str]
    version: Optional[int]
    label: str


class CandidatePublic(Public):
    pathways: list[str]
    identifiable: bool
    reason: str
    n_params: int
    rss: Optional[float]
    aicc: Optional[float]
    ea_from_prior: list[str]
    selected: bool


class SurfaceModelPublic(Public):
    """A fitted pH-temperature rate surface with its diagnostics."""

    substance_id: Optional[int] = None
    substance_name: Optional[str] = None
    data_version: Optional[str] = Field(default=None, description="fingerprint of the run versions used")
    fitted_at: Optional[dt.datetime] = None
    cached: Optional[bool] = None
    as_of: Optional[dt.datetime] = Field(default=None, description="the past time asked for (UTC), if any")
    fit_options: FitOptions
    temperature_model: str
    pathways_supported: list[str]
    uncharacterised_pathways: list[str]
    ea_from_prior: list[str]
    selection: str
    level: float
    parameters: list[ParameterPublic]
    parameter_names: list[str]
    covariance: list[list[Optional[float]]]
    dof: int
    residual_scale: Optional[float]
    between_run_sd_ln_k: Optional[float]
    n_measurements: int
    reference_temperature_K: float
    temperature_range_K: list[float]
    pH_range: list[float]
    candidates: list[CandidatePublic]
    runs: list[RunDiagnosticsPublic]
    excluded_runs: list[ExcludedRunPublic] = Field(
        default_factory=list, description="runs left out of the surface (no measurable decline)"
    )
    se_imputed_runs: list[RunRefPublic] = Field(
        default_factory=list,
        description="runs without a standard error of ln k (among runs with one), weighted "
        "as runs of typical precision for the study",
    )
    se_imputed_ln_k: Optional[float] = Field(
        default=None, description="standard error of ln k given to those runs [-]"
    )
    flags: list[str]
    caution: str


# --------------------------------------------------------------------------- predictions
class Condition(TypedDict):
    """One field condition: one of temperature_C / temperature_K, pH, and optionally one of
    ionic_strength_M (fresh water) / salinity (sea or brackish water).

    A typed dictionary rather than a model: 100,000 of them validate several times faster.
    """

    __pydantic_config__ = ConfigDict(allow_inf_nan=False, extra="forbid")  # type: ignore[misc]

    temperature_C: NotRequired[Optional[Annotated[float, Field(description="water temperature [°C]")]]]
    temperature_K: NotRequired[Optional[Annotated[float, Field(description="water temperature [K]")]]]
    pH: Annotated[float, Field(description="field pH (total scale when salinity is given)")]
    ionic_strength_M: NotRequired[Optional[Annotated[float, Field(ge=0, description="[mol/L], fresh water")]]]
    salinity: NotRequired[Optional[Annotated[float, Field(ge=0, description="practical salinity")]]]


class ConditionColumns(Strict):
    """Field conditions as columns of equal length (compact for many conditions)."""

    temperature_C: Optional[list[float]] = None
    temperature_K: Optional[list[float]] = None
    pH: list[float]
    ionic_strength_M: Optional[list[float]] = None
    salinity: Optional[list[float]] = None


class PredictionOptions(Strict):
    level: float = Field(default=0.95, gt=0, lt=1, description="level of both intervals")
    method: Literal["delta", "montecarlo"] = "delta"
    n_draws: int = Field(default=10_000, ge=100, le=1_000_000, description="Monte Carlo draws")
    seed: Optional[int] = Field(default=None, ge=0, description="Monte Carlo seed (same seed, same numbers)")
    layout: Literal["rows", "columns"] = Field(
        default="rows", description="'rows': one object per condition; 'columns': one array per quantity"
    )


class PredictionRequest(PredictionOptions):
    """Field conditions to predict at: give ``conditions`` (objects) or ``columns``."""

    conditions: Optional[list[Condition]] = None
    columns: Optional[ConditionColumns] = None
    fit_options: FitOptions = Field(default_factory=FitOptions)

    @model_validator(mode="after")
    def _one(self) -> "PredictionRequest":
        if (self.conditions is None) == (self.columns is None):
            raise ValueError("give the field conditions either as conditions or as columns")
        return self


class CalculationRequest(PredictionOptions):
    """Runs to fit without storing them, and optional field conditions to predict at."""

    runs: list[RunData] = Field(min_length=1)
    conditions: Optional[list[Condition]] = None
    columns: Optional[ConditionColumns] = None
    fit_options: FitOptions = Field(default_factory=FitOptions)

    @model_validator(mode="after")
    def _at_most_one(self) -> "CalculationRequest":
        if self.conditions is not None and self.columns is not None:
            raise ValueError("give the field conditions as conditions or as columns, not both")
        return self


class PredictionRow(Public):
    temperature_K: float
    temperature_C: float
    pH: float
    ionic_strength_M: float
    salinity: float
    k_per_s: Optional[float]
    k_ci_low_per_s: Optional[float]
    k_ci_high_per_s: Optional[float]
    k_pi_low_per_s: Optional[float]
    k_pi_high_per_s: Optional[float]
    ln_k: Optional[float]
    se_ln_k: Optional[float]
    dt50_s: Optional[float]
    dt50_ci_low_s: Optional[float]
    dt50_ci_high_s: Optional[float]
    dt50_pi_low_s: Optional[float]
    dt50_pi_high_s: Optional[float]
    dt90_s: Optional[float]
    dt90_ci_low_s: Optional[float]
    dt90_ci_high_s: Optional[float]
    dt90_pi_low_s: Optional[float]
    dt90_pi_high_s: Optional[float]
    extrapolation_ln_k: Optional[float]
    dominant_pathway: str
    contributions: dict[str, Optional[float]]
    flags: dict[str, bool]


class PredictionColumnsPublic(Public):
    values: dict[str, list[Optional[float]]] = Field(description="quantity -> one value per condition")
    dominant_pathway: list[str]
    contributions: dict[str, list[Optional[float]]]
    flags: dict[str, list[bool]]


class PredictionResponse(Public):
    """Predictions at field conditions, always with the caution text."""

    caution: str
    substance_id: Optional[int] = None
    data_version: Optional[str] = None
    as_of: Optional[dt.datetime] = Field(default=None, description="the past time asked for (UTC), if any")
    fit_options: FitOptions
    level: float
    method: str
    dof: int
    residual_scale: Optional[float]
    temperature_range_K: list[float]
    pH_range: list[float]
    pathways_supported: list[str]
    excluded_runs: list[ExcludedRunPublic] = Field(
        default_factory=list, description="runs left out of the surface (no measurable decline)"
    )
    n_conditions: int
    layout: Literal["rows", "columns"]
    predictions: Optional[list[PredictionRow]] = None
    columns: Optional[PredictionColumnsPublic] = None


class CalculationResponse(Public):
    """A stateless fit (nothing stored) and, if conditions were given, predictions."""

    caution: str
    model: SurfaceModelPublic
    prediction: Optional[PredictionResponse] = None
