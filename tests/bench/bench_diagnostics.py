"""Accuracy, detection and speed of the diagnostics against simulated fleets with known truth.

Run: ``python tests/bench/bench_diagnostics.py [--part accuracy,detect,season,speed,live-pg]``.
Prints tables; asserts nothing (targets are printed beside the figures; the test
``tests/analytics/test_diagnostics_scoring.py`` asserts them on the same functions). Simulated
data only. Accuracy runs seeds 1-14 by default: 1-7 have informed several changes, 8-14 far
fewer, so report both.
"in 2 se": share of units whose error is within twice the standard error the estimate states.

Targets (issue 17), healthy units after 7 days of one-minute data, by sensor set
(``--sensors``): full set R25 within 1 %, S within 2 %, UA within 15 %, hot-side resistance
within 10 % on at least 90 % of units; without the cold-side probe (``no_cold``) R25 within 2 %
and UA within 25 % on at least 80 % of the units whose driver floats; without either face probe
(``no_faces``) R25 within 3 % where the driver floats (no share stated: printed). The module's
cold-side resistance and conductance keep the earlier 20 %. A 5 % rise of R25 flagged within 7
days of crossing, a 1.5x UA step within 2 days, a 3x r_hot step within 2 hours; no flag on
healthy units over a 90-day season with the ambient swinging about ±10 K; 100 devices x 30
days analysed from scratch in under 60 s.
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import sqlite3
import sys
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import sqlalchemy as sa

from tecfleet.analytics import runner
from tecfleet.analytics import simulation as sim
from tecfleet.ingest import db

START_S = 1_735_689_600.0  # 2025-01-01T00:00Z, a day boundary


@dataclass(frozen=True)
class Reporting:
    """How every simulated unit reports: its interval [s] and whether each reading carries
    the interval summaries (means over the interval) beside the instant."""

    interval_s: float = 60.0
    summaries: bool = False

    def label(self) -> str:
        kind = "summaries" if self.summaries else "instants"
        return f"{self.interval_s / 60.0:g}-minute {kind}"

    def apply(self, spec: sim.FleetSpec) -> sim.FleetSpec:
        """``spec`` reporting this way."""
        return dataclasses.replace(spec, interval_s=self.interval_s, summaries=self.summaries)


#: Set once by ``main`` from ``--interval`` and ``--summaries``.
REPORTING = Reporting()
#: Heat capacities of every unit's cold and hot sink in the detect and season parts [J/K]
#: (0: massless faces); set from ``--sinks``.
SINKS = (0.0, 0.0)


def build_db(
    path: Path, spec: sim.FleetSpec, days: float, simulator: sim.Simulator | None = None
) -> tuple[Any, sim.FleetTruth, float]:
    """Simulate ``spec`` for ``days`` and bulk-load the readings; returns (engine, truth, s).
    With ``simulator`` given, that one runs (and can be run on afterwards)."""
    engine = db.make_engine(f"sqlite:///{path}")
    db.migrate(engine)
    t0 = time.perf_counter()
    simulator = simulator or sim.Simulator(spec)
    total = round(days * 86_400.0 / spec.interval_s)
    now = db.now_ms()
    raw = sqlite3.connect(path)
    raw.executemany(
        "INSERT INTO devices (device_id, module, cabinet, readings, first_seen_ms) "
        "VALUES (?, ?, ?, 0, ?)",
        [
            (
                d.device_id,
                _json(d.registration()["module"]),
                _json(d.registration()["cabinet"]),
                now,
            )
            for d in spec.devices
        ],
    )
    raw.commit()
    raw.close()
    append_steps(path, spec, simulator, total)
    return engine, simulator.truth, time.perf_counter() - t0


def append_steps(path: Path, spec: sim.FleetSpec, simulator: sim.Simulator, steps: int) -> int:
    """Run the simulator on by ``steps`` sampling intervals and bulk-load what it reports;
    returns the readings stored."""
    now = db.now_ms()
    raw = sqlite3.connect(path)
    done = stored = 0
    last: dict[str, int] = {}
    while done < steps:
        k = min(1440, steps - done)
        c = simulator.run(k)
        done += k
        cols = _chunk_columns(spec, c)
        dev, ts = cols[0], cols[1]
        rows = zip(*cols, [now] * len(ts), strict=True)
        names = ("device_id", "ts_ms", "t_cabinet", "t_cold", "t_hot", "t_ambient", "current",
                 "voltage", "rh", "door_open", *c.summaries, "received_ms")  # fmt: skip
        raw.executemany(
            f"INSERT OR IGNORE INTO readings ({', '.join(names)}) "
            f"VALUES ({', '.join('?' * len(names))})",
            rows,
        )
        stored += len(ts)
        for d, t in zip(dev, ts, strict=True):
            last[d] = max(last.get(d, 0), t)
    raw.executemany(
        "UPDATE devices SET last_reading_ms = ?, readings = "
        "(SELECT COUNT(*) FROM readings r WHERE r.device_id = devices.device_id) "
        "WHERE device_id = ?",
        [(v, d) for d, v in last.items()],
    )
    raw.commit()
    raw.close()
    return stored


def _json(x: Any) -> str:
    import json

    return json.dumps(x)


def _latest(engine: Any, device: str, key: str) -> tuple[float, bool, float] | None:
    h = runner.latest_health(engine, device)
    if key not in h or h[key]["value"] is None:
        return None  # never estimated, or served as unknown with a reason
    se = h[key]["stderr"]
    return float(h[key]["value"]), bool(h[key]["reliable"]), math.inf if se is None else se


def _first_flag(engine: Any, device: str, prefix: str, after_ms: int) -> int | None:
    for row in runner.estimate_history(engine, device, f"{prefix}.flag", start_ms=after_ms):
        if row["value"] == 1.0:
            return int(row["at_ms"])
    return None


_SETTINGS = runner.AnalysisSettings()
#: Each tracked quantity's flag threshold [%].
FLAG_PCT = {
    "module.resistance_25c": _SETTINGS.r25_flag_pct,
    "cabinet.ua": _SETTINGS.ua_flag_pct,
    "hot_side.resistance": _SETTINGS.r_hot_flag_pct,
}


def _all_held(engine: Any, device: str, prefix: str, after_ms: int) -> bool:
    # Whether every flag evaluation from ``after_ms`` on was held (its note says why).
    flags = runner.estimate_history(engine, device, f"{prefix}.flag", start_ms=after_ms)
    return bool(flags) and all(row["note"] is not None for row in flags)


def _first_past(engine: Any, device: str, prefix: str, after_ms: int) -> float | None:
    # When the change first reached the flag's threshold from ``after_ms`` on [s]; None if
    # it never did.
    for row in runner.estimate_history(engine, device, f"{prefix}.change_pct", start_ms=after_ms):
        if row["value"] >= FLAG_PCT[prefix]:
            return int(row["at_ms"]) / 1e3
    return None


#: (name, served estimate, truth parameter)
ACCURACY_CHECKS = (
    ("R25", "module.resistance_25c_ohm", "r25"),
    ("S25", "module.seebeck_25c_v_per_k", "s25"),
    ("UA", "cabinet.ua_w_per_k", "ua"),
    ("r_hot (1 h)", "hot_side.resistance_k_per_w", "r_hot"),
    ("r_hot (24 h fit)", "hot_side.resistance_fit_k_per_w", "r_hot"),
    ("r_cold", "cold_side.resistance_k_per_w", "r_cold"),
    ("K", "module.conductance_w_per_k", "k"),
)
SENSOR_SETS = ("full", "no_cold", "no_faces")
#: Issue 17's targets by sensor set: relative error per quantity [-] (no entry: no target),
#: the share of units that must be within it [-] (None: not stated), and whether only units
#: whose driver floats (open circuit while off) count.
TARGETS: dict[str, tuple[dict[str, float], float | None, bool]] = {
    "full": (
        {"R25": 0.01, "S25": 0.02, "UA": 0.15, "r_hot (1 h)": 0.10, "r_hot (24 h fit)": 0.10,
         "r_cold": 0.20, "K": 0.20},
        0.90,
        False,
    ),
    "no_cold": ({"R25": 0.02, "UA": 0.25}, 0.80, True),
    "no_faces": ({"R25": 0.03}, None, True),
}  # fmt: skip
DETECT_PREFIX = {
    "wear": "module.resistance_25c",
    "leak": "cabinet.ua",
    "fan": "hot_side.resistance",
}
DETECT_TARGET_H = {"wear": 7 * 24.0, "leak": 48.0, "fan": 2.0}
#: Issue 22's targets at slow reporting, by interval [min] (full sensor set, healthy units,
#: 7 days): the relative error per quantity [-] on at least 90 % of units, and the detection
#: delays [h]. At 15-minute instants UA within 35 % (where the unit rests now and then).
SLOW_TARGETS: dict[float, dict[str, float]] = {
    5.0: {"R25": 0.02, "UA": 0.25, "r_hot (1 h)": 0.30, "r_hot (24 h fit)": 0.30},
    15.0: {"R25": 0.02, "UA": 0.25, "r_hot (1 h)": 0.30, "r_hot (24 h fit)": 0.30},
}
SLOW_DETECT_H: dict[float, dict[str, float]] = {
    5.0: {"wear": 7 * 24.0, "leak": 72.0, "fan": 6.0},
    15.0: {"wear": 7 * 24.0, "leak": 96.0, "fan": 12.0},
}


def targets_for(sensors: str) -> tuple[dict[str, float], float | None, bool]:
    """The accuracy targets of ``sensors`` at the bench's reporting (``REPORTING``)."""
    minutes = REPORTING.interval_s / 60.0
    if minutes <= 1.0 or sensors != "full":
        return TARGETS[sensors]
    slow = dict(SLOW_TARGETS[5.0 if minutes <= 5.0 else 15.0])
    if minutes > 5.0 and not REPORTING.summaries:
        slow["UA"] = 0.35
    return slow, 0.90, False


def detect_targets_h() -> dict[str, float]:
    """The detection-delay targets at the bench's reporting [h]."""
    minutes = REPORTING.interval_s / 60.0
    if minutes <= 1.0:
        return DETECT_TARGET_H
    return SLOW_DETECT_H[5.0 if minutes <= 5.0 else 15.0]


@dataclass(frozen=True)
class UnitScore:
    """One served estimate of one healthy unit against the simulator's truth."""

    seed: int
    device_id: str
    mode: str  # control/off-voltage kind of the unit
    quantity: str
    rel_err: float  # estimate / truth - 1 [-]
    reliable: bool
    rel_stderr: float  # stated standard error / truth [-]
    target: float  # [-] (inf: no target for this sensor set)
    reason: str | None = None  # why no value was served, where none was

    @property
    def within(self) -> bool:
        return abs(self.rel_err) <= self.target

    @property
    def floating(self) -> bool:
        """The unit's driver lets the module float while off."""
        return self.mode.endswith("/open_circuit")

    @property
    def covered(self) -> bool:
        """Within two stated standard errors."""
        return abs(self.rel_err) <= 2.0 * self.rel_stderr


def accuracy_scores(
    seeds: list[int],
    n_dev: int,
    days: float,
    sinks: tuple[float, float] = (0.0, 0.0),
    sensors: str = "full",
) -> list[UnitScore]:
    """Simulate each seed's healthy fleet for ``days``, analyse it, score the newest values.
    ``sinks``: heat capacities of every unit's cold and hot sink [J/K] (0: massless faces);
    ``sensors``: the face probes every unit has (one of ``SENSOR_SETS``)."""
    out: list[UnitScore] = []
    targets = targets_for(sensors)[0]
    for seed in seeds:
        spec = REPORTING.apply(sim.random_fleet(n_dev, seed=seed, start_s=START_S, days=days))
        spec = dataclasses.replace(
            spec,
            devices=tuple(
                dataclasses.replace(
                    d, c_cold_sink=sinks[0], c_hot_sink=sinks[1], sensor_set=sensors
                )
                for d in spec.devices
            ),
        )
        with tempfile.TemporaryDirectory() as tmp:
            engine, truth, _ = build_db(Path(tmp) / "acc.db", spec, days)
            runner.analyze(engine)
            end = START_S + days * 86_400.0
            for d in spec.devices:
                tp = truth.params_at(d.device_id, end)
                for name, key, tkey in ACCURACY_CHECKS:
                    tol = targets.get(name, math.inf)
                    got = _latest(engine, d.device_id, key)
                    reason = None
                    if got is None:
                        rel, reliable, se = math.inf, False, math.inf
                        reason = (
                            runner.latest_health(engine, d.device_id).get(key, {}).get("reason")
                        )
                    else:
                        rel, reliable, se = got[0] / tp[tkey] - 1.0, got[1], got[2] / tp[tkey]
                    mode = f"{d.control}/{d.off_voltage}"
                    out.append(
                        UnitScore(seed, d.device_id, mode, name, rel, reliable, se, tol, reason)
                    )
            engine.dispose()
    return out


def part_accuracy(
    seeds: list[int],
    n_dev: int,
    days: float,
    sinks: tuple[float, float] = (0.0, 0.0),
    sensors: str = "full",
) -> None:
    print(f"\n== Accuracy ({sensors} sensor set): healthy units, {days:g} days of "
          f"{REPORTING.label()}, seeds {seeds}, {n_dev} devices each (noise, bias, "
          f"quantisation, doors, loads on), sinks of {sinks[0]:g}/{sinks[1]:g} J/K "
          "(cold/hot) ==")  # fmt: skip
    scores = accuracy_scores(seeds, n_dev, days, sinks, sensors)
    print(f"{'quantity':18} {'group':26} {'n':>3} {'median|err|':>11} {'p90|err|':>9} "
          f"{'within':>7} {'target':>7} {'reliable':>8} {'within|rel':>10} "
          f"{'in 2 se':>7}")  # fmt: skip
    for name, _key, _t in ACCURACY_CHECKS:
        mine = [u for u in scores if u.quantity == name and math.isfinite(u.rel_err)]
        groups = [("all", mine)] + [
            (m, [u for u in mine if u.mode == m]) for m in sorted({u.mode for u in mine})
        ]
        for group, vals in groups:
            if not vals:
                continue
            tol = vals[0].target
            e = np.abs(np.array([u.rel_err for u in vals]))
            rel_ok = np.array([u.reliable for u in vals])
            cover = np.array([u.covered for u in vals])
            within_rel = float(np.mean(e[rel_ok] <= tol)) if rel_ok.any() else float("nan")
            target = f"{100 * tol:6.0f}%" if math.isfinite(tol) else f"{'-':>7}"
            print(f"{name:18} {group:26} {e.size:3d} {100 * np.median(e):10.1f}% "
                  f"{100 * np.percentile(e, 90):8.1f}% {100 * np.mean(e <= tol):6.0f}% "
                  f"{target} {100 * rel_ok.mean():7.0f}% "
                  f"{100 * within_rel:9.0f}% {100 * cover.mean():6.0f}%")  # fmt: skip
    misses = [u for u in scores if math.isfinite(u.rel_err) and not u.within]
    if misses:
        print("\nbeyond target:")
        for u in misses:
            print(f"seed {u.seed} {u.device_id} {u.mode:22} {u.quantity:16} "
                  f"{100 * u.rel_err:+6.1f}% (stated se {100 * u.rel_stderr:.1f}%, "
                  f"{'reliable' if u.reliable else 'unreliable'})")  # fmt: skip
    missing: dict[str, int] = {}
    for u in scores:
        if not math.isfinite(u.rel_err):
            missing[u.quantity] = missing.get(u.quantity, 0) + 1
    if missing:
        print("no value at the end (never estimated, or served as unknown with its reason):",
              missing)  # fmt: skip
        reasons: dict[tuple[str, str], int] = {}
        for u in scores:
            if u.quantity == "R25" and not math.isfinite(u.rel_err):
                why = u.reason or "no reason stored"
                reasons[(u.mode, why)] = reasons.get((u.mode, why), 0) + 1
        for (mode, why), count in sorted(reasons.items()):
            print(f"  R25 of {count:3d} {mode:26} units: {why}")
    _target_summary(scores, sensors)


def _target_summary(scores: list[UnitScore], sensors: str) -> None:
    """Per targeted quantity: the share of the units the target speaks of that are within it
    (a unit without a value counts as outside)."""
    targets, share, floating_only = targets_for(sensors)
    whom = "units whose driver floats" if floating_only else "all units"
    need = "not stated" if share is None else f"{100 * share:.0f} %"
    print(f"\nwithin target ({sensors} sensor set; of {whom}; share needed: {need}):")
    for name, tol in targets.items():
        units = [u for u in scores if u.quantity == name and (u.floating or not floating_only)]
        if not units:
            continue
        got = float(np.mean([u.within for u in units]))
        verdict = "" if share is None else ("  met" if got >= share else "  NOT met")
        print(f"  {name:18} within {100 * tol:4.0f} %: {100 * got:5.1f} % of {len(units)}"
              f"{verdict}")  # fmt: skip


@dataclass(frozen=True)
class Detection:
    """When a fault's flag was first raised, against when the fault became detectable."""

    device_id: str
    kind: str
    start_s: float  # when the fault reached its detectable size [s]
    flagged_s: float | None  # first flag at or after the fault's start [s]
    #: No flag was raised and every flag evaluation after the fault's start was held (with
    #: its reason).
    held: bool = False
    #: On a held flag: when the change first reached the flag's threshold [s], None if never.
    held_change_s: float | None = None

    @property
    def delay_h(self) -> float:
        return math.inf if self.flagged_s is None else (self.flagged_s - self.start_s) / 3600.0

    @property
    def held_delay_h(self) -> float:
        # The change's delay past the threshold on a held flag [h]; inf if it never got there.
        at = self.held_change_s
        return math.inf if at is None else (at - self.start_s) / 3600.0

    @property
    def in_time(self) -> bool:
        return self.delay_h <= detect_targets_h()[self.kind]


def detection_fleet(
    seed: int, n_dev: int = 10, days: float = 26.0, sensors: str = "full"
) -> sim.FleetSpec:
    """Fleet with two each of wear (to +10 %), a 1.5x UA step and a 3x r_hot step, every
    unit with the face probes of ``sensors`` and the sinks of ``SINKS``."""
    spec = sim.random_fleet(n_dev, seed=seed, start_s=START_S, days=days,
                            faults="wear:2,leak:2,fan:2")  # fmt: skip
    # Leak and fan as the targets state them: a 1.5x UA step and a 3x r_hot step.
    faults = tuple(
        dataclasses.replace(f, magnitude=1.5) if f.kind == "leak" else f for f in spec.faults
    )
    devices = tuple(
        dataclasses.replace(d, c_cold_sink=SINKS[0], c_hot_sink=SINKS[1]) for d in spec.devices
    )
    spec = dataclasses.replace(spec, faults=faults, devices=devices)
    return REPORTING.apply(sim.with_sensor_set(spec, sensors))


def _detectable_from(f: sim.Fault) -> float:
    # When a fault reaches its detectable size [s]: wear its +5 % (R25 = r0·(1 + (m - 1)·frac),
    # +5 % at frac = 0.05/(m - 1)), the others at once.
    if f.kind == "wear":
        return f.start_s + f.ramp_s * 0.05 / (f.magnitude - 1.0)
    return f.start_s


def readings_days(spec: sim.FleetSpec, days: float) -> float:
    """How long a detection fleet of ``days`` reports [d]: until every fault's target has
    passed. A wear ramp can reach +5 % less than a week before the fleet's last day, and a
    fault not flagged when the readings end has no verdict."""
    ends = [
        (_detectable_from(f) - START_S) / 86_400.0 + detect_targets_h()[f.kind] / 24.0
        for f in spec.faults
    ]
    return max([days, *ends])


def detection_scores(
    seed: int,
    n_dev: int,
    days: float,
    sensors: str = "full",
    spec: sim.FleetSpec | None = None,
) -> tuple[list[Detection], list[str], list[str], list[str]]:
    """:func:`detection_fleet` (or ``spec``, one drawn by it) analysed; returns the
    detections, the healthy units, the flags raised on them, and the flags of another kind
    raised on the faulty units (a cause misread: one fault should raise its own flag only)."""
    if spec is None:
        spec = detection_fleet(seed, n_dev, days, sensors)
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _ = build_db(Path(tmp) / "det.db", spec, readings_days(spec, days))
        runner.analyze(engine)
        found = []
        for f in spec.faults:
            start = _detectable_from(f)
            prefix, after = DETECT_PREFIX[f.kind], int(f.start_s * 1000)
            hit = _first_flag(engine, f.device_id, prefix, after)
            held = hit is None and _all_held(engine, f.device_id, prefix, after)
            past = _first_past(engine, f.device_id, prefix, after) if held else None
            flagged = None if hit is None else hit / 1e3
            found.append(Detection(f.device_id, f.kind, start, flagged, held, past))
        faulty = {f.device_id for f in spec.faults}
        healthy = [d.device_id for d in spec.devices if d.device_id not in faulty]
        false = [
            f"{dev} {p}"
            for dev in healthy
            for p in DETECT_PREFIX.values()
            if _first_flag(engine, dev, p, 0) is not None
        ]
        other = []
        for f in spec.faults:
            for p in (p for k, p in DETECT_PREFIX.items() if k != f.kind):
                at = _first_flag(engine, f.device_id, p, 0)
                if at is not None:
                    day = (at / 1e3 - START_S) / 86_400
                    other.append(f"{f.device_id} ({f.kind}) {p} on day {day:.1f}")
        engine.dispose()
    return found, healthy, false, other


def part_detect(
    seed: int, n_dev: int, days: float, sensors: str = "full"
) -> tuple[list[Detection], int]:
    print(f"\n== Detection ({sensors} sensor set): {n_dev} devices, {days:g} days of "
          f"{REPORTING.label()}, seed {seed}, faults wear/leak/fan, sinks of "
          f"{SINKS[0]:g}/{SINKS[1]:g} J/K ==")  # fmt: skip
    t0 = time.perf_counter()
    fleet = detection_fleet(seed, n_dev, days, sensors)
    found, healthy, false, other = detection_scores(seed, n_dev, days, sensors, fleet)
    until = readings_days(fleet, days)
    print(f"(simulation and analysis {time.perf_counter() - t0:.1f} s; readings over "
          f"{until:.1f} days, till every fault's target has passed)")  # fmt: skip
    modes = {d.device_id: f"{d.control}/{d.off_voltage}" for d in fleet.devices}
    print(f"{'device':10} {'driver':24} {'fault':6} {'from (UTC h)':>12} {'flag delay':>11} "
          f"{'target':>7}")  # fmt: skip
    for d in found:
        delay = "never" if d.flagged_s is None else f"{d.delay_h:9.1f} h"
        if d.held:
            # A held flag: the change is still served; when it passed the threshold.
            past = d.held_delay_h
            delay = "held, change " + (
                "never past" if math.isinf(past) else f"past at {past:.0f} h"
            )
        print(f"{d.device_id:10} {modes[d.device_id]:24} {d.kind:6} "
              f"{(d.start_s - START_S) / 3600:12.1f} {delay:>11} "
              f"{detect_targets_h()[d.kind]:6.0f}h")  # fmt: skip
    for f in false:
        print(f"false flag: {f}")
    for f in other:
        print(f"flag of another kind: {f}")
    print(f"healthy devices: {len(healthy)}, false flags: {len(false)}, flags of another kind "
          f"on faulty units: {len(other)}")  # fmt: skip
    return found, len(false), len(other)


def _detect_summary(
    found: list[Detection], false: int, other: int, seeds: int, sensors: str
) -> None:
    print(f"\ndetection over {seeds} seeds ({sensors} sensor set, {REPORTING.label()}):")
    for kind, target in detect_targets_h().items():
        mine = [d for d in found if d.kind == kind]
        delays = sorted(d.delay_h for d in mine)
        shown = ", ".join("never" if not math.isfinite(x) else f"{x:.0f}" for x in delays)
        print(f"  {kind:5} in time ({target:.0f} h): {sum(d.in_time for d in mine)} of "
              f"{len(mine)}; delays [h]: {shown}")  # fmt: skip
        held = sorted(d.held_delay_h for d in mine if d.held)
        if held:
            past = ", ".join("never" if math.isinf(x) else f"{x:.0f}" for x in held)
            print(f"        flag held on {len(held)} (with its reason); their change past the "
                  f"threshold after [h]: {past}")  # fmt: skip
    print(f"  false flags on healthy units: {false}")
    print(f"  flags of another kind on faulty units: {other}")


@dataclass
class Season:
    """Flags and change ranges of healthy units over a season [%]."""

    flags: list[str] = field(default_factory=list)
    #: Each flag's first day after the season's start and the change it was raised on [%].
    flag_at: dict[str, tuple[float, float]] = field(default_factory=dict)
    r_swing: dict[str, float] = field(default_factory=dict)
    r25_change: dict[str, tuple[float, float]] = field(default_factory=dict)
    ua_change: dict[str, tuple[float, float, float, float]] = field(default_factory=dict)
    r_hot_change: dict[str, tuple[float, float, float, float]] = field(default_factory=dict)


def _change_range(engine: Any, dev: str, prefix: str) -> tuple[float, float, float, float] | None:
    # A tracked quantity's change over the season [%]: least, most, 5th and 95th percentile.
    rows = runner.estimate_history(engine, dev, f"{prefix}.change_pct")
    if not rows:
        return None
    u = np.array([h["value"] for h in rows])
    lo, hi = (float(x) for x in np.percentile(u, [5, 95]))
    return float(u.min()), float(u.max()), lo, hi


def season_scores(
    seed: int,
    n_dev: int,
    days: float,
    sinks: tuple[float, float] = (0.0, 0.0),
    sensors: str = "full",
) -> Season:
    """Healthy units over ``days`` with the ambient swinging about ±10 K. ``sinks``: heat
    capacities of every unit's cold and hot sink [J/K] (0: massless faces); ``sensors``:
    the face probes every unit has."""
    spec = REPORTING.apply(sim.random_fleet(n_dev, seed=seed, start_s=START_S, days=days))
    # A slow weather anomaly of 5 K s.d. with a 20-day memory plus a 4 K daily swing gives
    # excursions of about ±10 K over the season.
    devs = tuple(
        dataclasses.replace(
            d,
            t_amb_weather_k=5.0,
            t_amb_tau_h=480.0,
            t_amb_daily_k=4.0,
            c_cold_sink=sinks[0],
            c_hot_sink=sinks[1],
            sensor_set=sensors,
        )
        for d in spec.devices
    )
    spec = dataclasses.replace(spec, devices=devs)
    out = Season()
    with tempfile.TemporaryDirectory() as tmp:
        engine, _truth, _ = build_db(Path(tmp) / "season.db", spec, days)
        runner.analyze(engine)
        for d in spec.devices:
            for p in ("module.resistance_25c", "cabinet.ua", "hot_side.resistance"):
                at = _first_flag(engine, d.device_id, p, 0)
                if at is not None:
                    out.flags.append(f"{d.device_id} {p}")
                    out.flag_at[out.flags[-1]] = _flag_day(engine, d.device_id, p, at)
            ch = runner.estimate_history(engine, d.device_id, "module.resistance_25c.change_pct")
            amb = runner.estimate_history(engine, d.device_id, "module.resistance_ohm")
            if ch and amb:
                v = np.array([h["value"] for h in ch])
                r = np.array([h["value"] for h in amb])
                out.r_swing[d.device_id] = 100 * (float(r.max()) / float(r.min()) - 1)
                out.r25_change[d.device_id] = (float(v.min()), float(v.max()))
            for got, prefix in (
                (out.ua_change, "cabinet.ua"),
                (out.r_hot_change, "hot_side.resistance"),
            ):
                span = _change_range(engine, d.device_id, prefix)
                if span is not None:
                    got[d.device_id] = span
        engine.dispose()
    return out


def _flag_day(engine: Any, dev: str, prefix: str, at_ms: int) -> tuple[float, float]:
    # A flag's day after the season's start and the change it was raised on [%].
    rows = runner.estimate_history(engine, dev, f"{prefix}.change_pct", at_ms, at_ms + 1)
    change = float(rows[0]["value"]) if rows else math.nan
    return (at_ms / 1000.0 - START_S) / 86_400.0, change


def part_season(seeds: list[int], n_dev: int, days: float, sensors: str = "full") -> None:
    flagged = 0
    for seed in seeds:
        flagged += _season_one(seed, n_dev, days, sensors)
    print(f"\nseasons ({sensors} sensor set): {len(seeds)} seeds, units flagged: {flagged} of "
          f"{len(seeds) * n_dev}")  # fmt: skip


def _season_one(seed: int, n_dev: int, days: float, sensors: str) -> int:
    print(f"\n== Season ({sensors} sensor set): {n_dev} healthy devices, {days:g} days of "
          f"{REPORTING.label()}, seed {seed}, ambient swinging about ±10 K, sinks of "
          f"{SINKS[0]:g}/{SINKS[1]:g} J/K ==")  # fmt: skip
    sea = season_scores(seed, n_dev, days, SINKS, sensors)
    for f in sea.flags:
        day, change = sea.flag_at[f]
        print(f"flag: {f} on day {day:.1f} (change {change:+.1f} %)")
    for dev, (lo, hi) in sea.r25_change.items():
        print(
            f"{dev}: R swings {sea.r_swing[dev]:.1f} %, R25 change within [{lo:+.1f}, {hi:+.1f}] %"
        )
    for name, changes in (("UA", sea.ua_change), ("r_hot", sea.r_hot_change)):
        for dev, (lo, hi, p5, p95) in changes.items():
            print(f"{dev}: {name} change within [{lo:+.1f}, {hi:+.1f}] %, "
                  f"5-95 % range [{p5:+.1f}, {p95:+.1f}] %")  # fmt: skip
    print(f"flags on healthy units: {len(sea.flags)}")
    return len({f.split()[0] for f in sea.flags})


def part_speed(n_dev: int, days: float, sensors: str = "full") -> None:
    print(f"\n== Speed: {n_dev} devices x {days:g} days of one-minute data ({sensors} sensor "
          "set), from scratch ==")  # fmt: skip
    spec = sim.random_fleet(n_dev, seed=5, start_s=START_S, days=days + 1.0)
    spec = dataclasses.replace(
        spec, devices=tuple(dataclasses.replace(d, sensor_set=sensors) for d in spec.devices)
    )
    simulator = sim.Simulator(spec)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "speed.db"
        engine, _truth, build_s = build_db(path, spec, days, simulator)
        with engine.connect() as c:
            n = c.execute(sa.select(sa.func.count()).select_from(db.readings)).scalar()
        print(f"simulated and stored {n} readings in {build_s:.1f} s (not timed below)")
        t0 = time.perf_counter()
        rep = runner.analyze(engine)
        dt = time.perf_counter() - t0
        print(f"analyze: {dt:.1f} s for {rep.devices} devices, {rep.steps} steps, "
              f"{rep.estimates} estimates; target < 60 s")  # fmt: skip
        t0 = time.perf_counter()
        rep2 = runner.analyze(engine)
        print(f"re-run with nothing new: {time.perf_counter() - t0:.2f} s ({rep2.steps} steps)")
        _state_sizes(engine)
        # The live case: one more hour arrives, then one analysis run, as the service does.
        hour = round(3600.0 / spec.interval_s)
        per_reading = []
        for _ in range(6):
            added = append_steps(path, spec, simulator, hour)
            t0 = time.perf_counter()
            rep3 = runner.analyze(engine)
            spent = time.perf_counter() - t0
            per_reading.append(spent / max(added, 1))
        print(f"incremental: one more hour ({added} readings, {rep3.steps} steps) analysed in "
              f"{spent:.2f} s; median over 6 hours {1e6 * float(np.median(per_reading)):.0f} "
              f"µs per reading (the ingest bench's figures are per reading too)")  # fmt: skip
        engine.dispose()


def _state_sizes(engine: Any) -> None:
    # What each analysis pass rewrites per device: its stored state, as JSON text.
    with engine.connect() as c:
        states = [r[0] for r in c.execute(sa.select(db.analysis_state.c.state))]
    sizes = np.array([len(_json(s)) for s in states], dtype=float)
    parts: dict[str, float] = {}
    for s in states:
        for k, v in s.items():
            parts[k] = parts.get(k, 0.0) + len(_json(v)) / len(states)
    top = sorted(parts.items(), key=lambda kv: -kv[1])[:4]
    print(f"stored state per device: mean {sizes.mean() / 1e3:.1f} KB, max "
          f"{sizes.max() / 1e3:.1f} KB; largest parts (mean KB): "
          + ", ".join(f"{k} {v / 1e3:.1f}" for k, v in top))  # fmt: skip


def _chunk_columns(spec: sim.FleetSpec, c: Any) -> list[list[Any]]:
    """What one simulator chunk reports, as columns in the readings table's order: device_id,
    ts_ms, t_cabinet, t_cold, t_hot, t_ambient, current, voltage, rh, door_open, then the
    interval summaries where the fleet reports them."""
    m = c.measured
    j, i = np.nonzero(c.present)
    names = ("t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh")
    return [
        np.array(spec.device_ids)[i].tolist(),
        np.round(c.ts[j, i] * 1000.0).astype(np.int64).tolist(),
        *(_nullable(m[n][j, i]) for n in names),
        (c.truth["door_s"] > 0)[j, i].tolist(),
        *(_nullable(col[j, i]) for col in c.summaries.values()),
    ]


def _nullable(col: Any) -> list[Any]:
    """A column as stored: a face a unit has no probe on (NaN) as NULL."""
    values = col.tolist()
    if np.isnan(col).any():
        return [None if math.isnan(v) else v for v in values]
    return values


def _chunk_readings(spec: sim.FleetSpec, c: Any) -> list[db.Reading]:
    """What one simulator chunk reports, as the ingester's readings."""
    cols = _chunk_columns(spec, c)
    names = list(c.summaries)
    return [
        db.Reading(
            d,
            t,
            *vals[:6],
            rh=vals[6],
            door_open=vals[7],
            **dict(zip(names, vals[8:], strict=True)),
        )
        for d, t, *vals in zip(*cols, strict=True)
    ]


def part_live_postgres(n_dev: int, days: float) -> None:
    """The live step on PostgreSQL: readings go in through the ingester's own write path."""
    sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
    from tests.services import Postgres

    print(f"\n== Live step on PostgreSQL: {n_dev} devices, {days:g} days of history ==")
    spec = sim.random_fleet(n_dev, seed=5, start_s=START_S, days=days + 1.0)
    simulator = sim.Simulator(spec)
    pg = Postgres()
    pg.start()
    try:
        engine = db.make_engine(pg.create_database("bench_live"))
        db.migrate(engine)
        with engine.begin() as conn:
            conn.execute(
                db.devices.insert(),
                [
                    {"device_id": d.device_id, "module": d.registration()["module"],
                     "cabinet": d.registration()["cabinet"], "readings": 0,
                     "first_seen_ms": db.now_ms()}
                    for d in spec.devices
                ],
            )  # fmt: skip
        t0 = time.perf_counter()
        total = round(days * 86_400.0 / spec.interval_s)
        for _ in range(0, total, 360):
            db.store_batch(engine, _chunk_readings(spec, simulator.run(360)))
        print(f"simulated and stored {days:g} days in {time.perf_counter() - t0:.1f} s (not timed)")
        t0 = time.perf_counter()
        runner.analyze(engine)
        print(f"analyze from scratch: {time.perf_counter() - t0:.1f} s")
        hour = round(3600.0 / spec.interval_s)
        per_reading = []
        for _ in range(6):
            rows = _chunk_readings(spec, simulator.run(hour))
            db.store_batch(engine, rows)
            t0 = time.perf_counter()
            runner.analyze(engine)
            per_reading.append((time.perf_counter() - t0) / max(len(rows), 1))
        lo, hi = 1e6 * min(per_reading), 1e6 * max(per_reading)
        print(f"incremental: median over 6 hours {1e6 * float(np.median(per_reading)):.0f} µs "
              f"per reading (range {lo:.0f}-{hi:.0f})")  # fmt: skip
        engine.dispose()
    finally:
        pg.destroy()


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--part", default="accuracy,detect,speed")
    ap.add_argument("--seeds", default="1,2,3,4,5,6,7,8,9,10,11,12,13,14")
    ap.add_argument("--devices", type=int, default=8)
    ap.add_argument("--speed-devices", type=int, default=100)
    ap.add_argument("--speed-days", type=float, default=30.0)
    ap.add_argument("--season-days", type=float, default=90.0)
    ap.add_argument("--season-seeds", default="1,2,3,4,5,6,7,8,9")
    ap.add_argument(
        "--sensors", default="full", choices=(*SENSOR_SETS, "all"),
        help="face probes of every unit in the accuracy, detect, season and speed parts: both "
        "(full), none on the cold side (no_cold), none on either face (no_faces); all: "
        "each set in turn",
    )  # fmt: skip
    ap.add_argument(
        "--sinks", default="0,0",
        help="heat capacities of the cold and hot sinks for the accuracy, detect and season "
        "parts [J/K]; "
        "e.g. 150,400 for small aluminium sinks (0,0: massless faces)",
    )  # fmt: skip
    ap.add_argument("--detect-seeds", default="4", help="seeds of the detect part")
    ap.add_argument(
        "--interval", type=float, default=1.0,
        help="reporting interval of every simulated unit in the accuracy, detect and season "
        "parts [min]",
    )  # fmt: skip
    ap.add_argument(
        "--summaries", action="store_true",
        help="every reading carries the interval summaries (means over its interval)",
    )  # fmt: skip
    args = ap.parse_args(argv)
    global REPORTING, SINKS
    REPORTING = Reporting(60.0 * args.interval, args.summaries)
    cc, ch = (float(x) for x in args.sinks.split(","))
    SINKS = (cc, ch)
    parts = set(args.part.split(","))
    sets = SENSOR_SETS if args.sensors == "all" else (args.sensors,)
    for sensors in sets:
        if "accuracy" in parts:
            seeds = [int(s) for s in args.seeds.split(",")]
            part_accuracy(seeds, args.devices, 7.0, SINKS, sensors)
        if "detect" in parts:
            seeds = [int(x) for x in args.detect_seeds.split(",")]
            found: list[Detection] = []
            false = other = 0
            for seed in seeds:
                got, n_false, n_other = part_detect(seed, 10, 26.0, sensors)
                found += got
                false += n_false
                other += n_other
            _detect_summary(found, false, other, len(seeds), sensors)
        if "season" in parts:
            seeds = [int(x) for x in args.season_seeds.split(",")]
            part_season(seeds, 4, args.season_days, sensors)
        if "speed" in parts:
            part_speed(args.speed_devices, args.speed_days, sensors)
    if "live-pg" in parts:
        part_live_postgres(args.speed_devices, 3.0)
    return 0


if __name__ == "__main__":
    sys.exit(main())
