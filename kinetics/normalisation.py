"""Temperature normalisation of a half-life (DT50) to a reference temperature.

Regulatory comparisons ask for a half-life at a reference temperature (12 °C for
the EU persistence criteria, 20 °C or 25 °C for many study reports) while the
half-life was measured at another. Three methods, named by strings in
:data:`NORMALISATION_METHODS`:

``"fitted"``
    The ratio of rate constants predicted by a fitted pH-temperature surface
    (``kinetics.surface.SurfaceFit``) at the given pH, i.e. with the fitted
    activation energies of every pathway weighted by its share of k at each
    temperature; with a t-based interval from the parameter covariance.
``"efsa_2008"``
    Arrhenius with the default activation energy Ea = 65.4 kJ/mol of the EFSA
    opinion on the default Q10 value (EFSA Journal (2008) 622).
``"echa_r16"``
    The exponential factor 0.08 per kelvin of the ECHA Guidance on information
    requirements and chemical safety assessment, Chapter R.16 (2016):
    DT50(T2) = DT50(T1)·exp(0.08·(T1 - T2)).

The default methods have no uncertainty of their own: they are conventions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import DataError, InputError
from kinetics.surface import EFSA_DEFAULT_EA_J_PER_MOL, GAS_CONSTANT_J_PER_MOL_K
from kinetics.units import as_float_array, validate_pH, validate_temperature_K

__all__ = [
    "NORMALISATION_METHODS",
    "METHOD_DESCRIPTIONS",
    "EFSA_2008_EA_J_PER_MOL",
    "ECHA_R16_FACTOR_PER_K",
    "GAS_CONSTANT_J_PER_MOL_K",
    "REFERENCE_TEMPERATURES_K",
    "NormalisedDT50",
    "DT50Interval",
    "normalise_dt50",
    "normalisation_factor",
]

# GAS_CONSTANT_J_PER_MOL_K (exact in the 2019 SI, CODATA 2018) is re-exported from
# kinetics.surface, so that both modules use one value.
#: EFSA (2008) default activation energy [J/mol] (EFSA Journal (2008) 622,
#: "Opinion on a request from EFSA related to the default Q10 value used to
#: describe the temperature effect on transformation rates of pesticides in soil");
#: the same value as :data:`kinetics.surface.EFSA_DEFAULT_EA_J_PER_MOL`.
EFSA_2008_EA_J_PER_MOL = EFSA_DEFAULT_EA_J_PER_MOL
#: ECHA Guidance Chapter R.16 (2016) exponential temperature factor [1/K].
ECHA_R16_FACTOR_PER_K = 0.08
#: Temperatures often asked for [K]: 12 °C (EU persistence criteria), 20 °C, 25 °C.
REFERENCE_TEMPERATURES_K = {"12C": 285.15, "20C": 293.15, "25C": 298.15}

#: Valid method names.
NORMALISATION_METHODS = ("fitted", "efsa_2008", "echa_r16")

#: Plain-language statement of each method, repeated in every result.
METHOD_DESCRIPTIONS = {
    "fitted": (
        "ratio of the rate constants of the fitted pH-temperature surface at the given pH "
        "(fitted activation energies of every pathway, each weighted by its share of k)"
    ),
    "efsa_2008": (
        "Arrhenius equation with the default activation energy 65.4 kJ/mol of EFSA "
        "Journal (2008) 622 (opinion on the default Q10 value)"
    ),
    "echa_r16": (
        "DT50(T2) = DT50(T1)·exp(0.08·(T1 - T2)), the temperature correction of the ECHA "
        "Guidance on information requirements and chemical safety assessment, Chapter R.16 "
        "(2016)"
    ),
}

_SOURCES = {
    "fitted": "fieldrate surface fit (see kinetics.surface)",
    "efsa_2008": "EFSA Journal (2008) 622: default Q10 value, Ea = 65.4 kJ/mol",
    "echa_r16": "ECHA Guidance on IR&CSA, Chapter R.16 (2016): factor 0.08 per K",
}


@dataclass(frozen=True)
class DT50Interval:
    """Interval of a normalised DT50 at one level [s]."""

    level: float
    dt50_low_s: float
    dt50_high_s: float


@dataclass(frozen=True)
class NormalisedDT50:
    """A half-life carried from one temperature to another.

    Attributes
    ----------
    dt50_s : float
        The input half-life [s].
    temperature_K : float
        Temperature at which it applies [K].
    reference_temperature_K : float
        Temperature it was carried to [K].
    dt50_reference_s : float
        Half-life at the reference temperature [s].
    factor : float
        dt50_reference_s / dt50_s [-].
    method : str
        One of :data:`NORMALISATION_METHODS`.
    method_description : str
        What the method does, in words (also for reports).
    source : str
        The published source of the method.
    apparent_Ea_J_per_mol : float or None
        Activation energy equivalent to ``factor`` between the two temperatures
        [J/mol] (for ``"echa_r16"`` it depends on the temperatures); None when
        the two temperatures are equal.
    pH : float or None
        pH of the ``"fitted"`` method.
    se_ln_factor : float or None
        Standard error of ln(factor) from the fit covariance (``"fitted"`` only).
    dof : int or None
        Degrees of freedom of the t quantile (``"fitted"`` only).
    notes : tuple of str
        E.g. extrapolation outside the measured temperatures.
    caution : str
    """

    dt50_s: float
    temperature_K: float
    reference_temperature_K: float
    dt50_reference_s: float
    factor: float
    method: str
    method_description: str
    source: str
    apparent_Ea_J_per_mol: float | None
    pH: float | None = None
    se_ln_factor: float | None = None
    dof: int | None = None
    notes: tuple[str, ...] = ()
    caution: str = CAUTION_TEXT

    def interval(self, level: float = 0.95) -> DT50Interval:
        """Interval of ``dt50_reference_s`` from the uncertainty of the factor.

        Only the ``"fitted"`` method has one (t quantile with the fit's degrees of
        freedom on ln(factor)); the published defaults are conventions without a
        stated uncertainty, and the uncertainty of the input DT50 itself is not
        included.

        Raises
        ------
        InputError
            For a default method, or a level outside (0, 1).
        """
        lv = float(as_float_array(level, "level"))
        if not 0.0 < lv < 1.0:
            raise InputError(f"level must be between 0 and 1 (e.g. 0.95), got {level!r}")
        if self.se_ln_factor is None or self.dof is None:
            raise InputError(
                f"the {self.method!r} method is a published convention without a stated "
                "uncertainty; use method='fitted' with a surface fit for an interval"
            )
        q = float(stats.t.ppf(0.5 + lv / 2.0, self.dof))
        half = q * self.se_ln_factor
        return DT50Interval(
            level=lv,
            dt50_low_s=self.dt50_reference_s * math.exp(-half),
            dt50_high_s=self.dt50_reference_s * math.exp(half),
        )


def _temperature(value: Any, name: str) -> float:
    arr = as_float_array(value, name)
    if arr.ndim != 0:
        raise InputError(f"{name} must be a single temperature [K], got {value!r}")
    validate_temperature_K(arr)
    return float(arr)


def normalisation_factor(
    temperature_K: float, reference_temperature_K: float, *, method: str = "efsa_2008"
) -> float:
    """DT50(reference) / DT50(temperature) for a published default method.

    .. math::

        \\frac{DT_{50}(T_\\mathrm{ref})}{DT_{50}(T)} =
        \\exp\\left(\\frac{E_a}{R}\\left(\\frac{1}{T_\\mathrm{ref}} - \\frac{1}{T}\\right)\\right)
        \\quad \\text{(efsa\\_2008, } E_a = 65.4\\ \\mathrm{kJ/mol}
        \\text{; EFSA Journal (2008) 622)}

    .. math::

        \\frac{DT_{50}(T_\\mathrm{ref})}{DT_{50}(T)} = \\exp\\big(0.08\\,(T - T_\\mathrm{ref})\\big)
        \\quad \\text{(echa\\_r16; ECHA Guidance R.16, 2016)}

    Parameters
    ----------
    temperature_K, reference_temperature_K : float
        From and to [K].
    method : {"efsa_2008", "echa_r16"}

    Raises
    ------
    InputError
        Unknown method (``"fitted"`` needs :func:`normalise_dt50` with a surface) or
        a temperature outside liquid water.
    """
    t1 = _temperature(temperature_K, "temperature_K")
    t2 = _temperature(reference_temperature_K, "reference_temperature_K")
    if method == "efsa_2008":
        return math.exp(EFSA_2008_EA_J_PER_MOL / GAS_CONSTANT_J_PER_MOL_K * (1.0 / t2 - 1.0 / t1))
    if method == "echa_r16":
        return math.exp(ECHA_R16_FACTOR_PER_K * (t1 - t2))
    if method == "fitted":
        raise InputError(
            "method 'fitted' needs a surface fit: use normalise_dt50(..., surface=fit)"
        )
    raise InputError(
        f"unknown normalisation method {method!r}; valid: {', '.join(NORMALISATION_METHODS)}"
    )


def _apparent_ea(factor: float, t1: float, t2: float) -> float | None:
    # factor = exp(Ea/R (1/t2 - 1/t1)) solved for Ea; equal temperatures give no information
    if abs(t2 - t1) < 1e-9:
        return None
    return GAS_CONSTANT_J_PER_MOL_K * math.log(factor) / (1.0 / t2 - 1.0 / t1)


def normalise_dt50(
    dt50_s: float,
    temperature_K: float,
    reference_temperature_K: float = 285.15,
    *,
    method: str = "efsa_2008",
    surface: Any = None,
    pH: float | None = None,
    ionic_strength_M: float = 0.0,
    salinity: float = 0.0,
) -> NormalisedDT50:
    """Carry a DT50 from ``temperature_K`` to ``reference_temperature_K``.

    ``"fitted"`` uses the surface's rate constants at ``pH``:

    .. math::

        DT_{50}(T_\\mathrm{ref}) = DT_{50}(T)\\,
            \\exp\\big(\\ln k(T, \\mathrm{pH}) - \\ln k(T_\\mathrm{ref}, \\mathrm{pH})\\big)

    with :math:`\\mathrm{se}(\\ln f)^2 = g^\\top \\Sigma g`, :math:`g` the difference
    of the ln k gradients at the two temperatures and :math:`\\Sigma` the
    parameter covariance (delta method, exact here because the Arrhenius ln k
    of one pathway is linear in its parameters). The default methods are given
    in :func:`normalisation_factor`.

    Parameters
    ----------
    dt50_s : float
        Half-life at ``temperature_K`` [s], > 0.
    temperature_K : float
        Temperature of the half-life [K].
    reference_temperature_K : float
        Target temperature [K]; default 285.15 K (12 °C). See
        :data:`REFERENCE_TEMPERATURES_K`.
    method : {"fitted", "efsa_2008", "echa_r16"}
    surface : SurfaceFit, optional
        Required for ``"fitted"``.
    pH : float, optional
        Required for ``"fitted"``.
    ionic_strength_M, salinity : float
        Medium of the ``"fitted"`` method.

    Returns
    -------
    NormalisedDT50

    Raises
    ------
    InputError
        Unknown method, missing surface or pH, non-positive DT50, temperature
        outside liquid water.
    """
    if method not in NORMALISATION_METHODS:
        raise InputError(
            f"unknown normalisation method {method!r}; valid: {', '.join(NORMALISATION_METHODS)}"
        )
    dt50 = float(as_float_array(dt50_s, "dt50_s"))
    if dt50 <= 0:
        raise InputError(f"dt50_s must be > 0, got {dt50_s!r}")
    t1 = _temperature(temperature_K, "temperature_K")
    t2 = _temperature(reference_temperature_K, "reference_temperature_K")
    notes: list[str] = []

    if method != "fitted":
        if surface is not None:
            notes.append(f"A surface fit was given but method {method!r} does not use it.")
        factor = normalisation_factor(t1, t2, method=method)
        return NormalisedDT50(
            dt50_s=dt50, temperature_K=t1, reference_temperature_K=t2,
            dt50_reference_s=dt50 * factor, factor=factor, method=method,
            method_description=METHOD_DESCRIPTIONS[method], source=_SOURCES[method],
            apparent_Ea_J_per_mol=_apparent_ea(factor, t1, t2)
            if method == "echa_r16" else EFSA_2008_EA_J_PER_MOL,
            pH=None if pH is None else float(validate_pH(pH)), notes=tuple(notes),
        )

    if surface is None or not callable(getattr(surface, "ln_k", None)):
        raise InputError("method 'fitted' needs a surface fit (surface=...) with an ln_k method")
    if pH is None:
        raise InputError("method 'fitted' needs the pH at which the activation energies apply")
    ph = float(validate_pH(pH))
    temps = np.array([t1, t2])
    ln_k = np.asarray(
        surface.ln_k(temps, np.array([ph, ph]), ionic_strength_M=ionic_strength_M,
                     salinity=salinity), dtype=float,
    ).ravel()
    if ln_k.shape != (2,) or not np.all(np.isfinite(ln_k)):
        raise DataError(f"the surface gave no finite rate constant at pH {ph!r}")
    ln_factor = float(ln_k[0] - ln_k[1])
    factor = math.exp(ln_factor)
    se = None
    dof = None
    jac_fn = getattr(surface, "ln_k_jacobian", None)
    cov = getattr(surface, "covariance", None)
    if callable(jac_fn) and cov is not None:
        jac = np.asarray(jac_fn(temps, np.array([ph, ph]), ionic_strength_M=ionic_strength_M,
                                salinity=salinity), dtype=float)
        g = jac[0] - jac[1]
        var = float(g @ np.asarray(cov, dtype=float) @ g)
        d = int(getattr(surface, "dof", 0) or 0)
        if var >= 0 and d > 0:
            se, dof = math.sqrt(var), d
        else:
            notes.append("The fit has no residual degrees of freedom: no interval is given.")
    t_range = getattr(surface, "temperature_range_K", None)
    if t_range is not None:
        lo, hi = float(t_range[0]), float(t_range[1])
        for name, t in (("temperature_K", t1), ("reference_temperature_K", t2)):
            if t < lo - 1e-9 or t > hi + 1e-9:
                notes.append(
                    f"{name} {t:.2f} K lies outside the measured temperatures "
                    f"({lo:.2f}-{hi:.2f} K): the factor is an Arrhenius extrapolation."
                )
    ph_range = getattr(surface, "pH_range", None)
    if ph_range is not None and not float(ph_range[0]) - 1e-9 <= ph <= float(ph_range[1]) + 1e-9:
        notes.append(
            f"pH {ph:g} lies outside the measured pH values ({float(ph_range[0]):g}-"
            f"{float(ph_range[1]):g})."
        )
    prior = tuple(getattr(surface, "ea_from_prior", ()) or ())
    if prior:
        notes.append(
            "The activation energy of the " + ", ".join(prior)
            + " pathway(s) comes from a prior, not from the data."
        )
    return NormalisedDT50(
        dt50_s=dt50, temperature_K=t1, reference_temperature_K=t2,
        dt50_reference_s=dt50 * factor, factor=factor, method="fitted",
        method_description=METHOD_DESCRIPTIONS["fitted"], source=_SOURCES["fitted"],
        apparent_Ea_J_per_mol=_apparent_ea(factor, t1, t2), pH=ph,
        se_ln_factor=se, dof=dof, notes=tuple(notes),
    )

