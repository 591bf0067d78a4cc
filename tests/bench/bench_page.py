"""Time to first paint of the fleet view and of a month-long unit view, in Debian's Chromium,
with a simulated, analysed fleet (100 units, a month of one-minute readings by default).

"First paint" of a view: from the start of navigation to the first frame after the view's
content is in the page (the fleet table's rows; every plot of the unit view with its text
alternative). Also prints the server's own time for the routes behind each view.

    python tests/bench/bench_page.py [--units 100] [--days 30] [--seed 301] [--runs 5]
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import sys
import tempfile
import threading
import time
from pathlib import Path

import httpx
import sqlalchemy as sa
import uvicorn

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest import db
from tests.api.test_web_page import CHROMIUM_ARGS
from tests.fleet_fixture import fill
from tests.services import free_port, wait_port

PAINTED = "new Promise((done) => requestAnimationFrame(() => done(performance.now())))"


def _serve(engine: object) -> tuple[uvicorn.Server, threading.Thread, str]:
    port = free_port()
    server = uvicorn.Server(
        uvicorn.Config(create_app(engine), host="127.0.0.1", port=port, log_level="warning")  # type: ignore[arg-type]
    )
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    wait_port(port)
    return server, thread, f"http://127.0.0.1:{port}/"


def _route_times(url: str, key: str, unit: str, runs: int) -> None:
    h = {"Authorization": f"Bearer {key}"}
    month = f"start={time.strftime('%Y-%m-%dT%H:%M:%SZ', time.gmtime(time.time() - 30 * 86400))}"
    routes = {
        "/v1/fleet": "v1/fleet",
        "month of readings in buckets": f"v1/devices/{unit}/readings/buckets?{month}",
        "month of 8 estimate keys in buckets": f"v1/devices/{unit}/estimates?keys="
        "performance.cop,performance.cop_max,module.resistance_25c_ohm,"
        "module.resistance_25c.baseline,cabinet.ua_w_per_k,cabinet.ua.baseline,"
        f"hot_side.resistance_k_per_w,hot_side.resistance.baseline&{month}&every=21600",
        "unit detail": f"v1/fleet/units/{unit}",
    }
    with httpx.Client(headers=h, timeout=60) as client:
        for name, path in routes.items():
            times = []
            for _ in range(runs):
                t0 = time.perf_counter()
                client.get(url + path).raise_for_status()
                times.append(1000 * (time.perf_counter() - t0))
            print(f"  server {name}: median {statistics.median(times):.0f} ms over {runs} runs")


def _paint_times(url: str, key: str, unit: str, runs: int) -> None:
    from playwright.sync_api import sync_playwright

    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=chromium, args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1400, "height": 1000})
        page.on("pageerror", lambda e: print(f"  page error: {e}"))
        page.goto(url + "healthz")
        page.evaluate(f"localStorage.setItem('tecfleet.key', {key!r})")
        fleet, unit_ms = [], []
        for _ in range(runs):
            page.goto("about:blank")
            page.goto(url + "#/fleet")
            page.wait_for_selector("tr.device", timeout=60_000)
            fleet.append(page.evaluate(PAINTED))
            page.goto("about:blank")
            page.goto(url + f"#/unit/{unit}/month")
            try:
                page.wait_for_function(
                    "document.querySelector('#alt-temp').textContent.includes('over this month')"
                    " && document.querySelector('#alt-hot').textContent.length > 0",
                    timeout=60_000,
                )
            except Exception:
                print(f"  unit view not drawn; status: {page.inner_text('#status')!r}, "
                      f"temperature plot: {page.inner_text('#alt-temp')!r}")  # fmt: skip
                raise
            unit_ms.append(page.evaluate(PAINTED))
        browser.close()
    print(f"  fleet view first paint: median {statistics.median(fleet):.0f} ms "
          f"(runs: {', '.join(f'{x:.0f}' for x in fleet)})")  # fmt: skip
    print(f"  month-long unit view first paint: median {statistics.median(unit_ms):.0f} ms "
          f"(runs: {', '.join(f'{x:.0f}' for x in unit_ms)})")  # fmt: skip


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--units", type=int, default=100)
    ap.add_argument("--days", type=float, default=30.0)
    ap.add_argument("--seed", type=int, default=301)
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument(
        "--db",
        default=None,
        help="SQLAlchemy URL (default: a fresh SQLite file); a database that already holds "
        "units is measured as it is, without simulating again",
    )
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        url_db = args.db or f"sqlite:///{tmp}/bench.db"
        engine = db.make_engine(url_db)
        db.migrate(engine)
        print(
            f"== {args.units} units, {args.days:g} days, seed {args.seed}, {url_db.split(':')[0]}"
        )
        with engine.connect() as conn:
            ids = [r.device_id for r in conn.execute(sa.select(db.devices.c.device_id))]
        if ids:
            print(f"  measuring the {len(ids)} units already stored")
        else:
            t0 = time.perf_counter()
            ids = fill(engine, args.units, args.days, seed=args.seed, faults="wear:3,leak:3,fan:3")
            took = time.perf_counter() - t0
            print(f"  simulated, stored and analysed in {took:.0f} s (not timed)")
        key = create_key(engine, "bench", "read")
        server, thread, url = _serve(engine)
        try:
            _route_times(url, key, ids[0], args.runs)
            _paint_times(url, key, ids[0], args.runs)
        finally:
            server.should_exit = True
            thread.join(10)
    return 0


if __name__ == "__main__":
    sys.exit(main())
