"""Monte Carlo intervals of kinetics.prediction against numpy's own quantiles.

The fast path selects order statistics of k beyond subsample thresholds and
evaluates the draws as outer products; these tests rebuild the same draws from
the same seed and check the intervals against :func:`numpy.quantile` (default
linear method, Hyndman and Fan 1996 definition 7) applied to
:meth:`SurfaceFit.ln_k` with the plain broadcasting formula. All runs are
invented test data for an invented substance.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from kinetics import water
from kinetics.prediction import _order_statistics, _row_order_stats, predict
from kinetics.surface import GAS_CONSTANT_J_PER_MOL_K as R
from kinetics.surface import PATHWAYS, RateMeasurement, fit_surface

TREF = 298.15
# Invented substance "Veltrazine" (invented): ln k at 25 °C, Ea [J/mol].
VELTRAZINE = {"acid": (math.log(2e-3), 70e3), "neutral": (math.log(3e-8), 85e3),
              "base": (math.log(4e-2), 60e3)}


@pytest.fixture(scope="module")
def surface():
    rng = np.random.default_rng(4)
    runs = []
    for T in (293.15, 313.15, 333.15):
        for pH in (4.0, 7.0, 9.0):
            h, oh = water.hydronium_hydroxide_molar(pH, T)
            conc = {"acid": h, "neutral": 1.0, "base": oh}
            k = sum(math.exp(a - ea / R * (1 / T - 1 / TREF)) * conc[p]
                    for p, (a, ea) in VELTRAZINE.items())
            runs.append(RateMeasurement(T, pH, k * math.exp(0.05 * rng.standard_normal()),
                                        se_ln_k=0.05, se_dof=6, label="invented"))
    return fit_surface(runs, pathways=PATHWAYS)


def reference_draws(surface, n_draws, seed):
    """The parameter draws and run-scatter draws of predict, rebuilt from the seed."""
    rng = np.random.default_rng(seed)
    normal = surface.sample_parameters(n_draws, rng)
    scale = np.sqrt(surface.dof / rng.chisquare(surface.dof, size=n_draws))
    draws = surface.estimates + (normal - surface.estimates) * scale[:, None]
    noise = rng.standard_normal(n_draws) * (surface.residual_scale * scale)
    return draws, noise


def broadcast_ln_k(surface, T, pH, draws):
    """ln k of every draw by plain broadcasting and a max-shifted log-sum-exp."""
    h, oh = water.hydronium_hydroxide_molar(pH, T)
    lnc = np.stack([np.log(h), np.zeros_like(h), np.log(oh)])
    u = TREF / T - 1.0
    a, e = draws[:, 0::2], draws[:, 1::2] / (R * TREF)
    terms = a[:, :, None] + lnc[None] - e[:, :, None] * u[None, None, :]
    top = terms.max(axis=1)
    return top + np.log(np.exp(terms - top[:, None, :]).sum(axis=1))


@pytest.mark.parametrize("n_draws, level", [(10_000, 0.95), (2_000, 0.9), (8_000, 0.99)])
def test_montecarlo_intervals_equal_numpy_quantiles_of_the_same_draws(surface, n_draws, level):
    rng = np.random.default_rng(9)
    T = rng.uniform(275.0, 330.0, 300)
    pH = rng.uniform(3.5, 10.0, 300)
    pred = predict(surface, T, pH, method="montecarlo", n_draws=n_draws, seed=21, level=level)
    draws, noise = reference_draws(surface, n_draws, 21)
    lnk = broadcast_ln_k(surface, T, pH, draws)
    q = [0.5 - level / 2.0, 0.5 + level / 2.0]
    ci = np.quantile(lnk, q, axis=0)
    pi = np.quantile(lnk + noise[:, None], q, axis=0)
    # same order statistics; only rounding of exp/log differs (1e-12 in ln k)
    assert_allclose(np.log(pred.k_ci_low_per_s), ci[0], rtol=0, atol=1e-11)
    assert_allclose(np.log(pred.k_ci_high_per_s), ci[1], rtol=0, atol=1e-11)
    assert_allclose(np.log(pred.k_pi_low_per_s), pi[0], rtol=0, atol=1e-11)
    assert_allclose(np.log(pred.k_pi_high_per_s), pi[1], rtol=0, atol=1e-11)


def test_ln_k_of_draws_equals_plain_broadcasting(surface):
    rng = np.random.default_rng(2)
    T = rng.uniform(275.0, 330.0, 500)
    pH = rng.uniform(3.5, 10.0, 500)
    draws = surface.sample_parameters(700, rng)
    assert_allclose(surface.ln_k(T, pH, parameters=draws), broadcast_ln_k(surface, T, pH, draws),
                    rtol=0, atol=1e-12)


@pytest.mark.parametrize("n, probs", [(10_000, (0.025, 0.975)), (40_000, (0.005, 0.995)),
                                      (5_000, (0.05, 0.95)), (300, (0.025, 0.975))])
def test_row_order_statistics_equal_a_full_sort(n, probs):
    rng = np.random.default_rng(n)
    values = rng.standard_normal((40, n)) * rng.uniform(0.1, 5.0, (40, 1))
    values[5] = 1.0  # a row of ties
    values[7, : n // 2] = -np.inf  # a row whose lower half overflowed
    kth, _ = _order_statistics(n, probs)
    expected = np.sort(values, axis=1)[:, kth]
    np.testing.assert_array_equal(_row_order_stats(values, kth), expected)
