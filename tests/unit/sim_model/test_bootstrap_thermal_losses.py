"""Bootstrap droop, heatsink temperature, losses and input current against published relations.

Waveforms go through the test's scope-like digitiser and are measured with the measurement core.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from bringup.analysis import (
    bootstrap_droop,
    conduction_loss,
    fit_soak,
    measure_droop,
    measure_edges,
    state_levels,
)
from sim_instruments.model import StageModel
from sim_instruments.scenarios import SCENARIOS


def _running(design, scenario="healthy", duty=0.5, **changes) -> StageModel:
    m = StageModel({**design, **changes}, scenario)
    m.set_bus(design["bus_voltage"])
    m.set_pwm(True, duty)
    return m


@pytest.mark.parametrize(
    ("c_boot", "r_pd"),
    [(220e-9, 10e3), (680e-9, 1.2e3), (100e-9, 4.7e3)],
)
def test_bootstrap_droop_is_charge_over_capacitance(demo_design, digitise, rng, c_boot, r_pd):
    """Over the on-time Vgs droops by Q/C with Q = (I_QBS + I_diode + I_cap + Vgs/R_pd) t.

    [computed] REFERENCES §3: droop for a chosen C = Q_total / C, computed from the charge
    balance [read: gate-driver datasheets' sizing sections]; here the on-time part, the flat
    top after the gate has charged.
    ``bringup.analysis.bootstrap_droop`` is that quotient. Within 5 %.
    """
    d = demo_design
    m = _running(d, duty=d["duty_max"], bootstrap_capacitance=c_boot, gate_source_pulldown=r_pd)
    dt = 80e-6 / 100_000
    vgs = digitise(m, "vgs", -2e-6, dt, 100_000, 16.0, 6.0, rng)
    droop = measure_droop(vgs, dt, 10.5, -2e-6)
    window = droop.top_end_s - droop.top_start_s
    v_mean = 0.5 * (droop.start_v + droop.end_v)  # the pull-down sees Vgs
    leak = (
        d["floating_quiescent_current"] + d["bootstrap_diode_leakage"] + d["bootstrap_cap_leakage"]
    )
    charge = (leak + v_mean / r_pd) * window
    assert droop.droop_v == pytest.approx(bootstrap_droop(charge, c_boot), rel=0.05)


def test_heatsink_settles_at_ambient_plus_loss_times_thermal_resistance(demo_design):
    """T_final = T_ambient + P R_th, reached along a first-order curve with the board's tau.

    [read] REFERENCES §5 (T_J = T_A + P theta_JA; first-order soak). The soak is sampled like
    a thermocouple log (5 s, 0.1 K noise) and fitted with ``bringup.analysis.fit_soak``.
    """
    d = demo_design
    m = StageModel(d, "hot-switch")
    m.set_sim_time(100.0)
    m.set_bus(d["bus_voltage"])
    m.set_pwm(True, d["duty_max"])
    p = m.losses()["heatsink"]
    r_th = SCENARIOS["hot-switch"].changes["thermal_resistance"]  # the substitute part's
    t = 100.0 + np.arange(0.0, 1200.0, 5.0)
    temp = np.array([m.heatsink_temperature(x) for x in t])
    temp = temp + np.random.default_rng(5).normal(0.0, 0.1, t.size)
    fit = fit_soak(t - t[0], temp)
    assert fit.final_c == pytest.approx(d["ambient_temperature"] + p * r_th, abs=0.5)
    assert fit.tau_s == pytest.approx(d["thermal_time_constant"], rel=0.05)
    # Three equally spaced noiseless samples give T_inf by Aitken extrapolation [memory, §5].
    t1, t2, t3 = (m.heatsink_temperature(x) for x in (1400.0, 1460.0, 1520.0))
    aitken = (t1 * t3 - t2**2) / (t1 + t3 - 2 * t2)
    assert aitken == pytest.approx(d["ambient_temperature"] + p * r_th, abs=1e-6)


def test_heatsink_follows_a_loss_history_exactly(demo_design):
    """A loss switched on at t_a and off at t_b: the first-order closed form, piece by piece.

    [computed] T = T_inf - (T_inf - T_0) exp(-(t - t_k)/tau) from each change (REFERENCES §5)."""
    d = demo_design
    m = StageModel(d, "healthy")
    m.set_bus(d["bus_voltage"])
    m.set_sim_time(50.0)
    m.set_pwm(True, d["duty_max"])
    p = m.losses()["heatsink"]
    amb, r_th, tau = d["ambient_temperature"], d["thermal_resistance"], d["thermal_time_constant"]
    hot = amb + p * r_th
    at_off = hot - (hot - amb) * math.exp(-(300.0 - 50.0) / tau)
    assert m.heatsink_temperature(300.0) == pytest.approx(at_off, abs=1e-9)
    m.set_pwm(False)
    expected = amb + (at_off - amb) * math.exp(-(500.0 - 300.0) / tau)
    assert m.heatsink_temperature(500.0) == pytest.approx(expected, abs=1e-9)


@pytest.mark.parametrize("duty", [0.25, 0.5, 0.95])
def test_conduction_loss_is_i_squared_r_d(demo_design, digitise, rng, duty):
    """Conduction loss I^2 R_DS(on) D [read: REFERENCES §4], with I = V_high / R_load and D read
    off the switch node (50 % pulse width over the period, IEEE Std 181)."""
    d = demo_design
    m = _running(d, duty=duty)
    dt = 100e-6 / 100_000
    sw = digitise(m, "switch", -2e-6, dt, 100_000, 50.0, 15.0, rng)
    e = measure_edges(sw, dt, -2e-6)
    current = e.high_level_v / d["load_resistance"]
    expected = conduction_loss(current, d["mosfet_rds_on"], e.duty_cycle)
    assert m.losses()["conduction"] == pytest.approx(expected, rel=0.03)
    # Worked example [computed, REFERENCES §4]: 10 A, 10 mohm, D 0.5 -> 0.500 W.
    if duty == 0.5:
        ten_amps = _running(d, load_resistance=2.39, mosfet_rds_on=10e-3)
        assert ten_amps.losses()["conduction"] == pytest.approx(0.500, rel=1e-3)


def test_input_power_balances_load_and_losses(demo_design, digitise, rng):
    """V I_in = P_load + P_losses + the board's own draw (energy balance, common practice, no
    source); P_load = mean(V_sw^2)/R_load from the switch-node capture."""
    d = demo_design
    m = _running(d, duty=0.5)
    dt = 80e-6 / 200_000
    sw = digitise(m, "switch", 0.0, dt, 200_000, 50.0, 15.0, rng)
    p_load = float(np.mean(sw**2)) / d["load_resistance"]
    idle = StageModel(d)
    idle.set_bus(d["bus_voltage"])
    p_board = d["bus_voltage"] * idle.bus_current(d["bus_voltage"])
    p_in = d["bus_voltage"] * m.bus_current(d["bus_voltage"])
    heat = m.losses()["switching"] + m.losses()["conduction"]
    assert p_in == pytest.approx(p_load + heat + p_board, rel=0.02)


@pytest.mark.parametrize("name", sorted(SCENARIOS))
def test_input_current_never_falls_as_the_voltage_rises(demo_design, name):
    """The supply's CV/CC solver needs I(V) non-decreasing; with the PWM off it is a small
    quiescent current (well under the 0.1 A first-power limit)."""
    m = StageModel(demo_design, name)
    volts = np.linspace(0.0, 30.0, 61)
    for enabled in (False, True):
        m.set_pwm(enabled, 0.95)
        amps = np.array([m.bus_current(v) for v in volts])
        assert np.all(np.diff(amps) >= -1e-12)
        if not enabled:
            assert amps.max() < 0.05
    short = StageModel(demo_design, name)
    short.params = replace(short.params, input_short_resistance=1.0)
    assert short.bus_current(5.0) > 4.9  # a shorted input draws what the supply allows


def test_waveforms_are_periodic_and_the_tiled_grid_matches_direct_evaluation(demo_design):
    """One period evaluated and tiled equals the formula at every sample; t and t + T agree."""
    m = _running(demo_design, duty=0.3)
    period = 1.0 / demo_design["switching_frequency"]
    dt = period / 4000  # the grid repeats every 4000 samples: tiled
    tiled = m.waveform("switch", -1e-6, dt, 20_000)
    direct = np.concatenate(
        [m.waveform("switch", -1e-6 + k * 3000 * dt, dt, 3000) for k in range(6)]
    )
    assert np.allclose(tiled[:18_000], direct[:18_000], atol=1e-9)
    later = m.waveform("vgs", -1e-6 + 7 * period, dt, 3000)
    assert np.allclose(later, m.waveform("vgs", -1e-6, dt, 3000), atol=1e-9)
    # an irregular interval (no short repeat): evaluated directly, still periodic
    odd = period / 3999.37
    a = m.waveform("gate", 0.0, odd, 5000)
    b = m.waveform("gate", 3 * period, odd, 5000)
    assert np.allclose(a, b, atol=1e-6)
    assert state_levels(a).high_v > demo_design["bus_voltage"] + 10.0  # gate lifted above the bus
