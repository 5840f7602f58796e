"""Runs without a measurable decline: the upper bound on k quoted when they are left out."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from service.fitting import RunInput, _decline_evidence, compute_fit

DAY_S = 86400.0


def _series(conc, times_d=(0, 1, 2, 4, 7, 14, 21, 30), t_C=20.0, pH=7.0, label="flat"):
    return RunInput(
        label=label, temperature_K=273.15 + t_C, pH=pH, ionic_strength_M=0.0, kind="series",
        time_s=tuple(float(t) * DAY_S for t in times_d),
        concentration=tuple(float(c) for c in conc),
        below_loq=tuple(False for _ in conc),
    )


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_upper_bound_matches_statsmodels_ols(seed):
    statsmodels = pytest.importorskip("statsmodels.api")
    rng = np.random.default_rng(seed)
    times_d = np.array([0, 1, 2, 4, 7, 14, 21, 30], dtype=float)
    conc = 10.0 * (1.0 + 0.01 * rng.standard_normal(times_d.size))
    ev = _decline_evidence(_series(conc, times_d))
    # one-sided 95 % bound on k = -slope: the upper end of the two-sided 90 % interval of
    # -slope from an ordinary least-squares fit (statsmodels OLS, conf_int(alpha=0.10))
    x = statsmodels.add_constant(times_d * DAY_S)
    ols = statsmodels.OLS(np.log(conc), x).fit()
    low, high = ols.conf_int(alpha=0.10)[1]
    expected = -low
    significant = -high > 0
    assert ev["significant"] is bool(significant)
    if expected > 0:
        assert_allclose(ev["k_upper_per_s"], expected, rtol=1e-9, atol=0.0)
    else:
        assert ev["k_upper_per_s"] is None


def test_clear_decline_is_not_excluded():
    k = 1e-6
    times_d = np.array([0, 1, 2, 4, 7, 14, 21, 30], dtype=float)
    fast = _series(10.0 * np.exp(-k * times_d * DAY_S * 0.1), times_d, t_C=50.0, pH=4.0, label="a")
    ev = _decline_evidence(fast)
    assert ev["significant"] is True


def test_excluded_run_keeps_order_and_reason():
    times_d = np.array([0, 1, 2, 4, 7, 14, 21, 30], dtype=float)
    noise = 1.0 + 0.02 * np.random.default_rng(7).standard_normal(times_d.size)
    decl = [
        _series(10.0 * np.exp(-k * times_d * DAY_S) * noise, times_d, t_C=t, pH=p, label=f"r{i}")
        for i, (k, t, p) in enumerate(((2e-7, 30.0, 4.0), (9e-7, 50.0, 4.0), (2e-6, 50.0, 9.0)))
    ]
    flat = _series([10.0, 10.0, 10.0, 10.0, 10.0, 10.0, 10.0, 10.0], times_d)
    res = compute_fit(
        [decl[0], flat, decl[1], decl[2]], temperature_model="arrhenius", pathways="auto",
        series_model="run", error_model="constant", ea_prior_J_per_mol=None,
        reference_temperature_K=298.15,
    )
    assert [d["status"] for d in res.runs] == ["fitted", "excluded", "fitted", "fitted"]
    assert res.surface.n_measurements == 3
    reason = res.runs[1]["exclusion_reason"]
    assert reason.startswith("no measurable decline over 30 d")
    # a constant series: the 10 % loss rule (common practice, no source)
    assert_allclose(res.runs[1]["k_upper_bound_per_s"], -math.log(0.9) / (30 * DAY_S), rtol=1e-12)
