"""Chemistry-aware plausibility hints for fitted hydrolysis parameters.

An optional substance class is used *only* to compare a fitted activation
energy, or the set of pathways a fit selected, with what is typical for that
class, and to flag results that are physically implausible for hydrolysis in
water (for example Ea = 15 kJ/mol, which points to a loss process other than a
chemical reaction, or to a temperature-control problem). The hints never change
a fit or a prediction.

Honesty about the numbers: the class ranges below are approximate ranges
recalled from the physical-organic and environmental-chemistry literature on
hydrolysis; they were *not* checked against a compiled table while writing
this module and are marked "from memory" in every hint. The general bounds
(30-150 kJ/mol) are a project choice. Treat a hint as a prompt to look at the
data again, never as a verdict.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import InputError
from kinetics.surface import GAS_CONSTANT_J_PER_MOL_K, PATHWAYS
from kinetics.units import as_float_array

__all__ = [
    "SUBSTANCE_CLASSES",
    "HINT_LEVELS",
    "PLAUSIBLE_EA_J_PER_MOL",
    "ClassProfile",
    "CLASS_PROFILES",
    "Hint",
    "HintReport",
    "class_hints",
]

#: Substance classes understood by :func:`class_hints`.
SUBSTANCE_CLASSES = (
    "carboxylic_ester",
    "carbamate",
    "phosphate_ester",
    "alkyl_halide",
    "amide",
    "epoxide",
    "other",
)
#: Hint severities, most serious first.
HINT_LEVELS = ("implausible", "unusual", "info")

#: Bounds outside which an Ea is flagged as implausible for hydrolysis [J/mol]
#: (project choice; common practice, no source).
PLAUSIBLE_EA_J_PER_MOL = (30.0e3, 150.0e3)

_MEMORY = "approximate range from memory (not checked against a compiled table)"
_PROJECT = "project choice: common practice, no source"


@dataclass(frozen=True)
class ClassProfile:
    """Typical hydrolysis behaviour of a substance class.

    Attributes
    ----------
    substance_class : str
    label : str
        Human-readable name.
    ea_ranges_J_per_mol : dict
        Pathway -> (low, high) typical Ea [J/mol]; a missing pathway has no range.
    typical_pathways : tuple of str
        Pathways usually significant between pH 4 and 9.
    rare_pathways : tuple of str
        Pathways seldom significant between pH 4 and 9 for the class.
    source : str
    """

    substance_class: str
    label: str
    ea_ranges_J_per_mol: Mapping[str, tuple[float, float]]
    typical_pathways: tuple[str, ...]
    rare_pathways: tuple[str, ...]
    source: str


#: Class profiles (all ranges from memory, see the module docstring).
CLASS_PROFILES: dict[str, ClassProfile] = {
    "carboxylic_ester": ClassProfile(
        "carboxylic_ester", "carboxylic acid ester",
        {"acid": (55e3, 85e3), "neutral": (50e3, 90e3), "base": (35e3, 70e3)},
        ("base",), (), _MEMORY,
    ),
    "carbamate": ClassProfile(
        "carbamate", "carbamate",
        {"neutral": (60e3, 110e3), "base": (50e3, 110e3)},
        ("base",), ("acid",), _MEMORY,
    ),
    "phosphate_ester": ClassProfile(
        "phosphate_ester", "phosphate or thiophosphate ester",
        {"acid": (55e3, 100e3), "neutral": (60e3, 110e3), "base": (40e3, 90e3)},
        ("neutral", "base"), (), _MEMORY,
    ),
    "alkyl_halide": ClassProfile(
        "alkyl_halide", "alkyl halide",
        {"neutral": (80e3, 120e3), "base": (70e3, 110e3)},
        ("neutral",), ("acid",), _MEMORY,
    ),
    "amide": ClassProfile(
        "amide", "amide",
        {"acid": (60e3, 100e3), "base": (50e3, 100e3)},
        ("acid", "base"), ("neutral",), _MEMORY,
    ),
    "epoxide": ClassProfile(
        "epoxide", "epoxide",
        {"acid": (50e3, 85e3), "neutral": (65e3, 100e3)},
        ("acid", "neutral"), ("base",), _MEMORY,
    ),
    "other": ClassProfile("other", "other / unknown class", {}, (), (), _PROJECT),
}


@dataclass(frozen=True)
class Hint:
    """One plausibility remark.

    Attributes
    ----------
    level : str
        One of :data:`HINT_LEVELS`.
    pathway : str or None
    message : str
    range_J_per_mol : (float, float) or None
        The range compared with [J/mol].
    source : str
    """

    level: str
    pathway: str | None
    message: str
    range_J_per_mol: tuple[float, float] | None
    source: str


@dataclass(frozen=True)
class HintReport:
    """All hints for one fit.

    Attributes
    ----------
    substance_class : str
    hints : tuple of Hint
    ea_J_per_mol : dict
        The activation energies compared, per pathway [J/mol].
    implausible : bool
        True when any hint is ``"implausible"``.
    caution : str
    """

    substance_class: str
    hints: tuple[Hint, ...]
    ea_J_per_mol: dict[str, float]
    implausible: bool
    caution: str = CAUTION_TEXT


def _ea_from_surface(surface: Any) -> tuple[dict[str, float], tuple[str, ...], tuple[str, ...]]:
    names = tuple(getattr(surface, "parameter_names", ()))
    est = getattr(surface, "estimates", None)
    if est is None or not names:
        raise InputError("the surface has no parameter_names/estimates to compare")
    values = dict(zip(names, (float(v) for v in est)))
    t_ref = float(getattr(surface, "reference_temperature_K", 298.15))
    out: dict[str, float] = {}
    for p in getattr(surface, "pathways", ()):
        if f"Ea_{p}_J_per_mol" in values:
            out[p] = values[f"Ea_{p}_J_per_mol"]
        elif f"dH_{p}_J_per_mol" in values:
            # Eyring: Ea = dH + R T at the reference temperature (Laidler, Chemical Kinetics)
            out[p] = values[f"dH_{p}_J_per_mol"] + GAS_CONSTANT_J_PER_MOL_K * t_ref
    return (out, tuple(getattr(surface, "pathways", ())),
            tuple(getattr(surface, "ea_from_prior", ()) or ()))


def class_hints(
    surface: Any = None,
    *,
    substance_class: str = "other",
    ea_J_per_mol: Mapping[str, float] | None = None,
    pathways: tuple[str, ...] | None = None,
) -> HintReport:
    """Compare fitted activation energies and pathways with typical ranges.

    Parameters
    ----------
    surface : SurfaceFit, optional
        Source of the activation energies (``Ea_<p>_J_per_mol``, or Eyring
        ``dH_<p>_J_per_mol`` converted with :math:`E_a = \\Delta H^\\ddagger + RT`)
        and of the pathway set. Pathways whose Ea came from a prior are not
        judged (the prior, not the data, set them).
    substance_class : str
        One of :data:`SUBSTANCE_CLASSES`.
    ea_J_per_mol : dict, optional
        Pathway -> Ea [J/mol], instead of (or overriding) the surface.
    pathways : tuple of str, optional
        The pathway set, instead of the surface's.

    Returns
    -------
    HintReport

    Raises
    ------
    InputError
        Unknown class or pathway, a non-finite Ea, nothing to compare.
    """
    if substance_class not in SUBSTANCE_CLASSES:
        raise InputError(
            f"unknown substance class {substance_class!r}; valid: {', '.join(SUBSTANCE_CLASSES)}"
        )
    ea: dict[str, float] = {}
    path_set: tuple[str, ...] = ()
    prior: tuple[str, ...] = ()
    if surface is not None:
        ea, path_set, prior = _ea_from_surface(surface)
    if ea_J_per_mol is not None:
        for p, v in ea_J_per_mol.items():
            if p not in PATHWAYS:
                raise InputError(f"unknown pathway {p!r}; valid: {', '.join(PATHWAYS)}")
            ea[p] = float(as_float_array(v, f"Ea of the {p} pathway"))
    if pathways is not None:
        bad = [p for p in pathways if p not in PATHWAYS]
        if bad:
            raise InputError(f"unknown pathway {bad[0]!r}; valid: {', '.join(PATHWAYS)}")
        path_set = tuple(pathways)
    if not ea and not path_set:
        raise InputError("give a surface fit, ea_J_per_mol or pathways to compare")

    profile = CLASS_PROFILES[substance_class]
    hints: list[Hint] = []
    lo_all, hi_all = PLAUSIBLE_EA_J_PER_MOL
    for p, value in ea.items():
        if p in prior:
            hints.append(Hint(
                "info", p, f"The {p} Ea ({value / 1e3:.1f} kJ/mol) comes from a prior, not from "
                "the data; it is not judged.", None, _PROJECT,
            ))
            continue
        if not math.isfinite(value):
            raise InputError(f"Ea of the {p} pathway must be finite, got {value!r}")
        if value < lo_all or value > hi_all:
            why = (
                "so weak a temperature dependence suggests a loss other than hydrolysis "
                "(sorption, volatilisation, a diffusion-limited or analytical artefact) or poor "
                "temperature control"
                if value < lo_all else
                "so strong a temperature dependence is rare for hydrolysis; check the "
                "temperature span, solubility changes with temperature and the rate constants "
                "at the extreme temperatures"
            )
            hints.append(Hint(
                "implausible", p,
                f"The {p} Ea of {value / 1e3:.1f} kJ/mol is outside "
                f"{lo_all / 1e3:.0f}-{hi_all / 1e3:.0f} kJ/mol: {why}.",
                PLAUSIBLE_EA_J_PER_MOL, _PROJECT,
            ))
            continue
        rng = profile.ea_ranges_J_per_mol.get(p)
        if rng is not None and not rng[0] <= value <= rng[1]:
            hints.append(Hint(
                "unusual", p,
                f"The {p} Ea of {value / 1e3:.1f} kJ/mol is outside the range usual for a "
                f"{profile.label} ({rng[0] / 1e3:.0f}-{rng[1] / 1e3:.0f} kJ/mol, {_MEMORY}).",
                rng, profile.source,
            ))
        elif rng is not None:
            hints.append(Hint(
                "info", p,
                f"The {p} Ea of {value / 1e3:.1f} kJ/mol is within the range usual for a "
                f"{profile.label} ({rng[0] / 1e3:.0f}-{rng[1] / 1e3:.0f} kJ/mol, {_MEMORY}).",
                rng, profile.source,
            ))
    for p in path_set:
        if p in profile.rare_pathways:
            hints.append(Hint(
                "unusual", p,
                f"A significant {p} pathway is seldom seen for a {profile.label} between pH 4 "
                f"and 9 ({_MEMORY}); check the runs that carry it.", None, profile.source,
            ))
    for p in profile.typical_pathways:
        if path_set and p not in path_set:
            hints.append(Hint(
                "info", p,
                f"The {p} pathway, usually significant for a {profile.label}, is not in the "
                f"fitted model ({_MEMORY}); the measured pH values may not reach where it acts.",
                None, profile.source,
            ))
    order = {lv: i for i, lv in enumerate(HINT_LEVELS)}
    hints.sort(key=lambda h: order[h.level])
    return HintReport(
        substance_class=substance_class, hints=tuple(hints), ea_J_per_mol=dict(ea),
        implausible=any(h.level == "implausible" for h in hints),
    )
