"""Service settings, read from environment variables with the prefix ``FIELDRATE_``.

Examples
--------
``FIELDRATE_DATABASE_URL=postgresql+psycopg://user@db:5432/fieldrate fieldrate serve``
``FIELDRATE_PORT=9000 fieldrate serve --demo``
"""

from __future__ import annotations

import os
from functools import lru_cache
from pathlib import Path

from pydantic import Field
from pydantic_settings import BaseSettings, SettingsConfigDict

__all__ = ["Settings", "default_data_dir", "default_database_url", "get_settings"]


def default_data_dir() -> Path:
    """Per-user data directory: ``$XDG_DATA_HOME/fieldrate`` or ``~/.local/share/fieldrate``."""
    base = os.environ.get("XDG_DATA_HOME") or str(Path.home() / ".local" / "share")
    return Path(base) / "fieldrate"


def default_database_url() -> str:
    """SQLite file in the per-user data directory (never the working tree)."""
    return f"sqlite:///{default_data_dir() / 'fieldrate.db'}"


class Settings(BaseSettings):
    """All tunable settings of the service.

    Every field can be set through ``FIELDRATE_<FIELD_NAME>`` (case-insensitive).
    """

    model_config = SettingsConfigDict(env_prefix="FIELDRATE_", extra="ignore")

    database_url: str = Field(default_factory=default_database_url)
    host: str = "127.0.0.1"
    port: int = Field(default=8000, ge=0, le=65535)
    max_body_bytes: int = Field(default=64 * 1024 * 1024, ge=1024)
    max_points_per_series: int = Field(default=10_000, ge=3)
    max_conditions_per_request: int = Field(default=200_000, ge=100_000)
    max_runs_per_batch: int = Field(default=5_000, ge=1)
    max_montecarlo_evaluations: int = Field(
        default=50_000_000, ge=1_000_000, description="Monte Carlo draws x conditions per request"
    )
    anonymous_read: bool = False
    api_key_pepper: str = Field(default="", repr=False)  # server secret in key hashes (service.security)
    #: how long a process remembers a verified API key [s]; also the longest time a key
    #: revoked in another process (worker, command line) may still work here. 0: never
    key_cache_ttl_s: float = Field(default=2.0, ge=0, le=60)
    idempotency_ttl_s: float = Field(default=24 * 3600.0, gt=0)
    sqlite_busy_timeout_ms: int = Field(default=30_000, ge=0)
    run_migrations_on_startup: bool = True


@lru_cache(maxsize=1)
def get_settings() -> Settings:
    """Settings read once from the environment (the default for :func:`service.main.create_app`)."""
    return Settings()
