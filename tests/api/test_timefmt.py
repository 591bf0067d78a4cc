"""Durations as the query string takes them (common practice, no source: the s/m/h/d suffixes
of everyday use)."""

from __future__ import annotations

import pytest

from tecfleet.api.timefmt import duration_to_s


@pytest.mark.parametrize(
    ("text", "seconds"),
    [("60", 60), ("90s", 90), ("15m", 900), ("1h", 3600), ("6h", 21_600), ("7d", 604_800)],
)
def test_durations(text: str, seconds: int) -> None:
    assert duration_to_s(text) == seconds


@pytest.mark.parametrize("text", ["", "0", "1w", "1.5h", "-5m", "h", "1 h", "01h"])
def test_what_is_not_a_duration(text: str) -> None:
    with pytest.raises(ValueError, match="not a duration"):
        duration_to_s(text)
