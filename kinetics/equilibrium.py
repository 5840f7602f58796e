"""Equilibrium check: can a hydrolysis be treated as irreversible at field conditions?

A hydrolysis ``A + H2O -> P + n H+ + X ...`` with a standard reaction Gibbs
energy :math:`\\Delta_r G^\\circ` has the equilibrium constant
:math:`K^\\circ = \\exp(-\\Delta_r G^\\circ / RT)`. At the activities of the
co-products in a water body (H+ from the pH, halide and others as given), the
equilibrium ratio of organic product to parent is

.. math::

    \\frac{a_P}{a_A} = \\frac{K^\\circ}{a_{\\mathrm{H^+}}^{\\,n}\\,\\prod_X a_X^{\\nu_X}}

(water activity taken as 1). When this ratio is large the back reaction is
negligible and first-order loss kinetics to completion apply; when it is not,
the decline stops at an equilibrium and a first-order DT50/DT90 overstates the
loss. :func:`equilibrium_ratio` computes the ratio and applies a stated
threshold (:data:`IRREVERSIBLE_RATIO`).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from scipy import stats

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import InputError
from kinetics.units import validate_pH, validate_temperature_K

__all__ = [
    "GAS_CONSTANT_J_PER_MOL_K",
    "IRREVERSIBLE_RATIO",
    "MAX_ABS_DELTA_G_KJ_PER_MOL",
    "EquilibriumInterval",
    "EquilibriumResult",
    "equilibrium_ratio",
]

#: Molar gas constant R [J/(mol K)], CODATA 2018 (Tiesinga et al. 2021, Rev. Mod.
#: Phys. 93, 025010); exact since the 2019 SI, as N_A k = 6.02214076e23 x
#: 1.380649e-23.
GAS_CONSTANT_J_PER_MOL_K = 8.314462618

#: Product-to-parent ratio at equilibrium above which the hydrolysis is treated
#: as irreversible: at 1000 no more than 0.1 % of the parent (1/(1 + 1000))
#: would remain at equilibrium for a 1:1 parent-product stoichiometry.
IRREVERSIBLE_RATIO = 1.0e3

#: Largest accepted |standard reaction Gibbs energy| [kJ/mol]; hydrolysis
#: reactions lie far inside this bound.
MAX_ABS_DELTA_G_KJ_PER_MOL = 1000.0

_MAX_PROTONS = 6
_MAX_COEFFICIENT = 6
_MIN_ACTIVITY = 1e-30
_MAX_ACTIVITY = 1e3
_LN10 = math.log(10.0)
# ratios beyond this many decades cannot be represented as a float
_MAX_LOG10 = 300.0


@dataclass(frozen=True)
class EquilibriumInterval:
    """Interval for the equilibrium quantities from the uncertainty of ΔG°.

    Attributes
    ----------
    level : float
        Two-sided level of the interval.
    K_standard_low, K_standard_high : float
        Bounds of the standard equilibrium constant [-].
    ratio_low, ratio_high : float
        Bounds of the product-to-parent ratio at the field activities [-].
    irreversible_at_low : bool
        Whether the lower bound of the ratio still passes the threshold.
    """

    level: float
    K_standard_low: float
    K_standard_high: float
    ratio_low: float
    ratio_high: float
    irreversible_at_low: bool


@dataclass(frozen=True)
class EquilibriumResult:
    """Result of :func:`equilibrium_ratio`.

    Attributes
    ----------
    delta_g_kJ_per_mol : float
        Standard reaction Gibbs energy used [kJ/mol].
    delta_g_sd_kJ_per_mol : float or None
        Its standard uncertainty [kJ/mol], if given.
    temperature_K : float
        Temperature [K].
    protons_released : int
        Protons released per reaction (negative: consumed).
    pH : float or None
        pH used for the H+ activity.
    other_activities : tuple of (str, float, int)
        Co-product activities used, as ``(species, activity, coefficient)``.
    ln_K_standard : float
        :math:`\\ln K^\\circ = -\\Delta_r G^\\circ/(RT)`.
    K_standard : float
        Equilibrium constant at standard state (all activities 1) [-].
    log10_ratio : float
        Decadic log of :attr:`ratio_products_to_reactants`.
    ratio_products_to_reactants : float
        Equilibrium ratio of organic product to parent at the field activities [-].
    parent_fraction_at_equilibrium : float
        :math:`1/(1 + \\text{ratio})`: fraction of the parent left at equilibrium
        for a 1:1 parent-product stoichiometry [-].
    irreversible : bool
        ``ratio_products_to_reactants >= irreversible_threshold``.
    irreversible_threshold : float
        The threshold applied (:data:`IRREVERSIBLE_RATIO`).
    explanation : str
        Plain-language statement of the result.
    caution : str
        :data:`kinetics.caution.CAUTION_TEXT`.
    """

    delta_g_kJ_per_mol: float
    delta_g_sd_kJ_per_mol: float | None
    temperature_K: float
    protons_released: int
    pH: float | None
    other_activities: tuple[tuple[str, float, int], ...]
    ln_K_standard: float
    K_standard: float
    log10_ratio: float
    ratio_products_to_reactants: float
    parent_fraction_at_equilibrium: float
    irreversible: bool
    irreversible_threshold: float
    explanation: str
    caution: str = field(default=CAUTION_TEXT)

    def interval(self, level: float = 0.95) -> EquilibriumInterval:
        """Interval from a normal uncertainty of ΔG° (needs ``delta_g_sd_kJ_per_mol``).

        .. math::

            \\ln K^\\circ \\pm z_{(1+\\text{level})/2}\\,\\frac{u(\\Delta_r G^\\circ)}{RT}

        with the same shift applied to the ratio (the field activities are
        taken as exact).

        Parameters
        ----------
        level : float
            Two-sided level, strictly between 0 and 1.

        Returns
        -------
        EquilibriumInterval

        Raises
        ------
        InputError
            If no uncertainty of ΔG° was given or ``level`` is invalid.
        """
        if self.delta_g_sd_kJ_per_mol is None:
            raise InputError(
                "no uncertainty of the reaction Gibbs energy was given; call "
                "equilibrium_ratio(..., delta_g_sd_kJ_per_mol=...) to get an interval"
            )
        try:
            lvl = float(level)
        except (TypeError, ValueError):
            raise InputError(f"level must be a number between 0 and 1, got {level!r}") from None
        if not 0.0 < lvl < 1.0:
            raise InputError(f"level must be strictly between 0 and 1, got {level!r}")
        z = float(stats.norm.ppf(0.5 + lvl / 2.0))
        half = z * self.delta_g_sd_kJ_per_mol * 1000.0 / (
            GAS_CONSTANT_J_PER_MOL_K * self.temperature_K
        )
        log10_half = half / _LN10
        log10_k = self.ln_K_standard / _LN10
        bounds = (
            log10_k - log10_half,
            log10_k + log10_half,
            self.log10_ratio - log10_half,
            self.log10_ratio + log10_half,
        )
        if max(abs(b) for b in bounds) > _MAX_LOG10:
            raise InputError(
                "the interval bounds exceed the floating-point range; reduce "
                "delta_g_sd_kJ_per_mol or the level"
            )
        k_low, k_high, ratio_low, ratio_high = (10.0**b for b in bounds)
        return EquilibriumInterval(
            level=lvl,
            K_standard_low=k_low,
            K_standard_high=k_high,
            ratio_low=ratio_low,
            ratio_high=ratio_high,
            irreversible_at_low=bool(ratio_low >= self.irreversible_threshold),
        )


def _finite_scalar(value: Any, name: str) -> float:
    if isinstance(value, (str, bytes, bool)) or value is None:
        raise InputError(f"{name} must be a number, got {value!r}")
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a single number, got {value!r}") from None
    if not math.isfinite(number):
        raise InputError(f"{name} must be finite, got {value!r}")
    return number


def _whole(value: Any, name: str, limit: int) -> int:
    number = _finite_scalar(value, name)
    if number != round(number) or abs(number) > limit:
        raise InputError(f"{name} must be a whole number between {-limit} and {limit}, "
                         f"got {value!r}")
    return int(round(number))


def _activities(other_activities: Any) -> dict[str, tuple[float, int]]:
    if other_activities is None:
        return {}
    if not isinstance(other_activities, Mapping):
        raise InputError(
            "other_activities must be a mapping {species: activity} or "
            f"{{species: (activity, coefficient)}}, got {other_activities!r}"
        )
    result: dict[str, tuple[float, int]] = {}
    for species, entry in other_activities.items():
        if not isinstance(species, str) or not species.strip():
            raise InputError(f"species names must be non-empty strings, got {species!r}")
        if isinstance(entry, (tuple, list)):
            if len(entry) != 2:
                raise InputError(
                    f"activity of {species!r} must be a number or (activity, coefficient), "
                    f"got {entry!r}"
                )
            activity = _finite_scalar(entry[0], f"activity of {species!r}")
            coefficient = _whole(entry[1], f"stoichiometric coefficient of {species!r}",
                                 _MAX_COEFFICIENT)
        else:
            activity = _finite_scalar(entry, f"activity of {species!r}")
            coefficient = 1
        if not _MIN_ACTIVITY <= activity <= _MAX_ACTIVITY:
            raise InputError(
                f"activity of {species!r} must be between {_MIN_ACTIVITY:g} and "
                f"{_MAX_ACTIVITY:g}, got {activity!r}"
            )
        result[species] = (activity, coefficient)
    return result


def equilibrium_ratio(
    delta_g_kJ_per_mol: float,
    *,
    temperature_K: float = 298.15,
    protons_released: int = 0,
    pH: float | None = None,
    other_activities: Mapping[str, float | tuple[float, int]] | None = None,
    delta_g_sd_kJ_per_mol: float | None = None,
) -> EquilibriumResult:
    """Equilibrium product-to-parent ratio of a hydrolysis at field activities.

    .. math::

        K^\\circ = \\exp\\!\\left(-\\frac{\\Delta_r G^\\circ}{RT}\\right), \\qquad
        \\frac{a_P}{a_A} = \\frac{K^\\circ}{a_{\\mathrm{H^+}}^{\\,n}\\prod_X a_X^{\\nu_X}},
        \\qquad a_{\\mathrm{H^+}} = 10^{-\\mathrm{pH}}

    (the thermodynamic relation between standard Gibbs energy and equilibrium
    constant, e.g. P. Atkins and J. de Paula, "Physical Chemistry", any
    edition, chapter on chemical equilibrium; water activity taken as 1;
    :math:`R` from CODATA 2018). The hydrolysis is flagged irreversible when the
    ratio reaches :data:`IRREVERSIBLE_RATIO` (1000: at most 0.1 % of the parent
    would remain at equilibrium for a 1:1 stoichiometry).

    Parameters
    ----------
    delta_g_kJ_per_mol : float
        Standard reaction Gibbs energy :math:`\\Delta_r G^\\circ` of
        ``parent + H2O -> products`` at ``temperature_K`` [kJ/mol], standard
        state 1 mol/kg (or 1 mol/L) for solutes.
    temperature_K : float, optional
        Temperature [K], 273.15-373.15.
    protons_released : int, optional
        Protons released per reaction, n (negative if the reaction consumes
        protons), -6 to 6. Needs ``pH`` when not 0.
    pH : float, optional
        Field pH (an activity, 0-14).
    other_activities : mapping, optional
        Activities of other released co-products (halide, alcohol, ...), as
        ``{species: activity}`` (coefficient 1) or
        ``{species: (activity, coefficient)}``; activities 1e-30 to 1e3,
        coefficients -6 to 6 (negative for co-reactants).
    delta_g_sd_kJ_per_mol : float, optional
        Standard uncertainty of ΔG° [kJ/mol], >= 0; enables
        :meth:`EquilibriumResult.interval`.

    Returns
    -------
    EquilibriumResult

    Raises
    ------
    InputError
        For a non-finite or out-of-range argument, a missing pH when protons
        are released, or a ratio beyond the floating-point range.

    Examples
    --------
    >>> r = equilibrium_ratio(19.0, protons_released=1, pH=7.0)
    >>> round(r.K_standard, 6), round(r.ratio_products_to_reactants)
    (0.000469, 4692)
    """
    dg = _finite_scalar(delta_g_kJ_per_mol, "delta_g_kJ_per_mol")
    if abs(dg) > MAX_ABS_DELTA_G_KJ_PER_MOL:
        raise InputError(
            f"delta_g_kJ_per_mol {dg!r} kJ/mol is outside ±{MAX_ABS_DELTA_G_KJ_PER_MOL:g} "
            "kJ/mol; check the unit (kJ/mol, not J/mol)"
        )
    temperature = float(validate_temperature_K(_finite_scalar(temperature_K, "temperature_K")))
    n = _whole(protons_released, "protons_released", _MAX_PROTONS)
    ph: float | None = None
    if pH is not None:
        ph = float(validate_pH(_finite_scalar(pH, "pH")))
    if n != 0 and ph is None:
        raise InputError(
            f"protons_released is {n}: give the field pH so the H+ activity can be applied"
        )
    activities = _activities(other_activities)
    sd: float | None = None
    if delta_g_sd_kJ_per_mol is not None:
        sd = _finite_scalar(delta_g_sd_kJ_per_mol, "delta_g_sd_kJ_per_mol")
        if sd < 0.0 or sd > MAX_ABS_DELTA_G_KJ_PER_MOL:
            raise InputError(
                f"delta_g_sd_kJ_per_mol must be between 0 and {MAX_ABS_DELTA_G_KJ_PER_MOL:g}, "
                f"got {delta_g_sd_kJ_per_mol!r}"
            )

    rt = GAS_CONSTANT_J_PER_MOL_K * temperature
    ln_k = -dg * 1000.0 / rt
    log10_k = ln_k / _LN10
    log10_ratio = log10_k
    if n != 0 and ph is not None:
        log10_ratio += n * ph  # divide by a_H^n = 10^(-n pH)
    for activity, coefficient in activities.values():
        log10_ratio -= coefficient * math.log10(activity)
    if abs(log10_ratio) > _MAX_LOG10:
        raise InputError(
            f"the equilibrium ratio (log10 = {log10_ratio:.1f}) is beyond the floating-point "
            "range; check delta_g_kJ_per_mol and the activities"
        )
    k_standard = math.exp(ln_k)
    ratio = 10.0 ** log10_ratio
    parent_fraction = 1.0 / (1.0 + ratio)
    irreversible = ratio >= IRREVERSIBLE_RATIO

    conditions = [f"{temperature - 273.15:.1f} °C"]
    if n != 0:
        conditions.append(f"pH {ph:g} ({n:+d} H+)")
    elif ph is not None:
        conditions.append(f"pH {ph:g} (no protons released, pH not used)")
    for species, (activity, coefficient) in activities.items():
        conditions.append(f"a({species}) = {activity:g}" +
                          (f" (coefficient {coefficient})" if coefficient != 1 else ""))
    verdict = (
        f"the hydrolysis can be treated as irreversible (ratio >= {IRREVERSIBLE_RATIO:g})"
        if irreversible
        else f"the hydrolysis cannot be treated as irreversible (ratio < "
        f"{IRREVERSIBLE_RATIO:g}): the decline stops at equilibrium and first-order "
        "DT50/DT90 values overstate the loss"
    )
    explanation = (
        f"ΔG° = {dg:g} kJ/mol gives K° = {k_standard:.3g} at standard state. At "
        f"{', '.join(conditions)} the equilibrium product-to-parent ratio is {ratio:.3g}, "
        f"leaving {100.0 * parent_fraction:.4g} % of the parent at equilibrium (1:1 "
        f"stoichiometry); {verdict}."
    )
    return EquilibriumResult(
        delta_g_kJ_per_mol=dg,
        delta_g_sd_kJ_per_mol=sd,
        temperature_K=temperature,
        protons_released=n,
        pH=ph,
        other_activities=tuple((sp, a, c) for sp, (a, c) in activities.items()),
        ln_K_standard=ln_k,
        K_standard=k_standard,
        log10_ratio=log10_ratio,
        ratio_products_to_reactants=ratio,
        parent_fraction_at_equilibrium=parent_fraction,
        irreversible=bool(irreversible),
        irreversible_threshold=IRREVERSIBLE_RATIO,
        explanation=explanation,
    )
