"""How well hour blocks of instantaneous readings carry a thermostat's cold-side heat, against
the simulator's own energy accounting.

Run: ``python tests/bench/bench_cabinet_blocks.py [--seeds 1,2,3] [--interval 1]``.
Prints tables; asserts nothing. Simulated data only, with the sensors exact and no doors, loads
or power cuts, so that what remains is what sampling the thermostat's cycle at instants does.

Per thermostat unit and hour block: ∫Qc from the trapezoids of Qc = S·I·Tc - ½·I²·R - K·ΔT at
the instants (Goldsmid 2010, ch. 2; the simulator's true S, R and K), against the heat the
simulator accounts at the cold face over the same steps (heat rejected minus electrical power:
the first law of its integration, ``simulation.thermal``). Printed: how often a block misses by
more than 10 % and 20 %, the misses' mean, spread and skewness, and how many of the large ones
:func:`diagnostics.cabinet.strobed_blocks` marks as locked to the sampling. Then per unit, UA
from ordinary least squares of the cabinet balance ∫Qc = UA·∫(Ta - Tcab) + q·τ - C·δTcab
(Incropera et al. 2007, ch. 5) on those blocks: with the internal load q held at its true value
(so that only the blocks' heat moves UA): from the simulator's energies, from the instants,
and from the instants after the blocks beyond four robust scales are dropped (the
cut the robust fits make; :data:`diagnostics.least_squares.OUTLIER_CUT`). Misses of a cycle
sampled at instants are skewed where the cycle is close to a few sampling intervals, so a
symmetric cut leaves the blocks' mean biased.
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import sys

import numpy as np

from tecfleet.analytics import physics
from tecfleet.analytics import simulation as sim
from tecfleet.analytics.diagnostics.cabinet import strobed_blocks
from tecfleet.analytics.diagnostics.least_squares import OUTLIER_CUT, lstsq, robust_sd

START_S = 1_735_689_600.0  # 2025-01-01T00:00Z
T0_K = 273.15
BLOCK_S = 3600.0


def _unit_blocks(
    chunk: sim.Chunk, j: int, dev: sim.DeviceSpec, interval_s: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(∫Qc from instants, ∫Qc the simulator accounts [J], design of the cabinet balance,
    blocks marked locked to the sampling) per hour block of unit ``j``."""
    tr = {k: v[:, j] for k, v in chunk.truth.items()}
    tc, th = tr["t_cold"] + T0_K, tr["t_hot"] + T0_K
    ta, tair, i = tr["t_ambient"] + T0_K, tr["t_air"] + T0_K, tr["current"]
    tm = 0.5 * (tc + th)
    s = physics.seebeck_at_temperature(dev.s25, tm)
    r = physics.resistance_at_temperature(dev.r25, tm)
    qc = s * i * tc - 0.5 * i * i * r - dev.k * (th - tc)
    # Energy of each output step, accounted at its end: step k+1 is the pair (k, k+1).
    q_sim = (chunk.energy["rejected"][:, j] - chunk.energy["electrical"][:, j])[1:]
    per_block = max(round(BLOCK_S / interval_s), 1)
    n_blk = (qc.size - 1) // per_block
    blk = np.arange(qc.size - 1) // per_block
    use = blk < n_blk
    blk = blk[use]

    def sums(f: np.ndarray) -> np.ndarray:
        return np.bincount(blk, weights=f[use], minlength=n_blk)

    trap = 0.5 * (qc[:-1] + qc[1:]) * interval_s
    lead = 0.5 * ((ta - tair)[:-1] + (ta - tair)[1:]) * interval_s
    x = np.column_stack([sums(lead), sums(np.full(trap.size, interval_s)), -sums(np.diff(tair))])
    locked = strobed_blocks(i > 0.05, np.arange(qc.size - 1) // per_block)[:n_blk]
    return sums(trap), sums(q_sim), x, locked


def _skewness(x: np.ndarray) -> float:
    sd = float(np.std(x))
    return float(np.mean(((x - np.mean(x)) / sd) ** 3)) if sd > 0.0 else math.nan


def run(seeds: list[int], n_dev: int, days: float, interval_min: float) -> None:
    interval_s = 60.0 * interval_min
    print(f"\n== Hour blocks of {interval_min:g}-minute instants against the simulator's energy: "
          f"thermostat units, {days:g} days, seeds {seeds}, {n_dev} devices each ==")  # fmt: skip
    errs: list[np.ndarray] = []
    locks: list[np.ndarray] = []
    print(f"{'seed':>5} {'device':9} {'sw/h':>5} {'UA true':>8} {'energy':>8} {'instants':>9} "
          f"{'cut 4σ':>8}")  # fmt: skip
    for seed in seeds:
        spec = sim.random_fleet(n_dev, seed=seed, start_s=START_S, days=days)
        spec = dataclasses.replace(spec, random_use=False, sensors=False, interval_s=interval_s)
        chunk = sim.Simulator(spec).run(round(days * 86_400.0 / interval_s))
        for j, dev in enumerate(spec.devices):
            if dev.control != "thermostat":
                continue
            y_inst, y_sim, x, locked = _unit_blocks(chunk, j, dev, interval_s)
            errs.append(y_inst / y_sim - 1.0)
            locks.append(locked)
            # q held at its truth: UA and C from what is left.
            x2 = x[:, [0, 2]]
            y_i, y_s = y_inst - dev.q_internal * x[:, 1], y_sim - dev.q_internal * x[:, 1]
            res = y_i - x2 @ lstsq(x2, y_i)
            keep = np.abs(res) <= OUTLIER_CUT * robust_sd(res)
            on = chunk.truth["current"][:, j] > 0.05
            sw_h = float(np.sum(on[1:] != on[:-1])) / (days * 24.0)
            ua = [float(lstsq(xx, yy)[0]) / dev.ua - 1.0
                  for xx, yy in ((x2, y_s), (x2, y_i), (x2[keep], y_i[keep]))]  # fmt: skip
            print(f"{seed:5d} {dev.device_id:9} {sw_h:5.1f} {dev.ua:8.3f} "
                  + " ".join(f"{100 * u:+8.1f}%" for u in ua))  # fmt: skip
    e, lk = np.concatenate(errs), np.concatenate(locks)
    big = np.abs(e) > 0.10
    print(f"\nblocks {e.size}: beyond 10 % {100 * big.mean():.1f} %, beyond 20 % "
          f"{100 * np.mean(np.abs(e) > 0.2):.1f} %; mean {100 * e.mean():+.2f} %, rms "
          f"{100 * math.sqrt(float(np.mean(e**2))):.1f} %, skewness {_skewness(e):+.2f}; "
          f"marked locked: {100 * lk.mean():.1f} % of all, {100 * lk[big].mean():.1f} % of "
          "those beyond 10 %")  # fmt: skip


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", default="1,2,3")
    ap.add_argument("--devices", type=int, default=8)
    ap.add_argument("--days", type=float, default=7.0)
    ap.add_argument("--interval", type=float, default=1.0, help="reporting interval [min]")
    args = ap.parse_args(argv)
    run([int(s) for s in args.seeds.split(",")], args.devices, args.days, args.interval)
    return 0


if __name__ == "__main__":
    sys.exit(main())
