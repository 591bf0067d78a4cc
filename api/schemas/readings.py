"""Stored readings out (the payload's fields; ``ts`` in RFC 3339 UTC)."""

from __future__ import annotations

from pydantic import BaseModel


class ReadingOut(BaseModel):
    """One stored reading; ``t_cold``/``t_hot`` are null for a unit without that face probe."""

    ts: str
    seq: int | None
    t_cabinet: float
    t_cold: float | None
    t_hot: float | None
    t_ambient: float
    current: float
    voltage: float
    rh: float | None
    door_open: bool | None
