"""A chunk of simulated output: true state, what the sensors report, energy terms; and the
payload objects a device would publish for it."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .specs import CHANNELS

__all__ = ["Chunk", "concat"]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]

_TEMP_CHANNELS = ("t_cabinet", "t_cold", "t_hot", "t_ambient")
#: Face channels a unit may lack (NaN in ``measured``): left out of its payloads.
_FACE_CHANNELS = ("t_cold", "t_hot")


@dataclass
class Chunk:
    """Output of :meth:`Simulator.run`: ``n_steps`` output steps for every device.

    ``truth`` arrays (n_steps, n_dev) are the model's state at each output instant:
    t_air, t_contents, t_cold, t_hot, t_ambient [°C], current [A], voltage [V], on (drive on),
    door_s (seconds open in the interval), powered. ``measured`` holds what the sensors report
    (already biased, noisy, quantised, faulted), ``ts`` the sample timestamps (jittered) and
    ``present`` which samples exist (not missed, not offline). ``energy`` holds per-step
    energy terms [J]: wall (through walls and door, into the cabinet), internal, loads,
    electrical, rejected (at the hot face), stored (air + contents). ``summaries`` holds what
    a unit that samples fast reports of each interval (means, on share, extremes; as measured,
    with each probe's bias) where the fleet reports them.
    """

    t: FloatArray
    ts: FloatArray
    seq: NDArray[np.int64]
    present: BoolArray
    truth: dict[str, FloatArray]
    measured: dict[str, FloatArray]
    energy: dict[str, FloatArray]
    device_ids: list[str]
    #: The interval summaries each reading carries, by payload field name (empty: none).
    summaries: dict[str, FloatArray] = field(default_factory=dict)

    @property
    def n_steps(self) -> int:
        return int(self.t.shape[0])

    def readings(self, step: int, device: int) -> dict[str, Any]:
        """One reading as a payload object (``present`` is not checked)."""
        return _reading(self, step, device)

    def payload_rows(self) -> list[list[dict[str, Any] | None]]:
        """Payload objects per step and device (None where no sample exists)."""
        return _payload_rows(self)


def _reading(chunk: Chunk, j: int, i: int) -> dict[str, Any]:
    meas = chunk.measured
    out: dict[str, Any] = {"ts": float(chunk.ts[j, i]), "seq": int(chunk.seq[j, i])}
    for name in CHANNELS:
        value = float(meas[name][j, i])
        if not (name in _FACE_CHANNELS and math.isnan(value)):
            out[name] = value
    out["door_open"] = bool(chunk.truth["door_s"][j, i] > 0)
    for name, col in chunk.summaries.items():
        value = float(col[j, i])
        if not math.isnan(value):
            out[name] = value
    return out


def _payload_rows(chunk: Chunk) -> list[list[dict[str, Any] | None]]:
    """Payload dicts for all steps and devices, built from Python lists (fast path)."""
    cols = {name: chunk.measured[name].tolist() for name in CHANNELS}
    ts = chunk.ts.tolist()
    seq = chunk.seq.tolist()
    door = (chunk.truth["door_s"] > 0).tolist()
    present = chunk.present.tolist()
    tcab, tcold, thot, tamb = (cols[c] for c in _TEMP_CHANNELS)
    cur, volt, rh = cols["current"], cols["voltage"], cols["rh"]
    rows: list[list[dict[str, Any] | None]] = []
    for j in range(chunk.n_steps):
        row: list[dict[str, Any] | None] = []
        pj = present[j]
        for i in range(len(pj)):
            if not pj[i]:
                row.append(None)
                continue
            row.append(
                {
                    "ts": ts[j][i],
                    "seq": seq[j][i],
                    "t_cabinet": tcab[j][i],
                    "t_cold": tcold[j][i],
                    "t_hot": thot[j][i],
                    "t_ambient": tamb[j][i],
                    "current": cur[j][i],
                    "voltage": volt[j][i],
                    "rh": rh[j][i],
                    "door_open": door[j][i],
                }
            )
        rows.append(row)
    for name in _FACE_CHANNELS:
        absent = np.isnan(chunk.measured[name]).all(axis=0)
        for i in np.flatnonzero(absent).tolist():
            for row in rows:
                reading = row[i]
                if reading is not None:
                    del reading[name]  # the unit has no probe there
    _add_summaries(chunk, rows)
    return rows


def _add_summaries(chunk: Chunk, rows: list[list[dict[str, Any] | None]]) -> None:
    # Each reading's interval summaries, where the fleet reports them (a face the unit has no
    # probe on has none).
    for name, col in chunk.summaries.items():
        values = col.tolist()
        for j, row in enumerate(rows):
            for i, reading in enumerate(row):
                if reading is not None and not math.isnan(values[j][i]):
                    reading[name] = values[j][i]


def concat(chunks: Sequence[Chunk]) -> Chunk:
    """Join chunks along time."""
    first = chunks[0]
    return Chunk(
        t=np.concatenate([c.t for c in chunks]),
        ts=np.concatenate([c.ts for c in chunks]),
        seq=np.concatenate([c.seq for c in chunks]),
        present=np.concatenate([c.present for c in chunks]),
        truth={k: np.concatenate([c.truth[k] for c in chunks]) for k in first.truth},
        measured={k: np.concatenate([c.measured[k] for c in chunks]) for k in first.measured},
        energy={k: np.concatenate([c.energy[k] for c in chunks]) for k in first.energy},
        device_ids=first.device_ids,
        summaries={k: np.concatenate([c.summaries[k] for c in chunks]) for k in first.summaries},
    )
