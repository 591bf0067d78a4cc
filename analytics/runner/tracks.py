"""Tracked quantities: baselines, changes, CUSUM, flags, and the daily medians they keep.

R25's changes are judged at one S (the trend S), UA's at one K (the trend K); the hot side's
hourly resistance is tracked by :mod:`.hot_side` through :func:`track` as well.
"""

from __future__ import annotations

import bisect
import itertools
import math
import statistics
from typing import Any

import numpy as np

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics, trends
from tecfleet.analytics.diagnostics.least_squares import robust_sd
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import MS_DAY, AnalysisSettings
from tecfleet.analytics.runner.settled import s_settled
from tecfleet.analytics.runner.state import Baseline, DeviceState, Point, UaLead

__all__ = [
    "FLAGS_HELD_CABINET_PROBE_MOVED",
    "FLAGS_HELD_CABINET_PROBE_UNCHECKED",
    "FLAGS_HELD_FACES_FROM_VOLTAGE",
    "FLAGS_HELD_R25_CABINET_PROBE_MOVED",
    "FLAGS_HELD_UA_RATED_S",
    "FLAGS_HELD_UA_SLOW_READINGS",
    "FLAGS_HELD_UA_SPARSE_INSTANTS",
    "ambient_lead_usual",
    "cabinet_moved",
    "daily_medians_before",
    "faces_judged",
    "faces_r25",
    "rebase_ua",
    "rested_lately",
    "track",
    "track_r25",
    "track_r25_from_voltage",
    "track_ua",
    "ua_judged",
]


#: Why UA and the hot side raise no flag on a unit with a cold-face probe and none on the
#: hot face (:func:`faces_judged`): what is served there has not been shown to keep a
#: healthy unit unflagged over a season.
FLAGS_HELD_FACES_FROM_VOLTAGE = (
    "faces read from the module's voltage: changes are followed, but no flag is raised on "
    "this sensor set until detection there is validated"
)


#: Why UA raises no flag on a unit with no face probe. The voltage gives S·ΔT only, so the
#: cabinet's balance takes S from the ratings, and Qc = S·I·Tc - ½·I²·R - K·ΔT (Goldsmid
#: 2010, ch. 2) then errs by about δ·(S·I·Tc + K·ΔT) for a relative error δ of S: tens of
#: watts times δ against a pumped heat of a few watts, and the error grows with the duty, so
#: UA's changes follow the weather. Simulated 90-day seasons (sinks of 500/1500 J/K, values
#: the code produced itself): a unit whose S is 5.7 % above its rated one read UA about
#: 0.20 W/K in mild weather and 0.30 W/K in a hot spell against a true 0.40 (0.32-0.44
#: where its S was the rated one), and with the flag allowed 2 of 48 healthy units were
#: flagged.
FLAGS_HELD_UA_RATED_S = (
    "no face probe: the cabinet's balance rests on the rated S (the voltage gives S·ΔT "
    "only), whose error moves UA with the duty and the weather: UA's changes are followed, "
    "but no flag is raised"
)


#: Why UA raises no flag on a unit with a hot-face probe and none on the cold face whose
#: cabinet probe could not be judged: a drifting cabinet probe reads as a heat leak
#: (simulated: UA +36 % from a 3 K drift over six days), and without the cold-face probe only
#: a floating module's open-circuit voltage shows it (``offsets.update_offsets``).
FLAGS_HELD_CABINET_PROBE_UNCHECKED = (
    "no cold-face probe and no open-circuit voltage to judge the cabinet probe by: UA's "
    "changes are followed, but no flag is raised, since a drifting cabinet probe would read "
    "as a heat leak"
)

#: Why R25 raises no flag where the cabinet probe has moved: without a cold-face probe R25
#: is read from the cold face's balance with the cabinet probe (and its drift within the
#: window) where no switch-off step gives it (simulated: +3.1 % on a 3 K drift).
FLAGS_HELD_R25_CABINET_PROBE_MOVED = (
    "the cabinet probe has moved against the cold face read from the open-circuit voltage: "
    "R25, read from the cold face's balance with it, is followed, but no flag is raised"
)

#: Why UA raises no flag on a unit whose cold face is read from the voltage and which
#: reports more slowly than ``ua_faces_max_interval_s``: ΔT = (V - I·R)/S is read at an R25
#: that such readings pin only within about 1 % from day to day, and K·ΔT in Qc (Goldsmid
#: 2010, ch. 2) carries that into UA at 20-30 % per 1 % (simulated units at 5-minute
#: instants; values the code produced itself); the 90-day seasons of healthy simulated units
#: still raised false heat-leak flags (``ua_faces_max_interval_s``).
FLAGS_HELD_UA_SLOW_READINGS = (
    "cold face read from the module's voltage at this reporting interval: UA moves by "
    "20-30 % for each per cent of error in the R25 the face is read at, which these readings "
    "give only within about 1 %: UA's changes are followed, but no flag is raised"
)

#: Why UA raises no flag on a unit reporting single instants further apart than
#: ``ua_instants_max_interval_s``: its thermostat cycles fall between readings, and UA read
#: from them wanders by a third over days (the accuracy its estimate is held to there), as
#: far as the flag's threshold.
FLAGS_HELD_UA_SPARSE_INSTANTS = (
    "single readings this far apart leave UA good to about a third: its changes are "
    "followed, but no flag is raised; interval summaries in the payload allow one"
)

#: Why UA raises no flag where the cabinet probe has moved against the cold side's balance.
FLAGS_HELD_CABINET_PROBE_MOVED = (
    "the cabinet probe has moved against the cold face read from the open-circuit voltage: "
    "UA's changes are followed, but no flag is raised while the probe may be drifting"
)


def faces_judged(
    probed: tuple[bool, bool],
    faces_trusted: bool | None,
    quantity: str = "rhot",
    cabinet_moved: bool | None = None,
) -> tuple[bool, str | None]:
    """Whether the changes of a thermal ``quantity`` ("rhot" or "ua") of a unit with these
    face probes (cold, hot) are followed, and why no flag is raised (None where one may
    be), given whether its faces read from the voltage are trusted: the window's R25 was
    served as reliable and the module rested lately (:func:`rested_lately`), and whether
    its cabinet probe has moved (:func:`cabinet_moved`; None: not judged).

    Where only the cold face is read from the voltage, ΔT = (V - I·R)/S moves by I·R/S per
    unit relative error of R (Goldsmid 2010, ch. 2): at 3 A through 2 ohm and 50 mV/K, 1.2 K
    per 1 %, about twice that with Tm = Th - ΔT/2 solved with ΔT. A window's R25 that the
    readings could not pin down (a module that never rests) wanders by several per cent
    from window to window, so those windows' UA and hot-side figures are not followed. The
    others are: the hot side flags as on the full set, UA where its cabinet probe was judged
    and has not moved (:data:`FLAGS_HELD_CABINET_PROBE_UNCHECKED`,
    :data:`FLAGS_HELD_CABINET_PROBE_MOVED`). With neither face probed, the hot side's
    changes are followed and flag on the same terms (both faces from the voltage,
    ``hot_side.faces_source``); UA's are followed where the faces are trusted
    (``data.placed_faces``) and held (:data:`FLAGS_HELD_UA_RATED_S`). A cold-face probe
    without a hot one: followed and held (:data:`FLAGS_HELD_FACES_FROM_VOLTAGE`)."""
    if probed == (True, True):
        return True, None
    if probed == (False, True):
        if quantity != "ua" or cabinet_moved is False:
            return bool(faces_trusted), None
        held = FLAGS_HELD_CABINET_PROBE_UNCHECKED
        return bool(faces_trusted), FLAGS_HELD_CABINET_PROBE_MOVED if cabinet_moved else held
    if probed == (False, False):
        return bool(faces_trusted), FLAGS_HELD_UA_RATED_S if quantity == "ua" else None
    return True, FLAGS_HELD_FACES_FROM_VOLTAGE


def ua_judged(
    probed: tuple[bool, bool],
    faces_trusted: bool | None,
    cabinet_moved: bool | None,
    interval_s: float,
    summarised: bool,
    cfg: AnalysisSettings,
) -> tuple[bool, str | None]:
    """Whether UA's changes are followed on a unit with these face probes (cold, hot), and
    why no flag is raised: :func:`faces_judged`; where a face is read from the voltage, held
    too at a usual interval ``interval_s`` [s] beyond ``ua_faces_max_interval_s``
    (:data:`FLAGS_HELD_UA_SLOW_READINGS`); and on any unit reporting instants (not
    ``summarised``) further apart than ``ua_instants_max_interval_s``
    (:data:`FLAGS_HELD_UA_SPARSE_INSTANTS`)."""
    follow, held = faces_judged(probed, faces_trusted, "ua", cabinet_moved)
    if held is None and probed != (True, True) and interval_s > cfg.ua_faces_max_interval_s:
        held = FLAGS_HELD_UA_SLOW_READINGS
    if held is None and not summarised and interval_s > cfg.ua_instants_max_interval_s:
        held = FLAGS_HELD_UA_SPARSE_INSTANTS
    return follow, held


def cabinet_moved(state: DeviceState, b: int, cfg: AnalysisSettings) -> bool | None:
    """Whether the newest window that judged the cabinet probe found it moved by more than
    ``cabinet_shift_max_k`` against the cold side's balance (``offsets.update_offsets``),
    as judged at the window ending at ``b`` (epoch ms UTC); None where no window within
    ``cabinet_check_keep_s`` before it could judge it."""
    at = state.cabinet_shift_ms
    if state.cabinet_shift is None or at is None or b - at > cfg.cabinet_check_keep_s * 1000:
        return None
    return abs(state.cabinet_shift) > cfg.cabinet_shift_max_k


def track(
    rows: EstimateRows,
    state: DeviceState,
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
    recent_s: float | None = None,
    admit_s: float = 0.0,
    counts: bool = True,
    in_a_row_s: float | None = None,
    held: str | None = None,
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
    on its first evaluation. The change is that of the median of the values of the last day
    (the hot side's: of the last step), or of the last ``recent_s`` [s] where given (at least
    the newest value). With ``admit_s`` [s], a value joins the growing baseline only that
    long after its own step. A value that does not ``counts`` never counts towards
    ``persist``; with ``in_a_row_s`` [s], nor do values further apart than that (a step
    that was not followed in between starts the count again). With ``held`` (the reason),
    the change is followed and served but no flag is raised: the flag row is marked not
    reliable with that reason, and so is the change row.
    """
    series = state.series_by_name().setdefault(name, [])
    first = state.first_by_name().setdefault(name, b)
    series.append([b, value])
    horizon = b - int(cfg.trend_days * MS_DAY)
    baseline_start = first + int(skip_days * MS_DAY)
    baseline_end = baseline_start + int(cfg.baseline_days * MS_DAY)
    while series and series[0][0] < horizon and series[0][0] > baseline_end:
        series.pop(0)
    bl_d = _baseline(state, name, b, value, series, baseline_start, baseline_end, grow_days,
                     min_rel_spread, cfg, int(admit_s * 1000))  # fmt: skip
    if bl_d is None:
        return
    center, spread = float(bl_d.center), float(bl_d.spread)
    # The series is in time order: cut it by bisection rather than by scanning it every step.
    series = daily_medians_before(
        series[bisect.bisect_left(series, horizon, key=_at) :], b // MS_DAY - 1
    )
    state.series_by_name()[name] = series
    if recent_s is None:
        recent_s = cfg.step_s if name == "rhot" else MS_DAY / 1000
    recent_from = b - int(recent_s * 1000)
    tail = series[bisect.bisect_right(series, recent_from, key=_at) :] or series[-1:]
    # statistics.median: the same value as numpy's for these few points, without its overhead.
    recent = float(statistics.median(x for _, x in tail))
    change = trends.percent_change(recent, center)
    cus = state.cusum_by_name()
    c_new = trends.cusum_update(
        float(cus.get(name, 0.0)), value, center, spread, cfg.cusum_allowance
    )
    cus[name] = c_new
    n_base = int(bl_d.n)
    # A held change is served with its reason, not as reliable: the alert rules judge
    # reliable changes only, so holding the flag holds the alert too.
    rows.add(f"{prefix}.change_pct", b, change, 100.0 * spread / center, n_base, held is None, held)
    above = state.above_by_name()
    # With newest_sd the newest value must show the change as well, to its own precision: a
    # lasting fault shows in every later value, while the day's median can be made of two or
    # three disturbed ones.
    newest_ok = newest_sd is None or trends.percent_change(value + newest_sd, center) >= flag_pct
    run = int(above.get(name, 0))
    if in_a_row_s is not None and len(series) > 1 and b - series[-2][0] > in_a_row_s * 1000:
        run = 0
    above[name] = run + 1 if change >= flag_pct and newest_ok and counts and not held else 0
    raised = held is None and (
        above[name] >= persist or (at_once_pct is not None and change >= at_once_pct and newest_ok)
    )
    rows.add(f"{prefix}.flag", b, 1.0 if raised else 0.0, None, n_base, held is None, held)
    if b % (cfg.window_s * 1000) == 0:
        # Slow-moving figures: once per window is enough, also for the hourly series.
        rows.add(f"{prefix}.baseline", b, center, spread / math.sqrt(max(n_base, 1)), n_base)
        rows.add(f"{prefix}.cusum", b, c_new, None, n_base)


def _baseline(
    state: DeviceState,
    name: str,
    b: int,
    value: float,
    series: list[Point],
    baseline_start: int,
    baseline_end: int,
    grow_days: float,
    min_rel_spread: float,
    cfg: AnalysisSettings,
    admit_ms: int = 0,
) -> Baseline | None:
    # The quantity's baseline once its period has passed (see track), grown by ``value``
    # while it still grows; None while there is none yet.
    bases = state.baseline_by_name()
    if name not in bases:
        if b < baseline_end:
            return None
        pool = np.array([x for at, x in series if baseline_start <= at <= baseline_end])
        if pool.size < cfg.baseline_min_n:
            # Too few reliable values in the baseline period: keep collecting, the first
            # baseline_min_n from its start make the baseline.
            later = [x for at, x in series if at >= baseline_start][: cfg.baseline_min_n]
            if len(later) < cfg.baseline_min_n:
                return None
            pool = np.array(later)
        bl = trends.baseline(pool, min_rel_spread)
        bases[name] = Baseline(center=bl.center, spread=bl.spread, n=bl.n)
        if grow_days > 0.0:
            bases[name].pool = pool.tolist()
        # baseline values are no longer needed in the series beyond the trend horizon
    elif bases[name].pool is not None:
        pool_d = bases[name]
        # Closed at the end of the growing time, and for good once the change has reached
        # flag_pct: a fault's values must not make its own baseline.
        if b > baseline_start + int(grow_days * MS_DAY) or (state.above or {}).get(name):
            pool_d.pool = pool_d.pending = None
        else:
            assert pool_d.pool is not None
            waiting = [*(pool_d.pending or []), [b, value]]
            pool_d.pool.extend(x for at, x in waiting if at <= b - admit_ms)
            pool_d.pending = [p for p in waiting if p[0] > b - admit_ms] or None
            bl = trends.baseline(np.array(pool_d.pool), min_rel_spread)
            pool_d.center, pool_d.spread, pool_d.n = bl.center, bl.spread, bl.n
    return bases[name]


def _at(point: list[Any]) -> int:
    return int(point[0])


def daily_medians_before(series: list[Point], day: int) -> list[Point]:
    """Days before ``day`` (UTC day numbers) reduced to one point each, their median at the
    day's last time; later days keep every value."""
    # All that the daily trend reads of earlier days (it takes each day's median), and the
    # carried state stays small. Later days keep every value (recent medians).
    split = bisect.bisect_left(series, day * MS_DAY, key=_at)
    out: list[Point] = []
    for _, group in itertools.groupby(series[:split], key=lambda p: int(p[0]) // MS_DAY):
        pts = list(group)
        out.append(pts[0] if len(pts) == 1 else [pts[-1][0], statistics.median(x for _, x in pts)])
    return out + series[split:]


def track_r25(
    rows: EstimateRows,
    state: DeviceState,
    b: int,
    el: dg.ElectricalFit,
    prior: physics.ModuleParameters | None,
    cfg: AnalysisSettings,
) -> None:
    """Follow one window's R25 at the unit's trend S (see the comment below)."""
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
    _r25_source(state, None)
    settled = s_settled(state, cfg)
    if settled is not None:
        source, s_ref, s_sd = "own", settled[0], settled[1]
    elif el.reliable:
        source, s_ref, s_sd = "own", el.s25, math.sqrt(max(float(el.cov[1, 1]), 0.0))
    elif prior is not None:
        source, s_ref, s_sd = "prior", prior.seebeck, cfg.rating_rel_sd * prior.seebeck
    else:
        return
    if state.s_trend_source == "prior" and source == "own":
        # Made again from the windows followed so far, at the unit's own S (a fresh start
        # would take wear of these days into a new baseline).
        state.restart_track("r25")
        state.r25_levers = None
        state.s_trend, state.s_trend_source = [s_ref, s_sd], source
        scratch = EstimateRows("")
        kept_raw, state.r25_raw = state.r25_raw or [], None
        for at, r0, lever, sd, ok in kept_raw:
            _follow_r25(scratch, state, int(at), r0, lever, sd, bool(ok), cfg)
    if state.s_trend is None:
        state.s_trend, state.s_trend_source = [s_ref, s_sd], source
    if state.s_trend_source == "prior":
        kept = state.r25_raw = state.r25_raw if state.r25_raw is not None else []
        kept.append([b, el.r_at_zero_s, el.r_lever, el.r_sd_fixed_s, el.current_ok])
        del kept[: -cfg.ua_raw_keep]
    _follow_r25(rows, state, b, el.r_at_zero_s, el.r_lever, el.r_sd_fixed_s, el.current_ok, cfg)


def _follow_r25(
    rows: EstimateRows,
    state: DeviceState,
    b: int,
    r_at_zero_s: float,
    r_lever: float,
    r_sd_fixed_s: float,
    current_ok: bool,
    cfg: AnalysisSettings,
) -> None:
    # One window's R25 at the trend S into R25's track, when the window passes the checks
    # described in track_r25.
    assert state.s_trend is not None
    s_trend, s_sd = (float(x) for x in state.s_trend)
    r = r_at_zero_s - r_lever * s_trend
    if not (current_ok and r > 0.0 and r_sd_fixed_s <= cfg.r25_max_rel_se * r):
        return
    levers = state.r25_levers = state.r25_levers if state.r25_levers is not None else []
    if "r25" in (state.baseline or {}):
        if abs(r_lever - float(np.median(levers))) * s_sd > 0.01 * cfg.r25_lever_shift_pct * r:
            return
    else:
        levers.append(r_lever)
    track(rows, state, "r25", "module.resistance_25c", b, r, cfg.r25_flag_pct, 0.003, cfg)


def track_r25_from_voltage(
    rows: EstimateRows,
    state: DeviceState,
    b: int,
    r25: float,
    r25_se: float,
    reliable: bool,
    cfg: AnalysisSettings,
    held: str | None = None,
) -> None:
    """Follow one window's R25 read from the module's voltage where the cold face has no
    probe (:func:`diagnostics.reconstruct_faces`), with its stated standard error [ohm] and
    whether it was served as reliable; ``held``: why no flag is raised (see :func:`track`).

    The rated S is held there, the same in every window, so R25's changes are judged at it
    (no trend S to settle). Only windows served as reliable whose stated error is within
    ``r25_voltage_max_rel_se`` of R25 (or ``r25_max_rel_se`` where that is larger) are
    followed: an unreliable window neither joins the baseline nor moves the change. The
    change is the median of the windows of the last ``r25_voltage_recent_s``; a window
    counts towards the flag only where it shows the change itself within its stated error
    (``newest_sd``), and the flag waits for ``r25_voltage_persist`` such windows."""
    _r25_source(state, "voltage")
    limit = max(cfg.r25_max_rel_se, cfg.r25_voltage_max_rel_se)
    if not (reliable and r25 > 0.0 and r25_se <= limit * r25):
        return
    track(
        rows, state, "r25", "module.resistance_25c", b, r25, cfg.r25_flag_pct, 0.003, cfg,
        persist=cfg.r25_voltage_persist, newest_sd=r25_se, recent_s=cfg.r25_voltage_recent_s,
        held=held,
    )  # fmt: skip


def faces_r25(state: DeviceState, b: int, cfg: AnalysisSettings) -> tuple[float, float] | None:
    """The R25 to read a window's faces at where R25 is read from the module's voltage, and
    its standard error [ohm, ohm]: the median of the windows followed over the last
    ``faces_r25_span_s`` before ``b``, with their spread (robust sd) as its error; None
    where fewer than ``faces_r25_min_n`` are there or R25 rests on probed faces."""
    if state.r25_from != "voltage":
        return None
    since = b - int(cfg.faces_r25_span_s * 1000)
    recent = [p[1] for p in state.series_by_name().get("r25", []) if since <= p[0] < b]
    if len(recent) < cfg.faces_r25_min_n:
        return None
    values = np.asarray(recent, dtype=np.float64)
    center = float(np.median(values))
    # Normal-consistent sd from the MAD, no less than the 0.3 % R25's track takes as its
    # least spread.
    return center, max(robust_sd(values), 0.003 * center)


def rested_lately(state: DeviceState, b: int, switch_offs: int, cfg: AnalysisSettings) -> bool:
    """Whether the module rested (``faces_min_switch_offs`` switch-offs in a window) within
    ``faces_r25_span_s`` up to the window ending at ``b`` (epoch ms UTC), given this
    window's ``switch_offs``; the newest such window is kept in ``state.rested_ms``."""
    if switch_offs >= cfg.faces_min_switch_offs:
        state.rested_ms = b
    return state.rested_ms is not None and b - state.rested_ms <= cfg.faces_r25_span_s * 1000


def _r25_source(state: DeviceState, source: str | None) -> None:
    # R25's track rests on one source: probed faces (None), judged at the trend S, or the
    # module's voltage ("voltage"), at the rated S. Changes made at one S do not carry to
    # the other, so a new source starts the track, and what the trend S kept, anew.
    if state.r25_from != source:
        state.restart_track("r25")
        state.s_trend = state.s_trend_source = None
        state.r25_raw = state.r25_levers = None
        state.r25_from = source


def ambient_lead_usual(state: DeviceState, b: int, rise_amb: float, cfg: AnalysisSettings) -> bool:
    """Whether the ambient leads the cabinet by at least ``ua_follow_min_lead_share`` of its
    usual lead: the median over the commissioning weeks (``ua_baseline_grow_days`` from the
    first window that could be followed). Within those weeks every window counts."""
    if state.ua_lead is None:
        state.ua_lead = UaLead(start=b, values=[])
    ref = state.ua_lead
    if b <= ref.start + int(cfg.ua_baseline_grow_days * MS_DAY):
        ref.values.append(rise_amb)
        return True
    return rise_amb >= cfg.ua_follow_min_lead_share * float(statistics.median(ref.values))


def track_ua(
    rows: EstimateRows,
    state: DeviceState,
    b: int,
    ua: float,
    ua_sd: float,
    cfg: AnalysisSettings,
    served_reliable: bool = True,
    held: str | None = None,
) -> None:
    """Follow one window's UA at the trend K [W/K] with its standard error [W/K], and
    whether the window's UA was served as reliable (``held``: see :func:`track`).

    Its change is judged on the median of the fits whose readings, with the thermal window
    behind each, span ``ua_recent_data_s``: the last day's at one-minute readings (a day's
    window each), only the newest where slow reporting stretched the window to two days or
    more, which then averages the days of use and weather on its own; two such figures in a
    row are then two windows in a row, none left out between them. With a window of
    ``ua_long_window_s`` or longer, only windows whose UA was served as reliable count
    towards the flag; so they do with one of ``ua_pinned_window_s`` or longer once such a
    window has come (``state.ua_pinned``)."""
    recent_s = max(cfg.ua_recent_data_s - cfg.thermal_window_s, 0)
    long_window = cfg.thermal_window_s >= cfg.ua_long_window_s
    persist = cfg.ua_long_window_persist if long_window else cfg.ua_flag_persist
    if served_reliable:
        state.ua_pinned = True
    pinned = bool(state.ua_pinned) and cfg.thermal_window_s >= cfg.ua_pinned_window_s
    track(
        rows, state, "ua", "cabinet.ua", b, ua, cfg.ua_flag_pct, 0.03, cfg,
        skip_days=cfg.ua_baseline_skip_days, persist=persist,
        grow_days=cfg.ua_baseline_grow_days, newest_sd=ua_sd, recent_s=recent_s,
        admit_s=0 if long_window else max(cfg.thermal_window_s - cfg.ua_admit_window_s, 0),
        counts=served_reliable or not (long_window or pinned),
        in_a_row_s=cfg.window_s if recent_s < cfg.window_s else None, held=held,
    )  # fmt: skip


def follow_k_trend(
    state: DeviceState, k_window: float, source: str, cfg: AnalysisSettings
) -> float:
    """The unit's trend K [W/K], at which UA's and the hot side's changes are judged, given
    the K of this window's cabinet balance [W/K] and where it came from (``source``: "own",
    the unit's settled K, or "prior", the rated one).

    The settled K follows the unit's newest windows and drifts a little with the seasons, so
    the changes are judged at one K, kept from the first window of UA's track on. Till that
    window the trend K is each window's: the first settled K rests on a unit's first few
    windows and can lie far from the later ones (a simulated unit at 5-minute instants
    without a cold-face probe: 0.626 W/K, 0.47 a few days later, truth 0.484), and UA moved
    to a K that far off moves about twice as far, scattering its changes by tens of per
    cent. A trend K taken from the rated prior (the module never rested in its first warm
    days) can be several per cent off: once the unit has a settled K of its own, the trend K
    becomes that, and UA's track is made again from the windows followed so far, each moved
    to the new K (see :func:`rebase_ua`); the hot side's hourly track goes on from its
    baseline, since its flag threshold is far beyond the per cent or two that the change of
    K moves it by (starting it again would take a fan failing in the next days into a new
    baseline)."""
    if state.k_trend_source == "prior" and source == "own":
        state.k_trend = k_window
        rebase_ua(state, k_window, cfg)
    state.k_trend_source = source
    if state.k_trend is None or (state.first or {}).get("ua") is None:
        state.k_trend = k_window
    return state.k_trend


def rebase_ua(state: DeviceState, k_trend: float, cfg: AnalysisSettings) -> None:
    """Make UA's track again at a new trend K [W/K] from the windows kept (``ua_raw``)."""
    # The unit's own K has settled while UA was followed at the rated K: its track is made
    # again from the windows followed so far, each moved to the new trend K by its own
    # first-order response, so that the baseline keeps its commissioning days (a fresh start
    # here would take a fault of these days into the new baseline).
    state.restart_track("ua")
    scratch = EstimateRows("")
    kept_raw, state.ua_raw = state.ua_raw or [], None
    for b, ua, ua_per_k, k_cabinet, *sd in kept_raw:
        moved = ua + ua_per_k * (k_trend - k_cabinet)
        served_ok = bool(sd[1]) if len(sd) > 1 else True
        track_ua(scratch, state, int(b), moved, float(sd[0]) if sd else 0.0, cfg, served_ok)
