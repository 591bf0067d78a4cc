"""A device's broker account: its line in mosquitto's password file and its ACL block.

The password is hashed by mosquitto's own ``mosquitto_passwd`` (``-U`` on a private temporary
file, so the password never appears on a command line); the ACL uses mosquitto's ``acl_file``
format, one block per device::

    # device cab-17
    user cab-17
    topic write tecfleet/cab-17/telemetry
    topic write tecfleet/cab-17/status

A user with an ACL block may do only what its block allows, so a device may publish its own
readings and status (its last will included) and may neither publish under another id nor read
anything. The file starts with the service's own block, which reads every device's topics and
publishes alerts. mosquitto reads both files again on SIGHUP.
"""

from __future__ import annotations

import os
import secrets
import shutil
import subprocess
import tempfile
from pathlib import Path

from tecfleet.ingest.errors import BrokerError

_MARK = "# device "


def new_password() -> str:
    """A random password of 32 URL-safe characters (192 bits)."""
    return secrets.token_urlsafe(24)


def hashed_line(username: str, password: str) -> str:
    """The password-file line for ``username`` (``user:$7$...``), hashed by mosquitto_passwd."""
    tool = shutil.which("mosquitto_passwd") or (
        "/usr/bin/mosquitto_passwd" if os.path.exists("/usr/bin/mosquitto_passwd") else None
    )
    if tool is None:
        raise BrokerError("mosquitto_passwd not found (Debian package mosquitto)")
    with tempfile.TemporaryDirectory() as folder:
        plain = Path(folder) / "passwd"
        plain.touch(mode=0o600)
        plain.write_text(f"{username}:{password}\n")
        done = subprocess.run([tool, "-U", str(plain)], capture_output=True, text=True, check=False)
        if done.returncode != 0:
            raise BrokerError(f"mosquitto_passwd failed: {done.stderr.strip() or done.stdout}")
        return plain.read_text().strip()


def set_password_line(password_file: Path, line: str) -> None:
    """Put a user's line into the password file, replacing an older line of that user."""
    username = line.split(":", 1)[0]
    kept = [entry for entry in _lines(password_file) if entry.split(":", 1)[0] != username]
    _write_private(password_file, [*kept, line])


def drop_password(password_file: Path, username: str) -> bool:
    """Remove a user's line; whether there was one."""
    lines = _lines(password_file)
    kept = [entry for entry in lines if entry.split(":", 1)[0] != username]
    _write_private(password_file, kept)
    return len(kept) != len(lines)


def service_block(service_user: str, prefix: str) -> list[str]:
    """The ACL block of the service account: reads all devices, publishes alerts."""
    return [
        f"# service {service_user}: reads every device, publishes alerts",
        f"user {service_user}",
        f"topic read {prefix}/+/telemetry",
        f"topic read {prefix}/+/status",
        f"topic write {prefix}/+/alerts",
    ]


def device_block(device_id: str, prefix: str) -> list[str]:
    """A device's ACL block: its own telemetry and status, nothing else."""
    return [
        f"{_MARK}{device_id}",
        f"user {device_id}",
        f"topic write {prefix}/{device_id}/telemetry",
        f"topic write {prefix}/{device_id}/status",
    ]


def set_acl_block(acl_file: Path, device_id: str, prefix: str, service_user: str) -> None:
    """Write the device's block (replacing an older one); a new file starts with the service."""
    lines = _without_block(_lines(acl_file), device_id) or service_block(service_user, prefix)
    _write_private(acl_file, [*lines, "", *device_block(device_id, prefix)])


def drop_acl_block(acl_file: Path, device_id: str) -> bool:
    """Remove the device's block; whether there was one."""
    lines = _lines(acl_file)
    kept = _without_block(lines, device_id)
    _write_private(acl_file, kept)
    return len(kept) != len(lines)


def _without_block(lines: list[str], device_id: str) -> list[str]:
    """The lines without the device's block: its mark, its user line and the topic lines after."""
    out: list[str] = []
    in_block = False
    for line in lines:
        if line == f"{_MARK}{device_id}":
            in_block = True
            while out and not out[-1].strip():
                out.pop()  # the blank line that separated the block
            continue
        if in_block and (line == f"user {device_id}" or line.startswith("topic ")):
            continue
        in_block = False
        out.append(line)
    return out


def _lines(path: Path) -> list[str]:
    try:
        return path.read_text().splitlines()
    except FileNotFoundError:
        return []
    except OSError as exc:
        raise BrokerError(f"{path}: {exc.strerror or exc}") from exc


def _write_private(path: Path, lines: list[str]) -> None:
    """Replace the file atomically. A new file is readable by its owner and group only; a
    replaced one keeps its owner, group and mode (the broker's user must still read it)."""
    text = "\n".join(lines).strip("\n") + "\n" if lines else ""
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.")
        with os.fdopen(handle, "w") as out:
            out.write(text)
        if path.exists():
            old = path.stat()
            os.chmod(temporary, old.st_mode & 0o777)
            if os.geteuid() == 0:
                os.chown(temporary, old.st_uid, old.st_gid)
        else:
            os.chmod(temporary, 0o640)
        os.replace(temporary, path)
    except OSError as exc:
        raise BrokerError(f"{path}: {exc.strerror or exc}") from exc
