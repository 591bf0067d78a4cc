"""What a device's next step needs from its earlier ones, typed, and its stored JSON form.

A device's state is stored as one JSON object (``analysis_state.state``). Its objects are
dataclasses here; a field that is None is absent from the stored object, and the fields that
are present are stored in the order they were first set, which is the order the stored object
lists them in. So a state loaded and written again gives back its very text, and the steps of
a run store the same text whether the history is analysed at once or in pieces. Keys this
code does not know are kept, in their place, as they came.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, ClassVar, Self, TypeVar

__all__ = ["Baseline", "DeviceState", "ModuleParams", "UaLead", "remember"]

#: A point of a tracked series: [end of its step (epoch ms UTC), value].
Point = list[float]

_T = TypeVar("_T")


class _Stored:
    """Base of the state's objects: stored-key order and unknown keys, JSON in and out."""

    #: Stored key of a field where it is not the field's name.
    _STORED_AS: ClassVar[dict[str, str]] = {}
    #: How a field's stored value becomes its value, where it is not the JSON value itself.
    _DECODE: ClassVar[dict[str, Callable[[Any], Any]]] = {}
    #: Stored keys present, in their stored order.
    _order: list[str]
    #: Stored keys this code does not know (or null), with their values as they came.
    _unknown: dict[str, Any]

    def __setattr__(self, name: str, value: Any) -> None:
        key = _keys(type(self)).get(name)
        if key is not None:
            d = self.__dict__
            order: list[str] = d.setdefault("_order", [])
            d.setdefault("_unknown", {}).pop(key, None)
            if value is None:
                if key in order:
                    order.remove(key)
            elif key not in order:
                order.append(key)
        object.__setattr__(self, name, value)

    @classmethod
    def from_json(cls, obj: dict[str, Any]) -> Self:
        """The object stored as ``obj`` (as loaded from its JSON text)."""
        self = cls.__new__(cls)
        object.__setattr__(self, "_order", [])
        object.__setattr__(self, "_unknown", {})
        names = {key: name for name, key in _keys(cls).items()}
        for field_name in names.values():
            object.__setattr__(self, field_name, None)
        for key, value in obj.items():
            name = names.get(key)
            if name is None or value is None:
                # Not a field of this code's (or null, which none is written as): kept as it came.
                self._order.append(key)
                self._unknown[key] = value
            else:
                decode = cls._DECODE.get(name)
                setattr(self, name, value if decode is None else decode(value))
        return self

    def to_json(self) -> dict[str, Any]:
        """The stored object: present fields and unknown keys, in their stored order."""
        names = {key: name for name, key in _keys(type(self)).items()}
        unknown: dict[str, Any] = self.__dict__.get("_unknown", {})
        out: dict[str, Any] = {}
        for key in self.__dict__.get("_order", []):
            out[key] = unknown[key] if key in unknown else _encode(getattr(self, names[key]))
        return out


_KEYS: dict[type[_Stored], dict[str, str]] = {}


def _keys(cls: type[_Stored]) -> dict[str, str]:
    # Field name -> stored key, for the dataclass fields of ``cls`` (worked out once).
    keys = _KEYS.get(cls)
    if keys is None:
        fields = dataclasses.fields(cls)  # type: ignore[arg-type]
        keys = _KEYS[cls] = {f.name: cls._STORED_AS.get(f.name, f.name) for f in fields}
    return keys


def _encode(value: Any) -> Any:
    if isinstance(value, _Stored):
        return value.to_json()
    if isinstance(value, dict):
        return {k: _encode(v) for k, v in value.items()}
    return value


@dataclass
class Baseline(_Stored):
    """A tracked quantity's commissioning baseline (``trends.baseline`` of its pool)."""

    center: float
    spread: float
    n: int
    #: Values taken in while the baseline still grows; None once it is closed.
    pool: list[float] | None = None
    #: Values waiting to be taken in ([end of step (epoch ms UTC), value]); None: none.
    pending: list[Point] | None = None


@dataclass
class UaLead(_Stored):
    """The ambient's lead over the cabinet (Ta - Tcab [K]) over the commissioning weeks."""

    _STORED_AS: ClassVar[dict[str, str]] = {"start": "from"}

    #: End of the first window that could be followed (epoch ms UTC).
    start: int
    values: list[float]


@dataclass
class ModuleParams(_Stored):
    """The newest fitted parameters (SI units; resistances of the sinks in K/W).

    The electrical ones are set by every fitted window, the thermal ones by the last thermal
    fit that succeeded: they hold until the next one does.
    """

    k: float
    s25: float
    r25: float
    cov_rs: list[list[float]] | None = None
    k_sd: float | None = None
    c_hot: float | None = None
    ua: float | None = None
    q_int: float | None = None
    r_cold: float | None = None
    r_hot: float | None = None
    #: Largest current seen in the window [A].
    i_seen: float | None = None
    #: Whether the samples follow the sinks (False where they store heat faster).
    faces_followed: bool | None = None
    #: Whether the newest window's R25 was served as reliable and, where faces are read
    #: from the voltage, the module had rested lately (see ``runner.window``).
    faces_trusted: bool | None = None


def _baselines(obj: dict[str, Any]) -> dict[str, Baseline]:
    return {name: Baseline.from_json(b) for name, b in obj.items()}


@dataclass
class DeviceState(_Stored):
    """One device's carried state. Tracked quantities are named ``r25``, ``ua``, ``rhot``."""

    _DECODE: ClassVar[dict[str, Callable[[Any], Any]]] = {
        "baseline": _baselines,
        "ua_lead": UaLead.from_json,
        "params": ModuleParams.from_json,
    }

    #: Tracked values by quantity: daily medians before the newest day, then every value.
    series: dict[str, list[Point]] | None = None
    #: Time of each quantity's first tracked value (epoch ms UTC).
    first: dict[str, int] | None = None
    baseline: dict[str, Baseline] | None = None
    #: Page's upper CUSUM of each quantity [σ].
    cusum: dict[str, float] | None = None
    #: Consecutive evaluations with each quantity's change at or beyond its flag threshold.
    above: dict[str, int] | None = None
    #: The trend S [V/K] and its standard error, at which R25's changes are judged.
    s_trend: list[float] | None = None
    #: Whether the trend S is the unit's own ("own") or the rated one ("prior").
    s_trend_source: str | None = None
    #: Windows kept while the trend S is the rated one: [at, R at S=0, lever, its sd, ok].
    r25_raw: list[list[Any]] | None = None
    #: Levers (ΣI·ΔT/ΣI²) of the windows in R25's baseline.
    r25_levers: list[float] | None = None
    #: What R25's track rests on where not on probed faces: "voltage" (R25 read from the
    #: module's voltage, the rated S held); None for the fit to probed faces.
    r25_from: str | None = None
    #: Where the hot side's followed hours take their faces (``hot_side.follow_source``:
    #: "cabinet" or "voltage"); None for the probes'. A new source starts its track anew.
    rhot_from: str | None = None
    #: End of the newest window in which the module rested (switched off at least
    #: ``faces_min_switch_offs`` times), where faces are read from the voltage (epoch ms UTC).
    rested_ms: int | None = None
    #: UA was served as reliable in a window followed: the unit's readings can pin it (see
    #: ``ua_pinned_window_s``).
    ua_pinned: bool | None = None
    #: The trend K [W/K], at which UA's and the hot side's changes are judged.
    k_trend: float | None = None
    #: Whether the trend K is the unit's own settled one ("own") or the rated one ("prior").
    k_trend_source: str | None = None
    #: Windows kept while the trend K is the rated one: [at, UA, dUA/dK, K, UA's sd].
    ua_raw: list[list[float]] | None = None
    ua_lead: UaLead | None = None
    #: The window fits' UA over the last ``ua_serve_span_s``: [end of the window (epoch ms
    #: UTC), UA [W/K], its standard error [W/K], served as reliable (1/0)].
    ua_windows: list[list[float]] | None = None
    params: ModuleParams | None = None
    #: Recent own S at 25 °C and its standard error, [V/K, V/K].
    s_hist: list[list[float]] | None = None
    #: Recent days' electrical normal-equation sums (see ``runner.seebeck``), one block per
    #: UTC day: [end of its first and of its last window (epoch ms UTC), windows, folded sums].
    s_days: list[list[float]] | None = None
    #: The older layout, one entry per window: [end of the window (epoch ms UTC), weight, ΔT
    #: offset taken off [K], sums...]; folded into ``s_days`` when next analysed.
    s_sums: list[list[float]] | None = None
    #: Recent internal loads of well-determined cabinet fits [W].
    q_hist: list[float] | None = None
    #: Recent sink time constants and their standard errors (cold, sd, hot, sd) [s].
    tau_hist: list[list[float]] | None = None
    #: Recent K fitted from data [W/K].
    k_hist: list[float] | None = None
    #: Hourly mean ambient over the trailing ``design_ambient_days``: [end of the hour
    #: (epoch ms UTC), °C].
    ambient_hours: list[Point] | None = None
    #: Rests seen (see ``runner.offsets``): [from, to (epoch ms UTC), T_j - T_a of the
    #: cabinet, cold and hot probes [K], their standard errors [K], voltage [V], its error
    #: [V]]; null for what was not read.
    probe_rests: list[list[float | None]] | None = None
    #: The probes' estimated offsets from the ambient probe (cabinet, cold, hot) [K].
    probe_offsets: list[float] | None = None
    #: Their covariance [K²].
    probe_offset_cov: list[list[float]] | None = None
    #: Where the cold face has no probe but the module floats: the cabinet probe's
    #: commissioning balance against the face read from the open-circuit voltage, [offset
    #: [K], r_cold [K/W]] (see ``runner.offsets.update_offsets``).
    cabinet_baseline: list[float] | None = None
    #: The newest judged window's shift of the cabinet probe against that balance [K]; None
    #: where none within ``cabinet_check_keep_s`` could judge it.
    cabinet_shift: float | None = None
    #: End of the window that judged it (epoch ms UTC); see ``cabinet_check_keep_s``.
    cabinet_shift_ms: int | None = None
    #: End of the newest maintenance window whose replaced parts this state has forgotten
    #: (epoch ms UTC; see ``runner.replacements``): no window reads readings before it.
    replaced_ms: int | None = None

    def series_by_name(self) -> dict[str, list[Point]]:
        if self.series is None:
            self.series = {}
        return self.series

    def first_by_name(self) -> dict[str, int]:
        if self.first is None:
            self.first = {}
        return self.first

    def baseline_by_name(self) -> dict[str, Baseline]:
        if self.baseline is None:
            self.baseline = {}
        return self.baseline

    def cusum_by_name(self) -> dict[str, float]:
        if self.cusum is None:
            self.cusum = {}
        return self.cusum

    def above_by_name(self) -> dict[str, int]:
        if self.above is None:
            self.above = {}
        return self.above

    def restart_track(self, name: str) -> None:
        """Forget a tracked series, its baseline and its statistics: the next value starts
        anew."""
        for part in (self.series, self.first, self.baseline, self.cusum, self.above):
            if part is not None:
                part.pop(name, None)


def remember(hist: list[_T] | None, value: _T, keep: int) -> list[_T]:
    """``hist`` (a new list if None) with ``value`` appended, keeping the newest ``keep``."""
    out = [] if hist is None else hist
    out.append(value)
    del out[:-keep]
    return out
