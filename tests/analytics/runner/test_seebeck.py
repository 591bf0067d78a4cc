"""The pooled S's state: windows' sums kept one block per UTC day.

The sums are linear in the rows (normal equations), so a block of windows pools as its
windows do; the older state layout, one entry per window, is folded into day blocks when the
unit is next analysed and gives the same pooled fit. The stored state used is one the runner
stored (values the code produced itself: a simulated unit's first day).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from tecfleet.analytics.diagnostics import seebeck_pool as sp
from tecfleet.analytics.runner import seebeck
from tecfleet.analytics.runner.state import DeviceState
from tecfleet.ingest.db import analysis as analysis_db

STORED = Path(__file__).parent / "data" / "stored_states.jsonl"


def _older_layout_state() -> DeviceState:
    for text in STORED.read_text().splitlines():
        state = DeviceState.from_json(analysis_db.state_from_text(text))
        if state.s_sums:
            return state
    raise AssertionError("no stored state in the older layout")


def test_older_per_window_sums_fold_into_day_blocks_with_the_same_pooled_fit() -> None:
    state = _older_layout_state()
    older = [list(e) for e in state.s_sums or []]
    prior = (2.0, 0.05, 0.15)
    by_window = sp.pool_seebeck(
        [e[3:] for e in older], [e[1] for e in older], [e[2] for e in older], prior
    )
    days = seebeck._folded_older(state)
    assert state.s_sums is None
    assert len(days) == len({int(e[0]) // 86_400_000 for e in older}) < len(older)
    assert sum(d[2] for d in days) == len(older)
    assert [d[0] for d in days] == sorted(d[0] for d in days)
    n = len(days)
    by_day = sp.pool_seebeck([d[3:] for d in days], [1.0] * n, [0.0] * n, prior)
    assert by_day.s25 == pytest.approx(by_window.s25, rel=1e-9)
    assert by_day.s25_se == pytest.approx(by_window.s25_se, rel=1e-6)


def test_a_window_joins_its_days_block_and_a_new_day_starts_a_new_one() -> None:
    sums = [1.0] * sp.SUMS_LEN
    day = 86_400_000.0
    days = seebeck._fold([], 3 * day + 6 * 3_600_000, 1.0, 0.0, sums)
    days = seebeck._fold(days, 3 * day + 12 * 3_600_000, 0.5, 0.0, sums)
    days = seebeck._fold(days, 4 * day + 1.0, 1.0, 0.0, sums)
    assert [(d[0], d[1], d[2]) for d in days] == [
        (3 * day + 6 * 3_600_000, 3 * day + 12 * 3_600_000, 2.0),
        (4 * day + 1.0, 4 * day + 1.0, 1.0),
    ]
    # The block holds the weighted sum of its windows' sums (no shift: the sums unmoved).
    assert days[0][3:] == pytest.approx([1.5] * sp.SUMS_LEN)
