"""Payloads that could not be stored, with the reason."""

from __future__ import annotations

from pydantic import BaseModel


class RejectOut(BaseModel):
    id: int
    received_at: str
    topic: str
    device_id: str | None
    item: int | None
    code: str
    reason: str
    payload: str
    payload_encoding: str
    payload_size: int
