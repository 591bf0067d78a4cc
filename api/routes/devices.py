"""Device routes: the list, one device, and registration."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from tecfleet.api.deps import READ, DeviceId, EngineDep, PageLimit, Reader, Writer
from tecfleet.api.errors import ApiError, unprocessable
from tecfleet.api.schemas import KEYED, KEYED_LOOKUP, DeviceDetail, DeviceIn, DeviceOut, Page
from tecfleet.api.services import devices
from tecfleet.ingest.db import fleet as fleet_db

router = APIRouter(tags=["devices"])


@router.get("/v1/devices", response_model=Page[DeviceOut], responses=KEYED)
def devices_list(
    engine: EngineDep, who: Reader, limit: PageLimit = 100, cursor: str | None = None
) -> dict[str, Any]:
    """Every device (on the key's sites), by id."""
    items, next_cursor = devices.list_devices(engine, limit, cursor, who.sites)
    return {"items": items, "next_cursor": next_cursor}


@router.get(
    "/v1/devices/{device_id}",
    response_model=DeviceDetail,
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def device_get(engine: EngineDep, device_id: DeviceId) -> DeviceDetail:
    return devices.get_device(engine, device_id)


@router.put("/v1/devices/{device_id}", response_model=DeviceDetail, responses=KEYED)
def device_put(engine: EngineDep, device_id: DeviceId, body: DeviceIn, who: Writer) -> DeviceDetail:
    """Register a device or change its registration; only the fields given change."""
    if who.sites is not None:
        named = "site" in body.model_fields_set
        if named and not who.sees_site(body.site):
            raise ApiError(403, "site_not_allowed", "the key may place devices only at its sites")
        if not named and not fleet_db.device_exists(engine, device_id):
            raise unprocessable("body", "site", "a key limited to sites must name the site")
    return devices.register_device(engine, device_id, body, who)
