"""Thresholds of the alert rules: storage profiles, the policy and its overrides.

Every number carries its unit and its source, or "common practice, no source" where it is an
engineering choice. Overrides per site and per device come from the ``alert_policies`` table.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from tecfleet.analytics.alerts.constants import MKT_ACTIVATION_J_PER_MOL
from tecfleet.analytics.errors import AlertError

__all__ = ["PROFILES", "AlertPolicy", "Band", "policy_for"]


@dataclass(frozen=True)
class Band:
    """Cabinet band of a storage profile [°C]; ``critical_*`` None means none."""

    low_c: float
    high_c: float
    critical_low_c: float | None
    critical_high_c: float | None
    source: str


PROFILES: dict[str, Band] = {
    # 2-8 °C for refrigerated medicines and vaccines: WHO TRS 961 Annex 9 (model guidance for
    # storage and transport of time- and temperature-sensitive pharmaceutical products) and
    # national cold-chain guidance; freeze limit -0.5 °C as in WHO PQS freeze alarms (from
    # memory). Always subordinate to the maker's labelled storage conditions.
    "medicine": Band(
        2.0, 8.0, -0.5, None, "WHO TRS 961 Annex 9, 2-8 °C; freeze ≤ -0.5 °C (from memory)"
    ),
    # Chilled food: keep at 5 °C or below (UK Food Standards Agency advice), 8 °C legal
    # ceiling for chill holding in England (Food Safety and Hygiene (England) Regulations 2013,
    # Sch. 4; from memory). Low bound -1 °C against freezing produce: common practice, no source.
    # Enclosure coolers for electronics: band 5-35 °C (common practice, no source).
    "enclosure": Band(5.0, 35.0, None, 45.0, "enclosure band 5-35 °C (common practice, no source)"),
    "food": Band(
        -1.0, 5.0, None, 8.0, "UK FSA ≤ 5 °C advice; 8 °C legal chill limit (from memory)"
    ),
}


@dataclass(frozen=True)
class _Thresholds:
    """The thresholds of every rule, as declarations. Times in seconds, temperatures in °C,
    differences in K.

    Sources are given per field; "common practice, no source" marks an engineering choice.
    """

    #: Storage profile for the cabinet band: "medicine" or "food" (see PROFILES).
    profile: str = "medicine"
    #: Explicit band [°C]; None takes the device registration, else the profile.
    low_limit_c: float | None = None
    high_limit_c: float | None = None
    #: Out of band this long before an alert [s] (door openings recover sooner; common
    #: practice, no source).
    excursion_delay_s: float = 1800.0
    #: ... and at least this many of the unit's usual reporting intervals [-]: a unit that
    #: reports every 30 minutes or more has then shown the cabinet out of band in three
    #: readings running, not one door opening caught by chance (common practice, no source).
    #: At one to fifteen minutes the 30 minutes are the longer.
    excursion_delay_intervals: float = 2.0
    #: Cumulative time out of band in one spell that makes it critical: 10 h, the WHO PQS
    #: 30-day recorder heat alarm (+8 °C for 10 h; from memory) [s].
    excursion_critical_s: float = 36_000.0
    #: A unit commissioning (pulling down to its band for the first time, or after a
    #: maintenance window that left it warm) and not yet in its band this long after it
    #: began gets a pull-down-overdue alert [s]. Thermoelectric cabinets pull down from room
    #: temperature to 2-8 °C in one to several hours, slower than compressor units; half a
    #: day without reaching the band means the unit cannot (common practice, no source).
    pull_down_limit_s: float = 12 * 3600.0
    #: Window of time-in-range and mean kinetic temperature in the evidence [s] (common
    #: practice, no source).
    mkt_window_s: float = 86_400.0
    #: Activation energy of the MKT [J/mol], USP <1079> (from memory).
    mkt_activation_j_per_mol: float = MKT_ACTIVATION_J_PER_MOL
    #: Offline after this many usual intervals without a reading [-], and at least
    #: offline_min_s [s]; critical after offline_critical_s [s] (common practice, no source).
    offline_factor: float = 5.0
    offline_min_s: float = 600.0
    offline_critical_s: float = 4 * 3600.0
    #: ... and at least this many times the offline threshold: a unit reporting hourly or
    #: slower is offline after five hours and critical no sooner than twice that (common
    #: practice, no source) [-].
    offline_critical_factor: float = 2.0
    #: Hot side limits: most Bi2Te3 modules are soldered for 80 °C continuous hot side
    #: (datasheet-typical; common practice, no source); 70 °C warns early [°C]. An open alert
    #: holds until 3 K [K] below the warning; 5 min [s] above it before an alert (common
    #: practice, no source).
    over_temperature_warning_c: float = 70.0
    over_temperature_critical_c: float = 80.0
    over_temperature_hysteresis_k: float = 3.0
    over_temperature_delay_s: float = 300.0
    #: Condensation: t_cold below the ambient dew point by more than margin_k for delay_s.
    #: Judge condensation at all: None means only for the "enclosure" profile. A fridge's
    #: cold sink sits below the room's dew point by design and drains what condenses there;
    #: in an electronics enclosure the same water lands on the electronics. Margins [K] and
    #: delay [s]: common practice, no source.
    condensation_check: bool | None = None
    condensation_margin_k: float = 0.0
    condensation_critical_k: float = 2.0
    condensation_hysteresis_k: float = 0.5
    condensation_delay_s: float = 1800.0
    #: Without a cold-face probe the cabinet air bounds the face from above while the module
    #: is driven with more than this current [A] (a module at rest pumps nothing; common
    #: practice, no source).
    condensation_cooling_a: float = 0.1
    #: Sensor faults (common practice, no source): delay [s]; a channel frozen over
    #: stuck_window_s [s] (stuck_window_intervals usual intervals [-] where longer, below)
    #: while another moves stuck_other_move_k [K]; spike_count spikes of
    #: spike_k [K] in an hour; a dropout_fraction [-] of the hour's samples missing; the cold
    #: side impossible_margin_k [K] warmer than the cabinet at impossible_current_fraction [-]
    #: of the rated current for impossible_on_s [s].
    sensor_delay_s: float = 900.0
    stuck_window_s: float = 3600.0
    #: ... and at least this many equal readings in the window [-]: a probe at 0.1 K
    #: resolution reads the same in a handful of readings of a steady room (common practice,
    #: no source).
    stuck_min_samples: int = 10
    #: The frozen window is at least this many of the unit's usual reporting intervals [-]:
    #: a slow-reporting unit must show as many equal readings as a steady probe at 0.1 K
    #: resolution cannot. Healthy simulated units (seeds 201-210, 30 days) held a cabinet,
    #: ambient or cold-face reading unchanged, while another channel moved 0.5 K, over 12
    #: and 16 fifteen-minute readings and 12 five-minute ones; over 24, never (values this code
    #: produced on the simulator). At one and two minutes the hour is the longer.
    stuck_window_intervals: float = 24.0
    stuck_other_move_k: float = 0.5
    #: The hot face's probe frozen while the module's current stepped by
    #: ``stuck_driven_step_a`` [A] ``stuck_driven_steps`` times [-] is stuck over a shorter
    #: window: the longer of ``stuck_window_s`` and ``stuck_driven_intervals`` usual
    #: intervals [-], holding at least ``stuck_driven_min_samples`` readings [-]. An amp more
    #: through a 127-couple module (S about 0.05 V/K, from memory) gives off some 15 W more at
    #: the hot face, kelvin through a 0.1-0.3 K/W sink (common practice, no source). Healthy
    #: simulated units (seeds 201-210, 14 days, 5 and 15 minutes) never held a hot-face
    #: reading across such a step, not even for two readings, while the cold face held one
    #: across a door opening's step for four (values this code produced on the simulator,
    #: tests/bench/bench_alerts.py).
    stuck_driven_step_a: float = 1.0
    stuck_driven_steps: int = 1
    stuck_driven_intervals: float = 6.0
    stuck_driven_min_samples: int = 5
    spike_k: float = 8.0
    spike_count: int = 3
    dropout_fraction: float = 0.3
    impossible_margin_k: float = 2.0
    impossible_current_fraction: float = 0.5
    impossible_on_s: float = 1800.0
    #: Cabinet probe against the cold side's heat balance (common practice, no source): the
    #: offset of t_cabinet − t_cold from r_cold·Qc, fitted over the first ``drift_baseline_s``
    #: of a unit's readings, is tracked as a median over ``drift_window_s`` of running samples
    #: (current above ``drift_min_current_a``, at least ``drift_min_samples`` of them); a
    #: change of ``drift_warning_k`` [K] is a sensor fault. Healthy simulated units stay within
    #: 0.2 K of their baseline over two weeks of weather, worn modules and warm days included
    #: (values this code produced on the simulator, tests/bench/bench_alerts.py).
    #: Times [s], current [A], samples [-], warning [K].
    drift_baseline_s: float = 2 * 86_400.0
    drift_window_s: float = 12 * 3600.0
    drift_min_current_a: float = 0.1
    drift_min_samples: int = 60
    drift_warning_k: float = 1.0
    #: The commissioning fit needs this many running samples [-] (five hours of running at
    #: one reading a minute; common practice, no source).
    drift_baseline_min_samples: int = 300
    #: Both sample counts are for one-minute reporting: at a slower usual interval they ask
    #: for the same running time (an hour in the window, five in the commissioning fit), so
    #: a unit reporting every 15 minutes needs a fifteenth of them, and at least this many
    #: [-]. At 5 and 15 minutes the healthy simulated units stay within 0.3 K of their
    #: baseline (seeds 201-210, 14 days; values this code produced on the simulator,
    #: tests/bench/bench_alerts.py).
    drift_min_samples_floor: int = 8
    #: Running samples whose hot-to-cold difference exceeds the commissioning's largest by
    #: more than this [K] are not judged: the balance from the module's ratings is trusted
    #: where it was fitted, and a failed hot-side fan or a pull-down after a power cut drives
    #: the module far beyond that (common practice, no source). Healthy simulated units stay
    #: within it (seeds 201-210; values this code produced on the simulator).
    drift_dt_margin_k: float = 5.0
    #: Module wear on R25 change: +10 % as end of useful life (common practice, no source),
    #: warning from +5 % or when the limit is under wear_days_warning days away at a rise
    #: whose 95 % confidence interval lies above zero: the days left extrapolate the slope,
    #: which says nothing while the interval still holds no rise at all. Levels [%], days [d].
    wear_warning_pct: float = 5.0
    wear_limit_pct: float = 10.0
    wear_days_warning: float = 30.0
    #: Cabinet UA rise (door seal, insulation): common practice, no source. The warning
    #: level is the diagnostics' own UA change flag (35 %): below it a day's UA fit on a
    #: healthy unit wanders that far with use and weather. The rise must also hold over
    #: ``heat_leak_persist_s`` of consecutive estimates (two or more 6-hourly fits). Levels
    #: [%], persistence [s].
    heat_leak_warning_pct: float = 35.0
    heat_leak_critical_pct: float = 60.0
    heat_leak_persist_s: float = 12 * 3600.0
    #: Hot-side thermal resistance rise (fan, fins, dust) [%]: common practice, no source.
    hot_side_warning_pct: float = 50.0
    hot_side_critical_pct: float = 100.0
    #: Capacity margin at the design ambient below which a warning goes out, as a fraction of
    #: the unit's maximum cooling there: coolers are sized with 10-20 % headroom over the heat
    #: load (common practice, no source), so under 10 % a warm day or a worn part tips it over.
    #: A fixed watt figure would fire on small carriers that are fine (2 W is 15 % of 13 W)
    #: [-, fraction].
    capacity_warning_fraction: float = 0.10
    #: Optional absolute floor [W]: also warn below this margin (0 turns it off).
    capacity_warning_w: float = 0.0
    #: The daily capacity figure is judged on the median of this many consecutive daily
    #: estimates (a working week of use and weather), so a few days of noisy UA or sink
    #: fits do not raise it (common practice, no source) [-, days].
    capacity_persist: int = 5
    #: Hysteresis on percentage rules [percentage points] (common practice, no source).
    trend_hysteresis_pct: float = 2.0
    #: Estimates are judged only once the readings behind them are this old, so that the
    #: sensor rule (a frozen channel shows only over ``stuck_window_s``) has seen them first
    #: [s] (common practice, no source).
    trend_settle_s: float = 2700.0
    #: ... and at least this many of the unit's usual reporting intervals [-]: the frozen
    #: window grows to ``stuck_window_intervals`` of them at slow reporting, and the settle
    #: keeps the same three quarters of it as the 45 minutes of the hour (common practice,
    #: no source). At one and two minutes the 45 minutes are the longer.
    trend_settle_intervals: float = 18.0
    #: After a sensor fault on a temperature, current or voltage channel clears, estimates
    #: stay suspect this long: the cabinet fit spans a day and change figures take the
    #: median of the last day (see tecfleet.analytics.runner) [s].
    sensor_taint_after_s: float = 2 * 86_400.0
    #: While a reading condition builds up, returns inside the limit shorter than this do not
    #: restart its clock: the delay counts cumulative time out of range, so a cabinet hovering
    #: at its limit (probe noise, thermostat cycles) is still caught (common practice, no
    #: source) [s].
    entry_bridge_s: float = 600.0
    #: Clear for this long before auto-resolve (readings / estimates) [s] (common practice,
    #: no source).
    clear_s: float = 1800.0
    estimate_clear_s: float = 86_400.0
    #: A condition back within this time reopens the resolved alert [s]: a day and a half, so
    #: that what comes back every afternoon (a hot side on a warm room's peak, a cabinet that
    #: leaves its band at the day's warmest hour) is one alert that reopens, whatever hour the
    #: spell ends, and not a new alert a day (common practice, no source).
    reopen_window_s: float = 36 * 3600.0
    #: The same for the alerts judged on the diagnostics' trends (wear, heat leak, hot side,
    #: capacity): their figures move a day at a time, and a leak or a worn module that dips
    #: under its threshold for a day is still the same fault (common practice, no source) [s].
    estimate_reopen_window_s: float = 7 * 86_400.0
    #: A symptom alert joins the incident of a cause alert (see tecfleet.analytics.alerts
    #: .incidents) that is open or resolved less than this long before it opened: a day, the
    #: span of the daily fits the cause alerts are judged on, so the cause's figures lag the
    #: readings by up to that much (common practice, no source) [s].
    incident_link_s: float = 86_400.0
    #: Grouped notice when at least this many devices of one site open one kind within the
    #: window [s] (a site power cut); common practice, no source.
    group_min_devices: int = 3
    group_window_s: float = 900.0


@dataclass(frozen=True)
class AlertPolicy(_Thresholds):
    """Thresholds of every rule (fields and their sources: see ``_Thresholds``). Times in
    seconds, temperatures in °C, differences in K."""

    def __post_init__(self) -> None:
        if self.profile not in PROFILES:
            raise AlertError(f"profile must be one of {', '.join(PROFILES)}, got {self.profile!r}")

    def with_overrides(self, overrides: Mapping[str, Any]) -> AlertPolicy:
        """A copy with ``overrides`` applied; unknown names or wrong types raise AlertError."""
        fields = {f.name: f for f in dataclasses.fields(self)}
        clean: dict[str, Any] = {}
        for name, value in overrides.items():
            if name not in fields:
                raise AlertError(f"unknown threshold {name!r}")
            clean[name] = _checked(name, value, getattr(self, name))
        return dataclasses.replace(self, **clean)

    def band(self, cabinet: Mapping[str, Any] | None) -> Band:
        """Cabinet band: policy limits, else the registration's, else the profile's."""
        base = PROFILES[self.profile]
        cab = cabinet or {}
        low = self.low_limit_c if self.low_limit_c is not None else cab.get("low_limit_c")
        high = self.high_limit_c if self.high_limit_c is not None else cab.get("high_limit_c")
        return Band(
            float(low) if low is not None else base.low_c,
            float(high) if high is not None else base.high_c,
            base.critical_low_c,
            base.critical_high_c,
            base.source,
        )


def _checked(name: str, value: Any, current: Any) -> Any:
    """An override's value of the threshold's type; AlertError when it cannot be one."""
    if name == "profile":
        if not isinstance(value, str):
            raise AlertError("profile must be a string")
    elif name == "condensation_check":
        if value is not None and not isinstance(value, bool):
            raise AlertError("condensation_check must be true, false or null")
    elif value is None and name in ("low_limit_c", "high_limit_c"):
        pass
    elif isinstance(value, bool) or not isinstance(value, int | float):
        raise AlertError(f"threshold {name!r} must be a number")
    elif isinstance(current, int) and not isinstance(current, bool):
        value = int(value)
    else:
        value = float(value)
    return value


def policy_for(
    base: AlertPolicy,
    overrides: Mapping[tuple[str, str], Mapping[str, Any]],
    device_id: str,
    site: str | None,
) -> AlertPolicy:
    """Fleet defaults, then the site's overrides, then the device's."""
    p = base
    if site is not None and ("site", site) in overrides:
        p = p.with_overrides(overrides[("site", site)])
    if ("device", device_id) in overrides:
        p = p.with_overrides(overrides[("device", device_id)])
    return p
