"""Maintenance windows that record the parts replaced during them, over a real database
(SQLite and PostgreSQL): the API takes and returns them, refuses unknown parts and parts on a
site's window, and windows stored before the column existed read as replacing nothing."""

from __future__ import annotations

import sqlalchemy as sa
from fastapi.testclient import TestClient

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.api.timefmt import rfc3339_to_ms
from tecfleet.ingest import db
from tecfleet.ingest.db import alert_records
from tests.ingest.old_schema import migrate_to

WINDOW = {"device_id": "cab-4", "start": "2026-09-21T14:00:00Z", "end": "2026-09-21T18:00:00Z"}


def _headers(engine: sa.Engine, scope: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {create_key(engine, scope + '-person', scope)}"}


def test_a_device_window_records_its_replaced_parts(engine: sa.Engine) -> None:
    client = TestClient(create_app(engine))
    write, read = _headers(engine, "write"), _headers(engine, "read")
    body = {**WINDOW, "replaced": ["cabinet_probe", "module", "cabinet_probe"]}
    made = client.post("/v1/maintenance", json=body, headers=write)
    assert made.status_code == 201
    # a part named twice is recorded once, in the order first named
    assert made.json()["replaced"] == ["cabinet_probe", "module"]
    plain = client.post("/v1/maintenance", json=WINDOW, headers=write)
    assert plain.status_code == 201 and plain.json()["replaced"] == []
    listed = client.get("/v1/maintenance", headers=read).json()["items"]
    assert [w["replaced"] for w in listed] == [[], ["cabinet_probe", "module"]]
    # what the analysis reads: only the window that replaced something, at its end
    with engine.connect() as conn:
        got = alert_records.replacements(conn, "cab-4")
    assert got == [(rfc3339_to_ms(WINDOW["end"]), ["cabinet_probe", "module"])]


def test_unknown_parts_and_parts_on_a_site_window_are_refused(engine: sa.Engine) -> None:
    client = TestClient(create_app(engine))
    write = _headers(engine, "write")
    bad = client.post("/v1/maintenance", json={**WINDOW, "replaced": ["compressor"]}, headers=write)
    assert bad.status_code == 422
    # the field path names the offending entry, the message the names allowed
    assert bad.json()["code"] == "invalid_input" and bad.json()["field"] == "replaced.0"
    assert "cabinet_probe" in bad.json()["message"]
    site = {"site": "north", "start": WINDOW["start"], "end": WINDOW["end"]}
    refused = client.post("/v1/maintenance", json={**site, "replaced": ["module"]}, headers=write)
    assert refused.status_code == 422
    assert refused.json()["field"] == "replaced" and "site" in refused.json()["message"]
    # the same site window without parts is a window like any other
    assert client.post("/v1/maintenance", json=site, headers=write).status_code == 201
    listed = client.get("/v1/maintenance", headers=write).json()["items"]
    assert len(listed) == 1 and listed[0]["replaced"] == []


def test_windows_stored_before_the_parts_column_read_as_replacing_nothing(db_url: str) -> None:
    engine = db.make_engine(db_url)
    migrate_to(engine, "0012")
    with engine.begin() as c:
        c.execute(
            sa.text(
                "INSERT INTO maintenance_windows (device_id, start_ms, end_ms, created_ms)"
                " VALUES ('cab-4', 1000, 2000, 3000)"
            )
        )
    db.migrate(engine)
    client = TestClient(create_app(engine))
    (window,) = client.get("/v1/maintenance", headers=_headers(engine, "read")).json()["items"]
    assert window["device_id"] == "cab-4" and window["replaced"] == []
    with engine.connect() as conn:
        assert alert_records.replacements(conn, "cab-4") == []
    migrate_to(engine, "0012", down=True)
    with engine.connect() as c:
        assert c.execute(sa.text("SELECT count(*) FROM maintenance_windows")).scalar() == 1
    engine.dispose()
