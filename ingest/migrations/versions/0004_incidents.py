"""Incidents: a symptom alert points at the alert of its cause.

``alerts.incident_id`` holds the id of the cause alert of the incident an alert belongs to
(the cause's own id on the cause itself); NULL for an alert that stands alone.

Revision ID: 0004
Revises: 0003
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None

_BIGID = sa.BigInteger().with_variant(sa.Integer, "sqlite")


def upgrade() -> None:
    op.add_column("alerts", sa.Column("incident_id", _BIGID, nullable=True))
    op.create_index("ix_alerts_incident_id", "alerts", ["incident_id"])


def downgrade() -> None:
    op.drop_index("ix_alerts_incident_id", table_name="alerts")
    # a plain ALTER TABLE ... DROP COLUMN (SQLite 3.35 and later): a batch copy of the table
    # would drop the parent of alert_audit's foreign key while it has rows
    op.drop_column("alerts", "incident_id")
