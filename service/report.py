"""The HTML report of one substance: data, fits, pH-rate profiles, Arrhenius plots, predictions.

The report is a single self-contained HTML page (inline CSS and SVG, no scripts, no
external resources) so it can be mailed, archived or printed. Plots come from
:mod:`service.svg` and stay readable in grey scale. Every page carries the caution text
(:data:`kinetics.caution.CAUTION_TEXT`), the data version (fingerprint of the run versions
used) and the time the report was made, with the query that reproduces it.

Building a report has two steps: gather the inputs into a :class:`ReportData` (the API
route and the CLI do this from the database; :func:`run_view` fits a stored run) and
render it with :func:`render_report`.
"""

from __future__ import annotations

import datetime as dt
import html
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from kinetics import units
from kinetics.caution import CAUTION_TEXT
from kinetics.errors import KineticsError
from service import svg

__all__ = [
    "RunView",
    "FieldCondition",
    "ReportData",
    "run_view",
    "run_view_from_csv",
    "default_conditions",
    "gather",
    "gather_from_csv",
    "runs_as_of",
    "data_version_of",
    "fit_substance",
    "SubstanceFit",
    "pathway_ln_k",
    "pathway_points",
    "render_report",
    "format_number",
    "DEFAULT_FIELD_PH",
    "PATHWAY_UNITS",
]

#: pH values of the default field-prediction table
DEFAULT_FIELD_PH = (5.0, 6.0, 7.0, 8.0, 9.0)

#: unit of each pathway's rate constant
PATHWAY_UNITS = {"acid": "L/(mol·s)", "neutral": "1/s", "base": "L/(mol·s)"}

from kinetics.units import SECONDS_PER_DAY as _SECONDS_PER_DAY  # noqa: E402


# ------------------------------------------------------------------ inputs
@dataclass(frozen=True)
class RunView:
    """One stored run as the report shows it.

    Parameters
    ----------
    run_uid : str
        Identifier of the run across its versions.
    version : int
        Version used.
    label : str
        Replicate label (or a generated label).
    study : str
        Short description of the study (laboratory and reference).
    temperature_K : float
        Incubation temperature [K].
    pH : float
        pH measured at the incubation temperature.
    ionic_strength_M : float
        Ionic strength [mol/L] (0 when not reported).
    buffer : str or None
        Buffer description.
    kind : {"series", "rate"}
        A concentration-time series or a reported rate constant.
    time_unit : str
        Unit in which times are shown (the unit the laboratory sent).
    concentration_unit : str
        Unit in which concentrations are shown (the unit the laboratory sent).
    concentration_factor : float
        Multiplier from the stored (canonical) concentration unit to ``concentration_unit``.
    fit : kinetics.series.SeriesFit or None
        The fit of the series (None for a reported rate or when the fit failed).
    fit_error : str or None
        Why the series could not be fitted.
    k_per_s : float or None
        Rate constant of the run [1/s]: fitted, or as reported.
    se_ln_k : float or None
        Standard error of ln k.
    below_loq : tuple of bool
        Below-LOQ flags of the stored observations.
    time_s, concentration : tuple of float
        Stored observations (time [s], canonical concentration).
    """

    run_uid: str
    version: int
    label: str
    study: str
    temperature_K: float
    pH: float
    ionic_strength_M: float = 0.0
    buffer: str | None = None
    kind: str = "series"
    time_unit: str = "d"
    concentration_unit: str = ""
    concentration_factor: float = 1.0
    fit: Any = None
    fit_error: str | None = None
    k_per_s: float | None = None
    se_ln_k: float | None = None
    below_loq: tuple[bool, ...] = ()
    time_s: tuple[float, ...] = ()
    concentration: tuple[float, ...] = ()
    model: str = "SFO"


@dataclass(frozen=True)
class FieldCondition:
    """One field condition of the prediction table.

    Parameters
    ----------
    label : str
        Name shown in the table.
    temperature_K : float
        Water temperature [K].
    pH : float
        Field pH.
    ionic_strength_M : float
        Ionic strength [mol/L].
    salinity : float
        Practical salinity (≈ g/kg); > 0 for brackish or sea water.
    """

    label: str
    temperature_K: float
    pH: float
    ionic_strength_M: float = 0.0
    salinity: float = 0.0


@dataclass(frozen=True)
class ReportData:
    """Everything a report shows.

    Parameters
    ----------
    substance : mapping
        ``name`` and optionally ``id``, ``cas_rn``, ``smiles``, ``substance_class``, ``notes``.
    studies : sequence of mapping
        ``laboratory``, ``test_guideline``, ``glp``, ``reference``, ``start_date``,
        ``end_date``, ``n_runs``.
    runs : sequence of RunView
        The runs used (current versions at the data version).
    surface : kinetics.surface.SurfaceFit or None
        The fitted rate surface, or None when it could not be fitted.
    surface_error : str or None
        Why the surface could not be fitted.
    field_temperature_K : float
        Temperature [K] of the field pH-rate profile.
    conditions : sequence of FieldCondition
        Rows of the prediction table.
    data_version : str
        Fingerprint of the run versions used.
    generated_at : datetime
        When the report was made (UTC).
    level : float
        Confidence level of intervals and bands.
    as_of : datetime or None
        The as-of time the data were read at (None: the current data).
    reproduce_query : str
        Request that reproduces this report (path and query string).
    fit_options : mapping
        The fit options used (shown in the summary).
    """

    substance: Mapping[str, Any]
    studies: Sequence[Mapping[str, Any]]
    runs: Sequence[RunView]
    surface: Any
    surface_error: str | None
    field_temperature_K: float
    conditions: Sequence[FieldCondition]
    data_version: str
    generated_at: dt.datetime
    level: float = 0.95
    as_of: dt.datetime | None = None
    reproduce_query: str = ""
    fit_options: Mapping[str, Any] = field(default_factory=dict)


def run_view(run: Any, *, study: str = "", error_model: str = "constant",
             model: str | None = None) -> RunView:
    """Build a :class:`RunView` from a stored run, fitting its series.

    Parameters
    ----------
    run : service.models.Run or service.schemas.RunPublic
        The run (observations with time [s] and canonical concentrations).
    study : str
        Study description shown beside the run.
    error_model : {"constant", "proportional"}
        Error model of the series fit.
    model : str or None
        Series model (default: the run's own ``series_model``, SFO if none).

    Returns
    -------
    RunView
        With ``fit`` set, or ``fit_error`` explaining why the series could not be fitted.
    """
    from kinetics.series import fit_series

    label = run.replicate_label or f"run {str(run.run_uid)[:8]}"
    common = dict(
        run_uid=str(run.run_uid), version=int(run.version), label=label, study=study,
        temperature_K=float(run.temperature_K), pH=float(run.pH),
        ionic_strength_M=float(run.ionic_strength_M or 0.0), buffer=run.buffer,
        model=model or run.series_model or "SFO",
    )
    if run.kind != "series":
        k = run.k_per_s
        if k is None and run.dt50_s:
            k = math.log(2.0) / float(run.dt50_s)
        return RunView(kind="rate", k_per_s=None if k is None else float(k),
                       se_ln_k=run.se_ln_k, **common)
    series = getattr(run, "series", None)
    if series is not None:  # RunPublic
        time_s = tuple(float(t) for t in series.time_s)
        conc = tuple(float(c) for c in series.concentration)
        flags = tuple(bool(b) for b in series.below_loq)
        loq = series.loq
        canonical = series.concentration_unit
        t_unit = series.time_unit_sent or "d"
        c_unit = series.concentration_unit_sent or canonical
    else:  # ORM row
        obs = list(run.observations)
        time_s = tuple(float(o.time_s) for o in obs)
        conc = tuple(float(o.concentration) for o in obs)
        flags = tuple(bool(o.below_loq) for o in obs)
        loq = run.loq
        canonical = run.concentration_unit
        t_unit = run.time_unit_sent or "d"
        c_unit = run.concentration_unit_sent or canonical
    try:
        factor = float(units.concentration_from_canonical(1.0, c_unit)) if c_unit else 1.0
    except KineticsError:
        factor, c_unit = 1.0, canonical
    if t_unit not in units.TIME_UNITS:
        t_unit = "d"
    fit = None
    fit_error = None
    try:
        fit = fit_series(np.asarray(time_s), np.asarray(conc), time_unit="s",
                         model=common["model"], error_model=error_model, loq=loq,
                         below_loq=np.asarray(flags, dtype=bool) if any(flags) else None)
    except KineticsError as exc:
        fit_error = str(exc)
    return RunView(
        kind="series", time_unit=t_unit, concentration_unit=c_unit or "",
        concentration_factor=factor, fit=fit, fit_error=fit_error,
        k_per_s=None if fit is None else float(fit.k_per_s),
        se_ln_k=None if fit is None else float(fit.se_ln_k),
        below_loq=flags, time_s=time_s, concentration=conc, **common,
    )


def run_view_from_csv(run: Any, *, error_model: str = "constant") -> RunView:
    """Build a :class:`RunView` from a :class:`service.csv_io.CsvRun`, fitting its series.

    Parameters
    ----------
    run : service.csv_io.CsvRun
        A run read from a CSV file (units as in the file).
    error_model : {"constant", "proportional"}
        Error model of the series fit.
    """
    from kinetics.series import fit_series

    study = run.laboratory + (f", {run.study_reference}" if run.study_reference else "")
    common = dict(
        run_uid=f"line-{run.first_line}", version=1, label=run.replicate_label, study=study,
        temperature_K=float(run.temperature_K), pH=float(run.pH),
        ionic_strength_M=float(run.ionic_strength_M or 0.0), buffer=run.buffer,
        model=run.model or "SFO",
    )
    if run.kind != "series":
        if run.k_obs is not None:
            k = float(units.rate_to_per_s(run.k_obs, run.rate_unit))
        else:
            k = float(units.half_life_to_rate_per_s(run.dt50, run.dt50_unit))
        return RunView(kind="rate", k_per_s=k, se_ln_k=run.se_ln_k, **common)
    times = np.array([o.time for o in run.observations], dtype=float)
    time_s = np.asarray(units.time_to_s(times, run.time_unit), dtype=float)
    conc, _canonical = units.concentration_to_canonical(
        [o.concentration for o in run.observations], run.concentration_unit)
    conc = np.atleast_1d(np.asarray(conc, dtype=float))
    flags = np.array([o.below_loq for o in run.observations], dtype=bool)
    loq = None
    if run.loq is not None:
        loq_c, _ = units.concentration_to_canonical(run.loq, run.concentration_unit)
        loq = float(loq_c)
    factor = float(units.concentration_from_canonical(1.0, run.concentration_unit))
    fit, fit_error = None, None
    try:
        fit = fit_series(time_s, conc, time_unit="s", model=common["model"],
                         error_model=error_model, loq=loq,
                         below_loq=flags if flags.any() else None)
    except KineticsError as exc:
        fit_error = str(exc)
    return RunView(
        kind="series", time_unit=run.time_unit, concentration_unit=run.concentration_unit,
        concentration_factor=factor, fit=fit, fit_error=fit_error,
        k_per_s=None if fit is None else float(fit.k_per_s),
        se_ln_k=None if fit is None else float(fit.se_ln_k),
        below_loq=tuple(bool(b) for b in flags), time_s=tuple(float(t) for t in time_s),
        concentration=tuple(float(c) for c in conc), **common,
    )


def default_conditions(field_temperature_K: float,
                       pH_values: Sequence[float] = DEFAULT_FIELD_PH,
                       salinity: float = 0.0) -> list[FieldCondition]:
    """Field conditions at one temperature and several pH values (fresh water by default).

    Parameters
    ----------
    field_temperature_K : float
        Water temperature [K].
    pH_values : sequence of float
        Field pH values, one condition each.
    salinity : float
        Practical salinity (≈ g/kg); 0 for fresh water.
    """
    return [FieldCondition(
        f"{_temperature_label(field_temperature_K)}, pH {p:g}"
        + (f", salinity {salinity:g}" if salinity else ""),
        float(field_temperature_K), float(p), 0.0, float(salinity)) for p in pH_values]


def runs_as_of(session: Any, substance_id: int, as_of: dt.datetime | None) -> list[Any]:
    """The run versions of a substance that were current at ``as_of`` (None: now).

    A version was current at ``as_of`` if it was stored at or before it and was not yet
    replaced or withdrawn (``valid_to`` empty or later).
    """
    from service import crud

    if as_of is None:
        return crud.current_runs(session, substance_id=substance_id)
    if as_of.tzinfo is None:
        raise KineticsError(f"as_of {as_of.isoformat()} needs a time zone, e.g. ...Z for UTC")
    return crud.runs_as_of(session, substance_id=substance_id, as_of=as_of)


def data_version_of(substance_id: int, run_ids: Sequence[int]) -> str:
    """Fingerprint of a set of run versions (:func:`service.crud.data_version_of`)."""
    from service import crud

    return crud.data_version_of(substance_id=substance_id, run_version_ids=list(run_ids))


@dataclass(frozen=True)
class SubstanceFit:
    """The runs of a substance at a data version and the surface fitted to them."""

    runs: tuple[Any, ...]
    data_version: str
    result: Any
    error: str | None
    exception: KineticsError | None = None

    def raise_error(self) -> None:
        """Raise the fitting error, if the surface could not be fitted."""
        if self.exception is not None:
            raise self.exception


def fit_substance(factory: Any, substance_id: int, *, as_of: dt.datetime | None = None,
                  options: Any = None) -> SubstanceFit:
    """Read a substance's runs (current, or current at ``as_of``) and fit its surface.

    For the current data the service's model store is used, so the numbers are those of
    ``GET /v1/substances/{id}/model`` (and come from its cache when present); for an
    as-of read the same fitting code runs on the runs of that time.

    Parameters
    ----------
    factory : sqlalchemy.orm.sessionmaker
        Session factory of the service's database.
    substance_id : int
        The substance.
    as_of : datetime or None
        Time zone aware; None for the current data.
    options : service.schemas.FitOptions or None
        Fit options (defaults: the service's defaults).

    Raises
    ------
    service.errors.NotFound
        If the substance does not exist.
    """
    from service import crud
    from service.fitting import compute_fit, run_input_from_model
    from service.modelstore import load_model
    from service.schemas import FitOptions

    opts = options or FitOptions()
    with factory() as session:
        crud.get_substance(session, substance_id=substance_id)
        runs = tuple(runs_as_of(session, substance_id, as_of))
    version = data_version_of(substance_id, [r.id for r in runs])
    try:
        result = None
        if as_of is None:
            stored = load_model(factory, substance_id=substance_id, options=opts)
            if stored.data_version == version:
                result = stored.result
        if result is None:
            result = compute_fit([run_input_from_model(r) for r in runs],
                                 **opts.kinetics_kwargs())
    except KineticsError as exc:
        return SubstanceFit(runs, version, None, str(exc), exc)
    return SubstanceFit(runs, version, result, None)


def gather(
    factory: Any,
    substance_id: int,
    *,
    field_temperature_K: float,
    pH_values: Sequence[float] = DEFAULT_FIELD_PH,
    salinity: float = 0.0,
    level: float = 0.95,
    as_of: dt.datetime | None = None,
    options: Any = None,
    reproduce_query: str = "",
    now: dt.datetime | None = None,
) -> ReportData:
    """Read a substance's data and fit it: everything :func:`render_report` needs.

    Parameters
    ----------
    factory : sqlalchemy.orm.sessionmaker
        Session factory of the service's database.
    substance_id : int
        The substance.
    field_temperature_K : float
        Temperature of the field pH-rate profile and of the prediction table [K].
    pH_values : sequence of float
        pH values of the prediction table.
    salinity : float
        Practical salinity of the prediction table (0: fresh water).
    level : float
        Confidence level.
    as_of : datetime or None
        Read the data as they were at this time (UTC-aware); None: current data.
    options : service.schemas.FitOptions or None
        Fit options (default: the service's defaults, as for the model endpoint).
    reproduce_query : str
        Request that reproduces this report, shown in it.
    now : datetime or None
        Generation time (default: now, UTC).

    Raises
    ------
    service.errors.NotFound
        If the substance does not exist.
    kinetics.errors.InputError
        If a condition is out of range (temperature, pH, salinity, level).
    """
    from sqlalchemy import select

    from kinetics.errors import InputError
    from service import crud
    from service.models import Study
    from service.schemas import FitOptions

    units.validate_temperature_K(field_temperature_K)
    for p in pH_values:
        units.validate_pH(p)
    if not 0.0 < float(level) < 1.0:
        raise InputError(f"level must lie strictly between 0 and 1 (e.g. 0.95), got {level!r}")
    if not 0.0 <= float(salinity) <= 45.0:
        raise InputError(f"salinity {salinity!r} is outside 0-45")
    opts = options or FitOptions()
    fitted = fit_substance(factory, substance_id, as_of=as_of, options=opts)
    with factory() as session:
        substance = crud.get_substance(session, substance_id=substance_id)
        study_rows = session.scalars(select(Study).where(Study.substance_id == substance_id)
                                     .order_by(Study.id)).all()
    counts: dict[int, int] = {}
    for r in fitted.runs:
        counts[r.study_id] = counts.get(r.study_id, 0) + 1
    studies = [{
        "laboratory": st.laboratory, "test_guideline": st.test_guideline, "glp": st.glp,
        "reference": st.reference, "start_date": st.start_date, "end_date": st.end_date,
        "n_runs": counts.get(st.id, 0),
    } for st in study_rows]
    study_text = {st.id: st.laboratory + (f", {st.reference}" if st.reference else "")
                  for st in study_rows}
    model_of = {}
    if fitted.result is not None:
        model_of = {d.get("run_uid"): d.get("series_model") for d in fitted.result.runs}
    views = [run_view(r, study=study_text.get(r.study_id, ""), error_model=opts.error_model,
                      model=model_of.get(r.run_uid) or _series_model(r, opts.series_model))
             for r in fitted.runs]
    conditions = default_conditions(field_temperature_K, pH_values, salinity)
    return ReportData(
        substance={"id": substance.id, "name": substance.name, "cas_rn": substance.cas_rn,
                   "smiles": substance.smiles, "substance_class": substance.substance_class,
                   "notes": substance.notes},
        studies=studies, runs=views,
        surface=None if fitted.result is None else fitted.result.surface,
        surface_error=fitted.error,
        field_temperature_K=float(field_temperature_K), conditions=conditions,
        data_version=fitted.data_version,
        generated_at=now or dt.datetime.now(dt.timezone.utc), level=float(level), as_of=as_of,
        reproduce_query=reproduce_query,
        fit_options={k: v for k, v in opts.model_dump().items() if v is not None},
    )


def gather_from_csv(
    runs: Sequence[Any],
    *,
    field_temperature_K: float,
    pH_values: Sequence[float] = DEFAULT_FIELD_PH,
    salinity: float = 0.0,
    level: float = 0.95,
    options: Any = None,
    source: str = "",
    now: dt.datetime | None = None,
) -> ReportData:
    """Everything :func:`render_report` needs, from runs read from a CSV file (no database).

    The fit is the one the stateless calculation of the service makes from the same runs.

    Parameters
    ----------
    runs : sequence of service.csv_io.CsvRun
        Runs of one substance.
    source : str
        Where the runs came from (shown as the data version with the file's fingerprint).
    field_temperature_K, pH_values, salinity, level, options, now
        As for :func:`gather`.
    """
    import hashlib

    from kinetics.errors import InputError
    from service.csv_io import run_to_payload
    from service.fitting import compute_fit, run_input_from_payload
    from service.schemas import FitOptions, RunData

    names = sorted({r.substance for r in runs})
    if len(names) != 1:
        raise InputError(f"a report covers one substance; the runs name {len(names)}: "
                         f"{', '.join(names)}")
    units.validate_temperature_K(field_temperature_K)
    for p in pH_values:
        units.validate_pH(p)
    opts = options or FitOptions()
    payloads = [run_to_payload(r) for r in runs]
    data = [RunData(**p) for p in payloads]
    surface, error = None, None
    model_of: dict[int, str] = {}
    try:
        result = compute_fit([run_input_from_payload(d, i) for i, d in enumerate(data)],
                             **opts.kinetics_kwargs())
        surface = result.surface
        model_of = {i: d.get("series_model") for i, d in enumerate(result.runs)}
    except KineticsError as exc:
        error = csv_run_labels(str(exc), runs)
    views = []
    for i, r in enumerate(runs):
        v = run_view_from_csv(r, error_model=opts.error_model)
        wanted = model_of.get(i) or _series_model(r, opts.series_model)
        if r.kind == "series" and wanted != v.model:
            from dataclasses import replace

            v = run_view_from_csv(replace(r, model=wanted), error_model=opts.error_model)
        views.append(v)
    fingerprint = hashlib.sha256(repr(payloads).encode()).hexdigest()[:32]
    studies: dict[tuple, dict[str, Any]] = {}
    for r in runs:
        st = studies.setdefault(r.study_key, {
            "laboratory": r.laboratory, "test_guideline": r.test_guideline, "glp": r.glp,
            "reference": r.study_reference, "n_runs": 0})
        st["n_runs"] += 1
    conditions = default_conditions(field_temperature_K, pH_values, salinity)
    return ReportData(
        substance={"name": names[0], "notes": f"Runs read from {source}." if source else None},
        studies=list(studies.values()), runs=views, surface=surface, surface_error=error,
        field_temperature_K=float(field_temperature_K), conditions=conditions,
        data_version=f"file {fingerprint}", generated_at=now or dt.datetime.now(dt.timezone.utc),
        level=float(level), fit_options={k: v for k, v in opts.model_dump().items()
                                         if v is not None},
    )


def csv_run_labels(message: str, runs: Sequence[Any]) -> str:
    """Replace the positional run names (``runs[3]``) of a fitting message by CSV lines."""
    for i, r in enumerate(runs):
        message = message.replace(f"runs[{i}]", f"line {r.first_line} (run {r.replicate_label!r})")
    return message


def _series_model(run: Any, choice: str) -> str:
    own = getattr(run, "series_model", None) or getattr(run, "model", None)
    return (own or "SFO") if choice == "run" else choice


# ------------------------------------------------------------------ pathway helpers
def _param_index(surface: Any) -> dict[str, int]:
    return {name: i for i, name in enumerate(surface.parameter_names)}


def pathway_ln_k(surface: Any, pathway: str, temperature_K: Any,
                 level: float = 0.95) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """ln of one pathway's rate constant against temperature, with a confidence band.

    Arrhenius (per pathway, reference temperature :math:`T_{ref}` of the surface):

    .. math::

        \\ln k_p(T) = \\ln k_{p,ref} - \\frac{E_{a,p}}{R}\\left(\\frac{1}{T} -
        \\frac{1}{T_{ref}}\\right)

    (Arrhenius, Z. phys. Chem. 4 (1889) 226-248). Eyring:

    .. math::

        \\ln k_p(T) = \\ln\\frac{k_B T}{h} + \\frac{\\Delta S^\\ddagger_p}{R} -
        \\frac{\\Delta H^\\ddagger_p}{R T}

    (Eyring, J. Chem. Phys. 3 (1935) 107-115). Both are evaluated by
    :mod:`kinetics.surface`. The band is the delta method with the parameter
    covariance of the surface and the Student-t quantile with the surface's
    degrees of freedom (as in :meth:`SurfaceFit.interval`).

    Parameters
    ----------
    surface : kinetics.surface.SurfaceFit
        Fitted surface that includes ``pathway``.
    pathway : {"acid", "neutral", "base"}
        Pathway.
    temperature_K : array_like
        Temperatures [K].
    level : float
        Confidence level of the band.

    Returns
    -------
    ln_k, low, high : numpy.ndarray
        ln k_p (acid/base in L/(mol s), neutral in 1/s) and the band edges.

    Raises
    ------
    InputError
        If ``pathway`` is not in the surface.
    """
    from scipy import stats

    from kinetics.errors import InputError
    from kinetics.surface import GAS_CONSTANT_J_PER_MOL_K, arrhenius_ln_k, eyring_ln_k

    if pathway not in surface.pathways:
        raise InputError(f"pathway {pathway!r} is not in the fitted surface; it has "
                         f"{', '.join(surface.pathways)}")
    R = GAS_CONSTANT_J_PER_MOL_K
    T = np.atleast_1d(np.asarray(temperature_K, dtype=float))
    idx = _param_index(surface)
    est = np.asarray(surface.estimates, dtype=float)
    cov = np.asarray(surface.covariance, dtype=float)
    grad = np.zeros((T.size, est.size))
    if surface.temperature_model == "arrhenius":
        i_ln, i_ea = idx[f"ln_k_ref_{pathway}"], idx[f"Ea_{pathway}_J_per_mol"]
        t_ref = float(surface.reference_temperature_K)
        ln_k = arrhenius_ln_k(est[i_ln], est[i_ea], T, t_ref)
        grad[:, i_ln] = 1.0
        grad[:, i_ea] = -(1.0 / T - 1.0 / t_ref) / R
    else:
        i_h, i_s = idx[f"dH_{pathway}_J_per_mol"], idx[f"dS_{pathway}_J_per_mol_K"]
        ln_k = eyring_ln_k(est[i_h], est[i_s], T)
        grad[:, i_s] = 1.0 / R
        grad[:, i_h] = -1.0 / (R * T)
    var = np.einsum("ij,jk,ik->i", grad, cov, grad)
    se = np.sqrt(np.clip(var, 0.0, None))
    q = float(stats.t.ppf(0.5 + level / 2.0, surface.dof)) if surface.dof > 0 else \
        float(stats.norm.ppf(0.5 + level / 2.0))
    return ln_k, ln_k - q * se, ln_k + q * se


def pathway_points(surface: Any, pathway: str, runs: Sequence[RunView],
                   min_share: float = 0.5) -> list[tuple[RunView, float]]:
    """Per-run estimates of one pathway's rate constant, for the Arrhenius plot.

    For every run with a rate constant where the fitted surface attributes at least
    ``min_share`` of the rate to ``pathway``, the measured k is split in that
    proportion and divided by [H+] (acid) or [OH-] (base) at the run's conditions:

    .. math::

        \\hat k_{A} = \\frac{f_A\\,k_{obs}}{[\\mathrm{H^+}]}, \\quad
        \\hat k_{N} = f_N\\,k_{obs}, \\quad
        \\hat k_{B} = \\frac{f_B\\,k_{obs}}{[\\mathrm{OH^-}]}

    (the rate law :math:`k_{obs} = k_A[\\mathrm{H^+}] + k_N + k_B[\\mathrm{OH^-}]`).

    Returns
    -------
    list of (RunView, ln k)
        ln of the pathway rate constant (acid/base in L/(mol s), neutral in 1/s).
    """
    from kinetics.water import hydronium_hydroxide_molar

    usable = [r for r in runs if r.k_per_s and r.k_per_s > 0]
    if not usable or pathway not in surface.pathways:
        return []
    T = np.array([r.temperature_K for r in usable])
    pH = np.array([r.pH for r in usable])
    ionic = np.array([r.ionic_strength_M for r in usable])
    share = np.atleast_1d(np.asarray(
        surface.contributions(T, pH, ionic_strength_M=ionic)[pathway], dtype=float))
    h, oh = hydronium_hydroxide_molar(pH, T, ionic_strength_M=ionic)
    divisor = {"acid": np.atleast_1d(h), "base": np.atleast_1d(oh)}.get(pathway,
                                                                          np.ones(len(usable)))
    out: list[tuple[RunView, float]] = []
    for run, f, c in zip(usable, share, divisor):
        if f < min_share:
            continue
        value = f * run.k_per_s / c
        if value > 0 and math.isfinite(value):
            out.append((run, math.log(value)))
    return out


# ------------------------------------------------------------------ formatting
def _esc(value: Any) -> str:
    return html.escape("" if value is None else str(value), quote=True)


def format_number(value: Any, sig: int = 3, html_out: bool = True) -> str:
    """A number with ``sig`` significant digits; scientific (×10^n) outside 0.001-1e6.

    None or a non-finite value gives an en dash.
    """
    if value is None:
        return "–"
    try:
        v = float(value)
    except (TypeError, ValueError):
        return _esc(value)
    if not math.isfinite(v):
        return "–"
    if v == 0:
        return "0"
    exponent = math.floor(math.log10(abs(v)))
    if -3 <= exponent < 6:
        decimals = max(0, sig - 1 - exponent)
        text = f"{round(v, decimals):,.{decimals}f}".replace(",", "\u2009")
        return text.replace("-", "\u2212")
    mantissa = v / 10**exponent
    if round(abs(mantissa), sig - 1) >= 10:
        mantissa /= 10
        exponent += 1
    m = f"{mantissa:.{sig - 1}f}".replace("-", "\u2212")
    e = str(exponent).replace("-", "\u2212")
    return f"{m}×10<sup>{e}</sup>" if html_out else f"{m}e{exponent}"


def _c(temperature_K: float) -> str:
    return format_number(float(temperature_K) - units.ZERO_CELSIUS_K, 3)


def _days(seconds: Any) -> str:
    if seconds is None:
        return "–"
    return format_number(float(seconds) / _SECONDS_PER_DAY)


def _per_day(k_per_s: Any) -> str:
    if k_per_s is None:
        return "–"
    return format_number(float(k_per_s) * _SECONDS_PER_DAY)


def _temperature_label(temperature_K: float) -> str:
    return f"{float(temperature_K) - units.ZERO_CELSIUS_K:.4g} °C"


# ------------------------------------------------------------------ rendering
_CSS = """
:root { --ink:#1e2430; --muted:#5b6472; --rule:#d9d4c7; --paper:#fffdf8; --accent:#7a3e1d; }
* { box-sizing: border-box; }
body { margin:0; background:#efece4; color:var(--ink);
  font: 15px/1.45 "Source Sans Pro","Segoe UI",Helvetica,Arial,sans-serif; }
main { max-width: 1060px; margin: 0 auto; background: var(--paper); padding: 28px 40px 40px;
  box-shadow: 0 0 0 1px #e2ddd0; }
h1 { font-size: 26px; margin: 0 0 4px; letter-spacing: .2px; }
h2 { font-size: 19px; margin: 34px 0 10px; padding-bottom: 4px;
  border-bottom: 2px solid var(--ink); }
h3 { font-size: 15.5px; margin: 18px 0 6px; }
.subtitle { color: var(--muted); margin: 0 0 14px; }
.meta { display:grid; grid-template-columns: max-content 1fr; gap: 2px 14px; font-size: 13.5px;
  padding: 10px 14px; border: 1px solid var(--rule); background:#fff; }
.meta dt { color: var(--muted); }
.meta dd { margin:0; font-family: ui-monospace, Menlo, Consolas, monospace; }
.caution { border-left: 6px solid var(--accent); background: #f7efe6; padding: 10px 14px;
  margin: 16px 0;
  font-size: 14px; }
.caution strong { color: var(--accent); letter-spacing: .4px; text-transform: uppercase;
  font-size: 12.5px;
  display:block; margin-bottom: 2px; }
.problem { border: 1px dashed #a33; background:#fff5f3; padding: 8px 12px; margin: 10px 0; }
table { border-collapse: collapse; width: 100%; font-size: 13.5px; margin: 6px 0 12px;
  font-variant-numeric: tabular-nums; }
th { text-align:left; font-weight:600; border-bottom: 1.5px solid var(--ink); padding: 4px 6px;
  vertical-align: bottom; }
td { border-bottom: 1px solid var(--rule); padding: 3px 6px; vertical-align: top; }
td.num, th.num { text-align: right; white-space: nowrap; }
td.nowrap { white-space: nowrap; }
tr.flagged td { background: #fbf3df; }
.flag { display:inline-block; white-space: normal; border:1px solid #8a6d1f; border-radius: 2px;
  padding: 0 4px; margin: 1px 2px 1px 0;
  font-size: 11.5px; color:#5d4a12; background:#fff8e1; }
figure { margin: 10px 0 18px; break-inside: avoid; }
svg.fr-plot { max-width: 100%; height: auto; }
.meta code, footer code { overflow-wrap: anywhere; }
figcaption { font-size: 13px; color: var(--muted); max-width: 900px; }
.arrhenius-grid { display:grid; grid-template-columns: repeat(auto-fill, minmax(480px, 1fr));
  gap: 0 16px; }
.arrhenius-grid figcaption { max-width: 470px; }
.runs-grid { display:grid; grid-template-columns: 1fr; gap: 6px; }
.run-card { border: 1px solid var(--rule); background:#fff; padding: 8px 10px;
  break-inside: avoid; }
.run-card .pair { display:flex; flex-wrap: wrap; gap: 4px; }
.run-card h3 { margin: 2px 0 4px; }
.small { font-size: 12.5px; color: var(--muted); }
footer { margin-top: 30px; font-size: 12.5px; color: var(--muted);
  border-top: 1px solid var(--rule); padding-top: 8px; }
code { font-family: ui-monospace, Menlo, Consolas, monospace; font-size: 12.5px;
  background:#f3f0e8; padding: 0 3px; }
@media print { body { background: #fff; } main { box-shadow:none; padding: 0; max-width: none; }
  h2 { break-after: avoid; } }
"""

_FLAG_TEXT = {
    "temperature_outside_range": "T outside measured range",
    "pH_outside_range": "pH outside measured range",
    "uncharacterised_pathway_matters": "uncharacterised pathway may matter",
    "ea_from_prior": "Ea from prior",
}


def render_report(data: ReportData) -> str:
    """Render the complete HTML report.

    Parameters
    ----------
    data : ReportData
        The inputs.

    Returns
    -------
    str
        A self-contained HTML document (UTF-8).
    """
    name = str(data.substance.get("name", "substance"))
    parts: list[str] = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>Hydrolysis report: {_esc(name)}</title>",
        f"<style>{_CSS}</style></head><body><main>",
        f"<h1>Hydrolysis report: {_esc(name)}</h1>",
        '<p class="subtitle">Abiotic hydrolysis rate constants measured in laboratory buffers, '
        "the fitted pH-temperature rate surface and field predictions, by fieldrate.</p>",
        _meta_block(data),
        _caution(),
        _summary_section(data),
        _surface_section(data),
        _profile_section(data),
        _arrhenius_section(data),
        _prediction_section(data),
        _runs_section(data),
        "<h2>Caution</h2>",
        _caution(),
        _footer(data),
        "</main></body></html>",
    ]
    return "\n".join(p for p in parts if p)


def _caution() -> str:
    return f'<div class="caution" role="note"><strong>Caution</strong>{_esc(CAUTION_TEXT)}</div>'


def _iso(moment: dt.datetime | None) -> str:
    if moment is None:
        return ""
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=dt.timezone.utc)
    return moment.astimezone(dt.timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")


def _meta_block(data: ReportData) -> str:
    s = data.substance
    rows = [("substance", _esc(s.get("name")))]
    for key, label in (("cas_rn", "CAS RN"), ("substance_class", "class"), ("smiles", "SMILES")):
        if s.get(key):
            rows.append((label, _esc(s[key])))
    rows += [
        ("data version", f'<span data-field="data-version">{_esc(data.data_version)}</span>'),
        ("data as of", _esc(_iso(data.as_of)) if data.as_of else
         "current data at generation time"),
        ("generated", f'<span data-field="generated-at">{_esc(_iso(data.generated_at))}</span>'),
        ("confidence level", f"{data.level * 100:g} %"),
    ]
    if data.reproduce_query:
        rows.append(("reproduce with", f"<code>GET {_esc(data.reproduce_query)}</code>"))
    body = "".join(f"<dt>{k}</dt><dd>{v}</dd>" for k, v in rows)
    return f'<dl class="meta">{body}</dl>'


def _summary_section(data: ReportData) -> str:
    out = ["<h2>Study summary</h2>"]
    if data.substance.get("notes"):
        out.append(f"<p>{_esc(data.substance['notes'])}</p>")
    if data.studies:
        out.append("<table><thead><tr><th>study</th><th>laboratory</th><th>test guideline</th>"
                   "<th>GLP</th><th>reference</th><th>dates</th><th class=num>runs</th></tr>"
                   "</thead><tbody>")
        for number, st in enumerate(data.studies, start=1):
            dates = " – ".join(str(d) for d in (st.get("start_date"), st.get("end_date")) if d)
            out.append(
                f"<tr><td>S{number}</td><td>{_esc(st.get('laboratory'))}</td>"
                f"<td>{_esc(st.get('test_guideline') or '–')}"
                f"</td><td>{'yes' if st.get('glp') else 'no'}</td>"
                f"<td>{_esc(st.get('reference') or '–')}</td><td>{_esc(dates or '–')}</td>"
                f"<td class=num>{_esc(st.get('n_runs', ''))}</td></tr>")
        out.append("</tbody></table>")
    temps = sorted({round(r.temperature_K, 2) for r in data.runs})
    phs = sorted({round(r.pH, 2) for r in data.runs})
    n_series = sum(1 for r in data.runs if r.kind == "series")
    out.append(
        f"<p>{len(data.runs)} run(s): {n_series} concentration-time series and "
        f"{len(data.runs) - n_series} reported rate constant(s); temperatures "
        f"{', '.join(_temperature_label(t) for t in temps) or '–'}; pH "
        f"{', '.join(f'{p:g}' for p in phs) or '–'}.</p>")
    study_no = {_study_text(st): f"S{i}" for i, st in enumerate(data.studies, start=1)}
    several = len(data.studies) > 1
    out.append(
        "<table><thead><tr><th>run</th>" + ("<th>study</th>" if several else "") +
        "<th class=num>T [°C]</th><th class=num>pH</th>"
        "<th>buffer</th><th class=num>I [mol/L]</th><th>data</th><th>model</th>"
        "<th class=num>k [1/d]</th><th class=num>DT50 [d]</th>"
        f"<th class=num>DT50 {data.level * 100:g} % CI [d]</th><th class=num>χ² error [%]</th>"
        "</tr></thead><tbody>")
    for r in sorted(data.runs, key=lambda r: (r.temperature_K, r.pH, r.label)):
        if r.kind == "series":
            what = f"{len(r.time_s)} points"
            if r.fit is not None:
                iv = r.fit.interval(data.level)
                ci = f"{_days(iv.dt50_low_s)} – {_days(iv.dt50_high_s)}"
                dt50 = _days(r.fit.dt50_s)
                chi = format_number(r.fit.chi2_error_level_percent, 2)
            else:
                ci, dt50, chi = "–", "–", "–"
                what += " (not fitted)"
            model = r.model
        else:
            what, model, chi = "reported k", "–", "–"
            dt50 = _days(math.log(2) / r.k_per_s) if r.k_per_s else "–"
            if r.k_per_s and r.se_ln_k:
                z = _z(data.level)
                ci = (f"{_days(math.log(2) / (r.k_per_s * math.exp(z * r.se_ln_k)))} – "
                      f"{_days(math.log(2) / (r.k_per_s * math.exp(-z * r.se_ln_k)))}")
            else:
                ci = "–"
        ionic = format_number(r.ionic_strength_M, 2) if r.ionic_strength_M else "–"
        out.append(
            f"<tr><td>{_esc(r.label)}</td>"
            + (f"<td>{_esc(study_no.get(r.study, r.study))}</td>" if several else "") +
            f"<td class=num>{_c(r.temperature_K)}"
            f"</td><td class=num>{format_number(r.pH, 3)}</td><td>{_esc(r.buffer or '–')}</td>"
            f"<td class=num>{ionic}</td>"
            f"<td class=nowrap>{what}</td><td>{model}</td><td class=num>{_per_day(r.k_per_s)}</td>"
            f"<td class=num>{dt50}</td><td class=num>{ci}</td><td class=num>{chi}</td></tr>")
    out.append("</tbody></table>")
    failed = [r for r in data.runs if r.fit_error]
    for r in failed:
        out.append(f'<div class="problem">Run {_esc(r.label)} could not be fitted: '
                   f"{_esc(r.fit_error)}</div>")
    return "\n".join(out)


def _study_text(study: Mapping[str, Any]) -> str:
    """The short description of a study that :class:`RunView` carries."""
    ref = study.get("reference")
    return f"{study.get('laboratory')}" + (f", {ref}" if ref else "")


def _z(level: float) -> float:
    from scipy import stats

    return float(stats.norm.ppf(0.5 + level / 2.0))


def _parameter_unit(name: str) -> str:
    if name.startswith("ln_k_ref_"):
        pathway = name[len("ln_k_ref_"):]
        return f"ln of {PATHWAY_UNITS.get(pathway, '')}"
    if name.endswith("_J_per_mol_K"):
        return "J/(mol·K)"
    if name.endswith("_J_per_mol"):
        return "J/mol"
    return "–"


def _surface_section(data: ReportData) -> str:
    out = ["<h2>Rate surface</h2>"]
    surf = data.surface
    if surf is None:
        out.append(f'<div class="problem">No rate surface could be fitted: '
                   f"{_esc(data.surface_error or 'no usable runs')}</div>")
        return "\n".join(out)
    model = "Arrhenius" if surf.temperature_model == "arrhenius" else "Eyring"
    out.append(
        "<p>k<sub>obs</sub> = k<sub>A</sub>·[H<sup>+</sup>] + k<sub>N</sub> + "
        "k<sub>B</sub>·[OH<sup>−</sup>], each pathway with its own "
        f"{model} temperature dependence. Pathways fitted: <b>{_esc(', '.join(surf.pathways))}</b>"
        f"; {surf.n_measurements} rate constants, {surf.dof} degrees of freedom; between-run "
        f"scatter σ(ln k) = {format_number(surf.residual_scale)}.</p>")
    if getattr(surf, "uncharacterised_pathways", ()):
        out.append(f"<p>Not characterised by the data: "
                   f"{_esc(', '.join(surf.uncharacterised_pathways))}.</p>")
    if getattr(surf, "ea_from_prior", ()):
        out.append(f"<p>Activation energy taken from the prior for: "
                   f"{_esc(', '.join(surf.ea_from_prior))}.</p>")
    if data.fit_options:
        opts = ", ".join(f"{k} = {v}" for k, v in data.fit_options.items())
        out.append(f'<p class="small">Fit options: {_esc(opts)}.</p>')
    try:
        interval = surf.interval(data.level)
        lows, highs = _interval_arrays(interval, surf.parameter_names)
    except KineticsError:
        lows = highs = [None] * len(surf.parameter_names)
    cov = np.asarray(surf.covariance, dtype=float)
    out.append(f"<table><thead><tr><th>parameter</th><th>unit</th><th class=num>estimate</th>"
               f"<th class=num>standard error</th><th class=num>{data.level * 100:g} % CI</th>"
               "</tr></thead><tbody>")
    for i, pname in enumerate(surf.parameter_names):
        se = math.sqrt(cov[i, i]) if cov[i, i] >= 0 else None
        ci = (f"{format_number(lows[i], 4)} – {format_number(highs[i], 4)}"
              if lows[i] is not None else "–")
        out.append(f"<tr><td><code>{_esc(pname)}</code></td><td>{_parameter_unit(pname)}</td>"
                   f"<td class=num>{format_number(surf.estimates[i], 4)}</td>"
                   f"<td class=num>{format_number(se, 3)}</td><td class=num>{ci}</td></tr>")
    out.append("</tbody></table>")
    cands = getattr(surf, "candidates", None)
    if cands:
        out.append("<h3>Pathway subsets compared</h3><table><thead><tr><th>pathways</th>"
                   "<th class=num>AICc</th><th>note</th></tr></thead><tbody>")
        for cand in cands:
            paths = _get(cand, "pathways")
            aicc = _get(cand, "aicc")
            paths_text = ", ".join(paths) if isinstance(paths, (list, tuple)) else str(paths)
            chosen = tuple(paths) == tuple(surf.pathways) if isinstance(paths, (list, tuple)) \
                else False
            note = "" if _get(cand, "identifiable") in (None, True) else \
                f"not identifiable: {_get(cand, 'reason') or 'see the fit'}"
            out.append(f"<tr><td class=nowrap>{_esc(paths_text)}"
                       f"{' (chosen)' if chosen else ''}</td>"
                       f"<td class=num>{format_number(aicc, 4)}</td>"
                       f'<td class="small">{_esc(note)}</td></tr>')
        out.append("</tbody></table>")
    return "\n".join(out)


def _get(obj: Any, key: str) -> Any:
    if isinstance(obj, Mapping):
        return obj.get(key)
    return getattr(obj, key, None)


def _interval_arrays(interval: Any, names: Sequence[str]) -> tuple[list, list]:
    low = _get(interval, "lower")
    high = _get(interval, "upper")
    if low is not None and high is not None:
        return [float(v) for v in low], [float(v) for v in high]
    if isinstance(interval, Mapping):
        pairs = [interval.get(n) for n in names]
        return ([None if p is None else float(p[0]) for p in pairs],
                [None if p is None else float(p[1]) for p in pairs])
    return [None] * len(names), [None] * len(names)


def _ph_grid(data: ReportData) -> np.ndarray:
    phs = [r.pH for r in data.runs] + [c.pH for c in data.conditions]
    lo = max(0.0, math.floor(min(phs, default=4.0)) - 2.0)
    hi = min(14.0, math.ceil(max(phs, default=9.0)) + 2.0)
    return np.linspace(lo, hi, int(round((hi - lo) / 0.05)) + 1)


def _profile_section(data: ReportData) -> str:
    out = ["<h2>pH-rate profile</h2>"]
    surf = data.surface
    grid = _ph_grid(data)
    temps = sorted({round(r.temperature_K, 2) for r in data.runs})
    series: list[svg.Series] = []
    for i, t in enumerate(temps):
        pts = [r for r in data.runs if round(r.temperature_K, 2) == t and r.k_per_s]
        if surf is not None:
            k = surf.rate_per_s(np.full_like(grid, t), grid)
            series.append(svg.Series(f"fit {_temperature_label(t)}", grid.tolist(),
                                     (np.asarray(k) * _SECONDS_PER_DAY).tolist(), "line", i))
        series.append(svg.Series(f"measured {_temperature_label(t)}", [r.pH for r in pts],
                                 [r.k_per_s * _SECONDS_PER_DAY for r in pts], "points", i))
    note = ("points: rate constants of the runs (fitted or reported); lines: fitted surface"
            if surf is not None else "points: rate constants of the runs; no surface fitted")
    out.append(_figure(svg.plot(
        series, x_axis=svg.Axis("pH", limits=(float(grid[0]), float(grid[-1]))),
        y_axis=svg.Axis("k_obs [1/d] (log scale)", log=True),
        title="Measured temperatures", width=960, height=420, note=note,
        plot_id="profile-measured"),
        "pH-rate profile at each measured temperature. Colours, dash patterns and marker "
        "shapes distinguish the temperatures."))
    if surf is None:
        return "\n".join(out)

    from kinetics.prediction import predict

    tf = float(data.field_temperature_K)
    pred = predict(surf, np.full_like(grid, tf), grid, level=data.level)
    k_day = np.asarray(pred.k_per_s) * _SECONDS_PER_DAY
    band = svg.Band(f"{data.level * 100:g} % confidence band", grid.tolist(),
                    (np.asarray(pred.k_ci_low_per_s) * _SECONDS_PER_DAY).tolist(),
                    (np.asarray(pred.k_ci_high_per_s) * _SECONDS_PER_DAY).tolist())
    pi_band = svg.Series(f"{data.level * 100:g} % prediction limits", grid.tolist(),
                         (np.asarray(pred.k_pi_low_per_s) * _SECONDS_PER_DAY).tolist(),
                         "line", 6, width=1.0)
    pi_high = svg.Series("", grid.tolist(),
                         (np.asarray(pred.k_pi_high_per_s) * _SECONDS_PER_DAY).tolist(),
                         "line", 6, width=1.0)
    field_series = [svg.Series(f"total k at {_temperature_label(tf)}", grid.tolist(),
                               k_day.tolist(), "line", 0, width=2.6)]
    shares = pred.contributions
    style_of = {"acid": 1, "neutral": 2, "base": 3}
    for pathway in surf.pathways:
        frac = np.asarray(shares[pathway], dtype=float)
        field_series.append(svg.Series(f"{pathway} pathway", grid.tolist(),
                                       (frac * k_day).tolist(), "line", style_of.get(pathway, 4),
                                       width=1.4))
    field_series += [pi_band, pi_high]
    lo_ph, hi_ph = surf.pH_range
    # the y range follows the total rate; pathway parts far below it are clipped
    k_lo = float(np.min(np.asarray(pred.k_pi_low_per_s))) * _SECONDS_PER_DAY / 30.0
    k_hi = float(np.max(np.asarray(pred.k_pi_high_per_s))) * _SECONDS_PER_DAY * 2.0
    out.append(_figure(svg.plot(
        field_series, bands=[band],
        x_axis=svg.Axis("pH", limits=(float(grid[0]), float(grid[-1]))),
        y_axis=svg.Axis("k_obs [1/d] (log scale)", log=True, limits=(k_lo, k_hi)),
        title=f"Field temperature {_temperature_label(tf)}", width=960, height=420,
        note=f"pathway lines: each pathway's part of k_obs; measured pH range "
             f"{lo_ph:g}–{hi_ph:g}", plot_id="profile-field"),
        f"pH-rate profile at {_temperature_label(tf)} with the {data.level * 100:g} % "
        "confidence band of k (shaded), the prediction limits of a new measurement (thin "
        "dotted lines) and the contribution of each pathway."))
    # share of each pathway
    share_series = [svg.Series(f"{p} share", grid.tolist(),
                               (np.asarray(shares[p], dtype=float) * 100).tolist(), "line",
                               style_of.get(p, 4)) for p in surf.pathways]
    out.append(_figure(svg.plot(
        share_series, x_axis=svg.Axis("pH", limits=(float(grid[0]), float(grid[-1]))),
        y_axis=svg.Axis("share of k_obs [%]", limits=(0.0, 100.0)),
        title=f"Pathway contributions at {_temperature_label(tf)}", width=960, height=300,
        plot_id="contributions"),
        "Share of each pathway in the fitted rate constant at the field temperature."))
    return "\n".join(out)


def _figure(svg_markup: str, caption: str) -> str:
    return f"<figure>{svg_markup}<figcaption>{_esc(caption)}</figcaption></figure>"


def _arrhenius_section(data: ReportData) -> str:
    surf = data.surface
    if surf is None:
        return ""
    out = ["<h2>Temperature dependence per pathway</h2>", '<div class="arrhenius-grid">']
    temps = [r.temperature_K for r in data.runs] + [data.field_temperature_K] + \
        [c.temperature_K for c in data.conditions]
    t_lo = max(units.LIQUID_WATER_MIN_K, min(temps) - 5.0)
    t_hi = min(units.LIQUID_WATER_MAX_K, max(temps) + 5.0)
    T = np.linspace(t_lo, t_hi, 80)
    inv = 1000.0 / T
    marks = [(1000.0 / (c + units.ZERO_CELSIUS_K), f"{c:g}")
             for c in range(0, 101, 10)
             if t_lo <= c + units.ZERO_CELSIUS_K <= t_hi]
    model = "Arrhenius" if surf.temperature_model == "arrhenius" else "Eyring"
    for pathway in surf.pathways:
        try:
            ln_k, lo, hi = pathway_ln_k(surf, pathway, T, data.level)
        except (KineticsError, KeyError) as exc:
            out.append(f'<div class="problem">The {_esc(pathway)} pathway cannot be drawn: '
                       f"{_esc(exc)}</div>")
            continue
        points = pathway_points(surf, pathway, data.runs)
        unit = PATHWAY_UNITS.get(pathway, "")
        series = [svg.Series(f"{model} fit", inv.tolist(), ln_k.tolist(), "line", 0, width=2.2)]
        by_temp: dict[float, list[float]] = {}
        for run, value in points:
            by_temp.setdefault(1000.0 / run.temperature_K, []).append(value)
        series.append(svg.Series("runs dominated by this pathway",
                                 [x for x, vs in by_temp.items() for _ in vs],
                                 [v for vs in by_temp.values() for v in vs], "points", 1))
        tf = data.field_temperature_K
        ln_f, _, _ = pathway_ln_k(surf, pathway, [tf], data.level)
        series.append(svg.Series(f"field {_temperature_label(tf)}", [1000.0 / tf],
                                 [float(ln_f[0])], "points", 3))
        flags = []
        if pathway in getattr(surf, "ea_from_prior", ()):
            flags.append("activation energy from the prior")
        note = ("points: share of the measured k attributed to this pathway (runs where it "
                "carries ≥ 50 %)" if points else "no run is dominated by this pathway")
        if flags:
            note += f"; {flags[0]}"
        out.append(_figure(svg.plot(
            series,
            bands=[svg.Band(f"{data.level * 100:g} % confidence band", inv.tolist(),
                            lo.tolist(), hi.tolist())],
            x_axis=svg.Axis("1000 / T [1/K]", limits=(float(inv[-1]), float(inv[0]))),
            y_axis=svg.Axis(f"ln(k_{pathway[0].upper()} / ({unit}))"),
            title=f"{pathway.capitalize()} pathway", width=480, height=340, note=note,
            top_axis=("temperature [°C]", marks), plot_id=f"arrhenius-{pathway}",
            legend_position="bottom"),
            f"{model} plot of the {pathway} pathway rate constant "
            f"k_{pathway[0].upper()} [{unit}] against inverse temperature, with its "
            f"{data.level * 100:g} % confidence band."))
    out.append("</div>")
    return "\n".join(out)


def _prediction_section(data: ReportData) -> str:
    out = ["<h2>Field predictions</h2>"]
    surf = data.surface
    if surf is None:
        out.append('<div class="problem">No predictions: the rate surface could not be fitted.'
                   "</div>")
        return "\n".join(out)
    if not data.conditions:
        out.append("<p>No field conditions were requested.</p>")
        return "\n".join(out)
    from kinetics.prediction import predict

    conds = data.conditions
    pred = predict(
        surf, np.array([c.temperature_K for c in conds]), np.array([c.pH for c in conds]),
        ionic_strength_M=np.array([c.ionic_strength_M for c in conds]),
        salinity=np.array([c.salinity for c in conds]), level=data.level)
    lvl = f"{data.level * 100:g} %"
    out.append(
        f"<p>Confidence intervals (CI) describe the uncertainty of the fitted rate; prediction "
        f"intervals (PI) add the scatter between runs. Level {lvl}, {_esc(pred.method)} "
        "method.</p>")
    out.append(
        "<table class=predictions><thead><tr><th>condition</th><th class=num>T [°C]</th>"
        "<th class=num>pH</th><th class=num>salinity</th>"
        f"<th class=num>k [1/d]<br><span class=small>{lvl} CI</span></th>"
        f"<th class=num>DT50 [d]<br><span class=small>{lvl} CI</span></th>"
        f"<th class=num>DT50 {lvl} PI [d]</th>"
        f"<th class=num>DT90 [d]<br><span class=small>{lvl} PI</span></th>"
        "<th>dominant pathway</th><th>flags</th></tr></thead><tbody>")
    for i, c in enumerate(conds):
        flags = [text for key, text in _FLAG_TEXT.items()
                 if key in pred.flags and bool(np.asarray(pred.flags[key])[i])]
        cls = ' class="flagged"' if flags else ""
        flag_html = "".join(f'<span class="flag">{_esc(f)}</span>' for f in flags) or "–"
        out.append(
            f"<tr{cls}><td>{_esc(c.label)}</td><td class=num>{_c(c.temperature_K)}</td>"
            f"<td class=num>{format_number(c.pH, 3)}</td>"
            f"<td class=num>{format_number(c.salinity, 3) if c.salinity else '–'}</td>"
            f"<td class=num>{_per_day(pred.k_per_s[i])}<br><span class=small>"
            f"{_per_day(pred.k_ci_low_per_s[i])} – {_per_day(pred.k_ci_high_per_s[i])}</span></td>"
            f"<td class=num><b>{_days(pred.dt50_s[i])}</b><br><span class=small>"
            f"{_days(pred.dt50_ci_low_s[i])} – {_days(pred.dt50_ci_high_s[i])}</span></td>"
            f"<td class=num>{_days(pred.dt50_pi_low_s[i])} – {_days(pred.dt50_pi_high_s[i])}</td>"
            f"<td class=num>{_days(pred.dt90_s[i])}<br><span class=small>"
            f"{_days(pred.dt90_pi_low_s[i])} – {_days(pred.dt90_pi_high_s[i])}</span></td>"
            f"<td>{_esc(pred.dominant_pathway[i])}</td><td>{flag_html}</td></tr>")
    out.append("</tbody></table>")
    t_lo, t_hi = surf.temperature_range_K
    p_lo, p_hi = surf.pH_range
    out.append(f'<p class="small">Measured range: {_temperature_label(t_lo)} to '
               f"{_temperature_label(t_hi)}, pH {p_lo:g} to {p_hi:g}. Rows outside it are "
               "extrapolations and are flagged.</p>")
    return "\n".join(out)


def _runs_section(data: ReportData) -> str:
    out = ["<h2>Fits of the individual runs</h2>"]
    series_runs = [r for r in sorted(data.runs, key=lambda r: (r.temperature_K, r.pH, r.label))
                   if r.kind == "series"]
    if not series_runs:
        out.append("<p>No concentration-time series: all runs report rate constants.</p>")
        return "\n".join(out)
    out.append('<p class="small">Left: measured concentrations and the fitted curve. '
               "Right: residuals (measured − fitted) in the same unit.</p>")
    out.append('<div class="runs-grid">')
    for r in series_runs:
        out.append(_run_card(r, data.level))
    out.append("</div>")
    return "\n".join(out)


def _times_in(time_s: Any, unit: str) -> list[float]:
    """Times [s] converted to ``unit`` as a list (empty input gives an empty list)."""
    t = np.asarray(time_s, dtype=float)
    if t.size == 0:
        return []
    return np.atleast_1d(units.time_from_s(t, unit)).tolist()


def _run_card(r: RunView, level: float) -> str:
    factor = r.concentration_factor
    t_unit = r.time_unit
    c_unit = r.concentration_unit or "stored unit"
    t_disp = _times_in(r.time_s, t_unit)
    c_disp = [c * factor for c in r.concentration]
    quant = [(t, c) for t, c, b in zip(t_disp, c_disp, r.below_loq or [False] * len(t_disp))
             if not b]
    blq = [(t, c) for t, c, b in zip(t_disp, c_disp, r.below_loq or [False] * len(t_disp)) if b]
    fit_series_: list[svg.Series] = [
        svg.Series("measured", [t for t, _ in quant], [c for _, c in quant], "points", 0)]
    if blq:
        fit_series_.append(svg.Series("below LOQ (as reported)", [t for t, _ in blq],
                                      [c for _, c in blq], "points", 1))
    head = (f"<h3>{_esc(r.label)} · {_temperature_label(r.temperature_K)} · pH {r.pH:g}</h3>")
    if r.fit is None:
        return (f'<div class="run-card">{head}<div class="problem">Not fitted: '
                f"{_esc(r.fit_error)}</div></div>")
    fit = r.fit
    t_max = max(r.time_s) if r.time_s else 1.0
    t_s = np.linspace(0.0, t_max, 120)
    curve = np.asarray(fit.fitted_at(t_s), dtype=float) * factor
    fit_series_.append(svg.Series(f"{fit.model} fit", _times_in(t_s, t_unit), curve.tolist(),
                                  "line", 0))
    fit_svg = svg.plot(fit_series_, x_axis=svg.Axis(f"time [{t_unit}]"),
                       y_axis=svg.Axis(f"concentration [{c_unit}]"), title="Fit",
                       width=500, height=270, plot_id=f"run-fit-{r.run_uid}")
    res_t = _times_in(fit.time_s, t_unit)
    res = [float(v) * factor for v in fit.residuals]
    res_svg = svg.plot([svg.Series("residual", res_t, res, "points", 3)],
                       x_axis=svg.Axis(f"time [{t_unit}]"),
                       y_axis=svg.Axis(f"residual [{c_unit}]", zero_line=True), title="Residuals",
                       width=420, height=270, legend=False, plot_id=f"run-res-{r.run_uid}")
    iv = fit.interval(level)
    loq_note = ""
    if fit.n_below_loq_set:
        loq_note += f"; {fit.n_below_loq_set} below LOQ used at LOQ/2"
    if fit.n_below_loq_dropped:
        loq_note += f"; {fit.n_below_loq_dropped} below LOQ dropped"
    info = (f'<p class="small">{_esc(r.study)}; model {fit.model} ({_esc(fit.method)}, '
            f"{_esc(fit.error_model)} error); k = {_per_day(fit.k_per_s)} 1/d; DT50 = "
            f"{_days(fit.dt50_s)} d ({level * 100:g} % CI {_days(iv.dt50_low_s)} – "
            f"{_days(iv.dt50_high_s)} d); DT90 = {_days(fit.dt90_s)} d; χ² error level "
            f"{format_number(fit.chi2_error_level_percent, 2)} %; {fit.n_points} points"
            f"{loq_note}"
            ".</p>")
    return (f'<div class="run-card" data-run="{_esc(r.run_uid)}">{head}{info}'
            f'<div class="pair">{fit_svg}{res_svg}</div></div>')


def _footer(data: ReportData) -> str:
    reproduce = (f" Reproduce it with <code>GET {_esc(data.reproduce_query)}</code>."
                 if data.reproduce_query else "")
    return (f"<footer>Generated {_esc(_iso(data.generated_at))} from data version "
            f"<code>{_esc(data.data_version)}</code>"
            f"{' as of ' + _esc(_iso(data.as_of)) if data.as_of else ''}.{reproduce} "
            "Plots: lines are fits, points are measurements; series differ by dash pattern "
            "and marker shape so the report can be printed in grey scale.</footer>")
