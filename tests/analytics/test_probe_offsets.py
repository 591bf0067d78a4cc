"""Checks of the probe-offset estimator against worked cases.

References named beside each check:
- H. J. Goldsmid, Introduction to Thermoelectricity, Springer, 2010, ch. 2 (V_oc = S·ΔT).
- Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., 2007, ch. 5, eq. (5.6)
  (lumped capacitance: θ/θi = exp(-t/τ)).
- C. M. Bishop, Pattern Recognition and Machine Learning, 2006, eqs. (2.81)-(2.82), the
  conditional of a joint Gaussian (from memory).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from tecfleet.analytics import simulation as sim
from tecfleet.analytics.diagnostics import flag_samples
from tecfleet.analytics.diagnostics import probe_offsets as po
from tecfleet.analytics.errors import InsufficientDataError

T0 = 273.15


def test_open_circuit_offset_matches_the_gaussian_conditional_worked_by_hand() -> None:
    # A floating module, S = 0.05 V/K, off for 100 samples with ΔT relaxing from 12 to 3 K;
    # V = S·ΔT exactly, the hot probe reads 0.4 K high. The one observation is
    # u = b_h - b_c - b_v/S = 0.4 ± 0.01/0.05/√100 = 0.02 K (voltage step 10 mV over S).
    # By hand (Bishop 2006, eq. (2.81)): priors b_h, b_c ~ N(0, 0.3²/2), b_v ~ N(0, 0.01²),
    # var u = 0.045 + 0.045 + (0.01/0.05)² = 0.13, cov(b_h - b_c, u) = 0.09, so
    # E[b_h - b_c | u] = 0.09/(0.13 + 0.02²)·0.4 = 0.27607 K and its variance
    # 0.09 - 0.09²/0.1304 = 0.027883 K², plus the 0.1-K floor's square: 0.037883 K².
    s = 0.05
    dt_true = np.linspace(12.0, 3.0, 100)
    tc = np.full(100, T0 + 5.0)
    th = tc + dt_true + 0.4
    ev = po.open_circuit_evidence(
        tc, th, np.zeros(100), s * dt_true, np.full(100, s), 0.0, np.ones(100, dtype=bool)
    )
    est = po.probe_offsets(ev)
    assert est.offsets[2] - est.offsets[1] == pytest.approx(0.27607, abs=1e-4)
    assert est.difference_sd("hot", "cold") ** 2 == pytest.approx(0.037883, rel=1e-3)
    assert est.n_open == 100 and est.n_rest == 0


def _rest(offsets: tuple[float, float, float], hours: float = 36.0) -> list[po.RestMoment]:
    # A unit without current relaxing to a 20 °C ambient as a lumped body (Incropera 2007,
    # eq. (5.6)): the cabinet from 3 K below with τ = 10 h, the unpowered cold and hot faces
    # at fixed shares (0.8 and 0.3) of its lag; probe offsets added, minute samples.
    t = np.arange(0.0, hours * 3600.0, 60.0)
    lag = -3.0 * np.exp(-t / 36_000.0)
    ta = np.full(t.size, T0 + 20.0)
    tcab, tc, th = ta + lag, ta + 0.8 * lag, ta + 0.3 * lag
    return po.rest_moments(
        t, tcab + offsets[0], tc + offsets[1], th + offsets[2], ta, np.zeros(t.size),
        np.zeros(t.size), np.ones(t.size, dtype=bool), floating=False,
    )  # fmt: skip


def test_a_long_rest_gives_each_probes_offset_from_the_ambient_probe() -> None:
    truth = (0.25, -0.15, 0.35)  # [K], set by this test
    moments = _rest(truth)
    assert len(moments) == 1
    # The drift-free intercept of T_j - T_a against dTcab/dt is the offset; the relaxation
    # is exactly lumped here, so it is found to well within the 0.03-K floor.
    np.testing.assert_allclose(moments[0].diff, truth, atol=0.01)
    est = po.probe_offsets(po.rest_evidence(moments))
    # With one rest at the 0.03-K floor against the prior of 0.21 K per probe, the
    # posterior mean keeps 0.21²/(0.21² + 0.03²·...) of it: within 0.03 K of the truth.
    np.testing.assert_allclose(est.offsets, truth, atol=0.03)
    # Stated: the rest's own (0.03-K floor) and the 0.1-K floor between temperatures.
    assert np.all(est.stderrs < 0.11)
    assert est.n_rest == 1


def test_a_short_off_spell_is_no_rest_and_no_evidence_keeps_the_prior() -> None:
    assert _rest((0.2, 0.0, 0.0), hours=12.0) == []
    with pytest.raises(InsufficientDataError):
        po.probe_offsets(po.OffsetEvidence.nothing())


def test_a_unit_without_a_cold_probe_keeps_its_prior_for_it() -> None:
    t = np.arange(0.0, 36 * 3600.0, 60.0)
    lag = -3.0 * np.exp(-t / 36_000.0)
    ta = np.full(t.size, T0 + 20.0)
    moments = po.rest_moments(
        t, ta + lag + 0.2, np.full(t.size, math.nan), ta + 0.3 * lag - 0.1, ta,
        np.zeros(t.size), np.zeros(t.size), np.ones(t.size, dtype=bool), floating=False,
    )  # fmt: skip
    assert len(moments) == 1 and math.isnan(float(moments[0].diff[1]))
    est = po.probe_offsets(po.rest_evidence(moments))
    # By hand (Bishop 2006, eq. (2.82)): each probe's prior is σ² = 0.3²/2; knowing
    # b_cab - b_a and b_h - b_a leaves b_a a variance σ² - σ²·[1 1]·[[2 1] [1 2]]⁻¹·[1 1]ᵀ
    # = σ²/3, so the cold probe's offset from the ambient one keeps σ² + σ²/3:
    # sd = 0.2121·√(4/3) = 0.2449 K (the rest's own 0.03-K floor moves it a little), and
    # with the 0.1-K floor between temperatures √(0.2449² + 0.1²) = 0.2645 K.
    assert est.stderrs[1] == pytest.approx(0.2645, rel=0.01)
    np.testing.assert_allclose(est.offsets[[0, 2]], [0.2, -0.1], atol=0.03)


def test_offsets_found_on_a_long_power_cut_match_the_simulated_probe_biases() -> None:
    # Eight simulated coolers (a development seed), each with a two-day power cut from 12 h
    # into the run; the simulator gives every probe a constant bias (DeviceSpec.sensor_bias,
    # the simulated truth). Every probe offset a rest pins must lie within three of its
    # stated standard errors of the simulated one, and a floating module's voltage at rest
    # within three of its own of the simulated voltage bias.
    start = 1_735_689_600.0
    spec = sim.random_fleet(8, seed=205, start_s=start, days=3.0)
    cuts = tuple(
        sim.ScheduledEvent("power_cut", d.device_id, start + 12 * 3600.0, duration_s=48 * 3600.0)
        for d in spec.devices
    )
    chunk = sim.Simulator(dataclasses.replace(spec, events=cuts)).run(3 * 1440)
    m, found = chunk.measured, 0
    for k, dev in enumerate(spec.devices):
        t = chunk.ts[:, k]
        tcab, tc, th, ta = (m[n][:, k] + T0 for n in ("t_cabinet", "t_cold", "t_hot", "t_ambient"))
        i, v = m["current"][:, k], m["voltage"][:, k]
        flags = flag_samples(t, tcab, tc, th, ta, i, v, np.zeros(t.size, dtype=bool))
        usable = flags.usable & chunk.present[:, k]
        floating = dev.off_voltage == "open_circuit"
        moments = po.rest_moments(t, tcab, tc, th, ta, i, v, usable, floating=floating)
        bias = np.array(dev.sensor_bias)
        for mom in moments:
            pinned = np.isfinite(mom.diff)
            truth = bias[:3] - bias[3]
            assert np.all(np.abs(mom.diff - truth)[pinned] <= 3.0 * mom.diff_sd[pinned])
            found += int(pinned.sum())
            if floating:
                assert abs(mom.volt - bias[5]) <= 3.0 * mom.volt_sd
    # The cut is long and every unit rests through it: most probes are pinned.
    assert found >= 12


def test_heat_flow_offsets_of_the_sink_balances_worked_by_hand() -> None:
    # With the prior alone (each probe ±σ, σ² = 0.045 K², offsets taken from the ambient
    # probe: cov = σ²·(I + 1·1ᵀ)), g_c = 3 W/K, g_h = 5 W/K, K = 0.5 W/K. The cold balance's
    # weights (3, -3.5, 0.5) sum to zero, so the ambient's share drops out:
    # var = σ²·(9 + 12.25 + 0.25) = 0.9675 W²; the hot one's (0, -0.5, 5.5) sum to 5:
    # var = σ²·(0.25 + 30.25 + 25) = 2.4975 W² (JCGM 100:2008, GUM, eq. (13), by hand).
    cov = 0.045 * (np.eye(3) + np.ones((3, 3)))
    sd_c, sd_h = po.balance_offset_sds(cov, 0.5, 3.0, 5.0)
    assert sd_c == pytest.approx(math.sqrt(0.9675), rel=1e-9)
    assert sd_h == pytest.approx(math.sqrt(2.4975), rel=1e-9)
