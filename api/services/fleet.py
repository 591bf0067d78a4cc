"""The fleet as an engineer reads it: every unit's state and health figures, the worst units
by wear, heat leak and hot-side sink, the COP spread, one unit's full view, and the time
buckets behind the page's plots."""

from __future__ import annotations

import time
from collections.abc import Collection, Sequence
from typing import Any

import numpy as np
from sqlalchemy.engine import Engine

from tecfleet.analytics import runner
from tecfleet.analytics.alerts import AlertPolicy, Band, policy_for
from tecfleet.api import readout
from tecfleet.api.services.alerts import list_alerts
from tecfleet.api.services.devices import is_online, not_found, require_device
from tecfleet.api.timefmt import ms_to_rfc3339, rfc3339_to_ms
from tecfleet.ingest.db import alert_records, buckets, overview
from tecfleet.ingest.db import fleet as fleet_db
from tecfleet.ingest.db.overview import LatestEstimate

#: Estimate keys the overview shows for every unit.
FLEET_KEYS = (
    "module.resistance_25c_ohm",
    "module.resistance_25c.change_pct",
    "module.days_to_wear_limit",
    "cabinet.ua_w_per_k",
    "cabinet.ua.change_pct",
    "hot_side.resistance_k_per_w",
    "hot_side.resistance.change_pct",
    "performance.cop",
    "performance.cop_max",
)

#: Worst-first lists: name -> the change it is ranked by.
WORST_BY = {
    "wear": "module.resistance_25c.change_pct",
    "leak": "cabinet.ua.change_pct",
    "sink": "hot_side.resistance.change_pct",
}

#: Units on each worst-first list.
WORST_COUNT = 5

#: Bucket widths the plots snap to [s], and the buckets a range aims at (about one per two
#: pixels of a plot a page wide; common practice, no source).
BUCKET_WIDTHS_S = (60, 120, 300, 600, 900, 1800, 3600, 7200, 10800, 21600, 43200, 86400)
TARGET_BUCKETS = 400
#: Most buckets one request may ask for.
MAX_BUCKETS = 5000

MS_DAY = 86_400_000
#: A wear limit further away than this is not projected to a date: the page reads it as
#: "over a year" [days] (common practice, no source).
PROJECTION_HORIZON_DAYS = 365


def _figure(key: str, est: LatestEstimate | dict[str, Any] | None) -> dict[str, Any]:
    if est is None:
        return {"value": None, "text": readout.NO_DATA, "reliable": False}
    if isinstance(est, LatestEstimate):
        value, reliable, at, stderr = est.value, est.reliable, est.at_ms, est.stderr
        at_text = ms_to_rfc3339(at)
    else:
        value, reliable, at_text, stderr = est["value"], est["reliable"], est["at"], est["stderr"]
    return {
        "value": value,
        "text": readout.estimate_text(key, value),
        "reliable": bool(reliable) and value is not None,
        "at": at_text,
        "stderr": stderr,
    }


def _band_out(band: Band, profile: str) -> dict[str, Any]:
    return {"low_c": band.low_c, "high_c": band.high_c, "source": band.source, "profile": profile}


def _units(engine: Engine, device_id: str | None = None) -> list[dict[str, Any]]:
    rows = overview.fleet_rows(engine, FLEET_KEYS, device_id)
    with engine.connect() as conn:
        overrides = alert_records.load_overrides(conn)
    base = AlertPolicy()
    wall_ms = int(time.time() * 1000)
    units = []
    for d in rows.devices:
        policy = policy_for(base, overrides, d.device_id, d.site)
        band = policy.band(d.cabinet)
        t_now = d.t_cabinet_now
        est = rows.estimates.get(d.device_id, {})
        in_service = None
        if d.first_reading_ms is not None and d.last_reading_ms is not None:
            in_service = (int(d.last_reading_ms) - int(d.first_reading_ms)) / MS_DAY
        units.append(
            {
                "device_id": d.device_id,
                "label": d.label,
                "site": d.site,
                "online": is_online(d.last_reading_ms, d.status, wall_ms),
                "in_range": None if t_now is None else band.low_c <= t_now <= band.high_c,
                "t_cabinet_c": t_now,
                "last_reading_at": ms_to_rfc3339(d.last_reading_ms),
                "days_in_service": in_service,
                "open_alerts": rows.open_alerts.get(d.device_id, {}),
                "figures": {k: _figure(k, est.get(k)) for k in FLEET_KEYS},
                "band": _band_out(band, policy.profile),
                "_row": d,
            }
        )
    return units


def _spread(values: Sequence[float]) -> list[float | None]:
    if not values:
        return [None, None, None]
    a = np.asarray(values, dtype=np.float64)
    return [float(a.min()), float(np.median(a)), float(a.max())]


def fleet_summary(engine: Engine, sites: Collection[str] | None = None) -> dict[str, Any]:
    """Every unit (of ``sites`` when given) with its state and health figures, counts by
    state, the worst units by wear, heat leak and hot-side sink, and the spread of COP."""
    units = _units(engine)
    if sites is not None:
        units = [u for u in units if u["site"] in sites]
    out = _at_a_glance(units)
    for u in units:
        u.pop("_row")
    return {**out, "units": units}


def fleet_counts(engine: Engine, sites: Collection[str] | None = None) -> dict[str, Any]:
    """What :func:`fleet_summary` says of the whole fleet without its units: counts by
    state, the worst units and the COP spread. The database ranks the worst units and pairs
    the COPs, and only the listed units' figures are put in words, so a fleet of ten thousand
    is summed up from one light row per unit."""
    rows = overview.count_rows(engine, tuple(WORST_BY.values()), SPREAD_KEYS, WORST_COUNT, sites)
    with engine.connect() as conn:
        overrides = alert_records.load_overrides(conn)
    base = AlertPolicy()
    wall_ms = int(time.time() * 1000)
    bands: dict[tuple[Any, ...], Band] = {}
    units = []
    for device_id, site, status, last_ms, t_now, low, high in rows.devices:
        # A band depends on the overrides in force and the registration's limits only.
        own = ("device", device_id) in overrides
        which = ("device", device_id, low, high) if own else ("site", site, low, high)
        band = bands.get(which)
        if band is None:
            policy = policy_for(base, overrides, device_id, site)
            band = bands[which] = policy.band({"low_limit_c": low, "high_limit_c": high})
        units.append(
            {
                "online": is_online(last_ms, status, wall_ms),
                "in_range": None if t_now is None else band.low_c <= t_now <= band.high_c,
                "open_alerts": rows.open_alerts.get(device_id, {}),
            }
        )
    worst = {
        name: [
            _worst_entry(key, r.device_id, r.label, float(r.value), bool(r.reliable))
            for r in rows.highest[key]
        ]
        for name, key in WORST_BY.items()
    }
    cops = [cop for cop, _ in rows.cop_pairs]
    ratios = [cop / best for cop, best in rows.cop_pairs if best]
    return _glance(_counts(units), worst, cops, ratios)


#: Estimate keys the COP spread is drawn from.
SPREAD_KEYS = ("performance.cop", "performance.cop_max")


def _value(u: dict[str, Any], key: str) -> Any:
    return (u["figures"].get(key) or {}).get("value")


def _at_a_glance(units: list[dict[str, Any]]) -> dict[str, Any]:
    """Counts by state, worst units and COP spread of units as :func:`_units` makes them."""
    worst: dict[str, list[dict[str, Any]]] = {}
    for name, key in WORST_BY.items():
        ranked = [u for u in units if _value(u, key) is not None]
        ranked.sort(key=lambda u: -float(_value(u, key)))
        worst[name] = [
            _worst_entry(
                key, u["device_id"], u["label"], _value(u, key), u["figures"][key]["reliable"]
            )
            for u in ranked[:WORST_COUNT]
        ]
    cops, ratios = [], []
    for u in units:
        cop, best = _value(u, "performance.cop"), _value(u, "performance.cop_max")
        if cop is not None:
            cops.append(float(cop))
            if best:
                ratios.append(float(cop) / float(best))
    return _glance(_counts(units), worst, cops, ratios)


def _counts(units: list[dict[str, Any]]) -> dict[str, int]:
    """Units by state, from each unit's ``online``, ``in_range`` and ``open_alerts``."""
    return {
        "total": len(units),
        "online": sum(u["online"] for u in units),
        "offline": sum(not u["online"] for u in units),
        "in_range": sum(u["in_range"] is True for u in units),
        "out_of_range": sum(u["in_range"] is False for u in units),
        "critical": sum("critical" in u["open_alerts"] for u in units),
        "warning": sum(
            "warning" in u["open_alerts"] and "critical" not in u["open_alerts"] for u in units
        ),
        "clear": sum(not u["open_alerts"] for u in units),
    }


def _worst_entry(
    key: str, device_id: str, label: str | None, value: Any, reliable: bool
) -> dict[str, Any]:
    return {
        "device_id": device_id,
        "label": label,
        "value": value,
        "text": readout.estimate_text(key, value),
        "reliable": reliable,
    }


def _glance(
    counts: dict[str, int],
    worst: dict[str, list[dict[str, Any]]],
    cops: list[float],
    ratios: list[float],
) -> dict[str, Any]:
    return {
        "generated_at": ms_to_rfc3339(int(time.time() * 1000)),
        "counts": counts,
        "worst": worst,
        "cop_spread": {"units": len(cops), "cop": _spread(cops), "cop_of_best": _spread(ratios)},
    }


def capacity_verdict(health: dict[str, dict[str, Any]]) -> str:
    """The capacity verdict at the design ambient, in words."""

    def value(key: str) -> Any:
        return (health.get(key) or {}).get("value")

    holdable, margin, ambient = (
        value("capacity.holdable"),
        value("capacity.margin_w"),
        value("capacity.design_ambient_c"),
    )
    if holdable is None or margin is None or ambient is None:
        return f"Capacity at the design ambient: {readout.NO_DATA}."
    at = readout.temperature(ambient)
    if holdable >= 0.5:  # a flag stored as 1 or 0
        text = f"Holds its setpoint at the design ambient of {at} with "
        text += f"{readout.significant(margin, 'W')} to spare."
    else:
        text = f"Cannot hold its setpoint at the design ambient of {at}: short by "
        text += f"{readout.significant(-float(margin), 'W')}."
    losing = value("capacity.losing_setpoint_h")
    if losing:
        text += (
            f" On its last analysed day it was well above its setpoint at near full drive for "
            f"{readout.duration(float(losing) * 3600)}."
        )
    return text


def unit_detail(engine: Engine, device_id: str) -> dict[str, Any]:
    """One unit: its overview row, every estimate as a figure, its registration, the wear
    limit and its projected crossing, and the capacity verdict."""
    require_device(engine, device_id)
    (unit,) = _units(engine, device_id)
    row = unit.pop("_row")
    health = runner.latest_health(engine, device_id)
    limit_pct = runner.AnalysisSettings().wear_limit_pct
    baseline = (health.get("module.resistance_25c.baseline") or {}).get("value")
    days = unit["figures"]["module.days_to_wear_limit"]
    crossing = None
    known = days["value"] is not None and days["at"] is not None
    if known and 0 <= days["value"] <= PROJECTION_HORIZON_DAYS:
        from_ms = rfc3339_to_ms(days["at"])
        crossing = ms_to_rfc3339(from_ms + int(float(days["value"]) * MS_DAY))
    return unit | {
        "module": row.module,
        "cabinet": row.cabinet,
        "first_seen_at": ms_to_rfc3339(row.first_reading_ms),
        "all_figures": {k: _figure(k, v) for k, v in health.items()},
        "wear_limit_pct": limit_pct,
        "wear_limit_ohm": None if baseline is None else baseline * (1 + limit_pct / 100.0),
        "wear_limit_at": crossing,
        "capacity": capacity_verdict(health),
    }


def bucket_width_s(start_ms: int, end_ms: int, every_s: int | None) -> int:
    """The bucket width [s]: the one asked for, or the snapped width giving about
    ``TARGET_BUCKETS`` buckets over the range; ValueError if it asks for too many."""
    span_s = max((end_ms - start_ms) / 1000.0, 1.0)
    if every_s is None:
        wanted = span_s / TARGET_BUCKETS
        every_s = next((w for w in BUCKET_WIDTHS_S if w >= wanted), BUCKET_WIDTHS_S[-1])
    if span_s / every_s > MAX_BUCKETS:
        raise ValueError(f"{span_s / every_s:.0f} buckets asked for; at most {MAX_BUCKETS}")
    return every_s


def _range(
    engine: Engine, device_id: str, start_ms: int | None, end_ms: int | None, last_s: int | None
) -> tuple[int, int]:
    """The range asked for; by default ``last_s`` seconds (a day) up to the device's newest
    reading."""
    found = fleet_db.device_detail(engine, device_id)
    if found is None:
        raise not_found(device_id)
    if end_ms is None:
        last = found[0].last_reading_ms
        end_ms = int(last) + 1 if last is not None else int(time.time() * 1000)
    if start_ms is None:
        start_ms = end_ms - (MS_DAY if last_s is None else last_s * 1000)
    return start_ms, end_ms


def reading_buckets(
    engine: Engine,
    device_id: str,
    start_ms: int | None,
    end_ms: int | None,
    every_s: int | None,
    channels: Sequence[str] = buckets.BUCKET_CHANNELS,
    last_s: int | None = None,
) -> dict[str, Any]:
    """Readings of one device in buckets (default: the last day to its newest reading)."""
    start_ms, end_ms = _range(engine, device_id, start_ms, end_ms, last_s)
    every = bucket_width_s(start_ms, end_ms, every_s)
    found = buckets.reading_buckets(engine, device_id, start_ms, end_ms, every * 1000, channels)
    items = [
        {
            "t": ms_to_rfc3339(b.start_ms),
            "t_ms": b.start_ms,
            "n": b.n,
            "channels": {
                name: {"lo": lo, "hi": hi, "mean": mean}
                for name, (lo, hi, mean) in b.channels.items()
            },
        }
        for b in found
    ]
    return {
        "start": ms_to_rfc3339(start_ms),
        "end": ms_to_rfc3339(end_ms),
        "every_s": every,
        "items": items,
    }


def estimate_buckets(
    engine: Engine,
    device_id: str,
    keys: Sequence[str],
    start_ms: int | None,
    end_ms: int | None,
    every_s: int | None,
    last_s: int | None = None,
) -> dict[str, Any]:
    """Several estimate keys of one device in buckets (default: the last day)."""
    start_ms, end_ms = _range(engine, device_id, start_ms, end_ms, last_s)
    every = bucket_width_s(start_ms, end_ms, every_s)
    series: dict[str, list[dict[str, Any]]] = {k: [] for k in keys}
    for b in buckets.estimate_buckets(engine, device_id, keys, start_ms, end_ms, every * 1000):
        series[b.key].append(
            {
                "t": ms_to_rfc3339(b.start_ms),
                "t_ms": b.start_ms,
                "n": b.n,
                "reliable_n": b.reliable_n,
                "lo": b.low,
                "hi": b.high,
                "mean": b.mean,
                "stderr": b.stderr,
            }
        )
    return {
        "start": ms_to_rfc3339(start_ms),
        "end": ms_to_rfc3339(end_ms),
        "every_s": every,
        "series": series,
    }


def alert_readouts(
    engine: Engine,
    limit: int,
    cursor: str | None,
    *,
    device: str | None = None,
    state: str | None = None,
    sites: Collection[str] | None = None,
) -> tuple[list[dict[str, Any]], str | None]:
    """A page of alerts newest first (of ``sites`` when given), each with its evidence as
    text people read, and the cursor of the next page."""
    items, next_cursor = list_alerts(engine, limit, cursor, device=device, state=state, sites=sites)
    return [
        {
            "alert": a.model_dump(),
            "evidence_text": [
                {"name": n, "text": t} for n, t in readout.evidence_lines(a.evidence)
            ],
        }
        for a in items
    ], next_cursor
