"""Ingest throughput on Debian's mosquitto, SQLite and PostgreSQL. Prints figures.

    python tests/bench/bench_ingest.py [--singles 20000] [--batches 1000]

Each stream is queued at the broker for a persistent session first, then the consumer connects
and drains it, so every figure is "broker -> consumer", independent of the publisher's speed:
- a bare paho subscriber that only counts (QoS 1, acknowledging each message);
- the tecfleet ingester, timed until the last reading is committed;
- raw sqlite3 / psycopg executemany of the same rows into the same schema (1000 rows a commit).

On a shared machine every figure is the best of ``--repeat`` runs, taken in turn, so a burst of
someone else's load does not land on one side of a ratio only.
"""

from __future__ import annotations

import argparse
import itertools
import sqlite3
import sys
import tempfile
import threading
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import orjson
import paho.mqtt.client as mqtt
from paho.mqtt.enums import CallbackAPIVersion

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tecfleet.ingest import db
from tecfleet.ingest.ingester import Ingester
from tecfleet.ingest.settings import load_settings
from tests.services import Mosquitto, Postgres

BASE = 1_700_000_000.0


def rows(n: int, devices: int = 50) -> list[dict[str, Any]]:
    return [
        {
            "ts": BASE + 60 * (i // devices),
            "seq": i // devices,
            "t_cabinet": 4.0 + (i % 10) * 0.1,
            "t_cold": -3.0,
            "t_hot": 31.0,
            "t_ambient": 22.0,
            "current": 3.1,
            "voltage": 8.2,
            "device": f"bench-{i % devices}",
        }
        for i in range(n)
    ]


def queue_stream(url_port: int, client_id: str, messages: list[tuple[str, bytes]]) -> None:
    """Create a persistent session subscribed to telemetry, then publish while it is away."""
    sub = mqtt.Client(
        callback_api_version=CallbackAPIVersion.VERSION2,
        client_id=client_id,
        protocol=mqtt.MQTTv311,
        clean_session=False,
    )
    sub.connect("127.0.0.1", url_port)
    sub.loop_start()
    sub.subscribe("tecfleet/+/telemetry", qos=1)[1]
    time.sleep(0.5)
    sub.disconnect()
    sub.loop_stop()
    pub = mqtt.Client(callback_api_version=CallbackAPIVersion.VERSION2, protocol=mqtt.MQTTv311)
    pub.max_inflight_messages_set(1000)
    pub.connect("127.0.0.1", url_port)
    pub.loop_start()
    infos = [pub.publish(topic, payload, qos=1) for topic, payload in messages]
    for info in infos:
        info.wait_for_publish(120)
    pub.disconnect()
    pub.loop_stop()


def bare_rate(port: int, messages: list[tuple[str, bytes]]) -> float:
    queue_stream(port, "bench-bare", messages)
    done = threading.Event()
    count = 0
    first: list[float] = []

    def on_message(_c: Any, _u: Any, _m: Any) -> None:
        nonlocal count
        if not first:
            first.append(time.perf_counter())
        count += 1
        if count == len(messages):
            done.set()

    sub = mqtt.Client(
        callback_api_version=CallbackAPIVersion.VERSION2,
        client_id="bench-bare",
        protocol=mqtt.MQTTv311,
        clean_session=False,
    )
    sub.on_message = on_message
    start = time.perf_counter()
    sub.connect("127.0.0.1", port)
    sub.loop_start()
    done.wait(300)
    elapsed = time.perf_counter() - start
    sub.disconnect()
    sub.loop_stop()
    return count / elapsed


def ingester_rate(port: int, db_url: str, messages: list[tuple[str, bytes]], n_rows: int) -> float:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    settings = load_settings(
        {
            "database_url": db_url,
            "mqtt_url": f"mqtt://127.0.0.1:{port}",
            "mqtt_client_id": "bench-ingester",
            "mqtt_protocol": "3.1.1",
        },
        env={},
    )
    queue_stream(port, "bench-ingester", messages)
    ingester = Ingester(settings, engine)
    start = time.perf_counter()
    ingester.start()
    import sqlalchemy as sa

    while True:
        with engine.connect() as c:
            stored = c.execute(sa.select(sa.func.count()).select_from(db.readings)).scalar_one()
        if stored >= n_rows or time.perf_counter() - start > 600:
            break
        time.sleep(0.02)
    elapsed = time.perf_counter() - start
    ingester.stop()
    engine.dispose()
    return stored / elapsed


def _prepare(url: str, data: list[dict[str, Any]]) -> list[tuple[Any, ...]]:
    """Create the schema and the devices, and return the rows as driver tuples."""
    engine = db.make_engine(url)
    db.migrate(engine)
    with engine.begin() as c:
        c.execute(
            db.devices.insert(),
            [{"device_id": d, "readings": 0} for d in sorted({r["device"] for r in data})],
        )
    engine.dispose()
    return [
        (r["device"], int(r["ts"] * 1000), r["seq"], r["t_cabinet"], r["t_cold"], r["t_hot"],
         r["t_ambient"], r["current"], r["voltage"], 0)
        for r in data
    ]  # fmt: skip


_RAW_INSERT = (
    "INSERT INTO readings (device_id, ts_ms, seq, t_cabinet, t_cold, t_hot, t_ambient,"
    " current, voltage, received_ms) VALUES ({m},{m},{m},{m},{m},{m},{m},{m},{m},{m})"
)


def _time_inserts(connection: Any, sql: str, tuples: list[tuple[Any, ...]]) -> float:
    start = time.perf_counter()
    for i in range(0, len(tuples), 1000):
        connection.cursor().executemany(sql, tuples[i : i + 1000])
        connection.commit()
    return len(tuples) / (time.perf_counter() - start)


def raw_sqlite_rate(path: Path, data: list[dict[str, Any]]) -> float:
    tuples = _prepare(f"sqlite:///{path}", data)
    connection = sqlite3.connect(path)
    connection.execute("PRAGMA journal_mode=WAL")
    connection.execute("PRAGMA synchronous=FULL")
    try:
        return _time_inserts(connection, _RAW_INSERT.format(m="?"), tuples)
    finally:
        connection.close()


def raw_pg_rate(url: str, data: list[dict[str, Any]]) -> float:
    import psycopg

    tuples = _prepare(url, data)
    with psycopg.connect(url.replace("postgresql+psycopg://", "postgresql://")) as connection:
        return _time_inserts(connection, _RAW_INSERT.format(m="%s"), tuples)


def single_messages(data: list[dict[str, Any]]) -> list[tuple[str, bytes]]:
    out = []
    for r in data:
        body = {k: v for k, v in r.items() if k != "device"}
        out.append((f"tecfleet/{r['device']}/telemetry", orjson.dumps(body)))
    return out


def batch_messages(data: list[dict[str, Any]], size: int = 50) -> list[tuple[str, bytes]]:
    by_device: dict[str, list[dict[str, Any]]] = {}
    for r in data:
        by_device.setdefault(r["device"], []).append({k: v for k, v in r.items() if k != "device"})
    out = []
    for device, items in by_device.items():
        for i in range(0, len(items), size):
            out.append((f"tecfleet/{device}/telemetry", orjson.dumps(items[i : i + size])))
    return out


def best_of(repeat: int, measure: Callable[[], float]) -> float:
    return max(measure() for _ in range(repeat))


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--singles", type=int, default=20_000)
    parser.add_argument("--batch-rows", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=3, help="best of this many runs")
    parser.add_argument(
        "--databases", default="sqlite,postgresql", help="comma-separated: sqlite, postgresql"
    )
    args = parser.parse_args()
    work = Path(tempfile.mkdtemp(prefix="tecfleet-bench-"))
    broker = Mosquitto(work / "mosquitto")
    broker.start()
    pg = Postgres()
    pg.start()
    try:
        singles = single_messages(rows(args.singles))
        batch_data = rows(args.batch_rows)
        batches = batch_messages(batch_data)
        n = args.repeat
        tags = itertools.count()  # a fresh database for every run
        bare = best_of(n, lambda: bare_rate(broker.port, singles))
        print(f"bare paho subscriber, QoS 1 singles     : {bare:10.0f} msg/s")
        results = []
        for name, url_for in (
            ("sqlite", lambda tag: f"sqlite:///{work / (tag + '.db')}"),
            ("postgresql", lambda tag: pg.create_database(tag)),
        ):
            if name not in args.databases.split(","):
                continue

            def fresh(kind: str, url_for: Any = url_for) -> str:
                return str(url_for(f"{kind}{next(tags)}"))

            e2e_single = best_of(
                n, lambda: ingester_rate(broker.port, fresh("single"), singles, args.singles)
            )
            e2e_batch = best_of(
                n, lambda: ingester_rate(broker.port, fresh("batch"), batches, args.batch_rows)
            )
            if name == "sqlite":
                raw = best_of(n, lambda: raw_sqlite_rate(work / f"raw{next(tags)}.db", batch_data))
            else:
                raw = best_of(n, lambda: raw_pg_rate(fresh("raw"), batch_data))
            results.append((name, e2e_single, e2e_batch, raw))
            print(
                f"[{name}] ingester, one-reading messages  : {e2e_single:10.0f} readings/s "
                f"({100 * e2e_single / bare:.0f}% of bare subscriber)"
            )
            print(
                f"[{name}] ingester, 50-reading messages   : {e2e_batch:10.0f} readings/s "
                f"({100 * e2e_batch / raw:.0f}% of raw executemany {raw:.0f} rows/s)"
            )
    finally:
        broker.stop()
        pg.destroy()


if __name__ == "__main__":
    main()
