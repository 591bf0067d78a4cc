"""Retention: raw readings kept for a set number of days, then summarised per device and
interval (min, max, mean, computed by the database) into ``reading_rollups`` and removed;
rollups kept for years. Estimates and alerts are never touched.

On PostgreSQL, a day partition that lies wholly before the cutoff is summarised under a lock
that holds off late inserts into it and then dropped (no row-by-row delete); what remains
before the cutoff (the default partition, the day the cutoff falls in, or all of SQLite) is
summarised and deleted in one repeatable-read transaction, so a row that arrives meanwhile is
neither summarised nor deleted and waits for the next run.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import sqlalchemy as sa
from sqlalchemy.dialects import postgresql, sqlite
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.ingest.db.partitions import (
    DAY_MS,
    add_partitions,
    day_partitions,
    drop_partition,
    lock_partition,
)
from tecfleet.ingest.db.tables import (
    ROLLUP_CHANNELS,
    alert_progress,
    analysis_state,
    devices,
    reading_rollups,
    readings,
)
from tecfleet.ingest.errors import StoreError

#: Key of the PostgreSQL advisory lock that lets one process at a time apply retention.
_LOCK_KEY = 0x7EC_F1EE7


@dataclass(frozen=True, slots=True)
class RetentionPolicy:
    """What is kept, and for how long."""

    #: Raw readings older than this are summarised and removed; None keeps them for ever [days].
    raw_keep_days: float | None = None
    #: Width of one rollup interval; divides a day [s].
    rollup_span_s: int = 3600
    #: Rollups older than this are removed [days].
    rollup_keep_days: float = 3653.0
    #: Day partitions created ahead of the wall clock (PostgreSQL) [days].
    partitions_ahead_days: int = 7

    def __post_init__(self) -> None:
        if self.rollup_span_s <= 0 or 86_400 % self.rollup_span_s:
            raise StoreError(f"rollup interval {self.rollup_span_s} s does not divide a day")
        if self.raw_keep_days is not None and self.raw_keep_days < 1:
            raise StoreError("raw readings must be kept for at least one day")


@dataclass(frozen=True, slots=True)
class RetentionReport:
    partitions_added: int = 0
    cutoff_ms: int | None = None
    readings_removed: int = 0
    buckets_written: int = 0
    partitions_dropped: int = 0
    rollups_removed: int = 0
    skipped: bool = False


def raw_cutoff_ms(connection: Connection, policy: RetentionPolicy, now_ms: int) -> int | None:
    """Readings before this time (epoch ms UTC) go: ``now`` less the days kept, held back to
    where analysis or alert evaluation of a device still has readings to visit (a device that
    was never analysed does not hold it back), rounded down to a whole rollup interval."""
    if policy.raw_keep_days is None:
        return None
    cutoff = now_ms - round(policy.raw_keep_days * DAY_MS)
    for progress in (analysis_state, alert_progress):
        behind = connection.execute(
            sa.select(sa.func.min(progress.c.done_ms))
            .select_from(progress.join(devices, devices.c.device_id == progress.c.device_id))
            .where(progress.c.done_ms < cutoff, devices.c.last_reading_ms > progress.c.done_ms)
        ).scalar()
        if behind is not None:
            cutoff = min(cutoff, int(behind))
    span = policy.rollup_span_s * 1000
    return (cutoff // span) * span


def _merge(excluded: Any) -> dict[str, Any]:
    """Kept rollup + rollup of late rows for the same interval = rollup of both."""
    t = reading_rollups.c
    merged: dict[str, Any] = {
        "n": t.n + excluded.n,
        "door_open_n": t.door_open_n + excluded.door_open_n,
    }
    for ch in ROLLUP_CHANNELS:
        n, en = t[f"{ch}_n"], excluded[f"{ch}_n"]
        lo, elo = t[f"{ch}_min"], excluded[f"{ch}_min"]
        hi, ehi = t[f"{ch}_max"], excluded[f"{ch}_max"]
        mean, emean = t[f"{ch}_mean"], excluded[f"{ch}_mean"]
        merged[f"{ch}_n"] = n + en
        merged[f"{ch}_min"] = sa.case((sa.or_(lo.is_(None), elo < lo), elo), else_=lo)
        merged[f"{ch}_max"] = sa.case((sa.or_(hi.is_(None), ehi > hi), ehi), else_=hi)
        merged[f"{ch}_mean"] = (
            sa.func.coalesce(mean * n, 0.0) + sa.func.coalesce(emean * en, 0.0)
        ) / sa.func.nullif(n + en, 0)
    return merged


def _summarise(connection: Connection, span_ms: int, lo_ms: int | None, hi_ms: int) -> int:
    """Roll up readings with ``lo_ms <= ts_ms < hi_ms`` into ``reading_rollups`` (merging with
    kept intervals); returns the number of intervals written."""
    r = readings.c
    bucket: Any = sa.literal_column(f"(ts_ms / {int(span_ms)}) * {int(span_ms)}")
    stats: list[Any] = []
    for ch in ROLLUP_CHANNELS:
        col = r[ch]
        stats += [sa.func.count(col), sa.func.min(col), sa.func.max(col), sa.func.avg(col)]
    where = [r.ts_ms < hi_ms] + ([] if lo_ms is None else [r.ts_ms >= lo_ms])
    select = (
        sa.select(
            r.device_id,
            sa.literal_column(str(int(span_ms))),
            bucket,
            sa.func.count(),
            sa.func.coalesce(sa.func.sum(sa.case((r.door_open, 1), else_=0)), 0),
            *stats,
        )
        .where(*where)
        .group_by(r.device_id, bucket)
    )
    dialect = postgresql if connection.dialect.name == "postgresql" else sqlite
    insert = dialect.insert(reading_rollups)
    names = [c.name for c in reading_rollups.columns]
    stmt = insert.from_select(names, select).on_conflict_do_update(
        index_elements=["device_id", "span_ms", "bucket_ms"], set_=_merge(insert.excluded)
    )
    result = connection.execute(stmt.execution_options(preserve_rowcount=True))
    return max(int(result.rowcount), 0)


def _uncount(connection: Connection, lo_ms: int | None, hi_ms: int) -> int:
    """Take the readings in ``[lo_ms, hi_ms)`` off each device's stored count; their total."""
    r = readings.c
    where = [r.ts_ms < hi_ms] + ([] if lo_ms is None else [r.ts_ms >= lo_ms])
    per_device = connection.execute(
        sa.select(r.device_id, sa.func.count()).where(*where).group_by(r.device_id)
    ).all()
    if per_device:
        left = devices.c.readings - sa.bindparam("b_n")
        connection.execute(
            devices.update()
            .where(devices.c.device_id == sa.bindparam("b_device"))
            .values(readings=sa.case((left < 0, 0), else_=left)),
            [{"b_device": d, "b_n": int(n)} for d, n in per_device],
        )
    return sum(int(n) for _, n in per_device)


def _drop_old_partitions(
    connection: Connection, parts: list[tuple[str, int]], span_ms: int, cutoff_ms: int
) -> list[int]:
    """Summarise and drop each of ``parts`` that lies wholly before ``cutoff_ms``, one
    transaction each: [partitions dropped, readings removed, intervals written]."""
    done = [0, 0, 0]
    for name, lo in parts:
        if lo + DAY_MS > cutoff_ms:
            continue
        with connection.begin():
            lock_partition(connection, name)
            done[2] += _summarise(connection, span_ms, lo, lo + DAY_MS)
            done[1] += _uncount(connection, lo, lo + DAY_MS)
            drop_partition(connection, name)
            done[0] += 1
    return done


def _apply(connection: Connection, policy: RetentionPolicy, now_ms: int) -> RetentionReport:
    postgres = connection.dialect.name == "postgresql"
    with connection.begin():
        added = add_partitions(connection, now_ms, policy.partitions_ahead_days)
        cutoff = raw_cutoff_ms(connection, policy, now_ms)
        parts = day_partitions(connection)
    span_ms = policy.rollup_span_s * 1000
    dropped, removed, written = 0, 0, 0
    if cutoff is not None and postgres:
        dropped, removed, written = _drop_old_partitions(connection, parts, span_ms, cutoff)
    if postgres:
        connection = connection.execution_options(isolation_level="REPEATABLE READ")
    with connection.begin():
        if cutoff is not None:
            written += _summarise(connection, span_ms, None, cutoff)
            removed += _uncount(connection, None, cutoff)
            connection.execute(readings.delete().where(readings.c.ts_ms < cutoff))
        old = now_ms - round(policy.rollup_keep_days * DAY_MS)
        gone = connection.execute(reading_rollups.delete().where(reading_rollups.c.bucket_ms < old))
    return RetentionReport(
        partitions_added=added,
        cutoff_ms=cutoff,
        readings_removed=removed,
        buckets_written=written,
        partitions_dropped=dropped,
        rollups_removed=max(int(gone.rowcount), 0),
    )


def apply_retention(engine: Engine, policy: RetentionPolicy, now_ms: int) -> RetentionReport:
    """Create partitions ahead, then apply ``policy`` once as of ``now_ms`` (epoch ms UTC,
    the wall clock in service). On PostgreSQL one process at a time; another finds it busy
    and returns a report marked ``skipped``."""
    try:
        with engine.connect() as connection:
            postgres = connection.dialect.name == "postgresql"
            if postgres:
                got = connection.execute(
                    sa.select(sa.func.pg_try_advisory_lock(_LOCK_KEY))
                ).scalar()
                connection.commit()
                if not got:
                    return RetentionReport(skipped=True)
            try:
                return _apply(connection, policy, now_ms)
            finally:
                if postgres:
                    connection.rollback()
                    connection.execute(sa.select(sa.func.pg_advisory_unlock(_LOCK_KEY)))
                    connection.commit()
    except SQLAlchemyError as exc:
        raise StoreError(f"retention failed: {exc.__class__.__name__}: {exc}") from exc


def rollups(connection: Connection, device_id: str, span_s: int | None = None) -> Sequence[Any]:
    """A device's kept rollups, oldest first (all widths unless ``span_s`` is given)."""
    t = reading_rollups.c
    q = sa.select(reading_rollups).where(t.device_id == device_id)
    if span_s is not None:
        q = q.where(t.span_ms == span_s * 1000)
    return connection.execute(q.order_by(t.span_ms, t.bucket_ms)).all()
