"""The cabinet probe against the cold side's heat balance.

The cabinet air gives its heat to the module's cold face through the cold sink, so
T_cab − Tc = r_cold·Qc, and a probe offset adds a constant: fitted over a unit's first days,
the balance's constant then moves only with the cabinet probe's drift. A drifting probe
reads like a heat leak to the cabinet's balance (a warm probe narrows Ta − Tcab), which no
change of the module or the sinks explains; this balance tells the two apart.

Where the cold face has a probe, Qc comes from the module's equations while it is driven.
Where it has none but the driver lets the module float, the off samples give both: the
open-circuit voltage is S·ΔT (the Seebeck effect), so Tc = Th − V/S, and with no current the
cold face takes Qc = −K·ΔT, the module's own conduction (H. J. Goldsmid, *Introduction to
Thermoelectricity*, 2010, ch. 2). The balance's slope is then −r_cold·K.
"""

from __future__ import annotations

import math

import numpy as np

from .._validate import T_0C_K, FloatArray
from .estimates import BoolArray
from .least_squares import median_mad

__all__ = [
    "cold_side_heat_balance",
    "fit_cold_side_baseline",
    "floating_cold_face",
    "window_shift",
]


def cold_side_heat_balance(
    current: FloatArray,
    t_cold_c: FloatArray,
    t_hot_c: FloatArray,
    voltage: FloatArray,
    seebeck: float,
    conductance: float,
) -> FloatArray:
    """Heat pumped at the cold face [W] from the readings of a driven module.

    Qc = S·I·Tc − ½·I²·R − K·(Th − Tc) (Ioffe 1957; Goldsmid 2010, ch. 2; as
    :func:`tecfleet.analytics.physics.cold_side_heat`), with the Joule term taken from the
    measured voltage, I·R = V − S·(Th − Tc), so a module whose resistance rises with wear does
    not look like a drifting probe.

    Parameters
    ----------
    current : Module current [A].
    t_cold_c : Cold face temperature [°C].
    t_hot_c : Hot face temperature [°C].
    voltage : Module voltage [V].
    seebeck : Module Seebeck coefficient, from its ratings [V/K].
    conductance : Module thermal conductance, from its ratings [W/K].
    """
    tc = np.asarray(t_cold_c, np.float64) + T_0C_K
    th = np.asarray(t_hot_c, np.float64) + T_0C_K
    i = np.asarray(current, np.float64)
    v = np.asarray(voltage, np.float64)
    joule = 0.5 * i * (v - seebeck * (th - tc))
    return np.asarray(seebeck * i * tc - joule - conductance * (th - tc), np.float64)


def floating_cold_face(
    t_hot: FloatArray, voltage: FloatArray, seebeck: float, conductance: float
) -> tuple[FloatArray, FloatArray]:
    """Cold face temperature and the heat it takes from the cabinet, of a module left off by
    a driver that lets it float.

    V_oc = S·ΔT (Seebeck effect), so Tc = Th − V/S; with I = 0 the cold-face heat
    Qc = S·I·Tc − ½·I²·R − K·ΔT reduces to −K·ΔT (Ioffe 1957; H. J. Goldsmid, *Introduction to
    Thermoelectricity*, 2010, ch. 2).

    Parameters
    ----------
    t_hot : Hot face temperature [K], or [°C] (the result is then in °C too).
    voltage : Open-circuit voltage of the module, samples without current [V].
    seebeck : Module Seebeck coefficient [V/K].
    conductance : Module thermal conductance [W/K].

    Returns
    -------
    (t_cold, qc) : cold face temperature in the unit of ``t_hot``, and Qc [W] (negative: the
    heat the module's conduction brings to the cold face).
    """
    dt = np.asarray(voltage, np.float64) / seebeck
    return np.asarray(t_hot, np.float64) - dt, -conductance * dt


def fit_cold_side_baseline(
    t_cabinet: FloatArray,
    t_cold: FloatArray,
    qc: FloatArray,
    judged: BoolArray,
    min_samples: int = 300,
) -> tuple[float, float] | None:
    """Commissioning fit t_cabinet − t_cold = offset + r_cold·Qc over the ``judged`` samples.

    The cabinet air gives its heat to the cold side through r_cold [K/W], so the difference
    follows the cold face's heat; ``offset`` [K] holds the probes' fixed biases and what the
    rated module parameters miss. Returns (offset, r_cold), or None when there are under
    ``min_samples`` judged samples, Qc does not vary, or the fit is not physical (r_cold ≤ 0).

    Parameters
    ----------
    t_cabinet : Cabinet temperature [°C or K].
    t_cold : Cold face temperature, in the unit of ``t_cabinet``.
    qc : Heat taken at the cold face [W].
    judged : Samples the balance holds on (a driven module, or one floating while off).
    min_samples : Fewest judged samples [-].
    """
    ok = judged & np.isfinite(t_cabinet) & np.isfinite(t_cold) & np.isfinite(qc)
    if int(ok.sum()) < min_samples or float(np.std(qc[ok])) <= 0.0:
        return None
    x = np.column_stack([np.ones(int(ok.sum())), qc[ok]])
    coef, *_ = np.linalg.lstsq(x, t_cabinet[ok] - t_cold[ok], rcond=None)
    offset, r_cold = float(coef[0]), float(coef[1])
    if not (math.isfinite(offset) and math.isfinite(r_cold)) or r_cold <= 0.0:
        return None
    return offset, r_cold


def window_shift(
    t_cabinet: FloatArray,
    t_cold: FloatArray,
    qc: FloatArray,
    judged: BoolArray,
    baseline: tuple[float, float],
) -> tuple[float, float, int]:
    """The cabinet probe's shift against its commissioning ``baseline`` (offset [K],
    r_cold [K/W]) over one window: the median of t_cabinet − t_cold − r_cold·Qc − offset
    over the ``judged`` samples [K], its standard error from the median absolute deviation
    (1.4826·MAD, the normal-consistent scale, times √(π/2) for a median over √n: F. R.
    Hampel, *J. Am. Stat. Assoc.* 69, 1974; from memory) [K], and the samples it rests on.
    NaN with no judged sample. Arguments as :func:`fit_cold_side_baseline`."""
    ok = judged & np.isfinite(t_cabinet) & np.isfinite(t_cold) & np.isfinite(qc)
    n = int(ok.sum())
    if n == 0:
        return math.nan, math.nan, 0
    resid = t_cabinet[ok] - t_cold[ok] - baseline[1] * qc[ok] - baseline[0]
    med, mad = median_mad(resid)
    return med, math.sqrt(math.pi / 2.0) * 1.4826 * mad / math.sqrt(n), n
