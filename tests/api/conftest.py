"""Shared fixtures of the API tests: a migrated database (SQLite, or PostgreSQL where the
suite runs against it; see ``tests/conftest.py``'s ``db_url``)."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
import sqlalchemy as sa

from tecfleet.ingest import db


@pytest.fixture
def engine(db_url: str) -> Iterator[sa.Engine]:
    e = db.make_engine(db_url)
    db.migrate(e)
    yield e
    e.dispose()
