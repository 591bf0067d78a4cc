"""The estimate rows one device's run collects, written in one statement at its end."""

from __future__ import annotations

import math
from typing import Any

from tecfleet.analytics import diagnostics as dg

__all__ = ["EstimateRows"]


class EstimateRows:
    """Estimate rows collected for one device, written in one statement.

    ``basis`` says what the rows added next rest on (channels and method) unless a row
    names its own: the window's fits set it before adding theirs.
    """

    def __init__(self, device_id: str) -> None:
        self.device_id = device_id
        #: In the order of ``analysis_db.ESTIMATE_COLUMNS``.
        self.rows: list[tuple[Any, ...]] = []
        self.basis: str | None = None

    def add(
        self,
        key: str,
        at_ms: int,
        value: float | None,
        stderr: float | None,
        n: int,
        reliable: bool = True,
        note: str | None = None,
        basis: str | None = None,
    ) -> None:
        if value is not None and not math.isfinite(value):
            return
        if stderr is not None and not math.isfinite(stderr):
            stderr = None
        self.rows.append(
            (
                self.device_id, key, at_ms, value, stderr, int(n), bool(reliable), note,
                self.basis if basis is None else basis,
            )
        )  # fmt: skip

    def est(self, key: str, at_ms: int, e: dg.Estimate) -> None:
        self.add(key, at_ms, e.value, e.stderr, e.n, e.reliable, e.note, e.basis)
