"""The application factory.

``create_app(settings)`` builds the FastAPI app for one database: it brings the schema to
the newest Alembic revision (``upgrade head``) on startup, installs the error handlers and
the request size limit, and mounts the routers listed in :mod:`service.api.router`.
"""

from __future__ import annotations

from contextlib import asynccontextmanager
from typing import Optional

from fastapi import FastAPI

from kinetics.caution import CAUTION_TEXT
from service.api.routes import health
from service.config import Settings, get_settings
from service.db import make_engine, make_session_factory
from service.errors import install_error_handlers
from service.idempotency import install_idempotency
from service.limits import BodySizeLimit

__all__ = ["create_app", "app_from_env"]

DESCRIPTION = f"""
Stores hydrolysis measurements posted by laboratory systems (immutable, versioned runs) and
serves the fitted pH-temperature rate surface of each substance and predictions of k, DT50
and DT90 with confidence and prediction intervals at field conditions.

All quantities carry their unit in the field name (`temperature_K`, `k_per_s`, `dt50_s`).
The examples describe an invented scenario (invented substances and laboratory).

**Caution.** {CAUTION_TEXT}
"""


def create_app(settings: Optional[Settings] = None) -> FastAPI:
    """Build the service for ``settings`` (default: read from ``FIELDRATE_*`` variables)."""
    settings = settings or get_settings()
    engine = make_engine(settings.database_url, busy_timeout_ms=settings.sqlite_busy_timeout_ms)

    @asynccontextmanager
    async def lifespan(app: FastAPI):
        if settings.run_migrations_on_startup:
            from service.migrate import upgrade_head

            upgrade_head(settings.database_url)
        yield
        engine.dispose()

    app = FastAPI(
        title="fieldrate",
        version="0.1.0",
        summary="Hydrolysis rate constants from the laboratory turned into field predictions.",
        description=DESCRIPTION,
        lifespan=lifespan,
    )
    app.state.settings = settings
    app.state.engine = engine
    app.state.session_factory = make_session_factory(engine)
    install_error_handlers(app)
    install_idempotency(app)  # inside the size limit: oversized bodies never reach it
    app.add_middleware(BodySizeLimit, max_body_bytes=settings.max_body_bytes)

    from service.api.router import api_router

    app.include_router(health.router)
    app.include_router(api_router)
    return app


def app_from_env() -> FastAPI:
    """Factory for ``uvicorn --factory service.main:app_from_env`` (settings from the environment)."""
    return create_app(Settings())
