"""Threshold overrides of a device or a site."""

from __future__ import annotations

from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.analytics import alerts as rules
from tecfleet.api.schemas.policies import PolicyOut


def set_policy(engine: Engine, scope: str, name: str, thresholds: dict[str, Any]) -> PolicyOut:
    """Store the overrides (AlertError when a name or value is not an alert policy's)."""
    rules.set_policy(engine, scope, name, thresholds)
    return PolicyOut(scope=scope, name=name, thresholds=thresholds)
