"""Alert rules and their lifecycle, evaluated on event time.

Each rule (``rules/``, one module per kind, registered in ``rules.RULES``) is a pure function
from readings (or stored estimates) to a per-sample observation: is the condition present,
how bad (warning or critical), and the value whose peak matters. A small state machine per
device and kind (``machine``) turns observations into alerts, and the ledger (``ledger``)
records each change with its audit row and its notification in the same transaction;
``incidents`` groups symptom alerts under the alert of their cause and decides which changes
are sent (an incident is told when it opens, worsens and resolves).
``engine.evaluate`` runs it all per device; ``summaries`` words each change; ``policy`` holds
every threshold with its source; ``actions`` holds what people do with alerts.

Cautions: these alerts support, and do not replace, the monitoring that medicines, vaccines,
samples or food require. Storage of medicines follows the maker's instructions, local
regulations and licensed practice; an excursion alert is a prompt to assess the stock against
them, not a verdict on it. Condensation near electronics needs a qualified person's judgement
under local electrical codes.
"""

from tecfleet.analytics.alerts.actions import acknowledge, add_maintenance, audit_trail, set_policy
from tecfleet.analytics.alerts.engine import evaluate
from tecfleet.analytics.alerts.kinds import ESTIMATE_KINDS, KINDS, SEVERITIES
from tecfleet.analytics.alerts.ledger import AlertChange
from tecfleet.analytics.alerts.observations import Observations
from tecfleet.analytics.alerts.policy import PROFILES, AlertPolicy, Band, policy_for
from tecfleet.analytics.alerts.rules import trend_observations
from tecfleet.analytics.alerts.rules.condensation import condensation_observations
from tecfleet.analytics.alerts.rules.excursion import (
    excursion_observations,
    mean_kinetic_temperature,
)
from tecfleet.analytics.alerts.rules.offline import offline_observations
from tecfleet.analytics.alerts.rules.over_temperature import over_temperature_observations
from tecfleet.analytics.alerts.rules.probe_drift import (
    cabinet_probe_offset,
    cold_side_heat_balance,
    fit_cold_side_baseline,
)
from tecfleet.analytics.alerts.rules.sensor_fault import sensor_fault_observations

__all__ = [
    "ESTIMATE_KINDS",
    "KINDS",
    "PROFILES",
    "SEVERITIES",
    "AlertChange",
    "AlertPolicy",
    "Band",
    "Observations",
    "acknowledge",
    "add_maintenance",
    "audit_trail",
    "cabinet_probe_offset",
    "cold_side_heat_balance",
    "condensation_observations",
    "evaluate",
    "excursion_observations",
    "fit_cold_side_baseline",
    "mean_kinetic_temperature",
    "offline_observations",
    "over_temperature_observations",
    "policy_for",
    "sensor_fault_observations",
    "set_policy",
    "trend_observations",
]
