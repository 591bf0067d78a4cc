"""Request and response bodies of the REST API, one module per resource."""

from tecfleet.api.schemas.alerts import (
    AckIn,
    AlertDetailOut,
    AlertOut,
    AuditEntryOut,
    SymptomOut,
    alert_object,
)
from tecfleet.api.schemas.common import (
    KEYED,
    KEYED_LOOKUP,
    ErrorOut,
    Page,
    error_responses,
    json_error_responses,
)
from tecfleet.api.schemas.devices import CabinetIn, DeviceDetail, DeviceIn, DeviceOut, ModuleIn
from tecfleet.api.schemas.health import EstimateOut, EstimatePointOut, HealthOut
from tecfleet.api.schemas.maintenance import MaintenanceIn, MaintenanceOut
from tecfleet.api.schemas.policies import PolicyOut
from tecfleet.api.schemas.readings import ReadingOut
from tecfleet.api.schemas.rejects import RejectOut
from tecfleet.api.schemas.system import HealthzOut, ReadyOut
from tecfleet.api.schemas.webhooks import DeliveryOut, WebhookCreatedOut, WebhookIn, WebhookOut

__all__ = [
    "KEYED",
    "KEYED_LOOKUP",
    "AckIn",
    "AlertDetailOut",
    "AlertOut",
    "AuditEntryOut",
    "CabinetIn",
    "DeliveryOut",
    "DeviceDetail",
    "DeviceIn",
    "DeviceOut",
    "ErrorOut",
    "EstimateOut",
    "EstimatePointOut",
    "HealthOut",
    "HealthzOut",
    "MaintenanceIn",
    "MaintenanceOut",
    "ModuleIn",
    "Page",
    "PolicyOut",
    "ReadingOut",
    "ReadyOut",
    "RejectOut",
    "SymptomOut",
    "WebhookCreatedOut",
    "WebhookIn",
    "WebhookOut",
    "alert_object",
    "error_responses",
    "json_error_responses",
]
