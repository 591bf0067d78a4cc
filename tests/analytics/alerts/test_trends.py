"""The rules on the diagnostics' estimates: module wear and heat leak."""

from __future__ import annotations

import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.ingest import db
from tests.analytics.alerts.cabinet import T0, cabinet_series


def _estimate(engine: sa.Engine, key: str, at_ms: int, value: float) -> None:
    with engine.begin() as conn:
        conn.execute(
            db.estimates.insert().values(
                device_id="cab-1", key=key, at_ms=at_ms, value=value, n=10, reliable=True
            )
        )


def test_module_wear_summary_from_the_trend_estimates(engine: sa.Engine) -> None:
    day = 86_400_000
    series = cabinet_series(2 * 1440 + 60)
    # readings only up to the last estimate: it waits for the sensor rule to see them
    db.store_batch(engine, series[: 2 * 1440 + 1])
    for d, pct in enumerate([1.0, 3.0, 6.1]):
        _estimate(engine, "module.resistance_25c.change_pct", T0 + d * day, pct)
    _estimate(engine, "module.resistance_25c.baseline", T0, 2.04)
    _estimate(engine, "module.resistance_25c_ohm", T0 + 2 * day, 2.16)
    _estimate(engine, "module.resistance_25c.slope_pct_per_30d", T0 + 2 * day, 4.5)
    _estimate(engine, "module.days_to_wear_limit", T0 + 2 * day, 26.0)
    assert [c for c in alerts.evaluate(engine) if c.kind == "module_wear"] == []
    db.store_batch(engine, series[2 * 1440 + 1 :])
    changes = [c for c in alerts.evaluate(engine) if c.kind == "module_wear"]
    assert [c.change for c in changes] == ["opened"]
    # +5 % warning (common practice, no source), opened at the first estimate over it
    assert changes[0].at_ms == T0 + 2 * day
    assert changes[0].summary == (
        "Module resistance at 25 °C has risen 6.1% since commissioning (2.04 -> 2.16 ohm), "
        "about 0.15%/day; at this rate it reaches the 10% limit in 26 days; plan a module "
        "replacement."
    )
    assert alerts.evaluate(engine) == []


def test_wear_limit_days_away_warns_only_on_a_rise_whose_interval_excludes_zero() -> None:
    # Figures the diagnostics produced on a simulated healthy unit (tests/bench/bench_alerts.py,
    # seed 3, sc-0009, day 11): R25 up 3.8 %, Theil-Sen slope 11.7 %/30 days with a 95 %
    # interval of -4.2 to +21.3 %/30 days, hence 29.8 days to the +10 % limit on paper.
    # An interval that holds zero is no evidence of a rise (Sen 1968, the interval of the
    # slope), so the days left must not open a warning.
    at = T0 + 11 * 86_400_000
    series = {
        "module.resistance_25c.change_pct": [(at, 3.83)],
        "module.resistance_25c.slope_pct_per_30d": [(at, 11.7)],
        "module.resistance_25c.slope_pct_per_30d_low": [(at, -4.17)],
        "module.days_to_wear_limit": [(at, 29.8)],
    }
    obs = alerts.trend_observations("module_wear", series, alerts.AlertPolicy())
    assert not obs.active[0]
    # the same figures on a rise whose interval lies above zero: under the policy's 30 days
    series["module.resistance_25c.slope_pct_per_30d_low"] = [(at, 2.0)]
    obs = alerts.trend_observations("module_wear", series, alerts.AlertPolicy())
    assert obs.active[0] and obs.severity[0] == 1


def test_heat_leak_back_after_days_reopens_the_same_alert(engine: sa.Engine) -> None:
    # UA up 40 % for a day, back to +20 % for three days (the alert resolves after its day of
    # clear estimates), then up 40 % again: the same leak, so the same alert is reopened
    # and the reopen counted, within the trend kinds' reopen window of 7 days (common
    # practice, no source), instead of a second alert for one fault.
    six_h = 6 * 3_600_000
    db.store_batch(engine, cabinet_series(8 * 1440))
    for k in range(4, 26):  # days 1 to 6.25, 6-hourly
        pct = 40.0 if k < 8 or k >= 20 else 20.0
        _estimate(engine, "cabinet.ua.change_pct", T0 + k * six_h, pct)
    changes = [c for c in alerts.evaluate(engine) if c.kind == "heat_leak"]
    assert [c.change for c in changes] == ["opened", "resolved", "reopened"]
    with engine.connect() as conn:
        rows = conn.execute(
            sa.select(db.alerts.c.id, db.alerts.c.reopen_count).where(
                db.alerts.c.kind == "heat_leak"
            )
        ).fetchall()
    assert [r.reopen_count for r in rows] == [1]
