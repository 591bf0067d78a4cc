"""Alerts as the API shows them: the filtered list, one alert with its audit trail, and the
acknowledgement."""

from __future__ import annotations

from collections.abc import Collection
from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.analytics import alerts as rules
from tecfleet.api.auth import Principal
from tecfleet.api.pagination import int_cursor, next_cursor
from tecfleet.api.schemas.alerts import AlertDetailOut, AlertOut, alert_object
from tecfleet.api.services.audit import record_change
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import alert_records
from tecfleet.ingest.db import sites as sites_db
from tecfleet.ingest.errors import NotFoundError


def known_kind(kind: str) -> bool:
    return kind in rules.KINDS


def list_alerts(
    engine: Engine,
    limit: int,
    cursor: str | None,
    *,
    device: str | None = None,
    state: str | None = None,
    kind: str | None = None,
    incident: int | None = None,
    sites: Collection[str] | None = None,
) -> tuple[list[AlertOut], str | None]:
    """Alerts newest first, filtered by device, state, kind and incident (the cause's id);
    a cause carries its symptoms."""
    before = int_cursor(cursor)
    rows = alert_records.alert_page(
        engine,
        limit,
        before,
        device=device,
        state=state,
        kind=kind,
        incident=incident,
        sites=sites,
    )
    page = rows[:limit]
    symptoms = alert_records.incident_symptoms(
        engine, [int(r.id) for r in page if r.incident_id == r.id]
    )
    items = [
        AlertOut(**alert_object(alert_records.alert_row_dict(r, symptoms.get(int(r.id)))))
        for r in page
    ]
    return items, next_cursor(rows, limit, "id")


def get_alert(engine: Engine, alert_id: int) -> AlertDetailOut:
    """One alert with its audit trail (state changes, who acknowledged and when)."""
    row = alert_records.alert_by_id(engine, alert_id)
    if row is None:
        raise NotFoundError(f"unknown alert {alert_id}")
    symptoms = alert_records.incident_symptoms(engine, [alert_id]).get(alert_id)
    out: dict[str, Any] = alert_object(alert_records.alert_row_dict(row, symptoms))
    out["history"] = [
        {**{k: v for k, v in h.items() if k != "at_ms"}, "at": ms_to_rfc3339(h["at_ms"])}
        for h in rules.audit_trail(engine, alert_id)
    ]
    return AlertDetailOut(**out)


def acknowledge(engine: Engine, alert_id: int, who: Principal, note: str | None) -> AlertOut:
    """Acknowledge an open alert in the name of the key holder (idempotent), on record."""
    before = alert_records.alert_by_id(engine, alert_id)
    out = AlertOut(**alert_object(rules.acknowledge(engine, alert_id, who.name, note)))
    if before is not None and before.state != out.state:
        site = sites_db.known_site(engine, out.device_id)
        record_change(engine, who, "alert.acknowledge", f"alert/{alert_id}", {"note": note}, site)
    return out
