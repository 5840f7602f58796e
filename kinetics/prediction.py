"""Field predictions from a fitted rate surface.

:func:`predict` evaluates a :class:`kinetics.surface.SurfaceFit` at arrays of
field conditions (temperature, pH, ionic strength or salinity, broadcast
together) and returns the rate constant, DT50 and DT90 with two intervals:

* the **confidence interval** of the mean rate at that condition (what the
  surface says, with the uncertainty of its parameters), and
* the **prediction interval** of the rate a new run at that condition would
  measure (adds the scatter of one run about the surface,
  :attr:`SurfaceFit.residual_scale`).

Two propagation methods are offered. The delta method linearises ln k in the
parameters,

.. math::

    \\mathrm{se}^2(\\ln \\hat k) = J\\,\\Sigma\\,J^T, \\qquad
    \\ln \\hat k \\pm t_{1-\\alpha/2,\\nu}\\,\\mathrm{se}, \\qquad
    \\ln \\hat k \\pm t_{1-\\alpha/2,\\nu}\\sqrt{\\mathrm{se}^2 + \\sigma_\\mathrm{run}^2}

(e.g. Seber and Wild, "Nonlinear Regression", Wiley 1989), with
:math:`J = \\partial \\ln k/\\partial\\theta`, :math:`\\Sigma` the parameter
covariance and :math:`\\nu` the residual degrees of freedom of the fit.
Student's t (not the normal quantile) is used because the scale of the run
scatter is estimated from a handful of runs (Knapp-Hartung scaling, see
:mod:`kinetics.surface`). Monte Carlo draws parameter sets from the
multivariate t distribution with the same centre, covariance and :math:`\\nu`
(normal draws scaled by a shared :math:`\\sqrt{\\nu/\\chi^2_\\nu}`) and takes
percentiles of ln k, so both methods rest on the same distribution and agree
where ln k is close to linear in the parameters.

DT50 and DT90 follow from first-order kinetics,
:math:`\\mathrm{DT50} = \\ln 2/k`, :math:`\\mathrm{DT90} = \\ln 10/k`, and their
intervals are the transformed rate intervals (the transform is monotone).

Flags (boolean arrays, one entry per condition)
-----------------------------------------------
``temperature_outside_range`` / ``pH_outside_range``
    The condition lies outside the measured temperature / pH range.
``ea_from_prior``
    Pathways whose activation energy came from the prior carry at least 1 %
    of the predicted rate.
``uncharacterised_pathway_matters``
    For each pathway the data could not characterise
    (:attr:`SurfaceFit.uncharacterised_pathways`), its largest possible rate
    constant is the one at which that pathway alone would account for the
    whole rate of some measured run (carried between temperatures with the
    prior activation energy). The flag is set where that pathway could then
    exceed the whole predicted rate, i.e. where the prediction could be low by
    a factor of two or more. At the measured pH values the bound is at most the
    measured rate, so the flag marks pH (and temperature) extrapolation the
    data cannot check.

``extrapolation_ln_k`` (float array)
    How far the prediction leaves the measured box, in ln k units:
    :math:`|\\ln \\hat k(x) - \\ln \\hat k(x_\\mathrm{box})|`, where
    :math:`x_\\mathrm{box}` is the condition with temperature and pH clipped
    into their measured ranges (ionic strength and salinity unchanged). It is
    0 inside the measured ranges and, e.g., 2.3 where the surface has been
    extrapolated by a factor of ten in rate.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np
from scipy import stats

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import InputError
from kinetics.surface import (
    GAS_CONSTANT_J_PER_MOL_K,
    PATHWAYS,
    SurfaceFit,
    _check_level,
    _conditions,
    _logsumexp_terms,
    _ln_concentrations,
)

__all__ = ["PREDICTION_METHODS", "Prediction", "PredictionInterval", "predict"]

#: Interval propagation methods.
PREDICTION_METHODS: tuple[str, ...] = ("delta", "montecarlo")
#: Contribution above which a prior-Ea pathway sets the ``ea_from_prior`` flag.
EA_PRIOR_FLAG_CONTRIBUTION = 0.01
#: Ratio (largest possible hidden-pathway rate / predicted rate) above which
#: ``uncharacterised_pathway_matters`` is set.
HIDDEN_PATHWAY_FLAG_RATIO = 1.0

_LN2 = math.log(2.0)
_LN10 = math.log(10.0)
# ln of the largest rate bound reported (bounds are clipped to 1e-300..1e300 1/s).
_LN_LIMIT = 690.0
# Up to this many conditions, row-wise quadratic forms are summed on Python floats.
_SMALL_ROWS = 4
# Largest number of floats held at once by a Monte Carlo block.
_MC_BLOCK_FLOATS = 4_000_000


@dataclass(frozen=True)
class PredictionInterval:
    """Intervals of k, DT50 and DT90 at one level.

    Attributes
    ----------
    kind : str
        ``"confidence"`` (mean rate) or ``"prediction"`` (a new run).
    level : float
    k_low_per_s, k_high_per_s : numpy.ndarray
        Rate bounds [1/s].
    dt50_low_s, dt50_high_s, dt90_low_s, dt90_high_s : numpy.ndarray
        DT50 and DT90 bounds [s].
    """

    kind: str
    level: float
    k_low_per_s: np.ndarray
    k_high_per_s: np.ndarray
    dt50_low_s: np.ndarray
    dt50_high_s: np.ndarray
    dt90_low_s: np.ndarray
    dt90_high_s: np.ndarray


@dataclass(frozen=True, eq=False)
class Prediction:
    """Rates, DT50 and DT90 with intervals at field conditions (columnar).

    Every array has the broadcast shape of the conditions (at least 1-D).

    Attributes
    ----------
    temperature_K, pH, ionic_strength_M, salinity : numpy.ndarray
        The conditions [K, -, mol/L, -].
    k_per_s, ln_k : numpy.ndarray
        Predicted rate constant [1/s] and its ln.
    se_ln_k : numpy.ndarray
        Delta-method standard error of ln k [-] (reported for both methods).
    k_ci_low_per_s, k_ci_high_per_s : numpy.ndarray
        Confidence interval of the mean rate [1/s]. Bounds are limited to
        1e-300..1e300 1/s (reached only by nearly uncharacterised surfaces).
    k_pi_low_per_s, k_pi_high_per_s : numpy.ndarray
        Prediction interval for a new run [1/s].
    dt50_s, dt50_ci_low_s, dt50_ci_high_s, dt50_pi_low_s, dt50_pi_high_s : numpy.ndarray
        DT50 and its intervals [s].
    dt90_s, dt90_ci_low_s, dt90_ci_high_s, dt90_pi_low_s, dt90_pi_high_s : numpy.ndarray
        DT90 and its intervals [s].
    dominant_pathway : numpy.ndarray of str
        Pathway carrying the largest share of k.
    contributions : dict
        Pathway -> fraction of k [-].
    flags : dict
        Flag name -> boolean array (see module docstring).
    extrapolation_ln_k : numpy.ndarray
        Distance from the measured box in ln k units [-].
    level : float
        Level of both intervals.
    method : str
        ``"delta"`` or ``"montecarlo"``.
    dof : int
        Degrees of freedom of the t quantile.
    residual_scale : float
        Run scatter on ln k used by the prediction interval [-].
    caution : str
        :data:`kinetics.caution.CAUTION_TEXT`.
    """

    temperature_K: np.ndarray
    pH: np.ndarray
    ionic_strength_M: np.ndarray
    salinity: np.ndarray
    k_per_s: np.ndarray
    ln_k: np.ndarray
    se_ln_k: np.ndarray
    k_ci_low_per_s: np.ndarray
    k_ci_high_per_s: np.ndarray
    k_pi_low_per_s: np.ndarray
    k_pi_high_per_s: np.ndarray
    dt50_s: np.ndarray
    dt50_ci_low_s: np.ndarray
    dt50_ci_high_s: np.ndarray
    dt50_pi_low_s: np.ndarray
    dt50_pi_high_s: np.ndarray
    dt90_s: np.ndarray
    dt90_ci_low_s: np.ndarray
    dt90_ci_high_s: np.ndarray
    dt90_pi_low_s: np.ndarray
    dt90_pi_high_s: np.ndarray
    dominant_pathway: np.ndarray
    contributions: Mapping[str, np.ndarray]
    flags: Mapping[str, np.ndarray]
    extrapolation_ln_k: np.ndarray
    level: float
    method: str
    dof: int
    residual_scale: float
    caution: str = CAUTION_TEXT

    def __len__(self) -> int:
        return int(self.k_per_s.size)

    def interval(self, level: float | None = None, kind: str = "confidence") -> PredictionInterval:
        """Confidence or prediction interval of k, DT50 and DT90.

        Parameters
        ----------
        level : float, optional
            Level; default the level of the prediction. Delta-method
            predictions can be re-expressed at any level; Monte Carlo ones only
            at the level they were computed at.
        kind : str
            ``"confidence"`` (mean rate) or ``"prediction"`` (a new run).

        Returns
        -------
        PredictionInterval
        """
        if kind not in ("confidence", "prediction"):
            raise InputError(f"unknown interval kind {kind!r}; valid: 'confidence', 'prediction'")
        lv = self.level if level is None else _check_level(level)
        if lv == self.level:
            if kind == "confidence":
                lo, hi = self.k_ci_low_per_s, self.k_ci_high_per_s
            else:
                lo, hi = self.k_pi_low_per_s, self.k_pi_high_per_s
        elif self.method == "delta":
            tq = _t_quantile(0.5 + lv / 2.0, int(self.dof))
            se = self.se_ln_k
            if kind == "prediction":
                se = np.sqrt(se**2 + self.residual_scale**2)
            lo = np.exp(np.clip(self.ln_k - tq * se, -_LN_LIMIT, _LN_LIMIT))
            hi = np.exp(np.clip(self.ln_k + tq * se, -_LN_LIMIT, _LN_LIMIT))
        else:
            raise InputError(
                f"these Monte Carlo intervals were computed at level {self.level}; call predict "
                f"again with level={lv} for another level"
            )
        return PredictionInterval(
            kind=kind,
            level=lv,
            k_low_per_s=lo,
            k_high_per_s=hi,
            dt50_low_s=_LN2 / hi,
            dt50_high_s=_LN2 / lo,
            dt90_low_s=_LN10 / hi,
            dt90_high_s=_LN10 / lo,
        )


@functools.lru_cache(maxsize=256)
def _t_quantile(probability: float, dof: int) -> float:
    """Student's t quantile, remembered per (probability, degrees of freedom).

    A fitted surface has one ``dof`` and requests use a handful of levels, so
    the quantile (tens of microseconds in :func:`scipy.stats.t.ppf`) is
    computed once instead of once per prediction.
    """
    return float(stats.t.ppf(probability, dof))


def _readonly(arr: np.ndarray, shape: tuple[int, ...]) -> np.ndarray:
    out = np.ascontiguousarray(arr).reshape(shape)
    out.setflags(write=False)
    return out


def predict(
    surface: SurfaceFit,
    temperature_K: Any,
    pH: Any,
    *,
    ionic_strength_M: Any = 0.0,
    salinity: Any = 0.0,
    level: float = 0.95,
    method: str = "delta",
    n_draws: int = 10000,
    seed: Any = None,
) -> Prediction:
    """Predict hydrolysis rates, DT50 and DT90 at field conditions.

    Parameters
    ----------
    surface : SurfaceFit
        A fitted rate surface (:func:`kinetics.surface.fit_surface`).
    temperature_K : array_like
        Water temperature [K], 273.15-373.15.
    pH : array_like
        Field pH, 0-14 (total scale where ``salinity > 0``).
    ionic_strength_M : array_like
        Ionic strength [mol/L] of fresh water.
    salinity : array_like
        Practical salinity [-] of seawater or brackish water.
    level : float
        Level of the confidence and prediction intervals, e.g. 0.95.
    method : str
        ``"delta"`` or ``"montecarlo"`` (see module docstring).
    n_draws : int
        Monte Carlo parameter draws (>= 100). The work grows as
        ``n_draws`` times the number of conditions (conditions are processed
        in blocks so memory stays bounded); the delta method is the fast path
        for large grids.
    seed : int or numpy.random.Generator, optional
        Seed of the Monte Carlo draws (same seed, same intervals).

    Returns
    -------
    Prediction
        Columnar arrays in the broadcast shape of the conditions, with flags
        and the caution text.

    Raises
    ------
    InputError
        A condition is not finite or out of range (the message names its
        index), an unknown method, a bad level or number of draws.
    """
    if not isinstance(surface, SurfaceFit):
        raise InputError(
            f"predict needs a SurfaceFit from fit_surface, got {type(surface).__name__}"
        )
    if method not in PREDICTION_METHODS:
        raise InputError(f"unknown method {method!r}; valid: {', '.join(PREDICTION_METHODS)}")
    lv = _check_level(level)
    if method == "montecarlo":
        if isinstance(n_draws, bool) or not isinstance(n_draws, (int, np.integer)) or n_draws < 100:
            raise InputError(f"n_draws must be a whole number >= 100, got {n_draws!r}")

    T, ph, ionic, sal, shape = _conditions(temperature_K, pH, ionic_strength_M, salinity)
    lnc = _ln_concentrations(T, ph, ionic, sal)
    terms = surface._terms_at(T, lnc)
    lnk = _logsumexp_rows(terms)
    w = np.exp(terms - lnk[:, None])

    # delta method: se^2 = J Sigma J^T, row by row
    jac = surface._jacobian_at(T, w)
    cov = np.asarray(surface.covariance, dtype=float)
    se2 = _quadratic_rows(jac, cov)
    se = np.sqrt(np.maximum(se2, 0.0))
    rs = float(surface.residual_scale)
    dof = int(surface.dof)

    if method == "delta":
        tq = _t_quantile(0.5 + lv / 2.0, dof)
        half_ci = tq * se
        half_pi = tq * np.sqrt(se * se + rs * rs)
        ci_lo, ci_hi = lnk - half_ci, lnk + half_ci
        pi_lo, pi_hi = lnk - half_pi, lnk + half_pi
    else:
        ci_lo, ci_hi, pi_lo, pi_hi = _monte_carlo(surface, T, lnc, lv, int(n_draws), seed, rs, dof)

    # flags
    t_lo, t_hi = surface.temperature_range_K
    p_lo, p_hi = surface.pH_range
    eps = 1e-9
    flags: dict[str, np.ndarray] = {
        "temperature_outside_range": (T < t_lo - eps) | (T > t_hi + eps),
        "pH_outside_range": (ph < p_lo - eps) | (ph > p_hi + eps),
    }
    prior_share = np.zeros(T.size)
    for j, p in enumerate(surface.pathways):
        if p in surface.ea_from_prior:
            prior_share += w[:, j]
    flags["ea_from_prior"] = prior_share >= EA_PRIOR_FLAG_CONTRIBUTION
    hidden = np.zeros(T.size, dtype=bool)
    if surface.hidden_pathway_ln_k_ref_max:
        from_ref = surface.hidden_pathway_Ea_J_per_mol / GAS_CONSTANT_J_PER_MOL_K * (
            1.0 / T - 1.0 / surface.reference_temperature_K
        )
    for p, ln_kmax_ref in surface.hidden_pathway_ln_k_ref_max.items():
        j = PATHWAYS.index(p)
        ln_hidden = ln_kmax_ref - from_ref + lnc[:, j]
        hidden |= ln_hidden - lnk > math.log(HIDDEN_PATHWAY_FLAG_RATIO) + 1e-9
    flags["uncharacterised_pathway_matters"] = hidden

    # extrapolation in ln k units: distance to the prediction clipped into the measured box
    extrap = np.zeros(T.size)
    outside = flags["temperature_outside_range"] | flags["pH_outside_range"]
    if outside.any():
        Tc = np.minimum(np.maximum(T[outside], t_lo), t_hi)
        pc = np.minimum(np.maximum(ph[outside], p_lo), p_hi)
        lnc_c = _clipped_ln_concentrations(
            T[outside], ph[outside], lnc[outside], Tc, pc, ionic[outside], sal[outside]
        )
        terms_c = surface._terms_at(Tc, lnc_c)
        extrap[outside] = np.abs(lnk[outside] - _logsumexp_rows(terms_c))

    k = np.exp(lnk)
    # interval bounds beyond 1e+-300 (only for nearly uncharacterised surfaces with
    # one or two degrees of freedom) are reported at that limit, never as inf or 0
    bounds = (np.minimum(np.maximum(v, -_LN_LIMIT), _LN_LIMIT) for v in (ci_lo, ci_hi, pi_lo, pi_hi))
    ci_lo, ci_hi, pi_lo, pi_hi = bounds
    k_ci_lo, k_ci_hi = np.exp(ci_lo), np.exp(ci_hi)
    k_pi_lo, k_pi_hi = np.exp(pi_lo), np.exp(pi_hi)
    names = np.array(surface.pathways)
    dominant = names[_argmax_columns(w)]

    def out(a: np.ndarray) -> np.ndarray:
        return _readonly(a, shape)

    return Prediction(
        temperature_K=out(T),
        pH=out(ph),
        ionic_strength_M=out(ionic),
        salinity=out(sal),
        k_per_s=out(k),
        ln_k=out(lnk),
        se_ln_k=out(se),
        k_ci_low_per_s=out(k_ci_lo),
        k_ci_high_per_s=out(k_ci_hi),
        k_pi_low_per_s=out(k_pi_lo),
        k_pi_high_per_s=out(k_pi_hi),
        dt50_s=out(_LN2 / k),
        dt50_ci_low_s=out(_LN2 / k_ci_hi),
        dt50_ci_high_s=out(_LN2 / k_ci_lo),
        dt50_pi_low_s=out(_LN2 / k_pi_hi),
        dt50_pi_high_s=out(_LN2 / k_pi_lo),
        dt90_s=out(_LN10 / k),
        dt90_ci_low_s=out(_LN10 / k_ci_hi),
        dt90_ci_high_s=out(_LN10 / k_ci_lo),
        dt90_pi_low_s=out(_LN10 / k_pi_hi),
        dt90_pi_high_s=out(_LN10 / k_pi_lo),
        dominant_pathway=out(dominant),
        contributions={p: out(w[:, j]) for j, p in enumerate(surface.pathways)},
        flags={name: out(v) for name, v in flags.items()},
        extrapolation_ln_k=out(extrap),
        level=lv,
        method=method,
        dof=dof,
        residual_scale=rs,
        caution=CAUTION_TEXT,
    )


def _logsumexp_rows(terms: np.ndarray) -> np.ndarray:
    """ln of the sum of exp over the (few) pathway columns of ``terms`` (n, m).

    Column by column (:func:`kinetics.surface._logsumexp_terms`); a reduction
    along the short trailing axis walks the rows one by one.
    """
    return _logsumexp_terms([terms[:, j] for j in range(terms.shape[1])])


def _argmax_columns(w: np.ndarray) -> np.ndarray:
    """Index of the largest column of each row, the first on ties (as numpy.argmax).

    One comparison per column over contiguous columns; argmax along a short
    trailing axis walks the rows one by one.
    """
    best = w[:, 0].copy()
    idx = np.zeros(w.shape[0], dtype=np.intp)
    for j in range(1, w.shape[1]):
        col = w[:, j]
        better = col > best
        idx[better] = j
        np.maximum(best, col, out=best)
    return idx


def _quadratic_rows(jac: np.ndarray, cov: np.ndarray) -> np.ndarray:
    r"""Row-wise :math:`J_i \Sigma J_i^T` for many rows and a small covariance.

    Loops over the (few) parameters, never over conditions; elementwise
    arithmetic avoids a multithreaded BLAS call, which on a busy machine costs
    more than the arithmetic itself.
    """
    p = cov.shape[0]
    if jac.shape[0] <= _SMALL_ROWS:
        # a few rows: the same sums in the same order on Python floats (the same
        # IEEE arithmetic, without one numpy call per term)
        c = cov.tolist()
        rows = []
        for r in jac.tolist():
            total = 0.0
            for j in range(p):
                acc = c[j][j] * r[j]
                for k in range(j + 1, p):
                    acc = acc + (2.0 * c[j][k]) * r[k]
                total += r[j] * acc
            rows.append(total)
        return np.array(rows, dtype=float)
    out = np.zeros(jac.shape[0])
    for j in range(p):
        col = jac[:, j]
        acc = cov[j, j] * col
        for k in range(j + 1, p):
            acc = acc + (2.0 * cov[j, k]) * jac[:, k]
        out += col * acc
    return out


def _clipped_ln_concentrations(
    T: np.ndarray,
    ph: np.ndarray,
    lnc: np.ndarray,
    Tc: np.ndarray,
    pc: np.ndarray,
    ionic: np.ndarray,
    sal: np.ndarray,
) -> np.ndarray:
    """ln [H+], 0, ln [OH-] at conditions clipped into the measured box.

    ln [H+] and ln [OH-] are linear in pH with slopes -ln 10 and +ln 10 at a
    given temperature and medium (:func:`kinetics.water.hydronium_hydroxide_molar`),
    so where only the pH was clipped the values at the field condition
    (``lnc``) are shifted; where the temperature was clipped it sits on one of
    the two range ends, and the water chemistry is evaluated there once per
    medium when the medium is uniform.
    """
    out = lnc.copy()
    shift = _LN10 * (pc - ph)
    t_moved = Tc != T
    if t_moved.any():
        idx = np.flatnonzero(t_moved)
        ti, si = ionic[idx], sal[idx]
        if np.all(ti == ti[0]) and np.all(si == si[0]):
            ends = np.unique(Tc[idx])
            medium = (float(ti[0]), float(si[0]))
            at7 = np.array([_ln_concentrations_pH7(float(t), *medium) for t in ends])
            out[idx] = at7[np.searchsorted(ends, Tc[idx])]
            shift[idx] = _LN10 * (pc[idx] - 7.0)
        else:
            out[idx] = _ln_concentrations(Tc[idx], pc[idx], ti, si)
            shift[idx] = 0.0
    out[:, 0] -= shift
    out[:, 2] += shift
    return out


@functools.lru_cache(maxsize=1024)
def _ln_concentrations_pH7(
    temperature_K: float, ionic_strength_M: float, salinity: float
) -> tuple[float, float, float]:
    """ln [H+], 0, ln [OH-] at pH 7, remembered per temperature and medium.

    Used at the ends of a surface's temperature range, which many predictions
    share; elementwise, so the same numbers as an evaluation with other rows.
    """
    row = _ln_concentrations(
        np.array([temperature_K]), np.array([7.0]), np.array([ionic_strength_M]),
        np.array([salinity]),
    )[0]
    return tuple(row.tolist())


def _monte_carlo(
    surface: SurfaceFit,
    T: np.ndarray,
    lnc: np.ndarray,
    level: float,
    n_draws: int,
    seed: Any,
    residual_scale: float,
    dof: int,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Percentile intervals of ln k from multivariate-t parameter draws.

    The terms of every draw at a block of conditions come from one matrix
    product per pathway (:meth:`SurfaceFit._draw_terms`), laid out one row per
    condition. Their exponentials are summed to k itself: ln is monotone, so
    the order statistics of ln k are the logarithms of those of k, and only
    the few selected values need a logarithm (blocks whose selected rates
    leave about 1e-280..1e280 1/s are redone in ln space). The prediction
    interval multiplies each draw by one run-scatter factor
    :math:`\\exp(\\varepsilon)`, :math:`\\varepsilon \\sim N(0, \\sigma_\\mathrm{run}^2)`
    scaled by the same :math:`\\sqrt{\\nu/\\chi^2_\\nu}`, shared by all
    conditions: each condition's interval is a percentile of its own marginal
    distribution, which sharing leaves unchanged.
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    normal = surface.sample_parameters(n_draws, rng)
    scale = np.sqrt(dof / rng.chisquare(dof, size=n_draws))
    draws = surface.estimates[None, :] + (normal - surface.estimates[None, :]) * scale[:, None]
    noise = rng.standard_normal(n_draws) * (residual_scale * scale)
    factor = np.exp(noise)
    probs = (0.5 - level / 2.0, 0.5 + level / 2.0)
    kth, fractions = _order_statistics(n_draws, probs)
    n = T.size
    ci_lo, ci_hi = np.empty(n), np.empty(n)
    pi_lo, pi_hi = np.empty(n), np.empty(n)
    block = max(1, _MC_BLOCK_FLOATS // (n_draws * max(1, len(surface.pathways))))
    for start in range(0, n, block):
        sl = slice(start, min(n, start + block))
        terms = surface._draw_terms(T[sl], lnc[sl], draws, by_condition=True)
        k = terms[0]
        np.exp(k, out=k)
        for t in terms[1:]:
            np.exp(t, out=t)
            k += t
        del terms
        ci_stats = np.log(_row_order_stats(k, kth))
        k *= factor[None, :]
        pi_stats = np.log(_row_order_stats(k, kth))
        del k
        if not (_safe(ci_stats) and _safe(pi_stats)):
            terms = surface._draw_terms(T[sl], lnc[sl], draws, by_condition=True)
            lnk = _logsumexp_terms(terms)  # (block, n_draws)
            del terms
            ci_stats = _row_order_stats(lnk, kth)
            lnk += noise[None, :]
            pi_stats = _row_order_stats(lnk, kth)
            del lnk
        ci_lo[sl], ci_hi[sl] = _interpolate(ci_stats, fractions)
        pi_lo[sl], pi_hi[sl] = _interpolate(pi_stats, fractions)
    return ci_lo, ci_hi, pi_lo, pi_hi


# selected ln k beyond this were summed from exponentials too close to the
# floating-point limits to be exact; such blocks are redone in ln space
_LN_K_SAFE = 645.0


def _safe(ln_values: np.ndarray) -> bool:
    return bool(np.all(np.abs(ln_values) < _LN_K_SAFE))


def _order_statistics(
    n: int, probs: tuple[float, float]
) -> tuple[list[int], list[float]]:
    """Order statistics and weights of the linear-interpolation quantile.

    The default definition of :func:`numpy.quantile` (Hyndman and Fan,
    Am. Stat. 50 (1996) 361-365, definition 7): position :math:`q(n-1)`,
    interpolated between its two neighbouring order statistics. Returns the
    four 0-based ranks (low and high neighbour of each quantile) and the two
    interpolation weights.
    """
    kth: list[int] = []
    fractions: list[float] = []
    for q in probs:
        pos = q * (n - 1)
        low = min(int(math.floor(pos)), n - 1)
        kth += [low, min(low + 1, n - 1)]
        fractions.append(pos - low)
    return kth, fractions


def _interpolate(
    stats_: np.ndarray, fractions: list[float]
) -> tuple[np.ndarray, np.ndarray]:
    """The two quantiles from their neighbouring order statistics (columns)."""
    out = []
    for i, f in enumerate(fractions):
        a = stats_[:, 2 * i]
        b = stats_[:, 2 * i + 1]
        diff = b - a
        # numpy's interpolation: from the lower value below f = 0.5, else from the upper
        out.append(a + diff * f if f < 0.5 else b - diff * (1.0 - f))
    return out[0], out[1]


# Draws in the subsample that sets the tail thresholds of _row_order_stats.
_TAIL_SUBSAMPLE = 500


def _row_order_stats(values: np.ndarray, kth: list[int]) -> np.ndarray:
    """Exact order statistics ``kth`` (0-based ranks) of every row of ``values``.

    A full partial sort of each row costs far more than the comparisons
    needed when the ranks sit in the tails (the 2.5 % and 97.5 % points). The
    first :data:`_TAIL_SUBSAMPLE` draws of each row (the draws are
    independent, so they are a random subsample) give a threshold below
    which about twice the needed number of values fall, and one above; only
    the values beyond the thresholds are sorted. A row whose threshold
    happens to leave too few values is partially sorted in full, so the
    result is always exact. ``values`` is not modified.
    """
    rows, n = values.shape
    ranks = np.asarray(kth)
    low = ranks[ranks < n // 2]
    high = ranks[ranks >= n // 2]
    need_lo = int(low.max()) + 1 if low.size else 0
    need_hi = n - int(high.min()) if high.size else 0
    sub_n = _TAIL_SUBSAMPLE
    if n < 8 * sub_n or max(need_lo, need_hi) > 0.1 * n:
        part = np.partition(values, sorted(set(kth)), axis=1)
        return part[:, ranks]
    out = np.empty((rows, ranks.size))
    sub = values[:, :sub_n]
    r_lo = min(sub_n - 1, int(2 * need_lo * sub_n / n) + 10)
    r_hi = max(0, sub_n - 1 - (int(2 * need_hi * sub_n / n) + 10))
    sub = np.partition(sub, [r_lo, r_hi], axis=1)
    bad = np.zeros(rows, dtype=bool)
    for side, rank_set, r in (("low", low, r_lo), ("high", high, r_hi)):
        if not rank_set.size:
            continue
        threshold = sub[:, r : r + 1]
        mask = values <= threshold if side == "low" else values >= threshold
        count = mask.sum(axis=1)
        need = need_lo if side == "low" else need_hi
        bad |= count < need
        picked = values[mask] if side == "low" else -values[mask]
        width = int(count.max())
        padded = np.full((rows, width), np.inf)
        starts = np.cumsum(count) - count
        row_of = np.repeat(np.arange(rows), count)
        padded[row_of, np.arange(picked.size) - starts[row_of]] = picked
        # rank among the candidates: from the bottom (low) or from the top (high)
        local = rank_set if side == "low" else n - 1 - rank_set
        sel = np.partition(padded, sorted(set(local.tolist())), axis=1)[:, local]
        cols = np.flatnonzero(ranks < n // 2) if side == "low" else np.flatnonzero(
            ranks >= n // 2
        )
        out[:, cols] = sel if side == "low" else -sel
    if bad.any():
        part = np.partition(values[bad], sorted(set(kth)), axis=1)
        out[bad] = part[:, ranks]
    return out
