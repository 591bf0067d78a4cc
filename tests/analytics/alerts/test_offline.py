"""The offline rule: silence judged against the fleet's newest reading or the wall clock."""

from __future__ import annotations

import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tests.analytics.alerts.cabinet import MIN, T0, cabinet_series, kinds


def test_offline_gap_opens_at_five_intervals_and_resolves_on_return(engine: sa.Engine) -> None:
    data = cabinet_series(600)
    db.store_batch(engine, data[:300] + data[400:])  # 100 minutes silent after minute 299
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("offline", "opened"), ("offline", "resolved")]
    # usual interval 1 min; 5 × 1 min = 5 min is below the 10-minute floor (common practice)
    assert changes[0].at_ms == T0 + 299 * MIN + 10 * MIN
    assert changes[1].at_ms == T0 + 400 * MIN


def test_offline_judged_against_the_fleet_and_the_wall_clock(engine: sa.Engine) -> None:
    db.store_batch(engine, cabinet_series(200))
    other = [
        Reading("cab-2", r.ts_ms, 5.0, -1.0, 30.0, 22.0, 3.0, 8.0) for r in cabinet_series(300)
    ]
    db.store_batch(engine, other)
    changes = alerts.evaluate(engine)  # event time: cab-2 runs 100 min past cab-1's last
    assert [(c.device_id, c.kind, c.change) for c in changes] == [("cab-1", "offline", "opened")]
    assert changes[0].at_ms == T0 + 199 * MIN + 10 * MIN
    # live: the wall clock says cab-2 is silent too; same opening time rule
    changes = alerts.evaluate(engine, now_ms=T0 + 400 * MIN)
    assert [(c.device_id, c.kind, c.change) for c in changes] == [("cab-2", "offline", "opened")]
    assert changes[0].at_ms == T0 + 299 * MIN + 10 * MIN
    assert alerts.evaluate(engine, now_ms=T0 + 401 * MIN) == []
