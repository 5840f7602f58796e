r"""Fits of one concentration-time series: SFO, FOMC, DFOP and HS.

The four models are the degradation-kinetics model set of FOCUS (2006)
Guidance document on estimating persistence and degradation kinetics from
environmental fate studies on pesticides in EU registration, Sanco/10058/2005
v2.0 (cited below as "FOCUS 2006"). With :math:`C` the concentration at time
:math:`t`:

.. math::

    \text{SFO:}\quad  C &= C_0 e^{-k t} \\
    \text{FOMC:}\quad C &= \frac{C_0}{(t/\beta + 1)^{\alpha}} \\
    \text{DFOP:}\quad C &= C_0 \left(g e^{-k_1 t} + (1-g) e^{-k_2 t}\right) \\
    \text{HS:}\quad   C &= C_0 e^{-k_1 t} \ (t \le t_b), \quad
                           C_0 e^{-k_1 t_b} e^{-k_2 (t - t_b)} \ (t > t_b)

(FOCUS 2006). The concentrations themselves (not their
logarithms) are fitted by weighted nonlinear least squares with analytic
Jacobians; :func:`fit_series` documents the procedure, the error models, the
limit-of-quantification rule and every reported statistic.

:func:`fit_sfo_batch` fits many SFO series at once with a Levenberg-Marquardt
iteration vectorised over the batch; it returns the same numbers as
:func:`fit_series` with ``model="SFO"``.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np
from scipy import stats
from scipy.optimize import least_squares
from scipy.special import expit

from kinetics import units
from kinetics._series_models import (
    EXPONENTIAL_RISE,
    MODELS,
    _ols_slope,
    natural_from_theta,
    natural_gradient,
)
from kinetics.errors import (
    ConvergenceError,
    DataError,
    IdentifiabilityError,
    InputError,
    KineticsError,
)

__all__ = [
    "SERIES_MODELS",
    "SERIES_METHODS",
    "ERROR_MODELS",
    "SeriesFit",
    "SeriesInterval",
    "fit_series",
    "fit_sfo_batch",
]

SERIES_MODELS: tuple[str, ...] = ("SFO", "FOMC", "DFOP", "HS")
SERIES_METHODS: tuple[str, ...] = ("nls", "loglinear")
ERROR_MODELS: tuple[str, ...] = ("constant", "proportional")

_LN2 = math.log(2.0)
_LN10 = math.log(10.0)
_CHI2_ALPHA = 0.05  # significance level of the FOCUS 2006 chi-square test
_WEIGHT_FLOOR = 1e-9  # relative floor on fitted values used as proportional weights
_IRLS_MAX = 100
_IRLS_TOL = 1e-13
_COND_LIMIT = 1e10  # condition number of the column-scaled Jacobian
_MAX_LOG_SE = 20.0  # largest accepted standard error of a log- or logit-scale parameter


# ------------------------------------------------------------------ results
@dataclass(frozen=True, eq=False)
class SeriesInterval:
    """Confidence intervals of one series fit at one confidence level.

    All bounds are t-based with ``dof`` degrees of freedom. Parameter bounds
    are formed on the scale on which each parameter was fitted and transformed
    back: for ``method="nls"`` log for rates, times and FOMC alpha, logit for
    DFOP g and linear for C0, so the bounds of a positive parameter are
    positive; for ``method="loglinear"`` log for C0 (the intercept is ln C0)
    and linear for k (the exact OLS interval of the slope, whose lower bound can
    be <= 0 when the decline is not significant). The bounds of the
    representative rate k, of DT50 and of DT90 are always formed on the log
    scale from :attr:`SeriesFit.se_ln_k` and :attr:`SeriesFit.se_ln_dt90`.

    Attributes
    ----------
    level : float
        Two-sided confidence level, e.g. 0.95.
    parameter_names : tuple of str
        Names of the model parameters, as in :attr:`SeriesFit.parameter_names`.
    low, high : numpy.ndarray
        Lower and upper bounds of each parameter (natural scale, units as in
        the parameter names; C0 in the concentration unit supplied).
    k_low_per_s, k_high_per_s : float
        Bounds of the (representative) first-order rate constant [1/s].
    dt50_low_s, dt50_high_s, dt90_low_s, dt90_high_s : float
        Bounds of DT50 and DT90 [s].
    """

    level: float
    parameter_names: tuple[str, ...]
    low: np.ndarray
    high: np.ndarray
    k_low_per_s: float
    k_high_per_s: float
    dt50_low_s: float
    dt50_high_s: float
    dt90_low_s: float
    dt90_high_s: float

    def as_dict(self) -> dict[str, tuple[float, float]]:
        """``{parameter name: (low, high)}`` including k, DT50 and DT90."""
        out = {n: (float(lo), float(hi)) for n, lo, hi in
               zip(self.parameter_names, self.low, self.high)}
        out["k_per_s"] = (self.k_low_per_s, self.k_high_per_s)
        out["dt50_s"] = (self.dt50_low_s, self.dt50_high_s)
        out["dt90_s"] = (self.dt90_low_s, self.dt90_high_s)
        return out


@dataclass(frozen=True, eq=False)
class SeriesFit:
    """Result of fitting one concentration-time series.

    Attributes
    ----------
    model : str
        One of :data:`SERIES_MODELS`.
    method : str
        ``"nls"`` or ``"loglinear"``.
    error_model : str
        ``"constant"`` or ``"proportional"``.
    parameter_names : tuple of str
        SFO ``("C0", "k_per_s")``; FOMC ``("C0", "alpha", "beta_s")``; DFOP
        ``("C0", "k1_per_s", "k2_per_s", "g")`` with ``k1_per_s >= k2_per_s``;
        HS ``("C0", "k1_per_s", "k2_per_s", "tb_s")``. C0 is in the unit of the
        concentrations supplied; rates [1/s]; times [s].
    estimates : numpy.ndarray
        Parameter estimates on the natural scale.
    covariance : numpy.ndarray
        Covariance of ``estimates`` (delta method from the fitted scale).
    standard_errors : numpy.ndarray
        Square roots of the diagonal of ``covariance``.
    dof : int
        Residual degrees of freedom ``n_points - n_parameters``.
    time_s : numpy.ndarray
        Sampling times used in the fit, sorted [s].
    concentration : numpy.ndarray
        Concentrations used in the fit, after the limit-of-quantification rule.
    fitted : numpy.ndarray
        Model concentrations at ``time_s``.
    residuals : numpy.ndarray
        ``concentration - fitted``.
    k_per_s : float
        SFO: k. Other models: the representative rate ``ln 2 / DT50`` [1/s].
    se_ln_k : float
        Standard error of ``ln k_per_s`` (equal to that of ``ln dt50_s``).
    se_ln_dt90 : float
        Standard error of ``ln dt90_s``.
    dt50_s, dt90_s : float
        Times to 50 % and 90 % loss [s].
    chi2_error_level_percent : float
        FOCUS 2006 chi-square error level [%] (see :func:`fit_series`).
    chi2_dof : int
        Degrees of freedom of that test: sampling times minus parameters.
    aic, aicc : float or None
        Akaike information criterion and its small-sample correction from the
        Gaussian likelihood, counting the model parameters plus the residual
        scale sigma. ``aicc`` is None when ``n_points <= n_parameters + 2``
        (the correction is undefined).
    rss : float
        Weighted residual sum of squares that was minimised (for
        ``method="loglinear"`` it is on ln C).
    residual_scale : float
        Estimated sigma: in concentration units for ``"constant"``, a relative
        error (fraction of the fitted value) for ``"proportional"``, and on ln C
        for ``"loglinear"``.
    n_points : int
        Number of points used in the fit.
    p_rate_positive : dict
        One-sided t-test p-value of the hypothesis that each rate parameter is
        zero against the alternative that it is > 0 (small = significantly
        positive).
    n_below_loq_set : int
        Points flagged below the LOQ that were used at LOQ/2.
    n_below_loq_dropped : int
        Points flagged below the LOQ that were dropped.
    """

    model: str
    method: str
    error_model: str
    parameter_names: tuple[str, ...]
    estimates: np.ndarray
    covariance: np.ndarray
    standard_errors: np.ndarray
    dof: int
    time_s: np.ndarray
    concentration: np.ndarray
    fitted: np.ndarray
    residuals: np.ndarray
    k_per_s: float
    se_ln_k: float
    se_ln_dt90: float
    dt50_s: float
    dt90_s: float
    chi2_error_level_percent: float
    chi2_dof: int
    aic: float
    aicc: float | None
    rss: float
    residual_scale: float
    n_points: int
    p_rate_positive: Mapping[str, float]
    n_below_loq_set: int = 0
    n_below_loq_dropped: int = 0
    # fitted-scale parameters and their kinds, used by interval() and fitted_at()
    _theta: np.ndarray = field(default=None, repr=False)
    _theta_covariance: np.ndarray = field(default=None, repr=False)
    _kinds: tuple[str, ...] = field(default=(), repr=False)

    @property
    def parameters(self) -> dict[str, float]:
        """``{name: estimate}`` on the natural scale."""
        return {n: float(v) for n, v in zip(self.parameter_names, self.estimates)}

    def interval(self, level: float = 0.95) -> SeriesInterval:
        """t-based confidence intervals at ``level`` (two-sided).

        .. math::

            \\hat\\theta_j \\pm t_{1-(1-\\text{level})/2,\\ \\text{dof}}\\,
            \\mathrm{se}(\\hat\\theta_j)

        on the fitted scale of each parameter, transformed back; for k, DT50
        and DT90 on the log scale with :attr:`se_ln_k` and :attr:`se_ln_dt90`
        (see :class:`SeriesInterval`).

        Parameters
        ----------
        level : float
            Confidence level, strictly between 0 and 1.

        Returns
        -------
        SeriesInterval
        """
        try:
            lvl = float(level)
        except (TypeError, ValueError):
            raise InputError(f"confidence level must be a number between 0 and 1, got {level!r}")
        if not 0.0 < lvl < 1.0:
            raise InputError(f"confidence level must be strictly between 0 and 1, got {level!r}")
        q = float(stats.t.ppf(0.5 + lvl / 2.0, self.dof))
        se = np.sqrt(np.diag(self._theta_covariance))
        lo_th, hi_th = self._theta - q * se, self._theta + q * se
        low = np.empty_like(self.estimates)
        high = np.empty_like(self.estimates)
        with np.errstate(over="ignore"):  # an unbounded bound is reported as inf
            for i, kind in enumerate(self._kinds):
                if kind == "negated_log_rate":  # log-linear slope b = -k
                    low[i], high[i] = -hi_th[i], -lo_th[i]
                elif kind == "amplitude":
                    low[i], high[i] = lo_th[i], hi_th[i]
                elif kind == "logit":
                    low[i], high[i] = expit(lo_th[i]), expit(hi_th[i])
                else:  # log_rate, log_time, log and the log-linear intercept ln C0
                    low[i], high[i] = np.exp(lo_th[i]), np.exp(hi_th[i])
            # k, DT50 and DT90 always on the log scale (positive bounds)
            k_lo = float(self.k_per_s * np.exp(-q * self.se_ln_k))
            k_hi = float(self.k_per_s * np.exp(q * self.se_ln_k))
            dt90_lo = float(self.dt90_s * np.exp(-q * self.se_ln_dt90))
            dt90_hi = float(self.dt90_s * np.exp(q * self.se_ln_dt90))
            dt50_lo = float(self.dt50_s * np.exp(-q * self.se_ln_k))
            dt50_hi = float(self.dt50_s * np.exp(q * self.se_ln_k))
        bounds = [*zip(self.parameter_names, low, high), ("k_per_s", k_lo, k_hi),
                  ("dt50_s", dt50_lo, dt50_hi), ("dt90_s", dt90_lo, dt90_hi)]
        for name, lo, hi in bounds:
            if not (math.isfinite(lo) and math.isfinite(hi)):
                raise IdentifiabilityError(
                    f"the {lvl:g} confidence interval of {name} is unbounded "
                    f"({_fmt(lo)} to {_fmt(hi)}); the data do not constrain it at this level")
        return SeriesInterval(
            level=lvl,
            parameter_names=self.parameter_names,
            low=_frozen(low),
            high=_frozen(high),
            k_low_per_s=k_lo,
            k_high_per_s=k_hi,
            dt50_low_s=dt50_lo,
            dt50_high_s=dt50_hi,
            dt90_low_s=dt90_lo,
            dt90_high_s=dt90_hi,
        )

    def fitted_at(self, time_s: Any) -> np.ndarray:
        """Model concentration at ``time_s`` [s] (unit of the data supplied)."""
        t = np.asarray(time_s, dtype=float)
        if not np.all(np.isfinite(t)) or np.any(t < 0):
            raise InputError(f"times must be finite and >= 0 s, got {time_s!r}")
        if self.method == "loglinear":
            return self.estimates[0] * np.exp(-self.estimates[1] * t)
        return MODELS[self.model].predict(self._theta, np.atleast_1d(t)).reshape(t.shape)

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe summary (no private fields)."""
        return {
            "model": self.model,
            "method": self.method,
            "error_model": self.error_model,
            "parameters": self.parameters,
            "standard_errors": {n: float(v) for n, v in
                                zip(self.parameter_names, self.standard_errors)},
            "covariance": self.covariance.tolist(),
            "dof": self.dof,
            "k_per_s": self.k_per_s,
            "se_ln_k": self.se_ln_k,
            "dt50_s": self.dt50_s,
            "dt90_s": self.dt90_s,
            "chi2_error_level_percent": self.chi2_error_level_percent,
            "chi2_dof": self.chi2_dof,
            "aic": self.aic,
            "aicc": self.aicc,
            "rss": self.rss,
            "residual_scale": self.residual_scale,
            "n_points": self.n_points,
            "p_rate_positive": dict(self.p_rate_positive),
            "n_below_loq_set": self.n_below_loq_set,
            "n_below_loq_dropped": self.n_below_loq_dropped,
            "time_s": self.time_s.tolist(),
            "concentration": self.concentration.tolist(),
            "fitted": self.fitted.tolist(),
        }


def _frozen(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=float)
    a.setflags(write=False)
    return a


# ------------------------------------------------------------ input checks
def _choice(value: Any, valid: tuple[str, ...], what: str) -> str:
    if not isinstance(value, str) or value not in valid:
        raise InputError(f"unknown {what} {value!r}; valid choices are {', '.join(valid)}")
    return value


def _float_vector(values: Any, name: str) -> np.ndarray:
    try:
        arr = np.array(values, dtype=float)  # a copy: results never alias caller arrays
    except (TypeError, ValueError):
        raise DataError(f"{name} must be a sequence of numbers, got {values!r}")
    if arr.ndim != 1:
        raise DataError(f"{name} must be a one-dimensional sequence of numbers, "
                        f"got an array of shape {arr.shape}")
    return arr


def _fmt(x: float) -> str:
    return f"{x:.6g}"


@dataclass(frozen=True, eq=False)
class _Prepared:
    t_s: np.ndarray        # sorted times [s]
    y: np.ndarray          # concentrations, LOQ rule applied
    group: np.ndarray      # index of each sample's sampling time in 0..n_times-1
    n_times: int           # number of distinct sampling times
    time_unit: str
    unit_factor: float     # seconds per time unit, for messages
    n_set: int
    n_dropped: int


def _sampling_times(t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct values of the sorted array ``t`` and each element's group index."""
    new = np.empty(t.size, dtype=bool)
    new[0] = True
    np.not_equal(t[1:], t[:-1], out=new[1:])
    return t[new], np.cumsum(new) - 1


def _prepare(time: Any, concentration: Any, time_unit: str, n_parameters: int,
             model: str, loq: Any = None, below_loq: Any = None,
             unit_factor: float | None = None) -> _Prepared:
    """Validate one series, apply the LOQ rule and sort by time."""
    t = _float_vector(time, "time")
    c = _float_vector(concentration, "concentration")
    if t.size != c.size:
        raise DataError(f"time has {t.size} values but concentration has {c.size}; give one "
                        "concentration per sample (replicates repeat their sampling time)")
    if t.size == 0:
        raise DataError("the series is empty: no time and concentration values were given")
    factor = float(units.time_to_s(1.0, time_unit)) if unit_factor is None else unit_factor
    if not np.isfinite(t).all():
        i = int(np.argmax(~np.isfinite(t)))
        raise DataError(f"time[{i}] = {float(t[i])} is not a finite number")
    if (t < 0).any():
        i = int(np.argmax(t < 0))
        raise DataError(f"time[{i}] = {_fmt(t[i])} {time_unit} is negative; times are "
                        "counted from the start of the incubation")

    flags = None
    if below_loq is not None:
        flags = np.asarray(below_loq)
        if flags.dtype != bool or flags.ndim != 1:
            raise DataError(f"below_loq must be a one-dimensional sequence of True/False, "
                            f"got {below_loq!r}")
        if flags.size != t.size:
            raise DataError(f"below_loq has {flags.size} values but the series has {t.size} "
                            "samples; give one flag per sample")
    loq_value = None
    if loq is not None:
        try:
            loq_value = float(loq)
        except (TypeError, ValueError):
            raise DataError(f"loq must be a number (concentration unit of the data), got {loq!r}")
        if not math.isfinite(loq_value) or loq_value <= 0:
            raise DataError(f"loq = {loq!r} must be a finite concentration > 0")
        if flags is None:
            flags = np.isfinite(c) & (c < loq_value)
    if flags is not None and not flags.any():
        flags = None
    if flags is not None and loq_value is None:
        raise DataError(f"{int(flags.sum())} sample(s) are flagged below the LOQ but no loq "
                        "value was given; pass loq= in the concentration unit of the data")

    finite = np.isfinite(c)
    if not finite.all():
        bad = ~finite if flags is None else (~finite & ~flags)
        if bad.any():
            i = int(np.argmax(bad))
            raise DataError(f"concentration[{i}] = {float(c[i])} at {_fmt(t[i])} {time_unit} is "
                            "not a finite number; flag values below the LOQ with below_loq "
                            "instead")
    neg = c < 0  # comparisons with NaN are False and do not warn
    if neg.any():
        bad = neg if flags is None else (neg & ~flags)
        if bad.any():
            i = int(np.argmax(bad))
            raise DataError(f"concentration[{i}] = {_fmt(c[i])} at {_fmt(t[i])} {time_unit} is "
                            "negative; concentrations must be >= 0 (flag values below the LOQ "
                            "with below_loq)")

    if t.size > 1 and (t[1:] < t[:-1]).any():
        order = np.argsort(t, kind="stable")
        t, c = t[order], c[order]
        if flags is not None:
            flags = flags[order]
    n_set = n_dropped = 0
    if flags is not None:
        c = c.copy()
        ut, inv = _sampling_times(t)
        # a sampling time is "trailing" when every sample at it and after it is flagged
        all_flagged = np.ones(ut.size, dtype=bool)
        np.logical_and.at(all_flagged, inv, flags)
        trailing = np.flip(np.logical_and.accumulate(np.flip(all_flagged)))
        first_trailing = int(np.argmax(trailing)) if trailing.any() else ut.size
        drop = flags & (inv > first_trailing)
        n_dropped = int(drop.sum())
        setv = flags & ~drop
        c[setv] = loq_value / 2.0
        n_set = int(setv.sum())
        t, c = t[~drop], c[~drop]

    ut, group = _sampling_times(t)
    if ut.size < 2:
        raise DataError(f"all {t.size} samples were taken at one time ({_fmt(ut[0])} "
                        f"{time_unit}); a rate needs samples at several times")
    if ut.size < n_parameters + 1:
        raise DataError(f"model {model} has {n_parameters} parameters and needs samples at "
                        f"{n_parameters + 1} or more different times; this series has "
                        f"{ut.size} ({', '.join(_fmt(x) for x in ut)} {time_unit})")
    if (c == c[0]).all():
        if c[0] == 0:
            raise DataError("all concentrations are 0; there is nothing to fit")
        raise DataError(f"all concentrations equal {_fmt(c[0])}; a constant series shows no "
                        "decline and gives no rate")
    pos = c > 0
    tp = t[pos]
    if tp.size == 0 or tp[0] == tp[-1]:
        raise DataError("concentrations are above 0 at only one sampling time "
                        f"({_fmt(tp[0])} {time_unit}); the decline is too fast for "
                        "the sampling times and no rate can be estimated")
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        slope = _ols_slope(tp, np.log(c[pos]))
    if not math.isfinite(slope):
        raise DataError("the sampling times are too close together to estimate a decline "
                        f"({', '.join(_fmt(x) for x in ut)} {time_unit})")
    if slope >= 0:
        m0 = float(c[group == 0].mean())
        m1 = float(c[group == ut.size - 1].mean())
        raise DataError(
            f"the concentrations do not decline: ln(concentration) rises by {_fmt(slope)} "
            f"per {time_unit} (mean {_fmt(m0)} at {_fmt(ut[0])} {time_unit}, {_fmt(m1)} at "
            f"{_fmt(ut[-1])} {time_unit}); a degradation model needs a declining series")
    return _Prepared(t * factor, c, group, int(ut.size), time_unit, factor, n_set, n_dropped)


# ------------------------------------------------------------- the engine
@dataclass(frozen=True, eq=False)
class _EngineResult:
    theta: np.ndarray              # fitted-scale parameters (original units)
    theta_covariance: np.ndarray
    estimates: np.ndarray          # natural scale
    covariance: np.ndarray
    standard_errors: np.ndarray
    fitted: np.ndarray
    weights: np.ndarray
    rss: float                     # weighted
    dof: int
    sigma2: float


def _to_scaled(theta: np.ndarray, kinds: tuple[str, ...], tscale: float,
               yscale: float) -> np.ndarray:
    """Parameters of the problem with time / tscale and concentration / yscale."""
    out = np.array(theta, dtype=float)
    for i, kind in enumerate(kinds):
        if kind == "amplitude":
            out[i] = theta[i] / yscale
        elif kind == "log_rate":
            out[i] = theta[i] + math.log(tscale)
        elif kind == "log_time":
            out[i] = theta[i] - math.log(tscale)
    return out


def _from_scaled(theta: np.ndarray, kinds: tuple[str, ...], tscale: float,
                 yscale: float) -> np.ndarray:
    out = np.array(theta, dtype=float)
    for i, kind in enumerate(kinds):
        if kind == "amplitude":
            out[i] = theta[i] * yscale
        elif kind == "log_rate":
            out[i] = theta[i] - math.log(tscale)
        elif kind == "log_time":
            out[i] = theta[i] + math.log(tscale)
    return out


def _weights(fitted: np.ndarray, error_model: str) -> np.ndarray:
    """Least-squares weights: 1 (constant) or 1 / fitted^2 (proportional)."""
    if error_model == "constant":
        return np.ones_like(fitted)
    floor = _WEIGHT_FLOOR * float(np.max(np.abs(fitted)))
    return 1.0 / np.maximum(np.abs(fitted), floor) ** 2


def _gauss_newton_polish(model, theta, t, y, w, steps=10):
    """A few undamped Gauss-Newton steps at fixed weights (tightens convergence)."""
    sw = np.sqrt(w)
    obj = float(np.sum(w * (y - model.predict(theta, t)) ** 2))
    for _ in range(steps):
        jac = model.jacobian(theta, t) * sw[:, None]
        r = (y - model.predict(theta, t)) * sw
        if not (np.all(np.isfinite(jac)) and np.all(np.isfinite(r))):
            break
        try:
            step, *_ = np.linalg.lstsq(jac, r, rcond=None)
        except np.linalg.LinAlgError:
            break
        cand = theta + step
        f = model.predict(cand, t)
        if not np.all(np.isfinite(f)):
            break
        new = float(np.sum(w * (y - f) ** 2))
        if new > obj * (1.0 + 1e-12) + 1e-300:
            break
        theta, obj = cand, new
        if np.max(np.abs(step)) <= 1e-13 * (1.0 + np.max(np.abs(theta))):
            break
    return theta


def _solve_scaled(model, theta0, t, y, error_model, fixed_weights=None):
    """Minimise on the rescaled problem; returns (theta, weighted objective).

    ``error_model="constant"`` with ``fixed_weights`` minimises the weighted sum
    of squares with those weights; ``"proportional"`` iterates the weights
    1/f^2 to their fixed point.
    """
    with np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore"):
        theta = np.asarray(theta0, dtype=float)
        f0 = model.predict(theta, t)
        if not np.all(np.isfinite(f0)):
            raise ConvergenceError(f"{model.name}: the starting values give non-finite "
                                   "model concentrations")
        if error_model == "proportional":
            w = _weights(f0, error_model)
        else:
            w = np.ones_like(y) if fixed_weights is None else fixed_weights
        for _ in range(_IRLS_MAX):
            sw = np.sqrt(w)

            def fun(th, sw=sw):
                return (model.predict(th, t) - y) * sw

            def jac(th, sw=sw):
                return model.jacobian(th, t) * sw[:, None]

            try:
                res = least_squares(fun, theta, jac=jac, method="lm", xtol=1e-15,
                                    ftol=1e-15, gtol=1e-15, max_nfev=2000 * (theta.size + 1))
            except (ValueError, np.linalg.LinAlgError) as exc:
                raise ConvergenceError(f"{model.name}: the optimiser failed ({exc})") from None
            if res.status <= 0 or not np.all(np.isfinite(res.x)):
                raise ConvergenceError(f"{model.name}: the optimiser did not converge "
                                       f"({res.message})")
            new = _gauss_newton_polish(model, res.x, t, y, w)
            if error_model == "constant":
                theta = new
                break
            change = float(np.max(np.abs(new - theta) / (1.0 + np.abs(new))))
            theta = new
            w = _weights(model.predict(theta, t), error_model)
            if change < _IRLS_TOL:
                break
        else:
            raise ConvergenceError(f"{model.name}: the reweighting for proportional errors did "
                                   f"not settle in {_IRLS_MAX} iterations")
        f = model.predict(theta, t)
        if not np.all(np.isfinite(f)):
            raise ConvergenceError(f"{model.name}: the fit ended at non-finite concentrations")
        obj = float(np.sum(w * (y - f) ** 2))
    return theta, obj


def _observed_weights(y: np.ndarray) -> np.ndarray:
    """Fixed weights 1 / y^2 (zeros weighted like the smallest positive value).

    Used for the bridge from the constant-variance fit to the reweighting for
    proportional errors: a weighted least-squares problem with fixed weights
    is well posed, and its optimum lies close to the reweighting fixed point,
    so the reweighting then takes small steps.
    """
    pos = y > 0
    floor = float(np.min(y[pos])) if pos.any() else 1.0
    return 1.0 / np.maximum(y, floor) ** 2


def _covariance(model, theta, t, y, error_model, kinds, *, name=None):
    """Statistics at the optimum on the original scale."""
    name = name or model.name
    fitted = model.predict(theta, t)
    w = _weights(fitted, error_model)
    jac = model.jacobian(theta, t)
    sw = np.sqrt(w)
    a = jac * sw[:, None]
    n, p = a.shape
    dof = n - p
    rss = float(np.sum(w * (y - fitted) ** 2))
    sigma2 = rss / dof
    norms = np.linalg.norm(a, axis=0)
    if np.any(norms == 0) or not np.all(np.isfinite(a)):
        raise IdentifiabilityError(f"{name}: at the fitted parameters the model does not "
                                   "depend on one of them; the data cannot characterise it")
    sv = np.linalg.svd(a / norms, compute_uv=False)
    if sv[-1] <= 0 or sv[0] / sv[-1] > _COND_LIMIT:
        raise IdentifiabilityError(f"{name}: the parameters cannot be told apart by these data "
                                   f"(condition number {_fmt(sv[0] / max(sv[-1], 1e-300))}); "
                                   "try a model with fewer parameters")
    # (J^T W J)^-1 through the QR factor of the column-scaled weighted Jacobian
    _, r = np.linalg.qr(a / norms)
    rinv = np.linalg.solve(r, np.eye(p))
    inv = (rinv @ rinv.T) / np.outer(norms, norms)
    with np.errstate(over="ignore", invalid="ignore"):
        theta_cov = sigma2 * inv
        g = natural_gradient(theta, kinds)
        nat = natural_from_theta(theta, kinds)
        cov = theta_cov * np.outer(g, g)
    if not (np.all(np.isfinite(theta_cov)) and np.all(np.isfinite(cov))):
        raise IdentifiabilityError(f"{name}: the data do not constrain the parameters (their "
                                   "covariance is not finite); try a model with fewer "
                                   "parameters")
    se = np.sqrt(np.maximum(np.diag(cov), 0.0))
    return _EngineResult(theta, theta_cov, nat, cov, se, fitted, w, rss, dof, sigma2)


def _amplitude_projection(model, theta, t, y):
    r"""Replace the starting amplitude by its least-squares value given the rest.

    The amplitude (C0, or b1 of a rising curve) enters every model linearly, so
    for fixed other parameters its best value is :math:`\sum f_1 y / \sum f_1^2`
    with :math:`f_1` the model at unit amplitude. Starting there keeps the
    optimiser away from the far-off shallow regions a poor amplitude leads to.
    """
    unit = np.array(theta, dtype=float)
    unit[0] = 1.0
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        f1 = model.predict(unit, t)
        den = float(np.dot(f1, f1))
        amp = float(np.dot(f1, y)) / den if den > 0 else float("nan")
    if math.isfinite(amp) and amp > 0:
        unit[0] = amp
        return unit
    return np.array(theta, dtype=float)


def _fit_engine(model, t, y, starts, error_model):
    """Fit from several starts; returns the parameters on the original scale.

    The constant-variance fit is run from every start and the best kept. For
    proportional errors it is followed by a fit with fixed weights 1/y^2 (see
    :func:`_observed_weights`) and then by the reweighting to its fixed point.
    """
    tscale = float(np.max(t))
    yscale = float(np.max(np.abs(y)))
    ts, ys = t / tscale, y / yscale
    best = None
    failure = None
    for start in starts:
        th0 = _amplitude_projection(model, _to_scaled(start, model.kinds, tscale, yscale), ts, ys)
        try:
            th, obj = _solve_scaled(model, th0, ts, ys, "constant")
        except ConvergenceError as exc:
            failure = exc
            continue
        if best is None or obj < best[1]:
            best = (th, obj)
    if best is None:
        raise failure if failure is not None else ConvergenceError(
            f"{model.name}: no starting values were available")
    theta = best[0]
    if error_model == "proportional":
        try:
            theta, _ = _solve_scaled(model, theta, ts, ys, "constant", _observed_weights(ys))
        except ConvergenceError:
            pass  # keep the constant-variance fit as the start of the reweighting
        theta, _ = _solve_scaled(model, theta, ts, ys, "proportional")
    return _from_scaled(theta, model.kinds, tscale, yscale)


def _check_fitted_decline(name: str, fitted: np.ndarray, t_s: np.ndarray, prep,
                          error_model: str, where: str = ""):
    """Refuse fits that ended at a flat line or at a vertical drop.

    Both are limits the optimiser runs into when the data cannot support the
    model (a flat line: no rate; a drop to zero before the second sampling
    time: no rate either); they would otherwise surface as zero standard errors
    or a singular covariance.
    """
    if error_model == "proportional":
        hint = ("with relative-error weights the smallest values dominate; flag values "
                "below the LOQ or use error_model='constant'")
    else:
        hint = "the data do not support this model; try another model"
    first = float(fitted[0])
    last = float(fitted[-1])
    if not first > 0 or 1.0 - last / first < 1e-9:
        raise ConvergenceError(
            f"{where}{name}: the fit ran to a flat line (no decline between "
            f"{_fmt(t_s[0] / prep.unit_factor)} and {_fmt(t_s[-1] / prep.unit_factor)} "
            f"{prep.time_unit}); {hint}")
    i2 = int(np.searchsorted(t_s, t_s[0], side="right"))
    if float(fitted[i2]) < 1e-9 * first:
        raise ConvergenceError(
            f"{where}{name}: the fit ran to an instantaneous drop (the model reaches 0 before "
            f"the second sampling time, {_fmt(t_s[i2] / prep.unit_factor)} {prep.time_unit}); "
            f"{hint}")


# -------------------------------------------------------- FOCUS statistics
@functools.lru_cache(maxsize=256)
def _chi2_quantile(dof: int) -> float:
    """Upper 1 - alpha quantile of the chi-square distribution, alpha = 0.05."""
    return float(stats.chi2.ppf(1.0 - _CHI2_ALPHA, dof))


def _chi2_error_level(group: np.ndarray, n_times: int, y: np.ndarray, fitted: np.ndarray,
                      n_parameters: int) -> tuple[float, int]:
    r"""FOCUS 2006 chi-square error level [%] on the means at each sampling time.

    The smallest error percentage at which the model passes the chi-square test
    at :math:`\alpha = 0.05` (FOCUS 2006, chi-square test):

    .. math::

        \chi^2 = \sum_i \frac{(C_i - O_i)^2}{(\frac{err}{100}\,\bar O)^2}
        = \chi^2_{1-\alpha}(m - p)
        \quad\Longrightarrow\quad
        err = \frac{100}{\bar O}\sqrt{\frac{\sum_i (C_i - O_i)^2}
                                           {\chi^2_{1-\alpha}(m - p)}}

    with :math:`O_i` the mean observation and :math:`C_i` the model value at
    sampling time i, :math:`\bar O` the mean of all :math:`O_i`, m the number of
    sampling times and p the number of model parameters.
    """
    counts = np.bincount(group, minlength=n_times)
    obs = np.bincount(group, weights=y, minlength=n_times) / counts
    calc = np.bincount(group, weights=fitted, minlength=n_times) / counts
    dof = int(n_times - n_parameters)
    err = 100.0 / float(np.mean(obs)) * math.sqrt(float(np.sum((calc - obs) ** 2))
                                                  / _chi2_quantile(dof))
    return err, dof


def _information_criteria(n: int, p: int, rss: float, weights: np.ndarray,
                          scale_sum_sq: float) -> tuple[float, float | None]:
    r"""AIC and AICc from the Gaussian likelihood at the ML sigma.

    With :math:`\sigma_i = \sigma / \sqrt{w_i}` and
    :math:`\hat\sigma^2 = \mathrm{RSS}_w / n`,

    .. math::

        \ln L = -\frac{n}{2}\left(\ln(2\pi\hat\sigma^2) + 1\right)
                + \frac12 \sum_i \ln w_i,\quad
        \mathrm{AIC} = 2K - 2\ln L,\quad
        \mathrm{AICc} = \mathrm{AIC} + \frac{2K(K+1)}{n-K-1}

    with K = p + 1 (the model parameters and sigma); Burnham and Anderson (2002)
    Model selection and multimodel inference, 2nd ed., Springer.
    An exact fit is treated as having residuals at rounding level.
    """
    rss_floor = max(rss, np.finfo(float).eps ** 2 * scale_sum_sq, np.finfo(float).tiny)
    s2 = rss_floor / n
    log_l = -0.5 * n * (math.log(2.0 * math.pi * s2) + 1.0) + 0.5 * float(np.sum(np.log(weights)))
    k = p + 1
    aic = 2.0 * k - 2.0 * log_l
    aicc = aic + 2.0 * k * (k + 1) / (n - k - 1) if n - k - 1 > 0 else None
    return aic, aicc


def _p_positive(estimate: float, se: float, dof: int) -> float:
    """One-sided t-test p-value for H0: parameter = 0 against > 0 (FOCUS 2006)."""
    if se <= 0.0:
        return 0.0
    return float(stats.t.sf(estimate / se, dof))


# ---------------------------------------------------------------- fitting
def fit_series(time: Any, concentration: Any, *, time_unit: str = "d", model: str = "SFO",
               method: str = "nls", error_model: str = "constant", loq: float | None = None,
               below_loq: Any = None) -> SeriesFit:
    r"""Fit one concentration-time series with SFO, FOMC, DFOP or HS.

    Parameters
    ----------
    time : array_like
        Sampling times [``time_unit``], >= 0, in any order; replicates repeat
        their sampling time.
    concentration : array_like
        Concentrations, in any one consistent unit or as % of the initial
        amount (the fit is scale-free; C0 comes back in the same unit). Values
        flagged in ``below_loq`` are ignored and may be NaN.
    time_unit : {"s", "min", "h", "d"}
        Unit of ``time`` (converted by :func:`kinetics.units.time_to_s`).
    model : {"SFO", "FOMC", "DFOP", "HS"}
        Kinetic model (FOCUS 2006; equations in the module
        docstring).
    method : {"nls", "loglinear"}
        ``"nls"``: nonlinear least squares on the concentrations. ``"loglinear"``
        (SFO only): ordinary least squares of ln C on t,
        :math:`\ln C = \ln C_0 - k t`; every concentration must then be > 0.
    error_model : {"constant", "proportional"}
        ``"constant"``: the same standard deviation at every point (unweighted
        least squares). ``"proportional"``: standard deviation proportional to
        the model value, fitted by iteratively reweighted least squares with
        weights :math:`1/\hat C_i^2` recomputed from the current fit until the
        estimates stop changing (relative change < 1e-13; fitted values below
        1e-9 of the largest are floored when forming weights). The reweighting
        starts from the constant-variance fit refined with fixed weights
        :math:`1/C_i^2` (zeros weighted like the smallest positive value).
        ``"loglinear"`` accepts only ``"constant"`` (constant variance of ln C).
    loq : float, optional
        Limit of quantification, in the concentration unit of the data.
    below_loq : array_like of bool, optional
        True for each sample reported below the LOQ. If ``loq`` is given and
        ``below_loq`` is not, samples with concentration < ``loq`` are flagged.

    Returns
    -------
    SeriesFit

    Notes
    -----
    **Limit of quantification rule** (common practice, no single source). The
    samples are ordered by time. A sampling time is *trailing* when all its
    samples and all later samples are flagged below the LOQ. Flagged samples
    at the first trailing time are used at LOQ/2; flagged samples at later
    trailing times are dropped (the decline has ended below the LOQ and more
    points at LOQ/2 would fake a plateau); flagged samples before the first
    trailing time (followed by quantified values) are used at LOQ/2.

    **Fitting.** Rate constants, FOMC alpha and beta and the HS breakpoint are
    fitted as logarithms and the DFOP fraction g through its logit, so no bounds
    are needed; the Jacobians are analytic. Starting values come from the
    log-linear SFO fit of the positive values; FOMC, DFOP and HS are started
    from several points derived from it, each with C0 set to its least-squares
    value for the other parameters, and the best fit is kept. The optimiser
    (:func:`scipy.optimize.least_squares`, Levenberg-Marquardt) works on times
    divided by the last sampling time and concentrations divided by the largest
    value; the result is refined by a few Gauss-Newton steps. DFOP is reported
    with :math:`k_1 \ge k_2`.

    **Covariance.** On the fitted scale

    .. math::

        \mathrm{cov}(\hat\theta) = s^2 (J^T W J)^{-1}, \qquad
        s^2 = \frac{\sum_i w_i r_i^2}{n - p}

    (Bates and Watts (1988) Nonlinear regression analysis and its applications,
    Wiley), transformed to the natural scale by the delta method. ``se_ln_k``
    is the standard error of ln k for SFO and of ln DT50 otherwise (the two
    coincide since :math:`k = \ln 2 / DT_{50}`).

    **DT50 and DT90** (FOCUS 2006):

    .. math::

        \text{SFO: } DT_x = \frac{\ln\frac{1}{1-x}}{k}, \qquad
        \text{FOMC: } DT_x = \beta\left((1-x)^{-1/\alpha} - 1\right)

    so :math:`DT_{50} = \ln 2 / k`, :math:`DT_{90} = \ln 10 / k` for SFO and
    :math:`DT_{50} = \beta(2^{1/\alpha} - 1)` for FOMC. HS: :math:`DT_x =
    \ln\frac{1}{1-x}/k_1` if that is at most :math:`t_b`, else
    :math:`t_b + (\ln\frac{1}{1-x} - k_1 t_b)/k_2`. DFOP has no closed form; the
    root of :math:`g e^{-k_1 t} + (1-g) e^{-k_2 t} = 1 - x` is bracketed by
    :math:`\ln\frac{1}{1-x}/k_1` and :math:`\ln\frac{1}{1-x}/k_2` and found with
    :func:`scipy.optimize.brentq`; its gradient comes from implicit
    differentiation.

    **Diagnostics.** ``chi2_error_level_percent`` per FOCUS 2006 (on the
    means of replicates at each sampling time); AIC and AICc from the Gaussian
    likelihood with K = number of model parameters + 1 (sigma);
    ``p_rate_positive`` from a one-sided t-test with ``dof`` degrees of freedom
    on the natural-scale estimate and standard error of each rate parameter
    (FOCUS 2006): SFO k; FOMC alpha and beta; DFOP and HS k1 and
    k2.

    Raises
    ------
    DataError
        Mismatched lengths, an empty series, non-finite or negative values,
        samples at a single time, fewer sampling times than parameters + 1,
        all values equal, or no decline.
    InputError
        Unknown model, method or error model, or an invalid combination.
    UnitError
        Unknown ``time_unit``.
    ConvergenceError
        The optimiser failed from every starting point, the reweighting did
        not settle, or the fit ran to a limit that gives no rate: a flat line,
        a drop to zero before the second sampling time, or an extreme
        parameter value.
    IdentifiabilityError
        The data cannot characterise the parameters of the chosen model: a
        singular or non-finite covariance, a standard error above 20 on the log
        (or logit) scale of a parameter or of DT50/DT90, a DFOP fit with one
        phase only (g at 0 or 1, k1 = k2, or a fast phase over before the second
        sampling time), or an HS breakpoint outside the sampled period.
    """
    model = _choice(model, SERIES_MODELS, "model")
    method = _choice(method, SERIES_METHODS, "method")
    error_model = _choice(error_model, ERROR_MODELS, "error model")
    if method == "loglinear" and model != "SFO":
        raise InputError(f"method 'loglinear' is only defined for model 'SFO', not {model!r}")
    if method == "loglinear" and error_model != "constant":
        raise InputError("method 'loglinear' assumes a constant variance of ln C; use "
                         "error_model='constant' with it, or method='nls' for proportional errors")
    spec = MODELS[model]
    prep = _prepare(time, concentration, time_unit, spec.n_parameters, model, loq, below_loq)
    if method == "loglinear":
        return _fit_loglinear(prep)
    sfo_start = _loglinear_start(prep.t_s, prep.y)
    starts = spec.starts(prep.t_s, prep.y, sfo_start)
    theta = _fit_engine(spec, prep.t_s, prep.y, starts, error_model)
    return _build_fit(spec, theta, prep, error_model)


def _loglinear_start(t: np.ndarray, y: np.ndarray) -> np.ndarray:
    """SFO starting values [C0, ln k] from OLS of ln C on t over positive values."""
    pos = y > 0
    slope = _ols_slope(t[pos], np.log(y[pos]))
    intercept = float(np.mean(np.log(y[pos])) - slope * np.mean(t[pos]))
    return np.array([math.exp(intercept), math.log(-slope)])


def _canonical_dfop(theta: np.ndarray) -> np.ndarray:
    """Order the DFOP phases so that k1 >= k2."""
    if theta[1] < theta[2]:
        return np.array([theta[0], theta[2], theta[1], -theta[3]])
    return theta


def _build_fit(spec, theta, prep: _Prepared, error_model: str) -> SeriesFit:
    t, y = prep.t_s, prep.y
    with np.errstate(over="ignore", under="ignore"):
        natural = natural_from_theta(theta, spec.kinds)
        fitted = spec.predict(theta, t)
    if np.all(np.isfinite(fitted)):
        _check_fitted_decline(spec.name, fitted, t, prep, error_model)
    for name, kind, value in zip(spec.parameter_names, spec.kinds, natural):
        if not math.isfinite(value) or (kind != "amplitude" and value <= 0.0):
            raise ConvergenceError(f"{spec.name}: the fit ran to an extreme value of {name} "
                                   f"({_fmt(value)}); the data do not support this model")
    second = float(t[np.searchsorted(t, t[0], side="right")])
    if spec.name == "DFOP":
        theta = _canonical_dfop(theta)
        g = float(expit(theta[3]))
        ratio = float(np.exp(min(theta[1] - theta[2], 700.0)))
        if not 1e-8 < g < 1.0 - 1e-8 or ratio < 1.0 + 1e-6:
            raise IdentifiabilityError(
                f"DFOP: the data support only one phase (g = {_fmt(g)}, k1/k2 = "
                f"{_fmt(ratio)}); fit SFO or FOMC instead")
        if math.exp(theta[1]) * (second - t[0]) > 27.0:  # fast phase < 1e-12 left
            raise IdentifiabilityError(
                "DFOP: the fast phase is over before the second sampling time "
                f"({_fmt(second / prep.unit_factor)} {prep.time_unit}), so its rate cannot be "
                "estimated; fit SFO or FOMC instead")
    if spec.name == "HS":
        tb = math.exp(theta[3])
        if not t[0] < tb < t[-1]:
            raise IdentifiabilityError(
                f"HS: the fitted breakpoint {_fmt(tb / prep.unit_factor)} {prep.time_unit} lies "
                f"outside the sampled period ({_fmt(t[0] / prep.unit_factor)}-"
                f"{_fmt(t[-1] / prep.unit_factor)} {prep.time_unit}); fit SFO instead")
    with np.errstate(over="ignore", under="ignore"):
        eng = _covariance(spec, theta, t, y, error_model, spec.kinds)
        dt50 = float(spec.dtx(theta, 0.5))
        dt90 = float(spec.dtx(theta, 0.9))
        g50 = spec.dtx_log_gradient(theta, 0.5)
        g90 = spec.dtx_log_gradient(theta, 0.9)
    se_ln_k = math.sqrt(max(float(g50 @ eng.theta_covariance @ g50), 0.0))
    se_ln_dt90 = math.sqrt(max(float(g90 @ eng.theta_covariance @ g90), 0.0))
    se_theta = np.sqrt(np.maximum(np.diag(eng.theta_covariance), 0.0))
    checks = [(f"ln {n}" if kind != "logit" else f"logit {n}", float(se))
              for n, kind, se in zip(spec.parameter_names, spec.kinds, se_theta)
              if kind != "amplitude"] + [("ln dt50_s", se_ln_k), ("ln dt90_s", se_ln_dt90)]
    for label, se in checks:
        if not se <= _MAX_LOG_SE:
            raise IdentifiabilityError(
                f"{spec.name}: the data do not constrain the parameters (standard error of "
                f"{label} = {_fmt(se)}, i.e. uncertain by a factor of more than "
                f"e^{_MAX_LOG_SE:g}); try a model with fewer parameters or more sampling times")
    k = float(math.exp(theta[1])) if spec.name == "SFO" else _LN2 / dt50
    return _assemble(spec.name, "nls", error_model, spec.parameter_names, eng, prep, k, se_ln_k,
                     se_ln_dt90, dt50, dt90, spec.rate_parameters, spec.kinds)


def _assemble(model, method, error_model, names, eng: _EngineResult, prep: _Prepared, k,
              se_ln_k, se_ln_dt90, dt50, dt90, rate_names, kinds,
              chi2=None, aic_pair=None) -> SeriesFit:
    t, y = prep.t_s, prep.y
    n, p = y.size, len(names)
    if chi2 is None:
        chi2 = _chi2_error_level(prep.group, prep.n_times, y, eng.fitted, p)
    if aic_pair is None:
        aic_pair = _information_criteria(n, p, eng.rss, eng.weights,
                                         float(np.sum(eng.weights * y ** 2)))
    p_pos = {nm: _p_positive(float(eng.estimates[i]), float(eng.standard_errors[i]), eng.dof)
             for i, nm in enumerate(names) if nm in rate_names}
    values = [dt50, dt90, k, se_ln_k, se_ln_dt90, chi2[0], aic_pair[0], eng.rss]
    if not all(math.isfinite(v) for v in values) or not np.all(np.isfinite(eng.covariance)):
        raise ConvergenceError(f"{model}: the fit produced non-finite statistics; the data "
                               "do not support this model")
    return SeriesFit(
        model=model,
        method=method,
        error_model=error_model,
        parameter_names=tuple(names),
        estimates=_frozen(eng.estimates),
        covariance=_frozen(eng.covariance),
        standard_errors=_frozen(eng.standard_errors),
        dof=int(eng.dof),
        time_s=_frozen(t),
        concentration=_frozen(y),
        fitted=_frozen(eng.fitted),
        residuals=_frozen(y - eng.fitted),
        k_per_s=float(k),
        se_ln_k=float(se_ln_k),
        se_ln_dt90=float(se_ln_dt90),
        dt50_s=float(dt50),
        dt90_s=float(dt90),
        chi2_error_level_percent=float(chi2[0]),
        chi2_dof=int(chi2[1]),
        aic=float(aic_pair[0]),
        aicc=None if aic_pair[1] is None else float(aic_pair[1]),
        rss=float(eng.rss),
        residual_scale=math.sqrt(eng.sigma2),
        n_points=int(n),
        p_rate_positive=p_pos,
        n_below_loq_set=prep.n_set,
        n_below_loq_dropped=prep.n_dropped,
        _theta=_frozen(eng.theta),
        _theta_covariance=_frozen(eng.theta_covariance),
        _kinds=tuple(kinds),
    )


def _fit_loglinear(prep: _Prepared) -> SeriesFit:
    """SFO by ordinary least squares of ln C on t."""
    t, y = prep.t_s, prep.y
    if np.any(y <= 0):
        i = int(np.argmax(y <= 0))
        raise DataError(f"method 'loglinear' needs every concentration > 0, but the value at "
                        f"{_fmt(t[i] / prep.unit_factor)} {prep.time_unit} is {_fmt(y[i])}; "
                        "use method='nls'")
    n = y.size
    ly = np.log(y)
    x = np.column_stack((np.ones(n), t))
    coef, *_ = np.linalg.lstsq(x, ly, rcond=None)
    a, b = float(coef[0]), float(coef[1])
    resid = ly - x @ coef
    dof = n - 2
    rss = float(resid @ resid)
    s2 = rss / dof
    xtx_inv = np.linalg.inv(x.T @ x)
    theta_cov = s2 * xtx_inv
    c0, k = math.exp(a), -b
    g = np.array([c0, -1.0])
    cov = theta_cov * np.outer(g, g)
    se = np.sqrt(np.diag(cov))
    fitted = c0 * np.exp(-k * t)
    eng = _EngineResult(np.array([a, b]), theta_cov, np.array([c0, k]), cov, se, fitted,
                        np.ones(n), rss, dof, s2)
    se_ln_k = float(se[1] / k)
    # the likelihood of ln C, expressed for C (Jacobian of the log transform: 1/C)
    aic, aicc = _information_criteria(n, 2, rss, np.ones(n), float(ly @ ly))
    aic += 2.0 * float(np.sum(ly))
    if aicc is not None:
        aicc += 2.0 * float(np.sum(ly))
    chi2 = _chi2_error_level(prep.group, prep.n_times, y, fitted, 2)
    return _assemble("SFO", "loglinear", "constant", MODELS["SFO"].parameter_names, eng, prep, k,
                     se_ln_k, se_ln_k, _LN2 / k, _LN10 / k, ("k_per_s",),
                     ("log_amplitude", "negated_log_rate"), chi2=chi2, aic_pair=(aic, aicc))


# ------------------------------------------------------- exponential rise
def _fit_exponential_rise(x: Any, y: Any, start: Sequence[float]) -> _EngineResult:
    """Fit y = b1 (1 - exp(-b2 x)) with the series least-squares engine.

    The same machinery as :func:`fit_series` (rate in log space, analytic
    Jacobian, rescaled problem, Levenberg-Marquardt plus Gauss-Newton
    refinement, covariance ``s^2 (J^T J)^-1``), exposed for checking the engine
    against certified nonlinear-regression results. ``start`` = (b1, b2), b2 > 0.
    """
    xv = _float_vector(x, "x")
    yv = _float_vector(y, "y")
    if xv.size != yv.size or xv.size < 3:
        raise DataError(f"x and y must have the same length >= 3, got {xv.size} and {yv.size}")
    b1, b2 = (float(v) for v in start)
    if not b2 > 0:
        raise InputError(f"the starting rate b2 must be > 0, got {b2!r}")
    theta = _fit_engine(EXPONENTIAL_RISE, xv, yv, [np.array([b1, math.log(b2)])], "constant")
    return _covariance(EXPONENTIAL_RISE, theta, xv, yv, "constant", EXPONENTIAL_RISE.kinds)


# ----------------------------------------------------------- batch of SFO
def fit_sfo_batch(series: Sequence[Sequence[Any]], *, time_unit: str = "d",
                  error_model: str = "constant") -> list[SeriesFit]:
    r"""Fit SFO to many series at once (vectorised Levenberg-Marquardt).

    Each series is fitted as :func:`fit_series` with ``model="SFO"``,
    ``method="nls"`` fits it (same checks, starting values, rescaling,
    reweighting for proportional errors and statistics, see there), but the
    iterations and the statistics run on all series together as numpy arrays,
    with no per-series solver call. Estimates and standard errors agree with
    :func:`fit_series` to about 1e-10 relative. A series whose vectorised
    iteration ends where the model is not finite (with proportional errors,
    when the smallest concentrations lie many orders of magnitude below the
    others) is refitted alone by the engine of :func:`fit_series`.

    Parameters
    ----------
    series : sequence of (time, concentration) pairs
        Each pair as accepted by :func:`fit_series` (times in ``time_unit``).
    time_unit : {"s", "min", "h", "d"}
        Unit of every time array.
    error_model : {"constant", "proportional"}
        As in :func:`fit_series`.

    Returns
    -------
    list of SeriesFit
        One per series, in order.

    Raises
    ------
    DataError
        If any series is invalid; the message starts with the series index.
    ConvergenceError, IdentifiabilityError
        If the fit of a series fails; the message names the series index.
    """
    error_model = _choice(error_model, ERROR_MODELS, "error model")
    factor = float(units.time_to_s(1.0, time_unit))
    preps = _prepare_batch(series, time_unit, factor)
    if not preps:
        return []
    b = len(preps)
    sizes = np.array([p.y.size for p in preps])
    m = int(sizes.max())
    mask = (np.arange(m)[None, :] < sizes[:, None]).astype(float)
    t_s = np.zeros((b, m))
    y = np.zeros((b, m))
    for i, p in enumerate(preps):
        t_s[i, :sizes[i]] = p.t_s
        y[i, :sizes[i]] = p.y
    tscale = t_s.max(axis=1)
    yscale = np.abs(y).max(axis=1)
    ts = t_s / tscale[:, None]
    ys = y / yscale[:, None]
    with np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore"):
        theta = _batch_loglinear_start(ts, ys, mask)
        # amplitude projection, as in _amplitude_projection
        e1 = np.exp(-np.exp(theta[:, 1])[:, None] * ts) * mask
        amp = np.sum(e1 * ys, axis=1) / np.sum(e1 * e1, axis=1)
        theta[:, 0] = np.where(np.isfinite(amp) & (amp > 0), amp, theta[:, 0])
        theta, collapsed = _batch_solve(theta, ts, ys, mask, error_model)
        # back to seconds and the data's concentration unit, as in _from_scaled
        theta = np.column_stack((theta[:, 0] * yscale, theta[:, 1] - np.log(tscale)))
        k = np.exp(theta[:, 1])
        f = theta[:, 0][:, None] * np.exp(-k[:, None] * t_s)
        healthy = (~collapsed & np.all(np.isfinite(theta), axis=1) & np.isfinite(k) & (k > 0)
                   & np.all(np.isfinite(f), axis=1) & (f[:, 0] > 0))
    # The reweighting for proportional errors can run off to a vanishing amplitude
    # or an unbounded rate when the smallest concentrations are many orders of
    # magnitude below the others; such a series is refitted by the single-series
    # engine, whose outcome (a fit or an error) is that of fit_series.
    for i in np.flatnonzero(~healthy):
        theta[i] = _single_sfo_theta(preps[i], error_model, i)
    return _batch_results(preps, theta, t_s, y, mask, sizes, error_model)


def _single_sfo_theta(prep: _Prepared, error_model: str, index: int) -> np.ndarray:
    """[C0, ln k] of one prepared series by the engine of :func:`fit_series`."""
    spec = MODELS["SFO"]
    try:
        starts = spec.starts(prep.t_s, prep.y, _loglinear_start(prep.t_s, prep.y))
        return _fit_engine(spec, prep.t_s, prep.y, starts, error_model)
    except KineticsError as exc:
        raise type(exc)(f"series[{index}]: {exc}") from None


def _prepare_batch(series, time_unit: str, factor: float) -> list[_Prepared]:
    """_prepare for many SFO series, with the common checks vectorised.

    Series that pass every check of the vectorised path are prepared here; any
    other series goes through :func:`_prepare`, which raises its message (with
    the series index) or prepares it, so the outcome is that of :func:`_prepare`.
    """
    pairs = []
    for i, item in enumerate(series):
        try:
            tt, cc = item
        except (TypeError, ValueError):
            raise DataError(f"series[{i}] must be a (time, concentration) pair") from None
        pairs.append((tt, cc))
    if not pairs:
        return []

    def slow(i):
        try:
            return _prepare(pairs[i][0], pairs[i][1], time_unit, 2, "SFO", unit_factor=factor)
        except DataError as exc:
            raise DataError(f"series[{i}]: {exc}") from None

    b = len(pairs)
    arrays: list = [None] * b
    simple = np.zeros(b, dtype=bool)
    for i, (tt, cc) in enumerate(pairs):
        try:
            t = np.array(tt, dtype=float)
            c = np.array(cc, dtype=float)
        except (TypeError, ValueError):
            continue
        if t.ndim == 1 and c.ndim == 1 and t.size == c.size and t.size > 0:
            arrays[i] = (t, c)
            simple[i] = True
    sizes = np.array([a[0].size if a is not None else 0 for a in arrays])
    m = int(sizes.max()) if simple.any() else 0
    out: list = [None] * b
    if m > 0:
        t_all = np.full((b, m), np.inf)
        c_all = np.zeros((b, m))
        for i in np.flatnonzero(simple):
            t_all[i, :sizes[i]] = arrays[i][0]
            c_all[i, :sizes[i]] = arrays[i][1]
        valid = np.arange(m)[None, :] < sizes[:, None]
        with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
            ok = simple.copy()
            ok &= ~np.any(valid & ~np.isfinite(t_all), axis=1)
            ok &= ~np.any(valid & (t_all < 0), axis=1)
            ok &= ~np.any(valid & ~(np.isfinite(c_all) & (c_all >= 0)), axis=1)
            order = np.argsort(np.where(ok[:, None] & valid, t_all, np.inf), axis=1,
                               kind="stable")
            t_all = np.take_along_axis(t_all, order, axis=1)
            c_all = np.take_along_axis(c_all, order, axis=1)
            new = np.ones((b, m), dtype=bool)
            new[:, 1:] = t_all[:, 1:] != t_all[:, :-1]
            new &= valid
            group = np.cumsum(new, axis=1) - 1
            n_times = new.sum(axis=1)
            ok &= n_times >= 3
            ok &= np.any(valid & (c_all != c_all[:, :1]), axis=1)
            pos = valid & (c_all > 0)
            t_first = np.where(pos, t_all, np.inf).min(axis=1)
            t_last = np.where(pos, t_all, -np.inf).max(axis=1)
            ok &= t_last > t_first
            npos = pos.sum(axis=1)
            tm = np.where(pos, t_all, 0.0).sum(axis=1) / np.maximum(npos, 1)
            xm = np.where(pos, t_all - tm[:, None], 0.0)
            lc = np.where(pos, np.log(np.where(pos, c_all, 1.0)), 0.0)
            slope = (xm * lc).sum(axis=1) / (xm * xm).sum(axis=1)
            ok &= np.isfinite(slope) & (slope < 0)
        # seconds only for the series kept here: the others may hold times whose
        # conversion overflows, and _prepare refuses them with its own message
        for i in np.flatnonzero(ok):
            n = sizes[i]
            out[i] = _Prepared(t_all[i, :n] * factor, c_all[i, :n].copy(), group[i, :n].copy(),
                               int(n_times[i]), time_unit, factor, 0, 0)
    for i in range(b):
        if out[i] is None:
            out[i] = slow(i)
    return out


def _batch_results(preps, theta, t_s, y, mask, sizes, error_model):
    """Statistics of every SFO series at once, as _covariance and _assemble compute them."""
    b = theta.shape[0]
    c0 = theta[:, 0]
    k = np.exp(theta[:, 1])
    with np.errstate(under="ignore"):
        e = np.exp(-k[:, None] * t_s)
    f = c0[:, None] * e
    first = f[:, 0]
    last = f[np.arange(b), sizes - 1]
    second = f[np.arange(b), [p.group.searchsorted(1) for p in preps]]
    bad = ~(first > 0) | ~(1.0 - last / first >= 1e-9) | ~(second >= 1e-9 * first)
    for i in np.flatnonzero(bad):
        _check_fitted_decline("SFO", f[i, :sizes[i]], preps[i].t_s, preps[i], error_model,
                              where=f"series[{i}]: ")
    w = _batch_weights(f, mask, error_model)
    j1 = -f * k[:, None] * t_s
    a00 = np.sum(w * e * e, axis=1)
    a01 = np.sum(w * e * j1, axis=1)
    a11 = np.sum(w * j1 * j1, axis=1)
    r = (y - f) * mask
    rss = np.sum(w * r * r, axis=1)
    dof = sizes - 2
    sigma2 = rss / dof
    n0, n1 = np.sqrt(a00), np.sqrt(a11)
    bad = ~((n0 > 0) & (n1 > 0) & np.isfinite(n0) & np.isfinite(n1))
    if bad.any():
        i = int(np.argmax(bad))
        raise IdentifiabilityError(f"series[{i}]: SFO: at the fitted parameters the model does "
                                   "not depend on one of them; the data cannot characterise it")
    with np.errstate(divide="ignore", invalid="ignore"):
        rho = a01 / (n0 * n1)
        one_minus = (1.0 - rho) * (1.0 + rho)
        cond = np.sqrt((1.0 + np.abs(rho)) / (1.0 - np.abs(rho)))
    bad = ~(one_minus > 0) | ~(cond <= _COND_LIMIT)
    if bad.any():
        i = int(np.argmax(bad))
        raise IdentifiabilityError(f"series[{i}]: SFO: the parameters cannot be told apart by "
                                   "these data; check the sampling times")
    # (J^T W J)^-1 of the column-scaled 2x2 matrix [[1, rho], [rho, 1]], then unscaled
    inv00 = 1.0 / one_minus / (n0 * n0)
    inv11 = 1.0 / one_minus / (n1 * n1)
    inv01 = -rho / one_minus / (n0 * n1)
    tc00, tc01, tc11 = sigma2 * inv00, sigma2 * inv01, sigma2 * inv11
    # natural scale: d C0 / d C0 = 1, d k / d ln k = k
    cov00, cov01, cov11 = tc00, tc01 * k, tc11 * k * k
    se0, se1 = np.sqrt(cov00), np.sqrt(cov11)
    se_ln_k = np.sqrt(tc11)
    # FOCUS chi-square error level on the means at each sampling time
    n_times = np.array([p.n_times for p in preps])
    offsets = np.concatenate(([0], np.cumsum(n_times)[:-1]))
    gidx = np.concatenate([p.group + o for p, o in zip(preps, offsets)])
    flat = mask.astype(bool)
    counts = np.bincount(gidx)
    obs = np.bincount(gidx, weights=y[flat]) / counts
    calc = np.bincount(gidx, weights=f[flat]) / counts
    series_of_time = np.repeat(np.arange(b), n_times)
    mean_obs = np.bincount(series_of_time, weights=obs) / n_times
    sq = np.bincount(series_of_time, weights=(calc - obs) ** 2)
    chi2_dof = n_times - 2
    q = np.array([_chi2_quantile(int(d)) for d in chi2_dof])
    chi2_err = 100.0 / mean_obs * np.sqrt(sq / q)
    # AIC / AICc, as in _information_criteria (K = 3)
    scale_sum_sq = np.sum(w * y * y, axis=1)
    tiny = np.finfo(float).tiny
    rss_floor = np.maximum(np.maximum(rss, np.finfo(float).eps ** 2 * scale_sum_sq), tiny)
    with np.errstate(divide="ignore"):
        log_w = np.where(mask > 0, np.log(np.where(mask > 0, w, 1.0)), 0.0)
    log_l = -0.5 * sizes * (np.log(2.0 * math.pi * rss_floor / sizes) + 1.0) \
        + 0.5 * np.sum(log_w, axis=1)
    aic = 6.0 - 2.0 * log_l
    with np.errstate(divide="ignore"):
        p_pos = np.where(se1 > 0, stats.t.sf(k / np.where(se1 > 0, se1, 1.0), dof), 0.0)
    bad = ~(se_ln_k <= _MAX_LOG_SE)
    if bad.any():
        i = int(np.argmax(bad))
        raise IdentifiabilityError(
            f"series[{i}]: SFO: the data do not constrain the parameters (standard error of "
            f"ln k_per_s = {_fmt(float(se_ln_k[i]))}, i.e. uncertain by a factor of more than "
            f"e^{_MAX_LOG_SE:g}); try more sampling times")
    dt50 = _LN2 / k
    dt90 = _LN10 / k
    values = np.column_stack((dt50, dt90, k, se_ln_k, chi2_err, aic, rss, cov00, cov11))
    bad = ~np.all(np.isfinite(values), axis=1)
    if bad.any():
        i = int(np.argmax(bad))
        raise ConvergenceError(f"series[{i}]: SFO: the fit produced non-finite statistics; "
                               "the data do not support this model")
    names = MODELS["SFO"].parameter_names
    kinds = MODELS["SFO"].kinds
    # read-only batch arrays; each fit gets row views (no per-series copies)
    est_all = _frozen(np.column_stack((c0, k)))
    se_all = _frozen(np.column_stack((se0, se1)))
    cov_all = _frozen(np.stack((np.column_stack((cov00, cov01)),
                                np.column_stack((cov01, cov11))), axis=1))
    tcov_all = _frozen(np.stack((np.column_stack((tc00, tc01)),
                                 np.column_stack((tc01, tc11))), axis=1))
    theta_all = _frozen(theta)
    fitted_all = _frozen(f)
    resid_all = _frozen(y - f)
    n_list = sizes.tolist()
    k_list, se_list = k.tolist(), se_ln_k.tolist()
    dt50_list, dt90_list = dt50.tolist(), dt90.tolist()
    chi2_list, chi2_dof_list = chi2_err.tolist(), chi2_dof.tolist()
    aic_list, rss_list, p_list = aic.tolist(), rss.tolist(), p_pos.tolist()
    scale_list = np.sqrt(sigma2).tolist()
    fits = []
    for i, p in enumerate(preps):
        n = n_list[i]
        p.t_s.setflags(write=False)
        p.y.setflags(write=False)
        fits.append(SeriesFit(
            model="SFO",
            method="nls",
            error_model=error_model,
            parameter_names=names,
            estimates=est_all[i],
            covariance=cov_all[i],
            standard_errors=se_all[i],
            dof=n - 2,
            time_s=p.t_s,
            concentration=p.y,
            fitted=fitted_all[i, :n],
            residuals=resid_all[i, :n],
            k_per_s=k_list[i],
            se_ln_k=se_list[i],
            se_ln_dt90=se_list[i],
            dt50_s=dt50_list[i],
            dt90_s=dt90_list[i],
            chi2_error_level_percent=chi2_list[i],
            chi2_dof=chi2_dof_list[i],
            aic=aic_list[i],
            aicc=aic_list[i] + 24.0 / (n - 4) if n > 4 else None,
            rss=rss_list[i],
            residual_scale=scale_list[i],
            n_points=n,
            p_rate_positive={"k_per_s": p_list[i]},
            n_below_loq_set=0,
            n_below_loq_dropped=0,
            _theta=theta_all[i],
            _theta_covariance=tcov_all[i],
            _kinds=kinds,
        ))
    return fits


def _batch_loglinear_start(ts, ys, mask):
    """Vectorised OLS of ln C on t over positive values, as in _loglinear_start."""
    pos = mask * (ys > 0)
    ly = np.where(ys > 0, np.log(np.where(ys > 0, ys, 1.0)), 0.0)
    npos = pos.sum(axis=1)
    tm = (pos * ts).sum(axis=1) / npos
    lm = (pos * ly).sum(axis=1) / npos
    dt = (ts - tm[:, None]) * pos
    slope = (dt * (ly - lm[:, None])).sum(axis=1) / (dt * dt).sum(axis=1)
    intercept = lm - slope * tm
    return np.column_stack((np.exp(intercept), np.log(-slope)))


def _batch_model(theta, ts):
    k = np.exp(theta[:, 1])[:, None]
    e = np.exp(-k * ts)
    f = theta[:, 0][:, None] * e
    return f, e, k


def _batch_weights(f, mask, error_model):
    if error_model == "constant":
        return mask.copy()
    fmax = np.max(np.abs(f) * mask, axis=1, keepdims=True)
    return mask / np.maximum(np.abs(f), _WEIGHT_FLOOR * fmax) ** 2


def _batch_lm(theta, ts, ys, w, max_iter=500):
    """Levenberg-Marquardt on every series at fixed weights, then Gauss-Newton polish."""
    b = theta.shape[0]
    lam = np.full(b, 1e-3)
    active = np.ones(b, dtype=bool)
    f, e, k = _batch_model(theta, ts)
    obj = np.sum(w * (ys - f) ** 2, axis=1)
    sumsq = np.sum(w * ys * ys, axis=1)
    for _ in range(max_iter):
        if not active.any():
            break
        j0 = e
        j1 = -f * k * ts
        r = ys - f
        a00 = np.sum(w * j0 * j0, axis=1)
        a01 = np.sum(w * j0 * j1, axis=1)
        a11 = np.sum(w * j1 * j1, axis=1)
        g0 = np.sum(w * j0 * r, axis=1)
        g1 = np.sum(w * j1 * r, axis=1)
        d00 = a00 * (1.0 + lam)
        d11 = a11 * (1.0 + lam)
        det = d00 * d11 - a01 * a01
        s0 = (d11 * g0 - a01 * g1) / det
        s1 = (d00 * g1 - a01 * g0) / det
        step = np.column_stack((s0, s1))
        step[~active] = 0.0
        cand = theta + step
        fc, ec, kc = _batch_model(cand, ts)
        objc = np.sum(w * (ys - fc) ** 2, axis=1)
        ok = active & np.isfinite(objc) & (objc <= obj)
        theta = np.where(ok[:, None], cand, theta)
        obj = np.where(ok, objc, obj)
        lam = np.where(ok, np.maximum(lam / 10.0, 1e-12), lam * 10.0)
        # stop when the predicted gain is at rounding level of the objective; the
        # Gauss-Newton polish below then settles the last digits
        pred = s0 * g0 + s1 * g1
        active &= ~((pred <= 1e-12 * obj + 1e-30 * sumsq) | (lam > 1e12))
        f, e, k = _batch_model(theta, ts)
    # Gauss-Newton polish, as in _gauss_newton_polish
    polishing = np.ones(b, dtype=bool)
    for _ in range(10):
        if not polishing.any():
            break
        f, e, k = _batch_model(theta, ts)
        j0 = e
        j1 = -f * k * ts
        r = ys - f
        a00 = np.sum(w * j0 * j0, axis=1)
        a01 = np.sum(w * j0 * j1, axis=1)
        a11 = np.sum(w * j1 * j1, axis=1)
        g0 = np.sum(w * j0 * r, axis=1)
        g1 = np.sum(w * j1 * r, axis=1)
        det = a00 * a11 - a01 * a01
        step = np.column_stack(((a11 * g0 - a01 * g1) / det, (a00 * g1 - a01 * g0) / det))
        cand = theta + step
        fc, _, _ = _batch_model(cand, ts)
        objc = np.sum(w * (ys - fc) ** 2, axis=1)
        ok = polishing & np.isfinite(objc) & (objc <= obj * (1.0 + 1e-12) + 1e-300)
        theta = np.where(ok[:, None], cand, theta)
        obj = np.where(ok, objc, obj)
        tiny = np.max(np.abs(step), axis=1) <= 1e-13 * (1.0 + np.max(np.abs(theta), axis=1))
        polishing &= ok & ~tiny
    return theta


def _batch_solve(theta, ts, ys, mask, error_model):
    """Constant-variance fit of every series, then reweighting for proportional errors.

    Returns the scaled parameters and, per series, whether the bridge to the
    reweighting lost the amplitude (such series are refitted one at a time).
    """
    if not np.all(np.isfinite(theta)):
        bad = int(np.argmax(~np.all(np.isfinite(theta), axis=1)))
        raise ConvergenceError(f"series[{bad}]: no finite SFO starting values")
    theta = _batch_lm(theta, ts, ys, mask)
    collapsed = np.zeros(theta.shape[0], dtype=bool)
    if error_model == "proportional":
        # bridge with fixed weights 1/y^2, as in _fit_engine / _observed_weights
        pos = (ys > 0) & (mask > 0)
        floor = np.where(pos, ys, np.inf).min(axis=1, keepdims=True)
        w_obs = mask / np.maximum(ys, floor) ** 2
        bridged = _batch_lm(theta, ts, ys, w_obs)
        # a bridged curve that stays a thousandfold below the largest measured
        # value (1 on this scale) has lost the amplitude to the smallest values,
        # which dominate the weights 1/y^2; the caller refits such a series alone
        f_b, _, _ = _batch_model(bridged, ts)
        collapsed = ~(np.max(f_b * mask, axis=1) >= 1e-3)
        theta = np.where(np.all(np.isfinite(bridged), axis=1)[:, None], bridged, theta)
        f, _, _ = _batch_model(theta, ts)
        w = _batch_weights(f, mask, error_model)
        for _ in range(_IRLS_MAX):
            new = _batch_lm(theta, ts, ys, w)
            change = np.max(np.abs(new - theta) / (1.0 + np.abs(new)))
            theta = new
            f, _, _ = _batch_model(theta, ts)
            w = _batch_weights(f, mask, error_model)
            if not change >= _IRLS_TOL:
                break
        else:
            raise ConvergenceError(f"SFO batch: the reweighting for proportional errors did "
                                   f"not settle in {_IRLS_MAX} iterations")
    # rows that ended at non-finite values are refitted one by one by the caller
    return theta, collapsed
