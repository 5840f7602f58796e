"""A real uvicorn process on a free loopback port, for load and crash tests.

Only 127.0.0.1 is used. The process is started from this test run and stopped (or
killed with SIGKILL for the crash test) by its own pid.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import httpx

REPO = Path(__file__).resolve().parents[2]


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


class ThreadedUvicorn:
    """A uvicorn server for an app object on a free loopback port, in a thread of this test."""

    def __init__(self, app):
        import uvicorn

        self.port = free_port()
        self.base_url = f"http://127.0.0.1:{self.port}"
        self.server = uvicorn.Server(uvicorn.Config(app, host="127.0.0.1", port=self.port,
                                                    log_level="warning"))
        self.thread = threading.Thread(target=self.server.run, daemon=True)

    def __enter__(self) -> "ThreadedUvicorn":
        self.thread.start()
        deadline = time.monotonic() + 60.0
        while not self.server.started:
            if not self.thread.is_alive() or time.monotonic() > deadline:
                raise RuntimeError("uvicorn did not start")
            time.sleep(0.05)
        return self

    def __exit__(self, *exc) -> None:
        self.server.should_exit = True
        self.thread.join(timeout=60.0)


class LiveServer:
    """``uvicorn --factory service.main:app_from_env`` against ``database_url``."""

    def __init__(self, database_url: str, log_path: Path, **settings: str):
        self.database_url = database_url
        self.log_path = log_path
        self.settings = settings
        self.port = free_port()
        self.base_url = f"http://127.0.0.1:{self.port}"
        self.process: subprocess.Popen | None = None

    def start(self, startup_timeout_s: float = 60.0) -> "LiveServer":
        env = dict(os.environ)
        env["FIELDRATE_DATABASE_URL"] = self.database_url
        for name, value in self.settings.items():
            env[f"FIELDRATE_{name.upper()}"] = str(value)
        env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
        log = open(self.log_path, "ab")
        self.process = subprocess.Popen(
            [sys.executable, "-m", "uvicorn", "--factory", "service.main:app_from_env",
             "--host", "127.0.0.1", "--port", str(self.port), "--log-level", "warning"],
            cwd=str(REPO), env=env, stdout=log, stderr=subprocess.STDOUT,
        )
        log.close()
        deadline = time.monotonic() + startup_timeout_s
        while time.monotonic() < deadline:
            if self.process.poll() is not None:
                raise RuntimeError(
                    f"uvicorn exited with {self.process.returncode}: "
                    + self.log_path.read_text(errors="replace")[-3000:]
                )
            try:
                if httpx.get(self.base_url + "/health", timeout=1.0).status_code == 200:
                    return self
            except httpx.HTTPError:
                pass
            time.sleep(0.1)
        self.stop()
        raise RuntimeError("uvicorn did not answer /health in time")

    def kill(self) -> None:
        """SIGKILL: no shutdown, no flush, no clean-up (a crash)."""
        if self.process is not None and self.process.poll() is None:
            os.kill(self.process.pid, signal.SIGKILL)
            self.process.wait(timeout=30)

    def stop(self) -> None:
        if self.process is not None and self.process.poll() is None:
            self.process.terminate()
            try:
                self.process.wait(timeout=30)
            except subprocess.TimeoutExpired:
                self.kill()

    def __enter__(self) -> "LiveServer":
        return self.start()

    def __exit__(self, *exc) -> None:
        self.stop()
