"""Initial schema: devices, readings, rejects, API keys, estimates, alerts.

Revision ID: 0001
Revises:
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None

_BIGID = sa.BigInteger().with_variant(sa.Integer, "sqlite")


def upgrade() -> None:
    op.create_table(
        "devices",
        sa.Column("device_id", sa.String(64), nullable=False),
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
        sa.PrimaryKeyConstraint("device_id", name="pk_devices"),
    )
    op.create_table(
        "readings",
        sa.Column("id", _BIGID, nullable=False),
        sa.Column("device_id", sa.String(64), nullable=False),
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
        sa.PrimaryKeyConstraint("id", name="pk_readings"),
        sa.ForeignKeyConstraint(
            ["device_id"], ["devices.device_id"], name="fk_readings_device_id_devices"
        ),
        sa.UniqueConstraint("device_id", "ts_ms", name="uq_readings_device_id_ts_ms"),
    )
    op.create_table(
        "rejects",
        sa.Column("id", _BIGID, nullable=False),
        sa.Column("received_ms", sa.BigInteger, nullable=False),
        sa.Column("topic", sa.String(1024), nullable=False),
        sa.Column("device_id", sa.String(64)),
        sa.Column("item", sa.Integer),
        sa.Column("code", sa.String(40), nullable=False),
        sa.Column("reason", sa.Text, nullable=False),
        sa.Column("payload", sa.LargeBinary, nullable=False),
        sa.Column("payload_size", sa.Integer, nullable=False),
        sa.PrimaryKeyConstraint("id", name="pk_rejects"),
    )
    op.create_table(
        "api_keys",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("name", sa.String(200), nullable=False),
        sa.Column("scope", sa.String(16), nullable=False),
        sa.Column("key_hash", sa.String(64), nullable=False),
        sa.Column("prefix", sa.String(16), nullable=False),
        sa.Column("created_ms", sa.BigInteger, nullable=False),
        sa.Column("revoked_ms", sa.BigInteger),
        sa.PrimaryKeyConstraint("id", name="pk_api_keys"),
        sa.UniqueConstraint("key_hash", name="uq_api_keys_key_hash"),
    )
    op.create_table(
        "estimates",
        sa.Column("id", _BIGID, nullable=False),
        sa.Column("device_id", sa.String(64), nullable=False),
        sa.Column("key", sa.String(64), nullable=False),
        sa.Column("at_ms", sa.BigInteger, nullable=False),
        sa.Column("value", sa.Float),
        sa.Column("stderr", sa.Float),
        sa.Column("n", sa.Integer, nullable=False, server_default="0"),
        sa.Column("reliable", sa.Boolean, nullable=False, server_default=sa.true()),
        sa.Column("note", sa.Text),
        sa.PrimaryKeyConstraint("id", name="pk_estimates"),
        sa.ForeignKeyConstraint(
            ["device_id"], ["devices.device_id"], name="fk_estimates_device_id_devices"
        ),
        sa.UniqueConstraint("device_id", "key", "at_ms", name="uq_estimates_device_id_key_at_ms"),
    )
    op.create_table(
        "alerts",
        sa.Column("id", _BIGID, nullable=False),
        sa.Column("device_id", sa.String(64), nullable=False),
        sa.Column("kind", sa.String(32), nullable=False),
        sa.Column("severity", sa.String(16), nullable=False),
        sa.Column("state", sa.String(16), nullable=False),
        sa.Column("opened_ms", sa.BigInteger, nullable=False),
        sa.Column("updated_ms", sa.BigInteger, nullable=False),
        sa.Column("resolved_ms", sa.BigInteger),
        sa.Column("summary", sa.Text, nullable=False),
        sa.Column("evidence", sa.JSON, nullable=False),
        sa.Column("reopen_count", sa.Integer, nullable=False, server_default="0"),
        sa.PrimaryKeyConstraint("id", name="pk_alerts"),
        sa.ForeignKeyConstraint(
            ["device_id"], ["devices.device_id"], name="fk_alerts_device_id_devices"
        ),
    )
    op.create_index("ix_alerts_device_id_kind_state", "alerts", ["device_id", "kind", "state"])


def downgrade() -> None:
    for table in ("alerts", "estimates", "api_keys", "rejects", "readings", "devices"):
        op.drop_table(table)
