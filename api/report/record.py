"""What a cold-chain report holds for one unit over a period, read from the store."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy.engine import Engine

from tecfleet.analytics.alerts import (
    AlertPolicy,
    Band,
    audit_trail,
    mean_kinetic_temperature,
    policy_for,
)
from tecfleet.api.timefmt import rfc3339_to_ms
from tecfleet.ingest.db import alert_records, buckets, overview, read_arrays
from tecfleet.ingest.db import fleet as fleet_db
from tecfleet.ingest.errors import NotFoundError

__all__ = ["Excursion", "UnitRecord", "excursions", "gather", "period_ms", "units_of"]

#: A gap between readings longer than this ends an excursion [ms]: the unit was not heard
#: from, so the record cannot say it stayed out (common practice, no source).
GAP_MS = 10 * 60 * 1000

#: Health keys printed and plotted, with their names on paper.
HEALTH_KEYS = {
    "module.resistance_25c_ohm": "Module resistance at 25 °C",
    "module.resistance_25c.change_pct": "Module resistance change since commissioning",
    "cabinet.ua_w_per_k": "Cabinet heat-leak conductance UA",
    "cabinet.ua.change_pct": "UA change since commissioning",
    "hot_side.resistance_k_per_w": "Hot-side sink resistance",
    "hot_side.resistance.change_pct": "Hot-side resistance change since commissioning",
    "performance.cop": "COP",
}

MS_DAY = 86_400_000


@dataclass(frozen=True)
class Excursion:
    """A run of readings outside the band: start [ms], duration [s], the peak (the warmest of
    a high run, the coldest of a low one) [°C], its mean kinetic temperature [°C] and side."""

    start_ms: int
    duration_s: float
    peak_c: float
    mkt_c: float
    side: str
    samples: int


@dataclass
class UnitRecord:
    """One unit's record over ``start_ms <= t < end_ms``."""

    device_id: str
    label: str | None
    site: str | None
    start_ms: int
    end_ms: int
    band: Band
    t_ms: NDArray[np.int64]
    t_cabinet: NDArray[np.float64]
    time_in_range_pct: float | None
    mkt_c: float | None
    excursions: list[Excursion]
    alerts: list[dict[str, Any]] = field(default_factory=list)
    health: dict[str, list[tuple[int, float, bool]]] = field(default_factory=dict)


def excursions(t_ms: NDArray[np.int64], t_c: NDArray[np.float64], band: Band) -> list[Excursion]:
    """Runs of samples outside ``band`` [°C], split at gaps over ``GAP_MS``; each with the
    MKT of its own samples (the excursion rule's function, USP <1079>)."""
    out_low, out_high = t_c < band.low_c, t_c > band.high_c
    side = np.where(out_high, 1, np.where(out_low, -1, 0))
    found: list[Excursion] = []
    i, n = 0, len(t_c)
    while i < n:
        if side[i] == 0:
            i += 1
            continue
        j = i
        while j + 1 < n and side[j + 1] == side[i] and t_ms[j + 1] - t_ms[j] <= GAP_MS:
            j += 1
        run = t_c[i : j + 1]
        step = float(np.median(np.diff(t_ms))) if n > 1 else 60_000.0
        found.append(
            Excursion(
                int(t_ms[i]),
                (int(t_ms[j]) - int(t_ms[i]) + min(step, GAP_MS)) / 1000.0,
                float(run.max() if side[i] > 0 else run.min()),
                mean_kinetic_temperature(run),
                "above" if side[i] > 0 else "below",
                int(run.size),
            )
        )
        i = j + 1
    return found


def gather(engine: Engine, device_id: str, start_ms: int, end_ms: int) -> UnitRecord:
    """The record of one unit over the period (NotFoundError for an unknown unit)."""
    found = fleet_db.device_detail(engine, device_id)
    if found is None:
        raise NotFoundError(f"device {device_id!r} is not known")
    row = found[0]
    with engine.connect() as conn:
        overrides = alert_records.load_overrides(conn)
        arr = read_arrays(conn, device_id, ["ts_ms", "t_cabinet"], start_ms, end_ms)
    band = policy_for(AlertPolicy(), overrides, device_id, row.site).band(row.cabinet)
    t_ms, t_c = arr[:, 0].astype(np.int64), arr[:, 1]
    in_range = None
    mkt = None
    if t_c.size:
        in_range = 100.0 * float(np.mean((t_c >= band.low_c) & (t_c <= band.high_c)))
        mkt = mean_kinetic_temperature(t_c)
    record = UnitRecord(
        device_id, row.label, row.site, start_ms, end_ms, band, t_ms, t_c, in_range, mkt,
        excursions(t_ms, t_c, band),
    )  # fmt: skip
    record.alerts = _alerts(engine, device_id, start_ms, end_ms)
    every = max(MS_DAY // 4, (end_ms - start_ms) // 200)
    for b in buckets.estimate_buckets(
        engine, device_id, list(HEALTH_KEYS), start_ms, end_ms, every
    ):
        record.health.setdefault(b.key, []).append((b.start_ms, b.mean, b.reliable_n == b.n))
    return record


def _alerts(engine: Engine, device_id: str, start_ms: int, end_ms: int) -> list[dict[str, Any]]:
    """The unit's alerts open at any time in the period, oldest first, with their audit trail."""
    rows = alert_records.alert_page(engine, 10_000, None, device=device_id)
    out = []
    for r in reversed(rows):
        closed = r.resolved_ms if r.resolved_ms is not None else end_ms
        if r.opened_ms < end_ms and closed >= start_ms:
            out.append(
                {
                    "id": int(r.id),
                    "kind": r.kind,
                    "severity": r.severity,
                    "state": r.state,
                    "opened_ms": int(r.opened_ms),
                    "resolved_ms": r.resolved_ms,
                    "summary": r.summary,
                    "trail": audit_trail(engine, int(r.id)),
                }
            )
    return out


def period_ms(start: str, end: str) -> tuple[int, int]:
    """A period from two dates (``YYYY-MM-DD``, UTC, the end day included) or RFC 3339 times
    [ms]; ValueError when either is unreadable or the end is not after the start."""
    bounds = []
    for k, text in enumerate((start, end)):
        day = _day(text)
        if day is not None:
            bounds.append(day + (MS_DAY if k == 1 else 0))
        else:
            bounds.append(rfc3339_to_ms(text))
    if bounds[1] <= bounds[0]:
        raise ValueError("the report's end must come after its start")
    return bounds[0], bounds[1]


def _day(text: str) -> int | None:
    try:
        moment = datetime.strptime(text, "%Y-%m-%d").replace(tzinfo=UTC)
    except ValueError:
        return None
    return int(moment.timestamp() * 1000)


def units_of(engine: Engine, device_id: str | None, site: str | None) -> list[str]:
    """The unit asked for, or every unit of the site (NotFoundError if none)."""
    if device_id is not None:
        if not fleet_db.device_exists(engine, device_id):
            raise NotFoundError(f"device {device_id!r} is not known")
        return [device_id]
    ids = [d.device_id for d in overview.fleet_rows(engine, ()).devices if d.site == site]
    if not ids:
        raise NotFoundError(f"no unit is registered at site {site!r}")
    return ids
