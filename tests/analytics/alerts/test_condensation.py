"""The condensation rule, its dew point checked against psychrolib."""

from __future__ import annotations

import psychrolib
import pytest
import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.api.services.devices import get_device
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tests.analytics.alerts.cabinet import MIN, cabinet_series


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


def _no_cold_probe(t_cabinet: float, current: float, n: int = 200) -> list[Reading]:
    # an enclosure at 25 °C and 70 % RH (dew point about 19.1 °C, psychrolib below), its
    # cold face not probed
    return [
        Reading(
            r.device_id, r.ts_ms, t_cabinet + (r.seq or 0) % 3 * 0.1, None,
            35.0 + 0.1 * (i % 5), 25.0 + 0.1 * (i % 4), current, 8.0, seq=r.seq, rh=70.0,
        )
        for i, r in enumerate(cabinet_series(n))
    ]  # fmt: skip


def _limits(engine: sa.Engine) -> dict[str, dict[str, object]]:
    detail = get_device(engine, "cab-1")
    return {c.check: {"basis": c.basis, "note": c.note} for c in detail.limited_checks}


def test_without_a_cold_probe_air_below_the_dew_point_while_cooling_is_condensation(
    engine: sa.Engine,
) -> None:
    # While the module cools, heat flows from the cabinet air into the cold side, so the cold
    # face is colder than the air (common practice, no source): air 17 °C, below the
    # 19.1 °C dew point, means water on the cold side for certain.
    alerts.set_policy(engine, "device", "cab-1", {"profile": "enclosure", "low_limit_c": -10.0})
    rows = _no_cold_probe(17.0, 3.0)
    db.store_batch(engine, rows)
    changes = [c for c in alerts.evaluate(engine) if c.kind == "condensation_risk"]
    assert [c.change for c in changes] == ["opened"]
    psychrolib.SetUnitSystem(psychrolib.SI)
    expected = psychrolib.GetTDewPointFromRelHum(rows[30].t_ambient, 0.70)
    ev = changes[0].evidence
    assert ev["dew_point_c"] == pytest.approx(expected, abs=0.01)
    assert ev["t_cold_at_most_c"] == pytest.approx(rows[30].t_cabinet, abs=1e-9)
    assert "t_cold_c" not in ev  # no number claimed for a face nobody measured
    assert "upper bound" in ev["basis"]
    assert "qualified person" in ev["caution"]
    assert "Cabinet air" in changes[0].summary


def test_without_a_cold_probe_air_above_the_dew_point_does_not_rule_condensation_out(
    engine: sa.Engine,
) -> None:
    # Air at 21 °C, above the 19.1 °C dew point: the unprobed cold face may well be below it
    # (a cold side a few kelvin under the air is usual; common practice, no source). No alert
    # can be certain, and no all-clear either: the device's answer says the check is limited.
    # A module at rest bounds nothing: air below the dew point then is not judged either.
    alerts.set_policy(engine, "device", "cab-1", {"profile": "enclosure", "low_limit_c": -10.0})
    db.store_batch(engine, _no_cold_probe(21.0, 3.0))
    assert [c for c in alerts.evaluate(engine) if c.kind == "condensation_risk"] == []
    limits = _limits(engine)
    assert "cannot be ruled out" in str(limits["condensation_risk"]["note"])
    assert limits["cold_side_warmer_than_cabinet"]["basis"] is None
    resting = [
        r._replace(ts_ms=r.ts_ms + 200 * MIN, seq=(r.seq or 0) + 200)
        for r in _no_cold_probe(17.0, 0.0)
    ]
    db.store_batch(engine, resting)
    assert [c for c in alerts.evaluate(engine) if c.kind == "condensation_risk"] == []
    assert get_device(engine, "cab-1").readings == 400


def test_a_probed_cold_face_leaves_no_limited_check(engine: sa.Engine) -> None:
    alerts.set_policy(engine, "device", "cab-1", {"profile": "enclosure", "low_limit_c": -10.0})
    db.store_batch(engine, cabinet_series(200))
    alerts.evaluate(engine)
    assert _limits(engine) == {}
