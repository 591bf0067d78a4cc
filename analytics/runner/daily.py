"""Once a day: Theil-Sen slopes of the tracked quantities, wear, and setpoint capacity.

The capacity is judged at a design ambient: the registration's (``cabinet.design_ambient_c``),
else the unit's own warm extreme (a percentile of its hourly mean ambient over the trailing
days), else the fleet default; ``capacity.design_ambient_basis`` says which (1, 2, 0). Whether
the unit is losing its setpoint now (driven flat out and still warm) is judged on the day's
own readings.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
from scipy import ndimage

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics, trends
from tecfleet.analytics.errors import PhysicsError
from tecfleet.analytics.runner.data import Readings
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import MS_DAY, T0, AnalysisSettings
from tecfleet.analytics.runner.state import DeviceState

__all__ = ["DESIGN_AMBIENT_BASIS", "daily"]

#: What ``capacity.design_ambient_basis`` codes stand for.
DESIGN_AMBIENT_BASIS = {0: "fleet default", 1: "registration", 2: "own ambient"}
_HOUR_MS = 3_600_000


def daily(
    b: int,
    data: Readings,
    rows: EstimateRows,
    state: DeviceState,
    prior: physics.ModuleParameters | None,
    cabinet: Mapping[str, Any],
    cfg: AnalysisSettings,
) -> None:
    """The daily estimates of the day ending at ``b`` (epoch ms UTC); ``data`` holds that
    day's readings, ``cabinet`` the registration's cabinet (setpoint, design ambient, °C)."""
    _slopes(b, rows, state, cfg)
    sl = data.slice(b - MS_DAY, b)
    _remember_ambient(b, data.ts[sl], data.ta[sl] - T0, state, cfg)
    setpoint_c = float(cabinet.get("setpoint_c") or cfg.default_setpoint_c)
    registered = cabinet.get("design_ambient_c")
    design = _design_ambient(None if registered is None else float(registered), state, cfg)
    losing = _losing_setpoint(
        data.ts[sl], data.tcab[sl] - T0, data.i[sl], setpoint_c, b - MS_DAY, cfg
    )
    _capacity(b, rows, state, prior, setpoint_c, design, cfg)
    note = (
        f"hours of the day with the cabinet over {cfg.losing_setpoint_k:g} K above "
        f"{setpoint_c:g} °C at {100 * cfg.losing_setpoint_drive:g} % of the day's largest current"
    )
    rows.add("capacity.losing_setpoint_h", b, float(losing), None, 1, note=note)
    rows.add(
        "capacity.losing_setpoint", b, 1.0 if losing >= cfg.losing_setpoint_hours else 0.0, None,
        1, note=f"{note}: at least {cfg.losing_setpoint_hours:g} h",
    )  # fmt: skip


def _hourly_means(ts: Any, x: Any, start_ms: int) -> tuple[Any, Any]:
    """Hour ends [ms] and means of ``x`` over the hours from ``start_ms`` that hold samples."""
    ok = np.isfinite(x)
    hour = (ts[ok] - start_ms) // _HOUR_MS
    if not hour.size:
        return np.zeros(0, np.int64), np.zeros(0)
    counts = np.bincount(hour)
    sums = np.bincount(hour, weights=x[ok])
    have = np.flatnonzero(counts)
    return start_ms + (have + 1) * _HOUR_MS, sums[have] / counts[have]


def _remember_ambient(
    b: int, ts: Any, ta_c: Any, state: DeviceState, cfg: AnalysisSettings
) -> None:
    """Add the day's hourly mean ambient [°C] to the state, keeping the trailing days."""
    ends, means = _hourly_means(ts, ta_c, b - MS_DAY)
    keep_from = b - cfg.design_ambient_days * MS_DAY
    kept = [p for p in (state.ambient_hours or []) if p[0] > keep_from]
    kept += [[int(e), round(float(m), 2)] for e, m in zip(ends, means, strict=True)]
    state.ambient_hours = kept


def _design_ambient(
    registered_c: float | None, state: DeviceState, cfg: AnalysisSettings
) -> tuple[float, int, str]:
    """The design ambient [°C], its basis code and its source in words."""
    if registered_c is not None:
        return registered_c, 1, "the registration's"
    hours = [p[1] for p in state.ambient_hours or []]
    if len(hours) >= cfg.design_ambient_min_hours:
        value = float(np.percentile(hours, cfg.design_ambient_percentile))
        how = (
            f"the {cfg.design_ambient_percentile:g}th percentile of the unit's hourly mean "
            f"ambient over {len(hours)} h of the last {cfg.design_ambient_days:g} days"
        )
        return value, 2, how
    return cfg.design_ambient_c, 0, "the fleet default (climate classes SN and N)"


def _losing_setpoint(
    ts: Any, tcab_c: Any, current: Any, setpoint_c: float, start_ms: int, cfg: AnalysisSettings
) -> float:
    """Hours of the day [h] whose mean cabinet temperature [°C] was ``losing_setpoint_k``
    above the setpoint while the mean current [A] was at ``losing_setpoint_drive`` of the
    day's largest hourly mean."""
    _ends, cab = _hourly_means(ts, tcab_c, start_ms)
    _ends_i, amps = _hourly_means(ts, current, start_ms)
    if not cab.size or cab.size != amps.size or not np.any(amps > cfg.on_current):
        return 0.0
    flat_out = amps >= cfg.losing_setpoint_drive * float(np.max(amps))
    warm = cab > setpoint_c + cfg.losing_setpoint_k
    return float(np.count_nonzero(flat_out & warm & (amps > cfg.on_current)))


def _slopes(b: int, rows: EstimateRows, state: DeviceState, cfg: AnalysisSettings) -> None:
    bases = state.baseline or {}
    for name, prefix in (
        ("r25", "module.resistance_25c"), ("ua", "cabinet.ua"), ("rhot", "hot_side.resistance")
    ):  # fmt: skip
        series = (state.series or {}).get(name)
        if name not in bases or not series:
            continue
        center = float(bases[name].center)
        arr = np.array(series, dtype=np.float64)
        # Median of each day's values, one labelled reduction over the series.
        days, day_of = np.unique(np.floor(arr[:, 0] / MS_DAY), return_inverse=True)
        med = np.asarray(ndimage.median(arr[:, 1], day_of, np.arange(days.size)), np.float64)
        try:
            tr = trends.theil_sen_trend(days, 100.0 * (med / center - 1.0), min_points=7)
        except PhysicsError:
            continue
        half = 0.5 * (tr.high - tr.low) * 30.0
        key = f"{prefix}.slope_pct_per_30d"
        rows.add(key, b, tr.slope * 30.0, half / 1.96, tr.n, note="95 % CI in _low/_high")
        rows.add(f"{key}_low", b, tr.low * 30.0, None, tr.n)
        rows.add(f"{key}_high", b, tr.high * 30.0, None, tr.n)
        if name == "r25":
            change = 100.0 * (float(med[-1]) / center - 1.0)
            left = trends.days_to_limit(change, tr.slope, cfg.wear_limit_pct)
            rows.add(
                "module.days_to_wear_limit", b, left, None, tr.n,
                note=f"wear limit +{cfg.wear_limit_pct:g} % on R25 (common practice, no source)",
            )  # fmt: skip


def _capacity(
    b: int,
    rows: EstimateRows,
    state: DeviceState,
    prior: physics.ModuleParameters | None,
    setpoint_c: float,
    design: tuple[float, int, str],
    cfg: AnalysisSettings,
) -> None:
    ambient_c, basis, source = design
    p = state.params
    if p is None or p.ua is None or p.r_hot is None or p.r_cold is None:
        return
    i_max = prior_i = None
    v_max = None
    if prior is not None:
        # Imax = S·Tc/R at ΔTmax is what the ratings give; recompute from the prior module.
        rt = physics.ratings_from_parameters(prior, cfg.default_t_hot_rated_c + T0)
        prior_i, v_max = rt.i_max, rt.v_max
    i_max = prior_i if prior_i is not None else float(p.i_seen if p.i_seen is not None else 0.0)
    if i_max <= 0.0:
        return
    try:
        cap = dg.setpoint_capacity(
            setpoint_c + T0, ambient_c + T0, p.s25, p.r25, p.k, p.r_hot, p.r_cold, p.ua, i_max,
            max_voltage=v_max, q_internal=p.q_int or 0.0, alpha=cfg.alpha, beta=cfg.beta,
        )  # fmt: skip
    except PhysicsError as exc:
        rows.add("capacity.margin_w", b, None, None, 0, False, str(exc))
        return
    note = (
        f"setpoint {setpoint_c:g} °C at design ambient {ambient_c:.1f} °C ({source}), "
        f"internal load {p.q_int or 0.0:.2f} W, drive up to {i_max:.2f} A"
        + ("" if prior_i is not None else " (largest current seen)")
    )
    rows.add("capacity.design_ambient_c", b, ambient_c, None, 1, note=source)
    rows.add(
        "capacity.design_ambient_basis", b, float(basis), None, 1,
        note=", ".join(f"{k}: {v}" for k, v in DESIGN_AMBIENT_BASIS.items()),
    )  # fmt: skip
    rows.add("capacity.margin_w", b, cap.margin, None, 1, note=note)
    rows.add("capacity.holdable", b, 1.0 if cap.holdable else 0.0, None, 1, note=note)
    rows.add("capacity.max_cooling_w", b, cap.max_cooling, None, 1)
    rows.add("capacity.heat_load_w", b, cap.heat_load, None, 1)
