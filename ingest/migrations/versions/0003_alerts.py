"""Alert lifecycle and delivery: evaluation progress, audit trail, threshold overrides,
maintenance windows, the notification outbox, webhooks and their delivery log.

Revision ID: 0003
Revises: 0002
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None

_BIGID = sa.BigInteger().with_variant(sa.Integer, "sqlite")


def upgrade() -> None:
    op.create_table(
        "alert_progress",
        sa.Column("device_id", sa.String(64), nullable=False),
        sa.Column("done_ms", sa.BigInteger, nullable=False),
        sa.Column("state", sa.JSON, nullable=False),
        sa.Column("updated_ms", sa.BigInteger, nullable=False),
        sa.PrimaryKeyConstraint("device_id", name="pk_alert_progress"),
        sa.ForeignKeyConstraint(
            ["device_id"], ["devices.device_id"], name="fk_alert_progress_device_id_devices"
        ),
    )
    op.create_table(
        "alert_audit",
        sa.Column("id", _BIGID, nullable=False),
        sa.Column("alert_id", _BIGID, nullable=False),
        sa.Column("at_ms", sa.BigInteger, nullable=False),
        sa.Column("from_state", sa.String(16)),
        sa.Column("to_state", sa.String(16), nullable=False),
        sa.Column("severity", sa.String(16), nullable=False),
        sa.Column("actor", sa.String(200), nullable=False),
        sa.Column("note", sa.Text),
        sa.PrimaryKeyConstraint("id", name="pk_alert_audit"),
        sa.ForeignKeyConstraint(["alert_id"], ["alerts.id"], name="fk_alert_audit_alert_id_alerts"),
    )
    op.create_index("ix_alert_audit_alert_id", "alert_audit", ["alert_id"])
    op.create_table(
        "alert_policies",
        sa.Column("scope", sa.String(16), nullable=False),
        sa.Column("name", sa.String(200), nullable=False),
        sa.Column("thresholds", sa.JSON, nullable=False),
        sa.Column("updated_ms", sa.BigInteger, nullable=False),
        sa.PrimaryKeyConstraint("scope", "name", name="pk_alert_policies"),
    )
    op.create_table(
        "maintenance_windows",
        sa.Column("id", _BIGID, nullable=False),
        sa.Column("device_id", sa.String(64)),
        sa.Column("site", sa.String(200)),
        sa.Column("start_ms", sa.BigInteger, nullable=False),
        sa.Column("end_ms", sa.BigInteger, nullable=False),
        sa.Column("reason", sa.Text),
        sa.Column("created_ms", sa.BigInteger, nullable=False),
        sa.Column("created_by", sa.String(200)),
        sa.PrimaryKeyConstraint("id", name="pk_maintenance_windows"),
    )
    op.create_table(
        "notifications",
        sa.Column("id", _BIGID, nullable=False),
        sa.Column("created_ms", sa.BigInteger, nullable=False),
        sa.Column("event_ms", sa.BigInteger, nullable=False),
        sa.Column("event", sa.String(40), nullable=False),
        sa.Column("alert_id", _BIGID),
        sa.Column("device_id", sa.String(64)),
        sa.Column("site", sa.String(200)),
        sa.Column("kind", sa.String(32)),
        sa.Column("payload", sa.JSON, nullable=False),
        sa.Column("state", sa.String(16), nullable=False),
        sa.Column("hold_until_ms", sa.BigInteger),
        sa.Column("mqtt_state", sa.String(16), nullable=False),
        sa.Column("group_id", _BIGID),
        sa.PrimaryKeyConstraint("id", name="pk_notifications"),
    )
    op.create_index("ix_notifications_state", "notifications", ["state"])
    op.create_index("ix_notifications_mqtt_state", "notifications", ["mqtt_state"])
    op.create_table(
        "webhooks",
        sa.Column("id", _BIGID, nullable=False),
        sa.Column("url", sa.String(2000), nullable=False),
        sa.Column("secret", sa.String(200), nullable=False),
        sa.Column("description", sa.String(200)),
        sa.Column("created_ms", sa.BigInteger, nullable=False),
        sa.Column("created_by", sa.String(200)),
        sa.Column("deleted_ms", sa.BigInteger),
        sa.PrimaryKeyConstraint("id", name="pk_webhooks"),
    )
    op.create_table(
        "webhook_deliveries",
        sa.Column("id", _BIGID, nullable=False),
        sa.Column("webhook_id", _BIGID, nullable=False),
        sa.Column("notification_id", _BIGID, nullable=False),
        sa.Column("msg_id", sa.String(80), nullable=False),
        sa.Column("state", sa.String(16), nullable=False),
        sa.Column("attempts", sa.Integer, nullable=False, server_default="0"),
        sa.Column("created_ms", sa.BigInteger, nullable=False),
        sa.Column("next_attempt_ms", sa.BigInteger, nullable=False),
        sa.Column("last_attempt_ms", sa.BigInteger),
        sa.Column("last_status", sa.Integer),
        sa.Column("last_error", sa.Text),
        sa.Column("delivered_ms", sa.BigInteger),
        sa.PrimaryKeyConstraint("id", name="pk_webhook_deliveries"),
        sa.ForeignKeyConstraint(
            ["webhook_id"], ["webhooks.id"], name="fk_webhook_deliveries_webhook_id_webhooks"
        ),
        sa.ForeignKeyConstraint(
            ["notification_id"],
            ["notifications.id"],
            name="fk_webhook_deliveries_notification_id_notifications",
        ),
        sa.UniqueConstraint(
            "webhook_id", "notification_id", name="uq_webhook_deliveries_webhook_id_notification_id"
        ),
    )
    op.create_index(
        "ix_webhook_deliveries_state_next_attempt_ms",
        "webhook_deliveries",
        ["state", "next_attempt_ms"],
    )


def downgrade() -> None:
    op.drop_table("webhook_deliveries")
    op.drop_table("webhooks")
    op.drop_table("notifications")
    op.drop_table("maintenance_windows")
    op.drop_table("alert_policies")
    op.drop_index("ix_alert_audit_alert_id", table_name="alert_audit")
    op.drop_table("alert_audit")
    op.drop_table("alert_progress")
