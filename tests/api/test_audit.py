"""The audit trail: every change issue 21 names leaves a row (registrations, limits and
policies, calibration offsets, acknowledgements, maintenance windows, webhooks, keys), the
database refuses to change or delete a row, and admins can read and export it.

The export is read back with the standard library's csv module (RFC 4180).
"""

from __future__ import annotations

import csv
import io
import json

import pytest
import sqlalchemy as sa
from fastapi.testclient import TestClient

from tecfleet.api.app import create_app
from tecfleet.api.services.audit import ACTIONS
from tecfleet.ingest import db
from tests.api.fleet import Fleet, populate


def _make_every_change(client: TestClient, fleet: Fleet) -> None:
    admin = {"Authorization": f"Bearer {fleet.keys['admin']}"}
    calls = [
        ("put", "/v1/devices/cab-n1", {"label": "ward fridge"}),
        ("put", "/v1/alert-policies/site/North", {"excursion_delay_s": 900}),
        ("post", "/v1/devices/cab-n1/calibration",
         {"sensor": "t_hot", "offset": 0.5, "valid_from": "2026-09-21T14:30:00Z"}),
        ("delete", f"/v1/devices/cab-n1/calibration/{fleet.offset_id}", None),
        ("post", f"/v1/alerts/{fleet.alert_id}/ack", {"note": "door closed"}),
        ("post", "/v1/maintenance",
         {"site": "North", "start": "2026-09-22T08:00:00Z", "end": "2026-09-22T09:00:00Z"}),
        ("post", "/v1/webhooks", {"url": "http://127.0.0.1:9/b"}),
        ("delete", f"/v1/webhooks/{fleet.webhook_id}", None),
        ("post", "/v1/keys", {"name": "planner", "scope": "read"}),
        ("post", f"/v1/keys/{fleet.key_id}/revoke", None),
    ]  # fmt: skip
    for method, path, body in calls:
        answer = client.request(method, path, json=body, headers=admin)
        assert answer.status_code < 300, (path, answer.text)


def test_every_change_leaves_an_audit_row(engine: sa.Engine) -> None:
    fleet = populate(engine)
    app = create_app(engine)
    app.state.webhook_allow_private = True
    client = TestClient(app)
    with engine.connect() as conn:
        before = conn.execute(sa.select(sa.func.max(db.audit_log.c.id))).scalar() or 0
    _make_every_change(client, fleet)
    admin = {"Authorization": f"Bearer {fleet.keys['admin']}"}
    entries = client.get("/v1/audit", params={"limit": 100}, headers=admin).json()["items"]
    new = [e for e in entries if e["id"] > before]
    assert {e["action"] for e in new} == set(ACTIONS)
    assert all(e["actor"] == "admin" and e["actor_key_id"] is not None for e in new)
    ack = next(e for e in new if e["action"] == "alert.acknowledge")
    assert (ack["target"], ack["site"], ack["detail"]) == (
        f"alert/{fleet.alert_id}",
        "North",
        {"note": "door closed"},
    )
    # Newest first, and filtered by action.
    assert [e["id"] for e in entries] == sorted((e["id"] for e in entries), reverse=True)
    keys_only = client.get("/v1/audit", params={"action": "key.create"}, headers=admin).json()
    assert {e["action"] for e in keys_only["items"]} == {"key.create"}
    # The export holds the same rows, oldest first, with the details as JSON.
    export = client.get("/v1/audit/export.csv", headers=admin)
    assert export.status_code == 200 and export.headers["content-type"].startswith("text/csv")
    rows = list(csv.DictReader(io.StringIO(export.text)))
    assert [int(r["id"]) for r in rows] == sorted(e["id"] for e in entries)
    exported_ack = next(r for r in rows if r["action"] == "alert.acknowledge")
    assert json.loads(exported_ack["detail"]) == {"note": "door closed"}


def test_the_trail_cannot_be_changed_or_deleted(engine: sa.Engine) -> None:
    populate(engine)
    for statement in (
        db.audit_log.update().values(actor="someone else"),
        db.audit_log.delete(),
    ):
        with pytest.raises(sa.exc.DBAPIError, match="append-only"), engine.begin() as conn:
            conn.execute(statement)
    with engine.connect() as conn:
        assert conn.execute(sa.select(db.audit_log.c.actor)).scalars().all() == ["admin"]
