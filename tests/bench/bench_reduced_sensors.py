"""Accuracy of R25 and UA with fewer face probes, against simulated fleets with known truth.

Run: ``python tests/bench/bench_reduced_sensors.py --seeds 301,...,314 [--sinks 150,400]``.
Prints tables; asserts nothing. Simulated data only: the truth is the simulator's.

The stored readings always hold both face probes (the schema needs them); the reduced sets
are made where the runner loads its arrays, by setting ``t_cold`` (set a) or ``t_cold`` and
``t_hot`` (set b) to NaN for every device, as a cooler without those probes delivers them.

Targets (issue 17): without the cold-side probe R25 within 2 % and UA within 25 % on at least
80 % of units with a floating driver; without either face probe R25 within 3 % where the
driver floats.
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import sys
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_diagnostics import START_S, build_db

from tecfleet.analytics import runner
from tecfleet.analytics import simulation as sim
from tecfleet.analytics.runner import device as runner_device
from tecfleet.ingest import db

R25, UA = "module.resistance_25c_ohm", "cabinet.ua_w_per_k"
#: (name, served estimate, truth parameter, target) per sensor set.
CHECKS = {
    "full": (("R25", R25, "r25", 0.01), ("UA", UA, "ua", 0.15)),
    "a": (("R25", R25, "r25", 0.02), ("UA", UA, "ua", 0.25)),
    "b": (("R25", R25, "r25", 0.03),),
}  # fmt: skip
DROPPED = {"full": (), "a": ("tc",), "b": ("tc", "th")}
PROBE = {"tc": "cold_probe", "th": "hot_probe"}


@contextmanager
def reduced(sensor_set: str) -> Iterator[None]:
    """The runner's loads with the face probes of ``sensor_set`` missing (NaN arrays)."""
    original: Callable[..., Any] = runner_device.load

    def load(*args: Any, **kwargs: Any) -> Any:
        data = original(*args, **kwargs)
        for name in DROPPED[sensor_set]:
            setattr(data, name, np.full_like(getattr(data, name), np.nan))
            setattr(data, PROBE[name], False)
        return data

    runner_device.load = load  # type: ignore[assignment]
    try:
        yield
    finally:
        runner_device.load = original  # type: ignore[assignment]


def scores(
    seeds: list[int], n_dev: int, days: float, sinks: tuple[float, float]
) -> list[dict[str, Any]]:
    """Every unit's newest R25 and UA against the truth, for each sensor set."""
    out: list[dict[str, Any]] = []
    for seed in seeds:
        spec = sim.random_fleet(n_dev, seed=seed, start_s=START_S, days=days)
        devs = tuple(
            dataclasses.replace(d, c_cold_sink=sinks[0], c_hot_sink=sinks[1]) for d in spec.devices
        )
        spec = dataclasses.replace(spec, devices=devs)
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "r.db"
            engine, truth, _ = build_db(path, spec, days)
            engine.dispose()
            for sensor_set, checks in CHECKS.items():
                # A fresh copy of the readings for each set: the analysis state is stored.
                copy = Path(tmp) / f"{sensor_set}.db"
                copy.write_bytes(path.read_bytes())
                eng = db.make_engine(f"sqlite:///{copy}")
                with reduced(sensor_set):
                    runner.analyze(eng)
                end = START_S + days * 86_400.0
                for d in spec.devices:
                    tp = truth.params_at(d.device_id, end)
                    for name, key, tkey, tol in checks:
                        out.append(_score(eng, d, key, tp[tkey]) | {
                            "seed": seed, "set": sensor_set, "quantity": name, "target": tol,
                        })  # fmt: skip
                eng.dispose()
    return out


def _score(eng: Any, d: sim.DeviceSpec, key: str, true: float) -> dict[str, Any]:
    # The newest stored value of ``key`` (or the newest reason there is none) against truth.
    hist = runner.estimate_history(eng, d.device_id, key)
    last = hist[-1] if hist else {}
    value, se = last.get("value"), last.get("stderr")
    return {
        "device": d.device_id,
        "driver": "floating" if d.off_voltage == "open_circuit" else "zero-volt",
        "control": d.control,
        "err": math.inf if value is None else value / true - 1.0,
        "se": math.inf if se is None else se / true,
        "reliable": bool(last.get("reliable")),
        "note": last.get("note"),
    }


def report(rows: list[dict[str, Any]]) -> None:
    print(f"{'set':5} {'quantity':8} {'driver':10} {'n':>3} {'served':>6} {'median|err|':>11} "
          f"{'within':>7} {'target':>7} {'reliable':>8} {'in 2 se':>7}")  # fmt: skip
    for sensor_set, checks in CHECKS.items():
        for name, _k, _t, tol in checks:
            for driver in ("floating", "zero-volt"):
                mine = [r for r in rows if r["set"] == sensor_set and r["quantity"] == name
                        and r["driver"] == driver]  # fmt: skip
                if not mine:
                    continue
                e = np.array([abs(r["err"]) for r in mine])
                fin = np.isfinite(e)
                cover = np.array([abs(r["err"]) <= 2 * r["se"] for r in mine])
                med = f"{100 * np.median(e[fin]):10.1f}%" if fin.any() else f"{'-':>11}"
                print(f"{sensor_set:5} {name:8} {driver:10} {e.size:3d} {fin.sum():6d} {med} "
                      f"{100 * np.mean(e <= tol):6.0f}% {100 * tol:6.0f}% "
                      f"{100 * np.mean([r['reliable'] for r in mine]):7.0f}% "
                      f"{100 * cover[fin].mean() if fin.any() else math.nan:6.0f}%")  # fmt: skip
    print("\nper unit (reduced sets):")
    for r in rows:
        if r["set"] == "full":
            continue
        err = "none" if not math.isfinite(r["err"]) else f"{100 * r['err']:+6.1f}%"
        print(f"seed {r['seed']} {r['device']} set {r['set']} {r['driver']:9} {r['control']:12} "
              f"{r['quantity']:4} {err:>7} se {100 * r['se']:.1f}% "
              f"{'reliable' if r['reliable'] else 'unreliable'}; {r['note']}")  # fmt: skip


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", default="201,202")
    ap.add_argument("--devices", type=int, default=8)
    ap.add_argument("--days", type=float, default=7.0)
    ap.add_argument("--sinks", default="0,0", help="cold,hot sink heat capacities [J/K]")
    args = ap.parse_args(argv)
    cc, ch = (float(x) for x in args.sinks.split(","))
    seeds = [int(s) for s in args.seeds.split(",")]
    print(f"== Reduced sensor sets: seeds {seeds}, {args.devices} devices, {args.days:g} days, "
          f"sinks {cc:g}/{ch:g} J/K (cold/hot); truth simulated ==")  # fmt: skip
    report(scores(seeds, args.devices, args.days, (cc, ch)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
