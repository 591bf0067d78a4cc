"""The highest severity told of each alert: a symptom whose severity rises inside an incident
is told once, and not again each time the same condition comes back at that severity.

Alerts stored before keep NULL (nothing known told): their next rise of severity is told once.

Revision ID: 0011
Revises: 0010
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0011"
down_revision = "0010"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.add_column("alerts", sa.Column("told_severity", sa.String(16), nullable=True))


def downgrade() -> None:
    # a plain ALTER TABLE ... DROP COLUMN (SQLite 3.35 and later): a batch copy of the table
    # would drop the parent of alert_audit's foreign key while it has rows
    op.drop_column("alerts", "told_severity")
