"""S pooled over windows: the module's terminal equation with the readings' noise and offsets.

References named beside each check:
- Module terminal equation V = I·R(Tm) + S(Tm)·ΔT: H. J. Goldsmid, Introduction to
  Thermoelectricity, Springer, 2010, ch. 2; D. M. Rowe (ed.), CRC Handbook of Thermoelectrics,
  1995. Temperature laws as in ``physics.resistance_at_temperature``.
- Least squares with a noisy regressor is biased towards zero by var(x)/(var(x) + var(u))
  (errors in variables; J. Durbin, "Errors in variables", Rev. Int. Stat. Inst. 22, 23, 1954);
  instrumental variables are not.
- Reference least squares: ``numpy.linalg.lstsq``.
The readings are made here from that equation: a week of one-minute samples, cut into
6-hour windows as the runner cuts them.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pytest

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics as ph
from tecfleet.analytics.diagnostics import seebeck_pool as sp

R25, S25 = 2.0, 0.050  # a 127-couple module (common practice, no source) [ohm, V/K]
WINDOW = 360  # one-minute samples in six hours


@dataclass
class Week:
    i: np.ndarray
    v: np.ndarray
    tc: np.ndarray
    th: np.ndarray


def _week(kind: str, seed: int, *, dt_offset_k: float = 0.0, v_offset: float = 0.0) -> Week:
    """Seven days of one-minute readings of a module driven by ``kind``: "proportional"
    (current follows the cabinet, never off) or "thermostat" (fixed 12 V supply, shorted while
    off), with probe noise 0.05 K, current and voltage noise 5 mV/5 mA, 0.1 K and 10 mV/10 mA
    steps (common practice, no source)."""
    rng = np.random.default_rng(seed)
    n = 7 * 1440
    t = np.arange(n) * 60.0
    day = 2.0 * np.pi * t / 86_400.0
    # The ambient's daily swing: small where it would let ΔT move apart from I.
    swing = 0.3 if kind == "proportional" else 3.0
    ambient = 295.0 + swing * np.sin(day) + np.cumsum(rng.normal(0.0, 0.002, n))
    tc = 272.0 + 0.3 * np.sin(day + 1.0) + np.cumsum(rng.normal(0.0, 0.01, n))
    if kind == "proportional":
        i = 2.5 + 0.4 * np.sin(day) + 0.05 * np.sin(7.3 * day)
        th = ambient + 0.25 * (i * 12.0)  # the hot face follows the heat it rejects
        on = np.ones(n, dtype=bool)
    else:
        on = (np.arange(n) // 3) % 2 == 0  # three minutes on, three off
        th = ambient + 3.0 * on
        i = np.zeros(n)
    tm = 0.5 * (tc + th)
    s = ph.seebeck_at_temperature(S25, tm, ph.BI2TE3_SEEBECK_TEMPCO)
    r = ph.resistance_at_temperature(R25, tm, ph.BI2TE3_RESISTANCE_TEMPCO)
    if kind == "thermostat":
        i = np.where(on, (12.0 - s * (th - tc)) / r, 0.0)
    v = np.where(on, i * r + s * (th - tc), 0.0)

    def read(x: np.ndarray, sd: float, step: float) -> np.ndarray:
        return np.round((x + rng.normal(0.0, sd, x.size)) / step) * step

    return Week(
        i=np.where(on, read(i, 0.005, 0.01), 0.0),
        v=np.where(on, read(v + v_offset, 0.005, 0.01), 0.0),
        tc=read(tc, 0.05, 0.1),
        th=read(th + dt_offset_k, 0.05, 0.1),
    )


def _window_sums(w: Week, shifts: list[float] | None = None) -> list[tuple[float, ...]]:
    # Each window's fit as the runner makes it, on ΔT less the window's shift.
    out = []
    for k in range(w.i.size // WINDOW):
        sl = slice(k * WINDOW, (k + 1) * WINDOW)
        d = 0.0 if shifts is None else shifts[k]
        e = dg.fit_electrical(
            w.i[sl], w.v[sl], w.tc[sl], w.th[sl] - d, np.ones(WINDOW, dtype=bool),
            floating=False, prior=(R25 * 1.1, S25 * 0.95, 0.15),
        )  # fmt: skip
        out.append(e.sums)
    return out


def _pool(sums: Sequence[Sequence[float]], shifts: list[float] | None = None) -> sp.PooledSeebeck:
    n = len(sums)
    return sp.pool_seebeck(
        sums, [1.0] * n, [0.0] * n if shifts is None else shifts, (R25 * 1.1, S25 * 0.95, 0.15)
    )


def test_proportional_driver_noise_in_current_and_delta_t_does_not_bias_s() -> None:
    # I and ΔT move together under a proportional driver: least squares on the readings
    # (numpy's lstsq, the same design with its offset) is pulled 3 % off S by their noise
    # (value this code produced, seed 4); the instrumented pooled fit is within 2.5 of its
    # stated errors (about 1 %) and within 2 %.
    w = _week("proportional", seed=4)
    tm = 0.5 * (w.tc + w.th)
    a = np.column_stack([
        w.i * ph.resistance_at_temperature(1.0, tm, ph.BI2TE3_RESISTANCE_TEMPCO),
        (w.th - w.tc) * ph.seebeck_at_temperature(1.0, tm, ph.BI2TE3_SEEBECK_TEMPCO),
        np.ones(w.i.size),
    ])  # fmt: skip
    s_ls = float(np.linalg.lstsq(a, w.v, rcond=None)[0][1])
    assert s_ls / S25 - 1.0 < -0.025  # the bias is real: the check is not vacuous
    p = _pool(_window_sums(w))
    assert p.s25 == pytest.approx(S25, rel=0.02)
    assert abs(p.s25 - S25) < 2.5 * p.s25_se
    assert p.windows == 28


def test_zero_volt_thermostat_with_offsets_is_pinned_by_the_supply() -> None:
    # V = I·R + S·ΔT at a fixed 12 V supply, shorted while off (no open-circuit voltage): the
    # voltage's own scale pins S, a 0.3 K ΔT offset moving it by only S·δ/V ≈ 0.1 % and a
    # 10 mV voltage offset by about as much; within 2 % and 2.5 stated errors, where one
    # window alone is left at the ratings' prior.
    w = _week("thermostat", seed=5, dt_offset_k=0.3, v_offset=0.01)
    sums = _window_sums(w)
    one = dg.fit_electrical(
        w.i[:WINDOW], w.v[:WINDOW], w.tc[:WINDOW], w.th[:WINDOW], np.ones(WINDOW, dtype=bool),
        floating=False, prior=(R25 * 1.1, S25 * 0.95, 0.15),
    )  # fmt: skip
    assert not one.reliable
    p = _pool(sums)
    assert p.s25 == pytest.approx(S25, rel=0.02)
    assert abs(p.s25 - S25) < 2.5 * p.s25_se


def test_offsets_taken_off_before_a_window_are_put_back() -> None:
    # The runner corrects each window's temperatures by the probes' offsets as estimated
    # then; pooling the same rows with those shifts gives the fit of the readings as they
    # came, whatever the shifts were (the sums of ΔT + δ follow from those of ΔT, f_s and V).
    w = _week("proportional", seed=6)
    tm = 0.5 * (w.tc + w.th)
    f_s = ph.seebeck_at_temperature(1.0, tm, ph.BI2TE3_SEEBECK_TEMPCO)
    x0 = w.i * ph.resistance_at_temperature(1.0, tm, ph.BI2TE3_RESISTANCE_TEMPCO)
    dt = w.th - w.tc
    shifts = [0.1 * np.sin(k) for k in range(28)]
    plain, moved = [], []
    for k, d in enumerate(shifts):
        sl = slice(k * WINDOW, (k + 1) * WINDOW)
        for out, delta in ((plain, 0.0), (moved, d)):
            x = np.column_stack([x0[sl], (dt[sl] - delta) * f_s[sl]])
            z = dg.electrical.neighbour_means(x, x[:, 0] != 0.0)
            out.append(sp.window_sums(x, w.v[sl], f_s[sl], z))
    a, b = _pool(plain), _pool(moved, shifts)
    assert b.s25 == pytest.approx(a.s25, rel=1e-6)
    assert b.r25 == pytest.approx(a.r25, rel=1e-6)
    assert b.s25_se == pytest.approx(a.s25_se, rel=1e-4)


def test_instruments_are_the_neighbours_in_the_same_state() -> None:
    x = np.array([[1.0], [10.0], [2.0], [20.0], [3.0], [30.0]])
    on = np.array([True, False, True, False, True, False])
    z = dg.electrical.neighbour_means(x, on)
    np.testing.assert_allclose(z[:, 0], [2.0, 20.0, 2.0, 20.0, 2.0, 20.0])


def test_windows_folded_into_day_blocks_pool_as_the_windows_do() -> None:
    # The sums are linear in the rows, so a day's windows folded into one block (each with
    # its weight and ΔT shift applied once) give the same pooled equations as the windows
    # one by one: the same S, R and errors to rounding (the exact identity of the algebra).
    w = _week("proportional", seed=7)
    sums = _window_sums(w)
    weights = [1.0 if k % 3 else 0.5 for k in range(len(sums))]
    shifts = [0.05 * np.cos(k) for k in range(len(sums))]
    by_window = sp.pool_seebeck(sums, weights, shifts, (R25 * 1.1, S25 * 0.95, 0.15))
    blocks: list[list[float]] = []
    for k, (s, wk, d) in enumerate(zip(sums, weights, shifts, strict=True)):
        if k % 4 == 0:  # four six-hour windows a day
            blocks.append(sp.fold_sums(None, s, wk, d))
        else:
            blocks[-1] = sp.fold_sums(blocks[-1], s, wk, d)
    n = len(blocks)
    by_day = sp.pool_seebeck(blocks, [1.0] * n, [0.0] * n, (R25 * 1.1, S25 * 0.95, 0.15))
    assert n == 7
    assert by_day.s25 == pytest.approx(by_window.s25, rel=1e-9)
    assert by_day.r25 == pytest.approx(by_window.r25, rel=1e-9)
    assert by_day.s25_se == pytest.approx(by_window.s25_se, rel=1e-6)
    assert by_day.n == pytest.approx(by_window.n, rel=1e-12)
