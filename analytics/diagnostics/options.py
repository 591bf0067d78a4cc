"""The tunables of the diagnostics: thresholds, priors and window shares, in one frozen object.

Every number has its unit and where it comes from: a published source, a measurement on
simulated fleets with known truth (the reasons are given beside the number), or "common
practice, no source". Change one with :func:`dataclasses.replace` on :data:`DEFAULT_OPTIONS`.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["DEFAULT_OPTIONS", "TYPICAL_MODULE_ZT", "DiagnosticsOptions"]

#: Effective ZT of commercial bismuth-telluride cooling modules near room temperature, used
#: only as a weak prior on K when a device has no registered ratings [-]. About 0.6-0.8
#: (from memory); 0.7 with a wide (50 %) prior spread.
TYPICAL_MODULE_ZT = 0.7


@dataclass(frozen=True)
class DiagnosticsOptions:
    """Thresholds, priors and window shares of the estimators (pure declarations).

    Shared by :func:`.flag_samples`, :func:`.detect_floating_driver`, :func:`.fit_electrical`,
    :func:`.harman_steps`, :func:`.fit_thermal` and :func:`.hot_side_resistance_ratios`; each
    reads the fields of its own topic and the shared ones (``on_current``, ``max_gap_s``,
    ``probe_offset_k``).
    """

    # --- shared -------------------------------------------------------------------------
    #: Current above which the module counts as on [A] (common practice, no source).
    on_current: float = 0.05
    #: Largest gap between two samples integrated across, or forming a switch-off step [s]:
    #: three one-minute samples (common practice, no source).
    max_gap_s: float = 180.0
    #: ... or this many of the series' usual intervals, where that is longer [-]: the same
    #: three samples at any reporting interval (common practice, no source). See
    #: :func:`.intervals.scaled_for_interval`.
    max_gap_intervals: float = 3.0
    #: Standard uncertainty of a constant offset between two uncalibrated probes, carried
    #: into R, S, K, UA and the hot side's resistance [K]: about 0.2-0.5 K (common practice,
    #: no source).
    probe_offset_k: float = 0.3

    # --- data quality (quality.py) ------------------------------------------------------
    #: Time after a switch before a sample counts as steady [s] (common practice, no source).
    settle_s: float = 600.0
    #: Time after a door opening still left out: the air exchange is a load the model does
    #: not describe [s] (common practice, no source).
    door_settle_s: float = 900.0
    #: Deviation from both neighbours that marks a spike [K] (common practice, no source).
    spike_k: float = 3.0

    # --- electrical fit (electrical.py) -------------------------------------------------
    #: Smallest |ΔT| that gives a usable ratio V/ΔT, for the floating-driver check and the
    #: switch-off steps [K] (common practice, no source).
    min_ratio_delta_t_k: float = 2.0
    #: Fewest on samples accepted by the electrical fit [-] (common practice, no source).
    min_on: int = 20
    #: Largest data-only relative standard error of R25 and S25 called reliable [-] (common
    #: practice, no source).
    electrical_max_rel_stderr: float = 0.01
    #: Standard uncertainty of a constant offset of the current reading, about one step of a
    #: 10 mA converter [A] (common practice, no source). It moves R by about
    #: current_offset / I_rms; R is marked unreliable where that exceeds twice
    #: ``electrical_max_rel_stderr`` (a few tenths of an ampere, as when a cold ambient leaves
    #: the module idling).
    current_offset: float = 0.01
    #: Standard uncertainty of a constant offset of the voltage reading, about one step of a
    #: 10 mV converter [V] (common practice, no source). With the ΔT offset it sets the prior
    #: of the offset term of the offset-free S.
    voltage_offset: float = 0.01
    #: Median |V| of off samples above which a unit without face probes is taken to let its
    #: module float [V]: three offsets of the voltage reading, since a zero-volt driver reads
    #: within its offset while an open module shows S·ΔT, tenths of a volt a few kelvin
    #: across a 127-couple stack (common practice, no source).
    floating_min_voltage: float = 0.03
    #: Span of the windows whose electrical rows are pooled for the served S [s]: S does not
    #: wear, and a week holds the ambient's daily and weather swings that move the operating
    #: point enough to separate S from R and the readings' offsets (common practice, no
    #: source). Chosen against simulated fleets with known truth (seeds 201-210): one window
    #: left S at the ratings on most zero-volt and proportional drivers.
    seebeck_pool_s: float = 7 * 86_400.0

    #: One step of the voltage reading, 10 mV (common practice, no source) [V]: the mean of a
    #: quantised reading is known to no better than step/√12.
    voltage_step: float = 0.01

    # --- probe offsets (probe_offsets.py) -----------------------------------------------
    #: Least time without current before a rest's samples count [s]: the faces and the
    #: cabinet air (a few hundred J/K on a few W/K) settle within minutes, the contents are
    #: regressed on their drift (common practice, no source).
    rest_min_s: float = 2 * 3600.0
    #: Sub-blocks of a rest over which the cabinet's drift and the probes' differences are
    #: averaged [s]: two hours pin the drift to about 0.01 K/h with 0.1-K readings every minute
    #: (least-squares slope error from the readings' scatter; common practice, no source).
    rest_sub_s: float = 2 * 3600.0
    #: Fewest sub-blocks for a rest to count [-]: half a day (common practice, no source).
    rest_min_sub: int = 6
    #: Largest standard error of a probe's offset from one rest for it to count [K]: a third
    #: of the offsets' prior (common practice, no source).
    rest_settle_k: float = 0.1
    #: Largest offset a rest may show [K]: beyond it the stretch is no lumped relaxation
    #: (three times the offsets' prior; common practice, no source).
    rest_spread_k: float = 1.0
    #: Standard uncertainty added to every difference of two probes after their offsets are
    #: estimated [K]: a probe's error changes by about 0.1 K between the rest's ambient and
    #: the faces' working temperatures (common practice, no source). Against simulated fleets
    #: with known truth (constant biases) the stated errors of R25, K and the hot side's
    #: resistance otherwise covered their true errors on 64-90 % of units, not 90-100 %.
    offset_floor_k: float = 0.1
    #: Least standard error of a probe's rest difference [K]: one 0.1-K step over √12 (common
    #: practice, no source).
    rest_floor_k: float = 0.03

    # --- sink balances (sinks.py) -------------------------------------------------------
    #: Segment length of the sink balances [s] (common practice, no source).
    segment_s: float = 900.0
    #: ... or this many usual intervals, where that is longer [-]: a segment keeps several
    #: sample pairs at slow reporting (common practice, no source).
    segment_intervals: float = 6.0
    #: Fewest complete sink segments accepted [-] (common practice, no source).
    min_segments: int = 8
    #: Sample pairs closer than this after a switch are left out of the sink balances [s]; 0
    #: keeps all. Worth setting (to a few sink time constants) when the sinks store heat
    #: (common practice, no source).
    switch_guard_s: float = 0.0
    #: K is held at its prior when fewer than this share of the usable samples have the
    #: module at rest and the segments' mean currents span less than
    #: ``min_current_spread``: a single operating point [-] (common practice, no source).
    min_rest_share: float = 0.05
    #: Span of the segments' mean currents, as a share of the median one, below which a
    #: module that never rests is at one operating point [-] (common practice, no source).
    min_current_spread: float = 0.5
    #: Largest sink time constant (heat capacity over conductance), as a share of the median
    #: sampling interval, for the faces to count as followed where the module switches
    #: often [-]. Against simulated fleets with known truth (150-4000 J/K sinks, cycles of a
    #: few minutes) K fitted beyond it came out 20-80 % low and UA up to 2.7x; massless faces
    #: fit to under a second.
    max_sink_tau_share: float = 1.0 / 6.0
    #: A sink's time constant counts where it exceeds this many of its standard errors [-]
    #: (common practice, no source).
    sink_c_sigmas: float = 3.0
    #: Fewest on/off switches per hour, on average over the window, for the sinks' time
    #: constants to be judged [1/h]: on simulated fleets with known truth a thermostat
    #: switched over 5/h, a proportional drive that rests now and then under 1.5/h.
    min_switches_per_h: float = 2.0
    #: K is held only where the number of switches times the slow sink's time constant also
    #: exceeds this share of the window [-]: on simulated coolers with 150/300 J/K sinks K
    #: came within 1 % up to 0.15 (runs of four samples between switches) and 15-35 % off
    #: from 0.20 (runs of three).
    max_transient_share: float = 0.15

    # --- cabinet balance (cabinet.py) ---------------------------------------------------
    #: Block length of the cabinet balance [s]: an hour averages over the thermostat cycles
    #: (common practice, no source).
    cabinet_block_s: float = 3600.0
    #: ... or this many usual intervals, where that is longer [-]: an hour's twelve samples at
    #: 5-minute reporting, three hours at 15-minute (common practice, no source).
    block_intervals: float = 12.0
    #: Whether releases of warm goods' heat are fitted in the cabinet balance [-]
    #: (:func:`.cabinet.release`) ...
    warm_goods_releases: bool = True
    #: ... up to this usual interval of single readings [s]; with interval summaries at any
    #: interval. Block sums of an on/off drive sampled every 5 minutes scatter by a good part
    #: of the heat pumped, and releases found in that scatter moved UA either way: on
    #: simulated fleets with known truth, 90-day seasons at 5-minute instants flagged the
    #: same 2 of 32 healthy units, a 16-unit held-out set one cured and one new, and a
    #: held-out detection fleet one new false flag.
    releases_max_interval_s: float = 120.0
    #: Prior (mean [W], standard deviation [W]) of the heat released inside the cabinet by
    #: its inner fan and electronics: about 1 W ± 1 W for small thermoelectric cabinets
    #: (common practice, no source). Without it UA and a constant internal load cannot be
    #: told apart while the ambient hardly changes.
    q_internal_prior: tuple[float, float] = (1.0, 1.0)
    #: A warm spell is the cabinet air more than this above its usual low (10th percentile of
    #: the window) [K] (common practice, no source).
    warm_spell_k: float = 3.0
    #: ... for at least this long [s] (common practice, no source).
    warm_spell_min_s: float = 1800.0
    #: Time after a warm spell still left out of the cabinet balance, while the contents give
    #: back the heat they took: about three time constants of a few hours [s] (common
    #: practice, no source).
    recovery_s: float = 12 * 3600.0
    #: A warm spell through which the module ran at least this share of the time is the
    #: cooling at its limit, not cooling lost: it stays in, with the contents node [-]. Left
    #: out, a UA fitted to the remaining hours came out tens of per cent high against
    #: simulated fleets with known truth.
    saturated_share: float = 0.9
    #: Time constants tried for the contents node of a module that never rests, or of a
    #: window with a warm spell at the cooling's limit [s] (common practice, no source).
    contents_tau_s: tuple[float, ...] = (3600.0, 7200.0, 14400.0, 28800.0, 57600.0)
    #: Largest relative standard error of UA (from the fit's scatter) called reliable [-]
    #: (common practice, no source).
    ua_max_rel_stderr: float = 0.15
    #: Largest relative standard error of the cabinet's heat capacity called reliable [-]
    #: (common practice, no source).
    c_max_rel_stderr: float = 0.3

    # --- hot side's hourly resistance (hot_side.py) -------------------------------------
    #: Least heat rejected over a stretch for a usable ratio [J]: 10 W over an hour (common
    #: practice, no source).
    hot_side_min_heat_j: float = 3.6e4
    #: Fewest sample pairs in a stretch for its ratio [-] (common practice, no source).
    hot_side_min_pairs: int = 10
    #: Largest relative standard error of a stretch's resistance called reliable [-] (common
    #: practice, no source).
    hot_side_max_rel_stderr: float = 0.2
    #: Where the faces are not followed, a stretch counts as locked to the sampling when this
    #: share of its sample pairs a few intervals apart (2-6) agree on the module's state [-]:
    #: lower than the cabinet balance's 0.95, since partly locked hours bias it too (one
    #: simulated hour at 0.9 read +51 %).
    locked_match: float = 0.9

    # --- the module as its own thermometer (module_thermometer.py) ----------------------
    #: Median |V| of off samples above which a driver counts as floating where no face probe
    #: gives ΔT: five steps of a 10 mV converter, against the tenths of a volt an idle
    #: module's few kelvin show (common practice, no source) [V].
    min_floating_voltage: float = 0.05
    #: Fewest switch-off steps behind a resistance without face probes [-] (common practice,
    #: no source).
    min_steps: int = 5
    #: A step is left out where the hot probe jumps across it by more than this many times
    #: its change over the next interval (plus ``step_jump_floor_k``): faces that follow the
    #: current within a sample make ΔT discontinuous at the step [-] (common practice, no
    #: source).
    step_jump_ratio: float = 4.0
    #: Allowance for the probe's reading step in that test [K]: three 0.1 K steps (common
    #: practice, no source).
    step_jump_floor_k: float = 0.3
    #: Without face probes the steps count only where the open-circuit voltage falls over the
    #: first interval after a switch-off (median over steps) by more than this many times what
    #: the cabinet's and ambient's drift explains, S·|δ(Ta - Tcab)|: faces that hold heat
    #: relax over minutes, faces without heat capacity jump at the switch. Simulated units
    #: (one-minute samples) gave 0.75 without sink heat capacity and 8-14 with sinks of
    #: 150/600 and 500/1500 J/K [-].
    step_decay_min_ratio: float = 3.0
    #: Range of the hot sink's resistance over the cold sink's, r_hot/r_cold, behind the
    #: module's mean temperature where no face is probed: the hot sink carries the cold
    #: side's heat plus the electrical power, commonly two to four times as much, and is sized
    #: with a fan-forced fin array to match, so it is usually the smaller (common practice, no
    #: source) [-].
    sink_ratio_range: tuple[float, float] = (0.25, 1.0)
    #: Largest relative standard error of the steps' R25 called reliable [-] (common
    #: practice, no source).
    step_r_max_rel_stderr: float = 0.02
    #: Relative spread of the Seebeck coefficient between units of one type, carried where S
    #: is taken from the registered ratings to read ΔT from the voltage: a few per cent
    #: (common practice, no source) [-].
    seebeck_unit_rel_sd: float = 0.03
    #: Largest residual standard deviation of the cold face's steady balance for its R25 to
    #: count (:func:`.module_thermometer.balance_resistance`): the voltage's and current's
    #: reading steps alone read ΔT to a few tenths of a kelvin; sinks that store heat leave
    #: kelvins (common practice, no source) [K].
    balance_max_residual_k: float = 1.0
    #: Largest relative change of R25 per day the cold face's balance allows across its
    #: window (:func:`.module_thermometer.balance_resistance`): a module that wears gains a
    #: few per cent over weeks, the simulated bench's fastest 10 % over 14 days, 0.7 %/day;
    #: five per cent a day leaves room without letting the drift stand in for a constant
    #: (common practice, no source) [1/day].
    balance_max_drift_per_day: float = 0.05


#: The options as measured and documented; the default of every estimator.
DEFAULT_OPTIONS = DiagnosticsOptions()
