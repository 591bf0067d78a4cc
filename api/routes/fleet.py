"""Fleet routes for the page: the overview, one unit's view, readings and estimates in time
buckets computed in the database, and alerts with their evidence as text."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Query

from tecfleet.api.deps import READ, DeviceId, EngineDep, LogLimit, Reader, time_bounds
from tecfleet.api.errors import unprocessable
from tecfleet.api.schemas import KEYED, KEYED_LOOKUP, Page
from tecfleet.api.schemas.fleet import (
    AlertReadOut,
    EstimateBucketsOut,
    FleetCountsOut,
    FleetOut,
    ReadingBucketsOut,
    UnitDetailOut,
)
from tecfleet.api.services import fleet
from tecfleet.api.timefmt import DURATION_PATTERN, duration_to_s
from tecfleet.ingest.db.buckets import BUCKET_CHANNELS

router = APIRouter(tags=["fleet"])

#: The span up to the end when no start is given [s]: from a minute to a year.
Last = Annotated[
    int | None,
    Query(ge=60, le=366 * 86400, description="seconds up to the end when start is not given"),
]
#: Bucket width asked for: seconds or a duration such as 15m, 1h, 1d; from a minute to a week.
Every = Annotated[
    str | None,
    Query(
        pattern=DURATION_PATTERN,
        description="bucket width, 60 s to 7 d: seconds, or a number with s, m, h or d (1h)",
        examples=["1h"],
    ),
]
#: Narrowest and widest bucket [s].
EVERY_MIN_S, EVERY_MAX_S = 60, 7 * 86_400


def _every_s(every: str | None) -> int | None:
    if every is None:
        return None
    seconds = duration_to_s(every)
    if not EVERY_MIN_S <= seconds <= EVERY_MAX_S:
        raise unprocessable("query", "every", f"{every} is outside 60 s to 7 d")
    return seconds


@router.get("/v1/fleet", response_model=FleetOut, responses=KEYED)
def fleet_overview(engine: EngineDep, who: Reader) -> dict[str, Any]:
    """Every unit (on the key's sites) with its state and health figures, counts by state,
    the worst units by wear, heat leak and hot-side sink, and the COP spread."""
    return fleet.fleet_summary(engine, who.sites)


@router.get("/v1/fleet/summary", response_model=FleetCountsOut, responses=KEYED)
def fleet_summary(engine: EngineDep, who: Reader) -> dict[str, Any]:
    """The fleet (on the key's sites) summed up without its units: counts by state, the worst
    units by wear, heat leak and hot-side sink, and the COP spread."""
    return fleet.fleet_counts(engine, who.sites)


@router.get(
    "/v1/fleet/units/{device_id}",
    response_model=UnitDetailOut,
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def fleet_unit(engine: EngineDep, device_id: DeviceId) -> dict[str, Any]:
    """One unit: state, every estimate as a figure with its text, registration, wear limit
    and its projected crossing, and the capacity verdict at the design ambient."""
    return fleet.unit_detail(engine, device_id)


@router.get(
    "/v1/devices/{device_id}/readings/buckets",
    response_model=ReadingBucketsOut,
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def reading_buckets(
    engine: EngineDep,
    device_id: DeviceId,
    start: str | None = None,
    end: str | None = None,
    every: Every = None,
    last: Last = None,
    channels: Annotated[
        str | None,
        Query(description="comma-separated, of " + ", ".join(BUCKET_CHANNELS) + " (default all)"),
    ] = None,
) -> dict[str, Any]:
    """Least, greatest and mean of each channel per bucket (default: the last day up to the
    newest reading, in about 400 buckets)."""
    bounds = time_bounds(start, end)
    wanted = BUCKET_CHANNELS if channels is None else tuple(c.strip() for c in channels.split(","))
    unknown = sorted(set(wanted) - set(BUCKET_CHANNELS))
    if unknown:
        raise unprocessable("query", "channels", f"unknown channels {unknown}")
    try:
        return fleet.reading_buckets(
            engine, device_id, bounds.start_ms, bounds.end_ms, _every_s(every), wanted, last
        )
    except ValueError as exc:
        raise unprocessable("query", "every", str(exc)) from exc


@router.get(
    "/v1/devices/{device_id}/estimates",
    response_model=EstimateBucketsOut,
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def estimate_buckets(
    engine: EngineDep,
    device_id: DeviceId,
    keys: Annotated[str, Query(min_length=1, description="estimate keys, comma-separated")],
    start: str | None = None,
    end: str | None = None,
    every: Every = None,
    last: Last = None,
) -> dict[str, Any]:
    """History of several estimate keys in buckets: least, greatest and mean value."""
    bounds = time_bounds(start, end)
    wanted = [k.strip() for k in keys.split(",") if k.strip()]
    try:
        return fleet.estimate_buckets(
            engine, device_id, wanted, bounds.start_ms, bounds.end_ms, _every_s(every), last
        )
    except ValueError as exc:
        raise unprocessable("query", "every", str(exc)) from exc


@router.get("/v1/fleet/alerts", response_model=Page[AlertReadOut], responses=KEYED)
def fleet_alerts(
    engine: EngineDep,
    who: Reader,
    device: str | None = None,
    state: Annotated[str | None, Query(pattern="^(open|acknowledged|resolved)$")] = None,
    limit: LogLimit = 100,
    cursor: str | None = None,
) -> dict[str, Any]:
    """Alerts newest first (on the key's sites), each with its evidence as numbers with units."""
    items, next_cursor = fleet.alert_readouts(
        engine, limit, cursor, device=device, state=state, sites=who.sites
    )
    return {"items": items, "next_cursor": next_cursor}
