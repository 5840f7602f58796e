"""Benchmarks of the numerical core: fitting, bulk prediction, Monte Carlo intervals.

Run with ``python bench/bench_kinetics.py``. Every figure is the median of several
repetitions, and each comparison is measured side by side in the same run because the
machines are shared and noisy. Nothing here asserts: it prints figures and ratios.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _synthetic import T_REF_K, synthetic_runs  # noqa: E402

import kinetics  # noqa: E402
from kinetics import water  # noqa: E402
from kinetics.surface import GAS_CONSTANT_J_PER_MOL_K, RateMeasurement, fit_surface  # noqa: E402

R = GAS_CONSTANT_J_PER_MOL_K
PATHWAYS = ("acid", "neutral", "base")


def median_time(fn, repeat=7, warmup=1):
    """Median wall time [s] of ``fn()`` over ``repeat`` calls after ``warmup`` calls."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


# --------------------------------------------------------------------------- fitting
def fieldrate_two_stage(runs):
    fits = kinetics.fit_sfo_batch([(r["time_s"], r["concentration"]) for r in runs], time_unit="s")
    meas = [
        RateMeasurement(temperature_K=r["temperature_K"], pH=r["pH"], k_per_s=f.k_per_s,
                        se_ln_k=f.se_ln_k)
        for r, f in zip(runs, fits)
    ]
    return fit_surface(meas, pathways=PATHWAYS)


def lmfit_two_stage(runs):
    """The same two-stage fit written the straightforward way with lmfit."""
    import lmfit

    sfo = lmfit.Model(lambda t, c0, k: c0 * np.exp(-k * t), independent_vars=["t"])
    ln_k, se = [], []
    for r in runs:
        t, c = r["time_s"], r["concentration"]
        slope = np.polyfit(t, np.log(np.clip(c, 1e-12, None)), 1)[0]
        params = sfo.make_params(c0=c[0], k=max(-slope, 1e-12))
        res = sfo.fit(c, params, t=t)
        k = res.params["k"].value
        ln_k.append(np.log(k))
        se.append(res.params["k"].stderr / k)
    ln_k, se = np.array(ln_k), np.array(se)
    temp = np.array([r["temperature_K"] for r in runs])
    ph = np.array([r["pH"] for r in runs])
    h, oh = water.hydronium_hydroxide_molar(ph, temp)

    def surface(T, lnA, eA, lnN, eN, lnB, eB):
        inv = 1.0 / T - 1.0 / T_REF_K
        return np.log(np.exp(lnA - eA * 1e3 / R * inv) * h + np.exp(lnN - eN * 1e3 / R * inv)
                      + np.exp(lnB - eB * 1e3 / R * inv) * oh)

    model = lmfit.Model(surface, independent_vars=["T"])
    params = model.make_params(lnA=np.log(1e-3), eA=70.0, lnN=np.log(1e-8), eN=80.0,
                               lnB=np.log(1e-2), eB=60.0)
    res = model.fit(ln_k, params, T=temp, weights=1.0 / se)
    v = res.params
    return np.array([v["lnA"].value, v["eA"].value * 1e3, v["lnN"].value, v["eN"].value * 1e3,
                     v["lnB"].value, v["eB"].value * 1e3])


def bench_fitting(sizes):
    print("\n[3] Surface fit from raw series (10 points each), fixed acid+neutral+base, Arrhenius")
    print(f"{'runs':>6} {'fieldrate ms':>13} {'lmfit ms':>10} {'speed-up':>9} {'max rel diff':>13}")
    for n in sizes:
        runs = synthetic_runs(n)
        ours = fieldrate_two_stage(runs)
        try:
            theirs = lmfit_two_stage(runs)
            diff = np.max(np.abs(ours.estimates - theirs) / np.abs(theirs))
            t_lm = median_time(lambda: lmfit_two_stage(runs), repeat=3)
        except ImportError:
            diff, t_lm = float("nan"), float("nan")
        t_ours = median_time(lambda: fieldrate_two_stage(runs), repeat=5)
        print(f"{n:>6} {t_ours * 1e3:>13.2f} {t_lm * 1e3:>10.2f} {t_lm / t_ours:>8.1f}x {diff:>13.2e}")
    runs = synthetic_runs(50)
    auto = median_time(lambda: kinetics.fit_surface(
        [RateMeasurement(temperature_K=r["temperature_K"], pH=r["pH"], k_per_s=f.k_per_s,
                         se_ln_k=f.se_ln_k)
         for r, f in zip(runs, kinetics.fit_sfo_batch(
             [(r["time_s"], r["concentration"]) for r in runs], time_unit="s"))]), repeat=3)
    print(f"  with pathway selection by AICc (all subsets), 50 runs: {auto * 1e3:.1f} ms")
    fit = fieldrate_two_stage(runs)
    blob = fit.to_dict()
    t_restore = median_time(lambda: kinetics.SurfaceFit.from_dict(blob), repeat=20)
    print(f"  restoring a cached fit (SurfaceFit.from_dict): {t_restore * 1e3:.3f} ms")


# --------------------------------------------------------------------------- prediction
def plain_numpy_delta(theta, cov, t_K, ph, tq, sigma_run):
    """The three-pathway formula with its delta-method interval, written directly."""
    pkw = water.pKw(t_K)
    ln_h = -ph * np.log(10.0)
    ln_oh = (ph - pkw) * np.log(10.0)
    inv = 1.0 / t_K - 1.0 / T_REF_K
    a = theta[0] - theta[1] / R * inv + ln_h
    n = theta[2] - theta[3] / R * inv
    b = theta[4] - theta[5] / R * inv + ln_oh
    m = np.maximum(np.maximum(a, n), b)
    ea, en, eb = np.exp(a - m), np.exp(n - m), np.exp(b - m)
    s = ea + en + eb
    ln_k = m + np.log(s)
    wa, wn, wb = ea / s, en / s, eb / s
    jac = np.stack([wa, -wa * inv / R, wn, -wn * inv / R, wb, -wb * inv / R], axis=1)
    se = np.sqrt(np.einsum("ij,jk,ik->i", jac, cov, jac))
    k = np.exp(ln_k)
    ci = np.exp(ln_k - tq * se), np.exp(ln_k + tq * se)
    pi_se = np.sqrt(se**2 + sigma_run**2)
    pi = np.exp(ln_k - tq * pi_se), np.exp(ln_k + tq * pi_se)
    dt50 = np.log(2.0) / k
    return k, ci, pi, dt50


def conditions(n, seed=7):
    rng = np.random.default_rng(seed)
    return rng.uniform(275.0, 308.0, n), rng.uniform(5.0, 9.5, n)


def bench_prediction(sizes):
    from scipy import stats

    fit = fieldrate_two_stage(synthetic_runs(27))
    tq = stats.t.ppf(0.975, fit.dof)
    print("\n[2] Bulk prediction, delta-method intervals (kinetics part only)")
    print(f"{'conditions':>11} {'predict ms':>11} {'plain numpy ms':>15} {'ratio':>6} {'conditions/s':>13}")
    for n in sizes:
        t_K, ph = conditions(n)
        t_pred = median_time(lambda: kinetics.predict(fit, t_K, ph), repeat=5)
        t_np = median_time(lambda: plain_numpy_delta(fit.estimates, fit.covariance, t_K, ph, tq,
                                                     fit.residual_scale), repeat=5)
        print(f"{n:>11} {t_pred * 1e3:>11.2f} {t_np * 1e3:>15.2f} {t_pred / t_np:>6.2f} "
              f"{n / t_pred:>13.3g}")
    t_K, ph = conditions(1000)
    pred = kinetics.predict(fit, t_K, ph)
    k, ci, pi, _ = plain_numpy_delta(fit.estimates, fit.covariance, t_K, ph, tq, fit.residual_scale)
    print(f"  agreement with plain numpy: max rel diff k {np.max(np.abs(pred.k_per_s / k - 1)):.1e}, "
          f"CI low {np.max(np.abs(pred.k_ci_low_per_s / ci[0] - 1)):.1e}")

    print("\n[6] Monte Carlo intervals: 10,000 parameter draws")
    for n in (100, 1000, 10000):
        t_K, ph = conditions(n)
        t_mc = median_time(lambda: kinetics.predict(fit, t_K, ph, method="montecarlo",
                                                    n_draws=10000, seed=1), repeat=3)
        print(f"  {n:>6} conditions: {t_mc * 1e3:8.1f} ms")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="smaller sizes, fewer repetitions")
    args = parser.parse_args(argv)
    print(f"fieldrate kinetics benchmarks (numpy {np.__version__})")
    fit_sizes = (10, 50, 500) if not args.quick else (10, 50)
    pred_sizes = (1_000, 10_000, 100_000, 1_000_000) if not args.quick else (1_000, 100_000)
    bench_fitting(fit_sizes)
    bench_prediction(pred_sizes)


if __name__ == "__main__":
    main()
