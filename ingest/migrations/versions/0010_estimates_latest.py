"""The newest estimate of every device and key, kept by the database beside ``estimates``.

The health answer and the fleet overview ask for each key's newest row (a valued row before an
unvalued one). Read from ``estimates`` that visits every row a device ever had, scattered over
as many pages; ``estimates_latest`` holds one row per device and key, next to each other.
Triggers keep it whoever writes ``estimates`` (the runner, an import, a test): an insert takes
the new row's place when it is valued and the kept one is not, or both are alike and it is
newer; a delete of the kept row brings back the best row left.

Revision ID: 0010
Revises: 0009
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0010"
down_revision = "0009"
branch_labels = None
depends_on = None

_COLUMNS = "device_id, key, at_ms, value, stderr, n, reliable, note, basis"
_NEW = ", ".join(f"NEW.{c.strip()}" for c in _COLUMNS.split(","))
_SET = ", ".join(f"{c} = excluded.{c}" for c in ("at_ms", "value", "stderr", "n", "reliable"))
_SET += ", note = excluded.note, basis = excluded.basis"
#: The rule: a valued row over an unvalued one; between alike rows, the newer.
_TAKES_OVER = (
    "(excluded.value IS NOT NULL AND {kept}.value IS NULL) OR "
    "((excluded.value IS NULL) = ({kept}.value IS NULL) AND excluded.at_ms > {kept}.at_ms)"
)
_BEST_LEFT = (
    f"SELECT {_COLUMNS} FROM estimates WHERE device_id = OLD.device_id AND key = OLD.key "
    "ORDER BY (value IS NULL), at_ms DESC LIMIT 1"
)
_BACKFILL = (
    f"INSERT INTO estimates_latest ({_COLUMNS}) SELECT {_COLUMNS} FROM ("
    f"SELECT {_COLUMNS}, row_number() OVER (PARTITION BY device_id, key "
    "ORDER BY (value IS NULL), at_ms DESC) AS place FROM estimates) AS ranked WHERE place = 1"
)

# PostgreSQL fires once per statement with the statement's rows as a table: the runner writes
# a device's rows in one statement, so the kept rows are brought up to date in one go.
_PG_FUNCTIONS = f"""
CREATE FUNCTION estimates_latest_keep() RETURNS trigger AS $$
BEGIN
    INSERT INTO estimates_latest AS kept ({_COLUMNS})
    SELECT DISTINCT ON (device_id, key) {_COLUMNS} FROM added
    ORDER BY device_id, key, (value IS NULL), at_ms DESC
    ON CONFLICT (device_id, key) DO UPDATE SET {_SET}
    WHERE {_TAKES_OVER.format(kept="kept")};
    RETURN NULL;
END $$ LANGUAGE plpgsql;

CREATE FUNCTION estimates_latest_forget() RETURNS trigger AS $$
BEGIN
    DELETE FROM estimates_latest AS kept USING removed
    WHERE kept.device_id = removed.device_id AND kept.key = removed.key
      AND kept.at_ms = removed.at_ms;
    INSERT INTO estimates_latest ({_COLUMNS})
    SELECT best.* FROM (SELECT DISTINCT device_id, key FROM removed) AS touched
    CROSS JOIN LATERAL (
        SELECT {_COLUMNS} FROM estimates AS e
        WHERE e.device_id = touched.device_id AND e.key = touched.key
        ORDER BY (e.value IS NULL), e.at_ms DESC LIMIT 1
    ) AS best
    ON CONFLICT (device_id, key) DO NOTHING;
    RETURN NULL;
END $$ LANGUAGE plpgsql;
"""

_SQLITE_TRIGGERS = (
    f"""CREATE TRIGGER estimates_latest_on_insert AFTER INSERT ON estimates BEGIN
    INSERT INTO estimates_latest ({_COLUMNS}) VALUES ({_NEW})
    ON CONFLICT (device_id, key) DO UPDATE SET {_SET}
    WHERE {_TAKES_OVER.format(kept="estimates_latest")};
END""",
    # A row deleted while it is the kept one: the best row left takes its place. SQLite fires
    # per row as it goes, so a row deleted later in the same statement may be kept for a
    # moment; its own delete then fires this again.
    f"""CREATE TRIGGER estimates_latest_on_delete AFTER DELETE ON estimates
WHEN EXISTS (SELECT 1 FROM estimates_latest WHERE device_id = OLD.device_id
             AND key = OLD.key AND at_ms = OLD.at_ms)
BEGIN
    DELETE FROM estimates_latest WHERE device_id = OLD.device_id AND key = OLD.key;
    INSERT INTO estimates_latest ({_COLUMNS}) {_BEST_LEFT};
END""",
)


def upgrade() -> None:
    op.create_table(
        "estimates_latest",
        sa.Column("device_id", sa.String(64), sa.ForeignKey("devices.device_id"), primary_key=True),
        sa.Column("key", sa.String(64), primary_key=True),
        sa.Column("at_ms", sa.BigInteger, nullable=False),
        sa.Column("value", sa.Float),
        sa.Column("stderr", sa.Float),
        sa.Column("n", sa.Integer, nullable=False, server_default="0"),
        sa.Column("reliable", sa.Boolean, nullable=False, server_default=sa.true()),
        sa.Column("note", sa.Text),
        sa.Column("basis", sa.Text),
    )
    op.execute(_BACKFILL)
    if op.get_bind().dialect.name == "postgresql":
        op.execute(_PG_FUNCTIONS)
        op.execute(
            "CREATE TRIGGER estimates_latest_on_insert AFTER INSERT ON estimates "
            "REFERENCING NEW TABLE AS added "
            "FOR EACH STATEMENT EXECUTE FUNCTION estimates_latest_keep()"
        )
        op.execute(
            "CREATE TRIGGER estimates_latest_on_delete AFTER DELETE ON estimates "
            "REFERENCING OLD TABLE AS removed "
            "FOR EACH STATEMENT EXECUTE FUNCTION estimates_latest_forget()"
        )
    else:
        for trigger in _SQLITE_TRIGGERS:
            op.execute(trigger)


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        for trigger in ("estimates_latest_on_insert", "estimates_latest_on_delete"):
            op.execute(f"DROP TRIGGER IF EXISTS {trigger} ON estimates")
        op.execute("DROP FUNCTION IF EXISTS estimates_latest_keep()")
        op.execute("DROP FUNCTION IF EXISTS estimates_latest_forget()")
    else:
        for trigger in ("estimates_latest_on_insert", "estimates_latest_on_delete"):
            op.execute(f"DROP TRIGGER IF EXISTS {trigger}")
    op.drop_table("estimates_latest")
