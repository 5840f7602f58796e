"""Tests of kinetics.scenarios: time-varying conditions and fraction remaining."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, optimize, stats

from kinetics.caution import CAUTION_TEXT
from kinetics.errors import InputError
from kinetics.scenarios import (
    DAY_S,
    YEAR_S,
    AnnualCycle,
    Constant,
    DailyCycle,
    MonthlyMeans,
    RateModel,
    Scenario,
    Series,
    run_scenario,
    scenario_from_dict,
    scenario_to_dict,
)

R = 8.314462618  # J/(mol K), CODATA 2018 exact value of the molar gas constant
T_REF = 298.15


class NeutralArrhenius:
    """A one-pathway Arrhenius rate model satisfying the RateModel protocol.

    Parameters: [ln k_ref (k in 1/s at 298.15 K), Ea (J/mol)], with a full
    covariance so that Monte Carlo draws are correlated.
    """

    def __init__(self, k_ref=1e-7, ea=80e3, cov=None, t_range=(293.15, 323.15),
                 ph_range=(4.0, 9.0), residual_scale=None, ea_from_prior=()):
        self.estimates = np.array([math.log(k_ref), ea])
        self.covariance = (
            np.array([[0.02, 150.0], [150.0, 2.0e6]]) if cov is None else np.asarray(cov)
        )
        self.temperature_range_K = t_range
        self.pH_range = ph_range
        self.residual_scale = residual_scale
        self.ea_from_prior = ea_from_prior
        self.uncharacterised_pathways = ()

    def ln_k(self, temperature_K, pH, ionic_strength_M=0.0, salinity=0.0, parameters=None):
        t = np.asarray(temperature_K, dtype=float)
        if parameters is None:
            p = self.estimates
            return p[0] - p[1] / R * (1.0 / t - 1.0 / T_REF)
        p = np.asarray(parameters, dtype=float)
        return p[:, [0]] - p[:, [1]] / R * (1.0 / t[None, :] - 1.0 / T_REF)

    def sample_parameters(self, n, rng):
        return rng.multivariate_normal(self.estimates, self.covariance, size=n)

    def k(self, temperature_K):
        return float(np.exp(self.ln_k(np.asarray(temperature_K), 7.0)))


def quad_integral(k_of_t, t_end, pieces):
    """∫0^t_end k dt by adaptive Gauss-Kronrod (QUADPACK via scipy.integrate.quad),
    split into ``pieces`` equal sub-intervals, at ~1e-13 relative accuracy."""
    edges = np.linspace(0.0, t_end, pieces + 1)
    return sum(
        integrate.quad(k_of_t, a, b, epsabs=0.0, epsrel=1e-13, limit=200)[0]
        for a, b in zip(edges[:-1], edges[1:])
    )


def test_protocol_is_satisfied_by_the_test_model():
    assert isinstance(NeutralArrhenius(), RateModel)


@pytest.mark.parametrize("temperature_K, k_ref", [(283.15, 1e-7), (298.15, 3e-6), (318.15, 1e-8)])
def test_constant_conditions_give_exact_first_order_decay(temperature_K, k_ref):
    model = NeutralArrhenius(k_ref=k_ref)
    sc = Scenario("constant", temperature_K=temperature_K, pH=7.0)
    times = np.array([0.0, 1.0, 10.0, 100.0, 365.0]) * DAY_S
    res = run_scenario(model, sc, output_time_s=times, n_draws=0)
    k = model.k(temperature_K)
    # analytic solution of dC/dt = -k C (first-order kinetics, any physical chemistry text)
    assert_allclose(res.fraction_remaining, np.exp(-k * times), rtol=1e-12, atol=0)
    assert_allclose(res.dt50_s, math.log(2) / k, rtol=1e-9)
    assert_allclose(res.dt90_s, math.log(10) / k, rtol=1e-9)
    assert_allclose(res.effective_k_per_s, k, rtol=1e-12)
    assert res.fraction_ci_low is None and res.caution == CAUTION_TEXT


def test_sinusoidal_annual_temperature_matches_quadrature():
    model = NeutralArrhenius(k_ref=2e-7, ea=85e3)
    mean, amp, phase = 284.0, 9.0, 200.0
    sc = Scenario("annual", temperature_K=AnnualCycle(mean, amp, phase), pH=7.0,
                  start_day_of_year=30.0)
    times = np.array([0.0, 30.0, 90.0, 182.5, 365.0, 500.0]) * DAY_S
    res = run_scenario(model, sc, output_time_s=times, n_draws=0)
    tight = run_scenario(model, sc, output_time_s=times, n_draws=0, rtol=1e-10)

    def k_of_t(t):
        day = t / DAY_S + 30.0
        temp = mean + amp * math.cos(2 * math.pi * (day - phase) / 365.0)
        return model.k(temp)

    # reference: scipy.integrate.quad (QUADPACK, Piessens et al. 1983) at epsrel 1e-13
    ref = np.array([quad_integral(k_of_t, t, 24) if t > 0 else 0.0 for t in times])
    # the default rtol (1e-7 on the cumulative integral) bounds the error of C/C0 ...
    assert_allclose(res.fraction_remaining, np.exp(-ref), rtol=3e-7, atol=0)
    # ... and a tighter rtol converges to the quadrature
    assert_allclose(tight.fraction_remaining, np.exp(-ref), rtol=1e-9, atol=0)
    assert_allclose(res.effective_k_per_s, ref[-1] / times[-1], rtol=3e-7)
    # DT50 reference: root of ∫k dt = ln 2 by scipy.optimize.brentq on the quad integral
    dt50_ref = optimize.brentq(lambda t: quad_integral(k_of_t, t, 24) - math.log(2),
                               1.0, 5 * YEAR_S, xtol=1.0)
    assert_allclose(res.dt50_s, dt50_ref, rtol=1e-6)


def test_fast_daily_temperature_swing_matches_quadrature():
    # a ±10 K daily swing on top of a seasonal cycle: the condition changes much faster
    # than the output spacing, which a coarse grid would get wrong
    model = NeutralArrhenius(k_ref=5e-7, ea=110e3)
    sc = Scenario(
        "diurnal",
        temperature_K=(AnnualCycle(290.0, 6.0, 190.0), DailyCycle(0.0, 10.0, 14.0)),
        pH=DailyCycle(8.0, 0.6, 16.0),
        start_day_of_year=150.0,
    )
    times = np.array([0.0, 0.3, 1.0, 2.5, 7.0, 20.0]) * DAY_S
    res = run_scenario(model, sc, output_time_s=times, n_draws=0, rtol=1e-10)

    def k_of_t(t):
        day = t / DAY_S + 150.0
        hour = t / 3600.0 + 150.0 * 24.0
        temp = (290.0 + 6.0 * math.cos(2 * math.pi * (day - 190.0) / 365.0)
                + 10.0 * math.cos(2 * math.pi * (hour - 14.0) / 24.0))
        return model.k(temp)

    # reference: scipy.integrate.quad split into 1-hour pieces, epsrel 1e-13
    ref = np.array([quad_integral(k_of_t, t, max(1, int(round(t / 3600.0)))) if t > 0 else 0.0
                    for t in times])
    assert_allclose(res.fraction_remaining, np.exp(-ref), rtol=1e-9, atol=0)
    assert res.integration_rel_error < 1e-10
    assert not res.flags["integration_not_converged"]


def test_dt_beyond_horizon_uses_whole_years_for_repeating_scenarios():
    model = NeutralArrhenius(k_ref=1e-8, ea=70e3)
    sc = Scenario("slow", temperature_K=AnnualCycle(283.0, 7.0, 210.0), pH=7.5)
    short = run_scenario(model, sc, horizon_s=60 * DAY_S, n_draws=0)
    long_ = run_scenario(model, sc, horizon_s=12 * YEAR_S, n_draws=0)
    assert short.dt90_s > 60 * DAY_S
    # same DT whether continued by whole years or integrated directly over 12 years
    # both within the default integration tolerance (rtol 1e-7 on the integral)
    assert_allclose(short.dt50_s, long_.dt50_s, rtol=1e-6)
    assert_allclose(short.dt90_s, long_.dt90_s, rtol=1e-6)


def test_monte_carlo_band_matches_lognormal_quantiles_at_constant_conditions():
    # ln k at fixed T is linear in (ln k_ref, Ea): ln k = ln k_ref - Ea/R (1/T - 1/Tref),
    # so ln k ~ N(mu, g S g^T) and F(t) = exp(-exp(ln k) t) has exact quantiles.
    model = NeutralArrhenius(k_ref=2e-7, ea=75e3)
    temp = 285.15
    sc = Scenario("constant", temperature_K=temp, pH=7.0)
    times = np.array([0.0, 30.0, 90.0, 365.0]) * DAY_S
    res = run_scenario(model, sc, output_time_s=times, n_draws=20000, seed=11)
    g = np.array([1.0, -(1.0 / temp - 1.0 / T_REF) / R])
    sd = math.sqrt(g @ model.covariance @ g)
    mu = float(model.ln_k(np.array(temp), 7.0))
    z = stats.norm.ppf(0.975)  # standard normal quantile (scipy.stats reference)
    low = np.exp(-np.exp(mu + z * sd) * times)
    high = np.exp(-np.exp(mu - z * sd) * times)
    assert_allclose(res.fraction_ci_low[1:], low[1:], rtol=0.01)
    assert_allclose(res.fraction_ci_high[1:], high[1:], rtol=0.01)
    assert_allclose(res.dt50_ci_low_s, math.log(2) / math.exp(mu + z * sd), rtol=0.02)
    assert_allclose(res.dt50_ci_high_s, math.log(2) / math.exp(mu - z * sd), rtol=0.02)


def test_correlation_of_draws_is_used():
    # ln k_ref and Ea strongly correlated: far from Tref the band differs from independent draws
    cov_corr = np.array([[0.04, 380.0], [380.0, 4.0e6]])  # correlation 0.95
    cov_ind = np.diag(np.diag(cov_corr))
    sc = Scenario("cold", temperature_K=278.15, pH=7.0)
    times = np.array([0.0, 100.0]) * DAY_S
    a = run_scenario(NeutralArrhenius(cov=cov_corr), sc, output_time_s=times, n_draws=4000, seed=3)
    b = run_scenario(NeutralArrhenius(cov=cov_ind), sc, output_time_s=times, n_draws=4000, seed=3)
    width_a = a.fraction_ci_high[1] - a.fraction_ci_low[1]
    width_b = b.fraction_ci_high[1] - b.fraction_ci_low[1]
    assert abs(width_a - width_b) > 0.1 * width_b


def test_interval_levels_and_prediction_band():
    model = NeutralArrhenius(residual_scale=0.3)
    sc = Scenario("pond", temperature_K=AnnualCycle(288.0, 8.0, 200.0), pH=7.5)
    res = run_scenario(model, sc, n_draws=2000, seed=5)
    i95 = res.interval(0.95)
    i50 = res.interval(0.5)
    p95 = res.interval(0.95, "prediction")
    assert np.all(i50.fraction_low[1:] >= i95.fraction_low[1:])
    assert np.all(p95.fraction_low[1:] <= i95.fraction_low[1:])
    assert_allclose(i95.fraction_low, res.fraction_ci_low, rtol=0, atol=0)
    assert_allclose(p95.fraction_high, res.fraction_pi_high, rtol=0, atol=0)
    with pytest.raises(InputError, match="level"):
        res.interval(1.5)
    with pytest.raises(InputError, match="confidence, prediction"):
        res.interval(0.9, "tolerance")


def test_monthly_means_pass_through_midpoints_and_wrap_the_year():
    values = np.array([3, 4, 7, 11, 15, 19, 21, 20, 16, 11, 7, 4], dtype=float) + 273.15
    mm = MonthlyMeans(values)
    mid = (np.arange(12) + 0.5) * YEAR_S / 12
    assert_allclose(mm.evaluate(mid, 0.0), values, rtol=0, atol=1e-12)
    # 1 January 00:00 lies halfway between the December and January midpoints
    assert_allclose(mm.evaluate(np.array([0.0]), 0.0), 0.5 * (values[0] + values[-1]), atol=1e-12)
    assert_allclose(mm.evaluate(np.array([YEAR_S - 1e-6]), 0.0), mm.evaluate(np.array([0.0]), 0.0),
                    atol=1e-9)
    # start_day_of_year shifts the calendar
    assert_allclose(mm.evaluate(np.array([0.0]), mid[6]), values[6], atol=1e-12)


def test_monthly_means_scenario_matches_quadrature():
    values = np.array([4, 5, 8, 12, 16, 20, 22, 21, 17, 12, 8, 5], dtype=float) + 273.15
    model = NeutralArrhenius(k_ref=1e-7, ea=90e3)
    sc = Scenario("monthly", temperature_K=MonthlyMeans(values), pH=7.0)
    res = run_scenario(model, sc, output_time_s=np.array([0.0, 200 * DAY_S, YEAR_S]), n_draws=0)
    mm = MonthlyMeans(values)

    def k_of_t(t):
        return model.k(mm.evaluate(np.array([t]), 0.0)[0])

    mid = (np.arange(12) + 0.5) * YEAR_S / 12
    # reference: scipy.integrate.quad with the month midpoints (kinks) as break points
    ref = integrate.quad(k_of_t, 0, YEAR_S, points=mid, epsabs=0, epsrel=1e-12, limit=500)[0]
    assert_allclose(res.fraction_remaining[-1], math.exp(-ref), rtol=1e-9)


def test_series_interpolation_extend_modes():
    model = NeutralArrhenius(k_ref=1e-6)
    times = np.array([0.0, 10.0, 20.0]) * DAY_S
    series = Series(times, np.array([283.15, 293.15, 288.15]))
    sc = Scenario("series", temperature_K=series, pH=7.0)
    assert_allclose(sc.conditions(np.array([5 * DAY_S]))["temperature_K"], [288.15], atol=1e-12)
    with pytest.raises(InputError, match="outside the measured series"):
        run_scenario(model, sc, horizon_s=30 * DAY_S, n_draws=0)
    held = Scenario("held", temperature_K=Series(times, np.array([283.15, 293.15, 288.15]),
                                                 extend="hold"), pH=7.0)
    res = run_scenario(model, held, horizon_s=5 * DAY_S, n_draws=0)
    # beyond the last sample the rate is the constant k(288.15 K): DT90 found by extension
    long_ = run_scenario(model, held, horizon_s=400 * DAY_S, n_draws=0)
    assert_allclose(res.dt90_s, long_.dt90_s, rtol=1e-7)


def test_series_without_extension_reports_missing_dt_with_note():
    model = NeutralArrhenius(k_ref=1e-9)
    sc = Scenario("short", temperature_K=Series([0.0, 10 * DAY_S], [288.15, 290.15]), pH=7.0)
    res = run_scenario(model, sc, horizon_s=10 * DAY_S, n_draws=200, seed=1)
    assert res.dt50_s is None and res.dt90_s is None
    assert res.dt50_ci_high_s is None
    assert any("not reached" in n for n in res.notes)
    assert np.all(np.isfinite(res.fraction_ci_low))


def test_flags_are_propagated():
    model = NeutralArrhenius(t_range=(293.15, 323.15), ph_range=(4.0, 9.0),
                             ea_from_prior=("neutral",))
    sc = Scenario("cold lake", temperature_K=AnnualCycle(281.0, 5.0, 200.0),
                  pH=DailyCycle(8.6, 0.8, 15.0))
    res = run_scenario(model, sc, n_draws=0)
    assert res.flags["temperature_outside_range"]
    assert res.flags["pH_outside_range"]
    assert res.flags["ea_from_prior"]
    assert_allclose(res.fraction_of_time_outside_range["temperature"], 1.0, atol=1e-12)
    assert 0.0 < res.fraction_of_time_outside_range["pH"] < 1.0
    assert any("extrapolated" in n for n in res.notes)


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"temperature_K": AnnualCycle(276.0, 6.0, 200.0), "pH": 7.0}, r"at time .* d.*temperature_K"),
        ({"temperature_K": 290.0, "pH": DailyCycle(13.5, 1.0, 12.0)},
         r"at time .* d.*pH 14\.\d+ is outside"),
        ({"temperature_K": 290.0, "pH": 7.0, "salinity": -1.0}, r"salinity -1\.0 is negative"),
    ],
)
def test_out_of_range_conditions_raise_with_the_time(kwargs, message):
    sc = Scenario("bad", **kwargs)
    with pytest.raises(InputError, match=message):
        run_scenario(NeutralArrhenius(), sc, n_draws=0)


def test_salinity_and_ionic_strength_together_are_refused():
    with pytest.raises(InputError, match="either salinity or ionic_strength_M"):
        Scenario("both", temperature_K=290.0, pH=7.0, salinity=30.0, ionic_strength_M=0.7)


@pytest.mark.parametrize(
    "build, message",
    [
        (lambda: AnnualCycle(288.0, -3.0, 10.0), "amplitude must be >= 0"),
        (lambda: DailyCycle(8.0, 0.5, 25.0), r"phase_hour must be in \[0, 24\)"),
        (lambda: MonthlyMeans(np.ones(11)), "exactly 12 values, got 11"),
        (lambda: Series([0.0, 0.0], [1.0, 2.0]), "strictly increasing"),
        (lambda: Series([0.0, 1.0], [1.0, 2.0], extend="wrap"), "error, hold"),
        (lambda: Constant(float("nan")), "finite"),
    ],
)
def test_bad_components_raise(build, message):
    with pytest.raises(InputError, match=message):
        build()


def test_bad_run_arguments_raise():
    sc = Scenario("ok", temperature_K=290.0, pH=7.0)
    m = NeutralArrhenius()
    with pytest.raises(InputError, match="at least 100"):
        run_scenario(m, sc, n_draws=10)
    with pytest.raises(InputError, match="horizon_s must be > 0"):
        run_scenario(m, sc, horizon_s=-1.0)
    with pytest.raises(InputError, match="beyond horizon_s"):
        run_scenario(m, sc, horizon_s=10.0, output_time_s=[0.0, 20.0])
    with pytest.raises(InputError, match="ln_k"):
        run_scenario(object(), sc)


def test_dictionary_round_trip_and_celsius_input():
    d_c = {
        "name": "Test pond (invented)",
        "invented": True,
        "temperature_C": [
            {"kind": "annual_cycle", "mean": 12.0, "amplitude": 8.0, "phase_day": 200},
            {"kind": "daily_cycle", "mean": 0.0, "amplitude": 1.5, "phase_hour": 15},
        ],
        "pH": [{"kind": "daily_cycle", "mean": 8.0, "amplitude": 0.4, "phase_hour": 16}],
        "salinity": 0.2,
    }
    sc_c = scenario_from_dict(d_c)
    sc_k = Scenario("k", temperature_K=(AnnualCycle(285.15, 8.0, 200.0), DailyCycle(0.0, 1.5, 15.0)),
                    pH=DailyCycle(8.0, 0.4, 16.0), salinity=0.2)
    t = np.linspace(0, YEAR_S, 997)
    for q in ("temperature_K", "pH", "salinity"):
        assert_allclose(sc_c.conditions(t)[q], sc_k.conditions(t)[q], rtol=0, atol=1e-9)
    assert "invented" in sc_c.description
    again = scenario_from_dict(scenario_to_dict(sc_c))
    assert_allclose(again.conditions(t)["temperature_K"], sc_c.conditions(t)["temperature_K"],
                    atol=0)
    with pytest.raises(InputError, match="unknown temperature component kind 'sine'"):
        scenario_from_dict({"name": "x", "temperature_K": [{"kind": "sine"}], "pH": 7})
    with pytest.raises(InputError, match="exactly one of temperature_K or temperature_C"):
        scenario_from_dict({"name": "x", "pH": 7})


# --------------------------------------------------------------------------- real fits


def invented_runs(seed=7):
    """Nine invented runs (pH 4/7/9 at 20, 35, 50 °C) of an invented ester-like substance
    with neutral and base pathways, scattered by 5 % on ln k."""
    from kinetics.surface import RateMeasurement
    from kinetics.water import hydronium_hydroxide_molar

    rng = np.random.default_rng(seed)
    runs = []
    for temp in (293.15, 308.15, 323.15):
        for ph in (4.0, 7.0, 9.0):
            _, oh = hydronium_hydroxide_molar(ph, temp)
            arr = -1.0 / R * (1.0 / temp - 1.0 / T_REF)
            k = 2e-8 * math.exp(85e3 * arr) + 0.5 * math.exp(60e3 * arr) * float(oh)
            k *= math.exp(0.05 * rng.standard_normal())
            runs.append(RateMeasurement(temperature_K=temp, pH=ph, k_per_s=k, se_ln_k=0.05,
                                        label=f"invented run {temp - 273.15:.0f} C pH {ph:g}"))
    return runs


@pytest.fixture(scope="module")
def fitted_surface():
    from kinetics.surface import fit_surface

    return fit_surface(invented_runs())


def test_real_surface_fit_satisfies_the_protocol(fitted_surface):
    assert isinstance(fitted_surface, RateModel)


def test_real_surface_scenario_matches_quadrature(fitted_surface):
    sc = Scenario(
        "Seasonal pond (invented)",
        temperature_K=(AnnualCycle(287.0, 8.0, 200.0), DailyCycle(0.0, 2.0, 15.0)),
        pH=DailyCycle(8.2, 0.5, 16.0),
        salinity=0.3,
    )
    times = np.array([0.0, 30.0, 90.0, 365.0]) * DAY_S
    res = run_scenario(fitted_surface, sc, output_time_s=times, n_draws=400, seed=2)

    def k_of_t(t):
        c = sc.conditions(np.array([t]))
        return float(np.exp(fitted_surface.ln_k(c["temperature_K"], c["pH"],
                                                salinity=c["salinity"])[0]))

    # reference: scipy.integrate.quad (QUADPACK) in 6-hour pieces, epsrel 1e-12
    ref = [0.0] + [quad_integral(k_of_t, t, int(round(t / (6 * 3600.0)))) for t in times[1:3]]
    assert_allclose(res.fraction_remaining[:3], np.exp(-np.array(ref)), rtol=3e-7, atol=0)
    assert np.all(res.fraction_ci_low[1:] < res.fraction_remaining[1:])
    assert np.all(res.fraction_ci_high[1:] > res.fraction_remaining[1:])
    assert np.all(res.fraction_pi_low[1:] <= res.fraction_ci_low[1:])
    # the pond is colder than every run (20-50 °C): flagged as extrapolated
    assert res.flags["temperature_outside_range"]
    assert res.caution == CAUTION_TEXT


def test_grid_limits():
    model = NeutralArrhenius()
    sc = Scenario("daily", temperature_K=(Constant(290.0), DailyCycle(0.0, 3.0, 14.0)), pH=7.0)
    with pytest.raises(InputError, match="shorten the horizon or raise max_points"):
        run_scenario(model, sc, horizon_s=10 * YEAR_S, n_draws=0, max_points=10_000)
    # a grid that starts within the limit but may not refine is flagged, not silently used
    res = run_scenario(model, sc, horizon_s=30 * DAY_S, n_draws=0, max_points=3500, rtol=1e-15)
    assert res.flags["integration_not_converged"]
    assert any("limit of 3500 points" in n for n in res.notes)


def test_absurd_rate_constants_raise_instead_of_dividing_by_zero():
    from kinetics.errors import DataError

    model = NeutralArrhenius(k_ref=1e-310)
    sc = Scenario("dead", temperature_K=285.0, pH=7.0)
    with pytest.raises(DataError, match="far outside"):
        run_scenario(model, sc, n_draws=0)


def test_real_surface_band_at_constant_conditions_matches_prediction_intervals(fitted_surface):
    # at constant conditions C/C0 = exp(-k t), so the band of C/C0 is the band of k carried
    # through exp(-k t); compare with the t-based delta-method intervals of kinetics.predict
    from kinetics.prediction import predict

    sc = Scenario("constant", temperature_K=288.15, pH=8.0)
    times = np.array([0.0, 30.0, 100.0]) * DAY_S
    res = run_scenario(fitted_surface, sc, output_time_s=times, n_draws=20000, seed=3)
    assert res.draw_distribution.startswith("multivariate t")
    p = predict(fitted_surface, 288.15, 8.0, level=0.95)
    k = {name: float(np.ravel(getattr(p, name))[0]) for name in
         ("k_ci_low_per_s", "k_ci_high_per_s", "k_pi_low_per_s", "k_pi_high_per_s")}
    assert_allclose(res.fraction_ci_low, np.exp(-k["k_ci_high_per_s"] * times), rtol=5e-3)
    assert_allclose(res.fraction_ci_high, np.exp(-k["k_ci_low_per_s"] * times), rtol=5e-3)
    assert_allclose(res.fraction_pi_low, np.exp(-k["k_pi_high_per_s"] * times), rtol=5e-3)
    assert_allclose(res.fraction_pi_high, np.exp(-k["k_pi_low_per_s"] * times), rtol=5e-3)


class _ThroughLnK:
    """The fitted surface seen only through the RateModel protocol (ln k per chunk)."""

    def __init__(self, fit):
        self._fit = fit
        for name in ("dof", "estimates", "residual_scale", "temperature_range_K", "pH_range",
                     "ea_from_prior", "uncharacterised_pathways"):
            setattr(self, name, getattr(fit, name))

    def ln_k(self, *args, **kwargs):
        return self._fit.ln_k(*args, **kwargs)

    def sample_parameters(self, n, rng):
        return self._fit.sample_parameters(n, rng)


@pytest.mark.parametrize("salinity", [0.0, 12.0])
def test_precomputed_water_chemistry_gives_the_numbers_of_ln_k(fitted_surface, salinity):
    sc = Scenario(
        "Seasonal estuary (invented)",
        temperature_K=(AnnualCycle(287.0, 8.0, 200.0), DailyCycle(0.0, 2.0, 15.0)),
        pH=DailyCycle(8.0, 0.4, 16.0),
        salinity=salinity,
    )
    times = np.array([0.0, 30.0, 90.0, 365.0]) * DAY_S
    fast = run_scenario(fitted_surface, sc, output_time_s=times, n_draws=500, seed=4)
    slow = run_scenario(_ThroughLnK(fitted_surface), sc, output_time_s=times, n_draws=500, seed=4)
    for name in ("fraction_ci_low", "fraction_ci_high", "fraction_pi_low", "fraction_pi_high",
                 "fraction_remaining"):
        assert_allclose(getattr(fast, name), getattr(slow, name), rtol=1e-12, atol=0,
                        err_msg=name)
    for kind in ("confidence", "prediction"):
        a, b = fast.interval(0.9, kind), slow.interval(0.9, kind)
        assert_allclose(a.fraction_low, b.fraction_low, rtol=1e-12, atol=0)
        assert_allclose(a.fraction_high, b.fraction_high, rtol=1e-12, atol=0)
        for name in ("dt50_low_s", "dt50_high_s", "dt90_low_s", "dt90_high_s",
                     "effective_k_low_per_s", "effective_k_high_per_s"):
            x, y = getattr(a, name), getattr(b, name)
            assert (x is None) == (y is None), name
            if x is not None:
                assert_allclose(x, y, rtol=1e-12, atol=0, err_msg=name)


def test_rate_draws_equal_exp_of_ln_k_and_refuse_foreign_conditions(fitted_surface):
    from kinetics.errors import DataError

    T = np.array([280.0, 298.15, 315.0])
    ph = np.array([5.0, 7.5, 9.5])
    draws = fitted_surface.sample_parameters(50, np.random.default_rng(6))
    prepared = fitted_surface.prepare_conditions(T, ph, salinity=5.0)
    k = fitted_surface.rate_draws_per_s(prepared, draws)
    ref = np.exp(fitted_surface.ln_k(T, ph, salinity=5.0, parameters=draws))
    assert k.shape == (50, 3) and prepared.n_conditions == 3
    assert_allclose(k, ref, rtol=1e-13, atol=0)
    with pytest.raises(InputError, match="prepare_conditions"):
        fitted_surface.rate_draws_per_s((T, ph), draws)
    absurd = np.array(fitted_surface.estimates, dtype=float)[None, :].copy()
    absurd[0, 0::2] = 800.0  # ln k_ref far beyond any representable rate
    with pytest.raises(DataError, match="exp\\(700\\)"):
        fitted_surface.rate_draws_per_s(prepared, absurd)
