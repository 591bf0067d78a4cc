"""The 6-hourly window fit: data quality, the module's electrical fit, the thermal fit of
cabinet and sinks over the longer thermal window, what they give, and the performance now.

The fits themselves are :func:`diagnostics.fit_electrical` (called in :func:`_electrical`
only) and :func:`diagnostics.fit_thermal` (called in :func:`_thermal` only).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics
from tecfleet.analytics._validate import T_25C_K, FloatArray
from tecfleet.analytics.diagnostics import probe_offsets as po
from tecfleet.analytics.errors import InsufficientDataError, PhysicsError
from tecfleet.analytics.runner import offsets, seebeck, settled
from tecfleet.analytics.runner.data import (
    Readings,
    complete_faces,
    faces_basis,
    flags_of,
    placed_faces,
)
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import (
    AnalysisSettings,
    diagnostics_options,
    for_reporting,
)
from tecfleet.analytics.runner.state import DeviceState, ModuleParams, remember
from tecfleet.analytics.runner.tracks import (
    FLAGS_HELD_R25_CABINET_PROBE_MOVED,
    ambient_lead_usual,
    cabinet_moved,
    faces_r25,
    follow_k_trend,
    rested_lately,
    track_r25,
    track_r25_from_voltage,
    track_ua,
    ua_judged,
)

__all__ = ["fit_window"]

BoolArray = np.ndarray[Any, np.dtype[np.bool_]]

NEVER_RESTED = "module never rested in this window: one operating point"

#: Why what rests on the faces is served as not reliable on a unit with no face probe
#: (``data.placed_faces``): the voltage gives S·ΔT, not S, nor where the faces sit.
PLACED_FACES = (
    "no face probe: S and K are the rated ones (the voltage gives S·ΔT only) and both faces "
    "are placed by an assumed share of the sinks"
)


def _missing_faces(probed: tuple[bool, bool]) -> str:
    return {
        (False, True): "no cold-face probe",
        (True, False): "no hot-face probe",
        (False, False): "no face probes",
    }[probed]


@dataclass
class _Window:
    """One window's readings (the fit window ``w`` and the longer thermal window ``wt``)."""

    b: int
    w: slice
    wt: slice
    n: int
    fl: dg.SampleFlags
    usable_th: BoolArray
    t: FloatArray
    tcab: FloatArray
    tc: FloatArray
    th: FloatArray
    ta: FloatArray
    i: FloatArray
    v: FloatArray
    dt: FloatArray
    tm: FloatArray
    usable: BoolArray
    off: BoolArray
    floating: bool
    probed: tuple[bool, bool]
    faces_unknown: int  # usable samples whose face temperatures neither probe nor voltage gave
    switch_offs: int  # the module's switch-offs in the window

    @property
    def faces_placed(self) -> bool:
        """Neither face is probed: where the thermal fit runs, both faces were placed from
        the module's voltage (``data.placed_faces``), and what rests on where they sit is
        served as not reliable (:data:`PLACED_FACES`)."""
        return self.probed == (False, False)


@dataclass
class _Electrical:
    """The electrical fit and the temperature factors at the mean module temperature on."""

    el: dg.ElectricalFit
    on: BoolArray
    tm_on: float
    f_r: float
    f_s: float
    s_own: float
    se_own: float


def fit_window(
    data: Readings,
    b: int,
    rows: EstimateRows,
    state: DeviceState,
    prior: physics.ModuleParameters | None,
    cfg: AnalysisSettings,
) -> None:
    """All estimates of the window ending at ``b`` (epoch ms UTC), and what the state keeps."""
    data.faces, data.faces_missing = None, None
    interval = dg.usual_interval(data.t[data.slice(b - cfg.thermal_window_s * 1000, b)])
    cfg = for_reporting(cfg, interval, data.summarised)
    raw = _window(data, b, cfg)
    if raw is None:
        return
    # The fits see the temperatures corrected by the probes' offsets found so far, with the
    # offset prior narrowed to what is left of it. The offsets rest on the probes as read,
    # so they are found before any face is read from the module's voltage.
    offsets.update_offsets(data, b, raw.floating, prior, rows, state, cfg)
    # R and S's stated errors keep the offset prior (see diagnostics.fit_electrical).
    data, cfg_el, cfg = offsets.corrected(data, state), cfg, offsets.settings_for(state, cfg)
    # Where a face probe is missing, the faces of the thermal window from its own readings.
    wt = data.slice(b - max(cfg.thermal_window_s, cfg.window_s) * 1000, b)
    complete_faces(data, wt, prior, cfg, faces_r25(state, b, cfg))
    data = placed_faces(data, wt)
    win = _window(data, b, cfg)
    if win is None:
        return
    _quality_rows(win, rows)
    faces = data.faces.basis if data.faces is not None else faces_basis(win.probed)
    # Every estimate states the readings it rests on: their usual interval and kind.
    every = dg.interval_basis(dg.usual_interval(data.t[win.wt]), data.summarised)
    faces = f"{faces}, {every}"
    rows.basis = f"V = I·R + S·ΔT fit, {faces}" + (", open-circuit samples" if win.floating else "")
    try:
        ele = _electrical(data, win, rows, state, prior, cfg_el)
        if ele is None:
            return
        rows.basis = f"cabinet and sink heat balances: cabinet and ambient probes, {faces}"
        fitted = _thermal(data, win, ele, rows, state, prior, cfg)
        if fitted is None:
            return
        th_fit, k_settled = fitted
        _remember_fit(win, th_fit, state, cfg)
        cov3 = _cov3(ele.el, th_fit.stderrs["k"])
        _module_and_cabinet_rows(win, ele, th_fit, cov3, rows, cfg)
        _served_ua(win, th_fit, rows, state, cfg)
        rises = _rises(data, win)
        _path_rows(win, th_fit, rises, rows, state, cfg)
        trusted = state.params is not None and bool(state.params.faces_trusted)
        moved = cabinet_moved(state, b, cfg)
        follow, held = ua_judged(win.probed, trusted, moved, interval, data.summarised, cfg)
        if follow:
            # Only the cold face read from the voltage moves with each window's own R25; with
            # neither face probed ΔT is read at the R25 of the unit's recent windows.
            reduced = win.probed == (False, True)
            _follow_ua(b, th_fit, k_settled, rises[2], rows, state, cfg, held, reduced)
        rows.basis = f"module model at the operating point, {faces}"
        _performance(win, ele, th_fit, cov3, rows, cfg)
    finally:
        rows.basis = None


def _window(data: Readings, b: int, cfg: AnalysisSettings) -> _Window | None:
    thermal_window = max(cfg.thermal_window_s, cfg.window_s) * 1000
    # At slow reporting the module's fit reaches back further, up to the thermal window.
    interval = dg.usual_interval(data.t[data.slice(b - thermal_window, b)])
    window = round(1000 * max(cfg.window_s, min(cfg.window_min_intervals * interval,
                                                  thermal_window / 1000)))  # fmt: skip
    w = data.slice(b - window, b)
    wt = data.slice(b - thermal_window, b)
    fl = flags_of(data, w)
    n = w.stop - w.start
    if n < 10:
        return None
    t, tcab, tc, th, ta = data.t[w], data.tcab[w], data.tc[w], data.th[w], data.ta[w]
    i, v = data.i[w], data.v[w]
    dt = th - tc
    tm = 0.5 * (tc + th)
    # The fits use the samples whose face temperatures are known: all usable ones where both
    # faces have probes; where one lacks its probe, those the module's voltage gave.
    known = np.isfinite(dt)
    usable = fl.usable & known
    usable_th = flags_of(data, wt).usable & np.isfinite(data.th[wt] - data.tc[wt])
    off = usable & ~fl.on
    if data.probed == (True, True):
        floating = dg.detect_floating_driver(v[off], dt[off])
    else:
        # Faces read from the voltage imply an open-circuit voltage was seen.
        opts = diagnostics_options(cfg)
        floating = data.faces is not None or dg.floating_from_voltage(
            v[fl.usable & ~fl.on], options=opts
        )
    return _Window(
        b=b, w=w, wt=wt, n=n, fl=fl, usable_th=usable_th, t=t, tcab=tcab, tc=tc, th=th, ta=ta,
        i=i, v=v, dt=dt, tm=tm, usable=usable, off=off, floating=floating, probed=data.probed,
        faces_unknown=int((fl.usable & ~known).sum()),
        switch_offs=int(np.sum(fl.on[:-1] & ~fl.on[1:])),
    )  # fmt: skip


def _quality_rows(win: _Window, rows: EstimateRows) -> None:
    b, n, fl, usable = win.b, win.n, win.fl, win.fl.usable
    excluded = int(n - usable.sum())
    rows.add("quality.samples", b, float(usable.sum()), None, n)
    rows.add("quality.left_out", b, float(excluded), None, n)
    for reason, count in fl.counts.items():
        rows.add(f"quality.left_out_{reason}", b, float(count), None, n)
    rows.add("quality.switch_offs", b, float(win.switch_offs), None, n)
    rows.add("quality.driver_floating", b, 1.0 if win.floating else 0.0, None, n)
    if win.probed != (True, True):
        missing = _missing_faces(win.probed)
        rows.add(
            "quality.faces_unknown", b, float(win.faces_unknown), None, n, True,
            f"usable samples without face temperatures ({missing}, none from the voltage)",
        )  # fmt: skip


def _not_separable(win: _Window, rows: EstimateRows, why_not: str | None = None) -> None:
    # A unit short of a face probe whose faces the window could not reconstruct: what rests
    # on ΔT is served as unknown, with the reason, never as a number.
    missing = _missing_faces(win.probed)
    rested = int((win.fl.usable & ~win.fl.on).sum()) >= 5
    if win.floating:
        why = f"{missing}, and no face temperature from the module's voltage in this window"
        if why_not:
            why += f" ({why_not})"
    elif rested:
        why = f"zero-volt driver and {missing}, not separable"
    else:
        why = f"module never off in this window (no open-circuit voltage) and {missing}"
    faces = {(False, True): "hot face", (True, False): "cold face", (False, False): "no face"}
    basis = (
        f"cabinet, ambient, current and voltage, {faces[win.probed]} probed; "
        "no face temperature from the voltage"
    )
    n = int(win.fl.usable.sum())
    for key, what in (
        ("module.resistance_25c_ohm", "R25 and S"),
        ("module.seebeck_25c_v_per_k", "R25 and S"),
        ("cabinet.ua_w_per_k", "UA (needs the module's heat, so R, S and ΔT)"),
    ):
        rows.add(key, win.b, None, None, n, False, f"{what}: {why}", basis)


def _held_electrical(
    data: Readings, prior: physics.ModuleParameters | None, cfg: AnalysisSettings
) -> dg.ElectricalFit | str | None:
    # Where a face probe is missing: R25 from the module's switch-off steps and S from the
    # ratings (fitting V = I·R + S·ΔT to faces read from V would only return them), or why
    # there is none; None where both faces are probed.
    if data.faces_missing is not None:
        return data.faces_missing
    if data.faces is None or prior is None:
        return None
    step, opts = data.faces.step, diagnostics_options(cfg)
    # Massless faces make a switch-off step read S·ΔT's change as resistance: the hot probe's
    # jumps show it, and without face probes the open-circuit voltage's relaxing does
    # (dg.step_resistance refuses steps without it).
    return dg.fit_held(
        step.r25, step.r25_se, prior.seebeck, opts.seebeck_unit_rel_sd * prior.seebeck,
        step.n_steps, r_reliable=step.reliable, note=data.faces.basis,
    )  # fmt: skip


def _electrical(
    data: Readings,
    win: _Window,
    rows: EstimateRows,
    state: DeviceState,
    prior: physics.ModuleParameters | None,
    cfg: AnalysisSettings,
) -> _Electrical | None:
    # R and S of the module, served, and R25 followed at the trend S; None where the fit
    # fails (its reason stored).
    b, n, t, i, v, tc, th = win.b, win.n, win.t, win.i, win.v, win.tc, win.th
    usable, floating = win.usable, win.floating
    held = _held_electrical(data, prior, cfg)
    if (
        not isinstance(held, dg.ElectricalFit)
        and win.probed != (True, True)
        and int((usable & win.fl.on).sum()) < diagnostics_options(cfg).min_on
    ):
        _not_separable(win, rows, held)
        return None
    e_prior = (prior.resistance, prior.seebeck, cfg.rating_rel_sd) if prior is not None else None
    try:
        if isinstance(held, str):
            raise InsufficientDataError(held, held)
        el = held or dg.fit_electrical(
            i, v, tc, th, usable, floating=floating, alpha=cfg.alpha, beta=cfg.beta,
            prior=e_prior, dt_offset_sd=_dt_offset_sd(state), options=diagnostics_options(cfg),
        )  # fmt: skip
    except PhysicsError as exc:
        note = getattr(exc, "reason", str(exc))
        rows.add("module.resistance_25c_ohm", b, None, None, n, False, note)
        return None
    on = usable & win.fl.on
    tm = win.tm
    if data.faces is not None:
        # Faces read from the voltage: the mean module temperature the reconstruction used
        # (over the thermal window, which ends with this one).
        tm = data.faces.t_mean[win.w.start - win.wt.start : win.w.stop - win.wt.start]
        on = (i > cfg.on_current) & np.isfinite(tm)
    tm_on = float(np.mean(tm[on])) if on.any() else T_25C_K
    f_r = 1.0 + cfg.alpha * (tm_on - T_25C_K)
    f_s = 1.0 + cfg.beta * (tm_on - T_25C_K)
    se_r = float(np.sqrt(max(el.cov[0, 0], 0.0)))
    n_el = el.n_on + el.n_off
    r_note = el.note if held is not None or not el.r_reliable else None
    rows.add("module.resistance_25c_ohm", b, el.r25, se_r, n_el, el.r_reliable, r_note)
    rows.add("module.resistance_ohm", b, el.r25 * f_r, se_r * f_r, n_el, el.r_reliable, r_note)
    # Served: the module's own S, its fit allowing for a constant ΔT offset (the heat balances
    # below use the median of the unit's recent ones).
    s_own, se_own = el.s25_offset_free, el.s25_offset_free_se
    seebeck.serve_seebeck(rows, state, b, el, prior, float(t[-1] - t[0]), f_s, cfg)
    if held is not None:
        # R25 read from the module's voltage: followed where it was served as reliable.
        moved = FLAGS_HELD_R25_CABINET_PROBE_MOVED if cabinet_moved(state, b, cfg) else None
        # Changes are judged on the error that does not cancel against earlier windows.
        step = data.faces.step if data.faces is not None else None
        se_change = se_r if step is None or step.change_se is None else step.change_se
        track_r25_from_voltage(rows, state, b, el.r25, se_change, el.r_reliable, cfg, moved)
        return _Electrical(el, on, tm_on, f_r, f_s, s_own, se_own)
    if floating:
        s_steps, _ = dg.harman_steps(t, i, v, tc, th, usable, options=diagnostics_options(cfg))
        if s_steps.size >= 3:
            rows.add(
                "module.seebeck_step_v_per_k", b, float(np.median(s_steps)),
                float(np.std(s_steps, ddof=1) / math.sqrt(s_steps.size)), int(s_steps.size),
            )  # fmt: skip
    track_r25(rows, state, b, el, prior, cfg)
    return _Electrical(el, on, tm_on, f_r, f_s, s_own, se_own)


def _faces_trusted(
    win: _Window, el: dg.ElectricalFit, state: DeviceState, cfg: AnalysisSettings
) -> bool:
    # The window's R25 was served as reliable and, where faces are read from the voltage,
    # the module rested (``faces_min_switch_offs``) in a window of the last
    # ``faces_r25_span_s``, this one or an earlier one.
    if win.probed == (True, True):
        return el.r_reliable
    return rested_lately(state, win.b, win.switch_offs, cfg) and el.r_reliable


def _dt_offset_sd(state: DeviceState) -> float | None:
    # What is left of the ΔT offset after the faces were corrected by the estimate [K].
    cov = offsets.offset_cov(state)
    return None if cov is None else po.difference_sd(cov, "hot", "cold")


def _thermal(
    data: Readings,
    win: _Window,
    ele: _Electrical,
    rows: EstimateRows,
    state: DeviceState,
    prior: physics.ModuleParameters | None,
    cfg: AnalysisSettings,
) -> tuple[dg.ThermalFit, float | None] | None:
    # The thermal fit over the thermal window, with the unit's settled K (None if it has
    # none yet); None where the fit fails (its reason stored).
    b, n, wt, usable_th, el = win.b, win.n, win.wt, win.usable_th, ele.el
    if data.faces is not None and not np.isfinite(data.th[wt]).any():
        # No face probed nor placed: the hourly hot side still reads both faces at this
        # window's R25.
        _electrical_params(win, el, state, prior, cfg)
        note = f"{data.faces.basis}: the heat balances need the faces"
        rows.add("cabinet.ua_w_per_k", b, None, None, n, False, note)
        return None
    if win.probed != (True, True):
        # The balances integrate between samples: every usable one needs its faces.
        lacking = int((flags_of(data, wt).usable & ~usable_th).sum())
        if lacking:
            why = (
                f"UA: {_missing_faces(win.probed)}, and {lacking} usable samples of the thermal "
                "window without a face temperature from the module's voltage"
            )
            rows.add("cabinet.ua_w_per_k", b, None, None, n, False, why)
            return None
    # The heat balances use the unit's settled S once there is one; till then the S that
    # pairs with ΔT as the probes read it in this window.
    settled_s = settled.s_settled(state, cfg)
    if el.reliable:
        state.s_hist = remember(state.s_hist, [ele.s_own, ele.se_own], cfg.k_hold_keep)
    rs_cov = np.array(el.cov, dtype=np.float64)
    s_bal = el.s25
    if settled_s is not None:
        s_bal = settled_s[0]
        rs_cov[0, 1] = rs_cov[1, 0] = 0.0
        rs_cov[1, 1] = settled_s[1] ** 2
    tm_th = 0.5 * (data.tc[wt] + data.th[wt])
    s_t = s_bal * (1.0 + cfg.beta * (tm_th - T_25C_K))
    r_t = el.r25 * (1.0 + cfg.alpha * (tm_th - T_25C_K))
    k0, k_rel = _k_prior(el, prior)
    # (S, R) relative errors, from the electrical fit's (R, S) covariance.
    rel = np.array([1.0 / s_bal, 1.0 / el.r25])
    sr_rel_cov = rs_cov[::-1, ::-1] * np.outer(rel, rel)
    # The sink and cabinet figures of the last thermal fit stay till the next one succeeds:
    # the hourly hot-side resistance needs them, above all in the hours after a fan fails,
    # when the day's balances often cannot be fitted.
    _electrical_params(win, el, state, prior, cfg)
    k_settled = settled.k_settled(state, cfg)
    try:
        th_fit = dg.fit_thermal(
            data.t[wt], data.tcab[wt], data.tc[wt], data.th[wt], data.ta[wt], data.i[wt],
            s_t, r_t, usable_th, k0, k_rel, k_settled=k_settled,
            q_settled=settled.q_settled(state, cfg), sr_rel_cov=sr_rel_cov,
            sink_taus_settled=settled.taus_settled(state, cfg),
            offset_cov=offsets.offset_cov(state),
            means=None if data.means is None else data.means.part(wt),
            options=diagnostics_options(cfg),
        )  # fmt: skip
    except PhysicsError as exc:
        rows.add("cabinet.ua_w_per_k", b, None, None, n, False, getattr(exc, "reason", str(exc)))
        return None
    return th_fit, k_settled


def _k_prior(el: dg.ElectricalFit, prior: physics.ModuleParameters | None) -> tuple[float, float]:
    # K to start from [W/K] and its relative error [-]: the ratings', else a typical
    # module's ZT at the window's S and R.
    if prior is not None:
        return prior.conductance, 0.3
    return el.s25**2 * T_25C_K / (el.r25 * dg.TYPICAL_MODULE_ZT), 0.5


def _electrical_params(
    win: _Window,
    el: dg.ElectricalFit,
    state: DeviceState,
    prior: physics.ModuleParameters | None,
    cfg: AnalysisSettings,
) -> None:
    # The window's S and R (and whether its faces may be trusted) for the next steps; K stays
    # the last thermal fit's, or starts at the prior.
    if state.params is None:
        state.params = ModuleParams(k=_k_prior(el, prior)[0], s25=el.s25, r25=el.r25)
    else:
        state.params.s25, state.params.r25 = el.s25, el.r25
    state.params.faces_trusted = _faces_trusted(win, el, state, cfg)
    state.params.cov_rs = el.cov.tolist()


def _remember_fit(
    win: _Window, th_fit: dg.ThermalFit, state: DeviceState, cfg: AnalysisSettings
) -> None:
    # The fit's settled-value histories and the parameters the next steps use.
    keep = cfg.k_hold_keep
    if th_fit.ua_reliable and math.isfinite(th_fit.q_internal_own):
        state.q_hist = remember(state.q_hist, th_fit.q_internal_own, keep)
    if th_fit.sink_taus is not None and all(map(math.isfinite, th_fit.sink_taus)):
        state.tau_hist = remember(state.tau_hist, list(th_fit.sink_taus), keep)
    if not th_fit.faces_followed:
        # K is held where the samples cannot follow the sinks: K from windows that seemed to
        # follow them is no settled value either.
        state.k_hist = None
    elif th_fit.k_from_data:
        state.k_hist = remember(state.k_hist, th_fit.k, keep)
    i, usable, sd, p = win.i, win.usable, th_fit.stderrs, state.params
    assert p is not None
    p.k, p.k_sd, p.c_hot, p.ua = th_fit.k, sd["k"], max(th_fit.c_hot, 0.0), th_fit.ua
    p.q_int, p.r_cold, p.r_hot = th_fit.q_internal, 1.0 / th_fit.g_cold, 1.0 / th_fit.g_hot
    p.i_seen = float(np.max(i[usable])) if usable.any() else 0.0
    p.faces_followed = th_fit.faces_followed
    if win.faces_placed:
        # Placed faces give the sinks' split and the hot sink's storage no footing: the
        # hourly hot side stays on its own terms (``hot_side.faces_source``) and the capacity,
        # which needs both sinks, is not estimated.
        p.c_hot = p.r_cold = p.r_hot = p.faces_followed = None


def _cov3(el: dg.ElectricalFit, k_sd: float) -> FloatArray:
    # Covariance of (S, R, K) from the electrical fit's (R, S) one and K's standard error.
    cov3 = np.zeros((3, 3))
    cov3[0, 0], cov3[1, 1] = el.cov[1, 1], el.cov[0, 0]
    cov3[0, 1] = cov3[1, 0] = el.cov[0, 1]
    cov3[2, 2] = k_sd**2
    return cov3


def _module_and_cabinet_rows(
    win: _Window,
    ele: _Electrical,
    th_fit: dg.ThermalFit,
    cov3: FloatArray,
    rows: EstimateRows,
    cfg: AnalysisSettings,
) -> None:
    b, off, el = win.b, win.off, ele.el
    sd = th_fit.stderrs
    ns = th_fit.n_samples
    # A module that never rests (proportional drive) works along one family of operating
    # points: K leans on small changes of it, the air drifts with the load and the contents
    # lag behind. Against simulated fleets with known truth, K then came out up to 25 % high,
    # the cold side's resistance up to twice its value and UA 15-55 % low, often beyond their
    # stated errors: served, but not called reliable. UA's changes are still tracked.
    rested = th_fit.rested
    k_ok = th_fit.k_from_data and rested and not win.faces_placed
    k_note = th_fit.note if not th_fit.k_from_data else (None if rested else NEVER_RESTED)
    if win.faces_placed:
        k_note = PLACED_FACES
    rows.add("module.conductance_w_per_k", b, th_fit.k, sd["k"], ns, k_ok, k_note)
    s_m, r_m = el.s25 * ele.f_s, el.r25 * ele.f_r
    z_arr, z_err = dg.propagate(
        lambda p: p[:, 0] ** 2 / (p[:, 1] * p[:, 2]), np.array([s_m, r_m, th_fit.k]), cov3
    )
    z_val, z_se = float(z_arr[0]), float(z_err[0])
    rows.add("module.z_per_k", b, z_val, z_se, ns, k_ok, k_note)
    rows.add("module.zt", b, z_val * ele.tm_on, z_se * ele.tm_on, ns, k_ok, k_note)
    if off.any():
        rows.add(
            "module.off_leak_w", b, th_fit.k * float(np.mean(win.dt[off])), None, int(off.sum())
        )
    rows.add("cabinet.internal_load_w", b, th_fit.q_internal, sd["q_internal"], ns)
    rows.add(
        "cabinet.heat_capacity_j_per_k", b, th_fit.c, sd["c"], ns, th_fit.c_reliable,
        None if th_fit.c_reliable else "heat capacity poorly determined in this window",
    )  # fmt: skip


def _served_ua(
    win: _Window, th_fit: dg.ThermalFit, rows: EstimateRows, state: DeviceState,
    cfg: AnalysisSettings,
) -> None:  # fmt: skip
    # This window's UA, then the served UA (and the heat leak at it): the median of the
    # window fits' UA over the last ``ua_serve_span_s``, this one included; its error the
    # median of theirs (the windows overlap, so not narrowed by their count); reliable where
    # at least half were. A window's error includes what probe offsets and the errors of S
    # and R could do to it; UA's tracking does not, since a constant error cancels in its
    # changes.
    b, t, usable = win.b, win.t, win.usable
    ua_se, ua_ok, ua_note = _window_ua(th_fit, cfg)
    if win.faces_placed:
        ua_ok, ua_note = False, f"{PLACED_FACES}; its changes are still tracked"
    rows.add(
        "cabinet.ua_window_w_per_k", b, th_fit.ua, ua_se, th_fit.n_samples, ua_ok, ua_note
    )  # fmt: skip
    since = b - cfg.ua_serve_span_s * 1000
    kept = [w for w in state.ua_windows or [] if since < w[0] < b]
    kept.append([float(b), th_fit.ua, ua_se, 1.0 if ua_ok else 0.0])
    state.ua_windows = kept
    arr = np.array(kept, dtype=np.float64)
    ua, se = float(np.median(arr[:, 1])), float(np.median(arr[:, 2]))
    ok = bool(2 * int(arr[:, 3].sum()) >= len(kept))
    span_d = f"{cfg.ua_serve_span_s / 86_400:g}"
    few = f"fewer than half of the {len(kept)} window fits of the last {span_d} days reliable"
    note = None if ok else (few if ua_note is None else f"{ua_note}; {few}")
    basis = f"median of the {len(kept)} window fits of the last {span_d} days: {rows.basis}"
    rows.add("cabinet.ua_w_per_k", b, ua, se, th_fit.n_samples, ok, note, basis)
    last_hour = usable & (t >= t[-1] - 3600.0)
    if last_hour.any():
        d_amb = float(np.mean(win.ta[last_hour] - win.tcab[last_hour]))
        rows.add(
            "cabinet.heat_leak_w", b, ua * d_amb, se * abs(d_amb), int(last_hour.sum()), ok,
            note, basis,
        )  # fmt: skip


def _window_ua(th_fit: dg.ThermalFit, cfg: AnalysisSettings) -> tuple[float, bool, str | None]:
    # This window's UA: its standard error with probe offsets and the errors of S and R,
    # whether it is reliable, and why not.
    ua_se = math.hypot(th_fit.stderrs["ua"], th_fit.stderrs["ua_probe"])
    ua_ok = _ua_served_reliable(th_fit, cfg)
    ua_note = None
    if not th_fit.ua_reliable:
        ua_note = th_fit.note
    elif not th_fit.rested:
        ua_note = f"{NEVER_RESTED}; its changes are still tracked"
    elif not ua_ok:
        ua_note = (
            f"probe offsets and the module's S and R could move UA by "
            f"±{100 * ua_se / th_fit.ua:.0f} %: its changes are still tracked"
        )
    return ua_se, ua_ok, ua_note


def _ua_served_reliable(th_fit: dg.ThermalFit, cfg: AnalysisSettings) -> bool:
    # UA is served as reliable: its fit pins it, the module rested, and probe offsets and the
    # errors of S and R leave it within ``ua_max_rel_se``.
    ua_se = math.hypot(th_fit.stderrs["ua"], th_fit.stderrs["ua_probe"])
    return th_fit.ua_reliable and th_fit.rested and ua_se <= cfg.ua_max_rel_se * th_fit.ua


def _rises(data: Readings, win: _Window) -> tuple[float, float, float, float]:
    # Mean rises over the thermal window's usable samples [K]: cold path (Tcab - Tc), hot
    # path (Th - Ta), ambient lead (Ta - Tcab) and across the module (Th - Tc).
    wt, usable_th = win.wt, win.usable_th
    rise_c = float(np.mean((data.tcab[wt] - data.tc[wt])[usable_th]))
    rise_h = float(np.mean((data.th[wt] - data.ta[wt])[usable_th]))
    rise_amb = float(np.mean((data.ta[wt] - data.tcab[wt])[usable_th]))
    dt_th = float(np.mean((data.th[wt] - data.tc[wt])[usable_th]))
    return rise_c, rise_h, rise_amb, dt_th


def _path_rows(
    win: _Window,
    th_fit: dg.ThermalFit,
    rises: tuple[float, float, float, float],
    rows: EstimateRows,
    state: DeviceState,
    cfg: AnalysisSettings,
) -> None:
    # The cold and hot sides' thermal resistances from the thermal fit.
    b, sd, ns, rested = win.b, th_fit.stderrs, th_fit.n_samples, th_fit.rested
    g_c, g_h = th_fit.g_cold, th_fit.g_hot
    # Probe offsets shift the small temperature differences themselves (see
    # diagnostics.hot_side_resistance_ratio); add them to the fit's error. A K held at its
    # prior or at the unit's settled value is no part of the fit's covariance: through K·ΔT in
    # the cold path's balance, g·rise = Qc - K·ΔT, it moves g by -ΔT/rise per W/K (first
    # order), several times over since the rise is a few kelvin. Against simulated fleets with
    # known truth, without it the cold side's stated error covered its true one on 70 % of
    # units whose sinks store heat (K held), and the hot side's (rise three to five times
    # larger) on 97 %, as did the hourly figure's: there it stays out.
    rise_c, rise_h, _, dt_th = rises
    k_held_sd = 0.0 if th_fit.k_from_data else sd["k"]
    cov = offsets.offset_cov(state)
    for key, g, sd_g, rise, pair in (
        ("cold_side.resistance_k_per_w", g_c, sd["g_cold"], rise_c, ("cabinet", "cold")),
        ("hot_side.resistance_fit_k_per_w", g_h, sd["g_hot"], rise_h, ("hot", "ambient")),
    ):
        rise_abs = max(abs(rise), 1e-9)
        u_off = cfg.probe_offset_k if cov is None else po.difference_sd(cov, *pair)
        se_probe = (1.0 / g) * u_off / rise_abs
        se_k = k_held_sd * abs(dt_th) / rise_abs / g**2 if key.startswith("cold_side") else 0.0
        se = math.sqrt((sd_g / g**2) ** 2 + se_probe**2 + se_k**2)
        ok = se < 0.2 / g
        note = None
        if not ok:
            note = (
                f"only {rise:.1f} K across this path: probe offsets dominate"
                if se_probe >= se_k
                else "module conductance held, not fitted: its uncertainty dominates"
            )
        if ok and not rested and key.startswith("cold_side"):
            ok, note = False, NEVER_RESTED
        if ok and not th_fit.faces_followed and key.startswith("cold_side"):
            ok, note = False, th_fit.note
        if win.faces_placed:
            ok, note = False, PLACED_FACES
        rows.add(key, b, 1.0 / g, se, ns, ok, note)


def _follow_ua(
    b: int,
    th_fit: dg.ThermalFit,
    k_settled: float | None,
    rise_amb: float,
    rows: EstimateRows,
    state: DeviceState,
    cfg: AnalysisSettings,
    held: str | None,
    served_only: bool = False,
) -> None:
    # With ``served_only`` (faces read from the module's voltage) only windows whose UA was
    # served as reliable are followed: there UA moves with the R25 the cold face was read
    # with (simulated proportional units: UA +40 % with R25 +3.5 %, both stated reliable).
    #
    # While the hot side's resistance is flagged (a failed fan, a clogged sink) the module runs
    # at a hot face and often without pause, a regime the cabinet balance was not judged in:
    # UA's changes are not followed then, so that one fault raises one flag (common practice,
    # no source). They resume from the same baseline once the flag clears.
    #
    # K·ΔT, the module's own leak, is a large term in both the cabinet's and the hot sink's
    # balance (where the module never rests, often larger than the cabinet's leak), so their
    # changes are judged at one K, the unit's trend K (see tracks.follow_k_trend). UA is
    # moved there to first order; the hourly hot-side resistance uses it. Windows whose K is
    # their own and not yet settled are not followed.
    sd = th_fit.stderrs
    hot_flagged = int((state.above or {}).get("rhot", 0)) >= 1
    k_source = "own" if k_settled is not None else "data" if th_fit.k_from_data else "prior"
    if k_source == "data":
        return
    k_trend = follow_k_trend(state, th_fit.k_cabinet, k_source, cfg)
    followable = sd["ua"] <= cfg.ua_follow_rel_se * th_fit.ua and not hot_flagged
    served_ok = _ua_served_reliable(th_fit, cfg)
    if (
        followable
        and (served_ok or not served_only)
        and ambient_lead_usual(state, b, rise_amb, cfg)
    ):
        if k_source == "prior":
            raw = state.ua_raw = state.ua_raw if state.ua_raw is not None else []
            raw.append(
                [b, th_fit.ua, th_fit.ua_per_k, th_fit.k_cabinet, sd["ua"], float(served_ok)]
            )
            del raw[: -cfg.ua_raw_keep]
        ua_trend = th_fit.ua + th_fit.ua_per_k * (k_trend - th_fit.k_cabinet)
        track_ua(rows, state, b, ua_trend, sd["ua"], cfg, served_ok, held)


def _performance(
    win: _Window,
    ele: _Electrical,
    th_fit: dg.ThermalFit,
    cov3: FloatArray,
    rows: EstimateRows,
    cfg: AnalysisSettings,
) -> None:
    # COP and cooling at the window's latest steady on operating point.
    b, fl, t, i, tc, th, el = win.b, win.fl, win.t, win.i, win.tc, win.th, ele.el
    steady_on = fl.steady & fl.on & win.usable  # usable: faces known
    pick = steady_on & (t >= t[-1] - 3600.0)
    if not pick.any():
        pick = steady_on
    if not pick.any():
        pick = ele.on
    if pick.any():
        try:
            perf = dg.performance_now(
                float(np.mean(i[pick])), float(np.mean(tc[pick])), float(np.mean(th[pick])),
                el.s25, el.r25, th_fit.k, cov3, int(pick.sum()), alpha=cfg.alpha, beta=cfg.beta,
            )  # fmt: skip
        except PhysicsError:
            return
        for name in (
            "cooling_w", "input_power_w", "cop", "cop_max", "current_for_best_cop_a", "carnot_cop"
        ):  # fmt: skip
            rows.est(f"performance.{name}", b, getattr(perf, name))
