"""Migration 0011 (``alerts.told_severity``) applied, taken back and applied again on SQLite
and PostgreSQL, with an alert row in place."""

from __future__ import annotations

import sqlalchemy as sa

from tecfleet.ingest import db
from tests.ingest.old_schema import migrate_to


def _columns(engine: sa.Engine) -> set[str]:
    return {c["name"] for c in sa.inspect(engine).get_columns("alerts")}


def test_told_severity_up_down_and_up_again(db_url: str) -> None:
    engine = db.make_engine(db_url)
    migrate_to(engine, "0010")
    assert "told_severity" not in _columns(engine)
    with engine.begin() as conn:
        conn.execute(db.devices.insert().values(device_id="m-1", readings=0))
        conn.execute(
            sa.text(
                "INSERT INTO alerts (device_id, kind, severity, state, opened_ms, updated_ms,"
                " summary, evidence, reopen_count) VALUES ('m-1', 'excursion', 'critical',"
                " 'open', 1, 1, 'warm', '{}', 0)"
            )
        )
        # an audit row refers to the alert: the way down must not copy the table away
        conn.execute(
            sa.text(
                "INSERT INTO alert_audit (alert_id, at_ms, to_state, severity, actor)"
                " VALUES (1, 1, 'open', 'critical', 'system')"
            )
        )
    migrate_to(engine, "0011")
    with engine.connect() as conn:
        # an alert stored before: nothing known told, so its next rise is told once
        assert conn.execute(sa.select(db.alerts.c.told_severity)).scalar_one() is None
    with engine.begin() as conn:
        conn.execute(db.alerts.update().values(told_severity="critical"))
    migrate_to(engine, "0010", down=True)
    assert "told_severity" not in _columns(engine)
    with engine.connect() as conn:
        assert conn.execute(sa.text("SELECT summary FROM alerts")).scalar_one() == "warm"
        assert conn.execute(sa.text("SELECT count(*) FROM alert_audit")).scalar_one() == 1
    db.migrate(engine)
    assert "told_severity" in _columns(engine)
    engine.dispose()
