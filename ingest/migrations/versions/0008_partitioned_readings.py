"""Readings partitioned by day on PostgreSQL, and per-interval rollups of readings that
retention removes (both databases).

On PostgreSQL ``readings`` becomes a table partitioned by range of ``ts_ms`` (one partition per
UTC day, a default partition for rows no day partition holds yet) with the primary key
``(device_id, ts_ms)``. Two functions owned by the migrating role let the service, which does
not own the table, add day partitions (sorting rows of the default partition into them) and
lock or drop one. Every stored row is copied, sorted by device and time so one device's rows
of a day lie together, and the copy is counted before the old table goes.

Revision ID: 0008
Revises: 0007
"""

from __future__ import annotations

import time

import sqlalchemy as sa
from alembic import op

from tecfleet.ingest.errors import StoreError

revision = "0008"
down_revision = "0007"
branch_labels = None
depends_on = None

_DAY_MS = 86_400_000
_AHEAD_DAYS = 7
_CHANNELS = ("t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh")

# The new table takes its columns from the old one (LIKE), so a column another revision added
# comes along; the id keeps drawing from the same sequence.
_FK = (
    "CONSTRAINT fk_readings_device_id_devices FOREIGN KEY (device_id)"
    " REFERENCES devices (device_id)"
)
_PARTITIONED = f"""
CREATE TABLE readings (
    LIKE readings_unpartitioned INCLUDING DEFAULTS,
    CONSTRAINT pk_readings PRIMARY KEY (device_id, ts_ms),
    {_FK}
) PARTITION BY RANGE (ts_ms)
"""
_PLAIN = f"""
CREATE TABLE readings (
    LIKE readings_partitioned INCLUDING DEFAULTS,
    CONSTRAINT pk_readings PRIMARY KEY (id),
    CONSTRAINT uq_readings_device_id_ts_ms UNIQUE (device_id, ts_ms),
    {_FK}
)
"""

# One day partition, named for its UTC date. Rows the default partition holds for that day
# move into it before it is attached, since a default partition may not keep rows that a new
# partition's range covers.
_ONE_PARTITION = """
CREATE FUNCTION tecfleet_reading_partition(day bigint) RETURNS boolean
LANGUAGE plpgsql SECURITY DEFINER SET search_path FROM CURRENT AS $fn$
DECLARE
    lo bigint := day * 86400000;
    hi bigint := lo + 86400000;
    part text := 'readings_' || to_char(to_timestamp(lo / 1000) AT TIME ZONE 'UTC', 'YYYYMMDD');
BEGIN
    IF to_regclass(part) IS NOT NULL THEN
        RETURN false;
    END IF;
    IF EXISTS (SELECT 1 FROM readings_default WHERE ts_ms >= lo AND ts_ms < hi) THEN
        EXECUTE format('CREATE TABLE %I (LIKE readings INCLUDING DEFAULTS)', part);
        EXECUTE format(
            'WITH moved AS (DELETE FROM readings_default WHERE ts_ms >= %s AND ts_ms < %s '
            'RETURNING *) INSERT INTO %I SELECT * FROM moved ORDER BY device_id, ts_ms',
            lo, hi, part);
        EXECUTE format('ALTER TABLE readings ATTACH PARTITION %I FOR VALUES FROM (%s) TO (%s)',
            part, lo, hi);
    ELSE
        EXECUTE format('CREATE TABLE %I PARTITION OF readings FOR VALUES FROM (%s) TO (%s)',
            part, lo, hi);
    END IF;
    RETURN true;
END $fn$
"""

_ADD_PARTITIONS = """
CREATE FUNCTION tecfleet_add_reading_partitions(from_ms bigint, to_ms bigint) RETURNS integer
LANGUAGE plpgsql SECURITY DEFINER SET search_path FROM CURRENT AS $fn$
DECLARE
    day bigint;
    made integer := 0;
BEGIN
    IF to_ms - from_ms > 400::bigint * 86400000 THEN
        RAISE EXCEPTION 'at most 400 days of reading partitions at once';
    END IF;
    -- one process at a time: two would both find a day missing and both create it
    PERFORM pg_advisory_xact_lock(hashtext('tecfleet_reading_partitions'));
    FOR day IN
        SELECT d FROM generate_series(from_ms / 86400000, (to_ms - 1) / 86400000) AS d
        UNION SELECT DISTINCT ts_ms / 86400000 FROM readings_default
    LOOP
        IF tecfleet_reading_partition(day) THEN
            made := made + 1;
        END IF;
    END LOOP;
    RETURN made;
END $fn$
"""

# Lock (no more inserts until commit) or drop one day partition; nothing else.
_PARTITION_DDL = """
CREATE FUNCTION tecfleet_reading_partition_ddl(part text, action text) RETURNS void
LANGUAGE plpgsql SECURITY DEFINER SET search_path FROM CURRENT AS $fn$
BEGIN
    IF part !~ '^readings_[0-9]{8}$' OR NOT EXISTS (
        SELECT 1 FROM pg_inherits i JOIN pg_class c ON c.oid = i.inhrelid
        WHERE i.inhparent = 'readings'::regclass AND c.relname = part
    ) THEN
        RAISE EXCEPTION 'not a day partition of readings: %', part;
    END IF;
    IF action = 'lock' THEN
        EXECUTE format('LOCK TABLE %I IN SHARE MODE', part);
    ELSIF action = 'drop' THEN
        EXECUTE format('DROP TABLE %I', part);
    ELSE
        RAISE EXCEPTION 'unknown partition action: %', action;
    END IF;
END $fn$
"""

_FUNCTIONS = (
    "tecfleet_add_reading_partitions(bigint, bigint)",
    "tecfleet_reading_partition(bigint)",
    "tecfleet_reading_partition_ddl(text, text)",
)


def _count(table: str) -> int:
    return int(op.get_bind().execute(sa.text(f"SELECT count(*) FROM {table}")).scalar_one())


def _rename_old(new_name: str) -> None:
    op.execute(f"ALTER TABLE readings RENAME TO {new_name}")
    for name in ("pk_readings", "fk_readings_device_id_devices", "uq_readings_device_id_ts_ms"):
        found = op.get_bind().execute(
            sa.text(
                "SELECT 1 FROM pg_constraint WHERE conname = :n AND conrelid = CAST(:t AS regclass)"
            ),
            {"n": name, "t": new_name},
        )
        if found.first() is not None:
            op.execute(f"ALTER TABLE {new_name} RENAME CONSTRAINT {name} TO {name}_old")


def _copy_rows(source: str) -> None:
    """Every row of ``source`` into the new ``readings``, counted before ``source`` goes."""
    op.execute(f"INSERT INTO readings SELECT * FROM {source} ORDER BY device_id, ts_ms")
    before, after = _count(source), _count("readings")
    if before != after:
        raise StoreError(f"copied {after} of {before} readings; migration stopped, nothing lost")
    op.execute("ALTER SEQUENCE readings_id_seq OWNED BY readings.id")
    op.execute(f"DROP TABLE {source}")


def _partition_readings() -> None:
    _rename_old("readings_unpartitioned")
    op.execute(_PARTITIONED)
    op.execute("CREATE TABLE readings_default PARTITION OF readings DEFAULT")
    for ddl in (_ONE_PARTITION, _ADD_PARTITIONS, _PARTITION_DDL):
        op.execute(ddl)
    days = op.get_bind().execute(
        sa.text(f"SELECT DISTINCT ts_ms / {_DAY_MS} FROM readings_unpartitioned")
    )
    for (day,) in days.all():
        op.execute(sa.text("SELECT tecfleet_reading_partition(:d)").bindparams(d=int(day)))
    now = time.time_ns() // 1_000_000
    op.execute(
        sa.text("SELECT tecfleet_add_reading_partitions(:a, :b)").bindparams(
            a=now, b=now + _AHEAD_DAYS * _DAY_MS
        )
    )
    _copy_rows("readings_unpartitioned")


def _unpartition_readings() -> None:
    _rename_old("readings_partitioned")
    op.execute(_PLAIN)
    _copy_rows("readings_partitioned")
    for function in _FUNCTIONS:
        op.execute(f"DROP FUNCTION {function}")


def upgrade() -> None:
    op.create_table(
        "reading_rollups",
        sa.Column("device_id", sa.String(64), nullable=False),
        sa.Column("span_ms", sa.BigInteger, nullable=False),
        sa.Column("bucket_ms", sa.BigInteger, nullable=False),
        sa.Column("n", sa.BigInteger, nullable=False),
        sa.Column("door_open_n", sa.BigInteger, nullable=False),
        *(
            sa.Column(f"{channel}_{stat}", sa.BigInteger if stat == "n" else sa.Float)
            for channel in _CHANNELS
            for stat in ("n", "min", "max", "mean")
        ),
        sa.PrimaryKeyConstraint("device_id", "span_ms", "bucket_ms", name="pk_reading_rollups"),
        sa.ForeignKeyConstraint(
            ["device_id"], ["devices.device_id"], name="fk_reading_rollups_device_id_devices"
        ),
    )
    if op.get_bind().dialect.name == "postgresql":
        _partition_readings()


def downgrade() -> None:
    kept = _count("reading_rollups")
    if kept:
        # The rollups summarise readings that are no longer stored raw: refuse to drop them.
        raise StoreError(
            f"{kept} reading rollups hold data no longer stored raw; export them before "
            "downgrading below revision 0008"
        )
    if op.get_bind().dialect.name == "postgresql":
        _unpartition_readings()
    op.drop_table("reading_rollups")
