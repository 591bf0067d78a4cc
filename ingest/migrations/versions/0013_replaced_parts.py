"""The parts replaced during a maintenance window: a JSON list of part names (the module and
each probe), so that the analysis starts those parts' history afresh at the window's end.

Windows stored before keep NULL: nothing recorded as replaced.

Revision ID: 0013
Revises: 0012
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0013"
down_revision = "0012"
branch_labels = None
depends_on = None


def upgrade() -> None:
    # Plain ALTER TABLE on both databases (a nullable column needs no batch copy).
    op.add_column("maintenance_windows", sa.Column("replaced", sa.JSON))


def downgrade() -> None:
    op.drop_column("maintenance_windows", "replaced")
