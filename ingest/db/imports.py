"""What an import of a log file needs to know about earlier imports of the same file."""

from __future__ import annotations

import sqlalchemy as sa
from sqlalchemy.engine import Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.ingest.db.tables import rejects
from tecfleet.ingest.errors import StoreError


def rejects_kept_for(engine: Engine, topic: str) -> int:
    """How many rejects are stored under ``topic`` (an import names its file's content there)."""
    stmt = sa.select(sa.func.count()).select_from(rejects).where(rejects.c.topic == topic)
    try:
        with engine.connect() as connection:
            return int(connection.execute(stmt).scalar_one())
    except SQLAlchemyError as exc:
        raise StoreError(f"could not read rejects: {exc}") from exc
