"""Interval summaries computed by the agent, against hand-worked examples.

References: the time average of x(t) over [a, b] is (1/(b-a)) * integral of x dt, and the
trapezoid rule is exact for a function linear between the samples (elementary calculus; common
practice, no source); the duty cycle of an on/off current is the share of time it is on, so
mean(I) = I_on * duty and mean(I^2) = I_on^2 * duty (definition; common practice, no source);
mean(x^2) >= mean(x)^2 (Jensen's inequality, J. L. W. V. Jensen, Acta Math. 30, 1906).
numpy's ``trapezoid`` is the reference library for the irregular case.
"""

from __future__ import annotations

import itertools
import random
from pathlib import Path

import numpy as np
import pytest

from tecfleet.ingest.agent.buffer import Buffer, Stamped
from tecfleet.ingest.agent.config import config_from_flags, load_config, with_report_flags
from tecfleet.ingest.agent.intervals import close_intervals, summarise, trapezoid_mean
from tecfleet.ingest.agent.options import ReportOptions
from tecfleet.ingest.agent.sources import Sample
from tecfleet.ingest.db.tables import SUMMARY_COLUMNS
from tecfleet.ingest.errors import SettingsError
from tecfleet.ingest.telemetry_item import validate_item


def sample(t: float, current: float = 0.0, voltage: float = 0.2, **temps: float) -> Sample:
    values: dict[str, float | bool] = {
        "t_cabinet": 4.0,
        "t_ambient": 21.0,
        "current": current,
        "voltage": voltage,
    }
    values.update(temps)
    return Sample(t, values)


def square_wave(duty_on_samples: int, i_on: float, v_on: float, end_s: int) -> list[Sample]:
    """Samples every 10 s of a current with a 100-s period, switching half-way between two
    samples: on for ``duty_on_samples`` samples of every ten."""
    out = []
    for t in range(0, end_s + 1, 10):
        on = (t % 100) // 10 < duty_on_samples
        out.append(sample(float(t), i_on if on else 0.0, v_on if on else 0.2))
    return out


def test_square_wave_of_current_gives_its_duty() -> None:
    # On for 30 s of every 100 s (switching at 95 and 25 s into each period, between samples):
    # duty 0.3 by construction; I_on = 4 A, V_on = 8 V.
    fields = summarise(square_wave(3, 4.0, 8.0, 200), on_above_a=0.1, max_gap_s=60.0).fields
    assert fields["on_share"] == pytest.approx(0.3)
    assert fields["current_mean"] == pytest.approx(4.0 * 0.3)  # I_on * duty
    assert fields["current_sq_mean"] == pytest.approx(4.0**2 * 0.3)  # I_on^2 * duty = 4.8
    assert fields["power_mean"] == pytest.approx(8.0 * 4.0 * 0.3)  # V_on * I_on * duty
    assert fields["current_sq_mean"] != pytest.approx(fields["current_mean"] ** 2)
    assert fields["interval_s"] == 200.0


def test_linear_ramp_sampled_irregularly_averages_to_its_midpoint() -> None:
    # T(t) = 3 + 0.01 t over [0, 90] s: the time average is T(45) = 3.45 °C (elementary
    # calculus), however unevenly it is sampled; the plain mean of the samples is not.
    times = [0.0, 7.0, 9.0, 30.0, 55.0, 56.0, 90.0]
    ramp = [sample(t, t_cabinet=3.0 + 0.01 * t, t_hot=30.0 - 0.02 * t) for t in times]
    fields = summarise(ramp, on_above_a=0.1, max_gap_s=60.0).fields
    assert fields["t_cabinet_mean"] == pytest.approx(3.45)
    assert fields["t_hot_mean"] == pytest.approx(30.0 - 0.02 * 45.0)
    assert sum(3.0 + 0.01 * t for t in times) / len(times) == pytest.approx(3.353, abs=1e-3)
    assert (fields["t_cabinet_min"], fields["t_cabinet_max"]) == (3.0, pytest.approx(3.9))
    assert "t_cold_mean" not in fields  # no cold-face probe, no mean


def test_irregular_samples_match_numpy_trapezoid_and_jensen() -> None:
    rng = random.Random(7)
    t, samples = 0.0, []
    while t < 900.0:
        on = (t % 240.0) < 100.0
        current = 3.0 + rng.uniform(-0.2, 0.2) if on else 0.0
        samples.append(
            sample(t, current, 7.5 if on else 0.3, t_cabinet=5.0 + rng.uniform(-1.0, 1.0))
        )
        t += rng.uniform(2.0, 15.0)
    fields = summarise(samples, on_above_a=0.1, max_gap_s=60.0).fields
    ts = np.array([s.ts_s for s in samples])
    span = ts[-1] - ts[0]

    def reference(values: list[float]) -> float:
        return float(np.trapezoid(values, ts)) / span

    current = [float(s.values["current"]) for s in samples]
    volts = [float(s.values["voltage"]) for s in samples]
    assert fields["t_cabinet_mean"] == pytest.approx(
        reference([float(s.values["t_cabinet"]) for s in samples])
    )
    assert fields["current_mean"] == pytest.approx(reference(current))
    assert fields["current_sq_mean"] == pytest.approx(reference([i * i for i in current]))
    assert fields["power_mean"] == pytest.approx(
        reference([v * i for v, i in zip(volts, current, strict=True)])
    )
    assert fields["on_share"] == pytest.approx(reference([float(i > 0.1) for i in current]))
    assert fields["current_sq_mean"] >= fields["current_mean"] ** 2  # Jensen
    assert trapezoid_mean([0.0, 2.0], [1.0, 3.0]) == 2.0
    # The names are the payload's and the reading passes the service's own checks.
    assert set(fields) <= set(SUMMARY_COLUMNS)
    item = {"ts": 1_780_000_000.0, **samples[-1].values, **fields}
    assert validate_item(item)["on_share"] == fields["on_share"]


def test_a_hole_is_never_bridged() -> None:
    every_10_s = [sample(float(t)) for t in range(0, 601, 10)]
    holed = [s for s in every_10_s if not 200.0 < (s.ts_s or 0.0) < 330.0]
    summary = summarise(holed, on_above_a=0.1, max_gap_s=60.0)
    assert summary.fields == {} and summary.reason is not None and "hole" in summary.reason
    # A face probe that drops out for two minutes loses only its own mean.
    probe = [
        Sample(s.ts_s, {**s.values, "t_hot": 30.0}) if not 200.0 < (s.ts_s or 0.0) < 330.0 else s
        for s in every_10_s
    ]
    fields = summarise(probe, on_above_a=0.1, max_gap_s=60.0).fields
    assert "t_hot_mean" not in fields and fields["t_cabinet_mean"] == pytest.approx(4.0)


def test_intervals_tile_time_and_close_on_the_boundaries() -> None:
    rng = random.Random(3)
    # Samples 5-15 s apart from t = 1000 s; reports every 600 s at multiples of 600.
    samples, t = [], 1000.0
    while t <= 3010.0:
        samples.append(sample(round(t, 3), 2.0, 6.0))
        t += rng.uniform(5.0, 15.0)
    options = ReportOptions(every_s=600.0)
    reports, keep_from = close_intervals(samples, options)
    times = [s.ts_s for s in samples]
    assert [
        max(x for x in times if x is not None and x <= b) for b in (1200, 1800, 2400, 3000)
    ] == [r.ts_s for r in reports]
    assert keep_from == reports[-1].ts_s
    # The first interval (from the first sample at 1000 s) is too short for summaries.
    assert reports[0].summary.fields == {} and "covers" in (reports[0].summary.reason or "")
    for previous, report in itertools.pairwise(reports):
        assert report.summary.fields["interval_s"] == pytest.approx(report.ts_s - previous.ts_s)
        assert report.summary.fields["current_mean"] == pytest.approx(2.0)
        assert report.values["current"] == 2.0
    # No sample past the next boundary (3600 s) yet: nothing more closes.
    rest = [s for s in samples if (s.ts_s or 0.0) >= (keep_from or 0.0)]
    assert close_intervals(rest, options) == ([], None)
    off = close_intervals(samples, ReportOptions(every_s=600.0, summaries=False))[0]
    assert [r.ts_s for r in off] == [r.ts_s for r in reports]
    assert all(r.summary.fields == {} for r in off)


def test_a_hole_over_a_boundary_lands_in_one_interval_without_summaries() -> None:
    samples = [sample(float(t)) for t in range(0, 1151, 10)]
    samples += [sample(float(t)) for t in range(1900, 2501, 10)]
    reports, _ = close_intervals(samples, ReportOptions(every_s=600.0))
    assert [r.ts_s for r in reports] == [600.0, 1150.0, 2400.0]
    assert reports[1].summary.fields["interval_s"] == 550.0  # 92 % of 600 s: still summarised
    assert reports[2].summary.fields == {} and "hole" in (reports[2].summary.reason or "")


def test_report_config_and_the_samples_in_the_buffer(tmp_path: Path) -> None:
    base = 'device_id = "c"\nmqtt_url = "mqtt://h"\nbuffer = "b"\n[[sources]]\nkind = "csv"\n'
    base += 'path = "r.csv"\n'
    path = tmp_path / "a.toml"
    path.write_text(base + "[report]\nevery_s = 900\non_above_a = 0.05\n")
    report = load_config(path).report
    assert report == ReportOptions(every_s=900.0, on_above_a=0.05)
    # The example on the page for device makers asks for 15-minute reports with summaries.
    page = (Path(__file__).parents[2] / "ingest" / "PAYLOAD.md").read_text()
    path.write_text(page.split("```toml\n", 1)[1].split("```", 1)[0])
    assert load_config(path).report == ReportOptions(every_s=900.0, summaries=True)
    for bad in (
        "every_s = 0",
        "summaries = 1\nevery_s = 60",
        "on_above_a = 1",
        "every_s = 60\nx = 1",
    ):
        path.write_text(base + "[report]\n" + bad + "\n")
        with pytest.raises(SettingsError, match="report"):
            load_config(path)
    buffer = Buffer(tmp_path / "buffer.sqlite", 100)
    try:
        buffer.add_samples([Stamped(1000, {"t_cabinet": 1.0}), Stamped(2000, {})], "s", "1:2:3")
        buffer.add_samples([Stamped(None, {}, 5, "boot")], "s", None)
        assert buffer.samples() is None  # one still waits for its time
        buffer.restamp("boot", 3000, 5)
        assert [s.ts_ms for s in buffer.samples() or []] == [1000, 2000, 3000]
        buffer.add_reports([Stamped(2000, {"t_cabinet": 1.0})], keep_from_ms=2000)
        assert [s.ts_ms for s in buffer.samples() or []] == [2000, 3000]
        assert buffer.add_samples([Stamped(1500, {})], "s", None) == 1  # late: left out
        buffer.add_samples([Stamped(None, {}, 7, "boot")], "s", None)
        buffer.restamp("boot", 1500, 8)  # stamped 1500 ms, before the last report: late
        assert [s.ts_ms for s in buffer.samples() or []] == [2000, 3000]
        counts = buffer.counts()
        assert (counts["pending"], counts["late_samples"], buffer.position("s")) == (1, 2, "1:2:3")
    finally:
        buffer.close()


def test_report_flags_over_the_config(tmp_path: Path) -> None:
    """``--report-every`` sets the interval (keeping the table's other keys); bad values get
    the table's own errors."""
    path = tmp_path / "a.toml"
    path.write_text(
        'device_id = "c"\nmqtt_url = "mqtt://h"\nbuffer = "b"\n[[sources]]\nkind = "csv"\n'
        'path = "r.csv"\n[report]\nevery_s = 900\non_above_a = 0.05\n'
    )
    config = load_config(path)
    assert with_report_flags(config, None, False) is config
    assert with_report_flags(config, 300, False).report == ReportOptions(
        every_s=300.0, on_above_a=0.05
    )
    flags = config_from_flags("c", "mqtt://h", "b", ["csv:r.csv"], "tecfleet")
    assert flags.report is None
    assert with_report_flags(flags, 600, True).report == ReportOptions(
        every_s=600.0, summaries=False
    )
    with pytest.raises(SettingsError, match="every_s"):
        with_report_flags(flags, 0, False)
    with pytest.raises(SettingsError, match="--report-every"):
        with_report_flags(flags, None, True)


def test_samples_are_capped_like_readings(tmp_path: Path) -> None:
    """With the clock unset no interval can close; the samples table keeps the buffer's cap,
    dropping the oldest and counting them."""
    buffer = Buffer(tmp_path / "buffer.sqlite", 5)
    try:
        unstamped = [Stamped(None, {"t_cabinet": float(n)}, n, "boot") for n in range(8)]
        buffer.add_samples(unstamped[:4], "s", "1:0:4")
        buffer.add_samples(unstamped[4:], "s", "1:0:8")
        buffer.restamp("boot", 10_000, 7)
        kept = buffer.samples() or []
        assert [s.values["t_cabinet"] for s in kept] == [3.0, 4.0, 5.0, 6.0, 7.0]
        assert buffer.counts()["dropped_samples"] == 3
        assert buffer.position("s") == "1:0:8"
    finally:
        buffer.close()
