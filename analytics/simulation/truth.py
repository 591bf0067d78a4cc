"""The ground truth of a simulation: true parameters over time, fault windows, power cuts,
loads and excursions, for scoring estimates and alerts against."""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .specs import FAULT_PARAM, DeviceSpec, Fault, FleetSpec

__all__ = ["TRUTH_PARAMS", "FleetTruth"]

TRUTH_PARAMS = ("r25", "s25", "k", "ua", "r_hot", "r_cold", "c_air", "c_contents")
_TRUTH_NAMES = {
    "r25": "resistance_25c_ohm",
    "s25": "seebeck_25c_v_per_k",
    "k": "conductance_w_per_k",
    "ua": "ua_w_per_k",
    "r_hot": "r_hot_k_per_w",
    "r_cold": "r_cold_k_per_w",
    "c_air": "c_air_j_per_k",
    "c_contents": "c_contents_j_per_k",
}


_ALERT_KIND = {
    "wear": "module_wear",
    "leak": "heat_leak",
    "fan": "hot_side_cooling",
    "inner_fan": "capacity_shortfall",
    "sag": "capacity_shortfall",
    "sensor": "sensor_fault",
    "offline": "offline",
}


@dataclass
class FleetTruth:
    """True parameters and fault windows of every device, for scoring estimates and alerts."""

    spec: FleetSpec
    excursions: dict[str, list[tuple[float, float | None]]] = field(default_factory=dict)
    power_cuts: dict[str, list[tuple[float, float]]] = field(default_factory=dict)
    loads: dict[str, list[float]] = field(default_factory=dict)

    def device(self, device_id: str) -> DeviceSpec:
        for d in self.spec.devices:
            if d.device_id == device_id:
                return d
        raise KeyError(device_id)

    def faults_of(self, device_id: str) -> list[Fault]:
        return [f for f in self.spec.faults if f.device_id == device_id]

    def params_at(self, device_id: str, t_s: float) -> dict[str, float]:
        """True parameters at time ``t_s`` (keys of ``TRUTH_PARAMS``)."""
        d = self.device(device_id)
        values = {p: float(getattr(d, p)) for p in TRUTH_PARAMS}
        for f in self.faults_of(device_id):
            param = FAULT_PARAM.get(f.kind)
            if param in values:
                frac = float(f.factor(np.array([t_s]))[0])
                values[param] *= 1.0 + (f.magnitude - 1.0) * frac
        return values

    def fault_windows(self, device_id: str | None = None) -> list[dict[str, Any]]:
        """Every fault as a window: start, fully developed, end, shape, magnitude."""
        out = []
        for f in self.spec.faults:
            if device_id is not None and f.device_id != device_id:
                continue
            out.append(
                {
                    "device_id": f.device_id,
                    "kind": f.kind,
                    "alert_kind": _ALERT_KIND[f.kind],
                    "param": FAULT_PARAM.get(f.kind),
                    "shape": f.shape,
                    "start_s": f.start_s,
                    "developed_s": f.start_s + f.ramp_s,
                    "end_s": f.end_s,
                    "magnitude": f.magnitude,
                    "channel": f.channel,
                    "mode": f.mode,
                }
            )
        return out

    def to_dict(self, end_s: float | None = None) -> dict[str, Any]:
        spec = self.spec
        end = end_s if end_s is not None else spec.start_s
        devices: dict[str, Any] = {}
        for d in spec.devices:
            breaks = {spec.start_s, end}
            for f in self.faults_of(d.device_id):
                for t in (f.start_s, f.start_s + f.ramp_s, f.end_s):
                    if t is not None and spec.start_s <= t <= end:
                        breaks.add(t)
            day = 86_400.0
            t = spec.start_s + day
            while t < end:
                breaks.add(t)
                t += day
            series = []
            for t in sorted(breaks):
                row = {"ts": t}
                row.update({_TRUTH_NAMES[k]: v for k, v in self.params_at(d.device_id, t).items()})
                series.append(row)
            devices[d.device_id] = {
                "registration": d.registration(),
                "baseline": {_TRUTH_NAMES[p]: float(getattr(d, p)) for p in TRUTH_PARAMS},
                "control": {
                    "mode": d.control,
                    "setpoint_c": d.setpoint_c,
                    "hysteresis_k": d.hysteresis_k,
                    "v_supply": d.v_supply,
                },
                "off_voltage": d.off_voltage,
                "series": series,
                "faults": self.fault_windows(d.device_id),
                "power_cuts": [list(w) for w in self.power_cuts.get(d.device_id, [])],
                "loads": list(self.loads.get(d.device_id, [])),
                "excursions": [list(w) for w in self.excursions.get(d.device_id, [])],
            }
        return {
            "seed": spec.seed,
            "start_s": spec.start_s,
            "end_s": end,
            "interval_s": spec.interval_s,
            "params_note": "series rows are exact at their times; linear between them",
            "devices": devices,
        }

    def write_json(self, path: str, end_s: float | None = None) -> None:
        with open(path, "w", encoding="utf-8") as fh:
            json.dump(self.to_dict(end_s), fh, indent=1)
