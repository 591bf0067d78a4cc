"""The hot side's over-temperature rule with its hysteresis."""

from __future__ import annotations

import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tests.analytics.alerts.cabinet import MIN, T0, cabinet_series, kinds


def test_over_temperature_with_hysteresis(engine: sa.Engine) -> None:
    data = cabinet_series(200)
    hot = [71.0, 72.0] * 5 + [68.0] * 40 + [65.0] * 60  # 68 °C holds (70 - 3 K hysteresis)
    rows = [
        Reading(
            r.device_id,
            r.ts_ms,
            r.t_cabinet,
            r.t_cold,
            hot[i] if i < len(hot) else r.t_hot,
            r.t_ambient,
            r.current,
            r.voltage,
            seq=r.seq,
        )
        for i, r in enumerate(data)
    ]
    db.store_batch(engine, rows)
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("over_temperature", "opened"), ("over_temperature", "resolved")]
    # 70 °C warning (common practice, no source) sustained 5 min
    assert changes[0].at_ms == T0 + 5 * MIN
    assert changes[0].evidence["peak_c"] == 72.0
    # held at 68 °C, clears below 67 °C at minute 50, resolves 30 min later
    assert changes[1].at_ms == T0 + 80 * MIN
