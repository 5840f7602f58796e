"""Wall time of scenario runs (fraction remaining with Monte Carlo bands).

Prints, for the two invented demo water bodies and an invented surface fitted to the
invented "Veltrazine (invented)" demo runs, the integration grid size, its error estimate
and the time per call for 0, 1000 and 5000 parameter draws. No assertions: machines are
noisy, and the figures are for reading.

    python bench/bench_scenarios.py
"""

from __future__ import annotations

import json
import time
from pathlib import Path

from kinetics.scenarios import run_scenario, scenario_from_dict
from service.demo import demo_payloads
from service.fitting import compute_fit, run_input_from_payload
from service.schemas import FitOptions, RunData

DEMO = Path(__file__).resolve().parent.parent / "service" / "demo_scenarios.json"


def main() -> None:
    runs = [RunData.model_validate(r) for r in demo_payloads()[0]["runs"]]
    fit = compute_fit([run_input_from_payload(r, i) for i, r in enumerate(runs)],
                      **FitOptions().kinetics_kwargs()).surface
    scenarios = json.loads(DEMO.read_text(encoding="utf-8"))["scenarios"]
    print(f"{'scenario':32s} {'draws':>6s} {'grid':>7s} {'err':>9s} {'seconds':>8s}")
    for d in scenarios.values():
        sc = scenario_from_dict(d)
        for n in (0, 1000, 5000):
            t0 = time.perf_counter()
            res = run_scenario(fit, sc, n_draws=n, seed=1)
            dt = time.perf_counter() - t0
            print(f"{sc.name:32s} {n:6d} {res.integration_points:7d} "
                  f"{res.integration_rel_error:9.1e} {dt:8.2f}")


if __name__ == "__main__":
    main()
