"""A simulated fleet replayed through Debian's mosquitto into PostgreSQL with two ingesters and
two analysers (each a `tecfleet serve` process of one role). Prints, every ``--every`` seconds,
the ingest lag, the analysis lag and each process's memory, so steady state shows as flat
columns.

    python tests/bench/bench_scale_replay.py [--devices 10000] [--minutes 30] [--speed 60]

The simulator (`tecfleet simulate`, seeds from 301) first publishes ``--history-h`` hours
accelerated by ``--speed`` (ending at now), then one reading a minute per device, live.

- ingest lag: receive time minus reading time of the readings stored since the last line
  (median and max) [s];
- analysis lag: how far the alerts of the device furthest behind trail its newest stored
  reading, and how many devices trail it by more than one round plus one minute or were never
  analysed [s];
- memory: resident set of every tecfleet process [MB].
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import sqlalchemy as sa

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tecfleet.ingest import db
from tests.services import Mosquitto, Postgres

CLI = [sys.executable, "-m", "tecfleet.api.cli"]


def rss_mb(pid: int) -> float:
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return float("nan")


def start(args: list[str], env: dict[str, str], log: Path) -> subprocess.Popen[bytes]:
    with log.open("wb") as out:
        return subprocess.Popen([*CLI, *args], env=env, stdout=out, stderr=out)


def sample(engine: sa.Engine, since_ms: int, every_s: float) -> tuple[float, float, float, int]:
    with engine.connect() as c:
        lags = c.execute(
            sa.text(
                "SELECT percentile_cont(0.5) WITHIN GROUP (ORDER BY received_ms - ts_ms),"
                " max(received_ms - ts_ms) FROM readings WHERE received_ms >= :since"
            ),
            {"since": since_ms},
        ).one()
        behind = c.execute(
            sa.text(
                "SELECT max(d.last_reading_ms - p.done_ms), count(*) FILTER (WHERE"
                " p.done_ms IS NULL OR d.last_reading_ms - p.done_ms > :slack)"
                " FROM devices d LEFT JOIN alert_progress p USING (device_id)"
                " WHERE d.last_reading_ms IS NOT NULL"
            ),
            {"slack": int((every_s + 60) * 1000)},
        ).one()
    median, worst = (float(v) / 1000 if v is not None else float("nan") for v in lags)
    return median, worst, (behind[0] or 0) / 1000, int(behind[1] or 0)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--devices", type=int, default=10_000)
    parser.add_argument("--minutes", type=float, default=30.0)
    parser.add_argument("--history-h", type=float, default=2.0)
    parser.add_argument("--speed", type=float, default=60.0)
    parser.add_argument("--analyze-every", type=float, default=30.0)
    parser.add_argument("--every", type=float, default=30.0, help="seconds between lines")
    args = parser.parse_args()
    work = Path(tempfile.mkdtemp(prefix="tecfleet-scale-"))
    broker = Mosquitto(work / "mosquitto")
    broker.start()
    pg = Postgres()
    pg.start()
    procs: dict[str, subprocess.Popen[bytes]] = {}
    try:
        url = pg.create_database("fleet")
        engine = db.make_engine(url)
        db.migrate(engine)
        env = dict(os.environ, TECFLEET_DATABASE_URL=url, TECFLEET_MQTT_URL=broker.url)
        for k in (1, 2):
            procs[f"ingest-{k}"] = start(
                ["serve", "--roles", "ingest", "--client-id", f"ingest-{k}",
                 "--share-group", "fleet"], env, work / f"ingest-{k}.log",
            )  # fmt: skip
            procs[f"analytics-{k}"] = start(
                ["serve", "--roles", "analytics", "--analyze-every", str(args.analyze_every)],
                env,
                work / f"analytics-{k}.log",
            )
        time.sleep(5)  # the ingesters' sessions are in place before anything is published
        procs["simulate"] = start(
            ["simulate", "--mqtt", broker.url, "--devices", str(args.devices),
             "--days", str(args.history_h / 24), "--speed", str(args.speed), "--follow",
             "--seed", "301", "--batch", "1", "--client-id", "scale-sim"],
            env, work / "simulate.log",
        )  # fmt: skip
        print(
            f"{args.devices} devices, {args.history_h:g} h history at {args.speed:g}x then live;"
            f" 2 ingesters, 2 analysers; load average {os.getloadavg()[0]:.1f}; logs in {work}"
        )
        print(
            "   t [s]  readings  ingest lag med/max [s]  analysis lag max [s] (devices behind)"
            "  memory [MB] ingest-1 ingest-2 analytics-1 analytics-2 load"
        )
        started = time.monotonic()
        since = db.now_ms()
        while time.monotonic() - started < args.minutes * 60:
            time.sleep(args.every)
            now = db.now_ms()
            median, worst, behind_s, behind_n = sample(engine, since, args.analyze_every)
            since = now
            with engine.connect() as c:
                stored = c.execute(sa.text("SELECT count(*) FROM readings")).scalar_one()
            memory = "  ".join(
                f"{rss_mb(procs[name].pid):8.0f}"
                for name in ("ingest-1", "ingest-2", "analytics-1", "analytics-2")
            )
            print(
                f"{time.monotonic() - started:8.0f}  {stored:8d}  {median:10.1f} {worst:10.1f}"
                f"  {behind_s:14.0f} ({behind_n:6d})  {memory}  {os.getloadavg()[0]:5.1f}",
                flush=True,
            )
    finally:
        for process in procs.values():
            process.terminate()
        for process in procs.values():
            try:
                process.wait(60)
            except subprocess.TimeoutExpired:
                process.kill()
        broker.stop()
        pg.destroy()


if __name__ == "__main__":
    main()
