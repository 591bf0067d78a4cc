"""Alert rules and their lifecycle, evaluated on event time.

Each rule is a pure function from readings (or stored estimates) to a per-sample
*observation*: is the condition present, how bad (warning or critical), and the value whose
peak matters. A small state machine per device and kind turns observations into alerts:

* a condition must hold for ``open_after`` before an alert opens (no alert for a door opening);
* while open, a looser "hold" test applies (hysteresis), and the alert resolves only once the
  condition has been clear for ``clear_after``;
* severity only rises within a spell (no flapping between warning and critical);
* one alert per device and kind is open at a time; a condition returning within
  ``reopen_window_s`` of resolving (``estimate_reopen_window_s`` for the trend kinds) reopens
  the same alert and counts the reopen.

Everything runs on the readings' own timestamps. Per device, ``alert_progress`` keeps the time
of the last evaluated reading and each rule's timers, so each call reads only new readings
(plus a fixed look-back for windowed features) and the same history gives the same alerts
whether it arrives live or as a backfill. Alert changes, their audit rows and their
notifications (the outbox drained by :class:`tecfleet.api.notify.Notifier`) are written in one
transaction.

Default thresholds live in :class:`AlertPolicy`, each with its source or marked as common
practice. Overrides per site and per device come from the ``alert_policies`` table.

Cautions: these alerts support, and do not replace, the monitoring that medicines, vaccines,
samples or food require. Storage of medicines follows the maker's instructions, local
regulations and licensed practice; an excursion alert is a prompt to assess the stock against
them, not a verdict on it. Condensation near electronics needs a qualified person's judgement
under local electrical codes.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import sqlalchemy as sa
from numpy.typing import NDArray
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.analytics import physics
from tecfleet.analytics.errors import AlertError
from tecfleet.analytics.psychrometrics import dew_point
from tecfleet.ingest import db
from tecfleet.ingest.errors import NotFoundError, StoreError

__all__ = [
    "KINDS",
    "PROFILES",
    "SEVERITIES",
    "AlertChange",
    "AlertError",
    "AlertPolicy",
    "Band",
    "Observations",
    "acknowledge",
    "active_maintenance",
    "condensation_observations",
    "evaluate",
    "excursion_observations",
    "mean_kinetic_temperature",
    "offline_observations",
    "over_temperature_observations",
    "policy_for",
    "sensor_fault_observations",
]

KINDS = (
    "excursion",
    "offline",
    "sensor_fault",
    "module_wear",
    "heat_leak",
    "hot_side_cooling",
    "condensation_risk",
    "over_temperature",
    "capacity_shortfall",
)
SEVERITIES = ("info", "warning", "critical")
OPEN_STATES = ("open", "acknowledged")
T0 = 273.15
MS_MIN = 60_000
MS_HOUR = 3_600_000
MS_DAY = 86_400_000
#: Gas constant [J/(mol·K)] (CODATA 2018: 8.314462618).
GAS_CONSTANT = 8.314462618
#: Activation energy of USP <1079> mean kinetic temperature, 83.144 kJ/mol, so that
#: ΔH/R = 10 000 K with R = 8.3144 J/(mol·K) (USP <1079>; from memory).
MKT_ACTIVATION_J_PER_MOL = 83_144.0
MKT_GAS_CONSTANT = 8.3144


# ---------------------------------------------------------------------------
# Policy
# ---------------------------------------------------------------------------


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
class AlertPolicy:
    """Thresholds of every rule. Times in seconds, temperatures in °C, differences in K.

    Sources are given per field; "common practice, no source" marks an engineering choice.
    """

    #: Storage profile for the cabinet band: "medicine" or "food" (see PROFILES).
    profile: str = "medicine"
    #: Explicit band [°C]; None takes the device registration, else the profile.
    low_limit_c: float | None = None
    high_limit_c: float | None = None
    #: Out of band this long before an alert (door openings recover sooner; common practice).
    excursion_delay_s: float = 1800.0
    #: Cumulative time out of band in one spell that makes it critical: 10 h, the WHO PQS
    #: 30-day recorder heat alarm (+8 °C for 10 h; from memory).
    excursion_critical_s: float = 36_000.0
    #: Window of time-in-range and mean kinetic temperature in the evidence (common practice).
    mkt_window_s: float = 86_400.0
    #: Activation energy of the MKT [J/mol], USP <1079> (from memory).
    mkt_activation_j_per_mol: float = MKT_ACTIVATION_J_PER_MOL
    #: Offline after this many usual intervals without a reading, and at least offline_min_s.
    offline_factor: float = 5.0
    offline_min_s: float = 600.0
    offline_critical_s: float = 4 * 3600.0
    #: Hot side limits: most Bi2Te3 modules are soldered for 80 °C continuous hot side
    #: (datasheet-typical; common practice, no source); 70 °C warns early.
    over_temperature_warning_c: float = 70.0
    over_temperature_critical_c: float = 80.0
    over_temperature_hysteresis_k: float = 3.0
    over_temperature_delay_s: float = 300.0
    #: Condensation: t_cold below the ambient dew point by more than margin_k for delay_s.
    #: Judge condensation at all: None means only for the "enclosure" profile. A fridge's
    #: cold sink sits below the room's dew point by design and drains what condenses there;
    #: in an electronics enclosure the same water lands on the electronics.
    condensation_check: bool | None = None
    condensation_margin_k: float = 0.0
    condensation_critical_k: float = 2.0
    condensation_hysteresis_k: float = 0.5
    condensation_delay_s: float = 1800.0
    #: Sensor faults (common practice, no source).
    sensor_delay_s: float = 900.0
    stuck_window_s: float = 3600.0
    stuck_other_move_k: float = 0.5
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
    drift_baseline_s: float = 2 * 86_400.0
    drift_window_s: float = 12 * 3600.0
    drift_min_current_a: float = 0.1
    drift_min_samples: int = 60
    drift_warning_k: float = 1.0
    #: Module wear on R25 change: +10 % as end of useful life (common practice, no source),
    #: warning from +5 % or when the limit is under wear_days_warning days away at a rise
    #: whose 95 % confidence interval lies above zero: the days left extrapolate the slope,
    #: which says nothing while the interval still holds no rise at all.
    wear_warning_pct: float = 5.0
    wear_limit_pct: float = 10.0
    wear_days_warning: float = 30.0
    #: Cabinet UA rise (door seal, insulation): common practice, no source. The warning
    #: level is the diagnostics' own UA change flag (35 %): below it a day's UA fit on a
    #: healthy unit wanders that far with use and weather. The rise must also hold over
    #: ``heat_leak_persist_s`` of consecutive estimates (two or more 6-hourly fits).
    heat_leak_warning_pct: float = 35.0
    heat_leak_critical_pct: float = 60.0
    heat_leak_persist_s: float = 12 * 3600.0
    #: Hot-side thermal resistance rise (fan, fins, dust): common practice, no source.
    hot_side_warning_pct: float = 50.0
    hot_side_critical_pct: float = 100.0
    #: Capacity margin at the design ambient below which a warning goes out, as a fraction of
    #: the unit's maximum cooling there: coolers are sized with 10-20 % headroom over the heat
    #: load (common practice, no source), so under 10 % a warm day or a worn part tips it over.
    #: A fixed watt figure would fire on small carriers that are fine (2 W is 15 % of 13 W).
    capacity_warning_fraction: float = 0.10
    #: Optional absolute floor [W]: also warn below this margin (0 turns it off).
    capacity_warning_w: float = 0.0
    #: The daily capacity figure is judged on the median of this many consecutive daily
    #: estimates (a working week of use and weather), so a few days of noisy UA or sink
    #: fits do not raise it (common practice, no source).
    capacity_persist: int = 5
    #: Hysteresis on percentage rules [percentage points].
    trend_hysteresis_pct: float = 2.0
    #: Estimates are judged only once the readings behind them are this old, so that the
    #: sensor rule (a frozen channel shows only over ``stuck_window_s``) has seen them first.
    trend_settle_s: float = 2700.0
    #: After a sensor fault on a temperature, current or voltage channel clears, estimates
    #: stay suspect this long: the cabinet fit spans a day and change figures take the
    #: median of the last day (see tecfleet.analytics.runner).
    sensor_taint_after_s: float = 2 * 86_400.0
    #: While a reading condition builds up, returns inside the limit shorter than this do not
    #: restart its clock: the delay counts cumulative time out of range, so a cabinet hovering
    #: at its limit (probe noise, thermostat cycles) is still caught (common practice, no
    #: source).
    entry_bridge_s: float = 600.0
    #: Clear for this long before auto-resolve (readings / estimates).
    clear_s: float = 1800.0
    estimate_clear_s: float = 86_400.0
    #: A condition back within this time reopens the resolved alert.
    reopen_window_s: float = 6 * 3600.0
    #: The same for the alerts judged on the diagnostics' trends (wear, heat leak, hot side,
    #: capacity): their figures move a day at a time, and a leak or a worn module that dips
    #: under its threshold for a day is still the same fault (common practice, no source).
    estimate_reopen_window_s: float = 7 * 86_400.0
    #: Grouped notice when at least this many devices of one site open one kind within the
    #: window (a site power cut); common practice, no source.
    group_min_devices: int = 3
    group_window_s: float = 900.0

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
            current = getattr(self, name)
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
            clean[name] = value
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


# ---------------------------------------------------------------------------
# Observations (pure)
# ---------------------------------------------------------------------------

IntArray = NDArray[np.int64]
FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]


@dataclass
class Observations:
    """Per-sample result of one rule, in time order.

    ``t`` [ms]; ``active`` the condition to open; ``hold`` the looser condition that keeps an
    open alert open (hysteresis); ``severity`` 1 warning / 2 critical; ``value`` the quantity
    whose extremes the evidence reports; ``detail`` per-sample facts for the evidence.
    """

    t: IntArray
    active: BoolArray
    hold: BoolArray
    severity: NDArray[np.int8]
    value: FloatArray
    detail: list[dict[str, Any]] | None = None

    @staticmethod
    def empty() -> Observations:
        return Observations(
            np.zeros(0, np.int64),
            np.zeros(0, bool),
            np.zeros(0, bool),
            np.zeros(0, np.int8),
            np.zeros(0, np.float64),
        )


def mean_kinetic_temperature(
    t_c: Sequence[float] | FloatArray, activation_j_per_mol: float = MKT_ACTIVATION_J_PER_MOL
) -> float:
    """Mean kinetic temperature of equally spaced samples [°C].

    MKT = (ΔH/R) / (−ln(mean(exp(−ΔH/(R·T_i))))) with T_i in kelvin (Haynes 1971; USP <1079>),
    ΔH the activation energy [J/mol] and R = 8.3144 J/(mol·K) as USP states it.
    """
    t_k = np.asarray(t_c, dtype=np.float64) + T0
    if t_k.size == 0 or not np.all(np.isfinite(t_k)):
        raise AlertError("mean kinetic temperature needs finite samples")
    a = activation_j_per_mol / MKT_GAS_CONSTANT
    x = -a / t_k
    # log-mean-exp, shifted by the largest term so exp() cannot underflow
    m = float(np.max(x))
    log_mean = m + math.log(float(np.mean(np.exp(x - m))))
    return a / -log_mean - T0


def excursion_observations(t_ms: IntArray, t_cabinet: FloatArray, band: Band) -> Observations:
    """Cabinet out of band. ``t_cabinet`` [°C], band limits [°C]; critical beyond the critical
    limits (freezing for medicines, the legal ceiling for food)."""
    low = t_cabinet < band.low_c
    high = t_cabinet > band.high_c
    active = low | high
    sev = np.where(active, 1, 0).astype(np.int8)
    if band.critical_low_c is not None:
        sev[t_cabinet <= band.critical_low_c] = 2
    if band.critical_high_c is not None:
        sev[t_cabinet >= band.critical_high_c] = 2
    return Observations(t_ms, active, active.copy(), sev, np.asarray(t_cabinet, np.float64))


def over_temperature_observations(
    t_ms: IntArray, t_hot: FloatArray, warning_c: float, critical_c: float, hysteresis_k: float
) -> Observations:
    """Hot side at or above ``warning_c`` [°C]; critical at ``critical_c`` [°C]; an open alert
    holds until ``t_hot`` is ``hysteresis_k`` [K] below the warning level."""
    active = t_hot >= warning_c
    hold = t_hot >= warning_c - hysteresis_k
    sev = np.where(t_hot >= critical_c, 2, np.where(active, 1, 0)).astype(np.int8)
    return Observations(t_ms, active, hold, sev, np.asarray(t_hot, np.float64))


def condensation_observations(
    t_ms: IntArray,
    t_cold: FloatArray,
    t_ambient: FloatArray,
    rh_pct: FloatArray,
    margin_k: float,
    critical_k: float,
    hysteresis_k: float,
) -> Observations:
    """Cold side below the ambient dew point. Temperatures [°C], ``rh_pct`` [%]; samples
    without humidity are dropped. Margin = t_cold − dew point [K]; active below −margin_k,
    critical below −critical_k, held until above −margin_k + hysteresis_k."""
    ok = np.isfinite(rh_pct) & (rh_pct > 0) & (rh_pct <= 100)
    if not np.any(ok):
        return Observations.empty()
    td = np.asarray(dew_point(t_ambient[ok] + T0, rh_pct[ok] / 100.0), dtype=np.float64) - T0
    margin = t_cold[ok] - td
    active = margin < -margin_k
    hold = margin < -margin_k + hysteresis_k
    sev = np.where(margin < -critical_k, 2, np.where(active, 1, 0)).astype(np.int8)
    detail = [
        {"dew_point_c": round(float(d), 2), "t_cold_c": round(float(c), 2), "rh_pct": float(r)}
        for d, c, r in zip(td, t_cold[ok], rh_pct[ok], strict=True)
    ]
    return Observations(t_ms[ok], active, hold, sev, margin, detail)


_TEMPS = ("t_cabinet", "t_cold", "t_hot", "t_ambient")
PROBE_DRIFT_ISSUE = "t_cabinet off the cold side's heat balance"
_PLAUSIBLE = {
    # Plausible ranges of a cooler's sensors (common practice, no source).
    "t_cabinet": (-40.0, 60.0),
    "t_cold": (-50.0, 100.0),
    "t_hot": (-40.0, 120.0),
    "t_ambient": (-40.0, 60.0),
    "current": (-0.1, 60.0),
    "rh": (0.0, 100.0),
}


def usual_interval_ms(t_ms: IntArray, n: int = 60) -> FloatArray:
    """Median spacing of the ``n`` intervals before each sample [ms] (NaN before the 5th)."""
    diffs = pd.Series(np.diff(t_ms.astype(np.float64), prepend=np.nan))
    return np.asarray(diffs.rolling(n, min_periods=5).median().shift(1), np.float64)


def cold_side_heat_balance(
    current: FloatArray,
    t_cold_c: FloatArray,
    t_hot_c: FloatArray,
    voltage: FloatArray,
    seebeck: float,
    conductance: float,
) -> FloatArray:
    """Heat pumped at the cold face [W] from the readings.

    Qc = S·I·Tc − ½·I²·R − K·(Th − Tc) (Ioffe 1957; Goldsmid 2010, ch. 2; as
    :func:`tecfleet.analytics.physics.cold_side_heat`), with the Joule term taken from the
    measured voltage, I·R = V − S·(Th − Tc), so a module whose resistance rises with wear does
    not look like a drifting probe. ``seebeck`` [V/K] and ``conductance`` [W/K] of the module
    (from its ratings), temperatures [°C], current [A], voltage [V].
    """
    tc = np.asarray(t_cold_c, np.float64) + T0
    th = np.asarray(t_hot_c, np.float64) + T0
    i = np.asarray(current, np.float64)
    v = np.asarray(voltage, np.float64)
    joule = 0.5 * i * (v - seebeck * (th - tc))
    return np.asarray(seebeck * i * tc - joule - conductance * (th - tc), np.float64)


def fit_cold_side_baseline(
    t_cabinet: FloatArray, t_cold: FloatArray, qc: FloatArray, running: BoolArray
) -> tuple[float, float] | None:
    """Commissioning fit t_cabinet − t_cold = offset + r_cold·Qc over running samples.

    The cabinet air gives its heat to the cold side through r_cold [K/W], so with the module
    running the difference follows the pumped heat; ``offset`` [K] holds the probes' fixed
    biases and what the rated module parameters miss. Returns (offset, r_cold), or None when
    there are under 300 running samples or the fit is not physical (r_cold ≤ 0).
    """
    ok = running & np.isfinite(t_cabinet) & np.isfinite(t_cold) & np.isfinite(qc)
    if int(ok.sum()) < 300 or float(np.std(qc[ok])) <= 0.0:
        return None
    x = np.column_stack([np.ones(int(ok.sum())), qc[ok]])
    coef, *_ = np.linalg.lstsq(x, t_cabinet[ok] - t_cold[ok], rcond=None)
    offset, r_cold = float(coef[0]), float(coef[1])
    if not (math.isfinite(offset) and math.isfinite(r_cold)) or r_cold <= 0.0:
        return None
    return offset, r_cold


def cabinet_probe_offset(
    t_ms: IntArray,
    t_cabinet: FloatArray,
    t_cold: FloatArray,
    qc: FloatArray,
    running: BoolArray,
    baseline: tuple[float, float],
    window_s: float,
    min_samples: int,
) -> FloatArray:
    """Change of the cabinet probe's reading against the cold side's heat balance [K].

    Per sample: the median, over the running samples of the last ``window_s``, of
    (t_cabinet − t_cold − r_cold·Qc) minus the commissioning ``offset``; NaN with fewer than
    ``min_samples`` running samples, and carried over idle stretches of up to two hours.
    A drifting cabinet probe moves it by its drift; the faces and the module equations do not.
    """
    n = len(t_ms)
    out = np.full(n, np.nan)
    offset, r_cold = baseline
    on = np.flatnonzero(running & np.isfinite(t_cabinet) & np.isfinite(t_cold) & np.isfinite(qc))
    if on.size == 0:
        return out
    resid = t_cabinet[on] - t_cold[on] - r_cold * qc[on] - offset
    med = (
        pd.Series(resid, index=pd.to_datetime(t_ms[on], unit="ms"))
        .rolling(f"{int(window_s)}s", min_periods=max(int(min_samples), 1))
        .median()
        .to_numpy(np.float64)
    )
    # each sample takes the newest running sample's value at or before it, if recent
    k = np.searchsorted(t_ms[on], t_ms, side="right") - 1
    has = k >= 0
    kk = np.where(has, k, 0)
    recent = has & (t_ms - t_ms[on][kk] <= 2 * MS_HOUR)
    out[recent] = med[kk[recent]]
    return out


def sensor_fault_observations(
    frame: pd.DataFrame,
    first: int,
    policy: AlertPolicy,
    i_ref: float | None,
    interval: FloatArray | None = None,
    probe_offset: FloatArray | None = None,
) -> Observations:
    """Sensor faults on rows ``first:`` of ``frame`` (rows before are look-back only).

    Out-of-range values, a temperature channel frozen over ``stuck_window_s`` while another
    moves by ``stuck_other_move_k`` [K], isolated spikes of ``spike_k`` [K] (``spike_count`` in
    an hour, judged one sample late), more than ``dropout_fraction`` of the expected samples
    missing in the last hour, and the cold side warmer than the cabinet by
    ``impossible_margin_k`` [K] while the module has been driven at
    ``impossible_current_fraction`` of ``i_ref`` [A] for ``impossible_on_s``.
    ``interval`` is ``usual_interval_ms`` of the frame's times, when the caller has it.
    ``probe_offset`` [K] per row (:func:`cabinet_probe_offset`) flags the cabinet probe when
    it has moved by ``drift_warning_k`` against the cold side's heat balance. An open alert is
    held while a channel found stuck stays frozen, even if the others have stopped moving.
    """
    n = len(frame)
    if n == 0 or first >= n:
        return Observations.empty()
    t = frame["ts_ms"].to_numpy(np.int64)
    idx = pd.to_datetime(t, unit="ms")
    # (label, mask) in the order the issues are listed in the evidence
    checks: list[tuple[str, BoolArray]] = []
    for col, (lo, hi) in _PLAUSIBLE.items():
        x = frame[col].to_numpy(np.float64)
        checks.append((f"{col} out of range", np.isfinite(x) & ((x < lo) | (x > hi))))
    win = f"{int(policy.stuck_window_s)}s"
    span = {}
    counts = pd.Series(1.0, index=idx).rolling(win).sum().to_numpy()
    covered = (t - t[0]) >= policy.stuck_window_s * 1000
    for col in _TEMPS:
        s = pd.Series(frame[col].to_numpy(np.float64), index=idx).rolling(win)
        span[col] = (s.max() - s.min()).to_numpy()
    frozen_since_stuck = np.zeros(n, dtype=bool)
    for col in _TEMPS:
        others = np.max(np.vstack([span[c] for c in _TEMPS if c != col]), axis=0)
        frozen = covered & (counts >= 10) & (span[col] <= 1e-9)
        stuck = frozen & (others >= policy.stuck_other_move_k)
        checks.append((f"{col} stuck", stuck))
        # A channel found stuck stays in doubt while it stays frozen, also when the others
        # then rest too (a quiet night): no resolve and reopen on the same frozen probe.
        run = np.cumsum(~frozen)
        frozen_since_stuck |= frozen & pd.Series(stuck).groupby(run).cummax().to_numpy(dtype=bool)
    spikes = np.zeros(n, dtype=np.float64)
    # Only the slow channels: the module faces really do jump within a minute when the
    # drive switches on or off.
    for col in ("t_cabinet", "t_ambient"):
        x = frame[col].to_numpy(np.float64)
        if n < 3:
            break
        up = x[1:-1] - x[:-2]
        down = x[1:-1] - x[2:]
        spike = (np.abs(up) > policy.spike_k) & (np.abs(down) > policy.spike_k)
        spike &= np.sign(up) == np.sign(down)
        spikes[2:] += spike  # judged when the sample after the spike arrives
    spike_hour = pd.Series(spikes, index=idx).rolling("3600s").sum().to_numpy()
    checks.append(("spikes", spike_hour >= policy.spike_count))
    if interval is None:
        interval = usual_interval_ms(t)
    expected = 3_600_000 / interval
    present = pd.Series(1.0, index=idx).rolling("3600s").sum().to_numpy()
    hour_covered = (t - t[0]) >= 3_600_000
    with np.errstate(invalid="ignore"):
        missing = 1.0 - present / expected
    # a gap long enough to be "offline" is that rule's business, not a dropout
    longest = pd.Series(np.diff(t, prepend=t[0]).astype(np.float64), index=idx)
    longest_hour = longest.rolling("3600s").max().to_numpy()
    offline_gap = np.maximum(policy.offline_factor * interval, policy.offline_min_s * 1000)
    with np.errstate(invalid="ignore"):
        dropped = (
            hour_covered
            & np.isfinite(missing)
            & (missing > policy.dropout_fraction)
            & ~(longest_hour > offline_gap)
        )
    checks.append(("dropouts", dropped))
    if i_ref is not None and i_ref > 0:
        cur = pd.Series(frame["current"].to_numpy(np.float64), index=idx)
        on_min = cur.rolling(f"{int(policy.impossible_on_s)}s").min().to_numpy()
        on_cov = (t - t[0]) >= policy.impossible_on_s * 1000
        hard = on_cov & (on_min >= policy.impossible_current_fraction * i_ref)
        warm = frame["t_cold"].to_numpy(np.float64) > (
            frame["t_cabinet"].to_numpy(np.float64) + policy.impossible_margin_k
        )
        checks.append(("cold side warmer than cabinet while cooling", hard & warm))
    if probe_offset is not None:
        with np.errstate(invalid="ignore"):
            moved = np.abs(probe_offset) >= policy.drift_warning_k
        checks.append((PROBE_DRIFT_ISSUE, moved))
    masks = np.vstack([m[first:] for _, m in checks])
    labels = [label for label, _ in checks]
    count = masks.sum(axis=0)
    active = count > 0
    detail: list[dict[str, Any]] = [{"issues": []} for _ in range(n - first)]
    for i in np.flatnonzero(active):
        detail[i] = {"issues": [labels[k] for k in np.flatnonzero(masks[:, i])]}
    return Observations(
        t[first:],
        active,
        active | frozen_since_stuck[first:],
        np.where(active, 1, 0).astype(np.int8),
        count.astype(np.float64),
        detail,
    )


def offline_observations(
    t_ms: IntArray,
    first: int,
    reference_ms: int,
    status: str | None,
    status_at_ms: int | None,
    policy: AlertPolicy,
    interval: FloatArray | None = None,
) -> Observations:
    """Gaps in the readings of rows ``first:`` and after the newest one, up to
    ``reference_ms`` [ms] (the newest reading of the fleet, or the wall clock live).

    A gap longer than ``offline_factor`` usual intervals (at least ``offline_min_s``) is
    offline from the moment the threshold passed; readings resuming clear it. A retained
    ``offline`` status newer than the last reading counts at once. ``interval`` is
    ``usual_interval_ms(t_ms)``, when the caller has it.
    """
    n = len(t_ms)
    if n == 0:
        return Observations.empty()
    if interval is None:
        interval = usual_interval_ms(t_ms)
    fallback = float(np.nanmedian(np.diff(t_ms))) if n > 1 else policy.offline_min_s * 1000
    floor = policy.offline_min_s * 1000
    crit = policy.offline_critical_s * 1000
    # Per reading i >= first: [offline at the threshold], [critical], then the reading itself.
    i = np.arange(max(first, 1), n)
    usual = np.where(np.isfinite(interval[i]), interval[i], fallback)
    thr = np.maximum(policy.offline_factor * usual, floor)
    prev = t_ms[i - 1]
    gap = t_ms[i] - prev
    warn = gap > thr
    late = warn & (gap > crit) & (crit > thr)
    m = len(i)
    slot_t = np.zeros((m, 3), np.int64)
    slot_t[:, 0] = (prev + thr).astype(np.int64)
    slot_t[:, 1] = (prev + crit).astype(np.int64)
    slot_t[:, 2] = t_ms[i]
    slot_on = np.column_stack([warn, late, np.ones(m, bool)])
    slot_a = np.zeros((m, 3), bool)
    slot_a[:, 0] = True
    slot_a[:, 1] = True
    slot_s = np.tile(np.array([1, 2, 0], np.int8), (m, 1))
    slot_v = np.column_stack([thr / 1000, np.full(m, crit / 1000), gap / 1000])
    keep = slot_on.ravel()
    out_t = list(slot_t.ravel()[keep])
    out_a = list(slot_a.ravel()[keep])
    out_s = list(slot_s.ravel()[keep])
    out_v = list(slot_v.ravel()[keep])
    last = int(t_ms[-1])
    thr_last = max(policy.offline_factor * fallback, floor)
    if status == "offline" and status_at_ms is not None and last <= status_at_ms <= reference_ms:
        out_t.append(int(status_at_ms))
        out_a.append(True)
        out_s.append(1)
        out_v.append((status_at_ms - last) / 1000)
    elif reference_ms - last > thr_last:
        out_t.append(int(last + thr_last))
        out_a.append(True)
        out_s.append(1)
        out_v.append(thr_last / 1000)
    if reference_ms - last > crit and crit > thr_last:
        out_t.append(int(last + crit))
        out_a.append(True)
        out_s.append(2)
        out_v.append(crit / 1000)
    order = np.argsort(np.array(out_t, dtype=np.int64), kind="stable")
    a = np.array(out_a, dtype=bool)[order]
    return Observations(
        np.array(out_t, dtype=np.int64)[order],
        a,
        a.copy(),
        np.array(out_s, dtype=np.int8)[order],
        np.array(out_v, dtype=np.float64)[order],
    )


# Estimate keys of tecfleet.analytics.runner that the trend rules read.
WEAR_KEYS = (
    "module.resistance_25c.change_pct",
    "module.resistance_25c_ohm",
    "module.resistance_25c.baseline",
    "module.resistance_25c.slope_pct_per_30d",
    "module.resistance_25c.slope_pct_per_30d_low",
    "module.days_to_wear_limit",
)
LEAK_KEYS = (
    "cabinet.ua.change_pct",
    "cabinet.ua_w_per_k",
    "cabinet.ua.baseline",
    "cabinet.heat_leak_w",
)
HOT_KEYS = (
    "hot_side.resistance.change_pct",
    "hot_side.resistance_k_per_w",
    "hot_side.resistance.baseline",
)
CAPACITY_KEYS = (
    "capacity.margin_w",
    "capacity.holdable",
    "capacity.heat_load_w",
    "capacity.max_cooling_w",
)


def trend_observations(
    kind: str, series: Mapping[str, Sequence[tuple[int, float]]], policy: AlertPolicy
) -> Observations:
    """Trend rules on estimates: ``series`` maps estimate key -> [(at_ms, value)] in time
    order (reliable ones only). One observation per time of the rule's primary key, with the
    newest value of every other key at or before it in ``detail``."""
    primary = {
        "module_wear": "module.resistance_25c.change_pct",
        "heat_leak": "cabinet.ua.change_pct",
        "hot_side_cooling": "hot_side.resistance.change_pct",
        "capacity_shortfall": "capacity.margin_w",
    }[kind]
    main = list(series.get(primary, ()))
    if not main:
        return Observations.empty()
    ts = np.array([p[0] for p in main], dtype=np.int64)
    vals = np.array([p[1] for p in main], dtype=np.float64)
    details: list[dict[str, Any]] = []
    for at in ts:
        d: dict[str, Any] = {}
        for key, pts in series.items():
            before = [v for t, v in pts if t <= at]
            if before:
                d[key] = before[-1]
        details.append(d)
    hyst = policy.trend_hysteresis_pct
    if kind == "module_wear":
        days = np.array(
            [d.get("module.days_to_wear_limit", math.inf) for d in details], dtype=np.float64
        )
        days = np.where(np.isfinite(days), days, math.inf)
        slope_low = np.array(
            [d.get("module.resistance_25c.slope_pct_per_30d_low", math.nan) for d in details],
            dtype=np.float64,
        )
        # NaN (no slope yet) compares False: no established rise
        soon = (days <= policy.wear_days_warning) & (vals > 0) & (slope_low > 0)
        active = (vals >= policy.wear_warning_pct) | soon
        hold = (vals >= policy.wear_warning_pct - hyst) | soon
        sev = np.where(vals >= policy.wear_limit_pct, 2, np.where(active, 1, 0))
    elif kind == "heat_leak":
        above = vals >= policy.heat_leak_warning_pct
        active = _persisting(ts, above, int(policy.heat_leak_persist_s * 1000))
        hold = vals >= policy.heat_leak_warning_pct - hyst
        sev = np.where(vals >= policy.heat_leak_critical_pct, 2, np.where(active, 1, 0))
    elif kind == "hot_side_cooling":
        active = vals >= policy.hot_side_warning_pct
        hold = vals >= policy.hot_side_warning_pct - hyst
        sev = np.where(vals >= policy.hot_side_critical_pct, 2, np.where(active, 1, 0))
    else:
        holdable = np.array([d.get("capacity.holdable", 1.0) for d in details], np.float64)
        q_max = np.array(
            [d.get("capacity.max_cooling_w", math.nan) for d in details], dtype=np.float64
        )
        n = max(int(policy.capacity_persist), 1)
        margin = _trailing_median(vals, n)
        cap = _trailing_median(q_max, n)
        can_hold = _trailing_median(holdable, n)
        full = np.arange(len(vals)) >= n - 1  # judged once n daily figures exist
        with np.errstate(invalid="ignore"):
            frac = np.where(cap > 0, margin / cap, math.nan)
        low = (frac < policy.capacity_warning_fraction) | (margin < policy.capacity_warning_w)
        active = full & (low | (can_hold < 0.5))
        hold = full & (
            (frac < policy.capacity_warning_fraction + 0.02)
            | (margin < policy.capacity_warning_w + 0.5)
            | (can_hold < 0.5)
        )
        sev = np.where(active & ((can_hold < 0.5) | (margin < 0)), 2, np.where(active, 1, 0))
        for d, m, f in zip(details, margin, frac, strict=True):
            d["capacity.margin_median_w"] = float(m)
            d["capacity.margin_fraction"] = float(f)
            d["capacity.days_judged"] = n
        vals = margin
    return Observations(ts, active, hold, sev.astype(np.int8), vals, details)


def _persisting(ts: IntArray, cond: BoolArray, span_ms: int) -> BoolArray:
    """True where ``cond`` has held at every sample since at least ``span_ms`` ago."""
    out = np.zeros(len(ts), dtype=bool)
    since: int | None = None
    for i in range(len(ts)):
        if not cond[i]:
            since = None
            continue
        if since is None:
            since = int(ts[i])
        out[i] = int(ts[i]) - since >= span_ms
    return out


def _trailing_median(x: FloatArray, n: int) -> FloatArray:
    """Median of each sample and the ``n - 1`` before it (fewer at the start)."""
    return np.asarray(
        pd.Series(x, dtype=np.float64).rolling(n, min_periods=1).median(), dtype=np.float64
    )


# ---------------------------------------------------------------------------
# Summaries (pure)
# ---------------------------------------------------------------------------


#: Alert kinds judged on the diagnostics' estimates, which rest on every temperature channel
#: and on the module's current and voltage (see tecfleet.analytics.runner).
ESTIMATE_KINDS = ("module_wear", "heat_leak", "hot_side_cooling", "capacity_shortfall")
#: Sensor-fault issues that do not falsify estimates: the diagnostics filter spikes, and a
#: missing sample is just missing.
_HARMLESS_ISSUES = ("spikes", "dropouts")


def _channel_fault(issues: Sequence[str]) -> bool:
    """Whether sensor issues put a channel's values in doubt (stuck, out of range, ...)."""
    return any(i not in _HARMLESS_ISSUES for i in issues)


def _recent(ev: dict[str, Any], prefix: str, base: float | None, change: float) -> float | None:
    """The recent value a change figure was computed from: baseline·(1 + change/100).

    The diagnostics compare the median of the recent values with the baseline; the newest
    single fit may differ, so the summary shows the value behind the percentage.
    """
    if base is None or not math.isfinite(change):
        return None
    now = float(base) * (1.0 + change / 100.0)
    ev[f"{prefix}.recent"] = now
    return now


def _dur(ms: float) -> str:
    minutes = ms / MS_MIN
    if minutes < 90:
        return f"{minutes:.0f} min"
    if minutes < 48 * 60:
        return f"{minutes / 60:.1f} h"
    return f"{minutes / 1440:.1f} days"


MEDICINE_CAUTION = (
    "Assess the stock against the maker's storage instructions and local regulations before "
    "use or disposal; this alert does not decide whether the contents are still usable."
)
CONDENSATION_CAUTION = (
    "Condensation near electronics can cause faults or shocks; have a qualified person check "
    "the unit under local electrical codes."
)


def describe(
    kind: str, spell: Mapping[str, Any], extra: Mapping[str, Any], resolved: bool
) -> tuple[str, dict[str, Any]]:
    """One sentence and the evidence for an alert of ``kind`` at a transition."""
    ev: dict[str, Any] = dict(extra)
    ev["spell_start_ms"] = spell["start"]
    ev["active_s"] = round(spell["active_ms"] / 1000.0, 1)
    lo, hi = spell.get("min"), spell.get("max")
    peak = None
    if kind == "excursion":
        above = hi is not None and hi > ev["high_limit_c"]
        peak = hi if above else lo
        ev["peak_c"] = peak
        ev["direction"] = "above" if above else "below"
        limit = ev["high_limit_c"] if above else ev["low_limit_c"]
        s = (
            f"Cabinet {ev['direction']} its {limit:g} °C limit for "
            f"{_dur(spell['active_ms'])} in total (peak {peak:.1f} °C"
        )
        if "mkt_c" in ev:
            window = _dur(ev["window_s"] * 1000)
            s += f", mean kinetic temperature {ev['mkt_c']:.1f} °C over {window}"
        s += "); check door, load and cooling"
        if ev.get("profile") == "medicine":
            s += ", and assess the stock against the maker's storage instructions"
        s += "."
    elif kind == "over_temperature":
        peak = hi
        ev["peak_c"] = hi
        s = (
            f"Hot side reached {hi:.1f} °C (warning {ev['warning_c']:g} °C, limit "
            f"{ev['critical_c']:g} °C); check the hot-side fan, fins and ambient air flow."
        )
    elif kind == "condensation_risk":
        peak = lo
        ev["lowest_margin_k"] = lo
        s = (
            f"Cold side {ev.get('t_cold_c', float('nan')):.1f} °C is below the ambient dew point "
            f"{ev.get('dew_point_c', float('nan')):.1f} °C (down to {-(lo or 0.0):.1f} K below); "
            "check insulation and seals around the cold side and drain moisture."
        )
    elif kind == "offline":
        peak = hi
        ev["longest_silence_s"] = hi
        s = (
            f"No readings since {_dur(ev.get('silent_ms', 0))} before the last check "
            f"(usually every {ev.get('usual_interval_s', 0):.0f} s); check power and network."
        )
    elif kind == "sensor_fault":
        issues = ev.get("issues") or ["implausible readings"]
        s = f"Sensor readings look wrong ({'; '.join(issues)}); check the probes and wiring."
        off = ev.get("cabinet_probe_offset_k")
        if off is not None:
            s += (
                f" The cabinet probe and the cold side's heat balance disagree by {off:+.1f} K"
                " more than at commissioning"
            )
            if ev.get("cabinet_probe_offset_since_ms"):
                moved = pd.Timestamp(int(ev["cabinet_probe_offset_since_ms"]), unit="ms")
                s += f", moving since {moved:%Y-%m-%d %H:%M} UTC"
            s += "."
        if _channel_fault(issues):
            ev["held_back"] = list(ESTIMATE_KINDS)
            s += (
                " Module wear, heat leak, hot-side cooling and capacity alerts are held back "
                "while it lasts, as their estimates rest on these readings."
            )
    elif kind == "module_wear":
        change = ev.get("module.resistance_25c.change_pct", float("nan"))
        base = ev.get("module.resistance_25c.baseline")
        now = ev.get("module.resistance_25c_ohm")
        slope = ev.get("module.resistance_25c.slope_pct_per_30d")
        days = ev.get("module.days_to_wear_limit")
        s = f"Module resistance at 25 °C has risen {change:.1f}% since commissioning"
        now = _recent(ev, "module.resistance_25c", base, change)
        if now is not None:
            s += f" ({base:.2f} -> {now:.2f} ohm)"
        if slope is not None:
            s += f", about {slope / 30.0:.2f}%/day"
        if days is not None and math.isfinite(days):
            s += f"; at this rate it reaches the {ev['wear_limit_pct']:g}% limit in {days:.0f} days"
        s += "; plan a module replacement."
        peak = hi
    elif kind == "heat_leak":
        change = ev.get("cabinet.ua.change_pct", float("nan"))
        base = ev.get("cabinet.ua.baseline")
        s = f"Cabinet heat leak (UA) has risen {change:.0f}% since commissioning"
        now = _recent(ev, "cabinet.ua", base, change)
        if now is not None:
            s += f" ({base:.3g} -> {now:.3g} W/K)"
        s += "; check the door seal, hinges and insulation."
        peak = hi
    elif kind == "hot_side_cooling":
        change = ev.get("hot_side.resistance.change_pct", float("nan"))
        base = ev.get("hot_side.resistance.baseline")
        s = f"Hot-side thermal resistance has risen {change:.0f}%"
        now = _recent(ev, "hot_side.resistance", base, change)
        if now is not None:
            s += f" ({base:.3f} -> {now:.3f} K/W)"
        s += "; clean the fins and check the hot-side fan."
        peak = hi
    else:
        margin = ev.get("capacity.margin_median_w", ev.get("capacity.margin_w", float("nan")))
        frac = ev.get("capacity.margin_fraction")
        days = ev.get("capacity.days_judged", 1)
        s = f"At the design ambient the cooler has {margin:.1f} W of cooling to spare"
        if frac is not None and math.isfinite(frac):
            s += f" ({100.0 * frac:.0f}% of its maximum cooling"
            s += f", median of {days} daily figures)" if days > 1 else ")"
        s += (
            " and cannot hold its setpoint" if ev.get("capacity.holdable", 1.0) < 0.5 else ""
        ) + "; check module, fans and heat leak before warm weather."
        peak = lo
    if kind in ("excursion",) and ev.get("profile") == "medicine":
        ev["caution"] = MEDICINE_CAUTION
    if kind == "condensation_risk":
        ev["caution"] = CONDENSATION_CAUTION
    if resolved:
        dur = spell["end"] - spell["start"]
        ev["duration_s"] = round(dur / 1000.0, 1)
        ev["peak"] = peak
        s = f"Resolved after {_dur(dur)}: " + s[0].lower() + s[1:]
    return s, ev


# ---------------------------------------------------------------------------
# Lifecycle
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class AlertChange:
    """One lifecycle change: ``change`` is opened, reopened, escalated or resolved."""

    alert_id: int
    device_id: str
    kind: str
    change: str
    severity: str
    at_ms: int
    summary: str
    evidence: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class _Timing:
    open_after_ms: int
    clear_after_ms: int
    reopen_within_ms: int
    critical_after_ms: int | None = None
    bridge_ms: int = 0


def _timing(kind: str, p: AlertPolicy) -> _Timing:
    s = 1000
    clear = int(p.clear_s * s)
    reopen = int(p.reopen_window_s * s)
    bridge = int(p.entry_bridge_s * s)
    if kind == "excursion":
        critical = int(p.excursion_critical_s * s)
        return _Timing(int(p.excursion_delay_s * s), clear, reopen, critical, bridge)
    if kind == "over_temperature":
        return _Timing(int(p.over_temperature_delay_s * s), clear, reopen, None, bridge)
    if kind == "condensation_risk":
        return _Timing(int(p.condensation_delay_s * s), clear, reopen, None, bridge)
    if kind == "sensor_fault":
        return _Timing(int(p.sensor_delay_s * s), 2 * clear, reopen, None, bridge)
    if kind == "offline":
        return _Timing(0, 0, reopen)
    return _Timing(0, int(p.estimate_clear_s * s), int(p.estimate_reopen_window_s * s))


def _jsonable(x: Any) -> Any:
    if isinstance(x, dict):
        return {str(k): _jsonable(v) for k, v in x.items()}
    if isinstance(x, list | tuple):
        return [_jsonable(v) for v in x]
    if isinstance(x, np.generic):
        x = x.item()
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return x


class _Ledger:
    """Writes lifecycle changes, audit rows and outbox entries on one connection."""

    def __init__(
        self,
        conn: Connection,
        device: Any,
        policy: AlertPolicy,
        windows: list[tuple[int, int]],
    ) -> None:
        self.conn = conn
        self.device = device
        self.policy = policy
        self.windows = windows
        self.changes: list[AlertChange] = []

    def _held_until(self, at_ms: int) -> int | None:
        ends = [end for start, end in self.windows if start <= at_ms < end]
        return max(ends) if ends else None

    def _notify(self, alert_id: int, event: str, at_ms: int) -> None:
        row = self.conn.execute(sa.select(db.alerts).where(db.alerts.c.id == alert_id)).one()
        hold = self._held_until(at_ms)
        self.conn.execute(
            db.notifications.insert().values(
                created_ms=db.now_ms(),
                event_ms=at_ms,
                event=event,
                alert_id=alert_id,
                device_id=row.device_id,
                site=self.device.site,
                kind=row.kind,
                payload=_jsonable({"alert": alert_row_dict(row), "change": event}),
                state="held" if hold is not None else "pending",
                hold_until_ms=hold,
                mqtt_state="held" if hold is not None else "pending",
            )
        )

    def _audit(
        self, alert_id: int, at: int, old: str | None, new: str, sev: str, note: str
    ) -> None:
        self.conn.execute(
            db.alert_audit.insert().values(
                alert_id=alert_id, at_ms=at, from_state=old, to_state=new, severity=sev,
                actor="system", note=note,
            )
        )  # fmt: skip

    def apply(
        self,
        kind: str,
        change: str,
        at: int,
        sev: int,
        st: dict[str, Any],
        summary: str,
        ev: dict[str, Any],
    ) -> None:
        a = db.alerts
        severity = SEVERITIES[sev]
        ev = _jsonable(ev)
        if change == "opened":
            alert_id = int(
                self.conn.execute(
                    a.insert()
                    .values(
                        device_id=self.device.device_id, kind=kind, severity=severity,
                        state="open", opened_ms=at, updated_ms=at, resolved_ms=None,
                        summary=summary, evidence=ev, reopen_count=0,
                    )
                    .returning(a.c.id)
                ).scalar_one()
            )  # fmt: skip
            st["alert_id"] = alert_id
            self._audit(alert_id, at, None, "open", severity, "condition present")
        else:
            alert_id = int(st["alert_id"])
            old = self.conn.execute(sa.select(a.c.state).where(a.c.id == alert_id)).scalar_one()
            values: dict[str, Any] = {"updated_ms": at, "summary": summary, "evidence": ev}
            if change == "reopened":
                values.update(
                    state="open", resolved_ms=None, severity=severity,
                    reopen_count=a.c.reopen_count + 1,
                )  # fmt: skip
                new = "open"
            elif change == "resolved":
                values.update(state="resolved", resolved_ms=at)
                new = "resolved"
            elif change == "escalated":
                values.update(severity=severity)
                new = old
            else:  # evidence update only
                self.conn.execute(a.update().where(a.c.id == alert_id).values(**values))
                return
            self.conn.execute(a.update().where(a.c.id == alert_id).values(**values))
            self._audit(alert_id, at, old, new, severity, change)
        self._notify(alert_id, f"alert.{change}", at)
        self.changes.append(
            AlertChange(alert_id, self.device.device_id, kind, change, severity, at, summary, ev)
        )


def _run_machine(
    kind: str,
    obs: Observations,
    st: dict[str, Any],
    timing: _Timing,
    policy: AlertPolicy,
    ledger: _Ledger,
    context: Callable[[int], dict[str, Any]],
) -> None:
    """Feed observations to the lifecycle of one (device, kind); ``st`` is carried JSON."""
    last_t = st.get("last_t")
    reopen_ms = timing.reopen_within_ms
    gap_cap = max(timing.clear_after_ms, 10 * MS_MIN)
    touched = False
    for i in range(len(obs.t)):
        t = int(obs.t[i])
        if last_t is not None and t < last_t:
            continue  # already judged (e.g. an offline gap seen live)
        prev_t, last_t = last_t, t
        is_open = bool(st.get("open"))
        on = bool(obs.hold[i] if is_open else obs.active[i])
        ep = st.get("ep")
        if on:
            st["clear"] = None
            if ep is None:
                ep = st["ep"] = {"start": t, "active_ms": 0, "min": None, "max": None, "last_on": t}
                st.pop("detail", None)
            else:
                # the interval up to a sample counts with that sample's state
                if prev_t is not None:
                    ep["active_ms"] += min(t - prev_t, gap_cap)
                ep["last_on"] = t
            v = float(obs.value[i])
            if math.isfinite(v):
                ep["min"] = v if ep["min"] is None else min(ep["min"], v)
                ep["max"] = v if ep["max"] is None else max(ep["max"], v)
            sev = int(obs.severity[i]) or 1
            if timing.critical_after_ms is not None and ep["active_ms"] >= timing.critical_after_ms:
                sev = 2
            if obs.detail is not None:
                st["detail"] = obs.detail[i]
            ep["sev"] = max(int(ep.get("sev", 0)), sev)
            if is_open:
                if ep["sev"] > int(st.get("sev", 1)):
                    st["sev"] = ep["sev"]
                    summ, ev = describe(kind, ep, {**context(t), **st.get("detail", {})}, False)
                    ledger.apply(kind, "escalated", t, ep["sev"], st, summ, ev)
                else:
                    touched = True
            elif ep["active_ms"] >= timing.open_after_ms:
                st["open"] = True
                st["sev"] = ep["sev"]
                summ, ev = describe(kind, ep, {**context(t), **st.get("detail", {})}, False)
                resolved_at = st.get("resolved_at")
                if (
                    st.get("alert_id") is not None
                    and resolved_at is not None
                    and (ep["start"] - resolved_at <= reopen_ms)
                ):
                    ledger.apply(kind, "reopened", t, ep["sev"], st, summ, ev)
                else:
                    ledger.apply(kind, "opened", t, ep["sev"], st, summ, ev)
                touched = False
        else:
            if not is_open:
                if ep is not None and t - int(ep["last_on"]) <= timing.bridge_ms:
                    continue  # a short return inside the limit: the spell goes on
                st["ep"] = None
                continue
            if st.get("clear") is None:
                st["clear"] = t
            if t - int(st["clear"]) >= timing.clear_after_ms:
                assert ep is not None
                # the spell ended when the condition cleared, not when the alert resolved
                ep["end"] = int(st["clear"])
                summ, ev = describe(kind, ep, {**context(t), **st.get("detail", {})}, True)
                ledger.apply(kind, "resolved", t, int(st.get("sev", 1)), st, summ, ev)
                st.update(open=False, clear=None, ep=None, resolved_at=t, sev=0)
                touched = False
    st["last_t"] = last_t
    if touched and st.get("open") and st.get("ep") is not None:
        ep = st["ep"]
        summ, ev = describe(
            kind, ep, {**context(int(ep["last_on"])), **st.get("detail", {})}, False
        )
        ledger.apply(kind, "updated", int(ep["last_on"]), int(st["sev"]), st, summ, ev)


# ---------------------------------------------------------------------------
# Database I/O
# ---------------------------------------------------------------------------


def alert_row_dict(row: Any) -> dict[str, Any]:
    """An ``alerts`` row as a dict with millisecond times (the API formats them)."""
    return {
        "id": int(row.id),
        "device_id": row.device_id,
        "kind": row.kind,
        "severity": row.severity,
        "state": row.state,
        "opened_ms": int(row.opened_ms),
        "updated_ms": int(row.updated_ms),
        "resolved_ms": None if row.resolved_ms is None else int(row.resolved_ms),
        "summary": row.summary,
        "evidence": row.evidence,
        "reopen_count": int(row.reopen_count or 0),
    }


def load_overrides(conn: Connection) -> dict[tuple[str, str], dict[str, Any]]:
    rows = conn.execute(sa.select(db.alert_policies)).fetchall()
    return {(r.scope, r.name): dict(r.thresholds or {}) for r in rows}


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


def set_policy(engine: Engine, scope: str, name: str, thresholds: Mapping[str, Any]) -> None:
    """Store threshold overrides for a ``device`` or ``site`` (validated against AlertPolicy)."""
    if scope not in ("device", "site"):
        raise AlertError("scope must be 'device' or 'site'")
    AlertPolicy().with_overrides(thresholds)
    t = db.alert_policies
    with engine.begin() as conn:
        conn.execute(t.delete().where(t.c.scope == scope, t.c.name == name))
        conn.execute(
            t.insert().values(
                scope=scope, name=name, thresholds=dict(thresholds), updated_ms=db.now_ms()
            )
        )


def active_maintenance(conn: Connection, device_id: str, site: str | None) -> list[tuple[int, int]]:
    """Maintenance windows (start, end) [ms] that cover this device or its site."""
    m = db.maintenance_windows
    cond = m.c.device_id == device_id
    if site is not None:
        cond = sa.or_(cond, sa.and_(m.c.device_id.is_(None), m.c.site == site))
    rows = conn.execute(sa.select(m.c.start_ms, m.c.end_ms).where(cond)).fetchall()
    return [(int(r.start_ms), int(r.end_ms)) for r in rows]


def _release_held(conn: Connection, device_id: str, reference_ms: int) -> None:
    """Maintenance over: held notices of alerts still open go out once, the rest are dropped."""
    n = db.notifications
    held = conn.execute(
        sa.select(n.c.id, n.c.alert_id, n.c.hold_until_ms, n.c.site, n.c.kind)
        .where(n.c.device_id == device_id, n.c.state == "held", n.c.hold_until_ms <= reference_ms)
        .order_by(n.c.id)
    ).fetchall()
    if not held:
        return
    by_alert: dict[int, list[Any]] = {}
    for r in held:
        by_alert.setdefault(int(r.alert_id), []).append(r)
    for alert_id, rs in by_alert.items():
        conn.execute(
            n.update()
            .where(n.c.id.in_([r.id for r in rs]))
            .values(state="suppressed", mqtt_state="suppressed")
        )
        row = conn.execute(sa.select(db.alerts).where(db.alerts.c.id == alert_id)).one()
        if row.state in OPEN_STATES:
            at = max(int(r.hold_until_ms) for r in rs)
            conn.execute(
                n.insert().values(
                    created_ms=db.now_ms(), event_ms=at, event="alert.opened",
                    alert_id=alert_id, device_id=device_id, site=rs[0].site, kind=rs[0].kind,
                    payload=_jsonable(
                        {
                            "alert": alert_row_dict(row),
                            "change": "alert.opened",
                            "after_maintenance": True,
                        }
                    ),
                    state="pending", hold_until_ms=None, mqtt_state="pending",
                )
            )  # fmt: skip


#: Reading columns the rules use, in the order ``_load_readings`` fetches them.
_READ_COLUMNS = (
    "ts_ms", "t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh",
)  # fmt: skip


def _load_readings(
    conn: Connection, device_id: str, after_ms: int, before_ms: int | None = None
) -> pd.DataFrame:
    """Readings of one device newer than ``after_ms`` [ms] (and older than ``before_ms``),
    oldest first, as float columns (``ts_ms`` int64; a missing humidity is NaN)."""
    end = 2**62 if before_ms is None else int(before_ms)
    arr = db.read_arrays(conn, device_id, _READ_COLUMNS, int(after_ms) + 1, end)
    data: dict[str, Any] = {c: arr[:, k] for k, c in enumerate(_READ_COLUMNS)}
    data["ts_ms"] = arr[:, 0].astype(np.int64)
    return pd.DataFrame(data)


def _estimates(
    conn: Connection, device_id: str, keys: Sequence[str], after_ms: int
) -> dict[str, list[tuple[int, float]]]:
    e = db.estimates
    rows = conn.execute(
        sa.select(e.c.key, e.c.at_ms, e.c.value)
        .where(
            e.c.device_id == device_id, e.c.key.in_(keys), e.c.reliable.is_(True),
            e.c.value.is_not(None), e.c.at_ms > after_ms,
        )
        .order_by(e.c.at_ms)
    ).fetchall()  # fmt: skip
    out: dict[str, list[tuple[int, float]]] = {}
    for r in rows:
        out.setdefault(r.key, []).append((int(r.at_ms), float(r.value)))
    return out


_TREND_KEYS = {
    "module_wear": WEAR_KEYS,
    "heat_leak": LEAK_KEYS,
    "hot_side_cooling": HOT_KEYS,
    "capacity_shortfall": CAPACITY_KEYS,
}


def _track_taint(state: dict[str, Any], sf: Mapping[str, Any], policy: AlertPolicy) -> None:
    """Keep the spans [start, end] [ms] in which a sensor fault put a channel in doubt.

    A span starts ``stuck_window_s`` before the fault's spell (a frozen channel shows only
    after that window) and stays open while the spell lasts; it ends when the spell does.
    Spells of spikes or dropouts alone do not count.
    """
    spans: list[list[int | None]] = state.setdefault("sensor_taint", [])
    ep = sf.get("ep")
    issues = (sf.get("detail") or {}).get("issues", [])
    is_open = bool(spans) and spans[-1][1] is None
    if ep is not None and _channel_fault(issues):
        if not is_open:
            spans.append([int(ep["start"]) - int(policy.stuck_window_s * 1000), None])
    elif ep is None and is_open:
        spans[-1][1] = int(sf.get("last_t") or 0)
    del spans[:-20]  # a bounded history is enough for the taint horizon


def _tainted(t: int, spans: Sequence[tuple[Any, ...]], after_ms: int) -> bool:
    return any(a <= t and (b is None or t <= b + after_ms) for a, b in spans)


def _i_ref(module: Mapping[str, Any] | None) -> float | None:
    # Only the registered rating: a "largest current seen" would depend on how much history
    # a call happens to load, and evaluation has to be reproducible.
    if module and module.get("i_max_a"):
        return float(module["i_max_a"])
    return None


def _module_constants(module: Mapping[str, Any] | None) -> tuple[float, float] | None:
    """Seebeck coefficient [V/K] and thermal conductance [W/K] of the registered module(s),
    from the ratings (see tecfleet.analytics.physics.parameters_from_ratings)."""
    if not module:
        return None
    try:
        params = physics.parameters_from_ratings(
            float(module["i_max_a"]),
            float(module["v_max_v"]),
            float(module["dt_max_k"]),
            float(module.get("t_hot_rated_c") or 27.0) + T0,
            q_max=None if module.get("q_max_w") is None else float(module["q_max_w"]),
            n_couples=None if module.get("couples") is None else int(module["couples"]),
        )
        params = physics.modules_in_series(params, int(module.get("count") or 1))
    except (KeyError, TypeError, ValueError):
        return None
    return float(params.seebeck), float(params.conductance)


def _probe_baseline(
    conn: Connection, dev: Any, state: dict[str, Any], policy: AlertPolicy, newest_ms: int
) -> dict[str, Any] | None:
    """The commissioning fit of the cabinet probe against the cold side's heat balance, made
    once over the first ``drift_baseline_s`` of the unit's readings and kept in ``state``."""
    if "probe_baseline" in state:
        kept = state["probe_baseline"]
        return kept if isinstance(kept, dict) and "r_cold" in kept else None
    if not dev.module:
        return None
    r = db.readings
    first_ms = conn.execute(
        sa.select(sa.func.min(r.c.ts_ms)).where(r.c.device_id == dev.device_id)
    ).scalar()
    if first_ms is None:
        return None
    end_ms = int(first_ms) + int(policy.drift_baseline_s * 1000)
    if newest_ms < end_ms:
        return None  # not enough history yet
    consts = _module_constants(dev.module)
    if consts is None:
        state["probe_baseline"] = {"from_ms": int(first_ms), "to_ms": end_ms}
        return None
    base = _load_readings(conn, dev.device_id, int(first_ms) - 1, end_ms)
    qc = cold_side_heat_balance(
        base["current"].to_numpy(np.float64), base["t_cold"].to_numpy(np.float64),
        base["t_hot"].to_numpy(np.float64), base["voltage"].to_numpy(np.float64), *consts,
    )  # fmt: skip
    fit = fit_cold_side_baseline(
        base["t_cabinet"].to_numpy(np.float64),
        base["t_cold"].to_numpy(np.float64),
        qc,
        base["current"].to_numpy(np.float64) > policy.drift_min_current_a,
    )
    if fit is None:
        state["probe_baseline"] = {"from_ms": int(first_ms), "to_ms": end_ms}
        return None
    state["probe_baseline"] = {
        "from_ms": int(first_ms), "to_ms": end_ms, "offset_k": fit[0], "r_cold": fit[1],
        "seebeck": consts[0], "conductance": consts[1],
    }  # fmt: skip
    return dict(state["probe_baseline"])


def _probe_offsets(
    frame: pd.DataFrame, first: int, baseline: Mapping[str, Any], policy: AlertPolicy
) -> FloatArray:
    """Per row of ``frame``, the cabinet probe's change against its commissioning heat
    balance [K]; NaN before the commissioning window ended."""
    t = frame["ts_ms"].to_numpy(np.int64)
    cur = frame["current"].to_numpy(np.float64)
    qc = cold_side_heat_balance(
        cur, frame["t_cold"].to_numpy(np.float64), frame["t_hot"].to_numpy(np.float64),
        frame["voltage"].to_numpy(np.float64), float(baseline["seebeck"]),
        float(baseline["conductance"]),
    )  # fmt: skip
    off = cabinet_probe_offset(
        t, frame["t_cabinet"].to_numpy(np.float64), frame["t_cold"].to_numpy(np.float64), qc,
        cur > policy.drift_min_current_a, (float(baseline["offset_k"]), float(baseline["r_cold"])),
        policy.drift_window_s, policy.drift_min_samples,
    )  # fmt: skip
    off[t < int(baseline["to_ms"])] = np.nan
    return off


def _drift_since(
    t_new: IntArray, offset_new: FloatArray, state: dict[str, Any], quarter_k: float
) -> IntArray:
    """Start [ms] of the run of rows whose probe change is at least ``quarter_k`` [K] that
    each row belongs to (0 outside one); rows without an estimate (NaN) neither start nor
    end a run. The run open at the end is kept in ``state``."""
    if offset_new.size == 0:
        return np.zeros(0, np.int64)
    carried = state.get("probe_drift_since")
    known = np.isfinite(offset_new)
    with np.errstate(invalid="ignore"):
        det = np.where(known, (np.abs(offset_new) >= quarter_k).astype(np.int64), -1)
    pos = np.maximum.accumulate(np.where(known, np.arange(det.size), -1))
    q = np.where(pos >= 0, det[np.maximum(pos, 0)] == 1, carried is not None)
    prev = np.concatenate([[False], q[:-1]])
    starts = np.where(q & ~prev, t_new, 0).astype(np.int64)
    if q[0] and carried is not None:
        starts[0] = int(carried)
    run = np.maximum.accumulate(starts)
    run = np.where(q, run, 0)
    state["probe_drift_since"] = int(run[-1]) if q[-1] else None
    return run


def _evaluate_device(
    conn: Connection, dev: Any, policy: AlertPolicy, reference_ms: int
) -> list[AlertChange]:
    prog = conn.execute(
        sa.select(db.alert_progress.c.done_ms, db.alert_progress.c.state).where(
            db.alert_progress.c.device_id == dev.device_id
        )
    ).first()
    done = int(prog.done_ms) if prog is not None else -1
    state: dict[str, Any] = dict(prog.state) if prog is not None else {}
    lookback = int(
        max(policy.mkt_window_s, policy.stuck_window_s, policy.impossible_on_s, 3600) * 1000
    )
    frame = _load_readings(conn, dev.device_id, done - lookback - 3 * MS_HOUR)
    t_all = frame["ts_ms"].to_numpy(np.int64)
    interval_all = usual_interval_ms(t_all)
    first = int(np.searchsorted(t_all, done, side="right"))
    new = frame.iloc[first:]
    t_new = t_all[first:]
    ledger = _Ledger(conn, dev, policy, active_maintenance(conn, dev.device_id, dev.site))
    band = policy.band(dev.cabinet)
    kinds: dict[str, dict[str, Any]] = state.setdefault("kinds", {})

    def run(kind: str, obs: Observations, context: Callable[[int], dict[str, Any]]) -> None:
        _run_machine(
            kind, obs, kinds.setdefault(kind, {}), _timing(kind, policy), policy, ledger, context
        )

    def excursion_context(t: int) -> dict[str, Any]:
        w0 = t - int(policy.mkt_window_s * 1000)
        m = (t_all > w0) & (t_all <= t)
        tc = frame["t_cabinet"].to_numpy(np.float64)[m]
        ctx: dict[str, Any] = {
            "profile": policy.profile, "low_limit_c": band.low_c, "high_limit_c": band.high_c,
            "critical_low_c": band.critical_low_c, "critical_high_c": band.critical_high_c,
            "limits_source": band.source, "window_s": policy.mkt_window_s,
            "window_start_ms": w0, "window_end_ms": t,
        }  # fmt: skip
        if tc.size:
            inside = (tc >= band.low_c) & (tc <= band.high_c)
            ctx["time_in_range_pct"] = round(100.0 * float(np.mean(inside)), 2)
            ctx["mkt_c"] = round(mean_kinetic_temperature(tc, policy.mkt_activation_j_per_mol), 3)
            ctx["mkt_activation_kj_per_mol"] = policy.mkt_activation_j_per_mol / 1000.0
            ctx["mean_c"] = round(float(np.mean(tc)), 3)
            ctx["samples"] = int(tc.size)
        return ctx

    if len(t_new):
        run(
            "excursion",
            excursion_observations(t_new, new["t_cabinet"].to_numpy(np.float64), band),
            excursion_context,
        )
        run(
            "over_temperature",
            over_temperature_observations(
                t_new,
                new["t_hot"].to_numpy(np.float64),
                policy.over_temperature_warning_c,
                policy.over_temperature_critical_c,
                policy.over_temperature_hysteresis_k,
            ),
            lambda _t: {
                "warning_c": policy.over_temperature_warning_c,
                "critical_c": policy.over_temperature_critical_c,
            },
        )
        check = policy.condensation_check
        if check is None:
            check = policy.profile == "enclosure"
        if check:
            run(
                "condensation_risk",
                condensation_observations(
                    t_new,
                    new["t_cold"].to_numpy(np.float64),
                    new["t_ambient"].to_numpy(np.float64),
                    new["rh"].to_numpy(np.float64),
                    policy.condensation_margin_k,
                    policy.condensation_critical_k,
                    policy.condensation_hysteresis_k,
                ),
                lambda _t: {"margin_k": policy.condensation_margin_k},
            )
        baseline = _probe_baseline(conn, dev, state, policy, int(t_all[-1]))
        offsets = None if baseline is None else _probe_offsets(frame, first, baseline, policy)
        sf = sensor_fault_observations(
            frame, first, policy, _i_ref(dev.module), interval_all, offsets
        )
        if offsets is not None and sf.detail is not None:
            since = _drift_since(t_new, offsets[first:], state, policy.drift_warning_k / 4)
            for i in np.flatnonzero(sf.active):
                if PROBE_DRIFT_ISSUE in sf.detail[i]["issues"]:
                    sf.detail[i]["cabinet_probe_offset_k"] = round(float(offsets[first + i]), 2)
                    sf.detail[i]["cabinet_probe_offset_since_ms"] = int(since[i]) or None
                    sf.detail[i]["cabinet_probe_baseline"] = baseline
        run(
            "sensor_fault",
            sf,
            lambda _t: {"suppressed": dict(state.get("suppressed", {}))},
        )
        _track_taint(state, kinds.get("sensor_fault", {}), policy)
    if len(t_all):
        usual = float(interval_all[-1]) if np.isfinite(interval_all[-1]) else float("nan")

        def offline_context(t: int) -> dict[str, Any]:
            before = t_all[t_all <= t]
            last = int(before[-1]) if before.size else int(t_all[0])
            return {
                "last_reading_ms": last, "silent_ms": max(reference_ms, t) - last,
                "usual_interval_s": round(usual / 1000.0, 1) if math.isfinite(usual) else None,
                "reference_ms": reference_ms,
            }  # fmt: skip

        run(
            "offline",
            offline_observations(
                t_all,
                max(first, 1),
                reference_ms,
                dev.status,
                dev.status_at_ms,
                policy,
                interval_all,
            ),
            offline_context,
        )
    est_done = int(state.get("est_done", -1))
    newest_est = est_done
    # judge estimates only once the sensor rule has seen the readings behind them
    cutoff = (int(t_all[-1]) if len(t_all) else done) - int(policy.trend_settle_s * 1000)
    taints = [tuple(x) for x in state.get("sensor_taint", [])]
    taint_after = int(policy.sensor_taint_after_s * 1000)
    all_keys = [k for keys in _TREND_KEYS.values() for k in keys]
    every = _estimates(conn, dev.device_id, all_keys, est_done - 3 * MS_DAY)
    for kind, keys in _TREND_KEYS.items():
        series = {k: v for k, v in every.items() if k in keys}
        obs = trend_observations(kind, series, policy)
        keep = (obs.t > est_done) & (obs.t <= cutoff)
        if len(obs.t) and taints:
            bad = np.array([_tainted(int(t), taints, taint_after) for t in obs.t], dtype=bool)
            hidden = keep & bad & obs.active
            if hidden.any():
                # the condition rests on a faulty channel: recorded on the sensor alert only
                sup = state.setdefault("suppressed", {})
                peak = float(np.max(obs.value[hidden]))
                sup[kind] = {"at_ms": int(obs.t[hidden][-1]), "value": round(peak, 3)}
            newest_est = max(newest_est, int(obs.t[keep][-1])) if keep.any() else newest_est
            keep &= ~bad
        if obs.detail is not None:
            obs = Observations(
                obs.t[keep], obs.active[keep], obs.hold[keep], obs.severity[keep], obs.value[keep],
                [d for d, k in zip(obs.detail, keep, strict=True) if k],
            )  # fmt: skip
        if len(obs.t):
            newest_est = max(newest_est, int(obs.t[-1]))
        run(kind, obs, lambda _t: {"wear_limit_pct": policy.wear_limit_pct})
    state["est_done"] = newest_est
    _release_held(conn, dev.device_id, reference_ms)
    new_done = int(t_all[-1]) if len(t_all) else done
    p = db.alert_progress
    conn.execute(p.delete().where(p.c.device_id == dev.device_id))
    conn.execute(
        p.insert().values(
            device_id=dev.device_id,
            done_ms=new_done,
            state=_jsonable(state),
            updated_ms=db.now_ms(),
        )
    )
    return ledger.changes


def evaluate(
    engine: Engine,
    *,
    device_id: str | None = None,
    policy: AlertPolicy | None = None,
    now_ms: int | None = None,
) -> list[AlertChange]:
    """Bring every device's alerts (or one device's) up to its newest stored reading.

    ``now_ms`` [ms] is the wall clock of the live service, used only to judge silence
    (offline); without it silence is judged against the newest reading of the whole fleet,
    so an analysis of stored history is reproducible. Each device is evaluated in its own
    transaction: alert changes, audit rows, outbox notices and progress commit together.
    Returns the changes made, in time order per device.
    """
    base = policy or AlertPolicy()
    d = db.devices
    try:
        with engine.connect() as conn:
            fleet_newest = conn.execute(sa.select(sa.func.max(d.c.last_reading_ms))).scalar()
            q = sa.select(
                d.c.device_id, d.c.site, d.c.module, d.c.cabinet, d.c.status, d.c.status_at_ms,
                d.c.last_reading_ms,
            ).order_by(d.c.device_id)  # fmt: skip
            if device_id is not None:
                q = q.where(d.c.device_id == device_id)
            devs = conn.execute(q).fetchall()
            overrides = load_overrides(conn)
        if device_id is not None and not devs:
            raise NotFoundError(f"unknown device {device_id!r}")
        reference = now_ms if now_ms is not None else int(fleet_newest or 0)
        changes: list[AlertChange] = []
        for dev in devs:
            if dev.last_reading_ms is None:
                continue
            p = policy_for(base, overrides, dev.device_id, dev.site)
            with engine.begin() as conn:
                changes.extend(_evaluate_device(conn, dev, p, reference))
        return changes
    except SQLAlchemyError as exc:
        raise StoreError(f"alert evaluation failed: {exc}") from exc


def acknowledge(
    engine: Engine, alert_id: int, actor: str, note: str | None = None
) -> dict[str, Any]:
    """Mark an open alert acknowledged by ``actor`` (audited, notified); idempotent."""
    a = db.alerts
    now = db.now_ms()
    try:
        with engine.begin() as conn:
            row = conn.execute(sa.select(a).where(a.c.id == alert_id)).first()
            if row is None:
                raise NotFoundError(f"unknown alert {alert_id}")
            if row.state == "open":
                conn.execute(
                    a.update()
                    .where(a.c.id == alert_id)
                    .values(state="acknowledged", updated_ms=now)
                )
                conn.execute(
                    db.alert_audit.insert().values(
                        alert_id=alert_id, at_ms=now, from_state="open", to_state="acknowledged",
                        severity=row.severity, actor=actor[:200], note=note,
                    )
                )  # fmt: skip
                row = conn.execute(sa.select(a).where(a.c.id == alert_id)).one()
                site = conn.execute(
                    sa.select(db.devices.c.site).where(db.devices.c.device_id == row.device_id)
                ).scalar()
                conn.execute(
                    db.notifications.insert().values(
                        created_ms=now, event_ms=now, event="alert.acknowledged", alert_id=alert_id,
                        device_id=row.device_id, site=site, kind=row.kind,
                        payload=_jsonable(
                            {
                                "alert": alert_row_dict(row),
                                "change": "alert.acknowledged",
                                "by": actor,
                            }
                        ),
                        state="pending", mqtt_state="pending",
                    )
                )  # fmt: skip
            return alert_row_dict(row)
    except SQLAlchemyError as exc:
        raise StoreError(f"could not acknowledge alert {alert_id}: {exc}") from exc


def audit_trail(engine: Engine, alert_id: int) -> list[dict[str, Any]]:
    """State changes of one alert, oldest first."""
    t = db.alert_audit
    with engine.connect() as conn:
        rows = conn.execute(
            sa.select(t).where(t.c.alert_id == alert_id).order_by(t.c.id)
        ).fetchall()
    return [
        {
            "at_ms": int(r.at_ms), "from_state": r.from_state, "to_state": r.to_state,
            "severity": r.severity, "actor": r.actor, "note": r.note,
        }
        for r in rows
    ]  # fmt: skip


def add_maintenance(
    engine: Engine,
    start_ms: int,
    end_ms: int,
    *,
    device_id: str | None = None,
    site: str | None = None,
    reason: str | None = None,
    created_by: str | None = None,
) -> int:
    """Silence a device or a whole site between ``start_ms`` and ``end_ms`` [ms, event time]."""
    if (device_id is None) == (site is None):
        raise AlertError("a maintenance window names either a device or a site")
    if end_ms <= start_ms:
        raise AlertError("a maintenance window must end after it starts")
    with engine.begin() as conn:
        return int(
            conn.execute(
                db.maintenance_windows.insert()
                .values(
                    device_id=device_id, site=site, start_ms=start_ms, end_ms=end_ms,
                    reason=reason, created_ms=db.now_ms(), created_by=created_by,
                )
                .returning(db.maintenance_windows.c.id)
            ).scalar_one()
        )  # fmt: skip
