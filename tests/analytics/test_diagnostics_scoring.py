"""The diagnostics scored against simulated fleets with known truth.

The same functions as ``tests/bench/bench_diagnostics.py``, which prints the tables: healthy
fleets of 8 units for 7 days of one-minute data (seeds 1-7, noise, probe bias, quantisation,
doors, loads and power cuts on), a fleet with wear, leak and fan faults, and a 90-day season
with the ambient swinging about ±10 K. The reference is the simulator's own record of each
unit's parameters (``FleetTruth.params_at``), not anything the diagnostics computed.

Targets (the diagnostics' targets; common practice, no source): after 7 days, R25 within 2 %,
S within 5 %, UA and the hot side's resistance within 20 %; a 5 % R25 rise flagged within
7 days of crossing, a 1.5x UA step within 2 days, a 3x hot-side step within 2 hours; no flag
on healthy units over the season.
"""

from __future__ import annotations

import dataclasses
import math
import tempfile
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from tecfleet.analytics import runner
from tecfleet.analytics import simulation as sim
from tests.bench.bench_diagnostics import (
    START_S,
    UnitScore,
    accuracy_scores,
    build_db,
    detection_fleet,
    detection_scores,
    season_scores,
)

#: The targets this module's docstring states, by quantity [-] (the bench prints the tighter
#: ones of issue 17 beside its figures; these pin what the diagnostics reach now).
TOL = {
    "R25": 0.02, "S25": 0.05, "UA": 0.20, "r_hot (1 h)": 0.20, "r_hot (24 h fit)": 0.20,
    "r_cold": 0.20, "K": 0.20,
}  # fmt: skip


def _ok(u: UnitScore) -> bool:
    """Within this module's target for its quantity."""
    return abs(u.rel_err) <= TOL[u.quantity]


@pytest.fixture(scope="module")
def scores() -> list[UnitScore]:
    return accuracy_scores([1, 2, 3, 4, 5, 6, 7], 8, 7.0)


def _of(scores: list[UnitScore], quantity: str) -> list[UnitScore]:
    mine = [u for u in scores if u.quantity == quantity]
    assert len(mine) == 56
    return mine


def test_module_resistance_and_seebeck_coefficient(scores: list[UnitScore]) -> None:
    r25 = _of(scores, "R25")
    # Every R25 the diagnostics call reliable is within 2 %; those they do not are the
    # proportionally driven units whose current hardly moves (R and S then trade off).
    assert all(_ok(u) for u in r25 if u.reliable)
    assert sum(_ok(u) for u in r25) >= 0.9 * len(r25)
    assert all(_ok(u) for u in _of(scores, "S25"))


def test_hot_side_resistance(scores: list[UnitScore]) -> None:
    assert all(_ok(u) for u in _of(scores, "r_hot (1 h)"))
    assert all(_ok(u) for u in _of(scores, "r_hot (24 h fit)"))


def test_cabinet_ua(scores: list[UnitScore]) -> None:
    ua = _of(scores, "UA")
    # Not yet every unit: on 53 of 56 (95 %) UA is within 20 % (seeds 8-14: 54 of 56). A
    # unit beyond it must not be served as reliable unless its stated error covers the miss
    # (two standard errors, a coverage factor of 2: JCGM 100:2008 6.2-6.3), and the stated
    # errors cover nearly all.
    assert sum(_ok(u) for u in ua) >= 0.9 * len(ua)
    assert all(_ok(u) or not u.reliable or u.covered for u in ua)
    assert sum(u.covered for u in ua) >= 0.9 * len(ua)
    assert all(math.isfinite(u.rel_err) for u in ua)


def test_faults_are_flagged_in_time_and_healthy_units_are_not() -> None:
    found, healthy, false, other = detection_scores(4, 10, 26.0)
    assert sorted(d.kind for d in found) == ["fan", "fan", "leak", "leak", "wear", "wear"]
    late = [(d.device_id, d.kind, d.delay_h) for d in found if not d.in_time]
    assert not late
    assert healthy and not false
    # one fault, its own flag: no faulty unit raises a flag of another kind
    assert not other


@pytest.mark.parametrize("seed", [2, 6, 13, 17])
def test_no_flag_on_healthy_units_over_a_season(seed: int) -> None:
    # Seeds 13 and 17 each had a unit flagged for UA by a day of warm goods put in (before
    # the newest window had to show the rise too). Seed 2's second unit was flagged on day
    # 74.5 by two loads five hours apart in a cold spell, the ambient 6-8 K above the cabinet
    # against 15 K in its commissioning weeks, when UA's change already read +10 % (values
    # this code produced before UA's change was left unfollowed at such a small lead).
    season = season_scores(seed, 4, 90.0)
    assert not season.flags
    # The temperature correction at work: R swings several per cent with the ambient, its
    # value at 25 °C stays within 1 %.
    assert len(season.r25_change) == 4
    assert all(swing > 2.0 for swing in season.r_swing.values())
    assert all(lo >= -1.0 and hi <= 1.0 for lo, hi in season.r25_change.values())


def test_no_flag_over_a_season_where_sinks_store_heat() -> None:
    # Seed 13 with every unit's sinks at 150/400 J/K (see the test below on sinks): the
    # fourth unit's UA, followed at its rated K through a cold spell with the ambient 3-5 K
    # above the cabinet against 10 K in its commissioning weeks, read +30 to +50 % and was
    # flagged on day 31.5 (values this code produced before UA's change was left unfollowed
    # at such a small lead).
    season = season_scores(13, 4, 90.0, sinks=(150.0, 400.0))
    assert not season.flags
    assert len(season.ua_change) == 4


def test_ua_over_a_season_with_an_offset_cold_probe() -> None:
    # One big thermostat unit (seed 1's first) whose cold probe reads 0.32 K high, through 60
    # days of ambient swinging about ±10 K: the S that pairs with ΔT as read is off by
    # δ/ΔT, which moves with the operating point, and S·I·Tc carries that into the cabinet
    # balance; the first days are so warm that the module never rests and K leans on its
    # prior. Measured on the code before the unit's settled S and internal load and the rule
    # on K: UA came out +31 % (median) where Ta - Tcab was under 12 K, up to +89 % on
    # values served as reliable, and the UA flag was raised 50 times. Here every value
    # served as reliable is within the 20 % target, the median error within 10 % at every
    # ambient, and no flag is raised (targets as in the module docstring).
    spec = sim.random_fleet(1, seed=1, start_s=START_S, days=60.0)
    unit = dataclasses.replace(
        spec.devices[0], t_amb_weather_k=5.0, t_amb_tau_h=480.0, t_amb_daily_k=4.0
    )
    assert unit.control == "thermostat" and unit.sensor_bias[1] > 0.3
    spec = dataclasses.replace(spec, devices=(unit,))
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _ = build_db(Path(tmp) / "season.db", spec, 60.0)
        runner.analyze(engine)
        served = [
            h for h in runner.estimate_history(engine, unit.device_id, "cabinet.ua_w_per_k")
            if h["value"] is not None
        ]  # fmt: skip
        leak = {
            h["at_ms"]: h["value"]
            for h in runner.estimate_history(engine, unit.device_id, "cabinet.heat_leak_w")
        }
        flags = runner.estimate_history(engine, unit.device_id, "cabinet.ua.flag")
        engine.dispose()
    err = np.array([h["value"] / unit.ua - 1.0 for h in served])
    reliable = np.array([bool(h["reliable"]) for h in served])
    d_amb = np.array([leak.get(h["at_ms"], math.nan) / h["value"] for h in served])
    assert reliable.sum() > 0.8 * len(served)
    assert np.all(np.abs(err[reliable]) <= 0.2)
    bands = [(0.0, 12.0), (12.0, 18.0), (18.0, 24.0)]
    for lo, hi in bands:
        band = (d_amb >= lo) & (d_amb < hi)
        assert band.sum() >= 20  # the season reached every band
        assert abs(float(np.median(err[band]))) <= 0.1
    assert not any(h["value"] == 1.0 for h in flags)


def test_trends_of_a_unit_that_never_rests_over_a_season() -> None:
    # A proportionally driven unit (seed 4's second) through 60 days of ambient swinging about
    # ±10 K. Its module never rests, so K·ΔT, the module's own leak, is larger than the
    # cabinet's, and its K from data scatters by 10-20 % with the weather; the settled K
    # follows it. Measured on the code that judged UA's changes at each window's settled K
    # and computed the hourly hot-side resistance with each window's K: UA's change reached
    # +88 % in a warm spell (flag raised 31 times) and the hot side's ran from -26 % to
    # +13 %, on a healthy unit. At one K for the unit's trends (values this code produced):
    # UA's change within -3 .. +5 %, the hot side's within -9 .. +6 %, no flag. The bounds
    # below are the season target's sense of "no trend": well inside the flag thresholds.
    spec = sim.random_fleet(4, seed=4, start_s=START_S, days=60.0)
    unit = dataclasses.replace(
        spec.devices[1], t_amb_weather_k=5.0, t_amb_tau_h=480.0, t_amb_daily_k=4.0
    )
    assert unit.control == "proportional"
    spec = dataclasses.replace(spec, devices=(unit,))
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _ = build_db(Path(tmp) / "season.db", spec, 60.0)
        runner.analyze(engine)
        history = {
            key: [h["value"] for h in runner.estimate_history(engine, unit.device_id, key)]
            for key in (
                "cabinet.ua.change_pct", "cabinet.ua.flag", "hot_side.resistance.flag",
                "hot_side.resistance.change_pct", "module.resistance_25c.change_pct",
                "module.resistance_25c.flag",
            )
        }  # fmt: skip
        engine.dispose()
    assert len(history["cabinet.ua.change_pct"]) > 150  # followed over most of the season
    assert max(abs(v) for v in history["cabinet.ua.change_pct"]) <= 15.0
    assert len(history["hot_side.resistance.change_pct"]) > 1000
    assert max(abs(v) for v in history["hot_side.resistance.change_pct"]) <= 15.0
    assert not any(v == 1.0 for v in history["cabinet.ua.flag"])
    assert not any(v == 1.0 for v in history["hot_side.resistance.flag"])
    # R25 at the unit's trend S (R and S are not separable here): followed through most of
    # the weather, and where the operating point has moved too far for S's uncertainty not
    # to matter, not followed; no trend within the target's sense either.
    assert len(history["module.resistance_25c.change_pct"]) > 150
    assert max(abs(v) for v in history["module.resistance_25c.change_pct"]) <= 2.0
    assert not any(v == 1.0 for v in history["module.resistance_25c.flag"])


def test_wear_of_a_module_that_never_rests_is_followed_at_the_trend_s() -> None:
    # A proportionally driven unit (seed 8's tenth) whose R25 rises by 10 % over 12 days from
    # day 14. Its module never rests, so no window separates R from S and none serves R25 as
    # reliable: with only reliable windows followed, its wear went unflagged (value this
    # code produced). R25 at the rated S is off by -lever·δS, the same at the same operating
    # point: its changes follow the true ones to within half a percentage point here
    # (simulator's record; -0.46 .. +0.09 points, values this code produced), and the flag
    # comes before the true rise reaches 5 %, well inside the target of 7 days after it.
    spec = sim.random_fleet(10, seed=8, start_s=START_S, days=26.0, faults="wear:2,leak:2,fan:2")
    unit = next(d for d in spec.devices if d.device_id == "tec-0009")
    fault = next(f for f in spec.faults if f.device_id == unit.device_id)
    assert unit.control == "proportional" and fault.kind == "wear"
    spec = dataclasses.replace(spec, devices=(unit,), faults=(fault,))
    with tempfile.TemporaryDirectory() as tmp:
        engine, truth, _ = build_db(Path(tmp) / "wear.db", spec, 26.0)
        runner.analyze(engine)

        def history(key: str) -> list[dict[str, Any]]:
            return runner.estimate_history(engine, unit.device_id, key)

        r25, change = (
            history("module.resistance_25c_ohm"),
            history("module.resistance_25c.change_pct"),
        )
        flags = history("module.resistance_25c.flag")
        engine.dispose()
    assert r25 and not any(h["reliable"] for h in r25)
    assert len(change) > 0.8 * len(r25)
    r0 = truth.params_at(unit.device_id, START_S)["r25"]

    def true_pct(at_ms: int) -> float:
        return 100.0 * (truth.params_at(unit.device_id, at_ms / 1000.0)["r25"] / r0 - 1.0)

    assert all(abs(h["value"] - true_pct(h["at_ms"])) <= 1.0 for h in change)
    first = next(h["at_ms"] for h in flags if h["value"] == 1.0)
    assert 3.0 <= true_pct(first) <= 5.0


def _flag_delay_s(spec: sim.FleetSpec, fault: sim.Fault, flag_key: str, days: float) -> float:
    """``spec`` simulated for ``days`` and the fault's unit analysed; how long after the
    fault's start its flag was first raised [s]."""
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _ = build_db(Path(tmp) / "fleet.db", spec, days)
        runner.analyze(
            engine, device_id=fault.device_id, settings=runner.AnalysisSettings(workers=1)
        )
        flags = runner.estimate_history(engine, fault.device_id, flag_key)
        engine.dispose()
    first = next(int(h["at_ms"]) for h in flags if h["value"] == 1.0)
    return first / 1000.0 - fault.start_s


def _fault_of(spec: sim.FleetSpec, device_id: str) -> sim.Fault:
    return next(f for f in spec.faults if f.device_id == device_id)


def test_leak_before_a_never_resting_units_own_k_settles_is_flagged() -> None:
    # Seed 10's fleet: its seventh unit is driven proportionally and never rests, so its K
    # comes from the data only now and then, and its own K settled at about day 9. UA was
    # followed from day 4 at the rated K. A 1.5x UA step came at day 10.4. When the settled K
    # started UA's track afresh, its new baseline (days 9.75-12.75) took in the leak and the
    # leak was never flagged (value this code produced). Made again from the windows
    # followed so far, each moved to the unit's own K by its first-order response, the track
    # keeps its commissioning baseline, and the step is flagged within the 2-day target.
    spec = detection_fleet(10)
    fault = _fault_of(spec, "tec-0006")
    assert fault.kind == "leak" and spec.devices[6].control == "proportional"
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _ = build_db(Path(tmp) / "leak.db", spec, 14.0)
        runner.analyze(engine, device_id="tec-0006", settings=runner.AnalysisSettings(workers=1))
        change = runner.estimate_history(engine, "tec-0006", "cabinet.ua.change_pct")
        flags = runner.estimate_history(engine, "tec-0006", "cabinet.ua.flag")
        engine.dispose()
    assert change and change[0]["at_ms"] < fault.start_s * 1000
    before = [h["value"] for h in change if h["at_ms"] < fault.start_s * 1000]
    assert max(abs(v) for v in before) < 10.0
    first = next(h["at_ms"] for h in flags if h["value"] == 1.0)
    assert 0.0 < first / 1000.0 - fault.start_s <= 48 * 3600.0


def test_fan_failing_after_a_never_resting_units_own_k_settles_is_flagged() -> None:
    # The same unit with its hot-side fan failing (3x resistance) at day 10, a day after its
    # own K settled. When the settled K started the hot side's hourly track afresh, the
    # failure fell into its new baseline and was never flagged (value this code produced);
    # the track goes on from its commissioning baseline instead, and the failure is flagged
    # within the 2-hour target.
    spec = detection_fleet(10)
    fan = sim.Fault("fan", "tec-0006", START_S + 10.0 * 86_400.0, 3.0)
    spec = dataclasses.replace(
        spec, faults=(*(f for f in spec.faults if f.device_id != fan.device_id), fan)
    )
    assert 0.0 < _flag_delay_s(spec, fan, "hot_side.resistance.flag", 13.0) <= 2 * 3600.0


def test_fan_failing_where_the_days_balances_cannot_be_fitted_is_flagged_in_time() -> None:
    # Seed 12's ninth unit, a thermostat whose hot-side fan fails (3x resistance) at day 10.7:
    # the hot face jumps to 73 °C, the module runs without pause and the air warms, and the
    # next thermal fits fail. Each failed fit used to drop the sink figures the hourly
    # hot-side resistance is computed with, so the hours between fits had none and the flag
    # came 7.1 h after the failure (value this code produced); kept from the last good fit,
    # the flag comes within the 2-hour target.
    spec = detection_fleet(12)
    fan = _fault_of(spec, "tec-0008")
    assert fan.kind == "fan" and fan.magnitude == 3.0
    assert 0.0 < _flag_delay_s(spec, fan, "hot_side.resistance.flag", 12.0) <= 2 * 3600.0


def test_fan_failing_on_a_cold_night_at_a_few_watts_is_flagged_in_time() -> None:
    # Seed 15's fifth unit, proportionally driven, loses its hot-side fan (3x resistance) at
    # day 9.9 on a cold night (ambient 9-12 °C): the module rejects only 5-9 W, and the
    # sink's rise over ambient goes from about 2.7 K to 5 K. Hours rejecting under 10 W used
    # to give no hot-side resistance at all, so the flag waited for the day to warm, 13.3 h
    # after the failure (value this code produced). Taken from 5 W on, with the probe
    # offsets in the hour's error, the flag comes within the 2-hour target.
    spec = detection_fleet(15)
    fan = _fault_of(spec, "tec-0004")
    assert fan.kind == "fan" and fan.magnitude == 3.0
    assert 0.0 < _flag_delay_s(spec, fan, "hot_side.resistance.flag", 11.0) <= 2 * 3600.0


def test_leak_whose_windows_scatter_about_the_threshold_is_flagged_in_time() -> None:
    # Seed 16's third unit: a 1.5x UA step at day 10.7 on a baseline that sits about 6 %
    # above the unit's true UA, so the step reads +35 to +50 % and its windows scatter by
    # their own standard error (7-9 %) about the +35 % threshold. Each evaluation needed the
    # newest window itself past +35 %, and the flag came only after 62.1 h (value this code
    # produced); judged to that window's own precision, within the 2-day target.
    spec = detection_fleet(16)
    leak = _fault_of(spec, "tec-0002")
    assert leak.kind == "leak"
    assert 0.0 < _flag_delay_s(spec, leak, "cabinet.ua.flag", 14.0) <= 48 * 3600.0


def test_leak_on_a_unit_whose_ua_windows_are_seldom_reliable_is_flagged() -> None:
    # Seed 17's fourth unit: small UA (about 0.37 W/K), a driver that grounds the idle module,
    # and a 1.5x UA step at day 7.3. Its windows' UA passes the fit's own 15 % precision
    # mostly when they happen to read high, so a baseline made of those alone sat about 10 %
    # high, the step showed as +29 % at first, the growing baseline took it in, and the leak
    # was never flagged (value this code produced). Followed up to 25 %, the baseline holds
    # the unit's usual windows and the step is flagged within the 2-day target.
    spec = detection_fleet(17)
    leak = _fault_of(spec, "tec-0003")
    assert leak.kind == "leak" and spec.devices[3].off_voltage == "zero"
    assert 0.0 < _flag_delay_s(spec, leak, "cabinet.ua.flag", 11.0) <= 48 * 3600.0


def test_sinks_that_store_heat_hold_k_and_nothing_wrong_is_called_reliable() -> None:
    # Seeds 1-2 with every unit's sinks at 150 J/K (cold) and 400 J/K (hot), small aluminium
    # sinks (about 0.9 J/(g·K); common practice, no source). The faces then move within a
    # one-minute sample while a thermostat switches every few minutes, and the trapezoid rule
    # over the samples no longer follows them: K fitted from the switching transients came out
    # 20-80 % low and UA 1.5-2.7x its true value, often called reliable (values this code
    # produced before it held K there). Held at the rated K, UA comes within 20 % on all but
    # two units (values this code produced: -22 % and +22 %; the last window's own fit had one
    # beyond, +26 %, while over seeds 201-210 with these sinks the served two days' median
    # brought UA within 15 % on 87.5 % of 80 units against the last window's 80.0 %, bench
    # figures); K, UA and the cold side's resistance are served but not called reliable
    # (the rated K's uncertainty is in their errors), and every value that is called
    # reliable is within its target. The cold side's stated error covers its true one: it
    # did on 70 % of the bench's units before the held K's uncertainty joined it (value this
    # code produced).
    scores = accuracy_scores([1, 2], 8, 7.0, sinks=(150.0, 400.0))
    assert all(_ok(u) for u in scores if u.reliable)
    r_cold = [u for u in scores if u.quantity == "r_cold"]
    assert len(r_cold) == 16 and sum(u.covered for u in r_cold) >= 15
    ua = [u for u in scores if u.quantity == "UA"]
    assert len(ua) == 16 and sum(_ok(u) for u in ua) >= 14
    assert not any(
        u.reliable for u in scores if u.quantity in ("K", "r_cold") and u.mode.startswith("thermo")
    )
