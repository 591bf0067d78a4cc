"""The contract's alert object, its audit trail and the acknowledgement body."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from pydantic import BaseModel, ConfigDict, Field

from tecfleet.api.timefmt import ms_to_rfc3339


class AlertOut(BaseModel):
    """An alert as the contract names it (times in RFC 3339 UTC)."""

    id: int
    device_id: str
    kind: str
    severity: str = Field(description="info, warning or critical")
    state: str = Field(description="open, acknowledged or resolved")
    opened_at: str | None
    updated_at: str | None
    resolved_at: str | None
    summary: str
    evidence: dict[str, Any]
    reopen_count: int


class AuditEntryOut(BaseModel):
    """One state change of an alert, with who made it."""

    from_state: str | None
    to_state: str
    severity: str
    actor: str
    note: str | None
    at: str | None


class AlertDetailOut(AlertOut):
    history: list[AuditEntryOut]


class AckIn(BaseModel):
    model_config = ConfigDict(extra="forbid")
    note: str | None = Field(None, max_length=2000)


def alert_object(alert: Mapping[str, Any]) -> dict[str, Any]:
    """The contract's alert object from a row dict with millisecond times."""
    return {
        "id": alert["id"],
        "device_id": alert["device_id"],
        "kind": alert["kind"],
        "severity": alert["severity"],
        "state": alert["state"],
        "opened_at": ms_to_rfc3339(alert["opened_ms"]),
        "updated_at": ms_to_rfc3339(alert["updated_ms"]),
        "resolved_at": ms_to_rfc3339(alert.get("resolved_ms")),
        "summary": alert["summary"],
        "evidence": alert["evidence"],
        "reopen_count": alert.get("reopen_count", 0),
    }
