"""Webhooks in and out, and their delivery log."""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field


class WebhookIn(BaseModel):
    model_config = ConfigDict(extra="forbid")
    url: str = Field(max_length=2000)
    description: str | None = Field(None, max_length=200)


class WebhookOut(BaseModel):
    id: int
    url: str
    description: str | None
    created_at: str | None


class WebhookCreatedOut(WebhookOut):
    """A new hook with its signing secret, shown in this answer only."""

    secret: str


class DeliveryOut(BaseModel):
    """One notice to one hook: state, attempts and the receiver's last answer."""

    id: int
    msg_id: str
    event: str
    alert_id: int | None
    state: str
    attempts: int
    created_at: str | None
    last_attempt_at: str | None
    next_attempt_at: str | None
    last_status: int | None
    last_error: str | None
    delivered_at: str | None
