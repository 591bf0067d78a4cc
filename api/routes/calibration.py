"""Calibration routes: a device's per-sensor offsets with validity dates."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Response

from tecfleet.api.deps import READ, DeviceId, EngineDep, RowId, Writer
from tecfleet.api.errors import unprocessable
from tecfleet.api.schemas import KEYED_LOOKUP, Page
from tecfleet.api.schemas.calibration import OffsetIn, OffsetOut
from tecfleet.api.services import calibration
from tecfleet.api.timefmt import rfc3339_to_ms

router = APIRouter(tags=["calibration"])


@router.get(
    "/v1/devices/{device_id}/calibration",
    response_model=Page[OffsetOut],
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def offsets_list(engine: EngineDep, device_id: DeviceId, withdrawn: bool = False) -> dict[str, Any]:
    """The device's offsets in force, oldest first (``withdrawn=true``: withdrawn ones too)."""
    return {"items": calibration.list_offsets(engine, device_id, withdrawn), "next_cursor": None}


@router.post(
    "/v1/devices/{device_id}/calibration",
    status_code=201,
    response_model=OffsetOut,
    responses=KEYED_LOOKUP,
)
def offset_add(engine: EngineDep, device_id: DeviceId, body: OffsetIn, who: Writer) -> OffsetOut:
    """Add an offset; stored readings stay as received, the offset applies as they are read,
    and the analysis of the period it covers runs again."""
    times: dict[str, int | None] = {}
    for name in ("valid_from", "valid_to"):
        text = getattr(body, name)
        try:
            times[name] = None if text is None else rfc3339_to_ms(text)
        except ValueError as exc:
            raise unprocessable("body", name, str(exc)) from exc
    start, end = times["valid_from"], times["valid_to"]
    assert start is not None
    if end is not None and end <= start:
        raise unprocessable("body", "valid_to", "must lie after valid_from")
    return calibration.add_offset(engine, who, device_id, body, start, end)


@router.delete(
    "/v1/devices/{device_id}/calibration/{offset_id}",
    status_code=204,
    response_class=Response,
    responses=KEYED_LOOKUP,
)
def offset_withdraw(
    engine: EngineDep, device_id: DeviceId, offset_id: RowId, who: Writer
) -> Response:
    """Withdraw an offset (kept on record); the analysis of its period runs again."""
    calibration.withdraw_offset(engine, who, device_id, offset_id)
    return Response(status_code=204)
