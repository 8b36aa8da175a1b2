"""Half-bridge test waveforms with known truth: two gates with known dead times (and overlaps),
a supply current with shoot-through spikes, a ringing switch node, a bootstrap voltage that
droops and recovers, and a v.i crossover. Deterministic (seeded); times in s, volts in V.

Every waveform carries what a scope adds (noise, 8-bit quantisation: ``analysis_synth.scope``)
and what a real bench adds (ringing, Miller bumps, switching glitches)."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from analysis_synth import damped_ring, scope


@dataclass(frozen=True)
class GatePair:
    """Two gate traces and the truth: crossing instants of ``threshold_v`` for each turn-on and
    turn-off, the dead times of each commutation (signed, s) and the overlaps (start, length)."""

    high: np.ndarray
    low: np.ndarray
    current: np.ndarray
    dt: float
    threshold_v: float
    dead_hl: list[float]
    dead_lh: list[float]
    overlaps: list[tuple[float, float]]
    spike_a: float


def _gate(n: int, dt: float, pulses, v_drv: float, tau_on: float, tau_off: float):
    """A gate driven through an RC: each (a, b) pulse rises from 0 at a with tau_on and decays
    from wherever it got to at b with tau_off. Returns the trace and each pulse's exact
    crossing instants of a level (a function of the level)."""
    t = np.arange(n) * dt
    y = np.zeros(n)
    tops = []
    for a, b in pulses:
        v_b = v_drv * (1.0 - math.exp(-(b - a) / tau_on))
        on = (t >= a) & (t < b)
        y[on] += v_drv * (1.0 - np.exp(-(t[on] - a) / tau_on))
        off = t >= b
        y[off] += v_b * np.exp(-(t[off] - b) / tau_off)
        tops.append(v_b)

    def crossings(level: float):
        rise = [a + tau_on * math.log(v_drv / (v_drv - level)) for a, _ in pulses]
        fall = [
            b + tau_off * math.log(v_b / level) for (_, b), v_b in zip(pulses, tops, strict=True)
        ]
        return rise, fall

    return y, crossings


def gate_pair(
    *,
    dt: float = 2e-9,
    periods: int = 10,
    period_s: float = 10e-6,
    duty: float = 0.45,
    dead_hl_s: float = 100e-9,
    dead_lh_s: float = 70e-9,
    overlap_period: int | None = None,
    overlap_lead_s: float = 60e-9,
    spike_a: float = 18.0,
    threshold_v: float = 3.0,
    phase_s: float = 1.3e-6,
    seed: int = 0,
    noise_v: float = 0.05,
) -> GatePair:
    """A half-bridge's gates at ``1/period_s`` with commanded dead times (between the drive
    commands; the truth is computed at the threshold crossings). In ``overlap_period`` the low
    side is commanded on ``overlap_lead_s`` before the high side is commanded off: an overlap.
    The off gate carries a Miller bump (1.2 V, under threshold) at each of the other side's
    turn-ons, each gate rings after turning on; the supply current has a 1.5 A recovery spike
    at every commutation and ``spike_a`` at the end of each overlap."""
    rng = np.random.default_rng(seed)
    n = int(round((periods * period_s + 2 * phase_s) / dt))
    tau_on, tau_off, v_drv = 15e-9, 10e-9, 12.0
    hs, ls = [], []
    for k in range(periods):
        a = phase_s + k * period_s + rng.uniform(0, dt)  # sub-sample phase varies
        b = a + duty * period_s
        c = b + dead_hl_s if k != overlap_period else b - overlap_lead_s
        d = a + period_s - dead_lh_s
        hs.append((a, b))
        ls.append((c, d))
    high, hx = _gate(n, dt, hs, v_drv, tau_on, tau_off)
    low, lx = _gate(n, dt, ls, v_drv, tau_on, tau_off)
    h_rise, h_fall = hx(threshold_v)
    l_rise, l_fall = lx(threshold_v)
    dead_hl, dead_lh, overlaps = [], [], []
    for k in range(periods):
        dead_hl.append(l_rise[k] - h_fall[k])
        if dead_hl[-1] < 0:
            overlaps.append((l_rise[k], -dead_hl[-1]))
        if k + 1 < periods:
            dead_lh.append(h_rise[k + 1] - l_fall[k])
    for a, _ in hs:  # Miller bumps on the off gate and ringing on the one turning on
        low += 1.2 * np.exp(-0.5 * ((np.arange(n) * dt - a - 20e-9) / 8e-9) ** 2)
        high += damped_ring(n, dt, a + 40e-9, 0.8, 60e6, 20e-9)
    for c, _ in ls:
        high += 1.2 * np.exp(-0.5 * ((np.arange(n) * dt - c - 20e-9) / 8e-9) ** 2)
        low += damped_ring(n, dt, c + 40e-9, 0.8, 60e6, 20e-9)
    t = np.arange(n) * dt
    current = 0.3 + 0.05 * np.sin(2 * np.pi * t / period_s)
    for x in [*h_rise, *l_rise]:
        current += 1.5 * np.exp(-0.5 * ((t - x - 30e-9) / 10e-9) ** 2)
    for start, length in overlaps:
        end = start + length
        ramp = np.clip((t - start) / length, 0.0, 1.0) * (t < end)
        current += spike_a * ramp + spike_a * np.exp(-np.maximum(t - end, 0.0) / 20e-9) * (t >= end)
    return GatePair(
        high=scope(high, noise_v=noise_v, seed=seed + 1),
        low=scope(low, noise_v=noise_v, seed=seed + 2),
        current=scope(current, noise_v=0.05, lo=-5.0, hi=35.0, seed=seed + 3),
        dt=dt,
        threshold_v=threshold_v,
        dead_hl=dead_hl,
        dead_lh=dead_lh,
        overlaps=overlaps,
        spike_a=spike_a,
    )


@dataclass(frozen=True)
class SwitchNode:
    """A switch-node record and its truth: the damped ring's frequency f_d and damping ratio,
    the linear edges' slopes (V/s), the exact lowest and highest voltages of the clean model
    (found on a 50x finer grid around each ring)."""

    y: np.ndarray
    dt: float
    bus_v: float
    ring_hz: float
    zeta: float
    dv_dt_rise: float
    dv_dt_fall: float
    min_v: float
    max_v: float


def switch_node(
    *,
    dt: float = 0.5e-9,
    periods: int = 3,
    period_s: float = 4e-6,
    duty: float = 0.4,
    bus_v: float = 48.0,
    rise_s: float = 8e-9,
    fall_s: float = 6e-9,
    ring_hz: float = 80e6,
    zeta: float = 0.08,
    ring_rise_v: float = 10.0,
    ring_fall_v: float = 14.0,
    second_ring_v: float = 0.0,
    noise_v: float = 0.3,
    seed: int = 0,
) -> SwitchNode:
    """A half-bridge switch node: linear edges (0 to ``bus_v`` in ``rise_s``, back in
    ``fall_s``), each followed by the free response of an L-C loop, A exp(-alpha s)
    sin(w_d s) with w_d = 2 pi ``ring_hz`` and alpha = zeta w_n (rising: above the bus; falling:
    below ground). ``second_ring_v`` adds a second loop at 2.3x the frequency (a ring that is
    not one damped sinusoid). Scope: 8-bit over -20 V..76 V, ``noise_v`` of noise."""
    rng = np.random.default_rng(seed)
    wd = 2 * math.pi * ring_hz
    wn = wd / math.sqrt(1 - zeta**2)
    alpha = zeta * wn
    edges = []
    for k in range(periods):
        a = 0.4e-6 + k * period_s + rng.uniform(0, dt)
        edges.append((a, a + duty * period_s + rng.uniform(0, dt)))

    def model(t: np.ndarray) -> np.ndarray:
        y = np.zeros_like(t)
        for a, b in edges:
            y += bus_v * np.clip((t - a) / rise_s, 0, 1) - bus_v * np.clip((t - b) / fall_s, 0, 1)
            for start, amp in ((a + rise_s, ring_rise_v), (b + fall_s, -ring_fall_v)):
                s = np.maximum(t - start, 0.0)
                ring = np.exp(-alpha * s) * np.sin(wd * s)
                ring += (
                    second_ring_v / max(abs(amp), 1e-9) * np.exp(-alpha * s) * np.sin(2.3 * wd * s)
                )
                y += np.where(t >= start, amp * ring, 0.0)
        return y

    n = int(round((periods * period_s + 0.8e-6) / dt))
    t = np.arange(n) * dt
    fine = np.concatenate([np.linspace(x, x + 40e-9, 4001) for ab in edges for x in ab])
    dense = model(fine)
    return SwitchNode(
        y=scope(model(t), noise_v=noise_v, lo=-20.0, hi=76.0, seed=seed + 11),
        dt=dt,
        bus_v=bus_v,
        ring_hz=ring_hz,
        zeta=zeta,
        dv_dt_rise=bus_v / rise_s,
        dv_dt_fall=-bus_v / fall_s,
        min_v=float(dense.min()),
        max_v=float(dense.max()),
    )


@dataclass(frozen=True)
class Bootstrap:
    """A bootstrap voltage (VB - VS) with both gates, and the truth: the recharge time
    constant and full level, the level at the end of each low-side on-time (at its gate's
    threshold crossings) and at each high-side turn-off (the droop's bottom)."""

    vbs: np.ndarray
    high: np.ndarray
    low: np.ndarray
    dt: float
    threshold_v: float
    tau_s: float
    full_v: float
    ends: list[float]
    bottoms: list[float]
    droop_v: float
    on_time_s: float


def bootstrap(
    *,
    dt: float = 10e-9,
    periods: int = 12,
    period_s: float = 10e-6,
    ls_on_s: float = 0.85e-6,
    dead_s: float = 100e-9,
    tau_s: float = 0.5e-6,
    full_v: float = 11.3,
    droop_rate_v_per_s: float = 0.2e6,
    noise_v: float = 0.04,
    seed: int = 0,
) -> Bootstrap:
    """A half-bridge at the largest duty: the high side on for period - ls_on - 2 dead, during
    which the bootstrap droops linearly (a constant current from C: 20 mA from 100 nF is
    0.2 V/us), flat in the dead times, and an RC recharge towards ``full_v`` with ``tau_s``
    while the low-side gate is above threshold (V = V_f - (V_f - V_0) exp(-s/tau)). Glitches
    (0.4 V rings) at each switching; 8-bit codes over 0..16 V and ``noise_v`` of noise."""
    rng = np.random.default_rng(seed)
    t_hs = period_s - ls_on_s - 2 * dead_s
    n = int(round((periods * period_s + 1e-6) / dt))
    hs, ls = [], []
    for k in range(periods):
        a = 0.5e-6 + k * period_s + rng.uniform(0, dt)
        hs.append((a, a + t_hs))
        ls.append((a + t_hs + dead_s, a + t_hs + dead_s + ls_on_s))
    high, hx = _gate(n, dt, hs, 12.0, 15e-9, 10e-9)
    low, lx = _gate(n, dt, ls, 12.0, 15e-9, 10e-9)
    thr = 3.0
    h_rise, h_fall = hx(thr)
    l_rise, l_fall = lx(thr)
    t = np.arange(n) * dt
    v = np.empty(n)
    level, ends, bottoms = full_v, [], []
    # Walk the events in order: droop while the high side is on, recharge while the low is.
    events = sorted([(x, "h+") for x in h_rise] + [(x, "h-") for x in h_fall]
                    + [(x, "l+") for x in l_rise] + [(x, "l-") for x in l_fall])  # fmt: skip
    prev_t, mode = 0.0, "flat"
    for when, what in [*events, (t[-1] + dt, "end")]:
        seg = (t >= prev_t) & (t < when)
        s = t[seg] - prev_t
        if mode == "droop":
            v[seg] = level - droop_rate_v_per_s * s
            level -= droop_rate_v_per_s * (when - prev_t)
        elif mode == "charge":
            v[seg] = full_v - (full_v - level) * np.exp(-s / tau_s)
            level = full_v - (full_v - level) * math.exp(-(when - prev_t) / tau_s)
        else:
            v[seg] = level
        if what == "h-":
            bottoms.append(level)
        if what == "l-":
            ends.append(level)
        mode = {"h+": "droop", "l+": "charge"}.get(what, "flat")
        prev_t = when
    for x in [*h_rise, *h_fall, *l_rise, *l_fall]:
        v += damped_ring(n, dt, x, 0.4, 40e6, 15e-9)
    return Bootstrap(
        vbs=scope(v, noise_v=noise_v, lo=0.0, hi=16.0, seed=seed + 21),
        high=scope(high, noise_v=0.05, seed=seed + 22),
        low=scope(low, noise_v=0.05, seed=seed + 23),
        dt=dt,
        threshold_v=thr,
        tau_s=tau_s,
        full_v=full_v,
        ends=ends,
        bottoms=bottoms,
        droop_v=droop_rate_v_per_s * (h_fall[0] - h_rise[0]),
        on_time_s=l_fall[0] - l_rise[0],
    )


def crossover(
    *,
    dt: float = 0.5e-9,
    periods: int = 3,
    period_s: float = 2e-6,
    bus_v: float = 48.0,
    load_a: float = 10.0,
    t_ri: float = 20e-9,
    t_fv: float = 15e-9,
    t_rv: float = 18e-9,
    t_fi: float = 25e-9,
    skew_s: float = 7.3e-9,
    resistive: bool = False,
    seed: int = 0,
):
    """(v, i, dt) of a hard-switched clamped-inductive crossover (the current rises fully while
    the voltage stays at the bus, then the voltage falls; at turn-off the reverse), the current
    channel reading ``skew_s`` late. ``resistive``: a resistive step instead (v = R i, 10 ns
    linear ramps), for the deskew. A 3 V ring follows each voltage fall and a 1 A ring each
    current fall (outside the 10 % windows); noise 0.2 V / 0.05 A and 8-bit codes."""
    rng = np.random.default_rng(seed)
    n = int(round((periods * period_s + 0.4e-6) / dt))
    t = np.arange(n) * dt
    v = np.full(n, 0.0 if resistive else bus_v)
    i = np.zeros(n)
    ic = np.zeros(n)  # the current at the skewed instants
    for k in range(periods):
        a = 0.2e-6 + k * period_s + rng.uniform(0, dt)
        b = a + 0.5 * period_s
        if resistive:
            v += bus_v * (np.clip((t - a) / 10e-9, 0, 1) - np.clip((t - b) / 10e-9, 0, 1))
            for arr, tt in ((i, t), (ic, t - skew_s)):
                arr += load_a * (np.clip((tt - a) / 10e-9, 0, 1) - np.clip((tt - b) / 10e-9, 0, 1))
            continue
        v -= bus_v * (np.clip((t - a - t_ri) / t_fv, 0, 1) - np.clip((t - b) / t_rv, 0, 1))
        v += damped_ring(n, dt, a + t_ri + t_fv + 2e-9, -3.0, 90e6, 15e-9)
        for arr, tt in ((i, t), (ic, t - skew_s)):
            arr += load_a * (np.clip((tt - a) / t_ri, 0, 1) - np.clip((tt - b - t_rv) / t_fi, 0, 1))
            arr += damped_ring(n, dt, b + t_rv + t_fi + 2e-9 + (t[0] - tt[0]), -1.0, 70e6, 15e-9)
    v_meas = scope(v, noise_v=0.2, lo=-10.0, hi=70.0, seed=seed + 31)
    i_meas = scope(ic, noise_v=0.05, lo=-5.0, hi=15.0, seed=seed + 32)
    return v_meas, i_meas, dt
