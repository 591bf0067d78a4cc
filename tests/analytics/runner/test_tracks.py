"""Tracked quantities: baselines, changes, CUSUM and flags, on series made here."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from tecfleet.analytics.runner import AnalysisSettings
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.state import DeviceState
from tecfleet.analytics.runner.tracks import FLAGS_HELD_FACES_FROM_VOLTAGE, track
from tecfleet.ingest.db.analysis import ESTIMATE_COLUMNS

DEVICE = "cab-demo-1"


def test_ua_flag_needs_a_settled_baseline_and_a_persistent_rise() -> None:
    # Persistence before an alarm (two consecutive evaluations) and a baseline that leaves
    # out start-up: common practice, no source. Series made here: 6-hourly UA values of
    # 0.50 W/K, a first day at 0.40 W/K (pull-down), one evaluation at 0.80 W/K, then a
    # lasting step to 0.80 W/K. Change = median of the last day against the baseline (%).
    cfg = AnalysisSettings()
    six_h = 6 * 3_600_000
    values = [0.40] * 4 + [0.50] * 16 + [0.80] + [0.50] * 8 + [0.80] * 8
    rows = EstimateRows(DEVICE)
    state = DeviceState()
    for j, ua in enumerate(values):
        b = (j + 1) * six_h
        track(
            rows, state, "ua", "cabinet.ua", b, ua, cfg.ua_flag_pct, 0.03, cfg,
            skip_days=cfg.ua_baseline_skip_days, persist=cfg.ua_flag_persist,
        )  # fmt: skip
    recs = [dict(zip(ESTIMATE_COLUMNS, r, strict=True)) for r in rows.rows]
    baseline = [r["value"] for r in recs if r["key"] == "cabinet.ua.baseline"]
    assert baseline and baseline[0] == pytest.approx(0.50)  # the pull-down day left out
    flags = [(r["at_ms"] // six_h, r["value"]) for r in recs if r["key"] == "cabinet.ua.flag"]
    # The lone high value never moves the one-day median to +35 %; the step does after three
    # of its evaluations (median of four: two high) and is flagged on the next one.
    raised = [j for j, f in flags if f == 1.0]
    assert raised and raised[0] == len(values) - 8 + 4
    assert all(f == 0.0 for j, f in flags if j < len(values) - 8)


def test_ua_flag_needs_the_newest_window_to_show_the_rise_too() -> None:
    # Series made here, 6-hourly UA: 0.50 W/K, then a busy day whose warm goods inflate the
    # two windows that hold them to 0.80 W/K while the windows beside them are unreliable
    # and skipped (as simulated fleets showed), then 0.50 again; later a lasting step to
    # 0.80 W/K (a leak). The day's median is made of the two inflated windows on two
    # evaluations, enough for the flag on its own; the newest window back at 0.50, with a
    # standard error of 0.05 W/K, is not. The step shows in every later window and is
    # flagged at the same evaluation either way. A leak's window that reads a little low by
    # chance (0.64 W/K, +28 %, with 0.05 W/K) does not contradict it and still counts.
    cfg = AnalysisSettings()
    six_h = 6 * 3_600_000
    series = [(j, 0.50) for j in range(24)] + [(25, 0.80), (26, 0.80), (28, 0.50)]
    series += [(j, 0.50) for j in range(29, 40)] + [(j, 0.80) for j in range(40, 48)]
    series += [(48, 0.64)]
    raised = {}
    for newest_sd in (None, 0.05):
        rows = EstimateRows(DEVICE)
        state = DeviceState()
        for j, ua in series:
            track(
                rows, state, "ua", "cabinet.ua", (j + 1) * six_h, ua, cfg.ua_flag_pct, 0.03,
                cfg, skip_days=cfg.ua_baseline_skip_days, persist=cfg.ua_flag_persist,
                newest_sd=newest_sd,
            )  # fmt: skip
        recs = [dict(zip(ESTIMATE_COLUMNS, r, strict=True)) for r in rows.rows]
        raised[newest_sd] = [
            r["at_ms"] // six_h - 1 for r in recs if r["key"] == "cabinet.ua.flag" and r["value"]
        ]
    assert raised[None][0] == 28  # the busy day, flagged without the newest window's say
    assert raised[0.05] and raised[0.05][0] >= 40
    assert raised[0.05][0] == next(j for j in raised[None] if j >= 40)
    assert 48 in raised[0.05]


def test_ua_baseline_grows_over_the_commissioning_weeks_until_a_change_shows() -> None:
    # Series made here, 6-hourly: a pull-down day, three days of a cold spell reading UA at
    # 0.40 W/K, a drift back over a week to the unit's usual 0.56 W/K (+40 % on the first
    # days' median), then at day 20 a lasting step to 1.5x (a leak). A baseline of the first
    # days alone would flag the drift; one that goes on taking in values through the
    # commissioning weeks follows it, and still flags the step within two days (the target for
    # a 1.5x step in UA, as in the diagnostics bench).
    cfg = AnalysisSettings()
    six_h = 6 * 3_600_000
    values = [0.50] * 4 + [0.40] * 12 + list(np.linspace(0.40, 0.56, 28)) + [0.56] * 36
    values += [0.84] * 12
    for grow in (0.0, cfg.ua_baseline_grow_days):
        rows = EstimateRows(DEVICE)
        state = DeviceState()
        for j, ua in enumerate(values):
            track(
                rows, state, "ua", "cabinet.ua", (j + 1) * six_h, float(ua), cfg.ua_flag_pct,
                0.03, cfg, skip_days=cfg.ua_baseline_skip_days, persist=cfg.ua_flag_persist,
                grow_days=grow,
            )  # fmt: skip
        recs = [dict(zip(ESTIMATE_COLUMNS, r, strict=True)) for r in rows.rows]
        raised = [r["at_ms"] // six_h for r in recs if r["key"] == "cabinet.ua.flag" and r["value"]]
        if grow == 0.0:
            assert raised and raised[0] < 80  # the drift back is flagged
        else:
            assert raised and raised[0] >= 80 and raised[0] - 80 <= 8
            assert state.baseline_by_name()["ua"].center > 0.48  # most of the way from 0.40


def test_hot_side_flag_where_sinks_store_heat_waits_for_a_second_hour_unless_it_doubles() -> None:
    # Series made here, hourly r_hot 0.20 K/W: with persist 2 and at_once_pct 100 (the
    # setting where the sinks store heat faster than the samples follow), a single hour at
    # +55 % (an hour drifting into step with the sampling) raises nothing, two in a row do,
    # and a failed fan's 3x raises the flag on its first hour.
    cfg = AnalysisSettings()
    hour = 3_600_000
    base = [0.20] * 80
    cases = {
        "single": base + [0.31] + [0.20] * 5,
        "two": base + [0.31, 0.31] + [0.20] * 4,
        "fan": base + [0.60] * 3,
    }
    first: dict[str, int | None] = {}
    for label, values in cases.items():
        rows = EstimateRows(DEVICE)
        state = DeviceState()
        for j, v in enumerate(values):
            track(
                rows, state, "rhot", "hot_side.resistance", (j + 1) * hour, v,
                cfg.r_hot_flag_pct, 0.03, cfg, persist=2, at_once_pct=2.0 * cfg.r_hot_flag_pct,
            )  # fmt: skip
        recs = [dict(zip(ESTIMATE_COLUMNS, r, strict=True)) for r in rows.rows]
        raised = [
            r["at_ms"] // hour - 1
            for r in recs
            if r["key"] == "hot_side.resistance.flag" and r["value"] == 1.0
        ]
        first[label] = raised[0] if raised else None
    assert first == {"single": None, "two": 81, "fan": 80}


def test_a_held_track_follows_the_change_but_raises_no_flag() -> None:
    # Series made here, as in the first test: 6-hourly UA of 0.50 W/K then a lasting step to
    # 0.80 W/K (+60 %). Followed plainly it is flagged; held (faces read from the module's
    # voltage), the same change is served, and the flag row says why it is not judged.
    cfg = AnalysisSettings()
    six_h = 6 * 3_600_000
    values = [0.50] * 20 + [0.80] * 12
    out: dict[str | None, list[dict[str, Any]]] = {}
    for held in (None, FLAGS_HELD_FACES_FROM_VOLTAGE):
        rows = EstimateRows(DEVICE)
        state = DeviceState()
        for j, ua in enumerate(values):
            track(
                rows, state, "ua", "cabinet.ua", (j + 1) * six_h, ua, cfg.ua_flag_pct, 0.03,
                cfg, persist=cfg.ua_flag_persist, held=held,
            )  # fmt: skip
        out[held] = [dict(zip(ESTIMATE_COLUMNS, r, strict=True)) for r in rows.rows]
    plain, held_rows = out[None], out[FLAGS_HELD_FACES_FROM_VOLTAGE]

    def of(recs: list[dict[str, Any]], key: str) -> list[Any]:
        return [r["value"] for r in recs if r["key"] == key]

    assert of(plain, "cabinet.ua.change_pct") == of(held_rows, "cabinet.ua.change_pct")
    assert max(of(held_rows, "cabinet.ua.change_pct")) == pytest.approx(60.0)
    assert 1.0 in of(plain, "cabinet.ua.flag")
    flags = [r for r in held_rows if r["key"] == "cabinet.ua.flag"]
    assert flags and all(r["value"] == 0.0 and not r["reliable"] for r in flags)
    assert all(r["note"] == FLAGS_HELD_FACES_FROM_VOLTAGE for r in flags)
