"""Fixtures of the alert tests."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
import sqlalchemy as sa

from tecfleet.ingest import db


@pytest.fixture
def engine(sqlite_url: str) -> Iterator[sa.Engine]:
    e = db.make_engine(sqlite_url)
    db.migrate(e)
    yield e
    e.dispose()
