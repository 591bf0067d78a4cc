"""Once a day: Theil-Sen slopes of the tracked quantities, wear, and setpoint capacity."""

from __future__ import annotations

import numpy as np
from scipy import ndimage

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics, trends
from tecfleet.analytics.errors import PhysicsError
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import MS_DAY, T0, AnalysisSettings
from tecfleet.analytics.runner.state import DeviceState

__all__ = ["daily"]


def daily(
    b: int,
    rows: EstimateRows,
    state: DeviceState,
    prior: physics.ModuleParameters | None,
    setpoint_c: float,
    cfg: AnalysisSettings,
) -> None:
    """The daily estimates of the day ending at ``b`` (epoch ms UTC)."""
    _slopes(b, rows, state, cfg)
    _capacity(b, rows, state, prior, setpoint_c, cfg)


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
    cfg: AnalysisSettings,
) -> None:
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
            setpoint_c + T0, cfg.design_ambient_c + T0, p.s25, p.r25, p.k, p.r_hot,
            p.r_cold, p.ua, i_max, max_voltage=v_max, alpha=cfg.alpha, beta=cfg.beta,
        )  # fmt: skip
    except PhysicsError as exc:
        rows.add("capacity.margin_w", b, None, None, 0, False, str(exc))
        return
    note = (
        f"setpoint {setpoint_c:g} °C at design ambient {cfg.design_ambient_c:g} °C, "
        f"drive up to {i_max:.2f} A" + ("" if prior_i is not None else " (largest current seen)")
    )
    rows.add("capacity.margin_w", b, cap.margin, None, 1, note=note)
    rows.add("capacity.holdable", b, 1.0 if cap.holdable else 0.0, None, 1, note=note)
    rows.add("capacity.max_cooling_w", b, cap.max_cooling, None, 1)
    rows.add("capacity.heat_load_w", b, cap.heat_load, None, 1)
