"""Private model definitions for :mod:`kinetics.series`.

Each degradation model is described by a :class:`_Model`: its prediction, its
analytic Jacobian with respect to the *fitted* parameter vector ``theta``, the
time to a given fraction lost (DTx) and the gradient of ``ln DTx`` with respect
to ``theta``. Rate-like parameters are fitted in log space and the DFOP fraction
``g`` through the logit, so every model is fitted without bounds.

Fitted parameter vectors (``theta``), times in any consistent unit:

===== ================================================================
SFO   ``[C0, ln k]``
FOMC  ``[C0, ln alpha, ln beta]``
DFOP  ``[C0, ln k1, ln k2, logit g]``
HS    ``[C0, ln k1, ln k2, ln tb]``
===== ================================================================

The equations are those of FOCUS (2006) Guidance document on estimating
persistence and degradation kinetics from environmental fate studies on
pesticides in EU registration, Sanco/10058/2005 v2.0; they are written out in
the module docstring of :mod:`kinetics.series` and in :func:`kinetics.series.fit_series`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.optimize import brentq
from scipy.special import expit

__all__ = ["MODELS", "EXPONENTIAL_RISE", "natural_from_theta", "natural_gradient"]

# Kinds of fitted parameters. They fix how a parameter is mapped to the natural
# scale and how it moves when the optimiser works on rescaled time and
# concentration (see kinetics.series._to_scaled).
#   amplitude : natural = theta, proportional to the concentration scale
#   log_rate  : natural = exp(theta), a rate [1/time]
#   log_time  : natural = exp(theta), a time [time]
#   log       : natural = exp(theta), dimensionless
#   logit     : natural = expit(theta), a fraction in (0, 1)
KINDS = ("amplitude", "log_rate", "log_time", "log", "logit")


@dataclass(frozen=True)
class _Model:
    name: str
    parameter_names: tuple[str, ...]
    kinds: tuple[str, ...]
    rate_parameters: tuple[str, ...]
    predict: Callable[[np.ndarray, np.ndarray], np.ndarray]
    jacobian: Callable[[np.ndarray, np.ndarray], np.ndarray]
    dtx: Callable[[np.ndarray, float], float] | None  # None: the curve has no DTx
    dtx_log_gradient: Callable[[np.ndarray, float], np.ndarray] | None
    starts: Callable[[np.ndarray, np.ndarray, np.ndarray], list[np.ndarray]]

    @property
    def n_parameters(self) -> int:
        return len(self.parameter_names)


def natural_from_theta(theta: np.ndarray, kinds: tuple[str, ...]) -> np.ndarray:
    """Map fitted parameters to the natural scale."""
    out = np.empty_like(theta, dtype=float)
    for i, kind in enumerate(kinds):
        if kind == "amplitude":
            out[i] = theta[i]
        elif kind == "logit":
            out[i] = expit(theta[i])
        else:
            out[i] = np.exp(theta[i])
    return out


def natural_gradient(theta: np.ndarray, kinds: tuple[str, ...]) -> np.ndarray:
    """Diagonal of d natural / d theta (the delta-method factors)."""
    nat = natural_from_theta(theta, kinds)
    out = np.empty_like(nat)
    for i, kind in enumerate(kinds):
        if kind == "amplitude":
            out[i] = 1.0
        elif kind == "logit":
            out[i] = nat[i] * (1.0 - nat[i])
        else:
            out[i] = nat[i]
    return out


def _lost(fraction_lost: float) -> float:
    """L = ln(1 / (1 - x)) for the fraction lost x (ln 2 for DT50, ln 10 for DT90)."""
    return float(-np.log1p(-fraction_lost))


def _ols_slope(x: np.ndarray, y: np.ndarray) -> float:
    """Ordinary least-squares slope of y on x."""
    xm = x - x.sum() / x.size
    return float(np.dot(xm, y) / np.dot(xm, xm))


def _loglinear_rate(t: np.ndarray, y: np.ndarray) -> float | None:
    """Slope-based first-order rate from positive values, or None if not declining."""
    keep = y > 0
    tk = t[keep]
    if np.unique(tk).size < 2:
        return None
    with np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore"):
        slope = _ols_slope(tk, np.log(y[keep]))
    return -slope if np.isfinite(slope) and slope < 0 else None


# ----------------------------------------------------------------------- SFO
def _sfo_predict(theta, t):
    return theta[0] * np.exp(-np.exp(theta[1]) * t)


def _sfo_jacobian(theta, t):
    k = np.exp(theta[1])
    e = np.exp(-k * t)
    return np.column_stack((e, -theta[0] * k * t * e))


def _sfo_dtx(theta, x):
    return _lost(x) / np.exp(theta[1])


def _sfo_dtx_log_gradient(theta, x):
    return np.array([0.0, -1.0])


def _sfo_starts(t, y, sfo):
    return [np.asarray(sfo, dtype=float)]


# ---------------------------------------------------------------------- FOMC
def _fomc_predict(theta, t):
    alpha, beta = np.exp(theta[1]), np.exp(theta[2])
    return theta[0] * np.exp(-alpha * np.log1p(t / beta))


def _fomc_jacobian(theta, t):
    alpha, beta = np.exp(theta[1]), np.exp(theta[2])
    u = t / beta
    f = theta[0] * np.exp(-alpha * np.log1p(u))
    return np.column_stack((
        np.exp(-alpha * np.log1p(u)),
        -alpha * np.log1p(u) * f,
        f * alpha * u / (1.0 + u),
    ))


def _fomc_dtx(theta, x):
    alpha, beta = np.exp(theta[1]), np.exp(theta[2])
    return beta * np.expm1(_lost(x) / alpha)


def _fomc_dtx_log_gradient(theta, x):
    alpha = np.exp(theta[1])
    a = _lost(x) / alpha
    # d ln(expm1(a)) / d ln(alpha) = -a exp(a) / expm1(a) = -a / (1 - exp(-a)),
    # which tends to -1 as a -> 0 (alpha -> infinity, the SFO limit)
    ratio = 1.0 if a < 1e-12 else a / -np.expm1(-a)
    return np.array([0.0, -ratio, 1.0])


def _fomc_starts(t, y, sfo):
    c0, lnk = sfo
    k = np.exp(lnk)
    # FOMC tends to SFO as alpha -> infinity with alpha / beta = k.
    return [np.array([c0, np.log(a), np.log(a / k)]) for a in (0.5, 2.0, 10.0)]


# ---------------------------------------------------------------------- DFOP
def _dfop_predict(theta, t):
    k1, k2, g = np.exp(theta[1]), np.exp(theta[2]), expit(theta[3])
    return theta[0] * (g * np.exp(-k1 * t) + (1.0 - g) * np.exp(-k2 * t))


def _dfop_jacobian(theta, t):
    c0 = theta[0]
    k1, k2, g = np.exp(theta[1]), np.exp(theta[2]), expit(theta[3])
    e1, e2 = np.exp(-k1 * t), np.exp(-k2 * t)
    return np.column_stack((
        g * e1 + (1.0 - g) * e2,
        -c0 * g * k1 * t * e1,
        -c0 * (1.0 - g) * k2 * t * e2,
        c0 * (e1 - e2) * g * (1.0 - g),
    ))


def _dfop_remaining(theta, t):
    k1, k2, g = np.exp(theta[1]), np.exp(theta[2]), expit(theta[3])
    return g * np.exp(-k1 * t) + (1.0 - g) * np.exp(-k2 * t)


def _dfop_dtx(theta, x):
    k1, k2 = np.exp(theta[1]), np.exp(theta[2])
    target = 1.0 - x
    lost = _lost(x)
    # The remaining fraction lies between exp(-k_max t) and exp(-k_min t), so the
    # root lies between lost / k_max and lost / k_min.
    lo, hi = lost / max(k1, k2), lost / min(k1, k2)
    if hi - lo <= 1e-14 * hi:
        return hi
    return brentq(lambda s: _dfop_remaining(theta, s) - target, lo, hi,
                  xtol=1e-300, rtol=4.0 * np.finfo(float).eps, maxiter=500)


def _dfop_dtx_log_gradient(theta, x):
    t = _dfop_dtx(theta, x)
    k1, k2, g = np.exp(theta[1]), np.exp(theta[2]), expit(theta[3])
    e1, e2 = np.exp(-k1 * t), np.exp(-k2 * t)
    # Implicit differentiation of F(t, theta) = g e1 + (1 - g) e2 - (1 - x) = 0.
    dfdt = -(g * k1 * e1 + (1.0 - g) * k2 * e2)
    dfdth = np.array([
        0.0,
        -g * k1 * t * e1,
        -(1.0 - g) * k2 * t * e2,
        (e1 - e2) * g * (1.0 - g),
    ])
    return -dfdth / dfdt / t


def _dfop_starts(t, y, sfo):
    c0, lnk = sfo
    starts = []
    for ratio in (3.0, 10.0):
        for g in (0.3, 0.6, 0.85):
            starts.append(np.array([c0, lnk + np.log(ratio), lnk - np.log(ratio),
                                    np.log(g / (1.0 - g))]))
    return starts


# ------------------------------------------------------------------------ HS
def _hs_predict(theta, t):
    k1, k2, tb = np.exp(theta[1]), np.exp(theta[2]), np.exp(theta[3])
    return theta[0] * np.exp(-k1 * np.minimum(t, tb) - k2 * np.maximum(t - tb, 0.0))


def _hs_jacobian(theta, t):
    k1, k2, tb = np.exp(theta[1]), np.exp(theta[2]), np.exp(theta[3])
    before = np.minimum(t, tb)
    after = np.maximum(t - tb, 0.0)
    e = np.exp(-k1 * before - k2 * after)
    f = theta[0] * e
    return np.column_stack((
        e,
        -k1 * before * f,
        -k2 * after * f,
        np.where(t > tb, (k2 - k1) * tb * f, 0.0),
    ))


def _hs_dtx(theta, x):
    k1, k2, tb = np.exp(theta[1]), np.exp(theta[2]), np.exp(theta[3])
    lost = _lost(x)
    if lost <= k1 * tb:
        return lost / k1
    return tb + (lost - k1 * tb) / k2


def _hs_dtx_log_gradient(theta, x):
    k1, k2, tb = np.exp(theta[1]), np.exp(theta[2]), np.exp(theta[3])
    lost = _lost(x)
    if lost <= k1 * tb:
        return np.array([0.0, -1.0, 0.0, 0.0])
    dt = tb + (lost - k1 * tb) / k2
    return np.array([0.0, -k1 * tb / k2, -(lost - k1 * tb) / k2, tb * (1.0 - k1 / k2)]) / dt


def _hs_starts(t, y, sfo):
    c0, lnk = sfo
    times = np.unique(t)
    starts = []
    for q in (0.25, 0.4, 0.6):
        tb = float(np.quantile(times[1:], q)) if times.size > 2 else float(times[-1]) / 2.0
        early = t <= tb
        late = t >= tb
        k1 = _loglinear_rate(t[early], y[early]) or np.exp(lnk)
        k2 = _loglinear_rate(t[late], y[late]) or np.exp(lnk)
        starts.append(np.array([c0, np.log(k1), np.log(k2), np.log(tb)]))
    return starts


# ----------------------------------------------------- exponential rise (NIST)
def _rise_predict(theta, x):
    return theta[0] * -np.expm1(-np.exp(theta[1]) * x)


def _rise_jacobian(theta, x):
    b2 = np.exp(theta[1])
    e = np.exp(-b2 * x)
    return np.column_stack((-np.expm1(-b2 * x), theta[0] * b2 * x * e))


MODELS: dict[str, _Model] = {
    "SFO": _Model("SFO", ("C0", "k_per_s"), ("amplitude", "log_rate"), ("k_per_s",),
                  _sfo_predict, _sfo_jacobian, _sfo_dtx, _sfo_dtx_log_gradient, _sfo_starts),
    "FOMC": _Model("FOMC", ("C0", "alpha", "beta_s"), ("amplitude", "log", "log_time"),
                   ("alpha", "beta_s"),
                   _fomc_predict, _fomc_jacobian, _fomc_dtx, _fomc_dtx_log_gradient,
                   _fomc_starts),
    "DFOP": _Model("DFOP", ("C0", "k1_per_s", "k2_per_s", "g"),
                   ("amplitude", "log_rate", "log_rate", "logit"), ("k1_per_s", "k2_per_s"),
                   _dfop_predict, _dfop_jacobian, _dfop_dtx, _dfop_dtx_log_gradient,
                   _dfop_starts),
    "HS": _Model("HS", ("C0", "k1_per_s", "k2_per_s", "tb_s"),
                 ("amplitude", "log_rate", "log_rate", "log_time"), ("k1_per_s", "k2_per_s"),
                 _hs_predict, _hs_jacobian, _hs_dtx, _hs_dtx_log_gradient, _hs_starts),
}

EXPONENTIAL_RISE = _Model("exponential rise", ("b1", "b2"), ("amplitude", "log_rate"), ("b2",),
                          _rise_predict, _rise_jacobian, None, None, lambda t, y, sfo: [])
