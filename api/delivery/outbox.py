"""Draining the ``notifications`` outbox, from any number of delivery processes at once.

The alert ledger writes one row in ``notifications`` in the same transaction as each alert
change; :class:`Notifier` (a thread) drains it, so a notice survives a restart. Only
``pending`` rows go out: the ledger keeps the changes of an incident's symptoms as ``absorbed``
rows (on record, never sent) and a recurring alert's resolution as ``deferred`` until it has
stayed away (see tecfleet.analytics.alerts.incidents). Every round
fans new notices out to one delivery per webhook, publishes alert objects to MQTT and attempts
the deliveries that are due.

Site grouping: "opened" notices of one site and kind whose event times fall in one
``group_window_s`` bucket become one grouped webhook notice once ``group_min_devices`` devices
are in it (a site power cut gives one notice, not twenty).
"""

from __future__ import annotations

import logging
import threading
from typing import Any

from sqlalchemy.engine import Connection, Engine

from tecfleet.api.delivery.mqtt import AlertPublisher
from tecfleet.api.delivery.options import DeliveryOptions
from tecfleet.api.delivery.webhooks import WebhookSender, allow_private_default
from tecfleet.api.sealing import sealer_for
from tecfleet.ingest.db import delivery as delivery_db
from tecfleet.ingest.db import now_ms
from tecfleet.ingest.settings import Settings

log = logging.getLogger(__name__)

BucketKey = tuple[str, str, int]


def _sort_pending(
    pending: list[Any], now: int, options: DeliveryOptions
) -> tuple[list[Any], dict[BucketKey, list[Any]]]:
    """Notices ready to fan out, and "opened" notices by (site, kind, time bucket)."""
    ready: list[Any] = []
    buckets: dict[BucketKey, list[Any]] = {}
    for row in pending:
        if row.event == "alert.opened" and row.site:
            if now - int(row.created_ms) < options.group_hold_ms:
                continue  # let the rest of a site-wide event arrive first
            key = (row.site, row.kind, int(row.event_ms) // options.group_window_ms)
            buckets.setdefault(key, []).append(row)
        else:
            ready.append(row)
    return ready, buckets


def _group_bucket(
    conn: Connection, key: BucketKey, rows: list[Any], now: int, options: DeliveryOptions
) -> list[Any]:
    """Fold a bucket into its site's grouped notice; the rows to send singly if too few."""
    site, kind, bucket = key
    window = options.group_window_ms
    existing = delivery_db.group_notice_id(conn, site, kind, bucket * window, (bucket + 1) * window)
    devices = sorted({r.device_id for r in rows})
    if existing is None and len(devices) < options.group_min_devices:
        return rows
    if existing is None:
        alerts_ = [r.payload["alert"] for r in rows]
        summary = (
            f"{len(devices)} units at site {site} raised {kind} within "
            f"{window // 60000} min; check the site (power, "
            "climate) before the single units."
        )
        payload = {
            "site": site,
            "kind": kind,
            "devices": devices,
            "alerts": alerts_,
            "summary": summary,
        }
        event_ms = min(int(r.event_ms) for r in rows)
        existing = delivery_db.insert_group_notice(conn, now, event_ms, site, kind, payload)
    delivery_db.mark_grouped(conn, [r.id for r in rows], existing)
    return []


def fan_out(engine: Engine, now: int, options: DeliveryOptions) -> None:
    """Group what belongs together, then one pending delivery per (live hook, notice)."""
    with engine.begin() as conn:
        if not delivery_db.take_turn(conn, delivery_db.FAN_OUT_TURN):
            return  # another delivery process is fanning out right now
        pending = delivery_db.pending_notices(conn)
        if not pending:
            return
        hooks = delivery_db.live_hook_ids(conn)
        ready, buckets = _sort_pending(pending, now, options)
        for key, rows in buckets.items():
            ready.extend(_group_bucket(conn, key, rows, now, options))
        for row in ready:
            delivery_db.fan_out_notice(conn, row.id, hooks, now)


class Notifier(threading.Thread):
    """Drains the outbox to MQTT and webhooks until :meth:`stop`.

    ``settings`` None means no MQTT (webhooks only). Times in seconds.
    """

    def __init__(
        self,
        engine: Engine,
        settings: Settings | None = None,
        *,
        poll_s: float = 1.0,
        timeout_s: float = 10.0,
        max_attempts: int = 8,
        backoff_s: float = 5.0,
        backoff_max_s: float = 3600.0,
        group_min_devices: int = 3,
        group_window_s: float = 900.0,
        group_hold_s: float = 10.0,
        allow_private: bool | None = None,
    ) -> None:
        super().__init__(name="tecfleet-notifier", daemon=True)
        self.engine = engine
        self.settings = settings
        self.options = DeliveryOptions(
            poll_s=poll_s,
            timeout_s=timeout_s,
            max_attempts=max_attempts,
            backoff_s=backoff_s,
            backoff_max_s=backoff_max_s,
            group_min_devices=group_min_devices,
            group_window_ms=int(group_window_s * 1000),
            group_hold_ms=int(group_hold_s * 1000),
        )
        self.allow_private = allow_private_default() if allow_private is None else allow_private
        self._halt = threading.Event()
        self._mqtt = None if settings is None else AlertPublisher(engine, settings, timeout_s)
        self._webhooks = WebhookSender(
            engine, self.options, allow_private=self.allow_private, sealer=sealer_for(settings)
        )

    def stop(self, timeout_s: float = 10.0) -> None:
        self._halt.set()
        if self.is_alive():
            self.join(timeout_s)

    def run(self) -> None:
        try:
            while not self._halt.is_set():
                try:
                    self.drain_once()
                except Exception:  # keep draining after a database or broker hiccup
                    log.exception("notifier round failed")
                self._halt.wait(self.options.poll_s)
        finally:
            self._webhooks.close()
            if self._mqtt is not None:
                self._mqtt.close()

    def drain_once(self) -> None:
        """One round: fan out new notices, publish to MQTT, attempt due webhook deliveries."""
        now = now_ms()
        self.fan_out(now)
        self.fan_out(now)  # group notices made by the first pass go out in this round too
        if self._mqtt is not None:
            self._mqtt.publish_pending()
        self.deliver_due(now)

    def fan_out(self, now: int) -> None:
        fan_out(self.engine, now, self.options)

    def publish_mqtt(self) -> None:
        if self._mqtt is not None:
            self._mqtt.publish_pending()

    def deliver_due(self, now: int) -> None:
        self._webhooks.deliver_due(now)
