"""Tests of kinetics.prediction: field predictions with intervals and flags.

All runs are invented test data for invented substances.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from scipy import stats

import kinetics
from kinetics import water
from kinetics.caution import CAUTION_TEXT
from kinetics.errors import InputError
from kinetics.prediction import PREDICTION_METHODS, Prediction, predict
from kinetics.surface import GAS_CONSTANT_J_PER_MOL_K as R
from kinetics.surface import PATHWAYS, RateMeasurement, fit_surface

TREF = 298.15

# Invented substance "Orbitamide" (invented): ln k at 25 °C, Ea [J/mol].
ORBITAMIDE = {
    "acid": (math.log(5e-3), 65e3),
    "neutral": (math.log(1e-7), 90e3),
    "base": (math.log(1.0), 55e3),
}


def true_k(T, pH):
    h, oh = water.hydronium_hydroxide_molar(pH, T)
    conc = {"acid": h, "neutral": 1.0, "base": oh}
    return sum(
        math.exp(a - ea / R * (1 / T - 1 / TREF)) * conc[p] for p, (a, ea) in ORBITAMIDE.items()
    )


def runs(seed=1, temps=(293.15, 313.15, 333.15), phs=(4.0, 7.0, 9.0), noise=0.05, se=True):
    rng = np.random.default_rng(seed)
    out = []
    for T in temps:
        for pH in phs:
            k = true_k(T, pH) * math.exp(noise * rng.standard_normal())
            out.append(RateMeasurement(T, pH, k, se_ln_k=noise if se else None,
                                       se_dof=6 if se else None, label="invented"))
    return out


@pytest.fixture(scope="module")
def surface():
    return fit_surface(runs(), pathways=PATHWAYS)


def test_delta_method_equals_statsmodels_mean_and_observation_intervals():
    # One neutral pathway at pH 7 is a linear regression of ln k on 1/T, so the
    # delta-method confidence interval of the mean and the prediction interval of a
    # new run must equal statsmodels' OLS get_prediction intervals (independent library).
    rng = np.random.default_rng(12)
    temps = np.array([288.15, 298.15, 308.15, 318.15, 328.15])
    ln_k = -16.0 - 95e3 / R * (1 / temps - 1 / TREF) + 0.08 * rng.standard_normal(temps.size)
    fit = fit_surface([RateMeasurement(T, 7.0, math.exp(y)) for T, y in zip(temps, ln_k)],
                      pathways=("neutral",))
    field_T = np.array([278.15, 293.15, 340.0])
    pred = predict(fit, field_T, 7.0, level=0.9)
    ols = sm.OLS(ln_k, sm.add_constant(1 / temps - 1 / TREF)).fit()
    X_new = sm.add_constant(1 / field_T - 1 / TREF, has_constant="add")
    frame = ols.get_prediction(X_new).summary_frame(alpha=0.1)
    assert_allclose(pred.ln_k, frame["mean"], rtol=1e-9)
    assert_allclose(pred.se_ln_k, frame["mean_se"], rtol=1e-7)
    assert_allclose(np.log(pred.k_ci_low_per_s), frame["mean_ci_lower"], rtol=1e-8)
    assert_allclose(np.log(pred.k_ci_high_per_s), frame["mean_ci_upper"], rtol=1e-8)
    assert_allclose(np.log(pred.k_pi_low_per_s), frame["obs_ci_lower"], rtol=1e-8)
    assert_allclose(np.log(pred.k_pi_high_per_s), frame["obs_ci_upper"], rtol=1e-8)


def test_montecarlo_agrees_with_delta_method(surface):
    T = np.array([293.15, 303.15, 285.15, 323.15, 300.0])
    pH = np.array([5.0, 7.5, 8.3, 9.0, 3.5])
    d = predict(surface, T, pH)
    mc = predict(surface, T, pH, method="montecarlo", n_draws=40_000, seed=3)
    assert mc.method == "montecarlo" and d.method == "delta"
    assert_allclose(mc.k_per_s, d.k_per_s, rtol=1e-12)
    # Bounds agree to a few per cent of the interval half-width on the ln scale where
    # one pathway dominates (ln k is then linear in that pathway's parameters); where
    # pathways mix, ln k bends and Monte Carlo may differ a little more.
    one_dominates = np.max(np.stack(list(d.contributions.values())), axis=0) > 0.9
    assert one_dominates.sum() >= 3
    tol = np.where(one_dominates, 0.04, 0.12)
    for lo, hi in (("k_ci_low_per_s", "k_ci_high_per_s"), ("k_pi_low_per_s", "k_pi_high_per_s")):
        half = np.log(getattr(d, hi)) - d.ln_k
        for name in (lo, hi):
            diff = np.abs(np.log(getattr(mc, name)) - np.log(getattr(d, name)))
            assert np.all(diff < tol * half), name
    again = predict(surface, T, pH, method="montecarlo", n_draws=40_000, seed=3)
    np.testing.assert_array_equal(again.k_ci_low_per_s, mc.k_ci_low_per_s)


def test_dt50_dt90_and_interval_transforms(surface):
    pred = predict(surface, [288.15, 300.0], [6.5, 8.0])
    assert_allclose(pred.dt50_s, math.log(2) / pred.k_per_s, rtol=1e-12)  # SFO: DT50 = ln 2 / k
    assert_allclose(pred.dt90_s, math.log(10) / pred.k_per_s, rtol=1e-12)  # SFO: DT90 = ln 10 / k
    assert_allclose(pred.dt50_ci_low_s, math.log(2) / pred.k_ci_high_per_s, rtol=1e-12)
    assert_allclose(pred.dt50_ci_high_s, math.log(2) / pred.k_ci_low_per_s, rtol=1e-12)
    assert_allclose(pred.dt90_pi_high_s, math.log(10) / pred.k_pi_low_per_s, rtol=1e-12)
    assert np.all(pred.k_pi_low_per_s < pred.k_ci_low_per_s)
    assert np.all(pred.k_ci_low_per_s < pred.k_per_s)
    assert np.all(pred.k_per_s < pred.k_ci_high_per_s)
    tq = stats.t.ppf(0.975, surface.dof)
    assert_allclose(np.log(pred.k_ci_high_per_s) - pred.ln_k, tq * pred.se_ln_k, rtol=1e-12)
    assert_allclose(np.log(pred.k_pi_high_per_s) - pred.ln_k,
                    tq * np.sqrt(pred.se_ln_k**2 + surface.residual_scale**2), rtol=1e-12)
    iv = pred.interval(0.5, kind="prediction")
    t50 = stats.t.ppf(0.75, surface.dof)
    assert_allclose(np.log(iv.k_high_per_s) - pred.ln_k,
                    t50 * np.sqrt(pred.se_ln_k**2 + surface.residual_scale**2), rtol=1e-12)
    assert_allclose(iv.dt50_low_s, math.log(2) / iv.k_high_per_s, rtol=1e-12)
    same = pred.interval()
    np.testing.assert_array_equal(same.k_low_per_s, pred.k_ci_low_per_s)


def test_flags_and_extrapolation_distance(surface):
    T = np.array([303.15, 285.15, 303.15, 345.0])
    pH = np.array([6.0, 8.3, 10.5, 3.0])
    pred = predict(surface, T, pH)
    f = pred.flags
    np.testing.assert_array_equal(f["temperature_outside_range"], [False, True, False, True])
    np.testing.assert_array_equal(f["pH_outside_range"], [False, False, True, True])
    np.testing.assert_array_equal(f["ea_from_prior"], [False] * 4)
    np.testing.assert_array_equal(f["uncharacterised_pathway_matters"], [False] * 4)
    assert pred.extrapolation_ln_k[0] == 0.0
    clipped = surface.ln_k(np.clip(T, 293.15, 333.15), np.clip(pH, 4.0, 9.0))
    assert_allclose(pred.extrapolation_ln_k, np.abs(pred.ln_k - clipped), rtol=1e-12)
    assert np.all(pred.extrapolation_ln_k[1:] > 0.0)
    ionic = np.array([0.0, 0.05, 0.01, 0.1])  # a different medium per condition
    mixed = predict(surface, T, pH, ionic_strength_M=ionic)
    clipped = surface.ln_k(np.clip(T, 293.15, 333.15), np.clip(pH, 4.0, 9.0), ionic)
    assert_allclose(mixed.extrapolation_ln_k, np.abs(mixed.ln_k - clipped), rtol=1e-12)
    assert list(pred.dominant_pathway) == ["neutral", "base", "base", "acid"]
    assert_allclose(sum(pred.contributions.values()), 1.0, rtol=1e-12)
    assert pred.caution == CAUTION_TEXT


def test_uncharacterised_pathway_flag_when_only_pH7_measured():
    fit = fit_surface(runs(phs=(7.0,)))
    assert fit.uncharacterised_pathways == ("acid", "base")
    pred = predict(fit, [313.15, 313.15, 313.15, 313.15], [7.0, 8.3, 5.5, 7.5])
    # at the measured pH a hidden pathway can be at most the measured rate; one pH unit
    # away it could be ten times larger
    np.testing.assert_array_equal(pred.flags["uncharacterised_pathway_matters"],
                                  [False, True, True, True])
    np.testing.assert_array_equal(pred.flags["pH_outside_range"], [False, True, True, True])


def test_ea_from_prior_flag_for_single_temperature_study():
    fit = fit_surface(runs(temps=(298.15,), phs=(4.0, 4.0, 7.0, 7.0, 9.0, 9.0)), pathways=PATHWAYS)
    pred = predict(fit, [298.15, 283.15], [7.0, 8.0])
    np.testing.assert_array_equal(pred.flags["ea_from_prior"], [True, True])
    np.testing.assert_array_equal(pred.flags["temperature_outside_range"], [False, True])
    # the broad prior (sd 15 kJ/mol) widens the interval away from 25 °C
    width = np.log(pred.k_ci_high_per_s / pred.k_ci_low_per_s)
    assert width[1] > 3 * width[0]


def test_broadcasting_shapes_and_many_conditions(surface):
    T = np.linspace(278.15, 308.15, 7)[:, None]
    pH = np.linspace(5.0, 9.0, 5)[None, :]
    pred = predict(surface, T, pH, ionic_strength_M=0.01)
    assert pred.k_per_s.shape == (7, 5)
    assert pred.flags["pH_outside_range"].shape == (7, 5)
    assert pred.dominant_pathway.shape == (7, 5)
    assert_allclose(pred.ln_k, surface.ln_k(T, pH, ionic_strength_M=0.01), rtol=1e-12)
    n = 100_000
    rng = np.random.default_rng(0)
    big = predict(surface, rng.uniform(275.0, 340.0, n), rng.uniform(4.0, 10.0, n))
    assert len(big) == n
    assert np.all(np.isfinite(big.k_ci_low_per_s)) and np.all(np.isfinite(big.dt90_pi_high_s))
    scalar = predict(surface, 298.15, 7.0, salinity=30.0)
    assert scalar.k_per_s.shape == (1,)
    assert scalar.salinity[0] == 30.0


def test_predictions_are_read_only(surface):
    pred = predict(surface, [298.15], [7.0])
    with pytest.raises(ValueError):
        pred.k_per_s[0] = 1.0
    assert isinstance(pred, Prediction)
    assert kinetics.predict is predict
    assert PREDICTION_METHODS == ("delta", "montecarlo")


@pytest.mark.parametrize(
    "kwargs, match",
    [
        (dict(temperature_K=[298.15, float("nan")], pH=7.0), r"finite; got nan at index 1"),
        (dict(temperature_K=[298.15, 298.15, 298.15], pH=[7.0, 7.0, 14.5]), r"14.5 at index 2"),
        (dict(temperature_K=[298.15, 25.0], pH=7.0), r"index 1.*looks like °C"),
        (dict(temperature_K=380.0, pH=7.0), r"liquid water"),
        (dict(temperature_K=298.15, pH=7.0, ionic_strength_M=-1.0), r"ionic_strength_M"),
        (dict(temperature_K=[298.15, 300.0], pH=[7.0, 7.0, 7.0]), r"broadcast"),
        (dict(temperature_K=[], pH=[]), r"no conditions"),
        (dict(temperature_K=298.15, pH=7.0, method="bootstrap"), r"delta, montecarlo"),
        (dict(temperature_K=298.15, pH=7.0, level=1.5), r"level"),
        (dict(temperature_K=298.15, pH=7.0, method="montecarlo", n_draws=10), r"n_draws"),
        (dict(temperature_K="warm", pH=7.0), r"number"),
    ],
)
def test_bad_conditions_raise_input_errors(surface, kwargs, match):
    with pytest.raises(InputError, match=match):
        predict(surface, **kwargs)


def test_bad_surface_and_montecarlo_level(surface):
    with pytest.raises(InputError, match="SurfaceFit"):
        predict({"k": 1.0}, 298.15, 7.0)
    mc = predict(surface, 298.15, 7.0, method="montecarlo", n_draws=200, seed=1)
    with pytest.raises(InputError, match="call predict again"):
        mc.interval(0.9)
    with pytest.raises(InputError, match="kind"):
        mc.interval(kind="tolerance")


def _straightforward_delta(surface, T, pH, ionic, salinity, level):
    """The delta-method prediction written out from the public pieces, one condition at a time."""
    names = surface.parameter_names
    est = dict(zip(names, surface.estimates))
    cov = np.asarray(surface.covariance)
    tq = stats.t.ppf(0.5 + level / 2.0, surface.dof)
    out = []
    for t, p, i, s in np.broadcast(T, pH, ionic, salinity):
        h, oh = water.hydronium_hydroxide_molar(p, t, i, s)
        conc = {"acid": float(h), "neutral": 1.0, "base": float(oh)}
        terms = {
            q: est[f"ln_k_ref_{q}"] - est[f"Ea_{q}_J_per_mol"] / R * (1 / t - 1 / TREF)
            + math.log(conc[q])
            for q in surface.pathways
        }
        k = sum(math.exp(v) for v in terms.values())
        jac = []
        for q in surface.pathways:
            w = math.exp(terms[q]) / k
            jac += [w, -w / R * (1 / t - 1 / TREF)]
        se = math.sqrt(float(np.asarray(jac) @ cov @ np.asarray(jac)))
        out.append((math.log(k), se, math.log(k) - tq * se, math.log(k) + tq * se))
    return np.array(out)


@pytest.mark.parametrize(
    "T, pH, ionic, salinity",
    [
        (298.15, 7.5, 0.0, 0.0),  # one condition in pure water
        (283.15, 3.0, 0.0, 0.0),  # one condition outside the measured pH range
        (293.15, 8.1, 0.0, 35.0),  # seawater
        ([278.15, 298.15, 318.15], [5.0, 7.0, 9.5], [0.0, 0.05, 0.4], 0.0),  # fresh, mixed I
        ([275.0, 350.0], [6.0, 8.0], 0.0, [0.0, 20.0]),  # fresh next to brackish water
    ],
)
@pytest.mark.parametrize("level", [0.95, 0.8])
def test_delta_prediction_equals_straightforward_evaluation(surface, T, pH, ionic, salinity, level):
    # Internal consistency (common practice, no source): the vectorised prediction, with its
    # water chemistry evaluated once and its t quantile remembered, gives the numbers of the
    # delta-method formulas of the module docstring evaluated condition by condition from
    # kinetics.water and scipy.stats.t.
    if np.any(np.asarray(salinity) > 0) and np.any(np.asarray(T) > 318.15):
        with pytest.raises(InputError, match="temperature_K"):
            predict(surface, T, pH, ionic_strength_M=ionic, salinity=salinity)
        return
    ref = _straightforward_delta(surface, T, pH, ionic, salinity, level)
    for _ in range(2):  # a second call reuses the remembered quantile
        pred = predict(surface, T, pH, ionic_strength_M=ionic, salinity=salinity, level=level)
        assert_allclose(pred.ln_k.ravel(), ref[:, 0], rtol=1e-13, atol=0)
        assert_allclose(pred.se_ln_k.ravel(), ref[:, 1], rtol=1e-12, atol=0)
        assert_allclose(np.log(pred.k_ci_low_per_s).ravel(), ref[:, 2], rtol=1e-12, atol=0)
        assert_allclose(np.log(pred.k_ci_high_per_s).ravel(), ref[:, 3], rtol=1e-12, atol=0)
    assert_allclose(surface.ln_k(T, pH, ionic, salinity).ravel(), ref[:, 0], rtol=1e-13, atol=0)
    # distance from the measured box: ln k at the condition clipped into the measured ranges
    T_box = np.clip(T, *surface.temperature_range_K)
    pH_box = np.clip(pH, *surface.pH_range)
    box = _straightforward_delta(surface, T_box, pH_box, ionic, salinity, level)
    assert_allclose(pred.extrapolation_ln_k.ravel(), np.abs(ref[:, 0] - box[:, 0]),
                    rtol=1e-11, atol=1e-12)
