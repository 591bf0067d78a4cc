"""One device's run: its readings since the last analysed step, step by step, then stored."""

from __future__ import annotations

from typing import Any

import numpy as np
from sqlalchemy.engine import Connection

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics.runner.daily import daily
from tecfleet.analytics.runner.data import load, priors
from tecfleet.analytics.runner.hot_side import (
    faces_source,
    follow_source,
    hot_side,
    hourly,
    stretch_steps,
)
from tecfleet.analytics.runner.replacements import apply_replacements
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import (
    AnalysisSettings,
    diagnostics_options,
    for_reporting,
)
from tecfleet.analytics.runner.state import DeviceState
from tecfleet.analytics.runner.window import fit_window
from tecfleet.ingest import db
from tecfleet.ingest.db import alert_records
from tecfleet.ingest.db import analysis as analysis_db
from tecfleet.ingest.db.analysis import DeviceToAnalyze

__all__ = ["analyze_device"]


def analyze_device(
    conn: Connection,
    dev: DeviceToAnalyze,
    saved: tuple[int, dict[str, Any]] | None,
    cfg: AnalysisSettings,
) -> tuple[int, int]:
    """Analyse a device's complete steps since ``saved`` (its progress and stored state; None
    for a device never analysed) and store the results; (steps, estimate rows)."""
    step = cfg.step_s * 1000
    window = cfg.window_s * 1000
    last = int(dev.last_reading_ms)
    if saved is None:
        first = db.first_reading_ms(conn, dev.device_id)
        if first is None:
            return 0, 0
        done = first // step * step
        state = DeviceState()
    else:
        done, state = saved[0], DeviceState.from_json(saved[1])
    end = last // step * step
    if end <= done:
        return 0, 0
    # The day behind a window fit is needed only when a fit is due in this run; hourly steps
    # alone need their own hour (flags look back at most margin_s, so they come out the same).
    fit_due = any(b % window == 0 for b in range(done + step, end + 1, step))
    lookback = (max(window, cfg.thermal_window_s * 1000) if fit_due else step) + (
        cfg.margin_s * 1000
    )
    data = load(conn, dev.device_id, done - lookback, end)
    # At slow reporting an hour's hot-side stretch reaches back several hours, and the
    # thermal window of instants several days.
    interval = dg.usual_interval(data.t)
    span = stretch_steps(interval, cfg, data.summarised) * step
    thermal = for_reporting(cfg, interval, data.summarised).thermal_window_s * 1000
    need = max(thermal, window) if fit_due else span
    if need + cfg.margin_s * 1000 > lookback:
        data = load(conn, dev.device_id, done - need - cfg.margin_s * 1000, end)
    # Flags once for everything loaded. They depend on at most door_settle_s/settle_s of
    # look-back (within margin_s) and never on a reading after the end of its own step, so
    # they come out the same however the history is split into runs.
    stp = data.ts // step
    breaks = np.append(stp[1:] != stp[:-1], True) if data.ts.size else np.zeros(0, dtype=bool)
    data.flags = dg.flag_samples(
        data.t, data.tcab, data.tc, data.th, data.ta, data.i, data.v, data.door,
        breaks=breaks, probed=data.probed, options=diagnostics_options(cfg),
    )  # fmt: skip
    replaced = alert_records.replacements(conn, dev.device_id)
    data.since_ms = state.replaced_ms
    rows = EstimateRows(dev.device_id)
    prior = priors(dev.module, cfg)
    cabinet = dev.cabinet if isinstance(dev.cabinet, dict) else {}
    steps = 0
    hot: dict[int, dg.Estimate | None] = {}
    follow: dict[int, dg.Estimate | None] = {}
    for b in range(done + step, end + 1, step):
        steps += 1
        if b % window == 0:
            if replaced and apply_replacements(state, replaced, b) is not None:
                data.since_ms = state.replaced_ms
            fit_window(data, b, rows, state, prior, cfg)
            hot = {}
        if b % (cfg.daily_s * 1000) == 0:
            daily(b, data, rows, state, prior, cabinet, cfg)
        if b not in hot:
            # The fitted parameters hold until the next window: every hour up to it at once.
            # On the probes as read: the hourly figures are judged against the unit's own
            # baseline, in which constant offsets cancel, and an offset found mid-season
            # must not step them.
            last_hour = min(b // window * window + window - step, end)
            hot = hot_side(data, b, last_hour, state, cfg, prior)
            source = follow_source(data.probed, state.params)
            if source != faces_source(data.probed, state.params):
                follow = hot_side(data, b, last_hour, state, cfg, prior, source)
            else:
                follow = hot
        hourly(b, hot.get(b), rows, state, cfg, data.probed, follow.get(b))
    analysis_db.write_results(conn, dev.device_id, rows.rows, end, state.to_json())
    return steps, len(rows.rows)
