"""The database: every table, every read and write of stored data, and migrations.

``tables`` holds the table definitions; ``engine`` makes engines, migrates and knows the
driver's placeholder style; ``readings`` writes the ingester's batches and reads readings for
every analysis. Other stages reach stored data through this package, never with SQL of their own.
"""

from tecfleet.ingest.db.engine import make_engine, marker, migrate, now_ms, ping
from tecfleet.ingest.db.readings import (
    READING_COLUMNS,
    Reading,
    Reject,
    StatusUpdate,
    first_reading_ms,
    load_readings,
    read_arrays,
    store_batch,
    write_batch,
)
from tecfleet.ingest.db.tables import (
    alert_audit,
    alert_policies,
    alert_progress,
    alerts,
    analysis_state,
    api_keys,
    audit_log,
    calibration_offsets,
    devices,
    estimates,
    estimates_latest,
    maintenance_windows,
    metadata,
    notifications,
    readings,
    rejects,
    webhook_deliveries,
    webhooks,
)

__all__ = [
    "READING_COLUMNS",
    "Reading",
    "Reject",
    "StatusUpdate",
    "alert_audit",
    "alert_policies",
    "alert_progress",
    "alerts",
    "analysis_state",
    "api_keys",
    "audit_log",
    "calibration_offsets",
    "devices",
    "estimates",
    "estimates_latest",
    "first_reading_ms",
    "load_readings",
    "maintenance_windows",
    "make_engine",
    "marker",
    "metadata",
    "migrate",
    "notifications",
    "now_ms",
    "ping",
    "read_arrays",
    "readings",
    "rejects",
    "store_batch",
    "webhook_deliveries",
    "webhooks",
    "write_batch",
]
