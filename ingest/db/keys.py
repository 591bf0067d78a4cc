"""API keys: only their hashes are stored, with scope, sites, expiry, revocation and last use."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.ingest.db.engine import now_ms
from tecfleet.ingest.db.tables import api_keys
from tecfleet.ingest.errors import StoreError

#: What a key's listing shows: never the hash.
_LISTED = (
    api_keys.c.id,
    api_keys.c.name,
    api_keys.c.scope,
    api_keys.c.prefix,
    api_keys.c.sites,
    api_keys.c.created_ms,
    api_keys.c.created_by,
    api_keys.c.expires_ms,
    api_keys.c.revoked_ms,
    api_keys.c.last_used_ms,
)


def insert_key(
    engine: Engine,
    name: str,
    scope: str,
    key_hash: str,
    prefix: str,
    *,
    sites: Sequence[str] | None = None,
    expires_ms: int | None = None,
    created_by: str | None = None,
) -> int:
    """Store a key's hash and return its id; database failures become ``StoreError``."""
    try:
        with engine.begin() as connection:
            result = connection.execute(
                api_keys.insert().values(
                    name=name,
                    scope=scope,
                    key_hash=key_hash,
                    prefix=prefix,
                    created_ms=now_ms(),
                    sites=list(sites) if sites is not None else None,
                    expires_ms=expires_ms,
                    created_by=created_by,
                )
            )
            return int(result.inserted_primary_key[0])  # type: ignore[index]
    except SQLAlchemyError as exc:
        raise StoreError(f"could not store the key: {exc}") from exc


def key_by_hash(engine: Engine, key_hash: str) -> Any:
    """The key with this hash (revoked and expired ones too), without the hash, or None."""
    stmt = sa.select(*_LISTED).where(api_keys.c.key_hash == key_hash)
    with engine.connect() as connection:
        return connection.execute(stmt).first()


def touch_key(engine: Engine, key_id: int, at_ms: int) -> None:
    """Record that the key was used at ``at_ms`` (never moving the time back)."""
    with engine.begin() as connection:
        connection.execute(
            api_keys.update()
            .where(api_keys.c.id == key_id)
            .where(sa.or_(api_keys.c.last_used_ms.is_(None), api_keys.c.last_used_ms < at_ms))
            .values(last_used_ms=at_ms)
        )


def key_page(engine: Engine, after_id: int | None, limit: int) -> list[Any]:
    """Up to ``limit + 1`` keys in id order after ``after_id``, without their hashes."""
    stmt = sa.select(*_LISTED).order_by(api_keys.c.id).limit(limit + 1)
    if after_id is not None:
        stmt = stmt.where(api_keys.c.id > after_id)
    with engine.connect() as connection:
        return list(connection.execute(stmt).all())


def key_by_id(engine: Engine, key_id: int) -> Any:
    with engine.connect() as connection:
        return connection.execute(sa.select(*_LISTED).where(api_keys.c.id == key_id)).first()


def revoke_key(engine: Engine, key_id: int) -> bool:
    """Revoke a key now; False when it was already revoked (its first revocation stands)."""
    with engine.begin() as connection:
        result = connection.execute(
            api_keys.update()
            .where(api_keys.c.id == key_id, api_keys.c.revoked_ms.is_(None))
            .values(revoked_ms=now_ms())
        )
        return bool(result.rowcount)
