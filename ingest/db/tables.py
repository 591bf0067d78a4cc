"""Every table of tecfleet, in one SQLAlchemy Core metadata (Alembic migrations mirror it).

Times are stored as integer milliseconds since the Unix epoch, UTC (``*_ms`` columns): exact,
the same on SQLite and PostgreSQL, cheap to compare and to load into numpy. The API turns them
into RFC 3339 strings at the edge.
"""

from __future__ import annotations

import sqlalchemy as sa

metadata = sa.MetaData(
    naming_convention={
        "ix": "ix_%(table_name)s_%(column_0_N_name)s",
        "uq": "uq_%(table_name)s_%(column_0_N_name)s",
        "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
        "pk": "pk_%(table_name)s",
        "ck": "ck_%(table_name)s_%(constraint_name)s",
    }
)

#: A reading's optional interval summaries (migration 0006), each NULL where the reading
#: carries none: the interval they cover [s], the means over it of the four temperatures [°C],
#: of the current [A], of its square [A²] and of the electrical power [W], the share of it
#: the module was on [-], and the cabinet air's lowest and highest [°C]. See ingest/PAYLOAD.md.
SUMMARY_COLUMNS = (
    "interval_s",
    "t_cabinet_mean",
    "t_cold_mean",
    "t_hot_mean",
    "t_ambient_mean",
    "current_mean",
    "current_sq_mean",
    "power_mean",
    "on_share",
    "t_cabinet_min",
    "t_cabinet_max",
)

devices = sa.Table(
    "devices",
    metadata,
    sa.Column("device_id", sa.String(64), primary_key=True),
    sa.Column("label", sa.String(200)),
    sa.Column("site", sa.String(200)),
    sa.Column("module", sa.JSON),
    sa.Column("cabinet", sa.JSON),
    sa.Column("registered_at_ms", sa.BigInteger),
    sa.Column("first_seen_ms", sa.BigInteger),
    sa.Column("last_reading_ms", sa.BigInteger),
    sa.Column("readings", sa.BigInteger, nullable=False, server_default="0"),
    sa.Column("status", sa.String(16)),
    sa.Column("status_at_ms", sa.BigInteger),
    # Kept by the reading writer for the overview (migration 0012).
    sa.Column("first_reading_ms", sa.BigInteger),
    sa.Column("last_t_cabinet", sa.Float),
)

readings = sa.Table(
    "readings",
    metadata,
    sa.Column("id", sa.BigInteger().with_variant(sa.Integer, "sqlite"), primary_key=True),
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), nullable=False),
    sa.Column("ts_ms", sa.BigInteger, nullable=False),
    sa.Column("seq", sa.BigInteger),
    sa.Column("t_cabinet", sa.Float, nullable=False),
    # NULL: the unit has no probe on that face (migration 0005).
    sa.Column("t_cold", sa.Float),
    sa.Column("t_hot", sa.Float),
    sa.Column("t_ambient", sa.Float, nullable=False),
    sa.Column("current", sa.Float, nullable=False),
    sa.Column("voltage", sa.Float, nullable=False),
    sa.Column("rh", sa.Float),
    sa.Column("door_open", sa.Boolean),
    *(sa.Column(name, sa.Float) for name in SUMMARY_COLUMNS),
    sa.Column("received_ms", sa.BigInteger, nullable=False),
    sa.UniqueConstraint("device_id", "ts_ms"),
)

rejects = sa.Table(
    "rejects",
    metadata,
    sa.Column("id", sa.BigInteger().with_variant(sa.Integer, "sqlite"), primary_key=True),
    sa.Column("received_ms", sa.BigInteger, nullable=False),
    sa.Column("topic", sa.String(1024), nullable=False),
    sa.Column("device_id", sa.String(64)),
    sa.Column("item", sa.Integer),
    sa.Column("code", sa.String(40), nullable=False),
    sa.Column("reason", sa.Text, nullable=False),
    sa.Column("payload", sa.LargeBinary, nullable=False),
    sa.Column("payload_size", sa.Integer, nullable=False),
)

api_keys = sa.Table(
    "api_keys",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True),
    sa.Column("name", sa.String(200), nullable=False),
    sa.Column("scope", sa.String(16), nullable=False),
    sa.Column("key_hash", sa.String(64), nullable=False, unique=True),
    sa.Column("prefix", sa.String(16), nullable=False),
    sa.Column("created_ms", sa.BigInteger, nullable=False),
    sa.Column("revoked_ms", sa.BigInteger),
    # migration 0007: NULL sites = the whole fleet; NULL expiry = never
    sa.Column("sites", sa.JSON),
    sa.Column("expires_ms", sa.BigInteger),
    sa.Column("last_used_ms", sa.BigInteger),
    sa.Column("created_by", sa.String(200)),
)

estimates = sa.Table(
    "estimates",
    metadata,
    sa.Column("id", sa.BigInteger().with_variant(sa.Integer, "sqlite"), primary_key=True),
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), nullable=False),
    sa.Column("key", sa.String(64), nullable=False),
    sa.Column("at_ms", sa.BigInteger, nullable=False),
    sa.Column("value", sa.Float),
    sa.Column("stderr", sa.Float),
    sa.Column("n", sa.Integer, nullable=False, server_default="0"),
    sa.Column("reliable", sa.Boolean, nullable=False, server_default=sa.true()),
    sa.Column("note", sa.Text),
    # What the estimate rests on: the channels and method (migration 0005).
    sa.Column("basis", sa.Text),
    sa.UniqueConstraint("device_id", "key", "at_ms"),
)

#: The newest row of every device and key (a valued row before an unvalued one), kept by
#: triggers on ``estimates`` (migration 0010): what the health answer and the fleet read.
estimates_latest = sa.Table(
    "estimates_latest",
    metadata,
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), primary_key=True),
    sa.Column("key", sa.String(64), primary_key=True),
    sa.Column("at_ms", sa.BigInteger, nullable=False),
    sa.Column("value", sa.Float),
    sa.Column("stderr", sa.Float),
    sa.Column("n", sa.Integer, nullable=False, server_default="0"),
    sa.Column("reliable", sa.Boolean, nullable=False, server_default=sa.true()),
    sa.Column("note", sa.Text),
    sa.Column("basis", sa.Text),
    # The fleet's worst units by a key, highest first (migration 0012).
    sa.Index("ix_estimates_latest_key_value", "key", "value"),
)

alerts = sa.Table(
    "alerts",
    metadata,
    sa.Column("id", sa.BigInteger().with_variant(sa.Integer, "sqlite"), primary_key=True),
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), nullable=False),
    sa.Column("kind", sa.String(32), nullable=False),
    sa.Column("severity", sa.String(16), nullable=False),
    sa.Column("state", sa.String(16), nullable=False),
    sa.Column("opened_ms", sa.BigInteger, nullable=False),
    sa.Column("updated_ms", sa.BigInteger, nullable=False),
    sa.Column("resolved_ms", sa.BigInteger),
    sa.Column("summary", sa.Text, nullable=False),
    sa.Column("evidence", sa.JSON, nullable=False),
    sa.Column("reopen_count", sa.Integer, nullable=False, server_default="0"),
    # the cause alert of the incident this alert belongs to (migration 0004); NULL: alone
    sa.Column("incident_id", sa.BigInteger().with_variant(sa.Integer, "sqlite"), index=True),
    # the highest severity a notice of this alert has told since its last told resolution
    # (migration 0011); NULL: none told
    sa.Column("told_severity", sa.String(16)),
    sa.Index("ix_alerts_device_id_kind_state", "device_id", "kind", "state"),
)


# ---------------------------------------------------------------------------
# Diagnostics progress (migration 0002). Written only by the analysis runner:
# ``done_ms`` is the end of the last analysed step (event time, epoch ms UTC); ``state``
# carries what the next step needs (fitted parameters, baselines, CUSUM sums, trend series).
# ---------------------------------------------------------------------------

analysis_state = sa.Table(
    "analysis_state",
    metadata,
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), primary_key=True),
    sa.Column("done_ms", sa.BigInteger, nullable=False),
    sa.Column("state", sa.JSON, nullable=False),
    sa.Column("updated_ms", sa.BigInteger, nullable=False),
)


# Sharded analysis (migration 0009): which analysis process holds each device, till when, and
# which processes are alive. A device is analysed only under its lease (see ingest/db/leases.py).
analysis_leases = sa.Table(
    "analysis_leases",
    metadata,
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), primary_key=True),
    sa.Column("owner", sa.String(120)),
    sa.Column("expires_ms", sa.BigInteger, nullable=False, server_default="0"),
    sa.Index("ix_analysis_leases_owner", "owner"),
)

analysis_workers = sa.Table(
    "analysis_workers",
    metadata,
    sa.Column("worker_id", sa.String(120), primary_key=True),
    sa.Column("seen_ms", sa.BigInteger, nullable=False),
)

# ---------------------------------------------------------------------------
# Alerts: lifecycle and delivery (migration 0003). Written by the alert engine
# (progress, audit, outbox) and the API's delivery (webhooks, outbox drain).
# ``alert_progress.done_ms`` is the event time up to which alerts are evaluated; ``state``
# carries each rule's pending/clearing timers so a fresh process continues where it stopped.
# ``notifications`` is the outbox, written in the same transaction as the alert change.
# ---------------------------------------------------------------------------

_ALERT_BIGID = sa.BigInteger().with_variant(sa.Integer, "sqlite")

alert_progress = sa.Table(
    "alert_progress",
    metadata,
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), primary_key=True),
    sa.Column("done_ms", sa.BigInteger, nullable=False),
    sa.Column("state", sa.JSON, nullable=False),
    sa.Column("updated_ms", sa.BigInteger, nullable=False),
)

alert_audit = sa.Table(
    "alert_audit",
    metadata,
    sa.Column("id", _ALERT_BIGID, primary_key=True),
    sa.Column("alert_id", _ALERT_BIGID, sa.ForeignKey("alerts.id"), nullable=False, index=True),
    sa.Column("at_ms", sa.BigInteger, nullable=False),
    sa.Column("from_state", sa.String(16)),
    sa.Column("to_state", sa.String(16), nullable=False),
    sa.Column("severity", sa.String(16), nullable=False),
    sa.Column("actor", sa.String(200), nullable=False),
    sa.Column("note", sa.Text),
)

alert_policies = sa.Table(
    "alert_policies",
    metadata,
    sa.Column("scope", sa.String(16), primary_key=True),
    sa.Column("name", sa.String(200), primary_key=True),
    sa.Column("thresholds", sa.JSON, nullable=False),
    sa.Column("updated_ms", sa.BigInteger, nullable=False),
)

maintenance_windows = sa.Table(
    "maintenance_windows",
    metadata,
    sa.Column("id", _ALERT_BIGID, primary_key=True),
    sa.Column("device_id", sa.String(64)),
    sa.Column("site", sa.String(200)),
    sa.Column("start_ms", sa.BigInteger, nullable=False),
    sa.Column("end_ms", sa.BigInteger, nullable=False),
    sa.Column("reason", sa.Text),
    sa.Column("created_ms", sa.BigInteger, nullable=False),
    sa.Column("created_by", sa.String(200)),
    # the parts replaced during the window, a list of REPLACEABLE_PARTS names (migration
    # 0013); NULL: none recorded
    sa.Column("replaced", sa.JSON),
)

notifications = sa.Table(
    "notifications",
    metadata,
    sa.Column("id", _ALERT_BIGID, primary_key=True),
    sa.Column("created_ms", sa.BigInteger, nullable=False),
    sa.Column("event_ms", sa.BigInteger, nullable=False),
    sa.Column("event", sa.String(40), nullable=False),
    sa.Column("alert_id", _ALERT_BIGID),
    sa.Column("device_id", sa.String(64)),
    sa.Column("site", sa.String(200)),
    sa.Column("kind", sa.String(32)),
    sa.Column("payload", sa.JSON, nullable=False),
    sa.Column("state", sa.String(16), nullable=False, index=True),
    sa.Column("hold_until_ms", sa.BigInteger),
    sa.Column("mqtt_state", sa.String(16), nullable=False, index=True),
    sa.Column("group_id", _ALERT_BIGID),
)

webhooks = sa.Table(
    "webhooks",
    metadata,
    sa.Column("id", _ALERT_BIGID, primary_key=True),
    sa.Column("url", sa.String(2000), nullable=False),
    sa.Column("secret", sa.String(200), nullable=False),
    sa.Column("description", sa.String(200)),
    sa.Column("created_ms", sa.BigInteger, nullable=False),
    sa.Column("created_by", sa.String(200)),
    sa.Column("deleted_ms", sa.BigInteger),
)

webhook_deliveries = sa.Table(
    "webhook_deliveries",
    metadata,
    sa.Column("id", _ALERT_BIGID, primary_key=True),
    sa.Column("webhook_id", _ALERT_BIGID, sa.ForeignKey("webhooks.id"), nullable=False),
    sa.Column("notification_id", _ALERT_BIGID, sa.ForeignKey("notifications.id"), nullable=False),
    sa.Column("msg_id", sa.String(80), nullable=False),
    sa.Column("state", sa.String(16), nullable=False),
    sa.Column("attempts", sa.Integer, nullable=False, server_default="0"),
    sa.Column("created_ms", sa.BigInteger, nullable=False),
    sa.Column("next_attempt_ms", sa.BigInteger, nullable=False),
    sa.Column("last_attempt_ms", sa.BigInteger),
    sa.Column("last_status", sa.Integer),
    sa.Column("last_error", sa.Text),
    sa.Column("delivered_ms", sa.BigInteger),
    sa.UniqueConstraint("webhook_id", "notification_id"),
    sa.Index("ix_webhook_deliveries_state_next_attempt_ms", "state", "next_attempt_ms"),
)


# ---------------------------------------------------------------------------
# Audit trail and calibration offsets (migration 0007).
# ``audit_log`` is append-only: triggers refuse UPDATE and DELETE on it.
# A calibration offset is added to a sensor's stored value when readings are read
# (``valid_from_ms`` inclusive, ``valid_to_ms`` exclusive, NULL = open); stored readings
# stay as received. ``deleted_ms`` marks a withdrawn offset, kept for the record.
# ---------------------------------------------------------------------------

audit_log = sa.Table(
    "audit_log",
    metadata,
    sa.Column("id", _ALERT_BIGID, primary_key=True),
    sa.Column("at_ms", sa.BigInteger, nullable=False),
    sa.Column("actor", sa.String(200), nullable=False),
    sa.Column("actor_key_id", sa.Integer),
    sa.Column("action", sa.String(64), nullable=False),
    sa.Column("target", sa.String(300), nullable=False),
    sa.Column("site", sa.String(200)),
    sa.Column("detail", sa.JSON, nullable=False),
    sa.Index("ix_audit_log_at_ms", "at_ms"),
)

calibration_offsets = sa.Table(
    "calibration_offsets",
    metadata,
    sa.Column("id", _ALERT_BIGID, primary_key=True),
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), nullable=False),
    sa.Column("sensor", sa.String(32), nullable=False),
    sa.Column("offset", sa.Float, nullable=False),
    sa.Column("valid_from_ms", sa.BigInteger, nullable=False),
    sa.Column("valid_to_ms", sa.BigInteger),
    sa.Column("note", sa.Text),
    sa.Column("created_ms", sa.BigInteger, nullable=False),
    sa.Column("created_by", sa.String(200)),
    sa.Column("deleted_ms", sa.BigInteger),
    sa.Index("ix_calibration_offsets_device_id", "device_id"),
)


# ---------------------------------------------------------------------------
# Reading rollups (migration 0008). Written by retention only: when raw readings pass their
# age limit, each device's readings are summarised per interval (``span_ms`` wide, starting at
# ``bucket_ms``) by the database and the raw rows go. ``n`` counts the readings summarised,
# ``<channel>_n`` those that carried the channel (a face or humidity probe may be missing), so
# rollups of late rows merge exactly with the ones already kept.
# ---------------------------------------------------------------------------

#: Reading channels summarised by min, max and mean (units as in ``readings``).
ROLLUP_CHANNELS = ("t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh")

reading_rollups = sa.Table(
    "reading_rollups",
    metadata,
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), primary_key=True),
    sa.Column("span_ms", sa.BigInteger, primary_key=True),
    sa.Column("bucket_ms", sa.BigInteger, primary_key=True),
    sa.Column("n", sa.BigInteger, nullable=False),
    sa.Column("door_open_n", sa.BigInteger, nullable=False),
    *(
        sa.Column(f"{channel}_{stat}", sa.BigInteger if stat == "n" else sa.Float)
        for channel in ROLLUP_CHANNELS
        for stat in ("n", "min", "max", "mean")
    ),
)
