"""``tecfleet import``: same checks and rejects as MQTT, idempotent, bad lines reported by number.

The expected reject codes are the ones the MQTT path gives for the same readings (the e2e test
``test_bad_input_lands_in_rejects_beside_good_readings`` pins them there).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import sqlalchemy as sa

from tecfleet.api.cli import main
from tecfleet.ingest import db
from tests.ingest.mqtt_helpers import count_readings, reading, senml

HEADER = "ts,seq,t_cabinet,t_cold,t_hot,t_ambient,current,voltage,rh,door_open\n"


def csv_line(i: int, **changes: str) -> str:
    r = reading(i)
    cells = {
        "ts": str(r["ts"]),
        "seq": str(i),
        **{k: str(r[k]) for k in ("t_cabinet", "t_cold", "t_hot", "t_ambient", "current")},
        "voltage": str(r["voltage"]),
        "rh": "55",
        "door_open": "false",
    }
    cells.update(changes)
    return ",".join(cells.values()) + "\n"


def rejects(db_url: str) -> list[tuple[str, str]]:
    engine = db.make_engine(db_url)
    with engine.connect() as connection:
        rows = connection.execute(sa.select(db.rejects.c.code, db.rejects.c.reason))
        return sorted((row.code, row.reason) for row in rows)


def test_csv_import_twice_stores_once_and_reports_bad_lines_by_number(
    db_url: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "sdcard.csv"
    lines = [csv_line(i) for i in range(100)]
    lines[10] = "1790000600.0,10,4.1,-3.0\n"  # cut short: line 12 of the file
    lines[20] = csv_line(20, current="99.0")  # out of range: line 22
    lines[30] = csv_line(30, t_cabinet="warm")  # not a number: line 32
    lines[40] = csv_line(40, ts="2026-11-30T08:00:00+01:00")  # RFC 3339 is fine
    path.write_text(HEADER + "".join(lines))
    args = ["import", "--device-id", "cab-imp", "--db", db_url, "--quiet", str(path)]

    assert main(args) == 1  # some lines were refused
    out = capsys.readouterr()
    assert "97 readings valid, 97 stored, 0 already stored, 3 refused" in out.out
    assert "line 12:" in out.err and "line 22:" in out.err and "line 32:" in out.err
    engine = db.make_engine(db_url)
    assert count_readings(engine, "cab-imp") == 97
    first = rejects(db_url)
    assert [code for code, _ in first] == ["bad_line", "out_of_range", "wrong_type"]
    assert first[0][1].startswith("line 12: 4 fields where the header names 10")

    assert main(args) == 1
    out = capsys.readouterr()
    assert "97 readings valid, 0 stored, 97 already stored, 3 refused" in out.out
    assert count_readings(engine, "cab-imp") == 97
    assert rejects(db_url) == first  # the rejects are kept once as well
    with engine.connect() as connection:
        stored = connection.execute(
            sa.select(db.devices.c.readings).where(db.devices.c.device_id == "cab-imp")
        ).scalar_one()
    assert stored == 97


def test_json_lines_take_objects_batches_and_senml_like_mqtt(
    sqlite_url: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "export.jsonl"
    rows = [json.dumps(reading(i)) for i in range(5)]
    rows.append(json.dumps([reading(i) for i in range(5, 8)]))  # a batch on one line
    rows.append(json.dumps(senml(8)))  # a SenML pack on one line
    rows.append("{not json")
    rows.append(json.dumps({**reading(9), "device_id": "someone-else"}))
    path.write_text("\n".join(rows) + "\n")
    code = main(["import", "--device-id", "cab-j", "--db", sqlite_url, str(path)])
    assert code == 1
    assert "100%" in capsys.readouterr().err  # the progress bar reached the end of the file
    engine = db.make_engine(sqlite_url)
    assert count_readings(engine, "cab-j") == 9
    found = rejects(sqlite_url)
    assert [c for c, _ in found] == ["device_mismatch", "invalid_json"]
    assert found[0][1].startswith("line 9: ") and found[1][1].startswith("line 8: ")


def test_a_missing_file_is_a_clear_error(sqlite_url: str, tmp_path: Path) -> None:
    args = ["import", "--device-id", "cab-x", "--db", sqlite_url, str(tmp_path / "none.csv")]
    assert main(args) == 2
