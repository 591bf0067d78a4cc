"""Running the device agent as a real process for the end-to-end tests."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
from pathlib import Path

from tests.services import REPO

# Prints, at a clean exit, which of the service's heavy libraries the process had loaded.
_WATCH = (
    "import atexit, sys\n"
    "def _report():\n"
    "    heavy = ('sqlalchemy', 'pandas', 'fastapi', 'tecfleet.ingest.db')\n"
    "    print('LOADED=' + ','.join(m for m in heavy if m in sys.modules), file=sys.stderr)\n"
    "atexit.register(_report)\n"
    "from tecfleet.api.cli import main\n"
    "sys.exit(main(sys.argv[1:]))\n"
)


class AgentProcess:
    """``tecfleet agent ...`` in a subprocess, its log in a file."""

    def __init__(self, args: list[str], log_path: Path) -> None:
        self.args = args
        self.log_path = log_path
        self.process: subprocess.Popen[bytes] | None = None

    def start(self) -> None:
        env = {**os.environ, "PYTHONPATH": str(REPO)}
        with open(self.log_path, "ab") as log:
            self.process = subprocess.Popen(
                [sys.executable, "-c", _WATCH, "agent", *self.args],
                stdout=log,
                stderr=log,
                env=env,
            )

    def terminate(self, timeout_s: float = 20.0) -> int:
        assert self.process is not None
        self.process.send_signal(signal.SIGTERM)
        code = self.process.wait(timeout_s)
        self.process = None
        return code

    def kill(self) -> None:
        assert self.process is not None
        self.process.kill()  # SIGKILL: no clean-up of any kind
        self.process.wait(10)
        self.process = None

    def log(self) -> str:
        return self.log_path.read_text(errors="replace")

    def close(self) -> None:
        if self.process is not None:
            self.process.kill()
            self.process.wait(10)
            self.process = None
