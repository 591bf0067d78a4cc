"""The runner: incremental equals from-scratch, idempotent, event-time only, contract shape.

Readings come from tests/analytics/synthetic.py (test data only). Where values are checked,
the reference is the generator's known parameters with the tolerance given at the check.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
from pathlib import Path
from typing import Any

import pandas as pd
import pytest
import sqlalchemy as sa
from sqlalchemy.engine import Engine

from tecfleet.analytics import heat_paths, physics, runner
from tecfleet.analytics import simulation as sim
from tecfleet.analytics.simulation import STANDARD_RATINGS
from tecfleet.ingest import db
from tecfleet.ingest.db import fleet
from tests.analytics.synthetic import Truth, simulate

DEVICE = "cab-demo-1"
CONTRACT_KEYS = (
    "module.resistance_ohm",
    "module.resistance_25c_ohm",
    "module.seebeck_v_per_k",
    "module.conductance_w_per_k",
    "module.zt",
    "cabinet.ua_w_per_k",
    "cabinet.heat_leak_w",
    "hot_side.resistance_k_per_w",
    "performance.cop",
    "performance.cop_max",
    "performance.cooling_w",
)


@pytest.fixture(scope="module")
def frame() -> pd.DataFrame:
    return simulate(Truth(), 4.5, seed=11, door_every_h=7.0)


def _engine(tmp_path: Path, name: str) -> Engine:
    e: Engine = db.make_engine(f"sqlite:///{tmp_path}/{name}.db")
    db.migrate(e)
    return e


def _store(e: Engine, df: pd.DataFrame, device: str = DEVICE) -> None:
    rows = [
        db.Reading(device, int(r.ts_ms), float(r.t_cabinet), float(r.t_cold), float(r.t_hot),
                      float(r.t_ambient), float(r.current), float(r.voltage),
                      door_open=bool(r.door_open))
        for r in df.itertuples()
    ]  # fmt: skip
    db.store_batch(e, rows)


def _all(e: Engine) -> list[tuple[object, ...]]:
    t = db.estimates
    cols = (t.c.device_id, t.c.key, t.c.at_ms, t.c.value, t.c.stderr, t.c.n, t.c.reliable, t.c.note)
    with e.connect() as c:
        return [
            tuple(r)
            for r in c.execute(sa.select(*cols).order_by(t.c.device_id, t.c.key, t.c.at_ms))
        ]


def test_incremental_live_equals_backfill_and_rerun_is_idempotent(
    tmp_path: Path, frame: pd.DataFrame, db_url: str
) -> None:
    scratch = _engine(tmp_path, "scratch")
    _store(scratch, frame)
    first = runner.analyze(scratch)
    assert first.steps > 0 and first.estimates > 0
    rows = _all(scratch)

    again = runner.analyze(scratch)
    assert again.steps == 0 and again.estimates == 0
    assert _all(scratch) == rows

    # Live: the same readings arriving in uneven pieces (cuts mid-hour and mid-window), with
    # an analysis after each piece, must give the very same estimates.
    # On PostgreSQL too: the device state goes there as JSON text and must come back exact.
    live = db.make_engine(db_url)
    db.migrate(live)
    cuts = [0, 1000, 1001, 2222, 4100, 5000, len(frame)]
    for a, b in itertools.pairwise(cuts):
        _store(live, frame.iloc[a:b])
        runner.analyze(live, device_id=DEVICE)
    assert _all(live) == rows
    live.dispose()


def test_health_has_contract_keys_in_contract_shape(tmp_path: Path, frame: pd.DataFrame) -> None:
    e = _engine(tmp_path, "health")
    # the site registers the warmest air it expects around the unit: 32 °C
    fleet.register(e, DEVICE, {"cabinet": {"design_ambient_c": 32.0}})
    _store(e, frame)
    runner.analyze(e)
    health = runner.latest_health(e, DEVICE)
    for key in CONTRACT_KEYS:
        assert key in health, key
        item = health[key]
        assert isinstance(item["value"], float)
        assert item["stderr"] is None or item["stderr"] >= 0.0
        assert item["n"] > 0
        assert item["at"].endswith("Z")
    # Against the generator's known parameters (Truth): R25 within 1 % (noise 5 mV, 10 mA),
    # S within 3 %, UA within 20 % and r_hot within 10 % (the 6-hour and 1-hour figures are
    # noisier than the day-long tests in test_diagnostics).
    tr = Truth()
    assert health["module.resistance_25c_ohm"]["value"] == pytest.approx(tr.r25, rel=0.01)
    assert health["module.seebeck_25c_v_per_k"]["value"] == pytest.approx(tr.s25, rel=0.03)
    assert health["cabinet.ua_w_per_k"]["value"] == pytest.approx(tr.ua, rel=0.2)
    assert health["hot_side.resistance_k_per_w"]["value"] == pytest.approx(tr.r_hot, rel=0.1)
    # Door openings were left out and counted.
    hist = runner.estimate_history(e, DEVICE, "quality.left_out_door")
    assert sum(h["value"] for h in hist) > 0
    # The baseline period (3 days) has passed: change statistics exist and stay quiet.
    assert abs(health["module.resistance_25c.change_pct"]["value"]) < 1.0
    assert health["module.resistance_25c.flag"]["value"] == 0.0
    assert health["hot_side.resistance.flag"]["value"] == 0.0
    # Daily capacity: the healthy cooler holds 5 °C at the registered 32 °C design ambient,
    # with the margin the steady-state model gives on the generator's true parameters.
    assert health["capacity.design_ambient_c"]["value"] == 32.0
    assert health["capacity.design_ambient_basis"]["value"] == 1.0  # the registration's
    assert health["capacity.holdable"]["value"] == 1.0
    margin = health["capacity.margin_w"]["value"]
    # Margin = most cooling - heat load (its definition, heat_paths.SetpointCapacity).
    cooling = health["capacity.max_cooling_w"]["value"]
    assert margin == pytest.approx(cooling - health["capacity.heat_load_w"]["value"], rel=1e-9)
    true_margin = _true_margin(tr, 4.0)
    assert true_margin > 0.0
    assert margin == pytest.approx(true_margin, abs=2.0 * _margin_sd(tr, health))


#: Served parameters behind the capacity and the fitted quantity each stands for.
_CAPACITY_INPUTS = {
    "q_internal": "cabinet.internal_load_w",
    "s25": "module.seebeck_25c_v_per_k",
    "r25": "module.resistance_25c_ohm",
    "k": "module.conductance_w_per_k",
    "r_hot": "hot_side.resistance_fit_k_per_w",
    "r_cold": "cold_side.resistance_k_per_w",
    "ua": "cabinet.ua_w_per_k",
}


def _true_margin(tr: Truth, max_current: float, **moved: float) -> float:
    # Reference: the steady-state model of heat_paths.capacity_at_setpoint (module heats after
    # Ioffe 1957 and Goldsmid 2010, ch. 2; checked on its own in test_heat_paths against the
    # operating-point solver) on the generator's true module, sinks and cabinet, at 5 °C and
    # the 32 °C design ambient, driven up to the generator's largest drive level (4 A; the
    # runner takes the largest current it saw, 4 A plus the 10 mA current noise), with the
    # generator's internal load as the served figure has the fitted one. ``moved`` replaces
    # true parameters.
    p = {"s25": tr.s25, "r25": tr.r25, "k": tr.k, "r_hot": tr.r_hot, "r_cold": tr.r_cold}
    p |= {"ua": tr.ua, "q_internal": tr.q_internal} | moved
    cap = heat_paths.capacity_at_setpoint(
        5.0 + 273.15, 32.0 + 273.15, physics.ModuleParameters(p["s25"], p["r25"], p["k"]),
        p["r_hot"], p["r_cold"], p["ua"], max_current, q_internal=p["q_internal"],
        alpha=tr.alpha, beta=tr.beta,
    )  # fmt: skip
    return cap.margin


def _margin_sd(tr: Truth, health: dict[str, dict[str, Any]]) -> float:
    # Tolerance of the margin check: the standard error the fitted parameters' own stated
    # relative standard errors give the margin, each carried through the model to first order
    # and added in quadrature (about 1.8 W on a margin of about 6 W here). Two of them: the
    # fits of the same day share their readings, so their errors are not independent.
    base = _true_margin(tr, 4.0)
    var = 0.0
    for name, key in _CAPACITY_INPUTS.items():
        se = health[key]["stderr"]
        true = getattr(tr, name)
        if name == "q_internal":  # a heat flow near zero: its own standard error in watts
            var += (_true_margin(tr, 4.0, q_internal=true + se) - base) ** 2
            continue
        rel = se / health[key]["value"]
        var += (_true_margin(tr, 4.0, **{name: true * (1.0 + rel)}) - base) ** 2
    return math.sqrt(var)


def test_ua_value_uncertain_from_probe_offsets_is_not_reliable_but_still_tracked(
    tmp_path: Path, frame: pd.DataFrame
) -> None:
    # The served UA's error includes what constant probe offsets could do to it; when that
    # exceeds the allowed share the value is not called reliable, yet its changes (in which a
    # constant offset cancels) are followed exactly as before.
    quick = {"workers": 1, "baseline_days": 1.0, "ua_baseline_skip_days": 0.0}
    change: list[list[tuple[int, float]]] = []
    served = []
    for name, share in (("default", 0.25), ("strict", 0.01)):
        e = _engine(tmp_path, name)
        _store(e, frame)
        runner.analyze(e, settings=runner.AnalysisSettings(ua_max_rel_se=share, **quick))
        served.append(runner.latest_health(e, DEVICE))
        hist = runner.estimate_history(e, DEVICE, "cabinet.ua.change_pct")
        change.append([(h["at_ms"], h["value"]) for h in hist])
    default, strict = served
    assert default["cabinet.ua_w_per_k"]["reliable"]
    ua = strict["cabinet.ua_w_per_k"]
    assert ua["value"] == default["cabinet.ua_w_per_k"]["value"]
    assert ua["stderr"] > 0.01 * ua["value"]
    assert not ua["reliable"] and "probe offsets" in ua["note"]
    assert not strict["cabinet.heat_leak_w"]["reliable"]
    assert change[0] and change[0] == change[1]


def test_ua_of_a_module_that_never_rests_is_not_reliable(tmp_path: Path) -> None:
    # A module driven without pause gives the balances one operating point: its K and UA
    # are served, with a note saying why, but not called reliable.
    # A wide ambient swing keeps UA's own precision good, so the note is about resting.
    df = simulate(Truth(ambient_swing_k=6.0), 2.0, seed=5, constant_current=3.0)
    e = _engine(tmp_path, "never-rests")
    _store(e, df, "cab-busy")
    # Ratings registered, so that R and S (not separable at one current) lean on them and
    # the thermal fit runs.
    with e.begin() as c:
        c.execute(
            db.devices.update()
            .where(db.devices.c.device_id == "cab-busy")
            .values(module=dict(STANDARD_RATINGS))
        )
    runner.analyze(e, settings=runner.AnalysisSettings(workers=1))
    hist = runner.estimate_history(e, "cab-busy", "cabinet.ua_w_per_k")
    served = [h for h in hist if h["value"] is not None]
    assert served
    assert not any(h["reliable"] for h in served)
    assert all(h["note"] for h in served)
    assert any("never rested" in h["note"] for h in served)
    k = runner.estimate_history(e, "cab-busy", "module.conductance_w_per_k")
    assert k and not any(h["reliable"] for h in k)


def test_constant_current_unit_is_marked_unreliable(tmp_path: Path) -> None:
    # Constant drive, steady ambient and a driver that shorts the idle module: R and S cannot
    # be separated, and without a registration there is no rating to fall back on.
    df = simulate(Truth(floating=False, ambient_swing_k=0.0), 1.0, seed=3, constant_current=3.0)
    e = _engine(tmp_path, "const")
    _store(e, df, "cab-const")
    runner.analyze(e)
    hist = runner.estimate_history(e, "cab-const", "module.resistance_25c_ohm")
    late = [h for h in hist if h["at_ms"] > int(df.ts_ms.iloc[0]) + 6 * 3_600_000]
    assert late
    assert all(not h["reliable"] and h["note"] for h in late)


def test_worker_processes_give_the_same_estimates_as_one_process(
    tmp_path: Path, frame: pd.DataFrame
) -> None:
    # Two devices analysed in one process and in two worker processes (each with its own
    # engine): the stored estimates and states must be identical, row for row.
    part = frame.iloc[: 36 * 60]
    serial, pooled = _engine(tmp_path, "serial"), _engine(tmp_path, "pooled")
    for e in (serial, pooled):
        _store(e, part, DEVICE)
        # The next day and a half of the same cooler, shifted back, stands in for a second one.
        later = frame.iloc[36 * 60 : 72 * 60]
        _store(e, later.assign(ts_ms=part.ts_ms.to_numpy()[: len(later)]), "cab-demo-2")
    one = runner.analyze(serial, settings=runner.AnalysisSettings(workers=1))
    two = runner.analyze(pooled, settings=runner.AnalysisSettings(workers=2, parallel_min_steps=1))
    assert one.steps == two.steps > 0
    assert one.estimates == two.estimates > 0
    assert _all(serial) == _all(pooled)
    st = db.analysis_state
    with serial.connect() as a, pooled.connect() as b:
        q = sa.select(st.c.device_id, st.c.done_ms, st.c.state).order_by(st.c.device_id)
        assert [tuple(r) for r in a.execute(q)] == [tuple(r) for r in b.execute(q)]


def test_ua_changes_are_not_followed_while_the_hot_side_is_flagged(tmp_path: Path) -> None:
    # A fan that fails triples the hot side's resistance: the module then works at a hot face
    # and the cabinet balance is outside the regime its baseline was set in. One fault, one
    # flag (common practice, no source): UA's changes stop being followed once the hot side is
    # flagged. Readings made here: four days at 0.20 K/W, then two at 0.60 K/W.
    day_ms = 86_400_000
    before = simulate(Truth(), 4.0, seed=3)
    start = int(before["ts_ms"].iloc[0]) + 4 * day_ms
    after = simulate(Truth(r_hot=0.60), 2.0, seed=4, start_ms=start)
    e = _engine(tmp_path, "fan")
    _store(e, pd.concat([before, after], ignore_index=True))
    quick = {"workers": 1, "baseline_days": 1.0, "ua_baseline_skip_days": 0.0}
    runner.analyze(e, settings=runner.AnalysisSettings(**quick))
    flags = runner.estimate_history(e, DEVICE, "hot_side.resistance.flag")
    raised = [h["at_ms"] for h in flags if h["value"] == 1.0]
    assert raised and raised[0] <= start + 2 * 3_600_000  # within 2 h of the step
    change = [h["at_ms"] for h in runner.estimate_history(e, DEVICE, "cabinet.ua.change_pct")]
    assert any(at < start for at in change)  # followed before the fault
    assert not any(at > raised[0] for at in change)


def test_capacity_is_judged_at_the_units_own_warm_extreme(
    tmp_path: Path, frame: pd.DataFrame
) -> None:
    # Without a registered design ambient the unit's own warm extreme is used: the 99th
    # percentile of its hourly mean ambient. The generator's ambient is 25 °C ± 2 K over a
    # day (Truth: ambient_c, ambient_swing_k), so its hourly means peak within a few
    # hundredths of a kelvin of 27 °C (a sine averaged over 1/24 of its period keeps
    # sin(π/24)/(π/24) = 0.997 of its amplitude) and the probe noise averages out over an
    # hour's 60 samples; 0.25 K allows for hours not centred on the peak.
    e = _engine(tmp_path, "own")
    _store(e, frame)
    runner.analyze(e)
    health = runner.latest_health(e, DEVICE)
    tr = Truth()
    peak = tr.ambient_c + tr.ambient_swing_k
    assert health["capacity.design_ambient_c"]["value"] == pytest.approx(peak, abs=0.25)
    assert health["capacity.design_ambient_basis"]["value"] == 2.0  # its own ambient
    # a healthy unit holding its setpoint is not losing it
    assert health["capacity.losing_setpoint"]["value"] == 0.0


def test_offsets_found_on_a_power_cut_are_served_and_keep_serving(tmp_path: Path) -> None:
    # One simulated cooler (development seed) with a 40-hour power cut from 12 h into a
    # 4-day run; its probes' constant biases are the simulated truth. The runner serves the
    # hot probe's offset from the ambient probe within three stated errors of it, based on
    # the rest, and keeps the rest in the state so the windows after it still use it.
    start = 1_735_689_600.0
    spec = sim.random_fleet(1, seed=207, start_s=start, days=4.0)
    dev = spec.devices[0]
    cut = sim.ScheduledEvent(
        "power_cut", dev.device_id, start + 12 * 3600.0, duration_s=40 * 3600.0
    )
    chunk = sim.Simulator(dataclasses.replace(spec, events=(cut,))).run(4 * 1440)
    m = chunk.measured
    rows = [
        db.Reading(dev.device_id, int(chunk.ts[j, 0] * 1000 + 0.5), *(float(m[n][j, 0]) for n in (
            "t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage")))
        for j in range(chunk.n_steps) if chunk.present[j, 0]
    ]  # fmt: skip
    e = _engine(tmp_path, "offsets")
    db.store_batch(e, rows)
    runner.analyze(e)
    health = runner.latest_health(e, dev.device_id)
    hot = health["probes.offset_hot_k"]
    truth = dev.sensor_bias[2] - dev.sensor_bias[3]
    assert abs(hot["value"] - truth) <= 3.0 * hot["stderr"]
    assert hot["stderr"] < 0.15 and "rest" in hot["note"]
    # The newest window is two days after the cut: the rest is still behind its estimate.
    history = runner.estimate_history(e, dev.device_id, "probes.offset_hot_k")
    assert history[-1]["at_ms"] >= (start + 3.5 * 86_400.0) * 1000
    assert "1 rest moment" in history[-1]["note"]
