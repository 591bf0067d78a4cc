"""The database: table definitions, engine set-up and the writes the ingester makes.

Times are stored as integer milliseconds since the Unix epoch, UTC (``*_ms`` columns): exact,
the same on SQLite and PostgreSQL, cheap to compare and to load into numpy. The API turns them
into RFC 3339 strings at the edge.

SQLite runs in WAL mode with ``synchronous=FULL``: in WAL mode ``NORMAL`` may lose the last
transactions on power failure, and the ingester acknowledges a message to the broker only after
its commit, so a commit has to survive a power cut. FULL costs one fsync per commit, which the
batching writer amortises over hundreds of readings.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, NamedTuple

import sqlalchemy as sa
from sqlalchemy import event
from sqlalchemy.dialects import postgresql, sqlite
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.ingest.errors import StoreError

metadata = sa.MetaData(
    naming_convention={
        "ix": "ix_%(table_name)s_%(column_0_N_name)s",
        "uq": "uq_%(table_name)s_%(column_0_N_name)s",
        "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
        "pk": "pk_%(table_name)s",
        "ck": "ck_%(table_name)s_%(constraint_name)s",
    }
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
)

readings = sa.Table(
    "readings",
    metadata,
    sa.Column("id", sa.BigInteger().with_variant(sa.Integer, "sqlite"), primary_key=True),
    sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), nullable=False),
    sa.Column("ts_ms", sa.BigInteger, nullable=False),
    sa.Column("seq", sa.BigInteger),
    sa.Column("t_cabinet", sa.Float, nullable=False),
    sa.Column("t_cold", sa.Float, nullable=False),
    sa.Column("t_hot", sa.Float, nullable=False),
    sa.Column("t_ambient", sa.Float, nullable=False),
    sa.Column("current", sa.Float, nullable=False),
    sa.Column("voltage", sa.Float, nullable=False),
    sa.Column("rh", sa.Float),
    sa.Column("door_open", sa.Boolean),
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
    sa.UniqueConstraint("device_id", "key", "at_ms"),
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
    sa.Index("ix_alerts_device_id_kind_state", "device_id", "kind", "state"),
)


def now_ms() -> int:
    return time.time_ns() // 1_000_000


def _sqlite_pragmas(dbapi_connection: Any, _record: Any) -> None:
    cursor = dbapi_connection.cursor()
    cursor.execute("PRAGMA journal_mode=WAL")
    cursor.execute("PRAGMA synchronous=FULL")
    cursor.execute("PRAGMA foreign_keys=ON")
    cursor.execute("PRAGMA busy_timeout=10000")
    cursor.close()


def make_engine(url: str) -> Engine:
    """An engine for ``url`` (SQLAlchemy URL), with SQLite set to WAL and durable commits."""
    try:
        sa_url = sa.make_url(url)
    except Exception as exc:  # SQLAlchemy raises ArgumentError for garbage
        raise StoreError(f"invalid database URL {url!r}: {exc}") from exc
    if sa_url.get_backend_name() == "sqlite":
        database = sa_url.database or ""
        if database and database != ":memory:":
            from pathlib import Path

            Path(database).expanduser().resolve().parent.mkdir(parents=True, exist_ok=True)
        engine = sa.create_engine(sa_url, connect_args={"check_same_thread": False})
        event.listen(engine, "connect", _sqlite_pragmas)
        return engine
    if sa_url.get_backend_name() == "postgresql":
        return sa.create_engine(sa_url, pool_pre_ping=True, connect_args={"connect_timeout": 5})
    raise StoreError(
        f"unsupported database {sa_url.get_backend_name()!r}; use sqlite or postgresql"
    )


def migrate(engine: Engine) -> None:
    """Apply every Alembic migration not yet applied (``tecfleet db upgrade``)."""
    from alembic import command
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", "tecfleet.ingest:migrations")
    try:
        with engine.begin() as connection:
            config.attributes["connection"] = connection
            command.upgrade(config, "head")
    except SQLAlchemyError as exc:
        raise StoreError(f"database migration failed: {exc}") from exc


class Reading(NamedTuple):
    """One validated reading of one device (temperatures in °C).

    A named tuple rather than a dataclass: the ingester makes one per reading, and a tuple in
    the insert's column order goes to the driver as it is.
    """

    device_id: str
    ts_ms: int
    t_cabinet: float
    t_cold: float
    t_hot: float
    t_ambient: float
    current: float
    voltage: float
    seq: int | None = None
    rh: float | None = None
    door_open: bool | None = None


@dataclass(frozen=True, slots=True)
class Reject:
    """One payload (or one item of a batch) that cannot be stored, and why."""

    topic: str
    payload: bytes
    code: str
    reason: str
    device_id: str | None = None
    item: int | None = None


@dataclass(frozen=True, slots=True)
class StatusUpdate:
    device_id: str
    status: str
    at_ms: int


_DEVICE_BUMP = (
    devices.update()
    .where(devices.c.device_id == sa.bindparam("b_device"))
    .values(
        readings=devices.c.readings + sa.bindparam("b_count"),
        last_reading_ms=sa.case(
            (
                sa.or_(
                    devices.c.last_reading_ms.is_(None),
                    devices.c.last_reading_ms < sa.bindparam("b_newest"),
                ),
                sa.bindparam("b_newest"),
            ),
            else_=devices.c.last_reading_ms,
        ),
    )
)

_DEVICE_RECOUNT = (
    devices.update()
    .where(devices.c.device_id == sa.bindparam("b_device"))
    .values(
        readings=sa.select(sa.func.count())
        .select_from(readings)
        .where(readings.c.device_id == sa.bindparam("b_device"))
        .scalar_subquery(),
        last_reading_ms=sa.select(sa.func.max(readings.c.ts_ms))
        .where(readings.c.device_id == sa.bindparam("b_device"))
        .scalar_subquery(),
    )
)


# Reading's field order, then the receive time.
_READING_INSERT_COLUMNS = ", ".join((*Reading._fields, "received_ms"))


def _insert_readings_sql(connection: Connection) -> str:
    marker = "?" if connection.dialect.paramstyle == "qmark" else "%s"
    values = ", ".join([marker] * (len(Reading._fields) + 1))
    return (
        f"INSERT INTO readings ({_READING_INSERT_COLUMNS}) VALUES ({values})"
        " ON CONFLICT (device_id, ts_ms) DO NOTHING"
    )


def _insert(dialect_name: str, table: sa.Table) -> Any:
    if dialect_name == "postgresql":
        return postgresql.insert(table)
    return sqlite.insert(table)


def write_batch(
    connection: Connection,
    batch_readings: Sequence[Reading],
    batch_rejects: Sequence[Reject],
    statuses: Sequence[StatusUpdate] = (),
    *,
    payload_cap: int = 4096,
) -> int:
    """Store readings idempotently, plus rejects and status changes, in the caller's transaction.

    Returns the number of readings newly stored; a reading whose (device, timestamp) is already
    stored is skipped, so a redelivered message stores nothing twice.
    """
    dialect = connection.dialect.name
    received = now_ms()
    stored = 0
    device_ids = sorted({r.device_id for r in batch_readings} | {s.device_id for s in statuses})
    if device_ids:
        upsert = _insert(dialect, devices).on_conflict_do_nothing(index_elements=["device_id"])
        connection.execute(
            upsert, [{"device_id": d, "first_seen_ms": received, "readings": 0} for d in device_ids]
        )
    if batch_readings:
        # Straight to the driver's executemany: SQLAlchemy's per-row parameter processing
        # would cost more than the insert itself.
        tail = (received,)
        rows = [r + tail for r in batch_readings]
        result = connection.exec_driver_sql(_insert_readings_sql(connection), rows)
        stored = result.rowcount
        if stored == len(rows):
            # Every row was new: the batch itself says what each device gained.
            per_device: dict[str, list[int]] = {}
            for r in batch_readings:
                entry = per_device.setdefault(r.device_id, [0, r.ts_ms])
                entry[0] += 1
                entry[1] = max(entry[1], r.ts_ms)
            connection.execute(
                _DEVICE_BUMP,
                [{"b_device": d, "b_count": c, "b_newest": t} for d, (c, t) in per_device.items()],
            )
        else:
            # Some rows were already stored (a redelivery or replay): recount those devices
            # from the index rather than guess which rows were new.
            touched = sorted({r.device_id for r in batch_readings})
            connection.execute(_DEVICE_RECOUNT, [{"b_device": d} for d in touched])
            stored = max(stored, 0)
    for status in statuses:
        connection.execute(
            devices.update()
            .where(devices.c.device_id == status.device_id)
            .where(sa.or_(devices.c.status_at_ms.is_(None), devices.c.status_at_ms <= status.at_ms))
            .values(status=status.status, status_at_ms=status.at_ms)
        )
    if batch_rejects:
        connection.execute(
            rejects.insert(),
            [
                {
                    "received_ms": received,
                    "topic": rej.topic[:1024],
                    "device_id": rej.device_id,
                    "item": rej.item,
                    "code": rej.code,
                    "reason": rej.reason[:2000],
                    "payload": bytes(rej.payload[:payload_cap]),
                    "payload_size": len(rej.payload),
                }
                for rej in batch_rejects
            ],
        )
    return stored


def store_batch(
    engine: Engine,
    batch_readings: Sequence[Reading],
    batch_rejects: Sequence[Reject] = (),
    statuses: Sequence[StatusUpdate] = (),
    *,
    payload_cap: int = 4096,
) -> int:
    """``write_batch`` in a transaction of its own; database failures become ``StoreError``."""
    try:
        with engine.begin() as connection:
            return write_batch(
                connection, batch_readings, batch_rejects, statuses, payload_cap=payload_cap
            )
    except SQLAlchemyError as exc:
        raise StoreError(f"could not store batch: {exc.__class__.__name__}: {exc}") from exc


def ping(engine: Engine) -> bool:
    """True when the database answers a trivial query."""
    try:
        with engine.connect() as connection:
            connection.execute(sa.text("SELECT 1"))
        return True
    except SQLAlchemyError:
        return False


READING_COLUMNS = (
    "ts_ms",
    "seq",
    "t_cabinet",
    "t_cold",
    "t_hot",
    "t_ambient",
    "current",
    "voltage",
    "rh",
    "door_open",
)


def load_readings(
    engine: Engine,
    device_id: str,
    start_ms: int | None = None,
    end_ms: int | None = None,
) -> Any:
    """Stored readings of one device as a pandas DataFrame, oldest first.

    Columns are ``READING_COLUMNS``; ``start_ms`` is inclusive and ``end_ms`` exclusive
    (milliseconds since the Unix epoch, UTC).
    """
    import pandas as pd

    stmt = sa.select(*(readings.c[name] for name in READING_COLUMNS)).where(
        readings.c.device_id == device_id
    )
    if start_ms is not None:
        stmt = stmt.where(readings.c.ts_ms >= start_ms)
    if end_ms is not None:
        stmt = stmt.where(readings.c.ts_ms < end_ms)
    stmt = stmt.order_by(readings.c.ts_ms)
    try:
        with engine.connect() as connection:
            result = connection.execute(stmt)
            frame = pd.DataFrame(result.fetchall(), columns=list(READING_COLUMNS))
    except SQLAlchemyError as exc:
        raise StoreError(f"could not load readings of {device_id}: {exc}") from exc
    return frame


# ---------------------------------------------------------------------------
# Diagnostics progress (migration 0002). Written only by tecfleet.analytics.runner:
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


# ---------------------------------------------------------------------------
# Alerts: lifecycle and delivery (migration 0003). Written by tecfleet.analytics.alerts
# (progress, audit, outbox) and tecfleet.api.notify / alert_routes (delivery, webhooks).
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
