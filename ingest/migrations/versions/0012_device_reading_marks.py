"""Each device's first reading time and its newest cabinet temperature, kept on its row; the
newest estimates indexed by key and value.

The fleet overview asks of every device when it first reported and what its cabinet read last.
Asked of ``readings`` that is one index probe per device into every day's partition; kept on
``devices`` by the writer that already bumps ``last_reading_ms``, it is one read of one table.
The first reading time is the first ever stored, so a retention that drops old raw readings
does not shorten a unit's time in service. The fleet's worst units by a key are the top of
that key's index, not a scan of every device's newest estimates.

Revision ID: 0012
Revises: 0011
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0012"
down_revision = "0011"
branch_labels = None
depends_on = None

_BACKFILL = """
UPDATE devices SET
    first_reading_ms = (SELECT min(r.ts_ms) FROM readings r
                        WHERE r.device_id = devices.device_id),
    last_t_cabinet = (SELECT r.t_cabinet FROM readings r
                      WHERE r.device_id = devices.device_id
                        AND r.ts_ms = devices.last_reading_ms)
"""


def upgrade() -> None:
    # Plain ALTER TABLE on both databases: a batch copy of ``devices`` would trip the foreign
    # keys that point at it.
    op.add_column("devices", sa.Column("first_reading_ms", sa.BigInteger))
    op.add_column("devices", sa.Column("last_t_cabinet", sa.Float))
    op.execute(_BACKFILL)
    op.create_index("ix_estimates_latest_key_value", "estimates_latest", ["key", "value"])


def downgrade() -> None:
    op.drop_index("ix_estimates_latest_key_value", "estimates_latest")
    op.drop_column("devices", "last_t_cabinet")
    op.drop_column("devices", "first_reading_ms")
