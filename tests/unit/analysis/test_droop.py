"""Droop of a long on-pulse and the longest on-time to a floor."""

import numpy as np
import pytest
from analysis_synth import scope

from bringup.analysis import AnalysisError, measure_droop


def bootstrap_gate(n, dt, t_on, t_off, v0=11.4, rate=165.0, ring=0.8):
    """V_gs of a bootstrap high side over a long on-time: an edge that rings, then a linear
    sag dV/dt = -(I_Q + I_leak)/C_BOOT (TI SLUA887's charge balance)."""
    t = np.arange(n) * dt
    s = t - t_on
    on = (t >= t_on) & (t < t_off)
    top = v0 - rate * s + ring * np.exp(-s / 2e-6) * np.sin(2 * np.pi * s / 1e-6)
    return np.where(on, top, 0.0)


def test_linear_sag_and_the_longest_on_time():
    # Demo board: 151.5 uA from 1 uF sags 151.5 V/s; from 11.4 V the 8.2 V UVLO is reached
    # after 3.2 V / 151.5 V/s = 21.12 ms [computed] (the charge balance with Q_G = 0 once on).
    dt, rate = 100e-9, 151.5
    y = scope(bootstrap_gate(50_000, dt, 0.5e-3, 4.5e-3, rate=rate), noise_v=0.03, seed=21)
    m = measure_droop(y.astype(np.float32), dt, floor_v=8.2)
    assert m.window == "edge-to-edge"
    assert m.on_time_s == pytest.approx(4e-3, rel=1e-3)
    assert m.start_v == pytest.approx(11.4, abs=0.03)
    assert m.droop_rate_v_per_s == pytest.approx(rate, rel=0.01)
    assert m.droop_v == pytest.approx(rate * 4e-3, rel=0.03)
    assert m.end_v == pytest.approx(m.start_v - m.droop_v)
    # 3.2 V / 151.5 V/s = 21.12 ms [computed], 5.28 times the 4 ms on-time [computed].
    assert m.t_on_max_s == pytest.approx(21.12e-3, rel=0.02)
    assert m.extrapolation == pytest.approx(5.28, rel=0.02)
    assert 0 < m.settle_s < 100e-6  # the ringing decays in a few microseconds
    assert m.droop_rate_uncertainty_v_per_s < 0.01 * rate
    assert set(m.to_dict()) >= {
        "start_v",
        "end_v",
        "droop_v",
        "droop_rate_v_per_s",
        "on_time_s",
        "t_on_max_s",
    }


def test_pulse_running_to_the_end_and_a_capture_of_the_top_only():
    dt = 100e-9
    y = scope(bootstrap_gate(50_000, dt, 0.5e-3, 1.0, rate=400.0), noise_v=0.03, seed=22)
    m = measure_droop(y, dt, 8.2, t0=-0.5e-3)
    assert m.window == "edge-to-end"
    assert m.droop_rate_v_per_s == pytest.approx(400.0, rel=0.01)
    top = scope(11.4 - 400.0 * np.arange(20_000) * dt, noise_v=0.01, seed=23)
    m = measure_droop(top, dt, 8.2)
    assert m.window == "whole-record"
    assert m.t_on_max_s == pytest.approx(3.2 / 400.0, rel=0.01)


def test_explicit_settle_time():
    dt = 100e-9
    y = scope(bootstrap_gate(50_000, dt, 0.5e-3, 4.5e-3), noise_v=0.03, seed=24)
    m = measure_droop(y, dt, 8.2, settle_s=1e-3)
    assert m.settle_s == pytest.approx(1e-3, rel=1e-3)
    with pytest.raises(AnalysisError, match="settle time"):
        measure_droop(y, dt, 8.2, settle_s=10e-3)


def test_no_droop_and_already_below_the_floor_are_null_with_reasons():
    dt = 100e-9
    flat = scope(bootstrap_gate(50_000, dt, 0.5e-3, 4.5e-3, rate=0.0), noise_v=0.03, seed=25)
    m = measure_droop(flat, dt, 8.2)
    assert m.t_on_max_s is None and "does not droop" in m.reasons["t_on_max_s"]
    low = measure_droop(scope(bootstrap_gate(50_000, dt, 0.5e-3, 4.5e-3), seed=26), dt, 12.0)
    assert low.t_on_max_s is None and "below the floor" in low.reasons["t_on_max_s"]


def test_bad_floor_and_too_short_a_top():
    y = bootstrap_gate(5000, 100e-9, 0.1e-3, 0.1e-3 + 1e-6)
    with pytest.raises(AnalysisError, match="only"):
        measure_droop(y, 100e-9, 8.2)
    with pytest.raises(AnalysisError, match="floor"):
        measure_droop(y, 100e-9, float("nan"))


def test_bootstrap_voltage_with_the_on_window_of_vgs():
    # V_BS sags during the on-time and is topped up by a recharge bump in each off-time: its
    # on-time is its lower part, so the window comes from V_GS of the same acquisition.
    dt, period, on = 10e-9, 40e-6, 38e-6
    t = np.arange(int(1.5 * period / dt)) * dt - 1e-6
    ph = np.mod(t, period)
    vgs = np.where(ph < on, 11.4 - 12.7e3 * ph, 0.0)
    bump = 10.45 - 0.1 * np.exp(-(ph - on) / 0.3e-6)
    vbs = np.where(ph < on, 10.39 - 12.7e3 * ph, bump)
    g = measure_droop(scope(vgs, noise_v=0.02, seed=27), dt, 8.0, t0=t[0])
    assert g.on_start_s == pytest.approx(0.0, abs=20e-9)
    assert g.on_end_s == pytest.approx(on, abs=20e-9)
    b = measure_droop(
        scope(vbs, noise_v=0.02, seed=28), dt, 8.2, t0=t[0], on_window_s=(g.on_start_s, g.on_end_s)
    )
    assert b.window == "given"
    assert b.droop_rate_v_per_s == pytest.approx(12.7e3, rel=0.02)
    assert b.end_v == pytest.approx(10.39 - 12.7e3 * on, abs=0.03)
    assert b.t_on_max_s == pytest.approx((10.39 - 8.2) / 12.7e3, rel=0.03)
    with pytest.raises(AnalysisError, match="outside the record"):
        measure_droop(vbs, dt, 8.2, t0=t[0], on_window_s=(1.0, 2.0))
    with pytest.raises(AnalysisError, match="forwards"):
        measure_droop(vbs, dt, 8.2, t0=t[0], on_window_s=(2e-6, 1e-6))
