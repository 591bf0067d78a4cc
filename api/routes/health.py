"""Health routes: a device's newest estimates and the history of one estimate."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from tecfleet.api.deps import READ, DeviceId, EngineDep, time_bounds
from tecfleet.api.schemas import KEYED_LOOKUP, EstimatePointOut, HealthOut, Page
from tecfleet.api.services import health
from tecfleet.api.services.devices import require_device

router = APIRouter(tags=["health"])


@router.get(
    "/v1/devices/{device_id}/health",
    response_model=HealthOut,
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def device_health(engine: EngineDep, device_id: DeviceId) -> dict[str, Any]:
    """Newest estimate of every key: ``{"value", "stderr", "n", "reliable", "at", "note",
    "basis", "reason"}``."""
    return health.latest_health(engine, device_id)


@router.get(
    "/v1/devices/{device_id}/estimates/{key}",
    response_model=Page[EstimatePointOut],
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def estimate_history(
    engine: EngineDep,
    device_id: DeviceId,
    key: str,
    start: str | None = None,
    end: str | None = None,
) -> dict[str, Any]:
    """History of one estimate key, oldest first."""
    require_device(engine, device_id)  # an unknown device answers 404 before a bad range
    bounds = time_bounds(start, end)
    return health.estimate_history(engine, device_id, key, bounds.start_ms, bounds.end_ms)
