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
from tecfleet.analytics.runner.settings import T0, AnalysisSettings, diagnostics_options
from tecfleet.ingest import db

__all__ = ["COLUMNS", "Readings", "complete_faces", "flags_of", "load", "priors"]


@dataclass
class Readings:
    """Loaded readings of one device (temperatures [K], t [s] from the start of the load)."""

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
    #: Where a face probe is missing: the faces as the module's voltage gives them.
    faces: dg.FaceReconstruction | None = None
    #: Where a face probe is missing and the voltage could not stand in: why not.
    faces_missing: str | None = None

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
    )


def complete_faces(
    data: Readings, prior: physics.ModuleParameters | None, cfg: AnalysisSettings
) -> None:
    """Where the cold-side probe (or both face probes) reported nothing, read the faces from
    the module's voltage (:func:`diagnostics.reconstruct_faces`): the cold face filled in,
    the reconstruction kept in ``data.faces``, or the reason it cannot be in
    ``data.faces_missing``. Readings with both face probes are left exactly as loaded."""
    if data.ts.size == 0 or np.isfinite(data.tc).any():
        return
    hot = data.th if np.isfinite(data.th).any() else None
    if prior is None:
        data.faces_missing = "no face probes and no registered ratings to read ΔT with"
        return
    opts = diagnostics_options(cfg)
    ok = np.isfinite(data.i) & np.isfinite(data.v) & ~data.door
    floating = dg.floating_without_faces(data.v[ok & (data.i <= opts.on_current)], options=opts)
    try:
        data.faces = dg.reconstruct_faces(
            data.t, data.i, data.v, data.tcab, data.ta, hot, ok, floating=floating,
            r25_rated=prior.resistance, s25=prior.seebeck, alpha=cfg.alpha, beta=cfg.beta,
            options=opts,
        )  # fmt: skip
    except PhysicsError as exc:
        data.faces_missing = getattr(exc, "reason", str(exc))
        return
    if hot is not None:
        data.tc = data.faces.t_cold


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
