"""What one device's evaluation sees: its readings, its policy and its carried state."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from sqlalchemy.engine import Connection

from tecfleet.analytics.alerts.observations import FloatArray, IntArray
from tecfleet.analytics.alerts.policy import AlertPolicy, Band
from tecfleet.ingest import db

__all__ = ["READ_COLUMNS", "DeviceScope", "load_readings", "usual_interval_ms"]

#: Reading columns the rules use, in the order ``load_readings`` fetches them.
READ_COLUMNS = (
    "ts_ms", "t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh",
    "received_ms",
)  # fmt: skip


def load_readings(
    conn: Connection, device_id: str, after_ms: int, before_ms: int | None = None
) -> pd.DataFrame:
    """Readings of one device newer than ``after_ms`` [ms] (and older than ``before_ms``),
    oldest first, as float columns (``ts_ms`` and ``received_ms`` int64; a missing humidity is
    NaN)."""
    end = 2**62 if before_ms is None else int(before_ms)
    arr = db.read_arrays(conn, device_id, READ_COLUMNS, int(after_ms) + 1, end)
    data: dict[str, Any] = {c: arr[:, k] for k, c in enumerate(READ_COLUMNS)}
    data["ts_ms"] = arr[:, 0].astype(np.int64)
    data["received_ms"] = arr[:, -1].astype(np.int64)
    return pd.DataFrame(data)


def usual_interval_ms(t_ms: IntArray, n: int = 60) -> FloatArray:
    """Median spacing of the ``n`` intervals before each sample [ms] (NaN before the 5th)."""
    diffs = pd.Series(np.diff(t_ms.astype(np.float64), prepend=np.nan))
    return np.asarray(diffs.rolling(n, min_periods=5).median().shift(1), np.float64)


@dataclass
class DeviceScope:
    """One device's evaluation: ``frame`` holds the look-back and the new readings, rows
    ``first:`` are the new ones; ``state`` is the JSON carried between calls (rule timers
    under ``state["kinds"]``); ``reference_ms`` [ms] is the time silence is judged against,
    ``receipt_reference_ms`` [ms] the same on the clock of the readings' receipt (the wall
    clock live, else the newest receipt of the fleet; None: not known).
    Rules read what they need from here and may keep their own entries in ``state``;
    ``finishers`` run once every rule has run."""

    conn: Connection
    dev: Any
    policy: AlertPolicy
    reference_ms: int
    done_ms: int
    state: dict[str, Any]
    frame: pd.DataFrame
    first: int
    band: Band
    t_all: IntArray = field(init=False)
    interval_all: FloatArray = field(init=False)
    finishers: list[Callable[[], None]] = field(default_factory=list)
    #: What one rule computes once for the others of its family (see rules.estimates).
    shared: dict[str, Any] = field(default_factory=dict)
    receipt_reference_ms: int | None = None

    def __post_init__(self) -> None:
        self.t_all = self.frame["ts_ms"].to_numpy(np.int64)
        self.interval_all = usual_interval_ms(self.t_all)

    @property
    def new(self) -> pd.DataFrame:
        """The readings not evaluated before."""
        return self.frame.iloc[self.first :]

    @property
    def t_new(self) -> IntArray:
        """Times of the new readings [ms]."""
        return self.t_all[self.first :]

    def new_column(self, name: str) -> FloatArray:
        """One column of the new readings as floats."""
        return np.asarray(self.new[name].to_numpy(np.float64), np.float64)

    def finish(self) -> None:
        """Run what rules left to do once all of them have run."""
        for step in self.finishers:
            step()
