"""Debian's mosquitto running ``deploy/mosquitto-secure.conf`` with test paths and a test CA."""

from __future__ import annotations

import getpass
import os
import signal
import subprocess
from pathlib import Path

import trustme

from tests.services import REPO, Mosquitto, free_port, wait_port

_REPLACED = (
    "listener ",
    "certfile ",
    "keyfile ",
    "password_file ",
    "acl_file ",
    "persistence_location ",
    "tls_version ",
)


class SecureMosquitto(Mosquitto):
    """The shipped secure configuration: a loopback listener for the service, TLS for devices.

    The password and ACL files are whatever the test puts at ``password_file``/``acl_file``.
    """

    def __init__(self, workdir: Path) -> None:
        super().__init__(workdir)
        self.tls_port = free_port()
        ca = trustme.CA()
        cert = ca.issue_cert("localhost", "127.0.0.1")
        self.ca_file = workdir / "ca.crt"
        ca.cert_pem.write_to_path(str(self.ca_file))
        cert.cert_chain_pems[0].write_to_path(str(workdir / "server.crt"))
        cert.private_key_pem.write_to_path(str(workdir / "server.key"))
        self.password_file = workdir / "tecfleet.passwd"
        self.acl_file = workdir / "tecfleet.acl"
        lines = [
            line
            for line in (REPO / "deploy" / "mosquitto-secure.conf").read_text().splitlines()
            if not line.startswith(_REPLACED)
        ]
        # Listener options follow their listener line, so the TLS listener comes last.
        lines += [
            f"password_file {self.password_file}",
            f"acl_file {self.acl_file}",
            f"persistence_location {workdir / 'data'}/",
            f"user {getpass.getuser()}",
            "log_type error",
            "log_type warning",
            f"listener {self.port} 127.0.0.1",
            f"listener {self.tls_port} 127.0.0.1",
            f"certfile {workdir / 'server.crt'}",
            f"keyfile {workdir / 'server.key'}",
            "tls_version tlsv1.2",
        ]
        self.config.write_text("\n".join(lines) + "\n")

    def start(self) -> None:
        super().start()
        wait_port(self.tls_port)

    def reload(self) -> None:
        """SIGHUP: the broker reads its password and ACL files again."""
        assert self.process is not None
        os.kill(self.process.pid, signal.SIGHUP)


def add_service_account(broker: SecureMosquitto, password: str) -> None:
    """The service's account, made as the operator would, with mosquitto_passwd."""
    create = [] if broker.password_file.exists() else ["-c"]
    subprocess.run(
        ["mosquitto_passwd", *create, "-b", str(broker.password_file), "tecfleet", password],
        check=True,
        capture_output=True,
    )
