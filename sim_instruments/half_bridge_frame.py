"""One frame of the simulated half-bridge (a synchronous buck): a whole number of PWM periods
after which everything repeats, and the waveforms of its nets over that frame.

Each period (phase u in [0, T), u = 0 at the high side's turn-on command):

* The high-side gate (``vgs``) rises through R_on = driver source + external + internal gate
  resistance towards the bootstrap capacitor's voltage less the level shifter's charge: an RC
  rise to the Miller plateau V_pl, the plateau while Q_gd is delivered at (V_drv - V_pl) / R_on,
  then the last RC rise (TI SLUA618, REFERENCES §4 [memory for equation numbers]). It turns off at
  the duty's end (or earlier, when the capacitor falls to the driver's falling UVLO) through
  R_off: down to the plateau, the plateau for the Q_gd taken, then down to 0.
* The low-side gate (``vgs_low``, referred to ground) is commanded on one dead time after the
  high side's off command and off one dead time before the next period; it switches at zero
  volts (its body diode already carries the current), so it has no plateau: plain RC edges.
* The switch node: the body diode's -V_F while neither channel conducts (the dead times),
  -I R_DS(on) while the low side conducts, a ramp to the bus over the high side's turn-on plateau,
  the bus less I R_DS(on) while on, a ramp back to -V_F over its turn-off plateau. Both hard
  edges ring with the loop inductance and the node's capacitance (the ramp response of a
  second-order system, ``switch_node.Resonance``): the undershoot below ground and the overshoot
  above the bus.
* The high side's drain current (``i_switch``): it rises to the inductor current between its
  threshold and the plateau, follows the inductor's ripple (a triangle of (V_bus - V_out) t_on /
  L peak to peak) and falls after its turn-off plateau. Where both gates are above threshold
  (dead time too short) a shoot-through current flows from the bus through both channels,
  g_fs * min(V_gs,HS - V_th, V_gs,LS - V_th), limited by the weaker channel (plateau relation,
  REFERENCES §4): it shows on this net as the supply's current spike.
* The bootstrap capacitor (``vbs``) gives the level shifter's charge and the gate charge at each
  turn-on, the floating side's quiescent and leakage currents all the time, and is refreshed
  only while the low side conducts, towards V_drv - V_diode with tau = (R_boot + R_diode +
  R_DS(on)) C_boot (REFERENCES §3, §12). When it falls to the falling UVLO the driver lets the
  high side go and keeps it off until the capacitor is back above the rising UVLO: a pulse
  skipped is a period without a high-side pulse.

The periods are iterated from a full capacitor until the pattern repeats (the frame: K periods,
K = 1 when every period is the same); the frame is what the nets show, tiled.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from sim_instruments.half_bridge_params import HalfBridgeParameters
from sim_instruments.switch_node import Resonance

__all__ = ["Frame", "solve_frame", "hs_vgs", "ls_vgs", "vbs", "switch", "i_switch", "i_shoot"]

_MAX_FRAME = 64
_MAX_PERIODS = 800
_TRIP_GRID = 400


@dataclass(frozen=True)
class Frame:
    """The frame's scalars (s, V, A) and its per-period arrays (length ``k``)."""

    period: float
    k: int
    # --- the same every period ---
    t_on: float  # the PWM's high-side on-time command, s
    ls_a: float  # low-side on command, s
    ls_b: float  # low-side off command, s
    ls_peak: float  # low-side Vgs when its off command comes, V
    ls_on_th: float  # low side above threshold from, s
    ls_off_th: float  # low side below threshold again (may lie beyond T), s
    vdrv: float
    v_charge: float
    v_high: float  # switch node while the high side is on (mean), V
    v_f: float
    rds_on: float  # each switch's R_DS(on), ohm
    i_load: float
    i_ripple: float  # inductor ripple peak to peak, A
    tau_on: float
    tau_off: float
    tau_boot: float
    leak_a: float  # floating-side current besides the gate, A
    c_boot: float
    ciss: float
    qgd: float
    q_ls: float
    v_pl: float
    v_th: float
    r_off: float
    g_fs: float
    edge: Resonance
    # --- per period ---
    on: np.ndarray  # the high-side pulse runs
    v0: np.ndarray  # capacitor at the turn-on command, V
    vd: np.ndarray  # the driver's high level, V
    t1: np.ndarray  # plateau reached
    t2: np.ndarray  # plateau ends
    v_top: np.ndarray  # final-rise asymptote, V
    t_off: np.ndarray  # high-side off command (the PWM's, or the UVLO trip), s
    v_s: np.ndarray  # Vgs at the off command, V
    share: np.ndarray  # share of Q_gd delivered at the off command
    t3: np.ndarray  # turn-off reaches the plateau
    t4: np.ndarray  # turn-off plateau ends
    v_low: np.ndarray  # Vgs at the start of the last fall, V

    @property
    def length(self) -> float:
        """The frame's duration, s."""
        return self.k * self.period


def _ls_edges(hp: HalfBridgeParameters, t_on: float, vdrv: float) -> tuple[float, ...]:
    """The low side's commands, its peak Vgs and its threshold crossings (s, V)."""
    b = hp.base
    period, v_th = hp.period, b.mosfet_threshold
    tau_on, tau_off = b.gate_on_resistance * b.mosfet_ciss, b.gate_off_resistance * b.mosfet_ciss
    a, e = t_on + hp.dead_time, period - hp.dead_time
    if e <= a or vdrv <= v_th:
        return a, a, 0.0, math.inf, math.inf
    peak = vdrv * -math.expm1(-(e - a) / tau_on)
    if peak <= v_th:
        return a, e, peak, math.inf, math.inf
    on_th = a + tau_on * math.log(vdrv / (vdrv - v_th))
    off_th = e + tau_off * math.log(peak / v_th)
    return a, e, peak, on_th, off_th


def _rise(hp: HalfBridgeParameters, vd: float) -> tuple[float, float, float]:
    """Plateau start and end (s) and the final-rise asymptote (V) for a drive level ``vd``.

    The asymptote is where the capacitor and the gate meet once the whole gate charge is
    given: v_top = vd - (C_iss v_top + Q_gd) / C_boot (the C_iss V_pl terms cancel)."""
    b = hp.base
    r_on, ciss, c = b.gate_on_resistance, b.mosfet_ciss, b.bootstrap_capacitance
    v_pl = b.mosfet_plateau
    t1 = r_on * ciss * math.log(vd / (vd - v_pl))
    t2 = t1 + b.mosfet_qgd * r_on / (vd - v_pl)
    return t1, t2, (vd - b.mosfet_qgd / c) / (1.0 + ciss / c)


def _gate_on(u, vd, t1, t2, v_top, tau_on, v_pl, droop):
    """High-side Vgs (V) and the gate charge given (fraction of Q_gd) at turn-on phases u."""
    vgs = np.where(u < t1, vd * -np.expm1(-np.maximum(u, 0.0) / tau_on), v_pl)
    share = np.clip((u - t1) / np.maximum(t2 - t1, 1e-15), 0.0, 1.0)
    late = u >= t2
    vgs = np.where(
        late,
        v_top
        - (v_top - v_pl) * np.exp(-np.maximum(u - t2, 0.0) / tau_on)
        - droop * np.maximum(u - t2, 0.0),
        vgs,
    )
    return vgs, share


def _vbs_on(u, v0, vd, t1, t2, v_top, hp: HalfBridgeParameters, leak: float):
    """Capacitor voltage (V) while the high side turns on and is on."""
    b = hp.base
    c, ciss, v_pl = b.bootstrap_capacitance, b.mosfet_ciss, b.mosfet_plateau
    vgs, share = _gate_on(u, vd, t1, t2, v_top, b.gate_on_resistance * ciss, v_pl, leak / c)
    q = np.where(u < t1, ciss * vgs, ciss * np.minimum(vgs, v_pl) + b.mosfet_qgd * share)
    q = np.where(u >= t2, ciss * vgs + b.mosfet_qgd, q)
    return vd - q / c - leak * u / c


@dataclass
class _Period:
    on: bool
    v0: float
    vd: float
    t1: float
    t2: float
    v_top: float
    t_off: float
    v_end: float  # capacitor when the high side lets go


def _pulse(hp: HalfBridgeParameters, v0: float, t_on: float, leak: float) -> tuple[_Period, bool]:
    """One high-side pulse from a capacitor at ``v0``; True when the UVLO cut it short."""
    b = hp.base
    vd = v0 - b.level_shift_charge / b.bootstrap_capacitance
    if vd <= b.mosfet_plateau + 0.05:
        return _Period(False, v0, vd, 0.0, 0.0, 0.0, 0.0, v0), True
    t1, t2, v_top = _rise(hp, vd)
    u = np.linspace(0.0, t_on, _TRIP_GRID)
    v = _vbs_on(u, v0, vd, t1, t2, v_top, hp, leak)
    below = np.flatnonzero(v < b.driver_uvlo_falling)
    if below.size == 0:
        return _Period(True, v0, vd, t1, t2, v_top, t_on, float(v[-1])), False
    i = int(below[0])
    if i == 0:
        return _Period(False, v0, vd, t1, t2, v_top, 0.0, v0), True
    frac = (v[i - 1] - b.driver_uvlo_falling) / (v[i - 1] - v[i])
    t_trip = float(u[i - 1] + frac * (u[i] - u[i - 1]))
    return _Period(True, v0, vd, t1, t2, v_top, t_trip, b.driver_uvlo_falling), True


def _refresh(hp, v_end, t_off, ls_on, ls_off, v_charge, leak) -> float:
    """The capacitor at the end of the period (V): leakage, then the low side's refresh."""
    c, period = hp.base.bootstrap_capacitance, hp.period
    start, stop = min(ls_on, period), min(ls_off, period)
    v = v_end - leak * max(start - t_off, 0.0) / c
    if stop > start:
        v = v_charge - (v_charge - v) * math.exp(-(stop - start) / hp.bootstrap_tau)
    return max(v - leak * (period - max(stop, start)) / c, 0.0)


def _iterate(hp, t_on, ls_on, ls_off, v_charge, leak) -> list[_Period]:
    """Periods from a full capacitor until the pattern repeats; the last K of them."""
    history: list[_Period] = []
    v, enabled = v_charge, True
    if not min(ls_off, hp.period) > ls_on:
        # No low-side on-time at all: nothing refreshes the capacitor, which has long run
        # down by the time anyone looks (the high side stays off).
        return [_Period(False, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0)]
    for n in range(_MAX_PERIODS):
        if not enabled and v >= hp.driver_uvlo_rising:
            enabled = True
        if enabled:
            rec, tripped = _pulse(hp, v, t_on, leak)
            enabled = not tripped
        else:
            rec = _Period(False, v, v, 0.0, 0.0, 0.0, 0.0, v)
        history.append(rec)
        v = _refresh(hp, rec.v_end, rec.t_off, ls_on, ls_off, v_charge, leak)
        if n >= 8:
            k = _repeat(history, v)
            if k:
                return history[-k:]
    return history[-_MAX_FRAME:]


def _repeat(history: list[_Period], v_next: float) -> int:
    """The shortest K whose last K periods lead back to the state K periods ago (0: none)."""
    for k in range(1, min(_MAX_FRAME, len(history) // 2) + 1):
        first = history[-k]
        if abs(first.v0 - v_next) > 1e-9:
            continue
        if all(history[-i].on == history[-i - k].on for i in range(1, k + 1)):
            return k
    return 0


def solve_frame(hp: HalfBridgeParameters, v_bus: float, duty: float, vdrv: float) -> Frame:
    """The repeating frame at bus ``v_bus`` (V), ``duty`` (fraction) and gate-drive rail
    ``vdrv`` (V)."""
    b = hp.base
    period = hp.period
    t_on = min(max(duty * period, 0.0), period - hp.min_off_time)
    a, e, peak, ls_on, ls_off = _ls_edges(hp, t_on, vdrv)
    v_charge = vdrv - b.bootstrap_diode_drop
    leak = b.floating_leakage
    periods = _iterate(hp, t_on, ls_on, ls_off, v_charge, leak)
    return _assemble(hp, periods, v_bus, duty, vdrv, t_on, (a, e, peak, ls_on, ls_off))


def _assemble(hp, periods, v_bus, duty, vdrv, t_on, ls) -> Frame:
    b = hp.base
    arr = {name: np.array([getattr(p, name) for p in periods]) for name in
           ("on", "v0", "vd", "t1", "t2", "v_top", "t_off")}  # fmt: skip
    tau_on, tau_off = b.gate_on_resistance * b.mosfet_ciss, b.gate_off_resistance * b.mosfet_ciss
    v_pl, droop = b.mosfet_plateau, b.floating_leakage / b.bootstrap_capacitance
    n = len(periods)
    v_s, share = np.zeros(n), np.zeros(n)
    for j, p in enumerate(periods):
        if p.on:
            vg, sh = _gate_on(np.array([p.t_off]), p.vd, p.t1, p.t2, p.v_top, tau_on, v_pl, droop)
            v_s[j], share[j] = float(vg[0]), float(sh[0])
    t_off = arr["t_off"]
    safe = np.maximum(v_s, 1e-12)
    t3 = np.where(v_s > v_pl, t_off + tau_off * np.log(np.maximum(safe / v_pl, 1.0)), t_off)
    t4 = t3 + share * b.mosfet_qgd * b.gate_off_resistance / v_pl
    current = hp.load_current
    a, e, peak, ls_on, ls_off = ls
    ripple = (1.0 - duty) * duty * v_bus * hp.period / b.load_inductance
    return Frame(
        period=hp.period, k=n, t_on=t_on, ls_a=a, ls_b=e, ls_peak=peak, ls_on_th=ls_on,
        ls_off_th=ls_off, vdrv=vdrv, v_charge=vdrv - b.bootstrap_diode_drop,
        v_high=v_bus - current * b.mosfet_rds_on, v_f=hp.body_diode_drop, rds_on=b.mosfet_rds_on, i_load=current,
        i_ripple=ripple, tau_on=tau_on, tau_off=tau_off, tau_boot=hp.bootstrap_tau,
        leak_a=b.floating_leakage, c_boot=b.bootstrap_capacitance, ciss=b.mosfet_ciss,
        qgd=b.mosfet_qgd, q_ls=b.level_shift_charge, v_pl=v_pl, v_th=b.mosfet_threshold,
        r_off=b.gate_off_resistance, g_fs=hp.transconductance,
        edge=Resonance.of(b.stray_inductance, b.switch_node_capacitance, hp.loop_damping),
        on=arr["on"].astype(bool), v0=arr["v0"], vd=arr["vd"], t1=arr["t1"], t2=arr["t2"],
        v_top=arr["v_top"], t_off=t_off, v_s=v_s, share=share, t3=t3, t4=t4,
        v_low=np.minimum(v_s, v_pl),
    )  # fmt: skip


# ----------------------------------------------------------------------------- the nets
def _split(f: Frame, ph: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Period index and phase within the period (s) of frame phases ``ph``."""
    k = np.minimum((ph // f.period).astype(np.int64), f.k - 1)
    return k, ph - k * f.period


def hs_vgs(f: Frame, ph: np.ndarray) -> np.ndarray:
    """High-side gate-source voltage (V) at frame phases ``ph`` (s)."""
    k, u = _split(f, ph)
    on, t_off = f.on[k], f.t_off[k]
    droop = f.leak_a / f.c_boot
    rising, _ = _gate_on(u, f.vd[k], f.t1[k], f.t2[k], f.v_top[k], f.tau_on, f.v_pl, droop)
    t3, t4, v_s, v_low = f.t3[k], f.t4[k], f.v_s[k], f.v_low[k]
    fall = np.where(u < t3, v_s * np.exp(-np.maximum(u - t_off, 0.0) / f.tau_off), v_low)
    fall = np.where(u >= t4, v_low * np.exp(-np.maximum(u - t4, 0.0) / f.tau_off), fall)
    return np.where(on, np.where(u < t_off, rising, fall), 0.0)


def ls_vgs(f: Frame, ph: np.ndarray) -> np.ndarray:
    """Low-side gate-source voltage (V, referred to ground) at frame phases ``ph`` (s)."""
    u = np.mod(ph, f.period)
    if f.ls_b <= f.ls_a:
        return np.zeros_like(u)
    since_off = np.where(u >= f.ls_b, u - f.ls_b, u + f.period - f.ls_b)
    out = f.ls_peak * np.exp(-since_off / f.tau_off)
    inside = (u >= f.ls_a) & (u < f.ls_b)
    out[inside] = f.vdrv * -np.expm1(-(u[inside] - f.ls_a) / f.tau_on)
    return out


def i_shoot(f: Frame, ph: np.ndarray) -> np.ndarray:
    """Shoot-through current (A) while both gates are above threshold: the weaker channel's
    g_fs (V_gs - V_th)."""
    over = np.minimum(hs_vgs(f, ph), ls_vgs(f, ph)) - f.v_th
    return f.g_fs * np.maximum(over, 0.0)


def _inductor(f: Frame, u: np.ndarray) -> np.ndarray:
    """Inductor current (A) over the period: rising while the high side is on."""
    rise = f.i_load - 0.5 * f.i_ripple + f.i_ripple * u / max(f.t_on, 1e-15)
    fall = f.i_load + 0.5 * f.i_ripple - f.i_ripple * (u - f.t_on) / max(f.period - f.t_on, 1e-15)
    return np.where(u < f.t_on, rise, fall)


def i_switch(f: Frame, ph: np.ndarray, shoot: bool = True) -> np.ndarray:
    """High-side drain current (A) at frame phases ``ph``; ``shoot`` adds the shoot-through."""
    k, u = _split(f, ph)
    t1, t4, on = f.t1[k], f.t4[k], f.on[k] & (f.t_off[k] >= f.t1[k])
    vd = np.maximum(f.vd[k], f.v_th * 1.0001)
    t_th = f.tau_on * np.log(vd / (vd - f.v_th))
    t5 = t4 + f.tau_off * np.log(np.maximum(f.v_low[k], f.v_th) / f.v_th)
    il = _inductor(f, u)
    out = np.where((u >= t1) & (u < t4), il, 0.0)
    ramp_up = (u >= t_th) & (u < t1)
    out = np.where(ramp_up, _inductor(f, t1) * (u - t_th) / np.maximum(t1 - t_th, 1e-15), out)
    ramp_down = (u >= t4) & (u < t5)
    out = np.where(ramp_down, _inductor(f, t4) * (t5 - u) / np.maximum(t5 - t4, 1e-15), out)
    out = np.where(on, out, 0.0)
    return out + i_shoot(f, ph) if shoot else out


def _ls_conducts(f: Frame, u: np.ndarray) -> np.ndarray:
    inside = (u >= f.ls_on_th) & (u < f.ls_off_th)
    if f.ls_off_th > f.period:
        inside |= u < f.ls_off_th - f.period
    return inside


def switch(
    f: Frame, ph: np.ndarray, bus_ripple: np.ndarray | None = None, ringing: bool = True
) -> np.ndarray:
    """Switch node to ground (V) at frame phases ``ph``; ``bus_ripple`` (V) rides on the high
    level; ``ringing`` adds the loop's ringing at the hard edges."""
    k, u = _split(f, ph)
    low = np.where(_ls_conducts(f, u), -_inductor(f, u) * f.rds_on, -f.v_f)
    on = f.on[k] & (f.t_off[k] >= f.t1[k])
    t1, t2, t3, t4, share = f.t1[k], f.t2[k], f.t3[k], f.t4[k], f.share[k]
    rise = np.clip((u - t1) / np.maximum(t2 - t1, 1e-15), 0.0, share)
    fall = share * (1.0 - np.clip((u - t3) / np.maximum(t4 - t3, 1e-15), 0.0, 1.0))
    s = np.where(on & (u >= t1), np.where(u < t3, rise, fall), 0.0)
    high = f.v_high + (bus_ripple if bus_ripple is not None else 0.0)
    out = np.where(s > 0.0, (1.0 - s) * -f.v_f + s * high, low)
    if ringing:
        swing = f.v_high + f.v_f
        slope_r = swing / np.maximum(t2 - t1, 1e-15)
        _ring(out, u, on, t1, share * (t2 - t1), slope_r, f.edge)
        slope_f = -swing * share / np.maximum(t4 - t3, 1e-15)
        _ring(out, u, on & (t4 > t3), t3, t4 - t3, slope_f, f.edge)
    return out


def _ring(out, u, on, start, duration, slope, res: Resonance) -> None:
    """Add the ringing of a ramp of ``slope`` (V/s) lasting ``duration`` from ``start`` (per
    sample arrays): r(x) - x of the second-order ramp response, minus the same from the ramp's
    end (``Resonance.ramp_error``)."""
    x = u - start
    near = np.flatnonzero(on & (x >= 0.0) & (x < duration + res.decay_s))
    if near.size == 0:
        return
    xs, dur = x[near], np.broadcast_to(duration, u.shape)[near]
    err = res.ramp_error(xs)
    after = xs >= dur
    if after.any():
        err[after] -= res.ramp_error(xs[after] - dur[after])
    out[near] += np.broadcast_to(slope, u.shape)[near] * err


def vbs(f: Frame, ph: np.ndarray) -> np.ndarray:
    """Bootstrap capacitor voltage VB - VS (V) at frame phases ``ph``."""
    k, u = _split(f, ph)
    c, leak = f.c_boot, f.leak_a
    droop = leak / c
    vgs, share = _gate_on(u, f.vd[k], f.t1[k], f.t2[k], f.v_top[k], f.tau_on, f.v_pl, droop)
    q = np.where(u < f.t1[k], f.ciss * vgs, f.ciss * np.minimum(vgs, f.v_pl) + f.qgd * share)
    q = np.where(u >= f.t2[k], f.ciss * vgs + f.qgd, q)
    on_now = f.on[k] & (u < f.t_off[k])
    v_on = f.vd[k] - q / c - droop * u
    # the capacitor when the high side lets go (the same formula at t_off)
    t_off = f.t_off[k]
    vg_off, sh_off = _gate_on(t_off, f.vd[k], f.t1[k], f.t2[k], f.v_top[k], f.tau_on, f.v_pl, droop)
    q_off = np.where(t_off < f.t1[k], f.ciss * vg_off,
                     f.ciss * np.minimum(vg_off, f.v_pl) + f.qgd * sh_off)  # fmt: skip
    q_off = np.where(t_off >= f.t2[k], f.ciss * vg_off + f.qgd, q_off)
    v_end = np.where(f.on[k], f.vd[k] - q_off / c - droop * t_off, f.v0[k])
    start, stop = min(f.ls_on_th, f.period), min(f.ls_off_th, f.period)
    v_ls = v_end - droop * np.maximum(start - t_off, 0.0)
    held = v_end - droop * np.maximum(u - t_off, 0.0)
    charging = f.v_charge - (f.v_charge - v_ls) * np.exp(-np.maximum(u - start, 0.0) / f.tau_boot)
    after = f.v_charge - (f.v_charge - v_ls) * math.exp(-max(stop - start, 0.0) / f.tau_boot)
    after = after - droop * np.maximum(u - stop, 0.0)
    out = np.where(u < start, held, np.where(u < stop, charging, after))
    return np.maximum(np.where(on_now, v_on, out), 0.0)
