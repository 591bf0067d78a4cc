"""Webhook secrets sealed at rest with Fernet (AES-128-CBC with HMAC-SHA256, from the
``cryptography`` package): they must be readable to sign each delivery, so they cannot be
hashed, but a copy of the database alone does not reveal them.

The key comes from the settings (``secret_key``, several comma separated for rotation: the
first seals, any opens) or from ``secret_key_file``, made there (mode 0600) on first need.
Secrets stored before sealing began (``whsec_...`` in the clear) are still opened as they are.
"""

from __future__ import annotations

import os
import threading
from pathlib import Path

from cryptography.fernet import Fernet, InvalidToken, MultiFernet

from tecfleet.ingest.errors import SettingsError
from tecfleet.ingest.settings import Settings

__all__ = ["Sealer", "sealer_for"]

_CLEAR_PREFIX = "whsec_"


class Sealer:
    """Seals and opens short secrets; the keys are read on first use."""

    def __init__(self, keys: list[bytes] | None = None, key_file: Path | None = None) -> None:
        self._keys = keys
        self._key_file = key_file
        self._fernet: MultiFernet | None = None
        self._lock = threading.Lock()

    def _box(self) -> MultiFernet:
        with self._lock:
            if self._fernet is None:
                keys = self._keys if self._keys is not None else [_file_key(self._key_file)]
                try:
                    self._fernet = MultiFernet([Fernet(k) for k in keys])
                except ValueError as exc:
                    raise SettingsError(f"secret_key is not a Fernet key: {exc}") from exc
            return self._fernet

    def seal(self, secret: str) -> str:
        return self._box().encrypt(secret.encode()).decode()

    def open(self, stored: str) -> str:
        """The secret behind a stored value; SettingsError when no key of ours sealed it."""
        if stored.startswith(_CLEAR_PREFIX):
            return stored
        try:
            return self._box().decrypt(stored.encode()).decode()
        except InvalidToken as exc:
            raise SettingsError(
                "a webhook secret was sealed with a key that is not in secret_key"
            ) from exc


def _file_key(path: Path | None) -> bytes:
    if path is None:
        raise SettingsError("no secret key configured")
    if path.is_file():
        return path.read_bytes().strip()
    key = Fernet.generate_key()
    path.parent.mkdir(parents=True, exist_ok=True)
    # Written under another name and linked into place: a second process never reads half a
    # key, and the first key linked wins.
    partial = path.with_name(f".{path.name}.{os.getpid()}")
    fd = os.open(partial, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    with os.fdopen(fd, "wb") as out:
        out.write(key + b"\n")
    try:
        os.link(partial, path)
    except FileExistsError:
        key = path.read_bytes().strip()
    finally:
        partial.unlink()
    return key


#: The sealer of apps and notifiers built without settings: a key of this process only.
_PROCESS_SEALER = Sealer([Fernet.generate_key()])


def sealer_for(settings: Settings | None) -> Sealer:
    """The sealer the settings describe (the process's own without settings)."""
    if settings is None:
        return _PROCESS_SEALER
    if settings.secret_key is not None:
        keys = [k.strip().encode() for k in settings.secret_key.get_secret_value().split(",")]
        return Sealer([k for k in keys if k])
    path = settings.secret_key_file.expanduser().resolve()
    with _FILE_SEALERS_LOCK:
        return _FILE_SEALERS.setdefault(path, Sealer(key_file=path))


#: One sealer per key file in a process (the app and the notifier share it).
_FILE_SEALERS: dict[Path, Sealer] = {}
_FILE_SEALERS_LOCK = threading.Lock()
