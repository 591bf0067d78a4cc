"""The cold-chain report: a valid PDF whose text holds the unit, its excursion and the
excursion's mean kinetic temperature, from the command line and from the API."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pypdf
import pytest
from fastapi.testclient import TestClient

from tecfleet.analytics import alerts
from tecfleet.analytics.alerts import Band
from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.api.report import excursions
from tecfleet.ingest import db

T0 = 1_798_761_600_000  # 2027-01-01 00:00 UTC [ms]
MIN = 60_000


def _store(url: str) -> None:
    engine = db.make_engine(url)
    db.migrate(engine)
    # Published worked example (github.com/zelti/mkt, README "Usage example"): samples 2, 2,
    # 5, 8, 8, 8, 8 °C at equal intervals have an MKT of 6.25 °C. With a band of -20..1 °C
    # (registered limits) the seven samples are one excursion above the band.
    temps = [0.0] * 60 + [2.0, 2.0, 5.0, 8.0, 8.0, 8.0, 8.0] + [0.0] * 60
    rows = [
        db.Reading("cc-1", T0 + i * MIN, t, -8.0, 30.0, 21.0, 2.0, 6.0) for i, t in enumerate(temps)
    ]
    db.store_batch(engine, rows)
    with engine.begin() as conn:
        conn.execute(
            db.devices.update()
            .where(db.devices.c.device_id == "cc-1")
            .values(
                label="Trial fridge",
                site="Test site",
                cabinet={"low_limit_c": -20.0, "high_limit_c": 1.0},
            )
        )


def _text(pdf: Path | bytes) -> str:
    import io

    reader = pypdf.PdfReader(io.BytesIO(pdf) if isinstance(pdf, bytes) else pdf)
    # lines wrap on paper: compare with every run of white space as one space
    return " ".join(" ".join(page.extract_text() for page in reader.pages).split())


def test_excursions_carry_the_mkt_of_their_own_samples() -> None:
    import numpy as np

    t = np.arange(10, dtype=np.int64) * MIN
    temps = np.array([0, 2, 2, 5, 8, 8, 8, 8, 0, 0], dtype=np.float64)
    (e,) = excursions(t, temps, Band(-20.0, 1.0, None, None, "test"))
    assert e.samples == 7 and e.peak_c == 8.0 and e.side == "above"
    assert e.duration_s == 7 * 60
    assert e.mkt_c == pytest.approx(6.25, abs=0.005)  # the published example above


def test_report_command_writes_a_pdf_with_the_unit_excursion_and_mkt(
    sqlite_url: str, tmp_path: Path
) -> None:
    _store(sqlite_url)
    out = tmp_path / "report.pdf"
    done = subprocess.run(
        [sys.executable, "-m", "tecfleet.api.cli", "report", "--device", "cc-1", "--start",
         "2027-01-01", "--end", "2027-01-01", "--out", str(out), "--db", sqlite_url],
        capture_output=True, text=True, timeout=120,
    )  # fmt: skip
    assert done.returncode == 0, done.stderr
    assert out.read_bytes().startswith(b"%PDF-")
    text = _text(out)
    assert "cc-1" in text
    assert "Excursions: 1" in text
    mkt = alerts.mean_kinetic_temperature([2.0, 2.0, 5.0, 8.0, 8.0, 8.0, 8.0])
    # the report prints tenths; the published 6.25 °C rounds to 6.2 or 6.3 at that precision
    assert f"mean kinetic temperature {mkt:.1f} °C" in text
    assert "peak 8.0 °C" in text and "7 min above the band" in text
    assert "medicine maker's instructions and local practice" in text


def test_report_route_answers_a_pdf_for_a_site_and_refuses_a_bad_period(sqlite_url: str) -> None:
    _store(sqlite_url)
    engine = db.make_engine(sqlite_url)
    key = create_key(engine, "r", "read")
    client = TestClient(create_app(engine))
    h = {"Authorization": f"Bearer {key}"}
    r = client.get(
        "/v1/reports/cold-chain.pdf?site=Test site&start=2027-01-01&end=2027-01-02", headers=h
    )
    assert r.status_code == 200 and r.headers["content-type"] == "application/pdf"
    assert "Trial fridge" in _text(r.content)
    bad = client.get(
        "/v1/reports/cold-chain.pdf?device=cc-1&start=2027-01-02&end=2026-12-01", headers=h
    )
    assert bad.status_code == 422
    assert (
        client.get(
            "/v1/reports/cold-chain.pdf?device=nope&start=2027-01-01&end=2027-01-02", headers=h
        ).status_code
        == 404
    )
