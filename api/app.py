"""The FastAPI application: thin handlers over the functions in ``queries``."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Annotated, Any

from fastapi import Depends, FastAPI, HTTPException, Query, Request
from fastapi import Path as PathParam
from fastapi.responses import FileResponse, JSONResponse, Response
from prometheus_client import CONTENT_TYPE_LATEST, REGISTRY, generate_latest
from sqlalchemy.engine import Engine

from tecfleet.analytics import runner
from tecfleet.api import queries
from tecfleet.api.auth import require
from tecfleet.api.errors import CursorError
from tecfleet.api.schemas import DeviceDetail, DeviceIn, DeviceOut, Page, ReadingOut, RejectOut
from tecfleet.api.timefmt import rfc3339_to_ms
from tecfleet.ingest import metrics as _ingest_metrics  # noqa: F401 - registers the counters
from tecfleet.ingest.db import ping
from tecfleet.ingest.errors import NotFoundError, StoreError
from tecfleet.ingest.settings import Settings

STATIC = Path(__file__).parent / "static"
DEVICE_ID = PathParam(pattern=r"^[A-Za-z0-9_.\-]{1,64}$")
Limit = Annotated[int, Query(ge=1, le=5000)]

ReadyCheck = Callable[[], tuple[bool, str]]


def _time_bounds(start: str | None, end: str | None) -> dict[str, int | None]:
    bounds: dict[str, int | None] = {}
    for name, text in (("start", start), ("end", end)):
        if text is None:
            bounds[name] = None
            continue
        try:
            bounds[name] = rfc3339_to_ms(text)
        except ValueError as exc:
            raise HTTPException(
                422, [{"loc": ["query", name], "msg": str(exc), "type": "value_error"}]
            ) from exc
    return bounds


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
    from tecfleet.api.alert_routes import router as alert_router

    app.include_router(alert_router)

    reader = Depends(require("read"))
    writer = Depends(require("write"))

    @app.exception_handler(NotFoundError)
    async def _not_found(_request: Request, exc: NotFoundError) -> JSONResponse:
        return JSONResponse({"detail": str(exc)}, status_code=404)

    @app.exception_handler(CursorError)
    async def _bad_cursor(_request: Request, exc: CursorError) -> JSONResponse:
        return JSONResponse(
            {"detail": [{"loc": ["query", "cursor"], "msg": str(exc), "type": "value_error"}]},
            status_code=422,
        )

    @app.exception_handler(StoreError)
    async def _store_down(_request: Request, exc: StoreError) -> JSONResponse:
        return JSONResponse({"detail": f"database unavailable: {exc}"}, status_code=503)

    @app.get("/healthz", tags=["service"])
    def healthz() -> dict[str, str]:
        return {"status": "ok"}

    @app.get("/readyz", tags=["service"])
    def readyz() -> JSONResponse:
        if not ping(engine):
            return JSONResponse({"ready": False, "detail": "database unreachable"}, 503)
        if ready is not None:
            ok, detail = ready()
            if not ok:
                return JSONResponse({"ready": False, "detail": detail}, 503)
        return JSONResponse({"ready": True})

    @app.get("/metrics", tags=["service"], dependencies=[reader])
    def metrics() -> Response:
        return Response(generate_latest(REGISTRY), media_type=CONTENT_TYPE_LATEST)

    @app.get("/v1/devices", response_model=Page[DeviceOut], dependencies=[reader])
    def devices_list(limit: Limit = 100, cursor: str | None = None) -> dict[str, Any]:
        items, next_cursor = queries.list_devices(engine, limit, cursor)
        return {"items": items, "next_cursor": next_cursor}

    @app.get("/v1/devices/{device_id}", response_model=DeviceDetail, dependencies=[reader])
    def device_get(device_id: Annotated[str, DEVICE_ID]) -> DeviceDetail:
        return queries.get_device(engine, device_id)

    @app.put("/v1/devices/{device_id}", response_model=DeviceDetail, dependencies=[writer])
    def device_put(device_id: Annotated[str, DEVICE_ID], body: DeviceIn) -> DeviceDetail:
        return queries.register_device(engine, device_id, body)

    @app.get(
        "/v1/devices/{device_id}/readings",
        response_model=Page[ReadingOut],
        dependencies=[reader],
    )
    def readings_list(
        device_id: Annotated[str, DEVICE_ID],
        start: str | None = None,
        end: str | None = None,
        limit: Limit = 1000,
        cursor: str | None = None,
    ) -> dict[str, Any]:
        bounds = _time_bounds(start, end)
        items, next_cursor = queries.list_readings(
            engine, device_id, bounds["start"], bounds["end"], limit, cursor
        )
        return {"items": items, "next_cursor": next_cursor}

    @app.get("/v1/devices/{device_id}/health", dependencies=[reader])
    def device_health(device_id: Annotated[str, DEVICE_ID]) -> dict[str, Any]:
        """Newest estimate of every key: ``{"value", "stderr", "n", "reliable", "at", "note"}``."""
        if not queries.device_exists(engine, device_id):
            raise NotFoundError(f"device {device_id!r} is not known")
        return dict(runner.latest_health(engine, device_id))

    @app.get("/v1/devices/{device_id}/estimates/{key}", dependencies=[reader])
    def estimate_history(
        device_id: Annotated[str, DEVICE_ID],
        key: str,
        start: str | None = None,
        end: str | None = None,
    ) -> dict[str, Any]:
        """History of one estimate key, oldest first."""
        if not queries.device_exists(engine, device_id):
            raise NotFoundError(f"device {device_id!r} is not known")
        bounds = _time_bounds(start, end)
        items = runner.estimate_history(engine, device_id, key, bounds["start"], bounds["end"])
        return {"items": items, "next_cursor": None}

    @app.get("/v1/rejects", response_model=Page[RejectOut], dependencies=[reader])
    def rejects_list(limit: Limit = 100, cursor: str | None = None) -> dict[str, Any]:
        items, next_cursor = queries.list_rejects(engine, limit, cursor)
        return {"items": items, "next_cursor": next_cursor}

    @app.get("/", include_in_schema=False)
    def index() -> Response:
        page = STATIC / "index.html"
        if page.is_file():
            return FileResponse(page)
        return JSONResponse({"detail": "web page not installed"}, status_code=404)

    return app
