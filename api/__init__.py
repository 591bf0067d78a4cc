"""The API stage: the REST API, delivery of alert notices and the running service.

``create_app`` builds the HTTP application over a database engine; ``Service`` runs the
roles of one process; ``Notifier`` drains the notice outbox.
"""

from tecfleet.api.app import create_app
from tecfleet.api.delivery import Notifier
from tecfleet.api.errors import CursorError, WebhookError
from tecfleet.api.service import Service

__all__ = ["CursorError", "Notifier", "Service", "WebhookError", "create_app"]
