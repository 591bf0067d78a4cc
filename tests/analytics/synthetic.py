"""Small cooler generator for tests: known parameters in, readings out.

Integrates the lumped balances of cabinet air, cold sink and hot sink (Incropera et al. 2007,
ch. 5) with the standard module heats (Ioffe 1957; Goldsmid 2010, ch. 2), under an on/off
thermostat, by explicit Euler steps well below the smallest time constant. Test data only.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

T0 = 273.15


@dataclass(frozen=True)
class Truth:
    """Parameters of a synthetic cooler (temperatures in °C where named so)."""

    s25: float = 0.052  # [V/K]
    r25: float = 2.0  # [ohm]
    k: float = 0.50  # [W/K]
    alpha: float = 4.5e-3  # [1/K]
    beta: float = 1.5e-3  # [1/K]
    ua: float = 0.45  # [W/K]
    c: float = 4000.0  # cabinet air + contents [J/K]
    c_cold: float = 150.0  # [J/K]
    c_hot: float = 300.0  # [J/K]
    r_cold: float = 0.35  # [K/W]
    r_hot: float = 0.20  # [K/W]
    q_internal: float = 1.0  # inner fan and electronics [W]
    setpoint_c: float = 5.0  # [°C]
    band_k: float = 0.6  # thermostat half band [K]
    currents: tuple[float, ...] = (3.0, 4.0)  # drive levels, picked per on period [A]
    ambient_c: float = 25.0  # [°C]
    ambient_swing_k: float = 2.0  # daily half swing [K]
    floating: bool = True


@dataclass
class Noise:
    temp_k: float = 0.05
    current_a: float = 0.01
    voltage_v: float = 0.005
    bias_k: dict[str, float] = field(default_factory=dict)


def simulate(
    truth: Truth,
    days: float,
    *,
    seed: int = 0,
    noise: Noise | None = None,
    start_ms: int = 1_700_000_000_000 - 1_700_000_000_000 % 86_400_000,
    sample_s: float = 60.0,
    substep_s: float = 5.0,
    door_every_h: float | None = None,
    constant_current: float | None = None,
) -> pd.DataFrame:
    """Readings (°C, A, V) of a synthetic cooler, one row per ``sample_s``.

    With ``constant_current`` the module runs continuously at that current (no thermostat).
    With ``door_every_h`` the door opens for two minutes at that interval, dumping warm air.
    """
    rng = np.random.default_rng(seed)
    nz = noise or Noise()
    tr = truth
    n = int(days * 86400 / sample_s)
    sub = round(sample_s / substep_s)
    tcab, tc, th = tr.setpoint_c + T0, tr.setpoint_c + T0 - 3.0, tr.ambient_c + T0 + 5.0
    on = True
    i_level = tr.currents[0]
    rows = np.zeros((n, 8))
    door = np.zeros(n, dtype=bool)
    periods = 0
    for k in range(n):
        t_s = k * sample_s
        ta = tr.ambient_c + T0 + tr.ambient_swing_k * math.sin(2 * math.pi * t_s / 86400.0)
        opened = door_every_h is not None and (t_s % (door_every_h * 3600.0)) < 120.0
        door[k] = opened
        for _ in range(sub):
            if constant_current is not None:
                i = constant_current
            else:
                if on and tcab < tr.setpoint_c + T0 - tr.band_k:
                    on = False
                elif not on and tcab > tr.setpoint_c + T0 + tr.band_k:
                    on = True
                    periods += 1
                    i_level = tr.currents[periods % len(tr.currents)]
                i = i_level if on else 0.0
            tm = 0.5 * (tc + th) - 298.15
            s = tr.s25 * (1 + tr.beta * tm)
            r = tr.r25 * (1 + tr.alpha * tm)
            qc = s * i * tc - 0.5 * i * i * r - tr.k * (th - tc)
            qh = s * i * th + 0.5 * i * i * r - tr.k * (th - tc)
            q_cab_to_cold = (tcab - tc) / tr.r_cold
            door_load = 8.0 * (ta - tcab) if opened else 0.0
            dcab = (tr.ua * (ta - tcab) + tr.q_internal - q_cab_to_cold + door_load) / tr.c
            dc = (q_cab_to_cold - qc) / tr.c_cold
            dh = (qh - (th - ta) / tr.r_hot) / tr.c_hot
            tcab += dcab * substep_s
            tc += dc * substep_s
            th += dh * substep_s
        tm = 0.5 * (tc + th) - 298.15
        s = tr.s25 * (1 + tr.beta * tm)
        r = tr.r25 * (1 + tr.alpha * tm)
        v = i * r + s * (th - tc) if (i > 0 or tr.floating) else 0.0
        rows[k] = (t_s, tcab - T0, tc - T0, th - T0, ta - T0, i, v, 0.0)
    temps = rows[:, 1:5] + rng.normal(0.0, nz.temp_k, (n, 4))
    for j, name in enumerate(("t_cabinet", "t_cold", "t_hot", "t_ambient")):
        temps[:, j] += nz.bias_k.get(name, 0.0)
    cur = rows[:, 5]
    cur = np.where(cur > 0, cur + rng.normal(0.0, nz.current_a, n), 0.0)
    volt = rows[:, 6] + rng.normal(0.0, nz.voltage_v, n)
    return pd.DataFrame(
        {
            "ts_ms": (start_ms + rows[:, 0] * 1000).astype(np.int64),
            "t_cabinet": temps[:, 0],
            "t_cold": temps[:, 1],
            "t_hot": temps[:, 2],
            "t_ambient": temps[:, 3],
            "current": cur,
            "voltage": volt,
            "door_open": door,
        }
    )
