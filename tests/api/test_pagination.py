"""Cursor pagination while a writer inserts rows (SQLite and PostgreSQL): every row stored
before the walk began is returned exactly once, and no row twice. Keyset pagination (the
cursor holds the last key of a page) gives this where an offset would skip or repeat rows as
rows are inserted before it (common practice, no source)."""

from __future__ import annotations

import threading
import time
from collections import Counter

import sqlalchemy as sa
from fastapi.testclient import TestClient

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading, Reject

T0 = 1_790_000_000_000
MIN = 60_000
BEFORE = 1500


def reading(device: str, minute: int) -> Reading:
    return Reading(device, T0 + minute * MIN, 5.0, 2.0, 30.0, 22.0, 3.0, 8.0, seq=minute)


class Writer(threading.Thread):
    """Inserts rows in small batches until stopped: readings later than, and between, those
    stored before (a backlog arriving late), new devices, and rejects."""

    def __init__(self, engine: sa.Engine) -> None:
        super().__init__(daemon=True)
        self.engine = engine
        self.stop = threading.Event()
        self.batches = 0

    def run(self) -> None:
        k = 0
        while not self.stop.is_set():
            rows = [reading("cab-p", 2 * BEFORE + k), reading("cab-p", 2 * (k % BEFORE) + 1)]
            rows.append(reading(f"cab-new-{k:05d}", 0))
            rejects = [Reject("tecfleet/x/telemetry", b"{", "invalid_json", "not JSON", "x")]
            db.store_batch(self.engine, rows, rejects)
            self.batches += 1
            k += 1
            time.sleep(0.002)


def walk(client: TestClient, path: str, key: str, headers: dict[str, str]) -> list[object]:
    seen: list[object] = []
    cursor = None
    while True:
        params = {"limit": 37} | ({"cursor": cursor} if cursor else {})
        page = client.get(path, params=params, headers=headers).json()
        seen += [item[key] for item in page["items"]]
        cursor = page["next_cursor"]
        if cursor is None:
            return seen


def test_every_row_once_while_rows_are_inserted(engine: sa.Engine) -> None:
    # Readings at even minutes, a fleet of devices, and rejects, all stored before the walk.
    db.store_batch(engine, [reading("cab-p", 2 * m) for m in range(BEFORE)])
    db.store_batch(engine, [reading(f"cab-{d:04d}", 0) for d in range(300)])
    db.store_batch(engine, [], [Reject("t", b"x", "invalid_json", "not JSON")] * 200)
    with engine.connect() as conn:
        reject_ids = set(conn.execute(sa.select(db.rejects.c.id)).scalars())
    client = TestClient(create_app(engine))
    headers = {"Authorization": f"Bearer {create_key(engine, 'r', 'read')}"}
    writer = Writer(engine)
    writer.start()
    try:
        readings = walk(client, "/v1/devices/cab-p/readings", "seq", headers)
        devices = walk(client, "/v1/devices", "device_id", headers)
        rejects = walk(client, "/v1/rejects", "id", headers)
    finally:
        writer.stop.set()
        writer.join(10)
    assert writer.batches >= 5  # the walks ran while rows went in
    for seen, before in (
        (readings, {2 * m for m in range(BEFORE)}),
        (devices, {f"cab-{d:04d}" for d in range(300)} | {"cab-p"}),
        (rejects, reject_ids),
    ):
        counts = Counter(seen)
        assert max(counts.values()) == 1  # no row twice
        assert before <= set(counts)  # every row stored before the walk, once
