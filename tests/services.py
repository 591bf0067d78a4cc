"""Real services for the tests: Debian's mosquitto, a throwaway PostgreSQL cluster, the
embedded broker. A missing service skips its tests on a developer machine and fails them when
TECFLEET_REQUIRE_SERVICES=1 (set by .ci/run)."""

from __future__ import annotations

import contextlib
import getpass
import glob
import os
import shutil
import socket
import subprocess
import tempfile
import time
from collections.abc import Iterator
from pathlib import Path

import pytest
import sqlalchemy as sa

from tecfleet.ingest import db

REPO = Path(__file__).resolve().parents[1]


def require_services() -> bool:
    return os.environ.get("TECFLEET_REQUIRE_SERVICES") == "1"


def unavailable(what: str) -> None:
    if require_services():
        pytest.fail(f"{what} is not available but TECFLEET_REQUIRE_SERVICES=1")
    pytest.skip(f"{what} is not available")


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def wait_port(port: int, timeout_s: float = 15.0) -> None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        try:
            with socket.create_connection(("127.0.0.1", port), timeout=0.5):
                return
        except OSError:
            time.sleep(0.05)
    raise TimeoutError(f"nothing listening on port {port}")


class Mosquitto:
    """Debian's mosquitto with the shipped deploy config, on a free loopback port."""

    def __init__(self, workdir: Path) -> None:
        binary = shutil.which("mosquitto") or (
            "/usr/sbin/mosquitto" if os.path.exists("/usr/sbin/mosquitto") else None
        )
        if binary is None:
            unavailable("mosquitto (Debian package mosquitto)")
        self.binary = str(binary)
        self.port = free_port()
        self.workdir = workdir
        (workdir / "data").mkdir(parents=True, exist_ok=True)
        lines = []
        for line in (REPO / "deploy" / "mosquitto.conf").read_text().splitlines():
            if line.startswith(("listener ", "persistence_location ")):
                continue
            lines.append(line)
        lines += [
            f"listener {self.port} 127.0.0.1",
            f"persistence_location {workdir / 'data'}/",
            f"user {getpass.getuser()}",
            "log_type error",
            "log_type warning",
        ]
        self.config = workdir / "mosquitto.conf"
        self.config.write_text("\n".join(lines) + "\n")
        self.process: subprocess.Popen[bytes] | None = None

    @property
    def url(self) -> str:
        return f"mqtt://127.0.0.1:{self.port}"

    def start(self) -> None:
        # The broker holds its own copy of the log's descriptor; ours is closed at once.
        with open(self.workdir / "mosquitto.log", "ab") as log:
            self.process = subprocess.Popen(
                [self.binary, "-c", str(self.config)], stdout=log, stderr=log
            )
        wait_port(self.port)

    def stop(self) -> None:
        if self.process is not None:
            self.process.terminate()
            self.process.wait(10)
            self.process = None


class Postgres:
    """A throwaway PostgreSQL cluster on loopback, run as the postgres user when we are root."""

    def __init__(self) -> None:
        bins = sorted(glob.glob("/usr/lib/postgresql/*/bin/initdb"))
        initdb = bins[-1] if bins else shutil.which("initdb")
        if not initdb:
            unavailable("PostgreSQL server (Debian package postgresql)")
        self.bindir = Path(str(initdb)).parent
        self.port = free_port()
        self.as_root = os.geteuid() == 0
        self.dir = Path(tempfile.mkdtemp(prefix="tecfleet-pg-"))
        if self.as_root:
            shutil.chown(self.dir, "postgres", "postgres")
        self.data = self.dir / "data"
        self._run("initdb", "-D", str(self.data), "-A", "trust", "-U", "postgres", "-E", "UTF8")
        with open(self.data / "postgresql.conf", "a") as conf:
            conf.write(
                f"\nport = {self.port}\nlisten_addresses = '127.0.0.1'\n"
                f"unix_socket_directories = '{self.dir}'\nfsync = on\n"
                "max_connections = 200\n"
            )

    def _run(self, tool: str, *args: str) -> None:
        command = [str(self.bindir / tool), *args]
        if self.as_root:
            command = ["runuser", "-u", "postgres", "--", *command]
        subprocess.run(command, check=True, capture_output=True)

    def start(self) -> None:
        self._run("pg_ctl", "-D", str(self.data), "-l", str(self.dir / "log"), "-w", "start")

    def stop(self) -> None:
        self._run("pg_ctl", "-D", str(self.data), "-m", "fast", "-w", "stop")

    def url(self, database: str = "postgres") -> str:
        return f"postgresql+psycopg://postgres@127.0.0.1:{self.port}/{database}"

    def create_database(self, name: str) -> str:
        import psycopg

        with psycopg.connect(
            f"host=127.0.0.1 port={self.port} user=postgres dbname=postgres", autocommit=True
        ) as connection:
            connection.execute(f'CREATE DATABASE "{name}"')
        return self.url(name)

    def destroy(self) -> None:
        with contextlib.suppress(subprocess.CalledProcessError):
            self.stop()
        shutil.rmtree(self.dir, ignore_errors=True)


def migrated(url: str) -> Iterator[sa.Engine]:
    """A database at ``url`` migrated to the newest schema, disposed when the caller is done;
    for fixtures, ``yield from migrated(url)``."""
    engine = db.make_engine(url)
    db.migrate(engine)
    yield engine
    engine.dispose()
