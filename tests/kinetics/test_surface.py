"""Tests of kinetics.surface: the pH-temperature rate surface fit.

All runs below are invented test data (no real substance or laboratory),
except the published rate constants of the Mabey and Mill (1978) checks,
which are labelled where they are used.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose

import kinetics
from kinetics import water
from kinetics.errors import DataError, IdentifiabilityError, InputError
from kinetics.prediction import predict
from kinetics.surface import (
    BOLTZMANN_J_PER_K,
    DEFAULT_EA_PRIOR_SD_J_PER_MOL,
    EFSA_DEFAULT_EA_J_PER_MOL,
    GAS_CONSTANT_J_PER_MOL_K as R,
    MAX_SE_LN_K,
    MIN_SE_LN_K,
    PATHWAYS,
    PLANCK_J_S,
    SE_POOLING_MAX_DOF,
    TEMPERATURE_MODELS,
    RateMeasurement,
    SurfaceFit,
    arrhenius_ln_k,
    eyring_ln_k,
    fit_surface,
    moderate_variances,
)

TREF = 298.15
YEAR_S = 365.25 * 86400.0
DAY_S = 86400.0

# Invented "true" surface of an invented substance (Veltrazine, invented):
# ln k at 25 °C and Ea [J/mol] per pathway.
VELTRAZINE = {
    "acid": (math.log(2e-2), 60e3),
    "neutral": (math.log(2e-7), 85e3),
    "base": (math.log(2.0), 50e3),
}


def true_k(params, T, pH, ionic_strength_M=0.0):
    """k_obs of an Arrhenius surface from its parameters (independent of the fit code)."""
    h, oh = water.hydronium_hydroxide_molar(pH, T, ionic_strength_M)
    conc = {"acid": h, "neutral": 1.0, "base": oh}
    return sum(
        math.exp(a - ea / R * (1.0 / T - 1.0 / TREF)) * conc[p] for p, (a, ea) in params.items()
    )


def standard_runs(params, rng=None, se=None, temps=(293.15, 313.15, 333.15), phs=(4.0, 7.0, 9.0),
                  noise=0.0, se_dof=None):
    runs = []
    for T in temps:
        for pH in phs:
            k = true_k(params, T, pH)
            if noise:
                k *= math.exp(noise * rng.standard_normal())
            runs.append(RateMeasurement(T, pH, k, se_ln_k=se, se_dof=se_dof,
                                        label=f"invented run {T - 273.15:.0f} C pH {pH}"))
    return runs


# --------------------------------------------------------------------------- #
# external checks
# --------------------------------------------------------------------------- #
def test_one_pathway_arrhenius_fit_equals_statsmodels_ols():
    # One neutral pathway at pH 7: ln k = ln k_ref - (Ea/R)(1/T - 1/T_ref) is linear,
    # so the nonlinear fit must equal ordinary least squares of ln k on 1/T.
    # Reference: statsmodels OLS (independent library).
    rng = np.random.default_rng(3)
    temps = np.array([283.15, 293.15, 303.15, 313.15, 323.15, 333.15])
    ln_k = -15.0 - 80e3 / R * (1 / temps - 1 / TREF) + 0.05 * rng.standard_normal(temps.size)
    runs = [RateMeasurement(T, 7.0, math.exp(y)) for T, y in zip(temps, ln_k)]
    fit = fit_surface(runs, pathways=("neutral",))

    X = sm.add_constant(1.0 / temps - 1.0 / TREF)
    ols = sm.OLS(ln_k, X).fit()
    M = np.diag([1.0, -R])  # (intercept, slope) -> (ln_k_ref, Ea)
    assert fit.parameter_names == ("ln_k_ref_neutral", "Ea_neutral_J_per_mol")
    assert_allclose(fit.estimates, M @ ols.params, rtol=1e-8, atol=0)
    assert_allclose(fit.covariance, M @ ols.cov_params() @ M.T, rtol=1e-8, atol=0)
    assert fit.dof == int(ols.df_resid)
    assert_allclose(fit.residual_scale, math.sqrt(ols.scale), rtol=1e-8)
    iv = fit.interval(0.95)
    ci = ols.conf_int(0.05)  # t-based, statsmodels
    assert_allclose(iv.lower, [ci[0, 0], -R * ci[1, 1]], rtol=1e-8)
    assert_allclose(iv.upper, [ci[0, 1], -R * ci[1, 0]], rtol=1e-8)


def test_weighted_fit_equals_statsmodels_wls_without_between_run_scatter():
    # With standard errors and no excess scatter (Q(0) <= n - p, so tau^2 = 0) the
    # Knapp-Hartung covariance is the WLS covariance with the scale estimated from
    # the weighted residuals. Reference: statsmodels WLS (independent library).
    temps = np.array([288.15, 298.15, 308.15, 318.15, 328.15])
    se = np.array([0.05, 0.08, 0.05, 0.10, 0.06])
    wobble = np.array([0.01, -0.02, 0.015, 0.01, -0.01])  # well inside the SEs
    ln_k = -14.0 - 70e3 / R * (1 / temps - 1 / TREF) + wobble
    runs = [RateMeasurement(T, 7.0, math.exp(y), se_ln_k=s) for T, y, s in zip(temps, ln_k, se)]
    fit = fit_surface(runs, pathways=("neutral",))
    assert fit.between_run_sd_ln_k == 0.0
    X = sm.add_constant(1.0 / temps - 1.0 / TREF)
    wls = sm.WLS(ln_k, X, weights=1.0 / se**2).fit()
    M = np.diag([1.0, -R])
    assert_allclose(fit.estimates, M @ wls.params, rtol=1e-8)
    assert_allclose(fit.covariance, M @ wls.cov_params() @ M.T, rtol=1e-8)
    assert_allclose(fit.variance_scale, wls.scale, rtol=1e-8)


def test_mixed_standard_errors_equal_statsmodels_wls_with_the_mean_variance_imputed():
    # Runs without se_ln_k among runs with one get the mean within-run variance of
    # the others; with no excess scatter (tau^2 = 0) the fit is then WLS with those
    # weights. Reference: statsmodels WLS (independent library).
    temps = np.array([288.15, 298.15, 308.15, 318.15, 328.15, 303.15])
    se = [0.05, None, 0.05, 0.10, None, 0.06]
    wobble = np.array([0.01, -0.02, 0.015, 0.01, -0.01, 0.005])  # well inside the SEs
    ln_k = -14.0 - 70e3 / R * (1 / temps - 1 / TREF) + wobble
    runs = [RateMeasurement(T, 7.0, math.exp(y), se_ln_k=s) for T, y, s in zip(temps, ln_k, se)]
    fit = fit_surface(runs, pathways=("neutral",))
    assert fit.between_run_sd_ln_k == 0.0
    assert fit.se_imputed_runs == (1, 4)
    fill = np.mean([0.05**2, 0.05**2, 0.10**2, 0.06**2])
    assert_allclose(fit.se_imputed_ln_k, math.sqrt(fill), rtol=1e-14)
    weights = 1.0 / np.array([fill if s is None else s * s for s in se])
    X = sm.add_constant(1.0 / temps - 1.0 / TREF)
    wls = sm.WLS(ln_k, X, weights=weights).fit()
    M = np.diag([1.0, -R])
    assert_allclose(fit.estimates, M @ wls.params, rtol=1e-8)
    assert_allclose(fit.covariance, M @ wls.cov_params() @ M.T, rtol=1e-8)
    assert_allclose(fit.variance_scale, wls.scale, rtol=1e-8)


@pytest.mark.parametrize("se_dof", [None, 6])
def test_mixed_standard_errors_fit_as_if_the_imputed_value_were_given(se_dof):
    rng = np.random.default_rng(5)
    base = standard_runs(VELTRAZINE, rng, noise=0.05)
    ses = [0.02 + 0.01 * (i % 4) for i in range(len(base))]
    missing = (2, 6, 7)
    mixed = [
        RateMeasurement(r.temperature_K, r.pH, r.k_per_s,
                        se_ln_k=None if i in missing else ses[i],
                        se_dof=None if i in missing else se_dof, label=r.label)
        for i, r in enumerate(base)
    ]
    fit = fit_surface(mixed)
    assert fit.se_imputed_runs == missing
    given = np.array([ses[i] ** 2 for i in range(len(base)) if i not in missing])
    if se_dof is not None:
        given, d0 = moderate_variances(given, np.full(given.size, float(se_dof)))
        assert fit.within_run_prior_dof == d0
    fill = float(np.mean(given))
    assert_allclose(fit.se_imputed_ln_k, math.sqrt(fill), rtol=1e-14)
    # the same fit with the (moderated) variances given explicitly to every run
    it = iter(given)
    explicit = [
        RateMeasurement(r.temperature_K, r.pH, r.k_per_s,
                        se_ln_k=math.sqrt(fill if i in missing else next(it)), label=r.label)
        for i, r in enumerate(base)
    ]
    ref = fit_surface(explicit)
    assert ref.se_imputed_runs == () and ref.se_imputed_ln_k is None
    assert fit.pathways == ref.pathways
    assert_allclose(fit.estimates, ref.estimates, rtol=1e-9)
    assert_allclose(fit.covariance, ref.covariance, rtol=1e-7)
    assert_allclose(fit.residual_scale, ref.residual_scale, rtol=1e-9)
    assert_allclose(fit.between_run_sd_ln_k, ref.between_run_sd_ln_k, rtol=1e-7, atol=1e-12)
    restored = SurfaceFit.from_dict(json.loads(json.dumps(fit.to_dict())))
    assert restored.se_imputed_runs == missing
    assert restored.se_imputed_ln_k == fit.se_imputed_ln_k
    # a stored fit from before these fields existed still loads
    old = fit.to_dict()
    del old["se_imputed_runs"], old["se_imputed_ln_k"]
    legacy = SurfaceFit.from_dict(old)
    assert legacy.se_imputed_runs == () and legacy.se_imputed_ln_k is None


def test_extreme_standard_errors_are_refused_or_held_at_the_resolution_of_ln_k():
    with pytest.raises(InputError, match=r"e\^20"):
        RateMeasurement(293.15, 4.0, 1e-9, se_ln_k=1.34e154)
    assert RateMeasurement(293.15, 4.0, 1e-9, se_ln_k=MAX_SE_LN_K).se_ln_k == MAX_SE_LN_K
    # inputs found by the property tests (they overflowed the weights)
    raw = [(293.15, 4.0, 1.192092896e-07, None), (293.15, 4.0, 1e-09, None),
           (293.15, 4.0, 1e-09, 6.55014924922606e-92)]
    fit = fit_surface([RateMeasurement(t, ph, k, se_ln_k=se) for t, ph, k, se in raw])
    assert fit.se_imputed_runs == (0, 1)
    assert_allclose(fit.se_imputed_ln_k, MIN_SE_LN_K, rtol=1e-14)
    assert math.isfinite(fit.residual_scale) and np.all(np.isfinite(fit.covariance))
    held = fit_surface([RateMeasurement(t, ph, k, se_ln_k=MIN_SE_LN_K) for t, ph, k, _ in raw])
    assert_allclose(fit.estimates, held.estimates, rtol=1e-12)
    assert_allclose(fit.residual_scale, held.residual_scale, rtol=1e-12)
    raw = [(293.15, 4.0, 0.0006499391076200527, None), (293.15, 4.0, 0.0004135645704745287, 1.0),
           (313.15, 4.0, 0.0003115059476680626, 7.827686268831674e-41)]
    with pytest.raises(IdentifiabilityError, match="3 runs"):
        fit_surface([RateMeasurement(t, ph, k, se_ln_k=se) for t, ph, k, se in raw])


# Regression values: fits with standard errors on every run or on none, computed
# before runs without a standard error could be mixed with others; imputation
# must leave them unchanged.
UNMIXED_REGRESSION = {
    "with_dof": (
        [-3.9213845375321692e+00, 6.1193354647319255e+04, -1.5368338815844231e+01,
         8.1275438120442413e+04, 7.2252905386116639e-01, 4.9673637759494923e+04],
        0.04600335354070818, 0.031426869909904,
    ),
    "with_no_dof": (
        [-3.9164598725501816e+00, 6.1332489750170782e+04, -1.5366752892028188e+01,
         8.0340940431802272e+04, 7.1759915126415030e-01, 4.9915014498677840e+04],
        0.04683366508589551, 0.030804995389277175,
    ),
    "without": (
        [-3.9248066643470256e+00, 6.1129159241265224e+04, -1.5369098919592780e+01,
         8.1756242220563086e+04, 7.2488176613284727e-01, 4.9553054309676183e+04],
        0.0457747508928716, 0.0457747508928716,
    ),
}


@pytest.mark.parametrize("case", sorted(UNMIXED_REGRESSION))
def test_standard_errors_on_every_run_or_none_are_unchanged(case):
    rng = np.random.default_rng(11)
    runs = standard_runs(VELTRAZINE, rng, noise=0.05)
    if case != "without":
        dof = 6 if case == "with_dof" else None
        runs = [
            RateMeasurement(r.temperature_K, r.pH, r.k_per_s, se_ln_k=0.02 + 0.01 * (i % 4),
                            se_dof=dof, label=r.label)
            for i, r in enumerate(runs)
        ]
    fit = fit_surface(runs)
    est, scale, tau = UNMIXED_REGRESSION[case]
    assert fit.pathways == PATHWAYS
    assert fit.se_imputed_runs == () and fit.se_imputed_ln_k is None
    assert_allclose(fit.estimates, est, rtol=1e-10)
    assert_allclose(fit.residual_scale, scale, rtol=1e-10)
    assert_allclose(fit.between_run_sd_ln_k, tau, rtol=1e-9)


# Published hydrolysis constants at 25 °C (kA, kN, kB) and half-lives at pH 7.
# Source: Mabey and Mill (1978), "Critical review of hydrolysis of organic compounds
# in water under environmental conditions", J. Phys. Chem. Ref. Data 7, 383-415.
# The numbers below are from memory of that review's tables (the paper itself was
# not at hand when this test was written); the half-lives are given there to two
# significant figures.
MABEY_MILL_1978 = [
    # name, kA [L/(mol s)], kN [1/s], kB [L/(mol s)], t1/2 at pH 7 and 25 °C [s]
    ("ethyl acetate", 1.1e-4, 1.5e-10, 1.1e-1, 2.0 * YEAR_S),
    ("methyl bromide", None, 4.1e-7, 1.4e-4, 20.0 * DAY_S),
]


@pytest.mark.parametrize("name, kA, kN, kB, half_life_s", MABEY_MILL_1978)
def test_half_life_at_pH7_from_published_constants(name, kA, kN, kB, half_life_s):
    # Exact invented measurements generated from the published 25 °C constants at
    # several pH values and temperatures (the activation energies, 70 kJ/mol for every
    # pathway, are invented and do not enter at 25 °C, the reference temperature);
    # the fitted surface must reproduce the published pH 7 half-life within its
    # two-figure rounding (+-2.5 %) plus the water-chemistry difference: the review
    # takes [H+] = [OH-] = 1e-7 M at pH 7 (pKw 14.00), fieldrate the IAPWS R11-07
    # pKw of 13.995 and the mol/kg -> mol/L conversion (0.3 % less), which shortens a
    # base-dominated half-life by about 1 % (ethyl acetate: 1.97 yr with pKw 14.00,
    # 1.95 yr here; methyl bromide: 19.6 d either way).
    textbook = math.log(2) / ((kA or 0.0) * 1e-7 + kN + (kB or 0.0) * 1e-7)
    assert_allclose(textbook, half_life_s, rtol=0.025)
    params = {"neutral": (math.log(kN), 70e3)}
    if kA is not None:
        params["acid"] = (math.log(kA), 70e3)
    if kB is not None:
        params["base"] = (math.log(kB), 70e3)
    pathways = tuple(p for p in PATHWAYS if p in params)
    phs = (2.0, 3.0, 4.0, 5.0, 5.5, 6.0, 7.0, 8.0, 9.0, 10.0, 11.0, 12.0)
    runs = standard_runs(params, temps=(288.15, 298.15, 308.15), phs=phs)
    fit = fit_surface(runs, pathways=pathways)
    pred = predict(fit, 298.15, 7.0)
    assert_allclose(pred.dt50_s[0], half_life_s, rtol=0.03)
    # the fit recovers the published constants themselves
    for p in pathways:
        j = fit.parameter_names.index(f"ln_k_ref_{p}")
        assert_allclose(fit.estimates[j], params[p][0], atol=1e-6)


def test_eyring_constants():
    # k_B T / h at 298.15 K = 6.2124e12 1/s with the exact 2019 SI constants
    # (CODATA 2018, Tiesinga et al., Rev. Mod. Phys. 93 (2021) 025010): the
    # prefactor of Eyring (1935), J. Chem. Phys. 3, 107.
    assert_allclose(BOLTZMANN_J_PER_K * 298.15 / PLANCK_J_S, 6.2124e12, rtol=1e-4)
    # R = N_A k_B exactly (CODATA 2018)
    assert_allclose(R, 6.02214076e23 * 1.380649e-23, rtol=1e-9)
    # With dS = 0 and dH = 0 the Eyring rate is k_B T / h itself.
    assert_allclose(np.exp(eyring_ln_k(0.0, 0.0, 298.15)), 6.2124e12, rtol=1e-4)


def test_arrhenius_law_hand_value():
    # Ea = 50 kJ/mol from 25 °C to 35 °C: factor exp(50e3/R (1/298.15 - 1/308.15))
    # = exp(0.6546) = 1.924 (hand calculation from the Arrhenius equation, common practice,
    # no source).
    ratio = math.exp(arrhenius_ln_k(0.0, 50e3, 308.15))
    assert_allclose(ratio, 1.924, rtol=1e-3)


# --------------------------------------------------------------------------- #
# behaviour
# --------------------------------------------------------------------------- #
@pytest.mark.parametrize("temperature_model", TEMPERATURE_MODELS)
def test_exact_data_recovers_the_surface(temperature_model):
    runs = standard_runs(VELTRAZINE, temps=(283.15, 298.15, 313.15, 333.15),
                         phs=(3.0, 4.0, 5.0, 7.0, 8.0, 9.0, 10.0))
    fit = fit_surface(runs, temperature_model=temperature_model, pathways=PATHWAYS)
    T = np.array([278.15, 300.0, 340.0])
    pH = np.array([5.5, 7.2, 8.8])
    expected = np.log([true_k(VELTRAZINE, t, p) for t, p in zip(T, pH)])
    tol = 1e-7 if temperature_model == "arrhenius" else 0.05  # Eyring only approximates Arrhenius
    assert_allclose(fit.ln_k(T, pH), expected, atol=tol)
    if temperature_model == "arrhenius":
        for p, (a, ea) in VELTRAZINE.items():
            assert_allclose(fit.estimates[fit.parameter_names.index(f"ln_k_ref_{p}")], a, atol=1e-7)
            j = fit.parameter_names.index(f"Ea_{p}_J_per_mol")
            assert_allclose(fit.estimates[j], ea, rtol=1e-7)
    else:
        # Eyring: Ea = dH + R T (Eyring 1935), so dH is near Ea - R T_ref
        dH = fit.estimates[fit.parameter_names.index("dH_neutral_J_per_mol")]
        assert_allclose(dH, 85e3 - R * TREF, rtol=0.02)


def test_auto_selection_picks_supported_pathways_and_records_candidates():
    params = {"neutral": VELTRAZINE["neutral"], "base": VELTRAZINE["base"]}
    rng = np.random.default_rng(11)
    runs = standard_runs(params, rng, se=0.03, noise=0.03, se_dof=6)
    fit = fit_surface(runs)
    assert fit.selection == "auto"
    assert fit.pathways == ("neutral", "base")
    assert len(fit.candidates) == 7
    assert sum(c.selected for c in fit.candidates) == 1
    chosen = [c for c in fit.candidates if c.selected][0]
    assert chosen.pathways == fit.pathways
    finite = [c.aicc for c in fit.candidates if c.aicc is not None]
    assert chosen.aicc == min(finite)
    assert fit.uncharacterised_pathways == ()
    assert fit.ea_from_prior == ()
    assert fit.within_run_prior_dof is not None


def test_only_pH7_measured_leaves_acid_and_base_uncharacterised():
    runs = standard_runs(VELTRAZINE, phs=(7.0,))
    fit = fit_surface(runs)
    assert fit.pathways == ("neutral",)
    assert fit.uncharacterised_pathways == ("acid", "base")
    assert set(fit.hidden_pathway_ln_k_ref_max) == {"acid", "base"}
    reasons = {c.pathways: c.reason for c in fit.candidates}
    assert "single pH level" in reasons[("acid",)]


def test_single_temperature_takes_ea_from_efsa_default():
    rng = np.random.default_rng(5)
    runs = standard_runs(VELTRAZINE, rng, temps=(298.15,), phs=(4.0, 4.0, 7.0, 7.0, 9.0, 9.0),
                         noise=0.02)
    fit = fit_surface(runs, pathways=PATHWAYS)
    assert fit.ea_from_prior == PATHWAYS
    assert fit.ea_prior_J_per_mol == (EFSA_DEFAULT_EA_J_PER_MOL, DEFAULT_EA_PRIOR_SD_J_PER_MOL)
    # EFSA Journal (2008) 622, 1-32: default 65.4 kJ/mol
    assert EFSA_DEFAULT_EA_J_PER_MOL == 65.4e3
    for p in PATHWAYS:
        j = fit.parameter_names.index(f"Ea_{p}_J_per_mol")
        assert_allclose(fit.estimates[j], 65.4e3, rtol=1e-6)
        assert_allclose(fit.standard_errors[j], 15e3, rtol=1e-6)
    assert fit.dof == 3
    own = fit_surface(runs, pathways=PATHWAYS, ea_prior_J_per_mol=(90e3, 5e3))
    j = own.parameter_names.index("Ea_base_J_per_mol")
    assert_allclose(own.estimates[j], 90e3, rtol=1e-6)
    assert_allclose(own.standard_errors[j], 5e3, rtol=1e-6)


def test_pathway_at_one_temperature_gets_prior_only_for_that_pathway():
    # acid measured at 25 °C only, neutral and base at three temperatures
    runs = standard_runs(VELTRAZINE, phs=(7.0, 9.0))
    runs += standard_runs(VELTRAZINE, temps=(298.15,), phs=(4.0,))
    fit = fit_surface(runs, pathways=PATHWAYS)
    assert fit.ea_from_prior == ("acid",)


def test_round_trip_gives_identical_predictions():
    rng = np.random.default_rng(2)
    fit = fit_surface(standard_runs(VELTRAZINE, rng, se=0.04, noise=0.04, se_dof=6))
    text = json.dumps(fit.to_dict(), allow_nan=False)  # strict JSON: no NaN or infinity
    back = SurfaceFit.from_dict(json.loads(text))
    T = np.linspace(275.0, 350.0, 50)
    pH = np.linspace(3.0, 11.0, 50)
    for method in ("delta", "montecarlo"):
        a = predict(fit, T, pH, method=method, seed=7, n_draws=500)
        b = predict(back, T, pH, method=method, seed=7, n_draws=500)
        for name in ("k_per_s", "k_ci_low_per_s", "k_ci_high_per_s", "k_pi_low_per_s",
                     "k_pi_high_per_s", "extrapolation_ln_k"):
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
        for flag in a.flags:
            np.testing.assert_array_equal(a.flags[flag], b.flags[flag])
    assert back.candidates == fit.candidates
    assert back.measurements == fit.measurements
    with pytest.raises(InputError, match="not a stored surface fit"):
        SurfaceFit.from_dict({"format": "something else"})


def test_ln_k_with_parameter_draws_jacobian_and_contributions():
    rng = np.random.default_rng(4)
    study = standard_runs(VELTRAZINE, rng, se=0.03, noise=0.03, se_dof=6)
    fit = fit_surface(study, pathways=PATHWAYS)
    T = np.array([285.0, 300.0, 320.0, 340.0])
    pH = np.array([4.5, 6.0, 8.0, 9.5])
    draws = fit.sample_parameters(5, rng)
    many = fit.ln_k(T, pH, parameters=draws)
    assert many.shape == (5, 4)
    for i in range(5):
        single = SurfaceFit.from_dict({**fit.to_dict(), "estimates": list(draws[i])})
        assert_allclose(many[i], single.ln_k(T, pH), rtol=1e-12)
    jac = fit.ln_k_jacobian(T, pH)
    assert jac.shape == (4, 6)
    steps = np.abs(fit.estimates) * 1e-6 + 1e-6
    for j in range(6):
        up = fit.estimates.copy()
        dn = fit.estimates.copy()
        up[j] += steps[j]
        dn[j] -= steps[j]
        fd = fit.ln_k(T, pH, parameters=up)[0] - fit.ln_k(T, pH, parameters=dn)[0]
        fd /= 2 * steps[j]
        assert_allclose(jac[:, j], fd, rtol=1e-5, atol=1e-6 * np.max(np.abs(fd)))
    contrib = fit.contributions(T, pH)
    assert_allclose(sum(contrib.values()), 1.0, rtol=1e-12)
    assert contrib["acid"][0] > 0.5 and contrib["base"][-1] > 0.5
    assert_allclose(fit.rate_per_s(T, pH), np.exp(fit.ln_k(T, pH)), rtol=1e-12)
    grid = fit.ln_k(T[:, None], pH[None, :])
    assert grid.shape == (4, 4)


def test_sample_parameters_reproduce_covariance():
    rng = np.random.default_rng(6)
    study = standard_runs(VELTRAZINE, rng, se=0.03, noise=0.03, se_dof=6)
    fit = fit_surface(study, pathways=PATHWAYS)
    draws = fit.sample_parameters(200_000, np.random.default_rng(1))
    se = fit.standard_errors
    assert_allclose((draws.mean(axis=0) - fit.estimates) / se, 0.0, atol=0.02)
    corr_fit = fit.covariance / np.outer(se, se)
    assert_allclose(np.corrcoef(draws.T), corr_fit, atol=0.02)
    np.testing.assert_array_equal(fit.sample_parameters(3, 9), fit.sample_parameters(3, 9))
    with pytest.raises(InputError, match="distribution"):
        fit.sample_parameters(3, 1, distribution="cauchy")


def test_moderate_variances_pools_homogeneous_and_keeps_heterogeneous():
    rng = np.random.default_rng(8)
    nu = np.full(30, 6.0)
    homogeneous = 0.03**2 * rng.chisquare(6, 30) / 6
    moderated, d0 = moderate_variances(homogeneous, nu)
    assert d0 > 5.0  # mostly pooled
    assert np.ptp(np.log(moderated)) < np.ptp(np.log(homogeneous)) / 2
    spread = homogeneous * np.repeat([1.0, 100.0], 15)
    moderated, d0 = moderate_variances(spread, nu)
    assert d0 < 3.0
    assert np.median(moderated[15:]) > 30 * np.median(moderated[:15])
    same, d0 = moderate_variances(np.full(9, 1e-3), np.full(9, 6.0))
    assert d0 == SE_POOLING_MAX_DOF
    assert_allclose(same, 1e-3, rtol=1e-6)


def test_from_series_fit_and_from_dt50():
    t = np.array([0.0, 1.0, 2.0, 4.0, 7.0, 10.0, 14.0, 21.0])
    conc = 100.0 * np.exp(-0.1 * t) * (1 + 0.02 * np.array([1, -1, 0.5, -0.5, 1, -1, 0.3, 0.2]))
    sfit = kinetics.fit_series(t, conc, time_unit="d")
    run = RateMeasurement.from_series_fit(sfit, temperature_K=298.15, pH=7.0, label="invented")
    assert run.k_per_s == pytest.approx(sfit.k_per_s)
    assert run.se_ln_k == pytest.approx(sfit.se_ln_k)
    assert run.se_dof == sfit.dof
    run2 = RateMeasurement.from_dt50(10 * DAY_S, temperature_K=298.15, pH=7.0)
    assert_allclose(run2.k_per_s, math.log(2) / (10 * DAY_S), rtol=1e-12)


@pytest.mark.parametrize(
    "kwargs, error, match",
    [
        (dict(temperature_K=298.15, pH=7.0, k_per_s=0.0), DataError, "positive"),
        (dict(temperature_K=298.15, pH=7.0, k_per_s=-1e-6), DataError, "positive"),
        (dict(temperature_K=298.15, pH=15.0, k_per_s=1e-6), InputError, "pH"),
        (dict(temperature_K=25.0, pH=7.0, k_per_s=1e-6), InputError, "looks like °C"),
        (dict(temperature_K=400.0, pH=7.0, k_per_s=1e-6), InputError, "liquid"),
        (dict(temperature_K=float("nan"), pH=7.0, k_per_s=1e-6), InputError, "finite"),
        (dict(temperature_K=298.15, pH=7.0, k_per_s=1e-6, se_ln_k=0.0), InputError, "se_ln_k"),
        (dict(temperature_K=298.15, pH=7.0, k_per_s=1e-6, se_dof=3), InputError, "without se_ln_k"),
        (dict(temperature_K=298.15, pH=7.0, k_per_s="fast"), InputError, "number"),
        (dict(temperature_K=298.15, pH=7.0, k_per_s=1e-6, ionic_strength_M=-0.1), InputError,
         "ionic"),
    ],
)
def test_bad_measurements_raise_clear_errors(kwargs, error, match):
    with pytest.raises(error, match=match):
        RateMeasurement(**kwargs)


def test_bad_fit_requests_raise_clear_errors():
    runs = standard_runs(VELTRAZINE)
    with pytest.raises(InputError, match="arrhenius, eyring"):
        fit_surface(runs, temperature_model="vant-hoff")
    with pytest.raises(InputError, match="unknown pathway 'photolysis'"):
        fit_surface(runs, pathways=("neutral", "photolysis"))
    with pytest.raises(InputError, match="'auto'"):
        fit_surface(runs, pathways="everything")
    with pytest.raises(InputError, match="sd"):
        fit_surface(runs, ea_prior_J_per_mol=(65e3, 0.0))
    with pytest.raises(InputError, match="kJ/mol given by mistake"):
        fit_surface(runs, ea_prior_J_per_mol=(65.4, 15.0))
    with pytest.raises(DataError, match="at least 2 runs"):
        fit_surface(runs[:1])
    with pytest.raises(DataError, match="too few for any rate surface"):
        fit_surface([runs[1], runs[4]])  # pH 7 at two temperatures: Ea and k, no scatter left
    few = runs[:5]  # three pH levels, five runs, six parameters
    with pytest.raises(DataError, match="runs are needed"):
        fit_surface(few, pathways=PATHWAYS)
    with pytest.raises(IdentifiabilityError, match="cannot be told apart"):
        fit_surface([r for r in runs if r.pH == 7.0], pathways=("acid", "base"))
    with pytest.raises(IdentifiabilityError, match="3 or more pH levels"):
        fit_surface([r for r in runs if r.pH != 7.0], pathways=PATHWAYS)
    with pytest.raises(InputError, match="RateMeasurement"):
        fit_surface([(298.15, 7.0, 1e-6)])
    with pytest.raises(InputError, match="level"):
        fit_surface(runs, pathways=PATHWAYS).interval(95)


def test_exported_lazily_from_package():
    assert kinetics.fit_surface is fit_surface
    assert kinetics.SurfaceFit is SurfaceFit
    assert kinetics.PATHWAYS == ("acid", "neutral", "base")
