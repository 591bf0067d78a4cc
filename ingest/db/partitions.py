"""Day partitions of ``readings`` on PostgreSQL (migration 0008), through the functions the
migration created: the service does not own the table, and only its owner may add or drop
partitions. On SQLite there are none and these calls do nothing."""

from __future__ import annotations

import re
from datetime import UTC, datetime

import sqlalchemy as sa
from sqlalchemy.engine import Connection

#: One partition per UTC day [ms].
DAY_MS = 86_400_000

_NAME = re.compile(r"^readings_(\d{8})$")


def add_partitions(connection: Connection, now_ms: int, ahead_days: int) -> int:
    """Create the day partitions from the day of ``now_ms`` (epoch ms UTC) to ``ahead_days``
    after it, and one for each day of rows the default partition holds (moving those rows in);
    returns how many were created. In the caller's transaction."""
    if connection.dialect.name != "postgresql":
        return 0
    made = connection.execute(
        sa.select(sa.func.tecfleet_add_reading_partitions(now_ms, now_ms + ahead_days * DAY_MS))
    ).scalar()
    return int(made or 0)


def day_partitions(connection: Connection) -> list[tuple[str, int]]:
    """Every day partition of ``readings`` as (name, first ms of its day), oldest first."""
    if connection.dialect.name != "postgresql":
        return []
    names = connection.execute(
        sa.text(
            "SELECT c.relname FROM pg_inherits i JOIN pg_class c ON c.oid = i.inhrelid "
            "WHERE i.inhparent = to_regclass('readings')"
        )
    ).scalars()
    found = []
    for name in names:
        match = _NAME.match(name)
        if match is not None:
            day = datetime.strptime(match.group(1), "%Y%m%d").replace(tzinfo=UTC)
            found.append((name, int(day.timestamp()) * 1000))
    return sorted(found, key=lambda item: item[1])


def lock_partition(connection: Connection, name: str) -> None:
    """Hold off inserts into one day partition until the caller's transaction ends."""
    connection.execute(sa.select(sa.func.tecfleet_reading_partition_ddl(name, "lock")))


def drop_partition(connection: Connection, name: str) -> None:
    """Drop one day partition and every row in it, in the caller's transaction."""
    connection.execute(sa.select(sa.func.tecfleet_reading_partition_ddl(name, "drop")))
