"""Acknowledging alerts and maintenance windows."""

from __future__ import annotations

import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.ingest import db
from tests.analytics.alerts.cabinet import MIN, T0, cabinet_series, kinds


def test_acknowledge_records_who_and_when(engine: sa.Engine) -> None:
    db.store_batch(engine, cabinet_series(1560, hot=(1500, 1560)))
    (change,) = alerts.evaluate(engine)
    row = alerts.acknowledge(engine, change.alert_id, "night-shift", "door left ajar")
    assert row["state"] == "acknowledged"
    trail = alerts.audit_trail(engine, change.alert_id)
    assert [(h["to_state"], h["actor"]) for h in trail] == [
        ("open", "system"),
        ("acknowledged", "night-shift"),
    ]
    # still one alert per device and kind as the excursion goes on
    db.store_batch(engine, cabinet_series(1700, hot=(1500, 1600))[1560:])
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("excursion", "resolved")]
    assert changes[0].alert_id == change.alert_id


def test_maintenance_holds_notices_and_sends_the_open_alert_at_the_end(engine: sa.Engine) -> None:
    alerts.add_maintenance(engine, T0 + 1400 * MIN, T0 + 1700 * MIN, device_id="cab-1")
    db.store_batch(engine, cabinet_series(1800, hot=(1500, 1800)))
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("excursion", "opened")]
    n = db.notifications
    with engine.connect() as conn:
        rows = conn.execute(sa.select(n.c.event, n.c.state).order_by(n.c.id)).fetchall()
    # the held notice is replaced by one sent after the window, as the excursion continues
    assert [(r.event, r.state) for r in rows] == [
        ("alert.opened", "suppressed"),
        ("alert.opened", "pending"),
    ]
