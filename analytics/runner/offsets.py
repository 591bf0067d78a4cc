"""The probes' offsets a unit's readings have shown, carried from window to window.

Each window looks for rests (:func:`diagnostics.probe_offsets.rest_moments`) in its thermal
window and keeps them in the state, so that offsets found on a power cut keep serving later
windows; a floating module's open-circuit voltage adds the window's own evidence. The
temperatures the fits see are then corrected by the estimated offsets (relative to the
ambient probe), and the offset prior of the fits narrowed to what is left of it.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from tecfleet.analytics import physics
from tecfleet.analytics._validate import T_25C_K, FloatArray
from tecfleet.analytics.diagnostics import cabinet_probe as cp
from tecfleet.analytics.diagnostics import probe_offsets as po
from tecfleet.analytics.errors import PhysicsError
from tecfleet.analytics.runner import settled
from tecfleet.analytics.runner.data import Readings, flags_of
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import AnalysisSettings, diagnostics_options
from tecfleet.analytics.runner.state import DeviceState, remember

__all__ = ["corrected", "offset_cov", "settings_for", "update_offsets"]

#: Rest moments kept per unit [-] (common practice, no source).
_KEEP_RESTS = 20


def update_offsets(
    data: Readings,
    b: int,
    floating: bool,
    prior: physics.ModuleParameters | None,
    rows: EstimateRows,
    state: DeviceState,
    cfg: AnalysisSettings,
) -> None:
    """Find the rests and the open-circuit evidence of the window ending at ``b`` (epoch ms
    UTC), keep the estimate in ``state.probe_offsets`` and store it as estimate rows; and
    judge the cabinet probe where the cold face has no probe (:func:`_check_cabinet_probe`)."""
    _check_cabinet_probe(data, b, floating, prior, rows, state, cfg)
    opts = diagnostics_options(cfg)
    wt = data.slice(b - max(cfg.thermal_window_s, cfg.window_s) * 1000, b)
    usable = flags_of(data, wt).usable
    if wt.stop - wt.start < 2:
        return
    base_ms = float(data.ts[wt.start]) - float(data.t[wt.start]) * 1000.0
    for m in po.rest_moments(
        data.t[wt], data.tcab[wt], data.tc[wt], data.th[wt], data.ta[wt], data.i[wt],
        data.v[wt], usable, floating=floating, options=opts,
    ):  # fmt: skip
        _keep_rest(state, base_ms + m.start_s * 1000.0, base_ms + m.end_s * 1000.0, m)
    evidence = po.rest_evidence([_moment(r) for r in state.probe_rests or []])
    w = data.slice(b - cfg.window_s * 1000, b)
    s25 = _seebeck(state, prior, cfg)
    if floating and s25 is not None:
        tm = 0.5 * (data.tc[w] + data.th[w])
        s_t = s25[0] * (1.0 + cfg.beta * (tm - T_25C_K))
        evidence = evidence + po.open_circuit_evidence(
            data.tc[w], data.th[w], data.i[w], data.v[w], s_t, s25[1],
            flags_of(data, w).usable, options=opts,
        )  # fmt: skip
    try:
        est = po.probe_offsets(evidence, options=opts)
    except PhysicsError:
        return  # no rest and no floating module yet: the offsets' prior stays
    state.probe_offsets = [float(x) for x in est.offsets]
    state.probe_offset_cov = est.cov.tolist()
    n = est.n_rest + est.n_open
    channels = (data.tcab[wt], data.tc[wt], data.th[wt])
    for name, value, se, arr in zip(po.PROBES, est.offsets, est.stderrs, channels, strict=True):
        if not np.isfinite(arr).any():
            continue  # no such probe on this unit
        # Called reliable where the readings narrowed it to two-thirds of its prior (common
        # practice, no source).
        ok = bool(se < (2.0 / 3.0) * cfg.probe_offset_k / math.sqrt(2.0))
        rows.add(f"probes.offset_{name}_k", b, float(value), float(se), n, ok, est.basis)


def _check_cabinet_probe(
    data: Readings,
    b: int,
    floating: bool,
    prior: physics.ModuleParameters | None,
    rows: EstimateRows,
    state: DeviceState,
    cfg: AnalysisSettings,
) -> None:
    """Judge the cabinet probe of a unit without a cold-face probe whose module floats, over
    the thermal window ending at ``b`` (epoch ms UTC): the cold side's balance against the
    face read from the open-circuit voltage (:mod:`diagnostics.cabinet_probe`), fitted on
    the first window that has ``cabinet_check_min_samples`` off samples and kept, and this
    window's shift from it, stored as ``probes.cabinet_shift_k`` and in
    ``state.cabinet_shift`` with the window's end; a window that cannot judge it leaves
    them as they were (see ``tracks.cabinet_moved``). The rated S and K are used
    throughout, so that the balance's constant moves with the probe alone. The readings as
    the probes give them: the offsets' correction follows the rests, which a drift also
    moves."""
    if data.probed != (False, True) or not floating or prior is None:
        return
    wt = data.slice(b - cfg.thermal_window_s * 1000, b)
    fl = flags_of(data, wt)
    tc, qc = cp.floating_cold_face(data.th[wt], data.v[wt], prior.seebeck, prior.conductance)
    judged = fl.usable & ~fl.on
    need = cfg.cabinet_check_min_samples
    if state.cabinet_baseline is None:
        fit = cp.fit_cold_side_baseline(data.tcab[wt], tc, qc, judged, need)
        if fit is None:
            return
        state.cabinet_baseline = list(fit)
    base = state.cabinet_baseline
    shift, se, n = cp.window_shift(data.tcab[wt], tc, qc, judged, (base[0], base[1]))
    if n < need:
        return
    state.cabinet_shift, state.cabinet_shift_ms = shift, b
    rows.add(
        "probes.cabinet_shift_k", b, shift, se, n, True, None,
        "cabinet probe against the cold face read from the open-circuit voltage",
    )  # fmt: skip


def _seebeck(
    state: DeviceState, prior: physics.ModuleParameters | None, cfg: AnalysisSettings
) -> tuple[float, float] | None:
    # S at 25 °C [V/K] and its relative standard error [-] for the open-circuit evidence: the
    # unit's settled own S, else the rated one with the ratings' spread.
    own = settled.s_settled(state, cfg)
    if own is not None:
        return own[0], own[1] / own[0]
    if prior is not None:
        return prior.seebeck, cfg.rating_rel_sd
    return None


def _keep_rest(state: DeviceState, start_ms: float, end_ms: float, m: po.RestMoment) -> None:
    # A rest seen again by a later window (the same stretch without current, now longer)
    # replaces the one kept; a new one is added.
    row: list[float | None] = [float(start_ms), float(end_ms)]
    row += [_num(x) for x in (*m.diff, *m.diff_sd, m.volt, m.volt_sd)]
    kept = state.probe_rests or []
    for k, old in enumerate(kept):
        old_start, old_end = old[0], old[1]
        assert old_start is not None and old_end is not None
        if start_ms <= old_end and old_start <= end_ms:
            kept[k] = row
            state.probe_rests = kept
            return
    state.probe_rests = remember(state.probe_rests, row, _KEEP_RESTS)


def _num(x: float) -> float | None:
    # Stored JSON has no NaN: a probe not read is null.
    return float(x) if math.isfinite(x) else None


def _moment(row: list[float | None]) -> po.RestMoment:
    vals = [math.nan if x is None else float(x) for x in row]
    return po.RestMoment(
        vals[0], vals[1], np.array(vals[2:5]), np.array(vals[5:8]), vals[8], vals[9]
    )


def corrected(data: Readings, state: DeviceState) -> Readings:
    """``data`` with the cabinet and face temperatures (and their interval means) corrected by
    the unit's estimated offsets relative to the ambient probe (itself unchanged); ``data``
    where there are none."""
    off = state.probe_offsets
    if off is None:
        return data
    m = data.means
    if m is not None:
        m = dataclasses.replace(
            m, t_cabinet=m.t_cabinet - off[0], t_cold=m.t_cold - off[1], t_hot=m.t_hot - off[2]
        )
    return dataclasses.replace(
        data, tcab=data.tcab - off[0], tc=data.tc - off[1], th=data.th - off[2], means=m
    )


def offset_cov(state: DeviceState) -> FloatArray | None:
    """Covariance of the unit's estimated offsets (cabinet, cold, hot, relative to the
    ambient probe) [K²]; None where it has none."""
    cov = state.probe_offset_cov
    return None if cov is None else np.array(cov, dtype=np.float64)


def settings_for(state: DeviceState, cfg: AnalysisSettings) -> AnalysisSettings:
    """``cfg`` with the offset prior narrowed to the largest standard uncertainty left of
    the differences the heat balances use, where the unit has an estimate: for what takes
    one figure for every pair of probes (the hourly hot side, the paths' stated errors)."""
    cov = offset_cov(state)
    if cov is None:
        return cfg
    sd = po.largest_difference_sd(cov)
    return dataclasses.replace(cfg, probe_offset_k=min(cfg.probe_offset_k, sd))
