"""Time buckets computed in the database: the least, greatest and mean of each reading channel
and of estimate keys per bucket of a fixed width, so that a month of one-minute readings reaches
a plot as a few hundred rows.

Bucket ``b`` covers ``start_ms + b * every_ms <= t < start_ms + (b + 1) * every_ms`` (epoch ms
UTC). The same statements run on SQLite and PostgreSQL: integer floor division of a
non-negative offset, and the aggregate functions both have.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, NamedTuple

import sqlalchemy as sa
from sqlalchemy.engine import Engine

from tecfleet.ingest.db.tables import estimates, readings
from tecfleet.ingest.errors import StoreError

__all__ = [
    "BUCKET_CHANNELS",
    "EstimateBucket",
    "ReadingBucket",
    "estimate_buckets",
    "reading_buckets",
]

#: Channels a reading bucket can hold; ``power`` is current x voltage of each reading [W].
BUCKET_CHANNELS = (
    "t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "power", "rh",
)  # fmt: skip


class ReadingBucket(NamedTuple):
    """One bucket of readings: its start [ms], its reading count, and per channel asked for
    ``(least, greatest, mean)`` in the stored unit (None where the channel had no value)."""

    start_ms: int
    n: int
    channels: dict[str, tuple[float | None, float | None, float | None]]


class EstimateBucket(NamedTuple):
    """One bucket of one estimate key: start [ms], the count of valued rows and of reliable
    ones, the least, greatest and mean value, and the mean standard error (None if none)."""

    key: str
    start_ms: int
    n: int
    reliable_n: int
    low: float
    high: float
    mean: float
    stderr: float | None


def _check_span(start_ms: int, end_ms: int, every_ms: int) -> None:
    if every_ms <= 0:
        raise StoreError(f"bucket width must be positive, got {every_ms} ms")
    if end_ms <= start_ms:
        raise StoreError("a bucketed range needs its end after its start")


def _channel(name: str) -> sa.ColumnElement[Any]:
    if name == "power":
        return readings.c.current * readings.c.voltage
    return readings.c[name]


def reading_buckets(
    engine: Engine,
    device_id: str,
    start_ms: int,
    end_ms: int,
    every_ms: int,
    channels: Sequence[str] = BUCKET_CHANNELS,
) -> list[ReadingBucket]:
    """Buckets of ``every_ms`` [ms] over ``start_ms <= ts_ms < end_ms`` for one device, oldest
    first; only buckets holding readings are returned."""
    _check_span(start_ms, end_ms, every_ms)
    unknown = [c for c in channels if c not in BUCKET_CHANNELS]
    if unknown:
        raise StoreError(f"unknown bucket channels {unknown}; known: {list(BUCKET_CHANNELS)}")
    r = readings.c
    bucket = ((r.ts_ms - start_ms) // every_ms).label("b")
    cols: list[sa.ColumnElement[Any]] = [bucket, sa.func.count().label("n")]
    for name in channels:
        value = _channel(name)
        cols += [
            sa.func.min(value).label(f"{name}_lo"),
            sa.func.max(value).label(f"{name}_hi"),
            sa.func.avg(value).label(f"{name}_mean"),
        ]
    q = (
        sa.select(*cols)
        .where(r.device_id == device_id, r.ts_ms >= start_ms, r.ts_ms < end_ms)
        .group_by(bucket)
        .order_by(bucket)
    )
    with engine.connect() as conn:
        rows = conn.execute(q).all()
    return [
        ReadingBucket(
            start_ms + int(row.b) * every_ms,
            int(row.n),
            {
                name: (
                    _float(getattr(row, f"{name}_lo")),
                    _float(getattr(row, f"{name}_hi")),
                    _float(getattr(row, f"{name}_mean")),
                )
                for name in channels
            },
        )
        for row in rows
    ]


def estimate_buckets(
    engine: Engine,
    device_id: str,
    keys: Sequence[str],
    start_ms: int,
    end_ms: int,
    every_ms: int,
) -> list[EstimateBucket]:
    """Buckets of ``every_ms`` [ms] of the valued rows of each estimate key over ``start_ms <=
    at_ms < end_ms``, by key then oldest first."""
    _check_span(start_ms, end_ms, every_ms)
    if not keys:
        return []
    e = estimates.c
    bucket = ((e.at_ms - start_ms) // every_ms).label("b")
    q = (
        sa.select(
            e.key,
            bucket,
            sa.func.count().label("n"),
            sa.func.sum(sa.case((e.reliable, 1), else_=0)).label("reliable_n"),
            sa.func.min(e.value).label("lo"),
            sa.func.max(e.value).label("hi"),
            sa.func.avg(e.value).label("mean"),
            sa.func.avg(e.stderr).label("stderr"),
        )
        .where(
            e.device_id == device_id,
            e.key.in_(list(keys)),
            e.at_ms >= start_ms,
            e.at_ms < end_ms,
            e.value.is_not(None),
        )
        .group_by(e.key, bucket)
        .order_by(e.key, bucket)
    )
    with engine.connect() as conn:
        rows = conn.execute(q).all()
    return [
        EstimateBucket(
            str(row.key),
            start_ms + int(row.b) * every_ms,
            int(row.n),
            int(row.reliable_n or 0),
            float(row.lo),
            float(row.hi),
            float(row.mean),
            _float(row.stderr),
        )
        for row in rows
    ]


def _float(value: Any) -> float | None:
    return None if value is None else float(value)
