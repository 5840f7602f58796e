"""The pH-temperature rate surface of hydrolysis.

A hydrolysing substance is attacked by H+ (acid-catalysed pathway), by water
(neutral pathway) and by OH- (base-catalysed pathway). The observed
pseudo-first-order rate constant of a run in a buffer is

.. math::

    k_\\mathrm{obs}(T, \\mathrm{pH}, I) = k_A(T)\\,[\\mathrm{H^+}] + k_N(T)
        + k_B(T)\\,[\\mathrm{OH^-}]

(Mabey and Mill, J. Phys. Chem. Ref. Data 7 (1978) 383-415), with
[H+] and [OH-] in mol/L from the measured pH, the temperature-dependent ion
product of water and the ionic strength (:func:`kinetics.water.hydronium_hydroxide_molar`).
Each pathway has its own temperature dependence, Arrhenius or Eyring.

:func:`fit_surface` fits the surface to many runs by weighted nonlinear least
squares on :math:`\\ln k_\\mathrm{obs}`, estimates the between-run scatter,
chooses the pathways the data support (AICc), and returns a frozen
:class:`SurfaceFit` that evaluates :math:`\\ln k`, its Jacobian and the pathway
contributions at any condition. Field predictions with intervals are made by
:func:`kinetics.prediction.predict`.

Statistical model
-----------------
Run :math:`i` gives :math:`y_i = \\ln k_{\\mathrm{obs},i}` with a within-run
standard error :math:`s_i` (``se_ln_k``, from the series fit) or none. The
model is

.. math::

    y_i = f(x_i; \\theta) + \\varepsilon_i, \\qquad
    \\varepsilon_i \\sim N\\bigl(0,\\ q\\,(s_i^2 + \\tau^2)\\bigr)

where :math:`\\tau^2` is the between-run variance (runs repeated in another
buffer batch, on another day, scatter by more than their own series says) and
:math:`q` a common variance scale.

* :math:`\\tau^2` is the Paule-Mandel moment estimate: the value at which the
  weighted residual sum of squares equals its expectation,
  :math:`Q(\\tau^2) = \\sum_i r_i^2/(s_i^2+\\tau^2) = n - p`, with
  :math:`\\tau^2 = 0` when :math:`Q(0) \\le n - p` (Paule and Mandel, J. Res.
  Natl. Bur. Stand. 87 (1982) 377-385). The surface is refitted at every trial
  :math:`\\tau^2`.
* :math:`q = Q(\\hat\\tau^2)/(n-p)` is the Knapp-Hartung variance scale
  (Knapp and Hartung, Stat. Med. 22 (2003) 2693-2710): it is 1 when
  :math:`\\hat\\tau^2 > 0` and corrects standard errors that were too large
  otherwise. Intervals then use Student's t with :math:`n - p` degrees of
  freedom, which makes them exact for a linear model whose run variances are
  right up to a common factor.
* When the runs' standard errors come with their degrees of freedom
  (``se_dof``, set by :meth:`RateMeasurement.from_series_fit`), the
  :math:`s_i^2` are first moderated towards their common value by empirical
  Bayes (:func:`moderate_variances`, Smyth 2004): standard errors of short
  series are noisy, and weighting by them unmoderated makes intervals too
  narrow (in the project's calibration simulation, 95 % intervals covered
  about 93 % of true rates without moderation).
* Without standard errors :math:`s_i = 0`, so :math:`\\hat\\tau^2 = RSS/(n-p)`
  and :math:`q = 1`: the fit is ordinary least squares on :math:`\\ln k`.
* When only some runs carry a standard error (a lab posts raw series, whose
  fits give one, beside reported rate constants that have none), each run
  without one is given the mean within-run variance :math:`\\overline{s^2}`
  of the runs that have one (after moderation, when that applies), and the
  fit proceeds as if every run had it. This is the value the model already
  assumes for a new run of unknown own precision (the prediction scatter
  below), so a reported rate is treated as a run of typical precision: the
  alternative :math:`s_i = 0` would weight such runs by :math:`\\tau^2` alone,
  ever more heavily than the measured series as :math:`\\hat\\tau^2` shrinks
  (without limit at :math:`\\hat\\tau^2 = 0`), merely because their
  precision was not reported. The imputed runs and value are recorded
  (:attr:`SurfaceFit.se_imputed_runs`, :attr:`SurfaceFit.se_imputed_ln_k`);
  with standard errors on every run or on none the fit is unchanged.

The covariance of the parameters is :math:`(J^T W J + P)^{-1}` with
:math:`W = \\mathrm{diag}(1/(q(s_i^2+\\hat\\tau^2)))` and :math:`P` the
precision of the activation-energy priors. The scatter of a single new run
about the surface, used by prediction intervals, is
:math:`\\sigma_\\mathrm{run}^2 = q(\\hat\\tau^2 + \\overline{s^2})` (the mean
within-run variance of the study stands for the new run's own).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from itertools import combinations
from typing import Any, Mapping, Sequence

import numpy as np
from scipy import linalg, optimize, special, stats

from kinetics import units, water
from kinetics.errors import ConvergenceError, DataError, IdentifiabilityError, InputError

__all__ = [
    "PATHWAYS",
    "TEMPERATURE_MODELS",
    "GAS_CONSTANT_J_PER_MOL_K",
    "BOLTZMANN_J_PER_K",
    "PLANCK_J_S",
    "REFERENCE_TEMPERATURE_K",
    "EFSA_DEFAULT_EA_J_PER_MOL",
    "DEFAULT_EA_PRIOR_SD_J_PER_MOL",
    "PH_LEVEL_TOLERANCE",
    "TEMPERATURE_LEVEL_TOLERANCE_K",
    "SE_POOLING_MAX_DOF",
    "MAX_SE_LN_K",
    "MIN_SE_LN_K",
    "RateMeasurement",
    "PathwayCandidate",
    "ParameterInterval",
    "PreparedConditions",
    "SurfaceFit",
    "fit_surface",
    "arrhenius_ln_k",
    "eyring_ln_k",
    "moderate_variances",
]

#: The three hydrolysis pathways, in the order used for parameters.
PATHWAYS: tuple[str, ...] = ("acid", "neutral", "base")
#: Temperature dependences a pathway may follow.
TEMPERATURE_MODELS: tuple[str, ...] = ("arrhenius", "eyring")

#: Molar gas constant [J/(mol K)], exact since the 2019 SI (CODATA 2018:
#: Tiesinga et al., Rev. Mod. Phys. 93 (2021) 025010).
GAS_CONSTANT_J_PER_MOL_K = 8.314462618
#: Boltzmann constant [J/K], exact (CODATA 2018).
BOLTZMANN_J_PER_K = 1.380649e-23
#: Planck constant [J s], exact (CODATA 2018).
PLANCK_J_S = 6.62607015e-34

#: Default reference temperature of ``ln_k_ref_<pathway>`` [K] (25 °C).
REFERENCE_TEMPERATURE_K = 298.15
#: Default activation energy [J/mol] when the data cannot give one: the EFSA
#: default for pesticide transformation, Q10 = 2.58 (EFSA Journal (2008) 622,
#: 1-32, "Opinion on the default Q10 value used to describe the temperature
#: effect on transformation rates of pesticides in soil").
EFSA_DEFAULT_EA_J_PER_MOL = 65.4e3
#: Standard deviation given to the default activation energy [J/mol]. This is a
#: project choice, not part of the EFSA opinion: 15 kJ/mol makes the 95 % prior
#: range about 36-95 kJ/mol, wide enough for the activation energies usually
#: met in hydrolysis, so that a prediction away from the measured temperature
#: carries a deliberately broad temperature uncertainty.
DEFAULT_EA_PRIOR_SD_J_PER_MOL = 15.0e3
#: Largest accepted ``se_ln_k`` [-]: k uncertain by a factor of e^20 (about
#: 5e8) is no measurement (the same limit as the series fits' refusal).
MAX_SE_LN_K = 20.0
#: Smallest within-run standard error of ln k used in the fit [-]: ln k of a
#: hydrolysis rate (|ln k| up to about 50) is resolved to about 1e-14 in double
#: precision, so smaller values carry no meaning and would only overflow the
#: weights.
MIN_SE_LN_K = 1.0e-12
#: Measured pH values closer than this are one pH level for the
#: identifiability rules (buffers drift slightly with temperature).
PH_LEVEL_TOLERANCE = 0.5
#: Temperatures closer than this [K] are one temperature level.
TEMPERATURE_LEVEL_TOLERANCE_K = 0.5

_R = GAS_CONSTANT_J_PER_MOL_K
# Bounds of the internal parameters: ln k at the reference temperature and
# e = Ea / (R T_ref). A fit that ends on one of them cannot be characterised.
_LN_K_BOUNDS = (-150.0, 60.0)
_E_BOUNDS = (-60.0, 200.0)
# A candidate whose scaled information matrix has a smaller eigenvalue than
# this (relative to its largest) cannot be characterised by the data.
_MIN_RELATIVE_EIGENVALUE = 1e-12
# A pathway that carries less than this fraction of k_obs in every run is not
# characterised by the runs.
_MIN_CONTRIBUTION = 1e-3
# Floor for a variance (exactly fitting, invented data) so nothing divides by 0.
_VARIANCE_FLOOR = 1e-200
_SORT_KEY = {p: i for i, p in enumerate(PATHWAYS)}
_FORMAT = "fieldrate.surface_fit/1"


# --------------------------------------------------------------------------- #
# published temperature laws
# --------------------------------------------------------------------------- #
def arrhenius_ln_k(
    ln_k_ref: Any,
    Ea_J_per_mol: Any,
    temperature_K: Any,
    reference_temperature_K: float = REFERENCE_TEMPERATURE_K,
) -> np.ndarray:
    """Arrhenius law referred to a reference temperature.

    .. math::

        \\ln k(T) = \\ln k_\\mathrm{ref} - \\frac{E_a}{R}
                    \\left(\\frac{1}{T} - \\frac{1}{T_\\mathrm{ref}}\\right)

    (Arrhenius, Z. phys. Chem. 4 (1889) 226-248.)

    Parameters
    ----------
    ln_k_ref : array_like
        ln of the rate constant at ``reference_temperature_K`` [ln of its SI unit].
    Ea_J_per_mol : array_like
        Activation energy [J/mol].
    temperature_K : array_like
        Temperature [K].
    reference_temperature_K : float
        Reference temperature [K].

    Returns
    -------
    numpy.ndarray
        ln k at ``temperature_K``.
    """
    T = np.asarray(temperature_K, dtype=float)
    return np.asarray(ln_k_ref, dtype=float) - np.asarray(Ea_J_per_mol, dtype=float) / _R * (
        1.0 / T - 1.0 / reference_temperature_K
    )


def eyring_ln_k(dH_J_per_mol: Any, dS_J_per_mol_K: Any, temperature_K: Any) -> np.ndarray:
    """Eyring (transition-state) law.

    .. math::

        k(T) = \\frac{k_B T}{h}\\,\\exp\\!\\left(\\frac{\\Delta S^\\ddagger}{R}\\right)
               \\exp\\!\\left(-\\frac{\\Delta H^\\ddagger}{R T}\\right)

    (Eyring, J. Chem. Phys. 3 (1935) 107-115; constants CODATA 2018.) For the
    second-order acid and base constants the standard state is 1 mol/L, so k
    is in L/(mol s).

    Parameters
    ----------
    dH_J_per_mol : array_like
        Activation enthalpy [J/mol].
    dS_J_per_mol_K : array_like
        Activation entropy [J/(mol K)].
    temperature_K : array_like
        Temperature [K].

    Returns
    -------
    numpy.ndarray
        ln k at ``temperature_K``.
    """
    T = np.asarray(temperature_K, dtype=float)
    return (
        np.log(BOLTZMANN_J_PER_K * T / PLANCK_J_S)
        + np.asarray(dS_J_per_mol_K, dtype=float) / _R
        - np.asarray(dH_J_per_mol, dtype=float) / (_R * T)
    )


# --------------------------------------------------------------------------- #
# measurements
# --------------------------------------------------------------------------- #
def _finite_float(value: Any, name: str, label: str) -> float:
    where = f" (run {label!r})" if label else ""
    if isinstance(value, (bool, str, bytes)) or value is None:
        raise InputError(f"{name} must be a number{where}, got {value!r}")
    try:
        out = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number{where}, got {value!r}") from None
    if not math.isfinite(out):
        raise InputError(f"{name} must be finite{where}, got {out!r}")
    return out


@dataclass(frozen=True)
class RateMeasurement:
    """One hydrolysis run: an observed pseudo-first-order rate constant.

    Parameters
    ----------
    temperature_K : float
        Incubation temperature [K], 273.15-373.15.
    pH : float
        pH measured at the incubation temperature, 0-14.
    k_per_s : float
        Observed pseudo-first-order rate constant [1/s], > 0.
    se_ln_k : float or None
        Standard error of ln k_per_s from the series fit [-], > 0 and at most
        :data:`MAX_SE_LN_K`; None when only the rate constant is known. In the
        fit a standard error below :data:`MIN_SE_LN_K` counts as that value
        (ln k itself is only resolved to about that in double precision).
    ionic_strength_M : float
        Ionic strength of the buffer [mol/L].
    salinity : float
        Practical salinity (seawater runs) [-]; then ``ionic_strength_M`` is 0.
    label : str
        Free text naming the run (shown in error messages).
    se_dof : int or None
        Degrees of freedom behind ``se_ln_k`` (points minus parameters of the
        series fit), >= 1; None when unknown (the standard error is then
        taken as exact).
    """

    temperature_K: float
    pH: float
    k_per_s: float
    se_ln_k: float | None = None
    ionic_strength_M: float = 0.0
    salinity: float = 0.0
    label: str = ""
    se_dof: int | None = None

    def __post_init__(self) -> None:
        label = str(self.label)
        object.__setattr__(self, "label", label)
        where = f" (run {label!r})" if label else ""
        t = _finite_float(self.temperature_K, "temperature_K", label)
        if not units.LIQUID_WATER_MIN_K <= t <= units.LIQUID_WATER_MAX_K:
            # outside the liquid range: let the unit helper word the error
            try:
                units.validate_temperature_K(t)
            except InputError as exc:
                raise InputError(f"{exc}{where}") from None
        ph = _finite_float(self.pH, "pH", label)
        if not units.PH_MIN <= ph <= units.PH_MAX:
            raise InputError(f"pH must lie between 0 and 14{where}, got {ph!r}")
        k = _finite_float(self.k_per_s, "k_per_s", label)
        if k <= 0.0:
            raise DataError(
                f"k_per_s must be a positive rate constant [1/s]{where}, got {k!r}; a run "
                "that showed no decline cannot enter the rate surface (leave it out or "
                "report an upper bound separately)"
            )
        se = self.se_ln_k
        if se is not None:
            se = _finite_float(se, "se_ln_k", label)
            if se <= 0.0:
                raise InputError(
                    f"se_ln_k must be a positive standard error of ln k{where}, got {se!r}; "
                    "give None when the run has no standard error"
                )
            if se > MAX_SE_LN_K:
                raise InputError(
                    f"se_ln_k = {se!r}{where} means k is uncertain by a factor of more than "
                    f"e^{MAX_SE_LN_K:g}: the run carries no rate information (leave it out, or "
                    "give None if the standard error is unknown)"
                )
        dof = self.se_dof
        if dof is not None:
            if isinstance(dof, bool) or not isinstance(dof, (int, np.integer)) or dof < 1:
                raise InputError(
                    f"se_dof must be a whole number of degrees of freedom >= 1{where}, got {dof!r}"
                )
            if se is None:
                raise InputError(f"se_dof was given without se_ln_k{where}")
            dof = int(dof)
        object.__setattr__(self, "se_dof", dof)
        ionic = _finite_float(self.ionic_strength_M, "ionic_strength_M", label)
        if ionic < 0.0:
            raise InputError(f"ionic_strength_M must be >= 0 mol/L{where}, got {ionic!r}")
        sal = _finite_float(self.salinity, "salinity", label)
        if sal < 0.0:
            raise InputError(f"salinity must be >= 0{where}, got {sal!r}")
        # let the water chemistry check its own ranges (Davies limit, seawater T range);
        # in pure water (no ionic strength, no salinity) it checks only the temperature
        # and pH ranges validated above, so the costly evaluation is skipped there
        if ionic > 0.0 or sal > 0.0:
            try:
                water.hydronium_hydroxide_molar(ph, t, ionic, sal)
            except InputError as exc:
                raise InputError(f"{exc}{where}") from None
        for name, value in (
            ("temperature_K", t),
            ("pH", ph),
            ("k_per_s", k),
            ("se_ln_k", se),
            ("ionic_strength_M", ionic),
            ("salinity", sal),
        ):
            object.__setattr__(self, name, value)

    @classmethod
    def from_series_fit(
        cls,
        fit: Any,
        *,
        temperature_K: float,
        pH: float,
        ionic_strength_M: float = 0.0,
        salinity: float = 0.0,
        label: str = "",
    ) -> "RateMeasurement":
        """A run from a fitted concentration-time series.

        Parameters
        ----------
        fit : kinetics.series.SeriesFit
            The series fit; its ``k_per_s`` [1/s], ``se_ln_k`` [-] and ``dof``
            are used (for a model other than SFO, ``k_per_s`` is ln 2 / DT50).
        temperature_K, pH, ionic_strength_M, salinity, label
            As for :class:`RateMeasurement`.

        Returns
        -------
        RateMeasurement
        """
        try:
            k = fit.k_per_s
            se = fit.se_ln_k
        except AttributeError:
            raise InputError(
                f"from_series_fit needs a series fit with k_per_s and se_ln_k, got "
                f"{type(fit).__name__}"
            ) from None
        if se is not None and not math.isfinite(float(se)):
            raise DataError(
                f"the series fit{' ' + repr(label) if label else ''} has no finite standard "
                f"error of ln k (got {se!r}); refit it with more time points"
            )
        dof = getattr(fit, "dof", None)
        return cls(
            temperature_K=temperature_K,
            pH=pH,
            k_per_s=float(k),
            se_ln_k=None if se is None else float(se),
            ionic_strength_M=ionic_strength_M,
            salinity=salinity,
            label=label,
            se_dof=None if se is None or dof is None or int(dof) < 1 else int(dof),
        )

    @classmethod
    def from_dt50(
        cls,
        dt50_s: float,
        *,
        temperature_K: float,
        pH: float,
        se_ln_k: float | None = None,
        ionic_strength_M: float = 0.0,
        salinity: float = 0.0,
        label: str = "",
    ) -> "RateMeasurement":
        """A run reported as a first-order half-life.

        .. math::

            k = \\ln 2 / \\mathrm{DT50}

        Parameters
        ----------
        dt50_s : float
            Reported DT50 [s], > 0.
        se_ln_k : float or None
            Standard error of ln k [-] (equal to that of ln DT50), if known.
        temperature_K, pH, ionic_strength_M, salinity, label
            As for :class:`RateMeasurement`.

        Returns
        -------
        RateMeasurement
        """
        dt50 = _finite_float(dt50_s, "dt50_s", label)
        if dt50 <= 0.0:
            raise DataError(f"dt50_s must be a positive time [s], got {dt50!r}")
        return cls(
            temperature_K=temperature_K,
            pH=pH,
            k_per_s=math.log(2.0) / dt50,
            se_ln_k=se_ln_k,
            ionic_strength_M=ionic_strength_M,
            salinity=salinity,
            label=label,
        )

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe dictionary of the run."""
        return {
            "temperature_K": self.temperature_K,
            "pH": self.pH,
            "k_per_s": self.k_per_s,
            "se_ln_k": self.se_ln_k,
            "ionic_strength_M": self.ionic_strength_M,
            "salinity": self.salinity,
            "label": self.label,
            "se_dof": self.se_dof,
        }


# --------------------------------------------------------------------------- #
# result objects
# --------------------------------------------------------------------------- #
@dataclass(frozen=True)
class PathwayCandidate:
    """One pathway subset tried by :func:`fit_surface`.

    Attributes
    ----------
    pathways : tuple of str
        The pathways of this candidate.
    identifiable : bool
        Whether the data can characterise it (see :func:`fit_surface`).
    reason : str
        Why it was not identifiable (empty when it was).
    n_params : int
        Surface parameters estimated from the data (excludes prior-fixed Ea).
    rss : float or None
        Residual sum of squares on ln k [-] (None if not fitted).
    aicc : float or None
        Corrected Akaike information criterion (None if undefined).
    ea_from_prior : tuple of str
        Pathways whose activation energy came from the prior.
    selected : bool
        Whether this candidate was chosen.
    """

    pathways: tuple[str, ...]
    identifiable: bool
    reason: str
    n_params: int
    rss: float | None
    aicc: float | None
    ea_from_prior: tuple[str, ...]
    selected: bool = False

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe dictionary."""
        return {
            "pathways": list(self.pathways),
            "identifiable": self.identifiable,
            "reason": self.reason,
            "n_params": self.n_params,
            "rss": self.rss,
            "aicc": self.aicc,
            "ea_from_prior": list(self.ea_from_prior),
            "selected": self.selected,
        }


@dataclass(frozen=True)
class ParameterInterval:
    """Student-t confidence intervals of the surface parameters.

    Attributes
    ----------
    parameter_names : tuple of str
    estimates, lower, upper : numpy.ndarray
        In the units of the parameter names.
    level : float
        Confidence level.
    dof : int
        Degrees of freedom of the t quantile.
    """

    parameter_names: tuple[str, ...]
    estimates: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    level: float
    dof: int


def _readonly(arr: Any) -> np.ndarray:
    out = np.array(arr, dtype=float)
    out.setflags(write=False)
    return out


def _check_level(level: Any) -> float:
    lv = _finite_float(level, "level", "")
    if not 0.0 < lv < 1.0:
        raise InputError(f"level must lie strictly between 0 and 1 (e.g. 0.95), got {lv!r}")
    return lv


def _conditions(
    temperature_K: Any, pH: Any, ionic_strength_M: Any = 0.0, salinity: Any = 0.0
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, tuple[int, ...]]:
    """Validate and broadcast field conditions; errors name the bad index."""
    arrays = []
    for name, value in (
        ("temperature_K", temperature_K),
        ("pH", pH),
        ("ionic_strength_M", ionic_strength_M),
        ("salinity", salinity),
    ):
        if isinstance(value, (str, bytes)):
            raise InputError(f"{name} must be a number or an array of numbers, got {value!r}")
        try:
            arr = np.asarray(value, dtype=float)
        except (TypeError, ValueError):
            raise InputError(
                f"{name} must be a number or an array of numbers, got {value!r}"
            ) from None
        arrays.append(arr)
    try:
        shape = np.broadcast_shapes(*(a.shape for a in arrays))
    except ValueError:
        raise InputError(
            "temperature_K, pH, ionic_strength_M and salinity cannot be broadcast together "
            f"(shapes {', '.join(str(a.shape) for a in arrays)})"
        ) from None
    if len(shape) == 0:
        shape = (1,)
    flat = [np.broadcast_to(a, shape).ravel() for a in arrays]
    if flat[0].size == 0:
        raise InputError("no conditions given: the arrays are empty")
    T, ph, ionic, sal = flat
    # one pass over all four arrays for the usual case of valid conditions;
    # the checks below only run to name the first bad value
    ok = (
        (T >= units.LIQUID_WATER_MIN_K) & (T <= units.LIQUID_WATER_MAX_K)
        & (ph >= units.PH_MIN) & (ph <= units.PH_MAX)
        & (ionic >= 0.0) & (ionic < math.inf) & (sal >= 0.0) & (sal < math.inf)
    )
    if ok.all():
        return T, ph, ionic, sal, tuple(shape)
    names = ("temperature_K", "pH", "ionic_strength_M", "salinity")
    for name, arr in zip(names, flat):
        bad = ~np.isfinite(arr)
        if bad.any():
            i = int(np.argmax(bad))
            raise InputError(
                f"{name} must be finite; got {float(arr[i])!r} at index {_index(i, shape)}"
            )
    T, ph, ionic, sal = flat
    bad = (T < units.LIQUID_WATER_MIN_K) | (T > units.LIQUID_WATER_MAX_K)
    if bad.any():
        i = int(np.argmax(bad))
        bad_t = float(T[i])
        raise InputError(
            f"temperature_K {bad_t!r} K at index {_index(i, shape)} is outside liquid water "
            f"at 0.1 MPa ({units.LIQUID_WATER_MIN_K}-{units.LIQUID_WATER_MAX_K} K)"
            f"{units._celsius_hint(bad_t)}"
        )
    bad = (ph < units.PH_MIN) | (ph > units.PH_MAX)
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(
            f"pH must lie between 0 and 14; got {float(ph[i])!r} at index {_index(i, shape)}"
        )
    bad = ionic < 0.0
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(
            f"ionic_strength_M must be >= 0 mol/L; got {float(ionic[i])!r} at index "
            f"{_index(i, shape)}"
        )
    bad = sal < 0.0
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(
            f"salinity must be >= 0; got {float(sal[i])!r} at index {_index(i, shape)}"
        )
    return T, ph, ionic, sal, tuple(shape)


def _index(i: int, shape: tuple[int, ...]) -> Any:
    if len(shape) <= 1:
        return i
    return tuple(int(v) for v in np.unravel_index(i, shape))


def _ln_concentrations(
    T: np.ndarray, ph: np.ndarray, ionic: np.ndarray, sal: np.ndarray
) -> np.ndarray:
    """ln of the concentration factor of each pathway, shape (n, 3).

    The conditions come from :func:`_conditions` (flat, finite, temperature
    and pH in range); fresh water within the Davies range goes straight to the
    water-chemistry formulas, anything else through
    :func:`kinetics.water.hydronium_hydroxide_molar` and its checks.
    """
    if not sal.any() and (ionic <= water.DAVIES_MAX_IONIC_STRENGTH_M).all():
        h, oh = water._fresh_water_h_oh(ph, T, ionic)
    else:
        h, oh = water.hydronium_hydroxide_molar(ph, T, ionic, sal)
    out = np.zeros((T.size, 3))
    out[:, 0] = np.log(np.asarray(h, dtype=float).ravel())
    out[:, 2] = np.log(np.asarray(oh, dtype=float).ravel())
    return out


@dataclass(frozen=True, eq=False)
class PreparedConditions:
    """Conditions validated once, with their water chemistry (frozen).

    Made by :meth:`SurfaceFit.prepare_conditions` and used by
    :meth:`SurfaceFit.rate_draws_per_s`, so that evaluating many batches of
    parameter draws at the same conditions computes [H+] and [OH-] once.

    Attributes
    ----------
    temperature_K : numpy.ndarray
        Temperatures of the flattened conditions [K], shape (n,).
    ln_concentrations : numpy.ndarray
        ln [H+], 0 and ln [OH-] per condition (concentrations in mol/L),
        shape (n, 3), in :data:`PATHWAYS` order.
    """

    temperature_K: np.ndarray
    ln_concentrations: np.ndarray

    @property
    def n_conditions(self) -> int:
        """Number of conditions."""
        return int(self.temperature_K.size)


@dataclass(frozen=True, eq=False)
class SurfaceFit:
    """A fitted pH-temperature rate surface (frozen).

    Attributes
    ----------
    pathways : tuple of str
        Pathways in the model, in :data:`PATHWAYS` order.
    temperature_model : str
        ``"arrhenius"`` or ``"eyring"``.
    parameter_names : tuple of str
        Arrhenius: ``ln_k_ref_<p>`` (ln of kA [L/(mol s)], kN [1/s], kB
        [L/(mol s)] at ``reference_temperature_K``) and ``Ea_<p>_J_per_mol``;
        Eyring: ``dH_<p>_J_per_mol`` and ``dS_<p>_J_per_mol_K``.
    estimates : numpy.ndarray
        Parameter estimates (SI units of the names).
    covariance : numpy.ndarray
        Parameter covariance (includes the activation-energy priors).
    dof : int
        Residual degrees of freedom, runs minus parameters estimated from data.
    residual_scale : float
        Scatter of one new run about the surface, sigma on ln k [-]
        (between-run plus typical within-run variance).
    n_measurements : int
        Number of runs fitted.
    candidates : tuple of PathwayCandidate
        Every pathway subset tried, with its AICc.
    uncharacterised_pathways : tuple of str
        Pathways outside the model that the measured pH levels could not tell
        apart from those in it (see :func:`fit_surface`).
    temperature_range_K, pH_range : tuple of float
        (min, max) measured.
    ea_from_prior : tuple of str
        Pathways whose activation energy comes from the prior.
    measurements : tuple of RateMeasurement
        The runs.
    reference_temperature_K : float
        Reference temperature of ``ln_k_ref`` [K].
    ea_prior_J_per_mol : tuple of float or None
        (mean, sd) of the activation-energy prior used [J/mol] (None if unused).
    between_run_sd_ln_k : float
        :math:`\\hat\\tau`, the between-run standard deviation on ln k [-].
    variance_scale : float
        Knapp-Hartung factor :math:`q` [-].
    selection : str
        ``"auto"`` (AICc) or ``"fixed"``.
    hidden_pathway_ln_k_ref_max : dict
        For each uncharacterised pathway, the ln of the largest rate constant
        at the reference temperature that the measurements leave possible
        (used for the ``uncharacterised_pathway_matters`` flag).
    hidden_pathway_Ea_J_per_mol : float
        Activation energy used to carry those bounds to other temperatures [J/mol].
    within_run_prior_dof : float or None
        :math:`d_0` of the within-run variance moderation
        (:func:`moderate_variances`); None when the runs' standard errors were
        used as given (no degrees of freedom known, or no standard errors).
    se_imputed_runs : tuple of int
        Positions in ``measurements`` of the runs that had no ``se_ln_k`` while
        others had one; they were given :attr:`se_imputed_ln_k` (see the module
        docstring). Empty when every run or none carried a standard error.
    se_imputed_ln_k : float or None
        The standard error of ln k [-] given to those runs, the square root of
        the mean (moderated) within-run variance of the runs with one; None
        when nothing was imputed.
    """

    pathways: tuple[str, ...]
    temperature_model: str
    parameter_names: tuple[str, ...]
    estimates: np.ndarray
    covariance: np.ndarray
    dof: int
    residual_scale: float
    n_measurements: int
    candidates: tuple[PathwayCandidate, ...]
    uncharacterised_pathways: tuple[str, ...]
    temperature_range_K: tuple[float, float]
    pH_range: tuple[float, float]
    ea_from_prior: tuple[str, ...]
    measurements: tuple[RateMeasurement, ...]
    reference_temperature_K: float = REFERENCE_TEMPERATURE_K
    ea_prior_J_per_mol: tuple[float, float] | None = None
    between_run_sd_ln_k: float = 0.0
    variance_scale: float = 1.0
    selection: str = "fixed"
    hidden_pathway_ln_k_ref_max: Mapping[str, float] = field(default_factory=dict)
    hidden_pathway_Ea_J_per_mol: float = EFSA_DEFAULT_EA_J_PER_MOL
    within_run_prior_dof: float | None = None
    se_imputed_runs: tuple[int, ...] = ()
    se_imputed_ln_k: float | None = None

    # ------------------------------------------------------------------ #
    @property
    def standard_errors(self) -> np.ndarray:
        """Standard errors of the parameters (same units as the estimates)."""
        return np.sqrt(np.clip(np.diag(self.covariance), 0.0, None))

    @property
    def n_params(self) -> int:
        """Number of parameters in the model (including prior-fixed Ea)."""
        return len(self.parameter_names)

    def interval(self, level: float = 0.95) -> ParameterInterval:
        """Student-t confidence intervals of the parameters.

        Parameters
        ----------
        level : float
            Confidence level, e.g. 0.95.

        Returns
        -------
        ParameterInterval
        """
        lv = _check_level(level)
        t = stats.t.ppf(0.5 + lv / 2.0, self.dof)
        se = self.standard_errors
        return ParameterInterval(
            parameter_names=self.parameter_names,
            estimates=_readonly(self.estimates),
            lower=_readonly(self.estimates - t * se),
            upper=_readonly(self.estimates + t * se),
            level=lv,
            dof=self.dof,
        )

    # ------------------------------------------------------------------ #
    def _pathway_index(self) -> np.ndarray:
        return np.array([_SORT_KEY[p] for p in self.pathways], dtype=int)

    def _to_internal(self, params: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Reported parameters (..., 2m) -> internal (a, e), each (..., m)."""
        p1 = params[..., 0::2]
        p2 = params[..., 1::2]
        tref = self.reference_temperature_K
        if self.temperature_model == "arrhenius":
            return p1, p2 / (_R * tref)
        e = p1 / (_R * tref)
        a = math.log(BOLTZMANN_J_PER_K * tref / PLANCK_J_S) + p2 / _R - e
        return a, e

    def _terms(
        self,
        temperature_K: Any,
        pH: Any,
        ionic_strength_M: Any,
        salinity: Any,
    ) -> tuple[np.ndarray, np.ndarray, tuple[int, ...]]:
        T, ph, ionic, sal, shape = _conditions(temperature_K, pH, ionic_strength_M, salinity)
        return self._terms_at(T, _ln_concentrations(T, ph, ionic, sal)), T, shape

    def _check_parameters(self, parameters: Any) -> np.ndarray:
        """Parameter sets as a finite (n_draws, n_params) float array."""
        params = np.asarray(parameters, dtype=float)
        if params.ndim == 1:
            params = params[None, :]
        if params.ndim != 2 or params.shape[1] != self.n_params:
            raise InputError(
                f"parameters must have shape (n_draws, {self.n_params}) for the parameters "
                f"{', '.join(self.parameter_names)}; got shape {np.shape(parameters)}"
            )
        if not np.all(np.isfinite(params)):
            raise InputError("parameters must be finite numbers")
        return params

    def _draw_terms(
        self, T: np.ndarray, lnc_all: np.ndarray, params: np.ndarray, by_condition: bool = False
    ) -> list[np.ndarray]:
        """ln of each pathway's term for many parameter sets.

        The exponent of pathway p is linear in its internal parameters,
        :math:`a_p - e_p u + \\ln c_p` (+ ln(T/T_ref) for Eyring) with
        :math:`u = T_\\mathrm{ref}/T - 1`, so all draws at all conditions are
        one rank-3 product :math:`[a_p, e_p, 1]\\,[1, -u, \\ln c_p]^T` per
        pathway, formed here as an outer product plus two in-place sums.
        Returns one array per pathway of shape (n_draws, n), or (n, n_draws)
        with ``by_condition``.
        """
        lnc = lnc_all[:, self._pathway_index()]
        a, e = self._to_internal(params)
        neg_u = 1.0 - self.reference_temperature_K / T
        offset = (
            np.log(T / self.reference_temperature_K)
            if self.temperature_model == "eyring" else 0.0
        )
        out = []
        # outer products and in-place sums: memory-bound work that a threaded
        # BLAS product (inner dimension 3) does no faster and, on a busy
        # machine, much slower
        for j in range(len(self.pathways)):
            c = lnc[:, j] + offset
            if by_condition:
                t = np.multiply.outer(neg_u, e[:, j])
                t += a[None, :, j]
                t += c[:, None]
            else:
                t = np.multiply.outer(e[:, j], neg_u)
                t += a[:, j, None]
                t += c[None, :]
            out.append(t)
        return out

    def _terms_at(self, T: np.ndarray, lnc_all: np.ndarray) -> np.ndarray:
        """ln of each pathway's term at the estimates, shape (n, m).

        ``T`` and ``lnc_all`` (ln [H+], 0, ln [OH-] per condition, shape
        (n, 3)) are validated, flattened conditions; parameter draws go
        through :meth:`_draw_terms`.
        """
        lnc = lnc_all[:, self._pathway_index()]
        u = self.reference_temperature_K / T - 1.0
        a, e = self._to_internal(np.asarray(self.estimates, dtype=float))
        terms = a[None, :] + lnc - u[:, None] * e[None, :]
        if self.temperature_model == "eyring":
            terms = terms + np.log(T / self.reference_temperature_K)[:, None]
        return terms

    def _jacobian_at(self, T: np.ndarray, w: np.ndarray) -> np.ndarray:
        """d ln k / d parameters, shape (n, n_params), from the pathway fractions ``w`` (n, m)."""
        jac = np.empty((T.size, self.n_params))
        if self.temperature_model == "arrhenius":
            jac[:, 0::2] = w
            jac[:, 1::2] = -w * ((1.0 / T - 1.0 / self.reference_temperature_K) / _R)[:, None]
        else:
            jac[:, 0::2] = -w / (_R * T)[:, None]
            jac[:, 1::2] = w / _R
        return jac

    def ln_k(
        self,
        temperature_K: Any,
        pH: Any,
        ionic_strength_M: Any = 0.0,
        salinity: Any = 0.0,
        parameters: Any = None,
    ) -> np.ndarray:
        """ln of the observed rate constant k_obs [ln(1/s)].

        Parameters
        ----------
        temperature_K : array_like
            Temperature [K].
        pH : array_like
            pH at that temperature.
        ionic_strength_M : array_like
            Ionic strength [mol/L].
        salinity : array_like
            Practical salinity [-].
        parameters : array_like, optional
            None for the estimates, or parameter sets of shape
            (n_draws, n_params) in the units of :attr:`parameter_names`.

        Returns
        -------
        numpy.ndarray
            Shape of the broadcast conditions, or (n_draws, n_conditions)
            (conditions flattened) when ``parameters`` is given.
        """
        if parameters is not None:
            params = self._check_parameters(parameters)
            T, ph, ionic, sal, _ = _conditions(temperature_K, pH, ionic_strength_M, salinity)
            lnc = _ln_concentrations(T, ph, ionic, sal)
            return _logsumexp_terms(self._draw_terms(T, lnc, params))
        terms, _, shape = self._terms(temperature_K, pH, ionic_strength_M, salinity)
        return _logsumexp(terms, axis=1).reshape(shape)

    def prepare_conditions(
        self, temperature_K: Any, pH: Any, ionic_strength_M: Any = 0.0, salinity: Any = 0.0
    ) -> PreparedConditions:
        """Validate conditions and evaluate their water chemistry once.

        Parameters
        ----------
        temperature_K, pH, ionic_strength_M, salinity : array_like
            Conditions as for :meth:`ln_k` (broadcast, then flattened).

        Returns
        -------
        PreparedConditions
            For :meth:`rate_draws_per_s`.
        """
        T, ph, ionic, sal, _ = _conditions(temperature_K, pH, ionic_strength_M, salinity)
        lnc = _ln_concentrations(T, ph, ionic, sal)
        return PreparedConditions(temperature_K=_readonly(T), ln_concentrations=_readonly(lnc))

    def rate_draws_per_s(self, prepared: PreparedConditions, parameters: Any) -> np.ndarray:
        """k_obs [1/s] for many parameter sets at prepared conditions.

        The same numbers as ``exp(ln_k(..., parameters=parameters))`` (to
        rounding, about 1e-15 relative), without the logarithm and its
        exponential: the pathway terms are summed as plain exponentials.

        Parameters
        ----------
        prepared : PreparedConditions
            From :meth:`prepare_conditions`.
        parameters : array_like
            Parameter sets, shape (n_draws, n_params), in the units of
            :attr:`parameter_names`.

        Returns
        -------
        numpy.ndarray
            Shape (n_draws, n_conditions).

        Raises
        ------
        InputError
            If ``prepared`` is not a PreparedConditions or the parameters have
            the wrong shape or are not finite.
        DataError
            If a draw gives a rate constant outside exp(-700) to exp(700) 1/s.
        """
        if not isinstance(prepared, PreparedConditions):
            raise InputError(
                "prepared must come from SurfaceFit.prepare_conditions(...), got "
                f"{type(prepared).__name__}"
            )
        params = self._check_parameters(parameters)
        terms = self._draw_terms(prepared.temperature_K, prepared.ln_concentrations, params)
        with np.errstate(over="ignore", under="ignore"):
            total = np.exp(terms[0])
            tmp = np.empty_like(total)
            for t in terms[1:]:
                np.exp(t, out=tmp)
                total += tmp
        lo, hi = math.exp(-_LN_DIRECT_LIMIT), math.exp(_LN_DIRECT_LIMIT)
        if total.size and not (lo <= float(total.min()) and float(total.max()) <= hi):
            raise DataError(
                "some parameter draws give a rate constant outside exp(-700) to exp(700) 1/s; "
                "the fit is too uncertain at these conditions"
            )
        return total

    def rate_per_s(
        self,
        temperature_K: Any,
        pH: Any,
        ionic_strength_M: Any = 0.0,
        salinity: Any = 0.0,
        parameters: Any = None,
    ) -> np.ndarray:
        """Observed rate constant k_obs [1/s] (see :meth:`ln_k`)."""
        return np.exp(self.ln_k(temperature_K, pH, ionic_strength_M, salinity, parameters))

    def ln_k_jacobian(
        self, temperature_K: Any, pH: Any, ionic_strength_M: Any = 0.0, salinity: Any = 0.0
    ) -> np.ndarray:
        """Derivatives of ln k_obs with respect to the parameters.

        With :math:`w_p` the fraction of k_obs carried by pathway p,

        .. math::

            \\frac{\\partial \\ln k}{\\partial \\ln k_{\\mathrm{ref},p}} = w_p, \\quad
            \\frac{\\partial \\ln k}{\\partial E_{a,p}} =
                -\\frac{w_p}{R}\\left(\\frac{1}{T}-\\frac{1}{T_\\mathrm{ref}}\\right)

        (Arrhenius) or :math:`\\partial \\ln k/\\partial \\Delta H^\\ddagger_p = -w_p/(RT)`,
        :math:`\\partial \\ln k/\\partial \\Delta S^\\ddagger_p = w_p/R` (Eyring).

        Parameters
        ----------
        temperature_K, pH, ionic_strength_M, salinity : array_like
            Conditions (broadcast, then flattened).

        Returns
        -------
        numpy.ndarray
            Shape (n_conditions, n_params), per unit of each parameter.
        """
        terms, T, _ = self._terms(temperature_K, pH, ionic_strength_M, salinity)
        lnk = _logsumexp(terms, axis=1)
        return self._jacobian_at(T, np.exp(terms - lnk[:, None]))

    def contributions(
        self,
        temperature_K: Any,
        pH: Any,
        ionic_strength_M: Any = 0.0,
        salinity: Any = 0.0,
        parameters: Any = None,
    ) -> dict[str, np.ndarray]:
        """Fraction of k_obs carried by each pathway [-].

        Parameters
        ----------
        temperature_K, pH, ionic_strength_M, salinity : array_like
            Conditions.
        parameters : array_like, optional
            As for :meth:`ln_k`.

        Returns
        -------
        dict
            Pathway name -> fractions (summing to 1 over the model's
            pathways), in the shape :meth:`ln_k` returns.
        """
        if parameters is not None:
            params = self._check_parameters(parameters)
            T, ph, ionic, sal, _ = _conditions(temperature_K, pH, ionic_strength_M, salinity)
            lnc = _ln_concentrations(T, ph, ionic, sal)
            terms_p = self._draw_terms(T, lnc, params)
            lnk = _logsumexp_terms(terms_p)
            return {p: np.exp(t - lnk) for p, t in zip(self.pathways, terms_p)}
        terms, _, shape = self._terms(temperature_K, pH, ionic_strength_M, salinity)
        lnk = _logsumexp(terms, axis=1)
        return {p: np.exp(terms[:, j] - lnk).reshape(shape) for j, p in enumerate(self.pathways)}

    def sample_parameters(
        self, n: int, rng: Any = None, *, distribution: str = "normal"
    ) -> np.ndarray:
        """Draw correlated parameter sets from the fitted distribution.

        Parameters
        ----------
        n : int
            Number of draws, >= 1.
        rng : numpy.random.Generator, int or None
            Random generator or seed.
        distribution : str
            ``"normal"``: multivariate normal N(estimates, covariance);
            ``"t"``: multivariate Student t with :attr:`dof` degrees of freedom
            (normal draws scaled by a shared :math:`\\sqrt{\\nu/\\chi^2_\\nu}`),
            the distribution the t-based intervals rest on.

        Returns
        -------
        numpy.ndarray
            Shape (n, n_params).
        """
        if distribution not in ("normal", "t"):
            raise InputError(f"unknown distribution {distribution!r}; valid: 'normal', 't'")
        if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
            raise InputError(f"n must be a positive whole number of draws, got {n!r}")
        gen = rng if isinstance(rng, np.random.Generator) else np.random.default_rng(rng)
        z = gen.standard_normal((int(n), self.n_params))
        dev = z @ _cov_factor(self.covariance).T
        if distribution == "t":
            dev = dev * np.sqrt(self.dof / gen.chisquare(self.dof, size=int(n)))[:, None]
        return self.estimates[None, :] + dev

    # ------------------------------------------------------------------ #
    def to_dict(self) -> dict[str, Any]:
        """JSON-safe dictionary; :meth:`from_dict` restores an identical fit."""
        return {
            "format": _FORMAT,
            "pathways": list(self.pathways),
            "temperature_model": self.temperature_model,
            "parameter_names": list(self.parameter_names),
            "estimates": [float(v) for v in self.estimates],
            "covariance": [[float(v) for v in row] for row in self.covariance],
            "dof": int(self.dof),
            "residual_scale": float(self.residual_scale),
            "n_measurements": int(self.n_measurements),
            "candidates": [c.to_dict() for c in self.candidates],
            "uncharacterised_pathways": list(self.uncharacterised_pathways),
            "temperature_range_K": [float(v) for v in self.temperature_range_K],
            "pH_range": [float(v) for v in self.pH_range],
            "ea_from_prior": list(self.ea_from_prior),
            "measurements": [m.to_dict() for m in self.measurements],
            "reference_temperature_K": float(self.reference_temperature_K),
            "ea_prior_J_per_mol": None
            if self.ea_prior_J_per_mol is None
            else [float(v) for v in self.ea_prior_J_per_mol],
            "between_run_sd_ln_k": float(self.between_run_sd_ln_k),
            "variance_scale": float(self.variance_scale),
            "selection": self.selection,
            "hidden_pathway_ln_k_ref_max": {
                k: float(v) for k, v in self.hidden_pathway_ln_k_ref_max.items()
            },
            "hidden_pathway_Ea_J_per_mol": float(self.hidden_pathway_Ea_J_per_mol),
            "within_run_prior_dof": None
            if self.within_run_prior_dof is None
            else float(self.within_run_prior_dof),
            "se_imputed_runs": [int(i) for i in self.se_imputed_runs],
            "se_imputed_ln_k": None
            if self.se_imputed_ln_k is None
            else float(self.se_imputed_ln_k),
        }

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "SurfaceFit":
        """Rebuild a fit from :meth:`to_dict` output.

        Raises
        ------
        InputError
            If the dictionary is not a stored surface fit.
        """
        if not isinstance(data, Mapping) or data.get("format") != _FORMAT:
            raise InputError(
                f"not a stored surface fit: expected a mapping with format {_FORMAT!r}"
            )
        try:
            pathways = tuple(str(p) for p in data["pathways"])
            model = str(data["temperature_model"])
            if model not in TEMPERATURE_MODELS or any(p not in PATHWAYS for p in pathways):
                raise InputError(
                    f"stored surface fit has unknown model {model!r} or pathways {pathways!r}"
                )
            names = tuple(str(n) for n in data["parameter_names"])
            est = _readonly(data["estimates"])
            cov = _readonly(data["covariance"])
            if est.shape != (len(names),) or cov.shape != (len(names), len(names)):
                raise InputError(
                    "stored surface fit: estimates/covariance do not match parameter_names"
                )
            prior = data.get("ea_prior_J_per_mol")
            cands = tuple(
                PathwayCandidate(
                    pathways=tuple(c["pathways"]),
                    identifiable=bool(c["identifiable"]),
                    reason=str(c["reason"]),
                    n_params=int(c["n_params"]),
                    rss=None if c["rss"] is None else float(c["rss"]),
                    aicc=None if c["aicc"] is None else float(c["aicc"]),
                    ea_from_prior=tuple(c["ea_from_prior"]),
                    selected=bool(c["selected"]),
                )
                for c in data["candidates"]
            )
            return cls(
                pathways=pathways,
                temperature_model=model,
                parameter_names=names,
                estimates=est,
                covariance=cov,
                dof=int(data["dof"]),
                residual_scale=float(data["residual_scale"]),
                n_measurements=int(data["n_measurements"]),
                candidates=cands,
                uncharacterised_pathways=tuple(data["uncharacterised_pathways"]),
                temperature_range_K=tuple(float(v) for v in data["temperature_range_K"]),
                pH_range=tuple(float(v) for v in data["pH_range"]),
                ea_from_prior=tuple(data["ea_from_prior"]),
                measurements=tuple(RateMeasurement(**m) for m in data["measurements"]),
                reference_temperature_K=float(data["reference_temperature_K"]),
                ea_prior_J_per_mol=None if prior is None else (float(prior[0]), float(prior[1])),
                between_run_sd_ln_k=float(data["between_run_sd_ln_k"]),
                variance_scale=float(data["variance_scale"]),
                selection=str(data["selection"]),
                hidden_pathway_ln_k_ref_max={
                    str(k): float(v) for k, v in data["hidden_pathway_ln_k_ref_max"].items()
                },
                hidden_pathway_Ea_J_per_mol=float(data["hidden_pathway_Ea_J_per_mol"]),
                within_run_prior_dof=None
                if data.get("within_run_prior_dof") is None
                else float(data["within_run_prior_dof"]),
                se_imputed_runs=tuple(int(i) for i in data.get("se_imputed_runs", ())),
                se_imputed_ln_k=None
                if data.get("se_imputed_ln_k") is None
                else float(data["se_imputed_ln_k"]),
            )
        except (KeyError, TypeError, ValueError, IndexError) as exc:
            if isinstance(exc, InputError):
                raise
            raise InputError(f"stored surface fit is incomplete or malformed: {exc!r}") from None


def _logsumexp(terms: np.ndarray, axis: int) -> np.ndarray:
    """ln of the sum of exp(terms) along ``axis``, without overflow (terms finite)."""
    top = np.max(terms, axis=axis, keepdims=True)
    return np.squeeze(top, axis=axis) + np.log(np.sum(np.exp(terms - top), axis=axis))


# ln k within this range is evaluated from plain exponentials without loss
_LN_DIRECT_LIMIT = 700.0


def _logsumexp_terms(terms: Sequence[np.ndarray]) -> np.ndarray:
    """ln of the sum of exp over a list of same-shape arrays (one per pathway).

    Plain exponentials are summed first (three passes instead of the six of
    the max-shifted form); where the result leaves ±700, i.e. a term
    overflowed or all of them underflowed, the max-shifted form is used. The
    arrays are not modified.
    """
    if len(terms) == 1:
        return np.array(terms[0], dtype=float)
    total = np.exp(terms[0])
    tmp = np.empty_like(total)
    for t in terms[1:]:
        np.exp(t, out=tmp)
        total += tmp
    np.log(total, out=total)
    if total.size and (
        not -_LN_DIRECT_LIMIT < float(total.min()) or not float(total.max()) < _LN_DIRECT_LIMIT
    ):
        top = terms[0].copy()
        for t in terms[1:]:
            np.maximum(top, t, out=top)
        total.fill(0.0)
        for t in terms:
            np.subtract(t, top, out=tmp)
            np.exp(tmp, out=tmp)
            total += tmp
        np.log(total, out=total)
        total += top
    return total


def _cov_factor(cov: np.ndarray) -> np.ndarray:
    """A matrix L with L L^T = cov (eigen-decomposition; robust to tiny negatives)."""
    vals, vecs = np.linalg.eigh(np.asarray(cov, dtype=float))
    return vecs * np.sqrt(np.clip(vals, 0.0, None))[None, :]


# --------------------------------------------------------------------------- #
# fitting
# --------------------------------------------------------------------------- #
@dataclass
class _Design:
    T: np.ndarray
    u: np.ndarray
    offset: np.ndarray
    lnc: np.ndarray
    y: np.ndarray
    se2: np.ndarray
    has_se: bool
    ph_levels: list[np.ndarray]  # measurement indices per pH level (ascending pH)
    n: int
    se_prior_dof: float | None = None
    se_imputed: tuple[int, ...] = ()
    se_imputed_ln_k: float | None = None


#: Prior degrees of freedom standing for "pool the within-run variances fully".
SE_POOLING_MAX_DOF = 1.0e6


def _trigamma_inverse(value: float) -> float:
    """x with polygamma(1, x) = value (> 0); trigamma decreases monotonically."""
    f = lambda x: float(special.polygamma(1, x)) - value  # noqa: E731
    lo, hi = 1e-8, 1.0
    while f(hi) > 0.0:
        hi *= 10.0
        if hi > 1e12:
            return hi
    return optimize.brentq(f, lo, hi, xtol=1e-12, rtol=1e-12)


def moderate_variances(se2: Any, dof: Any) -> tuple[np.ndarray, float]:
    r"""Empirical-Bayes moderation of the within-run variances.

    Each run's :math:`s_i^2` (``se_ln_k`` squared, :math:`\nu_i` degrees of
    freedom) is an estimate from a short series; weighting runs by these noisy
    values makes the surface intervals too narrow. Following Smyth (Stat.
    Appl. Genet. Mol. Biol. 3 (2004) article 3), the true
    variances are taken as draws from a scaled inverse chi-square
    distribution with :math:`d_0` degrees of freedom and scale :math:`s_0^2`,
    estimated by moments of :math:`\ln s_i^2`:

    .. math::

        e_i = \ln s_i^2 - \psi(\nu_i/2) + \ln(\nu_i/2), \qquad
        \psi'(d_0/2) = \widehat{\mathrm{var}}(e) - \overline{\psi'(\nu_i/2)},

        s_0^2 = \exp\bigl(\bar e + \psi(d_0/2) - \ln(d_0/2)\bigr), \qquad
        \tilde s_i^2 = \frac{d_0 s_0^2 + \nu_i s_i^2}{d_0 + \nu_i}

    (:math:`\psi` digamma, :math:`\psi'` trigamma). When the spread of the
    :math:`\ln s_i^2` is no larger than their sampling noise alone explains,
    :math:`d_0` is infinite (represented by :data:`SE_POOLING_MAX_DOF`) and
    every run gets the pooled variance
    :math:`s_0^2 = \sum_i \nu_i s_i^2 / \sum_i \nu_i`. With fewer than three
    runs the spread cannot be judged and the variances are returned unchanged
    (:math:`d_0 = 0`).

    Parameters
    ----------
    se2 : array_like
        Squared standard errors of ln k [-], > 0.
    dof : array_like
        Their degrees of freedom, >= 1.

    Returns
    -------
    moderated : numpy.ndarray
        Moderated variances :math:`\tilde s_i^2` [-].
    prior_dof : float
        :math:`d_0`, capped at :data:`SE_POOLING_MAX_DOF`.
    """
    s2 = np.asarray(se2, dtype=float)
    nu = np.asarray(dof, dtype=float)
    if s2.size < 3:
        return s2.copy(), 0.0
    e = np.log(s2) - special.digamma(nu / 2.0) + np.log(nu / 2.0)
    excess = float(np.var(e, ddof=1) - np.mean(special.polygamma(1, nu / 2.0)))
    d0 = SE_POOLING_MAX_DOF
    if excess > 0.0:
        d0 = min(2.0 * _trigamma_inverse(excess), SE_POOLING_MAX_DOF)
    if d0 >= SE_POOLING_MAX_DOF:
        # one common variance: its unbiased pooled estimate
        s0_2 = float(np.sum(nu * s2) / np.sum(nu))
    else:
        s0_2 = float(np.exp(np.mean(e) + special.digamma(d0 / 2.0) - np.log(d0 / 2.0)))
    return (d0 * s0_2 + nu * s2) / (d0 + nu), float(d0)


def _levels(values: np.ndarray, tol: float) -> list[np.ndarray]:
    """Group values into levels separated by gaps larger than ``tol``."""
    order = np.argsort(values, kind="stable")
    groups: list[list[int]] = [[int(order[0])]]
    for prev, cur in zip(order[:-1], order[1:]):
        if values[cur] - values[prev] > tol:
            groups.append([])
        groups[-1].append(int(cur))
    return [np.array(g, dtype=int) for g in groups]


def _n_levels(values: np.ndarray, tol: float) -> int:
    return len(_levels(values, tol)) if values.size else 0


def _assigned_runs(design: _Design, subset: tuple[str, ...]) -> dict[str, np.ndarray]:
    """Runs at the pH levels where each pathway of ``subset`` can be told apart.

    The pathways are ordered acid < neutral < base (their pH slopes -1, 0, +1).
    With one pathway it owns every level; otherwise the first owns the lowest
    pH level, the last the highest, and a middle one the levels in between.
    """
    levels = design.ph_levels
    if len(subset) == 1:
        return {subset[0]: np.concatenate(levels)}
    out = {subset[0]: levels[0], subset[-1]: levels[-1]}
    if len(subset) == 3:
        middle = levels[1:-1]
        out[subset[1]] = np.concatenate(middle) if middle else np.array([], dtype=int)
    return out


def _prior_pathways(design: _Design, subset: tuple[str, ...]) -> tuple[str, ...]:
    """Pathways of ``subset`` whose Ea the data cannot give (rule in fit_surface)."""
    owned = _assigned_runs(design, subset)
    return tuple(
        p for p in subset if _n_levels(design.T[owned[p]], TEMPERATURE_LEVEL_TOLERANCE_K) < 2
    )


class _Candidate:
    """Working state of one pathway subset."""

    def __init__(self, design: _Design, subset: tuple[str, ...], prior_paths: tuple[str, ...],
                 prior_e: tuple[float, float]) -> None:
        self.design = design
        self.subset = subset
        self.idx = np.array([_SORT_KEY[p] for p in subset], dtype=int)
        self.m = len(subset)
        self.p = 2 * self.m
        self.prior_paths = prior_paths
        self.prior_pos = np.array([2 * subset.index(p) + 1 for p in prior_paths], dtype=int)
        self.prior_mu, self.prior_sd = prior_e
        self.p_free = self.p - len(prior_paths)
        self.dof = design.n - self.p_free
        lo = np.tile([_LN_K_BOUNDS[0], _E_BOUNDS[0]], self.m)
        hi = np.tile([_LN_K_BOUNDS[1], _E_BOUNDS[1]], self.m)
        self.bounds = (lo, hi)
        self.lnc = design.lnc[:, self.idx]
        # constant parts of the model, ln c + Eyring offset, and -u as a column
        self._base = self.lnc + design.offset[:, None]
        self._u_col = design.u[:, None]
        self._neg_u_col = -self._u_col
        self._jac_single = np.column_stack([np.ones(design.n), -design.u])
        self._jac_single.setflags(write=False)
        self.prior_rows = np.zeros((self.prior_pos.size, self.p))
        self.prior_rows[np.arange(self.prior_pos.size), self.prior_pos] = 1.0 / self.prior_sd

    def model(self, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """ln k of every run and its Jacobian in the internal parameters."""
        a, e = z[0::2], z[1::2]
        terms = self._base + a - self._u_col * e
        if self.m == 1:
            # one pathway: linear in (a, e), constant Jacobian
            return terms[:, 0], self._jac_single
        top = terms.max(axis=1)
        ex = np.exp(terms - top[:, None])
        tot = ex.sum(axis=1)
        lnk = top + np.log(tot)
        w = ex / tot[:, None]
        jac = np.empty((self.design.n, self.p))
        jac[:, 0::2] = w
        jac[:, 1::2] = w * self._neg_u_col
        return lnk, jac

    def start(self) -> np.ndarray:
        """Starting values: non-negative least squares in k with Ea from the prior mean."""
        d = self.design
        e0 = self.prior_mu
        basis = np.exp(self.lnc - d.u[:, None] * e0 + d.offset[:, None])
        k = np.exp(d.y)
        coef, _ = optimize.nnls(basis / k[:, None], np.ones(d.n))
        z0 = np.empty(self.p)
        positive = coef[coef > 0]
        floor = np.log(positive.min()) - 5.0 if positive.size else 0.0
        for j in range(self.m):
            if coef[j] > 0:
                z0[2 * j] = np.log(coef[j])
            else:
                # a pathway NNLS dropped: start it well below the others
                z0[2 * j] = floor if positive.size else float(np.min(d.y - self.lnc[:, j]))
            z0[2 * j + 1] = e0
        lo, hi = self.bounds
        return np.clip(z0, lo + 1e-6, hi - 1e-6)

    def _weighted(
        self, z: np.ndarray, sig_inv: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray]:
        """Weighted residuals and their Jacobian at ``z``, prior rows appended."""
        lnk, jac = self.model(z)
        r = (lnk - self.design.y) * sig_inv
        j = jac * sig_inv[:, None]
        if self.prior_pos.size:
            r = np.concatenate([r, (z[self.prior_pos] - self.prior_mu) / self.prior_sd])
            j = np.vstack([j, self.prior_rows])
        return r, j

    def _levenberg_marquardt(
        self, sig_inv: np.ndarray, z0: np.ndarray
    ) -> np.ndarray | None:
        """Unbounded Levenberg-Marquardt with the analytic Jacobian.

        Steps solve :math:`(J^T J + \\lambda D)\\,\\delta = -J^T r` with :math:`D` the
        running maximum of diag(J^T J) (Marquardt, J. SIAM 11 (1963) 431-441;
        the scaling of Moré, in Numerical Analysis, ed. G. A. Watson, Springer LNM 630
        (1978) 105-116);
        :math:`\\lambda` follows the gain ratio of actual to predicted decrease
        (Nielsen, IMM-REP-1999-05, Technical University of Denmark). Stops when
        both the actual and the predicted relative decrease of the sum of
        squares fall below 1e-12, or the step is at rounding level. The problems
        are tiny (a few parameters, tens of runs), where this direct loop is
        several times faster than a general-purpose solver. Returns None when
        it does not converge within the evaluation budget or meets non-finite
        values.
        """
        z = np.array(z0, dtype=float)
        r, j = self._weighted(z, sig_inv)
        cost = float(r @ r)
        if not math.isfinite(cost):
            return None
        scale = np.zeros(self.p)
        lam, nu = 1e-3, 2.0
        budget = 100 * (self.p + 1)
        evals = 1
        a = j.T @ j
        g = j.T @ r
        diag = np.arange(self.p) * (self.p + 1)
        while evals < budget:
            if not math.isfinite(float(a.sum()) + float(g.sum())):
                return None
            np.maximum(scale, a.flat[diag], out=scale)
            floor = np.where(scale > 0.0, scale, 1.0)
            damped = a.copy()
            damped.flat[diag] += lam * floor
            try:
                step = np.linalg.solve(damped, -g)
            except np.linalg.LinAlgError:
                lam *= nu
                nu *= 2.0
                continue
            predicted = -float(2.0 * (g @ step) + step @ (a @ step))
            small = bool((np.abs(step) - 1e-12 * np.abs(z)).max() <= 1e-12)
            z_new = z + step
            r_new, j_new = self._weighted(z_new, sig_inv)
            evals += 1
            cost_new = float(r_new @ r_new)
            if not math.isfinite(cost_new):
                lam *= nu
                nu *= 2.0
                continue
            actual = cost - cost_new
            tiny = predicted <= 1e-12 * cost and abs(actual) <= 1e-12 * cost
            if actual > 0.0:
                rho = actual / predicted if predicted > 0.0 else 1.0
                z, r, j, cost = z_new, r_new, j_new, cost_new
                a = j.T @ j
                g = j.T @ r
                lam *= max(1.0 / 3.0, 1.0 - (2.0 * rho - 1.0) ** 3)
                nu = 2.0
            else:
                lam *= nu
                nu *= 2.0
            if tiny or small or lam > 1e20:
                return z
        return None

    def solve(self, variance: np.ndarray, z0: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Weighted least squares at fixed run variances (with prior rows)."""
        sig_inv = 1.0 / np.sqrt(variance)
        lo, hi = self.bounds
        # Levenberg-Marquardt first (fast); bounded trust-region reflective when
        # the unbounded solution leaves the physically possible range
        z = self._levenberg_marquardt(sig_inv, z0)
        if z is not None and not (
            np.all(np.isfinite(z)) and np.all(z > lo) and np.all(z < hi)
        ):
            z = None
        if z is None:
            def fun(zz: np.ndarray) -> np.ndarray:
                return self._weighted(zz, sig_inv)[0]

            def jac(zz: np.ndarray) -> np.ndarray:
                return self._weighted(zz, sig_inv)[1]

            res = optimize.least_squares(
                fun, np.clip(z0, lo + 1e-6, hi - 1e-6), jac=jac, bounds=self.bounds,
                method="trf", x_scale="jac", ftol=1e-12, xtol=1e-12, gtol=1e-12, max_nfev=2000,
            )
            z = res.x
        # Gauss-Newton polish (the model is linear in the parameters for one
        # pathway, where this lands on the exact least-squares solution)
        r, j = self._weighted(z, sig_inv)
        for _ in range(3):
            step, *_ = np.linalg.lstsq(j, -r, rcond=None)
            if np.all(np.abs(step) <= 1e-14 * (1.0 + np.abs(z))):
                break
            z_new = z + step
            if np.any(z_new <= lo) or np.any(z_new >= hi):
                break
            r_new, j_new = self._weighted(z_new, sig_inv)
            if r_new @ r_new <= r @ r:
                z, r, j = z_new, r_new, j_new
            else:
                break
        if not np.all(np.isfinite(z)):
            raise ConvergenceError(f"the surface fit for pathways {self.subset} did not converge")
        at_bound = (np.abs(z - lo) < 1e-6 * (1 + np.abs(lo))) | (
            np.abs(z - hi) < 1e-6 * (1 + np.abs(hi))
        )
        return z, at_bound

    def q_stat(self, z: np.ndarray, tau2: float) -> float:
        lnk, _ = self.model(z)
        r = lnk - self.design.y
        return float(np.sum(r * r / np.maximum(self.design.se2 + tau2, _VARIANCE_FLOOR)))

    def _paule_mandel_root(
        self, g_slope: Any, t: float, g: float, s: float, lo: float, hi: float | None
    ) -> float | None:
        """Root of the Paule-Mandel equation :math:`g(\\tau^2) = Q - (n - p) = 0`.

        Newton steps on :math:`h = (n-p)/Q - 1`, which is close to linear in
        :math:`\\tau^2` (:math:`Q \\approx A/(s^2 + \\tau^2)` when the run
        variances are alike), starting from the evaluated point ``t`` with
        ``g``, slope ``s``; ``lo`` (g > 0) and ``hi`` (g <= 0, or None while no
        upper end is known) bracket the root. Once bracketed, a step that would
        leave the bracket or fails to halve the previous one is replaced by
        bisection (the safeguard of Press et al., "Numerical Recipes", 3rd ed.,
        section 9.4). Stops at a relative step of 1e-12 and returns the last
        evaluated point, so its refit is the one kept; None when no bracket
        could be found.
        """
        dof = float(self.dof)
        dx_old = math.inf if hi is None else hi - lo
        for _ in range(100):
            q = g + dof
            ok = s < 0.0 and math.isfinite(s) and math.isfinite(g) and q > 0.0
            t_new = t - g * q / (dof * s) if ok else math.nan
            if hi is None:
                if not t_new > lo:
                    return None
            elif not (lo < t_new < hi) or abs(2.0 * (t_new - t)) > abs(dx_old):
                t_new = 0.5 * (lo + hi)
            dx_old = t_new - t
            if abs(dx_old) <= 1e-12 * max(t, t_new) or (
                hi is not None and hi - lo <= 1e-12 * hi
            ):
                return t
            g, s = g_slope(t_new)
            t = t_new
            if g == 0.0:
                return t
            if g > 0.0:
                lo = t
            else:
                hi = t
        if hi is None:
            return None
        return optimize.brentq(
            lambda x: g_slope(x)[0], lo, hi, xtol=hi * 1e-12, rtol=1e-9, maxiter=200
        )

    def fit(self) -> dict[str, Any]:
        """Fit with the Paule-Mandel between-run variance; returns a result dict.

        The root of :math:`g(\\tau^2) = Q(\\tau^2) - (n - p)` is found by
        safeguarded Newton steps (:meth:`_paule_mandel_root`), each trial
        :math:`\\tau^2` refitted from the previous solution. The slope includes
        the movement of the estimates with :math:`\\tau^2`,

        .. math::

            \\frac{dQ}{d\\tau^2} = -\\sum_i \\frac{r_i^2}{v_i^2}
                + 2\\,(J^T V^{-1} r)^T H^{-1} J^T V^{-2} r, \\qquad
            H = J^T V^{-1} J + P,

        (implicit differentiation of the normal equations; the second term
        vanishes without priors), so few refits are needed.
        """
        d = self.design
        dof = self.dof
        state: dict[str, Any] = {"z": self.start()}

        def solve_at(tau2: float) -> np.ndarray:
            var = np.maximum(d.se2 + tau2, _VARIANCE_FLOOR)
            zz, at = self.solve(var, state["z"])
            state.update(z=zz, tau2=tau2, at_bound=at)
            return zz

        def g_slope(t: float) -> tuple[float, float]:
            z_t = solve_at(t)
            lnk, jac = self.model(z_t)
            r = lnk - d.y
            v = np.maximum(d.se2 + t, _VARIANCE_FLOOR)
            rv = r / v
            slope = -float(rv @ rv)
            if self.prior_pos.size:
                h = jac.T @ (jac / v[:, None])
                h[self.prior_pos, self.prior_pos] += 1.0 / self.prior_sd**2
                try:
                    dz = np.linalg.solve(h, jac.T @ (rv / v))
                    slope += 2.0 * float((jac.T @ rv) @ dz)
                except np.linalg.LinAlgError:
                    pass
            return float(r @ rv) - dof, slope

        if not d.has_se and self.prior_pos.size == 0:
            z = solve_at(1.0)
            lnk, _ = self.model(z)
            rss = float(np.sum((lnk - d.y) ** 2))
            tau2 = rss / dof
        else:
            g_lo = s_lo = 0.0
            tau2 = None
            if d.has_se:
                g_lo, s_lo = g_slope(0.0)
                if g_lo <= 0.0:
                    tau2 = 0.0
                else:
                    # Newton from tau2 = 0; the upper end is found on the way
                    keep = state["z"]
                    tau2 = self._paule_mandel_root(g_slope, 0.0, g_lo, s_lo, 0.0, None)
                    if tau2 is None:
                        state["z"] = keep
            if tau2 is None:
                # unweighted fit from the start values: it brackets the root from above
                keep = state["z"] if d.has_se else None
                state["z"] = self.start()
                z_u = solve_at(1.0 if not d.has_se else max(1.0, float(np.max(d.se2))) * 1e6)
                lnk, _ = self.model(z_u)
                rss_u = float(np.sum((lnk - d.y) ** 2))
                if keep is not None:
                    state["z"] = keep
                hi = max(rss_u / dof, 1e-300)
                lo_known = 0.0
                for _ in range(200):
                    g_hi, s_hi = g_slope(hi)
                    if g_hi <= 0.0:
                        break
                    lo_known, g_known, s_known = hi, g_hi, s_hi
                    hi *= 2.0
                if lo_known > 0.0:
                    lo, g_lo = lo_known, g_known
                elif d.has_se:
                    lo = 0.0
                else:
                    lo = hi * 1e-30
                    g_lo, _ = g_slope(lo)
                if not d.has_se and g_lo <= 0.0:
                    tau2 = lo
                else:
                    tau2 = self._paule_mandel_root(g_slope, hi, g_hi, s_hi, lo, hi)
            if state["tau2"] != tau2:
                solve_at(tau2)
        # final quantities at tau2
        z, at_bound = state["z"], state["at_bound"]
        lnk, jac = self.model(z)
        r = lnk - d.y
        var0 = np.maximum(d.se2 + tau2, _VARIANCE_FLOOR)
        Q = float(np.sum(r * r / var0))
        # without run SEs tau2 carries the whole scatter and Q = dof, so q = 1
        q = Q / dof if d.has_se else 1.0
        var = np.maximum(q * var0, _VARIANCE_FLOOR)
        info = jac.T @ (jac / var[:, None])
        if self.prior_pos.size:
            info[self.prior_pos, self.prior_pos] += 1.0 / self.prior_sd**2
        return {
            "z": z,
            "at_bound": at_bound,
            "info": info,
            "rss": float(r @ r),
            "tau2": float(tau2),
            "q": float(q),
            "Q": Q,
            "var0": var0,
            "residuals": r,
            "jac": jac,
        }


def _identifiability(cand: _Candidate, result: dict[str, Any]) -> str:
    """Empty string if the fitted candidate is characterised, else the reason."""
    info = result["info"]
    if np.any(result["at_bound"]):
        j = int(np.argmax(result["at_bound"]))
        p = cand.subset[j // 2]
        what = "rate constant" if j % 2 == 0 else "activation energy"
        return (
            f"the {what} of the {p} pathway ran to the edge of the physically possible "
            "range: the measurements show no sign of this pathway"
        )
    _, jac = cand.model(result["z"])
    largest = jac[:, 0::2].max(axis=0)
    if np.any(largest < _MIN_CONTRIBUTION):
        p = cand.subset[int(np.argmin(largest))]
        return (
            f"the {p} pathway would carry less than {_MIN_CONTRIBUTION:.1%} of the observed "
            f"rate in every run (at most {largest.min():.1e}): the measurements show no sign of it"
        )
    diag = np.diag(info)
    if np.any(~np.isfinite(diag)) or np.any(diag <= 0.0):
        return "the measurements carry no information on some parameters"
    scale = 1.0 / np.sqrt(diag)
    corr = info * scale[:, None] * scale[None, :]
    ev = np.linalg.eigvalsh(corr)
    if ev[0] <= _MIN_RELATIVE_EIGENVALUE * ev[-1]:
        return (
            "the parameters cannot be told apart by these measurements (their information "
            f"matrix is singular, smallest relative eigenvalue {ev[0] / ev[-1]:.1e})"
        )
    return ""


def _aicc(design: _Design, cand: _Candidate, result: dict[str, Any]) -> float | None:
    """AICc from the Gaussian likelihood with ML-scaled run variances."""
    n = design.n
    k = cand.p_free
    if n - k - 1 <= 0:
        return None
    var0 = result["var0"]
    r = result["residuals"]
    phi = float(np.sum(r * r / var0)) / n
    var = np.maximum(phi * var0, _VARIANCE_FLOOR)
    m2ll = float(np.sum(np.log(2.0 * np.pi * var)) + n)
    return m2ll + 2.0 * k + 2.0 * k * (k + 1) / (n - k - 1)


def _validate_prior(ea_prior_J_per_mol: Any) -> tuple[float, float] | None:
    if ea_prior_J_per_mol is None:
        return None
    try:
        mean, sd = ea_prior_J_per_mol
    except (TypeError, ValueError):
        raise InputError(
            "ea_prior_J_per_mol must be a pair (mean, sd) in J/mol, e.g. (65400.0, 15000.0); "
            f"got {ea_prior_J_per_mol!r}"
        ) from None
    mean = _finite_float(mean, "ea_prior_J_per_mol mean", "")
    sd = _finite_float(sd, "ea_prior_J_per_mol sd", "")
    if sd <= 0.0:
        raise InputError(f"the activation-energy prior needs a positive sd in J/mol, got {sd!r}")
    if not 1e3 <= mean <= 500e3:
        raise InputError(
            f"the activation-energy prior mean must be in J/mol between 1000 and 500000, got "
            f"{mean!r} (kJ/mol given by mistake?)"
        )
    return mean, sd


def _validate_pathways(pathways: Any) -> tuple[str, ...] | None:
    if isinstance(pathways, str):
        if pathways == "auto":
            return None
        if pathways in PATHWAYS:
            return (pathways,)
        raise InputError(
            f"unknown pathways {pathways!r}; valid: 'auto' or a tuple drawn from {PATHWAYS}"
        )
    try:
        items = tuple(pathways)
    except TypeError:
        raise InputError(
            f"pathways must be 'auto' or a tuple drawn from {PATHWAYS}, got {pathways!r}"
        ) from None
    if not items:
        raise InputError(f"pathways must not be empty; choose from {PATHWAYS} or 'auto'")
    for p in items:
        if p not in PATHWAYS:
            raise InputError(f"unknown pathway {p!r}; valid: {', '.join(PATHWAYS)}")
    if len(set(items)) != len(items):
        raise InputError(f"pathways lists a pathway twice: {items!r}")
    return tuple(sorted(items, key=_SORT_KEY.__getitem__))


def _build_design(measurements: Sequence[RateMeasurement], tref: float, model: str) -> _Design:
    T = np.array([m.temperature_K for m in measurements])
    ph = np.array([m.pH for m in measurements])
    ionic = np.array([m.ionic_strength_M for m in measurements])
    sal = np.array([m.salinity for m in measurements])
    y = np.log(np.array([m.k_per_s for m in measurements]))
    ses = [m.se_ln_k for m in measurements]
    given = np.array([s is not None for s in ses], dtype=bool)
    has = np.flatnonzero(given)
    imputed: tuple[int, ...] = tuple(int(i) for i in np.flatnonzero(~given)) if has.size else ()
    se2 = np.zeros(len(ses))
    prior_dof = None
    imputed_se = None
    if has.size:
        se2_given = np.array([max(ses[i], MIN_SE_LN_K) ** 2 for i in has])
        dofs = [measurements[i].se_dof for i in has]
        if all(d is not None for d in dofs):
            se2_given, prior_dof = moderate_variances(se2_given, np.array(dofs, dtype=float))
        se2[has] = se2_given
        if imputed:
            # runs without a standard error: the mean within-run variance of the
            # others, the variance the model assumes for a new run (module docstring)
            fill = float(np.mean(se2_given))
            se2[list(imputed)] = fill
            imputed_se = math.sqrt(fill)
    u = tref / T - 1.0
    offset = np.log(T / tref) if model == "eyring" else np.zeros_like(T)
    return _Design(
        T=T, u=u, offset=offset, lnc=_ln_concentrations(T, ph, ionic, sal), y=y, se2=se2,
        has_se=bool(has.size), ph_levels=_levels(ph, PH_LEVEL_TOLERANCE), n=len(measurements),
        se_prior_dof=prior_dof, se_imputed=imputed, se_imputed_ln_k=imputed_se,
    )


def _uncharacterised(design: _Design, chosen: tuple[str, ...]) -> tuple[str, ...]:
    """Pathways not in ``chosen`` that the measured pH levels cannot separate."""
    n_levels = len(design.ph_levels)
    return tuple(p for p in PATHWAYS if p not in chosen and len(chosen) + 1 > n_levels)


def fit_surface(
    measurements: Sequence[RateMeasurement],
    *,
    temperature_model: str = "arrhenius",
    pathways: Any = "auto",
    ea_prior_J_per_mol: tuple[float, float] | None = None,
    reference_temperature_K: float = REFERENCE_TEMPERATURE_K,
) -> SurfaceFit:
    """Fit the pH-temperature rate surface to hydrolysis runs.

    Each pathway p contributes :math:`k_p(T)\\,c_p` with :math:`c_A = [\\mathrm{H^+}]`,
    :math:`c_N = 1`, :math:`c_B = [\\mathrm{OH^-}]`; with Arrhenius

    .. math::

        \\ln k_\\mathrm{obs} = \\ln \\sum_p \\exp\\!\\left(\\ln k_{\\mathrm{ref},p}
            - \\frac{E_{a,p}}{R}\\left(\\frac{1}{T}-\\frac{1}{T_\\mathrm{ref}}\\right)
            + \\ln c_p\\right)

    (Mabey and Mill 1978; Arrhenius 1889) or the Eyring law (Eyring
    1935), fitted by weighted nonlinear least squares on ln k with an analytic
    Jacobian (a direct Levenberg-Marquardt loop; bounded trust-region
    reflective steps of :func:`scipy.optimize.least_squares` when a parameter
    leaves its physically possible range); the statistical model
    (Paule-Mandel between-run variance, Knapp-Hartung scale) is described in
    the module docstring. Internally each pathway is parametrised by ln k at
    the reference temperature and :math:`E_a/(R T_\\mathrm{ref})`; results are
    reported in SI units.

    Rules
    -----
    *pH and temperature levels*: measured pH values within
    :data:`PH_LEVEL_TOLERANCE` form one level, temperatures within
    :data:`TEMPERATURE_LEVEL_TOLERANCE_K` one level.

    *Candidates*: a subset of m pathways needs at least m pH levels and more
    runs than parameters estimated from the data. It is then fitted, and
    dropped as not identifiable when a parameter runs to its bound, when one
    of its pathways carries less than 0.1 % of k_obs in every run, or when the
    information matrix is singular.

    *Activation energy from data or prior*: within a subset ordered acid,
    neutral, base, the first pathway owns the lowest pH level, the last the
    highest and a middle one the levels between (a single pathway owns all).
    A pathway's Ea is estimated when its runs span at least two temperature
    levels; otherwise it comes from the prior ``ea_prior_J_per_mol`` or, if
    none is given, from the EFSA (2008) default
    :data:`EFSA_DEFAULT_EA_J_PER_MOL` with SD
    :data:`DEFAULT_EA_PRIOR_SD_J_PER_MOL` (a project choice). The prior enters
    as a Gaussian pseudo-observation, hence also the covariance. (For Eyring
    the prior on Ea becomes one on :math:`\\Delta H^\\ddagger = E_a - R T_\\mathrm{ref}`.)

    *Selection* (``pathways="auto"``): the identifiable candidate with the
    smallest AICc, :math:`-2\\ln L + 2k + 2k(k+1)/(n-k-1)`, with L the Gaussian
    likelihood at the run variances :math:`s_i^2 + \\hat\\tau^2` scaled by their
    maximum-likelihood factor and k the number of surface parameters estimated
    from the data. The single scatter parameter, common to every candidate, is
    not counted in k: with the usual nine runs, counting it makes the
    three-pathway model unselectable however strongly the data demand it.
    Candidates without a defined AICc (n - k - 1 <= 0) are chosen only if no
    other candidate is identifiable (then the one with fewest parameters).

    With a single pH level only the neutral model is tried: any one pathway
    would fit equally well, and the rate is then described as pH-independent.

    *Uncharacterised pathways*: a pathway outside the chosen model is
    uncharacterised when adding it would need more pH levels than were
    measured (with only pH 7 measured, acid and base catalysis cannot be told
    apart from the neutral reaction).

    Parameters
    ----------
    measurements : sequence of RateMeasurement
        The runs. Runs without ``se_ln_k`` among runs with one are given the
        mean within-run variance of the others (module docstring; listed in
        :attr:`SurfaceFit.se_imputed_runs`).
    temperature_model : str
        ``"arrhenius"`` or ``"eyring"``.
    pathways : str or tuple of str
        ``"auto"`` or a fixed tuple drawn from :data:`PATHWAYS`.
    ea_prior_J_per_mol : tuple of float, optional
        (mean, sd) [J/mol] for pathways whose Ea the data cannot give.
    reference_temperature_K : float
        Reference temperature of ``ln_k_ref`` [K].

    Returns
    -------
    SurfaceFit

    Raises
    ------
    InputError
        Unknown model or pathway, bad prior.
    DataError
        Fewer runs than the model needs.
    IdentifiabilityError
        A fixed pathway set the data cannot characterise, or no identifiable
        candidate at all.
    """
    if temperature_model not in TEMPERATURE_MODELS:
        raise InputError(
            f"unknown temperature_model {temperature_model!r}; valid: "
            f"{', '.join(TEMPERATURE_MODELS)}"
        )
    if isinstance(measurements, RateMeasurement):
        measurements = [measurements]
    try:
        runs = tuple(measurements)
    except TypeError:
        raise InputError(
            f"measurements must be a sequence of RateMeasurement, got {type(measurements).__name__}"
        ) from None
    for i, m in enumerate(runs):
        if not isinstance(m, RateMeasurement):
            raise InputError(
                f"measurement {i} is a {type(m).__name__}, not a RateMeasurement (build runs "
                "with RateMeasurement(...), .from_series_fit(...) or .from_dt50(...))"
            )
    if len(runs) < 2:
        raise DataError(
            f"a rate surface needs at least 2 runs (an Arrhenius fit of one pathway at least 3); "
            f"got {len(runs)}"
        )
    tref = _finite_float(reference_temperature_K, "reference_temperature_K", "")
    units.validate_temperature_K(tref)
    fixed = _validate_pathways(pathways)
    user_prior = _validate_prior(ea_prior_J_per_mol)
    prior = user_prior or (EFSA_DEFAULT_EA_J_PER_MOL, DEFAULT_EA_PRIOR_SD_J_PER_MOL)
    rt = _R * tref
    if temperature_model == "arrhenius":
        prior_e = (prior[0] / rt, prior[1] / rt)
    else:
        prior_e = ((prior[0] - rt) / rt, prior[1] / rt)

    design = _build_design(runs, tref, temperature_model)
    n_ph = len(design.ph_levels)

    subsets: list[tuple[str, ...]]
    if fixed is not None:
        subsets = [fixed]
    else:
        subsets = [c for r in (1, 2, 3) for c in combinations(PATHWAYS, r)]

    candidates: list[PathwayCandidate] = []
    fitted: list[tuple[PathwayCandidate, _Candidate, dict[str, Any]]] = []
    for subset in subsets:
        prior_paths = _prior_pathways(design, subset) if len(subset) <= n_ph else ()
        cand = _Candidate(design, subset, prior_paths, prior_e)
        reason = ""
        if n_ph == 1 and subset != ("neutral",):
            reason = (
                "with runs at a single pH level an acid- or base-catalysed pathway cannot be "
                "told apart from the neutral reaction; the rate is described as neutral"
            )
        elif len(subset) > n_ph:
            reason = (
                f"{len(subset)} pathways need runs at {len(subset)} or more pH levels "
                f"(pH values more than {PH_LEVEL_TOLERANCE} apart); the runs cover {n_ph}"
            )
        elif cand.dof < 1:
            reason = (
                f"{design.n} runs cannot determine the {cand.p_free} parameters of the "
                f"{'+'.join(subset)} model with any scatter left to estimate; at least "
                f"{cand.p_free + 1} runs are needed"
            )
        result = None
        if not reason:
            result = cand.fit()
            reason = _identifiability(cand, result)
        if reason:
            rss = None if result is None else result["rss"]
            candidates.append(
                PathwayCandidate(subset, False, reason, cand.p_free, rss, None, prior_paths)
            )
            continue
        aicc = _aicc(design, cand, result)
        pc = PathwayCandidate(subset, True, "", cand.p_free, result["rss"], aicc, prior_paths)
        candidates.append(pc)
        fitted.append((pc, cand, result))

    if not fitted:
        if fixed is not None:
            reason = candidates[0].reason
            too_few = design.n - candidates[0].n_params < 1 and len(fixed) <= n_ph
            err = DataError if too_few else IdentifiabilityError
            raise err(f"cannot fit the {'+'.join(fixed)} model: {reason}")
        if all(design.n - c.n_params < 1 for c in candidates if "pH level" not in c.reason):
            smallest = min(c.n_params for c in candidates)
            raise DataError(
                f"{design.n} runs are too few for any rate surface: even the simplest model "
                f"has {smallest} parameters and at least {smallest + 1} runs are needed"
            )
        details = "; ".join(f"{'+'.join(c.pathways)}: {c.reason}" for c in candidates)
        raise IdentifiabilityError(
            f"no pathway model can be characterised by these {design.n} runs ({details})"
        )

    if fixed is not None:
        chosen_idx = 0
    else:
        finite = [i for i, (pc, _, _) in enumerate(fitted) if pc.aicc is not None]
        if finite:
            chosen_idx = min(finite, key=lambda i: fitted[i][0].aicc)
        else:
            chosen_idx = min(
                range(len(fitted)), key=lambda i: (fitted[i][0].n_params, fitted[i][0].rss)
            )
    chosen_pc, cand, result = fitted[chosen_idx]
    candidates = [
        PathwayCandidate(c.pathways, c.identifiable, c.reason, c.n_params, c.rss, c.aicc,
                         c.ea_from_prior, selected=(c is chosen_pc))
        for c in candidates
    ]

    # covariance of internal parameters, then map to reported SI parameters
    try:
        cov_int = linalg.inv(result["info"], check_finite=True)
    except (linalg.LinAlgError, ValueError):
        raise IdentifiabilityError(
            f"the information matrix of the {'+'.join(cand.subset)} model is singular"
        ) from None
    cov_int = 0.5 * (cov_int + cov_int.T)
    z = result["z"]
    m = cand.m
    M = np.zeros((2 * m, 2 * m))
    est = np.empty(2 * m)
    names: list[str] = []
    c0 = math.log(BOLTZMANN_J_PER_K * tref / PLANCK_J_S)
    for j, p in enumerate(cand.subset):
        a, e = z[2 * j], z[2 * j + 1]
        if temperature_model == "arrhenius":
            names += [f"ln_k_ref_{p}", f"Ea_{p}_J_per_mol"]
            est[2 * j] = a
            est[2 * j + 1] = e * rt
            M[2 * j, 2 * j] = 1.0
            M[2 * j + 1, 2 * j + 1] = rt
        else:
            names += [f"dH_{p}_J_per_mol", f"dS_{p}_J_per_mol_K"]
            est[2 * j] = e * rt
            est[2 * j + 1] = _R * (a - c0 + e)
            M[2 * j, 2 * j + 1] = rt
            M[2 * j + 1, 2 * j] = _R
            M[2 * j + 1, 2 * j + 1] = _R
    cov = M @ cov_int @ M.T
    cov = 0.5 * (cov + cov.T)

    tau2, q = result["tau2"], result["q"]
    mean_se2 = float(np.mean(design.se2)) if design.has_se else 0.0
    residual_scale = math.sqrt(max(q * (tau2 + mean_se2), 0.0))

    unchar = _uncharacterised(design, cand.subset)
    hidden: dict[str, float] = {}
    hidden_ea = prior[0]
    for p in unchar:
        j = _SORT_KEY[p]
        # ln K_ref such that the pathway alone would not exceed any measured rate
        to_ref = (hidden_ea / _R) * (1.0 / design.T - 1.0 / tref)
        hidden[p] = float(np.min(design.y - design.lnc[:, j] + to_ref))

    used_prior = bool(cand.prior_paths)
    return SurfaceFit(
        pathways=cand.subset,
        temperature_model=temperature_model,
        parameter_names=tuple(names),
        estimates=_readonly(est),
        covariance=_readonly(cov),
        dof=int(cand.dof),
        residual_scale=float(residual_scale),
        n_measurements=design.n,
        candidates=tuple(candidates),
        uncharacterised_pathways=unchar,
        temperature_range_K=(float(design.T.min()), float(design.T.max())),
        pH_range=(float(min(m.pH for m in runs)), float(max(m.pH for m in runs))),
        ea_from_prior=cand.prior_paths,
        measurements=runs,
        reference_temperature_K=tref,
        ea_prior_J_per_mol=prior if (used_prior or user_prior is not None) else None,
        between_run_sd_ln_k=float(math.sqrt(max(tau2, 0.0))),
        variance_scale=float(q),
        selection="auto" if fixed is None else "fixed",
        hidden_pathway_ln_k_ref_max=hidden,
        hidden_pathway_Ea_J_per_mol=float(hidden_ea),
        within_run_prior_dof=design.se_prior_dof,
        se_imputed_runs=design.se_imputed,
        se_imputed_ln_k=design.se_imputed_ln_k,
    )
