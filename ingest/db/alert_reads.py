"""What the API reads of alerts and maintenance windows (the alert ledger writes them)."""

from __future__ import annotations

from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Engine, Row

from tecfleet.ingest.db.tables import alerts, maintenance_windows

#: Maintenance windows listed at most (newest first).
MAINTENANCE_LIST_LIMIT = 1000


def alert_page(
    engine: Engine,
    limit: int,
    before_id: int | None,
    *,
    device: str | None = None,
    state: str | None = None,
    kind: str | None = None,
) -> list[Row[Any]]:
    """Up to ``limit + 1`` alerts, newest first, with ids below ``before_id``, filtered."""
    a = alerts
    stmt = sa.select(a).order_by(a.c.id.desc()).limit(limit + 1)
    if before_id is not None:
        stmt = stmt.where(a.c.id < before_id)
    if device is not None:
        stmt = stmt.where(a.c.device_id == device)
    if state is not None:
        stmt = stmt.where(a.c.state == state)
    if kind is not None:
        stmt = stmt.where(a.c.kind == kind)
    with engine.connect() as conn:
        return list(conn.execute(stmt).fetchall())


def alert_by_id(engine: Engine, alert_id: int) -> Row[Any] | None:
    with engine.connect() as conn:
        return conn.execute(sa.select(alerts).where(alerts.c.id == alert_id)).first()


def maintenance_window(engine: Engine, window_id: int) -> Row[Any]:
    m = maintenance_windows
    with engine.connect() as conn:
        return conn.execute(sa.select(m).where(m.c.id == window_id)).one()


def newest_maintenance_windows(engine: Engine) -> list[Row[Any]]:
    m = maintenance_windows
    with engine.connect() as conn:
        return list(
            conn.execute(
                sa.select(m).order_by(m.c.id.desc()).limit(MAINTENANCE_LIST_LIMIT)
            ).fetchall()
        )
