"""Fixtures of the alert tests."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
import sqlalchemy as sa

from tests.services import migrated


@pytest.fixture
def engine(sqlite_url: str) -> Iterator[sa.Engine]:
    yield from migrated(sqlite_url)
