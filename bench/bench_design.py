"""Benchmark of kinetics.design: how long a recommendation and a simulated study take.

Prints wall-clock figures; no thresholds (machines differ). The substance, laboratory and
pond are invented.

    python bench/bench_design.py
"""

from __future__ import annotations

import math
import time

from kinetics import design

DAY = 86400.0

PRIOR = design.KineticsPrior(
    pathways=(
        design.PathwayGuess("neutral", ln_k_ref=math.log(1e-8), Ea_J_per_mol=80_000.0),
        design.PathwayGuess("base", ln_k_ref=math.log(0.5), Ea_J_per_mol=60_000.0,
                            Ea_sd_J_per_mol=10_000.0),
    ),
    label="Veltrazine (invented ester)",
)
FIELD = design.FieldCondition(285.15, 8.0, label="invented farm pond")


def lab(n_vessels: int) -> design.LabConstraints:
    return design.LabConstraints(
        allowed_temperatures_K=(293.15, 298.15, 303.15, 313.15, 323.15),
        allowed_pH=(4.0, 7.0, 9.0), max_duration_s=30 * DAY, n_vessels=n_vessels,
        samples_per_vessel=8, analytical_error_percent=3.0,
    )


def main() -> None:
    print(f"{'vessels':>8} {'search':>11} {'allocations':>12} {'seconds':>8} {'width':>6}")
    for n in (6, 10, 14, 20):
        t0 = time.perf_counter()
        rec = design.recommend_design(PRIOR, FIELD, lab(n), target_width_ratio=1.5)
        dt = time.perf_counter() - t0
        kind = "exhaustive" if rec.search_method.startswith("exhaustive") else "exchange"
        print(f"{n:8d} {kind:>11} {rec.n_designs_evaluated:12d} {dt:8.2f} "
              f"{rec.width_ratio[0]:6.2f}")
    rec = design.recommend_design(PRIOR, FIELD, lab(10), target_width_ratio=1.5)
    n_studies = 50
    t0 = time.perf_counter()
    sim = design.simulate_design(rec.runs, PRIOR, FIELD, lab(10), n_studies=n_studies, seed=1)
    dt = time.perf_counter() - t0
    print(f"simulate_design: {1000 * dt / n_studies:.1f} ms per simulated study of 10 vessels "
          f"(median width {sim.median_width_ratio:.2f}, predicted {sim.predicted_width_ratio:.2f})")


if __name__ == "__main__":
    main()
