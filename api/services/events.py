"""Alert changes as server-sent events (the WHATWG HTML standard, section 9.2): one event per
change of an alert's state or severity, for the alerts on the key's sites. Each event's id is
the change's id, so a client that reconnects with ``Last-Event-ID`` resumes after the last
event it saw, without a gap or a repeat."""

from __future__ import annotations

import time
from collections.abc import AsyncIterator, Collection
from typing import Any

import anyio
import orjson
from sqlalchemy.engine import Engine
from sse_starlette import ServerSentEvent
from starlette.concurrency import run_in_threadpool

from tecfleet.api.schemas.alerts import alert_object
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import alert_records
from tecfleet.ingest.db import events as events_db

#: Changes read per query [changes].
_BATCH = 500
_INT64_MAX = 2**63 - 1
#: What a client waits before reconnecting after the stream ends [ms].
RETRY_MS = 2000


def change_event(r: Any) -> ServerSentEvent:
    """One change as an ``alert`` event: the change and the alert as it stands now."""
    data = {
        "change": {
            "id": int(r.change_id),
            "at": ms_to_rfc3339(r.change_at_ms),
            "from_state": r.from_state,
            "to_state": r.to_state,
            "severity": r.change_severity,
            "actor": r.actor,
            "note": r.note,
        },
        "alert": alert_object(alert_records.alert_row_dict(r)),
    }
    body = orjson.dumps(data, option=orjson.OPT_SERIALIZE_NUMPY).decode()
    return ServerSentEvent(data=body, event="alert", id=str(r.change_id), retry=RETRY_MS)


def start_after(engine: Engine, last_event_id: str | None) -> int:
    """Where a stream starts: after the event the client saw last, or after the newest change
    (a new client gets only what happens from now on)."""
    text = (last_event_id or "").strip()
    if text.isascii() and text.isdigit() and int(text) <= _INT64_MAX:
        return int(text)
    return events_db.newest_change_id(engine)


async def alert_events(
    engine: Engine,
    after_id: int,
    sites: Collection[str] | None,
    *,
    follow: bool,
    poll_s: float,
    max_s: float,
) -> AsyncIterator[ServerSentEvent]:
    """Changes after ``after_id``; with ``follow``, new ones as they come until ``max_s``
    [s] have passed (the client then resumes with ``Last-Event-ID``)."""
    deadline = time.monotonic() + max_s
    last = after_id
    while True:
        rows = await run_in_threadpool(events_db.changes_after, engine, last, _BATCH, sites)
        for r in rows:
            last = int(r.change_id)
            yield change_event(r)
        if len(rows) == _BATCH:
            continue
        if not follow or time.monotonic() >= deadline:
            return
        await anyio.sleep(poll_s)
