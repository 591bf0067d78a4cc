"""The diagnostics scored against simulated fleets with known truth.

The same functions as ``tests/bench/bench_diagnostics.py``, which prints the tables: healthy
fleets of 8 units for 7 days of one-minute data (seeds 1-7, noise, probe bias, quantisation,
doors, loads and power cuts on), a fleet with wear, leak and fan faults, and a 90-day season
with the ambient swinging about ±10 K. The reference is the simulator's own record of each
unit's parameters (``FleetTruth.params_at``), not anything the diagnostics computed.

Targets (the diagnostics' targets; common practice, no source): after 7 days, R25 within 2 %,
S within 5 %, UA and the hot side's resistance within 20 %; a 5 % R25 rise flagged within
7 days of crossing, a 1.5x UA step within 2 days, a 3x hot-side step within 2 hours; no flag
on healthy units over the season.
"""

from __future__ import annotations

import math

import pytest

from tests.bench.bench_diagnostics import (
    UnitScore,
    accuracy_scores,
    detection_scores,
    season_scores,
)


@pytest.fixture(scope="module")
def scores() -> list[UnitScore]:
    return accuracy_scores([1, 2, 3, 4, 5, 6, 7], 8, 7.0)


def _of(scores: list[UnitScore], quantity: str) -> list[UnitScore]:
    mine = [u for u in scores if u.quantity == quantity]
    assert len(mine) == 56
    return mine


def test_module_resistance_and_seebeck_coefficient(scores: list[UnitScore]) -> None:
    r25 = _of(scores, "R25")
    # Every R25 the diagnostics call reliable is within 2 %; those they do not are the
    # proportionally driven units whose current hardly moves (R and S then trade off).
    assert all(u.within for u in r25 if u.reliable)
    assert sum(u.within for u in r25) >= 0.9 * len(r25)
    assert all(u.within for u in _of(scores, "S25"))


def test_hot_side_resistance(scores: list[UnitScore]) -> None:
    assert all(u.within for u in _of(scores, "r_hot (1 h)"))
    assert all(u.within for u in _of(scores, "r_hot (24 h fit)"))


def test_cabinet_ua(scores: list[UnitScore]) -> None:
    ua = _of(scores, "UA")
    # Not yet every unit: on 53 of 56 (95 %) UA is within 20 %. A unit beyond it must not be
    # served as reliable unless its stated error covers the miss (two standard errors, a
    # coverage factor of 2: JCGM 100:2008 6.2-6.3), and the stated errors cover nearly all.
    assert sum(u.within for u in ua) >= 0.9 * len(ua)
    assert all(u.within or not u.reliable or u.covered for u in ua)
    assert sum(u.covered for u in ua) >= 0.9 * len(ua)
    assert all(math.isfinite(u.rel_err) for u in ua)


def test_faults_are_flagged_in_time_and_healthy_units_are_not() -> None:
    found, healthy, false = detection_scores(4, 10, 26.0)
    assert sorted(d.kind for d in found) == ["fan", "fan", "leak", "leak", "wear", "wear"]
    late = [(d.device_id, d.kind, d.delay_h) for d in found if not d.in_time]
    assert not late
    assert healthy and not false


def test_no_flag_on_healthy_units_over_a_season() -> None:
    season = season_scores(6, 4, 90.0)
    assert not season.flags
    # The temperature correction at work: R swings several per cent with the ambient, its
    # value at 25 °C stays within 1 %.
    assert len(season.r25_change) == 4
    assert all(swing > 2.0 for swing in season.r_swing.values())
    assert all(lo >= -1.0 and hi <= 1.0 for lo, hi in season.r25_change.values())
