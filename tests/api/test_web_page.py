"""The web page in a real browser (Debian's Chromium driven by Playwright) against a live server
holding a demo-like fleet: simulated units (test data only) analysed and judged by the engine.

Screenshots of the fleet view, a unit view and the report's first page are saved under
``TECFLEET_ARTIFACTS`` (default ``tests/artifacts/``, git-ignored).
"""

from __future__ import annotations

import io
import os
import shutil
import threading
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import httpx
import pypdf
import pytest
import uvicorn

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest import db
from tests.fleet_fixture import fill
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
UNITS = 5


def artifacts() -> Path:
    path = Path(os.environ.get("TECFLEET_ARTIFACTS", Path(__file__).parents[1] / "artifacts"))
    path.mkdir(parents=True, exist_ok=True)
    return path


@pytest.fixture
def live_server(sqlite_url: str) -> Iterator[tuple[str, str, list[str]]]:
    engine = db.make_engine(sqlite_url)
    db.migrate(engine)
    ids = fill(engine, UNITS, 10.0, seed=203, faults="wear:1,leak:1,fan:1")
    key = create_key(engine, "browser", "write")
    port = free_port()
    server = uvicorn.Server(
        uvicorn.Config(create_app(engine), host="127.0.0.1", port=port, log_level="warning")
    )
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    wait_port(port)
    yield f"http://127.0.0.1:{port}/", key, ids
    server.should_exit = True
    thread.join(10)


def _browser(p: Any) -> Any:
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if chromium is None:
        unavailable("Chromium (Debian package chromium)")
    return p.chromium.launch(executable_path=chromium, args=CHROMIUM_ARGS)


def test_fleet_unit_alerts_and_report_in_the_browser(
    live_server: tuple[str, str, list[str]],
) -> None:
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        unavailable("playwright (pip)")
    url, key, ids = live_server
    out = artifacts()
    errors: list[str] = []
    with sync_playwright() as p:
        browser = _browser(p)
        page = browser.new_page(viewport={"width": 1400, "height": 1000}, accept_downloads=True)
        page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.goto(url)
        assert "Enter an API key" in page.inner_text("#status")
        page.fill("#key", key)
        page.click("#key-form button")

        # Fleet view: every unit, searchable and sortable.
        page.wait_for_selector("tr.device", timeout=15_000)
        assert page.locator("tr.device").count() == UNITS
        table = page.inner_text("#devices")
        assert all(i in table for i in ids)
        page.wait_for_selector("#fleet-plot canvas")
        page.fill("#search", ids[2])
        assert page.locator("tr.device").count() == 1
        page.fill("#search", "")
        page.click("button[data-sort='wear']")
        assert page.get_attribute("th:has(button[data-sort='wear'])", "aria-sort") == "ascending"
        page.screenshot(path=str(out / "fleet-view.png"), full_page=True)

        # Unit view: temperature, R25 and UA plots drawn from data, by a deep link.
        unit = ids[0]
        page.click(f"tr.device[data-id='{unit}'] a")
        page.wait_for_function(
            "document.querySelector('#alt-r25').textContent.includes('points')", timeout=15_000
        )
        for plot in ("#plot-temp", "#plot-r25", "#plot-ua"):
            assert page.locator(f"{plot} canvas").count() == 1
        assert page.inner_text("#alt-temp").startswith("Cabinet from")
        for alt in ("#alt-r25", "#alt-ua"):
            assert "Not enough data" not in page.inner_text(alt)
        assert "wear limit" in page.inner_text("#alt-r25")
        page.click("[data-range='week']")
        page.wait_for_function(
            "document.querySelector('#alt-temp').textContent.includes('over this week')",
            timeout=10_000,
        )
        page.screenshot(path=str(out / "unit-view.png"), full_page=True)

        # The cold-chain report from the page: a PDF naming the unit.
        with page.expect_download(timeout=60_000) as download:
            page.click("#report-form button")
        pdf = Path(download.value.path()).read_bytes()
        assert pdf.startswith(b"%PDF-")
        text = " ".join(p.extract_text() for p in pypdf.PdfReader(io.BytesIO(pdf)).pages)
        assert unit in text and "Time in range" in text
        _save_first_page(pdf, out / "report-page.png")

        # Alerts view: acknowledge the first open alert with a note.
        page.goto(url + "#/alerts")
        page.wait_for_selector("form[data-ack-form]", timeout=15_000)
        form = page.locator("form[data-ack-form]").first
        alert_id = form.get_attribute("data-ack-form")
        form.locator("textarea").fill("door seal checked, ticket 4411")
        form.locator("button").click()
        page.wait_for_function(
            "document.querySelector('#status').textContent.includes('acknowledged')",
            timeout=10_000,
        )
        detail = httpx.get(
            f"{url}v1/alerts/{alert_id}", headers={"Authorization": f"Bearer {key}"}, timeout=10
        ).json()
        assert detail["state"] == "acknowledged"
        assert detail["history"][-1]["note"] == "door seal checked, ticket 4411"

        # A deep link to the alert opens its audit trail.
        page.goto(url + f"#/alert/{alert_id}")
        page.wait_for_function(
            f"document.querySelector('#alert-{alert_id} .trail').textContent.includes('4411')",
            timeout=10_000,
        )

        # A wrong key is refused visibly, not silently.
        page.fill("#key", "tfk_wrong")
        page.click("#key-form button")
        page.wait_for_function(
            "document.querySelector('#status').textContent.includes('refused')", timeout=10_000
        )
        browser.close()
    refused = [e for e in errors if "401" in e]
    assert refused and [e for e in errors if e not in refused] == []


def _save_first_page(pdf: bytes, path: Path) -> None:
    import pypdfium2

    document = pypdfium2.PdfDocument(pdf)
    document[0].render(scale=1.5).to_pil().save(path)
    document.close()
