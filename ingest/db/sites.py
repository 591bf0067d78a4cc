"""Where things are: the site of a device or an alert, for keys limited to some sites."""

from __future__ import annotations

from collections.abc import Collection
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Engine

from tecfleet.ingest.db.tables import alerts, devices

#: Marks "no such thing" apart from "a thing with no site".
UNKNOWN = object()


def device_site(engine: Engine, device_id: str) -> Any:
    """The device's site (None when it has none), or :data:`UNKNOWN`."""
    with engine.connect() as conn:
        row = conn.execute(
            sa.select(devices.c.site).where(devices.c.device_id == device_id)
        ).first()
    return UNKNOWN if row is None else row.site


def alert_site(engine: Engine, alert_id: int) -> Any:
    """The site of the alert's device (None when it has none), or :data:`UNKNOWN`."""
    stmt = (
        sa.select(devices.c.site)
        .select_from(alerts.join(devices, alerts.c.device_id == devices.c.device_id))
        .where(alerts.c.id == alert_id)
    )
    with engine.connect() as conn:
        row = conn.execute(stmt).first()
    return UNKNOWN if row is None else row.site


def devices_at(sites: Collection[str]) -> Any:
    """A subquery of the ids of the devices at these sites, for ``column.in_(...)``."""
    return sa.select(devices.c.device_id).where(devices.c.site.in_(list(sites)))


def known_site(engine: Engine, device_id: str) -> str | None:
    """The device's site; None when it has none or is not known."""
    site = device_site(engine, device_id)
    return None if site is UNKNOWN else site
