"""What a simulated fleet is made of: devices, faults, scheduled events, the fleet.

SI units throughout, °C for setpoints and climate. Plausible defaults (common practice, no
source) are noted where they are chosen.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from tecfleet.analytics import physics
from tecfleet.analytics._validate import T_0C_K

__all__ = [
    "CHANNELS",
    "FAULT_KINDS",
    "FAULT_PARAM",
    "MISSING_FACES",
    "SENSOR_SETS",
    "STANDARD_RATINGS",
    "T0_K",
    "DeviceSpec",
    "Fault",
    "FleetSpec",
    "ScheduledEvent",
    "device_from_ratings",
]

FloatArray = NDArray[np.float64]

T0_K = T_0C_K

#: Measured channels in payload order (``DeviceSpec.sensor_bias`` and ``sensor_noise`` follow
#: this order).
CHANNELS = ("t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh")

#: Which face probes a unit has: ``full`` (cold and hot face), ``no_cold`` (hot face only),
#: ``no_faces`` (neither). A missing probe's channel is left out of what the unit publishes.
SENSOR_SETS = ("full", "no_cold", "no_faces")
#: The face channels each sensor set lacks.
MISSING_FACES = {"full": (), "no_cold": ("t_cold",), "no_faces": ("t_cold", "t_hot")}

#: Typical 127-couple module: Imax 6 A, Vmax 14.7 V, ΔTmax 67 K, Qmax 52 W at 27 °C
#: (datasheet-like figures, common practice, no source). Gives S ≈ 0.049 V/K,
#: R ≈ 1.9 ohm, K ≈ 0.51 W/K.
STANDARD_RATINGS: dict[str, float] = {
    "couples": 127,
    "i_max_a": 6.0,
    "v_max_v": 14.7,
    "dt_max_k": 67.0,
    "q_max_w": 52.0,
    "t_hot_rated_c": 27.0,
    "count": 1,
}

FAULT_KINDS = ("wear", "leak", "fan", "inner_fan", "sag", "sensor", "offline")
#: Parameter each physical fault multiplies.
FAULT_PARAM = {
    "wear": "r25",
    "leak": "ua",
    "fan": "r_hot",
    "inner_fan": "r_cold",
    "sag": "v_supply",
}


@dataclass(frozen=True)
class Fault:
    """A fault on one device.

    ``magnitude`` is the final multiplier of the parameter for physical faults (wear: R25,
    leak: UA, fan: r_hot, inner_fan: r_cold, sag: supply voltage); for ``sensor`` faults it is
    the drift in the channel's unit (``mode='drift'``) or the probability per sample of a
    probe error (``mode='dropout'``); ``stuck`` freezes the channel at its value at start.
    ``ramp_s`` 0 is a step; otherwise the parameter moves linearly over ``ramp_s`` and then
    stays. ``end_s`` (repair) restores it; None means never.
    """

    kind: str
    device_id: str
    start_s: float
    magnitude: float = 1.0
    ramp_s: float = 0.0
    end_s: float | None = None
    channel: str | None = None
    mode: str | None = None

    @property
    def shape(self) -> str:
        return "ramp" if self.ramp_s > 0 else "step"

    def factor(self, t: FloatArray) -> FloatArray:
        """Fraction of the fault developed at times ``t`` (0 before, 1 when fully developed)."""
        if self.ramp_s > 0:
            f = np.clip((t - self.start_s) / self.ramp_s, 0.0, 1.0)
        else:
            f = (t >= self.start_s).astype(np.float64)
        if self.end_s is not None:
            f = np.where(t >= self.end_s, 0.0, f)
        return f


@dataclass(frozen=True)
class ScheduledEvent:
    """A use event at a known time: ``door`` (open for ``duration_s``), ``load`` (warm goods,
    ``magnitude`` = fraction of the contents replaced at ambient temperature, put in through
    the door, which opens for at least half a minute) or ``power_cut`` (``duration_s``)."""

    kind: str
    device_id: str
    start_s: float
    duration_s: float = 0.0
    magnitude: float = 0.0


@dataclass(frozen=True)
class DeviceSpec:
    """One cooler: its physics, its use, its sensors and its site. SI units, °C for setpoints."""

    device_id: str
    # module (whole stack: modules in series), at a mean temperature of 25 °C
    s25: float = 0.049
    r25: float = 1.90
    k: float = 0.51
    i_limit: float = 6.0  # driver current limit [A]
    # heat paths
    ua: float = 0.5
    r_hot: float = 0.25
    r_cold: float = 0.45
    c_air: float = 800.0  # air plus liner and shelves [J/K]
    # Heat capacities of the cold and the hot sink, each with its module face [J/K]; 0 keeps
    # the faces massless (an aluminium sink of a few hundred grams holds 100-400 J/K:
    # about 0.9 J/(g·K), common practice, no source).
    c_cold_sink: float = 0.0
    c_hot_sink: float = 0.0
    c_contents: float = 15_000.0
    g_contents: float = 2.0  # air-to-contents conductance [W/K]
    q_internal: float = 1.0  # inner fan and electronics inside [W]
    # control
    control: str = "thermostat"  # or "proportional"
    setpoint_c: float = 5.0
    hysteresis_k: float = 1.0
    v_supply: float = 12.0
    kp_a_per_k: float = 1.5
    i_bias_a: float = 2.0
    ctrl_bias_k: float = 0.0
    # use
    door_per_day: float = 8.0
    door_mean_s: float = 25.0
    g_door: float = 3.0  # extra conductance while the door is open [W/K]
    loads_per_day: float = 0.3
    load_fraction: float = 0.15
    cuts_per_30d: float = 0.5
    cut_mean_s: float = 1800.0
    # site climate
    t_amb_mean_c: float = 22.0
    t_amb_daily_k: float = 2.0
    t_amb_phase_h: float = 15.0  # local hour of the daily maximum
    t_amb_weather_k: float = 1.5  # sd of the slow (days) anomaly
    t_amb_tau_h: float = 48.0
    rh_mean: float = 45.0
    utc_offset_h: float = 0.0
    # sensors
    sensor_bias: tuple[float, ...] = (0.0,) * 7
    sensor_noise: tuple[float, ...] = (0.05, 0.05, 0.05, 0.05, 0.005, 0.005, 1.0)
    jitter_s: float = 0.5
    p_missed: float = 0.002
    off_voltage: str = "open_circuit"  # or "zero"
    sensor_set: str = "full"  # face probes fitted, one of SENSOR_SETS
    # registration
    label: str = ""
    site: str = ""
    ratings: dict[str, float] = field(default_factory=lambda: dict(STANDARD_RATINGS))
    volume_l: float = 40.0
    low_limit_c: float = 2.0
    high_limit_c: float = 8.0

    def registration(self) -> dict[str, Any]:
        """Registration body in the contract's shape (``PUT /v1/devices/{id}``)."""
        return {
            "label": self.label or self.device_id,
            "site": self.site or "unknown",
            "module": {k: self.ratings[k] for k in STANDARD_RATINGS},
            "cabinet": {
                "volume_l": self.volume_l,
                "setpoint_c": self.setpoint_c,
                "low_limit_c": self.low_limit_c,
                "high_limit_c": self.high_limit_c,
            },
        }


@dataclass(frozen=True)
class FleetSpec:
    """A fleet: devices, faults, scheduled events, the start time and the seed."""

    devices: tuple[DeviceSpec, ...]
    start_s: float
    interval_s: float = 60.0
    seed: int = 0
    faults: tuple[Fault, ...] = ()
    events: tuple[ScheduledEvent, ...] = ()
    random_use: bool = True  # random doors, loads and power cuts
    sensors: bool = True  # bias, noise, jitter, missed samples
    #: Units start switched off at their room's temperature and switch on at ``start_s``
    #: (a newly installed fleet); False starts them settled at their setpoint.
    warm_start: bool = False
    max_substep_s: float = 20.0
    #: Each reading also carries the interval summaries: the means over the interval since
    #: the reading before (temperatures, current, current squared, electrical power, on
    #: share) and the cabinet air's extremes, as a unit that samples fast but reports slowly.
    summaries: bool = False

    @property
    def device_ids(self) -> list[str]:
        return [d.device_id for d in self.devices]


def device_from_ratings(
    device_id: str,
    ratings: dict[str, float] | None = None,
    spread: dict[str, float] | None = None,
    **kwargs: Any,
) -> DeviceSpec:
    """A device whose module comes from datasheet ratings (``physics.parameters_from_ratings``),
    ``count`` modules in series; ``spread`` multiplies the resulting S, R, K (unit-to-unit)."""
    rt = dict(STANDARD_RATINGS if ratings is None else ratings)
    module = physics.parameters_from_ratings(
        rt["i_max_a"],
        rt["v_max_v"],
        rt["dt_max_k"],
        rt["t_hot_rated_c"] + T0_K,
        q_max=rt.get("q_max_w"),
        n_couples=int(rt["couples"]),
    )
    module = physics.modules_in_series(module, int(rt.get("count", 1)))
    sp = spread or {}
    return DeviceSpec(
        device_id=device_id,
        s25=module.seebeck * sp.get("s", 1.0),
        r25=module.resistance * sp.get("r", 1.0),
        k=module.conductance * sp.get("k", 1.0),
        i_limit=float(rt["i_max_a"]),
        ratings=rt,
        **kwargs,
    )
