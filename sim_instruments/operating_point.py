"""The stage's steady state at one bus voltage and PWM setting: levels, timings, losses, current.

Three ways the stage can run:

* ``switching``: the driver lifts the gate above the bus from the bootstrap capacitor; the
  capacitor's voltage before each turn-on is the periodic steady state of "lose Q_LS + Q_gate +
  droop over the on-time, recharge towards V_drv - V_diode with tau = (R_path + R_load) C_boot
  during the off-time" (REFERENCES §3, charge balance and refresh), solved by iteration.
* ``follower``: the gate is driven only up to the bus (no bootstrap lift): a source follower whose
  output settles where V_gs(I) = V_th + I / g_fs with I = V_out / R_load (REFERENCES §4 plateau
  relation), i.e. V_out = k (V_gate - V_th) with k = R g_fs / (1 + R g_fs).
* ``idle``: PWM off, unpowered, or the driver held off by its undervoltage lockout.

Losses (REFERENCES §4): switching 1/2 V I (t_r + t_f) f with t_r, t_f the drain-voltage
transitions Q_gd / I_gate; conduction I^2 R_DS(on) D; gate drive Q_g V_drv f; for the source
follower the linear loss (V_bus - V_out) I D.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from sim_instruments.gate_drive import GatePlan, plan_gate
from sim_instruments.rails import bus_ripple_knots, gate_drive_rail, logic_rail
from sim_instruments.stage_params import StageParameters
from sim_instruments.switch_node import Resonance, SwitchPlan

__all__ = ["OperatingPoint", "FollowerPlan", "solve_operating_point", "MIN_OFF_TIME_S"]

#: The driver's shortest off pulse, s: a bootstrap cannot hold 100 % duty (REFERENCES §3).
MIN_OFF_TIME_S = 200e-9
_LN9 = math.log(9.0)


@dataclass(frozen=True)
class FollowerPlan:
    """A source follower's period: gate RC up to the bus and down, the output following it."""

    v_gate_high: float
    tau_on: float
    tau_off: float
    t_on: float
    v_gate_at_off: float
    gain: float  # k = R g_fs / (1 + R g_fs)
    v_threshold: float
    period: float


@dataclass(frozen=True)
class OperatingPoint:
    """Everything the waveforms, losses and supply current need at one setting."""

    mode: str  # "switching", "follower" or "idle"
    v_bus: float
    duty: float
    vdrv: float
    logic: float
    vbs_idle: float  # bootstrap capacitor voltage with the PWM stopped, V
    current_a: float  # load current while on, A
    gate: GatePlan | None = None
    switch: SwitchPlan | None = None
    follower: FollowerPlan | None = None
    v_charge: float = 0.0  # V_drv - V_diode
    t_recharge: float = 0.0
    tau_recharge: float = 1.0
    recharge_charge: float = 0.0  # charge the capacitor takes back per period, C
    bus_knots: tuple[np.ndarray, np.ndarray] = field(default=(np.zeros(2), np.zeros(2)))
    losses: dict[str, float] = field(default_factory=dict)
    bus_current_a: float = 0.0


def _idle_losses() -> dict[str, float]:
    return {
        "switching": 0.0,
        "conduction": 0.0,
        "gate_drive": 0.0,
        "linear": 0.0,
        "heatsink": 0.0,
        "total": 0.0,
    }


def _board_current(p: StageParameters, v_bus: float, vdrv: float, vdrv_load: float) -> float:
    """Input current of the board itself (A): bleeder, regulators, the gate-drive rail's load."""
    if v_bus <= 0.0:
        return 0.0
    i = v_bus / p.bleeder_resistance + p.regulator_quiescent_current * min(v_bus / 5.0, 1.0)
    if math.isfinite(p.input_short_resistance):
        i += v_bus / p.input_short_resistance
    if p.vdrv_feed_resistance > 0.0:
        # A shunt regulator's input current is set by its feed resistor, whatever the load.
        i += max((v_bus - vdrv) / p.vdrv_feed_resistance, vdrv_load)
    else:
        i += vdrv_load
    return i


def _idle(p: StageParameters, v_bus: float, duty: float) -> OperatingPoint:
    # Below its regulation the rail's load (driver and logic regulator) draws less in proportion.
    unloaded = gate_drive_rail(p, v_bus, 0.0)
    load = p.vdrv_idle_current * min(unloaded / p.gate_drive_voltage, 1.0)
    vdrv = gate_drive_rail(p, v_bus, load)
    vbs = v_bus if p.gate_drive_to_bus else max(vdrv - p.bootstrap_diode_drop, 0.0)
    return OperatingPoint(
        mode="idle",
        v_bus=v_bus,
        duty=duty,
        vdrv=vdrv,
        logic=logic_rail(p, vdrv),
        vbs_idle=max(vbs, 0.0),
        current_a=0.0,
        losses=_idle_losses(),
        bus_current_a=_board_current(p, v_bus, vdrv, load),
    )


def _switch_plan(p: StageParameters, g: GatePlan, v_bus: float, current_a: float) -> SwitchPlan:
    v_high = v_bus - current_a * p.mosfet_rds_on
    v_reached = v_high * g.q_at_off
    t_rise1 = g.t1 + g.q_at_off * (g.t2 - g.t1)
    v_f = p.freewheel_diode_drop
    tau_l = p.load_inductance / p.load_resistance
    i0 = v_reached / p.load_resistance
    t_fw = tau_l * math.log((i0 + v_f / p.load_resistance) / (v_f / p.load_resistance))
    edge = Resonance.of(p.stray_inductance, p.switch_node_capacitance, p.switch_node_damping)
    release = Resonance.of(
        p.load_inductance,
        p.switch_node_capacitance,
        0.5 * p.load_resistance * math.sqrt(p.switch_node_capacitance / p.load_inductance),
    )
    return SwitchPlan(
        t_rise0=g.t1,
        t_rise1=t_rise1,
        t_fall0=g.t3,
        t_fall1=g.t4,
        t_release=min(g.t4 + t_fw, p.period),
        v_high=v_high,
        v_reached=v_reached,
        v_diode=v_f,
        edge=edge,
        release=release,
        period=p.period,
    )


def _steady_bootstrap(
    p: StageParameters, v_charge: float, t_on: float, current: float, tau_rc: float
) -> float | None:
    """The capacitor's voltage before turn-on in the periodic steady state (V), or None when
    it would sit below the driver's UVLO.

    One period maps V_b0 to V_charge - (V_charge - V_end(V_b0)) exp(-t_off / tau); that map
    rises with slope below 1, so its fixed point is unique and a bracketing search finds it."""
    uvlo = p.driver_uvlo_falling
    # The driver must also be able to carry the gate past its plateau.
    v_pl = p.mosfet_threshold + current / p.transconductance
    floor = max(uvlo, v_pl + p.level_shift_charge / p.bootstrap_capacitance + 0.05)
    if v_charge <= floor:
        return None

    def gap(v_b0: float) -> float:
        plan = plan_gate(p, v_b0, t_on, current, uvlo)
        left = max(p.period - plan.t4, 0.0)
        return v_charge - (v_charge - plan.v_end) * math.exp(-left / tau_rc) - v_b0

    # gap falls with v_b0 (the map's slope is below 1): a bracketed root, found by false
    # position with the Illinois modification (a handful of evaluations, never leaves the bracket).
    lo, hi = floor + 1e-6, v_charge
    g_lo, g_hi = gap(lo), gap(hi)
    if g_lo < 0.0:
        return None
    if g_hi >= 0.0:
        return hi
    side = 0
    for _ in range(60):
        mid = (lo * g_hi - hi * g_lo) / (g_hi - g_lo)
        g_mid = gap(mid)
        if abs(g_mid) < 1e-10 or hi - lo < 1e-10:
            return mid
        if g_mid > 0.0:
            lo, g_lo = mid, g_mid
            if side == 1:
                g_hi *= 0.5
            side = 1
        else:
            hi, g_hi = mid, g_mid
            if side == -1:
                g_lo *= 0.5
            side = -1
    return 0.5 * (lo + hi)


def _switching(p: StageParameters, v_bus: float, duty: float, t_on: float) -> OperatingPoint | None:
    """The bootstrapped stage's steady state; None if the driver is held off by UVLO."""
    period = p.period
    c = p.bootstrap_capacitance
    current = v_bus / (p.load_resistance + p.mosfet_rds_on)
    tau_rc = (p.bootstrap_path_resistance + p.load_resistance) * c
    # The gate-drive rail's load depends on the recharge charge: a few passes settle it.
    recharge_q = 0.0
    plan: GatePlan | None = None
    for _ in range(3):
        load = p.vdrv_idle_current + (p.driver_charge_per_cycle + recharge_q) / period
        vdrv = gate_drive_rail(p, v_bus, load)
        v_charge = vdrv - p.bootstrap_diode_drop
        if v_charge <= p.driver_uvlo_falling:
            return None
        v_b0 = _steady_bootstrap(p, v_charge, t_on, current, tau_rc)
        if v_b0 is None:
            return None
        plan = plan_gate(p, v_b0, t_on, current, p.driver_uvlo_falling)
        recharge_q = c * (v_b0 - plan.v_end)
    assert plan is not None
    sw = _switch_plan(p, plan, v_bus, current)
    f = p.switching_frequency
    t_r = plan.t2 - plan.t1
    t_f = plan.t4 - plan.t3
    p_sw = 0.5 * v_bus * current * (t_r + t_f) * f * plan.q_at_off
    p_cond = current**2 * p.mosfet_rds_on * plan.t_on * f
    p_gate = (plan.q_gate + p.level_shift_charge) * vdrv * f
    heat = p_sw + p_cond
    losses = {
        "switching": p_sw,
        "conduction": p_cond,
        "gate_drive": p_gate,
        "linear": 0.0,
        "heatsink": heat,
        "total": heat + p_gate,
    }
    on_from = 0.5 * (sw.t_rise0 + sw.t_rise1)
    on_to = 0.5 * (sw.t_fall0 + sw.t_fall1)
    i_load = current * plan.q_at_off
    load = p.vdrv_idle_current + (p.driver_charge_per_cycle + recharge_q) / period
    i_in = _board_current(p, v_bus, vdrv, load) + i_load * (on_to - on_from) / period
    i_in += p_sw / v_bus
    return OperatingPoint(
        mode="switching",
        v_bus=v_bus,
        duty=duty,
        vdrv=vdrv,
        logic=logic_rail(p, vdrv),
        vbs_idle=v_charge,
        current_a=current,
        gate=plan,
        switch=sw,
        v_charge=v_charge,
        t_recharge=plan.t4,
        tau_recharge=tau_rc,
        recharge_charge=recharge_q,
        bus_knots=bus_ripple_knots(p, i_load, on_from, on_to),
        losses=losses,
        bus_current_a=i_in,
    )


def _follower(p: StageParameters, v_bus: float, duty: float, t_on: float) -> OperatingPoint | None:
    """The gate driven to the bus only: a source follower."""
    vdrv = gate_drive_rail(p, v_bus, p.vdrv_idle_current + p.driver_charge_per_cycle / p.period)
    if vdrv <= p.driver_uvlo_falling:
        return None
    rg = p.load_resistance * p.transconductance
    gain = rg / (1.0 + rg)
    v_out = gain * max(v_bus - p.mosfet_threshold, 0.0)
    current = v_out / p.load_resistance
    tau_on = p.gate_on_resistance * p.mosfet_ciss
    tau_off = p.gate_off_resistance * p.mosfet_ciss
    v_gate_at_off = v_bus * -math.expm1(-t_on / tau_on)
    fp = FollowerPlan(
        v_bus, tau_on, tau_off, t_on, v_gate_at_off, gain, p.mosfet_threshold, p.period
    )
    f = p.switching_frequency
    # Output edges follow the gate's RC: 10-90 = tau ln 9 each way (REFERENCES §2).
    p_sw = 0.5 * v_out * current * _LN9 * (tau_on + tau_off) * f
    p_lin = (v_bus - v_out) * current * t_on * f
    p_gate = p.mosfet_ciss * v_bus * vdrv * f
    losses = {
        "switching": p_sw,
        "conduction": 0.0,
        "gate_drive": p_gate,
        "linear": p_lin,
        "heatsink": p_sw + p_lin,
        "total": p_sw + p_lin + p_gate,
    }
    load = p.vdrv_idle_current + p.driver_charge_per_cycle / p.period
    i_in = _board_current(p, v_bus, vdrv, load) + current * t_on * f + p_sw / v_bus
    return OperatingPoint(
        mode="follower",
        v_bus=v_bus,
        duty=duty,
        vdrv=vdrv,
        logic=logic_rail(p, vdrv),
        vbs_idle=v_bus,
        current_a=current,
        follower=fp,
        bus_knots=bus_ripple_knots(p, current, 0.5 * _LN9 * tau_on, t_on),
        losses=losses,
        bus_current_a=i_in,
    )


def solve_operating_point(
    p: StageParameters, v_bus: float, pwm_enabled: bool, duty: float
) -> OperatingPoint:
    """The steady state at bus ``v_bus`` (V), PWM ``pwm_enabled`` with ``duty`` (fraction)."""
    v_bus = max(float(v_bus), 0.0)
    t_on = min(duty * p.period, p.period - MIN_OFF_TIME_S)
    if v_bus <= 0.0 or not pwm_enabled or t_on <= 0.0:
        return _idle(p, v_bus, duty)
    op = (
        _follower(p, v_bus, duty, t_on) if p.gate_drive_to_bus else _switching(p, v_bus, duty, t_on)
    )
    return op if op is not None else _idle(p, v_bus, duty)
