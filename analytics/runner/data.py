"""A device's readings as arrays for the fits, and its registered ratings as priors."""

from __future__ import annotations

import functools
import json
from dataclasses import dataclass
from typing import Any

import numpy as np
import orjson
from sqlalchemy.engine import Connection

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics
from tecfleet.analytics._validate import FloatArray
from tecfleet.analytics.errors import PhysicsError
from tecfleet.analytics.runner.settings import T0, AnalysisSettings
from tecfleet.ingest import db

__all__ = ["COLUMNS", "Readings", "faces_basis", "flags_of", "load", "priors"]


@dataclass
class Readings:
    """Loaded readings of one device (temperatures [K], t [s] from the start of the load).

    ``probed`` says whether the unit reports a cold and a hot face temperature: a face no
    reading of the load holds has no probe, and its temperatures are NaN (or what was
    reconstructed of them).
    """

    ts: np.ndarray[Any, np.dtype[np.int64]]
    t: FloatArray
    tcab: FloatArray
    tc: FloatArray
    th: FloatArray
    ta: FloatArray
    i: FloatArray
    v: FloatArray
    door: np.ndarray[Any, np.dtype[np.bool_]]
    flags: dg.SampleFlags | None = None
    probed: tuple[bool, bool] = (True, True)

    def slice(self, start_ms: int, end_ms: int) -> slice:
        a = int(np.searchsorted(self.ts, start_ms, side="left"))
        b = int(np.searchsorted(self.ts, end_ms, side="left"))
        return slice(a, b)


#: Reading columns the fits use, in the order of ``Readings``' arrays.
COLUMNS = ("ts_ms", "t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "door_open")


def load(conn: Connection, device_id: str, start_ms: int, end_ms: int) -> Readings:
    """Readings of one device with ``start_ms <= ts_ms < end_ms`` (epoch ms UTC)."""
    arr = db.read_arrays(conn, device_id, COLUMNS, start_ms, end_ms)
    ts = arr[:, 0].astype(np.int64)
    return Readings(
        ts=ts,
        t=(ts - start_ms) / 1000.0,
        tcab=arr[:, 1] + T0,
        tc=arr[:, 2] + T0,
        th=arr[:, 3] + T0,
        ta=arr[:, 4] + T0,
        i=arr[:, 5],
        v=arr[:, 6],
        door=arr[:, 7] > 0.5,
        probed=(bool(np.isfinite(arr[:, 2]).any()), bool(np.isfinite(arr[:, 3]).any())),
    )


def faces_basis(probed: tuple[bool, bool]) -> str:
    """Where a unit's face temperatures come from, in words, by the probes it has."""
    return {
        (True, True): "face probes",
        (False, True): "hot-face probe, cold face from the module's voltage",
        (True, False): "cold-face probe, hot face from the module's voltage",
        (False, False): "both faces from the module's voltage",
    }[probed]


def flags_of(data: Readings, sl: slice) -> dg.SampleFlags:
    """The sample flags of the readings in ``sl`` (flagged once per load)."""
    assert data.flags is not None
    return data.flags.part(sl)


def priors(module: Any, cfg: AnalysisSettings) -> physics.ModuleParameters | None:
    """The module parameters its registered ratings give, None without usable ratings."""
    if not isinstance(module, dict):
        return None
    try:
        module_json = orjson.dumps(module, option=orjson.OPT_SORT_KEYS).decode()
    except TypeError:  # orjson.JSONEncodeError
        return None
    return _priors_from(module_json, cfg.default_t_hot_rated_c)


@functools.lru_cache(maxsize=4096)
def _priors_from(module_json: str, default_t_hot_rated_c: float) -> physics.ModuleParameters | None:
    # Ratings to parameters is a least-squares solve: once per distinct registration.
    module = json.loads(module_json)
    try:
        params = physics.parameters_from_ratings(
            float(module["i_max_a"]),
            float(module["v_max_v"]),
            float(module["dt_max_k"]),
            float(module.get("t_hot_rated_c") or default_t_hot_rated_c) + T0,
            q_max=None if module.get("q_max_w") is None else float(module["q_max_w"]),
            n_couples=None if module.get("couples") is None else int(module["couples"]),
        )
        count = int(module.get("count") or 1)
        # Several modules in one unit are wired in series (common practice, no source).
        return physics.modules_in_series(params, count) if count > 1 else params
    except (KeyError, TypeError, ValueError, PhysicsError):
        return None
