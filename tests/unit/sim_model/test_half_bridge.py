"""The simulated half-bridge against the formulas it is built from, measured as a scope would
see it (``conftest.capture``: 350 MHz, noise, 8 bits) with the measurement core where one
exists; the model's noiseless waveforms only where the check is on the physics itself (a loss
or an energy integral).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from bringup.analysis.dead_time import measure_dead_time
from bringup.analysis.switch_node_stress import measure_switch_node
from bringup.boards.board_file import load_board
from sim_instruments.half_bridge import HALF_BRIDGE_NETS, HalfBridgeModel, build_model
from sim_instruments.model import StageModel
from tests.unit.sim_model.conftest import capture

DESIGN = load_board("demo-half-bridge").design


def _model(scenario: str = "healthy", duty: float = 0.5, **changes) -> HalfBridgeModel:
    m = HalfBridgeModel(dict(DESIGN, **changes), scenario)
    m.set_bus(DESIGN["bus_voltage"])
    m.set_pwm(True, duty)
    return m


def _rc_crossing(tau: float, v_from: float, v_to: float, level: float) -> float:
    """Time (s) for an RC step from ``v_from`` towards ``v_to`` to reach ``level`` [computed:
    v(t) = v_to + (v_from - v_to) exp(-t/tau), REFERENCES §2 first order]."""
    return tau * math.log((v_from - v_to) / (level - v_to))


def test_the_board_picks_the_model():
    assert isinstance(build_model(DESIGN), HalfBridgeModel)
    assert isinstance(build_model(load_board("demo").design), StageModel)
    with pytest.raises(ValueError, match="unknown half-bridge scenario 'slow-gate'"):
        HalfBridgeModel(DESIGN, "slow-gate")


def test_dead_times_follow_the_gate_rc_and_the_plateau():
    """Threshold-to-threshold dead time = the command dead time + the rising gate's RC time to
    V_th - the falling gate's time to V_th (for the high side: its fall to the plateau, the
    plateau Q_gd R_off / V_pl, then the fall to V_th: TI SLUA618 [memory], REFERENCES §4)."""
    d = DESIGN
    r_on = d["driver_source_resistance"] + d["gate_resistor"] + d["gate_resistance_internal"]
    r_off = d["driver_sink_resistance"] + d["gate_resistor"] + d["gate_resistance_internal"]
    tau_on, tau_off = r_on * d["mosfet_ciss"], r_off * d["mosfet_ciss"]
    vth, vpl = d["mosfet_threshold"], d["mosfet_plateau"]
    m = _model()
    vdrv, v_top = m.operating_point.vdrv, float(m.operating_point.frame.v_top[0])
    ls_on = _rc_crossing(tau_on, 0.0, vdrv, vth)
    hs_off = _rc_crossing(tau_off, v_top, 0.0, vpl) + d["mosfet_qgd"] * r_off / vpl
    hs_off += _rc_crossing(tau_off, vpl, 0.0, vth)
    expect_hl = d["dead_time"] + ls_on - hs_off
    vd = float(m.operating_point.frame.vd[0])
    expect_lh = d["dead_time"] + _rc_crossing(tau_on, 0.0, vd, vth)
    expect_lh -= _rc_crossing(tau_off, vdrv, 0.0, vth)
    rng = np.random.default_rng(3)
    dt = 1e-9
    hi = capture(m, "vgs", -2e-6, dt, 60_000, 30.0, 10.0, rng)
    lo = capture(m, "vgs_low", -2e-6, dt, 60_000, 30.0, 10.0, rng)
    r = measure_dead_time(hi, lo, dt, -2e-6, threshold_v=vth)
    # within 3 ns: the scope's 350 MHz pole delays both crossings alike, 8 bits and noise
    assert r.high_to_low.median_s == pytest.approx(expect_hl, abs=3e-9)
    assert r.low_to_high.median_s == pytest.approx(expect_lh, abs=3e-9)
    assert 30e-9 < expect_hl < 70e-9 and not r.overlaps


def test_a_short_dead_time_overlaps_the_gates_and_spikes_the_current():
    m = _model("shoot-through")
    rng = np.random.default_rng(4)
    dt = 1e-9
    hi = capture(m, "vgs", -2e-6, dt, 40_000, 30.0, 10.0, rng)
    lo = capture(m, "vgs_low", -2e-6, dt, 40_000, 30.0, 10.0, rng)
    amps = capture(m, "i_switch", -2e-6, dt, 40_000, 40.0, 8.0, rng)
    r = measure_dead_time(hi, lo, dt, -2e-6, threshold_v=DESIGN["mosfet_threshold"], current=amps)
    assert r.shoot_through and r.high_to_low.min_s < -10e-9
    # the spike is the weaker channel's g_fs (V_gs - V_th) [REFERENCES §4 plateau relation]:
    # several amperes above the 8 A load current
    assert r.worst_spike_a > 4.0
    healthy = _model()
    assert healthy.losses()["shoot_through"] == 0.0 < m.losses()["shoot_through"]


def test_body_diode_loss_is_vf_i_times_both_dead_times():
    """P_diode = V_F I_load (t_dead,1 + t_dead,2) f_sw [read: REFERENCES §12], the dead times
    measured on the gates as a scope sees them (``measure_dead_time``, threshold to
    threshold): the body diode carries the load current from one switch's channel letting go
    to the other's taking over. Within 10 %: the inductor's ripple (the current differs at the
    two edges) and the high side's current rise, during which the diode still carries part."""
    rng = np.random.default_rng(6)
    dt = 1e-9
    losses = {}
    for scenario in ("healthy", "long-dead-time"):
        m = _model(scenario)
        hi = capture(m, "vgs", -2e-6, dt, 60_000, 30.0, 10.0, rng)
        lo = capture(m, "vgs_low", -2e-6, dt, 60_000, 30.0, 10.0, rng)
        r = measure_dead_time(hi, lo, dt, -2e-6, threshold_v=DESIGN["mosfet_threshold"])
        dead = r.high_to_low.median_s + r.low_to_high.median_s
        expect = DESIGN["body_diode_drop"] * DESIGN["load_current"] * dead
        expect *= DESIGN["switching_frequency"]
        losses[scenario] = m.losses()["body_diode"]
        assert losses[scenario] == pytest.approx(expect, rel=0.1), scenario
    assert losses["long-dead-time"] > 5 * losses["healthy"]


def test_bootstrap_refresh_settles_where_the_rc_recharge_meets_the_charge_taken():
    """Periodic steady state of 'lose dV per period, recover (V_ch - V) (1 - exp(-t_ls/tau))':
    V_b0 = V_ch - dV e / (1 - e), e = exp(-t_ls / tau), tau = (R_boot + R_diode + R_DS(on)) C
    [computed from REFERENCES §3 refresh]."""
    m = _model(duty=0.5)
    f = m.operating_point.frame
    e = math.exp(-(min(f.ls_off_th, f.period) - f.ls_on_th) / f.tau_boot)
    v0 = float(f.v0[0])
    n = 100_000
    vbs = m.waveform("vbs", 0.0, f.period / n, n)
    drop = v0 - vbs[int(0.95 * f.t_on / f.period * n)]  # what the on-time took
    drop += f.leak_a * (f.ls_on_th - f.t_on) / f.c_boot
    expect = f.v_charge - drop * e / (1 - e)
    assert v0 == pytest.approx(expect, abs=0.01)


def test_a_slow_refresh_runs_the_high_side_into_uvlo_at_maximum_duty_only():
    uvlo = DESIGN["driver_uvlo_falling"]
    at_max = _model("no-refresh", duty=DESIGN["duty_max"]).operating_point.frame
    assert not at_max.on.all()  # pulses skipped: the driver held the high side off
    n = 400_000
    m = _model("no-refresh", duty=DESIGN["duty_max"])
    vbs = m.waveform("vbs", 0.0, at_max.length / n, n)
    assert vbs.min() < uvlo + 0.05
    half = _model("no-refresh", duty=0.5).operating_point.frame
    assert half.on.all() and float(half.v0.min()) > uvlo + 2.0
    assert _model(duty=DESIGN["duty_max"]).operating_point.frame.on.all()


@pytest.mark.parametrize(
    ("scenario", "inductance"), [("healthy", 2e-9), ("switch-node-spike", 10e-9)]
)
def test_the_ring_gives_back_the_loop_inductance(scenario, inductance):
    """f_n = 1/(2 pi sqrt(L C)) [computed, REFERENCES §12]: the measurement core's fitted ring
    returns the loop inductance the model was built with."""
    m = _model(scenario)
    rng = np.random.default_rng(5)
    v = capture(m, "switch", -1e-6, 0.2e-9, 100_000, 100.0, 22.0, rng)
    r = measure_switch_node(v, 0.2e-9, -1e-6, bus_v=48.0, negative_rating_v=-8.0,
                            capacitance_f=DESIGN["switch_node_capacitance"])  # fmt: skip
    fitted = [e.loop_inductance_h for e in (r.rising, r.falling) if e.loop_inductance_h]
    assert fitted and fitted[0] == pytest.approx(inductance, rel=0.05)
    if scenario == "healthy":
        assert r.negative_margin_v > 2.0
    else:
        assert r.min_v < -10.0


def test_turn_on_energy_is_half_v_i_over_the_current_and_voltage_transitions():
    """E_on = integral of v_DS i_D over the turn-on ~ 1/2 V I (t_ri + t_vf) for a clamped
    inductive load [read: ST A5972D eq. 23 form, REFERENCES §4], with t_ri the gate's rise
    from V_th to V_pl and t_vf the plateau Q_gd R_on / (V_drv - V_pl) (TI SLUA618 [memory])."""
    m = _model()
    f = m.operating_point.frame
    n = 400_000
    dt = 400e-9 / n
    t0 = -50e-9
    sw = m.waveform("switch", t0, dt, n)
    amps = m.waveform("i_switch", t0, dt, n)
    energy = float(np.sum((DESIGN["bus_voltage"] - sw) * amps) * dt)
    t_th = f.tau_on * math.log(f.vd[0] / (f.vd[0] - f.v_th))
    t_ri, t_vf = float(f.t1[0]) - t_th, float(f.t2[0] - f.t1[0])
    expect = 0.5 * DESIGN["bus_voltage"] * DESIGN["load_current"] * (t_ri + t_vf)
    # within 25 %: the inductor's ripple, the ringing and the conduction after the edge
    assert energy == pytest.approx(expect, rel=0.25)


def test_every_net_is_finite_and_a_current_is_in_amperes():
    m = _model(duty=DESIGN["duty_max"])
    for net in HALF_BRIDGE_NETS:
        y = m.waveform(net, -1e-6, 1e-9, 20_000)
        assert np.isfinite(y).all(), net
    amps = m.waveform("i_switch", 0.0, 1e-9, 10_000)
    assert 7.0 < amps.max() < 12.0  # the 8 A load and its ripple
