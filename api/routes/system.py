"""Service routes: liveness, readiness, Prometheus metrics and the web page."""

from __future__ import annotations

from pathlib import Path

from fastapi import APIRouter
from fastapi.responses import FileResponse, JSONResponse, PlainTextResponse, Response
from prometheus_client import CONTENT_TYPE_LATEST, REGISTRY, generate_latest

from tecfleet.api.deps import FLEET_READ, EngineDep, ReadyDep
from tecfleet.api.schemas import HealthzOut, ReadyOut, json_error_responses
from tecfleet.ingest import metrics as _ingest_metrics  # noqa: F401 - registers the counters
from tecfleet.ingest.db import ping

STATIC = Path(__file__).parent.parent / "static"

router = APIRouter()


@router.get("/healthz", tags=["service"], response_model=HealthzOut)
def healthz() -> dict[str, str]:
    return {"status": "ok"}


@router.get(
    "/readyz",
    tags=["service"],
    response_model=None,
    responses={
        200: {"model": ReadyOut, "description": "Ready: the database answers, MQTT is in place."},
        503: {"model": ReadyOut, "description": "Not ready yet; ``detail`` says what is missing."},
    },
)
def readyz(engine: EngineDep, ready: ReadyDep) -> JSONResponse:
    if not ping(engine):
        return JSONResponse({"ready": False, "detail": "database unreachable"}, 503)
    if ready is not None:
        ok, detail = ready()
        if not ok:
            return JSONResponse({"ready": False, "detail": detail}, 503)
    return JSONResponse({"ready": True})


@router.get(
    "/metrics",
    tags=["service"],
    dependencies=[FLEET_READ],
    response_class=PlainTextResponse,
    responses={
        200: {
            "description": "Prometheus text exposition format.",
            "content": {"text/plain": {"schema": {"type": "string"}}},
        },
        **json_error_responses(401, 403, 503),
    },
)
def metrics() -> Response:
    return Response(generate_latest(REGISTRY), media_type=CONTENT_TYPE_LATEST)


@router.get("/", include_in_schema=False)
def index() -> Response:
    page = STATIC / "index.html"
    if page.is_file():
        return FileResponse(page)
    return JSONResponse({"detail": "web page not installed"}, status_code=404)
