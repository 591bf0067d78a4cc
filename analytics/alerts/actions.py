"""What people do with alerts: acknowledge one, read its audit trail, hold the notices of a
device or a site during maintenance, and override thresholds per device or site."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.analytics.alerts.policy import AlertPolicy
from tecfleet.analytics.errors import AlertError
from tecfleet.ingest.db import alert_records as records

__all__ = ["acknowledge", "add_maintenance", "audit_trail", "set_policy"]


def acknowledge(
    engine: Engine, alert_id: int, actor: str, note: str | None = None
) -> dict[str, Any]:
    """Mark an open alert acknowledged by ``actor`` (audited, notified); idempotent."""
    return records.acknowledge_alert(engine, alert_id, actor, note)


def audit_trail(engine: Engine, alert_id: int) -> list[dict[str, Any]]:
    """State changes of one alert, oldest first."""
    return records.audit_rows(engine, alert_id)


def set_policy(engine: Engine, scope: str, name: str, thresholds: Mapping[str, Any]) -> None:
    """Store threshold overrides for a ``device`` or ``site`` (validated against AlertPolicy)."""
    if scope not in ("device", "site"):
        raise AlertError("scope must be 'device' or 'site'")
    AlertPolicy().with_overrides(thresholds)
    records.store_policy(engine, scope, name, thresholds)


def add_maintenance(
    engine: Engine,
    start_ms: int,
    end_ms: int,
    *,
    device_id: str | None = None,
    site: str | None = None,
    reason: str | None = None,
    created_by: str | None = None,
    replaced: Sequence[str] = (),
) -> int:
    """Hold the notices of a device or a whole site between ``start_ms`` and ``end_ms`` [ms,
    event time]. ``replaced``: the device's parts replaced during the window (names of
    ``REPLACEABLE_PARTS``), whose history the analysis starts afresh at ``end_ms``."""
    if (device_id is None) == (site is None):
        raise AlertError("a maintenance window names either a device or a site")
    if end_ms <= start_ms:
        raise AlertError("a maintenance window must end after it starts")
    unknown = sorted(set(replaced) - set(records.REPLACEABLE_PARTS))
    if unknown:
        known = ", ".join(records.REPLACEABLE_PARTS)
        raise AlertError(f"unknown replaced parts {unknown}: name only {known}")
    if replaced and device_id is None:
        raise AlertError("replaced parts are recorded on a device's window, not a site's")
    return records.insert_maintenance(
        engine, start_ms, end_ms, device_id=device_id, site=site, reason=reason,
        created_by=created_by, replaced=list(dict.fromkeys(replaced)),
    )  # fmt: skip
