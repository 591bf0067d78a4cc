"""A device's readings as arrays for the fits, and its registered ratings as priors."""

from __future__ import annotations

import dataclasses
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
from tecfleet.ingest.db.readings import carries_summaries

__all__ = [
    "COLUMNS",
    "Readings",
    "complete_faces",
    "faces_basis",
    "fill_cold_face",
    "flags_of",
    "load",
    "placed_faces",
    "priors",
]


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
    #: Whether each face probe reported anything in this load (a cooler without one
    #: delivers NaN); where not, the faces are read from the module's voltage window by window.
    cold_probe: bool = True
    hot_probe: bool = True
    #: The current window's faces as the module's voltage gives them, where a probe is missing.
    faces: dg.FaceReconstruction | None = None
    #: Where a probe is missing and the voltage could not stand in for it: why not.
    faces_missing: str | None = None
    #: The readings' interval summaries (NaN where a reading carries none), None where the
    #: newest reading of the load carries none.
    means: dg.IntervalMeans | None = None
    #: End of the newest maintenance that replaced a part (epoch ms UTC): the windows read
    #: start there at the earliest (see ``runner.replacements``); None: no such end.
    since_ms: int | None = None

    @property
    def summarised(self) -> bool:
        """Whether readings of this load carry interval summaries."""
        return self.means is not None

    @property
    def probed(self) -> tuple[bool, bool]:
        """Whether the cold and the hot face probe reported anything in this load."""
        return self.cold_probe, self.hot_probe

    def slice(self, start_ms: int, end_ms: int) -> slice:
        """The readings with ``start_ms <= ts < end_ms``, from ``since_ms`` at the earliest."""
        if self.since_ms is not None:
            start_ms = max(start_ms, self.since_ms)
        a = int(np.searchsorted(self.ts, start_ms, side="left"))
        b = int(np.searchsorted(self.ts, end_ms, side="left"))
        return slice(a, max(a, b))


#: Reading columns the fits use, in the order of ``Readings``' arrays.
COLUMNS = ("ts_ms", "t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "door_open")


#: Interval summaries the balances use, in the order of ``IntervalMeans``' fields.
SUMMARIES = (
    "interval_s",
    "t_cabinet_mean",
    "t_cold_mean",
    "t_hot_mean",
    "t_ambient_mean",
    "current_mean",
    "current_sq_mean",
    "power_mean",
    "on_share",
)


def load(conn: Connection, device_id: str, start_ms: int, end_ms: int) -> Readings:
    """Readings of one device with ``start_ms <= ts_ms < end_ms`` (epoch ms UTC), with their
    interval summaries where the newest of them carries any."""
    summarised = carries_summaries(conn, device_id, start_ms, end_ms)
    arr = db.read_arrays(
        conn, device_id, COLUMNS + (SUMMARIES if summarised else ()), start_ms, end_ms
    )
    ts = arr[:, 0].astype(np.int64)
    tc, th = arr[:, 2] + T0, arr[:, 3] + T0
    means = None
    if summarised:
        cols = [arr[:, len(COLUMNS) + j] for j in range(len(SUMMARIES))]
        for j in (1, 2, 3, 4):
            cols[j] = cols[j] + T0
        means = dg.IntervalMeans(*cols)
    return Readings(
        ts=ts,
        t=(ts - start_ms) / 1000.0,
        tcab=arr[:, 1] + T0,
        tc=tc,
        th=th,
        ta=arr[:, 4] + T0,
        i=arr[:, 5],
        v=arr[:, 6],
        door=arr[:, 7] > 0.5,
        cold_probe=bool(ts.size == 0 or np.isfinite(tc).any()),
        hot_probe=bool(ts.size == 0 or np.isfinite(th).any()),
        means=means,
    )


def complete_faces(
    data: Readings,
    sl: slice,
    prior: physics.ModuleParameters | None,
    cfg: AnalysisSettings,
    r25_read: tuple[float, float] | None = None,
) -> None:
    """Where the cold-side probe (or both face probes) reported nothing in this load, read
    the faces of the readings in ``sl`` from the module's voltage
    (:func:`diagnostics.reconstruct_faces`, from those readings alone): the cold face filled
    in where the hot one is probed, the reconstruction kept in ``data.faces``, or the reason
    there is none in ``data.faces_missing``. With both probes nothing is touched.
    ``r25_read``: the R25 and its error to read the faces at [ohm, ohm] (see
    :func:`tracks.faces_r25`), None for the readings' own."""
    data.faces, data.faces_missing = None, None
    if data.cold_probe:
        return
    if prior is None:
        data.faces_missing = "no cold-side probe and no registered ratings to read ΔT with"
        return
    opts = diagnostics_options(cfg)
    i, v = data.i[sl], data.v[sl]
    ok = np.isfinite(i) & np.isfinite(v) & ~data.door[sl]
    floating = dg.floating_without_faces(v[ok & (i <= opts.on_current)], options=opts)
    hot = data.th[sl] if data.hot_probe else None
    try:
        data.faces = dg.reconstruct_faces(
            data.t[sl], i, v, data.tcab[sl], data.ta[sl], hot, ok, floating=floating,
            s25=prior.seebeck, r25_guess=prior.resistance, r25_read=r25_read,
            k25=prior.conductance,
            alpha=cfg.alpha, beta=cfg.beta, options=opts,
        )  # fmt: skip
    except PhysicsError as exc:
        data.faces_missing = getattr(exc, "reason", str(exc))
        return
    if data.hot_probe:
        data.tc[sl] = data.faces.t_cold


def placed_faces(data: Readings, sl: slice) -> Readings:
    """``data`` with both faces of the readings in ``sl`` placed where neither face is probed
    and the module's voltage gave ΔT (``data.faces``, a floating driver): Th = Tm + ΔT/2 and
    Tc = Tm - ΔT/2, Tm from how the sinks share ΔT (:func:`diagnostics.unanchored_faces`),
    so that the cabinet's balance can be fitted. The cabinet takes the cold face only through
    S·I·Tc in Qc = S·I·Tc - ½·I²·R - K·ΔT (Goldsmid 2010, ch. 2): a kelvin of Tc moves
    Qc by S·I, about 0.15 W at 3 A and 50 mV/K, while ΔT itself is read from the voltage.
    A copy: the next windows' rests and probe offsets see only what the probes gave.
    ``data`` itself where a face is probed or the voltage gave no faces."""
    faces = data.faces
    if faces is None or data.cold_probe or data.hot_probe:
        return data
    tc, th = data.tc.copy(), data.th.copy()
    half = 0.5 * faces.delta_t
    tc[sl], th[sl] = faces.t_mean - half, faces.t_mean + half
    return dataclasses.replace(data, tc=tc, th=th)


def fill_cold_face(
    data: Readings, sl: slice, r25: float, s25: float, cfg: AnalysisSettings
) -> None:
    """Where the hot face is probed and the cold one is not, read the cold face of the
    readings in ``sl`` not yet read from the module's voltage with a given R25 [ohm] and S25
    [V/K] (the last window's): the hours after a window fit, whose hourly figures need it."""
    if data.cold_probe or not data.hot_probe:
        return
    todo = np.isnan(data.tc[sl])
    if not todo.any():
        return
    opts = diagnostics_options(cfg)
    i, v, th = data.i[sl][todo], data.v[sl][todo], data.th[sl][todo]
    floating = dg.floating_without_faces(v[i <= opts.on_current], options=opts)
    dt = dg.delta_t_from_hot_face(
        i, v, th, floating, r25, s25, alpha=cfg.alpha, beta=cfg.beta, options=opts
    )
    tc = data.tc[sl]
    tc[todo] = th - dt


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
