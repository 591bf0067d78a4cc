"""End to end through real brokers into real databases: exactly once, rejects kept."""

from __future__ import annotations

import random

import sqlalchemy as sa

from tecfleet.ingest import db
from tecfleet.ingest.embedded_broker import EmbeddedBroker
from tests.ingest.mqtt_helpers import (
    Publisher,
    count_readings,
    reading,
    senml,
    start_ingester,
    table_snapshot,
    wait_for,
)
from tests.services import Mosquitto


def test_singles_batches_senml_and_redeliveries_store_exactly_n(
    mosquitto: Mosquitto, db_url: str
) -> None:
    ingester, engine, _ = start_ingester(db_url, mosquitto.url)
    assert ingester.protocol == 5  # Debian's mosquitto 2 speaks MQTT 5
    pub = Publisher(mosquitto.url)
    try:
        n_single, n_batch, n_senml = 300, 500, 100
        for i in range(n_single):
            pub.publish("tecfleet/cab-a/telemetry", reading(i))
        batch = [reading(i) for i in range(n_batch)]
        for start in range(0, n_batch, 50):
            pub.publish("tecfleet/cab-b/telemetry", batch[start : start + 50])
        for i in range(n_senml):
            pub.publish("tecfleet/cab-c/telemetry", senml(i))
        # Redeliveries: the same readings again, as a device would after a lost PUBACK.
        for i in range(0, n_single, 3):
            pub.publish("tecfleet/cab-a/telemetry", reading(i))
        pub.publish("tecfleet/cab-b/telemetry", batch[:50])
        pub.flush()
        total = n_single + n_batch + n_senml
        assert wait_for(lambda: count_readings(engine) >= total, 60)
        assert wait_for(lambda: ingester.backlog() == 0, 10)
        assert count_readings(engine, "cab-a") == n_single
        assert count_readings(engine, "cab-b") == n_batch
        assert count_readings(engine, "cab-c") == n_senml
        with engine.connect() as c:
            rows = {r.device_id: r for r in c.execute(sa.select(db.devices))}
        assert rows["cab-b"].readings == n_batch
        assert rows["cab-a"].last_reading_ms == round(reading(n_single - 1)["ts"] * 1000)
    finally:
        pub.close()
        ingester.stop()


def test_bad_input_lands_in_rejects_beside_good_readings(mosquitto: Mosquitto, db_url: str) -> None:
    ingester, engine, _ = start_ingester(db_url, mosquitto.url)
    pub = Publisher(mosquitto.url)
    try:
        pub.publish("tecfleet/cab-r/telemetry", [reading(0), reading(1, current=99.0), reading(2)])
        pub.publish("tecfleet/cab-r/telemetry", b"\x00\xff garbage")
        pub.publish("tecfleet/cab-r/telemetry", b'{"ts": 1}')
        pub.publish("tecfleet/bad$id/telemetry", reading(3))
        pub.publish("tecfleet/cab-r/telemetry", reading(4, ts=4_000_000_000))
        pub.flush()
        assert wait_for(lambda: _reject_codes(engine) >= 5, 30)
        assert count_readings(engine, "cab-r") == 2
        with engine.connect() as c:
            codes = sorted(r.code for r in c.execute(sa.select(db.rejects)))
        assert codes == sorted(
            ["out_of_range", "not_utf8", "missing_field", "bad_device_id", "future_timestamp"]
        )
    finally:
        pub.close()
        ingester.stop()


def _reject_codes(engine: sa.Engine) -> int:
    with engine.connect() as c:
        return int(c.execute(sa.select(sa.func.count()).select_from(db.rejects)).scalar_one())


def test_replayed_twice_and_shuffled_gives_the_identical_table(
    mosquitto: Mosquitto, db_url: str, tmp_path: object
) -> None:
    items = [reading(i) for i in range(400)]
    ingester, engine, _ = start_ingester(db_url, mosquitto.url)
    pub = Publisher(mosquitto.url)
    try:
        for i in range(0, 400, 20):
            pub.publish("tecfleet/cab-s/telemetry", items[i : i + 20])
        pub.flush()
        assert wait_for(lambda: count_readings(engine) == 400, 30)
        first = table_snapshot(engine)
        rng = random.Random(11)
        for _ in range(2):
            shuffled = items[:]
            rng.shuffle(shuffled)
            for i in range(0, 400, 7):
                pub.publish("tecfleet/cab-s/telemetry", shuffled[i : i + 7])
        pub.publish("tecfleet/cab-s/telemetry", reading(999))
        pub.flush()
        assert wait_for(lambda: count_readings(engine) == 401, 30)
        assert [
            row for row in table_snapshot(engine) if row[1] != round(reading(999)["ts"] * 1000)
        ] == first
    finally:
        pub.close()
        ingester.stop()


def test_embedded_broker_end_to_end(sqlite_url: str) -> None:
    broker = EmbeddedBroker()
    broker.start()
    try:
        ingester, engine, _ = start_ingester(sqlite_url, broker.url)
        assert ingester.protocol == 4  # the embedded broker speaks MQTT 3.1.1 only
        pub = Publisher(broker.url)
        for i in range(200):
            pub.publish("tecfleet/demo-1/telemetry", reading(i))
        pub.publish("tecfleet/demo-1/telemetry", [reading(i) for i in range(200, 300)])
        pub.publish("tecfleet/demo-1/status", b"online", retain=True)
        pub.close()
        assert wait_for(lambda: count_readings(engine) == 300, 30)
        with engine.connect() as c:
            status = c.execute(sa.select(db.devices.c.status)).scalar_one()
        assert wait_for(lambda: status == "online" or _status(engine) == "online", 10)
        ingester.stop()
    finally:
        broker.stop()


def _status(engine: sa.Engine) -> str | None:
    with engine.connect() as c:
        return c.execute(sa.select(db.devices.c.status)).scalar_one()
