"""Maintenance routes: hold notices for a device or a site during a maintenance window, and
list the windows."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from tecfleet.analytics.errors import AlertError
from tecfleet.api.deps import EngineDep, Reader, Writer
from tecfleet.api.errors import ApiError, unprocessable
from tecfleet.api.schemas import KEYED, MaintenanceIn, MaintenanceOut, Page
from tecfleet.api.services import maintenance
from tecfleet.api.timefmt import rfc3339_to_ms

router = APIRouter(tags=["alerts"])


@router.post("/v1/maintenance", status_code=201, response_model=MaintenanceOut, responses=KEYED)
def maintenance_add(engine: EngineDep, body: MaintenanceIn, who: Writer) -> MaintenanceOut:
    """Hold notices for a device or a site between ``start`` and ``end``: alerts are still
    judged and recorded, and their notices are sent at the window's end if still relevant.
    ``replaced`` names the device's parts replaced during the window: from its end the
    analysis judges them against a commissioning of their own."""
    times = {}
    for name in ("start", "end"):
        try:
            times[name] = rfc3339_to_ms(getattr(body, name))
        except ValueError as exc:
            raise unprocessable("body", name, str(exc)) from exc
    if body.replaced and body.device_id is None:
        raise unprocessable(
            "body", "replaced", "replaced parts are recorded on a device's window, not a site's"
        )
    if not maintenance.within_sites(engine, who, body.device_id, body.site):
        raise ApiError(403, "site_not_allowed", "the key may silence only devices at its sites")
    try:
        return maintenance.add_window(
            engine,
            times["start"],
            times["end"],
            device_id=body.device_id,
            site=body.site,
            reason=body.reason,
            who=who,
            replaced=body.replaced,
        )
    except AlertError as exc:
        raise unprocessable("body", "device_id", str(exc)) from exc


@router.get(
    "/v1/maintenance",
    response_model=Page[MaintenanceOut],
    responses=KEYED,
)
def maintenance_list(engine: EngineDep, who: Reader) -> dict[str, Any]:
    """The newest windows first (those on the key's sites)."""
    return {"items": maintenance.list_windows(engine, who), "next_cursor": None}
