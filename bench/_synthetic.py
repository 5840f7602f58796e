"""Invented synthetic hydrolysis studies shared by the benchmark scripts.

The substance and its parameters are invented for benchmarking; they describe no real
chemical.
"""

from __future__ import annotations

import numpy as np

from kinetics.surface import GAS_CONSTANT_J_PER_MOL_K as R_J_PER_MOL_K
from kinetics.water import pKw

T_REF_K = 298.15

# Invented three-pathway parameters: ln k at 25 degC in SI units and Ea in J/mol.
TRUE_LN_K_REF = {"acid": np.log(2.0e-3), "neutral": np.log(3.0e-8), "base": np.log(4.0e-2)}
TRUE_EA_J_PER_MOL = {"acid": 70.0e3, "neutral": 85.0e3, "base": 60.0e3}


def true_k_per_s(temperature_K, pH):
    """k_obs of the invented substance [1/s] (activities taken as concentrations)."""
    temperature_K = np.asarray(temperature_K, float)
    pH = np.asarray(pH, float)
    h = 10.0 ** (-pH)
    oh = 10.0 ** (pH - pKw(temperature_K))  # pure-water pKw of kinetics.water
    inv = 1.0 / temperature_K - 1.0 / T_REF_K
    k = 0.0
    for p, conc in (("acid", h), ("neutral", 1.0), ("base", oh)):
        k = k + np.exp(TRUE_LN_K_REF[p] - TRUE_EA_J_PER_MOL[p] / R_J_PER_MOL_K * inv) * conc
    return k


def synthetic_runs(n_runs, n_points=10, *, noise=0.03, seed=20261202):
    """A standard-design study of ``n_runs`` raw series (pH 4, 7, 9 x several temperatures).

    Returns a list of dicts with temperature_K, pH, time_s (array), concentration (array).
    """
    rng = np.random.default_rng(seed)
    temps_C = np.array([20.0, 30.0, 40.0, 50.0, 60.0])
    phs = np.array([4.0, 7.0, 9.0])
    runs = []
    for i in range(n_runs):
        t_K = temps_C[(i // 3) % temps_C.size] + 273.15
        pH = phs[i % 3]
        k = float(true_k_per_s(t_K, pH))
        t_end = 2.0 * np.log(2.0) / k  # two half-lives
        time_s = np.linspace(0.0, t_end, n_points)
        conc = 100.0 * np.exp(-k * time_s) * (1.0 + noise * rng.standard_normal(n_points))
        runs.append({"temperature_K": t_K, "pH": pH, "time_s": time_s, "concentration": conc})
    return runs
