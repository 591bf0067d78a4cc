"""Event routes: a server-sent event stream of alert changes for the key's sites."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Header, Query
from sse_starlette import EventSourceResponse

from tecfleet.api.deps import EngineDep, Reader, SettingsDep
from tecfleet.api.schemas import json_error_responses
from tecfleet.api.services import events

router = APIRouter(tags=["events"])

_STREAM_DOC = (
    "`text/event-stream`: one `alert` event per change of an alert's state or severity; "
    '`data` is JSON `{"change": {...}, "alert": <alert object>}`, `id` the change\'s id.'
)


@router.get(
    "/v1/events",
    response_class=EventSourceResponse,
    responses={
        200: {
            "description": _STREAM_DOC,
            "content": {"text/event-stream": {"schema": {"type": "string"}}},
        },
        **json_error_responses(401, 403, 503),
    },
)
def alert_stream(
    engine: EngineDep,
    settings: SettingsDep,
    who: Reader,
    last_event_id: Annotated[
        str | None,
        Header(description="resume after this event (sent by EventSource on reconnection)"),
    ] = None,
    after: Annotated[
        int | None,
        Query(
            ge=0,
            le=2**63 - 1,
            description="resume after this event id (for clients "
            "that cannot set headers); the header wins",
        ),
    ] = None,
    follow: Annotated[bool, Query(description="false: send what is there and close")] = True,
) -> EventSourceResponse:
    """Alert changes of the devices on the key's sites, oldest first; without a resume point
    the stream starts with the next change. Ends after ``api_events_max_s``; reconnect with
    ``Last-Event-ID`` to continue."""
    resume = last_event_id if last_event_id is not None else (None if after is None else str(after))
    start = events.start_after(engine, resume)
    stream = events.alert_events(
        engine,
        start,
        who.sites,
        follow=follow,
        poll_s=settings.api_events_poll_s,
        max_s=settings.api_events_max_s,
    )
    return EventSourceResponse(stream, ping=15)
