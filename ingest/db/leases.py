"""Leases of devices to analysis processes, so several processes share the fleet.

Every analysis process (a *worker*) keeps a heartbeat row and holds a lease per device it
analyses: ``owner`` and ``expires_ms``. A round of a worker:

1. :func:`heartbeat`: it records itself alive and counts the live workers;
2. :func:`claim`: it keeps its unexpired leases up to a fair share of the fleet (devices over
   live workers, rounded up), gives back any excess and takes free or lapsed leases up to its
   share with ``FOR UPDATE SKIP LOCKED``, so two workers claiming at once never take the same
   device and neither waits for the other;
3. :func:`hold`, at the start of each analysis transaction: it extends its leases on a few
   devices and keeps their rows locked till the commit. A lease that lapsed and was taken over
   meanwhile is no longer its own and is left out, and no other worker can take a held lease
   while the analysis runs: a device is analysed by one process at a time, whatever the clocks.

A worker killed outright leaves its leases behind; they lapse after the lease time and the
others take the devices over on their next round. Its open transaction is rolled back by the
server, so the analysis resumes from the last committed progress.

On SQLite the row locks are no-ops; the database takes one writer at a time, and one analysis
process is the supported set-up there.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import sqlalchemy as sa
from sqlalchemy.dialects import postgresql, sqlite
from sqlalchemy.engine import Connection

from tecfleet.ingest.db.tables import analysis_leases, analysis_state, analysis_workers, devices

__all__ = ["claim", "devices_of", "heartbeat", "hold", "holders", "progress", "retire"]

#: Devices named in one statement (well under the bound parameters SQLite allows).
_IDS_PER_STATEMENT = 500


def _insert(conn: Connection, table: sa.Table) -> Any:
    return (postgresql.insert if conn.dialect.name == "postgresql" else sqlite.insert)(table)


def heartbeat(conn: Connection, worker_id: str, now_ms: int, lease_ms: int) -> int:
    """Record ``worker_id`` alive at ``now_ms`` [ms], forget workers silent for longer than
    ``lease_ms`` [ms], and return the number of live workers (this one included)."""
    w = analysis_workers
    stmt = _insert(conn, w).values(worker_id=worker_id, seen_ms=now_ms)
    conn.execute(stmt.on_conflict_do_update(index_elements=["worker_id"], set_={"seen_ms": now_ms}))
    conn.execute(w.delete().where(w.c.seen_ms < now_ms - lease_ms))
    return int(conn.execute(sa.select(sa.func.count()).select_from(w)).scalar_one())


def retire(conn: Connection, worker_id: str) -> None:
    """A worker stopping cleanly: its leases are free at once and it no longer counts."""
    leases = analysis_leases
    conn.execute(
        leases.update().where(leases.c.owner == worker_id).values(owner=None, expires_ms=0)
    )
    conn.execute(analysis_workers.delete().where(analysis_workers.c.worker_id == worker_id))


def claim(
    conn: Connection, worker_id: str, now_ms: int, lease_ms: int, live_workers: int
) -> list[str]:
    """Bring ``worker_id``'s leases to its fair share and extend them to ``now_ms + lease_ms``;
    returns the devices it holds, in id order. Commit promptly: claimed rows stay locked till
    the caller's transaction ends."""
    leases = analysis_leases
    # Only devices without a lease row: inserting over an existing row would wait for any
    # transaction that holds it, i.e. for another worker's analysis.
    unleased = ~sa.exists().where(leases.c.device_id == devices.c.device_id)
    with_readings = sa.select(devices.c.device_id, sa.null(), sa.literal(0)).where(
        devices.c.last_reading_ms.is_not(None), unleased
    )
    conn.execute(
        _insert(conn, leases)
        .from_select(["device_id", "owner", "expires_ms"], with_readings)
        .on_conflict_do_nothing(index_elements=["device_id"])
    )
    fleet = int(conn.execute(sa.select(sa.func.count()).select_from(leases)).scalar_one())
    share = -(-fleet // max(live_workers, 1))
    mine = list(
        conn.execute(
            sa.select(leases.c.device_id)
            .where(leases.c.owner == worker_id, leases.c.expires_ms >= now_ms)
            .order_by(leases.c.device_id)
        ).scalars()
    )
    if len(mine) > share:
        _set_owner(conn, mine[share:], worker_id, None, 0)
        mine = mine[:share]
    elif len(mine) < share:
        lapsed = sa.or_(leases.c.owner.is_(None), leases.c.expires_ms < now_ms)
        free = conn.execute(
            sa.select(leases.c.device_id)
            .where(lapsed)
            .order_by(leases.c.device_id)
            .limit(share - len(mine))
            .with_for_update(skip_locked=True)
        ).scalars()
        mine.extend(free)
    _set_owner(conn, mine, None, worker_id, now_ms + lease_ms)
    return sorted(mine)


def _set_owner(
    conn: Connection, device_ids: Sequence[str], only_of: str | None, owner: str | None, until: int
) -> None:
    leases = analysis_leases
    for k in range(0, len(device_ids), _IDS_PER_STATEMENT):
        stmt = leases.update().where(leases.c.device_id.in_(device_ids[k : k + _IDS_PER_STATEMENT]))
        if only_of is not None:
            stmt = stmt.where(leases.c.owner == only_of)
        conn.execute(stmt.values(owner=owner, expires_ms=until))


def hold(
    conn: Connection, worker_id: str, device_ids: Sequence[str], now_ms: int, lease_ms: int
) -> list[str]:
    """Extend ``worker_id``'s leases on these devices and lock them for the caller's
    transaction; returns those that are still its own, in id order."""
    leases = analysis_leases
    held: list[str] = []
    for k in range(0, len(device_ids), _IDS_PER_STATEMENT):
        chunk = device_ids[k : k + _IDS_PER_STATEMENT]
        held.extend(
            conn.execute(
                leases.update()
                .where(leases.c.device_id.in_(chunk), leases.c.owner == worker_id)
                .values(expires_ms=now_ms + lease_ms)
                .returning(leases.c.device_id)
            ).scalars()
        )
    return sorted(held)


def holders(conn: Connection, now_ms: int) -> dict[str, str]:
    """Device id -> worker holding an unexpired lease on it."""
    leases = analysis_leases
    rows = conn.execute(
        sa.select(leases.c.device_id, leases.c.owner).where(
            leases.c.owner.is_not(None), leases.c.expires_ms >= now_ms
        )
    )
    return {r.device_id: r.owner for r in rows}


def devices_of(conn: Connection, device_ids: Sequence[str]) -> list[Any]:
    """Registration, status and newest reading of these devices (those with readings), in id
    order: what the estimates and the alert rules of a device need, in one query."""
    d = devices
    found: list[Any] = []
    for k in range(0, len(device_ids), _IDS_PER_STATEMENT):
        found.extend(
            conn.execute(
                sa.select(
                    d.c.device_id, d.c.site, d.c.module, d.c.cabinet, d.c.status,
                    d.c.status_at_ms, d.c.last_reading_ms,
                ).where(
                    d.c.device_id.in_(device_ids[k : k + _IDS_PER_STATEMENT]),
                    d.c.last_reading_ms.is_not(None),
                )
            ).fetchall()
        )  # fmt: skip
    return sorted(found, key=lambda row: str(row.device_id))


def progress(conn: Connection, device_ids: Sequence[str]) -> dict[str, int]:
    """End of the last analysed step of these devices, where analysed before (epoch ms UTC)."""
    st = analysis_state
    done: dict[str, int] = {}
    for k in range(0, len(device_ids), _IDS_PER_STATEMENT):
        q = sa.select(st.c.device_id, st.c.done_ms).where(
            st.c.device_id.in_(device_ids[k : k + _IDS_PER_STATEMENT])
        )
        done.update((r.device_id, int(r.done_ms)) for r in conn.execute(q))
    return done
