"""A small populated fleet for the API's checks, and a real uvicorn server around an app.

Two sites: ``North`` with ``cab-n1`` (a cabinet that leaves its band: an excursion alert) and
``South`` with ``cab-s1`` (in band). A webhook, a calibration offset, a maintenance window and
keys of every kind complete what the routes can name.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass

import sqlalchemy as sa
import uvicorn
from fastapi import FastAPI

from tecfleet.analytics import alerts
from tecfleet.api.auth import Principal, create_key_with_id
from tecfleet.api.schemas import DeviceIn
from tecfleet.api.schemas.calibration import OffsetIn
from tecfleet.api.services import calibration, webhooks
from tecfleet.api.services.devices import register_device
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tests.services import free_port, wait_port

T0 = 1_790_000_000_000
MIN = 60_000


@dataclass(frozen=True)
class Fleet:
    """What the populated fleet holds: ids the routes can name, and keys by role."""

    alert_id: int
    webhook_id: int
    offset_id: int
    key_id: int
    keys: dict[str, str]


def _cabinet(device: str, warm_after: int | None, n: int = 140) -> list[Reading]:
    """``n`` minutes of readings; the cabinet at 10 °C (out of a 2-8 °C band) from minute
    ``warm_after`` on, at 5 °C before."""
    return [
        Reading(
            device,
            T0 + i * MIN,
            (10.0 if warm_after is not None and i >= warm_after else 5.0) + 0.1 * (i % 2),
            2.0 + 0.1 * (i % 3),
            30.0 + 0.1 * (i % 4),
            22.0 + 0.1 * (i % 5),
            3.0,
            8.0,
            seq=i,
        )
        for i in range(n)
    ]


def populate(engine: sa.Engine) -> Fleet:
    cabinet = {"setpoint_c": 5, "low_limit_c": 2, "high_limit_c": 8}
    for device, site in (("cab-n1", "North"), ("cab-s1", "South")):
        register_device(engine, device, DeviceIn.model_validate({"site": site, "cabinet": cabinet}))
    db.store_batch(engine, _cabinet("cab-n1", warm_after=20) + _cabinet("cab-s1", None))
    alerts.evaluate(engine)
    with engine.connect() as conn:
        alert_id = conn.execute(
            sa.select(db.alerts.c.id).where(db.alerts.c.device_id == "cab-n1")
        ).scalar_one()
    keys: dict[str, str] = {}
    key_ids: dict[str, int] = {}
    for role, scope, sites in (
        ("read", "read", None),
        ("write", "write", None),
        ("admin", "admin", None),
        ("south_admin", "admin", ["South"]),
        ("revoked", "admin", None),
    ):
        keys[role], key_ids[role] = create_key_with_id(engine, role, scope, sites=sites)
    with engine.begin() as conn:
        conn.execute(
            db.api_keys.update().where(db.api_keys.c.id == key_ids["revoked"]).values(revoked_ms=T0)
        )
    hook = webhooks.create_webhook(engine, "http://127.0.0.1:9/hook", allow_private=True)
    admin = Principal(key_ids["admin"], "admin", "admin")
    offset = calibration.add_offset(
        engine,
        admin,
        "cab-n1",
        OffsetIn(sensor="t_cabinet", offset=-0.2, valid_from="2026-09-21T14:00:00Z"),
        T0,
        None,
    )
    return Fleet(alert_id, hook.id, offset.id, key_ids["read"], keys)


@contextmanager
def served(app: FastAPI) -> Iterator[str]:
    """``app`` on a real uvicorn server on loopback; yields its base URL."""
    port = free_port()
    server = uvicorn.Server(
        uvicorn.Config(app, host="127.0.0.1", port=port, log_level="warning", lifespan="off")
    )
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    wait_port(port)
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        server.should_exit = True
        thread.join(10)
        time.sleep(0)
