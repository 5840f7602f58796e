"""Tests of kinetics.normalisation: DT50 carried to a reference temperature."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import InputError
from kinetics.normalisation import (
    EFSA_2008_EA_J_PER_MOL,
    NORMALISATION_METHODS,
    normalisation_factor,
    normalise_dt50,
)

DAY_S = 86400.0


def test_efsa_default_hand_computed_20C_to_12C():
    # Hand computation (EFSA Journal (2008) 622 default Ea = 65.4 kJ/mol; R = 8.314462618):
    #   Ea/R = 65400 / 8.314462618 = 7865.812 K
    #   1/285.15 - 1/293.15 = 8 / (285.15 * 293.15) = 8 / 83591.7225 = 9.570326e-5 1/K
    #   exponent = 7865.812 * 9.570326e-5 = 0.752784
    #   factor = exp(0.752784) = 2.122902
    #   DT50(12 °C) = 10 d * 2.122902 = 21.22902 d
    res = normalise_dt50(10 * DAY_S, 293.15, 285.15, method="efsa_2008")
    assert_allclose(res.factor, 2.122902, rtol=1e-6)
    assert_allclose(res.dt50_reference_s / DAY_S, 21.22902, rtol=1e-6)
    assert res.method == "efsa_2008" and "65.4 kJ/mol" in res.method_description
    assert res.caution == CAUTION_TEXT


def test_efsa_default_reproduces_q10_of_2_58():
    # Q10 = k(20 °C)/k(10 °C) = exp(Ea/R * 10/(283.15 * 293.15))
    #     = exp(7865.812 * 1.2047406e-4) = exp(0.947640) = 2.5796
    # The EFSA (2008) opinion gives Q10 = 2.58 for Ea = 65.4 kJ/mol (from memory).
    f = normalisation_factor(293.15, 283.15, method="efsa_2008")
    assert_allclose(f, 2.58, rtol=2e-3)


@pytest.mark.parametrize(
    "t_from_K, t_to_K, factor",
    [
        # ECHA Guidance R.16 (2016): DT50(T2) = DT50(T1) * exp(0.08 (T1 - T2))
        (293.15, 285.15, 1.8964809),  # exp(0.08 * 8) = exp(0.64) = 1.8964809
        (298.15, 285.15, 2.8292170),  # exp(0.08 * 13) = exp(1.04) = 2.8292170
        (285.15, 298.15, 1 / 2.8292170),  # the reverse direction: exp(-1.04) = 0.3534546
        (293.15, 293.15, 1.0),
    ],
)
def test_echa_r16_hand_computed(t_from_K, t_to_K, factor):
    res = normalise_dt50(5 * DAY_S, t_from_K, t_to_K, method="echa_r16")
    assert_allclose(res.factor, factor, rtol=1e-7)
    assert_allclose(res.dt50_reference_s, 5 * DAY_S * factor, rtol=1e-7)
    assert "0.08" in res.method_description and "R.16" in res.source


def test_efsa_25C_to_12C_hand_computed():
    # 1/285.15 - 1/298.15 = 13 / (285.15 * 298.15) = 1.5290974e-4
    # exponent = 7865.812 * 1.5290974e-4 = 1.202758; factor = exp(1.202758) = 3.329291
    assert_allclose(normalisation_factor(298.15, 285.15), 3.329291, rtol=1e-6)


def test_apparent_activation_energy_of_the_echa_factor():
    # the R.16 factor corresponds to an Ea that depends on the temperatures:
    # Ea = R * 0.08 * T1 * T2 = 8.314462618 * 0.08 * 293.15 * 285.15 = 55 600 J/mol
    res = normalise_dt50(1 * DAY_S, 293.15, 285.15, method="echa_r16")
    assert_allclose(res.apparent_Ea_J_per_mol, 8.314462618 * 0.08 * 293.15 * 285.15, rtol=1e-9)
    assert normalise_dt50(1 * DAY_S, 293.15, 293.15, method="echa_r16").apparent_Ea_J_per_mol is None


class OnePathway:
    """Neutral Arrhenius pathway with covariance, as a surface stand-in."""

    def __init__(self, ea=80e3, cov=((0.01, 20.0), (20.0, 4.0e6)), dof=7):
        self.estimates = np.array([math.log(1e-7), ea])
        self.covariance = np.array(cov)
        self.dof = dof
        self.temperature_range_K = (293.15, 323.15)
        self.pH_range = (4.0, 9.0)
        self.ea_from_prior = ()

    def ln_k(self, temperature_K, pH, ionic_strength_M=0.0, salinity=0.0, parameters=None):
        t = np.asarray(temperature_K, float)
        return self.estimates[0] - self.estimates[1] / 8.314462618 * (1 / t - 1 / 298.15)

    def ln_k_jacobian(self, temperature_K, pH, ionic_strength_M=0.0, salinity=0.0):
        t = np.atleast_1d(np.asarray(temperature_K, float))
        return np.column_stack((np.ones(t.size), -(1 / t - 1 / 298.15) / 8.314462618))


def test_fitted_method_single_pathway_equals_arrhenius_with_its_ea():
    fit = OnePathway(ea=80e3)
    res = normalise_dt50(10 * DAY_S, 293.15, 285.15, method="fitted", surface=fit, pH=7.0)
    # Arrhenius (Arrhenius 1889): factor = exp(Ea/R (1/285.15 - 1/293.15))
    expected = math.exp(80e3 / 8.314462618 * (1 / 285.15 - 1 / 293.15))
    assert_allclose(res.factor, expected, rtol=1e-12)
    assert_allclose(res.apparent_Ea_J_per_mol, 80e3, rtol=1e-9)
    # se(ln f) = sd(Ea) * |1/T2 - 1/T1| / R because ln k_ref cancels
    se = 2000.0 * (1 / 285.15 - 1 / 293.15) / 8.314462618
    assert_allclose(res.se_ln_factor, se, rtol=1e-9)
    ci = res.interval(0.95)
    q = stats.t.ppf(0.975, 7)  # Student t quantile (scipy.stats reference)
    assert_allclose(ci.dt50_low_s, res.dt50_reference_s * math.exp(-q * se), rtol=1e-12)
    assert_allclose(ci.dt50_high_s, res.dt50_reference_s * math.exp(q * se), rtol=1e-12)
    assert any("outside the measured temperatures" in n for n in res.notes)


def test_fitted_method_with_a_real_surface_fit():
    from kinetics.surface import RateMeasurement, fit_surface
    from kinetics.water import hydronium_hydroxide_molar

    # invented runs: base-catalysed pathway only, Ea 60 kJ/mol, pH 7 and 9 at 20/35/50 °C
    runs = []
    for temp in (293.15, 308.15, 323.15):
        for ph in (7.0, 9.0):
            _, oh = hydronium_hydroxide_molar(ph, temp)
            kb = 2.0 * math.exp(-60e3 / 8.314462618 * (1 / temp - 1 / 298.15))
            runs.append(RateMeasurement(temperature_K=temp, pH=ph, k_per_s=kb * float(oh),
                                        se_ln_k=0.03, label="invented"))
    fit = fit_surface(runs, pathways=("base",))
    res = normalise_dt50(3 * DAY_S, 298.15, 285.15, method="fitted", surface=fit, pH=9.0)
    # with exact invented data the fitted base Ea is 60 kJ/mol; at pH 9 the factor also carries
    # the temperature dependence of [OH-] at fixed pH (through pKw), so compare with the
    # surface's own rate ratio rather than with a bare Arrhenius factor
    ln_k = np.ravel(fit.ln_k(np.array([298.15, 285.15]), np.array([9.0, 9.0])))
    direct = math.exp(ln_k[0] - ln_k[1])
    assert_allclose(res.factor, direct, rtol=1e-12)
    assert res.factor > 1.0


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"method": "q10"}, "valid: fitted, efsa_2008, echa_r16"),
        ({"method": "fitted"}, "needs a surface fit"),
        ({"method": "fitted", "surface": OnePathway()}, "needs the pH"),
        ({"dt50_s": -1.0}, "dt50_s must be > 0"),
        ({"temperature_K": 20.0}, "looks like °C"),
    ],
)
def test_bad_input_raises(kwargs, message):
    args = {"dt50_s": DAY_S, "temperature_K": 293.15, "reference_temperature_K": 285.15}
    args.update(kwargs)
    with pytest.raises(InputError, match=message):
        normalise_dt50(**args)


def test_default_methods_have_no_interval():
    res = normalise_dt50(DAY_S, 293.15, method="efsa_2008")
    assert res.reference_temperature_K == 285.15
    with pytest.raises(InputError, match="without a stated uncertainty"):
        res.interval(0.95)
    assert set(NORMALISATION_METHODS) == {"fitted", "efsa_2008", "echa_r16"}
    assert EFSA_2008_EA_J_PER_MOL == 65.4e3
