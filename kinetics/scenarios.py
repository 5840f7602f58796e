"""Time-varying water bodies: fraction remaining under changing temperature, pH and salinity.

A *scenario* describes how the conditions of a water body change with time. Each
quantity (``temperature_K``, ``pH`` and optionally ``salinity`` or
``ionic_strength_M``) is a *signal*: the sum of one or more components,

- :class:`Constant` - a fixed value,
- :class:`Series` - measured values at arbitrary times, linearly interpolated,
- :class:`MonthlyMeans` - twelve monthly means, interpolated periodically,
- :class:`AnnualCycle` - a sinusoid with a period of one year,
- :class:`DailyCycle` - a sinusoid with a period of one day.

Components of one quantity add, so a seasonal temperature with a daily swing is
``(AnnualCycle(mean=285.0, amplitude=8.0, phase_day=200.0),
DailyCycle(mean=0.0, amplitude=1.5, phase_hour=15.0))``: give the mean in one
component and zero means in the others.

For a pseudo-first-order loss whose rate constant follows the conditions,

.. math::

    \\frac{C(t)}{C_0} = \\exp\\left(-\\int_0^t k\\big(T(\\tau), \\mathrm{pH}(\\tau),
    I(\\tau)\\big)\\, d\\tau\\right)

(the solution of :math:`dC/dt = -k(t)\\,C`; e.g. Schwarzenbach, Gschwend and
Imboden, *Environmental Organic Chemistry*, Wiley, 2nd ed. 2003, chapter 12).
:func:`run_scenario` evaluates it with a rate model (:class:`RateModel`, which a
``kinetics.surface.SurfaceFit`` satisfies), gives DT50 and DT90, the time-weighted
effective rate constant and Monte Carlo bands from correlated parameter draws.

Time conventions: ``time_s`` = 0 is the start of the scenario; periodic
components are written in calendar terms with a year of exactly 365 days (so a
whole number of days fits in a year), and ``start_day_of_year`` says which
calendar day (0 = 1 January, 00:00) the scenario starts on.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping, Protocol, Sequence, runtime_checkable

import numpy as np

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import DataError, InputError
from kinetics.units import (
    SECONDS_PER_DAY,
    as_float_array,
    celsius_to_kelvin,
    time_to_s,
    validate_pH,
    validate_temperature_K,
)

__all__ = [
    "DAY_S",
    "YEAR_S",
    "QUANTITIES",
    "COMPONENT_KINDS",
    "EXTEND_MODES",
    "BAND_KINDS",
    "INTEGRATION_RULE",
    "RateModel",
    "Constant",
    "Series",
    "MonthlyMeans",
    "AnnualCycle",
    "DailyCycle",
    "Scenario",
    "ScenarioInterval",
    "ScenarioResult",
    "run_scenario",
    "scenario_from_dict",
    "scenario_to_dict",
]

#: One day [s].
DAY_S = SECONDS_PER_DAY
#: The calendar year used by periodic components: exactly 365 days [s].
YEAR_S = 365.0 * DAY_S
#: The quantities a scenario can describe (names carry their units).
QUANTITIES = ("temperature_K", "pH", "salinity", "ionic_strength_M")
#: Component kinds, as used in dictionaries / JSON.
COMPONENT_KINDS = ("constant", "series", "monthly_means", "annual_cycle", "daily_cycle")
#: What a :class:`Series` does outside its first and last time.
EXTEND_MODES = ("error", "hold")
#: Kinds of band in :meth:`ScenarioResult.interval`.
BAND_KINDS = ("confidence", "prediction")

#: The integration rule, stated in every result.
INTEGRATION_RULE = (
    "k = exp(ln k) integrated interval by interval with 4-point Gauss-Legendre quadrature on a "
    "grid that contains every output time and every kink of a piecewise-linear input (series "
    "samples, month midpoints), with a step no longer than the shortest period present divided "
    "by points_per_period and no longer than the integrated span / 256; all steps are halved "
    "until halving changes the cumulative integral of k at every node by less than rtol "
    "(absolute while the integral is below 1, where it equals the relative error of C/C0; "
    "relative beyond); DT50/DT90 solve the cubic Hermite interpolant of the cumulative integral"
)

_MIN_DRAWS = 100
# smallest rate constant of a parameter draw [1/s], exp(-690) (ln k >= -690 as for
# models evaluated through ln k)
_K_MIN_DRAW = math.exp(-690.0)
_DRAW_CHUNK_ELEMENTS = 2_000_000
_LN2 = math.log(2.0)
_LN10 = math.log(10.0)


@runtime_checkable
class RateModel(Protocol):
    """What :func:`run_scenario` needs from a fitted rate model.

    ``kinetics.surface.SurfaceFit`` satisfies it. Optional attributes used when
    present: ``temperature_range_K`` and ``pH_range`` ((low, high) of the measured
    conditions, for extrapolation flags), ``residual_scale`` (between-run standard
    deviation of ln k, for prediction bands), ``ea_from_prior`` and
    ``uncharacterised_pathways`` (tuples, propagated as flags).
    """

    def ln_k(
        self,
        temperature_K: Any,
        pH: Any,
        ionic_strength_M: Any = 0.0,
        salinity: Any = 0.0,
        parameters: Any = None,
    ) -> np.ndarray:
        """ln of k_obs [ln(1/s)]; with ``parameters`` (n_draws, n_params) -> (n_draws, n_cond)."""
        ...

    def sample_parameters(self, n: int, rng: np.random.Generator) -> np.ndarray:
        """``n`` correlated parameter draws, shape (n, n_params)."""
        ...


# --------------------------------------------------------------------------- components


def _finite_scalar(value: Any, name: str) -> float:
    arr = as_float_array(value, name)
    if arr.ndim != 0:
        raise InputError(f"{name} must be a single number, got {value!r}")
    return float(arr)


@dataclass(frozen=True)
class Constant:
    """A constant value.

    Parameters
    ----------
    value : float
        The value, in the unit of the quantity it describes.
    """

    value: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "value", _finite_scalar(self.value, "constant value"))

    period_s = None

    def evaluate(self, time_s: np.ndarray, start_s: float) -> np.ndarray:
        """Values at ``time_s`` [s after the scenario start]."""
        return np.full(np.shape(time_s), self.value)

    def kinks(self, t0: float, t1: float, start_s: float) -> np.ndarray:
        """Times in [t0, t1] where the signal is not smooth (none)."""
        return np.empty(0)


@dataclass(frozen=True)
class Series:
    """Measured values at arbitrary times, linearly interpolated.

    Parameters
    ----------
    time_s : array_like
        Strictly increasing sample times [s after the scenario start].
    values : array_like
        Values at those times (unit of the quantity described).
    extend : {"error", "hold"}
        Outside the first and last sample time: ``"error"`` refuses to evaluate,
        ``"hold"`` keeps the first / last value.
    """

    time_s: np.ndarray
    values: np.ndarray
    extend: str = "error"

    def __post_init__(self) -> None:
        t = np.atleast_1d(as_float_array(self.time_s, "series time_s"))
        v = np.atleast_1d(as_float_array(self.values, "series values"))
        if t.ndim != 1 or v.ndim != 1 or t.size != v.size:
            raise InputError(
                f"series time_s and values must be 1-D of equal length, got {t.size} times "
                f"and {v.size} values"
            )
        if t.size < 2:
            raise InputError(f"a series needs at least 2 samples, got {t.size}")
        steps = np.diff(t)
        if np.any(steps <= 0):
            i = int(np.argmax(steps <= 0))
            raise InputError(
                f"series time_s must be strictly increasing; {t[i + 1]!r} s follows {t[i]!r} s"
            )
        if self.extend not in EXTEND_MODES:
            raise InputError(
                f"unknown series extend mode {self.extend!r}; valid: {', '.join(EXTEND_MODES)}"
            )
        t.setflags(write=False)
        v.setflags(write=False)
        object.__setattr__(self, "time_s", t)
        object.__setattr__(self, "values", v)

    period_s = None

    def evaluate(self, time_s: np.ndarray, start_s: float) -> np.ndarray:
        """Values at ``time_s`` [s after the scenario start]; linear interpolation."""
        t = np.asarray(time_s, dtype=float)
        if self.extend == "error" and t.size:
            lo, hi = float(np.min(t)), float(np.max(t))
            if lo < self.time_s[0] or hi > self.time_s[-1]:
                bad = lo if lo < self.time_s[0] else hi
                raise InputError(
                    f"time {bad / DAY_S:.6g} d is outside the measured series "
                    f"({self.time_s[0] / DAY_S:.6g} d to {self.time_s[-1] / DAY_S:.6g} d); "
                    "shorten the horizon or use extend='hold' to keep the end values"
                )
        return np.interp(t, self.time_s, self.values)

    def kinks(self, t0: float, t1: float, start_s: float) -> np.ndarray:
        """Sample times inside [t0, t1] (the interpolant bends there)."""
        t = self.time_s
        return t[(t >= t0) & (t <= t1)]


@dataclass(frozen=True)
class MonthlyMeans:
    """Twelve monthly means, interpolated periodically.

    Each value is placed at the middle of its month, months being equal twelfths
    of the 365-day year (so the midpoints are (m + 0.5)·365/12 days, m = 0..11);
    between midpoints the signal is linear and December joins January across the
    new year. Piecewise-linear (not spline) interpolation never overshoots the
    given means, so a cold month cannot be pushed below freezing.

    Parameters
    ----------
    values : array_like
        Twelve values, January first (unit of the quantity described).
    """

    values: np.ndarray

    def __post_init__(self) -> None:
        v = np.atleast_1d(as_float_array(self.values, "monthly means"))
        if v.shape != (12,):
            raise InputError(f"monthly means need exactly 12 values, got {v.size}")
        v.setflags(write=False)
        object.__setattr__(self, "values", v)

    period_s = YEAR_S

    def _nodes(self) -> tuple[np.ndarray, np.ndarray]:
        mid = (np.arange(12) + 0.5) * YEAR_S / 12.0
        # wrap: December's midpoint one year earlier, January's one year later
        x = np.concatenate(([mid[-1] - YEAR_S], mid, [mid[0] + YEAR_S]))
        y = np.concatenate(([self.values[-1]], self.values, [self.values[0]]))
        return x, y

    def evaluate(self, time_s: np.ndarray, start_s: float) -> np.ndarray:
        """Values at ``time_s`` [s after the scenario start]."""
        x, y = self._nodes()
        phase = np.mod(np.asarray(time_s, dtype=float) + start_s, YEAR_S)
        return np.interp(phase, x, y)

    def kinks(self, t0: float, t1: float, start_s: float) -> np.ndarray:
        """Times in [t0, t1] that fall on a month midpoint."""
        mid = (np.arange(12) + 0.5) * YEAR_S / 12.0
        first = math.floor((t0 + start_s) / YEAR_S) - 1
        last = math.ceil((t1 + start_s) / YEAR_S) + 1
        years = np.arange(first, last + 1) * YEAR_S
        k = (years[:, None] + mid[None, :]).ravel() - start_s
        return k[(k >= t0) & (k <= t1)]


@dataclass(frozen=True)
class AnnualCycle:
    """A sinusoid with a period of one 365-day year.

    .. math::

        x(t) = \\bar{x} + a \\cos\\left(2\\pi \\frac{d(t) - d_{max}}{365}\\right)

    with :math:`d(t)` the calendar day (0 = 1 January 00:00) at scenario time t.

    Parameters
    ----------
    mean : float
        Annual mean (unit of the quantity described).
    amplitude : float
        Half the peak-to-peak swing, >= 0 (same unit; for temperature 1 K = 1 °C).
    phase_day : float
        Calendar day of the maximum [d], 0 <= phase_day < 365.
    """

    mean: float
    amplitude: float
    phase_day: float = 0.0

    def __post_init__(self) -> None:
        _check_cycle(self, "annual cycle", "phase_day", 365.0)

    period_s = YEAR_S

    def evaluate(self, time_s: np.ndarray, start_s: float) -> np.ndarray:
        """Values at ``time_s`` [s after the scenario start]."""
        day = (np.asarray(time_s, dtype=float) + start_s) / DAY_S
        return self.mean + self.amplitude * np.cos(2.0 * np.pi * (day - self.phase_day) / 365.0)

    def kinks(self, t0: float, t1: float, start_s: float) -> np.ndarray:
        """Times where the signal is not smooth (none)."""
        return np.empty(0)


@dataclass(frozen=True)
class DailyCycle:
    """A sinusoid with a period of one day.

    .. math::

        x(t) = \\bar{x} + a \\cos\\left(2\\pi \\frac{h(t) - h_{max}}{24}\\right)

    with :math:`h(t)` the clock hour at scenario time t.

    Parameters
    ----------
    mean : float
        Daily mean (unit of the quantity described); 0 when it is added to another
        component that carries the mean.
    amplitude : float
        Half the peak-to-peak swing, >= 0.
    phase_hour : float
        Clock hour of the maximum [h], 0 <= phase_hour < 24.
    """

    mean: float
    amplitude: float
    phase_hour: float = 0.0

    def __post_init__(self) -> None:
        _check_cycle(self, "daily cycle", "phase_hour", 24.0)

    period_s = DAY_S

    def evaluate(self, time_s: np.ndarray, start_s: float) -> np.ndarray:
        """Values at ``time_s`` [s after the scenario start]."""
        hour = (np.asarray(time_s, dtype=float) + start_s) / 3600.0
        return self.mean + self.amplitude * np.cos(2.0 * np.pi * (hour - self.phase_hour) / 24.0)

    def kinks(self, t0: float, t1: float, start_s: float) -> np.ndarray:
        """Times where the signal is not smooth (none)."""
        return np.empty(0)


def _check_cycle(obj: Any, what: str, phase_name: str, phase_max: float) -> None:
    mean = _finite_scalar(obj.mean, f"{what} mean")
    amplitude = _finite_scalar(obj.amplitude, f"{what} amplitude")
    phase = _finite_scalar(getattr(obj, phase_name), f"{what} {phase_name}")
    if amplitude < 0:
        raise InputError(
            f"{what} amplitude must be >= 0 (half the peak-to-peak swing), got {amplitude!r}; "
            f"move the maximum with {phase_name} instead of a negative amplitude"
        )
    if not 0.0 <= phase < phase_max:
        raise InputError(f"{what} {phase_name} must be in [0, {phase_max:g}), got {phase!r}")
    object.__setattr__(obj, "mean", mean)
    object.__setattr__(obj, "amplitude", amplitude)
    object.__setattr__(obj, phase_name, phase)


Component = Constant | Series | MonthlyMeans | AnnualCycle | DailyCycle
_COMPONENT_TYPES = (Constant, Series, MonthlyMeans, AnnualCycle, DailyCycle)


def _as_signal(value: Any, name: str) -> tuple[Component, ...] | None:
    if value is None:
        return None
    if isinstance(value, _COMPONENT_TYPES):
        return (value,)
    if isinstance(value, (int, float, np.floating, np.integer)) and not isinstance(value, bool):
        return (Constant(float(value)),)
    if isinstance(value, (tuple, list)) and value and all(
        isinstance(c, _COMPONENT_TYPES) for c in value
    ):
        return tuple(value)
    raise InputError(
        f"{name} must be a number, a component (Constant, Series, MonthlyMeans, AnnualCycle, "
        f"DailyCycle) or a non-empty sequence of components, got {value!r}"
    )


# --------------------------------------------------------------------------- scenario


@dataclass(frozen=True)
class Scenario:
    """Conditions of a water body over time.

    Parameters
    ----------
    name : str
        Name shown in results.
    temperature_K : float or component or sequence of components
        Water temperature signal [K].
    pH : float or component or sequence of components
        pH signal (measured at the water temperature).
    salinity : float or component or sequence of components, optional
        Practical salinity signal [-]. At most one of ``salinity`` and
        ``ionic_strength_M`` may be given; neither means fresh water of zero
        ionic strength.
    ionic_strength_M : float or component or sequence of components, optional
        Ionic strength signal [mol/L].
    start_day_of_year : float
        Calendar day at scenario time 0 [d], 0 <= value < 365 (0 = 1 January 00:00).
    description : str
        Free text (e.g. where the numbers come from; "invented" for demo data).
    """

    name: str
    temperature_K: Any
    pH: Any
    salinity: Any = None
    ionic_strength_M: Any = None
    start_day_of_year: float = 0.0
    description: str = ""

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name.strip():
            raise InputError(f"scenario name must be a non-empty string, got {self.name!r}")
        for q in QUANTITIES:
            object.__setattr__(self, q, _as_signal(getattr(self, q), f"scenario {q}"))
        if self.temperature_K is None or self.pH is None:
            raise InputError("a scenario needs both a temperature_K and a pH signal")
        if self.salinity is not None and self.ionic_strength_M is not None:
            raise InputError(
                "give either salinity or ionic_strength_M for a scenario, not both "
                "(the ionic strength follows from the salinity)"
            )
        start = _finite_scalar(self.start_day_of_year, "start_day_of_year")
        if not 0.0 <= start < 365.0:
            raise InputError(f"start_day_of_year must be in [0, 365), got {start!r}")
        object.__setattr__(self, "start_day_of_year", start)

    @property
    def start_s(self) -> float:
        """Offset of scenario time 0 from 1 January 00:00 [s]."""
        return self.start_day_of_year * DAY_S

    def signals(self) -> dict[str, tuple[Component, ...]]:
        """The signals that are present, by quantity name."""
        return {q: getattr(self, q) for q in QUANTITIES if getattr(self, q) is not None}

    def components(self) -> list[Component]:
        """All components of all signals."""
        return [c for sig in self.signals().values() for c in sig]

    def conditions(self, time_s: Any) -> dict[str, np.ndarray]:
        """Evaluate every quantity at ``time_s`` [s after the start].

        Returns
        -------
        dict
            ``temperature_K`` [K], ``pH``, ``salinity`` [-], ``ionic_strength_M``
            [mol/L] as arrays shaped like ``time_s`` (zeros where not given).

        Raises
        ------
        InputError
            If a value leaves its valid range (the message gives the time).
        """
        t = np.asarray(as_float_array(time_s, "time_s"), dtype=float)
        out: dict[str, np.ndarray] = {}
        for q in QUANTITIES:
            sig = getattr(self, q)
            if sig is None:
                out[q] = np.zeros(t.shape)
                continue
            out[q] = np.sum([c.evaluate(t, self.start_s) for c in sig], axis=0)
        self._validate(t, out)
        return out

    def _validate(self, t: np.ndarray, values: Mapping[str, np.ndarray]) -> None:
        def where(mask: np.ndarray) -> str:
            i = int(np.argmax(mask.ravel()))
            return f"at time {t.ravel()[i] / DAY_S:.6g} d"

        temp = values["temperature_K"]
        bad = (temp < 273.15) | (temp > 373.15)
        if np.any(bad):
            try:
                validate_temperature_K(temp)
            except InputError as exc:
                raise InputError(f"scenario {self.name!r} {where(bad)}: {exc}") from None
        ph = values["pH"]
        bad = (ph < 0.0) | (ph > 14.0)
        if np.any(bad):
            try:
                validate_pH(ph)
            except InputError as exc:
                raise InputError(f"scenario {self.name!r} {where(bad)}: {exc}") from None
        for q in ("salinity", "ionic_strength_M"):
            bad = values[q] < 0.0
            if np.any(bad):
                v = float(values[q].ravel()[int(np.argmax(bad.ravel()))])
                raise InputError(f"scenario {self.name!r} {where(bad)}: {q} {v!r} is negative")

    def shortest_period_s(self) -> float | None:
        """Shortest period of any periodic component [s], None if there is none."""
        periods = [c.period_s for c in self.components() if c.period_s is not None]
        return min(periods) if periods else None

    def repeat_period_s(self) -> float | None:
        """Period after which the whole scenario repeats [s], None if it never does.

        A scenario of constants and periodic components repeats after the longest
        period (the day divides the 365-day year); a constant-only scenario
        repeats after any time and returns one day.
        """
        comps = self.components()
        if any(isinstance(c, Series) for c in comps):
            return None
        periods = [c.period_s for c in comps if c.period_s is not None]
        return max(periods) if periods else DAY_S

    def constant_after_s(self) -> float | None:
        """Time after which all conditions stay constant [s], None if never.

        True when every component is a :class:`Constant` or a :class:`Series` with
        ``extend="hold"``; the time is the last series sample.
        """
        comps = self.components()
        last = 0.0
        for c in comps:
            if isinstance(c, Constant):
                continue
            if isinstance(c, Series) and c.extend == "hold":
                last = max(last, float(c.time_s[-1]))
                continue
            return None
        return last

    def kinks(self, t0: float, t1: float) -> np.ndarray:
        """All times in [t0, t1] where an input bends (sorted, unique) [s]."""
        parts = [c.kinks(t0, t1, self.start_s) for c in self.components()]
        return np.unique(np.concatenate(parts)) if parts else np.empty(0)


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class ScenarioInterval:
    """A Monte Carlo band of a scenario result at one level.

    ``None`` for a DT50/DT90 bound means "beyond the time span that can be
    computed for this scenario" (see :attr:`ScenarioResult.notes`).
    """

    level: float
    kind: str
    fraction_low: np.ndarray
    fraction_high: np.ndarray
    dt50_low_s: float | None
    dt50_high_s: float | None
    dt90_low_s: float | None
    dt90_high_s: float | None
    effective_k_low_per_s: float
    effective_k_high_per_s: float


@dataclass(frozen=True)
class ScenarioResult:
    """Fraction remaining, DT50/DT90 and effective rate for one scenario.

    Attributes
    ----------
    scenario_name : str
    time_s : ndarray
        Output times [s after the start].
    temperature_K, pH, salinity, ionic_strength_M : ndarray
        Conditions at the output times.
    k_per_s : ndarray
        Rate constant at the output times (parameter estimates) [1/s].
    fraction_remaining : ndarray
        C(t)/C0 at the output times (parameter estimates) [-].
    dt50_s, dt90_s : float or None
        Time to 50 % / 90 % loss [s]; None if not reached within the computable span.
    effective_k_per_s : float
        Time-weighted mean rate constant over the horizon, (1/H)·∫k dt [1/s].
    effective_dt50_s : float
        ln 2 / effective_k_per_s [s]: the half-life of constant conditions that
        give the same loss over the horizon.
    horizon_s : float
        End of the integration [s].
    level : float
        Level of the bands below.
    fraction_ci_low, fraction_ci_high : ndarray or None
        Monte Carlo confidence band of the fraction remaining (parameter
        uncertainty); None without draws.
    fraction_pi_low, fraction_pi_high : ndarray or None
        Prediction band: the confidence band widened by a between-run deviation of
        ln k (the fit's residual scale), drawn once per draw and held for the
        whole scenario; None when the model has no residual scale.
    dt50_ci_low_s, dt50_ci_high_s, dt90_ci_low_s, dt90_ci_high_s : float or None
    effective_k_ci_low_per_s, effective_k_ci_high_per_s : float or None
    flags : dict of str to bool
        ``temperature_outside_range``, ``pH_outside_range``, ``ea_from_prior``,
        ``uncharacterised_pathways``, ``integration_not_converged``.
    fraction_of_time_outside_range : dict of str to float
        Time-weighted share of the horizon outside the measured ``temperature``
        and ``pH`` ranges [-].
    notes : tuple of str
        Plain-language remarks (e.g. why a DT90 is missing).
    n_draws, seed : int, int or None
    draw_distribution : str
        How parameters were drawn: a multivariate t with the fit's residual degrees
        of freedom when the model has ``dof`` and ``estimates`` (normal draws from
        ``sample_parameters`` scaled by a shared :math:`\\sqrt{\\nu/\\chi^2_\\nu}`,
        which also scales the prediction-band deviation), else normal; "none"
        without draws.
    integration_points : int
    integration_rel_error : float
        Richardson estimate of the largest error of the cumulative ∫k dt (see rtol
        of :func:`run_scenario`).
    integration_rule : str
    caution : str
    """

    scenario_name: str
    time_s: np.ndarray
    temperature_K: np.ndarray
    pH: np.ndarray
    salinity: np.ndarray
    ionic_strength_M: np.ndarray
    k_per_s: np.ndarray
    fraction_remaining: np.ndarray
    dt50_s: float | None
    dt90_s: float | None
    effective_k_per_s: float
    effective_dt50_s: float
    horizon_s: float
    level: float
    fraction_ci_low: np.ndarray | None
    fraction_ci_high: np.ndarray | None
    fraction_pi_low: np.ndarray | None
    fraction_pi_high: np.ndarray | None
    dt50_ci_low_s: float | None
    dt50_ci_high_s: float | None
    dt90_ci_low_s: float | None
    dt90_ci_high_s: float | None
    effective_k_ci_low_per_s: float | None
    effective_k_ci_high_per_s: float | None
    flags: dict[str, bool]
    fraction_of_time_outside_range: dict[str, float]
    notes: tuple[str, ...]
    n_draws: int
    seed: int | None
    draw_distribution: str
    integration_points: int
    integration_rel_error: float
    integration_rule: str = INTEGRATION_RULE
    caution: str = CAUTION_TEXT
    _draws: dict[str, dict[str, np.ndarray]] = field(default_factory=dict, repr=False)

    def interval(self, level: float = 0.95, kind: str = "confidence") -> ScenarioInterval:
        """The Monte Carlo band at another ``level``.

        Parameters
        ----------
        level : float
            Two-sided coverage, 0 < level < 1.
        kind : {"confidence", "prediction"}
            Parameter uncertainty only, or with the between-run deviation of ln k.

        Raises
        ------
        InputError
            If the level is out of range, the kind unknown, or the result has no
            draws of that kind.
        """
        _check_level(level)
        if kind not in BAND_KINDS:
            raise InputError(f"unknown band kind {kind!r}; valid: {', '.join(BAND_KINDS)}")
        draws = self._draws.get(kind)
        if draws is None:
            why = (
                "it was computed with n_draws=0"
                if kind == "confidence" or not self._draws
                else "the rate model has no residual scale"
            )
            raise InputError(f"this scenario result has no {kind} draws: {why}")
        return _summarise(draws, level, kind)


def _check_level(level: float) -> None:
    lv = _finite_scalar(level, "level")
    if not 0.0 < lv < 1.0:
        raise InputError(f"level must be between 0 and 1 (e.g. 0.95), got {level!r}")


_BEYOND = 1e300


def _quantile_or_none(values: np.ndarray, q: float) -> float | None:
    x = np.quantile(np.where(np.isfinite(values), values, _BEYOND), q)
    return None if x >= 1e299 else float(x)


def _summarise(draws: Mapping[str, np.ndarray], level: float, kind: str) -> ScenarioInterval:
    lo_q, hi_q = (1.0 - level) / 2.0, (1.0 + level) / 2.0
    frac = draws["fraction"]
    keff = draws["effective_k"]
    return ScenarioInterval(
        level=float(level),
        kind=kind,
        fraction_low=np.quantile(frac, lo_q, axis=0),
        fraction_high=np.quantile(frac, hi_q, axis=0),
        dt50_low_s=_quantile_or_none(draws["dt50"], lo_q),
        dt50_high_s=_quantile_or_none(draws["dt50"], hi_q),
        dt90_low_s=_quantile_or_none(draws["dt90"], lo_q),
        dt90_high_s=_quantile_or_none(draws["dt90"], hi_q),
        effective_k_low_per_s=float(np.quantile(keff, lo_q)),
        effective_k_high_per_s=float(np.quantile(keff, hi_q)),
    )


# --------------------------------------------------------------------------- integration


_GL_X, _GL_W = np.polynomial.legendre.leggauss(4)


def _cumtrapz(y: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Cumulative trapezoid integral along the last axis, starting at 0."""
    dx = np.diff(x)
    inc = 0.5 * (y[..., 1:] + y[..., :-1]) * dx
    out = np.zeros(y.shape)
    np.cumsum(inc, axis=-1, out=out[..., 1:])
    return out


def _refine(grid: np.ndarray) -> np.ndarray:
    """Insert the midpoint of every interval."""
    mids = 0.5 * (grid[1:] + grid[:-1])
    out = np.empty(grid.size + mids.size)
    out[0::2] = grid
    out[1::2] = mids
    return out


def _evaluation_points(grid: np.ndarray) -> np.ndarray:
    """The grid nodes followed by four Gauss-Legendre points in every interval."""
    mid = 0.5 * (grid[1:] + grid[:-1])
    half = 0.5 * np.diff(grid)
    inner = mid[:, None] + half[:, None] * _GL_X[None, :]
    return np.concatenate((grid, inner.ravel()))


def _cumulative(k_all: np.ndarray, grid: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Cumulative integral of k at the grid nodes and k at the nodes.

    ``k_all`` holds k at :func:`_evaluation_points` (last axis). Each interval is
    integrated by 4-point Gauss-Legendre quadrature (exact for polynomials of
    degree 7; Abramowitz and Stegun 1964, eq. 25.4.29).
    """
    n = grid.size - 1
    k_nodes = k_all[..., : n + 1]
    inner = k_all[..., n + 1 :].reshape(k_all.shape[:-1] + (n, 4))
    inc = (inner @ _GL_W) * (0.5 * np.diff(grid))
    cum = np.zeros(k_nodes.shape)
    np.cumsum(inc, axis=-1, out=cum[..., 1:])
    return cum, k_nodes


def _conditions_args(cond: Mapping[str, np.ndarray]) -> tuple[np.ndarray, ...]:
    return cond["temperature_K"], cond["pH"], cond["ionic_strength_M"], cond["salinity"]


def _ln_k_estimates(model: RateModel, cond: Mapping[str, np.ndarray], name: str) -> np.ndarray:
    t, ph, i_m, s = _conditions_args(cond)
    ln_k = np.asarray(model.ln_k(t, ph, ionic_strength_M=i_m, salinity=s), dtype=float)
    ln_k = np.broadcast_to(ln_k, t.shape) if ln_k.shape != t.shape else ln_k
    if not np.all(np.isfinite(ln_k)):
        i = int(np.argmax(~np.isfinite(ln_k)))
        raise DataError(
            f"scenario {name!r}: the rate model gave no finite ln k at temperature "
            f"{t[i]!r} K, pH {ph[i]!r}"
        )
    if np.any(ln_k > 700.0) or np.any(ln_k < -690.0):
        bad = float(ln_k.max()) if np.any(ln_k > 700.0) else float(ln_k.min())
        raise DataError(
            f"scenario {name!r}: the rate model predicts ln k = {bad:.4g} (k outside "
            "1e-300 to 1e304 1/s); the conditions are far outside anything the fit can describe"
        )
    return ln_k


def _integration_grid(
    scenario: Scenario,
    model: RateModel,
    end_s: float,
    nodes: np.ndarray,
    points_per_period: int,
    rtol: float,
    max_points: int,
) -> tuple[np.ndarray, dict[str, np.ndarray], np.ndarray, float, bool]:
    """Build and refine the integration grid.

    Returns the grid, the conditions and ln k (estimates) at its evaluation
    points, the error estimate and whether it converged.
    """
    period = scenario.shortest_period_s()
    step = end_s / 256.0
    if period is not None:
        step = min(step, period / points_per_period)
    n = max(int(math.ceil(end_s / step)), 1)
    base = np.linspace(0.0, end_s, n + 1)
    grid = np.unique(np.concatenate((base, nodes, scenario.kinks(0.0, end_s))))
    if 5 * (grid.size - 1) + 1 > max_points:
        raise InputError(
            f"scenario {scenario.name!r}: the coarsest grid that resolves it over "
            f"{end_s / DAY_S:.6g} d needs {5 * (grid.size - 1) + 1} rate evaluations, more "
            f"than max_points={max_points}; shorten the horizon or raise max_points"
        )

    def evaluate(g: np.ndarray) -> tuple[dict[str, np.ndarray], np.ndarray, np.ndarray]:
        c = scenario.conditions(_evaluation_points(g))
        lk = _ln_k_estimates(model, c, scenario.name)
        return c, lk, _cumulative(np.exp(lk), g)[0]

    cond, ln_k, cum = evaluate(grid)
    while True:
        fine = _refine(grid)
        if 5 * (fine.size - 1) + 1 > max_points:
            return grid, cond, ln_k, math.inf, False
        fine_cond, fine_ln_k, fine_cum = evaluate(fine)
        # the change on halving the step bounds the error of the coarser grid (the finer
        # one is about 2^8 times more accurate); measured at every node, absolute while
        # the integral is < 1 (where it is the relative error of C/C0), relative beyond
        change = np.abs(fine_cum[0::2] - cum)
        err = float(np.max(change / np.maximum(1.0, fine_cum[0::2])))
        if err < rtol:
            return grid, cond, ln_k, err, True
        grid, cond, ln_k, cum = fine, fine_cond, fine_ln_k, fine_cum


def _hermite_solve(
    a: np.ndarray, h: np.ndarray, c0: np.ndarray, c1: np.ndarray,
    k0: np.ndarray, k1: np.ndarray, target: np.ndarray,
) -> np.ndarray:
    """Solve C(t) = target inside one interval per row.

    C is the cubic Hermite interpolant of the cumulative integral, whose values
    (c0, c1) and slopes (k0, k1) are known at both ends; Newton iterations start
    from the linear interpolant and stay inside the interval.
    """
    s = np.clip((target - c0) / np.where(c1 > c0, c1 - c0, 1.0), 0.0, 1.0)
    for _ in range(8):
        s2, s3 = s * s, s * s * s
        c = (
            c0 * (2 * s3 - 3 * s2 + 1) + h * k0 * (s3 - 2 * s2 + s)
            + c1 * (-2 * s3 + 3 * s2) + h * k1 * (s3 - s2)
        )
        dc = (
            c0 * (6 * s2 - 6 * s) + h * k0 * (3 * s2 - 4 * s + 1)
            + c1 * (-6 * s2 + 6 * s) + h * k1 * (3 * s2 - 2 * s)
        )
        s = np.clip(s - (c - target) / np.where(dc > 0, dc, np.inf), 0.0, 1.0)
    return a + s * h


def _invert(
    grid: np.ndarray,
    cum: np.ndarray,
    k_nodes: np.ndarray,
    target: np.ndarray,
    repeat_period_s: float | None,
    constant_after_s: float | None,
) -> np.ndarray:
    """First time at which the cumulative integral reaches ``target`` (per row).

    ``cum`` and ``k_nodes`` are (n_rows, n_grid) with cum[:, 0] = 0; ``target``
    (n_rows,). Beyond the grid: a repeating scenario continues by whole periods
    (the period must be a grid node), a scenario that is constant after some
    time continues at the last rate constant; otherwise the result is inf
    ("not reached").
    """
    n_rows = cum.shape[0]
    out = np.full(n_rows, np.inf)
    reached = cum[:, -1] >= target
    if np.any(reached):
        rows = np.nonzero(reached)[0]
        idx = np.maximum(np.argmax(cum[rows] >= target[rows, None], axis=1), 1)
        out[rows] = _hermite_solve(
            grid[idx - 1], grid[idx] - grid[idx - 1],
            cum[rows, idx - 1], cum[rows, idx],
            k_nodes[rows, idx - 1], k_nodes[rows, idx], target[rows],
        )
    missing = ~reached
    if not np.any(missing):
        return out
    rows = np.nonzero(missing)[0]
    if repeat_period_s is not None:
        j = int(np.searchsorted(grid, repeat_period_s))
        per = cum[rows, j]
        whole = np.floor(target[rows] / per)
        rem = target[rows] - whole * per
        sub = _invert(grid[: j + 1], cum[rows, : j + 1], k_nodes[rows, : j + 1], rem, None, None)
        out[rows] = whole * repeat_period_s + sub
    elif constant_after_s is not None and constant_after_s <= grid[-1]:
        out[rows] = grid[-1] + (target[rows] - cum[rows, -1]) / k_nodes[rows, -1]
    return out


def _time_outside(grid: np.ndarray, values: np.ndarray, rng: Any) -> float:
    if rng is None:
        return 0.0
    lo, hi = float(rng[0]), float(rng[1])
    outside = ((values < lo - 1e-9) | (values > hi + 1e-9)).astype(float)
    total = grid[-1] - grid[0]
    return float(_cumtrapz(outside, grid)[-1] / total) if total > 0 else float(outside[0])


def run_scenario(
    model: RateModel,
    scenario: Scenario,
    *,
    horizon_s: float | None = None,
    output_time_s: Sequence[float] | np.ndarray | None = None,
    n_draws: int = 1000,
    level: float = 0.95,
    seed: int | None = None,
    points_per_period: int = 8,
    rtol: float = 1e-7,
    max_points: int = 400_000,
) -> ScenarioResult:
    """Fraction remaining, DT50, DT90 and effective rate of a substance in a scenario.

    .. math::

        \\frac{C(t)}{C_0} = \\exp\\left(-\\int_0^t k(\\tau)\\,d\\tau\\right), \\qquad
        \\bar{k} = \\frac{1}{H}\\int_0^H k(\\tau)\\,d\\tau, \\qquad
        \\int_0^{DT_x} k(\\tau)\\,d\\tau = -\\ln\\left(1 - \\frac{x}{100}\\right)

    (first-order loss with a time-dependent rate constant, e.g. Schwarzenbach,
    Gschwend and Imboden, *Environmental Organic Chemistry*, 2nd ed. 2003, ch. 12).

    Integration: see :data:`INTEGRATION_RULE`. The grid is refined with the
    parameter estimates; the Monte Carlo draws reuse the final grid.

    DT50/DT90 beyond the horizon are still found when the scenario repeats
    (constants and periodic components: the integral grows by the same amount
    each period) or stays constant after its last series sample
    (``extend="hold"``); otherwise they are None with a note.

    Parameters
    ----------
    model : RateModel
        Fitted rate model, e.g. a ``kinetics.surface.SurfaceFit``.
    scenario : Scenario
        The conditions over time.
    horizon_s : float, optional
        End of the output period [s]; default the last output time, or 365 days.
    output_time_s : array_like, optional
        Output times [s], >= 0 and <= horizon; default 366 equally spaced times
        from 0 to the horizon.
    n_draws : int
        Monte Carlo draws for the bands (0 = no bands; otherwise >= 100).
    level : float
        Band level, 0 < level < 1.
    seed : int, optional
        Seed of the random generator (reproducible bands).
    points_per_period : int
        Minimum grid points per shortest period (>= 8).
    rtol : float
        Target error of the cumulative integral of k at every grid node (absolute
        below 1, i.e. the relative error of C/C0; relative above).
    max_points : int
        Largest number of rate evaluations per curve (grid nodes plus four
        Gauss-Legendre points per interval); if refinement reaches it, the result
        is flagged ``integration_not_converged``; if even the coarsest grid needs
        more, InputError.

    Returns
    -------
    ScenarioResult

    Raises
    ------
    InputError
        Bad horizon, output times, draw count or level; a condition out of range
        (the message gives the time).
    DataError
        The model gives no finite rate constant.
    """
    if not isinstance(scenario, Scenario):
        raise InputError(f"scenario must be a kinetics.scenarios.Scenario, got {scenario!r}")
    for attr in ("ln_k", "sample_parameters"):
        if not callable(getattr(model, attr, None)):
            raise InputError(
                f"the rate model must provide ln_k() and sample_parameters(); "
                f"{type(model).__name__} has no {attr}()"
            )
    _check_level(level)
    if isinstance(n_draws, bool) or not isinstance(n_draws, (int, np.integer)):
        raise InputError(f"n_draws must be an integer, got {n_draws!r}")
    n_draws = int(n_draws)
    if n_draws != 0 and n_draws < _MIN_DRAWS:
        raise InputError(
            f"n_draws must be 0 (no bands) or at least {_MIN_DRAWS} for a usable band, "
            f"got {n_draws}"
        )
    if isinstance(points_per_period, bool) or int(points_per_period) < 8:
        raise InputError(f"points_per_period must be an integer >= 8, got {points_per_period!r}")
    if not 0.0 < float(rtol) < 0.01:
        raise InputError(f"rtol must be between 0 and 0.01, got {rtol!r}")

    if output_time_s is not None:
        out_t = np.atleast_1d(as_float_array(output_time_s, "output_time_s")).astype(float)
        if out_t.ndim != 1 or out_t.size == 0:
            raise InputError("output_time_s must be a non-empty 1-D sequence of times [s]")
        if np.any(out_t < 0):
            raise InputError(
                f"output_time_s must be >= 0 (time after the start), got {float(out_t.min())!r}"
            )
        if np.any(np.diff(out_t) <= 0):
            raise InputError("output_time_s must be strictly increasing")
    else:
        out_t = None
    if horizon_s is None:
        horizon = float(out_t[-1]) if out_t is not None else 365.0 * DAY_S
    else:
        horizon = _finite_scalar(horizon_s, "horizon_s")
    if horizon <= 0:
        raise InputError(f"horizon_s must be > 0, got {horizon!r}")
    if out_t is None:
        out_t = np.linspace(0.0, horizon, 366)
    elif out_t[-1] > horizon * (1 + 1e-12):
        raise InputError(
            f"output time {out_t[-1]!r} s lies beyond horizon_s {horizon!r} s"
        )

    repeat = scenario.repeat_period_s()
    const_after = scenario.constant_after_s()
    end_s = horizon
    if repeat is not None:
        end_s = max(end_s, repeat)
    elif const_after is not None:
        end_s = max(end_s, const_after)
    extra = [horizon] + ([repeat] if repeat is not None else [])
    nodes = np.unique(np.concatenate((out_t, extra)))

    grid, cond, ln_k, rel_err, converged = _integration_grid(
        scenario, model, end_s, nodes, int(points_per_period), float(rtol), int(max_points)
    )
    n_nodes = grid.size
    i_h = int(np.searchsorted(grid, horizon))
    i_out = np.searchsorted(grid, out_t)
    cum_row, k_row = _cumulative(np.exp(ln_k)[None, :], grid)
    cum, k = cum_row[0], k_row[0]
    cond_all = cond
    cond = {q: v[:n_nodes] for q, v in cond_all.items()}

    notes: list[str] = []
    flags: dict[str, bool] = {}
    t_range = getattr(model, "temperature_range_K", None)
    ph_range = getattr(model, "pH_range", None)
    in_h = slice(0, i_h + 1)
    share_t = _time_outside(grid[in_h], cond["temperature_K"][in_h], t_range)
    share_ph = _time_outside(grid[in_h], cond["pH"][in_h], ph_range)
    flags["temperature_outside_range"] = t_range is not None and bool(
        np.any(cond["temperature_K"][in_h] < float(t_range[0]) - 1e-9)
        or np.any(cond["temperature_K"][in_h] > float(t_range[1]) + 1e-9)
    )
    flags["pH_outside_range"] = ph_range is not None and bool(
        np.any(cond["pH"][in_h] < float(ph_range[0]) - 1e-9)
        or np.any(cond["pH"][in_h] > float(ph_range[1]) + 1e-9)
    )
    ea_prior = tuple(getattr(model, "ea_from_prior", ()) or ())
    unchar = tuple(getattr(model, "uncharacterised_pathways", ()) or ())
    flags["ea_from_prior"] = bool(ea_prior)
    flags["uncharacterised_pathways"] = bool(unchar)
    flags["integration_not_converged"] = not converged
    if flags["temperature_outside_range"]:
        notes.append(
            f"The water temperature is outside the measured range "
            f"({float(t_range[0]):.2f}-{float(t_range[1]):.2f} K) for {100 * share_t:.0f} % "
            "of the time: the rate constants there are extrapolated."
        )
    if flags["pH_outside_range"]:
        notes.append(
            f"The pH is outside the measured range ({float(ph_range[0]):.2f}-"
            f"{float(ph_range[1]):.2f}) for {100 * share_ph:.0f} % of the time: the rate "
            "constants there are extrapolated."
        )
    if ea_prior:
        notes.append(
            "The activation energy of the "
            + ", ".join(ea_prior)
            + " pathway(s) comes from a prior, not from the data."
        )
    if unchar:
        notes.append(
            "Pathway(s) not characterised by the data: " + ", ".join(unchar) + "."
        )
    if not converged:
        notes.append(
            f"The integration grid reached its limit of {max_points} points before the "
            f"requested accuracy; raise max_points or shorten the horizon."
        )

    dt50 = float(_invert(grid, cum_row, k_row, np.array([_LN2]), repeat, const_after)[0])
    dt90 = float(_invert(grid, cum_row, k_row, np.array([_LN10]), repeat, const_after)[0])
    if not (math.isfinite(dt50) and math.isfinite(dt90)):
        notes.append(
            "DT50 or DT90 is not reached within the time the scenario describes "
            f"({end_s / DAY_S:.6g} d) and cannot be continued beyond it (the measured "
            "series ends there); reported as missing."
        )
    eff_k = float(cum[i_h] / horizon)

    draws_store: dict[str, dict[str, np.ndarray]] = {}
    distribution = "none"
    if n_draws:
        rng = np.random.default_rng(seed)
        params = np.asarray(model.sample_parameters(n_draws, rng), dtype=float)
        if params.ndim != 2 or params.shape[0] != n_draws:
            raise DataError(
                f"sample_parameters({n_draws}) returned shape {params.shape}, expected "
                f"({n_draws}, n_parameters)"
            )
        # multivariate t with the fit's residual degrees of freedom when the model has
        # them (normal draws scaled by one shared sqrt(dof/chi2_dof) per draw, as the
        # intervals of kinetics.prediction); otherwise the draws are used as they are
        dof = getattr(model, "dof", None)
        est = getattr(model, "estimates", None)
        t_scale = np.ones(n_draws)
        distribution = "normal"
        if (isinstance(dof, (int, np.integer)) and not isinstance(dof, bool) and dof >= 1
                and est is not None and np.shape(est) == (params.shape[1],)):
            t_scale = np.sqrt(int(dof) / rng.chisquare(int(dof), size=n_draws))
            est_row = np.asarray(est, dtype=float)[None, :]
            params = est_row + (params - est_row) * t_scale[:, None]
            distribution = f"multivariate t, {int(dof)} degrees of freedom"
        sigma = getattr(model, "residual_scale", None)
        sigma = float(sigma) if sigma is not None and float(sigma) > 0 else None
        offsets = (
            rng.standard_normal(n_draws) * sigma * t_scale if sigma is not None else None
        )
        n_eval = ln_k.size
        chunk = max(1, _DRAW_CHUNK_ELEMENTS // n_eval)
        acc: dict[str, dict[str, list[np.ndarray]]] = {
            kind: {"fraction": [], "dt50": [], "dt90": [], "effective_k": []}
            for kind in (("confidence", "prediction") if sigma is not None else ("confidence",))
        }
        t_arg, ph_arg, i_arg, s_arg = _conditions_args(cond_all)
        too_uncertain = (
            f"scenario {scenario.name!r}: some parameter draws give no finite rate "
            "constant; the fit is too uncertain for a Monte Carlo band"
        )
        # a model that can evaluate its water chemistry once for all chunks of draws
        # (kinetics.surface.SurfaceFit) gives k directly; others give ln k per chunk
        prepared = None
        if callable(getattr(model, "prepare_conditions", None)) and callable(
            getattr(model, "rate_draws_per_s", None)
        ):
            prepared = model.prepare_conditions(
                t_arg, ph_arg, ionic_strength_M=i_arg, salinity=s_arg
            )
        for start in range(0, n_draws, chunk):
            p = params[start : start + chunk]
            if prepared is not None:
                try:
                    k_draws = np.asarray(model.rate_draws_per_s(prepared, p), dtype=float)
                except DataError:
                    raise DataError(too_uncertain) from None
                what = "rate_draws_per_s"
            else:
                lk = np.asarray(
                    model.ln_k(t_arg, ph_arg, ionic_strength_M=i_arg, salinity=s_arg,
                               parameters=p),
                    dtype=float,
                )
                k_draws = lk
                what = "ln_k"
            if k_draws.shape != (p.shape[0], n_eval):
                raise DataError(
                    f"{what} with {p.shape[0]} parameter draws returned shape "
                    f"{k_draws.shape}, expected ({p.shape[0]}, {n_eval})"
                )
            if prepared is None:
                if not np.all(np.isfinite(lk)) or np.any(lk > 700.0) or np.any(lk < -690.0):
                    raise DataError(too_uncertain)
                k_draws = np.exp(lk)
            elif not np.all(np.isfinite(k_draws)) or np.any(k_draws < _K_MIN_DRAW):
                raise DataError(too_uncertain)
            cum_d, k_d = _cumulative(k_draws, grid)
            for kind in acc:
                scale = (
                    np.exp(offsets[start : start + chunk])
                    if kind == "prediction"
                    else np.ones(p.shape[0])
                )
                acc[kind]["fraction"].append(np.exp(-cum_d[:, i_out] * scale[:, None]))
                acc[kind]["effective_k"].append(cum_d[:, i_h] * scale / horizon)
                for key, target in (("dt50", _LN2), ("dt90", _LN10)):
                    acc[kind][key].append(
                        _invert(grid, cum_d, k_d, target / scale, repeat, const_after)
                    )
        for kind, parts in acc.items():
            draws_store[kind] = {
                key: np.concatenate(vals, axis=0) for key, vals in parts.items()
            }
    ci = _summarise(draws_store["confidence"], level, "confidence") if n_draws else None
    pi = (
        _summarise(draws_store["prediction"], level, "prediction")
        if "prediction" in draws_store
        else None
    )

    return ScenarioResult(
        scenario_name=scenario.name,
        time_s=out_t,
        temperature_K=cond["temperature_K"][i_out],
        pH=cond["pH"][i_out],
        salinity=cond["salinity"][i_out],
        ionic_strength_M=cond["ionic_strength_M"][i_out],
        k_per_s=k[i_out],
        fraction_remaining=np.exp(-cum[i_out]),
        dt50_s=dt50 if math.isfinite(dt50) else None,
        dt90_s=dt90 if math.isfinite(dt90) else None,
        effective_k_per_s=eff_k,
        effective_dt50_s=_LN2 / eff_k,
        horizon_s=horizon,
        level=float(level),
        fraction_ci_low=ci.fraction_low if ci else None,
        fraction_ci_high=ci.fraction_high if ci else None,
        fraction_pi_low=pi.fraction_low if pi else None,
        fraction_pi_high=pi.fraction_high if pi else None,
        dt50_ci_low_s=ci.dt50_low_s if ci else None,
        dt50_ci_high_s=ci.dt50_high_s if ci else None,
        dt90_ci_low_s=ci.dt90_low_s if ci else None,
        dt90_ci_high_s=ci.dt90_high_s if ci else None,
        effective_k_ci_low_per_s=ci.effective_k_low_per_s if ci else None,
        effective_k_ci_high_per_s=ci.effective_k_high_per_s if ci else None,
        flags=flags,
        fraction_of_time_outside_range={"temperature": share_t, "pH": share_ph},
        notes=tuple(notes),
        n_draws=n_draws,
        seed=seed,
        draw_distribution=distribution,
        integration_points=int(grid.size),
        integration_rel_error=float(rel_err),
        _draws=draws_store,
    )


# --------------------------------------------------------------------------- dictionaries


def _component_from_dict(d: Mapping[str, Any], quantity: str, celsius: bool) -> Component:
    if not isinstance(d, Mapping):
        raise InputError(f"a {quantity} component must be an object, got {d!r}")
    kind = d.get("kind")
    if kind not in COMPONENT_KINDS:
        raise InputError(
            f"unknown {quantity} component kind {kind!r}; valid: {', '.join(COMPONENT_KINDS)}"
        )
    allowed = {
        "constant": {"kind", "value"},
        "series": {"kind", "time", "time_unit", "values", "extend"},
        "monthly_means": {"kind", "values"},
        "annual_cycle": {"kind", "mean", "amplitude", "phase_day"},
        "daily_cycle": {"kind", "mean", "amplitude", "phase_hour"},
    }[kind]
    unknown = sorted(set(d) - allowed)
    if unknown:
        raise InputError(
            f"{quantity} component {kind!r} has unknown field(s) {', '.join(unknown)}; "
            f"valid: {', '.join(sorted(allowed))}"
        )

    def level_value(x: Any) -> Any:
        # absolute temperatures convert from °C; amplitudes are differences (1 °C = 1 K)
        return celsius_to_kelvin(x) if celsius else x

    def need(key: str) -> Any:
        if key not in d:
            raise InputError(f"{quantity} component {kind!r} needs the field {key!r}")
        return d[key]

    if kind == "constant":
        return Constant(float(level_value(_finite_scalar(need("value"), f"{quantity} value"))))
    if kind == "series":
        times = time_to_s(need("time"), d.get("time_unit", "s"))
        values = np.asarray(level_value(as_float_array(need("values"), f"{quantity} values")))
        return Series(times, values, extend=d.get("extend", "error"))
    if kind == "monthly_means":
        values = as_float_array(need("values"), f"{quantity} monthly means")
        return MonthlyMeans(np.asarray(level_value(values)))
    mean = _finite_scalar(need("mean"), f"{quantity} mean")
    # a zero mean added to another component is an anomaly, not 0 °C
    mean_level = float(level_value(mean)) if (celsius and mean != 0.0) else mean
    if kind == "annual_cycle":
        return AnnualCycle(mean_level, need("amplitude"), d.get("phase_day", 0.0))
    return DailyCycle(mean_level, need("amplitude"), d.get("phase_hour", 0.0))


def scenario_from_dict(d: Mapping[str, Any]) -> Scenario:
    """Build a :class:`Scenario` from a JSON-style dictionary.

    Keys: ``name``; ``temperature_K`` *or* ``temperature_C``; ``pH``; optionally
    ``salinity`` or ``ionic_strength_M``; ``start_day_of_year``; ``description``;
    ``invented`` (bool, kept in the description for demo data). Each quantity is a
    number or a list of components ``{"kind": ..., ...}`` with kinds
    :data:`COMPONENT_KINDS`: ``constant`` (``value``), ``series`` (``time``,
    ``time_unit`` in s/min/h/d, ``values``, ``extend``), ``monthly_means``
    (``values``, 12), ``annual_cycle`` (``mean``, ``amplitude``, ``phase_day``),
    ``daily_cycle`` (``mean``, ``amplitude``, ``phase_hour``).

    With ``temperature_C`` the absolute values (constants, series, monthly means,
    non-zero means) are converted from °C to K; amplitudes are temperature
    differences and are used as they are. A zero ``mean`` in a cycle is taken as
    an anomaly added to another component (0 K change), not as 0 °C.

    Raises
    ------
    InputError
        Unknown keys or kinds, missing fields, bad values.
    """
    if not isinstance(d, Mapping):
        raise InputError(f"a scenario must be an object, got {d!r}")
    allowed = {
        "name", "temperature_K", "temperature_C", "pH", "salinity", "ionic_strength_M",
        "start_day_of_year", "description", "invented",
    }
    unknown = sorted(set(d) - allowed)
    if unknown:
        raise InputError(
            f"unknown scenario field(s) {', '.join(unknown)}; valid: {', '.join(sorted(allowed))}"
        )
    if ("temperature_K" in d) == ("temperature_C" in d):
        raise InputError("give the scenario temperature as exactly one of temperature_K or "
                         "temperature_C")
    if "pH" not in d:
        raise InputError("a scenario needs a pH signal")

    def signal(key: str, quantity: str, celsius: bool = False) -> Any:
        value = d.get(key)
        if value is None:
            return None
        if isinstance(value, bool):
            raise InputError(f"{key} must be a number or a list of components, got {value!r}")
        if isinstance(value, (int, float)):
            v = _finite_scalar(value, key)
            return Constant(float(celsius_to_kelvin(v)) if celsius else v)
        if isinstance(value, Mapping):
            value = [value]
        if not isinstance(value, (list, tuple)) or not value:
            raise InputError(f"{key} must be a number or a non-empty list of components")
        return tuple(_component_from_dict(c, quantity, celsius) for c in value)

    celsius = "temperature_C" in d
    description = str(d.get("description", ""))
    if d.get("invented") and "invented" not in description.lower():
        description = (description + " (invented demo data)").strip()
    return Scenario(
        name=str(d.get("name", "")),
        temperature_K=signal("temperature_C" if celsius else "temperature_K", "temperature",
                             celsius),
        pH=signal("pH", "pH"),
        salinity=signal("salinity", "salinity"),
        ionic_strength_M=signal("ionic_strength_M", "ionic_strength_M"),
        start_day_of_year=d.get("start_day_of_year", 0.0),
        description=description,
    )


def _component_to_dict(c: Component) -> dict[str, Any]:
    if isinstance(c, Constant):
        return {"kind": "constant", "value": c.value}
    if isinstance(c, Series):
        return {"kind": "series", "time": c.time_s.tolist(), "time_unit": "s",
                "values": c.values.tolist(), "extend": c.extend}
    if isinstance(c, MonthlyMeans):
        return {"kind": "monthly_means", "values": c.values.tolist()}
    if isinstance(c, AnnualCycle):
        return {"kind": "annual_cycle", "mean": c.mean, "amplitude": c.amplitude,
                "phase_day": c.phase_day}
    return {"kind": "daily_cycle", "mean": c.mean, "amplitude": c.amplitude,
            "phase_hour": c.phase_hour}


def scenario_to_dict(scenario: Scenario) -> dict[str, Any]:
    """JSON-safe dictionary of a scenario (temperatures in K); inverse of
    :func:`scenario_from_dict`."""
    out: dict[str, Any] = {"name": scenario.name}
    for q in QUANTITIES:
        sig = getattr(scenario, q)
        if sig is not None:
            out[q] = [_component_to_dict(c) for c in sig]
    out["start_day_of_year"] = scenario.start_day_of_year
    out["description"] = scenario.description
    return out
