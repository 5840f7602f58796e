"""Calibration of fieldrate's intervals: do 95 % intervals cover the truth 95 % of the time?

Many studies of an invented substance (invented parameters, invented laboratory
design) are simulated from known rate constants; each is fitted from its raw
concentration-time series exactly as a user would (series fits, then the rate
surface), and predicted at a field condition inside and one outside the
measured temperature range. The share of studies whose 95 % confidence
interval of the mean rate contains the true rate must lie in 92.5-97.5 %,
about +-2.3 binomial standard errors around 95 % for 400 studies (binomial
bounds, common practice, no source). The seed is fixed and was not chosen to
pass.

Run with ``pytest -s`` to see the coverage figures.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from kinetics import water
from kinetics.prediction import predict
from kinetics.series import fit_sfo_batch
from kinetics.surface import GAS_CONSTANT_J_PER_MOL_K as R
from kinetics.surface import PATHWAYS, RateMeasurement, fit_surface

pytestmark = pytest.mark.slow

TREF = 298.15
# Invented substance "Veltrazine" (invented): ln k at 25 °C and Ea [J/mol]; every
# pathway dominates at one buffer pH and each has its own activation energy.
TRUTH = {
    "acid": (math.log(2e-2), 60e3),    # kA [L/(mol s)]
    "neutral": (math.log(2e-7), 85e3),  # kN [1/s]
    "base": (math.log(2.0), 50e3),     # kB [L/(mol s)]
}
# Standard laboratory design (invented laboratory): pH 4, 7, 9 at 20, 40, 60 °C.
DESIGN = [(T, pH) for T in (293.15, 313.15, 333.15) for pH in (4.0, 7.0, 9.0)]
# Sampling times as fractions of each run's half-life (8 samples over 2 half-lives).
HALF_LIFE_FRACTIONS = np.array([0.0, 0.25, 0.5, 0.75, 1.0, 1.25, 1.5, 2.0])
NOISE = 0.04  # 4 % proportional analytical error
# Field conditions: a 30 °C pH 6 water (inside the measured range) and a
# 12 °C pH 8.3 pond (below the measured temperatures).
FIELD = [(303.15, 6.0), (285.15, 8.3)]
N_STUDIES = 400
SEED = 20240601


def true_k(params, T, pH):
    h, oh = water.hydronium_hydroxide_molar(pH, T)
    conc = {"acid": h, "neutral": 1.0, "base": oh}
    return sum(math.exp(a - ea / R * (1 / T - 1 / TREF)) * conc[p] for p, (a, ea) in params.items())


def simulate_runs(params, n_studies, rng):
    """Raw series for every study, fitted in one vectorised batch; runs per study."""
    k_true = np.array([true_k(params, T, pH) for T, pH in DESIGN])
    series = []
    for _ in range(n_studies):
        for k in k_true:
            t = HALF_LIFE_FRACTIONS * math.log(2) / k
            conc = 100.0 * np.exp(-k * t) * (1.0 + NOISE * rng.standard_normal(t.size))
            series.append((t, conc))
    fits = fit_sfo_batch(series, time_unit="s", error_model="proportional")
    per = len(DESIGN)
    return [
        [
            RateMeasurement.from_series_fit(fits[s * per + i], temperature_K=T, pH=pH,
                                            label=f"invented study {s} run {i}")
            for i, (T, pH) in enumerate(DESIGN)
        ]
        for s in range(n_studies)
    ]


def coverage(studies, params, pathways, n_draws):
    k_field = np.array([true_k(params, T, pH) for T, pH in FIELD])
    T = [c[0] for c in FIELD]
    pH = [c[1] for c in FIELD]
    hits = {"delta": np.zeros((len(studies), len(FIELD)), bool),
            "montecarlo": np.zeros((len(studies), len(FIELD)), bool)}
    chosen = []
    for s, runs in enumerate(studies):
        fit = fit_surface(runs, pathways=pathways)
        chosen.append(fit.pathways)
        for method in hits:
            pred = predict(fit, T, pH, method=method, n_draws=n_draws, seed=s)
            assert pred.level == 0.95
            hits[method][s] = (pred.k_ci_low_per_s <= k_field) & (k_field <= pred.k_ci_high_per_s)
    return {m: h.mean(axis=0) for m, h in hits.items()}, chosen


def test_95_percent_intervals_cover_the_true_rate():
    rng = np.random.default_rng(SEED)
    studies = simulate_runs(TRUTH, N_STUDIES, rng)
    cov, _ = coverage(studies, TRUTH, PATHWAYS, n_draws=4000)
    for method, c in cov.items():
        print(f"\ncoverage of 95 % CIs, {N_STUDIES} studies, {method}: "
              f"inside range (30 °C, pH 6) {100 * c[0]:.2f} %, "
              f"outside range (12 °C, pH 8.3) {100 * c[1]:.2f} %")
    for method, c in cov.items():
        assert np.all(c >= 0.925) and np.all(c <= 0.975), (method, c)


def test_automatic_pathway_selection_keeps_the_calibration():
    # pathways="auto" on 60 further studies: it must find all three pathways in at
    # least 90 % of studies, and its intervals may miss the truth in at most 3 more
    # studies (5 %) per condition than the fixed true pathway set on the same studies.
    # The absolute coverage of the method is the 400-study test above; 60 studies
    # alone scatter by about 2.8 % (binomial SE).
    n = 60
    rng = np.random.default_rng(SEED + 1)
    studies = simulate_runs(TRUTH, n, rng)
    cov_auto, chosen = coverage(studies, TRUTH, "auto", n_draws=2000)
    cov_fixed, _ = coverage(studies, TRUTH, PATHWAYS, n_draws=2000)
    right = np.mean([c == PATHWAYS for c in chosen])
    print(f"\nauto selection, {n} studies: all three pathways chosen in {100 * right:.1f} %")
    for method in cov_auto:
        a, f = cov_auto[method], cov_fixed[method]
        print(f"coverage, {n} studies, {method}: auto inside {100 * a[0]:.1f} % / outside "
              f"{100 * a[1]:.1f} %; fixed pathways inside {100 * f[0]:.1f} % / outside "
              f"{100 * f[1]:.1f} %")
    assert right >= 0.9
    for method in cov_auto:
        assert np.all(cov_auto[method] >= cov_fixed[method] - 3.0 / n - 1e-12), method
