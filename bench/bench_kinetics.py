"""Benchmarks of the numerical core: fitting, bulk prediction, Monte Carlo intervals.

Run with ``python bench/bench_kinetics.py``. Every figure is the median of several
repetitions, and each comparison is measured side by side in the same run because the
machines are shared and noisy. Nothing here asserts: it prints figures and ratios.
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _synthetic import T_REF_K, synthetic_runs  # noqa: E402

import kinetics  # noqa: E402
from kinetics import water  # noqa: E402
from kinetics.surface import (  # noqa: E402
    GAS_CONSTANT_J_PER_MOL_K,
    PATHWAYS,
    RateMeasurement,
    fit_surface,
)

R = GAS_CONSTANT_J_PER_MOL_K


#: Clock of every figure: wall time by default; ``--clock cpu`` uses the process CPU time
#: (all threads), which on a machine shared with other jobs leaves out the time spent
#: waiting for a core.
CLOCK = {"wall": time.perf_counter, "cpu": time.process_time}
_clock = CLOCK["wall"]


def median_time(fn, repeat=7, warmup=1):
    """Median time [s] of ``fn()`` over ``repeat`` calls after ``warmup`` calls."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeat):
        t0 = _clock()
        fn()
        times.append(_clock() - t0)
    return statistics.median(times)


def median_times(fns, repeat=7, warmup=1):
    """Median times [s] of several functions, called in turn within each repetition.

    Interleaving puts every function under the same passing load of a shared machine,
    so their ratio is steadier than that of two separately timed series.
    """
    for _ in range(warmup):
        for fn in fns:
            fn()
    times = [[] for _ in fns]
    for _ in range(repeat):
        for fn, acc in zip(fns, times):
            t0 = _clock()
            fn()
            acc.append(_clock() - t0)
    return [statistics.median(t) for t in times]


# --------------------------------------------------------------------------- fitting
def measurements(runs, fits, *, with_dof=False):
    if with_dof:
        return [RateMeasurement.from_series_fit(f, temperature_K=r["temperature_K"], pH=r["pH"])
                for r, f in zip(runs, fits)]
    return [RateMeasurement(temperature_K=r["temperature_K"], pH=r["pH"], k_per_s=f.k_per_s,
                            se_ln_k=f.se_ln_k)
            for r, f in zip(runs, fits)]


def fieldrate_two_stage(runs, pathways=PATHWAYS, with_dof=False):
    """Series fitted together (batched SFO), then the rate surface."""
    fits = kinetics.fit_sfo_batch([(r["time_s"], r["concentration"]) for r in runs], time_unit="s")
    return fit_surface(measurements(runs, fits, with_dof=with_dof), pathways=pathways)


def lmfit_two_stage(runs, tau2=0.0):
    """The same two-stage fit written the straightforward way with lmfit.

    An lmfit Model per series for SFO, then an lmfit Model for the surface on ln k with
    weights 1/SE. With ``tau2`` > 0 the weights are 1/sqrt(SE^2 + tau2): the weights of
    fieldrate's statistical model at its between-run variance, so that both fits solve the
    same weighted least-squares problem.
    """
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
    res = model.fit(ln_k, params, T=temp, weights=1.0 / np.sqrt(se**2 + tau2))
    v = res.params
    return np.array([v["lnA"].value, v["eA"].value * 1e3, v["lnN"].value, v["eN"].value * 1e3,
                     v["lnB"].value, v["eB"].value * 1e3])


def rel_diff(a, b):
    return float(np.max(np.abs(a - b) / np.abs(b)))


def bench_fitting(sizes):
    print("\n[3] Surface fit from raw series (10 points each), fixed acid+neutral+base, Arrhenius")
    print("    fieldrate: fit_sfo_batch + RateMeasurement + fit_surface (Paule-Mandel tau^2,")
    print("    Knapp-Hartung q); lmfit: one Model per series, then the surface with weights")
    print("    1/SE. Agreement 'same weights': lmfit given fieldrate's final weights")
    print("    1/sqrt(SE^2 + tau^2) (identical problem); 'plain 1/SE': lmfit as written (differs")
    print("    by the statistical model wherever tau^2 > 0).")
    print(f"{'runs':>6} {'fieldrate ms':>13} {'lmfit ms':>10} {'speed-up':>9} "
          f"{'tau^2':>9} {'same weights':>13} {'plain 1/SE':>11}")
    for n in sizes:
        runs = synthetic_runs(n)
        ours = fieldrate_two_stage(runs)
        tau2 = ours.between_run_sd_ln_k ** 2
        rep_lm = 3 if n > 100 else 7
        try:
            same = rel_diff(ours.estimates, lmfit_two_stage(runs, tau2))
            plain = rel_diff(ours.estimates, lmfit_two_stage(runs))
            t_ours, t_lm = median_times([lambda: fieldrate_two_stage(runs),
                                         lambda: lmfit_two_stage(runs)], repeat=rep_lm)
        except ImportError:
            same = plain = t_lm = float("nan")
            t_ours = median_time(lambda: fieldrate_two_stage(runs), repeat=7)
        print(f"{n:>6} {t_ours * 1e3:>13.2f} {t_lm * 1e3:>10.2f} {t_lm / t_ours:>8.1f}x "
              f"{tau2:>9.2e} {same:>13.1e} {plain:>11.1e}")
    runs = synthetic_runs(50)
    t_fixed = median_time(lambda: fieldrate_two_stage(runs), repeat=7)
    t_auto = median_time(lambda: fieldrate_two_stage(runs, pathways="auto"), repeat=5)
    t_dof = median_time(lambda: fieldrate_two_stage(runs, pathways="auto", with_dof=True),
                        repeat=5)
    print(f"  50 runs: fixed {t_fixed * 1e3:.1f} ms; with pathway selection by AICc (all 7 "
          f"subsets) {t_auto * 1e3:.1f} ms;\n  the same with moderated SEs (se_dof) "
          f"{t_dof * 1e3:.1f} ms")
    fit = fieldrate_two_stage(runs)
    blob = fit.to_dict()
    t_restore = median_time(lambda: kinetics.SurfaceFit.from_dict(blob), repeat=20)
    t_json = median_time(lambda: kinetics.SurfaceFit.from_dict(json.loads(json.dumps(blob))),
                         repeat=20)
    print(f"  cached fit reuse, 50 runs: SurfaceFit.from_dict {t_restore * 1e3:.3f} ms "
          f"(from JSON text {t_json * 1e3:.3f} ms); target < 2 ms")


# --------------------------------------------------------------------------- prediction
def plain_numpy_delta(theta, cov, t_K, ph, tq, sigma_run):
    """The three-pathway formula with its delta-method interval, written directly.

    Same water chemistry as fieldrate (kinetics.water.hydronium_hydroxide_molar), so the
    comparison measures the kinetics code, not a simpler ion product.
    """
    h, oh = water.hydronium_hydroxide_molar(ph, t_K)
    ln_h, ln_oh = np.log(h), np.log(oh)
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


def broadcast_ln_k_draws(fit, t_K, ph, draws):
    """ln k of many parameter sets by plain broadcasting, (n_draws, 3, n) terms at once."""
    h, oh = water.hydronium_hydroxide_molar(ph, t_K)
    lnc = np.stack([np.log(h), np.zeros_like(h), np.log(oh)])
    u = T_REF_K / t_K - 1.0
    a, e = draws[:, 0::2], draws[:, 1::2] / (R * T_REF_K)
    terms = a[:, :, None] + lnc[None, :, :] - e[:, :, None] * u[None, None, :]
    top = terms.max(axis=1)
    return top + np.log(np.exp(terms - top[:, None, :]).sum(axis=1))


def bench_prediction(sizes, mc_sizes):
    from scipy import stats

    fit = fieldrate_two_stage(synthetic_runs(27))
    tq = stats.t.ppf(0.975, fit.dof)
    print("\n[2] Bulk prediction, delta-method intervals (kinetics part only); reference: the")
    print("    same formula and interval in plain numpy with the same water chemistry")
    print(f"{'conditions':>11} {'predict ms':>11} {'plain numpy ms':>15} {'ratio':>6} "
          f"{'conditions/s':>13}")
    for n in sizes:
        t_K, ph = conditions(n)
        rep = 5 if n >= 1_000_000 else 11
        t_pred, t_np = median_times([
            lambda: kinetics.predict(fit, t_K, ph),
            lambda: plain_numpy_delta(fit.estimates, fit.covariance, t_K, ph, tq,
                                      fit.residual_scale)], repeat=rep)
        print(f"{n:>11} {t_pred * 1e3:>11.2f} {t_np * 1e3:>15.2f} {t_pred / t_np:>6.2f} "
              f"{n / t_pred:>13.3g}")
    t_K, ph = conditions(1000)
    pred = kinetics.predict(fit, t_K, ph)
    k, ci, pi, _ = plain_numpy_delta(fit.estimates, fit.covariance, t_K, ph, tq, fit.residual_scale)
    d_k = np.max(np.abs(pred.k_per_s / k - 1))
    d_ci = np.max(np.abs(pred.k_ci_low_per_s / ci[0] - 1))
    d_pi = np.max(np.abs(pred.k_pi_high_per_s / pi[1] - 1))
    print(f"  agreement with plain numpy: max rel diff k {d_k:.1e}, CI low {d_ci:.1e}, "
          f"PI high {d_pi:.1e}")

    print("\n[6] Monte Carlo intervals: 10,000 multivariate-t parameter draws (target < 0.3 s")
    print("    for 1,000 conditions)")
    for n in mc_sizes:
        t_K, ph = conditions(n)
        t_mc = median_time(lambda: kinetics.predict(fit, t_K, ph, method="montecarlo",
                                                    n_draws=10000, seed=1), repeat=5)
        print(f"  {n:>6} conditions: {t_mc * 1e3:8.1f} ms")

    print("\n    SurfaceFit.ln_k(..., parameters=draws), 10,000 draws (used by scenarios): one")
    print("    outer product per pathway vs plain broadcasting of the (draws, pathways,")
    print("    conditions) terms with a max-shifted log-sum-exp")
    draws = fit.sample_parameters(10000, np.random.default_rng(3))
    for n in mc_sizes:
        t_K, ph = conditions(n)
        t_ours, t_bc = median_times([lambda: fit.ln_k(t_K, ph, parameters=draws),
                                     lambda: broadcast_ln_k_draws(fit, t_K, ph, draws)],
                                    repeat=3)
        diff = np.max(np.abs(fit.ln_k(t_K, ph, parameters=draws)
                             - broadcast_ln_k_draws(fit, t_K, ph, draws)))
        print(f"  {n:>6} conditions: {t_ours * 1e3:8.1f} ms (broadcasting {t_bc * 1e3:8.1f} ms, "
              f"max abs diff in ln k {diff:.1e})")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="smaller sizes, fewer repetitions")
    parser.add_argument("--clock", choices=tuple(CLOCK), default="wall",
                        help="wall time (default) or process CPU time")
    args = parser.parse_args(argv)
    global _clock
    _clock = CLOCK[args.clock]
    print(f"fieldrate kinetics benchmarks (numpy {np.__version__}, {args.clock} clock, "
          f"medians of repetitions)")
    fit_sizes = (10, 50, 500)
    pred_sizes = (1_000, 10_000, 100_000, 1_000_000) if not args.quick else (1_000, 10_000,
                                                                               100_000)
    mc_sizes = (100, 1000, 10000) if not args.quick else (100, 1000)
    bench_fitting(fit_sizes)
    bench_prediction(pred_sizes, mc_sizes)


if __name__ == "__main__":
    main()
