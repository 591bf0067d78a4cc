"""The alert event stream on a real server: server-sent events (WHATWG HTML standard, section
9.2), read with httpx-sse, a client-side parser of that format. One event per change of an
alert, only for the alerts on the key's sites, resumable with ``Last-Event-ID``."""

from __future__ import annotations

import json
import threading
from collections.abc import Iterator

import httpx
import pytest
from httpx_sse import ServerSentEvent, connect_sse

from tecfleet.api.app import create_app
from tecfleet.ingest import db
from tecfleet.ingest.settings import Settings
from tests.api.fleet import Fleet, populate, served


@pytest.fixture
def fleet_server(db_url: str) -> Iterator[tuple[Fleet, str]]:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    fleet = populate(engine)
    settings = Settings.model_validate({"api_events_poll_s": 0.05, "api_events_max_s": 20})
    with served(create_app(engine, settings=settings)) as base:
        yield fleet, base
    engine.dispose()


def events(base: str, key: str, **params: str) -> list[ServerSentEvent]:
    """Every event of a stream that ends (``follow=false``)."""
    headers = {"Authorization": f"Bearer {key}"}
    last = params.pop("last_event_id", None)
    if last is not None:
        headers["Last-Event-ID"] = last
    with (
        httpx.Client(base_url=base, timeout=10) as client,
        connect_sse(
            client, "GET", "/v1/events", params={"follow": "false", **params}, headers=headers
        ) as source,
    ):
        assert source.response.headers["content-type"].startswith("text/event-stream")
        return [e for e in source.iter_sse() if e.event == "alert"]


def test_changes_stream_live_for_the_keys_sites_and_resume(
    fleet_server: tuple[Fleet, str],
) -> None:
    fleet, base = fleet_server
    history = events(base, fleet.keys["read"], after="0")
    assert history, "the populated excursion opened an alert"
    opened = json.loads(history[0].data)
    assert opened["alert"]["device_id"] == "cab-n1" and opened["change"]["to_state"] == "open"
    assert events(base, fleet.keys["south_admin"], after="0") == []  # North is not its site
    # A live stream from now on sees the acknowledgement made while it is open.
    got: list[ServerSentEvent] = []
    ready = threading.Event()

    def listen() -> None:
        headers = {"Authorization": f"Bearer {fleet.keys['read']}"}
        with (
            httpx.Client(base_url=base, timeout=10) as client,
            connect_sse(client, "GET", "/v1/events", headers=headers) as source,
        ):
            ready.set()
            for event in source.iter_sse():
                if event.event == "alert":
                    got.append(event)
                    return

    listener = threading.Thread(target=listen, daemon=True)
    listener.start()
    assert ready.wait(10)
    ack = httpx.post(
        f"{base}/v1/alerts/{fleet.alert_id}/ack",
        json={"note": "door shut"},
        headers={"Authorization": f"Bearer {fleet.keys['write']}"},
    )
    assert ack.status_code == 200
    listener.join(10)
    assert got, "the live stream delivered the change"
    live = json.loads(got[0].data)
    assert (live["change"]["to_state"], live["alert"]["state"]) == ("acknowledged", "acknowledged")
    assert live["change"]["actor"] == "write"
    # Resuming after the first event gives exactly what followed it, once.
    resumed = events(base, fleet.keys["read"], last_event_id=history[0].id)
    assert [e.id for e in resumed] == [e.id for e in history[1:]] + [got[0].id]
    assert events(base, fleet.keys["read"], last_event_id=got[0].id) == []
