"""The offline rule: silence judged against the fleet's newest reading or the wall clock, on
one time frame: a device delivering a backlog is not offline at the times it has not
delivered yet."""

from __future__ import annotations

import importlib
from collections.abc import Sequence

import pytest
import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tests.analytics.alerts.cabinet import MIN, T0, cabinet_series, kinds


def arrive(
    engine: sa.Engine, monkeypatch: pytest.MonkeyPatch, rows: Sequence[Reading], at_ms: int
) -> None:
    """Store ``rows`` as the service would on receiving them at ``at_ms`` [ms] (wall clock)."""
    # the module, not the table of the same name that the package exports
    store = importlib.import_module("tecfleet.ingest.db.readings")
    monkeypatch.setattr(store, "now_ms", lambda: at_ms)
    db.store_batch(engine, rows)


def arrive_live(
    engine: sa.Engine, monkeypatch: pytest.MonkeyPatch, rows: Sequence[Reading]
) -> None:
    """Store ``rows`` as a live unit delivers them: each minute's reading received 2 s after
    it was taken."""
    for r in rows:
        arrive(engine, monkeypatch, [r], r.ts_ms + 2000)


def test_offline_gap_opens_at_five_intervals_and_resolves_on_return(engine: sa.Engine) -> None:
    data = cabinet_series(600)
    db.store_batch(engine, data[:300] + data[400:])  # 100 minutes silent after minute 299
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("offline", "opened"), ("offline", "resolved")]
    # usual interval 1 min; 5 × 1 min = 5 min is below the 10-minute floor (common practice)
    assert changes[0].at_ms == T0 + 299 * MIN + 10 * MIN
    assert changes[1].at_ms == T0 + 400 * MIN
    # stored long after it happened: a past outage of 101 min, said so in words
    assert changes[1].summary.startswith("Resolved after 1.5 h: past outage: no readings for 1.7 h")


def test_offline_judged_against_the_fleet_and_the_wall_clock(
    engine: sa.Engine, monkeypatch: pytest.MonkeyPatch
) -> None:
    arrive_live(engine, monkeypatch, cabinet_series(200))
    other = [
        Reading("cab-2", r.ts_ms, 5.0, -1.0, 30.0, 22.0, 3.0, 8.0) for r in cabinet_series(300)
    ]
    arrive_live(engine, monkeypatch, other)
    changes = alerts.evaluate(engine)  # event time: cab-2 runs 100 min past cab-1's last
    assert [(c.device_id, c.kind, c.change) for c in changes] == [("cab-1", "offline", "opened")]
    assert changes[0].at_ms == T0 + 199 * MIN + 10 * MIN
    # the summary in words a person reads: silent from minute 199 to minute 299 so far
    assert changes[0].summary.startswith("No readings for 1.7 h (usually every 60 s)")
    # live: the wall clock says cab-2 is silent too; same opening time rule
    changes = alerts.evaluate(engine, now_ms=T0 + 400 * MIN)
    assert [(c.device_id, c.kind, c.change) for c in changes] == [("cab-2", "offline", "opened")]
    assert changes[0].at_ms == T0 + 299 * MIN + 10 * MIN
    assert changes[0].summary.startswith("No readings for 1.7 h")
    assert alerts.evaluate(engine, now_ms=T0 + 401 * MIN) == []


def test_a_backlog_being_delivered_is_not_offline(
    engine: sa.Engine, monkeypatch: pytest.MonkeyPatch
) -> None:
    # A unit back after a long outage uploads its stored minutes in two parts, received at
    # minute 1000 and 1005 of the wall clock; minutes 100-351 are missing from its store
    # (4.2 h: a real outage in the past).
    data = cabinet_series(600)
    arrive(engine, monkeypatch, data[:100], T0 + 1000 * MIN)
    # the rest of the backlog has not arrived yet: the unit is still delivering
    assert alerts.evaluate(engine, now_ms=T0 + 1001 * MIN) == []
    arrive(engine, monkeypatch, data[352:], T0 + 1005 * MIN)
    changes = alerts.evaluate(engine, now_ms=T0 + 1006 * MIN)
    # the gap is recorded as a past outage with its true times, and closed with it
    assert kinds(changes) == [
        ("offline", "opened"),
        ("offline", "escalated"),
        ("offline", "resolved"),
    ]
    assert changes[0].at_ms == T0 + 99 * MIN + 10 * MIN
    assert changes[-1].at_ms == T0 + 352 * MIN
    assert changes[0].evidence["past_outage"] is True
    # 4.2 h = 253 min from minute 99 to minute 352
    assert changes[0].summary.startswith("Past outage: no readings for 4.2 h")
    assert changes[-1].summary.startswith(
        "Resolved after 4.0 h: past outage: no readings for 4.2 h"
    )
    # 5 min after the last delivery the unit still counts as delivering
    assert alerts.evaluate(engine, now_ms=T0 + 1010 * MIN) == []
    # delivered up to minute 599 at minute 1005, and nothing since: 15 min of silence on the
    # wall clock is past the 10-minute floor, and its readings end at minute 599: offline
    # from minute 609 (the same alert, back within the policy's 6 h reopen window), critical
    # past the policy's 4 h
    changes = alerts.evaluate(engine, now_ms=T0 + 1020 * MIN)
    assert kinds(changes) == [("offline", "reopened"), ("offline", "escalated")]
    assert changes[0].at_ms == T0 + 609 * MIN
    assert changes[0].summary.startswith("No readings for 7.0 h")
    assert changes[0].evidence["past_outage"] is False
