"""From stored (or posted) runs to a fitted rate surface and its diagnostics.

This module only arranges data for :mod:`kinetics` and collects its results: each series
is fitted with :func:`kinetics.series.fit_series`, each run becomes a
:class:`kinetics.surface.RateMeasurement`, and :func:`kinetics.surface.fit_surface` fits
the surface. The same code serves stored substances and the stateless calculation, so
both give the same numbers for the same data.
"""

from __future__ import annotations

import json
import logging
import math
from dataclasses import dataclass, field
from typing import Any, Optional, Sequence

import numpy as np

from kinetics import units
from kinetics.caution import CAUTION_TEXT
from kinetics.errors import DataError, FitError, KineticsError
from kinetics.series import fit_series
from kinetics.surface import RateMeasurement, SurfaceFit, fit_surface

__all__ = [
    "RunInput",
    "FitResult",
    "run_input_from_model",
    "run_input_from_payload",
    "compute_fit",
    "check_posted_runs",
    "stored_surface",
    "options_key",
    "model_payload",
    "CHI2_FLAG_PERCENT",
    "MAX_SE_LN_K_FITTED",
    "excluded_runs",
    "se_imputed_runs",
]

log = logging.getLogger("fieldrate.service")

#: chi-square error level [%] above which a series fit is flagged (common practice, no source)
CHI2_FLAG_PERCENT = 15.0

#: a series whose fitted ln k has a standard error above this shows no measurable decline
#: and is left out of the surface, as a laboratory would report it (the same rule as the
#: study simulations of :mod:`kinetics.design`; common practice, no source)
MAX_SE_LN_K_FITTED = 1.0

#: one-sided confidence level of the upper bound on k quoted for an excluded run
UPPER_BOUND_LEVEL = 0.95

#: fallback detection limit: a run is taken to show a decline once it lost this fraction of
#: its initial concentration over its duration (common practice, no source)
DETECTABLE_LOSS_FRACTION = 0.10

from kinetics.units import SECONDS_PER_DAY as _SECONDS_PER_DAY  # noqa: E402


@dataclass(frozen=True)
class RunInput:
    """One run as the fit needs it, in SI / canonical units."""

    label: str
    temperature_K: float
    pH: float
    ionic_strength_M: float
    kind: str
    run_uid: Optional[str] = None
    version: Optional[int] = None
    series_model: Optional[str] = None
    time_s: tuple[float, ...] = ()
    concentration: tuple[float, ...] = ()
    below_loq: tuple[bool, ...] = ()
    loq: Optional[float] = None
    k_per_s: Optional[float] = None
    dt50_s: Optional[float] = None
    se_ln_k: Optional[float] = None


@dataclass(frozen=True)
class FitResult:
    """A surface fit plus the per-run diagnostics shown with it (JSON-safe)."""

    surface: SurfaceFit
    runs: list[dict[str, Any]] = field(default_factory=list)

    def diagnostics_json(self) -> str:
        return json.dumps(self.runs, allow_nan=False)


def _run_label(t_K: float, pH: float, uid: Optional[str], version: Optional[int], index: Optional[int]) -> str:
    where = f"{units.kelvin_to_celsius(t_K):.1f} °C, pH {pH:.2f}"
    if uid is not None:
        return f"run {uid} v{version} ({where})"
    return f"runs[{index}] ({where})"


def run_input_from_model(run: Any) -> RunInput:
    """A :class:`RunInput` from a stored :class:`service.models.Run` version."""
    obs = run.observations
    return RunInput(
        label=_run_label(run.temperature_K, run.pH, run.run_uid, run.version, None),
        temperature_K=float(run.temperature_K),
        pH=float(run.pH),
        ionic_strength_M=float(run.ionic_strength_M or 0.0),
        kind=run.kind,
        run_uid=run.run_uid,
        version=run.version,
        series_model=run.series_model,
        time_s=tuple(float(o.time_s) for o in obs),
        concentration=tuple(float(o.concentration) for o in obs),
        below_loq=tuple(bool(o.below_loq) for o in obs),
        loq=run.loq,
        k_per_s=run.k_per_s,
        dt50_s=run.dt50_s,
        se_ln_k=run.se_ln_k,
    )


def run_input_from_payload(data: Any, index: int) -> RunInput:
    """A :class:`RunInput` from a validated :class:`service.schemas.RunData` (not stored)."""
    t_K = data.temperature_K_si
    common = dict(
        label=_run_label(t_K, data.pH, None, None, index),
        temperature_K=t_K,
        pH=float(data.pH),
        ionic_strength_M=float(data.ionic_strength_M or 0.0),
        series_model=data.series_model,
    )
    if data.series is not None:
        s = data.series
        return RunInput(
            kind="series",
            time_s=tuple(float(v) for v in s.time_s),
            concentration=tuple(float(v) for v in s.concentration_canonical),
            below_loq=tuple(bool(b) for b in (s.below_loq or [False] * len(s.time))),
            loq=s.loq_canonical,
            **common,
        )
    r = data.rate
    return RunInput(kind="rate", k_per_s=r.k_per_s, dt50_s=r.dt50_s, se_ln_k=r.se_ln_k, **common)


def options_key(options: dict[str, Any]) -> str:
    """Canonical text of the fit options (the cache key besides the data version)."""
    return json.dumps(options, sort_keys=True, separators=(",", ":"))


def _finite(x: Any) -> Optional[float]:
    """A float, or None where the value is not finite (never NaN in JSON)."""
    if x is None:
        return None
    v = float(x)
    return v if math.isfinite(v) else None


def _finite_list(a: Any) -> list[Optional[float]]:
    return [_finite(v) for v in np.asarray(a, dtype=float).ravel()]


def _with_label(exc: KineticsError, label: str) -> KineticsError:
    return type(exc)(f"{label}: {exc}")


def _series_fit(run: RunInput, series_model: str, error_model: str):
    model = (run.series_model or "SFO") if series_model == "run" else series_model
    any_below = any(run.below_loq)
    try:
        fit = fit_series(
            np.asarray(run.time_s),
            np.asarray(run.concentration),
            time_unit="s",
            model=model,
            error_model=error_model,
            loq=run.loq,
            below_loq=np.asarray(run.below_loq, dtype=bool) if any_below else None,
        )
    except KineticsError as exc:
        raise _with_label(exc, run.label) from None
    return model, fit


def _format_duration(seconds: float) -> str:
    if seconds >= _SECONDS_PER_DAY:
        return f"{seconds / _SECONDS_PER_DAY:.3g} d"
    return f"{seconds / 3600.0:.3g} h"


def _decline_evidence(run: RunInput) -> dict[str, Any]:
    """What a log-linear regression of ln C on t says about the decline of a series.

    Uses the quantified samples (concentration > 0, not below the LOQ). Returns
    ``significant`` (the one-sided lower confidence bound on k is above 0), the one-sided
    upper bound on k [1/s] (None when it cannot be computed or is not positive) and the
    duration of the run [s].

    .. math:: \\ln C = a - k t, \\quad k_{up} = \\hat k + t_{0.95,\\,n-2}\\,\\mathrm{se}(\\hat k)

    (ordinary least squares with a Student t quantile; textbook regression, e.g. Draper and
    Smith (1998), Applied Regression Analysis, 3rd ed., Wiley, ch. 1.)
    """
    from scipy import stats

    t_all = np.asarray(run.time_s, dtype=float)
    c = np.asarray(run.concentration, dtype=float)
    below = np.asarray(run.below_loq, dtype=bool) if run.below_loq else np.zeros(c.size, dtype=bool)
    duration = float(t_all.max() - t_all.min()) if t_all.size else 0.0
    keep = np.isfinite(c) & (c > 0) & ~below
    t, y = t_all[keep], np.log(c[keep]) if keep.any() else np.array([])
    out: dict[str, Any] = {"significant": None, "k_upper_per_s": None, "duration_s": duration}
    if t.size < 3 or np.ptp(t) == 0:
        return out
    tc = t - t.mean()
    sxx = float(tc @ tc)
    slope = float(tc @ (y - y.mean())) / sxx
    resid = y - y.mean() - slope * tc
    dof = t.size - 2
    se = math.sqrt(max(float(resid @ resid) / dof, 0.0) / sxx)
    q = float(stats.t.ppf(UPPER_BOUND_LEVEL, dof))
    k_hat = -slope
    out["significant"] = bool(k_hat - q * se > 0)
    upper = k_hat + q * se
    out["k_upper_per_s"] = upper if math.isfinite(upper) and upper > 0 else None
    return out


def _no_decline_entry(run: RunInput, evidence: dict[str, Any], why: str) -> dict[str, Any]:
    """Diagnostics of a series left out of the surface because it shows no measurable decline."""
    duration = evidence["duration_s"]
    k_up = evidence["k_upper_per_s"]
    if k_up is not None:
        basis = (
            f"one-sided {UPPER_BOUND_LEVEL:.0%} upper confidence bound of a log-linear "
            "regression of ln(concentration) on time"
        )
    elif duration > 0:
        k_up = -math.log(1.0 - DETECTABLE_LOSS_FRACTION) / duration
        basis = (
            f"less than {DETECTABLE_LOSS_FRACTION:.0%} loss over the run duration "
            "(common practice, no source)"
        )
    else:
        basis = None
    over = f" over {_format_duration(duration)}" if duration > 0 else ""
    reason = f"no measurable decline{over}"
    if k_up is not None:
        reason += (
            f": k is below about {k_up:.2g} 1/s (DT50 above about "
            f"{_format_duration(math.log(2.0) / k_up)}; {basis})"
        )
    reason += f". {why} The run is kept as stored but left out of the rate surface."
    return {
        "status": "excluded",
        "exclusion_reason": reason,
        "k_upper_bound_per_s": _finite(k_up),
        "k_upper_bound_basis": basis,
        "dt50_lower_bound_s": _finite(math.log(2.0) / k_up) if k_up else None,
        "series_model": None,
        "k_per_s": None, "se_ln_k": None, "dt50_s": None, "dt90_s": None,
        "chi2_error_level_percent": None,
        "n_points": len(run.time_s), "dof": None, "parameters": [], "aicc": None,
        "time_s": _finite_list(run.time_s), "observed": _finite_list(run.concentration),
        "fitted": [], "residuals": [], "p_rate_positive": {},
        "ln_k_residual_from_surface": None,
    }


def excluded_runs(runs: Sequence[dict[str, Any]]) -> list[dict[str, Any]]:
    """The runs of a fit's diagnostics that were left out of the surface, with the reason."""
    return [
        {"run_uid": d.get("run_uid"), "version": d.get("version"), "label": d["label"],
         "reason": d.get("exclusion_reason")}
        for d in runs if d.get("status") == "excluded"
    ]


def check_posted_runs(runs: Sequence[Any], *, max_runs: int, max_points: int) -> None:
    """Refuse (413) more runs, or a longer series, than one request may send for a fit.

    Raises
    ------
    service.errors.TooLarge
        More than ``max_runs`` runs, or a series with more than ``max_points`` points.
    """
    from service.errors import TooLarge

    if len(runs) > max_runs:
        raise TooLarge(f"{len(runs)} runs were sent; at most {max_runs} are accepted")
    for i, run in enumerate(runs):
        if run.series is not None and len(run.series.time) > max_points:
            raise TooLarge(
                f"runs[{i}] has {len(run.series.time)} points; at most "
                f"{max_points} are accepted per series",
                loc=["body", "runs", i, "series", "time"],
            )


def stored_surface(surface: SurfaceFit) -> SurfaceFit:
    """``surface`` after the JSON round trip of a stored fit.

    A fit of posted runs goes through it so that it gives the same numbers, to the last
    digit, as the stored fit of the same runs.
    """
    return SurfaceFit.from_dict(json.loads(json.dumps(surface.to_dict())))


def compute_fit(runs: Sequence[RunInput], **options: Any) -> FitResult:
    """Fit every series, then the surface, and collect the diagnostics.

    Keyword arguments as for :func:`_compute_fit`. A numerical failure that the kinetics
    package did not foresee is reported as a :class:`kinetics.errors.FitError` (a 422
    with an explanation), never as a server error.
    """
    try:
        return _compute_fit(runs, **options)
    except KineticsError:
        raise
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        log.exception("unforeseen numerical failure in a fit")
        raise FitError(
            f"the fit failed numerically ({type(exc).__name__}: {exc}); check the runs for "
            "outlying values, or try other fit options"
        ) from exc


def _compute_fit(
    runs: Sequence[RunInput],
    *,
    temperature_model: str,
    pathways: str,
    series_model: str,
    error_model: str,
    ea_prior_J_per_mol: Optional[tuple[float, float]],
    reference_temperature_K: float,
) -> FitResult:
    """Fit every series, then the surface, and collect the diagnostics.

    Raises
    ------
    DataError
        Fewer than two runs, or a run whose data cannot be fitted (the message names it).
    kinetics.errors.FitError
        The surface cannot be characterised with these data and options.
    """
    if len(runs) < 2:
        raise DataError(
            f"a rate surface needs at least 2 current runs (at least 3 for an activation "
            f"energy); this substance has {len(runs)}. Add runs at other temperatures and pH "
            "values, then ask again"
        )
    measurements: list[RateMeasurement] = []
    diags: list[dict[str, Any]] = []  # every run, in input order
    used: list[dict[str, Any]] = []  # the runs entering the surface, aligned with measurements
    for run in runs:
        d: dict[str, Any] = {
            "run_uid": run.run_uid,
            "version": run.version,
            "label": run.label,
            "kind": run.kind,
            "temperature_K": run.temperature_K,
            "pH": run.pH,
            "ionic_strength_M": run.ionic_strength_M,
        }
        try:
            if run.kind == "series":
                try:
                    model, fit = _series_fit(run, series_model, error_model)
                except KineticsError as exc:
                    evidence = _decline_evidence(run)
                    if evidence["significant"] is not False:
                        raise
                    why = str(exc).removeprefix(run.label + ": ")
                    d.update(_no_decline_entry(
                        run, evidence, f"The series could not be fitted ({why})."
                    ))
                    diags.append(d)
                    continue
                if not (math.isfinite(fit.se_ln_k) and fit.se_ln_k <= MAX_SE_LN_K_FITTED):
                    d.update(_no_decline_entry(
                        run, _decline_evidence(run),
                        f"The {model} fit leaves ln k undetermined (standard error "
                        + (f"{fit.se_ln_k:.3g}" if math.isfinite(fit.se_ln_k) else "unbounded")
                        + f", above {MAX_SE_LN_K_FITTED:g}; common practice, no source).",
                    ))
                    diags.append(d)
                    continue
                m = RateMeasurement.from_series_fit(
                    fit, temperature_K=run.temperature_K, pH=run.pH,
                    ionic_strength_M=run.ionic_strength_M, label=run.label,
                )
                d.update(
                    status="fitted",
                    series_model=model,
                    k_per_s=_finite(fit.k_per_s),
                    se_ln_k=_finite(fit.se_ln_k),
                    dt50_s=_finite(fit.dt50_s),
                    dt90_s=_finite(fit.dt90_s),
                    chi2_error_level_percent=_finite(fit.chi2_error_level_percent),
                    n_points=int(fit.n_points),
                    dof=int(fit.dof),
                    parameters=[
                        {"name": n, "estimate": _finite(e), "standard_error": _finite(s)}
                        for n, e, s in zip(fit.parameter_names, fit.estimates, fit.standard_errors)
                    ],
                    aicc=_finite(fit.aicc),
                    time_s=_finite_list(fit.time_s),
                    observed=_finite_list(fit.concentration),
                    fitted=_finite_list(fit.fitted),
                    residuals=_finite_list(fit.residuals),
                    p_rate_positive={k: _finite(v) for k, v in dict(fit.p_rate_positive).items()},
                )
            else:
                if run.k_per_s is not None:
                    m = RateMeasurement(
                        temperature_K=run.temperature_K, pH=run.pH, k_per_s=run.k_per_s,
                        se_ln_k=run.se_ln_k, ionic_strength_M=run.ionic_strength_M,
                        label=run.label,
                    )
                else:
                    m = RateMeasurement.from_dt50(
                        run.dt50_s, temperature_K=run.temperature_K, pH=run.pH,
                        se_ln_k=run.se_ln_k, ionic_strength_M=run.ionic_strength_M,
                        label=run.label,
                    )
                d.update(
                    status="fitted",
                    series_model=None,
                    k_per_s=_finite(m.k_per_s),
                    se_ln_k=_finite(m.se_ln_k),
                    dt50_s=_finite(math.log(2.0) / m.k_per_s),
                    dt90_s=_finite(math.log(10.0) / m.k_per_s),
                    chi2_error_level_percent=None,
                    n_points=None,
                    dof=None,
                    parameters=[],
                    aicc=None,
                    time_s=[], observed=[], fitted=[], residuals=[],
                    p_rate_positive={},
                )
        except KineticsError as exc:
            if run.label in str(exc):
                raise
            raise _with_label(exc, run.label) from None
        measurements.append(m)
        diags.append(d)
        used.append(d)
    left_out = excluded_runs(diags)
    note = ""
    if left_out:
        note = (
            f" ({len(left_out)} run(s) left out for no measurable decline: "
            + "; ".join(e["label"] for e in left_out) + ")"
        )
    if len(measurements) < 2:
        raise DataError(
            f"a rate surface needs at least 2 runs with a measurable decline or a reported "
            f"rate; {len(measurements)} remain{note}. Add runs at conditions where the "
            "substance declines measurably (higher temperature, other pH), then ask again"
        )
    fixed: Any = "auto" if pathways == "auto" else tuple(pathways.split(","))
    try:
        surface = fit_surface(
            measurements,
            temperature_model=temperature_model,
            pathways=fixed,
            ea_prior_J_per_mol=ea_prior_J_per_mol,
            reference_temperature_K=reference_temperature_K,
        )
    except KineticsError as exc:
        if not note:
            raise
        raise type(exc)(f"{exc}{note}") from None
    ln_k_surface = np.asarray(
        surface.ln_k(
            np.array([m.temperature_K for m in measurements]),
            np.array([m.pH for m in measurements]),
            np.array([m.ionic_strength_M for m in measurements]),
        ),
        dtype=float,
    )
    for d, m, lk in zip(used, measurements, ln_k_surface):
        d["ln_k_residual_from_surface"] = _finite(math.log(m.k_per_s) - lk)
    return FitResult(surface=surface, runs=diags)


_PARAMETER_UNITS = {
    "ln_k_ref_acid": "ln(L/(mol s))",
    "ln_k_ref_neutral": "ln(1/s)",
    "ln_k_ref_base": "ln(L/(mol s))",
}


def _parameter_unit(name: str) -> str:
    if name in _PARAMETER_UNITS:
        return _PARAMETER_UNITS[name]
    if name.endswith("_J_per_mol_K"):
        return "J/(mol K)"
    if name.endswith("_J_per_mol"):
        return "J/mol"
    return "-"


def se_imputed_runs(surface: SurfaceFit, runs: Sequence[dict[str, Any]]) -> list[dict[str, Any]]:
    """The runs that had no standard error of ln k and were given the study's typical one.

    ``surface.se_imputed_runs`` counts positions among the runs that entered the surface,
    which are the diagnostics not marked excluded, in order.
    """
    entered = [d for d in runs if d.get("status") != "excluded"]
    return [
        {"run_uid": entered[i].get("run_uid"), "version": entered[i].get("version"),
         "label": entered[i]["label"]}
        for i in surface.se_imputed_runs if 0 <= i < len(entered)
    ]


def model_flags(surface: SurfaceFit, runs: list[dict[str, Any]]) -> list[str]:
    """Plain-language warnings about a fitted surface."""
    flags = []
    imputed = se_imputed_runs(surface, runs)
    if imputed and surface.se_imputed_ln_k is not None:
        flags.append(
            "no standard error of ln k for: " + "; ".join(e["label"] for e in imputed)
            + f"; these runs were weighted as runs of typical precision for this study "
            f"(standard error of ln k {surface.se_imputed_ln_k:.3g}, the root mean within-run "
            "variance of the other runs)"
        )
    if surface.uncharacterised_pathways:
        flags.append(
            "uncharacterised pathways: " + ", ".join(surface.uncharacterised_pathways)
            + " (the measured pH values cannot tell them apart; predictions far from the "
            "measured pH may be too low)"
        )
    if surface.ea_from_prior:
        flags.append(
            "activation energy from the prior for: " + ", ".join(surface.ea_from_prior)
            + " (runs at a single temperature level); temperature extrapolation rests on it"
        )
    if surface.dof <= 1:
        flags.append(
            f"only {surface.dof} residual degree(s) of freedom: intervals are wide and the "
            "model choice is weakly supported"
        )
    for e in excluded_runs(runs):
        flags.append(f"{e['label']}: left out of the surface: {e['reason']}")
    for d in runs:
        chi2 = d.get("chi2_error_level_percent")
        if chi2 is not None and chi2 > CHI2_FLAG_PERCENT:
            flags.append(
                f"{d['label']}: chi-square error level {chi2:.1f} % exceeds "
                f"{CHI2_FLAG_PERCENT:.0f} %; the {d['series_model']} model may not describe "
                "this series"
            )
        if d.get("series_model") not in (None, "SFO"):
            flags.append(
                f"{d['label']}: fitted with {d['series_model']}; its rate enters the surface "
                "as ln 2 / DT50"
            )
    return flags


def model_payload(
    result: FitResult, *, level: float, options: dict[str, Any], extra: dict[str, Any]
) -> dict[str, Any]:
    """The JSON body describing a fitted surface (the GET model response)."""
    s = result.surface
    iv = s.interval(level)
    se = s.standard_errors
    parameters = [
        {
            "name": name,
            "unit": _parameter_unit(name),
            "estimate": _finite(est),
            "standard_error": _finite(err),
            "ci_low": _finite(lo),
            "ci_high": _finite(hi),
        }
        for name, est, err, lo, hi in zip(s.parameter_names, s.estimates, se, iv.lower, iv.upper)
    ]
    return {
        **extra,
        "fit_options": options,
        "temperature_model": s.temperature_model,
        "pathways_supported": list(s.pathways),
        "uncharacterised_pathways": list(s.uncharacterised_pathways),
        "ea_from_prior": list(s.ea_from_prior),
        "selection": s.selection,
        "level": float(level),
        "parameters": parameters,
        "parameter_names": list(s.parameter_names),
        "covariance": [_finite_list(row) for row in np.asarray(s.covariance)],
        "dof": int(s.dof),
        "residual_scale": _finite(s.residual_scale),
        "between_run_sd_ln_k": _finite(s.between_run_sd_ln_k),
        "n_measurements": int(s.n_measurements),
        "reference_temperature_K": float(s.reference_temperature_K),
        "temperature_range_K": [float(v) for v in s.temperature_range_K],
        "pH_range": [float(v) for v in s.pH_range],
        "candidates": [
            {**c.to_dict(), "rss": _finite(c.rss), "aicc": _finite(c.aicc)} for c in s.candidates
        ],
        "runs": result.runs,
        "excluded_runs": excluded_runs(result.runs),
        "se_imputed_runs": se_imputed_runs(s, result.runs),
        "se_imputed_ln_k": _finite(s.se_imputed_ln_k),
        "flags": model_flags(s, result.runs),
        "caution": CAUTION_TEXT,
    }
