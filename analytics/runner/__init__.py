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

Estimate keys (``estimates.key``; value, stderr, n, reliable, note, basis; at_ms = step end).
``basis`` names what the estimate rests on (the fit or balance, and whether the face
temperatures come from probes or from the module's voltage). A unit without a face probe
(``t_cold``/``t_hot`` never reported) is analysed on the samples whose faces are known;
where none are (a zero-volt driver, or no face temperature from the voltage yet), R25, S and
UA are stored with no value, not reliable, and the reason in ``note``, and
``quality.faces_unknown`` counts the usable samples without face temperatures:

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
cabinet.ua_w_per_k                             UA [W/K]: the median of the window fits' UA over
                                               the last ua_serve_span_s (2 days), its stderr
                                               the median of theirs; reliable where at least
                                               half of them were
cabinet.ua_window_w_per_k                      this window's own UA [W/K]; stderr includes
                                               probe offsets (they cancel in its change, which
                                               is tracked); not reliable when that stderr
                                               exceeds ua_max_rel_se or the module never rested
cabinet.heat_leak_w                            UA·(Ta - Tcab) over the window's last hour, at
                                               the served UA [W]
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
capacity.holdable / margin_w / max_cooling_w   setpoint capacity at the design ambient, with
                                               the fitted internal load (daily)
capacity.heat_load_w                           heat load at setpoint and design ambient [W]
capacity.design_ambient_c                      the design ambient used [°C]: the registration's
                                               ``cabinet.design_ambient_c``, else a percentile
                                               of the unit's hourly mean ambient over the
                                               trailing days, else the fleet default
capacity.design_ambient_basis                  which: 1 registration, 2 own ambient, 0 default
capacity.losing_setpoint (_h)                  1 when the cabinet sat above its setpoint while
                                               driven flat out for hours of the day (and the
                                               hours) [-, h]
<q>.baseline                                   commissioning baseline (median of first days)
<q>.change_pct                                 recent value against baseline [%]
<q>.cusum                                      Page's upper CUSUM on standardised values [σ]
<q>.flag                                       1 when change_pct reaches its threshold, else 0
<q>.slope_pct_per_30d (+ _low / _high)         Theil-Sen slope of daily medians, 95 % CI (daily)
module.days_to_wear_limit                      days until R25 reaches the wear limit (daily)
probes.offset_cabinet_k / _cold_k / _hot_k     the probe's offset from the ambient probe [K],
                                               from rests and the open-circuit voltage (note:
                                               the basis); temperatures are corrected by it
probes.cabinet_shift_k                         without a cold-face probe: the cabinet probe's
                                               shift against the cold face a floating module's
                                               open-circuit voltage gives [K]; UA flags only
                                               within cabinet_shift_max_k, judged within
                                               cabinet_check_keep_s
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

Layout: :mod:`.settings` (tunables), :mod:`.schedule` (a run over devices), :mod:`.device`
(one device's steps), :mod:`.window` (the 6-hourly fits), :mod:`.hot_side` (hourly),
:mod:`.daily` (slopes, capacity), :mod:`.offsets` (the probes' offsets carried from window to
window), :mod:`.tracks` (baselines, changes, flags), :mod:`.settled`
(the unit's settled values), :mod:`.state` (the carried state), :mod:`.data` (readings and
priors), :mod:`.rows` (estimate rows), :mod:`.health` (what is served). Stored data goes
through :mod:`tecfleet.ingest.db.analysis`.
"""

from tecfleet.analytics.runner.health import estimate_history, latest_health
from tecfleet.analytics.runner.schedule import AnalysisReport, analyze
from tecfleet.analytics.runner.settings import AnalysisSettings

__all__ = [
    "AnalysisReport",
    "AnalysisSettings",
    "analyze",
    "estimate_history",
    "latest_health",
]
