"""The web page in a real browser (Debian's Chromium driven by Playwright) against a live server."""

from __future__ import annotations

import shutil
import threading
import time
from collections.abc import Iterator
from pathlib import Path

import pytest
import uvicorn

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tests.services import free_port, unavailable, wait_port

CHROMIUM_ARGS = [
    "--headless=new",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


@pytest.fixture
def live_server(sqlite_url: str) -> Iterator[tuple[str, str]]:
    engine = db.make_engine(sqlite_url)
    db.migrate(engine)
    now_ms = int(time.time() * 1000)
    rows = [
        Reading(device, now_ms - 60_000 * (300 - i), 4.0 + 0.01 * i, -3.0, 31.0, 22.0, 3.0, 8.0)
        for device in ("ward-fridge-1", "lab-carrier-2")
        for i in range(300)
    ]
    db.store_batch(engine, rows)
    with engine.begin() as c:
        c.execute(
            db.alerts.insert().values(
                device_id="ward-fridge-1",
                kind="excursion",
                severity="warning",
                state="open",
                opened_ms=now_ms - 600_000,
                updated_ms=now_ms - 600_000,
                summary="Cabinet above its 8 °C limit for 42 min (peak 9.1 °C).",
                evidence={"peak_c": 9.1},
            )
        )
    key = create_key(engine, "browser", "write")
    port = free_port()
    server = uvicorn.Server(
        uvicorn.Config(create_app(engine), host="127.0.0.1", port=port, log_level="warning")
    )
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    wait_port(port)
    yield f"http://127.0.0.1:{port}/", key
    server.should_exit = True
    thread.join(10)


def test_page_shows_the_fleet_and_a_device_chart(
    live_server: tuple[str, str], tmp_path: Path
) -> None:
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if chromium is None:
        unavailable("Chromium (Debian package chromium)")
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        unavailable("playwright (pip)")
    url, key = live_server
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=chromium, args=CHROMIUM_ARGS)
        page = browser.new_page()
        page.goto(url)
        assert "Enter an API key" in page.inner_text("#status")
        page.fill("#key", key)
        page.click("#key-form button")
        page.wait_for_selector("tr.device", timeout=15_000)
        units = page.locator("tr.device")
        assert units.count() == 2
        assert "ward-fridge-1" in page.inner_text("#devices")
        page.click("tr.device[data-id='ward-fridge-1']")
        page.wait_for_selector("#chart polyline", timeout=15_000)
        assert page.locator("#chart polyline").count() == 4
        assert "readings" in page.inner_text("#chart-range")
        # The chart is drawn before the estimates arrive; wait for them.
        page.wait_for_function(
            "document.querySelector('#health tbody').textContent.trim()"
            " && !document.querySelector('#health tbody').textContent.includes('Loading')",
            timeout=10_000,
        )
        assert "Not analysed yet" in page.inner_text("#health")
        # The open alert is listed and can be acknowledged from the page.
        page.wait_for_selector("button[data-ack]", timeout=10_000)
        assert "above its 8 °C limit" in page.inner_text("#alerts")
        page.click("button[data-ack]")
        page.wait_for_function(
            "document.querySelector('#alerts-note').textContent.includes('No open alerts')",
            timeout=10_000,
        )
        page.screenshot(path=str(tmp_path / "page.png"), full_page=True)
        # A wrong key is refused visibly, not silently.
        page.fill("#key", "tfk_wrong")
        page.click("#key-form button")
        page.wait_for_function(
            "document.querySelector('#status').textContent.includes('refused')", timeout=10_000
        )
        browser.close()
