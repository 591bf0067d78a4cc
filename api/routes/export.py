"""Export routes: readings, estimates and alerts over a date range as CSV, streamed."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter
from fastapi.responses import StreamingResponse

from tecfleet.api.deps import (
    READ,
    DeviceId,
    EngineDep,
    Reader,
    SettingsDep,
    bounded_range,
    time_bounds,
)
from tecfleet.api.schemas import json_error_responses
from tecfleet.api.services import export
from tecfleet.api.services.devices import require_device

router = APIRouter(tags=["export"])


def _csv_doc(what: str, lookup: bool) -> dict[int | str, dict[str, Any]]:
    codes = (401, 403, 404, 503) if lookup else (401, 403, 503)
    return {
        200: {
            "description": f"{what} as CSV (RFC 4180), oldest first; times RFC 3339 UTC.",
            "content": {"text/csv": {"schema": {"type": "string"}}},
        },
        **json_error_responses(*codes),
    }


def _csv(chunks: Any, name: str) -> StreamingResponse:
    return StreamingResponse(
        chunks,
        media_type="text/csv",
        headers={"Content-Disposition": f'attachment; filename="{name}"'},
    )


@router.get(
    "/v1/devices/{device_id}/export/readings.csv",
    dependencies=[READ],
    response_class=StreamingResponse,
    responses=_csv_doc("The device's readings", True),
)
def export_readings(
    engine: EngineDep,
    settings: SettingsDep,
    device_id: DeviceId,
    start: str,
    end: str,
    raw: bool = False,
) -> StreamingResponse:
    """Readings with ``start <= ts < end`` (at most ``api_max_range_days``), calibration
    offsets applied (``raw=true``: as received)."""
    require_device(engine, device_id)
    start_ms, end_ms = bounded_range(settings, start, end)
    rows = export.reading_rows(engine, device_id, start_ms, end_ms, raw=raw)
    return _csv(export.csv_stream(export.READING_HEADER, rows), f"{device_id}-readings.csv")


@router.get(
    "/v1/devices/{device_id}/export/estimates.csv",
    dependencies=[READ],
    response_class=StreamingResponse,
    responses=_csv_doc("The device's estimates", True),
)
def export_estimates(
    engine: EngineDep, device_id: DeviceId, start: str, end: str, key: str | None = None
) -> StreamingResponse:
    """Estimates with ``start <= at < end`` (one key, or every key)."""
    require_device(engine, device_id)
    bounds = time_bounds(start, end)
    assert bounds.start_ms is not None and bounds.end_ms is not None
    rows = export.estimate_rows(engine, device_id, bounds.start_ms, bounds.end_ms, key)
    return _csv(export.csv_stream(export.ESTIMATE_HEADER, rows), f"{device_id}-estimates.csv")


@router.get(
    "/v1/export/alerts.csv",
    response_class=StreamingResponse,
    responses=_csv_doc("Alerts opened in the range (on the key's sites)", False),
)
def export_alerts(
    engine: EngineDep, who: Reader, start: str, end: str, device: str | None = None
) -> StreamingResponse:
    """Alerts opened with ``start <= opened_at < end``, in the order they opened."""
    bounds = time_bounds(start, end)
    assert bounds.start_ms is not None and bounds.end_ms is not None
    rows = export.alert_rows(
        engine, bounds.start_ms, bounds.end_ms, device_id=device, sites=who.sites
    )
    return _csv(export.csv_stream(export.ALERT_HEADER, rows), "alerts.csv")
