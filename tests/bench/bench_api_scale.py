"""The API at fleet scale on PostgreSQL: 10,000 registered devices and a month of estimates,
served by ``tecfleet serve --roles api`` (uvicorn) and measured with a real HTTP client (httpx)
over loopback. Targets (issue 20): ``GET /v1/devices/{id}/health`` p99 under 20 ms; the fleet
list (``/v1/devices``) and the fleet summary (``/v1/fleet/summary``) under 200 ms.

Run: ``python tests/bench/bench_api_scale.py [--devices 10000] [--days 30] [--seed 301]``.
Prints figures; asserts nothing. Starts its own PostgreSQL cluster (Debian's server binaries).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

import httpx
import numpy as np
import sqlalchemy as sa

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tecfleet.api.auth import create_key
from tecfleet.ingest import db
from tests.services import Postgres, free_port

DAY_MS = 86_400_000
#: The estimate keys the health answer carries, and a typical value of each (from memory).
KEYS = {
    "module.resistance_ohm": 2.0,
    "module.resistance_25c_ohm": 1.9,
    "module.seebeck_v_per_k": 0.05,
    "module.conductance_w_per_k": 0.5,
    "module.zt": 0.7,
    "cabinet.ua_w_per_k": 0.8,
    "cabinet.heat_leak_w": 15.0,
    "hot_side.resistance_k_per_w": 0.3,
    "performance.cop": 0.6,
    "performance.cop_max": 0.9,
    "performance.cooling_w": 30.0,
}
#: Analysis writes a fit every six hours.
EVERY_MS = 6 * 3_600_000


def populate(engine: sa.Engine, n_dev: int, days: float, seed: int) -> int:
    """Register ``n_dev`` devices and write ``days`` of estimates, interleaved in time across
    the fleet as the analysis runner writes them; a twentieth of the devices with an open
    alert. Returns the number of estimate rows."""
    now = db.now_ms()
    start = now - int(days * DAY_MS)
    ids = [f"cooler-{i:05d}" for i in range(n_dev)]
    module = {"couples": 127, "i_max_a": 6.0, "v_max_v": 15.4, "dt_max_k": 68.0}
    cabinet = {"volume_l": 50.0, "setpoint_c": 5.0, "low_limit_c": 2.0, "high_limit_c": 8.0}
    with engine.begin() as c:
        c.execute(
            db.devices.insert(),
            [{"device_id": d, "label": d, "site": f"site-{i % 50}", "module": module,
              "cabinet": cabinet, "readings": 43_200, "last_reading_ms": now - 30_000,
              "first_reading_ms": start, "last_t_cabinet": 3.0 + (i % 70) / 10,
              "status": "online", "status_at_ms": start, "registered_at_ms": start}
             for i, d in enumerate(ids)],
        )  # fmt: skip
        c.execute(sa.select(sa.func.setseed(seed / 1000.0)))
        values = ", ".join(f"('{k}', {v})" for k, v in KEYS.items())
        c.execute(
            sa.text(
                "INSERT INTO estimates (device_id, key, at_ms, value, stderr, n, reliable) "
                "SELECT d.device_id, k.key, t.at_ms, k.base * (0.9 + 0.2 * random()), "
                "k.base * 0.01, 360, true "
                f"FROM generate_series(:start, :now, {EVERY_MS}) AS t(at_ms) "
                "CROSS JOIN devices d "
                f"CROSS JOIN (VALUES {values}) AS k(key, base) "
                "ORDER BY t.at_ms, d.device_id"
            ),
            {"start": start, "now": now},
        )
        rng = np.random.default_rng(seed)
        alerted = rng.choice(n_dev, size=n_dev // 20, replace=False)
        c.execute(
            db.alerts.insert(),
            [{"device_id": ids[i], "kind": "heat_leak", "severity": "warning", "state": "open",
              "opened_ms": now - DAY_MS, "updated_ms": now - DAY_MS,
              "summary": "Cabinet heat leak rising: check the door seal.", "evidence": {}}
             for i in alerted],
        )  # fmt: skip
        count = c.execute(sa.select(sa.func.count()).select_from(db.estimates)).scalar_one()
    with engine.connect().execution_options(isolation_level="AUTOCOMMIT") as c:
        c.execute(sa.text("VACUUM ANALYZE"))
    return int(count)


def database_ms(engine: sa.Engine, device_ids: list[str]) -> np.ndarray:
    """Server-side execution time of the health answer's estimate query [ms], from
    EXPLAIN ANALYZE: what the database spends, apart from round trips and the HTTP stack."""
    from tecfleet.ingest.db import analysis

    spent = []
    with engine.connect() as c:
        for device_id in device_ids:
            query = analysis.latest_estimates_query(device_id)
            compiled = query.compile(c, compile_kwargs={"literal_binds": True})
            plan = c.execute(sa.text(f"EXPLAIN (ANALYZE, FORMAT JSON) {compiled}")).scalar_one()
            spent.append(float(plan[0]["Execution Time"]) + float(plan[0]["Planning Time"]))
    return np.array(spent)


def serve(url: str, port: int) -> subprocess.Popen[bytes]:
    tecfleet = Path(sys.executable).with_name("tecfleet")
    # One client asks as fast as it can: a rate limit made for integrators would stop it.
    env = dict(
        os.environ,
        TECFLEET_DATABASE_URL=url,
        TECFLEET_ROLES="api",
        TECFLEET_API_RATE_PER_MINUTE="1000000",
    )
    env["TECFLEET_HTTP_PORT"] = str(port)
    process = subprocess.Popen([str(tecfleet), "serve"], env=env, stdout=subprocess.DEVNULL)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        try:
            if httpx.get(f"http://127.0.0.1:{port}/readyz", timeout=1).status_code == 200:
                return process
        except httpx.TransportError:
            time.sleep(0.2)
    process.kill()
    raise RuntimeError("tecfleet serve did not become ready in 60 s")


def timed(client: httpx.Client, paths: list[str]) -> np.ndarray:
    """Wall time of each GET [ms]; every answer must be 200."""
    spent = []
    for path in paths:
        t0 = time.perf_counter()
        answer = client.get(path)
        spent.append(1000 * (time.perf_counter() - t0))
        if answer.status_code != 200:
            raise RuntimeError(f"GET {path}: {answer.status_code} {answer.text[:200]}")
    return np.array(spent)


def report(name: str, ms: np.ndarray, target_ms: float, stat: str) -> None:
    p50, p99 = np.percentile(ms, 50), np.percentile(ms, 99)
    judged = p99 if stat == "p99" else ms.max()
    verdict = "meets" if judged < target_ms else "MISSES"
    print(f"{name:44s} n={len(ms):5d}  p50 {p50:7.1f}  p99 {p99:7.1f}  max {ms.max():7.1f} ms"
          f"  ({stat} {verdict} < {target_ms:g} ms)")  # fmt: skip


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--devices", type=int, default=10_000)
    ap.add_argument("--days", type=float, default=30.0)
    ap.add_argument("--seed", type=int, default=301)
    ap.add_argument("--requests", type=int, default=2000)
    args = ap.parse_args(argv)
    pg = Postgres()
    pg.start()
    server = None
    try:
        url = pg.create_database("api_scale")
        engine = db.make_engine(url)
        db.migrate(engine)
        t0 = time.perf_counter()
        rows = populate(engine, args.devices, args.days, args.seed)
        loaded = time.perf_counter() - t0
        print(f"== {args.devices} devices, {rows} estimates ({args.days:g} days), seed "
              f"{args.seed}; loaded in {loaded:.0f} s (not timed) ==")  # fmt: skip
        key = create_key(engine, "bench", "read")
        rng = np.random.default_rng(args.seed + 1)
        sample = [f"cooler-{i:05d}" for i in rng.integers(0, args.devices, size=500)]
        report("health estimates query, database only", database_ms(engine, sample), 20, "p99")
        engine.dispose()
        port = free_port()
        server = serve(url, port)
        rng = np.random.default_rng(args.seed)
        headers = {"Authorization": f"Bearer {key}"}
        with httpx.Client(
            base_url=f"http://127.0.0.1:{port}", headers=headers, timeout=120
        ) as client:
            picks = rng.integers(0, args.devices, size=args.requests + 200)
            health = [f"/v1/devices/cooler-{i:05d}/health" for i in picks]
            timed(client, health[:200])  # warm-up: connections, plans, caches
            report("GET /v1/devices/{id}/health", timed(client, health[200:]), 20, "p99")
            for limit in (100, 1000):  # 1000: api_max_page_size
                pages = [f"/v1/devices?limit={limit}"] * 20
                report(f"GET /v1/devices?limit={limit} (first page)", timed(client, pages),
                       200, "max")  # fmt: skip
            walk, cursor = [], None
            while True:
                t0 = time.perf_counter()
                query = f"/v1/devices?limit=1000{'' if cursor is None else '&cursor=' + cursor}"
                page = client.get(query).json()
                walk.append(1000 * (time.perf_counter() - t0))
                cursor = page["next_cursor"]
                if cursor is None:
                    break
            report("GET /v1/devices?limit=1000 (every page)", np.array(walk), 200, "max")
            report("GET /v1/fleet/summary", timed(client, ["/v1/fleet/summary"] * 20), 200, "max")
            # Every unit with its figures in words: what the page draws (no target of its own).
            report("GET /v1/fleet (every unit)", timed(client, ["/v1/fleet"] * 5), 200, "max")
    finally:
        if server is not None:
            server.terminate()
            server.wait(30)
        pg.destroy()
    return 0


if __name__ == "__main__":
    sys.exit(main())
