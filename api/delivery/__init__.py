"""Delivery of alert notices: the outbox drained to MQTT and to signed webhooks."""

from tecfleet.api.delivery.mqtt import AlertPublisher
from tecfleet.api.delivery.options import DeliveryOptions
from tecfleet.api.delivery.outbox import Notifier, fan_out
from tecfleet.api.delivery.webhooks import (
    ALLOW_PRIVATE_ENV,
    WebhookSender,
    allow_private_default,
    check_url,
    new_secret,
    sign,
    webhook_body,
)

__all__ = [
    "ALLOW_PRIVATE_ENV",
    "AlertPublisher",
    "DeliveryOptions",
    "Notifier",
    "WebhookSender",
    "allow_private_default",
    "check_url",
    "fan_out",
    "new_secret",
    "sign",
    "webhook_body",
]
