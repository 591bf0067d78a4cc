"""Answers of the service routes (liveness, readiness)."""

from __future__ import annotations

from pydantic import BaseModel


class HealthzOut(BaseModel):
    status: str


class ReadyOut(BaseModel):
    ready: bool
    detail: str | None = None
