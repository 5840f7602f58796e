"""Tests of kinetics.series: SFO, FOMC, DFOP and HS fits of one series.

Model equations, DT50/DT90 and the chi-square error level follow FOCUS (2006)
Guidance document on estimating persistence and degradation kinetics from
environmental fate studies on pesticides in EU registration, Sanco/10058/2005
v2.0 (cited as "FOCUS 2006" below). All series here are invented test data.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import stats
from scipy.special import expit

import kinetics
from kinetics import series
from kinetics._series_models import MODELS
from kinetics.errors import (
    ConvergenceError,
    DataError,
    IdentifiabilityError,
    InputError,
    UnitError,
)
from kinetics.series import SERIES_MODELS, fit_series, fit_sfo_batch

DATA = Path(__file__).parent / "data"
DAY = 86400.0

# Invented sampling design (days) used throughout.
T_DAYS = np.array([0.0, 1.0, 3.0, 7.0, 14.0, 21.0, 28.0, 42.0, 56.0, 70.0])

# Invented "true" parameters: (C0, then the model's parameters in per-day / day units).
TRUTH = {
    "SFO": (100.0, 0.05),
    "FOMC": (100.0, 1.5, 10.0),
    "DFOP": (100.0, 0.3, 0.02, 0.6),
    "HS": (100.0, 0.12, 0.03, 12.0),
}


def _natural_per_s(model: str, p: tuple[float, ...]) -> np.ndarray:
    """Truth in the fit's units (rates 1/s, times s)."""
    if model == "SFO":
        return np.array([p[0], p[1] / DAY])
    if model == "FOMC":
        return np.array([p[0], p[1], p[2] * DAY])
    if model == "DFOP":
        return np.array([p[0], p[1] / DAY, p[2] / DAY, p[3]])
    return np.array([p[0], p[1] / DAY, p[2] / DAY, p[3] * DAY])


def _curve(model: str, p: tuple[float, ...], t_days: np.ndarray) -> np.ndarray:
    t = np.asarray(t_days, dtype=float)
    if model == "SFO":
        return p[0] * np.exp(-p[1] * t)
    if model == "FOMC":
        return p[0] / (t / p[2] + 1.0) ** p[1]
    if model == "DFOP":
        return p[0] * (p[3] * np.exp(-p[1] * t) + (1 - p[3]) * np.exp(-p[2] * t))
    k1, k2, tb = p[1], p[2], p[3]
    return np.where(t <= tb, p[0] * np.exp(-k1 * t),
                    p[0] * np.exp(-k1 * tb) * np.exp(-k2 * (t - tb)))


def _noisy_sfo(seed: int = 3, sd: float = 1.5) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return _curve("SFO", TRUTH["SFO"], T_DAYS) + rng.normal(0.0, sd, T_DAYS.size)


# ------------------------------------------------------------------ NIST
def _read_nist(name: str) -> dict:
    info: dict = {"x": [], "y": []}
    in_data = False
    for line in (DATA / name).read_text().splitlines():
        line = line.strip()
        if not line or line.startswith("#"):
            continue
        if line == "data":
            in_data = True
            continue
        if in_data:
            y, x = (float(v) for v in line.split())
            info["x"].append(x)
            info["y"].append(y)
        else:
            key, value = (s.strip() for s in line.split("="))
            info[key] = [float(v) for v in value.split()]
    return info


NIST_CASES = [(name, start) for name in ("nist_strd_boxbod.txt", "nist_strd_misra1a.txt")
              for start in ("start1", "start2")]


@pytest.mark.parametrize("name,start", NIST_CASES)
def test_nist_strd_exponential_certified_values(name, start):
    # NIST StRD nonlinear regression datasets BoxBOD and Misra1a,
    # https://www.itl.nist.gov/div898/strd/ : certified parameters (>= 6
    # significant digits required) and certified standard deviations (>= 3),
    # from both NIST starting points.
    d = _read_nist(name)
    res = series._fit_exponential_rise(d["x"], d["y"], d[start])
    cert = np.array([d["b1"][0], d["b2"][0]])
    cert_sd = np.array([d["b1"][1], d["b2"][1]])
    assert_allclose(res.estimates, cert, rtol=1e-6, atol=0)
    assert_allclose(res.standard_errors, cert_sd, rtol=1e-3, atol=0)
    assert_allclose(res.rss, d["residual_sum_of_squares"][0], rtol=1e-8, atol=0)
    assert res.dof == d["degrees_of_freedom"][0]
    assert_allclose(math.sqrt(res.sigma2), d["residual_standard_deviation"][0], rtol=1e-8)


# --------------------------------------------------- independent fitters
def _lmfit_sfo(lmfit, t, c, weights):
    """SFO fitted by lmfit.minimize (MINPACK leastsq) with an analytic Jacobian.

    lmfit documentation ("Performing Fits and Analyzing Outputs"): with
    ``scale_covar`` (the default) the standard errors are those of the
    covariance scaled by the reduced chi-square.
    """
    params = lmfit.Parameters()
    params.add("c0", value=90.0)
    params.add("k", value=0.04)

    def residual(p):
        return (c - p["c0"].value * np.exp(-p["k"].value * t)) * weights

    def jacobian(p):
        e = np.exp(-p["k"].value * t)
        return np.column_stack((-e, p["c0"].value * t * e)) * weights[:, None]

    return lmfit.minimize(residual, params, method="leastsq", Dfun=jacobian,
                          xtol=1e-15, ftol=1e-15, gtol=1e-15)


def test_sfo_nls_matches_lmfit():
    lmfit = pytest.importorskip("lmfit")
    c = _noisy_sfo()
    fit = fit_series(T_DAYS, c, time_unit="d")
    # Independent reference: lmfit (Levenberg-Marquardt on the natural
    # parameters C0 and k [1/d]).
    ref = _lmfit_sfo(lmfit, T_DAYS, c, np.ones(T_DAYS.size))
    ours = np.array([fit.estimates[0], fit.k_per_s * DAY])
    ours_se = np.array([fit.standard_errors[0], fit.standard_errors[1] * DAY])
    assert_allclose(ours, [ref.params["c0"].value, ref.params["k"].value], rtol=1e-6)
    assert_allclose(ours_se, [ref.params["c0"].stderr, ref.params["k"].stderr], rtol=1e-6)
    assert_allclose(fit.rss, ref.chisqr, rtol=1e-9)
    # lmfit documents aic = N ln(chisqr / N) + 2 N_varys; ours is the full
    # Gaussian AIC counting sigma: the difference is N (ln 2 pi + 1) + 2.
    n = T_DAYS.size
    assert_allclose(fit.aic, ref.aic + n * (math.log(2 * math.pi) + 1) + 2, rtol=1e-9)


def test_sfo_proportional_matches_lmfit_at_fixed_weights():
    lmfit = pytest.importorskip("lmfit")
    rng = np.random.default_rng(11)
    c = _curve("SFO", TRUTH["SFO"], T_DAYS) * (1 + rng.normal(0, 0.06, T_DAYS.size))
    fit = fit_series(T_DAYS, c, time_unit="d", error_model="proportional")
    # At the reweighting fixed point the estimate minimises sum(((y - f) / f_hat)^2)
    # with f_hat fixed: lmfit with weights 1/f_hat must land on the same point
    # with the same (reduced chi-square scaled) standard errors.
    ref = _lmfit_sfo(lmfit, T_DAYS, c, 1.0 / fit.fitted)
    assert_allclose([fit.estimates[0], fit.k_per_s * DAY],
                    [ref.params["c0"].value, ref.params["k"].value], rtol=1e-6)
    assert_allclose([fit.standard_errors[0], fit.standard_errors[1] * DAY],
                    [ref.params["c0"].stderr, ref.params["k"].stderr], rtol=1e-6)


def test_sfo_loglinear_matches_statsmodels_ols():
    sm = pytest.importorskip("statsmodels.api")
    c = np.abs(_noisy_sfo(seed=5, sd=1.0))
    fit = fit_series(T_DAYS, c, method="loglinear")
    # Independent reference: statsmodels OLS of ln C on t (statsmodels
    # documentation, regression.linear_model.OLS / RegressionResults).
    ref = sm.OLS(np.log(c), sm.add_constant(T_DAYS)).fit()
    assert_allclose(fit.k_per_s * DAY, -ref.params[1], rtol=1e-6)
    assert_allclose(fit.estimates[0], math.exp(ref.params[0]), rtol=1e-6)
    assert_allclose(fit.standard_errors[1] * DAY, ref.bse[1], rtol=1e-6)
    assert_allclose(fit.standard_errors[0], fit.estimates[0] * ref.bse[0], rtol=1e-6)
    assert_allclose(fit.rss, ref.ssr, rtol=1e-9)
    # one-sided test of k > 0 is half the two-sided p-value of the slope
    assert_allclose(fit.p_rate_positive["k_per_s"], ref.pvalues[1] / 2, rtol=1e-6)
    lo, hi = ref.conf_int(alpha=0.05)[1]
    iv = fit.interval(0.95)
    assert_allclose([iv.low[1] * DAY, iv.high[1] * DAY], [-hi, -lo], rtol=1e-6)
    lo0, hi0 = ref.conf_int(alpha=0.05)[0]
    assert_allclose([iv.low[0], iv.high[0]], np.exp([lo0, hi0]), rtol=1e-6)
    # statsmodels: aic = -2 llf + 2 (number of regression coefficients); ours
    # counts sigma too and is expressed for C (Jacobian of ln: + 2 sum ln C).
    assert_allclose(fit.aic, ref.aic + 2 + 2 * np.sum(np.log(c)), rtol=1e-9)


# ------------------------------------------------------- closed forms
def test_sfo_dt50_dt90_closed_forms():
    fit = fit_series(T_DAYS, _noisy_sfo())
    # FOCUS 2006: SFO DT50 = ln 2 / k, DT90 = ln 10 / k
    assert_allclose(fit.dt50_s, math.log(2) / fit.k_per_s, rtol=1e-14)
    assert_allclose(fit.dt90_s, math.log(10) / fit.k_per_s, rtol=1e-14)
    assert_allclose(fit.se_ln_dt90, fit.se_ln_k, rtol=1e-14)


def test_fomc_dt50_dt90_closed_forms():
    rng = np.random.default_rng(2)
    c = _curve("FOMC", TRUTH["FOMC"], T_DAYS) + rng.normal(0, 1.0, T_DAYS.size)
    fit = fit_series(T_DAYS, c, model="FOMC")
    _, alpha, beta = fit.estimates
    # FOCUS 2006: FOMC DT50 = beta (2^(1/alpha) - 1), DT90 = beta (10^(1/alpha) - 1)
    assert_allclose(fit.dt50_s, beta * (2 ** (1 / alpha) - 1), rtol=1e-12)
    assert_allclose(fit.dt90_s, beta * (10 ** (1 / alpha) - 1), rtol=1e-12)
    assert_allclose(fit.k_per_s, math.log(2) / fit.dt50_s, rtol=1e-14)


def test_dfop_dt50_is_root_of_remaining_fraction():
    rng = np.random.default_rng(4)
    c = _curve("DFOP", TRUTH["DFOP"], T_DAYS) + rng.normal(0, 0.8, T_DAYS.size)
    fit = fit_series(T_DAYS, c, model="DFOP")
    _, k1, k2, g = fit.estimates
    assert k1 >= k2
    for dt, x in ((fit.dt50_s, 0.5), (fit.dt90_s, 0.9)):
        # FOCUS 2006: DFOP has no closed form; DTx solves g e^-k1 t + (1-g) e^-k2 t = 1 - x
        remaining = g * math.exp(-k1 * dt) + (1 - g) * math.exp(-k2 * dt)
        assert_allclose(remaining, 1 - x, rtol=1e-12)


@pytest.mark.parametrize("tb_days,expect_first_phase", [(30.0, True), (4.0, False)])
def test_hs_dt50_piecewise(tb_days, expect_first_phase):
    p = (100.0, 0.06, 0.02, tb_days)
    t = np.array([0.0, 2, 4, 6, 9, 14, 21, 28, 42, 56, 70, 90])
    fit = fit_series(t, _curve("HS", p, t), model="HS")
    _, k1, k2, tb = fit.estimates
    # FOCUS 2006: HS DTx = ln(1/(1-x))/k1 if <= tb, else tb + (ln(1/(1-x)) - k1 tb)/k2
    for dt, lost in ((fit.dt50_s, math.log(2)), (fit.dt90_s, math.log(10))):
        expected = lost / k1 if lost / k1 <= tb else tb + (lost - k1 * tb) / k2
        assert_allclose(dt, expected, rtol=1e-12)
    assert (math.log(2) / k1 <= tb) == expect_first_phase


# ------------------------------------------------------------ recovery
@pytest.mark.parametrize("error_model", ["constant", "proportional"])
@pytest.mark.parametrize("model", SERIES_MODELS)
def test_recovers_parameters_from_noiseless_data(model, error_model):
    c = _curve(model, TRUTH[model], T_DAYS)
    fit = fit_series(T_DAYS, c, model=model, error_model=error_model)
    assert fit.parameter_names == MODELS[model].parameter_names
    assert_allclose(fit.estimates, _natural_per_s(model, TRUTH[model]), rtol=1e-6)
    assert_allclose(fit.fitted, c, rtol=1e-8, atol=1e-8)


@pytest.mark.parametrize("error_model", ["constant", "proportional"])
@pytest.mark.parametrize("model", SERIES_MODELS)
def test_recovers_parameters_from_noisy_replicated_data(model, error_model):
    rng = np.random.default_rng(20 + SERIES_MODELS.index(model))
    t = np.repeat(T_DAYS, 2)
    truth_c = _curve(model, TRUTH[model], t)
    if error_model == "constant":
        c = truth_c + rng.normal(0, 1.0, t.size)
    else:
        c = truth_c * (1 + rng.normal(0, 0.04, t.size))
    fit = fit_series(t, c, model=model, error_model=error_model)
    truth = _natural_per_s(model, TRUTH[model])
    z = np.abs(fit.estimates - truth) / fit.standard_errors
    assert np.all(z < 4.0), (fit.parameter_names, z)
    iv = fit.interval(0.999)
    assert np.all((iv.low <= truth) & (truth <= iv.high))
    for value in (fit.k_per_s, fit.se_ln_k, fit.dt50_s, fit.dt90_s, fit.aic,
                  fit.chi2_error_level_percent, *fit.p_rate_positive.values()):
        assert math.isfinite(value)
    assert fit.dof == t.size - len(truth)
    assert fit.chi2_dof == T_DAYS.size - len(truth)
    assert all(p < 0.01 for p in fit.p_rate_positive.values())


# --------------------------------------------------------- statistics
def test_chi2_error_level_definition_on_replicate_means():
    rng = np.random.default_rng(8)
    t = np.repeat(T_DAYS, 3)
    c = np.abs(_curve("SFO", TRUTH["SFO"], t) + rng.normal(0, 2.0, t.size))
    fit = fit_series(t, c)
    obs = c.reshape(-1, 3).mean(axis=1)
    calc = fit.fitted.reshape(-1, 3).mean(axis=1)
    err = fit.chi2_error_level_percent / 100
    # FOCUS 2006 chi-square test: at the reported error level the statistic
    # equals the 95 % chi-square quantile with (sampling times - parameters) dof.
    chi2 = np.sum((calc - obs) ** 2 / (err * obs.mean()) ** 2)
    # chi-square 0.95 quantile with 8 dof = 15.507 (standard chi-square table, from memory)
    assert fit.chi2_dof == 8
    assert_allclose(chi2, 15.507, rtol=1e-4)
    assert_allclose(chi2, stats.chi2.ppf(0.95, 8), rtol=1e-12)


def test_interval_uses_student_t_on_log_scale():
    fit = fit_series(T_DAYS, _noisy_sfo())
    iv = fit.interval(0.95)
    # t quantile 0.975 with 8 dof = 2.306 (standard t table, from memory)
    q = math.log(iv.k_high_per_s / fit.k_per_s) / fit.se_ln_k
    assert_allclose(q, 2.306, rtol=2e-4)
    assert_allclose(iv.k_low_per_s * iv.k_high_per_s, fit.k_per_s ** 2, rtol=1e-12)
    assert_allclose(iv.dt50_low_s, math.log(2) / iv.k_high_per_s, rtol=1e-12)
    assert iv.low[0] < fit.estimates[0] < iv.high[0]
    assert set(iv.as_dict()) == {"C0", "k_per_s", "dt50_s", "dt90_s"}
    with pytest.raises(InputError, match="1.5"):
        fit.interval(1.5)


def test_aicc_and_parameter_count_convention():
    fit = fit_series(T_DAYS, _noisy_sfo())
    n, k = fit.n_points, 3  # C0, k and sigma
    sigma2_ml = fit.rss / n
    log_l = -0.5 * n * (math.log(2 * math.pi * sigma2_ml) + 1)
    # AICc = AIC + 2K(K+1)/(n-K-1): Burnham and Anderson (2002), Model selection
    # and multimodel inference, 2nd ed.
    assert_allclose(fit.aic, 2 * k - 2 * log_l, rtol=1e-12)
    assert_allclose(fit.aicc, fit.aic + 2 * k * (k + 1) / (n - k - 1), rtol=1e-12)
    small = fit_series([0, 1, 2, 4], [10, 8.1, 6.6, 4.4])
    assert small.aicc is None  # n = 4, K = 3: the correction is undefined


def test_rate_t_test_is_one_sided_student_t():
    fit = fit_series(T_DAYS, np.abs(_noisy_sfo(sd=15.0)))
    tval = fit.estimates[1] / fit.standard_errors[1]
    # FOCUS 2006: one-sided t-test of k > 0 with n - p degrees of freedom
    assert_allclose(fit.p_rate_positive["k_per_s"], stats.t.sf(tval, fit.dof), rtol=1e-12)
    assert 0 < fit.p_rate_positive["k_per_s"] < 0.5


def test_dfop_reports_fast_phase_first_and_rate_tests():
    rng = np.random.default_rng(9)
    c = _curve("DFOP", TRUTH["DFOP"], T_DAYS) + rng.normal(0, 0.5, T_DAYS.size)
    fit = fit_series(T_DAYS, c, model="DFOP")
    assert set(fit.p_rate_positive) == {"k1_per_s", "k2_per_s"}
    assert fit.estimates[1] > fit.estimates[2]
    assert_allclose(fit.estimates[3], TRUTH["DFOP"][3], atol=0.05)


# ------------------------------------------------------ input handling
def test_unsorted_times_and_units_give_same_fit():
    c = _noisy_sfo()
    order = np.random.default_rng(1).permutation(T_DAYS.size)
    a = fit_series(T_DAYS, c)
    b = fit_series(T_DAYS[order], c[order])
    h = fit_series(T_DAYS * 24, c, time_unit="h")
    m = fit_series(T_DAYS * 1440, c, time_unit="min")
    s = fit_series(T_DAYS * DAY, c, time_unit="s")
    for other in (b, h, m, s):
        assert_allclose(other.estimates, a.estimates, rtol=1e-10)
        assert_allclose(other.standard_errors, a.standard_errors, rtol=1e-8)
    assert np.all(np.diff(b.time_s) >= 0)


def test_fit_is_scale_free_in_concentration():
    c = _noisy_sfo()
    a = fit_series(T_DAYS, c)
    micro = fit_series(T_DAYS, c * 1e-6)
    percent = fit_series(T_DAYS, 100 * c / c[0])
    assert_allclose(micro.estimates, a.estimates * [1e-6, 1], rtol=1e-9)
    assert_allclose(micro.standard_errors, a.standard_errors * [1e-6, 1], rtol=1e-8)
    assert_allclose(percent.k_per_s, a.k_per_s, rtol=1e-10)
    assert_allclose(micro.chi2_error_level_percent, a.chi2_error_level_percent, rtol=1e-9)


def test_loq_rule_isolated_and_trailing_points():
    t = np.array([0, 1, 3, 7, 14, 21, 28, 42])
    c = np.array([10.0, 8.0, np.nan, 5.0, 2.6, np.nan, np.nan, np.nan])
    flags = np.array([False, False, True, False, False, True, True, True])
    fit = fit_series(t, c, loq=0.5, below_loq=flags)
    # LOQ rule documented in fit_series (common practice, no source):
    # isolated below-LOQ point (day 3) and first trailing one (day 21) at LOQ/2;
    # later trailing points (days 28, 42) dropped
    assert_allclose(fit.time_s / DAY, [0, 1, 3, 7, 14, 21])
    assert_allclose(fit.concentration, [10, 8, 0.25, 5, 2.6, 0.25])
    assert (fit.n_below_loq_set, fit.n_below_loq_dropped) == (2, 2)


def test_loq_without_flags_flags_values_below_it():
    t = [0, 1, 3, 7, 14, 21, 28]
    c = [10.0, 8.0, 6.1, 3.0, 0.9, 0.2, 0.1]
    fit = fit_series(t, c, loq=0.3)
    assert_allclose(fit.concentration, [10, 8, 6.1, 3.0, 0.9, 0.15])
    assert fit.n_below_loq_dropped == 1


def test_loq_replicate_with_one_quantified_value_is_not_trailing():
    t = [0, 0, 7, 7, 14, 14, 28, 28]
    c = [10, 10.2, 5.1, 4.9, 2.4, np.nan, np.nan, np.nan]
    flags = [False, False, False, False, False, True, True, True]
    fit = fit_series(t, c, loq=1.0, below_loq=flags)
    assert_allclose(fit.concentration, [10, 10.2, 5.1, 4.9, 2.4, 0.5, 0.5, 0.5])
    assert fit.n_below_loq_dropped == 0


def test_lazy_export_and_result_is_frozen():
    fit = kinetics.fit_series(T_DAYS, _noisy_sfo())
    with pytest.raises(AttributeError):
        fit.k_per_s = 1.0  # type: ignore[misc]
    with pytest.raises(ValueError):
        fit.estimates[0] = 1.0
    d = fit.to_dict()
    assert d["parameters"]["k_per_s"] == fit.k_per_s
    assert_allclose(fit.fitted_at(fit.time_s), fit.fitted, rtol=1e-14)


# ------------------------------------------------------------- errors
GOOD_T = [0, 1, 3, 7, 14]
GOOD_C = [10.0, 8.0, 6.0, 3.5, 1.4]

DATA_ERRORS = [
    ({"time": [0, 1, 2], "concentration": [5, 4]}, "time has 3 values but concentration has 2"),
    ({"time": [], "concentration": []}, "empty"),
    ({"time": [0, 1, np.nan, 4], "concentration": [5, 4, 3, 2]}, "time[2] = nan"),
    ({"time": [0, -1, 2, 4], "concentration": [5, 4, 3, 2]}, "time[1] = -1 d is negative"),
    ({"time": [0, 1, 2, 4], "concentration": [5, np.inf, 3, 2]}, "concentration[1] = inf"),
    ({"time": [0, 1, 2, 4], "concentration": [5, 4, -0.3, 2]}, "concentration[2] = -0.3"),
    ({"time": [3, 3, 3], "concentration": [5, 4, 3]}, "one time (3 d)"),
    ({"time": [0, 0, 5, 5], "concentration": [5, 5.1, 3, 3.1]},
     "needs samples at 3 or more different times; this series has 2 (0, 5 d)"),
    ({"time": GOOD_T, "concentration": [4, 4, 4, 4, 4]}, "all concentrations equal 4"),
    ({"time": GOOD_T, "concentration": [0, 0, 0, 0, 0]}, "all concentrations are 0"),
    ({"time": GOOD_T, "concentration": [3, 3.5, 4, 4.4, 5]}, "do not decline"),
    ({"time": GOOD_T, "concentration": [10, 0, 0, 0, 0]}, "above 0 at only one sampling time"),
    ({"time": GOOD_T, "concentration": GOOD_C, "below_loq": [False] * 4 + [True]},
     "no loq value was given"),
    ({"time": GOOD_T, "concentration": GOOD_C, "below_loq": [False] * 3},
     "below_loq has 3 values"),
    ({"time": GOOD_T, "concentration": GOOD_C, "loq": -2}, "loq = -2"),
    ({"time": GOOD_T, "concentration": [10, 8, 0, 3.5, 1.4], "method": "loglinear"},
     "is 0"),
    ({"time": GOOD_T, "concentration": GOOD_C, "loq": "low"}, "got 'low'"),
    ({"time": GOOD_T, "concentration": GOOD_C, "below_loq": [0, 0, 0, 0, 1]}, "True/False"),
    ({"time": [[0, 1], [2, 3]], "concentration": [1, 2, 3, 4]}, "one-dimensional"),
    ({"time": ["a", "b", "c"], "concentration": [1, 2, 3]}, "sequence of numbers"),
]


@pytest.mark.parametrize("kwargs,message", DATA_ERRORS)
def test_data_errors_name_the_bad_value(kwargs, message):
    kwargs = dict(kwargs)
    t, c = kwargs.pop("time"), kwargs.pop("concentration")
    with pytest.raises(DataError) as info:
        fit_series(t, c, **kwargs)
    assert message in str(info.value)


def test_too_few_times_for_model():
    with pytest.raises(DataError, match="model DFOP has 4 parameters and needs samples at 5"):
        fit_series([0, 1, 3, 7], [10, 8, 6, 3.5], model="DFOP")


@pytest.mark.parametrize("kwargs,listed", [
    ({"model": "SOF"}, "SFO, FOMC, DFOP, HS"),
    ({"method": "ols"}, "nls, loglinear"),
    ({"error_model": "relative"}, "constant, proportional"),
])
def test_unknown_choices_list_valid_ones(kwargs, listed):
    with pytest.raises(InputError, match=listed):
        fit_series(GOOD_T, GOOD_C, **kwargs)


def test_invalid_combinations_and_units():
    with pytest.raises(InputError, match="only defined for model 'SFO'"):
        fit_series(GOOD_T, GOOD_C, model="FOMC", method="loglinear")
    with pytest.raises(InputError, match="error_model='constant'"):
        fit_series(GOOD_T, GOOD_C, method="loglinear", error_model="proportional")
    with pytest.raises(UnitError, match="fortnight"):
        fit_series(GOOD_T, GOOD_C, time_unit="fortnight")


@pytest.mark.parametrize("model", ["FOMC", "DFOP", "HS"])
def test_multi_phase_model_on_exact_single_phase_data_is_not_identifiable(model):
    with pytest.raises(IdentifiabilityError, match=model):
        fit_series(T_DAYS, _curve("SFO", TRUTH["SFO"], T_DAYS), model=model)


# Invented series whose values stop at a noise floor near 0.3 after day 14.
FLOOR_T = [0, 1, 3, 7, 14, 21, 28, 42, 56, 70, 90, 120]
FLOOR_C = [94.178, 66.071, 29.567, 6.23, 0.227, 0.294, 0.243, 0.357, 0.277, 0.032, 0.295,
           0.205]


def test_proportional_fit_dominated_by_noise_floor_raises_clear_error():
    with pytest.raises(ConvergenceError, match="flat line .*error_model='constant'"):
        fit_series(FLOOR_T, FLOOR_C, error_model="proportional")
    with pytest.raises(ConvergenceError, match=r"series\[1\]: SFO: the fit ran to a flat line"):
        fit_sfo_batch([(T_DAYS, _curve("SFO", TRUTH["SFO"], T_DAYS)), (FLOOR_T, FLOOR_C)],
                      error_model="proportional")
    # the constant-variance fit of the same data is well defined
    fit = fit_series(FLOOR_T, FLOOR_C)
    assert_allclose(fit.k_per_s * DAY, 0.38, rtol=0.05)


def test_dfop_with_fast_phase_over_before_second_sample_is_refused():
    # invented: a 30 % drop within minutes, then a slow first-order decline
    t = np.array([0, 2, 4, 7, 14, 21, 28, 42])
    c = np.r_[100.0, 70 * np.exp(-0.03 * t[1:])]
    with pytest.raises(IdentifiabilityError, match="fast phase is over before the second"):
        fit_series(t, c, model="DFOP")


def test_exponential_rise_bad_start():
    with pytest.raises(InputError, match="-1"):
        series._fit_exponential_rise([1, 2, 3], [1, 2, 2.5], (3, -1))


def test_errors_are_kinetics_errors():
    assert issubclass(ConvergenceError, kinetics.KineticsError)
    assert issubclass(DataError, ValueError)


# -------------------------------------------------------------- batch
def _batch_inputs(seed: int = 0, n: int = 25):
    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        t = T_DAYS[: 6 + i % 5]
        if i % 3 == 0:
            t = np.repeat(t, 2)  # replicates
        k = rng.uniform(0.01, 0.3)
        c = 50 * np.exp(-k * t) * (1 + rng.normal(0, 0.05, t.size))
        if i % 4 == 0:
            perm = rng.permutation(t.size)  # unsorted
            t, c = t[perm], c[perm]
        out.append((t, c))
    return out


@pytest.mark.parametrize("error_model", ["constant", "proportional"])
def test_batch_agrees_with_fit_series(error_model):
    inputs = _batch_inputs()
    batch = fit_sfo_batch(inputs, error_model=error_model)
    assert len(batch) == len(inputs)
    for (t, c), b in zip(inputs, batch):
        s = fit_series(t, c, model="SFO", error_model=error_model)
        assert_allclose(b.estimates, s.estimates, rtol=1e-8)
        assert_allclose(b.standard_errors, s.standard_errors, rtol=1e-8)
        assert_allclose(b.covariance, s.covariance, rtol=1e-8)
        for name in ("k_per_s", "se_ln_k", "dt50_s", "dt90_s", "rss", "aic",
                     "chi2_error_level_percent", "residual_scale"):
            assert_allclose(getattr(b, name), getattr(s, name), rtol=1e-8, err_msg=name)
        assert_allclose(b.p_rate_positive["k_per_s"], s.p_rate_positive["k_per_s"], rtol=1e-6)
        assert (b.aicc is None) == (s.aicc is None)
        if b.aicc is not None:
            assert_allclose(b.aicc, s.aicc, rtol=1e-8)
        assert (b.dof, b.chi2_dof, b.n_points) == (s.dof, s.chi2_dof, s.n_points)
        assert_allclose(b.fitted, s.fitted, rtol=1e-8)
        assert_allclose(b.interval(0.9).low, s.interval(0.9).low, rtol=1e-8)


def test_batch_results_are_read_only_and_do_not_alias_inputs():
    t, c = T_DAYS.copy(), _noisy_sfo()
    fit = fit_sfo_batch([(t, c)])[0]
    c[0] = -1.0  # the caller's array stays writable and independent
    assert fit.concentration[0] != -1.0
    for arr in (fit.estimates, fit.covariance, fit.fitted, fit.residuals, fit.concentration,
                fit.time_s):
        with pytest.raises(ValueError):
            arr[0] = 0.0


def test_batch_error_names_the_series():
    inputs = _batch_inputs(n=3)
    inputs[1] = ([0, 1, 2], [5, 5, 5])
    with pytest.raises(DataError, match=r"series\[1\]: all concentrations equal 5"):
        fit_sfo_batch(inputs)
    assert fit_sfo_batch([]) == []
    with pytest.raises(InputError, match="constant, proportional"):
        fit_sfo_batch(inputs, error_model="poisson")


@pytest.mark.parametrize("kwargs,message", [(k, m) for k, m in DATA_ERRORS if len(k) == 2])
def test_batch_data_errors_match_fit_series(kwargs, message):
    good = (T_DAYS, _noisy_sfo())
    with pytest.raises(DataError) as info:
        fit_sfo_batch([good, (kwargs["time"], kwargs["concentration"])])
    assert str(info.value).startswith("series[1]: ")
    assert message in str(info.value)


def test_batch_preparation_equals_single_series_preparation():
    inputs = _batch_inputs(n=12) + [([0, 0, 1, 2, 2], [10, 9, 7, 5, 0.0])]
    fast = series._prepare_batch(inputs, "d", DAY)
    for (t, c), p in zip(inputs, fast):
        q = series._prepare(t, c, "d", 2, "SFO")
        assert_allclose(p.t_s, q.t_s, rtol=0, atol=0)
        assert_allclose(p.y, q.y, rtol=0, atol=0)
        assert np.array_equal(p.group, q.group) and p.n_times == q.n_times


def test_batch_handles_time_units():
    inputs = _batch_inputs(n=4)
    in_hours = [(t * 24, c) for t, c in inputs]
    for a, b in zip(fit_sfo_batch(inputs), fit_sfo_batch(in_hours, time_unit="h")):
        assert_allclose(a.k_per_s, b.k_per_s, rtol=1e-10)


# Regression inputs found by the property tests (fit_sfo_batch once emitted a
# RuntimeWarning on them instead of a fit or a clear error).
HUGE_TIME_SERIES = ([0.0, 0.0, 2.0806633505350878e+303], [0.0, 0.0, 0.0])
TINY_LATE_VALUES = [
    ([0.0625, 0.125, 5.0, 5.0, 5.0, 5.0, 55.0],
     [0.772184789761521, 0.7788007830714049, 4.5399929762484854e-05, 4.5399929762484854e-05,
      4.5399929762484854e-05, 4.5399929762484854e-05, 1.6889118802245324e-48]),
    ([0.0625, 0.125, 4.0, 5.0, 5.0, 5.0, 29.0],
     [0.772184789761521, 0.7788007830714049, 0.00033546262790251185, 4.5399929762484854e-05,
      4.5399929762484854e-05, 4.5399929762484854e-05, 6.47023492564546e-26]),
]


@pytest.mark.parametrize("error_model", ["constant", "proportional"])
def test_batch_series_with_overflowing_times_is_refused_by_name(error_model):
    # times whose conversion to seconds overflows belong to a series that is refused
    with pytest.raises(DataError, match=r"^series\[0\]: ") as single:
        fit_sfo_batch([([0.0, 0.0], [1.0, 1.0]), HUGE_TIME_SERIES], error_model=error_model)
    assert "one time" in str(single.value)
    with pytest.raises(DataError, match=r"^series\[1\]: model SFO .* 3 or more different times"):
        fit_sfo_batch([(T_DAYS, _noisy_sfo()), HUGE_TIME_SERIES], error_model=error_model)


@pytest.mark.parametrize("error_model", ["constant", "proportional"])
@pytest.mark.parametrize("case", range(len(TINY_LATE_VALUES)))
def test_batch_with_tiny_late_values_agrees_with_fit_series(case, error_model):
    # with relative-error weights the vectorised iteration ran off to an unbounded
    # rate on these series; they are refitted alone and must give fit_series' numbers
    t, c = TINY_LATE_VALUES[case]
    s = fit_series(t, c, model="SFO", error_model=error_model)
    batch = fit_sfo_batch([(T_DAYS, _noisy_sfo()), (t, c)], error_model=error_model)
    b = batch[1]
    assert math.isfinite(b.k_per_s) and math.isfinite(b.se_ln_k)
    assert_allclose(b.estimates, s.estimates, rtol=1e-6)
    assert_allclose(b.se_ln_k, s.se_ln_k, rtol=1e-6)
    assert_allclose(b.dt50_s, s.dt50_s, rtol=1e-6)
    alone = fit_series(T_DAYS, _noisy_sfo(), model="SFO", error_model=error_model)
    assert_allclose(batch[0].estimates, alone.estimates, rtol=1e-8)


def test_dfop_g_is_logistic_of_fitted_logit():
    rng = np.random.default_rng(4)
    c = _curve("DFOP", TRUTH["DFOP"], T_DAYS) + rng.normal(0, 0.8, T_DAYS.size)
    fit = fit_series(T_DAYS, c, model="DFOP")
    g = fit.estimates[3]
    # delta method: se(g) = g (1 - g) se(logit g)
    se_logit = math.sqrt(fit._theta_covariance[3, 3])
    assert_allclose(fit.standard_errors[3], g * (1 - g) * se_logit, rtol=1e-12)
    assert_allclose(expit(fit._theta[3]), g, rtol=1e-14)
