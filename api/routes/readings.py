"""Reading routes: one device's stored readings, oldest first."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from tecfleet.api.deps import READ, DeviceId, EngineDep, PageLimit, time_bounds
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
    device_id: DeviceId,
    start: str | None = None,
    end: str | None = None,
    limit: PageLimit = 1000,
    cursor: str | None = None,
) -> dict[str, Any]:
    bounds = time_bounds(start, end)
    items, next_cursor = readings.list_readings(
        engine, device_id, bounds.start_ms, bounds.end_ms, limit, cursor
    )
    return {"items": items, "next_cursor": next_cursor}
