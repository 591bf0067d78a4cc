"""Payloads that could not be stored, newest first."""

from __future__ import annotations

import base64

from sqlalchemy.engine import Engine

from tecfleet.api.pagination import int_cursor, next_cursor
from tecfleet.api.schemas.rejects import RejectOut
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import fleet as fleet_db


def _payload_text(raw: bytes) -> tuple[str, str]:
    """The payload as text and its encoding: UTF-8 as it is, anything else in base64."""
    try:
        return raw.decode("utf-8"), "utf-8"
    except UnicodeDecodeError:
        return base64.b64encode(raw).decode(), "base64"


def list_rejects(
    engine: Engine, limit: int, cursor: str | None
) -> tuple[list[RejectOut], str | None]:
    before = int_cursor(cursor)
    rows = fleet_db.rejects_page(engine, before, limit)
    items = []
    for r in rows[:limit]:
        text, encoding = _payload_text(bytes(r.payload))
        items.append(
            RejectOut(
                id=r.id,
                received_at=ms_to_rfc3339(r.received_ms) or "",
                topic=r.topic,
                device_id=r.device_id,
                item=r.item,
                code=r.code,
                reason=r.reason,
                payload=text,
                payload_encoding=encoding,
                payload_size=r.payload_size,
            )
        )
    return items, next_cursor(rows, limit, "id")
