"""The served UA: the median of the unit's window fits over the last two days.

Readings from the fleet simulator (test data only), the truth its parameters: a unit whose
cabinet starts leaking 1.5x its UA on day 3 (a door seal failing) and its steady twin. The
reference for the leak is the cabinet's lumped energy balance (F. P. Incropera et al.,
*Fundamentals of Heat and Mass Transfer*, 6th ed., 2007, ch. 5): the step multiplies the
conductance UA itself. A window fit spans a day of readings, so it has taken in a step a day
after it; the median of the last two days' fits, once more than half of them came after
that: up to two days in all. The leak's alert follows the window fits, not this median.
"""

from __future__ import annotations

import numpy as np
import pytest
from sqlalchemy.engine import Engine

from tecfleet.analytics import runner
from tecfleet.analytics import simulation as sim
from tecfleet.analytics.runner.settings import AnalysisSettings
from tests.fleet_fixture import analysed_fleet

START_S = 1_735_689_600.0
DAYS = 6.0
LEAK_AT_S = START_S + 3.0 * 86_400.0
SPAN_MS = AnalysisSettings().ua_serve_span_s * 1000


@pytest.fixture(scope="module")
def analysed(tmp_path_factory: pytest.TempPathFactory) -> tuple[Engine, sim.FleetTruth]:
    unit = {"cuts_per_30d": 0.0}
    spec = sim.FleetSpec(
        devices=(sim.DeviceSpec("su-leak", **unit), sim.DeviceSpec("su-ok", **unit)),
        start_s=START_S, interval_s=60.0, seed=216,
        faults=(sim.Fault("leak", "su-leak", LEAK_AT_S, magnitude=1.5),),
    )  # fmt: skip
    engine = analysed_fleet(f"{tmp_path_factory.mktemp('served')}/su.db", spec, DAYS)
    return engine, sim.Simulator(spec).truth


def _series(engine: Engine, device: str, key: str) -> dict[int, float]:
    rows = runner.estimate_history(engine, device, key, start_ms=0)
    return {int(r["at_ms"]): float(r["value"]) for r in rows if r["value"] is not None}


def test_the_served_ua_is_the_median_of_the_last_two_days_fits(
    analysed: tuple[Engine, sim.FleetTruth],
) -> None:
    engine, _ = analysed
    for device in ("su-leak", "su-ok"):
        served = _series(engine, device, "cabinet.ua_w_per_k")
        fits = _series(engine, device, "cabinet.ua_window_w_per_k")
        assert len(served) >= 16 and served.keys() == fits.keys()
        for at, value in served.items():
            recent = [v for t, v in fits.items() if at - SPAN_MS < t <= at]
            assert value == pytest.approx(float(np.median(recent)), rel=1e-12)


def test_the_served_ua_follows_a_leak_within_two_days(
    analysed: tuple[Engine, sim.FleetTruth],
) -> None:
    engine, truth = analysed
    served = _series(engine, "su-leak", "cabinet.ua_w_per_k")
    ua0 = truth.params_at("su-leak", LEAK_AT_S - 1.0)["ua"]
    ua1 = truth.params_at("su-leak", START_S + DAYS * 86_400.0)["ua"]
    assert ua1 == pytest.approx(1.5 * ua0)
    # within the full probe set's 15 % target of the old UA up to the step, of the new one
    # from two days after it (1.75 days on this seed, a value the code produced itself)
    for at, value in served.items():
        t = at / 1000.0
        if t <= LEAK_AT_S:
            assert abs(value / ua0 - 1.0) <= 0.15, (t, value)
        elif t >= LEAK_AT_S + 2 * 86_400.0:
            assert abs(value / ua1 - 1.0) <= 0.15, (t, value)
    # the steady twin stays within the target throughout its second half
    ok = _series(engine, "su-ok", "cabinet.ua_w_per_k")
    ua_ok = truth.params_at("su-ok", START_S)["ua"]
    late = [v for at, v in ok.items() if at / 1000.0 >= START_S + 3 * 86_400.0]
    assert late and all(abs(v / ua_ok - 1.0) <= 0.15 for v in late), late
