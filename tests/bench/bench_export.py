"""Peak memory of a streamed CSV export of readings.

Run: ``python tests/bench/bench_export.py [--readings 1000000] [--db URL]``. Stores the readings
of one device (a reading every 2 s, so a million span 23 days, within the default range limit)
in a fresh SQLite file (or the database at ``--db``), then in a child process serves the API
on a real uvicorn server and downloads ``/v1/devices/{id}/export/readings.csv`` over HTTP in
that same process, discarding the bytes as they come. Prints the rows and bytes received, the
time taken, and the child's peak resident set size (``resource.getrusage``, ``ru_maxrss``)
before and after the download, and their difference: what the export itself added to a
serving process. The target (issue 21): under 100 MB for a million readings.
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

DEVICE = "bench-1"
T0 = 1_790_000_000_000
SPACING_MS = 2000
CHUNK = 50_000


def populate(url: str, n: int) -> None:
    from tecfleet.ingest import db
    from tecfleet.ingest.db import Reading

    engine = db.make_engine(url)
    db.migrate(engine)
    for start in range(0, n, CHUNK):
        db.store_batch(
            engine,
            [
                Reading(DEVICE, T0 + i * SPACING_MS, 4.0 + (i % 7) * 0.1, -3.0, 31.0, 22.0,
                        3.0, 8.0, seq=i)
                for i in range(start, min(n, start + CHUNK))
            ],
        )  # fmt: skip
    engine.dispose()


def peak_rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # Linux: KiB


def serve_and_download(url: str, n: int) -> None:
    """In this process: the API on uvicorn, and a client that streams the export."""
    import httpx
    import uvicorn

    from tecfleet.api.app import create_app
    from tecfleet.api.auth import create_key
    from tecfleet.ingest import db

    sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
    from tests.services import free_port, wait_port

    engine = db.make_engine(url)
    key = create_key(engine, "bench", "read")
    port = free_port()
    server = uvicorn.Server(
        uvicorn.Config(create_app(engine), host="127.0.0.1", port=port, log_level="warning")
    )
    threading.Thread(target=server.run, daemon=True).start()
    wait_port(port)
    base = f"http://127.0.0.1:{port}"
    headers = {"Authorization": f"Bearer {key}"}
    end_ms = T0 + n * SPACING_MS
    params = {"start": "2026-09-21T14:13:20Z", "end": _rfc3339(end_ms)}
    httpx.get(f"{base}/v1/devices/{DEVICE}", headers=headers).raise_for_status()  # warm up
    before = peak_rss_mb()
    started = time.perf_counter()
    lines = size = 0
    with httpx.stream(
        "GET", f"{base}/v1/devices/{DEVICE}/export/readings.csv",
        params=params, headers=headers, timeout=600,
    ) as response:  # fmt: skip
        response.raise_for_status()
        for piece in response.iter_bytes():
            size += len(piece)
            lines += piece.count(b"\n")
    seconds = time.perf_counter() - started
    server.should_exit = True
    print(f"rows={lines - 1} bytes={size} seconds={seconds:.1f}")
    after = peak_rss_mb()
    print(f"peak_rss_before_mb={before:.1f} peak_rss_after_mb={after:.1f}")
    print(f"export_growth_mb={after - before:.1f}")


def _rfc3339(ms: int) -> str:
    from datetime import UTC, datetime

    return datetime.fromtimestamp(ms / 1000, UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--readings", type=int, default=1_000_000)
    parser.add_argument("--db", default=None, help="SQLAlchemy URL (default: a new SQLite file)")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        serve_and_download(args.db, args.readings)
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        url = args.db or f"sqlite:///{Path(tmp) / 'bench.db'}"
        started = time.perf_counter()
        populate(url, args.readings)
        print(f"stored {args.readings} readings in {time.perf_counter() - started:.1f} s")
        root = Path(__file__).resolve().parents[2]
        child = subprocess.run(
            [sys.executable, __file__, "--child", "--db", url, "--readings", str(args.readings)],
            cwd=root, capture_output=True, text=True, check=False,
        )  # fmt: skip
        sys.stdout.write(child.stdout)
        sys.stderr.write(child.stderr)
        return child.returncode


if __name__ == "__main__":
    sys.exit(main())
