"""API keys: created once, shown once, stored only as a hash; checked on every request.

Keys are 256-bit random tokens, so a fast hash (SHA-256) is enough: there is no password to
guess, and a slow hash would only slow down every request.
"""

from __future__ import annotations

import hashlib
import secrets
from dataclasses import dataclass

from sqlalchemy.engine import Engine

from tecfleet.ingest.db import keys as keys_db

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
    keys_db.insert_key(engine, name.strip()[:200], scope, hash_key(key), key[:10])
    return key


def authenticate(engine: Engine, key: str) -> Principal | None:
    """The principal behind ``key``, or None when it is unknown or revoked."""
    row = keys_db.active_key(engine, hash_key(key))
    if row is None:
        return None
    return Principal(key_id=row.id, name=row.name, scope=row.scope)
