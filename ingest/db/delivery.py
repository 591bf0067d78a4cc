"""Delivery of alert notices: draining the ``notifications`` outbox, webhooks and their
delivery log.

The fan-out functions take a connection so that one round runs in one transaction; the rest
open their own.

Several delivery processes may drain one outbox. Fanning out and publishing to MQTT are cheap
and keep each device's notices in order, so one process at a time does them: it takes a
transaction-level advisory lock (:func:`take_turn`) and the others skip that part of the round.
Webhook attempts are slow, so they are shared: :func:`due_deliveries` claims a few due
deliveries (``FOR UPDATE SKIP LOCKED``) by moving their next attempt past the time their
attempts can take; another process sees them as not due, and a claim whose process died is
attempted again once it lapses.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine, Row

from tecfleet.ingest.db.engine import now_ms
from tecfleet.ingest.db.tables import notifications, webhook_deliveries, webhooks

#: Rows handled per round [count] (common practice, no source).
MQTT_BATCH = 500

#: Advisory lock keys of the parts of a delivery round that one process does at a time.
FAN_OUT_TURN = 0x7466_0001
MQTT_TURN = 0x7466_0002


def take_turn(conn: Connection, key: int) -> bool:
    """True when this transaction may do the part of the round named by ``key``: on
    PostgreSQL, when no other transaction holds its advisory lock (held till this one ends);
    SQLite has one process, so always."""
    if conn.dialect.name != "postgresql":
        return True
    return bool(conn.execute(sa.select(sa.func.pg_try_advisory_xact_lock(key))).scalar_one())


# -- fan-out (one transaction per round) -----------------------------------------------------


def pending_notices(conn: Connection) -> list[Row[Any]]:
    n = notifications
    return list(conn.execute(sa.select(n).where(n.c.state == "pending").order_by(n.c.id)))


def live_hook_ids(conn: Connection) -> list[int]:
    w = webhooks
    return [
        int(h) for h in conn.execute(sa.select(w.c.id).where(w.c.deleted_ms.is_(None))).scalars()
    ]


def group_notice_id(
    conn: Connection, site: str, kind: str, start_ms: int, end_ms: int
) -> int | None:
    """The grouped notice of ``site`` and ``kind`` with its event time in [start, end)."""
    n = notifications
    found: int | None = conn.execute(
        sa.select(n.c.id).where(
            n.c.event == "site.alerts_opened",
            n.c.site == site,
            n.c.kind == kind,
            n.c.event_ms >= start_ms,
            n.c.event_ms < end_ms,
        )
    ).scalar()
    return found


def insert_group_notice(
    conn: Connection, now: int, event_ms: int, site: str, kind: str, payload: dict[str, Any]
) -> int:
    n = notifications
    notice_id: int = conn.execute(
        n.insert()
        .values(
            created_ms=now,
            event_ms=event_ms,
            event="site.alerts_opened",
            site=site,
            kind=kind,
            payload=payload,
            state="pending",
            mqtt_state="none",
        )
        .returning(n.c.id)
    ).scalar_one()
    return notice_id


def mark_grouped(conn: Connection, notice_ids: list[int], group_id: int) -> None:
    n = notifications
    conn.execute(
        n.update().where(n.c.id.in_(notice_ids)).values(state="grouped", group_id=group_id)
    )


def fan_out_notice(conn: Connection, notice_id: int, hook_ids: Iterable[int], now: int) -> None:
    """One pending delivery per hook, then the notice is marked ``fanned_out``."""
    for hook in hook_ids:
        conn.execute(
            webhook_deliveries.insert().values(
                webhook_id=hook,
                notification_id=notice_id,
                msg_id=f"msg_tf{notice_id}",
                state="pending",
                attempts=0,
                created_ms=now,
                next_attempt_ms=now,
            )
        )
    n = notifications
    conn.execute(n.update().where(n.c.id == notice_id).values(state="fanned_out"))


# -- MQTT -----------------------------------------------------------------------------------


def mqtt_pending(conn: Connection) -> list[Row[Any, Any, Any]]:
    """``id``, ``device_id`` and ``payload`` of notices still to publish, oldest first (in the
    caller's transaction, which should hold :data:`MQTT_TURN`)."""
    n = notifications
    return list(
        conn.execute(
            sa.select(n.c.id, n.c.device_id, n.c.payload)
            .where(n.c.mqtt_state == "pending")
            .order_by(n.c.id)
            .limit(MQTT_BATCH)
        ).fetchall()
    )


def mark_mqtt_sent(conn: Connection, notice_ids: list[int]) -> None:
    n = notifications
    if notice_ids:
        conn.execute(n.update().where(n.c.id.in_(notice_ids)).values(mqtt_state="sent"))


# -- webhook deliveries ---------------------------------------------------------------------


def due_deliveries(
    engine: Engine, now: int, limit: int, claim_ms: int
) -> tuple[list[Row[Any]], dict[int, Row[Any]]]:
    """Claim up to ``limit`` pending deliveries due at ``now`` [ms] for ``claim_ms`` [ms];
    returns them with their hook's url, secret and deletion time, and the notices they carry
    by id. Deliveries another process has locked or claimed are left to it."""
    d, w, n = webhook_deliveries, webhooks, notifications
    with engine.begin() as conn:
        ids = list(
            conn.execute(
                sa.select(d.c.id)
                .where(d.c.state == "pending", d.c.next_attempt_ms <= now)
                .order_by(d.c.id)
                .limit(limit)
                .with_for_update(skip_locked=True)
            ).scalars()
        )
        if ids:
            conn.execute(d.update().where(d.c.id.in_(ids)).values(next_attempt_ms=now + claim_ms))
        due = list(
            conn.execute(
                sa.select(d, w.c.url, w.c.secret, w.c.deleted_ms)
                .join(w, w.c.id == d.c.webhook_id)
                .where(d.c.id.in_(ids))
                .order_by(d.c.id)
            ).fetchall()
        )
        notices = {
            r.id: r
            for r in conn.execute(sa.select(n).where(n.c.id.in_({r.notification_id for r in due})))
        }
    return due, notices


def schedule_retry(
    engine: Engine,
    delivery_id: int,
    attempts: int,
    status: int | None,
    error: str | None,
    delay_ms: int,
) -> None:
    d = webhook_deliveries
    with engine.begin() as conn:
        conn.execute(
            d.update()
            .where(d.c.id == delivery_id)
            .values(
                attempts=attempts,
                last_attempt_ms=now_ms(),
                last_status=status,
                last_error=error,
                next_attempt_ms=now_ms() + delay_ms,
            )
        )


def finish_delivery(
    engine: Engine,
    delivery_id: int,
    state: str,
    attempts: int,
    status: int | None,
    error: str | None,
) -> None:
    """Close a delivery as ``delivered``, ``dead`` or ``cancelled``."""
    now = now_ms()
    d = webhook_deliveries
    with engine.begin() as conn:
        conn.execute(
            d.update()
            .where(d.c.id == delivery_id)
            .values(
                state=state,
                attempts=attempts,
                last_attempt_ms=now,
                last_status=status,
                last_error=error,
                delivered_ms=now if state == "delivered" else None,
            )
        )


def deliveries_page(
    engine: Engine, webhook_id: int, before_id: int | None, limit: int
) -> list[Row[Any]]:
    """Up to ``limit + 1`` deliveries of one hook, newest first, with their notice's event and
    alert id."""
    d, n = webhook_deliveries, notifications
    stmt = (
        sa.select(d, n.c.event, n.c.alert_id)
        .join(n, n.c.id == d.c.notification_id)
        .where(d.c.webhook_id == webhook_id)
        .order_by(d.c.id.desc())
        .limit(limit + 1)
    )
    if before_id is not None:
        stmt = stmt.where(d.c.id < before_id)
    with engine.connect() as conn:
        return list(conn.execute(stmt).fetchall())


# -- webhooks -------------------------------------------------------------------------------


def insert_webhook(
    engine: Engine,
    url: str,
    secret: str,
    description: str | None,
    created_ms: int,
    created_by: str | None,
) -> int:
    w = webhooks
    with engine.begin() as conn:
        hook_id = conn.execute(
            w.insert()
            .values(
                url=url,
                secret=secret,
                description=description,
                created_ms=created_ms,
                created_by=created_by,
            )
            .returning(w.c.id)
        ).scalar_one()
    return int(hook_id)


def live_webhooks(engine: Engine) -> list[Row[Any]]:
    w = webhooks
    with engine.connect() as conn:
        return list(
            conn.execute(sa.select(w).where(w.c.deleted_ms.is_(None)).order_by(w.c.id)).fetchall()
        )


def live_webhook(engine: Engine, webhook_id: int) -> Row[Any] | None:
    w = webhooks
    with engine.connect() as conn:
        return conn.execute(
            sa.select(w).where(w.c.id == webhook_id, w.c.deleted_ms.is_(None))
        ).first()


def delete_webhook(engine: Engine, webhook_id: int) -> None:
    """Mark a hook deleted (its pending deliveries are cancelled when next due)."""
    with engine.begin() as conn:
        conn.execute(
            webhooks.update().where(webhooks.c.id == webhook_id).values(deleted_ms=now_ms())
        )
