"""The condensation rule, its dew point checked against psychrolib."""

from __future__ import annotations

import psychrolib
import pytest
import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tests.analytics.alerts.cabinet import cabinet_series


def test_condensation_against_psychrolib_dew_point(engine: sa.Engine) -> None:
    alerts.set_policy(engine, "device", "cab-1", {"profile": "enclosure", "low_limit_c": -10.0})
    data = cabinet_series(200)
    rows = [
        Reading(
            r.device_id,
            r.ts_ms,
            20.0 + (r.seq or 0) % 3 * 0.1,
            12.0 + 0.01 * i,
            35.0 + 0.1 * (i % 5),
            25.0 + 0.1 * (i % 4),
            3.0,
            8.0,
            seq=r.seq,
            rh=70.0,
        )
        for i, r in enumerate(data)
    ]
    db.store_batch(engine, rows)
    changes = [c for c in alerts.evaluate(engine) if c.kind == "condensation_risk"]
    assert [c.change for c in changes] == ["opened"]
    psychrolib.SetUnitSystem(psychrolib.SI)
    first = rows[30]  # open after 30 min of risk (common practice, no source)
    expected = psychrolib.GetTDewPointFromRelHum(first.t_ambient, 0.70)
    assert changes[0].at_ms == first.ts_ms
    assert changes[0].evidence["dew_point_c"] == pytest.approx(expected, abs=0.01)
    assert "qualified person" in changes[0].evidence["caution"]
