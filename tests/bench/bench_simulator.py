"""Fleet simulator speed on one core. Prints figures.

    python tests/bench/bench_simulator.py [--devices 100] [--days 30] [--interval-s 60]

Three figures for the same fleet (random fleet, seed 1, fault mix wear:2,leak:1,fan:1,
sensor:1,offline:1):
- the model alone (``Simulator.run`` in one-day chunks: physics, use, faults, sensors);
- the model plus building the payload objects (what the MQTT publisher sends);
- the model plus writing JSON lines to a temporary file (``FileSink``).
The target is a month of one-minute data for 100 coolers in under a minute.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tecfleet.analytics.simulation import FileSink, Simulator, publish_fleet, random_fleet

START = 1_780_000_000.0


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--devices", type=int, default=100)
    ap.add_argument("--days", type=float, default=30.0)
    ap.add_argument("--interval-s", type=float, default=60.0)
    ap.add_argument("--skip-files", action="store_true", help="only the model figures")
    args = ap.parse_args()
    spec = random_fleet(
        args.devices,
        seed=1,
        start_s=START,
        days=args.days,
        interval_s=args.interval_s,
        faults="wear:2,leak:1,fan:1,sensor:1,offline:1",
    )
    steps = round(args.days * 86_400 / args.interval_s)
    per_chunk = max(1, round(86_400 / args.interval_s))
    readings = 0

    def model(build_rows: bool) -> float:
        nonlocal readings
        sim = Simulator(spec)
        t0 = time.perf_counter()
        done = 0
        readings = 0
        while done < steps:
            k = min(per_chunk, steps - done)
            chunk = sim.run(k)
            readings += int(chunk.present.sum())
            if build_rows:
                chunk.payload_rows()
            done += k
        return time.perf_counter() - t0

    label = f"{args.devices} devices x {args.days:g} days at {args.interval_s:g} s"
    t_model = model(False)
    print(
        f"model only:              {t_model:6.1f} s  ({label}, {steps} steps, "
        f"{readings} readings, {readings / t_model:,.0f} readings/s)"
    )
    t_rows = model(True)
    print(f"model + payload objects: {t_rows:6.1f} s  ({readings / t_rows:,.0f} readings/s)")
    if not args.skip_files:
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "fleet.jsonl"
            sink = FileSink(str(path))
            t0 = time.perf_counter()
            publish_fleet(spec, sink, end_s=START + steps * args.interval_s, batch=1440)
            sink.close()
            t_file = time.perf_counter() - t0
            size = path.stat().st_size / 1e6
        print(f"model + JSON lines file: {t_file:6.1f} s  ({sink.sent} rows, {size:.0f} MB)")
    target = "met" if t_model < 60 else "MISSED"
    print(f"target (month x 100 devices < 60 s, model): {target}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
