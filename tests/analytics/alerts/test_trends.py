"""The rules on the diagnostics' estimates: module wear, heat leak and capacity."""

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


def _capacity_series(days: int, losing_from: int | None) -> dict[str, list[tuple[int, float]]]:
    """Daily capacity figures of a unit short of cooling at its design ambient (-3 W of
    11 W, cannot hold there), losing its setpoint from day ``losing_from`` on."""
    day = 86_400_000
    at = [T0 + d * day for d in range(days)]
    losing = [1.0 if losing_from is not None and d >= losing_from else 0.0 for d in range(days)]
    return {
        "capacity.margin_w": [(t, -3.0) for t in at],
        "capacity.holdable": [(t, 0.0) for t in at],
        "capacity.max_cooling_w": [(t, 11.0) for t in at],
        "capacity.design_ambient_c": [(t, 24.6) for t in at],
        "capacity.design_ambient_basis": [(t, 2.0) for t in at],
        "capacity.losing_setpoint": list(zip(at, losing, strict=True)),
        "capacity.losing_setpoint_h": [(t, 5.0 * v) for t, v in zip(at, losing, strict=True)],
    }


def test_capacity_short_at_the_design_ambient_alone_is_a_warning() -> None:
    # Issue 17 A3: units holding their setpoint were marked critical for lacking capacity at
    # the design ambient. Critical is kept for a unit losing its setpoint now.
    policy = alerts.AlertPolicy()
    obs = alerts.trend_observations("capacity_shortfall", _capacity_series(8, None), policy)
    n = policy.capacity_persist
    assert list(obs.active) == [False] * (n - 1) + [True] * (8 - n + 1)
    assert set(obs.severity[obs.active]) == {1}
    obs = alerts.trend_observations("capacity_shortfall", _capacity_series(8, 6), policy)
    assert list(obs.severity[n - 1 :]) == [1, 1, 2, 2]


def test_capacity_summary_says_where_the_design_ambient_came_from(engine: sa.Engine) -> None:
    day = 86_400_000
    series = cabinet_series(7 * 1440 + 60)
    db.store_batch(engine, series)
    for key, points in _capacity_series(7, 6).items():
        for t, v in points:
            _estimate(engine, key, t, v)
    changes = [c for c in alerts.evaluate(engine) if c.kind == "capacity_shortfall"]
    assert [(c.change, c.severity) for c in changes] == [
        ("opened", "warning"),
        ("escalated", "critical"),
    ]
    assert changes[0].at_ms == T0 + 4 * day  # the fifth daily figure (capacity_persist)
    assert changes[1].summary == (
        "At the design ambient of 24.6 °C (from the warmest hours of its own ambient) the "
        "cooler has -3.0 W of cooling to spare (-27% of its maximum cooling, median of 5 "
        "daily figures) and cannot hold its setpoint there; it is losing its setpoint now "
        "(5 h of the last day above it while driven flat out); check module, fans and heat "
        "leak before warm weather."
    )
