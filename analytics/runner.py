"""Run the diagnostics over stored readings and store the estimates.

Event time only: the readings' own timestamps cut the history into fixed, epoch-aligned steps,
so a backfilled month gives exactly the estimates it would have given live. A step [a, b) is
analysed once a reading at or after b is stored; readings arriving later for an analysed step
are not revisited. Per device, the table ``analysis_state`` holds the end of the last analysed
step and what the next step needs (fitted parameters, baselines, CUSUM sums, trend series), so
each run reads only the readings since then (plus one fit window of look-back).

Cadence (defaults of :class:`AnalysisSettings`):

* every hour (``step_s``): the short-window hot-side resistance and its change statistics;
* every 6 hours (``window_s``): the module and performance fits over the last 6 hours, the
  cabinet and sink fits over the last 24 hours (``thermal_window_s``), with R25 and UA change
  statistics;
* every day (``daily_s``): Theil-Sen slopes, days to the wear limit, and setpoint capacity.

Estimate keys (``estimates.key``; value, stderr, n, reliable, note; at_ms = step end):

=============================================  ============================================
module.resistance_ohm                          R at the window's mean module temperature [ohm]
module.resistance_25c_ohm                      R referred to 25 °C mean module temperature [ohm]
module.seebeck_v_per_k                         S at the window's mean module temperature [V/K]
module.seebeck_25c_v_per_k                     S referred to 25 °C [V/K]
module.seebeck_step_v_per_k                    S from switch-off steps (Harman), floating drivers
module.conductance_w_per_k                     K [W/K]; unreliable when it leans on its prior
                                               or the module never rested (min_rest_share),
                                               or held there because the sinks store heat
                                               faster than the samples follow a short cycle;
                                               stderr includes ±probe_offset_k probe offsets
module.z_per_k / module.zt                     Z = S²/(R·K) [1/K], ZT at the mean temperature
module.off_leak_w                              K·ΔT while off: heat the idle module lets in [W]
cabinet.ua_w_per_k                             UA [W/K]; stderr includes probe offsets (they
                                               cancel in its change, which is tracked); not
                                               reliable when that stderr exceeds ua_max_rel_se
                                               or the module never rested
cabinet.heat_leak_w                            UA·(Ta - Tcab) over the window's last hour [W]
cabinet.heat_capacity_j_per_k                  effective heat capacity [J/K]
cabinet.internal_load_w                        heat released inside (fans, electronics) [W]
cold_side.resistance_k_per_w                   (Tcab - Tc)/Qc [K/W]; not reliable when the
                                               module never rested or the sinks store heat
                                               faster than the samples follow
hot_side.resistance_k_per_w                    (Th - Ta)/Qh over the last hour [K/W] (hourly);
                                               where the sinks store heat faster than the
                                               samples follow: not reliable, none for hours
                                               whose cycle is locked to the sampling
hot_side.resistance_fit_k_per_w                the same from the 24-hour sink fit (6-hourly) [K/W]
performance.cooling_w / input_power_w / cop    at the window's latest steady on operating point
performance.cop_max / current_for_best_cop_a   best COP at those temperatures and its current
performance.carnot_cop                         Tc/(Th - Tc)
capacity.holdable / margin_w / max_cooling_w   setpoint capacity at the design ambient (daily)
capacity.heat_load_w                           heat load at setpoint and design ambient [W]
<q>.baseline                                   commissioning baseline (median of first days)
<q>.change_pct                                 recent value against baseline [%]
<q>.cusum                                      Page's upper CUSUM on standardised values [σ]
<q>.flag                                       1 when change_pct reaches its threshold, else 0
<q>.slope_pct_per_30d (+ _low / _high)         Theil-Sen slope of daily medians, 95 % CI (daily)
module.days_to_wear_limit                      days until R25 reaches the wear limit (daily)
quality.samples / quality.left_out_*           samples used and left out, by reason
quality.switch_offs / quality.driver_floating  on/off cycles seen; open-circuit voltage seen
=============================================  ============================================

``<q>`` is ``module.resistance_25c`` (6-hourly), ``cabinet.ua`` (6-hourly) or
``hot_side.resistance`` (hourly). Change keys appear once the baseline period has passed.
UA's baseline leaves out the first day (pull-down), goes on taking in values through the
first two weeks unless the change reaches the flag threshold first, and its flag needs the
change to hold over two consecutive 6-hourly evaluations, the newest window's own UA with
it. After those two weeks UA is followed only where the ambient leads the cabinet by at least
0.6 of its usual lead then (in cold spells a leak is flagged once the ambient is back).
UA's and the hot side's changes are judged at one K per unit (the trend K), R25's at one
S per unit (the trend S: R25 is followed also where the readings cannot separate R from S
and it is served as unreliable).

Cautions: these estimates support maintenance; they do not replace temperature monitoring of
medicines or samples. For storage of medicines follow the maker's instructions and local
codes and licensed practice; condensation near electronics needs an electrician's judgement.
"""

from __future__ import annotations

import bisect
import functools
import itertools
import json
import math
import multiprocessing
import os
import statistics
import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime
from typing import Any

import numpy as np
import orjson
import sqlalchemy as sa
from scipy import ndimage
from sqlalchemy.engine import Connection, Engine

from tecfleet.ingest import db

from . import diagnostics as dg
from . import physics, trends
from ._validate import T_25C_K, FloatArray
from .errors import PhysicsError

__all__ = [
    "AnalysisReport",
    "AnalysisSettings",
    "analyze",
    "estimate_history",
    "latest_health",
]

T0 = 273.15
MS_DAY = 86_400_000


@dataclass(frozen=True)
class AnalysisSettings:
    """Cadence, thresholds and priors of the diagnostics (times in seconds)."""

    step_s: int = 3600
    window_s: int = 6 * 3600
    #: Readings behind the thermal fit (K, sinks, cabinet), ending with each window: a day
    #: averages over use and ambient cycles, which the cabinet balance needs.
    thermal_window_s: int = 24 * 3600
    daily_s: int = 86_400
    margin_s: int = 1800  # look-back for door settling and spike filtering
    on_current: float = 0.05  # [A]
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO  # [1/K]
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO  # [1/K]
    baseline_days: float = 3.0
    #: Fewest reliable values a baseline is made of; with fewer in ``baseline_days`` it waits
    #: for more (a baseline of two or three fits would set every later change on chance;
    #: common practice, no source).
    baseline_min_n: int = 6
    trend_days: float = 30.0
    #: +10 % on R25 as end of useful life (common practice, no source).
    wear_limit_pct: float = 10.0
    r25_flag_pct: float = 4.0
    #: Largest relative standard error of R25 at the unit's trend S, from the readings'
    #: scatter alone, for a window to be followed [-].
    r25_max_rel_se: float = 0.01
    #: Relative standard deviation of the registered ratings (R, S) as priors, and of the
    #: rated S taken as the trend S till the unit has its own [-] (the spread between units
    #: of a type; common practice, no source).
    rating_rel_sd: float = 0.15
    #: Largest shift of R25 [%] that the trend S's uncertainty may cause through a change of
    #: the operating point (ΔT per ampere) since the baseline, for a window to be followed:
    #: a quarter of ``r25_flag_pct``.
    r25_lever_shift_pct: float = 1.0
    ua_flag_pct: float = 35.0
    #: UA baseline starts this long after the first UA fit: the first day of a unit's
    #: history holds its pull-down, which the cabinet balance over a day does not describe.
    ua_baseline_skip_days: float = 1.0
    #: Consecutive 6-hourly evaluations at or above ``ua_flag_pct`` before the UA flag is
    #: raised: one day's fit can swing that far with weather and use, a leak stays. Each
    #: needs the newest window's own UA there too (to within one of its standard errors),
    #: not only the day's median: warm goods put in give off their heat for many hours, so a
    #: busy day inflates every window that holds it, and with the day's other windows
    #: unreliable the median can be made of those alone (against simulated fleets with
    #: known truth, healthy units flagged over 90-day seasons: 1 of 72, not 3). Without the
    #: standard error a leak whose windows scatter about the threshold waited 62 h for two
    #: in a row past it.
    ua_flag_persist: int = 2
    #: Largest standard error of a window's UA from its own scatter, relative to its value,
    #: for UA's change to be followed [-]. The fit calls UA reliable below 15 %; on a unit
    #: with a small UA that passes mostly the windows that happen to read high, and a
    #: baseline made of them hid a 1.5x leak on a simulated fleet with known truth (seed 17
    #: of the detection bench; every fault of seeds 4-14 and 18-22 still flagged in time, no
    #: more season flags).
    ua_follow_rel_se: float = 0.25
    #: Smallest lead of the ambient over the cabinet (Ta - Tcab, the window's mean), as a
    #: share of its median over the commissioning weeks, for UA's change to be followed once
    #: those weeks are over [-]. A heat flow the balance gets wrong by a constant (the
    #: internal load held at the unit's settled value, a sink's transients) moves UA by that
    #: flow over Ta - Tcab, and warm goods weigh more beside the little heat the walls let
    #: in: on simulated fleets with known truth, UA's change drifted 10 % on a unit in a cold
    #: spell at half its usual lead and 30-50 % on one whose sinks store heat at a third of
    #: it, and with warm goods put in they raised leak flags on healthy units. A leak lets in
    #: little heat then; one that begins in a cold spell is flagged once the ambient is back.
    ua_follow_min_lead_share: float = 0.6
    #: UA (R25) fits kept while the unit's trend K (S) is the rated one, to follow them again
    #: at the unit's own once it shows it (a hundred days of 6-hourly fits) [-].
    ua_raw_keep: int = 400
    #: UA's baseline goes on taking in the unit's values for this long after its start (the
    #: commissioning weeks; common practice, no source), unless its change reaches
    #: ``ua_flag_pct`` first: a few days' values share their weather and use, and one
    #: day's fit scatters by 10-15 %, so three days' median can sit 20 % from the unit's
    #: usual value. Till then changes are judged against the baseline so far.
    ua_baseline_grow_days: float = 14.0
    r_hot_flag_pct: float = 50.0
    #: Least mean heat rejected over an hour for its hot-side resistance [W]. A cold night
    #: keeps a proportionally driven unit at a few watts, and a fan failing then raises the
    #: sink's rise just as much: below this the probe offsets, not the heat, set the error,
    #: and the estimate's own standard error says whether it is reliable (common practice,
    #: no source).
    r_hot_min_heat_w: float = 5.0
    cusum_allowance: float = 0.5  # [σ], Page (1954), Montgomery (from memory)
    #: Upper ambient of climate classes SN and N, 32 °C (ISO 15502 / IEC 62552; from memory).
    design_ambient_c: float = 32.0
    default_setpoint_c: float = 5.0
    #: Uncertainty of the difference of two uncalibrated probes [K] (common practice, no source).
    probe_offset_k: float = 0.3
    #: Largest standard error of UA, probe offsets included, relative to UA, for the value to be
    #: served as reliable: beyond a quarter, two standard errors span more than half the value
    #: (common practice, no source). Its changes are judged on the fit's own precision.
    ua_max_rel_se: float = 0.25
    #: Smallest share of the thermal window with the module at rest for the served K, UA and
    #: cold-side resistance to be reliable, and below which the thermal fit treats the window
    #: as one operating point (see ``_fit_window``; common practice, no source).
    min_rest_share: float = 0.05
    #: The unit's settled K: the median of its last ``k_hold_keep`` K values fitted from data,
    #: once there are ``k_hold_min_n``. K is held there at a single operating point (else at
    #: the rated prior), and the cabinet balance uses it in every window.
    k_hold_min_n: int = 4
    k_hold_keep: int = 28
    #: Windows whose S the readings pinned before the heat balances use the unit's settled S
    #: (two days of them): a module that seldom shows its S (proportional drive) keeps the
    #: S of each window rather than one settled on the few odd windows that did.
    s_settle_min_n: int = 8
    #: Smallest standard error of the unit's settled internal load [W] (common practice, no
    #: source): what a fan's or a controller's draw may wander by.
    q_settled_min_sd: float = 0.1
    #: Rated hot-side temperature assumed when a registration omits it, 27 °C (common
    #: practice for module datasheets, no source).
    default_t_hot_rated_c: float = 27.0
    #: Worker processes for a run with much to catch up on (each opens its own engine from
    #: the URL); None: min(2, CPU count). 1 analyses in this process.
    workers: int | None = None
    #: Fewest pending steps, summed over devices, worth starting worker processes for: a
    #: live run (a step or two per device) stays in this process.
    parallel_min_steps: int = 2000


def _dg_options(cfg: AnalysisSettings) -> dg.DiagnosticsOptions:
    # The diagnostics' options with the settings this runner exposes.
    return dg.DiagnosticsOptions(
        on_current=cfg.on_current,
        probe_offset_k=cfg.probe_offset_k,
        min_rest_share=cfg.min_rest_share,
    )


@dataclass
class AnalysisReport:
    """What a run of :func:`analyze` did."""

    devices: int = 0
    steps: int = 0
    estimates: int = 0
    skipped: dict[str, str] = field(default_factory=dict)
    seconds: float = 0.0


# ---------------------------------------------------------------------------
# Public API
# ---------------------------------------------------------------------------


def analyze(
    engine: Engine, *, device_id: str | None = None, settings: AnalysisSettings | None = None
) -> AnalysisReport:
    """Bring every estimate of one device (or of all) up to its newest stored reading."""
    cfg = settings or AnalysisSettings()
    started = time.perf_counter()
    report = AnalysisReport()
    dev_q = sa.select(
        db.devices.c.device_id,
        db.devices.c.module,
        db.devices.c.cabinet,
        db.devices.c.last_reading_ms,
    ).where(db.devices.c.last_reading_ms.is_not(None))
    if device_id is not None:
        dev_q = dev_q.where(db.devices.c.device_id == device_id)
    with engine.connect() as conn:
        devs = conn.execute(dev_q.order_by(db.devices.c.device_id)).all()
        st = db.analysis_state
        done = {
            r.device_id: int(r.done_ms)
            for r in conn.execute(sa.select(st.c.device_id, st.c.done_ms))
        }
    devices = [_Device(d.device_id, d.module, d.cabinet, int(d.last_reading_ms)) for d in devs]
    pending = {
        dev.device_id: _pending_steps(engine, dev, done.get(dev.device_id), cfg) for dev in devices
    }
    # Only the states of devices with a complete step to analyse are read: the service runs
    # far more often than a step completes.
    due = [dev.device_id for dev in devices if dev.device_id in done and pending[dev.device_id]]
    states: dict[str, dict[str, Any]] = {}
    with engine.connect() as conn:
        for k in range(0, len(due), _STATES_PER_QUERY):
            q = sa.select(st.c.device_id, sa.cast(st.c.state, sa.Text).label("state")).where(
                st.c.device_id.in_(due[k : k + _STATES_PER_QUERY])
            )
            states.update((r.device_id, _state_from(r.state)) for r in conn.execute(q))
    jobs = [
        (
            dev,
            (done[dev.device_id], states.get(dev.device_id, {})) if dev.device_id in done else None,
        )
        for dev in devices
    ]
    workers = _workers_for(engine, list(pending.values()), cfg)
    if workers > 1:
        # Largest first, so the processes finish together.
        jobs.sort(key=lambda j: -pending[j[0].device_id])
        url = engine.url.render_as_string(hide_password=False)
        ctx = multiprocessing.get_context("spawn")  # no inherited threads or connections
        with ProcessPoolExecutor(max_workers=workers, mp_context=ctx) as pool:
            futures = [pool.submit(_device_job, url, dev, saved, cfg) for dev, saved in jobs]
            results = [f.result() for f in futures]
    else:
        results = []
        # One transaction for the run: a live run is an hour per device, and a commit each
        # (a disk flush under synchronous=FULL) would cost more than the analysis.
        with engine.begin() as conn:
            for dev, saved in jobs:
                results.append((dev.device_id, *_analyze_device(conn, dev, saved, cfg)))
    for dev_id, n_steps, n_est in sorted(results):
        report.devices += 1
        report.steps += n_steps
        report.estimates += n_est
        if n_steps == 0:
            report.skipped[dev_id] = "no complete step since the last run"
    report.seconds = time.perf_counter() - started
    return report


@dataclass(frozen=True)
class _Device:
    device_id: str
    module: Any
    cabinet: Any
    last_reading_ms: int


def _first_reading_ms(conn: Connection, device_id: str) -> int | None:
    first = conn.execute(
        sa.select(sa.func.min(db.readings.c.ts_ms)).where(db.readings.c.device_id == device_id)
    ).scalar()
    return None if first is None else int(first)


def _pending_steps(engine: Engine, dev: _Device, done_ms: int | None, cfg: AnalysisSettings) -> int:
    step = cfg.step_s * 1000
    if done_ms is not None:
        done = done_ms
    else:
        with engine.connect() as conn:
            first = _first_reading_ms(conn, dev.device_id)
        if first is None:
            return 0
        done = first // step * step
    return max(dev.last_reading_ms // step * step - done, 0) // step


def _workers_for(engine: Engine, pending: list[int], cfg: AnalysisSettings) -> int:
    """Worker processes for this run: 1 unless several devices have much to catch up on."""
    workers = cfg.workers if cfg.workers is not None else min(2, os.cpu_count() or 1)
    database = engine.url.database or ""
    if workers <= 1 or sum(p > 0 for p in pending) < 2 or sum(pending) < cfg.parallel_min_steps:
        return 1
    if engine.url.get_backend_name() == "sqlite" and database in ("", ":memory:"):
        return 1  # a private in-memory database cannot be opened by another process
    return min(workers, len(pending))


#: Device states read per query (well under the bound parameters SQLite allows).
_STATES_PER_QUERY = 500

#: Engines of a worker process, by URL (one per process, opened on its first job).
_WORKER_ENGINES: dict[str, Engine] = {}


def _device_job(
    url: str, dev: _Device, saved: tuple[int, dict[str, Any]] | None, cfg: AnalysisSettings
) -> tuple[str, int, int]:
    engine = _WORKER_ENGINES.get(url)
    if engine is None:
        engine = _WORKER_ENGINES[url] = db.make_engine(url)
    with engine.begin() as conn:
        return (dev.device_id, *_analyze_device(conn, dev, saved, cfg))


def latest_health(engine: Engine, device_id: str) -> dict[str, dict[str, Any]]:
    """Newest estimate of every key of a device, in the contract's shape plus extras.

    Each value is ``{"value", "stderr", "n", "reliable", "at", "note"}``; keys whose newest
    rows hold no value (the data could not support one) fall back to their newest valued row.
    """
    e = db.estimates
    newest = (
        sa.select(e.c.key, sa.func.max(e.c.at_ms).label("at_ms"))
        .where(e.c.device_id == device_id, e.c.value.is_not(None))
        .group_by(e.c.key)
        .subquery()
    )
    q = (
        sa.select(e.c.key, e.c.at_ms, e.c.value, e.c.stderr, e.c.n, e.c.reliable, e.c.note)
        .join(
            newest,
            sa.and_(e.c.key == newest.c.key, e.c.at_ms == newest.c.at_ms),
        )
        .where(e.c.device_id == device_id)
    )
    with engine.connect() as conn:
        rows = conn.execute(q).all()
    return {r.key: _row_dict(r) for r in sorted(rows, key=lambda r: str(r.key))}


def estimate_history(
    engine: Engine,
    device_id: str,
    key: str,
    start_ms: int | None = None,
    end_ms: int | None = None,
) -> list[dict[str, Any]]:
    """Stored estimates of one key, oldest first (``start_ms`` inclusive, ``end_ms`` exclusive)."""
    e = db.estimates
    q = sa.select(e.c.key, e.c.at_ms, e.c.value, e.c.stderr, e.c.n, e.c.reliable, e.c.note).where(
        e.c.device_id == device_id, e.c.key == key
    )
    if start_ms is not None:
        q = q.where(e.c.at_ms >= start_ms)
    if end_ms is not None:
        q = q.where(e.c.at_ms < end_ms)
    with engine.connect() as conn:
        rows = conn.execute(q.order_by(e.c.at_ms)).all()
    return [_row_dict(r) | {"at_ms": int(r.at_ms)} for r in rows]


def _row_dict(r: Any) -> dict[str, Any]:
    return {
        "value": r.value,
        "stderr": r.stderr,
        "n": int(r.n),
        "reliable": bool(r.reliable),
        "at": _rfc3339(int(r.at_ms)),
        "note": r.note,
    }


def _rfc3339(ms: int) -> str:
    return datetime.fromtimestamp(ms / 1000.0, tz=UTC).isoformat(timespec="milliseconds")[:-6] + "Z"


# ---------------------------------------------------------------------------
# Per device
# ---------------------------------------------------------------------------


@dataclass
class _Data:
    ts: np.ndarray[Any, np.dtype[np.int64]]
    t: FloatArray
    tcab: FloatArray
    tc: FloatArray
    th: FloatArray
    ta: FloatArray
    i: FloatArray
    v: FloatArray
    door: np.ndarray[Any, np.dtype[np.bool_]]
    flags: dg.SampleFlags | None = None

    def slice(self, start_ms: int, end_ms: int) -> slice:
        a = int(np.searchsorted(self.ts, start_ms, side="left"))
        b = int(np.searchsorted(self.ts, end_ms, side="left"))
        return slice(a, b)


#: Reading columns the fits use, in the order of ``_Data``'s arrays.
_COLUMNS = ("ts_ms", "t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "door_open")


def _load(conn: Connection, device_id: str, start_ms: int, end_ms: int) -> _Data:
    arr = db.read_arrays(conn, device_id, _COLUMNS, start_ms, end_ms)
    ts = arr[:, 0].astype(np.int64)
    return _Data(
        ts=ts,
        t=(ts - start_ms) / 1000.0,
        tcab=arr[:, 1] + T0,
        tc=arr[:, 2] + T0,
        th=arr[:, 3] + T0,
        ta=arr[:, 4] + T0,
        i=arr[:, 5],
        v=arr[:, 6],
        door=arr[:, 7] > 0.5,
    )


def _priors(module: Any, cfg: AnalysisSettings) -> physics.ModuleParameters | None:
    if not isinstance(module, dict):
        return None
    try:
        module_json = orjson.dumps(module, option=orjson.OPT_SORT_KEYS).decode()
    except TypeError:  # orjson.JSONEncodeError
        return None
    return _priors_from(module_json, cfg.default_t_hot_rated_c)


@functools.lru_cache(maxsize=4096)
def _priors_from(module_json: str, default_t_hot_rated_c: float) -> physics.ModuleParameters | None:
    # Ratings to parameters is a least-squares solve: once per distinct registration.
    module = json.loads(module_json)
    try:
        params = physics.parameters_from_ratings(
            float(module["i_max_a"]),
            float(module["v_max_v"]),
            float(module["dt_max_k"]),
            float(module.get("t_hot_rated_c") or default_t_hot_rated_c) + T0,
            q_max=None if module.get("q_max_w") is None else float(module["q_max_w"]),
            n_couples=None if module.get("couples") is None else int(module["couples"]),
        )
        count = int(module.get("count") or 1)
        # Several modules in one unit are wired in series (common practice, no source).
        return physics.modules_in_series(params, count) if count > 1 else params
    except (KeyError, TypeError, ValueError, PhysicsError):
        return None


class _Rows:
    """Estimate rows collected for one device, written in one statement."""

    def __init__(self, device_id: str) -> None:
        self.device_id = device_id
        #: In the order of ``_ESTIMATE_COLUMNS``.
        self.rows: list[tuple[Any, ...]] = []

    def add(
        self,
        key: str,
        at_ms: int,
        value: float | None,
        stderr: float | None,
        n: int,
        reliable: bool = True,
        note: str | None = None,
    ) -> None:
        if value is not None and not math.isfinite(value):
            return
        if stderr is not None and not math.isfinite(stderr):
            stderr = None
        self.rows.append((self.device_id, key, at_ms, value, stderr, int(n), bool(reliable), note))

    def est(self, key: str, at_ms: int, e: dg.Estimate) -> None:
        self.add(key, at_ms, e.value, e.stderr, e.n, e.reliable, e.note)


def _analyze_device(
    conn: Connection, dev: _Device, saved: tuple[int, dict[str, Any]] | None, cfg: AnalysisSettings
) -> tuple[int, int]:
    step = cfg.step_s * 1000
    window = cfg.window_s * 1000
    last = int(dev.last_reading_ms)
    if saved is None:
        first = _first_reading_ms(conn, dev.device_id)
        if first is None:
            return 0, 0
        done = first // step * step
        state: dict[str, Any] = {}
    else:
        done, state = saved
    end = last // step * step
    if end <= done:
        return 0, 0
    # The day behind a window fit is needed only when a fit is due in this run; hourly steps
    # alone need their own hour (flags look back at most margin_s, so they come out the same).
    fit_due = any(b % window == 0 for b in range(done + step, end + 1, step))
    lookback = (max(window, cfg.thermal_window_s * 1000) if fit_due else step) + (
        cfg.margin_s * 1000
    )
    data = _load(conn, dev.device_id, done - lookback, end)
    # Flags once for everything loaded. They depend on at most door_settle_s/settle_s of
    # look-back (within margin_s) and never on a reading after the end of its own step, so
    # they come out the same however the history is split into runs.
    stp = data.ts // step
    breaks = np.append(stp[1:] != stp[:-1], True) if data.ts.size else np.zeros(0, dtype=bool)
    data.flags = dg.flag_samples(
        data.t, data.tcab, data.tc, data.th, data.ta, data.i, data.v, data.door,
        breaks=breaks, options=_dg_options(cfg),
    )  # fmt: skip
    rows = _Rows(dev.device_id)
    prior = _priors(dev.module, cfg)
    cabinet = dev.cabinet if isinstance(dev.cabinet, dict) else {}
    setpoint_c = float(cabinet.get("setpoint_c") or cfg.default_setpoint_c)
    steps = 0
    hot: dict[int, dg.Estimate | None] = {}
    for b in range(done + step, end + 1, step):
        steps += 1
        if b % window == 0:
            _fit_window(data, b, rows, state, prior, cfg)
            hot = {}
        if b % (cfg.daily_s * 1000) == 0:
            _daily(b, rows, state, prior, setpoint_c, cfg)
        if b not in hot:
            # The fitted parameters hold until the next window: every hour up to it at once.
            hot = _hot_side(data, b, min(b // window * window + window - step, end), state, cfg)
        _hourly(b, hot.get(b), rows, state, cfg)
    _write(conn, dev.device_id, rows.rows, end, state)
    return steps, len(rows.rows)


_ESTIMATE_COLUMNS = ("device_id", "key", "at_ms", "value", "stderr", "n", "reliable", "note")


def _write(
    conn: Connection, device_id: str, rows: list[tuple[Any, ...]], done: int, state: dict[str, Any]
) -> None:
    if rows:
        # The driver's own executemany: SQLAlchemy's per-row parameter handling costs more
        # than the statement itself for thousands of rows.
        mark = db.marker(conn)
        sql = (
            f"INSERT INTO estimates ({', '.join(_ESTIMATE_COLUMNS)}) "
            f"VALUES ({', '.join([mark] * len(_ESTIMATE_COLUMNS))}) "
            "ON CONFLICT (device_id, key, at_ms) DO NOTHING"
        )
        cursor = conn.connection.cursor()
        try:
            cursor.executemany(sql, rows)
        finally:
            cursor.close()
    # The driver's own cursor and orjson: through SQLAlchemy's JSON type, the state's
    # statement and encoding cost more than an hour's analysis of the device.
    mark = db.marker(conn)
    as_json = f"CAST({mark} AS JSON)" if conn.dialect.name == "postgresql" else mark
    sql = (
        "INSERT INTO analysis_state (device_id, done_ms, state, updated_ms) "
        f"VALUES ({mark}, {mark}, {as_json}, {mark}) ON CONFLICT (device_id) DO UPDATE SET "
        "done_ms = excluded.done_ms, state = excluded.state, updated_ms = excluded.updated_ms"
    )
    cursor = conn.connection.cursor()
    try:
        cursor.execute(sql, (device_id, done, _state_text(state), db.now_ms()))
    finally:
        cursor.close()


def _state_text(state: dict[str, Any]) -> str:
    # orjson writes NaN as null where the standard library writes NaN: a state holding either
    # goes through the standard library, so that loading it gives back what was stored.
    out = orjson.dumps(state, option=orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS)
    return json.dumps(state) if b"null" in out else out.decode()


def _state_from(text: str) -> dict[str, Any]:
    try:
        state = orjson.loads(text)
    except orjson.JSONDecodeError:
        state = json.loads(text)  # NaN, as the standard library writes it
    if not isinstance(state, dict):
        raise TypeError(f"analysis state is {type(state).__name__}, not an object")
    return state


def _flags(data: _Data, sl: slice) -> dg.SampleFlags:
    assert data.flags is not None
    return data.flags.part(sl)


def _k_settled(state: dict[str, Any], cfg: AnalysisSettings) -> float | None:
    # The median of the unit's own K from earlier windows with two operating points, once
    # there are enough of them. Held there at a single operating point and used in every
    # cabinet balance, K's error stays the same whichever kind of window UA comes from, and
    # how hard the cabinet makes the module work (a leak keeps it running) does not move it.
    hist = state.get("k_hist", [])
    return float(np.median(hist)) if len(hist) >= cfg.k_hold_min_n else None


def _taus_settled(
    state: dict[str, Any], cfg: AnalysisSettings
) -> tuple[float, float, float, float] | None:
    # The unit's sink time constants pooled over its earlier windows with two operating
    # points, each sink's weighted by the inverse of its variance (sinks do not change; one
    # window's estimate scatters, and where the module seldom switches it is hardly
    # determined), with the pooled standard errors.
    hist = np.array(state.get("tau_hist", []), dtype=np.float64).reshape(-1, 4)
    if hist.shape[0] < cfg.k_hold_min_n:
        return None
    out: list[float] = []
    for j in (0, 2):
        w = 1.0 / np.maximum(hist[:, j + 1], 1e-9) ** 2
        out += [float(np.sum(w * hist[:, j]) / np.sum(w)), float(1.0 / math.sqrt(np.sum(w)))]
    return out[0], out[1], out[2], out[3]


def _remember(state: dict[str, Any], key: str, value: Any, cfg: AnalysisSettings) -> None:
    # Append to one of the unit's histories (K, S, internal load), keeping the newest
    # ``k_hold_keep`` values that its settled value is the median of.
    hist = state.setdefault(key, [])
    hist.append(value)
    del hist[: -cfg.k_hold_keep]


def _s_settled(state: dict[str, Any], cfg: AnalysisSettings) -> tuple[float, float] | None:
    # The median of the unit's own S (fitted allowing for a constant ΔT offset) from earlier
    # windows where the readings pinned it, and its standard error. S does not wear; one
    # window's S scatters by one or two per cent, which S·I·Tc carries into the cabinet
    # balance, and the S that pairs with ΔT as read shifts with the operating point. Half the
    # windows' median error: some of it is shared between windows (common practice, no source).
    hist = state.get("s_hist", [])
    if len(hist) < cfg.s_settle_min_n:
        return None
    values = np.array(hist, dtype=np.float64)
    return float(np.median(values[:, 0])), 0.5 * float(np.median(values[:, 1]))


def _q_settled(state: dict[str, Any], cfg: AnalysisSettings) -> tuple[float, float] | None:
    # The median of the unit's own internal load from earlier well-determined cabinet fits,
    # and its standard error: the windows' robust scatter over the root of the number of
    # days behind it (thermal windows overlap, four to a day).
    hist = state.get("q_hist", [])
    if len(hist) < cfg.k_hold_min_n:
        return None
    bl = trends.baseline(np.asarray(hist, dtype=np.float64))  # median and scaled MAD
    days = len(hist) * cfg.window_s / cfg.thermal_window_s
    return bl.center, max(bl.spread / math.sqrt(max(days, 1.0)), cfg.q_settled_min_sd)


def _track_r25(
    rows: _Rows,
    state: dict[str, Any],
    b: int,
    el: dg.ElectricalFit,
    prior: physics.ModuleParameters | None,
    cfg: AnalysisSettings,
) -> None:
    # R25's changes are judged at one S, the unit's trend S, kept from the first window whose S is
    # the unit's own (its settled S, or failing that this window's S where the readings separate it
    # from R); till then the rated S, and once the unit shows its own the track is made again at it
    # from the windows followed so far. S does not wear, while a window's own S scatters, and where
    # the drive never rests the readings cannot separate R from S and R is fitted with S held. An
    # error δS of the trend S moves R25 by -lever·δS, lever = ΣI·ΔT/ΣI² (with the temperature
    # factors): the same in every window at the same operating point, so it cancels in R25's
    # changes. A window is followed when its R25 at the trend S is pinned by its readings, and once
    # there is a baseline, when its lever is near enough the baseline's that S's uncertainty cannot
    # move R25 by more than ``r25_lever_shift_pct`` (a hot spell changes ΔT per ampere).
    settled = _s_settled(state, cfg)
    if settled is not None:
        source, s_ref, s_sd = "own", settled[0], settled[1]
    elif el.reliable:
        source, s_ref, s_sd = "own", el.s25, math.sqrt(max(float(el.cov[1, 1]), 0.0))
    elif prior is not None:
        source, s_ref, s_sd = "prior", prior.seebeck, cfg.rating_rel_sd * prior.seebeck
    else:
        return
    if state.get("s_trend_source") == "prior" and source == "own":
        # Made again from the windows followed so far, at the unit's own S (a fresh start
        # would take wear of these days into a new baseline).
        _restart_track(state, "r25")
        state.pop("r25_levers", None)
        state["s_trend"], state["s_trend_source"] = [s_ref, s_sd], source
        scratch = _Rows("")
        for at, r0, lever, sd, ok in state.pop("r25_raw", []):
            _follow_r25(scratch, state, int(at), r0, lever, sd, bool(ok), cfg)
    if "s_trend" not in state:
        state["s_trend"], state["s_trend_source"] = [s_ref, s_sd], source
    if state["s_trend_source"] == "prior":
        kept = state.setdefault("r25_raw", [])
        kept.append([b, el.r_at_zero_s, el.r_lever, el.r_sd_fixed_s, el.current_ok])
        del kept[: -cfg.ua_raw_keep]
    _follow_r25(rows, state, b, el.r_at_zero_s, el.r_lever, el.r_sd_fixed_s, el.current_ok, cfg)


def _follow_r25(
    rows: _Rows,
    state: dict[str, Any],
    b: int,
    r_at_zero_s: float,
    r_lever: float,
    r_sd_fixed_s: float,
    current_ok: bool,
    cfg: AnalysisSettings,
) -> None:
    # One window's R25 at the trend S into R25's track, when the window passes the checks
    # described in _track_r25.
    s_trend, s_sd = (float(x) for x in state["s_trend"])
    r = r_at_zero_s - r_lever * s_trend
    if not (current_ok and r > 0.0 and r_sd_fixed_s <= cfg.r25_max_rel_se * r):
        return
    levers = state.setdefault("r25_levers", [])
    if "r25" in state.get("baseline", {}):
        if abs(r_lever - float(np.median(levers))) * s_sd > 0.01 * cfg.r25_lever_shift_pct * r:
            return
    else:
        levers.append(r_lever)
    _track(rows, state, "r25", "module.resistance_25c", b, r, cfg.r25_flag_pct, 0.003, cfg)


def _fit_window(
    data: _Data,
    b: int,
    rows: _Rows,
    state: dict[str, Any],
    prior: physics.ModuleParameters | None,
    cfg: AnalysisSettings,
) -> None:
    window = cfg.window_s * 1000
    thermal_window = max(cfg.thermal_window_s * 1000, window)
    w = data.slice(b - window, b)
    wt = data.slice(b - thermal_window, b)
    fl = _flags(data, w)
    usable_th = _flags(data, wt).usable
    n = w.stop - w.start
    if n < 10:
        return
    t, tcab, tc, th, ta = data.t[w], data.tcab[w], data.tc[w], data.th[w], data.ta[w]
    i, v = data.i[w], data.v[w]
    dt = th - tc
    tm = 0.5 * (tc + th)
    usable = fl.usable
    off = usable & ~fl.on
    floating = dg.detect_floating_driver(v[off], dt[off])
    switch_offs = int(np.sum(fl.on[:-1] & ~fl.on[1:]))
    excluded = int(n - usable.sum())
    rows.add("quality.samples", b, float(usable.sum()), None, n)
    rows.add("quality.left_out", b, float(excluded), None, n)
    for reason, count in fl.counts.items():
        rows.add(f"quality.left_out_{reason}", b, float(count), None, n)
    rows.add("quality.switch_offs", b, float(switch_offs), None, n)
    rows.add("quality.driver_floating", b, 1.0 if floating else 0.0, None, n)

    # --- electrical ---
    e_prior = (prior.resistance, prior.seebeck, cfg.rating_rel_sd) if prior is not None else None
    try:
        el = dg.fit_electrical(
            i, v, tc, th, usable, floating=floating, alpha=cfg.alpha, beta=cfg.beta,
            prior=e_prior, options=_dg_options(cfg),
        )  # fmt: skip
    except PhysicsError as exc:
        note = getattr(exc, "reason", str(exc))
        rows.add("module.resistance_25c_ohm", b, None, None, n, False, note)
        return
    on = usable & fl.on
    tm_on = float(np.mean(tm[on]))
    f_r = 1.0 + cfg.alpha * (tm_on - T_25C_K)
    f_s = 1.0 + cfg.beta * (tm_on - T_25C_K)
    se_r = float(np.sqrt(max(el.cov[0, 0], 0.0)))
    n_el = el.n_on + el.n_off
    r_note = None if el.r_reliable else el.note
    rows.add("module.resistance_25c_ohm", b, el.r25, se_r, n_el, el.r_reliable, r_note)
    rows.add("module.resistance_ohm", b, el.r25 * f_r, se_r * f_r, n_el, el.r_reliable, r_note)
    # Served: the module's own S, its fit allowing for a constant ΔT offset (the heat balances
    # below use the median of the unit's recent ones).
    s_own, se_own = el.s25_offset_free, el.s25_offset_free_se
    rows.add("module.seebeck_25c_v_per_k", b, s_own, se_own, n_el, el.reliable, el.note)
    rows.add("module.seebeck_v_per_k", b, s_own * f_s, se_own * f_s, n_el, el.reliable, el.note)
    if floating:
        s_steps, _ = dg.harman_steps(t, i, v, tc, th, usable, options=_dg_options(cfg))
        if s_steps.size >= 3:
            rows.add(
                "module.seebeck_step_v_per_k", b, float(np.median(s_steps)),
                float(np.std(s_steps, ddof=1) / math.sqrt(s_steps.size)), int(s_steps.size),
            )  # fmt: skip
    _track_r25(rows, state, b, el, prior, cfg)

    # --- thermal ---
    # The heat balances use the unit's settled S once there is one; till then the S that
    # pairs with ΔT as the probes read it in this window.
    settled_s = _s_settled(state, cfg)
    if el.reliable:
        _remember(state, "s_hist", [s_own, se_own], cfg)
    rs_cov = np.array(el.cov, dtype=np.float64)
    s_bal = el.s25
    if settled_s is not None:
        s_bal = settled_s[0]
        rs_cov[0, 1] = rs_cov[1, 0] = 0.0
        rs_cov[1, 1] = settled_s[1] ** 2
    tm_th = 0.5 * (data.tc[wt] + data.th[wt])
    s_t = s_bal * (1.0 + cfg.beta * (tm_th - T_25C_K))
    r_t = el.r25 * (1.0 + cfg.alpha * (tm_th - T_25C_K))
    if prior is not None:
        k0, k_rel = prior.conductance, 0.3
    else:
        k0 = el.s25**2 * T_25C_K / (el.r25 * dg.TYPICAL_MODULE_ZT)
        k_rel = 0.5
    # (S, R) relative errors, from the electrical fit's (R, S) covariance.
    rel = np.array([1.0 / s_bal, 1.0 / el.r25])
    sr_rel_cov = rs_cov[::-1, ::-1] * np.outer(rel, rel)
    # The sink and cabinet figures of the last thermal fit stay till the next one succeeds:
    # the hourly hot-side resistance needs them, above all in the hours after a fan fails,
    # when the day's balances often cannot be fitted.
    state["params"] = {"k": k0, **state.get("params", {}), "s25": el.s25, "r25": el.r25}
    state["params"]["cov_rs"] = el.cov.tolist()
    k_settled = _k_settled(state, cfg)
    try:
        th_fit = dg.fit_thermal(
            data.t[wt], data.tcab[wt], data.tc[wt], data.th[wt], data.ta[wt], data.i[wt],
            s_t, r_t, usable_th, k0, k_rel, k_settled=k_settled,
            q_settled=_q_settled(state, cfg), sr_rel_cov=sr_rel_cov,
            sink_taus_settled=_taus_settled(state, cfg), options=_dg_options(cfg),
        )  # fmt: skip
    except PhysicsError as exc:
        rows.add("cabinet.ua_w_per_k", b, None, None, n, False, getattr(exc, "reason", str(exc)))
        return
    sd = th_fit.stderrs
    ns = th_fit.n_samples
    if th_fit.ua_reliable and math.isfinite(th_fit.q_internal_own):
        _remember(state, "q_hist", th_fit.q_internal_own, cfg)
    if th_fit.sink_taus is not None and all(map(math.isfinite, th_fit.sink_taus)):
        _remember(state, "tau_hist", list(th_fit.sink_taus), cfg)
    if not th_fit.faces_followed:
        # K is held where the samples cannot follow the sinks: K from windows that seemed to
        # follow them is no settled value either.
        state.pop("k_hist", None)
    elif th_fit.k_from_data:
        _remember(state, "k_hist", th_fit.k, cfg)
    # A module that never rests (proportional drive) works along one family of operating
    # points: K leans on small changes of it, the air drifts with the load and the contents
    # lag behind. Against simulated fleets with known truth, K then came out up to 25 % high,
    # the cold side's resistance up to twice its value and UA 15-55 % low, often beyond their
    # stated errors: served, but not called reliable. UA's changes are still tracked.
    rested = th_fit.rested
    never_rested = "module never rested in this window: one operating point"
    k_ok = th_fit.k_from_data and rested
    k_note = th_fit.note if not th_fit.k_from_data else (None if rested else never_rested)
    rows.add("module.conductance_w_per_k", b, th_fit.k, sd["k"], ns, k_ok, k_note)
    state["params"].update(
        {"k": th_fit.k, "k_sd": sd["k"], "c_hot": max(th_fit.c_hot, 0.0), "ua": th_fit.ua,
         "q_int": th_fit.q_internal, "r_cold": 1.0 / th_fit.g_cold, "r_hot": 1.0 / th_fit.g_hot,
         "i_seen": float(np.max(i[usable])) if usable.any() else 0.0,
         "faces_followed": th_fit.faces_followed}
    )  # fmt: skip
    cov3 = np.zeros((3, 3))
    cov3[0, 0], cov3[1, 1] = el.cov[1, 1], el.cov[0, 0]
    cov3[0, 1] = cov3[1, 0] = el.cov[0, 1]
    cov3[2, 2] = sd["k"] ** 2
    s_m, r_m = el.s25 * f_s, el.r25 * f_r
    z_arr, z_err = dg.propagate(
        lambda p: p[:, 0] ** 2 / (p[:, 1] * p[:, 2]), np.array([s_m, r_m, th_fit.k]), cov3
    )
    z_val, z_se = float(z_arr[0]), float(z_err[0])
    rows.add("module.z_per_k", b, z_val, z_se, ns, k_ok, k_note)
    rows.add("module.zt", b, z_val * tm_on, z_se * tm_on, ns, k_ok, k_note)
    if off.any():
        rows.add("module.off_leak_w", b, th_fit.k * float(np.mean(dt[off])), None, int(off.sum()))
    # The value's error includes what probe offsets and the errors of S and R could do to it;
    # its tracking (below) does not, since a constant error cancels in its changes.
    ua_se = math.hypot(sd["ua"], sd["ua_probe"])
    ua_ok = th_fit.ua_reliable and rested and ua_se <= cfg.ua_max_rel_se * th_fit.ua
    ua_note = None
    if not th_fit.ua_reliable:
        ua_note = th_fit.note
    elif not rested:
        ua_note = f"{never_rested}; its changes are still tracked"
    elif not ua_ok:
        ua_note = (
            f"probe offsets and the module's S and R could move UA by "
            f"±{100 * ua_se / th_fit.ua:.0f} %: "
            "its changes are still tracked"
        )
    rows.add("cabinet.ua_w_per_k", b, th_fit.ua, ua_se, ns, ua_ok, ua_note)
    rows.add("cabinet.internal_load_w", b, th_fit.q_internal, sd["q_internal"], ns)
    rows.add(
        "cabinet.heat_capacity_j_per_k", b, th_fit.c, sd["c"], ns, th_fit.c_reliable,
        None if th_fit.c_reliable else "heat capacity poorly determined in this window",
    )  # fmt: skip
    last_hour = usable & (t >= t[-1] - 3600.0)
    if last_hour.any():
        d_amb = float(np.mean(ta[last_hour] - tcab[last_hour]))
        rows.add(
            "cabinet.heat_leak_w", b, th_fit.ua * d_amb, ua_se * abs(d_amb),
            int(last_hour.sum()), ua_ok, ua_note,
        )  # fmt: skip
    g_c, g_h = th_fit.g_cold, th_fit.g_hot
    # Probe offsets shift the small temperature differences themselves (see
    # diagnostics.hot_side_resistance_ratio); add them to the fit's error. A K held at its
    # prior or at the unit's settled value is no part of the fit's covariance: through K·ΔT in
    # the cold path's balance, g·rise = Qc - K·ΔT, it moves g by -ΔT/rise per W/K (first
    # order), several times over since the rise is a few kelvin. Against simulated fleets with
    # known truth, without it the cold side's stated error covered its true one on 70 % of
    # units whose sinks store heat (K held), and the hot side's (rise three to five times
    # larger) on 97 %, as did the hourly figure's: there it stays out.
    rise_c = float(np.mean((data.tcab[wt] - data.tc[wt])[usable_th]))
    rise_h = float(np.mean((data.th[wt] - data.ta[wt])[usable_th]))
    rise_amb = float(np.mean((data.ta[wt] - data.tcab[wt])[usable_th]))
    dt_th = float(np.mean((data.th[wt] - data.tc[wt])[usable_th]))
    k_held_sd = 0.0 if th_fit.k_from_data else sd["k"]
    for key, g, sd_g, rise in (
        ("cold_side.resistance_k_per_w", g_c, sd["g_cold"], rise_c),
        ("hot_side.resistance_fit_k_per_w", g_h, sd["g_hot"], rise_h),
    ):
        rise_abs = max(abs(rise), 1e-9)
        se_probe = (1.0 / g) * cfg.probe_offset_k / rise_abs
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
            ok, note = False, never_rested
        if ok and not th_fit.faces_followed and key.startswith("cold_side"):
            ok, note = False, th_fit.note
        rows.add(key, b, 1.0 / g, se, ns, ok, note)
    # While the hot side's resistance is flagged (a failed fan, a clogged sink) the module runs
    # at a hot face and often without pause, a regime the cabinet balance was not judged in:
    # UA's changes are not followed then, so that one fault raises one flag (common practice,
    # no source). They resume from the same baseline once the flag clears.
    #
    # K·ΔT, the module's own leak, is a large term in both the cabinet's and the hot sink's
    # balance (where the module never rests, often larger than the cabinet's leak), so their
    # changes are judged at one K, the unit's trend K: taken from the first window whose K is
    # not this window's own (the rated prior, or the unit's settled K) and kept, since the
    # settled K follows the unit's newest windows and drifts a little with the seasons. UA is
    # moved there to first order; the hourly hot-side resistance uses it. A trend K taken
    # from the rated prior (the module never rested in its first warm days) can be several
    # per cent off: once the unit has a settled K of its own, the trend K becomes that. UA's
    # track is then made again from the windows followed so far, each moved to the new K
    # (see _rebase_ua); the hot side's hourly track goes on from its baseline, since its
    # flag threshold is far beyond the per cent or two that the change of K moves it by
    # (starting it again would take a fan failing in the next days into a new baseline).
    # Windows whose K is their own and not yet settled are not followed.
    hot_flagged = int(state.get("above", {}).get("rhot", 0)) >= 1
    k_source = "own" if k_settled is not None else "data" if th_fit.k_from_data else "prior"
    if k_source != "data":
        if state.get("k_trend_source") == "prior" and k_source == "own":
            state["k_trend"] = th_fit.k_cabinet
            _rebase_ua(state, th_fit.k_cabinet, cfg)
        state["k_trend_source"] = k_source
        k_trend = state.setdefault("k_trend", th_fit.k_cabinet)
        followable = sd["ua"] <= cfg.ua_follow_rel_se * th_fit.ua and not hot_flagged
        if followable and _ambient_lead_usual(state, b, rise_amb, cfg):
            if k_source == "prior":
                raw = state.setdefault("ua_raw", [])
                raw.append([b, th_fit.ua, th_fit.ua_per_k, th_fit.k_cabinet, sd["ua"]])
                del raw[: -cfg.ua_raw_keep]
            ua_trend = th_fit.ua + th_fit.ua_per_k * (k_trend - th_fit.k_cabinet)
            _track_ua(rows, state, b, ua_trend, sd["ua"], cfg)

    # --- performance now ---
    pick = fl.steady & fl.on & (t >= t[-1] - 3600.0)
    if not pick.any():
        pick = fl.steady & fl.on
    if not pick.any():
        pick = on
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


def _ambient_lead_usual(
    state: dict[str, Any], b: int, rise_amb: float, cfg: AnalysisSettings
) -> bool:
    # Whether the ambient leads the cabinet by at least ``ua_follow_min_lead_share`` of its
    # usual lead: the median over the commissioning weeks (``ua_baseline_grow_days`` from the
    # first window that could be followed). Within those weeks every window counts.
    ref = state.setdefault("ua_lead", {"from": b, "values": []})
    if b <= ref["from"] + int(cfg.ua_baseline_grow_days * MS_DAY):
        ref["values"].append(rise_amb)
        return True
    return rise_amb >= cfg.ua_follow_min_lead_share * float(statistics.median(ref["values"]))


def _track_ua(
    rows: _Rows, state: dict[str, Any], b: int, ua: float, ua_sd: float, cfg: AnalysisSettings
) -> None:
    _track(
        rows, state, "ua", "cabinet.ua", b, ua, cfg.ua_flag_pct, 0.03, cfg,
        skip_days=cfg.ua_baseline_skip_days, persist=cfg.ua_flag_persist,
        grow_days=cfg.ua_baseline_grow_days, newest_sd=ua_sd,
    )  # fmt: skip


def _rebase_ua(state: dict[str, Any], k_trend: float, cfg: AnalysisSettings) -> None:
    # The unit's own K has settled while UA was followed at the rated K: its track is made
    # again from the windows followed so far, each moved to the new trend K by its own
    # first-order response, so that the baseline keeps its commissioning days (a fresh start
    # here would take a fault of these days into the new baseline).
    _restart_track(state, "ua")
    scratch = _Rows("")
    for b, ua, ua_per_k, k_cabinet, *sd in state.pop("ua_raw", []):
        moved = ua + ua_per_k * (k_trend - k_cabinet)
        _track_ua(scratch, state, int(b), moved, float(sd[0]) if sd else 0.0, cfg)


def _hot_side(
    data: _Data, first: int, last: int, state: dict[str, Any], cfg: AnalysisSettings
) -> dict[int, dg.Estimate | None]:
    """Hot-side resistance of the hourly steps ending at ``first`` .. ``last`` (inclusive)."""
    step = cfg.step_s * 1000
    ends = range(first, last + 1, step)
    params = state.get("params")
    if not params or "k" not in params or "c_hot" not in params:
        return dict.fromkeys(ends)
    w = data.slice(first - step, last)
    ts = data.ts[w]
    block = (ts - (first - step)) // step
    tm = 0.5 * (data.tc[w] + data.th[w])
    s = params["s25"] * (1.0 + cfg.beta * (tm - T_25C_K))
    r = params["r25"] * (1.0 + cfg.alpha * (tm - T_25C_K))
    ests = dg.hot_side_resistance_ratios(
        data.t[w], data.th[w], data.ta[w], data.tc[w], data.i[w], s, r,
        state.get("k_trend", params["k"]),
        _flags(data, w).usable, block, len(ends), c_hot=params["c_hot"],
        faces_followed=bool(params.get("faces_followed", True)),
        options=replace(
            _dg_options(cfg), hot_side_min_heat_j=cfg.r_hot_min_heat_w * cfg.step_s
        ),
    )  # fmt: skip
    n_samples = np.bincount(block, minlength=len(ends))
    return {
        b: est if isinstance(est, dg.Estimate) and n >= 10 else None
        for b, est, n in zip(ends, ests, n_samples, strict=True)
    }


def _hourly(
    b: int, est: dg.Estimate | None, rows: _Rows, state: dict[str, Any], cfg: AnalysisSettings
) -> None:
    if est is None:
        return
    rows.est("hot_side.resistance_k_per_w", b, est)
    # Where the sinks store heat faster than the samples follow, the hour's figure carries a
    # steady bias (see diagnostics.hot_side_resistance_ratios): not reliable, but precise
    # hours are still followed, since a steady bias cancels in the change. One hour there
    # can still read +50 % when the cycle drifts into step with the sampling (simulated
    # units: single hours up to +51 %, never two in a row), so the flag waits for a second,
    # unless the hour reads twice the threshold (a failed fan's 3x does).
    slow = not state.get("params", {}).get("faces_followed", True)
    followed = est.reliable or (slow and est.stderr is not None and est.stderr < 0.2 * est.value)
    if not followed or "k_trend" not in state:
        return
    _track(
        rows, state, "rhot", "hot_side.resistance", b, est.value, cfg.r_hot_flag_pct, 0.03, cfg,
        persist=2 if slow else 1, at_once_pct=2.0 * cfg.r_hot_flag_pct if slow else None,
    )  # fmt: skip


def _track(
    rows: _Rows,
    state: dict[str, Any],
    name: str,
    prefix: str,
    b: int,
    value: float,
    flag_pct: float,
    min_rel_spread: float,
    cfg: AnalysisSettings,
    *,
    skip_days: float = 0.0,
    persist: int = 1,
    grow_days: float = 0.0,
    newest_sd: float | None = None,
    at_once_pct: float | None = None,
) -> None:
    """Append a value to its series and emit baseline, change, CUSUM and flag estimates.

    The baseline is the median of the values from ``skip_days`` to ``skip_days +
    baseline_days`` after the first one, or of the first ``baseline_min_n`` from
    ``skip_days`` on when that period holds fewer; the flag is raised once the change has
    reached ``flag_pct`` on ``persist`` consecutive evaluations. With ``grow_days``, every
    later value joins the baseline until ``grow_days`` after its start, and none once the
    change has reached ``flag_pct``: a fault's values must not make its own baseline. With
    ``newest_sd`` (the newest value's standard error), an evaluation counts towards
    ``persist`` only when the newest value is within one standard error of a change of
    ``flag_pct`` or beyond. With ``at_once_pct``, a change that reaches it raises the flag
    on its first evaluation.
    """
    series = state.setdefault("series", {}).setdefault(name, [])
    first = state.setdefault("first", {}).setdefault(name, b)
    series.append([b, value])
    horizon = b - int(cfg.trend_days * MS_DAY)
    baseline_start = first + int(skip_days * MS_DAY)
    baseline_end = baseline_start + int(cfg.baseline_days * MS_DAY)
    while series and series[0][0] < horizon and series[0][0] > baseline_end:
        series.pop(0)
    bases = state.setdefault("baseline", {})
    if name not in bases:
        if b < baseline_end:
            return
        pool = np.array([x for at, x in series if baseline_start <= at <= baseline_end])
        if pool.size < cfg.baseline_min_n:
            # Too few reliable values in the baseline period: keep collecting, the first
            # baseline_min_n from its start make the baseline.
            later = [x for at, x in series if at >= baseline_start][: cfg.baseline_min_n]
            if len(later) < cfg.baseline_min_n:
                return
            pool = np.array(later)
        bl = trends.baseline(pool, min_rel_spread)
        bases[name] = {"center": bl.center, "spread": bl.spread, "n": bl.n}
        if grow_days > 0.0:
            bases[name]["pool"] = pool.tolist()
        # baseline values are no longer needed in the series beyond the trend horizon
    elif "pool" in bases[name]:
        pool_d = bases[name]
        # Closed at the end of the growing time, and for good once the change has reached
        # flag_pct: a fault's values must not make its own baseline.
        if b > baseline_start + int(grow_days * MS_DAY) or state.get("above", {}).get(name):
            del pool_d["pool"]
        else:
            pool_d["pool"].append(value)
            bl = trends.baseline(np.array(pool_d["pool"]), min_rel_spread)
            pool_d.update(center=bl.center, spread=bl.spread, n=bl.n)
    bl_d = bases[name]
    center, spread = float(bl_d["center"]), float(bl_d["spread"])
    # The series is in time order: cut it by bisection rather than by scanning it every step.
    series = _daily_medians_before(
        series[bisect.bisect_left(series, horizon, key=_at) :], b // MS_DAY - 1
    )
    state["series"][name] = series
    recent_from = b - (cfg.step_s * 1000 if name == "rhot" else MS_DAY)
    tail = series[bisect.bisect_right(series, recent_from, key=_at) :]
    # statistics.median: the same value as numpy's for these few points, without its overhead.
    recent = float(statistics.median(x for _, x in tail))
    change = trends.percent_change(recent, center)
    cus = state.setdefault("cusum", {})
    c_new = trends.cusum_update(
        float(cus.get(name, 0.0)), value, center, spread, cfg.cusum_allowance
    )
    cus[name] = c_new
    n_base = int(bl_d["n"])
    rows.add(f"{prefix}.change_pct", b, change, 100.0 * spread / center, n_base)
    above = state.setdefault("above", {})
    # With newest_sd the newest value must show the change as well, to its own precision: a
    # lasting fault shows in every later value, while the day's median can be made of two or
    # three disturbed ones.
    newest_ok = newest_sd is None or trends.percent_change(value + newest_sd, center) >= flag_pct
    above[name] = int(above.get(name, 0)) + 1 if change >= flag_pct and newest_ok else 0
    raised = above[name] >= persist or (
        at_once_pct is not None and change >= at_once_pct and newest_ok
    )
    rows.add(f"{prefix}.flag", b, 1.0 if raised else 0.0, None, n_base)
    if b % (cfg.window_s * 1000) == 0:
        # Slow-moving figures: once per window is enough, also for the hourly series.
        rows.add(f"{prefix}.baseline", b, center, spread / math.sqrt(max(n_base, 1)), n_base)
        rows.add(f"{prefix}.cusum", b, c_new, None, n_base)


def _restart_track(state: dict[str, Any], name: str) -> None:
    # Forget a tracked series, its baseline and its statistics: the next value starts anew.
    for part in ("series", "first", "baseline", "cusum", "above"):
        state.get(part, {}).pop(name, None)


def _at(point: list[Any]) -> int:
    return int(point[0])


def _daily_medians_before(series: list[list[Any]], day: int) -> list[list[Any]]:
    # Days before `day` (UTC day numbers) reduced to one point each, their median at the
    # day's last time: all that the daily trend reads of them (it takes each day's median),
    # and the carried state stays small. Later days keep every value (recent medians).
    split = bisect.bisect_left(series, day * MS_DAY, key=_at)
    out: list[list[Any]] = []
    for _, group in itertools.groupby(series[:split], key=lambda p: int(p[0]) // MS_DAY):
        pts = list(group)
        out.append(pts[0] if len(pts) == 1 else [pts[-1][0], statistics.median(x for _, x in pts)])
    return out + series[split:]


def _daily(
    b: int,
    rows: _Rows,
    state: dict[str, Any],
    prior: physics.ModuleParameters | None,
    setpoint_c: float,
    cfg: AnalysisSettings,
) -> None:
    bases = state.get("baseline", {})
    for name, prefix in (
        ("r25", "module.resistance_25c"), ("ua", "cabinet.ua"), ("rhot", "hot_side.resistance")
    ):  # fmt: skip
        series = state.get("series", {}).get(name)
        if name not in bases or not series:
            continue
        center = float(bases[name]["center"])
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
    p = state.get("params", {})
    if "ua" not in p:
        return
    i_max = prior_i = None
    v_max = None
    if prior is not None:
        # Imax = S·Tc/R at ΔTmax is what the ratings give; recompute from the prior module.
        rt = physics.ratings_from_parameters(prior, cfg.default_t_hot_rated_c + T0)
        prior_i, v_max = rt.i_max, rt.v_max
    i_max = prior_i if prior_i is not None else float(p.get("i_seen", 0.0))
    if i_max <= 0.0:
        return
    try:
        cap = dg.setpoint_capacity(
            setpoint_c + T0, cfg.design_ambient_c + T0, p["s25"], p["r25"], p["k"], p["r_hot"],
            p["r_cold"], p["ua"], i_max, max_voltage=v_max, alpha=cfg.alpha, beta=cfg.beta,
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
