"""Alert rules and lifecycle on a real database, with synthetic faults and simulated healthy
fleets. Expected values come from the formulas' sources (named at each check), from
psychrolib and scipy, or are stated as facts of the trade."""

from __future__ import annotations

import math
from collections.abc import Iterator

import numpy as np
import psychrolib
import pytest
import sqlalchemy as sa
from scipy.special import logsumexp

from tecfleet.analytics import alerts
from tecfleet.analytics.simulation import DeviceSpec, FleetSpec, simulate
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading

T0 = 1_790_000_000_000  # an arbitrary start, epoch ms
MIN = 60_000


@pytest.fixture
def engine(sqlite_url: str) -> Iterator[sa.Engine]:
    e = db.make_engine(sqlite_url)
    db.migrate(e)
    yield e
    e.dispose()


def cabinet_series(
    n: int, *, hot: tuple[int, int] | None = None, hot_c: float = 10.0
) -> list[Reading]:
    """Healthy 1-minute readings of a 5 °C cabinet whose channels all wander a little;
    cabinet at ``hot_c`` (+0.1 K every other minute) for minutes [a, b) of ``hot``."""
    out = []
    for i in range(n):
        wobble = 0.3 * math.sin(i / 17.0)
        t_cab = 5.0 + wobble
        if hot is not None and hot[0] <= i < hot[1]:
            t_cab = hot_c + (0.1 if i % 2 else 0.0)  # a live probe flickers by one step
        out.append(
            Reading(
                "cab-1",
                T0 + i * MIN,
                round(t_cab, 2),
                round(-1.0 + wobble, 2),
                round(30.0 + 0.5 * math.cos(i / 13.0), 2),
                round(22.0 + 0.2 * math.sin(i / 29.0), 2),
                3.0,
                8.0,
                seq=i,
                rh=45.0,
            )
        )
    return out


def kinds(changes: list[alerts.AlertChange]) -> list[tuple[str, str]]:
    return [(c.kind, c.change) for c in changes]


# ---------------------------------------------------------------------------
# Mean kinetic temperature
# ---------------------------------------------------------------------------


def test_mkt_matches_the_usp_formula_computed_with_scipy() -> None:
    # USP <1079> (Haynes 1971): MKT = (ΔH/R) / −ln(mean(exp(−ΔH/(R·T_i)))), ΔH = 83.144 kJ/mol,
    # R = 8.3144 J/(mol·K) (from memory). Reference: scipy's logsumexp of the same terms.
    temps_c = np.array([2.0, 5.0, 8.0, 15.0, 25.0, 4.0])
    a = 83_144.0 / 8.3144
    reference_k = -a / (logsumexp(-a / (temps_c + 273.15)) - math.log(temps_c.size))
    assert alerts.mean_kinetic_temperature(temps_c) == pytest.approx(reference_k - 273.15, abs=1e-9)


def test_mkt_of_a_constant_is_that_constant_and_never_below_the_mean() -> None:
    # Fact of the formula: a constant series gives its own temperature, and since exp is
    # convex the MKT is at least the arithmetic mean (Jensen; USP <1079> notes MKT ≥ mean).
    assert alerts.mean_kinetic_temperature([6.0] * 10) == pytest.approx(6.0, abs=1e-9)
    rng = np.random.default_rng(1)
    temps = rng.uniform(2.0, 25.0, 500)
    assert alerts.mean_kinetic_temperature(temps) > float(np.mean(temps))


# ---------------------------------------------------------------------------
# Excursion
# ---------------------------------------------------------------------------


def test_excursion_opens_after_the_delay_and_resolves_with_duration_and_peak(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    # cabinet at 10 °C for 100 minutes from minute 1500 (medicine band 2-8 °C, WHO; from memory)
    db.store_batch(engine, cabinet_series(2000, hot=(1500, 1600)))
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("excursion", "opened"), ("excursion", "resolved")]
    opened, resolved = changes
    # default delay 30 min (common practice, no source): opens at minute 1530
    assert opened.at_ms == T0 + 1530 * MIN
    assert opened.severity == "warning"
    assert opened.evidence["high_limit_c"] == 8.0
    assert opened.evidence["peak_c"] == 10.1
    assert opened.evidence["active_s"] == 30 * 60
    assert "maker's storage instructions" in opened.evidence["caution"]
    # MKT evidence over the trailing 24 h equals the formula on the same stored samples
    frame = db.load_readings(engine, "cab-1", T0 + 1530 * MIN - 86_400_000 + 1, T0 + 1530 * MIN + 1)
    assert opened.evidence["mkt_c"] == pytest.approx(
        alerts.mean_kinetic_temperature(frame["t_cabinet"].to_numpy()), abs=1e-3
    )
    inside = ((frame["t_cabinet"] >= 2.0) & (frame["t_cabinet"] <= 8.0)).mean() * 100
    assert opened.evidence["time_in_range_pct"] == pytest.approx(inside, abs=0.01)
    # back in range at minute 1600, resolved after 30 min clear; lasted 100 min
    assert resolved.at_ms == T0 + 1630 * MIN
    assert resolved.evidence["duration_s"] == 100 * 60
    assert resolved.evidence["peak"] == 10.1
    assert resolved.summary.startswith("Resolved after 1.7 h")
    with engine.connect() as conn:
        row = conn.execute(sa.select(db.alerts)).one()
        trail = conn.execute(sa.select(db.alert_audit.c.to_state).order_by(db.alert_audit.c.id))
        assert [r.to_state for r in trail] == ["open", "resolved"]
    assert row.state == "resolved" and row.resolved_ms == T0 + 1630 * MIN
    engine.dispose()


def test_short_door_opening_does_not_fire(engine: sa.Engine) -> None:
    db.store_batch(engine, cabinet_series(600, hot=(300, 320)))  # 20 min < 30 min delay
    assert alerts.evaluate(engine) == []


def test_cabinet_hovering_at_its_limit_opens_on_cumulative_time(engine: sa.Engine) -> None:
    # From minute 300 the cabinet sits at its 8 °C limit: 8.2 °C for three minutes, 7.9 °C
    # for two, over and over (probe noise and thermostat cycles around the limit). It is
    # never out of range for 30 minutes on end, but it is out 60 % of the time; the delay
    # counts cumulative time out of range (short returns inside do not restart it), so the
    # alert opens once 30 minutes out have added up. Each minute ending in an out-of-range
    # sample counts, the first sample of the spell starts the clock: 2 minutes in the first
    # cycle, 3 in each after, 30 at minute 350 (common practice, no source).
    series = cabinet_series(500)
    for i in range(300, 500):
        r = series[i]
        series[i] = r._replace(t_cabinet=8.2 if (i - 300) % 5 < 3 else 7.9)
    db.store_batch(engine, series)
    changes = [c for c in alerts.evaluate(engine) if c.kind == "excursion"]
    assert kinds(changes) == [("excursion", "opened")]
    assert changes[0].at_ms == T0 + 350 * MIN
    assert changes[0].evidence["active_s"] == 30 * 60


def test_long_excursion_turns_critical_after_ten_hours(engine: sa.Engine) -> None:
    # 10 h above 8 °C, the WHO PQS 30-day recorder heat alarm (from memory)
    db.store_batch(engine, cabinet_series(1500, hot=(100, 1400), hot_c=9.0))
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [
        ("excursion", "opened"),
        ("excursion", "escalated"),
        ("excursion", "resolved"),
    ]
    assert changes[1].severity == "critical"
    assert changes[1].at_ms == T0 + (100 + 600) * MIN


def test_food_profile_uses_five_and_eight_degrees(engine: sa.Engine) -> None:
    # UK FSA advice ≤ 5 °C, 8 °C legal ceiling in England (from memory)
    alerts.set_policy(engine, "device", "cab-1", {"profile": "food"})
    db.store_batch(engine, cabinet_series(400, hot=(100, 300), hot_c=6.5))
    changes = alerts.evaluate(engine)
    assert kinds(changes)[0] == ("excursion", "opened")
    assert changes[0].evidence["high_limit_c"] == 5.0
    assert changes[0].severity == "warning"


# ---------------------------------------------------------------------------
# Lifecycle: incremental, deterministic, restart-safe
# ---------------------------------------------------------------------------


def _alert_rows(engine: sa.Engine) -> list[tuple[object, ...]]:
    with engine.connect() as conn:
        rows = conn.execute(sa.select(db.alerts).order_by(db.alerts.c.id)).fetchall()
    return [
        (r.kind, r.severity, r.state, r.opened_ms, r.resolved_ms, r.summary, r.reopen_count)
        for r in rows
    ]


def test_live_in_chunks_equals_backfill_and_restart_adds_nothing(tmp_path: object) -> None:
    first, second = cabinet_series(2400, hot=(1500, 1600)), cabinet_series(2400, hot=(1800, 1900))
    data = first[:1700] + second[1700:]
    urls = [f"sqlite:///{tmp_path}/{name}.db" for name in ("backfill", "live")]
    back, live = (db.make_engine(u) for u in urls)
    for e in (back, live):
        db.migrate(e)
    db.store_batch(back, data)
    alerts.evaluate(back)
    for start in range(0, len(data), 137):
        db.store_batch(live, data[start : start + 137])
        alerts.evaluate(live)
    assert _alert_rows(back) == _alert_rows(live)
    # the second spell came back within the reopen window: same alert, reopen counted
    assert len(_alert_rows(back)) == 1 and _alert_rows(back)[0][6] == 1
    back.dispose()
    fresh = db.make_engine(urls[0])  # a new process state on the same database
    assert alerts.evaluate(fresh) == []
    with fresh.connect() as conn:
        assert conn.execute(sa.select(sa.func.count()).select_from(db.alerts)).scalar() == 1
    fresh.dispose()
    live.dispose()


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


# ---------------------------------------------------------------------------
# Other rules
# ---------------------------------------------------------------------------


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


def test_stuck_cabinet_probe_is_a_sensor_fault(engine: sa.Engine) -> None:
    data = cabinet_series(400)
    rows = [
        Reading(
            r.device_id,
            r.ts_ms,
            4.7 if i >= 100 else r.t_cabinet,
            r.t_cold,
            r.t_hot,
            r.t_ambient,
            r.current,
            r.voltage,
            seq=r.seq,
        )
        for i, r in enumerate(data)
    ]
    db.store_batch(engine, rows)
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("sensor_fault", "opened")]
    # flat over the 60-minute window (samples 100..159), then the 15-minute delay
    assert changes[0].at_ms == T0 + (159 + 15) * MIN
    assert "t_cabinet stuck" in changes[0].evidence["issues"]


def test_stuck_probe_stays_one_alert_through_a_quiet_spell(engine: sa.Engine) -> None:
    # The cabinet probe freezes at minute 100 and stays frozen. From minute 300 to 500 every
    # other channel rests too (a quiet night: module idle, room steady), so "flat while the
    # others move" cannot be judged; after that they move again. The probe never moved, so the
    # alert must stay open throughout: one opening, no resolve and reopen.
    data = cabinet_series(700)
    rows = []
    for i, r in enumerate(data):
        quiet = 300 <= i < 500
        rows.append(
            r._replace(
                t_cabinet=4.7 if i >= 100 else r.t_cabinet,
                t_cold=-1.0 if quiet else r.t_cold,
                t_hot=30.0 if quiet else r.t_hot,
                t_ambient=22.0 if quiet else r.t_ambient,
            )
        )
    db.store_batch(engine, rows)
    changes = [c for c in alerts.evaluate(engine) if c.kind == "sensor_fault"]
    assert kinds(changes) == [("sensor_fault", "opened")]


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


# ---------------------------------------------------------------------------
# Healthy fleet, long run
# ---------------------------------------------------------------------------


def test_healthy_simulated_fleet_raises_nothing_over_ten_days(engine: sa.Engine) -> None:
    start_s = T0 / 1000
    spec = FleetSpec(
        devices=tuple(
            DeviceSpec(f"ok-{i}", setpoint_c=5.0, t_amb_mean_c=20.0 + 2 * i) for i in range(3)
        ),
        start_s=start_s,
        interval_s=60.0,
        seed=11,
        random_use=False,
    )
    chunks, _truth = simulate(spec, days=10, chunk_steps=1440)
    for chunk in chunks:
        batch = []
        for row in chunk.payload_rows():
            for item, device in zip(row, chunk.device_ids, strict=True):
                if item is None:
                    continue
                batch.append(
                    Reading(
                        device,
                        round(item["ts"] * 1000),
                        item["t_cabinet"],
                        item["t_cold"],
                        item["t_hot"],
                        item["t_ambient"],
                        item["current"],
                        item["voltage"],
                        rh=item.get("rh"),
                        door_open=item.get("door_open"),
                    )
                )
        db.store_batch(engine, batch)
        found = alerts.evaluate(engine)
        assert [(c.device_id, c.kind, c.evidence) for c in found] == []


def test_cold_side_heat_from_the_measured_voltage_matches_the_module_equations() -> None:
    # Qc = S·I·Tc − ½·I²·R − K·ΔT and V = S·ΔT + I·R (Ioffe 1957; Goldsmid 2010, ch. 2):
    # with the voltage those equations give, the Joule term from V must give the same Qc.
    # Module constants of a 127-couple module, S 0.053 V/K, R 2.0 ohm, K 0.5 W/K (from memory).
    from tecfleet.analytics import physics

    s, r, k = 0.053, 2.0, 0.5
    i = np.array([0.5, 2.0, 4.0, 6.0])
    tc = np.array([-5.0, 0.0, 2.0, 10.0])
    th = np.array([25.0, 30.0, 40.0, 60.0])
    v = np.asarray(physics.module_voltage(i, tc + 273.15, th + 273.15, s, r))
    want = np.asarray(physics.cold_side_heat(i, tc + 273.15, th + 273.15, s, r, k))
    got = alerts.cold_side_heat_balance(i, tc, th, v, s, k)
    np.testing.assert_allclose(got, want, rtol=1e-12)


def test_a_drifting_cabinet_probe_moves_the_offset_and_a_healthy_one_does_not() -> None:
    # The air gives its heat to the cold side through r_cold: t_cab − t_cold = r_cold·Qc
    # (a steady heat path, common practice, no source). A probe drifting by +2.5 K over five
    # days adds exactly its drift to the difference; the pumped heat does not change.
    rng = np.random.default_rng(1)
    n = 10 * 1440
    t = T0 + MIN * np.arange(n, dtype=np.int64)
    qc = 15.0 + 5.0 * np.sin(np.arange(n) / 1440.0 * 2 * np.pi)  # daily swing of the load
    t_cold = -8.0 + 0.2 * rng.standard_normal(n)
    r_cold = 0.6
    t_cab = t_cold + r_cold * qc + 0.4 + 0.05 * rng.standard_normal(n)
    running = np.ones(n, dtype=bool)
    base = slice(0, 2 * 1440)
    fit = alerts.fit_cold_side_baseline(t_cab[base], t_cold[base], qc[base], running[base])
    assert fit is not None
    assert fit[0] == pytest.approx(0.4, abs=0.02)
    assert fit[1] == pytest.approx(r_cold, rel=0.01)
    healthy = alerts.cabinet_probe_offset(t, t_cab, t_cold, qc, running, fit, 12 * 3600, 60)
    assert np.nanmax(np.abs(healthy)) < 0.1
    drift = 2.5 * np.clip((np.arange(n) - 4 * 1440) / (5 * 1440), 0.0, 1.0)
    moved = alerts.cabinet_probe_offset(t, t_cab + drift, t_cold, qc, running, fit, 12 * 3600, 60)
    # a 12-hour median lags a ramp by about 6 hours: the offset there is the drift 6 h earlier
    lagged = 2.5 * np.clip((np.arange(n) - 4 * 1440 - 360) / (5 * 1440), 0.0, 1.0)
    np.testing.assert_allclose(moved[3 * 1440 :], lagged[3 * 1440 :], atol=0.05)
