"""Every FastAPI dependency of the routes, and the parameter types they share.

The engine, settings, readiness check and rate limiter live on ``app.state`` (set by
``create_app``); the key holder comes from the bearer token and is checked here for scope,
sites and rate, before a route reads its body. Page sizes, device ids and time ranges are
validated here so that every route states them the same way.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Annotated

from fastapi import Depends, Query, Request
from fastapi import Path as PathParam
from sqlalchemy.engine import Engine

from tecfleet.api.auth import Principal, authenticate, missing_key
from tecfleet.api.delivery.webhooks import allow_private_default
from tecfleet.api.errors import ApiError, unprocessable
from tecfleet.api.limits import RateLimiter
from tecfleet.api.timefmt import rfc3339_to_ms
from tecfleet.ingest.db import keys as keys_db
from tecfleet.ingest.db import now_ms
from tecfleet.ingest.db import sites as sites_db
from tecfleet.ingest.settings import Settings

ReadyCheck = Callable[[], tuple[bool, str]]

#: A device id as the MQTT topic allows it.
DEVICE_ID_PATTERN = r"^[A-Za-z0-9_.\-]{1,64}$"
DeviceId = Annotated[str, PathParam(pattern=DEVICE_ID_PATTERN)]
#: Ids of stored rows: positive, and within a signed 64-bit integer.
RowId = Annotated[int, PathParam(ge=1, le=2**63 - 1)]
_MS_PER_DAY = 86_400_000


def get_engine(request: Request) -> Engine:
    engine: Engine = request.app.state.engine
    return engine


def get_settings(request: Request) -> Settings:
    settings: Settings = request.app.state.api_settings
    return settings


def get_ready_check(request: Request) -> ReadyCheck | None:
    check: ReadyCheck | None = request.app.state.ready_check
    return check


def allow_private_webhooks(request: Request) -> bool:
    """Whether hooks may target private addresses: ``app.state`` first, then the environment."""
    flag = getattr(request.app.state, "webhook_allow_private", None)
    return allow_private_default() if flag is None else bool(flag)


EngineDep = Annotated[Engine, Depends(get_engine)]
SettingsDep = Annotated[Settings, Depends(get_settings)]
ReadyDep = Annotated[ReadyCheck | None, Depends(get_ready_check)]
AllowPrivateDep = Annotated[bool, Depends(allow_private_webhooks)]


def principal(request: Request) -> Principal:
    """The key holder behind the request's bearer token (401 if none), counted against the
    key's rate (429 when over); its last use is recorded every ``api_key_touch_s``."""
    header = request.headers.get("authorization", "")
    scheme, _, token = header.partition(" ")
    if scheme.lower() != "bearer" or not token.strip():
        raise missing_key()
    engine: Engine = request.app.state.engine
    now = now_ms()
    who = authenticate(engine, token.strip(), now)
    limiter: RateLimiter = request.app.state.rate_limiter
    limiter.check(who.key_id)
    settings: Settings = request.app.state.api_settings
    touched: dict[int, int] = request.app.state.key_touched
    if now - touched.get(who.key_id, 0) >= settings.api_key_touch_s * 1000:
        touched[who.key_id] = now
        keys_db.touch_key(engine, who.key_id, now)
    return who


def _site_guard(request: Request, who: Principal) -> None:
    """A key limited to sites sees a device or alert elsewhere as unknown (404)."""
    if who.sites is None:
        return
    engine: Engine = request.app.state.engine
    params = request.path_params
    if "device_id" in params:
        site = sites_db.device_site(engine, str(params["device_id"]))
        if site is not sites_db.UNKNOWN and not who.sees_site(site):
            raise ApiError(404, "not_found", f"device {params['device_id']!r} is not known")
    if "alert_id" in params and str(params["alert_id"]).isdigit():
        site = sites_db.alert_site(engine, int(params["alert_id"]))
        if site is not sites_db.UNKNOWN and not who.sees_site(site):
            raise ApiError(404, "not_found", f"unknown alert {params['alert_id']}")


class Require:
    """Dependency: a key with at least ``scope`` (403 otherwise) whose sites cover the device
    or alert the path names; ``fleet_wide`` routes need a key of every site."""

    def __init__(self, scope: str, *, fleet_wide: bool = False) -> None:
        self.scope = scope
        self.fleet_wide = fleet_wide

    def __call__(self, request: Request, who: Principal = Depends(principal)) -> Principal:
        if not who.allows(self.scope):
            raise ApiError(
                403, "scope_too_small", f"this route needs a key with scope {self.scope!r}"
            )
        if self.fleet_wide and who.sites is not None:
            raise ApiError(
                403,
                "site_limited_key",
                "this route covers the whole fleet; a key limited to sites cannot use it",
            )
        _site_guard(request, who)
        return who


def require(scope: str, *, fleet_wide: bool = False) -> Require:
    return Require(scope, fleet_wide=fleet_wide)


#: Route-level guards (``dependencies=[READ]``) and the key holder as a parameter.
READ = Depends(require("read"))
WRITE = Depends(require("write"))
ADMIN = Depends(require("admin"))
FLEET_READ = Depends(require("read", fleet_wide=True))
FLEET_ADMIN = Depends(require("admin", fleet_wide=True))
Reader = Annotated[Principal, Depends(require("read"))]
Writer = Annotated[Principal, Depends(require("write"))]
Admin = Annotated[Principal, Depends(require("admin"))]
FleetAdmin = Annotated[Principal, Depends(require("admin", fleet_wide=True))]


def _page_limit(default: int) -> Callable[..., int]:
    def check(
        request: Request,
        limit: Annotated[
            int, Query(ge=1, le=5000, description="page size; the settings bound it [items]")
        ] = default,
    ) -> int:
        bound: int = request.app.state.api_settings.api_max_page_size
        if limit > bound:
            raise unprocessable("query", "limit", f"must be at most {bound}")
        return limit

    return check


#: Page size of devices, readings and rejects [items].
PageLimit = Annotated[int, Depends(_page_limit(100))]
#: Page size of readings, 1000 by default [items].
ReadingsLimit = Annotated[int, Depends(_page_limit(1000))]
#: Page size of alerts, webhook deliveries, keys and the audit trail [items].
LogLimit = Annotated[int, Depends(_page_limit(100))]


@dataclass(frozen=True, slots=True)
class TimeBounds:
    """A query's time range [ms since the epoch]; None where open."""

    start_ms: int | None
    end_ms: int | None


def time_bounds(start: str | None, end: str | None) -> TimeBounds:
    """``start`` and ``end`` query texts as milliseconds (422 naming the bad one).

    Called by the handlers after FastAPI's own validation, so its 422 comes after theirs.
    """
    bounds: dict[str, int | None] = {}
    for name, text in (("start", start), ("end", end)):
        if text is None:
            bounds[name] = None
            continue
        try:
            bounds[name] = rfc3339_to_ms(text)
        except ValueError as exc:
            raise unprocessable("query", name, str(exc)) from exc
    found = TimeBounds(bounds["start"], bounds["end"])
    if found.start_ms is not None and found.end_ms is not None and found.end_ms < found.start_ms:
        raise unprocessable("query", "end", "must not lie before start")
    return found


def bounded_range(settings: Settings, start: str, end: str) -> tuple[int, int]:
    """A closed range of raw readings no longer than ``api_max_range_days`` (422 otherwise)."""
    bounds = time_bounds(start, end)
    assert bounds.start_ms is not None and bounds.end_ms is not None
    longest = int(settings.api_max_range_days * _MS_PER_DAY)
    if bounds.end_ms - bounds.start_ms > longest:
        raise unprocessable(
            "query", "end", f"the range may span at most {settings.api_max_range_days:g} days"
        )
    return bounds.start_ms, bounds.end_ms
