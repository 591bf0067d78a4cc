from __future__ import annotations

import uuid
from collections.abc import Iterator
from pathlib import Path

import pytest

from tests.services import Mosquitto, Postgres


@pytest.fixture(scope="session")
def postgres() -> Iterator[Postgres]:
    server = Postgres()
    server.start()
    yield server
    server.destroy()


@pytest.fixture
def pg_url(postgres: Postgres) -> str:
    return postgres.create_database(f"t_{uuid.uuid4().hex[:12]}")


@pytest.fixture
def sqlite_url(tmp_path: Path) -> str:
    return f"sqlite:///{tmp_path / 'tecfleet.db'}"


@pytest.fixture(params=["sqlite", "postgresql"])
def db_url(request: pytest.FixtureRequest, tmp_path: Path) -> str:
    if request.param == "sqlite":
        return f"sqlite:///{tmp_path / 'tecfleet.db'}"
    server: Postgres = request.getfixturevalue("postgres")
    return server.create_database(f"t_{uuid.uuid4().hex[:12]}")


@pytest.fixture
def mosquitto(tmp_path: Path) -> Iterator[Mosquitto]:
    broker = Mosquitto(tmp_path / "mosquitto")
    broker.start()
    yield broker
    broker.stop()
