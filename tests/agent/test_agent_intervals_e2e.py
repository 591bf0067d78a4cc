"""The agent reporting by interval, against Debian's mosquitto and the real ingester.

A cooler's log sampled every 2-4 s (with a 30-s hole) is followed by the agent, which sends one
reading a minute with the minute's summaries. The stored rows must be exactly the intervals
that :func:`close_intervals` makes of the same samples (values the code produced itself, the
function being checked against hand-worked examples in ``test_intervals.py``), each once,
through a broker outage and a ``kill -9`` in the middle of an interval.
"""

from __future__ import annotations

import math
import random
import time
from pathlib import Path

import pytest
import sqlalchemy as sa
from sqlalchemy.engine import Engine

from tecfleet.ingest import db
from tecfleet.ingest.agent.intervals import Report, close_intervals
from tecfleet.ingest.agent.options import ReportOptions
from tecfleet.ingest.agent.sources import Sample
from tecfleet.ingest.db.tables import SUMMARY_COLUMNS
from tests.agent.agent_process import AgentProcess
from tests.ingest.mqtt_helpers import count_readings, start_ingester, wait_for
from tests.services import Mosquitto

DEVICE = "cab-intervals"
HEADER = "ts,t_cabinet,t_cold,t_hot,t_ambient,current,voltage\n"
OPTIONS = ReportOptions(every_s=60.0, max_gap_s=20.0)


def log_lines(start_s: float, n: int, seed: int = 11) -> list[str]:
    """A cooler cycling on and off (on 40 s of every 100 s at 3.1 A), its cabinet air
    swinging with it; samples 2-4 s apart and one 30-s hole."""
    rng = random.Random(seed)
    lines, t = [], start_s
    while len(lines) < n:
        on = (t - start_s) % 100.0 < 40.0
        current = 3.1 + rng.uniform(-0.05, 0.05) if on else 0.0
        cabinet = 4.5 + 0.8 * math.sin((t - start_s) / 100.0 * 2.0 * math.pi)
        lines.append(
            f"{t:.3f},{cabinet:.3f},{-2.0 + 3.0 * on:.2f},{31.0 - 4.0 * (not on):.2f},"
            f"21.5,{current:.3f},{7.8 if on else 0.25}\n"
        )
        t += rng.uniform(2.0, 4.0)
        if len(lines) == 150:
            t += 30.0
    return lines


def samples_of(lines: list[str]) -> list[Sample]:
    names = HEADER.strip().split(",")[1:]
    out = []
    for line in lines:
        ts, *cells = line.strip().split(",")
        out.append(Sample(float(ts), {k: float(v) for k, v in zip(names, cells, strict=True)}))
    return out


def stored_rows(engine: Engine) -> list[dict[str, float | None]]:
    r = db.readings.c
    columns = [r.ts_ms, r.t_cabinet, r.current, *(r[name] for name in SUMMARY_COLUMNS)]
    stmt = sa.select(*columns).where(r.device_id == DEVICE).order_by(r.ts_ms)
    with engine.connect() as connection:
        return [dict(row._mapping) for row in connection.execute(stmt)]


def expected_rows(reports: list[Report]) -> list[dict[str, float | None]]:
    return [
        {
            "ts_ms": round(r.ts_s * 1000.0),
            "t_cabinet": r.values["t_cabinet"],
            "current": r.values["current"],
            **{name: r.summary.fields.get(name) for name in SUMMARY_COLUMNS},
        }
        for r in reports
    ]


def test_interval_reports_carry_the_summaries_exactly_once(
    mosquitto: Mosquitto, sqlite_url: str, tmp_path: Path
) -> None:
    # An hour ago, a little after a whole minute: the first interval is short.
    start_s = math.floor((time.time() - 3600.0) / 60.0) * 60.0 + 7.0
    lines = log_lines(start_s, 330)
    reports, _ = close_intervals(samples_of(lines), OPTIONS)
    assert len(reports) >= 14
    assert reports[0].summary.fields == {}  # too short
    assert any("hole" in (r.summary.reason or "") for r in reports)  # the 30-s hole
    assert sum(bool(r.summary.fields) for r in reports) >= len(reports) - 3

    csv_path = tmp_path / "cooler.csv"
    csv_path.write_text(HEADER)
    config = tmp_path / "agent.toml"
    config.write_text(
        f'device_id = "{DEVICE}"\nmqtt_url = "{mosquitto.url}"\n'
        f'buffer = "{tmp_path / "buffer.sqlite"}"\n'
        f'[[sources]]\nkind = "csv"\npath = "{csv_path}"\n'
        "[report]\nevery_s = 60\nmax_gap_s = 20\n"
    )
    ingester, engine, _ = start_ingester(sqlite_url, mosquitto.url, client_id="agent-iv")
    agent = AgentProcess(["--config", str(config)], tmp_path / "agent.log")
    agent.start()

    def closed_by(n: int) -> int:
        return len(close_intervals(samples_of(lines[:n]), OPTIONS)[0])

    try:
        with csv_path.open("a") as log:
            log.writelines(lines[:100])
        assert wait_for(lambda: count_readings(engine, DEVICE) == closed_by(100), 30), agent.log()
        mosquitto.stop()
        with csv_path.open("a") as log:
            log.writelines(lines[100:210])
        time.sleep(3.0)  # read into the buffer while the broker is away
        agent.kill()  # mid-interval: the open interval's samples are only in the buffer
        with csv_path.open("a") as log:
            log.writelines(lines[210:])
        mosquitto.start()
        agent.start()
        assert wait_for(lambda: count_readings(engine, DEVICE) >= len(reports), 60), agent.log()
        time.sleep(2.0)  # anything sent twice would have arrived by now
        stored = stored_rows(engine)
        assert [row["ts_ms"] for row in stored] == [row["ts_ms"] for row in expected_rows(reports)]
        for got, want in zip(stored, expected_rows(reports), strict=True):
            assert got == {k: pytest.approx(v, rel=1e-12) if v else v for k, v in want.items()}
        assert agent.terminate() == 0
        assert "LOADED=\n" in agent.log()  # no database or web library in the agent
    finally:
        agent.close()
        ingester.stop()
