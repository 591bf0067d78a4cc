"""Key routes (admin of the whole fleet): create, list without secrets, revoke."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from tecfleet.api.auth import KeyArgumentError
from tecfleet.api.deps import FLEET_ADMIN, EngineDep, FleetAdmin, LogLimit, RowId
from tecfleet.api.errors import unprocessable
from tecfleet.api.schemas import KEYED, KEYED_LOOKUP, Page
from tecfleet.api.schemas.keys import KeyCreatedOut, KeyIn, KeyOut
from tecfleet.api.services import keys
from tecfleet.api.timefmt import rfc3339_to_ms

router = APIRouter(tags=["keys"])


@router.post("/v1/keys", status_code=201, response_model=KeyCreatedOut, responses=KEYED)
def key_create(engine: EngineDep, body: KeyIn, who: FleetAdmin) -> KeyCreatedOut:
    """Create a key; the secret is in this answer only (stored as a hash)."""
    expires_ms = None
    if body.expires_at is not None:
        try:
            expires_ms = rfc3339_to_ms(body.expires_at)
        except ValueError as exc:
            raise unprocessable("body", "expires_at", str(exc)) from exc
    try:
        return keys.create(
            engine, who, body.name, body.scope, sites=body.sites, expires_ms=expires_ms
        )
    except KeyArgumentError as exc:
        raise unprocessable("body", exc.field, str(exc)) from exc


@router.get("/v1/keys", response_model=Page[KeyOut], dependencies=[FLEET_ADMIN], responses=KEYED)
def key_list(engine: EngineDep, limit: LogLimit = 100, cursor: str | None = None) -> dict[str, Any]:
    """Every key, oldest first, with scope, sites, expiry, revocation and last use."""
    items, next_cursor = keys.list_keys(engine, limit, cursor)
    return {"items": items, "next_cursor": next_cursor}


@router.post("/v1/keys/{key_id}/revoke", response_model=KeyOut, responses=KEYED_LOOKUP)
def key_revoke(engine: EngineDep, key_id: RowId, who: FleetAdmin) -> KeyOut:
    """Revoke a key at once; it answers 401 from then on."""
    return keys.revoke(engine, who, key_id)
