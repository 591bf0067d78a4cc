"""Acknowledging alerts and maintenance windows."""

from __future__ import annotations

import pytest
import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.analytics.errors import AlertError
from tecfleet.ingest import db
from tecfleet.ingest.db import alert_records
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
    # The hot side at 75 °C (45 K up), above 70 °C (the policy's over-temperature warning),
    # from minute 1500 on: inside a maintenance window of minutes 1400-1700 and past its end.
    alerts.add_maintenance(engine, T0 + 1400 * MIN, T0 + 1700 * MIN, device_id="cab-1")
    data = [
        r._replace(t_hot=r.t_hot + 45.0) if i >= 1500 else r
        for i, r in enumerate(cabinet_series(1800))
    ]
    db.store_batch(engine, data)
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("over_temperature", "opened")]
    n = db.notifications
    with engine.connect() as conn:
        rows = conn.execute(sa.select(n.c.event, n.c.state).order_by(n.c.id)).fetchall()
    # the held notice is replaced by one sent after the window, as the condition continues
    assert [(r.event, r.state) for r in rows] == [
        ("alert.opened", "suppressed"),
        ("alert.opened", "pending"),
    ]


def test_a_maintenance_window_that_ends_warm_starts_a_new_pull_down(engine: sa.Engine) -> None:
    # Cabinet at 10 °C (above the 8 °C medicine band) from minute 1500, inside a maintenance
    # window of minutes 1400-1700, back in band at minute 1750: the unit pulls down again
    # after its service, which is no excursion (issue 17 A1); the pull-down took 50 min.
    alerts.add_maintenance(engine, T0 + 1400 * MIN, T0 + 1700 * MIN, device_id="cab-1")
    db.store_batch(engine, cabinet_series(1800, hot=(1500, 1750)))
    assert alerts.evaluate(engine) == []
    with engine.connect() as conn:
        _done, state = alert_records.read_progress(conn, "cab-1")
    assert state["commissioning"] == {
        "since_ms": T0 + 1700 * MIN,
        "reason": "maintenance",
        "in_band_ms": T0 + 1750 * MIN,
        "pull_down_s": 3000.0,
    }
    # the same warm spell outside any window is an excursion, 30 min after it began
    db.store_batch(engine, cabinet_series(2400, hot=(2000, 2100))[1800:])
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("excursion", "opened"), ("excursion", "resolved")]
    assert changes[0].at_ms == T0 + 2030 * MIN
    assert changes[0].evidence["pull_down_s"] == 3000.0


def test_replaced_parts_are_checked_before_they_are_stored(engine: sa.Engine) -> None:
    with pytest.raises(AlertError, match="unknown replaced parts"):
        alerts.add_maintenance(engine, T0, T0 + MIN, device_id="cab-1", replaced=["fan"])
    with pytest.raises(AlertError, match="not a site's"):
        alerts.add_maintenance(engine, T0, T0 + MIN, site="north", replaced=["module"])
    alerts.add_maintenance(engine, T0, T0 + MIN, device_id="cab-1", replaced=["hot_probe"])
    with engine.connect() as conn:
        assert alert_records.replacements(conn, "cab-1") == [(T0 + MIN, ["hot_probe"])]
