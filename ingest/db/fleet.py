"""The fleet as the API shows it: registration writes, the device list and detail, and the
readings and rejects pages."""

from __future__ import annotations

from collections.abc import Collection
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine, Row

from tecfleet.ingest.db.engine import now_ms
from tecfleet.ingest.db.tables import alerts, devices, readings, rejects

#: Alert states that count as "open" on a device.
OPEN_STATES = ("open", "acknowledged")


def open_alert_counts(connection: Connection, device_ids: list[str]) -> dict[str, int]:
    """Open (or acknowledged) alerts per device, for the devices given."""
    if not device_ids:
        return {}
    stmt = (
        sa.select(alerts.c.device_id, sa.func.count())
        .where(alerts.c.device_id.in_(device_ids), alerts.c.state.in_(OPEN_STATES))
        .group_by(alerts.c.device_id)
    )
    return {row[0]: int(row[1]) for row in connection.execute(stmt)}


def device_page(
    engine: Engine, limit: int, after: str | None, sites: Collection[str] | None = None
) -> tuple[list[Row[Any]], dict[str, int]]:
    """Up to ``limit + 1`` devices by id after ``after`` (at ``sites`` only, when given), and
    the open alerts of the first ``limit`` of them (the extra row tells another page follows)."""
    stmt = sa.select(devices).order_by(devices.c.device_id).limit(limit + 1)
    if sites is not None:
        stmt = stmt.where(devices.c.site.in_(list(sites)))
    if after is not None:
        stmt = stmt.where(devices.c.device_id > after)
    with engine.connect() as connection:
        rows = list(connection.execute(stmt).all())
        counts = open_alert_counts(connection, [r.device_id for r in rows[:limit]])
    return rows, counts


def device_detail(engine: Engine, device_id: str) -> tuple[Row[Any], int, Row[Any] | None] | None:
    """A device's row, its open alerts and its newest reading; None when it is not known."""
    with engine.connect() as connection:
        row = connection.execute(sa.select(devices).where(devices.c.device_id == device_id)).first()
        if row is None:
            return None
        counts = open_alert_counts(connection, [device_id])
        latest = connection.execute(
            sa.select(readings)
            .where(readings.c.device_id == device_id)
            .order_by(readings.c.ts_ms.desc())
            .limit(1)
        ).first()
    return row, counts.get(device_id, 0), latest


def device_exists(engine: Engine, device_id: str) -> bool:
    with engine.connect() as connection:
        stmt = sa.select(devices.c.device_id).where(devices.c.device_id == device_id)
        return connection.execute(stmt).first() is not None


def register(engine: Engine, device_id: str, given: dict[str, Any]) -> None:
    """Create or update a registration from the fields ``given``; only those change.

    ``module`` and ``cabinet`` merge into what is stored; None for either clears it.
    """
    with engine.begin() as connection:
        row = connection.execute(sa.select(devices).where(devices.c.device_id == device_id)).first()
        values: dict[str, Any] = {"registered_at_ms": now_ms()}
        for key in ("label", "site"):
            if key in given:
                values[key] = given[key]
        for key in ("module", "cabinet"):
            if key in given:
                merged = dict((getattr(row, key) if row is not None else None) or {})
                if given[key] is None:
                    merged = {}
                else:
                    merged.update(given[key])
                values[key] = merged or None
        if row is None:
            connection.execute(devices.insert().values(device_id=device_id, readings=0, **values))
        else:
            connection.execute(
                devices.update().where(devices.c.device_id == device_id).values(**values)
            )


def readings_page(
    engine: Engine,
    device_id: str,
    start_ms: int | None,
    end_ms: int | None,
    after_ms: int | None,
    limit: int,
) -> list[Row[Any]]:
    """Up to ``limit + 1`` readings oldest first, ``start_ms`` inclusive, ``end_ms`` exclusive,
    strictly after ``after_ms``."""
    stmt = sa.select(readings).where(readings.c.device_id == device_id)
    if start_ms is not None:
        stmt = stmt.where(readings.c.ts_ms >= start_ms)
    if end_ms is not None:
        stmt = stmt.where(readings.c.ts_ms < end_ms)
    if after_ms is not None:
        stmt = stmt.where(readings.c.ts_ms > after_ms)
    stmt = stmt.order_by(readings.c.ts_ms).limit(limit + 1)
    with engine.connect() as connection:
        return list(connection.execute(stmt).all())


def rejects_page(engine: Engine, before_id: int | None, limit: int) -> list[Row[Any]]:
    """Up to ``limit + 1`` rejects, newest first, with ids below ``before_id``."""
    stmt = sa.select(rejects).order_by(rejects.c.id.desc()).limit(limit + 1)
    if before_id is not None:
        stmt = stmt.where(rejects.c.id < before_id)
    with engine.connect() as connection:
        return list(connection.execute(stmt).all())
