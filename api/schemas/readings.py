"""Stored readings out (the payload's fields; ``ts`` in RFC 3339 UTC)."""

from __future__ import annotations

from pydantic import BaseModel


class ReadingOut(BaseModel):
    ts: str
    seq: int | None
    t_cabinet: float
    t_cold: float
    t_hot: float
    t_ambient: float
    current: float
    voltage: float
    rh: float | None
    door_open: bool | None
