"""API keys: created once, shown once, stored only as a hash; checked on every request.

Keys are 256-bit random tokens, so a fast hash (SHA-256) is enough: there is no password to
guess, and a slow hash would only slow down every request. A key has a scope (read < write <
admin), may be limited to some sites, may expire, and may be revoked; a revoked or expired
key answers exactly like an unknown one would, with its own reason.
"""

from __future__ import annotations

import hashlib
import secrets
from collections.abc import Sequence
from dataclasses import dataclass

from sqlalchemy.engine import Engine

from tecfleet.api.errors import ApiError
from tecfleet.ingest.db import keys as keys_db
from tecfleet.ingest.db import now_ms

SCOPES = ("read", "write", "admin")
KEY_PREFIX = "tfk_"


class KeyArgumentError(ValueError):
    """A key cannot be made as asked; ``field`` names the argument at fault."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(message)
        self.field = field


@dataclass(frozen=True, slots=True)
class Principal:
    """The holder of a key: who, how much they may do, and where (None: every site)."""

    key_id: int
    name: str
    scope: str
    sites: frozenset[str] | None = None

    def allows(self, needed: str) -> bool:
        return SCOPES.index(self.scope) >= SCOPES.index(needed)

    def sees_site(self, site: str | None) -> bool:
        """Whether a thing at ``site`` (None: a device with no site) is within the key's sites."""
        return self.sites is None or (site is not None and site in self.sites)


def hash_key(key: str) -> str:
    return hashlib.sha256(key.encode("utf-8")).hexdigest()


def create_key(
    engine: Engine,
    name: str,
    scope: str,
    *,
    sites: Sequence[str] | None = None,
    expires_ms: int | None = None,
    created_by: str | None = None,
) -> str:
    """Store a new key's hash and return the key itself (the only time it is seen)."""
    key, _key_id = create_key_with_id(
        engine, name, scope, sites=sites, expires_ms=expires_ms, created_by=created_by
    )
    return key


def create_key_with_id(
    engine: Engine,
    name: str,
    scope: str,
    *,
    sites: Sequence[str] | None = None,
    expires_ms: int | None = None,
    created_by: str | None = None,
) -> tuple[str, int]:
    """:func:`create_key`, also returning the new key's id (KeyArgumentError, a ValueError,
    on a bad argument)."""
    if scope not in SCOPES:
        raise KeyArgumentError("scope", f"scope must be one of {', '.join(SCOPES)}")
    if not name.strip():
        raise KeyArgumentError("name", "a key needs a name")
    if sites is not None and not [s for s in sites if s.strip()]:
        raise KeyArgumentError("sites", "a key limited to sites needs at least one site")
    if expires_ms is not None and expires_ms <= now_ms():
        raise KeyArgumentError("expires_at", "the expiry must lie in the future")
    clean_sites = sorted({s.strip() for s in sites if s.strip()}) if sites is not None else None
    key = KEY_PREFIX + secrets.token_urlsafe(32)
    key_id = keys_db.insert_key(
        engine,
        name.strip()[:200],
        scope,
        hash_key(key),
        key[:10],
        sites=clean_sites,
        expires_ms=expires_ms,
        created_by=created_by,
    )
    return key, key_id


def _refused(code: str, message: str) -> ApiError:
    return ApiError(401, code, message, location="header", headers={"WWW-Authenticate": "Bearer"})


def authenticate(engine: Engine, key: str, at_ms: int | None = None) -> Principal:
    """The principal behind ``key``; ApiError 401 when it is unknown, revoked or expired."""
    row = keys_db.key_by_hash(engine, hash_key(key))
    if row is None:
        raise _refused("key_unknown", "unknown API key")
    if row.revoked_ms is not None:
        raise _refused("key_revoked", "this API key has been revoked")
    now = now_ms() if at_ms is None else at_ms
    if row.expires_ms is not None and row.expires_ms <= now:
        raise _refused("key_expired", "this API key has expired")
    sites = frozenset(row.sites) if row.sites is not None else None
    return Principal(key_id=int(row.id), name=row.name, scope=row.scope, sites=sites)


def missing_key() -> ApiError:
    return _refused("key_missing", "missing API key: send Authorization: Bearer <key>")
