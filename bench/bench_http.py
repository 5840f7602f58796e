"""Benchmarks through a real uvicorn server on loopback: predictions and ingestion.

Run with ``python bench/bench_http.py``. The service runs on a temporary SQLite
database (and on PostgreSQL when ``FIELDRATE_BENCH_POSTGRES_URL`` is set) with the invented
demo scenario; a bare FastAPI endpoint runs beside it in the same process setup so every
figure has its yardstick measured in the same run. Nothing here asserts.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import socket
import statistics
import subprocess
import sys
import tempfile
import time
import uuid
from pathlib import Path

import httpx
import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))

from _synthetic import synthetic_runs  # noqa: E402


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Server:
    """A uvicorn process on a free loopback port, stopped on exit."""

    def __init__(self, app: str, env: dict, factory: bool = False):
        self.port = free_port()
        cmd = [sys.executable, "-m", "uvicorn", app, "--host", "127.0.0.1", "--port",
               str(self.port), "--log-level", "warning", "--no-access-log"]
        if factory:
            cmd.append("--factory")
        self.proc = subprocess.Popen(cmd, cwd=str(HERE if not factory else ROOT),
                                     env={**os.environ, **env})
        self.url = f"http://127.0.0.1:{self.port}"
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            try:
                httpx.get(self.url + "/docs", timeout=1.0)
                return
            except httpx.HTTPError:
                time.sleep(0.2)
        self.stop()
        raise RuntimeError(f"server {app} did not start")

    def stop(self):
        self.proc.terminate()
        try:
            self.proc.wait(10)
        except subprocess.TimeoutExpired:
            self.proc.kill()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.stop()


def prepare_database(url: str) -> str:
    """Upgrade ``url``, load the invented demo data, return an admin API key."""
    env = {**os.environ, "FIELDRATE_DATABASE_URL": url}
    code = (
        "from service.config import Settings\n"
        "from service.migrate import upgrade_head\n"
        "from service.demo import load_demo\n"
        "s = Settings(); upgrade_head(s.database_url); load_demo(s)\n"
    )
    subprocess.run([sys.executable, "-c", code], env=env, check=True, cwd=str(ROOT))
    out = subprocess.run(
        [sys.executable, "-m", "service.cli", "keys", "create", "--label", "benchmark",
         "--scopes", "admin"], env=env, check=True, capture_output=True, text=True, cwd=str(ROOT),
    ).stdout
    return out.strip().splitlines()[-1].split()[-1]


def latency_run(client: httpx.Client, path: str, body: dict, headers: dict, seconds: float):
    """Sequential requests for ``seconds``: (requests/s, p50 ms, p99 ms)."""
    for _ in range(20):
        client.post(path, json=body, headers=headers).raise_for_status()
    lat = []
    t_end = time.perf_counter() + seconds
    while time.perf_counter() < t_end:
        t0 = time.perf_counter()
        r = client.post(path, json=body, headers=headers)
        lat.append(time.perf_counter() - t0)
        r.raise_for_status()
    lat = np.array(lat)
    return len(lat) / lat.sum(), np.percentile(lat, 50) * 1e3, np.percentile(lat, 99) * 1e3


def substance_id(client, headers):
    r = client.get("/v1/substances", headers=headers, params={"limit": 10})
    r.raise_for_status()
    return r.json()["items"][0]["id"]


def bench_single(service, bare, key, seconds, repeats):
    headers = {"Authorization": f"Bearer {key}"}
    with httpx.Client(base_url=service.url, timeout=60) as c, \
            httpx.Client(base_url=bare.url, timeout=60) as b:
        sid = substance_id(c, headers)
        path = f"/v1/substances/{sid}/predictions"
        body = {"conditions": [{"temperature_C": 12.0, "pH": 8.3}]}
        c.post(path, json=body, headers=headers).raise_for_status()  # warm the fit cache
        rows = []
        for _ in range(repeats):  # interleave so both see the same machine load
            rows.append((latency_run(c, path, body, headers, seconds),
                         latency_run(b, "/constant", {}, {}, seconds)))
    ours = [r[0] for r in rows]
    theirs = [r[1] for r in rows]
    med = lambda xs, i: statistics.median(x[i] for x in xs)  # noqa: E731
    print("\n[1] Single-prediction requests, sequential keep-alive client, one uvicorn worker")
    print(f"  fieldrate prediction: {med(ours, 0):8.0f} req/s  p50 {med(ours, 1):6.2f} ms  "
          f"p99 {med(ours, 2):6.2f} ms")
    print(f"  bare FastAPI constant: {med(theirs, 0):7.0f} req/s  p50 {med(theirs, 1):6.2f} ms  "
          f"p99 {med(theirs, 2):6.2f} ms")
    print(f"  ratio fieldrate / bare: {med(ours, 0) / med(theirs, 0):.2f} (target >= 0.5)")


def bench_bulk(service, key, sizes, repeats):
    headers = {"Authorization": f"Bearer {key}"}
    rng = np.random.default_rng(3)
    print("\n[2] Bulk prediction over HTTP, delta-method intervals, columns in and rows out")
    print(f"{'conditions':>11} {'end-to-end s':>13} {'response MB':>12} {'conditions/s':>13}")
    with httpx.Client(base_url=service.url, timeout=300) as c:
        sid = substance_id(c, headers)
        path = f"/v1/substances/{sid}/predictions"
        for n in sizes:
            body = {"columns": {"temperature_C": rng.uniform(2, 35, n).round(2).tolist(),
                                "pH": rng.uniform(5, 9.5, n).round(2).tolist()}}
            payload = json.dumps(body).encode()
            times, size = [], 0
            for _ in range(repeats):
                t0 = time.perf_counter()
                r = c.post(path, content=payload,
                           headers={**headers, "Content-Type": "application/json"})
                data = r.content
                times.append(time.perf_counter() - t0)
                r.raise_for_status()
                size = len(data)
            t = statistics.median(times)
            print(f"{n:>11} {t:>13.3f} {size / 1e6:>12.1f} {n / t:>13.3g}")
        for layout in ("columns",):
            n = 100_000
            body = {"layout": layout,
                    "columns": {"temperature_C": rng.uniform(2, 35, n).round(2).tolist(),
                                "pH": rng.uniform(5, 9.5, n).round(2).tolist()}}
            payload = json.dumps(body).encode()
            times = []
            for _ in range(repeats):
                t0 = time.perf_counter()
                r = c.post(path, content=payload, headers={**headers, "Content-Type": "application/json"})
                _ = r.content
                times.append(time.perf_counter() - t0)
                r.raise_for_status()
            print(f"  100000 conditions, layout={layout}: {statistics.median(times):.3f} s end-to-end")


def run_payload(run, study_id, i):
    return {
        "study_id": study_id,
        "temperature_K": float(run["temperature_K"]),
        "pH": float(run["pH"]),
        "buffer": "invented benchmark buffer",
        "replicate_label": f"bench-{i}",
        "series": {
            "time_unit": "s",
            "concentration_unit": "mg/L",
            "time": [float(t) for t in run["time_s"]],
            "concentration": [float(c) for c in run["concentration"]],
        },
    }


def bench_ingest(service, key, sizes, label):
    headers = {"Authorization": f"Bearer {key}"}
    print(f"\n[4] Ingestion into {label}: one all-or-nothing batch of runs x 10 observations")
    print(f"{'runs':>7} {'seconds':>9} {'runs/s':>9}")
    with httpx.Client(base_url=service.url, timeout=600) as c:
        r = c.post("/v1/substances", headers=headers,
                   json={"name": f"Benchmarkium {label} {time.time_ns()} (invented)"})
        r.raise_for_status()
        sub = r.json()["id"]
        r = c.post("/v1/studies", headers=headers,
                   json={"substance_id": sub, "laboratory": "Invented Bench Lab",
                         "test_guideline": "OECD 111", "glp": False})
        r.raise_for_status()
        study = r.json()["id"]
        for n in sizes:
            runs = synthetic_runs(n, seed=n)
            body = {"runs": [run_payload(run, study, f"{n}-{i}") for i, run in enumerate(runs)]}
            payload = json.dumps(body).encode()
            t0 = time.perf_counter()
            r = c.post("/v1/runs/batch", content=payload,
                       headers={**headers, "Content-Type": "application/json"})
            t = time.perf_counter() - t0
            if r.status_code >= 300:
                print(f"  batch of {n} failed: {r.status_code} {r.text[:300]}")
                continue
            print(f"{n:>7} {t:>9.3f} {n / t:>9.0f}")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="shorter runs, smaller sizes")
    parser.add_argument("--only", default="single,bulk,ingest",
                        help="comma-separated parts to run: single, bulk, ingest")
    args = parser.parse_args(argv)
    parts = set(args.only.split(","))
    seconds, repeats = (1.0, 3) if args.quick else (3.0, 5)
    ingest_sizes = (100, 1_000) if args.quick else (100, 1_000, 5_000)
    print(f"{os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.1f}")
    with tempfile.TemporaryDirectory() as tmp:
        url = f"sqlite:///{tmp}/bench.db"
        key = prepare_database(url)
        env = {"FIELDRATE_DATABASE_URL": url}
        with Server("service.main:app_from_env", env, factory=True) as service, \
                Server("_bare_app:app", {}) as bare:
            if "single" in parts:
                bench_single(service, bare, key, seconds, repeats)
            if "bulk" in parts:
                bench_bulk(service, key, (1_000, 10_000, 100_000), 3)
            if "ingest" in parts:
                bench_ingest(service, key, ingest_sizes, "SQLite")
    pg = os.environ.get("FIELDRATE_BENCH_POSTGRES_URL")
    if pg and "ingest" in parts:
        with postgres_schema(pg) as url:
            key = prepare_database(url)
            with Server("service.main:app_from_env", {"FIELDRATE_DATABASE_URL": url},
                        factory=True) as service:
                bench_ingest(service, key, ingest_sizes, "PostgreSQL")


@contextlib.contextmanager
def postgres_schema(base_url: str):
    """A fresh schema on the PostgreSQL server of ``base_url``, dropped afterwards."""
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    schema = f"fr_bench_{uuid.uuid4().hex[:12]}"
    admin = create_engine(make_url(base_url).difference_update_query(["options"]))
    with admin.begin() as conn:
        conn.execute(text(f'CREATE SCHEMA "{schema}"'))
    url = make_url(base_url).update_query_dict({"options": f"-csearch_path={schema}"})
    try:
        yield url.render_as_string(hide_password=False)
    finally:
        with admin.begin() as conn:
            conn.execute(text(f'DROP SCHEMA IF EXISTS "{schema}" CASCADE'))
        admin.dispose()


if __name__ == "__main__":
    main()
