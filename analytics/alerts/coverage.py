"""Checks a unit's sensors leave limited or out of reach, as the alert state carries them.

A rule that cannot judge a unit fully (the cold face not probed, say) says so here, with what
it judges on instead; the device's answer serves it, so that an absent alert is not read as
an all-clear the readings could never have given."""

from __future__ import annotations

from typing import Any

__all__ = ["LIMITS_KEY", "set_limit"]

#: Where the alert state keeps them: check name -> {"basis": ..., "note": ...}.
LIMITS_KEY = "limited_checks"


def set_limit(state: dict[str, Any], check: str, basis: str | None, note: str | None) -> None:
    """Say that ``check`` rests on ``basis`` (None: not judged at all) because of ``note``;
    ``note`` None: the check is whole again and its entry goes."""
    limits: dict[str, Any] = state.setdefault(LIMITS_KEY, {})
    if note is None:
        limits.pop(check, None)
    else:
        limits[check] = {"basis": basis, "note": note}
