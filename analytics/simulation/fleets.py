"""Random fleets with a mix of faults, and small helpers on fleet specifications."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import asdict, replace
from typing import Any

import numpy as np

from tecfleet.analytics import heat_paths

from .specs import (
    FAULT_KINDS,
    SENSOR_SETS,
    STANDARD_RATINGS,
    DeviceSpec,
    Fault,
    FleetSpec,
    device_from_ratings,
)

__all__ = [
    "FAULT_DEFAULTS",
    "parse_fault_mix",
    "random_fleet",
    "spec_summary",
    "with_devices",
    "with_sensor_set",
]

#: Default developed magnitude and ramp of each fault kind (common practice, no source).
FAULT_DEFAULTS: dict[str, dict[str, Any]] = {
    "wear": {"magnitude": 1.10, "ramp_s": 14 * 86_400.0},
    "leak": {"magnitude": 1.6, "ramp_s": 0.0},
    "fan": {"magnitude": 3.0, "ramp_s": 0.0},
    "inner_fan": {"magnitude": 2.5, "ramp_s": 0.0},
    "sag": {"magnitude": 0.85, "ramp_s": 2 * 86_400.0},
    "sensor": {"magnitude": 3.0, "ramp_s": 5 * 86_400.0, "mode": "drift", "channel": "t_cabinet"},
    "offline": {"magnitude": 1.0, "ramp_s": 0.0},
}


def parse_fault_mix(text: str | None) -> dict[str, int]:
    """``"wear:2,leak:1"`` -> {"wear": 2, "leak": 1}; ``"none"`` or empty -> {}."""
    if not text or text.strip().lower() == "none":
        return {}
    mix: dict[str, int] = {}
    for part in text.split(","):
        part = part.strip()
        if not part:
            continue
        name, _, count = part.partition(":")
        name = name.strip().lower().replace("-", "_")
        if name not in FAULT_KINDS:
            raise ValueError(f"unknown fault kind {name!r}; known: {', '.join(FAULT_KINDS)}")
        mix[name] = mix.get(name, 0) + (int(count) if count else 1)
    return mix


def random_fleet(
    n_devices: int,
    *,
    seed: int = 0,
    start_s: float,
    days: float,
    interval_s: float = 60.0,
    faults: str | dict[str, int] | None = None,
    prefix: str = "tec",
) -> FleetSpec:
    """A plausible random fleet with a fault mix placed on distinct devices."""
    rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence([seed, 0xF1EE7])))
    devices = [_random_device(rng, f"{prefix}-{i:04d}") for i in range(n_devices)]
    mix = parse_fault_mix(faults) if isinstance(faults, str | None) else dict(faults)
    order = rng.permutation(n_devices)
    if sum(mix.values()) > n_devices:
        raise ValueError(f"fault mix needs {sum(mix.values())} devices, fleet has {n_devices}")
    fault_list = _place_faults(rng, [devices[int(k)].device_id for k in order], mix, start_s, days)
    return FleetSpec(
        devices=tuple(devices),
        start_s=float(start_s),
        interval_s=float(interval_s),
        seed=seed,
        faults=tuple(fault_list),
    )


def _random_device(rng: np.random.Generator, device_id: str) -> DeviceSpec:
    """One device: 40 % are big (two modules, 24 V), 80 % indoors (common practice, no
    source). The draws are made in a fixed order: the fleet depends on it."""
    big = rng.random() < 0.4
    ratings = dict(STANDARD_RATINGS)
    if big:
        ratings["count"] = 2
    volume = float(rng.uniform(35, 60) if big else rng.uniform(20, 40))
    air = heat_paths.air_heat_capacity(volume / 1000.0, 278.15)
    spread = {"s": rng.normal(1, 0.02), "r": rng.normal(1, 0.03), "k": rng.normal(1, 0.03)}
    indoor = rng.random() < 0.8
    return device_from_ratings(
        device_id,
        ratings,
        spread,
        ua=float(rng.uniform(0.3, 0.6) * (1.5 if big else 1.0)),
        r_hot=float(rng.uniform(0.12, 0.2) if big else rng.uniform(0.18, 0.3)),
        r_cold=float(rng.uniform(0.25, 0.35) if big else rng.uniform(0.35, 0.5)),
        c_air=air + 15.0 * volume,
        c_contents=float(rng.uniform(5_000, 40_000)),
        g_contents=float(rng.uniform(1.0, 4.0)),
        q_internal=float(rng.uniform(0.5, 1.5)),
        control="proportional" if rng.random() < 0.25 else "thermostat",
        setpoint_c=float(rng.choice([4.0, 5.0, 5.0, 6.0])),
        v_supply=24.0 if big else 12.0,
        ctrl_bias_k=float(rng.normal(0, 0.15)),
        door_per_day=float(rng.uniform(2, 15)),
        loads_per_day=float(rng.uniform(0.05, 0.5)),
        cuts_per_30d=float(rng.uniform(0.0, 1.0)),
        t_amb_mean_c=float(rng.uniform(19, 25) if indoor else rng.uniform(12, 28)),
        t_amb_daily_k=float(rng.uniform(0.5, 2.5) if indoor else rng.uniform(4, 8)),
        t_amb_phase_h=float(rng.uniform(13, 17)),
        t_amb_weather_k=float(rng.uniform(0.5, 1.5) if indoor else rng.uniform(2, 4)),
        rh_mean=float(rng.uniform(30, 60)),
        sensor_bias=tuple(float(x) for x in rng.normal(0, [0.2, 0.2, 0.2, 0.2, 0.01, 0.01, 2.0])),
        off_voltage="open_circuit" if rng.random() < 0.6 else "zero",
        volume_l=round(volume, 1),
    )


def _place_faults(
    rng: np.random.Generator,
    shuffled_ids: list[str],
    mix: dict[str, int],
    start_s: float,
    days: float,
) -> list[Fault]:
    """The faults of ``mix`` on distinct devices taken in the order of ``shuffled_ids``,
    starting between 20 % and 60 % of the run (common practice, no source)."""
    fault_list: list[Fault] = []
    k = 0
    duration = days * 86_400.0
    for kind in FAULT_KINDS:
        for _ in range(mix.get(kind, 0)):
            dev = shuffled_ids[k]
            k += 1
            d = dict(FAULT_DEFAULTS[kind])
            start = start_s + duration * float(rng.uniform(0.2, 0.6))
            ramp = min(float(d.pop("ramp_s")), max(0.0, start_s + duration - start))
            if kind == "sensor":
                d["mode"] = str(rng.choice(["drift", "stuck", "dropout"]))
                if d["mode"] == "stuck":
                    ramp = 0.0
                if d["mode"] == "dropout":
                    d["magnitude"], ramp = 0.05, 0.0
            end = start + float(rng.uniform(0.5, 2.0)) * 86_400.0 if kind == "offline" else None
            fault_list.append(Fault(kind, dev, start, ramp_s=ramp, end_s=end, **d))
    return fault_list


def with_devices(spec: FleetSpec, devices: Iterable[DeviceSpec]) -> FleetSpec:
    """``spec`` with other devices (faults and events kept)."""
    return replace(spec, devices=tuple(devices))


def with_sensor_set(spec: FleetSpec, sensor_set: str) -> FleetSpec:
    """``spec`` with every device fitted with the face probes of ``sensor_set`` (one of
    ``SENSOR_SETS``)."""
    if sensor_set not in SENSOR_SETS:
        raise ValueError(f"unknown sensor set {sensor_set!r}; known: {SENSOR_SETS}")
    return with_devices(spec, (replace(d, sensor_set=sensor_set) for d in spec.devices))


def spec_summary(spec: FleetSpec) -> dict[str, Any]:
    """Device count and faults of ``spec``, as plain data."""
    return {"devices": len(spec.devices), "faults": [asdict(f) for f in spec.faults]}
