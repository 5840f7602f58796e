"""Tests of kinetics.units: every conversion, every rejection."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from kinetics import units
from kinetics.errors import InputError, UnitError


# Definitions of the SI second and of the minute, hour and day accepted for use
# with the SI (BIPM, "The International System of Units", 9th ed., 2019).
@pytest.mark.parametrize(
    ("unit", "seconds"),
    [("s", 1.0), ("min", 60.0), ("h", 3600.0), ("d", 86400.0)],
)
def test_time_to_s_and_back(unit, seconds):
    values = np.array([0.0, 0.5, 1.0, 7.0, 120.0])
    converted = units.time_to_s(values, unit)
    assert_allclose(converted, values * seconds, rtol=1e-15, atol=0.0)
    assert_allclose(units.time_from_s(converted, unit), values, rtol=1e-15, atol=0.0)


def test_time_units_constant_lists_the_contract_units():
    assert units.TIME_UNITS == ("s", "min", "h", "d")


def test_scalar_in_scalar_out_and_shape_preserved():
    scalar = units.time_to_s(2, "d")
    assert isinstance(scalar, float)
    assert scalar == 172800.0
    grid = units.time_to_s([[1, 2], [3, 4]], "h")
    assert grid.shape == (2, 2)
    assert_allclose(grid, [[3600.0, 7200.0], [10800.0, 14400.0]], rtol=1e-15, atol=0.0)


@pytest.mark.parametrize(
    ("unit", "factor_to_per_s"),
    [("1/s", 1.0), ("1/min", 1 / 60.0), ("1/h", 1 / 3600.0), ("1/d", 1 / 86400.0)],
)
def test_rate_to_per_s_and_back(unit, factor_to_per_s):
    values = np.array([1e-9, 0.1, 3.0])
    per_s = units.rate_to_per_s(values, unit)
    assert_allclose(per_s, values * factor_to_per_s, rtol=1e-15, atol=0.0)
    assert_allclose(units.rate_from_per_s(per_s, unit), values, rtol=1e-15, atol=0.0)


@pytest.mark.parametrize(("half_life", "unit"), [(1.0, "d"), (24.0, "h"), (1440.0, "min")])
def test_half_life_to_rate_is_ln2_over_t(half_life, unit):
    # k = ln 2 / DT50 for a first-order decline (definition of the half-life).
    k = units.half_life_to_rate_per_s(half_life, unit)
    assert_allclose(k, math.log(2.0) / 86400.0, rtol=1e-14, atol=0.0)
    assert_allclose(units.rate_per_s_to_half_life(k, unit), half_life, rtol=1e-14, atol=0.0)


@pytest.mark.parametrize("bad", [0.0, -1.0, [1.0, 0.0]])
def test_half_life_must_be_positive(bad):
    with pytest.raises(InputError, match="half-life must be > 0"):
        units.half_life_to_rate_per_s(bad, "d")


@pytest.mark.parametrize("bad", [0.0, -1e-6])
def test_half_life_needs_positive_rate(bad):
    with pytest.raises(InputError, match="rate constant must be > 0"):
        units.rate_per_s_to_half_life(bad, "d")


@pytest.mark.parametrize(
    ("unit", "value", "expected", "canonical"),
    [
        ("mol/L", 1.0, 1000.0, "mol/m3"),
        ("mmol/L", 2.0, 2.0, "mol/m3"),
        ("umol/L", 5.0, 5e-3, "mol/m3"),
        ("\u00b5mol/L", 5.0, 5e-3, "mol/m3"),  # micro sign
        ("\u03bcmol/L", 5.0, 5e-3, "mol/m3"),  # Greek mu
        ("nmol/L", 7.0, 7e-6, "mol/m3"),
        ("mol/m3", 3.0, 3.0, "mol/m3"),
        ("g/L", 1.5, 1.5, "kg/m3"),
        ("mg/L", 1.5, 1.5e-3, "kg/m3"),
        ("ug/L", 1.5, 1.5e-6, "kg/m3"),
        ("\u00b5g/L", 1.5, 1.5e-6, "kg/m3"),
        ("ng/L", 1.5, 1.5e-9, "kg/m3"),
        ("kg/m3", 0.25, 0.25, "kg/m3"),
        ("%", 87.5, 0.875, "fraction"),
        ("fraction", 0.5, 0.5, "fraction"),
        (" mg/L ", 1.0, 1e-3, "kg/m3"),  # surrounding spaces are ignored
    ],
)
def test_concentration_to_canonical(unit, value, expected, canonical):
    converted, got_unit = units.concentration_to_canonical([value, 2 * value], unit)
    assert got_unit == canonical
    assert isinstance(converted, np.ndarray)
    assert_allclose(converted, [expected, 2 * expected], rtol=1e-14, atol=0.0)
    back = units.concentration_from_canonical(converted, unit)
    assert_allclose(back, [value, 2 * value], rtol=1e-14, atol=0.0)


def test_every_listed_concentration_unit_converts():
    for unit in units.CONCENTRATION_UNITS:
        values, canonical = units.concentration_to_canonical(1.0, unit)
        assert canonical in units.CANONICAL_CONCENTRATION_UNITS.values()
        assert np.isfinite(values)


@pytest.mark.parametrize(
    ("function", "unit"),
    [
        (units.time_to_s, "days"),
        (units.time_from_s, "hr"),
        (units.rate_to_per_s, "per day"),
        (units.rate_from_per_s, "1/week"),
        (units.half_life_to_rate_per_s, "y"),
    ],
)
def test_unknown_time_or_rate_unit_lists_valid_ones(function, unit):
    with pytest.raises(UnitError) as info:
        function(1.0, unit)
    message = str(info.value)
    assert repr(unit) in message
    valid = units.RATE_UNITS if function in (units.rate_to_per_s, units.rate_from_per_s) \
        else units.TIME_UNITS
    for name in valid:
        assert name in message


@pytest.mark.parametrize("unit", ["ppm", "mol/kg", "M", "", None, 3])
def test_unknown_concentration_unit_lists_valid_ones(unit):
    with pytest.raises(UnitError) as info:
        units.concentration_to_canonical(1.0, unit)
    message = str(info.value)
    assert repr(unit) in message
    for name in ("mol/L", "mg/L", "%"):
        assert name in message


def test_unit_error_is_an_input_error_and_a_value_error():
    with pytest.raises(ValueError):
        units.time_to_s(1.0, "fortnight")
    with pytest.raises(InputError):
        units.time_to_s(1.0, "fortnight")


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf, [1.0, np.nan], "3", None, [1, "a"]])
def test_non_finite_or_non_numeric_values_are_rejected(bad):
    with pytest.raises(InputError):
        units.time_to_s(bad, "s")
    with pytest.raises(InputError):
        units.concentration_to_canonical(bad, "mg/L")


@pytest.mark.parametrize(
    ("function", "args"),
    [
        (units.time_to_s, (1e308, "d")),
        (units.rate_from_per_s, (1e308, "1/d")),
        (units.half_life_to_rate_per_s, (1e-320, "s")),
        (units.rate_per_s_to_half_life, (1e-320, "d")),
        (units.concentration_from_canonical, (1e308, "ng/L")),
    ],
)
def test_overflow_raises_instead_of_returning_inf(function, args):
    with pytest.raises(InputError):
        function(*args)


# 0 °C = 273.15 K exactly, the definition of the degree Celsius (BIPM SI Brochure, 9th ed., 2019).
@pytest.mark.parametrize(
    ("celsius", "kelvin"),
    [(0.0, 273.15), (25.0, 298.15), (100.0, 373.15), (-273.15, 0.0)],
)
def test_celsius_kelvin(celsius, kelvin):
    assert_allclose(units.celsius_to_kelvin(celsius), kelvin, rtol=0.0, atol=1e-12)
    assert_allclose(units.kelvin_to_celsius(kelvin), celsius, rtol=0.0, atol=1e-12)


def test_below_absolute_zero_is_rejected():
    with pytest.raises(InputError, match="absolute zero"):
        units.celsius_to_kelvin(-300.0)
    with pytest.raises(InputError, match="absolute zero"):
        units.kelvin_to_celsius([10.0, -1.0])


@pytest.mark.parametrize("temperature_K", [273.15, 293.15, 343.15, 373.15, [280.0, 300.0]])
def test_validate_temperature_accepts_liquid_water(temperature_K):
    assert_allclose(units.validate_temperature_K(temperature_K), temperature_K,
                    rtol=0.0, atol=0.0)


@pytest.mark.parametrize("bad", [273.14, 373.16, 0.0, 500.0, [300.0, 400.0], np.nan])
def test_validate_temperature_rejects_outside_range(bad):
    with pytest.raises(InputError, match="temperature_K"):
        units.validate_temperature_K(bad)


def test_validate_temperature_hints_at_celsius():
    with pytest.raises(InputError, match="looks like °C"):
        units.validate_temperature_K(25.0)


@pytest.mark.parametrize("pH", [0.0, 4.0, 7.0, 9.0, 14.0, [4.0, 7.0, 9.0]])
def test_validate_pH_accepts(pH):
    assert_allclose(units.validate_pH(pH), pH, rtol=0.0, atol=0.0)


@pytest.mark.parametrize("bad", [-0.1, 14.1, [7.0, 15.0], np.inf, "seven"])
def test_validate_pH_rejects(bad):
    with pytest.raises(InputError, match="pH"):
        units.validate_pH(bad)
