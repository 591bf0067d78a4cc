"""Interval summaries: a reading may carry the means of its channels over the interval it
covers (and the cabinet air's extremes), each a nullable column.

Revision ID: 0006
Revises: 0005
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None

# The names of ``tables.SUMMARY_COLUMNS`` as of this revision (a migration keeps its own copy).
_SUMMARIES = (
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


def upgrade() -> None:
    # Adding nullable columns needs no copy of the table on either database.
    for name in _SUMMARIES:
        op.add_column("readings", sa.Column(name, sa.Float, nullable=True))


def downgrade() -> None:
    # The readings themselves stay; only their summaries go (SQLite copies the table).
    with op.batch_alter_table("readings") as batch:
        for name in _SUMMARIES:
            batch.drop_column(name)
