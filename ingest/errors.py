"""The root of tecfleet's one exception tree, and the ingest stage's errors.

Every error tecfleet raises on purpose derives from :class:`TecfleetError`. Each stage keeps its
own errors beside it: ``tecfleet.analytics.errors`` (physics, fits, alert rules) and
``tecfleet.api.errors`` (requests, delivery) derive from this root. Third-party errors
(SQLAlchemy, paho-mqtt, pydantic ...) are translated into these at the boundary where they
occur, with ``raise ... from exc`` so the original stays attached.
"""

from __future__ import annotations


class TecfleetError(Exception):
    """Base class of every error tecfleet raises on purpose."""


class SettingsError(TecfleetError):
    """The settings (environment, file or flags) are invalid."""


class PayloadError(TecfleetError):
    """A telemetry payload (or one item of it) cannot be stored.

    ``code`` is a short machine-readable reason (``invalid_json``, ``missing_field`` ...),
    ``detail`` the sentence a person reads.
    """

    def __init__(self, code: str, detail: str) -> None:
        super().__init__(f"{code}: {detail}")
        self.code = code
        self.detail = detail


class StoreError(TecfleetError):
    """The database refused or could not be reached."""


class NotFoundError(TecfleetError):
    """A named object (device, alert, key ...) does not exist."""


class BrokerError(TecfleetError):
    """The MQTT broker could not be reached or refused us."""


__all__ = [
    "BrokerError",
    "NotFoundError",
    "PayloadError",
    "SettingsError",
    "StoreError",
    "TecfleetError",
]
