"""API keys limited to sites, with expiry and last use; the append-only audit trail; per-sensor
calibration offsets with validity dates.

Revision ID: 0007
Revises: 0006
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None

_BIGID = sa.BigInteger().with_variant(sa.Integer, "sqlite")

_KEY_COLUMNS = (
    ("sites", sa.JSON),
    ("expires_ms", sa.BigInteger),
    ("last_used_ms", sa.BigInteger),
    ("created_by", sa.String(200)),
)

_PG_GUARD = """
CREATE FUNCTION audit_log_append_only() RETURNS trigger AS $$
BEGIN
    RAISE EXCEPTION 'audit_log is append-only';
END;
$$ LANGUAGE plpgsql
"""


def _append_only() -> None:
    """Refuse UPDATE and DELETE on the audit trail in the database itself."""
    if op.get_bind().dialect.name == "postgresql":
        op.execute(_PG_GUARD)
        op.execute(
            "CREATE TRIGGER audit_log_append_only BEFORE UPDATE OR DELETE ON audit_log "
            "FOR EACH ROW EXECUTE FUNCTION audit_log_append_only()"
        )
        return
    for event in ("UPDATE", "DELETE"):
        op.execute(
            f"CREATE TRIGGER audit_log_no_{event.lower()} BEFORE {event} ON audit_log "
            "BEGIN SELECT RAISE(ABORT, 'audit_log is append-only'); END"
        )


def upgrade() -> None:
    with op.batch_alter_table("api_keys") as batch:
        for name, kind in _KEY_COLUMNS:
            batch.add_column(sa.Column(name, kind))
    op.create_table(
        "audit_log",
        sa.Column("id", _BIGID, primary_key=True),
        sa.Column("at_ms", sa.BigInteger, nullable=False),
        sa.Column("actor", sa.String(200), nullable=False),
        sa.Column("actor_key_id", sa.Integer),
        sa.Column("action", sa.String(64), nullable=False),
        sa.Column("target", sa.String(300), nullable=False),
        sa.Column("site", sa.String(200)),
        sa.Column("detail", sa.JSON, nullable=False),
    )
    op.create_index("ix_audit_log_at_ms", "audit_log", ["at_ms"])
    _append_only()
    op.create_table(
        "calibration_offsets",
        sa.Column("id", _BIGID, primary_key=True),
        sa.Column(
            "device_id",
            sa.String(64),
            sa.ForeignKey("devices.device_id", name="fk_calibration_offsets_device_id_devices"),
            nullable=False,
        ),
        sa.Column("sensor", sa.String(32), nullable=False),
        sa.Column("offset", sa.Float, nullable=False),
        sa.Column("valid_from_ms", sa.BigInteger, nullable=False),
        sa.Column("valid_to_ms", sa.BigInteger),
        sa.Column("note", sa.Text),
        sa.Column("created_ms", sa.BigInteger, nullable=False),
        sa.Column("created_by", sa.String(200)),
        sa.Column("deleted_ms", sa.BigInteger),
    )
    op.create_index("ix_calibration_offsets_device_id", "calibration_offsets", ["device_id"])


def downgrade() -> None:
    op.drop_index("ix_calibration_offsets_device_id", "calibration_offsets")
    op.drop_table("calibration_offsets")
    op.drop_table("audit_log")  # its triggers go with it
    if op.get_bind().dialect.name == "postgresql":
        op.execute("DROP FUNCTION audit_log_append_only()")
    with op.batch_alter_table("api_keys") as batch:
        for name, _kind in reversed(_KEY_COLUMNS):
            batch.drop_column(name)
