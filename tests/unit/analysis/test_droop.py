"""Droop of a long on-pulse and the longest on-time to a floor."""

import numpy as np
import pytest
from analysis_synth import damped_ring, scope

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


# --- A sagging top read as it is (issue 12) -------------------------------------------------


def sagging_pulse(dt, pre_s, post_s, on_s=1e-3, top_v=12.0, rate=2000.0, edge_tau_s=0.0):
    """0 V, then a pulse whose top starts at ``top_v`` and sags linearly at ``rate`` V/s for
    ``on_s``, then back to 0 V; the edges are first-order with ``edge_tau_s`` (0: a jump)."""
    n = int(round((pre_s + on_s + post_s) / dt))
    t = np.arange(n) * dt
    s = t - pre_s
    top = top_v - rate * s
    if edge_tau_s > 0:
        top = top * (1.0 - np.exp(-np.maximum(s, 0.0) / edge_tau_s))
        after = (top_v - rate * on_s) * np.exp(-np.clip(s - on_s, 0.0, None) / edge_tau_s)
        return np.where(s < 0, 0.0, np.where(s < on_s, top, after))
    return np.where((s >= 0) & (s < on_s), top, 0.0)


# Truth [computed]: 2000 V/s over the 1 ms on-time is a 2.0 V droop; from 12 V the line reaches
# the 8.2 V floor after (12 - 8.2)/2000 = 1.90 ms (the linear sag of TI SLUA887's charge
# balance, dV/dt = -I/C_BOOT).
SAG_CASES = [
    # (scope range low, high (V), pre, post (s), noise (V rms), bits)
    (-2.0, 13.0, 0.1e-3, 0.1e-3, 0.0, 8),  # read whole-record, 9.6 V of "droop" before
    (-2.0, 13.0, 0.3e-3, 0.05e-3, 0.002, 8),
    (-1.5, 13.5, 0.05e-3, 0.02e-3, 0.0, 8),
    (-1.5, 13.5, 0.1e-3, 0.2e-3, 0.002, 8),
    (-1.5, 13.5, 0.2e-3, 0.05e-3, 0.0, 8),
    (-1.0, 13.0, 0.05e-3, 0.4e-3, 0.002, 8),  # the 90 % level above the sagged top
    (-0.5, 12.5, 0.1e-3, 0.1e-3, 0.0, 8),
    (-2.0, 14.0, 0.4e-3, 0.4e-3, 0.01, 12),
]


@pytest.mark.parametrize(("lo", "hi", "pre", "post", "noise", "bits"), SAG_CASES)
def test_a_clean_sagging_pulse_reads_its_own_droop(lo, hi, pre, post, noise, bits):
    dt = 1e-6
    y = scope(sagging_pulse(dt, pre, post), noise_v=noise, bits=bits, lo=lo, hi=hi, seed=31)
    m = measure_droop(y, dt, floor_v=8.2)
    assert m.window == "edge-to-edge"
    assert m.on_time_s == pytest.approx(1e-3, abs=2 * dt)
    assert m.droop_rate_v_per_s == pytest.approx(2000.0, rel=0.01)
    assert m.droop_v == pytest.approx(2.0, abs=0.03)
    assert m.start_v == pytest.approx(12.0, abs=0.03)
    assert m.t_on_max_s == pytest.approx(1.90e-3, rel=0.01)
    # The fitted top runs to the falling edge, not to where the sag crosses the 90 % level.
    assert m.top_end_s == pytest.approx(pre + 1e-3, abs=5 * dt)
    assert not m.warnings


@pytest.mark.parametrize("seed", [41, 42, 43])
@pytest.mark.parametrize("noise", [0.02, 0.05])
def test_a_top_below_the_90_percent_level_is_measured_over_the_whole_on_time(seed, noise):
    # A 12 V top sagging 2 V with a 1 us RC on both edges and a 0.4 V ring at turn-on, through
    # 8 bits over 0-16 V: the histogram's high level sits within the sag, the sagged end lies
    # below its 90 % level. The droop over the whole on-time is 2.0 V [computed].
    dt = 0.2e-6
    clean = sagging_pulse(dt, 0.1e-3, 0.2e-3, edge_tau_s=1e-6)
    clean = clean + damped_ring(clean.size, dt, 0.1e-3 + 3e-6, 0.4, 500e3, 4e-6)
    y = scope(clean, noise_v=noise, lo=0.0, hi=16.0, seed=seed)
    m = measure_droop(y, dt, floor_v=8.2)
    assert m.droop_v == pytest.approx(2.0, abs=0.04)
    assert m.end_v == pytest.approx(10.0, abs=0.04)
    assert m.droop_v == pytest.approx(m.droop_rate_v_per_s * m.on_time_s, rel=1e-9)
    assert m.top_end_s > 0.1e-3 + 1e-3 - 10e-6  # the fit reaches the falling edge


def test_a_top_that_bends_says_so():
    # An RC discharge (tau 1 ms) over a 1 ms on-time: the slope halves from start to end.
    dt = 1e-6
    n = 1400
    t = np.arange(n) * dt
    s = t - 0.2e-3
    clean = np.where((s >= 0) & (s < 1e-3), 12.0 * np.exp(-s / 1e-3), 0.0)
    m = measure_droop(scope(clean, noise_v=0.01, seed=44), dt, floor_v=4.0)
    assert any("not a straight sag" in w for w in m.warnings)
