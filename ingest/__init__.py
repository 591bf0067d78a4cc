"""The ingest stage: MQTT in, validated readings stored.

``payload`` validates what devices publish (with ``telemetry_item`` for the fields of one
reading and ``senml`` for SenML packs); ``ingester`` runs the MQTT session (``mqtt_session``) and
the writer that commits batches (``batch_writer``); ``settings`` is the one settings object of a
process; ``db`` holds every table and every SQL statement; ``errors`` roots the exception tree.

The names are imported from their modules on first use: every stage imports this package (the
exception tree is rooted here), and the physics must not pay for the MQTT and web stacks.
"""

from __future__ import annotations

from importlib import import_module
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from tecfleet.ingest.embedded_broker import EmbeddedBroker
    from tecfleet.ingest.errors import (
        BrokerError,
        NotFoundError,
        PayloadError,
        SettingsError,
        StoreError,
        TecfleetError,
    )
    from tecfleet.ingest.ingester import Ingester
    from tecfleet.ingest.mqtt_session import detect_protocol
    from tecfleet.ingest.payload import Parsed, parse_message, split_topic
    from tecfleet.ingest.settings import Settings, load_settings
    from tecfleet.ingest.telemetry_item import TelemetryItem, parse_timestamp

__all__ = [
    "BrokerError",
    "EmbeddedBroker",
    "Ingester",
    "NotFoundError",
    "Parsed",
    "PayloadError",
    "Settings",
    "SettingsError",
    "StoreError",
    "TecfleetError",
    "TelemetryItem",
    "detect_protocol",
    "load_settings",
    "parse_message",
    "parse_timestamp",
    "split_topic",
]

_HOMES = {
    "BrokerError": "tecfleet.ingest.errors",
    "EmbeddedBroker": "tecfleet.ingest.embedded_broker",
    "Ingester": "tecfleet.ingest.ingester",
    "NotFoundError": "tecfleet.ingest.errors",
    "Parsed": "tecfleet.ingest.payload",
    "PayloadError": "tecfleet.ingest.errors",
    "Settings": "tecfleet.ingest.settings",
    "SettingsError": "tecfleet.ingest.errors",
    "StoreError": "tecfleet.ingest.errors",
    "TecfleetError": "tecfleet.ingest.errors",
    "TelemetryItem": "tecfleet.ingest.telemetry_item",
    "detect_protocol": "tecfleet.ingest.mqtt_session",
    "load_settings": "tecfleet.ingest.settings",
    "parse_message": "tecfleet.ingest.payload",
    "parse_timestamp": "tecfleet.ingest.telemetry_item",
    "split_topic": "tecfleet.ingest.payload",
}


def __getattr__(name: str) -> Any:
    if name in _HOMES:
        return getattr(import_module(_HOMES[name]), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
