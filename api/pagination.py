"""Page cursors: opaque to clients, a JSON value (the last key of a page) underneath."""

from __future__ import annotations

import base64
import binascii
from typing import Any

import orjson

from tecfleet.api.errors import CursorError

_FOREIGN = "cursor is not one this API handed out"
_INT64_MAX = 2**63 - 1


def encode_cursor(value: Any) -> str:
    return base64.urlsafe_b64encode(orjson.dumps(value)).decode().rstrip("=")


def decode_cursor(cursor: str | None) -> Any:
    if not cursor:
        return None
    try:
        padded = cursor + "=" * (-len(cursor) % 4)
        return orjson.loads(base64.urlsafe_b64decode(padded.encode()))
    except (binascii.Error, orjson.JSONDecodeError, ValueError) as exc:
        raise CursorError(_FOREIGN) from exc


def int_cursor(cursor: str | None) -> int | None:
    """A cursor that must hold an integer key (an id or a time) [CursorError otherwise]."""
    value = decode_cursor(cursor)
    if value is None:
        return None
    # bool is an int to Python; a key beyond 64 bits is no key of a stored row.
    if not isinstance(value, int) or isinstance(value, bool) or abs(value) > _INT64_MAX:
        raise CursorError(_FOREIGN)
    return value


def str_cursor(cursor: str | None) -> str | None:
    """A cursor that must hold a text key (a device id) [CursorError otherwise]."""
    value = decode_cursor(cursor)
    if value is not None and not isinstance(value, str):
        raise CursorError(_FOREIGN)
    return value


def next_cursor(rows: list[Any], limit: int, key: str) -> str | None:
    """The cursor after a page of ``limit`` from ``rows`` (``limit + 1`` fetched), or None."""
    return encode_cursor(getattr(rows[limit - 1], key)) if len(rows) > limit else None
