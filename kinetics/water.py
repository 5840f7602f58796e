"""Water chemistry for hydrolysis rates: pKw, activity coefficients, [H+] and [OH-].

The rate law of the pH-temperature surface needs the concentrations of
hydronium and hydroxide at the temperature, pH and ionic strength (or
salinity) of a water body. This module supplies them:

- :func:`water_density_kg_m3` - density of pure liquid water at 0.1 MPa (Kell 1975),
- :func:`water_dielectric_constant` - relative permittivity (Malmberg & Maryott 1956),
- :func:`pKw` - ion product of pure water (IAPWS R11-07) or seawater (Millero 1995),
- :func:`debye_huckel_A` - Debye-Hückel limiting slope from CODATA constants,
- :func:`davies_log10_gamma` - Davies activity coefficients,
- :func:`ionic_strength_from_salinity` - ionic strength of seawater (DOE 1994),
- :func:`seawater_density_kg_m3` - one-atmosphere seawater density (Millero & Poisson 1981),
- :func:`bisulfate_dissociation_constant`, :func:`total_sulfate_mol_per_kg` - the
  total-to-free hydrogen-ion conversion in seawater (Dickson 1990; Morris & Riley 1966),
- :func:`hydronium_hydroxide_molar` - [H+] and [OH-] in mol/L from a measured pH.

pH scales
---------
For fresh water (``salinity == 0``) ``pH`` is the measured activity pH,
:math:`\\mathrm{pH} = -\\log_{10} a_{\\mathrm{H^+}}`, as read on a glass electrode
calibrated with standard buffers, and :math:`K_w` is the thermodynamic
(activity) ion product on the molality scale of IAPWS R11-07.

For seawater (``salinity > 0``) the Millero (1995) constant is a
*stoichiometric* ion product :math:`K_w^* = [\\mathrm{H^+}]_T[\\mathrm{OH^-}]` in
(mol/kg-solution)² on the *total* hydrogen-ion scale, in which
:math:`[\\mathrm{H^+}]_T = [\\mathrm{H^+}]_F + [\\mathrm{HSO_4^-}]`. Consistently,
``pH`` given with ``salinity > 0`` is read as a total-scale pH,
:math:`\\mathrm{pH}_T = -\\log_{10}[\\mathrm{H^+}]_T` (mol/kg-solution), the scale
on which seawater pH is normally reported. A pH measured in seawater with a
glass electrode calibrated in dilute standard buffers is *not* on this scale
and must be converted by the user first; the two differ by roughly 0.1 pH unit,
an amount that depends on the electrode and is not corrected here. From the
total scale, :func:`hydronium_hydroxide_molar` returns the *free* hydronium
concentration by default (bisulfate removed with Dickson's 1990 constant).

All functions are vectorised over numpy arrays, broadcast their arguments,
return ``numpy.float64`` for all-scalar input, and raise
:class:`kinetics.errors.InputError` for values outside the validity range of the
correlations (never NaN).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from kinetics.errors import InputError
from kinetics.units import (
    LIQUID_WATER_MAX_K,
    LIQUID_WATER_MIN_K,
    ZERO_CELSIUS_K,
    _celsius_hint,
    _first_bad,
    _out,
    as_float_array,
    validate_pH,
)

__all__ = [
    "CODATA_2018",
    "MOLAR_MASS_WATER_G_PER_MOL",
    "SEAWATER_MIN_K",
    "SEAWATER_MAX_K",
    "SALINITY_MAX",
    "DAVIES_MAX_IONIC_STRENGTH_M",
    "water_density_kg_m3",
    "water_dielectric_constant",
    "pKw",
    "pKw_pure_water",
    "PKW_FORMULATIONS",
    "pKw_seawater",
    "seawater_density_kg_m3",
    "debye_huckel_A",
    "davies_log10_gamma",
    "ionic_strength_from_salinity",
    "total_sulfate_mol_per_kg",
    "bisulfate_dissociation_constant",
    "SEAWATER_H_SCALES",
    "hydronium_hydroxide_molar",
]

#: Which hydrogen-ion concentration :func:`hydronium_hydroxide_molar` returns
#: in seawater: free hydronium (default) or total (free + HSO4-).
SEAWATER_H_SCALES: tuple[str, ...] = ("free", "total")

#: Exact SI defining constants and CODATA 2018 recommended values used here
#: (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010).
CODATA_2018: dict[str, float] = {
    "elementary_charge_C": 1.602176634e-19,  # exact
    "boltzmann_J_per_K": 1.380649e-23,  # exact
    "avogadro_per_mol": 6.02214076e23,  # exact
    "vacuum_permittivity_F_per_m": 8.8541878128e-12,
    "gas_constant_J_per_mol_K": 8.314462618,  # N_A * k, exact to the digits shown
}

#: Molar mass of H2O used by IAPWS R11-07 [g/mol].
MOLAR_MASS_WATER_G_PER_MOL = 18.015268

#: Temperature range of the seawater correlations [K] (Millero 1995: 0-45 °C).
SEAWATER_MIN_K = 273.15
SEAWATER_MAX_K = 318.15
#: Highest practical salinity accepted (Millero 1995 Kw: S = 0-45).
SALINITY_MAX = 45.0
#: Highest ionic strength at which the Davies equation is used [mol/L].
DAVIES_MAX_IONIC_STRENGTH_M = 0.5


def _temperature(temperature_K: Any, low: float, high: float, what: str) -> np.ndarray:
    t = as_float_array(temperature_K, "temperature_K")
    mask = (t < low) | (t > high)
    if np.any(mask):
        bad = _first_bad(t, mask)
        raise InputError(
            f"temperature_K {bad!r} K is outside the range of the {what}, "
            f"{low} K to {high} K ({low - ZERO_CELSIUS_K:g} °C to "
            f"{high - ZERO_CELSIUS_K:g} °C){_celsius_hint(bad)}"
        )
    return t


def _broadcast_T_S(T: np.ndarray, S: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    try:
        return tuple(np.broadcast_arrays(T, S))  # type: ignore[return-value]
    except ValueError:
        raise InputError(
            f"temperature_K (shape {T.shape}) and salinity (shape {S.shape}) "
            "cannot be broadcast together"
        ) from None


def _seawater_T_S(temperature_K: Any, salinity: Any) -> tuple[np.ndarray, np.ndarray]:
    """Checked, broadcast temperatures [K] and salinities for the seawater correlations."""
    T = _temperature(temperature_K, SEAWATER_MIN_K, SEAWATER_MAX_K, "seawater correlations")
    return _broadcast_T_S(T, _salinity(salinity))


def _pure_water_temperature(temperature_K: Any) -> np.ndarray:
    return _temperature(
        temperature_K, LIQUID_WATER_MIN_K, LIQUID_WATER_MAX_K,
        "pure-water correlations (liquid water at 0.1 MPa)",
    )


def _salinity(salinity: Any) -> np.ndarray:
    s = as_float_array(salinity, "salinity")
    mask = (s < 0.0) | (s > SALINITY_MAX)
    if np.any(mask):
        raise InputError(
            f"salinity {_first_bad(s, mask)!r} is outside the range 0 to {SALINITY_MAX:g} "
            "(practical salinity, about g/kg) of the seawater correlations"
        )
    return s


def water_density_kg_m3(temperature_K: Any) -> Any:
    """Density of pure liquid water at 0.1 MPa.

    Kell's (1975) correlation for air-free water at 1 atm (0.101325 MPa; the
    difference from 0.1 MPa changes the density by less than 1e-6 relative),
    with the Celsius temperature :math:`t = T - 273.15` K:

    .. math::

        \\rho = \\frac{999.83952 + 16.945176\\,t - 7.9870401\\times10^{-3}\\,t^2
        - 46.170461\\times10^{-6}\\,t^3 + 105.56302\\times10^{-9}\\,t^4
        - 280.54253\\times10^{-12}\\,t^5}{1 + 16.879850\\times10^{-3}\\,t}
        \\ \\mathrm{kg\\,m^{-3}}

    Reference: G. S. Kell, "Density, thermal expansivity, and compressibility of
    liquid water from 0 ° to 150 °C", J. Chem. Eng. Data 20 (1975) 97-105.
    It agrees with the IAPWS-95 formulation to better than 2e-5 relative over
    0-100 °C (see the tests).

    Parameters
    ----------
    temperature_K : array_like
        Temperature [K], 273.15-373.15.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Density [kg/m³].

    Raises
    ------
    InputError
        If a temperature is not finite or outside 273.15-373.15 K.
    """
    return _out(_kell_density(_pure_water_temperature(temperature_K)))


def _kell_density(T: np.ndarray) -> np.ndarray:
    """Kell's density [kg/m³] at temperatures [K] already checked (no range checks)."""
    t = T - ZERO_CELSIUS_K
    num = (
        999.83952
        + t * (16.945176
               + t * (-7.9870401e-3
                      + t * (-46.170461e-6
                             + t * (105.56302e-9
                                    + t * (-280.54253e-12)))))
    )
    return num / (1.0 + 16.879850e-3 * t)


def water_dielectric_constant(temperature_K: Any) -> Any:
    """Static relative permittivity of pure liquid water at about 0.1 MPa.

    .. math::

        \\varepsilon_r = 87.740 - 0.40008\\,t + 9.398\\times10^{-4}\\,t^2
        - 1.410\\times10^{-6}\\,t^3, \\qquad t = T - 273.15\\ \\mathrm{K}

    Reference: C. G. Malmberg and A. A. Maryott, "Dielectric constant of water
    from 0 ° to 100 °C", J. Res. Natl. Bur. Stand. 56 (1956) 1-8 (maximum
    deviation of the fit from their data 0.01; 78.30 at 25 °C).

    Parameters
    ----------
    temperature_K : array_like
        Temperature [K], 273.15-373.15.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Relative permittivity [-].
    """
    return _out(_malmberg_maryott(_pure_water_temperature(temperature_K)))


def _malmberg_maryott(T: np.ndarray) -> np.ndarray:
    """Relative permittivity at temperatures [K] already checked (no range checks)."""
    t = T - ZERO_CELSIUS_K
    return 87.740 + t * (-0.40008 + t * (9.398e-4 + t * (-1.410e-6)))


#: Ion-product formulations of pure water: the Bandura-Lvov equation with the
#: coefficients of IAPWS R11-07 (2007) or of its 2024 revision.
PKW_FORMULATIONS: tuple[str, ...] = ("R11-07", "R11-24")

# alpha0, alpha1 [K], alpha2 [K^2 (g/cm3)^-2/3], beta0 [(g/cm3)^-1],
# beta1 [K (g/cm3)^-1], beta2 [(g/cm3)^-2]
_BANDURA_LVOV: dict[str, tuple[float, float, float, float, float, float]] = {
    "R11-07": (-0.864671, 8659.19, -22786.2, 0.642044, -56.8534, -0.375754),
    "R11-24": (-0.702132, 8681.05, -24145.1, 0.813876, -51.4471, -0.469920),
}


def pKw_pure_water(temperature_K: Any, formulation: str = "R11-07") -> Any:
    """Ion product of pure liquid water at 0.1 MPa (IAPWS, Bandura-Lvov equation).

    The Bandura-Lvov equation, with density :math:`\\rho` in g/cm³ from
    :func:`water_density_kg_m3` and :math:`T` in K:

    .. math::

        \\mathrm{p}K_w = -2n\\left[\\log_{10}(1+Q)
            - \\frac{Q}{Q+1}\\,\\rho\\,(\\beta_0 + \\beta_1 T^{-1} + \\beta_2\\rho)\\right]
            + \\mathrm{p}K_w^G + 2\\log_{10}\\frac{M_w}{1000\\ \\mathrm{g\\,mol^{-1}}}

        Q = \\rho\\,\\exp(\\alpha_0 + \\alpha_1 T^{-1} + \\alpha_2 T^{-2}\\rho^{2/3})

        \\mathrm{p}K_w^G = 0.61415 + 48251.33\\,T^{-1} - 67707.93\\,T^{-2}
            + 10102100\\,T^{-3}

    with :math:`n = 6` and :math:`M_w = 18.015268` g/mol. ``"R11-07"`` (the
    default) uses the coefficients of Bandura & Lvov (2006) adopted in IAPWS
    R11-07: :math:`\\alpha_0 = -0.864671`, :math:`\\alpha_1 = 8659.19`,
    :math:`\\alpha_2 = -22786.2`, :math:`\\beta_0 = 0.642044`,
    :math:`\\beta_1 = -56.8534`, :math:`\\beta_2 = -0.375754`. ``"R11-24"``
    uses the refitted coefficients of the 2024 revision of the release (based on
    Arcis et al. 2020): :math:`\\alpha_0 = -0.702132`, :math:`\\alpha_1 = 8681.05`,
    :math:`\\alpha_2 = -24145.1`, :math:`\\beta_0 = 0.813876`,
    :math:`\\beta_1 = -51.4471`, :math:`\\beta_2 = -0.469920`. Between 0 and
    100 °C at 0.1 MPa the two differ by at most 0.002 in pKw.

    References: IAPWS R11-07, "Release on the Ionization Constant of H2O"
    (2007); A. V. Bandura and S. N. Lvov, "The ionization constant of water over
    wide ranges of temperature and density", J. Phys. Chem. Ref. Data 35 (2006)
    15-30; IAPWS R11-24, "Revised Release on the Ionization Constant of H2O"
    (2024); H. Arcis, J. P. Ferguson, J. S. Cox and P. R. Tremaine, J. Phys.
    Chem. Ref. Data 49 (2020) 033103.

    Parameters
    ----------
    temperature_K : array_like
        Temperature [K], 273.15-373.15.
    formulation : {"R11-07", "R11-24"}, optional
        Coefficient set.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        :math:`\\mathrm{p}K_w = -\\log_{10} K_w`, with :math:`K_w` the product of the
        molal activities of H+ and OH- [(mol/kg H2O)²].

    Raises
    ------
    InputError
        For an unknown ``formulation`` or a temperature outside 273.15-373.15 K.
    """
    coefficients = _bandura_lvov_coefficients(formulation)
    T = _pure_water_temperature(temperature_K)
    rho = _kell_density(T) / 1000.0  # g/cm3
    return _out(_bandura_lvov_pKw(rho, T, coefficients))


def _bandura_lvov_coefficients(formulation: Any) -> tuple[float, ...]:
    try:
        return _BANDURA_LVOV[formulation]
    except (KeyError, TypeError):
        raise InputError(
            f"unknown pKw formulation {formulation!r}; valid: {', '.join(PKW_FORMULATIONS)}"
        ) from None


def _bandura_lvov_pKw(
    rho_g_cm3: np.ndarray, T: np.ndarray, coefficients: tuple[float, ...]
) -> np.ndarray:
    """Bandura-Lvov pKw at density [g/cm3] and temperature [K] (no range checks)."""
    n = 6.0
    a0, a1, a2, b0, b1, b2 = coefficients
    q = rho_g_cm3 * np.exp(a0 + a1 / T + a2 / T**2 * rho_g_cm3 ** (2.0 / 3.0))
    pkw_gas = 0.61415 + 48251.33 / T - 67707.93 / T**2 + 10102100.0 / T**3
    return (
        -2.0 * n * (np.log10(1.0 + q) - q / (q + 1.0) * rho_g_cm3 * (b0 + b1 / T + b2 * rho_g_cm3))
        + pkw_gas
        + 2.0 * np.log10(MOLAR_MASS_WATER_G_PER_MOL / 1000.0)
    )


def pKw_seawater(temperature_K: Any, salinity: Any) -> Any:
    """Stoichiometric ion product of seawater, Millero (1995), total pH scale.

    .. math::

        \\ln K_w^* = 148.96502 - \\frac{13847.26}{T} - 23.6521\\ln T
            + \\left(\\frac{118.67}{T} - 5.977 + 1.0495\\ln T\\right) S^{1/2}
            - 0.01615\\,S

    with :math:`K_w^* = [\\mathrm{H^+}]_T[\\mathrm{OH^-}]` in (mol/kg-solution)²,
    :math:`T` in K and :math:`S` the practical salinity; valid for 0-45 °C and
    S = 0-45. At S = 0 it reduces to the thermodynamic ion product of pure water.

    References: F. J. Millero, "Thermodynamics of the carbon dioxide system in
    the oceans", Geochim. Cosmochim. Acta 59 (1995) 661-677; DOE (1994)
    "Handbook of methods for the analysis of the various parameters of the
    carbon dioxide system in sea water", version 2, A. G. Dickson and C. Goyet
    (eds.), ORNL/CDIAC-74, chapter 5.

    Parameters
    ----------
    temperature_K : array_like
        Temperature [K], 273.15-318.15.
    salinity : array_like
        Practical salinity, 0-45.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        :math:`\\mathrm{p}K_w^* = -\\log_{10} K_w^*`.
    """
    T, S = _seawater_T_S(temperature_K, salinity)
    return _out(-_millero_ln_kw(T, S) / np.log(10.0))


def _millero_ln_kw(T: np.ndarray, S: np.ndarray) -> np.ndarray:
    return (
        148.96502
        - 13847.26 / T
        - 23.6521 * np.log(T)
        + (118.67 / T - 5.977 + 1.0495 * np.log(T)) * np.sqrt(S)
        - 0.01615 * S
    )


def pKw(temperature_K: Any, salinity: Any = 0.0, *, formulation: str = "R11-07") -> Any:
    """Ion product of water: pure water where ``salinity == 0``, seawater otherwise.

    Where ``salinity`` is 0 this is :func:`pKw_pure_water` (IAPWS R11-07 at
    0.1 MPa, activity product on the molality scale, 0-100 °C); where it is
    > 0 it is :func:`pKw_seawater` (Millero 1995, stoichiometric product on the
    total scale in mol/kg-solution, 0-45 °C). See the module docstring for the
    pH scales. As S -> 0 the seawater value tends to 14.001 at 25 °C against
    13.995 for pure water: the two correlations differ by less than 0.01.

    Parameters
    ----------
    temperature_K : array_like
        Temperature [K].
    salinity : array_like, optional
        Practical salinity, 0-45; broadcast against ``temperature_K``.
    formulation : {"R11-07", "R11-24"}, optional
        Pure-water coefficient set, see :func:`pKw_pure_water`.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        pKw [-].

    Raises
    ------
    InputError
        If a value is not finite or outside the range of the correlation used
        for it.
    """
    _bandura_lvov_coefficients(formulation)
    T = as_float_array(temperature_K, "temperature_K")
    S = _salinity(salinity)
    T, S = _broadcast_T_S(T, S)
    result = np.empty(T.shape, dtype=float)
    fresh = S == 0.0
    if np.any(fresh):
        result[fresh] = pKw_pure_water(T[fresh], formulation)
    if np.any(~fresh):
        result[~fresh] = pKw_seawater(T[~fresh], S[~fresh])
    return _out(result)


def seawater_density_kg_m3(temperature_K: Any, salinity: Any) -> Any:
    """Density of seawater at one standard atmosphere (EOS-80, Millero & Poisson 1981).

    .. math::

        \\rho = \\rho_w(t) + A(t)\\,S + B(t)\\,S^{3/2} + C\\,S^2

        \\rho_w = 999.842594 + 6.793952\\times10^{-2}t - 9.095290\\times10^{-3}t^2
            + 1.001685\\times10^{-4}t^3 - 1.120083\\times10^{-6}t^4
            + 6.536332\\times10^{-9}t^5

        A = 8.24493\\times10^{-1} - 4.0899\\times10^{-3}t + 7.6438\\times10^{-5}t^2
            - 8.2467\\times10^{-7}t^3 + 5.3875\\times10^{-9}t^4

        B = -5.72466\\times10^{-3} + 1.0227\\times10^{-4}t - 1.6546\\times10^{-6}t^2,
        \\qquad C = 4.8314\\times10^{-4}

    in kg/m³ with :math:`t = T - 273.15` K. The fit was made for 0-40 °C and
    S = 0.5-43; it is used here over the 0-45 °C, S = 0-45 range of
    :func:`pKw_seawater`, a mild extrapolation.

    Reference: F. J. Millero and A. Poisson, "International one-atmosphere
    equation of state of seawater", Deep-Sea Res. 28A (1981) 625-629.

    Parameters
    ----------
    temperature_K : array_like
        Temperature [K], 273.15-318.15.
    salinity : array_like
        Practical salinity, 0-45.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Density [kg/m³].
    """
    T, S = _seawater_T_S(temperature_K, salinity)
    return _out(_millero_poisson_density(T, S))


def _millero_poisson_density(T: np.ndarray, S: np.ndarray) -> np.ndarray:
    """Seawater density [kg/m³] at checked, same-shape temperatures [K] and salinities."""
    t = T - ZERO_CELSIUS_K
    rho_w = (
        999.842594
        + t * (6.793952e-2
               + t * (-9.095290e-3
                      + t * (1.001685e-4
                             + t * (-1.120083e-6
                                    + t * 6.536332e-9))))
    )
    a = 8.24493e-1 + t * (-4.0899e-3 + t * (7.6438e-5 + t * (-8.2467e-7 + t * 5.3875e-9)))
    b = -5.72466e-3 + t * (1.0227e-4 + t * (-1.6546e-6))
    c = 4.8314e-4
    return rho_w + a * S + b * S**1.5 + c * S**2


def total_sulfate_mol_per_kg(salinity: Any) -> Any:
    """Total sulfate of seawater from its practical salinity.

    .. math::

        S_T = \\frac{0.14}{96.062}\\,\\frac{S}{1.80655}\\quad[\\mathrm{mol\\,kg^{-1}\\ solution}]

    Reference: A. W. Morris and J. P. Riley, Deep-Sea Res. 13 (1966) 699-705,
    as given in DOE (1994), chapter 5. About 0.0282 mol/kg at S = 35.

    Parameters
    ----------
    salinity : array_like
        Practical salinity, 0-45.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Total sulfate [mol/kg-solution].
    """
    return _out(_morris_riley_sulfate(_salinity(salinity)))


def _morris_riley_sulfate(S: np.ndarray) -> np.ndarray:
    """Total sulfate [mol/kg-solution] at checked salinities."""
    return 0.14 / 96.062 * S / 1.80655


def bisulfate_dissociation_constant(temperature_K: Any, salinity: Any) -> Any:
    """Stoichiometric dissociation constant of HSO4- in seawater, Dickson (1990).

    :math:`K_S = [\\mathrm{H^+}]_F[\\mathrm{SO_4^{2-}}]/[\\mathrm{HSO_4^-}]` on the
    free scale in mol/kg-solution, with :math:`I` from
    :func:`ionic_strength_from_salinity`:

    .. math::

        \\ln K_S = -\\frac{4276.1}{T} + 141.328 - 23.093\\ln T
            + \\left(-\\frac{13856}{T} + 324.57 - 47.986\\ln T\\right) I^{1/2}
            + \\left(\\frac{35474}{T} - 771.54 + 114.723\\ln T\\right) I
            - \\frac{2698}{T} I^{3/2} + \\frac{1776}{T} I^2
            + \\ln(1 - 0.001005\\,S)

    valid for 0-45 °C and S = 5-45 (used down to S = 0 here, where the
    bisulfate correction vanishes with the sulfate).

    References: A. G. Dickson, "Standard potential of the reaction
    AgCl(s) + 1/2 H2(g) = Ag(s) + HCl(aq), and the standard acidity constant of
    the ion HSO4- in synthetic sea water from 273.15 to 318.15 K", J. Chem.
    Thermodyn. 22 (1990) 113-127; DOE (1994), chapter 5.

    Parameters
    ----------
    temperature_K : array_like
        Temperature [K], 273.15-318.15.
    salinity : array_like
        Practical salinity, 0-45.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        :math:`K_S` [mol/kg-solution].
    """
    T, S = _seawater_T_S(temperature_K, salinity)
    return _out(_dickson_bisulfate_K(T, S))


def _dickson_bisulfate_K(T: np.ndarray, S: np.ndarray) -> np.ndarray:
    """K_S [mol/kg-solution] at checked, same-shape temperatures [K] and salinities."""
    i = _seawater_ionic_strength(S)
    ln_t = np.log(T)
    ln_ks = (
        -4276.1 / T + 141.328 - 23.093 * ln_t
        + (-13856.0 / T + 324.57 - 47.986 * ln_t) * np.sqrt(i)
        + (35474.0 / T - 771.54 + 114.723 * ln_t) * i
        - 2698.0 / T * i**1.5
        + 1776.0 / T * i**2
        + np.log(1.0 - 0.001005 * S)
    )
    return np.exp(ln_ks)


def debye_huckel_A(temperature_K: Any) -> Any:
    """Debye-Hückel limiting-law slope A for log10 γ on the molar (mol/L) scale.

    From the Debye-Hückel limiting law with the relative permittivity of
    :func:`water_dielectric_constant` and CODATA constants:

    .. math::

        A = \\frac{1}{\\ln 10}\\,\\frac{e^2}{8\\pi\\varepsilon_0\\varepsilon_r k_B T}
            \\left(\\frac{2000\\,N_A e^2}{\\varepsilon_0\\varepsilon_r k_B T}\\right)^{1/2}
            \\quad [\\mathrm{L^{1/2}\\,mol^{-1/2}}]

    so that :math:`\\log_{10}\\gamma_i = -A z_i^2 \\sqrt{I}` at infinite dilution
    with :math:`I` in mol/L. (The molality-scale slope is
    :math:`A\\sqrt{\\rho_w/(1000\\ \\mathrm{kg\\,m^{-3}})}`.) About 0.5116 at 25 °C.

    Reference: R. A. Robinson and R. H. Stokes, "Electrolyte Solutions", 2nd ed.
    (revised), Butterworths, London (1959), chapter 4 (the limiting law and the
    expression of A); permittivity from Malmberg & Maryott (1956).

    Parameters
    ----------
    temperature_K : array_like
        Temperature [K], 273.15-373.15.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        A [L^1/2 mol^-1/2].
    """
    return _out(_debye_huckel_A(_pure_water_temperature(temperature_K)))


def _debye_huckel_A(T: np.ndarray) -> np.ndarray:
    """Debye-Hückel A [L^1/2 mol^-1/2] at temperatures [K] already checked (no range checks)."""
    eps_r = _malmberg_maryott(T)
    c = CODATA_2018
    e = c["elementary_charge_C"]
    eps0 = c["vacuum_permittivity_F_per_m"]
    kb = c["boltzmann_J_per_K"]
    na = c["avogadro_per_mol"]
    denom = eps0 * eps_r * kb * T
    bjerrum_term = e**2 / (8.0 * np.pi * denom)  # m
    kappa_term = np.sqrt(2000.0 * na * e**2 / denom)  # m^-1 per sqrt(mol/L)
    return bjerrum_term * kappa_term / np.log(10.0)


def _charge(charge: Any) -> np.ndarray:
    z = as_float_array(charge, "charge")
    mask = (z != np.round(z)) | (np.abs(z) > 6)
    if np.any(mask):
        raise InputError(
            f"charge {_first_bad(z, mask)!r} must be a whole number between -6 and 6"
        )
    return z


def _ionic_strength(ionic_strength_M: Any) -> np.ndarray:
    i = as_float_array(ionic_strength_M, "ionic_strength_M")
    mask = (i < 0.0) | (i > DAVIES_MAX_IONIC_STRENGTH_M)
    if np.any(mask):
        raise InputError(
            f"ionic_strength_M {_first_bad(i, mask)!r} mol/L is outside 0 to "
            f"{DAVIES_MAX_IONIC_STRENGTH_M:g} mol/L, the range in which the Davies equation "
            "is used; for seawater give the salinity instead"
        )
    return i


def davies_log10_gamma(ionic_strength_M: Any, charge: Any = 1, temperature_K: Any = 298.15) -> Any:
    """Decadic log of an ion's molar activity coefficient by the Davies equation.

    .. math::

        \\log_{10}\\gamma = -A(T)\\,z^2\\left(\\frac{\\sqrt{I}}{1+\\sqrt{I}} - 0.3\\,I\\right)

    with :math:`A(T)` from :func:`debye_huckel_A`. Reference: C. W. Davies,
    "Ion Association", Butterworths, London (1962), p. 41. The equation is an
    empirical extension of the Debye-Hückel law; it is used here up to
    :data:`DAVIES_MAX_IONIC_STRENGTH_M` = 0.5 mol/L (common practice, its error
    grows beyond about 0.1 mol/L).

    Parameters
    ----------
    ionic_strength_M : array_like
        Ionic strength [mol/L], 0-0.5.
    charge : array_like of int, optional
        Charge number z of the ion.
    temperature_K : array_like, optional
        Temperature [K], 273.15-373.15.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        :math:`\\log_{10}\\gamma` [-], broadcast over the arguments.
    """
    i = _ionic_strength(ionic_strength_M)
    z = _charge(charge)
    a = np.asarray(debye_huckel_A(temperature_K))
    try:
        i, z, a = np.broadcast_arrays(i, z, a)
    except ValueError:
        raise InputError(
            "ionic_strength_M, charge and temperature_K cannot be broadcast together "
            f"(shapes {np.shape(i)}, {np.shape(z)}, {np.shape(a)})"
        ) from None
    return _out(-a * z**2 * _davies_term(i))


def _davies_term(ionic_strength_M: np.ndarray) -> np.ndarray:
    """sqrt(I) / (1 + sqrt(I)) - 0.3 I of the Davies equation, at checked ionic strengths."""
    sqrt_i = np.sqrt(ionic_strength_M)
    return sqrt_i / (1.0 + sqrt_i) - 0.3 * ionic_strength_M


def ionic_strength_from_salinity(salinity: Any) -> Any:
    """Ionic strength of seawater of a given practical salinity.

    .. math::

        I = \\frac{19.924\\,S}{1000 - 1.005\\,S}\\quad[\\mathrm{mol\\,kg^{-1}\\,H_2O}]

    Reference: DOE (1994), "Handbook of methods for the analysis of the various
    parameters of the carbon dioxide system in sea water", version 2,
    A. G. Dickson and C. Goyet (eds.), ORNL/CDIAC-74, chapter 5. The result is
    on the molality scale (per kg of water); at S = 35 it is 0.7227 mol/kg,
    which exceeds the range of the Davies equation: seawater [H+] and [OH-] use
    the stoichiometric constant instead (see :func:`hydronium_hydroxide_molar`).

    Parameters
    ----------
    salinity : array_like
        Practical salinity, 0-45.

    Returns
    -------
    numpy.float64 or numpy.ndarray
        Ionic strength [mol/kg H2O].
    """
    return _out(_seawater_ionic_strength(_salinity(salinity)))


def _seawater_ionic_strength(S: np.ndarray) -> np.ndarray:
    """Ionic strength [mol/kg H2O] at checked salinities."""
    return 19.924 * S / (1000.0 - 1.005 * S)


def hydronium_hydroxide_molar(
    pH: Any,
    temperature_K: Any,
    ionic_strength_M: Any = 0.0,
    salinity: Any = 0.0,
    *,
    seawater_h_scale: str = "free",
) -> tuple[Any, Any]:
    """Concentrations of H+ and OH- [mol/L] from a measured pH.

    Fresh water (``salinity == 0``): the pH is an activity,
    :math:`a_{\\mathrm{H^+}} = 10^{-\\mathrm{pH}}`; the activity coefficient
    :math:`\\gamma` of both singly charged ions comes from
    :func:`davies_log10_gamma` and :math:`K_w` from :func:`pKw_pure_water`:

    .. math::

        m_{\\mathrm{H^+}} = \\frac{10^{-\\mathrm{pH}}}{\\gamma}, \\qquad
        m_{\\mathrm{OH^-}} = \\frac{K_w}{a_{\\mathrm{H^+}}\\,\\gamma}
                         = \\frac{10^{\\mathrm{pH}-\\mathrm{p}K_w}}{\\gamma}

        c_i = m_i\\,\\rho_w / (1000\\ \\mathrm{kg\\,m^{-3}})

    (molalities in mol/kg of water; the dilute-solution conversion to mol/L
    neglects the volume of the solutes; water activity taken as 1).

    Seawater (``salinity > 0``): the pH is read on the total scale
    (mol/kg-solution) and :math:`K_w^*` is Millero's stoichiometric product on
    that scale (:func:`pKw_seawater`), so no activity coefficient is applied:

    .. math::

        [\\mathrm{H^+}]_T = 10^{-\\mathrm{pH}_T}, \\qquad
        [\\mathrm{OH^-}] = \\frac{K_w^*}{[\\mathrm{H^+}]_T}, \\qquad
        [\\mathrm{H^+}]_F = \\frac{[\\mathrm{H^+}]_T}{1 + S_T/K_S}

        c_i = [i]\\,\\rho_{sw} / (1000\\ \\mathrm{kg\\,m^{-3}})

    with :math:`S_T` from :func:`total_sulfate_mol_per_kg`, :math:`K_S` from
    :func:`bisulfate_dissociation_constant` (the total-to-free relation of
    DOE 1994, chapter 2) and :math:`\\rho_{sw}` from
    :func:`seawater_density_kg_m3`. By default the free hydronium concentration
    :math:`[\\mathrm{H^+}]_F` is returned, the quantity that corresponds to
    :math:`10^{-\\mathrm{pH}}/\\gamma` in fresh water and so to acid-catalysed
    rate constants measured in dilute buffers; ``seawater_h_scale="total"``
    returns :math:`[\\mathrm{H^+}]_T` instead. At S = 35 and 25 °C the two
    differ by the factor 1 + S_T/K_S = 1.28.

    Parameters
    ----------
    pH : array_like
        Measured pH at ``temperature_K`` (activity scale in fresh water, total
        scale in seawater), 0-14.
    temperature_K : array_like
        Temperature [K]: 273.15-373.15 for fresh water, 273.15-318.15 for seawater.
    ionic_strength_M : array_like, optional
        Ionic strength of fresh water [mol/L], 0-0.5. Must be 0 where
        ``salinity > 0`` (the salinity already fixes the medium).
    salinity : array_like, optional
        Practical salinity, 0-45.
    seawater_h_scale : {"free", "total"}, optional
        Hydrogen-ion concentration returned where ``salinity > 0``.

    Returns
    -------
    h_M, oh_M : numpy.float64 or numpy.ndarray
        [H+] and [OH-] [mol/L], broadcast over the arguments.

    Raises
    ------
    InputError
        For non-finite or out-of-range values, for arguments that cannot be
        broadcast, or where both ``ionic_strength_M`` and ``salinity`` are > 0.

    References
    ----------
    IAPWS R11-07 (2007); Millero, Geochim. Cosmochim. Acta 59 (1995) 661-677;
    Dickson, J. Chem. Thermodyn. 22 (1990) 113-127; DOE (1994), chapters 2 and 5;
    Davies, "Ion Association" (1962); IUPAC, "Measurement of pH. Definition,
    standards, and procedures", Pure Appl. Chem. 74 (2002) 2169-2200 (pH as an
    activity quantity).
    """
    if seawater_h_scale not in SEAWATER_H_SCALES:
        raise InputError(
            f"unknown seawater_h_scale {seawater_h_scale!r}; valid: {', '.join(SEAWATER_H_SCALES)}"
        )
    p = validate_pH(pH)
    T = as_float_array(temperature_K, "temperature_K")
    i = _ionic_strength(ionic_strength_M)
    s = _salinity(salinity)
    try:
        p, T, i, s = np.broadcast_arrays(np.asarray(p), T, i, s)
    except ValueError:
        raise InputError(
            "pH, temperature_K, ionic_strength_M and salinity cannot be broadcast together "
            f"(shapes {np.shape(pH)}, {np.shape(temperature_K)}, "
            f"{np.shape(ionic_strength_M)}, {np.shape(salinity)})"
        ) from None
    both = (i > 0.0) & (s > 0.0)
    if np.any(both):
        raise InputError(
            f"give either ionic_strength_M or salinity, not both (got ionic_strength_M "
            f"{_first_bad(i, both)!r} mol/L with salinity {_first_bad(s, both)!r}); for "
            "seawater the salinity alone defines the medium"
        )
    h = np.empty(p.shape, dtype=float)
    oh = np.empty(p.shape, dtype=float)
    fresh = s == 0.0
    if np.any(fresh):
        tf = _pure_water_temperature(T[fresh])
        h[fresh], oh[fresh] = _fresh_water_h_oh(p[fresh], tf, i[fresh])
    sea = ~fresh
    if np.any(sea):
        ts = _temperature(T[sea], SEAWATER_MIN_K, SEAWATER_MAX_K, "seawater correlations")
        ss = s[sea]
        rho = _millero_poisson_density(ts, ss) / 1000.0
        pkw = -_millero_ln_kw(ts, ss) / np.log(10.0)
        h_total = 10.0 ** (-p[sea])
        oh[sea] = 10.0 ** (p[sea] - pkw) * rho
        if seawater_h_scale == "free":
            ratio = _morris_riley_sulfate(ss) / _dickson_bisulfate_K(ts, ss)
            h[sea] = h_total / (1.0 + ratio) * rho
        else:
            h[sea] = h_total * rho
    return _out(h), _out(oh)


def _fresh_water_h_oh(
    pH: np.ndarray, temperature_K: np.ndarray, ionic_strength_M: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """[H+] and [OH-] [mol/L] of fresh water from checked, same-shape float arrays.

    The fresh-water branch of :func:`hydronium_hydroxide_molar` without its
    range checks: the caller guarantees finite pH in 0-14, temperatures in
    273.15-373.15 K and ionic strengths in 0-0.5 mol/L. Where every ionic
    strength is 0 (pure water) the Davies term, exactly 0 there, is not
    evaluated.
    """
    rho = _kell_density(temperature_K) / 1000.0  # g/cm3, and kg/L of water per L
    pkw = _bandura_lvov_pKw(rho, temperature_K, _BANDURA_LVOV["R11-07"])
    if np.any(ionic_strength_M):
        log_gamma = -_debye_huckel_A(temperature_K) * _davies_term(ionic_strength_M)
        h = 10.0 ** (-pH - log_gamma) * rho
        oh = 10.0 ** (pH - pkw - log_gamma) * rho
    else:
        h = 10.0 ** (-pH) * rho
        oh = 10.0 ** (pH - pkw) * rho
    return h, oh
