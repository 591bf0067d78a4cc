"""Sharded analysis: a lease per device and a heartbeat per analysis process.

Revision ID: 0009
Revises: 0008
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0009"
down_revision = "0008"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "analysis_leases",
        sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), primary_key=True),
        sa.Column("owner", sa.String(120)),
        sa.Column("expires_ms", sa.BigInteger, nullable=False, server_default="0"),
    )
    op.create_index("ix_analysis_leases_owner", "analysis_leases", ["owner"])
    op.create_table(
        "analysis_workers",
        sa.Column("worker_id", sa.String(120), primary_key=True),
        sa.Column("seen_ms", sa.BigInteger, nullable=False),
    )


def downgrade() -> None:
    op.drop_table("analysis_workers")
    op.drop_index("ix_analysis_leases_owner", table_name="analysis_leases")
    op.drop_table("analysis_leases")
