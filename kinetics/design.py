"""Study-design advice: where and when to sample so a field DT50 meets a target precision.

Before a hydrolysis study starts, the question is which temperatures and pH values to
incubate at, how many vessels to put in each, and when to sample them, so that the
DT50 predicted at the field condition that matters (for example 12 °C, pH 8) is known
within a chosen factor. This module answers it with the Fisher information of the same
two-stage statistical model that :mod:`kinetics` fits:

1. each vessel (one run at one temperature and pH) is an SFO series; the Fisher
   information of its sampling times gives the variance of its fitted ln k
   (:func:`sfo_information`, :func:`sfo_se_ln_k`);
2. the runs' ln k values are fitted by the pH-temperature surface of
   :mod:`kinetics.surface`; the information on the surface parameters is
   :math:`I = J^T W J + P` with :math:`J = \\partial \\ln k_{obs} / \\partial \\theta` at the
   design points, :math:`W = 1/(\\mathrm{var}_{run} + \\tau^2)` (:math:`\\tau` = between-run
   scatter of ln k) and :math:`P` the prior precision on activation energies that the
   surface fit uses when the design leaves a pathway at one temperature.

The criterion is c-optimality for the log rate at the field condition,
:math:`\\sigma^2 = c^T I^{-1} c` with
:math:`c = \\partial \\ln k(\\text{field}) / \\partial \\theta` (minimax over several
field conditions), and the 95 % interval on DT50 has the width ratio
:math:`\\exp(2 q \\sigma)`, with q the Student-t quantile at the degrees of freedom
the surface fit will have (runs minus parameters estimated from the data), as
:func:`kinetics.prediction.predict` uses it (the normal quantile z for many runs).
Designs are searched over the laboratory's allowed temperature × pH cells with a fixed
number of vessels (:func:`recommend_design`): exhaustively when the allocations are few
enough, otherwise by a greedy start and one-vessel exchanges. A design is admissible only
if the surface fit can use it as it stands: enough pH levels for the pathways, at least
one degree of freedom, every pathway determined (standard error of its ln k at most 0.3
somewhere in the allowed temperature range) and, by default, every activation energy
given by the data rather than by the fit's generic prior.

The Fisher information is the linear approximation; :func:`simulate_design` checks a
design by simulating whole studies and fitting them with :mod:`kinetics`.

Entry points: :func:`recommend_design`, :func:`evaluate_design`, :func:`naive_design`,
:func:`simulate_design`, :func:`preliminary_test_advice`, :func:`sampling_times_s`.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import DataError, InputError, KineticsError
from kinetics.series import ERROR_MODELS as _SERIES_ERROR_MODELS
from kinetics.surface import (
    DEFAULT_EA_PRIOR_SD_J_PER_MOL,
    EFSA_DEFAULT_EA_J_PER_MOL,
    PATHWAYS,
    PH_LEVEL_TOLERANCE,
    TEMPERATURE_LEVEL_TOLERANCE_K,
    eyring_ln_k,
)
from kinetics.surface import _MIN_CONTRIBUTION, _logsumexp as _surface_logsumexp
from kinetics.surface import GAS_CONSTANT_J_PER_MOL_K as _R_SURFACE
from kinetics.units import validate_pH, validate_temperature_K

__all__ = [
    "DESIGN_PATHWAYS",
    "ERROR_MODELS",
    "CRITERIA",
    "EA_PRIOR_CHOICES",
    "NAIVE_SAMPLING",
    "GAS_CONSTANT_J_PER_MOL_K",
    "PathwayGuess",
    "KineticsPrior",
    "FieldCondition",
    "LabConstraints",
    "DesignRun",
    "DesignEvaluation",
    "PreliminaryTestAdvice",
    "DesignRecommendation",
    "SimulationSummary",
    "sfo_information",
    "sfo_se_ln_k",
    "sampling_times_s",
    "evaluate_design",
    "naive_design",
    "recommend_design",
    "preliminary_test_advice",
    "simulate_design",
]

#: Pathways of the rate surface (those of :data:`kinetics.surface.PATHWAYS`).
DESIGN_PATHWAYS = PATHWAYS
#: Error models of a concentration series: :data:`kinetics.series.ERROR_MODELS`.
ERROR_MODELS = _SERIES_ERROR_MODELS
#: Design criteria: "local" at the prior guess, or "prior_median" (median over prior draws).
CRITERIA = ("local", "prior_median")
#: Sampling of the naive comparison design.
NAIVE_SAMPLING = ("equal_over_duration", "rule")
#: When a design may leave an activation energy to the fit's prior.
EA_PRIOR_CHOICES = ("if_needed", "always", "never")

#: Molar gas constant [J/(mol K)] (CODATA 2018, exact), the surface module's value.
GAS_CONSTANT_J_PER_MOL_K = _R_SURFACE

# Scale of an activation energy in the internal, well-conditioned parameterisation [J/mol].
_EA_SCALE_J_PER_MOL = 1.0e4
# A cell whose run would give ln k with a standard error above this is not offered to the
# search: its fitted k could be zero or negative in some studies (at 0.3 in about 1 in
# 3000: a normal tail beyond 1/0.3 standard deviations), where
# the linearisation behind the Fisher information no longer holds (common practice, no
# source). Cells with a small decline but a standard error below it stay candidates: the
# Fisher information already gives them the low weight their small decline deserves.
_MAX_RUN_SE_LN_K = 0.3
# Fraction of the initial concentration left when the last sample is taken (90 % decline).
_END_FRACTION_REMAINING = 0.1
# A design must determine every pathway of the model, not only the combination that matters
# at the field: if the standard error of ln k_p at the pathway's best-determined allowed
# temperature exceeds this, the fitted constant of that pathway runs to zero in some
# studies and the surface fit with a fixed pathway set fails (same reasoning and value as
# for a run, common practice, no source).
_MAX_PATHWAY_SE_LN_K = 0.3
# A pathway carrying less than _MIN_CONTRIBUTION of k_obs in every run cannot be fitted
# (the identifiability rule of kinetics.surface.fit_surface, imported from there).
# A simulated run whose fitted ln k has a standard error above this is reported as "no
# measurable decline" and left out of the surface fit, as a laboratory would report it
# (common practice, no source).
_MAX_REPORTED_SE_LN_K = 1.0
# Preliminary test conditions of OECD Test Guideline 111 (2004): 50 °C, 5 days, pH 4/7/9.
_PRELIM_TEMPERATURE_K = 323.15
_PRELIM_DURATION_S = 5.0 * 86400.0
_PRELIM_PH = (4.0, 7.0, 9.0)
_PRELIM_MAX_LOSS = 0.10
from kinetics.units import SECONDS_PER_DAY as _SECONDS_PER_DAY  # noqa: E402


# ---------------------------------------------------------------------------------------
# small utilities
# ---------------------------------------------------------------------------------------


def _finite(value: Any, name: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number, got {value!r}") from None
    if not math.isfinite(x):
        raise InputError(f"{name} must be finite, got {value!r}")
    return x


def _positive(value: Any, name: str) -> float:
    x = _finite(value, name)
    if x <= 0.0:
        raise InputError(f"{name} must be positive, got {value!r}")
    return x


def _count(value: Any, name: str, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise InputError(f"{name} must be a whole number, got {value!r}")
    if int(value) < minimum:
        raise InputError(f"{name} must be at least {minimum}, got {value!r}")
    return int(value)


def _choice(value: Any, name: str, valid: tuple[str, ...]) -> str:
    if value not in valid:
        raise InputError(f"unknown {name} {value!r}; valid choices are {', '.join(valid)}")
    return str(value)


def _quantile(level: float) -> float:
    lv = _finite(level, "level")
    if not 0.0 < lv < 1.0:
        raise InputError(f"level must lie strictly between 0 and 1, got {level!r}")
    return float(stats.norm.ppf(0.5 * (1.0 + lv)))


def _celsius(temperature_K: float) -> str:
    return f"{temperature_K - 273.15:.1f} °C"


def _fmt_duration(seconds: float) -> str:
    if seconds >= 2 * _SECONDS_PER_DAY:
        return f"{seconds / _SECONDS_PER_DAY:.1f} d"
    if seconds >= 2 * 3600.0:
        return f"{seconds / 3600.0:.1f} h"
    return f"{seconds / 60.0:.0f} min"


def _acid_base_molar(
    pH: np.ndarray, temperature_K: np.ndarray, ionic_strength_M: np.ndarray, salinity: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    from kinetics.water import hydronium_hydroxide_molar

    h, oh = hydronium_hydroxide_molar(
        pH, temperature_K, ionic_strength_M=ionic_strength_M, salinity=salinity
    )
    return np.asarray(h, dtype=float), np.asarray(oh, dtype=float)


# ---------------------------------------------------------------------------------------
# inputs
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class PathwayGuess:
    """A rough prior guess of one hydrolysis pathway, before any study.

    Parameters
    ----------
    pathway : str
        "acid", "neutral" or "base".
    ln_k_ref : float
        ln of the pathway constant at the reference temperature, in its SI unit:
        kA and kB [L/(mol s)], kN [1/s] (as ``ln_k_ref_<pathway>`` of
        :class:`kinetics.surface.SurfaceFit`).
    Ea_J_per_mol : float
        Guessed Arrhenius activation energy [J/mol].
    ln_k_ref_sd : float
        Uncertainty of the guess of ``ln_k_ref`` (one standard deviation) [-].
    Ea_sd_J_per_mol : float
        Uncertainty of the guess of Ea (one standard deviation) [J/mol].

    The two uncertainties are used for the prior-averaged criterion, the robustness
    range and the stability screen; they are not passed to the surface fit (the fit's
    own activation-energy prior is :attr:`KineticsPrior.ea_prior_J_per_mol`).
    """

    pathway: str
    ln_k_ref: float
    Ea_J_per_mol: float
    ln_k_ref_sd: float = 1.0
    Ea_sd_J_per_mol: float = 15_000.0

    def __post_init__(self) -> None:
        _choice(self.pathway, "pathway", DESIGN_PATHWAYS)
        _finite(self.ln_k_ref, f"ln_k_ref of the {self.pathway} pathway")
        ea = _finite(self.Ea_J_per_mol, f"Ea_J_per_mol of the {self.pathway} pathway")
        if not 1_000.0 <= ea <= 400_000.0:
            raise InputError(
                f"Ea_J_per_mol {ea!r} of the {self.pathway} pathway is outside 1000-400000 J/mol "
                "(hydrolysis activation energies are typically 40000-120000 J/mol; "
                "check that the value is in J/mol, not kJ/mol)"
            )
        sd = _finite(self.ln_k_ref_sd, f"ln_k_ref_sd of the {self.pathway} pathway")
        if sd < 0.0:
            raise InputError(f"ln_k_ref_sd of the {self.pathway} pathway must be >= 0, got {sd!r}")
        esd = _finite(self.Ea_sd_J_per_mol, f"Ea_sd_J_per_mol of the {self.pathway} pathway")
        if esd < 0.0:
            raise InputError(
                f"Ea_sd_J_per_mol of the {self.pathway} pathway must be >= 0, got {esd!r}"
            )


@dataclass(frozen=True)
class KineticsPrior:
    """Prior guess of the rate surface: pathways, reference temperature, run scatter.

    The model is the surface of :mod:`kinetics.surface` with Arrhenius temperature
    dependence per pathway:

    .. math::

        k_{obs} = k_A(T)\\,[\\mathrm{H^+}] + k_N(T) + k_B(T)\\,[\\mathrm{OH^-}], \\qquad
        \\ln k_p(T) = \\ln k_{p,ref} - \\frac{E_{a,p}}{R}\\left(\\frac{1}{T} -
        \\frac{1}{T_{ref}}\\right)

    (pH-rate profile of specific acid, neutral and specific base catalysed hydrolysis:
    Mabey & Mill, J. Phys. Chem. Ref. Data 7 (1978) 383, as :mod:`kinetics.surface`
    cites it; Arrhenius, Z. phys. Chem. 4 (1889) 226), with [H+] and [OH-] from
    :func:`kinetics.water.hydronium_hydroxide_molar`.

    Parameters
    ----------
    pathways : tuple of PathwayGuess
        One guess per pathway the study should characterise (the pathway set the surface
        fit will use); each pathway at most once.
    reference_temperature_K : float
        Reference temperature of ``ln_k_ref`` [K].
    between_run_sd_ln_k : float
        Expected scatter of ln k between replicate runs beyond the analytical error
        (:math:`\\tau`) [-]; 0.1 (about 10 % in k) is a common-practice guess, no source.
    ea_prior_J_per_mol : tuple of float or None
        The (mean, sd) activation-energy prior [J/mol] that the surface fit will be given
        for pathways the design leaves at one temperature level (the rule of
        :func:`kinetics.surface.fit_surface`); ``None`` means the fit's default,
        (:data:`kinetics.surface.EFSA_DEFAULT_EA_J_PER_MOL`,
        :data:`kinetics.surface.DEFAULT_EA_PRIOR_SD_J_PER_MOL`).
    label : str
        Free text (for example the substance name).
    """

    pathways: tuple[PathwayGuess, ...]
    reference_temperature_K: float = 298.15
    between_run_sd_ln_k: float = 0.1
    ea_prior_J_per_mol: tuple[float, float] | None = None
    label: str = ""

    def __post_init__(self) -> None:
        guesses = tuple(self.pathways)
        if not guesses:
            raise InputError("a kinetics prior needs at least one pathway guess")
        for g in guesses:
            if not isinstance(g, PathwayGuess):
                raise InputError(f"pathways must be PathwayGuess objects, got {g!r}")
        names = [g.pathway for g in guesses]
        if len(set(names)) != len(names):
            raise InputError(f"each pathway may appear once in a prior, got {names}")
        order = sorted(guesses, key=lambda g: DESIGN_PATHWAYS.index(g.pathway))
        object.__setattr__(self, "pathways", tuple(order))
        validate_temperature_K(self.reference_temperature_K)
        tau = _finite(self.between_run_sd_ln_k, "between_run_sd_ln_k")
        if tau < 0.0:
            raise InputError(f"between_run_sd_ln_k must be >= 0, got {tau!r}")
        if self.ea_prior_J_per_mol is not None:
            try:
                mean, sd = self.ea_prior_J_per_mol
            except (TypeError, ValueError):
                raise InputError(
                    "ea_prior_J_per_mol must be a pair (mean, sd) in J/mol, got "
                    f"{self.ea_prior_J_per_mol!r}"
                ) from None
            mean = _positive(mean, "ea_prior_J_per_mol mean")
            sd = _positive(sd, "ea_prior_J_per_mol sd")
            object.__setattr__(self, "ea_prior_J_per_mol", (mean, sd))

    @property
    def fit_ea_prior(self) -> tuple[float, float]:
        """The (mean, sd) Ea prior [J/mol] the surface fit uses (given or its default)."""
        if self.ea_prior_J_per_mol is not None:
            return self.ea_prior_J_per_mol
        return (float(EFSA_DEFAULT_EA_J_PER_MOL), float(DEFAULT_EA_PRIOR_SD_J_PER_MOL))

    # -- parameter bookkeeping -------------------------------------------------------------
    @property
    def pathway_names(self) -> tuple[str, ...]:
        """Names of the pathways, in canonical order."""
        return tuple(g.pathway for g in self.pathways)

    @property
    def parameter_names(self) -> tuple[str, ...]:
        """Names as in :class:`kinetics.surface.SurfaceFit` (Arrhenius)."""
        names: list[str] = []
        for p in self.pathway_names:
            names += [f"ln_k_ref_{p}", f"Ea_{p}_J_per_mol"]
        return tuple(names)

    @property
    def estimates(self) -> np.ndarray:
        """Prior guesses in the order of :attr:`parameter_names`."""
        vals: list[float] = []
        for g in self.pathways:
            vals += [float(g.ln_k_ref), float(g.Ea_J_per_mol)]
        return np.array(vals)

    @property
    def prior_sd(self) -> np.ndarray:
        """Standard deviations of the guesses (0 where no Ea uncertainty was given)."""
        vals: list[float] = []
        for g in self.pathways:
            vals += [float(g.ln_k_ref_sd), float(g.Ea_sd_J_per_mol)]
        return np.array(vals)

    def sample_parameters(self, n: int, rng: np.random.Generator) -> np.ndarray:
        """Independent Gaussian draws of the parameters, shape (n, n_params)."""
        n = _count(n, "n", 1)
        return self.estimates + rng.standard_normal((n, len(self.estimates))) * self.prior_sd

    # -- the surface -----------------------------------------------------------------------
    def _terms(
        self, temperature_K: Any, pH: Any, ionic_strength_M: Any, salinity: Any,
        parameters: np.ndarray | None,
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        t = np.atleast_1d(np.asarray(validate_temperature_K(temperature_K), dtype=float))
        ph = np.atleast_1d(np.asarray(validate_pH(pH), dtype=float))
        ion = np.atleast_1d(np.asarray(ionic_strength_M, dtype=float))
        sal = np.atleast_1d(np.asarray(salinity, dtype=float))
        t, ph, ion, sal = np.broadcast_arrays(t, ph, ion, sal)
        h, oh = _acid_base_molar(ph, t, ion, sal)
        theta = self.estimates[None, :] if parameters is None else np.atleast_2d(parameters)
        if theta.shape[-1] != len(self.parameter_names):
            raise InputError(
                f"parameters must have {len(self.parameter_names)} columns "
                f"({', '.join(self.parameter_names)}), got shape {theta.shape}"
            )
        dinv = (1.0 / t - 1.0 / self.reference_temperature_K) / GAS_CONSTANT_J_PER_MOL_K
        ln_conc = {"acid": np.log(h), "neutral": np.zeros_like(t), "base": np.log(oh)}
        terms = np.empty((theta.shape[0], t.size, len(self.pathways)))
        for j, p in enumerate(self.pathway_names):
            terms[:, :, j] = (
                theta[:, 2 * j, None] - theta[:, 2 * j + 1, None] * dinv[None, :] + ln_conc[p]
            )
        return terms, dinv, theta

    def ln_k(
        self, temperature_K: Any, pH: Any, ionic_strength_M: Any = 0.0, salinity: Any = 0.0,
        parameters: np.ndarray | None = None,
    ) -> np.ndarray:
        """ln k_obs [ln(1/s)] at conditions; shape (n_cond,) or (n_draws, n_cond)."""
        terms, _, _ = self._terms(temperature_K, pH, ionic_strength_M, salinity, parameters)
        out = _logsumexp(terms)
        return out[0] if parameters is None else out

    def ln_k_jacobian(
        self, temperature_K: Any, pH: Any, ionic_strength_M: Any = 0.0, salinity: Any = 0.0,
        parameters: np.ndarray | None = None,
    ) -> np.ndarray:
        """d ln k_obs / d parameters; shape (n_cond, n_params) or (n_draws, n_cond, n_params).

        .. math::

            \\frac{\\partial \\ln k_{obs}}{\\partial \\ln k_{p,ref}} = f_p, \\qquad
            \\frac{\\partial \\ln k_{obs}}{\\partial E_{a,p}} = -\\frac{f_p}{R}
            \\left(\\frac{1}{T} - \\frac{1}{T_{ref}}\\right)

        with :math:`f_p` the fraction of :math:`k_{obs}` carried by pathway p (follows by
        differentiating the surface equation of :class:`KineticsPrior`).
        """
        terms, dinv, theta = self._terms(temperature_K, pH, ionic_strength_M, salinity, parameters)
        frac = np.exp(terms - _logsumexp(terms)[..., None])
        jac = np.empty((theta.shape[0], terms.shape[1], theta.shape[1]))
        jac[:, :, 0::2] = frac
        jac[:, :, 1::2] = -frac * dinv[None, :, None]
        return jac[0] if parameters is None else jac

    def contributions(
        self, temperature_K: Any, pH: Any, ionic_strength_M: Any = 0.0, salinity: Any = 0.0
    ) -> dict[str, np.ndarray]:
        """Fraction of k_obs carried by each pathway at the prior guess [-]."""
        terms, _, _ = self._terms(temperature_K, pH, ionic_strength_M, salinity, None)
        frac = np.exp(terms - _logsumexp(terms)[..., None])[0]
        return {p: frac[:, j] for j, p in enumerate(self.pathway_names)}

    # -- from an existing fit ----------------------------------------------------------------
    @classmethod
    def from_surface_fit(
        cls,
        fit: Any,
        *,
        extra_sd_ln_k: float = 1.0,
        extra_sd_Ea_J_per_mol: float = 10_000.0,
        between_run_sd_ln_k: float | None = None,
        label: str = "",
    ) -> KineticsPrior:
        """A prior from a fitted surface of the same or a related substance.

        Arrhenius fits are taken as they are; an Eyring fit is converted at its reference
        temperature to the Arrhenius form with the same rate and slope there:

        .. math::

            E_a = \\Delta H^{\\ddagger} + R T_{ref}, \\qquad
            \\ln k_{ref} = \\ln\\frac{k_B T_{ref}}{h} + \\frac{\\Delta S^{\\ddagger}}{R}
            - \\frac{\\Delta H^{\\ddagger}}{R T_{ref}}

        (Eyring, J. Chem. Phys. 3 (1935) 107; the identity :math:`E_a = \\Delta H^\\ddagger +
        RT` follows from differentiating ln k with respect to 1/T).

        Parameters
        ----------
        fit : kinetics.surface.SurfaceFit
            The fitted surface.
        extra_sd_ln_k, extra_sd_Ea_J_per_mol : float
            Added in quadrature to the fit's standard errors because a related substance
            can differ (defaults: a factor of about e in k and 10 kJ/mol in Ea; common
            practice, no source). Pass 0 for the same substance.
        between_run_sd_ln_k : float or None
            Run scatter; ``None`` takes the fit's estimated between-run scatter.
        label : str
            Free text.
        """
        names = list(fit.parameter_names)
        est = np.asarray(fit.estimates, dtype=float)
        cov = np.asarray(fit.covariance, dtype=float)
        se = np.sqrt(np.clip(np.diag(cov), 0.0, None))
        t_ref = float(getattr(fit, "reference_temperature_K", 298.15))
        model = str(getattr(fit, "temperature_model", "arrhenius"))
        x_sd = _finite(extra_sd_ln_k, "extra_sd_ln_k")
        x_ea = _finite(extra_sd_Ea_J_per_mol, "extra_sd_Ea_J_per_mol")
        r = GAS_CONSTANT_J_PER_MOL_K
        guesses = []
        for p in fit.pathways:
            if model == "arrhenius":
                i_l, i_e = names.index(f"ln_k_ref_{p}"), names.index(f"Ea_{p}_J_per_mol")
                ln_k_ref, ea = est[i_l], est[i_e]
                sd_l, sd_e = se[i_l], se[i_e]
            elif model == "eyring":
                i_h, i_s = names.index(f"dH_{p}_J_per_mol"), names.index(f"dS_{p}_J_per_mol_K")
                d_h, d_s = est[i_h], est[i_s]
                ea = d_h + r * t_ref
                ln_k_ref = float(eyring_ln_k(d_h, d_s, t_ref))
                sd_e = se[i_h]
                # var(ln k_ref) of a linear combination of dH and dS
                g = np.zeros(len(names))
                g[i_s], g[i_h] = 1.0 / r, -1.0 / (r * t_ref)
                sd_l = float(np.sqrt(max(g @ cov @ g, 0.0)))
            else:
                raise InputError(
                    f"unknown temperature_model {model!r}; valid choices are arrhenius, eyring"
                )
            guesses.append(
                PathwayGuess(
                    pathway=p,
                    ln_k_ref=float(ln_k_ref),
                    Ea_J_per_mol=float(ea),
                    ln_k_ref_sd=float(math.hypot(sd_l, x_sd)),
                    Ea_sd_J_per_mol=float(math.hypot(sd_e, x_ea)),
                )
            )
        if between_run_sd_ln_k is None:
            tau = float(getattr(fit, "between_run_sd_ln_k", fit.residual_scale))
        else:
            tau = between_run_sd_ln_k
        ea_prior = getattr(fit, "ea_prior_J_per_mol", None)
        return cls(
            pathways=tuple(guesses),
            reference_temperature_K=t_ref,
            between_run_sd_ln_k=tau,
            ea_prior_J_per_mol=None if ea_prior is None else tuple(ea_prior),
            label=label,
        )

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form."""
        return {
            "pathways": [
                {
                    "pathway": g.pathway,
                    "ln_k_ref": g.ln_k_ref,
                    "Ea_J_per_mol": g.Ea_J_per_mol,
                    "ln_k_ref_sd": g.ln_k_ref_sd,
                    "Ea_sd_J_per_mol": g.Ea_sd_J_per_mol,
                }
                for g in self.pathways
            ],
            "reference_temperature_K": self.reference_temperature_K,
            "between_run_sd_ln_k": self.between_run_sd_ln_k,
            "ea_prior_J_per_mol": None if self.ea_prior_J_per_mol is None
            else list(self.ea_prior_J_per_mol),
            "label": self.label,
        }


def _logsumexp(a: np.ndarray) -> np.ndarray:
    """ln of the sum of exp along the last axis (the surface's own helper)."""
    return _surface_logsumexp(a, axis=-1)


@dataclass(frozen=True)
class FieldCondition:
    """A water body condition at which the DT50 must be known.

    Parameters
    ----------
    temperature_K : float
        Water temperature [K].
    pH : float
        pH of the water [-].
    salinity : float
        Practical salinity [-] (0 for fresh water).
    ionic_strength_M : float
        Ionic strength [mol/L] (used when salinity is 0).
    label : str
        Free text (for example "pond, summer").
    """

    temperature_K: float
    pH: float
    salinity: float = 0.0
    ionic_strength_M: float = 0.0
    label: str = ""

    def __post_init__(self) -> None:
        validate_temperature_K(self.temperature_K)
        validate_pH(self.pH)
        if _finite(self.salinity, "salinity") < 0.0:
            raise InputError(f"salinity must be >= 0, got {self.salinity!r}")
        if _finite(self.ionic_strength_M, "ionic_strength_M") < 0.0:
            raise InputError(f"ionic_strength_M must be >= 0, got {self.ionic_strength_M!r}")

    def describe(self) -> str:
        """Short human-readable form."""
        text = f"{_celsius(self.temperature_K)}, pH {self.pH:.2f}"
        if self.salinity > 0:
            text += f", salinity {self.salinity:g}"
        return f"{self.label} ({text})" if self.label else text


@dataclass(frozen=True)
class LabConstraints:
    """What the laboratory can do.

    Parameters
    ----------
    allowed_temperatures_K : tuple of float
        Incubation temperatures available [K].
    allowed_pH : tuple of float
        Buffer pH values available [-].
    max_duration_s : float
        Longest a vessel may be incubated [s].
    n_vessels : int
        Number of vessels (= runs, each one temperature and pH, one series).
    samples_per_vessel : int
        Samples taken from each vessel, including the one at time zero (>= 3).
    analytical_error_percent : float
        Expected analytical standard deviation [%]: of the measured value under the
        "proportional" error model, of the initial concentration under "constant".
    error_model : str
        "proportional" or "constant", as the series fits will use.
    loq_percent : float
        Limit of quantification as a percentage of the initial concentration [%];
        samples expected below it carry no information and are not planned.
    min_sampling_interval_s : float
        Shortest practical time between two samples of one vessel [s].
    buffer_ionic_strength_M : float
        Ionic strength of the buffers [mol/L], used for [H+]/[OH-] in the runs.
    """

    allowed_temperatures_K: tuple[float, ...]
    allowed_pH: tuple[float, ...]
    max_duration_s: float
    n_vessels: int
    samples_per_vessel: int
    analytical_error_percent: float
    error_model: str = "proportional"
    loq_percent: float = 2.0
    min_sampling_interval_s: float = 600.0
    buffer_ionic_strength_M: float = 0.0

    def __post_init__(self) -> None:
        temps = tuple(sorted({float(t) for t in np.atleast_1d(self.allowed_temperatures_K)}))
        if not temps:
            raise InputError("allowed_temperatures_K must list at least one temperature")
        validate_temperature_K(np.array(temps))
        object.__setattr__(self, "allowed_temperatures_K", temps)
        phs = tuple(sorted({float(p) for p in np.atleast_1d(self.allowed_pH)}))
        if not phs:
            raise InputError("allowed_pH must list at least one pH value")
        validate_pH(np.array(phs))
        object.__setattr__(self, "allowed_pH", phs)
        dur = _positive(self.max_duration_s, "max_duration_s")
        _count(self.n_vessels, "n_vessels", 1)
        n_s = _count(self.samples_per_vessel, "samples_per_vessel", 3)
        err = _positive(self.analytical_error_percent, "analytical_error_percent")
        if err >= 50.0:
            raise InputError(
                f"analytical_error_percent {err!r} % is too large for a rate to be measured "
                "(expected values are typically 1-10 %)"
            )
        _choice(self.error_model, "error_model", ERROR_MODELS)
        loq = _finite(self.loq_percent, "loq_percent")
        if not 0.0 <= loq < 50.0:
            raise InputError(f"loq_percent must lie in 0-50 % of the initial value, got {loq!r}")
        gap = _finite(self.min_sampling_interval_s, "min_sampling_interval_s")
        if gap < 0.0:
            raise InputError(f"min_sampling_interval_s must be >= 0, got {gap!r}")
        if (n_s - 1) * gap > dur:
            raise InputError(
                f"{n_s} samples at least {gap!r} s apart do not fit into max_duration_s "
                f"{dur!r} s"
            )
        if _finite(self.buffer_ionic_strength_M, "buffer_ionic_strength_M") < 0.0:
            raise InputError(
                f"buffer_ionic_strength_M must be >= 0, got {self.buffer_ionic_strength_M!r}"
            )


# ---------------------------------------------------------------------------------------
# stage 1: one SFO series
# ---------------------------------------------------------------------------------------


def _sfo_weights(
    time_s: np.ndarray, k_per_s: np.ndarray, relative_error: float, error_model: str,
    loq_fraction: float,
) -> np.ndarray:
    planned = np.isfinite(time_s)
    t = np.where(planned, time_s, 0.0)
    frac = np.exp(-k_per_s[..., None] * t)
    quantifiable = planned & (frac >= loq_fraction)
    if error_model == "proportional":
        w = np.ones_like(frac)
    else:
        w = frac**2
    return np.where(quantifiable, w / relative_error**2, 0.0)


def sfo_information(
    time_s: Sequence[float],
    k_per_s: float,
    *,
    analytical_error_percent: float,
    error_model: str = "proportional",
    loq_percent: float = 0.0,
) -> np.ndarray:
    """Fisher information of one SFO series for the parameters (ln C0, ln k).

    With :math:`f(t) = C_0 e^{-kt}` and independent Gaussian errors of standard deviation
    :math:`\\sigma_i`, the information is the sum of outer products of the sensitivities
    (linear approximation of nonlinear least squares: Bates & Watts, *Nonlinear Regression
    Analysis and Its Applications*, Wiley 1988, ch. 2; recalled from memory):

    .. math::

        I = \\sum_i \\frac{1}{\\sigma_i^2} g_i g_i^T, \\qquad
        g_i = \\frac{\\partial f(t_i)}{\\partial (\\ln C_0, \\ln k)} = f(t_i)\\,(1, -k t_i)

    so that :math:`(f(t_i)/\\sigma_i)^2 = 1/r^2` for the proportional error model
    (:math:`\\sigma_i = r f(t_i)`) and :math:`e^{-2kt_i}/r^2` for the constant one
    (:math:`\\sigma = r C_0`), with r the relative analytical error. The result does not
    depend on :math:`C_0`. Samples expected below the LOQ are left out.

    Parameters
    ----------
    time_s : sequence of float
        Sampling times [s].
    k_per_s : float
        Expected rate constant [1/s].
    analytical_error_percent : float
        Relative analytical error [%].
    error_model : str
        "proportional" or "constant".
    loq_percent : float
        LOQ as a percentage of C0 [%].

    Returns
    -------
    numpy.ndarray
        2 × 2 information matrix for (ln C0, ln k).
    """
    t = np.asarray(time_s, dtype=float)
    if t.ndim != 1 or t.size < 2 or not np.all(np.isfinite(t)) or np.any(t < 0):
        raise InputError(f"time_s must be at least two finite times >= 0 s, got {time_s!r}")
    k = _positive(k_per_s, "k_per_s")
    r = _positive(analytical_error_percent, "analytical_error_percent") / 100.0
    _choice(error_model, "error_model", ERROR_MODELS)
    loq = _finite(loq_percent, "loq_percent") / 100.0
    w = _sfo_weights(t, np.array(k), r, error_model, loq)
    u = -k * t
    return np.array([[w.sum(), (w * u).sum()], [(w * u).sum(), (w * u * u).sum()]])


def _sfo_var_ln_k(
    time_s: np.ndarray, k_per_s: np.ndarray, relative_error: float, error_model: str,
    loq_fraction: float,
) -> np.ndarray:
    """Vectorised [I^-1]_{ln k, ln k}; inf when fewer than 2 distinct quantifiable times.

    time_s has shape (..., n) and broadcasts against k_per_s[..., None].
    """
    w = _sfo_weights(time_s, k_per_s, relative_error, error_model, loq_fraction)
    time_s = np.where(np.isfinite(time_s), time_s, 0.0)
    sw = w.sum(-1)
    safe = np.where(sw > 0, sw, 1.0)
    tbar = (w * time_s).sum(-1) / safe
    spread = (w * (time_s - tbar[..., None]) ** 2).sum(-1)
    denom = k_per_s**2 * spread
    n_q = (w > 0).sum(-1)
    ok = (n_q >= 3) & (denom > 0)
    return np.where(ok, 1.0 / np.where(ok, denom, 1.0), np.inf)


def sfo_se_ln_k(
    time_s: Sequence[float],
    k_per_s: float,
    *,
    analytical_error_percent: float,
    error_model: str = "proportional",
    loq_percent: float = 0.0,
) -> float:
    """Expected standard error of the fitted ln k of one SFO series [-].

    .. math::

        \\mathrm{var}(\\ln \\hat k) = [I^{-1}]_{22} =
        \\frac{1}{k^2 \\sum_i w_i (t_i - \\bar t_w)^2}, \\qquad
        \\bar t_w = \\frac{\\sum_i w_i t_i}{\\sum_i w_i}

    with :math:`w_i = (f(t_i)/\\sigma_i)^2` and I from :func:`sfo_information`.

    Raises
    ------
    DataError
        If fewer than three samples are expected above the LOQ (the rate and the
        residual scatter cannot both be estimated).
    """
    info = sfo_information(
        time_s, k_per_s, analytical_error_percent=analytical_error_percent,
        error_model=error_model, loq_percent=loq_percent,
    )
    var = _sfo_var_ln_k(
        np.asarray(time_s, dtype=float), np.array(float(k_per_s)),
        analytical_error_percent / 100.0, error_model, loq_percent / 100.0,
    )
    if not np.isfinite(var) or info[0, 0] <= 0:
        raise DataError(
            f"sampling times {list(time_s)!r} s give fewer than three quantifiable samples "
            f"at k = {k_per_s!r} 1/s and LOQ {loq_percent!r} %: the rate cannot be measured"
        )
    return float(np.sqrt(var))


def sampling_times_s(expected_k_per_s: float, constraints: LabConstraints) -> np.ndarray:
    """Planned sampling times of one vessel [s].

    Rule: the first sample at time zero and the rest equally spaced up to the time of
    90 % expected decline, :math:`t_{end} = \\ln 10 / k` (about 3.3 half-lives), so that the
    series spans enough decline to identify its rate and check that it is first order.
    The end point follows OECD Test Guideline 111 (2004), whose higher tiers run until
    90 % hydrolysis or for 30 days, whichever comes first (as its published summary
    states); the equal spacing is common practice, no source. Equal spacing in time is equal spacing in ln C
    under SFO. :math:`t_{end}` is lengthened to respect the minimum sampling interval and
    shortened to the maximum duration; a run too slow to reach 90 % decline in the
    maximum duration is sampled over the whole duration, and the small decline it shows
    gives little information, which its Fisher information (:func:`sfo_se_ln_k`) reflects.

    Parameters
    ----------
    expected_k_per_s : float
        Expected rate constant of the vessel [1/s].
    constraints : LabConstraints
        Samples per vessel, maximum duration, minimum interval.

    Returns
    -------
    numpy.ndarray
        ``samples_per_vessel`` times [s], starting at 0.
    """
    k = _positive(expected_k_per_s, "expected_k_per_s")
    n = constraints.samples_per_vessel
    t_end = math.log(1.0 / _END_FRACTION_REMAINING) / k
    t_end = max(t_end, (n - 1) * constraints.min_sampling_interval_s)
    t_end = min(t_end, constraints.max_duration_s)
    return np.linspace(0.0, t_end, n)


# ---------------------------------------------------------------------------------------
# stage 2: the surface, and the evaluation of a design
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class DesignRun:
    """One design point: a temperature, a pH, its vessels and their sampling times.

    Attributes
    ----------
    temperature_K, pH : float
        Incubation condition [K], [-].
    n_vessels : int
        Replicate vessels at this condition.
    sampling_times_s : tuple of float
        Sampling times of each vessel [s].
    expected_k_per_s : float
        k_obs under the prior guess [1/s].
    expected_dt50_s : float
        DT50 under the prior guess [s].
    expected_loss_percent : float
        Expected loss at the last sample [%].
    se_ln_k_run : float
        Expected standard error of one vessel's ln k from the analytical error [-]
        (inf when the run cannot be measured).
    """

    temperature_K: float
    pH: float
    n_vessels: int
    sampling_times_s: tuple[float, ...]
    expected_k_per_s: float | None = None
    expected_dt50_s: float | None = None
    expected_loss_percent: float | None = None
    se_ln_k_run: float | None = None

    def __post_init__(self) -> None:
        validate_temperature_K(self.temperature_K)
        validate_pH(self.pH)
        _count(self.n_vessels, "n_vessels of a design run", 1)
        t = np.asarray(self.sampling_times_s, dtype=float)
        if t.ndim != 1 or t.size < 3 or not np.all(np.isfinite(t)) or np.any(t < 0):
            raise InputError(
                f"sampling_times_s must be at least three finite times >= 0 s, "
                f"got {self.sampling_times_s!r}"
            )
        object.__setattr__(self, "sampling_times_s", tuple(float(x) for x in t))

    def describe(self) -> str:
        """Short human-readable form."""
        times = ", ".join(_fmt_duration(x) for x in self.sampling_times_s)
        return (
            f"{self.n_vessels} vessel(s) at {_celsius(self.temperature_K)}, pH {self.pH:g}: "
            f"samples at {times}"
        )

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form (infinite standard errors become null)."""
        se = self.se_ln_k_run
        if se is not None and not math.isfinite(se):
            se = None
        return {
            "temperature_K": self.temperature_K,
            "pH": self.pH,
            "n_vessels": self.n_vessels,
            "sampling_times_s": list(self.sampling_times_s),
            "expected_k_per_s": self.expected_k_per_s,
            "expected_dt50_s": self.expected_dt50_s,
            "expected_loss_percent": self.expected_loss_percent,
            "se_ln_k_run": se,
        }


def _level_ids(values: np.ndarray, tol: float) -> tuple[np.ndarray, int]:
    """Group values into levels separated by gaps larger than ``tol`` (as the surface fit)."""
    order = np.argsort(values, kind="stable")
    ids = np.empty(len(values), dtype=int)
    current = 0
    ids[order[0]] = 0
    for prev, cur in zip(order[:-1], order[1:]):
        if values[cur] - values[prev] > tol:
            current += 1
        ids[cur] = current
    return ids, current + 1


class _FitRules:
    """The structural rules of :func:`kinetics.surface.fit_surface`, for many allocations.

    For an allocation of vessels to cells it gives, as the surface fit will decide them:
    the number of pH levels (a model of m pathways needs at least m), which pathways take
    their Ea from the prior (within the pathways ordered acid, neutral, base, the first
    owns the lowest pH level, the last the highest, a middle one the levels between; a
    pathway whose runs span fewer than two temperature levels takes the prior), the
    number of parameters estimated from the data, the degrees of freedom, and whether
    every pathway carries at least 0.1 % of k_obs in some run.
    """

    def __init__(
        self, prior: KineticsPrior, temperatures_K: np.ndarray, pH: np.ndarray,
        fractions: np.ndarray,
    ) -> None:
        self.n_path = len(prior.pathways)
        self.ph_ids, self.n_ph_levels = _level_ids(np.asarray(pH, float), PH_LEVEL_TOLERANCE)
        self.t_ids, self.n_t_levels = _level_ids(
            np.asarray(temperatures_K, float), TEMPERATURE_LEVEL_TOLERANCE_K
        )
        self.fractions = fractions  # (K, n_path) at the prior guess

    def _count_levels(self, mask: np.ndarray, ids: np.ndarray, n_levels: int) -> np.ndarray:
        return np.stack([(mask & (ids == v)).any(axis=1) for v in range(n_levels)], 1).sum(1)

    def apply(self, alloc: np.ndarray) -> dict[str, np.ndarray]:
        used = np.asarray(alloc) > 0  # (m, K)
        lv = self.ph_ids[None, :]
        present = np.stack([(used & (lv == v)).any(axis=1) for v in range(self.n_ph_levels)], 1)
        n_ph = present.sum(axis=1)
        idx = np.arange(self.n_ph_levels)
        lo = np.where(present, idx, self.n_ph_levels).min(axis=1)[:, None]
        hi = np.where(present, idx, -1).max(axis=1)[:, None]
        if self.n_path == 1:
            owners = [used]
        elif self.n_path == 2:
            owners = [used & (lv == lo), used & (lv == hi)]
        else:
            owners = [used & (lv == lo), used & (lv > lo) & (lv < hi), used & (lv == hi)]
        from_prior = np.stack(
            [self._count_levels(o, self.t_ids, self.n_t_levels) < 2 for o in owners], axis=1
        )
        p_free = 2 * self.n_path - from_prior.sum(axis=1)
        dof = np.asarray(alloc).sum(axis=1) - p_free
        seen = np.stack(
            [(used * self.fractions[None, :, j]).max(axis=1) for j in range(self.n_path)], 1
        )
        feasible = (n_ph >= self.n_path) & (dof >= 1) & np.all(seen >= _MIN_CONTRIBUTION, axis=1)
        return {"from_prior": from_prior, "p_free": p_free, "dof": dof, "feasible": feasible,
                "n_ph_levels": n_ph}


def _pathway_vectors(prior: KineticsPrior, temperatures_K: Sequence[float]) -> np.ndarray:
    """Gradients of ln k_p(T) per pathway p and temperature T, shape (P, U, n_params)."""
    temps = np.asarray(temperatures_K, dtype=float)
    dinv = (1.0 / temps - 1.0 / prior.reference_temperature_K) / GAS_CONSTANT_J_PER_MOL_K
    g = np.zeros((len(prior.pathways), temps.size, len(prior.parameter_names)))
    for j in range(len(prior.pathways)):
        g[j, :, 2 * j] = 1.0
        g[j, :, 2 * j + 1] = -dinv
    return g


def _t_quantile(level: float, dof: np.ndarray) -> np.ndarray:
    """Student-t quantile of the surface fit's intervals (inf where dof < 1)."""
    lv = 0.5 * (1.0 + level)
    d = np.asarray(dof, dtype=float)
    return np.where(d >= 1, stats.t.ppf(lv, np.maximum(d, 1.0)), np.inf)


def _scale(prior: KineticsPrior) -> np.ndarray:
    s = np.ones(len(prior.parameter_names))
    s[1::2] = _EA_SCALE_J_PER_MOL
    return s


@dataclass(frozen=True)
class DesignEvaluation:
    """Expected precision of a design at the field conditions (Fisher information).

    Attributes
    ----------
    runs : tuple of DesignRun
        The design.
    field_conditions : tuple of FieldCondition
        Where the DT50 must be known.
    parameter_names : tuple of str
        Surface parameters (Arrhenius names as in :class:`kinetics.surface.SurfaceFit`).
    information : numpy.ndarray
        Fisher information of the surface parameters (incl. Ea prior precision).
    covariance : numpy.ndarray or None
        Its inverse; ``None`` when the design cannot identify every parameter.
    identifiable : bool
        Whether the surface fit can characterise every pathway with this design.
    problem : str
        Why not, when ``identifiable`` is False (else empty).
    ea_from_prior : tuple of str
        Pathways whose Ea the fit will take from the prior (one temperature level).
    dof : int
        Degrees of freedom of the surface fit (runs minus parameters from the data).
    pathway_se_ln_k : dict
        Per pathway: standard error of ln k_p at its best-determined allowed temperature.
    weak_pathways : tuple of str
        Pathways whose ``pathway_se_ln_k`` exceeds 0.3: their fitted constant may run to
        zero in some studies, and the fit with this pathway set then fails (the
        recommended design never has one; a laboratory's own design may).
    se_ln_k : numpy.ndarray
        Predicted standard error of ln k at each field condition [-] (inf if not
        identifiable).
    width_ratio : numpy.ndarray
        Predicted ratio upper/lower of the DT50 interval at ``level`` [-], with the
        Student-t quantile at ``dof`` that the fit's intervals use.
    dt50_s : numpy.ndarray
        DT50 at the field conditions under the prior guess [s].
    level : float
        Interval level.
    variance_by_run : tuple of dict
        Per field condition: share of var(ln k) due to the noise of each design point
        (keys "T=...K pH=..."), plus "prior" (the Ea prior); shares sum to 1.
    variance_by_parameter : tuple of dict
        Per field condition: :math:`c_i (I^{-1}c)_i / c^T I^{-1} c` per parameter (sums to
        1; a negative share is a correlation that reduces the variance).
    variance_by_pathway : tuple of dict
        ``variance_by_parameter`` summed per pathway.
    scatter_share : numpy.ndarray
        Per field condition: share of var(ln k) due to the between-run scatter tau [-].
    caution : str
        :data:`kinetics.caution.CAUTION_TEXT`.
    """

    runs: tuple[DesignRun, ...]
    field_conditions: tuple[FieldCondition, ...]
    parameter_names: tuple[str, ...]
    information: np.ndarray
    covariance: np.ndarray | None
    identifiable: bool
    problem: str
    ea_from_prior: tuple[str, ...]
    dof: int
    pathway_se_ln_k: dict[str, float]
    weak_pathways: tuple[str, ...]
    se_ln_k: np.ndarray
    width_ratio: np.ndarray
    dt50_s: np.ndarray
    level: float
    variance_by_run: tuple[dict[str, float], ...]
    variance_by_parameter: tuple[dict[str, float], ...]
    variance_by_pathway: tuple[dict[str, float], ...]
    scatter_share: np.ndarray
    caution: str = CAUTION_TEXT

    def interval(self, level: float = 0.95) -> dict[str, np.ndarray]:
        """Expected DT50 interval at the field conditions, centred on the prior guess.

        Returns a dict with ``dt50_s``, ``dt50_low_s``, ``dt50_high_s`` and
        ``width_ratio`` (one entry per field condition), using Student's t at
        :attr:`dof`.

        Raises
        ------
        DataError
            If the design cannot identify every surface parameter.
        """
        _quantile(level)
        if not self.identifiable:
            raise DataError(f"this design gives no interval: {self.problem}")
        t = float(_t_quantile(level, np.array(self.dof)))
        return {
            "dt50_s": self.dt50_s.copy(),
            "dt50_low_s": self.dt50_s * np.exp(-t * self.se_ln_k),
            "dt50_high_s": self.dt50_s * np.exp(t * self.se_ln_k),
            "width_ratio": np.exp(2.0 * t * self.se_ln_k),
        }

    @property
    def n_vessels(self) -> int:
        """Total number of vessels."""
        return sum(r.n_vessels for r in self.runs)

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form (infinite widths become null)."""

        def num(x: float) -> float | None:
            return float(x) if math.isfinite(float(x)) else None

        fields = []
        for i, f in enumerate(self.field_conditions):
            fields.append({
                "temperature_K": f.temperature_K,
                "pH": f.pH,
                "salinity": f.salinity,
                "ionic_strength_M": f.ionic_strength_M,
                "label": f.label,
                "expected_dt50_s": num(self.dt50_s[i]),
                "se_ln_k": num(self.se_ln_k[i]),
                "width_ratio": num(self.width_ratio[i]),
                "variance_by_run": self.variance_by_run[i],
                "variance_by_parameter": self.variance_by_parameter[i],
                "variance_by_pathway": self.variance_by_pathway[i],
                "between_run_scatter_share": num(self.scatter_share[i]),
            })
        return {
            "runs": [r.to_dict() for r in self.runs],
            "n_vessels": self.n_vessels,
            "identifiable": self.identifiable,
            "problem": self.problem,
            "dof": self.dof,
            "level": self.level,
            "ea_from_prior": list(self.ea_from_prior),
            "pathway_se_ln_k": {k: num(v) for k, v in self.pathway_se_ln_k.items()},
            "weak_pathways": list(self.weak_pathways),
            "field_conditions": fields,
            "caution": self.caution,
        }


def _run_key(temperature_K: float, pH: float) -> str:
    return f"T={temperature_K:.2f}K pH={pH:g}"


def _cell_properties(
    prior: KineticsPrior, constraints: LabConstraints, temperatures_K: np.ndarray,
    pH: np.ndarray, times: np.ndarray | None,
) -> dict[str, np.ndarray]:
    """Expected k, times, run variance, Jacobian and fractions for cells (vectorised)."""
    ion = constraints.buffer_ionic_strength_M
    ln_k = prior.ln_k(temperatures_K, pH, ion, 0.0)
    k = np.exp(ln_k)
    if times is None:
        times = np.array([sampling_times_s(float(kk), constraints) for kk in k])
    r = constraints.analytical_error_percent / 100.0
    var_run = _sfo_var_ln_k(times, k, r, constraints.error_model, constraints.loq_percent / 100.0)
    jac = prior.ln_k_jacobian(temperatures_K, pH, ion, 0.0)
    frac = np.stack(
        [v for v in prior.contributions(temperatures_K, pH, ion, 0.0).values()], axis=-1
    )
    tau2 = prior.between_run_sd_ln_k**2
    with np.errstate(divide="ignore"):
        w = np.where(np.isfinite(var_run), 1.0 / (var_run + tau2), 0.0)
    return {"k": k, "times": times, "var_run": var_run, "jac": jac, "frac": frac, "w": w}


def _field_arrays(
    prior: KineticsPrior, fields: Sequence[FieldCondition]
) -> tuple[np.ndarray, np.ndarray]:
    t = np.array([f.temperature_K for f in fields])
    ph = np.array([f.pH for f in fields])
    ion = np.array([f.ionic_strength_M for f in fields])
    sal = np.array([f.salinity for f in fields])
    return prior.ln_k(t, ph, ion, sal), prior.ln_k_jacobian(t, ph, ion, sal)


def _check_fields(field_conditions: Any) -> tuple[FieldCondition, ...]:
    if isinstance(field_conditions, FieldCondition):
        field_conditions = (field_conditions,)
    fields = tuple(field_conditions)
    if not fields:
        raise InputError("at least one field condition is needed")
    for f in fields:
        if not isinstance(f, FieldCondition):
            raise InputError(f"field conditions must be FieldCondition objects, got {f!r}")
    return fields


def _evaluate(
    prior: KineticsPrior,
    fields: tuple[FieldCondition, ...],
    constraints: LabConstraints,
    temperatures_K: np.ndarray,
    pH: np.ndarray,
    counts: np.ndarray,
    times: np.ndarray,
    level: float,
) -> DesignEvaluation:
    _quantile(level)
    cells = _cell_properties(prior, constraints, temperatures_K, pH, times)
    ln_k_f, c = _field_arrays(prior, fields)
    rules = _FitRules(prior, temperatures_K, pH, cells["frac"])
    st = rules.apply((counts * (cells["w"] > 0))[None, :])
    from_prior = st["from_prior"][0]
    ea_prior = tuple(p for p, f in zip(prior.pathway_names, from_prior) if f)
    dof = int(st["dof"][0])
    s = _scale(prior)
    js = cells["jac"] * s
    cs = c * s
    ps = np.zeros((len(s), len(s)))
    ea_sd = prior.fit_ea_prior[1]
    for j, f in enumerate(from_prior):
        if f:
            ps[2 * j + 1, 2 * j + 1] = (_EA_SCALE_J_PER_MOL / ea_sd) ** 2
    info_s = ps + np.einsum("k,k,ki,kj->ij", counts, cells["w"], js, js)
    info = info_s / np.outer(s, s)
    ev = np.linalg.eigvalsh(info_s)
    problem = ""
    if not st["feasible"][0]:
        problem = _structure_problem(prior, st, cells, counts)
    elif not (ev[-1] > 0 and ev[0] > 1e-10 * ev[-1]):
        problem = "the runs cannot tell the surface parameters apart (singular information)"
    names = prior.parameter_names
    runs = tuple(
        DesignRun(
            temperature_K=float(temperatures_K[i]),
            pH=float(pH[i]),
            n_vessels=int(counts[i]),
            sampling_times_s=tuple(times[i][np.isfinite(times[i])]),
            expected_k_per_s=float(cells["k"][i]),
            expected_dt50_s=float(math.log(2.0) / cells["k"][i]),
            expected_loss_percent=float(
                100.0 * (1.0 - math.exp(-cells["k"][i] * np.nanmax(times[i])))
            ),
            se_ln_k_run=float(math.sqrt(cells["var_run"][i])),
        )
        for i in range(len(counts))
    )
    dt50 = math.log(2.0) / np.exp(ln_k_f)
    if problem:
        inf = np.full(len(fields), np.inf)
        empty = tuple({} for _ in fields)
        return DesignEvaluation(
            runs=runs, field_conditions=fields, parameter_names=names, information=info,
            covariance=None, identifiable=False, problem=problem, ea_from_prior=ea_prior,
            dof=dof, pathway_se_ln_k={}, weak_pathways=prior.pathway_names, se_ln_k=inf,
            width_ratio=inf.copy(), dt50_s=dt50, level=float(level),
            variance_by_run=empty, variance_by_parameter=empty, variance_by_pathway=empty,
            scatter_share=np.zeros(len(fields)),
        )
    cov_s = np.linalg.inv(info_s)
    cov = cov_s * np.outer(s, s)
    g = _pathway_vectors(prior, constraints.allowed_temperatures_K)
    path_se = np.sqrt(np.einsum("jup,pq,juq->ju", g, cov, g).min(axis=1))
    pathway_se = {p: float(v) for p, v in zip(prior.pathway_names, path_se)}
    weak = tuple(p for p, v in pathway_se.items() if v > _MAX_PATHWAY_SE_LN_K)
    a = cs @ cov_s  # (F, p): I^-1 c for each field condition (scaled)
    var = np.einsum("fp,fp->f", cs, a)
    by_run, by_par, by_path, scatter = [], [], [], []
    tau2 = prior.between_run_sd_ln_k**2
    for f in range(len(fields)):
        proj = js @ a[f]  # (K,)
        contrib = counts * cells["w"] * proj**2
        prior_part = float(a[f] @ ps @ a[f])
        d_run: dict[str, float] = {}
        for i in range(len(counts)):
            key = _run_key(temperatures_K[i], pH[i])
            d_run[key] = d_run.get(key, 0.0) + float(contrib[i] / var[f])
        d_run["prior"] = prior_part / var[f]
        by_run.append(d_run)
        scatter.append(float(np.sum(counts * cells["w"] ** 2 * tau2 * proj**2) / var[f]))
        shares = cs[f] * a[f] / var[f]
        by_par.append({n: float(v) for n, v in zip(names, shares)})
        by_path.append(
            {p: float(shares[2 * j] + shares[2 * j + 1]) for j, p in enumerate(prior.pathway_names)}
        )
    se = np.sqrt(var)
    t = float(_t_quantile(level, np.array(dof)))
    return DesignEvaluation(
        runs=runs, field_conditions=fields, parameter_names=names, information=info,
        covariance=cov, identifiable=True, problem="", ea_from_prior=ea_prior, dof=dof,
        pathway_se_ln_k=pathway_se, weak_pathways=weak,
        se_ln_k=se, width_ratio=np.exp(2.0 * t * se), dt50_s=dt50, level=float(level),
        variance_by_run=tuple(by_run), variance_by_parameter=tuple(by_par),
        variance_by_pathway=tuple(by_path), scatter_share=np.array(scatter),
    )


def _structure_problem(
    prior: KineticsPrior, st: dict[str, np.ndarray], cells: dict[str, np.ndarray],
    counts: np.ndarray,
) -> str:
    n_path = len(prior.pathways)
    if st["n_ph_levels"][0] < n_path:
        return (
            f"{n_path} pathways ({', '.join(prior.pathway_names)}) need measurable runs at "
            f"{n_path} or more pH levels (more than {PH_LEVEL_TOLERANCE} apart); the design "
            f"has {int(st['n_ph_levels'][0])}"
        )
    if st["dof"][0] < 1:
        return (
            f"{int(counts.sum())} vessel(s) leave no degree of freedom for the between-run "
            f"scatter after {int(st['p_free'][0])} surface parameters; at least "
            f"{int(st['p_free'][0]) + 1} are needed"
        )
    used = (counts > 0) & (cells["w"] > 0)
    for j, p in enumerate(prior.pathway_names):
        if not np.any(used) or cells["frac"][used, j].max() < _MIN_CONTRIBUTION:
            return (
                f"the {p} pathway carries less than {_MIN_CONTRIBUTION:.1%} of k_obs in every "
                "measurable run of the design, so the fit cannot see it"
            )
    return "the design cannot characterise every pathway"


def evaluate_design(
    runs: Sequence[DesignRun | Mapping[str, Any]],
    prior: KineticsPrior,
    field_conditions: FieldCondition | Sequence[FieldCondition],
    constraints: LabConstraints,
    *,
    level: float = 0.95,
) -> DesignEvaluation:
    """Expected precision of any design (the laboratory's own, or a naive one).

    The information on the surface parameters is that of the two-stage fit:

    .. math::

        I = \\sum_{r} \\frac{J_r J_r^T}{\\mathrm{var}(\\ln \\hat k_r) + \\tau^2} + P, \\qquad
        \\sigma^2_{field} = c^T I^{-1} c, \\qquad
        \\text{ratio} = \\exp(2 z_{(1+level)/2}\\, \\sigma_{field})

    (generalised least squares with known weights; the c-criterion of optimal design,
    Atkinson, Donev & Tobias, *Optimum Experimental Designs, with SAS*, Oxford 2007,
    ch. 10, recalled from memory), with :math:`J_r` the gradient of ln k_obs at run r
    (:meth:`KineticsPrior.ln_k_jacobian`), :math:`\\mathrm{var}(\\ln \\hat k_r)` from
    :func:`sfo_se_ln_k`, P the Ea prior precision for pathways left at one temperature and
    c the gradient at the field condition.

    Parameters
    ----------
    runs : sequence of DesignRun or dict
        Each with ``temperature_K``, ``pH``, ``n_vessels`` and ``sampling_times_s``.
    prior : KineticsPrior
        Guess of the kinetics.
    field_conditions : FieldCondition or sequence of them
        Where the DT50 must be known.
    constraints : LabConstraints
        Analytical error, error model, LOQ and buffer ionic strength are used.
    level : float
        Interval level.

    Returns
    -------
    DesignEvaluation
    """
    fields = _check_fields(field_conditions)
    parsed = []
    for r in runs:
        if isinstance(r, Mapping):
            try:
                r = DesignRun(
                    temperature_K=r["temperature_K"], pH=r["pH"], n_vessels=r["n_vessels"],
                    sampling_times_s=tuple(r["sampling_times_s"]),
                )
            except KeyError as exc:
                raise InputError(f"a design run needs the field {exc.args[0]!r}") from None
        if not isinstance(r, DesignRun):
            raise InputError(f"runs must be DesignRun objects or dicts, got {r!r}")
        parsed.append(r)
    if not parsed:
        raise InputError("a design needs at least one run")
    longest = max(len(r.sampling_times_s) for r in parsed)
    times = np.full((len(parsed), longest), np.nan)  # NaN pads shorter series (no sample)
    for i, r in enumerate(parsed):
        times[i, : len(r.sampling_times_s)] = r.sampling_times_s
    return _evaluate(
        prior, fields, constraints,
        np.array([r.temperature_K for r in parsed]), np.array([r.pH for r in parsed]),
        np.array([r.n_vessels for r in parsed], dtype=float), times, level,
    )


# ---------------------------------------------------------------------------------------
# the search
# ---------------------------------------------------------------------------------------


class _Problem:
    """Precomputed cell matrices for fast batched evaluation of vessel allocations."""

    def __init__(
        self,
        prior: KineticsPrior,
        fields: tuple[FieldCondition, ...],
        constraints: LabConstraints,
        temperatures_K: np.ndarray,
        pH: np.ndarray,
        times: np.ndarray,
        parameters: np.ndarray,
        level: float,
    ) -> None:
        self.prior = prior
        self.level = level
        s = _scale(prior)
        ion = constraints.buffer_ionic_strength_M
        r = constraints.analytical_error_percent / 100.0
        loq = constraints.loq_percent / 100.0
        ln_k = prior.ln_k(temperatures_K, pH, ion, 0.0, parameters=parameters)  # (D, K)
        var_run = _sfo_var_ln_k(times[None], np.exp(ln_k), r, constraints.error_model, loq)
        tau2 = prior.between_run_sd_ln_k**2
        with np.errstate(divide="ignore"):
            w = np.where(np.isfinite(var_run), 1.0 / (var_run + tau2), 0.0)  # (D, K)
        jac = prior.ln_k_jacobian(temperatures_K, pH, ion, 0.0, parameters=parameters) * s
        self.m = w[..., None, None] * jac[..., :, None] * jac[..., None, :]  # (D, K, p, p)
        ft = np.array([f.temperature_K for f in fields])
        fph = np.array([f.pH for f in fields])
        fion = np.array([f.ionic_strength_M for f in fields])
        fsal = np.array([f.salinity for f in fields])
        self.c = prior.ln_k_jacobian(ft, fph, fion, fsal, parameters=parameters) * s  # (D,F,p)
        # the structural rules of the fit are decided at the prior guess
        frac = np.stack(list(prior.contributions(temperatures_K, pH, ion, 0.0).values()), -1)
        self.measurable = _cell_properties(prior, constraints, temperatures_K, pH, times)["w"] > 0
        self.rules = _FitRules(prior, temperatures_K, pH, frac)
        self.p = len(prior.parameter_names)
        self.prior_e = [
            (2 * j + 1, (_EA_SCALE_J_PER_MOL / prior.fit_ea_prior[1]) ** 2)
            for j in range(len(prior.pathways))
        ]
        self.g = _pathway_vectors(prior, constraints.allowed_temperatures_K) * s  # (P, U, p)
        self.n_evaluated = 0
        self.ridge = 0.0
        self.ea_from_data_only = False

    def variances(self, alloc: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """var(ln k) at the field conditions (m, D, F), inf where not identifiable; dof (m,)."""
        alloc = np.atleast_2d(np.asarray(alloc, dtype=float))
        self.n_evaluated += alloc.shape[0]
        d = self.m.shape[0]
        out = np.empty((alloc.shape[0], d, self.c.shape[1]))
        dof_out = np.empty(alloc.shape[0])
        chunk = max(1, 40_000 // d)
        for start in range(0, alloc.shape[0], chunk):
            a = alloc[start : start + chunk]
            st = self.rules.apply(a * self.measurable[None, :])
            info = np.einsum("mk,dkij->mdij", a, self.m)
            if self.ridge:
                info = info + self.ridge * np.eye(self.p)
            for j, (pos, prec) in enumerate(self.prior_e):
                info[:, :, pos, pos] += st["from_prior"][:, j, None] * prec
            ev = np.linalg.eigvalsh(info)
            ok = (ev[..., -1] > 0) & (ev[..., 0] > 1e-10 * ev[..., -1])
            if not self.ridge:
                ok &= st["feasible"][:, None]
                if self.ea_from_data_only:
                    ok &= ~np.any(st["from_prior"], axis=1)[:, None]
            safe = np.where(ok[..., None, None], info, np.eye(self.p))
            rhs = np.broadcast_to(np.swapaxes(self.c, -1, -2), safe.shape[:-1] + (self.c.shape[1],))
            x = np.linalg.solve(safe, rhs)  # (m, D, p, F)
            var = np.einsum("dfp,mdpf->mdf", self.c, x)
            if not self.ridge:
                cov = np.linalg.inv(safe)
                path_var = np.einsum("jup,mdpq,juq->mdju", self.g, cov, self.g).min(axis=-1)
                ok &= np.all(path_var <= _MAX_PATHWAY_SE_LN_K**2, axis=-1)
            out[start : start + chunk] = np.where(ok[..., None], var, np.inf)
            dof_out[start : start + chunk] = np.maximum(st["dof"], 1)
        return out, dof_out

    def score(self, alloc: np.ndarray) -> np.ndarray:
        """Criterion per allocation: the worst (t sigma)^2 over the field conditions.

        With several parameter draws (the first one the guess itself) it is the median
        over the draws, provided the design works at the guess; the median is not thrown
        by the few draws under which a planned run becomes unmeasurable.

        The Student-t factor makes the criterion the squared half-width of the interval the
        surface fit will report, so that a design does not gain by leaving more activation
        energies to the prior (fewer parameters) at the cost of degrees of freedom.
        """
        var, dof = self.variances(alloc)
        t2 = _t_quantile(self.level, dof) ** 2
        worst = var.max(axis=2) * t2[:, None]  # (m, D)
        if worst.shape[1] == 1:
            return worst[:, 0]
        med = np.percentile(worst, 50, axis=1, method="higher")
        return np.where(np.isfinite(worst[:, 0]), med, np.inf)


def _compositions(n: int, k: int) -> np.ndarray:
    """All ways to put n identical vessels into k cells, shape (comb(n+k-1, k-1), k)."""
    if k == 1:
        return np.array([[n]])
    bars = np.array(list(itertools.combinations(range(n + k - 1), k - 1)))
    m = bars.shape[0]
    edges = np.hstack([np.full((m, 1), -1), bars, np.full((m, 1), n + k - 1)])
    return np.diff(edges, axis=1) - 1


def _exchange(problem: _Problem, k: int, n: int, rng: np.random.Generator, n_starts: int):
    """Greedy start, one-vessel exchanges, then perturbed restarts from the best design.

    The greedy start adds vessels one at a time, each to the cell that helps most (a tiny
    ridge lets the first vessels be compared before the design identifies every
    parameter). The exchange step evaluates every move of one vessel from a used cell to
    any other cell and takes the best, until none improves the criterion. Each further
    start re-places a random third of the best design's vessels at random and exchanges
    again (an iterated local search).
    """
    alloc = np.zeros(k)
    for _ in range(n):
        cand = alloc[None, :] + np.eye(k)
        sc = problem.score(cand)
        if not np.any(np.isfinite(sc)):
            problem.ridge = 1e-6
            sc = problem.score(cand)
            problem.ridge = 0.0
        alloc = cand[int(np.argmin(sc))]

    def descend(alloc: np.ndarray) -> tuple[np.ndarray, float]:
        current = float(problem.score(alloc)[0])
        eye = np.eye(k)
        while True:
            used = np.nonzero(alloc > 0)[0]
            moves = (alloc[None, None, :] - eye[used][:, None, :] + eye[None, :, :]).reshape(-1, k)
            moves = moves[~np.eye(k, dtype=bool)[used].reshape(-1)]  # not from a cell to itself
            if moves.size == 0:
                return alloc, current
            sc = problem.score(moves)
            i = int(np.argmin(sc))
            improves = sc[i] < current * (1.0 - 1e-9)
            if improves or (not np.isfinite(current) and np.isfinite(sc[i])):
                alloc, current = moves[i], float(sc[i])
            else:
                return alloc, current

    best, best_score = descend(alloc)
    for _ in range(n_starts - 1):
        trial = best.copy()
        n_move = max(1, n // 3)
        for _ in range(n_move):
            src = rng.choice(np.nonzero(trial > 0)[0])
            trial[src] -= 1
            trial[rng.integers(k)] += 1
        trial, score = descend(trial)
        if score < best_score:
            best, best_score = trial, score
    return best, best_score


def _vessels_needed(
    problem: _Problem, k: int, n: int, score_n: float | None, var_target: float,
    max_exhaustive: int, rng: np.random.Generator, ea_prior_allowed: str,
) -> int | None:
    """Smallest vessel count (2 to 4n) whose best design meets the target, by bisection.

    Bisection is valid because the best criterion cannot grow with more vessels: a vessel
    adds information and a degree of freedom.
    """
    cache: dict[int, float] = {} if score_n is None else {n: score_n}

    def ok(m: int) -> bool:
        if m not in cache:
            cache[m] = _policy_search(
                problem, k, m, max_exhaustive, rng, ea_prior_allowed, n_starts=1
            )[1]
        return cache[m] <= var_target

    lo, hi = 2, 4 * n
    if not ok(hi):
        return None
    while lo < hi:
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid + 1
    return lo


def _policy_search(
    problem: _Problem, k: int, n: int, max_exhaustive: int, rng: np.random.Generator,
    ea_prior_allowed: str, n_starts: int = 4,
) -> tuple[np.ndarray, float, str, bool]:
    """Search under the Ea-prior policy; the flag says whether the prior had to be used."""
    if ea_prior_allowed == "always":
        problem.ea_from_data_only = False
        return (*_search(problem, k, n, max_exhaustive, rng, n_starts), False)
    problem.ea_from_data_only = True
    alloc, score, method = _search(problem, k, n, max_exhaustive, rng, n_starts)
    if math.isfinite(score) or ea_prior_allowed == "never":
        return alloc, score, method, False
    problem.ea_from_data_only = False
    alloc, score, method = _search(problem, k, n, max_exhaustive, rng, n_starts)
    return alloc, score, method, True


def _search(
    problem: _Problem, k: int, n: int, max_exhaustive: int, rng: np.random.Generator,
    n_starts: int = 4,
) -> tuple[np.ndarray, float, str]:
    total = math.comb(n + k - 1, k - 1)
    if total <= max_exhaustive:
        allocs = _compositions(n, k)
        sc = problem.score(allocs)
        i = int(np.argmin(sc))
        method = (
            f"exhaustive search over all {total} ways to allocate {n} vessel(s) to the "
            f"{k} candidate temperature × pH cell(s)"
        )
        return allocs[i].astype(float), float(sc[i]), method
    alloc, score = _exchange(problem, k, n, rng, n_starts=n_starts)
    method = (
        f"greedy allocation followed by one-vessel exchanges (Fedorov-type exchange "
        f"algorithm) and {n_starts - 1} perturbed restarts, because the {total} possible allocations of {n} "
        f"vessel(s) to {k} cell(s) exceed the exhaustive limit of {max_exhaustive}; the "
        "result is a local optimum, not guaranteed to be the global one"
    )
    return alloc, score, method


# ---------------------------------------------------------------------------------------
# tiered logic: the preliminary test
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class PreliminaryTestAdvice:
    """Whether to run the preliminary stability test before a full study.

    The preliminary test of OECD Test Guideline 111 (2004), "Hydrolysis as a Function of
    pH" (its first tier, the preliminary test): incubation for 5 days at 50 °C at pH 4, 7
    and 9; a loss below 10 % at each pH marks the substance as hydrolytically stable and
    normally no further hydrolysis testing is needed (as the guideline's published
    summary states it; the equivalence with a DT50 at 25 °C above about one year is
    recalled from memory). Consult the guideline itself for the full conditions.

    Attributes
    ----------
    recommended : bool
        True when the prior guess predicts a loss below 10 % at all three pH values.
    temperature_K, duration_s : float
        Test conditions [K], [s].
    pH_values : tuple of float
        Test pH values.
    expected_loss_percent : dict
        Expected loss under the prior guess, keyed by pH as text [%].
    loss_draws_percent : dict
        Losses over draws of the prior, keyed like ``expected_loss_percent`` [%].
    probability_stable : float
        Share of prior draws with a loss below 10 % at every pH [-].
    advice : str
        What to do.
    stop_rule : str
        Which preliminary result would end the hydrolysis study.
    caution : str
        :data:`kinetics.caution.CAUTION_TEXT`.
    """

    recommended: bool
    temperature_K: float
    duration_s: float
    pH_values: tuple[float, ...]
    expected_loss_percent: dict[str, float]
    loss_draws_percent: dict[str, np.ndarray]
    probability_stable: float
    advice: str
    stop_rule: str
    caution: str = CAUTION_TEXT

    def interval(self, level: float = 0.95) -> dict[str, tuple[float, float]]:
        """Central range of the expected loss over the prior draws, per pH [%]."""
        _quantile(level)
        lo, hi = 50.0 * (1.0 - level), 50.0 * (1.0 + level)
        return {
            key: (float(np.percentile(v, lo)), float(np.percentile(v, hi)))
            for key, v in self.loss_draws_percent.items()
        }

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form."""
        return {
            "recommended": self.recommended,
            "temperature_K": self.temperature_K,
            "duration_s": self.duration_s,
            "pH_values": list(self.pH_values),
            "expected_loss_percent": dict(self.expected_loss_percent),
            "loss_interval_95_percent": {k: list(v) for k, v in self.interval(0.95).items()},
            "probability_stable": self.probability_stable,
            "advice": self.advice,
            "stop_rule": self.stop_rule,
            "caution": self.caution,
        }


def preliminary_test_advice(
    prior: KineticsPrior,
    *,
    buffer_ionic_strength_M: float = 0.0,
    n_draws: int = 2000,
    seed: int = 0,
) -> PreliminaryTestAdvice:
    """Tiered logic: is the substance probably stable, so the preliminary test comes first?

    .. math::

        \\text{loss}(pH) = 1 - \\exp(-k_{obs}(50\\,°C, pH)\\; 5\\,d)

    under the prior guess at pH 4, 7 and 9 (the preliminary test of OECD Test
    Guideline 111, 2004, conditions as its published summary gives them). The test is
    recommended when the guess predicts a loss below 10 % at all three pH values.

    Parameters
    ----------
    prior : KineticsPrior
        Guess of the kinetics.
    buffer_ionic_strength_M : float
        Ionic strength of the buffers [mol/L].
    n_draws : int
        Prior draws for ``probability_stable``.
    seed : int
        Seed of those draws.

    Returns
    -------
    PreliminaryTestAdvice
    """
    ion = _finite(buffer_ionic_strength_M, "buffer_ionic_strength_M")
    rng = np.random.default_rng(seed)
    draws = prior.sample_parameters(n_draws, rng)
    t = np.full(len(_PRELIM_PH), _PRELIM_TEMPERATURE_K)
    ph = np.array(_PRELIM_PH)
    k0 = np.exp(prior.ln_k(t, ph, ion, 0.0))
    kd = np.exp(prior.ln_k(t, ph, ion, 0.0, parameters=draws))
    loss0 = 100.0 * (1.0 - np.exp(-k0 * _PRELIM_DURATION_S))
    lossd = 100.0 * (1.0 - np.exp(-kd * _PRELIM_DURATION_S))
    keys = [f"{x:g}" for x in _PRELIM_PH]
    stable = bool(np.all(loss0 < 100.0 * _PRELIM_MAX_LOSS))
    p_stable = float(np.mean(np.all(lossd < 100.0 * _PRELIM_MAX_LOSS, axis=1)))
    losses = ", ".join(f"{v:.1f} % at pH {k}" for k, v in zip(keys, loss0))
    stop_rule = (
        "If the preliminary test shows less than 10 % loss after 5 days at 50 °C at each of "
        "pH 4, 7 and 9, the substance counts as hydrolytically stable under OECD Test "
        "Guideline 111 (2004) and the hydrolysis study generally ends there; a loss of 10 % "
        "or more at any pH means the full study (the recommended design) is needed for that "
        "pH."
    )
    if stable:
        advice = (
            f"The prior guess predicts {losses} after 5 days at 50 °C: the substance is "
            "probably hydrolytically stable. Run the preliminary test of OECD Test Guideline "
            f"111 (2004) first (prior probability of passing it: {100 * p_stable:.0f} %); "
            "plan the full study only if it fails."
        )
    else:
        advice = (
            f"The prior guess predicts {losses} after 5 days at 50 °C, so the substance is "
            "not expected to pass the preliminary stability test of OECD Test Guideline 111 "
            "(2004); the full study can be planned directly (prior probability that it would "
            f"pass anyway: {100 * p_stable:.0f} %)."
        )
    return PreliminaryTestAdvice(
        recommended=stable,
        temperature_K=_PRELIM_TEMPERATURE_K,
        duration_s=_PRELIM_DURATION_S,
        pH_values=_PRELIM_PH,
        expected_loss_percent={k: float(v) for k, v in zip(keys, loss0)},
        loss_draws_percent={k: lossd[:, i] for i, k in enumerate(keys)},
        probability_stable=p_stable,
        advice=advice,
        stop_rule=stop_rule,
    )


# ---------------------------------------------------------------------------------------
# naive design and recommendation
# ---------------------------------------------------------------------------------------


def naive_design(
    prior: KineticsPrior,
    constraints: LabConstraints,
    *,
    temperatures_K: Sequence[float] | None = None,
    pH_values: Sequence[float] = (4.0, 7.0, 9.0),
    sampling: str = "equal_over_duration",
) -> tuple[DesignRun, ...]:
    """A design of the same cost without design thinking, for comparison.

    The laboratory's vessels are spread round-robin over the given temperatures (default:
    the allowed one nearest 25 °C) × the allowed pH values nearest 4, 7 and 9, and every
    vessel is sampled at equally spaced times over the maximum duration
    (``sampling="equal_over_duration"``) or by the rule of :func:`sampling_times_s`
    (``sampling="rule"``, to see what the allocation alone gains).

    Parameters
    ----------
    prior : KineticsPrior
        Guess of the kinetics (only used to fill in the expected rates).
    constraints : LabConstraints
        Vessels, samples, duration.
    temperatures_K : sequence of float or None
        Temperatures of the naive design [K].
    pH_values : sequence of float
        Wanted pH values; each is replaced by the nearest allowed one.
    sampling : str
        "equal_over_duration" or "rule".

    Returns
    -------
    tuple of DesignRun
    """
    _choice(sampling, "sampling", NAIVE_SAMPLING)
    allowed_t = np.array(constraints.allowed_temperatures_K)
    if temperatures_K is None:
        temps = [float(allowed_t[np.argmin(np.abs(allowed_t - 298.15))])]
    else:
        temps = sorted({float(validate_temperature_K(t)) for t in temperatures_K})
    allowed_ph = np.array(constraints.allowed_pH)
    phs = sorted({float(allowed_ph[np.argmin(np.abs(allowed_ph - p))]) for p in pH_values})
    cells = [(t, p) for t in temps for p in phs]
    counts = [0] * len(cells)
    for i in range(constraints.n_vessels):
        counts[i % len(cells)] += 1
    times = tuple(np.linspace(0.0, constraints.max_duration_s, constraints.samples_per_vessel))
    ion = constraints.buffer_ionic_strength_M
    runs = []
    for (t, p), n in zip(cells, counts):
        if n == 0:
            continue
        k = float(np.exp(prior.ln_k(t, p, ion, 0.0)[0]))
        t_s = tuple(sampling_times_s(k, constraints)) if sampling == "rule" else times
        runs.append(DesignRun(temperature_K=t, pH=p, n_vessels=n, sampling_times_s=t_s,
                              expected_k_per_s=k, expected_dt50_s=math.log(2.0) / k))
    return tuple(runs)


@dataclass(frozen=True)
class DesignRecommendation:
    """The recommended study design and why.

    Attributes
    ----------
    runs : tuple of DesignRun
        Recommended temperatures × pH × vessels × sampling times.
    evaluation : DesignEvaluation
        Its expected precision, variance decomposition and Fisher information.
    target_width_ratio : float
        Wanted ratio upper/lower of the DT50 interval [-].
    level : float
        Interval level.
    width_ratio : numpy.ndarray
        Predicted ratio at each field condition [-].
    target_met : numpy.ndarray
        Per field condition, whether the predicted ratio is at or below the target.
    all_targets_met : bool
        All field conditions meet the target.
    width_ratio_prior_range : numpy.ndarray
        5th and 95th percentiles of the predicted ratio when the true kinetics are drawn
        from the prior's uncertainty, shape (n_field, 2) [-] (inf when some plausible
        kinetics would leave the design unable to identify the surface).
    vessels_needed : int or None
        Smallest number of vessels whose best design meets every target (searched up to
        four times the given number; ``None`` if none does).
    naive_runs : tuple of DesignRun
        A naive design of the same cost (:func:`naive_design`).
    naive_evaluation : DesignEvaluation
        Its expected precision.
    criterion : str
        "local" or "prior_median".
    search_method : str
        How the design was found.
    n_designs_evaluated : int
        Number of allocations whose criterion was computed.
    excluded_cells : tuple of str
        Allowed cells not offered to the search, with the reason.
    sampling_rule : str
        The sampling-time rule.
    preliminary_test : PreliminaryTestAdvice
        Tiered logic.
    reasoning : tuple of str
        Plain-language explanation.
    caution : str
        :data:`kinetics.caution.CAUTION_TEXT`.
    """

    runs: tuple[DesignRun, ...]
    evaluation: DesignEvaluation
    target_width_ratio: float
    level: float
    width_ratio: np.ndarray
    target_met: np.ndarray
    all_targets_met: bool
    width_ratio_prior_range: np.ndarray
    vessels_needed: int | None
    naive_runs: tuple[DesignRun, ...]
    naive_evaluation: DesignEvaluation
    criterion: str
    search_method: str
    n_designs_evaluated: int
    excluded_cells: tuple[str, ...]
    sampling_rule: str
    preliminary_test: PreliminaryTestAdvice
    reasoning: tuple[str, ...]
    caution: str = CAUTION_TEXT

    def interval(self, level: float = 0.95) -> dict[str, np.ndarray]:
        """Expected DT50 interval at the field conditions (see DesignEvaluation.interval)."""
        return self.evaluation.interval(level)

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form (infinite widths become null)."""

        def num(x: float) -> float | None:
            return float(x) if math.isfinite(float(x)) else None

        ev, nv = self.evaluation, self.naive_evaluation
        fields = []
        for i, f in enumerate(ev.field_conditions):
            fields.append({
                "temperature_K": f.temperature_K,
                "pH": f.pH,
                "salinity": f.salinity,
                "ionic_strength_M": f.ionic_strength_M,
                "label": f.label,
                "expected_dt50_s": num(ev.dt50_s[i]),
                "se_ln_k": num(ev.se_ln_k[i]),
                "width_ratio": num(self.width_ratio[i]),
                "target_met": bool(self.target_met[i]),
                "width_ratio_prior_range": [num(x) for x in self.width_ratio_prior_range[i]],
                "naive_width_ratio": num(nv.width_ratio[i]),
                "variance_by_run": ev.variance_by_run[i],
                "variance_by_parameter": ev.variance_by_parameter[i],
                "variance_by_pathway": ev.variance_by_pathway[i],
                "between_run_scatter_share": num(ev.scatter_share[i]),
            })
        return {
            "runs": [r.to_dict() for r in self.runs],
            "n_vessels": ev.n_vessels,
            "target_width_ratio": self.target_width_ratio,
            "level": self.level,
            "all_targets_met": self.all_targets_met,
            "field_conditions": fields,
            "ea_from_prior": list(ev.ea_from_prior),
            "vessels_needed": self.vessels_needed,
            "naive_runs": [r.to_dict() for r in self.naive_runs],
            "criterion": self.criterion,
            "search_method": self.search_method,
            "n_designs_evaluated": self.n_designs_evaluated,
            "excluded_cells": list(self.excluded_cells),
            "sampling_rule": self.sampling_rule,
            "preliminary_test": self.preliminary_test.to_dict(),
            "reasoning": list(self.reasoning),
            "caution": self.caution,
        }


SAMPLING_RULE = (
    "Each vessel is sampled at time zero and then at equal intervals up to the time at "
    "which 90 % of the substance is expected to be gone (about 3.3 expected half-lives), "
    "or up to the maximum duration if that comes first (the end point of the higher tiers "
    "of OECD Test Guideline 111, 2004: 90 % hydrolysis or 30 days); intervals are never "
    "shorter than the minimum sampling interval. Samples expected below the LOQ are not "
    "counted. (Equal spacing: common practice, no source.) A run too slow to decline much within the maximum "
    "duration is sampled over the whole duration; the Fisher information gives the small "
    "decline its correspondingly small weight."
)


def recommend_design(
    prior: KineticsPrior,
    field_conditions: FieldCondition | Sequence[FieldCondition],
    constraints: LabConstraints,
    *,
    target_width_ratio: float = 1.5,
    level: float = 0.95,
    criterion: str = "local",
    n_prior_draws: int = 32,
    max_exhaustive: int = 100_000,
    ea_prior_allowed: str = "if_needed",
    seed: int = 0,
) -> DesignRecommendation:
    """Recommend temperatures, pH values, vessels and sampling times for a target precision.

    The criterion is c-optimality for ln k at the field condition(s) (minimax over several
    field conditions), from the Fisher information of the two-stage fit described in
    :func:`evaluate_design`:

    .. math::

        \\min_{\\xi}\\; \\max_f\\; c_f^T I(\\xi)^{-1} c_f, \\qquad
        \\text{ratio}_f = \\exp\\bigl(2 z_{(1+level)/2} \\sqrt{c_f^T I^{-1} c_f}\\bigr)

    over allocations :math:`\\xi` of the vessels to the allowed temperature × pH cells
    (Atkinson, Donev & Tobias 2007, ch. 10, recalled from memory). Sampling times follow
    :func:`sampling_times_s`. The search is exhaustive over all allocations when there are
    at most ``max_exhaustive`` of them, else a greedy start improved by one-vessel exchanges
    (a Fedorov-type exchange algorithm; a local optimum).

    Parameters
    ----------
    prior : KineticsPrior
        Guess of the kinetics; its pathway set is the one the surface fit will use.
    field_conditions : FieldCondition or sequence of them
        Where the DT50 must be known.
    constraints : LabConstraints
        What the laboratory can do.
    target_width_ratio : float
        Wanted ratio upper/lower of the DT50 interval at ``level`` (e.g. 1.5) [-].
    level : float
        Interval level (0.95).
    criterion : str
        "local" (at the prior guess) or "prior_median" (median over the guess and
        ``n_prior_draws`` draws of the prior: more robust when the guess is rough; the
        exhaustive limit is divided by the number of draws).
    n_prior_draws : int
        Prior draws for "prior_median" and for the robustness range.
    max_exhaustive : int
        Largest number of allocations searched exhaustively.
    ea_prior_allowed : str
        "if_needed" (default): only designs in which the data give every pathway's
        activation energy (its runs at two or more temperature levels) are searched,
        unless none exists, when designs leaning on the fit's generic Ea prior are
        allowed and the reasoning says so; "always": any design; "never": raise
        :class:`~kinetics.errors.DataError` rather than lean on the prior. A prior Ea
        pulls the fit towards a generic value, a bias the interval does not show.
    seed : int
        Seed of the prior draws and of the exchange starts.

    Returns
    -------
    DesignRecommendation

    Raises
    ------
    InputError
        For an invalid target, level or criterion.
    DataError
        When no allocation of the vessels to the allowed cells can identify the pathways
        of the prior (too few vessels, or every cell of a pathway too slow to measure).
    """
    fields = _check_fields(field_conditions)
    if not isinstance(prior, KineticsPrior):
        raise InputError(f"prior must be a KineticsPrior, got {prior!r}")
    if not isinstance(constraints, LabConstraints):
        raise InputError(f"constraints must be LabConstraints, got {constraints!r}")
    target = _finite(target_width_ratio, "target_width_ratio")
    if target <= 1.0:
        raise InputError(
            f"target_width_ratio must exceed 1 (upper/lower of the DT50 interval), got {target!r}"
        )
    _quantile(level)
    _choice(criterion, "criterion", CRITERIA)
    _choice(ea_prior_allowed, "ea_prior_allowed", EA_PRIOR_CHOICES)
    n_draws = _count(n_prior_draws, "n_prior_draws", 2)
    max_ex = _count(max_exhaustive, "max_exhaustive", 1)
    rng = np.random.default_rng(seed)
    n = constraints.n_vessels

    grid = [(t, p) for t in constraints.allowed_temperatures_K for p in constraints.allowed_pH]
    all_t = np.array([g[0] for g in grid])
    all_ph = np.array([g[1] for g in grid])
    cells = _cell_properties(prior, constraints, all_t, all_ph, None)
    se_run = np.sqrt(cells["var_run"])
    keep = np.isfinite(se_run) & (se_run <= _MAX_RUN_SE_LN_K)
    excluded = []
    for i in np.nonzero(~keep)[0]:
        k = cells["k"][i]
        loss = 100.0 * (1.0 - math.exp(-k * cells["times"][i][-1]))
        if loss < 50.0:
            why = (
                f"expected loss only {loss:.2g} % within the maximum duration "
                f"({_fmt_duration(constraints.max_duration_s)}): too slow to measure against a "
                f"{constraints.analytical_error_percent:g} % analytical error"
            )
        else:
            why = (
                f"expected DT50 {_fmt_duration(math.log(2.0) / k)} is too short for samples at "
                f"least {_fmt_duration(constraints.min_sampling_interval_s)} apart above the LOQ"
            )
        excluded.append(f"{_celsius(all_t[i])}, pH {all_ph[i]:g}: {why}")
    if not np.any(keep):
        raise DataError(
            "no allowed temperature × pH cell can be measured within the constraints: "
            + "; ".join(excluded)
        )
    cand_t, cand_ph, cand_times = all_t[keep], all_ph[keep], cells["times"][keep]
    k_cells = len(cand_t)

    draws = prior.sample_parameters(n_draws, rng)
    params = (
        prior.estimates[None, :] if criterion == "local"
        else np.vstack([prior.estimates[None, :], draws])
    )
    problem = _Problem(prior, fields, constraints, cand_t, cand_ph, cand_times, params, level)
    alloc, score, method, leaned_on_prior = _policy_search(
        problem, k_cells, n, max(1, max_ex // params.shape[0]), rng, ea_prior_allowed
    )
    if not math.isfinite(score) and ea_prior_allowed == "never":
        raise DataError(
            f"no allocation of {n} vessel(s) to the measurable cells lets the data give the "
            f"activation energy of every pathway ({', '.join(prior.pathway_names)}): each "
            "pathway needs measurable runs at two or more temperatures at the pH levels it "
            "dominates; add vessels or temperatures, or allow the Ea prior"
        )
    if not math.isfinite(score):
        frac = cells["frac"][keep]
        shares = ", ".join(
            f"{p} at most {100 * float(frac[:, j].max()):.2g} %"
            for j, p in enumerate(prior.pathway_names)
        )
        raise DataError(
            f"no allocation of {n} vessel(s) to the measurable cells determines every "
            f"pathway of the model ({', '.join(prior.pathway_names)}) well enough for the "
            f"fit (standard error of ln k of each pathway at most {_MAX_PATHWAY_SE_LN_K}); "
            f"share of k_obs in the measurable cells: {shares}. Add vessels, allow "
            "more temperatures or pH values, lengthen the maximum duration, or drop a pathway "
            "that no allowed cell can measure"
        )
    used = alloc > 0
    ev = _evaluate(
        prior, fields, constraints, cand_t[used], cand_ph[used], alloc[used],
        cand_times[used], level,
    )
    width = ev.width_ratio
    met = width <= target

    # robustness: the chosen design under kinetics drawn from the prior
    robust = _Problem(prior, fields, constraints, cand_t, cand_ph, cand_times, draws, level)
    var_r, dof_r = robust.variances(alloc)
    with np.errstate(over="ignore"):
        w_d = np.exp(2.0 * float(_t_quantile(level, dof_r)[0]) * np.sqrt(var_r[0]))  # (D, F)
    prior_range = np.array([
        [np.percentile(w_d[:, f], q, method="nearest") for q in (5, 95)]
        for f in range(len(fields))
    ])

    # smallest number of vessels meeting every target (local criterion at the guess)
    local = problem if criterion == "local" else _Problem(
        prior, fields, constraints, cand_t, cand_ph, cand_times, prior.estimates[None, :], level
    )
    var_target = (math.log(target) / 2.0) ** 2  # the score is (t sigma)^2
    needed = _vessels_needed(
        local, k_cells, n, score if criterion == "local" else None, var_target,
        min(max_ex, 5_000), rng, ea_prior_allowed,
    )

    naive = naive_design(prior, constraints)
    naive_ev = evaluate_design(naive, prior, fields, constraints, level=level)
    prelim = preliminary_test_advice(
        prior, buffer_ionic_strength_M=constraints.buffer_ionic_strength_M, seed=seed
    )
    reasoning = _reasoning(
        prior, fields, constraints, ev, target, met, needed, naive_ev, prelim, excluded,
        method, prior_range, criterion, leaned_on_prior, n_draws,
    )
    return DesignRecommendation(
        runs=ev.runs,
        evaluation=ev,
        target_width_ratio=target,
        level=float(level),
        width_ratio=width,
        target_met=met,
        all_targets_met=bool(np.all(met)),
        width_ratio_prior_range=prior_range,
        vessels_needed=needed,
        naive_runs=naive,
        naive_evaluation=naive_ev,
        criterion=criterion,
        search_method=method,
        n_designs_evaluated=problem.n_evaluated,
        excluded_cells=tuple(excluded),
        sampling_rule=SAMPLING_RULE,
        preliminary_test=prelim,
        reasoning=reasoning,
    )


def _reasoning(
    prior: KineticsPrior, fields: tuple[FieldCondition, ...], constraints: LabConstraints,
    ev: DesignEvaluation, target: float, met: np.ndarray, needed: int | None,
    naive_ev: DesignEvaluation, prelim: PreliminaryTestAdvice, excluded: list[str],
    method: str, prior_range: np.ndarray, criterion: str, leaned_on_prior: bool,
    n_draws: int,
) -> tuple[str, ...]:
    out: list[str] = []
    if prelim.recommended:
        out.append(prelim.advice + " " + prelim.stop_rule)
    pct = int(round(100 * ev.level))
    for i, f in enumerate(fields):
        contrib = prior.contributions(f.temperature_K, f.pH, f.ionic_strength_M, f.salinity)
        dom = max(contrib, key=lambda p: float(contrib[p][0]))
        verdict = "meets" if met[i] else "does NOT meet"
        out.append(
            f"At {f.describe()} the prior guess gives DT50 {_fmt_duration(ev.dt50_s[i])}, "
            f"{100 * float(contrib[dom][0]):.0f} % of it through the {dom} pathway. The "
            f"recommended design gives a {pct} % DT50 interval ratio of {ev.width_ratio[i]:.2f}, "
            f"which {verdict} the target {target:g}; a naive design of the same cost "
            f"(pH 4, 7, 9 at one temperature, equally spaced samples) would give "
            f"{naive_ev.width_ratio[i]:.2f}."
        )
        runs = sorted(
            ((v, k) for k, v in ev.variance_by_run[i].items() if k != "prior"), reverse=True
        )
        top = "; ".join(f"{k}: {100 * v:.0f} %" for v, k in runs[:3])
        out.append(
            f"Share of the variance of ln k at this condition by run (noise of that run): {top}"
            + (f"; the Ea prior: {100 * ev.variance_by_run[i]['prior']:.0f} %"
               if ev.variance_by_run[i].get("prior", 0.0) > 0.005 else "")
            + f". Between-run scatter makes up {100 * ev.scatter_share[i]:.0f} % of it."
        )
        path = sorted(((v, p) for p, v in ev.variance_by_pathway[i].items()), reverse=True)
        pars = sorted(((v, p) for p, v in ev.variance_by_parameter[i].items()), reverse=True)
        out.append(
            "By pathway: " + ", ".join(f"{p} {100 * v:.0f} %" for v, p in path)
            + "; the largest single parameter is " + f"{pars[0][1]} ({100 * pars[0][0]:.0f} %)"
            + " (covariance terms are split between the two parameters; negative shares "
            "are correlations that reduce the variance)."
        )
        t_lo = min(r.temperature_K for r in ev.runs)
        t_hi = max(r.temperature_K for r in ev.runs)
        if not t_lo <= f.temperature_K <= t_hi:
            out.append(
                f"The field temperature {_celsius(f.temperature_K)} lies outside the design's "
                f"{_celsius(t_lo)}-{_celsius(t_hi)}: the prediction extrapolates in "
                "temperature through the activation energy, which is why the temperature "
                "spread of the design matters."
            )
        lo, hi = prior_range[i]
        upper = (
            f"{hi:.2f}" if math.isfinite(hi) else
            "no bound: under some plausible kinetics a planned run would decline too little "
            "or too fast to measure, so check the first samples against the expected decline "
            "and adjust the sampling times"
        )
        out.append(
            f"If the true kinetics differ from the guess within its stated uncertainty, the "
            f"ratio would lie between {lo:.2f} and {upper} (5th-95th percentile over "
            f"{n_draws} prior draws; the design was chosen by the {criterion} "
            "criterion)."
        )
    if ev.ea_from_prior:
        mean, sd = prior.fit_ea_prior
        out.append(
            "The runs the surface fit assigns to the pathway(s) " + ", ".join(ev.ea_from_prior)
            + " are at one temperature level only, so the fit takes their activation energy "
            f"from the prior ({mean:.0f} ± {sd:.0f} J/mol); pass the same prior to the fit. "
            "A prior pulls the fit towards a generic value, a bias the interval does not show"
            + (": no design within the constraints lets the data give every activation energy."
               if leaned_on_prior else ".")
        )
    if needed is None:
        out.append(
            f"No design with up to {4 * constraints.n_vessels} vessels meets every target "
            "within these constraints: widen the allowed temperatures, lengthen the maximum "
            "duration, reduce the analytical error or relax the target."
        )
    elif needed < constraints.n_vessels:
        out.append(f"About {needed} vessel(s) would already meet the target.")
    elif needed > constraints.n_vessels:
        out.append(f"About {needed} vessel(s) would be needed to meet the target.")
    out.append("Design search: " + method + ".")
    if excluded:
        out.append("Cells not offered to the search: " + "; ".join(excluded) + ".")
    out.append("Sampling rule: " + SAMPLING_RULE)
    return tuple(out)


# ---------------------------------------------------------------------------------------
# validation by simulation
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class SimulationSummary:
    """Realised precision of a design over many simulated studies, each fitted by kinetics.

    Attributes
    ----------
    runs : tuple of DesignRun
        The simulated design.
    field_condition : FieldCondition
        Where the DT50 was predicted.
    level : float
        Interval level.
    n_studies : int
        Simulated studies.
    n_failed : int
        Studies whose surface fit could not be made (counted with an infinite width).
    width_ratio : numpy.ndarray
        Realised ratio upper/lower of the DT50 confidence interval per study [-].
    median_width_ratio : float
        Median of ``width_ratio`` (failures included as infinite) [-].
    predicted_width_ratio : float
        The Fisher-information prediction for the same design (:func:`evaluate_design`).
    coverage : float
        Share of successful studies whose interval contains the true DT50 [-].
    runs_lost_mean : float
        Mean number of vessels per study whose series could not give a rate (too little
        decline or too few samples above the LOQ) [-].
    true_dt50_s : float
        DT50 at the field condition under the simulated kinetics [s].
    caution : str
        :data:`kinetics.caution.CAUTION_TEXT`.
    """

    runs: tuple[DesignRun, ...]
    field_condition: FieldCondition
    level: float
    n_studies: int
    n_failed: int
    width_ratio: np.ndarray
    median_width_ratio: float
    predicted_width_ratio: float
    coverage: float
    runs_lost_mean: float
    true_dt50_s: float
    caution: str = CAUTION_TEXT

    def interval(self, level: float = 0.9) -> tuple[float, float]:
        """Central range of the realised width ratios (failures as infinite) [-]."""
        _quantile(level)
        lo, hi = 50.0 * (1.0 - level), 50.0 * (1.0 + level)
        return (
            float(np.percentile(self.width_ratio, lo, method="nearest")),
            float(np.percentile(self.width_ratio, hi, method="nearest")),
        )


def _fit_many(series: list, error_model: str, fit_sfo_batch: Any) -> list:
    """Batch SFO fits; a series that cannot be fitted gives None (found by halving)."""
    if not series:
        return []
    try:
        return list(fit_sfo_batch(series, time_unit="s", error_model=error_model))
    except KineticsError:
        if len(series) == 1:
            return [None]
    half = len(series) // 2
    return (_fit_many(series[:half], error_model, fit_sfo_batch)
            + _fit_many(series[half:], error_model, fit_sfo_batch))


def simulate_design(
    runs: Sequence[DesignRun],
    truth: KineticsPrior,
    field_condition: FieldCondition,
    constraints: LabConstraints,
    *,
    n_studies: int = 200,
    level: float = 0.95,
    seed: int = 0,
) -> SimulationSummary:
    """Simulate studies run with a design and fit each one with :mod:`kinetics`.

    Each vessel gets a true rate :math:`\\ln k = \\ln k_{obs}(T, pH) + \\tau\\varepsilon`
    from ``truth`` (its between-run scatter included), concentrations
    :math:`C_0 e^{-kt}` with Gaussian analytical noise of the constraints' error model, and
    samples observed below the LOQ are dropped. The series are fitted with
    :func:`kinetics.series.fit_sfo_batch` (same error model); a series that cannot be
    fitted, or whose ln k has a standard error above 1 (no measurable decline, reported
    as such by a laboratory; common practice, no source), is left out; the rates with
    :func:`kinetics.surface.fit_surface` (pathways and Ea prior of ``truth``), and the DT50
    interval at the field condition comes from :func:`kinetics.prediction.predict`.

    Parameters
    ----------
    runs : sequence of DesignRun
        The design (for example ``recommend_design(...).runs`` or :func:`naive_design`).
    truth : KineticsPrior
        The kinetics to simulate (its guesses are taken as the true values).
    field_condition : FieldCondition
        Where the DT50 is predicted.
    constraints : LabConstraints
        Analytical error, error model, LOQ, buffer ionic strength.
    n_studies : int
        Number of simulated studies.
    level : float
        Interval level.
    seed : int
        Seed of the simulation.

    Returns
    -------
    SimulationSummary
    """
    from kinetics.prediction import predict
    from kinetics.series import fit_sfo_batch
    from kinetics.surface import RateMeasurement, fit_surface

    n_studies = _count(n_studies, "n_studies", 1)
    _quantile(level)
    if not isinstance(field_condition, FieldCondition):
        raise InputError(f"field_condition must be a FieldCondition, got {field_condition!r}")
    runs = tuple(runs)
    if not runs or not all(isinstance(r, DesignRun) for r in runs):
        raise InputError("runs must be a non-empty sequence of DesignRun")
    rng = np.random.default_rng(seed)
    ion = constraints.buffer_ionic_strength_M
    r = constraints.analytical_error_percent / 100.0
    loq = constraints.loq_percent  # in % of C0 = 100
    vessels = [(run.temperature_K, run.pH, np.asarray(run.sampling_times_s))
               for run in runs for _ in range(run.n_vessels)]
    t_v = np.array([v[0] for v in vessels])
    ph_v = np.array([v[1] for v in vessels])
    ln_k_true = truth.ln_k(t_v, ph_v, ion, 0.0)
    f = field_condition
    true_dt50 = float(
        math.log(2.0) / np.exp(truth.ln_k(f.temperature_K, f.pH, f.ionic_strength_M,
                                          f.salinity)[0])
    )
    predicted = evaluate_design(runs, truth, f, constraints, level=level).width_ratio[0]
    widths = np.full(n_studies, np.inf)
    covered: list[bool] = []
    lost = 0
    failed = 0
    for study in range(n_studies):
        k = np.exp(ln_k_true + truth.between_run_sd_ln_k * rng.standard_normal(len(vessels)))
        series, where = [], []
        for i, (_, _, times) in enumerate(vessels):
            mean = 100.0 * np.exp(-k[i] * times)
            noise = rng.standard_normal(times.size)
            obs = mean * (1.0 + r * noise) if constraints.error_model == "proportional" \
                else mean + 100.0 * r * noise
            keep = obs >= max(loq, 1e-9)
            if keep.sum() >= 3:
                series.append((times[keep], obs[keep]))
                where.append(i)
        fits = _fit_many(series, constraints.error_model, fit_sfo_batch)
        measurements = []
        for i, fit in zip(where, fits):
            if fit is None or not fit.se_ln_k <= _MAX_REPORTED_SE_LN_K:
                continue
            try:
                measurements.append(RateMeasurement.from_series_fit(
                    fit, temperature_K=vessels[i][0], pH=vessels[i][1], ionic_strength_M=ion,
                ))
            except KineticsError:
                continue
        lost += len(vessels) - len(measurements)
        try:
            surface = fit_surface(
                measurements, pathways=truth.pathway_names,
                ea_prior_J_per_mol=truth.fit_ea_prior,
                reference_temperature_K=truth.reference_temperature_K,
            )
            pred = predict(surface, f.temperature_K, f.pH, ionic_strength_M=f.ionic_strength_M,
                           salinity=f.salinity, level=level)
        except KineticsError:
            failed += 1
            continue
        lo, hi = float(pred.dt50_ci_low_s[0]), float(pred.dt50_ci_high_s[0])
        widths[study] = hi / lo
        covered.append(lo <= true_dt50 <= hi)
    return SimulationSummary(
        runs=runs,
        field_condition=f,
        level=float(level),
        n_studies=n_studies,
        n_failed=failed,
        width_ratio=widths,
        median_width_ratio=float(np.percentile(widths, 50, method="nearest")),
        predicted_width_ratio=float(predicted),
        coverage=float(np.mean(covered)) if covered else 0.0,
        runs_lost_mean=lost / n_studies,
        true_dt50_s=true_dt50,
    )
