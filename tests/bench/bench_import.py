"""Import throughput against the batched MQTT path, on SQLite and PostgreSQL. Prints figures.

    python tests/bench/bench_import.py [--rows 100000]

The same readings (one device, one a minute) go in twice: as a CSV file through
``tecfleet.ingest.importer.import_file`` (parse, the MQTT validation, the ingester's batch
write), and as 50-reading MQTT messages queued at Debian's mosquitto for the real ingester
(``bench_ingest.ingester_rate``). The target is an import at least half as fast as the
ingester.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_ingest import batch_messages, ingester_rate

from tecfleet.ingest import db
from tecfleet.ingest.importer import import_file
from tecfleet.ingest.settings import load_settings
from tests.services import Mosquitto, Postgres

BASE = 1_700_000_000.0
FIELDS = ("ts", "seq", "t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage")


def readings(n: int) -> list[dict[str, Any]]:
    return [
        {
            "ts": BASE + 60 * i,
            "seq": i,
            "t_cabinet": 4.0 + (i % 10) * 0.1,
            "t_cold": -3.0,
            "t_hot": 31.0,
            "t_ambient": 22.0,
            "current": 3.1,
            "voltage": 8.2,
            "device": "bench-import",
        }
        for i in range(n)
    ]


def write_csv(path: Path, data: list[dict[str, Any]]) -> None:
    lines = [",".join(FIELDS)]
    lines += [",".join(str(r[f]) for f in FIELDS) for r in data]
    path.write_text("\n".join(lines) + "\n")


def import_rate(db_url: str, path: Path, n: int) -> float:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    settings = load_settings({"database_url": db_url}, env={})
    start = time.perf_counter()
    report = import_file(engine, settings, "bench-import", path)
    elapsed = time.perf_counter() - start
    assert report.stored == n, report
    engine.dispose()
    return n / elapsed


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=100_000)
    args = parser.parse_args()
    work = Path(tempfile.mkdtemp(prefix="tecfleet-bench-import-"))
    data = readings(args.rows)
    csv_path = work / "readings.csv"
    write_csv(csv_path, data)
    broker = Mosquitto(work / "mosquitto")
    broker.start()
    pg = Postgres()
    pg.start()
    try:
        for name, url_for in (
            ("sqlite", lambda tag: f"sqlite:///{work / (tag + '.db')}"),
            ("postgresql", lambda tag: pg.create_database(tag)),
        ):
            imported = import_rate(url_for("imported"), csv_path, args.rows)
            mqtt = ingester_rate(broker.port, url_for("mqtt"), batch_messages(data), args.rows)
            print(
                f"[{name}] import of a CSV file      : {imported:10.0f} readings/s "
                f"({100 * imported / mqtt:.0f}% of the batched MQTT path)"
            )
            print(f"[{name}] ingester, 50-reading msgs : {mqtt:10.0f} readings/s")
    finally:
        broker.stop()
        pg.destroy()


if __name__ == "__main__":
    main()
