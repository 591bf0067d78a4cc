"""The contract's alert object, its audit trail and the acknowledgement body."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from pydantic import BaseModel, ConfigDict, Field

from tecfleet.api.timefmt import ms_to_rfc3339


class SymptomOut(BaseModel):
    """A symptom alert of an incident: its id and kind."""

    id: int
    kind: str


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
    incident_id: int | None = Field(
        None,
        description="id of the cause alert of the incident this alert belongs to (the "
        "alert's own id on the cause); null for an alert that stands alone",
    )
    symptoms: list[SymptomOut] = Field(
        default_factory=list,
        description="on the cause of an incident, the alerts its physics explains",
    )


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
        "incident_id": alert.get("incident_id"),
        "symptoms": list(alert.get("symptoms") or []),
    }
