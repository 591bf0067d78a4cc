"""Estimates out: the newest of every key, and the history of one."""

from __future__ import annotations

from pydantic import BaseModel, RootModel


class EstimateOut(BaseModel):
    """One estimate: ``value`` with its standard error from ``n`` samples, at time ``at``.

    ``basis`` says what it rests on (the channels and the method, e.g. the face probes or the
    module's own voltage); ``reason`` why it is not reliable (null where it is). A quantity the
    unit's sensors cannot reveal is served with ``value`` null, not reliable, and its reason.
    """

    value: float | None
    stderr: float | None
    n: int
    reliable: bool
    at: str
    note: str | None
    basis: str | None = None
    reason: str | None = None


class EstimatePointOut(EstimateOut):
    """An estimate in a history, with its time also in milliseconds since the epoch."""

    at_ms: int


class HealthOut(RootModel[dict[str, EstimateOut]]):
    """The newest estimate of every key (``module.resistance_ohm``, ``performance.cop`` ...)."""
