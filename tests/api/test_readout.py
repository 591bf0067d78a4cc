"""Numbers as people read them: the precision rules, checked against Python's own ``g``
format (the reference for significant figures) and stated facts."""

from __future__ import annotations

import math

import pytest

from tecfleet.api import readout


@pytest.mark.parametrize("value", [3.64951, 0.0123456, 412.7, 9.996, 0.14856, 1234.5, -2.71828])
def test_three_significant_figures_agree_with_pythons_g_format(value: float) -> None:
    # Python's format spec ".3g" rounds to 3 significant figures (Python docs, Format
    # Specification Mini-Language); the readout keeps trailing zeros, so compare as numbers.
    text = readout.significant(value, "Ω")
    assert text.endswith(" Ω")
    assert float(text.split()[0]) == float(format(value, ".3g"))


def test_resistance_keeps_its_third_figure_and_its_unit() -> None:
    # 3 significant figures (the page's rule): 0.750 W/K keeps the trailing zero
    assert readout.estimate_text("cabinet.ua_w_per_k", 0.7502448) == "0.750 W/K"
    assert readout.estimate_text("module.resistance_25c_ohm", 3.9424177) == "3.94 Ω"
    assert readout.estimate_text("hot_side.resistance_k_per_w", 0.4003481) == "0.400 K/W"


def test_changes_in_tenths_below_ten_percent_and_whole_from_there() -> None:
    assert readout.change_pct(-0.0003) == "0.0 %"
    assert readout.change_pct(7.5267) == "+7.5 %"
    assert readout.change_pct(-2.8047) == "-2.8 %"
    assert readout.change_pct(74.2) == "+74 %"
    assert readout.change_pct(203.234) == "+203 %"


def test_days_to_a_limit_read_as_words_past_a_year_or_without_data() -> None:
    assert readout.days_left(5170.1295) == readout.OVER_A_YEAR == "over a year"
    assert readout.days_left(3.32) == "3 days"
    assert readout.days_left(None) == readout.NO_DATA == "not enough data"
    assert readout.days_left(math.nan) == "not enough data"
    assert readout.estimate_text("module.days_to_wear_limit", 6830.0) == "over a year"


def test_durations_and_temperatures() -> None:
    assert readout.duration(42 * 60) == "42 min"
    assert readout.duration(5 * 3600 + 10 * 60) == "5 h 10 min"
    assert readout.duration(2 * 86400 + 3 * 3600) == "2 d 3 h"
    assert readout.temperature(16.449) == "16.4 °C"
    assert readout.temperature(None) == "not enough data"


def test_evidence_reads_times_spans_and_units() -> None:
    lines = dict(
        readout.evidence_lines(
            {
                "silent_ms": 72_151_632,
                "last_reading_ms": 1_796_296_377_914,
                "active_s": 14400.0,
                "hot_side.resistance_k_per_w": 0.40035,
                "profile": "medicine",
                "nested": {"a": 1},
            }
        )
    )
    assert lines["silent"] == "20 h 3 min"
    assert lines["last reading"].endswith("UTC") and lines["last reading"].startswith("2026-")
    assert lines["active"] == "4 h"
    assert lines["hot side resistance"] == "0.400 K/W"
    assert lines["profile"] == "medicine"
    assert "nested" not in lines
