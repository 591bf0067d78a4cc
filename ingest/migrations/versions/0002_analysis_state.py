"""Per-device progress of the diagnostics: analysed-up-to time and carried state.

Revision ID: 0002
Revises: 0001
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "analysis_state",
        sa.Column("device_id", sa.String(64), nullable=False),
        sa.Column("done_ms", sa.BigInteger, nullable=False),
        sa.Column("state", sa.JSON, nullable=False),
        sa.Column("updated_ms", sa.BigInteger, nullable=False),
        sa.PrimaryKeyConstraint("device_id", name="pk_analysis_state"),
        sa.ForeignKeyConstraint(
            ["device_id"], ["devices.device_id"], name="fk_analysis_state_device_id_devices"
        ),
    )


def downgrade() -> None:
    op.drop_table("analysis_state")
