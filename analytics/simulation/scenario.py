"""The demo fleet: Kavenmoor Vale Health Cooperative (an invented regional clinic network;
every site, organisation and person in the demo is made up).

24 thermoelectric units at six invented sites: medicine fridges (24 V, two modules in
series), vaccine carriers and sample fridges (12 V, one module), and enclosure coolers in
outdoor telecom huts that keep electronics below 30 °C. Most are healthy; a few carry faults
developed far enough at "now" for the diagnostics to see them:

* ``kv-fer-med02`` module wearing: R25 ramping to +8 % over the last 10 days;
* ``kv-ald-smp01`` gasket leak: UA stepped 1.6x 3 days ago;
* ``kv-sto-med01`` hot-side fan failed 6 hours ago: r_hot x3;
* ``kv-mil-vac02`` cabinet probe drifting: +2.5 K over the last 5 days;
* ``kv-rid-enc02`` hot-side probe stuck since 2 days ago;
* ``kv-van-vac01`` offline for the last 20 hours;
* ``kv-mil-med02`` a 5-hour power cut 2 days ago: the cabinet leaves 2-8 °C (an excursion).

``demo_fleet`` builds the fleet and the registrations; ``run_demo_feed`` backfills the history
over MQTT in large batches, then publishes live at the wall clock until stopped.
"""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Callable
from typing import Any

import numpy as np

from tecfleet.analytics import heat_paths

from .model import Simulator
from .publisher import MqttSink, publish_fleet
from .specs import (
    STANDARD_RATINGS,
    DeviceSpec,
    Fault,
    FleetSpec,
    ScheduledEvent,
    device_from_ratings,
)

log = logging.getLogger(__name__)

__all__ = ["COMPANY", "SITES", "demo_fleet", "run_demo_feed"]

COMPANY = "Kavenmoor Vale Health Cooperative"

#: site code -> (name, indoor?, mean ambient °C, daily swing K, UTC offset h)
SITES: dict[str, tuple[str, bool, float, float, float]] = {
    "mil": ("Milquarren Clinic", True, 22.0, 1.5, 1.0),
    "ald": ("Aldervoss Dispensary", True, 23.0, 2.0, 1.0),
    "fer": ("Ferrowyn Health Centre", True, 21.5, 1.0, 1.0),
    "sto": ("Stovendel Sample Lab", True, 24.0, 1.5, 1.0),
    "van": ("Outreach Van 3", True, 24.0, 4.0, 1.0),
    "rid": ("Ridgmarrow Telecom Hut", False, 17.0, 7.0, 1.0),
}

# (device id, kind, label)
_UNITS: tuple[tuple[str, str, str], ...] = (
    ("kv-mil-med01", "med", "Milquarren dispensary fridge A"),
    ("kv-mil-med02", "med", "Milquarren dispensary fridge B"),
    ("kv-mil-vac01", "vac", "Milquarren vaccine carrier 1"),
    ("kv-mil-vac02", "vac", "Milquarren vaccine carrier 2"),
    ("kv-ald-med01", "med", "Aldervoss dispensary fridge"),
    ("kv-ald-smp01", "smp", "Aldervoss counter sample fridge"),
    ("kv-ald-vac01", "vac", "Aldervoss vaccine carrier"),
    ("kv-fer-med01", "med", "Ferrowyn treatment-room fridge"),
    ("kv-fer-med02", "med", "Ferrowyn insulin fridge"),
    ("kv-fer-smp01", "smp", "Ferrowyn phlebotomy sample fridge"),
    ("kv-fer-vac01", "vac", "Ferrowyn vaccine carrier"),
    ("kv-sto-med01", "med", "Stovendel reagent fridge"),
    ("kv-sto-smp01", "smp", "Stovendel sample fridge 1"),
    ("kv-sto-smp02", "smp", "Stovendel sample fridge 2"),
    ("kv-sto-smp03", "smp", "Stovendel sample fridge 3"),
    ("kv-van-vac01", "vac", "Outreach van vaccine carrier A"),
    ("kv-van-vac02", "vac", "Outreach van vaccine carrier B"),
    ("kv-van-smp01", "smp", "Outreach van sample box"),
    ("kv-rid-enc01", "enc", "Ridgmarrow radio cabinet cooler"),
    ("kv-rid-enc02", "enc", "Ridgmarrow battery cabinet cooler"),
    ("kv-rid-enc03", "enc", "Ridgmarrow fibre cabinet cooler"),
    ("kv-mil-smp01", "smp", "Milquarren lab sample fridge"),
    ("kv-ald-med02", "med", "Aldervoss cold-chain fridge"),
    ("kv-fer-enc01", "enc", "Ferrowyn server-closet cooler"),
)

DAY = 86_400.0


def _unit(device_id: str, kind: str, label: str, rng: np.random.Generator) -> DeviceSpec:
    site_code = device_id.split("-")[1]
    site, indoor, t_mean, swing, utc = SITES[site_code]
    ratings = dict(STANDARD_RATINGS)
    spread = {"s": rng.normal(1, 0.02), "r": rng.normal(1, 0.03), "k": rng.normal(1, 0.03)}
    climate = {
        "t_amb_mean_c": t_mean + float(rng.normal(0, 0.7)),
        "t_amb_daily_k": swing * float(rng.uniform(0.8, 1.2)),
        "t_amb_phase_h": float(rng.uniform(14, 17)),
        "t_amb_weather_k": 1.0 if indoor else 3.0,
        "rh_mean": float(rng.uniform(35, 55)),
        "utc_offset_h": utc,
    }
    sensors = {
        "sensor_bias": tuple(float(x) for x in rng.normal(0, [0.15] * 4 + [0.01, 0.01, 2.0])),
        "off_voltage": "open_circuit" if rng.random() < 0.6 else "zero",
        "ctrl_bias_k": float(rng.normal(0, 0.1)),
    }
    if kind == "med":  # two modules in series
        ratings["count"] = 2
    volume, body = _body(kind, rng)
    air = heat_paths.air_heat_capacity(volume / 1000.0, 278.15)
    return device_from_ratings(
        device_id,
        ratings,
        spread,
        label=label,
        site=site,
        volume_l=round(volume, 1),
        c_air=air + 15.0 * volume,  # liner and shelves, about 15 J/K per litre (no source)
        g_contents=float(rng.uniform(1.5, 3.0)),
        cuts_per_30d=0.3,
        **climate,
        **sensors,
        **body,
    )


def _body(kind: str, rng: np.random.Generator) -> tuple[float, dict[str, Any]]:
    """Volume [L] and the cabinet, drive and use of a unit of ``kind`` (med, vac, smp, enc).

    The cabinets' heat paths and capacities are plausible values (common practice, no
    source)."""
    body: dict[str, Any]
    if kind == "med":  # 24 V upright medicine fridge, two modules in series, 2-8 °C
        volume = float(rng.uniform(45, 60))
        body = {
            "ua": float(rng.uniform(0.6, 0.8)),
            "r_hot": float(rng.uniform(0.12, 0.16)),
            "r_cold": float(rng.uniform(0.25, 0.3)),
            "c_contents": float(rng.uniform(20_000, 40_000)),
            "v_supply": 24.0,
            "setpoint_c": 5.0,
            "door_per_day": float(rng.uniform(6, 14)),
            "low_limit_c": 2.0,
            "high_limit_c": 8.0,
        }
    elif kind == "vac":  # 12 V vaccine carrier, one module, proportional current control
        volume = float(rng.uniform(18, 25))
        body = {
            "ua": float(rng.uniform(0.3, 0.4)),
            "r_hot": float(rng.uniform(0.2, 0.28)),
            "r_cold": float(rng.uniform(0.4, 0.5)),
            "c_contents": float(rng.uniform(5_000, 10_000)),
            "v_supply": 12.0,
            "control": "proportional",
            "setpoint_c": 5.0,
            "door_per_day": float(rng.uniform(3, 8)),
            "low_limit_c": 2.0,
            "high_limit_c": 8.0,
        }
    elif kind == "smp":  # 12 V sample fridge, one module, thermostat at 4 °C
        volume = float(rng.uniform(25, 35))
        body = {
            "ua": float(rng.uniform(0.35, 0.45)),
            "r_hot": float(rng.uniform(0.18, 0.24)),
            "r_cold": float(rng.uniform(0.35, 0.45)),
            "c_contents": float(rng.uniform(8_000, 15_000)),
            "v_supply": 12.0,
            "setpoint_c": 4.0,
            "door_per_day": float(rng.uniform(8, 20)),
            "low_limit_c": 1.0,
            "high_limit_c": 8.0,
        }
    else:  # enclosure cooler keeping electronics below 30 °C, outdoors or in a closet
        volume = float(rng.uniform(50, 60))
        body = {
            "ua": float(rng.uniform(0.8, 1.0)),
            "r_hot": float(rng.uniform(0.15, 0.2)),
            "r_cold": float(rng.uniform(0.3, 0.35)),
            "c_contents": float(rng.uniform(10_000, 20_000)),
            "q_internal": float(rng.uniform(6.0, 10.0)),  # the electronics' own heat
            "v_supply": 12.0,
            "setpoint_c": 28.0,
            "hysteresis_k": 2.0,
            "door_per_day": 0.1,
            "loads_per_day": 0.0,
            "low_limit_c": 5.0,
            "high_limit_c": 35.0,
        }
    return volume, body


def demo_fleet(
    seed: int = 7,
    *,
    now_s: float | None = None,
    days_backfill: float = 14.0,
    interval_s: float = 60.0,
) -> tuple[FleetSpec, dict[str, dict[str, Any]]]:
    """The demo fleet starting ``days_backfill`` before ``now_s`` (default: now), and the
    registrations keyed by device id (``PUT /v1/devices/{id}`` bodies)."""
    now = time.time() if now_s is None else float(now_s)
    rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence([seed, 0xDE70])))
    devices = tuple(_unit(d, kind, label, rng) for d, kind, label in _UNITS)
    faults = (
        Fault("wear", "kv-fer-med02", now - 10 * DAY, magnitude=1.08, ramp_s=10 * DAY),
        Fault("leak", "kv-ald-smp01", now - 3 * DAY, magnitude=1.6),
        Fault("fan", "kv-sto-med01", now - 6 * 3600.0, magnitude=3.0),
        Fault(
            "sensor",
            "kv-mil-vac02",
            now - 5 * DAY,
            magnitude=2.5,
            ramp_s=5 * DAY,
            channel="t_cabinet",
            mode="drift",
        ),
        Fault("sensor", "kv-rid-enc02", now - 2 * DAY, channel="t_hot", mode="stuck"),
        Fault("offline", "kv-van-vac01", now - 20 * 3600.0),
    )
    events = (ScheduledEvent("power_cut", "kv-mil-med02", now - 2 * DAY, duration_s=5 * 3600.0),)
    spec = FleetSpec(
        devices=devices,
        start_s=now - days_backfill * DAY,
        interval_s=interval_s,
        seed=seed,
        faults=faults,
        events=events,
    )
    return spec, {d.device_id: d.registration() for d in devices}


def run_demo_feed(
    mqtt_url: str,
    prefix: str,
    stop: threading.Event,
    *,
    days_backfill: float = 14,
    interval_s: float = 60,
    on_backfilled: Callable[[], None] | None = None,
    seed: int = 7,
    batch: int = 480,
    truth_out: dict[str, Any] | None = None,
    before_send: Callable[[], None] | None = None,
) -> None:
    """Publish the demo fleet: ``days_backfill`` of history ending now, in batches of ``batch``
    readings per message as fast as the broker takes them, then one reading per device per
    interval at the wall clock (faults go on developing) until ``stop`` is set.

    The live phase follows the wall clock because the ingester refuses timestamps more than
    5 minutes ahead. A lost broker connection is retried every few seconds, resuming where the
    simulation stood.
    ``before_send`` is handed to :class:`MqttSink` (end-to-end pacing).
    ``truth_out``, when given, receives ``{"spec": ..., "truth": ...}`` for tests.
    """
    spec, _reg = demo_fleet(seed, days_backfill=days_backfill, interval_s=interval_s)
    sim = Simulator(spec)
    if truth_out is not None:
        truth_out["spec"] = spec
        truth_out["truth"] = sim.truth
    announced = False

    def caught_up() -> None:
        nonlocal announced
        if not announced:
            announced = True
            log.info("demo feed: %.1f days of history published, now live", days_backfill)
            if on_backfilled is not None:
                on_backfilled()

    while not stop.is_set():
        sink: MqttSink | None = None
        try:
            sink = MqttSink(
                mqtt_url, prefix, client_id=f"tecfleet-demo-feed-{seed}", before_send=before_send
            )
            publish_fleet(
                spec,
                sink,
                end_s=None,
                speed=0.0,
                batch=batch,
                stop=stop,
                on_caught_up=caught_up,
                simulator=sim,
            )
        except (OSError, ConnectionError, TimeoutError) as exc:
            log.warning("demo feed: broker problem (%s); retrying", exc)
            stop.wait(3.0)
        finally:
            if sink is not None:
                try:
                    sink.close()
                except Exception as exc:  # closing a broken connection
                    log.debug("demo feed: close: %s", exc)
