"""The plain functions behind the HTTP handlers, one module per resource.

Each reads or writes the store through ``tecfleet.ingest.db`` (or the alert rules of
``tecfleet.analytics.alerts``) and returns the response schemas; none knows about HTTP.
"""

from tecfleet.api.services import (
    alerts,
    audit,
    calibration,
    devices,
    events,
    export,
    health,
    keys,
    maintenance,
    policies,
    readings,
    rejects,
    webhooks,
)

__all__ = [
    "alerts",
    "audit",
    "calibration",
    "devices",
    "events",
    "export",
    "health",
    "keys",
    "maintenance",
    "policies",
    "readings",
    "rejects",
    "webhooks",
]
