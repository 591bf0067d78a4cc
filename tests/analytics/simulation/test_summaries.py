"""The simulated fleet's interval summaries: what a unit that samples fast reports of each
interval.

Checks against facts outside the simulator: a mean lies between the interval's extremes
(definition of the mean); the mean of a square is at least the square of the mean (Jensen's
inequality, J. L. W. V. Jensen, Acta Math. 30, 1906); a current that is either 0 or on has
mean(I) ≤ on_share·max(I). The summaries' electrical energy is compared with the simulator's
own first-law bookkeeping (``Chunk.energy``, values the code produced itself) to show both
come from the same sub-steps.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from tecfleet.analytics import simulation as sim


def _chunk(interval_s: float, summaries: bool) -> sim.Chunk:
    spec = sim.random_fleet(6, seed=203, start_s=1_735_689_600.0, days=2.0, interval_s=interval_s)
    spec = dataclasses.replace(spec, summaries=summaries)
    return sim.Simulator(spec).run(round(2 * 86_400.0 / interval_s))


def test_summaries_obey_the_definitions_of_mean_and_extremes() -> None:
    c = _chunk(900.0, True)
    s = c.summaries
    assert np.all(s["t_cabinet_min"] <= s["t_cabinet_mean"] + 1e-4)
    assert np.all(s["t_cabinet_mean"] <= s["t_cabinet_max"] + 1e-4)
    assert np.all(s["current_sq_mean"] >= s["current_mean"] ** 2 - 1e-3)  # Jensen
    assert np.all((s["on_share"] >= 0.0) & (s["on_share"] <= 1.0))
    assert np.all(s["interval_s"] == 900.0)


def test_the_summaries_electrical_energy_is_the_simulators_own() -> None:
    c = _chunk(900.0, True)
    s = c.summaries
    # Without sensor bias the means are the model's: power times the interval is the energy
    # the simulator books as electrical (values the code produced itself, same sub-steps).
    spec = sim.random_fleet(6, seed=203, start_s=1_735_689_600.0, days=2.0, interval_s=900.0)
    exact = sim.Simulator(dataclasses.replace(spec, summaries=True, sensors=False)).run(192)
    energy = exact.summaries["power_mean"] * 900.0
    assert np.allclose(energy, exact.energy["electrical"], rtol=1e-3, atol=1.0)
    # With the probes' biases the reported power stays within a few per cent of it.
    total = float(np.sum(s["power_mean"])) * 900.0
    assert abs(total / float(np.sum(c.energy["electrical"])) - 1.0) < 0.05


def test_a_fleet_without_summaries_reports_none() -> None:
    c = _chunk(300.0, False)
    assert c.summaries == {}
    assert "interval_s" not in c.readings(0, 0)
