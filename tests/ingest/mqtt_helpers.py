"""Publishing and waiting helpers shared by the end-to-end ingest tests."""

from __future__ import annotations

import json
import time
import uuid
from collections.abc import Callable
from typing import Any

import paho.mqtt.client as mqtt
import sqlalchemy as sa
from paho.mqtt.enums import CallbackAPIVersion
from sqlalchemy.engine import Engine

from tecfleet.ingest import db
from tecfleet.ingest.ingester import Ingester
from tecfleet.ingest.settings import Settings, load_settings

BASE_TS = 1_790_000_000.0


def reading(i: int, **changes: Any) -> dict[str, Any]:
    item: dict[str, Any] = {
        "ts": BASE_TS + 60 * i,
        "seq": i,
        "t_cabinet": 4.0 + (i % 7) * 0.1,
        "t_cold": -3.0,
        "t_hot": 31.0 + (i % 5) * 0.2,
        "t_ambient": 22.0,
        "current": 3.0 + (i % 3) * 0.1,
        "voltage": 8.0,
    }
    item.update(changes)
    return item


def senml(i: int) -> list[dict[str, Any]]:
    r = reading(i)
    pack: list[dict[str, Any]] = [
        {"bt": r["ts"], "n": "t_cabinet", "u": "Cel", "v": r["t_cabinet"]}
    ]
    for name, unit in (
        ("t_cold", "Cel"),
        ("t_hot", "Cel"),
        ("t_ambient", "Cel"),
        ("current", "A"),
        ("voltage", "V"),
    ):
        pack.append({"n": name, "u": unit, "v": r[name]})
    return pack


class Publisher:
    """A paho QoS 1 publisher that waits for every PUBACK."""

    def __init__(self, url: str) -> None:
        settings = load_settings({"mqtt_url": url}, env={})
        self.client = mqtt.Client(
            callback_api_version=CallbackAPIVersion.VERSION2,
            client_id=f"pub-{uuid.uuid4().hex[:8]}",
            protocol=mqtt.MQTTv311,
        )
        self.client.max_inflight_messages_set(100)
        self.client.connect(settings.mqtt_host, settings.mqtt_port)
        self.client.loop_start()
        self.pending: list[mqtt.MQTTMessageInfo] = []

    def publish(self, topic: str, payload: Any, qos: int = 1, retain: bool = False) -> None:
        raw = payload if isinstance(payload, bytes) else json.dumps(payload).encode()
        self.pending.append(self.client.publish(topic, raw, qos=qos, retain=retain))

    def flush(self, timeout_s: float = 60.0) -> None:
        for info in self.pending:
            info.wait_for_publish(timeout_s)
        self.pending.clear()

    def close(self) -> None:
        self.flush()
        self.client.disconnect()
        self.client.loop_stop()


def start_ingester(
    db_url: str, mqtt_url: str, client_id: str = "tecfleet-test", **extra: Any
) -> tuple[Ingester, Engine, Settings]:
    settings = load_settings(
        {"database_url": db_url, "mqtt_url": mqtt_url, "mqtt_client_id": client_id, **extra}, env={}
    )
    engine = db.make_engine(db_url)
    db.migrate(engine)
    ingester = Ingester(settings, engine)
    ingester.start()
    assert ingester.ready.wait(20), "ingester did not subscribe"
    return ingester, engine, settings


def count_readings(engine: Engine, device_id: str | None = None) -> int:
    stmt = sa.select(sa.func.count()).select_from(db.readings)
    if device_id:
        stmt = stmt.where(db.readings.c.device_id == device_id)
    with engine.connect() as connection:
        return int(connection.execute(stmt).scalar_one())


def wait_for(predicate: Callable[[], bool], timeout_s: float = 60.0, every_s: float = 0.1) -> bool:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if predicate():
            return True
        time.sleep(every_s)
    return predicate()


def table_snapshot(engine: Engine) -> list[tuple[Any, ...]]:
    """Readings as stored, without the columns that depend on arrival (id, received time)."""
    columns = [c for c in db.readings.c if c.name not in ("id", "received_ms")]
    stmt = sa.select(*columns).order_by(db.readings.c.device_id, db.readings.c.ts_ms)
    with engine.connect() as connection:
        return [tuple(row) for row in connection.execute(stmt)]
