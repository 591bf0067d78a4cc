"""Alerts scored against the simulator's ground truth.

Run: ``python tests/bench/bench_alerts.py [--days 14] [--healthy 6] [--seed 3]``;
``--switched-on`` runs a healthy fleet switched on at room temperature instead and prints each
unit's pull-down and the alerts opened (none is the target: a pull-down is commissioning).
Prints one row per expected alert (kind, unit, expected, fired, delay against its target)
and one row of false positives per alert kind. Simulated data only; the test
``tests/analytics/alerts/test_scoring.py`` runs a smaller fleet through the same functions.

The fleet has one unit per fault kind plus healthy units. Readings are stored a day at a time
(``db.store_batch``), then ``runner.analyze`` and ``alerts.evaluate`` run, as the live
service does. A fault is detected when an alert of its expected kind
(``FleetTruth.fault_windows``) opens or reopens on its unit after the fault starts and within
the target delay: a reopened alert sends its notice again, so a second excursion of a unit
within the reopen window is reported by the same alert. Every other alert that opens is a
false positive, except an excursion that follows a real cause on that unit (a power cut, a
failed fan) and an offline alert on a unit that went silent.

Detection-delay targets (the diagnostics' own targets, common practice, no source): a 5 % R25
rise flagged within 7 days of crossing 5 %, a 1.5x UA step within 2 days, a 3x hot-side
resistance step within 2 hours. The others follow from the alert policy's delays (common
practice, no source): a stuck probe within 3 hours (1 h window, 15 min delay, hourly
evaluation; on a steadily driven unit at slow reporting the still-room window, see
``steady_stuck_target_s``), offline within 2 hours (5 intervals, hourly evaluation), an
excursion within 2 hours of the true cabinet air leaving its band (30 min out of band, plus
the lag of the probe behind the air). Excursions are expected wherever the simulator's true
cabinet air left its band (``FleetTruth.excursions``), whatever the cause, and required where
it stayed more than a probe's tolerance (0.5 K) beyond the limit for at least the rule's 30
min; an opening up to an hour before the true air crossed (a probe reading warm within its
tolerance) answers it. Capacity alerts are judged against
the true spare cooling computed from the simulator's parameters.
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import sqlalchemy as sa

from tecfleet.analytics import alerts, physics, runner
from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import simulation as sim
from tecfleet.ingest import db
from tecfleet.ingest.db import alert_records
from tecfleet.ingest.db.tables import SUMMARY_COLUMNS

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.fleet_fixture import register

START_S = 1_735_689_600.0  # 2025-01-01T00:00Z, a day boundary
DAY_S = 86_400.0
HOUR_S = 3_600.0

#: Detection-delay targets [s] per fault label (see the module docstring).
TARGETS_S: dict[str, float] = {
    "wear": 7 * DAY_S,  # from the 5 % crossing
    "leak": 2 * DAY_S,
    "fan": 2 * HOUR_S,
    "sensor_stuck": 3 * HOUR_S,
    "sensor_drift": 3 * DAY_S,
    "offline": 2 * HOUR_S,
    "power_cut": 2 * HOUR_S,
    "excursion": 2 * HOUR_S,
}


def targets_s(interval_s: float) -> dict[str, float]:
    """The targets at a reporting interval of ``interval_s`` [s] (issue 22): a 1.5x UA step
    within 3 days and a 3x hot-side step within 6 hours at 5-minute reporting, 4 days and 12
    hours at 15-minute; offline, excursions and power cuts a reporting interval later (the
    rules wait for readings), offline after five intervals plus the hourly evaluation."""
    if interval_s <= 60.0:
        return TARGETS_S
    slow = interval_s > 300.0
    out = dict(TARGETS_S)
    out["leak"] = (4 if slow else 3) * DAY_S
    out["fan"] = (12 if slow else 6) * HOUR_S
    for label in ("excursion", "power_cut", "sensor_stuck"):
        out[label] = TARGETS_S[label] + interval_s
    out["offline"] = max(TARGETS_S["offline"], 5 * interval_s + HOUR_S)
    return out


def steady_stuck_target_s(interval_s: float) -> float:
    """The target for a stuck probe on a unit driven steadily (proportional control) at a
    reporting interval of ``interval_s`` [s]. No step of the current shows its frozen hot
    face, and a 0.1 K probe on a steady unit reads the same for hours at slow reporting
    (healthy hot faces held one value over 8 fifteen-minute readings, cold faces over 24;
    values the code produced on the simulator, seeds 201-210), so only the policy's
    still-room window tells: its usual intervals, the sensor delay, and two reporting
    intervals more (the window fills only from the last reading before the fault, and the
    delay ends at a reading); never under the target of a unit whose drive steps. At one to
    five minutes that is the 3 hours (plus an interval) of the others; at 15 minutes 6.75
    hours."""
    policy = alerts.AlertPolicy()
    still = policy.stuck_window_intervals * interval_s + policy.sensor_delay_s + 2 * interval_s
    return max(targets_s(interval_s)["sensor_stuck"], still)


@dataclass
class Expected:
    """One fault (or scheduled event) and the alert it should raise."""

    label: str
    device_id: str
    alert_kind: str
    start_s: float
    #: When the delay clock starts: the fault start, or the 5 % crossing of a wear ramp.
    clock_s: float
    target_s: float
    #: False for an excursion the probe cannot be expected to see for the rule's delay (see
    #: PROBE_TOLERANCE_K and excursions_expected): an alert for it is welcome, its absence
    #: is no miss.
    required: bool = True


@dataclass
class Score:
    """Outcome of one run."""

    expected: list[Expected]
    fired: dict[int, float | None]  # index into expected -> opened or reopened at [s] or None
    false_positives: list[dict[str, Any]] = field(default_factory=list)
    opened: list[dict[str, Any]] = field(default_factory=list)
    seconds: dict[str, float] = field(default_factory=dict)

    def delay_s(self, i: int) -> float | None:
        at = self.fired.get(i)
        return None if at is None else at - self.expected[i].clock_s


def scoring_fleet(
    days: float,
    *,
    healthy: int = 2,
    seed: int = 3,
    interval_s: float = 60.0,
    drift: bool = True,
    summaries: bool = False,
    sensors: str = "full",
) -> tuple[sim.FleetSpec, list[Expected]]:
    """One unit per fault kind plus ``healthy`` units; faults placed after the 3-day baseline.

    Fault times are fractions of the run so a shorter run keeps every fault inside it.
    ``drift`` False leaves out the drifting cabinet probe; ``summaries`` has every unit
    report its interval summaries; ``sensors`` gives every unit those face probes. The stuck
    probe is the hot face's, or the cabinet's where the hot face has none; without face
    probes every unit's sinks hold heat (500/1500 J/K, cold/hot: aluminium of about half a
    kilogram and a kilogram and a half, from memory), since massless faces leave R25
    unknown there.
    """
    if sensors not in sim.SENSOR_SETS:
        raise ValueError(f"unknown sensor set {sensors!r}; known: {sim.SENSOR_SETS}")
    stuck_channel = "t_cabinet" if sensors == "no_faces" else "t_hot"
    n_faulty = 7 if drift else 6
    base = sim.random_fleet(n_faulty + healthy, seed=seed, start_s=START_S, days=days, prefix="sc")
    # no random power cuts: one is scheduled where it is wanted
    devs = [dataclasses.replace(d, cuts_per_30d=0.0) for d in base.devices]
    if sensors == "no_faces":
        devs = [dataclasses.replace(d, c_cold_sink=500.0, c_hot_sink=1500.0) for d in devs]
    ids = [d.device_id for d in devs]
    at = lambda frac: START_S + frac * days * DAY_S  # noqa: E731
    wear_start = at(0.32)
    wear_ramp = 0.45 * days * DAY_S
    drifting = [
        sim.Fault(
            "sensor",
            ids[6],
            at(0.35),
            magnitude=3.0,
            ramp_s=0.4 * days * DAY_S,
            channel="t_cabinet",
            mode="drift",
        )
        for _ in range(1 if drift else 0)
    ]
    faults = (
        sim.Fault("wear", ids[0], wear_start, magnitude=1.10, ramp_s=wear_ramp),
        sim.Fault("leak", ids[1], at(0.55), magnitude=1.5),
        sim.Fault("fan", ids[2], at(0.7), magnitude=3.0),
        sim.Fault("sensor", ids[3], at(0.45), channel=stuck_channel, mode="stuck"),
        sim.Fault("offline", ids[4], at(0.6), end_s=at(0.6) + 10 * HOUR_S),
        *drifting,
    )
    events = (sim.ScheduledEvent("power_cut", ids[5], at(0.8), duration_s=10 * HOUR_S),)
    spec = sim.FleetSpec(
        devices=tuple(devs),
        start_s=START_S,
        interval_s=interval_s,
        seed=seed,
        faults=faults,
        events=events,
        summaries=summaries,
    )
    spec = sim.with_sensor_set(spec, sensors)
    truth = sim.FleetTruth(spec)
    steady = {d.device_id for d in devs if d.control == "proportional"}
    expected: list[Expected] = []
    for w in truth.fault_windows():
        label = w["kind"] if w["kind"] != "sensor" else f"sensor_{w['mode']}"
        clock = float(w["start_s"])
        if w["kind"] == "wear":
            # the ramp crosses +5 % at this fraction of its length
            clock += (0.05 / (w["magnitude"] - 1.0)) * (w["developed_s"] - w["start_s"])
        target = targets_s(interval_s)[label]
        if label == "sensor_stuck" and w["device_id"] in steady:
            target = steady_stuck_target_s(interval_s)
        expected.append(
            Expected(label, w["device_id"], w["alert_kind"], float(w["start_s"]), clock, target)
        )
    return spec, expected


def _readings(chunk: sim.Chunk) -> list[db.Reading]:
    out = []
    for row in chunk.payload_rows():
        for item, device in zip(row, chunk.device_ids, strict=True):
            if item is None:
                continue
            out.append(
                db.Reading(
                    device, round(item["ts"] * 1000), item["t_cabinet"], item.get("t_cold"),
                    item.get("t_hot"), item["t_ambient"], item["current"], item["voltage"],
                    seq=item["seq"], rh=item["rh"], door_open=item["door_open"],
                    **{k: item.get(k) for k in SUMMARY_COLUMNS},
                )
            )  # fmt: skip
    return out


#: Per device, per excursion: (largest distance beyond the limit [K], time it first exceeded
#: PROBE_TOLERANCE_K [s] or None, time spent beyond PROBE_TOLERANCE_K [s]).
Beyond = dict[str, list[tuple[float, float | None, float]]]

#: A probe reading warm within its tolerance can see an excursion before the true air crosses
#: the limit; an opening this long before the true start still answers it [s].
EARLY_S = 3600.0

#: How far beyond its limit the true air must go before the probe can be expected to show
#: it: about the accuracy of a cabinet temperature probe, ±0.5 K (common practice, no
#: source); the simulated probes carry offsets of that order.
PROBE_TOLERANCE_K = 0.5


def run_fleet(
    db_path: Path, spec: sim.FleetSpec, days: float, *, step_hours: float = 24.0
) -> tuple[sa.Engine, sim.FleetTruth, dict[str, float], Beyond]:
    """Simulate, store, analyse and evaluate in increments of ``step_hours``.

    Returns the engine, the simulator's truth, the seconds spent per stage and, per device,
    for each of its excursions (``FleetTruth.excursions`` order), how far [K] the true cabinet
    air went beyond its limits and when [s] it first went further than PROBE_TOLERANCE_K.
    """
    engine = db.make_engine(f"sqlite:///{db_path}")
    db.migrate(engine)
    register(engine, spec, db.now_ms())
    simulator = sim.Simulator(spec)
    per_step = round(step_hours * HOUR_S / spec.interval_s)
    total = round(days * DAY_S / spec.interval_s)
    spent = {"simulate": 0.0, "store": 0.0, "analyze": 0.0, "evaluate": 0.0}
    done = 0
    times: list[Any] = []
    air: list[Any] = []
    while done < total:
        k = min(per_step, total - done)
        t0 = time.perf_counter()
        chunk = simulator.run(k)
        times.append(chunk.t)
        air.append(chunk.truth["t_air"])
        t1 = time.perf_counter()
        db.store_batch(engine, _readings(chunk))
        t2 = time.perf_counter()
        runner.analyze(engine)
        t3 = time.perf_counter()
        alerts.evaluate(engine)
        t4 = time.perf_counter()
        spent["simulate"] += t1 - t0
        spent["store"] += t2 - t1
        spent["analyze"] += t3 - t2
        spent["evaluate"] += t4 - t3
        done += k
    truth = simulator.truth
    # excursions still under way at the end of the run count as well
    for dev, since in simulator.open_excursions().items():
        truth.excursions.setdefault(dev, []).append((since, None))
    t_all, air_all = np.concatenate(times), np.concatenate(air)
    low, high = simulator.limits  # per device [°C], as the true air in the chunks
    beyond: Beyond = {}
    for dev, windows in truth.excursions.items():
        i = spec.device_ids.index(dev)
        col = air_all[:, i]
        for start, end in windows:
            m = (t_all >= start) & (t_all <= (end if end is not None else t_all[-1]))
            over = np.maximum(col[m] - high[i], low[i] - col[m])
            far = np.flatnonzero(over > PROBE_TOLERANCE_K)
            peak = float(over.max()) if over.size else 0.0
            first = float(t_all[m][far[0]]) if far.size else None
            beyond.setdefault(dev, []).append((peak, first, far.size * spec.interval_s))
    return engine, truth, spent, beyond


def excursions_expected(
    truth: sim.FleetTruth, beyond: Beyond | None = None, interval_s: float = 60.0
) -> list[Expected]:
    """One expected excursion per time the true cabinet air left its band for 15 min or
    more (``FleetTruth.excursions``), labelled by its cause when a power cut preceded it;
    required only where the air stayed more than PROBE_TOLERANCE_K beyond the limit for at
    least the policy's excursion delay (only then must the probe show the time out of range
    the rule waits for), with the delay clock started when it first went that far."""
    delay = alerts.AlertPolicy().excursion_delay_s
    out = []
    for dev, windows in truth.excursions.items():
        for k, (start, _end) in enumerate(windows):
            cut = any(c <= start for c, _ in truth.power_cuts.get(dev, []))
            label = "power_cut" if cut else "excursion"
            far_at, far_s = (start, math.inf) if beyond is None else beyond[dev][k][1:]
            clock = start if far_at is None else far_at
            required = far_at is not None and far_s >= delay
            target = targets_s(interval_s)[label]
            out.append(Expected(label, dev, "excursion", start, clock, target, required))
    return out


def true_capacity_fraction(truth: sim.FleetTruth, device_id: str, t_s: float) -> float:
    """Spare cooling at the design ambient over the maximum cooling, from the true
    parameters at ``t_s`` through the same capacity model the diagnostics use."""
    d = truth.device(device_id)
    p = truth.params_at(device_id, t_s)
    cfg = runner.AnalysisSettings()
    # the drive limits come from the registered ratings, as in the diagnostics
    r = d.ratings
    module = physics.parameters_from_ratings(
        r["i_max_a"], r["v_max_v"], r["dt_max_k"], r["t_hot_rated_c"] + 273.15,
        q_max=r["q_max_w"], n_couples=int(r["couples"]),
    )  # fmt: skip
    module = physics.modules_in_series(module, int(r["count"]))
    rt = physics.ratings_from_parameters(module, cfg.default_t_hot_rated_c + 273.15)
    cap = dg.setpoint_capacity(
        d.setpoint_c + 273.15, cfg.design_ambient_c + 273.15, p["s25"], p["r25"], p["k"],
        p["r_hot"], p["r_cold"], p["ua"], rt.i_max, max_voltage=rt.v_max,
    )  # fmt: skip
    return float(cap.margin / cap.max_cooling) if cap.max_cooling > 0 else float("-inf")


def opened_alerts(engine: sa.Engine) -> list[dict[str, Any]]:
    a = db.alerts
    with engine.connect() as conn:
        rows = conn.execute(
            sa.select(a.c.id, a.c.device_id, a.c.kind, a.c.severity, a.c.opened_ms, a.c.summary)
            .order_by(a.c.opened_ms)
        ).fetchall()  # fmt: skip
    return [
        {
            "alert_id": r.id, "device_id": r.device_id, "kind": r.kind, "severity": r.severity,
            "opened_s": r.opened_ms / 1000.0, "summary": r.summary,
        }
        for r in rows
    ]  # fmt: skip


def alert_openings(engine: sa.Engine) -> list[dict[str, Any]]:
    """Every time an alert opened or reopened, oldest first, from the audit trail."""
    a, au = db.alerts, db.alert_audit
    with engine.connect() as conn:
        rows = conn.execute(
            sa.select(a.c.id, a.c.device_id, a.c.kind, au.c.at_ms)
            .join(au, au.c.alert_id == a.c.id)
            .where(
                au.c.to_state == "open",
                sa.or_(au.c.from_state.is_(None), au.c.from_state == "resolved"),
            )
            .order_by(au.c.at_ms, a.c.id)
        ).fetchall()  # fmt: skip
    return [
        {"alert_id": r.id, "device_id": r.device_id, "kind": r.kind, "at_s": r.at_ms / 1000.0}
        for r in rows
    ]


#: An alert that a fault legitimately brings along on its own unit (a failed fan can warm
#: the cabinet; a unit that went silent may be judged offline): not a false positive.
CONSEQUENCES: dict[str, set[str]] = {
    "fan": {"excursion", "over_temperature", "capacity_shortfall"},
    "leak": {"excursion", "capacity_shortfall"},
    "wear": {"capacity_shortfall"},
    "power_cut": {"offline"},
    # A cabinet probe drifting out of the band reads as an excursion. The readings are all
    # there is to go on, and for stored medicines reporting it is the safe side; the sensor
    # fault alert says the probe is in doubt.
    "sensor_drift": {"excursion"},
}


def score(
    engine: sa.Engine,
    faults: list[Expected],
    truth: sim.FleetTruth,
    beyond: Beyond | None = None,
) -> Score:
    """Match alert openings and reopenings to the faults' and the true excursions' expected
    alerts, each opening to at most one.

    Alerts none of whose openings matched are false positives, except a capacity alert on a
    unit whose true spare cooling at that time is below the policy's fraction (the truth says
    it is short).
    """
    expected = faults + excursions_expected(truth, beyond, truth.spec.interval_s)
    line = alerts.AlertPolicy().capacity_warning_fraction
    opened = opened_alerts(engine)
    openings = alert_openings(engine)
    fired: dict[int, float | None] = {}
    used: set[int] = set()
    matched: set[int] = set()
    for i, e in enumerate(expected):
        fired[i] = None
        early = EARLY_S if e.alert_kind == "excursion" else 0.0
        for j, o in enumerate(openings):
            if (
                j not in used
                and o["device_id"] == e.device_id
                and o["kind"] == e.alert_kind
                and o["at_s"] >= e.start_s - early
            ):
                fired[i] = o["at_s"]
                used.add(j)
                matched.add(o["alert_id"])
                break
    fp = []
    for a in opened:
        if a["alert_id"] in matched:
            continue
        allowed = set()
        for e in expected:
            if e.device_id == a["device_id"] and a["opened_s"] >= e.start_s:
                allowed |= CONSEQUENCES.get(e.label, set())
        if a["kind"] == "capacity_shortfall":
            frac = true_capacity_fraction(truth, a["device_id"], a["opened_s"])
            a["true_margin_fraction"] = frac
            if frac < line:
                continue
        if a["kind"] not in allowed:
            fp.append(a)
    return Score(expected, fired, fp, opened)


def table(result: Score) -> str:
    """Kind, unit, expected alert, fired (after how long), target and the false positives."""
    lines = [
        f"{'fault':<14}{'unit':<10}{'expected':<20}{'fired':<7}{'delay':>10}{'target':>10}  ok",
    ]
    for i, e in enumerate(result.expected):
        d = result.delay_s(i)
        fired = "yes" if d is not None else "no"
        delay = "-" if d is None else _human(d)
        ok = d is not None and d <= e.target_s
        verdict = ("yes" if ok else "NO") if e.required else "(not required: see docstring)"
        lines.append(
            f"{e.label:<14}{e.device_id:<10}{e.alert_kind:<20}{fired:<7}{delay:>10}"
            f"{_human(e.target_s):>10}  {verdict}"
        )
    lines.append("")
    lines.append(f"{'false positives by kind':<30}count  units")
    for kind in alerts.KINDS:
        hits = [a for a in result.false_positives if a["kind"] == kind]
        units = ", ".join(sorted({a["device_id"] for a in hits}))
        lines.append(f"  {kind:<28}{len(hits):>5}  {units}")
    return "\n".join(lines)


def _human(seconds: float) -> str:
    if abs(seconds) < 2 * HOUR_S:
        return f"{seconds / 60:.0f} min"
    if abs(seconds) < 2 * DAY_S:
        return f"{seconds / HOUR_S:.1f} h"
    return f"{seconds / DAY_S:.1f} d"


def switched_on(days: float, units: int, seed: int, step_hours: float) -> str:
    """A healthy fleet newly switched on (``FleetSpec.warm_start``): each unit's pull-down as
    the alerts saw it and every alert opened on the fleet (none is the target)."""
    base = sim.random_fleet(units, seed=seed, start_s=START_S, days=days, prefix="on")
    devs = tuple(dataclasses.replace(d, cuts_per_30d=0.0) for d in base.devices)
    spec = sim.FleetSpec(devices=devs, start_s=START_S, seed=seed, warm_start=True)
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _spent, _beyond = run_fleet(
            Path(tmp) / "on.db", spec, days, step_hours=step_hours
        )
        opened = opened_alerts(engine)
        with engine.connect() as conn:
            states = {d: alert_records.read_progress(conn, d)[1] for d in spec.device_ids}
        engine.dispose()
    lines = [f"{'unit':<10}{'pull-down':>10}  alerts opened"]
    for d in spec.device_ids:
        pull = states[d].get("commissioning", {}).get("pull_down_s")
        kinds = ", ".join(a["kind"] for a in opened if a["device_id"] == d) or "none"
        lines.append(f"{d:<10}{'-' if pull is None else _human(pull):>10}  {kinds}")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--days", type=float, default=14.0)
    ap.add_argument("--healthy", type=int, default=6)
    ap.add_argument("--seed", type=int, default=3)
    ap.add_argument("--step-hours", type=float, default=6.0)
    ap.add_argument("--verbose", action="store_true", help="print every alert opened")
    ap.add_argument("--keep", type=Path, help="keep the database at this path")
    ap.add_argument("--interval", type=float, default=1.0, help="reporting interval [min]")
    ap.add_argument(
        "--summaries", action="store_true", help="every reading carries its interval summaries"
    )
    ap.add_argument(
        "--sensors",
        choices=("full", "no_cold", "no_faces"),
        default="full",
        help="face probes of every unit: both (full), none on the cold face (no_cold) or "
        "none at all (no_faces)",
    )
    ap.add_argument(
        "--switched-on",
        action="store_true",
        help="a healthy fleet of --healthy units switched on warm instead: pull-downs, alerts",
    )
    args = ap.parse_args(argv)
    if args.switched_on:
        print(
            f"{args.healthy} healthy units switched on at room temperature, {args.days:g} "
            f"days, seed {args.seed}, evaluated every {args.step_hours:g} h"
        )
        print(switched_on(args.days, args.healthy, args.seed, args.step_hours))
        return 0
    spec, expected = scoring_fleet(
        args.days, healthy=args.healthy, seed=args.seed, interval_s=60.0 * args.interval,
        summaries=args.summaries, sensors=args.sensors,
    )  # fmt: skip
    with tempfile.TemporaryDirectory() as tmp:
        db_path = args.keep if args.keep is not None else Path(tmp) / "bench.db"
        engine, truth, spent, beyond = run_fleet(
            db_path, spec, args.days, step_hours=args.step_hours
        )
        result = score(engine, expected, truth, beyond)
        engine.dispose()
    print(
        f"{len(spec.devices)} units ({args.healthy} healthy), {args.days:g} days, "
        f"{args.interval:g}-minute {'summaries' if args.summaries else 'instants'}, "
        f"{args.sensors} sensor set, seed {args.seed}, evaluated every {args.step_hours:g} h"
    )
    print(table(result))
    print("seconds: " + ", ".join(f"{k} {v:.1f}" for k, v in spent.items()))
    if args.verbose:
        for a in result.opened:
            print(
                f"  {a['device_id']} {a['kind']} {a['severity']} "
                f"day {(a['opened_s'] - START_S) / DAY_S:.2f}: {a['summary']}"
            )
    return 0


if __name__ == "__main__":
    sys.exit(main())
