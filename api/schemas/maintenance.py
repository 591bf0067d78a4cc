"""Maintenance windows in and out (times in RFC 3339 with offset): while one lasts, the
notices of its device or site are held, not sent."""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field


class MaintenanceIn(BaseModel):
    """A window holding notices: name a device or a site, and its start and end."""

    model_config = ConfigDict(extra="forbid")
    device_id: str | None = Field(None, pattern=r"^[A-Za-z0-9_.\-]{1,64}$")
    site: str | None = Field(None, max_length=200)
    start: str
    end: str
    reason: str | None = Field(None, max_length=2000)


class MaintenanceOut(BaseModel):
    """A stored window holding notices, with who made it."""

    id: int
    device_id: str | None
    site: str | None
    start: str | None
    end: str | None
    reason: str | None
    created_by: str | None
