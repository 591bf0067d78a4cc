"""Cadence, thresholds and priors of the analysis runner, and the unit constants it uses."""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics
from tecfleet.analytics._validate import T_0C_K

__all__ = ["MS_DAY", "T0", "AnalysisSettings", "diagnostics_options", "for_reporting"]

#: 0 °C in kelvin [K].
T0 = T_0C_K
#: Milliseconds in a day [ms].
MS_DAY = 86_400_000


@dataclass(frozen=True)
class AnalysisSettings:
    """Cadence, thresholds and priors of the diagnostics (times in seconds)."""

    #: Hourly step: the hot-side resistance and its change [s] (common practice, no source).
    step_s: int = 3600
    #: Module and performance fits every 6 hours [s] (common practice, no source).
    window_s: int = 6 * 3600
    #: ... reaching back at least this many of the unit's usual reporting intervals (up to
    #: ``thermal_window_s``): at 15-minute reporting a thermostat's six hours hold about ten
    #: samples with the module on, too few for the electrical fit's ``min_on`` (common
    #: practice, no source) [-].
    window_min_intervals: int = 72
    #: Readings behind the thermal fit (K, sinks, cabinet), ending with each window: a day
    #: averages over use and ambient cycles, which the cabinet balance needs [s].
    thermal_window_s: int = 24 * 3600
    #: At slow reporting without interval summaries the thermal window holds at least this
    #: many usual intervals, up to ``thermal_window_max_s``: instants sample the on/off cycles
    #: at random phases, and the cabinet balance needs many of them (two days at 5-minute
    #: readings, three at 15-minute; one day at one-minute, as before). Interval summaries
    #: integrate the cycles exactly and keep the day [-, s]. Chosen against simulated fleets
    #: with known truth (seeds 201-210): a day of 15-minute instants gave UA scattered by
    #: ±50 % and flags on healthy units.
    thermal_min_intervals: int = 576
    thermal_window_max_s: int = 72 * 3600
    #: Slopes, wear and capacity once a day [s] (common practice, no source).
    daily_s: int = 86_400
    margin_s: int = 1800  # look-back for door settling and spike filtering [s]
    #: Current above which the module counts as on [A] (common practice, no source).
    on_current: float = 0.05
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO  # [1/K]
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO  # [1/K]
    #: Commissioning baseline: the median of the first days' values [d] (common practice,
    #: no source).
    baseline_days: float = 3.0
    #: Fewest reliable values a baseline is made of; with fewer in ``baseline_days`` it waits
    #: for more (a baseline of two or three fits would set every later change on chance;
    #: common practice, no source).
    baseline_min_n: int = 6
    #: Span of the daily medians behind the Theil-Sen slopes [d] (common practice, no source).
    trend_days: float = 30.0
    #: +10 % on R25 as end of useful life [%] (common practice, no source).
    wear_limit_pct: float = 10.0
    #: Change of R25 against its baseline that raises its flag [%] (common practice, no
    #: source).
    r25_flag_pct: float = 4.0
    #: Largest relative standard error of R25 at the unit's trend S, from the readings'
    #: scatter alone, for a window of one-minute readings to be followed; grown for slower
    #: ones (:func:`for_reporting`) [-] (common practice, no source).
    r25_max_rel_se: float = 0.01
    #: Relative standard deviation of the registered ratings (R, S) as priors, and of the
    #: rated S taken as the trend S till the unit has its own [-] (the spread between units
    #: of a type; common practice, no source).
    rating_rel_sd: float = 0.15
    #: Largest shift of R25 [%] that the trend S's uncertainty may cause through a change of
    #: the operating point (ΔT per ampere) since the baseline, for a window to be followed:
    #: a quarter of ``r25_flag_pct``.
    r25_lever_shift_pct: float = 1.0
    #: Where R25 is read from the module's voltage (no cold-face probe): the span of recent
    #: windows whose median is R25's change [s]. Two days: wear takes weeks, while the cold
    #: face's balance can read a day of one unit's windows a few per cent off with a tight
    #: stated error (seen on simulated fleets; common practice, no source).
    r25_voltage_recent_s: float = 2 * 86_400.0
    #: Where R25 is read from the module's voltage: windows followed with the change at or
    #: beyond ``r25_flag_pct`` before the flag is raised [-] (common practice, no source).
    r25_voltage_persist: int = 3
    #: Where R25 is read from the module's voltage: the largest relative standard error of a
    #: window's R25 change for the window to be followed, at any reporting interval [-]
    #: (half of ``r25_flag_pct``; common practice, no source).
    r25_voltage_max_rel_se: float = 0.02
    #: Where R25 is read from the module's voltage: the faces are read at the median R25 of
    #: the followed windows of this last span [s], not at the window's own, once
    #: ``faces_r25_min_n`` windows are there. One window's steps scatter by 1-2 % (simulated
    #: fleets), which moves ΔT by I·R/S per unit of R (Goldsmid 2010, ch. 2: 1.2 K per 1 % at
    #: 3 A, 2 ohm and 50 mV/K, about twice that with Tm = Th - ΔT/2 solved with ΔT) and UA by
    #: tens of per cent; wear moves R25 by a few per cent a week at most (common practice,
    #: no source).
    faces_r25_span_s: float = 2 * 86_400.0
    #: Fewest followed windows behind that median [-].
    faces_r25_min_n: int = 4
    #: Where faces are read from the voltage, switch-offs a window needs to count as one in
    #: which the module rested [-]; thermal changes are followed only while the module has
    #: rested within ``faces_r25_span_s``. A module that never rests gives R25 only from the
    #: cold face's balance, whose windows stated reliable still read a few per cent apart
    #: (simulated proportional units: a hot-side flag held for days at 5-minute instants, UA
    #: +40 % from R25 +3.5 %); a few rests give the open-circuit voltage an anchor. Not the
    #: window's own rests: a failed fan keeps the module running (common practice, no
    #: source).
    faces_min_switch_offs: int = 3
    #: Where the cold face has no probe, off samples of a floating module a window needs to
    #: judge the cabinet probe against the cold side's balance, and its commissioning fit
    #: too [-]: a median of 30 samples scattering by a probe's 0.1 K step is good to a few
    #: hundredths of a kelvin (common practice, no source).
    cabinet_check_min_samples: int = 30
    #: Largest shift of the cabinet probe against that balance at which UA's flag may be
    #: raised without a cold-face probe [K]: half a kelvin over an ambient lead of 10 K or
    #: more moves UA by 5 % at most, a seventh of ``ua_flag_pct`` (common practice, no source).
    cabinet_shift_max_k: float = 0.5
    #: A window that cannot judge the cabinet probe keeps the newest judgement for this long
    #: after the window that made it [s]: a leak keeps the module running, and its off spells
    #: grow too few to judge the probe just when the flag is due (a simulated 1.5x leak at
    #: one-minute readings was flagged 12 h later, held by one such window). A drifting probe
    #: leaves the off spells be: simulated drifts of 6 K over two days were judged in every
    #: window (a day: common practice, no source).
    cabinet_check_keep_s: int = 86_400
    #: Slowest usual interval at which UA's flag may be raised where the cold face is read
    #: from the module's voltage [s]: at one-minute readings healthy simulated units raised no
    #: flag over 90-day seasons (32 units), at 5-minute instants 2 of 16 did (UA +90 % in a
    #: hot spell, from faces read wrong), and one healthy unit of the detection bench. Tried
    #: again at 5 minutes (development seeds, the faces read at the median R25 of six days
    #: instead of two): 2 of the 5 leaks on floating thermostat units flagged in time and no
    #: healthy unit of the detection fleets, but 3 of 32 healthy units over 90-day seasons,
    #: in their warm weeks (:data:`~.tracks.FLAGS_HELD_UA_SLOW_READINGS`).
    ua_faces_max_interval_s: float = 90.0
    #: Slowest usual interval of single readings (no interval summaries) at which UA's flag
    #: may be raised [s]. At 15-minute instants UA is held to 35 % (the accuracy asked of it
    #: there), the flag's threshold; on simulated fleets with known truth the 90-day seasons
    #: of healthy units flagged 3 of 40 (seeds 201-210) while 2 of 8 leaks were flagged in
    #: time (seeds 301-304). At 5-minute instants 25 of 28 leaks were, so the flag stays there.
    ua_instants_max_interval_s: float = 600.0
    #: Change of UA against its baseline that raises its flag [%] (common practice, no
    #: source).
    ua_flag_pct: float = 35.0
    #: UA baseline starts this long after the first UA fit [d]: the first day of a unit's
    #: history holds its pull-down, which the cabinet balance over a day does not describe.
    ua_baseline_skip_days: float = 1.0
    #: Consecutive 6-hourly evaluations at or above ``ua_flag_pct`` before the UA flag is
    #: raised [-]: one day's fit can swing that far with weather and use, a leak stays. Each
    #: needs the newest window's own UA there too (to within one of its standard errors),
    #: not only the day's median: warm goods put in give off their heat for many hours, so a
    #: busy day inflates every window that holds it, and with the day's other windows
    #: unreliable the median can be made of those alone (against simulated fleets with
    #: known truth, healthy units flagged over 90-day seasons: 1 of 72, not 3). Without the
    #: standard error a leak whose windows scatter about the threshold waited 62 h for two
    #: in a row past it.
    ua_flag_persist: int = 2
    #: UA's change is that of the median of the fits of the last (this - the thermal window)
    #: [s]: at one-minute readings the last day's fits, each over a day, so that two days of
    #: use and weather stand behind the figure. Where slow reporting stretches the thermal
    #: window to two days or more, each fit holds them on its own and the figure is the
    #: newest fit's: a median over a further day added a day's lag to a leak's rise, and on
    #: simulated fleets with known truth (5-minute instants, seeds 201-210) a 1.5x leak took
    #: up to 82 h to flag, against a 72-h target. The flag's ``ua_flag_persist`` evaluations
    #: must then be windows in a row: a single fit's figure scatters more than a day's
    #: median, and over a 90-day season a healthy unit whose UA was served unreliable read
    #: +45 % and +41 % in two windows with one left out between them.
    ua_recent_data_s: int = 2 * 86_400
    #: UA's values join its growing baseline (``ua_baseline_grow_days``) once the thermal
    #: window's stretch beyond this has passed after them [s]: a leak shows fully in the fit
    #: only a thermal window after it began, and the values of its rise must not make its own
    #: baseline. At one-minute readings (a day's window) each joins at once, as before; at
    #: 5-minute instants a day later. On simulated fleets with known truth (seeds 201-210) the
    #: baseline rose 2-3 % with a leak's rise before its change reached the flag. Not with a
    #: window of ``ua_long_window_s`` or longer: from 15-minute instants a healthy unit's fit
    #: wanders by a quarter over a few days, and a baseline that held back two days of it sat
    #: 8 % below the unit's usual value (seed 203) and let one such wander raise a flag.
    ua_admit_window_s: int = 86_400
    #: Where the thermal window is this long or longer (15-minute instants and slower), UA's
    #: flag needs the change on ``ua_long_window_persist`` consecutive evaluations, a day of
    #: new readings, not two [s, -]. The windows then share most of their readings (66 of 72
    #: hours), so two in a row confirm little, and instants so far apart cannot tell warm
    #: goods put in from a leak by the thermostat's cycles: on a simulated healthy unit (seed
    #: 203, known truth) a busy day and a half read UA +55 % in three windows running and
    #: raised a leak flag. A leak is flagged 12 hours later; a false one is not raised. Only
    #: windows whose UA is served as reliable count towards it: 15-minute instants identify
    #: UA only where the module rests now and then, and another healthy unit of that seed,
    #: its UA served unreliable at ±38 %, read +50 % for a day and was flagged.
    ua_long_window_s: int = 3 * 86_400
    ua_long_window_persist: int = 4
    #: Where the thermal window is this long or longer (5-minute instants), once the unit's
    #: readings have pinned its UA (a window followed and served as reliable), only windows
    #: served as reliable count towards UA's flag [s]: a window its readings cannot pin
    #: (warm goods put in, a busy day) is not trusted to raise it. A unit whose windows never
    #: pin UA (a driver that shorts the module while off, a module that never rests) counts
    #: them all, as before, so that its leaks are still flagged. On simulated fleets with
    #: known truth, 5-minute instants: a healthy unit whose windows were not pinned for ten
    #: days read +44-47 % with two loads of warm goods and was flagged (held-out seed 303);
    #: with the rule, seasons of 90 days flagged 1 of 16 units, not 2 (seeds 301-304), the
    #: same 2 of 32 on seeds 201-208, and every leak, wear and fan failure of the detection
    #: fleets (seeds 201-206 and 301-306) was flagged when it was without the rule.
    ua_pinned_window_s: int = 2 * 86_400
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
    #: UA's baseline goes on taking in the unit's values for this long after its start [d]
    #: (the commissioning weeks; common practice, no source), unless its change reaches
    #: ``ua_flag_pct`` first: a few days' values share their weather and use, and one
    #: day's fit scatters by 10-15 %, so three days' median can sit 20 % from the unit's
    #: usual value. Till then changes are judged against the baseline so far.
    ua_baseline_grow_days: float = 14.0
    #: Change of the hot side's resistance against its baseline that raises its flag [%]
    #: (common practice, no source).
    r_hot_flag_pct: float = 50.0
    #: Least mean heat rejected over an hour for its hot-side resistance [W]. A cold night
    #: keeps a proportionally driven unit at a few watts, and a fan failing then raises the
    #: sink's rise just as much: below this the probe offsets, not the heat, set the error,
    #: and the estimate's own standard error says whether it is reliable (common practice,
    #: no source).
    r_hot_min_heat_w: float = 5.0
    #: A stretch of the hot side's resistance spans at least this many of the unit's usual
    #: reporting intervals, in whole hourly steps (an hour at one to five minutes, three
    #: hours at fifteen): the ratio of two integrals needs about a dozen samples of the
    #: on/off cycles it averages over (common practice, no source) [-].
    hot_side_intervals: int = 12
    #: Fewest sample pairs behind a stretch's resistance: ten, or this share of the usual
    #: intervals in the stretch where that is fewer (slow reporting; missed readings allowed
    #: for; common practice, no source) [-].
    hot_side_min_pair_share: float = 2.0 / 3.0
    cusum_allowance: float = 0.5  # [σ], Page (1954), Montgomery (from memory)
    #: Design ambient of the capacity figures when the registration gives none and the
    #: unit's own ambient is not known yet: the upper ambient of climate classes SN and N,
    #: 32 °C (ISO 15502 / IEC 62552; from memory) [°C].
    design_ambient_c: float = 32.0
    #: Otherwise the unit's own warm extreme: this percentile of its hourly mean ambient over
    #: the trailing ``design_ambient_days``, once ``design_ambient_min_hours`` hourly means are
    #: known. 99 % of hours is the 1 % cooling design condition of building services (ASHRAE
    #: Handbook—Fundamentals, climatic design conditions; from memory), here over a month of
    #: the unit's own air rather than years of weather [%, d, -].
    design_ambient_percentile: float = 99.0
    design_ambient_days: float = 30.0
    design_ambient_min_hours: int = 24
    #: A unit is losing its setpoint now when, on ``losing_setpoint_hours`` hours of the day
    #: or more, its cabinet's hourly mean sat ``losing_setpoint_k`` above the setpoint while
    #: its mean current was at ``losing_setpoint_drive`` of the day's largest: driven flat out
    #: and still warm. Door openings and warm goods recover within an hour or two (common
    #: practice, no source) [h, K, -].
    losing_setpoint_hours: float = 3.0
    losing_setpoint_k: float = 1.0
    losing_setpoint_drive: float = 0.95
    #: Setpoint assumed when a registration omits it [°C] (common practice, no source).
    default_setpoint_c: float = 5.0
    #: Uncertainty of the difference of two uncalibrated probes [K] (common practice, no source).
    probe_offset_k: float = 0.3
    #: Largest standard error of UA, probe offsets included, relative to UA, for the value to be
    #: served as reliable [-]: beyond a quarter, two standard errors span more than half the
    #: value (common practice, no source). Its changes are judged on the fit's own precision.
    ua_max_rel_se: float = 0.25
    #: The served UA is the median of the unit's window fits over this span [s]: one window's
    #: UA moves with its internal load along the one direction an indoor ambient hardly
    #: separates (diagnostics README, section 4), while UA itself changes slowly. On the full
    #: probe set, 7 days, the latest window's UA came within 15 % on 85.0 % of units on seeds
    #: 201-210 and 88.4 % on 301-314; the median over two days, 88.7 % and 92.9 % (one day:
    #: 86.3 %, 91.1 %; three: 87.5 %, 90.2 %). UA's changes and flags follow each window.
    ua_serve_span_s: int = 2 * 86_400
    #: Smallest share of the thermal window with the module at rest for the served K, UA and
    #: cold-side resistance to be reliable, and below which the thermal fit treats the window
    #: as one operating point [-] (see ``window.fit_window``; common practice, no source).
    min_rest_share: float = 0.05
    #: The unit's settled K: the median of its last ``k_hold_keep`` K values fitted from data,
    #: once there are ``k_hold_min_n`` [-]. K is held there at a single operating point (else
    #: at the rated prior), and the cabinet balance uses it in every window (common practice,
    #: no source).
    k_hold_min_n: int = 4
    k_hold_keep: int = 28
    #: Windows whose S the readings pinned before the heat balances use the unit's settled S
    #: (two days of them) [-]: a module that seldom shows its S (proportional drive) keeps the
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
    #: Threads of the linear-algebra library (BLAS) in each analysing process [-]. The fits'
    #: matrices are small (a window's rows by a handful of columns), where the library's
    #: threads cost more than they give: a least-squares solve of 1440 x 8 took 2.4 ms with
    #: its default threads and 0.22 ms with one on a loaded two-core machine, and a no-cold-probe
    #: fleet's analysis ran about ten times faster (measured, tests/bench/bench_diagnostics.py
    #: --part speed). Devices are analysed in parallel by ``workers`` instead.
    blas_threads: int = 1


def for_reporting(cfg: AnalysisSettings, interval_s: float, summarised: bool) -> AnalysisSettings:
    """``cfg`` for a unit reporting every ``interval_s`` [s]: the thermal window it needs
    (``thermal_min_intervals``; unchanged where the readings carry interval summaries), and
    the R25 precision a window needs to be followed.

    A window's R25 rests on its samples: readings ``interval_s`` apart give it 60/interval of
    the one-minute samples, and its standard error grows as the root of the interval's ratio
    (common practice, no source). So ``r25_max_rel_se``, set for one-minute readings, grows
    with it, up to half of ``r25_flag_pct``: at 5-minute instants without a cold-face probe
    the stated errors were 1.0-1.6 %, above the one-minute limit of 1 %, and on simulated
    fleets with known truth (seeds 201-210) 8 of 20 worn modules were flagged in time, 13 with
    the limit grown, with no flag on a healthy unit over 32 90-day seasons. On seeds held
    out from that work: 4 of 12, then 7, and one more healthy unit of 24 flagged in the
    detection fleets (R25 read +4.1 % for two days); none over 16 seasons."""
    if not interval_s > 0.0:
        return cfg
    r25_se = min(cfg.r25_max_rel_se * math.sqrt(interval_s / 60.0), cfg.r25_flag_pct / 200.0)
    cfg = dataclasses.replace(cfg, r25_max_rel_se=max(r25_se, cfg.r25_max_rel_se))
    if summarised:
        return cfg
    want = min(cfg.thermal_min_intervals * interval_s, cfg.thermal_window_max_s)
    if want <= cfg.thermal_window_s:
        return cfg
    step = cfg.window_s  # whole windows, so that windows keep lining up with the cadence
    return dataclasses.replace(cfg, thermal_window_s=int(math.ceil(want / step) * step))


def diagnostics_options(cfg: AnalysisSettings) -> dg.DiagnosticsOptions:
    """The diagnostics' options, with the ones this runner's settings expose taken from ``cfg``."""
    return dg.DiagnosticsOptions(
        on_current=cfg.on_current,
        probe_offset_k=cfg.probe_offset_k,
        min_rest_share=cfg.min_rest_share,
        hot_side_min_heat_j=cfg.r_hot_min_heat_w * cfg.step_s,
    )
