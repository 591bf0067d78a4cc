"""The alert rules, one module per kind, registered in one table.

Each rule is a pure function from readings (or stored estimates) to a per-sample
:class:`~tecfleet.analytics.alerts.observations.Observations`; its ``observe`` entry applies
it to one device's :class:`~tecfleet.analytics.alerts.scope.DeviceScope` (None: nothing to
judge this call), its ``evidence`` entry builds the facts the alert carries at a time [ms],
and ``after`` runs once the kind's lifecycle has taken the observations.

``RULES`` is in evaluation order, which is also the order in which new alerts of one device
get their ids. The rules that find a cause (the estimate rules, see ``incidents.LINKS``) run
before those of the symptoms they explain, so that in one call over weeks of history (a
backfill) a symptom already sees its cause's whole record: a spell that comes back while the
cause is open continues the symptom's alert instead of opening a new one. The sensor rule runs
before the estimate rules, which it holds back while a channel is in doubt.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from tecfleet.analytics.alerts.observations import Observations
from tecfleet.analytics.alerts.policy import AlertPolicy
from tecfleet.analytics.alerts.rules import (
    commissioning,
    condensation,
    excursion,
    offline,
    over_temperature,
    sensor_fault,
)
from tecfleet.analytics.alerts.rules.capacity import capacity_observations
from tecfleet.analytics.alerts.rules.estimates import (
    Judge,
    estimate_evidence,
    estimate_observer,
)
from tecfleet.analytics.alerts.rules.trends import (
    heat_leak_observations,
    hot_side_observations,
    module_wear_observations,
)
from tecfleet.analytics.alerts.scope import DeviceScope

__all__ = ["RULES", "TREND_JUDGES", "Rule", "trend_observations"]


@dataclass(frozen=True)
class Rule:
    """One kind of alert: how to observe it on a device and what its evidence holds."""

    kind: str
    observe: Callable[[DeviceScope], Observations | None]
    evidence: Callable[[DeviceScope], Callable[[int], dict[str, Any]]]
    after: Callable[[DeviceScope], None] | None = None


#: The rules judged on the diagnostics' estimates, in evaluation order.
TREND_JUDGES: dict[str, Judge] = {
    "module_wear": module_wear_observations,
    "heat_leak": heat_leak_observations,
    "hot_side_cooling": hot_side_observations,
    "capacity_shortfall": capacity_observations,
}

RULES: tuple[Rule, ...] = (
    Rule("sensor_fault", sensor_fault.observe, sensor_fault.evidence, sensor_fault.track_taint),
    Rule("offline", offline.observe, offline.evidence),
    *(
        Rule(kind, estimate_observer(kind, judge), estimate_evidence)
        for kind, judge in TREND_JUDGES.items()
    ),
    Rule("excursion", excursion.observe, excursion.evidence),
    Rule("pull_down_overdue", commissioning.observe, commissioning.evidence),
    Rule("over_temperature", over_temperature.observe, over_temperature.evidence),
    Rule("condensation_risk", condensation.observe, condensation.evidence),
)


def trend_observations(
    kind: str, series: Mapping[str, Sequence[tuple[int, float]]], policy: AlertPolicy
) -> Observations:
    """Trend rules on estimates: ``series`` maps estimate key -> [(at_ms, value)] in time
    order (reliable ones only). One observation per time of the rule's primary key, with the
    newest value of every other key at or before it in ``detail``."""
    return TREND_JUDGES[kind](series, policy)
