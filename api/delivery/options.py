"""The tunables of notice delivery, in one frozen object."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class DeliveryOptions:
    """How often, how patiently and how grouped notices go out.

    Defaults are common practice, no source.
    """

    #: Pause between outbox rounds [s].
    poll_s: float = 1.0
    #: HTTP timeout of one webhook attempt, and wait for the broker [s].
    timeout_s: float = 10.0
    #: Attempts before a delivery is dead [count].
    max_attempts: int = 8
    #: First retry delay, doubled after every failure [s].
    backoff_s: float = 5.0
    #: Longest retry delay [s].
    backoff_max_s: float = 3600.0
    #: Devices of one site and kind in one window that make a grouped notice [count].
    group_min_devices: int = 3
    #: Width of a grouping window of event times [ms].
    group_window_ms: int = 900_000
    #: How long an "opened" notice waits for the rest of a site-wide event [ms].
    group_hold_ms: int = 10_000
    #: Webhook deliveries one process claims at a time [count]; each claim lasts twice the
    #: time their attempts can take.
    claim_batch: int = 20
