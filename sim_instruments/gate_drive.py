"""Gate-source voltage and bootstrap capacitor voltage over one switching period.

Turn-on (the driver's pull-up, R_on = driver source + external + internal gate resistance,
from the bootstrap capacitor's voltage V_dr):

* A, 0 <= tau < t1: Ciss charges with the RC law, Vgs = V_dr (1 - exp(-tau / (R_on Ciss))), up to
  the Miller plateau V_pl at t1 = R_on Ciss ln(V_dr / (V_dr - V_pl)) (common practice, REFERENCES §2).
* B, t1 <= tau < t2: Vgs holds V_pl while Q_gd is delivered at I_on = (V_dr - V_pl) / R_on, so the
  plateau lasts Q_gd / I_on (TI SLUA618, REFERENCES §4 [memory for equation numbers]); the drain
  voltage moves linearly with the charge delivered (the switch node's ramp).
* C, tau >= t2: the last RC rise through the capacitance above the plateau, C2, towards the
  capacitor's voltage, which by then has given Q_LS + Q_gate and keeps drooping at
  (I_q + I_leak + Vgs / R_pd) / C_boot (charge balance, REFERENCES §3).

Turn-off is the mirror image through R_off (driver sink + external + internal): fall through C2 to
V_pl, the plateau for the charge Q_gd took (Q_gd / I_off with I_off = V_pl / R_off), then Ciss
discharges to 0. An on-time that ends inside phase A or B turns off from where it is.

Vgs on a plateau is the plateau voltage at the operating current, V_pl(I) = V_th + I / g_fs.
All functions are vectorised over an array of phases tau in [0, T) (seconds).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from sim_instruments.stage_params import StageParameters

__all__ = ["GatePlan", "plan_gate", "vgs_wave", "vbs_wave", "gate_charge_delivered"]


@dataclass(frozen=True)
class GatePlan:
    """The instants (s from the turn-on command) and levels (V) of one period's gate drive."""

    v_b0: float  # bootstrap capacitor just before turn-on, V
    v_drive: float  # driver high level after the level shifter's charge, V
    v_plateau: float
    tau_on1: float  # R_on * Ciss, s
    tau_on2: float  # R_on * C2, s
    t1: float  # plateau reached
    t2: float  # plateau ends (may lie after t_on)
    v_top: float  # final-rise asymptote at t2 (all gate charge given), V
    droop_rate: float  # V/s on the capacitor and the flat top
    t_on: float  # on-time actually driven (the command, or until UVLO), s
    v_at_off: float  # Vgs when the turn-off starts
    q_at_off: float  # share of Q_gd delivered when the turn-off starts, 0..1
    tau_off1: float  # R_off * Ciss
    tau_off2: float  # R_off * C2
    t3: float  # turn-off reaches the plateau
    t4: float  # turn-off plateau ends: switch node at its low level
    v_off_from: float  # Vgs at the start of the last fall (<= V_pl)
    q_gate: float  # gate charge given by the capacitor in one turn-on, C
    v_end: float  # capacitor voltage at the end of the on-time, V
    period: float
    capacitance: float
    c2: float
    ciss: float
    qgd: float
    q_ls: float


def _vgs_on_at(
    tau: float,
    v_drive: float,
    v_pl: float,
    tau1: float,
    tau2: float,
    t1: float,
    t2: float,
    v_top: float,
    droop: float,
) -> tuple[float, float]:
    """(Vgs in V, share of Q_gd delivered) at one instant ``tau`` (s) of the turn-on."""
    if tau < t1:
        return v_drive * (1.0 - math.exp(-tau / tau1)), 0.0
    if tau < t2:
        return v_pl, (tau - t1) / (t2 - t1)
    u = tau - t2
    return v_top - droop * u - (v_top - v_pl) * math.exp(-u / tau2), 1.0


def plan_gate(
    p: StageParameters, v_b0: float, t_on_cmd: float, current_a: float, v_uvlo: float
) -> GatePlan:
    """Timing of one period for a capacitor at ``v_b0`` (V) before turn-on, an on-time command
    ``t_on_cmd`` (s) and a load current ``current_a`` (A). The on-time ends early if the capacitor
    falls to the driver's falling UVLO ``v_uvlo`` (V)."""
    c = p.bootstrap_capacitance
    ciss, qgd, c2 = p.mosfet_ciss, p.mosfet_qgd, p.gate_capacitance_above_plateau
    v_pl = p.mosfet_threshold + current_a / p.transconductance
    v_drive = v_b0 - p.level_shift_charge / c
    r_on, r_off = p.gate_on_resistance, p.gate_off_resistance
    tau1, tau2 = r_on * ciss, r_on * c2
    t1 = tau1 * math.log(v_drive / (v_drive - v_pl))
    t2 = t1 + qgd * r_on / (v_drive - v_pl)
    # Asymptote: the capacitor after Q_LS + Ciss V_pl + Q_gd + C2 (v_top - V_pl) and the droop to t2.
    droop = (p.floating_leakage + v_drive / p.gate_source_pulldown) / c
    v_top = v_drive
    for _ in range(3):
        droop = (p.floating_leakage + v_top / p.gate_source_pulldown) / c
        v_top = (v_drive - (ciss * v_pl + qgd - c2 * v_pl) / c - droop * t2) / (1.0 + c2 / c)
    # The driver lets go when the capacitor reaches its falling UVLO (flat-top droop is linear).
    t_on = t_on_cmd
    if droop > 0 and v_top - droop * (t_on - t2) < v_uvlo and v_top > v_uvlo:
        t_on = min(t_on, t2 + (v_top - v_uvlo) / droop)
    v_s, q_s = _vgs_on_at(t_on, v_drive, v_pl, tau1, tau2, t1, t2, v_top, droop)
    tau_off1, tau_off2 = r_off * ciss, r_off * c2
    if v_s > v_pl:
        t3 = t_on + tau_off2 * math.log(v_s / v_pl)
    else:
        t3 = t_on
    t4 = t3 + q_s * qgd * r_off / v_pl
    q_gate = _charge(ciss, qgd, c2, v_pl, v_s, q_s)
    v_end = v_b0 - (p.level_shift_charge + q_gate) / c - droop * t_on
    return GatePlan(
        v_b0=v_b0,
        v_drive=v_drive,
        v_plateau=v_pl,
        tau_on1=tau1,
        tau_on2=tau2,
        t1=t1,
        t2=t2,
        v_top=v_top,
        droop_rate=droop,
        t_on=t_on,
        v_at_off=v_s,
        q_at_off=q_s,
        tau_off1=tau_off1,
        tau_off2=tau_off2,
        t3=t3,
        t4=t4,
        v_off_from=min(v_s, v_pl),
        q_gate=q_gate,
        v_end=v_end,
        period=p.period,
        capacitance=c,
        c2=c2,
        ciss=ciss,
        qgd=qgd,
        q_ls=p.level_shift_charge,
    )


def _charge(ciss: float, qgd: float, c2: float, v_pl: float, vgs: float, q: float) -> float:
    """Gate charge (C) at Vgs with a share q of Q_gd delivered."""
    if q <= 0.0:
        return ciss * vgs
    return ciss * v_pl + qgd * q + c2 * max(vgs - v_pl, 0.0)


def _where(ph: np.ndarray, lo: float, hi: float) -> np.ndarray:
    return np.flatnonzero((ph >= lo) & (ph < hi))


def vgs_wave(plan: GatePlan, ph: np.ndarray) -> np.ndarray:
    """Gate-source voltage (V) at phases ``ph`` (s in [0, T))."""
    out = np.zeros_like(ph)
    t_on = plan.t_on
    # A: RC rise to the plateau.
    i = _where(ph, 0.0, min(plan.t1, t_on))
    out[i] = plan.v_drive * -np.expm1(-ph[i] / plan.tau_on1)
    # B: the Miller plateau.
    out[_where(ph, plan.t1, min(plan.t2, t_on))] = plan.v_plateau
    # C: final rise and the flat top following the drooping capacitor.
    i = _where(ph, plan.t2, t_on)
    u = ph[i] - plan.t2
    out[i] = (
        plan.v_top - plan.droop_rate * u - (plan.v_top - plan.v_plateau) * np.exp(-u / plan.tau_on2)
    )
    # Turn-off: fall through C2 to the plateau, the plateau, then Ciss discharges.
    i = _where(ph, t_on, plan.t3)
    out[i] = plan.v_at_off * np.exp(-(ph[i] - t_on) / plan.tau_off2)
    out[_where(ph, plan.t3, plan.t4)] = plan.v_off_from
    i = _where(ph, plan.t4, plan.period)
    out[i] = plan.v_off_from * np.exp(-(ph[i] - plan.t4) / plan.tau_off1)
    return out


def gate_charge_delivered(plan: GatePlan, ph: np.ndarray) -> np.ndarray:
    """Gate charge the capacitor has given since the turn-on command (C), during the on-time."""
    q = np.full_like(ph, plan.q_gate)
    i = _where(ph, 0.0, min(plan.t1, plan.t_on))
    q[i] = plan.ciss * plan.v_drive * -np.expm1(-ph[i] / plan.tau_on1)
    i = _where(ph, plan.t1, min(plan.t2, plan.t_on))
    q[i] = plan.ciss * plan.v_plateau + plan.qgd * (ph[i] - plan.t1) / (plan.t2 - plan.t1)
    i = _where(ph, plan.t2, plan.t_on)
    rise = (plan.v_top - plan.v_plateau) * -np.expm1(-(ph[i] - plan.t2) / plan.tau_on2)
    q[i] = plan.ciss * plan.v_plateau + plan.qgd + plan.c2 * rise
    return q


def vbs_wave(
    plan: GatePlan, ph: np.ndarray, v_charge: float, t_recharge: float, tau_recharge: float
) -> np.ndarray:
    """Bootstrap capacitor voltage VB - VS (V) at phases ``ph``.

    On: V_b0 - (Q_LS + Q_gate(tau)) / C - droop * tau. From the turn-off until the switch node is
    low (``t_recharge``) it holds; then it recharges towards ``v_charge`` (V_drv - V_diode) with the
    time constant ``tau_recharge`` (s), an RC charge (REFERENCES §3, refresh).
    """
    out = np.full_like(ph, plan.v_end)
    i = _where(ph, 0.0, plan.t_on)
    out[i] = (
        plan.v_b0
        - (plan.q_ls + gate_charge_delivered(plan, ph[i])) / plan.capacitance
        - plan.droop_rate * ph[i]
    )
    i = _where(ph, t_recharge, plan.period)
    out[i] = v_charge - (v_charge - plan.v_end) * np.exp(-(ph[i] - t_recharge) / tau_recharge)
    return out
