"""Optional face probes: a reading's cold- and hot-face temperatures may be NULL (the unit has
no probe there), and every estimate may say what it rests on (channels and method).

Revision ID: 0005
Revises: 0003
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from tecfleet.ingest.errors import StoreError

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None

_FACES = ("t_cold", "t_hot")


def upgrade() -> None:
    # SQLite cannot alter a column in place: batch mode copies the table, rows included.
    with op.batch_alter_table("readings") as batch:
        for name in _FACES:
            batch.alter_column(name, existing_type=sa.Float, nullable=True)
    with op.batch_alter_table("estimates") as batch:
        batch.add_column(sa.Column("basis", sa.Text))


def downgrade() -> None:
    readings = sa.table("readings", *(sa.column(name) for name in _FACES))
    without = (
        op.get_bind()
        .execute(
            sa.select(sa.func.count())
            .select_from(readings)
            .where(sa.or_(*(readings.c[name].is_(None) for name in _FACES)))
        )
        .scalar()
    )
    if without:
        # Making the columns NOT NULL again would have to drop these readings: refuse instead.
        raise StoreError(
            f"{without} stored readings lack a face temperature (units without that probe); "
            "delete or export them before downgrading below revision 0005"
        )
    with op.batch_alter_table("estimates") as batch:
        batch.drop_column("basis")
    with op.batch_alter_table("readings") as batch:
        for name in _FACES:
            batch.alter_column(name, existing_type=sa.Float, nullable=False)
