"""Alembic environment: runs on the connection handed over by ``db.migrate``."""

from __future__ import annotations

from alembic import context

from tecfleet.ingest.db import metadata

connection = context.config.attributes.get("connection")
if connection is None:
    raise RuntimeError(
        "run migrations through `tecfleet db upgrade`, which supplies the connection"
    )

context.configure(
    connection=connection,
    target_metadata=metadata,
    render_as_batch=connection.dialect.name == "sqlite",
)
with context.begin_transaction():
    context.run_migrations()
