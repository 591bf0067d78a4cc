"""Migration 0004 (``alerts.incident_id``) applied, taken back and applied again on SQLite
and PostgreSQL, with alert rows and their audit trail in place."""

from __future__ import annotations

import sqlalchemy as sa
from alembic.config import Config
from alembic.script import ScriptDirectory

from tecfleet.ingest import db
from tests.ingest.old_schema import migrate_to


def _columns(engine: sa.Engine) -> set[str]:
    return {c["name"] for c in sa.inspect(engine).get_columns("alerts")}


def _indexes(engine: sa.Engine) -> set[str | None]:
    return {i["name"] for i in sa.inspect(engine).get_indexes("alerts")}


def test_incident_column_up_down_and_up_again(db_url: str) -> None:
    engine = db.make_engine(db_url)
    migrate_to(engine, "0003")
    assert "incident_id" not in _columns(engine)
    with engine.begin() as conn:
        conn.execute(db.devices.insert().values(device_id="m-1", readings=0))
        conn.execute(
            sa.text(
                "INSERT INTO alerts (device_id, kind, severity, state, opened_ms, updated_ms,"
                " summary, evidence, reopen_count) VALUES ('m-1', 'excursion', 'warning',"
                " 'open', 1, 1, 'warm', '{}', 0)"
            )
        )
        conn.execute(
            sa.text(
                "INSERT INTO alert_audit (alert_id, at_ms, to_state, severity, actor)"
                " VALUES (1, 1, 'open', 'warning', 'system')"
            )
        )
    db.migrate(engine)
    assert "incident_id" in _columns(engine)
    assert "ix_alerts_incident_id" in _indexes(engine)
    with engine.begin() as conn:
        conn.execute(db.alerts.update().values(incident_id=1))
    migrate_to(engine, "0003", down=True)
    assert "incident_id" not in _columns(engine)
    assert "ix_alerts_incident_id" not in _indexes(engine)
    with engine.connect() as conn:
        # the alert and its audit row survive the way down
        assert conn.execute(sa.text("SELECT count(*) FROM alert_audit")).scalar_one() == 1
        assert conn.execute(sa.text("SELECT summary FROM alerts")).scalar_one() == "warm"
    db.migrate(engine)
    with engine.connect() as conn:
        assert conn.execute(sa.select(db.alerts.c.incident_id)).scalar_one() is None
        head = conn.execute(sa.text("SELECT version_num FROM alembic_version")).scalar_one()
    config = Config()
    config.set_main_option("script_location", "tecfleet.ingest:migrations")
    # the newest revision, whichever it is: 0004 is below it
    assert head == ScriptDirectory.from_config(config).get_current_head() != "0004"
    engine.dispose()
