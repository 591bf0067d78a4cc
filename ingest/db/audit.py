"""The audit trail: who changed what and when. Rows are only ever added (the database
refuses UPDATE and DELETE on the table, migration 0007)."""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Engine, Row

from tecfleet.ingest.db.engine import now_ms
from tecfleet.ingest.db.tables import audit_log

#: Rows read per query while an export streams [rows].
EXPORT_CHUNK = 2000


def append(
    engine: Engine,
    actor: str,
    actor_key_id: int | None,
    action: str,
    target: str,
    detail: Mapping[str, Any],
    site: str | None = None,
) -> int:
    """Add one entry now and return its id."""
    with engine.begin() as conn:
        result = conn.execute(
            audit_log.insert().values(
                at_ms=now_ms(),
                actor=actor[:200],
                actor_key_id=actor_key_id,
                action=action,
                target=target[:300],
                site=site,
                detail=dict(detail),
            )
        )
        return int(result.inserted_primary_key[0])  # type: ignore[index]


def _filtered(stmt: Any, action: str | None, start_ms: int | None, end_ms: int | None) -> Any:
    a = audit_log
    if action is not None:
        stmt = stmt.where(a.c.action == action)
    if start_ms is not None:
        stmt = stmt.where(a.c.at_ms >= start_ms)
    if end_ms is not None:
        stmt = stmt.where(a.c.at_ms < end_ms)
    return stmt


def audit_page(
    engine: Engine,
    before_id: int | None,
    limit: int,
    *,
    action: str | None = None,
    start_ms: int | None = None,
    end_ms: int | None = None,
) -> list[Row[Any]]:
    """Up to ``limit + 1`` entries, newest first, with ids below ``before_id``."""
    a = audit_log
    stmt = _filtered(sa.select(a), action, start_ms, end_ms).order_by(a.c.id.desc())
    if before_id is not None:
        stmt = stmt.where(a.c.id < before_id)
    with engine.connect() as conn:
        return list(conn.execute(stmt.limit(limit + 1)).all())


def iter_audit(
    engine: Engine,
    *,
    action: str | None = None,
    start_ms: int | None = None,
    end_ms: int | None = None,
) -> Iterator[Row[Any]]:
    """Every entry in the range, oldest first, read a chunk at a time (for exports)."""
    a = audit_log
    after = 0
    while True:
        stmt = _filtered(sa.select(a), action, start_ms, end_ms).where(a.c.id > after)
        with engine.connect() as conn:
            rows = conn.execute(stmt.order_by(a.c.id).limit(EXPORT_CHUNK)).all()
        yield from rows
        if len(rows) < EXPORT_CHUNK:
            return
        after = int(rows[-1].id)
