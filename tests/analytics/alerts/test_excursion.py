"""Mean kinetic temperature and the excursion rule. Expected values come from the formula's
sources (named at each check) and scipy, or are stated as facts of the trade."""

from __future__ import annotations

import math

import numpy as np
import pytest
import sqlalchemy as sa
from scipy.optimize import brentq
from scipy.special import logsumexp

from tecfleet.analytics import alerts
from tecfleet.ingest import db
from tests.analytics.alerts.cabinet import MIN, T0, cabinet_series, kinds


def test_mkt_matches_the_usp_formula_computed_with_scipy() -> None:
    # USP <1079> (Haynes 1971): MKT = (ΔH/R) / −ln(mean(exp(−ΔH/(R·T_i)))), ΔH = 83.144 kJ/mol,
    # R = 8.3144 J/(mol·K) (from memory). Reference: scipy's logsumexp of the same terms.
    temps_c = np.array([2.0, 5.0, 8.0, 15.0, 25.0, 4.0])
    a = 83_144.0 / 8.3144
    reference_k = -a / (logsumexp(-a / (temps_c + 273.15)) - math.log(temps_c.size))
    assert alerts.mean_kinetic_temperature(temps_c) == pytest.approx(reference_k - 273.15, abs=1e-9)


def test_mkt_is_the_isothermal_temperature_of_the_same_arrhenius_degradation() -> None:
    # Haynes, J. Pharm. Sci. 60 (1971) 927-929 (from memory): the mean kinetic temperature is
    # the single temperature at which a first-order Arrhenius degradation,
    # k ∝ exp(−ΔH/(R·T)), runs as fast as its mean over the stored profile; ΔH = 83.144 kJ/mol
    # and R = 8.3144 J/(mol·K) as USP <1079> states them (from memory). No published worked
    # example is at hand, so the expected value is found from that definition by root
    # finding on the rate itself (scipy's brentq), not from the closed form the code uses.
    # A day of hourly samples: 20 h at 5 °C, 3 h at 12 °C and 1 h at 25 °C.
    temps_c = [5.0] * 20 + [12.0] * 3 + [25.0]

    def rate(t_c: float) -> float:
        return math.exp(-83_144.0 / (8.3144 * (t_c + 273.15)))

    mean_rate = sum(rate(t) for t in temps_c) / len(temps_c)
    expected_c = brentq(lambda t: rate(t) - mean_rate, 5.0, 25.0, xtol=1e-12)
    assert alerts.mean_kinetic_temperature(temps_c) == pytest.approx(expected_c, abs=1e-6)
    # and it lies above the arithmetic mean of 6.6 °C, the warm hour weighing more
    assert expected_c > sum(temps_c) / len(temps_c)


def test_mkt_of_a_published_worked_example() -> None:
    # Worked example published with the open-source PostgreSQL aggregate ``mkt``
    # (github.com/zelti/mkt, README "Usage example"): samples 2, 2, 5, 8, 8, 8, 8 °C at equal
    # intervals give an MKT of 6.25 °C. The figure is printed to 0.01 °C, so the tolerance is
    # half of that; the arithmetic mean, 5.86 °C, is far outside it.
    assert alerts.mean_kinetic_temperature([2.0, 2.0, 5.0, 8.0, 8.0, 8.0, 8.0]) == pytest.approx(
        6.25, abs=0.005
    )


def test_mkt_of_a_constant_is_that_constant_and_never_below_the_mean() -> None:
    # Fact of the formula: a constant series gives its own temperature, and since exp is
    # convex the MKT is at least the arithmetic mean (Jensen; USP <1079> notes MKT ≥ mean).
    assert alerts.mean_kinetic_temperature([6.0] * 10) == pytest.approx(6.0, abs=1e-9)
    rng = np.random.default_rng(1)
    temps = rng.uniform(2.0, 25.0, 500)
    assert alerts.mean_kinetic_temperature(temps) > float(np.mean(temps))


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
