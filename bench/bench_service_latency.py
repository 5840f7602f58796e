"""Request latency of the prediction endpoint: one condition and 100,000 conditions.

Measured in-process through the ASGI app (httpx.ASGITransport) and through a real uvicorn
process on a loopback port, on a fresh SQLite database holding the invented demo scenario.
The fit is cached before timing starts, so the figures are those of predictions.

    python bench/bench_service_latency.py [--repeats 5]
"""

from __future__ import annotations

import argparse
import asyncio
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

import httpx
import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
sys.path.insert(0, str(REPO / "bench"))

from bench_http import Server  # noqa: E402  (the uvicorn process helper shared by the benchmarks)

from service.config import Settings  # noqa: E402
from service.demo import load_demo  # noqa: E402
from service.main import create_app  # noqa: E402
from service.migrate import upgrade_head  # noqa: E402
from service.security import issue_key  # noqa: E402

N_BIG = 100_000


def _bodies() -> dict[str, dict]:
    rng = np.random.default_rng(2026)
    t_C = np.round(rng.uniform(1.0, 35.0, N_BIG), 2).tolist()
    ph = np.round(rng.uniform(5.0, 9.5, N_BIG), 2).tolist()
    return {
        "1 condition (rows)": {"conditions": [{"temperature_C": 12.0, "pH": 8.3, "ionic_strength_M": 0.005}]},
        "100k conditions, columns in, columns out": {"columns": {"temperature_C": t_C, "pH": ph}, "layout": "columns"},
        "100k conditions, columns in, rows out": {"columns": {"temperature_C": t_C, "pH": ph}, "layout": "rows"},
        "100k conditions, objects in, rows out": {
            "conditions": [{"temperature_C": a, "pH": b} for a, b in zip(t_C, ph)], "layout": "rows"},
    }


def _report(where: str, name: str, times: list[float], size: int) -> None:
    print(f"{where:8s} {name:42s} median {statistics.median(times) * 1000:9.1f} ms"
          f"  min {min(times) * 1000:9.1f} ms  response {size / 1e6:7.2f} MB")


async def _asgi(settings: Settings, headers: dict, bodies: dict, repeats: int) -> None:
    app = create_app(settings)
    transport = httpx.ASGITransport(app=app)
    async with httpx.AsyncClient(transport=transport, base_url="http://bench", headers=headers, timeout=600) as c:
        await c.get("/v1/substances/1/model")  # fill the fit cache
        for name, body in bodies.items():
            times, size = [], 0
            for _ in range(repeats):
                t0 = time.perf_counter()
                r = await c.post("/v1/substances/1/predictions", json=body)
                times.append(time.perf_counter() - t0)
                assert r.status_code == 200, r.text[:500]
                size = len(r.content)
            _report("ASGI", name, times, size)


def _uvicorn(settings: Settings, headers: dict, bodies: dict, repeats: int) -> None:
    with Server("service.main:app_from_env", {"FIELDRATE_DATABASE_URL": settings.database_url},
                factory=True) as server:
        with httpx.Client(base_url=server.url, headers=headers, timeout=600) as c:
            c.get("/v1/substances/1/model")
            for name, body in bodies.items():
                times, size = [], 0
                for _ in range(repeats):
                    t0 = time.perf_counter()
                    r = c.post("/v1/substances/1/predictions", json=body)
                    times.append(time.perf_counter() - t0)
                    assert r.status_code == 200, r.text[:500]
                    size = len(r.content)
                _report("uvicorn", name, times, size)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        settings = Settings(database_url=f"sqlite:///{Path(tmp) / 'bench.db'}")
        upgrade_head(settings.database_url)
        load_demo(settings)
        from service.db import make_engine, make_session_factory

        engine = make_engine(settings.database_url)
        _, secret = issue_key(make_session_factory(engine), label="bench (invented)", scopes="read", actor="bench")
        engine.dispose()
        headers = {"Authorization": f"Bearer {secret}"}
        bodies = _bodies()
        print(f"{os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.1f}; {args.repeats} repeats")
        asyncio.run(_asgi(settings, headers, bodies, args.repeats))
        _uvicorn(settings, headers, bodies, args.repeats)


if __name__ == "__main__":
    main()
