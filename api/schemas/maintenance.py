"""Maintenance windows in and out (times in RFC 3339 with offset): while one lasts, the
notices of its device or site are held, not sent."""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field

from tecfleet.ingest.db.alert_records import ReplaceablePart


class MaintenanceIn(BaseModel):
    """A window holding notices: name a device or a site, and its start and end."""

    model_config = ConfigDict(extra="forbid")
    device_id: str | None = Field(None, pattern=r"^[A-Za-z0-9_.\-]{1,64}$")
    site: str | None = Field(None, max_length=200)
    start: str
    end: str
    reason: str | None = Field(None, max_length=2000)
    replaced: list[ReplaceablePart] = Field(
        default_factory=list,
        max_length=5,
        description=(
            "Parts of the named device replaced during the window: the analysis forgets what "
            "it learned of them and starts their baselines afresh at the window's end. Only "
            "on a device's window."
        ),
    )


class MaintenanceOut(BaseModel):
    """A stored window holding notices, with who made it."""

    id: int
    device_id: str | None
    site: str | None
    start: str | None
    end: str | None
    reason: str | None
    created_by: str | None
    replaced: list[str] = Field(default_factory=list)
