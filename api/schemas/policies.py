"""Threshold overrides of a device or a site."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel


class PolicyOut(BaseModel):
    """The overrides as stored: names of alert policy fields and their values."""

    scope: str
    name: str
    thresholds: dict[str, Any]
