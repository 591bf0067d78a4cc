"""The surroundings of every cooler: the site's climate and the cooler's use.

Climate: a daily cycle of the ambient temperature and humidity at the site's local time, and
a slow weather anomaly (an AR(1) process). Use: doors, warm loads and power cuts at random,
busier by day (07-19 h local), and the events scheduled in the fleet specification.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray
from scipy.signal import lfilter

from .specs import T0_K, ScheduledEvent

__all__ = ["Climate", "Use"]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]


class Climate:
    """Ambient temperature and humidity of every device's site; ``p`` the device columns.

    The weather anomaly starts from its stationary law (one draw per device from ``gen``).
    """

    def __init__(
        self, p: dict[str, FloatArray], interval_s: float, gen: np.random.Generator
    ) -> None:
        self.p = p
        self.n = n = p["t_amb_mean_c"].shape[0]
        self.interval = interval_s
        self.gen = gen
        w0 = gen.standard_normal(n)
        self.weather = w0 * p["t_amb_weather_k"]

    def at(self, t: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Ambient temperature [K] and relative humidity [%] at times t, shape (m, n)."""
        p = self.p
        m = t.shape[0]
        # slow weather anomaly: discrete Ornstein-Uhlenbeck (AR(1)) per device
        phi = np.exp(-self.interval / (p["t_amb_tau_h"] * 3600.0))
        eps = self.gen.standard_normal((m, self.n))
        drive = eps * p["t_amb_weather_k"] * np.sqrt(1.0 - phi**2)
        anomaly = np.empty((m, self.n))
        prev = self.weather
        # AR(1) along time with per-device coefficient: lfilter per distinct phi
        for value in np.unique(phi):
            cols = np.nonzero(phi == value)[0]
            y, _ = lfilter(
                [1.0], [1.0, -value], drive[:, cols], axis=0, zi=(value * prev[cols])[None, :]
            )
            anomaly[:, cols] = y
        self.weather = anomaly[-1].copy()
        hours = ((t[:, None] / 3600.0) + p["utc_offset_h"]) % 24.0
        daily = np.cos(2.0 * np.pi * (hours - p["t_amb_phase_h"]) / 24.0)
        t_amb = p["t_amb_mean_c"] + p["t_amb_daily_k"] * daily + anomaly
        rh = np.clip(p["rh_mean"] - 8.0 * daily - 2.0 * anomaly, 5.0, 95.0)
        return t_amb + T0_K, rh


class Use:
    """Doors, loads and power cuts of every device; ``p`` the device columns; ``gen`` the
    generators of ``door``, ``door_len``, ``load``, ``cut`` and ``cut_len``, each drawing
    one number per device and step whether ``random_use`` is on or not."""

    def __init__(
        self,
        p: dict[str, FloatArray],
        interval_s: float,
        gen: dict[str, np.random.Generator],
        events: Sequence[tuple[int, ScheduledEvent]],
        *,
        random_use: bool,
    ) -> None:
        self.p = p
        self.n = n = p["door_mean_s"].shape[0]
        self.interval = interval_s
        self.gen = gen
        self.events = list(events)
        self.random_use = random_use
        self.door_left = np.zeros(n)
        self.cut_left = np.zeros(n)

    def starts(self, t: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray]:
        """Doors / loads / cuts starting at each step (m, n): door s, load fraction, cut s."""
        p, g, m, n = self.p, self.gen, t.shape[0], self.n
        u_door = g["door"].random((m, n))
        l_door = g["door_len"].exponential(1.0, (m, n))
        u_load = g["load"].random((m, n))
        u_cut = g["cut"].random((m, n))
        l_cut = g["cut_len"].exponential(1.0, (m, n))
        if not self.random_use:
            zero = np.zeros((m, n))
            door, load, cut = zero, zero.copy(), zero.copy()
        else:
            hours = ((t[:, None] / 3600.0) + p["utc_offset_h"]) % 24.0
            busy = np.where((hours >= 7.0) & (hours < 19.0), 1.8, 0.2)
            dt_day = self.interval / 86_400.0
            door = np.where(
                u_door < p["door_per_day"] * dt_day * busy, l_door * p["door_mean_s"], 0.0
            )
            load = np.where(u_load < p["loads_per_day"] * dt_day * busy, p["load_fraction"], 0.0)
            cut = np.where(u_cut < p["cuts_per_30d"] * dt_day / 30.0, l_cut * p["cut_mean_s"], 0.0)
        for i, e in self.events:
            k = int(np.searchsorted(t, e.start_s))
            if k >= m or t[k] - e.start_s >= self.interval or (k > 0 and t[k - 1] >= e.start_s):
                continue
            if e.kind == "door":
                door[k, i] = max(door[k, i], e.duration_s)
            elif e.kind == "load":
                load[k, i] = max(load[k, i], e.magnitude)
            elif e.kind == "power_cut":
                cut[k, i] = max(cut[k, i], e.duration_s)
            else:
                raise ValueError(f"unknown event kind {e.kind!r}")
        # Goods go in through the door: a load opens it for at least half a minute.
        door = np.where(load > 0.0, np.maximum(door, 30.0 + l_door * p["door_mean_s"]), door)
        return door, load, cut

    def door_and_power(
        self, door_start: FloatArray, cut_start: FloatArray
    ) -> tuple[FloatArray, BoolArray]:
        """Seconds the door is open in each interval and whether the device has power (m, n).

        Sequential along the chunk but cheap; everything that depends only on them is then
        vectorised over the chunk.
        """
        m, n = door_start.shape[0], self.n
        door_left, cut_left = self.door_left, self.cut_left
        door_s_all = np.empty((m, n))
        powered_all = np.empty((m, n), dtype=bool)
        for j in range(m):
            door_left = np.maximum(door_left, door_start[j])
            cut_left = np.maximum(cut_left, cut_start[j])
            door_s_all[j] = np.minimum(door_left, self.interval)
            door_left = door_left - door_s_all[j]
            powered_all[j] = cut_left <= 0.0
            cut_left = np.maximum(cut_left - self.interval, 0.0)
        self.door_left, self.cut_left = door_left, cut_left
        return door_s_all, powered_all
