"""Evaluation: every device's alerts brought up to its newest stored reading.

Everything runs on the readings' own timestamps. Per device, ``alert_progress`` keeps the
time of the last evaluated reading and each rule's timers, so each call reads only new
readings (plus a fixed look-back for windowed features) and the same history gives the same
alerts whether it arrives live or as a backfill. Alert changes, their audit rows and their
notifications (the outbox drained by :class:`tecfleet.api.delivery.Notifier`) are written in one
transaction per device.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.analytics.alerts.constants import MS_HOUR
from tecfleet.analytics.alerts.ledger import AlertChange, Ledger
from tecfleet.analytics.alerts.machine import run_machine, timing_for
from tecfleet.analytics.alerts.policy import AlertPolicy, policy_for
from tecfleet.analytics.alerts.rules import RULES
from tecfleet.analytics.alerts.scope import DeviceScope, load_readings
from tecfleet.ingest.db import alert_records as records
from tecfleet.ingest.errors import NotFoundError, StoreError

__all__ = ["evaluate", "evaluate_device"]


def evaluate(
    engine: Engine,
    *,
    device_id: str | None = None,
    policy: AlertPolicy | None = None,
    now_ms: int | None = None,
) -> list[AlertChange]:
    """Bring every device's alerts (or one device's) up to its newest stored reading.

    ``now_ms`` [ms] is the wall clock of the live service, used only to judge silence
    (offline); without it silence is judged against the newest reading of the whole fleet,
    so an analysis of stored history is reproducible. Silence after a device's newest reading
    is judged on the clock of receipt as well: a device whose newest readings arrived late and
    which is still delivering (a backlog, an import) is not offline at the times its backlog
    has not reached yet (see rules.offline). Each device is evaluated in its own
    transaction: alert changes, audit rows, outbox notices and progress commit together.
    Returns the changes made, in time order per device.
    """
    base = policy or AlertPolicy()
    try:
        with engine.connect() as conn:
            fleet_newest, devs = records.devices_to_evaluate(conn, device_id)
            overrides = records.load_overrides(conn)
            receipt = now_ms if now_ms is not None else records.newest_receipt_ms(conn)
        if device_id is not None and not devs:
            raise NotFoundError(f"unknown device {device_id!r}")
        reference = now_ms if now_ms is not None else int(fleet_newest or 0)
        changes: list[AlertChange] = []
        for dev in devs:
            if dev.last_reading_ms is None:
                continue
            p = policy_for(base, overrides, dev.device_id, dev.site)
            with engine.begin() as conn:
                changes.extend(evaluate_device(conn, dev, p, reference, receipt))
        return changes
    except SQLAlchemyError as exc:
        raise StoreError(f"alert evaluation failed: {exc}") from exc


def evaluate_device(
    conn: Connection,
    dev: Any,
    policy: AlertPolicy,
    reference_ms: int,
    receipt_reference_ms: int | None = None,
) -> list[AlertChange]:
    """Run every rule of ``RULES`` on the device's new readings and estimates, in the
    caller's transaction, and keep the progress; returns the alert changes made.
    ``receipt_reference_ms`` [ms] is ``reference_ms`` on the clock of the readings' receipt
    (see :class:`DeviceScope`)."""
    done, state = records.read_progress(conn, dev.device_id)
    lookback = int(
        max(policy.mkt_window_s, policy.stuck_window_s, policy.impossible_on_s, 3600) * 1000
    )
    frame = load_readings(conn, dev.device_id, done - lookback - 3 * MS_HOUR)
    t_all = frame["ts_ms"].to_numpy(np.int64)
    first = int(np.searchsorted(t_all, done, side="right"))
    ledger = Ledger(conn, dev, records.active_maintenance(conn, dev.device_id, dev.site))
    band = policy.band(dev.cabinet)
    kinds: dict[str, dict[str, Any]] = state.setdefault("kinds", {})
    scope = DeviceScope(conn, dev, policy, reference_ms, done, state, frame, first, band)
    scope.receipt_reference_ms = receipt_reference_ms
    for rule in RULES:
        obs = rule.observe(scope)
        if obs is None:
            continue  # nothing for this rule to judge in this call
        timing = timing_for(rule.kind, policy)
        st = kinds.setdefault(rule.kind, {})
        run_machine(rule.kind, obs, st, timing, ledger, rule.evidence(scope))
        if rule.after is not None:
            rule.after(scope)
    scope.finish()
    records.release_held(conn, dev.device_id, reference_ms)
    new_done = int(t_all[-1]) if len(t_all) else done
    records.write_progress(conn, dev.device_id, new_done, records.jsonable(state))
    return ledger.changes
