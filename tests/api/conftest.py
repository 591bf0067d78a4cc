"""Shared fixtures of the API tests: a migrated database (SQLite, or PostgreSQL where the
suite runs against it; see ``tests/conftest.py``'s ``db_url``)."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
import sqlalchemy as sa

from tests.services import migrated


@pytest.fixture
def engine(db_url: str) -> Iterator[sa.Engine]:
    yield from migrated(db_url)
