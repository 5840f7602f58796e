"""Timings of the CSV exchange and the report (prints figures; asserts nothing).

Generates invented runs (one invented substance, pH 4/7/9 at several temperatures,
8 points per run), then times: reading and validating the CSV, storing it in a fresh
SQLite database, exporting the runs again, and building and rendering the HTML report.

Run: python bench/bench_exchange.py [n_runs ...]   (default 90 900 9000)
"""

from __future__ import annotations

import datetime as dt
import math
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))


def invented_csv(n_runs: int) -> str:
    """CSV text of ``n_runs`` invented runs of 'Benchazine (invented)'."""
    lines = ["# INVENTED benchmark data",
             "substance,laboratory,run,temperature_C,pH,time_d,concentration_mg_per_L"]
    temps = (10, 20, 30, 40, 50, 60)
    for i in range(n_runs):
        t_C = temps[i % len(temps)]
        pH = (4, 7, 9)[(i // len(temps)) % 3]
        k_d = 0.02 * math.exp(0.07 * (t_C - 20)) * (1 + 0.5 * abs(pH - 7))
        for t in (0, 1, 2, 4, 7, 10, 14, 21):
            c = 10.0 * math.exp(-k_d * t) * (1 + 0.01 * math.sin(7 * i + t))
            lines.append(f"Benchazine (invented),Bench Lab (invented),R{i},{t_C},{pH},{t},{c:.4f}")
    return "\n".join(lines) + "\n"


def main(sizes: list[int]) -> None:
    from service import csv_io, report
    from service.db import make_engine, make_session_factory, session_scope
    from service.migrate import upgrade_head

    print(f"{'runs':>6} {'rows':>7} {'parse [s]':>10} {'store [s]':>10} {'export [s]':>11} "
          f"{'report [s]':>11} {'report [kB]':>12}")
    for n in sizes:
        text = invented_csv(n)
        t0 = time.perf_counter()
        runs = csv_io.parse_runs_csv(text.splitlines())
        t_parse = time.perf_counter() - t0
        with tempfile.TemporaryDirectory() as folder:
            url = f"sqlite:///{Path(folder) / 'bench.db'}"
            upgrade_head(url)
            engine = make_engine(url)
            factory = make_session_factory(engine)
            t0 = time.perf_counter()
            with session_scope(factory, write=True) as session:
                summary = csv_io.store_runs(session, runs, actor="bench", max_points=10_000)
            t_store = time.perf_counter() - t0
            sid = summary.substance_ids["Benchazine (invented)"]
            t0 = time.perf_counter()
            with factory() as session:
                stored = report.runs_as_of(session, sid, None)
                from service.models import Study
                study = session.get(Study, stored[0].study_id)
                back = [csv_io.csv_run_from_stored(r, substance="Benchazine (invented)",
                                                   study=study) for r in stored]
            csv_io.runs_to_csv(back)
            t_export = time.perf_counter() - t0
            t0 = time.perf_counter()
            data = report.gather(factory, sid, field_temperature_K=285.15,
                                 now=dt.datetime.now(dt.timezone.utc))
            page = report.render_report(data)
            t_report = time.perf_counter() - t0
            engine.dispose()
        print(f"{n:>6} {len(text.splitlines()):>7} {t_parse:>10.3f} {t_store:>10.3f} "
              f"{t_export:>11.3f} {t_report:>11.3f} {len(page) / 1024:>12.0f}")


if __name__ == "__main__":
    main([int(a) for a in sys.argv[1:]] or [90, 900, 9000])
