"""Units that report every 15 minutes, with and without interval summaries: every estimate is
served, states the interval it rests on, and the cabinet's UA and the hot side's resistance
land near the simulator's own record of each unit's parameters (``FleetTruth.params_at``, the
reference; nothing the diagnostics computed).

Tolerances: the targets of issue 22 for 15-minute summaries (UA within 25 %, hot-side
resistance within 30 %, R25 within 2 %), here on the median unit of a small fleet of seed 205
(a tuning seed), and 35 % for UA from 15-minute instants.

Detection at slow reporting (issue 22): a 1.5x UA step flagged within 3 days at 5-minute
instants; no UA flag on a unit without a leak; wear flagged within a week at 5-minute
instants without a cold-face probe; the simulator's fault list being the reference.
"""

from __future__ import annotations

import dataclasses
import math
import tempfile
from pathlib import Path

import numpy as np
import pytest

from tecfleet.analytics import runner
from tecfleet.analytics import simulation as sim
from tests.bench import bench_diagnostics as bench

DAYS = 5.0


def _analysed(summaries: bool) -> dict[str, list[tuple[float, dict[str, dict[str, object]]]]]:
    # Per quantity: (truth, served health entry) of every unit.
    reporting = bench.Reporting(900.0, summaries)
    spec = reporting.apply(sim.random_fleet(4, seed=205, start_s=bench.START_S, days=DAYS))
    out: dict[str, list[tuple[float, dict[str, dict[str, object]]]]] = {}
    with tempfile.TemporaryDirectory() as tmp:
        engine, truth, _ = bench.build_db(Path(tmp) / "slow.db", spec, DAYS)
        runner.analyze(engine)
        end = bench.START_S + DAYS * 86_400.0
        for d in spec.devices:
            health = runner.latest_health(engine, d.device_id)
            tp = truth.params_at(d.device_id, end)
            for key, tkey in (
                ("cabinet.ua_w_per_k", "ua"),
                ("hot_side.resistance_k_per_w", "r_hot"),
                ("module.resistance_25c_ohm", "r25"),
            ):
                out.setdefault(key, []).append((tp[tkey], health))
        engine.dispose()
    return out


@pytest.fixture(scope="module")
def summarised() -> dict[str, list[tuple[float, dict[str, dict[str, object]]]]]:
    return _analysed(True)


@pytest.fixture(scope="module")
def instants() -> dict[str, list[tuple[float, dict[str, dict[str, object]]]]]:
    return _analysed(False)


def _median_error(rows: list[tuple[float, dict[str, dict[str, object]]]], key: str) -> float:
    errs = []
    for truth, health in rows:
        value = health.get(key, {}).get("value")
        errs.append(math.inf if value is None else abs(float(value) / truth - 1.0))  # type: ignore[arg-type]
    return float(np.median(errs))


def test_summaries_give_every_estimate_near_the_truth(
    summarised: dict[str, list[tuple[float, dict[str, dict[str, object]]]]],
) -> None:
    assert _median_error(summarised["cabinet.ua_w_per_k"], "cabinet.ua_w_per_k") <= 0.25
    key = "hot_side.resistance_k_per_w"
    assert _median_error(summarised[key], key) <= 0.30
    key = "module.resistance_25c_ohm"
    assert _median_error(summarised[key], key) <= 0.02


def test_each_estimate_states_the_readings_it_rests_on(
    summarised: dict[str, list[tuple[float, dict[str, dict[str, object]]]]],
    instants: dict[str, list[tuple[float, dict[str, dict[str, object]]]]],
) -> None:
    for rows, words in ((summarised, "15-minute interval means"), (instants, "15-minute instants")):
        for key, entries in rows.items():
            for _truth, health in entries:
                basis = str(health[key].get("basis"))
                assert words in basis, (key, basis)


def test_instants_still_give_ua_near_the_truth(
    instants: dict[str, list[tuple[float, dict[str, dict[str, object]]]]],
) -> None:
    assert _median_error(instants["cabinet.ua_w_per_k"], "cabinet.ua_w_per_k") <= 0.35


def _leak_flags(
    interval_s: float, seed: int, days: float, leak_day: float | None
) -> tuple[float | None, dict[str, float | None]]:
    # A small fleet of ``seed`` reporting instants every ``interval_s``, its first unit's UA
    # stepped 1.5x at ``leak_day`` (None: all healthy). Returns the leak's start [s] and
    # every unit's first UA flag [s] (None: never).
    base = sim.random_fleet(3, seed=seed, start_s=bench.START_S, days=days)
    faults: tuple[sim.Fault, ...] = ()
    start = None
    if leak_day is not None:
        start = bench.START_S + leak_day * 86_400.0
        faults = (sim.Fault("leak", base.devices[0].device_id, start, magnitude=1.5),)
    spec = bench.Reporting(interval_s, False).apply(dataclasses.replace(base, faults=faults))
    flags: dict[str, float | None] = {}
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _ = bench.build_db(Path(tmp) / "leak.db", spec, days)
        runner.analyze(engine)
        for d in spec.devices:
            hit = bench._first_flag(engine, d.device_id, "cabinet.ua", 0)
            flags[d.device_id] = None if hit is None else hit / 1000.0
        engine.dispose()
    return start, flags


def test_a_leak_is_flagged_within_three_days_at_five_minute_instants() -> None:
    # Issue 22's promise at 5-minute reporting: a 1.5x UA step (the simulator's fault, the
    # reference) flagged within 3 days, and no flag before it nor on the healthy units.
    start, flags = _leak_flags(300.0, 203, 11.0, 5.0)
    assert start is not None
    leaky, *healthy = flags
    hit = flags[leaky]
    assert hit is not None and start <= hit <= start + 72 * 3600.0, hit
    assert all(flags[d] is None for d in healthy)


def test_fifteen_minute_instants_raise_no_leak_flag_without_a_leak() -> None:
    # The detection bench's fleet of seed 203 (a tuning seed) at 15-minute instants, 20 of
    # its 26 days: the simulator's fault list is the reference. Two of its units without a
    # leak read UA +40-55 % for a day or more (warm goods, which instants this far apart
    # cannot tell from a leak; on one of them UA is served unreliable at ±38 %): no unit may
    # be flagged before a leak of its own (issue 22: no flag on a healthy unit at any
    # interval; a leak flag rests on UA served as reliable).
    bench.REPORTING, saved = bench.Reporting(900.0, False), bench.REPORTING
    try:
        spec = bench.detection_fleet(203, 10, 26.0)
    finally:
        bench.REPORTING = saved
    leaks = {f.device_id: f.start_s for f in spec.faults if f.kind == "leak"}
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _ = bench.build_db(Path(tmp) / "slow15.db", spec, 20.0)
        runner.analyze(engine)
        flags = {d: bench._first_flag(engine, d, "cabinet.ua", 0) for d in spec.device_ids}
        engine.dispose()
    for dev, hit in flags.items():
        assert hit is None or hit / 1000.0 >= leaks.get(dev, math.inf), dev


def test_a_busy_door_leaves_the_hot_side_its_hours_at_five_minute_instants() -> None:
    # A unit whose door opens every half hour (simulator, test data only), reporting instants
    # every 5 minutes for 6 days. The hot sink's balance r_hot = ∫(Th - Ta)dt / ∫Qh dt, with
    # Qh = S·I·Th + ½·I²·R - K·ΔT from the faces (Goldsmid 2010, ch. 2; Incropera et al.
    # 2007, ch. 5), holds whatever the door does to the cabinet air, so door-settling
    # samples stay in it: after the commissioning day at least 4 hours in 5 get their figure
    # (the code gave 106 of 120; leaving those samples out, as the cabinet's balance does,
    # gave 51), within issue 22's 30 % of the simulator's r_hot (the reference) on the
    # median hour, and no hour's change reaches the fan's flag (50 %).
    unit = sim.DeviceSpec("busy", door_per_day=48.0, cuts_per_30d=0.0, loads_per_day=0.0)
    days = 6.0
    spec = bench.Reporting(300.0, False).apply(
        sim.FleetSpec(devices=(unit,), start_s=bench.START_S, interval_s=60.0, seed=44)
    )
    with tempfile.TemporaryDirectory() as tmp:
        engine, truth, _ = bench.build_db(Path(tmp) / "busy.db", spec, days)
        runner.analyze(engine)
        rows = runner.estimate_history(engine, "busy", "hot_side.resistance_k_per_w")
        changes = runner.estimate_history(engine, "busy", "hot_side.resistance.change_pct")
        r_hot = truth.params_at("busy", bench.START_S + days * 86_400.0)["r_hot"]
        engine.dispose()
    later = [r for r in rows if r["at_ms"] > (bench.START_S + 86_400.0) * 1000]
    assert len(later) >= 0.8 * 5 * 24
    assert abs(float(np.median([r["value"] for r in later])) / r_hot - 1.0) <= 0.30
    assert changes and max(abs(r["value"]) for r in changes) < 50.0


def test_r25s_precision_limit_grows_with_the_reporting_interval() -> None:
    # A window's R25 rests on 60/interval of the one-minute samples, its standard error on
    # the root of their number (common practice, no source): the limit grows as the root of
    # the interval's ratio, up to half the flag's threshold, with or without summaries.
    cfg = runner.AnalysisSettings()
    limit = {
        (s, summ): runner.settings.for_reporting(cfg, s, summ).r25_max_rel_se
        for s in (60.0, 120.0, 300.0, 900.0)
        for summ in (False, True)
    }
    assert limit[60.0, False] == pytest.approx(cfg.r25_max_rel_se)
    assert limit[120.0, False] == pytest.approx(cfg.r25_max_rel_se * math.sqrt(2.0))
    for s in (300.0, 900.0):
        assert limit[s, False] == limit[s, True] == pytest.approx(cfg.r25_flag_pct / 200.0)
    assert runner.settings.for_reporting(cfg, 900.0, True).thermal_window_s == cfg.thermal_window_s


def test_wear_is_flagged_at_five_minute_instants_without_a_cold_probe() -> None:
    # A floating thermostat unit without a cold-face probe from the detection bench (seed 201,
    # a tuning seed; its R25 read from the voltage states 1.0-1.6 % errors at 5-minute
    # instants) and its twin, reporting every 5 minutes for 12 days; the first wears to +10 %
    # R25 over 6 days from day 3 (the simulator's fault, the reference). The wear is flagged
    # within a week of reaching +5 % (issue 17's target), the twin never.
    bench.REPORTING, saved = bench.Reporting(300.0, False), bench.REPORTING
    try:
        fleet = bench.detection_fleet(201, 10, 26.0, "no_cold")
    finally:
        bench.REPORTING = saved
    unit = next(d for d in fleet.devices if d.device_id == "tec-0008")
    start = bench.START_S + 3 * 86_400.0
    spec = dataclasses.replace(
        fleet,
        devices=(
            dataclasses.replace(unit, device_id="worn-1"),
            dataclasses.replace(unit, device_id="twin-1"),
        ),
        faults=(sim.Fault("wear", "worn-1", start, magnitude=1.1, ramp_s=6 * 86_400.0),),
        events=(),
    )
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _ = bench.build_db(Path(tmp) / "wear5.db", spec, 12.0)
        runner.analyze(engine)
        worn = bench._first_flag(engine, "worn-1", "module.resistance_25c", 0)
        twin = bench._first_flag(engine, "twin-1", "module.resistance_25c", 0)
        engine.dispose()
    five_pct = start + 3 * 86_400.0  # halfway up the ramp: +5 %
    assert worn is not None and five_pct <= worn / 1000.0 <= five_pct + 168 * 3600.0
    assert twin is None
