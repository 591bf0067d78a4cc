"""The audit trail as the API writes and shows it."""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.api.auth import Principal
from tecfleet.api.pagination import int_cursor, next_cursor
from tecfleet.api.schemas.audit import AuditOut
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import audit as audit_db

#: Every action the trail records, with what it means.
ACTIONS = {
    "device.register": "a device registered or its registration changed",
    "policy.set": "alert thresholds of a device or a site set",
    "calibration.add": "a calibration offset added",
    "calibration.withdraw": "a calibration offset withdrawn",
    "alert.acknowledge": "an alert acknowledged",
    "maintenance.add": "a maintenance window added",
    "webhook.create": "a webhook registered",
    "webhook.delete": "a webhook deleted",
    "key.create": "an API key created",
    "key.revoke": "an API key revoked",
}


def record_change(
    engine: Engine,
    who: Principal | str,
    action: str,
    target: str,
    detail: Mapping[str, Any],
    site: str | None = None,
) -> None:
    """Append what ``who`` (a key holder, or a name for the command line) just changed."""
    if action not in ACTIONS:
        raise ValueError(f"unknown audit action {action!r}")
    if isinstance(who, Principal):
        audit_db.append(engine, who.name, who.key_id, action, target, detail, site)
    else:
        audit_db.append(engine, who, None, action, target, detail, site)


def _entry(r: Any) -> AuditOut:
    return AuditOut(
        id=int(r.id),
        at=ms_to_rfc3339(r.at_ms) or "",
        actor=r.actor,
        actor_key_id=r.actor_key_id,
        action=r.action,
        target=r.target,
        site=r.site,
        detail=dict(r.detail or {}),
    )


def list_entries(
    engine: Engine,
    limit: int,
    cursor: str | None,
    *,
    action: str | None,
    start_ms: int | None,
    end_ms: int | None,
) -> tuple[list[AuditOut], str | None]:
    rows = audit_db.audit_page(
        engine, int_cursor(cursor), limit, action=action, start_ms=start_ms, end_ms=end_ms
    )
    return [_entry(r) for r in rows[:limit]], next_cursor(rows, limit, "id")


#: Columns of the audit export, in order.
EXPORT_COLUMNS = ("id", "at", "actor", "actor_key_id", "action", "target", "site", "detail")


def export_rows(
    engine: Engine, *, action: str | None, start_ms: int | None, end_ms: int | None
) -> Iterator[tuple[Any, ...]]:
    """Entries oldest first as CSV rows of :data:`EXPORT_COLUMNS` (``detail`` as JSON)."""
    import orjson

    for r in audit_db.iter_audit(engine, action=action, start_ms=start_ms, end_ms=end_ms):
        yield (
            r.id,
            ms_to_rfc3339(r.at_ms),
            r.actor,
            r.actor_key_id,
            r.action,
            r.target,
            r.site,
            orjson.dumps(r.detail or {}).decode(),
        )
