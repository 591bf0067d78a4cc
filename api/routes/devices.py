"""Device routes: the list, one device, and registration."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from tecfleet.api.deps import READ, WRITE, DeviceId, EngineDep, PageLimit
from tecfleet.api.schemas import KEYED, KEYED_LOOKUP, DeviceDetail, DeviceIn, DeviceOut, Page
from tecfleet.api.services import devices

router = APIRouter(tags=["devices"])


@router.get("/v1/devices", response_model=Page[DeviceOut], dependencies=[READ], responses=KEYED)
def devices_list(
    engine: EngineDep, limit: PageLimit = 100, cursor: str | None = None
) -> dict[str, Any]:
    items, next_cursor = devices.list_devices(engine, limit, cursor)
    return {"items": items, "next_cursor": next_cursor}


@router.get(
    "/v1/devices/{device_id}",
    response_model=DeviceDetail,
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def device_get(engine: EngineDep, device_id: DeviceId) -> DeviceDetail:
    return devices.get_device(engine, device_id)


@router.put(
    "/v1/devices/{device_id}", response_model=DeviceDetail, dependencies=[WRITE], responses=KEYED
)
def device_put(engine: EngineDep, device_id: DeviceId, body: DeviceIn) -> DeviceDetail:
    return devices.register_device(engine, device_id, body)
