"""API keys: only their hashes are stored."""

from __future__ import annotations

from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Engine, Row
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.ingest.db.engine import now_ms
from tecfleet.ingest.db.tables import api_keys
from tecfleet.ingest.errors import StoreError


def insert_key(engine: Engine, name: str, scope: str, key_hash: str, prefix: str) -> None:
    """Store a key's hash; database failures become ``StoreError``."""
    try:
        with engine.begin() as connection:
            connection.execute(
                api_keys.insert().values(
                    name=name,
                    scope=scope,
                    key_hash=key_hash,
                    prefix=prefix,
                    created_ms=now_ms(),
                )
            )
    except SQLAlchemyError as exc:
        raise StoreError(f"could not store the key: {exc}") from exc


def active_key(engine: Engine, key_hash: str) -> Row[Any, Any, Any] | None:
    """``id``, ``name`` and ``scope`` of the unrevoked key with this hash, or None."""
    stmt = sa.select(api_keys.c.id, api_keys.c.name, api_keys.c.scope).where(
        api_keys.c.key_hash == key_hash, api_keys.c.revoked_ms.is_(None)
    )
    with engine.connect() as connection:
        return connection.execute(stmt).first()
