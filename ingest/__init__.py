"""The ingest stage: MQTT in, validated readings stored.

``payload`` validates what devices publish (with ``telemetry_item`` for the fields of one
reading and ``senml`` for SenML packs); ``ingester`` runs the MQTT session (``mqtt_session``) and
the writer that commits batches (``batch_writer``); ``settings`` is the one settings object of a
process; ``db`` holds every table and every SQL statement; ``errors`` roots the exception tree.
"""

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
