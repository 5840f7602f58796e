"""Unit conversions for time, rate constants, concentrations, temperature and pH.

Every conversion in fieldrate goes through this module, once, at the edge of
the package: inside :mod:`kinetics` times are in seconds, rate constants in
1/s, temperatures in kelvin and concentrations in a canonical unit of their
kind (``"mol/m3"`` for amounts, ``"kg/m3"`` for masses, ``"fraction"`` for a
percentage of the initial concentration).

All functions are vectorised: they accept a scalar or anything
:func:`numpy.asarray` understands and return a ``numpy.float64`` for a scalar
input and a float array of the same shape otherwise. Non-finite or
non-numeric values raise :class:`kinetics.errors.InputError`; an unknown unit
raises :class:`kinetics.errors.UnitError` whose message repeats the unit given
and lists the valid ones. No function ever returns NaN.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from kinetics.errors import InputError, UnitError

__all__ = [
    "TIME_UNITS",
    "RATE_UNITS",
    "CONCENTRATION_UNITS",
    "CANONICAL_CONCENTRATION_UNITS",
    "ZERO_CELSIUS_K",
    "LIQUID_WATER_MIN_K",
    "LIQUID_WATER_MAX_K",
    "PH_MIN",
    "PH_MAX",
    "as_float_array",
    "time_to_s",
    "time_from_s",
    "rate_to_per_s",
    "rate_from_per_s",
    "half_life_to_rate_per_s",
    "rate_per_s_to_half_life",
    "concentration_to_canonical",
    "concentration_from_canonical",
    "celsius_to_kelvin",
    "kelvin_to_celsius",
    "validate_temperature_K",
    "validate_pH",
]

#: Time units accepted everywhere a time unit is asked for.
TIME_UNITS: tuple[str, ...] = ("s", "min", "h", "d")

#: Seconds in one day [s/d]; the one definition every module uses.
SECONDS_PER_DAY: float = 86400.0
_SECONDS_PER: dict[str, float] = {"s": 1.0, "min": 60.0, "h": 3600.0, "d": SECONDS_PER_DAY}

#: First-order rate-constant units (reciprocal time).
RATE_UNITS: tuple[str, ...] = ("1/s", "1/min", "1/h", "1/d")

_PER_S_FACTOR: dict[str, float] = {
    "1/s": 1.0,
    "1/min": 1.0 / 60.0,
    "1/h": 1.0 / 3600.0,
    "1/d": 1.0 / 86400.0,
}

# unit -> (kind, factor to the canonical unit of that kind)
_CONCENTRATION: dict[str, tuple[str, float]] = {
    # amount concentrations, canonical mol/m3 (1 mol/L = 1000 mol/m3)
    "mol/L": ("amount", 1.0e3),
    "mmol/L": ("amount", 1.0),
    "umol/L": ("amount", 1.0e-3),
    "nmol/L": ("amount", 1.0e-6),
    "mol/m3": ("amount", 1.0),
    # mass concentrations, canonical kg/m3 (1 g/L = 1 kg/m3)
    "g/L": ("mass", 1.0),
    "mg/L": ("mass", 1.0e-3),
    "ug/L": ("mass", 1.0e-6),
    "ng/L": ("mass", 1.0e-9),
    "kg/m3": ("mass", 1.0),
    # relative to the initial concentration, canonical fraction
    "%": ("relative", 1.0e-2),
    "fraction": ("relative", 1.0),
}

#: Concentration units accepted by :func:`concentration_to_canonical`
#: ("µ" may be written as the micro sign or the Greek mu instead of "u").
CONCENTRATION_UNITS: tuple[str, ...] = tuple(_CONCENTRATION)

#: Canonical unit of each kind of concentration.
CANONICAL_CONCENTRATION_UNITS: dict[str, str] = {
    "amount": "mol/m3",
    "mass": "kg/m3",
    "relative": "fraction",
}

#: 0 °C in kelvin (exact, ITS-90).
ZERO_CELSIUS_K = 273.15
#: Lowest temperature accepted for liquid water at 0.1 MPa [K].
LIQUID_WATER_MIN_K = 273.15
#: Highest temperature accepted for liquid water at 0.1 MPa [K].
LIQUID_WATER_MAX_K = 373.15
#: Range accepted for a measured pH.
PH_MIN = 0.0
PH_MAX = 14.0

_MICRO_SIGNS = ("\u00b5", "\u03bc")  # micro sign, Greek small letter mu


def as_float_array(values: Any, name: str = "value") -> np.ndarray:
    """Convert ``values`` to a finite float array or raise a clear error.

    Parameters
    ----------
    values : array_like
        Numbers (scalar, sequence or array).
    name : str
        Name of the quantity, used in the error message.

    Returns
    -------
    numpy.ndarray
        Float64 array (0-d for a scalar input).

    Raises
    ------
    InputError
        If ``values`` is not numeric or contains NaN or infinity.
    """
    if isinstance(values, (str, bytes)):
        raise InputError(f"{name} must be a number or an array of numbers, got {values!r}")
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(
            f"{name} must be a number or an array of numbers, got {values!r}"
        ) from exc
    if not np.all(np.isfinite(arr)):
        bad = arr[~np.isfinite(arr)].ravel()[0] if arr.ndim else arr
        raise InputError(f"{name} must be finite, got {float(bad)!r}")
    return arr


def _out(arr: np.ndarray) -> Any:
    """Return a numpy float for 0-d input, the array otherwise."""
    return arr[()] if arr.ndim == 0 else arr


def _first_bad(arr: np.ndarray, mask: np.ndarray) -> float:
    """The first value of ``arr`` where ``mask`` is true (the value itself if 0-d)."""
    return float(arr[mask].ravel()[0]) if arr.ndim else float(arr)


def _celsius_hint(temperature_K: float) -> str:
    """A note for a temperature in K that is probably a value in °C, else ""."""
    if 0.0 <= temperature_K <= 100.0:
        return (f" (it looks like °C: {temperature_K!r} °C is "
                f"{temperature_K + ZERO_CELSIUS_K!r} K)")
    return ""


def _scaled(arr: np.ndarray, factor: float, name: str, divide: bool = False) -> np.ndarray:
    """Multiply (or divide) by a unit factor; overflow raises InputError, never inf."""
    with np.errstate(over="ignore", under="ignore", divide="ignore", invalid="ignore"):
        result = np.asarray(arr / factor if divide else arr * factor, dtype=float)
    if not np.all(np.isfinite(result)):
        raise InputError(f"{name} is too large to convert to a finite number")
    return result


def _normalise_unit(unit: Any, kind: str, valid: tuple[str, ...]) -> str:
    if not isinstance(unit, str):
        raise UnitError(
            f"{kind} unit must be a string, got {unit!r}; valid units: {', '.join(valid)}"
        )
    text = unit.strip()
    for sign in _MICRO_SIGNS:
        text = text.replace(sign, "u")
    return text


def _time_factor(unit: Any) -> float:
    text = _normalise_unit(unit, "time", TIME_UNITS)
    try:
        return _SECONDS_PER[text]
    except KeyError:
        raise UnitError(
            f"unknown time unit {unit!r}; valid units: {', '.join(TIME_UNITS)}"
        ) from None


def _rate_factor(unit: Any) -> float:
    text = _normalise_unit(unit, "rate", RATE_UNITS)
    try:
        return _PER_S_FACTOR[text]
    except KeyError:
        raise UnitError(
            f"unknown rate-constant unit {unit!r}; valid units: {', '.join(RATE_UNITS)}"
        ) from None


def time_to_s(values: Any, unit: str) -> Any:
    """Convert times to seconds.

    Parameters
    ----------
    values : array_like
        Times in ``unit``.
    unit : {"s", "min", "h", "d"}
        Unit of ``values``.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Times [s].

    Raises
    ------
    UnitError
        If ``unit`` is not one of :data:`TIME_UNITS`.
    InputError
        If a value is not a finite number.
    """
    factor = _time_factor(unit)
    return _out(_scaled(as_float_array(values, "time"), factor, "time"))


def time_from_s(values_s: Any, unit: str) -> Any:
    """Convert times in seconds to ``unit``.

    Parameters
    ----------
    values_s : array_like
        Times [s].
    unit : {"s", "min", "h", "d"}
        Target unit.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Times in ``unit``.
    """
    factor = _time_factor(unit)
    return _out(_scaled(as_float_array(values_s, "time"), factor, "time", divide=True))


def rate_to_per_s(values: Any, unit: str) -> Any:
    """Convert first-order rate constants to 1/s.

    Parameters
    ----------
    values : array_like
        Rate constants in ``unit``.
    unit : {"1/s", "1/min", "1/h", "1/d"}
        Unit of ``values``.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Rate constants [1/s].
    """
    factor = _rate_factor(unit)
    return _out(_scaled(as_float_array(values, "rate constant"), factor, "rate constant"))


def rate_from_per_s(values_per_s: Any, unit: str) -> Any:
    """Convert first-order rate constants in 1/s to ``unit``.

    Parameters
    ----------
    values_per_s : array_like
        Rate constants [1/s].
    unit : {"1/s", "1/min", "1/h", "1/d"}
        Target unit.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Rate constants in ``unit``.
    """
    factor = _rate_factor(unit)
    return _out(
        _scaled(as_float_array(values_per_s, "rate constant"), factor, "rate constant", divide=True)
    )


def half_life_to_rate_per_s(half_life: Any, unit: str = "s") -> Any:
    """First-order rate constant from a half-life (DT50 of a first-order decline).

    .. math::

        k = \\frac{\\ln 2}{t_{1/2}}

    (definition of the half-life of a first-order process).

    Parameters
    ----------
    half_life : array_like
        Half-lives in ``unit``; must be > 0.
    unit : {"s", "min", "h", "d"}
        Unit of ``half_life``.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Rate constants [1/s].

    Raises
    ------
    InputError
        If a half-life is not finite or not > 0.
    """
    factor = _time_factor(unit)
    t = as_float_array(half_life, "half-life")
    if np.any(t <= 0.0):
        bad = _first_bad(t, t <= 0.0)
        raise InputError(f"half-life must be > 0, got {bad!r} {unit}")
    with np.errstate(over="ignore", under="ignore"):
        k = np.asarray(np.log(2.0) / (t * factor), dtype=float)
    if not np.all(np.isfinite(k) & (k > 0.0)):
        raise InputError(
            "half-life is outside the range that gives a finite, positive rate constant"
        )
    return _out(k)


def rate_per_s_to_half_life(k_per_s: Any, unit: str = "s") -> Any:
    """Half-life of a first-order process from its rate constant.

    .. math::

        t_{1/2} = \\frac{\\ln 2}{k}

    Parameters
    ----------
    k_per_s : array_like
        Rate constants [1/s]; must be > 0.
    unit : {"s", "min", "h", "d"}
        Unit of the returned half-life.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Half-lives in ``unit``.

    Raises
    ------
    InputError
        If a rate constant is not finite or not > 0.
    """
    factor = _time_factor(unit)
    k = as_float_array(k_per_s, "rate constant")
    if np.any(k <= 0.0):
        bad = _first_bad(k, k <= 0.0)
        raise InputError(f"rate constant must be > 0 1/s to have a half-life, got {bad!r}")
    with np.errstate(over="ignore", under="ignore"):
        t = np.asarray(np.log(2.0) / k / factor, dtype=float)
    if not np.all(np.isfinite(t) & (t > 0.0)):
        raise InputError(
            "rate constant is outside the range that gives a finite, positive half-life"
        )
    return _out(t)


def _concentration_entry(unit: Any) -> tuple[str, float]:
    text = _normalise_unit(unit, "concentration", CONCENTRATION_UNITS)
    try:
        return _CONCENTRATION[text]
    except KeyError:
        raise UnitError(
            f"unknown concentration unit {unit!r}; valid units: "
            f"{', '.join(CONCENTRATION_UNITS)} (µ may be written as 'u')"
        ) from None


def concentration_to_canonical(values: Any, unit: str) -> tuple[np.ndarray, str]:
    """Convert concentrations to the canonical unit of their kind.

    Amount concentrations become ``"mol/m3"``, mass concentrations ``"kg/m3"``
    and a percentage of the initial concentration becomes a ``"fraction"``
    (``100 %`` -> ``1.0``). A fit of a decline does not depend on which
    concentration unit is used, so only consistency within one series matters.

    Parameters
    ----------
    values : array_like
        Concentrations in ``unit``.
    unit : str
        One of :data:`CONCENTRATION_UNITS`; ``"µmol/L"`` and ``"µg/L"`` are
        accepted for ``"umol/L"`` and ``"ug/L"``.

    Returns
    -------
    values : numpy.ndarray
        Float array (0-d for a scalar input) in the canonical unit.
    canonical_unit : str
        ``"mol/m3"``, ``"kg/m3"`` or ``"fraction"``.

    Raises
    ------
    UnitError
        If ``unit`` is unknown.
    InputError
        If a value is not a finite number.
    """
    kind, factor = _concentration_entry(unit)
    arr = _scaled(as_float_array(values, "concentration"), factor, "concentration")
    return arr, CANONICAL_CONCENTRATION_UNITS[kind]


def concentration_from_canonical(values: Any, unit: str) -> Any:
    """Convert concentrations from the canonical unit of ``unit``'s kind to ``unit``.

    Parameters
    ----------
    values : array_like
        Concentrations in the canonical unit of the kind of ``unit``
        (``"mol/m3"``, ``"kg/m3"`` or ``"fraction"``).
    unit : str
        Target unit, one of :data:`CONCENTRATION_UNITS`.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Concentrations in ``unit``.
    """
    _kind, factor = _concentration_entry(unit)
    return _out(
        _scaled(as_float_array(values, "concentration"), factor, "concentration", divide=True)
    )


def celsius_to_kelvin(temperature_C: Any) -> Any:
    """Convert °C to K (:math:`T = t + 273.15`).

    Parameters
    ----------
    temperature_C : array_like
        Temperatures [°C].

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Temperatures [K].

    Raises
    ------
    InputError
        If a value is not finite or lies below absolute zero.
    """
    t = as_float_array(temperature_C, "temperature")
    if np.any(t < -ZERO_CELSIUS_K):
        bad = _first_bad(t, t < -ZERO_CELSIUS_K)
        raise InputError(f"temperature {bad!r} °C is below absolute zero (-273.15 °C)")
    return _out(t + ZERO_CELSIUS_K)


def kelvin_to_celsius(temperature_K: Any) -> Any:
    """Convert K to °C (:math:`t = T - 273.15`).

    Parameters
    ----------
    temperature_K : array_like
        Temperatures [K]; must be >= 0.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Temperatures [°C].
    """
    t = as_float_array(temperature_K, "temperature")
    if np.any(t < 0.0):
        bad = _first_bad(t, t < 0.0)
        raise InputError(f"temperature {bad!r} K is below absolute zero")
    return _out(t - ZERO_CELSIUS_K)


def validate_temperature_K(temperature_K: Any) -> Any:
    """Check that temperatures lie in the liquid-water range at 0.1 MPa.

    The accepted range is 273.15 K to 373.15 K (0 °C to 100 °C), the range
    over which the water property correlations of :mod:`kinetics.water` are
    used. (At exactly 0.1 MPa water boils at about 372.76 K; the last 0.4 K
    are accepted as slightly superheated liquid, to which the correlations
    extend smoothly.)

    Parameters
    ----------
    temperature_K : array_like
        Temperatures [K].

    Returns
    -------
    numpy.float64 or numpy.ndarray
        The temperatures as floats [K].

    Raises
    ------
    InputError
        If a value is not finite or lies outside 273.15-373.15 K; the message
        repeats the value and hints at a °C/K mix-up when that is likely.
    """
    t = as_float_array(temperature_K, "temperature_K")
    bad_mask = (t < LIQUID_WATER_MIN_K) | (t > LIQUID_WATER_MAX_K)
    if np.any(bad_mask):
        bad = _first_bad(t, bad_mask)
        raise InputError(
            f"temperature_K {bad!r} K is outside the liquid-water range at 0.1 MPa, "
            f"{LIQUID_WATER_MIN_K} K to {LIQUID_WATER_MAX_K} K (0 °C to 100 °C)"
            f"{_celsius_hint(bad)}"
        )
    return _out(t)


def validate_pH(pH: Any) -> Any:
    """Check that pH values are finite and within 0-14.

    Parameters
    ----------
    pH : array_like
        Measured pH values (activity scale).

    Returns
    -------
    numpy.float64 or numpy.ndarray
        The pH values as floats.

    Raises
    ------
    InputError
        If a value is not finite or lies outside 0-14.
    """
    p = as_float_array(pH, "pH")
    bad_mask = (p < PH_MIN) | (p > PH_MAX)
    if np.any(bad_mask):
        bad = _first_bad(p, bad_mask)
        raise InputError(f"pH {bad!r} is outside the accepted range {PH_MIN:g} to {PH_MAX:g}")
    return _out(p)
