"""Reading routes: one device's stored readings, oldest first."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Query

from tecfleet.api.deps import (
    READ,
    DeviceId,
    EngineDep,
    ReadingsLimit,
    SettingsDep,
    bounded_range,
    time_bounds,
)
from tecfleet.api.schemas import KEYED_LOOKUP, Page, ReadingOut
from tecfleet.api.services import readings

router = APIRouter(tags=["readings"])


@router.get(
    "/v1/devices/{device_id}/readings",
    response_model=Page[ReadingOut],
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def readings_list(
    engine: EngineDep,
    settings: SettingsDep,
    device_id: DeviceId,
    start: str | None = None,
    end: str | None = None,
    limit: ReadingsLimit = 1000,
    cursor: str | None = None,
    raw: Annotated[bool, Query(description="true: values as received, no offsets")] = False,
) -> dict[str, Any]:
    """Stored readings, oldest first, with the device's calibration offsets applied
    (``raw=true``: as received). A range given with both ends spans at most
    ``api_max_range_days``."""
    bounds = time_bounds(start, end)
    if start is not None and end is not None:
        bounded_range(settings, start, end)
    items, next_cursor = readings.list_readings(
        engine, device_id, bounds.start_ms, bounds.end_ms, limit, cursor, raw=raw
    )
    return {"items": items, "next_cursor": next_cursor}
