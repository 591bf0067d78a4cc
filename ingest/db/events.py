"""Alert changes in the order they were made, for event streams: each change of an alert's
state or severity is a row of ``alert_audit``, whose id orders them and resumes a stream."""

from __future__ import annotations

from collections.abc import Collection
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Engine, Row

from tecfleet.ingest.db.sites import devices_at
from tecfleet.ingest.db.tables import alert_audit, alerts


def newest_change_id(engine: Engine) -> int:
    """Id of the newest alert change (0 when there is none)."""
    with engine.connect() as conn:
        return int(conn.execute(sa.select(sa.func.max(alert_audit.c.id))).scalar() or 0)


def changes_after(
    engine: Engine, after_id: int, limit: int, sites: Collection[str] | None = None
) -> list[Row[Any]]:
    """Up to ``limit`` alert changes with ids above ``after_id``, oldest first, each with its
    alert's current row (only alerts of devices at ``sites``, when given)."""
    au = alert_audit
    stmt = (
        sa.select(
            au.c.id.label("change_id"),
            au.c.at_ms.label("change_at_ms"),
            au.c.from_state,
            au.c.to_state,
            au.c.severity.label("change_severity"),
            au.c.actor,
            au.c.note,
            alerts,
        )
        .select_from(au.join(alerts, au.c.alert_id == alerts.c.id))
        .where(au.c.id > after_id)
        .order_by(au.c.id)
        .limit(limit)
    )
    if sites is not None:
        stmt = stmt.where(alerts.c.device_id.in_(devices_at(sites)))
    with engine.connect() as conn:
        return list(conn.execute(stmt).all())
