"""Persistence screening of a hydrolysis half-life and study completeness checks.

Two screens, each citing its source:

- :func:`screen_persistence` compares a hydrolysis half-life with published
  water half-life criteria (REACH Annex XIII, Stockholm Convention Annex D),
  after carrying it to the temperature the criterion is assessed at
  (:mod:`kinetics.normalisation`).
- :func:`check_study` compares the runs of a hydrolysis study with the tiered
  design of OECD Test Guideline 111 (*Hydrolysis as a Function of pH*, adopted
  2004): what the study has, what is missing for the claims made, and whether a
  "hydrolytically stable" conclusion is supported.

Hydrolysis is one loss process among several: neither screen is a persistence
assessment, which needs biodegradation and other data and the judgement of
qualified assessors under the applicable guidance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import InputError
from kinetics.normalisation import NORMALISATION_METHODS, NormalisedDT50, normalise_dt50
from kinetics.units import SECONDS_PER_DAY, as_float_array, validate_pH, validate_temperature_K

__all__ = [
    "DAY_S",
    "WATER_TYPES",
    "PERSISTENCE_CAUTION",
    "PersistenceCriterion",
    "PERSISTENCE_CRITERIA",
    "CriterionOutcome",
    "PersistenceScreening",
    "screen_persistence",
    "STUDY_CLAIMS",
    "OECD_111",
    "StudyRun",
    "ClaimAssessment",
    "PreliminaryResult",
    "StudyCheck",
    "check_study",
]

DAY_S = SECONDS_PER_DAY
#: Water types a half-life can be screened for.
WATER_TYPES = ("fresh", "estuarine", "marine")

#: Added to the general caution on every persistence screen.
PERSISTENCE_CAUTION = (
    "Hydrolysis is only one loss process. A long hydrolysis half-life does not by itself show "
    "that a substance is persistent (it may biodegrade), and a short one does not show that "
    "its transformation products are not. A persistence (P/vP) assessment needs "
    "biodegradation and other data and must follow the applicable guidance; defer to that "
    "guidance and to qualified professionals."
)

#: 12 °C [K]: the temperature at which the EU criteria are assessed.
_EU_ASSESSMENT_K = 285.15


@dataclass(frozen=True)
class PersistenceCriterion:
    """A published half-life criterion for water.

    Attributes
    ----------
    key : str
        Identifier.
    framework : str
        The legal text.
    provision : str
        Where in it.
    category : str
        ``"P"``, ``"vP"`` or ``"POP screening"``.
    water_types : tuple of str
        Waters it applies to (from :data:`WATER_TYPES`).
    threshold_d : float
        The half-life must be greater than this to meet the criterion [d].
    assessment_temperature_K : float or None
        Temperature at which the half-life is compared [K]; None when the text
        names none (the half-life is then compared at the temperature given).
    source : str
        Citation, and how the number was checked.
    """

    key: str
    framework: str
    provision: str
    category: str
    water_types: tuple[str, ...]
    threshold_d: float
    assessment_temperature_K: float | None
    source: str


_REACH = (
    "REACH Annex XIII (Regulation (EC) No 1907/2006, as amended by Regulation (EU) No 253/2011)"
)
_REACH_TEMPERATURE = (
    " Compared at 12 °C, the temperature at which ECHA's PBT guidance (Guidance on IR&CSA "
    "Chapter R.11) asks for water half-lives to be expressed (from memory, not checked "
    "against the guidance text)."
)
_STOCKHOLM = "Stockholm Convention on Persistent Organic Pollutants, Annex D"

#: The criteria screened, with their sources. Threshold values were checked
#: against published reproductions of the legal texts.
PERSISTENCE_CRITERIA: tuple[PersistenceCriterion, ...] = (
    PersistenceCriterion(
        key="reach_P_fresh",
        framework=_REACH,
        provision="Annex XIII section 1.1.1(b)",
        category="P",
        water_types=("fresh", "estuarine"),
        threshold_d=40.0,
        assessment_temperature_K=_EU_ASSESSMENT_K,
        source=_REACH + ", 1.1.1(b): half-life in fresh or estuarine water > 40 days "
        "(value checked against the published Annex text)." + _REACH_TEMPERATURE,
    ),
    PersistenceCriterion(
        key="reach_P_marine",
        framework=_REACH,
        provision="Annex XIII section 1.1.1(a)",
        category="P",
        water_types=("marine",),
        threshold_d=60.0,
        assessment_temperature_K=_EU_ASSESSMENT_K,
        source=_REACH + ", 1.1.1(a): half-life in marine water > 60 days "
        "(value checked against the published Annex text)." + _REACH_TEMPERATURE,
    ),
    PersistenceCriterion(
        key="reach_vP_water",
        framework=_REACH,
        provision="Annex XIII section 1.2.1(a)",
        category="vP",
        water_types=("fresh", "estuarine", "marine"),
        threshold_d=60.0,
        assessment_temperature_K=_EU_ASSESSMENT_K,
        source=_REACH + ", 1.2.1(a): half-life in marine, fresh or estuarine water > 60 days "
        "(value checked against published reproductions of the Annex; the section number "
        "from memory)." + _REACH_TEMPERATURE,
    ),
    PersistenceCriterion(
        key="stockholm_annex_d_water",
        framework=_STOCKHOLM,
        provision="Annex D paragraph 1(b)(i)",
        category="POP screening",
        water_types=("fresh", "estuarine", "marine"),
        threshold_d=2.0 * 365.25 / 12.0,
        assessment_temperature_K=None,
        source=_STOCKHOLM + ", paragraph 1(b)(i): half-life in water greater than two months "
        "(checked against the published Convention text). The Convention names no "
        "temperature and no length of a month: two months are taken as 2/12 of a 365.25-day "
        "year, 60.9 days (a project choice), and the half-life is compared at the "
        "temperature given.",
    ),
)


@dataclass(frozen=True)
class CriterionOutcome:
    """The comparison of one half-life with one criterion.

    Attributes
    ----------
    criterion : PersistenceCriterion
    half_life_compared_d : float
        The half-life compared, at ``compared_at_temperature_K`` [d].
    half_life_low_d, half_life_high_d : float or None
        Its interval, when an interval of the input half-life was given [d].
    compared_at_temperature_K : float
    exceeds_threshold : bool
        True when the half-life is greater than the threshold.
    outcome : str
        ``"hydrolysis slower than criterion"``, ``"hydrolysis faster than
        criterion"`` or ``"interval spans the criterion"``.
    meaning : str
        What the outcome does and does not say.
    """

    criterion: PersistenceCriterion
    half_life_compared_d: float
    half_life_low_d: float | None
    half_life_high_d: float | None
    compared_at_temperature_K: float
    exceeds_threshold: bool
    outcome: str
    meaning: str


@dataclass(frozen=True)
class PersistenceScreening:
    """Result of :func:`screen_persistence`.

    Attributes
    ----------
    dt50_s : float
        The hydrolysis half-life given [s].
    temperature_K : float
        Its temperature [K].
    water : str
    normalisations : tuple of NormalisedDT50
        How the half-life was carried to each assessment temperature.
    outcomes : tuple of CriterionOutcome
    summary : str
    notes : tuple of str
    caution : str
        :data:`kinetics.caution.CAUTION_TEXT` followed by :data:`PERSISTENCE_CAUTION`.
    """

    dt50_s: float
    temperature_K: float
    water: str
    normalisations: tuple[NormalisedDT50, ...]
    outcomes: tuple[CriterionOutcome, ...]
    summary: str
    notes: tuple[str, ...] = ()
    caution: str = CAUTION_TEXT + " " + PERSISTENCE_CAUTION

    def interval(self, level: float = 0.95) -> dict[str, tuple[float, float]]:
        """Interval of the compared half-life per criterion key [d].

        Available with ``normalisation="fitted"`` (the uncertainty of the
        temperature factor at ``level``); otherwise only if an input interval
        was given, which is then returned as it was normalised.

        Raises
        ------
        InputError
            If no interval is available.
        """
        out: dict[str, tuple[float, float]] = {}
        for o, n in zip(self.outcomes, self._norm_by_outcome()):
            if n is not None and n.se_ln_factor is not None:
                ci = n.interval(level)
                out[o.criterion.key] = (ci.dt50_low_s / DAY_S, ci.dt50_high_s / DAY_S)
            elif o.half_life_low_d is not None and o.half_life_high_d is not None:
                out[o.criterion.key] = (o.half_life_low_d, o.half_life_high_d)
        if not out:
            raise InputError(
                "no interval: give dt50_interval_s or use normalisation='fitted' with a surface"
            )
        return out

    def _norm_by_outcome(self) -> list[NormalisedDT50 | None]:
        by_t = {round(n.reference_temperature_K, 6): n for n in self.normalisations}
        return [by_t.get(round(o.compared_at_temperature_K, 6)) for o in self.outcomes]


def _scalar(value: Any, name: str) -> float:
    arr = as_float_array(value, name)
    if arr.ndim != 0:
        raise InputError(f"{name} must be a single number, got {value!r}")
    return float(arr)


def screen_persistence(
    dt50_s: float,
    temperature_K: float,
    *,
    water: str = "fresh",
    normalisation: str = "echa_r16",
    surface: Any = None,
    pH: float | None = None,
    dt50_interval_s: tuple[float, float] | None = None,
    reach_temperature_K: float = _EU_ASSESSMENT_K,
) -> PersistenceScreening:
    """Compare a hydrolysis half-life with published water persistence criteria.

    For each criterion of :data:`PERSISTENCE_CRITERIA` that applies to ``water``
    the half-life is carried to the criterion's assessment temperature with
    :func:`kinetics.normalisation.normalise_dt50` (REACH: 12 °C) or compared as
    given (Stockholm Convention: no temperature named), and tested against

    .. math:: DT_{50}(T_\\mathrm{assess}) > \\text{threshold}

    (a criterion is met when the half-life is *greater* than the threshold; REACH
    Annex XIII sections 1.1.1 and 1.2.1; Stockholm Convention Annex D 1(b)(i)).

    Parameters
    ----------
    dt50_s : float
        Hydrolysis half-life [s], > 0 (e.g. the DT50 of a scenario or a
        prediction at the water's pH).
    temperature_K : float
        Temperature of that half-life [K].
    water : {"fresh", "estuarine", "marine"}
    normalisation : {"fitted", "efsa_2008", "echa_r16"}
        How the half-life is carried to 12 °C; ``"fitted"`` needs ``surface`` and ``pH``.
    surface : SurfaceFit, optional
    pH : float, optional
    dt50_interval_s : (float, float), optional
        An interval of the input half-life [s]; carried with the same factor, it
        shows when the decision is not clear-cut.
    reach_temperature_K : float
        Assessment temperature of the REACH criteria [K], default 285.15 (12 °C);
        change it only if the applicable guidance asks for another.

    Returns
    -------
    PersistenceScreening

    Raises
    ------
    InputError
        Unknown water type or method, non-positive half-life, bad interval.
    """
    if water not in WATER_TYPES:
        raise InputError(f"unknown water type {water!r}; valid: {', '.join(WATER_TYPES)}")
    if normalisation not in NORMALISATION_METHODS:
        raise InputError(
            f"unknown normalisation method {normalisation!r}; valid: "
            f"{', '.join(NORMALISATION_METHODS)}"
        )
    dt50 = _scalar(dt50_s, "dt50_s")
    if dt50 <= 0:
        raise InputError(f"dt50_s must be > 0, got {dt50_s!r}")
    t_given = float(validate_temperature_K(_scalar(temperature_K, "temperature_K")))
    t_reach = float(validate_temperature_K(_scalar(reach_temperature_K, "reach_temperature_K")))
    interval = None
    if dt50_interval_s is not None:
        try:
            lo, hi = (float(x) for x in dt50_interval_s)
        except (TypeError, ValueError) as exc:
            raise InputError(
                f"dt50_interval_s must be a pair (low, high) [s], got {dt50_interval_s!r}"
            ) from exc
        if not (0 < lo <= dt50 <= hi) or not (math.isfinite(lo) and math.isfinite(hi)):
            raise InputError(
                f"dt50_interval_s ({lo!r}, {hi!r}) must satisfy 0 < low <= dt50_s ({dt50!r}) "
                "<= high"
            )
        interval = (lo, hi)

    norms: dict[float, NormalisedDT50] = {}
    outcomes: list[CriterionOutcome] = []
    notes: list[str] = []
    for crit in PERSISTENCE_CRITERIA:
        if water not in crit.water_types:
            continue
        t_assess = t_given if crit.assessment_temperature_K is None else t_reach
        if t_assess not in norms:
            norms[t_assess] = normalise_dt50(
                dt50, t_given, t_assess, method=normalisation, surface=surface, pH=pH
            )
        n = norms[t_assess]
        value_d = n.dt50_reference_s / DAY_S
        low_d = high_d = None
        if interval is not None:
            low_d, high_d = interval[0] * n.factor / DAY_S, interval[1] * n.factor / DAY_S
        exceeds = value_d > crit.threshold_d
        if low_d is not None and low_d <= crit.threshold_d < high_d:
            outcome = "interval spans the criterion"
            meaning = (
                f"The half-life interval ({low_d:.3g}-{high_d:.3g} d) contains the "
                f"{crit.threshold_d:.3g}-day threshold: hydrolysis data alone cannot place the "
                "substance on either side."
            )
        elif exceeds:
            outcome = "hydrolysis slower than criterion"
            meaning = (
                f"Hydrolysis alone removes the substance more slowly than the "
                f"{crit.category} criterion ({crit.threshold_d:.3g} d): it cannot rule "
                "persistence out; biodegradation and other data decide."
            )
        else:
            outcome = "hydrolysis faster than criterion"
            meaning = (
                f"Hydrolysis alone is faster than the {crit.category} criterion "
                f"({crit.threshold_d:.3g} d) for the parent substance; its transformation "
                "products need their own assessment."
            )
        outcomes.append(CriterionOutcome(
            criterion=crit, half_life_compared_d=value_d, half_life_low_d=low_d,
            half_life_high_d=high_d, compared_at_temperature_K=t_assess,
            exceeds_threshold=exceeds, outcome=outcome, meaning=meaning,
        ))
    if water == "marine" and abs(t_reach - _EU_ASSESSMENT_K) < 1e-9:
        notes.append(
            "Some guidance uses a lower temperature for marine water (9 °C, from memory); "
            "set reach_temperature_K if the applicable guidance asks for it."
        )
    for n in norms.values():
        notes.extend(n.notes)
    slower = [o.criterion.key for o in outcomes if o.outcome == "hydrolysis slower than criterion"]
    spans = [o.criterion.key for o in outcomes if o.outcome == "interval spans the criterion"]
    if spans:
        summary = "Hydrolysis data are not conclusive for: " + ", ".join(spans) + "."
    elif slower:
        summary = (
            "Hydrolysis alone is slower than: " + ", ".join(slower)
            + ". Persistence cannot be excluded on hydrolysis; a P/vP assessment needs "
            "biodegradation data."
        )
    else:
        summary = (
            "Hydrolysis alone is faster than every criterion screened; transformation products "
            "and other compartments still need assessment."
        )
    return PersistenceScreening(
        dt50_s=dt50, temperature_K=t_given, water=water,
        normalisations=tuple(norms.values()), outcomes=tuple(outcomes), summary=summary,
        notes=tuple(dict.fromkeys(notes)),
    )


# --------------------------------------------------------------------------- study check

#: Claims a study can be checked for.
STUDY_CLAIMS = ("hydrolytically_stable", "rate_constants", "activation_energy", "ph_rate_profile")

#: The parts of OECD Test Guideline 111 used here (paraphrased, with where they come from).
OECD_111 = {
    "citation": "OECD Test Guideline 111, Hydrolysis as a Function of pH (adopted 2004)",
    "tier_1": (
        "Tier 1, preliminary test: 5 days at 50 ± 0.5 °C at pH 4.0, 7.0 and 9.0; less than "
        "10 % hydrolysis after 5 days means the substance is regarded as hydrolytically stable "
        "and normally needs no further testing"
    ),
    "tier_2": (
        "Tier 2, hydrolysis of unstable substances: at each pH where Tier 1 showed instability, "
        "tests at further temperatures, each run until 90 % hydrolysis or for 30 days, "
        "whichever comes first (three temperatures in total, 50 °C and two others, as "
        "laboratories usually describe the design; from memory of the guideline text)"
    ),
    "tier_3": "Tier 3: identification of hydrolysis products (not checked here)",
}

_PRELIM_PH = (4.0, 7.0, 9.0)
_PRELIM_T_K = 323.15
_PRELIM_T_TOL_K = 0.5  # the guideline's ± 0.5 °C
_PRELIM_DURATION_S = 5 * DAY_S
_STABLE_LOSS_PERCENT = 10.0
_HIGHER_TIER_DURATION_S = 30 * DAY_S
_HIGHER_TIER_LOSS_PERCENT = 90.0
# project choices (common practice, no source):
_PH_TOL = 0.2  # a buffer within 0.2 of the nominal pH counts as that pH
_T_LEVEL_TOL_K = 0.5  # runs within 0.5 K are one temperature level
_MIN_LOSS_FOR_RATE_PERCENT = 20.0  # less decline than this gives a poorly defined k
_MIN_T_SPAN_K = 20.0  # an Ea from a narrower span is poorly defined


@dataclass(frozen=True)
class StudyRun:
    """One run of a hydrolysis study.

    Parameters
    ----------
    temperature_K : float
        Incubation temperature [K].
    pH : float
        Buffer pH.
    duration_s : float
        Length of the run [s], > 0.
    percent_loss : float
        Loss of the test substance at the end of the run [%], -20 to 100
        (small negative values are analytical scatter and count as no loss).
    label : str
        Name of the run, shown in messages.
    """

    temperature_K: float
    pH: float
    duration_s: float
    percent_loss: float
    label: str = ""

    def __post_init__(self) -> None:
        name = f"run {self.label!r}" if self.label else "run"
        t = float(validate_temperature_K(_scalar(self.temperature_K, f"{name} temperature_K")))
        ph = float(validate_pH(_scalar(self.pH, f"{name} pH")))
        d = _scalar(self.duration_s, f"{name} duration_s")
        loss = _scalar(self.percent_loss, f"{name} percent_loss")
        if d <= 0:
            raise InputError(f"{name}: duration_s must be > 0, got {self.duration_s!r}")
        if not -20.0 <= loss <= 100.0:
            raise InputError(
                f"{name}: percent_loss must be between -20 and 100 %, got {self.percent_loss!r}"
            )
        object.__setattr__(self, "temperature_K", t)
        object.__setattr__(self, "pH", ph)
        object.__setattr__(self, "duration_s", d)
        object.__setattr__(self, "percent_loss", loss)

    def describe(self) -> str:
        """Short description: label, temperature in °C, pH, days, loss."""
        lbl = f"{self.label}: " if self.label else ""
        return (
            f"{lbl}{self.temperature_K - 273.15:.1f} °C, pH {self.pH:g}, "
            f"{self.duration_s / DAY_S:.3g} d, {self.percent_loss:.3g} % loss"
        )


@dataclass(frozen=True)
class PreliminaryResult:
    """Tier 1 status at one nominal pH.

    ``status`` is ``"stable"`` (< 10 % loss after >= 5 days at 50 °C),
    ``"unstable"`` (>= 10 % loss), ``"inconclusive"`` (only shorter runs with
    < 10 % loss) or ``"not tested"``.
    """

    pH: float
    status: str
    evidence: tuple[str, ...]


@dataclass(frozen=True)
class ClaimAssessment:
    """Whether the study supports one claim, and why."""

    claim: str
    supported: bool
    reasons: tuple[str, ...]
    missing: tuple[str, ...]


@dataclass(frozen=True)
class StudyCheck:
    """Result of :func:`check_study`.

    Attributes
    ----------
    has : tuple of str
        What the study contains.
    missing : tuple of str
        What is missing for the claims checked.
    preliminary : tuple of PreliminaryResult
        Tier 1 status at pH 4, 7 and 9.
    unstable_pH : tuple of float
        Nominal pH values found unstable (Tier 2 needed there).
    temperatures_by_pH : dict
        Distinct temperature levels [K] tested at each nominal pH (rounded
        measured pH when not one of 4, 7, 9).
    claims : dict of str to ClaimAssessment
    stable_conclusion_supported : bool
        True when Tier 1 shows < 10 % loss at all three pH values.
    guideline : dict
        :data:`OECD_111`.
    caution : str
    """

    has: tuple[str, ...]
    missing: tuple[str, ...]
    preliminary: tuple[PreliminaryResult, ...]
    unstable_pH: tuple[float, ...]
    temperatures_by_pH: dict[float, tuple[float, ...]]
    claims: dict[str, ClaimAssessment]
    stable_conclusion_supported: bool
    guideline: Mapping[str, str] = field(default_factory=lambda: dict(OECD_111))
    caution: str = CAUTION_TEXT


def _levels(values: Sequence[float], tol: float) -> list[float]:
    """Group sorted values into levels closer than ``tol``; return level means."""
    out: list[list[float]] = []
    for v in sorted(values):
        if out and v - out[-1][-1] <= tol:
            out[-1].append(v)
        else:
            out.append([v])
    return [float(np.mean(g)) for g in out]


def _nominal_pH(ph: float) -> float:
    for p in _PRELIM_PH:
        if abs(ph - p) <= _PH_TOL:
            return p
    return round(ph, 1)


def _preliminary(runs: Sequence[StudyRun], ph: float) -> PreliminaryResult:
    at_ph = [r for r in runs if abs(r.pH - ph) <= _PH_TOL]
    at_50 = [r for r in at_ph if abs(r.temperature_K - _PRELIM_T_K) <= _PRELIM_T_TOL_K]
    evidence: list[str] = []
    unstable = [r for r in at_50 if r.percent_loss >= _STABLE_LOSS_PERCENT]
    # >= 10 % loss within 5 days at or below 50 °C implies >= 10 % at 50 °C
    # (hydrolysis speeds up with temperature; common practice, no source)
    cooler = [
        r for r in at_ph
        if r.temperature_K < _PRELIM_T_K - _PRELIM_T_TOL_K
        and r.duration_s <= _PRELIM_DURATION_S * (1 + 1e-9)
        and r.percent_loss >= _STABLE_LOSS_PERCENT
    ]
    if unstable or cooler:
        for r in unstable:
            evidence.append(f"{r.describe()}: >= 10 % loss at 50 °C")
        for r in cooler:
            evidence.append(
                f"{r.describe()}: >= 10 % loss within 5 days below 50 °C, so also at 50 °C"
            )
        return PreliminaryResult(ph, "unstable", tuple(evidence))
    full = [r for r in at_50 if r.duration_s >= _PRELIM_DURATION_S * (1 - 1e-9)]
    if full:
        for r in full:
            evidence.append(f"{r.describe()}: < 10 % loss after >= 5 days at 50 °C")
        return PreliminaryResult(ph, "stable", tuple(evidence))
    if at_50:
        for r in at_50:
            evidence.append(f"{r.describe()}: < 10 % loss but shorter than 5 days")
        return PreliminaryResult(ph, "inconclusive", tuple(evidence))
    return PreliminaryResult(ph, "not tested", ("no run at 50 ± 0.5 °C at this pH",))


def check_study(
    runs: Sequence[StudyRun | Mapping[str, Any]],
    *,
    claims: Sequence[str] = ("hydrolytically_stable",),
) -> StudyCheck:
    """Check a hydrolysis study against the tiered design of OECD TG 111.

    Rules (guideline values from OECD Test Guideline 111 (2004), Tier 1 and
    Tier 2, paraphrased in :data:`OECD_111`; the rest are project choices,
    common practice without a source):

    - a run counts for pH 4, 7 or 9 when its pH is within 0.2 of it, and for
      50 °C when within 0.5 K of 323.15 K;
    - Tier 1 at one pH is *stable* with a run of >= 5 days at 50 °C and < 10 %
      loss, *unstable* with >= 10 % loss at 50 °C (or within 5 days at a lower
      temperature), *inconclusive* with only shorter runs below 10 % loss;
    - ``hydrolytically_stable`` needs *stable* at all three pH values;
    - ``rate_constants`` needs, at every unstable pH (or every pH tested if none
      is known unstable), a run with >= 20 % loss, and notes Tier 2 runs that
      ended before 90 % loss and before 30 days;
    - ``activation_energy`` needs >= 2 temperature levels at a pH (the minimum
      for a slope), recommends 3 (Tier 2) spanning >= 20 K, all with >= 20 % loss;
    - ``ph_rate_profile`` needs >= 3 pH levels (acid, neutral and base pathways
      are three unknowns) with >= 20 % loss.

    Parameters
    ----------
    runs : sequence of StudyRun or dict
        The runs (dicts with the :class:`StudyRun` fields).
    claims : sequence of str
        Claims to check, from :data:`STUDY_CLAIMS`.

    Returns
    -------
    StudyCheck

    Raises
    ------
    InputError
        No runs, an unknown claim or a bad run.
    """
    claims = tuple(claims)
    bad = [c for c in claims if c not in STUDY_CLAIMS]
    if bad:
        raise InputError(f"unknown study claim {bad[0]!r}; valid: {', '.join(STUDY_CLAIMS)}")
    if not claims:
        raise InputError(f"name at least one claim to check; valid: {', '.join(STUDY_CLAIMS)}")
    parsed: list[StudyRun] = []
    for i, r in enumerate(runs):
        if isinstance(r, StudyRun):
            parsed.append(r)
        elif isinstance(r, Mapping):
            unknown = set(r) - {"temperature_K", "pH", "duration_s", "percent_loss", "label"}
            if unknown:
                raise InputError(f"run {i}: unknown field(s) {', '.join(sorted(unknown))}")
            try:
                parsed.append(StudyRun(**r))
            except TypeError as exc:
                raise InputError(
                    f"run {i} needs temperature_K, pH, duration_s and percent_loss"
                ) from exc
        else:
            raise InputError(f"run {i} must be a StudyRun or a dict, got {r!r}")
    if not parsed:
        raise InputError("a study check needs at least one run")

    prelim = tuple(_preliminary(parsed, ph) for ph in _PRELIM_PH)
    unstable = tuple(p.pH for p in prelim if p.status == "unstable")
    by_ph: dict[float, list[StudyRun]] = {}
    for r in parsed:
        by_ph.setdefault(_nominal_pH(r.pH), []).append(r)
    temps = {
        ph: tuple(_levels([r.temperature_K for r in rs], _T_LEVEL_TOL_K))
        for ph, rs in sorted(by_ph.items())
    }

    has = [f"{len(parsed)} run(s) at pH level(s) " + ", ".join(f"{p:g}" for p in temps)]
    for ph, ts in temps.items():
        has.append(
            f"pH {ph:g}: " + ", ".join(f"{t - 273.15:.1f} °C" for t in ts)
        )
    for p in prelim:
        has.append(f"Tier 1 at pH {p.pH:g}: {p.status}")

    assessments: dict[str, ClaimAssessment] = {}
    for claim in claims:
        if claim == "hydrolytically_stable":
            assessments[claim] = _claim_stable(prelim)
        elif claim == "rate_constants":
            assessments[claim] = _claim_rates(by_ph, unstable)
        elif claim == "activation_energy":
            assessments[claim] = _claim_ea(by_ph, unstable)
        else:
            assessments[claim] = _claim_profile(by_ph)
    missing: list[str] = []
    for a in assessments.values():
        for m in a.missing:
            if m not in missing:
                missing.append(m)
    return StudyCheck(
        has=tuple(has), missing=tuple(missing), preliminary=prelim, unstable_pH=unstable,
        temperatures_by_pH=temps, claims=assessments,
        stable_conclusion_supported=all(p.status == "stable" for p in prelim),
    )


def _claim_stable(prelim: Sequence[PreliminaryResult]) -> ClaimAssessment:
    reasons: list[str] = []
    missing: list[str] = []
    for p in prelim:
        if p.status == "stable":
            reasons.append(f"pH {p.pH:g}: < 10 % loss after 5 days at 50 °C")
        elif p.status == "unstable":
            reasons.append(f"pH {p.pH:g}: >= 10 % loss, so not hydrolytically stable at this pH")
            missing.append(
                f"pH {p.pH:g} is unstable: Tier 2 tests at further temperatures are needed "
                "instead of a stability claim"
            )
        elif p.status == "inconclusive":
            reasons.append(f"pH {p.pH:g}: < 10 % loss but the run was shorter than 5 days")
            missing.append(f"a 5-day run at 50 °C at pH {p.pH:g}")
        else:
            reasons.append(f"pH {p.pH:g}: no Tier 1 run")
            missing.append(f"a 5-day Tier 1 run at 50 °C at pH {p.pH:g}")
    supported = all(p.status == "stable" for p in prelim)
    if supported:
        reasons.append(
            "Tier 1 criterion of OECD TG 111 met at pH 4, 7 and 9: hydrolytically stable "
            "under the guideline's definition (which says nothing about other loss processes)"
        )
    return ClaimAssessment("hydrolytically_stable", supported, tuple(reasons), tuple(missing))


def _decline_runs(rs: Sequence[StudyRun]) -> list[StudyRun]:
    return [r for r in rs if r.percent_loss >= _MIN_LOSS_FOR_RATE_PERCENT]


def _claim_rates(
    by_ph: Mapping[float, list[StudyRun]], unstable: tuple[float, ...]
) -> ClaimAssessment:
    targets = list(unstable) or list(by_ph)
    reasons: list[str] = []
    missing: list[str] = []
    for ph in targets:
        rs = by_ph.get(ph, [])
        good = _decline_runs(rs)
        if good:
            reasons.append(f"pH {ph:g}: {len(good)} run(s) with >= 20 % loss give a rate constant")
        else:
            missing.append(
                f"a run at pH {ph:g} with >= 20 % loss (less decline gives a poorly defined k)"
            )
        for r in rs:
            tier1 = abs(r.temperature_K - _PRELIM_T_K) <= _PRELIM_T_TOL_K
            if tier1 and r.duration_s <= 5.01 * DAY_S:
                continue  # the Tier 1 run itself
            short = r.duration_s < _HIGHER_TIER_DURATION_S
            if r.percent_loss < _HIGHER_TIER_LOSS_PERCENT and short:
                reasons.append(
                    f"{r.describe()}: ended before 90 % loss and before 30 days (OECD TG 111 "
                    "Tier 2 runs continue until one of the two)"
                )
    supported = not missing
    return ClaimAssessment("rate_constants", supported, tuple(reasons), tuple(missing))


def _claim_ea(
    by_ph: Mapping[float, list[StudyRun]], unstable: tuple[float, ...]
) -> ClaimAssessment:
    targets = list(unstable) or [ph for ph, rs in by_ph.items() if _decline_runs(rs)]
    reasons: list[str] = []
    missing: list[str] = []
    if not targets:
        missing.append(
            "runs with >= 20 % loss at >= 2 temperatures at one pH (no pH shows enough decline)"
        )
    for ph in targets:
        levels = _levels([r.temperature_K for r in _decline_runs(by_ph.get(ph, []))],
                         _T_LEVEL_TOL_K)
        span = (max(levels) - min(levels)) if levels else 0.0
        if len(levels) < 2:
            missing.append(
                f"an Ea estimate at pH {ph:g} needs >= 2 temperatures with >= 20 % loss "
                f"(has {len(levels)})"
            )
            continue
        reasons.append(
            f"pH {ph:g}: {len(levels)} temperature level(s) spanning {span:.1f} K"
        )
        if len(levels) < 3:
            reasons.append(
                f"pH {ph:g}: two temperatures give an Ea without any check of Arrhenius "
                "behaviour; OECD TG 111 Tier 2 uses three"
            )
        if span < _MIN_T_SPAN_K:
            reasons.append(
                f"pH {ph:g}: the temperatures span only {span:.1f} K; an Ea from less than "
                f"{_MIN_T_SPAN_K:.0f} K is poorly defined"
            )
    return ClaimAssessment("activation_energy", not missing, tuple(reasons), tuple(missing))


def _claim_profile(by_ph: Mapping[float, list[StudyRun]]) -> ClaimAssessment:
    with_decline = sorted(ph for ph, rs in by_ph.items() if _decline_runs(rs))
    all_ph = _levels(list(by_ph), 0.5)
    reasons = [f"pH levels tested: {', '.join(f'{p:g}' for p in all_ph)}"]
    missing: list[str] = []
    if len(_levels(with_decline, 0.5)) < 3:
        missing.append(
            "a pH-rate profile (acid, neutral and base pathways) needs >= 3 pH levels with "
            f">= 20 % loss (has {len(_levels(with_decline, 0.5))})"
        )
    return ClaimAssessment("ph_rate_profile", not missing, tuple(reasons), tuple(missing))
