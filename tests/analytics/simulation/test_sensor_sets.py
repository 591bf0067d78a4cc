"""Sensor sets of simulated units: a unit without a face probe leaves that channel out of what
it publishes, and everything else it reports is what the same unit with every probe reports."""

from __future__ import annotations

import csv
import dataclasses
from pathlib import Path

import numpy as np
import pytest

from tecfleet.analytics import simulation as sim

START_S = 1_735_689_600.0


def _fleets() -> tuple[sim.FleetSpec, sim.FleetSpec]:
    spec = sim.random_fleet(3, seed=203, start_s=START_S, days=1.0)
    sets = ("full", "no_cold", "no_faces")
    reduced = sim.with_devices(
        spec,
        (dataclasses.replace(d, sensor_set=s) for d, s in zip(spec.devices, sets, strict=True)),
    )
    return spec, reduced


def test_missing_probes_are_left_out_of_the_payloads() -> None:
    full, reduced = _fleets()
    chunk = sim.Simulator(reduced).run(120)
    keys = [set().union(*(r[i] or {} for r in chunk.payload_rows())) for i in range(3)]
    assert {"t_cold", "t_hot"} <= keys[0]
    assert "t_cold" not in keys[1] and "t_hot" in keys[1]
    assert not {"t_cold", "t_hot"} & keys[2]
    assert {"t_cabinet", "t_ambient", "current", "voltage"} <= keys[2]
    assert "t_cold" not in chunk.readings(0, 2) and "t_hot" in chunk.readings(0, 1)
    # The same draws as with every probe fitted: the channels a unit has read the same.
    same = sim.Simulator(full).run(120)
    for name in ("t_cabinet", "t_ambient", "current", "voltage"):
        assert np.array_equal(chunk.measured[name], same.measured[name])
    assert np.array_equal(chunk.measured["t_hot"][:, :2], same.measured["t_hot"][:, :2])
    assert np.isnan(chunk.measured["t_cold"][:, 1:]).all()


def test_csv_leaves_missing_probes_empty(tmp_path: Path) -> None:
    _full, reduced = _fleets()
    path = tmp_path / "out.csv"
    sink = sim.FileSink(str(path))
    simulator = sim.Simulator(reduced)
    rows = simulator.run(5).payload_rows()
    for i, device in enumerate(reduced.device_ids):
        sink.send(device, [r[i] for r in rows if r[i] is not None])
    sink.close()
    with path.open(encoding="utf-8") as fh:
        got = {r["device_id"]: r for r in csv.DictReader(fh)}
    assert got["tec-0002"]["t_cold"] == got["tec-0002"]["t_hot"] == ""
    assert got["tec-0001"]["t_cold"] == "" and got["tec-0001"]["t_hot"] != ""


def test_unknown_sensor_set_is_refused() -> None:
    full, _ = _fleets()
    with pytest.raises(ValueError, match="unknown sensor set"):
        sim.with_sensor_set(full, "no_hot")
    bad = sim.with_devices(full, (dataclasses.replace(d, sensor_set="x") for d in full.devices))
    with pytest.raises(ValueError, match="unknown sensor set"):
        sim.Simulator(bad)
