"""One sentence and the evidence for each alert change, per kind, with the cautions.

Cautions: these alerts support, and do not replace, the monitoring that medicines, vaccines,
samples or food require. Storage of medicines follows the maker's instructions, local
regulations and licensed practice; an excursion alert is a prompt to assess the stock against
them, not a verdict on it. Condensation near electronics needs a qualified person's judgement
under local electrical codes.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from typing import Any

import pandas as pd

from tecfleet.analytics.alerts.constants import MS_MIN
from tecfleet.analytics.alerts.kinds import ESTIMATE_KINDS, channel_fault

__all__ = ["CONDENSATION_CAUTION", "MEDICINE_CAUTION", "describe"]

MEDICINE_CAUTION = (
    "Assess the stock against the maker's storage instructions and local regulations before "
    "use or disposal; this alert does not decide whether the contents are still usable."
)
CONDENSATION_CAUTION = (
    "Condensation near electronics can cause faults or shocks; have a qualified person check "
    "the unit under local electrical codes."
)

#: A kind's sentence from the evidence (completed in place), the spell, and the spell's
#: lowest and highest values; returns the sentence and the peak the resolution reports.
_Sentence = Callable[[dict[str, Any], Mapping[str, Any], Any, Any], tuple[str, Any]]


def _dur(ms: float) -> str:
    minutes = ms / MS_MIN
    if minutes < 90:
        return f"{minutes:.0f} min"
    if minutes < 48 * 60:
        return f"{minutes / 60:.1f} h"
    return f"{minutes / 1440:.1f} days"


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


def _excursion(ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any) -> tuple[str, Any]:
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
    return s, peak


def _pull_down(ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any) -> tuple[str, Any]:
    ev["lowest_c"] = lo
    began = (
        "it was switched on"
        if ev.get("commissioning_reason") != "maintenance"
        else ("its maintenance ended")
    )
    s = (
        f"Cabinet not yet inside its {ev['low_limit_c']:g}-{ev['high_limit_c']:g} °C band "
        f"{_dur(1000.0 * ev.get('elapsed_s', 0.0))} after {began} (lowest {lo:.1f} °C so far, "
        f"allowed {_dur(1000.0 * ev['pull_down_limit_s'])}); check door, load, fans and "
        "module before stock goes in."
    )
    if ev.get("pull_down_s") is not None:
        s += f" It reached its band after {_dur(1000.0 * ev['pull_down_s'])}."
    return s, lo


def _over_temperature(
    ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any
) -> tuple[str, Any]:
    ev["peak_c"] = hi
    s = (
        f"Hot side reached {hi:.1f} °C (warning {ev['warning_c']:g} °C, limit "
        f"{ev['critical_c']:g} °C); check the hot-side fan, fins and ambient air flow."
    )
    return s, hi


def _condensation(
    ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any
) -> tuple[str, Any]:
    ev["lowest_margin_k"] = lo
    dew = f"{ev.get('dew_point_c', float('nan')):.1f} °C"
    if "t_cold_at_most_c" in ev:
        # no cold-face probe: the air, warmer than the face while it cools, is already wet
        first = (
            f"Cabinet air {ev['t_cold_at_most_c']:.1f} °C, which the unprobed cold side is "
            f"colder than while cooling, is below the ambient dew point {dew} (down to "
            f"{-(lo or 0.0):.1f} K below; the cold side is further below)"
        )
    else:
        first = (
            f"Cold side {ev.get('t_cold_c', float('nan')):.1f} °C is below the ambient dew "
            f"point {dew} (down to {-(lo or 0.0):.1f} K below)"
        )
    return f"{first}; check insulation and seals around the cold side and drain moisture.", lo


def _offline(ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any) -> tuple[str, Any]:
    ev["longest_silence_s"] = hi
    usual = ev.get("usual_interval_s")
    every = f" (usually every {usual:.0f} s)" if usual is not None else ""
    if ev.get("past_outage"):
        start = pd.Timestamp(int(ev["gap_start_ms"]), unit="ms")
        s = (
            f"Past outage: no readings for {_dur(ev.get('silent_ms', 0))} from "
            f"{start:%Y-%m-%d %H:%M} UTC{every}, found in history that arrived later; the "
            "unit reported again afterwards. Check power and network if it recurs."
        )
        return s, hi
    s = f"No readings for {_dur(ev.get('silent_ms', 0))}{every}; check power and network."
    return s, hi


def _sensor_fault(
    ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any
) -> tuple[str, Any]:
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
    replaced = ev.pop("cabinet_probe_replaced_ms", None)
    if off is not None and replaced is not None and spell["start"] < replaced:
        # the spell began on the probe since replaced: what it showed is no longer judged
        ev["cabinet_probe_replaced_ms"] = replaced
        at = pd.Timestamp(int(replaced), unit="ms")
        s += (
            f" The probe was replaced in the maintenance that ended {at:%Y-%m-%d %H:%M} UTC: "
            "from then on it is judged against a commissioning fit of its own."
        )
    if channel_fault(issues):
        ev["held_back"] = list(ESTIMATE_KINDS)
        s += (
            " Module wear, heat leak, hot-side cooling and capacity alerts are held back "
            "while it lasts, as their estimates rest on these readings."
        )
    return s, None


def _module_wear(ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any) -> tuple[str, Any]:
    change = ev.get("module.resistance_25c.change_pct", float("nan"))
    base = ev.get("module.resistance_25c.baseline")
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
    return s, hi


def _heat_leak(ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any) -> tuple[str, Any]:
    change = ev.get("cabinet.ua.change_pct", float("nan"))
    base = ev.get("cabinet.ua.baseline")
    s = f"Cabinet heat leak (UA) has risen {change:.0f}% since commissioning"
    now = _recent(ev, "cabinet.ua", base, change)
    if now is not None:
        s += f" ({base:.3g} -> {now:.3g} W/K)"
    s += "; check the door seal, hinges and insulation."
    return s, hi


def _hot_side(ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any) -> tuple[str, Any]:
    change = ev.get("hot_side.resistance.change_pct", float("nan"))
    base = ev.get("hot_side.resistance.baseline")
    s = f"Hot-side thermal resistance has risen {change:.0f}%"
    now = _recent(ev, "hot_side.resistance", base, change)
    if now is not None:
        s += f" ({base:.3f} -> {now:.3f} K/W)"
    s += "; clean the fins and check the hot-side fan."
    return s, hi


#: Where the design ambient came from, by ``capacity.design_ambient_basis`` (the codes of
#: tecfleet.analytics.runner.daily).
_DESIGN_AMBIENT_BASIS = {
    0: "the fleet default",
    1: "the site's registration",
    2: "the warmest hours of its own ambient",
}


def _capacity(ev: dict[str, Any], spell: Mapping[str, Any], lo: Any, hi: Any) -> tuple[str, Any]:
    margin = ev.get("capacity.margin_median_w", ev.get("capacity.margin_w", float("nan")))
    frac = ev.get("capacity.margin_fraction")
    days = ev.get("capacity.days_judged", 1)
    ambient = ev.get("capacity.design_ambient_c")
    basis = ev.get("capacity.design_ambient_basis")
    at = "At the design ambient"
    if ambient is not None:
        at += f" of {ambient:.1f} °C"
        if basis is not None:
            source = _DESIGN_AMBIENT_BASIS.get(int(basis), "an unknown source")
            ev["capacity.design_ambient_source"] = source
            at += f" (from {source})"
    s = f"{at} the cooler has {margin:.1f} W of cooling to spare"
    if frac is not None and math.isfinite(frac):
        s += f" ({100.0 * frac:.0f}% of its maximum cooling"
        s += f", median of {days} daily figures)" if days > 1 else ")"
    s += " and cannot hold its setpoint there" if ev.get("capacity.holdable", 1.0) < 0.5 else ""
    if ev.get("capacity.losing_setpoint", 0.0) >= 0.5:
        hours = ev.get("capacity.losing_setpoint_h", 0.0)
        s += (
            f"; it is losing its setpoint now ({hours:.0f} h of the last day above it while "
            "driven flat out)"
        )
    s += "; check module, fans and heat leak before warm weather."
    return s, lo


_SENTENCES: dict[str, _Sentence] = {
    "excursion": _excursion,
    "pull_down_overdue": _pull_down,
    "over_temperature": _over_temperature,
    "condensation_risk": _condensation,
    "offline": _offline,
    "sensor_fault": _sensor_fault,
    "module_wear": _module_wear,
    "heat_leak": _heat_leak,
    "hot_side_cooling": _hot_side,
}


def describe(
    kind: str, spell: Mapping[str, Any], extra: Mapping[str, Any], resolved: bool
) -> tuple[str, dict[str, Any]]:
    """One sentence and the evidence for an alert of ``kind`` at a transition."""
    ev: dict[str, Any] = dict(extra)
    ev["spell_start_ms"] = spell["start"]
    ev["active_s"] = round(spell["active_ms"] / 1000.0, 1)
    lo, hi = spell.get("min"), spell.get("max")
    # any other kind is the capacity shortfall
    s, peak = _SENTENCES.get(kind, _capacity)(ev, spell, lo, hi)
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
