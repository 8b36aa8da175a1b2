"""Design equations of a bootstrap high-side drive: bootstrap capacitor, gate timing, losses, heat.

Plain SI floats in and out (farads, coulombs, amperes, seconds, volts, ohms, watts, °C).
Each function names its published source. A value that makes no physical sense (a negative
charge, a zero capacitor) raises ``InputError`` naming the parameter; callers that take the
value from an option or a board key should check first and name that instead.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

from bringup.errors import InputError

__all__ = [
    "BootstrapSizing",
    "GateTiming",
    "LossBudget",
    "bootstrap_c_min",
    "bootstrap_charge",
    "bootstrap_charging_drop",
    "bootstrap_droop",
    "bootstrap_dv_max",
    "bootstrap_on_time_max",
    "bootstrap_precharge_time",
    "bootstrap_recharge_time",
    "body_diode_loss",
    "conduction_loss",
    "estimate_losses",
    "gate_drive_current",
    "gate_delay_off",
    "gate_delay_on",
    "gate_drive_loss",
    "gate_timing",
    "junction_temperature",
    "lc_excursion",
    "on_time_at_duty",
    "rc_rise_time",
    "shortest_refresh_time",
    "size_bootstrap",
    "switching_loss",
]


def _check(name: str, value: float, *, positive: bool = False, allow_zero: bool = True) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number, got {value!r}") from None
    if not math.isfinite(x):
        raise InputError(f"{name} must be finite, got {value!r}")
    if positive and not x > 0:
        raise InputError(f"{name} must be > 0, got {x:g}")
    if not allow_zero and x == 0:
        raise InputError(f"{name} must not be 0")
    if not positive and x < 0:
        raise InputError(f"{name} must be >= 0, got {x:g}")
    return x


# --- Bootstrap capacitor -------------------------------------------------------------------


def bootstrap_charge(
    qg_c: float, t_on_max_s: float, iq_a: float = 0.0, ileak_a: float = 0.0, qls_c: float = 0.0
) -> float:
    """Charge (C) the bootstrap capacitor must deliver over the longest on-time.

    Q_total = Q_G + Q_LS + (I_QBS + I_leak) * t_on,max: the gate charge, the level shifter's
    charge per cycle, and the floating side's quiescent current plus the bootstrap diode's
    reverse leakage and the capacitor's leakage drawn for the whole on-time. This is the charge
    balance of International Rectifier AN-978 ("HV Floating MOS-Gate Driver ICs", bootstrap
    capacitor section; design tip DT98-2) and TI SLUA887 ("Bootstrap Circuitry Selection for
    Half-Bridge Configurations": Q_TOTAL = Q_G + I_BST * t), taken over t_on,max because a
    high-side switch that may stay on must hold its gate for the longest on-time, not one
    period. AN-978 adds a 2x safety factor and counts Q_G twice for its charge-pump form; TI
    uses one period 1/f_sw for continuous switching (pass t_on_max_s = 1/f_sw for that form).
    """
    q = _check("qg_c", qg_c) + _check("qls_c", qls_c)
    i = _check("iq_a", iq_a) + _check("ileak_a", ileak_a)
    return q + i * _check("t_on_max_s", t_on_max_s)


def bootstrap_c_min(q_total_c: float, dv_v: float, margin: float = 1.0) -> float:
    """Smallest bootstrap capacitor (F) for an allowed droop: C_min = K * Q_total / dV.

    TI SLUA887 (C_BOOT >= Q_TOTAL / dV_BOOT); ``margin`` K is the safety factor (1 by
    default; AN-978 uses 2).
    """
    return (
        _check("margin", margin, positive=True)
        * _check("q_total_c", q_total_c)
        / _check("dv_v", dv_v, positive=True)
    )


def bootstrap_droop(q_total_c: float, c_f: float) -> float:
    """Droop (V) of a chosen bootstrap capacitor: dV = Q_total / C (same charge balance)."""
    return _check("q_total_c", q_total_c) / _check("c_f", c_f, positive=True)


def bootstrap_dv_max(v_supply_v: float, v_diode_v: float, v_uvlo_v: float) -> float:
    """Largest droop (V) the bootstrap capacitor may take: dV_max = V_DD - V_F - V_BST,UVLO.

    TI SLUA887 ("Bootstrap Circuitry Selection for Half-Bridge Configurations"), as applied
    in TI datasheets' bootstrap sections (e.g. MCF8329A-Q1, SLLSFV1: GVDD 12 V, diode 0.85 V,
    BST UVLO 4.45 V -> 6.7 V): the capacitor charges to the supply ``v_supply_v`` less the
    bootstrap diode's forward drop ``v_diode_v`` and must stay above the driver's bootstrap
    undervoltage lockout ``v_uvlo_v``. The practical droop is far smaller (0.5-1 V); this is
    the bound. Raises ``InputError`` when the charged capacitor would not clear the UVLO.
    """
    dv = (
        _check("v_supply_v", v_supply_v, positive=True)
        - _check("v_diode_v", v_diode_v)
        - _check("v_uvlo_v", v_uvlo_v)
    )
    if not dv > 0:
        raise InputError(
            f"the bootstrap capacitor charges to {v_supply_v:g} V - {v_diode_v:g} V, which does "
            f"not clear the {v_uvlo_v:g} V undervoltage lockout: no droop is allowed"
        )
    return dv


@dataclass(frozen=True)
class BootstrapSizing:
    """Result of ``size_bootstrap``: total charge, minimum C and (with a chosen C) its droop.

    ``terms_c`` splits the charge: gate, level shift, quiescent, leakage (C each).
    """

    charge_c: float
    c_min_f: float
    droop_v: float | None
    t_on_max_s: float
    dv_v: float
    margin: float
    c_f: float | None
    terms_c: dict[str, float]

    def to_dict(self) -> dict:
        return asdict(self)


def size_bootstrap(
    qg_c: float,
    iq_a: float,
    ileak_a: float,
    t_on_max_s: float,
    dv_v: float,
    qls_c: float = 0.0,
    c_f: float | None = None,
    margin: float = 1.0,
) -> BootstrapSizing:
    """Bootstrap capacitor sizing over the longest on-time (see ``bootstrap_charge``)."""
    t = _check("t_on_max_s", t_on_max_s)
    terms = {
        "gate": _check("qg_c", qg_c),
        "level_shift": _check("qls_c", qls_c),
        "quiescent": _check("iq_a", iq_a) * t,
        "leakage": _check("ileak_a", ileak_a) * t,
    }
    q = bootstrap_charge(qg_c, t, iq_a, ileak_a, qls_c)
    return BootstrapSizing(
        charge_c=q,
        c_min_f=bootstrap_c_min(q, dv_v, margin),
        droop_v=None if c_f is None else bootstrap_droop(q, c_f),
        t_on_max_s=t,
        dv_v=float(dv_v),
        margin=float(margin),
        c_f=None if c_f is None else float(c_f),
        terms_c=terms,
    )


def on_time_at_duty(duty: float, fsw_hz: float) -> float:
    """Longest on-time (s) of a PWM at its largest duty cycle: t_on = D / f_sw."""
    d = _check("duty", duty)
    if d > 1:
        raise InputError(f"duty must be a fraction between 0 and 1, got {d:g}")
    return d / _check("fsw_hz", fsw_hz, positive=True)


def bootstrap_on_time_max(
    c_f: float,
    v_start_v: float,
    v_floor_v: float,
    i_total_a: float,
    qg_c: float = 0.0,
    qls_c: float = 0.0,
) -> float:
    """Longest on-time (s) before the bootstrap voltage falls from ``v_start_v`` to the floor.

    t_on,max = ((V_BS0 - V_floor) * C - Q_G - Q_LS) / I_total, the charge balance of
    ``bootstrap_charge`` solved for the time (gate-driver datasheets' bootstrap sizing
    sections, with V_floor the V_BS undervoltage lockout). Returns 0 when the gate charge alone
    already takes the capacitor below the floor, and ``math.inf`` when no current drains it.
    """
    c = _check("c_f", c_f, positive=True)
    headroom = float(v_start_v) - float(v_floor_v)
    if not (math.isfinite(headroom)):
        raise InputError("v_start_v and v_floor_v must be finite")
    q_left = headroom * c - _check("qg_c", qg_c) - _check("qls_c", qls_c)
    if q_left <= 0:
        return 0.0
    i = _check("i_total_a", i_total_a)
    return math.inf if i == 0 else q_left / i


def bootstrap_recharge_time(
    c_f: float, r_total_ohm: float, deficit_v: float, residual_v: float
) -> float:
    """Time (s) to recharge the bootstrap capacitor from a deficit to a residual deficit.

    First-order charge through R_total = R_BOOT + R_diode + R_DS(on),low-side:
    tau = R_total * C, t = tau * ln(deficit / residual) (the RC refresh every bootstrap
    app note assumes; e.g. 1 V to 10 mV with 10 ohm and 1 uF: 46.05 us). Compare it with the
    minimum off-time 1 - D_max over f_sw. Returns 0 when the deficit is within the residual.
    """
    tau = _check("r_total_ohm", r_total_ohm, positive=True) * _check("c_f", c_f, positive=True)
    d = _check("deficit_v", deficit_v)
    r = _check("residual_v", residual_v, positive=True)
    return 0.0 if d <= r else tau * math.log(d / r)


def bootstrap_charging_drop(q_gate_c: float, t_charge_s: float, r_ohm: float) -> float:
    """Voltage (V) lost across the bootstrap charging path: V = (Q_gate / T_charge) * R.

    ST L6388E datasheet, "Bootstrap driver": the average charging current Q/T through the
    path's resistance (its worked example: 30 nC in 5 us through 125 ohm, about 0.8 V).
    """
    i = _check("q_gate_c", q_gate_c) / _check("t_charge_s", t_charge_s, positive=True)
    return i * _check("r_ohm", r_ohm)


def bootstrap_precharge_time(c_f: float, dv_v: float, i_a: float) -> float:
    """Time (s) to charge C by dV from a current source: t = C * dV / I (e.g. a driver's
    pre-charge current; 12 V at 10 mA takes 1.2 ms per uF)."""
    return _check("c_f", c_f) * _check("dv_v", dv_v) / _check("i_a", i_a, positive=True)


# --- Gate timing ---------------------------------------------------------------------------


@dataclass(frozen=True)
class GateTiming:
    """Gate currents on the Miller plateau (A) and the switching intervals they set (s).

    ``t_vds_on_s``/``t_vds_off_s``: drain-source voltage transition at turn-on/off (Q_gd/I).
    ``t_current_on_s``/``t_current_off_s``: drain-current transition (Q_gs2/I), None when
    Q_gs2 was not given.
    """

    i_on_a: float
    i_off_a: float
    t_vds_on_s: float
    t_vds_off_s: float
    t_current_on_s: float | None
    t_current_off_s: float | None
    r_on_ohm: float
    r_off_ohm: float

    def to_dict(self) -> dict:
        return asdict(self)


def gate_timing(
    v_drv_v: float,
    v_plateau_v: float,
    r_source_ohm: float,
    r_sink_ohm: float,
    r_gate_ohm: float,
    r_gate_int_ohm: float,
    q_gd_c: float,
    q_gs2_c: float | None = None,
) -> GateTiming:
    """Switching intervals from the gate charge and the drive strength.

    TI SLUA618 (L. Balogh, "Fundamentals of MOSFET and IGBT Gate Driver Circuits", the
    turn-on/turn-off analysis): on the Miller plateau the gate current is
    I_on = (V_DRV - V_pl) / (R_source + R_G + R_G,int) and I_off = V_pl / (R_sink + R_G +
    R_G,int); the drain-source voltage swings while Q_gd flows, t = Q_gd / I, and the drain
    current rises (falls) while Q_gs2 (threshold to plateau) flows, t = Q_gs2 / I.
    """
    v_drv = _check("v_drv_v", v_drv_v, positive=True)
    v_pl = _check("v_plateau_v", v_plateau_v, positive=True)
    if v_pl >= v_drv:
        raise InputError(
            f"v_plateau_v ({v_pl:g} V) must be below the drive voltage ({v_drv:g} V): "
            "the gate would never leave the plateau"
        )
    r_g = _check("r_gate_ohm", r_gate_ohm) + _check("r_gate_int_ohm", r_gate_int_ohm)
    r_on = _check("r_source_ohm", r_source_ohm) + r_g
    r_off = _check("r_sink_ohm", r_sink_ohm) + r_g
    if r_on <= 0 or r_off <= 0:
        raise InputError("the gate loop resistance must be > 0")
    i_on = (v_drv - v_pl) / r_on
    i_off = v_pl / r_off
    q_gd = _check("q_gd_c", q_gd_c)
    q_gs2 = None if q_gs2_c is None else _check("q_gs2_c", q_gs2_c)
    return GateTiming(
        i_on_a=i_on,
        i_off_a=i_off,
        t_vds_on_s=q_gd / i_on,
        t_vds_off_s=q_gd / i_off,
        t_current_on_s=None if q_gs2 is None else q_gs2 / i_on,
        t_current_off_s=None if q_gs2 is None else q_gs2 / i_off,
        r_on_ohm=r_on,
        r_off_ohm=r_off,
    )


def rc_rise_time(r_ohm: float, c_f: float, low_pct: float = 10.0, high_pct: float = 90.0) -> float:
    """Rise time (s) of a first-order RC charge between two reference levels.

    v(t) = V (1 - exp(-t/RC)) reaches x % at t = -RC ln(1 - x/100), so
    t_low-high = RC ln((100 - low)/(100 - high)): 10-90 % = RC ln 9 = 2.197 RC (the
    single-pole step response of any circuit-theory text; e.g. a pull-up resistor charging a
    gate capacitance).
    """
    if not 0 <= low_pct < high_pct < 100:
        raise InputError(
            f"reference levels must satisfy 0 <= low < high < 100, got {low_pct}, {high_pct}"
        )
    rc = _check("r_ohm", r_ohm, positive=True) * _check("c_f", c_f, positive=True)
    return rc * math.log((100.0 - low_pct) / (100.0 - high_pct))


# --- Losses and temperature ----------------------------------------------------------------


def switching_loss(
    v_v: float, i_a: float, t_rise_s: float, t_fall_s: float, fsw_hz: float
) -> float:
    """Hard-switching loss (W): P_sw = 1/2 * V * I * (t_r + t_f) * f_sw.

    The triangular V-I overlap of a clamped inductive or resistive switching transition (ST
    A5972D datasheet, eq. 23; the same form in most buck-converter loss budgets).
    """
    return (
        0.5
        * _check("v_v", v_v)
        * _check("i_a", i_a)
        * (_check("t_rise_s", t_rise_s) + _check("t_fall_s", t_fall_s))
        * _check("fsw_hz", fsw_hz)
    )


def conduction_loss(i_a: float, r_ds_on_ohm: float, duty: float) -> float:
    """Conduction loss (W) of a switch carrying a flat current I for a fraction D: I^2 R D.

    Use R_DS(on) at the operating junction temperature (it rises ~1.5-2x from 25 to 125 °C).
    """
    d = _check("duty", duty)
    if d > 1:
        raise InputError(f"duty must be a fraction between 0 and 1, got {d:g}")
    return _check("i_a", i_a) ** 2 * _check("r_ds_on_ohm", r_ds_on_ohm) * d


def gate_drive_loss(qg_c: float, v_drv_v: float, fsw_hz: float) -> float:
    """Gate-drive power (W): P_g = Q_g * V_DRV * f_sw (TI TPS40200-Q1 datasheet).

    Dissipated in the driver and the gate resistors, not in the MOSFET's channel.
    """
    return _check("qg_c", qg_c) * _check("v_drv_v", v_drv_v) * _check("fsw_hz", fsw_hz)


def gate_drive_current(qg_c: float, fsw_hz: float) -> float:
    """Average gate-drive current (A): I = Q_g * f_sw (TI TPS40200-Q1: 9 nC x 300 kHz = 2.7 mA)."""
    return _check("qg_c", qg_c) * _check("fsw_hz", fsw_hz)


def junction_temperature(p_w: float, r_th_k_per_w: float, t_ref_c: float) -> float:
    """Temperature (°C) of a part dissipating P through a thermal resistance: T = T_ref + P R_th.

    With R_thJA and the ambient this is the junction (JEDEC JESD51 definitions; θJA is for
    comparing packages, not a design value); with R_thJC + R_thCS and the heatsink temperature,
    the junction from a heatsink reading; with R_thSA and the ambient, the heatsink itself.
    """
    if not math.isfinite(float(t_ref_c)):
        raise InputError(f"t_ref_c must be finite, got {t_ref_c!r}")
    return float(t_ref_c) + _check("p_w", p_w) * _check("r_th_k_per_w", r_th_k_per_w)


@dataclass(frozen=True)
class LossBudget:
    """Losses (W) and temperature (°C); None (with the reason in ``reasons``) where inputs
    were missing. ``p_mosfet_w`` = switching + conduction; the gate-drive power is dissipated
    in the driver and gate resistors, so it is not in the junction temperature."""

    p_switching_w: float | None
    p_conduction_w: float | None
    p_gate_w: float | None
    p_mosfet_w: float | None
    t_junction_c: float | None
    reasons: dict[str, str]

    def to_dict(self) -> dict:
        return asdict(self)


def estimate_losses(
    *,
    v_bus_v: float | None = None,
    i_load_a: float | None = None,
    fsw_hz: float | None = None,
    t_rise_s: float | None = None,
    t_fall_s: float | None = None,
    r_ds_on_ohm: float | None = None,
    duty: float | None = None,
    qg_c: float | None = None,
    v_drv_v: float | None = None,
    r_th_k_per_w: float | None = None,
    t_ambient_c: float | None = None,
) -> LossBudget:
    """Every loss and the junction temperature that the given inputs allow (see each function)."""
    reasons: dict[str, str] = {}

    def need(key: str, **inputs) -> bool:
        missing = [k for k, v in inputs.items() if v is None]
        if missing:
            reasons[key] = "needs " + ", ".join(missing)
        return not missing

    p_sw = p_cond = p_gate = p_fet = t_j = None
    if need("p_switching_w", v_bus_v=v_bus_v, i_load_a=i_load_a, t_rise_s=t_rise_s,
            t_fall_s=t_fall_s, fsw_hz=fsw_hz):  # fmt: skip
        p_sw = switching_loss(v_bus_v, i_load_a, t_rise_s, t_fall_s, fsw_hz)  # type: ignore[arg-type]
    if need("p_conduction_w", i_load_a=i_load_a, r_ds_on_ohm=r_ds_on_ohm, duty=duty):
        p_cond = conduction_loss(i_load_a, r_ds_on_ohm, duty)  # type: ignore[arg-type]
    if need("p_gate_w", qg_c=qg_c, v_drv_v=v_drv_v, fsw_hz=fsw_hz):
        p_gate = gate_drive_loss(qg_c, v_drv_v, fsw_hz)  # type: ignore[arg-type]
    if p_sw is not None and p_cond is not None:
        p_fet = p_sw + p_cond
    else:
        reasons["p_mosfet_w"] = "needs both the switching and the conduction loss"
    if p_fet is None:
        reasons["t_junction_c"] = "needs the MOSFET loss"
    elif need("t_junction_c", r_th_k_per_w=r_th_k_per_w, t_ambient_c=t_ambient_c):
        t_j = junction_temperature(p_fet, r_th_k_per_w, t_ambient_c)  # type: ignore[arg-type]
    return LossBudget(p_sw, p_cond, p_gate, p_fet, t_j, reasons)


# ------------------------------------------------------------------------------ half-bridge
def shortest_refresh_time(tau_s: float, full_v: float, droop_v: float, required_v: float) -> float:
    """Shortest low-side on-time (s) that keeps a bootstrap at or above ``required_v`` (V) in
    steady state: tau ln((V_f - V_req)/(V_f - V_req - D)), with ``tau_s`` the recharge time
    constant (R_BOOT + R_diode + R_DS(on),LS) C_BOOT (s), ``full_v`` V_f the level it charges
    towards (V) and ``droop_v`` D the level lost per period while the high side is on (V).

    From the RC charge law V(t) = V_f - (V_f - V_0) exp(-t/tau) (REFERENCES §3 "Refresh"): in
    steady state V_f - V_end = (V_f - V_end + D) exp(-t/tau), so V_f - V_end = D/(exp(t/tau) - 1),
    and the bottom V_end - D >= V_req gives the bound [computed]. ``math.inf`` when
    D >= V_f - V_req (no on-time is long enough); 0 without droop."""
    head = float(full_v) - float(required_v)
    d = max(float(droop_v), 0.0)
    if head <= d:
        return math.inf
    if d == 0.0:
        return 0.0
    return float(tau_s) * math.log(head / (head - d))


def gate_delay_on(v_drv_v: float, v_th_v: float, r_on_ohm: float, c_iss_f: float) -> float:
    """Time (s) for a gate driven to ``v_drv_v`` through ``r_on_ohm`` (driver source + gate
    resistors) to rise from 0 to its threshold ``v_th_v``: R C_iss ln(V_drv/(V_drv - V_th))
    (the RC charge of C_iss before the plateau; TI SLUA618's gate-charge picture [memory for
    the form])."""
    _check("threshold", v_th_v, positive=True)
    if not v_drv_v > v_th_v:
        raise InputError(f"drive voltage {v_drv_v!r} V must exceed the threshold {v_th_v!r} V")
    return r_on_ohm * c_iss_f * math.log(v_drv_v / (v_drv_v - v_th_v))


def gate_delay_off(
    v_drv_v: float, v_pl_v: float, v_th_v: float, q_gd_c: float, r_off_ohm: float, c_iss_f: float
) -> float:
    """Time (s) for a gate at ``v_drv_v`` pulled down through ``r_off_ohm`` (driver sink + gate
    resistors) to fall through its threshold ``v_th_v``: R C_iss ln(V_drv/V_pl) to the plateau,
    Q_gd R / V_pl across it, R C_iss ln(V_pl/V_th) down to the threshold (TI SLUA618: the
    turn-off gate current on the plateau is V_pl/R [read, REFERENCES §4]; the RC discharge
    either side [memory for the form])."""
    if not v_drv_v > v_pl_v > v_th_v > 0:
        raise InputError("need drive > plateau > threshold > 0 V for the turn-off delay")
    tau = r_off_ohm * c_iss_f
    return (
        tau * math.log(v_drv_v / v_pl_v)
        + q_gd_c * r_off_ohm / v_pl_v
        + tau * math.log(v_pl_v / v_th_v)
    )


def body_diode_loss(v_f_v: float, i_load_a: float, dead_times_s: float, fsw_hz: float) -> float:
    """Body-diode conduction loss (W) of the dead times: V_F I_load (t_dead,1 + t_dead,2) f_sw,
    ``dead_times_s`` the sum of both dead times of a period (REFERENCES §12 [read]: V_F I 2
    t_dead f_sw for two equal dead times)."""
    return float(v_f_v) * float(i_load_a) * max(float(dead_times_s), 0.0) * float(fsw_hz)


def lc_excursion(i_a: float, l_h: float, c_f: float) -> float:
    """Peak excursion (V) of an undamped L-C loop interrupting ``i_a``: I sqrt(L/C), the current
    step times the loop's characteristic impedance (the inductor's 1/2 L I^2 handed to the
    capacitor's 1/2 C V^2 [computed]); damping makes the real one smaller."""
    if not (l_h > 0 and c_f > 0):
        raise InputError("inductance and capacitance must be > 0")
    return abs(float(i_a)) * math.sqrt(float(l_h) / float(c_f))
