"""The FastAPI application: routers per resource, the state they share, and how stage errors
become HTTP answers."""

from __future__ import annotations

from fastapi import FastAPI, Request
from fastapi.responses import JSONResponse
from fastapi.staticfiles import StaticFiles
from sqlalchemy.engine import Engine

from tecfleet.api.deps import ReadyCheck
from tecfleet.api.errors import CursorError
from tecfleet.api.routes import ROUTERS
from tecfleet.api.routes.system import STATIC
from tecfleet.ingest.errors import NotFoundError, StoreError
from tecfleet.ingest.settings import Settings


async def _not_found(_request: Request, exc: Exception) -> JSONResponse:
    return JSONResponse({"detail": str(exc)}, status_code=404)


async def _bad_cursor(_request: Request, exc: Exception) -> JSONResponse:
    return JSONResponse(
        {"detail": [{"loc": ["query", "cursor"], "msg": str(exc), "type": "value_error"}]},
        status_code=422,
    )


async def _store_down(_request: Request, exc: Exception) -> JSONResponse:
    return JSONResponse({"detail": f"database unavailable: {exc}"}, status_code=503)


def create_app(
    engine: Engine, ready: ReadyCheck | None = None, settings: Settings | None = None
) -> FastAPI:
    """Build the app around a database engine and a readiness check of the other roles."""
    app = FastAPI(
        title="tecfleet",
        version="0.1.0",
        description="Telemetry and diagnostics for fleets of thermoelectric coolers.",
    )
    app.state.engine = engine
    app.state.settings = settings
    app.state.ready_check = ready
    app.mount("/static", StaticFiles(directory=STATIC), name="static")
    for router in ROUTERS:
        app.include_router(router)
    app.add_exception_handler(NotFoundError, _not_found)
    app.add_exception_handler(CursorError, _bad_cursor)
    app.add_exception_handler(StoreError, _store_down)
    return app
