"""Threshold overrides of a device or a site."""

from __future__ import annotations

from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.analytics import alerts as rules
from tecfleet.api.auth import Principal
from tecfleet.api.schemas.policies import PolicyOut
from tecfleet.api.services.audit import record_change
from tecfleet.ingest.db import sites as sites_db


def set_policy(
    engine: Engine, who: Principal, scope: str, name: str, thresholds: dict[str, Any]
) -> PolicyOut:
    """Store the overrides (AlertError when a name or value is not an alert policy's), on
    record in the audit trail."""
    rules.set_policy(engine, scope, name, thresholds)
    site = name if scope == "site" else sites_db.known_site(engine, name)
    record_change(engine, who, "policy.set", f"{scope}/{name}", {"thresholds": thresholds}, site)
    return PolicyOut(scope=scope, name=name, thresholds=thresholds)


def within_sites(engine: Engine, who: Principal, scope: str, name: str) -> bool:
    """Whether the device or site a policy names lies within the key's sites."""
    if who.sites is None:
        return True
    return who.sees_site(name if scope == "site" else sites_db.known_site(engine, name))
