"""The API stage: the REST API, delivery of alert notices and the running service.

``create_app`` builds the HTTP application over a database engine; ``Service`` runs the
roles of one process; ``Notifier`` drains the notice outbox.

The names are imported from their modules on first use, so that ``python -m
tecfleet.api.cli`` (which imports this package first) starts without loading the web stack.
"""

from __future__ import annotations

from importlib import import_module
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from tecfleet.api.app import create_app
    from tecfleet.api.delivery import Notifier
    from tecfleet.api.errors import CursorError, WebhookError
    from tecfleet.api.service import Service

__all__ = ["CursorError", "Notifier", "Service", "WebhookError", "create_app"]

_HOMES = {
    "CursorError": "tecfleet.api.errors",
    "Notifier": "tecfleet.api.delivery",
    "Service": "tecfleet.api.service",
    "WebhookError": "tecfleet.api.errors",
    "create_app": "tecfleet.api.app",
}


def __getattr__(name: str) -> Any:
    if name in _HOMES:
        return getattr(import_module(_HOMES[name]), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
