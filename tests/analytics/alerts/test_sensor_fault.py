"""Sensor faults: stuck probes, and the cabinet probe against the cold side's heat balance."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.analytics import simulation as sim
from tecfleet.analytics.alerts.rules.probe_drift import (
    PROBE_DRIFT_ISSUE,
    probe_offsets,
    running_samples_needed,
)
from tecfleet.analytics.alerts.rules.sensor_fault import stuck_window_ms
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tests.analytics.alerts.cabinet import MIN, T0, cabinet_series, kinds
from tests.fleet_fixture import register


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


def test_stuck_cabinet_probe_is_found_on_a_unit_without_face_probes(engine: sa.Engine) -> None:
    # The same frozen cabinet probe on a unit that reports no face temperatures: the missing
    # faces must not hide the channels that still move (a probe cannot hold a reading to the
    # last digit for an hour while the cabinet's cooler cycles; common practice, no source).
    rows = [
        Reading(
            r.device_id, r.ts_ms, 4.7 if i >= 100 else r.t_cabinet, None, None,
            r.t_ambient + 0.5 * np.sin(i / 15.0), r.current, r.voltage, seq=r.seq,
        )
        for i, r in enumerate(cabinet_series(400))
    ]  # fmt: skip
    db.store_batch(engine, rows)
    changes = alerts.evaluate(engine)
    assert kinds(changes) == [("sensor_fault", "opened")]
    assert "t_cabinet stuck" in changes[0].evidence["issues"]


def _sim_readings(spec: sim.FleetSpec, days: float) -> list[Reading]:
    chunks, _truth = sim.simulate(spec, days)
    out = []
    for chunk in chunks:
        for row in chunk.payload_rows():
            for item, device in zip(row, chunk.device_ids, strict=True):
                if item is not None:
                    out.append(
                        Reading(
                            device, round(item["ts"] * 1000), item["t_cabinet"],
                            item.get("t_cold"), item.get("t_hot"), item["t_ambient"],
                            item["current"], item["voltage"], seq=item["seq"], rh=item["rh"],
                        )
                    )  # fmt: skip
    return out


def _opened(engine: sa.Engine, device: str) -> list[tuple[int, list[str]]]:
    a = db.alerts
    with engine.connect() as conn:
        rows = conn.execute(
            sa.select(a.c.opened_ms, a.c.evidence).where(
                a.c.device_id == device, a.c.kind == "sensor_fault"
            )
        ).fetchall()
    return [(int(r.opened_ms), list(r.evidence["issues"])) for r in rows]


@pytest.mark.parametrize(
    ("sensor_set", "channel"),
    [("no_cold", "t_ambient"), ("no_faces", "t_ambient"), ("no_faces", "t_cabinet")],
)
def test_a_stuck_probe_is_found_on_reduced_sensor_sets(
    engine: sa.Engine, sensor_set: str, channel: str
) -> None:
    # The simulator freezes the probe at its value at the fault's start (its truth). On a unit
    # without face probes the cabinet and the room are what is left to move; the fault must be
    # found as on a fully probed unit, within the 3 h the alert bench allows a stuck probe at
    # one-minute reporting (1 h window, 15 min delay; common practice, no source).
    start = 1_735_689_600.0
    at = start + 30 * 3600.0
    spec = sim.FleetSpec(
        devices=(sim.DeviceSpec("red-1", sensor_set=sensor_set, cuts_per_30d=0.0),),
        start_s=start, interval_s=60.0, seed=203,
        faults=(sim.Fault("sensor", "red-1", at, channel=channel, mode="stuck"),),
    )  # fmt: skip
    db.store_batch(engine, _sim_readings(spec, 2.5))
    alerts.evaluate(engine)
    opened = _opened(engine, "red-1")
    assert opened, "no sensor fault opened"
    (first_ms, issues), *_ = opened
    assert f"{channel} stuck" in issues
    assert 0 <= first_ms / 1000 - at <= 3 * 3600


def test_stuck_window_scales_with_the_usual_interval() -> None:
    # An hour at one- and two-minute reporting (60 and 30 readings), 24 usual intervals
    # beyond (the policy's documented figures; common practice, no source).
    policy = alerts.AlertPolicy()
    for every_min, window_min in ((1.0, 60.0), (2.0, 60.0), (5.0, 120.0), (15.0, 360.0)):
        got = stuck_window_ms(np.array([every_min * MIN, np.nan]), policy)
        assert got.tolist() == [window_min * MIN, 60 * MIN]  # NaN: not known yet, the hour


START_15 = 1_735_689_600.0


def _store_pair_at_fifteen_minutes(
    engine: sa.Engine,
    prefix: str,
    seed: int,
    fault: sim.Fault,
    days: float,
    registered: bool = False,
    **unit: Any,
) -> None:
    """Store two simulated units ``<prefix>-1`` (with ``fault``) and ``<prefix>-2`` reporting
    every 15 minutes from ``START_15`` without power cuts; ``registered``: with their
    modules' ratings registered first, as in the field."""
    spec = sim.FleetSpec(
        devices=tuple(
            sim.DeviceSpec(f"{prefix}-{k}", cuts_per_30d=0.0, **unit) for k in (1, 2)
        ),
        start_s=START_15, interval_s=900.0, seed=seed, faults=(fault,),
    )  # fmt: skip
    if registered:
        register(engine, spec, int(START_15 * 1000))
    db.store_batch(engine, _sim_readings(spec, days))


def test_at_fifteen_minutes_a_stuck_cabinet_probe_is_found_and_a_steady_one_is_not(
    engine: sa.Engine,
) -> None:
    # Two units reporting every 15 minutes for 12 days; the simulator freezes one's cabinet
    # probe on day 6 (its truth). An hour holds four readings, too few to tell a frozen probe
    # from a steady 0.1 K one: the window is 24 intervals (6 h), and the healthy unit, whose
    # 0.1 K probe reads the same for hours at a time, is never flagged.
    at = START_15 + 6 * 86_400.0 + 5 * 3600.0
    fault = sim.Fault("sensor", "slow-1", at, channel="t_cabinet", mode="stuck")
    _store_pair_at_fifteen_minutes(engine, "slow", 207, fault, 12.0, control="proportional")
    alerts.evaluate(engine)
    (first_ms, issues), *_ = _opened(engine, "slow-1")
    assert "t_cabinet stuck" in issues
    # the 6 h window, the 15 min delay and a reading's worth of lateness
    assert 0 <= first_ms / 1000 - at <= 6 * 3600 + 900 + 2 * 900
    assert _opened(engine, "slow-2") == []


def _switching_unit(every_min: float, n: int, frozen: str, at: int) -> list[Reading]:
    """A thermostat-cycled unit reporting every ``every_min`` minutes: the module on for two
    readings and off for one, its faces following it (hot face ~10 K above the room while
    on, cold face ~8 K below the cabinet; common practice, no source), the cabinet a steady
    5.0 °C and the room 22.0 °C as a 0.1 K probe reads a quiet one; ``frozen`` keeps its
    reading of row ``at`` from there on."""
    out = []
    for i in range(n):
        on = i % 3 != 2
        row = {
            "t_cabinet": 5.0,
            "t_cold": -3.0 + 0.1 * (i % 2) if on else 4.0,
            "t_hot": 32.0 + 0.1 * (i % 2) if on else 24.5,
            "t_ambient": 22.0,
        }
        if i >= at:
            row[frozen] = out[at - 1][frozen] if at else row[frozen]
        out.append(row)
    return [
        Reading(
            "sw-1", T0 + round(i * every_min * MIN), r["t_cabinet"], r["t_cold"], r["t_hot"],
            r["t_ambient"], 4.0 if i % 3 != 2 else 0.0, 8.0 if i % 3 != 2 else 0.0, seq=i,
        )
        for i, r in enumerate(out)
    ]  # fmt: skip


def test_a_hot_face_probe_frozen_while_the_module_switches_is_stuck_in_the_short_window() -> None:
    # The hot face gives off Qh = S·I·Th + ½·I²·R − K·ΔT and sits R_hot·Qh above the room, so
    # switching a module off drops it by kelvin (Ioffe 1957; Goldsmid 2010, ch. 2). At 15
    # minutes the hot-face probe freezing at reading 40 is stuck once the policy's short
    # window (six intervals, 90 min) holds only its frozen value and a step of the current,
    # long before the 24-interval (6 h) window of the still-room test.
    policy = alerts.AlertPolicy()
    frame = pd.DataFrame([r._asdict() for r in _switching_unit(15.0, 80, "t_hot", 40)])
    obs = alerts.sensor_fault_observations(frame, 0, policy, None)
    flagged = [i for i, d in enumerate(obs.detail or []) if "t_hot stuck" in d.get("issues", [])]
    assert flagged, "the frozen hot face was not found"
    # the frozen value is the reading of row 39; the window (t − 90 min, t] first holds only
    # it at row 44 (rows 39..44), with the module switched on and off between them
    assert flagged[0] == 44
    assert not any("t_cold stuck" in d.get("issues", []) for d in obs.detail or [])


def test_a_steady_cabinet_while_the_module_switches_is_not_stuck() -> None:
    # The cabinet air may rest within one probe step across several thermostat cycles (the
    # module takes away what leaks in): only the hot face is judged on the current's steps.
    # The cabinet and the room read 5.0 and 22.0 °C throughout while the module switches
    # every few readings; over 23 readings (under the 24 intervals the still-room test needs
    # covered) nothing is stuck.
    policy = alerts.AlertPolicy()
    frame = pd.DataFrame([r._asdict() for r in _switching_unit(15.0, 23, "t_cabinet", 0)])
    obs = alerts.sensor_fault_observations(frame, 0, policy, None)
    assert not obs.active.any()


def test_at_fifteen_minutes_a_stuck_hot_face_probe_is_found_within_the_bench_target(
    engine: sa.Engine,
) -> None:
    # Two thermostat-cycled units reporting every 15 minutes for 5 days; the simulator freezes
    # one's hot-face probe on day 3 (its truth). The first switch of the module after the
    # short window (90 min) shows it frozen: within the 3 h the alert bench allows a stuck
    # probe, plus one reporting interval (common practice, no source), where the still-room
    # test needs 6 h.
    at = START_15 + 3 * 86_400.0 + 5 * 3600.0
    fault = sim.Fault("sensor", "hot-1", at, channel="t_hot", mode="stuck")
    _store_pair_at_fifteen_minutes(engine, "hot", 204, fault, 5.0)
    alerts.evaluate(engine)
    (first_ms, issues), *_ = _opened(engine, "hot-1")
    assert "t_hot stuck" in issues
    assert 0 <= first_ms / 1000 - at <= 3 * 3600 + 900
    assert _opened(engine, "hot-2") == []


def test_running_samples_for_the_drift_figures_scale_with_the_usual_interval() -> None:
    # The same running time at every interval (the policy's documented rule): an hour in the
    # window (60 one-minute samples) and five hours in the commissioning fit (300), at least
    # the policy's floor of 8; a unit reporting faster than once a minute needs no more.
    policy = alerts.AlertPolicy()
    for every_min, window, base in ((0.5, 60, 300), (1.0, 60, 300), (5.0, 12, 60), (15.0, 8, 20)):
        iv = every_min * MIN
        got = running_samples_needed(policy.drift_min_samples, iv, policy.drift_min_samples_floor)
        assert float(got) == window
        got = running_samples_needed(
            policy.drift_baseline_min_samples, iv, policy.drift_min_samples_floor
        )
        assert float(got) == base


@pytest.mark.parametrize("sensor_set", ["full", "no_cold"])
def test_at_fifteen_minutes_a_drifting_cabinet_probe_is_found_and_a_steady_one_is_not(
    engine: sa.Engine, sensor_set: str
) -> None:
    # Two units reporting every 15 minutes for 9 days; the simulator drifts one's cabinet
    # probe by 3 K over 3 days from day 3.5 (its truth), so it is 1 K off a day in. The
    # commissioning fit over the first two days holds under 300 running samples at this
    # interval: the drift must still be found, within the 3 days the alert bench allows
    # (common practice, no source), and the steady unit never flagged. Without a cold-face
    # probe the floating module's off samples give the cold face, Tc = Th − V/S, and its
    # heat, −K·ΔT (Goldsmid 2010, ch. 2).
    at = START_15 + 3.5 * 86_400.0
    fault = sim.Fault(
        "sensor", "dr-1", at, magnitude=3.0, ramp_s=3 * 86_400.0, channel="t_cabinet",
        mode="drift",
    )  # fmt: skip
    _store_pair_at_fifteen_minutes(
        engine, "dr", 206, fault, 9.0, registered=True, sensor_set=sensor_set,
        off_voltage="open_circuit",
    )  # fmt: skip
    alerts.evaluate(engine)
    opened = _opened(engine, "dr-1")
    assert opened, "the drifting probe was not found"
    (first_ms, issues), *_ = opened
    assert PROBE_DRIFT_ISSUE in issues
    assert 0 <= first_ms / 1000 - at <= 3 * 86_400
    assert _opened(engine, "dr-2") == []


def test_the_probe_balance_is_not_judged_far_beyond_its_commissioning_range() -> None:
    # A failed hot-side fan drives the module to a hot-to-cold difference far beyond the
    # commissioning's, where the balance from the module's ratings no longer holds (the
    # constant-property module equations, Goldsmid 2010, ch. 2, are fitted near the rating
    # point). There the cabinet probe is not judged: no figure rather than a wrong one.
    # A 127-couple module, S 0.05 V/K, K 0.5 W/K, 4 A, R 2 ohm (from memory).
    n = 8 * 96  # eight days of 15-minute readings
    t = T0 + 15 * MIN * np.arange(n, dtype=np.int64)
    failed = np.arange(n) >= 6 * 96
    t_cold = np.full(n, -8.0)
    t_hot = np.where(failed, 75.0, 40.0)
    current = np.full(n, 4.0)
    voltage = 0.05 * (t_hot - t_cold) + 4.0 * 2.0
    qc = alerts.cold_side_heat_balance(current, t_cold, t_hot, voltage, 0.05, 0.5)
    # the cabinet follows the balance, and 2 K off it where the module runs out of range
    t_cab = t_cold + 0.4 + 0.3 * qc + np.where(failed, 2.0, 0.0)
    frame = pd.DataFrame(
        {"ts_ms": t, "t_cabinet": t_cab, "t_cold": t_cold, "t_hot": t_hot,
         "current": current, "voltage": voltage}
    )  # fmt: skip
    baseline = {
        "to_ms": int(T0 + 2 * 86_400_000), "offset_k": 0.4, "r_cold": 0.3, "seebeck": 0.05,
        "conductance": 0.5, "dt_max_k": 48.0,
    }  # fmt: skip
    policy = alerts.AlertPolicy()
    off = probe_offsets(frame, baseline, policy, np.full(n, 15.0 * MIN))
    judged = ~failed & (t >= baseline["to_ms"])
    assert np.nanmax(np.abs(off[judged])) < 1e-9
    # carried two hours past the last in-range sample, then not judged at all
    assert np.isnan(off[failed][9:]).all()
