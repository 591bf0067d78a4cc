"""Synthetic readings of one cabinet for the alert tests."""

from __future__ import annotations

import math

from tecfleet.analytics import alerts
from tecfleet.ingest.db import Reading

T0 = 1_790_000_000_000  # an arbitrary start, epoch ms
MIN = 60_000


def cabinet_series(
    n: int, *, hot: tuple[int, int] | None = None, hot_c: float = 10.0
) -> list[Reading]:
    """Healthy 1-minute readings of a 5 °C cabinet whose channels all wander a little;
    cabinet at ``hot_c`` (+0.1 K every other minute) for minutes [a, b) of ``hot``."""
    out = []
    for i in range(n):
        wobble = 0.3 * math.sin(i / 17.0)
        t_cab = 5.0 + wobble
        if hot is not None and hot[0] <= i < hot[1]:
            t_cab = hot_c + (0.1 if i % 2 else 0.0)  # a live probe flickers by one step
        out.append(
            Reading(
                "cab-1",
                T0 + i * MIN,
                round(t_cab, 2),
                round(-1.0 + wobble, 2),
                round(30.0 + 0.5 * math.cos(i / 13.0), 2),
                round(22.0 + 0.2 * math.sin(i / 29.0), 2),
                3.0,
                8.0,
                seq=i,
                rh=45.0,
            )
        )
    return out


def kinds(changes: list[alerts.AlertChange]) -> list[tuple[str, str]]:
    return [(c.kind, c.change) for c in changes]
