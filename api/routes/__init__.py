"""HTTP routes, one router per resource; each handler is a thin call of a service function."""

from fastapi import APIRouter

from tecfleet.api.routes import (
    alerts,
    audit,
    calibration,
    devices,
    events,
    export,
    fleet,
    health,
    keys,
    maintenance,
    policies,
    readings,
    rejects,
    reports,
    system,
    webhooks,
)

#: Every router, in the order the app includes them.
ROUTERS: tuple[APIRouter, ...] = (
    alerts.router,
    maintenance.router,
    policies.router,
    webhooks.router,
    system.router,
    devices.router,
    readings.router,
    health.router,
    fleet.router,
    reports.router,
    rejects.router,
    calibration.router,
    export.router,
    events.router,
    keys.router,
    audit.router,
)

__all__ = [
    "ROUTERS",
    "alerts",
    "audit",
    "calibration",
    "devices",
    "events",
    "export",
    "fleet",
    "health",
    "keys",
    "maintenance",
    "policies",
    "readings",
    "rejects",
    "reports",
    "system",
    "webhooks",
]
