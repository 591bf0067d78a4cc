"""Parts replaced during maintenance: what the carried state learned of them is forgotten, so
that the new part is judged against a commissioning of its own.

A maintenance window may record the parts replaced during it (``maintenance_windows.replaced``).
The first fit window that ends after such a window's end forgets, before it is fitted, what
:func:`forgotten` names for each part, and keeps the window's end in
``DeviceState.replaced_ms``: from then on every window the runner reads starts there at the
earliest (``Readings.since_ms``), so that neither the old part's readings nor the
maintenance itself feed the new part's baselines.
"""

from __future__ import annotations

from collections.abc import Iterable

from tecfleet.analytics.runner.state import DeviceState

__all__ = ["apply_replacements", "forgotten"]

#: What every probe takes with it: the rests (each holds every probe's difference from the
#: ambient probe, so one new probe spoils them all) and the offsets estimated from them.
_PROBE = ("probe_rests", "probe_offsets", "probe_offset_cov")
#: The cabinet probe's commissioning balance against the cold face read from the module's
#: open-circuit voltage (from the hot probe and the module's S): every part it reads.
_CABINET_BALANCE = ("cabinet_baseline", "cabinet_shift", "cabinet_shift_ms")
#: The module's settled values (own S, the pooled S's sums, settled K), what R25's track is
#: judged at (the trend S and the windows kept for it) and the K that UA's and the hot
#: side's changes are judged at: a new module brings its own K, which moves both.
_MODULE = (
    "s_hist", "s_days", "s_sums", "k_hist", "s_trend", "s_trend_source", "r25_raw",
    "r25_levers", "r25_from", "k_trend", "k_trend_source",
)  # fmt: skip

#: What UA's track keeps besides its series (see ``DeviceState.restart_track``): the windows
#: kept at the rated K and the ambient's usual lead over the cabinet; and the window fits the
#: served UA is the median of.
_UA = ("ua_raw", "ua_lead", "ua_windows", "ua_pinned")

#: State fields each replaceable part takes with it (see ``alert_records.REPLACEABLE_PARTS``).
_FORGOTTEN: dict[str, tuple[str, ...]] = {
    "cabinet_probe": _PROBE + _CABINET_BALANCE + _UA,
    "cold_probe": _PROBE + _CABINET_BALANCE + _UA,
    "hot_probe": _PROBE + _CABINET_BALANCE + _UA,
    "ambient_probe": _PROBE + _UA,
    "module": _MODULE + _CABINET_BALANCE + _UA,
}
#: Tracked quantities each part starts afresh: those whose value its readings move by a
#: constant (a new probe's offset in the cabinet's or the hot sink's balance, a new module's
#: R25, and its K in both balances), which would read as a change against the old part's
#: baseline.
_RESTARTED: dict[str, tuple[str, ...]] = {
    "cabinet_probe": ("ua",),
    "cold_probe": ("ua",),
    "hot_probe": ("ua", "rhot"),
    "ambient_probe": ("ua", "rhot"),
    "module": ("r25", "ua", "rhot"),
}


def forgotten(part: str) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """The ``DeviceState`` fields a replaced ``part`` takes with it, and the tracked
    quantities it starts afresh."""
    return _FORGOTTEN[part], _RESTARTED[part]


def apply_replacements(
    state: DeviceState, replacements: Iterable[tuple[int, list[str]]], b: int
) -> int | None:
    """Forget the replaced parts of every window ending before ``b`` (epoch ms UTC, the end
    of the fit window about to be fitted) and after ``state.replaced_ms``; ``replacements``
    are (end [ms], part names). Returns the newest end applied now, None where none."""
    done = state.replaced_ms
    newest = None
    for end, parts in replacements:
        if not parts or end >= b or (done is not None and end <= done):
            continue
        for part in parts:
            fields, tracks = forgotten(part)
            for name in fields:
                setattr(state, name, None)
            for track in tracks:
                state.restart_track(track)
        newest = end if newest is None else max(newest, end)
    if newest is not None:
        state.replaced_ms = newest
    return newest
