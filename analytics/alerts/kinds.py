"""The kinds of alert, their severities and states, and which kinds rest on estimates."""

from __future__ import annotations

from collections.abc import Sequence

from tecfleet.ingest.db.alert_records import OPEN_STATES

__all__ = ["ESTIMATE_KINDS", "KINDS", "OPEN_STATES", "SEVERITIES", "channel_fault"]

KINDS = (
    "excursion",
    "pull_down_overdue",
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

#: Alert kinds judged on the diagnostics' estimates, which rest on every temperature channel
#: and on the module's current and voltage (see tecfleet.analytics.runner).
ESTIMATE_KINDS = ("module_wear", "heat_leak", "hot_side_cooling", "capacity_shortfall")
#: Sensor-fault issues that do not falsify estimates: the diagnostics filter spikes, and a
#: missing sample is just missing.
_HARMLESS_ISSUES = ("spikes", "dropouts")


def channel_fault(issues: Sequence[str]) -> bool:
    """Whether sensor issues put a channel's values in doubt (stuck, out of range, ...)."""
    return any(i not in _HARMLESS_ISSUES for i in issues)
