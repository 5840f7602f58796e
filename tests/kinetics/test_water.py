"""Tests of kinetics.water against published values and the iapws reference library."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from kinetics import water
from kinetics.errors import InputError

iapws = pytest.importorskip("iapws")
from iapws import IAPWS95  # noqa: E402
from iapws._iapws import _Dielectric, _Kw  # noqa: E402
from iapws.iapws08 import SeaWater  # noqa: E402

# 0-100 °C in 1 K steps
GRID_K = np.linspace(273.15, 373.15, 101)


def _iapws95_liquid(temperature_K: float) -> IAPWS95:
    """IAPWS-95 liquid water at 0.1 MPa.

    Above about 372.76 K liquid water at 0.1 MPa is superheated; there the
    liquid is taken just above its vapour pressure (0.102 MPa), which changes
    the density by less than 1e-6 relative.
    """
    pressure_MPa = 0.1 if temperature_K < 372.7 else 0.102
    state = IAPWS95(T=float(temperature_K), P=pressure_MPa)
    assert state.phase == "Liquid"
    return state


@pytest.fixture(scope="module")
def iapws_reference():
    states = [_iapws95_liquid(t) for t in GRID_K]
    rho = np.array([s.rho for s in states])
    return {
        "rho": rho,
        "pKw": np.array([_Kw(r, t) for r, t in zip(rho, GRID_K)]),
        "eps": np.array([_Dielectric(r, t) for r, t in zip(rho, GRID_K)]),
    }


# ---------------------------------------------------------------- density

def test_density_matches_iapws95(iapws_reference):
    # Reference: IAPWS-95 formulation as implemented by the iapws package.
    # Kell (1975) agrees to about 1.5e-5 relative over 0-100 °C (measured).
    assert_allclose(water.water_density_kg_m3(GRID_K), iapws_reference["rho"],
                    rtol=2e-5, atol=0.0)


def test_density_maximum_near_4_celsius():
    # Water is densest near 3.98 °C (Kell 1975; also any handbook table).
    t = np.linspace(273.15, 283.15, 10001)
    t_max = t[np.argmax(water.water_density_kg_m3(t))]
    assert_allclose(t_max - 273.15, 3.98, rtol=0.0, atol=0.02)


# ---------------------------------------------------------------- pKw, pure water

def test_pKw_same_formulation_matches_iapws_on_0_to_100_celsius(iapws_reference):
    # Reference: the iapws package, which evaluates the Bandura-Lvov equation
    # with the coefficients of the 2024 revision (R11-24) and IAPWS-95
    # densities. Required |ΔpKw| <= 0.002; measured maximum 1.1e-4, which comes
    # from the density correlation alone.
    diff = np.abs(water.pKw(GRID_K, formulation="R11-24") - iapws_reference["pKw"])
    assert diff.max() <= 0.002
    assert diff.max() <= 2e-4


def test_pKw_default_R11_07_close_to_iapws(iapws_reference):
    # The default (R11-07 coefficients, as in Bandura & Lvov 2006) against the
    # iapws package (R11-24 coefficients): measured maximum 0.00206 at 100 °C,
    # <= 0.0020 from 0 to 98 °C; 0.00195 of it is the 2024 refit itself.
    diff = np.abs(water.pKw(GRID_K) - iapws_reference["pKw"])
    assert diff[GRID_K <= 371.15].max() <= 0.002
    assert diff.max() <= 0.0025


@pytest.mark.parametrize(
    ("formulation", "temperature_K", "rho_g_cm3", "published"),
    [
        # IAPWS R11-07 (2007), Table 3, values for verification of program
        # code (as quoted in public implementations' test suites; not read in
        # the release itself).
        ("R11-07", 300.0, 1.0, 13.906565),
        ("R11-07", 600.0, 0.07, 21.048874),
        ("R11-07", 600.0, 0.7, 11.203153),
        ("R11-07", 800.0, 0.2, 15.089765),
        ("R11-07", 800.0, 1.2, 6.438330),
        # IAPWS R11-24 (2024) verification values (same provenance).
        ("R11-24", 300.0, 1.0, 13.906672),
        ("R11-24", 600.0, 0.07, 20.161651),
        ("R11-24", 600.0, 0.7, 11.147093),
        ("R11-24", 800.0, 0.2, 14.487671),
        ("R11-24", 800.0, 1.2, 6.4058649),
        ("R11-24", 1270.0, 0.0, 35.081557),
    ],
)
def test_bandura_lvov_verification_values(formulation, temperature_K, rho_g_cm3, published):
    value = water._bandura_lvov_pKw(
        np.array(rho_g_cm3), np.array(temperature_K), water._BANDURA_LVOV[formulation]
    )
    assert_allclose(value, published, rtol=0.0, atol=1e-6)


def test_unknown_pKw_formulation_lists_valid_ones():
    with pytest.raises(InputError, match="R11-07, R11-24"):
        water.pKw(298.15, formulation="IAPWS-1980")


@pytest.mark.parametrize(
    ("celsius", "published"),
    [(0.0, 14.946), (25.0, 13.995), (50.0, 13.264), (75.0, 12.696), (100.0, 12.252)],
)
def test_pKw_against_handbook_table(celsius, published):
    # CRC Handbook of Chemistry and Physics (online edition), table
    # "Ionization constant of water" (computed from Bandura & Lvov 2006), row
    # p = 0.1 MPa. Three decimals given; measured deviation at most 0.0006.
    assert_allclose(water.pKw(celsius + 273.15), published, rtol=0.0, atol=0.001)


def test_pKw_is_vectorised_and_scalar_for_scalar():
    assert isinstance(water.pKw(298.15), float)
    values = water.pKw(np.array([[283.15, 293.15], [303.15, 313.15]]))
    assert values.shape == (2, 2)
    assert np.all(np.diff(values.ravel()) < 0.0)  # Kw rises with temperature


@pytest.mark.parametrize("bad", [273.0, 373.5, 25.0, np.nan, [300.0, 500.0], "hot"])
def test_pKw_rejects_temperatures_outside_liquid_range(bad):
    with pytest.raises(InputError):
        water.pKw(bad)


def test_pKw_temperature_error_names_value_and_hints_celsius():
    with pytest.raises(InputError, match=r"25\.0 K.*looks like °C"):
        water.pKw(25.0)


# ---------------------------------------------------------------- pKw, seawater

def test_seawater_check_value():
    # DOE (1994) handbook, chapter 5, check value for Millero (1995):
    # ln Kw = -30.434 at S = 35, t = 25 °C (from memory; the same figure is
    # given beside an independent published implementation of the equation).
    ln_kw = -water.pKw(298.15, salinity=35.0) * math.log(10.0)
    assert_allclose(ln_kw, -30.434, rtol=0.0, atol=5e-4)


def test_seawater_tends_to_pure_water_at_zero_salinity():
    # Millero (1995) at S -> 0 reduces to a pure-water fit; it must agree with
    # IAPWS R11-07 within 0.01 (measured 0.0067 at 25 °C).
    t = np.linspace(273.15, 318.15, 10)
    assert_allclose(water.pKw(t, salinity=1e-9), water.pKw(t), rtol=0.0, atol=0.01)


def test_pKw_mixed_salinities_broadcast():
    values = water.pKw(298.15, salinity=np.array([0.0, 35.0]))
    assert_allclose(values[0], water.pKw_pure_water(298.15), rtol=1e-15, atol=0.0)
    assert_allclose(values[1], water.pKw_seawater(298.15, 35.0), rtol=1e-15, atol=0.0)


@pytest.mark.parametrize(
    ("temperature_K", "salinity"),
    [(323.15, 35.0), (298.15, 46.0), (298.15, -1.0), (298.15, np.nan)],
)
def test_seawater_outside_validity_is_rejected(temperature_K, salinity):
    with pytest.raises(InputError):
        water.pKw(temperature_K, salinity=salinity)


@pytest.mark.parametrize(
    "function",
    [water.pKw, water.pKw_seawater, water.seawater_density_kg_m3,
     water.bisulfate_dissociation_constant],
)
def test_seawater_functions_refuse_shapes_that_do_not_broadcast(function):
    with pytest.raises(InputError, match="cannot be broadcast"):
        function([290.0, 300.0], [1.0, 2.0, 3.0])


def test_ionic_strength_from_salinity():
    # DOE (1994) handbook, chapter 5: I = 19.924 S / (1000 - 1.005 S);
    # 0.7228 mol/kg-H2O at S = 35 (formula evaluated by hand).
    assert_allclose(water.ionic_strength_from_salinity(35.0), 0.72276, rtol=0.0, atol=1e-5)
    assert water.ionic_strength_from_salinity(0.0) == 0.0


@pytest.mark.parametrize("salinity", [5.0, 20.0, 35.0, 40.0])
@pytest.mark.parametrize("celsius", [0.0, 10.0, 25.0, 40.0])
def test_seawater_density_matches_teos10(salinity, celsius):
    # Reference: IAPWS-08 / TEOS-10 seawater (iapws package) with absolute
    # salinity S_A = (35.16504/35) S_P g/kg (Millero et al. 2008, Deep-Sea
    # Res. I 55, 50). Measured agreement of EOS-80 with TEOS-10: <= 7.8e-6 relative.
    t = celsius + 273.15
    absolute = 35.16504 / 35.0 * salinity / 1000.0
    reference = SeaWater(T=t, P=0.101325, S=absolute).rho
    assert_allclose(water.seawater_density_kg_m3(t, salinity), reference, rtol=2e-5, atol=0.0)


# ---------------------------------------------------------------- activities

def test_dielectric_constant_published_value_at_25C():
    # Malmberg & Maryott (1956), J. Res. NBS 56, 1: 78.30 at 25 °C.
    assert_allclose(water.water_dielectric_constant(298.15), 78.30, rtol=0.0, atol=0.005)


def test_dielectric_constant_close_to_iapws_r8_97(iapws_reference):
    # Reference: IAPWS R8-97 static dielectric constant (iapws package). The
    # 1956 fit lies within 0.35 % of it over 0-100 °C (measured; largest at 100 °C).
    assert_allclose(water.water_dielectric_constant(GRID_K), iapws_reference["eps"],
                    rtol=4e-3, atol=0.0)


def _a_from_reference(eps_r: np.ndarray, temperature_K: np.ndarray) -> np.ndarray:
    # Limiting-law slope written in the customary numerical form
    # A = 1.8248e6 (eps_r T)^(-3/2) L^1/2 mol^-1/2 (e.g. Stumm & Morgan,
    # "Aquatic Chemistry", 3rd ed. 1996, chapter 3; constant from memory).
    return 1.8248e6 * (eps_r * temperature_K) ** -1.5


def test_debye_huckel_A_against_handbook_value():
    # Robinson & Stokes, "Electrolyte Solutions", 2nd ed. (1959), Appendix 7.1:
    # A = 0.5115 (mol/L)^-1/2 at 25 °C (from memory).
    assert_allclose(water.debye_huckel_A(298.15), 0.5115, rtol=1e-3, atol=0.0)
    # The frequently quoted A ≈ 0.509 (older permittivity 78.54) is within 1 %:
    # common practice, no source.
    assert_allclose(water.debye_huckel_A(298.15), 0.509, rtol=0.01, atol=0.0)


def test_debye_huckel_A_matches_customary_numerical_form():
    # Same permittivity, so this checks the assembly of the physical constants.
    eps = water.water_dielectric_constant(GRID_K)
    assert_allclose(water.debye_huckel_A(GRID_K), _a_from_reference(eps, GRID_K),
                    rtol=1e-4, atol=0.0)


def test_debye_huckel_A_against_iapws_permittivity(iapws_reference):
    # A from the IAPWS R8-97 permittivity (iapws package) in the customary
    # numerical form; differences are 1.5 x the permittivity difference
    # (measured at most 0.52 %, at 100 °C).
    reference = _a_from_reference(iapws_reference["eps"], GRID_K)
    assert_allclose(water.debye_huckel_A(GRID_K), reference, rtol=6e-3, atol=0.0)


def test_debye_huckel_A_rises_with_temperature():
    a = water.debye_huckel_A(GRID_K)
    assert np.all(np.diff(a) > 0.0)


@pytest.mark.parametrize(
    ("ionic_strength_M", "charge", "expected_gamma"),
    [
        (0.0, 1, 1.0),
        (0.001, 1, 0.965),
        (0.01, 1, 0.902),
        (0.1, 1, 0.781),
        (0.1, 2, 0.372),
    ],
)
def test_davies_values(ionic_strength_M, charge, expected_gamma):
    # Davies (1962), "Ion Association", with A = 0.5116 at 25 °C; expected
    # values evaluated by hand from the equation. Textbook tables give 0.78 for
    # a univalent ion at I = 0.1 M (from memory).
    gamma = 10.0 ** water.davies_log10_gamma(ionic_strength_M, charge, 298.15)
    assert_allclose(gamma, expected_gamma, rtol=0.0, atol=1.5e-3)


def test_davies_scales_with_charge_squared_and_broadcasts():
    i = np.array([0.001, 0.01, 0.1])
    one = water.davies_log10_gamma(i, 1)
    grid = water.davies_log10_gamma(i[:, None], np.array([1, -1, 2, -3])[None, :])
    assert grid.shape == (3, 4)
    assert_allclose(grid, one[:, None] * np.array([1, 1, 4, 9])[None, :], rtol=1e-14, atol=0.0)


@pytest.mark.parametrize(
    ("ionic_strength_M", "charge", "match"),
    [
        (-0.01, 1, "ionic_strength_M"),
        (0.7, 1, "Davies"),
        (0.1, 1.5, "whole number"),
        (np.nan, 1, "finite"),
    ],
)
def test_davies_rejects(ionic_strength_M, charge, match):
    with pytest.raises(InputError, match=match):
        water.davies_log10_gamma(ionic_strength_M, charge)


# ---------------------------------------------------------------- [H+] and [OH-]

def test_hydronium_hydroxide_dilute_25C():
    h, oh = water.hydronium_hydroxide_molar(7.0, 298.15)
    rho = water.water_density_kg_m3(298.15) / 1000.0
    assert_allclose(h, 1e-7 * rho, rtol=1e-12, atol=0.0)
    assert_allclose(oh, 10 ** (7.0 - water.pKw(298.15)) * rho, rtol=1e-12, atol=0.0)
    # Neutral water at 25 °C has [H+] = [OH-] at pH 6.997 (pKw 13.995, CRC
    # Handbook table "Ionization constant of water").
    h_n, oh_n = water.hydronium_hydroxide_molar(13.995 / 2.0, 298.15)
    assert_allclose(h_n, oh_n, rtol=2e-3, atol=0.0)


def test_hydronium_hydroxide_activity_correction():
    # At I = 0.1 M both concentrations exceed the activities by 1/gamma.
    h0, oh0 = water.hydronium_hydroxide_molar(9.0, 293.15, 0.0)
    h1, oh1 = water.hydronium_hydroxide_molar(9.0, 293.15, 0.1)
    gamma = 10 ** water.davies_log10_gamma(0.1, 1, 293.15)
    assert_allclose(h1, h0 / gamma, rtol=1e-12, atol=0.0)
    assert_allclose(oh1, oh0 / gamma, rtol=1e-12, atol=0.0)


def test_hydronium_hydroxide_seawater_total_and_free():
    rho = water.seawater_density_kg_m3(298.15, 35.0) / 1000.0
    h_t, oh_t = water.hydronium_hydroxide_molar(8.1, 298.15, salinity=35.0,
                                                seawater_h_scale="total")
    assert_allclose(h_t, 10 ** -8.1 * rho, rtol=1e-12, atol=0.0)
    assert_allclose(oh_t, 10 ** (8.1 - water.pKw(298.15, 35.0)) * rho, rtol=1e-12, atol=0.0)
    h_f, oh_f = water.hydronium_hydroxide_molar(8.1, 298.15, salinity=35.0)
    assert_allclose(oh_f, oh_t, rtol=1e-15, atol=0.0)
    factor = 1.0 + water.total_sulfate_mol_per_kg(35.0) / water.bisulfate_dissociation_constant(
        298.15, 35.0)
    assert_allclose(h_f, h_t / factor, rtol=1e-12, atol=0.0)
    # Free-scale pH exceeds total-scale pH by about 0.1 in ocean water
    # (common practice, no source).
    assert_allclose(math.log10(factor), 0.11, rtol=0.0, atol=0.01)


def test_unknown_seawater_h_scale_lists_valid_ones():
    with pytest.raises(InputError, match="free, total"):
        water.hydronium_hydroxide_molar(8.0, 298.15, salinity=35.0, seawater_h_scale="NBS")


def test_bisulfate_check_value():
    # DOE (1994) handbook, chapter 5, check value for Dickson (1990):
    # ln KS = -2.30 at S = 35, t = 25 °C (from memory; the same figure is given
    # beside an independent published implementation of the equation).
    assert_allclose(math.log(water.bisulfate_dissociation_constant(298.15, 35.0)), -2.30,
                    rtol=0.0, atol=0.005)


def test_total_sulfate():
    # Morris & Riley (1966) as in DOE (1994) ch. 5: S_T = (0.14/96.062)(S/1.80655);
    # 0.02824 mol/kg-soln at S = 35 (formula evaluated by hand).
    assert_allclose(water.total_sulfate_mol_per_kg(35.0), 0.028235, rtol=0.0, atol=2e-6)


def test_hydronium_hydroxide_broadcasts_over_conditions():
    pH = np.array([4.0, 7.0, 9.0])[:, None]
    temperature_K = np.array([283.15, 298.15, 313.15, 343.15])[None, :]
    h, oh = water.hydronium_hydroxide_molar(pH, temperature_K, 0.01)
    assert h.shape == oh.shape == (3, 4)
    assert np.all(np.isfinite(h)) and np.all(np.isfinite(oh))
    assert np.all(np.diff(oh, axis=1) > 0.0)  # warmer water: more OH- at a given pH
    mixed = water.hydronium_hydroxide_molar([8.0, 8.0], 298.15, salinity=[0.0, 35.0])
    assert mixed[0].shape == (2,)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"pH": 15.0, "temperature_K": 298.15}, "pH"),
        ({"pH": 7.0, "temperature_K": 25.0}, "looks like °C"),
        ({"pH": 7.0, "temperature_K": 333.15, "salinity": 35.0}, "seawater"),
        ({"pH": 8.0, "temperature_K": 298.15, "ionic_strength_M": 0.1, "salinity": 35.0},
         "not both"),
        ({"pH": [7.0, 8.0], "temperature_K": [290.0, 300.0, 310.0]}, "broadcast"),
        ({"pH": 7.0, "temperature_K": 298.15, "ionic_strength_M": 2.0}, "salinity instead"),
    ],
)
def test_hydronium_hydroxide_rejects(kwargs, match):
    with pytest.raises(InputError, match=match):
        water.hydronium_hydroxide_molar(**kwargs)


@pytest.mark.parametrize(
    "pH, T, ionic",
    [
        (7.0, 298.15, 0.0),
        (0.0, 273.15, 0.0),
        (14.0, 373.15, 0.0),
        ([4.0, 7.0, 9.0], [283.15, 303.15, 343.15], [0.0, 0.01, 0.5]),
        ([6.5, 8.5], 293.15, 0.1),
    ],
)
def test_fresh_water_concentrations_follow_their_formula(pH, T, ionic):
    # Internal consistency (common practice, no source): [H+] = 10^(-pH - log10 gamma) rho/1000
    # and [OH-] = 10^(pH - pKw - log10 gamma) rho/1000, composed from the public Davies,
    # density and pKw functions (each checked against its published source above); the pure
    # water shortcut (I = 0, where the Davies term is exactly 0) changes no digit.
    h, oh = water.hydronium_hydroxide_molar(pH, T, ionic)
    log_gamma = np.asarray(water.davies_log10_gamma(ionic, 1, T))
    rho = np.asarray(water.water_density_kg_m3(T)) / 1000.0
    pkw = np.asarray(water.pKw_pure_water(T))
    assert_allclose(h, 10.0 ** (-np.asarray(pH) - log_gamma) * rho, rtol=1e-15, atol=0)
    assert_allclose(oh, 10.0 ** (np.asarray(pH) - pkw - log_gamma) * rho, rtol=1e-15, atol=0)
