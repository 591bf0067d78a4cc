"""Every FastAPI dependency of the routes, and the parameter types they share.

The engine, settings and readiness check live on ``app.state`` (set by ``create_app``);
the key holder comes from the bearer token; page sizes and device ids are validated here so
that every route states them the same way.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Annotated

from fastapi import Depends, HTTPException, Query, Request
from fastapi import Path as PathParam
from sqlalchemy.engine import Engine

from tecfleet.api.auth import Principal, authenticate
from tecfleet.api.delivery.webhooks import allow_private_default
from tecfleet.api.errors import unprocessable
from tecfleet.api.timefmt import rfc3339_to_ms
from tecfleet.ingest.settings import Settings

ReadyCheck = Callable[[], tuple[bool, str]]

#: A device id as the MQTT topic allows it.
DEVICE_ID_PATTERN = r"^[A-Za-z0-9_.\-]{1,64}$"
DeviceId = Annotated[str, PathParam(pattern=DEVICE_ID_PATTERN)]
#: Page size of devices, readings and rejects [items].
PageLimit = Annotated[int, Query(ge=1, le=5000)]
#: Page size of alerts and webhook deliveries [items].
LogLimit = Annotated[int, Query(ge=1, le=1000)]


def get_engine(request: Request) -> Engine:
    engine: Engine = request.app.state.engine
    return engine


def get_settings(request: Request) -> Settings | None:
    settings: Settings | None = request.app.state.settings
    return settings


def get_ready_check(request: Request) -> ReadyCheck | None:
    check: ReadyCheck | None = request.app.state.ready_check
    return check


def allow_private_webhooks(request: Request) -> bool:
    """Whether hooks may target private addresses: ``app.state`` first, then the environment."""
    flag = getattr(request.app.state, "webhook_allow_private", None)
    return allow_private_default() if flag is None else bool(flag)


EngineDep = Annotated[Engine, Depends(get_engine)]
ReadyDep = Annotated[ReadyCheck | None, Depends(get_ready_check)]
AllowPrivateDep = Annotated[bool, Depends(allow_private_webhooks)]


def principal(request: Request) -> Principal:
    """The key holder behind the request's bearer token (401 if none)."""
    header = request.headers.get("authorization", "")
    scheme, _, token = header.partition(" ")
    if scheme.lower() != "bearer" or not token.strip():
        raise HTTPException(
            401,
            "missing API key: send Authorization: Bearer <key>",
            headers={"WWW-Authenticate": "Bearer"},
        )
    found = authenticate(request.app.state.engine, token.strip())
    if found is None:
        raise HTTPException(
            401, "unknown or revoked API key", headers={"WWW-Authenticate": "Bearer"}
        )
    return found


def require(scope: str) -> Callable[..., Principal]:
    """Dependency factory: a key with at least ``scope`` (403 otherwise)."""

    def check(who: Principal = Depends(principal)) -> Principal:
        if not who.allows(scope):
            raise HTTPException(403, f"this route needs a key with scope {scope!r}")
        return who

    return check


#: Route-level guards (``dependencies=[READ]``) and the key holder as a parameter.
READ = Depends(require("read"))
WRITE = Depends(require("write"))
ADMIN = Depends(require("admin"))
Writer = Annotated[Principal, Depends(require("write"))]
Admin = Annotated[Principal, Depends(require("admin"))]


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
    return TimeBounds(bounds["start"], bounds["end"])
