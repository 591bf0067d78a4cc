"""API keys: created once, shown once, stored only as a hash; checked on every request.

Keys are 256-bit random tokens, so a fast hash (SHA-256) is enough: there is no password to
guess, and a slow hash would only slow down every request.
"""

from __future__ import annotations

import hashlib
import secrets
from collections.abc import Callable
from dataclasses import dataclass

import sqlalchemy as sa
from fastapi import Depends, HTTPException, Request
from sqlalchemy.engine import Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.ingest.db import api_keys, now_ms
from tecfleet.ingest.errors import StoreError

SCOPES = ("read", "write", "admin")
KEY_PREFIX = "tfk_"


@dataclass(frozen=True, slots=True)
class Principal:
    key_id: int
    name: str
    scope: str

    def allows(self, needed: str) -> bool:
        return SCOPES.index(self.scope) >= SCOPES.index(needed)


def hash_key(key: str) -> str:
    return hashlib.sha256(key.encode("utf-8")).hexdigest()


def create_key(engine: Engine, name: str, scope: str) -> str:
    """Store a new key's hash and return the key itself (the only time it is seen)."""
    if scope not in SCOPES:
        raise ValueError(f"scope must be one of {', '.join(SCOPES)}")
    if not name.strip():
        raise ValueError("a key needs a name")
    key = KEY_PREFIX + secrets.token_urlsafe(32)
    try:
        with engine.begin() as connection:
            connection.execute(
                api_keys.insert().values(
                    name=name.strip()[:200],
                    scope=scope,
                    key_hash=hash_key(key),
                    prefix=key[:10],
                    created_ms=now_ms(),
                )
            )
    except SQLAlchemyError as exc:
        raise StoreError(f"could not store the key: {exc}") from exc
    return key


def authenticate(engine: Engine, key: str) -> Principal | None:
    """The principal behind ``key``, or None when it is unknown or revoked."""
    stmt = sa.select(api_keys.c.id, api_keys.c.name, api_keys.c.scope).where(
        api_keys.c.key_hash == hash_key(key), api_keys.c.revoked_ms.is_(None)
    )
    with engine.connect() as connection:
        row = connection.execute(stmt).first()
    if row is None:
        return None
    return Principal(key_id=row.id, name=row.name, scope=row.scope)


def principal(request: Request) -> Principal:
    """FastAPI dependency: the key holder behind the request's bearer token (401 if none)."""
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
    """FastAPI dependency factory: a key with at least ``scope`` (403 otherwise)."""

    def check(who: Principal = Depends(principal)) -> Principal:
        if not who.allows(scope):
            raise HTTPException(403, f"this route needs a key with scope {scope!r}")
        return who

    return check
