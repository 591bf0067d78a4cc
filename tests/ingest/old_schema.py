"""A database held at an older revision, for the migration tests: moved there by alembic,
and readings written into it. The service's writer keeps marks on the device row that an older
schema has no columns for, so these rows go in by plain SQL, each with only the fields it
carries."""

from __future__ import annotations

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import command
from alembic.config import Config

from tecfleet.ingest import db


def store_raw(engine: sa.Engine, readings: Sequence[db.Reading], received_ms: int = 1) -> int:
    """Insert ``readings`` (and a bare device row for each new device); returns how many."""
    with engine.begin() as c:
        known = set(c.execute(sa.text("SELECT device_id FROM devices")).scalars())
        for device_id in sorted({r.device_id for r in readings} - known):
            c.execute(
                sa.text("INSERT INTO devices (device_id, readings) VALUES (:d, 0)"),
                {"d": device_id},
            )
        for r in readings:
            values = {k: v for k, v in r._asdict().items() if v is not None}
            values["received_ms"] = received_ms
            names = ", ".join(values)
            marks = ", ".join(f":{k}" for k in values)
            c.execute(sa.text(f"INSERT INTO readings ({names}) VALUES ({marks})"), values)
    return len(readings)


def migrate_to(engine: sa.Engine, target: str, *, down: bool = False) -> None:
    """Upgrade (or downgrade) the database to revision ``target`` with alembic."""
    config = Config()
    config.set_main_option("script_location", "tecfleet.ingest:migrations")
    with engine.begin() as connection:
        config.attributes["connection"] = connection
        (command.downgrade if down else command.upgrade)(config, target)
