"""API keys: create, list (never the secret), revoke; every change goes to the audit trail."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.api.auth import Principal, create_key_with_id
from tecfleet.api.pagination import int_cursor, next_cursor
from tecfleet.api.schemas.keys import KeyCreatedOut, KeyOut
from tecfleet.api.services.audit import record_change
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import keys as keys_db
from tecfleet.ingest.db import now_ms
from tecfleet.ingest.errors import NotFoundError


def key_out(r: Any, at_ms: int | None = None) -> KeyOut:
    now = now_ms() if at_ms is None else at_ms
    expired = r.expires_ms is not None and r.expires_ms <= now
    return KeyOut(
        id=int(r.id),
        name=r.name,
        scope=r.scope,
        prefix=r.prefix,
        sites=list(r.sites) if r.sites is not None else None,
        created_at=ms_to_rfc3339(r.created_ms),
        created_by=r.created_by,
        expires_at=ms_to_rfc3339(r.expires_ms),
        revoked_at=ms_to_rfc3339(r.revoked_ms),
        last_used_at=ms_to_rfc3339(r.last_used_ms),
        active=r.revoked_ms is None and not expired,
    )


def create(
    engine: Engine,
    who: Principal | str,
    name: str,
    scope: str,
    *,
    sites: Sequence[str] | None = None,
    expires_ms: int | None = None,
) -> KeyCreatedOut:
    """Make a key (ValueError on a bad argument) and record it; the answer holds the secret."""
    creator = who.name if isinstance(who, Principal) else who
    key, key_id = create_key_with_id(
        engine, name, scope, sites=sites, expires_ms=expires_ms, created_by=creator
    )
    row = keys_db.key_by_id(engine, key_id)
    out = key_out(row)
    record_change(
        engine,
        who,
        "key.create",
        f"key/{key_id}",
        {"name": out.name, "scope": scope, "sites": out.sites, "expires_at": out.expires_at},
    )
    return KeyCreatedOut(**out.model_dump(), key=key)


def list_keys(engine: Engine, limit: int, cursor: str | None) -> tuple[list[KeyOut], str | None]:
    rows = keys_db.key_page(engine, int_cursor(cursor), limit)
    now = now_ms()
    return [key_out(r, now) for r in rows[:limit]], next_cursor(rows, limit, "id")


def revoke(engine: Engine, who: Principal | str, key_id: int) -> KeyOut:
    """Revoke a key (NotFoundError when there is none); revoking twice changes nothing."""
    if keys_db.key_by_id(engine, key_id) is None:
        raise NotFoundError(f"unknown key {key_id}")
    if keys_db.revoke_key(engine, key_id):
        record_change(engine, who, "key.revoke", f"key/{key_id}", {})
    return key_out(keys_db.key_by_id(engine, key_id))
