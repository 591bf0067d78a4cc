"""The FastAPI application: routers per resource, the state they share, the limits every
request meets, and how stage errors become HTTP answers."""

from __future__ import annotations

from typing import Any

from fastapi import FastAPI
from fastapi.staticfiles import StaticFiles
from sqlalchemy.engine import Engine

from tecfleet.api.deps import ReadyCheck
from tecfleet.api.errors import install_error_handlers
from tecfleet.api.limits import BodyLimit, RateLimiter
from tecfleet.api.routes import ROUTERS
from tecfleet.api.routes.system import STATIC
from tecfleet.api.schemas.openapi import finish_document
from tecfleet.api.sealing import sealer_for
from tecfleet.ingest.settings import Settings


def create_app(
    engine: Engine, ready: ReadyCheck | None = None, settings: Settings | None = None
) -> FastAPI:
    """Build the app around a database engine and a readiness check of the other roles.

    Without ``settings`` the API limits take their defaults and webhook secrets are sealed
    with a key held by this process only (tests, embedded use).
    """
    api_settings = settings if settings is not None else Settings.model_validate({})
    app = FastAPI(
        title="tecfleet",
        version="0.1.0",
        description="Telemetry and diagnostics for fleets of thermoelectric coolers. "
        "Every error answers one JSON shape (`ErrorOut`): a machine `code`, a `message`, "
        "and the offending `field`.",
    )
    app.state.engine = engine
    app.state.settings = settings
    app.state.api_settings = api_settings
    app.state.ready_check = ready
    app.mount("/static", StaticFiles(directory=STATIC), name="static")
    app.state.rate_limiter = RateLimiter(api_settings.api_rate_per_minute)
    app.state.key_touched = {}
    app.state.sealer = sealer_for(settings)
    for router in ROUTERS:
        app.include_router(router)
    install_error_handlers(app)
    app.add_middleware(BodyLimit, max_bytes=api_settings.api_max_body_bytes)

    def openapi() -> dict[str, Any]:
        if app.openapi_schema is None:
            document = FastAPI.openapi(app)
            app.openapi_schema = finish_document(document, api_settings.api_max_page_size)
        return app.openapi_schema

    app.openapi = openapi  # type: ignore[method-assign]
    return app
