"""The command line: keys are printed once, alone on the first line."""

from __future__ import annotations

import os
import subprocess
import sys

import sqlalchemy as sa

from tecfleet.api.auth import authenticate
from tecfleet.ingest import db


def test_keys_create_prints_the_key_alone_on_the_first_line(sqlite_url: str) -> None:
    result = subprocess.run(
        [
            sys.executable,
            "-m",
            "tecfleet.api.cli",
            "keys",
            "create",
            "--name",
            "ops",
            "--scope",
            "write",
        ],
        env=dict(os.environ, TECFLEET_DATABASE_URL=sqlite_url),
        capture_output=True,
        text=True,
        check=True,
    )
    key = result.stdout.splitlines()[0]
    assert key == key.strip() and " " not in key and len(key) > 30
    engine = db.make_engine(sqlite_url)
    who = authenticate(engine, key)
    assert who is not None and who.scope == "write" and who.name == "ops"
    with engine.connect() as c:
        assert c.execute(sa.select(sa.func.count()).select_from(db.api_keys)).scalar_one() == 1


def test_bad_settings_give_a_clear_error(sqlite_url: str) -> None:
    result = subprocess.run(
        [sys.executable, "-m", "tecfleet.api.cli", "db", "upgrade"],
        env=dict(os.environ, TECFLEET_DATABASE_URL="mysql://nope"),
        capture_output=True,
        text=True,
    )
    assert result.returncode == 2 and "unsupported database" in result.stderr
    result = subprocess.run(
        [
            sys.executable,
            "-m",
            "tecfleet.api.cli",
            "keys",
            "create",
            "--name",
            "x",
            "--scope",
            "root",
            "--db",
            sqlite_url,
        ],
        capture_output=True,
        text=True,
    )
    assert result.returncode == 2 and "scope" in result.stderr
