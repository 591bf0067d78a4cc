"""The unit's settled values: medians and pooled estimates over its earlier windows."""

from __future__ import annotations

import math

import numpy as np

from tecfleet.analytics import trends
from tecfleet.analytics.runner.settings import AnalysisSettings
from tecfleet.analytics.runner.state import DeviceState

__all__ = ["k_settled", "q_settled", "s_settled", "taus_settled"]


def k_settled(state: DeviceState, cfg: AnalysisSettings) -> float | None:
    """The unit's settled K [W/K], None till there are ``k_hold_min_n`` values."""
    # The median of the unit's own K from earlier windows with two operating points, once
    # there are enough of them. Held there at a single operating point and used in every
    # cabinet balance, K's error stays the same whichever kind of window UA comes from, and
    # how hard the cabinet makes the module work (a leak keeps it running) does not move it.
    hist = state.k_hist or []
    return float(np.median(hist)) if len(hist) >= cfg.k_hold_min_n else None


def taus_settled(
    state: DeviceState, cfg: AnalysisSettings
) -> tuple[float, float, float, float] | None:
    """The unit's sink time constants and their standard errors (cold, sd, hot, sd) [s]."""
    # The unit's sink time constants pooled over its earlier windows with two operating
    # points, each sink's weighted by the inverse of its variance (sinks do not change; one
    # window's estimate scatters, and where the module seldom switches it is hardly
    # determined), with the pooled standard errors.
    hist = np.array(state.tau_hist or [], dtype=np.float64).reshape(-1, 4)
    if hist.shape[0] < cfg.k_hold_min_n:
        return None
    out: list[float] = []
    for j in (0, 2):
        w = 1.0 / np.maximum(hist[:, j + 1], 1e-9) ** 2
        out += [float(np.sum(w * hist[:, j]) / np.sum(w)), float(1.0 / math.sqrt(np.sum(w)))]
    return out[0], out[1], out[2], out[3]


def s_settled(state: DeviceState, cfg: AnalysisSettings) -> tuple[float, float] | None:
    """The unit's settled S at 25 °C and its standard error [V/K]."""
    # The median of the unit's own S (fitted allowing for a constant ΔT offset) from earlier
    # windows where the readings pinned it, and its standard error. S does not wear; one
    # window's S scatters by one or two per cent, which S·I·Tc carries into the cabinet
    # balance, and the S that pairs with ΔT as read shifts with the operating point. Half the
    # windows' median error: some of it is shared between windows (common practice, no source).
    hist = state.s_hist or []
    if len(hist) < cfg.s_settle_min_n:
        return None
    values = np.array(hist, dtype=np.float64)
    return float(np.median(values[:, 0])), 0.5 * float(np.median(values[:, 1]))


def q_settled(state: DeviceState, cfg: AnalysisSettings) -> tuple[float, float] | None:
    """The unit's settled internal load and its standard error [W]."""
    # The median of the unit's own internal load from earlier well-determined cabinet fits,
    # and its standard error: the windows' robust scatter over the root of the number of
    # days behind it (thermal windows overlap, four to a day).
    hist = state.q_hist or []
    if len(hist) < cfg.k_hold_min_n:
        return None
    bl = trends.baseline(np.asarray(hist, dtype=np.float64))  # median and scaled MAD
    days = len(hist) * cfg.window_s / cfg.thermal_window_s
    return bl.center, max(bl.spread / math.sqrt(max(days, 1.0)), cfg.q_settled_min_sd)
