"""Entries of the audit trail."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, Field


class AuditOut(BaseModel):
    """Who changed what and when."""

    id: int
    at: str = Field(description="when, RFC 3339 UTC")
    actor: str = Field(description="the name of the key (or command-line user) that acted")
    actor_key_id: int | None
    action: str = Field(description="what kind of change, e.g. key.create or alert.acknowledge")
    target: str = Field(description="what was changed, e.g. device/cab-1 or key/3")
    site: str | None
    detail: dict[str, Any] = Field(description="the values given")
