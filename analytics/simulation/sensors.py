"""The sensor model: what each device reports of its true state.

Per channel: bias, Gaussian noise, the physical limits of the reading (an open driver reads
zero current; a shorted or grounded one zero voltage; humidity within 0-100 %), sensor faults
(drift, stuck, dropout to the probe's error code), quantisation to the reported step, sample
timestamps jittered by at most a quarter interval, missed samples and devices offline.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from .specs import CHANNELS, MISSING_FACES, SENSOR_SETS, DeviceSpec, Fault

__all__ = ["PROBE_ERROR_C", "QUANTUM", "SensorModel"]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]

#: Reported quantisation of each channel (a 0.1 °C probe, 10 mA / 10 mV ADC steps).
QUANTUM = {
    "t_cabinet": 0.1,
    "t_cold": 0.1,
    "t_hot": 0.1,
    "t_ambient": 0.1,
    "current": 0.01,
    "voltage": 0.01,
    "rh": 0.1,
}
_DECIMALS = {name: (1 if q >= 0.1 else 2) for name, q in QUANTUM.items()}
#: What a disconnected 1-wire temperature probe reads (the usual error code of such
#: probes; outside the ingester's -60..150 °C, so the reading is refused by design).
PROBE_ERROR_C = -127.0


class SensorModel:
    """The sensors of every device of a fleet, vectorised over devices.

    ``gen`` holds the generators of the draws (``noise``, ``jitter``, ``missed``,
    ``dropout``); each draws a fixed count per output step. ``enabled`` False gives perfect
    sensors (no bias, no noise, no jitter, no missed samples; quantisation and faults stay).
    """

    def __init__(
        self,
        devices: Sequence[DeviceSpec],
        faults: dict[str, list[tuple[int, Fault]]],
        interval_s: float,
        gen: dict[str, np.random.Generator],
        *,
        enabled: bool,
    ) -> None:
        self.n = len(devices)
        self.gen = gen
        self.interval = interval_s
        self.off_open = np.array([d.off_voltage == "open_circuit" for d in devices])
        for d in devices:
            if d.sensor_set not in MISSING_FACES:
                raise ValueError(f"unknown sensor set {d.sensor_set!r}; known: {SENSOR_SETS}")
        #: Devices without a probe on that face: the channel reads NaN (not published).
        self.no_probe = {
            name: np.array([name in MISSING_FACES[d.sensor_set] for d in devices])
            for name in ("t_cold", "t_hot")
        }
        self.bias = np.array([d.sensor_bias for d in devices], dtype=np.float64)  # (n, 7)
        self.noise_sd = np.array([d.sensor_noise for d in devices], dtype=np.float64)
        self.jitter_s = np.array([float(d.jitter_s) for d in devices], dtype=np.float64)
        self.p_missed = np.array([float(d.p_missed) for d in devices], dtype=np.float64)
        if not enabled:
            self.bias[:] = 0.0
            self.noise_sd[:] = 0.0
            self.jitter_s[:] = 0.0
            self.p_missed[:] = 0.0
        self.sensor_faults = faults.get("sensor", [])
        self.offline = faults.get("offline", [])
        self.stuck_value: dict[int, float] = {}

    def measure(
        self, t: FloatArray, tr: dict[str, FloatArray]
    ) -> tuple[dict[str, FloatArray], FloatArray, BoolArray]:
        """Readings, sample timestamps and which samples exist, for output times ``t`` and
        the true state ``tr`` (°C, A, V, %; arrays (m, n))."""
        g, m, n = self.gen, t.shape[0], self.n
        noise = g["noise"].standard_normal((m, n, len(CHANNELS)))
        jitter = g["jitter"].standard_normal((m, n))
        missed = g["missed"].random((m, n)) < self.p_missed
        u_drop = g["dropout"].random((m, n))
        meas = self._noisy(tr, noise)
        present = ~missed
        self._apply_faults(t, meas, u_drop)
        for i, f in self.offline:
            present[:, i] &= f.factor(t) <= 0
        for name in CHANNELS:
            q = QUANTUM[name]
            meas[name] = np.round(np.round(meas[name] / q) * q, _DECIMALS[name])
        for name, absent in self.no_probe.items():
            if absent.any():
                meas[name][:, absent] = np.nan
        lim = 0.25 * self.interval
        ts = t[:, None] + np.clip(jitter * self.jitter_s, -lim, lim)
        ts = np.round(ts, 3)
        return meas, ts, present

    def summarise(self, tr: dict[str, FloatArray]) -> dict[str, FloatArray]:
        """The interval summaries a unit reports, by payload field name, from the model's
        means over each interval (``thermal.SUMMARY_KEYS``; °C, A, V). Each mean carries its
        probe's bias, to first order through the current's and the voltage's into current
        squared and power; the noise of many fast samples averages out, and a mean is not
        quantised. A face without a probe has none (NaN)."""
        b = {name: self.bias[:, c] for c, name in enumerate(CHANNELS)}
        on = tr["on_share"]
        i_mean = tr["mean_current"]
        b_i, b_v = b["current"], b["voltage"]
        out = {
            "interval_s": np.full_like(on, self.interval),
            "t_cabinet_mean": tr["mean_t_air"] + b["t_cabinet"],
            "t_cold_mean": tr["mean_t_cold"] + b["t_cold"],
            "t_hot_mean": tr["mean_t_hot"] + b["t_hot"],
            "t_ambient_mean": tr["t_ambient"] + b["t_ambient"],
            "current_mean": i_mean + b_i * on,
            "current_sq_mean": tr["mean_current_sq"] + 2.0 * b_i * i_mean + b_i * b_i * on,
            "power_mean": tr["mean_power"] + b_v * i_mean + b_i * tr["mean_v_on"]
            + b_i * b_v * on,
            "on_share": on.copy(),
            "t_cabinet_min": tr["min_t_air"] + b["t_cabinet"],
            "t_cabinet_max": tr["max_t_air"] + b["t_cabinet"],
        }  # fmt: skip
        for name, absent in self.no_probe.items():
            if absent.any():
                out[f"{name}_mean"][:, absent] = np.nan
        # Reported to a tenth of a millikelvin, milliampere or milliwatt: far below the probes'
        # own error, and short to send.
        return {k: np.round(v, 4) for k, v in out.items()}

    def _noisy(self, tr: dict[str, FloatArray], noise: FloatArray) -> dict[str, FloatArray]:
        """True values plus bias and noise, within what each channel can read."""
        true = _true_values(tr, self.off_open)
        meas: dict[str, FloatArray] = {}
        for c, name in enumerate(CHANNELS):
            v = true[name] + self.bias[:, c] + self.noise_sd[:, c] * noise[:, :, c]
            if name == "current":
                v = np.where(tr["current"] > 0.0, v, 0.0)  # an open driver reads zero
                v = np.maximum(v, 0.0)
            if name == "voltage":
                v = np.where(
                    (tr["current"] > 0.0) | self.off_open, v, 0.0
                )  # shorted or grounded driver reads zero
            if name == "rh":
                v = np.clip(v, 0.0, 100.0)
            meas[name] = v
        return meas

    def _apply_faults(self, t: FloatArray, meas: dict[str, FloatArray], u_drop: FloatArray) -> None:
        """Sensor faults, in place on the faulty channel's column."""
        for i, f in self.sensor_faults:
            name = f.channel or "t_cabinet"
            frac = f.factor(t)
            col = meas[name][:, i]
            if f.mode == "drift":
                col += f.magnitude * frac
            elif f.mode == "stuck":
                active = frac > 0
                if active.any():
                    if id(f) not in self.stuck_value:
                        self.stuck_value[id(f)] = float(col[np.argmax(active)])
                    col[active] = self.stuck_value[id(f)]
            elif f.mode == "dropout":
                col[(frac > 0) & (u_drop[:, i] < f.magnitude)] = PROBE_ERROR_C
            else:
                raise ValueError(f"unknown sensor fault mode {f.mode!r}")


def _true_values(tr: dict[str, FloatArray], off_open: BoolArray) -> dict[str, FloatArray]:
    """The true value each channel measures: a driver that is off shows its module's
    open-circuit voltage where ``off_open``, zero elsewhere."""
    return {
        "t_cabinet": tr["t_air"],
        "t_cold": tr["t_cold"],
        "t_hot": tr["t_hot"],
        "t_ambient": tr["t_ambient"],
        "current": tr["current"],
        "voltage": np.where(
            tr["current"] > 0.0, tr["voltage"], np.where(off_open, tr["voltage"], 0.0)
        ),
        "rh": tr["rh"],
    }
