"""Tests of kinetics.equilibrium."""

from __future__ import annotations

import dataclasses
import math

import pytest
from numpy.testing import assert_allclose

from kinetics import equilibrium_ratio
from kinetics.caution import CAUTION_TEXT
from kinetics.equilibrium import (
    GAS_CONSTANT_J_PER_MOL_K,
    IRREVERSIBLE_RATIO,
    EquilibriumResult,
)
from kinetics.errors import InputError


def test_gas_constant_is_codata_value():
    # CODATA 2018 / 2019 SI: R = N_A k with N_A = 6.02214076e23 /mol and
    # k = 1.380649e-23 J/K, both exact (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010).
    assert_allclose(GAS_CONSTANT_J_PER_MOL_K, 6.02214076e23 * 1.380649e-23, rtol=1e-9, atol=0.0)


def test_check_value_one_proton_at_pH_7():
    # common practice, no source: ΔG°r = +19 kJ/mol at 25 °C gives K = 4.7e-4,
    # and 4.7e3 when [H+] = 1e-7 is applied to a reaction releasing one proton.
    standard = equilibrium_ratio(19.0, temperature_K=298.15)
    assert_allclose(standard.K_standard, 4.7e-4, rtol=0.01)
    assert_allclose(standard.ratio_products_to_reactants, 4.7e-4, rtol=0.01)
    field = equilibrium_ratio(19.0, temperature_K=298.15, protons_released=1, pH=7.0)
    assert_allclose(field.K_standard, 4.7e-4, rtol=0.01)
    assert_allclose(field.ratio_products_to_reactants, 4.7e3, rtol=0.01)
    assert field.irreversible
    assert not standard.irreversible


def test_ratio_follows_definition():
    # K = exp(-ΔG°/RT) (thermodynamic definition); ratio = K / (a_H^n prod a_X^nu).
    result = equilibrium_ratio(
        -12.5,
        temperature_K=288.15,
        protons_released=2,
        pH=8.2,
        other_activities={"Cl-": 1e-3, "methanol": (2e-6, 1), "acetate": (1e-4, 2)},
    )
    k = math.exp(12500.0 / (GAS_CONSTANT_J_PER_MOL_K * 288.15))
    expected = k / ((10**-8.2) ** 2 * 1e-3 * 2e-6 * (1e-4) ** 2)
    assert_allclose(result.K_standard, k, rtol=1e-12, atol=0.0)
    assert_allclose(result.ratio_products_to_reactants, expected, rtol=1e-10, atol=0.0)
    assert_allclose(result.parent_fraction_at_equilibrium, 1.0 / (1.0 + expected),
                    rtol=1e-12, atol=0.0)
    assert result.other_activities == (("Cl-", 1e-3, 1), ("methanol", 2e-6, 1),
                                       ("acetate", 1e-4, 2))


def test_protons_consumed_multiply():
    released = equilibrium_ratio(5.0, protons_released=1, pH=6.0)
    consumed = equilibrium_ratio(5.0, protons_released=-1, pH=6.0)
    assert_allclose(released.ratio_products_to_reactants * consumed.ratio_products_to_reactants,
                    released.K_standard**2, rtol=1e-12, atol=0.0)


@pytest.mark.parametrize(
    ("delta_g", "irreversible"),
    [(-30.0, True), (0.0, False), (19.0, False)],
)
def test_irreversible_flag_uses_stated_threshold(delta_g, irreversible):
    result = equilibrium_ratio(delta_g)
    assert result.irreversible is irreversible
    assert result.irreversible_threshold == IRREVERSIBLE_RATIO == 1e3
    assert (result.ratio_products_to_reactants >= 1e3) is irreversible
    assert ("can be treated as irreversible" in result.explanation) is irreversible
    assert ("cannot be treated as irreversible" in result.explanation) is not irreversible


def test_result_is_frozen_and_carries_caution():
    result = equilibrium_ratio(19.0, protons_released=1, pH=7.0)
    assert isinstance(result, EquilibriumResult)
    assert result.caution == CAUTION_TEXT
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.K_standard = 1.0  # type: ignore[misc]
    assert "4.69e+03" in result.explanation
    assert "pH 7" in result.explanation


def test_interval_from_delta_g_uncertainty():
    result = equilibrium_ratio(19.0, protons_released=1, pH=7.0, delta_g_sd_kJ_per_mol=2.0)
    interval = result.interval(0.95)
    # ln K ± z u(ΔG)/RT with z = 1.959964, the 97.5 % quantile of the standard
    # normal distribution (from memory).
    half = 1.959964 * 2000.0 / (GAS_CONSTANT_J_PER_MOL_K * 298.15)
    assert_allclose(interval.K_standard_low, result.K_standard * math.exp(-half), rtol=1e-6)
    assert_allclose(interval.ratio_high, result.ratio_products_to_reactants * math.exp(half),
                    rtol=1e-6)
    assert interval.ratio_low < result.ratio_products_to_reactants < interval.ratio_high
    assert interval.irreversible_at_low is (interval.ratio_low >= 1e3)


def test_interval_needs_uncertainty_and_valid_level():
    with pytest.raises(InputError, match="uncertainty"):
        equilibrium_ratio(19.0).interval()
    result = equilibrium_ratio(19.0, delta_g_sd_kJ_per_mol=1.0)
    for bad in (0.0, 1.0, 1.5, "high"):
        with pytest.raises(InputError, match="level"):
            result.interval(bad)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"delta_g_kJ_per_mol": float("nan")}, "finite"),
        ({"delta_g_kJ_per_mol": "19"}, "number"),
        ({"delta_g_kJ_per_mol": [19.0, 20.0]}, "single number"),
        ({"delta_g_kJ_per_mol": 19000.0}, "J/mol"),
        ({"delta_g_kJ_per_mol": 19.0, "temperature_K": 25.0}, "temperature_K"),
        ({"delta_g_kJ_per_mol": 19.0, "protons_released": 1}, "give the field pH"),
        ({"delta_g_kJ_per_mol": 19.0, "protons_released": 1.5, "pH": 7.0}, "whole number"),
        ({"delta_g_kJ_per_mol": 19.0, "protons_released": 1, "pH": 15.0}, "pH"),
        ({"delta_g_kJ_per_mol": 19.0, "other_activities": {"Cl-": 0.0}}, "activity of 'Cl-'"),
        ({"delta_g_kJ_per_mol": 19.0, "other_activities": {"Cl-": (0.1, 1, 2)}}, "coefficient"),
        ({"delta_g_kJ_per_mol": 19.0, "other_activities": [("Cl-", 0.1)]}, "mapping"),
        ({"delta_g_kJ_per_mol": 19.0, "other_activities": {"": 0.1}}, "species names"),
        ({"delta_g_kJ_per_mol": 19.0, "delta_g_sd_kJ_per_mol": -1.0}, "delta_g_sd"),
        ({"delta_g_kJ_per_mol": -1000.0, "protons_released": 6, "pH": 14.0,
          "other_activities": {"X": (1e-30, 6), "Y": (1e-30, 6)}}, "floating-point range"),
    ],
)
def test_bad_input_raises_clear_error(kwargs, match):
    with pytest.raises(InputError, match=match):
        equilibrium_ratio(**kwargs)
