"""Estimates out: the newest of every key, and the history of one."""

from __future__ import annotations

from pydantic import BaseModel, RootModel


class EstimateOut(BaseModel):
    """One estimate: ``value`` with its standard error from ``n`` samples, at time ``at``."""

    value: float | None
    stderr: float | None
    n: int
    reliable: bool
    at: str
    note: str | None


class EstimatePointOut(EstimateOut):
    """An estimate in a history, with its time also in milliseconds since the epoch."""

    at_ms: int


class HealthOut(RootModel[dict[str, EstimateOut]]):
    """The newest estimate of every key (``module.resistance_ohm``, ``performance.cop`` ...)."""
