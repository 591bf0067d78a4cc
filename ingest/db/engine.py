"""Engines, migrations and the one place that knows the drivers' placeholder style.

SQLite runs in WAL mode with ``synchronous=FULL``: in WAL mode ``NORMAL`` may lose the last
transactions on power failure, and the ingester acknowledges a message to the broker only after
its commit, so a commit has to survive a power cut. FULL costs one fsync per commit, which the
batching writer amortises over hundreds of readings.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import Any

import sqlalchemy as sa
from sqlalchemy import event
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.ingest.errors import StoreError


def now_ms() -> int:
    return time.time_ns() // 1_000_000


def _sqlite_pragmas(dbapi_connection: Any, _record: Any) -> None:
    cursor = dbapi_connection.cursor()
    cursor.execute("PRAGMA journal_mode=WAL")
    cursor.execute("PRAGMA synchronous=FULL")
    cursor.execute("PRAGMA foreign_keys=ON")
    cursor.execute("PRAGMA busy_timeout=10000")
    cursor.close()


def make_engine(url: str) -> Engine:
    """An engine for ``url`` (SQLAlchemy URL), with SQLite set to WAL and durable commits."""
    try:
        sa_url = sa.make_url(url)
    except Exception as exc:  # SQLAlchemy raises ArgumentError for garbage
        raise StoreError(f"invalid database URL {url!r}: {exc}") from exc
    if sa_url.get_backend_name() == "sqlite":
        database = sa_url.database or ""
        if database and database != ":memory:":
            Path(database).expanduser().resolve().parent.mkdir(parents=True, exist_ok=True)
        engine = sa.create_engine(sa_url, connect_args={"check_same_thread": False})
        event.listen(engine, "connect", _sqlite_pragmas)
        return engine
    if sa_url.get_backend_name() == "postgresql":
        return sa.create_engine(sa_url, pool_pre_ping=True, connect_args={"connect_timeout": 5})
    raise StoreError(
        f"unsupported database {sa_url.get_backend_name()!r}; use sqlite or postgresql"
    )


def migrate(engine: Engine) -> None:
    """Apply every Alembic migration not yet applied (``tecfleet db upgrade``)."""
    from alembic import command
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", "tecfleet.ingest:migrations")
    try:
        with engine.begin() as connection:
            config.attributes["connection"] = connection
            command.upgrade(config, "head")
    except SQLAlchemyError as exc:
        raise StoreError(f"database migration failed: {exc}") from exc


def ping(engine: Engine) -> bool:
    """True when the database answers a trivial query."""
    try:
        with engine.connect() as connection:
            connection.execute(sa.text("SELECT 1"))
        return True
    except SQLAlchemyError:
        return False


def marker(connection: Connection) -> str:
    """The driver's positional placeholder (``?`` for sqlite3, ``%s`` for psycopg), for the
    plain SQL that goes straight to the driver where SQLAlchemy's row handling costs too much."""
    return "?" if connection.dialect.paramstyle == "qmark" else "%s"
