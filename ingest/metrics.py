"""Prometheus counters of the ingest stage (served by the API at ``/metrics``)."""

from __future__ import annotations

from prometheus_client import Counter, Gauge, Histogram

MESSAGES = Counter("tecfleet_mqtt_messages_total", "MQTT messages received", ["kind"])
READINGS_STORED = Counter("tecfleet_readings_stored_total", "Readings newly stored")
READINGS_DUPLICATE = Counter(
    "tecfleet_readings_duplicate_total", "Readings already stored (redeliveries, replays)"
)
REJECTS = Counter("tecfleet_rejects_total", "Payloads or items refused", ["code"])
BATCH_SECONDS = Histogram(
    "tecfleet_ingest_commit_seconds",
    "Time to commit one ingest batch",
    buckets=(0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5),
)
STORE_FAILURES = Counter("tecfleet_ingest_store_failures_total", "Failed commit attempts")
QUEUE_DEPTH = Gauge("tecfleet_ingest_queue_messages", "Messages received and not yet committed")
CONNECTED = Gauge("tecfleet_mqtt_connected", "1 while the ingester is connected to the broker")
