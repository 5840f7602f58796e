"""The surface fit's own least-squares solver and Paule-Mandel root, checked
against scipy.optimize.least_squares (MINPACK Levenberg-Marquardt) on the same
weighted problem and against the defining equation of the Paule-Mandel
estimate (Paule and Mandel, J. Res. Natl. Bur. Stand. 87 (1982) 377-385).
All runs are invented test data for an invented substance.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import optimize

from kinetics import water
from kinetics.surface import GAS_CONSTANT_J_PER_MOL_K as R
from kinetics.surface import PATHWAYS, RateMeasurement, fit_surface

TREF = 298.15
# Invented substance "Orbitamide" (invented): ln k at 25 °C, Ea [J/mol].
ORBITAMIDE = {"acid": (math.log(5e-3), 65e3), "neutral": (math.log(1e-7), 90e3),
              "base": (math.log(1.0), 55e3)}


def invented_runs(seed, scatter, se, with_dof):
    rng = np.random.default_rng(seed)
    out = []
    for T in (293.15, 303.15, 313.15, 323.15):
        for pH in (4.0, 7.0, 9.0):
            for _ in range(2):
                h, oh = water.hydronium_hydroxide_molar(pH, T)
                conc = {"acid": h, "neutral": 1.0, "base": oh}
                k = sum(math.exp(a - ea / R * (1 / T - 1 / TREF)) * conc[p]
                        for p, (a, ea) in ORBITAMIDE.items())
                s = se * math.exp(0.3 * rng.standard_normal()) if se else None
                k *= math.exp(scatter * rng.standard_normal() + (s or 0.0) * rng.standard_normal())
                out.append(RateMeasurement(T, pH, k, se_ln_k=s,
                                           se_dof=8 if (s and with_dof) else None,
                                           label="invented"))
    return out


def weighted_problem(runs):
    T = np.array([m.temperature_K for m in runs])
    pH = np.array([m.pH for m in runs])
    y = np.log([m.k_per_s for m in runs])
    se2 = np.array([(m.se_ln_k or 0.0) ** 2 for m in runs])
    return T, pH, y, se2


@pytest.mark.parametrize("seed, scatter, se, with_dof", [
    (1, 0.10, 0.03, False),  # between-run scatter beyond the SEs: tau^2 > 0
    (2, 0.00, 0.05, False),  # SEs explain the scatter: tau^2 = 0
    (3, 0.15, None, False),  # no SEs: ordinary least squares on ln k
])
def test_estimates_equal_minpack_on_the_same_weights(seed, scatter, se, with_dof):
    runs = invented_runs(seed, scatter, se, with_dof)
    fit = fit_surface(runs, pathways=PATHWAYS)
    T, pH, y, se2 = weighted_problem(runs)
    tau2 = fit.between_run_sd_ln_k ** 2
    sig = np.sqrt(se2 + tau2) if se else np.ones_like(y)

    def residuals(theta):
        return (fit.ln_k(T, pH, parameters=theta[None, :])[0] - y) / sig

    # scaled start away from the solution; MINPACK LM to its tightest tolerances
    ref = optimize.least_squares(residuals, fit.estimates * 1.02, method="lm",
                                 x_scale=np.abs(fit.estimates), ftol=1e-15, xtol=1e-15,
                                 gtol=1e-15, max_nfev=20000)
    assert ref.success
    # agreement far inside the parameters' own uncertainty (a ln k near 0 rules out a
    # relative tolerance), and no lower weighted sum of squares found by MINPACK
    assert_allclose((fit.estimates - ref.x) / fit.standard_errors, 0.0, atol=1e-6)
    own = residuals(np.asarray(fit.estimates))
    assert own @ own <= (ref.fun @ ref.fun) * (1.0 + 1e-12)


@pytest.mark.parametrize("seed, with_dof", [(1, False), (4, True), (5, False)])
def test_between_run_variance_solves_the_paule_mandel_equation(seed, with_dof):
    runs = invented_runs(seed, 0.12, 0.03, with_dof)
    fit = fit_surface(runs, pathways=PATHWAYS)
    T, pH, y, se2 = weighted_problem(runs)
    assert fit.between_run_sd_ln_k > 0.0
    if with_dof:
        # the moderated variances: recover them from the fit's own weights
        from kinetics.surface import moderate_variances

        se2, _ = moderate_variances(se2, np.full(se2.size, 8.0))
    r = fit.ln_k(T, pH) - y
    Q = float(np.sum(r * r / (se2 + fit.between_run_sd_ln_k ** 2)))
    assert_allclose(Q, len(runs) - len(fit.parameter_names), rtol=1e-9)
